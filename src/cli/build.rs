//! `fluxloom build`: from a plan file to SED tables, in one command.
//!
//! Reads and normalizes every catalog of the plan, cross-matches them all at
//! once (measuring and, if asked, correcting astrometric offsets), assembles one
//! SED per object with coverage deciding "not detected" against "not covered",
//! and writes `objects.parquet`, `photometry.parquet`, `links.parquet`, the
//! exports and `run.json` into the output folder — all or nothing.

use std::path::{Path, PathBuf};

use arrow::array::RecordBatch;
use clap::Args;
use sha2::{Digest, Sha256};

use super::progress::{row_counter, spinner};
use super::vet::for_each_normalized;
use crate::catalog::normalize::{NormalizeOptions, NormalizeReport, Normalizer};
use crate::catalog::{DEFAULT_BATCH_ROWS, open, prefetch};
use crate::crossmatch::SourceTable;
use crate::crossmatch::cells::CellRun;
use crate::crossmatch::density::footprint_order;
use crate::crossmatch::engine::{MatchResult, MatchSetup};
use crate::crossmatch::false_matches::{FalseMatchEstimate, estimate_false_matches};
use crate::crossmatch::floors::{FAR_ABOVE_FACTOR, FloorEstimate, far_above_stated};
use crate::crossmatch::systematics::{
    CatalogOffset, FloorInForce, FloorOrigin, correct_offsets, floors_in_force, with_floors,
};
use crate::error::{Error, Result};
use crate::output::batches::ParquetBatches;
use crate::output::journal::Journal;
use crate::output::kway::without_empty_nulls;
use crate::output::run_record::{InputRecord, OutputRecord, RunRecord, SedRecord, SubsetRecord};
use crate::output::staging::Staging;
use crate::output::table_file::{TableFormat, TableOutput};
use crate::output::tables::{
    for_export, hard_sources_batch, links_batch, objects_batch, photometry_batch,
};
use crate::output::{csv::write_csv, fits::write_fits, votable::write_votable};
use crate::plan::{ExportFormat, Plan};
use crate::sed::{BandSlot, SedAssembler, SedStatus};
use crate::sky::coverage::Coverage;

/// Objects assembled and written per chunk (also the Parquet row-group size of
/// the objects table).
pub const WRITE_CHUNK_OBJECTS: usize = 65_536;

/// Arguments of `fluxloom build`.
#[derive(Debug, Args)]
pub struct BuildArgs {
    /// The plan file (TOML).
    pub plan: PathBuf,
    /// Write into this folder instead of the plan's output folder.
    #[arg(long, short, value_name = "FOLDER")]
    pub out: Option<PathBuf>,
    /// HEALPix order of the sky cells matched one at a time (default: the plan's
    /// `partition_order`). The outputs do not depend on it.
    #[arg(long, value_name = "ORDER", value_parser = clap::value_parser!(u8).range(0..=29))]
    pub cell_order: Option<u8>,
    /// Worker threads (default: one per core). The outputs do not depend on it.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub threads: Option<u16>,
    /// Objects assembled and written at a time (for tests; the outputs do not depend on it).
    #[arg(long, value_name = "N", hide = true, value_parser = clap::value_parser!(u32).range(1..))]
    pub write_chunk: Option<u32>,
    /// Match and write only these sky cells: NESTED indices at the cell order,
    /// e.g. `3,17-20`, so that jobs can share a sky; join their folders with
    /// `fluxloom merge`.
    #[arg(long, value_name = "LIST", value_parser = parse_cell_list)]
    pub cells: Option<CellList>,
    /// Build within this much memory (e.g. `2G`, `512M`): catalogs are routed to
    /// sky cells through spill files beside the output folder and matched a
    /// group of cells at a time. The outputs do not depend on it. Without it,
    /// a build whose inputs would need more than half of the available memory
    /// runs within that half, and says so.
    #[arg(long, value_name = "SIZE", value_parser = super::stream::parse_memory_size)]
    pub memory_limit: Option<u64>,
    /// With `--memory-limit`: rows per group of cells at most (tests; the outputs do not depend on it).
    #[arg(long, value_name = "N", hide = true, requires = "memory_limit")]
    pub group_rows: Option<u64>,
    /// With `--memory-limit`: spill each catalog's routed rows past this many bytes (tests).
    #[arg(long, value_name = "BYTES", hide = true, requires = "memory_limit")]
    pub spill_bytes: Option<usize>,
    /// With `--memory-limit`: routing margin, arcsec, instead of four first-pass margins (tests).
    #[arg(long, value_name = "ARCSEC", hide = true, requires = "memory_limit")]
    pub routing_margin: Option<f64>,
    /// Stop (sleep) once this many cells are journaled, to test resuming a killed run.
    #[arg(long, value_name = "N", hide = true)]
    pub pause_after_cells: Option<usize>,
}

/// Sky cells chosen on the command line, ascending and without repeats.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CellList(pub Vec<u64>);

/// Parses `3,17-20` into the cells 3, 17, 18, 19, 20.
///
/// # Errors
/// A message naming the part that is not a cell index or a range `a-b` with a ≤ b.
pub fn parse_cell_list(text: &str) -> std::result::Result<CellList, String> {
    let mut cells = Vec::new();
    for part in text.split(',').map(str::trim) {
        let bad = || format!("\"{part}\" is not a cell index or a range like 17-20");
        match part.split_once('-') {
            Some((a, b)) => {
                let (a, b): (u64, u64) = (
                    a.trim().parse().map_err(|_| bad())?,
                    b.trim().parse().map_err(|_| bad())?,
                );
                if a > b || b - a > 50_000_000 {
                    return Err(bad());
                }
                cells.extend(a..=b);
            }
            None => cells.push(part.parse().map_err(|_| bad())?),
        }
    }
    cells.sort_unstable();
    cells.dedup();
    Ok(CellList(cells))
}

