//! The band library: one [`Band`] per passband, with its magnitude system,
//! wavelength, zero point and the publication those numbers come from.
//!
//! [`BandLibrary::builtin`] parses `schemas/bands.toml`, which is compiled into
//! the binary; [`BandLibrary::load_user_file`] adds bands from a TOML file of the
//! same format. Every problem in a band file is reported with its file and line.
//!
//! ```
//! use fluxloom::photometry::{BandLibrary, PhotSystem};
//!
//! let bands = BandLibrary::builtin();
//! let ks = bands.get("tmass_ks").expect("2MASS Ks is built in");
//! assert_eq!(ks.system, PhotSystem::Vega);
//! assert_eq!(ks.zero_point_jy, Some(666.7)); // Cohen, Wheaton & Megeath 2003, AJ 126, 1090
//! ```

use std::collections::HashMap;
use std::fmt;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use toml::Spanned;

use super::magnitude::{AB_ZERO_POINT_JY, Conversion, ValueUnit};
use crate::error::{Error, Result, line_of_offset};

/// The built-in band library, `schemas/bands.toml`, as compiled into the binary.
pub const BUILTIN_BANDS_TOML: &str = include_str!("../../schemas/bands.toml");

/// The name under which errors in the built-in band library are reported.
const BUILTIN_BANDS_PATH: &str = "built-in schemas/bands.toml";

/// The accepted values of `wavelength_kind`: the kinds of band wavelength that
/// zero points are published with (definitions per Tokunaga & Vacca 2005,
/// PASP 117, 421 (from memory)).
pub const WAVELENGTH_KINDS: &[&str] = &["isophotal", "effective", "pivot", "central", "reference"];

/// A magnitude system: which zero point a magnitude of 0 refers to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum PhotSystem {
    /// Zero magnitude is the flux density of Vega (or an idealised A0V star)
    /// through the band; each band has its own zero point in Jy.
    Vega,
    /// Zero magnitude is 3631 Jy in every band: m_AB = −2.5 log₁₀ F_ν[erg s⁻¹ cm⁻² Hz⁻¹] − 48.60
    /// (Oke & Gunn 1983, ApJ 266, 713).
    Ab,
}

impl PhotSystem {
    /// The spelling used in band files and output metadata: `"vega"` or `"ab"`.
    pub fn as_str(&self) -> &'static str {
        match self {
            PhotSystem::Vega => "vega",
            PhotSystem::Ab => "ab",
        }
    }
}

impl fmt::Display for PhotSystem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// One passband with its calibration, as read from a band file.
///
/// Serialises to JSON so that output files can carry the exact calibration used.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Band {
    /// Lowercase identifier `[a-z][a-z0-9_]*`, used in output column names
    /// such as `tmass_ks_flux_jy`.
    pub id: String,
    /// The magnitude system of the band's magnitudes.
    pub system: PhotSystem,
    /// The survey or photometric system the band belongs to, e.g. `2MASS-like`.
    pub family: String,
    /// The band's usual short name, e.g. `Ks`.
    pub name: String,
    /// Band wavelength in micrometres, of the kind named by `wavelength_kind`.
    pub wavelength_um: f64,
    /// What `wavelength_um` is: one of [`WAVELENGTH_KINDS`].
    pub wavelength_kind: String,
    /// Flux density of magnitude 0 in Jy; `None` for a Vega band with no published
    /// zero point (magnitudes and colours only). AB bands always have one.
    pub zero_point_jy: Option<f64>,
    /// 1-sigma uncertainty of `zero_point_jy` in Jy, a systematic common to all
    /// sources in the band.
    pub zero_point_err_jy: Option<f64>,
    /// The survey's own AB correction in magnitudes: m_AB = m_survey + `ab_offset_mag`.
    pub ab_offset_mag: Option<f64>,
    /// Softening b of the survey's asinh magnitudes, dimensionless, in units of the
    /// zero-point flux (Lupton, Gunn & Szalay 1999, AJ 118, 1406).
    pub asinh_softening: Option<f64>,
    /// The publication(s) every number of the band comes from.
    pub source: String,
    /// Caveats: survey offsets, reference spectrum, derived values.
    pub note: Option<String>,
}

