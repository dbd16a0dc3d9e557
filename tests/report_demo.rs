//! `fluxloom build` writes the match audit (report.html, report.json) of the
//! demo field; its numbers are checked against a direct recount over the
//! output tables, against the truth the demo generator wrote
//! (`demo_catalogs/fl1/truth_members.csv`), and the page is parsed as XML.

mod common;

use common::read_parquet;
use std::collections::{BTreeMap, HashMap, HashSet};
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::{DataType, Float64Type};
use serde_json::Value;

fn demo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo_catalogs/fl1")
}

/// The demo plan without moving objects (`max_motion_masyr = 0`), with absolute
/// paths, in the temporary folder. The hard-case cards checked here need the
/// demo's ambiguous group: a galaxy seen by five catalogs that the stationary
/// match splits in two, and that the moving hypothesis, with no catalog
/// declaring it extended, joins into one `moving` object.
fn stationary_plan() -> PathBuf {
    let text = fs::read_to_string(demo().join("plan.toml")).unwrap();
    let mut plan = String::new();
    for line in text.lines() {
        let line = ["file = \"", "schema = \"", "coverage = \""]
            .iter()
            .fold(line.to_string(), |l, key| {
                l.replace(key, &format!("{key}{}/", demo().display()))
            });
        plan.push_str(&line);
        plan.push('\n');
        if line == "[match]" {
            plan.push_str("max_motion_masyr = 0.0\n");
        }
    }
    let path = std::env::temp_dir().join(format!("fluxloom-report-{}.toml", std::process::id()));
    fs::write(&path, plan).unwrap();
    path
}

/// The demo field built once per test binary: (folder, build stdout).
fn built() -> &'static (PathBuf, String) {
    static BUILT: std::sync::OnceLock<(PathBuf, String)> = std::sync::OnceLock::new();
    BUILT.get_or_init(|| {
        let out = std::env::temp_dir().join(format!("fluxloom-report-{}", std::process::id()));
        let _ = fs::remove_dir_all(&out);
        let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
            .args(["build", stationary_plan().to_str().unwrap()])
            .args(["--out", out.to_str().unwrap(), "--quiet"])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        (out, String::from_utf8_lossy(&o.stdout).into_owned())
    })
}

fn json(path: &Path) -> Value {
    serde_json::from_str(&fs::read_to_string(path).unwrap()).unwrap()
}

fn text(batch: &RecordBatch, name: &str) -> Vec<String> {
    let col = arrow::compute::cast(batch.column_by_name(name).unwrap(), &DataType::Utf8).unwrap();
    let s = col.as_string::<i32>();
    (0..s.len())
        .map(|i| {
            if s.is_valid(i) {
                s.value(i).to_string()
            } else {
                String::new()
            }
        })
        .collect()
}

fn floats(batch: &RecordBatch, name: &str) -> Vec<f64> {
    let col =
        arrow::compute::cast(batch.column_by_name(name).unwrap(), &DataType::Float64).unwrap();
    let a = col.as_primitive::<Float64Type>();
    (0..a.len()).map(|i| a.value(i)).collect()
}

fn bools(batch: &RecordBatch, name: &str) -> Vec<bool> {
    let a = batch.column_by_name(name).unwrap().as_boolean();
    (0..a.len()).map(|i| a.value(i)).collect()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        (v[n / 2 - 1] + v[n / 2]) / 2.0
    }
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * (1.0 + a.abs().max(b.abs()))
}

