//! `build --memory-limit`: the build in bounded memory.
//!
//! 1. *Route* ([`super::route`]): every catalog is read batch by batch; rows go
//!    to the sky cells (at the partition order) of their position at the
//!    reference epoch, plus a copy to every cell within the routing margin `w`,
//!    spilled to Arrow IPC files; row counts, footprints and epoch statistics
//!    are gathered on the way.
//! 2. *Match in groups*: runs of consecutive cells (NESTED order) holding up to
//!    a row budget are read back with their margins and matched with the whole
//!    input's densities and epoch statistics; each group writes its objects,
//!    photometry, links and hard cases as a part, as `build --cells` would. A
//!    cell whose groups of candidates reach past `w` is matched again from the
//!    core rows of every cell within its wider margin, doubling until complete,
//!    so it comes out as in a run holding everything.
//! 3. *Join*: the parts are merged on the whole run's keys
//!    ([`crate::output::kway`]), a chunk at a time, into the output files —
//!    identical to those of a build without a limit.
//!
//! With an astrometric reference, the offsets and floors are measured between
//! routing and matching, a group at a time ([`measure_by_groups`]); the match
//! applies the same shifts to each group's rows. Exports read the joined tables
//! back a batch at a time, as in every build. The false-match estimate is
//! counted a group at a time too ([`false_matches_by_groups`]): each group
//! counts the real and shifted candidates of the sources it owns, so the
//! routing margin then holds the largest shift (30" at least) besides the
//! tolerance.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

use arrow::array::RecordBatch;
use arrow::datatypes::Schema;

use super::build::{
    BuildOutcome, RunOptions, TableInputs, WRITE_CHUNK_OBJECTS, Written, band_slots, finish_folder,
    input_record, journal_recorder, run_key, sed_counts, summary, table_metadata, write_exports,
    write_science, write_tables,
};
use super::progress::spinner;
use super::route::{Routed, route};
use super::sorted_runs::{SortedRuns, SortedValues};
use crate::crossmatch::SourceTable;
use crate::crossmatch::candidates::EpochStats;
use crate::crossmatch::cells::{
    CellContext, CellRun, OnCellComplete, WIDEST_MARGIN_DEG, first_margin_arcsec,
};
use crate::crossmatch::density::MAX_ORDER;
use crate::crossmatch::engine::{MatchResult, MatchSetup, MatchStats, density_per_sr};
use crate::crossmatch::false_matches::{self, FalseMatchEstimate};
use crate::crossmatch::prepare::at_reference_epoch;
use crate::crossmatch::systematics::{
    Measured, OffsetPairs, Shifts, correct_offsets_by, floors_in_force, offset_pairs,
    shift_table_by, with_floors,
};
use crate::error::{Error, Result};
use crate::output::journal::Journal;
use crate::output::kway::merge_parts;
use crate::output::merge::{Ranker, TableKind};
use crate::output::parquet::ParquetOutput;
use crate::output::run_record::{OutputRecord, RunRecord};
use crate::output::staging::Staging;
use crate::output::table_file::TableFormat;
use crate::plan::Plan;
use crate::sed::SedStatus;
use crate::sky::coverage::Coverage;
use crate::sky::partition::home_cell;

/// Bytes of memory a row of a matched group takes at most, all structures and
/// output buffers included (measured on the versus benchmark: about 0.7 kB per
/// input row at the peak of a build holding everything; twice that for safety).
const BYTES_PER_GROUP_ROW: u64 = 1400;

/// Memory kept aside for the program, the first pass's gathered statistics and
/// the merge's buffers, bytes.
const FIXED_BYTES: u64 = 200 << 20;

/// Room in the default routing margin for the offset corrections when the
/// false matches need the margin to reach their shifts, arcsec (measured
/// offsets beyond it are refused, naming `--routing-margin`).
const OFFSET_ROOM_ARCSEC: f64 = 5.0;

/// Objects per batch of a part's tables. The join holds a batch of every part
/// of every table at once, so part batches are small; their size does not show
/// in the joined files, which are chunked as a build chunks them.
const PART_BATCH_OBJECTS: usize = 8192;

