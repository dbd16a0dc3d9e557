//! Reading survey catalogs: the survey schema, one reader per file format,
//! and the normalizer that turns raw columns into calibrated source tables.
//!
//! Every reader yields a [`CatalogBatches`]: the file's own columns as Arrow
//! record batches, untouched except for format-level decoding (FITS scaling and
//! nulls, VOTable nulls). The [`normalize`] step applies a survey schema to them.

pub mod csv;
pub mod fits;
pub mod normalize;
pub mod parquet;
pub mod schema;
pub mod votable;

use std::path::Path;

use arrow::array::RecordBatch;
use arrow::datatypes::SchemaRef;

use crate::error::Result;

/// Default number of rows per record batch produced by the readers.
pub const DEFAULT_BATCH_ROWS: usize = 65_536;

/// A stream of record batches read from one catalog file, with the file's Arrow schema.
pub struct CatalogBatches {
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
pub fn open(path: &Path, format: &schema::FileFormat, batch_rows: usize) -> Result<CatalogBatches> {
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

/// Reads `stream` on a background thread, keeping up to `depth` batches ready,
/// so decoding the file and normalizing its batches run on two cores at once.
/// The thread stops when the stream ends, errs, or the consumer goes away.
pub fn prefetch(stream: CatalogBatches, depth: usize) -> CatalogBatches {
    let (sender, receiver) = std::sync::mpsc::sync_channel(depth.max(1));
    let CatalogBatches { schema, batches } = stream;
    std::thread::spawn(move || {
        for batch in batches {
            let failed = batch.is_err();
            if sender.send(batch).is_err() || failed {
                break;
            }
        }
    });
    CatalogBatches {
        schema,
        batches: Box::new(receiver.into_iter()),
    }
}
