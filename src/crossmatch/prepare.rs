//! Preparing sources for matching: one flat, deterministic list of every
//! catalog's sources, brought to the reference epoch.
//!
//! Sources are put in *rank order*: by catalog (input order), then by source
//! identifier. Every later step works on ranks, so the result does not depend on
//! the order of rows in the files, the number of threads or the partitioning; and
//! ties are broken by rank. Identifiers must therefore be unique within a catalog.
//!
//! Positions of sources with a proper motion are propagated to the reference epoch
//! (linear space motion, [`crate::sky::propagation::propagate_deg`]); a source
//! without proper motion keeps its observed position and epoch, and is compared
//! with a moving source at its own epoch (see [`Sources::position_for_pair`]).

use super::bayes::circularized_sigma_arcsec;
use super::config::MatchConfig;
use super::input::{BandValue, SourceTable};
use super::tolerance::Covariance;
use crate::error::{Error, Result};
use crate::sky::propagation::propagate_deg;
use crate::sky::vector::{RAD_PER_ARCSEC, Vec3, radec_deg_to_vec};

/// Every source of every catalog, in rank order, ready for matching.
#[derive(Debug, Clone, Default)]
pub struct Sources {
    /// Catalog index of each source.
    pub catalog: Vec<u16>,
    /// Row of each source in its [`SourceTable`].
    pub row: Vec<u32>,
    /// Right ascension, degrees: at the reference epoch when the source has a
    /// proper motion, else as observed at `epoch_yr`.
    pub ra_deg: Vec<f64>,
    /// Declination, degrees, at the same epoch as `ra_deg`.
    pub dec_deg: Vec<f64>,
    /// Epoch of observation, Julian years.
    pub epoch_yr: Vec<f64>,
    /// Proper motion (mu_ra cos dec, mu_dec), mas/yr; NaN when unknown.
    pub pm_masyr: Vec<(f64, f64)>,
    /// Unit vectors of the positions.
    pub vec: Vec<Vec3>,
    /// Positional covariance (east, north), arcsec², without systematic floors.
    pub cov: Vec<Covariance>,
    /// Circularized per-axis sigma including the catalog's systematic floor, radians.
    pub sigma_rad: Vec<f64>,
    /// First rank of each catalog, plus the total at the end.
    pub catalog_start: Vec<usize>,
    /// Whether each source was measured by forced photometry
    /// ([`SourceTable::is_forced`]); empty when no source was. Read it through
    /// [`Sources::is_forced`].
    pub forced: Vec<bool>,
    /// Per source, [`Sources::bands`] band values ([`BandValue::code`]) in its
    /// catalog's band order; empty unless some catalog declares a resolution
    /// (only blends read it).
    pub photometry: Vec<f64>,
    /// Band values per source in `photometry` (the most bands of any catalog).
    pub bands: usize,
}

impl Sources {
    /// Number of sources.
    pub fn len(&self) -> usize {
        self.catalog.len()
    }

    /// True when there are no sources.
    pub fn is_empty(&self) -> bool {
        self.catalog.is_empty()
    }

    /// Whether source `i` was measured by forced photometry.
    pub fn is_forced(&self, i: usize) -> bool {
        self.forced.get(i).copied().unwrap_or(false)
    }

    /// The value of source `i` in band `b` of its catalog.
    pub fn band_value(&self, i: usize, b: usize) -> BandValue {
        if b >= self.bands {
            return BandValue::None;
        }
        self.photometry
            .get(i * self.bands + b)
            .map_or(BandValue::None, |&c| BandValue::from_code(c))
    }

    /// The resolution source `i` was seen at, arcsec: the finest resolution of
    /// the bands it was detected in (a band's own, else its catalog's); its
    /// catalog's when it has no detection or no photometry was read. `None`
    /// when a band it was detected in has no declared resolution.
    pub fn resolution_arcsec(&self, i: usize, config: &MatchConfig) -> Option<f64> {
        let settings = &config.catalogs[self.catalog[i] as usize];
        let mut finest: Option<f64> = None;
        for b in 0..settings.bands.len() {
            if self.band_value(i, b).is_detection() {
                let r = settings.band_resolution_arcsec(b)?;
                finest = Some(finest.map_or(r, |f: f64| f.min(r)));
            }
        }
        finest.or(settings.resolution_arcsec)
    }

