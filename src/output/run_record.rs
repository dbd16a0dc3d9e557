//! `run.json`: what a build read, how it matched, what it flagged and wrote.
//!
//! The record holds no clock times or machine details, so the same inputs give
//! the same file; timings go to the terminal summary instead.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::catalog::normalize::NormalizeReport;
use crate::crossmatch::engine::MatchStats;
use crate::crossmatch::false_matches::FalseMatchEstimate;
use crate::crossmatch::systematics::{CatalogOffset, FloorInForce, floors_in_force, with_floors};
use crate::crossmatch::{MatchConfig, MatchResult};
use crate::error::{Error, Result};
use crate::plan::Plan;

/// One input catalog.
#[derive(Debug, Clone, Serialize)]
pub struct InputRecord {
    /// Catalog name.
    pub catalog: String,
    /// The catalog file.
    pub file: String,
    /// The survey schema file.
    pub schema: String,
    /// SHA-256 of the catalog file's bytes, hex.
    pub sha256: String,
    /// Size of the catalog file.
    pub bytes: u64,
    /// Rows read, kept and skipped, bands by status.
    pub normalize: NormalizeReport,
}

/// One output file.
#[derive(Debug, Clone, Serialize)]
pub struct OutputRecord {
    /// File name inside the output folder.
    pub file: String,
    /// Rows written.
    pub rows: u64,
}

/// Per band of each catalog: SED points by status.
#[derive(Debug, Clone, Serialize)]
pub struct SedRecord {
    /// Catalog name.
    pub catalog: String,
    /// Band id.
    pub band: String,
    /// Points per status.
    pub by_status: BTreeMap<String, u64>,
}

/// The whole record.
#[derive(Debug, Clone, Serialize)]
pub struct RunRecord {
    /// fluxloom version.
    pub fluxloom_version: String,
    /// Field name.
    pub field: String,
    /// The plan file as given.
    pub plan_file: String,
    /// The plan's text.
    pub plan: String,
    /// The match settings in force (with the floors of `floors`).
    pub match_settings: MatchConfig,
    /// Each catalog's systematic floor in the match: value, and whether it
    /// was fixed, measured against the astrometric reference, or neither (0).
    pub floors: Vec<FloorInForce>,
    /// The astrometric reference catalog, if any.
    pub astrometric_reference: Option<String>,
    /// Inputs with checksums and read counts.
    pub inputs: Vec<InputRecord>,
    /// Match counts (timings left out).
    pub matching: MatchStats,
    /// Per catalog whose schema marks forced-photometry rows (`[forced]`), the
    /// rows left out because no row that is not forced is in their object:
    /// forced rows never make an object alone.
    pub forced_without_counterpart: BTreeMap<String, u64>,
    /// Astrometric offsets against the reference.
    pub offsets: Vec<CatalogOffset>,
    /// False-match estimates per catalog pair.
    pub false_matches: Vec<FalseMatchEstimate>,
    /// SED points per band and status.
    pub sed_points: Vec<SedRecord>,
    /// Files written (run.json itself aside).
    pub outputs: Vec<OutputRecord>,
    /// The part of the sky written, when a run wrote only some cells.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub subset: Option<SubsetRecord>,
}

/// The sky cells a subset run wrote, for `fluxloom merge` to check the parts.
#[derive(Debug, Clone, PartialEq, Serialize, serde::Deserialize)]
pub struct SubsetRecord {
    /// HEALPix order of the cells.
    pub order: u8,
    /// The cells asked for (NESTED indices), ascending.
    pub cells: Vec<u64>,
    /// Of those, the cells holding sources.
    pub cells_with_sources: usize,
    /// Cells holding sources in the whole input.
    pub cells_with_sources_in_all: usize,
}

impl RunRecord {
    /// Assembles the record of a build.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        plan: &Plan,
        inputs: Vec<InputRecord>,
        result: &MatchResult,
        offsets: Vec<CatalogOffset>,
        false_matches: Vec<FalseMatchEstimate>,
        sed_points: Vec<SedRecord>,
        outputs: Vec<OutputRecord>,
    ) -> RunRecord {
        // The floors follow from the plan and the offsets' measurement alone, as
        // in the build's own choice (`cli::build::prepare`).
        let names: Vec<String> = plan.catalogs.iter().map(|c| c.name.clone()).collect();
        let floors = floors_in_force(&names, &plan.matching, plan.astrometric_reference, &offsets);
        RunRecord {
            fluxloom_version: env!("CARGO_PKG_VERSION").to_string(),
            field: plan.field.clone(),
            plan_file: plan.path.display().to_string(),
            plan: plan.text.clone(),
            match_settings: with_floors(&plan.matching, &floors),
            floors,
            astrometric_reference: plan
                .astrometric_reference
                .map(|i| plan.catalogs[i].name.clone()),
            inputs,
            forced_without_counterpart: plan
                .catalogs
                .iter()
                .enumerate()
                .filter(|(_, c)| c.schema.forced.is_some())
                .map(|(k, c)| {
                    let n = result.stats.forced_without_counterpart.get(k);
                    (c.name.clone(), n.copied().unwrap_or(0) as u64)
                })
                .collect(),
            matching: result.stats.clone(),
            offsets,
            false_matches,
            sed_points,
            outputs,
            subset: None,
        }
    }

    /// The record as pretty-printed JSON.
    ///
    /// # Errors
    /// A usage error if serialization fails (it does not for these types).
    pub fn to_json(&self) -> Result<String> {
        // Through a JSON value, so keys come in one (sorted) order whether the
        // record is written by a build or joined by `fluxloom merge`.
        let value = serde_json::to_value(self).map_err(|e| Error::Usage(e.to_string()))?;
        serde_json::to_string_pretty(&value).map_err(|e| Error::Usage(e.to_string()))
    }
}
