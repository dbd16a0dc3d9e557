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
//! median, from the stated errors without any configured floor. It is reported
//! only; the match keeps the configured floors.

use serde::Serialize;

use super::bayes::circularized_sigma_arcsec;
use super::candidates::find_candidates;
use super::config::{MatchConfig, Tolerance};
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
    let mut dra: Vec<Vec<f64>> = vec![Vec::new(); n];
    let mut ddec: Vec<Vec<f64>> = vec![Vec::new(); n];
    let mut stated: Vec<Vec<f64>> = vec![Vec::new(); n];
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
        let ((ra_r, dec_r), (ra_x, dec_x)) =
            sources.position_for_pair(r, x, generous.reference_epoch_yr);
        let (east, north) = tangent_offsets_arcsec(ra_r, dec_r, ra_x, dec_x);
        dra[cx].push(east);
        ddec[cx].push(north);
        stated[cx].push(stated_sigma(r).hypot(stated_sigma(x)));
    }
    let offsets: Vec<Option<OffsetEstimate>> = (0..n)
        .map(|c| {
            if c == reference {
                None
            } else {
                robust_offset(&dra[c], &ddec[c])
            }
        })
        .collect();
    let floors = (0..n)
        .map(|c| {
            let m = offsets[c]?;
            let sep: Vec<f64> = dra[c]
                .iter()
                .zip(&ddec[c])
                .map(|(e, no)| (e - m.dra_cosdec_arcsec).hypot(no - m.ddec_arcsec))
                .collect();
            // A pair without a finite, positive stated error cannot be normalised.
            let (sep, sigma): (Vec<f64>, Vec<f64>) = sep
                .into_iter()
                .zip(stated[c].iter().copied())
                .filter(|(_, s)| s.is_finite() && *s > 0.0)
                .unzip();
            estimate_floor(&sep, &sigma)
        })
        .collect();
    Ok((offsets, floors))
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
/// on the (corrected) tables, which it returns with the result.
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
    let result = run_match_with_area(&working, config, area_sr)?;
    Ok((result, offsets, working))
}

/// The offsets of every catalog against `reference` and, when any catalog was
/// moved, the tables to match: with `correct`, each catalog worth correcting is
/// moved by minus its offset and measured again, until no offset is worth
/// correcting.
///
/// # Errors
/// As [`super::engine::run_match`].
pub fn correct_offsets(
    tables: &[SourceTable],
    config: &MatchConfig,
    reference: usize,
    correct: bool,
) -> Result<(Vec<CatalogOffset>, Option<Vec<SourceTable>>)> {
    let (initial, mut floors) = measure_offsets(tables, config, reference)?;
    let mut residual = initial.clone();
    let mut applied = vec![(0.0, 0.0); tables.len()];
    let mut working: Option<Vec<SourceTable>> = None;
    if correct {
        for _ in 0..MAX_PASSES {
            if !residual.iter().flatten().any(worth_correcting) {
                break;
            }
            let moved = working.get_or_insert_with(|| tables.to_vec());
            for (c, m) in residual.iter().enumerate() {
                if let Some(m) = m.filter(worth_correcting) {
                    shift_table(&mut moved[c], -m.dra_cosdec_arcsec, -m.ddec_arcsec);
                    applied[c].0 -= m.dra_cosdec_arcsec;
                    applied[c].1 -= m.ddec_arcsec;
                }
            }
            (residual, floors) = measure_offsets(moved, config, reference)?;
        }
    }
    let offsets = (0..tables.len())
        .filter(|&c| c != reference)
        .map(|catalog| CatalogOffset {
            catalog,
            initial: initial[catalog],
            residual: residual[catalog],
            applied_arcsec: applied[catalog],
            floor: floors[catalog],
        })
        .collect();
    Ok((offsets, working))
}