/// Parses a memory size: bytes, or a number with K, M, G or T (powers of 1024).
///
/// # Errors
/// A message naming what is not a size.
pub fn parse_memory_size(text: &str) -> std::result::Result<u64, String> {
    let t = text.trim();
    let bad = || format!("\"{text}\" is not a memory size like 2G, 512M or 3000000000");
    let (number, scale) = match t.char_indices().last() {
        Some((k, c)) if c.is_ascii_alphabetic() => {
            let scale: u64 = match c.to_ascii_uppercase() {
                'K' => 1 << 10,
                'M' => 1 << 20,
                'G' => 1 << 30,
                'T' => 1 << 40,
                _ => return Err(bad()),
            };
            (&t[..k], scale)
        }
        _ => (t, 1),
    };
    let value: f64 = number.trim().parse().map_err(|_| bad())?;
    if !(value.is_finite() && value > 0.0) {
        return Err(bad());
    }
    Ok((value * scale as f64) as u64)
}

/// The spill folder beside the output folder, removed when dropped.
struct SpillDir(PathBuf);

impl SpillDir {
    fn new(out_dir: &Path) -> Result<SpillDir> {
        let name = out_dir
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "out".to_string());
        let parent = out_dir
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        let dir = parent.join(format!(".{name}.fluxloom-spill"));
        if dir.exists() {
            std::fs::remove_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        }
        std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        Ok(SpillDir(dir))
    }
}

impl Drop for SpillDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// What the groups' matches add up to.
struct Tally {
    stats: MatchStats,
    status_counts: Vec<[u64; SedStatus::ALL.len()]>,
    parts: Vec<PathBuf>,
}

