//! Spatial-index benchmark: all pairs within 1″ between two catalogs of 1,000,000 points each
//! in a 10 deg² field, 70 % of the second catalog within 0.3″ of a first-catalog point.
//!
//! Compared, each as build + full pair enumeration, best of 3, single thread:
//! - (a) `ZoneIndex` self-join over the combined 2,000,000 points (`for_each_pair`; its count
//!   also includes pairs inside one catalog);
//! - (a′) `ZoneIndex` built on catalog 1 and cone-searched with every catalog-2 point
//!   (`for_each_within`), the same task as (b);
//! - (b) a kiddo `ImmutableKdTree` on catalog-1 unit vectors, queried with every catalog-2 unit
//!   vector for a squared-chord radius 4 sin²(r/2).
//!
//! Run with `cargo bench --bench index`.

use std::time::{Duration, Instant};

use fluxloom::sky::vector::{Vec3, chord_for_angle_rad, radec_deg_to_vec};
use fluxloom::sky::zones::ZoneIndex;
use kiddo::{ImmutableKdTree, SquaredEuclidean};

const N_PER_CATALOG: usize = 1_000_000;
const RADIUS_ARCSEC: f64 = 1.0;
const MATCHED_FRACTION: f64 = 0.7;
const MATCH_SCATTER_ARCSEC: f64 = 0.3;
const CENTRE_RA_DEG: f64 = 150.0;
const CENTRE_DEC_DEG: f64 = 2.0;
/// Half the side of the square field: (2 · 1.5811°)² = 10.0 deg².
const HALF_SIDE_DEG: f64 = 1.581_138_8;
const REPEATS: usize = 3;

/// SplitMix64 (Steele, Lea & Flood 2014, OOPSLA (from memory)): deterministic inputs.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    fn uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.unit()
    }
}

struct Catalog {
    ra_deg: Vec<f64>,
    dec_deg: Vec<f64>,
}

fn make_catalogs() -> (Catalog, Catalog) {
    let mut rng = SplitMix64(0x00F1_0C0A_2024);
    let cos_dec0 = CENTRE_DEC_DEG.to_radians().cos();
    let uniform_point = |rng: &mut SplitMix64| {
        let dec = CENTRE_DEC_DEG + rng.uniform(-HALF_SIDE_DEG, HALF_SIDE_DEG);
        let ra = CENTRE_RA_DEG + rng.uniform(-HALF_SIDE_DEG, HALF_SIDE_DEG) / cos_dec0;
        (ra, dec)
    };
    let mut first = Catalog {
        ra_deg: Vec::with_capacity(N_PER_CATALOG),
        dec_deg: Vec::with_capacity(N_PER_CATALOG),
    };
    for _ in 0..N_PER_CATALOG {
        let (ra, dec) = uniform_point(&mut rng);
        first.ra_deg.push(ra);
        first.dec_deg.push(dec);
    }
    let mut second = Catalog {
        ra_deg: Vec::with_capacity(N_PER_CATALOG),
        dec_deg: Vec::with_capacity(N_PER_CATALOG),
    };
    for _ in 0..N_PER_CATALOG {
        let (ra, dec) = if rng.unit() < MATCHED_FRACTION {
            let k = (rng.next_u64() % N_PER_CATALOG as u64) as usize;
            // uniform in a disc of radius 0.3″ around point k
            let r_deg = MATCH_SCATTER_ARCSEC / 3600.0 * rng.unit().sqrt();
            let phi = rng.uniform(0.0, std::f64::consts::TAU);
            let dec = first.dec_deg[k] + r_deg * phi.cos();
            let ra = first.ra_deg[k] + r_deg * phi.sin() / dec.to_radians().cos();
            (ra, dec)
        } else {
            uniform_point(&mut rng)
        };
        second.ra_deg.push(ra);
        second.dec_deg.push(dec);
    }
    (first, second)
}

/// Peak resident set size of this process in MiB, from /proc/self/status (VmHWM), if readable.
fn peak_rss_mib() -> Option<f64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    let kib: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kib / 1024.0)
}

/// Runs `job` `REPEATS` times; returns the best wall time and the job's last result.
fn best_of<T>(mut job: impl FnMut() -> T) -> (Duration, T) {
    let mut best = Duration::MAX;
    let mut out = None;
    for _ in 0..REPEATS {
        let start = Instant::now();
        let result = job();
        best = best.min(start.elapsed());
        out = Some(result);
    }
    (best, out.expect("REPEATS > 0"))
}

