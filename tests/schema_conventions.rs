//! The schema conventions end to end: saturated values, forced-photometry rows
//! and bit flags through `fluxloom build` into the SED tables and the science
//! layer's reading of them. Invented catalogs of an invented field.

mod common;

use std::fs;
use std::path::Path;
use std::process::Command;

use arrow::array::AsArray;

use common::{floats, read_parquet, text};
use fluxloom::science::sed_table::FieldSeds;

const DETECTIONS: &str = "# invented detections; flags bit 2 or 3 = saturated
id,ra,dec,f36,e36,ks,e_ks,flags
d1,150.0000,10.0,2.0,0.1,12.0,0.03,0
d2,150.0100,10.0,900.0,0.1,5.0,0.01,4
d3,150.0200,10.0,3.0,0.1,11.0,0.03,1
";

/// Forced photometry at d1 and d3, and a forced row with nothing under it.
const FORCED: &str = "# invented forced photometry; fp = 1 marks a forced row
id,ra,dec,f24,e24,fp
p1,150.0000,10.0,0.5,0.5,1
p2,150.0500,10.0,0.4,0.5,1
p3,150.0200,10.0,6.0,0.5,0
";

const DET_SCHEMA: &str = r#"survey = "det"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2016.0

[[band]]
band = "irac_36"
value = "f36"
unit = "mJy"
error = "e36"
saturated = { column = "flags", mask = 0x0c }

[[band]]
band = "tmass_ks"
value = "ks"
unit = "vega_mag"
error = "e_ks"
saturated = { column = "flags", mask = 0x0c }
"#;

const FORCED_SCHEMA: &str = r#"survey = "phot"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2016.0

[forced]
column = "fp"
values = ["1"]

[[band]]
band = "mips_24"
value = "f24"
unit = "mJy"
error = "e24"
"#;

const PLAN: &str = r#"[field]
name = "conv"
reference_epoch = 2016.0
area_deg2 = 0.01

[match]
tolerance = { kind = "sigma", k = 3.439, max_arcsec = 2.0 }

[[catalog]]
file = "det.csv"
schema = "det.toml"

[[catalog]]
file = "phot.csv"
schema = "phot.toml"

[output]
folder = "out"
exports = ["csv", "fits", "votable"]
"#;

fn build(dir: &Path) -> (std::path::PathBuf, String) {
    for (name, body) in [
        ("det.csv", DETECTIONS),
        ("phot.csv", FORCED),
        ("det.toml", DET_SCHEMA),
        ("phot.toml", FORCED_SCHEMA),
        ("plan.toml", PLAN),
    ] {
        fs::write(dir.join(name), body).unwrap();
    }
    let out = dir.join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build", dir.join("plan.toml").to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    (out, String::from_utf8_lossy(&o.stdout).into_owned())
}

