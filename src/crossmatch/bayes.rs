//! Bayesian cross-identification: is a tuple of detections one object?
//!
//! For a tuple of n detections, one from each of n catalogues, compare two
//! hypotheses: **H**, all detections are of one object, and **K**, they are
//! unrelated objects. The evidence is the Bayes factor `B = p(D|H) / p(D|K)`;
//! with a prior `P0 = P(H)` it gives the posterior `P(H|D)`.
//!
//! - [`ln_bayes_factor`]: n catalogues, circular Gaussian errors, small-angle limit.
//! - [`ln_bayes_factor_pair`]: the same for two catalogues, in closed form.
//! - [`ln_bayes_factor_spherical`]: exact form on the sphere (Fisher
//!   distributions), needed only when errors reach arcminutes or more.
//! - [`ln_prior_from_densities`] / [`prior_from_densities`]: the prior `P0`.
//! - [`posterior`] and [`ln_posterior_odds`]: combine the two.
//! - [`circularized_sigma_arcsec`]: one per-axis σ from an error ellipse.
//!
//! Angles are **radians** everywhere except in the one function named
//! `_arcsec`. Good matches with sub-arcsecond errors have `ln B ≈ 20–60`
//! (`B` up to `1e26`) while `P0` is often below `1e-9`, so every function works
//! in log space and nothing here overflows or underflows for such inputs.
//!
//! # Example
//!
//! ```
//! use fluxloom::crossmatch::bayes::{ln_bayes_factor_pair, ln_prior_from_densities, posterior};
//!
//! let arcsec_rad = std::f64::consts::PI / 180.0 / 3600.0;
//! let ln_b = ln_bayes_factor_pair(0.1 * arcsec_rad, 0.3 * arcsec_rad, 0.25 * arcsec_rad);
//! // 1e4 and 2e4 sources, 5e3 of them common, in one square degree.
//! let area_sr = (std::f64::consts::PI / 180.0).powi(2);
//! let ln_p0 = ln_prior_from_densities(5e3 / area_sr, &[1e4 / area_sr, 2e4 / area_sr]);
//! assert!((posterior(ln_b, ln_p0) - 0.99736).abs() < 1e-5);
//! ```
//!
//! # References
//!
//! - **BS08**: Budavári, T. & Szalay, A. S. 2008, ApJ 679, 301
//!   (2008ApJ...679..301B, arXiv:0707.1611). The formulas below were re-derived
//!   for this crate; that they coincide with the paper's equations is from
//!   memory, as is the paper's form of the prior.

use std::f64::consts::{LN_2, PI};

/// ln B for n ≥ 1 detections with circular Gaussian errors, small-angle limit.
///
/// ```text
/// B = 2^(n−1) · (Π w_i / Σ w_i) · exp[ −Σ_{i<j} w_i w_j ψ_ij² / (2 Σ w_i) ],   w_i = 1/σ_i²
/// ```
///
/// (BS08; objects uniform on the whole sphere.) For n = 2 this is
/// [`ln_bayes_factor_pair`]; for n = 1 it is 0 (one detection is no evidence
/// either way).
///
/// # Arguments
///
/// - `sigma_rad`: per-axis 1σ error of each detection, radians, finite and > 0.
///   Combine an error ellipse and a systematic floor first, e.g. with
///   [`circularized_sigma_arcsec`].
/// - `sep_rad(i, j)`: angular separation ψ_ij between detections `i` and `j`,
///   radians; called once for each `i < j`.
///
/// # Panics
///
/// Panics if `sigma_rad` is empty.
pub fn ln_bayes_factor(sigma_rad: &[f64], sep_rad: impl Fn(usize, usize) -> f64) -> f64 {
    assert!(
        !sigma_rad.is_empty(),
        "ln_bayes_factor needs at least one detection"
    );
    let n = sigma_rad.len();
    let weight = |i: usize| 1.0 / (sigma_rad[i] * sigma_rad[i]);
    let sum_w: f64 = (0..n).map(weight).sum();
    // Σ ln w_i = −2 Σ ln σ_i, taken from σ directly so no product is formed.
    let sum_ln_w: f64 = sigma_rad.iter().map(|s| -2.0 * s.ln()).sum();
    let mut chi2 = 0.0;
    for i in 0..n {
        for j in (i + 1)..n {
            let psi = sep_rad(i, j);
            // w_i · (w_j / Σw) keeps the product in range for milliarcsecond errors.
            chi2 += weight(i) * (weight(j) / sum_w) * psi * psi;
        }
    }
    (n - 1) as f64 * LN_2 + sum_ln_w - sum_w.ln() - 0.5 * chi2
}

