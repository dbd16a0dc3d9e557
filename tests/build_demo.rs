//! `fluxloom build` end to end on the demo field, checked against the truth the
//! demo generator wrote beside the catalogs (`demo_catalogs/fl1/truth_*.csv`).

mod common;

use common::{read_csv_rows, read_parquet};
use std::collections::{BTreeMap, HashMap, HashSet};
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::{DataType, Float64Type, UInt32Type};

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn demo() -> PathBuf {
    repo().join("demo_catalogs/fl1")
}

/// Runs `fluxloom build` on `plan` into `out`; returns (exit code, stdout, stderr).
fn build(plan: &Path, out: &Path) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args([
            "build",
            plan.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ])
        .output()
        .unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

fn text(batch: &RecordBatch, name: &str) -> Vec<Option<String>> {
    let col = arrow::compute::cast(
        batch
            .column_by_name(name)
            .unwrap_or_else(|| panic!("no column {name}")),
        &DataType::Utf8,
    )
    .unwrap();
    let s = col.as_string::<i32>();
    (0..s.len())
        .map(|i| s.is_valid(i).then(|| s.value(i).to_string()))
        .collect()
}

fn floats(batch: &RecordBatch, name: &str) -> Vec<Option<f64>> {
    let a = batch
        .column_by_name(name)
        .unwrap_or_else(|| panic!("no column {name}"))
        .as_primitive::<Float64Type>();
    (0..a.len())
        .map(|i| a.is_valid(i).then(|| a.value(i)))
        .collect()
}

/// The built demo field, shared by the tests (built once per test binary).
fn built() -> &'static (PathBuf, String) {
    static BUILT: std::sync::OnceLock<(PathBuf, String)> = std::sync::OnceLock::new();
    BUILT.get_or_init(|| {
        let out = std::env::temp_dir().join(format!("fluxloom-demo-{}", std::process::id()));
        let _ = fs::remove_dir_all(&out);
        let (code, stdout, stderr) = build(&demo().join("plan.toml"), &out);
        assert_eq!(code, 0, "{stderr}");
        (out, stdout)
    })
}

#[test]
fn matches_agree_with_the_truth() {
    let (out, stdout) = built();
    let objects = read_parquet(&out.join("objects.parquet"));
    let truth = read_csv_rows(&demo().join("truth_objects.csv"));
    let members = read_csv_rows(&demo().join("truth_members.csv"));

    // Survey source -> truth objects it contains.
    let mut truth_of: HashMap<(String, String), Vec<String>> = HashMap::new();
    for m in &members {
        let t = m["truth_id"].clone();
        let key = (m["survey"].clone(), m["source_id"].clone());
        let entry = truth_of.entry(key).or_default();
        if !t.is_empty() {
            entry.push(t);
        }
    }
    // Isolated truth objects: no other truth object within 10".
    let pos: Vec<(String, f64, f64)> = truth
        .iter()
        .map(|t| {
            (
                t["truth_id"].clone(),
                t["ra_deg"].parse().unwrap(),
                t["dec_deg"].parse().unwrap(),
            )
        })
        .collect();
    let mut isolated: HashSet<String> = HashSet::new();
    for (i, (id, ra, dec)) in pos.iter().enumerate() {
        let near = pos.iter().enumerate().any(|(j, (_, r2, d2))| {
            j != i && fluxloom::sky::separation::separation_deg(*ra, *dec, *r2, *d2) * 3600.0 < 10.0
        });
        if !near {
            isolated.insert(id.clone());
        }
    }

    // Each output object's members, as truth ids.
    let catalogs = ["ask", "kos", "lantern", "harrier", "cinder", "ember"];
    let ids: Vec<Vec<Option<String>>> = catalogs
        .iter()
        .map(|c| text(&objects, &format!("{c}_source_id")))
        .collect();
    let mut objects_of_truth: HashMap<String, HashSet<usize>> = HashMap::new();
    let mut truths_of_object: Vec<HashSet<String>> = vec![HashSet::new(); objects.num_rows()];
    let mut artefacts = 0;
    for row in 0..objects.num_rows() {
        for (c, col) in catalogs.iter().zip(&ids) {
            if let Some(source) = &col[row] {
                let t = truth_of
                    .get(&(c.to_string(), source.clone()))
                    .unwrap_or_else(|| panic!("{c}:{source} not in truth"));
                if t.is_empty() {
                    artefacts += 1;
                }
                for id in t {
                    objects_of_truth.entry(id.clone()).or_default().insert(row);
                    truths_of_object[row].insert(id.clone());
                }
            }
        }
    }
    // Completeness: an isolated truth object seen by two or more surveys ends up in one object.
    let seen_twice: Vec<&String> = isolated
        .iter()
        .filter(|t| members.iter().filter(|m| &m["truth_id"] == *t).count() >= 2)
        .collect();
    let complete = seen_twice
        .iter()
        .filter(|t| objects_of_truth[**t].len() == 1)
        .count();
    let completeness = complete as f64 / seen_twice.len() as f64;
    // Purity: an object holding an isolated truth object holds nothing else.
    let holding: Vec<&HashSet<String>> = truths_of_object
        .iter()
        .filter(|s| s.iter().any(|t| isolated.contains(t)))
        .collect();
    let pure = holding.iter().filter(|s| s.len() == 1).count();
    let purity = pure as f64 / holding.len() as f64;
    println!(
        "isolated truth objects seen twice or more: {}; completeness {completeness:.4}; purity {purity:.4} over {} objects; artefact sources {artefacts}",
        seen_twice.len(),
        holding.len()
    );
    assert!(seen_twice.len() > 200, "{}", seen_twice.len());
    assert!(completeness >= 0.99, "completeness {completeness}");
    assert!(purity >= 0.99, "purity {purity}");
    assert!(stdout.contains("matched"), "{stdout}");
}