/// How a build runs, without changing what it writes (except `cells`, which
/// chooses the part of the sky written).
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// Hide progress bars.
    pub quiet: bool,
    /// Sky-cell order to use instead of the plan's.
    pub cell_order: Option<u8>,
    /// Objects per write chunk instead of [`WRITE_CHUNK_OBJECTS`].
    pub write_chunk: Option<usize>,
    /// Only these sky cells (at the cell order).
    pub cells: Option<Vec<u64>>,
    /// Sleep once this many cells are journaled (tests of resuming).
    pub pause_after_cells: Option<usize>,
    /// Rows per group of cells in a build within a memory limit, instead of what the limit gives.
    pub group_rows: Option<u64>,
    /// Spill threshold of the routing pass, bytes, instead of what the limit gives.
    pub spill_bytes: Option<usize>,
    /// Routing margin, arcsec, instead of four first-pass margins.
    pub routing_margin: Option<f64>,
}

/// Everything read from one catalog besides its source table.
struct ReadCatalog {
    normalized: RecordBatch,
    report: NormalizeReport,
    sha256: String,
    bytes: u64,
}

/// Runs `fluxloom build`.
///
/// # Errors
/// Plan, schema, read, match and write errors; nothing is written on error.
pub fn run(args: &BuildArgs, quiet: bool) -> Result<()> {
    let plan = Plan::from_file(&args.plan)?;
    let out_dir = args.out.clone().unwrap_or_else(|| plan.output.clone());
    let options = RunOptions {
        quiet,
        cell_order: args.cell_order,
        write_chunk: args.write_chunk.map(|n| n as usize),
        cells: args.cells.clone().map(|c| c.0),
        pause_after_cells: args.pause_after_cells,
        group_rows: args.group_rows,
        spill_bytes: args.spill_bytes,
        routing_margin: args.routing_margin,
    };
    // Without a limit, a build that would not fit in half of the available
    // memory runs within that half (its files are the same).
    let auto = match args.memory_limit {
        Some(_) => None,
        None => super::auto_limit::automatic_limit(&plan)?,
    };
    let limit = args.memory_limit.or(auto.map(|a| a.limit_bytes));
    let build = |plan: &Plan, out_dir: &Path, options: RunOptions| match limit {
        Some(limit) => super::stream::build_within(plan, out_dir, options, limit),
        None => build_with(plan, out_dir, options),
    };
    let outcome = match args.threads {
        Some(n) => rayon::ThreadPoolBuilder::new()
            .num_threads(usize::from(n))
            .build()
            .map_err(|e| Error::Usage(format!("cannot start {n} threads: {e}")))?
            .install(|| build(&plan, &out_dir, options.clone()))?,
        None => build(&plan, &out_dir, options)?,
    };
    let note = auto.map(|a| a.summary_line()).unwrap_or_default();
    super::write_stdout(&(outcome.summary + &note))
}

/// What a build produced, for the caller to show.
pub struct BuildOutcome {
    /// The human-readable summary.
    pub summary: String,
    /// The files written.
    pub files: Vec<PathBuf>,
}

/// Runs the whole build of `plan` into `out_dir`.
///
/// # Errors
/// As [`run`].
pub fn build(plan: &Plan, out_dir: &Path, quiet: bool) -> Result<BuildOutcome> {
    build_with(
        plan,
        out_dir,
        RunOptions {
            quiet,
            ..RunOptions::default()
        },
    )
}

