//! Parquet output with self-describing key-value metadata.
//!
//! [`ParquetOutput`] streams record batches into a Parquet file under a
//! temporary name and renames it into place on [`ParquetOutput::finish`]; the
//! key-value pairs given at creation (band table, schema, plan, tool version)
//! travel in the file footer so a file explains itself. The same pairs are put
//! into the Arrow schema metadata stored in the file, so Arrow readers (e.g.
//! `pyarrow.parquet.read_table(f).schema.metadata`) show them too.

use std::fs::File;
use std::io::BufWriter;
use std::path::Path;
use std::sync::Arc;

use arrow::array::RecordBatch;
use arrow::datatypes::SchemaRef;
use parquet::arrow::ArrowWriter;
use parquet::basic::Compression;
use parquet::file::metadata::KeyValue;
use parquet::file::properties::WriterProperties;

use super::atomic::AtomicFile;
use crate::error::{Error, Result};

/// Metadata key holding the fluxloom version that wrote a file.
pub const META_VERSION: &str = "fluxloom.version";

/// Rows per Parquet row group: a writer holds at most one row group of encoded
/// columns in memory, and the groups fall at the same rows whatever produced them.
pub const ROW_GROUP_ROWS: usize = 65_536;

/// A Parquet file being written (see the module documentation).
pub struct ParquetOutput {
    guard: AtomicFile,
    writer: ArrowWriter<BufWriter<File>>,
    rows: u64,
}

impl ParquetOutput {
    /// Starts writing `path` with `schema`; `metadata` pairs go into the footer,
    /// together with the fluxloom version.
    ///
    /// # Errors
    /// An I/O error if the temporary file cannot be created.
    pub fn create(
        path: &Path,
        schema: SchemaRef,
        metadata: Vec<(String, String)>,
    ) -> Result<ParquetOutput> {
        let (guard, file) = AtomicFile::create(path)?;
        let mut kv: Vec<KeyValue> = vec![KeyValue::new(
            META_VERSION.to_string(),
            env!("CARGO_PKG_VERSION").to_string(),
        )];
        kv.extend(metadata.into_iter().map(|(k, v)| KeyValue::new(k, v)));
        // The pairs also go into the Arrow schema metadata, so that readers which
        // rebuild the Arrow schema from the stored one (`ARROW:schema`) show them.
        let mut arrow_metadata = schema.metadata().clone();
        arrow_metadata.extend(
            kv.iter()
                .map(|k| (k.key.clone(), k.value.clone().unwrap_or_default())),
        );
        let schema = Arc::new(schema.as_ref().clone().with_metadata(arrow_metadata));
        let props = WriterProperties::builder()
            .set_compression(Compression::SNAPPY)
            .set_max_row_group_row_count(Some(ROW_GROUP_ROWS))
            .set_key_value_metadata(Some(kv))
            .build();
        let writer = ArrowWriter::try_new(file, schema, Some(props))
            .map_err(|e| Error::columnar(path, e))?;
        Ok(ParquetOutput {
            guard,
            writer,
            rows: 0,
        })
    }

    /// Appends a batch.
    ///
    /// # Errors
    /// A columnar error if the batch does not fit the schema or cannot be written.
    pub fn write(&mut self, batch: &RecordBatch) -> Result<()> {
        self.rows += batch.num_rows() as u64;
        self.writer
            .write(batch)
            .map_err(|e| Error::columnar(self.guard.path(), e))
    }

    /// Closes the file and renames it into place; returns the number of rows written.
    ///
    /// # Errors
    /// A columnar or I/O error; the temporary file is then removed.
    pub fn finish(self) -> Result<u64> {
        let path = self.guard.path().to_path_buf();
        let mut file = self
            .writer
            .into_inner()
            .map_err(|e| Error::columnar(&path, e))?;
        std::io::Write::flush(&mut file).map_err(|e| Error::io(&path, e))?;
        drop(file);
        self.guard.commit()?;
        Ok(self.rows)
    }
}

/// Reads the key-value metadata of a Parquet file's footer.
///
/// # Errors
/// An I/O or format error if the file cannot be opened as Parquet.
pub fn read_metadata(path: &Path) -> Result<Vec<(String, String)>> {
    use parquet::file::reader::{FileReader, SerializedFileReader};
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let reader = SerializedFileReader::new(file).map_err(|e| Error::format(path, e.to_string()))?;
    Ok(reader
        .metadata()
        .file_metadata()
        .key_value_metadata()
        .map(|kv| {
            kv.iter()
                .map(|k| (k.key.clone(), k.value.clone().unwrap_or_default()))
                .collect()
        })
        .unwrap_or_default())
}
