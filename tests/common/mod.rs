//! Helpers shared by the integration tests (each test file uses some of them).
#![allow(dead_code)]

use std::collections::HashMap;
use std::path::Path;

use arrow::array::RecordBatch;
use fluxloom::crossmatch::{MatchResult, SourceTable};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

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
