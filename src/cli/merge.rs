//! `fluxloom merge`: joins the output folders of runs over parts of the sky
//! (`build --cells`) into the folder one run over the whole sky writes
//! ([`crate::output::merge`] has the argument).

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::datatypes::Schema;
use clap::Args;

use super::build::{WRITE_CHUNK_OBJECTS, finish_folder, write_exports, write_science};
use crate::error::{Error, Result};
use crate::output::kway::merge_parts;
use crate::output::merge::{Ranker, TableKind, check_subsets, join_records, read_records};
use crate::output::parquet::{META_VERSION, ParquetOutput, read_metadata};
use crate::output::run_record::OutputRecord;
use crate::output::staging::Staging;
use crate::output::table_file::TableFormat;
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

/// The key-value metadata of a part's Parquet file, without the entries the
/// writer adds itself.
fn part_metadata(path: &Path) -> Result<Vec<(String, String)>> {
    Ok(read_metadata(path)?
        .into_iter()
        .filter(|(k, _)| k != META_VERSION && k != "ARROW:schema")
        .collect())
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
    let slots: usize = plan.catalogs.iter().map(|c| c.schema.bands.len()).sum();
    for (file, kind, chunk_rows) in [
        ("objects.parquet", TableKind::PerObject, WRITE_CHUNK_OBJECTS),
        (
            "photometry.parquet",
            TableKind::PerObject,
            WRITE_CHUNK_OBJECTS * slots.max(1),
        ),
        ("links.parquet", TableKind::Links, WRITE_CHUNK_OBJECTS),
        (
            "hard_sources.parquet",
            TableKind::HardSources,
            WRITE_CHUNK_OBJECTS,
        ),
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
        let files: Vec<PathBuf> = args.parts.iter().map(|p| p.join(file)).collect();
        let metadata = part_metadata(&files[0])?;
        let path = staging.path(file);
        let mut writer: Option<ParquetOutput> = None;
        let schema = merge_parts(
            &files,
            TableFormat::Parquet,
            kind,
            &ranker,
            chunk_rows,
            |chunk| {
                let schema = Arc::new(Schema::new(chunk.schema().fields().clone()));
                let chunk = chunk
                    .with_schema(schema.clone())
                    .map_err(|e| Error::columnar(&path, e))?;
                if writer.is_none() {
                    writer = Some(ParquetOutput::create(&path, schema, metadata.clone())?);
                }
                writer.as_mut().map_or(Ok(()), |w| w.write(&chunk))
            },
        )?;
        let w = match (writer, schema) {
            (Some(w), _) => w,
            // Every part's table is empty: an empty table with their schema.
            (None, Some(schema)) => {
                let schema = Arc::new(Schema::new(schema.fields().clone()));
                ParquetOutput::create(&path, schema, metadata)?
            }
            (None, None) => return Err(Error::Usage("no parts to merge".to_string())),
        };
        outputs.push(OutputRecord {
            file: file.to_string(),
            rows: w.finish()?,
        });
    }
    outputs.extend(write_exports(&mut staging, &plan)?);
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
