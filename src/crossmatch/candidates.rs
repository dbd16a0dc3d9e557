//! Candidate pairs: every pair of sources from two different catalogs that
//! passes the pair's tolerance.
//!
//! The sky is cut into HEALPix NESTED cells at `config.partition_order`; each
//! cell holds its own sources (core) plus every source within the largest
//! tolerance of it (margin). Within a cell a zone index finds all pairs within the
//! largest tolerance, and a pair is kept only by the cell that is home to its
//! lower-ranked source, so every pair is found exactly once whatever the
//! partitioning (Górski et al. 2005 for HEALPix; the one-owner rule is common practice).
//! A source with a proper motion is also indexed at the epochs of catalogs without
//! proper motions, so a fast star meets its counterpart of another epoch
//! ([`IndexPoints`]); every pair is then tested at a common epoch ([`test_pair`]).
//! Two sources without proper motions seen at different epochs may be one star
//! moving up to `config.max_motion_masyr`: their tolerance is widened by
//! μ_max·|t_i − t_j| (FIELD notes §5.11), and a pair passing only so is marked
//! [`Candidate::moving_only`].
//! [`find_candidates_in_cell`] is the per-cell function: sources in, pairs out.

use std::collections::BTreeMap;

use rayon::prelude::*;

use super::bayes::ln_bayes_factor_pair;
use super::config::MatchConfig;
use super::prepare::Sources;
use super::tolerance::accepts;
use crate::sky::partition::{Cell, partition};
use crate::sky::propagation::propagate_deg;
use crate::sky::separation::{
    separation_vec_rad, tangent_offsets_arcsec, tangent_offsets_vec_arcsec,
};
use crate::sky::vector::RAD_PER_ARCSEC;
use crate::sky::zones::ZoneIndex;

/// A pair of sources from different catalogs within their tolerance.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Candidate {
    /// Lower rank of the two sources.
    pub a: u32,
    /// Higher rank.
    pub b: u32,
    /// Angular separation at the reference epoch, arcsec.
    pub sep_arcsec: f64,
    /// Normalized distance sqrt(Δᵀ C⁻¹ Δ) with both error ellipses and floors.
    pub norm_dist: f64,
    /// ln of the two-catalog Bayes factor (Budavári & Szalay 2008).
    pub ln_bayes: f64,
    /// Offset of b from a toward the east (Δα cos δ), arcsec, on the tangent plane
    /// at a, at the epoch the pair was compared.
    pub east_arcsec: f64,
    /// Offset of b from a toward the north (Δδ), arcsec.
    pub north_arcsec: f64,
    /// True when the pair passes only the tolerance widened by μ_max·|t_a − t_b|
    /// (two sources without proper motions at different epochs): it may join a
    /// moving object, never a stationary one.
    pub moving_only: bool,
}

/// Moving sources get an extra index entry at another catalog's epoch when
/// their displacement to it exceeds this, arcsec.
pub const EPOCH_COPY_MIN_ARCSEC: f64 = 0.05;
/// Cap on the extra search radius for catalogs whose epochs spread around their
/// median, arcsec.
pub const MAX_EPOCH_SLACK_ARCSEC: f64 = 5.0;

