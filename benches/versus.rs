//! Benchmark: a whole `fluxloom build` against general-purpose positional joins,
//! each a fresh process from Parquet files in to results out, in one run.
//!
//! Run with `cargo bench --bench versus`. For each size N (default 1e5 and 1e6;
//! set `FLUXLOOM_BENCH_SIZES`, e.g. `1e5,1e6,1e7`) it writes two catalogs of N
//! sources on a 10° × 10° field (70 % of the second are counterparts of the first
//! with 0.3″ scatter, 30 % unrelated; one Vega magnitude each) and times:
//!
//! - `build`: the full build (objects, photometry, links; no exports, no
//!   false-match estimate, no offsets, no report), 1″ radius;
//! - `report`: `fluxloom report` on that build's folder, timed on its own;
//! - `pairs`: the same plan writing only `links.parquet`;
//! - `ckdtree`: SciPy's cKDTree on unit vectors, `sparse_distance_matrix` between
//!   two trees at chord radius 2 sin(r/2), pairs written to Parquet;
//! - `duckdb`: a DuckDB zones join (declination zones one radius high; RA window
//!   widened by 1/cos δ and wrapped at 0/360°; exact haversine test);
//! - the I/O floors, in this process: reading the inputs' columns plus writing
//!   the tables the build wrote (read back from its outputs) with the same
//!   Parquet settings; for pairs only, reading plus writing `links.parquet`.
//!
//! With `FLUXLOOM_BENCH_LIMIT` (e.g. `500M`) it also runs the full build within
//! that `--memory-limit` and prints its time against the unlimited build's and
//! its peak memory. With `FLUXLOOM_BENCH_LARGE` (e.g. `1e7,5e7`, sources per
//! catalog) it then runs, for those sizes, only the full and the pairs-only
//! build within `FLUXLOOM_BENCH_LIMIT` (default `2G`), against their I/O
//! floors, with the growth exponent. With `FLUXLOOM_BENCH_SIX` (e.g. `1e5,1e6`)
//! it runs the full and the pairs-only build of six catalogs of N sources with
//! four bands each (85 % of each catalog counterparts of one set of objects),
//! within `FLUXLOOM_BENCH_LIMIT` when set. It checks that every contender finds the same pair set, and prints seconds,
//! peak resident memory and ratios, and the growth exponent of the build time
//! with N. The Python side lives in a virtual environment the benchmark makes
//! under `target/bench-venv` (pinned versions below); `cargo test` does not
//! need it.

use std::collections::HashSet;
use std::fs::File;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Arc;
use std::time::Instant;

use arrow::array::{Array, ArrayRef, AsArray, Float64Array, RecordBatch, StringArray};
use arrow::datatypes::{DataType, Field, Schema};
use fluxloom::output::parquet::ParquetOutput;
use fluxloom::rng::Rng;
use parquet::arrow::ArrowWriter;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

/// Pinned Python packages of the baselines (versions published for CPython 3.11).
const PYTHON_PACKAGES: &[&str] = &[
    "numpy==2.1.3",
    "scipy==1.14.1",
    "pyarrow==18.1.0",
    "duckdb==1.1.3",
];

const RADIUS_ARCSEC: f64 = 1.0;
const FIELD_RA: (f64, f64) = (150.0, 160.0);
const FIELD_DEC: (f64, f64) = (-5.0, 5.0);

const CKDTREE: &str = r#"
import sys, time, resource
import numpy as np, pyarrow as pa, pyarrow.parquet as pq
from scipy.spatial import cKDTree
a, b, out, r_arcsec = sys.argv[1], sys.argv[2], sys.argv[3], float(sys.argv[4])
def load(p):
    t = pq.read_table(p, columns=["id", "ra", "dec"])
    ra = np.radians(t["ra"].to_numpy()); dec = np.radians(t["dec"].to_numpy())
    v = np.column_stack([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])
    return t["id"], v
