//! Blends decided by flux, end to end through `fluxloom build`: a coarse
//! source over a bright star and a much fainter companion stays with the star
//! (flagged `contaminated`, with the companions' share), while one over two
//! equal stars, or one not consistent with the bright star alone, is a blend.
//! Invented catalogs of an invented field.

mod common;

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::AsArray;
use arrow::datatypes::UInt32Type;

use common::{floats, read_parquet, text};

/// 8 µm photometry at 1.8″ resolution. A: 3.4 mJy with a companion a2 2″
/// east, 2600 times fainter; b1, b2: two equal stars 2″ apart; d: 3.4 mJy
/// with a companion d2 2″ east 100 times fainter.
const FINE: &str = "# invented 8 um sources
id,ra,dec,f80,e80
a,150.0000000,10.0,3.4,0.05
a2,150.0005641,10.0,0.0013076923,0.0002
b1,150.0100000,10.0,2.0,0.05
b2,150.0105641,10.0,2.0,0.05
d,150.0200000,10.0,3.4,0.05
d2,150.0205641,10.0,0.034,0.002
";

/// 24 µm photometry at 6″: c1 on a, c2 between b1 and b2, c3 3″ west of d
/// (within 6″ of d and d2, not consistent with d alone).
const COARSE: &str = "# invented 24 um sources
id,ra,dec,f24,e24
c1,150.0000000,10.0,3.0,0.1
c2,150.0102820,10.0,4.0,0.1
c3,150.0191538,10.0,3.0,0.1
";

const FINE_SCHEMA: &str = r#"survey = "fine"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2016.0

[[band]]
band = "irac_80"
value = "f80"
unit = "mJy"
error = "e80"
"#;

const COARSE_SCHEMA: &str = r#"survey = "coarse"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.5 }

[epoch]
year = 2016.0

[[band]]
band = "mips_24"
value = "f24"
unit = "mJy"
error = "e24"
"#;

fn plan(extra_match: &str) -> String {
    format!(
        r#"[field]
name = "shares"
reference_epoch = 2016.0
area_deg2 = 0.01

[match]
tolerance = {{ kind = "sigma", k = 3.439, max_arcsec = 2.0 }}
{extra_match}

[[catalog]]
file = "fine.csv"
schema = "fine.toml"
resolution_arcsec = 1.8

[[catalog]]
file = "coarse.csv"
schema = "coarse.toml"
resolution_arcsec = 6.0

[output]
folder = "out"
"#
    )
}

fn build(dir: &Path, extra_match: &str) -> PathBuf {
    build_files(
        dir,
        [
            ("fine.csv", FINE),
            ("coarse.csv", COARSE),
            ("fine.toml", FINE_SCHEMA),
            ("coarse.toml", COARSE_SCHEMA),
        ],
        extra_match,
    )
}

/// Writes `files` and the plan into `dir`, builds, and returns the output folder.
fn build_files(dir: &Path, files: [(&str, &str); 4], extra_match: &str) -> PathBuf {
    for (name, body) in files {
        fs::write(dir.join(name), body).unwrap();
    }
    fs::write(dir.join("plan.toml"), plan(extra_match)).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build", dir.join("plan.toml").to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    dir.join("out")
}

/// Per object id: (coarse member, flags, status, share, related, 24 µm status,
/// 24 µm flux, 24 µm limit).
#[allow(clippy::type_complexity)]
fn rows(
    out: &Path,
) -> Vec<(
    String,
    String,
    u32,
    String,
    Option<f64>,
    String,
    String,
    Option<f64>,
    Option<f64>,
)> {
    let o = read_parquet(&out.join("objects.parquet"));
    let flags = o
        .column_by_name("flags")
        .unwrap()
        .as_primitive::<UInt32Type>();
    let (id, coarse, status, related, s24) = (
        text(&o, "object_id"),
        text(&o, "coarse_source_id"),
        text(&o, "status"),
        text(&o, "related"),
        text(&o, "mips_24_status"),
    );
    let (share, f24, u24) = (
        floats(&o, "contamination_share"),
        floats(&o, "mips_24_flux_jy"),
        floats(&o, "mips_24_ulim_jy"),
    );
    (0..o.num_rows())
        .map(|k| {
            (
                id[k].clone(),
                coarse[k].clone(),
                flags.value(k),
                status[k].clone(),
                share[k],
                related[k].clone(),
                s24[k].clone(),
                f24[k],
                u24[k],
            )
        })
        .collect()
}

