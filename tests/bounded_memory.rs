//! A build within a memory limit (rows routed to sky cells through spill
//! files, matched a group of cells at a time, the groups' parts merged) writes
//! the files of a build holding everything, whatever the groups, the spills,
//! the routing margin, the cell order or the threads.

use std::path::{Path, PathBuf};
use std::process::Command;

mod common;

use common::{assert_same_files, kill_once_journaled};

/// The demo plan without its offsets and false matches, its files named
/// absolutely, writing into `out`. Its exports stay, so the limited builds'
/// exports are compared too.
fn plan_in(dir: &Path, out: &Path) -> PathBuf {
    demo_plan(dir, out, false)
}

/// The demo plan as [`plan_in`] makes it, keeping the astrometric reference,
/// the offset correction and the false-match estimate when `offsets`.
fn demo_plan(dir: &Path, out: &Path, offsets: bool) -> PathBuf {
    let demo = std::fs::canonicalize("demo_catalogs/fl1").unwrap();
    let text = std::fs::read_to_string(demo.join("plan.toml")).unwrap();
    let mut plan = String::new();
    for line in text.lines() {
        let line = if line.starts_with("astrometric_reference") && !offsets {
            String::new()
        } else if line.starts_with("correct_offsets") {
            match offsets {
                true => line.to_string(),
                false => "correct_offsets = false\nfalse_matches = false".to_string(),
            }
        } else if line.starts_with("folder") {
            format!("folder = \"{}\"", out.display())
        } else {
            let mut l = line.to_string();
            for key in ["file", "schema", "coverage"] {
                let prefix = format!("{key} = \"");
                if l.starts_with(&prefix) {
                    l = l.replacen(&prefix, &format!("{prefix}{}/", demo.display()), 1);
                }
            }
            l
        };
        plan.push_str(&line);
        plan.push('\n');
    }
    let path = dir.join(if offsets {
        "plan_offsets.toml"
    } else {
        "plan.toml"
    });
    std::fs::write(&path, plan).unwrap();
    path
}

fn build(plan: &Path, out: &Path, extra: &[&str]) -> std::process::Output {
    build_with_env(plan, out, extra, &[])
}

fn build_with_env(
    plan: &Path,
    out: &Path,
    extra: &[&str],
    env: &[(&str, &str)],
) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .envs(env.iter().copied())
        .args(["--quiet", "build"])
        .arg(plan)
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .expect("fluxloom runs")
}

fn built(plan: &Path, out: &Path, extra: &[&str]) -> String {
    let o = build(plan, out, extra);
    assert!(
        o.status.success(),
        "build {extra:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8(o.stdout).unwrap()
}

/// Limited layouts: one group with one spill per catalog; many groups and many
/// spilled runs per catalog, on coarse and on fine cells, and on one thread.
const GROUP_LAYOUTS: [&[&str]; 3] = [
    &["--memory-limit", "1G"],
    &[
        "--memory-limit",
        "300M",
        "--group-rows",
        "300",
        "--spill-bytes",
        "200000",
        "--cell-order",
        "9",
    ],
    &[
        "--memory-limit",
        "300M",
        "--group-rows",
        "1000",
        "--spill-bytes",
        "100000",
        "--cell-order",
        "11",
        "--threads",
        "1",
    ],
];

#[test]
fn limited_builds_write_the_files_of_an_unlimited_build() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole");
    let plan = plan_in(dir.path(), &whole);
    built(&plan, &whole, &["--cell-order", "10"]);
    let cases: [&[&str]; 2] = [
        // A routing margin narrower than the first pass's: every cell is matched
        // again from the rows of the cells around it.
        &[
            "--memory-limit",
            "300M",
            "--group-rows",
            "500",
            "--cell-order",
            "10",
            "--routing-margin",
            "1",
        ],
        // Between one and two doublings: only the widened cells are taken up again.
        &[
            "--memory-limit",
            "300M",
            "--group-rows",
            "500",
            "--cell-order",
            "10",
            "--routing-margin",
            "30",
        ],
    ];
    for (k, extra) in GROUP_LAYOUTS.iter().chain(&cases).enumerate() {
        let out = dir.path().join(format!("limited{k}"));
        let summary = built(&plan, &out, extra);
        assert!(summary.contains("cell groups of at most"), "{summary}");
        assert_same_files(&out, &whole, &format!("limited build {extra:?}"));
        let spill = dir.path().join(format!(".limited{k}.fluxloom-spill"));
        assert!(
            !spill.exists(),
            "the spill folder is removed: {}",
            spill.display()
        );
    }
}

/// With an astrometric reference, a limited build measures the offsets and
/// floors a group of cells at a time and corrects the catalogs as it matches,
/// and counts the false matches a group at a time: the files are those of an
/// unlimited build, offsets and false-match estimates in run.json included.
#[test]
fn limited_builds_with_offsets_and_false_matches_write_the_files_of_an_unlimited_build() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole");
    let plan = demo_plan(dir.path(), &whole, true);
    let summary = built(&plan, &whole, &["--cell-order", "10"]);
    // The demo's kos catalog carries a +0.25″ offset in RA, which is corrected.
    assert!(
        summary.contains("offset of kos vs ask: (+0.258"),
        "{summary}"
    );
    assert!(
        summary.contains("false matches cinder x ember: 6.4 expected of 190 candidates"),
        "{summary}"
    );
    for (k, extra) in GROUP_LAYOUTS.iter().enumerate() {
        let out = dir.path().join(format!("limited{k}"));
        let summary = built(&plan, &out, extra);
        assert!(
            summary.contains("offset of kos vs ask: (+0.258"),
            "{summary}"
        );
        assert_same_files(
            &out,
            &whole,
            &format!("limited build with offsets {extra:?}"),
        );
    }
    // Offsets need the pairs' partners at hand: a routing margin below twice
    // the largest tolerance is refused by name.
    let o = build(
        &plan,
        &dir.path().join("narrow"),
        &["--memory-limit", "300M", "--routing-margin", "4"],
    );
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("offsets within --memory-limit need a routing margin of at least"),
        "{err}"
    );
    // The false matches need every shifted partner at hand: the demo's 5″
    // tolerance shifts by 100″, so a margin of 20″ is refused by name.
    let o = build(
        &plan,
        &dir.path().join("narrow"),
        &["--memory-limit", "300M", "--routing-margin", "20"],
    );
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("false matches within --memory-limit need a routing margin of at least 105."),
        "{err}"
    );
    assert!(!dir.path().join("narrow").exists());
}

