//! `fluxloom vet`: read one catalog through its survey schema and say what is in it.
//!
//! Prints rows read, kept and skipped (by reason); per band the counts of
//! detections, upper limits, non-detections, missing and rejected values (with
//! rejection reasons); and the first problems with their rows. With `--out` it
//! also writes the normalized source table as Parquet, atomically, with the band
//! table and the survey schema in the file's metadata.

use std::path::{Path, PathBuf};

use clap::Args;

use super::bands::load_library;
use super::progress::row_counter;
use crate::catalog::normalize::{BandStatus, NormalizeOptions, NormalizeReport, Normalizer};
use crate::catalog::schema::SurveySchema;
use crate::catalog::{CatalogBatches, DEFAULT_BATCH_ROWS, open, prefetch};
use crate::error::{Error, Result};
use crate::output::parquet::ParquetOutput;
use arrow::array::{AsArray, RecordBatch};

/// Arguments of `fluxloom vet`.
#[derive(Debug, Args)]
pub struct VetArgs {
    /// The catalog file (CSV/TSV, optionally .gz; Parquet; FITS; VOTable).
    pub catalog: PathBuf,
    /// The survey schema (TOML) describing the catalog.
    #[arg(long, short, value_name = "SCHEMA")]
    pub schema: PathBuf,
    /// A band file of your own to add to the built-in band library.
    #[arg(long, value_name = "FILE")]
    pub bands: Option<PathBuf>,
    /// Write the normalized source table to this Parquet file.
    #[arg(long, short, value_name = "PARQUET")]
    pub out: Option<PathBuf>,
    /// Skip rows whose identifier, position, epoch or position error cannot be read,
    /// and mark unreadable band values as rejected, counting both by reason
    /// (default: stop at the first unreadable value).
    #[arg(long)]
    pub skip_bad_rows: bool,
    /// Print the summary as JSON instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Rows per batch.
    #[arg(long, default_value_t = DEFAULT_BATCH_ROWS, hide = true)]
    pub batch_rows: usize,
}

/// Runs `fluxloom vet`.
///
/// # Errors
/// Schema, read and write errors; an unreadable value unless `--skip-bad-rows`.
pub fn run(args: &VetArgs, quiet: bool) -> Result<()> {
    let library = load_library(args.bands.as_deref())?;
    let schema = SurveySchema::from_file(&args.schema, &library)?;
    let options = NormalizeOptions {
        skip_bad_rows: args.skip_bad_rows,
    };
    let (report, written) = vet_catalog(
        &args.catalog,
        &schema,
        options,
        args.out.as_deref(),
        args.batch_rows,
        quiet,
    )?;
    let text = if args.json {
        serde_json::to_string_pretty(&report).map_err(|e| Error::Usage(e.to_string()))? + "\n"
    } else {
        summary(&args.catalog, &schema, &report, written.as_ref())
    };
    super::write_stdout(&text)
}

/// Reads and normalizes `catalog`, writing the normalized table to `out` when given.
/// Returns the report and, when written, the output path and row count.
///
/// # Errors
/// Schema, read and write errors.
pub fn vet_catalog(
    catalog: &Path,
    schema: &SurveySchema,
    options: NormalizeOptions,
    out: Option<&Path>,
    batch_rows: usize,
    quiet: bool,
) -> Result<(NormalizeReport, Option<(PathBuf, u64)>)> {
    let stream = prefetch(open(catalog, &schema.format, batch_rows)?, 2);
    let mut normalizer = Normalizer::new(schema, catalog, options);
    normalizer.check_file(&stream.schema)?;
    let mut output = match out {
        Some(path) => Some(ParquetOutput::create(
            path,
            normalizer.output_schema(),
            normalized_metadata(schema)?,
        )?),
        None => None,
    };
    let bar = row_counter(&format!("reading {}", catalog.display()), quiet);
    let mut ids = SourceIds::default();
    for_each_normalized(stream, &mut normalizer, |normalized| {
        bar.inc(normalized.num_rows() as u64);
        ids.add(&normalized, catalog)?;
        match output.as_mut() {
            Some(o) => o.write(&normalized),
            None => Ok(()),
        }
    })?;
    bar.finish_and_clear();
    ids.check(&schema.survey)?;
    let written = match (output, out) {
        (Some(o), Some(path)) => Some((path.to_path_buf(), o.finish()?)),
        _ => None,
    };
    Ok((normalizer.finish(), written))
}

/// Feeds the stream's batches to `normalizer` a few at a time (normalized in
/// parallel) and hands each normalized batch, in file order, to `sink`; at the
/// end checks the schema's flag character positions against the data
/// ([`Normalizer::check_flag_positions`]).
///
/// # Errors
/// Read errors, normalization errors, whatever `sink` returns, and a flag
/// position beyond every value of its column.
pub fn for_each_normalized(
    stream: CatalogBatches,
    normalizer: &mut Normalizer,
    mut sink: impl FnMut(RecordBatch) -> Result<()>,
) -> Result<()> {
    let chunk = 2 * rayon::current_num_threads().max(1);
    let mut pending: Vec<RecordBatch> = Vec::with_capacity(chunk);
    let mut batches = stream.batches;
    loop {
        let next = batches.next().transpose()?;
        let done = next.is_none();
        pending.extend(next);
        if pending.len() == chunk || (done && !pending.is_empty()) {
            for normalized in normalizer.normalize_many(&pending)? {
                sink(normalized)?;
            }
            pending.clear();
        }
        if done {
            return normalizer.check_flag_positions();
        }
    }
}

