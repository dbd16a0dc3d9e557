//! A hand-built scene with every situation the matcher must get right, and the
//! exact objects and flags expected.
//!
//! Four catalogs around (RA 200°, Dec −30°); offsets below are (east, north) in
//! arcsec from the field centre:
//! - `opt`: 0.05″ errors, 1″ resolution, epoch 2016.0, one star with a proper motion;
//! - `nir`: 0.1″ errors, 2″ resolution, epoch 2000.0, no proper motions;
//! - `mir`: 0.5″ errors, 6″ resolution, epoch 2010.0;
//! - `shift`: 0.05″ errors, epoch 2016.0, every source 0.3″ east of the truth
//!   (an astrometric systematic).
//!
//! The situations: an isolated star seen by all four; a close pair 1.2″ apart
//! seen by three catalogs (resolved cleanly); an optical source with two
//! near-infrared candidates (ambiguous); a mid-infrared source covering two optical and
//! near-infrared objects 2″ apart (a blend); a star moving (+400, −300) mas/yr
//! seen in 2016, 2010 and 2000; a near-infrared source seen by no other catalog; and two
//! more isolated stars for the astrometric offset.

use fluxloom::crossmatch::systematics::match_with_offsets;
use fluxloom::crossmatch::{
    CatalogSettings, MatchConfig, MatchResult, SourceTable, run_match_with_area,
};
use fluxloom::sky::propagation::propagate_deg;

const RA0: f64 = 200.0;
const DEC0: f64 = -30.0;

/// Position at (east, north) arcsec from the field centre (gnomonic inverse, exact
/// enough for offsets of a few arcminutes at this test's tolerances).
fn at(east: f64, north: f64) -> (f64, f64) {
    let dec = DEC0 + north / 3600.0;
    (RA0 + east / 3600.0 / DEC0.to_radians().cos(), dec)
}

fn table(name: &str) -> SourceTable {
    SourceTable {
        name: name.into(),
        ..SourceTable::default()
    }
}

fn add(t: &mut SourceTable, id: &str, east: f64, north: f64, epoch: f64, sigma: f64) {
    let (ra, dec) = at(east, north);
    t.push_simple(id, ra, dec, epoch, sigma);
}