/// As [`build`], with run options.
///
/// # Errors
/// As [`run`].
pub fn build_with(plan: &Plan, out_dir: &Path, run: RunOptions) -> Result<BuildOutcome> {
    let quiet = run.quiet;
    let mut matching = plan.matching.clone();
    if let Some(order) = run.cell_order {
        matching.partition_order = order;
    }
    let started = std::time::Instant::now();
    let mut clock = PhaseClock::default();
    let prepared = prepare(plan, &matching, quiet)?;
    clock.read = started.elapsed().as_secs_f64();
    let matched_tables = prepared.matched();
    let Prepared {
        read,
        tables,
        offsets,
        setup,
        ..
    } = &prepared;
    // The settings in force: the measured floors in.
    let matching = &prepared.matching;
    let (read, tables, setup) = (&read[..], &tables[..], setup);
    let offsets = offsets.clone();
    let bar = spinner("cross-matching", quiet);
    let digests: Vec<&str> = read.iter().map(|r| r.sha256.as_str()).collect();
    let journal = Journal::open(
        out_dir,
        &run_key(
            plan,
            &digests,
            matching.partition_order,
            run.cells.as_deref(),
            "",
        ),
        matching.partition_order,
    )?;
    let record_cell = journal_recorder(&journal, run.pause_after_cells);
    let result = setup.run(
        matching,
        CellRun {
            subset: run.cells.clone(),
            finished: journal.finished()?,
            on_complete: Some(&record_cell),
            ..CellRun::default()
        },
    )?;
    drop(record_cell);
    clock.matching = started.elapsed().as_secs_f64() - clock.read;
    bar.set_message("estimating false matches");
    let false_matches: Vec<FalseMatchEstimate> = if plan.false_matches {
        estimate_false_matches(matched_tables, matching)?
    } else {
        Vec::new()
    };
    bar.finish_and_clear();

    clock.false_matches = started.elapsed().as_secs_f64() - clock.read - clock.matching;
    // Coverage decides "not detected" against "not covered": only SEDs need it.
    let seds_written = plan.tables.objects || plan.tables.photometry;
    let coverage: Vec<Coverage> = plan
        .catalogs
        .iter()
        .zip(tables)
        .filter(|_| seds_written)
        .map(|(c, t)| match &c.coverage {
            Some(path) => Coverage::from_moc_file(path),
            None => {
                let order = c
                    .coverage_order
                    .unwrap_or_else(|| footprint_order(&t.ra_deg, &t.dec_deg));
                Ok(Coverage::from_positions(order, &t.ra_deg, &t.dec_deg))
            }
        })
        .collect::<Result<_>>()?;
    let slots = band_slots(plan);
    let normalized: Vec<RecordBatch> = read.iter().map(|r| r.normalized.clone()).collect();
    let bar = spinner("writing", quiet);
    let mut staging = Staging::new(out_dir)?;
    let Written {
        mut outputs,
        status_counts,
    } = write_tables(
        &mut |name| staging.path(name),
        &TableInputs {
            plan,
            result: &result,
            tables,
            matched: matched_tables,
            normalized: &normalized,
            coverage: &coverage,
            slots: &slots,
            chunk_objects: run.write_chunk.unwrap_or(WRITE_CHUNK_OBJECTS),
            format: TableFormat::Parquet,
        },
    )?;
    outputs.extend(write_exports(&mut staging, plan)?);
    outputs.extend(write_science(&mut staging, plan)?);
    let mut record = RunRecord::new(
        plan,
        read.iter()
            .zip(&plan.catalogs)
            .map(|(r, c)| input_record(c, &r.sha256, r.bytes, &r.report))
            .collect(),
        &result,
        offsets,
        false_matches,
        sed_counts(&slots, &status_counts),
        outputs.clone(),
    );
    record.subset = run.cells.clone().map(|cells| SubsetRecord {
        order: matching.partition_order,
        cells,
        cells_with_sources: result.stats.cells.emitted,
        cells_with_sources_in_all: result.stats.cells.cells,
    });
    clock.write =
        started.elapsed().as_secs_f64() - clock.read - clock.matching - clock.false_matches;
    let (files, report) = finish_folder(staging, plan, &record.to_json()?)?;
    clock.total = started.elapsed().as_secs_f64();
    journal.remove()?;
    bar.finish_and_clear();
    Ok(BuildOutcome {
        summary: summary(
            plan,
            out_dir,
            &read.iter().map(|r| &r.report).collect::<Vec<_>>(),
            &record,
            &outputs,
        ) + &clock.line(&result.stats.seconds)
            + &crate::report::warnings::build_lines(report.as_deref()),
        files,
    })
}

/// The run.json record of one input catalog.
pub(crate) fn input_record(
    c: &crate::plan::PlanCatalog,
    sha256: &str,
    bytes: u64,
    report: &NormalizeReport,
) -> InputRecord {
    InputRecord {
        catalog: c.name.clone(),
        file: c.file.display().to_string(),
        schema: c.schema.path.display().to_string(),
        sha256: sha256.to_string(),
        bytes,
        normalize: report.clone(),
    }
}

/// The SED's band slots: every band of every catalog, in plan order.
pub(crate) fn band_slots(plan: &Plan) -> Vec<BandSlot> {
    plan.catalogs
        .iter()
        .enumerate()
        .flat_map(|(k, c)| {
            c.schema.bands.iter().map(move |b| BandSlot {
                catalog: k,
                catalog_name: c.name.clone(),
                spec: b.clone(),
                catalog_resolution_arcsec: c.settings.resolution_arcsec,
            })
        })
        .collect()
}

/// What the tables of a match are written from.
#[derive(Clone, Copy)]
pub(crate) struct TableInputs<'a> {
    /// The plan.
    pub plan: &'a Plan,
    /// The match.
    pub result: &'a MatchResult,
    /// The source tables as read (identifiers).
    pub tables: &'a [SourceTable],
    /// The source tables matched (offsets corrected when they were).
    pub matched: &'a [SourceTable],
    /// The normalized catalogs (photometry).
    pub normalized: &'a [RecordBatch],
    /// Each catalog's coverage (empty when no SED table is written).
    pub coverage: &'a [Coverage],
    /// The band slots of the SEDs.
    pub slots: &'a [BandSlot],
    /// Objects per write chunk.
    pub chunk_objects: usize,
    /// How the tables are stored (Parquet, or Arrow streams for parts).
    pub format: TableFormat,
}

/// What writing the tables gave: their records, the SED status counts per
/// slot and, when the plan exports, the batches to export.
pub(crate) struct Written {
    pub outputs: Vec<OutputRecord>,
    pub status_counts: Vec<[u64; SedStatus::ALL.len()]>,
}

