//! A stellar photosphere anchored on one band, and the excess over it.
//!
//! The photosphere is scaled to the anchor band's detected flux density and
//! extrapolated to every other band by one of three assumptions:
//!
//! - [`Photosphere::RayleighJeans`]: F_ν(λ) = F_ν(anchor)·(λ_anchor/λ)², α = −3
//!   (FIELD §4.4). Assumes the anchor is already on the Rayleigh–Jeans tail; for
//!   hot stars it is not, and RJ from Ks under-predicts the mid-infrared
//!   photosphere by 12–27 % (FIELD §4.4), which inflates excesses.
//! - [`Photosphere::Blackbody`]: F_ν ∝ B_ν(T_eff) (Planck law), one T_eff for
//!   the field. Assumes a blackbody, ignores molecular bands of cool stars.
//! - [`Photosphere::ZeroVegaColour`]: every Vega colour with the anchor is 0,
//!   F_ν(band) = F0(band)·F_ν(anchor)/F0(anchor). This is the photospheric
//!   colour of A–K stars in the infrared (≈ 0 mag, FIELD §4.5); it is wrong in
//!   the optical for anything but A0V stars, and AB bands get no value.
//!
//! Excess per band: E = m_phot − m_obs (positive = brighter than the
//! photosphere), χ = (F_obs − F_phot)/sqrt(σ_obs² + σ_phot²) (FIELD §4.5), with
//! σ_phot the anchor's relative error times F_phot plus a relative model
//! uncertainty in quadrature.

/// Planck constant × c / k_B = 14387.77 µm K (second radiation constant, CODATA 2018:
/// h c / k = 1.438776877e-2 m K).
pub const C2_UM_K: f64 = 14_387.768_77;

/// The photosphere assumption.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Photosphere {
    /// F_ν ∝ λ⁻².
    RayleighJeans,
    /// F_ν ∝ B_ν(T) with this temperature, K.
    Blackbody {
        /// Effective temperature, K.
        teff_k: f64,
    },
    /// Vega colours relative to the anchor are zero.
    ZeroVegaColour,
}

impl Photosphere {
    /// A description for metadata.
    pub fn describe(&self) -> String {
        match self {
            Photosphere::RayleighJeans => {
                "Rayleigh-Jeans F_nu ∝ λ^-2 from the anchor (under-predicts hot photospheres by 12-27 % in the mid-infrared)".to_string()
            }
            Photosphere::Blackbody { teff_k } if teff_k.is_nan() => {
                "blackbody of each object's T_eff scaled to the anchor".to_string()
            }
            Photosphere::Blackbody { teff_k } => {
                format!("blackbody of T_eff = {teff_k} K scaled to the anchor")
            }
            Photosphere::ZeroVegaColour => {
                "zero Vega colour with the anchor (A-K photospheres in the infrared; no value for AB bands)".to_string()
            }
        }
    }

    /// Photospheric flux density at band (λ, F0, is Vega) given the anchor's
    /// (λ, F0, flux). `None` where the assumption gives nothing.
    pub fn flux_jy(
        &self,
        anchor: (f64, Option<f64>, f64),
        band_wavelength_um: f64,
        band_zero_point_jy: Option<f64>,
        band_is_vega: bool,
    ) -> Option<f64> {
        let (la, f0a, fa) = anchor;
        match self {
            Photosphere::RayleighJeans => Some(fa * (la / band_wavelength_um).powi(2)),
            Photosphere::Blackbody { teff_k } => Some(
                fa * planck_nu_shape(band_wavelength_um, *teff_k) / planck_nu_shape(la, *teff_k),
            ),
            Photosphere::ZeroVegaColour => {
                if band_is_vega {
                    Some(band_zero_point_jy? * fa / f0a?)
                } else {
                    None
                }
            }
        }
    }
}

/// B_ν(T) up to a constant: ν³ / (exp(hν/kT) − 1) with ν ∝ 1/λ.
fn planck_nu_shape(wavelength_um: f64, teff_k: f64) -> f64 {
    let x = C2_UM_K / (wavelength_um * teff_k);
    wavelength_um.powi(-3) / x.exp_m1()
}

/// The excess of one band over the photosphere.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Excess {
    /// m_phot − m_obs, mag (> 0: brighter than the photosphere).
    pub excess_mag: f64,
    /// χ = (F_obs − F_phot)/sqrt(σ_obs² + σ_phot²).
    pub chi: f64,
}

/// Excess of an observed flux over a photospheric one (both Jy, errors 1σ).
pub fn excess(obs_jy: f64, obs_err_jy: f64, phot_jy: f64, phot_err_jy: f64) -> Option<Excess> {
    if obs_jy <= 0.0 || phot_jy <= 0.0 {
        return None;
    }
    let sigma = obs_err_jy.hypot(phot_err_jy);
    Some(Excess {
        excess_mag: 2.5 * (obs_jy / phot_jy).log10(),
        chi: if sigma > 0.0 {
            (obs_jy - phot_jy) / sigma
        } else {
            f64::INFINITY.copysign(obs_jy - phot_jy)
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rayleigh_jeans_from_ks_matches_the_worked_example() {
        // FIELD §4.4: Ks = 10 (66.67 mJy) → RJ at 23.675 µm is 0.5544 mJy, whereas
        // Ks − [24] = 0 implies 0.717 mJy.
        let anchor = (2.159, Some(666.7), 0.06667);
        let rj = Photosphere::RayleighJeans
            .flux_jy(anchor, 23.675, Some(7.17), true)
            .unwrap();
        assert!((rj * 1e3 - 0.5544).abs() < 5e-4, "{rj}");
        let zero = Photosphere::ZeroVegaColour
            .flux_jy(anchor, 23.675, Some(7.17), true)
            .unwrap();
        assert!((zero * 1e3 - 0.717).abs() < 5e-4, "{zero}");
        assert_eq!(
            Photosphere::ZeroVegaColour.flux_jy(anchor, 0.6166, Some(3631.0), false),
            None
        );
    }

    #[test]
    fn hot_blackbody_tends_to_rayleigh_jeans() {
        let anchor = (2.159, Some(666.7), 0.06667);
        let bb = Photosphere::Blackbody { teff_k: 1e7 }
            .flux_jy(anchor, 23.675, None, true)
            .unwrap();
        let rj = Photosphere::RayleighJeans
            .flux_jy(anchor, 23.675, None, true)
            .unwrap();
        assert!((bb / rj - 1.0).abs() < 1e-3);
        // A 9600 K blackbody lies above RJ at 24 µm (Ks not yet on the tail, FIELD §4.4).
        let bb = Photosphere::Blackbody { teff_k: 9600.0 }
            .flux_jy(anchor, 23.675, None, true)
            .unwrap();
        assert!(bb > rj * 1.1);
    }

    #[test]
    fn excess_in_magnitudes_and_sigma() {
        // Twice the photosphere: 2.5 log10 2 = 0.7526 mag.
        let e = excess(2.0, 0.1, 1.0, 0.0).unwrap();
        assert!((e.excess_mag - 0.752_574_99).abs() < 1e-6);
        assert!((e.chi - 10.0).abs() < 1e-12);
        assert_eq!(excess(-1.0, 0.1, 1.0, 0.1), None);
    }
}