/// How many repeated source identifiers [`SourceIds`] lists in its message.
const REPEATS_SHOWN: usize = 5;

/// The source identifiers of the kept rows, to find those that appear twice
/// (which `build` refuses, so `vet` refuses them too).
#[derive(Default)]
struct SourceIds {
    /// Each identifier with the row it first appears on.
    first_row: std::collections::HashMap<String, u64>,
    /// Rows that repeat an earlier row's identifier.
    repeats: u64,
    /// The first repeats: identifier, its first row, the repeating row.
    shown: Vec<(String, u64, u64)>,
}

impl SourceIds {
    /// Adds the identifiers of one normalized batch.
    fn add(&mut self, normalized: &RecordBatch, catalog: &Path) -> Result<()> {
        let column = |name: &str| {
            normalized
                .column_by_name(name)
                .ok_or_else(|| Error::format(catalog, format!("normalized rows lack \"{name}\"")))
        };
        let ids = arrow::compute::cast(column("source_id")?, &arrow::datatypes::DataType::Utf8)
            .map_err(|e| Error::columnar(catalog, e))?;
        let rows = arrow::compute::cast(column("row")?, &arrow::datatypes::DataType::UInt64)
            .map_err(|e| Error::columnar(catalog, e))?;
        let ids = ids.as_string::<i32>();
        let rows = rows.as_primitive::<arrow::datatypes::UInt64Type>();
        for (id, row) in ids.iter().zip(rows.iter()) {
            let (Some(id), Some(row)) = (id, row) else {
                continue;
            };
            match self.first_row.get(id) {
                Some(&first) => {
                    self.repeats += 1;
                    if self.shown.len() < REPEATS_SHOWN {
                        self.shown.push((id.to_string(), first, row));
                    }
                }
                None => {
                    self.first_row.insert(id.to_string(), row);
                }
            }
        }
        Ok(())
    }

    /// The error for repeated identifiers, worded as `build` words it.
    fn check(&self, survey: &str) -> Result<()> {
        if self.repeats == 0 {
            return Ok(());
        }
        let shown: Vec<String> = self
            .shown
            .iter()
            .map(|(id, a, b)| format!("\"{id}\" (rows {a} and {b})"))
            .collect();
        let first = if self.repeats as usize > self.shown.len() {
            format!("; the first {}", self.shown.len())
        } else {
            String::new()
        };
        Err(Error::Usage(format!(
            "catalog \"{survey}\": {} row(s) repeat the source identifier of an earlier row{first}: {}; identifiers must be unique within a catalog",
            self.repeats,
            shown.join(", ")
        )))
    }
}

/// Key-value metadata of a normalized table: the survey schema text and the bands used.
fn normalized_metadata(schema: &SurveySchema) -> Result<Vec<(String, String)>> {
    let bands: Vec<_> = schema.bands.iter().map(|b| &b.band).collect();
    Ok(vec![
        ("fluxloom.survey".into(), schema.survey.clone()),
        ("fluxloom.survey_schema".into(), schema.text.clone()),
        (
            "fluxloom.bands".into(),
            serde_json::to_string(&bands).map_err(|e| Error::Usage(e.to_string()))?,
        ),
    ])
}

/// The human-readable summary.
fn summary(
    catalog: &Path,
    schema: &SurveySchema,
    r: &NormalizeReport,
    written: Option<&(PathBuf, u64)>,
) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "catalog  {} (survey \"{}\", schema {})\n",
        catalog.display(),
        schema.survey,
        schema.path.display()
    ));
    s.push_str(&format!(
        "rows     {} read, {} kept, {} skipped\n",
        r.rows_read,
        r.rows_kept,
        r.rows_skipped_total()
    ));
    for (reason, count) in &r.rows_skipped {
        s.push_str(&format!("         skipped {count}: {reason}\n"));
    }
    s.push_str(&format!(
        "\n{:<12} {:>10} {:>12} {:>13} {:>10} {:>10} {:>10}\n",
        "band", "detected", "upper_limit", "not_detected", "missing", "rejected", "saturated"
    ));
    for b in &r.bands {
        let c: Vec<u64> = BandStatus::ALL.iter().map(|st| b.count(*st)).collect();
        s.push_str(&format!(
            "{:<12} {:>10} {:>12} {:>13} {:>10} {:>10} {:>10}\n",
            b.band, c[0], c[1], c[2], c[3], c[4], c[5]
        ));
        for (reason, count) in &b.rejected_by {
            s.push_str(&format!("             rejected {count}: {reason}\n"));
        }
    }
    if r.problem_count > 0 {
        s.push_str(&format!(
            "\nproblems {} in all; the first {}:\n",
            r.problem_count,
            r.problems.len()
        ));
        for p in &r.problems {
            s.push_str(&format!(
                "  row {}, column \"{}\": expected {}, found \"{}\" ({})\n",
                p.row, p.column, p.expected, p.found, p.action
            ));
        }
    }
    match written {
        Some((path, rows)) => s.push_str(&format!("\nwrote    {} ({rows} rows)\n", path.display())),
        None => s.push_str(
            "\nwrote    nothing (add --out FILE.parquet to write the normalized table)\n",
        ),
    }
    s
}
