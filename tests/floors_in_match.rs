//! Systematic floors measured from the data are used in the match, end to end
//! through `fluxloom build`, on an invented field of 400 stars seen by two
//! invented surveys: `anchor`, the astrometric reference, whose stated 0.05″
//! errors are right, and `loose`, which states 0.05″ too but scatters by an
//! extra, unstated 0.2″ per axis.
//!
//! A catalog whose plan entry fixes no `systematic_arcsec` is matched with the
//! floor measured against the reference; a fixed one (even 0) is kept and the
//! measurement only reported beside it.
//!
//! Figures (by hand, Rayleigh law of the pair's per-axis σ, standard): with no
//! floor the pair's stated σ is 0.05·√2 = 0.0707″ and the 3.439σ tolerance
//! 0.243″, while the true σ is sqrt(2·0.05² + 0.2²) = 0.2121″, so a true pair
//! lies beyond the tolerance with probability exp(−0.243²/(2·0.2121²)) = 0.519;
//! with the floor 0.2″ the tolerance is 3.439 · 0.2121″ = 0.729″ and 0.27 % are
//! beyond it. Stars are 15″ apart, far beyond any tolerance, so every true pair
//! is unique.

mod common;

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::AsArray;
use common::{floats, read_parquet, text};
use fluxloom::rng::Rng;

const N_SIDE: usize = 20;
const SPACING_ARCSEC: f64 = 15.0;
const STATED: f64 = 0.05;
const INJECTED_FLOOR: f64 = 0.2;

fn schema(survey: &str) -> String {
    format!(
        r#"survey = "{survey}"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = {{ kind = "fixed", arcsec = {STATED} }}

[epoch]
year = 2016.0

[[band]]
band = "tmass_ks"
value = "ks"
unit = "vega_mag"
error = "e_ks"
"#
    )
}

/// The two catalogs: each star scattered by the stated error, plus the
/// unstated floor for `loose`.
fn catalogs() -> (String, String) {
    let mut rng = Rng::new(2026, "floors-in-match");
    let (dec0, ra0) = (10.0f64, 150.0f64);
    let cos = dec0.to_radians().cos();
    let mut anchor = String::from("# invented stars\nid,ra,dec,ks,e_ks\n");
    let mut loose = anchor.clone();
    for k in 0..N_SIDE * N_SIDE {
        let (east, north) = (
            (k % N_SIDE) as f64 * SPACING_ARCSEC,
            (k / N_SIDE) as f64 * SPACING_ARCSEC,
        );
        let total = STATED.hypot(INJECTED_FLOOR);
        for (out, sigma, prefix) in [(&mut anchor, STATED, "a"), (&mut loose, total, "l")] {
            let (e, n) = (east + sigma * rng.normal(), north + sigma * rng.normal());
            out.push_str(&format!(
                "{prefix}{k},{:.9},{:.9},12.5,0.03\n",
                ra0 + e / 3600.0 / cos,
                dec0 + n / 3600.0
            ));
        }
    }
    (anchor, loose)
}

/// Writes the field with `loose_floor` as the `loose` catalog's plan line
/// (empty: no fixed floor) and builds it; returns the output folder and stdout.
fn build(dir: &Path, loose_floor: &str) -> (PathBuf, String) {
    let (anchor, loose) = catalogs();
    for (name, body) in [
        ("anchor.csv", anchor),
        ("loose.csv", loose),
        ("anchor.toml", schema("anchor")),
        ("loose.toml", schema("loose")),
    ] {
        fs::write(dir.join(name), body).unwrap();
    }
    let plan = format!(
        r#"[field]
name = "floors"
reference_epoch = 2016.0

[match]
tolerance = {{ kind = "sigma", k = 3.439, max_arcsec = 2.0 }}
astrometric_reference = "anchor"
max_motion_masyr = 0.0

[[catalog]]
file = "anchor.csv"
schema = "anchor.toml"

[[catalog]]
file = "loose.csv"
schema = "loose.toml"
{loose_floor}

[output]
folder = "out"
"#
    );
    fs::write(dir.join("plan.toml"), plan).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build", dir.join("plan.toml").to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    (
        dir.join("out"),
        String::from_utf8_lossy(&o.stdout).into_owned(),
    )
}

fn run_json(out: &Path) -> serde_json::Value {
    serde_json::from_str(&fs::read_to_string(out.join("run.json")).unwrap()).unwrap()
}

/// Objects with both catalogs, and of those the ones flagged (any flag).
fn pairs(out: &Path) -> (usize, usize) {
    let o = read_parquet(&out.join("objects.parquet"));
    let n = o
        .column_by_name("n_catalogs")
        .unwrap()
        .as_primitive::<arrow::datatypes::UInt16Type>()
        .values()
        .to_vec();
    let status = text(&o, "status");
    let both = (0..o.num_rows()).filter(|&k| n[k] == 2);
    let flagged = both.clone().filter(|&k| status[k] != "clean").count();
    (both.count(), flagged)
}

