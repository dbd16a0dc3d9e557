//! The moving-source hypothesis: are detections at several epochs one star
//! moving linearly across the sky, when no catalog gives its proper motion?
//!
//! Detection i at epoch t_i has a tangent-plane position x_i (east, north,
//! arcsec, relative to a common tangent point) and a 2×2 covariance C_i
//! (arcsec²). The star is at `x(t) = x₀ + μ (t − t₀)`, with a Gaussian motion
//! prior `μ ~ N(0, S)`, `S = s² I` (s in arcsec/yr), and x₀ uniform on the
//! sphere. Integrating μ out, the stacked positions are jointly Gaussian around
//! x₀ with covariance `Σ_ij = δ_ij C_i + τ_i τ_j S`, `τ_i = t_i − t₀` (FIELD
//! notes §5.11, derived there; method after Kerekes et al. 2010, ApJ 719, 59 —
//! that reference is from memory and unverified, the formulas here are
//! self-contained). [`fit_motion`] returns the Bayes factor of "one moving
//! source" against "unrelated sources", normalised exactly like
//! [`super::bayes::ln_bayes_factor`] (to which it reduces for `s = 0` and
//! circular errors), the posterior proper motion and its covariance, and the
//! least-squares χ² of the linear fit.
//!
//! ```
//! use fluxloom::crossmatch::motion::{Detection, fit_motion};
//!
//! // A star moving 0.3″/yr east seen in 2000 and 2010 with 0.1″ errors.
//! let det = |t: f64, east: f64| Detection::circular(t, [east, 0.0], 0.1);
//! let moving = fit_motion(&[det(2000.0, 0.0), det(2010.0, 3.0)], 2016.0, 0.5);
//! let still = fit_motion(&[det(2000.0, 0.0), det(2010.0, 3.0)], 2016.0, 0.0);
//! assert!(moving.ln_bayes > still.ln_bayes + 100.0);
//! assert!((moving.pm_arcsec_yr[0] - 0.3).abs() < 0.01);
//! ```

use std::f64::consts::LN_2;

use crate::sky::vector::RAD_PER_ARCSEC;

/// One detection of a candidate moving source.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Detection {
    /// Epoch of the position, years (e.g. Julian years, 2016.0).
    pub epoch_yr: f64,
    /// Tangent-plane position (east, north), arcsec, relative to a tangent
    /// point common to all detections.
    pub pos_arcsec: [f64; 2],
    /// Position covariance [[C_ee, C_en], [C_en, C_nn]], arcsec²; symmetric
    /// and positive definite.
    pub cov_arcsec2: [[f64; 2]; 2],
}

impl Detection {
    /// A detection with a circular error of per-axis σ (arcsec).
    pub fn circular(epoch_yr: f64, pos_arcsec: [f64; 2], sigma_arcsec: f64) -> Detection {
        let v = sigma_arcsec * sigma_arcsec;
        Detection {
            epoch_yr,
            pos_arcsec,
            cov_arcsec2: [[v, 0.0], [0.0, v]],
        }
    }
}

/// The moving-source hypothesis evaluated for a set of detections.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MotionFit {
    /// ln B_move, Bayes factor of one moving source against unrelated sources,
    /// normalised to the whole sphere like [`super::bayes::ln_bayes_factor`].
    pub ln_bayes: f64,
    /// Posterior mean proper motion (east, north), arcsec/yr (east is μ_α cos δ).
    pub pm_arcsec_yr: [f64; 2],
    /// Posterior covariance of the proper motion, (arcsec/yr)².
    pub pm_cov_arcsec2_yr2: [[f64; 2]; 2],
    /// Posterior mean position at the reference epoch t₀ (east, north), arcsec.
    pub pos_ref_arcsec: [f64; 2],
    /// Posterior covariance of that position, arcsec²:
    /// `W⁻¹ + W⁻¹ T₁ V T₁ W⁻¹` (block inverse of the normal equations of (x₀, μ)).
    pub pos_ref_cov_arcsec2: [[f64; 2]; 2],
    /// χ² of the unpenalised weighted least-squares fit of `x₀ + μ (t − t₀)`
    /// (no prior), with [`MotionFit::dof`] degrees of freedom; `None` for fewer
    /// than 3 detections, or when the epochs do not constrain μ (all equal).
    pub chi2_lsq: Option<f64>,
    /// Degrees of freedom of `chi2_lsq`, `2n − 4` (0 when it is `None`).
    pub dof: usize,
}

