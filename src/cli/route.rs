//! The first pass of a build in bounded memory: each catalog is read and
//! normalized batch by batch, and its rows are routed to the sky cells they
//! belong to — the cell of their position at the reference epoch (the core)
//! and every cell within the routing margin of it — and spilled, sorted by
//! cell, to Arrow IPC files. The whole-input statistics the match needs
//! (row counts, the footprints behind the densities and the coverage, epoch
//! statistics) and the identifier hashes that find repeated identifiers are
//! gathered on the way, so the second pass can match a few cells at a time.

use std::collections::BTreeMap;
use std::fs::File;
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::compute::interleave_record_batch;
use arrow::datatypes::{Float64Type, SchemaRef};
use arrow::ipc::reader::StreamReader;
use arrow::ipc::writer::StreamWriter;

use super::progress::row_counter;
use super::sorted_runs::{SortedRuns, SortedValues};
use super::vet::for_each_normalized;
use crate::catalog::normalize::{NormalizeOptions, NormalizeReport, Normalizer};
use crate::catalog::{DEFAULT_BATCH_ROWS, open, prefetch};
use crate::crossmatch::candidates::EpochTally;
use crate::crossmatch::config::MatchConfig;
use crate::crossmatch::density::MAX_ORDER;
use crate::crossmatch::prepare::at_reference_epoch;
use crate::error::{Error, Result};
use crate::output::table_file::spill_options;
use crate::plan::Plan;
use crate::sky::partition::{home_cell, partition_keeping_margins};

/// One spilled run of a catalog: batches of rows sorted by cell, each an Arrow
/// IPC stream of its own (so each keeps its own dictionaries), one after the
/// other in one file, with the index of where each cell's core or margin rows are.
struct SpillRun {
    path: PathBuf,
    /// (cell, core?, byte offset, byte length), ascending.
    index: Vec<(u64, bool, u64, u64)>,
}

impl SpillRun {
    /// The batches of the index entries `entries` picks, in index order.
    fn read(&self, mut picks: impl FnMut(u64, bool) -> bool) -> Result<Vec<(bool, RecordBatch)>> {
        let wanted: Vec<&(u64, bool, u64, u64)> =
            self.index.iter().filter(|e| picks(e.0, e.1)).collect();
        if wanted.is_empty() {
            return Ok(Vec::new());
        }
        let path = &self.path;
        let mut file = File::open(path).map_err(|e| Error::io(path, e))?;
        let mut bytes = Vec::new();
        let mut out = Vec::with_capacity(wanted.len());
        for &&(_, core, offset, len) in &wanted {
            file.seek(SeekFrom::Start(offset))
                .map_err(|e| Error::io(path, e))?;
            bytes.resize(len as usize, 0);
            file.read_exact(&mut bytes)
                .map_err(|e| Error::io(path, e))?;
            let mut reader = StreamReader::try_new(std::io::Cursor::new(&bytes[..]), None)
                .map_err(|e| Error::columnar(path, e))?;
            match reader.next() {
                Some(b) => out.push((core, b.map_err(|e| Error::columnar(path, e))?)),
                None => {
                    return Err(Error::format(
                        path,
                        format!("spilled stream at byte {offset} holds no rows"),
                    ));
                }
            }
        }
        Ok(out)
    }
}

/// A catalog after the first pass.
pub struct RoutedCatalog {
    /// Schema of its normalized rows.
    pub schema: SchemaRef,
    /// What normalizing its rows found.
    pub report: NormalizeReport,
    /// SHA-256 of its file.
    pub sha256: String,
    /// Size of its file, bytes.
    pub bytes: u64,
    /// Rows kept.
    pub rows: usize,
    /// Cells at [`MAX_ORDER`] of its positions at the reference epoch (densities).
    pub reference_cells: SortedValues,
    /// Cells of its positions as observed, at [`MAX_ORDER`] or at the plan's
    /// coverage order when one is set (coverage).
    pub observed_cells: SortedValues,
    runs: Vec<SpillRun>,
}

