//! Resolving one connected group of candidates into objects.
//!
//! A group's sources are split into objects, each with at most one source per
//! catalog and every pair of its sources a candidate pair, by maximizing the sum
//! over objects of the log posterior odds that the object's sources are one
//! source on the sky:
//!
//! score(O) = ln B(O) + ln P₀(O) − ln(1 − P₀(O)),  score of a single source = 0,
//!
//! with B the n-catalog Bayes factor and P₀ the prior of Budavári & Szalay (2008,
//! ApJ 679, 301); see [`super::bayes`]. Each term is the log odds of "one object"
//! against "unrelated sources", so the sum compares any split of the group with
//! the all-separate split, and the best split is the maximum a posteriori one.
//! Groups of up to `max_exact_group` sources are searched exhaustively (all
//! cliques, in rank order, the first best split kept); larger groups, or searches
//! over a node budget, are merged greedily by decreasing score and flagged
//! `approximate`.
//!
//! Afterwards each object gets member probabilities p_i = σ(score(O) − score(O∖i))
//! (σ the logistic function; for two sources this is the pair's posterior), and
//! flags: see [`super::flags`]. A source of a coarser catalog with candidates in
//! one finer catalog that resolves them into two or more sources, in different
//! objects and closer together than the coarse catalog's resolution, is a blend: it is taken out of any object and kept as its own, flagged `blend`,
//! and the objects under it are flagged `has_blend`.

use std::collections::HashMap;

use super::bayes::{ln_bayes_factor, ln_posterior_odds};
use super::candidates::Candidate;
use super::config::MatchConfig;
use super::flags;
use super::prepare::{RAD_PER_ARCSEC, Sources};
use crate::sky::separation::separation_vec_rad;

/// Most members an object can have here (one per catalog); larger groups of
/// catalogs are refused by [`super::prepare::Sources::prepare`].
pub const MAX_MEMBERS: usize = 64;

/// Exact-search node budget per group; past it the greedy merge is used.
pub const NODE_BUDGET: usize = 200_000;

/// Prior probabilities are capped at this value, so that no association is
/// believed before its positions are seen (common practice).
pub const MAX_PRIOR: f64 = 0.5;

/// What resolution needs besides the group: sources, settings and densities.
pub struct Context<'a> {
    /// All sources in rank order.
    pub sources: &'a Sources,
    /// Match settings.
    pub config: &'a MatchConfig,
    /// ln of each catalog's surface density, sources per steradian.
    pub ln_density_per_sr: Vec<f64>,
}

impl Context<'_> {
    /// ln P₀ for one object drawn from `catalogs`:
    /// P₀ = ρ★ / Π ρ_i / (4π)^(n−1) with ρ★ = `common_fraction` × min ρ_i, capped at [`MAX_PRIOR`].
    pub fn ln_prior(&self, catalogs: &[usize]) -> f64 {
        let n = catalogs.len() as f64;
        let ln_rho = catalogs.iter().map(|&c| self.ln_density_per_sr[c]);
        let ln_common =
            self.config.common_fraction.ln() + ln_rho.clone().fold(f64::INFINITY, f64::min);
        let ln_p0 = ln_common - ln_rho.sum::<f64>() - (n - 1.0) * (4.0 * std::f64::consts::PI).ln();
        ln_p0.min(MAX_PRIOR.ln())
    }
}

/// One object of a resolved group.
#[derive(Debug, Clone, PartialEq)]
pub struct ResolvedObject {
    /// Ranks of the member sources, ascending (the first is the anchor).
    pub members: Vec<u32>,
    /// Log posterior odds of the association (0 for a single source).
    pub score: f64,
    /// Posterior probability of the association (1 for a single source).
    pub probability: f64,
    /// Per member, the probability that it belongs to the object.
    pub member_probability: Vec<f64>,
    /// Flag bits, see [`super::flags`].
    pub flags: u32,
    /// Anchor ranks of related objects: for a blend, the objects under it; for an
    /// object under a blend, the blend.
    pub related: Vec<u32>,
}

/// The candidates of one group, in local indices.
struct Group<'a> {
    ctx: &'a Context<'a>,
    members: &'a [u32],
    /// sep_arcsec of candidate pairs, NaN otherwise (m × m).
    sep: Vec<f64>,
    catalog: Vec<usize>,
}

