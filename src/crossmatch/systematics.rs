//! Astrometric systematics: the median offset of each catalog against an
//! astrometric reference catalog, measured from confident matches, and an
//! optional correction followed by a new match.
//!
//! Recipe (common practice): match with a generous fixed radius (the largest
//! tolerance); keep the pairs that are unique both ways (no other candidate of
//! either source in the other catalog); take the tangent-plane offsets
//! (Δα cos δ, Δδ) of each catalog's source from the reference source, at a common
//! epoch; the offset is their median and the scatter 1.4826 × MAD
//! ([`super::offsets`]). With correction, a catalog with at least [`MIN_PAIRS`]
//! pairs whose offset exceeds both a tenth of its scatter and three standard
//! errors is moved by minus the offset, and the offsets are measured again (at
//! most [`MAX_PASSES`] times); the final match then runs on the corrected positions.
//!
//! The same pairs give each catalog's systematic floor ([`super::floors`]): the
//! per-axis σ_sys that brings the median normalised separation to the Rayleigh
//! median, from the stated errors without any configured floor. A catalog
//! whose settings ask for it ([`CatalogSettings::floor_from_data`]) gets the
//! measured floor in the final match ([`floors_in_force`]); a fixed floor is
//! kept, and the measurement only reported beside it.

use serde::Serialize;

use super::bayes::circularized_sigma_arcsec;
use super::candidates::find_candidates;
use super::config::{CatalogSettings, MatchConfig, Tolerance};
use super::engine::{MatchResult, run_match_with_area};
use super::floors::{FloorEstimate, estimate_floor};
use super::input::SourceTable;
use super::offsets::{OffsetEstimate, offset_standard_error, robust_offset};
use super::prepare::Sources;
use crate::error::Result;
use crate::sky::propagation::propagate_deg;
use crate::sky::separation::tangent_offsets_arcsec;

/// Fewest unique pairs for a catalog's offset to be corrected.
pub const MIN_PAIRS: usize = 3;
/// Most match passes with correction.
pub const MAX_PASSES: usize = 5;
/// Fewest unique pairs for a measured floor to be used in the match. The
/// sample median of the normalised separations has a relative standard error
/// of 0.7214 / √N (standard asymptotics of sample quantiles for the Rayleigh
/// law), 13 % at 30 pairs; fewer pairs leave the floor mostly noise. The
/// threshold is a judgement (common practice is "a few tens of pairs").
pub const MIN_FLOOR_PAIRS: usize = 30;

/// Per catalog (indexed by catalog, `None` for the reference and for catalogs
/// without pairs): the offsets and the systematic floors of [`measure_offsets`].
pub type Measured = (Vec<Option<OffsetEstimate>>, Vec<Option<FloorEstimate>>);

/// The offset of one catalog against the reference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CatalogOffset {
    /// Catalog index.
    pub catalog: usize,
    /// Offset measured before any correction, with its scatter.
    pub initial: Option<OffsetEstimate>,
    /// Offset left after the corrections (equal to `initial` without correction).
    pub residual: Option<OffsetEstimate>,
    /// Total correction applied to the catalog's positions, arcsec (east, north).
    pub applied_arcsec: (f64, f64),
    /// Systematic floor measured from the pairs of the last measurement (after
    /// the corrections), against the stated errors without configured floors.
    pub floor: Option<FloorEstimate>,
}

/// Measures each catalog's offset from `reference`: tangent-plane offsets (at a
/// common epoch) of pairs found within `config`'s largest tolerance as a fixed
/// radius that are unique both ways (the reference source has no other candidate
/// in that catalog, and the catalog's source none in the reference).
///
/// From the same pairs it also estimates each catalog's systematic floor
/// ([`estimate_floor`]): separations are taken after removing the median offset
/// just measured (the offset is reported on its own), and each pair's stated
/// σ is `sqrt(σ_ref² + σ_cat²)` with σ the circularized error ellipse
/// ([`circularized_sigma_arcsec`]) without the configured `systematic_arcsec`.
/// Returns the offsets and the floors, one per catalog (`None` for the reference).
///
/// # Errors
/// As [`super::engine::run_match`].
pub fn measure_offsets(
    tables: &[SourceTable],
    config: &MatchConfig,
    reference: usize,
) -> Result<Measured> {
    Ok(offset_pairs(tables, config, reference, &|_| true)?.measure(reference))
}

