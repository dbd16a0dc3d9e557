//! Settings of a cross-match: reference epoch, tolerances, priors, partitions.
//!
//! Defaults and the assumptions behind them:
//! - tolerance: `Sigma { k: 3.439, max_arcsec: 5.0 }` — 3.439 sigma of the combined
//!   per-axis error encloses 99.73 % of true matches for circular Gaussian errors
//!   (Rayleigh distribution, r_P = σ·sqrt(−2 ln(1−P)); standard), capped at 5″;
//! - systematic floor per catalog: 0″ unless [`CatalogSettings::floor_from_data`]
//!   asks for the floor measured against an astrometric reference
//!   ([`super::systematics::floors_in_force`]); a plan asks for it for every
//!   catalog whose entry fixes no `systematic_arcsec`;
//! - prior: the density of objects common to a set of catalogs is `common_fraction`
//!   (default 1) times the density of the sparsest of them, i.e. by default every
//!   source of the sparsest catalog is assumed to have counterparts in the others;
//! - minimum probability for a clean association: 0.8;
//! - partition order 7 (cells of about 27′; results do not depend on it);
//! - moving sources without a catalog proper motion: motions up to
//!   `max_motion_masyr` = 300 mas/yr are searched for (FIELD notes §5.11: a
//!   few per cent of field stars move 20–300 mas/yr), with the motion prior
//!   described at [`MatchConfig::motion_prior_sigma_arcsec_yr`] and a prior
//!   fraction of such movers `moving_fraction` = 0.05 (the upper end of "a few
//!   per cent", same place; see [`DEFAULT_MOVING_FRACTION`]). The cost: pairs of catalogs without proper motions are searched
//!   μ_max·|t_i − t_j| farther (1.65″ more for epochs 5.5 yr apart), and
//!   cell margins grow by as much.
//! - companion share limit 0.1: a coarse source over several finer ones whose
//!   companions carry less than 10 % of the flux (FIELD notes §5.14, "e.g. 10 %";
//!   common practice) stays with the dominant one, flagged `contaminated`
//!   ([`super::shares`]).

use std::collections::BTreeMap;

/// Default fastest motion searched for, mas/yr (FIELD notes §5.11: a few per
/// cent of field stars move 20–300 mas/yr; common practice).
pub const DEFAULT_MAX_MOTION_MASYR: f64 = 300.0;

/// Default prior fraction of moving objects: 0.05, the upper end of "a few per
/// cent" of field stars moving 20–300 mas/yr (FIELD notes §5.11; common
/// practice). The upper end because the two errors cost unequally: a mover
/// taken for two objects gives two wrong SEDs, while a stationary star can
/// only be taken to move when a linear track fits its members. On the demo
/// field 0.03 left 2 of 20 such stars split, 0.05 none, with every `moving`
/// flag on a true mover at both values; a field known to hold fewer nearby
/// stars (far from the plane, deep) can set a smaller `moving_fraction`.
pub const DEFAULT_MOVING_FRACTION: f64 = 0.05;

/// μ_max over the motion prior's per-axis dispersion: 3.439, the 99.73 % point
/// of the Rayleigh distribution (FIELD notes §5.3; standard).
pub const MOTION_PRIOR_K: f64 = 3.439;

/// Default of [`MatchConfig::companion_share_limit`]: 10 % (FIELD notes §5.14
/// gives "e.g. 10 %"; common practice).
pub const DEFAULT_COMPANION_SHARE_LIMIT: f64 = 0.1;

/// How close two sources of a catalog pair must be to be candidates.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub enum Tolerance {
    /// A fixed radius.
    Radius {
        /// Radius, arcsec.
        arcsec: f64,
    },
    /// k sigma of the combined positional errors (both error ellipses plus both
    /// catalogs' systematic floors), and never more than `max_arcsec`.
    Sigma {
        /// Normalized-distance limit.
        k: f64,
        /// Cap on the separation, arcsec.
        max_arcsec: f64,
    },
}

