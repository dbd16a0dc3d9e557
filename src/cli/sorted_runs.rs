//! A number per source of a catalog (its sky cell, or the hash of its
//! identifier), kept as sorted runs of distinct values on disk rather than in
//! memory.
//!
//! The footprint rule ([`OccupiedCounts`]) and the coverage of observed
//! positions need only the distinct cells, in order; the check that
//! identifiers are unique needs only the hashes that repeat. A bounded-memory
//! build gathers them while it routes: a buffer of values is sorted,
//! deduplicated (noting the repeats when asked) and written as a run when
//! full; reading merges the runs (k-way, one small buffer per run), so memory
//! stays a few megabytes whatever the catalog's size.

use std::cmp::Reverse;
use std::collections::BinaryHeap;
use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use crate::crossmatch::density::{MAX_ORDER, OccupiedCounts};
use crate::error::{Error, Result};

/// Values buffered before a run is written (8 bytes each).
const BUFFER_VALUES: usize = 1 << 20;

/// Bytes read ahead from each run while merging.
const READ_AHEAD_BYTES: usize = 1 << 16;

/// Runs of one level merged into one of the next.
const FAN_IN: usize = 16;

/// Gathers values, one per source, into sorted runs of distinct values.
pub struct SortedRuns {
    dir: PathBuf,
    prefix: String,
    capacity: usize,
    buffer: Vec<u64>,
    /// Values seen more than once, when noted ([`SortedRuns::noting_repeats`]).
    repeats: Option<Vec<u64>>,
    /// The runs on disk with their levels: a run of level k + 1 merges
    /// [`FAN_IN`] runs of level k, so at most `FAN_IN` runs of each level are
    /// open at once when reading, whatever the catalog's size.
    files: Vec<(u32, PathBuf)>,
    written: usize,
    sources: usize,
}

impl SortedRuns {
    /// Runs written in `dir` as `<prefix>-<k>.sorted`.
    pub fn new(dir: &Path, prefix: &str) -> SortedRuns {
        SortedRuns::with_capacity(dir, prefix, BUFFER_VALUES)
    }

    /// As [`SortedRuns::new`], writing a run every `capacity` values.
    pub fn with_capacity(dir: &Path, prefix: &str, capacity: usize) -> SortedRuns {
        SortedRuns {
            dir: dir.to_path_buf(),
            prefix: prefix.to_string(),
            capacity: capacity.max(1),
            buffer: Vec::new(),
            repeats: None,
            files: Vec::new(),
            written: 0,
            sources: 0,
        }
    }

    /// As [`SortedRuns::new`], noting the values that repeat
    /// ([`SortedValues::repeated`]).
    pub fn noting_repeats(dir: &Path, prefix: &str) -> SortedRuns {
        SortedRuns {
            repeats: Some(Vec::new()),
            ..SortedRuns::new(dir, prefix)
        }
    }

    /// Counts a source with `value`.
    ///
    /// # Errors
    /// Writing a run.
    pub fn push(&mut self, value: u64) -> Result<()> {
        self.sources += 1;
        self.buffer.push(value);
        if self.buffer.len() >= self.capacity {
            self.write_run()?;
        }
        Ok(())
    }

    fn write_run(&mut self) -> Result<()> {
        sort_distinct(&mut self.buffer, self.repeats.as_mut());
        let path = self.next_path();
        let mut out = RunWriter::create(&path)?;
        for &c in &self.buffer {
            out.push(c)?;
        }
        out.finish()?;
        self.files.push((0, path));
        self.buffer.clear();
        // The newest runs have the lowest levels: merge while the last
        // `FAN_IN` runs share one.
        while self.files.len() >= FAN_IN {
            let tail = &self.files[self.files.len() - FAN_IN..];
            let level = tail[0].0;
            if tail.iter().any(|(l, _)| *l != level) {
                break;
            }
            let merged: Vec<PathBuf> = self
                .files
                .drain(self.files.len() - FAN_IN..)
                .map(|(_, p)| p)
                .collect();
            let path = self.next_path();
            let mut out = RunWriter::create(&path)?;
            let repeats = &mut self.repeats;
            merge_distinct(&merged, &[], |c, repeat| match repeat {
                true => {
                    if let Some(r) = repeats.as_mut() {
                        r.push(c);
                    }
                    Ok(())
                }
                false => out.push(c),
            })?;
            out.finish()?;
            for p in &merged {
                std::fs::remove_file(p).map_err(|e| Error::io(p, e))?;
            }
            self.files.push((level + 1, path));
        }
        Ok(())
    }

