//! Stars that move when no catalog gives their motion: a synthetic field seen by
//! three invented surveys without proper motions at epochs 2000, 2010 and 2020.
//!
//! - A star moving 200 mas/yr is one object flagged `moving`, with its fitted
//!   motion within errors.
//! - A pair of unrelated stationary sources at the mover's separation over the
//!   same 20 years (4″), with no source between them in 2010, is not merged;
//!   three at the mover's separations (2″, 2″, 4″) but not in the order a
//!   moving star gives them are not one object.
//! - The same track made by an extended source is never a moving object.
//! - With `max_motion_masyr = 0` none of this happens, and the stationary stars
//!   of the field are matched as before.
//! - The answer does not depend on the sky cells.

use std::collections::HashMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::{Array, AsArray};
use arrow::datatypes::{Float64Type, UInt32Type};

mod common;

use common::{assert_same_files, read_parquet};

const SURVEYS: [(&str, f64); 3] = [("alder", 2000.0), ("birch", 2010.0), ("cedar", 2020.0)];
const RA0: f64 = 150.0;
const DEC0: f64 = 10.0;
/// Background stars seen by all three surveys.
const BACKGROUND: usize = 40;
/// Sources per survey per square degree, for the prior and the background: 1e4.
const DENSITY_PER_DEG2: f64 = 1e4;
/// Sources per survey besides the background (mover, scrambled, galaxy, twin).
const SPECIAL: usize = 4;
/// The mover's proper motion (μ_α cos δ, μ_δ), mas/yr: |μ| = 200.
const PM_MASYR: [f64; 2] = [160.0, -120.0];

/// RA, Dec of a point `east`, `north` arcsec from (ra, dec).
fn offset(ra: f64, dec: f64, east: f64, north: f64) -> (f64, f64) {
    let dec_new = dec + north / 3600.0;
    (ra + east / 3600.0 / dec.to_radians().cos(), dec_new)
}

/// A deterministic uniform number in [0, 1) (a 64-bit LCG, Knuth's MMIX constants).
fn uniform(state: &mut u64) -> f64 {
    *state = state
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    (*state >> 11) as f64 / (1u64 << 53) as f64
}

/// Rows (id, ra, dec, rh) of survey `k` (epoch `SURVEYS[k].1`).
fn rows(k: usize) -> Vec<(String, f64, f64, f64)> {
    let epoch = SURVEYS[k].1;
    let mut out = Vec::new();
    let mut state = 12345u64;
    let side_arcsec = area_deg2().sqrt() * 3600.0;
    for i in 0..BACKGROUND {
        let (e, n) = (
            side_arcsec * uniform(&mut state),
            side_arcsec * uniform(&mut state),
        );
        // Each survey's own measurement noise, ≤ 0.05″ per axis.
        let mut noise = 1000 + 17 * i as u64 + 101 * k as u64;
        let (de, dn) = (
            0.1 * (uniform(&mut noise) - 0.5),
            0.1 * (uniform(&mut noise) - 0.5),
        );
        let (ra, dec) = offset(RA0, DEC0, e + de, n + dn);
        out.push((format!("bg{i}"), ra, dec, 0.0));
    }
    let dt = epoch - 2010.0;
    // The mover at (+300″, 0) at 2010, with small fixed measurement offsets.
    let jitter = [[0.03, -0.02], [-0.04, 0.01], [0.02, 0.03]][k];
    let (ra, dec) = offset(
        RA0,
        DEC0,
        300.0 + PM_MASYR[0] / 1000.0 * dt + jitter[0],
        PM_MASYR[1] / 1000.0 * dt + jitter[1],
    );
    out.push(("mover".into(), ra, dec, 0.0));
    // Three unrelated stationary sources along the same direction, 2″, 2″ and 4″ apart,
    // in the order 0, 4, 2″ for the epochs 2000, 2010, 2020 (no linear motion).
    let along = [0.0, 4.0, 2.0][k];
    let (ra, dec) = offset(RA0, DEC0, 400.0 + 0.8 * along, -0.6 * along);
    out.push(("scrambled".into(), ra, dec, 0.0));
    // The mover's track made by an extended source (half-light radius 0.5″).
    let (ra, dec) = offset(
        RA0,
        DEC0,
        500.0 + PM_MASYR[0] / 1000.0 * dt,
        PM_MASYR[1] / 1000.0 * dt,
    );
    out.push(("galaxy".into(), ra, dec, 0.5));
    // Two unrelated stationary sources 4″ apart along the mover's direction, seen in
    // 2000 and 2020 only (birch has an unrelated source far from them instead).
    let along = [Some(0.0), None, Some(4.0)][k];
    let (ra, dec) = match along {
        Some(a) => offset(RA0, DEC0, 600.0 + 0.8 * a, -0.6 * a),
        None => offset(RA0, DEC0, 600.0, 200.0),
    };
    out.push(("twin".into(), ra, dec, 0.0));
    out
}

