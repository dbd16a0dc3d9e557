//! Systematic positional floors measured from the data.
//!
//! For unique, bright pairs against an astrometric reference, the normalised
//! separations `d_k = ψ_k / sqrt(σ_k² + σ_sys²)` of true matches follow the
//! Rayleigh law of unit scale when the errors are right, whose median is
//! `sqrt(2 ln 2) = 1.17741` (standard: the CDF is `1 − exp(−d²/2)`). If the
//! stated errors are too small the median is larger; [`estimate_floor`] finds
//! the per-axis floor σ_sys that brings it back (common practice). A floor much
//! larger than the stated errors ([`far_above_stated`]) points at a problem
//! other than slightly optimistic errors: unmodelled proper motions, a wrong
//! error column, or wrong pairs.
//!
//! ```
//! use fluxloom::crossmatch::floors::estimate_floor;
//!
//! // Three pairs with stated σ = 0.1″ whose separations are twice too large.
//! let est = estimate_floor(&[0.2, 0.235_482, 0.3], &[0.1, 0.1, 0.1]).unwrap();
//! assert!((est.floor_arcsec - 0.1732).abs() < 1e-4);
//! ```

use serde::Serialize;

/// Median of the Rayleigh law of unit scale, `sqrt(2 ln 2)` (standard).
pub const RAYLEIGH_MEDIAN: f64 = 1.177_410_022_515_474_6;

/// A floor is "far above the stated errors" when it exceeds this many times
/// the median stated σ. Slightly optimistic errors need a floor comparable to
/// the errors themselves (a factor 2 in the floor already means the stated
/// errors describe at most a fifth of the variance); beyond that the errors
/// are not the whole story, so the choice of 2 is a judgement, not a standard.
pub const FAR_ABOVE_FACTOR: f64 = 2.0;

/// A floor measured from pairs against an astrometric reference.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FloorEstimate {
    /// Number of pairs used.
    pub n_pairs: usize,
    /// Per-axis floor σ_sys, arcsec, ≥ 0.
    pub floor_arcsec: f64,
    /// Median of `d_k` with no floor.
    pub median_d_before: f64,
    /// Median of `d_k` with the floor (≈ [`RAYLEIGH_MEDIAN`] when the floor is > 0).
    pub median_d_after: f64,
    /// Median stated combined per-axis σ_k, arcsec.
    pub median_stated_sigma_arcsec: f64,
}

