//! Interstellar extinction laws, A_λ/A_V at a wavelength.
//!
//! - Optical and near infrared (0.3 ≤ x = 1/λ[µm] ≤ 8): Cardelli, Clayton &
//!   Mathis 1989 (ApJ 345, 245; "CCM89"), A_λ/A_V = a(x) + b(x)/R_V, with the
//!   optical polynomials (1.1 ≤ x ≤ 3.3) optionally replaced by O'Donnell 1994
//!   (ApJ 422, 158). Coefficients as in FIELD §3.1–3.2 (verified there).
//! - Beyond Ks (λ > 2.159 µm, where CCM89 should not be extrapolated, FIELD §3.3):
//!   a published mid-infrared law for A_λ/A_Ks, scaled by the optical law's
//!   A_Ks/A_V at 2.159 µm (0.1170 for CCM89, R_V = 3.1):
//!   - Xue et al. 2016 (ApJS 224, 23): A_λ/A_Ks = 1 − E(Ks−λ)/E(J−Ks)·(A_J/A_Ks − 1)
//!     with their colour-excess ratios and A_J/A_Ks = 2.72 (FIELD §3.4), at the
//!     bands' wavelengths, interpolated linearly in log λ between them; held at
//!     the 23.675 µm value up to 30 µm; undefined beyond.
//!   - Indebetouw et al. 2005 (ApJ 619, 931): log10(A_λ/A_K) = 0.61 − 2.22 log10 λ
//!     + 1.21 (log10 λ)², recommended 1.25–7.75 µm; undefined beyond 7.75 µm.

/// The optical part of a law.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OpticalLaw {
    /// Cardelli, Clayton & Mathis 1989.
    Ccm89,
    /// CCM89 with the O'Donnell 1994 optical coefficients.
    ODonnell94,
}

/// The infrared part of a law, beyond Ks.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum InfraredLaw {
    /// Xue et al. 2016 ratios.
    Xue16,
    /// Indebetouw et al. 2005 fit.
    Indebetouw05,
}

/// A full law: optical part with R_V, infrared part beyond Ks.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ExtinctionLaw {
    /// Optical / near-infrared law.
    pub optical: OpticalLaw,
    /// Mid-infrared law beyond Ks.
    pub infrared: InfraredLaw,
    /// R_V = A_V / E(B−V) (3.1 for the diffuse ISM).
    pub r_v: f64,
}

impl Default for ExtinctionLaw {
    fn default() -> Self {
        ExtinctionLaw {
            optical: OpticalLaw::ODonnell94,
            infrared: InfraredLaw::Xue16,
            r_v: 3.1,
        }
    }
}

/// Wavelength where the infrared law takes over: 2MASS Ks λ_iso, µm (FIELD §2).
pub const KS_WAVELENGTH_UM: f64 = 2.159;

/// Xue et al. 2016 colour-excess ratios E(Ks−λ)/E(J−Ks) at the bands' wavelengths
/// (µm; FIELD §2 and §3.4): W1, [3.6], [4.5], W2, [5.8], [8.0], W3, W4, [24].
const XUE16_RATIOS: [(f64, f64); 9] = [
    (3.3526, 0.238),
    (3.550, 0.260),
    (4.493, 0.313),
    (4.6028, 0.312),
    (5.731, 0.355),
    (7.872, 0.334),
    (11.5608, 0.269),
    (22.0883, 0.370),
    (23.675, 0.428),
];

/// Xue et al.'s adopted A_J/A_Ks (FIELD §3.4, from memory).
const XUE16_AJ_OVER_AKS: f64 = 2.72;

/// CCM89 a(x), b(x) in the infrared and UV pieces (shared by O'Donnell 1994).
fn ccm_ir_uv(x: f64) -> Option<(f64, f64)> {
    if (0.3..1.1).contains(&x) {
        let p = x.powf(1.61);
        Some((0.574 * p, -0.527 * p))
    } else if x > 3.3 && x <= 8.0 {
        let (fa, fb) = if x >= 5.9 {
            let d = x - 5.9;
            (
                -0.04473 * d * d - 0.009779 * d * d * d,
                0.2130 * d * d + 0.1207 * d * d * d,
            )
        } else {
            (0.0, 0.0)
        };
        Some((
            1.752 - 0.316 * x - 0.104 / ((x - 4.67).powi(2) + 0.341) + fa,
            -3.090 + 1.825 * x + 1.206 / ((x - 4.62).powi(2) + 0.263) + fb,
        ))
    } else {
        None
    }
}