/// The field area for the prior, square degrees: the survey's sources at `DENSITY_PER_DEG2`.
fn area_deg2() -> f64 {
    (BACKGROUND + SPECIAL) as f64 / DENSITY_PER_DEG2
}

/// Writes the three catalogs, their schemas and a plan with `match_extra` in
/// its `[match]` table; returns the plan's path.
fn write_field(dir: &Path, match_extra: &str) -> PathBuf {
    let mut catalogs = String::new();
    for (k, (name, epoch)) in SURVEYS.iter().enumerate() {
        let mut csv = String::from("id,ra,dec,r,er,rh\n");
        for (id, ra, dec, rh) in rows(k) {
            writeln!(csv, "{id},{ra:.10},{dec:.10},18.0,0.05,{rh}").unwrap();
        }
        std::fs::write(dir.join(format!("{name}.csv")), csv).unwrap();
        let schema = format!(
            "survey = \"{name}\"\nformat = \"csv\"\nid = \"id\"\n\n[position]\nra = \"ra\"\ndec = \"dec\"\n\
             error = {{ kind = \"fixed\", arcsec = 0.1 }}\n\
             extended = {{ size = \"rh\", unit = \"arcsec\" }}\n\n[epoch]\nyear = {epoch:.1}\n\n\
             [[band]]\nband = \"sdss_r\"\nvalue = \"r\"\nunit = \"ab_mag\"\nerror = \"er\"\n"
        );
        std::fs::write(dir.join(format!("{name}.toml")), schema).unwrap();
        write!(
            catalogs,
            "[[catalog]]\nfile = \"{name}.csv\"\nschema = \"{name}.toml\"\n\n"
        )
        .unwrap();
    }
    let area_deg2 = area_deg2();
    let plan = format!(
        "[field]\nname = \"mv\"\nreference_epoch = 2010.0\narea_deg2 = {area_deg2}\n\n\
         [match]\n{match_extra}\n\n{catalogs}[output]\nfolder = \"out\"\nreport = false\n"
    );
    let path = dir.join("plan.toml");
    std::fs::write(&path, plan).unwrap();
    path
}

fn build(plan: &Path, out: &Path, extra: &[&str]) {
    let run = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["--quiet", "build"])
        .arg(plan)
        .arg("--out")
        .arg(out)
        .args(extra)
        .output()
        .expect("fluxloom runs");
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
}

/// One object of objects.parquet.
#[derive(Debug, Clone, PartialEq)]
struct Object {
    members: Vec<String>,
    flags: u32,
    pm_fit: [Option<f64>; 2],
    pm_fit_err: [Option<f64>; 2],
}

