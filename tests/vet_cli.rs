//! `fluxloom vet` end to end: the real binary on the demo catalog and on broken
//! inputs, asserting the exact one-line messages and exit statuses.

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Arc;

use arrow::array::{Array, AsArray, BinaryArray, Float64Array, RecordBatch, StringArray};
use arrow::datatypes::{DataType, Field, Float64Type, Schema};
use parquet::arrow::ArrowWriter;
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

fn fluxloom(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(args)
        .output()
        .expect("run fluxloom");
    Run {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Asserts a failed run with exactly one stderr line equal to `expected`.
#[track_caller]
fn assert_error(run: &Run, expected: &str) {
    assert_eq!(run.code, 1, "expected exit 1; stderr: {}", run.stderr);
    let lines: Vec<&str> = run.stderr.lines().collect();
    assert_eq!(lines.len(), 1, "expected one line, got:\n{}", run.stderr);
    assert_eq!(
        lines[0], expected,
        "\nexpected: {expected}\n     got: {}",
        lines[0]
    );
}

const DEMO_CSV: &str = "demo_catalogs/lantern_nir.csv";
const DEMO_SCHEMA: &str = "demo_catalogs/lantern_nir.toml";

fn demo_text() -> String {
    fs::read_to_string(repo().join(DEMO_CSV)).unwrap()
}

/// Copies the demo schema into `dir`, applying `edit`, and returns its path.
fn schema_in(dir: &Path, edit: impl Fn(String) -> String) -> PathBuf {
    let text = edit(fs::read_to_string(repo().join(DEMO_SCHEMA)).unwrap());
    let path = dir.join("schema.toml");
    fs::write(&path, text).unwrap();
    path
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let p = dir.join(name);
    fs::File::create(&p).unwrap().write_all(bytes).unwrap();
    p
}

fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

#[test]
fn the_demo_catalog_vets_and_writes_a_normalized_table() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("lantern.parquet");
    let csv = repo().join(DEMO_CSV);
    let schema = repo().join(DEMO_SCHEMA);
    let run = fluxloom(&["vet", s(&csv), "--schema", s(&schema), "--out", s(&out)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert!(
        run.stdout.contains("rows     40 read, 40 kept, 0 skipped"),
        "{}",
        run.stdout
    );
    // Row 8 carries a "D" contamination flag in J; row 12 a 99.999 null in H.
    assert!(
        run.stdout.contains("rejected 1: cc in [D, P, H]"),
        "{}",
        run.stdout
    );

    let file = fs::File::open(&out).unwrap();
    let reader = ParquetRecordBatchReaderBuilder::try_new(file)
        .unwrap()
        .build()
        .unwrap();
    let batches: Vec<RecordBatch> = reader.map(|b| b.unwrap()).collect();
    let batch = arrow::compute::concat_batches(&batches[0].schema(), &batches).unwrap();
    assert_eq!(batch.num_rows(), 40);

    // Row 2: Ks = 10.046 +- 0.020 (Vega). 2MASS Ks zero point 666.7 Jy
    // (Cohen, Wheaton & Megeath 2003, AJ 126, 1090): F = 666.7 * 10^(-0.4 * 10.046)
    // = 0.063879 Jy; sigma_F = 0.4 ln10 * 0.020 * F = 1.1767e-3 Jy (first order).
    let flux = batch
        .column_by_name("tmass_ks_flux_jy")
        .unwrap()
        .as_primitive::<Float64Type>();
    let err = batch
        .column_by_name("tmass_ks_flux_err_jy")
        .unwrap()
        .as_primitive::<Float64Type>();
    let expected = 666.7 * 10f64.powf(-0.4 * 10.046);
    assert!(
        (flux.value(1) - expected).abs() < 1e-12,
        "{}",
        flux.value(1)
    );
    assert!((err.value(1) - 0.921_034_037_2 * 0.020 * expected).abs() < 1e-12);

    // Upper limits never share a column with detections.
    // Status columns are dictionary-encoded text.
    let text = |name: &str| {
        arrow::compute::cast(batch.column_by_name(name).unwrap(), &DataType::Utf8).unwrap()
    };
    let status_j = text("tmass_j_status");
    let status = status_j.as_string::<i32>();
    let jflux = batch
        .column_by_name("tmass_j_flux_jy")
        .unwrap()
        .as_primitive::<Float64Type>();
    let julim = batch
        .column_by_name("tmass_j_ulim_jy")
        .unwrap()
        .as_primitive::<Float64Type>();
    for i in 0..batch.num_rows() {
        match status.value(i) {
            "detected" => assert!(jflux.is_valid(i) && julim.is_null(i)),
            "upper_limit" => assert!(jflux.is_null(i) && julim.is_valid(i)),
            "rejected" | "missing" => assert!(jflux.is_null(i) && julim.is_null(i)),
            other => panic!("unexpected status {other}"),
        }
    }
    let status_h = text("tmass_h_status");
    let hstatus = status_h.as_string::<i32>();
    assert_eq!(hstatus.value(11), "missing");
    assert_eq!(status.value(7), "rejected");

    // The file explains itself: band table and schema in the metadata.
    let meta = fluxloom::output::parquet::read_metadata(&out).unwrap();
    let bands = &meta.iter().find(|(k, _)| k == "fluxloom.bands").unwrap().1;
    assert!(bands.contains("\"zero_point_jy\":666.7"), "{bands}");
    assert!(
        meta.iter()
            .any(|(k, v)| k == "fluxloom.survey_schema" && v.contains("survey = \"lantern\""))
    );
}

#[test]
fn a_missing_column_names_the_schema_line() {
    let dir = tempfile::tempdir().unwrap();
    let schema = schema_in(dir.path(), |t| {
        t.replace("value = \"hmag\"", "value = \"h_mag\"")
    });
    let csv = repo().join(DEMO_CSV);
    let run = fluxloom(&["vet", s(&csv), "--schema", s(&schema)]);
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}: column \"h_mag\" named at {}:31 is not in the file (it has: src, ra, dec, err_maj, err_min, err_pa, mjd, jmag, e_jmag, hmag, e_hmag, kmag, e_kmag, qual, cc)",
            csv.display(),
            schema.display()
        ),
    );
}

