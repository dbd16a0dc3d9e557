//! [`ZoneIndex`]: a spatial index of sky positions in declination zones, for exact
//! all-pairs-within-radius and cone searches.
//!
//! After the zones algorithm of Gray, Nieto-Santisteban & Szalay 2006 (Microsoft Research
//! MSR-TR-2006-52): the sky is cut into declination strips of height h, zone =
//! ⌊(δ + 90°)/h⌋, and points are sorted by (zone, α). With h ≥ r, two points at most r apart
//! lie in the same or adjacent zones, and within a zone pair their right ascensions differ by at
//! most
//!
//! ```text
//! Δα = atan[ sin r / √|cos(δ − r) cos(δ + r)| ]     (equivalently sin Δα = sin r / cos δ)
//! ```
//!
//! taken at the most poleward declination of the zone pair; where |δ| + r ≥ 90° every RA is
//! searched. Candidates inside the RA window are tested exactly on unit vectors,
//! chord² ≤ 4 sin²(r/2). The RA 0/360 seam is handled by scanning the wrapped part of the
//! window as a second range rather than by copying points (our choice; the paper duplicates
//! points near the seam (from memory)).
//!
//! ```
//! use fluxloom::sky::zones::ZoneIndex;
//!
//! let ra_deg = [359.99995, 0.00005, 10.0];
//! let dec_deg = [-30.0, -30.0, -30.0];
//! let index = ZoneIndex::build(&ra_deg, &dec_deg, 1.0 / 3600.0);
//! let mut pairs = Vec::new();
//! index.for_each_pair(|i, j, sep_arcsec| pairs.push((i, j, sep_arcsec)));
//! assert_eq!(pairs.len(), 1);
//! assert_eq!((pairs[0].0, pairs[0].1), (0, 1));
//! assert!((pairs[0].2 - 0.36 * 30f64.to_radians().cos()).abs() < 1e-6);
//! ```

use std::ops::Range;

use rayon::prelude::*;

use super::separation::separation_vec_rad;
use super::vector::{
    ARCSEC_PER_RAD, Vec3, chord_for_angle_rad, chord2, radec_deg_to_vec, wrap_360_deg,
};

/// Smallest zone height in degrees (1e-6° = 3.6 mas), so a zero radius still gives at most
/// 1.8e8 zones (dimensionless zone numbers fit in `u32`).
const MIN_ZONE_HEIGHT_DEG: f64 = 1e-6;

/// Relative widening of zone heights, zone ranges and RA windows (dimensionless), so that
/// rounding cannot move a pair that passes the exact chord test outside the scanned range.
/// Windows only choose candidates; the chord test decides.
const WIDENING: f64 = 1e-9;

/// Absolute widening of RA windows and zone ranges, degrees (1e-12° = 3.6 nanoarcsec).
const FLOOR_DEG: f64 = 1e-12;

/// Points sorted by declination zone and right ascension, with their unit vectors, built for one
/// match radius.
#[derive(Debug, Clone)]
pub struct ZoneIndex {
    /// Match radius given at build, degrees (capped at 180°).
    radius_deg: f64,
    /// 4 sin²(r/2) for that radius: the squared-chord threshold, dimensionless.
    chord2_max: f64,
    /// Zone height h in degrees, slightly above `radius_deg`.
    zone_height_deg: f64,
    /// Distinct non-empty zone numbers, ascending.
    zone_ids: Vec<u32>,
    /// Start of each zone in the sorted arrays, plus the total length at the end.
    zone_starts: Vec<usize>,
    /// Right ascension in [0°, 360°), sorted within each zone.
    ra_deg: Vec<f64>,
    /// Unit vectors, same order.
    xyz: Vec<Vec3>,
    /// Index of each point in the arrays given to [`ZoneIndex::build`], same order.
    input_index: Vec<u32>,
}

