//! False-match rates by shifted catalogs.
//!
//! For a catalog pair (A, B), B is moved as a whole by several offsets much
//! larger than any tolerance and the candidate search is repeated against A;
//! the candidates found then are chance coincidences, so their mean count
//! estimates how many of the real candidates are spurious (common practice).
//! The eight shifts are ±s east, ±s north and the four diagonals, with
//! s = max([`MIN_SHIFT_ARCSEC`], [`SHIFT_PER_RADIUS`] × the pair's largest tolerance).
//! Sources shifted off the edge of A's footprint find no partners, so for small
//! fields the rate is slightly underestimated (by about the shift over the
//! field size).

use serde::Serialize;

use super::candidates::find_candidates;
use super::config::MatchConfig;
use super::input::SourceTable;
use super::prepare::Sources;
use super::systematics::shift_table;
use crate::error::Result;

/// Smallest shift, arcsec.
pub const MIN_SHIFT_ARCSEC: f64 = 30.0;
/// Shift in units of the pair's largest tolerance.
pub const SHIFT_PER_RADIUS: f64 = 20.0;

/// The false-match estimate for one catalog pair.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FalseMatchEstimate {
    /// First catalog (kept in place).
    pub catalog_a: usize,
    /// Second catalog (shifted).
    pub catalog_b: usize,
    /// Candidate pairs between the two in the real configuration.
    pub real_candidates: usize,
    /// Mean candidate pairs over the shifted configurations.
    pub shifted_candidates_mean: f64,
    /// Shift length, arcsec.
    pub shift_arcsec: f64,
    /// Shifted over real candidates: the estimated spurious fraction.
    pub false_fraction: f64,
    /// Shifted candidates per source of catalog A.
    pub false_per_source_a: f64,
    /// The same estimate within growing radii: candidates closer than each radius.
    pub by_radius: Vec<FalseMatchesWithin>,
}

/// The false-match estimate for the candidates of a pair closer than a radius.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FalseMatchesWithin {
    /// The radius, arcsec.
    pub radius_arcsec: f64,
    /// Real candidates within it.
    pub real_candidates: usize,
    /// Mean shifted candidates within it.
    pub shifted_candidates_mean: f64,
    /// Their ratio (0 without real candidates).
    pub false_fraction: f64,
}

/// Radii of [`FalseMatchEstimate::by_radius`]: this many equal steps up to the
/// pair's largest tolerance.
pub const RADIUS_STEPS: usize = 8;

/// Separations of the candidate pairs between two tables whose first member
/// is `owned` (by its row), arcsec: pairs within the tolerance itself (pairs
/// passing only the tolerance widened for motion are not counted, in the real
/// and in the shifted configurations alike).
fn separations_between(
    tables: &[SourceTable; 2],
    config: &MatchConfig,
    owned: &dyn Fn(usize) -> bool,
) -> Result<Vec<f64>> {
    // Without the widening the search finds exactly the pairs that are not
    // `moving_only`, with less work.
    let stationary = MatchConfig {
        max_motion_masyr: 0.0,
        ..config.clone()
    };
    let sources = Sources::prepare(tables, &stationary)?;
    Ok(find_candidates(&sources, &stationary)
        .iter()
        .filter(|c| {
            let first = if sources.catalog[c.a as usize] == 0 {
                c.a
            } else {
                c.b
            };
            owned(sources.row[first as usize] as usize)
        })
        .map(|c| c.sep_arcsec)
        .collect())
}

/// How many of `seps` are at most each of `radii`.
fn count_within(seps: &[f64], radii: &[f64]) -> Vec<usize> {
    radii
        .iter()
        .map(|&r| seps.iter().filter(|&&s| s <= r).count())
        .collect()
}

/// The shift length for a pair whose largest tolerance is `radius_arcsec`.
fn shift_for(radius_arcsec: f64) -> f64 {
    MIN_SHIFT_ARCSEC.max(SHIFT_PER_RADIUS * radius_arcsec)
}

/// How far from a source of one catalog the other catalog's sources can lie
/// and still become its candidates in some shifted configuration, arcsec: the
/// largest shift plus the largest tolerance over all pairs.
pub fn reach_arcsec(config: &MatchConfig) -> f64 {
    let n = config.catalogs.len();
    let mut reach: f64 = 0.0;
    for a in 0..n {
        for b in a + 1..n {
            let r = config.tolerance_for(a, b).max_arcsec();
            reach = reach.max(shift_for(r) + r);
        }
    }
    reach
}

/// The eight shifts (east, north), arcsec, of length `s`.
fn shifts_of(s: f64) -> [(f64, f64); 8] {
    let d = s / std::f64::consts::SQRT_2;
    [
        (s, 0.0),
        (-s, 0.0),
        (0.0, s),
        (0.0, -s),
        (d, d),
        (d, -d),
        (-d, d),
        (-d, -d),
    ]
}

/// The candidate counts of one catalog pair behind its estimate.
#[derive(Debug, Clone, PartialEq)]
struct PairCounts {
    catalog_a: usize,
    catalog_b: usize,
    shift_arcsec: f64,
    radii: Vec<f64>,
    real: usize,
    real_within: Vec<usize>,
    /// Summed over the shifts.
    shifted: usize,
    shifted_within: Vec<usize>,
}