#[test]
fn a_flag_position_beyond_every_value_names_the_schema_line() {
    // The demo's quality strings have three letters (J, H, Ks); a fourth is read nowhere.
    let dir = tempfile::tempdir().unwrap();
    let schema = schema_in(dir.path(), |t| {
        t.replace(
            "values = [\"U\"], char = 3 }",
            "values = [\"U\"], char = 4 }",
        )
    });
    let csv = repo().join(DEMO_CSV);
    let run = fluxloom(&["vet", s(&csv), "--schema", s(&schema)]);
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}:44: flag column \"qual\": char 4 is beyond every value in {}; the longest value found is \"AAA\" (3 characters)",
            schema.display(),
            csv.display()
        ),
    );
}

#[test]
fn an_unparsable_value_names_row_column_and_text_and_can_be_skipped() {
    let dir = tempfile::tempdir().unwrap();
    let text = demo_text()
        .replacen(",10.046,", ",--,", 1)
        .replacen("231.203173", "23l.203173", 1);
    let csv = write(dir.path(), "bad.csv", text.as_bytes());
    let schema = repo().join(DEMO_SCHEMA);
    let run = fluxloom(&["vet", s(&csv), "--schema", s(&schema)]);
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}: row 2, column \"kmag\": expected a number in unit vega_mag, found \"--\"",
            csv.display()
        ),
    );
    let run = fluxloom(&[
        "vet",
        s(&csv),
        "--schema",
        s(&schema),
        "--skip-bad-rows",
        "--json",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let report: serde_json::Value = serde_json::from_str(&run.stdout).unwrap();
    assert_eq!(report["rows_read"], 40);
    assert_eq!(report["rows_kept"], 39);
    assert_eq!(
        report["rows_skipped"]["column \"ra\": expected RA in degrees"],
        1
    );
    assert_eq!(
        report["bands"][2]["rejected_by"]["unreadable value in column \"kmag\""],
        1
    );
    assert_eq!(report["problem_count"], 2);
    assert_eq!(report["problems"][1]["row"], 3);
    assert_eq!(report["problems"][1]["found"], "23l.203173");
}

#[test]
fn an_unknown_band_names_the_schema_line() {
    let dir = tempfile::tempdir().unwrap();
    let schema = schema_in(dir.path(), |t| {
        t.replace("band = \"tmass_h\"", "band = \"tmass_hh\"")
    });
    let run = fluxloom(&["vet", DEMO_CSV, "--schema", s(&schema)]);
    assert_eq!(run.code, 1);
    assert!(
        run.stderr.starts_with(&format!(
            "fluxloom: error: {}:30: band \"tmass_hh\" is not in the band library",
            schema.display()
        )),
        "{}",
        run.stderr
    );
    assert_eq!(run.stderr.lines().count(), 1);
}

#[test]
fn an_impossible_unit_names_the_schema_line() {
    let dir = tempfile::tempdir().unwrap();
    let schema = schema_in(dir.path(), |t| {
        t.replacen(
            "unit = \"vega_mag\"\nerror = \"e_hmag\"",
            "unit = \"magnitudes\"\nerror = \"e_hmag\"",
            1,
        )
    });
    let run = fluxloom(&["vet", DEMO_CSV, "--schema", s(&schema)]);
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}:32: unit \"magnitudes\" is unknown; expected one of vega_mag, ab_mag, asinh_mag, Jy, mJy, uJy, microJy, nJy, nanomaggy, erg/s/cm2/Hz",
            schema.display()
        ),
    );
}

