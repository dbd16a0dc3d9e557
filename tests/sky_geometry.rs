//! Sky geometry against astropy reference values (tests/fixtures/sky, written by
//! make_sky_fixtures.py with astropy 6.1.7, numpy 2.1.3, pyerfa 2.0.1.5; see VERSIONS.txt), and
//! property tests of the zone index and the HEALPix partition against brute force.

use std::collections::BTreeSet;
use std::path::PathBuf;

use fluxloom::rng::Rng;
use fluxloom::sky::partition::{home_cell, partition};
use fluxloom::sky::propagation::propagate_deg;
use fluxloom::sky::separation::{
    position_angle_deg, separation_deg, separation_vec_rad, tangent_offsets_arcsec,
};
use fluxloom::sky::vector::{ARCSEC_PER_RAD, Vec3, radec_deg_to_vec};
use fluxloom::sky::zones::ZoneIndex;
use proptest::prelude::*;

// ---------------------------------------------------------------------------------------------
// Fixture reading

fn fixture(name: &str) -> String {
    let path: PathBuf = [env!("CARGO_MANIFEST_DIR"), "tests", "fixtures", "sky", name]
        .iter()
        .collect();
    std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

/// Rows of a fixture CSV (header skipped), split on commas; the fixtures hold no quoted fields.
fn rows(name: &str) -> Vec<Vec<String>> {
    fixture(name)
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(str::to_owned).collect())
        .collect()
}

fn num(s: &str) -> f64 {
    s.parse().unwrap_or_else(|e| panic!("{s:?}: {e}"))
}

/// Difference of two angles in degrees, wrapped into (−180°, 180°].
fn angle_diff_deg(a: f64, b: f64) -> f64 {
    let d = (a - b).rem_euclid(360.0);
    if d > 180.0 { d - 360.0 } else { d }
}

// ---------------------------------------------------------------------------------------------
// Separations, position angles, tangent offsets: astropy 6.1.7 SkyCoord.separation,
// SkyCoord.position_angle and WCS RA---TAN/DEC--TAN (tests/fixtures/sky/separations.csv:
// worked pairs P1-P7, 25 small pairs S00-S24 of 1 mas to 60″, 25 large pairs L00-L24).

#[test]
fn separations_match_astropy() {
    let rows = rows("separations.csv");
    assert_eq!(rows.len(), 57);
    for r in &rows {
        let (ra1, dec1, ra2, dec2) = (num(&r[1]), num(&r[2]), num(&r[3]), num(&r[4]));
        let want_arcsec = num(&r[5]) * 3600.0;
        let got_arcsec = separation_deg(ra1, dec1, ra2, dec2) * 3600.0;
        // 1e-12 relative (0.65 µas at 180°) or 1e-9″ absolute, whichever is larger.
        let tol = (1e-12 * want_arcsec).max(1e-9);
        assert!(
            (got_arcsec - want_arcsec).abs() <= tol,
            "{}: {got_arcsec} vs {want_arcsec}",
            r[0]
        );
        let vec_arcsec =
            separation_vec_rad(radec_deg_to_vec(ra1, dec1), radec_deg_to_vec(ra2, dec2))
                * ARCSEC_PER_RAD;
        assert!(
            (vec_arcsec - want_arcsec).abs() <= tol,
            "{} (vector): {vec_arcsec} vs {want_arcsec}",
            r[0]
        );
    }
}

#[test]
fn separations_of_field_pairs_p1_to_p7() {
    // The worked pairs P1-P7, through the astropy fixture, with their rounded published-style
    // values as a second check (computed with astropy SkyCoord.separation and a 50-digit
    // mpmath Vincenty evaluation).
    let rows = rows("separations.csv");
    let expect_arcsec = [
        2.098_005_0,
        1.197_608_8,
        0.623_538_3,
        0.720_000_0,
        0.001_000_0,
    ];
    for (r, want) in rows.iter().zip(expect_arcsec) {
        let got = separation_deg(num(&r[1]), num(&r[2]), num(&r[3]), num(&r[4])) * 3600.0;
        assert!((got - want).abs() < 1e-7, "{}: {got} vs {want}", r[0]);
    }
    let p6 = separation_deg(0.0, 0.0, 180.0, 0.0001);
    assert!((p6 - 179.9999).abs() < 1e-11, "{p6}");
    let p7 = separation_deg(10.0, -20.0, 200.0, 35.0);
    assert!((p7 - 162.598_323_297_26).abs() < 1e-10, "{p7}");
}

