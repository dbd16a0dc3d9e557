//! The cross-match run: source tables in, objects and links out.
//!
//! [`run_match`] prepares the sources (rank order, reference epoch), estimates
//! catalog densities, finds candidate pairs per sky cell, joins them into
//! connected groups, resolves every group on its own (in parallel), and assembles
//! objects with positions, members, probabilities and flags, plus every candidate
//! as a link. Objects of forced-photometry rows alone are left out, their rows
//! counted per catalog ([`MatchStats::forced_without_counterpart`]); their
//! candidate pairs stay links, naming the unwritten object by its anchor, as
//! links of objects left out by the primary-catalog rule do.
//!
//! Object identifiers: an object's `object_id` is `<catalog>:<source_id>` of its
//! anchor, the member from the earliest catalog in input order (ties within a
//! catalog cannot occur: one source per catalog). The same inputs give the same
//! identifiers whatever the row order, threads or partitioning.
//!
//! Object positions are at the reference epoch: the inverse-variance weighted mean
//! of the members' positions, where a member without proper motion is carried
//! from its own epoch with the object's proper motion (the mean of its moving
//! members'), when it has one. A moving object (flag `moving`) is placed on its
//! fitted track at the reference epoch (the posterior mean of
//! [`super::motion::fit_motion`], with its error), carries the fitted motion
//! and its errors, and its members' separations are from the track at their
//! own epochs.
//!
//! Ownership for partitioned runs: an object belongs to the HEALPix cell of its
//! anchor's position at the reference epoch; `healpix29` is that cell at order 29,
//! from which the cell at any coarser order follows by a shift.

use std::collections::BTreeMap;
use std::time::Instant;

use rayon::prelude::*;
use serde::Serialize;

use super::bayes::posterior;
use super::candidates::EpochStats;
use super::cells::{CellOutput, CellRun, CellStats, match_by_cells};
use super::config::MatchConfig;
use super::density::footprint_area_sr;
use super::flags;
use super::input::SourceTable;
use super::moving::{MovingFit, fit_moving};
use super::prepare::Sources;
use super::resolve::Context;
use super::resolve::ResolvedObject;
use crate::error::Result;
use crate::sky::partition::home_cell;
use crate::sky::propagation::propagate_deg;
use crate::sky::separation::separation_vec_rad;
use crate::sky::vector::RAD_PER_ARCSEC;
use crate::sky::vector::{Vec3, radec_deg_to_vec, vec_to_radec_deg};

/// A source of a catalog, as a member of an object.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Member {
    /// Catalog index (input order).
    pub catalog: usize,
    /// Row of the source in its [`SourceTable`].
    pub row: usize,
    /// Separation from the object position, arcsec.
    pub sep_arcsec: f64,
    /// Probability that this source belongs to the object.
    pub probability: f64,
}

/// One merged object.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MatchedObject {
    /// The anchor member: its `<catalog>:<source_id>` is the object's stable
    /// identifier ([`MatchedObject::object_id`]).
    pub anchor: SourceRef,
    /// Position at the reference epoch: inverse-variance weighted mean of the members.
    pub ra_deg: f64,
    /// Declination at the reference epoch, degrees.
    pub dec_deg: f64,
    /// Per-axis 1-sigma error of the position, arcsec.
    pub pos_err_arcsec: f64,
    /// Proper motion in RA (times cos dec), mas/yr: the mean of the members' own; NaN when none has one.
    pub pmra_cosdec_masyr: f64,
    /// Proper motion in Dec, mas/yr; NaN when no member has one.
    pub pmdec_masyr: f64,
    /// Fitted proper motion of a moving object (flag `moving`), (μ_α cos δ,
    /// μ_δ) in mas/yr, and its 1σ errors: the posterior of the moving-source
    /// fit; NaN for other objects.
    pub pm_fit_masyr: [f64; 2],
    /// 1σ errors of `pm_fit_masyr`, mas/yr.
    pub pm_fit_err_masyr: [f64; 2],
    /// Members, one per catalog, in catalog order.
    pub members: Vec<Member>,
    /// Flag bits, see [`super::flags`].
    pub flags: u32,
    /// Posterior probability of the association (1 for one member).
    pub probability: f64,
    /// Related objects (blend relations), by anchor.
    pub related: Vec<SourceRef>,
    /// For a `contaminated` object, the estimated share of its coarse
    /// member's flux that its fainter companions carry.
    pub contamination_share: Option<f64>,
    /// Coarse sources over this object that it does not hold (blends, and
    /// contaminated sources held by a brighter object): the SED gives their
    /// flux as an upper limit.
    pub covered_by: Vec<SourceRef>,
    /// NESTED HEALPix index at order 29 of the anchor's position: the same
    /// whatever the partition; objects of the cell of order k are those with
    /// `healpix29 >> 2(29 − k)` equal to its index.
    pub healpix29: u64,
}