impl Band {
    /// Whether the band has a zero point in Jy, i.e. its magnitudes convert to flux densities.
    pub fn has_zero_point(&self) -> bool {
        self.zero_point_jy.is_some()
    }

    /// The conversion of catalog values in `unit` to Jy for this band, or `None`
    /// when the unit needs a zero point the band lacks (Vega or asinh magnitudes
    /// of a magnitude-only band).
    ///
    /// - `VegaMag`: the band's `zero_point_jy`, no offset.
    /// - `AbMag`: 3631 Jy, offset `ab_offset_mag` (survey magnitudes to AB).
    /// - `AsinhMag`: f₀ = `zero_point_jy`, softening `asinh_softening`, offset `ab_offset_mag`.
    /// - flux-density units: a fixed scale; zero point and offset are not used.
    pub fn conversion(&self, unit: ValueUnit) -> Option<Conversion> {
        let survey_offset_mag = self.ab_offset_mag.unwrap_or(0.0);
        let (zero_point_jy, offset_mag, softening) = match unit {
            ValueUnit::VegaMag => (self.zero_point_jy?, 0.0, None),
            ValueUnit::AbMag => (AB_ZERO_POINT_JY, survey_offset_mag, None),
            ValueUnit::AsinhMag => (self.zero_point_jy?, survey_offset_mag, self.asinh_softening),
            ValueUnit::Jy
            | ValueUnit::MilliJy
            | ValueUnit::MicroJy
            | ValueUnit::NanoJy
            | ValueUnit::Nanomaggy
            | ValueUnit::CgsFnu => (self.zero_point_jy.unwrap_or(AB_ZERO_POINT_JY), 0.0, None),
        };
        Some(Conversion {
            unit,
            zero_point_jy,
            offset_mag,
            softening,
        })
    }
}

/// Whether `id` is a valid band identifier: a lowercase ASCII letter followed by
/// lowercase letters, digits or `_` (so that it can prefix output column names).
pub fn is_valid_band_id(id: &str) -> bool {
    let mut chars = id.chars();
    match chars.next() {
        Some(first) if first.is_ascii_lowercase() => {
            chars.all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
        }
        _ => false,
    }
}

/// Where a band was defined, for duplicate-id messages.
#[derive(Debug, Clone, PartialEq)]
struct BandOrigin {
    path: PathBuf,
    line: usize,
}

impl fmt::Display for BandOrigin {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}:{}", self.path.display(), self.line)
    }
}

/// A set of bands with unique ids, in the order they were defined.
///
/// `BandLibrary::default()` is empty; [`BandLibrary::builtin`] holds the built-in bands.
#[derive(Debug, Clone, Default)]
pub struct BandLibrary {
    bands: Vec<Band>,
    origins: Vec<BandOrigin>,
    index: HashMap<String, usize>,
}

impl BandLibrary {
    /// The built-in band library parsed from the embedded `schemas/bands.toml`.
    ///
    /// # Panics
    ///
    /// Panics only if the embedded file is broken, which a unit test rules out.
    pub fn builtin() -> BandLibrary {
        let mut library = BandLibrary::default();
        if let Err(err) = library.add_toml(BUILTIN_BANDS_TOML, Path::new(BUILTIN_BANDS_PATH)) {
            panic!("the built-in band library is broken: {err}");
        }
        library
    }

    /// Reads a band file of the built-in format and adds its bands.
    ///
    /// # Errors
    ///
    /// [`Error::Io`] if the file cannot be read; otherwise as [`BandLibrary::add_toml`].
    pub fn load_user_file(&mut self, path: &Path) -> Result<()> {
        let text = crate::error::read_toml_text(path)?;
        self.add_toml(&text, path)
    }

