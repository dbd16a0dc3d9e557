//! Blends: one source of a coarse catalog that stands for two or more sources a
//! finer catalog resolves, and whether that matters for its flux.
//!
//! **By position.** A source c seen at resolution r (PSF FWHM, arcsec; see
//! [`Sources::resolution_arcsec`]: a catalog's, or the own resolution of the
//! bands a row was detected in) is over several sources when some catalog
//! seen at a finer resolution has two or more sources within r of c that lie
//! closer than r to each other, while c's own catalog has no other source
//! within r of c at c's resolution or coarser (it did not resolve them
//! itself). A finer source that another row of c's own catalog lies nearer
//! to than c does is that row's, not c's (the catalog measured it apart: a row
//! detected in a coarse band alone beside a star its fine bands detected, or a
//! neighbour just beyond r that c's catalog resolved itself); such rows lie
//! within [`CLAIM_REACH`] · r of c. Two sources closer than the FWHM are not separated in the coarse
//! image, so its one source holds the light of both (common practice).
//! Sources whose resolution is not declared take no part.
//!
//! **By flux** (FIELD notes §5.14, common practice). The *contributors* are
//! the sources within r of c of one resolving catalog: the one whose band
//! (with flux densities) is nearest in wavelength to one of c's coarse bands
//! (the bands of c's catalog seen at resolution r or coarser in which c has a
//! detection or an upper limit; ties go to the finer catalog, then the
//! earlier). In each coarse band the contributors' fluxes in that catalog's
//! nearest band that can tell them, carried to the coarse wavelength by each
//! one's colour where a second band gives it, give the shares
//! ([`super::shares::shares_at`]). When in every
//! coarse band the same contributor D dominates and its companions carry less
//! than [`MatchConfig::companion_share_limit`] of the flux (the largest share
//! over the bands is kept), the companions cannot spoil c's flux by more than
//! that, and c is *contaminated*, not a blend: it stays in the matching with
//! its candidate pair with D alone, and when it ends in D's object (as the
//! posterior decides) that object keeps c's flux, flagged `contaminated` with
//! the share; the companions' objects are flagged `has_blend` and get c's flux
//! as an upper limit only. When the posterior leaves c on its own it is a
//! blend after all. Otherwise (shares unknown or too large) c is a *blend*: its
//! candidate pairs are left out of the grouping (they stay in the links
//! table), it becomes an object of its own flagged `blend`, and the objects
//! under it are flagged `has_blend`; the SED then gives its flux as an upper
//! limit for each of them.
//!
//! **Positions.** c is handed to D only when c and D are a candidate pair:
//! c's position is consistent with D's alone within the pair's tolerance.
//! The flux-weighted centroid of the contributors lies within (companions'
//! share × their separation) of D, under a tenth of the coarse resolution
//! below the default threshold, so a coarse source consistent with D alone
//! goes to D whether or not it is consistent with the centroid; one that is
//! not consistent with D alone is a blend, since the light it measured is not
//! where the shares put it.

use super::candidates::Candidate;
use super::config::MatchConfig;
use super::input::BandValue;
use super::prepare::Sources;
use super::shares::{is_faint, nearest_band, shares_at};
use crate::sky::separation::separation_vec_rad;
use crate::sky::vector::RAD_PER_ARCSEC;
use crate::sky::zones::ZoneIndex;

/// How far from a coarse source, in units of its resolution r, the rows of
/// its own catalog that may claim a finer source lie: a source within r of c
/// that is nearer to another row than to c lies within 2r of c.
pub const CLAIM_REACH: f64 = 2.0;

/// A coarse source over two or more finer sources (ranks).
#[derive(Debug, Clone, PartialEq)]
pub struct Blend {
    /// The coarse source.
    pub source: u32,
    /// The finer sources within its resolution that lie closer than it to
    /// each other, ascending.
    pub under: Vec<u32>,
    /// When the companions are faint: the source that keeps the coarse one.
    pub dominant: Option<Dominant>,
}