/// Runs the build of `plan` into `out_dir` within `limit_bytes` of memory.
///
/// # Errors
/// As [`super::build::build_with`], and plan settings not yet supported.
pub fn build_within(
    plan: &Plan,
    out_dir: &Path,
    run: RunOptions,
    limit_bytes: u64,
) -> Result<BuildOutcome> {
    let started = Instant::now();
    let quiet = run.quiet;
    let mut matching = plan.matching.clone();
    if let Some(order) = run.cell_order {
        matching.partition_order = order;
    }
    let spill = SpillDir::new(out_dir)?;
    let budget = limit_bytes.saturating_sub(FIXED_BYTES).max(64 << 20);
    // The routing margin holds two doublings of the first pass without epoch
    // slack; cells needing more are matched again on their own.
    // The false-match estimate needs each source's shifted partners in its
    // group: its reach, and room for the offset corrections.
    let margin_arcsec = run.routing_margin.unwrap_or_else(|| {
        let first = 4.0
            * first_margin_arcsec(CellContext::influence_radius_arcsec(
                &matching,
                &EpochStats::default(),
            ));
        match plan.false_matches {
            true => first.max(false_matches::reach_arcsec(&matching) + OFFSET_ROOM_ARCSEC),
            false => first,
        }
    });
    let routed = route(
        plan,
        &matching,
        margin_arcsec,
        &spill.0,
        run.spill_bytes.unwrap_or((budget / 4) as usize),
        quiet,
    )?;
    let read_seconds = started.elapsed().as_secs_f64();
    let rows: Vec<usize> = routed.catalogs.iter().map(|c| c.rows).collect();
    let densities: Vec<f64> = routed
        .catalogs
        .iter()
        .map(|c| {
            let area = match plan.area_sr {
                Some(area) => area,
                None => c.reference_cells.counts()?.footprint_area_sr(),
            };
            Ok(density_per_sr(c.rows, area))
        })
        .collect::<Result<_>>()?;
    let epochs = routed.epochs.finish(matching.reference_epoch_yr);
    let seds_written = plan.tables.objects || plan.tables.photometry;
    let coverage: Vec<Coverage> = plan
        .catalogs
        .iter()
        .zip(&routed.catalogs)
        .filter(|_| seds_written)
        .map(|(c, r)| match &c.coverage {
            Some(path) => Coverage::from_moc_file(path),
            None => coverage_of(c.coverage_order, &r.observed_cells),
        })
        .collect::<Result<_>>()?;
    let slots = band_slots(plan);
    let group_rows = run
        .group_rows
        .unwrap_or((budget / BYTES_PER_GROUP_ROW).max(10_000));
    let bar = spinner(
        "measuring offsets",
        quiet || plan.astrometric_reference.is_none(),
    );
    let n = plan.catalogs.len();
    // Offsets and densities are the whole input's: every group, whatever the subset.
    let all_groups = cell_groups(&routed, None, group_rows);
    let (offsets, shifts) = match plan.astrometric_reference {
        Some(reference) => correct_offsets_by(n, reference, plan.correct_offsets, |shifts| {
            measure_by_groups(plan, &matching, &routed, &all_groups, reference, shifts)
        })?,
        None => (Vec::new(), vec![Vec::new(); n]),
    };
    bar.finish_and_clear();
    let shift_arcsec = largest_shift_arcsec(&shifts);
    // Shifted catalogs cover a shifted footprint: their densities are counted
    // from the shifted positions, as a build holding everything counts them.
    let densities = match plan.area_sr.is_none() && shift_arcsec > 0.0 {
        true => shifted_densities(
            plan,
            &matching,
            &routed,
            &shifts,
            &all_groups,
            densities,
            &spill.0,
        )?,
        false => densities,
    };
    let names: Vec<String> = plan.catalogs.iter().map(|c| c.name.clone()).collect();
    let floors = floors_in_force(&names, &matching, plan.astrometric_reference, &offsets);
    let matching = with_floors(&matching, &floors);
    let false_matches = match plan.false_matches {
        true => {
            let bar = spinner("estimating false matches", quiet);
            let estimates =
                false_matches_by_groups(plan, &matching, &routed, &all_groups, &shifts, &rows)?;
            bar.finish_and_clear();
            estimates
        }
        false => Vec::new(),
    };
    // A group's cell outputs refer to the group's sources, which the groups and
    // the routing margin decide: a run resumes only a journal of the same layout.
    let layout = format!("groups of {group_rows} rows, routing margin {margin_arcsec}");
    let digests: Vec<&str> = routed.catalogs.iter().map(|c| c.sha256.as_str()).collect();
    let journal = Journal::open(
        out_dir,
        &run_key(
            plan,
            &digests,
            matching.partition_order,
            run.cells.as_deref(),
            &layout,
        ),
        matching.partition_order,
    )?;
    let record_cell = journal_recorder(&journal, run.pause_after_cells);
    let shared = Shared {
        first_margin_arcsec: first_margin_arcsec(CellContext::influence_radius_arcsec(
            &matching, &epochs,
        )),
        journal: &journal,
        journaled: journal.cells()?,
        record_cell: &record_cell,
        plan,
        matching: &matching,
        routed: &routed,
        densities,
        epochs,
        rows,
        coverage: &coverage,
        slots: &slots,
        spill: &spill.0,
        shifts: &shifts,
        shift_arcsec,
    };
    let mut tally = Tally {
        stats: MatchStats::default(),
        status_counts: vec![[0u64; SedStatus::ALL.len()]; slots.len()],
        parts: Vec::new(),
    };
    let groups = cell_groups(&routed, run.cells.as_deref(), group_rows);
    let bar = spinner("matching cell groups", quiet);
    for (k, cells) in groups.iter().enumerate() {
        bar.set_message(format!("matching cell group {} of {}", k + 1, groups.len()));
        shared.match_group(cells, &mut tally)?;
    }
    bar.finish_and_clear();
    let match_seconds = started.elapsed().as_secs_f64() - read_seconds;

    let bar = spinner("joining the groups", quiet);
    let mut staging = Staging::new(out_dir)?;
    let outputs = join_parts(&mut staging, plan, &slots, &tally.parts)?;
    bar.finish_and_clear();
    let mut stats = tally.stats;
    stats.sources = shared.rows.clone();
    stats.density_per_deg2 = shared
        .densities
        .iter()
        .map(|d| d / crate::crossmatch::engine::DEG2_PER_SR)
        .collect();
    stats.cells.order = matching.partition_order;
    stats.cells.margin_arcsec = shared.first_margin_arcsec;
    stats.cells.cells = routed.cell_rows.values().filter(|r| r.0 > 0).count();
    stats.cells.emitted = match &run.cells {
        Some(subset) => routed
            .cell_rows
            .iter()
            .filter(|(id, r)| r.0 > 0 && subset.binary_search(id).is_ok())
            .count(),
        None => stats.cells.cells,
    };
    let result = MatchResult {
        objects: Vec::new(),
        links: Vec::new(),
        stats,
    };
    let mut outputs = outputs;
    outputs.extend(write_exports(&mut staging, plan)?);
    outputs.extend(write_science(&mut staging, plan)?);
    let mut record = RunRecord::new(
        plan,
        routed
            .catalogs
            .iter()
            .zip(&plan.catalogs)
            .map(|(r, c)| input_record(c, &r.sha256, r.bytes, &r.report))
            .collect(),
        &result,
        offsets,
        false_matches,
        sed_counts(&slots, &tally.status_counts),
        outputs.clone(),
    );
    record.subset = run
        .cells
        .clone()
        .map(|cells| crate::output::run_record::SubsetRecord {
            order: matching.partition_order,
            cells,
            cells_with_sources: result.stats.cells.emitted,
            cells_with_sources_in_all: result.stats.cells.cells,
        });
    let (files, report) = finish_folder(staging, plan, &record.to_json()?)?;
    drop(shared);
    drop(record_cell);
    journal.remove()?;
    let total = started.elapsed().as_secs_f64();
    let reports: Vec<_> = routed.catalogs.iter().map(|c| &c.report).collect();
    Ok(BuildOutcome {
        summary: summary(plan, out_dir, &reports, &record, &outputs)
            + &format!(
                "memory   limit {:.0} MB: {} cell groups of at most {} rows, routing margin {:.1}\"\n",
                limit_bytes as f64 / 1048576.0,
                groups.len(),
                group_rows,
                margin_arcsec
            )
            + &format!(
                "time     route {read_seconds:.2} s, match groups {match_seconds:.2} s, join and commit {:.2} s, total {total:.2} s\n",
                total - read_seconds - match_seconds
            )
            + &crate::report::warnings::build_lines(report.as_deref()),
        files,
    })
}

