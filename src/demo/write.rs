//! Writing the demo folder: each survey's catalog in its own format and conventions,
//! its survey schema, the `harrier` coverage map, the plan, the truth and a README.
//!
//! Per-survey conventions (see also the README this module writes):
//!
//! | survey | file | photometry | non-detections |
//! | --- | --- | --- | --- |
//! | `ask` | Parquet | Gaia-like Vega magnitudes | absent; BP/RP null below S/N 3 |
//! | `kos` | CSV, sexagesimal, `#` header | SDSS-like asinh magnitudes | kept as (possibly negative-flux) asinh magnitudes; −9999 = no measurement |
//! | `lantern` | VOTable | 2MASS-like Vega magnitudes | quality letter `U`: the magnitude is a 95 % upper limit; 99.999 = no measurement |
//! | `harrier` | FITS | WISE-like Vega magnitudes; W4 with its own beam and footprint | a magnitude without error is a 95 % upper limit; empty = not detected (or W4 not observed) |
//! | `cinder` | gzip CSV | IRAC-like µJy, some rows forced (`fphot`) | every flux kept with its error; S/N < 3 read as a limit |
//! | `ember` | FITS | MIPS-like 24 µm mJy | absent below 0.5 mJy |
//!
//! A 95 % upper limit is F_lim = max(F, 0) + 1.645σ (one-sided Gaussian quantile 1.645 = Φ⁻¹(0.95), common practice).
//! Magnitude errors are first order, σ_m = (2.5/ln 10) σ_F / F (Pogson's ratio, common practice).

use std::collections::{BTreeSet, HashMap};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::{ArrayRef, Float64Array, Int64Array, RecordBatch, StringArray};
use arrow::datatypes::{DataType, Field, Schema, SchemaRef};

use crate::error::{Error, Result};
use crate::output::csv::write_csv;
use crate::output::fits::write_fits;
use crate::output::parquet::ParquetOutput;
use crate::output::votable::write_votable;
use crate::photometry::BandLibrary;
use crate::photometry::asinh::maggies_to_asinh_mag;

use super::surveys::{HarrierCoverage, ObservedSource, SurveyObservation};
use super::truth::{BandGrid, DEMO_BANDS, Kind, TruthObject};
use super::{DemoSummary, FIELD_DEC_DEG, FIELD_RA_DEG, SurveySummary};

/// 2.5 / ln 10 = 1.0857362: magnitude error per fractional flux error (Pogson's ratio, common practice).
const MAG_PER_LN_FLUX: f64 = 2.5 / std::f64::consts::LN_10;
/// One-sided 95 % Gaussian quantile, 1.645 = Φ⁻¹(0.95) (common practice).
const Z_95: f64 = 1.645;
/// First `source_id` of `ask`.
const ASK_ID_BASE: i64 = 4_102_000_001;
/// First identifier of `lantern`.
const LANTERN_ID_BASE: i64 = 1_000_001;

/// Writes every file of the demo folder; see [`super::write_demo_field`].
///
/// # Errors
/// I/O and writer errors.
pub fn write_all(
    dir: &Path,
    seed: u64,
    truth: &[TruthObject],
    observed: &[SurveyObservation],
) -> Result<DemoSummary> {
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let mut files = Vec::new();
    let mut members: Vec<(String, String, Option<String>)> = Vec::new();
    let mut surveys = Vec::new();
    for obs in observed {
        let name = obs.def.name;
        let order = sort_order(name, &obs.sources);
        let sources: Vec<&ObservedSource> = order.iter().map(|&i| &obs.sources[i]).collect();
        let (ids, written) = match name {
            "ask" => write_ask(dir, &sources)?,
            "kos" => write_kos(dir, &sources)?,
            "lantern" => write_lantern(dir, &sources)?,
            "harrier" => write_harrier(dir, &sources)?,
            "cinder" => write_cinder(dir, &sources)?,
            "ember" => write_ember(dir, &sources)?,
            other => return Err(Error::Usage(format!("no writer for demo survey {other}"))),
        };
        files.extend(written);
        for (id, s) in ids.iter().zip(&sources) {
            if s.members.is_empty() {
                members.push((name.to_string(), id.clone(), None));
            }
            for &m in &s.members {
                members.push((
                    name.to_string(),
                    id.clone(),
                    Some(truth[m].truth_id.clone()),
                ));
            }
        }
        surveys.push(SurveySummary {
            survey: name.to_string(),
            sources: sources.len(),
            artefacts: sources.iter().filter(|s| s.members.is_empty()).count(),
            blends: sources.iter().filter(|s| s.members.len() > 1).count(),
        });
    }
    let moc = dir.join("harrier_moc.txt");
    write_text(&moc, &HarrierCoverage::new().to_moc_ascii())?;
    files.push(moc);
    let plan = dir.join("plan.toml");
    write_text(&plan, &plan_text(observed))?;
    files.push(plan);
    files.push(write_truth_objects(dir, truth)?);
    files.push(write_truth_members(dir, &members)?);
    let truth_counts: Vec<(String, usize)> = Kind::ALL
        .iter()
        .map(|k| {
            (
                k.as_str().to_string(),
                truth.iter().filter(|o| o.kind == *k).count(),
            )
        })
        .collect();
    let readme = dir.join("README.md");
    write_text(&readme, &readme_text(seed, &truth_counts, &surveys))?;
    files.push(readme);
    Ok(DemoSummary {
        seed,
        files,
        truth_counts,
        surveys,
    })
}

/// Row order of a survey's catalog: by RA (`ask`, `kos`, `harrier`), by Dec in scan
/// strips (`lantern`, `cinder`), by decreasing flux (`ember`); ties by generation order.
fn sort_order(name: &str, sources: &[ObservedSource]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..sources.len()).collect();
    order.sort_by(|&a, &b| {
        let (x, y) = (&sources[a], &sources[b]);
        let key = match name {
            "lantern" | "cinder" => x.dec_deg.total_cmp(&y.dec_deg),
            "ember" => y.flux_jy[0].total_cmp(&x.flux_jy[0]),
            _ => x.ra_deg.total_cmp(&y.ra_deg),
        };
        key.then(a.cmp(&b))
    });
    order
}

fn write_text(path: &Path, text: &str) -> Result<()> {
    std::fs::write(path, text).map_err(|e| Error::io(path, e))
}

/// `x` rounded to `decimals` decimal places.
fn round(x: f64, decimals: i32) -> f64 {
    let f = 10f64.powi(decimals);
    (x * f).round() / f
}

/// `x` rounded to `digits` significant digits.
fn round_sig(x: f64, digits: i32) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let decimals = digits - 1 - x.abs().log10().floor() as i32;
    round(x, decimals)
}

/// Vega (or any Pogson) magnitude of a positive flux: m = −2.5 log₁₀(F / F₀).
fn pogson_mag(flux_jy: f64, zero_point_jy: f64) -> f64 {
    -2.5 * (flux_jy / zero_point_jy).log10()
}

