//! An invented demo field and the catalogs six invented surveys would have made of it.
//!
//! [`write_demo_field`] builds, from one seed, 654 true objects in an invented
//! 0.25° × 0.25° field "FL-1" centred on RA 231.2°, Dec +12.4° (field stars, young
//! stars with and without disks, extended background galaxies, dusty galaxies seen
//! only at 22–24 µm, high-proper-motion stars with catalog motions, faint fast movers
//! without, close pairs, faint neighbours and equal companions of stars; see
//! [`truth`]), observes them with six invented surveys, each with its own file format,
//! magnitude system, epoch, astrometric precision, resolution, depth and way of marking
//! non-detections, one with a coarse band of its own footprint and one with forced
//! photometry (see [`surveys`]), and writes the catalogs, their survey schemas, a plan,
//! the truth and a README into one folder (see [`write`]).
//!
//! Everything is deterministic: the same seed gives byte-identical files. Random numbers
//! come from [`Rng`], a SplitMix64 generator (Steele, Lea & Flood 2014) with Box–Muller
//! normal deviates (Box & Muller 1958), one independent stream per stage so that
//! changing one survey does not change the others.
//!
//! ```no_run
//! use fluxloom::demo::{DEFAULT_SEED, write_demo_field};
//!
//! let summary = write_demo_field(std::path::Path::new("demo_catalogs/fl1"), DEFAULT_SEED)?;
//! for s in &summary.surveys {
//!     println!("{}: {} sources ({} artefacts, {} blends)", s.survey, s.sources, s.artefacts, s.blends);
//! }
//! # Ok::<(), fluxloom::Error>(())
//! ```
//!
//! References, as cited in this module and its children:
//!
//! - Steele, Lea & Flood 2014, OOPSLA '14, "Fast splittable pseudorandom number
//!   generators" — SplitMix64 (from memory).
//! - Box & Muller 1958, Ann. Math. Stat. 29, 610 — normal deviates (from memory).
//! - Planck 1901 — the blackbody law; constants from the 2019 SI definitions.
//! - Cardelli, Clayton & Mathis 1989, ApJ 345, 245 — the extinction curve the demo
//!   power laws approximate.
//! - Greene et al. 1994, ApJ 434, 614 — spectral-index classes (from memory).
//! - Lupton, Gunn & Szalay 1999, AJ 118, 1406 — asinh magnitudes.

use std::path::{Path, PathBuf};

use crate::error::Result;

pub mod surveys;
pub mod truth;
pub mod write;

/// The seed of the committed demo folder `demo_catalogs/fl1/`.
pub const DEFAULT_SEED: u64 = 20_160_101;

/// Field centre, right ascension in degrees (an unremarkable high-latitude patch).
pub const FIELD_RA_DEG: f64 = 231.2;
/// Field centre, declination in degrees.
pub const FIELD_DEC_DEG: f64 = 12.4;
/// Half the side of the square field, in degrees (the field is 0.25° × 0.25°).
pub const FIELD_HALF_SIZE_DEG: f64 = 0.125;
/// Epoch of the truth positions, Julian years.
pub const TRUTH_EPOCH_YR: f64 = 2016.0;

/// What [`write_demo_field`] wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct DemoSummary {
    /// The seed used.
    pub seed: u64,
    /// Every file written, in writing order.
    pub files: Vec<PathBuf>,
    /// Number of true objects per kind (`star`, `class_i`, `class_ii`, `class_iii`, `galaxy`).
    pub truth_counts: Vec<(String, usize)>,
    /// One entry per survey, in plan order.
    pub surveys: Vec<SurveySummary>,
}

/// Source counts of one demo survey.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SurveySummary {
    /// Survey name.
    pub survey: String,
    /// Rows in the catalog.
    pub sources: usize,
    /// Rows without a true counterpart (spurious detections).
    pub artefacts: usize,
    /// Rows that are blends of two or more true objects.
    pub blends: usize,
}

/// Generates the demo field with `seed` and writes every file into `dir`
/// (created if needed): `ask.parquet`, `kos.csv`, `lantern.vot`, `harrier.fits`,
/// `harrier_moc.txt`, `harrier_w4_moc.txt`, `cinder.csv.gz`, `ember.fits`, a survey schema `<survey>.toml`
/// for each, `plan.toml`, `truth_objects.csv`, `truth_members.csv` and `README.md`.
///
/// # Errors
/// [`crate::Error::Io`] when the folder or a file cannot be written, and the
/// writers' errors.
pub fn write_demo_field(dir: &Path, seed: u64) -> Result<DemoSummary> {
    let truth = truth::generate(seed);
    let observed = surveys::observe_all(&truth, seed);
    write::write_all(dir, seed, &truth, &observed)
}

pub use crate::rng::Rng;