/// A coverage from the cells of a catalog's observed positions: at the plan's
/// order when set, else at the footprint order (as a build holding everything does).
///
/// # Errors
/// Reading the cells' runs.
fn coverage_of(order: Option<u8>, observed_cells: &SortedValues) -> Result<Coverage> {
    let mut coverage = Coverage::default();
    match order {
        Some(order) => observed_cells.for_each_distinct(|c| coverage.insert(order, c))?,
        None => {
            let order = observed_cells.counts()?.footprint_order();
            for c in observed_cells.cells_at(order)? {
                coverage.insert(order, c);
            }
        }
    }
    Ok(coverage)
}

/// Runs of consecutive cells with core rows (within `subset` when given),
/// each holding at most `group_rows` rows with their margins (a single cell
/// may hold more).
fn cell_groups(routed: &Routed, subset: Option<&[u64]>, group_rows: u64) -> Vec<Vec<u64>> {
    let mut groups: Vec<Vec<u64>> = Vec::new();
    let mut current: Vec<u64> = Vec::new();
    let mut held = 0u64;
    for (&cell, &(core, margin)) in &routed.cell_rows {
        if core == 0 || subset.is_some_and(|s| s.binary_search(&cell).is_err()) {
            continue;
        }
        if !current.is_empty() && held + core + margin > group_rows {
            groups.push(std::mem::take(&mut current));
            held = 0;
        }
        current.push(cell);
        held += core + margin;
    }
    if !current.is_empty() {
        groups.push(current);
    }
    groups
}

/// What every group shares.
struct Shared<'a> {
    plan: &'a Plan,
    matching: &'a crate::crossmatch::MatchConfig,
    routed: &'a Routed,
    densities: Vec<f64>,
    epochs: EpochStats,
    rows: Vec<usize>,
    coverage: &'a [Coverage],
    slots: &'a [crate::sed::BandSlot],
    spill: &'a Path,
    /// Margin of a cell's first pass with the whole input's epochs, arcsec.
    first_margin_arcsec: f64,
    /// The offset corrections of each catalog, in the order applied.
    shifts: &'a Shifts,
    /// The largest total correction, arcsec: rows were routed by their
    /// uncorrected positions, so a cell's rows within `margin − shift` of it
    /// after correction are all at hand.
    shift_arcsec: f64,
    /// The restart journal, the cells it held at the start, and its recorder.
    journal: &'a Journal,
    journaled: Vec<u64>,
    record_cell: OnCellComplete<'a>,
}