/// The objects by id, members as `survey:id`.
fn read_objects(out: &Path) -> HashMap<String, Object> {
    let batch = read_parquet(&out.join("objects.parquet"));
    let text = |name: &str| {
        batch
            .column_by_name(name)
            .unwrap()
            .as_string::<i32>()
            .clone()
    };
    let float = |name: &str| {
        batch
            .column_by_name(name)
            .unwrap()
            .as_primitive::<Float64Type>()
            .clone()
    };
    let opt = |a: &arrow::array::Float64Array, i: usize| (!a.is_null(i)).then(|| a.value(i));
    let ids = text("object_id");
    let flags = batch
        .column_by_name("flags")
        .unwrap()
        .as_primitive::<UInt32Type>()
        .clone();
    let members: Vec<_> = SURVEYS
        .iter()
        .map(|(name, _)| (name, text(&format!("{name}_source_id"))))
        .collect();
    let (pa, pd) = (float("pm_fit_ra_cosdec_masyr"), float("pm_fit_dec_masyr"));
    let (ea, ed) = (
        float("pm_fit_ra_cosdec_err_masyr"),
        float("pm_fit_dec_err_masyr"),
    );
    (0..batch.num_rows())
        .map(|i| {
            let o = Object {
                members: members
                    .iter()
                    .filter(|(_, col)| !col.is_null(i))
                    .map(|(name, col)| format!("{name}:{}", col.value(i)))
                    .collect(),
                flags: flags.value(i),
                pm_fit: [opt(&pa, i), opt(&pd, i)],
                pm_fit_err: [opt(&ea, i), opt(&ed, i)],
            };
            (ids.value(i).to_string(), o)
        })
        .collect()
}

const MOVING: u32 = 128;

/// The object holding `survey:id`.
fn holder<'a>(objects: &'a HashMap<String, Object>, member: &str) -> &'a Object {
    objects
        .values()
        .find(|o| o.members.iter().any(|m| m == member))
        .unwrap_or_else(|| panic!("no object holds {member}"))
}