/// Solves for the per-axis floor σ_sys ≥ 0 at which the median of
/// `d_k = ψ_k / sqrt(σ_k² + σ_sys²)` equals [`RAYLEIGH_MEDIAN`].
///
/// `sep_arcsec[k]` is the separation ψ_k of pair k and `sigma_arcsec[k]` its
/// stated combined per-axis σ_k (both catalogs' errors in quadrature, without
/// any floor), arcsec. If the median is already at or below the Rayleigh
/// median with no floor, the floor is 0. The median falls continuously and
/// monotonically as σ_sys grows, so bisection on `[0, max ψ / 1.17741]` (where
/// every `d_k` is at most the target) finds it; the bracket is halved until it is
/// below 1e-12 of its start. Returns `None` when there are no pairs.
///
/// # Panics
///
/// Panics if the slices differ in length, or a value is negative or not finite.
pub fn estimate_floor(sep_arcsec: &[f64], sigma_arcsec: &[f64]) -> Option<FloorEstimate> {
    assert_eq!(
        sep_arcsec.len(),
        sigma_arcsec.len(),
        "one stated σ per separation"
    );
    assert!(
        sep_arcsec
            .iter()
            .chain(sigma_arcsec)
            .all(|v| v.is_finite() && *v >= 0.0),
        "separations and σ must be finite and ≥ 0"
    );
    if sep_arcsec.is_empty() {
        return None;
    }
    let mut scratch = Vec::with_capacity(sep_arcsec.len());
    let mut median_d = |floor: f64| {
        scratch.clear();
        scratch.extend(
            sep_arcsec
                .iter()
                .zip(sigma_arcsec)
                .map(|(psi, s)| psi / (s * s + floor * floor).sqrt()),
        );
        median(&mut scratch)
    };
    let before = median_d(0.0);
    let floor = if before <= RAYLEIGH_MEDIAN {
        0.0
    } else {
        let mut lo = 0.0;
        let mut hi = sep_arcsec.iter().fold(0.0f64, |m, &v| m.max(v)) / RAYLEIGH_MEDIAN;
        let width = hi;
        while hi - lo > 1e-12 * width {
            let mid = 0.5 * (lo + hi);
            if median_d(mid) > RAYLEIGH_MEDIAN {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    };
    let after = median_d(floor);
    let mut sigmas = sigma_arcsec.to_vec();
    Some(FloorEstimate {
        n_pairs: sep_arcsec.len(),
        floor_arcsec: floor,
        median_d_before: before,
        median_d_after: after,
        median_stated_sigma_arcsec: median(&mut sigmas),
    })
}

/// True when the floor exceeds [`FAR_ABOVE_FACTOR`] times the median stated σ.
pub fn far_above_stated(estimate: &FloorEstimate) -> bool {
    estimate.floor_arcsec > FAR_ABOVE_FACTOR * estimate.median_stated_sigma_arcsec
}

/// Median of a non-empty slice without NaN (mean of the two middle values for an
/// even count); reorders the slice.
fn median(values: &mut [f64]) -> f64 {
    let n = values.len();
    let (_, upper, _) = values.select_nth_unstable_by(n / 2, f64::total_cmp);
    let upper = *upper;
    if n % 2 == 1 {
        upper
    } else {
        let lower = values[..n / 2]
            .iter()
            .fold(f64::NEG_INFINITY, |m, &v| m.max(v));
        0.5 * (lower + upper)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Rng;

    /// Rayleigh-distributed separations: the length of a 2-D Gaussian offset of
    /// per-axis σ (standard).
    fn rayleigh_pairs(
        rng: &mut Rng,
        n: usize,
        sigma_of: impl Fn(&mut Rng) -> (f64, f64),
    ) -> (Vec<f64>, Vec<f64>) {
        let mut sep = Vec::with_capacity(n);
        let mut stated = Vec::with_capacity(n);
        for _ in 0..n {
            let (stated_sigma, true_sigma) = sigma_of(rng);
            sep.push((true_sigma * rng.normal()).hypot(true_sigma * rng.normal()));
            stated.push(stated_sigma);
        }
        (sep, stated)
    }

    #[test]
    fn rayleigh_median_is_sqrt_two_ln_two() {
        // 1 − exp(−m²/2) = 1/2 ⇒ m = sqrt(2 ln 2) (standard); FIELD table value 1.177.
        assert!((RAYLEIGH_MEDIAN - (2.0 * std::f64::consts::LN_2).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn exact_small_case() {
        // Stated σ = 0.1″ for three pairs, ψ = (0.2, 0.235482, 0.3)″: median ψ = 0.235482,
        // d before = 2.35482 (by hand). The floor solves 0.235482 / sqrt(0.01 + f²) = 1.177410:
        //   0.01 + f² = (0.235482 / 1.177410)² = 0.2000000² = 0.0400000 ⇒ f² = 0.0300000, f = 0.1732051″ (by hand).
        let est = estimate_floor(&[0.2, 0.235_482, 0.3], &[0.1, 0.1, 0.1]).unwrap();
        assert_eq!(est.n_pairs, 3);
        assert!((est.median_d_before - 2.35482).abs() < 1e-9);
        assert!((est.floor_arcsec - 0.173_205_1).abs() < 2e-7, "{est:?}");
        assert!((est.median_d_after - RAYLEIGH_MEDIAN).abs() < 1e-9);
        assert!((est.median_stated_sigma_arcsec - 0.1).abs() < 1e-15);
        // 0.173″ is below 2 × 0.1″.
        assert!(!far_above_stated(&est));
    }

    #[test]
    fn even_count_uses_the_mean_of_the_middle_pair() {
        // ψ = (0.1, 0.2, 0.4, 0.5)″, σ = 0.1″: d = (1, 2, 4, 5), median (2 + 4)/2 = 3 (by hand).
        let est = estimate_floor(&[0.1, 0.2, 0.4, 0.5], &[0.1; 4]).unwrap();
        assert!((est.median_d_before - 3.0).abs() < 1e-12);
        assert!((est.median_d_after - RAYLEIGH_MEDIAN).abs() < 1e-9);
    }

    #[test]
    fn median_already_small_means_no_floor() {
        // d = (0.5, 1.0, 1.1): median 1.0 ≤ 1.17741 (by hand).
        let est = estimate_floor(&[0.05, 0.1, 0.11], &[0.1; 3]).unwrap();
        assert_eq!(est.floor_arcsec, 0.0);
        assert!((est.median_d_before - 1.0).abs() < 1e-12);
        assert_eq!(est.median_d_before, est.median_d_after);
    }

    #[test]
    fn no_pairs_no_estimate() {
        assert_eq!(estimate_floor(&[], &[]), None);
    }

    #[test]
    fn recovers_an_injected_floor() {
        // Stated 0.1″, true per-axis σ = sqrt(0.1² + 0.2²) = 0.223607″; 20,000 pairs.
        // The sample median of a Rayleigh law has relative standard error
        // 1/(2 f(m) m sqrt(N)) = 1/(2 · 0.588705 · 1.177410 · 141.42) = 0.0051
        // (f(m) = m e^(−m²/2) = 1.177410/2, by hand), i.e. ≈ 0.0064 relative in the floor
        // (d σ_sys / σ_sys = (σ_tot² / σ_sys²) · dm/m = 1.25 · 0.0051). 3 % is > 4 standard errors.
        let mut rng = Rng::new(7, "floors");
        let (sep, stated) = rayleigh_pairs(&mut rng, 20_000, |_| (0.1, 0.05f64.sqrt()));
        let est = estimate_floor(&sep, &stated).unwrap();
        println!("{est:?}");
        assert!((est.floor_arcsec / 0.2 - 1.0).abs() < 0.03, "{est:?}");
        assert!((est.median_d_before - RAYLEIGH_MEDIAN * 0.05f64.sqrt() / 0.1).abs() < 0.03);
        assert!(!far_above_stated(&est));
    }

    /// Standard error of a recovered floor: the sample median of a unit Rayleigh law
    /// has relative standard error 0.7214 / √N (1 / (2 f(m) m), f(m) = m e^(−m²/2) at
    /// m = √(2 ln 2); standard asymptotics of sample quantiles), the median scales with
    /// σ_tot = sqrt(σ² + σ_sys²), and dσ_sys = (σ_tot² / σ_sys) · dm/m.
    fn floor_standard_error(stated: f64, floor: f64, n: usize) -> f64 {
        (stated * stated + floor * floor) / floor * 0.7214 / (n as f64).sqrt()
    }

    #[test]
    fn recovers_floors_within_their_sampling_error_at_every_size() {
        // Stated σ and true floors of several sizes, from 50 to 20,000 pairs; each
        // recovered floor lies within 4 standard errors of the injected one.
        for (k, &(stated, floor, n)) in [
            (0.1f64, 0.2f64, 50usize),
            (0.1, 0.2, 400),
            (0.1, 0.05, 5_000),
            (0.3, 0.15, 2_000),
            (0.05, 0.5, 1_000),
            (0.1, 0.2, 20_000),
        ]
        .iter()
        .enumerate()
        {
            let mut rng = Rng::new(100 + k as u64, "floors-sizes");
            let total = stated.hypot(floor);
            let (sep, sigma) = rayleigh_pairs(&mut rng, n, |_| (stated, total));
            let est = estimate_floor(&sep, &sigma).unwrap();
            let se = floor_standard_error(stated, floor, n);
            println!(
                "stated {stated} floor {floor} N {n}: recovered {:.4} (standard error {se:.4})",
                est.floor_arcsec
            );
            assert!(
                (est.floor_arcsec - floor).abs() <= 4.0 * se,
                "N {n}: {est:?}, standard error {se}"
            );
        }
    }

    #[test]
    fn the_spread_of_recovered_floors_is_the_predicted_sampling_error() {
        // 400 fields of 400 pairs each, stated 0.1″, floor 0.2″: the predicted standard
        // error is 0.25 / 0.2 · 0.7214 / 20 = 0.0451 · 0.2″ = 0.00902″ (by hand). The
        // sample standard deviation of 400 estimates has a relative standard error of
        // 1/√(2 · 400) = 3.5 % (normal theory), so it lies within 15 % of the
        // prediction; the mean lies within 4 standard errors of the mean (0.00902/20)
        // of the truth (the bias of the square root is 4e-5″, second order).
        let (stated, floor, n, fields) = (0.1, 0.2, 400, 400);
        let total = f64::hypot(stated, floor);
        let mut rng = Rng::new(21, "floors-spread");
        let estimates: Vec<f64> = (0..fields)
            .map(|_| {
                let (sep, sigma) = rayleigh_pairs(&mut rng, n, |_| (stated, total));
                estimate_floor(&sep, &sigma).unwrap().floor_arcsec
            })
            .collect();
        let mean = estimates.iter().sum::<f64>() / fields as f64;
        let sd = (estimates.iter().map(|e| (e - mean).powi(2)).sum::<f64>() / (fields - 1) as f64)
            .sqrt();
        let se = floor_standard_error(stated, floor, n);
        println!("mean {mean:.5} sd {sd:.5} predicted {se:.5}");
        assert!((se - 0.009_02).abs() < 1e-5, "{se}");
        assert!((sd / se - 1.0).abs() < 0.15, "sd {sd} vs predicted {se}");
        assert!(
            (mean - floor).abs() < 4.0 * se / (fields as f64).sqrt(),
            "mean {mean}"
        );
    }

    #[test]
    fn recovers_a_floor_with_varying_stated_errors() {
        // Stated σ uniform in [0.05, 0.15]″, true extra floor 0.2″: each d_k is Rayleigh(1)
        // at the right floor, so the median condition holds there (same standard error as above).
        let mut rng = Rng::new(11, "floors-varying");
        let (sep, stated) = rayleigh_pairs(&mut rng, 20_000, |r| {
            let s = r.range(0.05, 0.15);
            (s, (s * s + 0.04).sqrt())
        });
        let est = estimate_floor(&sep, &stated).unwrap();
        println!("{est:?}");
        assert!((est.floor_arcsec / 0.2 - 1.0).abs() < 0.03, "{est:?}");
    }

    #[test]
    fn honest_errors_give_no_floor_or_a_small_one() {
        // Stated = true = 0.1″: the median sits at 1.17741 within its standard error (0.5 %),
        // so the floor is 0 or at most sqrt((1.015)² − 1) · 0.1″ = 0.017″ at 3 standard errors.
        let mut rng = Rng::new(3, "floors-none");
        let (sep, stated) = rayleigh_pairs(&mut rng, 20_000, |_| (0.1, 0.1));
        let est = estimate_floor(&sep, &stated).unwrap();
        println!("{est:?}");
        assert!(est.floor_arcsec < 0.018, "{est:?}");
        assert!((est.median_d_before / RAYLEIGH_MEDIAN - 1.0).abs() < 0.015);
    }

    #[test]
    fn flags_a_floor_far_above_the_stated_errors() {
        // Stated 0.1″, separations of a 1″ per-axis spread: the floor is ≈ 0.995″ > 2 × 0.1″.
        let mut rng = Rng::new(5, "floors-far");
        let (sep, stated) = rayleigh_pairs(&mut rng, 2_000, |_| (0.1, 1.0));
        let est = estimate_floor(&sep, &stated).unwrap();
        assert!(far_above_stated(&est), "{est:?}");
        // 0.2″ is exactly 2 × 0.1″: not above the threshold.
        assert!((est.median_stated_sigma_arcsec - 0.1).abs() < 1e-15);
        assert!(!far_above_stated(&FloorEstimate {
            floor_arcsec: 0.2,
            ..est
        }));
    }

    #[test]
    #[should_panic(expected = "one stated σ per separation")]
    fn mismatched_lengths_panic() {
        estimate_floor(&[0.1], &[]);
    }
}