/// The finer source that keeps a contaminated coarse source, and what
/// contaminates it.
#[derive(Debug, Clone, PartialEq)]
pub struct Dominant {
    /// The dominant finer source.
    pub source: u32,
    /// The companions' estimated share of the coarse flux (the largest over
    /// the coarse bands).
    pub companion_share: f64,
    /// The other finer sources the coarse source covers (the other
    /// contributors and the sources under it), ascending.
    pub companions: Vec<u32>,
}

impl Blend {
    /// True when the coarse source is a blend no finer object may own.
    pub fn is_damaging(&self) -> bool {
        self.dominant.is_none()
    }

    /// The finer sources the coarse source covers: those under it, and for a
    /// contaminated one the dominant source and its companions, ascending.
    pub fn covered(&self) -> Vec<u32> {
        let mut all = self.under.clone();
        if let Some(d) = &self.dominant {
            all.push(d.source);
            all.extend_from_slice(&d.companions);
        }
        all.sort_unstable();
        all.dedup();
        all
    }
}

/// Finds every coarse source over several finer ones among `sources`, in the
/// order of their coarse sources, and decides by flux which are blends;
/// `candidates` are the candidate pairs among `sources` (for the position
/// test of a dominant source).
pub fn find_blends(
    sources: &Sources,
    config: &MatchConfig,
    candidates: &[Candidate],
) -> Vec<Blend> {
    let widest = config.widest_resolution_arcsec();
    if widest <= 0.0 || sources.is_empty() {
        return Vec::new();
    }
    let resolution: Vec<Option<f64>> = (0..sources.len())
        .map(|i| sources.resolution_arcsec(i, config))
        .collect();
    let index = ZoneIndex::build(&sources.ra_deg, &sources.dec_deg, widest / 3600.0);
    let mut pairs: Option<Vec<(u32, u32)>> = None;
    let mut blends = Vec::new();
    let mut near: Vec<(usize, f64)> = Vec::new();
    let mut own_rows: Vec<usize> = Vec::new();
    for c in 0..sources.len() {
        let cat = sources.catalog[c];
        let Some(r) = resolution[c] else { continue };
        near.clear();
        own_rows.clear();
        index.for_each_within(
            sources.ra_deg[c],
            sources.dec_deg[c],
            CLAIM_REACH * r / 3600.0,
            |i, sep| {
                if sep <= r {
                    near.push((i, sep));
                }
                if i != c && sources.catalog[i] == cat {
                    own_rows.push(i);
                }
            },
        );
        near.sort_unstable_by_key(|&(i, _)| i);
        let finer = |i: usize| resolution[i].is_some_and(|ri| ri < r);
        if near
            .iter()
            .any(|&(i, _)| i != c && sources.catalog[i] == cat && !finer(i))
        {
            continue;
        }
        // A finer source nearer to another row of c's own catalog than to c is
        // that row's: the catalog measured it apart (a row detected in a coarse
        // band alone beside a star its fine bands detected, or a neighbour
        // just beyond r that c's catalog resolved).
        let claimed = |u: usize| {
            let to_c = separation_vec_rad(sources.vec[c], sources.vec[u]);
            own_rows
                .iter()
                .any(|&o| separation_vec_rad(sources.vec[o], sources.vec[u]) < to_c)
        };
        let mut under: Vec<u32> = Vec::new();
        for (k, &(i, _)) in near.iter().enumerate() {
            if !finer(i) || claimed(i) {
                continue;
            }
            for &(j, _) in &near[k + 1..] {
                if sources.catalog[j] == sources.catalog[i]
                    && finer(j)
                    && !claimed(j)
                    && separation_vec_rad(sources.vec[i], sources.vec[j]) < r * RAD_PER_ARCSEC
                {
                    under.push(i as u32);
                    under.push(j as u32);
                }
            }
        }
        if under.is_empty() {
            continue;
        }
        under.sort_unstable();
        under.dedup();
        let contributors_of = |f: u16| -> Vec<u32> {
            near.iter()
                .filter(|&&(i, _)| i != c && sources.catalog[i] == f && finer(i))
                .map(|&(i, _)| i as u32)
                .collect()
        };
        let dominant = decide(sources, config, c, r, &under, contributors_of).filter(|d| {
            let pairs = pairs.get_or_insert_with(|| {
                let mut p: Vec<(u32, u32)> = candidates.iter().map(|x| (x.a, x.b)).collect();
                p.sort_unstable();
                p
            });
            let key = ((c as u32).min(d.source), (c as u32).max(d.source));
            pairs.binary_search(&key).is_ok()
        });
        blends.push(Blend {
            source: c as u32,
            under,
            dominant,
        });
    }
    blends
}

