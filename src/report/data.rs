//! The output folder as the report sees it: the columns it needs from
//! `objects.parquet`, `links.parquet`, `photometry.parquet`, the optional
//! `science.parquet` and `hard_sources.parquet`, and `run.json`.
//!
//! Only column names are relied on, never row order or the matcher's types:
//! every column is cast to text, float or boolean on reading, so a change of
//! integer width or dictionary encoding in the writer does not break the report.

use std::fs::File;
use std::path::{Path, PathBuf};

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::{DataType, Float64Type};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

use crate::error::{Error, Result};

/// One Parquet table read whole, with the file it came from.
pub struct Table {
    /// The file, for error messages.
    pub path: PathBuf,
    /// All rows in one batch.
    pub batch: RecordBatch,
}

impl Table {
    /// Reads a whole Parquet file.
    ///
    /// # Errors
    /// I/O and format errors naming the file.
    pub fn read(path: &Path) -> Result<Table> {
        let file = File::open(path).map_err(|e| Error::io(path, e))?;
        let reader = ParquetRecordBatchReaderBuilder::try_new(file)
            .map_err(|e| Error::format(path, e.to_string()))?
            .build()
            .map_err(|e| Error::format(path, e.to_string()))?;
        let schema = arrow::array::RecordBatchReader::schema(&reader);
        let mut batches = Vec::new();
        for b in reader {
            batches.push(b.map_err(|e| Error::columnar(path, e))?);
        }
        let batch = arrow::compute::concat_batches(&schema, &batches)
            .map_err(|e| Error::columnar(path, e))?;
        Ok(Table {
            path: path.to_path_buf(),
            batch,
        })
    }

    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.batch.num_rows()
    }

    /// True when the table has column `name`.
    pub fn has(&self, name: &str) -> bool {
        self.batch.column_by_name(name).is_some()
    }

    /// Column names, in file order.
    pub fn names(&self) -> Vec<String> {
        self.batch
            .schema()
            .fields()
            .iter()
            .map(|f| f.name().clone())
            .collect()
    }

    fn column(&self, name: &str, expected: &str, to: &DataType) -> Result<arrow::array::ArrayRef> {
        let col = self.batch.column_by_name(name).ok_or_else(|| {
            Error::format(
                &self.path,
                format!("column \"{name}\" is missing (expected {expected})"),
            )
        })?;
        arrow::compute::cast(col, to).map_err(|_| {
            Error::format(
                &self.path,
                format!(
                    "column \"{name}\": expected {expected}, found type {}",
                    col.data_type()
                ),
            )
        })
    }

    /// Column `name` as text (null stays `None`).
    ///
    /// # Errors
    /// A format error naming the file and column when it is missing.
    pub fn text(&self, name: &str) -> Result<Vec<Option<String>>> {
        let col = self.column(name, "text", &DataType::Utf8)?;
        let s = col.as_string::<i32>();
        Ok((0..s.len())
            .map(|i| s.is_valid(i).then(|| s.value(i).to_string()))
            .collect())
    }

    /// Column `name` as floats (null and NaN become `None`).
    ///
    /// # Errors
    /// A format error naming the file and column when it is missing or not numeric.
    pub fn float(&self, name: &str) -> Result<Vec<Option<f64>>> {
        let col = self.column(name, "numbers", &DataType::Float64)?;
        let a = col.as_primitive::<Float64Type>();
        Ok((0..a.len())
            .map(|i| (a.is_valid(i) && !a.value(i).is_nan()).then(|| a.value(i)))
            .collect())
    }

    /// Column `name` as booleans (null becomes false).
    ///
    /// # Errors
    /// A format error naming the file and column when it is missing or not boolean.
    pub fn boolean(&self, name: &str) -> Result<Vec<bool>> {
        let col = self.column(name, "booleans", &DataType::Boolean)?;
        let a = col.as_boolean();
        Ok((0..a.len()).map(|i| a.is_valid(i) && a.value(i)).collect())
    }
}

/// Everything the report reads from one output folder.
pub struct OutputFolder {
    /// The folder.
    pub dir: PathBuf,
    /// `run.json`, parsed.
    pub run: serde_json::Value,
    /// `objects.parquet`.
    pub objects: Table,
    /// `links.parquet`.
    pub links: Table,
    /// `photometry.parquet`.
    pub photometry: Table,
    /// `science.parquet`, when present.
    pub science: Option<Table>,
    /// `hard_sources.parquet`, when present (schema in [`super::cards`]).
    pub hard_sources: Option<Table>,
}

impl OutputFolder {
    /// Reads the tables and `run.json` of an output folder.
    ///
    /// # Errors
    /// A missing or unreadable file, named.
    pub fn read(dir: &Path) -> Result<OutputFolder> {
        let run_path = dir.join("run.json");
        let text = std::fs::read_to_string(&run_path).map_err(|e| Error::io(&run_path, e))?;
        let run: serde_json::Value = serde_json::from_str(&text)
            .map_err(|e| Error::format(&run_path, format!("not JSON: {e}")))?;
        let optional = |name: &str| -> Result<Option<Table>> {
            let p = dir.join(name);
            if p.exists() {
                Table::read(&p).map(Some)
            } else {
                Ok(None)
            }
        };
        Ok(OutputFolder {
            dir: dir.to_path_buf(),
            run,
            objects: Table::read(&dir.join("objects.parquet"))?,
            links: Table::read(&dir.join("links.parquet"))?,
            photometry: Table::read(&dir.join("photometry.parquet"))?,
            science: optional("science.parquet")?,
            hard_sources: optional("hard_sources.parquet")?,
        })
    }

    /// Catalog names in plan order, from `run.json` (`inputs[].catalog`).
    pub fn catalogs(&self) -> Vec<String> {
        self.run["inputs"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|i| i["catalog"].as_str().map(str::to_string))
                    .collect()
            })
            .unwrap_or_default()
    }

    /// Name of catalog `index` (as `run.json` numbers them), or the number itself.
    pub fn catalog_name(&self, index: &serde_json::Value) -> String {
        match index.as_u64() {
            Some(i) => self
                .catalogs()
                .get(i as usize)
                .cloned()
                .unwrap_or_else(|| i.to_string()),
            None => index.as_str().unwrap_or("?").to_string(),
        }
    }
}
