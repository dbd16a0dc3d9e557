//! Properties of the matcher on random catalogs: the candidate pairs are exactly
//! the pairs a brute-force search finds, and the result does not depend on the
//! order of rows, the number of threads or the partitioning of the sky.
//! Fields are placed anywhere, including across RA 0/360° and within 1° of both poles.

mod common;

use common::fingerprint;
use fluxloom::crossmatch::candidates::{find_candidates, test_pair};
use fluxloom::crossmatch::prepare::Sources;
use fluxloom::crossmatch::{
    CatalogSettings, MatchConfig, SourceTable, Tolerance, run_match_with_area,
};
use fluxloom::rng::Rng;
use fluxloom::sky::propagation::propagate_deg;
use proptest::prelude::*;

/// A field centre: anywhere, across the RA seam, or near a pole.
fn centre() -> impl Strategy<Value = (f64, f64)> {
    prop_oneof![
        (0.0..360.0f64, -80.0..80.0f64),
        (-0.01..0.01f64, -60.0..60.0f64).prop_map(|(ra, dec)| (ra.rem_euclid(360.0), dec)),
        (0.0..360.0f64, 89.0..89.99f64),
        (0.0..360.0f64, -89.99..-89.0f64),
    ]
}

/// Catalogs of sources scattered within `half_width_arcsec` of a centre (as
/// offsets on the sphere, so the poles are handled), with per-source errors.
fn catalogs() -> impl Strategy<Value = (Vec<SourceTable>, f64)> {
    (centre(), 2usize..4, 10.0..40.0f64, any::<u64>()).prop_map(
        |((ra0, dec0), n_cat, half, seed)| {
            let mut rng = Rng::new(seed, "properties");
            let mut next = move || rng.uniform();
            let mut tables = Vec::new();
            // True objects; each catalog sees most of them, with its own scatter.
            let truth: Vec<(f64, f64)> = (0..40)
                .map(|_| ((next() * 2.0 - 1.0) * half, (next() * 2.0 - 1.0) * half))
                .collect();
            for c in 0..n_cat {
                let mut t = SourceTable {
                    name: format!("c{c}"),
                    ..SourceTable::default()
                };
                let sigma = 0.1 + 0.2 * c as f64;
                for (k, (e, n)) in truth.iter().enumerate() {
                    if next() < 0.2 {
                        continue;
                    }
                    let (e, n) = (e + (next() - 0.5) * sigma, n + (next() - 0.5) * sigma);
                    // Offsets applied as a motion of (e, n) mas over 1000 yr: exact on the sphere.
                    let (ra, dec) = propagate_deg(ra0, dec0, e, n, 1000.0);
                    let pa = next() * 180.0;
                    t.push(
                        &format!("s{k}"),
                        ra,
                        dec,
                        2016.0,
                        (sigma * 1.5, sigma, pa),
                        None,
                    );
                }
                // Unrelated sources.
                for k in 0..10 {
                    let (ra, dec) = propagate_deg(
                        ra0,
                        dec0,
                        (next() * 2.0 - 1.0) * half,
                        (next() * 2.0 - 1.0) * half,
                        1000.0,
                    );
                    t.push(&format!("u{k}"), ra, dec, 2016.0, (sigma, sigma, 0.0), None);
                }
                tables.push(t);
            }
            let area_sr = (2.0 * half / 206_264.806_247).powi(2);
            (tables, area_sr)
        },
    )
}

fn config(n: usize, order: u8) -> MatchConfig {
    let mut c = MatchConfig::new(n, 2016.0);
    c.partition_order = order;
    c.tolerance = Tolerance::Sigma {
        k: 3.439,
        max_arcsec: 3.0,
    };
    c.catalogs = (0..n)
        .map(|i| CatalogSettings {
            systematic_arcsec: 0.05,
            resolution_arcsec: Some(1.0 + i as f64),
            ..CatalogSettings::default()
        })
        .collect();
    c
}

fn shuffled(tables: &[SourceTable], seed: u64) -> Vec<SourceTable> {
    tables
        .iter()
        .map(|t| {
            let n = t.len();
            let mut order: Vec<usize> = (0..n).collect();
            let mut s = seed | 1;
            for i in (1..n).rev() {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                order.swap(i, (s % (i as u64 + 1)) as usize);
            }
            let mut out = SourceTable {
                name: t.name.clone(),
                ..SourceTable::default()
            };
            for &i in &order {
                out.push(
                    &t.source_id[i],
                    t.ra_deg[i],
                    t.dec_deg[i],
                    t.epoch_yr[i],
                    (
                        t.err_major_arcsec[i],
                        t.err_minor_arcsec[i],
                        t.err_pa_deg[i],
                    ),
                    None,
                );
            }
            out
        })
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    #[test]
    fn candidates_equal_a_brute_force_search((tables, _) in catalogs(), order in 3u8..11) {
        let config = config(tables.len(), order);
        let sources = Sources::prepare(&tables, &config).unwrap();
        let found: Vec<(u32, u32, f64)> = find_candidates(&sources, &config).iter().map(|c| (c.a, c.b, c.sep_arcsec)).collect();
        let mut brute = Vec::new();
        for a in 0..sources.len() as u32 {
            for b in a + 1..sources.len() as u32 {
                if let Some(c) = test_pair(&sources, &config, a, b) {
                    brute.push((c.a, c.b, c.sep_arcsec));
                }
            }
        }
        prop_assert_eq!(found, brute);
    }

    #[test]
    fn results_do_not_depend_on_row_order_threads_or_partitions(
        (tables, area) in catalogs(),
        order_a in 3u8..11,
        order_b in 3u8..11,
        seed in any::<u64>(),
    ) {
        let reference = run_match_with_area(&tables, &config(tables.len(), order_a), Some(area)).unwrap();
        let expected = fingerprint(&tables, &reference);

        let reordered = shuffled(&tables, seed);
        let r = run_match_with_area(&reordered, &config(tables.len(), order_a), Some(area)).unwrap();
        prop_assert_eq!(&fingerprint(&reordered, &r), &expected);

        let r = run_match_with_area(&tables, &config(tables.len(), order_b), Some(area)).unwrap();
        prop_assert_eq!(&fingerprint(&tables, &r), &expected);

        for threads in [1, 3] {
            let pool = rayon::ThreadPoolBuilder::new().num_threads(threads).build().unwrap();
            let r = pool.install(|| run_match_with_area(&tables, &config(tables.len(), order_a), Some(area)).unwrap());
            prop_assert_eq!(&fingerprint(&tables, &r), &expected);
        }
    }
}
