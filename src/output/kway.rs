//! Joining tables that are each already in the whole run's order (the parts
//! of a build in bounded memory, or of `build --cells` jobs) into one table
//! in that order, a chunk at a time: a k-way merge on the keys of
//! [`super::merge`], so memory holds one batch per part and one chunk.

use std::path::{Path, PathBuf};

use arrow::array::{Array, ArrayData, AsArray, RecordBatch, StringArray, make_array};
use arrow::compute::interleave_record_batch;
use arrow::datatypes::SchemaRef;
use arrow::error::ArrowError;

use super::merge::{Ranker, TableKind};
use super::table_file::{TableBatches, TableFormat, read_table};
use crate::error::{Error, Result};

/// Rows read from a part at a time.
const READ_BATCH_ROWS: usize = 8192;

/// One rank-key column pair of a batch: each row's catalog (plan order) and
/// where its source identifier starts in the text column.
struct KeyColumn {
    catalog: Vec<u16>,
    text: StringArray,
    skip: Vec<u32>,
}

impl KeyColumn {
    fn key(&self, row: usize) -> (u16, &str) {
        (
            self.catalog[row],
            &self.text.value(row)[self.skip[row] as usize..],
        )
    }
}

fn text_column(batch: &RecordBatch, name: &str, origin: &Path) -> Result<StringArray> {
    batch
        .column_by_name(name)
        .and_then(|c| c.as_string_opt::<i32>())
        .cloned()
        .ok_or_else(|| Error::format(origin, format!("no text column \"{name}\"")))
}

/// The key of an object identifier column `<catalog>:<source id>`.
fn object_key(batch: &RecordBatch, ranker: &Ranker, origin: &Path) -> Result<KeyColumn> {
    let text = text_column(batch, "object_id", origin)?;
    let mut catalog = Vec::with_capacity(text.len());
    let mut skip = Vec::with_capacity(text.len());
    for i in 0..text.len() {
        let id = text.value(i);
        let (c, rest) = ranker.object(id, origin)?;
        catalog.push(c as u16);
        skip.push((id.len() - rest.len()) as u32);
    }
    Ok(KeyColumn {
        catalog,
        text,
        skip,
    })
}

/// The key of a source named by a catalog column and an identifier column.
fn source_key(
    batch: &RecordBatch,
    catalog_column: &str,
    id_column: &str,
    ranker: &Ranker,
    origin: &Path,
) -> Result<KeyColumn> {
    let names = text_column(batch, catalog_column, origin)?;
    let text = text_column(batch, id_column, origin)?;
    let catalog = (0..names.len())
        .map(|i| ranker.catalog(names.value(i), origin).map(|c| c as u16))
        .collect::<Result<_>>()?;
    Ok(KeyColumn {
        catalog,
        skip: vec![0; text.len()],
        text,
    })
}

fn keys_of(
    batch: &RecordBatch,
    kind: TableKind,
    ranker: &Ranker,
    origin: &Path,
) -> Result<Vec<KeyColumn>> {
    Ok(match kind {
        TableKind::PerObject => vec![object_key(batch, ranker, origin)?],
        TableKind::Links => vec![
            source_key(batch, "catalog_a", "source_id_a", ranker, origin)?,
            source_key(batch, "catalog_b", "source_id_b", ranker, origin)?,
        ],
        TableKind::HardSources => vec![
            object_key(batch, ranker, origin)?,
            source_key(batch, "catalog", "source_id", ranker, origin)?,
        ],
    })
}

/// A part being read: its current batch, that batch's keys and the next row.
struct Cursor {
    reader: TableBatches,
    origin: PathBuf,
    batch: RecordBatch,
    keys: Vec<KeyColumn>,
    row: usize,
    /// Where the current batch sits among the batches of the chunk being built.
    slot: Option<usize>,
}

impl Cursor {
    /// Moves to the next non-empty batch; false at the end of the part.
    fn load(&mut self, kind: TableKind, ranker: &Ranker) -> Result<bool> {
        for next in self.reader.by_ref() {
            let batch = next.map_err(|e| Error::columnar(&self.origin, e))?;
            if batch.num_rows() == 0 {
                continue;
            }
            self.keys = keys_of(&batch, kind, ranker, &self.origin)?;
            self.batch = batch;
            self.row = 0;
            self.slot = None;
            return Ok(true);
        }
        Ok(false)
    }

    fn key(&self) -> impl Iterator<Item = (u16, &str)> + '_ {
        self.keys.iter().map(|k| k.key(self.row))
    }
}

/// True when cursor `a`'s row comes before `b`'s (ties: the earlier part first).
fn before(cursors: &[Cursor], a: usize, b: usize) -> bool {
    match cursors[a].key().cmp(cursors[b].key()) {
        std::cmp::Ordering::Less => true,
        std::cmp::Ordering::Greater => false,
        std::cmp::Ordering::Equal => a < b,
    }
}