impl ZoneIndex {
    /// Indexes the points (`ra_deg[i]`, `dec_deg[i]`), in degrees, for searches of radius up to
    /// `radius_deg` degrees; the zone height is the radius (Gray et al. 2006), at least 1e-6°.
    ///
    /// Points whose RA or Dec is not finite, or whose |δ| exceeds 90°, are left out: they are
    /// never visited and not counted by [`ZoneIndex::len`]. RA may be any finite value; it is
    /// wrapped into [0°, 360°).
    ///
    /// # Panics
    /// If the slices differ in length, hold more than `u32::MAX` points, or `radius_deg` is
    /// negative or not finite.
    pub fn build(ra_deg: &[f64], dec_deg: &[f64], radius_deg: f64) -> ZoneIndex {
        assert_eq!(
            ra_deg.len(),
            dec_deg.len(),
            "ra_deg and dec_deg differ in length"
        );
        assert!(
            u32::try_from(ra_deg.len()).is_ok(),
            "more than u32::MAX points"
        );
        assert!(
            radius_deg.is_finite() && radius_deg >= 0.0,
            "radius_deg must be finite and >= 0, got {radius_deg}"
        );
        let radius_deg = radius_deg.min(180.0);
        let zone_height_deg = (radius_deg * (1.0 + WIDENING) + FLOOR_DEG).max(MIN_ZONE_HEIGHT_DEG);

        let mut keys: Vec<(u32, f64, u32)> = ra_deg
            .par_iter()
            .zip(dec_deg.par_iter())
            .enumerate()
            .filter(|&(_, (ra, dec))| ra.is_finite() && dec.is_finite() && dec.abs() <= 90.0)
            .map(|(i, (&ra, &dec))| (zone_of(dec, zone_height_deg), wrap_360_deg(ra), i as u32))
            .collect();
        keys.par_sort_unstable_by(|a, b| {
            a.0.cmp(&b.0).then(a.1.total_cmp(&b.1)).then(a.2.cmp(&b.2))
        });

        let ra_sorted: Vec<f64> = keys.iter().map(|k| k.1).collect();
        let xyz: Vec<Vec3> = keys
            .par_iter()
            .map(|&(_, ra, i)| radec_deg_to_vec(ra, dec_deg[i as usize]))
            .collect();
        let input_index: Vec<u32> = keys.iter().map(|k| k.2).collect();
        let mut zone_ids = Vec::new();
        let mut zone_starts = Vec::new();
        for (pos, key) in keys.iter().enumerate() {
            if zone_ids.last() != Some(&key.0) {
                zone_ids.push(key.0);
                zone_starts.push(pos);
            }
        }
        zone_starts.push(keys.len());

        ZoneIndex {
            radius_deg,
            chord2_max: chord_for_angle_rad(radius_deg.to_radians()).powi(2),
            zone_height_deg,
            zone_ids,
            zone_starts,
            ra_deg: ra_sorted,
            xyz,
            input_index,
        }
    }

    /// Number of indexed points (those with a valid position).
    pub fn len(&self) -> usize {
        self.xyz.len()
    }

    /// True when no point was indexed.
    pub fn is_empty(&self) -> bool {
        self.xyz.is_empty()
    }

    /// The match radius given to [`ZoneIndex::build`], degrees (capped at 180°).
    pub fn radius_deg(&self) -> f64 {
        self.radius_deg
    }

    /// Calls `visit(i, j, sep_arcsec)` once for every unordered pair of indexed points at most
    /// the build radius apart, with i < j their input indices and `sep_arcsec` their separation
    /// in arcsec (atan2(|a × b|, a·b)). Pairs come in no particular order; the set is exact:
    /// membership is decided by chord² ≤ 4 sin²(r/2) on the unit vectors.
    pub fn for_each_pair(&self, mut visit: impl FnMut(usize, usize, f64)) {
        for k in 0..self.zone_ids.len() {
            let zone = self.zone_ids[k];
            let here = self.zone_range(k);
            self.join_within_zone(zone, here.clone(), &mut visit);
            if self.zone_ids.get(k + 1) == Some(&(zone + 1)) {
                self.join_next_zone(zone, here, self.zone_range(k + 1), &mut visit);
            }
        }
    }

