//! The match audit: figures and one readable report of a build's output folder.
//!
//! The report reads only what a build wrote — `objects.parquet`,
//! `links.parquet`, `photometry.parquet`, `run.json` and, when present,
//! `science.parquet` and `hard_sources.parquet` — never the matcher's
//! internals, so it can be re-made for any output folder with
//! `fluxloom report FOLDER`. It writes two files beside the tables:
//!
//! - `report.html`: one self-contained page (inline SVG and CSS, no script) with
//!   the warnings, per catalog pair the separations and normalized distances
//!   against the law of the stated errors, offsets, false-match rates, flags,
//!   band statuses, a sky map with footprints, match cards of the hard cases
//!   and the run's provenance;
//! - `report.json`: the same numbers for scripts ([`summary::Summary`] plus the
//!   warnings and the card counts).

pub mod cards;
pub mod data;
pub mod figures;
pub mod footprint;
pub mod html;
pub mod stats;
pub mod summary;
pub mod warnings;

use std::path::Path;

use serde::Serialize;

use crate::error::{Error, Result};
use crate::output::atomic::AtomicFile;
use crate::output::staging::Staging;
use data::OutputFolder;
use summary::Summary;
use warnings::Warning;

/// File name of the report page.
pub const HTML_FILE: &str = "report.html";
/// File name of the report's numbers.
pub const JSON_FILE: &str = "report.json";

/// `report.json`: the summary, the warnings and the hard cases counted.
#[derive(Debug, Serialize)]
pub struct ReportJson<'a> {
    /// The numbers behind every figure.
    #[serde(flatten)]
    pub summary: &'a Summary,
    /// Warnings, as shown at the top of the page.
    pub warnings: &'a [Warning],
    /// Ambiguous groups found.
    pub ambiguous_groups: u64,
    /// Blends found.
    pub blends: u64,
    /// Cards drawn.
    pub cards_shown: u64,
    /// Hard cases beyond the card cap.
    pub cards_not_shown: u64,
    /// What the outputs did not carry.
    pub gaps: &'a [String],
}

/// A finished report, not yet written.
pub struct Report {
    /// The page.
    pub html: String,
    /// The numbers.
    pub json: String,
    /// The warnings.
    pub warnings: Vec<Warning>,
}

/// What the report would need and the folder does not carry.
fn gaps(out: &OutputFolder) -> Vec<String> {
    let mut g = Vec::new();
    if !(out.links.has("dra_cosdec_arcsec") && out.links.has("ddec_arcsec")) {
        g.push("links.parquet has no per-pair offsets (columns dra_cosdec_arcsec and ddec_arcsec: east and north offset of source b from source a at the compared epoch, after correction, arcsec): offsets are summarized from run.json instead of drawn pair by pair.".to_string());
    }
    if out.hard_sources.is_none() {
        g.push("No hard_sources.parquet (positions and error ellipses of the sources of ambiguous groups and blends): match cards show objects and their errors schematically, not the individual sources.".to_string());
    }
    let radius = out.run["false_matches"]
        .as_array()
        .into_iter()
        .flatten()
        .any(|f| f["by_radius"].is_array());
    if !radius
        && out.run["false_matches"]
            .as_array()
            .is_some_and(|a| !a.is_empty())
    {
        g.push("run.json gives false-match rates at each pair's tolerance only (no by_radius list of radius_arcsec and false_fraction): one point per pair.".to_string());
    }
    g
}

/// Builds the report of an output folder.
///
/// # Errors
/// A missing or unreadable output file, or a missing column, named.
pub fn build(dir: &Path) -> Result<Report> {
    let out = OutputFolder::read(dir)?;
    let summary = Summary::of(&out)?;
    let warnings = warnings::warnings(&summary);
    let cards = cards::cards(&out)?;
    let gaps = gaps(&out);
    let sky = figures::sky(&out)?;
    let html = html::page(&html::Page {
        summary: &summary,
        warnings: &warnings,
        cards: &cards,
        sky: &sky,
        gaps: &gaps,
        run: &out.run,
    });
    let json = serde_json::to_string_pretty(&ReportJson {
        summary: &summary,
        warnings: &warnings,
        ambiguous_groups: cards.ambiguous_groups,
        blends: cards.blends,
        cards_shown: cards.shown.len() as u64,
        cards_not_shown: cards.not_shown,
        gaps: &gaps,
    })
    .map_err(|e| Error::Usage(e.to_string()))?;
    Ok(Report {
        html,
        json: json + "\n",
        warnings,
    })
}

fn write_file(path: &Path, text: &str) -> Result<()> {
    use std::io::Write;
    let (guard, mut w) = AtomicFile::create(path)?;
    w.write_all(text.as_bytes())
        .and_then(|_| w.flush())
        .map_err(|e| Error::io(path, e))?;
    drop(w);
    guard.commit()
}

/// Writes `report.html` and `report.json` into an existing output folder;
/// returns the warnings.
///
/// # Errors
/// As [`build`], and write errors naming the file.
pub fn write_report(dir: &Path) -> Result<Vec<Warning>> {
    let r = build(dir)?;
    write_file(&dir.join(HTML_FILE), &r.html)?;
    write_file(&dir.join(JSON_FILE), &r.json)?;
    Ok(r.warnings)
}

/// Writes the report into a build's staging folder, from the tables and
/// `run.json` already staged there, so it is committed with them.
///
/// # Errors
/// As [`write_report`].
pub fn write_into(staging: &mut Staging) -> Result<Vec<Warning>> {
    let r = build(staging.dir())?;
    write_file(&staging.path(HTML_FILE), &r.html)?;
    write_file(&staging.path(JSON_FILE), &r.json)?;
    Ok(r.warnings)
}