/// The unique pairs against the reference that [`measure_offsets`] measures,
/// per catalog: tangent-plane offsets (east, north) and stated σ, arcsec.
///
/// Every statistic taken from them is a median, so pairs gathered region by
/// region and appended ([`OffsetPairs::append`]) give the same measurement as
/// the pairs of the whole input at once, whatever the order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct OffsetPairs {
    east: Vec<Vec<f64>>,
    north: Vec<Vec<f64>>,
    stated: Vec<Vec<f64>>,
}

impl OffsetPairs {
    /// No pairs, for `n` catalogs.
    pub fn new(n: usize) -> Self {
        OffsetPairs {
            east: vec![Vec::new(); n],
            north: vec![Vec::new(); n],
            stated: vec![Vec::new(); n],
        }
    }

    /// Adds `other`'s pairs (of the same catalogs).
    pub fn append(&mut self, mut other: OffsetPairs) {
        for c in 0..self.east.len() {
            self.east[c].append(&mut other.east[c]);
            self.north[c].append(&mut other.north[c]);
            self.stated[c].append(&mut other.stated[c]);
        }
    }

    /// The offsets and floors of these pairs (see [`measure_offsets`]).
    pub fn measure(&self, reference: usize) -> Measured {
        let n = self.east.len();
        let offsets: Vec<Option<OffsetEstimate>> = (0..n)
            .map(|c| {
                if c == reference {
                    None
                } else {
                    robust_offset(&self.east[c], &self.north[c])
                }
            })
            .collect();
        let floors = (0..n)
            .map(|c| {
                let m = offsets[c]?;
                let sep: Vec<f64> = self.east[c]
                    .iter()
                    .zip(&self.north[c])
                    .map(|(e, no)| (e - m.dra_cosdec_arcsec).hypot(no - m.ddec_arcsec))
                    .collect();
                // A pair without a finite, positive stated error cannot be normalised.
                let (sep, sigma): (Vec<f64>, Vec<f64>) = sep
                    .into_iter()
                    .zip(self.stated[c].iter().copied())
                    .filter(|(_, s)| s.is_finite() && *s > 0.0)
                    .unzip();
                estimate_floor(&sep, &sigma)
            })
            .collect();
        (offsets, floors)
    }
}

/// The pairs [`measure_offsets`] uses among `tables`, keeping only those whose
/// reference source (its row in the reference table) `owns` says belong here:
/// a build that gathers them region by region owns each reference source in
/// exactly one region, and loads around it every source within twice the
/// largest tolerance, so that both uniqueness counts are complete.
///
/// # Errors
/// As [`super::engine::run_match`].
pub fn offset_pairs(
    tables: &[SourceTable],
    config: &MatchConfig,
    reference: usize,
    owns: &dyn Fn(usize) -> bool,
) -> Result<OffsetPairs> {
    let generous = generous_config(config);
    let sources = Sources::prepare(tables, &generous)?;
    let candidates = find_candidates(&sources, &generous);
    // Candidates of each source per other catalog.
    let n = tables.len();
    let mut count = vec![0u32; sources.len() * n];
    for c in &candidates {
        let (a, b) = (c.a as usize, c.b as usize);
        count[a * n + sources.catalog[b] as usize] += 1;
        count[b * n + sources.catalog[a] as usize] += 1;
    }
    let mut pairs = OffsetPairs::new(n);
    let stated_sigma = |i: usize| {
        let (t, row) = (
            &tables[sources.catalog[i] as usize],
            sources.row[i] as usize,
        );
        circularized_sigma_arcsec(t.err_major_arcsec[row], t.err_minor_arcsec[row], 0.0)
    };
    for c in &candidates {
        let (a, b) = (c.a as usize, c.b as usize);
        let (ca, cb) = (sources.catalog[a] as usize, sources.catalog[b] as usize);
        let (r, x, cx) = if ca == reference {
            (a, b, cb)
        } else if cb == reference {
            (b, a, ca)
        } else {
            continue;
        };
        if count[r * n + cx] != 1 || count[x * n + reference] != 1 {
            continue;
        }
        if !owns(sources.row[r] as usize) {
            continue;
        }
        let ((ra_r, dec_r), (ra_x, dec_x)) =
            sources.position_for_pair(r, x, generous.reference_epoch_yr);
        let (east, north) = tangent_offsets_arcsec(ra_r, dec_r, ra_x, dec_x);
        pairs.east[cx].push(east);
        pairs.north[cx].push(north);
        pairs.stated[cx].push(stated_sigma(r).hypot(stated_sigma(x)));
    }
    Ok(pairs)
}

/// Where the floor a catalog is matched with comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FloorOrigin {
    /// Fixed in the settings (a plan's `systematic_arcsec`).
    Fixed,
    /// Measured against the astrometric reference.
    Measured,
    /// Neither fixed nor measurable: the floor is 0.
    NotMeasured,
}