    /// Calls `visit(i, sep_arcsec)` for every indexed point within `radius_deg` degrees of
    /// (`ra_deg`, `dec_deg`) (degrees), with i its input index and `sep_arcsec` the separation in
    /// arcsec; exact, by the chord test on unit vectors.
    ///
    /// `radius_deg` is normally at most the build radius; a larger one is still searched exactly,
    /// at a cost growing with the number of zones it spans. A query position or radius that is
    /// not finite, or |δ| > 90°, or a negative radius, visits nothing.
    pub fn for_each_within(
        &self,
        ra_deg: f64,
        dec_deg: f64,
        radius_deg: f64,
        mut visit: impl FnMut(usize, f64),
    ) {
        let valid = ra_deg.is_finite()
            && dec_deg.is_finite()
            && dec_deg.abs() <= 90.0
            && radius_deg.is_finite()
            && radius_deg >= 0.0;
        if !valid || self.is_empty() {
            return;
        }
        let radius_deg = radius_deg.min(180.0);
        let chord2_max = chord_for_angle_rad(radius_deg.to_radians()).powi(2);
        let query = radec_deg_to_vec(ra_deg, dec_deg);
        let ra_q = wrap_360_deg(ra_deg);
        let reach_deg = radius_deg * (1.0 + WIDENING) + FLOOR_DEG;
        let zone_lo = zone_of((dec_deg - reach_deg).max(-90.0), self.zone_height_deg);
        let zone_hi = zone_of((dec_deg + reach_deg).min(90.0), self.zone_height_deg);
        let half_width = ra_window_deg(dec_deg.abs(), radius_deg);

        let mut test = |p: usize| {
            let v = self.xyz[p];
            if chord2(query, v) <= chord2_max {
                visit(
                    self.input_index[p] as usize,
                    separation_vec_rad(query, v) * ARCSEC_PER_RAD,
                );
            }
        };
        let first = self.zone_ids.partition_point(|&z| z < zone_lo);
        for k in first..self.zone_ids.len() {
            if self.zone_ids[k] > zone_hi {
                break;
            }
            let range = self.zone_range(k);
            let Some(w) = half_width else {
                range.for_each(&mut test);
                continue;
            };
            let ra = &self.ra_deg[range.clone()];
            let (low, high) = (ra_q - w, ra_q + w);
            let from = range.start + ra.partition_point(|&x| x < low);
            let to = range.start + ra.partition_point(|&x| x <= high);
            (from..to).for_each(&mut test);
            if low < 0.0 {
                let from = range.start + ra.partition_point(|&x| x < low + 360.0);
                (from..range.end).for_each(&mut test);
            }
            if high >= 360.0 {
                let to = range.start + ra.partition_point(|&x| x <= high - 360.0);
                (range.start..to).for_each(&mut test);
            }
        }
    }

    /// Sorted-array positions of the `k`-th non-empty zone.
    fn zone_range(&self, k: usize) -> Range<usize> {
        self.zone_starts[k]..self.zone_starts[k + 1]
    }

    /// RA half-width in degrees for pairs between zone `zone` and zone `zone + span - 1`, or None
    /// when all RA must be searched.
    fn zone_half_width_deg(&self, zone: u32, span: u32) -> Option<f64> {
        let lo_deg = f64::from(zone) * self.zone_height_deg - 90.0;
        let hi_deg = f64::from(zone + span) * self.zone_height_deg - 90.0;
        let abs_dec_deg = lo_deg.abs().max(hi_deg.abs()).min(90.0);
        ra_window_deg(abs_dec_deg, self.radius_deg)
    }

