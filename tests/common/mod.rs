//! Helpers shared by the integration tests (each test file uses some of them).
#![allow(dead_code)]

use std::collections::HashMap;
use std::path::Path;

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::{DataType, Float64Type};
use fluxloom::crossmatch::{MatchResult, SourceTable};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

/// Column `name` of `batch` as text (cast to UTF-8; null reads "").
pub fn text(batch: &RecordBatch, name: &str) -> Vec<String> {
    let a = arrow::compute::cast(batch.column_by_name(name).unwrap(), &DataType::Utf8).unwrap();
    a.as_string::<i32>()
        .iter()
        .map(|s| s.unwrap_or("").to_string())
        .collect()
}

/// Float64 column `name` of `batch`, nulls as `None`.
pub fn floats(batch: &RecordBatch, name: &str) -> Vec<Option<f64>> {
    let a = batch
        .column_by_name(name)
        .unwrap()
        .as_primitive::<Float64Type>();
    (0..a.len())
        .map(|i| a.is_valid(i).then(|| a.value(i)))
        .collect()
}

/// All rows of a Parquet file as one batch.
pub fn read_parquet(path: &Path) -> RecordBatch {
    let reader = ParquetRecordBatchReaderBuilder::try_new(std::fs::File::open(path).unwrap())
        .unwrap()
        .build()
        .unwrap();
    let batches: Vec<RecordBatch> = reader.map(|b| b.unwrap()).collect();
    arrow::compute::concat_batches(&batches[0].schema(), &batches).unwrap()
}

/// Everything about a match result, as text lines to compare: objects with
/// their members, flags and relations, every link with its objects, and the
/// group statistics.
pub fn fingerprint(tables: &[SourceTable], r: &MatchResult) -> Vec<String> {
    let mut lines: Vec<String> = r
        .objects
        .iter()
        .map(|o| {
            let members: Vec<String> = o
                .members
                .iter()
                .map(|m| {
                    format!(
                        "{}:{}:{:.12}:{:.12}",
                        m.catalog, &tables[m.catalog].source_id[m.row], m.sep_arcsec, m.probability
                    )
                })
                .collect();
            format!(
                "{} {:.12} {:.12} {} {:.12} {:?} [{}]",
                o.object_id(tables),
                o.ra_deg,
                o.dec_deg,
                o.flags,
                o.probability,
                o.related_ids(tables),
                members.join(" ")
            )
        })
        .collect();
    lines.extend(r.links.iter().map(|l| {
        format!(
            "{}:{} {}:{} {:.12} {:.12} {} {} {}",
            l.catalog_a,
            &tables[l.catalog_a].source_id[l.row_a],
            l.catalog_b,
            &tables[l.catalog_b].source_id[l.row_b],
            l.sep_arcsec,
            l.probability,
            l.chosen,
            l.object_a.object_id(tables),
            l.object_b.object_id(tables)
        )
    }));
    lines.push(format!(
        "groups {} largest {} approximate {} candidates {}",
        r.stats.groups, r.stats.largest_group, r.stats.approximate_groups, r.stats.candidates
    ));
    lines
}

/// A small CSV reader for the demo's truth files (plain comma-separated, one
/// header line, `#` comments): one map from column to text per row.
pub fn read_csv_rows(path: &Path) -> Vec<HashMap<String, String>> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    lines
        .map(|l| {
            header
                .iter()
                .cloned()
                .zip(l.split(',').map(str::to_string))
                .collect()
        })
        .collect()
}

/// The output files of a folder with their bytes, without the hidden markers
/// of the output commit.
pub fn output_files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| !p.file_name().unwrap().to_string_lossy().starts_with('.'))
        .map(|p| {
            (
                p.file_name().unwrap().to_string_lossy().into_owned(),
                std::fs::read(&p).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

/// Asserts that folder `got` holds the same output files as `expected`, byte for byte.
pub fn assert_same_files(got: &Path, expected: &Path, what: &str) {
    let (got, expected) = (output_files(got), output_files(expected));
    assert_eq!(
        got.iter().map(|f| &f.0).collect::<Vec<_>>(),
        expected.iter().map(|f| &f.0).collect::<Vec<_>>(),
        "{what}"
    );
    for ((file, a), (_, b)) in got.iter().zip(&expected) {
        assert!(a == b, "{what}: {file} differs from the reference build");
    }
}

/// Waits until the journal folder `journal` holds `cells` finished cells, then
/// kills `child` (a build started with `--pause-after-cells`).
pub fn kill_once_journaled(mut child: std::process::Child, journal: &Path, cells: usize) {
    let journaled = || -> usize {
        std::fs::read_dir(journal).map_or(0, |d| {
            d.filter(|e| {
                e.as_ref()
                    .is_ok_and(|e| e.file_name().to_string_lossy().ends_with(".arrows"))
            })
            .count()
        })
    };
    let start = std::time::Instant::now();
    while journaled() < cells {
        assert!(
            start.elapsed().as_secs() < 600,
            "the build journaled {} cells",
            journaled()
        );
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
    child.kill().unwrap();
    child.wait().unwrap();
}

/// Runs `fluxloom cell-worker PLAN` on the cell file `cell` (its stdin) and
/// reads the cell's objects and links from its stdout.
pub fn run_cell_worker(plan: &Path, cell: &Path) -> fluxloom::crossmatch::cells::CellOutput {
    let worker = std::process::Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .arg("cell-worker")
        .arg(plan)
        .stdin(std::fs::File::open(cell).unwrap())
        .output()
        .unwrap();
    assert!(
        worker.status.success(),
        "{}",
        String::from_utf8_lossy(&worker.stderr)
    );
    fluxloom::crossmatch::cell_io::read_output(&worker.stdout[..], cell).unwrap()
}