ida, va = load(a); idb, vb = load(b)
chord = 2.0 * np.sin(np.radians(r_arcsec / 3600.0) / 2.0)
m = cKDTree(va).sparse_distance_matrix(cKDTree(vb), chord, output_type="coo_matrix")
sep = np.degrees(2.0 * np.arcsin(m.data / 2.0)) * 3600.0
pq.write_table(pa.table({"id_a": ida.take(m.row), "id_b": idb.take(m.col), "sep_arcsec": sep}), out)
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)
"#;

const DUCKDB: &str = r#"
import sys, resource, duckdb
a, b, out, r_arcsec = sys.argv[1], sys.argv[2], sys.argv[3], float(sys.argv[4])
h = r_arcsec / 3600.0
con = duckdb.connect()
con.execute(f"""
COPY (
WITH A AS (SELECT id, ra, dec, floor((dec + 90) / {h})::BIGINT AS z FROM read_parquet('{a}')),
     B0 AS (SELECT id, ra, dec, floor((dec + 90) / {h})::BIGINT AS z FROM read_parquet('{b}')),
     B AS (SELECT id, ra, dec, z FROM B0
           UNION ALL SELECT id, ra + 360, dec, z FROM B0 WHERE ra < 1
           UNION ALL SELECT id, ra - 360, dec, z FROM B0 WHERE ra > 359),
     Z AS (SELECT * FROM (VALUES (-1), (0), (1)) t(dz))
SELECT A.id AS id_a, B.id AS id_b,
       degrees(2 * asin(sqrt(pow(sin(radians(B.dec - A.dec) / 2), 2)
         + cos(radians(A.dec)) * cos(radians(B.dec)) * pow(sin(radians(B.ra - A.ra) / 2), 2)))) * 3600 AS sep_arcsec
FROM A, Z, B
WHERE B.z = A.z + Z.dz
  AND B.ra BETWEEN A.ra - {h} / greatest(cos(radians(abs(A.dec) + {h})), 1e-9)
               AND A.ra + {h} / greatest(cos(radians(abs(A.dec) + {h})), 1e-9)
  AND degrees(2 * asin(sqrt(pow(sin(radians(B.dec - A.dec) / 2), 2)
         + cos(radians(A.dec)) * cos(radians(B.dec)) * pow(sin(radians(B.ra - A.ra) / 2), 2)))) * 3600 <= {r_arcsec}
) TO '{out}' (FORMAT PARQUET)
""")
print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024)
"#;

