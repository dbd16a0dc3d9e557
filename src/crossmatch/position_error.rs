//! Positional errors a catalog does not quote: from signal-to-noise for point
//! sources, and an extra term for extended sources.
//!
//! - [`centroid_sigma_arcsec`]: per-axis centroid error of a point source,
//!   `σ = sqrt((0.6 θ_FWHM / SNR)² + σ_floor²)`.
//! - [`extended_sigma_arcsec`] / [`add_extent_arcsec`]: `σ_ext = c · r_half`,
//!   added in quadrature, for centroids of galaxies that differ between
//!   surveys by a fraction of their size.
//! - Half-light radii from other size measures, for profiles where the
//!   conversion is exact: [`half_light_from_gaussian_fwhm_arcsec`],
//!   [`half_light_from_gaussian_radius_arcsec`],
//!   [`half_light_from_exponential_scale_arcsec`].
//!
//! ```
//! use fluxloom::crossmatch::position_error::{add_extent_arcsec, centroid_sigma_arcsec};
//!
//! // 1.2″ seeing, S/N 20, 0.05″ floor; then a galaxy of half-light radius 1.5″.
//! let point = centroid_sigma_arcsec(1.2, 20.0, 0.05).unwrap();
//! assert!((point - 0.06163).abs() < 1e-5);
//! let galaxy = add_extent_arcsec(point, 1.5, None);
//! assert!((galaxy - 0.30627).abs() < 1e-5);
//! ```

/// `√2 / (2 √(2 ln 2)) = 1 / (2 √ln 2) = 0.600561`: the centroid error per axis
/// in units of FWHM / SNR (FIELD notes §5.12, "≈ 0.6"; Condon 1997, PASP 109,
/// 166, §5, for Gaussian fits, from memory). It is `√2 σ_PSF / SNR` with
/// `σ_PSF = FWHM / 2.35482`.
pub const CENTROID_COEFF: f64 = 0.600_561_204_393_224_9;

/// Default `c` of `σ_ext = c · r_half`: 0.2, the middle of the range 0.1–0.3
/// of common practice (FIELD notes §5.13). Nothing in the data here favours
/// either end; the middle errs neither towards splitting galaxies between
/// surveys (too small) nor towards merging neighbours (too large).
pub const EXTENDED_COEFF: f64 = 0.2;

/// Half-light radius of an exponential disc in units of its scale length h:
/// the root of `1 − (1 + x) e^(−x) = 1/2`, x = 1.678347 (the enclosed light
/// of `I ∝ e^(−r/h)` is `1 − (1 + r/h) e^(−r/h)`, by integration).
pub const EXPONENTIAL_HALF_LIGHT_PER_SCALE: f64 = 1.678_346_990_016;

/// Per-axis centroid error of a point source, arcsec:
///
/// ```text
/// σ = sqrt( (0.600561 · θ_FWHM / SNR)² + σ_floor² )
/// ```
///
/// Assumptions (as FIELD notes §5.12 gives them, after Condon 1997, PASP 109,
/// 166, §5, from memory): an unresolved source, a Gaussian PSF of FWHM
/// `fwhm_arcsec`, a Gaussian fit, background-limited noise, and `snr` the
/// signal-to-noise of the total flux. `floor_arcsec` (≥ 0) is a systematic
/// per-axis floor added in quadrature. A survey's one nominal precision is
/// usually that of bright sources; faint ones near the limit have several times it.
///
/// Returns `None` unless `fwhm_arcsec` and `snr` are finite and > 0 and
/// `floor_arcsec` finite and ≥ 0.
pub fn centroid_sigma_arcsec(fwhm_arcsec: f64, snr: f64, floor_arcsec: f64) -> Option<f64> {
    let valid = fwhm_arcsec.is_finite()
        && fwhm_arcsec > 0.0
        && snr.is_finite()
        && snr > 0.0
        && floor_arcsec.is_finite()
        && floor_arcsec >= 0.0;
    valid.then(|| (CENTROID_COEFF * fwhm_arcsec / snr).hypot(floor_arcsec))
}