    /// Parses band-file `text` (reported as `path` in errors) and adds its bands.
    /// Either all bands of the text are added or, on error, none.
    ///
    /// # Errors
    ///
    /// - [`Error::Toml`] if the text is not TOML, has unknown or missing fields, or a
    ///   value of the wrong type (the message names the line).
    /// - [`Error::Config`] naming the line for: an invalid id, an id already in the
    ///   library or repeated in the file, `wavelength_um` ≤ 0, an unknown
    ///   `wavelength_kind`, `zero_point_jy` ≤ 0, a negative `zero_point_err_jy`,
    ///   `asinh_softening` ≤ 0, a non-finite number, or an empty `source`.
    pub fn add_toml(&mut self, text: &str, path: &Path) -> Result<()> {
        let file: BandFile =
            toml::from_str(text).map_err(|e| crate::error::toml_error(path, text, &e))?;
        let mut new_bands: Vec<(Band, BandOrigin)> = Vec::with_capacity(file.band.len());
        let mut new_index: HashMap<String, usize> = HashMap::new();
        for raw in file.band {
            let id_line = line_of_offset(text, raw.id.span().start);
            let band = raw.validate(text, path)?;
            let earlier = self
                .index
                .get(&band.id)
                .map(|&i| &self.origins[i])
                .or_else(|| new_index.get(&band.id).map(|&i| &new_bands[i].1));
            if let Some(origin) = earlier {
                return Err(Error::config(
                    path,
                    id_line,
                    format!("band id \"{}\" is already defined at {origin}", band.id),
                ));
            }
            new_index.insert(band.id.clone(), new_bands.len());
            let origin = BandOrigin {
                path: path.to_path_buf(),
                line: id_line,
            };
            new_bands.push((band, origin));
        }
        for (band, origin) in new_bands {
            self.index.insert(band.id.clone(), self.bands.len());
            self.bands.push(band);
            self.origins.push(origin);
        }
        Ok(())
    }

    /// The band with identifier `id`, if any.
    pub fn get(&self, id: &str) -> Option<&Band> {
        self.index.get(id).map(|&i| &self.bands[i])
    }

    /// All bands, in the order they were defined.
    pub fn iter(&self) -> impl Iterator<Item = &Band> {
        self.bands.iter()
    }

    /// The number of bands.
    pub fn len(&self) -> usize {
        self.bands.len()
    }

    /// Whether the library holds no band.
    pub fn is_empty(&self) -> bool {
        self.bands.is_empty()
    }
}

/// A band file: a list of `[[band]]` tables.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct BandFile {
    #[serde(default)]
    band: Vec<RawBand>,
}

/// One `[[band]]` table as written, with spans for line numbers in errors.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBand {
    id: Spanned<String>,
    system: PhotSystem,
    family: String,
    name: String,
    wavelength_um: Spanned<f64>,
    wavelength_kind: Spanned<String>,
    zero_point_jy: Option<Spanned<f64>>,
    zero_point_err_jy: Option<Spanned<f64>>,
    ab_offset_mag: Option<Spanned<f64>>,
    asinh_softening: Option<Spanned<f64>>,
    source: Spanned<String>,
    note: Option<String>,
}

