//! The `[science]` table of a plan: what the science layer computes and how.
//!
//! ```toml
//! [science]
//! alpha_window_um = [2.0, 24.0]      # spectral-index window, µm
//! alpha_min_points = 3               # fewer detections: α but no class
//! alpha_weighting = "inverse_variance"   # or "equal"
//! alpha_bands = ["tmass_ks", "irac_36"]  # optional: fit only these bands (default: all in the window)
//! anchor = "tmass_ks"                # photosphere anchor band
//! photosphere = "zero_vega_colour"   # or "rayleigh_jeans", "blackbody" (needs teff_k),
//!                                    # "colour_table" (needs colour_table)
//! teff_k = 4000.0
//! teff_table = "teff.csv"            # T_eff per object: CSV with object_id, teff_k
//! colour_table = "colours.csv"       # intrinsic colours per teff_k / spt (colour_table)
//! spt = "K5"                         # field spectral type (colour_table)
//! spt_table = "spt.csv"              # spectral type per object: CSV with object_id, spt
//! photosphere_error = 0.1            # relative model uncertainty of the photosphere
//! excess_sigma = 3.0                 # χ threshold for an excess flag
//! excess_floor_mag = 0.3             # and the excess must exceed this
//! optical_law = "odonnell94"         # or "ccm89"
//! infrared_law = "xue16"             # or "indebetouw05"
//! r_v = 3.1
//! av_mag = 2.0                       # one A_V for the field, or:
//! # av_table = "av.csv"              # CSV with columns object_id, av_mag
//! # av_from_colour = { blue = "tmass_j", red = "tmass_h", intrinsic_mag = 0.6 }
//! colours = ["tmass_j-tmass_h", "tmass_h-tmass_ks"]   # default: neighbouring bands
//! halpha = { r = "sdss_r", halpha = "halpha", i = "sdss_i" }
//! ```
//!
//! Unknown keys are errors; every error names the plan line.

use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use super::alpha::Weighting;
use super::extinction::{ExtinctionLaw, InfraredLaw, OpticalLaw};
use super::photosphere::{Photosphere, StellarKey, spectral_type_code};
use crate::error::{Error, Result, line_of_offset};

/// Where A_V comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum AvSource {
    /// No dereddening.
    None,
    /// One A_V for every object, mag.
    Field(f64),
    /// Per object from a CSV with columns `object_id` and `av_mag`.
    Table(PathBuf),
    /// Per object from a colour against its intrinsic value:
    /// A_V = (c_obs − c_0) / (A_blue/A_V − A_red/A_V), clipped at 0.
    Colour {
        /// Bluer band id.
        blue: String,
        /// Redder band id.
        red: String,
        /// Intrinsic colour, mag.
        intrinsic_mag: f64,
    },
}

/// The bands of the H-alpha emission index r − Hα against r − i.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct HalphaBands {
    /// Broad r band id.
    pub r: String,
    /// Narrow H-alpha band id.
    pub halpha: String,
    /// Broad i band id.
    pub i: String,
}

/// Validated science settings.
#[derive(Debug, Clone, PartialEq)]
pub struct ScienceSettings {
    /// Spectral-index window, µm (inclusive).
    pub alpha_window_um: (f64, f64),
    /// Minimum detections in the window for a class.
    pub alpha_min_points: usize,
    /// Fit weighting.
    pub alpha_weighting: Weighting,
    /// Bands fitted for α; empty: every flux band in the window.
    pub alpha_bands: Vec<String>,
    /// Photosphere anchor band id.
    pub anchor: String,
    /// Photosphere assumption (a blackbody with T_eff NaN: T_eff only from `teff_table`).
    pub photosphere: Photosphere,
    /// Per-object T_eff (CSV with object_id, teff_k); used with a blackbody or
    /// colour-table photosphere, objects not in it fall back to the field's value.
    pub teff_table: Option<PathBuf>,
    /// The intrinsic colours of a colour-table photosphere.
    pub colour_table: Option<PathBuf>,
    /// Per-object spectral type (CSV with object_id, spt) for a colour-table
    /// photosphere; it comes before `teff_table` for an object in both.
    pub spt_table: Option<PathBuf>,
    /// Relative model uncertainty of the photosphere.
    pub photosphere_error: f64,
    /// χ threshold of an excess flag.
    pub excess_sigma: f64,
    /// Minimum excess of a flag, mag.
    pub excess_floor_mag: f64,
    /// Extinction law.
    pub law: ExtinctionLaw,
    /// Where A_V comes from.
    pub av: AvSource,
    /// Colours as (band, band) pairs; empty: neighbouring bands by wavelength.
    pub colours: Vec<(String, String)>,
    /// H-alpha index bands, if set.
    pub halpha: Option<HalphaBands>,
}