impl Shared<'_> {
    /// Matches the cells `cells` from their rows and margins, writes them as a
    /// part, and takes up any cell that needs a wider margin on its own.
    fn match_group(&self, cells: &[u64], tally: &mut Tally) -> Result<()> {
        let batches = self
            .routed
            .catalogs
            .iter()
            .map(|c| c.rows_of(cells, true))
            .collect::<Result<Vec<_>>>()?;
        let finished = cells
            .iter()
            .filter(|c| self.journaled.binary_search(c).is_ok())
            .map(|&c| Ok((c, self.journal.read(c)?)))
            .collect::<Result<_>>()?;
        let deferred = self.match_part(
            &batches,
            CellRun {
                subset: Some(cells.to_vec()),
                finished,
                on_complete: Some(self.record_cell),
                max_margin_arcsec: Some((self.routed.margin_arcsec - self.shift_arcsec).max(0.0)),
                ..CellRun::default()
            },
            0,
            tally,
        )?;
        // A cell taken up again is not journaled: its output refers to the
        // sources of its own neighbourhood, and a resumed run defers it again.
        for (cell, mut margin) in deferred {
            loop {
                let reach = self.cells_within(cell, margin + self.shift_arcsec);
                let everything = margin > WIDEST_MARGIN_DEG * 3600.0;
                let batches = self
                    .routed
                    .catalogs
                    .iter()
                    .map(|c| match everything {
                        true => c.rows_of(&self.all_cells(), false),
                        false => c.rows_of(&reach, false),
                    })
                    .collect::<Result<Vec<_>>>()?;
                let level = (margin / self.first_margin_arcsec).log2().round().max(0.0) as usize;
                let again = self.match_part(
                    &batches,
                    CellRun {
                        subset: Some(vec![cell]),
                        first_margin_arcsec: Some(margin),
                        max_margin_arcsec: (!everything).then_some(margin),
                        ..CellRun::default()
                    },
                    level,
                    tally,
                )?;
                match again.first() {
                    Some(&(_, next)) => margin = next,
                    None => break,
                }
            }
        }
        Ok(())
    }

    /// Every cell with rows.
    fn all_cells(&self) -> Vec<u64> {
        self.routed.cell_rows.keys().copied().collect()
    }

    /// The cells whose rows may lie within `margin_arcsec` of cell `cell`.
    fn cells_within(&self, cell: u64, margin_arcsec: f64) -> Vec<u64> {
        let order = self.routed.order;
        let (lon, lat) = cdshealpix::nested::center(order, cell);
        let centre = crate::sky::vector::radec_deg_to_vec(lon.to_degrees(), lat.to_degrees());
        let radius_deg = cdshealpix::nested::vertices(order, cell)
            .iter()
            .map(|&(vlon, vlat)| {
                crate::sky::separation::separation_vec_rad(
                    centre,
                    crate::sky::vector::radec_deg_to_vec(vlon.to_degrees(), vlat.to_degrees()),
                )
                .to_degrees()
            })
            .fold(0.0f64, f64::max)
            * 1.1;
        let radius_rad = (radius_deg + margin_arcsec / 3600.0).to_radians();
        let mut cells: Vec<u64> = cdshealpix::nested::get(order)
            .cone_coverage_approx(lon, lat, radius_rad)
            .flat_iter()
            .filter(|id| self.routed.cell_rows.contains_key(id))
            .collect();
        cells.sort_unstable();
        cells.dedup();
        cells
    }

    /// Matches the rows `batches` (one per catalog) as `cells` says, writes
    /// the finished cells as a part, and returns the cells deferred with the
    /// margin they need next. `level` is the doubling the run starts at.
    fn match_part(
        &self,
        batches: &[RecordBatch],
        cells: CellRun,
        level: usize,
        tally: &mut Tally,
    ) -> Result<Vec<(u64, f64)>> {
        let tables: Vec<SourceTable> = self
            .plan
            .catalogs
            .iter()
            .zip(batches)
            .map(|(c, b)| SourceTable::from_normalized(&c.schema, std::slice::from_ref(b), &c.file))
            .collect::<Result<_>>()?;
        let matched = shifted(&tables, self.shifts);
        let matched = matched.as_deref().unwrap_or(&tables);
        let setup = MatchSetup::with_statistics(
            matched,
            self.matching,
            self.densities.clone(),
            self.epochs.clone(),
            self.rows.clone(),
        )?;
        let result = setup.run(self.matching, cells)?;
        let deferred_margin = result.stats.cells.deferred_margin_arcsec;
        let deferred: Vec<(u64, f64)> = result
            .stats
            .cells
            .deferred
            .iter()
            .map(|&c| (c, deferred_margin))
            .collect();
        absorb(&mut tally.stats, &result.stats, level);
        if result.objects.is_empty() && result.links.is_empty() {
            return Ok(deferred);
        }
        let dir = self.spill.join(format!("part{}", tally.parts.len()));
        std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        let Written { status_counts, .. } = write_tables(
            &mut |name| dir.join(name),
            &TableInputs {
                plan: self.plan,
                result: &result,
                tables: &tables,
                matched,
                normalized: batches,
                coverage: self.coverage,
                slots: self.slots,
                chunk_objects: PART_BATCH_OBJECTS,
                format: TableFormat::ArrowStream,
            },
        )?;
        for (total, part) in tally.status_counts.iter_mut().zip(status_counts) {
            for (t, p) in total.iter_mut().zip(part) {
                *t += p;
            }
        }
        tally.parts.push(dir);
        Ok(deferred)
    }
}

