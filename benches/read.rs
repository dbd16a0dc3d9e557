//! Benchmark: reading and normalizing a large catalog, against the plain Arrow
//! readers on the same file in the same run.
//!
//! Run with `cargo bench --bench read` (rows: `FLUXLOOM_BENCH_ROWS`, default
//! 1,000,000; 8 bands). For CSV and Parquet it times
//!
//! - the baseline: the Arrow CSV reader with a typed schema (Utf8 id, Float64
//!   everything else) / the Parquet Arrow reader, reading every column;
//! - fluxloom: `catalog::open` plus the normalizer under a survey schema.
//!
//! and prints rows per second and the ratio fluxloom / baseline (target <= 1.5).
//! Each figure is the best of three runs, since the machine is shared.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::{Duration, Instant};

use arrow::array::{ArrayRef, Float64Array, RecordBatch, StringArray};
use arrow::datatypes::{DataType, Field, Schema};
use fluxloom::catalog::normalize::{NormalizeOptions, Normalizer};
use fluxloom::catalog::schema::SurveySchema;
use fluxloom::catalog::{DEFAULT_BATCH_ROWS, open, prefetch};
use fluxloom::photometry::BandLibrary;
use fluxloom::rng::Rng;

const BANDS: [(&str, &str); 8] = [
    ("jc_v", "vega_mag"),
    ("tmass_j", "vega_mag"),
    ("tmass_h", "vega_mag"),
    ("tmass_ks", "vega_mag"),
    ("wise_w1", "vega_mag"),
    ("wise_w2", "vega_mag"),
    ("sdss_r", "ab_mag"),
    ("irac_36", "mJy"),
];

