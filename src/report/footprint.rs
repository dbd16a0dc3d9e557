//! Catalog footprints for the sky map, sampled on a grid over the field.
//!
//! A footprint is the plan's coverage MOC of the catalog when the plan names
//! one and the file can still be found (relative to the plan file recorded in
//! `run.json`), else the HEALPix cells occupied by the objects that catalog
//! saw — at the plan's `coverage_order` when given, else at the order whose
//! cells hold about four of them on average (common practice for a footprint
//! from positions; the matcher's own choice of order is not in the outputs).

use std::path::{Path, PathBuf};

use crate::sky::coverage::Coverage;

/// Grid points per side of the sampled field.
pub const GRID: usize = 60;

/// One catalog's footprint on the grid.
#[derive(Debug, Clone)]
pub struct Footprint {
    /// Catalog name.
    pub catalog: String,
    /// Where it came from: the MOC file, or `occupied cells at order N`.
    pub source: String,
    /// `inside[j * GRID + i]`: grid point i (increasing RA), j (increasing Dec) is covered.
    pub inside: Vec<bool>,
}

/// The field's bounding box, degrees: (ra_min, ra_max, dec_min, dec_max).
pub type Bounds = (f64, f64, f64, f64);

/// Bounding box of positions, padded by 3 % on each side.
pub fn bounds(ra_deg: &[f64], dec_deg: &[f64]) -> Bounds {
    let fold = |v: &[f64]| {
        v.iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
                (lo.min(x), hi.max(x))
            })
    };
    let (r0, r1) = fold(ra_deg);
    let (d0, d1) = fold(dec_deg);
    if !r0.is_finite() {
        return (0.0, 1.0, 0.0, 1.0);
    }
    let pr = ((r1 - r0) * 0.03).max(1e-4);
    let pd = ((d1 - d0) * 0.03).max(1e-4);
    (r0 - pr, r1 + pr, d0 - pd, d1 + pd)
}

/// Centre of grid cell (i, j) in degrees.
pub fn grid_point(b: Bounds, i: usize, j: usize) -> (f64, f64) {
    let fx = (i as f64 + 0.5) / GRID as f64;
    let fy = (j as f64 + 0.5) / GRID as f64;
    (b.0 + fx * (b.1 - b.0), b.2 + fy * (b.3 - b.2))
}

fn sample(c: &Coverage, b: Bounds) -> Vec<bool> {
    let mut v = Vec::with_capacity(GRID * GRID);
    for j in 0..GRID {
        for i in 0..GRID {
            let (ra, dec) = grid_point(b, i, j);
            v.push(c.contains(ra, dec));
        }
    }
    v
}

/// Order whose cells hold about four of `n` positions spread over `area_sr`.
pub fn occupied_order(n: usize, area_sr: f64) -> u8 {
    let target = 4.0 * area_sr / n.max(1) as f64;
    (0u8..=16)
        .min_by(|&a, &b| {
            let cell = |k: u8| 4.0 * std::f64::consts::PI / (12.0 * 4f64.powi(k as i32));
            (cell(a) / target)
                .ln()
                .abs()
                .total_cmp(&(cell(b) / target).ln().abs())
        })
        .unwrap_or(10)
}

/// One catalog's plan entry as far as the footprint needs it.
pub struct PlanCoverage {
    /// The MOC file named in the plan, resolved against the plan's folder.
    pub moc: Option<PathBuf>,
    /// The plan's `coverage_order`.
    pub order: Option<u8>,
}

/// Coverage entries of the plan recorded in `run.json`, per `[[catalog]]` in order.
pub fn plan_coverage(plan_text: &str, plan_file: &Path) -> Vec<PlanCoverage> {
    let Ok(value) = plan_text.parse::<toml::Table>() else {
        return Vec::new();
    };
    let base = plan_file.parent().unwrap_or(Path::new("."));
    value
        .get("catalog")
        .and_then(|c| c.as_array())
        .map(|a| {
            a.iter()
                .map(|c| PlanCoverage {
                    moc: c
                        .get("coverage")
                        .and_then(|m| m.as_str())
                        .map(|m| base.join(m)),
                    order: c
                        .get("coverage_order")
                        .and_then(|o| o.as_integer())
                        .and_then(|o| u8::try_from(o).ok()),
                })
                .collect()
        })
        .unwrap_or_default()
}

/// The footprint of one catalog: its MOC when readable, else occupied cells
/// of `ra_deg`/`dec_deg` (the objects it saw).
pub fn footprint(
    catalog: &str,
    plan: Option<&PlanCoverage>,
    ra_deg: &[f64],
    dec_deg: &[f64],
    b: Bounds,
) -> Footprint {
    if let Some(moc) = plan.and_then(|p| p.moc.as_ref())
        && let Ok(c) = Coverage::from_moc_file(moc)
    {
        return Footprint {
            catalog: catalog.to_string(),
            source: format!("MOC {}", moc.display()),
            inside: sample(&c, b),
        };
    }
    let area_sr =
        (b.1 - b.0).to_radians() * ((b.3.to_radians()).sin() - (b.2.to_radians()).sin()).abs();
    let order = plan
        .and_then(|p| p.order)
        .unwrap_or_else(|| occupied_order(ra_deg.len(), area_sr));
    let c = Coverage::from_positions(order, ra_deg, dec_deg);
    Footprint {
        catalog: catalog.to_string(),
        source: format!("cells occupied by its objects, HEALPix order {order}"),
        inside: sample(&c, b),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn occupied_order_gives_about_four_per_cell() {
        // 0.07 deg² and 400 positions: 4 per cell -> 7e-4 deg² cells; order 11 cells
        // are 8.2e-4 deg² (half the 3.435' side of order 10, FIELD.md §6.1).
        let area_sr = 0.07 * (std::f64::consts::PI / 180.0).powi(2);
        assert_eq!(occupied_order(400, area_sr), 11);
    }

    #[test]
    fn plan_coverage_resolves_against_the_plan_folder() {
        let plan = "[[catalog]]\nfile = \"a.csv\"\ncoverage = \"a_moc.txt\"\n[[catalog]]\nfile = \"b.csv\"\ncoverage_order = 9\n";
        let c = plan_coverage(plan, Path::new("fields/x/plan.toml"));
        assert_eq!(c.len(), 2);
        assert_eq!(c[0].moc.as_deref(), Some(Path::new("fields/x/a_moc.txt")));
        assert_eq!(c[1].order, Some(9));
        assert!(c[1].moc.is_none());
    }

    #[test]
    fn a_footprint_from_positions_covers_them() {
        let ra = [10.0, 10.01];
        let dec = [5.0, 5.01];
        let b = bounds(&ra, &dec);
        let f = footprint("x", None, &ra, &dec, b);
        assert!(f.inside.iter().any(|&x| x));
        assert_eq!(f.inside.len(), GRID * GRID);
    }
}