/// First-order magnitude error (2.5/ln 10) σ/F, rounded to 0.001 and at least 0.001.
fn mag_err(flux_jy: f64, sigma_jy: f64) -> f64 {
    round(MAG_PER_LN_FLUX * sigma_jy / flux_jy, 3).max(0.001)
}

/// A 95 % upper limit, max(F, 0) + 1.645σ (common practice).
fn limit_95(flux_jy: f64, sigma_jy: f64) -> f64 {
    flux_jy.max(0.0) + Z_95 * sigma_jy
}

/// Columns of a table under construction.
#[derive(Default)]
struct Columns {
    fields: Vec<Field>,
    arrays: Vec<ArrayRef>,
}

impl Columns {
    fn field(name: &str, data_type: DataType, unit: &str) -> Field {
        let f = Field::new(name, data_type, true);
        if unit.is_empty() {
            f
        } else {
            f.with_metadata(HashMap::from([("unit".to_string(), unit.to_string())]))
        }
    }

    fn f64(&mut self, name: &str, unit: &str, values: Vec<Option<f64>>) {
        self.fields.push(Self::field(name, DataType::Float64, unit));
        self.arrays.push(Arc::new(Float64Array::from(values)));
    }

    fn i64(&mut self, name: &str, values: Vec<i64>) {
        self.fields.push(Self::field(name, DataType::Int64, ""));
        self.arrays.push(Arc::new(Int64Array::from(values)));
    }

    fn text(&mut self, name: &str, values: Vec<Option<String>>) {
        self.fields.push(Self::field(name, DataType::Utf8, ""));
        self.arrays.push(Arc::new(StringArray::from(values)));
    }

    fn finish(self, path: &Path) -> Result<(SchemaRef, RecordBatch)> {
        let schema: SchemaRef = Arc::new(Schema::new(self.fields));
        let batch = RecordBatch::try_new(schema.clone(), self.arrays)
            .map_err(|e| Error::columnar(path, e))?;
        Ok((schema, batch))
    }
}

fn zero_point(band: &str) -> f64 {
    BandGrid::builtin().zero_point_jy[BandGrid::index(band)]
}

/// Writes the schema text and returns its path.
fn write_schema(dir: &Path, name: &str, text: &str) -> Result<PathBuf> {
    let path = dir.join(format!("{name}.toml"));
    write_text(&path, text)?;
    Ok(path)
}

/// `ask`: Parquet, degrees, RA/Dec sigmas in mas, proper motions, G/BP/RP Vega magnitudes.
fn write_ask(dir: &Path, sources: &[&ObservedSource]) -> Result<(Vec<String>, Vec<PathBuf>)> {
    let path = dir.join("ask.parquet");
    let zps = [
        zero_point("gaia_g"),
        zero_point("gaia_bp"),
        zero_point("gaia_rp"),
    ];
    let ids: Vec<i64> = (0..sources.len() as i64).map(|i| ASK_ID_BASE + i).collect();
    let mut c = Columns::default();
    c.i64("source_id", ids.clone());
    c.f64(
        "ra",
        "deg",
        sources.iter().map(|s| Some(s.ra_deg)).collect(),
    );
    c.f64(
        "dec",
        "deg",
        sources.iter().map(|s| Some(s.dec_deg)).collect(),
    );
    // Axes errors: err_b is along RA (true angle), err_a along Dec; arcsec → mas.
    c.f64(
        "ra_error",
        "mas",
        sources
            .iter()
            .map(|s| Some(round(s.err_b_arcsec * 1e3, 4)))
            .collect(),
    );
    c.f64(
        "dec_error",
        "mas",
        sources
            .iter()
            .map(|s| Some(round(s.err_a_arcsec * 1e3, 4)))
            .collect(),
    );
    c.f64(
        "pmra",
        "mas/yr",
        sources
            .iter()
            .map(|s| s.pm_masyr.map(|p| round(p.0, 3)))
            .collect(),
    );
    c.f64(
        "pmdec",
        "mas/yr",
        sources
            .iter()
            .map(|s| s.pm_masyr.map(|p| round(p.1, 3)))
            .collect(),
    );
    for (b, name) in ["g", "bp", "rp"].iter().enumerate() {
        // G always detected (the detection band); BP/RP only above S/N 3.
        let keep = |s: &ObservedSource| b == 0 || s.flux_jy[b] >= 3.0 * s.sigma_jy[b];
        c.f64(
            &format!("{name}_mag"),
            "mag",
            sources
                .iter()
                .map(|s| keep(s).then(|| round(pogson_mag(s.flux_jy[b], zps[b]), 4)))
                .collect(),
        );
        c.f64(
            &format!("{name}_mag_err"),
            "mag",
            sources
                .iter()
                .map(|s| {
                    keep(s)
                        .then(|| round(MAG_PER_LN_FLUX * s.sigma_jy[b] / s.flux_jy[b], 4).max(1e-4))
                })
                .collect(),
        );
    }
    let (schema, batch) = c.finish(&path)?;
    let metadata = vec![(
        "ask.description".to_string(),
        "Ask astrometric survey, field FL-1 (invented demo data)".to_string(),
    )];
    let mut out = ParquetOutput::create(&path, schema, metadata)?;
    out.write(&batch)?;
    out.finish()?;
    let schema_path = write_schema(dir, "ask", ASK_SCHEMA)?;
    Ok((
        ids.iter().map(|i| i.to_string()).collect(),
        vec![path, schema_path],
    ))
}

const ASK_SCHEMA: &str = r#"# Survey schema for the invented Ask astrometric survey (demo data, field FL-1).
# Positions in degrees at epoch 2016.0 with separate RA and Dec 1-sigma errors in mas
# (the RA error is a true angle, i.e. already times cos Dec). Proper motions for
# sources brighter than G = 19 (pmra includes cos Dec). G, BP, RP are Vega magnitudes;
# sources fainter than G = 20.5 are not in the catalog, and BP/RP are empty (null)
# when too faint to measure.
survey = "ask"
description = "Ask astrometric optical survey, field FL-1 (invented)"
format = "parquet"
id = "source_id"

[position]
ra = "ra"
dec = "dec"
format = "degrees"
error = { kind = "axes", ra = "ra_error", dec = "dec_error", unit = "mas" }

[epoch]
year = 2016.0

[proper_motion]
ra = "pmra"
dec = "pmdec"
ra_includes_cos_dec = true

[[band]]
band = "gaia_g"
value = "g_mag"
unit = "vega_mag"
error = "g_mag_err"
depth = 20.5

[[band]]
band = "gaia_bp"
value = "bp_mag"
unit = "vega_mag"
error = "bp_mag_err"

[[band]]
band = "gaia_rp"
value = "rp_mag"
unit = "vega_mag"
error = "rp_mag_err"
"#;

