//! The command line: one module per command. Each command's `run` takes its
//! parsed arguments and returns a [`Result`]; `main` decides the exit status.

pub mod auto_limit;
pub mod bands;
pub mod build;
pub mod cells;
pub mod draw;
pub mod make_demo;
pub mod merge;
pub mod progress;
pub mod report;
pub mod route;
pub mod science;
pub mod sorted_runs;
pub mod stream;
pub mod vet;

use clap::{Parser, Subcommand};

use crate::error::Result;

/// fluxloom: multi-survey photometry into calibrated SED tables.
#[derive(Debug, Parser)]
#[command(name = "fluxloom", version, about, long_about = None)]
pub struct Cli {
    /// No progress bars (they are also hidden when stderr is not a terminal).
    #[arg(long, short, global = true)]
    pub quiet: bool,

    /// The command to run.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Build SED tables from a plan: read every catalog through its schema,
    /// cross-match them all at once, and write objects, photometry, links and run.json.
    Build(build::BuildArgs),
    /// Read one catalog through its survey schema: count detections, upper limits,
    /// nulls and rejections per band, show the first problems, and optionally
    /// write the normalized source table as Parquet.
    Vet(vet::VetArgs),
    /// Write the invented demo field: six survey catalogs, their schemas, a plan and the truth.
    MakeDemo(make_demo::MakeDemoArgs),
    /// Write the match audit of a build's output folder: report.html (figures,
    /// match cards, warnings, provenance) and report.json (the same numbers).
    Report(report::ReportArgs),
    /// List the band library: ids, systems, wavelengths, zero points and sources.
    Bands(bands::BandsArgs),
    /// Spectral indices and classes, dereddening, photosphere excesses and colours of
    /// a built output folder, into science.parquet.
    Science(science::ScienceArgs),
    /// Draw SEDs, colour–colour and colour–magnitude diagrams of a built output folder.
    Draw(draw::DrawArgs),
    /// Write the sky cells of a plan, each with its margin, as Arrow IPC streams
    /// for `fluxloom cell-worker` (or another engine) to match one at a time.
    Cells(cells::CellsArgs),
    /// Match one sky cell: its Arrow IPC stream in on stdin, its objects and
    /// links out on stdout as Arrow IPC.
    CellWorker(cells::WorkerArgs),
    /// Join the output folders of builds over parts of the sky (`build --cells`)
    /// into the folder one build over all of it writes.
    Merge(merge::MergeArgs),
}

/// Runs the parsed command line.
///
/// # Errors
/// Whatever the command reports; `main` prints it once.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Build(args) => build::run(&args, cli.quiet),
        Command::Vet(args) => vet::run(&args, cli.quiet),
        Command::Report(args) => report::run(&args),
        Command::Bands(args) => bands::run(&args),
        Command::MakeDemo(args) => make_demo::run(&args),
        Command::Science(args) => science::run(&args),
        Command::Draw(args) => draw::run(&args),
        Command::Cells(args) => cells::run_cells(&args, cli.quiet),
        Command::CellWorker(args) => cells::run_worker(&args),
        Command::Merge(args) => merge::run(&args),
    }
}

/// Writes to stdout, turning a write failure (such as a closed pipe) into an error.
pub(crate) fn write_stdout(text: &str) -> Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|_| out.flush())
        .map_err(|e| crate::Error::io("<stdout>", e))
}