#[test]
fn blends_are_flagged_and_never_handed_to_one_object() {
    let (out, _) = built();
    let objects = read_parquet(&out.join("objects.parquet"));
    let members = read_csv_rows(&demo().join("truth_members.csv"));
    let mut ember_truth: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for m in members
        .iter()
        .filter(|m| m["survey"] == "ember" && !m["truth_id"].is_empty())
    {
        ember_truth
            .entry(m["source_id"].clone())
            .or_default()
            .push(m["truth_id"].clone());
    }
    let blended: Vec<(&String, &Vec<String>)> =
        ember_truth.iter().filter(|(_, t)| t.len() == 2).collect();
    assert!(!blended.is_empty());
    let ember = text(&objects, "ember_source_id");
    let n_catalogs = objects.column_by_name("n_catalogs").unwrap().clone();
    let n_catalogs = arrow::compute::cast(&n_catalogs, &DataType::UInt32).unwrap();
    let n_catalogs = n_catalogs.as_primitive::<UInt32Type>();
    let flags = objects
        .column_by_name("flags")
        .unwrap()
        .as_primitive::<UInt32Type>();
    // The true objects of each output row's members other than its ember source
    // (any finer catalog: the dominant source of a contaminated one may be a
    // protostar that only the infrared catalogs see).
    let truth_of: HashMap<(&str, &str), &str> = members
        .iter()
        .map(|m| {
            (
                (m["survey"].as_str(), m["source_id"].as_str()),
                m["truth_id"].as_str(),
            )
        })
        .collect();
    let finer = ["ask", "kos", "lantern", "cinder"];
    let finer_ids: Vec<Vec<Option<String>>> = finer
        .iter()
        .map(|c| text(&objects, &format!("{c}_source_id")))
        .collect();
    let holders_of = |row: usize| -> Vec<&str> {
        finer
            .iter()
            .zip(&finer_ids)
            .filter_map(|(c, ids)| ids[row].as_deref().and_then(|id| truth_of.get(&(*c, id))))
            .copied()
            .collect()
    };
    let (mut flagged, mut contaminated) = (0, 0);
    for (source, truths) in &blended {
        let row = ember
            .iter()
            .position(|e| e.as_deref() == Some(source.as_str()))
            .unwrap();
        // A blend (bit value 2) stands alone; a contaminated source (bit 256)
        // stays with the object of one of its two truth objects, the one whose
        // companion is faint; otherwise it was matched to one of two objects that
        // no finer catalog separated.
        if flags.value(row) & 2 != 0 {
            flagged += 1;
            assert_eq!(
                n_catalogs.value(row),
                1,
                "a blend is kept as its own object"
            );
        } else if flags.value(row) & 256 != 0 {
            contaminated += 1;
            let holders = holders_of(row);
            assert!(
                holders
                    .iter()
                    .any(|t| truths.iter().any(|x| x.as_str() == *t)),
                "{source}: contaminated, held by {holders:?}, truth {truths:?}"
            );
        }
    }
    println!(
        "ember blends in the truth: {}; flagged as blend: {flagged}; kept contaminated: {contaminated}",
        blended.len()
    );
    assert!(
        (flagged + contaminated) as f64 >= 0.8 * blended.len() as f64,
        "{flagged} + {contaminated} of {}",
        blended.len()
    );
}

