//! Matching the sky cell by cell, with the same answer as one match over all of it.
//!
//! The sky is cut into HEALPix NESTED cells at `partition_order` (Górski et al.
//! 2005). A cell holds its *core* (the sources whose stored position lies in it)
//! and a *margin*: every source within `w` of the cell
//! ([`crate::sky::partition::partition`], an over-inclusive test). [`match_cell`]
//! is the per-cell kernel — sources in, objects, candidates and blends out — and
//! holds no I/O; [`match_by_cells`] runs it over every cell in parallel.
//!
//! # Why the answer does not depend on the cells
//!
//! Every decision about a source `g` depends only on sources within an
//! *influence radius* ρ of it: its candidates lie within the largest separation
//! of stored positions a candidate pair can have, `r_pair` (the largest
//! tolerance plus the farthest a moving source travels between epochs, see
//! [`EpochStats::max_stored_separation_arcsec`]); whether it, or a neighbour, is
//! a blend depends on sources within the widest resolution `r_res`. So
//! ρ = `r_pair` + `r_res`. A group of candidates found in a cell is the group a
//! whole-sky run finds when every member's neighbourhood of radius ρ lies inside
//! what the cell holds. A member `g` is at most `b(g)` from the cell, where `b(g)`
//! is its separation from the nearest core source it is tied to (a member of its
//! group, or a core source linked to the group), and the cell holds everything
//! within `w` of itself; so the group is *complete* when
//!
//! ```text
//! max over members g of b(g) + ρ ≤ w.
//! ```
//!
//! A cell resolves every group it needs — the groups of its core sources, of
//! their candidates, and of the sources under its core blends and over its core
//! sources — and emits only what it owns: objects whose anchor (lowest-ranked
//! member) is in its core, candidate pairs whose lower-ranked source is in its
//! core, and blends whose coarse source is in its core. Each source is core in
//! exactly one cell, so everything is emitted once. Resolution is a pure
//! function of a group's sources (ranks keep the whole-sky order within a cell,
//! see [`Sources::subset`]; densities and epoch statistics are those of the
//! whole input), so two cells that resolve one group resolve it alike.
//!
//! When a needed group is not complete (a chain of candidates reaching past the
//! margin) the cell is matched again with twice the margin, until it is; a
//! margin wider than half the sphere holds every source, so this ends.

use rayon::prelude::*;

use super::blends::{Blend, find_blends};
use super::candidates::{Candidate, EpochStats, find_candidates_with};
use super::config::MatchConfig;
use super::flags;
use super::groups::connected_groups;
use super::prepare::Sources;
use super::resolve::{Context, ResolvedObject, resolve_group};
use crate::sky::partition::partition;
use crate::sky::separation::separation_vec_rad;
use crate::sky::vector::RAD_PER_ARCSEC;

/// What the kernel needs besides the cell's sources: settings, the whole input's
/// densities and epoch statistics, and the influence radius.
pub struct CellContext<'a> {
    /// Match settings.
    pub config: &'a MatchConfig,
    /// ln of each catalog's surface density, sources per steradian (whole input).
    pub ln_density_per_sr: &'a [f64],
    /// Epoch statistics of the whole input.
    pub epochs: &'a EpochStats,
    /// ρ: how far from a source anything that decides its fate can lie, arcsec.
    pub influence_arcsec: f64,
}

impl CellContext<'_> {
    /// ρ for `config` and `epochs`: the largest stored separation of a candidate
    /// pair plus the widest declared resolution.
    pub fn influence_radius_arcsec(config: &MatchConfig, epochs: &EpochStats) -> f64 {
        let widest_resolution = config
            .catalogs
            .iter()
            .filter_map(|c| c.resolution_arcsec)
            .fold(0.0, f64::max);
        epochs.max_stored_separation_arcsec(config) + widest_resolution
    }
}

/// What one cell emits, in the ranks of the whole input.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CellOutput {
    /// Objects whose anchor is in the core, members ascending.
    pub objects: Vec<ResolvedObject>,
    /// Candidate pairs whose lower-ranked source is in the core.
    pub candidates: Vec<Candidate>,
    /// Blends whose coarse source is in the core.
    pub blends: Vec<Blend>,
    /// Groups whose lowest-ranked source is in the core.
    pub groups: usize,
    /// Sources in the largest of those groups.
    pub largest_group: usize,
    /// Those groups resolved greedily.
    pub approximate_groups: usize,
}

