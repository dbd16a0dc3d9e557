//! `fluxloom report`: the match audit of an existing output folder.

use std::path::PathBuf;

use clap::Args;

use crate::error::Result;

/// Arguments of `fluxloom report`.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// The output folder of a build (holding objects.parquet, links.parquet,
    /// photometry.parquet and run.json).
    pub folder: PathBuf,
}

/// Runs `fluxloom report`: writes report.html and report.json into the folder
/// and prints the warnings and the files written.
///
/// # Errors
/// A missing or unreadable output file or column, named.
pub fn run(args: &ReportArgs) -> Result<()> {
    let warnings = crate::report::write_report(&args.folder)?;
    let mut s = crate::report::warnings::summary_lines(&warnings);
    for f in [crate::report::HTML_FILE, crate::report::JSON_FILE] {
        s.push_str(&format!("wrote    {}\n", args.folder.join(f).display()));
    }
    super::write_stdout(&s)
}
