//! Spatial-index benchmark: all pairs within 1″ between two catalogs of 1,000,000 points each
//! in a 10 deg² field, 70 % of the second catalog within 0.3″ of a first-catalog point.
//!
//! Compared, each as build + full pair enumeration, best of 3, in a one-thread rayon pool (so
//! `ZoneIndex::build`'s parallel sort runs on one thread, like the kiddo build):
//! - (a) `ZoneIndex` self-join over the combined 2,000,000 points (`for_each_pair`; its count
//!   also includes pairs inside one catalog);
//! - (a′) `ZoneIndex` built on catalog 1 and cone-searched with every catalog-2 point
//!   (`for_each_within`), the same task as (b);
//! - (b) a kiddo `ImmutableKdTree` on catalog-1 unit vectors, queried with every catalog-2 unit
//!   vector for a squared-chord radius 4 sin²(r/2).
//!
//! Run with `cargo bench --bench index`.

use std::time::{Duration, Instant};

use fluxloom::rng::Rng;
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

struct Catalog {
    ra_deg: Vec<f64>,
    dec_deg: Vec<f64>,
}

fn make_catalogs() -> (Catalog, Catalog) {
    let mut rng = Rng::new(0x00F1_0C0A_2024, "index");
    let cos_dec0 = CENTRE_DEC_DEG.to_radians().cos();
    let uniform_point = |rng: &mut Rng| {
        let dec = CENTRE_DEC_DEG + rng.range(-HALF_SIDE_DEG, HALF_SIDE_DEG);
        let ra = CENTRE_RA_DEG + rng.range(-HALF_SIDE_DEG, HALF_SIDE_DEG) / cos_dec0;
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
        let (ra, dec) = if rng.uniform() < MATCHED_FRACTION {
            let k = (rng.next_u64() % N_PER_CATALOG as u64) as usize;
            // uniform in a disc of radius 0.3″ around point k
            let r_deg = MATCH_SCATTER_ARCSEC / 3600.0 * rng.uniform().sqrt();
            let phi = rng.range(0.0, std::f64::consts::TAU);
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

/// Best-of-`REPEATS` timing: total wall time and the build part of that same run.
struct Timing {
    total: Duration,
    build: Duration,
}

/// Runs `job` `REPEATS` times; `job` returns its build time and result. Returns the timing
/// of the fastest run and the last result.
fn best_of<T>(mut job: impl FnMut() -> (Duration, T)) -> (Timing, T) {
    let mut best = Timing {
        total: Duration::MAX,
        build: Duration::ZERO,
    };
    let mut out = None;
    for _ in 0..REPEATS {
        let start = Instant::now();
        let (build, result) = job();
        let total = start.elapsed();
        if total < best.total {
            best = Timing { total, build };
        }
        out = Some(result);
    }
    (best, out.expect("REPEATS > 0"))
}

fn report(label: &str, time: &Timing, pairs: u64) {
    let secs = time.total.as_secs_f64();
    let rss = peak_rss_mib().map_or_else(|| "n/a".to_owned(), |m| format!("{m:.0} MiB"));
    println!(
        "{label:<44} {secs:>7.3} s (build {:.3} s)  {pairs:>8} pairs  {:>5.2} Mpairs/s  \
         (peak RSS so far {rss})",
        time.build.as_secs_f64(),
        pairs as f64 / secs / 1e6
    );
}

fn main() {
    let (first, second) = make_catalogs();
    let radius_deg = RADIUS_ARCSEC / 3600.0;
    println!(
        "{N_PER_CATALOG} + {N_PER_CATALOG} points, 10 deg² field, radius {RADIUS_ARCSEC}″, \
         {}% of catalog 2 within {MATCH_SCATTER_ARCSEC}″ of a catalog-1 point; \
         best of {REPEATS}, one-thread rayon pool",
        MATCHED_FRACTION * 100.0
    );
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("one-thread pool");
    pool.install(|| run(&first, &second, radius_deg));
}

fn run(first: &Catalog, second: &Catalog, radius_deg: f64) {
    // (a) zone self-join over both catalogs.
    let mut ra_all = first.ra_deg.clone();
    ra_all.extend_from_slice(&second.ra_deg);
    let mut dec_all = first.dec_deg.clone();
    dec_all.extend_from_slice(&second.dec_deg);
    let (zone_join, (all_pairs, cross_pairs)) = best_of(|| {
        let start = Instant::now();
        let index = ZoneIndex::build(&ra_all, &dec_all, radius_deg);
        let build = start.elapsed();
        let (mut all, mut cross) = (0u64, 0u64);
        index.for_each_pair(|i, j, _| {
            all += 1;
            cross += u64::from(i < N_PER_CATALOG && j >= N_PER_CATALOG);
        });
        (build, (all, cross))
    });
    report("(a)  ZoneIndex self-join, 2M points", &zone_join, all_pairs);
    println!("     of which catalog 1 x catalog 2: {cross_pairs}");

    // (a') zone index on catalog 1, cone searches from catalog 2.
    let (zone_cone, zone_cone_pairs) = best_of(|| {
        let start = Instant::now();
        let index = ZoneIndex::build(&first.ra_deg, &first.dec_deg, radius_deg);
        let build = start.elapsed();
        let mut n = 0u64;
        for (&ra, &dec) in second.ra_deg.iter().zip(&second.dec_deg) {
            index.for_each_within(ra, dec, radius_deg, |_, _| n += 1);
        }
        (build, n)
    });
    report(
        "(a') ZoneIndex on cat. 1, cones from cat. 2",
        &zone_cone,
        zone_cone_pairs,
    );

    // (b) kiddo k-d tree on catalog-1 unit vectors, radius queries from catalog 2 (unit
    // vectors of both catalogs are computed inside the timed run, as ZoneIndex does).
    let chord2_max = chord_for_angle_rad(radius_deg.to_radians()).powi(2);
    let to_vectors = |c: &Catalog| -> Vec<Vec3> {
        c.ra_deg
            .iter()
            .zip(&c.dec_deg)
            .map(|(&a, &d)| radec_deg_to_vec(a, d))
            .collect()
    };
    let (kdtree, kdtree_pairs) = best_of(|| {
        let start = Instant::now();
        let tree = ImmutableKdTree::new_from_slice(&to_vectors(first)).expect("k-d tree");
        let build = start.elapsed();
        let mut n = 0u64;
        for q in &to_vectors(second) {
            tree.query(q)
                .within::<SquaredEuclidean<f64>>(chord2_max)
                .unsorted()
                .visit(|_| n += 1);
        }
        (build, n)
    });
    report(
        "(b)  kiddo ImmutableKdTree on cat. 1",
        &kdtree,
        kdtree_pairs,
    );

    let same = cross_pairs == zone_cone_pairs && zone_cone_pairs == kdtree_pairs;
    println!(
        "cross pairs: (a) {cross_pairs}, (a') {zone_cone_pairs}, (b) {kdtree_pairs} ({})",
        if same { "equal" } else { "DIFFER" }
    );
    println!(
        "time ratios: (a)/(b) = {:.2}, (a')/(b) = {:.2}",
        zone_join.total.as_secs_f64() / kdtree.total.as_secs_f64(),
        zone_cone.total.as_secs_f64() / kdtree.total.as_secs_f64()
    );
}