/// Writes the tables the plan asks for (objects, photometry, links, hard
/// sources) at the paths `path` gives for their names, a chunk of objects at a time.
///
/// # Errors
/// Assembly and write errors.
pub(crate) fn write_tables(
    path: &mut dyn FnMut(&str) -> PathBuf,
    inputs: &TableInputs,
) -> Result<Written> {
    let TableInputs {
        plan,
        result,
        tables,
        matched: matched_tables,
        normalized,
        coverage,
        slots,
        chunk_objects,
        format,
    } = *inputs;
    let seds_written = plan.tables.objects || plan.tables.photometry;
    let assembler = seds_written
        .then(|| SedAssembler::new(slots, &result.objects, normalized, coverage))
        .transpose()?;

    let metadata = table_metadata(plan, slots)?;
    let epoch = plan.matching.reference_epoch_yr;
    // The tables are assembled and written a chunk of objects at a time, so only
    // one chunk of output columns is in memory (plus the exports' copy, if any).
    let which = plan.tables;
    let mut create = |stem: &str, batch: Result<RecordBatch>| {
        let name = format.file_name(stem);
        TableOutput::create(format, &path(&name), batch?.schema(), metadata.clone())
    };
    let mut objects_out = match which.objects {
        true => Some(create(
            "objects",
            objects_batch(&[], &[], slots, tables, epoch),
        )?),
        false => None,
    };
    let mut photometry_out = match which.photometry {
        true => Some(create(
            "photometry",
            photometry_batch(&[], &[], slots, tables),
        )?),
        false => None,
    };
    let links_out = match which.links {
        true => Some(create("links", links_batch(&[], tables))?),
        false => None,
    };
    let mut status_counts = vec![[0u64; SedStatus::ALL.len()]; slots.len()];
    let n_objects = result.objects.len();
    // Each table has its own writer: links are written on a thread of their
    // own while objects and photometry are, chunk by chunk, side by side.
    let links = &result.links;
    let links_out = std::thread::scope(|scope| -> Result<Option<TableOutput>> {
        let links_writer = links_out.map(|mut w| {
            scope.spawn(move || -> Result<TableOutput> {
                for chunk in links.chunks(chunk_objects) {
                    w.write(&links_batch(chunk, tables)?)?;
                }
                Ok(w)
            })
        });
        if which.objects || which.photometry {
            for start in (0..n_objects).step_by(chunk_objects) {
                let range = start..(start + chunk_objects).min(n_objects);
                let seds = assembler
                    .as_ref()
                    .map_or_else(|| Ok(Vec::new()), |a| a.seds(range.clone()))?;
                for sed in &seds {
                    for (k, p) in sed.points.iter().enumerate() {
                        status_counts[k][p.status as usize] += 1;
                    }
                }
                let chunk = &result.objects[range];
                let (ob, pb) = rayon::join(
                    || -> Result<()> {
                        match objects_out.as_mut() {
                            Some(w) => w.write(&objects_batch(chunk, &seds, slots, tables, epoch)?),
                            None => Ok(()),
                        }
                    },
                    || -> Result<()> {
                        match photometry_out.as_mut() {
                            Some(w) => w.write(&photometry_batch(chunk, &seds, slots, tables)?),
                            None => Ok(()),
                        }
                    },
                );
                ob?;
                pb?;
            }
        }
        links_writer
            .map(|h| h.join().expect("the links writer does not panic"))
            .transpose()
    })?;
    let mut outputs: Vec<OutputRecord> = Vec::new();
    for (stem, w) in [
        ("objects", objects_out),
        ("photometry", photometry_out),
        ("links", links_out),
    ] {
        let Some(w) = w else { continue };
        let rows = w.finish()?;
        outputs.push(OutputRecord {
            file: format.file_name(stem),
            rows,
        });
    }
    if which.objects {
        // The sources of the hard cases, for the audit's match cards.
        let hard = hard_sources_batch(&result.objects, &result.links, matched_tables, epoch)?;
        let name = format.file_name("hard_sources");
        let mut w = TableOutput::create(format, &path(&name), hard.schema(), metadata.clone())?;
        // In chunks, as every table: a join of parts then holds one chunk of it.
        // A slice keeps its whole table's validity buffers, so those that mark
        // no null in the slice are dropped, as the join drops them.
        // (An empty table is written as one empty batch.)
        let rows = hard.num_rows();
        let mut start = 0;
        loop {
            let len = chunk_objects.min(rows - start);
            let slice = without_empty_nulls(&hard.slice(start, len))
                .map_err(|e| Error::columnar(Path::new(&name), e))?;
            w.write(&slice)?;
            start += len;
            if start >= rows {
                break;
            }
        }
        outputs.push(OutputRecord {
            file: name,
            rows: w.finish()?,
        });
    }
    Ok(Written {
        outputs,
        status_counts,
    })
}

/// Rows per batch when an export reads a written table back.
const EXPORT_BATCH_ROWS: usize = 65_536;

/// Writes the plan's exports of the objects and photometry tables (each
/// skipped when its table was not written), reading each table back from its
/// staged Parquet file a batch at a time, so an export holds one batch of
/// rows whatever the size of the table.
///
/// # Errors
/// Read and write errors.
pub(crate) fn write_exports(staging: &mut Staging, plan: &Plan) -> Result<Vec<OutputRecord>> {
    let mut outputs = Vec::new();
    let which = plan.tables;
    for format in &plan.exports {
        for (name, written) in [("objects", which.objects), ("photometry", which.photometry)] {
            // A table that is not written is not exported either.
            if !written {
                continue;
            }
            let batches = ParquetBatches::open(
                &staging.path(&format!("{name}.parquet")),
                EXPORT_BATCH_ROWS,
                for_export,
            )?;
            let schema = batches.schema().clone();
            let (file, rows) = match format {
                ExportFormat::Csv => {
                    let file = format!("{name}.csv");
                    let rows = write_csv(&staging.path(&file), &schema, &batches)?;
                    (file, rows)
                }
                ExportFormat::Fits => {
                    let file = format!("{name}.fits");
                    let cards = vec![
                        (
                            "ORIGIN".to_string(),
                            format!("fluxloom {}", env!("CARGO_PKG_VERSION")),
                        ),
                        ("FIELD".to_string(), plan.field.clone()),
                    ];
                    let rows = write_fits(
                        &staging.path(&file),
                        &schema,
                        &batches,
                        &name.to_uppercase(),
                        &cards,
                    )?;
                    (file, rows)
                }
                ExportFormat::Votable => {
                    let file = format!("{name}.vot");
                    let description = format!("fluxloom {name} table of field {}", plan.field);
                    let params = vec![("field".to_string(), plan.field.clone())];
                    let rows = write_votable(
                        &staging.path(&file),
                        &schema,
                        &batches,
                        name,
                        &description,
                        &params,
                    )?;
                    (file, rows)
                }
            };
            outputs.push(OutputRecord { file, rows });
        }
    }
    Ok(outputs)
}