impl Tolerance {
    /// The largest separation this tolerance can accept, arcsec.
    pub fn max_arcsec(&self) -> f64 {
        match self {
            Tolerance::Radius { arcsec } => *arcsec,
            Tolerance::Sigma { max_arcsec, .. } => *max_arcsec,
        }
    }
}

impl Default for Tolerance {
    fn default() -> Self {
        Tolerance::Sigma {
            k: 3.439,
            max_arcsec: 5.0,
        }
    }
}

/// Per-catalog settings.
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize)]
pub struct CatalogSettings {
    /// Systematic positional error floor added in quadrature to each source's error
    /// on both axes, arcsec: the floor the match uses.
    pub systematic_arcsec: f64,
    /// True when no floor is fixed for the catalog: the floor measured against
    /// the astrometric reference replaces `systematic_arcsec` before the final
    /// match, when it can be measured ([`super::systematics::floors_in_force`]).
    pub floor_from_data: bool,
    /// Angular resolution (PSF FWHM), arcsec. A source of a catalog with a larger
    /// resolution than another's is "coarser"; it is needed to recognize blends.
    pub resolution_arcsec: Option<f64>,
    /// The catalog's bands in schema order (the order of a source's entries in
    /// [`super::input::SourceTable::photometry`]); empty when the fluxes are not
    /// given to the matcher.
    pub bands: Vec<BandSettings>,
}

/// What the matcher knows of one band of a catalog: where it lies in
/// wavelength, whether its values are flux densities, and its own resolution.
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize)]
pub struct BandSettings {
    /// Band id.
    pub id: String,
    /// Wavelength, µm.
    pub wavelength_um: f64,
    /// True when the band's values are flux densities (not magnitudes only),
    /// so shares of flux can be taken in it.
    pub has_flux: bool,
    /// The band's own resolution (PSF FWHM), arcsec, overriding the catalog's.
    pub resolution_arcsec: Option<f64>,
}

impl CatalogSettings {
    /// The resolution of band `b` of this catalog: its own, else the catalog's.
    pub fn band_resolution_arcsec(&self, b: usize) -> Option<f64> {
        self.bands
            .get(b)
            .and_then(|band| band.resolution_arcsec)
            .or(self.resolution_arcsec)
    }

    /// The widest resolution of the catalog or any of its bands, arcsec.
    pub fn widest_resolution_arcsec(&self) -> Option<f64> {
        self.bands
            .iter()
            .filter_map(|b| b.resolution_arcsec)
            .chain(self.resolution_arcsec)
            .reduce(f64::max)
    }
}

/// All settings of one cross-match run.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MatchConfig {
    /// Epoch all positions are brought to, Julian years.
    pub reference_epoch_yr: f64,
    /// One entry per input catalog, in input order.
    pub catalogs: Vec<CatalogSettings>,
    /// Tolerance for every catalog pair without its own.
    pub tolerance: Tolerance,
    /// Tolerances of particular catalog pairs, keyed by (lower index, higher index).
    #[serde(serialize_with = "pairs_as_list")]
    pub pair_tolerance: BTreeMap<(usize, usize), Tolerance>,
    /// Associations with a posterior below this are flagged `low_probability`.
    pub min_probability: f64,
    /// Density of common objects as a fraction of the sparsest catalog's density.
    pub common_fraction: f64,
    /// HEALPix order of the partitions (NESTED scheme).
    pub partition_order: u8,
    /// When non-empty, only objects with a source in one of these catalogs are kept.
    pub primary: Vec<usize>,
    /// Largest group (in sources) resolved by exact search; larger ones are resolved greedily.
    pub max_exact_group: usize,
    /// Fastest motion searched for among sources without a catalog proper
    /// motion, mas/yr (μ_max): the tolerance of two such sources seen at
    /// epochs t_i ≠ t_j is widened by μ_max·|t_i − t_j|, and such groups may
    /// resolve into one moving object. 0 turns moving objects off.
    pub max_motion_masyr: f64,
    /// Prior fraction of objects that move (the broad component of the motion
    /// prior; the rest are stationary), in (0, 1).
    pub moving_fraction: f64,
    /// A coarse source over several finer ones is kept by the dominant one when
    /// its companions' estimated share of the flux is below this (0 makes every
    /// such source a blend); see [`super::shares`].
    pub companion_share_limit: f64,
}