impl FloorOrigin {
    /// The name used in run.json.
    pub fn as_str(self) -> &'static str {
        match self {
            FloorOrigin::Fixed => "fixed",
            FloorOrigin::Measured => "measured",
            FloorOrigin::NotMeasured => "not_measured",
        }
    }
}

/// The systematic floor a catalog is matched with, and where it comes from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FloorInForce {
    /// Catalog index.
    pub catalog: usize,
    /// Catalog name.
    pub name: String,
    /// The per-axis floor the final match uses, arcsec.
    pub floor_arcsec: f64,
    /// Fixed, measured, or neither (then 0).
    pub origin: FloorOrigin,
    /// The catalog's own floor from the measurement against the reference,
    /// arcsec, when there was one (with a fixed floor too, so that a
    /// disagreement shows); null otherwise.
    pub measured_arcsec: Option<f64>,
    /// Unique pairs with the reference the measurement used (0 without one).
    pub n_pairs: usize,
    /// Why a floor the settings left open was not measured, or was measured but
    /// not used; null otherwise.
    pub note: Option<String>,
}

/// The floor of each catalog in the final match (`names` are the catalogs' names).
///
/// A catalog with a fixed floor (`floor_from_data` false) keeps it. Any other
/// catalog gets the floor measured against `reference` ([`measure_offsets`],
/// the last measurement after corrections) when it has at least
/// [`MIN_FLOOR_PAIRS`] unique pairs; otherwise its floor is 0 (origin
/// `NotMeasured`, with the reason in `note`): without a reference, for the
/// reference itself (the frame the others are measured in), and with too few
/// pairs. The measurement gives the unquoted scatter of the pair; the
/// catalog's own floor is what is left of it after the reference's floor,
/// sqrt(max(f² − f_ref², 0)), since the match adds both floors in quadrature.
pub fn floors_in_force(
    names: &[String],
    config: &MatchConfig,
    reference: Option<usize>,
    offsets: &[CatalogOffset],
) -> Vec<FloorInForce> {
    let ref_floor = reference.map_or(0.0, |r| config.catalogs[r].systematic_arcsec);
    config
        .catalogs
        .iter()
        .enumerate()
        .map(|(c, settings)| {
            let estimate = offsets
                .iter()
                .find(|o| o.catalog == c)
                .and_then(|o| o.floor);
            let measured = estimate.map(|e| {
                (e.floor_arcsec * e.floor_arcsec - ref_floor * ref_floor)
                    .max(0.0)
                    .sqrt()
            });
            let n_pairs = estimate.map_or(0, |e| e.n_pairs);
            let mut used = FloorInForce {
                catalog: c,
                name: names[c].clone(),
                floor_arcsec: settings.systematic_arcsec,
                origin: FloorOrigin::Fixed,
                measured_arcsec: measured,
                n_pairs,
                note: None,
            };
            if !settings.floor_from_data {
                return used;
            }
            let note = match (reference, measured) {
                (None, _) => Some("no astrometric reference to measure it against".to_string()),
                (Some(r), _) if r == c => {
                    Some("the astrometric reference: the others are measured against it".to_string())
                }
                (Some(_), None) => Some("no unique pair with the astrometric reference".to_string()),
                (Some(_), Some(_)) if n_pairs < MIN_FLOOR_PAIRS => Some(format!(
                    "{n_pairs} unique pairs with the astrometric reference, fewer than {MIN_FLOOR_PAIRS}"
                )),
                (Some(_), Some(_)) => None,
            };
            match (note, measured) {
                (None, Some(m)) => {
                    used.floor_arcsec = m;
                    used.origin = FloorOrigin::Measured;
                }
                (note, _) => {
                    used.floor_arcsec = 0.0;
                    used.origin = FloorOrigin::NotMeasured;
                    used.note = note;
                }
            }
            used
        })
        .collect()
}

/// `config` with the floors of `floors` ([`floors_in_force`]) in its catalogs.
pub fn with_floors(config: &MatchConfig, floors: &[FloorInForce]) -> MatchConfig {
    let mut c = config.clone();
    for f in floors {
        c.catalogs[f.catalog] = CatalogSettings {
            systematic_arcsec: f.floor_arcsec,
            ..c.catalogs[f.catalog].clone()
        };
    }
    c
}

/// `config` with every pair's tolerance replaced by its largest radius.
fn generous_config(config: &MatchConfig) -> MatchConfig {
    let mut generous = config.clone();
    generous.tolerance = Tolerance::Radius {
        arcsec: config.max_radius_arcsec(),
    };
    generous.pair_tolerance.clear();
    // Offsets are measured on stationary pairs: no widening for motion.
    generous.max_motion_masyr = 0.0;
    generous
}