/// RA in hours as `hh:mm:ss.sss`.
fn ra_hms(ra_deg: f64) -> String {
    let ms = (ra_deg * 240.0 * 1000.0).round() as i64; // 1° = 240 s of time
    format!(
        "{:02}:{:02}:{:02}.{:03}",
        ms / 3_600_000,
        (ms / 60_000) % 60,
        (ms / 1000) % 60,
        ms % 1000
    )
}

/// Dec as `±dd:mm:ss.ss`.
fn dec_dms(dec_deg: f64) -> String {
    let sign = if dec_deg < 0.0 { '-' } else { '+' };
    let cs = (dec_deg.abs() * 360_000.0).round() as i64; // centi-arcseconds
    format!(
        "{sign}{:02}:{:02}:{:02}.{:02}",
        cs / 360_000,
        (cs / 6000) % 60,
        (cs / 100) % 60,
        cs % 100
    )
}

/// A `kos` designation from the position, truncated (not rounded): `KOS Jhhmmss.ss±ddmmss.s`.
fn kos_designation(ra_deg: f64, dec_deg: f64) -> String {
    let cs = (ra_deg * 240.0 * 100.0).floor() as i64;
    let sign = if dec_deg < 0.0 { '-' } else { '+' };
    let ds = (dec_deg.abs() * 36_000.0).floor() as i64;
    format!(
        "KOS J{:02}{:02}{:02}.{:02}{sign}{:02}{:02}{:02}.{}",
        cs / 360_000,
        (cs / 6000) % 60,
        (cs / 100) % 60,
        cs % 100,
        ds / 36_000,
        (ds / 600) % 60,
        (ds / 10) % 60,
        ds % 10
    )
}

/// Brightest asinh magnitude `kos` measures; brighter is saturated (written as −9999).
const KOS_SATURATION_MAG: f64 = 14.0;
/// `kos` null sentinel.
const KOS_NULL: f64 = -9999.0;

/// `kos`: CSV with a `#` header, sexagesimal positions, circular errors, asinh magnitudes.
fn write_kos(dir: &Path, sources: &[&ObservedSource]) -> Result<(Vec<String>, Vec<PathBuf>)> {
    let path = dir.join("kos.csv");
    let library = BandLibrary::builtin();
    let bands = ["sdss_u", "sdss_g", "sdss_r", "sdss_i", "sdss_z"];
    let mut ids: Vec<String> = Vec::new();
    let mut used = BTreeSet::new();
    for s in sources {
        let base = kos_designation(s.ra_deg, s.dec_deg);
        let mut id = base.clone();
        let mut n = 2;
        while !used.insert(id.clone()) {
            id = format!("{base}_{n}");
            n += 1;
        }
        ids.push(id);
    }
    let mut c = Columns::default();
    c.text("objid", ids.iter().cloned().map(Some).collect());
    c.text(
        "ra_hms",
        sources.iter().map(|s| Some(ra_hms(s.ra_deg))).collect(),
    );
    c.text(
        "dec_dms",
        sources.iter().map(|s| Some(dec_dms(s.dec_deg))).collect(),
    );
    c.f64(
        "pos_err",
        "arcsec",
        sources
            .iter()
            .map(|s| Some(round(s.err_a_arcsec, 3).max(0.001)))
            .collect(),
    );
    c.f64(
        "petro_r50",
        "arcsec",
        sources
            .iter()
            .map(|s| s.half_light_arcsec.map(|r| round(r, 2)))
            .collect(),
    );
    for (b, id) in bands.iter().enumerate() {
        let band = library.get(id).expect("SDSS-like bands are built in");
        let f0 = band.zero_point_jy.expect("AB bands have a zero point");
        let softening = band
            .asinh_softening
            .expect("SDSS-like bands have a softening");
        let offset = band.ab_offset_mag.unwrap_or(0.0);
        let (mut mags, mut errs) = (Vec::new(), Vec::new());
        for s in sources {
            let x = s.flux_jy[b] / f0;
            let sigma_x = s.sigma_jy[b] / f0;
            // Catalog magnitude m such that m + offset_mag is the AB asinh magnitude.
            let mag = maggies_to_asinh_mag(x, softening) - offset;
            // dm/dx = −(2.5/ln 10) / √(x² + 4b²) (Lupton, Gunn & Szalay 1999).
            let err = MAG_PER_LN_FLUX * sigma_x / (x * x + 4.0 * softening * softening).sqrt();
            if s.lost[b] || mag < KOS_SATURATION_MAG {
                mags.push(Some(KOS_NULL));
                errs.push(Some(KOS_NULL));
            } else {
                mags.push(Some(round(mag, 3)));
                errs.push(Some(round(err, 3).max(0.001)));
            }
        }
        let short = &id[5..];
        c.f64(short, "mag", mags);
        c.f64(&format!("err_{short}"), "mag", errs);
    }
    let (schema, batch) = c.finish(&path)?;
    let part = dir.join(".kos.csv.part");
    write_csv(&part, &schema, &[batch])?;
    let body = std::fs::read_to_string(&part).map_err(|e| Error::io(&part, e))?;
    std::fs::remove_file(&part).map_err(|e| Error::io(&part, e))?;
    let header = "# Kos optical imaging survey, field FL-1 (invented demo data; see README.md)\n\
                  # positions: RA hh:mm:ss.sss, Dec +dd:mm:ss.ss, epoch 2000.0; pos_err: 1-sigma, arcsec\n\
                  # petro_r50: half-light radius of extended sources, arcsec (empty: point source)\n\
                  # magnitudes: asinh (Lupton et al. 1999); u and z are on the survey system (AB = u - 0.04, z + 0.02)\n\
                  # -9999: no measurement (saturated or lost)\n";
    write_text(&path, &format!("{header}{body}"))?;
    let schema_path = write_schema(dir, "kos", KOS_SCHEMA)?;
    Ok((ids, vec![path, schema_path]))
}

const KOS_SCHEMA: &str = r##"# Survey schema for the invented Kos optical imaging survey (demo data, field FL-1).
# Positions are sexagesimal text (RA in hours), epoch 2000.0, with a circular 1-sigma
# error in arcsec; extended sources have a half-light radius in petro_r50, whose
# centroids scatter by 0.2 x that radius on top of the quoted error. Magnitudes are asinh magnitudes (Lupton, Gunn & Szalay 1999) with
# the band library's softening; faint sources keep their magnitudes even when the flux
# is negative. u and z are on the survey's own system: offset_mag applies the
# published AB offsets (u_AB = u - 0.04, z_AB = z + 0.02). -9999 means no measurement.
survey = "kos"
description = "Kos optical imaging survey, field FL-1 (invented)"
format = "csv"
id = "objid"

[csv]
delimiter = ","
comment = "#"

[position]
ra = "ra_hms"
dec = "dec_dms"
format = "sexagesimal"
error = { kind = "circular", column = "pos_err", unit = "arcsec" }
extended = { size = "petro_r50", unit = "arcsec", kind = "half_light", coeff = 0.2 }

[epoch]
year = 2000.0