fn main() {
    let sizes =
        parse_sizes(&std::env::var("FLUXLOOM_BENCH_SIZES").unwrap_or_else(|_| "1e5,1e6".into()));
    let root = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/bench-versus");
    std::fs::create_dir_all(&root).unwrap();
    // Only the sizes with baselines need the Python environment.
    let python = match sizes.is_empty() {
        true => PathBuf::new(),
        false => python_env(&root.join("../bench-venv")),
    };
    std::fs::write(root.join("ckdtree_pairs.py"), CKDTREE).unwrap();
    std::fs::write(root.join("duckdb_zones.py"), DUCKDB).unwrap();
    let exe = env!("CARGO_BIN_EXE_fluxloom");

    println!(
        "{:>10} {:>10} {:>10} {:>10} {:>10} {:>10} {:>10} {:>9} {:>9} {:>9}",
        "N",
        "build s",
        "pairs s",
        "ckdtree s",
        "duckdb s",
        "floor s",
        "pfloor s",
        "build/fl",
        "pairs/pf",
        "best/bld"
    );
    let mut build_times: Vec<(usize, f64)> = Vec::new();
    for &n in &sizes {
        let dir = root.join(format!("n{n}"));
        std::fs::create_dir_all(&dir).unwrap();
        let (a, b) = (dir.join("a.parquet"), dir.join("b.parquet"));
        if !a.exists() || !b.exists() {
            write_catalogs(n, &a, &b);
        }
        write_plans(&dir);
        let out = dir.join("out");
        let out_pairs = dir.join("out_pairs");
        let (t_build, mem_build) = run_build(exe, &dir.join("plan.toml"), &out);
        let (t_pairs, mem_pairs) = run_build(exe, &dir.join("plan_pairs.toml"), &out_pairs);
        let t_report = run_report(exe, &out);
        // With FLUXLOOM_BENCH_LIMIT (e.g. 500M), the full build again within that
        // memory limit; its pairs must be the unlimited build's.
        let limited = std::env::var("FLUXLOOM_BENCH_LIMIT").ok().map(|limit| {
            let out_limited = dir.join("out_limited");
            let (t, mem) = run_build_with(
                exe,
                &dir.join("plan.toml"),
                &out_limited,
                &["--memory-limit", &limit],
            );
            (limit, out_limited, t, mem)
        });
        let script = |name: &str, out_file: &Path| {
            let start = Instant::now();
            let o = Command::new(&python)
                .arg(root.join(name))
                .args([&a, &b, &out_file.to_path_buf()])
                .arg(RADIUS_ARCSEC.to_string())
                .output()
                .expect("python runs");
            let t = start.elapsed().as_secs_f64();
            assert!(
                o.status.success(),
                "{name}: {}",
                String::from_utf8_lossy(&o.stderr)
            );
            let rss: f64 = String::from_utf8_lossy(&o.stdout)
                .trim()
                .parse()
                .unwrap_or(0.0);
            (t, rss)
        };
        let (t_kd, mem_kd) = script("ckdtree_pairs.py", &dir.join("pairs_ckdtree.parquet"));
        let (t_db, mem_db) = script("duckdb_zones.py", &dir.join("pairs_duckdb.parquet"));

        let ours = pair_set(&out.join("links.parquet"), "source_id_a", "source_id_b");
        let ours_pairs = pair_set(
            &out_pairs.join("links.parquet"),
            "source_id_a",
            "source_id_b",
        );
        let kd = pair_set(&dir.join("pairs_ckdtree.parquet"), "id_a", "id_b");
        let db = pair_set(&dir.join("pairs_duckdb.parquet"), "id_a", "id_b");
        assert_eq!(
            ours, ours_pairs,
            "N = {n}: pairs-only build differs from the full build"
        );
        assert_eq!(ours, kd, "N = {n}: fluxloom and cKDTree pair sets differ");
        if let Some((limit, out_limited, t, mem)) = &limited {
            let pairs = pair_set(
                &out_limited.join("links.parquet"),
                "source_id_a",
                "source_id_b",
            );
            assert_eq!(
                ours, pairs,
                "N = {n}: the build within {limit} finds other pairs"
            );
            println!(
                "{:>10} build within --memory-limit {limit}: {t:.3} s ({:.2} x the unlimited build), peak {:.0} MB",
                "",
                t / t_build,
                mem / 1e6
            );
        }
        assert_eq!(ours, db, "N = {n}: fluxloom and DuckDB pair sets differ");

        let floor = io_floor(&[&a, &b], &out, &["objects", "photometry", "links"]);
        let pairs_floor = io_floor(&[&a, &b], &out_pairs, &["links"]);
        let best = t_kd.min(t_db);
        println!(
            "{:>10} {:>10.3} {:>10.3} {:>10.3} {:>10.3} {:>10.3} {:>10.3} {:>9.2} {:>9.2} {:>9.2}",
            n,
            t_build,
            t_pairs,
            t_kd,
            t_db,
            floor,
            pairs_floor,
            t_build / floor,
            t_pairs / pairs_floor,
            best / t_build
        );
        println!(
            "{:>10} peak MB: build {:.0}, pairs {:.0}, ckdtree {:.0}, duckdb {:.0}; {} pairs; report of the build {:.3} s",
            "",
            mem_build / 1e6,
            mem_pairs / 1e6,
            mem_kd / 1e6,
            mem_db / 1e6,
            ours.len(),
            t_report
        );
        build_times.push((n, t_build));
    }
    print_growth("the build time", &build_times);
    if let Ok(six) = std::env::var("FLUXLOOM_BENCH_SIX") {
        let limit = std::env::var("FLUXLOOM_BENCH_LIMIT").ok();
        six_catalog_runs(exe, &root, &parse_sizes(&six), limit.as_deref());
    }
    if let Ok(large) = std::env::var("FLUXLOOM_BENCH_LARGE") {
        let limit = std::env::var("FLUXLOOM_BENCH_LIMIT").unwrap_or_else(|_| "2G".into());
        large_runs(exe, &root, &parse_sizes(&large), &limit);
    }
}