    /// Flattens `tables` into rank order at `config.reference_epoch_yr`.
    ///
    /// # Errors
    /// [`Error::Usage`] when a catalog repeats a source identifier, has a
    /// non-finite position, or when `config` describes a different number of catalogs.
    pub fn prepare(tables: &[SourceTable], config: &MatchConfig) -> Result<Sources> {
        if tables.len() != config.catalogs.len() {
            return Err(Error::Usage(format!(
                "the match settings describe {} catalogs but {} were given",
                config.catalogs.len(),
                tables.len()
            )));
        }
        if tables.len() > super::resolve::MAX_MEMBERS {
            return Err(Error::Usage(format!(
                "too many catalogs: {} (at most {})",
                tables.len(),
                super::resolve::MAX_MEMBERS
            )));
        }
        let total: usize = tables.iter().map(SourceTable::len).sum();
        let mut s = Sources {
            catalog: Vec::with_capacity(total),
            row: Vec::with_capacity(total),
            ra_deg: Vec::with_capacity(total),
            dec_deg: Vec::with_capacity(total),
            epoch_yr: Vec::with_capacity(total),
            pm_masyr: Vec::with_capacity(total),
            vec: Vec::with_capacity(total),
            cov: Vec::with_capacity(total),
            sigma_rad: Vec::with_capacity(total),
            catalog_start: Vec::with_capacity(tables.len() + 1),
            forced: Vec::new(),
            photometry: Vec::new(),
            bands: 0,
        };
        if config.widest_resolution_arcsec() > 0.0 {
            s.bands = tables.iter().map(|t| t.bands).max().unwrap_or(0);
            if s.bands > 0 {
                s.photometry = Vec::with_capacity(total * s.bands);
            }
        }
        let any_forced = tables.iter().any(SourceTable::has_forced);
        for (c, table) in tables.iter().enumerate() {
            s.catalog_start.push(s.len());
            let mut order: Vec<u32> = (0..table.len() as u32).collect();
            order.sort_unstable_by(|&a, &b| {
                table.source_id[a as usize].cmp(&table.source_id[b as usize])
            });
            if let Some(w) = order
                .windows(2)
                .find(|w| table.source_id[w[0] as usize] == table.source_id[w[1] as usize])
            {
                let (a, b) = (w[0].min(w[1]) as usize, w[0].max(w[1]) as usize);
                return Err(Error::Usage(format!(
                    "catalog \"{}\": source identifier \"{}\" appears twice (sources {} and {}); identifiers must be unique within a catalog",
                    table.name,
                    &table.source_id[a],
                    a + 1,
                    b + 1
                )));
            }
            let sys = config.catalogs[c].systematic_arcsec;
            for &r in &order {
                let i = r as usize;
                let (mut ra, mut dec) = (table.ra_deg[i], table.dec_deg[i]);
                if !(ra.is_finite() && dec.is_finite()) {
                    return Err(Error::Usage(format!(
                        "catalog \"{}\": source \"{}\" has no finite position",
                        table.name, &table.source_id[i]
                    )));
                }
                let epoch = table.epoch_yr[i];
                let (pmra, pmdec);
                ((ra, dec), (pmra, pmdec)) = at_reference_epoch(
                    (ra, dec),
                    (table.pmra_cosdec_masyr[i], table.pmdec_masyr[i]),
                    epoch,
                    config.reference_epoch_yr,
                );
                let (a, b, pa) = (
                    table.err_major_arcsec[i],
                    table.err_minor_arcsec[i],
                    table.err_pa_deg[i],
                );
                s.catalog.push(c as u16);
                s.row.push(r);
                s.ra_deg.push(ra);
                s.dec_deg.push(dec);
                s.epoch_yr.push(epoch);
                s.pm_masyr.push((pmra, pmdec));
                s.vec.push(radec_deg_to_vec(ra, dec));
                s.cov.push(Covariance::from_ellipse(a, b, pa));
                s.sigma_rad
                    .push(circularized_sigma_arcsec(a, b, sys) * RAD_PER_ARCSEC);
                if any_forced {
                    s.forced.push(table.is_forced(i));
                }
                if s.bands > 0 {
                    s.photometry
                        .extend((0..s.bands).map(|b| table.band_value(i, b).code()));
                }
            }
        }
        s.catalog_start.push(s.len());
        Ok(s)
    }

