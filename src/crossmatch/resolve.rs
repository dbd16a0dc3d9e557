//! Resolving one connected group of candidates into objects.
//!
//! A group's sources are split into objects, each with at most one source per
//! catalog and connected through candidate pairs, by maximizing the sum
//! over objects of the log posterior odds that the object's sources are one
//! source on the sky:
//!
//! score(O) = ln B(O) + ln P₀(O) − ln(1 − P₀(O)),  score of a single source = 0,
//!
//! with B the n-catalog Bayes factor and P₀ the prior of Budavári & Szalay (2008,
//! ApJ 679, 301); see [`super::bayes`]. Each term is the log odds of "one object"
//! against "unrelated sources", so the sum compares any split of the group with
//! the all-separate split, and the best split is the maximum a posteriori one.
//! The Bayes factor of an object uses the separations of all its pairs, candidate
//! or not, so a member far from the others costs the object its probability.
//! Groups of up to `max_exact_group` sources are searched exhaustively (every
//! split, in rank order, the first best kept); larger groups, or searches
//! over a node budget, are merged greedily by decreasing score and flagged
//! `approximate`.
//!
//! Afterwards each object gets member probabilities p_i = σ(score(O) − score(O∖i))
//! (σ the logistic function; for two sources this is the pair's posterior), and
//! flags: see [`super::flags`]. An object whose members were all measured by
//! forced photometry ([`super::prepare::Sources::is_forced`]) is marked
//! [`flags::FORCED_ONLY`]: such measurements confirm objects that others detect
//! and found none alone, so the assembly leaves it out and counts its rows
//! ([`super::engine`]). Blends are found before resolution, in
//! [`super::blends`].
//!
//! Moving objects: B(O) is the mixture of a stationary and a moving component
//! of [`super::moving`] (`(1 − f) B_stat + f B_move`, the same prior P₀) for an
//! object whose members may move (no catalog proper motion, none extended, two
//! or more epochs). An object that is connected through candidate pairs only
//! with the help of pairs that pass only the tolerance widened for motion
//! ([`Candidate::moving_only`]) cannot be stationary: its B is `f B_move`
//! alone, or it is not formed. An object whose moving component carries the
//! larger share of B is flagged `moving`; such pairs count for the ambiguity
//! flag of moving objects only.

use std::collections::HashMap;
use std::hash::{BuildHasherDefault, Hasher};

use super::bayes::{ln_bayes_factor, ln_posterior_odds};
use super::candidates::Candidate;
use super::config::MatchConfig;
use super::flags;
use super::moving::{fit_moving, ln_mixture, may_move};
use super::prepare::Sources;
use crate::sky::propagation::propagate_deg;
use crate::sky::separation::separation_deg;
use crate::sky::vector::RAD_PER_ARCSEC;

/// Most members an object can have here (one per catalog); larger groups of
/// catalogs are refused by [`super::prepare::Sources::prepare`].
pub const MAX_MEMBERS: usize = 64;

/// Exact-search node budget per group; past it the greedy merge is used.
pub const NODE_BUDGET: usize = 100_000;

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
    /// The companions' share of a contaminated member's flux (the largest,
    /// when several members are).
    pub contamination_share: Option<f64>,
    /// Ranks of the coarse sources over this object that it does not hold:
    /// blends, and contaminated sources held by a brighter object.
    pub covered_by: Vec<u32>,
}

