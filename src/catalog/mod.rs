//! Reading survey catalogs: the survey schema, one reader per file format,
//! and the normalizer that turns raw columns into calibrated source tables.
//!
//! Every reader yields a [`CatalogBatches`]: the file's own columns as Arrow
//! record batches, untouched except for format-level decoding (FITS scaling and
//! nulls, VOTable nulls). The [`normalize`] step applies a survey schema to them.
//!
//! Readers never trust a header: sizes are checked against the file before
//! anything is allocated ([`limits`]), gzip trailers are checked ([`gzip`]),
//! rows read are compared with the rows a file declares ([`DeclaredRows`]), and
//! a reader that fails on its background thread fails the run ([`prefetch`]).

pub mod csv;
pub mod fits;
pub mod gzip;
pub mod limits;
pub mod normalize;
pub mod parquet;
pub mod schema;
pub mod votable;

use std::any::Any;
use std::path::{Path, PathBuf};
use std::sync::mpsc::{Receiver, SyncSender};

use arrow::array::RecordBatch;
use arrow::datatypes::{Schema, SchemaRef};

use crate::error::{Error, Result};

/// Default number of rows per record batch produced by the readers.
pub const DEFAULT_BATCH_ROWS: usize = 65_536;

/// A stream of record batches read from one catalog file, with the file's Arrow schema.
pub struct CatalogBatches {
    /// The file the batches come from, for messages.
    pub path: PathBuf,
    /// The Arrow schema every batch has.
    pub schema: SchemaRef,
    /// The batches, in file order. An error ends the stream.
    pub batches: Box<dyn Iterator<Item = Result<RecordBatch>> + Send>,
}

impl CatalogBatches {
    /// Reads every remaining batch into memory.
    pub fn collect_all(self) -> Result<Vec<RecordBatch>> {
        self.batches.collect()
    }
}

/// Opens a catalog file with the reader its survey schema names.
///
/// # Errors
/// [`check_regular_file`]'s refusal of pipes and devices, then the reader's errors.
pub fn open(path: &Path, format: &schema::FileFormat, batch_rows: usize) -> Result<CatalogBatches> {
    check_regular_file(path)?;
    match format {
        schema::FileFormat::Csv(options) => csv::read_csv(path, options, batch_rows),
        schema::FileFormat::Parquet => parquet::read_parquet(path, batch_rows),
        schema::FileFormat::Fits { hdu } => fits::read_fits(
            path,
            &fits::FitsOptions {
                hdu: *hdu,
                batch_rows,
            },
        ),
        schema::FileFormat::Votable { table } => votable::read_votable(
            path,
            &votable::VotableOptions {
                table_index: *table,
                batch_rows,
            },
        ),
    }
}

/// Refuses a catalog that is not a regular file (a named pipe, a device, a socket).
///
/// A catalog is read more than once (its SHA-256 is recorded, FITS and Parquet
/// seek), so a stream that can be read only once would give an empty or partial
/// catalog; and sizes are checked against the file's length, which a stream lacks.
///
/// # Errors
/// [`Error::Io`] if the path cannot be looked at; [`Error::Format`] naming what it is.
pub fn check_regular_file(path: &Path) -> Result<()> {
    let kind = std::fs::metadata(path)
        .map_err(|e| Error::io(path, e))?
        .file_type();
    if kind.is_file() {
        return Ok(());
    }
    let what = describe_file_type(&kind);
    Err(Error::format(
        path,
        format!(
            "is {what}, expected a regular file (catalogs are read more than once; save the stream to a file first)"
        ),
    ))
}

/// "a named pipe (FIFO)", "a character device", ... for messages.
fn describe_file_type(kind: &std::fs::FileType) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if kind.is_fifo() {
            return "a named pipe (FIFO)";
        }
        if kind.is_char_device() {
            return "a character device";
        }
        if kind.is_block_device() {
            return "a block device";
        }
        if kind.is_socket() {
            return "a socket";
        }
    }
    if kind.is_dir() {
        "a folder"
    } else {
        "not a regular file"
    }
}

/// Refuses a column that a survey schema names when the file has more than one
/// column of that name: which one is meant would be a guess.
///
/// # Errors
/// [`Error::Format`] naming the column and the positions (from 1) of its copies.
pub fn check_unique_column(path: &Path, file: &Schema, column: &str) -> Result<()> {
    let positions: Vec<String> = file
        .fields()
        .iter()
        .enumerate()
        .filter(|(_, f)| f.name() == column)
        .map(|(i, _)| (i + 1).to_string())
        .collect();
    if positions.len() < 2 {
        return Ok(());
    }
    Err(Error::format(
        path,
        format!(
            "the file has {} columns named \"{column}\" (columns {}), which the schema names; expected exactly one",
            positions.len(),
            positions.join(", ")
        ),
    ))
}

/// Wraps a batch stream so that its end checks the rows read against the rows
/// the file declares (`declared`, as said by `source`, e.g. "NAXIS2").
pub struct DeclaredRows<I> {
    inner: I,
    path: PathBuf,
    declared: u64,
    source: &'static str,
    read: u64,
    done: bool,
}