/// `tables` moved by `shifts` (see [`shift_table_by`]), or `None` when no
/// catalog moves.
fn shifted(tables: &[SourceTable], shifts: &Shifts) -> Option<Vec<SourceTable>> {
    if shifts.iter().all(Vec::is_empty) {
        return None;
    }
    let mut moved = tables.to_vec();
    shift_tables(&mut moved, shifts);
    Some(moved)
}

/// Moves each of `tables` by its catalog's `shifts`, in order.
fn shift_tables(tables: &mut [SourceTable], shifts: &Shifts) {
    for (t, s) in tables.iter_mut().zip(shifts) {
        shift_table_by(t, s);
    }
}

/// The largest total correction of any catalog, arcsec.
fn largest_shift_arcsec(shifts: &Shifts) -> f64 {
    shifts
        .iter()
        .map(|s| {
            let (e, n) = s.iter().fold((0.0, 0.0), |(e, n), d| (e + d.0, n + d.1));
            f64::hypot(e, n)
        })
        .fold(0.0, f64::max)
}

/// The rows of each catalog routed to `cells`, with their margins, as source tables.
fn group_tables(plan: &Plan, routed: &Routed, cells: &[u64]) -> Result<Vec<SourceTable>> {
    plan.catalogs
        .iter()
        .zip(&routed.catalogs)
        .map(|(c, r)| {
            let batch = r.rows_of(cells, true)?;
            SourceTable::from_normalized(&c.schema, std::slice::from_ref(&batch), &c.file)
        })
        .collect()
}

/// The cell at the routing order of row `row` of `table`, by its position at
/// the reference epoch (as it was routed); `None` without a finite position.
fn routed_cell(table: &SourceTable, row: usize, order: u8, epoch_yr: f64) -> Option<u64> {
    let ((ra, dec), _) = at_reference_epoch(
        (table.ra_deg[row], table.dec_deg[row]),
        (table.pmra_cosdec_masyr[row], table.pmdec_masyr[row]),
        table.epoch_yr[row],
        epoch_yr,
    );
    (ra.is_finite() && dec.is_finite()).then(|| home_cell(order, ra, dec))
}

/// Measures the offsets and floors against `reference` with the catalogs moved
/// by `shifts`, a group of cells at a time: each group gathers the unique
/// pairs of the reference sources routed to its cells ([`offset_pairs`]), from
/// its rows and margins. The pairs are those of the whole input at once, so the
/// measurement (medians only) is that of a build holding everything.
///
/// # Errors
/// Spill-read and match errors; a routing margin too narrow for the pairs.
fn measure_by_groups(
    plan: &Plan,
    matching: &crate::crossmatch::MatchConfig,
    routed: &Routed,
    groups: &[Vec<u64>],
    reference: usize,
    shifts: &Shifts,
) -> Result<Measured> {
    // A pair's partner lies within r of the reference source, and the
    // partner's own candidates within r of it: 2r, plus the correction.
    let needed = 2.0 * matching.max_radius_arcsec() + largest_shift_arcsec(shifts);
    if routed.margin_arcsec < needed {
        return Err(Error::Usage(format!(
            "plan {}: offsets within --memory-limit need a routing margin of at least {needed:.1}\" (twice the largest tolerance plus the corrections), found {:.1}\"",
            plan.path.display(),
            routed.margin_arcsec
        )));
    }
    let mut pairs = OffsetPairs::new(plan.catalogs.len());
    for cells in groups {
        let mut tables = group_tables(plan, routed, cells)?;
        shift_tables(&mut tables, shifts);
        let refs = &tables[reference];
        let owns = |row: usize| {
            routed_cell(refs, row, routed.order, matching.reference_epoch_yr)
                .is_some_and(|c| cells.binary_search(&c).is_ok())
        };
        pairs.append(offset_pairs(&tables, matching, reference, &owns)?);
    }
    Ok(pairs.measure(reference))
}