#[test]
fn a_fast_star_without_catalog_motions_is_one_moving_object() {
    let dir = tempfile::tempdir().unwrap();
    let plan = write_field(dir.path(), "");
    let out = dir.path().join("out");
    build(&plan, &out, &[]);
    let objects = read_objects(&out);

    // The mover: one object of all three detections, flagged moving. Its Bayes factor is
    // about the hand value of resolve.rs's test (ln B_move ≈ 50.8 for 0.1″ errors), ×0.05
    // for the prior fraction of movers: ln ≈ 47.8, against ln P₀ = −2 ln ρ − 2 ln 4π =
    // −2 · 17.307 − 5.062 = −39.68 (ρ = 1e4 deg⁻² = 3.2828e7 sr⁻¹): posterior odds e^8.1.
    let mover = holder(&objects, "alder:mover");
    assert_eq!(
        mover.members,
        ["alder:mover", "birch:mover", "cedar:mover"],
        "{mover:?}"
    );
    assert_eq!(mover.flags, MOVING, "{mover:?}");
    for (k, truth) in PM_MASYR.into_iter().enumerate() {
        let (fit, err) = (mover.pm_fit[k].unwrap(), mover.pm_fit_err[k].unwrap());
        // Posterior σ ≈ s/√K = 7.0 mas/yr (resolve.rs's test), shrinkage toward 0 ≈ 0.65 %.
        assert!(err > 6.0 && err < 8.0, "{err}");
        assert!((fit - truth).abs() < 3.0 * err, "{mover:?}");
    }

    // The twin pair, 4″ in 20 yr like the mover's first and last detections: as a
    // two-detection mover (v = σ₁² + σ₂² + Δt² s² = 0.02 + 400 · 0.00761 = 3.064 arcsec²)
    // ln B = ln(2/v) − ψ²/2v + 24.474 = −0.427 − 2.611 + 24.474 = 21.436; × 0.05: 18.440,
    // against ln P₀ = −17.307 − 2.531 = −19.838: odds e^−1.4. Apart. The mover's 2010
    // detection on the line between is what makes it one object.
    for s in ["alder", "cedar"] {
        let o = holder(&objects, &format!("{s}:twin"));
        assert_eq!(o.members.len(), 1, "{o:?}");
        assert_eq!(o.flags & MOVING, 0);
    }
    // The scrambled triple: the three fit no line (χ² ≈ 600 by the formulas of
    // motion.rs), so no object holds all three. (Its 2″ pairs alone are about even
    // odds as two-detection movers, ln odds about 0.0 and +0.56: not asserted.)
    for s in SURVEYS {
        let o = holder(&objects, &format!("{}:scrambled", s.0));
        assert!(o.members.len() < 3, "{o:?}");
    }

    // The galaxy on the mover's track: extended sources never move, and its pairs pass
    // only the widened tolerance, so they make no stationary object either.
    for s in SURVEYS {
        let o = holder(&objects, &format!("{}:galaxy", s.0));
        assert_eq!(o.members.len(), 1, "{o:?}");
        assert_eq!(o.flags & MOVING, 0);
        assert_eq!(o.pm_fit, [None, None]);
    }

    // Background stars: stationary objects of three members, never moving.
    for i in 0..BACKGROUND {
        let o = holder(&objects, &format!("alder:bg{i}"));
        assert_eq!(o.members.len(), 3, "bg{i}: {o:?}");
        assert_eq!(o.flags & MOVING, 0, "bg{i}: {o:?}");
        assert_eq!(o.pm_fit, [None, None]);
    }
    // Moving: the mover, and at most one even-odds pair of the scrambled triple.
    let moving: Vec<&Object> = objects.values().filter(|o| o.flags & MOVING != 0).collect();
    assert!(
        moving
            .iter()
            .all(|o| o.members[0].ends_with(":mover") || o.members[0].ends_with(":scrambled")),
        "{moving:?}"
    );
    assert!(moving.len() <= 2, "{moving:?}");

    // Without the moving hypothesis, the mover falls apart and the rest is as it was.
    let still_plan = write_field(dir.path(), "max_motion_masyr = 0.0");
    let still_out = dir.path().join("still");
    build(&still_plan, &still_out, &[]);
    let still = read_objects(&still_out);
    for s in SURVEYS {
        let o = holder(&still, &format!("{}:mover", s.0));
        assert_eq!(o.members.len(), 1, "{o:?}");
    }
    assert!(still.values().all(|o| o.flags & MOVING == 0));
    assert!(still.values().all(|o| o.pm_fit == [None, None]));
    for i in 0..BACKGROUND {
        let id = format!("alder:bg{i}");
        assert_eq!(still[&id].members, objects[&id].members);
        assert_eq!(still[&id].flags, objects[&id].flags);
    }
    // Background objects, and singles: mover 3, scrambled 3, galaxy 3, twin 2, birch's
    // far source 1.
    assert_eq!(still.len(), BACKGROUND + 12);
    assert!(
        still
            .values()
            .all(|o| o.members.len() == 1 || o.members.len() == 3)
    );
}

#[test]
fn moving_objects_do_not_depend_on_the_cells() {
    // Cells of order 16 are about 3.2″ across and a 0.5″ radius tolerance alone would
    // give margins of 1″: the mover's 4″ track reaches across cells, so margins without
    // the widening (3″ and 6″ here) would lose its detections.
    let dir = tempfile::tempdir().unwrap();
    let plan = write_field(
        dir.path(),
        "tolerance = { kind = \"radius\", arcsec = 0.5 }",
    );
    let one = dir.path().join("one");
    build(&plan, &one, &["--cell-order", "0"]);
    let objects = read_objects(&one);
    assert_eq!(holder(&objects, "alder:mover").flags, MOVING);
    let small = dir.path().join("small");
    build(&plan, &small, &["--cell-order", "16"]);
    assert_same_files(&small, &one, "cell order 16");
}