fn main() {
    let rows: usize = std::env::var("FLUXLOOM_BENCH_ROWS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1_000_000);
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench-read");
    std::fs::create_dir_all(&dir).unwrap();
    let csv = dir.join(format!("catalog-{rows}.csv"));
    let parquet = dir.join(format!("catalog-{rows}.parquet"));
    if !csv.exists() || !parquet.exists() {
        eprintln!("writing {rows}-row test catalogs to {}", dir.display());
        write_catalogs(rows, &csv, &parquet);
    }
    let library = BandLibrary::builtin();
    println!("read + normalize, {rows} rows, 8 bands (best of 3)");
    println!(
        "{:<8} {:>14} {:>14} {:>16} {:>8}",
        "format", "baseline s", "fluxloom s", "fluxloom rows/s", "ratio"
    );
    // FLUXLOOM_BENCH_FORMATS=parquet (or csv) runs one format only, e.g. for profiling.
    let only = std::env::var("FLUXLOOM_BENCH_FORMATS").ok();
    for (label, path, format) in [("csv", &csv, "csv"), ("parquet", &parquet, "parquet")] {
        if only
            .as_deref()
            .is_some_and(|o| !o.split(',').any(|f| f == format))
        {
            continue;
        }
        let schema =
            SurveySchema::from_str(&schema_text(format), Path::new("bench.toml"), &library)
                .unwrap();
        let baseline = best_of(3, || match format {
            "csv" => arrow_csv_alone(path),
            _ => arrow_parquet_alone(path),
        });
        let ours = best_of(3, || fluxloom_read(path, &schema));
        println!(
            "{:<8} {:>14.3} {:>14.3} {:>16.0} {:>8.2}",
            label,
            baseline.as_secs_f64(),
            ours.as_secs_f64(),
            rows as f64 / ours.as_secs_f64(),
            ours.as_secs_f64() / baseline.as_secs_f64()
        );
    }
}

fn best_of(n: usize, mut f: impl FnMut() -> usize) -> Duration {
    (0..n)
        .map(|_| {
            let t = Instant::now();
            std::hint::black_box(f());
            t.elapsed()
        })
        .min()
        .unwrap()
}

fn column_names() -> Vec<String> {
    let mut names = vec!["id".to_string(), "ra".into(), "dec".into()];
    for (band, _) in BANDS {
        names.push(format!("{band}_v"));
        names.push(format!("{band}_e"));
    }
    names
}

fn schema_text(format: &str) -> String {
    let mut s = format!(
        "survey = \"bench\"\nformat = \"{format}\"\nid = \"id\"\n[position]\nra = \"ra\"\ndec = \"dec\"\nerror = {{ kind = \"fixed\", arcsec = 0.1 }}\n[epoch]\nyear = 2015.5\n"
    );
    for (band, unit) in BANDS {
        s.push_str(&format!(
            "[[band]]\nband = \"{band}\"\nvalue = \"{band}_v\"\nunit = \"{unit}\"\nerror = \"{band}_e\"\nnulls = [99.999]\n"
        ));
    }
    s
}

/// The catalog's Arrow schema: the identifier as text, everything else Float64.
fn typed_schema(names: &[String]) -> Arc<Schema> {
    let field = |(i, n): (usize, &String)| {
        let t = if i == 0 {
            DataType::Utf8
        } else {
            DataType::Float64
        };
        Field::new(n, t, true)
    };
    Arc::new(Schema::new(
        names.iter().enumerate().map(field).collect::<Vec<_>>(),
    ))
}

fn write_catalogs(rows: usize, csv: &Path, parquet: &Path) {
    let mut rng = Rng::new(42, "read");
    let names = column_names();
    let mut w = BufWriter::new(File::create(csv).unwrap());
    writeln!(w, "{}", names.join(",")).unwrap();
    let schema = typed_schema(&names);
    let mut pw =
        parquet::arrow::ArrowWriter::try_new(File::create(parquet).unwrap(), schema.clone(), None)
            .unwrap();
    let chunk = 100_000;
    let mut start = 0;
    while start < rows {
        let n = chunk.min(rows - start);
        let mut cols: Vec<Vec<f64>> = vec![Vec::with_capacity(n); names.len() - 1];
        let mut ids = Vec::with_capacity(n);
        for r in start..start + n {
            ids.push(format!("S{r:08}"));
            cols[0].push(150.0 + rng.uniform() * 2.0);
            cols[1].push(2.0 + rng.uniform() * 2.0);
            for b in 0..BANDS.len() {
                let (v, e) = if rng.uniform() < 0.03 {
                    (99.999, 99.999)
                } else if BANDS[b].1 == "mJy" {
                    (rng.uniform() * 5.0, 0.01 + rng.uniform() * 0.1)
                } else {
                    (10.0 + rng.uniform() * 8.0, 0.01 + rng.uniform() * 0.2)
                };
                cols[2 + 2 * b].push(v);
                cols[3 + 2 * b].push(e);
            }
            write!(w, "{}", ids.last().unwrap()).unwrap();
            for c in &cols {
                write!(w, ",{:.6}", c.last().unwrap()).unwrap();
            }
            writeln!(w).unwrap();
        }
        let mut arrays: Vec<ArrayRef> = vec![Arc::new(StringArray::from(ids))];
        arrays.extend(
            cols.into_iter()
                .map(|c| Arc::new(Float64Array::from(c)) as ArrayRef),
        );
        pw.write(&RecordBatch::try_new(schema.clone(), arrays).unwrap())
            .unwrap();
        start += n;
    }
    pw.close().unwrap();
    w.flush().unwrap();
}

fn arrow_csv_alone(path: &Path) -> usize {
    let names = column_names();
    let schema = typed_schema(&names);
    let reader = arrow::csv::ReaderBuilder::new(schema)
        .with_header(true)
        .with_batch_size(DEFAULT_BATCH_ROWS)
        .build(std::io::BufReader::with_capacity(
            1 << 20,
            File::open(path).unwrap(),
        ))
        .unwrap();
    reader.map(|b| b.unwrap().num_rows()).sum()
}

fn arrow_parquet_alone(path: &Path) -> usize {
    let reader = parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder::try_new(
        File::open(path).unwrap(),
    )
    .unwrap()
    .with_batch_size(DEFAULT_BATCH_ROWS)
    .build()
    .unwrap();
    reader.map(|b| b.unwrap().num_rows()).sum()
}

fn fluxloom_read(path: &Path, schema: &SurveySchema) -> usize {
    let stream = prefetch(open(path, &schema.format, DEFAULT_BATCH_ROWS).unwrap(), 2);
    let mut normalizer = Normalizer::new(schema, path, NormalizeOptions::default());
    normalizer.check_file(&stream.schema).unwrap();
    let mut rows = 0;
    fluxloom::cli::vet::for_each_normalized(stream, &mut normalizer, |b| {
        rows += b.num_rows();
        Ok(())
    })
    .unwrap();
    rows
}