/// Tests one pair: positions at a common epoch ([`Sources::vectors_for_pair`]),
/// exact separation (vector form), normalized distance from gnomonic offsets,
/// tolerance; `Some` for a candidate.
pub fn test_pair(sources: &Sources, config: &MatchConfig, a: u32, b: u32) -> Option<Candidate> {
    let (ia, ib) = (a as usize, b as usize);
    let (ca, cb) = (sources.catalog[ia] as usize, sources.catalog[ib] as usize);
    if ca == cb {
        return None;
    }
    let (va, vb) = sources.vectors_for_pair(ia, ib, config.reference_epoch_yr);
    let sep_arcsec = separation_vec_rad(va, vb) / RAD_PER_ARCSEC;
    let tolerance = config.tolerance_for(ca, cb);
    let widening = widening_arcsec(sources, config, ia, ib);
    if sep_arcsec > tolerance.max_arcsec() + widening {
        return None;
    }
    let floor = config.catalogs[ca].systematic_arcsec.powi(2)
        + config.catalogs[cb].systematic_arcsec.powi(2);
    let (east, north) = tangent_offsets_vec_arcsec(va, vb).unwrap_or_else(|| {
        // At a pole east is undefined for a vector; the angle form uses the RA given.
        let ((ra_a, dec_a), (ra_b, dec_b)) =
            sources.position_for_pair(ia, ib, config.reference_epoch_yr);
        tangent_offsets_arcsec(ra_a, dec_a, ra_b, dec_b)
    });
    // A source carried by its motion to the other's epoch has the positional
    // error of that epoch (its motion's errors grow it, Sources::cov_at).
    let t_ref = config.reference_epoch_yr;
    let at_pair_epoch = |i: usize, other: usize| {
        if sources.has_pm(i) && !sources.has_pm(other) && sources.epoch_yr[other].is_finite() {
            sources.cov_at(i, sources.epoch_yr[other], t_ref)
        } else {
            (sources.cov[i], sources.sigma_rad[i])
        }
    };
    let ((cov_a, sigma_a), (cov_b, sigma_b)) = (at_pair_epoch(ia, ib), at_pair_epoch(ib, ia));
    let d2 = cov_a
        .combine(&cov_b, floor)
        .normalized_distance2(east, north);
    let moving_only = if accepts(&tolerance, sep_arcsec, d2) {
        false
    } else if widening > 0.0 {
        // The offset shortened by μ_max·|Δt| (the farthest the star can have
        // moved) must pass the tolerance; d² scales with the offset squared.
        let shrink = (1.0 - widening / sep_arcsec).max(0.0);
        if !accepts(&tolerance, sep_arcsec * shrink, d2 * shrink * shrink) {
            return None;
        }
        true
    } else {
        return None;
    };
    Some(Candidate {
        a: a.min(b),
        b: a.max(b),
        sep_arcsec,
        norm_dist: d2.sqrt(),
        ln_bayes: ln_bayes_factor_pair(sigma_a, sigma_b, sep_arcsec * RAD_PER_ARCSEC),
        east_arcsec: if a < b { east } else { -east },
        north_arcsec: if a < b { north } else { -north },
        moving_only,
    })
}

/// How far the tolerance of sources `a` and `b` is widened for motion, arcsec:
/// μ_max·|t_a − t_b| when neither has a proper motion and their epochs differ
/// (a source with one is compared at the other's epoch already), else 0.
pub fn widening_arcsec(sources: &Sources, config: &MatchConfig, a: usize, b: usize) -> f64 {
    if config.max_motion_masyr <= 0.0 || sources.has_pm(a) || sources.has_pm(b) {
        return 0.0;
    }
    let dt = (sources.epoch_yr[a] - sources.epoch_yr[b]).abs();
    if dt.is_finite() {
        config.max_motion_masyr / 1000.0 * dt
    } else {
        0.0
    }
}

/// The points put in the spatial index: every source at its stored position,
/// plus, for a moving source, a copy at the epoch of each catalog whose sources
/// have no proper motion (so a fast star is found next to its old position).
#[derive(Debug, Clone, Default)]
pub struct IndexPoints {
    /// Right ascension of each point, degrees.
    pub ra_deg: Vec<f64>,
    /// Declination of each point, degrees.
    pub dec_deg: Vec<f64>,
    /// The source (rank) each point stands for.
    pub source: Vec<u32>,
    /// Extra search radius, arcsec: for catalogs whose epochs spread around
    /// their median, plus the widest widening for motion.
    pub slack_arcsec: f64,
}

