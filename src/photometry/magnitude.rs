//! Catalog values to calibrated flux densities: [`ValueUnit`] names what a column
//! holds, [`Conversion`] turns one value and its error into a [`FluxJy`].
//!
//! Pogson magnitudes (Pogson 1856, MNRAS 17, 12 (from memory)):
//!
//! ```text
//! F_ν [Jy] = F₀ [Jy] · 10^(−0.4 m)
//! ```
//!
//! with F₀ the band's zero point (Vega systems) or 3631 Jy (AB, Oke & Gunn 1983,
//! ApJ 266, 713). Errors: first order σ_F = 0.4 ln10 · F · σ_m; the exact 1-sigma
//! interval is F·10^(−0.4σ_m) … F·10^(+0.4σ_m), symmetric in magnitude, not in flux.
//!
//! ```
//! use fluxloom::photometry::{Conversion, ValueUnit};
//!
//! // 2MASS Ks = 10.0 ± 0.03 with F₀ = 666.7 Jy (Cohen, Wheaton & Megeath 2003, AJ 126, 1090).
//! let ks = Conversion { unit: ValueUnit::VegaMag, zero_point_jy: 666.7, offset_mag: 0.0, softening: None };
//! let flux = ks.to_flux_jy(10.0, Some(0.03));
//! assert!((flux.flux_jy - 0.06667).abs() < 1e-12);
//! assert!((flux.err_jy.unwrap() - 1.842e-3).abs() < 1e-6);
//! ```

use std::fmt;

use super::asinh::{asinh_mag_err_to_maggies_err, asinh_mag_to_maggies};
use super::flux::{
    JY_PER_CGS_FNU, JY_PER_MICROJY, JY_PER_MILLIJY, JY_PER_NANOJY, JY_PER_NANOMAGGY,
};

/// AB zero point in Jy: 10^(−0.4·48.60) erg s⁻¹ cm⁻² Hz⁻¹ = 3630.78 Jy, quoted as
/// 3631 Jy (Oke & Gunn 1983, ApJ 266, 713).
pub const AB_ZERO_POINT_JY: f64 = 3631.0;

/// 0.4 ln 10 = 0.9210340…: d(ln F)/dm in magnitude⁻¹, so σ_F/F = 0.4 ln10 · σ_m to first
/// order; its inverse 2.5/ln 10 = 1.0857362 turns S/N into σ_m (Pogson 1856).
pub const MAG_TO_LN_FLUX: f64 = 0.4 * std::f64::consts::LN_10;

/// Pogson magnitude to flux density: F_ν [Jy] = `zero_point_jy` · 10^(−0.4 `mag`).
pub fn mag_to_flux_jy(mag: f64, zero_point_jy: f64) -> f64 {
    // 10^(−0.4 m) = exp(−0.4 ln10 · m), one exp instead of a general power.
    zero_point_jy * (-MAG_TO_LN_FLUX * mag).exp()
}

/// AB magnitude to flux density: F_ν [Jy] = 3631 Jy · 10^(−0.4 m_AB) (Oke & Gunn 1983, ApJ 266, 713).
pub fn ab_mag_to_flux_jy(mag_ab: f64) -> f64 {
    mag_to_flux_jy(mag_ab, AB_ZERO_POINT_JY)
}

/// What a catalog column holds: a kind of magnitude or a flux-density unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ValueUnit {
    /// Pogson magnitude on the band's Vega zero point (spelled `vega_mag`).
    VegaMag,
    /// Pogson magnitude on the AB zero point, 3631 Jy (spelled `ab_mag`).
    AbMag,
    /// asinh magnitude of Lupton, Gunn & Szalay 1999, AJ 118, 1406 (spelled `asinh_mag`).
    AsinhMag,
    /// Jansky, 1e-26 W m⁻² Hz⁻¹ (spelled `Jy`).
    Jy,
    /// Millijansky, 1e-3 Jy (spelled `mJy`).
    MilliJy,
    /// Microjansky, 1e-6 Jy (spelled `uJy` or `microJy`).
    MicroJy,
    /// Nanojansky, 1e-9 Jy (spelled `nJy`).
    NanoJy,
    /// Nanomaggy, 1e-9 of the AB zero point = 3.631e-6 Jy (spelled `nanomaggy`).
    Nanomaggy,
    /// erg s⁻¹ cm⁻² Hz⁻¹ = 1e23 Jy (spelled `erg/s/cm2/Hz`).
    CgsFnu,
}

