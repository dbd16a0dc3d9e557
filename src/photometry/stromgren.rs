//! Strömgren uvby colour indices.
//!
//! No reliable published Jy zero points exist for uvby, so the built-in Strömgren
//! bands are magnitude-only and this module works in magnitudes: the colour b−y,
//! the metal-line index m1 and the Balmer-discontinuity index c1 (Strömgren 1966,
//! ARA&A 4, 433 (from memory)):
//!
//! ```text
//! m1 = (v − b) − (b − y)
//! c1 = (u − v) − (v − b)
//! ```
//!
//! All four magnitudes must be in the same (Vega-based uvby) system.
//!
//! ```
//! use fluxloom::photometry::stromgren::indices;
//!
//! let idx = indices(10.0, 9.5, 9.2, 9.0);
//! assert!((idx.b_minus_y - 0.2).abs() < 1e-12);
//! ```

/// The Strömgren colour b−y and indices m1, c1, all in magnitudes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StromgrenIndices {
    /// Colour b − y, mag: a temperature indicator.
    pub b_minus_y: f64,
    /// m1 = (v − b) − (b − y), mag: metal-line blanketing index.
    pub m1: f64,
    /// c1 = (u − v) − (v − b), mag: Balmer-discontinuity index.
    pub c1: f64,
}

/// The Strömgren indices from u, v, b, y magnitudes (Strömgren 1966, from memory):
/// b−y, m1 = (v−b) − (b−y), c1 = (u−v) − (v−b). A NaN magnitude gives NaN in
/// the indices that use it.
pub fn indices(u: f64, v: f64, b: f64, y: f64) -> StromgrenIndices {
    let b_minus_y = b - y;
    let v_minus_b = v - b;
    let u_minus_v = u - v;
    StromgrenIndices {
        b_minus_y,
        m1: v_minus_b - b_minus_y,
        c1: u_minus_v - v_minus_b,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn indices_follow_their_definitions() {
        // m1 = (v−b) − (b−y), c1 = (u−v) − (v−b) (Strömgren 1966, from memory).
        // u = 10.0, v = 9.5, b = 9.2, y = 9.0: b−y = 0.2, v−b = 0.3, u−v = 0.5,
        // so m1 = 0.1 and c1 = 0.2 (arithmetic).
        let idx = indices(10.0, 9.5, 9.2, 9.0);
        assert!((idx.b_minus_y - 0.2).abs() < 1e-12);
        assert!((idx.m1 - 0.1).abs() < 1e-12);
        assert!((idx.c1 - 0.2).abs() < 1e-12);
    }

    #[test]
    fn indices_are_independent_of_a_common_offset() {
        // Colour indices are differences: a shift of all magnitudes (e.g. distance) cancels.
        let a = indices(12.31, 11.07, 10.42, 10.05);
        let b = indices(17.31, 16.07, 15.42, 15.05);
        assert!((a.b_minus_y - b.b_minus_y).abs() < 1e-12);
        assert!((a.m1 - b.m1).abs() < 1e-12);
        assert!((a.c1 - b.c1).abs() < 1e-12);
        // m1 = v − 2b + y and c1 = u − 2v + b, expanded (arithmetic).
        assert!((a.m1 - (11.07 - 2.0 * 10.42 + 10.05)).abs() < 1e-12);
        assert!((a.c1 - (12.31 - 2.0 * 11.07 + 10.42)).abs() < 1e-12);
    }

    #[test]
    fn nan_propagates_only_where_used() {
        let idx = indices(f64::NAN, 9.5, 9.2, 9.0);
        assert!(idx.c1.is_nan());
        assert!(!idx.m1.is_nan());
        assert!(!idx.b_minus_y.is_nan());
    }
}
