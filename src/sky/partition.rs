//! Partition of a source list into HEALPix NESTED cells with margins, so each cell can be
//! matched on its own and no pair across a cell border is lost.
//!
//! HEALPix (Górski et al. 2005, ApJ 622, 759) divides the sphere into 12·4^k equal-area cells at
//! order k; the NESTED numbering makes the children of cell p at order k the cells 4p … 4p + 3
//! at order k + 1. Every source has one *home* cell, the cell containing it. It is also copied,
//! as a *margin* entry, into every other cell that its disc of radius `margin_deg` touches
//! (common practice). A pair of sources at most `margin_deg` apart then has both members in the
//! home cell of either member, so evaluating a pair only in the home cell of one chosen member
//! finds it exactly once.
//!
//! ```
//! use fluxloom::sky::partition::{home_cell, partition};
//!
//! let ra_deg = [10.0, 10.0001, 200.0];
//! let dec_deg = [-5.0, -5.0, 40.0];
//! let cells = partition(8, &ra_deg, &dec_deg, 1.0 / 3600.0);
//! let total_core: usize = cells.iter().map(|c| c.core.len()).sum();
//! assert_eq!(total_core, 3);
//! let home0 = home_cell(8, 10.0, -5.0);
//! let cell0 = cells.iter().find(|c| c.id == home0).unwrap();
//! assert!(cell0.core.contains(&0) || cell0.margin.contains(&0));
//! ```

use rayon::prelude::*;

/// One HEALPix NESTED cell of a partition: the sources it owns and the nearby sources it sees.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Cell {
    /// NESTED cell number at the partition order, in [0, 12·4^order).
    pub id: u64,
    /// Indices (into the input arrays) of the sources whose home cell is `id`, ascending.
    pub core: Vec<u32>,
    /// Indices of other sources whose disc of radius `margin_deg` may touch this cell
    /// (an over-inclusive test: it never misses one, it may add a few), ascending.
    pub margin: Vec<u32>,
}

/// Relative widening of the margin radius, so rounding in the cone coverage cannot drop a
/// source exactly `margin_deg` from a cell edge (dimensionless; 1e-9 of 1″ is 1 µas).
const MARGIN_WIDENING: f64 = 1e-9;

/// Absolute widening of the margin radius in radians (1e-14 rad = 2 nanoarcsec), for
/// `margin_deg` = 0, where the relative widening vanishes.
const MARGIN_FLOOR_RAD: f64 = 1e-14;

/// NESTED HEALPix cell containing (`ra_deg`, `dec_deg`) at `order` (0 ≤ order ≤ 29), both in
/// degrees; δ is clamped to [−90°, 90°].
///
/// # Panics
/// If `order` > 29 (the deepest order whose cell numbers fit in 64 bits, Górski et al. 2005).
pub fn home_cell(order: u8, ra_deg: f64, dec_deg: f64) -> u64 {
    assert!(order <= 29, "HEALPix order {order} is above 29");
    let lat_rad = dec_deg
        .to_radians()
        .clamp(-std::f64::consts::FRAC_PI_2, std::f64::consts::FRAC_PI_2);
    cdshealpix::nested::get(order).hash(ra_deg.to_radians(), lat_rad)
}

/// Solid angle of one HEALPix cell at `order`, in steradians: 4π / (12·4^order)
/// (Górski et al. 2005); 0.0818 sr at order 1, 3.12e-6 sr at order 8.
pub fn cell_area_sr(order: u8) -> f64 {
    4.0 * std::f64::consts::PI / (12.0 * 4f64.powi(i32::from(order)))
}

