//! Matching cell by cell gives the answer of one match over the whole sky, also
//! when cells are much smaller than the groups of candidates that cross them, so
//! that cells must be matched again with wider margins.

mod common;

use common::fingerprint;
use fluxloom::crossmatch::{
    CatalogSettings, MatchConfig, SourceTable, Tolerance, run_match_with_area,
};
use fluxloom::rng::Rng;
use fluxloom::sky::propagation::propagate_deg;
use proptest::prelude::*;

fn config(n: usize, order: u8) -> MatchConfig {
    let mut c = MatchConfig::new(n, 2016.0);
    c.partition_order = order;
    c.tolerance = Tolerance::Sigma {
        k: 3.439,
        max_arcsec: 2.0,
    };
    c.catalogs = (0..n)
        .map(|i| CatalogSettings {
            systematic_arcsec: 0.05,
            resolution_arcsec: Some(0.8 + 0.7 * i as f64),
            ..CatalogSettings::default()
        })
        .collect();
    c
}

/// A crowded field: clusters of true objects, each seen by most catalogs with
/// scatter, plus unrelated sources, so candidate groups chain across small cells.
fn crowded(seed: u64, ra0: f64, dec0: f64, n_cat: usize) -> Vec<SourceTable> {
    let mut rng = Rng::new(seed, "cells");
    let half = 60.0;
    let truth: Vec<(f64, f64)> = (0..120)
        .map(|_| {
            (
                (rng.uniform() * 2.0 - 1.0) * half,
                (rng.uniform() * 2.0 - 1.0) * half,
            )
        })
        .collect();
    (0..n_cat)
        .map(|c| {
            let mut t = SourceTable {
                name: format!("c{c}"),
                ..SourceTable::default()
            };
            let sigma = 0.1 + 0.15 * c as f64;
            for (k, (e, n)) in truth.iter().enumerate() {
                if rng.uniform() < 0.15 {
                    continue;
                }
                let (e, n) = (e + sigma * rng.normal(), n + sigma * rng.normal());
                let (ra, dec) = propagate_deg(ra0, dec0, e, n, 1000.0);
                t.push(&format!("s{k}"), ra, dec, 2016.0, (sigma, sigma, 0.0), None);
            }
            for k in 0..30 {
                let (ra, dec) = propagate_deg(
                    ra0,
                    dec0,
                    (rng.uniform() * 2.0 - 1.0) * half,
                    (rng.uniform() * 2.0 - 1.0) * half,
                    1000.0,
                );
                t.push(&format!("u{k}"), ra, dec, 2016.0, (sigma, sigma, 0.0), None);
            }
            t
        })
        .collect()
}

#[test]
fn a_chain_across_tiny_cells_is_matched_again_with_wider_margins() {
    // Two catalogs alternate along a line of 41 sources 0.9" apart (tolerance
    // 1"): one group 36" long. At order 16 (cells about 3.2" across) the first
    // margin (2 × (1" + 0") = 2") holds a small piece of it, so cells must widen.
    let mut a = SourceTable {
        name: "a".into(),
        ..SourceTable::default()
    };
    let mut b = SourceTable {
        name: "b".into(),
        ..SourceTable::default()
    };
    for k in 0..41 {
        let (ra, dec) = propagate_deg(150.0, 2.2, 0.9 * k as f64, 0.0, 1000.0);
        let t = if k % 2 == 0 { &mut a } else { &mut b };
        t.push_simple(&format!("p{k:02}"), ra, dec, 2016.0, 0.3);
    }
    let tables = vec![a, b];
    let mut whole = MatchConfig::new(2, 2016.0);
    whole.tolerance = Tolerance::Radius { arcsec: 1.0 };
    whole.partition_order = 0;
    let mut tiny = whole.clone();
    tiny.partition_order = 16;
    let area = Some(1e-8);
    let expected = run_match_with_area(&tables, &whole, area).unwrap();
    let got = run_match_with_area(&tables, &tiny, area).unwrap();
    assert!(expected.stats.cells.widened.is_empty());
    assert!(!got.stats.cells.widened.is_empty(), "{:?}", got.stats.cells);
    assert!(got.stats.cells.cells > 5, "{:?}", got.stats.cells);
    assert_eq!(expected.stats.largest_group, 41);
    assert_eq!(fingerprint(&tables, &got), fingerprint(&tables, &expected));
}

