//! Flux-density units, νF_ν, and flux density back to magnitudes.
//!
//! 1 Jy = 1e-23 erg s⁻¹ cm⁻² Hz⁻¹ = 1e-26 W m⁻² Hz⁻¹ (SI definition), and
//! c = 2.99792458e14 µm s⁻¹ (exact, SI). Since νF_ν = (c/λ)·F_ν:
//!
//! ```text
//! νF_ν [erg s⁻¹ cm⁻²] = 2.99792458e-9  · F_ν[Jy] / λ[µm]
//! νF_ν [W m⁻²]        = 2.99792458e-12 · F_ν[Jy] / λ[µm]
//! ```
//!
//! νF_ν equals λF_λ, the usual ordinate of a spectral energy distribution.
//!
//! ```
//! use fluxloom::photometry::flux::nu_fnu_cgs;
//!
//! // Ks = 10.0 (Vega) is 66.67 mJy at 2.159 µm (Cohen, Wheaton & Megeath 2003, AJ 126, 1090).
//! let nu_fnu = nu_fnu_cgs(0.06667, 2.159);
//! assert!((nu_fnu - 9.2576e-11).abs() < 1e-15);
//! ```

use super::magnitude::AB_ZERO_POINT_JY;

/// Jy per mJy (SI prefix milli).
pub const JY_PER_MILLIJY: f64 = 1e-3;
/// Jy per µJy (SI prefix micro).
pub const JY_PER_MICROJY: f64 = 1e-6;
/// Jy per nJy (SI prefix nano).
pub const JY_PER_NANOJY: f64 = 1e-9;
/// Jy per nanomaggy: 1e-9 of the AB zero point, 1e-9 × 3631 Jy = 3.631e-6 Jy (SDSS
/// "Measures of Flux and Magnitude"; Oke & Gunn 1983, ApJ 266, 713).
pub const JY_PER_NANOMAGGY: f64 = 3.631e-6;
/// Jy per erg s⁻¹ cm⁻² Hz⁻¹: 1 Jy = 1e-23 erg s⁻¹ cm⁻² Hz⁻¹, so 1e23 (SI definition of the jansky).
pub const JY_PER_CGS_FNU: f64 = 1e23;

/// νF_ν in erg s⁻¹ cm⁻² per (Jy / µm): 1e-23 erg s⁻¹ cm⁻² Hz⁻¹ per Jy
/// × 2.99792458e14 µm s⁻¹ (c, exact) = 2.99792458e-9.
pub const NU_FNU_CGS_PER_JY_PER_UM: f64 = 2.99792458e-9;

/// νF_ν in W m⁻² per (Jy / µm): 1e-26 W m⁻² Hz⁻¹ per Jy × 2.99792458e14 µm s⁻¹
/// = 2.99792458e-12 (1 erg s⁻¹ cm⁻² = 1e-3 W m⁻²).
pub const NU_FNU_W_M2_PER_JY_PER_UM: f64 = 2.99792458e-12;

/// νF_ν (= λF_λ) in erg s⁻¹ cm⁻² from F_ν in Jy at wavelength λ in µm:
/// νF_ν = 2.99792458e-9 · F_ν[Jy] / λ[µm], from 1 Jy = 1e-23 erg s⁻¹ cm⁻² Hz⁻¹ and
/// ν = c/λ with c = 2.99792458e14 µm s⁻¹.
pub fn nu_fnu_cgs(flux_jy: f64, wavelength_um: f64) -> f64 {
    NU_FNU_CGS_PER_JY_PER_UM * flux_jy / wavelength_um
}

/// νF_ν (= λF_λ) in W m⁻² from F_ν in Jy at wavelength λ in µm:
/// νF_ν = 2.99792458e-12 · F_ν[Jy] / λ[µm], from 1 Jy = 1e-26 W m⁻² Hz⁻¹ and ν = c/λ.
pub fn nu_fnu_w_m2(flux_jy: f64, wavelength_um: f64) -> f64 {
    NU_FNU_W_M2_PER_JY_PER_UM * flux_jy / wavelength_um
}

/// AB magnitude of a flux density in Jy: m_AB = −2.5 log₁₀(F_ν / 3631 Jy)
/// = 8.90 − 2.5 log₁₀ F_ν[Jy] (Oke & Gunn 1983, ApJ 266, 713). NaN for F_ν ≤ 0.
pub fn flux_jy_to_ab_mag(flux_jy: f64) -> f64 {
    flux_jy_to_mag(flux_jy, AB_ZERO_POINT_JY)
}