#[test]
fn every_number_agrees_with_a_direct_count_over_the_tables() {
    let (out, stdout) = built();
    let report = json(&out.join("report.json"));
    let run = json(&out.join("run.json"));
    let objects = read_parquet(&out.join("objects.parquet"));
    let links = read_parquet(&out.join("links.parquet"));
    let phot = read_parquet(&out.join("photometry.parquet"));
    assert!(stdout.contains("report.html"), "{stdout}");

    // Objects, by number of catalogs and by flag bit (legend from the file's metadata).
    assert_eq!(report["objects"]["objects"], objects.num_rows());
    let mut by_catalogs: BTreeMap<String, u64> = BTreeMap::new();
    for n in floats(&objects, "n_catalogs") {
        *by_catalogs.entry((n as u64).to_string()).or_default() += 1;
    }
    assert_eq!(
        report["objects"]["by_catalogs"],
        serde_json::to_value(&by_catalogs).unwrap()
    );
    let meta = fluxloom::output::parquet::read_metadata(&out.join("objects.parquet")).unwrap();
    let legend: Value =
        serde_json::from_str(&meta.iter().find(|(k, _)| k == "fluxloom.flags").unwrap().1).unwrap();
    let flags = floats(&objects, "flags");
    let mut by_flag: BTreeMap<String, u64> = BTreeMap::new();
    for entry in legend.as_array().unwrap() {
        let bit = entry["bit"].as_u64().unwrap();
        let n = flags.iter().filter(|&&f| (f as u64) & bit != 0).count() as u64;
        if n > 0 {
            by_flag.insert(entry["name"].as_str().unwrap().to_string(), n);
        }
    }
    assert_eq!(
        report["objects"]["by_flag"],
        serde_json::to_value(&by_flag).unwrap()
    );

    // Catalog pairs: candidates, chosen, medians, histogram totals.
    let (ca, cb) = (text(&links, "catalog_a"), text(&links, "catalog_b"));
    let (sep, d) = (floats(&links, "sep_arcsec"), floats(&links, "norm_dist"));
    let chosen = bools(&links, "chosen");
    let pairs = report["pairs"].as_array().unwrap();
    let distinct: HashSet<(String, String)> = ca
        .iter()
        .zip(&cb)
        .map(|(a, b)| {
            if a < b {
                (a.clone(), b.clone())
            } else {
                (b.clone(), a.clone())
            }
        })
        .collect();
    assert_eq!(pairs.len(), distinct.len());
    for p in pairs {
        let (a, b) = (
            p["catalog_a"].as_str().unwrap(),
            p["catalog_b"].as_str().unwrap(),
        );
        let rows: Vec<usize> = (0..links.num_rows())
            .filter(|&i| (ca[i] == a && cb[i] == b) || (ca[i] == b && cb[i] == a))
            .collect();
        let picked: Vec<usize> = rows.iter().copied().filter(|&i| chosen[i]).collect();
        assert_eq!(p["candidates"], rows.len(), "{a} x {b}");
        assert_eq!(p["chosen"], picked.len(), "{a} x {b}");
        let md = median(picked.iter().map(|&i| d[i]).collect());
        assert!(
            close(p["median_norm_dist"].as_f64().unwrap(), md),
            "{a} x {b}"
        );
        let ms = median(picked.iter().map(|&i| sep[i]).collect());
        assert!(
            close(p["median_sep_arcsec"].as_f64().unwrap(), ms),
            "{a} x {b}"
        );
        let beyond = picked.iter().filter(|&&i| d[i] > 3.439).count() as f64 / picked.len() as f64;
        assert!(close(p["fraction_beyond_3439"].as_f64().unwrap(), beyond));
        // The d histogram, recounted in its own bins.
        let h = &p["norm_dist_histogram"];
        let edges: Vec<f64> = h["edges"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        let mut counts = vec![0u64; edges.len() - 1];
        for &i in &picked {
            let k = edges[1..]
                .iter()
                .position(|&e| d[i] < e)
                .unwrap_or(counts.len() - 1);
            counts[k] += 1;
        }
        assert_eq!(
            h["counts"],
            serde_json::to_value(&counts).unwrap(),
            "{a} x {b}"
        );
        let expected: f64 = h["expected"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .sum();
        assert!((expected - picked.len() as f64).abs() < 1e-6);
        let s = &p["sep_histogram"]["counts"];
        assert_eq!(
            s.as_array()
                .unwrap()
                .iter()
                .map(|x| x.as_u64().unwrap())
                .sum::<u64>(),
            picked.len() as u64
        );
    }

    // Band statuses, recounted in photometry.parquet.
    let (pc, pb, ps) = (
        text(&phot, "catalog"),
        text(&phot, "band"),
        text(&phot, "status"),
    );
    let mut bands: BTreeMap<(String, String), BTreeMap<String, u64>> = BTreeMap::new();
    for i in 0..phot.num_rows() {
        *bands
            .entry((pc[i].clone(), pb[i].clone()))
            .or_default()
            .entry(ps[i].clone())
            .or_default() += 1;
    }
    let reported = report["bands"].as_array().unwrap();
    assert_eq!(reported.len(), bands.len());
    for b in reported {
        let key = (
            b["catalog"].as_str().unwrap().to_string(),
            b["band"].as_str().unwrap().to_string(),
        );
        assert_eq!(
            b["by_status"],
            serde_json::to_value(&bands[&key]).unwrap(),
            "{key:?}"
        );
    }

    // Offsets and false matches are run.json's, with catalog names.
    let names: Vec<&str> = run["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["catalog"].as_str().unwrap())
        .collect();
    let offsets = report["offsets"].as_array().unwrap();
    assert_eq!(offsets.len(), run["offsets"].as_array().unwrap().len());
    for (r, o) in offsets.iter().zip(run["offsets"].as_array().unwrap()) {
        assert_eq!(r["catalog"], names[o["catalog"].as_u64().unwrap() as usize]);
        assert_eq!(
            r["initial"]["dra_cosdec_arcsec"],
            o["initial"]["dra_cosdec_arcsec"]
        );
        assert_eq!(
            r["residual"]["width_dec_arcsec"],
            o["residual"]["scatter_dec_arcsec"]
        );
        assert_eq!(r["applied_arcsec"], o["applied_arcsec"]);
    }
    let fm = report["false_matches"].as_array().unwrap();
    assert_eq!(fm.len(), run["false_matches"].as_array().unwrap().len());
    for (r, f) in fm.iter().zip(run["false_matches"].as_array().unwrap()) {
        assert_eq!(
            r["catalog_b"],
            names[f["catalog_b"].as_u64().unwrap() as usize]
        );
        assert_eq!(r["expected_false"], f["shifted_candidates_mean"]);
        assert_eq!(r["real_candidates"], f["real_candidates"]);
    }

    // Hard cases: every blend (bit 2) counted; cards capped at 50.
    let blends = flags.iter().filter(|&&f| (f as u64) & 2 != 0).count() as u64;
    assert_eq!(report["blends"], blends);
    let ambiguous = flags.iter().filter(|&&f| (f as u64) & 1 != 0).count();
    let groups = report["ambiguous_groups"].as_u64().unwrap();
    assert!(
        groups >= 1 && groups as usize <= ambiguous,
        "{groups} groups of {ambiguous}"
    );
    let total = groups + blends;
    assert_eq!(report["cards_shown"], total.min(50));
    assert_eq!(report["cards_not_shown"], total - total.min(50));
    // The demo's errors are right and its offset corrected: nothing to warn about.
    assert_eq!(
        report["warnings"],
        serde_json::json!([]),
        "{}",
        report["warnings"]
    );
}

/// Survey source -> the truth objects it holds (empty for an artefact).
fn truth_of() -> HashMap<(String, String), HashSet<String>> {
    let text = fs::read_to_string(demo().join("truth_members.csv")).unwrap();
    let mut m: HashMap<(String, String), HashSet<String>> = HashMap::new();
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let e = m.entry((f[0].to_string(), f[1].to_string())).or_default();
        if !f[2].is_empty() {
            e.insert(f[2].to_string());
        }
    }
    m
}

#[test]
fn estimated_false_matches_agree_with_the_truth() {
    let (out, _) = built();
    let report = json(&out.join("report.json"));
    let links = read_parquet(&out.join("links.parquet"));
    let truth = truth_of();
    let (ca, sa, cb, sb) = (
        text(&links, "catalog_a"),
        text(&links, "source_id_a"),
        text(&links, "catalog_b"),
        text(&links, "source_id_b"),
    );
    let chosen = bools(&links, "chosen");
    // A candidate pair is false when its two sources share no truth object.
    let mut false_candidates = 0usize;
    let mut false_chosen = 0usize;
    let mut per_pair: BTreeMap<(String, String), usize> = BTreeMap::new();
    for i in 0..links.num_rows() {
        let a = &truth[&(ca[i].clone(), sa[i].clone())];
        let b = &truth[&(cb[i].clone(), sb[i].clone())];
        if a.is_disjoint(b) {
            *per_pair.entry((ca[i].clone(), cb[i].clone())).or_default() += 1;
            false_candidates += 1;
            if chosen[i] {
                false_chosen += 1;
            }
        }
    }
    for f in report["false_matches"].as_array().unwrap() {
        let key = (
            f["catalog_a"].as_str().unwrap().to_string(),
            f["catalog_b"].as_str().unwrap().to_string(),
        );
        println!(
            "{key:?}: estimated {:.2}, truth {}",
            f["expected_false"].as_f64().unwrap(),
            per_pair.get(&key).copied().unwrap_or(0)
        );
    }
    let estimated: f64 = report["false_matches"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["expected_false"].as_f64().unwrap())
        .sum();
    println!(
        "false candidate pairs: estimated {estimated:.1}, in the truth {false_candidates} (of which chosen {false_chosen}), over {} candidates",
        links.num_rows()
    );
    // The shifted copies count chance neighbours as if the sky were empty around
    // each source; but a survey cannot hold a second source within its
    // resolution of the true counterpart (the demo merges truth objects closer
    // than 0.8 x the resolution into one source, as real surveys do), and
    // most tolerances here are below the resolutions. So the estimate is an
    // upper bound of the chance candidates: on this field the truth must lie
    // between a tenth of the estimate and the estimate itself.
    let truth_n = false_candidates as f64;
    assert!(estimated > 5.0, "{estimated}");
    assert!(
        truth_n <= estimated && estimated <= 10.0 * truth_n.max(1.0),
        "estimated {estimated}, truth {truth_n}"
    );
    assert!(false_chosen as f64 <= truth_n);
}

#[test]
fn the_injected_offset_of_kos_is_measured_within_its_scatter() {
    let (out, _) = built();
    let report = json(&out.join("report.json"));
    let kos = report["offsets"]
        .as_array()
        .unwrap()
        .iter()
        .find(|o| o["catalog"] == "kos")
        .unwrap();
    let i = &kos["initial"];
    let (dra, ddec) = (
        i["dra_cosdec_arcsec"].as_f64().unwrap(),
        i["ddec_arcsec"].as_f64().unwrap(),
    );
    let (wra, wdec) = (
        i["width_ra_arcsec"].as_f64().unwrap(),
        i["width_dec_arcsec"].as_f64().unwrap(),
    );
    // demo_catalogs/fl1/README.md: kos was generated 0.25" east of the truth.
    assert!((dra - 0.25).abs() < wra, "{dra} vs 0.25 within {wra}");
    assert!(ddec.abs() < wdec, "{ddec} within {wdec}");
    let r = &kos["residual"];
    assert!(r["dra_cosdec_arcsec"].as_f64().unwrap().abs() < wra / 3.0);
}

#[test]
fn the_page_parses_with_plots_for_every_pair_and_cards_for_every_group() {
    use quick_xml::events::Event;
    let (out, _) = built();
    let report = json(&out.join("report.json"));
    let html = fs::read_to_string(out.join("report.html")).unwrap();
    let mut reader = quick_xml::Reader::from_str(&html);
    let mut stack: Vec<(String, String, String)> = Vec::new(); // (tag, class, id)
    let mut svg_in_pair: BTreeMap<String, usize> = BTreeMap::new();
    let mut cards: BTreeMap<String, usize> = BTreeMap::new();
    let mut svgs = 0;
    loop {
        let ev = reader
            .read_event()
            .unwrap_or_else(|e| panic!("report.html at {}: {e}", reader.buffer_position()));
        let (start, empty) = match &ev {
            Event::Start(e) => (Some(e.clone()), false),
            Event::Empty(e) => (Some(e.clone()), true),
            Event::End(_) => {
                stack.pop();
                (None, false)
            }
            Event::Eof => break,
            _ => (None, false),
        };
        let Some(e) = start else { continue };
        let tag = String::from_utf8_lossy(e.name().as_ref()).into_owned();
        assert_ne!(tag, "script", "the page holds a script");
        let mut class = String::new();
        let mut id = String::new();
        for a in e.attributes() {
            let a = a.unwrap();
            let v = a.unescape_value().unwrap().into_owned();
            match a.key.as_ref() {
                b"class" => class = v,
                b"id" => id = v,
                b"src" | b"href" => assert!(!v.contains("://"), "external reference {v}"),
                _ => {}
            }
        }
        if tag == "svg" {
            svgs += 1;
            if let Some((_, _, pid)) = stack.iter().rev().find(|(_, c, _)| c == "pair") {
                *svg_in_pair.entry(pid.clone()).or_default() += 1;
            }
        }
        if tag == "div" && class.starts_with("card ") {
            *cards.entry(class.clone()).or_default() += 1;
            assert!(html.contains(&format!("href=\"#{id}\"")) || !id.is_empty());
        }
        if !empty {
            stack.push((tag, class, id));
        }
    }
    assert!(stack.is_empty(), "unclosed elements {stack:?}");
    for p in report["pairs"].as_array().unwrap() {
        let id = format!(
            "pair-{}-{}",
            p["catalog_a"].as_str().unwrap(),
            p["catalog_b"].as_str().unwrap()
        );
        assert!(
            svg_in_pair.get(&id).copied().unwrap_or(0) >= 2,
            "no plots for {id}"
        );
    }
    let groups = report["ambiguous_groups"].as_u64().unwrap() as usize;
    assert_eq!(
        cards.get("card ambiguous").copied().unwrap_or(0),
        groups.min(50)
    );
    let shown: usize = cards.values().sum();
    assert_eq!(shown as u64, report["cards_shown"].as_u64().unwrap());
    assert!(svgs > 2 * report["pairs"].as_array().unwrap().len());
}

#[test]
fn a_folder_without_outputs_is_one_line_and_exit_1() {
    let dir = tempfile::tempdir().unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["report", dir.path().to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(
        String::from_utf8_lossy(&o.stderr),
        format!(
            "fluxloom: error: {}: No such file or directory (os error 2)\n",
            dir.path().join("run.json").display()
        )
    );
}

/// (object id, catalog, source id, RA, Dec) of a source in a hard group.
type SourceRow = (String, String, String, f64, f64);

fn write_parquet(path: &Path, batch: &RecordBatch) {
    let mut w =
        parquet::arrow::ArrowWriter::try_new(fs::File::create(path).unwrap(), batch.schema(), None)
            .unwrap();
    w.write(batch).unwrap();
    w.close().unwrap();
}

#[test]
fn per_pair_offsets_and_source_positions_are_used_when_the_folder_has_them() {
    use arrow::array::{ArrayRef, Float64Array, StringArray};
    use std::sync::Arc;
    let (out, _) = built();
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path();
    for f in ["objects.parquet", "photometry.parquet", "run.json"] {
        fs::copy(out.join(f), folder.join(f)).unwrap();
    }
    // Links with per-pair offsets (b minus a in each row's own orientation):
    // ask x kos pairs at (+0.1, -0.05)", every other pair at zero.
    // The build writes its own offsets; they are replaced by these.
    let links = read_parquet(&out.join("links.parquet"));
    let keep: Vec<usize> = (0..links.num_columns())
        .filter(|&k| {
            let name = links.schema().field(k).name().clone();
            name != "dra_cosdec_arcsec" && name != "ddec_arcsec"
        })
        .collect();
    let links = links.project(&keep).unwrap();
    let (ca, cb) = (text(&links, "catalog_a"), text(&links, "catalog_b"));
    let sign: Vec<f64> = (0..links.num_rows())
        .map(|i| match (ca[i].as_str(), cb[i].as_str()) {
            ("ask", "kos") => 1.0,
            ("kos", "ask") => -1.0,
            _ => 0.0,
        })
        .collect();
    let mut columns: Vec<ArrayRef> = links.columns().to_vec();
    columns.push(Arc::new(Float64Array::from_iter_values(
        sign.iter().map(|s| 0.1 * s),
    )));
    columns.push(Arc::new(Float64Array::from_iter_values(
        sign.iter().map(|s| -0.05 * s),
    )));
    let mut fields: Vec<arrow::datatypes::Field> = links
        .schema()
        .fields()
        .iter()
        .map(|f| f.as_ref().clone())
        .collect();
    for name in ["dra_cosdec_arcsec", "ddec_arcsec"] {
        fields.push(arrow::datatypes::Field::new(name, DataType::Float64, false));
    }
    let links =
        RecordBatch::try_new(Arc::new(arrow::datatypes::Schema::new(fields)), columns).unwrap();
    write_parquet(&folder.join("links.parquet"), &links);

    // Source positions for the members of the ambiguous objects.
    let objects = read_parquet(&out.join("objects.parquet"));
    let (ids, status) = (text(&objects, "object_id"), text(&objects, "status"));
    let (ra, dec) = (floats(&objects, "ra_deg"), floats(&objects, "dec_deg"));
    let catalogs = ["ask", "kos", "lantern", "harrier", "cinder", "ember"];
    let mut rows: Vec<SourceRow> = Vec::new();
    for i in 0..objects.num_rows() {
        if !status[i].split('+').any(|f| f == "ambiguous") {
            continue;
        }
        for (k, c) in catalogs.iter().enumerate() {
            let s = text(&objects, &format!("{c}_source_id"))[i].clone();
            if !s.is_empty() {
                let step = (k as f64 - 2.5) * 0.1 / 3600.0;
                rows.push((
                    ids[i].clone(),
                    c.to_string(),
                    s,
                    ra[i] + step,
                    dec[i] - step,
                ));
            }
        }
    }
    let text_col = |f: &dyn Fn(&SourceRow) -> String| -> ArrayRef {
        Arc::new(StringArray::from_iter_values(rows.iter().map(f)))
    };
    let float_col = |f: &dyn Fn(&SourceRow) -> f64| -> ArrayRef {
        Arc::new(Float64Array::from_iter_values(rows.iter().map(f)))
    };
    let hard = RecordBatch::try_from_iter([
        ("object_id", text_col(&|r| r.0.clone())),
        ("catalog", text_col(&|r| r.1.clone())),
        ("source_id", text_col(&|r| r.2.clone())),
        ("ra_deg", float_col(&|r| r.3)),
        ("dec_deg", float_col(&|r| r.4)),
        ("err_major_arcsec", float_col(&|_| 0.2)),
        ("err_minor_arcsec", float_col(&|_| 0.1)),
        ("err_pa_deg", float_col(&|_| 30.0)),
    ])
    .unwrap();
    write_parquet(&folder.join("hard_sources.parquet"), &hard);

    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["report", folder.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let report = json(&folder.join("report.json"));
    let run = json(&folder.join("run.json"));
    let pair = report["pairs"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["catalog_a"] == "ask" && p["catalog_b"] == "kos")
        .unwrap();
    let after = &pair["offsets_after"];
    assert!(
        close(after["dra_cosdec_arcsec"].as_f64().unwrap(), 0.1),
        "{after}"
    );
    assert!(
        close(after["ddec_arcsec"].as_f64().unwrap(), -0.05),
        "{after}"
    );
    assert_eq!(after["n"], pair["chosen"]);
    // Before correction: the correction applied to kos taken back out.
    let applied = &run["offsets"][0]["applied_arcsec"];
    assert_eq!(run["offsets"][0]["catalog"], 1);
    let before = &pair["offsets_before"];
    assert!(close(
        before["dra_cosdec_arcsec"].as_f64().unwrap(),
        0.1 - applied[0].as_f64().unwrap()
    ));
    assert!(close(
        before["ddec_arcsec"].as_f64().unwrap(),
        -0.05 - applied[1].as_f64().unwrap()
    ));
    let gaps = report["gaps"].to_string();
    assert!(
        !gaps.contains("dra_cosdec_arcsec") && !gaps.contains("hard_sources"),
        "{gaps}"
    );

    // The first ambiguous group's card places every source of its objects (all
    // ambiguous, so all among the rows written above) with its ellipse.
    let html = fs::read_to_string(folder.join("report.html")).unwrap();
    let whole = &html[html.find("id=\"card-1\"").unwrap()..];
    let whole = &whole[..whole.find("id=\"card-2\"").unwrap_or(whole.len())];
    let card = &whole[..whole.find("</figure>").unwrap()];
    assert!(card.contains(">sources</text>"), "{card}");
    let members = rows
        .iter()
        .filter(|r| whole.contains(&format!("<td>{}:{}</td>", r.1, r.2)))
        .count();
    assert!(members >= 2, "{whole}");
    assert_eq!(card.matches("<ellipse class=\"error\"").count(), members);
    assert!(html.contains("id=\"fig-off-ask-kos\""));
}

#[test]
fn science_classes_are_counted_when_the_folder_has_a_science_table() {
    let (out, _) = built();
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path();
    for f in [
        "objects.parquet",
        "photometry.parquet",
        "links.parquet",
        "run.json",
    ] {
        fs::copy(out.join(f), folder.join(f)).unwrap();
    }
    for args in [vec!["science", "--quiet"], vec!["report"]] {
        let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
            .args(&args)
            .arg(folder)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let science = read_parquet(&folder.join("science.parquet"));
    let column = science
        .schema()
        .fields()
        .iter()
        .map(|f| f.name().clone())
        .find(|n| n == "class" || n.ends_with("_class"))
        .unwrap();
    let mut classes: BTreeMap<String, u64> = BTreeMap::new();
    for c in text(&science, &column) {
        *classes
            .entry(if c.is_empty() { "(none)".into() } else { c })
            .or_default() += 1;
    }
    let report = json(&folder.join("report.json"));
    assert_eq!(
        report["science_classes"],
        serde_json::to_value(&classes).unwrap()
    );
    let html = fs::read_to_string(folder.join("report.html")).unwrap();
    assert!(html.contains("id=\"fig-classes\""));
}