/// Estimates the false-match rates a group of cells at a time, with the
/// catalogs moved by `shifts`: each group counts the candidates of the
/// sources routed to its cells (as the first catalog of each pair) against
/// all its rows and margins, shifted and not
/// ([`false_matches::FalseMatchCounts`]). The counts add up to those of the
/// whole input at once, so the estimates are those of a build holding everything.
///
/// # Errors
/// Spill-read and match errors; a routing margin narrower than the shifts'
/// reach.
fn false_matches_by_groups(
    plan: &Plan,
    matching: &crate::crossmatch::MatchConfig,
    routed: &Routed,
    groups: &[Vec<u64>],
    shifts: &Shifts,
    rows: &[usize],
) -> Result<Vec<FalseMatchEstimate>> {
    let needed = false_matches::reach_arcsec(matching) + largest_shift_arcsec(shifts);
    if routed.margin_arcsec < needed {
        return Err(Error::Usage(format!(
            "plan {}: false matches within --memory-limit need a routing margin of at least {needed:.1}\" (the largest shift and tolerance plus the corrections), found {:.1}\"; widen --routing-margin or set false_matches = false",
            plan.path.display(),
            routed.margin_arcsec
        )));
    }
    let mut counts = false_matches::FalseMatchCounts::default();
    for cells in groups {
        let mut tables = group_tables(plan, routed, cells)?;
        shift_tables(&mut tables, shifts);
        let owns = |catalog: usize, row: usize| {
            routed_cell(
                &tables[catalog],
                row,
                routed.order,
                matching.reference_epoch_yr,
            )
            .is_some_and(|c| cells.binary_search(&c).is_ok())
        };
        counts.add(false_matches::FalseMatchCounts::count(
            &tables, matching, &owns,
        )?);
    }
    Ok(counts.estimates(rows))
}

/// The densities per steradian with each shifted catalog's footprint counted
/// from its shifted positions (the core rows of each group, at [`MAX_ORDER`],
/// gathered as sorted runs in `spill`).
///
/// # Errors
/// Spill-read errors.
fn shifted_densities(
    plan: &Plan,
    matching: &crate::crossmatch::MatchConfig,
    routed: &Routed,
    shifts: &Shifts,
    groups: &[Vec<u64>],
    mut densities: Vec<f64>,
    spill: &Path,
) -> Result<Vec<f64>> {
    for (c, s) in shifts.iter().enumerate().filter(|(_, s)| !s.is_empty()) {
        let mut cells = SortedRuns::new(spill, &format!("shifted-{c}"));
        for group in groups {
            let batch = routed.catalogs[c].rows_of(group, false)?;
            let mut table = SourceTable::from_normalized(
                &plan.catalogs[c].schema,
                std::slice::from_ref(&batch),
                &plan.catalogs[c].file,
            )?;
            shift_table_by(&mut table, s);
            for row in 0..table.len() {
                if let Some(cell) = routed_cell(&table, row, MAX_ORDER, matching.reference_epoch_yr)
                {
                    cells.push(cell)?;
                }
            }
        }
        let area = cells.finish().counts()?.footprint_area_sr();
        densities[c] = density_per_sr(routed.catalogs[c].rows, area);
    }
    Ok(densities)
}

/// Adds a part's match counts to the whole run's; its widenings start at
/// doubling `level`.
fn absorb(total: &mut MatchStats, part: &MatchStats, level: usize) {
    total.candidates += part.candidates;
    total.groups += part.groups;
    total.largest_group = total.largest_group.max(part.largest_group);
    total.approximate_groups += part.approximate_groups;
    total.objects += part.objects;
    total.objects_not_primary += part.objects_not_primary;
    if total.forced_without_counterpart.len() < part.forced_without_counterpart.len() {
        total
            .forced_without_counterpart
            .resize(part.forced_without_counterpart.len(), 0);
    }
    for (t, p) in total
        .forced_without_counterpart
        .iter_mut()
        .zip(&part.forced_without_counterpart)
    {
        *t += p;
    }
    total.cells.resumed += part.cells.resumed;
    for (k, v) in &part.objects_by_members {
        *total.objects_by_members.entry(*k).or_insert(0) += v;
    }
    for (k, v) in &part.flags {
        *total.flags.entry(k.clone()).or_insert(0) += v;
    }
    for (j, n) in part.cells.widened.iter().enumerate() {
        let at = level + j;
        if total.cells.widened.len() <= at {
            total.cells.widened.resize(at + 1, 0);
        }
        total.cells.widened[at] += n;
    }
}

