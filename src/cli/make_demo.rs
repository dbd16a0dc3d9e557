//! `fluxloom make-demo`: write the invented demo field — six survey catalogs in
//! their own formats and conventions, their schemas, a plan, and the truth.

use std::path::PathBuf;

use clap::Args;

use crate::demo::{DEFAULT_SEED, write_demo_field};
use crate::error::Result;

/// Arguments of `fluxloom make-demo`.
#[derive(Debug, Args)]
pub struct MakeDemoArgs {
    /// The folder to write into (created if missing).
    pub folder: PathBuf,
    /// Seed of the pseudo-random field (the bundled demo uses the default).
    #[arg(long, default_value_t = DEFAULT_SEED)]
    pub seed: u64,
}

/// Runs `fluxloom make-demo`.
///
/// # Errors
/// Write errors.
pub fn run(args: &MakeDemoArgs) -> Result<()> {
    let summary = write_demo_field(&args.folder, args.seed)?;
    let mut text = format!(
        "wrote the demo field (seed {}) to {}:\n",
        args.seed,
        args.folder.display()
    );
    for file in &summary.files {
        text.push_str(&format!("  {}\n", file.display()));
    }
    text.push_str(&format!(
        "build its SEDs with: fluxloom build {}\n",
        args.folder.join("plan.toml").display()
    ));
    super::write_stdout(&text)
}