    /// The sources of ranks `ranks` (ascending), as a table of their own: local
    /// rank k is `ranks[k]`, so the rank order, and every tie broken by it, is
    /// the same as in `self`.
    ///
    /// # Panics
    /// If `ranks` is not ascending or names a rank outside `self`.
    pub fn subset(&self, ranks: &[u32]) -> Sources {
        assert!(
            ranks.windows(2).all(|w| w[0] < w[1]),
            "subset ranks must be ascending"
        );
        let pick = |i: &u32| *i as usize;
        let ncat = self.catalog_start.len().saturating_sub(1);
        let mut s = Sources {
            catalog: ranks.iter().map(|i| self.catalog[pick(i)]).collect(),
            row: ranks.iter().map(|i| self.row[pick(i)]).collect(),
            ra_deg: ranks.iter().map(|i| self.ra_deg[pick(i)]).collect(),
            dec_deg: ranks.iter().map(|i| self.dec_deg[pick(i)]).collect(),
            epoch_yr: ranks.iter().map(|i| self.epoch_yr[pick(i)]).collect(),
            pm_masyr: ranks.iter().map(|i| self.pm_masyr[pick(i)]).collect(),
            vec: ranks.iter().map(|i| self.vec[pick(i)]).collect(),
            cov: ranks.iter().map(|i| self.cov[pick(i)]).collect(),
            sigma_rad: ranks.iter().map(|i| self.sigma_rad[pick(i)]).collect(),
            catalog_start: Vec::with_capacity(ncat + 1),
            forced: if self.forced.is_empty() {
                Vec::new()
            } else {
                ranks.iter().map(|i| self.forced[pick(i)]).collect()
            },
            photometry: if self.bands == 0 {
                Vec::new()
            } else {
                ranks
                    .iter()
                    .flat_map(|&i| {
                        let at = i as usize * self.bands;
                        self.photometry[at..at + self.bands].iter().copied()
                    })
                    .collect()
            },
            bands: self.bands,
        };
        for c in 0..ncat {
            s.catalog_start
                .push(s.catalog.partition_point(|&k| (k as usize) < c));
        }
        s.catalog_start.push(s.len());
        s
    }

    /// True when source `i` has a proper motion.
    pub fn has_pm(&self, i: usize) -> bool {
        !self.pm_masyr[i].0.is_nan()
    }

    /// Positions of sources `a` and `b` at a common epoch: both as stored when
    /// both or neither have a proper motion; otherwise the moving one is carried
    /// from the reference epoch to the other's epoch of observation.
    pub fn position_for_pair(
        &self,
        a: usize,
        b: usize,
        reference_epoch_yr: f64,
    ) -> ((f64, f64), (f64, f64)) {
        let stored = |i: usize| (self.ra_deg[i], self.dec_deg[i]);
        let moved = |i: usize, to_epoch: f64| {
            let (pmra, pmdec) = self.pm_masyr[i];
            propagate_deg(
                self.ra_deg[i],
                self.dec_deg[i],
                pmra,
                pmdec,
                to_epoch - reference_epoch_yr,
            )
        };
        match (self.has_pm(a), self.has_pm(b)) {
            (true, false) if self.epoch_yr[b].is_finite() => {
                (moved(a, self.epoch_yr[b]), stored(b))
            }
            (false, true) if self.epoch_yr[a].is_finite() => {
                (stored(a), moved(b, self.epoch_yr[a]))
            }
            _ => (stored(a), stored(b)),
        }
    }

    /// Unit vectors of sources `a` and `b` at a common epoch (see
    /// [`Sources::position_for_pair`]); the stored vectors when no source moves.
    pub fn vectors_for_pair(&self, a: usize, b: usize, reference_epoch_yr: f64) -> (Vec3, Vec3) {
        if self.has_pm(a) == self.has_pm(b) {
            return (self.vec[a], self.vec[b]);
        }
        let ((ra_a, dec_a), (ra_b, dec_b)) = self.position_for_pair(a, b, reference_epoch_yr);
        (radec_deg_to_vec(ra_a, dec_a), radec_deg_to_vec(ra_b, dec_b))
    }

    /// Number of sources of catalog `c`.
    pub fn catalog_len(&self, c: usize) -> usize {
        self.catalog_start[c + 1] - self.catalog_start[c]
    }
}

/// A source's position at `reference_epoch_yr` and its proper motion: carried
/// by its motion when it has one and a finite epoch, else where it was seen
/// (and the motion NaN). Matching, partitioning and routing all place a source here.
pub fn at_reference_epoch(
    (ra, dec): (f64, f64),
    (pmra, pmdec): (f64, f64),
    epoch_yr: f64,
    reference_epoch_yr: f64,
) -> ((f64, f64), (f64, f64)) {
    if !(pmra.is_finite() && pmdec.is_finite() && epoch_yr.is_finite()) {
        ((ra, dec), (f64::NAN, f64::NAN))
    } else if epoch_yr != reference_epoch_yr {
        (
            propagate_deg(ra, dec, pmra, pmdec, reference_epoch_yr - epoch_yr),
            (pmra, pmdec),
        )
    } else {
        ((ra, dec), (pmra, pmdec))
    }
}