/// Everything the first pass gathered.
pub struct Routed {
    /// The cell order rows are routed at (the plan's partition order).
    pub order: u8,
    /// Rows within this distance of a cell are held with it, arcsec.
    pub margin_arcsec: f64,
    /// The catalogs, in plan order.
    pub catalogs: Vec<RoutedCatalog>,
    /// Per cell with rows: (core rows, margin rows), all catalogs together.
    pub cell_rows: BTreeMap<u64, (u64, u64)>,
    /// Epoch statistics of the whole input.
    pub epochs: EpochTally,
}

/// Where a row waits to be spilled: its cell, whether it is in the core, and
/// its place among the held batches.
type Pending = (u64, bool, u32, u32);

/// Reads and routes every catalog of `plan`, spilling into `spill_dir` each time
/// the held rows pass `spill_bytes`.
///
/// # Errors
/// Read, normalize and spill-file errors; repeated source identifiers.
pub fn route(
    plan: &Plan,
    matching: &MatchConfig,
    margin_arcsec: f64,
    spill_dir: &Path,
    spill_bytes: usize,
    quiet: bool,
) -> Result<Routed> {
    let options = NormalizeOptions {
        skip_bad_rows: plan.skip_bad_rows,
    };
    let order = matching.partition_order;
    let mut routed = Routed {
        order,
        margin_arcsec,
        catalogs: Vec::with_capacity(plan.catalogs.len()),
        cell_rows: BTreeMap::new(),
        epochs: EpochTally::new(plan.catalogs.len()),
    };
    for (c, catalog) in plan.catalogs.iter().enumerate() {
        let file = &catalog.file;
        crate::catalog::check_regular_file(file)?;
        let (sha256, bytes) = super::build::file_digest(file)?;
        let stream = prefetch(open(file, &catalog.schema.format, DEFAULT_BATCH_ROWS)?, 2);
        let mut normalizer = Normalizer::new(&catalog.schema, file, options);
        normalizer.check_file(&stream.schema)?;
        let schema = normalizer.output_schema();
        let bar = row_counter(&format!("routing {}", file.display()), quiet);
        let mut spill = CatalogSpill {
            catalog: c,
            schema: schema.clone(),
            dir: spill_dir.to_path_buf(),
            held: Vec::new(),
            held_bytes: 0,
            pending: Vec::new(),
            runs: Vec::new(),
        };
        let mut hashes = SortedRuns::noting_repeats(spill_dir, &format!("ids-{c}"));
        let mut reference_cells = SortedRuns::new(spill_dir, &format!("reference-{c}"));
        let mut observed_cells = SortedRuns::new(spill_dir, &format!("observed-{c}"));
        let observed_order = catalog.coverage_order.unwrap_or(MAX_ORDER);
        let mut rows = 0usize;
        for_each_normalized(stream, &mut normalizer, |batch| {
            bar.inc(batch.num_rows() as u64);
            rows += batch.num_rows();
            let columns = RoutingColumns::of(&batch, file)?;
            let n = batch.num_rows();
            let (mut ra_ref, mut dec_ref) = (Vec::with_capacity(n), Vec::with_capacity(n));
            for i in 0..n {
                let ((ra, dec), pm) = at_reference_epoch(
                    (columns.ra[i], columns.dec[i]),
                    (columns.pmra[i], columns.pmdec[i]),
                    columns.epoch[i],
                    matching.reference_epoch_yr,
                );
                routed.epochs.add(c, pm, columns.epoch[i]);
                // A row without a finite position is routed anywhere: the
                // match refuses it, naming it.
                let finite = ra.is_finite() && dec.is_finite();
                ra_ref.push(if finite { ra } else { 0.0 });
                dec_ref.push(if finite { dec } else { 0.0 });
                if finite {
                    reference_cells.push(home_cell(MAX_ORDER, ra, dec))?;
                }
                if columns.ra[i].is_finite() && columns.dec[i].is_finite() {
                    observed_cells.push(home_cell(
                        observed_order,
                        columns.ra[i],
                        columns.dec[i],
                    ))?;
                }
                hashes.push(id_hash(columns.ids.value(i)))?;
            }
            // One catalog's batch at a time: a cell whose core rows come from another
            // catalog or batch keeps this batch's margin rows.
            let cells = partition_keeping_margins(order, &ra_ref, &dec_ref, margin_arcsec / 3600.0);
            let held = spill.held.len() as u32;
            for cell in &cells {
                let entry = routed.cell_rows.entry(cell.id).or_insert((0, 0));
                entry.0 += cell.core.len() as u64;
                entry.1 += cell.margin.len() as u64;
                spill
                    .pending
                    .extend(cell.core.iter().map(|&r| (cell.id, true, held, r)));
                spill
                    .pending
                    .extend(cell.margin.iter().map(|&r| (cell.id, false, held, r)));
            }
            spill.held_bytes += batch.get_array_memory_size();
            spill.held.push(batch);
            if spill.held_bytes > spill_bytes {
                spill.flush()?;
            }
            Ok(())
        })?;
        spill.flush()?;
        bar.finish_and_clear();
        check_unique_ids(&catalog.name, &hashes.finish().repeated()?, &spill.runs)?;
        routed.catalogs.push(RoutedCatalog {
            schema,
            report: normalizer.finish(),
            sha256,
            bytes,
            rows,
            reference_cells: reference_cells.finish(),
            observed_cells: observed_cells.finish(),
            runs: spill.runs,
        });
    }
    Ok(routed)
}