/// Joins the tables of the parts into `staging`, in the whole run's order and
/// with a build's chunking, and returns their records. The tables are joined
/// side by side, each on a thread of its own.
fn join_parts(
    staging: &mut Staging,
    plan: &Plan,
    slots: &[crate::sed::BandSlot],
    parts: &[PathBuf],
) -> Result<Vec<OutputRecord>> {
    let names: Vec<String> = plan.catalogs.iter().map(|c| c.name.clone()).collect();
    let ranker = Ranker::new(&names);
    let metadata = table_metadata(plan, slots)?;
    let which = plan.tables;
    let jobs: Vec<(&str, TableKind, usize, PathBuf)> = [
        (
            "objects",
            TableKind::PerObject,
            WRITE_CHUNK_OBJECTS,
            which.objects,
        ),
        (
            "photometry",
            TableKind::PerObject,
            WRITE_CHUNK_OBJECTS * slots.len().max(1),
            which.photometry,
        ),
        ("links", TableKind::Links, WRITE_CHUNK_OBJECTS, which.links),
        (
            "hard_sources",
            TableKind::HardSources,
            WRITE_CHUNK_OBJECTS,
            which.objects,
        ),
    ]
    .into_iter()
    .filter(|job| job.3)
    .map(|(stem, kind, chunk_rows, _)| {
        let path = staging.path(&TableFormat::Parquet.file_name(stem));
        (stem, kind, chunk_rows, path)
    })
    .collect();
    std::thread::scope(|scope| {
        let handles: Vec<_> = jobs
            .iter()
            .map(|(stem, kind, chunk_rows, path)| {
                let (ranker, metadata) = (&ranker, metadata.clone());
                scope.spawn(move || {
                    join_table(
                        plan,
                        slots,
                        parts,
                        (stem, *kind, *chunk_rows),
                        path,
                        ranker,
                        metadata,
                    )
                })
            })
            .collect();
        handles
            .into_iter()
            .map(|h| h.join().expect("a table join does not panic"))
            .collect()
    })
}

/// Joins table `stem` of the parts into the Parquet file `path`.
fn join_table(
    plan: &Plan,
    slots: &[crate::sed::BandSlot],
    parts: &[PathBuf],
    (stem, kind, chunk_rows): (&str, TableKind, usize),
    path: &Path,
    ranker: &Ranker,
    metadata: Vec<(String, String)>,
) -> Result<OutputRecord> {
    let file = TableFormat::Parquet.file_name(stem);
    let part_file = TableFormat::ArrowStream.file_name(stem);
    let files: Vec<PathBuf> = parts.iter().map(|p| p.join(&part_file)).collect();
    let mut writer: Option<ParquetOutput> = None;
    let format = TableFormat::ArrowStream;
    let schema = merge_parts(&files, format, kind, ranker, chunk_rows, |chunk| {
        let schema = Arc::new(Schema::new(chunk.schema().fields().clone()));
        let chunk = chunk
            .with_schema(schema.clone())
            .map_err(|e| Error::columnar(path, e))?;
        if writer.is_none() {
            writer = Some(ParquetOutput::create(path, schema, metadata.clone())?);
        }
        writer.as_mut().map_or(Ok(()), |w| w.write(&chunk))
    })?;
    let writer = match writer {
        Some(w) => w,
        None => {
            // No rows anywhere: the empty table of a part, or of a build without rows.
            let schema = match schema {
                Some(s) => Arc::new(Schema::new(s.fields().clone())),
                None => empty_schema(plan, slots, &file)?,
            };
            ParquetOutput::create(path, schema, metadata)?
        }
    };
    Ok(OutputRecord {
        file,
        rows: writer.finish()?,
    })
}

/// The schema of table `file` when no part wrote one.
fn empty_schema(
    plan: &Plan,
    slots: &[crate::sed::BandSlot],
    file: &str,
) -> Result<arrow::datatypes::SchemaRef> {
    use crate::output::tables::{hard_sources_batch, links_batch, objects_batch, photometry_batch};
    let tables: Vec<SourceTable> = Vec::new();
    let epoch = plan.matching.reference_epoch_yr;
    let batch = match file {
        "objects.parquet" => objects_batch(&[], &[], slots, &tables, epoch)?,
        "photometry.parquet" => photometry_batch(&[], &[], slots, &tables)?,
        "links.parquet" => links_batch(&[], &tables)?,
        _ => hard_sources_batch(&[], &[], &tables, epoch)?,
    };
    Ok(Arc::new(Schema::new(batch.schema().fields().clone())))
}