fn poly(c: &[f64], y: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, k| acc * y + k)
}

/// A_λ/A_V of CCM89 (`odonnell = false`) or O'Donnell 1994 at `wavelength_um`;
/// `None` outside 0.125–3.33 µm (x outside 0.3–8 µm⁻¹).
pub fn ccm89_a_over_av(wavelength_um: f64, r_v: f64, odonnell: bool) -> Option<f64> {
    let x = 1.0 / wavelength_um;
    let (a, b) = if (1.1..=3.3).contains(&x) {
        let y = x - 1.82;
        if odonnell {
            (
                poly(
                    &[
                        1.0, 0.104, -0.609, 0.701, 1.137, -1.718, -0.827, 1.647, -0.505,
                    ],
                    y,
                ),
                poly(
                    &[
                        0.0, 1.952, 2.908, -3.989, -7.985, 11.102, 5.491, -10.805, 3.347,
                    ],
                    y,
                ),
            )
        } else {
            (
                poly(
                    &[
                        1.0, 0.17699, -0.50447, -0.02427, 0.72085, 0.01979, -0.77530, 0.32999,
                    ],
                    y,
                ),
                poly(
                    &[
                        0.0, 1.41338, 2.28305, 1.07233, -5.38434, -0.62251, 5.30260, -2.09002,
                    ],
                    y,
                ),
            )
        }
    } else {
        ccm_ir_uv(x)?
    };
    Some(a + b / r_v)
}

/// A_λ/A_Ks of Xue et al. 2016 beyond Ks (1 at Ks), interpolated in log λ; `None`
/// below Ks or beyond 30 µm.
pub fn xue16_a_over_aks(wavelength_um: f64) -> Option<f64> {
    if !(KS_WAVELENGTH_UM..=30.0).contains(&wavelength_um) {
        return None;
    }
    let mut nodes = vec![(KS_WAVELENGTH_UM, 1.0)];
    nodes.extend(
        XUE16_RATIOS
            .iter()
            .map(|&(l, e)| (l, 1.0 - e * (XUE16_AJ_OVER_AKS - 1.0))),
    );
    let x = wavelength_um.ln();
    for pair in nodes.windows(2) {
        let ((l0, a0), (l1, a1)) = (pair[0], pair[1]);
        if wavelength_um <= l1 {
            let t = (x - l0.ln()) / (l1.ln() - l0.ln());
            return Some(a0 + t * (a1 - a0));
        }
    }
    Some(nodes.last().unwrap().1)
}

/// A_λ/A_K of the Indebetouw et al. 2005 fit, 1.25–7.75 µm; `None` outside.
pub fn indebetouw05_a_over_ak(wavelength_um: f64) -> Option<f64> {
    if !(1.25..=7.75).contains(&wavelength_um) {
        return None;
    }
    let l = wavelength_um.log10();
    Some(10f64.powf(0.61 - 2.22 * l + 1.21 * l * l))
}

impl ExtinctionLaw {
    /// A_λ/A_V at `wavelength_um`, `None` where the law is undefined.
    pub fn a_over_av(&self, wavelength_um: f64) -> Option<f64> {
        let odonnell = self.optical == OpticalLaw::ODonnell94;
        if wavelength_um <= KS_WAVELENGTH_UM {
            return ccm89_a_over_av(wavelength_um, self.r_v, odonnell);
        }
        let aks_over_av = ccm89_a_over_av(KS_WAVELENGTH_UM, self.r_v, odonnell)?;
        let ratio = match self.infrared {
            InfraredLaw::Xue16 => xue16_a_over_aks(wavelength_um)?,
            InfraredLaw::Indebetouw05 => {
                indebetouw05_a_over_ak(wavelength_um)?
                    / indebetouw05_a_over_ak(KS_WAVELENGTH_UM).unwrap()
            }
        };
        Some(aks_over_av * ratio)
    }