/// A cheap, exact shortcut of the cone query for sources deep inside their cell.
///
/// Take a finer order whose cells are at least [`INTERIOR_CELLS_PER_RADIUS`] radii
/// across (by the square root of their area). A source whose fine cell is not on
/// the edge of its cell at the partition order has all eight fine neighbours in the
/// same coarse cell (NESTED children share the parent's bits, Górski et al. 2005),
/// so its disc, narrower than one fine cell, cannot reach another coarse cell. The
/// factor is generous: HEALPix cells are nowhere narrower than a fraction of the
/// square root of their area far above 1/8 (common practice; the partition tests,
/// which pack points around cell corners and edges, check every pair is kept).
struct InteriorTest {
    fine: Option<(&'static cdshealpix::nested::Layer, u32)>,
}

/// How many margin radii a fine cell must span for the interior shortcut.
const INTERIOR_CELLS_PER_RADIUS: f64 = 8.0;

impl InteriorTest {
    fn new(order: u8, radius_rad: f64) -> InteriorTest {
        let fine_order = (order..=29)
            .rev()
            .find(|&k| cell_area_sr(k).sqrt() >= INTERIOR_CELLS_PER_RADIUS * radius_rad);
        InteriorTest {
            fine: fine_order
                .filter(|&k| k >= order + 2)
                .map(|k| (cdshealpix::nested::get(k), u32::from(k - order))),
        }
    }