#[test]
fn not_covered_is_really_outside_the_footprint_and_limits_stay_out_of_flux_columns() {
    let (out, _) = built();
    let objects = read_parquet(&out.join("objects.parquet"));
    let moc =
        fluxloom::sky::coverage::Coverage::from_moc_file(&demo().join("harrier_moc.txt")).unwrap();
    let ra = floats(&objects, "ra_deg");
    let dec = floats(&objects, "dec_deg");
    let status = text(&objects, "wise_w1_status");
    let mut not_covered = 0;
    for i in 0..objects.num_rows() {
        let inside = moc.contains(ra[i].unwrap(), dec[i].unwrap());
        if status[i].as_deref() == Some("not_covered") {
            not_covered += 1;
            assert!(
                !inside,
                "object {i} is inside the footprint but not_covered"
            );
        }
    }
    assert!(not_covered > 50, "{not_covered}");

    // Upper limits never share a column with detections, in every band.
    for field in objects.schema().fields() {
        let Some(band) = field.name().strip_suffix("_status") else {
            continue;
        };
        if objects.column_by_name(&format!("{band}_flux_jy")).is_none() {
            continue;
        }
        let status = text(&objects, field.name());
        let flux = floats(&objects, &format!("{band}_flux_jy"));
        let ulim = floats(&objects, &format!("{band}_ulim_jy"));
        for i in 0..objects.num_rows() {
            let detected = status[i].as_deref() == Some("detected");
            assert_eq!(
                flux[i].is_some(),
                detected,
                "{band} row {i}: {:?}",
                status[i]
            );
            if detected {
                assert!(ulim[i].is_none(), "{band} row {i}");
            }
        }
    }
}

#[test]
fn detected_fluxes_agree_with_the_truth_within_their_errors() {
    let (out, _) = built();
    let phot = read_parquet(&out.join("photometry.parquet"));
    let truth = read_csv_rows(&demo().join("truth_objects.csv"));
    let members = read_csv_rows(&demo().join("truth_members.csv"));
    let truth_by_id: HashMap<&str, &HashMap<String, String>> =
        truth.iter().map(|t| (t["truth_id"].as_str(), t)).collect();
    let mut truth_of: HashMap<(String, String), Vec<String>> = HashMap::new();
    for m in &members {
        truth_of
            .entry((m["survey"].clone(), m["source_id"].clone()))
            .or_default()
            .push(m["truth_id"].clone());
    }
    let (catalog, source, band, status) = (
        text(&phot, "catalog"),
        text(&phot, "source_id"),
        text(&phot, "band"),
        text(&phot, "status"),
    );
    let (flux, err) = (floats(&phot, "flux_jy"), floats(&phot, "flux_err_jy"));
    let mut chi2: BTreeMap<String, (f64, usize)> = BTreeMap::new();
    for i in 0..phot.num_rows() {
        if status[i].as_deref() != Some("detected") {
            continue;
        }
        let (Some(f), Some(e)) = (flux[i], err[i]) else {
            continue;
        };
        if f / e < 10.0 {
            continue; // near the detection limit only upward fluctuations are detected
        }
        let key = (catalog[i].clone().unwrap(), source[i].clone().unwrap());
        let Some(t) = truth_of.get(&key) else {
            continue;
        };
        let [t] = t.as_slice() else { continue };
        if t.is_empty() {
            continue;
        }
        let b = band[i].clone().unwrap();
        let truth_flux: f64 = truth_by_id[t.as_str()][&format!("{b}_flux_jy")]
            .parse()
            .unwrap();
        let entry = chi2.entry(format!("{}:{b}", key.0)).or_insert((0.0, 0));
        entry.0 += ((f - truth_flux) / e).powi(2);
        entry.1 += 1;
    }
    assert!(chi2.len() >= 20, "{chi2:?}");
    for (band, (sum, n)) in &chi2 {
        let mean = sum / *n as f64;
        println!("{band:<20} n = {n:>5}  mean chi2 = {mean:.3}");
        if *n >= 30 {
            assert!(
                (0.6..1.6).contains(&mean),
                "{band}: mean chi-square {mean} over {n}"
            );
        }
    }
}

