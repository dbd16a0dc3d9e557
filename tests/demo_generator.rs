//! The demo-field generator: reproducibility against the committed folder, every
//! catalog readable through its schema without problems, the plan valid, and the
//! physics of the truth as built.
//!
//! To regenerate the committed folder after changing the generator, run
//! `FLUXLOOM_BLESS_DEMO=1 cargo test --test demo_generator` and review the diff.

use std::path::{Path, PathBuf};

use fluxloom::catalog::normalize::{BandStatus, NormalizeOptions};
use fluxloom::catalog::schema::SurveySchema;
use fluxloom::cli::vet::vet_catalog;
use fluxloom::demo::truth::{BandGrid, Kind, alpha_2_24, generate};
use fluxloom::demo::{DEFAULT_SEED, write_demo_field};
use fluxloom::photometry::BandLibrary;
use fluxloom::plan::Plan;

/// Every file the generator writes, by name.
const FILES: [&str; 18] = [
    "ask.parquet",
    "ask.toml",
    "kos.csv",
    "kos.toml",
    "lantern.vot",
    "lantern.toml",
    "harrier.fits",
    "harrier.toml",
    "harrier_moc.txt",
    "harrier_w4_moc.txt",
    "cinder.csv.gz",
    "cinder.toml",
    "ember.fits",
    "ember.toml",
    "plan.toml",
    "truth_objects.csv",
    "truth_members.csv",
    "README.md",
];

/// Catalog file of each survey, in plan order.
const CATALOGS: [(&str, &str); 6] = [
    ("ask", "ask.parquet"),
    ("kos", "kos.csv"),
    ("lantern", "lantern.vot"),
    ("harrier", "harrier.fits"),
    ("cinder", "cinder.csv.gz"),
    ("ember", "ember.fits"),
];

fn committed_folder() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("demo_catalogs/fl1")
}

#[test]
fn default_seed_reproduces_the_committed_folder() {
    if std::env::var("FLUXLOOM_BLESS_DEMO").as_deref() == Ok("1") {
        write_demo_field(&committed_folder(), DEFAULT_SEED).unwrap();
    }
    let tmp = tempfile::tempdir().unwrap();
    let summary = write_demo_field(tmp.path(), DEFAULT_SEED).unwrap();
    let mut written: Vec<String> = summary
        .files
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    written.sort();
    let mut expected: Vec<String> = FILES.iter().map(|s| s.to_string()).collect();
    expected.sort();
    assert_eq!(written, expected);
    for name in FILES {
        let fresh = std::fs::read(tmp.path().join(name)).unwrap();
        let committed = std::fs::read(committed_folder().join(name)).unwrap_or_else(|e| {
            panic!("demo_catalogs/fl1/{name}: {e}; regenerate with FLUXLOOM_BLESS_DEMO=1")
        });
        assert!(
            fresh == committed,
            "demo_catalogs/fl1/{name} differs from a fresh generation ({} vs {} bytes); \
             regenerate with FLUXLOOM_BLESS_DEMO=1 and review the diff",
            committed.len(),
            fresh.len()
        );
    }
}

#[test]
fn two_generations_are_identical_and_seeds_differ() {
    let a = tempfile::tempdir().unwrap();
    let b = tempfile::tempdir().unwrap();
    let c = tempfile::tempdir().unwrap();
    write_demo_field(a.path(), 7).unwrap();
    write_demo_field(b.path(), 7).unwrap();
    write_demo_field(c.path(), 8).unwrap();
    for name in FILES {
        let x = std::fs::read(a.path().join(name)).unwrap();
        assert_eq!(x, std::fs::read(b.path().join(name)).unwrap(), "{name}");
    }
    let x = std::fs::read(a.path().join("truth_objects.csv")).unwrap();
    assert_ne!(
        x,
        std::fs::read(c.path().join("truth_objects.csv")).unwrap()
    );
}

#[test]
fn every_catalog_reads_through_its_schema_without_problems() {
    let tmp = tempfile::tempdir().unwrap();
    let summary = write_demo_field(tmp.path(), DEFAULT_SEED).unwrap();
    let library = BandLibrary::builtin();
    for ((survey, file), counts) in CATALOGS.iter().zip(&summary.surveys) {
        assert_eq!(counts.survey, *survey);
        let schema =
            SurveySchema::from_file(&tmp.path().join(format!("{survey}.toml")), &library).unwrap();
        assert_eq!(schema.survey, *survey);
        let (report, _) = vet_catalog(
            &tmp.path().join(file),
            &schema,
            NormalizeOptions::default(),
            None,
            65536,
            true,
        )
        .unwrap();
        assert_eq!(report.problem_count, 0, "{survey}: {:?}", report.problems);
        assert_eq!(report.rows_read, counts.sources as u64, "{survey}");
        assert_eq!(report.rows_kept, counts.sources as u64, "{survey}");
        let total =
            |status: BandStatus| -> u64 { report.bands.iter().map(|b| b.count(status)).sum() };
        assert!(total(BandStatus::Detected) > 0, "{survey}");
        // The conventions each survey exercises.
        match *survey {
            "lantern" | "harrier" | "cinder" | "kos" => {
                assert!(total(BandStatus::UpperLimit) > 0, "{survey} has no limits")
            }
            "ask" | "ember" => assert_eq!(total(BandStatus::UpperLimit), 0, "{survey}"),
            _ => unreachable!(),
        }
        if matches!(*survey, "kos" | "lantern" | "ask") {
            assert!(
                total(BandStatus::Missing) > 0,
                "{survey} has no missing values"
            );
        }
        if matches!(*survey, "cinder" | "ember") {
            assert_eq!(total(BandStatus::Missing), 0, "{survey}");
        }
        if *survey == "harrier" {
            // W4 is missing outside its own footprint only; rows detected at 22 µm
            // alone are not detected in W1.
            for b in &report.bands {
                let missing = b.count(BandStatus::Missing);
                assert_eq!(missing > 0, b.band == "wise_w4", "{}: {missing}", b.band);
            }
            let w1 = report.bands.iter().find(|b| b.band == "wise_w1").unwrap();
            assert!(w1.count(BandStatus::NotDetected) > 0);
        }
    }
}