impl Group<'_> {
    fn m(&self) -> usize {
        self.members.len()
    }

    fn sep(&self, i: usize, j: usize) -> f64 {
        self.sep[i * self.m() + j]
    }

    fn adjacent(&self, i: usize, j: usize) -> bool {
        !self.sep(i, j).is_nan()
    }

    /// Log posterior odds of the sources `locals` being one object.
    fn score(&self, locals: &[usize]) -> f64 {
        let n = locals.len();
        if n < 2 {
            return 0.0;
        }
        // An object has at most one source per catalog, so at most MAX_MEMBERS.
        let mut sigma = [0.0f64; MAX_MEMBERS];
        let mut cats = [0usize; MAX_MEMBERS];
        for (k, &l) in locals.iter().enumerate() {
            sigma[k] = self.ctx.sources.sigma_rad[self.members[l] as usize];
            cats[k] = self.catalog[l];
        }
        let ln_b = ln_bayes_factor(&sigma[..n], |i, j| {
            self.sep(locals[i], locals[j]) * RAD_PER_ARCSEC
        });
        ln_posterior_odds(ln_b, self.ctx.ln_prior(&cats[..n]))
    }

    /// True when `locals` can form one object: distinct catalogs, all pairs candidates.
    fn valid(&self, locals: &[usize]) -> bool {
        locals.iter().enumerate().all(|(k, &i)| {
            locals[k + 1..]
                .iter()
                .all(|&j| self.catalog[i] != self.catalog[j] && self.adjacent(i, j))
        })
    }
}

fn bits(mask: u64) -> impl Iterator<Item = usize> {
    (0..64).filter(move |b| mask & (1u64 << b) != 0)
}

fn locals_of(mask: u64) -> Vec<usize> {
    bits(mask).collect()
}

/// Exhaustive search over splits of a small group.
struct Exact<'g> {
    group: &'g Group<'g>,
    neighbours: Vec<u64>,
    full: u64,
    memo: HashMap<u64, f64>,
    best: f64,
    best_split: Vec<u64>,
    current: Vec<u64>,
    nodes: usize,
}

impl Exact<'_> {
    fn clique_score(&mut self, clique: u64) -> f64 {
        if let Some(s) = self.memo.get(&clique) {
            return *s;
        }
        let s = self.group.score(&locals_of(clique));
        self.memo.insert(clique, s);
        s
    }

    /// Splits the unassigned sources; false when the node budget ran out.
    fn split(&mut self, assigned: u64, score: f64) -> bool {
        self.nodes += 1;
        if self.nodes > NODE_BUDGET {
            return false;
        }
        if assigned == self.full {
            if score > self.best + 1e-12 {
                self.best = score;
                self.best_split = self.current.clone();
            }
            return true;
        }
        let s = (!assigned & self.full).trailing_zeros() as usize;
        let allowed = self.neighbours[s] & !assigned & !((1u64 << (s + 1)) - 1);
        self.grow(1u64 << s, allowed, assigned, score)
    }

    /// Tries `clique` as an object, then every extension of it by sources of
    /// `allowed` (higher bits only, so each clique is met once).
    fn grow(&mut self, clique: u64, allowed: u64, assigned: u64, score: f64) -> bool {
        let gain = self.clique_score(clique);
        self.current.push(clique);
        let ok = self.split(assigned | clique, score + gain);
        self.current.pop();
        if !ok {
            return false;
        }
        for t in bits(allowed) {
            let cat = self.group.catalog[t];
            if bits(clique).any(|c| self.group.catalog[c] == cat) {
                continue;
            }
            let higher = !((1u64 << (t + 1)) - 1);
            if !self.grow(
                clique | (1u64 << t),
                allowed & self.neighbours[t] & higher,
                assigned,
                score,
            ) {
                return false;
            }
        }
        true
    }
}

fn exact_split(group: &Group) -> Option<Vec<Vec<usize>>> {
    let m = group.m();
    let neighbours: Vec<u64> = (0..m)
        .map(|i| {
            (0..m)
                .filter(|&j| j != i && group.adjacent(i, j))
                .fold(0u64, |acc, j| acc | (1u64 << j))
        })
        .collect();
    let mut search = Exact {
        group,
        neighbours,
        full: if m == 64 { u64::MAX } else { (1u64 << m) - 1 },
        memo: HashMap::new(),
        best: f64::NEG_INFINITY,
        best_split: Vec::new(),
        current: Vec::new(),
        nodes: 0,
    };
    if !search.split(0, 0.0) {
        return None;
    }
    Some(search.best_split.iter().map(|&c| locals_of(c)).collect())
}