    /// A short description for metadata, e.g.
    /// `"O'Donnell 1994 optical, CCM89 IR/UV, R_V = 3.1; beyond 2.159 µm Xue et al. 2016"`.
    pub fn describe(&self) -> String {
        let optical = match self.optical {
            OpticalLaw::Ccm89 => "Cardelli, Clayton & Mathis 1989 (ApJ 345, 245)",
            OpticalLaw::ODonnell94 => {
                "O'Donnell 1994 (ApJ 422, 158) optical with Cardelli, Clayton & Mathis 1989 IR/UV"
            }
        };
        let ir = match self.infrared {
            InfraredLaw::Xue16 => "Xue et al. 2016 (ApJS 224, 23) ratios, A_J/A_Ks = 2.72",
            InfraredLaw::Indebetouw05 => "Indebetouw et al. 2005 (ApJ 619, 931) fit, to 7.75 µm",
        };
        format!(
            "{optical}, R_V = {}; beyond {KS_WAVELENGTH_UM} µm: {ir}",
            self.r_v
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ccm89_and_odonnell_match_the_field_table() {
        // FIELD §3.3 (R_V = 3.1, computed there): λ, CCM89, O'Donnell 1994.
        let table = [
            (0.366, 1.5546, 1.5324),
            (0.438, 1.3319, 1.3278),
            (0.545, 1.0095, 1.0110),
            (0.641, 0.8414, 0.8335),
            (0.798, 0.6004, 0.6110),
            (1.235, 0.2876, 0.2876),
            (1.662, 0.1783, 0.1783),
            (2.159, 0.1170, 0.1170),
            (0.2175, 3.1851, 3.1851),
        ];
        for (l, ccm, odo) in table {
            let c = ccm89_a_over_av(l, 3.1, false).unwrap();
            let o = ccm89_a_over_av(l, 3.1, true).unwrap();
            assert!((c - ccm).abs() < 6e-5, "CCM89 at {l}: {c} vs {ccm}");
            assert!((o - odo).abs() < 6e-5, "O'Donnell at {l}: {o} vs {odo}");
        }
        // A = A_V at y = 0 (λ = 0.54945 µm), FIELD §3.1.
        assert!((ccm89_a_over_av(1.0 / 1.82, 3.1, false).unwrap() - 1.0).abs() < 1e-12);
    }

    #[test]
    fn dereddening_factor_matches_the_worked_example() {
        // FIELD §7.6: A_V = 10 → A_Ks = 1.170 mag → flux factor 2.938.
        let a_ks = 10.0 * ccm89_a_over_av(2.159, 3.1, false).unwrap();
        assert!((a_ks - 1.170).abs() < 5e-4);
        assert!((10f64.powf(0.4 * a_ks) - 2.938).abs() < 2e-3);
    }

    #[test]
    fn infrared_laws_match_their_tables() {
        // Xue et al. 2016 derived A_λ/A_Ks (FIELD §3.4): [3.6] 0.553, [4.5] 0.462,
        // [5.8] 0.389, [8.0] 0.426, W1 0.591, W2 0.463, W3 0.537, W4 0.364, [24] 0.264.
        for (l, v) in [
            (3.550, 0.553),
            (4.493, 0.462),
            (5.731, 0.389),
            (7.872, 0.426),
            (3.3526, 0.591),
            (4.6028, 0.463),
            (11.5608, 0.537),
            (22.0883, 0.364),
            (23.675, 0.264),
        ] {
            assert!((xue16_a_over_aks(l).unwrap() - v).abs() < 1e-3, "{l}");
        }
        assert_eq!(xue16_a_over_aks(2.0), None);
        assert_eq!(xue16_a_over_aks(70.0), None);
        // Indebetouw et al. 2005 fit against their table (FIELD §3.4): [3.6] 0.56 ± 0.06
        // at 3.545 µm, [4.5] 0.43 ± 0.08 at 4.442 µm, H 1.55 ± 0.08 at 1.664 µm.
        for (l, v, tol) in [
            (3.545, 0.56, 0.06),
            (4.442, 0.43, 0.08),
            (1.664, 1.55, 0.08),
        ] {
            assert!((indebetouw05_a_over_ak(l).unwrap() - v).abs() < tol, "{l}");
        }
        assert_eq!(indebetouw05_a_over_ak(24.0), None);
    }

    #[test]
    fn full_law_joins_at_ks() {
        let law = ExtinctionLaw::default();
        let at_ks = law.a_over_av(KS_WAVELENGTH_UM).unwrap();
        let past_ks = law.a_over_av(KS_WAVELENGTH_UM + 1e-9).unwrap();
        assert!((at_ks - past_ks).abs() < 1e-6);
        let m24 = law.a_over_av(23.675).unwrap();
        assert!((m24 - 0.1170 * 0.264).abs() < 2e-4);
        let ind = ExtinctionLaw {
            infrared: InfraredLaw::Indebetouw05,
            ..law
        };
        assert_eq!(ind.a_over_av(23.675), None);
    }
}