/// Every accepted spelling, in the order of [`ValueUnit`]'s variants.
const SPELLINGS: &[&str] = &[
    "vega_mag",
    "ab_mag",
    "asinh_mag",
    "Jy",
    "mJy",
    "uJy",
    "microJy",
    "nJy",
    "nanomaggy",
    "erg/s/cm2/Hz",
];

impl ValueUnit {
    /// Parses one of our spellings (see [`ValueUnit::spellings`]), case-sensitively
    /// because `mJy` and `MJy` differ by 1e9; surrounding whitespace is ignored.
    pub fn parse(text: &str) -> Option<ValueUnit> {
        match text.trim() {
            "vega_mag" => Some(ValueUnit::VegaMag),
            "ab_mag" => Some(ValueUnit::AbMag),
            "asinh_mag" => Some(ValueUnit::AsinhMag),
            "Jy" => Some(ValueUnit::Jy),
            "mJy" => Some(ValueUnit::MilliJy),
            "uJy" | "microJy" => Some(ValueUnit::MicroJy),
            "nJy" => Some(ValueUnit::NanoJy),
            "nanomaggy" => Some(ValueUnit::Nanomaggy),
            "erg/s/cm2/Hz" => Some(ValueUnit::CgsFnu),
            _ => None,
        }
    }

    /// All spellings [`ValueUnit::parse`] accepts, for error messages.
    pub fn spellings() -> &'static [&'static str] {
        SPELLINGS
    }

    /// The canonical spelling, as written in schemas and output metadata.
    pub fn as_str(&self) -> &'static str {
        match self {
            ValueUnit::VegaMag => "vega_mag",
            ValueUnit::AbMag => "ab_mag",
            ValueUnit::AsinhMag => "asinh_mag",
            ValueUnit::Jy => "Jy",
            ValueUnit::MilliJy => "mJy",
            ValueUnit::MicroJy => "uJy",
            ValueUnit::NanoJy => "nJy",
            ValueUnit::Nanomaggy => "nanomaggy",
            ValueUnit::CgsFnu => "erg/s/cm2/Hz",
        }
    }

    /// Whether values are magnitudes (which need a zero point) rather than flux densities.
    pub fn is_magnitude(&self) -> bool {
        matches!(
            self,
            ValueUnit::VegaMag | ValueUnit::AbMag | ValueUnit::AsinhMag
        )
    }

    /// Jy per unit for flux-density units, `None` for magnitudes.
    pub fn jy_per_unit(&self) -> Option<f64> {
        match self {
            ValueUnit::VegaMag | ValueUnit::AbMag | ValueUnit::AsinhMag => None,
            ValueUnit::Jy => Some(1.0),
            ValueUnit::MilliJy => Some(JY_PER_MILLIJY),
            ValueUnit::MicroJy => Some(JY_PER_MICROJY),
            ValueUnit::NanoJy => Some(JY_PER_NANOJY),
            ValueUnit::Nanomaggy => Some(JY_PER_NANOMAGGY),
            ValueUnit::CgsFnu => Some(JY_PER_CGS_FNU),
        }
    }
}

impl fmt::Display for ValueUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A flux density in Jy with its 1-sigma uncertainty, both first-order and exact.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FluxJy {
    /// The flux density, Jy (negative values are kept: they are measurements).
    pub flux_jy: f64,
    /// First-order (linearised) 1-sigma error, Jy; `None` when no error was given.
    pub err_jy: Option<f64>,
    /// Lower end of the exact 1-sigma interval, Jy: F·10^(−0.4σ_m) for Pogson
    /// magnitudes, the flux at m+σ_m for asinh magnitudes, F−σ for flux units.
    pub lo_jy: Option<f64>,
    /// Upper end of the exact 1-sigma interval, Jy: F·10^(+0.4σ_m) for Pogson
    /// magnitudes, the flux at m−σ_m for asinh magnitudes, F+σ for flux units.
    pub hi_jy: Option<f64>,
}