/// ln B for two detections, small-angle limit:
///
/// ```text
/// B = [2 / (σ1² + σ2²)] · exp[ −ψ² / (2 (σ1² + σ2²)) ]
/// ```
///
/// (BS08). `σ1`, `σ2` are per-axis 1σ errors and `ψ` the separation, all in
/// radians; `σ1² + σ2²` must be > 0.
pub fn ln_bayes_factor_pair(sigma1_rad: f64, sigma2_rad: f64, sep_rad: f64) -> f64 {
    let var_rad2 = sigma1_rad * sigma1_rad + sigma2_rad * sigma2_rad;
    LN_2 - var_rad2.ln() - sep_rad * sep_rad / (2.0 * var_rad2)
}

/// ln B on the sphere, each detection a Fisher distribution of concentration κ_i:
///
/// ```text
/// B = [sinh R / R] · Π_i [κ_i / sinh κ_i],   R = |Σ_i κ_i u_i|
/// ```
///
/// (BS08, spherical form from memory.) For a Gaussian error σ_i in radians
/// use κ_i = 1/σ_i²; then the small-angle limit of this expression is
/// [`ln_bayes_factor`]. Use it when errors are arcminutes or more, where the
/// plane approximation fails.
///
/// Evaluated without forming `sinh` or `R` directly: with `S = Σ κ_i`,
/// `S² − R² = Σ_{i<j} κ_i κ_j |u_i − u_j|²` is computed from chord lengths, so
/// `S − R` carries no cancellation, and
/// `ln B = q(R) − Σ q(κ_i) − (S − R)` with `q(z) = ln(sinh z / z) − z
/// = ln(1 − e^(−2z)) − ln 2 − ln z` (series `−z + z²/6 − z⁴/180` below
/// `z = 1e-3`). Finite for κ from ~0 to beyond `1e16` (milliarcsecond errors).
///
/// # Arguments
///
/// - `kappa`: concentrations κ_i, radians⁻², finite and > 0.
/// - `unit_vectors`: positions as unit vectors (x, y, z); their norm must be 1
///   to double precision, as the chord formula assumes it.
///
/// # Panics
///
/// Panics if the slices are empty or of different lengths.
pub fn ln_bayes_factor_spherical(kappa: &[f64], unit_vectors: &[[f64; 3]]) -> f64 {
    assert_eq!(
        kappa.len(),
        unit_vectors.len(),
        "one concentration per unit vector"
    );
    assert!(
        !kappa.is_empty(),
        "ln_bayes_factor_spherical needs at least one detection"
    );
    let n = kappa.len();
    let sum_kappa: f64 = kappa.iter().sum();
    // y = (S² − R²) / S² = Σ_{i<j} (κ_i/S)(κ_j/S) |u_i − u_j|², in [0, 1].
    let mut y = 0.0;
    for i in 0..n {
        for j in (i + 1)..n {
            let (a, b) = (unit_vectors[i], unit_vectors[j]);
            let chord2 = (a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2);
            y += (kappa[i] / sum_kappa) * (kappa[j] / sum_kappa) * chord2;
        }
    }
    let y = y.clamp(0.0, 1.0);
    let root = (1.0 - y).sqrt();
    let r = sum_kappa * root;
    let s_minus_r = sum_kappa * y / (1.0 + root);
    let sum_q: f64 = kappa.iter().map(|&k| ln_sinhc_minus_z(k)).sum();
    ln_sinhc_minus_z(r) - sum_q - s_minus_r
}

