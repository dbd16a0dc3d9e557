//! The science layer on the demo field, against the truth the demo generator
//! wrote (`demo_catalogs/fl1/truth_*.csv`), and the figures it draws.

mod common;

use common::{read_csv_rows, read_parquet};
use std::collections::{HashMap, HashSet};
use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::{DataType, Float64Type};

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn demo() -> PathBuf {
    repo().join("demo_catalogs/fl1")
}

fn fluxloom(args: &[&str]) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(args)
        .output()
        .unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

/// The demo field built once per test binary, with `fluxloom science` run on it.
fn built() -> &'static PathBuf {
    static BUILT: std::sync::OnceLock<PathBuf> = std::sync::OnceLock::new();
    BUILT.get_or_init(|| {
        let out = std::env::temp_dir().join(format!("fluxloom-science-{}", std::process::id()));
        let _ = fs::remove_dir_all(&out);
        let plan = demo().join("plan.toml");
        let (code, _, stderr) = fluxloom(&[
            "build",
            plan.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ]);
        assert_eq!(code, 0, "{stderr}");
        // The demo plan has a [science] table, so build wrote the science table.
        let written = read_parquet(&out.join("science.parquet"));
        assert!(written.column_by_name("tmass_ks_minus_mips_24_mag").is_some());
        // The truth's α is an equal-weight fit over Ks, the four IRAC-like bands and
        // 24 µm (src/demo/truth.rs); the science run uses the same estimator, and the
        // truth's A_V and T_eff per object for the photosphere (blackbody, as the demo's).
        let objects = read_parquet(&out.join("objects.parquet"));
        let truth: HashMap<String, HashMap<String, String>> =
            read_csv_rows(&demo().join("truth_objects.csv"))
                .into_iter()
                .map(|r| (r["truth_id"].clone(), r))
                .collect();
        let (mut av, mut teff) = (
            String::from("object_id,av_mag\n"),
            String::from("object_id,teff_k\n"),
        );
        for (object, t) in truth_of_objects(&objects) {
            let t = &truth[&t];
            if !t["av_mag"].is_empty() {
                av.push_str(&format!("{object},{}\n", t["av_mag"]));
            }
            if !t["teff_k"].is_empty() {
                teff.push_str(&format!("{object},{}\n", t["teff_k"]));
            }
        }
        // The same objects with the plain default settings (no plan at all), in a
        // folder of their own.
        let defaults = out.join("defaults");
        fs::create_dir_all(&defaults).unwrap();
        fs::copy(out.join("objects.parquet"), defaults.join("objects.parquet")).unwrap();
        let (code, _, stderr) = fluxloom(&["science", defaults.to_str().unwrap()]);
        assert_eq!(code, 0, "{stderr}");
        fs::write(out.join("av.csv"), av).unwrap();
        fs::write(out.join("teff.csv"), teff).unwrap();
        // The same objects with the demo's colour table at the truth's T_eff.
        let table = out.join("colour_table");
        fs::create_dir_all(&table).unwrap();
        fs::copy(out.join("objects.parquet"), table.join("objects.parquet")).unwrap();
        let plan = table.join("science.toml");
        fs::write(
            &plan,
            format!(
                "[science]\nphotosphere = \"colour_table\"\ncolour_table = \"{}\"\nteff_table = \"../teff.csv\"\nav_table = \"../av.csv\"\n",
                repo()
                    .join("demo_catalogs/photosphere_colours_demo.csv")
                    .display()
            ),
        )
        .unwrap();
        let plan = out.join("science.toml");
        fs::write(
            &plan,
            "[science]\nalpha_weighting = \"equal\"\nalpha_bands = [\"tmass_ks\", \"irac_36\", \"irac_45\", \"irac_58\", \"irac_80\", \"mips_24\"]\nphotosphere = \"blackbody\"\nteff_table = \"teff.csv\"\nav_table = \"av.csv\"\n",
        )
        .unwrap();
        let (code, stdout, stderr) = fluxloom(&[
            "science",
            out.to_str().unwrap(),
            "--plan",
            plan.to_str().unwrap(),
        ]);
        assert_eq!(code, 0, "{stderr}");
        assert!(stdout.starts_with("wrote "), "{stdout}");
        let (code, _, stderr) = fluxloom(&[
            "science",
            table.to_str().unwrap(),
            "--plan",
            table.join("science.toml").to_str().unwrap(),
        ]);
        assert_eq!(code, 0, "{stderr}");
        out
    })
}

