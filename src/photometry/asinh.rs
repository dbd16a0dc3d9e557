//! asinh magnitudes ("luptitudes") of Lupton, Gunn & Szalay 1999, AJ 118, 1406.
//!
//! With x = f/f₀ the flux in units of the zero-point flux ("maggies") and a
//! dimensionless softening b (in units of f₀):
//!
//! ```text
//! m   = −(2.5/ln10) · [asinh(x / 2b) + ln b]
//! x   = 2b · sinh(−m·ln10/2.5 − ln b)
//! σ_x = 2b · cosh(−m·ln10/2.5 − ln b) · σ_m · ln10/2.5
//! ```
//!
//! For x ≫ b the asinh magnitude equals the Pogson magnitude; zero flux has the
//! finite magnitude −(2.5/ln10)·ln b, and negative fluxes have magnitudes too.
//! SDSS softening values are in Stoughton et al. 2002, AJ 123, 485, Table 21.
//!
//! ```
//! use fluxloom::photometry::asinh::{asinh_mag_at_zero_flux, asinh_mag_to_maggies};
//!
//! // SDSS r, b = 1.2e-10 (Stoughton et al. 2002): zero flux at 24.802 mag.
//! assert!((asinh_mag_at_zero_flux(1.2e-10) - 24.802).abs() < 5e-4);
//! assert!(asinh_mag_to_maggies(25.5, 1.2e-10) < 0.0);
//! ```

use super::magnitude::MAG_TO_LN_FLUX;

/// The argument −m·ln10/2.5 − ln b shared by the inverse relations.
fn asinh_argument(mag: f64, softening: f64) -> f64 {
    -mag * MAG_TO_LN_FLUX - softening.ln()
}

/// asinh magnitude to flux in maggies (x = f/f₀): x = 2b·sinh(−m·ln10/2.5 − ln b)
/// (Lupton, Gunn & Szalay 1999). `softening` is b, dimensionless, > 0.
pub fn asinh_mag_to_maggies(mag: f64, softening: f64) -> f64 {
    2.0 * softening * asinh_argument(mag, softening).sinh()
}

/// First-order error of x = f/f₀ from the magnitude error σ_m:
/// σ_x = 2b·cosh(−m·ln10/2.5 − ln b)·σ_m·ln10/2.5 (Lupton, Gunn & Szalay 1999).
pub fn asinh_mag_err_to_maggies_err(mag: f64, mag_err: f64, softening: f64) -> f64 {
    2.0 * softening * asinh_argument(mag, softening).cosh() * mag_err * MAG_TO_LN_FLUX
}

/// Flux in maggies (x = f/f₀, any sign) to asinh magnitude:
/// m = −(2.5/ln10)·[asinh(x/2b) + ln b] (Lupton, Gunn & Szalay 1999).
pub fn maggies_to_asinh_mag(maggies: f64, softening: f64) -> f64 {
    -((maggies / (2.0 * softening)).asinh() + softening.ln()) / MAG_TO_LN_FLUX
}

/// The asinh magnitude of zero flux, −(2.5/ln10)·ln b (Lupton, Gunn & Szalay 1999).
pub fn asinh_mag_at_zero_flux(softening: f64) -> f64 {
    -softening.ln() / MAG_TO_LN_FLUX
}

#[cfg(test)]
mod tests {
    use super::*;

    /// SDSS softening b per band u, g, r, i, z (Stoughton et al. 2002, AJ 123, 485, Table 21).
    const SDSS_SOFTENING: [f64; 5] = [1.4e-10, 0.9e-10, 1.2e-10, 1.8e-10, 7.4e-10];
    /// SDSS r softening (Stoughton et al. 2002, Table 21).
    const B_R: f64 = 1.2e-10;
    /// Nominal SDSS zero point, the AB 3631 Jy (Oke & Gunn 1983, ApJ 266, 713).
    const F0_JY: f64 = 3631.0;

    /// Asserts `actual` equals `expected` to relative tolerance `rel`.
    fn assert_rel(actual: f64, expected: f64, rel: f64) {
        assert!(
            ((actual - expected) / expected).abs() <= rel,
            "expected {expected}, got {actual} (relative tolerance {rel})"
        );
    }

