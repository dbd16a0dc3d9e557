//! Values that cannot be right are refused with the schema or plan line, and a
//! magnitude whose flux density overflows is never written.

use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::Array;

use fluxloom::catalog::schema::SurveySchema;
use fluxloom::photometry::BandLibrary;
use fluxloom::plan::Plan;

const SCHEMA: &str = r#"survey = "opt"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2010.0

[[band]]
band = "jc_v"
value = "v"
unit = "vega_mag"
error = "e_v"
offset_mag = 0.02
depth = 21.0
"#;

fn schema_error(text: &str) -> String {
    SurveySchema::from_str(text, Path::new("s.toml"), &BandLibrary::builtin())
        .unwrap_err()
        .to_string()
}

#[test]
fn the_base_schema_is_valid() {
    let s = SurveySchema::from_str(SCHEMA, Path::new("s.toml"), &BandLibrary::builtin()).unwrap();
    assert_eq!(s.bands[0].offset_mag, 0.02);
    assert_eq!(s.bands[0].depth, Some(21.0));
}

#[test]
fn impossible_schema_values_name_their_line() {
    let cases: &[(&str, &str, &str)] = &[
        (
            "offset_mag = 0.02",
            "offset_mag = inf",
            "s.toml:18: offset_mag must be a number of magnitudes in [-20, 20], found inf",
        ),
        (
            "offset_mag = 0.02",
            "offset_mag = nan",
            "s.toml:18: offset_mag must be a number of magnitudes in [-20, 20], found NaN",
        ),
        (
            "depth = 21.0",
            "depth = nan",
            "s.toml:19: depth NaN (unit vega_mag) does not give a finite, positive flux density; expected a limiting value such as 21.5 for magnitudes or 0.05 for mJy",
        ),
        (
            "depth = 21.0",
            "depth = -1000.0",
            "s.toml:19: depth -1000 (unit vega_mag) does not give a finite, positive flux density; expected a limiting value such as 21.5 for magnitudes or 0.05 for mJy",
        ),
        (
            "year = 2010.0",
            "year = 1e12",
            "s.toml:11: epoch year 1000000000000 is outside 1800 to 2200; expected a Julian year such as 2015.5 (per-source MJD or JD go in a column with unit = \"mjd\" or \"jd\")",
        ),
        (
            "arcsec = 0.1",
            "arcsec = -0.1",
            "s.toml:8: a fixed position error must be a number of arcsec in (0, 3600], found -0.1",
        ),
        (
            "arcsec = 0.1",
            "arcsec = 0.0",
            "s.toml:8: a fixed position error must be a number of arcsec in (0, 3600], found 0",
        ),
        (
            "arcsec = 0.1",
            "arcsec = inf",
            "s.toml:8: a fixed position error must be a number of arcsec in (0, 3600], found inf",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\nnulls = [nan]",
            "s.toml:13: nulls holds NaN; NaN is always read as no measurement, list only numbers",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\nlimit = { kind = \"snr\", below = nan }",
            "s.toml:20: snr limit \"below\" must lie in (0, 1000], found NaN",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\nlimit = { kind = \"snr\", n = -3.0 }",
            "s.toml:20: snr limit \"n\" must lie in (0, 1000], found -3",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\nlimit = { kind = \"sentinel\", values = [nan] }",
            "s.toml:20: limit kind \"sentinel\" values must be numbers, found nan (NaN is always read as no measurement)",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\nquality = [{ column = \"q\", min = 5.0, max = 1.0 }]",
            "s.toml:20: quality min 5 is above max 1; no value could pass",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\nquality = [{ column = \"q\", min = nan }]",
            "s.toml:20: quality min must be a number, found NaN",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\nquality = [{ column = \"q\", reject = [\"X\"], char = 0 }]",
            "s.toml:20: char counts from 1",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\ndepth_mag = -1.0",
            "s.toml:20: depth_mag must be a magnitude in [0, 40] (the survey's limit in the band's own system), found -1",
        ),
        (
            "depth = 21.0",
            "depth = 21.0\ndepth_mag = 21.0\ndepth_snr = inf",
            "s.toml:21: depth_snr must lie in (0, 1000], found inf",
        ),
    ];
    for (from, to, want) in cases {
        let text = SCHEMA.replace(from, to);
        assert_ne!(text, SCHEMA, "{from}");
        assert_eq!(schema_error(&text), *want, "{to}");
    }
}

#[test]
fn asinh_softening_must_be_a_fraction_of_the_zero_point() {
    let text = SCHEMA
        .replace("band = \"jc_v\"", "band = \"sdss_r\"")
        .replace(
            "unit = \"vega_mag\"",
            "unit = \"asinh_mag\"\nsoftening = 2.0",
        );
    assert_eq!(
        schema_error(&text),
        "s.toml:17: asinh softening must lie in (0, 1] (a fraction of the zero-point flux), found 2"
    );
}

const PLAN: &str = r#"[field]
name = "f"
reference_epoch = 2016.0
area_deg2 = 1.0

[match]
tolerance = { kind = "sigma", k = 3.0, max_arcsec = 4.0 }
min_probability = 0.5
common_fraction = 0.5

[[catalog]]
file = "opt.csv"
schema = "opt.toml"
systematic_arcsec = 0.05

[output]
folder = "out"
"#;

fn plan_error(text: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("opt.toml"), SCHEMA).unwrap();
    let path = dir.path().join("plan.toml");
    std::fs::write(&path, text).unwrap();
    let err = Plan::from_file(&path).unwrap_err().to_string();
    let prefix = format!("{}:", path.display());
    err.strip_prefix(&prefix)
        .map(|e| format!("plan.toml:{e}"))
        .unwrap_or(err)
}

#[test]
fn the_base_plan_is_valid() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("opt.toml"), SCHEMA).unwrap();
    let path = dir.path().join("plan.toml");
    std::fs::write(&path, PLAN).unwrap();
    let plan = Plan::from_file(&path).unwrap();
    assert_eq!(plan.matching.min_probability, 0.5);
}

#[test]
fn impossible_plan_values_name_their_line() {
    let cases: &[(&str, &str, &str)] = &[
        (
            "reference_epoch = 2016.0",
            "reference_epoch = nan",
            "plan.toml:3: reference_epoch NaN is outside 1800 to 2200; expected a Julian year such as 2016.0",
        ),
        (
            "area_deg2 = 1.0",
            "area_deg2 = 50000.0",
            "plan.toml:4: area_deg2 must lie in (0, 41252.96124941928] (the whole sky), found 50000",
        ),
        (
            "area_deg2 = 1.0",
            "area_deg2 = inf",
            "plan.toml:4: area_deg2 must lie in (0, 41252.96124941928] (the whole sky), found inf",
        ),
        (
            "k = 3.0",
            "k = nan",
            "plan.toml:7: tolerance k must lie in (0, 100], found NaN",
        ),
        (
            "max_arcsec = 4.0",
            "max_arcsec = -4.0",
            "plan.toml:7: tolerance max_arcsec must lie in (0, 3600], found -4",
        ),
        (
            "min_probability = 0.5",
            "min_probability = 1.5",
            "plan.toml:8: min_probability must lie in [0, 1], found 1.5",
        ),
        (
            "min_probability = 0.5",
            "min_probability = nan",
            "plan.toml:8: min_probability must lie in [0, 1], found NaN",
        ),
        (
            "common_fraction = 0.5",
            "common_fraction = 0.0",
            "plan.toml:9: common_fraction must lie in (0, 1], found 0",
        ),
        (
            "systematic_arcsec = 0.05",
            "systematic_arcsec = -0.05",
            "plan.toml:11: systematic_arcsec must be a number of arcsec in [0, 3600], found -0.05",
        ),
        (
            "systematic_arcsec = 0.05",
            "systematic_arcsec = nan",
            "plan.toml:11: systematic_arcsec must be a number of arcsec in [0, 3600], found NaN",
        ),
    ];
    for (from, to, want) in cases {
        let text = PLAN.replace(from, to);
        assert_ne!(text, PLAN, "{from}");
        assert_eq!(plan_error(&text), *want, "{to}");
    }
}

#[test]
fn a_plan_that_is_not_utf8_names_line_and_byte_column() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plan.toml");
    let mut bytes = PLAN.as_bytes().to_vec();
    // "name = "f"" on line 2: replace the f by a Latin-1 e-acute.
    let at = PLAN.find("\"f\"").unwrap() + 1;
    bytes[at] = 0xE9;
    std::fs::write(&path, bytes).unwrap();
    let err = Plan::from_file(&path).unwrap_err().to_string();
    assert_eq!(
        err,
        format!(
            "{}: line 2, byte column 9: byte 0xE9 is not valid UTF-8; TOML files must be UTF-8 text",
            path.display()
        )
    );
}

#[test]
fn a_toml_syntax_error_keeps_its_drawing_on_separate_lines() {
    let text = SCHEMA.replace("survey = \"opt\"", "survey = opt");
    let err = schema_error(&text);
    let lines: Vec<&str> = err.lines().collect();
    assert_eq!(lines.len(), 4, "{err}");
    assert!(lines[0].starts_with("s.toml: line 1, column 10: "), "{err}");
    assert_eq!(lines[2], "  1 | survey = opt");
    assert_eq!(lines[3], "    |          ^");
}

/// Writes the schema and a CSV with one good row and one row of magnitude -1000.
fn overflow_catalog() -> (tempfile::TempDir, PathBuf, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let schema = dir.path().join("opt.toml");
    std::fs::write(&schema, SCHEMA).unwrap();
    let csv = dir.path().join("opt.csv");
    std::fs::write(
        &csv,
        "id,ra,dec,v,e_v\n1,10.0,-5.0,15.2,0.02\n2,10.1,-5.1,-1000,0.02\n",
    )
    .unwrap();
    (dir, schema, csv)
}

#[test]
fn a_magnitude_overflowing_to_infinite_flux_is_an_error_without_skipping() {
    let (_dir, schema, csv) = overflow_catalog();
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["--quiet", "vet"])
        .arg(&csv)
        .arg("--schema")
        .arg(&schema)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert_eq!(
        String::from_utf8_lossy(&out.stderr),
        format!(
            "fluxloom: error: {}: row 2, column \"v\": expected a value in unit vega_mag that converts to a finite flux density, found \"-1000\"\n",
            csv.display()
        )
    );
}

#[test]
fn a_magnitude_overflowing_to_infinite_flux_is_rejected_and_counted_when_skipping() {
    let (dir, schema, csv) = overflow_catalog();
    let parquet = dir.path().join("n.parquet");
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["--quiet", "vet", "--skip-bad-rows", "--json"])
        .arg(&csv)
        .arg("--schema")
        .arg(&schema)
        .arg("--out")
        .arg(&parquet)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let text = report.to_string();
    assert!(
        text.contains("\"unreadable value in column \\\"v\\\"\":1"),
        "{text}"
    );
    let file = std::fs::File::open(&parquet).unwrap();
    let reader = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap();
    let mut statuses = Vec::new();
    for batch in reader {
        let batch = batch.unwrap();
        let flux = batch
            .column_by_name("jc_v_flux_jy")
            .unwrap()
            .as_any()
            .downcast_ref::<arrow::array::Float64Array>()
            .unwrap()
            .clone();
        for v in flux.iter().flatten() {
            assert!(v.is_finite(), "a non-finite flux density was written: {v}");
        }
        let status = arrow::compute::cast(
            batch.column_by_name("jc_v_status").unwrap(),
            &arrow::datatypes::DataType::Utf8,
        )
        .unwrap();
        let status = status
            .as_any()
            .downcast_ref::<arrow::array::StringArray>()
            .unwrap();
        statuses.extend(status.iter().map(|s| s.unwrap().to_string()));
        assert!(flux.is_null(1));
    }
    assert_eq!(statuses, ["detected", "rejected"]);
}