/// `ln(sinh z / z) − z` for `z ≥ 0`, accurate for tiny and huge `z`.
fn ln_sinhc_minus_z(z: f64) -> f64 {
    if z < 1e-3 {
        // ln(sinh z / z) = z²/6 − z⁴/180 + O(z⁶); the next term is < 1e-20 here.
        let z2 = z * z;
        -z + z2 / 6.0 - z2 * z2 / 180.0
    } else {
        // ln sinh z = z − ln 2 + ln(1 − e^(−2z)).
        (-(-2.0 * z).exp_m1()).ln() - LN_2 - z.ln()
    }
}

/// Natural log of the prior `P0 = P(H)` from surface densities:
///
/// ```text
/// P0 = ρ★ / Π_i ρ_i / (4π)^(n−1)
/// ```
///
/// ρ★ is the density of objects present in all n catalogues, ρ_i the density
/// of catalogue i, all in sources per steradian. With counts inside an
/// overlap area Ω (ρ = N/Ω) this is `(Ω/4π)^(n−1) · N★ / Π N_i`; the
/// `(4π)^(n−1)` appears because the Bayes factors above are normalised to the
/// whole sphere (BS08 gives `N★ / Π N_i` for counts on the whole sky; from
/// memory). If ρ★ is unknown, a common practice is to start from a guess and
/// replace N★ by the sum of the posteriors until it settles.
///
/// Positive, finite densities are expected; zero or negative ones give
/// −∞ or NaN.
///
/// # Panics
///
/// Panics if `densities_per_sr` is empty.
pub fn ln_prior_from_densities(common_density_per_sr: f64, densities_per_sr: &[f64]) -> f64 {
    assert!(
        !densities_per_sr.is_empty(),
        "the prior needs the density of at least one catalogue"
    );
    let n = densities_per_sr.len();
    let sum_ln_rho: f64 = densities_per_sr.iter().map(|rho| rho.ln()).sum();
    common_density_per_sr.ln() - sum_ln_rho - (n - 1) as f64 * (4.0 * PI).ln()
}

/// The prior `P0` itself; `exp` of [`ln_prior_from_densities`] (see there).
///
/// May underflow to 0 for many catalogues; prefer the log form.
///
/// # Panics
///
/// Panics if `densities_per_sr` is empty.
pub fn prior_from_densities(common_density_per_sr: f64, densities_per_sr: &[f64]) -> f64 {
    ln_prior_from_densities(common_density_per_sr, densities_per_sr).exp()
}

/// Log posterior odds `ln[B P0 / (1 − P0)]` from `ln B` and `ln P0` (`ln P0 ≤ 0`).
///
/// `ln(1 − P0)` uses `ln_1p` for small `P0` and `expm1` for `P0` near 1, so
/// `P0 = 1e-300` or `1 − 1e-12` lose no digits. `ln P0 = 0` gives +∞.
pub fn ln_posterior_odds(ln_bayes: f64, ln_prior: f64) -> f64 {
    let ln_one_minus_p0 = if ln_prior < -LN_2 {
        (-ln_prior.exp()).ln_1p()
    } else {
        (-ln_prior.exp_m1()).ln()
    };
    ln_bayes + ln_prior - ln_one_minus_p0
}

/// Posterior probability that the detections are one object (BS08):
///
/// ```text
/// P(H|D) = [1 + (1 − P0) / (B P0)]⁻¹ = 1 / (1 + e^(−L)),   L = ln[B P0 / (1 − P0)]
/// ```
///
/// Takes `ln B` and `ln P0` and evaluates the logistic function of
/// [`ln_posterior_odds`] on whichever side avoids overflow, so `ln B = 800`
/// with `ln P0 = −900` gives `≈ e^(−100)`, not 0 or NaN. Result in `[0, 1]`.
pub fn posterior(ln_bayes: f64, ln_prior: f64) -> f64 {
    let odds = ln_posterior_odds(ln_bayes, ln_prior);
    if odds >= 0.0 {
        1.0 / (1.0 + (-odds).exp())
    } else {
        let e = odds.exp();
        e / (1.0 + e)
    }
}