/// Agglomerative merging by decreasing pair score (deterministic).
fn greedy_split(group: &Group) -> Vec<Vec<usize>> {
    let m = group.m();
    let mut edges: Vec<(f64, usize, usize)> = Vec::new();
    for i in 0..m {
        for j in i + 1..m {
            if group.adjacent(i, j) {
                let s = group.score(&[i, j]);
                if s > 0.0 {
                    edges.push((s, i, j));
                }
            }
        }
    }
    edges.sort_by(|x, y| y.0.total_cmp(&x.0).then((x.1, x.2).cmp(&(y.1, y.2))));
    let mut object_of: Vec<usize> = (0..m).collect();
    let mut objects: Vec<Vec<usize>> = (0..m).map(|i| vec![i]).collect();
    for (_, i, j) in edges {
        let (oi, oj) = (object_of[i], object_of[j]);
        if oi == oj {
            continue;
        }
        let mut merged = objects[oi].clone();
        merged.extend_from_slice(&objects[oj]);
        merged.sort_unstable();
        if !group.valid(&merged) {
            continue;
        }
        if group.score(&merged) > group.score(&objects[oi]) + group.score(&objects[oj]) {
            for &k in &objects[oj] {
                object_of[k] = oi;
            }
            objects[oj].clear();
            objects[oi] = merged;
        }
    }
    objects.into_iter().filter(|o| !o.is_empty()).collect()
}

fn logistic(x: f64) -> f64 {
    if x >= 0.0 {
        1.0 / (1.0 + (-x).exp())
    } else {
        let e = x.exp();
        e / (1.0 + e)
    }
}

/// Resolves one group: `members` are its source ranks (ascending) and
/// `candidates` the candidate pairs among them.
pub fn resolve_group(
    ctx: &Context,
    members: &[u32],
    candidates: &[Candidate],
) -> Vec<ResolvedObject> {
    let m = members.len();
    if m == 1 {
        return vec![single(members[0], 0)];
    }
    let local = |rank: u32| {
        members
            .binary_search(&rank)
            .expect("candidate inside its group")
    };
    let mut sep = vec![f64::NAN; m * m];
    for c in candidates {
        let (i, j) = (local(c.a), local(c.b));
        sep[i * m + j] = c.sep_arcsec;
        sep[j * m + i] = c.sep_arcsec;
    }
    let group = Group {
        ctx,
        members,
        sep,
        catalog: members
            .iter()
            .map(|&r| ctx.sources.catalog[r as usize] as usize)
            .collect(),
    };
    let (split, approximate) = if m == 2 {
        // One candidate pair: together when the association is more probable than not.
        if group.score(&[0, 1]) > 0.0 {
            (vec![vec![0, 1]], false)
        } else {
            (vec![vec![0], vec![1]], false)
        }
    } else if m <= ctx.config.max_exact_group.min(64) {
        match exact_split(&group) {
            Some(s) => (s, false),
            None => (greedy_split(&group), true),
        }
    } else {
        (greedy_split(&group), true)
    };
    let mut objects: Vec<Vec<usize>> = split;
    let blends = find_blends(&group, &mut objects);
    let mut object_of = vec![0usize; m];
    for (k, o) in objects.iter().enumerate() {
        for &l in o {
            object_of[l] = k;
        }
    }
    let mut blended = vec![false; m];
    for (c, _) in &blends {
        blended[*c] = true;
    }
    let mut out: Vec<ResolvedObject> = objects
        .iter()
        .map(|o| describe(&group, o, &object_of, &blended, approximate))
        .collect();
    for (coarse, under) in blends {
        let k = object_of[coarse];
        out[k].flags |= flags::BLEND;
        for &u in &under {
            out[u].flags |= flags::HAS_BLEND;
            let anchor = out[k].members[0];
            out[u].related.push(anchor);
            let anchor_u = out[u].members[0];
            out[k].related.push(anchor_u);
        }
    }
    for o in &mut out {
        o.related.sort_unstable();
        o.related.dedup();
    }
    out.sort_by_key(|o| o.members[0]);
    out
}

