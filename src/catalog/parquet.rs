//! Parquet catalogs.
//!
//! [`read_parquet`] streams a Parquet file's row groups as Arrow record batches
//! with the file's own column types.

use std::fs::File;
use std::path::{Path, PathBuf};

use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use super::CatalogBatches;
use crate::error::{Error, Result};

/// Opens `path` as Parquet and streams its rows.
///
/// # Errors
/// An I/O error if the file cannot be opened, and an [`Error::Format`] if it is
/// empty, truncated or not Parquet.
pub fn read_parquet(path: &Path, batch_rows: usize) -> Result<CatalogBatches> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let len = file.metadata().map_err(|e| Error::io(path, e))?.len();
    if len == 0 {
        return Err(Error::format(
            path,
            "the file is empty: expected a Parquet file",
        ));
    }
    let builder = ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| {
        Error::format(
            path,
            format!("not a readable Parquet file (truncated or another format?): {e}"),
        )
    })?;
    let schema = builder.schema().clone();
    let reader = builder
        .with_batch_size(batch_rows)
        .build()
        .map_err(|e| Error::columnar(path, e))?;
    let owned: PathBuf = path.to_path_buf();
    let batches = reader.map(move |b| {
        b.map_err(|e| Error::format(&owned, format!("cannot decode a row group: {e}")))
    });
    Ok(CatalogBatches {
        schema,
        batches: Box::new(batches),
    })
}