/// Extra per-axis error of an extended source, `σ_ext = c · r_half` (arcsec),
/// with `c` = `coeff` or [`EXTENDED_COEFF`] when `None`; `r_half` is the
/// half-light radius in arcsec (common practice, FIELD notes §5.13).
pub fn extended_sigma_arcsec(half_light_radius_arcsec: f64, coeff: Option<f64>) -> f64 {
    coeff.unwrap_or(EXTENDED_COEFF) * half_light_radius_arcsec
}

/// `sqrt(σ² + σ_ext²)`: a per-axis error `sigma_arcsec` with the extended-source
/// term of [`extended_sigma_arcsec`] added in quadrature, arcsec.
pub fn add_extent_arcsec(
    sigma_arcsec: f64,
    half_light_radius_arcsec: f64,
    coeff: Option<f64>,
) -> f64 {
    sigma_arcsec.hypot(extended_sigma_arcsec(half_light_radius_arcsec, coeff))
}

/// Half-light radius of a circular Gaussian profile of FWHM `fwhm_arcsec`:
/// exactly FWHM / 2. (Enclosed light `1 − exp(−r²/2σ²)` is 1/2 at
/// `r = σ √(2 ln 2)`, and FWHM = `2 σ √(2 ln 2)`.)
pub fn half_light_from_gaussian_fwhm_arcsec(fwhm_arcsec: f64) -> f64 {
    0.5 * fwhm_arcsec
}

/// Half-light radius of a circular Gaussian profile from the radius
/// `radius_arcsec` that contains the fraction `fraction` (0 < f < 1) of its light:
/// `r_half = r_f · sqrt(ln 2 / −ln(1 − f))`, from the enclosed light
/// `1 − exp(−r²/2σ²)`. Returns `None` for a fraction outside (0, 1).
pub fn half_light_from_gaussian_radius_arcsec(radius_arcsec: f64, fraction: f64) -> Option<f64> {
    (fraction > 0.0 && fraction < 1.0)
        .then(|| radius_arcsec * (std::f64::consts::LN_2 / -(-fraction).ln_1p()).sqrt())
}