    /// Pairs inside one zone: each point against the points after it, up to α + Δα, plus the
    /// part of the window wrapped past 360°.
    fn join_within_zone(
        &self,
        zone: u32,
        range: Range<usize>,
        visit: &mut impl FnMut(usize, usize, f64),
    ) {
        let Some(w) = self.zone_half_width_deg(zone, 1) else {
            for p in range.clone() {
                for q in p + 1..range.end {
                    self.test_pair(p, q, visit);
                }
            }
            return;
        };
        for p in range.clone() {
            let high = self.ra_deg[p] + w;
            let mut q = p + 1;
            while q < range.end && self.ra_deg[q] <= high {
                self.test_pair(p, q, visit);
                q += 1;
            }
            if high >= 360.0 {
                // Points at the start of the zone, across the seam; all sort before p since
                // high − 360 < α_p, and w < 180° keeps this disjoint from their own scans.
                let wrapped = high - 360.0;
                let mut q = range.start;
                while q < p && self.ra_deg[q] <= wrapped {
                    self.test_pair(p, q, visit);
                    q += 1;
                }
            }
        }
    }

    /// Pairs between zone `zone` (range `here`) and zone `zone + 1` (range `next`), by a merge
    /// scan over the RA-sorted zones with a window α ± Δα, wrapped at 0/360.
    fn join_next_zone(
        &self,
        zone: u32,
        here: Range<usize>,
        next: Range<usize>,
        visit: &mut impl FnMut(usize, usize, f64),
    ) {
        let Some(w) = self.zone_half_width_deg(zone, 2) else {
            for p in here {
                for q in next.clone() {
                    self.test_pair(p, q, visit);
                }
            }
            return;
        };
        let next_ra = &self.ra_deg[next.clone()];
        let mut lo = next.start;
        for p in here {
            let (low, high) = (self.ra_deg[p] - w, self.ra_deg[p] + w);
            while lo < next.end && self.ra_deg[lo] < low {
                lo += 1;
            }
            let mut q = lo;
            while q < next.end && self.ra_deg[q] <= high {
                self.test_pair(p, q, visit);
                q += 1;
            }
            // The wrapped parts are disjoint from [low, high] because 2w < 360°.
            if low < 0.0 {
                let from = next.start + next_ra.partition_point(|&x| x < low + 360.0);
                for q in from..next.end {
                    self.test_pair(p, q, visit);
                }
            }
            if high >= 360.0 {
                let wrapped = high - 360.0;
                let mut q = next.start;
                while q < next.end && self.ra_deg[q] <= wrapped {
                    self.test_pair(p, q, visit);
                    q += 1;
                }
            }
        }
    }

    /// Exact test of sorted positions `p`, `q`; visits (smaller input index, larger, sep_arcsec).
    #[inline(always)]
    fn test_pair(&self, p: usize, q: usize, visit: &mut impl FnMut(usize, usize, f64)) {
        let (a, b) = (self.xyz[p], self.xyz[q]);
        if chord2(a, b) <= self.chord2_max {
            let (i, j) = (self.input_index[p] as usize, self.input_index[q] as usize);
            let sep_arcsec = separation_vec_rad(a, b) * ARCSEC_PER_RAD;
            if i < j {
                visit(i, j, sep_arcsec)
            } else {
                visit(j, i, sep_arcsec)
            }
        }
    }
}

/// Zone number ⌊(δ + 90°)/h⌋ of a declination in [−90°, 90°], both angles in degrees.
fn zone_of(dec_deg: f64, zone_height_deg: f64) -> u32 {
    ((dec_deg + 90.0) / zone_height_deg).floor() as u32
}

/// Largest |Δα| in degrees between a point at |δ| ≤ `abs_dec_deg` and any point within
/// `radius_deg` of it (both in degrees): atan[sin r / √|cos(δ − r) cos(δ + r)|] (Gray et al.
/// 2006); None when |δ| + r ≥ 90° (the disc may reach a pole: search all RA).
pub fn ra_half_width_deg(abs_dec_deg: f64, radius_deg: f64) -> Option<f64> {
    if abs_dec_deg + radius_deg >= 90.0 {
        return None;
    }
    let radius_rad = radius_deg.to_radians();
    let product = (abs_dec_deg - radius_deg).to_radians().cos()
        * (abs_dec_deg + radius_deg).to_radians().cos();
    Some(radius_rad.sin().atan2(product.abs().sqrt()).to_degrees())
}