fn parse_sizes(text: &str) -> Vec<usize> {
    text.split(',')
        .filter(|s| !s.trim().is_empty())
        .map(|s| s.trim().parse::<f64>().expect("sizes like 1e5,1e6") as usize)
        .collect()
}

fn print_growth(what: &str, times: &[(usize, f64)]) {
    for w in times.windows(2) {
        let ((n1, t1), (n2, t2)) = (w[0], w[1]);
        println!(
            "growth exponent of {what} from {n1} to {n2}: {:.2}",
            (t2 / t1).ln() / (n2 as f64 / n1 as f64).ln()
        );
    }
}

/// The sizes too large for a build holding everything and for the baselines:
/// the full and the pairs-only build within `limit`, against their I/O floors,
/// with the growth exponent of time with N. Their pair sets are not compared
/// (the smaller sizes check them).
fn large_runs(exe: &str, root: &Path, sizes: &[usize], limit: &str) {
    print_floor_header(&format!("within --memory-limit {limit}"));
    let mut times = Vec::new();
    for &n in sizes {
        let dir = root.join(format!("n{n}"));
        std::fs::create_dir_all(&dir).unwrap();
        let (a, b) = (dir.join("a.parquet"), dir.join("b.parquet"));
        if !a.exists() || !b.exists() {
            write_catalogs(n, &a, &b);
        }
        write_plans(&dir);
        let outs = (dir.join("out_limited"), dir.join("out_pairs_limited"));
        let t = builds_against_floors(exe, &dir, &[&a, &b], outs, &["--memory-limit", limit], n);
        times.push((n, t));
    }
    print_growth("the build time within the limit", &times);
}

/// Prints the column heads of [`builds_against_floors`]' rows, and `what` the runs are.
fn print_floor_header(what: &str) {
    println!(
        "{:>10} {:>10} {:>9} {:>10} {:>9} {:>10} {:>9} {:>9}   ({what})",
        "N", "build s", "peak MB", "pairs s", "peak MB", "floor s", "build/fl", "pairs/pf"
    );
}

/// Runs the full and the pairs-only build of `dir`'s plans (with `extra`
/// arguments) into `outs`, measures their I/O floors on `inputs`, prints a row
/// for size `n` and returns the full build's seconds.
fn builds_against_floors(
    exe: &str,
    dir: &Path,
    inputs: &[&Path],
    (out, out_pairs): (PathBuf, PathBuf),
    extra: &[&str],
    n: usize,
) -> f64 {
    let (t_build, mem_build) = run_build_with(exe, &dir.join("plan.toml"), &out, extra);
    let (t_pairs, mem_pairs) = run_build_with(exe, &dir.join("plan_pairs.toml"), &out_pairs, extra);
    let floor = io_floor(inputs, &out, &["objects", "photometry", "links"]);
    let pairs_floor = io_floor(inputs, &out_pairs, &["links"]);
    println!(
        "{:>10} {:>10.2} {:>9.0} {:>10.2} {:>9.0} {:>10.2} {:>9.2} {:>9.2}",
        n,
        t_build,
        mem_build / 1e6,
        t_pairs,
        mem_pairs / 1e6,
        floor,
        t_build / floor,
        t_pairs / pairs_floor
    );
    t_build
}

/// The benchmark's Python: a virtual environment with the pinned packages.
fn python_env(venv: &Path) -> PathBuf {
    let python = venv.join("bin/python");
    let stamp = venv.join("fluxloom-packages.txt");
    let wanted = PYTHON_PACKAGES.join("\n");
    if std::fs::read_to_string(&stamp).ok().as_deref() == Some(wanted.as_str()) {
        return python;
    }
    let ok = Command::new("python3")
        .args(["-m", "venv"])
        .arg(venv)
        .status()
        .is_ok_and(|s| s.success());
    assert!(ok, "python3 -m venv {} failed", venv.display());
    let ok = Command::new(&python)
        .args(["-m", "pip", "install", "--quiet"])
        .args(PYTHON_PACKAGES)
        .status()
        .is_ok_and(|s| s.success());
    assert!(ok, "pip install {PYTHON_PACKAGES:?} failed");
    std::fs::write(&stamp, wanted).unwrap();
    python
}

