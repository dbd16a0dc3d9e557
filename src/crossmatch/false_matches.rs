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

/// Separations of the candidate pairs between two tables, arcsec: pairs within
/// the tolerance itself (pairs passing only the tolerance widened for motion
/// are not counted, in the real and in the shifted configurations alike).
fn separations_between(tables: &[SourceTable; 2], config: &MatchConfig) -> Result<Vec<f64>> {
    // Without the widening the search finds exactly the pairs that are not
    // `moving_only`, with less work.
    let stationary = MatchConfig {
        max_motion_masyr: 0.0,
        ..config.clone()
    };
    let sources = Sources::prepare(tables, &stationary)?;
    Ok(find_candidates(&sources, &stationary)
        .iter()
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

/// Estimates false-match rates for every catalog pair.
///
/// # Errors
/// As [`super::engine::run_match`].
pub fn estimate_false_matches(
    tables: &[SourceTable],
    config: &MatchConfig,
) -> Result<Vec<FalseMatchEstimate>> {
    let mut out = Vec::new();
    for a in 0..tables.len() {
        for b in a + 1..tables.len() {
            let mut pair_config = MatchConfig::new(2, config.reference_epoch_yr);
            pair_config.catalogs = vec![config.catalogs[a].clone(), config.catalogs[b].clone()];
            pair_config.tolerance = config.tolerance_for(a, b);
            pair_config.partition_order = config.partition_order;
            let s = MIN_SHIFT_ARCSEC.max(SHIFT_PER_RADIUS * pair_config.tolerance.max_arcsec());
            let radii: Vec<f64> = (1..=RADIUS_STEPS)
                .map(|k| pair_config.tolerance.max_arcsec() * k as f64 / RADIUS_STEPS as f64)
                .collect();
            let real_seps =
                separations_between(&[tables[a].clone(), tables[b].clone()], &pair_config)?;
            let real = real_seps.len();
            let real_within = count_within(&real_seps, &radii);
            let mut shifted_within = vec![0usize; radii.len()];
            let mut total = 0usize;
            let d = s / std::f64::consts::SQRT_2;
            let shifts = [
                (s, 0.0),
                (-s, 0.0),
                (0.0, s),
                (0.0, -s),
                (d, d),
                (d, -d),
                (-d, d),
                (-d, -d),
            ];
            for (east, north) in shifts {
                let mut moved = tables[b].clone();
                shift_table(&mut moved, east, north);
                let seps = separations_between(&[tables[a].clone(), moved], &pair_config)?;
                total += seps.len();
                for (sum, n) in shifted_within.iter_mut().zip(count_within(&seps, &radii)) {
                    *sum += n;
                }
            }
            let mean = total as f64 / shifts.len() as f64;
            out.push(FalseMatchEstimate {
                catalog_a: a,
                catalog_b: b,
                real_candidates: real,
                shifted_candidates_mean: mean,
                shift_arcsec: s,
                false_fraction: if real > 0 { mean / real as f64 } else { 0.0 },
                false_per_source_a: if tables[a].is_empty() {
                    0.0
                } else {
                    mean / tables[a].len() as f64
                },
                by_radius: radii
                    .iter()
                    .zip(real_within.iter().zip(&shifted_within))
                    .map(|(&radius_arcsec, (&real, &shifted))| {
                        let mean = shifted as f64 / shifts.len() as f64;
                        FalseMatchesWithin {
                            radius_arcsec,
                            real_candidates: real,
                            shifted_candidates_mean: mean,
                            false_fraction: if real > 0 { mean / real as f64 } else { 0.0 },
                        }
                    })
                    .collect(),
            });
        }
    }
    Ok(out)
}
