//! The infrared spectral index α and the young-stellar-object class it implies.
//!
//! α = d log10(λF_λ) / d log10 λ (Lada 1987, IAU Symp. 115, 1 (from memory);
//! FIELD §4.1), fitted by least squares of y = log10(λF_λ) on x = log10 λ over a
//! wavelength window (default 2–24 µm, the c2d legacy window, Evans et al. 2009,
//! ApJS 181, 321 (from memory)), detections only (FIELD §1.6, §4.2):
//!
//! ```text
//! λF_λ [erg s⁻¹ cm⁻²] = 2.99792458e-9 · F_ν[Jy] / λ[µm]      (FIELD §1.3)
//! σ_y = σ_F / (F ln 10)
//! weighted: w = 1/σ_y²,  α = (S·Sxy − Sx·Sy) / Δ,  σ_α = sqrt(S/Δ),  Δ = S·Sxx − Sx²
//! ```
//!
//! Upper limits are never fitted; they bound α where they lie outside the
//! detected wavelengths ([`alpha_bounds`]). Classes follow Greene et al. 1994
//! (ApJ 434, 614; boundaries from memory, FIELD §4.3) as half-open intervals.

use crate::photometry::flux::nu_fnu_cgs;

/// One SED point for the fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SedPoint {
    /// Wavelength, µm.
    pub wavelength_um: f64,
    /// Flux density, Jy (> 0).
    pub flux_jy: f64,
    /// 1σ error, Jy (`None` when unknown).
    pub flux_err_jy: Option<f64>,
}

/// How the points are weighted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Weighting {
    /// Weights 1/σ_y²; falls back to equal weights when any point lacks an error.
    InverseVariance,
    /// Equal weights.
    Equal,
}

impl Weighting {
    /// The name used in settings and metadata: `inverse_variance` or `equal`.
    pub fn as_str(&self) -> &'static str {
        match self {
            Weighting::InverseVariance => "inverse_variance",
            Weighting::Equal => "equal",
        }
    }
}

/// The result of a fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AlphaFit {
    /// Spectral index α (slope of log λF_λ on log λ).
    pub alpha: f64,
    /// Its 1σ error: formal for weighted fits, from the scatter for equal
    /// weights with ≥ 3 points; `None` for a two-point equal-weight fit.
    pub alpha_err: Option<f64>,
    /// Intercept: log10(λF_λ / erg s⁻¹ cm⁻²) at λ = 1 µm.
    pub intercept: f64,
    /// Number of detections fitted.
    pub n_points: usize,
    /// Whether inverse-variance weights were used.
    pub weighted: bool,
}

impl AlphaFit {
    /// λF_λ of the fitted line at `wavelength_um`, erg s⁻¹ cm⁻².
    pub fn nu_fnu_cgs_at(&self, wavelength_um: f64) -> f64 {
        10f64.powf(self.intercept + self.alpha * wavelength_um.log10())
    }
}

/// x = log10 λ, y = log10(λF_λ), σ_y of a point.
fn xy(p: &SedPoint) -> (f64, f64, Option<f64>) {
    let y = nu_fnu_cgs(p.flux_jy, p.wavelength_um).log10();
    let sy = p
        .flux_err_jy
        .filter(|e| *e > 0.0 && e.is_finite())
        .map(|e| e / (p.flux_jy * std::f64::consts::LN_10));
    (p.wavelength_um.log10(), y, sy)
}