    fn next_path(&mut self) -> PathBuf {
        self.written += 1;
        self.dir
            .join(format!("{}-{}.sorted", self.prefix, self.written))
    }

    /// The runs gathered (the last buffer stays in memory).
    pub fn finish(mut self) -> SortedValues {
        sort_distinct(&mut self.buffer, self.repeats.as_mut());
        self.buffer.shrink_to_fit();
        SortedValues {
            files: self.files.into_iter().map(|(_, p)| p).collect(),
            tail: self.buffer,
            sources: self.sources,
            repeats: self.repeats,
        }
    }
}

/// Sorts and deduplicates `values`, adding the values that repeat to `repeats`.
fn sort_distinct(values: &mut Vec<u64>, repeats: Option<&mut Vec<u64>>) {
    values.sort_unstable();
    if let Some(r) = repeats {
        r.extend(values.windows(2).filter(|w| w[0] == w[1]).map(|w| w[0]));
    }
    values.dedup();
}

/// A catalog's values as sorted runs of distinct values.
pub struct SortedValues {
    files: Vec<PathBuf>,
    tail: Vec<u64>,
    /// Repeats noted within a run or in merging runs, when noted.
    repeats: Option<Vec<u64>>,
    sources: usize,
}

impl SortedValues {
    /// Calls `f` with every distinct value, ascending.
    ///
    /// # Errors
    /// Reading a run.
    pub fn for_each_distinct(&self, mut f: impl FnMut(u64)) -> Result<()> {
        merge_distinct(&self.files, &self.tail, |c, repeat| {
            if !repeat {
                f(c);
            }
            Ok(())
        })
    }

    /// The values pushed more than once, ascending (of runs gathered by
    /// [`SortedRuns::noting_repeats`]; empty otherwise).
    ///
    /// # Errors
    /// Reading a run.
    pub fn repeated(&self) -> Result<Vec<u64>> {
        let Some(noted) = &self.repeats else {
            return Ok(Vec::new());
        };
        let mut repeated = noted.clone();
        merge_distinct(&self.files, &self.tail, |c, repeat| {
            if repeat {
                repeated.push(c);
            }
            Ok(())
        })?;
        repeated.sort_unstable();
        repeated.dedup();
        Ok(repeated)
    }

    /// The counts of the footprint rule, for cells at [`MAX_ORDER`].
    ///
    /// # Errors
    /// Reading a run.
    pub fn counts(&self) -> Result<OccupiedCounts> {
        let mut counts = OccupiedCounts::default();
        counts.add_sources(self.sources);
        self.for_each_distinct(|c| counts.add_cell(c))?;
        Ok(counts)
    }

    /// The distinct parents at `order` of cells at [`MAX_ORDER`], ascending.
    ///
    /// # Errors
    /// Reading a run.
    pub fn cells_at(&self, order: u8) -> Result<Vec<u64>> {
        let shift = 2 * u32::from(MAX_ORDER - order.min(MAX_ORDER));
        let mut cells = Vec::new();
        self.for_each_distinct(|c| {
            let parent = c >> shift;
            if cells.last() != Some(&parent) {
                cells.push(parent);
            }
        })?;
        Ok(cells)
    }
}

/// A run being written: values as little-endian u64, ascending.
struct RunWriter<'a> {
    path: &'a Path,
    out: BufWriter<File>,
}