/// The dominant source of coarse source `c` (seen at resolution `r`) over
/// `under`, when its companions are faint; see the module documentation.
fn decide(
    sources: &Sources,
    config: &MatchConfig,
    c: usize,
    r: f64,
    under: &[u32],
    contributors_of: impl Fn(u16) -> Vec<u32>,
) -> Option<Dominant> {
    if config.companion_share_limit <= 0.0 {
        return None;
    }
    let settings = &config.catalogs[sources.catalog[c] as usize];
    let coarse: Vec<usize> = (0..settings.bands.len())
        .filter(|&b| {
            settings.bands[b].has_flux
                && settings.band_resolution_arcsec(b).is_some_and(|rb| rb >= r)
                && matches!(
                    sources.band_value(c, b),
                    BandValue::Detected(_) | BandValue::Limit(_)
                )
        })
        .collect();
    let mut resolving: Vec<u16> = under.iter().map(|&u| sources.catalog[u as usize]).collect();
    resolving.sort_unstable();
    resolving.dedup();
    // The resolving catalog nearest in wavelength: (distance, resolution, index).
    let mut best: Option<(f64, f64, u16)> = None;
    for &f in &resolving {
        let fine = &config.catalogs[f as usize];
        let Some(d) = coarse
            .iter()
            .filter_map(|&b| nearest_band(&fine.bands, settings.bands[b].wavelength_um))
            .map(|(_, d)| d)
            .reduce(f64::min)
        else {
            continue;
        };
        let res = fine.resolution_arcsec.unwrap_or(0.0);
        if best.is_none_or(|(bd, br, _)| d < bd || (d == bd && res < br)) {
            best = Some((d, res, f));
        }
    }
    let (_, _, f) = best?;
    let fine = &config.catalogs[f as usize];
    let contributors = contributors_of(f);
    let mut dominant: Option<(u32, f64)> = None;
    for &b in &coarse {
        let e = shares_at(&fine.bands, settings.bands[b].wavelength_um, |fb| {
            contributors
                .iter()
                .map(|&k| sources.band_value(k as usize, fb))
                .collect()
        })?;
        let d = contributors[e.dominant];
        match dominant {
            Some((prev, _)) if prev != d => return None,
            Some((_, share)) => dominant = Some((d, share.max(e.companion_share))),
            None => dominant = Some((d, e.companion_share)),
        }
    }
    let (d, share) = dominant?;
    if !is_faint(share, config.companion_share_limit) {
        return None;
    }
    let mut companions: Vec<u32> = contributors
        .iter()
        .chain(under)
        .copied()
        .filter(|&k| k != d)
        .collect();
    companions.sort_unstable();
    companions.dedup();
    Some(Dominant {
        source: d,
        companion_share: share,
        companions,
    })
}

/// The candidate pairs the grouping may use: none of a blend's, and of a
/// contaminated coarse source only its pair with its dominant source, so it
/// can join the dominant source's object or none.
pub fn usable_candidates(
    sources: &Sources,
    candidates: &[Candidate],
    blends: &[Blend],
) -> Vec<Candidate> {
    // Per coarse source: u32::MAX for a blend, else its dominant source.
    let mut only: Vec<Option<u32>> = vec![None; sources.len()];
    for b in blends {
        only[b.source as usize] = Some(b.dominant.as_ref().map_or(u32::MAX, |d| d.source));
    }
    let allowed = |x: u32, y: u32| only[x as usize].is_none_or(|d| d == y);
    candidates
        .iter()
        .filter(|c| allowed(c.a, c.b) && allowed(c.b, c.a))
        .copied()
        .collect()
}