/// Writes the science table into `staging` when the plan asks for it and the
/// SED tables it reads were written.
///
/// # Errors
/// Science errors.
pub(crate) fn write_science(staging: &mut Staging, plan: &Plan) -> Result<Option<OutputRecord>> {
    let which = plan.tables;
    let Some(s) = plan
        .science
        .as_ref()
        .filter(|_| which.objects && which.photometry)
    else {
        return Ok(None);
    };
    let rows = crate::science::write_into(staging, s)?;
    Ok(Some(OutputRecord {
        file: crate::science::table::SCIENCE_FILE.to_string(),
        rows,
    }))
}

/// Writes `run_json` as run.json and the report (when the plan and the tables
/// written allow) into `staging`, and commits the folder.
///
/// # Errors
/// Report and write errors.
pub(crate) fn finish_folder(
    mut staging: Staging,
    plan: &Plan,
    run_json: &str,
) -> Result<(Vec<PathBuf>, Option<Vec<crate::report::warnings::Warning>>)> {
    let which = plan.tables;
    // The report reads the SED tables; a build that writes only some tables
    // (e.g. links alone) does not make it.
    let all_tables = which.objects && which.photometry && which.links;
    let path = staging.path("run.json");
    std::fs::write(&path, format!("{run_json}\n")).map_err(|e| Error::io(&path, e))?;
    let report = (plan.report && all_tables)
        .then(|| crate::report::write_into(&mut staging))
        .transpose()?;
    let files = staging.commit()?;
    Ok((files, report))
}

/// The indices of the normalized table's columns of `schema`'s bands (named
/// `<band id>_<what>`).
fn band_columns(
    normalized: &arrow::datatypes::Schema,
    schema: &crate::catalog::schema::SurveySchema,
) -> Vec<usize> {
    let of_a_band = |name: &str| {
        schema.bands.iter().any(|b| {
            name.strip_prefix(b.band.id.as_str())
                .is_some_and(|rest| rest.starts_with('_'))
        })
    };
    normalized
        .fields()
        .iter()
        .enumerate()
        .filter(|(_, f)| of_a_band(f.name()))
        .map(|(i, _)| i)
        .collect()
}

fn read_catalog(
    file: &Path,
    schema: &crate::catalog::schema::SurveySchema,
    options: NormalizeOptions,
    quiet: bool,
) -> Result<(ReadCatalog, SourceTable)> {
    crate::catalog::check_regular_file(file)?;
    let (sha256, bytes) = file_digest(file)?;
    let stream = prefetch(open(file, &schema.format, DEFAULT_BATCH_ROWS)?, 2);
    let mut normalizer = Normalizer::new(schema, file, options);
    normalizer.check_file(&stream.schema)?;
    let output_schema = normalizer.output_schema();
    let bar = row_counter(&format!("reading {}", file.display()), quiet);
    let mut batches = Vec::new();
    for_each_normalized(stream, &mut normalizer, |b| {
        bar.inc(b.num_rows() as u64);
        batches.push(b);
        Ok(())
    })?;
    bar.finish_and_clear();
    let table = SourceTable::from_normalized(schema, &batches, file)?;
    // The SED assembly reads only the band columns; positions, errors and
    // identifiers are in the source table, so they are not kept twice.
    let bands = band_columns(&output_schema, schema);
    let band_schema = std::sync::Arc::new(
        output_schema
            .project(&bands)
            .map_err(|e| Error::columnar(file, e))?,
    );
    let band_batches = batches
        .into_iter()
        .map(|b| b.project(&bands))
        .collect::<std::result::Result<Vec<_>, _>>()
        .map_err(|e| Error::columnar(file, e))?;
    let normalized = arrow::compute::concat_batches(&band_schema, &band_batches)
        .map_err(|e| Error::columnar(file, e))?;
    Ok((
        ReadCatalog {
            normalized,
            report: normalizer.finish(),
            sha256,
            bytes,
        },
        table,
    ))
}

/// The catalogs of a plan read, offsets measured (and corrected when asked),
/// and the whole input ranked for matching.
pub struct Prepared {
    read: Vec<ReadCatalog>,
    /// The source tables as read.
    pub tables: Vec<SourceTable>,
    /// Offsets against the astrometric reference.
    pub offsets: Vec<CatalogOffset>,
    /// The systematic floor of each catalog in the match.
    pub floors: Vec<FloorInForce>,
    /// The match settings in force: those given, with the floors of `floors`.
    pub matching: crate::crossmatch::MatchConfig,
    /// The tables with offsets corrected, when a correction was made.
    pub corrected: Option<Vec<SourceTable>>,
    /// What every cell shares.
    pub setup: MatchSetup,
}

/// Reads every catalog of `plan` and prepares the match with `matching`.
///
/// # Errors
/// Read, normalize and match-setting errors.
pub fn prepare(
    plan: &Plan,
    matching: &crate::crossmatch::MatchConfig,
    quiet: bool,
) -> Result<Prepared> {
    let options = NormalizeOptions {
        skip_bad_rows: plan.skip_bad_rows,
    };
    let mut read: Vec<(ReadCatalog, SourceTable)> = Vec::with_capacity(plan.catalogs.len());
    for c in &plan.catalogs {
        read.push(read_catalog(&c.file, &c.schema, options, quiet)?);
    }
    let (read, tables): (Vec<ReadCatalog>, Vec<SourceTable>) = read.into_iter().unzip();
    let bar = spinner(
        "measuring offsets",
        quiet || plan.astrometric_reference.is_none(),
    );
    // With offset correction, the match and the false matches use the corrected positions.
    let (offsets, corrected) = match plan.astrometric_reference {
        Some(reference) => correct_offsets(&tables, matching, reference, plan.correct_offsets)?,
        None => (Vec::new(), None),
    };
    bar.finish_and_clear();
    // The floors are measured with the offsets, before the final match; the
    // match, its density prior and Bayes factors (through the setup's sources)
    // and the false-match estimate all use the same floors.
    let names: Vec<String> = plan.catalogs.iter().map(|c| c.name.clone()).collect();
    let floors = floors_in_force(&names, matching, plan.astrometric_reference, &offsets);
    let matching = with_floors(matching, &floors);
    let setup = MatchSetup::new(
        corrected.as_deref().unwrap_or(&tables),
        &matching,
        plan.area_sr,
    )?;
    Ok(Prepared {
        read,
        tables,
        offsets,
        floors,
        matching,
        corrected,
        setup,
    })
}

