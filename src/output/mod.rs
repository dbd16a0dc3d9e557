//! Writing results: Parquet files that are written atomically and carry their
//! own description (band table, schema or plan) in key-value metadata.

pub mod atomic;
pub mod batches;
pub mod csv;
pub mod fits;
pub mod journal;
pub mod kway;
pub mod merge;
pub mod parquet;
pub mod run_record;
pub mod staging;
pub mod table_file;
pub mod tables;
pub mod votable;