    #[test]
    fn sdss_r_worked_examples() {
        // f for m = 18, 22, 24, 25.5 with b = 1.2e-10, f₀ = 3631 Jy: Lupton, Gunn & Szalay 1999
        // inversion x = 2b·sinh(−m·ln10/2.5 − ln b), softening from Stoughton et al. 2002.
        let cases = [
            (18.0, 6.30955e-8, 229.10e-6),
            (22.0, 1.57581e-9, 5.7218e-6),
            (24.0, 1.93861e-10, 0.70391e-6),
            (25.5, -1.65129e-10, -0.59958e-6),
        ];
        for (mag, maggies, flux_jy) in cases {
            let x = asinh_mag_to_maggies(mag, B_R);
            assert_rel(x, maggies, 1e-5);
            assert_rel(F0_JY * x, flux_jy, 1e-4);
        }
    }

    #[test]
    fn sdss_r_error_at_22() {
        // σ_m = 0.1 at m = 22: σ_x = 1.4681e-10, σ_f = 0.5331 µJy (Lupton, Gunn & Szalay 1999).
        let sigma_x = asinh_mag_err_to_maggies_err(22.0, 0.1, B_R);
        assert_rel(sigma_x, 1.4681e-10, 1e-4);
        assert_rel(F0_JY * sigma_x, 0.5331e-6, 1e-4);
        // Same as the SDSS form |x σ_m (ln10/2.5) / tanh(−m ln10/2.5 − ln b)| (Lupton et al. 1999).
        let x = asinh_mag_to_maggies(22.0, B_R);
        let tanh_form =
            (x * 0.1 * MAG_TO_LN_FLUX / (-22.0 * MAG_TO_LN_FLUX - B_R.ln()).tanh()).abs();
        assert_rel(sigma_x, tanh_form, 1e-12);
    }

    #[test]
    fn zero_flux_magnitudes_of_sdss_bands() {
        // m(f = 0) = −(2.5/ln10)·ln b: 24.635, 25.114, 24.802, 24.362, 22.827 for u g r i z
        // (Lupton, Gunn & Szalay 1999 with b from Stoughton et al. 2002, Table 21).
        let expected = [24.635, 25.114, 24.802, 24.362, 22.827];
        for (b, m0) in SDSS_SOFTENING.iter().zip(expected) {
            assert!((asinh_mag_at_zero_flux(*b) - m0).abs() <= 5e-4, "b = {b}");
            assert!(
                (maggies_to_asinh_mag(0.0, *b) - m0).abs() <= 5e-4,
                "b = {b}"
            );
            assert!(asinh_mag_to_maggies(m0, *b).abs() < 1e-12);
        }
        // Stoughton et al. 2002, Table 21, m(f = 10b): 22.12, 22.60, 22.29, 21.85, 20.32.
        let ten_b = [22.12, 22.60, 22.29, 21.85, 20.32];
        for (b, m) in SDSS_SOFTENING.iter().zip(ten_b) {
            assert!(
                (maggies_to_asinh_mag(10.0 * b, *b) - m).abs() <= 5e-3,
                "b = {b}"
            );
        }
    }

    #[test]
    fn bright_asinh_equals_pogson() {
        // For x ≫ b the asinh magnitude tends to the Pogson magnitude (Lupton et al. 1999):
        // at m = 18 the fluxes differ by a ratio 0.999996.
        let pogson = 10f64.powf(-0.4 * 18.0);
        assert_rel(asinh_mag_to_maggies(18.0, B_R) / pogson, 0.999996, 1e-6);
    }

    #[test]
    fn magnitude_round_trips_through_maggies() {
        for mag in [15.0, 20.0, 24.0, 24.8, 26.0, 28.0] {
            let back = maggies_to_asinh_mag(asinh_mag_to_maggies(mag, B_R), B_R);
            assert!((back - mag).abs() < 1e-9, "m = {mag}, back {back}");
        }
    }
}