/// The candidate counts behind the false-match estimates of every catalog
/// pair, for the sources of the first catalog of each pair that a part of the
/// sky owns. Counts of parts that own disjoint sources add up to the counts of
/// the whole input, so a build that holds one group of cells at a time makes
/// the estimate of a build holding everything.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FalseMatchCounts {
    pairs: Vec<PairCounts>,
}

impl FalseMatchCounts {
    /// Counts the candidates of every catalog pair (A, B) whose A source is
    /// owned (`owns(catalog, row)`), in the real and in the eight shifted
    /// configurations. `tables` must hold every source of B within
    /// [`reach_arcsec`] of each owned source of A.
    ///
    /// # Errors
    /// As [`super::engine::run_match`].
    pub fn count(
        tables: &[SourceTable],
        config: &MatchConfig,
        owns: &dyn Fn(usize, usize) -> bool,
    ) -> Result<FalseMatchCounts> {
        let mut pairs = Vec::new();
        for a in 0..tables.len() {
            for b in a + 1..tables.len() {
                let mut pair_config = MatchConfig::new(2, config.reference_epoch_yr);
                pair_config.catalogs = vec![config.catalogs[a].clone(), config.catalogs[b].clone()];
                pair_config.tolerance = config.tolerance_for(a, b);
                pair_config.partition_order = config.partition_order;
                let radius = pair_config.tolerance.max_arcsec();
                let s = shift_for(radius);
                let radii: Vec<f64> = (1..=RADIUS_STEPS)
                    .map(|k| radius * k as f64 / RADIUS_STEPS as f64)
                    .collect();
                let owned = |row: usize| owns(a, row);
                let real_seps = separations_between(
                    &[tables[a].clone(), tables[b].clone()],
                    &pair_config,
                    &owned,
                )?;
                let mut shifted_within = vec![0usize; radii.len()];
                let mut shifted = 0usize;
                for (east, north) in shifts_of(s) {
                    let mut moved = tables[b].clone();
                    shift_table(&mut moved, east, north);
                    let seps =
                        separations_between(&[tables[a].clone(), moved], &pair_config, &owned)?;
                    shifted += seps.len();
                    for (sum, n) in shifted_within.iter_mut().zip(count_within(&seps, &radii)) {
                        *sum += n;
                    }
                }
                pairs.push(PairCounts {
                    catalog_a: a,
                    catalog_b: b,
                    shift_arcsec: s,
                    real: real_seps.len(),
                    real_within: count_within(&real_seps, &radii),
                    radii,
                    shifted,
                    shifted_within,
                });
            }
        }
        Ok(FalseMatchCounts { pairs })
    }

    /// Adds the counts of another part of the sky (of the same catalogs).
    pub fn add(&mut self, part: FalseMatchCounts) {
        if self.pairs.is_empty() {
            self.pairs = part.pairs;
            return;
        }
        for (total, p) in self.pairs.iter_mut().zip(part.pairs) {
            total.real += p.real;
            total.shifted += p.shifted;
            for (t, n) in total.real_within.iter_mut().zip(p.real_within) {
                *t += n;
            }
            for (t, n) in total.shifted_within.iter_mut().zip(p.shifted_within) {
                *t += n;
            }
        }
    }

    /// The estimates, with `rows[c]` the sources of catalog `c` in the whole input.
    pub fn estimates(&self, rows: &[usize]) -> Vec<FalseMatchEstimate> {
        let shifts = shifts_of(0.0).len() as f64;
        let ratio = |shifted: f64, real: usize| {
            if real > 0 { shifted / real as f64 } else { 0.0 }
        };
        self.pairs
            .iter()
            .map(|p| {
                let mean = p.shifted as f64 / shifts;
                FalseMatchEstimate {
                    catalog_a: p.catalog_a,
                    catalog_b: p.catalog_b,
                    real_candidates: p.real,
                    shifted_candidates_mean: mean,
                    shift_arcsec: p.shift_arcsec,
                    false_fraction: ratio(mean, p.real),
                    false_per_source_a: match rows[p.catalog_a] {
                        0 => 0.0,
                        n => mean / n as f64,
                    },
                    by_radius: p
                        .radii
                        .iter()
                        .zip(p.real_within.iter().zip(&p.shifted_within))
                        .map(|(&radius_arcsec, (&real, &shifted))| {
                            let mean = shifted as f64 / shifts;
                            FalseMatchesWithin {
                                radius_arcsec,
                                real_candidates: real,
                                shifted_candidates_mean: mean,
                                false_fraction: ratio(mean, real),
                            }
                        })
                        .collect(),
                }
            })
            .collect()
    }
}

/// Estimates false-match rates for every catalog pair of tables holding the
/// whole input.
///
/// # Errors
/// As [`super::engine::run_match`].
pub fn estimate_false_matches(
    tables: &[SourceTable],
    config: &MatchConfig,
) -> Result<Vec<FalseMatchEstimate>> {
    let rows: Vec<usize> = tables.iter().map(SourceTable::len).collect();
    Ok(FalseMatchCounts::count(tables, config, &|_, _| true)?.estimates(&rows))
}