/// True when `m` is worth correcting: enough pairs, and an offset beyond a tenth of
/// its scatter and beyond three standard errors.
fn worth_correcting(m: &OffsetEstimate) -> bool {
    let (se_ra, se_dec) = offset_standard_error(m);
    m.n >= MIN_PAIRS
        && ((m.dra_cosdec_arcsec.abs() > (0.1 * m.scatter_ra_arcsec).max(3.0 * se_ra).max(1e-6))
            || (m.ddec_arcsec.abs() > (0.1 * m.scatter_dec_arcsec).max(3.0 * se_dec).max(1e-6)))
}

/// Moves every source of `table` by (east, north) arcsec on the sky.
pub fn shift_table(table: &mut SourceTable, east_arcsec: f64, north_arcsec: f64) {
    for i in 0..table.len() {
        // A shift is a proper motion of (east, north) mas per 1000 years.
        let (ra, dec) = propagate_deg(
            table.ra_deg[i],
            table.dec_deg[i],
            east_arcsec,
            north_arcsec,
            1000.0,
        );
        table.ra_deg[i] = ra;
        table.dec_deg[i] = dec;
    }
}

/// Measures offsets against `reference` ([`measure_offsets`]) and, with
/// `correct`, moves each catalog worth correcting by minus its offset and measures
/// again, until no offset is worth correcting; then runs the match with `config`
/// and the floors of [`floors_in_force`] on the (corrected) tables, which it
/// returns with the result.
///
/// # Errors
/// As [`super::engine::run_match`].
pub fn match_with_offsets(
    tables: &[SourceTable],
    config: &MatchConfig,
    area_sr: Option<f64>,
    reference: usize,
    correct: bool,
) -> Result<(MatchResult, Vec<CatalogOffset>, Vec<SourceTable>)> {
    let (offsets, moved) = correct_offsets(tables, config, reference, correct)?;
    let working = moved.unwrap_or_else(|| tables.to_vec());
    let names: Vec<String> = tables.iter().map(|t| t.name.clone()).collect();
    let floors = floors_in_force(&names, config, Some(reference), &offsets);
    let result = run_match_with_area(&working, &with_floors(config, &floors), area_sr)?;
    Ok((result, offsets, working))
}

/// The offsets of every catalog against `reference` and, when any catalog was
/// moved, the tables to match: with `correct`, each catalog worth correcting is
/// moved by minus its offset and measured again, until no offset is worth
/// correcting ([`correct_offsets_by`] on the whole input).
///
/// # Errors
/// As [`super::engine::run_match`].
pub fn correct_offsets(
    tables: &[SourceTable],
    config: &MatchConfig,
    reference: usize,
    correct: bool,
) -> Result<(Vec<CatalogOffset>, Option<Vec<SourceTable>>)> {
    let mut working: Option<Vec<SourceTable>> = None;
    let mut shifted = vec![0usize; tables.len()];
    let (offsets, _) = correct_offsets_by(tables.len(), reference, correct, |shifts| {
        if shifts.iter().all(Vec::is_empty) {
            return measure_offsets(tables, config, reference);
        }
        let moved = working.get_or_insert_with(|| tables.to_vec());
        for (c, s) in shifts.iter().enumerate() {
            shift_table_by(&mut moved[c], &s[shifted[c]..]);
            shifted[c] = s.len();
        }
        measure_offsets(moved, config, reference)
    })?;
    Ok((offsets, working))
}

/// The shifts (east, north, arcsec) applied to each catalog, in the order applied.
pub type Shifts = Vec<Vec<(f64, f64)>>;

/// The offset iteration of [`correct_offsets`] over any way of measuring:
/// `measure` measures with the catalogs moved by the shifts so far (each
/// catalog's list, in order), so a build that cannot hold its input can
/// measure region by region. Returns the offsets and the shifts applied, which
/// the match applies in the same order ([`shift_table_by`]) for the same positions.
///
/// # Errors
/// Whatever `measure` returns.
pub fn correct_offsets_by(
    n: usize,
    reference: usize,
    correct: bool,
    mut measure: impl FnMut(&Shifts) -> Result<Measured>,
) -> Result<(Vec<CatalogOffset>, Shifts)> {
    let mut shifts: Shifts = vec![Vec::new(); n];
    let (initial, mut floors) = measure(&shifts)?;
    let mut residual = initial.clone();
    let mut applied = vec![(0.0, 0.0); n];
    if correct {
        for _ in 0..MAX_PASSES {
            if !residual.iter().flatten().any(worth_correcting) {
                break;
            }
            for (c, m) in residual.iter().enumerate() {
                if let Some(m) = m.filter(worth_correcting) {
                    shifts[c].push((-m.dra_cosdec_arcsec, -m.ddec_arcsec));
                    applied[c].0 -= m.dra_cosdec_arcsec;
                    applied[c].1 -= m.ddec_arcsec;
                }
            }
            (residual, floors) = measure(&shifts)?;
        }
    }
    let offsets = (0..n)
        .filter(|&c| c != reference)
        .map(|catalog| CatalogOffset {
            catalog,
            initial: initial[catalog],
            residual: residual[catalog],
            applied_arcsec: applied[catalog],
            floor: floors[catalog],
        })
        .collect();
    Ok((offsets, shifts))
}