/// The columns of a normalized batch that routing reads.
struct RoutingColumns<'b> {
    ids: &'b arrow::array::StringArray,
    ra: Vec<f64>,
    dec: Vec<f64>,
    epoch: Vec<f64>,
    pmra: Vec<f64>,
    pmdec: Vec<f64>,
}

impl<'b> RoutingColumns<'b> {
    fn of(batch: &'b RecordBatch, origin: &Path) -> Result<RoutingColumns<'b>> {
        let f64s = |name: &str| -> Result<Vec<f64>> {
            let a = batch
                .column_by_name(name)
                .and_then(|c| c.as_primitive_opt::<Float64Type>())
                .ok_or_else(|| {
                    Error::format(
                        origin,
                        format!("normalized rows lack a Float64 column \"{name}\""),
                    )
                })?;
            Ok((0..a.len())
                .map(|i| if a.is_null(i) { f64::NAN } else { a.value(i) })
                .collect())
        };
        Ok(RoutingColumns {
            ids: batch
                .column_by_name("source_id")
                .and_then(|c| c.as_string_opt::<i32>())
                .ok_or_else(|| {
                    Error::format(origin, "normalized rows lack a text column \"source_id\"")
                })?,
            ra: f64s("ra_deg")?,
            dec: f64s("dec_deg")?,
            epoch: f64s("epoch_yr")?,
            pmra: f64s("pmra_cosdec_masyr")?,
            pmdec: f64s("pmdec_masyr")?,
        })
    }
}

/// A 64-bit FNV-1a hash of an identifier (a repeat is confirmed on the strings).
fn id_hash(id: &str) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in id.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    h
}

/// The rows of one catalog held until they are spilled.
struct CatalogSpill {
    catalog: usize,
    schema: SchemaRef,
    dir: PathBuf,
    held: Vec<RecordBatch>,
    held_bytes: usize,
    pending: Vec<Pending>,
    runs: Vec<SpillRun>,
}

/// Rows per spilled batch at most (a cell's rows may span several).
const SPILL_BATCH_ROWS: usize = 65_536;