/// Epoch statistics of all sources, which decide where moving sources are also
/// indexed and how far apart the stored positions of a candidate pair can be.
///
/// They must describe the whole input, not one cell of it, so that a cell
/// indexes its sources exactly as a run over the whole sky would.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct EpochStats {
    /// Per catalog with sources without proper motion: (median epoch, largest
    /// distance of an epoch from the median), Julian years.
    pub no_motion_epochs: Vec<Option<(f64, f64)>>,
    /// Largest |epoch − reference epoch| of any source without proper motion, years.
    pub max_abs_dt_yr: f64,
    /// Fastest proper motion of any source, arcsec per year.
    pub fastest_arcsec_per_yr: f64,
}

/// The epoch statistics gathered source by source, as a streaming read meets
/// them: distinct epochs with their counts (per catalog, sources without proper
/// motion) and the fastest motion. [`EpochTally::finish`] gives exactly what
/// [`EpochStats::of`] gives for the same sources.
#[derive(Debug, Clone, Default)]
pub struct EpochTally {
    epochs: Vec<BTreeMap<i64, u64>>,
    fastest_arcsec_per_yr: f64,
}

/// A key whose integer order is `f64::total_cmp`'s order.
fn total_order_key(x: f64) -> i64 {
    let bits = x.to_bits() as i64;
    bits ^ ((((bits >> 63) as u64) >> 1) as i64)
}

fn from_total_order_key(k: i64) -> f64 {
    f64::from_bits((k ^ ((((k >> 63) as u64) >> 1) as i64)) as u64)
}

impl EpochTally {
    /// A tally for `catalogs` catalogs.
    pub fn new(catalogs: usize) -> EpochTally {
        EpochTally {
            epochs: vec![BTreeMap::new(); catalogs],
            fastest_arcsec_per_yr: 0.0,
        }
    }

    /// Counts a source of catalog `c` as [`Sources::prepare`] leaves it: its
    /// proper motion (NaN when none) and epoch.
    pub fn add(&mut self, c: usize, pm_masyr: (f64, f64), epoch_yr: f64) {
        if pm_masyr.0.is_finite() {
            self.fastest_arcsec_per_yr = self
                .fastest_arcsec_per_yr
                .max(pm_masyr.0.hypot(pm_masyr.1) / 1000.0);
        } else if epoch_yr.is_finite() {
            *self.epochs[c].entry(total_order_key(epoch_yr)).or_insert(0) += 1;
        }
    }

    /// The statistics at `reference_epoch_yr`.
    pub fn finish(&self, reference_epoch_yr: f64) -> EpochStats {
        let mut stats = EpochStats {
            no_motion_epochs: vec![None; self.epochs.len()],
            fastest_arcsec_per_yr: self.fastest_arcsec_per_yr,
            ..EpochStats::default()
        };
        for (c, counts) in self.epochs.iter().enumerate() {
            let (Some((&first, _)), Some((&last, _))) =
                (counts.first_key_value(), counts.last_key_value())
            else {
                continue;
            };
            let n: u64 = counts.values().sum();
            let mut seen = 0;
            let mut median = first;
            for (&k, &count) in counts {
                if seen + count > n / 2 {
                    median = k;
                    break;
                }
                seen += count;
            }
            let (lo, hi, median) = (
                from_total_order_key(first),
                from_total_order_key(last),
                from_total_order_key(median),
            );
            let spread = (hi - median).max(median - lo);
            let far = (hi - reference_epoch_yr)
                .abs()
                .max((lo - reference_epoch_yr).abs());
            stats.max_abs_dt_yr = stats.max_abs_dt_yr.max(far);
            stats.no_motion_epochs[c] = Some((median, spread));
        }
        stats
    }
}