/// The candidates of one group, in local indices.
struct Group<'a> {
    ctx: &'a Context<'a>,
    members: &'a [u32],
    /// Separation of every pair at a common epoch, arcsec (m × m).
    sep: Vec<f64>,
    /// Whether each pair is a candidate pair (m × m).
    candidate: Vec<bool>,
    /// Whether each candidate pair passes only the tolerance widened for motion (m × m).
    moving_only: Vec<bool>,
    /// True when some candidate pair of the group is `moving_only`.
    any_moving_only: bool,
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
        self.candidate[i * self.m() + j]
    }

    /// Whether the pair is a candidate pair that passes the ordinary tolerance.
    fn stationary_adjacent(&self, i: usize, j: usize) -> bool {
        self.adjacent(i, j) && !self.moving_only[i * self.m() + j]
    }

    /// True when `locals` are connected through candidate pairs but only with
    /// the help of pairs that pass the widened tolerance alone: such sources
    /// cannot be one stationary object.
    fn needs_motion(&self, locals: &[usize]) -> bool {
        if !self.any_moving_only {
            return false;
        }
        let reach = |edge: &dyn Fn(usize, usize) -> bool| {
            let mut seen = 1u64;
            let mut frontier = 1u64;
            while frontier != 0 {
                let mut next = 0u64;
                for a in bits(frontier) {
                    for (b, &l) in locals.iter().enumerate() {
                        if edge(locals[a], l) {
                            next |= 1u64 << b;
                        }
                    }
                }
                frontier = next & !seen;
                seen |= frontier;
            }
            seen.count_ones() as usize == locals.len()
        };
        !reach(&|i, j| self.stationary_adjacent(i, j)) && reach(&|i, j| self.adjacent(i, j))
    }

    /// Log posterior odds of the sources `locals` being one object.
    fn score(&self, locals: &[usize]) -> f64 {
        self.score_and_motion(locals).0
    }

    /// Log posterior odds of the sources `locals` being one object, and whether
    /// it is one moving object (see the module documentation).
    fn score_and_motion(&self, locals: &[usize]) -> (f64, bool) {
        let n = locals.len();
        if n < 2 {
            return (0.0, false);
        }
        // An object has at most one source per catalog, so at most MAX_MEMBERS.
        let sources = self.ctx.sources;
        let mut sigma = [0.0f64; MAX_MEMBERS];
        let mut cats = [0usize; MAX_MEMBERS];
        let mut ranks = [0usize; MAX_MEMBERS];
        let (mut pm_sum, mut moving) = ((0.0, 0.0), 0usize);
        for (k, &l) in locals.iter().enumerate() {
            let r = self.members[l] as usize;
            ranks[k] = r;
            sigma[k] = sources.sigma_rad[r];
            cats[k] = self.catalog[l];
            if sources.has_pm(r) {
                let p = sources.pm_masyr[r];
                pm_sum = (pm_sum.0 + p.0, pm_sum.1 + p.1);
                moving += 1;
            }
        }
        let ln_prior = self.ctx.ln_prior(&cats[..n]);
        let config = self.ctx.config;
        let ln_b_move = if may_move(sources, config, &ranks[..n]) {
            fit_moving(sources, config, &ranks[..n]).map(|f| f.fit.ln_bayes)
        } else {
            None
        };
        let ln_b_stat = (!self.needs_motion(locals)).then(|| {
            ln_bayes_factor(&sigma[..n], |i, j| {
                let (a, b) = (locals[i], locals[j]);
                if moving > 0 {
                    // Two members without proper motion, seen at different epochs, are
                    // compared after carrying one to the other's epoch with the
                    // object's motion (the mean of its moving members').
                    let pm = (pm_sum.0 / moving as f64, pm_sum.1 / moving as f64);
                    if let Some(sep_arcsec) = self.sep_with_motion(a, b, pm) {
                        return sep_arcsec * RAD_PER_ARCSEC;
                    }
                }
                self.sep(a, b) * RAD_PER_ARCSEC
            })
        });
        let (ln_b, is_moving) = ln_mixture(ln_b_stat, ln_b_move, config.moving_fraction);
        if ln_b == f64::NEG_INFINITY {
            return (f64::NEG_INFINITY, false);
        }
        (ln_posterior_odds(ln_b, ln_prior), is_moving)
    }

    /// The separation of two members without proper motion after carrying `b` to
    /// `a`'s epoch with proper motion `pm` (mas/yr); `None` when either moves on its
    /// own or the epochs are the same.
    fn sep_with_motion(&self, a: usize, b: usize, pm: (f64, f64)) -> Option<f64> {
        let s = self.ctx.sources;
        let (ra, rb) = (self.members[a] as usize, self.members[b] as usize);
        let dt = s.epoch_yr[ra] - s.epoch_yr[rb];
        if s.has_pm(ra) || s.has_pm(rb) || !dt.is_finite() || dt == 0.0 {
            return None;
        }
        let (ra_b, dec_b) = propagate_deg(s.ra_deg[rb], s.dec_deg[rb], pm.0, pm.1, dt);
        Some(separation_deg(s.ra_deg[ra], s.dec_deg[ra], ra_b, dec_b) * 3600.0)
    }

    /// True when `locals` are from distinct catalogs (an object has at most one
    /// source per catalog).
    fn distinct_catalogs(&self, locals: &[usize]) -> bool {
        locals.iter().enumerate().all(|(k, &i)| {
            locals[k + 1..]
                .iter()
                .all(|&j| self.catalog[i] != self.catalog[j])
        })
    }
}