fn sift_down(heap: &mut [usize], cursors: &[Cursor], mut i: usize) {
    loop {
        let (l, r) = (2 * i + 1, 2 * i + 2);
        let mut least = i;
        if l < heap.len() && before(cursors, heap[l], heap[least]) {
            least = l;
        }
        if r < heap.len() && before(cursors, heap[r], heap[least]) {
            least = r;
        }
        if least == i {
            return;
        }
        heap.swap(i, least);
        i = least;
    }
}

/// The batch with every validity buffer that marks no null dropped, as the
/// builders of a build leave them: the Parquet writer splits pages of arrays
/// with and without one at different rows, so the files would differ.
pub fn without_empty_nulls(batch: &RecordBatch) -> std::result::Result<RecordBatch, ArrowError> {
    fn strip(data: ArrayData) -> std::result::Result<ArrayData, ArrowError> {
        let empty = data.nulls().is_some_and(|n| n.null_count() == 0);
        let children: Vec<ArrayData> = data
            .child_data()
            .iter()
            .cloned()
            .map(strip)
            .collect::<std::result::Result<_, _>>()?;
        let mut builder = data.into_builder().child_data(children);
        if empty {
            builder = builder.nulls(None);
        }
        builder.build()
    }
    let columns = batch
        .columns()
        .iter()
        .map(|c| strip(c.to_data()).map(make_array))
        .collect::<std::result::Result<Vec<_>, _>>()?;
    RecordBatch::try_new(batch.schema(), columns)
}

/// Merges the table files `parts` (stored as `format`, each in the whole run's order for `kind`)
/// and hands `sink` the joined rows in chunks of `chunk_rows` (the last
/// shorter). Hard-source rows repeated across parts are kept once. Returns the
/// schema of the rows (`None` when no part has any).
///
/// # Errors
/// Read errors and key columns that are missing or name catalogs the plan
/// lacks, naming the file; whatever `sink` returns.
pub fn merge_parts(
    parts: &[PathBuf],
    format: TableFormat,
    kind: TableKind,
    ranker: &Ranker,
    chunk_rows: usize,
    mut sink: impl FnMut(RecordBatch) -> Result<()>,
) -> Result<Option<SchemaRef>> {
    let mut cursors: Vec<Cursor> = Vec::with_capacity(parts.len());
    let mut schema = None;
    for path in parts {
        let (part_schema, reader) = read_table(format, path, READ_BATCH_ROWS)?;
        schema.get_or_insert_with(|| part_schema.clone());
        let mut cursor = Cursor {
            batch: RecordBatch::new_empty(part_schema),
            reader,
            origin: path.clone(),
            keys: Vec::new(),
            row: 0,
            slot: None,
        };
        if cursor.load(kind, ranker)? {
            cursors.push(cursor);
        }
    }
    let mut heap: Vec<usize> = (0..cursors.len()).collect();
    for i in (0..heap.len() / 2).rev() {
        sift_down(&mut heap, &cursors, i);
    }
    let mut held: Vec<RecordBatch> = Vec::new();
    let mut picks: Vec<(usize, usize)> = Vec::with_capacity(chunk_rows.min(1 << 20));
    let mut last_hard: Option<Vec<(u16, String)>> = None;
    let flush = |held: &mut Vec<RecordBatch>,
                 picks: &mut Vec<(usize, usize)>,
                 cursors: &mut [Cursor],
                 sink: &mut dyn FnMut(RecordBatch) -> Result<()>|
     -> Result<()> {
        if picks.is_empty() {
            return Ok(());
        }
        let refs: Vec<&RecordBatch> = held.iter().collect();
        let chunk = interleave_record_batch(&refs, picks)
            .and_then(|c| without_empty_nulls(&c))
            .map_err(|e| Error::columnar(Path::new("merged rows"), e))?;
        held.clear();
        picks.clear();
        for c in cursors.iter_mut() {
            c.slot = None;
        }
        sink(chunk)
    };
    while let Some(&top) = heap.first() {
        let keep = match kind {
            TableKind::HardSources => {
                let key: Vec<(u16, String)> = cursors[top]
                    .key()
                    .map(|(c, s)| (c, s.to_string()))
                    .collect();
                let repeat = last_hard.as_ref() == Some(&key);
                last_hard = Some(key);
                !repeat
            }
            _ => true,
        };
        if keep {
            let c = &mut cursors[top];
            let slot = *c.slot.get_or_insert_with(|| {
                held.push(c.batch.clone());
                held.len() - 1
            });
            picks.push((slot, c.row));
        }
        let c = &mut cursors[top];
        c.row += 1;
        // A finished batch stays in `held` for the chunk that uses it.
        if c.row == c.batch.num_rows() && !c.load(kind, ranker)? {
            let last = heap.len() - 1;
            heap.swap(0, last);
            heap.pop();
        }
        if !heap.is_empty() {
            sift_down(&mut heap, &cursors, 0);
        }
        if picks.len() == chunk_rows {
            flush(&mut held, &mut picks, &mut cursors, &mut sink)?;
        }
    }
    flush(&mut held, &mut picks, &mut cursors, &mut sink)?;
    Ok(schema)
}