fn report(label: &str, time: Duration, pairs: u64) {
    let secs = time.as_secs_f64();
    let rss = peak_rss_mib().map_or_else(|| "n/a".to_owned(), |m| format!("{m:.0} MiB"));
    println!(
        "{label:<44} {secs:>8.3} s  {pairs:>9} pairs  {:>6.2} Mpairs/s  (peak RSS so far {rss})",
        pairs as f64 / secs / 1e6
    );
}

fn main() {
    let (first, second) = make_catalogs();
    let radius_deg = RADIUS_ARCSEC / 3600.0;
    println!(
        "{} + {} points, 10 deg² field, radius {RADIUS_ARCSEC}″, {}% of catalog 2 within {MATCH_SCATTER_ARCSEC}″ \
         of a catalog-1 point; best of {REPEATS}, one thread",
        N_PER_CATALOG,
        N_PER_CATALOG,
        MATCHED_FRACTION * 100.0
    );

    // (a) zone self-join over both catalogs.
    let mut ra_all = first.ra_deg.clone();
    ra_all.extend_from_slice(&second.ra_deg);
    let mut dec_all = first.dec_deg.clone();
    dec_all.extend_from_slice(&second.dec_deg);
    let (zone_join_time, (all_pairs, cross_pairs)) = best_of(|| {
        let index = ZoneIndex::build(&ra_all, &dec_all, radius_deg);
        let (mut all, mut cross) = (0u64, 0u64);
        index.for_each_pair(|i, j, _| {
            all += 1;
            cross += u64::from(i < N_PER_CATALOG && j >= N_PER_CATALOG);
        });
        (all, cross)
    });
    report(
        "(a)  ZoneIndex self-join, 2M points",
        zone_join_time,
        all_pairs,
    );
    println!("     of which catalog 1 x catalog 2: {cross_pairs}");

    // (a') zone index on catalog 1, cone searches from catalog 2.
    let (zone_cone_time, zone_cone_pairs) = best_of(|| {
        let index = ZoneIndex::build(&first.ra_deg, &first.dec_deg, radius_deg);
        let mut n = 0u64;
        for (&ra, &dec) in second.ra_deg.iter().zip(&second.dec_deg) {
            index.for_each_within(ra, dec, radius_deg, |_, _| n += 1);
        }
        n
    });
    report(
        "(a') ZoneIndex on cat. 1, cones from cat. 2",
        zone_cone_time,
        zone_cone_pairs,
    );

    // (b) kiddo k-d tree on catalog-1 unit vectors, radius queries from catalog 2.
    let chord2_max = chord_for_angle_rad(radius_deg.to_radians()).powi(2);
    let second_xyz: Vec<Vec3> = second
        .ra_deg
        .iter()
        .zip(&second.dec_deg)
        .map(|(&a, &d)| radec_deg_to_vec(a, d))
        .collect();
    let (kdtree_time, kdtree_pairs) = best_of(|| {
        let first_xyz: Vec<Vec3> = first
            .ra_deg
            .iter()
            .zip(&first.dec_deg)
            .map(|(&a, &d)| radec_deg_to_vec(a, d))
            .collect();
        let tree = ImmutableKdTree::new_from_slice(&first_xyz).expect("k-d tree construction");
        let mut n = 0u64;
        for q in &second_xyz {
            tree.query(q)
                .within::<SquaredEuclidean<f64>>(chord2_max)
                .unsorted()
                .visit(|_| n += 1);
        }
        n
    });
    report(
        "(b)  kiddo ImmutableKdTree on cat. 1",
        kdtree_time,
        kdtree_pairs,
    );

    println!(
        "cross pairs: (a) {cross_pairs}, (a') {zone_cone_pairs}, (b) {kdtree_pairs}{}",
        if cross_pairs == zone_cone_pairs && zone_cone_pairs == kdtree_pairs {
            " (equal)"
        } else {
            " (DIFFER)"
        }
    );
    println!(
        "time ratios: (a)/(b) = {:.2}, (a')/(b) = {:.2}",
        zone_join_time.as_secs_f64() / kdtree_time.as_secs_f64(),
        zone_cone_time.as_secs_f64() / kdtree_time.as_secs_f64()
    );
}