/// Fits α to `points` (all assumed inside the window, flux > 0). `None` for
/// fewer than two points or points at one wavelength.
pub fn fit_alpha(points: &[SedPoint], weighting: Weighting) -> Option<AlphaFit> {
    let pts: Vec<(f64, f64, Option<f64>)> = points
        .iter()
        .filter(|p| p.flux_jy > 0.0 && p.wavelength_um > 0.0)
        .map(xy)
        .collect();
    if pts.len() < 2 {
        return None;
    }
    let weighted = weighting == Weighting::InverseVariance && pts.iter().all(|p| p.2.is_some());
    let w = |p: &(f64, f64, Option<f64>)| {
        if weighted {
            1.0 / p.2.unwrap().powi(2)
        } else {
            1.0
        }
    };
    let (mut s, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for p in &pts {
        let wi = w(p);
        s += wi;
        sx += wi * p.0;
        sy += wi * p.1;
        sxx += wi * p.0 * p.0;
        sxy += wi * p.0 * p.1;
    }
    let delta = s * sxx - sx * sx;
    if delta.abs() <= 1e-12 * s * sxx.abs().max(1e-300) {
        return None;
    }
    let alpha = (s * sxy - sx * sy) / delta;
    let intercept = (sxx * sy - sx * sxy) / delta;
    let n = pts.len();
    let alpha_err = if weighted {
        Some((s / delta).sqrt())
    } else if n >= 3 {
        let rss: f64 = pts
            .iter()
            .map(|p| (p.1 - intercept - alpha * p.0).powi(2))
            .sum();
        Some((rss / (n as f64 - 2.0) * s / delta).sqrt())
    } else {
        None
    };
    Some(AlphaFit {
        alpha,
        alpha_err,
        intercept,
        n_points: n,
        weighted,
    })
}

/// Bounds on α set by upper limits outside the detected wavelengths.
///
/// - A limit redder than every detection: the SED at the limit is at most the
///   limit, so the slope from the bluest detection to it is at most
///   (y_lim − y_blue)/(x_lim − x_blue): an **upper** bound on α over the window.
/// - A limit bluer than every detection: the slope from it to the reddest
///   detection is at least (y_red − y_lim)/(x_red − x_lim): a **lower** bound.
///
/// The tightest of each kind is returned as (lower, upper). Limits between
/// detections bound nothing here (common practice: FIELD §4.2).
pub fn alpha_bounds(detections: &[SedPoint], limits: &[(f64, f64)]) -> (Option<f64>, Option<f64>) {
    let det: Vec<(f64, f64)> = detections
        .iter()
        .filter(|p| p.flux_jy > 0.0)
        .map(|p| {
            let (x, y, _) = xy(p);
            (x, y)
        })
        .collect();
    let Some(&blue) = det.iter().min_by(|a, b| a.0.total_cmp(&b.0)) else {
        return (None, None);
    };
    let red = *det.iter().max_by(|a, b| a.0.total_cmp(&b.0)).unwrap();
    let (mut lower, mut upper): (Option<f64>, Option<f64>) = (None, None);
    for &(wavelength_um, ulim_jy) in limits {
        if ulim_jy <= 0.0 || wavelength_um <= 0.0 {
            continue;
        }
        let x = wavelength_um.log10();
        let y = nu_fnu_cgs(ulim_jy, wavelength_um).log10();
        if x > red.0 {
            let b = (y - blue.1) / (x - blue.0);
            upper = Some(upper.map_or(b, |u| u.min(b)));
        } else if x < blue.0 {
            let b = (red.1 - y) / (red.0 - x);
            lower = Some(lower.map_or(b, |l| l.max(b)));
        }
    }
    (lower, upper)
}

/// Infrared class of a young stellar object from α.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum YsoClass {
    /// α ≥ 0.3.
    ClassI,
    /// −0.3 ≤ α < 0.3.
    Flat,
    /// −1.6 ≤ α < −0.3.
    ClassII,
    /// α < −1.6.
    ClassIII,
}

/// The class scheme's name, written into the science table's metadata.
pub const CLASS_SCHEME: &str = "Greene et al. 1994 (ApJ 434, 614): Class I α ≥ 0.3; flat −0.3 ≤ α < 0.3; Class II −1.6 ≤ α < −0.3; Class III α < −1.6";

impl YsoClass {
    /// Greene et al. 1994 class of α, half-open intervals exactly as tabulated
    /// (FIELD §4.3). NaN has no class.
    pub fn greene_1994(alpha: f64) -> Option<YsoClass> {
        if alpha.is_nan() {
            None
        } else if alpha >= 0.3 {
            Some(YsoClass::ClassI)
        } else if alpha >= -0.3 {
            Some(YsoClass::Flat)
        } else if alpha >= -1.6 {
            Some(YsoClass::ClassII)
        } else {
            Some(YsoClass::ClassIII)
        }
    }

