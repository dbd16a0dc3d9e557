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
//! a blend depends on sources within twice the widest resolution `r_res`
//! ([`super::blends::CLAIM_REACH`]: a finer source within `r_res` of a coarse
//! one may belong to another coarse row up to `2 r_res` away). So
//! ρ = `r_pair` + 2 `r_res`. A group of candidates found in a cell is the group a
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

use std::collections::BTreeMap;

use rayon::prelude::*;

use super::blends::{Blend, find_blends, usable_candidates};
use super::candidates::{Candidate, EpochStats, find_candidates_with};
use super::config::MatchConfig;
use super::flags;
use super::groups::connected_groups;
use super::prepare::Sources;
use super::resolve::{Context, ResolvedObject, resolve_group};
use crate::error::Result;
use crate::sky::partition::{Cell, partition};
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
    /// pair plus [`super::blends::CLAIM_REACH`] times the widest declared
    /// resolution (of a catalog or a band).
    pub fn influence_radius_arcsec(config: &MatchConfig, epochs: &EpochStats) -> f64 {
        epochs.max_stored_separation_arcsec(config)
            + super::blends::CLAIM_REACH * config.widest_resolution_arcsec()
    }
}

/// What one cell emits, in the ranks of the whole input: final objects and
/// links, so that cells (and subsets of cells run apart) join by concatenation.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CellOutput {
    /// Objects whose anchor is in the core, members ascending; their flags and
    /// related anchors include the blend relations.
    pub objects: Vec<ResolvedObject>,
    /// Candidate pairs whose lower-ranked source is in the core, with the
    /// anchors of the objects each source ended in.
    pub links: Vec<CellLink>,
    /// Groups whose lowest-ranked source is in the core.
    pub groups: usize,
    /// Sources in the largest of those groups.
    pub largest_group: usize,
    /// Those groups resolved greedily.
    pub approximate_groups: usize,
}