#[test]
fn position_angles_match_astropy() {
    for r in &rows("separations.csv") {
        let (ra1, dec1, ra2, dec2) = (num(&r[1]), num(&r[2]), num(&r[3]), num(&r[4]));
        let want = num(&r[6]);
        let got = position_angle_deg(ra1, dec1, ra2, dec2);
        assert!((0.0..360.0).contains(&got), "{}: {got}", r[0]);
        // A position angle is only as well defined as the offset is long: allow 1 µas of
        // displacement across the arc, i.e. 1e-6″ / θ radians, and never less than 1e-10°.
        let sep_arcsec = num(&r[5]) * 3600.0;
        let tol_deg = (1e-6 / sep_arcsec).to_degrees().max(1e-10);
        assert!(
            angle_diff_deg(got, want).abs() <= tol_deg,
            "{}: {got} vs {want}",
            r[0]
        );
    }
}

#[test]
fn tangent_offsets_match_astropy_wcs() {
    let mut checked = 0;
    for r in &rows("separations.csv") {
        if r[7].is_empty() {
            continue;
        }
        let (ra1, dec1, ra2, dec2) = (num(&r[1]), num(&r[2]), num(&r[3]), num(&r[4]));
        let (xi, eta) = tangent_offsets_arcsec(ra1, dec1, ra2, dec2);
        let (want_xi, want_eta) = (num(&r[7]), num(&r[8]));
        // WCSLIB works in degrees through its own trigonometry: agree to 1e-12 relative or
        // 1 nanoarcsec (the largest difference seen is 1.6e-10″).
        let tol = |w: f64| (1e-12 * w.abs()).max(1e-9);
        assert!(
            (xi - want_xi).abs() <= tol(want_xi),
            "{}: xi {xi} vs {want_xi}",
            r[0]
        );
        assert!(
            (eta - want_eta).abs() <= tol(want_eta),
            "{}: eta {eta} vs {want_eta}",
            r[0]
        );
        checked += 1;
    }
    assert_eq!(checked, 39);
}

// ---------------------------------------------------------------------------------------------
// Propagation: astropy 6.1.7 SkyCoord.apply_space_motion from J2016.0 (TDB) by dt_yr Julian
// years, distance 10 pc, radial velocity 0 km/s (tests/fixtures/sky/propagation.csv). With zero
// radial velocity the straight-line space motion is distance-independent, so the linear form
// must agree closely; the case F58 is the 1.789″ worked example below.

#[test]
fn propagation_matches_astropy_space_motion() {
    let rows = rows("propagation.csv");
    assert_eq!(rows.len(), 8);
    for r in &rows {
        let (ra, dec, pma, pmd, dt) = (num(&r[1]), num(&r[2]), num(&r[3]), num(&r[4]), num(&r[5]));
        let (want_ra, want_dec) = (num(&r[6]), num(&r[7]));
        let (got_ra, got_dec) = propagate_deg(ra, dec, pma, pmd, dt);
        let miss_mas = separation_deg(got_ra, got_dec, want_ra, want_dec) * 3.6e6;
        // 1 nanoarcsec (the largest difference seen is 1.7e-8 mas, for FAST), far inside the
        // 0.1 mas needed for matching.
        assert!(miss_mas < 1e-6, "{}: off by {miss_mas} mas", r[0]);
    }
}

#[test]
fn propagation_field_example_moves_1_789_arcsec() {
    // Worked example: μα* = 100, μδ = −50 mas/yr, 2016.0 → 2000.0: 1.789″ (= 16·√12500 mas,
    // exact arithmetic), at δ = 60°; α = 30° chosen here.
    let (ra, dec) = propagate_deg(30.0, 60.0, 100.0, -50.0, -16.0);
    let moved = separation_deg(30.0, 60.0, ra, dec) * 3600.0;
    assert!(
        (moved - 16.0 * 12_500f64.sqrt() / 1000.0).abs() < 1e-9,
        "{moved}"
    );
}