#[test]
fn outputs_read_back_and_exports_agree() {
    let (out, _) = built();
    let objects = read_parquet(&out.join("objects.parquet"));
    let run: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    assert_eq!(
        run["matching"]["objects"].as_u64().unwrap() as usize,
        objects.num_rows()
    );
    let meta = fluxloom::output::parquet::read_metadata(&out.join("objects.parquet")).unwrap();
    for key in [
        "fluxloom.bands",
        "fluxloom.plan",
        "fluxloom.flags",
        "fluxloom.field",
    ] {
        assert!(meta.iter().any(|(k, _)| k == key), "{key} missing");
    }
    let ids = text(&objects, "object_id");
    let ks = floats(&objects, "tmass_ks_flux_jy");

    let fits = fluxloom::catalog::fits::read_fits(
        &out.join("objects.fits"),
        &fluxloom::catalog::fits::FitsOptions {
            hdu: None,
            batch_rows: 100_000,
        },
    )
    .unwrap()
    .collect_all()
    .unwrap();
    let fits = arrow::compute::concat_batches(&fits[0].schema(), &fits).unwrap();
    assert_eq!(text(&fits, "object_id"), ids);
    assert_eq!(floats(&fits, "tmass_ks_flux_jy"), ks);

    let vot = fluxloom::catalog::votable::read_votable(
        &out.join("objects.vot"),
        &fluxloom::catalog::votable::VotableOptions {
            table_index: 0,
            batch_rows: 100_000,
        },
    )
    .unwrap()
    .collect_all()
    .unwrap();
    let vot = arrow::compute::concat_batches(&vot[0].schema(), &vot).unwrap();
    assert_eq!(text(&vot, "object_id"), ids);
    assert_eq!(floats(&vot, "tmass_ks_flux_jy"), ks);
    assert_eq!(
        text(&vot, "tmass_ks_status"),
        text(&objects, "tmass_ks_status")
    );
}

#[test]
fn a_second_run_gives_identical_files() {
    let (out, _) = built();
    let again = std::env::temp_dir().join(format!("fluxloom-demo-again-{}", std::process::id()));
    let _ = fs::remove_dir_all(&again);
    let (code, _, stderr) = build(&demo().join("plan.toml"), &again);
    assert_eq!(code, 0, "{stderr}");
    let mut names: Vec<String> = fs::read_dir(out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert!(names.len() >= 10, "{names:?}");
    for name in names {
        assert_eq!(
            fs::read(out.join(&name)).unwrap(),
            fs::read(again.join(&name)).unwrap(),
            "{name} differs"
        );
    }
    let _ = fs::remove_dir_all(&again);
}

#[test]
fn a_run_that_fails_leaves_no_output_behind() {
    let dir = tempfile::tempdir().unwrap();
    for entry in fs::read_dir(demo()).unwrap() {
        let entry = entry.unwrap();
        fs::copy(entry.path(), dir.path().join(entry.file_name())).unwrap();
    }
    // Cut the last catalog of the plan in half: the failure comes after every other
    // catalog was read and would have been written.
    let fits = dir.path().join("ember.fits");
    let bytes = fs::read(&fits).unwrap();
    fs::write(&fits, &bytes[..bytes.len() / 2]).unwrap();
    let out = dir.path().join("out");
    let (code, _, stderr) = build(&dir.path().join("plan.toml"), &out);
    assert_eq!(code, 1);
    assert!(stderr.starts_with("fluxloom: error: "), "{stderr}");
    assert!(stderr.contains("ember.fits"), "{stderr}");
    let left: Vec<_> = fs::read_dir(&out)
        .map(|d| d.map(|e| e.unwrap().file_name()).collect())
        .unwrap_or_default();
    assert!(left.is_empty(), "{left:?}");
}