impl EpochStats {
    /// The statistics of `sources` at `reference_epoch_yr`.
    pub fn of(sources: &Sources, reference_epoch_yr: f64) -> EpochStats {
        let ncat = sources.catalog_start.len().saturating_sub(1);
        let mut stats = EpochStats {
            no_motion_epochs: vec![None; ncat],
            ..EpochStats::default()
        };
        for c in 0..ncat {
            let mut e: Vec<f64> = (sources.catalog_start[c]..sources.catalog_start[c + 1])
                .filter(|&i| !sources.has_pm(i) && sources.epoch_yr[i].is_finite())
                .map(|i| sources.epoch_yr[i])
                .collect();
            if e.is_empty() {
                continue;
            }
            e.sort_by(f64::total_cmp);
            let median = e[e.len() / 2];
            let spread = (e[e.len() - 1] - median).max(median - e[0]);
            let far = (e[e.len() - 1] - reference_epoch_yr)
                .abs()
                .max((e[0] - reference_epoch_yr).abs());
            stats.max_abs_dt_yr = stats.max_abs_dt_yr.max(far);
            stats.no_motion_epochs[c] = Some((median, spread));
        }
        for i in 0..sources.len() {
            if sources.has_pm(i) {
                let (pmra, pmdec) = sources.pm_masyr[i];
                stats.fastest_arcsec_per_yr =
                    stats.fastest_arcsec_per_yr.max(pmra.hypot(pmdec) / 1000.0);
            }
        }
        stats
    }

    /// Extra search radius for catalogs whose epochs spread around their median, arcsec.
    pub fn slack_arcsec(&self) -> f64 {
        let widest_spread = self
            .no_motion_epochs
            .iter()
            .flatten()
            .map(|e| e.1)
            .fold(0.0, f64::max);
        (self.fastest_arcsec_per_yr * widest_spread).min(MAX_EPOCH_SLACK_ARCSEC)
    }

    /// Largest separation of the stored positions of two sources that can be a
    /// candidate pair, arcsec: the largest tolerance plus the farthest a moving
    /// source travels between the reference epoch and an epoch of observation,
    /// plus the widest widening for motion ([`EpochStats::max_widening_arcsec`]).
    pub fn max_stored_separation_arcsec(&self, config: &MatchConfig) -> f64 {
        config.max_radius_arcsec()
            + self.fastest_arcsec_per_yr * self.max_abs_dt_yr
            + self.max_widening_arcsec(config)
    }

    /// Largest difference of epochs of two sources without proper motion from
    /// different catalogs, bounded from each catalog's median and spread, years
    /// (0 with fewer than two such catalogs).
    pub fn no_motion_span_yr(&self) -> f64 {
        let ranges: Vec<(f64, f64)> = self
            .no_motion_epochs
            .iter()
            .flatten()
            .map(|&(median, spread)| (median - spread, median + spread))
            .collect();
        if ranges.len() < 2 {
            return 0.0;
        }
        let lo = ranges.iter().map(|r| r.0).fold(f64::INFINITY, f64::min);
        let hi = ranges.iter().map(|r| r.1).fold(f64::NEG_INFINITY, f64::max);
        hi - lo
    }

    /// The widest widening of a pair tolerance for motion, arcsec:
    /// μ_max times [`EpochStats::no_motion_span_yr`] (see [`widening_arcsec`]).
    pub fn max_widening_arcsec(&self, config: &MatchConfig) -> f64 {
        if config.max_motion_masyr <= 0.0 {
            return 0.0;
        }
        config.max_motion_masyr / 1000.0 * self.no_motion_span_yr()
    }
}

impl IndexPoints {
    /// Builds the points of `sources`, with epoch statistics taken from them.
    pub fn new(sources: &Sources, config: &MatchConfig) -> IndexPoints {
        IndexPoints::with_stats(
            sources,
            config,
            &EpochStats::of(sources, config.reference_epoch_yr),
        )
    }

