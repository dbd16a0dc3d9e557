//! [`BatchSource`]: the record batches an export writer reads, once or more.
//!
//! The FITS and VOTable writers read their input twice: once to choose each
//! column's form (string widths, null markers, datatypes), once to write. An
//! in-memory slice of batches can be read any number of times; a
//! [`ParquetBatches`] reads a written table back from its file a chunk at a
//! time on every pass, so an export of a table of any size holds one chunk.

use std::fs::File;
use std::path::{Path, PathBuf};

use arrow::array::RecordBatch;
use arrow::datatypes::SchemaRef;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use crate::error::{Error, Result};

/// Record batches that can be read in order, as many times as a writer needs.
pub trait BatchSource {
    /// Calls `f` on every batch, in order; stops at the first error.
    ///
    /// # Errors
    /// The first error of `f`, or of reading the batches.
    fn for_each_batch(&self, f: &mut dyn FnMut(&RecordBatch) -> Result<()>) -> Result<()>;
}

impl BatchSource for [RecordBatch] {
    fn for_each_batch(&self, f: &mut dyn FnMut(&RecordBatch) -> Result<()>) -> Result<()> {
        self.iter().try_for_each(f)
    }
}

impl<const N: usize> BatchSource for [RecordBatch; N] {
    fn for_each_batch(&self, f: &mut dyn FnMut(&RecordBatch) -> Result<()>) -> Result<()> {
        self.as_slice().for_each_batch(f)
    }
}

impl BatchSource for Vec<RecordBatch> {
    fn for_each_batch(&self, f: &mut dyn FnMut(&RecordBatch) -> Result<()>) -> Result<()> {
        self.as_slice().for_each_batch(f)
    }
}

/// A transformation applied to every batch read back (e.g. dictionary
/// columns cast to plain text for an export).
pub type BatchTransform = fn(&RecordBatch) -> Result<RecordBatch>;

/// A Parquet file read back `batch_rows` rows at a time on every pass, each
/// batch passed through a [`BatchTransform`].
pub struct ParquetBatches {
    path: PathBuf,
    batch_rows: usize,
    transform: BatchTransform,
    schema: SchemaRef,
}

impl ParquetBatches {
    /// Opens `path` to read it in batches of `batch_rows` rows (at least 1),
    /// each transformed by `transform`.
    ///
    /// # Errors
    /// The file cannot be opened or is not Parquet; the transform fails on an
    /// empty batch of the file's schema.
    pub fn open(path: &Path, batch_rows: usize, transform: BatchTransform) -> Result<Self> {
        let file = File::open(path).map_err(|e| Error::io(path, e))?;
        let builder =
            ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| Error::columnar(path, e))?;
        let empty = RecordBatch::new_empty(builder.schema().clone());
        let schema = transform(&empty)?.schema();
        Ok(ParquetBatches {
            path: path.to_path_buf(),
            batch_rows: batch_rows.max(1),
            transform,
            schema,
        })
    }

    /// The schema of the transformed batches.
    pub fn schema(&self) -> &SchemaRef {
        &self.schema
    }
}

impl BatchSource for ParquetBatches {
    fn for_each_batch(&self, f: &mut dyn FnMut(&RecordBatch) -> Result<()>) -> Result<()> {
        let path = &self.path;
        let file = File::open(path).map_err(|e| Error::io(path, e))?;
        let reader = ParquetRecordBatchReaderBuilder::try_new(file)
            .and_then(|b| b.with_batch_size(self.batch_rows).build())
            .map_err(|e| Error::columnar(path, e))?;
        for batch in reader {
            let batch = batch.map_err(|e| Error::columnar(path, e))?;
            f(&(self.transform)(&batch)?)?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use std::sync::Arc;

    use arrow::array::{Array, Int64Array};
    use arrow::datatypes::{DataType, Field, Schema};
    use parquet::arrow::ArrowWriter;

    use super::*;

    fn numbers(values: Vec<i64>) -> RecordBatch {
        let schema = Arc::new(Schema::new(vec![Field::new("n", DataType::Int64, false)]));
        RecordBatch::try_new(schema, vec![Arc::new(Int64Array::from(values))]).unwrap()
    }

    fn doubled(batch: &RecordBatch) -> Result<RecordBatch> {
        let n = batch
            .column(0)
            .as_any()
            .downcast_ref::<Int64Array>()
            .unwrap();
        Ok(numbers(n.iter().map(|v| v.unwrap() * 2).collect()))
    }

    #[test]
    fn a_parquet_file_is_read_in_chunks_on_every_pass_and_transformed() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("n.parquet");
        let batch = numbers((0..10).collect());
        let mut w =
            ArrowWriter::try_new(File::create(&path).unwrap(), batch.schema(), None).unwrap();
        w.write(&batch).unwrap();
        w.close().unwrap();

        let source = ParquetBatches::open(&path, 4, doubled).unwrap();
        assert_eq!(source.schema().field(0).name(), "n");
        for _pass in 0..2 {
            let mut seen = Vec::new();
            let mut sizes = Vec::new();
            source
                .for_each_batch(&mut |b| {
                    sizes.push(b.num_rows());
                    let n = b.column(0).as_any().downcast_ref::<Int64Array>().unwrap();
                    seen.extend(n.iter().map(|v| v.unwrap()));
                    Ok(())
                })
                .unwrap();
            assert_eq!(sizes, vec![4, 4, 2]);
            assert_eq!(seen, (0..10).map(|v| v * 2).collect::<Vec<_>>());
        }
    }

    #[test]
    fn the_first_error_stops_the_pass() {
        let batches = vec![numbers(vec![1]), numbers(vec![2]), numbers(vec![3])];
        let mut calls = 0;
        let e = batches
            .for_each_batch(&mut |_| {
                calls += 1;
                match calls {
                    2 => Err(Error::Usage("stop".into())),
                    _ => Ok(()),
                }
            })
            .unwrap_err();
        assert_eq!(calls, 2);
        assert!(e.to_string().contains("stop"), "{e}");
    }

    #[test]
    fn a_missing_file_names_its_path() {
        let e = ParquetBatches::open(Path::new("/nonexistent/t.parquet"), 8, |b| Ok(b.clone()))
            .err()
            .unwrap();
        assert!(e.to_string().contains("/nonexistent/t.parquet"), "{e}");
    }
}
