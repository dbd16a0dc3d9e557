//! A band with its own footprint and resolution inside one catalog, end to
//! end through `fluxloom build`: a coarse 24 µm band of a catalog whose other
//! band is fine, observed over the eastern half of the field only, with rows
//! that carry only that band. Invented catalogs of an invented field.

mod common;

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use common::{floats, read_parquet, text};
use fluxloom::sky::partition::home_cell;

/// East: p (with an hx row h1), r (no hx row), t1 and t2 3″ apart under the
/// 24-µm-only row h3, v under the 24-µm-only row h8. West: q (hx row h2), s.
const OPT: &str = "# invented Ks sources
id,ra,dec,fk,ek
p,150.1000,10.000000,1.0,0.02
r,150.1000,10.003000,1.0,0.02
t1,150.1000,10.006000,1.0,0.02
t2,150.1000,10.006833,1.0,0.02
v,150.1000,10.010000,1.0,0.02
q,150.0000,10.000000,1.0,0.02
s,150.0000,10.003000,1.0,0.02
";

/// 3.4 µm at 2″ in every row but the 24-µm-only rows h3 and h8 (their
/// positions from the 6″ band, hence their larger errors).
const HX: &str = "# invented 3.4 and 24 um sources
id,ra,dec,e_pos,f1,e1,f24,e24
h1,150.1000,10.000000,0.2,2.0,0.05,,
h2,150.0000,10.000000,0.2,2.0,0.05,,
h3,150.1000,10.006417,0.8,,,5.0,0.2
h8,150.1000,10.010083,0.8,,,2.0,0.2
";

const OPT_SCHEMA: &str = r#"survey = "opt"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2016.0

[[band]]
band = "tmass_ks"
value = "fk"
unit = "mJy"
error = "ek"
"#;

const HX_SCHEMA: &str = r#"survey = "hx"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "circular", column = "e_pos", unit = "arcsec" }

[epoch]
year = 2016.0

[[band]]
band = "wise_w1"
value = "f1"
unit = "mJy"
error = "e1"

[[band]]
band = "mips_24"
value = "f24"
unit = "mJy"
error = "e24"
empty = "not_detected"
depth = 0.5
coverage = "m24_moc.txt"
resolution_arcsec = 6.0
"#;

const PLAN: &str = r#"[field]
name = "bands"
reference_epoch = 2016.0
area_deg2 = 0.01

[match]
tolerance = { kind = "sigma", k = 3.439, max_arcsec = 3.0 }

[[catalog]]
file = "opt.csv"
schema = "opt.toml"
resolution_arcsec = 0.5

[[catalog]]
file = "hx.csv"
schema = "hx.toml"
resolution_arcsec = 2.0
coverage = "hx_moc.txt"

[output]
folder = "out"
"#;

/// Positions of the rows of a CSV above (RA, Dec columns 2 and 3).
fn positions(csv: &str) -> Vec<(f64, f64)> {
    csv.lines()
        .skip(2)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[1].parse().unwrap(), f[2].parse().unwrap())
        })
        .collect()
}

fn moc(order: u8, cells: &[u64]) -> String {
    let mut cells = cells.to_vec();
    cells.sort_unstable();
    cells.dedup();
    let list: Vec<String> = cells.iter().map(u64::to_string).collect();
    format!("{order}/{}\n", list.join(" "))
}

fn build(dir: &Path) -> PathBuf {
    let all: Vec<(f64, f64)> = positions(OPT).into_iter().chain(positions(HX)).collect();
    // The 24 µm footprint: the order-10 cells (3.4′) of the eastern positions.
    let east: Vec<u64> = all
        .iter()
        .filter(|p| p.0 > 150.05)
        .map(|p| home_cell(10, p.0, p.1))
        .collect();
    for p in all.iter().filter(|p| p.0 < 150.05) {
        assert!(
            !east.contains(&home_cell(10, p.0, p.1)),
            "the west lies outside"
        );
    }
    let everywhere: Vec<u64> = all.iter().map(|p| home_cell(10, p.0, p.1)).collect();
    for (name, body) in [
        ("opt.csv", OPT.to_string()),
        ("hx.csv", HX.to_string()),
        ("opt.toml", OPT_SCHEMA.to_string()),
        ("hx.toml", HX_SCHEMA.to_string()),
        ("plan.toml", PLAN.to_string()),
        ("m24_moc.txt", moc(10, &east)),
        ("hx_moc.txt", moc(10, &everywhere)),
    ] {
        fs::write(dir.join(name), body).unwrap();
    }
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build", dir.join("plan.toml").to_str().unwrap(), "--quiet"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    dir.join("out")
}

