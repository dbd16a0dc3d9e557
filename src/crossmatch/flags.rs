//! Match flags: a documented bit mask and a readable status.
//!
//! | bit | value | name | meaning |
//! |---|---|---|---|
//! | 0 | 1 | `ambiguous` | a member has two or more candidates from one other catalog, or a candidate of a member went to another object |
//! | 1 | 2 | `blend` | this object is one source of a coarser catalog that two or more finer objects could own; it is kept apart, not handed to either |
//! | 2 | 4 | `has_blend` | a coarser catalog's source covering this object and another one is a blend (see its `blend` object) |
//! | 3 | 8 | `low_probability` | the posterior probability of the object's association is below the configured minimum |
//! | 4 | 16 | `single_catalog` | only one catalog saw this object |
//! | 5 | 32 | `approximate` | the object's group was too large for the exact search and was resolved greedily |
//! | 6 | 64 | (retired) | once `forced_only`; no written object carries it: a group of forced-photometry rows alone (a survey schema's `[forced]` rows) is not written, its rows are counted instead (see [`FORCED_ONLY`]) |
//! | 7 | 128 | `moving` | one star moving across the sky, seen at two or more epochs by catalogs without proper motions; its fitted motion is in `pm_fit_*` |
//! | 8 | 256 | `contaminated` | a member is a coarse source over this object and fainter ones whose estimated share of its flux is below the threshold: the flux is kept, with that share in `contamination_share` |
//!
//! The status is `clean` when no flag other than `single_catalog` is set and
//! there are two or more members, `single` for a clean one-catalog object, and
//! otherwise the set flag names joined with `+` (e.g. `ambiguous+low_probability`).

/// A member has competing candidates, or a candidate went elsewhere.
pub const AMBIGUOUS: u32 = 1;
/// A coarse source that several finer objects could own, kept as its own object.
pub const BLEND: u32 = 2;
/// The object lies under a blended coarse source.
pub const HAS_BLEND: u32 = 4;
/// Association posterior below the minimum.
pub const LOW_PROBABILITY: u32 = 8;
/// Seen by one catalog only.
pub const SINGLE_CATALOG: u32 = 16;
/// Resolved by the greedy fallback rather than the exact search.
pub const APPROXIMATE: u32 = 32;
/// Every member comes from forced photometry: no detection founds the object.
/// Internal: the cell kernel marks such objects with it and the assembly
/// leaves them out ([`super::engine`]), so no written object carries the bit,
/// and it is not in [`ALL`], the written legend. The bit is retired, not reused.
pub const FORCED_ONLY: u32 = 64;
/// One moving star: its members are at their own epochs on a fitted linear track.
pub const MOVING: u32 = 128;
/// A coarse member also holds the light of fainter companions, below the
/// share threshold: its flux is kept, contaminated by that share.
pub const CONTAMINATED: u32 = 256;

/// Every flag a written object can carry, with its name, in bit order (bit 6,
/// [`FORCED_ONLY`], is retired).
pub const ALL: [(u32, &str); 8] = [
    (AMBIGUOUS, "ambiguous"),
    (BLEND, "blend"),
    (HAS_BLEND, "has_blend"),
    (LOW_PROBABILITY, "low_probability"),
    (SINGLE_CATALOG, "single_catalog"),
    (APPROXIMATE, "approximate"),
    (MOVING, "moving"),
    (CONTAMINATED, "contaminated"),
];

/// The readable status of a flag mask.
pub fn status(flags: u32) -> String {
    match flags {
        0 => "clean".to_string(),
        SINGLE_CATALOG => "single".to_string(),
        _ => ALL
            .iter()
            .filter(|(bit, _)| flags & bit != 0)
            .map(|(_, name)| *name)
            .collect::<Vec<_>>()
            .join("+"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn statuses() {
        assert_eq!(status(0), "clean");
        assert_eq!(status(SINGLE_CATALOG), "single");
        assert_eq!(
            status(AMBIGUOUS | LOW_PROBABILITY),
            "ambiguous+low_probability"
        );
        assert_eq!(status(BLEND | SINGLE_CATALOG), "blend+single_catalog");
        assert_eq!(status(MOVING), "moving");
        assert_eq!(status(MOVING | LOW_PROBABILITY), "low_probability+moving");
        assert_eq!(status(CONTAMINATED), "contaminated");
    }

    #[test]
    fn bits_are_distinct() {
        let all = ALL.iter().fold(0, |acc, (b, _)| {
            assert_eq!(acc & b, 0);
            acc | b
        });
        // Bit 6 (64) is retired: in no legend, and no other flag took it.
        assert_eq!(all, 511 - 64);
        assert_eq!(FORCED_ONLY, 64);
        assert_eq!((MOVING, CONTAMINATED), (128, 256));
    }
}