#[test]
fn a_faint_companion_leaves_the_coarse_flux_to_the_star() {
    let dir = tempfile::tempdir().unwrap();
    let out = build(dir.path(), "");
    let rows = rows(&out);
    let get = |id: &str| rows.iter().find(|r| r.0 == id).unwrap().clone();
    let ids: Vec<&str> = rows.iter().map(|r| r.0.as_str()).collect();
    assert_eq!(
        ids,
        [
            "fine:a",
            "fine:a2",
            "fine:b1",
            "fine:b2",
            "fine:d",
            "fine:d2",
            "coarse:c2",
            "coarse:c3"
        ]
    );

    // a keeps c1 as a member and its 24 µm detection, contaminated (bit 256)
    // by a2's share 1/2601 = 3.845e-4 (arithmetic).
    let a = get("fine:a");
    assert_eq!(a.1, "c1");
    assert_eq!(a.2, 256);
    assert_eq!(a.3, "contaminated");
    assert!((a.4.unwrap() - 1.0 / 2601.0).abs() < 1e-9, "{:?}", a.4);
    assert_eq!(a.5, "fine:a2");
    assert_eq!(a.6, "detected");
    assert!((a.7.unwrap() - 0.003).abs() < 1e-15);
    // a2 gets no flux from c1: only an upper limit, flagged under a coarse source.
    let a2 = get("fine:a2");
    assert_eq!(a2.1, "");
    assert_eq!(a2.3, "has_blend+single_catalog");
    assert_eq!(a2.5, "fine:a");
    assert_eq!((a2.6.as_str(), a2.7), ("blended", None));
    assert!((a2.8.unwrap() - 0.003).abs() < 1e-15);
    assert_eq!(a2.4, None);

    // Two equal stars: c2 is a blend of its own, an upper limit for each.
    let c2 = get("coarse:c2");
    assert_eq!(c2.3, "blend+single_catalog");
    assert_eq!(c2.5, "fine:b1,fine:b2");
    assert_eq!(c2.4, None);
    for b in ["fine:b1", "fine:b2"] {
        let r = get(b);
        assert_eq!(r.3, "has_blend+single_catalog", "{b}");
        assert_eq!((r.6.as_str(), r.7), ("blended", None), "{b}");
        assert!((r.8.unwrap() - 0.004).abs() < 1e-15, "{b}");
    }

    // d2 carries 1/101 of the flux, below 10 %, but c3 lies 3″ from d, beyond
    // the pair's tolerance: the light is not where the shares put it, so c3 is
    // a blend.
    let c3 = get("coarse:c3");
    assert_eq!(c3.3, "blend+single_catalog");
    assert_eq!(c3.5, "fine:d,fine:d2");
    assert_eq!(get("fine:d").6, "blended");

    // The photometry table agrees.
    let p = read_parquet(&out.join("photometry.parquet"));
    let (pid, band, status) = (text(&p, "object_id"), text(&p, "band"), text(&p, "status"));
    let point = |id: &str| {
        (0..p.num_rows())
            .find(|&k| pid[k] == id && band[k] == "mips_24")
            .map(|k| status[k].clone())
            .unwrap()
    };
    assert_eq!(point("fine:a"), "detected");
    assert_eq!(point("fine:a2"), "blended");
    assert_eq!(point("fine:b1"), "blended");
}

#[test]
fn a_zero_share_limit_makes_every_such_source_a_blend() {
    let dir = tempfile::tempdir().unwrap();
    let out = build(dir.path(), "companion_share_limit = 0.0");
    let rows = rows(&out);
    let a = rows.iter().find(|r| r.0 == "fine:a").unwrap();
    assert_eq!(a.1, "");
    assert_eq!(a.3, "has_blend+single_catalog");
    assert_eq!(a.6, "blended");
    let c1 = rows.iter().find(|r| r.0 == "coarse:c1").unwrap();
    assert_eq!(c1.3, "blend+single_catalog");
    assert!(rows.iter().all(|r| r.2 & 256 == 0 && r.4.is_none()));
}

#[test]
fn the_share_limit_is_checked_in_the_plan() {
    let dir = tempfile::tempdir().unwrap();
    for (name, body) in [
        ("fine.csv", FINE),
        ("coarse.csv", COARSE),
        ("fine.toml", FINE_SCHEMA),
        ("coarse.toml", COARSE_SCHEMA),
    ] {
        fs::write(dir.path().join(name), body).unwrap();
    }
    fs::write(
        dir.path().join("plan.toml"),
        plan("companion_share_limit = 0.7"),
    )
    .unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args([
            "build",
            dir.path().join("plan.toml").to_str().unwrap(),
            "--quiet",
        ])
        .output()
        .unwrap();
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("plan.toml:8: companion_share_limit must lie in [0, 0.5]"),
        "{err}"
    );
    assert!(err.contains("found 0.7"), "{err}");
}

