//! Splitting a build across processes gives the files of one build: the cells
//! as worker streams, subsets of cells merged, and a killed run resumed.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

mod common;

use common::{assert_same_files, kill_once_journaled};

use fluxloom::cli::build::prepare;
use fluxloom::crossmatch::cells::{CellRun, match_by_cells};
use fluxloom::plan::Plan;

const PLAN: &str = "demo_catalogs/fl1/plan.toml";
const ORDER: &str = "9";

fn fluxloom(args: &[&str]) -> std::process::Output {
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .arg("--quiet")
        .args(args)
        .output()
        .expect("fluxloom runs");
    assert!(
        out.status.success(),
        "fluxloom {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

fn build(out: &Path, extra: &[&str]) -> String {
    let mut args = vec!["build", PLAN, "--cell-order", ORDER, "--out"];
    let out = out.to_str().unwrap();
    args.push(out);
    args.extend_from_slice(extra);
    String::from_utf8(fluxloom(&args).stdout).unwrap()
}

/// The cells of the demo field at `ORDER` that hold sources, from `fluxloom cells`.
fn write_cells(dir: &Path) -> Vec<(u64, PathBuf)> {
    fluxloom(&[
        "cells",
        PLAN,
        "--cell-order",
        ORDER,
        "--out",
        dir.to_str().unwrap(),
    ]);
    let mut cells: Vec<(u64, PathBuf)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .map(|p| {
            let name = p.file_name().unwrap().to_string_lossy().into_owned();
            let id = name
                .strip_prefix(&format!("cell-{ORDER}-"))
                .and_then(|n| n.strip_suffix(".arrows"))
                .unwrap()
                .parse()
                .unwrap();
            (id, p)
        })
        .collect();
    cells.sort();
    cells
}

#[test]
fn subsets_of_cells_merged_equal_one_build() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole").join("fl1");
    build(&whole, &[]);
    let cells = write_cells(&dir.path().join("cells"));
    assert!(cells.len() >= 6, "{} cells", cells.len());
    // Three parts, neighbouring cells mostly in different parts.
    let mut parts = Vec::new();
    for k in 0..3 {
        let list: Vec<String> = cells
            .iter()
            .skip(k)
            .step_by(3)
            .map(|c| c.0.to_string())
            .collect();
        let out = dir.path().join(format!("part{k}")).join("fl1");
        let summary = build(&out, &["--cells", &list.join(",")]);
        assert!(summary.contains("subset:"), "{summary}");
        parts.push(out);
    }
    let merged = dir.path().join("merged").join("fl1");
    let mut args = vec!["merge", PLAN];
    args.extend(parts.iter().map(|p| p.to_str().unwrap()));
    args.extend(["--out", merged.to_str().unwrap()]);
    fluxloom(&args);
    assert_same_files(&merged, &whole, "three parts merged");

    // Two parts that leave cells out are refused.
    let mut args = vec!["merge", PLAN];
    args.extend(parts[..2].iter().map(|p| p.to_str().unwrap()));
    let incomplete = dir.path().join("incomplete");
    args.extend(["--out", incomplete.to_str().unwrap()]);
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(&args)
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("every cell must be in one part"), "{err}");
    assert!(!incomplete.exists());
}

#[test]
fn the_worker_fed_one_cell_gives_that_cells_part_of_the_whole_run() {
    let dir = tempfile::tempdir().unwrap();
    let cells = write_cells(&dir.path().join("cells"));
    let plan = Plan::from_file(Path::new(PLAN)).unwrap();
    let mut matching = plan.matching.clone();
    matching.partition_order = ORDER.parse().unwrap();
    let prepared = prepare(&plan, &matching, true).unwrap();
    let s = &prepared.setup;
    // The busiest cell and one more.
    let busiest = cells
        .iter()
        .max_by_key(|c| std::fs::metadata(&c.1).unwrap().len())
        .unwrap()
        .clone();
    for (id, path) in [busiest, cells[0].clone()] {
        let got = common::run_cell_worker(Path::new(PLAN), &path);
        let (expected, _) = match_by_cells(
            &s.sources,
            &matching,
            &s.ln_density_per_sr,
            &s.epochs,
            CellRun {
                subset: Some(vec![id]),
                ..CellRun::default()
            },
        )
        .unwrap();
        assert!(!expected.objects.is_empty(), "cell {id} holds objects");
        assert_eq!(got, expected, "cell {id}");
    }
}

#[test]
fn a_killed_build_resumes_from_its_journal_with_identical_files() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole").join("fl1");
    build(&whole, &[]);
    let out = dir.path().join("resumed").join("fl1");
    let journal = dir.path().join("resumed").join(".fl1.fluxloom-journal");
    let child = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args([
            "--quiet",
            "build",
            PLAN,
            "--cell-order",
            ORDER,
            "--threads",
            "1",
        ])
        .args(["--pause-after-cells", "3", "--out"])
        .arg(&out)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    kill_once_journaled(child, &journal, 3);
    assert!(!out.exists(), "a killed build wrote no output folder");
    let summary = build(&out, &[]);
    assert!(
        summary.contains("resumed: 3 cells taken from the journal"),
        "{summary}"
    );
    assert_same_files(&out, &whole, "resumed build");
    assert!(
        !journal.exists(),
        "the journal is removed once the folder commits"
    );
}