/// Matches one cell: `sources` are the cell's core and margin sources (in the
/// whole input's rank order, see [`Sources::subset`]), `core[k]` tells whether
/// local source k is in the core, `global_rank[k]` its rank in the whole input,
/// and `margin_arcsec` the width `w` of the margin the cell holds.
///
/// Returns `None` when a group the cell needs may reach past its margin; the
/// caller then matches the cell again with a wider one.
pub fn match_cell(
    ctx: &CellContext,
    sources: &Sources,
    core: &[bool],
    global_rank: &[u32],
    margin_arcsec: f64,
) -> Option<CellOutput> {
    let n = sources.len();
    if !core.iter().any(|&c| c) {
        return Some(CellOutput::default());
    }
    let config = ctx.config;
    let candidates = find_candidates_with(sources, config, ctx.epochs);
    let blends = find_blends(sources, config);
    let mut blended = vec![false; n];
    for b in &blends {
        blended[b.source as usize] = true;
    }
    let usable: Vec<Candidate> = candidates
        .iter()
        .filter(|c| !blended[c.a as usize] && !blended[c.b as usize])
        .copied()
        .collect();
    let groups = connected_groups(n, usable.iter().map(|c| (c.a, c.b)));
    let mut group_of = vec![0u32; n];
    for (g, members) in groups.iter().enumerate() {
        for &m in members {
            group_of[m as usize] = g as u32;
        }
    }

    // Needed groups and the core sources each is tied to.
    let mut ties: Vec<(u32, u32)> = Vec::new();
    for (k, &is_core) in core.iter().enumerate() {
        if is_core {
            ties.push((group_of[k], k as u32));
        }
    }
    for c in &candidates {
        if core[c.a as usize] {
            ties.push((group_of[c.b as usize], c.a));
        }
        if core[c.b as usize] {
            ties.push((group_of[c.a as usize], c.b));
        }
    }
    for b in &blends {
        if core[b.source as usize] {
            for &u in &b.under {
                ties.push((group_of[u as usize], b.source));
            }
        }
        for &u in &b.under {
            if core[u as usize] {
                ties.push((group_of[b.source as usize], u));
            }
        }
    }
    ties.sort_unstable();
    ties.dedup();
    let margin_rad = margin_arcsec * RAD_PER_ARCSEC;
    let influence_rad = ctx.influence_arcsec * RAD_PER_ARCSEC;
    let mut needed: Vec<u32> = Vec::new();
    for run in ties.chunk_by(|x, y| x.0 == y.0) {
        let g = run[0].0;
        for &m in &groups[g as usize] {
            let bound = run
                .iter()
                .map(|&(_, c)| separation_vec_rad(sources.vec[m as usize], sources.vec[c as usize]))
                .fold(f64::INFINITY, f64::min);
            if bound + influence_rad > margin_rad {
                return None;
            }
        }
        needed.push(g);
    }

    // Resolve the needed groups.
    let (by_group, start) = candidates_by_group(&group_of, groups.len(), &usable);
    let resolve_ctx = Context {
        sources,
        config,
        ln_density_per_sr: ctx.ln_density_per_sr.to_vec(),
    };
    let mut out = CellOutput::default();
    for &g in &needed {
        let members = &groups[g as usize];
        let cands = &by_group[start[g as usize]..start[g as usize + 1]];
        let resolved = resolve_group(&resolve_ctx, members, cands);
        if core[members[0] as usize] {
            out.groups += 1;
            out.largest_group = out.largest_group.max(members.len());
            if resolved.iter().any(|o| o.flags & flags::APPROXIMATE != 0) {
                out.approximate_groups += 1;
            }
        }
        for mut o in resolved {
            if !core[o.members[0] as usize] {
                continue;
            }
            for m in &mut o.members {
                *m = global_rank[*m as usize];
            }
            out.objects.push(o);
        }
    }
    out.candidates = candidates
        .iter()
        .filter(|c| core[c.a as usize])
        .map(|c| Candidate {
            a: global_rank[c.a as usize],
            b: global_rank[c.b as usize],
            ..*c
        })
        .collect();
    out.blends = blends
        .into_iter()
        .filter(|b| core[b.source as usize])
        .map(|b| Blend {
            source: global_rank[b.source as usize],
            under: b.under.iter().map(|&u| global_rank[u as usize]).collect(),
        })
        .collect();
    Some(out)
}

/// The candidates ordered by group (keeping their (a, b) order within a group),
/// and where each group's run starts (plus the total at the end).
pub(crate) fn candidates_by_group(
    group_of: &[u32],
    n_groups: usize,
    candidates: &[Candidate],
) -> (Vec<Candidate>, Vec<usize>) {
    let mut start = vec![0usize; n_groups + 1];
    for c in candidates {
        start[group_of[c.a as usize] as usize + 1] += 1;
    }
    for g in 0..n_groups {
        start[g + 1] += start[g];
    }
    let mut next = start.clone();
    let mut ordered = candidates.to_vec();
    for c in candidates {
        let g = group_of[c.a as usize] as usize;
        ordered[next[g]] = *c;
        next[g] += 1;
    }
    (ordered, start)
}