/// Moves every source of `table` by each of `shifts` (east, north, arcsec) in turn.
pub fn shift_table_by(table: &mut SourceTable, shifts: &[(f64, f64)]) {
    for &(east, north) in shifts {
        shift_table(table, east, north);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn offset(catalog: usize, floor_arcsec: f64, n_pairs: usize) -> CatalogOffset {
        CatalogOffset {
            catalog,
            initial: None,
            residual: None,
            applied_arcsec: (0.0, 0.0),
            floor: Some(FloorEstimate {
                n_pairs,
                floor_arcsec,
                median_d_before: 2.0,
                median_d_after: super::super::floors::RAYLEIGH_MEDIAN,
                median_stated_sigma_arcsec: 0.1,
            }),
        }
    }

    #[test]
    fn open_floors_take_the_measurement_and_fixed_ones_keep_theirs() {
        let mut config = MatchConfig::new(5, 2016.0);
        for c in &mut config.catalogs {
            c.floor_from_data = true;
        }
        // Catalog 2 fixes 0.05″; catalog 4 fixes nothing and has no pairs.
        config.catalogs[2].systematic_arcsec = 0.05;
        config.catalogs[2].floor_from_data = false;
        let names: Vec<String> = ["r", "a", "b", "c", "d"].map(String::from).to_vec();
        let offsets = [offset(1, 0.2, 100), offset(2, 0.3, 100), offset(3, 0.2, 29)];
        let floors = floors_in_force(&names, &config, Some(0), &offsets);
        let got: Vec<(f64, FloorOrigin, Option<f64>)> = floors
            .iter()
            .map(|f| (f.floor_arcsec, f.origin, f.measured_arcsec))
            .collect();
        assert_eq!(
            got,
            [
                (0.0, FloorOrigin::NotMeasured, None),
                (0.2, FloorOrigin::Measured, Some(0.2)),
                (0.05, FloorOrigin::Fixed, Some(0.3)),
                (0.0, FloorOrigin::NotMeasured, Some(0.2)),
                (0.0, FloorOrigin::NotMeasured, None),
            ]
        );
        assert_eq!(
            floors[0].note.as_deref(),
            Some("the astrometric reference: the others are measured against it")
        );
        assert_eq!(
            floors[3].note.as_deref(),
            Some("29 unique pairs with the astrometric reference, fewer than 30")
        );
        assert_eq!(
            floors[4].note.as_deref(),
            Some("no unique pair with the astrometric reference")
        );
        assert_eq!(floors[2].note, None);
        let used = with_floors(&config, &floors);
        assert_eq!(used.catalogs[1].systematic_arcsec, 0.2);
        assert_eq!(used.catalogs[2].systematic_arcsec, 0.05);
        // Without a reference nothing is measured.
        let none = floors_in_force(&names, &config, None, &[]);
        assert!(none.iter().all(|f| f.floor_arcsec == 0.0 || f.catalog == 2));
        assert_eq!(
            none[1].note.as_deref(),
            Some("no astrometric reference to measure it against")
        );
    }

    #[test]
    fn a_fixed_reference_floor_is_taken_out_of_the_measured_one() {
        // The pair's unquoted scatter 0.5″ with the reference's fixed 0.3″: the
        // catalog's own floor is sqrt(0.25 − 0.09) = 0.4″ (by hand).
        let mut config = MatchConfig::new(2, 2016.0);
        config.catalogs[0].systematic_arcsec = 0.3;
        config.catalogs[1].floor_from_data = true;
        let names = vec!["r".to_string(), "a".to_string()];
        let floors = floors_in_force(&names, &config, Some(0), &[offset(1, 0.5, 50)]);
        assert!((floors[1].floor_arcsec - 0.4).abs() < 1e-12, "{floors:?}");
        assert_eq!(floors[0].origin, FloorOrigin::Fixed);
    }
}
