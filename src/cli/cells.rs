//! `fluxloom cells` and `fluxloom cell-worker`: the sky cells of a plan as
//! Arrow IPC streams, and the per-cell match as a process of its own, so that
//! an engine outside fluxloom can schedule the cells (see
//! [`crate::crossmatch::cell_io`] for the streams).

use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use clap::Args;

use super::build::{CellList, parse_cell_list, prepare};
use crate::crossmatch::cell_io::{
    CellInput, input_batch, input_from_batch, read_stream, write_output, write_stream,
};
use crate::crossmatch::cells::{
    CellContext, cell_sources, cells_with_margin, first_margin_arcsec, match_cell,
};
use crate::error::{Error, Result};
use crate::output::atomic::AtomicFile;
use crate::plan::Plan;

/// Arguments of `fluxloom cells`.
#[derive(Debug, Args)]
pub struct CellsArgs {
    /// The plan file (TOML).
    pub plan: PathBuf,
    /// Folder to write the cells into (`cell-<order>-<index>.arrows`).
    #[arg(long, short, value_name = "FOLDER")]
    pub out: PathBuf,
    /// HEALPix order of the cells (default: the plan's `partition_order`).
    #[arg(long, value_name = "ORDER", value_parser = clap::value_parser!(u8).range(0..=20))]
    pub cell_order: Option<u8>,
    /// Only these cells (NESTED indices at the cell order, e.g. `3,17-20`).
    #[arg(long, value_name = "LIST", value_parser = parse_cell_list)]
    pub cells: Option<CellList>,
    /// Double the margin this many times (for a cell a worker found incomplete).
    #[arg(long, value_name = "N", default_value_t = 0, value_parser = clap::value_parser!(u8).range(0..=30))]
    pub widen: u8,
}

/// Arguments of `fluxloom cell-worker`.
#[derive(Debug, Args)]
pub struct WorkerArgs {
    /// The plan file whose match settings apply (the one the cells were written from).
    pub plan: PathBuf,
}

/// Runs `fluxloom cells`: writes each chosen cell with its margin.
///
/// # Errors
/// Plan, read and write errors.
pub fn run_cells(args: &CellsArgs, quiet: bool) -> Result<()> {
    let plan = Plan::from_file(&args.plan)?;
    let mut matching = plan.matching.clone();
    if let Some(order) = args.cell_order {
        matching.partition_order = order;
    }
    let prepared = prepare(&plan, &matching, quiet)?;
    let setup = &prepared.setup;
    // The settings in force: the floors measured against the reference in.
    let matching = &prepared.matching;
    let influence = CellContext::influence_radius_arcsec(matching, &setup.epochs);
    let margin_arcsec = first_margin_arcsec(influence) * 2f64.powi(i32::from(args.widen));
    std::fs::create_dir_all(&args.out).map_err(|e| Error::io(&args.out, e))?;
    let order = matching.partition_order;
    let (mut written, mut rows) = (0usize, 0usize);
    for cell in cells_with_margin(&setup.sources, order, margin_arcsec) {
        let chosen = args
            .cells
            .as_ref()
            .is_none_or(|c| c.0.binary_search(&cell.id).is_ok());
        if cell.core.is_empty() || !chosen {
            continue;
        }
        let (sources, core, ranks) = cell_sources(&setup.sources, &cell);
        let input = CellInput {
            order,
            id: cell.id,
            margin_arcsec,
            ln_density_per_sr: setup.ln_density_per_sr.clone(),
            systematic_arcsec: matching
                .catalogs
                .iter()
                .map(|c| c.systematic_arcsec)
                .collect(),
            epochs: setup.epochs.clone(),
            sources,
            core,
            ranks,
        };
        rows += input.ranks.len();
        let path = args.out.join(format!("cell-{order}-{}.arrows", cell.id));
        let (file, mut w) = AtomicFile::create(&path)?;
        write_stream(&mut w, &input_batch(&input)?, &path)?;
        w.flush().map_err(|e| Error::io(&path, e))?;
        drop(w);
        file.commit()?;
        written += 1;
    }
    super::write_stdout(&format!(
        "wrote    {written} cells at order {order} (margin {margin_arcsec:.1}\"), {rows} source rows, into {}\n",
        args.out.display()
    ))
}

/// Runs `fluxloom cell-worker`: one cell in on stdin, its objects and links out on stdout.
///
/// # Errors
/// A stream that is not a cell, a plan of other catalogs, or a cell whose
/// groups reach past its margin.
pub fn run_worker(args: &WorkerArgs) -> Result<()> {
    let plan = Plan::from_file(&args.plan)?;
    let mut bytes = Vec::new();
    let stdin = Path::new("<stdin>");
    BufReader::new(std::io::stdin().lock())
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(stdin, e))?;
    let input = input_from_batch(&read_stream(&bytes[..], stdin)?, stdin)?;
    let out = match_one(&plan, &input)?;
    let stdout = Path::new("<stdout>");
    let mut w = BufWriter::new(std::io::stdout().lock());
    write_output(&mut w, &out, stdout)?;
    w.flush().map_err(|e| Error::io(stdout, e))
}

/// Matches one cell input with the settings of `plan`.
///
/// # Errors
/// As [`run_worker`].
pub fn match_one(plan: &Plan, input: &CellInput) -> Result<crate::crossmatch::cells::CellOutput> {
    let mut config = plan.matching.clone();
    if input.ln_density_per_sr.len() != config.catalogs.len() {
        return Err(Error::Usage(format!(
            "the cell holds {} catalogs but the plan {} names {}",
            input.ln_density_per_sr.len(),
            plan.path.display(),
            config.catalogs.len()
        )));
    }
    // The floors the cells were written with (measured ones included).
    for (c, &f) in config.catalogs.iter_mut().zip(&input.systematic_arcsec) {
        c.systematic_arcsec = f;
    }
    let config = &config;
    let ctx = CellContext {
        config,
        ln_density_per_sr: &input.ln_density_per_sr,
        epochs: &input.epochs,
        influence_arcsec: CellContext::influence_radius_arcsec(config, &input.epochs),
    };
    match_cell(
        &ctx,
        &input.sources,
        &input.core,
        &input.ranks,
        input.margin_arcsec,
    )
    .ok_or_else(|| {
        Error::Usage(format!(
            "cell {} at order {}: a group of candidates reaches past its {:.1}\" margin; write it again with a wider one (fluxloom cells --widen)",
            input.id, input.order, input.margin_arcsec
        ))
    })
}