/// Half-light radius of an exponential disc `I ∝ e^(−r/h)` of scale length
/// `scale_arcsec`: `1.678347 h` ([`EXPONENTIAL_HALF_LIGHT_PER_SCALE`]). For a
/// FWHM of such a profile, `h = FWHM / (2 ln 2)`, since the half maximum is at
/// `r = h ln 2`.
pub fn half_light_from_exponential_scale_arcsec(scale_arcsec: f64) -> f64 {
    EXPONENTIAL_HALF_LIGHT_PER_SCALE * scale_arcsec
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::LN_2;

    #[test]
    fn centroid_coefficient() {
        // √2 / 2.354820 = 1.414214 / 2.354820 = 0.600561 (FIELD notes §5.12: "≈ 0.6").
        assert!((CENTROID_COEFF - 2f64.sqrt() / (2.0 * (2.0 * LN_2).sqrt())).abs() < 1e-15);
        assert!((CENTROID_COEFF - 0.600561).abs() < 1e-6);
    }

    #[test]
    fn centroid_hand_values() {
        // θ = 1″, S/N 10, no floor: 0.600561 / 10 = 0.0600561″ (by hand).
        assert!((centroid_sigma_arcsec(1.0, 10.0, 0.0).unwrap() - 0.060_056_1).abs() < 1e-7);
        // Floor 0.05″: sqrt(0.0600561² + 0.05²) = sqrt(0.00360674 + 0.0025) = 0.0781456″.
        assert!((centroid_sigma_arcsec(1.0, 10.0, 0.05).unwrap() - 0.078_145_6).abs() < 1e-7);
        // θ = 6″, S/N 5, floor 0.1″: 0.720673² + 0.01 = 0.529370 → 0.727578″ (by hand).
        assert!((centroid_sigma_arcsec(6.0, 5.0, 0.1).unwrap() - 0.727_578).abs() < 1e-6);
        // Bright limit: the floor alone.
        assert!((centroid_sigma_arcsec(1.0, 1e9, 0.05).unwrap() - 0.05).abs() < 1e-9);
    }

    #[test]
    fn centroid_rejects_meaningless_input() {
        assert_eq!(centroid_sigma_arcsec(1.0, 0.0, 0.0), None);
        assert_eq!(centroid_sigma_arcsec(1.0, -3.0, 0.0), None);
        assert_eq!(centroid_sigma_arcsec(0.0, 10.0, 0.0), None);
        assert_eq!(centroid_sigma_arcsec(1.0, f64::NAN, 0.0), None);
        assert_eq!(centroid_sigma_arcsec(1.0, 10.0, -0.1), None);
    }

    #[test]
    fn extended_term_hand_values() {
        // c = 0.2, r_half = 1″: σ_ext = 0.2″; with σ = 0.1″: sqrt(0.01 + 0.04) = 0.223607″.
        assert!((extended_sigma_arcsec(1.0, None) - 0.2).abs() < 1e-15);
        assert!((add_extent_arcsec(0.1, 1.0, None) - 0.223_607).abs() < 1e-6);
        // c = 0.1, r_half = 3″: 0.3″; with σ = 0.4″: sqrt(0.16 + 0.09) = 0.5″.
        assert!((add_extent_arcsec(0.4, 3.0, Some(0.1)) - 0.5).abs() < 1e-12);
        // A point source (r_half = 0) keeps its error.
        assert_eq!(add_extent_arcsec(0.4, 0.0, None), 0.4);
    }

    #[test]
    fn gaussian_size_conversions() {
        // FWHM 3″ → 1.5″ (exact).
        assert_eq!(half_light_from_gaussian_fwhm_arcsec(3.0), 1.5);
        // The 50 % radius is the half-light radius itself.
        let same = half_light_from_gaussian_radius_arcsec(1.5, 0.5).unwrap();
        assert!((same - 1.5).abs() < 1e-12);
        // 90 % radius 2″: sqrt(ln 2 / ln 10) = sqrt(0.693147 / 2.302585) = 0.548662 → 1.097324″.
        let r = half_light_from_gaussian_radius_arcsec(2.0, 0.9).unwrap();
        assert!((r - 1.097_324).abs() < 1e-6);
        // Consistency: the FWHM route and the fraction route agree for one profile
        // (σ = 1″: FWHM = 2.354820″, r_90 = σ sqrt(2 ln 10) = 2.145966″).
        let sigma: f64 = 1.0;
        let fwhm = 2.0 * (2.0 * LN_2).sqrt() * sigma;
        let r90 = sigma * (2.0 * 10f64.ln()).sqrt();
        let via_fraction = half_light_from_gaussian_radius_arcsec(r90, 0.9).unwrap();
        assert!((half_light_from_gaussian_fwhm_arcsec(fwhm) - via_fraction).abs() < 1e-12);
        assert_eq!(half_light_from_gaussian_radius_arcsec(2.0, 1.0), None);
        assert_eq!(half_light_from_gaussian_radius_arcsec(2.0, 0.0), None);
    }

    #[test]
    fn exponential_half_light_radius() {
        // The constant solves 1 − (1 + x) e^(−x) = 1/2 (enclosed light of e^(−r/h)).
        let x = EXPONENTIAL_HALF_LIGHT_PER_SCALE;
        assert!((1.0 - (1.0 + x) * (-x).exp() - 0.5).abs() < 1e-12);
        // h = 2″ → 3.356694″ (by hand).
        assert!((half_light_from_exponential_scale_arcsec(2.0) - 3.356_694).abs() < 1e-6);
    }
}