/// A hasher for bit-mask keys: one multiplication (Fibonacci hashing, Knuth,
/// The Art of Computer Programming vol. 3 §6.4), far cheaper than the default.
#[derive(Default)]
struct MaskHasher(u64);

impl Hasher for MaskHasher {
    fn finish(&self) -> u64 {
        self.0
    }

    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = (self.0 ^ u64::from(b)).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        }
    }

    fn write_u64(&mut self, n: u64) {
        self.0 = n.wrapping_mul(0x9E37_79B9_7F4A_7C15);
    }
}

/// The set bits of `mask`, lowest first.
fn bits(mut mask: u64) -> impl Iterator<Item = usize> {
    std::iter::from_fn(move || {
        (mask != 0).then(|| {
            let b = mask.trailing_zeros() as usize;
            mask &= mask - 1;
            b
        })
    })
}

fn locals_of(mask: u64) -> Vec<usize> {
    bits(mask).collect()
}

/// Exhaustive search over splits of a small group: every object is a set of
/// sources from distinct catalogs, connected through candidate pairs.
struct Exact<'g> {
    group: &'g Group<'g>,
    neighbours: Vec<u64>,
    full: u64,
    memo: HashMap<u64, f64, BuildHasherDefault<MaskHasher>>,
    best: f64,
    best_split: Vec<u64>,
    current: Vec<u64>,
    nodes: usize,
}