impl Prepared {
    /// The tables matched: offsets corrected when a correction was made.
    pub fn matched(&self) -> &[SourceTable] {
        self.corrected.as_deref().unwrap_or(&self.tables)
    }
}

/// What the cells' outputs of a run depend on, hashed: the version, the plan,
/// the inputs' bytes (`digests`), the cell order, the subset and the `layout`
/// of a build in bounded memory (empty for a build holding everything), whose
/// cell outputs refer to the sources of their group (the journal's key).
pub(crate) fn run_key(
    plan: &Plan,
    digests: &[&str],
    order: u8,
    cells: Option<&[u64]>,
    layout: &str,
) -> String {
    let mut h = Sha256::new();
    h.update(layout.as_bytes());
    h.update([0]);
    h.update(env!("CARGO_PKG_VERSION").as_bytes());
    h.update([0]);
    h.update(plan.text.as_bytes());
    for d in digests {
        h.update([0]);
        h.update(d.as_bytes());
    }
    h.update([0, order]);
    for c in cells.into_iter().flatten() {
        h.update(c.to_le_bytes());
    }
    h.finalize().iter().map(|b| format!("{b:02x}")).collect()
}

/// Journals each finished cell; after `pause_after` cells it sleeps for good
/// (a hidden test option, so that a test can kill a run part-way).
pub(crate) fn journal_recorder(
    journal: &Journal,
    pause_after: Option<usize>,
) -> impl Fn(u64, &crate::crossmatch::cells::CellOutput) -> Result<()> + Sync + '_ {
    let journaled = std::sync::atomic::AtomicUsize::new(0);
    move |id, out| {
        journal.record(id, out)?;
        let n = journaled.fetch_add(1, std::sync::atomic::Ordering::SeqCst) + 1;
        if pause_after.is_some_and(|k| n >= k) {
            loop {
                std::thread::sleep(std::time::Duration::from_secs(3600));
            }
        }
        Ok(())
    }
}

/// SHA-256 of a file's bytes (hex) and its size.
pub(crate) fn file_digest(path: &Path) -> Result<(String, u64)> {
    use std::io::Read;
    let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut total = 0u64;
    loop {
        let n = f.read(&mut buf).map_err(|e| Error::io(path, e))?;
        if n == 0 {
            break;
        }
        total += n as u64;
        hasher.update(&buf[..n]);
    }
    let hex: String = hasher
        .finalize()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect();
    Ok((hex, total))
}

/// Parquet key-value metadata: field, plan, bands, flag legend.
pub(crate) fn table_metadata(plan: &Plan, slots: &[BandSlot]) -> Result<Vec<(String, String)>> {
    let bands = band_table(slots);
    let legend: Vec<serde_json::Value> = crate::crossmatch::flags::ALL
        .iter()
        .map(|(bit, name)| serde_json::json!({ "bit": bit, "name": name }))
        .collect();
    Ok(vec![
        ("fluxloom.field".into(), plan.field.clone()),
        (
            "fluxloom.reference_epoch_yr".into(),
            plan.matching.reference_epoch_yr.to_string(),
        ),
        ("fluxloom.plan".into(), plan.text.clone()),
        ("fluxloom.bands".into(), to_json(&bands)?),
        ("fluxloom.flags".into(), to_json(&legend)?),
    ])
}

/// One band of the band table: the library's fields, then the stated depth.
#[derive(serde::Serialize)]
struct BandEntry<'a> {
    #[serde(flatten)]
    band: &'a crate::photometry::Band,
    #[serde(flatten)]
    depth: Option<BandDepth<'a>>,
}

/// The depth a survey schema states for a band, and which schema.
#[derive(serde::Serialize)]
struct BandDepth<'a> {
    depth_mag: f64,
    depth_snr: Option<f64>,
    depth_catalog: &'a str,
}

/// The band table (`fluxloom.bands`): each band of the library once, and
/// where a survey schema states the band's limiting magnitude, `depth_mag`,
/// `depth_snr` (null when not stated) and `depth_catalog`; when several
/// catalogs give the band, the deepest depth is kept (the SED of the field
/// reaches it where that catalog covers the field).
fn band_table(slots: &[BandSlot]) -> Vec<BandEntry<'_>> {
    let mut bands: Vec<BandEntry> = Vec::new();
    for s in slots {
        let depth = s.spec.depth_mag.map(|depth_mag| BandDepth {
            depth_mag,
            depth_snr: s.spec.depth_snr,
            depth_catalog: &s.catalog_name,
        });
        match bands.iter_mut().find(|b| b.band.id == s.spec.band.id) {
            None => bands.push(BandEntry {
                band: &s.spec.band,
                depth,
            }),
            Some(kept) => {
                if let Some(d) = depth
                    && kept
                        .depth
                        .as_ref()
                        .is_none_or(|k| d.depth_mag > k.depth_mag)
                {
                    kept.depth = Some(d);
                }
            }
        }
    }
    bands
}

fn to_json<T: serde::Serialize>(value: &T) -> Result<String> {
    serde_json::to_string(value).map_err(|e| Error::Usage(e.to_string()))
}