fn single(rank: u32, extra_flags: u32) -> ResolvedObject {
    ResolvedObject {
        members: vec![rank],
        score: 0.0,
        probability: 1.0,
        member_probability: vec![1.0],
        flags: flags::SINGLE_CATALOG | extra_flags,
        related: Vec::new(),
    }
}

/// Scores, probabilities and per-object flags of one object of the split.
fn describe(
    group: &Group,
    object: &[usize],
    object_of: &[usize],
    blended: &[bool],
    approximate: bool,
) -> ResolvedObject {
    let extra = if approximate { flags::APPROXIMATE } else { 0 };
    let mut fl = extra;
    // Ambiguity: a member with two candidates in one catalog, or whose candidate
    // went to another object. Blends are accounted for by their own flags.
    for &i in object {
        if blended[i] {
            continue;
        }
        let mut seen: Vec<usize> = Vec::new();
        for j in 0..group.m() {
            if j == i || blended[j] || !group.adjacent(i, j) {
                continue;
            }
            if seen.contains(&group.catalog[j]) || object_of[j] != object_of[i] {
                fl |= flags::AMBIGUOUS;
            }
            seen.push(group.catalog[j]);
        }
    }
    let members: Vec<u32> = object.iter().map(|&l| group.members[l]).collect();
    if object.len() == 1 {
        return single(members[0], fl);
    }
    let score = group.score(object);
    let probability = logistic(score);
    if probability < group.ctx.config.min_probability {
        fl |= flags::LOW_PROBABILITY;
    }
    let member_probability = (0..object.len())
        .map(|k| {
            let rest: Vec<usize> = object
                .iter()
                .enumerate()
                .filter(|(q, _)| *q != k)
                .map(|(_, &l)| l)
                .collect();
            logistic(score - group.score(&rest))
        })
        .collect();
    ResolvedObject {
        members,
        score,
        probability,
        member_probability,
        flags: fl,
        related: Vec::new(),
    }
}

/// Finds blends, takes each blended coarse source out of its object into one of
/// its own, and returns (coarse local index, indices of the objects under it).
fn find_blends(group: &Group, objects: &mut Vec<Vec<usize>>) -> Vec<(usize, Vec<usize>)> {
    let settings = &group.ctx.config.catalogs;
    let resolution = |l: usize| settings[group.catalog[l]].resolution_arcsec;
    let m = group.m();
    let mut object_of = vec![0usize; m];
    for (k, o) in objects.iter().enumerate() {
        for &l in o {
            object_of[l] = k;
        }
    }
    let mut blended: Vec<(usize, Vec<usize>)> = Vec::new();
    for c in 0..m {
        let Some(res_c) = resolution(c) else { continue };
        let finer: Vec<usize> = (0..m)
            .filter(|&t| group.adjacent(c, t) && resolution(t).is_some_and(|r| r < res_c))
            .collect();
        let mut under: Vec<usize> = Vec::new();
        for (x, &t1) in finer.iter().enumerate() {
            for &t2 in &finer[x + 1..] {
                // Two sources that one finer catalog resolves, in different objects.
                if object_of[t1] == object_of[t2] || group.catalog[t1] != group.catalog[t2] {
                    continue;
                }
                let sep_arcsec = separation_vec_rad(
                    group.ctx.sources.vec[group.members[t1] as usize],
                    group.ctx.sources.vec[group.members[t2] as usize],
                ) / RAD_PER_ARCSEC;
                if sep_arcsec < res_c {
                    under.push(object_of[t1]);
                    under.push(object_of[t2]);
                }
            }
        }
        under.sort_unstable();
        under.dedup();
        if under.len() >= 2 {
            blended.push((c, under));
        }
    }
    // Take each blended source out of its object into an object of its own.
    let mut result = Vec::with_capacity(blended.len());
    for (c, under) in blended {
        let k = object_of[c];
        let under: Vec<usize> = under
            .into_iter()
            .filter(|&u| u != k || objects[k].len() > 1)
            .collect();
        if objects[k].len() > 1 {
            objects[k].retain(|&l| l != c);
            objects.push(vec![c]);
            object_of[c] = objects.len() - 1;
        }
        result.push((c, under));
    }
    result
}
