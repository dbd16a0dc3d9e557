//! Seeded mutation suite over small files of every format the readers take.
//!
//! Each fixture is truncated at every tenth of its length and gets at least
//! 2,000 single-byte flips (a quarter of them in the first 512 bytes, an eighth
//! in the last 64, where headers and trailers are). Every mutated file is read
//! in-process on a worker thread under `catch_unwind`, with a time limit: the
//! outcome must be a one-line error naming the file or a successful read, never
//! a panic, an abort or a hang. For gzip files a successful read must give the
//! original values (the CRC-32 trailer is checked); a truncated file of any
//! format except plain CSV must be an error. The counts per format are printed.

use std::io::Write;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::mpsc;
use std::time::Duration;

use arrow::array::{ArrayRef, Float64Array, Int32Array, RecordBatch, StringArray};
use arrow::datatypes::{DataType, Field, Schema};
use fluxloom::catalog::csv::read_csv;
use fluxloom::catalog::fits::{FitsOptions, read_fits};
use fluxloom::catalog::parquet::read_parquet;
use fluxloom::catalog::schema::CsvOptions;
use fluxloom::catalog::votable::{VotableOptions, read_votable};
use fluxloom::rng::Rng;

/// Single-byte flips per format.
const FLIPS: usize = 2_000;
/// A read taking longer than this is a hang.
const TIME_LIMIT: Duration = Duration::from_secs(20);

fn fixtures() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/readers")
}

/// The formats: name, file extension, original bytes.
fn formats() -> Vec<(&'static str, &'static str, Vec<u8>)> {
    let csv = csv_text();
    let fits = std::fs::read(fixtures().join("sources.fits")).unwrap();
    vec![
        ("csv", "csv", csv.clone()),
        ("csv.gz", "csv.gz", gzip(&csv)),
        ("parquet", "parquet", parquet_bytes()),
        ("fits", "fits", fits.clone()),
        ("fits.gz", "fits.gz", gzip(&fits)),
        (
            "vot-tabledata",
            "vot",
            std::fs::read(fixtures().join("sources_tabledata.vot")).unwrap(),
        ),
        (
            "vot-binary",
            "vot",
            std::fs::read(fixtures().join("sources_binary.vot")).unwrap(),
        ),
        (
            "vot-binary2",
            "vot",
            std::fs::read(fixtures().join("sources_binary2.vot")).unwrap(),
        ),
    ]
}

/// A small CSV with comment lines, quotes and empty fields.
fn csv_text() -> Vec<u8> {
    let mut s = String::from("# invented test catalog\n# second comment\nid,ra,dec,mag,note\n");
    for i in 0..30 {
        let note = if i % 4 == 0 {
            String::new()
        } else {
            format!("\"n, {i}\"")
        };
        s.push_str(&format!(
            "S{i:03},{:.6},{:.6},{:.3},{note}\n",
            10.0 + f64::from(i) * 0.01,
            -5.0 + f64::from(i) * 0.02,
            12.0 + f64::from(i) * 0.1
        ));
        if i == 10 {
            s.push_str("# a comment between rows\n");
        }
    }
    s.into_bytes()
}

fn gzip(bytes: &[u8]) -> Vec<u8> {
    let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    e.write_all(bytes).unwrap();
    e.finish().unwrap()
}

/// A small Parquet file of three row groups, with nulls.
fn parquet_bytes() -> Vec<u8> {
    let schema = Arc::new(Schema::new(vec![
        Field::new("id", DataType::Int32, false),
        Field::new("flux", DataType::Float64, true),
        Field::new("name", DataType::Utf8, true),
    ]));
    let ids: Vec<i32> = (0..24).collect();
    let flux: Vec<Option<f64>> = (0..24)
        .map(|i| (i % 5 != 0).then_some(f64::from(i) * 1.5))
        .collect();
    let names: Vec<Option<String>> = (0..24)
        .map(|i| (i % 3 != 0).then(|| format!("obj{i}")))
        .collect();
    let columns: Vec<ArrayRef> = vec![
        Arc::new(Int32Array::from(ids)),
        Arc::new(Float64Array::from(flux)),
        Arc::new(StringArray::from(names)),
    ];
    let batch = RecordBatch::try_new(schema.clone(), columns).unwrap();
    let props = parquet::file::properties::WriterProperties::builder()
        .set_max_row_group_row_count(Some(8))
        .build();
    let mut out = Vec::new();
    let mut w = parquet::arrow::ArrowWriter::try_new(&mut out, schema, Some(props)).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
    out
}

/// Reads `path` as `format` to the end; `Ok` with the batches or the error text.
fn read(format: &str, path: &Path) -> Result<Vec<RecordBatch>, String> {
    let batch_rows = 4;
    let result = match format {
        "csv" | "csv.gz" => read_csv(path, &CsvOptions::default(), batch_rows),
        "parquet" => read_parquet(path, batch_rows),
        "fits" | "fits.gz" => read_fits(
            path,
            &FitsOptions {
                hdu: None,
                batch_rows,
            },
        ),
        _ => read_votable(
            path,
            &VotableOptions {
                table_index: 0,
                batch_rows,
            },
        ),
    };
    result
        .and_then(|t| t.batches.collect::<Result<Vec<_>, _>>())
        .map_err(|e| e.to_string())
}

/// How one read ended.
#[derive(Debug)]
enum Outcome {
    Error(String),
    Read(Vec<RecordBatch>),
    Panic(String),
    Hang,
}