impl CatalogSpill {
    /// Writes the held rows as one run sorted by (cell, core first, input order).
    fn flush(&mut self) -> Result<()> {
        if self.pending.is_empty() {
            self.held.clear();
            self.held_bytes = 0;
            return Ok(());
        }
        self.pending
            .sort_unstable_by_key(|&(cell, core, b, r)| (cell, !core, b, r));
        let path = self.dir.join(format!(
            "catalog{}-run{}.arrow",
            self.catalog,
            self.runs.len()
        ));
        let mut file =
            std::io::BufWriter::new(File::create(&path).map_err(|e| Error::io(&path, e))?);
        let held: Vec<&RecordBatch> = self.held.iter().collect();
        let mut index = Vec::new();
        let mut indices: Vec<(usize, usize)> = Vec::with_capacity(SPILL_BATCH_ROWS);
        let mut bytes: Vec<u8> = Vec::new();
        let mut offset = 0u64;
        let mut start = 0;
        while start < self.pending.len() {
            let (cell, core, _, _) = self.pending[start];
            let mut end = start;
            while end < self.pending.len()
                && end - start < SPILL_BATCH_ROWS
                && (self.pending[end].0, self.pending[end].1) == (cell, core)
            {
                end += 1;
            }
            indices.clear();
            indices.extend(
                self.pending[start..end]
                    .iter()
                    .map(|&(_, _, b, r)| (b as usize, r as usize)),
            );
            let batch =
                interleave_record_batch(&held, &indices).map_err(|e| Error::columnar(&path, e))?;
            bytes.clear();
            let mut writer =
                StreamWriter::try_new_with_options(&mut bytes, &self.schema, spill_options())
                    .map_err(|e| Error::columnar(&path, e))?;
            writer
                .write(&batch)
                .and_then(|()| writer.finish())
                .map_err(|e| Error::columnar(&path, e))?;
            drop(writer);
            file.write_all(&bytes).map_err(|e| Error::io(&path, e))?;
            index.push((cell, core, offset, bytes.len() as u64));
            offset += bytes.len() as u64;
            start = end;
        }
        file.flush().map_err(|e| Error::io(&path, e))?;
        self.runs.push(SpillRun { path, index });
        self.pending.clear();
        self.held.clear();
        self.held_bytes = 0;
        Ok(())
    }
}

impl RoutedCatalog {
    /// The rows routed to `cells` (ascending): their core rows, and their
    /// margin rows too when `with_margin`; each row once, in input order.
    ///
    /// # Errors
    /// Spill-file read errors.
    pub fn rows_of(&self, cells: &[u64], with_margin: bool) -> Result<RecordBatch> {
        let mut batches = Vec::new();
        for run in &self.runs {
            let found =
                run.read(|cell, core| (core || with_margin) && cells.binary_search(&cell).is_ok())?;
            batches.extend(found.into_iter().map(|(_, b)| b));
        }
        let all = arrow::compute::concat_batches(&self.schema, &batches)
            .map_err(|e| Error::columnar(Path::new("spilled rows"), e))?;
        // A row held by two of the cells (core of one, margin of another) is kept once.
        let rows = all
            .column_by_name("row")
            .and_then(|c| c.as_primitive_opt::<arrow::datatypes::UInt64Type>())
            .ok_or_else(|| Error::format(Path::new("spilled rows"), "no UInt64 column \"row\""))?;
        let mut order: Vec<u32> = (0..all.num_rows() as u32).collect();
        order.sort_unstable_by_key(|&i| rows.value(i as usize));
        order.dedup_by_key(|i| rows.value(*i as usize));
        if order.len() == all.num_rows() && order.windows(2).all(|w| w[0] < w[1]) {
            return Ok(all);
        }
        arrow::compute::take_record_batch(&all, &arrow::array::UInt32Array::from(order))
            .map_err(|e| Error::columnar(Path::new("spilled rows"), e))
    }
}

/// Refuses a catalog whose identifiers repeat: the `repeated` hashes (sorted)
/// are confirmed on the spilled strings (core rows: each row once).
fn check_unique_ids(name: &str, repeated: &[u64], runs: &[SpillRun]) -> Result<()> {
    if repeated.is_empty() {
        return Ok(());
    }
    let mut seen: BTreeMap<String, u64> = BTreeMap::new();
    for run in runs {
        for (_, batch) in run.read(|_, core| core)? {
            let ids = batch
                .column_by_name("source_id")
                .and_then(|c| c.as_string_opt::<i32>())
                .ok_or_else(|| Error::format(&run.path, "no text column \"source_id\""))?;
            let rows = batch
                .column_by_name("row")
                .and_then(|c| c.as_primitive_opt::<arrow::datatypes::UInt64Type>())
                .ok_or_else(|| Error::format(&run.path, "no UInt64 column \"row\""))?;
            for i in 0..batch.num_rows() {
                let id = ids.value(i);
                if repeated.binary_search(&id_hash(id)).is_err() {
                    continue;
                }
                if let Some(first) = seen.insert(id.to_string(), rows.value(i)) {
                    let (a, b) = (first.min(rows.value(i)), first.max(rows.value(i)));
                    return Err(Error::Usage(format!(
                        "catalog \"{name}\": source identifier \"{id}\" appears twice (rows {a} and {b}); identifiers must be unique within a catalog"
                    )));
                }
            }
        }
    }
    Ok(())
}