    /// Builds the points of `sources` with epoch statistics of the whole input.
    pub fn with_stats(sources: &Sources, config: &MatchConfig, stats: &EpochStats) -> IndexPoints {
        let n = sources.len();
        let mut p = IndexPoints {
            ra_deg: sources.ra_deg.clone(),
            dec_deg: sources.dec_deg.clone(),
            source: (0..n as u32).collect(),
            slack_arcsec: stats.slack_arcsec() + stats.max_widening_arcsec(config),
        };
        let epochs: Vec<(usize, f64)> = stats
            .no_motion_epochs
            .iter()
            .enumerate()
            .filter_map(|(c, e)| e.map(|(median, _)| (c, median)))
            .collect();
        for i in 0..n {
            if !sources.has_pm(i) {
                continue;
            }
            let (pmra, pmdec) = sources.pm_masyr[i];
            let speed = pmra.hypot(pmdec) / 1000.0;
            for &(c, median) in &epochs {
                let dt = median - config.reference_epoch_yr;
                if c == sources.catalog[i] as usize || speed * dt.abs() <= EPOCH_COPY_MIN_ARCSEC {
                    continue;
                }
                let (ra, dec) =
                    propagate_deg(sources.ra_deg[i], sources.dec_deg[i], pmra, pmdec, dt);
                p.ra_deg.push(ra);
                p.dec_deg.push(dec);
                p.source.push(i as u32);
            }
        }
        p
    }
}

/// The candidates owned by one cell of the index points: pairs among its core
/// and margin points whose lower-numbered point has `cell.id` as home cell
/// (`home[point]`). Pairs of the same source pair found through several points
/// are removed later by [`find_candidates`].
pub fn find_candidates_in_cell(
    sources: &Sources,
    points: &IndexPoints,
    config: &MatchConfig,
    cell: &Cell,
    home: &[u64],
) -> Vec<Candidate> {
    let mut members: Vec<u32> = Vec::with_capacity(cell.core.len() + cell.margin.len());
    members.extend_from_slice(&cell.core);
    members.extend_from_slice(&cell.margin);
    members.sort_unstable();
    let ra: Vec<f64> = members.iter().map(|&m| points.ra_deg[m as usize]).collect();
    let dec: Vec<f64> = members
        .iter()
        .map(|&m| points.dec_deg[m as usize])
        .collect();
    let radius_deg = (config.max_radius_arcsec() + points.slack_arcsec) / 3600.0;
    let index = ZoneIndex::build(&ra, &dec, radius_deg);
    let mut out = Vec::new();
    index.for_each_pair(|i, j, _| {
        let (p, q) = (members[i].min(members[j]), members[i].max(members[j]));
        if home[p as usize] != cell.id {
            return;
        }
        let (a, b) = (points.source[p as usize], points.source[q as usize]);
        if a == b || sources.catalog[a as usize] == sources.catalog[b as usize] {
            return;
        }
        if let Some(c) = test_pair(sources, config, a.min(b), a.max(b)) {
            out.push(c);
        }
    });
    out
}

/// All candidate pairs, sorted by (a, b) without repeats; cells are searched in parallel.
pub fn find_candidates(sources: &Sources, config: &MatchConfig) -> Vec<Candidate> {
    find_candidates_with(
        sources,
        config,
        &EpochStats::of(sources, config.reference_epoch_yr),
    )
}

/// As [`find_candidates`], with the epoch statistics of the whole input (for a
/// subset of it, such as one cell with its margin).
pub fn find_candidates_with(
    sources: &Sources,
    config: &MatchConfig,
    stats: &EpochStats,
) -> Vec<Candidate> {
    if sources.is_empty() {
        return Vec::new();
    }
    let points = IndexPoints::with_stats(sources, config, stats);
    let radius_deg = (config.max_radius_arcsec() + points.slack_arcsec) / 3600.0;
    let cells = partition(
        config.partition_order,
        &points.ra_deg,
        &points.dec_deg,
        radius_deg,
    );
    let mut home = vec![0u64; points.source.len()];
    for cell in &cells {
        for &m in &cell.core {
            home[m as usize] = cell.id;
        }
    }
    let mut all: Vec<Candidate> = cells
        .par_iter()
        .flat_map_iter(|cell| find_candidates_in_cell(sources, &points, config, cell, &home))
        .collect();
    all.par_sort_unstable_by_key(|c| (c.a, c.b));
    all.dedup_by_key(|c| (c.a, c.b));
    all
}