[[band]]
band = "sdss_u"
value = "u"
unit = "asinh_mag"
error = "err_u"
nulls = [-9999]
offset_mag = -0.04

[[band]]
band = "sdss_g"
value = "g"
unit = "asinh_mag"
error = "err_g"
nulls = [-9999]

[[band]]
band = "sdss_r"
value = "r"
unit = "asinh_mag"
error = "err_r"
nulls = [-9999]

[[band]]
band = "sdss_i"
value = "i"
unit = "asinh_mag"
error = "err_i"
nulls = [-9999]

[[band]]
band = "sdss_z"
value = "z"
unit = "asinh_mag"
error = "err_z"
nulls = [-9999]
offset_mag = 0.02
"##;

/// `lantern` null sentinel.
const LANTERN_NULL: f64 = 99.999;

/// `lantern`: VOTable, error ellipses, per-source MJD, J/H/Ks with a quality string.
fn write_lantern(dir: &Path, sources: &[&ObservedSource]) -> Result<(Vec<String>, Vec<PathBuf>)> {
    let path = dir.join("lantern.vot");
    let zps = [
        zero_point("tmass_j"),
        zero_point("tmass_h"),
        zero_point("tmass_ks"),
    ];
    let ids: Vec<i64> = (0..sources.len() as i64)
        .map(|i| LANTERN_ID_BASE + i)
        .collect();
    let mut c = Columns::default();
    c.i64("lid", ids.clone());
    c.f64(
        "ra",
        "deg",
        sources.iter().map(|s| Some(round(s.ra_deg, 7))).collect(),
    );
    c.f64(
        "dec",
        "deg",
        sources.iter().map(|s| Some(round(s.dec_deg, 7))).collect(),
    );
    c.f64(
        "err_maj",
        "arcsec",
        sources
            .iter()
            .map(|s| Some(round(s.err_a_arcsec, 3).max(0.001)))
            .collect(),
    );
    c.f64(
        "err_min",
        "arcsec",
        sources
            .iter()
            .map(|s| Some(round(s.err_b_arcsec, 3).max(0.001)))
            .collect(),
    );
    c.f64(
        "err_pa",
        "deg",
        sources
            .iter()
            .map(|s| Some(round(s.err_pa_deg, 1)))
            .collect(),
    );
    // MJD = 51544.5 + 365.25 (year − 2000) (J2000.0 = MJD 51544.5).
    c.f64(
        "mjd",
        "d",
        sources
            .iter()
            .map(|s| Some(round(51_544.5 + 365.25 * (s.epoch_yr - 2000.0), 4)))
            .collect(),
    );
    let mut qual = vec![String::new(); sources.len()];
    for (b, name) in ["j", "h", "k"].iter().enumerate() {
        let (mut mags, mut errs) = (Vec::new(), Vec::new());
        for (s, q) in sources.iter().zip(qual.iter_mut()) {
            let (f, sigma) = (s.flux_jy[b], s.sigma_jy[b]);
            let snr = f / sigma;
            let (mag, err, letter) = if s.lost[b] {
                (LANTERN_NULL, Some(LANTERN_NULL), 'X')
            } else if snr < 3.0 {
                (round(pogson_mag(limit_95(f, sigma), zps[b]), 3), None, 'U')
            } else {
                let letter = if snr >= 10.0 {
                    'A'
                } else if snr >= 7.0 {
                    'B'
                } else if snr >= 5.0 {
                    'C'
                } else {
                    'D'
                };
                (
                    round(pogson_mag(f, zps[b]), 3),
                    Some(mag_err(f, sigma)),
                    letter,
                )
            };
            mags.push(Some(mag));
            errs.push(err);
            q.push(letter);
        }
        c.f64(&format!("{name}mag"), "mag", mags);
        c.f64(&format!("e_{name}mag"), "mag", errs);
    }
    c.text("qual", qual.into_iter().map(Some).collect());
    c.i64(
        "xflg",
        sources
            .iter()
            .map(|s| i64::from(s.half_light_arcsec.is_some()))
            .collect(),
    );
    let (schema, batch) = c.finish(&path)?;
    let params = [
        (
            "survey".to_string(),
            "lantern (invented demo data)".to_string(),
        ),
        ("field".to_string(), "FL-1".to_string()),
        ("photometric_system".to_string(), "Vega".to_string()),
    ];
    write_votable(
        &path,
        &schema,
        &[batch],
        "lantern_fl1",
        "Lantern near-infrared survey, field FL-1 (invented demo data). qual: one letter per band J,H,Ks; U = the magnitude is a 95% confidence upper limit; X = no measurement (99.999). xflg = 1: extended source.",
        &params,
    )?;
    let schema_path = write_schema(dir, "lantern", LANTERN_SCHEMA)?;
    Ok((
        ids.iter().map(|i| i.to_string()).collect(),
        vec![path, schema_path],
    ))
}

const LANTERN_SCHEMA: &str = r#"# Survey schema for the invented Lantern near-infrared survey (demo data, field FL-1).
# Positions in degrees with a 1-sigma error ellipse (arcsec, PA east of north); each
# source has its own epoch as MJD (1998-2001). J, H, Ks are Vega magnitudes; the
# three-letter quality string has one letter per band: A/B/C/D detections by S/N,
# U = the magnitude is a 95% confidence upper limit, X = no measurement (99.999).
# xflg = 1 marks extended sources (no size given: a typical half-light radius of 1").
survey = "lantern"
description = "Lantern near-infrared survey, field FL-1 (invented)"
format = "votable"
id = "lid"

[votable]
table = 0

[position]
ra = "ra"
dec = "dec"
format = "degrees"
error = { kind = "ellipse", major = "err_maj", minor = "err_min", angle = "err_pa", unit = "arcsec" }
extended = { flag = { column = "xflg", bit = 0 }, typical_arcsec = 1.0, coeff = 0.25 }

[epoch]
column = "mjd"
unit = "mjd"

[[band]]
band = "tmass_j"
value = "jmag"
unit = "vega_mag"
error = "e_jmag"
nulls = [99.999]
limit = { kind = "flag", column = "qual", values = ["U"], char = 1 }

[[band]]
band = "tmass_h"
value = "hmag"
unit = "vega_mag"
error = "e_hmag"
nulls = [99.999]
limit = { kind = "flag", column = "qual", values = ["U"], char = 2 }

[[band]]
band = "tmass_ks"
value = "kmag"
unit = "vega_mag"
error = "e_kmag"
nulls = [99.999]
limit = { kind = "flag", column = "qual", values = ["U"], char = 3 }
"#;