/// Reads on a worker thread under `catch_unwind`, with [`TIME_LIMIT`].
fn guarded_read(format: &'static str, path: PathBuf) -> Outcome {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let outcome = match catch_unwind(AssertUnwindSafe(|| read(format, &path))) {
            Ok(Ok(batches)) => Outcome::Read(batches),
            Ok(Err(e)) => Outcome::Error(e),
            Err(payload) => Outcome::Panic(
                payload
                    .downcast_ref::<&str>()
                    .map(|s| s.to_string())
                    .or_else(|| payload.downcast_ref::<String>().cloned())
                    .unwrap_or_default(),
            ),
        };
        let _ = tx.send(outcome);
    });
    rx.recv_timeout(TIME_LIMIT).unwrap_or(Outcome::Hang)
}

/// Outcome counts of one format.
#[derive(Default, Debug)]
struct Tally {
    cases: usize,
    errors: usize,
    reads_same: usize,
    reads_changed: usize,
    panics: Vec<String>,
    hangs: usize,
    /// Problems that break the rules: messages that are not one line, gzip reads
    /// with changed values, truncations read as complete.
    broken: Vec<String>,
}

fn same(a: &[RecordBatch], b: &[RecordBatch]) -> bool {
    let concat = |x: &[RecordBatch]| {
        if x.is_empty() {
            return None;
        }
        arrow::compute::concat_batches(&x[0].schema(), x).ok()
    };
    concat(a) == concat(b)
}

fn record(
    tally: &mut Tally,
    format: &str,
    what: &str,
    outcome: Outcome,
    original: &[RecordBatch],
    must_fail: bool,
    name: &str,
) {
    tally.cases += 1;
    match outcome {
        Outcome::Error(message) => {
            tally.errors += 1;
            if message.contains('\n') || !message.contains(name) {
                tally
                    .broken
                    .push(format!("{what}: unclear message {message:?}"));
            }
        }
        Outcome::Read(batches) => {
            let unchanged = same(&batches, original);
            if unchanged {
                tally.reads_same += 1;
            } else {
                tally.reads_changed += 1;
            }
            if must_fail {
                tally.broken.push(format!("{what}: read without error"));
            } else if format.ends_with(".gz") && !unchanged {
                tally
                    .broken
                    .push(format!("{what}: gzip read with changed values"));
            }
        }
        Outcome::Panic(m) => tally.panics.push(format!("{what}: {m}")),
        Outcome::Hang => tally.hangs += 1,
    }
}

/// Positions of the flips: a quarter in the first 512 bytes, an eighth in the last 64.
fn flip_position(rng: &mut Rng, len: usize, k: usize) -> usize {
    match k % 8 {
        0 | 1 => rng.below(len.min(512)),
        2 => len - 1 - rng.below(len.min(64)),
        _ => rng.below(len),
    }
}

#[test]
fn mutated_files_give_errors_or_reads_never_panics_or_hangs() {
    std::panic::set_hook(Box::new(|_| {}));
    let dir = tempfile::tempdir().unwrap();
    let mut report =
        String::from("format          cases  errors  reads(same)  reads(changed)  panics  hangs\n");
    let mut failures = Vec::new();
    for (format, ext, bytes) in formats() {
        let name = format!("m-{}.{ext}", format.replace('.', "-"));
        let path = dir.path().join(&name);
        std::fs::write(&path, &bytes).unwrap();
        let original = match guarded_read(format, path.clone()) {
            Outcome::Read(b) => b,
            other => panic!("{format}: the unmutated file does not read: {other:?}"),
        };
        let mut tally = Tally::default();
        for tenth in 0..10 {
            let cut = bytes.len() * tenth / 10;
            std::fs::write(&path, &bytes[..cut]).unwrap();
            let outcome = guarded_read(format, path.clone());
            // Plain FITS: the first BINTABLE's data ends at byte 12180
            // (tests/fixtures/readers/README.md); later HDUs are not read.
            let must_fail = match format {
                "csv" => false,
                "fits" => cut < 12_180,
                _ => true,
            };
            let what = format!("{format} truncated to {cut} bytes");
            record(
                &mut tally, format, &what, outcome, &original, must_fail, &name,
            );
        }
        let mut rng = Rng::new(20_261_202, format);
        for k in 0..FLIPS {
            let at = flip_position(&mut rng, bytes.len(), k);
            let mask = 1 + rng.below(255) as u8;
            let mut mutated = bytes.clone();
            mutated[at] ^= mask;
            std::fs::write(&path, &mutated).unwrap();
            let outcome = guarded_read(format, path.clone());
            let what = format!("{format} byte {at} ^ 0x{mask:02x}");
            record(&mut tally, format, &what, outcome, &original, false, &name);
        }
        report.push_str(&format!(
            "{format:<15} {:>5}  {:>6}  {:>11}  {:>14}  {:>6}  {:>5}\n",
            tally.cases,
            tally.errors,
            tally.reads_same,
            tally.reads_changed,
            tally.panics.len(),
            tally.hangs
        ));
        failures.extend(tally.panics.iter().map(|p| format!("panic: {p}")));
        if tally.hangs > 0 {
            failures.push(format!("{format}: {} hangs", tally.hangs));
        }
        failures.extend(tally.broken);
    }
    let _ = std::panic::take_hook();
    println!("{report}");
    assert!(
        failures.is_empty(),
        "{report}\n{} problems, the first 20:\n{}",
        failures.len(),
        failures
            .iter()
            .take(20)
            .cloned()
            .collect::<Vec<_>>()
            .join("\n")
    );
}
