//! The candidate test for one pair of sources: separation, normalized distance
//! with both error ellipses, and the pair's tolerance.
//!
//! An error ellipse (semi-major a, semi-minor b, both 1σ, position angle θ east of
//! north) has covariance in (east, north)
//! C_ee = a² sin²θ + b² cos²θ, C_nn = a² cos²θ + b² sin²θ, C_en = (a² − b²) sinθ cosθ
//! (standard; the check value a = 0.3″, b = 0.1″, θ = 30° → C_ee = 0.03, C_nn = 0.07,
//! C_en = 0.034641 arcsec² is in the tests). The normalized distance of two sources
//! is d² = Δᵀ (C₁ + C₂ + (s₁² + s₂²) I)⁻¹ Δ, with Δ their tangent-plane offset and
//! s the catalogs' systematic floors; for true matches with Gaussian errors d² follows
//! χ² with 2 degrees of freedom (standard).

use super::config::Tolerance;

/// A 2×2 covariance in (east, north), arcsec².
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Covariance {
    /// East–east term.
    pub ee: f64,
    /// North–north term.
    pub nn: f64,
    /// East–north term.
    pub en: f64,
}

impl Covariance {
    /// The covariance of a 1σ error ellipse (arcsec, arcsec, degrees east of north).
    pub fn from_ellipse(major_arcsec: f64, minor_arcsec: f64, pa_deg: f64) -> Covariance {
        let (s, c) = pa_deg.to_radians().sin_cos();
        let a2 = major_arcsec * major_arcsec;
        let b2 = minor_arcsec * minor_arcsec;
        Covariance {
            ee: a2 * s * s + b2 * c * c,
            nn: a2 * c * c + b2 * s * s,
            en: (a2 - b2) * s * c,
        }
    }

    /// The sum of two covariances plus `floor_arcsec2` on both axes.
    pub fn combine(&self, other: &Covariance, floor_arcsec2: f64) -> Covariance {
        Covariance {
            ee: self.ee + other.ee + floor_arcsec2,
            nn: self.nn + other.nn + floor_arcsec2,
            en: self.en + other.en,
        }
    }

    /// d² = Δᵀ C⁻¹ Δ for an offset (east, north) in arcsec; infinite when C is singular.
    pub fn normalized_distance2(&self, east_arcsec: f64, north_arcsec: f64) -> f64 {
        let det = self.ee * self.nn - self.en * self.en;
        if det <= 0.0 {
            return f64::INFINITY;
        }
        (self.nn * east_arcsec * east_arcsec - 2.0 * self.en * east_arcsec * north_arcsec
            + self.ee * north_arcsec * north_arcsec)
            / det
    }
}

/// True when a pair at `sep_arcsec` with normalized distance² `d2` passes `tolerance`.
pub fn accepts(tolerance: &Tolerance, sep_arcsec: f64, d2: f64) -> bool {
    match *tolerance {
        Tolerance::Radius { arcsec } => sep_arcsec <= arcsec,
        Tolerance::Sigma { k, max_arcsec } => sep_arcsec <= max_arcsec && d2 <= k * k,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ellipse_covariance_check_value() {
        // a = 0.3", b = 0.1", PA 30 deg: C_ee = 0.03, C_nn = 0.07, C_en = 0.034641 arcsec²
        // (standard rotation of a diagonal covariance; values computed in float64 by hand:
        // sin²30 = 0.25, cos²30 = 0.75 → C_ee = 0.09·0.25 + 0.01·0.75 = 0.03, etc.).
        let c = Covariance::from_ellipse(0.3, 0.1, 30.0);
        assert!((c.ee - 0.03).abs() < 1e-15);
        assert!((c.nn - 0.07).abs() < 1e-15);
        assert!((c.en - 0.034_641_016_151_377_55).abs() < 1e-15);
    }

    #[test]
    fn normalized_distance_check_value() {
        // The ellipse above plus a 0.2" circular second source, offset (0.25", 0.30"):
        // C = [[0.07, 0.034641], [0.034641, 0.11]], det = 0.0065, d² = 1.2275, d = 1.108
        // (arithmetic: (0.11·0.0625 − 2·0.034641·0.075 + 0.07·0.09)/0.0065 = 1.2275; common practice).
        let c = Covariance::from_ellipse(0.3, 0.1, 30.0)
            .combine(&Covariance::from_ellipse(0.2, 0.2, 0.0), 0.0);
        let d2 = c.normalized_distance2(0.25, 0.30);
        assert!((d2 - 1.2275).abs() < 2e-4, "{d2}");
        // Enclosed probability of a χ²(2) at d² is 1 − exp(−d²/2) = 0.459.
        assert!(((1.0 - (-d2 / 2.0f64).exp()) - 0.459).abs() < 1e-3);
    }

    #[test]
    fn tolerances() {
        let sigma = Tolerance::Sigma {
            k: 3.0,
            max_arcsec: 2.0,
        };
        assert!(accepts(&sigma, 1.0, 8.9));
        assert!(!accepts(&sigma, 1.0, 9.1));
        assert!(!accepts(&sigma, 2.1, 0.1));
        assert!(accepts(&Tolerance::Radius { arcsec: 1.0 }, 1.0, 100.0));
    }
}