/// `harrier`: FITS, RA/Dec sigmas in arcsec, W1–W4 Vega magnitudes; S/N < 2 gives a
/// 95 % upper limit written without an error.
fn write_harrier(dir: &Path, sources: &[&ObservedSource]) -> Result<(Vec<String>, Vec<PathBuf>)> {
    let path = dir.join("harrier.fits");
    let bands = ["wise_w1", "wise_w2", "wise_w3", "wise_w4"];
    let ids: Vec<String> = (1..=sources.len())
        .map(|i| format!("HRR-FL1-{i:05}"))
        .collect();
    let mut c = Columns::default();
    c.text("designation", ids.iter().cloned().map(Some).collect());
    c.f64(
        "ra",
        "deg",
        sources.iter().map(|s| Some(s.ra_deg)).collect(),
    );
    c.f64(
        "dec",
        "deg",
        sources.iter().map(|s| Some(s.dec_deg)).collect(),
    );
    c.f64(
        "sigra",
        "arcsec",
        sources
            .iter()
            .map(|s| Some(round(s.err_b_arcsec, 4).max(1e-4)))
            .collect(),
    );
    c.f64(
        "sigdec",
        "arcsec",
        sources
            .iter()
            .map(|s| Some(round(s.err_a_arcsec, 4).max(1e-4)))
            .collect(),
    );
    for (b, band) in bands.iter().enumerate() {
        let zp = zero_point(band);
        let (mut mags, mut errs) = (Vec::new(), Vec::new());
        for s in sources {
            let (f, sigma) = (s.flux_jy[b], s.sigma_jy[b]);
            if s.lost[b] {
                // Not observed (22 µm outside its footprint) or not detected in a
                // row of the 22 µm band alone.
                mags.push(None);
                errs.push(None);
            } else if f / sigma < 2.0 {
                mags.push(Some(round(pogson_mag(limit_95(f, sigma), zp), 3)));
                errs.push(None);
            } else {
                mags.push(Some(round(pogson_mag(f, zp), 3)));
                errs.push(Some(mag_err(f, sigma)));
            }
        }
        let n = b + 1;
        c.f64(&format!("w{n}mag"), "mag", mags);
        c.f64(&format!("w{n}sig"), "mag", errs);
    }
    c.i64(
        "ext_flg",
        sources
            .iter()
            .map(|s| i64::from(s.half_light_arcsec.is_some()))
            .collect(),
    );
    let (schema, batch) = c.finish(&path)?;
    let cards = [
        ("ORIGIN".to_string(), "fluxloom make-demo".to_string()),
        (
            "SURVEY".to_string(),
            "harrier (invented demo data)".to_string(),
        ),
        ("FIELD".to_string(), "FL-1".to_string()),
        (
            "COMMENT".to_string(),
            "Vega magnitudes; a magnitude without error is a 95% confidence upper limit; NaN: none."
                .to_string(),
        ),
    ];
    write_fits(&path, &schema, &[batch], "HARRIER", &cards)?;
    let schema_path = write_schema(dir, "harrier", HARRIER_SCHEMA)?;
    let moc = dir.join("harrier_w4_moc.txt");
    write_text(&moc, &HarrierCoverage::w4().to_moc_ascii())?;
    Ok((ids, vec![path, schema_path, moc]))
}

const HARRIER_SCHEMA: &str = r#"# Survey schema for the invented Harrier mid-infrared survey (demo data, field FL-1).
# A FITS binary table; positions in degrees at epoch 2010.5 with separate RA and Dec
# 1-sigma errors in arcsec. W1-W4 are Vega magnitudes; a magnitude given without an
# error is a 95% confidence upper limit, an empty one (NaN) no detection. The survey
# covers only the eastern part of the field (harrier_moc.txt); its 22 um band (W4)
# has a 12 arcsec beam and covers only the north of that (harrier_w4_moc.txt), and
# rows found at 22 um alone carry that band only. ext_flg bit 0 marks extended
# sources (no size given: a typical half-light radius of 1").
survey = "harrier"
description = "Harrier mid-infrared survey, field FL-1 (invented)"
format = "fits"
id = "designation"

[fits]
hdu = 1

[position]
ra = "ra"
dec = "dec"
format = "degrees"
error = { kind = "axes", ra = "sigra", dec = "sigdec", unit = "arcsec" }
extended = { flag = { column = "ext_flg", bit = 0 }, typical_arcsec = 1.0, coeff = 0.3 }

[epoch]
year = 2010.5

[[band]]
band = "wise_w1"
value = "w1mag"
unit = "vega_mag"
error = "w1sig"
limit = { kind = "missing_error" }
empty = "not_detected"
depth = 17.0

[[band]]
band = "wise_w2"
value = "w2mag"
unit = "vega_mag"
error = "w2sig"
limit = { kind = "missing_error" }
empty = "not_detected"
depth = 15.8

[[band]]
band = "wise_w3"
value = "w3mag"
unit = "vega_mag"
error = "w3sig"
limit = { kind = "missing_error" }
empty = "not_detected"
depth = 11.6

[[band]]
band = "wise_w4"
value = "w4mag"
unit = "vega_mag"
error = "w4sig"
limit = { kind = "missing_error" }
empty = "not_detected"
depth = 8.2
coverage = "harrier_w4_moc.txt"
resolution_arcsec = 12.0
"#;

/// `cinder`: gzip CSV, forced photometry in µJy in all four bands.
fn write_cinder(dir: &Path, sources: &[&ObservedSource]) -> Result<(Vec<String>, Vec<PathBuf>)> {
    let path = dir.join("cinder.csv.gz");
    let ids: Vec<String> = (1..=sources.len()).map(|i| format!("CIN{i:05}")).collect();
    let mut c = Columns::default();
    c.text("cin_id", ids.iter().cloned().map(Some).collect());
    c.f64(
        "ra",
        "deg",
        sources.iter().map(|s| Some(round(s.ra_deg, 7))).collect(),
    );
    c.f64(
        "dec",
        "deg",
        sources.iter().map(|s| Some(round(s.dec_deg, 7))).collect(),
    );
    c.f64(
        "fwhm",
        "arcsec",
        sources
            .iter()
            .map(|s| s.half_light_arcsec.map(|r| round(2.0 * r, 2)))
            .collect(),
    );
    c.i64(
        "fphot",
        sources.iter().map(|s| i64::from(s.forced)).collect(),
    );
    for (b, name) in ["36", "45", "58", "80"].iter().enumerate() {
        c.f64(
            &format!("f{name}"),
            "uJy",
            sources
                .iter()
                .map(|s| Some(round(s.flux_jy[b] * 1e6, 2)))
                .collect(),
        );
        c.f64(
            &format!("e_f{name}"),
            "uJy",
            sources
                .iter()
                .map(|s| Some(round(s.sigma_jy[b] * 1e6, 2).max(0.01)))
                .collect(),
        );
    }
    let (schema, batch) = c.finish(&path)?;
    let part = dir.join(".cinder.csv.part");
    write_csv(&part, &schema, &[batch])?;
    let body = std::fs::read(&part).map_err(|e| Error::io(&part, e))?;
    std::fs::remove_file(&part).map_err(|e| Error::io(&part, e))?;
    gzip_to(&path, &body)?;
    let schema_path = write_schema(dir, "cinder", CINDER_SCHEMA)?;
    Ok((ids, vec![path, schema_path]))
}

