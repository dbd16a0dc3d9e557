//! A table being written either as Parquet (every output a user reads) or as
//! an Arrow IPC stream (the parts of a build in bounded memory, which are
//! written once and read back once by the join). The streams are LZ4-framed
//! ([`spill_options`]): uncompressed, the parts of a 1e8-row build outgrew
//! 50 GB of disk; LZ4 costs little CPU against Parquet's encodings.
//!
//! The IPC *stream* format is used rather than the IPC file format because the
//! status columns are dictionaries built per batch, and only the stream format
//! lets a later batch replace a dictionary.

use std::fs::File;
use std::io::{BufReader, BufWriter};
use std::path::Path;

use arrow::array::RecordBatch;
use arrow::datatypes::SchemaRef;
use arrow::error::ArrowError;
use arrow::ipc::CompressionType;
use arrow::ipc::reader::StreamReader;
use arrow::ipc::writer::{IpcWriteOptions, StreamWriter};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use super::atomic::AtomicFile;
use super::parquet::ParquetOutput;
use crate::error::{Error, Result};

/// How a table is stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TableFormat {
    /// Snappy-compressed Parquet with the run's key-value metadata.
    Parquet,
    /// An LZ4-framed Arrow IPC stream ([`spill_options`]), without metadata.
    ArrowStream,
}

impl TableFormat {
    /// The file name of table `stem` (e.g. `objects`) in this format.
    pub fn file_name(self, stem: &str) -> String {
        match self {
            TableFormat::Parquet => format!("{stem}.parquet"),
            TableFormat::ArrowStream => format!("{stem}.arrows"),
        }
    }
}

/// How the build's own Arrow streams (parts and routed rows) are written:
/// LZ4-framed batches, which any Arrow IPC reader with LZ4 support reads.
pub fn spill_options() -> IpcWriteOptions {
    IpcWriteOptions::default()
        .try_with_compression(Some(CompressionType::LZ4_FRAME))
        .expect("LZ4 is built in")
}

/// A table file being written; it appears under its name only on [`finish`](Self::finish).
pub enum TableOutput {
    /// A Parquet output.
    Parquet(ParquetOutput),
    /// An Arrow IPC stream output.
    ArrowStream {
        /// Removes the temporary file unless finished.
        guard: AtomicFile,
        /// The stream writer.
        writer: StreamWriter<BufWriter<File>>,
        /// Rows written so far.
        rows: u64,
    },
}

impl TableOutput {
    /// Starts writing `path` in `format` with `schema`; `metadata` goes into a
    /// Parquet file's footer and is not kept by an Arrow stream.
    ///
    /// # Errors
    /// An I/O error if the temporary file cannot be created.
    pub fn create(
        format: TableFormat,
        path: &Path,
        schema: SchemaRef,
        metadata: Vec<(String, String)>,
    ) -> Result<TableOutput> {
        match format {
            TableFormat::Parquet => Ok(TableOutput::Parquet(ParquetOutput::create(
                path, schema, metadata,
            )?)),
            TableFormat::ArrowStream => {
                let (guard, file) = AtomicFile::create(path)?;
                let writer = StreamWriter::try_new_with_options(file, &schema, spill_options())
                    .map_err(|e| Error::columnar(path, e))?;
                Ok(TableOutput::ArrowStream {
                    guard,
                    writer,
                    rows: 0,
                })
            }
        }
    }

    /// Appends a batch.
    ///
    /// # Errors
    /// A columnar error if the batch does not fit the schema or cannot be written.
    pub fn write(&mut self, batch: &RecordBatch) -> Result<()> {
        match self {
            TableOutput::Parquet(w) => w.write(batch),
            TableOutput::ArrowStream {
                guard,
                writer,
                rows,
            } => {
                *rows += batch.num_rows() as u64;
                writer
                    .write(batch)
                    .map_err(|e| Error::columnar(guard.path(), e))
            }
        }
    }

    /// Closes the file and renames it into place; returns the rows written.
    ///
    /// # Errors
    /// A columnar or I/O error; the temporary file is then removed.
    pub fn finish(self) -> Result<u64> {
        match self {
            TableOutput::Parquet(w) => w.finish(),
            TableOutput::ArrowStream {
                guard,
                writer,
                rows,
            } => {
                let path = guard.path().to_path_buf();
                let mut file = writer.into_inner().map_err(|e| Error::columnar(&path, e))?;
                std::io::Write::flush(&mut file).map_err(|e| Error::io(&path, e))?;
                drop(file);
                guard.commit()?;
                Ok(rows)
            }
        }
    }
}

/// The batches of a table file, read `batch_rows` at a time from Parquet (an
/// Arrow stream gives back the batches as written).
pub type TableBatches = Box<dyn Iterator<Item = std::result::Result<RecordBatch, ArrowError>>>;

/// Opens table file `path` in `format`; returns its schema and its batches.
///
/// # Errors
/// An I/O error naming the file, or a columnar error if it is not a table.
pub fn read_table(
    format: TableFormat,
    path: &Path,
    batch_rows: usize,
) -> Result<(SchemaRef, TableBatches)> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    match format {
        TableFormat::Parquet => {
            let reader = ParquetRecordBatchReaderBuilder::try_new(file)
                .and_then(|b| b.with_batch_size(batch_rows).build())
                .map_err(|e| Error::columnar(path, e))?;
            let schema = arrow::record_batch::RecordBatchReader::schema(&reader);
            Ok((schema, Box::new(reader)))
        }
        TableFormat::ArrowStream => {
            let reader = StreamReader::try_new(BufReader::new(file), None)
                .map_err(|e| Error::columnar(path, e))?;
            Ok((reader.schema(), Box::new(reader)))
        }
    }
}