#[test]
fn plan_parses_and_names_every_catalog() {
    let tmp = tempfile::tempdir().unwrap();
    write_demo_field(tmp.path(), DEFAULT_SEED).unwrap();
    let plan = Plan::from_file(&tmp.path().join("plan.toml")).unwrap();
    let names: Vec<&str> = plan.catalogs.iter().map(|c| c.name.as_str()).collect();
    assert_eq!(
        names,
        ["ask", "kos", "lantern", "harrier", "cinder", "ember"]
    );
    assert_eq!(plan.astrometric_reference, Some(0));
    assert!(plan.correct_offsets);
    let harrier = &plan.catalogs[3];
    assert!(
        harrier
            .coverage
            .as_ref()
            .unwrap()
            .ends_with("harrier_moc.txt")
    );
    assert!(
        plan.catalogs
            .iter()
            .enumerate()
            .all(|(i, c)| (i == 3) == c.coverage.is_some())
    );
    assert_eq!(plan.catalogs[0].settings.resolution_arcsec, Some(0.4));
}

#[test]
fn truth_members_cover_every_source_and_ember_has_blends() {
    let tmp = tempfile::tempdir().unwrap();
    let summary = write_demo_field(tmp.path(), DEFAULT_SEED).unwrap();
    let text = std::fs::read_to_string(tmp.path().join("truth_members.csv")).unwrap();
    let rows: Vec<Vec<&str>> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    assert!(rows.iter().all(|r| r.len() == 3));
    for s in &summary.surveys {
        let mine: Vec<&Vec<&str>> = rows.iter().filter(|r| r[0] == s.survey).collect();
        let mut ids: Vec<&str> = mine.iter().map(|r| r[1]).collect();
        ids.dedup();
        assert_eq!(ids.len(), s.sources, "{}", s.survey);
        let artefacts = mine.iter().filter(|r| r[2].is_empty()).count();
        assert_eq!(artefacts, s.artefacts, "{}", s.survey);
        assert!(s.artefacts > 0, "{} has no artefacts", s.survey);
    }
    let ember = summary
        .surveys
        .iter()
        .find(|s| s.survey == "ember")
        .unwrap();
    assert!(ember.blends >= 3, "ember blends: {}", ember.blends);
}

#[test]
fn class_ii_alpha_lies_in_its_class_and_photospheres_are_near_minus_three() {
    let grid = BandGrid::builtin();
    let truth = generate(DEFAULT_SEED);
    let mut checked = [0usize; 4];
    for o in &truth {
        let alpha = alpha_2_24(&grid, &o.flux_jy);
        match o.kind {
            Kind::ClassII => {
                // Greene et al. 1994: Class II is −1.6 ≤ α < −0.3.
                assert!((-1.6..-0.3).contains(&alpha), "{}: α = {alpha}", o.truth_id);
                assert!((o.alpha.unwrap() - alpha).abs() < 1e-9);
                checked[0] += 1;
            }
            Kind::ClassI => {
                // Greene et al. 1994: Class I is α ≥ 0.3.
                assert!(alpha >= 0.3, "{}: α = {alpha}", o.truth_id);
                checked[1] += 1;
            }
            Kind::Star if o.teff_k.unwrap() >= 5000.0 => {
                // An A0V photosphere (all Vega colours 0, with the band zero points of Cohen et al. 2003
                // and Engelbracht et al. 2007) has α = −2.89 from Ks to 24 µm (computed by hand); cooler
                // photospheres and extinction move it a little.
                assert!(
                    (-3.1..=-2.5).contains(&alpha),
                    "{}: α = {alpha}",
                    o.truth_id
                );
                checked[2] += 1;
            }
            Kind::ClassIII => {
                assert!(alpha < -1.6, "{}: α = {alpha}", o.truth_id);
                checked[3] += 1;
            }
            _ => {}
        }
    }
    assert!(checked.iter().all(|&n| n > 0), "{checked:?}");
}
