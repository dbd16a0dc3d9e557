//! `fluxloom bands`: print the band library, built-in plus user bands.

use std::path::PathBuf;

use clap::Args;

use crate::error::Result;
use crate::photometry::{BandLibrary, PhotSystem};

/// Arguments of `fluxloom bands`.
#[derive(Debug, Args)]
pub struct BandsArgs {
    /// A band file of your own (same format as schemas/bands.toml) to add.
    #[arg(long, value_name = "FILE")]
    pub bands: Option<PathBuf>,
    /// Print the sources and notes too.
    #[arg(long)]
    pub sources: bool,
}

/// Prints one line per band.
///
/// # Errors
/// A band-file error.
pub fn run(args: &BandsArgs) -> Result<()> {
    let library = load_library(args.bands.as_deref())?;
    let mut text = format!(
        "{:<12} {:<5} {:<18} {:>12} {:>12}  {}\n",
        "id", "sys", "family / name", "lambda_um", "zp_jy", "lambda kind"
    );
    for band in library.iter() {
        let system = match band.system {
            PhotSystem::Vega => "Vega",
            PhotSystem::Ab => "AB",
        };
        let zp = band
            .zero_point_jy
            .map(|z| format!("{z}"))
            .unwrap_or_else(|| "none".into());
        text.push_str(&format!(
            "{:<12} {:<5} {:<18} {:>12} {:>12}  {}\n",
            band.id,
            system,
            format!("{} {}", band.family, band.name),
            band.wavelength_um,
            zp,
            band.wavelength_kind
        ));
        if args.sources {
            text.push_str(&format!("             source: {}\n", band.source));
            if let Some(note) = &band.note {
                text.push_str(&format!("             note: {note}\n"));
            }
        }
    }
    super::write_stdout(&text)
}

/// The built-in library, plus the user's band file when one is given.
///
/// # Errors
/// A band-file error naming its line.
pub fn load_library(user_file: Option<&std::path::Path>) -> Result<BandLibrary> {
    let mut library = BandLibrary::builtin();
    if let Some(path) = user_file {
        library.load_user_file(path)?;
    }
    Ok(library)
}