impl RawBand {
    /// Checks every value and builds the [`Band`]; AB bands without a zero point get 3631 Jy.
    fn validate(self, text: &str, path: &Path) -> Result<Band> {
        let line = |span: std::ops::Range<usize>| line_of_offset(text, span.start);
        let id = self.id.get_ref();
        if !is_valid_band_id(id) {
            return Err(Error::config(
                path,
                line(self.id.span()),
                format!(
                    "band id \"{id}\" is not valid: expected a lowercase letter followed by lowercase letters, digits or '_'"
                ),
            ));
        }
        let wavelength_um = *self.wavelength_um.get_ref();
        if !(wavelength_um > 0.0 && wavelength_um.is_finite()) {
            return Err(Error::config(
                path,
                line(self.wavelength_um.span()),
                format!(
                    "band \"{id}\": wavelength_um must be a positive number of micrometres, found {wavelength_um}"
                ),
            ));
        }
        let kind = self.wavelength_kind.get_ref();
        if !WAVELENGTH_KINDS.contains(&kind.as_str()) {
            return Err(Error::config(
                path,
                line(self.wavelength_kind.span()),
                format!(
                    "band \"{id}\": wavelength_kind \"{kind}\" is not one of {}",
                    WAVELENGTH_KINDS.join(", ")
                ),
            ));
        }
        let zero_point_jy = match &self.zero_point_jy {
            Some(zp) => {
                let value = *zp.get_ref();
                if !(value > 0.0 && value.is_finite()) {
                    return Err(Error::config(
                        path,
                        line(zp.span()),
                        format!(
                            "band \"{id}\": zero_point_jy must be a positive flux density in Jy, found {value}"
                        ),
                    ));
                }
                Some(value)
            }
            None => match self.system {
                PhotSystem::Ab => Some(AB_ZERO_POINT_JY),
                PhotSystem::Vega => None,
            },
        };
        let zero_point_err_jy = match &self.zero_point_err_jy {
            Some(err) => {
                let value = *err.get_ref();
                if !(value >= 0.0 && value.is_finite()) {
                    return Err(Error::config(
                        path,
                        line(err.span()),
                        format!(
                            "band \"{id}\": zero_point_err_jy must be a non-negative number in Jy, found {value}"
                        ),
                    ));
                }
                if self.zero_point_jy.is_none() {
                    return Err(Error::config(
                        path,
                        line(err.span()),
                        format!(
                            "band \"{id}\": zero_point_err_jy is given but zero_point_jy is not"
                        ),
                    ));
                }
                Some(value)
            }
            None => None,
        };
        let ab_offset_mag = match &self.ab_offset_mag {
            Some(offset) => {
                let value = *offset.get_ref();
                if !value.is_finite() {
                    return Err(Error::config(
                        path,
                        line(offset.span()),
                        format!(
                            "band \"{id}\": ab_offset_mag must be a finite number of magnitudes, found {value}"
                        ),
                    ));
                }
                Some(value)
            }
            None => None,
        };
        let asinh_softening = match &self.asinh_softening {
            Some(b) => {
                let value = *b.get_ref();
                if !(value > 0.0 && value.is_finite()) {
                    return Err(Error::config(
                        path,
                        line(b.span()),
                        format!(
                            "band \"{id}\": asinh_softening must be a positive number, found {value}"
                        ),
                    ));
                }
                if zero_point_jy.is_none() {
                    return Err(Error::config(
                        path,
                        line(b.span()),
                        format!("band \"{id}\": asinh_softening needs a zero_point_jy"),
                    ));
                }
                Some(value)
            }
            None => None,
        };
        if self.source.get_ref().trim().is_empty() {
            return Err(Error::config(
                path,
                line(self.source.span()),
                format!(
                    "band \"{id}\": source must name the publication the band's numbers come from"
                ),
            ));
        }
        Ok(Band {
            id: self.id.into_inner(),
            system: self.system,
            family: self.family,
            name: self.name,
            wavelength_um,
            wavelength_kind: self.wavelength_kind.into_inner(),
            zero_point_jy,
            zero_point_err_jy,
            ab_offset_mag,
            asinh_softening,
            source: self.source.into_inner(),
            note: self.note,
        })
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

    /// Zero point, its error (if published) and wavelength of a built-in band.
    fn check_band(
        id: &str,
        wavelength_um: f64,
        zero_point_jy: Option<f64>,
        zero_point_err_jy: Option<f64>,
    ) {
        let bands = BandLibrary::builtin();
        let band = bands
            .get(id)
            .unwrap_or_else(|| panic!("band {id} is built in"));
        assert_rel(band.wavelength_um, wavelength_um, 1e-9);
        match (band.zero_point_jy, zero_point_jy) {
            (Some(actual), Some(expected)) => assert_rel(actual, expected, 1e-9),
            (actual, expected) => assert_eq!(actual, expected, "zero point of {id}"),
        }
        assert_eq!(
            band.zero_point_err_jy, zero_point_err_jy,
            "zero point error of {id}"
        );
    }

    const MINIMAL_AB_BAND: &str = r#"
[[band]]
id = "my_nb"
system = "ab"
family = "test"
name = "NB"
wavelength_um = 0.5
wavelength_kind = "central"
source = "Oke & Gunn 1983, ApJ 266, 713"
"#;

    #[test]
    fn builtin_library_parses_with_all_families() {
        let bands = BandLibrary::builtin();
        // 5 Johnson-Cousins + 5 SDSS + 4 Strömgren + 3 2MASS + 4 WISE + 4 IRAC + 3 MIPS
        // + 3 Gaia + 1 H-alpha.
        assert_eq!(bands.len(), 32);
        assert!(!bands.is_empty());
        let families: std::collections::BTreeSet<&str> =
            bands.iter().map(|b| b.family.as_str()).collect();
        for family in [
            "Johnson-Cousins",
            "SDSS-like",
            "Strömgren",
            "2MASS-like",
            "WISE-like",
            "IRAC-like",
            "MIPS-like",
            "Gaia-like",
            "narrow-band",
        ] {
            assert!(families.contains(family), "family {family} missing");
        }
    }

    #[test]
    fn builtin_bands_have_valid_unique_ids_and_sources() {
        let bands = BandLibrary::builtin();
        let mut seen = std::collections::HashSet::new();
        for band in bands.iter() {
            assert!(is_valid_band_id(&band.id), "bad id {}", band.id);
            assert!(seen.insert(band.id.clone()), "duplicate id {}", band.id);
            assert!(
                !band.source.trim().is_empty(),
                "band {} has no source",
                band.id
            );
            assert!(WAVELENGTH_KINDS.contains(&band.wavelength_kind.as_str()));
            if band.system == PhotSystem::Ab {
                // AB definition: 3631 Jy (Oke & Gunn 1983, ApJ 266, 713).
                assert_eq!(band.zero_point_jy, Some(3631.0), "AB band {}", band.id);
            }
        }
    }

    #[test]
    fn johnson_cousins_match_bessell_castelli_plez_1998() {
        // Bessell, Castelli & Plez 1998, A&A 333, 231, Table A2.
        check_band("jc_u", 0.366, Some(1790.0), None);
        check_band("jc_b", 0.438, Some(4063.0), None);
        check_band("jc_v", 0.545, Some(3636.0), None);
        check_band("jc_rc", 0.641, Some(3064.0), None);
        check_band("jc_ic", 0.798, Some(2416.0), None);
    }

    #[test]
    fn sdss_matches_fukugita_1996_and_stoughton_2002() {
        // Wavelengths: Fukugita et al. 1996, AJ 111, 1748; zero point: Oke & Gunn 1983;
        // softening: Stoughton et al. 2002, AJ 123, 485, Table 21.
        let bands = BandLibrary::builtin();
        let expected = [
            ("sdss_u", 0.3551, 1.4e-10, Some(-0.04)),
            ("sdss_g", 0.4686, 0.9e-10, None),
            ("sdss_r", 0.6166, 1.2e-10, None),
            ("sdss_i", 0.7480, 1.8e-10, None),
            ("sdss_z", 0.8932, 7.4e-10, Some(0.02)),
        ];
        for (id, wavelength_um, softening, offset) in expected {
            check_band(id, wavelength_um, Some(3631.0), None);
            let band = bands.get(id).unwrap();
            assert_eq!(band.system, PhotSystem::Ab);
            assert_eq!(band.asinh_softening, Some(softening), "{id}");
            // Survey's AB offsets u_AB = u − 0.04, z_AB = z + 0.02 (SDSS documentation, from memory).
            assert_eq!(band.ab_offset_mag, offset, "{id}");
        }
    }

    #[test]
    fn stromgren_bands_are_magnitude_only() {
        // Central wavelengths: Strömgren 1966 (from memory); no published Jy zero point.
        check_band("strom_u", 0.35, None, None);
        check_band("strom_v", 0.41, None, None);
        check_band("strom_b", 0.47, None, None);
        check_band("strom_y", 0.55, None, None);
        let bands = BandLibrary::builtin();
        let u = bands.get("strom_u").unwrap();
        assert!(!u.has_zero_point());
        assert!(u.conversion(ValueUnit::VegaMag).is_none());
        assert!(u.note.as_deref().unwrap().contains("colour indices"));
    }

    #[test]
    fn two_mass_matches_cohen_wheaton_megeath_2003() {
        // Cohen, Wheaton & Megeath 2003, AJ 126, 1090.
        check_band("tmass_j", 1.235, Some(1594.0), Some(27.8));
        check_band("tmass_h", 1.662, Some(1024.0), Some(20.0));
        check_band("tmass_ks", 2.159, Some(666.7), Some(12.6));
    }

    #[test]
    fn wise_matches_jarrett_2011() {
        // Jarrett et al. 2011, ApJ 735, 112 (uncertainties from memory).
        check_band("wise_w1", 3.3526, Some(309.540), Some(4.582));
        check_band("wise_w2", 4.6028, Some(171.787), Some(2.516));
        check_band("wise_w3", 11.5608, Some(31.674), Some(0.450));
        check_band("wise_w4", 22.0883, Some(8.363), Some(0.124));
        // Survey's Vega-to-AB offsets (WISE All-Sky Explanatory Supplement IV.4.h) and
        // the Brown, Jarrett & Cluver 2014 W4 revision are documented in the notes.
        let bands = BandLibrary::builtin();
        for (id, offset) in [
            ("wise_w1", "2.699"),
            ("wise_w2", "3.339"),
            ("wise_w3", "5.174"),
            ("wise_w4", "6.620"),
        ] {
            assert!(
                bands
                    .get(id)
                    .unwrap()
                    .note
                    .as_deref()
                    .unwrap()
                    .contains(offset),
                "{id}"
            );
        }
        assert!(
            bands
                .get("wise_w4")
                .unwrap()
                .note
                .as_deref()
                .unwrap()
                .contains("Brown, Jarrett & Cluver 2014")
        );
    }

    #[test]
    fn irac_matches_reach_2005() {
        // Reach et al. 2005, PASP 117, 978; IRAC Instrument Handbook Table 4.1.
        check_band("irac_36", 3.550, Some(280.9), Some(4.1));
        check_band("irac_45", 4.493, Some(179.7), Some(2.6));
        check_band("irac_58", 5.731, Some(115.0), Some(1.7));
        check_band("irac_80", 7.872, Some(64.13), Some(0.94));
    }

    #[test]
    fn mips_matches_engelbracht_gordon_stansberry_2007() {
        // Engelbracht et al. 2007, PASP 119, 994 (error from memory).
        check_band("mips_24", 23.675, Some(7.17), Some(0.11));
        // Gordon et al. 2007, PASP 119, 1019 (error from memory).
        check_band("mips_70", 71.42, Some(0.778), Some(0.012));
        // Stansberry et al. 2007, PASP 119, 1038 (error from memory).
        check_band("mips_160", 155.9, Some(0.159), Some(0.0024));
    }

    #[test]
    fn gaia_zero_points_derive_from_riello_2021() {
        // Riello et al. 2021, A&A 649, A3: ZP_AB and ZP_Vega for G, BP, RP; the Jy
        // zero point is 3631 Jy × 10^(−0.4 (ZP_AB − ZP_Vega)), stored to 0.1 Jy.
        let bands = BandLibrary::builtin();
        for (id, wavelength_um, zp_ab, zp_vega) in [
            ("gaia_g", 0.639, 25.8010, 25.6874),
            ("gaia_bp", 0.518, 25.3540, 25.3385),
            ("gaia_rp", 0.783, 25.1040, 24.7479),
        ] {
            let band = bands.get(id).unwrap();
            assert_rel(band.wavelength_um, wavelength_um, 1e-9);
            let derived_jy = 3631.0 * 10f64.powf(-0.4 * (zp_ab - zp_vega));
            assert!(
                (band.zero_point_jy.unwrap() - derived_jy).abs() <= 0.05,
                "{id}"
            );
            assert!(band.note.as_deref().unwrap().contains("derived"), "{id}");
        }
    }

    #[test]
    fn halpha_is_ab_at_656_nm() {
        // AB zero point 3631 Jy (Oke & Gunn 1983, ApJ 266, 713); H-alpha at 656.3 nm (common practice).
        check_band("halpha", 0.6563, Some(3631.0), None);
        let bands = BandLibrary::builtin();
        assert!(
            bands
                .get("halpha")
                .unwrap()
                .note
                .as_deref()
                .unwrap()
                .contains("Vega")
        );
    }

    #[test]
    fn band_serialises_with_lowercase_system() {
        let bands = BandLibrary::builtin();
        let json = serde_json::to_string(bands.get("tmass_ks").unwrap()).unwrap();
        assert!(json.contains("\"system\":\"vega\""), "{json}");
        assert!(json.contains("\"zero_point_jy\":666.7"), "{json}");
        assert_eq!(PhotSystem::Ab.to_string(), "ab");
    }

    #[test]
    fn ab_band_without_zero_point_gets_3631_jy() {
        let mut bands = BandLibrary::default();
        bands
            .add_toml(MINIMAL_AB_BAND, Path::new("user.toml"))
            .unwrap();
        // AB definition (Oke & Gunn 1983, ApJ 266, 713).
        assert_eq!(bands.get("my_nb").unwrap().zero_point_jy, Some(3631.0));
    }

    #[test]
    fn integer_numbers_are_accepted() {
        let text = MINIMAL_AB_BAND.replace("wavelength_um = 0.5", "wavelength_um = 2");
        let mut bands = BandLibrary::default();
        bands.add_toml(&text, Path::new("user.toml")).unwrap();
        assert_eq!(bands.get("my_nb").unwrap().wavelength_um, 2.0);
    }

    #[test]
    fn duplicate_of_builtin_names_both_lines() {
        let mut bands = BandLibrary::builtin();
        let builtin_count = bands.len();
        let builtin_line = BUILTIN_BANDS_TOML
            .lines()
            .position(|l| l.trim() == "id = \"tmass_ks\"")
            .unwrap()
            + 1;
        let text = MINIMAL_AB_BAND.replace("my_nb", "tmass_ks");
        let err = bands.add_toml(&text, Path::new("user.toml")).unwrap_err();
        assert_eq!(
            err.to_string(),
            format!(
                "user.toml:3: band id \"tmass_ks\" is already defined at built-in schemas/bands.toml:{builtin_line}"
            )
        );
        assert_eq!(bands.len(), builtin_count, "nothing added on error");
    }

    #[test]
    fn duplicate_within_file_names_the_line() {
        let text = format!("{MINIMAL_AB_BAND}{MINIMAL_AB_BAND}");
        let mut bands = BandLibrary::default();
        let err = bands.add_toml(&text, Path::new("user.toml")).unwrap_err();
        assert_eq!(
            err.to_string(),
            "user.toml:12: band id \"my_nb\" is already defined at user.toml:3"
        );
        assert!(bands.is_empty(), "nothing added on error");
    }

    #[test]
    fn bad_values_name_their_line() {
        let cases = [
            (
                "wavelength_um = 0.5",
                "wavelength_um = -1.0",
                7,
                "wavelength_um must be a positive number of micrometres, found -1",
            ),
            (
                "wavelength_um = 0.5",
                "wavelength_um = nan",
                7,
                "wavelength_um must be a positive number of micrometres, found NaN",
            ),
            (
                "id = \"my_nb\"",
                "id = \"My-NB\"",
                3,
                "band id \"My-NB\" is not valid",
            ),
            (
                "wavelength_kind = \"central\"",
                "wavelength_kind = \"middle\"",
                8,
                "wavelength_kind \"middle\" is not one of",
            ),
            (
                "name = \"NB\"",
                "name = \"NB\"\nzero_point_jy = 0.0",
                7,
                "zero_point_jy must be a positive flux density in Jy, found 0",
            ),
            (
                "name = \"NB\"",
                "name = \"NB\"\nasinh_softening = -1e-10",
                7,
                "asinh_softening must be a positive number",
            ),
            (
                "source = \"Oke & Gunn 1983, ApJ 266, 713\"",
                "source = \" \"",
                9,
                "source must name the publication",
            ),
        ];
        for (from, to, line, message) in cases {
            let text = MINIMAL_AB_BAND.replace(from, to);
            let err = BandLibrary::default()
                .add_toml(&text, Path::new("user.toml"))
                .unwrap_err();
            match &err {
                Error::Config {
                    line: got,
                    message: got_message,
                    ..
                } => {
                    assert_eq!(*got, line, "{err}");
                    assert!(got_message.contains(message), "{err}");
                }
                other => panic!("expected a config error, got {other:?}"),
            }
        }
    }

    #[test]
    fn vega_band_may_omit_zero_point_but_not_keep_its_error() {
        let text = MINIMAL_AB_BAND.replace("\"ab\"", "\"vega\"");
        let mut bands = BandLibrary::default();
        bands.add_toml(&text, Path::new("user.toml")).unwrap();
        assert_eq!(bands.get("my_nb").unwrap().zero_point_jy, None);

        let text = text.replace("name = \"NB\"", "name = \"NB\"\nzero_point_err_jy = 1.0");
        let err = BandLibrary::default()
            .add_toml(&text, Path::new("user.toml"))
            .unwrap_err();
        assert_eq!(
            err.to_string(),
            "user.toml:7: band \"my_nb\": zero_point_err_jy is given but zero_point_jy is not"
        );
    }

    #[test]
    fn unknown_field_and_bad_system_are_toml_errors_with_line() {
        let text = MINIMAL_AB_BAND.replace("name = \"NB\"", "name = \"NB\"\nzeropoint = 1.0");
        let err = BandLibrary::default()
            .add_toml(&text, Path::new("user.toml"))
            .unwrap_err();
        match &err {
            Error::Toml { message, .. } => {
                assert!(message.starts_with("line 7, column 1: "), "{err}");
                assert!(message.contains("zeropoint"), "{err}");
            }
            other => panic!("expected a TOML error, got {other:?}"),
        }
        let text = MINIMAL_AB_BAND.replace("\"ab\"", "\"st\"");
        let err = BandLibrary::default()
            .add_toml(&text, Path::new("user.toml"))
            .unwrap_err();
        match &err {
            Error::Toml { message, .. } => assert!(message.starts_with("line 4, column "), "{err}"),
            other => panic!("expected a TOML error, got {other:?}"),
        }
    }

    #[test]
    fn load_user_file_reads_and_reports_io_errors() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("bands.toml");
        std::fs::write(&path, MINIMAL_AB_BAND).unwrap();
        let mut bands = BandLibrary::builtin();
        let builtin_count = bands.len();
        bands.load_user_file(&path).unwrap();
        assert_eq!(bands.len(), builtin_count + 1);
        assert_eq!(bands.iter().last().unwrap().id, "my_nb");

        let missing = dir.path().join("missing.toml");
        let err = bands.load_user_file(&missing).unwrap_err();
        assert!(matches!(err, Error::Io { .. }), "{err:?}");
    }

