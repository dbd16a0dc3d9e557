//! The files a build writes do not depend on how the sky was cut into cells nor
//! on the number of threads, nor on how many objects are written at a time:
//! byte for byte.

use std::path::Path;
use std::process::Command;

mod common;

use common::{assert_same_files, output_files};

fn build(out: &Path, extra: &[&str]) {
    let status = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["--quiet", "build", "demo_catalogs/fl1/plan.toml", "--out"])
        .arg(out)
        .args(extra)
        .output()
        .expect("fluxloom runs");
    assert!(
        status.status.success(),
        "{}",
        String::from_utf8_lossy(&status.stderr)
    );
}

#[test]
fn outputs_are_identical_for_any_cell_order_and_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let reference = dir.path().join("reference");
    build(&reference, &[]);
    let expected = output_files(&reference);
    assert!(
        expected.len() >= 4,
        "{:?}",
        expected.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    for (name, extra) in [
        ("one_cell", vec!["--cell-order", "0"]),
        ("small_cells", vec!["--cell-order", "11"]),
        ("one_thread", vec!["--threads", "1"]),
        (
            "three_threads_small_cells",
            vec!["--threads", "3", "--cell-order", "9"],
        ),
    ] {
        let out = dir.path().join(name);
        build(&out, &extra);
        assert_same_files(&out, &reference, name);
    }
}

#[test]
fn a_links_only_plan_writes_the_same_links_and_nothing_else() {
    let dir = tempfile::tempdir().unwrap();
    let demo = std::fs::canonicalize("demo_catalogs/fl1").unwrap();
    let text = std::fs::read_to_string(demo.join("plan.toml")).unwrap();
    let mut plan = String::new();
    for line in text.lines() {
        let line = ["file = \"", "schema = \"", "coverage = \""]
            .iter()
            .fold(line.to_string(), |l, key| {
                l.replace(key, &format!("{key}{}/", demo.display()))
            });
        if line.starts_with("exports") {
            plan.push_str("tables = [\"links\"]\n");
            continue;
        }
        plan.push_str(&line);
        plan.push('\n');
    }
    let plan_path = dir.path().join("links_only.toml");
    std::fs::write(&plan_path, plan).unwrap();
    let full = dir.path().join("full");
    build(&full, &[]);
    let only = dir.path().join("only");
    let status = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["--quiet", "build"])
        .arg(&plan_path)
        .arg("--out")
        .arg(&only)
        .output()
        .unwrap();
    assert!(
        status.status.success(),
        "{}",
        String::from_utf8_lossy(&status.stderr)
    );
    let names: Vec<String> = output_files(&only).into_iter().map(|f| f.0).collect();
    assert_eq!(names, ["links.parquet", "run.json"]);
    let read = |p: &Path| {
        let f = std::fs::File::open(p).unwrap();
        parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(f)
            .unwrap()
            .build()
            .unwrap()
            .map(|b| b.unwrap())
            .collect::<Vec<_>>()
    };
    // Same rows and values (the metadata differs: it carries the plan).
    assert_eq!(
        read(&only.join("links.parquet")),
        read(&full.join("links.parquet"))
    );
}