#[test]
fn a_coarse_band_with_its_own_footprint_and_resolution() {
    let dir = tempfile::tempdir().unwrap();
    let out = build(dir.path());
    let o = read_parquet(&out.join("objects.parquet"));
    let (id, hx, status) = (
        text(&o, "object_id"),
        text(&o, "hx_source_id"),
        text(&o, "status"),
    );
    let (s24, s1, ra) = (
        text(&o, "mips_24_status"),
        text(&o, "wise_w1_status"),
        floats(&o, "ra_deg"),
    );
    let (f24, u24) = (floats(&o, "mips_24_flux_jy"), floats(&o, "mips_24_ulim_jy"));
    let row = |name: &str| id.iter().position(|i| i == name).unwrap();
    assert_eq!(
        id,
        [
            "opt:p", "opt:q", "opt:r", "opt:s", "opt:t1", "opt:t2", "opt:v", "hx:h3"
        ]
    );

    // Inside the band's footprint an empty value, or no source, is a
    // non-detection with the depth as its limit; outside it, not covered.
    for name in ["opt:p", "opt:r"] {
        let k = row(name);
        assert_eq!(s24[k], "not_detected", "{name}");
        assert!((u24[k].unwrap() - 5e-4).abs() < 1e-15, "{name}");
    }
    for name in ["opt:q", "opt:s"] {
        let k = row(name);
        assert_eq!(s24[k], "not_covered", "{name}");
        assert_eq!(u24[k], None, "{name}");
    }
    assert_eq!(hx[row("opt:p")], "h1");
    assert_eq!(hx[row("opt:q")], "h2");
    // The catalog's other band covers the whole field.
    assert_eq!(s1[row("opt:q")], "detected");
    assert_eq!(s1[row("opt:s")], "not_detected");
    for k in 0..id.len() {
        if ra[k].unwrap() > 150.05 {
            assert_ne!(s24[k], "not_covered", "{}: inside the footprint", id[k]);
        } else {
            assert_eq!(s24[k], "not_covered", "{}: outside the footprint", id[k]);
        }
    }

    // h3, seen only at 24 µm, is 6″ wide: t1 and t2, 3″ apart, are blended
    // in that band (an upper limit each), though 3″ is resolved at the
    // catalog's 2″, and its 3.4 µm band is not blended for them.
    let h3 = row("hx:h3");
    assert_eq!(status[h3], "blend+single_catalog");
    for name in ["opt:t1", "opt:t2"] {
        let k = row(name);
        assert_eq!(status[k], "has_blend+single_catalog", "{name}");
        assert_eq!(s24[k], "blended", "{name}");
        assert!((u24[k].unwrap() - 0.005).abs() < 1e-15, "{name}");
        assert_eq!(s1[k], "not_detected", "{name}");
    }

    // h8, seen only at 24 µm over v alone, joins v's object like any row.
    let v = row("opt:v");
    assert_eq!(hx[v], "h8");
    assert_eq!(status[v], "clean");
    assert_eq!(s24[v], "detected");
    assert!((f24[v].unwrap() - 0.002).abs() < 1e-15);
    assert_eq!(s1[v], "missing");
}

#[test]
fn a_band_resolution_out_of_range_names_the_schema_line() {
    let dir = tempfile::tempdir().unwrap();
    build(dir.path());
    fs::write(
        dir.path().join("hx.toml"),
        HX_SCHEMA.replace("resolution_arcsec = 6.0", "resolution_arcsec = 0.0"),
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
        err.contains(
            "hx.toml:27: resolution_arcsec must be a PSF FWHM in (0, 3600] arcsec, found 0"
        ),
        "{err}"
    );
}