fn text(batch: &RecordBatch, name: &str) -> Vec<Option<String>> {
    let col = arrow::compute::cast(
        batch
            .column_by_name(name)
            .unwrap_or_else(|| panic!("no column {name}")),
        &DataType::Utf8,
    )
    .unwrap();
    let s = col.as_string::<i32>();
    (0..s.len())
        .map(|i| s.is_valid(i).then(|| s.value(i).to_string()))
        .collect()
}

fn floats(batch: &RecordBatch, name: &str) -> Vec<Option<f64>> {
    let col = arrow::compute::cast(
        batch
            .column_by_name(name)
            .unwrap_or_else(|| panic!("no column {name}")),
        &DataType::Float64,
    )
    .unwrap();
    let a = col.as_primitive::<Float64Type>();
    (0..a.len())
        .map(|i| a.is_valid(i).then(|| a.value(i)))
        .collect()
}

/// object_id → the one truth object all its members come from (objects holding
/// several truth objects, or artefacts, are left out). A blended source has one
/// row per truth object under it in `truth_members.csv`, so an object with a
/// blended member holds several truth objects and is left out too.
fn truth_of_objects(objects: &RecordBatch) -> HashMap<String, String> {
    let members = read_csv_rows(&demo().join("truth_members.csv"));
    let mut truth_of: HashMap<(String, String), Vec<String>> = HashMap::new();
    for m in &members {
        truth_of
            .entry((m["survey"].clone(), m["source_id"].clone()))
            .or_default()
            .push(m["truth_id"].clone());
    }
    let ids = text(objects, "object_id");
    let catalogs = ["ask", "kos", "lantern", "harrier", "cinder", "ember"];
    let cols: Vec<Vec<Option<String>>> = catalogs
        .iter()
        .map(|c| text(objects, &format!("{c}_source_id")))
        .collect();
    let mut out = HashMap::new();
    for (row, id) in ids.iter().enumerate() {
        let mut set = HashSet::new();
        for (c, col) in catalogs.iter().zip(&cols) {
            if let Some(s) = &col[row] {
                match truth_of.get(&(c.to_string(), s.clone())) {
                    Some(truths) => set.extend(truths.iter().cloned()),
                    None => {
                        set.insert(String::new());
                    }
                }
            }
        }
        if set.len() == 1 {
            let t = set.into_iter().next().unwrap();
            if !t.is_empty() {
                out.insert(id.clone().unwrap(), t);
            }
        }
    }
    out
}

/// The rows of `objects` in the order of `ids` (the science table's order).
fn objects_sorted(objects: &RecordBatch, ids: &[Option<String>]) -> RecordBatch {
    let own = text(objects, "object_id");
    let pos: HashMap<&str, u32> = own
        .iter()
        .enumerate()
        .map(|(i, s)| (s.as_deref().unwrap(), i as u32))
        .collect();
    let idx = arrow::array::UInt32Array::from(
        ids.iter()
            .map(|s| pos[s.as_deref().unwrap()])
            .collect::<Vec<u32>>(),
    );
    let cols = objects
        .columns()
        .iter()
        .map(|c| arrow::compute::take(c, &idx, None).unwrap())
        .collect();
    RecordBatch::try_new(objects.schema(), cols).unwrap()
}

/// Greene et al. 1994 class of a truth α (FIELD §4.3), as in the science table.
fn greene(alpha: f64) -> &'static str {
    if alpha >= 0.3 {
        "class_i"
    } else if alpha >= -0.3 {
        "flat"
    } else if alpha >= -1.6 {
        "class_ii"
    } else {
        "class_iii"
    }
}

/// (right, judged, what was wrong): the α class of `science` against the
/// truth's, over the young stars that are one truth object each and have at
/// least 3 detections in the fit.
fn class_agreement(
    science: &RecordBatch,
    truth_of: &HashMap<String, String>,
    truth: &HashMap<String, HashMap<String, String>>,
) -> (usize, usize, Vec<String>) {
    let ids = text(science, "object_id");
    let class = text(science, "alpha_class");
    let n_points = floats(science, "alpha_n_points");
    let alpha = floats(science, "alpha");
    let (mut judged, mut right) = (0, 0);
    let mut wrong = Vec::new();
    for (row, id) in ids.iter().enumerate() {
        let Some(t) = truth_of.get(id.as_ref().unwrap()) else {
            continue;
        };
        let t = &truth[t];
        if let Ok(true_alpha) = t["alpha"].parse::<f64>()
            && n_points[row].unwrap_or(0.0) >= 3.0
        {
            judged += 1;
            if class[row].as_deref() == Some(greene(true_alpha)) {
                right += 1;
            } else {
                wrong.push(format!(
                    "{} {}: true α {true_alpha:.3}, measured {:?} ({:?}) from {:?} points",
                    id.as_ref().unwrap(),
                    t["kind"],
                    alpha[row],
                    class[row],
                    n_points[row]
                ));
            }
        }
    }
    (right, judged, wrong)
}