impl Exact<'_> {
    fn object_score(&mut self, object: u64) -> f64 {
        if let Some(s) = self.memo.get(&object) {
            return *s;
        }
        let mut locals = [0usize; MAX_MEMBERS];
        let mut n = 0;
        for b in bits(object) {
            locals[n] = b;
            n += 1;
        }
        let s = self.group.score(&locals[..n]);
        self.memo.insert(object, s);
        s
    }

    /// The sources of `within` reachable from those of `from` through candidate pairs.
    fn reach(&self, from: u64, within: u64) -> u64 {
        let mut seen = from & within;
        let mut frontier = seen;
        while frontier != 0 {
            let mut next = 0;
            for b in bits(frontier) {
                next |= self.neighbours[b];
            }
            frontier = next & within & !seen;
            seen |= frontier;
        }
        seen
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
        // The lowest unassigned source starts the next object; its other members
        // come from the sources it can reach, at most one per catalog.
        let s = (!assigned & self.full).trailing_zeros() as usize;
        let reachable = self.reach(1u64 << s, !assigned & self.full) & !(1u64 << s);
        // The reachable sources grouped by catalog, as bit masks (catalogs in the
        // order their first source appears), without the starting source's catalog.
        let mut options = [0u64; MAX_MEMBERS];
        let mut option_catalog = [usize::MAX; MAX_MEMBERS];
        let mut count = 0;
        for b in bits(reachable) {
            let cat = self.group.catalog[b];
            if cat == self.group.catalog[s] {
                continue;
            }
            match option_catalog[..count].iter().position(|&c| c == cat) {
                Some(k) => options[k] |= 1u64 << b,
                None => {
                    option_catalog[count] = cat;
                    options[count] = 1u64 << b;
                    count += 1;
                }
            }
        }
        self.choose(&options[..count], 1u64 << s, assigned, score)
    }

    /// Chooses none or one source of each catalog in `options`, then tries the
    /// object if it is connected.
    fn choose(&mut self, options: &[u64], object: u64, assigned: u64, score: f64) -> bool {
        let Some((first, rest)) = options.split_first() else {
            if self.reach(object & object.wrapping_neg(), object) != object {
                return true;
            }
            self.nodes += 1;
            let gain = self.object_score(object);
            self.current.push(object);
            let ok = self.split(assigned | object, score + gain);
            self.current.pop();
            return ok;
        };
        if !self.choose(rest, object, assigned, score) {
            return false;
        }
        for t in bits(*first) {
            if !self.choose(rest, object | (1u64 << t), assigned, score) {
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
        memo: HashMap::default(),
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
        if !group.distinct_catalogs(&merged) {
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
    let mut out = resolve_split(ctx, members, candidates);
    // A forced-photometry measurement confirms an object others found; an
    // object of forced measurements alone is marked, and never written.
    if !ctx.sources.forced.is_empty() {
        for o in &mut out {
            if o.members.iter().all(|&r| ctx.sources.is_forced(r as usize)) {
                o.flags |= flags::FORCED_ONLY;
            }
        }
    }
    out
}

/// The split of one group into objects, with their scores and flags.
fn resolve_split(ctx: &Context, members: &[u32], candidates: &[Candidate]) -> Vec<ResolvedObject> {
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
    let mut candidate = vec![false; m * m];
    let mut moving_only = vec![false; m * m];
    for c in candidates {
        let (i, j) = (local(c.a), local(c.b));
        sep[i * m + j] = c.sep_arcsec;
        sep[j * m + i] = c.sep_arcsec;
        candidate[i * m + j] = true;
        candidate[j * m + i] = true;
        moving_only[i * m + j] = c.moving_only;
        moving_only[j * m + i] = c.moving_only;
    }
    // Pairs that are not candidates still enter the Bayes factor of an object
    // holding both: their separation at a common epoch.
    let epoch = ctx.config.reference_epoch_yr;
    for i in 0..m {
        for j in i + 1..m {
            if sep[i * m + j].is_nan() {
                let (a, b) = (members[i] as usize, members[j] as usize);
                let ((ra_a, dec_a), (ra_b, dec_b)) = ctx.sources.position_for_pair(a, b, epoch);
                let d = separation_deg(ra_a, dec_a, ra_b, dec_b) * 3600.0;
                sep[i * m + j] = d;
                sep[j * m + i] = d;
            }
        }
    }
    let group = Group {
        ctx,
        members,
        sep,
        candidate,
        any_moving_only: moving_only.iter().any(|&x| x),
        moving_only,
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
    let objects: Vec<Vec<usize>> = split;
    let mut object_of = vec![0usize; m];
    for (k, o) in objects.iter().enumerate() {
        for &l in o {
            object_of[l] = k;
        }
    }
    let mut out: Vec<ResolvedObject> = objects
        .iter()
        .map(|o| describe(&group, o, &object_of, approximate))
        .collect();
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
        contamination_share: None,
        covered_by: Vec::new(),
    }
}

/// Scores, probabilities and per-object flags of one object of the split.
fn describe(
    group: &Group,
    object: &[usize],
    object_of: &[usize],
    approximate: bool,
) -> ResolvedObject {
    let extra = if approximate { flags::APPROXIMATE } else { 0 };
    let mut fl = extra;
    let (score, is_moving) = if object.len() > 1 {
        group.score_and_motion(object)
    } else {
        (0.0, false)
    };
    // Ambiguity: a member with two candidates in one catalog, or whose candidate
    // went to another object. Pairs that pass only the widened tolerance are
    // candidates of moving objects only.
    for &i in object {
        let mut seen: Vec<usize> = Vec::new();
        for j in 0..group.m() {
            let counts = if is_moving {
                group.adjacent(i, j)
            } else {
                group.stationary_adjacent(i, j)
            };
            if j == i || !counts {
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
    if is_moving {
        fl |= flags::MOVING;
    }
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
        contamination_share: None,
        covered_by: Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::super::candidates::find_candidates;
    use super::super::{MatchConfig, SourceTable, run_match};
    use super::*;

    /// Three catalogs without proper motions at 2000, 2010, 2020, one source
    /// each at `east_arcsec` east of (150°, 10°), σ = 0.1″.
    fn three_epochs(east_arcsec: [f64; 3]) -> Vec<SourceTable> {
        let dec0: f64 = 10.0;
        (0..3)
            .map(|k| {
                let mut t = SourceTable {
                    name: format!("c{k}"),
                    ..SourceTable::default()
                };
                let ra = 150.0 + east_arcsec[k] / 3600.0 / dec0.to_radians().cos();
                t.push_simple("s", ra, dec0, 2000.0 + 10.0 * k as f64, 0.1);
                t
            })
            .collect()
    }

    #[test]
    fn a_moving_object_scores_as_computed_by_hand() {
        // A star moving 0.2″/yr east: 0, 2, 4″ at 2000, 2010, 2020; σ = 0.1″ (C_i = 0.01 I
        // arcsec²); μ_max = 300 mas/yr, so s = 0.3/3.439 = 0.0872346″/yr, s² = 0.00760989.
        // By hand (FIELD notes §5.11; motion.rs formulas), per axis, τ about the mean epoch
        // 2010 (B does not depend on t₀) = (−10, 0, 10) yr, w = 100 arcsec⁻²:
        //   W = Σw = 300, T₁ = Σwτ = 0, G = Σwτ² − T₁²/W = 20000 yr²/arcsec²;
        //   |Σ| |F| = Π|C_i| · |W| · |K| with K = 1 + s²G = 153.19772 (each axis);
        //   x̄ = 2″ east, residuals (−2, 0, 2)″: χ²_stat = 100 · 8 = 800;
        //   h = Σ τ w (x − x̄) = 2000 + 2000 = 4000; hᵀVh = h² s²/K = 800 s²G/K,
        //   so χ² = 800/K = 5.222010.
        //   ln B(arcsec) = 2 ln 2 − ½ · 3 ln 1e-4 − ½ · 2 ln 300 − ½ · 2 ln K − ½ χ²
        //               = 1.386294 + 13.815511 − 5.703782 − 5.031729 − 2.611005 = 1.855288;
        //   in radians: + 4 · 12.236916 (−ln of 4.848137e-6 rad/″) → ln B_move = 50.802953.
        // Stationary: ln B_stat = 2 ln 2 + ln(w³/Σw) − ½ · 800 in radians = −341.554 (its
        // pairs pass only the widened tolerance, so it is not allowed anyway).
        // Mixture (default f = 0.05): ln(0.05) + 50.802953 = −2.995732 + 50.802953 = 47.807221.
        // Prior with 1e4 sources/deg² per catalog, ρ = 3.282806e7 sr⁻¹:
        // ln P₀ = −2 ln ρ − 2 ln 4π = −34.613590 − 5.062049 = −39.675637.
        // Score = 47.807221 − 39.675637 + P₀ (the −ln(1 − P₀) term) = 8.131584.
        let tables = three_epochs([0.0, 2.0, 4.0]);
        let config = MatchConfig::new(3, 2016.0);
        let sources = Sources::prepare(&tables, &config).unwrap();
        let candidates = find_candidates(&sources, &config);
        assert_eq!(candidates.len(), 3, "{candidates:?}");
        assert!(candidates.iter().all(|c| c.moving_only));
        let rho_per_sr = 1e4 * (180.0 / std::f64::consts::PI).powi(2);
        let ctx = Context {
            sources: &sources,
            config: &config,
            ln_density_per_sr: vec![rho_per_sr.ln(); 3],
        };
        let resolved = resolve_group(&ctx, &[0, 1, 2], &candidates);
        assert_eq!(resolved.len(), 1, "{resolved:?}");
        let o = &resolved[0];
        assert_eq!(o.flags, flags::MOVING);
        assert!((o.score - 8.131584).abs() < 1e-5, "{}", o.score);
        // The fitted motion is the prior-shrunk slope, (Δx/Δt) s²G/K = 0.2 · 152.19772/153.19772
        // = 0.198694″/yr, with variance s²/K = 4.967362e-5 (error 0.007048″/yr), by hand.
        let fit = super::super::moving::fit_moving(&sources, &config, &[0, 1, 2]).unwrap();
        assert!((fit.fit.pm_arcsec_yr[0] - 0.198694).abs() < 1e-6);
        // North: a parallel of declination curves on the tangent plane by ξ² tan δ / 2,
        // 7e-6″ at 4″ and δ = 10°, so the north motion is below 1e-6″/yr.
        assert!(fit.fit.pm_arcsec_yr[1].abs() < 1e-6);
        assert!((fit.fit.pm_cov_arcsec2_yr2[0][0] - 4.967362e-5).abs() < 1e-10);
        // Without the widening the three stay apart: no candidates at all.
        let still = MatchConfig {
            max_motion_masyr: 0.0,
            ..config.clone()
        };
        assert!(find_candidates(&sources, &still).is_empty());
    }

    #[test]
    fn pairs_passing_only_the_widened_tolerance_make_no_stationary_object() {
        // Two sources 1″ apart at 2000 and 2010, σ = 0.1″: beyond 3.439 σ√2 = 0.486″, within
        // 0.486″ + 0.3″/yr · 10 yr. Their stationary score would be
        // ln B_stat = ln 2 − ln(0.02 · 2.35044e-11) − 1/0.04 = 29.08 − 25 = 4.08 in radians,
        // plus ln P₀ − ln(1 − P₀) = −2.531 + 0.083 with ρ = 1 sr⁻¹ (P₀ = 1/4π, a very sparse
        // prior): score 1.63 > 0, so an unconstrained resolution would merge them as stationary. Made extended (they
        // cannot move), they must stay apart.
        let mut tables = three_epochs([0.0, 1.0, 100.0]);
        tables.truncate(2);
        for t in &mut tables {
            t.extended = vec![true];
        }
        let config = MatchConfig::new(2, 2016.0);
        let sources = Sources::prepare(&tables, &config).unwrap();
        let candidates = find_candidates(&sources, &config);
        assert_eq!(candidates.len(), 1);
        assert!(candidates[0].moving_only);
        let ctx = Context {
            sources: &sources,
            config: &config,
            ln_density_per_sr: vec![0.0; 2],
        };
        let resolved = resolve_group(&ctx, &[0, 1], &candidates);
        assert_eq!(resolved.len(), 2, "{resolved:?}");
        assert!(resolved.iter().all(|o| o.flags == flags::SINGLE_CATALOG));
        // Not extended, the same pair is one moving object.
        tables.iter_mut().for_each(|t| t.extended.clear());
        let sources = Sources::prepare(&tables, &config).unwrap();
        let ctx = Context {
            sources: &sources,
            ..ctx
        };
        let resolved = resolve_group(&ctx, &[0, 1], &candidates);
        assert_eq!(resolved.len(), 1, "{resolved:?}");
        assert_eq!(resolved[0].flags, flags::MOVING);
    }

    #[test]
    fn forced_measurements_never_make_an_object_alone() {
        let table = |name: &str| SourceTable {
            name: name.into(),
            ..SourceTable::default()
        };
        let (mut detections, mut photometry, mut second) =
            (table("det"), table("phot"), table("phot2"));
        // A detection with a forced measurement 0.05" east of it; a forced
        // measurement 1' away with only another catalog's forced measurement
        // near it; an unforced source 2' away.
        let dec0: f64 = 10.0;
        let ra = |east_arcsec: f64| 150.0 + east_arcsec / 3600.0 / dec0.to_radians().cos();
        detections.push_simple("d1", ra(0.0), dec0, 2016.0, 0.1);
        photometry.push_simple("p1", ra(0.05), dec0, 2016.0, 0.1);
        photometry.push_simple("p2", ra(60.0), dec0, 2016.0, 0.1);
        photometry.push_simple("p3", ra(120.0), dec0, 2016.0, 0.1);
        photometry.forced = vec![true, true, false];
        second.push_simple("q2", ra(60.03), dec0, 2016.0, 0.1);
        second.forced = vec![true];
        let tables = [detections, photometry, second];
        let result = run_match(&tables, &MatchConfig::new(3, 2016.0)).unwrap();
        let by_id: HashMap<String, u32> = result
            .objects
            .iter()
            .map(|o| (o.object_id(&tables), o.flags))
            .collect();
        // p2 and q2 are one object of forced rows alone: not written, counted.
        assert_eq!(by_id.len(), 2, "{by_id:?}");
        assert_eq!(by_id["det:d1"], 0);
        assert_eq!(by_id["phot:p3"], flags::SINGLE_CATALOG);
        assert_eq!(result.stats.forced_without_counterpart, [0, 1, 1]);
        assert_eq!(result.stats.objects, 2);
        assert!(!result.stats.flags.contains_key("forced_only"));
        // Their candidate pair stays a link, chosen, naming the unwritten object.
        let link = result
            .links
            .iter()
            .find(|l| l.catalog_a == 1 && l.catalog_b == 2)
            .unwrap();
        assert!(link.chosen);
        assert_eq!(link.object_a.object_id(&tables), "phot:p2");
        // Without forced rows every group is an object.
        let mut plain = tables.clone();
        plain[1].forced.clear();
        plain[2].forced.clear();
        let result = run_match(&plain, &MatchConfig::new(3, 2016.0)).unwrap();
        assert_eq!(result.objects.len(), 3);
        assert!(result.stats.forced_without_counterpart.is_empty());
    }
}