#[test]
fn a_wrong_column_type_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let schema_arrow = Arc::new(Schema::new(vec![
        Field::new("src", DataType::Utf8, false),
        Field::new("ra", DataType::Float64, false),
        Field::new("dec", DataType::Float64, false),
        Field::new("flux", DataType::Binary, false),
    ]));
    let batch = RecordBatch::try_new(
        schema_arrow.clone(),
        vec![
            Arc::new(StringArray::from(vec!["a"])),
            Arc::new(Float64Array::from(vec![10.0])),
            Arc::new(Float64Array::from(vec![20.0])),
            Arc::new(BinaryArray::from(vec![b"x".as_ref()])),
        ],
    )
    .unwrap();
    let path = dir.path().join("t.parquet");
    let mut w = ArrowWriter::try_new(fs::File::create(&path).unwrap(), schema_arrow, None).unwrap();
    w.write(&batch).unwrap();
    w.close().unwrap();
    let schema = write(
        dir.path(),
        "t.toml",
        b"survey = \"t\"\nformat = \"parquet\"\nid = \"src\"\n[position]\nra = \"ra\"\ndec = \"dec\"\nerror = { kind = \"fixed\", arcsec = 0.2 }\n[epoch]\nyear = 2010.0\n[[band]]\nband = \"wise_w1\"\nvalue = \"flux\"\nunit = \"mJy\"\n",
    );
    let run = fluxloom(&["vet", s(&path), "--schema", s(&schema)]);
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}: column \"flux\" has type Binary, expected numbers or text",
            path.display()
        ),
    );
}

#[test]
fn empty_and_truncated_files_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let schema = repo().join(DEMO_SCHEMA);

    let empty = write(dir.path(), "empty.csv", b"");
    assert_error(
        &fluxloom(&["vet", s(&empty), "--schema", s(&schema)]),
        &format!(
            "fluxloom: error: {}: the file is empty: expected a header line naming the columns",
            empty.display()
        ),
    );

    let mut gz = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    for _ in 0..200 {
        gz.write_all(demo_text().as_bytes()).unwrap();
    }
    let bytes = gz.finish().unwrap();
    let truncated = write(dir.path(), "cut.csv.gz", &bytes[..bytes.len() / 2]);
    let run = fluxloom(&[
        "vet",
        s(&truncated),
        "--schema",
        s(&schema),
        "--skip-bad-rows",
    ]);
    assert_eq!(run.code, 1);
    assert!(
        run.stderr.starts_with(&format!(
            "fluxloom: error: {}: broken or truncated compressed stream",
            truncated.display()
        )),
        "{}",
        run.stderr
    );

    let pq_schema = write(
        dir.path(),
        "p.toml",
        fs::read_to_string(&schema)
            .unwrap()
            .replace("format = \"csv\"", "format = \"parquet\"")
            .as_bytes(),
    );
    let empty_pq = write(dir.path(), "empty.parquet", b"");
    assert_error(
        &fluxloom(&["vet", s(&empty_pq), "--schema", s(&pq_schema)]),
        &format!(
            "fluxloom: error: {}: the file is empty: expected a Parquet file",
            empty_pq.display()
        ),
    );
    // A real Parquet file cut in half loses its footer.
    let whole = dir.path().join("whole.parquet");
    let run = fluxloom(&["vet", DEMO_CSV, "--schema", s(&schema), "--out", s(&whole)]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let bytes = fs::read(&whole).unwrap();
    let cut = write(dir.path(), "cut.parquet", &bytes[..bytes.len() / 2]);
    let run = fluxloom(&["vet", s(&cut), "--schema", s(&pq_schema)]);
    assert_eq!(run.code, 1);
    assert!(
        run.stderr.starts_with(&format!(
            "fluxloom: error: {}: not a readable Parquet file (truncated or another format?)",
            cut.display()
        )),
        "{}",
        run.stderr
    );
}

#[test]
fn non_utf8_text_names_row_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let mut bytes = demo_text().into_bytes();
    let at = bytes.windows(8).position(|w| w == b"LNS-0005").unwrap();
    bytes[at + 3] = 0xE9;
    let csv = write(dir.path(), "latin1.csv", &bytes);
    let run = fluxloom(&["vet", s(&csv), "--schema", DEMO_SCHEMA]);
    // LNS-0005 is data row 5, on line 8 (two comment lines and the header first).
    assert_error(
        &run,
        &format!(
            "fluxloom: error: {}: row 5 (line 8), column \"src\": expected UTF-8 text, found bytes that are not UTF-8 (re-encode the file as UTF-8)",
            csv.display()
        ),
    );
}

#[test]
fn a_failed_run_leaves_no_output_file() {
    let dir = tempfile::tempdir().unwrap();
    let text = demo_text().replacen(",10.046,", ",oops,", 1);
    let csv = write(dir.path(), "bad.csv", text.as_bytes());
    let out = dir.path().join("out.parquet");
    let run = fluxloom(&["vet", s(&csv), "--schema", DEMO_SCHEMA, "--out", s(&out)]);
    assert_eq!(run.code, 1);
    assert!(!out.exists());
    let leftovers: Vec<_> = fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("partial"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}