impl FluxJy {
    /// A flux density with no uncertainty.
    pub fn without_error(flux_jy: f64) -> FluxJy {
        FluxJy {
            flux_jy,
            err_jy: None,
            lo_jy: None,
            hi_jy: None,
        }
    }

    /// Signal-to-noise ratio F/σ_F from the first-order error, if there is one.
    pub fn snr(&self) -> Option<f64> {
        self.err_jy.map(|err_jy| self.flux_jy / err_jy)
    }
}

/// How to turn values of one catalog column into Jy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Conversion {
    /// What the column holds.
    pub unit: ValueUnit,
    /// Flux density of magnitude 0 in Jy: used for `VegaMag`, and as f₀ for `AsinhMag`;
    /// `AbMag` always uses 3631 Jy; flux units ignore it.
    pub zero_point_jy: f64,
    /// Added to magnitudes before converting (e.g. a survey's AB offset): m' = m + `offset_mag`.
    /// Flux units ignore it.
    pub offset_mag: f64,
    /// Softening b of asinh magnitudes, in units of f₀. `None` is the limit b → 0,
    /// where asinh magnitudes equal Pogson magnitudes (Lupton, Gunn & Szalay 1999).
    pub softening: Option<f64>,
}

impl Conversion {
    /// Converts `value` with optional 1-sigma error `err` (same unit, ≥ 0) to Jy.
    ///
    /// - Vega/AB magnitudes: m' = m + `offset_mag`, F = F₀·10^(−0.4 m'), with F₀ = 3631 Jy
    ///   for AB; σ_F = 0.4 ln10 · F · σ_m; interval F·10^(∓0.4σ_m).
    /// - asinh magnitudes (Lupton, Gunn & Szalay 1999, AJ 118, 1406): m' = m + `offset_mag`,
    ///   F = f₀ · 2b·sinh(−m'·ln10/2.5 − ln b); σ_F = f₀ · 2b·cosh(−m'·ln10/2.5 − ln b)·σ_m·ln10/2.5;
    ///   interval [F(m'+σ_m), F(m'−σ_m)].
    /// - flux units: scaled to Jy; interval F ∓ σ.
    pub fn to_flux_jy(&self, value: f64, err: Option<f64>) -> FluxJy {
        match self.unit {
            ValueUnit::VegaMag => self.pogson(value, err, self.zero_point_jy),
            ValueUnit::AbMag => self.pogson(value, err, AB_ZERO_POINT_JY),
            ValueUnit::AsinhMag => match self.softening {
                Some(softening) => self.asinh(value, err, softening),
                None => self.pogson(value, err, self.zero_point_jy),
            },
            ValueUnit::Jy
            | ValueUnit::MilliJy
            | ValueUnit::MicroJy
            | ValueUnit::NanoJy
            | ValueUnit::Nanomaggy
            | ValueUnit::CgsFnu => {
                let scale = self.unit.jy_per_unit().unwrap_or(1.0);
                let flux_jy = value * scale;
                match err {
                    Some(sigma) => {
                        let err_jy = sigma * scale;
                        FluxJy {
                            flux_jy,
                            err_jy: Some(err_jy),
                            lo_jy: Some(flux_jy - err_jy),
                            hi_jy: Some(flux_jy + err_jy),
                        }
                    }
                    None => FluxJy::without_error(flux_jy),
                }
            }
        }
    }

    /// Converts a value without error, e.g. a limit, to Jy (see [`Conversion::to_flux_jy`]).
    pub fn value_to_flux_jy(&self, value: f64) -> f64 {
        self.to_flux_jy(value, None).flux_jy
    }

    /// Pogson magnitude with zero point `zero_point_jy`.
    fn pogson(&self, mag: f64, err_mag: Option<f64>, zero_point_jy: f64) -> FluxJy {
        let flux_jy = mag_to_flux_jy(mag + self.offset_mag, zero_point_jy);
        match err_mag {
            Some(sigma_mag) => {
                // F·10^(±0.4σ): one exp for both ends of the interval.
                let factor = (MAG_TO_LN_FLUX * sigma_mag).exp();
                FluxJy {
                    flux_jy,
                    err_jy: Some(MAG_TO_LN_FLUX * flux_jy * sigma_mag),
                    lo_jy: Some(flux_jy / factor),
                    hi_jy: Some(flux_jy * factor),
                }
            }
            None => FluxJy::without_error(flux_jy),
        }
    }