fn write_catalogs(n: usize, a: &Path, b: &Path) {
    let mut rng = Rng::new(0xBE7C4, "versus");
    let mut random = || {
        (
            FIELD_RA.0 + (FIELD_RA.1 - FIELD_RA.0) * rng.uniform(),
            FIELD_DEC.0 + (FIELD_DEC.1 - FIELD_DEC.0) * rng.uniform(),
        )
    };
    let first: Vec<(f64, f64)> = (0..n).map(|_| random()).collect();
    let mut second = Vec::with_capacity(n);
    let mut rng = Rng::new(0xBE7C5, "versus-scatter");
    for (k, &(ra, dec)) in first.iter().enumerate() {
        if k % 10 < 7 {
            let d = 0.3 / 3600.0;
            second.push((
                ra + rng.normal() * d / f64::cos(dec.to_radians()),
                dec + rng.normal() * d,
            ));
        } else {
            second.push((
                FIELD_RA.0 + (FIELD_RA.1 - FIELD_RA.0) * rng.uniform(),
                FIELD_DEC.0 + (FIELD_DEC.1 - FIELD_DEC.0) * rng.uniform(),
            ));
        }
    }
    write_catalog(a, "a", &first, 12.0);
    write_catalog(b, "b", &second, 11.0);
}

fn write_catalog(path: &Path, prefix: &str, positions: &[(f64, f64)], mag0: f64) {
    let mags: Vec<f64> = (0..positions.len())
        .map(|k| mag0 + (k % 700) as f64 / 100.0)
        .collect();
    write_catalog_bands(path, prefix, positions, &[("mag", "e_mag", mags)]);
}

/// Writes a catalog of `positions` with one magnitude column (and a 0.05 mag
/// error column) per entry of `bands`: (value column, error column, values).
fn write_catalog_bands(
    path: &Path,
    prefix: &str,
    positions: &[(f64, f64)],
    bands: &[(&str, &str, Vec<f64>)],
) {
    let mut fields = vec![
        Field::new("id", DataType::Utf8, false),
        Field::new("ra", DataType::Float64, false),
        Field::new("dec", DataType::Float64, false),
    ];
    for (value, error, _) in bands {
        fields.push(Field::new(*value, DataType::Float64, false));
        fields.push(Field::new(*error, DataType::Float64, false));
    }
    let schema = Arc::new(Schema::new(fields));
    let file = File::create(path).unwrap();
    let mut w = ArrowWriter::try_new(file, schema.clone(), None).unwrap();
    for (c, chunk) in positions.chunks(65_536).enumerate() {
        let base = c * 65_536;
        let ids: Vec<String> = (0..chunk.len())
            .map(|k| format!("{prefix}{:09}", base + k))
            .collect();
        let mut columns: Vec<ArrayRef> = vec![
            Arc::new(StringArray::from(ids)),
            Arc::new(Float64Array::from_iter_values(chunk.iter().map(|p| p.0))),
            Arc::new(Float64Array::from_iter_values(chunk.iter().map(|p| p.1))),
        ];
        for (_, _, values) in bands {
            columns.push(Arc::new(Float64Array::from_iter_values(
                values[base..base + chunk.len()].iter().copied(),
            )));
            columns.push(Arc::new(Float64Array::from_iter_values(
                (0..chunk.len()).map(|_| 0.05),
            )));
        }
        w.write(&RecordBatch::try_new(schema.clone(), columns).unwrap())
            .unwrap();
    }
    w.close().unwrap();
}