/// SED points per band slot and status, for run.json and the summary.
pub(crate) fn sed_counts(
    slots: &[BandSlot],
    counts: &[[u64; SedStatus::ALL.len()]],
) -> Vec<SedRecord> {
    slots
        .iter()
        .zip(counts)
        .map(|(slot, by)| SedRecord {
            catalog: slot.catalog_name.clone(),
            band: slot.id().to_string(),
            by_status: SedStatus::ALL
                .iter()
                .map(|st| (st.as_str().to_string(), by[*st as usize]))
                .collect(),
        })
        .collect()
}

/// The summary lines of one catalog's systematic floor: the estimate, and a
/// warning when it is far above the stated errors ([`far_above_stated`]).
fn floor_lines(name: &str, reference: &str, f: &FloorEstimate) -> String {
    let mut s = format!(
        "         floor of {name} vs {reference}: {:.3}\" from {} pairs (median d {:.2} -> {:.2})\n",
        f.floor_arcsec, f.n_pairs, f.median_d_before, f.median_d_after
    );
    if far_above_stated(f) {
        s.push_str(&format!(
            "         warning: the floor of {name} ({:.3}\") is more than {} times its median stated error ({:.3}\")\n",
            f.floor_arcsec, FAR_ABOVE_FACTOR, f.median_stated_sigma_arcsec
        ));
    }
    s
}

/// The summary line of the floor a catalog was matched with and its origin.
fn floor_used_line(f: &FloorInForce) -> String {
    let how = match (f.origin, f.measured_arcsec) {
        (FloorOrigin::Fixed, Some(m)) => {
            format!(
                "fixed in the plan (measured {m:.3}\" from {} pairs)",
                f.n_pairs
            )
        }
        (FloorOrigin::Fixed, None) => "fixed in the plan".to_string(),
        (FloorOrigin::Measured, _) => format!("measured from {} pairs", f.n_pairs),
        (FloorOrigin::NotMeasured, _) => format!(
            "not measured: {}",
            f.note.as_deref().unwrap_or("no measurement")
        ),
    };
    format!(
        "         floor used for {}: {:.3}\" {how}\n",
        f.name, f.floor_arcsec
    )
}

/// Wall-clock seconds of a build's stages, for the summary.
#[derive(Debug, Default)]
struct PhaseClock {
    /// Reading, normalizing, offsets and the match set-up.
    read: f64,
    /// Matching the cells and assembling objects and links.
    matching: f64,
    /// The false-match estimate.
    false_matches: f64,
    /// SEDs, tables, exports and the science table.
    write: f64,
    /// Everything, run.json, the report and the commit included.
    total: f64,
}

impl PhaseClock {
    /// The summary's `time` line (not in run.json, which stays reproducible).
    fn line(&self, m: &crate::crossmatch::engine::PhaseSeconds) -> String {
        format!(
            "time     read and prepare {:.2} s, match {:.2} s (cells {:.2} s, assemble {:.2} s), false matches {:.2} s, write {:.2} s, report and commit {:.2} s, total {:.2} s\n",
            self.read,
            self.matching,
            m.candidates,
            m.assemble,
            self.false_matches,
            self.write,
            self.total - self.read - self.matching - self.false_matches - self.write,
            self.total
        )
    }
}