impl MatchedObject {
    /// The object's identifier, `<catalog>:<source_id>` of its anchor.
    pub fn object_id(&self, tables: &[SourceTable]) -> String {
        self.anchor.object_id(tables)
    }

    /// The identifiers of the related objects.
    pub fn related_ids(&self, tables: &[SourceTable]) -> Vec<String> {
        self.related.iter().map(|r| r.object_id(tables)).collect()
    }

    /// The readable status of the flags.
    pub fn status(&self) -> String {
        flags::status(self.flags)
    }

    /// The member from catalog `c`, if any.
    pub fn member(&self, c: usize) -> Option<&Member> {
        self.members.iter().find(|m| m.catalog == c)
    }
}

/// A candidate pair, chosen or not.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Link {
    /// Catalog of the first source.
    pub catalog_a: usize,
    /// Row of the first source.
    pub row_a: usize,
    /// Catalog of the second source.
    pub catalog_b: usize,
    /// Row of the second source.
    pub row_b: usize,
    /// Separation at the reference epoch, arcsec.
    pub sep_arcsec: f64,
    /// Normalized distance (errors and floors included).
    pub norm_dist: f64,
    /// ln of the pair's Bayes factor.
    pub ln_bayes: f64,
    /// Posterior probability of the pair alone being one object.
    pub probability: f64,
    /// True when both sources ended in the same object.
    pub chosen: bool,
    /// Offset of the second source from the first toward the east (Δα cos δ),
    /// arcsec, at the epoch they were compared, after any offset correction.
    pub dra_cosdec_arcsec: f64,
    /// Offset of the second source from the first toward the north, arcsec.
    pub ddec_arcsec: f64,
    /// True when the pair passes only the tolerance widened for motion
    /// (`max_motion_masyr`): it can be chosen only within a moving object.
    pub moving_only: bool,
    /// Anchor of the object of the first source (its identifier is
    /// `<catalog>:<source id>` of this source, built when the link is written).
    pub object_a: SourceRef,
    /// Anchor of the object of the second source.
    pub object_b: SourceRef,
}

/// A source of one catalog: its catalog index and row in its [`SourceTable`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub struct SourceRef {
    /// Catalog index (input order).
    pub catalog: u32,
    /// Row of the source in its table.
    pub row: u32,
}

impl SourceRef {
    /// The identifier `<catalog>:<source id>` of the object anchored on this source.
    pub fn object_id(&self, tables: &[SourceTable]) -> String {
        let t = &tables[self.catalog as usize];
        format!("{}:{}", t.name, &t.source_id[self.row as usize])
    }
}

/// Wall-clock seconds of each phase.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct PhaseSeconds {
    /// Rank ordering and epoch propagation.
    pub prepare: f64,
    /// Density estimates.
    pub densities: f64,
    /// The cells: partitioning, candidate search, groups and their resolution.
    pub candidates: f64,
    /// Objects and links.
    pub assemble: f64,
}