/// Symmetric 2×2 matrix stored as [[a, b], [b, c]].
type Mat2 = [[f64; 2]; 2];

fn det2(m: &Mat2) -> f64 {
    m[0][0] * m[1][1] - m[0][1] * m[1][0]
}

fn inv2(m: &Mat2) -> Mat2 {
    let d = det2(m);
    [[m[1][1] / d, -m[0][1] / d], [-m[1][0] / d, m[0][0] / d]]
}

fn mul2(a: &Mat2, b: &Mat2) -> Mat2 {
    [
        [
            a[0][0] * b[0][0] + a[0][1] * b[1][0],
            a[0][0] * b[0][1] + a[0][1] * b[1][1],
        ],
        [
            a[1][0] * b[0][0] + a[1][1] * b[1][0],
            a[1][0] * b[0][1] + a[1][1] * b[1][1],
        ],
    ]
}

fn apply2(m: &Mat2, v: [f64; 2]) -> [f64; 2] {
    [
        m[0][0] * v[0] + m[0][1] * v[1],
        m[1][0] * v[0] + m[1][1] * v[1],
    ]
}

fn dot2(a: [f64; 2], b: [f64; 2]) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}

fn add2(a: &Mat2, b: &Mat2, scale_b: f64) -> Mat2 {
    [
        [a[0][0] + scale_b * b[0][0], a[0][1] + scale_b * b[0][1]],
        [a[1][0] + scale_b * b[1][0], a[1][1] + scale_b * b[1][1]],
    ]
}

/// Symmetrises a matrix that is symmetric up to rounding.
fn sym2(m: Mat2) -> Mat2 {
    let off = 0.5 * (m[0][1] + m[1][0]);
    [[m[0][0], off], [off, m[1][1]]]
}