/// Field centres anywhere, across RA 0/360 and around both poles.
fn field_centre() -> impl Strategy<Value = (f64, f64)> {
    prop_oneof![
        (0.0..360.0f64, -70.0..70.0f64),
        (-0.005..0.005f64, -50.0..50.0f64).prop_map(|(ra, dec)| (ra.rem_euclid(360.0), dec)),
        (0.0..360.0f64, 89.97..89.99f64),
        (0.0..360.0f64, -89.99..-89.97f64),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 24, ..ProptestConfig::default() })]

    #[test]
    fn small_cells_give_the_whole_sky_answer(
        seed in any::<u64>(),
        centre in field_centre(),
        n_cat in 2usize..5,
        order in 12u8..17,
    ) {
        let tables = crowded(seed, centre.0, centre.1, n_cat);
        let area = Some((120.0 / 206_264.806_247f64).powi(2));
        let expected = run_match_with_area(&tables, &config(n_cat, 0), area).unwrap();
        let got = run_match_with_area(&tables, &config(n_cat, order), area).unwrap();
        prop_assert_eq!(fingerprint(&tables, &got), fingerprint(&tables, &expected));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 12, ..ProptestConfig::default() })]

    /// Cells split among jobs, or taken from a journal, join to the whole run:
    /// every cell is emitted by exactly one part with the same objects and links.
    #[test]
    fn parts_of_the_sky_and_resumed_cells_join_to_the_whole_run(
        seed in any::<u64>(),
        centre in field_centre(),
        n_cat in 2usize..5,
        order in 12u8..16,
        parts in 2u64..5,
    ) {
        use fluxloom::crossmatch::cells::{CellOutput, CellRun, match_by_cells};
        use fluxloom::crossmatch::engine::MatchSetup;
        use std::sync::Mutex;

        let tables = crowded(seed, centre.0, centre.1, n_cat);
        let area = Some((120.0 / 206_264.806_247f64).powi(2));
        let config = config(n_cat, order);
        let setup = MatchSetup::new(&tables, &config, area).unwrap();
        let run = |cells: CellRun| {
            match_by_cells(&setup.sources, &config, &setup.ln_density_per_sr, &setup.epochs, cells)
                .unwrap()
        };
        // The whole run, journaling every cell.
        let journal: Mutex<Vec<(u64, CellOutput)>> = Mutex::new(Vec::new());
        let record = |id: u64, out: &CellOutput| {
            journal.lock().unwrap().push((id, out.clone()));
            Ok(())
        };
        let (whole, stats) = run(CellRun { on_complete: Some(&record), ..CellRun::default() });
        let mut journal = journal.into_inner().unwrap();
        journal.sort_by_key(|j| j.0);
        let ids: Vec<u64> = journal.iter().map(|j| j.0).collect();
        prop_assert_eq!(ids.len(), stats.cells);

        // Parts: cell k goes to part k mod `parts`.
        let mut joined = CellOutput::default();
        for p in 0..parts {
            let subset: Vec<u64> = ids.iter().enumerate().filter(|(k, _)| *k as u64 % parts == p).map(|(_, &id)| id).collect();
            let (part, part_stats) = run(CellRun { subset: Some(subset.clone()), ..CellRun::default() });
            prop_assert_eq!(part_stats.emitted, subset.len());
            joined.absorb(part);
        }
        joined.objects.sort_by_key(|o| o.members[0]);
        joined.links.sort_by_key(|l| (l.pair.a, l.pair.b));
        prop_assert_eq!(&joined, &whole);

        // Resumed: the first half of the cells from the journal, the rest matched.
        let finished = journal.into_iter().take(ids.len() / 2).collect();
        let (resumed, resumed_stats) = run(CellRun { finished, ..CellRun::default() });
        prop_assert_eq!(resumed_stats.resumed, ids.len() / 2);
        prop_assert_eq!(&resumed, &whole);
    }
}