    /// asinh magnitude with f₀ = `zero_point_jy` and softening `softening`.
    fn asinh(&self, mag: f64, err_mag: Option<f64>, softening: f64) -> FluxJy {
        let mag = mag + self.offset_mag;
        let f0_jy = self.zero_point_jy;
        let flux_jy = f0_jy * asinh_mag_to_maggies(mag, softening);
        match err_mag {
            Some(sigma_mag) => FluxJy {
                flux_jy,
                err_jy: Some(f0_jy * asinh_mag_err_to_maggies_err(mag, sigma_mag, softening)),
                lo_jy: Some(f0_jy * asinh_mag_to_maggies(mag + sigma_mag, softening)),
                hi_jy: Some(f0_jy * asinh_mag_to_maggies(mag - sigma_mag, softening)),
            },
            None => FluxJy::without_error(flux_jy),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Asserts `actual` equals `expected` to relative tolerance `rel`.
    fn assert_rel(actual: f64, expected: f64, rel: f64) {
        assert!(
            ((actual - expected) / expected).abs() <= rel,
            "expected {expected}, got {actual} (relative tolerance {rel})"
        );
    }

    /// Asserts `actual` rounds to `expected` at `decimals` decimal places.
    fn assert_rounds_to(actual: f64, expected: f64, decimals: i32) {
        let half_unit = 0.5 * 10f64.powi(-decimals);
        assert!(
            (actual - expected).abs() <= half_unit * (1.0 + 1e-9),
            "expected {expected} (to {decimals} decimals), got {actual}"
        );
    }

    fn conversion(unit: ValueUnit, zero_point_jy: f64) -> Conversion {
        Conversion {
            unit,
            zero_point_jy,
            offset_mag: 0.0,
            softening: None,
        }
    }

    #[test]
    fn ab_reference_points() {
        let ab = conversion(ValueUnit::AbMag, 0.0);
        // m_AB = 23.9 ↔ 1.00006 µJy (Oke & Gunn 1983 AB definition, 3631 Jy).
        assert_rel(ab.value_to_flux_jy(23.9), 1.00006e-6, 1e-5);
        // m_AB = 16.4 ↔ 1.00006 mJy (same definition).
        assert_rel(ab.value_to_flux_jy(16.4), 1.00006e-3, 1e-5);
        // m_AB = 22.5 ↔ 1 nanomaggy = 3.631 µJy (SDSS flux documentation; Oke & Gunn 1983).
        assert_rel(ab.value_to_flux_jy(22.5), 3.631e-6, 1e-12);
        assert_rel(
            ab_mag_to_flux_jy(22.5),
            conversion(ValueUnit::Nanomaggy, 0.0).value_to_flux_jy(1.0),
            1e-12,
        );
        // m_AB = 0 ↔ 3631 Jy regardless of the zero point given (Oke & Gunn 1983).
        assert_eq!(
            conversion(ValueUnit::AbMag, 666.7).value_to_flux_jy(0.0),
            3631.0
        );
    }

    #[test]
    fn vega_ks_worked_example() {
        // 2MASS Ks F₀ = 666.7 Jy (Cohen, Wheaton & Megeath 2003, AJ 126, 1090).
        let ks = conversion(ValueUnit::VegaMag, 666.7);
        let flux = ks.to_flux_jy(10.0, Some(0.03));
        // 666.7 × 10^(−4) Jy = 66.67 mJy (Pogson relation with Cohen et al. 2003 F₀).
        assert_rel(flux.flux_jy, 66.67e-3, 1e-12);
        // σ_F = 0.4 ln10 × 0.03 × 66.67 mJy = 1.842 mJy to first order (Pogson relation).
        assert_rounds_to(flux.err_jy.unwrap() * 1e3, 1.842, 3);
        // Exact interval +1.868 / −1.817 mJy (F·10^(±0.4σ_m)).
        assert_rounds_to((flux.hi_jy.unwrap() - flux.flux_jy) * 1e3, 1.868, 3);
        assert_rounds_to((flux.flux_jy - flux.lo_jy.unwrap()) * 1e3, 1.817, 3);
        // Ks_AB = Ks + 1.840 → 3631 × 10^(−0.4 × 11.84) = 0.066685 Jy, 0.02 % from 66.67 mJy
        // (AB − Vega = −2.5 log₁₀(666.7/3631), Cohen et al. 2003 and Oke & Gunn 1983).
        let ks_ab = Conversion {
            offset_mag: 1.840,
            ..conversion(ValueUnit::AbMag, 0.0)
        };
        assert_rel(ks_ab.value_to_flux_jy(10.0), 0.066685, 1e-4);
    }

    #[test]
    fn magnitude_error_propagation_table() {
        // Columns: σ_m, S/N, first-order σ_F/F, exact +σ, exact −σ. Pogson relation
        // (Pogson 1856): S/N = (2.5/ln10)/σ_m, σ_F/F = 0.4 ln10 σ_m, ±: 10^(±0.4σ_m) − 1.
        let table: [(f64, f64, i32, f64, f64, f64, i32); 6] = [
            (0.01, 108.6, 1, 0.00921, 0.00925, 0.00917, 5),
            (0.03, 36.19, 2, 0.0276, 0.0280, 0.0273, 4),
            (0.10, 10.86, 2, 0.0921, 0.0965, 0.0880, 4),
            (0.2171, 5.00, 2, 0.200, 0.221, 0.181, 3),
            (0.3619, 3.00, 2, 0.333, 0.396, 0.283, 3),
            (0.50, 2.17, 2, 0.461, 0.585, 0.369, 3),
        ];
        let vega = conversion(ValueUnit::VegaMag, 1.0);
        for (sigma_mag, snr, snr_decimals, first, plus, minus, decimals) in table {
            let flux = vega.to_flux_jy(0.0, Some(sigma_mag));
            assert_eq!(flux.flux_jy, 1.0);
            assert_rounds_to(flux.snr().unwrap(), snr, snr_decimals);
            assert_rounds_to(flux.err_jy.unwrap(), first, decimals);
            assert_rounds_to(flux.hi_jy.unwrap() - 1.0, plus, decimals);
            assert_rounds_to(1.0 - flux.lo_jy.unwrap(), minus, decimals);
        }
    }

    #[test]
    fn offset_is_added_to_magnitudes() {
        // SDSS u_AB = u_SDSS − 0.04 (survey AB offset, from memory): u = 20 reads as AB 19.96.
        let u = Conversion {
            offset_mag: -0.04,
            ..conversion(ValueUnit::AbMag, 3631.0)
        };
        assert_rel(u.value_to_flux_jy(20.0), ab_mag_to_flux_jy(19.96), 1e-12);
        // Flux units ignore the offset.
        let jy = Conversion {
            offset_mag: 5.0,
            ..conversion(ValueUnit::Jy, 3631.0)
        };
        assert_eq!(jy.value_to_flux_jy(2.5), 2.5);
    }

    #[test]
    fn asinh_magnitudes_convert_with_softening() {
        // SDSS r: b = 1.2e-10 (Stoughton et al. 2002, AJ 123, 485, Table 21), f₀ = 3631 Jy nominal.
        let r = Conversion {
            softening: Some(1.2e-10),
            ..conversion(ValueUnit::AsinhMag, 3631.0)
        };
        // m = 22.00 → 5.7218 µJy, σ_m = 0.1 → 0.5331 µJy (Lupton, Gunn & Szalay 1999, AJ 118, 1406).
        let flux = r.to_flux_jy(22.0, Some(0.1));
        assert_rel(flux.flux_jy, 5.7218e-6, 1e-4);
        assert_rel(flux.err_jy.unwrap(), 0.5331e-6, 1e-4);
        // The exact interval is the flux at m ± σ_m (Lupton et al. 1999 inversion).
        assert_rel(flux.lo_jy.unwrap(), r.value_to_flux_jy(22.1), 1e-12);
        assert_rel(flux.hi_jy.unwrap(), r.value_to_flux_jy(21.9), 1e-12);
        assert!(flux.lo_jy.unwrap() < flux.flux_jy && flux.flux_jy < flux.hi_jy.unwrap());
        // m = 25.5 → −0.59958 µJy, a negative flux kept as a measurement (Lupton et al. 1999).
        assert_rel(r.value_to_flux_jy(25.5), -0.59958e-6, 1e-4);
        // Without softening the asinh magnitude is the Pogson magnitude (b → 0 limit, Lupton et al. 1999).
        let pogson = conversion(ValueUnit::AsinhMag, 3631.0);
        assert_rel(pogson.value_to_flux_jy(22.0), 5.7548e-6, 1e-4);
    }

    #[test]
    fn flux_units_scale_to_jy() {
        // SI prefixes; 1 nanomaggy = 3.631e-6 Jy (SDSS flux documentation); 1 erg s⁻¹ cm⁻² Hz⁻¹ = 1e23 Jy (SI).
        let cases = [
            (ValueUnit::Jy, 1.0),
            (ValueUnit::MilliJy, 1e-3),
            (ValueUnit::MicroJy, 1e-6),
            (ValueUnit::NanoJy, 1e-9),
            (ValueUnit::Nanomaggy, 3.631e-6),
            (ValueUnit::CgsFnu, 1e23),
        ];
        for (unit, jy_per_unit) in cases {
            let flux = conversion(unit, 3631.0).to_flux_jy(2.0, Some(0.5));
            assert_rel(flux.flux_jy, 2.0 * jy_per_unit, 1e-15);
            assert_rel(flux.err_jy.unwrap(), 0.5 * jy_per_unit, 1e-15);
            assert_rel(flux.lo_jy.unwrap(), 1.5 * jy_per_unit, 1e-15);
            assert_rel(flux.hi_jy.unwrap(), 2.5 * jy_per_unit, 1e-15);
            assert!(!unit.is_magnitude());
        }
        // 1e-26 erg s⁻¹ cm⁻² Hz⁻¹ = 1 mJy (1 Jy = 1e-23 erg s⁻¹ cm⁻² Hz⁻¹, SI).
        assert_rel(
            conversion(ValueUnit::CgsFnu, 0.0).value_to_flux_jy(1e-26),
            1e-3,
            1e-12,
        );
        // Negative fluxes stay negative.
        assert_eq!(
            conversion(ValueUnit::MilliJy, 0.0).value_to_flux_jy(-4.0),
            -4e-3
        );
    }

    #[test]
    fn missing_error_gives_no_interval() {
        let flux = conversion(ValueUnit::VegaMag, 666.7).to_flux_jy(10.0, None);
        assert_eq!(flux, FluxJy::without_error(flux.flux_jy));
        assert_eq!(flux.snr(), None);
    }

    #[test]
    fn unit_spellings_parse_and_round_trip() {
        for &spelling in ValueUnit::spellings() {
            let unit = ValueUnit::parse(spelling).unwrap_or_else(|| panic!("{spelling} parses"));
            assert_eq!(ValueUnit::parse(unit.as_str()), Some(unit));
        }
        assert_eq!(ValueUnit::parse("microJy"), Some(ValueUnit::MicroJy));
        assert_eq!(ValueUnit::parse(" mJy "), Some(ValueUnit::MilliJy));
        assert_eq!(ValueUnit::parse("MJy"), None);
        assert_eq!(ValueUnit::parse("mag"), None);
        assert_eq!(ValueUnit::CgsFnu.to_string(), "erg/s/cm2/Hz");
        assert!(ValueUnit::VegaMag.is_magnitude());
        assert!(ValueUnit::AbMag.is_magnitude());
        assert!(ValueUnit::AsinhMag.is_magnitude());
        assert_eq!(ValueUnit::AsinhMag.jy_per_unit(), None);
    }

    #[test]
    fn pogson_constant() {
        // 0.4 ln 10 = 0.9210340 and 2.5/ln 10 = 1.0857362 (Pogson 1856 relation, arithmetic).
        assert_rounds_to(MAG_TO_LN_FLUX, 0.9210340, 7);
        assert_rounds_to(1.0 / MAG_TO_LN_FLUX, 1.0857362, 7);
        // 5 mag is a factor 100 exactly (Pogson 1856).
        assert_rel(
            mag_to_flux_jy(0.0, 1.0) / mag_to_flux_jy(5.0, 1.0),
            100.0,
            1e-14,
        );
    }
}
