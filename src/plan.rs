//! The plan file: which catalogs to read with which survey schemas, how to match
//! them, and where to write the SED tables.
//!
//! [`Plan::from_file`] parses and validates a plan; relative paths are taken from
//! the plan file's folder, and every error names the plan line. The shape (full
//! reference in the README):
//!
//! ```toml
//! [field]
//! name = "fl1"
//! reference_epoch = 2016.0
//!
//! [match]
//! tolerance = { kind = "sigma", k = 3.439, max_arcsec = 5.0 }
//! astrometric_reference = "ask"
//!
//! [[catalog]]
//! file = "ask.parquet"
//! schema = "ask.toml"
//!
//! [output]
//! folder = "out/fl1"
//! ```

use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use crate::catalog::schema::SurveySchema;
use crate::crossmatch::{BandSettings, CatalogSettings, MatchConfig, Tolerance};
use crate::error::{Error, Result, line_of_offset, read_toml_text, toml_error};
use crate::photometry::BandLibrary;

/// Largest accepted angle of the plan (tolerances, systematic errors,
/// resolutions), arcsec: one degree.
pub const MAX_ARCSEC: f64 = 3600.0;
/// Largest accepted tolerance multiple `k` of a sigma tolerance.
pub const MAX_TOLERANCE_K: f64 = 100.0;
/// Largest accepted `max_motion_masyr`, mas/yr: 10″/yr, above the fastest
/// known stars (about 10.4″/yr, FIELD notes §5.8's illustrative inputs).
pub const MAX_MOTION_LIMIT_MASYR: f64 = 10_000.0;
/// The area of the whole sky, square degrees (4 pi sr = 129600 / pi deg^2).
pub const FULL_SKY_DEG2: f64 = 41252.96124941928;

/// One catalog of the plan, with its validated schema.
#[derive(Debug, Clone)]
pub struct PlanCatalog {
    /// Catalog name (the schema's survey name).
    pub name: String,
    /// The catalog file.
    pub file: PathBuf,
    /// The survey schema.
    pub schema: SurveySchema,
    /// Matching settings of this catalog.
    pub settings: CatalogSettings,
    /// A coverage map (IVOA MOC, FITS or ASCII), if given.
    pub coverage: Option<PathBuf>,
    /// HEALPix order of the coverage derived from positions when no MOC is given
    /// (None: chosen from the source density).
    pub coverage_order: Option<u8>,
}

/// Export formats besides Parquet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExportFormat {
    /// Comma-separated text.
    Csv,
    /// FITS binary table.
    Fits,
    /// IVOA VOTable (BINARY2).
    Votable,
}

/// Which of the three Parquet tables a build writes (all by default); a
/// pairs-only job writes only `links` and skips assembling SEDs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OutputTables {
    /// `objects.parquet`.
    pub objects: bool,
    /// `photometry.parquet`.
    pub photometry: bool,
    /// `links.parquet`.
    pub links: bool,
}

impl Default for OutputTables {
    fn default() -> Self {
        OutputTables {
            objects: true,
            photometry: true,
            links: true,
        }
    }
}