fn scene() -> (Vec<SourceTable>, MatchConfig, f64) {
    let mut opt = table("opt");
    let mut nir = table("nir");
    let mut mir = table("mir");
    let mut shift = table("shift");
    let (e_opt, e_nir, e_mir) = (2016.0, 2000.0, 2010.0);
    let s = 0.3; // the systematic shift of `shift`, arcsec east

    // Isolated star.
    add(&mut opt, "A1", 0.0, 0.0, e_opt, 0.05);
    add(&mut nir, "N1", 0.05, -0.03, e_nir, 0.1);
    add(&mut mir, "M1", 0.2, 0.1, e_mir, 0.5);
    add(&mut shift, "S1", s, 0.0, e_opt, 0.05);
    // Close pair, 1.2" apart.
    add(&mut opt, "A2", 30.0, 0.0, e_opt, 0.05);
    add(&mut opt, "A3", 31.2, 0.0, e_opt, 0.05);
    add(&mut nir, "N2", 30.05, 0.02, e_nir, 0.1);
    add(&mut nir, "N3", 31.15, -0.03, e_nir, 0.1);
    add(&mut shift, "S2", 30.0 + s, 0.0, e_opt, 0.05);
    add(&mut shift, "S3", 31.2 + s, 0.02, e_opt, 0.05);
    // Ambiguous: O1 has two near-infrared candidates, 0.2" and 0.28" away.
    add(&mut opt, "O1", 60.0, 0.0, e_opt, 0.05);
    add(&mut nir, "R1", 59.8, 0.0, e_nir, 0.1);
    add(&mut nir, "R2", 60.28, 0.0, e_nir, 0.1);
    add(&mut shift, "S4", 60.0 + s, 0.0, e_opt, 0.05);
    // Blend: M2 sits between two objects 2" apart, well inside its 6" resolution.
    add(&mut opt, "B1", 90.0, 0.0, e_opt, 0.05);
    add(&mut opt, "B2", 92.0, 0.0, e_opt, 0.05);
    add(&mut nir, "C1", 90.02, 0.01, e_nir, 0.1);
    add(&mut nir, "C2", 92.0, -0.02, e_nir, 0.1);
    add(&mut mir, "M2", 91.0, 0.0, e_mir, 0.5);
    // A fast star: at (120, 0) in 2016.0, moving (+400, -300) mas/yr, so in 2000.0 it
    // was 6.4" west and 4.8" north of there (8" away: beyond the 5" cap).
    let (ra_v, dec_v) = at(120.0, 0.0);
    opt.push(
        "V",
        ra_v,
        dec_v,
        e_opt,
        (0.05, 0.05, 0.0),
        Some((400.0, -300.0)),
    );
    let (ra_old, dec_old) = propagate_deg(ra_v, dec_v, 400.0, -300.0, e_nir - e_opt);
    nir.push_simple(
        "V'",
        ra_old + 0.02 / 3600.0,
        dec_old - 0.02 / 3600.0,
        e_nir,
        0.1,
    );
    // The mid-infrared catalog saw it in 2010.0, between the two.
    let (ra_mid, dec_mid) = propagate_deg(ra_v, dec_v, 400.0, -300.0, e_mir - e_opt);
    mir.push_simple("MV", ra_mid, dec_mid + 0.1 / 3600.0, e_mir, 0.5);
    // Seen by one catalog only.
    add(&mut nir, "X", 150.0, 0.0, e_nir, 0.1);
    // Two more isolated stars with shifted counterparts.
    add(&mut opt, "D1", 0.0, 40.0, e_opt, 0.05);
    add(&mut shift, "SD1", s, 40.0, e_opt, 0.05);
    add(&mut opt, "D2", 0.0, -40.0, e_opt, 0.05);
    add(&mut shift, "SD2", s, -40.0, e_opt, 0.05);

    let mut config = MatchConfig::new(4, 2016.0);
    config.catalogs = vec![
        CatalogSettings {
            systematic_arcsec: 0.0,
            resolution_arcsec: Some(1.0),
            ..CatalogSettings::default()
        },
        CatalogSettings {
            systematic_arcsec: 0.0,
            resolution_arcsec: Some(2.0),
            ..CatalogSettings::default()
        },
        CatalogSettings {
            systematic_arcsec: 0.0,
            resolution_arcsec: Some(6.0),
            ..CatalogSettings::default()
        },
        CatalogSettings {
            systematic_arcsec: 0.0,
            resolution_arcsec: Some(1.5),
            ..CatalogSettings::default()
        },
    ];
    // The scene covers about 200" x 200".
    let area_sr = (200.0f64 / 206_264.806_247).powi(2);
    (vec![opt, nir, mir, shift], config, area_sr)
}

/// (object id, sorted "catalog:source" members, status, sorted related ids).
type Summary = (String, Vec<String>, String, Vec<String>);

fn summarize(tables: &[SourceTable], result: &MatchResult) -> Vec<Summary> {
    result
        .objects
        .iter()
        .map(|o| {
            let mut members: Vec<String> = o
                .members
                .iter()
                .map(|m| {
                    format!(
                        "{}:{}",
                        tables[m.catalog].name, &tables[m.catalog].source_id[m.row]
                    )
                })
                .collect();
            members.sort();
            let mut related = o.related_ids(tables);
            related.sort();
            (o.object_id(tables), members, o.status(), related)
        })
        .collect()
}

fn obj(id: &str, members: &[&str], status: &str, related: &[&str]) -> Summary {
    let mut m: Vec<String> = members.iter().map(|s| s.to_string()).collect();
    m.sort();
    (
        id.into(),
        m,
        status.into(),
        related.iter().map(|s| s.to_string()).collect(),
    )
}

