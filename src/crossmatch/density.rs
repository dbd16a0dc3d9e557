//! Surface densities of catalogs, for the association prior.
//!
//! A catalog's footprint area is estimated from its own positions: the number of
//! HEALPix cells it occupies times the cell area, at the finest order (at most
//! [`MAX_ORDER`]) where occupied cells hold on average at least
//! [`MIN_MEAN_OCCUPANCY`] sources. For sources spread evenly over an area A, the
//! occupied fraction of cells of area a is 1 − exp(−Na/A), so at a mean occupancy
//! of 8 the estimate is within 0.03 % of A, plus the partly covered cells at the
//! edge (common practice; the edge makes small fields look slightly larger).
//! Catalogs with fewer than [`MIN_MEAN_OCCUPANCY`] sources fall back to the
//! order-[`FALLBACK_ORDER`] cells they touch. A plan can set the area instead.

use crate::sky::partition::{cell_area_sr, home_cell};

/// Finest order tried.
pub const MAX_ORDER: u8 = 16;
/// Mean sources per occupied cell required.
pub const MIN_MEAN_OCCUPANCY: f64 = 8.0;
/// Order used for catalogs too small for the occupancy rule (cells of about 3.4′).
pub const FALLBACK_ORDER: u8 = 10;

/// Estimated footprint area of a set of positions, steradians.
pub fn footprint_area_sr(ra_deg: &[f64], dec_deg: &[f64]) -> f64 {
    if ra_deg.is_empty() {
        return 0.0;
    }
    Occupancy::new(ra_deg, dec_deg).footprint_area_sr()
}

/// The HEALPix order at which a catalog's occupied cells trace its footprint:
/// the finest (at most [`MAX_ORDER`]) whose occupied cells hold at least
/// [`MIN_MEAN_OCCUPANCY`] sources on average, else [`FALLBACK_ORDER`].
pub fn footprint_order(ra_deg: &[f64], dec_deg: &[f64]) -> u8 {
    Occupancy::new(ra_deg, dec_deg).footprint_order()
}

/// The sources' cells at [`MAX_ORDER`], sorted, from which the occupied cells of
/// every coarser order follow by shifting (NESTED parents are p >> 2). A
/// streaming read collects them batch by batch ([`Occupancy::from_cells`]), or
/// keeps only their counts ([`OccupiedCounts`]).
pub struct Occupancy {
    cells: Vec<u64>,
}

impl Occupancy {
    /// The occupancy of a set of positions.
    pub fn new(ra_deg: &[f64], dec_deg: &[f64]) -> Occupancy {
        Occupancy::from_cells(
            ra_deg
                .iter()
                .zip(dec_deg)
                .map(|(&ra, &dec)| home_cell(MAX_ORDER, ra, dec))
                .collect(),
        )
    }

    /// The occupancy of sources whose cells at [`MAX_ORDER`] are `cells` (any order).
    pub fn from_cells(mut cells: Vec<u64>) -> Occupancy {
        cells.sort_unstable();
        Occupancy { cells }
    }

    /// The footprint area, steradians (0 without sources).
    pub fn footprint_area_sr(&self) -> f64 {
        self.counts().footprint_area_sr()
    }

    /// The distinct occupied cells at `order` (at most [`MAX_ORDER`]), ascending.
    pub fn cells_at(&self, order: u8) -> impl Iterator<Item = u64> + '_ {
        let shift = 2 * u32::from(MAX_ORDER - order.min(MAX_ORDER));
        let mut last = None;
        self.cells.iter().filter_map(move |&c| {
            let parent = c >> shift;
            (last != Some(parent)).then(|| {
                last = Some(parent);
                parent
            })
        })
    }

    /// See [`footprint_order`].
    pub fn footprint_order(&self) -> u8 {
        self.counts().footprint_order()
    }

    /// The counts the footprint rule needs.
    fn counts(&self) -> OccupiedCounts {
        let mut counts = OccupiedCounts::default();
        counts.add_sources(self.cells.len());
        for &c in &self.cells {
            counts.add_cell(c);
        }
        counts
    }
}

/// The number of sources and of distinct occupied cells at every order up to
/// [`MAX_ORDER`]: all the footprint rule needs, gathered from the distinct
/// cells at [`MAX_ORDER`] in ascending order, so that a streaming build can
/// merge sorted runs of cells from disk instead of holding one cell per source.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct OccupiedCounts {
    sources: usize,
    occupied: [usize; MAX_ORDER as usize + 1],
    /// The last cell counted.
    last: Option<u64>,
}

impl OccupiedCounts {
    /// Counts `n` more sources.
    pub fn add_sources(&mut self, n: usize) {
        self.sources += n;
    }

    /// Counts `cell`, a cell at [`MAX_ORDER`] no smaller than the last one
    /// counted (cells come in ascending order; a repeat adds nothing): it opens
    /// a new occupied cell at every order where its parent differs from the
    /// last cell's.
    pub fn add_cell(&mut self, cell: u64) {
        let previous = self.last.replace(cell);
        for order in 0..=MAX_ORDER {
            let shift = 2 * u32::from(MAX_ORDER - order);
            if previous.is_none_or(|p| p >> shift != cell >> shift) {
                self.occupied[order as usize] += 1;
            }
        }
    }

    /// Distinct cells at `order` (at least 1).
    fn occupied(&self, order: u8) -> usize {
        self.occupied[order as usize].max(1)
    }

    /// See [`footprint_order`].
    pub fn footprint_order(&self) -> u8 {
        let n = self.sources as f64;
        let dense_enough = |order: u8| n / self.occupied(order) as f64 >= MIN_MEAN_OCCUPANCY;
        if !dense_enough(0) {
            return FALLBACK_ORDER;
        }
        // Occupancy falls as the order rises: binary search for the finest order meeting it.
        let (mut lo, mut hi) = (0u8, MAX_ORDER);
        while lo < hi {
            let mid = (lo + hi).div_ceil(2);
            if dense_enough(mid) {
                lo = mid;
            } else {
                hi = mid - 1;
            }
        }
        lo
    }

    /// The footprint area, steradians (0 without sources).
    pub fn footprint_area_sr(&self) -> f64 {
        if self.sources == 0 {
            return 0.0;
        }
        let order = self.footprint_order();
        self.occupied(order) as f64 * cell_area_sr(order)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_uniform_square_degree_is_about_one_square_degree() {
        // 40 000 points on a regular grid filling RA 150–151, Dec 2–3 (a "square"
        // of 1° × 1° · cos 2.5° = 0.99905 deg²). The estimate may exceed the true
        // area by the partly covered edge cells.
        let mut ra = Vec::new();
        let mut dec = Vec::new();
        for i in 0..200 {
            for j in 0..200 {
                ra.push(150.0 + (i as f64 + 0.5) / 200.0);
                dec.push(2.0 + (j as f64 + 0.5) / 200.0);
            }
        }
        let sr_per_deg2 = (std::f64::consts::PI / 180.0).powi(2);
        let area_deg2 = footprint_area_sr(&ra, &dec) / sr_per_deg2;
        assert!(area_deg2 > 0.99 && area_deg2 < 1.25, "{area_deg2}");
    }

    #[test]
    fn tiny_catalogs_use_the_fallback_order() {
        let a = footprint_area_sr(&[10.0, 10.0001], &[20.0, 20.0]);
        assert_eq!(a, cell_area_sr(FALLBACK_ORDER));
        assert_eq!(footprint_area_sr(&[], &[]), 0.0);
    }
}