/// Writes `bytes` gzip-compressed, with modification time 0 so the output depends on
/// the content only.
fn gzip_to(path: &Path, bytes: &[u8]) -> Result<()> {
    let file = std::fs::File::create(path).map_err(|e| Error::io(path, e))?;
    let mut gz = flate2::GzBuilder::new()
        .mtime(0)
        .write(file, flate2::Compression::default());
    gz.write_all(bytes).map_err(|e| Error::io(path, e))?;
    gz.finish().map_err(|e| Error::io(path, e))?;
    Ok(())
}

const CINDER_SCHEMA: &str = r#"# Survey schema for the invented Cinder mid-infrared survey (demo data, field FL-1).
# Gzip-compressed CSV; positions in degrees at epoch 2005.0 with a fixed 1-sigma error
# of 0.25 arcsec. Every source has a flux density and error in every band, in
# microjansky, possibly negative; S/N below 3 is read as an upper limit
# max(F, 0) + 3 sigma. fphot = 1 marks rows measured by forced photometry at the
# positions of optical sources the survey did not detect itself. Extended sources
# have a Gaussian FWHM in fwhm (arcsec; empty: point source).
survey = "cinder"
description = "Cinder mid-infrared survey, field FL-1 (invented)"
format = "csv"
id = "cin_id"

[csv]
gzip = true

[position]
ra = "ra"
dec = "dec"
format = "degrees"
error = { kind = "fixed", arcsec = 0.25 }
extended = { size = "fwhm", unit = "arcsec", kind = "gaussian_fwhm", coeff = 0.2 }

[epoch]
year = 2005.0

[forced]
column = "fphot"
values = ["1"]

[[band]]
band = "irac_36"
value = "f36"
unit = "uJy"
error = "e_f36"
limit = { kind = "snr", below = 3.0, rule = "flux_plus_sigma", n = 3.0 }

[[band]]
band = "irac_45"
value = "f45"
unit = "uJy"
error = "e_f45"
limit = { kind = "snr", below = 3.0, rule = "flux_plus_sigma", n = 3.0 }

[[band]]
band = "irac_58"
value = "f58"
unit = "uJy"
error = "e_f58"
limit = { kind = "snr", below = 3.0, rule = "flux_plus_sigma", n = 3.0 }

[[band]]
band = "irac_80"
value = "f80"
unit = "uJy"
error = "e_f80"
limit = { kind = "snr", below = 3.0, rule = "flux_plus_sigma", n = 3.0 }
"#;

/// `ember`: FITS, 24 µm flux densities in mJy, sources down to 0.5 mJy.
fn write_ember(dir: &Path, sources: &[&ObservedSource]) -> Result<(Vec<String>, Vec<PathBuf>)> {
    let path = dir.join("ember.fits");
    let ids: Vec<String> = (1..=sources.len()).map(|i| format!("E24-{i:04}")).collect();
    let mut c = Columns::default();
    c.text("ember_id", ids.iter().cloned().map(Some).collect());
    c.f64(
        "ra",
        "deg",
        sources.iter().map(|s| Some(round(s.ra_deg, 7))).collect(),
    );
    c.f64(
        "dec",
        "deg",
        sources.iter().map(|s| Some(round(s.dec_deg, 7))).collect(),
    );
    c.f64(
        "f24",
        "mJy",
        sources
            .iter()
            .map(|s| Some(round(s.flux_jy[0] * 1e3, 3)))
            .collect(),
    );
    c.f64(
        "e_f24",
        "mJy",
        sources
            .iter()
            .map(|s| Some(round(s.sigma_jy[0] * 1e3, 3).max(0.001)))
            .collect(),
    );
    let (schema, batch) = c.finish(&path)?;
    let cards = [
        ("ORIGIN".to_string(), "fluxloom make-demo".to_string()),
        (
            "SURVEY".to_string(),
            "ember (invented demo data)".to_string(),
        ),
        ("FIELD".to_string(), "FL-1".to_string()),
        (
            "COMMENT".to_string(),
            "24 um flux densities in mJy; sources fainter than 0.5 mJy are not listed.".to_string(),
        ),
    ];
    write_fits(&path, &schema, &[batch], "EMBER", &cards)?;
    let schema_path = write_schema(dir, "ember", EMBER_SCHEMA)?;
    Ok((ids, vec![path, schema_path]))
}

const EMBER_SCHEMA: &str = r#"# Survey schema for the invented Ember 24 um survey (demo data, field FL-1).
# A FITS binary table; positions in degrees at epoch 2006.0 with a fixed 1-sigma error
# of 0.8 arcsec. Flux densities in mJy; sources fainter than 0.5 mJy are not in the
# catalog, so the depth below is the limit for a covered source that is absent.
# The 6 arcsec beam blends sources closer than 6 arcsec into one.
survey = "ember"
description = "Ember 24 um survey, field FL-1 (invented)"
format = "fits"
id = "ember_id"

[position]
ra = "ra"
dec = "dec"
format = "degrees"
error = { kind = "fixed", arcsec = 0.8 }

[epoch]
year = 2006.0

[[band]]
band = "mips_24"
value = "f24"
unit = "mJy"
error = "e_f24"
depth = 0.5
"#;

/// The plan file: the six catalogs in order, match settings, output folder.
fn plan_text(observed: &[SurveyObservation]) -> String {
    let mut text = String::from(
        "# Plan for the invented demo field FL-1 (generated by fluxloom make-demo).\n\
         [field]\n\
         name = \"fl1\"\n\
         reference_epoch = 2016.0\n\
         \n\
         [match]\n\
         tolerance = { kind = \"sigma\", k = 3.439, max_arcsec = 5.0 }\n\
         astrometric_reference = \"ask\"\n\
         correct_offsets = true\n\
         \n\
         [[match.pair]]\n\
         catalogs = [\"lantern\", \"ember\"]\n\
         tolerance = { kind = \"radius\", arcsec = 3.0 }\n",
    );
    for obs in observed {
        let d = &obs.def;
        let file = match d.name {
            "ask" => "ask.parquet",
            "kos" => "kos.csv",
            "lantern" => "lantern.vot",
            "harrier" => "harrier.fits",
            "cinder" => "cinder.csv.gz",
            _ => "ember.fits",
        };
        text.push_str(&format!(
            "\n[[catalog]]\nfile = \"{file}\"\nschema = \"{}.toml\"\nsystematic_arcsec = {:?}\nresolution_arcsec = {:?}\n",
            d.name, d.systematic_arcsec, d.resolution_arcsec
        ));
        if d.eastern_only {
            text.push_str("coverage = \"harrier_moc.txt\"\n");
        }
    }
    text.push_str(
        "\n[output]\nfolder = \"../../out/fl1\"\nexports = [\"csv\", \"fits\", \"votable\"]\n",
    );
    text.push_str(concat!(
        "\n# Spectral indices, classes, photosphere excesses and colours: science.parquet.\n",
        "[science]\n",
        "alpha_window_um = [2.0, 24.0]\n",
        "anchor = \"tmass_ks\"\n",
        "photosphere = \"zero_vega_colour\"\n",
        "colours = [\"tmass_j-tmass_h\", \"tmass_h-tmass_ks\", \"tmass_ks-irac_36\", \"irac_36-irac_45\", \"irac_45-irac_80\", \"tmass_ks-mips_24\", \"sdss_g-sdss_r\"]\n",
    ));
    text
}

