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
    /// Positional covariance (east, north), arcsec², without systematic floors,
    /// at the epoch of the stored position: a source with a proper motion and
    /// its errors has (t_ref − t)² σ_μ² added on each axis (see [`Sources::cov_at`]).
    pub cov: Vec<Covariance>,
    /// Circularized per-axis sigma including the catalog's systematic floor, radians
    /// (at the epoch of the stored position, like `cov`).
    pub sigma_rad: Vec<f64>,
    /// Proper-motion errors (μ_α cos δ, μ_δ), mas/yr, NaN when unknown; empty
    /// when no source has them.
    pub pm_err_masyr: Vec<(f64, f64)>,
    /// First rank of each catalog, plus the total at the end.
    pub catalog_start: Vec<usize>,
    /// Whether each source was measured by forced photometry
    /// ([`SourceTable::is_forced`]); empty when no source was. Read it through
    /// [`Sources::is_forced`].
    pub forced: Vec<bool>,
    /// Whether each source is extended ([`SourceTable::is_extended`]); empty
    /// when no source is. Read it through [`Sources::is_extended`].
    pub extended: Vec<bool>,
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

    /// Whether source `i` is extended (a galaxy: it never moves).
    pub fn is_extended(&self, i: usize) -> bool {
        self.extended.get(i).copied().unwrap_or(false)
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
            extended: Vec::new(),
            pm_err_masyr: Vec::new(),
            photometry: Vec::new(),
            bands: 0,
        };
        let any_pm_err = tables.iter().any(|t| !t.pm_err_masyr.is_empty());
        if config.widest_resolution_arcsec() > 0.0 {
            s.bands = tables.iter().map(|t| t.bands).max().unwrap_or(0);
            if s.bands > 0 {
                s.photometry = Vec::with_capacity(total * s.bands);
            }
        }
        let any_forced = tables.iter().any(SourceTable::has_forced);
        let any_extended = tables.iter().any(SourceTable::has_extended);
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
                // A moved position is as uncertain as the motion makes it:
                // σ²(t) = σ² + (t − t_cat)² σ_μ² per axis.
                let pm_err = if pmra.is_finite() {
                    table.pm_err(i)
                } else {
                    (f64::NAN, f64::NAN)
                };
                let (grow_e, grow_n) =
                    motion_growth_arcsec2(pm_err, config.reference_epoch_yr - epoch);
                let mut cov = Covariance::from_ellipse(a, b, pa);
                cov.ee += grow_e;
                cov.nn += grow_n;
                s.cov.push(cov);
                let mut sigma = circularized_sigma_arcsec(a, b, sys);
                if grow_e + grow_n > 0.0 {
                    sigma = (sigma * sigma + 0.5 * (grow_e + grow_n)).sqrt();
                }
                s.sigma_rad.push(sigma * RAD_PER_ARCSEC);
                if any_pm_err {
                    s.pm_err_masyr.push(pm_err);
                }
                if any_forced {
                    s.forced.push(table.is_forced(i));
                }
                if any_extended {
                    s.extended.push(table.is_extended(i));
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
            extended: if self.extended.is_empty() {
                Vec::new()
            } else {
                ranks.iter().map(|i| self.extended[pick(i)]).collect()
            },
            pm_err_masyr: if self.pm_err_masyr.is_empty() {
                Vec::new()
            } else {
                ranks.iter().map(|i| self.pm_err_masyr[pick(i)]).collect()
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

    /// The covariance of source `i` at `epoch_yr` when it is carried there by
    /// its proper motion (stored at the reference epoch): the stored one with
    /// the growth from the motion's errors taken at `epoch_yr` instead,
    /// σ²(t) = σ² + (t − t_cat)² σ_μ² per axis, and the circularized σ (radians)
    /// to match. The stored values when the source has no motion errors.
    pub fn cov_at(&self, i: usize, epoch_yr: f64, reference_epoch_yr: f64) -> (Covariance, f64) {
        let (cov, sigma) = (self.cov[i], self.sigma_rad[i]);
        let Some(&err) = self.pm_err_masyr.get(i) else {
            return (cov, sigma);
        };
        if !err.0.is_finite() || !self.has_pm(i) {
            return (cov, sigma);
        }
        let t_cat = self.epoch_yr[i];
        let (stored_e, stored_n) = motion_growth_arcsec2(err, reference_epoch_yr - t_cat);
        let (want_e, want_n) = motion_growth_arcsec2(err, epoch_yr - t_cat);
        let (de, dn) = (want_e - stored_e, want_n - stored_n);
        let sigma_arcsec = sigma / RAD_PER_ARCSEC;
        (
            Covariance {
                ee: cov.ee + de,
                nn: cov.nn + dn,
                en: cov.en,
            },
            (sigma_arcsec * sigma_arcsec + 0.5 * (de + dn)).sqrt() * RAD_PER_ARCSEC,
        )
    }

    /// Number of sources of catalog `c`.
    pub fn catalog_len(&self, c: usize) -> usize {
        self.catalog_start[c + 1] - self.catalog_start[c]
    }
}

/// The positional variance (east, north) a proper motion with 1σ errors
/// `pm_err_masyr` (mas/yr) adds after `dt_yr` years, arcsec²: (Δt σ_μ)² per
/// axis; zero when the errors are unknown.
pub fn motion_growth_arcsec2(pm_err_masyr: (f64, f64), dt_yr: f64) -> (f64, f64) {
    if !(pm_err_masyr.0.is_finite() && pm_err_masyr.1.is_finite() && dt_yr.is_finite()) {
        return (0.0, 0.0);
    }
    let e = dt_yr * pm_err_masyr.0 / 1000.0;
    let n = dt_yr * pm_err_masyr.1 / 1000.0;
    (e * e, n * n)
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

#[cfg(test)]
mod tests {
    use super::super::{MatchConfig, SourceTable, run_match};

    #[test]
    fn motion_errors_grow_the_positional_error_at_other_epochs() {
        // A star with μ = (100, 0) mas/yr ± (5, 5) mas/yr, σ = 0.05″, seen in 2016 (the
        // reference epoch); a catalog without motions saw it in 2000, 0.1″ north of where
        // the motion puts it then, σ = 0.05″. Compared at 2000:
        // σ²(2000) = 0.0025 + (16 · 0.005)² = 0.0089 arcsec² per axis, so with the other
        // 0.0025: d² = 0.1² / 0.0114 = 0.877193, d = 0.936586 (by hand; FIELD notes §5.2).
        // Without the motion errors d² = 0.01 / 0.005 = 2, d = 1.414214.
        let dec0: f64 = 20.0;
        let mut fast = SourceTable {
            name: "fast".into(),
            ..SourceTable::default()
        };
        fast.push(
            "a",
            150.0,
            dec0,
            2016.0,
            (0.05, 0.05, 0.0),
            Some((100.0, 0.0)),
        );
        let mut old = SourceTable {
            name: "old".into(),
            ..SourceTable::default()
        };
        let ra_2000 = 150.0 - 1.6 / 3600.0 / dec0.to_radians().cos();
        old.push_simple("b", ra_2000, dec0 + 0.1 / 3600.0, 2000.0, 0.05);
        let config = MatchConfig::new(2, 2016.0);
        let plain = run_match(&[fast.clone(), old.clone()], &config).unwrap();
        assert!(
            (plain.links[0].norm_dist - 2f64.sqrt()).abs() < 1e-4,
            "{:?}",
            plain.links
        );
        fast.pm_err_masyr = vec![(5.0, 5.0)];
        let grown = run_match(&[fast, old], &config).unwrap();
        assert!(
            (grown.links[0].norm_dist - 0.936_586).abs() < 1e-4,
            "{:?}",
            grown.links
        );
        assert_eq!(grown.objects.len(), 1);
        // At the reference epoch, the catalog's own, nothing grows.
        let sources = super::Sources::prepare(
            &[
                {
                    let mut t = SourceTable::default();
                    t.push(
                        "a",
                        150.0,
                        dec0,
                        2016.0,
                        (0.05, 0.05, 0.0),
                        Some((100.0, 0.0)),
                    );
                    t.pm_err_masyr = vec![(5.0, 5.0)];
                    t
                },
                SourceTable::default(),
            ],
            &config,
        )
        .unwrap();
        assert!((sources.cov[0].ee - 0.0025).abs() < 1e-15);
        let (at_2000, _) = sources.cov_at(0, 2000.0, 2016.0);
        assert!((at_2000.ee - 0.0089).abs() < 1e-12);
    }
}