/// The six catalogs of the multi-catalog benchmark: name, positional error
/// (arcsec, also the scatter of its positions), magnitude unit, four bands.
const SIX: [(&str, f64, &str, [&str; 4]); 6] = [
    ("c1", 0.10, "vega_mag", ["jc_u", "jc_b", "jc_v", "jc_rc"]),
    (
        "c2",
        0.15,
        "ab_mag",
        ["sdss_g", "sdss_r", "sdss_i", "sdss_z"],
    ),
    (
        "c3",
        0.05,
        "vega_mag",
        ["gaia_g", "gaia_bp", "gaia_rp", "jc_ic"],
    ),
    (
        "c4",
        0.10,
        "vega_mag",
        ["tmass_j", "tmass_h", "tmass_ks", "mips_24"],
    ),
    (
        "c5",
        0.30,
        "vega_mag",
        ["wise_w1", "wise_w2", "wise_w3", "wise_w4"],
    ),
    (
        "c6",
        0.20,
        "vega_mag",
        ["irac_36", "irac_45", "irac_58", "irac_80"],
    ),
];

/// Six catalogs of `n` sources each on the bench field: 85 % of each are
/// counterparts of one set of `n` objects (scattered by the catalog's error),
/// 15 % unrelated; four magnitudes each.
fn write_six_catalogs(n: usize, dir: &Path) {
    let mut rng = Rng::new(0x51C5, "versus-six");
    let truth: Vec<(f64, f64, f64)> = (0..n)
        .map(|_| {
            (
                FIELD_RA.0 + (FIELD_RA.1 - FIELD_RA.0) * rng.uniform(),
                FIELD_DEC.0 + (FIELD_DEC.1 - FIELD_DEC.0) * rng.uniform(),
                14.0 + 6.0 * rng.uniform(),
            )
        })
        .collect();
    for (k, (name, sigma, _, _)) in SIX.iter().enumerate() {
        let mut rng = Rng::new(0x51C6 + k as u64, "versus-six-catalog");
        let mut positions = Vec::with_capacity(n);
        let mut base_mag = Vec::with_capacity(n);
        for &(ra, dec, mag) in &truth {
            if rng.uniform() < 0.85 {
                let d = sigma / 3600.0;
                positions.push((
                    ra + rng.normal() * d / f64::cos(dec.to_radians()),
                    dec + rng.normal() * d,
                ));
                base_mag.push(mag);
            } else {
                positions.push((
                    FIELD_RA.0 + (FIELD_RA.1 - FIELD_RA.0) * rng.uniform(),
                    FIELD_DEC.0 + (FIELD_DEC.1 - FIELD_DEC.0) * rng.uniform(),
                ));
                base_mag.push(14.0 + 6.0 * rng.uniform());
            }
        }
        let columns: Vec<(String, String)> = (0..4)
            .map(|b| (format!("m{b}"), format!("e_m{b}")))
            .collect();
        let bands: Vec<(&str, &str, Vec<f64>)> = columns
            .iter()
            .enumerate()
            .map(|(b, (v, e))| {
                let colour = 0.3 * b as f64;
                (
                    v.as_str(),
                    e.as_str(),
                    base_mag.iter().map(|m| m - colour).collect(),
                )
            })
            .collect();
        write_catalog_bands(
            &dir.join(format!("{name}.parquet")),
            name,
            &positions,
            &bands,
        );
    }
}

/// The schemas and plans of the six-catalog benchmark (full and links only).
fn write_six_plans(dir: &Path) {
    let mut catalogs = String::new();
    for (name, sigma, unit, bands) in SIX {
        let mut schema = format!(
            "survey = \"{name}\"\nformat = \"parquet\"\nid = \"id\"\n\n[position]\nra = \"ra\"\ndec = \"dec\"\nformat = \"degrees\"\nerror = {{ kind = \"fixed\", arcsec = {sigma} }}\n\n[epoch]\nyear = 2016.0\n"
        );
        for (b, band) in bands.iter().enumerate() {
            schema.push_str(&format!(
                "\n[[band]]\nband = \"{band}\"\nvalue = \"m{b}\"\nunit = \"{unit}\"\nerror = \"e_m{b}\"\n"
            ));
        }
        std::fs::write(dir.join(format!("{name}.toml")), schema).unwrap();
        catalogs.push_str(&format!(
            "\n[[catalog]]\nfile = \"{name}.parquet\"\nschema = \"{name}.toml\"\n"
        ));
    }
    let plan = |tables: &str| {
        format!(
            "[field]\nname = \"bench6\"\nreference_epoch = 2016.0\narea_deg2 = 100.0\n\n[match]\ntolerance = {{ kind = \"sigma\", k = 3.439, max_arcsec = 2.0 }}\ncorrect_offsets = false\nfalse_matches = false\n{catalogs}\n[output]\nfolder = \"out\"\n{tables}"
        )
    };
    std::fs::write(dir.join("plan.toml"), plan("report = false\n")).unwrap();
    std::fs::write(dir.join("plan_pairs.toml"), plan("tables = [\"links\"]\n")).unwrap();
}