#[test]
fn the_scene_resolves_into_the_expected_objects_after_offset_correction() {
    let (tables, config, area) = scene();
    let (result, offsets, _) = match_with_offsets(&tables, &config, Some(area), 0, true).unwrap();
    let expected = vec![
        obj(
            "opt:A1",
            &["opt:A1", "nir:N1", "mir:M1", "shift:S1"],
            "clean",
            &[],
        ),
        obj("opt:A2", &["opt:A2", "nir:N2", "shift:S2"], "clean", &[]),
        obj("opt:A3", &["opt:A3", "nir:N3", "shift:S3"], "clean", &[]),
        obj("opt:B1", &["opt:B1", "nir:C1"], "has_blend", &["mir:M2"]),
        obj("opt:B2", &["opt:B2", "nir:C2"], "has_blend", &["mir:M2"]),
        obj("opt:D1", &["opt:D1", "shift:SD1"], "clean", &[]),
        obj("opt:D2", &["opt:D2", "shift:SD2"], "clean", &[]),
        obj(
            "opt:O1",
            &["opt:O1", "nir:R1", "shift:S4"],
            "ambiguous",
            &[],
        ),
        obj("opt:V", &["opt:V", "nir:V'", "mir:MV"], "clean", &[]),
        obj("nir:R2", &["nir:R2"], "ambiguous+single_catalog", &[]),
        obj("nir:X", &["nir:X"], "single", &[]),
        obj(
            "mir:M2",
            &["mir:M2"],
            "blend+single_catalog",
            &["opt:B1", "opt:B2"],
        ),
    ];
    let got = summarize(&tables, &result);
    for (g, e) in got.iter().zip(&expected) {
        assert_eq!(g, e);
    }
    assert_eq!(got.len(), expected.len(), "{got:#?}");

    // The shift was measured from the clean isolated stars and removed.
    let shift = offsets.iter().find(|o| o.catalog == 3).unwrap();
    let initial = shift.initial.unwrap();
    assert!(
        (initial.dra_cosdec_arcsec - 0.3).abs() < 1e-6,
        "{initial:?}"
    );
    assert!(initial.ddec_arcsec.abs() < 1e-6, "{initial:?}");
    assert!((shift.applied_arcsec.0 + 0.3).abs() < 1e-6, "{shift:?}");
    let residual = shift.residual.unwrap();
    assert!(residual.dra_cosdec_arcsec.abs() < 1e-6, "{residual:?}");

    // The moving star's object is at its 2016.0 position and carries its motion.
    let v = result
        .objects
        .iter()
        .find(|o| o.object_id(&tables) == "opt:V")
        .unwrap();
    let (ra_v, dec_v) = at(120.0, 0.0);
    assert!((v.dec_deg - dec_v).abs() * 3600.0 < 0.05);
    assert!((v.ra_deg - ra_v).abs() * 3600.0 * DEC0.to_radians().cos() < 0.05);
    assert_eq!((v.pmra_cosdec_masyr, v.pmdec_masyr), (400.0, -300.0));

    // Every candidate stays in the links table, chosen or not.
    let o1_links: Vec<_> = result
        .links
        .iter()
        .filter(|l| l.catalog_a == 0 && l.catalog_b == 1 && &tables[0].source_id[l.row_a] == "O1")
        .collect();
    let chosen: Vec<bool> = o1_links.iter().map(|l| l.chosen).collect();
    assert_eq!(chosen.len(), 2, "{o1_links:?}");
    assert_eq!(chosen.iter().filter(|c| **c).count(), 1);
}

#[test]
fn without_correction_the_shifted_catalog_stays_apart() {
    let (tables, config, area) = scene();
    let result = run_match_with_area(&tables, &config, Some(area)).unwrap();
    let got = summarize(&tables, &result);
    // A 0.3" shift is 4.2 sigma of the combined 0.07" errors: beyond the 3.439-sigma
    // tolerance, so the isolated stars' shifted counterparts stay single.
    for id in ["shift:SD1", "shift:SD2"] {
        let o = got.iter().find(|o| o.1.contains(&id.to_string())).unwrap();
        assert_eq!(o.1, vec![id.to_string()], "{o:?}");
        assert_eq!(o.2, "single");
    }
    let d1 = got.iter().find(|o| o.0 == "opt:D1").unwrap();
    assert_eq!(d1.1, vec!["opt:D1"]);
}