pub(crate) fn summary(
    plan: &Plan,
    out_dir: &Path,
    reports: &[&NormalizeReport],
    record: &RunRecord,
    outputs: &[OutputRecord],
) -> String {
    let mut s = format!("field    {} (plan {})\n", plan.field, plan.path.display());
    s.push_str("\nread\n");
    for (c, rep) in plan.catalogs.iter().zip(reports) {
        s.push_str(&format!(
            "  {:<10} {:>8} rows read, {:>8} kept, {:>6} skipped   {}\n",
            c.name,
            rep.rows_read,
            rep.rows_kept,
            rep.rows_skipped_total(),
            c.file.display()
        ));
        for (reason, n) in &rep.rows_skipped {
            s.push_str(&format!("             skipped {n}: {reason}\n"));
        }
    }
    let m = &record.matching;
    s.push_str(&format!(
        "\nmatched  {} candidate pairs in {} groups (largest {}) -> {} objects\n",
        m.candidates, m.groups, m.largest_group, m.objects
    ));
    let by_members: Vec<String> = m
        .objects_by_members
        .iter()
        .map(|(k, v)| format!("{v} with {k}"))
        .collect();
    s.push_str(&format!("         members: {}\n", by_members.join(", ")));
    let cells = &m.cells;
    let widened: usize = cells.widened.iter().sum();
    s.push_str(&format!(
        "         cells:   {} at order {} (margin {:.1}\"), {} matched again with wider margins\n",
        cells.cells, cells.order, cells.margin_arcsec, widened
    ));
    if record.subset.is_some() {
        s.push_str(&format!(
            "         subset:  {} of the {} cells written\n",
            cells.emitted, cells.cells
        ));
    }
    if cells.resumed > 0 {
        s.push_str(&format!(
            "         resumed: {} cells taken from the journal of an interrupted run\n",
            cells.resumed
        ));
    }
    let flags: Vec<String> = m.flags.iter().map(|(k, v)| format!("{k} {v}")).collect();
    s.push_str(&format!("         flags:   {}\n", flags.join(", ")));
    if !record.forced_without_counterpart.is_empty() {
        let by: Vec<String> = record
            .forced_without_counterpart
            .iter()
            .map(|(k, v)| format!("{k} {v}"))
            .collect();
        s.push_str(&format!(
            "         forced rows without a counterpart (no object written): {}\n",
            by.join(", ")
        ));
    }
    for o in &record.offsets {
        if let Some(i) = &o.initial {
            s.push_str(&format!(
                "         offset of {} vs {}: ({:+.3}, {:+.3})\" from {} pairs, corrected by ({:+.3}, {:+.3})\"\n",
                plan.catalogs[o.catalog].name,
                record.astrometric_reference.as_deref().unwrap_or("-"),
                i.dra_cosdec_arcsec,
                i.ddec_arcsec,
                i.n,
                o.applied_arcsec.0,
                o.applied_arcsec.1
            ));
        }
        if let Some(f) = &o.floor {
            s.push_str(&floor_lines(
                &plan.catalogs[o.catalog].name,
                record.astrometric_reference.as_deref().unwrap_or("-"),
                f,
            ));
        }
    }
    for f in &record.floors {
        s.push_str(&floor_used_line(f));
    }
    for f in &record.false_matches {
        s.push_str(&format!(
            "         false matches {} x {}: {:.1} expected of {} candidates ({:.2} %)\n",
            plan.catalogs[f.catalog_a].name,
            plan.catalogs[f.catalog_b].name,
            f.shifted_candidates_mean,
            f.real_candidates,
            100.0 * f.false_fraction
        ));
    }
    s.push_str(&format!(
        "\nbands    {:<10} {:<10} {:>8} {:>8} {:>8} {:>8} {:>8} {:>8} {:>8} {:>9}\n",
        "catalog",
        "band",
        "detected",
        "ulim",
        "not_det",
        "not_cov",
        "blended",
        "missing",
        "rejected",
        "saturated"
    ));
    for point in &record.sed_points {
        let (catalog, band) = (&point.catalog, &point.band);
        let c: Vec<u64> = SedStatus::ALL
            .iter()
            .map(|st| point.by_status.get(st.as_str()).copied().unwrap_or(0))
            .collect();
        s.push_str(&format!(
            "         {catalog:<10} {band:<10} {:>8} {:>8} {:>8} {:>8} {:>8} {:>8} {:>8} {:>9}\n",
            c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7]
        ));
    }
    s.push_str(&format!("\nwrote    {}\n", out_dir.display()));
    for o in outputs {
        s.push_str(&format!("         {:<20} {:>8} rows\n", o.file, o.rows));
    }
    s.push_str("         run.json\n");
    if let Some(bytes) = crate::memory::peak_resident_bytes() {
        s.push_str(&format!(
            "\nmemory   peak {:.0} MB resident\n",
            bytes as f64 / 1e6
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn estimate(floor_arcsec: f64, median_stated_sigma_arcsec: f64) -> FloorEstimate {
        FloorEstimate {
            n_pairs: 358,
            floor_arcsec,
            median_d_before: 1.3212,
            median_d_after: 1.177_41,
            median_stated_sigma_arcsec,
        }
    }

    #[test]
    fn the_band_table_keeps_the_deepest_stated_depth() {
        let lib = crate::photometry::BandLibrary::builtin();
        let schema = |survey: &str, ks_extra: &str| {
            let text = format!(
                "survey = \"{survey}\"\nformat = \"csv\"\n[position]\nra = \"ra\"\ndec = \"dec\"\nerror = {{ kind = \"fixed\", arcsec = 0.1 }}\n[epoch]\nyear = 2010.0\n[[band]]\nband = \"tmass_h\"\nvalue = \"h\"\nunit = \"vega_mag\"\nno_error = \"unknown\"\n[[band]]\nband = \"tmass_ks\"\nvalue = \"k\"\nunit = \"vega_mag\"\nno_error = \"unknown\"\n{ks_extra}"
            );
            crate::catalog::schema::SurveySchema::from_str(&text, Path::new("s.toml"), &lib)
                .unwrap()
        };
        let catalogs = [
            schema("shallow", "depth_mag = 14.3\ndepth_snr = 10\n"),
            schema("deep", "depth_mag = 15.1\n"),
            schema("none", ""),
        ];
        let slots: Vec<BandSlot> = catalogs
            .iter()
            .enumerate()
            .flat_map(|(k, c)| {
                c.bands.iter().map(move |b| BandSlot {
                    catalog: k,
                    catalog_name: c.survey.clone(),
                    spec: b.clone(),
                    catalog_resolution_arcsec: None,
                })
            })
            .collect();
        let table = serde_json::to_value(band_table(&slots)).unwrap();
        let table = table.as_array().unwrap();
        assert_eq!(table.len(), 2);
        let (h, ks) = (&table[0], &table[1]);
        assert_eq!(
            (h["id"].as_str(), ks["id"].as_str()),
            (Some("tmass_h"), Some("tmass_ks"))
        );
        assert!(h.get("depth_mag").is_none());
        assert_eq!(ks["depth_mag"], 15.1);
        assert_eq!(ks["depth_snr"], serde_json::Value::Null);
        assert_eq!(ks["depth_catalog"], "deep");
        // The band's library fields are still there, first and in their order.
        assert_eq!(ks["zero_point_jy"], 666.7);
        let text = serde_json::to_string(&band_table(&slots)).unwrap();
        assert!(
            text.starts_with("[{\"id\":\"tmass_h\",\"system\":\"vega\""),
            "{text}"
        );
        assert!(
            text.contains("\"depth_mag\":15.1,\"depth_snr\":null,\"depth_catalog\":\"deep\"}]"),
            "{text}"
        );
    }

    #[test]
    fn floor_line_without_warning() {
        assert_eq!(
            floor_lines("kos", "ask", &estimate(0.0514, 0.03)),
            "         floor of kos vs ask: 0.051\" from 358 pairs (median d 1.32 -> 1.18)\n"
        );
    }

    #[test]
    fn floor_far_above_the_stated_errors_warns() {
        // 0.25″ > 2 × 0.1″.
        assert_eq!(
            floor_lines("kos", "ask", &estimate(0.25, 0.1)),
            "         floor of kos vs ask: 0.250\" from 358 pairs (median d 1.32 -> 1.18)\n\
             \x20        warning: the floor of kos (0.250\") is more than 2 times its median stated error (0.100\")\n"
        );
    }
}