#[test]
fn saturated_values_and_forced_rows_reach_the_sed_tables_as_they_should() {
    let dir = tempfile::tempdir().unwrap();
    let (out, stdout) = build(dir.path());
    let objects = read_parquet(&out.join("objects.parquet"));
    let ids = text(&objects, "object_id");
    let row = |id: &str| ids.iter().position(|i| i == id).unwrap();
    // d1 (with p1), d2, d3 (with p3); p2 makes no object (below).
    assert_eq!(ids.len(), 3, "{ids:?}");

    // d2 is saturated: its own status, no flux, no limit, not counted as detected;
    // its value is a lower bound on the flux, in a column of its own: 900 mJy.
    let status = text(&objects, "irac_36_status");
    let (flux, ulim, lower) = (
        floats(&objects, "irac_36_flux_jy"),
        floats(&objects, "irac_36_ulim_jy"),
        floats(&objects, "irac_36_flux_lower_jy"),
    );
    let d2 = row("det:d2");
    assert_eq!(status[d2], "saturated");
    assert_eq!((flux[d2], ulim[d2]), (None, None));
    assert_eq!(lower[d2], Some(0.9));
    // Ks 5.0 saturated: at least 666.7 · 10^(−0.4 · 5) = 6.667 Jy (zero point of the
    // band library, Cohen, Wheaton & Megeath 2003).
    assert_eq!(text(&objects, "tmass_ks_status")[d2], "saturated");
    assert_eq!(floats(&objects, "tmass_ks_flux_jy")[d2], None);
    let ks_lower = floats(&objects, "tmass_ks_flux_lower_jy")[d2].unwrap();
    assert!((ks_lower - 6.667).abs() < 1e-12, "{ks_lower}");
    // No other point carries a lower bound, and no band without a saturation
    // rule has the column.
    for (k, v) in lower.iter().enumerate() {
        assert_eq!(v.is_some(), k == d2, "{lower:?}");
    }
    assert!(objects.column_by_name("mips_24_flux_lower_jy").is_none());
    let n_detected = objects
        .column_by_name("n_detected")
        .unwrap()
        .as_primitive::<arrow::datatypes::UInt16Type>();
    assert_eq!(n_detected.value(d2), 0);
    assert_eq!(n_detected.value(row("det:d3")), 3);
    // d3 keeps its detection (flags = 1 is not a saturation bit): 3 mJy.
    let d3 = row("det:d3");
    assert_eq!(status[d3], "detected");
    assert!((flux[d3].unwrap() - 0.003).abs() < 1e-15);

    // p1 is forced at d1 with S/N 1: an upper limit max(F, 0) + 3 sigma = 2 mJy.
    let d1 = row("det:d1");
    let mips = text(&objects, "mips_24_status");
    assert_eq!(mips[d1], "upper_limit");
    assert!((floats(&objects, "mips_24_ulim_jy")[d1].unwrap() - 0.002).abs() < 1e-15);
    assert_eq!(text(&objects, "phot_source_id")[d1], "p1");
    // p2, forced with nothing detected under it, makes no object: no object
    // holds it and no flag marks one (bit 64, once forced_only, is retired).
    assert!(!ids.iter().any(|i| i == "phot:p2"), "{ids:?}");
    assert!(!text(&objects, "phot_source_id").iter().any(|s| s == "p2"));
    let flags = objects
        .column_by_name("flags")
        .unwrap()
        .as_primitive::<arrow::datatypes::UInt32Type>();
    assert!(flags.iter().all(|f| f.unwrap() & 64 == 0));
    assert_eq!(text(&objects, "phot_source_id")[d3], "p3");

    // The photometry table: the saturated point has neither flux nor limit.
    let phot = read_parquet(&out.join("photometry.parquet"));
    let (pid, pband, pstatus) = (
        text(&phot, "object_id"),
        text(&phot, "band"),
        text(&phot, "status"),
    );
    let k = (0..phot.num_rows())
        .find(|&k| pid[k] == "det:d2" && pband[k] == "irac_36")
        .unwrap();
    assert_eq!(pstatus[k], "saturated");
    assert_eq!(floats(&phot, "flux_jy")[k], None);
    assert_eq!(floats(&phot, "ulim_jy")[k], None);
    assert_eq!(floats(&phot, "nufnu_cgs")[k], None);
    let plower = floats(&phot, "flux_lower_jy");
    assert_eq!(plower[k], Some(0.9));
    assert_eq!(plower.iter().filter(|v| v.is_some()).count(), 2);
    assert!(floats(&phot, "flux_lower_mag").iter().all(Option::is_none));
    let unit = |batch: &arrow::array::RecordBatch, name: &str| {
        let schema = batch.schema();
        let field = schema.field_with_name(name).unwrap();
        field.metadata().get("unit").cloned()
    };
    assert_eq!(unit(&phot, "flux_lower_jy").as_deref(), Some("Jy"));
    assert_eq!(
        unit(&objects, "irac_36_flux_lower_jy").as_deref(),
        Some("Jy")
    );

    // The exports carry the same column and value (read back by fluxloom's readers).
    let csv = fluxloom::catalog::csv::read_csv(
        &out.join("objects.csv"),
        &fluxloom::catalog::schema::CsvOptions::default(),
        1024,
    )
    .unwrap();
    let fits = fluxloom::catalog::fits::read_fits(
        &out.join("photometry.fits"),
        &fluxloom::catalog::fits::FitsOptions {
            hdu: None,
            batch_rows: 1024,
        },
    )
    .unwrap();
    let vot = fluxloom::catalog::votable::read_votable(
        &out.join("objects.vot"),
        &fluxloom::catalog::votable::VotableOptions {
            table_index: 0,
            batch_rows: 1024,
        },
    )
    .unwrap();
    for (what, table, id_col, column) in [
        ("objects.csv", csv, "object_id", "irac_36_flux_lower_jy"),
        ("photometry.fits", fits, "object_id", "flux_lower_jy"),
        ("objects.vot", vot, "object_id", "irac_36_flux_lower_jy"),
    ] {
        let schema = table.schema.clone();
        let batch = arrow::compute::concat_batches(&schema, &table.collect_all().unwrap()).unwrap();
        let ids = text(&batch, id_col);
        let values = text(&batch, column);
        let got: Vec<(&str, f64)> = ids
            .iter()
            .zip(&values)
            .filter(|(_, v)| !v.is_empty() && v.as_str() != "NaN")
            .map(|(i, v)| (i.as_str(), v.parse().unwrap()))
            .collect();
        assert!(got.contains(&("det:d2", 0.9)), "{what}: {got:?}");
        let n_bounds = if what.starts_with("photometry") { 2 } else { 1 };
        assert_eq!(got.len(), n_bounds, "{what}: {got:?}");
    }

    // The science layer sees neither a detection nor a limit there.
    let seds = FieldSeds::read(&out).unwrap();
    let band = seds.band_index("irac_36").unwrap();
    let object = seds.object_id.iter().position(|i| i == "det:d2").unwrap();
    let value = seds.values[object][band];
    assert_eq!(value.detected_mag(&seds.bands[band]), None);
    assert_eq!(value.limit_mag(&seds.bands[band]), None);
    // ... nor in Ks: the bound enters no fit.
    let ks = seds.band_index("tmass_ks").unwrap();
    assert_eq!(seds.values[object][ks].detected_mag(&seds.bands[ks]), None);
    assert_eq!(seds.values[object][ks].limit_mag(&seds.bands[ks]), None);

    // run.json counts the saturated point by its status.
    let run: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    let text = run.to_string();
    assert!(text.contains("\"saturated\":1"), "{text}");
    // ... and the forced row left out, by catalog: never lost silently.
    assert_eq!(
        run["forced_without_counterpart"],
        serde_json::json!({ "phot": 1 })
    );
    assert_eq!(run["matching"]["objects"], 3);
    assert!(run["matching"]["flags"].get("forced_only").is_none());
    assert!(
        stdout.contains("forced rows without a counterpart (no object written): phot 1\n"),
        "{stdout}"
    );
}

#[test]
fn forced_rows_left_out_are_counted_alike_within_a_memory_limit() {
    // The same field matched a group of small cells at a time (a bounded build,
    // which refuses exports and false-match estimates) writes the files of a
    // build holding everything: the forced row left out is counted once.
    let dir = tempfile::tempdir().unwrap();
    build(dir.path());
    let plan = PLAN
        .replace("exports = [\"csv\", \"fits\", \"votable\"]\n", "")
        .replace("[match]\n", "[match]\nfalse_matches = false\n");
    fs::write(dir.path().join("plan.toml"), plan).unwrap();
    let run = |out: &str, extra: &[&str]| {
        let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
            .args(["build", dir.path().join("plan.toml").to_str().unwrap()])
            .args(["--quiet", "--cell-order", "14", "--out"])
            .arg(dir.path().join(out))
            .args(extra)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        dir.path().join(out)
    };
    let whole = run("whole", &[]);
    let bounded = run("bounded", &["--memory-limit", "1G", "--group-rows", "2"]);
    common::assert_same_files(&bounded, &whole, "bounded build");
    let record: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(whole.join("run.json")).unwrap()).unwrap();
    assert_eq!(
        record["forced_without_counterpart"],
        serde_json::json!({ "phot": 1 })
    );
}