#[test]
fn a_catalog_without_a_fixed_floor_is_matched_with_the_measured_one() {
    let measured_dir = tempfile::tempdir().unwrap();
    let (out, stdout) = build(measured_dir.path(), "");
    let run = run_json(&out);
    let floors = run["floors"].as_array().unwrap();
    assert_eq!(floors.len(), 2);
    // The reference has no floor of its own.
    assert_eq!(floors[0]["name"], "anchor");
    assert_eq!(floors[0]["origin"], "not_measured");
    assert_eq!(floors[0]["floor_arcsec"], 0.0);
    assert_eq!(
        floors[0]["note"],
        "the astrometric reference: the others are measured against it"
    );
    // (a) loose gets the measured floor, within 4 standard errors of the injected
    // 0.2″: the sample median of a unit Rayleigh law has relative standard error
    // 0.7214/√N (standard asymptotics of sample quantiles), and
    // δσ_sys = (σ_tot²/σ_sys)·δm/m with σ_tot² = 2·0.05² + 0.2² (the pair's stated
    // σ is both catalogs' 0.05″ in quadrature).
    let loose = &floors[1];
    assert_eq!(loose["name"], "loose");
    assert_eq!(loose["origin"], "measured");
    let floor = loose["floor_arcsec"].as_f64().unwrap();
    let n_pairs = loose["n_pairs"].as_u64().unwrap() as f64;
    assert_eq!(loose["measured_arcsec"].as_f64(), Some(floor));
    let stated_pair2 = 2.0 * STATED * STATED;
    let se =
        (stated_pair2 + INJECTED_FLOOR * INJECTED_FLOOR) / INJECTED_FLOOR * 0.7214 / n_pairs.sqrt();
    println!("measured floor {floor:.4}\" from {n_pairs} pairs (standard error {se:.4}\")");
    assert!(n_pairs >= 390.0, "{n_pairs}");
    assert!(
        (floor - INJECTED_FLOOR).abs() <= 4.0 * se,
        "{floor} vs 0.2 ± {se}"
    );
    // The settings in force carry it, and the summary says so.
    assert_eq!(
        run["match_settings"]["catalogs"][1]["systematic_arcsec"].as_f64(),
        Some(floor)
    );
    let line = format!(
        "floor used for loose: {floor:.3}\" measured from {} pairs",
        n_pairs as u64
    );
    assert!(stdout.contains(&line), "{line}\nnot in\n{stdout}");
    assert!(
        stdout.contains("floor used for anchor: 0.000\" not measured: the astrometric reference"),
        "{stdout}"
    );
    // The audit shows the measurement beside the floor used.
    let report: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("report.json")).unwrap()).unwrap();
    let offset = &report["offsets"][0];
    assert_eq!(offset["catalog"], "loose");
    assert_eq!(offset["floor_used_arcsec"].as_f64(), Some(floor));
    assert_eq!(offset["floor_origin"], "measured");
    let html = fs::read_to_string(out.join("report.html")).unwrap();
    assert!(
        html.contains(&format!("{floor:.3} (measured)")),
        "report.html"
    );

    // The final match used it: the chosen pairs' normalized distances follow the
    // unit Rayleigh law, median 1.17741 within 4 of its relative standard errors
    // 0.7214/√N (the measurement sets exactly this median on the same pairs, up to
    // the removed offset and the 0.27 % beyond the tolerance).
    let links = read_parquet(&out.join("links.parquet"));
    let chosen: Vec<bool> = links
        .column_by_name("chosen")
        .unwrap()
        .as_boolean()
        .iter()
        .map(|b| b.unwrap())
        .collect();
    let mut d: Vec<f64> = floats(&links, "norm_dist")
        .into_iter()
        .zip(&chosen)
        .filter(|(_, c)| **c)
        .map(|(v, _)| v.unwrap())
        .collect();
    d.sort_by(f64::total_cmp);
    let median_d = d[d.len() / 2];
    let rel = 0.7214 / (d.len() as f64).sqrt();
    println!(
        "median normalized distance {median_d:.4} over {} chosen pairs",
        d.len()
    );
    assert!((median_d / 1.177_41 - 1.0).abs() < 4.0 * rel, "{median_d}");

    // (b) with the floor, nearly every star is one object of both catalogs; with
    // a fixed floor of 0 about half are missed (0.519 expected, by hand above).
    let (both, flagged) = pairs(&out);
    let zero_dir = tempfile::tempdir().unwrap();
    let (zero_out, zero_stdout) = build(zero_dir.path(), "systematic_arcsec = 0.0");
    let (both_zero, _) = pairs(&zero_out);
    let total = (N_SIDE * N_SIDE) as f64;
    println!(
        "objects of both catalogs: {both} with the measured floor ({flagged} flagged), {both_zero} with 0"
    );
    // 0.27 % expected beyond the tolerance: at most 1.1 % (5 of 400) is 4 binomial
    // standard errors above 1.08 expected.
    assert!(both as f64 >= 0.99 * total, "{both}");
    assert_eq!(flagged, 0);
    // Binomial: 400 · 0.481 = 192.5 ± 10 found with no floor; 4 standard errors.
    assert!(
        (both_zero as f64 - 0.481 * total).abs() <= 40.0,
        "{both_zero}"
    );

    // (c) the fixed floor is kept, the measurement reported beside it.
    let zero_run = run_json(&zero_out);
    let fixed = &zero_run["floors"][1];
    assert_eq!(fixed["origin"], "fixed");
    assert_eq!(fixed["floor_arcsec"], 0.0);
    assert_eq!(fixed["measured_arcsec"].as_f64(), Some(floor));
    assert_eq!(
        zero_run["match_settings"]["catalogs"][1]["systematic_arcsec"].as_f64(),
        Some(0.0)
    );
    let zero_report = fs::read_to_string(zero_out.join("report.html")).unwrap();
    assert!(zero_report.contains("0.000 (fixed)"), "report.html");
    assert!(
        zero_stdout.contains(&format!(
            "floor used for loose: 0.000\" fixed in the plan (measured {floor:.3}\" from {} pairs)",
            n_pairs as u64
        )),
        "{zero_stdout}"
    );
    // The measured floor is more than 2 times the stated 0.0707″ of the pairs: the
    // far-above warning stays, whichever floor is used.
    for s in [&stdout, &zero_stdout] {
        assert!(s.contains("warning: the floor of loose"), "{s}");
    }

    // The false-match estimate saw the tolerances of the match: its real
    // candidates are the match's candidate pairs.
    for (r, l) in [
        (&run, &links),
        (&zero_run, &read_parquet(&zero_out.join("links.parquet"))),
    ] {
        let fm = &r["false_matches"][0];
        assert_eq!(fm["real_candidates"].as_u64(), Some(l.num_rows() as u64));
    }
}

