//! `fluxloom science FOLDER`: spectral indices, classes, dereddening, excesses
//! and colours of a built output folder, into `FOLDER/science.parquet`.

use std::path::{Path, PathBuf};

use clap::Args;

use crate::error::{Error, Result};
use crate::science::ScienceSettings;
use crate::science::settings::AvSource;

/// Arguments of `fluxloom science` (shared by `fluxloom draw`).
#[derive(Debug, Args, Clone)]
pub struct ScienceArgs {
    /// An output folder of `fluxloom build` (holding objects.parquet).
    pub folder: PathBuf,
    /// Take the settings from this plan's `[science]` table (defaults otherwise).
    #[arg(long, value_name = "PLAN.toml")]
    pub plan: Option<PathBuf>,
    /// One A_V for the whole field, mag (overrides the plan's A_V source).
    #[arg(long, value_name = "MAG")]
    pub av: Option<f64>,
    /// Spectral-index window "SHORTEST,LONGEST" in µm (overrides the plan).
    #[arg(long, value_name = "UM,UM")]
    pub alpha_window: Option<String>,
}

impl ScienceArgs {
    /// The settings: the plan's `[science]` table or the defaults, then the options.
    ///
    /// # Errors
    /// Plan errors naming the line; a usage error for a bad option value.
    pub fn settings(&self) -> Result<ScienceSettings> {
        let mut s = match &self.plan {
            Some(p) => {
                let text = std::fs::read_to_string(p).map_err(|e| Error::io(p, e))?;
                ScienceSettings::from_plan_text(&text, p)?.unwrap_or_default()
            }
            None => ScienceSettings::default(),
        };
        if let Some(av) = self.av {
            if !(av >= 0.0 && av.is_finite()) {
                return Err(Error::Usage(format!(
                    "--av: expected a non-negative number of magnitudes, found {av}"
                )));
            }
            s.av = AvSource::Field(av);
        }
        if let Some(w) = &self.alpha_window {
            let parsed = w.split_once(',').and_then(|(a, b)| {
                Some((a.trim().parse::<f64>().ok()?, b.trim().parse::<f64>().ok()?))
            });
            match parsed {
                Some((a, b)) if a > 0.0 && b > a && b.is_finite() => s.alpha_window_um = (a, b),
                _ => {
                    return Err(Error::Usage(format!(
                        "--alpha-window: expected \"SHORTEST,LONGEST\" in µm with 0 < SHORTEST < LONGEST, found \"{w}\""
                    )));
                }
            }
        }
        Ok(s)
    }
}

/// Runs `fluxloom science`.
///
/// # Errors
/// Settings, reading and writing errors.
pub fn run(args: &ScienceArgs) -> Result<()> {
    let settings = args.settings()?;
    let out = args.folder.join(crate::science::table::SCIENCE_FILE);
    let rows = crate::science::run(&args.folder, &out, &settings)?;
    super::write_stdout(&format!("wrote {} ({rows} objects)\n", display(&out)))
}

fn display(p: &Path) -> String {
    p.display().to_string()
}