/// Counts of a match run.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct MatchStats {
    /// Sources per catalog.
    pub sources: Vec<usize>,
    /// Surface density used for each catalog's prior, per square degree.
    pub density_per_deg2: Vec<f64>,
    /// Candidate pairs.
    pub candidates: usize,
    /// Connected groups (including single sources).
    pub groups: usize,
    /// Sources in the largest group.
    pub largest_group: usize,
    /// Groups resolved greedily.
    pub approximate_groups: usize,
    /// Objects kept.
    pub objects: usize,
    /// Objects left out by the primary-catalog rule.
    pub objects_not_primary: usize,
    /// Per catalog, forced-photometry rows left out because they ended in an
    /// object of forced rows alone (no counterpart that is not forced); empty
    /// when no source is a forced row. Not serialized here: run.json gives it
    /// by catalog name.
    #[serde(skip)]
    pub forced_without_counterpart: Vec<usize>,
    /// Objects per number of members.
    pub objects_by_members: BTreeMap<usize, usize>,
    /// Objects per flag name.
    pub flags: BTreeMap<String, usize>,
    /// How the match was split into sky cells (not serialized: it depends on the
    /// partition, the result does not).
    #[serde(skip)]
    pub cells: CellStats,
    /// Seconds per phase (not serialized, so records of the same inputs are identical).
    #[serde(skip)]
    pub seconds: PhaseSeconds,
}

/// The result of a match.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MatchResult {
    /// Objects, ordered by anchor (catalog, then source identifier).
    pub objects: Vec<MatchedObject>,
    /// Every candidate pair.
    pub links: Vec<Link>,
    /// Counts and timings.
    pub stats: MatchStats,
}

/// Square degrees per steradian, (180/π)².
pub const DEG2_PER_SR: f64 = (180.0 / std::f64::consts::PI) * (180.0 / std::f64::consts::PI);

/// Cross-matches `tables` (one per catalog, in the order of `config.catalogs`).
///
/// # Errors
/// A usage error for duplicated source identifiers, non-finite positions, or
/// settings that do not fit the tables.
pub fn run_match(tables: &[SourceTable], config: &MatchConfig) -> Result<MatchResult> {
    run_match_with_area(tables, config, None)
}

/// As [`run_match`], with the field area (steradians) given instead of estimated
/// per catalog; all catalogs are then taken to cover that area.
///
/// # Errors
/// As [`run_match`].
pub fn run_match_with_area(
    tables: &[SourceTable],
    config: &MatchConfig,
    area_sr: Option<f64>,
) -> Result<MatchResult> {
    let setup = MatchSetup::new(tables, config, area_sr)?;
    setup.run(config, CellRun::default())
}

/// A catalog's surface density for the prior: `rows` over `area_sr` (1 per
/// steradian for an empty footprint, so its logarithm stays finite).
pub fn density_per_sr(rows: usize, area_sr: f64) -> f64 {
    if area_sr > 0.0 {
        rows as f64 / area_sr
    } else {
        1.0
    }
}

/// What every cell shares: the sources of the whole input in rank order, each
/// catalog's density and the epoch statistics. Cells matched apart (a subset of
/// the sky, a worker process, a resumed run) use the same setup, so they agree.
pub struct MatchSetup {
    /// The whole input, rank order.
    pub sources: Sources,
    /// Surface density of each catalog, sources per steradian.
    pub density_per_sr: Vec<f64>,
    /// ln of `density_per_sr`.
    pub ln_density_per_sr: Vec<f64>,
    /// Epoch statistics of the whole input.
    pub epochs: EpochStats,
    /// Rows per catalog.
    pub rows: Vec<usize>,
    seconds: PhaseSeconds,
}

impl MatchSetup {
    /// Ranks the sources of `tables` and measures densities (over `area_sr`
    /// when given, else each catalog's own footprint) and epoch statistics.
    ///
    /// # Errors
    /// As [`run_match`].
    pub fn new(
        tables: &[SourceTable],
        config: &MatchConfig,
        area_sr: Option<f64>,
    ) -> Result<MatchSetup> {
        let mut seconds = PhaseSeconds::default();
        let t = Instant::now();
        let sources = Sources::prepare(tables, config)?;
        seconds.prepare = t.elapsed().as_secs_f64();
        let t = Instant::now();
        let density_per_sr: Vec<f64> = (0..tables.len())
            .into_par_iter()
            .map(|c| {
                let range = sources.catalog_start[c]..sources.catalog_start[c + 1];
                let area = area_sr.unwrap_or_else(|| {
                    footprint_area_sr(&sources.ra_deg[range.clone()], &sources.dec_deg[range])
                });
                density_per_sr(sources.catalog_len(c), area)
            })
            .collect();
        seconds.densities = t.elapsed().as_secs_f64();
        let epochs = EpochStats::of(&sources, config.reference_epoch_yr);
        Ok(MatchSetup {
            ln_density_per_sr: density_per_sr.iter().map(|d| d.ln()).collect(),
            density_per_sr,
            epochs,
            rows: tables.iter().map(SourceTable::len).collect(),
            sources,
            seconds,
        })
    }