impl<'a> RunWriter<'a> {
    fn create(path: &'a Path) -> Result<RunWriter<'a>> {
        let file = File::create(path).map_err(|e| Error::io(path, e))?;
        Ok(RunWriter {
            path,
            out: BufWriter::new(file),
        })
    }

    fn push(&mut self, value: u64) -> Result<()> {
        self.out
            .write_all(&value.to_le_bytes())
            .map_err(|e| Error::io(self.path, e))
    }

    fn finish(mut self) -> Result<()> {
        self.out.flush().map_err(|e| Error::io(self.path, e))
    }
}

/// Calls `f(value, false)` with every distinct value of the sorted runs
/// `files` and the sorted `tail`, ascending, and `f(value, true)` each time a
/// value comes again from another run (a k-way merge with one small buffer per
/// run).
fn merge_distinct(
    files: &[PathBuf],
    tail: &[u64],
    mut f: impl FnMut(u64, bool) -> Result<()>,
) -> Result<()> {
    let mut readers = Vec::with_capacity(files.len());
    for path in files {
        let file = File::open(path).map_err(|e| Error::io(path, e))?;
        readers.push((BufReader::with_capacity(READ_AHEAD_BYTES, file), path));
    }
    let next = |k: usize, readers: &mut Vec<(BufReader<File>, &PathBuf)>| -> Result<Option<u64>> {
        let (reader, path) = &mut readers[k];
        let mut bytes = [0u8; 8];
        match reader.read_exact(&mut bytes) {
            Ok(()) => Ok(Some(u64::from_le_bytes(bytes))),
            Err(e) if e.kind() == std::io::ErrorKind::UnexpectedEof => Ok(None),
            Err(e) => Err(Error::io(path, e)),
        }
    };
    // The tail is the last source, after the files.
    let tail_source = files.len();
    let mut tail_at = 0usize;
    let mut heap = BinaryHeap::new();
    for k in 0..tail_source {
        if let Some(c) = next(k, &mut readers)? {
            heap.push(Reverse((c, k)));
        }
    }
    if let Some(&c) = tail.first() {
        heap.push(Reverse((c, tail_source)));
        tail_at = 1;
    }
    let mut last = None;
    while let Some(Reverse((c, k))) = heap.pop() {
        f(c, last == Some(c))?;
        last = Some(c);
        let following = if k == tail_source {
            let c = tail.get(tail_at).copied();
            tail_at += 1;
            c
        } else {
            next(k, &mut readers)?
        };
        if let Some(c) = following {
            heap.push(Reverse((c, k)));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::crossmatch::density::Occupancy;
    use crate::rng::Rng;

    /// Cells of a clustered field (many repeats and near neighbours).
    fn cells(n: usize) -> Vec<u64> {
        let mut rng = Rng::new(7, "cells");
        (0..n)
            .map(|_| {
                let base = 1_000_000u64 * (rng.next_u64() % 3);
                base + rng.next_u64() % 5000
            })
            .collect()
    }

    #[test]
    fn runs_on_disk_give_the_counts_and_cells_of_the_cells_in_memory() {
        let dir = tempfile::tempdir().unwrap();
        let all = cells(5_000);
        let whole = Occupancy::from_cells(all.clone());
        for capacity in [1, 7, 999, 1 << 20] {
            let mut runs = SortedRuns::with_capacity(dir.path(), &format!("c{capacity}"), capacity);
            for &c in &all {
                runs.push(c).unwrap();
            }
            let sorted = runs.finish();
            // Runs of each level are merged by sixteens: 5,000 runs of one cell
            // leave fewer than 16 per level, and four levels.
            assert!(sorted.files.len() < 4 * FAN_IN, "{}", sorted.files.len());
            let counts = sorted.counts().unwrap();
            assert_eq!(
                counts.footprint_order(),
                whole.footprint_order(),
                "{capacity}"
            );
            assert_eq!(
                counts.footprint_area_sr(),
                whole.footprint_area_sr(),
                "{capacity}"
            );
            for order in [0, 9, 12, MAX_ORDER] {
                assert_eq!(
                    sorted.cells_at(order).unwrap(),
                    whole.cells_at(order).collect::<Vec<_>>(),
                    "capacity {capacity}, order {order}"
                );
            }
        }
    }

    #[test]
    fn repeats_are_noted_within_and_across_runs() {
        let dir = tempfile::tempdir().unwrap();
        // 7 repeats next to itself, 9 farther apart, 5 three times.
        let values = [3u64, 7, 7, 1, 9, 2, 5, 8, 5, 4, 9, 5, 11];
        for capacity in [1, 4, 100] {
            let mut runs = SortedRuns::noting_repeats(dir.path(), &format!("r{capacity}"));
            runs.capacity = capacity;
            for &v in &values {
                runs.push(v).unwrap();
            }
            let sorted = runs.finish();
            assert_eq!(sorted.repeated().unwrap(), vec![5, 7, 9], "{capacity}");
            let mut distinct = Vec::new();
            sorted.for_each_distinct(|v| distinct.push(v)).unwrap();
            assert_eq!(distinct, vec![1, 2, 3, 4, 5, 7, 8, 9, 11], "{capacity}");
        }
        let mut plain = SortedRuns::new(dir.path(), "plain");
        for &v in &values {
            plain.push(v).unwrap();
        }
        assert!(plain.finish().repeated().unwrap().is_empty());
    }

    #[test]
    fn no_cells_count_no_sources() {
        let dir = tempfile::tempdir().unwrap();
        let sorted = SortedRuns::new(dir.path(), "none").finish();
        assert_eq!(sorted.counts().unwrap().footprint_area_sr(), 0.0);
        assert!(sorted.cells_at(5).unwrap().is_empty());
    }
}