    /// The name in the science table: `class_i`, `flat`, `class_ii`, `class_iii`.
    pub fn as_str(&self) -> &'static str {
        match self {
            YsoClass::ClassI => "class_i",
            YsoClass::Flat => "flat",
            YsoClass::ClassII => "class_ii",
            YsoClass::ClassIII => "class_iii",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(l: f64, f: f64, e: Option<f64>) -> SedPoint {
        SedPoint {
            wavelength_um: l,
            flux_jy: f,
            flux_err_jy: e,
        }
    }

    #[test]
    fn exact_power_law_recovers_its_slope() {
        // λF_λ ∝ λ^a ⇔ F_ν ∝ λ^(a+1) (FIELD §4.1).
        for a in [-3.0, -1.2, 0.0, 0.7] {
            let pts: Vec<SedPoint> = [2.2, 3.6, 4.5, 5.8, 8.0, 24.0]
                .iter()
                .map(|&l: &f64| p(l, 0.01 * l.powf(a + 1.0), Some(0.0005 * l.powf(a + 1.0))))
                .collect();
            for w in [Weighting::Equal, Weighting::InverseVariance] {
                let fit = fit_alpha(&pts, w).unwrap();
                assert!((fit.alpha - a).abs() < 1e-10, "{a} {w:?} {}", fit.alpha);
                assert!(fit.alpha_err.unwrap() < 1.0);
            }
        }
    }

    /// FIELD §7.5: Ks, [3.6], [8.0], [24] with their zero points.
    fn field_example() -> Vec<SedPoint> {
        [
            (2.159, 9.00, 0.03, 666.7),
            (3.550, 8.30, 0.05, 280.9),
            (7.872, 7.20, 0.05, 64.13),
            (23.675, 5.00, 0.10, 7.17),
        ]
        .iter()
        .map(|&(l, m, sm, f0): &(f64, f64, f64, f64)| {
            let f = f0 * 10f64.powf(-0.4 * m);
            // σ_F = 0.4 ln10 σ_m F (FIELD §1.4), so σ_y = 0.4 σ_m exactly.
            p(l, f, Some(0.4 * std::f64::consts::LN_10 * sm * f))
        })
        .collect()
    }

    #[test]
    fn four_point_example_matches_field_values() {
        let pts = field_example();
        let eq = fit_alpha(&pts, Weighting::Equal).unwrap();
        assert!((eq.alpha + 1.364).abs() < 5e-4, "{}", eq.alpha);
        assert!((eq.intercept + 9.2024).abs() < 5e-4, "{}", eq.intercept);
        let w = fit_alpha(&pts, Weighting::InverseVariance).unwrap();
        assert!((w.alpha + 1.438).abs() < 5e-4, "{}", w.alpha);
        assert!(
            (w.alpha_err.unwrap() - 0.031).abs() < 5e-4,
            "{:?}",
            w.alpha_err
        );
        assert_eq!(YsoClass::greene_1994(eq.alpha), Some(YsoClass::ClassII));
        assert_eq!(YsoClass::greene_1994(w.alpha), Some(YsoClass::ClassII));
        // Two-point Ks–[24]: α = −1.354 (FIELD §7.5).
        let two = fit_alpha(&[pts[0], pts[3]], Weighting::Equal).unwrap();
        assert!((two.alpha + 1.354).abs() < 5e-4);
        assert_eq!(two.alpha_err, None);
    }

    #[test]
    fn greene_boundaries_on_both_sides() {
        use YsoClass::*;
        let e = 1e-9;
        assert_eq!(YsoClass::greene_1994(0.3), Some(ClassI));
        assert_eq!(YsoClass::greene_1994(0.3 - e), Some(Flat));
        assert_eq!(YsoClass::greene_1994(-0.3), Some(Flat));
        assert_eq!(YsoClass::greene_1994(-0.3 - e), Some(ClassII));
        assert_eq!(YsoClass::greene_1994(-1.6), Some(ClassII));
        assert_eq!(YsoClass::greene_1994(-1.6 - e), Some(ClassIII));
        assert_eq!(YsoClass::greene_1994(f64::NAN), None);
    }

    #[test]
    fn limits_bound_alpha_from_the_right_side() {
        let pts = field_example();
        // The [24] point as a limit at its own flux: the two-point Ks–[24] slope
        // (−1.354) becomes an upper bound on α.
        let (lo, hi) = alpha_bounds(&pts[..3], &[(23.675, pts[3].flux_jy)]);
        assert_eq!(lo, None);
        assert!((hi.unwrap() + 1.354).abs() < 5e-4);
        // A Ks limit at the Ks flux below [3.6]..[24]: slope Ks→[24] is a lower bound.
        let (lo, hi) = alpha_bounds(&pts[1..], &[(2.159, pts[0].flux_jy)]);
        assert_eq!(hi, None);
        assert!((lo.unwrap() + 1.354).abs() < 5e-4);
        // A limit between detections bounds nothing.
        assert_eq!(
            alpha_bounds(&[pts[0], pts[3]], &[(7.872, 1.0)]),
            (None, None)
        );
    }

    #[test]
    fn one_point_or_one_wavelength_gives_no_fit() {
        assert_eq!(fit_alpha(&[p(2.2, 1.0, None)], Weighting::Equal), None);
        assert_eq!(
            fit_alpha(&[p(2.2, 1.0, None), p(2.2, 2.0, None)], Weighting::Equal),
            None
        );
    }
}