/// The six-catalog benchmark: the full and the pairs-only build of six
/// catalogs of N sources with four bands each (within `limit` when given),
/// against their I/O floors, with the growth exponent of time with N.
fn six_catalog_runs(exe: &str, root: &Path, sizes: &[usize], limit: Option<&str>) {
    let within = limit
        .map(|l| format!(", --memory-limit {l}"))
        .unwrap_or_default();
    print_floor_header(&format!("six catalogs of N, 4 bands each{within}"));
    let mut times = Vec::new();
    for &n in sizes {
        let dir = root.join(format!("six{n}"));
        std::fs::create_dir_all(&dir).unwrap();
        let inputs: Vec<PathBuf> = SIX
            .iter()
            .map(|c| dir.join(format!("{}.parquet", c.0)))
            .collect();
        if inputs.iter().any(|p| !p.exists()) {
            write_six_catalogs(n, &dir);
        }
        write_six_plans(&dir);
        let extra: Vec<&str> = limit.map(|l| vec!["--memory-limit", l]).unwrap_or_default();
        let inputs: Vec<&Path> = inputs.iter().map(PathBuf::as_path).collect();
        let outs = (dir.join("out"), dir.join("out_pairs"));
        times.push((
            n,
            builds_against_floors(exe, &dir, &inputs, outs, &extra, n),
        ));
    }
    print_growth("the six-catalog build time", &times);
}

fn write_plans(dir: &Path) {
    for (name, band) in [("a", "tmass_ks"), ("b", "wise_w1")] {
        std::fs::write(
            dir.join(format!("{name}.toml")),
            format!(
                "survey = \"{name}\"\nformat = \"parquet\"\nid = \"id\"\n\n[position]\nra = \"ra\"\ndec = \"dec\"\nformat = \"degrees\"\nerror = {{ kind = \"fixed\", arcsec = 0.1 }}\n\n[epoch]\nyear = 2016.0\n\n[[band]]\nband = \"{band}\"\nvalue = \"mag\"\nunit = \"vega_mag\"\nerror = \"e_mag\"\n"
            ),
        )
        .unwrap();
    }
    let plan = |tables: &str| {
        format!(
            "[field]\nname = \"bench\"\nreference_epoch = 2016.0\narea_deg2 = 100.0\n\n[match]\ntolerance = {{ kind = \"radius\", arcsec = {RADIUS_ARCSEC} }}\ncorrect_offsets = false\nfalse_matches = false\n\n[[catalog]]\nfile = \"a.parquet\"\nschema = \"a.toml\"\n\n[[catalog]]\nfile = \"b.parquet\"\nschema = \"b.toml\"\n\n[output]\nfolder = \"out\"\n{tables}"
        )
    };
    // The audit is timed on its own (`fluxloom report`), like the exports it is
    // an extra beyond the SED tables.
    std::fs::write(dir.join("plan.toml"), plan("report = false\n")).unwrap();
    std::fs::write(dir.join("plan_pairs.toml"), plan("tables = [\"links\"]\n")).unwrap();
}

/// Seconds of a fresh `fluxloom report` process on a built folder.
fn run_report(exe: &str, out: &Path) -> f64 {
    let start = Instant::now();
    let o = Command::new(exe)
        .args(["--quiet", "report"])
        .arg(out)
        .output()
        .expect("fluxloom runs");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    start.elapsed().as_secs_f64()
}