    #[test]
    fn conversion_picks_zero_point_and_offset_by_unit() {
        let bands = BandLibrary::builtin();
        let u = bands.get("sdss_u").unwrap();
        let ab = u.conversion(ValueUnit::AbMag).unwrap();
        assert_eq!(
            (ab.zero_point_jy, ab.offset_mag, ab.softening),
            (3631.0, -0.04, None)
        );
        let asinh = u.conversion(ValueUnit::AsinhMag).unwrap();
        assert_eq!(asinh.softening, Some(1.4e-10)); // Stoughton et al. 2002, Table 21
        let ks = bands.get("tmass_ks").unwrap();
        let vega = ks.conversion(ValueUnit::VegaMag).unwrap();
        assert_eq!((vega.zero_point_jy, vega.offset_mag), (666.7, 0.0)); // Cohen et al. 2003
        let strom = bands.get("strom_y").unwrap();
        assert!(strom.conversion(ValueUnit::AbMag).is_some());
        assert!(strom.conversion(ValueUnit::MilliJy).is_some());
        assert!(strom.conversion(ValueUnit::AsinhMag).is_none());
    }

    #[test]
    fn band_ids_follow_the_column_name_rule() {
        assert!(is_valid_band_id("tmass_ks"));
        assert!(is_valid_band_id("w1"));
        assert!(!is_valid_band_id(""));
        assert!(!is_valid_band_id("1w"));
        assert!(!is_valid_band_id("_w1"));
        assert!(!is_valid_band_id("W1"));
        assert!(!is_valid_band_id("wise-w1"));
    }
}