impl<I> DeclaredRows<I> {
    /// Checks `inner` against `declared` rows, as declared by `source`.
    pub fn new(inner: I, path: &Path, declared: u64, source: &'static str) -> Self {
        DeclaredRows {
            inner,
            path: path.to_path_buf(),
            declared,
            source,
            read: 0,
            done: false,
        }
    }

    fn mismatch(&mut self) -> Error {
        self.done = true;
        Error::format(
            &self.path,
            format!(
                "the file declares {} rows ({}), but {} rows were read",
                self.declared, self.source, self.read
            ),
        )
    }
}

impl<I: Iterator<Item = Result<RecordBatch>>> Iterator for DeclaredRows<I> {
    type Item = Result<RecordBatch>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.done {
            return None;
        }
        match self.inner.next() {
            Some(Ok(batch)) => {
                self.read += batch.num_rows() as u64;
                if self.read > self.declared {
                    return Some(Err(self.mismatch()));
                }
                Some(Ok(batch))
            }
            Some(Err(e)) => {
                self.done = true;
                Some(Err(e))
            }
            None if self.read != self.declared => Some(Err(self.mismatch())),
            None => {
                self.done = true;
                None
            }
        }
    }
}

/// The error for a reader that panicked: the library's message, with the file.
pub fn reader_panic(path: &Path, payload: &(dyn Any + Send)) -> Error {
    let message = payload
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| payload.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "no message".to_string());
    Error::format(
        path,
        format!(
            "the reader failed on the file's contents ({message}); the file is corrupt or not in the format its schema names"
        ),
    )
}

thread_local! {
    /// How many guarded reader calls are running on this thread.
    static GUARDED: std::cell::Cell<usize> = const { std::cell::Cell::new(0) };
}

/// True while this thread runs reader code whose panics become errors, so a
/// panic hook can keep quiet about them (the error reports them, in one line).
pub fn panics_are_caught() -> bool {
    GUARDED.with(|g| g.get() > 0)
}

/// Runs `f` with [`panics_are_caught`] true on this thread, catching its panic.
fn catch_reader_panic<T>(f: impl FnOnce() -> T) -> std::thread::Result<T> {
    GUARDED.with(|g| g.set(g.get() + 1));
    let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(f));
    GUARDED.with(|g| g.set(g.get() - 1));
    outcome
}

/// Calls `f`, turning a panic into [`reader_panic`]'s error for `path`.
pub(crate) fn guarded<T>(path: &Path, f: impl FnOnce() -> Result<T>) -> Result<T> {
    catch_reader_panic(f).unwrap_or_else(|payload| Err(reader_panic(path, payload.as_ref())))
}

/// What the prefetch thread sends: a batch or error, then `End` when the stream is done.
enum Message {
    Item(Result<RecordBatch>),
    End,
}

/// Reads `stream` on a background thread, keeping up to `depth` batches ready,
/// so decoding the file and normalizing its batches run on two cores at once.
/// The thread stops when the stream ends, errs, or the consumer goes away.
///
/// A panic on the thread, or a thread that stops without saying the stream is
/// done, is an error naming the file, never a silent end of the stream.
pub fn prefetch(stream: CatalogBatches, depth: usize) -> CatalogBatches {
    let (sender, receiver) = std::sync::mpsc::sync_channel(depth.max(1));
    let CatalogBatches {
        path,
        schema,
        batches,
    } = stream;
    let thread_path = path.clone();
    std::thread::spawn(move || feed(batches, &sender, &thread_path));
    CatalogBatches {
        path: path.clone(),
        schema,
        batches: Box::new(Prefetched {
            receiver,
            path,
            finished: false,
        }),
    }
}

/// The body of the prefetch thread.
fn feed(
    batches: Box<dyn Iterator<Item = Result<RecordBatch>> + Send>,
    sender: &SyncSender<Message>,
    path: &Path,
) {
    let outcome = catch_reader_panic(|| {
        for batch in batches {
            let failed = batch.is_err();
            if sender.send(Message::Item(batch)).is_err() || failed {
                return;
            }
        }
        // The consumer may be gone; then nobody needs the end marker.
        let _ = sender.send(Message::End);
    });
    if let Err(payload) = outcome {
        let _ = sender.send(Message::Item(Err(reader_panic(path, payload.as_ref()))));
    }
}

/// The consumer side of [`prefetch`].
struct Prefetched {
    receiver: Receiver<Message>,
    path: PathBuf,
    finished: bool,
}

impl Iterator for Prefetched {
    type Item = Result<RecordBatch>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.finished {
            return None;
        }
        match self.receiver.recv() {
            Ok(Message::Item(Ok(batch))) => Some(Ok(batch)),
            Ok(Message::Item(Err(e))) => {
                self.finished = true;
                Some(Err(e))
            }
            Ok(Message::End) => {
                self.finished = true;
                None
            }
            Err(_) => {
                self.finished = true;
                Some(Err(Error::format(
                    &self.path,
                    "the reader stopped before the end of the file without saying why",
                )))
            }
        }
    }
}