    /// Ranks the sources of `tables`, a part of the input, with the densities,
    /// epoch statistics and row counts of the whole input measured beforehand
    /// (a streaming build's first pass).
    ///
    /// # Errors
    /// As [`run_match`].
    pub fn with_statistics(
        tables: &[SourceTable],
        config: &MatchConfig,
        density_per_sr: Vec<f64>,
        epochs: EpochStats,
        rows: Vec<usize>,
    ) -> Result<MatchSetup> {
        let t = Instant::now();
        let sources = Sources::prepare(tables, config)?;
        let seconds = PhaseSeconds {
            prepare: t.elapsed().as_secs_f64(),
            ..PhaseSeconds::default()
        };
        Ok(MatchSetup {
            ln_density_per_sr: density_per_sr.iter().map(|d| d.ln()).collect(),
            density_per_sr,
            epochs,
            rows,
            sources,
            seconds,
        })
    }

    /// Matches the cells `cells` selects and assembles their objects and links.
    ///
    /// # Errors
    /// Whatever `cells.on_complete` returns.
    pub fn run(&self, config: &MatchConfig, cells: CellRun) -> Result<MatchResult> {
        let mut seconds = self.seconds.clone();
        let t = Instant::now();
        let (joined, cell_stats) = match_by_cells(
            &self.sources,
            config,
            &self.ln_density_per_sr,
            &self.epochs,
            cells,
        )?;
        seconds.candidates = t.elapsed().as_secs_f64();
        let ctx = Context {
            sources: &self.sources,
            config,
            ln_density_per_sr: self.ln_density_per_sr.clone(),
        };
        let t = Instant::now();
        let mut result = assemble(&ctx, joined);
        result.stats.cells = cell_stats;
        seconds.assemble = t.elapsed().as_secs_f64();
        result.stats.density_per_deg2 = self
            .density_per_sr
            .iter()
            .map(|d| d / DEG2_PER_SR)
            .collect();
        result.stats.sources = self.rows.clone();
        result.stats.seconds = seconds;
        Ok(result)
    }
}

/// A moving object from its members' fit: position on the track at the
/// reference epoch (the fit's tangent offsets carried back onto the sphere),
/// its per-axis error (the mean of the two axes' variances), the fitted
/// motion with errors, and each member's offset from the track at its epoch.
fn moving_object(
    o: &ResolvedObject,
    m: &MovingFit,
    healpix29: u64,
    anchor_of_rank: &dyn Fn(u32) -> SourceRef,
    sources: &Sources,
) -> MatchedObject {
    let fit = &m.fit;
    // Normalising u₀ + ξ E + η N inverts the gnomonic projection exactly, and
    // that is what one year of "motion" (ξ, η) per year does.
    let (ra_deg, dec_deg) = propagate_deg(
        m.tangent_deg.0,
        m.tangent_deg.1,
        fit.pos_ref_arcsec[0] * 1000.0,
        fit.pos_ref_arcsec[1] * 1000.0,
        1.0,
    );
    let cov = fit.pos_ref_cov_arcsec2;
    MatchedObject {
        anchor: anchor_of_rank(o.members[0]),
        ra_deg,
        dec_deg,
        pos_err_arcsec: (0.5 * (cov[0][0] + cov[1][1])).sqrt(),
        pmra_cosdec_masyr: f64::NAN,
        pmdec_masyr: f64::NAN,
        pm_fit_masyr: [fit.pm_arcsec_yr[0] * 1000.0, fit.pm_arcsec_yr[1] * 1000.0],
        pm_fit_err_masyr: [
            fit.pm_cov_arcsec2_yr2[0][0].sqrt() * 1000.0,
            fit.pm_cov_arcsec2_yr2[1][1].sqrt() * 1000.0,
        ],
        members: o
            .members
            .iter()
            .zip(&o.member_probability)
            .enumerate()
            .map(|(k, (&r, &p))| Member {
                catalog: sources.catalog[r as usize] as usize,
                row: sources.row[r as usize] as usize,
                sep_arcsec: m.residual_arcsec[k],
                probability: p,
            })
            .collect(),
        flags: o.flags,
        probability: o.probability,
        related: o.related.iter().map(|&r| anchor_of_rank(r)).collect(),
        contamination_share: o.contamination_share,
        covered_by: o.covered_by.iter().map(|&r| anchor_of_rank(r)).collect(),
        healpix29,
    }
}

