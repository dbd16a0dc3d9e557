//! `fluxloom merge`: joins the output folders of runs over parts of the sky
//! (`build --cells`) into the folder one run over the whole sky writes
//! ([`crate::output::merge`] has the argument).

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::RecordBatch;
use arrow::datatypes::Schema;
use clap::Args;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use super::build::{WRITE_CHUNK_OBJECTS, finish_folder, write_exports, write_science};
use crate::error::{Error, Result};
use crate::output::merge::{
    Ranker, TableKind, check_subsets, join_records, join_table, read_records,
};
use crate::output::parquet::{META_VERSION, ParquetOutput};
use crate::output::run_record::OutputRecord;
use crate::output::staging::Staging;
use crate::output::tables::for_export;
use crate::plan::Plan;

/// Arguments of `fluxloom merge`.
#[derive(Debug, Args)]
pub struct MergeArgs {
    /// The plan the parts were built from.
    pub plan: PathBuf,
    /// The output folders of the parts (`fluxloom build --cells`).
    #[arg(required = true, num_args = 1..)]
    pub parts: Vec<PathBuf>,
    /// Write into this folder instead of the plan's output folder.
    #[arg(long, short, value_name = "FOLDER")]
    pub out: Option<PathBuf>,
}

/// Parquet key-value metadata pairs.
type KeyValues = Vec<(String, String)>;

/// One Parquet file of a part: its batches and its key-value metadata
/// (without the entries the writer adds itself).
fn read_part(path: &Path) -> Result<(Vec<RecordBatch>, KeyValues)> {
    let file = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let builder =
        ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| Error::columnar(path, e))?;
    let metadata: Vec<(String, String)> = builder
        .metadata()
        .file_metadata()
        .key_value_metadata()
        .into_iter()
        .flatten()
        .filter(|kv| kv.key != META_VERSION && kv.key != "ARROW:schema")
        .map(|kv| (kv.key.clone(), kv.value.clone().unwrap_or_default()))
        .collect();
    let reader = builder.build().map_err(|e| Error::columnar(path, e))?;
    let batches = reader
        .collect::<std::result::Result<Vec<_>, _>>()
        .map_err(|e| Error::columnar(path, e))?;
    Ok((batches, metadata))
}

/// Runs `fluxloom merge`.
///
/// # Errors
/// Parts that do not fit together (other plans or inputs, overlapping or
/// missing cells), read and write errors; nothing is written on error.
pub fn run(args: &MergeArgs) -> Result<()> {
    let plan = Plan::from_file(&args.plan)?;
    let out_dir = args.out.clone().unwrap_or_else(|| plan.output.clone());
    let records = read_records(&args.parts)?;
    let subsets = check_subsets(&args.parts, &records)?;
    let names: Vec<String> = plan.catalogs.iter().map(|c| c.name.clone()).collect();
    let ranker = Ranker::new(&names);
    let mut staging = Staging::new(&out_dir)?;
    let mut outputs: Vec<OutputRecord> = Vec::new();
    let (mut objects, mut photometry) = (Vec::new(), Vec::new());
    let slots: usize = plan.catalogs.iter().map(|c| c.schema.bands.len()).sum();
    let exporting = !plan.exports.is_empty();
    for (file, kind, chunk_rows) in [
        ("objects.parquet", TableKind::PerObject, WRITE_CHUNK_OBJECTS),
        (
            "photometry.parquet",
            TableKind::PerObject,
            WRITE_CHUNK_OBJECTS * slots.max(1),
        ),
        ("links.parquet", TableKind::Links, WRITE_CHUNK_OBJECTS),
        ("hard_sources.parquet", TableKind::HardSources, usize::MAX),
    ] {
        let present: Vec<bool> = args.parts.iter().map(|p| p.join(file).is_file()).collect();
        if !present.iter().any(|&p| p) {
            continue;
        }
        if let Some(k) = present.iter().position(|&p| !p) {
            return Err(Error::Usage(format!(
                "{} lacks {file}, which {} has",
                args.parts[k].display(),
                args.parts[present.iter().position(|&p| p).unwrap_or(0)].display()
            )));
        }
        let mut batches = Vec::new();
        let mut metadata = Vec::new();
        for p in &args.parts {
            let (b, m) = read_part(&p.join(file))?;
            batches.extend(b);
            metadata = m;
        }
        let origin = args.parts[0].join(file);
        let joined = join_table(&batches, kind, &ranker, &origin)?;
        let schema = Arc::new(Schema::new(joined.schema().fields().clone()));
        let joined = joined
            .with_schema(schema.clone())
            .map_err(|e| Error::columnar(&origin, e))?;
        let mut w = ParquetOutput::create(&staging.path(file), schema, metadata)?;
        let n = joined.num_rows();
        let mut start = 0;
        while start < n {
            let len = chunk_rows.min(n - start);
            let chunk = joined.slice(start, len);
            w.write(&chunk)?;
            if exporting && file == "objects.parquet" {
                objects.push(for_export(&chunk)?);
            }
            if exporting && file == "photometry.parquet" {
                photometry.push(for_export(&chunk)?);
            }
            start += len;
        }
        outputs.push(OutputRecord {
            file: file.to_string(),
            rows: w.finish()?,
        });
    }
    outputs.extend(write_exports(&mut staging, &plan, &objects, &photometry)?);
    outputs.extend(write_science(&mut staging, &plan)?);
    let outputs_json = serde_json::to_value(&outputs).map_err(|e| Error::Usage(e.to_string()))?;
    let record = join_records(&args.parts, &records, outputs_json)?;
    let text = serde_json::to_string_pretty(&record).map_err(|e| Error::Usage(e.to_string()))?;
    let (_, report) = finish_folder(staging, &plan, &text)?;
    let cells: usize = subsets.iter().map(|s| s.cells_with_sources).sum();
    let mut s = format!(
        "merged   {} parts ({cells} cells at order {}) into {}\n",
        args.parts.len(),
        subsets.first().map_or(0, |s| s.order),
        out_dir.display()
    );
    for o in &outputs {
        s.push_str(&format!("         {:<20} {:>8} rows\n", o.file, o.rows));
    }
    s.push_str("         run.json\n");
    s.push_str(&crate::report::warnings::build_lines(report.as_deref()));
    super::write_stdout(&s)
}