/// A candidate pair with the anchors (ranks) of the objects its sources ended in.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CellLink {
    /// The pair, in ranks of the whole input.
    pub pair: Candidate,
    /// Anchor rank of the object of `pair.a`.
    pub object_a: u32,
    /// Anchor rank of the object of `pair.b`.
    pub object_b: u32,
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
    let blends = find_blends(sources, config, &candidates);
    let usable = usable_candidates(sources, &candidates, &blends);
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
    // A core source of each group, if it has one.
    let mut core_of_group: Vec<Option<u32>> = vec![None; groups.len()];
    for (k, &is_core) in core.iter().enumerate() {
        if is_core {
            core_of_group[group_of[k] as usize].get_or_insert(k as u32);
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
        // A contaminated source's flags tie the objects of the coarse source,
        // its dominant source and their companions together: when one of their
        // groups holds a core source, all of them are needed.
        if b.dominant.is_some() {
            let mut all = b.covered();
            all.push(b.source);
            let cores: Vec<u32> = all
                .iter()
                .filter_map(|&s| core_of_group[group_of[s as usize] as usize])
                .collect();
            for &k in &cores {
                ties.extend(all.iter().map(|&s| (group_of[s as usize], k)));
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
    // The anchor (local) of the object each source of a needed group ended in.
    let mut anchor_of = vec![u32::MAX; n];
    // Whether each source anchors an object of forced rows alone, which is
    // never written: no other object names it as related.
    let mut anchors_forced_alone = vec![false; if sources.forced.is_empty() { 0 } else { n }];
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
        for o in resolved {
            for &m in &o.members {
                anchor_of[m as usize] = o.members[0];
            }
            if o.flags & flags::FORCED_ONLY != 0 {
                anchors_forced_alone[o.members[0] as usize] = true;
            }
            if core[o.members[0] as usize] {
                out.objects.push(o);
            }
        }
    }
    // Blend relations: a blended source matches nothing (it is an object of its
    // own); every source within the cell's reach of an emitted member is held,
    // so the blends over and under each member are all known here.
    // A contaminated coarse source counts only when it ended in its dominant
    // source's object (its only candidate); left alone, it is a blend.
    let kept = |b: &Blend| {
        b.dominant.as_ref().is_some_and(|d| {
            let holder = anchor_of[b.source as usize];
            holder != u32::MAX && anchor_of[d.source as usize] == holder
        })
    };
    let mut over: Vec<(u32, u32)> = Vec::new();
    for (k, b) in blends.iter().enumerate() {
        match &b.dominant {
            Some(d) if kept(b) => over.extend(d.companions.iter().map(|&u| (u, k as u32))),
            _ => over.extend(b.under.iter().map(|&u| (u, k as u32))),
        }
    }
    over.sort_unstable();
    for o in &mut out.objects {
        let anchor = o.members[0];
        for &m in &o.members {
            // `find_blends` gives the blends in source order.
            if let Ok(k) = blends.binary_search_by_key(&m, |b| b.source) {
                let b = &blends[k];
                match &b.dominant {
                    Some(d) if kept(b) => {
                        o.flags |= flags::CONTAMINATED;
                        o.contamination_share = Some(
                            o.contamination_share
                                .map_or(d.companion_share, |s| s.max(d.companion_share)),
                        );
                        o.related.extend(
                            d.companions
                                .iter()
                                .map(|&u| anchor_of[u as usize])
                                .filter(|&a| a != anchor),
                        );
                    }
                    _ => {
                        o.flags |= flags::BLEND;
                        o.related
                            .extend(b.under.iter().map(|&u| anchor_of[u as usize]));
                    }
                }
            }
            let first = over.partition_point(|&(u, _)| u < m);
            for &(_, k) in over[first..].iter().take_while(|&&(u, _)| u == m) {
                let b = &blends[k as usize];
                // A blend is an object of its own, anchored on itself; a kept
                // contaminated source is in its dominant source's object.
                let holder = if kept(b) {
                    anchor_of[b.source as usize]
                } else {
                    b.source
                };
                if holder != anchor {
                    o.flags |= flags::HAS_BLEND;
                    o.related.push(holder);
                    o.covered_by.push(b.source);
                }
            }
        }
        if !anchors_forced_alone.is_empty() {
            o.related.retain(|&r| !anchors_forced_alone[r as usize]);
        }
        for r in o
            .members
            .iter_mut()
            .chain(o.related.iter_mut())
            .chain(o.covered_by.iter_mut())
        {
            *r = global_rank[*r as usize];
        }
        o.related.sort_unstable();
        o.related.dedup();
        o.covered_by.sort_unstable();
        o.covered_by.dedup();
    }
    // Objects by anchor, whatever the order their groups were resolved in (a
    // group's objects need not precede the next group's), so a cell's output
    // is the same as its part of the joined output.
    out.objects.sort_unstable_by_key(|o| o.members[0]);
    out.links = candidates
        .iter()
        .filter(|c| core[c.a as usize])
        .map(|c| CellLink {
            pair: Candidate {
                a: global_rank[c.a as usize],
                b: global_rank[c.b as usize],
                ..*c
            },
            object_a: global_rank[anchor_of[c.a as usize] as usize],
            object_b: global_rank[anchor_of[c.b as usize] as usize],
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
    /// Of those, the cells this run emitted (all of them unless a subset was asked).
    pub emitted: usize,
    /// Of those, the cells taken as finished from an earlier run's journal.
    pub resumed: usize,
    /// Their HEALPix order.
    pub order: u8,
    /// Margin width of the first pass, arcsec.
    pub margin_arcsec: f64,
    /// Cells matched again with a wider margin, per doubling.
    pub widened: Vec<usize>,
    /// Cells left unfinished because they need a margin wider than
    /// [`CellRun::max_margin_arcsec`] (ascending).
    #[serde(skip)]
    pub deferred: Vec<u64>,
    /// The margin the deferred cells need next, arcsec.
    #[serde(skip)]
    pub deferred_margin_arcsec: f64,
}

/// Called with each cell's index and complete output; an error stops the run.
pub type OnCellComplete<'a> = &'a (dyn Fn(u64, &CellOutput) -> Result<()> + Sync);

/// Which cells a run emits, and what it does with each one it finishes.
#[derive(Default)]
pub struct CellRun<'a> {
    /// Emit only these cells (indices at the partition order, ascending); all when `None`.
    pub subset: Option<Vec<u64>>,
    /// Outputs of cells finished by an earlier run (a resumed run), by cell index.
    pub finished: BTreeMap<u64, CellOutput>,
    /// Told of every cell matched here (e.g. to journal it).
    pub on_complete: Option<OnCellComplete<'a>>,
    /// Margin of the first pass instead of [`first_margin_arcsec`] (a cell
    /// taken up again where an earlier run deferred it).
    pub first_margin_arcsec: Option<f64>,
    /// The widest margin the sources given hold around every selected cell;
    /// cells needing more are deferred, not matched (`None`: the sources are
    /// the whole input).
    pub max_margin_arcsec: Option<f64>,
}

/// Matches every cell of `sources` (the whole input, rank order) at
/// `config.partition_order` that `run` selects, in parallel, and joins what
/// they emit: objects ordered by anchor, links by (a, b).
///
/// # Errors
/// Whatever `run.on_complete` returns.
pub fn match_by_cells(
    sources: &Sources,
    config: &MatchConfig,
    ln_density_per_sr: &[f64],
    epochs: &EpochStats,
    run: CellRun,
) -> Result<(CellOutput, CellStats)> {
    let influence_arcsec = CellContext::influence_radius_arcsec(config, epochs);
    let ctx = CellContext {
        config,
        ln_density_per_sr,
        epochs,
        influence_arcsec,
    };
    let base_margin_arcsec = first_margin_arcsec(influence_arcsec);
    let mut stats = CellStats {
        order: config.partition_order,
        margin_arcsec: base_margin_arcsec,
        ..CellStats::default()
    };
    let mut joined = CellOutput::default();
    if sources.is_empty() {
        return Ok((joined, stats));
    }
    let CellRun {
        subset,
        mut finished,
        on_complete,
        first_margin_arcsec,
        max_margin_arcsec,
    } = run;
    let mut pending: Option<Vec<u64>> = None;
    let mut margin_arcsec = first_margin_arcsec.unwrap_or(base_margin_arcsec);
    loop {
        // Past a margin this wide, the cells left hold every source.
        let everything = margin_arcsec > WIDEST_MARGIN_DEG * 3600.0;
        let cells = cells_with_margin(sources, config.partition_order, margin_arcsec);
        let held_arcsec = if everything {
            f64::INFINITY
        } else {
            margin_arcsec
        };
        let mut todo: Vec<&Cell> = cells.iter().filter(|c| !c.core.is_empty()).collect();
        if pending.is_none() {
            stats.cells = todo.len();
            todo.retain(|c| {
                subset
                    .as_ref()
                    .is_none_or(|s| s.binary_search(&c.id).is_ok())
            });
            stats.emitted = todo.len();
            todo.retain(|c| match finished.remove(&c.id) {
                Some(o) => {
                    stats.resumed += 1;
                    joined.absorb(o);
                    false
                }
                None => true,
            });
        } else {
            todo.retain(|c| {
                pending
                    .as_ref()
                    .is_some_and(|p| p.binary_search(&c.id).is_ok())
            });
        }
        if max_margin_arcsec.is_some_and(|max| margin_arcsec > max) {
            stats.deferred = todo.iter().map(|c| c.id).collect();
            stats.deferred_margin_arcsec = margin_arcsec;
            break;
        }
        let results: Vec<(u64, Option<CellOutput>)> = todo
            .par_iter()
            .map(|cell| {
                let (local, core, ranks) = cell_sources(sources, cell);
                let out = match_cell(&ctx, &local, &core, &ranks, held_arcsec);
                if let (Some(o), Some(tell)) = (&out, on_complete) {
                    tell(cell.id, o)?;
                }
                Ok((cell.id, out))
            })
            .collect::<Result<_>>()?;
        // Reserved at once: growing by doubling would copy the objects several
        // times and hold the old and the new buffer together at the peak.
        let emitted = results.iter().filter_map(|(_, r)| r.as_ref());
        let (objects, links) = emitted.fold((0, 0), |(o, l), out| {
            (o + out.objects.len(), l + out.links.len())
        });
        joined.objects.reserve_exact(objects);
        joined.links.reserve_exact(links);
        let mut again: Vec<u64> = Vec::new();
        for (id, r) in results {
            match r {
                Some(o) => joined.absorb(o),
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
    joined
        .links
        .par_sort_unstable_by_key(|l| (l.pair.a, l.pair.b));
    Ok((joined, stats))
}

impl CellOutput {
    /// Adds what another cell emitted.
    pub fn absorb(&mut self, other: CellOutput) {
        self.groups += other.groups;
        self.largest_group = self.largest_group.max(other.largest_group);
        self.approximate_groups += other.approximate_groups;
        self.objects.extend(other.objects);
        self.links.extend(other.links);
    }
}

/// The margin of the first pass for influence radius ρ: 2ρ (at least 2 mas).
pub fn first_margin_arcsec(influence_arcsec: f64) -> f64 {
    2.0 * influence_arcsec.max(1e-3)
}

/// The cells of `sources` at `order` with margins `margin_arcsec` wide; past
/// [`WIDEST_MARGIN_DEG`] each cell's margin holds every other source.
pub fn cells_with_margin(sources: &Sources, order: u8, margin_arcsec: f64) -> Vec<Cell> {
    if margin_arcsec <= WIDEST_MARGIN_DEG * 3600.0 {
        return partition(
            order,
            &sources.ra_deg,
            &sources.dec_deg,
            margin_arcsec / 3600.0,
        );
    }
    partition(order, &sources.ra_deg, &sources.dec_deg, 0.0)
        .into_iter()
        .map(|c| {
            let margin = (0..sources.len() as u32)
                .filter(|r| c.core.binary_search(r).is_err())
                .collect();
            Cell { margin, ..c }
        })
        .collect()
}

/// A cell's sources as a table of their own (rank order), whether each is in
/// the core, and their ranks in the whole input.
pub fn cell_sources(sources: &Sources, cell: &Cell) -> (Sources, Vec<bool>, Vec<u32>) {
    let mut ranks: Vec<u32> = Vec::with_capacity(cell.core.len() + cell.margin.len());
    ranks.extend_from_slice(&cell.core);
    ranks.extend_from_slice(&cell.margin);
    ranks.sort_unstable();
    let core: Vec<bool> = ranks
        .iter()
        .map(|r| cell.core.binary_search(r).is_ok())
        .collect();
    (sources.subset(&ranks), core, ranks)
}
