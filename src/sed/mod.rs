//! Spectral energy distributions: one value per object and band, whatever the
//! catalog said or did not say about it.
//!
//! [`assemble`] turns matched objects and the catalogs' normalized tables into a
//! [`Sed`] per object: for every band of every catalog an [`SedPoint`] with a
//! status that keeps apart what must never be confused:
//!
//! | status | meaning | columns set |
//! |---|---|---|
//! | `detected` | the catalog's source measured the band | flux, error, interval |
//! | `upper_limit` | the source was not detected in the band; its limit is known | ulim (and the noise) |
//! | `not_detected` | the catalog covers the position but has no source there, or the source's band says non-detection | ulim = survey depth when the schema gives one |
//! | `not_covered` | the catalog does not cover the position (for a band with its own `coverage`, the band's footprint does not) | none |
//! | `blended` | the catalog's source here is a blend of this and other objects, or a brighter object's contaminated member, seen at this band's resolution or finer; its flux bounds this object's from above | ulim = blend's flux (or its limit) |
//! | `missing` | the source exists but the band has no value | none |
//! | `rejected` | a quality rule or an unreadable value ruled it out | none |
//! | `saturated` | the catalog's schema marks the value saturated: neither a detection nor an upper limit; the true flux is at least the value's (a lower bound, from the normalized table's `<band>_sat_jy` or `<band>_sat_mag`) | flux_lower only |

pub mod assemble;

pub use assemble::{BandSlot, Sed, SedAssembler, SedPoint, SedStatus, assemble};