/// Widest margin built with cone queries, degrees; past it a cell holds every source.
pub const WIDEST_MARGIN_DEG: f64 = 30.0;

/// How a whole-input match was split into cells.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct CellStats {
    /// Cells with at least one core source.
    pub cells: usize,
    /// Their HEALPix order.
    pub order: u8,
    /// Margin width of the first pass, arcsec.
    pub margin_arcsec: f64,
    /// Cells matched again with a wider margin, per doubling.
    pub widened: Vec<usize>,
}

/// Matches every cell of `sources` (the whole input, rank order) at
/// `config.partition_order`, in parallel, and joins what they emit: objects
/// ordered by anchor, candidates by (a, b), blends by source.
pub fn match_by_cells(
    sources: &Sources,
    config: &MatchConfig,
    ln_density_per_sr: &[f64],
    epochs: &EpochStats,
) -> (CellOutput, CellStats) {
    let influence_arcsec = CellContext::influence_radius_arcsec(config, epochs);
    let ctx = CellContext {
        config,
        ln_density_per_sr,
        epochs,
        influence_arcsec,
    };
    let base_margin_arcsec = 2.0 * influence_arcsec.max(1e-3);
    let mut stats = CellStats {
        order: config.partition_order,
        margin_arcsec: base_margin_arcsec,
        ..CellStats::default()
    };
    let mut joined = CellOutput::default();
    if sources.is_empty() {
        return (joined, stats);
    }
    let mut pending: Option<Vec<u64>> = None;
    let mut margin_arcsec = base_margin_arcsec;
    loop {
        // Past a margin this wide, the cells left hold every source.
        let everything = margin_arcsec > WIDEST_MARGIN_DEG * 3600.0;
        let cells = if everything {
            let all: Vec<u32> = (0..sources.len() as u32).collect();
            partition(
                config.partition_order,
                &sources.ra_deg,
                &sources.dec_deg,
                0.0,
            )
            .into_iter()
            .map(|c| {
                let margin = all
                    .iter()
                    .copied()
                    .filter(|r| c.core.binary_search(r).is_err())
                    .collect();
                crate::sky::partition::Cell { margin, ..c }
            })
            .collect()
        } else {
            partition(
                config.partition_order,
                &sources.ra_deg,
                &sources.dec_deg,
                margin_arcsec / 3600.0,
            )
        };
        let held_arcsec = if everything {
            f64::INFINITY
        } else {
            margin_arcsec
        };
        let todo: Vec<&crate::sky::partition::Cell> = cells
            .iter()
            .filter(|c| !c.core.is_empty())
            .filter(|c| {
                pending
                    .as_ref()
                    .is_none_or(|p| p.binary_search(&c.id).is_ok())
            })
            .collect();
        if pending.is_none() {
            stats.cells = todo.len();
        }
        let results: Vec<(u64, Option<CellOutput>)> = todo
            .par_iter()
            .map(|cell| {
                let mut ranks: Vec<u32> = Vec::with_capacity(cell.core.len() + cell.margin.len());
                ranks.extend_from_slice(&cell.core);
                ranks.extend_from_slice(&cell.margin);
                ranks.sort_unstable();
                let core: Vec<bool> = ranks
                    .iter()
                    .map(|r| cell.core.binary_search(r).is_ok())
                    .collect();
                let local = sources.subset(&ranks);
                (
                    cell.id,
                    match_cell(&ctx, &local, &core, &ranks, held_arcsec),
                )
            })
            .collect();
        let mut again: Vec<u64> = Vec::new();
        for (id, r) in results {
            match r {
                Some(o) => {
                    joined.groups += o.groups;
                    joined.largest_group = joined.largest_group.max(o.largest_group);
                    joined.approximate_groups += o.approximate_groups;
                    joined.objects.extend(o.objects);
                    joined.candidates.extend(o.candidates);
                    joined.blends.extend(o.blends);
                }
                None => again.push(id),
            }
        }
        if again.is_empty() {
            break;
        }
        assert!(
            !everything,
            "a cell holding every source is always complete"
        );
        stats.widened.push(again.len());
        again.sort_unstable();
        pending = Some(again);
        margin_arcsec *= 2.0;
    }
    joined.objects.par_sort_unstable_by_key(|o| o.members[0]);
    joined.candidates.par_sort_unstable_by_key(|c| (c.a, c.b));
    joined.blends.sort_unstable_by_key(|b| b.source);
    (joined, stats)
}
