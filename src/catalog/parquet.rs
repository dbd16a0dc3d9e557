//! Parquet catalogs.
//!
//! [`read_parquet`] streams a Parquet file's row groups as Arrow record batches
//! with the file's own column types. The Parquet library can panic on a corrupt
//! file; every call into it is guarded so that a panic becomes an error naming
//! the file, and the rows read are checked against the row count of the file's
//! metadata.

use std::fs::File;
use std::path::{Path, PathBuf};

use arrow::array::RecordBatch;
use parquet::arrow::arrow_reader::{ParquetRecordBatchReader, ParquetRecordBatchReaderBuilder};

use super::{CatalogBatches, DeclaredRows, guarded};
use crate::error::{Error, Result};

/// Opens `path` as Parquet and streams its rows.
///
/// # Errors
/// An I/O error if the file cannot be opened, and an [`Error::Format`] if it is
/// not a regular file, is empty, truncated or not Parquet; while iterating, an
/// [`Error::Format`] for a row group that cannot be decoded or a row count that
/// differs from the metadata's.
pub fn read_parquet(path: &Path, batch_rows: usize) -> Result<CatalogBatches> {
    super::check_regular_file(path)?;
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let len = file.metadata().map_err(|e| Error::io(path, e))?.len();
    if len == 0 {
        return Err(Error::format(
            path,
            "the file is empty: expected a Parquet file",
        ));
    }
    let (schema, reader, declared) = guarded(path, || {
        let builder = ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| {
            Error::format(
                path,
                format!("not a readable Parquet file (truncated or another format?): {e}"),
            )
        })?;
        let declared = builder.metadata().file_metadata().num_rows();
        let schema = builder.schema().clone();
        let reader = builder
            .with_batch_size(batch_rows.max(1))
            .build()
            .map_err(|e| Error::columnar(path, e))?;
        Ok((schema, reader, declared))
    })?;
    let declared = u64::try_from(declared).map_err(|_| {
        Error::format(
            path,
            format!("the metadata declares {declared} rows, expected 0 or more"),
        )
    })?;
    let batches = Guarded {
        reader,
        path: path.to_path_buf(),
        done: false,
    };
    Ok(CatalogBatches {
        path: path.to_path_buf(),
        schema,
        batches: Box::new(DeclaredRows::new(
            batches,
            path,
            declared,
            "in its Parquet metadata",
        )),
    })
}

/// The Parquet batch reader, with every step guarded against panics.
struct Guarded {
    reader: ParquetRecordBatchReader,
    path: PathBuf,
    done: bool,
}

impl Iterator for Guarded {
    type Item = Result<RecordBatch>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.done {
            return None;
        }
        let path = self.path.clone();
        let reader = &mut self.reader;
        let next = guarded(&path, || {
            Ok(reader.next().map(|b| {
                b.map_err(|e| Error::format(&path, format!("cannot decode a row group: {e}")))
            }))
        });
        let item = match next {
            Ok(None) => None,
            Ok(Some(item)) => Some(item),
            Err(e) => Some(Err(e)),
        };
        if !matches!(item, Some(Ok(_))) {
            self.done = true;
        }
        item
    }
}