#[test]
fn classes_and_excesses_agree_with_the_truth() {
    let out = built();
    let objects = read_parquet(&out.join("objects.parquet"));
    let science = read_parquet(&out.join("science.parquet"));
    let truth: HashMap<String, HashMap<String, String>> =
        read_csv_rows(&demo().join("truth_objects.csv"))
            .into_iter()
            .map(|r| (r["truth_id"].clone(), r))
            .collect();
    let truth_of = truth_of_objects(&objects);
    let ids = text(&science, "object_id");
    let ir_excess = text(&science, "ir_excess");
    let ir_bands = text(&science, "ir_excess_bands");
    let mut bare_bands: HashMap<String, usize> = HashMap::new();
    // An excess can be judged where the anchor (Ks) is detected and so is a band
    // at 8 µm or longer, where disks dominate (FIELD §4.5).
    let ks = floats(&objects_sorted(&objects, &ids), "tmass_ks_flux_jy");
    let long: Vec<Vec<Option<f64>>> = ["irac_80", "wise_w3", "wise_w4", "mips_24"]
        .iter()
        .map(|b| floats(&objects_sorted(&objects, &ids), &format!("{b}_flux_jy")))
        .collect();
    let judgeable = |row: usize| ks[row].is_some() && long.iter().any(|c| c[row].is_some());
    let mut missed = Vec::new();

    // Disk truth: Class I and II have disks; Class III and field stars do not.
    let (mut disk, mut disk_flagged, mut bare, mut bare_flagged) = (0, 0, 0, 0);
    for (row, id) in ids.iter().enumerate() {
        let Some(t) = truth_of.get(id.as_ref().unwrap()) else {
            continue;
        };
        let t = &truth[t];
        let kind = t["kind"].as_str();
        let flagged = ir_excess[row].as_deref() == Some("true");
        match kind {
            "class_i" | "class_ii" if judgeable(row) => {
                disk += 1;
                disk_flagged += flagged as usize;
                if !flagged {
                    missed.push(format!("{} {kind} α {}", id.as_ref().unwrap(), t["alpha"]));
                }
            }
            "class_iii" | "star" => {
                bare += 1;
                bare_flagged += flagged as usize;
                for b in ir_bands[row].iter().flat_map(|s| s.split(',')) {
                    if !b.is_empty() {
                        *bare_bands.entry(b.to_string()).or_default() += 1;
                    }
                }
            }
            _ => {}
        }
    }
    // The truth's own estimator: equal weights over its six bands.
    let (right, judged, wrong) = class_agreement(&science, &truth_of, &truth);
    let fraction = right as f64 / judged as f64;
    println!(
        "truth's estimator: α class right for {right} of {judged} young stars with ≥ 3 detections in 2–24 µm ({fraction:.3}); wrong: {wrong:#?}"
    );
    // The plain defaults: inverse-variance weights over every flux band in 2–24 µm.
    let defaults = read_parquet(&out.join("defaults/science.parquet"));
    let (d_right, d_judged, d_wrong) = class_agreement(&defaults, &truth_of, &truth);
    let d_fraction = d_right as f64 / d_judged as f64;
    println!(
        "default settings: α class right for {d_right} of {d_judged} ({d_fraction:.3}); wrong: {d_wrong:#?}"
    );
    println!(
        "infrared excess flagged for {disk_flagged} of {disk} objects with disks (Ks and a band ≥ 8 µm detected; missed: {missed:?}) and {bare_flagged} of {bare} without (bands: {bare_bands:?})"
    );
    // On this field both estimators miss the same 2 Class II stars (118 of 120
    // and 119 of 121 right), measured 0.02–0.04 past the Class II/III boundary
    // at −1.6 from 4 and 5 points (true α −1.33 and −1.46).
    assert!(judged >= 100, "{judged}");
    assert!(fraction >= 0.95, "{fraction}");
    assert!(d_judged >= 100, "{d_judged}");
    assert!(d_fraction >= 0.95, "{d_fraction}");
    let recall = disk_flagged as f64 / disk as f64;
    let false_rate = bare_flagged as f64 / bare as f64;
    assert!(recall >= 0.9, "recall {recall}");
    assert!(false_rate <= 0.05, "false-flag rate {false_rate}");
}

