//! Cross-matching all catalogs at once.
//!
//! Source tables ([`SourceTable`]) and settings ([`MatchConfig`]) go in; merged
//! objects and every candidate link come out ([`MatchResult`]):
//!
//! 1. [`prepare`]: sources in rank order at the reference epoch;
//! 2. [`density`]: each catalog's surface density, for the prior;
//! 3. [`candidates`]: pairs within tolerance ([`tolerance`]), per HEALPix cell;
//! 4. [`blends`]: coarse sources covering several finer ones, kept apart
//!    unless fainter companions carry little of the flux ([`shares`]);
//!    [`groups`]: connected groups of the remaining candidate graph;
//! 5. [`resolve`]: each group split into objects by maximum posterior, with
//!    probabilities ([`bayes`]; moving objects, [`moving`] and [`motion`]) and
//!    flags ([`flags`]);
//! 6. [`engine`]: the run, and the objects and links it assembles.
//!
//! Around it: astrometric offsets against a reference catalog ([`systematics`],
//! [`offsets`]) and false-match rates from shifted catalogs ([`false_matches`]).
//!
//! ```
//! use fluxloom::crossmatch::{MatchConfig, SourceTable, run_match};
//!
//! let mut optical = SourceTable { name: "opt".into(), ..Default::default() };
//! optical.push_simple("a", 150.0, 2.2, 2016.0, 0.05);
//! let mut infrared = SourceTable { name: "nir".into(), ..Default::default() };
//! infrared.push_simple("x", 150.0 + 0.1 / 3600.0, 2.2, 2016.0, 0.1);
//! let tables = [optical, infrared];
//! let result = run_match(&tables, &MatchConfig::new(2, 2016.0)).unwrap();
//! assert_eq!(result.objects.len(), 1);
//! assert_eq!(result.objects[0].object_id(&tables), "opt:a");
//! assert_eq!(result.objects[0].members.len(), 2);
//! ```

pub mod bayes;
pub mod blends;
pub mod candidates;
pub mod cell_io;
pub mod cells;
pub mod config;
pub mod density;
pub mod engine;
pub mod false_matches;
pub mod flags;
pub mod floors;
pub mod groups;
pub mod input;
pub mod motion;
pub mod moving;
pub mod offsets;
pub mod position_error;
pub mod prepare;
pub mod resolve;
pub mod shares;
pub mod systematics;
pub mod tolerance;

pub use config::{BandSettings, CatalogSettings, MatchConfig, Tolerance};
pub use engine::{
    Link, MatchResult, MatchedObject, Member, SourceRef, run_match, run_match_with_area,
};
pub use input::{BandValue, SourceTable};
