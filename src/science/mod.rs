//! The science layer: what the SED tables say about each object.
//!
//! It reads an output folder's `objects.parquet` and its band table
//! ([`sed_table`]), and computes per object ([`compute`]):
//!
//! - the infrared spectral index α and its Greene et al. 1994 class, with bounds
//!   from upper limits ([`alpha`]);
//! - A_V (field, per-object table, or from a colour) and dereddened fluxes,
//!   colours and α with CCM89 / O'Donnell 1994 and Xue et al. 2016 or
//!   Indebetouw et al. 2005 beyond Ks ([`extinction`]);
//! - a photosphere anchored on one band and the excess over it, infrared and
//!   ultraviolet/blue ([`photosphere`]);
//! - colours bluer minus redder with errors and bounds ([`colour`]), Strömgren
//!   b−y, m1, c1 and the H-alpha index r − Hα against r − i.
//!
//! The results go to `science.parquet` ([`table`]), written by `fluxloom science
//! FOLDER` or by `build` when the plan has a `[science]` table ([`settings`]);
//! [`figures`] draws SEDs, colour–colour and colour–magnitude diagrams.

pub mod alpha;
pub mod colour;
pub mod compute;
pub mod extinction;
pub mod figures;
pub mod photosphere;
pub mod sed_table;
pub mod settings;
pub mod table;

use std::path::Path;

pub use settings::ScienceSettings;

use crate::error::{Error, Result};
use crate::output::staging::Staging;

/// Computes the science of the output folder `folder` and writes `out`
/// (normally `folder/science.parquet`). Returns the number of objects.
///
/// # Errors
/// Reading errors of the SED tables, settings naming bands the field lacks,
/// and writing errors.
pub fn run(folder: &Path, out: &Path, settings: &ScienceSettings) -> Result<u64> {
    let seds = sed_table::FieldSeds::read(folder)?;
    let sci = compute::compute(&seds, settings)?;
    table::write_science(out, &seds, &sci)
}

/// Writes `science.parquet` into a build's staging folder, from the tables
/// already staged there, so it is committed with them.
///
/// # Errors
/// As [`run`].
pub fn write_into(staging: &mut Staging, settings: &ScienceSettings) -> Result<u64> {
    let out = staging.path(table::SCIENCE_FILE);
    let dir = out
        .parent()
        .ok_or_else(|| Error::Usage("staging folder has no parent".into()))?
        .to_path_buf();
    run(&dir, &out, settings)
}
