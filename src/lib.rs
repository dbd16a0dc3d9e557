//! # fluxloom
//!
//! Gathers what many surveys measured in one patch of sky into one spectral
//! energy distribution per source.
//!
//! The pieces, in the order data flows through them:
//!
//! - [`photometry`]: the band library (zero points, wavelengths and their
//!   published sources) and magnitude / flux-density conversions.
//! - [`catalog`]: survey schemas, readers for CSV, Parquet, FITS binary tables
//!   and VOTable, and the normalizer that turns a survey's own columns into a
//!   calibrated source table (`flux_jy`, `flux_err_jy`, `ulim_jy`, status).
//! - [`output`]: Parquet writing with atomic renames and self-describing metadata.
//! - [`plot`]: SVG and PNG figures (axes, points, limits, lines, legends).
//! - [`report`]: the match audit of an output folder, as one HTML page and JSON.
//! - [`cli`]: one module per command of the `fluxloom` binary.
#![warn(missing_docs)]

pub mod catalog;
pub mod cli;
pub mod crossmatch;
pub mod demo;
pub mod error;
pub mod memory;
pub mod output;
pub mod photometry;
pub mod plan;
pub mod plot;
pub mod report;
pub mod rng;
pub mod science;
pub mod sed;
pub mod sky;

pub use error::{Error, Result};