#[test]
fn a_fixed_floor_overrides_the_measurement() {
    let dir = tempfile::tempdir().unwrap();
    let (out, _) = build(dir.path(), "systematic_arcsec = 0.1");
    let run = run_json(&out);
    let f = &run["floors"][1];
    assert_eq!(f["origin"], "fixed");
    assert_eq!(f["floor_arcsec"], 0.1);
    assert!(f["measured_arcsec"].as_f64().unwrap() > 0.15, "{f}");
    assert_eq!(
        run["match_settings"]["catalogs"][1]["systematic_arcsec"].as_f64(),
        Some(0.1)
    );
    // With 0.1″ the tolerance is 3.439 · sqrt(2·0.05² + 0.1²) = 0.421″ and a
    // true pair lies beyond it with probability exp(−0.421²/(2·0.2121²)) = 0.139
    // (by hand): between the runs with 0 and with the measured floor.
    let (both, _) = pairs(&out);
    println!("objects of both catalogs with a fixed 0.1\": {both}");
    assert!((both as f64 - 0.861 * 400.0).abs() <= 4.0 * (400.0f64 * 0.861 * 0.139).sqrt());
}

#[test]
fn cell_workers_match_with_the_measured_floor() {
    // `fluxloom cells` writes the floors in force into each cell; `cell-worker`
    // matches with them, not with the plan's open floor (0): the workers' links
    // are the build's.
    let dir = tempfile::tempdir().unwrap();
    let (out, _) = build(dir.path(), "");
    let plan = dir.path().join("plan.toml");
    let cells = dir.path().join("cells");
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["cells", plan.to_str().unwrap(), "--quiet", "--out"])
        .arg(&cells)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let (mut links, mut objects) = (0, 0);
    for entry in fs::read_dir(&cells).unwrap() {
        let path = entry.unwrap().path();
        let got = common::run_cell_worker(&plan, &path);
        links += got.links.len();
        objects += got.objects.len();
    }
    let build_links = read_parquet(&out.join("links.parquet")).num_rows();
    let build_objects = read_parquet(&out.join("objects.parquet")).num_rows();
    println!("workers: {links} links, {objects} objects; build: {build_links}, {build_objects}");
    assert_eq!((links, objects), (build_links, build_objects));
}