fn assemble(ctx: &Context, cells: CellOutput) -> MatchResult {
    let (sources, config) = (ctx.sources, ctx.config);
    let CellOutput {
        objects: resolved,
        links: cell_links,
        groups,
        largest_group,
        approximate_groups,
    } = cells;
    let mut stats = MatchStats {
        candidates: cell_links.len(),
        groups,
        largest_group,
        approximate_groups,
        ..MatchStats::default()
    };
    let anchor_of_rank = |rank: u32| -> SourceRef {
        let r = rank as usize;
        SourceRef {
            catalog: u32::from(sources.catalog[r]),
            row: sources.row[r],
        }
    };
    // Consumed as they are assembled, so the cells' objects are freed on the way.
    let mut objects: Vec<MatchedObject> = resolved
        .into_par_iter()
        .map(|o| {
            let anchor = o.members[0] as usize;
            let healpix29 = home_cell(29, sources.ra_deg[anchor], sources.dec_deg[anchor]);
            if o.members.len() == 1 {
                // One source: its own position (at the reference epoch when it moves),
                // error and motion.
                return MatchedObject {
                    anchor: anchor_of_rank(o.members[0]),
                    ra_deg: sources.ra_deg[anchor],
                    dec_deg: sources.dec_deg[anchor],
                    pos_err_arcsec: sources.sigma_rad[anchor] / RAD_PER_ARCSEC,
                    pmra_cosdec_masyr: sources.pm_masyr[anchor].0,
                    pmdec_masyr: sources.pm_masyr[anchor].1,
                    pm_fit_masyr: [f64::NAN; 2],
                    pm_fit_err_masyr: [f64::NAN; 2],
                    members: vec![Member {
                        catalog: sources.catalog[anchor] as usize,
                        row: sources.row[anchor] as usize,
                        sep_arcsec: 0.0,
                        probability: o.member_probability[0],
                    }],
                    flags: o.flags,
                    probability: o.probability,
                    related: o.related.iter().map(|&r| anchor_of_rank(r)).collect(),
                    contamination_share: o.contamination_share,
                    covered_by: o.covered_by.iter().map(|&r| anchor_of_rank(r)).collect(),
                    healpix29,
                };
            }
            if o.flags & flags::MOVING != 0 {
                let ranks: Vec<usize> = o.members.iter().map(|&m| m as usize).collect();
                if let Some(fit) = fit_moving(sources, config, &ranks) {
                    return moving_object(&o, &fit, healpix29, &anchor_of_rank, sources);
                }
            }
            // The object's proper motion is the mean of its members' own; members
            // without one are carried with it from their epoch to the reference epoch.
            let (mut pm_sum, mut moving) = ((0.0, 0.0), 0usize);
            for &m in &o.members {
                if sources.has_pm(m as usize) {
                    let p = sources.pm_masyr[m as usize];
                    pm_sum = (pm_sum.0 + p.0, pm_sum.1 + p.1);
                    moving += 1;
                }
            }
            let pm = if moving == 0 {
                (f64::NAN, f64::NAN)
            } else {
                (pm_sum.0 / moving as f64, pm_sum.1 / moving as f64)
            };
            let at_reference = |m: usize| -> Vec3 {
                if sources.has_pm(m) || pm.0.is_nan() || !sources.epoch_yr[m].is_finite() {
                    sources.vec[m]
                } else {
                    let dt = config.reference_epoch_yr - sources.epoch_yr[m];
                    let (ra, dec) =
                        propagate_deg(sources.ra_deg[m], sources.dec_deg[m], pm.0, pm.1, dt);
                    radec_deg_to_vec(ra, dec)
                }
            };
            let mut sum = [0.0f64; 3];
            let mut weight = 0.0;
            for &m in &o.members {
                let w = 1.0 / sources.sigma_rad[m as usize].powi(2);
                let v = at_reference(m as usize);
                for k in 0..3 {
                    sum[k] += w * v[k];
                }
                weight += w;
            }
            let (ra_deg, dec_deg) = vec_to_radec_deg(sum);
            let centre = radec_deg_to_vec(ra_deg, dec_deg);
            let members = o
                .members
                .iter()
                .zip(&o.member_probability)
                .map(|(&m, &p)| Member {
                    catalog: sources.catalog[m as usize] as usize,
                    row: sources.row[m as usize] as usize,
                    sep_arcsec: separation_vec_rad(centre, at_reference(m as usize))
                        / RAD_PER_ARCSEC,
                    probability: p,
                })
                .collect();
            MatchedObject {
                anchor: anchor_of_rank(o.members[0]),
                ra_deg,
                dec_deg,
                pos_err_arcsec: (1.0 / weight).sqrt() / RAD_PER_ARCSEC,
                pmra_cosdec_masyr: pm.0,
                pmdec_masyr: pm.1,
                pm_fit_masyr: [f64::NAN; 2],
                pm_fit_err_masyr: [f64::NAN; 2],
                members,
                flags: o.flags,
                probability: o.probability,
                related: o.related.iter().map(|&r| anchor_of_rank(r)).collect(),
                contamination_share: o.contamination_share,
                covered_by: o.covered_by.iter().map(|&r| anchor_of_rank(r)).collect(),
                healpix29,
            }
        })
        .collect();
    let links = cell_links
        .par_iter()
        .map(|l| {
            let c = &l.pair;
            let (a, b) = (c.a as usize, c.b as usize);
            let (ca, cb) = (sources.catalog[a] as usize, sources.catalog[b] as usize);
            Link {
                catalog_a: ca,
                row_a: sources.row[a] as usize,
                catalog_b: cb,
                row_b: sources.row[b] as usize,
                sep_arcsec: c.sep_arcsec,
                norm_dist: c.norm_dist,
                ln_bayes: c.ln_bayes,
                probability: posterior(c.ln_bayes, ctx.ln_prior(&[ca, cb])),
                chosen: l.object_a == l.object_b,
                dra_cosdec_arcsec: c.east_arcsec,
                ddec_arcsec: c.north_arcsec,
                moving_only: c.moving_only,
                object_a: anchor_of_rank(l.object_a),
                object_b: anchor_of_rank(l.object_b),
            }
        })
        .collect();
    // Forced rows join objects at their positions but never make one alone: a
    // group of forced rows alone is not written, its rows are counted.
    if !sources.forced.is_empty() {
        let mut left_out = vec![0usize; sources.catalog_start.len().saturating_sub(1)];
        objects.retain(|o| {
            let alone = o.flags & flags::FORCED_ONLY != 0;
            if alone {
                for m in &o.members {
                    left_out[m.catalog] += 1;
                }
            }
            !alone
        });
        stats.forced_without_counterpart = left_out;
    }
    if !config.primary.is_empty() {
        let before = objects.len();
        objects.retain(|o| {
            o.members
                .iter()
                .any(|m| config.primary.contains(&m.catalog))
        });
        stats.objects_not_primary = before - objects.len();
    }
    stats.objects = objects.len();
    let mut by_flag = [0usize; flags::ALL.len()];
    let mut clean = 0;
    for o in &objects {
        *stats.objects_by_members.entry(o.members.len()).or_insert(0) += 1;
        for (k, (bit, _)) in flags::ALL.iter().enumerate() {
            if o.flags & bit != 0 {
                by_flag[k] += 1;
            }
        }
        if o.flags & !flags::SINGLE_CATALOG == 0 && o.members.len() > 1 {
            clean += 1;
        }
    }
    for ((_, name), n) in flags::ALL.iter().zip(by_flag) {
        if n > 0 {
            stats.flags.insert(name.to_string(), n);
        }
    }
    if clean > 0 {
        stats.flags.insert("clean".to_string(), clean);
    }
    MatchResult {
        objects,
        links,
        stats,
    }
}