/// `truth_objects.csv`: one row per true object with its true flux in every band.
fn write_truth_objects(dir: &Path, truth: &[TruthObject]) -> Result<PathBuf> {
    let path = dir.join("truth_objects.csv");
    let mut c = Columns::default();
    c.text(
        "truth_id",
        truth.iter().map(|o| Some(o.truth_id.clone())).collect(),
    );
    c.text(
        "kind",
        truth
            .iter()
            .map(|o| Some(o.kind.as_str().to_string()))
            .collect(),
    );
    c.f64(
        "ra_deg",
        "deg",
        truth.iter().map(|o| Some(round(o.ra_deg, 9))).collect(),
    );
    c.f64(
        "dec_deg",
        "deg",
        truth.iter().map(|o| Some(round(o.dec_deg, 9))).collect(),
    );
    c.f64(
        "pmra_cosdec_masyr",
        "mas/yr",
        truth
            .iter()
            .map(|o| Some(round(o.pmra_cosdec_masyr, 3)))
            .collect(),
    );
    c.f64(
        "pmdec_masyr",
        "mas/yr",
        truth
            .iter()
            .map(|o| Some(round(o.pmdec_masyr, 3)))
            .collect(),
    );
    c.f64(
        "alpha",
        "",
        truth.iter().map(|o| o.alpha.map(|a| round(a, 4))).collect(),
    );
    for (b, band) in DEMO_BANDS.iter().enumerate() {
        c.f64(
            &format!("{band}_flux_jy"),
            "Jy",
            truth
                .iter()
                .map(|o| Some(round_sig(o.flux_jy[b], 6)))
                .collect(),
        );
    }
    c.f64(
        "teff_k",
        "K",
        truth
            .iter()
            .map(|o| o.teff_k.map(|t| round(t, 1)))
            .collect(),
    );
    c.f64(
        "av_mag",
        "mag",
        truth.iter().map(|o| Some(round(o.av_mag, 3))).collect(),
    );
    c.text(
        "population",
        truth
            .iter()
            .map(|o| Some(o.population.as_str().to_string()))
            .collect(),
    );
    c.f64(
        "half_light_arcsec",
        "arcsec",
        truth
            .iter()
            .map(|o| o.half_light_arcsec.map(|r| round(r, 3)))
            .collect(),
    );
    c.text(
        "pair",
        truth
            .iter()
            .map(|o| o.pair.map(|(k, _)| k.as_str().to_string()))
            .collect(),
    );
    c.text(
        "partner_id",
        truth
            .iter()
            .map(|o| o.pair.map(|(_, p)| truth[p].truth_id.clone()))
            .collect(),
    );
    let (schema, batch) = c.finish(&path)?;
    write_csv(&path, &schema, &[batch])?;
    Ok(path)
}

/// `truth_members.csv`: survey, source_id, truth_id (empty for artefacts).
fn write_truth_members(dir: &Path, rows: &[(String, String, Option<String>)]) -> Result<PathBuf> {
    let path = dir.join("truth_members.csv");
    let mut c = Columns::default();
    c.text("survey", rows.iter().map(|r| Some(r.0.clone())).collect());
    c.text(
        "source_id",
        rows.iter().map(|r| Some(r.1.clone())).collect(),
    );
    c.text("truth_id", rows.iter().map(|r| r.2.clone()).collect());
    let (schema, batch) = c.finish(&path)?;
    write_csv(&path, &schema, &[batch])?;
    Ok(path)
}