/// 5.8 and 8 µm photometry: a star s falling from 4.0 to 3.4 mJy, and a red
/// companion r 2″ east rising from 0.12 to 0.2 mJy (a disk or galaxy).
const RED_FINE: &str = "# invented 5.8 and 8 um sources
id,ra,dec,f58,e58,f80,e80
s,150.0000000,10.0,4.0,0.05,3.4,0.05
r,150.0005641,10.0,0.12,0.01,0.2,0.01
";

/// Builds a scene of `fine` (read with `fine_schema`) and `coarse` at 24 µm in a
/// fresh folder, kept alive with the output folder returned.
fn build_scene(fine: &str, fine_schema: &str, coarse: &str) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let files = [
        ("fine.csv", fine),
        ("coarse.csv", coarse),
        ("fine.toml", fine_schema),
        ("coarse.toml", COARSE_SCHEMA),
    ];
    let out = build_files(dir.path(), files, "");
    (dir, out)
}

/// One 24 µm source on the star.
const RED_COARSE: &str = "# invented 24 um source
id,ra,dec,f24,e24
c1,150.0000000,10.0,3.0,0.1
";

/// The fine schema with both bands.
fn two_band_schema() -> String {
    FINE_SCHEMA.replace(
        "[[band]]\nband = \"irac_80\"",
        "[[band]]\nband = \"irac_58\"\nvalue = \"f58\"\nunit = \"mJy\"\nerror = \"e58\"\n\n[[band]]\nband = \"irac_80\"",
    )
}

#[test]
fn a_red_companion_makes_a_blend_its_8_micron_share_would_not() {
    // From 8 µm alone the companion carries 0.2 / 3.6 = 5.6 % (arithmetic), under the
    // 10 % limit: the star keeps the 24 µm flux, contaminated.
    let (_dir, out) = build_scene(RED_FINE, FINE_SCHEMA, RED_COARSE);
    let star = rows(&out).into_iter().find(|r| r.0 == "fine:s").unwrap();
    let s = &star;
    assert_eq!(
        (s.1.as_str(), s.3.as_str()),
        ("c1", "contaminated"),
        "{s:?}"
    );
    assert!((s.4.unwrap() - 0.2 / 3.6).abs() < 1e-9, "{s:?}");

    // With 5.8 µm too, each is carried to 24 µm by its own power law: the star's slope
    // ln(3.4/4)/ln(λ₈/λ₅.₈) ≈ −0.5 and the companion's ≈ +1.6 put the companion near 40 %
    // of the 24 µm flux, so c1 is a blend and neither object gets it as a detection.
    let schema = two_band_schema();
    let (_dir, out) = build_scene(RED_FINE, &schema, RED_COARSE);
    let rows = rows(&out);
    let c1 = rows.iter().find(|r| r.0 == "coarse:c1").unwrap();
    assert_eq!(c1.3, "blend+single_catalog", "{c1:?}");
    assert_eq!(c1.5, "fine:r,fine:s");
    for id in ["fine:s", "fine:r"] {
        let r = rows.iter().find(|r| r.0 == id).unwrap();
        assert_eq!((r.1.as_str(), r.6.as_str()), ("", "blended"), "{r:?}");
    }
}

/// Two equal 8 µm stars 5.9″ apart, f1 and f2.
const NEIGHBOURS_FINE: &str = "# invented 8 um sources
id,ra,dec,f80,e80
f1,150.0000000,10.0,2.0,0.05
f2,150.0016642,10.0,2.0,0.05
";

/// The coarse catalog resolves them itself: c1 on f1, c2 0.4″ beyond f2, 6.3″
/// from c1 (just beyond its 6″ resolution).
const NEIGHBOURS_COARSE: &str = "# invented 24 um sources
id,ra,dec,f24,e24
c1,150.0000000,10.0,3.0,0.1
c2,150.0017770,10.0,3.0,0.1
";

#[test]
fn a_neighbour_the_coarse_catalog_resolved_makes_no_blend() {
    // f2 lies within 6″ of c1, but nearer to c2 (0.4″) than to c1 (5.9″): c2 is its
    // measurement, so c1 lies over f1 alone and each coarse source joins its star.
    let (_dir, out) = build_scene(NEIGHBOURS_FINE, FINE_SCHEMA, NEIGHBOURS_COARSE);
    let rows = rows(&out);
    let ids: Vec<&str> = rows.iter().map(|r| r.0.as_str()).collect();
    assert_eq!(ids, ["fine:f1", "fine:f2"], "{rows:?}");
    for (id, coarse) in [("fine:f1", "c1"), ("fine:f2", "c2")] {
        let r = rows.iter().find(|r| r.0 == id).unwrap();
        assert_eq!(
            (r.1.as_str(), r.2, r.6.as_str()),
            (coarse, 0, "detected"),
            "{r:?}"
        );
    }
}