#[test]
fn a_limited_build_of_some_cells_writes_that_part() {
    let dir = tempfile::tempdir().unwrap();
    let part = dir.path().join("part");
    let plan = plan_in(dir.path(), &part);
    let cells = ["--cell-order", "9", "--cells", "531891-531900"];
    built(&plan, &part, &cells);
    let limited = dir.path().join("limited");
    let mut extra = cells.to_vec();
    extra.extend(["--memory-limit", "300M", "--group-rows", "400"]);
    built(&plan, &limited, &extra);
    assert_same_files(&limited, &part, "limited subset");
}

/// Without `--memory-limit`, a build that would not fit in half of the
/// available memory runs within that half and says so; its files are those of
/// a build holding everything. (The available memory is stated small here.)
#[test]
fn a_build_too_large_for_the_memory_chooses_a_limit() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole");
    let plan = plan_in(dir.path(), &whole);
    let summary = built(&plan, &whole, &[]);
    assert!(
        !summary.contains("choose one with --memory-limit"),
        "{summary}"
    );
    let auto = dir.path().join("auto");
    let o = build_with_env(&plan, &auto, &[], &[("FLUXLOOM_MEMORY_AVAILABLE", "1M")]);
    let summary = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(
        summary.contains("more than half of the 0.0 GB available: built within a limit of 0.5 GB (choose one with --memory-limit)"),
        "{summary}"
    );
    assert!(summary.contains("memory   limit 512 MB:"), "{summary}");
    assert_same_files(&auto, &whole, "build within the chosen limit");
}

/// A repeated identifier is refused by name with a limit as without one (the
/// limited build finds it from hashes kept on disk and confirms it on the
/// spilled rows).
#[test]
fn a_repeated_identifier_is_named_within_a_limit() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    let plan = plan_in(dir.path(), &out);
    // kos.csv with its first data row once more at the end.
    let kos = std::fs::read_to_string("demo_catalogs/fl1/kos.csv").unwrap();
    let first = kos
        .lines()
        .filter(|l| !l.starts_with('#'))
        .nth(1)
        .unwrap()
        .to_string();
    let id = first.split(',').next().unwrap().to_string();
    std::fs::write(dir.path().join("kos.csv"), format!("{kos}{first}\n")).unwrap();
    let demo = std::fs::canonicalize("demo_catalogs/fl1").unwrap();
    let text = std::fs::read_to_string(&plan).unwrap().replace(
        &format!("{}/kos.csv", demo.display()),
        &dir.path().join("kos.csv").display().to_string(),
    );
    std::fs::write(&plan, text).unwrap();
    for extra in [
        &[][..],
        &["--memory-limit", "300M", "--spill-bytes", "100000"][..],
    ] {
        let o = build(&plan, &out, extra);
        assert!(!o.status.success(), "{extra:?}");
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(
            err.contains(&format!(
                "catalog \"kos\": source identifier \"{id}\" appears twice"
            )),
            "{extra:?}: {err}"
        );
        assert!(
            err.contains("identifiers must be unique within a catalog"),
            "{err}"
        );
        // Within a limit, the routing pass names it, by input rows.
        if !extra.is_empty() {
            assert!(err.contains("appears twice (rows "), "{err}");
        }
        assert!(!out.exists());
    }
}

#[test]
fn a_memory_limit_that_is_not_a_size_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let o = build(
        Path::new("demo_catalogs/fl1/plan.toml"),
        &dir.path().join("out"),
        &["--memory-limit", "lots"],
    );
    assert!(String::from_utf8_lossy(&o.stderr).contains("\"lots\" is not a memory size like 2G"));
}

#[test]
fn a_killed_limited_build_resumes_from_its_journal_with_identical_files() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole");
    let plan = plan_in(dir.path(), &whole);
    built(&plan, &whole, &["--cell-order", "10"]);
    let out = dir.path().join("resumed");
    let journal = dir.path().join(".resumed.fluxloom-journal");
    // Groups of a few cells each.
    let limited = [
        "--memory-limit",
        "300M",
        "--group-rows",
        "500",
        "--cell-order",
        "10",
        "--threads",
        "1",
    ];
    let child = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["--quiet", "build"])
        .arg(&plan)
        .args(limited)
        .args(["--pause-after-cells", "8", "--out"])
        .arg(&out)
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    kill_once_journaled(child, &journal, 8);
    assert!(!out.exists(), "a killed build wrote no output folder");
    let summary = built(&plan, &out, &limited);
    assert!(
        summary.contains("resumed: 8 cells taken from the journal"),
        "{summary}"
    );
    assert_same_files(&out, &whole, "resumed limited build");
    assert!(
        !journal.exists(),
        "the journal is removed once the folder commits"
    );
    assert!(!dir.path().join(".resumed.fluxloom-spill").exists());
}