/// A validated plan.
#[derive(Debug, Clone)]
pub struct Plan {
    /// Field name, used in file metadata.
    pub field: String,
    /// The catalogs, in plan order (which is also the priority order of anchors).
    pub catalogs: Vec<PlanCatalog>,
    /// Match settings (one entry per catalog).
    pub matching: MatchConfig,
    /// Field area for the prior, steradians (None: estimated per catalog).
    pub area_sr: Option<f64>,
    /// Catalog used as the astrometric reference.
    pub astrometric_reference: Option<usize>,
    /// Correct catalogs' offsets against the reference before the final match.
    pub correct_offsets: bool,
    /// Estimate false-match rates by shifted catalogs.
    pub false_matches: bool,
    /// Output folder.
    pub output: PathBuf,
    /// Exports besides Parquet (of the objects and photometry tables that are written).
    pub exports: Vec<ExportFormat>,
    /// Which Parquet tables to write.
    pub tables: OutputTables,
    /// Skip unreadable rows (counted) instead of stopping.
    pub skip_bad_rows: bool,
    /// Write the match audit (report.html, report.json) with the tables.
    pub report: bool,
    /// The plan file.
    pub path: PathBuf,
    /// The plan text, kept for run.json and output metadata.
    pub text: String,
    /// The `[science]` table: write science.parquet with these settings.
    pub science: Option<crate::science::ScienceSettings>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPlan {
    field: RawField,
    #[serde(rename = "match", default)]
    matching: Option<RawMatch>,
    catalog: Vec<Spanned<RawCatalog>>,
    output: RawOutput,
    bands: Option<String>,
    /// Parsed on its own by `ScienceSettings::from_plan_text`, which names its lines.
    #[serde(rename = "science")]
    _science: Option<serde::de::IgnoredAny>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawField {
    name: String,
    reference_epoch: Spanned<f64>,
    area_deg2: Option<Spanned<f64>>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawMatch {
    tolerance: Option<Spanned<RawTolerance>>,
    min_probability: Option<Spanned<f64>>,
    companion_share_limit: Option<Spanned<f64>>,
    common_fraction: Option<Spanned<f64>>,
    max_motion_masyr: Option<Spanned<f64>>,
    moving_fraction: Option<Spanned<f64>>,
    partition_order: Option<Spanned<u8>>,
    primary: Option<Vec<Spanned<String>>>,
    astrometric_reference: Option<Spanned<String>>,
    correct_offsets: Option<bool>,
    false_matches: Option<bool>,
    #[serde(default)]
    pair: Vec<Spanned<RawPair>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTolerance {
    kind: String,
    arcsec: Option<f64>,
    k: Option<f64>,
    max_arcsec: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPair {
    catalogs: Vec<String>,
    tolerance: Spanned<RawTolerance>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCatalog {
    file: String,
    schema: String,
    systematic_arcsec: Option<f64>,
    resolution_arcsec: Option<f64>,
    coverage: Option<String>,
    coverage_order: Option<u8>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawOutput {
    folder: String,
    #[serde(default)]
    exports: Vec<Spanned<String>>,
    tables: Option<Vec<Spanned<String>>>,
    skip_bad_rows: Option<bool>,
    report: Option<bool>,
}

impl Plan {
    /// Reads and validates the plan at `path`, with the survey schemas it names.
    ///
    /// # Errors
    /// [`Error::Toml`] for a file that does not parse, [`Error::Config`] naming the
    /// plan line for an impossible value, and any schema or band-file error.
    pub fn from_file(path: &Path) -> Result<Plan> {
        let text = read_toml_text(path)?;
        let raw: RawPlan = toml::from_str(&text).map_err(|e| toml_error(path, &text, &e))?;
        let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
        let resolve = |p: &str| -> PathBuf {
            let p = PathBuf::from(p);
            if p.is_absolute() { p } else { base.join(p) }
        };
        let err = |span: std::ops::Range<usize>, message: String| {
            Error::config(path, line_of_offset(&text, span.start), message)
        };
        let mut library = BandLibrary::builtin();
        if let Some(bands) = &raw.bands {
            library.load_user_file(&resolve(bands))?;
        }
        let epoch = *raw.field.reference_epoch.get_ref();
        if !crate::catalog::schema::EPOCH_RANGE_YR.contains(&epoch) {
            return Err(err(
                raw.field.reference_epoch.span(),
                format!(
                    "reference_epoch {epoch} is outside 1800 to 2200; expected a Julian year such as 2016.0"
                ),
            ));
        }
        let mut catalogs: Vec<PlanCatalog> = Vec::new();
        for c in &raw.catalog {
            let rc = c.get_ref();
            let schema = SurveySchema::from_file(&resolve(&rc.schema), &library)?;
            if catalogs.iter().any(|k| k.name == schema.survey) {
                return Err(err(
                    c.span(),
                    format!(
                        "two catalogs use survey name \"{}\"; each catalog needs its own survey name",
                        schema.survey
                    ),
                ));
            }
            for (value, key) in [
                (rc.systematic_arcsec, "systematic_arcsec"),
                (rc.resolution_arcsec, "resolution_arcsec"),
            ] {
                if let Some(v) = value
                    && !(0.0..=MAX_ARCSEC).contains(&v)
                {
                    return Err(err(
                        c.span(),
                        format!("{key} must be a number of arcsec in [0, {MAX_ARCSEC}], found {v}"),
                    ));
                }
            }
            if let Some(o) = rc.coverage_order
                && o > 29
            {
                return Err(err(
                    c.span(),
                    format!("coverage_order {o} is beyond HEALPix order 29"),
                ));
            }
            let bands = schema
                .bands
                .iter()
                .map(|b| BandSettings {
                    id: b.band.id.clone(),
                    wavelength_um: b.band.wavelength_um,
                    has_flux: b.has_flux(),
                    resolution_arcsec: b.resolution_arcsec,
                })
                .collect();
            catalogs.push(PlanCatalog {
                name: schema.survey.clone(),
                file: resolve(&rc.file),
                schema,
                settings: CatalogSettings {
                    // Without a fixed floor, the floor measured against the
                    // astrometric reference is used (0 when it cannot be measured).
                    systematic_arcsec: rc.systematic_arcsec.unwrap_or(0.0),
                    floor_from_data: rc.systematic_arcsec.is_none(),
                    resolution_arcsec: rc.resolution_arcsec,
                    bands,
                },
                coverage: rc.coverage.as_deref().map(resolve),
                coverage_order: rc.coverage_order,
            });
        }
        if catalogs.is_empty() {
            return Err(Error::config(path, 0, "the plan lists no [[catalog]]"));
        }
        let index_of = |name: &str| catalogs.iter().position(|c| c.name == name);
        let known = || {
            catalogs
                .iter()
                .map(|c| c.name.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        };

        let m = raw.matching.unwrap_or_default();
        let mut matching = MatchConfig::new(catalogs.len(), epoch);
        matching.catalogs = catalogs.iter().map(|c| c.settings.clone()).collect();
        if let Some(t) = &m.tolerance {
            matching.tolerance = tolerance(t, &err)?;
        }
        for p in &m.pair {
            let rp = p.get_ref();
            let [a, b] = rp.catalogs.as_slice() else {
                return Err(err(
                    p.span(),
                    "a [[match.pair]] names exactly two catalogs".into(),
                ));
            };
            let (Some(ia), Some(ib)) = (index_of(a), index_of(b)) else {
                return Err(err(
                    p.span(),
                    format!(
                        "[[match.pair]] names \"{a}\" and \"{b}\"; the catalogs are: {}",
                        known()
                    ),
                ));
            };
            matching
                .pair_tolerance
                .insert((ia.min(ib), ia.max(ib)), tolerance(&rp.tolerance, &err)?);
        }
        if let Some(p) = &m.min_probability {
            let v = *p.get_ref();
            if !(0.0..=1.0).contains(&v) {
                return Err(err(
                    p.span(),
                    format!("min_probability must lie in [0, 1], found {v}"),
                ));
            }
            matching.min_probability = v;
        }
        if let Some(p) = &m.companion_share_limit {
            let v = *p.get_ref();
            if !(0.0..=0.5).contains(&v) {
                return Err(err(
                    p.span(),
                    format!(
                        "companion_share_limit must lie in [0, 0.5] (the companions' share of a coarse source's flux below which the brightest keeps it; 0: never), found {v}"
                    ),
                ));
            }
            matching.companion_share_limit = v;
        }
        if let Some(f) = &m.common_fraction {
            let v = *f.get_ref();
            if !(v > 0.0 && v <= 1.0) {
                return Err(err(
                    f.span(),
                    format!("common_fraction must lie in (0, 1], found {v}"),
                ));
            }
            matching.common_fraction = v;
        }
        if let Some(f) = &m.max_motion_masyr {
            let v = *f.get_ref();
            if !(0.0..=MAX_MOTION_LIMIT_MASYR).contains(&v) {
                return Err(err(
                    f.span(),
                    format!(
                        "max_motion_masyr must lie in [0, {MAX_MOTION_LIMIT_MASYR}] mas/yr (0 turns moving objects off), found {v}"
                    ),
                ));
            }
            matching.max_motion_masyr = v;
        }
        if let Some(f) = &m.moving_fraction {
            let v = *f.get_ref();
            if !(v > 0.0 && v < 1.0) {
                return Err(err(
                    f.span(),
                    format!("moving_fraction must lie in (0, 1), found {v}"),
                ));
            }
            matching.moving_fraction = v;
        }
        if let Some(o) = &m.partition_order {
            let v = *o.get_ref();
            if v > 20 {
                return Err(err(
                    o.span(),
                    format!("partition_order {v} is too fine; use 0 to 20"),
                ));
            }
            matching.partition_order = v;
        }
        for p in m.primary.iter().flatten() {
            let Some(i) = index_of(p.get_ref()) else {
                return Err(err(
                    p.span(),
                    format!(
                        "primary catalog \"{}\" is not in the plan; the catalogs are: {}",
                        p.get_ref(),
                        known()
                    ),
                ));
            };
            matching.primary.push(i);
        }
        let astrometric_reference = match &m.astrometric_reference {
            None => None,
            Some(r) => Some(index_of(r.get_ref()).ok_or_else(|| {
                err(
                    r.span(),
                    format!(
                        "astrometric_reference \"{}\" is not in the plan; the catalogs are: {}",
                        r.get_ref(),
                        known()
                    ),
                )
            })?),
        };
        let correct_offsets = m.correct_offsets.unwrap_or(false);
        if correct_offsets && astrometric_reference.is_none() {
            return Err(Error::config(
                path,
                crate::catalog::schema::line_of_key(&text, "correct_offsets"),
                "correct_offsets needs an astrometric_reference to measure offsets against",
            ));
        }
        let area_sr = match &raw.field.area_deg2 {
            None => None,
            Some(a) => {
                let v = *a.get_ref();
                if !(v > 0.0 && v <= FULL_SKY_DEG2) {
                    return Err(err(
                        a.span(),
                        format!(
                            "area_deg2 must lie in (0, {FULL_SKY_DEG2}] (the whole sky), found {v}"
                        ),
                    ));
                }
                Some(v * (std::f64::consts::PI / 180.0).powi(2))
            }
        };
        let mut exports = Vec::new();
        for e in &raw.output.exports {
            exports.push(match e.get_ref().as_str() {
                "csv" => ExportFormat::Csv,
                "fits" => ExportFormat::Fits,
                "votable" => ExportFormat::Votable,
                other => {
                    return Err(err(
                        e.span(),
                        format!("export \"{other}\" is unknown; expected csv, fits or votable"),
                    ));
                }
            });
        }
        let tables = match &raw.output.tables {
            None => OutputTables::default(),
            Some(list) => {
                let mut t = OutputTables {
                    objects: false,
                    photometry: false,
                    links: false,
                };
                for name in list {
                    match name.get_ref().as_str() {
                        "objects" => t.objects = true,
                        "photometry" => t.photometry = true,
                        "links" => t.links = true,
                        other => {
                            return Err(err(
                                name.span(),
                                format!(
                                    "table \"{other}\" is unknown; expected objects, photometry or links"
                                ),
                            ));
                        }
                    }
                }
                if !(t.objects || t.photometry || t.links) {
                    return Err(err(
                        raw.output
                            .tables
                            .as_ref()
                            .and_then(|l| l.first())
                            .map_or(0..0, |n| n.span()),
                        "tables must name at least one of objects, photometry, links".into(),
                    ));
                }
                t
            }
        };
        Ok(Plan {
            field: raw.field.name,
            catalogs,
            matching,
            area_sr,
            astrometric_reference,
            correct_offsets,
            false_matches: m.false_matches.unwrap_or(true),
            output: resolve(&raw.output.folder),
            exports,
            tables,
            skip_bad_rows: raw.output.skip_bad_rows.unwrap_or(false),
            report: raw.output.report.unwrap_or(true),
            path: path.to_path_buf(),
            science: crate::science::ScienceSettings::from_plan_text(&text, path)?,
            text,
        })
    }
}

fn tolerance(
    t: &Spanned<RawTolerance>,
    err: &impl Fn(std::ops::Range<usize>, String) -> Error,
) -> Result<Tolerance> {
    let r = t.get_ref();
    let positive = |v: Option<f64>, key: &str| -> Result<f64> {
        let max = if key == "k" {
            MAX_TOLERANCE_K
        } else {
            MAX_ARCSEC
        };
        match v {
            Some(x) if x > 0.0 && x <= max => Ok(x),
            Some(x) => Err(err(
                t.span(),
                format!("tolerance {key} must lie in (0, {max}], found {x}"),
            )),
            None => Err(err(
                t.span(),
                format!("tolerance of kind \"{}\" needs \"{key}\"", r.kind),
            )),
        }
    };
    match r.kind.as_str() {
        "radius" => Ok(Tolerance::Radius {
            arcsec: positive(r.arcsec, "arcsec")?,
        }),
        "sigma" => Ok(Tolerance::Sigma {
            k: positive(r.k, "k")?,
            max_arcsec: positive(r.max_arcsec, "max_arcsec")?,
        }),
        other => Err(err(
            t.span(),
            format!("tolerance kind \"{other}\" is unknown; expected \"radius\" or \"sigma\""),
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Writes a schema and a plan into a temporary folder; returns the plan path.
    fn setup(plan: &str) -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let schema = "survey = \"opt\"\nformat = \"csv\"\nid = \"id\"\n[position]\nra = \"ra\"\ndec = \"dec\"\nerror = { kind = \"fixed\", arcsec = 0.1 }\n[epoch]\nyear = 2010.0\n[[band]]\nband = \"jc_v\"\nvalue = \"v\"\nunit = \"vega_mag\"\nno_error = \"unknown\"\n";
        std::fs::write(dir.path().join("opt.toml"), schema).unwrap();
        std::fs::write(
            dir.path().join("nir.toml"),
            schema.replace("\"opt\"", "\"nir\""),
        )
        .unwrap();
        let path = dir.path().join("plan.toml");
        std::fs::write(&path, plan).unwrap();
        (dir, path)
    }

    const PLAN: &str = r#"[field]
name = "f"
reference_epoch = 2016.0

[match]
tolerance = { kind = "radius", arcsec = 1.5 }
astrometric_reference = "opt"
correct_offsets = true

[[match.pair]]
catalogs = ["opt", "nir"]
tolerance = { kind = "sigma", k = 3.0, max_arcsec = 4.0 }

[[catalog]]
file = "opt.csv"
schema = "opt.toml"
resolution_arcsec = 1.0

[[catalog]]
file = "nir.csv"
schema = "nir.toml"

[output]
folder = "out"
exports = ["csv", "votable"]
"#;

    #[test]
    fn a_good_plan() {
        let (dir, path) = setup(PLAN);
        let plan = Plan::from_file(&path).unwrap();
        assert_eq!(plan.catalogs.len(), 2);
        assert_eq!(plan.catalogs[0].file, dir.path().join("opt.csv"));
        assert_eq!(plan.output, dir.path().join("out"));
        assert_eq!(plan.matching.tolerance, Tolerance::Radius { arcsec: 1.5 });
        assert_eq!(
            plan.matching.tolerance_for(1, 0),
            Tolerance::Sigma {
                k: 3.0,
                max_arcsec: 4.0
            }
        );
        assert_eq!(plan.matching.catalogs[0].resolution_arcsec, Some(1.0));
        assert_eq!(plan.astrometric_reference, Some(0));
        assert_eq!(plan.exports, vec![ExportFormat::Csv, ExportFormat::Votable]);
    }

    #[test]
    fn errors_name_the_plan_line() {
        let (_dir, path) = setup(&PLAN.replace(
            "catalogs = [\"opt\", \"nir\"]",
            "catalogs = [\"opt\", \"mir\"]",
        ));
        let err = Plan::from_file(&path).unwrap_err().to_string();
        assert!(
            err.ends_with(
                "plan.toml:10: [[match.pair]] names \"opt\" and \"mir\"; the catalogs are: opt, nir"
            ),
            "{err}"
        );

        let (_dir, path) = setup(&PLAN.replace("\"votable\"", "\"hdf5\""));
        let err = Plan::from_file(&path).unwrap_err().to_string();
        assert!(
            err.ends_with(
                "plan.toml:25: export \"hdf5\" is unknown; expected csv, fits or votable"
            ),
            "{err}"
        );

        let (_dir, path) = setup(&PLAN.replace("astrometric_reference = \"opt\"\n", ""));
        let err = Plan::from_file(&path).unwrap_err().to_string();
        assert!(
            err.ends_with("plan.toml:7: correct_offsets needs an astrometric_reference to measure offsets against"),
            "{err}"
        );

        let (_dir, path) =
            setup(&PLAN.replace("kind = \"radius\", arcsec = 1.5", "kind = \"radius\""));
        let err = Plan::from_file(&path).unwrap_err().to_string();
        assert!(
            err.ends_with("plan.toml:6: tolerance of kind \"radius\" needs \"arcsec\""),
            "{err}"
        );

        let (_dir, path) = setup(&PLAN.replace("schema = \"nir.toml\"", "schema = \"opt.toml\""));
        let err = Plan::from_file(&path).unwrap_err().to_string();
        assert!(
            err.contains("plan.toml:19: two catalogs use survey name \"opt\""),
            "{err}"
        );
    }
}