    /// True when the disc around the position cannot leave its coarse cell.
    fn holds(&self, lon_rad: f64, lat_rad: f64) -> bool {
        let Some((layer, levels)) = self.fine else {
            return false;
        };
        // The low 2·levels bits of the fine hash interleave the fine cell's (i, j)
        // inside its coarse parent; interior means neither is 0 or 2^levels − 1.
        let local = layer.hash(lon_rad, lat_rad) & ((1u64 << (2 * levels)) - 1);
        let (mut i, mut j) = (0u64, 0u64);
        for b in 0..levels {
            i |= ((local >> (2 * b)) & 1) << b;
            j |= ((local >> (2 * b + 1)) & 1) << b;
        }
        let last = (1u64 << levels) - 1;
        i > 0 && i < last && j > 0 && j < last
    }
}

/// Splits sources into the non-empty HEALPix NESTED cells at `order`, each with its core and
/// margin sources (see [`Cell`]); cells are sorted by id.
///
/// Every source with a finite position and |δ| ≤ 90° is in exactly one core. A source is in
/// the margin of every other cell its disc of radius `margin_deg` touches, found with the
/// over-inclusive cone coverage of `cdshealpix` (`cone_coverage_approx`, which may list a
/// neighbouring cell the disc misses but never omits one it touches), on a radius widened by
/// 1e-9 relative. Cells with no core sources are not returned, even if they have margin sources.
///
/// # Arguments
/// - `order`: HEALPix order k in [0, 29]; cells are about 58.6° / 2^k across.
/// - `ra_deg`, `dec_deg`: positions in degrees, same length. Sources whose RA or Dec is not
///   finite, or whose |δ| exceeds 90°, belong to no cell.
/// - `margin_deg`: margin radius in degrees, ≥ 0 (the largest match radius in use).
///
/// # Panics
/// If the slices differ in length, hold more than `u32::MAX` sources, `order` > 29, or
/// `margin_deg` is negative or not finite.
pub fn partition(order: u8, ra_deg: &[f64], dec_deg: &[f64], margin_deg: f64) -> Vec<Cell> {
    split(order, ra_deg, dec_deg, margin_deg, false)
}

/// As [`partition`], but also returns the cells that hold only margin sources.
///
/// For sources split a part at a time (one catalog, one input batch), whose
/// cells are joined afterwards with those of other parts: a cell may have its
/// core sources in another part, and its margin sources here must not be lost.
pub fn partition_keeping_margins(
    order: u8,
    ra_deg: &[f64],
    dec_deg: &[f64],
    margin_deg: f64,
) -> Vec<Cell> {
    split(order, ra_deg, dec_deg, margin_deg, true)
}

/// The cells of [`partition`]; with `keep_margin_only`, also those without core sources.
fn split(
    order: u8,
    ra_deg: &[f64],
    dec_deg: &[f64],
    margin_deg: f64,
    keep_margin_only: bool,
) -> Vec<Cell> {
    assert_eq!(
        ra_deg.len(),
        dec_deg.len(),
        "ra_deg and dec_deg differ in length"
    );
    assert!(
        u32::try_from(ra_deg.len()).is_ok(),
        "more than u32::MAX sources"
    );
    assert!(order <= 29, "HEALPix order {order} is above 29");
    assert!(
        margin_deg.is_finite() && margin_deg >= 0.0,
        "margin_deg must be finite and >= 0, got {margin_deg}"
    );
    let layer = cdshealpix::nested::get(order);
    let radius_rad = margin_deg.to_radians() * (1.0 + MARGIN_WIDENING) + MARGIN_FLOOR_RAD;
    let interior = InteriorTest::new(order, radius_rad);

    // (cell id, source index, is_margin); a source is listed at most once per cell.
    let mut entries: Vec<(u64, u32, bool)> = (0..ra_deg.len())
        .into_par_iter()
        .fold(Vec::new, |mut acc, i| {
            let (ra, dec) = (ra_deg[i], dec_deg[i]);
            if !(ra.is_finite() && dec.is_finite() && dec.abs() <= 90.0) {
                return acc;
            }
            let lon_rad = ra.to_radians();
            let lat_rad = dec
                .to_radians()
                .clamp(-std::f64::consts::FRAC_PI_2, std::f64::consts::FRAC_PI_2);
            let home = layer.hash(lon_rad, lat_rad);
            let idx = i as u32;
            acc.push((home, idx, false));
            if interior.holds(lon_rad, lat_rad) {
                return acc;
            }
            for cell in layer
                .cone_coverage_approx(lon_rad, lat_rad, radius_rad)
                .flat_iter()
            {
                if cell != home {
                    acc.push((cell, idx, true));
                }
            }
            acc
        })
        .reduce(Vec::new, |mut a, mut b| {
            if a.len() < b.len() {
                std::mem::swap(&mut a, &mut b);
            }
            a.append(&mut b);
            a
        });
    entries.par_sort_unstable_by_key(|&(cell, idx, _)| (cell, idx));

    let mut cells = Vec::new();
    for group in entries.chunk_by(|a, b| a.0 == b.0) {
        let mut cell = Cell {
            id: group[0].0,
            core: Vec::new(),
            margin: Vec::new(),
        };
        for &(_, idx, is_margin) in group {
            if is_margin {
                cell.margin.push(idx);
            } else {
                cell.core.push(idx);
            }
        }
        if keep_margin_only || !cell.core.is_empty() {
            cells.push(cell);
        }
    }
    cells
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn margins_of_cells_without_core_sources_are_kept_when_asked() {
        // A source 1″ west of the boundary between two order-11 cells: its home
        // cell has it as core, the neighbour only as margin.
        let order = 11;
        let dec = 12.341_465;
        let home = home_cell(order, 231.270_607_3, dec);
        // Walk east until the cell changes, then put the source 1″ back west.
        let mut ra = 231.270_607_3;
        while home_cell(order, ra, dec) == home {
            ra += 0.1 / 3600.0;
        }
        let ra = ra - 1.0 / 3600.0;
        let home = home_cell(order, ra, dec);
        let margin_deg = 10.0 / 3600.0;
        let dropped = partition(order, &[ra], &[dec], margin_deg);
        assert_eq!(dropped.len(), 1);
        assert_eq!(dropped[0].id, home);
        let kept = partition_keeping_margins(order, &[ra], &[dec], margin_deg);
        assert!(kept.len() >= 2, "{}", kept.len());
        assert!(kept.iter().any(|c| c.id == home && c.core == [0]));
        assert!(
            kept.iter()
                .filter(|c| c.id != home)
                .all(|c| c.core.is_empty() && c.margin == [0])
        );
    }

    #[test]
    fn cell_areas_match_the_healpix_table() {
        // Check values: whole sphere 4π sr; sqrt(area) at order 8 = 13.74′ and order 12 =
        // 51.53″ (computed with the general-purpose HEALPix library healpy).
        assert!((cell_area_sr(0) * 12.0 - 4.0 * std::f64::consts::PI).abs() < 1e-14);
        let side_arcmin = cell_area_sr(8).sqrt().to_degrees() * 60.0;
        assert!((side_arcmin - 13.74).abs() < 0.005, "{side_arcmin}");
        let side_arcsec = cell_area_sr(12).sqrt().to_degrees() * 3600.0;
        assert!((side_arcsec - 51.53).abs() < 0.005, "{side_arcsec}");
    }

    #[test]
    fn home_cells_nest() {
        // NESTED property (Górski et al. 2005): the parent of a cell is its number >> 2.
        for &(ra, dec) in &[(0.0, 0.0), (359.999, -89.99), (123.4, 45.6), (45.0, 90.0)] {
            for order in 1..=12u8 {
                assert_eq!(
                    home_cell(order, ra, dec) >> 2,
                    home_cell(order - 1, ra, dec)
                );
            }
        }
        assert!(home_cell(0, 45.0, 90.0) < 12);
    }

    #[test]
    fn every_source_has_one_core_and_lists_are_sorted() {
        let ra: Vec<f64> = (0..500).map(|i| (i as f64 * 0.7371) % 360.0).collect();
        let dec: Vec<f64> = (0..500)
            .map(|i| ((i as f64 * 1.913) % 180.0) - 90.0)
            .collect();
        let cells = partition(3, &ra, &dec, 2.0);
        let mut seen = vec![0u32; ra.len()];
        for w in cells.windows(2) {
            assert!(w[0].id < w[1].id);
        }
        for cell in &cells {
            assert!(!cell.core.is_empty());
            assert!(cell.core.windows(2).all(|w| w[0] < w[1]));
            assert!(cell.margin.windows(2).all(|w| w[0] < w[1]));
            for &i in &cell.core {
                seen[i as usize] += 1;
                assert_eq!(home_cell(3, ra[i as usize], dec[i as usize]), cell.id);
            }
            for &i in &cell.margin {
                assert_ne!(home_cell(3, ra[i as usize], dec[i as usize]), cell.id);
            }
        }
        assert!(seen.iter().all(|&n| n == 1));
    }

    #[test]
    fn a_source_on_a_border_reaches_the_neighbour() {
        // Find a cell border along δ = 10° by bisection in RA, then put two sources 0.2″ apart
        // on either side of it.
        let dec = 10.0;
        let (mut lo, mut hi) = (0.0, 90.0);
        assert_ne!(home_cell(0, lo, dec), home_cell(0, hi, dec));
        while hi - lo > 1e-12 {
            let mid = 0.5 * (lo + hi);
            if home_cell(0, mid, dec) == home_cell(0, lo, dec) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let ra = [lo - 0.1 / 3600.0, hi + 0.1 / 3600.0];
        assert_ne!(home_cell(0, ra[0], dec), home_cell(0, ra[1], dec));
        let cells = partition(0, &ra, &[dec, dec], 1.0 / 3600.0);
        assert_eq!(cells.len(), 2);
        for cell in &cells {
            assert_eq!(cell.core.len() + cell.margin.len(), 2);
        }
    }

    #[test]
    fn bad_positions_belong_to_no_cell() {
        let cells = partition(4, &[1.0, f64::NAN, 3.0], &[1.0, 2.0, 95.0], 0.001);
        let all: Vec<u32> = cells
            .iter()
            .flat_map(|c| c.core.iter().chain(&c.margin))
            .copied()
            .collect();
        assert_eq!(all, vec![0]);
    }
}
