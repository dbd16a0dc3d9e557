//! Moving objects among sources without catalog proper motions: which sets of
//! sources may be one moving star, its fit, and how the hypothesis enters an
//! object's Bayes factor.
//!
//! The motion prior is a mixture (FIELD notes §5.11): a fraction
//! `1 − f` of objects is stationary (μ = 0), a fraction `f`
//! (`config.moving_fraction`) moves with an isotropic Gaussian μ ~ N(0, s² I),
//! `s` = [`MatchConfig::motion_prior_sigma_arcsec_yr`]. The Bayes factor of
//! "one object" against "unrelated sources" is then
//!
//! ```text
//! B_one = (1 − f) · B_stat + f · B_move
//! ```
//!
//! with B_stat the n-catalog factor of Budavári & Szalay (2008, ApJ 679, 301;
//! [`super::bayes::ln_bayes_factor`]) and B_move the moving-source factor of
//! [`super::motion::fit_motion`], normalised alike (it reduces to B_stat for
//! s = 0); the prior P₀ is the same for both. Only sources that can move enter
//! the moving component: no member with a catalog proper motion (its motion is
//! known), none extended (galaxies do not move, FIELD notes §5.13), and at
//! least two distinct epochs (at one epoch B_move = B_stat and the mixture is
//! B_stat). Members are placed on the tangent plane at the first member with
//! circular errors of their circularized σ including the catalog floor, the σ
//! of B_stat, so both components weigh the same errors.

use super::config::MatchConfig;
use super::motion::{Detection, MotionFit, fit_motion};
use super::prepare::Sources;
use crate::sky::separation::{tangent_offsets_arcsec, tangent_offsets_vec_arcsec};
use crate::sky::vector::RAD_PER_ARCSEC;

/// The moving-source fit of a set of sources.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MovingFit {
    /// The fit, positions relative to the tangent point, reference epoch t₀.
    pub fit: MotionFit,
    /// The tangent point (the first source's stored position), degrees.
    pub tangent_deg: (f64, f64),
    /// Per source, its offset from the fitted track at its own epoch, arcsec.
    pub residual_arcsec: [f64; super::resolve::MAX_MEMBERS],
}

/// True when `ranks` (sources of distinct catalogs) may be one moving object:
/// moving objects are on (`max_motion_masyr` > 0), no source has a catalog
/// proper motion or is extended, and the finite epochs are not all equal.
pub fn may_move(sources: &Sources, config: &MatchConfig, ranks: &[usize]) -> bool {
    if config.max_motion_masyr <= 0.0 || ranks.len() < 2 {
        return false;
    }
    if ranks
        .iter()
        .any(|&r| sources.has_pm(r) || sources.is_extended(r) || !sources.epoch_yr[r].is_finite())
    {
        return false;
    }
    let first = sources.epoch_yr[ranks[0]];
    ranks.iter().any(|&r| sources.epoch_yr[r] != first)
}

/// Fits one moving source to `ranks` (see [`may_move`]; the caller checks it)
/// with the prior of `config`, at its reference epoch. `None` when a source
/// lies 90° or more from the first (no tangent plane holds them).
pub fn fit_moving(sources: &Sources, config: &MatchConfig, ranks: &[usize]) -> Option<MovingFit> {
    let n = ranks.len();
    let anchor = ranks[0];
    let tangent_deg = (sources.ra_deg[anchor], sources.dec_deg[anchor]);
    let mut detections = [Detection::circular(0.0, [0.0, 0.0], 1.0); super::resolve::MAX_MEMBERS];
    for (k, &r) in ranks.iter().enumerate() {
        let (east, north) = tangent_offsets_vec_arcsec(sources.vec[anchor], sources.vec[r])
            .or_else(|| {
                let (e, n) = tangent_offsets_arcsec(
                    tangent_deg.0,
                    tangent_deg.1,
                    sources.ra_deg[r],
                    sources.dec_deg[r],
                );
                (e.is_finite() && n.is_finite()).then_some((e, n))
            })?;
        detections[k] = Detection::circular(
            sources.epoch_yr[r],
            [east, north],
            sources.sigma_rad[r] / RAD_PER_ARCSEC,
        );
    }
    let t0 = config.reference_epoch_yr;
    let fit = fit_motion(&detections[..n], t0, config.motion_prior_sigma_arcsec_yr());
    let mut residual_arcsec = [0.0; super::resolve::MAX_MEMBERS];
    for (k, d) in detections[..n].iter().enumerate() {
        let tau = d.epoch_yr - t0;
        let track = [
            fit.pos_ref_arcsec[0] + fit.pm_arcsec_yr[0] * tau,
            fit.pos_ref_arcsec[1] + fit.pm_arcsec_yr[1] * tau,
        ];
        residual_arcsec[k] = (d.pos_arcsec[0] - track[0]).hypot(d.pos_arcsec[1] - track[1]);
    }
    Some(MovingFit {
        fit,
        tangent_deg,
        residual_arcsec,
    })
}

/// ln B_one of the mixture prior (module documentation): `ln_b_stat` when the
/// stationary component is allowed, `ln_b_move` when the moving one is, and
/// `moving_fraction` f. Returns the log Bayes factor and whether the moving
/// component carries the larger share of it (−∞ and false when neither is allowed).
pub fn ln_mixture(
    ln_b_stat: Option<f64>,
    ln_b_move: Option<f64>,
    moving_fraction: f64,
) -> (f64, bool) {
    match (ln_b_stat, ln_b_move) {
        (Some(s), None) => (s, false),
        (None, Some(m)) => (moving_fraction.ln() + m, true),
        (Some(s), Some(m)) => {
            let (a, b) = ((-moving_fraction).ln_1p() + s, moving_fraction.ln() + m);
            let hi = a.max(b);
            (hi + ((a - hi).exp() + (b - hi).exp()).ln(), b > a)
        }
        (None, None) => (f64::NEG_INFINITY, false),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mixture_by_hand() {
        // f = 0.03: ln(0.97 e^10 + 0.03 e^12) = 10 + ln(0.97 + 0.03 e²)
        // = 10 + ln(0.97 + 0.221672) = 10 + ln 1.191672 = 10.175357 (by hand, e² = 7.389056).
        let (ln_b, moving) = ln_mixture(Some(10.0), Some(12.0), 0.03);
        assert!((ln_b - 10.175_357).abs() < 1e-6, "{ln_b}");
        // Moving share 0.221672 < stationary 0.97.
        assert!(!moving);
        // e^16 · 0.03 = 266,573 > 0.97 e^10 = 21,366: moving dominates.
        assert!(ln_mixture(Some(10.0), Some(16.0), 0.03).1);
        let (only, moving) = ln_mixture(None, Some(12.0), 0.03);
        assert!((only - (12.0 + 0.03f64.ln())).abs() < 1e-12 && moving);
        assert_eq!(ln_mixture(Some(5.0), None, 0.03), (5.0, false));
        assert_eq!(ln_mixture(None, None, 0.03), (f64::NEG_INFINITY, false));
    }
}