impl Default for ScienceSettings {
    fn default() -> Self {
        ScienceSettings {
            alpha_window_um: (2.0, 24.0),
            alpha_min_points: 3,
            alpha_weighting: Weighting::InverseVariance,
            alpha_bands: Vec::new(),
            anchor: "tmass_ks".to_string(),
            photosphere: Photosphere::ZeroVegaColour,
            teff_table: None,
            colour_table: None,
            spt_table: None,
            photosphere_error: 0.1,
            excess_sigma: 3.0,
            excess_floor_mag: 0.3,
            law: ExtinctionLaw::default(),
            av: AvSource::None,
            colours: Vec::new(),
            halpha: None,
        }
    }
}

#[derive(Deserialize)]
struct Doc {
    science: Option<RawScience>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAvColour {
    blue: String,
    red: String,
    intrinsic_mag: f64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawHalpha {
    r: String,
    halpha: String,
    i: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawScience {
    alpha_window_um: Option<Spanned<Vec<f64>>>,
    alpha_min_points: Option<Spanned<i64>>,
    alpha_weighting: Option<Spanned<String>>,
    alpha_bands: Option<Vec<String>>,
    anchor: Option<String>,
    photosphere: Option<Spanned<String>>,
    teff_k: Option<Spanned<f64>>,
    teff_table: Option<String>,
    colour_table: Option<Spanned<String>>,
    spt: Option<Spanned<String>>,
    spt_table: Option<Spanned<String>>,
    photosphere_error: Option<Spanned<f64>>,
    excess_sigma: Option<Spanned<f64>>,
    excess_floor_mag: Option<Spanned<f64>>,
    optical_law: Option<Spanned<String>>,
    infrared_law: Option<Spanned<String>>,
    r_v: Option<Spanned<f64>>,
    av_mag: Option<Spanned<f64>>,
    av_table: Option<Spanned<String>>,
    av_from_colour: Option<Spanned<RawAvColour>>,
    colours: Option<Spanned<Vec<String>>>,
    halpha: Option<RawHalpha>,
}

impl ScienceSettings {
    /// The `[science]` table of the TOML `text` read from `path` (a plan), or
    /// `None` when there is none. Relative paths are from the file's folder.
    ///
    /// # Errors
    /// [`Error::Toml`] when the table does not parse or has an unknown key;
    /// [`Error::Config`] naming the line of an impossible value.
    pub fn from_plan_text(text: &str, path: &Path) -> Result<Option<ScienceSettings>> {
        let doc: Doc = toml::from_str(text).map_err(|e| Error::Toml {
            path: path.to_path_buf(),
            message: e.to_string().trim_end().replace('\n', " "),
        })?;
        let Some(raw) = doc.science else {
            return Ok(None);
        };
        let err = |span: std::ops::Range<usize>, message: String| {
            Error::config(path, line_of_offset(text, span.start), message)
        };
        let mut s = ScienceSettings::default();
        if let Some(w) = &raw.alpha_window_um {
            let v = w.get_ref();
            if v.len() != 2 || !(v[0] > 0.0 && v[1] > v[0] && v[1].is_finite()) {
                return Err(err(
                    w.span(),
                    format!(
                        "alpha_window_um must be [shortest, longest] in µm with 0 < shortest < longest, found {v:?}"
                    ),
                ));
            }
            s.alpha_window_um = (v[0], v[1]);
        }
        if let Some(n) = &raw.alpha_min_points {
            if *n.get_ref() < 2 {
                return Err(err(
                    n.span(),
                    format!("alpha_min_points must be at least 2, found {}", n.get_ref()),
                ));
            }
            s.alpha_min_points = *n.get_ref() as usize;
        }
        if let Some(w) = &raw.alpha_weighting {
            s.alpha_weighting = match w.get_ref().as_str() {
                "inverse_variance" => Weighting::InverseVariance,
                "equal" => Weighting::Equal,
                other => {
                    return Err(err(
                        w.span(),
                        format!(
                            "alpha_weighting must be \"inverse_variance\" or \"equal\", found \"{other}\""
                        ),
                    ));
                }
            };
        }
        let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
        let resolve = |t: &str| {
            let p = PathBuf::from(t);
            if p.is_absolute() { p } else { base.join(p) }
        };
        if let Some(b) = raw.alpha_bands {
            s.alpha_bands = b;
        }
        s.teff_table = raw.teff_table.as_deref().map(resolve);
        if let Some(a) = raw.anchor {
            s.anchor = a;
        }
        let positive =
            |v: &Option<Spanned<f64>>, key: &str, allow_zero: bool| -> Result<Option<f64>> {
                match v {
                    Some(x) => {
                        let val = *x.get_ref();
                        let ok = val.is_finite() && (val > 0.0 || (allow_zero && val == 0.0));
                        if ok {
                            Ok(Some(val))
                        } else {
                            Err(err(
                                x.span(),
                                format!(
                                    "{key} must be a {} number, found {val}",
                                    if allow_zero {
                                        "non-negative"
                                    } else {
                                        "positive"
                                    }
                                ),
                            ))
                        }
                    }
                    None => Ok(None),
                }
            };
        let teff = positive(&raw.teff_k, "teff_k", false)?;
        if let Some(p) = &raw.photosphere {
            s.photosphere = match p.get_ref().as_str() {
                "rayleigh_jeans" => Photosphere::RayleighJeans,
                "zero_vega_colour" => Photosphere::ZeroVegaColour,
                "blackbody" => Photosphere::Blackbody {
                    teff_k: teff
                        .or(s.teff_table.as_ref().map(|_| f64::NAN))
                        .ok_or_else(|| {
                            err(
                                p.span(),
                                "photosphere = \"blackbody\" needs teff_k (K) or teff_table"
                                    .to_string(),
                            )
                        })?,
                },
                "colour_table" => {
                    let Some(table) = &raw.colour_table else {
                        return Err(err(
                            p.span(),
                            "photosphere = \"colour_table\" needs colour_table (a CSV of intrinsic colours per teff_k or spt)".to_string(),
                        ));
                    };
                    s.colour_table = Some(resolve(table.get_ref()));
                    s.spt_table = raw.spt_table.as_ref().map(|t| resolve(t.get_ref()));
                    let field = match &raw.spt {
                        Some(t) => Some(StellarKey::Spt(
                            spectral_type_code(t.get_ref()).ok_or_else(|| {
                                err(
                                    t.span(),
                                    format!(
                                        "spt must be a spectral type such as \"K5\" or \"M2.5\", found \"{}\"",
                                        t.get_ref()
                                    ),
                                )
                            })?,
                        )),
                        None => teff.map(StellarKey::TeffK),
                    };
                    if field.is_none() && s.teff_table.is_none() && s.spt_table.is_none() {
                        return Err(err(
                            p.span(),
                            "photosphere = \"colour_table\" needs a key to look the table up by: spt, teff_k, spt_table or teff_table".to_string(),
                        ));
                    }
                    Photosphere::ColourTable { field }
                }
                other => {
                    return Err(err(
                        p.span(),
                        format!(
                            "photosphere must be \"zero_vega_colour\", \"rayleigh_jeans\", \"blackbody\" or \"colour_table\", found \"{other}\""
                        ),
                    ));
                }
            };
        }
        if !matches!(s.photosphere, Photosphere::ColourTable { .. }) {
            let stray = [
                ("colour_table", raw.colour_table.as_ref()),
                ("spt", raw.spt.as_ref()),
                ("spt_table", raw.spt_table.as_ref()),
            ];
            if let Some((key, v)) = stray.iter().find_map(|(k, v)| v.map(|v| (k, v))) {
                return Err(err(
                    v.span(),
                    format!("{key} is used only with photosphere = \"colour_table\""),
                ));
            }
        }
        if let Some(v) = positive(&raw.photosphere_error, "photosphere_error", true)? {
            s.photosphere_error = v;
        }
        if let Some(v) = positive(&raw.excess_sigma, "excess_sigma", false)? {
            s.excess_sigma = v;
        }
        if let Some(v) = positive(&raw.excess_floor_mag, "excess_floor_mag", true)? {
            s.excess_floor_mag = v;
        }
        if let Some(v) = positive(&raw.r_v, "r_v", false)? {
            s.law.r_v = v;
        }
        if let Some(o) = &raw.optical_law {
            s.law.optical = match o.get_ref().as_str() {
                "ccm89" => OpticalLaw::Ccm89,
                "odonnell94" => OpticalLaw::ODonnell94,
                other => {
                    return Err(err(
                        o.span(),
                        format!(
                            "optical_law must be \"odonnell94\" or \"ccm89\", found \"{other}\""
                        ),
                    ));
                }
            };
        }
        if let Some(o) = &raw.infrared_law {
            s.law.infrared = match o.get_ref().as_str() {
                "xue16" => InfraredLaw::Xue16,
                "indebetouw05" => InfraredLaw::Indebetouw05,
                other => {
                    return Err(err(
                        o.span(),
                        format!(
                            "infrared_law must be \"xue16\" or \"indebetouw05\", found \"{other}\""
                        ),
                    ));
                }
            };
        }
        let given = [
            raw.av_mag.as_ref().map(|v| v.span()),
            raw.av_table.as_ref().map(|v| v.span()),
            raw.av_from_colour.as_ref().map(|v| v.span()),
        ];
        if given.iter().flatten().count() > 1 {
            let second = given.iter().flatten().nth(1).unwrap().clone();
            return Err(err(
                second,
                "give only one of av_mag, av_table and av_from_colour".to_string(),
            ));
        }
        if let Some(v) = positive(&raw.av_mag, "av_mag", true)? {
            s.av = AvSource::Field(v);
        }
        if let Some(t) = &raw.av_table {
            s.av = AvSource::Table(resolve(t.get_ref()));
        }
        if let Some(c) = raw.av_from_colour {
            let c = c.into_inner();
            s.av = AvSource::Colour {
                blue: c.blue,
                red: c.red,
                intrinsic_mag: c.intrinsic_mag,
            };
        }
        if let Some(list) = &raw.colours {
            for item in list.get_ref() {
                let Some((a, b)) = item.split_once('-') else {
                    return Err(err(
                        list.span(),
                        format!(
                            "colours entries are \"band-band\" (e.g. \"tmass_j-tmass_h\"), found \"{item}\""
                        ),
                    ));
                };
                s.colours.push((a.to_string(), b.to_string()));
            }
        }
        if let Some(h) = raw.halpha {
            s.halpha = Some(HalphaBands {
                r: h.r,
                halpha: h.halpha,
                i: h.i,
            });
        }
        Ok(Some(s))
    }

    /// The settings as key-value metadata of the science table.
    pub fn metadata(&self) -> Vec<(String, String)> {
        let av = match &self.av {
            AvSource::None => "none (observed values only)".to_string(),
            AvSource::Field(v) => format!("field A_V = {v} mag"),
            AvSource::Table(p) => format!("per object from {}", p.display()),
            AvSource::Colour {
                blue,
                red,
                intrinsic_mag,
            } => format!(
                "per object from {blue} - {red} against intrinsic {intrinsic_mag} mag, clipped at 0"
            ),
        };
        vec![
            (
                "fluxloom.science.alpha".into(),
                format!(
                    "alpha = d log10(lambda F_lambda) / d log10 lambda, least squares over {}-{} um ({}), detections only, weighting {}, class needs >= {} points spanning a factor >= 2 in wavelength",
                    self.alpha_window_um.0,
                    self.alpha_window_um.1,
                    if self.alpha_bands.is_empty() {
                        "every flux band".to_string()
                    } else {
                        format!("bands {}", self.alpha_bands.join(", "))
                    },
                    self.alpha_weighting.as_str(),
                    self.alpha_min_points
                ),
            ),
            (
                "fluxloom.science.class_scheme".into(),
                super::alpha::CLASS_SCHEME.into(),
            ),
            (
                "fluxloom.science.photosphere".into(),
                format!(
                    "{}{}{}{}; anchor {}; relative model error {}",
                    self.photosphere.describe(),
                    self.colour_table
                        .as_ref()
                        .map_or(String::new(), |t| format!("; colours from {}", t.display())),
                    self.spt_table.as_ref().map_or(String::new(), |t| format!(
                        "; spectral type per object from {}",
                        t.display()
                    )),
                    self.teff_table.as_ref().map_or(String::new(), |t| format!(
                        "; T_eff per object from {}",
                        t.display()
                    )),
                    self.anchor,
                    self.photosphere_error
                ),
            ),
            (
                "fluxloom.science.excess".into(),
                format!(
                    "flag when chi >= {} and excess >= {} mag; ir = bands redder than the anchor, uv = bands bluer (depends on the photosphere assumption)",
                    self.excess_sigma, self.excess_floor_mag
                ),
            ),
            ("fluxloom.science.extinction".into(), self.law.describe()),
            ("fluxloom.science.av".into(), av),
        ]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<Option<ScienceSettings>> {
        ScienceSettings::from_plan_text(text, Path::new("plan.toml"))
    }

    #[test]
    fn no_table_is_none_and_defaults_fill_in() {
        assert_eq!(parse("[field]\nname = \"x\"\n").unwrap(), None);
        let s = parse("[science]\nav_mag = 1.5\ncolours = [\"tmass_j-tmass_h\"]\n")
            .unwrap()
            .unwrap();
        assert_eq!(s.av, AvSource::Field(1.5));
        assert_eq!(s.alpha_min_points, 3);
        assert_eq!(s.colours, vec![("tmass_j".into(), "tmass_h".into())]);
    }

    #[test]
    fn a_colour_table_photosphere_takes_its_keys() {
        let s = parse(
            "[science]\nphotosphere = \"colour_table\"\ncolour_table = \"c.csv\"\nspt = \"M2.5\"\nspt_table = \"s.csv\"\n",
        )
        .unwrap()
        .unwrap();
        assert_eq!(
            s.photosphere,
            Photosphere::ColourTable {
                field: Some(StellarKey::Spt(62.5))
            }
        );
        assert_eq!(s.colour_table, Some(PathBuf::from("c.csv")));
        assert_eq!(s.spt_table, Some(PathBuf::from("s.csv")));
        let s = parse(
            "[science]\nphotosphere = \"colour_table\"\ncolour_table = \"c.csv\"\nteff_table = \"t.csv\"\n",
        )
        .unwrap()
        .unwrap();
        assert_eq!(s.photosphere, Photosphere::ColourTable { field: None });
        assert_eq!(s.teff_table, Some(PathBuf::from("t.csv")));
    }

    #[test]
    fn bad_values_name_the_line() {
        let e = parse("[science]\n\nalpha_window_um = [24.0, 2.0]\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "plan.toml:3: alpha_window_um must be [shortest, longest] in µm with 0 < shortest < longest, found [24.0, 2.0]"
        );
        let e = parse("[science]\nphotosphere = \"blackbody\"\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "plan.toml:2: photosphere = \"blackbody\" needs teff_k (K) or teff_table"
        );
        let e = parse("[science]\nav_mag = 1.0\nav_table = \"a.csv\"\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "plan.toml:3: give only one of av_mag, av_table and av_from_colour"
        );
        let e = parse("[science]\nphotosphere = \"colour_table\"\nteff_k = 4000.0\n").unwrap_err();
        assert_eq!(
            e.to_string(),
            "plan.toml:2: photosphere = \"colour_table\" needs colour_table (a CSV of intrinsic colours per teff_k or spt)"
        );
        let e = parse("[science]\nphotosphere = \"colour_table\"\ncolour_table = \"c.csv\"\n")
            .unwrap_err();
        assert_eq!(
            e.to_string(),
            "plan.toml:2: photosphere = \"colour_table\" needs a key to look the table up by: spt, teff_k, spt_table or teff_table"
        );
        let e = parse(
            "[science]\nphotosphere = \"colour_table\"\ncolour_table = \"c.csv\"\nspt = \"Q5\"\n",
        )
        .unwrap_err();
        assert_eq!(
            e.to_string(),
            "plan.toml:4: spt must be a spectral type such as \"K5\" or \"M2.5\", found \"Q5\""
        );
        let e = parse(
            "[science]\nphotosphere = \"blackbody\"\nteff_k = 4000.0\nspt_table = \"s.csv\"\n",
        )
        .unwrap_err();
        assert_eq!(
            e.to_string(),
            "plan.toml:4: spt_table is used only with photosphere = \"colour_table\""
        );
        let e = parse("[science]\ncolour = []\n").unwrap_err();
        assert!(e.to_string().contains("unknown field `colour`"), "{e}");
    }
}