/// The README of the demo folder.
fn readme_text(seed: u64, truth_counts: &[(String, usize)], surveys: &[SurveySummary]) -> String {
    let total: usize = truth_counts.iter().map(|(_, n)| n).sum();
    let kinds = truth_counts
        .iter()
        .map(|(k, n)| format!("{n} {k}"))
        .collect::<Vec<_>>()
        .join(", ");
    let mut table =
        String::from("| survey | sources | artefacts | blends |\n| --- | ---: | ---: | ---: |\n");
    for s in surveys {
        table.push_str(&format!(
            "| `{}` | {} | {} | {} |\n",
            s.survey, s.sources, s.artefacts, s.blends
        ));
    }
    format!(
        r#"# Demo field FL-1 (invented)

Everything in this folder is **invented**: the field, its objects and the six surveys.
The files were generated by `fluxloom make-demo` with seed {seed}; the same seed gives
byte-identical files. Do not edit them by hand: change the generator
(`src/demo/`) and regenerate.

## The field

A 0.25° × 0.25° square centred on RA {FIELD_RA_DEG}°, Dec +{FIELD_DEC_DEG}° (ICRS), positions at
epoch 2016.0. It holds {total} true objects: {kinds}.

- Field stars: blackbody photospheres of 3200–9000 K at 250 pc – 15 kpc, reddened by
  A_V = 0–3 mag with a demo-only extinction law (A_λ/A_V = (λ/0.55 µm)^−1.7 beyond
  0.9 µm, ≈ 0.55 µm/λ in the optical).
- Five of the stars are nearby high-proper-motion stars (100–600 mas/yr), so their
  positions differ by up to ~10″ between the survey epochs (1998–2016); `ask` gives
  their motions.
- Twenty are faint fast movers (`population` `fast_mover`): 20–300 mas/yr, G 19.1–21.5,
  fainter than the G = 19 limit of `ask`'s proper motions, so no catalog gives their
  motion and only their positions at the epochs 2000–2016 tell (up to 4.8″ apart).
- Young stars, most of them in a group in the eastern half: Class II (a disk excess
  built so that the 2–24 µm spectral index α lies in −1.5…−0.4), Class I (α ≥ 0.35,
  A_V 8–25) and Class III (photosphere only). α is the least-squares slope of
  log λF_λ against log λ over Ks, the four 3.6–8 µm bands and 24 µm.
- Background galaxies: faint in the optical (Ks 15.5–18.5), νF_ν flat or rising into
  the mid-infrared; extended, with a half-light radius of 0.4–2.5″
  (`half_light_arcsec`): their centroids scatter between surveys by c · r_half per axis
  (c = 0.2 in `kos` and `cinder`, 0.25 in `lantern`, 0.3 in `harrier`), beyond the quoted
  error, and every survey that sees them declares them `extended`. Ten of them are
  dusty (`population` `dusty`, in the north-east): their light rises so steeply that
  `harrier` detects them at 22 µm alone.
- Pairs (`pair` and `partner_id` in the truth): 15 pairs 1.5–4″ apart (`wide`, five of
  them pairs of young stars with disks), 8 pairs of stars brighter than G = 20 closer
  than 1″ (`close`), and in the east 12
  bright stars with a faint neighbour 2–4.5″ away carrying 2–7 % of their flux in
  every band (`faint_neighbour`) and 12 stars with a companion of 50–100 % of their flux
  (`equal`). The 6″ beams see each pair as one source: a contaminated source when the
  neighbour is faint, a blend otherwise.

## The surveys

| survey | file | bands, unit | epoch | position error | resolution |
| --- | --- | --- | --- | --- | --- |
| `ask` | `ask.parquet` | G, BP, RP (Gaia-like), Vega mag | 2016.0 | RA/Dec sigmas, mas | 0.4″ |
| `kos` | `kos.csv` | u g r i z (SDSS-like), asinh mag | 2000.0 | circular, arcsec | 1.2″ |
| `lantern` | `lantern.vot` | J H Ks (2MASS-like), Vega mag | MJD per source, 1998–2001 | ellipse, arcsec | 2.5″ |
| `harrier` | `harrier.fits` | W1–W4 (WISE-like), Vega mag | 2010.5 | RA/Dec sigmas, arcsec | 6.1″ (W4 12″) |
| `cinder` | `cinder.csv.gz` | 3.6, 4.5, 5.8, 8.0 µm (IRAC-like), µJy | 2005.0 | fixed 0.25″ | 1.8″ |
| `ember` | `ember.fits` | 24 µm (MIPS-like), mJy | 2006.0 | fixed 0.8″ | 6.0″ |

Each has a survey schema `<survey>.toml` that says how to read it. Conventions:

- `ask`: astrometric survey of point sources (no galaxies); only sources brighter than
  G = 20.5; proper motions (μ_α cos δ) for G < 19; BP/RP null when too faint.
- `kos`: sexagesimal positions (RA hh:mm:ss.sss, Dec ±dd:mm:ss.ss) after a `#` comment
  header; asinh magnitudes (Lupton, Gunn & Szalay 1999) with the band library's
  softening, kept for faint sources even when the flux is negative; u and z are on the
  survey system (AB offsets −0.04 and +0.02 applied by `offset_mag`); −9999 means no
  measurement (saturated brighter than 14 mag, or lost). **Its positions carry a
  deliberate systematic offset of +0.25″ in RA·cos Dec** for the offset correction to find.
  Extended sources have their half-light radius in `petro_r50`.
- `lantern`: per-source epochs as MJD; a three-letter quality string, one letter per band
  (A/B/C/D by S/N, `U` = the magnitude is a 95 % upper limit, `X` = no measurement,
  written as 99.999); `xflg` = 1 marks extended sources.
- `harrier`: covers only the eastern 60 % of the field (`harrier_moc.txt`, an IVOA MOC in
  ASCII serialization at HEALPix order 12); below S/N 2 the magnitude is a 95 % upper
  limit given without an error, an empty magnitude is no detection. Its 22 µm band (W4)
  has a 12″ beam (`resolution_arcsec` of the band) and covers only the north of the
  survey's footprint (`harrier_w4_moc.txt`); objects no other row holds that are
  detected at 22 µm alone (S/N ≥ 5, grouped at 12″) are rows carrying that band only.
  `ext_flg` bit 0 marks extended sources.
- `cinder`: every source has a flux and error in every band, possibly negative; S/N
  below 3 is read as the limit max(F, 0) + 3σ. Rows with `fphot` = 1 are forced
  photometry at the positions of objects brighter than the `kos` r-band 5σ limit that
  `cinder` did not detect itself (`[forced]` in its schema). Extended sources have a
  Gaussian FWHM in `fwhm`.
- `ember`: only sources brighter than 0.5 mJy; its 6″ beam merges sources closer than
  6″ into one at the flux-weighted position with the summed flux.

Common to all: positions are the true ones moved to the survey epoch by the true proper
motion, scattered by the quoted error (plus an unquoted systematic scatter, the plan's
`systematic_arcsec`, and for galaxies the centroid scatter above); photometric noise is σ² = σ_sky² + (f·F)² (sky noise plus a
calibration floor); objects closer than the resolution (FWHM) blend; a few per cent of
each catalog are spurious sources with no true counterpart.

{table}
## Truth

- `truth_objects.csv`: `truth_id`, `kind` (star, class_i, class_ii, class_iii, galaxy),
  position at 2016.0, proper motion, `alpha` (young stars only), the true flux density in
  Jy in every band (`<band>_flux_jy`), the model's `teff_k` and `av_mag`, the
  `population` it was made for (field, high_pm, fast_mover, dusty, companion),
  `half_light_arcsec` (galaxies), and `pair` (wide, close, faint_neighbour, equal) with
  the other member's `partner_id`.
- `truth_members.csv`: one row per survey source and true object it contains; artefacts
  have an empty `truth_id`; blends have one row per member.

## Plan

`plan.toml` reads the six catalogs in the order above, matches them with a 3.439σ
tolerance (at most 5″; 3″ between `lantern` and `ember`), uses `ask` as the
astrometric reference and corrects offsets, and writes to `out/fl1` at the top of the repository.
"#
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalog::normalize::position::{parse_dec_degrees, parse_ra_hours};

    #[test]
    fn sexagesimal_round_trip() {
        for (ra, dec) in [(231.2, 12.4), (231.073_21, 12.275_5), (0.000_1, -0.000_1)] {
            let back_ra = parse_ra_hours(&ra_hms(ra)).unwrap();
            let back_dec = parse_dec_degrees(&dec_dms(dec)).unwrap();
            // 0.001 s of time is 15 mas; 0.01″ is 10 mas.
            assert!(
                (back_ra - ra).abs() * 3600.0 < 0.0076,
                "{ra} → {}",
                ra_hms(ra)
            );
            assert!(
                (back_dec - dec).abs() * 3600.0 < 0.0051,
                "{dec} → {}",
                dec_dms(dec)
            );
        }
        assert_eq!(ra_hms(231.2), "15:24:48.000");
        assert_eq!(dec_dms(-12.5), "-12:30:00.00");
    }

    #[test]
    fn designation_truncates() {
        // 231.2° = 15h24m48s; 12.4° = 12°24′00″.
        assert_eq!(kos_designation(231.2, 12.4), "KOS J152448.00+122400.0");
        assert_eq!(
            kos_designation(231.2 + 0.009_9 / 240.0, 12.4 + 0.099 / 3600.0),
            "KOS J152448.00+122400.0"
        );
    }

    #[test]
    fn limits_and_rounding() {
        assert_eq!(limit_95(-1.0, 1.0), 1.645);
        assert_eq!(round_sig(123_456.7, 3), 123_000.0);
        assert!((pogson_mag(666.7e-4, 666.7) - 10.0).abs() < 1e-12);
        assert_eq!(mag_err(1.0, 0.0), 0.001);
    }
}