/// Pogson magnitude of a flux density: m = −2.5 log₁₀(F_ν / F₀), both in Jy
/// (Pogson 1856, MNRAS 17, 12 (from memory)). A flux density ≤ 0 (or NaN) has no
/// magnitude and gives NaN.
pub fn flux_jy_to_mag(flux_jy: f64, zero_point_jy: f64) -> f64 {
    if flux_jy > 0.0 {
        -2.5 * (flux_jy / zero_point_jy).log10()
    } else {
        f64::NAN
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::photometry::magnitude::{ab_mag_to_flux_jy, mag_to_flux_jy};

    /// Asserts `actual` equals `expected` to relative tolerance `rel`.
    fn assert_rel(actual: f64, expected: f64, rel: f64) {
        assert!(
            ((actual - expected) / expected).abs() <= rel,
            "expected {expected}, got {actual} (relative tolerance {rel})"
        );
    }

    #[test]
    fn nu_fnu_constants_follow_from_si() {
        // 1e-23 erg s⁻¹ cm⁻² Hz⁻¹ per Jy (SI) × c = 2.99792458e14 µm s⁻¹ (exact, SI).
        assert_rel(NU_FNU_CGS_PER_JY_PER_UM, 1e-23 * 2.99792458e14, 1e-15);
        // 1e-26 W m⁻² Hz⁻¹ per Jy (SI) × c.
        assert_rel(NU_FNU_W_M2_PER_JY_PER_UM, 1e-26 * 2.99792458e14, 1e-15);
        assert_rel(JY_PER_NANOMAGGY, 1e-9 * AB_ZERO_POINT_JY, 1e-15);
    }

    #[test]
    fn ks_worked_example_nu_fnu() {
        // Ks = 10.0: 66.67 mJy at λ_iso = 2.159 µm (Cohen, Wheaton & Megeath 2003, AJ 126, 1090)
        // → νF_ν = 9.2576e-11 erg s⁻¹ cm⁻² = 9.2576e-14 W m⁻² (SI unit relations).
        let flux_jy = mag_to_flux_jy(10.0, 666.7);
        assert_rel(nu_fnu_cgs(flux_jy, 2.159), 9.2576e-11, 1e-4);
        assert_rel(nu_fnu_w_m2(flux_jy, 2.159), 9.2576e-14, 1e-4);
        // 1 erg s⁻¹ cm⁻² = 1e-3 W m⁻² (SI).
        assert_rel(nu_fnu_w_m2(1.0, 3.0) / nu_fnu_cgs(1.0, 3.0), 1e-3, 1e-15);
    }

    #[test]
    fn ab_magnitudes_of_reference_fluxes() {
        // 1 µJy ↔ m_AB 23.90, 1 mJy ↔ 16.40, 1 nJy ↔ 31.40, and 8.90 − 2.5 log₁₀ F[Jy]
        // with 2.5 log₁₀ 3631 = 8.90007 (Oke & Gunn 1983, ApJ 266, 713).
        assert!((flux_jy_to_ab_mag(1e-6) - 23.90).abs() < 1e-4);
        assert!((flux_jy_to_ab_mag(1e-3) - 16.40).abs() < 1e-4);
        assert!((flux_jy_to_ab_mag(1e-9) - 31.40).abs() < 1e-4);
        assert!((flux_jy_to_ab_mag(1.0) - 8.90007).abs() < 1e-5);
        // 1 nanomaggy is m_AB = 22.5 (SDSS flux documentation).
        assert!((flux_jy_to_ab_mag(JY_PER_NANOMAGGY) - 22.5).abs() < 1e-12);
        assert!((flux_jy_to_ab_mag(ab_mag_to_flux_jy(19.3)) - 19.3).abs() < 1e-12);
    }

    #[test]
    fn vega_magnitude_round_trip_and_non_positive_flux() {
        // Ks = 10.0 ↔ 66.67 mJy with F₀ = 666.7 Jy (Cohen, Wheaton & Megeath 2003).
        assert!((flux_jy_to_mag(0.06667, 666.7) - 10.0).abs() < 1e-12);
        assert!(flux_jy_to_mag(0.0, 666.7).is_nan());
        assert!(flux_jy_to_mag(-1e-3, 666.7).is_nan());
        assert!(flux_jy_to_ab_mag(f64::NAN).is_nan());
    }
}