/// Per-axis σ (arcsec) of the circular Gaussian used in place of an error
/// ellipse, plus a systematic floor:
///
/// ```text
/// σ = sqrt( (a² + b²) / 2 + σ_sys² )
/// ```
///
/// `a`, `b` are the 1σ semi-major and semi-minor axes and `σ_sys` a per-axis
/// systematic (frame-tie) term, all arcseconds and ≥ 0. The choice keeps the
/// trace of the covariance: `a² + b² = C_ee + C_nn` whatever the position
/// angle, so the circular model has the same mean squared offset `2σ²` as the
/// ellipse. Adding σ_sys in quadrature per axis is common practice. The
/// alternative `sqrt(a b)` (same area) would understate the spread of a very
/// elongated ellipse along its long axis.
pub fn circularized_sigma_arcsec(major_arcsec: f64, minor_arcsec: f64, sys_arcsec: f64) -> f64 {
    (0.5 * (major_arcsec * major_arcsec + minor_arcsec * minor_arcsec) + sys_arcsec * sys_arcsec)
        .sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// One arcsecond in radians: π / (180 · 3600) (definition).
    const ARCSEC_RAD: f64 = PI / 648_000.0;

    fn assert_rel(got: f64, want: f64, rel: f64) {
        assert!(
            ((got - want) / want).abs() <= rel,
            "got {got:e}, want {want:e} (relative tolerance {rel:e})"
        );
    }

    /// ln P0 for the worked overlap: 1 deg² = (π/180)² sr = 3.04617e-4 sr,
    /// N1 = 1e4, N2 = 2e4, N★ = 5e3, densities ρ = N / Ω.
    fn worked_ln_prior() -> f64 {
        let area_sr = (PI / 180.0).powi(2);
        ln_prior_from_densities(5e3 / area_sr, &[1e4 / area_sr, 2e4 / area_sr])
    }

    /// Tangent-plane offset (east, north), arcsec.
    type Offset = (f64, f64);

    /// Unit vector at tangent-plane offsets (ξ, η) radians east / north of
    /// (α0, δ0) by inverse gnomonic projection (standard).
    fn deproject(ra0_rad: f64, dec0_rad: f64, xi_rad: f64, eta_rad: f64) -> [f64; 3] {
        let (sa, ca) = ra0_rad.sin_cos();
        let (sd, cd) = dec0_rad.sin_cos();
        let centre = [cd * ca, cd * sa, sd];
        let east = [-sa, ca, 0.0];
        let north = [-sd * ca, -sd * sa, cd];
        let norm = (1.0 + xi_rad * xi_rad + eta_rad * eta_rad).sqrt();
        [0, 1, 2].map(|k| (centre[k] + xi_rad * east[k] + eta_rad * north[k]) / norm)
    }

    #[test]
    fn pair_worked_example() {
        // Budavári & Szalay 2008, ApJ 679, 301, two-catalogue form
        // B = [2/(σ1²+σ2²)] exp[−ψ²/(2(σ1²+σ2²))]; arithmetic by hand:
        //   σ1² + σ2² = 0.01 + 0.09 = 0.1 arcsec² = 0.1 · (4.84814e-6)² = 2.35044e-12 rad²
        //   2 / 2.35044e-12 = 8.50903e11
        //   ψ²/(2(σ1²+σ2²)) = 0.0625 / 0.2 = 0.3125, exp(−0.3125) = 0.731616
        //   B = 8.50903e11 · 0.731616 = 6.22534e11, ln B = 27.157
        let ln_b = ln_bayes_factor_pair(0.1 * ARCSEC_RAD, 0.3 * ARCSEC_RAD, 0.25 * ARCSEC_RAD);
        assert_rel(ln_b.exp(), 6.22534e11, 1e-5);
        assert!((ln_b - 27.157).abs() < 5e-4, "ln B = {ln_b}");
    }

    #[test]
    fn prior_worked_example() {
        // Prior (Ω/4π)^(n−1) · N★ / Π N_i (Budavári & Szalay 2008, prior form
        // from memory; the Ω/4π factor follows from B being normalised to the
        // whole sphere). By hand:
        //   Ω/4π = 3.04617e-4 / 12.5664 = 2.42407e-5
        //   P0 = 2.42407e-5 · 5e3 / (1e4 · 2e4) = 2.42407e-5 · 2.5e-5 = 6.06017e-10
        let p0 = prior_from_densities(
            5e3 / (PI / 180.0).powi(2),
            &[1e4 / (PI / 180.0).powi(2), 2e4 / (PI / 180.0).powi(2)],
        );
        assert_rel(p0, 6.06017e-10, 1e-5);
        assert_rel(worked_ln_prior(), 6.06017e-10_f64.ln(), 1e-6);
    }

    #[test]
    fn posterior_worked_example() {
        // P(H|D) = [1 + (1 − P0)/(B P0)]⁻¹ (Budavári & Szalay 2008). By hand:
        //   B P0 = 6.22534e11 · 6.06017e-10 = 377.27
        //   P = 1 / (1 + (1 − 6.06e-10)/377.27) = 1 / 1.0026506 = 0.99736
        let ln_p0 = worked_ln_prior();
        let ln_b = ln_bayes_factor_pair(0.1 * ARCSEC_RAD, 0.3 * ARCSEC_RAD, 0.25 * ARCSEC_RAD);
        assert_rel((ln_b + ln_p0).exp(), 377.27, 1e-5);
        assert!((posterior(ln_b, ln_p0) - 0.99736).abs() < 5e-6);
        // ln odds = ln 377.266 − ln(1 − 6.06e-10) = 5.932952 (same arithmetic).
        assert!((ln_posterior_odds(ln_b, ln_p0) - 5.932952).abs() < 1e-6);
    }

    #[test]
    fn posterior_falls_with_separation() {
        // Same set-up, exponent ψ²/0.2 arcsec² (Budavári & Szalay 2008 forms above):
        //   ψ = 0.5″: exp(−1.25) · 8.50903e11 · 6.06017e-10 = 147.74 → 1/(1 + 1/147.74) = 0.99328
        //   ψ = 1.0″: exp(−5) · 515.67 = 3.4745 → 1/(1 + 1/3.4745) = 0.7765
        //   ψ = 1.5″: exp(−11.25) · 515.67 = 0.0067074 → 0.0067074/1.0067074 = 0.00666
        let ln_p0 = worked_ln_prior();
        for (sep_arcsec, want, tol) in [
            (0.5, 0.99328, 5e-6),
            (1.0, 0.7765, 5e-5),
            (1.5, 0.00666, 5e-6),
        ] {
            let ln_b =
                ln_bayes_factor_pair(0.1 * ARCSEC_RAD, 0.3 * ARCSEC_RAD, sep_arcsec * ARCSEC_RAD);
            let p = posterior(ln_b, ln_p0);
            assert!((p - want).abs() < tol, "ψ = {sep_arcsec}″: {p} vs {want}");
        }
    }

    #[test]
    fn three_catalogue_worked_example() {
        // Budavári & Szalay 2008 n-catalogue form. By hand, in arcsec units:
        //   w = 1/σ² = (100, 11.1111, 4) arcsec⁻², Σw = 115.111, Πw = 4444.44
        //   Πw/Σw = 38.6100 arcsec⁻⁴ = 38.6100 · 206264.806⁴ = 6.98877e22 rad⁻⁴
        //   ψ12² = 0.0625, ψ13² = 0.16, ψ23² = 0.0625 + 0.16 = 0.2225 arcsec²
        //   Σ w_i w_j ψ² = 69.4444 + 64 + 9.88889 = 143.333; /(2 · 115.111) = 0.622587
        //   B = 2² · 6.98877e22 · exp(−0.622587) = 2.79551e23 · 0.536555 = 1.49994e23
        let sigma_rad = [0.1, 0.3, 0.5].map(|s| s * ARCSEC_RAD);
        let pos_rad =
            [(0.0, 0.0), (0.25, 0.0), (0.0, 0.4)].map(|(x, y)| (x * ARCSEC_RAD, y * ARCSEC_RAD));
        let ln_b = ln_bayes_factor(&sigma_rad, |i, j| {
            (pos_rad[i].0 - pos_rad[j].0).hypot(pos_rad[i].1 - pos_rad[j].1)
        });
        assert_rel(ln_b.exp(), 1.49994e23, 1e-5);
    }

    #[test]
    fn one_detection_is_no_evidence() {
        // n = 1: 2⁰ · w/w · exp(0) = 1 (same formula, by inspection).
        assert_eq!(ln_bayes_factor(&[3e-6], |_, _| unreachable!()), 0.0);
        assert!(ln_bayes_factor_spherical(&[4e10], &[[0.0, 0.0, 1.0]]).abs() < 1e-9);
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]

        #[test]
        fn n_form_reduces_to_pair(
            s1 in 1e-9f64..1e-3,
            s2 in 1e-9f64..1e-3,
            k in 0.0f64..10.0,
        ) {
            // For n = 2: Πw/Σw = 1/(σ1²+σ2²) and w1 w2/(w1+w2) = 1/(σ1²+σ2²)
            // (algebra), so both forms agree to rounding.
            let sep = k * (s1 * s1 + s2 * s2).sqrt();
            let pair = ln_bayes_factor_pair(s1, s2, sep);
            let general = ln_bayes_factor(&[s1, s2], |_, _| sep);
            prop_assert!((pair - general).abs() <= 1e-12 * pair.abs().max(1.0), "{pair} vs {general}");
        }
    }

    #[test]
    fn spherical_matches_small_angle_for_arcsecond_errors() {
        // The small-angle limit of the Fisher form is the Gaussian form
        // (Budavári & Szalay 2008, from memory; both expand to the same terms).
        // Tolerance 1e-6 relative in ln B.
        let (ra0, dec0) = (150f64.to_radians(), 2.2f64.to_radians());
        let cases: [(&[f64], &[Offset]); 3] = [
            (&[0.1, 0.3], &[(0.0, 0.0), (0.25, 0.0)]),
            (&[0.1, 0.3, 0.5], &[(0.0, 0.0), (0.25, 0.0), (0.0, 0.4)]),
            (&[0.001, 0.002], &[(0.0, 0.0), (0.001, 0.002)]),
        ];
        for (sigma_arcsec, pos_arcsec) in cases {
            let sigma_rad: Vec<f64> = sigma_arcsec.iter().map(|s| s * ARCSEC_RAD).collect();
            let kappa: Vec<f64> = sigma_rad.iter().map(|s| 1.0 / (s * s)).collect();
            let units: Vec<[f64; 3]> = pos_arcsec
                .iter()
                .map(|&(x, y)| deproject(ra0, dec0, x * ARCSEC_RAD, y * ARCSEC_RAD))
                .collect();
            let plane = ln_bayes_factor(&sigma_rad, |i, j| {
                let (a, b) = (pos_arcsec[i], pos_arcsec[j]);
                (a.0 - b.0).hypot(a.1 - b.1) * ARCSEC_RAD
            });
            let sphere = ln_bayes_factor_spherical(&kappa, &units);
            assert!(sphere.is_finite());
            assert_rel(sphere, plane, 1e-6);
        }
    }

    #[test]
    fn spherical_matches_direct_evaluation_for_degree_errors() {
        // Direct evaluation of [sinh R / R] Π κ/sinh κ (defining expression
        // above), safe in f64 while κ < ~700; σ of 3°, 5° and 60°.
        let (ra0, dec0) = (10f64.to_radians(), (-20f64).to_radians());
        for (sigma_deg, offset_deg) in [(3.0, 2.0), (5.0, 8.0), (60.0, 45.0)] {
            let sigma_rad = f64::to_radians(sigma_deg);
            let kappa = [1.0 / (sigma_rad * sigma_rad), 0.5 / (sigma_rad * sigma_rad)];
            let offset = f64::to_radians(offset_deg);
            let units = [
                deproject(ra0, dec0, 0.0, 0.0),
                deproject(ra0, dec0, offset.tan(), 0.0),
            ];
            let sum: [f64; 3] = [0, 1, 2].map(|k| kappa[0] * units[0][k] + kappa[1] * units[1][k]);
            let r = (sum[0] * sum[0] + sum[1] * sum[1] + sum[2] * sum[2]).sqrt();
            let direct =
                (r.sinh() / r).ln() + kappa.iter().map(|k| (k / k.sinh()).ln()).sum::<f64>();
            let got = ln_bayes_factor_spherical(&kappa, &units);
            assert!(got.is_finite());
            assert!(
                (got - direct).abs() < 1e-9 * direct.abs().max(1.0),
                "σ = {sigma_deg}°: {got} vs {direct}"
            );
        }
    }

    #[test]
    fn spherical_handles_extremes() {
        // κ → 0: sinh z / z → 1, so B → 1 (limit, standard).
        let units = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]];
        assert!(ln_bayes_factor_spherical(&[1e-9, 2e-9], &units).abs() < 1e-15);
        // Antipodal pair with equal κ: R = 0 and B = Π κ/sinh κ (sinh R/R → 1);
        // κ = 2: ln(2/sinh 2) = ln(2/3.626860) = ln 0.551441 = −0.595220, twice = −1.190440 (by hand).
        let antipodal =
            ln_bayes_factor_spherical(&[2.0, 2.0], &[[0.0, 0.0, 1.0], [0.0, 0.0, -1.0]]);
        assert!((antipodal - 2.0 * (2.0 / 2f64.sinh()).ln()).abs() < 1e-12);
        assert!((antipodal + 1.190440).abs() < 1e-6);
    }

    #[test]
    fn posterior_is_stable_in_the_tails() {
        // L = ln B + ln P0 − ln(1 − P0): B = e^800 would overflow if formed.
        // 800 − 700 = 100 → P = 1/(1 + e^−100) = 1 to double precision.
        assert_eq!(posterior(800.0, -700.0), 1.0);
        // 700 − 800 = −100 → P = e^−100/(1 + e^−100) = 3.72008e-44 (exp(−100), by hand).
        assert_rel(posterior(700.0, -800.0), 3.720_075_976_020_836e-44, 1e-12);
        // P0 = 1 (certain prior): odds infinite, posterior 1 (limit of the formula).
        assert_eq!(posterior(-50.0, 0.0), 1.0);
        // P0 = 1/2, B = 1: odds 1, posterior 1/2 (by hand).
        assert!((posterior(0.0, -LN_2) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn circularized_sigma_keeps_covariance_trace() {
        // Ellipse a = 0.3″, b = 0.1″, PA 30°: C_ee = 0.03, C_nn = 0.07 arcsec²
        // (C_ee = a² sin²θ + b² cos²θ, C_nn = a² cos²θ + b² sin²θ; by hand),
        // trace 0.10 → σ² = 0.05, σ = 0.223607″; with σ_sys = 0.1″: σ² = 0.06, σ = 0.244949″.
        assert!((circularized_sigma_arcsec(0.3, 0.1, 0.0) - 0.223_607).abs() < 1e-6);
        assert!((circularized_sigma_arcsec(0.3, 0.1, 0.1) - 0.244_949).abs() < 1e-6);
        // Circular input is returned unchanged (a = b = σ, by inspection).
        assert!((circularized_sigma_arcsec(0.2, 0.2, 0.0) - 0.2).abs() < 1e-15);
    }
}