/// Elements of an SVG document: (tag, class, text inside).
fn svg_elements(svg: &str) -> Vec<(String, String, String)> {
    use quick_xml::events::Event;
    let mut reader = quick_xml::Reader::from_str(svg);
    let mut out: Vec<(String, String, String)> = Vec::new();
    let mut open: Vec<usize> = Vec::new();
    loop {
        match reader.read_event().expect("SVG parses") {
            Event::Start(e) => {
                let class = e
                    .try_get_attribute("class")
                    .unwrap()
                    .map(|a| String::from_utf8(a.value.to_vec()).unwrap())
                    .unwrap_or_default();
                out.push((
                    String::from_utf8(e.name().as_ref().to_vec()).unwrap(),
                    class,
                    String::new(),
                ));
                open.push(out.len() - 1);
            }
            Event::Empty(e) => {
                let class = e
                    .try_get_attribute("class")
                    .unwrap()
                    .map(|a| String::from_utf8(a.value.to_vec()).unwrap())
                    .unwrap_or_default();
                out.push((
                    String::from_utf8(e.name().as_ref().to_vec()).unwrap(),
                    class,
                    String::new(),
                ));
            }
            Event::Text(t) => {
                let s = std::str::from_utf8(t.as_ref()).unwrap().to_string();
                for &i in &open {
                    out[i].2.push_str(&s);
                }
            }
            Event::End(_) => {
                open.pop();
            }
            Event::Eof => break,
            _ => {}
        }
    }
    out
}

fn count(elements: &[(String, String, String)], class: &str) -> usize {
    elements.iter().filter(|e| e.1 == class).count()
}

fn label<'a>(elements: &'a [(String, String, String)], class: &str) -> &'a str {
    &elements.iter().find(|e| e.1 == class).unwrap().2
}

/// Width, height and the number of pixels darker than mid grey of a PNG file.
fn png_summary(path: &Path) -> (u32, u32, usize) {
    let decoder = png::Decoder::new(std::io::BufReader::new(fs::File::open(path).unwrap()));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    let step = info.color_type.samples();
    let dark = buf[..info.buffer_size()]
        .chunks(step)
        .filter(|p| p[0] < 128)
        .count();
    (info.width, info.height, dark)
}