/// [`ra_half_width_deg`] widened by 1e-9 relative and 1e-12° absolute, for scan windows.
fn ra_window_deg(abs_dec_deg: f64, radius_deg: f64) -> Option<f64> {
    ra_half_width_deg(abs_dec_deg, radius_deg).map(|w| w * (1.0 + WIDENING) + FLOOR_DEG)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pairs_of(index: &ZoneIndex) -> Vec<(usize, usize)> {
        let mut out = Vec::new();
        index.for_each_pair(|i, j, _| out.push((i, j)));
        out.sort_unstable();
        out
    }

    #[test]
    fn ra_half_width_matches_worked_examples() {
        // Check values (float64 evaluations of the same formula, done by hand): r = 5″ at δ = 60° gives
        // Δα = 10.000000003″; r = 10″ at δ = 89.99° gives 16.13° (naive r/cos δ: 15.92°).
        let w = ra_half_width_deg(60.0, 5.0 / 3600.0).unwrap() * 3600.0;
        assert!((w - 10.000_000_003).abs() < 1e-8, "{w}");
        let w = ra_half_width_deg(89.99, 10.0 / 3600.0).unwrap();
        assert!((w - 16.13).abs() < 0.005, "{w}");
        assert_eq!(ra_half_width_deg(89.9999, 1.0), None);
    }

    #[test]
    fn finds_pairs_across_the_seam_and_the_pole() {
        let r_deg = 2.0 / 3600.0;
        // 0-1: 1.44″·cos 10° across RA 0; 2-3: 1.8″ across the north pole; 4 far from all.
        let ra = [359.9998, 0.0002, 0.0, 180.0, 90.0];
        let dec = [10.0, 10.0, 90.0 - 0.9 / 3600.0, 90.0 - 0.9 / 3600.0, 0.0];
        let index = ZoneIndex::build(&ra, &dec, r_deg);
        assert_eq!(index.len(), 5);
        assert_eq!(pairs_of(&index), vec![(0, 1), (2, 3)]);
    }

    #[test]
    fn duplicates_and_a_zero_radius_still_pair() {
        let index = ZoneIndex::build(&[5.0, 5.0, 5.0], &[5.0, 5.0, 5.000_001], 0.0);
        assert_eq!(pairs_of(&index), vec![(0, 1)]);
    }

    #[test]
    fn invalid_points_are_left_out() {
        let index = ZoneIndex::build(&[1.0, f64::NAN, 1.0, 1.0], &[0.0, 0.0, 91.0, 0.0], 1.0);
        assert_eq!(index.len(), 2);
        assert_eq!(pairs_of(&index), vec![(0, 3)]);
        let empty = ZoneIndex::build(&[], &[], 1.0);
        assert!(empty.is_empty());
        empty.for_each_within(0.0, 0.0, 1.0, |_, _| panic!("nothing to visit"));
    }

    #[test]
    fn cone_search_reports_separations() {
        let ra = [10.0, 10.0, 10.0, 350.0];
        let dec = [0.0, 1.0 / 3600.0, 3.0 / 3600.0, 0.0];
        let index = ZoneIndex::build(&ra, &dec, 2.0 / 3600.0);
        let mut hits = Vec::new();
        index.for_each_within(10.0, 0.0, 2.0 / 3600.0, |i, s| hits.push((i, s)));
        hits.sort_by_key(|h| h.0);
        assert_eq!(hits.len(), 2);
        assert_eq!((hits[0].0, hits[1].0), (0, 1));
        // Check value: a meridian step of 1″ is 1″ (definition).
        assert!(hits[0].1.abs() < 1e-12 && (hits[1].1 - 1.0).abs() < 1e-9);
        // A radius beyond the build radius is still exact: 25° reaches RA 350° at δ = 0.
        let mut n = 0;
        index.for_each_within(10.0, 0.0, 25.0, |_, _| n += 1);
        assert_eq!(n, 4);
    }

    #[test]
    fn zone_of_covers_both_poles() {
        assert_eq!(zone_of(-90.0, 1.0), 0);
        assert_eq!(zone_of(90.0, 1.0), 180);
        assert_eq!(zone_of(0.5, 1.0), 90);
    }
}