/// Evaluates the moving-source hypothesis for `detections` with reference
/// epoch `ref_epoch_yr` (t₀) and an isotropic Gaussian motion prior of
/// per-axis dispersion `prior_sigma_arcsec_yr` (s ≥ 0; 0 means stationary).
///
/// # Bayes factor and its normalisation
///
/// Under K (unrelated sources) each x_i is an independent object uniform on
/// the sphere, so `p(D_i|K) = ∫ N(x_i; y, C_i) dy / 4π = 1/4π` and
/// `p(D|K) = (4π)^(−n)`. Under H (one moving source), with x₀ uniform on the
/// sphere (density 1/4π per steradian, flat on the small patch involved) and μ
/// integrated against its prior,
///
/// ```text
/// p(D|H) = (1/4π) ∫ N(X; A x₀, Σ) dx₀
///        = (1/4π) (2π)^(−(n−1)) |Σ|^(−1/2) |F|^(−1/2) exp(−χ²/2),
/// ```
///
/// with `X` the 2n stacked positions, `A = (I; I; …)`, `F = Aᵀ Σ⁻¹ A` and
/// `χ² = min over x₀ of (X − A x₀)ᵀ Σ⁻¹ (X − A x₀)` (a Gaussian integral over
/// the 2 components of x₀). Hence
///
/// ```text
/// B_move = 2^(n−1) |Σ|^(−1/2) |F|^(−1/2) exp(−χ²/2)            (all in radians)
/// ```
///
/// the same `(4π / 2π)^(n−1) = 2^(n−1)` as the stationary factor. It is
/// evaluated with 2×2 matrices only: with `W = Σ C_i⁻¹`, `T₁ = Σ τ_i C_i⁻¹`,
/// `T₂ = Σ τ_i² C_i⁻¹`, the motion information left after fitting x₀,
/// `G = T₂ − T₁ W⁻¹ T₁`, and `K = I + s² G`, one has
/// `|Σ| |F| = Π|C_i| · |W| · |K|` (determinant lemma, or the 4×4 normal equations
/// of (x₀, μ) with prior precision S⁻¹ on μ), so
///
/// ```text
/// ln B_move = (n−1) ln 2 − ½ Σ ln|C_i| − ½ ln|W| − ½ ln|K| − ½ χ²,
/// χ² = χ²_stat − hᵀ V h,   V = s² K⁻¹,   h = Σ τ_i C_i⁻¹ (x_i − x̄),
/// ```
///
/// where `x̄ = W⁻¹ Σ C_i⁻¹ x_i` and `χ²_stat = Σ (x_i − x̄)ᵀ C_i⁻¹ (x_i − x̄)`.
/// For `s = 0`, `K = I` and `V = 0`: with `C_i = σ_i² I` this is
/// `2^(n−1) (Π w_i / Σ w_i) exp(−Σ_{i<j} w_i w_j ψ_ij² / 2Σw)` of BS08, i.e.
/// [`super::bayes::ln_bayes_factor`]. The `−½ ln|K|` term is the Occam penalty
/// of the motion prior; `½ hᵀ V h` what the motion buys back. Units: inputs are
/// arcsec; the result is converted to radians, `ln B = ln B(arcsec) −
/// 2(n−1) ln(rad per arcsec)`, since `|Σ||F|` scales as length^(4n−4).
///
/// # Proper motion
///
/// The posterior of μ (x₀ marginalised with its flat prior) is Gaussian with
/// mean `V h` and covariance `V = (G + S⁻¹)⁻¹ = s² (I + s² G)⁻¹`; this is the
/// weighted least-squares fit of `x(t) = x₀ + μ (t − t₀)` with the prior as an
/// extra term `μᵀ S⁻¹ μ`. `chi2_lsq` is the plain least-squares minimum,
/// `χ²_stat − hᵀ G⁻¹ h`, with `2n − 4` degrees of freedom (n ≥ 3; n = 2 fits
/// exactly). The Bayes factor, μ and its covariance do not depend on t₀ (a
/// shift of t₀ only moves x₀, whose prior is flat); `pos_ref_arcsec` does.
///
/// # Panics
///
/// Panics if `detections` is empty or `prior_sigma_arcsec_yr` is negative or
/// not finite. Covariances must be positive definite (not checked; a singular
/// one gives non-finite results).
pub fn fit_motion(
    detections: &[Detection],
    ref_epoch_yr: f64,
    prior_sigma_arcsec_yr: f64,
) -> MotionFit {
    assert!(
        !detections.is_empty(),
        "fit_motion needs at least one detection"
    );
    assert!(
        prior_sigma_arcsec_yr.is_finite() && prior_sigma_arcsec_yr >= 0.0,
        "the motion prior dispersion must be finite and ≥ 0"
    );
    let n = detections.len();
    let s2 = prior_sigma_arcsec_yr * prior_sigma_arcsec_yr;
    let zero: Mat2 = [[0.0; 2]; 2];
    let inverses: Vec<Mat2> = detections.iter().map(|d| inv2(&d.cov_arcsec2)).collect();
    let (mut w, mut t1, mut t2) = (zero, zero, zero);
    let mut weighted_sum = [0.0; 2];
    let mut sum_ln_det_c = 0.0;
    for (d, ci) in detections.iter().zip(&inverses) {
        let tau = d.epoch_yr - ref_epoch_yr;
        w = add2(&w, ci, 1.0);
        t1 = add2(&t1, ci, tau);
        t2 = add2(&t2, ci, tau * tau);
        let y = apply2(ci, d.pos_arcsec);
        weighted_sum = [weighted_sum[0] + y[0], weighted_sum[1] + y[1]];
        sum_ln_det_c += det2(&d.cov_arcsec2).ln();
    }
    let w_inv = sym2(inv2(&w));
    let mean = apply2(&w_inv, weighted_sum);
    // Residuals from the weighted mean: Σ C_i⁻¹ (x_i − x̄) = 0, so h needs no T₁ term.
    let mut chi2_stat = 0.0;
    let mut h = [0.0; 2];
    for (d, ci) in detections.iter().zip(&inverses) {
        let tau = d.epoch_yr - ref_epoch_yr;
        let r = [d.pos_arcsec[0] - mean[0], d.pos_arcsec[1] - mean[1]];
        let cr = apply2(ci, r);
        chi2_stat += dot2(r, cr);
        h = [h[0] + tau * cr[0], h[1] + tau * cr[1]];
    }
    let g = sym2(add2(&t2, &mul2(&mul2(&t1, &w_inv), &t1), -1.0));
    let k = add2(&[[1.0, 0.0], [0.0, 1.0]], &g, s2);
    let v = sym2(inv2(&k).map(|row| row.map(|e| s2 * e)));
    let pm = apply2(&v, h);
    let chi2 = chi2_stat - dot2(h, pm);
    let ln_b_arcsec = (n - 1) as f64 * LN_2
        - 0.5 * sum_ln_det_c
        - 0.5 * det2(&w).ln()
        - 0.5 * det2(&k).ln()
        - 0.5 * chi2;
    let ln_bayes = ln_b_arcsec - 2.0 * (n - 1) as f64 * RAD_PER_ARCSEC.ln();
    // x₀ = W⁻¹ Σ C_i⁻¹ (x_i − μ τ_i) = x̄ − W⁻¹ T₁ μ.
    let shift = apply2(&w_inv, apply2(&t1, pm));
    let spread = mul2(&mul2(&w_inv, &t1), &v);
    let pos_cov = sym2(add2(&w_inv, &mul2(&spread, &mul2(&t1, &w_inv)), 1.0));
    let det_g = det2(&g);
    // G is a difference of nearly equal terms when the epochs (almost) coincide.
    let chi2_lsq = (n >= 3 && det_g.is_finite() && det_g > 1e-10 * det2(&t2))
        .then(|| chi2_stat - dot2(h, apply2(&inv2(&g), h)));
    MotionFit {
        ln_bayes,
        pm_arcsec_yr: pm,
        pm_cov_arcsec2_yr2: v,
        pos_ref_arcsec: [mean[0] - shift[0], mean[1] - shift[1]],
        pos_ref_cov_arcsec2: pos_cov,
        chi2_lsq,
        dof: if chi2_lsq.is_some() { 2 * n - 4 } else { 0 },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::crossmatch::bayes::ln_bayes_factor;
    use crate::rng::Rng;

    fn ellipse(epoch_yr: f64, pos: [f64; 2], cov: Mat2) -> Detection {
        Detection {
            epoch_yr,
            pos_arcsec: pos,
            cov_arcsec2: cov,
        }
    }

    #[test]
    fn stationary_limit_is_the_n_catalog_factor() {
        // s = 0 must reproduce BS08's n-catalog form (bayes::ln_bayes_factor) to 1e-9,
        // whatever the epochs; FIELD worked example σ = (0.1, 0.3, 0.5)″ at
        // (0,0), (0.25,0), (0,0.4)″, B = 1.49994e23, and a two-detection case.
        let cases: [(&[f64], &[[f64; 2]]); 2] = [
            (&[0.1, 0.3, 0.5], &[[0.0, 0.0], [0.25, 0.0], [0.0, 0.4]]),
            (&[0.05, 0.2], &[[1.0, -2.0], [1.1, -2.3]]),
        ];
        for (sigma, pos) in cases {
            let dets: Vec<Detection> = sigma
                .iter()
                .zip(pos)
                .enumerate()
                .map(|(i, (&s, &p))| Detection::circular(1999.0 + 7.0 * i as f64, p, s))
                .collect();
            let fit = fit_motion(&dets, 2016.0, 0.0);
            let sigma_rad: Vec<f64> = sigma.iter().map(|s| s * RAD_PER_ARCSEC).collect();
            let want = ln_bayes_factor(&sigma_rad, |i, j| {
                (pos[i][0] - pos[j][0]).hypot(pos[i][1] - pos[j][1]) * RAD_PER_ARCSEC
            });
            assert!(
                (fit.ln_bayes - want).abs() < 1e-9,
                "{} vs {want}",
                fit.ln_bayes
            );
            assert_eq!(fit.pm_arcsec_yr, [0.0, 0.0]);
        }
        let three = fit_motion(
            &[
                Detection::circular(2000.0, [0.0, 0.0], 0.1),
                Detection::circular(2010.0, [0.25, 0.0], 0.3),
                Detection::circular(2020.0, [0.0, 0.4], 0.5),
            ],
            2016.0,
            0.0,
        );
        assert!((three.ln_bayes - 1.49994e23f64.ln()).abs() < 1e-5);
    }

    #[test]
    fn tiny_prior_tends_to_the_stationary_factor() {
        // S → 0: ln|K| → 0 and V → 0 continuously (formulas above).
        let dets = [
            Detection::circular(2000.0, [0.0, 0.0], 0.1),
            Detection::circular(2010.0, [0.25, 0.0], 0.3),
            Detection::circular(2020.0, [0.0, 0.4], 0.5),
        ];
        let still = fit_motion(&dets, 2016.0, 0.0).ln_bayes;
        let almost = fit_motion(&dets, 2016.0, 1e-9).ln_bayes;
        assert!((almost - still).abs() < 1e-9, "{almost} vs {still}");
    }

    #[test]
    fn two_detections_by_hand() {
        // For n = 2 with circular errors, x₂ − x₁ ~ N(0, (σ₁² + σ₂² + Δt² s²) I), so
        // B = 2 / v · exp(−ψ²/2v) (the pair form with an inflated variance; algebra).
        // σ = 0.1″, 0.2″, Δt = 10 yr, s = 0.05″/yr: v = 0.01 + 0.04 + 100 · 0.0025 = 0.30 arcsec²,
        // ψ = (0.3, 0.4)″, ψ² = 0.25: ln B = ln 2 − ln 0.3 − 2 ln(4.848137e-6) − 0.25/0.6
        //   = 0.693147 + 1.203973 + 24.473832 − 0.416667 = 25.954285 (by hand; ln values
        //   from a calculator).
        // Motion (t₀ = 2010): w = (100, 25), x̄ = x₁ + 0.2 Δx, τ = (−10, 0),
        //   h = τ₁ w₁ (x₁ − x̄) = −10 · 100 · (−0.2 Δx) = 200 Δx = (60, 80);
        //   G = w₁w₂Δt²/(w₁+w₂) = 100/0.05 = 2000, K = 1 + 0.0025 · 2000 = 6,
        //   V = 0.0025/6 = 4.166667e-4, μ = V h = (0.025, 0.033333) = (5/6) Δx/Δt.
        let dets = [
            Detection::circular(2000.0, [1.0, 2.0], 0.1),
            Detection::circular(2010.0, [1.3, 2.4], 0.2),
        ];
        let fit = fit_motion(&dets, 2010.0, 0.05);
        assert!((fit.ln_bayes - 25.954285).abs() < 1e-6, "{}", fit.ln_bayes);
        assert!((fit.pm_arcsec_yr[0] - 0.025).abs() < 1e-12);
        assert!((fit.pm_arcsec_yr[1] - 0.1 / 3.0).abs() < 1e-12);
        assert!((fit.pm_cov_arcsec2_yr2[0][0] - 0.0025 / 6.0).abs() < 1e-15);
        assert!(fit.pm_cov_arcsec2_yr2[0][1].abs() < 1e-15);
        assert_eq!((fit.chi2_lsq, fit.dof), (None, 0));
        // Position at t₀ = 2010: W = 125, T₁ = −10 · 100 = −1000, so the variance is
        // 1/125 + (1000/125)² · V = 0.008 + 64 · 4.166667e-4 = 0.034667 arcsec² (by hand).
        assert!((fit.pos_ref_cov_arcsec2[0][0] - (0.008 + 64.0 * 0.0025 / 6.0)).abs() < 1e-12);
        assert!(fit.pos_ref_cov_arcsec2[0][1].abs() < 1e-15);
    }

    #[test]
    fn matches_the_dense_reference_computation() {
        // Values from tests/fixtures/motion/dense_reference.py (Python 3.11.7, standard
        // library only: exact fractions for the 2n×2n Σ and the 4×4 normal equations,
        // independent of the 2×2 algebra here); its output is dense_reference.txt.
        let n2 = fit_motion(
            &[
                ellipse(2000.0, [0.0, 0.0], [[0.01, 0.002], [0.002, 0.02]]),
                ellipse(2010.0, [0.3, 0.4], [[0.04, 0.0], [0.0, 0.03]]),
            ],
            2010.0,
            0.05,
        );
        assert!((n2.ln_bayes - 25.956955985754156).abs() < 1e-9);
        assert!((n2.pm_arcsec_yr[0] - 0.024778879061291614).abs() < 1e-12);
        assert!((n2.pm_arcsec_yr[1] - 0.03316814080625806).abs() < 1e-12);
        assert!((n2.pm_cov_arcsec2_yr2[0][0] - 0.00041657406995866485).abs() < 1e-15);
        assert!((n2.pm_cov_arcsec2_yr2[0][1] - 1.3889506200275568e-05).abs() < 1e-15);
        assert!((n2.pm_cov_arcsec2_yr2[1][1] - 0.00041657406995866485).abs() < 1e-15);

        let n3 = fit_motion(
            &[
                ellipse(2000.0, [0.0, 0.0], [[0.01, 0.002], [0.002, 0.02]]),
                ellipse(2008.0, [0.5, 0.3], [[0.04, 0.0], [0.0, 0.04]]),
                ellipse(2016.0, [1.1, 0.5], [[0.0225, -0.003], [-0.003, 0.01]]),
            ],
            2016.0,
            0.1,
        );
        assert!((n3.ln_bayes - 52.09315963109976).abs() < 1e-9);
        assert!((n3.pm_arcsec_yr[0] - 0.067363431245938).abs() < 1e-12);
        assert!((n3.pm_arcsec_yr[1] - 0.030756353852218577).abs() < 1e-12);
        assert!((n3.pm_cov_arcsec2_yr2[0][0] - 0.00012177911803914008).abs() < 1e-15);
        assert!((n3.pm_cov_arcsec2_yr2[0][1] - -3.569832024226467e-06).abs() < 1e-15);
        assert!((n3.pm_cov_arcsec2_yr2[1][1] - 0.00011331349253989336).abs() < 1e-15);
        assert!((n3.chi2_lsq.unwrap() - 0.10403565374309619).abs() < 1e-10);
        assert_eq!(n3.dof, 2);
    }

    #[test]
    fn reference_epoch_does_not_change_the_evidence() {
        // x₀ has a flat prior, so shifting t₀ only relabels it (see fit_motion).
        let dets = [
            ellipse(2000.0, [0.0, 0.0], [[0.01, 0.002], [0.002, 0.02]]),
            ellipse(2008.0, [0.5, 0.3], [[0.04, 0.0], [0.0, 0.04]]),
            ellipse(2016.0, [1.1, 0.5], [[0.0225, -0.003], [-0.003, 0.01]]),
        ];
        let a = fit_motion(&dets, 2016.0, 0.1);
        let b = fit_motion(&dets, 1990.0, 0.1);
        assert!((a.ln_bayes - b.ln_bayes).abs() < 1e-9);
        for k in 0..2 {
            assert!((a.pm_arcsec_yr[k] - b.pm_arcsec_yr[k]).abs() < 1e-12);
            // The fitted track agrees: x₀(1990) = x₀(2016) − 26 μ.
            let moved = a.pos_ref_arcsec[k] - 26.0 * a.pm_arcsec_yr[k];
            assert!((b.pos_ref_arcsec[k] - moved).abs() < 1e-9);
        }
        assert!((a.chi2_lsq.unwrap() - b.chi2_lsq.unwrap()).abs() < 1e-9);
    }

    /// Three detections, 1999, 2010, 2020, of a star moving `pm` (arcsec/yr) with
    /// 0.1″ Gaussian errors (deterministic noise when `seed` is given).
    fn track(pm: [f64; 2], seed: Option<u64>) -> Vec<Detection> {
        let mut rng = seed.map(|s| Rng::new(s, "motion-track"));
        [1999.0, 2010.0, 2020.0]
            .iter()
            .map(|&t| {
                let mut noise = || rng.as_mut().map_or(0.0, |r| 0.1 * r.normal());
                let pos = [
                    10.0 + pm[0] * (t - 2016.0) + noise(),
                    -5.0 + pm[1] * (t - 2016.0) + noise(),
                ];
                Detection::circular(t, pos, 0.1)
            })
            .collect()
    }

    #[test]
    fn a_fast_star_is_one_moving_source() {
        // |μ| = 0.3″/yr (0.18 east, −0.24 north): 6.3″ over 21 yr against 0.1″ errors.
        // Prior s = 0.3″/yr. The stationary χ² is ≈ G |μ|² = 22066.67 · 0.09 = 1986 (G from
        // the next test), so ln B_stat ≈ 50 − 993 ≈ −940, while ln B_move stays near 50.
        let dets = track([0.18, -0.24], Some(42));
        let moving = fit_motion(&dets, 2016.0, 0.3);
        let still = fit_motion(&dets, 2016.0, 0.0);
        assert!(
            moving.ln_bayes > still.ln_bayes + 500.0,
            "{moving:?} {still:?}"
        );
        assert!(moving.ln_bayes > 20.0, "{moving:?}");
        // Recovered within 3 posterior standard deviations per axis (σ ≈ 0.0067″/yr:
        // V ≈ 1/G, G = 100 · 220.67 yr²/arcsec², see the next test).
        for (k, want) in [0.18, -0.24].into_iter().enumerate() {
            let err = moving.pm_cov_arcsec2_yr2[k][k].sqrt();
            assert!(
                (moving.pm_arcsec_yr[k] - want).abs() < 3.0 * err,
                "{moving:?}"
            );
            assert!(err > 0.006 && err < 0.0075, "{err}");
        }
        // χ² of 2 degrees of freedom below its 99.9 % point 13.8 (−2 ln 0.001, standard).
        assert!(moving.chi2_lsq.unwrap() < 13.8);
        assert_eq!(moving.dof, 2);
    }

    #[test]
    fn a_still_star_pays_the_occam_penalty() {
        // Noiseless stationary positions: h = 0, so ln B_move − ln B_stat = −½ ln|K|
        // = −ln(1 + s² G) per the formulas above (two equal axes). Epochs 1999, 2010, 2020,
        // mean 2009.6667: Σ (t − t̄)² = 113.7778 + 0.1111 + 106.7778 = 220.6667 yr²;
        // G = 100 · 220.6667 = 22066.67; s² G = 0.09 · 22066.67 = 1986.0; ln 1987.0 = 7.594381.
        let dets = track([0.0, 0.0], None);
        let diff =
            fit_motion(&dets, 2016.0, 0.3).ln_bayes - fit_motion(&dets, 2016.0, 0.0).ln_bayes;
        assert!((diff + 7.594381).abs() < 1e-6, "{diff}");
        // With noise the motion buys back ½ hᵀVh, about ½ χ²(2) (below ½ · 13.8 = 6.9 at
        // 99.9 %, less than the 7.59 penalty); this draw stays below the stationary factor.
        let noisy = track([0.0, 0.0], Some(7));
        let moving = fit_motion(&noisy, 2016.0, 0.3);
        let still = fit_motion(&noisy, 2016.0, 0.0);
        assert!(moving.ln_bayes < still.ln_bayes, "{moving:?} {still:?}");
        for k in 0..2 {
            let err = moving.pm_cov_arcsec2_yr2[k][k].sqrt();
            assert!(moving.pm_arcsec_yr[k].abs() < 3.0 * err);
        }
    }

    #[test]
    fn one_detection_is_no_evidence() {
        // n = 1: |C| |W| = 1, K = I (G = 0), χ² = 0 ⇒ ln B = 0.
        let fit = fit_motion(&[Detection::circular(2010.0, [3.0, 4.0], 0.2)], 2016.0, 0.5);
        assert!(fit.ln_bayes.abs() < 1e-12);
        assert!((fit.pos_ref_arcsec[0] - 3.0).abs() < 1e-9);
        assert!((fit.pos_ref_arcsec[1] - 4.0).abs() < 1e-9);
    }

    #[test]
    fn same_epoch_gives_no_least_squares_chi2() {
        // All epochs equal: G = 0, μ is unconstrained by the data (posterior = prior).
        let dets = [
            Detection::circular(2010.0, [0.0, 0.0], 0.1),
            Detection::circular(2010.0, [0.1, 0.0], 0.1),
            Detection::circular(2010.0, [0.0, 0.1], 0.1),
        ];
        let fit = fit_motion(&dets, 2016.0, 0.2);
        assert_eq!(fit.chi2_lsq, None);
        assert!((fit.pm_cov_arcsec2_yr2[0][0] - 0.04).abs() < 1e-12);
    }
}