#[test]
fn a_systematic_floor_also_absorbs_the_shift() {
    let (tables, mut config, area) = scene();
    config.catalogs[3].systematic_arcsec = 0.15;
    let result = run_match_with_area(&tables, &config, Some(area)).unwrap();
    let got = summarize(&tables, &result);
    let a1 = got.iter().find(|o| o.0 == "opt:A1").unwrap();
    assert_eq!(a1.1, vec!["mir:M1", "nir:N1", "opt:A1", "shift:S1"]);
}

#[test]
fn a_link_probability_equals_the_published_formula_worked_by_hand() {
    // Budavári & Szalay 2008 (ApJ 679, 301), two catalogs, circular errors:
    //   B = 2/(σ1² + σ2²) · exp[−ψ²/(2(σ1² + σ2²))],  P(H|D) = [1 + (1 − P0)/(B P0)]⁻¹.
    // σ1 = 0.1", σ2 = 0.3", ψ = 0.25":
    //   σ1² + σ2² = 0.1 arcsec² = 0.1 × (4.8481368e-6 rad)² = 2.35044e-12 rad²
    //   2/(σ1² + σ2²) = 8.50903e11;  exp(−0.0625/0.2) = exp(−0.3125) = 0.731616
    //   B = 8.50903e11 × 0.731616 = 6.22534e11  (ln B = 27.157)
    // Prior for counts inside an overlap Ω: P0 = (Ω/4π) N★/(N1 N2). With Ω = 1 deg²
    // (Ω/4π = 1/41252.96 = 2.42407e-5), N1 = 1e4, N2 = 2e4, N★ = 5e3:
    //   P0 = 2.42407e-5 × 5e3 / 2e8 = 6.06017e-10
    //   B P0 = 377.27;  P = 1/(1 + (1 − 6.06e-10)/377.27) = 0.99736.
    // The same densities here: an area of 1e-4 deg² holding 1 source of the first
    // catalog (1e4 per deg²) and 2 of the second (2e4 per deg², the second one far
    // away), with common objects at half the sparser density (5e3 per deg²).
    let mut a = table("a");
    let mut b = table("b");
    add(&mut a, "p", 0.0, 0.0, 2016.0, 0.1);
    add(&mut b, "q", 0.25, 0.0, 2016.0, 0.3);
    add(&mut b, "far", 200.0, 0.0, 2016.0, 0.3);
    let mut config = MatchConfig::new(2, 2016.0);
    config.common_fraction = 0.5;
    let area_sr = 1e-4 * (std::f64::consts::PI / 180.0).powi(2);
    let result = run_match_with_area(&[a, b], &config, Some(area_sr)).unwrap();
    assert_eq!(result.links.len(), 1);
    let link = &result.links[0];
    assert!((link.sep_arcsec - 0.25).abs() < 1e-6, "{}", link.sep_arcsec);
    assert!((link.ln_bayes - 27.157).abs() < 1e-3, "{}", link.ln_bayes);
    assert!(
        (link.probability - 0.99736).abs() < 1e-5,
        "{}",
        link.probability
    );
    let object = &result.objects[0];
    assert_eq!(object.members.len(), 2);
    assert!((object.probability - 0.99736).abs() < 1e-5);
}

#[test]
fn primary_catalogs_restrict_the_objects_kept() {
    let (tables, mut config, area) = scene();
    let all = run_match_with_area(&tables, &config, Some(area)).unwrap();
    config.primary = vec![0];
    let kept = run_match_with_area(&tables, &config, Some(area)).unwrap();
    // Every object with an optical member stays; the rest (nir:X, mir:M2, the
    // shifted singles, nir:R2) are left out and counted.
    let with_opt = all.objects.iter().filter(|o| o.member(0).is_some()).count();
    assert_eq!(kept.objects.len(), with_opt);
    assert!(kept.objects.iter().all(|o| o.member(0).is_some()));
    assert_eq!(kept.stats.objects_not_primary, all.objects.len() - with_opt);
    assert!(kept.stats.objects_not_primary >= 3);
}