// ---------------------------------------------------------------------------------------------
// Zone index against the astropy brute-force pairs (tests/fixtures/sky/pairs.csv: every pair
// with SkyCoord.separation ≤ radius among the points of points.csv).

#[test]
fn zone_pairs_match_astropy_brute_force() {
    let points = rows("points.csv");
    let pairs = rows("pairs.csv");
    for field in ["wrap", "north", "south", "plain"] {
        let pts: Vec<&Vec<String>> = points.iter().filter(|r| r[0] == field).collect();
        let ra: Vec<f64> = pts.iter().map(|r| num(&r[1])).collect();
        let dec: Vec<f64> = pts.iter().map(|r| num(&r[2])).collect();
        let want: Vec<(usize, usize, f64)> = pairs
            .iter()
            .filter(|r| r[0] == field)
            .map(|r| (r[2].parse().unwrap(), r[3].parse().unwrap(), num(&r[4])))
            .collect();
        let radius_arcsec = num(&pairs.iter().find(|r| r[0] == field).unwrap()[1]);
        let index = ZoneIndex::build(&ra, &dec, radius_arcsec / 3600.0);
        let mut got = Vec::new();
        index.for_each_pair(|i, j, s| got.push((i, j, s)));
        got.sort_by_key(|a| (a.0, a.1));
        assert_eq!(got.len(), want.len(), "{field}");
        for (g, w) in got.iter().zip(&want) {
            assert_eq!((g.0, g.1), (w.0, w.1), "{field}");
            assert!((g.2 - w.2).abs() < 1e-9, "{field} {g:?} vs {w:?}");
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Property tests against brute force.

/// Where a random field lies.
#[derive(Debug, Clone, Copy)]
enum Place {
    /// Anywhere with |δ| < 80°.
    Anywhere,
    /// Centred on RA 0/360.
    Seam,
    /// A cap around the north pole.
    North,
    /// A cap around the south pole.
    South,
}

fn place() -> impl Strategy<Value = Place> {
    prop_oneof![
        Just(Place::Anywhere),
        Just(Place::Seam),
        Just(Place::North),
        Just(Place::South)
    ]
}

/// `n` points in a field of half-size `half_deg` (a box, or a polar cap of that radius), plus
/// a few exact duplicates; RA given in [0, 360).
fn field(place: Place, n: usize, half_deg: f64, seed: u64) -> (Vec<f64>, Vec<f64>) {
    let mut rng = Rng::new(seed, "sky");
    let (ra0, dec0) = match place {
        Place::Anywhere => (rng.range(0.0, 360.0), rng.range(-80.0, 80.0)),
        Place::Seam => (0.0, rng.range(-80.0, 80.0)),
        Place::North => (0.0, 90.0),
        Place::South => (0.0, -90.0),
    };
    let (mut ra, mut dec) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for _ in 0..n {
        let (a, d) = match place {
            Place::North | Place::South => {
                // uniform in area within the cap
                let colat = half_deg * rng.range(0.0, 1.0).sqrt();
                (rng.range(0.0, 360.0), dec0.signum() * (90.0 - colat))
            }
            _ => {
                let d = (dec0 + rng.range(-half_deg, half_deg)).clamp(-90.0, 90.0);
                let a = ra0 + rng.range(-half_deg, half_deg) / d.to_radians().cos();
                (a.rem_euclid(360.0) % 360.0, d)
            }
        };
        ra.push(a);
        dec.push(d);
    }
    for k in 0..n / 50 {
        let src = (rng.next_u64() % n as u64) as usize;
        ra[k] = ra[src];
        dec[k] = dec[src];
    }
    (ra, dec)
}

fn vectors(ra: &[f64], dec: &[f64]) -> Vec<Vec3> {
    ra.iter()
        .zip(dec)
        .map(|(&a, &d)| radec_deg_to_vec(a, d))
        .collect()
}

/// Checks that two pair sets agree except for pairs whose separation is within rounding of
/// the radius, where the chord test and the atan2 test may legitimately differ.
fn assert_same_pairs(
    got: &BTreeSet<(usize, usize)>,
    want: &BTreeSet<(usize, usize)>,
    v: &[Vec3],
    radius_rad: f64,
) {
    for &(i, j) in got.symmetric_difference(want) {
        let sep = separation_vec_rad(v[i], v[j]);
        assert!(
            (sep - radius_rad).abs() <= 1e-12 * radius_rad + 1e-15,
            "pair ({i}, {j}) at {} arcsec differs (radius {} arcsec); in index: {}",
            sep * ARCSEC_PER_RAD,
            radius_rad * ARCSEC_PER_RAD,
            got.contains(&(i, j))
        );
    }
}

fn brute_pairs(v: &[Vec3], radius_rad: f64) -> BTreeSet<(usize, usize)> {
    let mut out = BTreeSet::new();
    for i in 0..v.len() {
        for j in i + 1..v.len() {
            if separation_vec_rad(v[i], v[j]) <= radius_rad {
                out.insert((i, j));
            }
        }
    }
    out
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// `for_each_pair` visits exactly the brute-force pair set, each pair once with i < j.
    #[test]
    fn zone_pairs_equal_brute_force(
        place in place(),
        seed in any::<u64>(),
        radius_arcsec in 0.5f64..60.0,
        box_factor in 3.0f64..30.0,
    ) {
        let half_deg = radius_arcsec * box_factor / 3600.0;
        let (ra, dec) = field(place, 200, half_deg, seed);
        let v = vectors(&ra, &dec);
        let radius_rad = (radius_arcsec / 3600.0).to_radians();
        let index = ZoneIndex::build(&ra, &dec, radius_arcsec / 3600.0);
        prop_assert_eq!(index.len(), 200);
        let mut got = BTreeSet::new();
        let mut visits = 0usize;
        index.for_each_pair(|i, j, sep_arcsec| {
            assert!(i < j);
            let want = separation_vec_rad(v[i], v[j]) * ARCSEC_PER_RAD;
            assert!((sep_arcsec - want).abs() <= 1e-12 * want.max(1.0));
            got.insert((i, j));
            visits += 1;
        });
        prop_assert_eq!(visits, got.len(), "a pair was visited twice");
        assert_same_pairs(&got, &brute_pairs(&v, radius_rad), &v, radius_rad);
    }

    /// `for_each_within` finds exactly the points within a radius (at most the build radius)
    /// of query points in and around the field.
    #[test]
    fn zone_cone_search_equals_brute_force(
        place in place(),
        seed in any::<u64>(),
        radius_arcsec in 0.5f64..60.0,
        box_factor in 3.0f64..30.0,
        query_fraction in 0.2f64..1.0,
    ) {
        let half_deg = radius_arcsec * box_factor / 3600.0;
        let (ra, dec) = field(place, 200, half_deg, seed);
        let v = vectors(&ra, &dec);
        let index = ZoneIndex::build(&ra, &dec, radius_arcsec / 3600.0);
        let query_deg = radius_arcsec * query_fraction / 3600.0;
        let query_rad = query_deg.to_radians();
        let (qra, qdec) = field(place, 20, half_deg * 1.2, seed ^ 0x5EED);
        for (&a, &d) in qra.iter().zip(&qdec) {
            let q = radec_deg_to_vec(a, d);
            let mut got = BTreeSet::new();
            index.for_each_within(a, d, query_deg, |i, sep_arcsec| {
                let want = separation_vec_rad(q, v[i]) * ARCSEC_PER_RAD;
                assert!((sep_arcsec - want).abs() <= 1e-12 * want.max(1.0));
                assert!(got.insert(i), "point {i} visited twice");
            });
            for (i, &p) in v.iter().enumerate() {
                let sep = separation_vec_rad(q, p);
                if got.contains(&i) != (sep <= query_rad) {
                    prop_assert!((sep - query_rad).abs() <= 1e-12 * query_rad + 1e-15,
                        "query ({a}, {d}) point {i} at {} arcsec", sep * ARCSEC_PER_RAD);
                }
            }
        }
    }

    /// Every source is in exactly one core, and for every pair within the margin radius both
    /// members are in core ∪ margin of the home cell of each member.
    #[test]
    fn partition_loses_no_pair(
        place in place(),
        seed in any::<u64>(),
        order in 6u8..=12,
        box_cells in 0.3f64..2.0,
        radius_fraction in 0.01f64..0.1,
    ) {
        let cell_deg = 58.63 / f64::from(1u32 << order);
        let half_deg = cell_deg * box_cells;
        let margin_deg = half_deg * radius_fraction;
        let (ra, dec) = field(place, 200, half_deg, seed);
        let v = vectors(&ra, &dec);
        let cells = partition(order, &ra, &dec, margin_deg);
        let mut core_count = vec![0u32; ra.len()];
        for cell in &cells {
            for &i in &cell.core {
                core_count[i as usize] += 1;
                prop_assert_eq!(home_cell(order, ra[i as usize], dec[i as usize]), cell.id);
            }
        }
        prop_assert!(core_count.iter().all(|&c| c == 1));
        let members = |id: u64| -> BTreeSet<u32> {
            let cell = cells.iter().find(|c| c.id == id).expect("home cell present");
            cell.core.iter().chain(&cell.margin).copied().collect()
        };
        for (i, j) in brute_pairs(&v, margin_deg.to_radians()) {
            for k in [i, j] {
                let m = members(home_cell(order, ra[k], dec[k]));
                prop_assert!(m.contains(&(i as u32)) && m.contains(&(j as u32)),
                    "pair ({}, {}) lost in the home cell of {}", i, j, k);
            }
        }
    }

    /// The same with small margins and the points packed around a corner or an edge
    /// of a cell, where the shortcut for sources deep inside their cell must not
    /// drop a source that belongs in a neighbour's margin.
    #[test]
    fn partition_loses_no_pair_at_cell_borders(
        seed in any::<u64>(),
        order in 4u8..=12,
        vertex in 0usize..4,
        along_edge in 0.0f64..1.0,
        margin_fraction in 0.0005f64..0.02,
        polar in any::<bool>(),
    ) {
        let mut rng = Rng::new(seed, "borders");
        let (lon0, lat0) = if polar {
            (rng.range(0.0, 360.0), rng.range(75.0, 89.0) * if rng.uniform() < 0.5 { -1.0 } else { 1.0 })
        } else {
            (rng.range(0.0, 360.0), rng.range(-60.0, 60.0))
        };
        let hash = home_cell(order, lon0, lat0);
        let corners = cdshealpix::nested::vertices(order, hash);
        let (a, b) = (corners[vertex], corners[(vertex + 1) % 4]);
        // A point on the cell's edge between two vertices (a straight mix of their
        // coordinates is close enough to the edge for this purpose).
        let mut dlon = b.0 - a.0;
        if dlon > std::f64::consts::PI { dlon -= 2.0 * std::f64::consts::PI; }
        if dlon < -std::f64::consts::PI { dlon += 2.0 * std::f64::consts::PI; }
        let centre = ((a.0 + along_edge * dlon).to_degrees().rem_euclid(360.0), (a.1 + along_edge * (b.1 - a.1)).to_degrees());
        let cell_deg = 58.63 / f64::from(1u32 << order);
        let margin_deg = cell_deg * margin_fraction;
        let mut ra = Vec::new();
        let mut dec = Vec::new();
        for _ in 0..200 {
            let (r, d) = fluxloom::sky::propagation::propagate_deg(
                centre.0, centre.1.clamp(-89.999, 89.999),
                rng.range(-3.0, 3.0) * margin_deg * 3.6e6,
                rng.range(-3.0, 3.0) * margin_deg * 3.6e6,
                1.0,
            );
            ra.push(r);
            dec.push(d);
        }
        let v = vectors(&ra, &dec);
        let cells = partition(order, &ra, &dec, margin_deg);
        let members = |id: u64| -> BTreeSet<u32> {
            let cell = cells.iter().find(|c| c.id == id).expect("home cell present");
            cell.core.iter().chain(&cell.margin).copied().collect()
        };
        let pairs = brute_pairs(&v, margin_deg.to_radians());
        prop_assert!(!pairs.is_empty());
        for (i, j) in pairs {
            for k in [i, j] {
                let m = members(home_cell(order, ra[k], dec[k]));
                prop_assert!(m.contains(&(i as u32)) && m.contains(&(j as u32)),
                    "pair ({}, {}) lost in the home cell of {}", i, j, k);
            }
        }
    }
}
