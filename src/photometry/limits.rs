//! Upper limits for non-detections, and the detection test they go with.
//!
//! A measurement with signal-to-noise below a chosen threshold is a non-detection.
//! Its upper limit follows one of two rules ([`LimitRule`]), and the rule used is
//! recorded with the output (common practice):
//!
//! - `n·σ`: the limit ignores the measured flux, e.g. a "3σ" limit.
//! - `max(F, 0) + n·σ`: the measured flux plus n sigma, e.g. a one-sided 95 %
//!   Gaussian limit with n = 1.645 ([`GAUSSIAN_95_ONE_SIDED`]).
//!
//! A negative flux never becomes a detection ([`is_detection`]), and under
//! `max(F, 0) + n·σ` it counts as zero. Limits are kept apart from detections and
//! never enter least-squares fits as measurements; the measured F and σ are kept beside them.
//!
//! ```
//! use fluxloom::photometry::limits::{GAUSSIAN_95_ONE_SIDED, LimitRule};
//!
//! let rule = LimitRule::FluxPlusSigma { n: GAUSSIAN_95_ONE_SIDED };
//! assert_eq!(rule.limit_jy(-2e-6, 1e-6), GAUSSIAN_95_ONE_SIDED * 1e-6);
//! ```

use std::fmt;

/// The one-sided 95 % point of the standard normal distribution, Φ⁻¹(0.95) =
/// 1.6448536269514722 (the Gaussian quantile; norm.ppf(0.95) in float64).
pub const GAUSSIAN_95_ONE_SIDED: f64 = 1.6448536269514722;

/// How an upper limit in Jy is made from a measured flux F and its error σ.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LimitRule {
    /// F_lim = n·σ, whatever the measured flux (common practice, e.g. "3σ").
    SigmaMultiple {
        /// Number of sigmas.
        n: f64,
    },
    /// F_lim = max(F, 0) + n·σ: negative fluxes count as zero (common practice;
    /// n = 1.645 is a one-sided 95 % Gaussian limit).
    FluxPlusSigma {
        /// Number of sigmas.
        n: f64,
    },
}

impl LimitRule {
    /// The upper limit in Jy for measured `flux_jy` with 1-sigma error `err_jy`.
    /// A NaN flux under `FluxPlusSigma` gives NaN rather than being read as zero.
    pub fn limit_jy(&self, flux_jy: f64, err_jy: f64) -> f64 {
        match *self {
            LimitRule::SigmaMultiple { n } => n * err_jy,
            LimitRule::FluxPlusSigma { n } => {
                if flux_jy.is_nan() {
                    f64::NAN
                } else {
                    flux_jy.max(0.0) + n * err_jy
                }
            }
        }
    }
}

impl fmt::Display for LimitRule {
    /// The rule as a formula with its n, for run metadata, e.g. `max(F, 0) + 3*sigma`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LimitRule::SigmaMultiple { n } => write!(f, "{n}*sigma"),
            LimitRule::FluxPlusSigma { n } => write!(f, "max(F, 0) + {n}*sigma"),
        }
    }
}

/// Whether a measurement is a detection: F > 0 and F ≥ `min_snr`·σ (common practice,
/// with `min_snr` typically 3 or 5). A negative or zero flux is never a detection,
/// whatever `min_snr`; NaN in any input gives `false`.
pub fn is_detection(flux_jy: f64, err_jy: f64, min_snr: f64) -> bool {
    flux_jy > 0.0 && flux_jy >= min_snr * err_jy
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gaussian_95_point() {
        // Φ⁻¹(0.95) = 1.6449 (standard normal quantile, Abramowitz & Stegun 1964 Table 26.1
        // (from memory)); check by the error function: Φ(z) = ½(1 + erf(z/√2)) = 0.95.
        let z = GAUSSIAN_95_ONE_SIDED;
        assert!((z - 1.6449).abs() < 5e-5);
        // erf by its Maclaurin series, converging fast at z/√2 ≈ 1.163.
        let x = z / std::f64::consts::SQRT_2;
        let mut term = x;
        let mut sum = x;
        for k in 1..60 {
            term *= -x * x / k as f64;
            sum += term / (2 * k + 1) as f64;
        }
        let erf = 2.0 / std::f64::consts::PI.sqrt() * sum;
        assert!((0.5 * (1.0 + erf) - 0.95).abs() < 1e-13);
    }

    #[test]
    fn sigma_multiple_ignores_the_flux() {
        // "3σ" limit = 3σ (common practice).
        let rule = LimitRule::SigmaMultiple { n: 3.0 };
        assert_eq!(rule.limit_jy(5e-6, 2e-6), 6e-6);
        assert_eq!(rule.limit_jy(-5e-6, 2e-6), 6e-6);
    }

    #[test]
    fn flux_plus_sigma_clamps_negative_flux_to_zero() {
        // F + n·σ with negative F counted as zero (common practice).
        let rule = LimitRule::FluxPlusSigma { n: 3.0 };
        assert_eq!(rule.limit_jy(1e-6, 2e-6), 7e-6);
        assert_eq!(rule.limit_jy(-4e-6, 2e-6), 6e-6);
        assert!(rule.limit_jy(f64::NAN, 2e-6).is_nan());
        // One-sided 95 % Gaussian: F + 1.645σ (common practice).
        let rule = LimitRule::FluxPlusSigma {
            n: GAUSSIAN_95_ONE_SIDED,
        };
        assert!((rule.limit_jy(1.0, 1.0) - 2.6448536269514722).abs() < 1e-15);
    }

    #[test]
    fn negative_flux_is_never_a_detection() {
        assert!(is_detection(3e-6, 1e-6, 3.0));
        assert!(!is_detection(2.9e-6, 1e-6, 3.0));
        assert!(!is_detection(-3e-6, -1e-6, 3.0));
        assert!(!is_detection(-3e-6, 1e-6, -10.0));
        assert!(!is_detection(0.0, 1e-6, 0.0));
        assert!(!is_detection(f64::NAN, 1e-6, 3.0));
        assert!(!is_detection(3e-6, f64::NAN, 3.0));
    }

    #[test]
    fn rules_describe_themselves() {
        assert_eq!(LimitRule::SigmaMultiple { n: 3.0 }.to_string(), "3*sigma");
        assert_eq!(
            LimitRule::FluxPlusSigma { n: 5.0 }.to_string(),
            "max(F, 0) + 5*sigma"
        );
    }
}