/// Seconds of a fresh `fluxloom build` process, and the peak memory it
/// reports; prints the build's own time per phase.
fn run_build(exe: &str, plan: &Path, out: &Path) -> (f64, f64) {
    run_build_with(exe, plan, out, &[])
}

/// [`run_build`] with extra arguments (e.g. `--memory-limit 500M`).
fn run_build_with(exe: &str, plan: &Path, out: &Path, extra: &[&str]) -> (f64, f64) {
    let start = Instant::now();
    let o = Command::new(exe)
        .args(["--quiet", "build"])
        .arg(plan)
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .expect("fluxloom runs");
    let t = start.elapsed().as_secs_f64();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    if let Some(phases) = text.lines().find_map(|l| l.strip_prefix("time     ")) {
        println!(
            "{:>10} {}: {phases}",
            "",
            plan.file_name().unwrap_or_default().to_string_lossy()
        );
    }
    let mb: f64 = text
        .lines()
        .find_map(|l| l.strip_prefix("memory   peak "))
        .and_then(|l| l.split_whitespace().next())
        .and_then(|v| v.parse().ok())
        .unwrap_or(0.0);
    (t, mb * 1e6)
}

fn batches(path: &Path, columns: Option<&[&str]>) -> impl Iterator<Item = RecordBatch> {
    let f = File::open(path).unwrap();
    let builder = ParquetRecordBatchReaderBuilder::try_new(f).unwrap();
    let builder = match columns {
        Some(cols) => {
            let mask = parquet::arrow::ProjectionMask::columns(
                builder.parquet_schema(),
                cols.iter().copied(),
            );
            builder.with_projection(mask)
        }
        None => builder,
    };
    builder.build().unwrap().map(|b| b.unwrap())
}

fn pair_set(path: &Path, a: &str, b: &str) -> HashSet<(String, String)> {
    let mut set = HashSet::new();
    for batch in batches(path, Some(&[a, b])) {
        let (ca, cb) = (
            batch.column_by_name(a).unwrap(),
            batch.column_by_name(b).unwrap(),
        );
        let cast = |c: &ArrayRef| arrow::compute::cast(c, &DataType::Utf8).unwrap();
        let (ca, cb) = (cast(ca), cast(cb));
        let (ca, cb) = (ca.as_string::<i32>(), cb.as_string::<i32>());
        for i in 0..batch.num_rows() {
            if ca.is_valid(i) && cb.is_valid(i) {
                set.insert((ca.value(i).to_string(), cb.value(i).to_string()));
            }
        }
    }
    set
}

/// Seconds of the I/O floor, in this process: reading `inputs` (every column
/// of the bench's catalogs is one the build reads) and
/// writing the `tables` of the build in `out` with the build's Parquet settings.
/// Both stream a batch at a time; only the writes are timed on the output side
/// (reading the build's tables back is not part of the floor).
fn io_floor(inputs: &[&Path], out: &Path, tables: &[&str]) -> f64 {
    let scratch = out.with_extension("floor");
    std::fs::create_dir_all(&scratch).unwrap();
    let start = Instant::now();
    let mut rows = 0usize;
    for input in inputs {
        for b in batches(input, None) {
            rows += b.num_rows();
        }
    }
    let mut t = start.elapsed().as_secs_f64();
    for name in tables {
        let source = out.join(format!("{name}.parquet"));
        let schema = ParquetRecordBatchReaderBuilder::try_new(File::open(&source).unwrap())
            .unwrap()
            .schema()
            .clone();
        let started = Instant::now();
        let mut w =
            ParquetOutput::create(&scratch.join(format!("{name}.parquet")), schema, Vec::new())
                .unwrap();
        t += started.elapsed().as_secs_f64();
        for b in batches(&source, None) {
            let started = Instant::now();
            w.write(&b).unwrap();
            t += started.elapsed().as_secs_f64();
        }
        let started = Instant::now();
        w.finish().unwrap();
        t += started.elapsed().as_secs_f64();
    }
    std::fs::remove_dir_all(&scratch).unwrap();
    assert!(rows > 0);
    t
}