/// Writes the pair tolerances as a list of `{catalogs: [a, b], tolerance}` (JSON
/// object keys must be text).
fn pairs_as_list<S: serde::Serializer>(
    pairs: &BTreeMap<(usize, usize), Tolerance>,
    serializer: S,
) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeSeq;
    let mut seq = serializer.serialize_seq(Some(pairs.len()))?;
    for ((a, b), t) in pairs {
        seq.serialize_element(&serde_json::json!({ "catalogs": [a, b], "tolerance": t }))?;
    }
    seq.end()
}

impl MatchConfig {
    /// Default settings for `n` catalogs at `reference_epoch_yr`.
    pub fn new(n: usize, reference_epoch_yr: f64) -> MatchConfig {
        MatchConfig {
            reference_epoch_yr,
            catalogs: vec![CatalogSettings::default(); n],
            tolerance: Tolerance::default(),
            pair_tolerance: BTreeMap::new(),
            min_probability: 0.8,
            common_fraction: 1.0,
            partition_order: 7,
            primary: Vec::new(),
            max_exact_group: 24,
            max_motion_masyr: DEFAULT_MAX_MOTION_MASYR,
            moving_fraction: DEFAULT_MOVING_FRACTION,
            companion_share_limit: DEFAULT_COMPANION_SHARE_LIMIT,
        }
    }

    /// Per-axis dispersion s of the isotropic Gaussian motion prior of a moving
    /// object, arcsec/yr: s = μ_max / 3.439, so that 99.73 % of the prior's
    /// motions are slower than μ_max (|μ| of a 2-D Gaussian is Rayleigh
    /// distributed, r_P = s·sqrt(−2 ln(1 − P)); standard), the same enclosed
    /// fraction the default positional tolerance uses. The widened search then
    /// finds the pairs of nearly every motion the prior believes in. 0 when
    /// `max_motion_masyr` is 0.
    pub fn motion_prior_sigma_arcsec_yr(&self) -> f64 {
        self.max_motion_masyr / MOTION_PRIOR_K / 1000.0
    }

    /// The tolerance of catalogs `a` and `b` (in either order).
    pub fn tolerance_for(&self, a: usize, b: usize) -> Tolerance {
        let key = (a.min(b), a.max(b));
        self.pair_tolerance
            .get(&key)
            .copied()
            .unwrap_or(self.tolerance)
    }

    /// The widest resolution of any catalog or band, arcsec (0 when none is declared).
    pub fn widest_resolution_arcsec(&self) -> f64 {
        self.catalogs
            .iter()
            .filter_map(CatalogSettings::widest_resolution_arcsec)
            .fold(0.0, f64::max)
    }

    /// The largest separation any catalog pair accepts, arcsec.
    pub fn max_radius_arcsec(&self) -> f64 {
        self.pair_tolerance
            .values()
            .map(Tolerance::max_arcsec)
            .fold(self.tolerance.max_arcsec(), f64::max)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pair_tolerances_override_in_either_order() {
        let mut c = MatchConfig::new(3, 2016.0);
        c.pair_tolerance
            .insert((0, 2), Tolerance::Radius { arcsec: 8.0 });
        assert_eq!(c.tolerance_for(2, 0), Tolerance::Radius { arcsec: 8.0 });
        assert_eq!(c.tolerance_for(0, 1), Tolerance::default());
        assert_eq!(c.max_radius_arcsec(), 8.0);
        let json = serde_json::to_string(&c).unwrap();
        assert!(
            json.contains(
                r#""pair_tolerance":[{"catalogs":[0,2],"tolerance":{"Radius":{"arcsec":8.0}}}]"#
            ),
            "{json}"
        );
    }
}