#[test]
fn figures_hold_their_marks() {
    let out = built();
    let objects = read_parquet(&out.join("objects.parquet"));
    let ids = text(&objects, "object_id");
    let bands = [
        "gaia_bp", "gaia_g", "gaia_rp", "sdss_u", "sdss_g", "sdss_r", "sdss_i", "sdss_z",
        "tmass_j", "tmass_h", "tmass_ks", "wise_w1", "wise_w2", "wise_w3", "wise_w4", "irac_36",
        "irac_45", "irac_58", "irac_80", "mips_24",
    ];
    let flux: Vec<Vec<Option<f64>>> = bands
        .iter()
        .map(|b| floats(&objects, &format!("{b}_flux_jy")))
        .collect();
    let ulim: Vec<Vec<Option<f64>>> = bands
        .iter()
        .map(|b| floats(&objects, &format!("{b}_ulim_jy")))
        .collect();
    // An object with Ks detected, a 24 µm limit and at least two detections in 2–24 µm.
    let row = (0..ids.len())
        .find(|&r| {
            flux[10][r].is_some()
                && ulim[19][r].is_some()
                && flux[11..19].iter().filter(|c| c[r].is_some()).count() >= 2
        })
        .expect("an object with a 24 µm limit");
    let detections = flux
        .iter()
        .filter(|c| c[row].is_some_and(|f| f > 0.0))
        .count();
    let limits = (0..bands.len())
        .filter(|&b| flux[b][row].is_none() && ulim[b][row].is_some())
        .count();
    let dir = out.join("figures-test");
    let id = ids[row].clone().unwrap();
    // A reference locus (an invented straight line, in the diagram's magnitudes).
    let locus = out.join("locus.csv");
    fs::write(&locus, "x,y\n0.0,0.0\n0.2,0.4\n0.4,0.7\n").unwrap();
    let (code, stdout, stderr) = fluxloom(&[
        "draw",
        out.to_str().unwrap(),
        "--sed",
        &id,
        "--colour-colour",
        "tmass_j-tmass_h,tmass_h-tmass_ks",
        "--colour-magnitude",
        "tmass_h-tmass_ks,tmass_ks",
        "--colour-magnitude",
        "gaia_bp-gaia_rp,gaia_g",
        "--av",
        "5",
        "--png",
        "--locus",
        locus.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{stderr}");
    assert_eq!(stdout, format!("wrote 8 figures in {}\n", dir.display()));

    let stem: String = id
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect();
    let sed = fs::read_to_string(dir.join(format!("sed_{stem}.svg"))).unwrap();
    let e = svg_elements(&sed);
    assert_eq!(count(&e, "detection"), detections, "detections of {id}");
    assert_eq!(count(&e, "upper-limit"), limits, "limits of {id}");
    assert_eq!(count(&e, "alpha-fit"), 1);
    assert_eq!(count(&e, "photosphere"), 1);
    assert!(
        label(&e, "alpha-value").starts_with("α = "),
        "{}",
        label(&e, "alpha-value")
    );
    assert_eq!(label(&e, "x-label"), "wavelength λ (µm)");
    assert_eq!(label(&e, "y-label"), "λF_λ (erg s⁻¹ cm⁻²)");

    let cc = fs::read_to_string(dir.join("cc_tmass_j-tmass_h_tmass_h-tmass_ks.svg")).unwrap();
    let e = svg_elements(&cc);
    assert_eq!(label(&e, "x-label"), "H − Ks (mag)");
    assert_eq!(label(&e, "y-label"), "J − H (mag)");
    assert_eq!(count(&e, "reddening-vector"), 1);
    assert_eq!(count(&e, "locus"), 1);
    let jhk = (0..ids.len())
        .filter(|&r| (8..=10).all(|b| flux[b][r].is_some()))
        .count();
    let points: usize = e.iter().filter(|x| x.1.starts_with("point ")).count();
    assert_eq!(points, jhk);

    let cmd = fs::read_to_string(dir.join("cmd_tmass_h-tmass_ks_tmass_ks.svg")).unwrap();
    let e = svg_elements(&cmd);
    assert_eq!(label(&e, "y-label"), "Ks (vega mag)");
    assert_eq!(count(&e, "reddening-vector"), 1);

    // The Ks schema gives no depth; three lantern sources measured below zero
    // share the limit 1.645 sigma of the sky noise, so that is the inferred line
    // (the blended limits several objects share are left out).
    assert_eq!(count(&e, "detection-limit"), 1);
    assert!(
        e.iter().any(|x| x.1 == "legend-text"
            && x.2.starts_with("Ks depth ")
            && x.2.contains("(inferred: limit of ")),
        "{cmd}"
    );
    let gaia = fs::read_to_string(dir.join("cmd_gaia_bp-gaia_rp_gaia_g.svg")).unwrap();
    let e = svg_elements(&gaia);
    assert_eq!(count(&e, "detection-limit"), 1);
    // The ask schema gives `depth` (the limit of its non-detections) but no
    // `depth_mag`, so the line is the inferred depth, and the legend says so.
    assert!(
        e.iter()
            .any(|x| x.1 == "legend-text"
                && x.2.starts_with("G depth 20.50 mag (inferred: limit of ")),
        "{gaia}"
    );

    for (name, size) in [
        (format!("sed_{stem}.png"), (1280, 960)),
        (
            "cc_tmass_j-tmass_h_tmass_h-tmass_ks.png".to_string(),
            (1920, 1120),
        ),
        (
            "cmd_tmass_h-tmass_ks_tmass_ks.png".to_string(),
            (1800, 1280),
        ),
    ] {
        let (w, h, dark) = png_summary(&dir.join(&name));
        assert_eq!((w, h), size, "{name}");
        assert!(dark > 2000, "{name}: only {dark} dark pixels");
    }
}

#[test]
fn draw_names_a_bad_colour() {
    let out = built();
    let (code, _, stderr) = fluxloom(&[
        "draw",
        out.to_str().unwrap(),
        "--colour-colour",
        "tmass_j-nope,tmass_h-tmass_ks",
    ]);
    assert_eq!(code, 1);
    assert!(
        stderr.starts_with(
            "fluxloom: error: --colour-colour: \"tmass_j-nope\" is not a colour of two bands of this field (band ids: "
        ),
        "{stderr}"
    );
}

#[test]
fn science_names_a_bad_window() {
    let out = built();
    let (code, _, stderr) = fluxloom(&["science", out.to_str().unwrap(), "--alpha-window", "24,2"]);
    assert_eq!(code, 1);
    assert_eq!(
        stderr,
        "fluxloom: error: --alpha-window: expected \"SHORTEST,LONGEST\" in µm with 0 < SHORTEST < LONGEST, found \"24,2\"\n"
    );
}

#[test]
fn run_json_lists_the_science_table_build_wrote() {
    let out = built();
    let run: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    let outputs = run["outputs"].as_array().unwrap();
    let science = outputs
        .iter()
        .find(|o| o["file"] == "science.parquet")
        .unwrap_or_else(|| panic!("science.parquet not in {outputs:?}"));
    let rows = read_parquet(&out.join("objects.parquet")).num_rows() as u64;
    assert_eq!(science["rows"].as_u64(), Some(rows));
    // Every file listed is in the folder.
    for o in outputs {
        assert!(out.join(o["file"].as_str().unwrap()).is_file(), "{o}");
    }
}

/// A one-catalog field whose schema states a Ks depth of 14.3 mag at S/N 10.
fn tiny_field(dir: &Path) -> PathBuf {
    let schema = r#"survey = "tiny"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2010.0

[[band]]
band = "tmass_h"
value = "h"
unit = "vega_mag"
error = "e_h"

[[band]]
band = "tmass_ks"
value = "k"
unit = "vega_mag"
error = "e_k"
depth_mag = 14.3
depth_snr = 10
"#;
    let mut csv = String::from("id,ra,dec,h,e_h,k,e_k\n");
    for i in 0..6 {
        let ks = 10.0 + 0.7 * i as f64;
        csv.push_str(&format!(
            "s{i},{:.6},{:.6},{:.3},0.02,{:.3},0.02\n",
            150.0 + 0.01 * i as f64,
            2.0 + 0.005 * i as f64,
            ks + 0.1 + 0.05 * i as f64,
            ks
        ));
    }
    let plan = r#"[field]
name = "tiny"
reference_epoch = 2010.0

[match]
tolerance = { kind = "sigma", k = 3.0, max_arcsec = 4.0 }

[[catalog]]
file = "tiny.csv"
schema = "tiny.toml"

[output]
folder = "out"

[science]
"#;
    fs::write(dir.join("tiny.toml"), schema).unwrap();
    fs::write(dir.join("tiny.csv"), csv).unwrap();
    fs::write(dir.join("plan.toml"), plan).unwrap();
    dir.join("plan.toml")
}

#[test]
fn a_schema_depth_travels_to_the_band_table_and_the_limit_line() {
    let dir = tempfile::tempdir().unwrap();
    let plan = tiny_field(dir.path());
    let out = dir.path().join("out");
    let (code, _, stderr) = fluxloom(&[
        "build",
        plan.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert_eq!(code, 0, "{stderr}");
    // The band table of objects.parquet carries the depth of the band that has one.
    let meta = fluxloom::output::parquet::read_metadata(&out.join("objects.parquet")).unwrap();
    let bands: serde_json::Value =
        serde_json::from_str(&meta.iter().find(|(k, _)| k == "fluxloom.bands").unwrap().1).unwrap();
    let band = |id: &str| {
        bands
            .as_array()
            .unwrap()
            .iter()
            .find(|b| b["id"] == id)
            .unwrap()
            .clone()
    };
    assert_eq!(band("tmass_ks")["depth_mag"], 14.3);
    assert_eq!(band("tmass_ks")["depth_snr"], 10.0);
    assert_eq!(band("tmass_ks")["depth_catalog"], "tiny");
    assert!(band("tmass_h").get("depth_mag").is_none());
    // run.json lists the science table of this build too.
    let run: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
    assert!(
        run["outputs"]
            .as_array()
            .unwrap()
            .iter()
            .any(|o| o["file"] == "science.parquet" && o["rows"] == 6),
        "{}",
        run["outputs"]
    );
    let (code, _, stderr) = fluxloom(&[
        "draw",
        out.to_str().unwrap(),
        "--colour-magnitude",
        "tmass_h-tmass_ks,tmass_ks",
    ]);
    assert_eq!(code, 0, "{stderr}");
    let svg = fs::read_to_string(out.join("figures/cmd_tmass_h-tmass_ks_tmass_ks.svg")).unwrap();
    let e = svg_elements(&svg);
    assert_eq!(count(&e, "detection-limit"), 1);
    assert!(
        e.iter()
            .any(|x| x.1 == "legend-text" && x.2 == "Ks depth 14.30 mag (10σ, schema of tiny)"),
        "{svg}"
    );
    // The line is horizontal at Ks = 14.3 on the page: the page height of a
    // magnitude follows from two labelled ticks of the (linear) y axis.
    let ticks: Vec<(f64, f64)> = svg
        .lines()
        .filter(|l| l.contains("class=\"y-tick-label\""))
        .map(|l| {
            let y: f64 = attr(l, "y").parse().unwrap();
            let text = &l[l.find('>').unwrap() + 1..];
            let value: f64 = text[..text.find('<').unwrap()]
                .replace('\u{2212}', "-")
                .parse()
                .unwrap();
            (value, y)
        })
        .collect();
    assert!(ticks.len() >= 2, "{svg}");
    let ((v0, y0), (v1, y1)) = (ticks[0], ticks[ticks.len() - 1]);
    // Tick labels sit 0.35 font sizes below their tick; only differences matter.
    let want = y0 + (14.3 - v0) * (y1 - y0) / (v1 - v0);
    let line = svg
        .lines()
        .find(|l| l.contains("class=\"detection-limit\""))
        .unwrap();
    let d = attr(line, "d");
    let ys: Vec<f64> = d
        .split(['M', 'L'])
        .filter(|p| !p.is_empty())
        .map(|p| p.split(' ').nth(1).unwrap().parse().unwrap())
        .collect();
    let label_offset = 12.0 * 0.35;
    for y in ys {
        assert!(
            (y + label_offset - want).abs() < 0.02,
            "{y} vs {want}: {line}"
        );
    }
}

/// The value of attribute `name` in one SVG element's line.
fn attr<'a>(line: &'a str, name: &str) -> &'a str {
    let key = format!(" {name}=\"");
    let start = line.find(&key).unwrap() + key.len();
    &line[start..start + line[start..].find('"').unwrap()]
}

#[test]
fn the_demo_colour_table_gives_the_blackbody_photosphere() {
    // The demo's photospheres are blackbodies and its colour table holds
    // blackbody colours every 500 K, so at each object's true T_eff the table's
    // photosphere is the blackbody's, up to the linear interpolation between
    // rows and the table's rounding to 0.001 mag: together at most 0.0099 mag
    // for these bands between 3000 and 10000 K (computed here from the Planck
    // law on a grid of 10 K).
    let out = built();
    let blackbody = read_parquet(&out.join("science.parquet"));
    let table = read_parquet(&out.join("colour_table/science.parquet"));
    assert_eq!(text(&blackbody, "object_id"), text(&table, "object_id"));
    let meta = fluxloom::output::parquet::read_metadata(&out.join("colour_table/science.parquet"))
        .unwrap();
    let described = &meta
        .iter()
        .find(|(k, _)| k == "fluxloom.science.photosphere")
        .unwrap()
        .1;
    assert!(
        described.contains("photosphere_colours_demo.csv"),
        "{described}"
    );
    let (mut compared, mut worst) = (0, 0.0f64);
    for band in [
        "tmass_j", "tmass_h", "wise_w1", "irac_45", "irac_80", "wise_w4", "mips_24",
    ] {
        let bb = floats(&blackbody, &format!("{band}_phot_jy"));
        let ct = floats(&table, &format!("{band}_phot_jy"));
        for (b, c) in bb.iter().zip(&ct) {
            assert_eq!(b.is_some(), c.is_some(), "{band}");
            if let (Some(b), Some(c)) = (b, c) {
                let dm = (2.5 * (c / b).log10()).abs();
                worst = worst.max(dm);
                compared += 1;
            }
        }
    }
    println!(
        "colour table vs blackbody: {compared} photospheric values, largest difference {worst:.4} mag"
    );
    assert!(compared >= 500, "{compared}");
    assert!(worst < 0.0105, "{worst}");
}
