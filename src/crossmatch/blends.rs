//! Blends: one source of a coarse catalog that stands for two or more sources a
//! finer catalog resolves.
//!
//! A source c of a catalog with resolution r (PSF FWHM, arcsec) is a blend when
//! some catalog with a finer resolution has two or more sources within r of c that
//! lie closer than r to each other, while c's own catalog has no other source
//! within r of c (it did not resolve them itself). Two sources closer than the
//! FWHM are not separated in the coarse image, so its one source holds the light
//! of both (common practice). A blend is never handed to one of the objects under
//! it: its candidate pairs are left out of the grouping (they stay in the links
//! table), it becomes an object of its own flagged `blend`, and the objects under
//! it are flagged `has_blend`; the SED then gives its flux as an upper limit for
//! each of them. Catalogs without a declared resolution take no part.

use super::config::MatchConfig;
use super::prepare::Sources;
use crate::sky::zones::ZoneIndex;

/// A blended source and the finer sources under it (ranks).
#[derive(Debug, Clone, PartialEq)]
pub struct Blend {
    /// The coarse source.
    pub source: u32,
    /// The finer sources within its resolution that make it a blend.
    pub under: Vec<u32>,
}

/// Finds every blend among `sources`, in the order of their coarse sources.
pub fn find_blends(sources: &Sources, config: &MatchConfig) -> Vec<Blend> {
    let resolution: Vec<Option<f64>> = config
        .catalogs
        .iter()
        .map(|c| c.resolution_arcsec)
        .collect();
    let widest = resolution.iter().flatten().copied().fold(0.0, f64::max);
    if widest <= 0.0 || sources.is_empty() {
        return Vec::new();
    }
    let index = ZoneIndex::build(&sources.ra_deg, &sources.dec_deg, widest / 3600.0);
    let mut blends = Vec::new();
    let mut near: Vec<(usize, f64)> = Vec::new();
    for c in 0..sources.len() {
        let cat = sources.catalog[c] as usize;
        let Some(r) = resolution[cat] else { continue };
        near.clear();
        index.for_each_within(
            sources.ra_deg[c],
            sources.dec_deg[c],
            r / 3600.0,
            |i, sep| near.push((i, sep)),
        );
        if near
            .iter()
            .any(|&(i, _)| i != c && sources.catalog[i] as usize == cat)
        {
            continue;
        }
        let mut under: Vec<u32> = Vec::new();
        for (k, &(i, _)) in near.iter().enumerate() {
            let ci = sources.catalog[i] as usize;
            if !resolution[ci].is_some_and(|ri| ri < r) {
                continue;
            }
            for &(j, _) in &near[k + 1..] {
                if sources.catalog[j] as usize == ci
                    && crate::sky::separation::separation_vec_rad(sources.vec[i], sources.vec[j])
                        < r / 3600.0 * std::f64::consts::PI / 180.0
                {
                    under.push(i as u32);
                    under.push(j as u32);
                }
            }
        }
        if !under.is_empty() {
            under.sort_unstable();
            under.dedup();
            blends.push(Blend {
                source: c as u32,
                under,
            });
        }
    }
    blends
}
