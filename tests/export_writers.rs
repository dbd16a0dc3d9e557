//! Checks the CSV, FITS and VOTable writers of `fluxloom::output` three ways:
//!
//! 1. round trips: a table with every exported type and a null in each column
//!    is written and read back by fluxloom's own readers, which must give the
//!    same values, nulls and units (with each format's stated limits);
//! 2. outside readers: the same table written into a temporary folder must be
//!    byte-identical to the files in `tests/fixtures/writers/`, which
//!    `check_with_astropy.py` read with astropy (versions in `VERSIONS.txt`);
//!    the values astropy read, stored in `astropy_readout.json`, must equal the
//!    table's;
//! 3. failures: a refused export leaves nothing under the final name, and the
//!    error names the column, row and reason.
//!
//! To regenerate the fixtures after an intended change of output, run this test
//! with `FLUXLOOM_BLESS_WRITERS=1` and then `check_with_astropy.py` (see the
//! README in the fixture folder).

use std::fs;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::{
    Array, ArrayRef, AsArray, BooleanArray, Date32Array, Float32Array, Float64Array, Int16Array,
    Int32Array, Int64Array, LargeStringArray, RecordBatch, StringArray, UInt8Array, UInt32Array,
    UInt64Array,
};
use arrow::compute::{cast, concat_batches};
use arrow::datatypes::{
    DataType, Field, Float32Type, Float64Type, Int16Type, Int32Type, Int64Type, Schema, SchemaRef,
    UInt8Type, UInt32Type, UInt64Type,
};
use fluxloom::catalog::csv::read_csv;
use fluxloom::catalog::fits::{FitsOptions, read_fits};
use fluxloom::catalog::schema::CsvOptions;
use fluxloom::catalog::votable::{VotableOptions, read_votable};
use fluxloom::output::csv::write_csv;
use fluxloom::output::fits::write_fits;
use fluxloom::output::votable::write_votable;
use serde_json::Value;

/// The folder of committed writer output and its astropy readout.
const FIXTURES: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/writers");
/// Provenance of the readout every outside check compares with.
const ASTROPY: &str =
    "astropy 6.1.7 via tests/fixtures/writers/check_with_astropy.py (astropy_readout.json)";

/// Which writer a sample table is meant for; they differ where a format cannot hold a value.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Flavor {
    /// No non-ASCII `label` column (FITS text is ASCII).
    Fits,
    /// `source_id` at most 2^63 - 1 (VOTable has no unsigned 64-bit type).
    Votable,
    /// Everything.
    Csv,
}

/// The extra FITS header cards written in every FITS test.
fn header_cards() -> Vec<(String, String)> {
    vec![
        ("ORIGIN".to_string(), "fluxloom".to_string()),
        ("FIELD".to_string(), "demo field 'north'".to_string()),
        (
            "NOTE".to_string(),
            "a long value that does not fit on one header card, so it continues on CONTINUE cards; it's fine".to_string(),
        ),
        ("COMMENT".to_string(), "fluxed SED table".to_string()),
    ]
}

/// The VOTable parameters written in every VOTable test.
fn params() -> Vec<(String, String)> {
    vec![
        ("origin".to_string(), "fluxloom".to_string()),
        ("field".to_string(), "demo <north> & \"south\"".to_string()),
    ]
}

const TABLE_NAME: &str = "sed";
const DESCRIPTION: &str = "Flux densities per source & band <demo>";

/// A field with a `unit` (and optional `ucd`) in its metadata.
fn field(name: &str, data_type: DataType, unit: Option<&str>, ucd: Option<&str>) -> Field {
    let metadata: std::collections::HashMap<String, String> = [("unit", unit), ("ucd", ucd)]
        .into_iter()
        .filter_map(|(k, v)| v.map(|v| (k.to_string(), v.to_string())))
        .collect();
    Field::new(name, data_type, true).with_metadata(metadata)
}

/// Six rows with every exported type, a null in every column, each type's
/// extreme values, text that needs quoting, and values that rule out the
/// obvious null markers (so `TNULLn` must be chosen past them). Returned as two
/// batches of 4 and 2 rows.
fn sample(flavor: Flavor) -> (SchemaRef, Vec<RecordBatch>) {
    let big_id = if flavor == Flavor::Votable {
        i64::MAX as u64
    } else {
        u64::MAX
    };
    let mut fields = vec![
        field("name", DataType::Utf8, None, None),
        field("label", DataType::LargeUtf8, None, None),
        field(
            "ra_deg",
            DataType::Float64,
            Some("deg"),
            Some("pos.eq.ra;meta.main"),
        ),
        field("flux_jy", DataType::Float64, Some("Jy"), None),
        field("pm_ra_masyr", DataType::Float64, Some("mas/yr"), None),
        field("sep_arcsec", DataType::Float32, Some("arcsec"), None),
        field("n_obs", DataType::Int32, None, None),
        field("flags", DataType::Int16, None, None),
        field("quality", DataType::UInt8, None, None),
        field("obj_id", DataType::Int64, None, None),
        field("det_mask", DataType::UInt32, None, None),
        field("source_id", DataType::UInt64, None, None),
        field("is_star", DataType::Boolean, None, None),
    ];
    let mut columns: Vec<ArrayRef> = vec![
        Arc::new(StringArray::from(vec![
            Some("src-1"),
            Some("it's, \"quoted\""),
            None,
            Some("#hash"),
            Some("x"),
            Some("trailing end"),
        ])),
        Arc::new(LargeStringArray::from(vec![
            Some("\u{3b1} Cen"),
            Some("plain"),
            None,
            Some("line\nbreak"),
            Some("caf\u{e9}"),
            Some("z"),
        ])),
        Arc::new(Float64Array::from(vec![
            Some(0.0),
            Some(359.99999999999994),
            Some(180.123456789012),
            Some(10.0),
            Some(0.1),
            None,
        ])),
        Arc::new(Float64Array::from(vec![
            Some(1.5e-3),
            Some(1e-300),
            None,
            Some(2.5e10),
            Some(-0.0),
            Some(1.7976931348623157e308),
        ])),
        Arc::new(Float64Array::from(vec![
            Some(-12.345678901234567),
            None,
            Some(5e-324),
            Some(3.0),
            Some(-1e20),
            Some(0.30000000000000004),
        ])),
        Arc::new(Float32Array::from(vec![
            Some(0.25),
            None,
            Some(-0.5),
            Some(1e-7),
            Some(f32::MAX),
            Some(0.1),
        ])),
        Arc::new(Int32Array::from(vec![
            Some(3),
            None,
            Some(7),
            Some(i32::MIN),
            Some(i32::MAX),
            Some(0),
        ])),
        Arc::new(Int16Array::from(vec![
            Some(-1),
            Some(i16::MAX),
            None,
            Some(i16::MIN),
            Some(0),
            Some(2),
        ])),
        Arc::new(UInt8Array::from(vec![
            Some(0),
            Some(255),
            None,
            Some(254),
            Some(1),
            Some(9),
        ])),
        Arc::new(Int64Array::from(vec![
            Some(i64::MIN),
            Some(42),
            None,
            Some(-1),
            Some(i64::MAX),
            Some(i64::MIN + 2),
        ])),
        Arc::new(UInt32Array::from(vec![
            Some(0),
            Some(u32::MAX),
            None,
            Some(4_000_000_000),
            Some(1),
            Some(2_147_483_648),
        ])),
        Arc::new(UInt64Array::from(vec![
            Some(0),
            Some(big_id),
            None,
            Some(12_345_678_901_234_567),
            Some(1),
            Some(1 << 63 >> 1),
        ])),
        Arc::new(BooleanArray::from(vec![
            Some(true),
            Some(false),
            None,
            Some(true),
            Some(false),
            Some(true),
        ])),
    ];
    if flavor == Flavor::Fits {
        fields.remove(1);
        columns.remove(1);
    }
    let schema: SchemaRef = Arc::new(Schema::new(fields));
    let batch = RecordBatch::try_new(schema.clone(), columns).unwrap();
    let batches = vec![batch.slice(0, 4), batch.slice(4, 2)];
    (schema, batches)
}

/// All the batches of `table` as one.
fn concat(schema: &SchemaRef, batches: &[RecordBatch]) -> RecordBatch {
    concat_batches(schema, batches).unwrap()
}

fn read_all_fits(path: &Path) -> RecordBatch {
    let table = read_fits(
        path,
        &FitsOptions {
            hdu: None,
            batch_rows: 1024,
        },
    )
    .unwrap();
    let schema = table.schema.clone();
    concat(&schema, &table.collect_all().unwrap())
}

fn read_all_votable(path: &Path) -> RecordBatch {
    let table = read_votable(
        path,
        &VotableOptions {
            table_index: 0,
            batch_rows: 1024,
        },
    )
    .unwrap();
    let schema = table.schema.clone();
    concat(&schema, &table.collect_all().unwrap())
}

fn read_all_csv(path: &Path) -> RecordBatch {
    let table = read_csv(path, &CsvOptions::default(), 1024).unwrap();
    let schema = table.schema.clone();
    concat(&schema, &table.collect_all().unwrap())
}

/// Asserts that `got` has the names, units and values of `want`, the latter first
/// turned into the type `got` has (`adjust` then rewrites what the format cannot keep).
fn assert_same_table(
    source: &str,
    want: &RecordBatch,
    got: &RecordBatch,
    expected_type: impl Fn(&DataType) -> DataType,
    adjust: impl Fn(&str, ArrayRef) -> ArrayRef,
) {
    assert_eq!(
        got.num_columns(),
        want.num_columns(),
        "{source}: column count"
    );
    assert_eq!(got.num_rows(), want.num_rows(), "{source}: row count");
    for (i, want_field) in want.schema().fields().iter().enumerate() {
        let got_field = got.schema().field(i).clone();
        let name = want_field.name();
        assert_eq!(got_field.name(), name, "{source}: name of column {i}");
        assert_eq!(
            got_field.data_type(),
            &expected_type(want_field.data_type()),
            "{source}: type of column \"{name}\""
        );
        assert_eq!(
            got_field.metadata().get("unit"),
            want_field.metadata().get("unit"),
            "{source}: unit of column \"{name}\""
        );
        let expected = adjust(name, cast(want.column(i), got_field.data_type()).unwrap());
        assert_eq!(
            got.column(i).as_ref(),
            expected.as_ref(),
            "{source}: values of column \"{name}\""
        );
    }
}

#[test]
fn fits_round_trip_through_our_reader_keeps_values_nulls_and_units() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sed.fits");
    let (schema, batches) = sample(Flavor::Fits);
    let rows = write_fits(&path, &schema, &batches, "SED", &header_cards()).unwrap();
    assert_eq!(rows, 6);
    let got = read_all_fits(&path);
    let want = concat(&schema, &batches);
    // A FITS string cannot be null: the null name reads back as "".
    let blank_nulls = |name: &str, array: ArrayRef| -> ArrayRef {
        if name != "name" {
            return array;
        }
        let text = array.as_string::<i32>();
        Arc::new(
            text.iter()
                .map(|v| Some(v.unwrap_or("")))
                .collect::<StringArray>(),
        )
    };
    assert_same_table(
        "write_fits, read by read_fits",
        &want,
        &got,
        |t| t.clone(),
        blank_nulls,
    );
}

#[test]
fn votable_round_trip_through_our_reader_keeps_values_nulls_and_units() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sed.vot");
    let (schema, batches) = sample(Flavor::Votable);
    let rows = write_votable(&path, &schema, &batches, TABLE_NAME, DESCRIPTION, &params()).unwrap();
    assert_eq!(rows, 6);
    let got = read_all_votable(&path);
    let want = concat(&schema, &batches);
    // VOTable 1.4 has no unsigned 32/64-bit datatypes: both are written as long.
    let votable_type = |t: &DataType| match t {
        DataType::UInt32 | DataType::UInt64 => DataType::Int64,
        DataType::LargeUtf8 => DataType::Utf8,
        other => other.clone(),
    };
    assert_same_table(
        "write_votable, read by read_votable",
        &want,
        &got,
        votable_type,
        |_, a| a,
    );
    assert_eq!(
        got.schema()
            .field(2)
            .metadata()
            .get("ucd")
            .map(String::as_str),
        Some("pos.eq.ra;meta.main"),
        "write_votable, read by read_votable: ucd of ra_deg"
    );
}

#[test]
fn csv_round_trip_through_our_reader_keeps_every_value() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sed.csv");
    let (schema, batches) = sample(Flavor::Csv);
    let rows = write_csv(&path, &schema, &batches).unwrap();
    assert_eq!(rows, 6);
    let got = read_all_csv(&path);
    let want = concat(&schema, &batches);
    assert_eq!(got.num_rows(), 6, "write_csv, read by read_csv: rows");
    for (i, field) in want.schema().fields().iter().enumerate() {
        let name = field.name();
        assert_eq!(got.schema().field(i).name(), name);
        let text = got.column(i).as_string::<i32>();
        let original = want.column(i);
        for row in 0..want.num_rows() {
            let cell = text.is_valid(row).then(|| text.value(row));
            let context = format!("write_csv, read by read_csv: row {row}, column \"{name}\"");
            assert_eq!(
                cell.is_none(),
                original.is_null(row),
                "{context}: null vs {cell:?}"
            );
            if let Some(cell) = cell {
                assert_value_text(original.as_ref(), row, cell, &context);
            }
        }
    }
}

/// Asserts that `text` reads back as row `row` of `array`: the same string, the
/// same float bits, the same integer or the same boolean.
fn assert_value_text(array: &dyn Array, row: usize, text: &str, context: &str) {
    match array.data_type() {
        DataType::Utf8 => assert_eq!(text, array.as_string::<i32>().value(row), "{context}"),
        DataType::LargeUtf8 => assert_eq!(text, array.as_string::<i64>().value(row), "{context}"),
        DataType::Float64 => {
            let want = array.as_primitive::<Float64Type>().value(row);
            let got: f64 = text.parse().unwrap();
            assert_eq!(got.to_bits(), want.to_bits(), "{context}: {text}");
        }
        DataType::Float32 => {
            let want = array.as_primitive::<Float32Type>().value(row);
            let got: f32 = text.parse().unwrap();
            assert_eq!(got.to_bits(), want.to_bits(), "{context}: {text}");
        }
        DataType::Boolean => {
            let want = array.as_boolean().value(row);
            let got = match text.to_ascii_lowercase().as_str() {
                "true" => true,
                "false" => false,
                other => panic!("{context}: expected a boolean, found {other:?}"),
            };
            assert_eq!(got, want, "{context}");
        }
        _ => {
            let got: i128 = text.parse().unwrap();
            assert_eq!(got, integer(array, row), "{context}");
        }
    }
}

/// Row `row` of an integer array, widened.
fn integer(array: &dyn Array, row: usize) -> i128 {
    match array.data_type() {
        DataType::Int64 => array.as_primitive::<Int64Type>().value(row).into(),
        DataType::Int32 => array.as_primitive::<Int32Type>().value(row).into(),
        DataType::Int16 => array.as_primitive::<Int16Type>().value(row).into(),
        DataType::UInt8 => array.as_primitive::<UInt8Type>().value(row).into(),
        DataType::UInt64 => array.as_primitive::<UInt64Type>().value(row).into(),
        DataType::UInt32 => array.as_primitive::<UInt32Type>().value(row).into(),
        other => panic!("not an integer type: {other}"),
    }
}

#[test]
fn csv_text_is_quoted_and_formatted_as_documented() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("small.csv");
    let schema: SchemaRef = Arc::new(Schema::new(vec![
        Field::new("id,name", DataType::Utf8, true),
        Field::new("flux_jy", DataType::Float64, true),
        Field::new("mag", DataType::Float32, true),
        Field::new("ok", DataType::Boolean, true),
    ]));
    let batch = RecordBatch::try_new(
        schema.clone(),
        vec![
            Arc::new(StringArray::from(vec![
                Some("a \"b\""),
                Some(""),
                None,
                Some("#c"),
            ])),
            Arc::new(Float64Array::from(vec![
                Some(1.5e-7),
                Some(0.1),
                None,
                Some(f64::NAN),
            ])),
            Arc::new(Float32Array::from(vec![
                Some(0.1),
                Some(1e20),
                Some(-0.0),
                None,
            ])),
            Arc::new(BooleanArray::from(vec![
                Some(true),
                Some(false),
                None,
                Some(true),
            ])),
        ],
    )
    .unwrap();
    write_csv(&path, &schema, &[batch]).unwrap();
    assert_eq!(
        fs::read_to_string(&path).unwrap(),
        "\"id,name\",flux_jy,mag,ok\n\
         \"a \"\"b\"\"\",1.5e-7,0.1,true\n\
         \"\",0.1,1e20,false\n\
         ,,-0,\n\
         \"#c\",NaN,,true\n"
    );
}

/// Compares the file just written with its committed fixture, or (with
/// `FLUXLOOM_BLESS_WRITERS` set) replaces the fixture.
fn assert_matches_fixture(written: &Path, name: &str) {
    let fixture = Path::new(FIXTURES).join(name);
    let bytes = fs::read(written).unwrap();
    if std::env::var_os("FLUXLOOM_BLESS_WRITERS").is_some() {
        fs::write(&fixture, &bytes).unwrap();
        return;
    }
    let committed = fs::read(&fixture).unwrap();
    assert!(
        bytes == committed,
        "{name}: the writer's output differs from the committed file that {ASTROPY} checked; \
         if the change is intended, rerun with FLUXLOOM_BLESS_WRITERS=1, then run check_with_astropy.py"
    );
}

/// The astropy readout of one fixture (`"fits"`, `"votable"` or `"csv"`).
fn astropy_readout(format: &str) -> Value {
    let text = fs::read_to_string(Path::new(FIXTURES).join("astropy_readout.json")).unwrap();
    let all: Value = serde_json::from_str(&text).unwrap();
    all[format].clone()
}

/// Asserts that the columns astropy read (name, unit, values as text, null as
/// JSON null) are those of `want`; `null_reads_as` gives the text astropy shows
/// for a null of a column it cannot mask (or `None` when it masks it).
fn assert_astropy_columns(
    format: &str,
    want: &RecordBatch,
    readout: &Value,
    null_reads_as: impl Fn(&str) -> Option<&'static str>,
) {
    let columns = readout["columns"].as_array().unwrap();
    assert_eq!(
        columns.len(),
        want.num_columns(),
        "{ASTROPY}, {format}: columns"
    );
    for (i, field) in want.schema().fields().iter().enumerate() {
        let name = field.name();
        let column = &columns[i];
        let context = format!("{ASTROPY}, {format}: column \"{name}\"");
        assert_eq!(column["name"].as_str(), Some(name.as_str()), "{context}");
        if format != "csv" {
            let unit = column["unit"].as_str().map(|u| u.replace(' ', ""));
            assert_eq!(
                unit.as_deref(),
                field.metadata().get("unit").map(String::as_str),
                "{context}: unit"
            );
        }
        let values = column["values"].as_array().unwrap();
        assert_eq!(values.len(), want.num_rows(), "{context}: rows");
        let array = want.column(i);
        for (row, value) in values.iter().enumerate() {
            let context = format!("{context}, row {row}");
            match (array.is_null(row), value.as_str()) {
                (true, None) => {}
                (true, Some(text)) => assert_eq!(
                    Some(text),
                    null_reads_as(name),
                    "{context}: expected a null"
                ),
                (false, Some(text)) => assert_value_text(array.as_ref(), row, text, &context),
                (false, None) => panic!("{context}: astropy read a null, expected a value"),
            }
        }
    }
}

#[test]
fn fits_fixture_is_read_by_astropy_as_written() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sample.fits");
    let (schema, batches) = sample(Flavor::Fits);
    write_fits(&path, &schema, &batches, "SED", &header_cards()).unwrap();
    assert_matches_fixture(&path, "sample.fits");

    let readout = astropy_readout("fits");
    assert_eq!(
        readout["verify"].as_str(),
        Some("ok"),
        "{ASTROPY}: fits verify('exception')"
    );
    assert_eq!(
        readout["extname"].as_str(),
        Some("SED"),
        "{ASTROPY}: EXTNAME"
    );
    for (keyword, value) in header_cards() {
        let got = &readout["header"][keyword.as_str()];
        assert_eq!(
            got.as_str(),
            Some(value.as_str()),
            "{ASTROPY}: header card {keyword}"
        );
    }
    // What astropy shows where it does not mask a null: a FITS string cannot be
    // null, so the null name is ""; a logical null (byte 0) reads as False; and
    // Table.read compares TNULL with the value after TZERO, so in the unsigned
    // columns the stored TNULL (section 7.3.2: the stored value) shows as its
    // physical value, 2^32 - 2 and 2^64 - 2 here.
    let null_reads_as = |name: &str| match name {
        "name" => Some(""),
        "is_star" => Some("false"),
        "det_mask" => Some("4294967294"),
        "source_id" => Some("18446744073709551614"),
        _ => None,
    };
    let want = concat(&schema, &batches);
    assert_astropy_columns("fits", &want, &readout, null_reads_as);
}

#[test]
fn votable_fixture_is_read_by_astropy_as_written() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sample.vot");
    let (schema, batches) = sample(Flavor::Votable);
    write_votable(&path, &schema, &batches, TABLE_NAME, DESCRIPTION, &params()).unwrap();
    assert_matches_fixture(&path, "sample.vot");

    let readout = astropy_readout("votable");
    assert_eq!(
        readout["verify"].as_str(),
        Some("ok"),
        "{ASTROPY}: votable parse(verify='exception')"
    );
    assert_eq!(
        readout["table_name"].as_str(),
        Some(TABLE_NAME),
        "{ASTROPY}"
    );
    assert_eq!(
        readout["description"].as_str(),
        Some(DESCRIPTION),
        "{ASTROPY}"
    );
    for (name, value) in params() {
        assert_eq!(
            readout["params"][name.as_str()].as_str(),
            Some(value.as_str()),
            "{ASTROPY}: PARAM {name}"
        );
    }
    assert_eq!(
        readout["columns"][2]["ucd"].as_str(),
        Some("pos.eq.ra;meta.main"),
        "{ASTROPY}: ucd of ra_deg"
    );
    let want = concat(&schema, &batches);
    // astropy shows a null variable-length string (BINARY2 mask bit set) as "", unmasked.
    let null_reads_as = |name: &str| matches!(name, "name" | "label").then_some("");
    assert_astropy_columns("votable", &want, &readout, null_reads_as);
}

#[test]
fn csv_fixture_is_read_by_astropy_as_written() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("sample.csv");
    let (schema, batches) = sample(Flavor::Csv);
    write_csv(&path, &schema, &batches).unwrap();
    assert_matches_fixture(&path, "sample.csv");

    let readout = astropy_readout("csv");
    let want = concat(&schema, &batches);
    assert_astropy_columns("csv", &want, &readout, |_| None);
}

/// The names in `dir`, sorted.
fn listing(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

/// A two-column table whose second column (Date32) no writer supports.
fn unsupported_table() -> (SchemaRef, Vec<RecordBatch>) {
    let schema: SchemaRef = Arc::new(Schema::new(vec![
        Field::new("ra_deg", DataType::Float64, true),
        Field::new("obs_date", DataType::Date32, true),
    ]));
    let batch = RecordBatch::try_new(
        schema.clone(),
        vec![
            Arc::new(Float64Array::from(vec![1.0, 2.0])),
            Arc::new(Date32Array::from(vec![19_000, 19_001])),
        ],
    )
    .unwrap();
    (schema, vec![batch])
}

#[test]
fn failed_exports_leave_no_file_and_keep_an_older_one() {
    let dir = tempfile::tempdir().unwrap();
    let (schema, batches) = unsupported_table();
    let supported = "(supported: Utf8, LargeUtf8, Float64, Float32, Int64, Int32, Int16, UInt8, UInt64, UInt32, Boolean)";
    type Writer = fn(&Path, &SchemaRef, &[RecordBatch]) -> fluxloom::Result<u64>;
    let writers: [(&str, &str, Writer); 3] = [
        ("out.csv", "CSV", |p, s, b| write_csv(p, s, b)),
        ("out.fits", "FITS", |p, s, b| {
            write_fits(p, s, b, "SED", &[])
        }),
        ("out.vot", "VOTable", |p, s, b| {
            write_votable(p, s, b, "sed", "", &[])
        }),
    ];
    for (name, format, write) in writers {
        let path = dir.path().join(name);
        let err = write(&path, &schema, &batches).unwrap_err();
        assert_eq!(
            err.to_string(),
            format!(
                "{}: column \"obs_date\" has type Date32, which {format} export does not support {supported}",
                path.display()
            )
        );
        assert!(!path.exists(), "{name} exists after a failed export");
    }
    assert!(listing(dir.path()).is_empty(), "{:?}", listing(dir.path()));

    // Errors found in the data, after the header is planned: the older file stays as it was.
    let fits_path = dir.path().join("old.fits");
    fs::write(&fits_path, b"older file").unwrap();
    let (schema, batches) = sample(Flavor::Csv);
    let err = write_fits(&fits_path, &schema, &batches, "SED", &[]).unwrap_err();
    assert_eq!(
        err.to_string(),
        format!(
            "{}: row 1, column \"label\": expected printable ASCII text (FITS Standard 4.0, section 7.3.3.1), found \"\u{3b1} Cen\"",
            fits_path.display()
        )
    );
    assert_eq!(fs::read(&fits_path).unwrap(), b"older file");

    let vot_path = dir.path().join("old.vot");
    fs::write(&vot_path, b"older file").unwrap();
    let err = write_votable(&vot_path, &schema, &batches, "sed", "", &[]).unwrap_err();
    assert_eq!(
        err.to_string(),
        format!(
            "{}: row 2, column \"source_id\": expected a value up to 9223372036854775807 (VOTable 1.4 has no unsigned 64-bit datatype), found \"18446744073709551615\"",
            vot_path.display()
        )
    );
    assert_eq!(fs::read(&vot_path).unwrap(), b"older file");
    assert_eq!(listing(dir.path()), ["old.fits", "old.vot"]);
}

#[test]
fn fits_header_problems_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.fits");
    let (schema, batches) = sample(Flavor::Fits);
    let cases = [
        (
            ("origin", "x"),
            "header card \"origin\": expected a keyword of 1 to 8 characters from A-Z 0-9 - _ (FITS Standard 4.0, section 4.1.2.1)",
        ),
        (
            ("TFORM3", "E"),
            "header card \"TFORM3\": this keyword describes the table and is set by the writer; choose another keyword",
        ),
        (
            ("OBSERVER", "J\u{f6}rg"),
            "header card \"OBSERVER\": the value \"J\u{f6}rg\" is not printable ASCII, expected characters 0x20-0x7E (FITS Standard 4.0, section 4.2.1.1)",
        ),
    ];
    for ((keyword, value), message) in cases {
        let cards = [(keyword.to_string(), value.to_string())];
        let err = write_fits(&path, &schema, &batches, "SED", &cards).unwrap_err();
        assert_eq!(err.to_string(), format!("{}: {message}", path.display()));
    }
    let long_name: String = "n".repeat(69);
    let schema_long: SchemaRef = Arc::new(Schema::new(vec![Field::new(
        &long_name,
        DataType::Int32,
        true,
    )]));
    let batch = RecordBatch::try_new(
        schema_long.clone(),
        vec![Arc::new(Int32Array::from(vec![1]))],
    )
    .unwrap();
    let err = write_fits(&path, &schema_long, &[batch], "SED", &[]).unwrap_err();
    assert_eq!(
        err.to_string(),
        format!(
            "{}: column \"{long_name}\": the name \"{long_name}\" is 69 characters long once quotes are doubled, expected at most 68 to fit one FITS header card",
            path.display()
        )
    );
    assert!(listing(dir.path()).is_empty());
}

#[test]
fn batches_that_do_not_match_the_schema_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path: PathBuf = dir.path().join("t.csv");
    let schema: SchemaRef = Arc::new(Schema::new(vec![Field::new(
        "n_obs",
        DataType::Int32,
        true,
    )]));
    let other: SchemaRef = Arc::new(Schema::new(vec![Field::new(
        "n_obs",
        DataType::Int64,
        true,
    )]));
    let batch = RecordBatch::try_new(other, vec![Arc::new(Int64Array::from(vec![1i64]))]).unwrap();
    let err = write_csv(&path, &schema, &[batch]).unwrap_err();
    assert_eq!(
        err.to_string(),
        format!(
            "{}: column \"n_obs\" has type Int64 in record batch 0, expected Int32 as in the schema",
            path.display()
        )
    );
    assert!(!path.exists());
}

#[test]
fn empty_tables_write_and_read_back_with_their_columns() {
    let dir = tempfile::tempdir().unwrap();
    let (schema, _) = sample(Flavor::Fits);
    let fits = dir.path().join("empty.fits");
    assert_eq!(write_fits(&fits, &schema, &[], "SED", &[]).unwrap(), 0);
    // Two HDUs of header only: no data blocks (FITS Standard 4.0, section 7.3.1, NAXIS2 = 0).
    assert_eq!(fs::metadata(&fits).unwrap().len() % 2880, 0);
    let got = read_all_fits(&fits);
    assert_eq!(got.num_rows(), 0);
    assert_eq!(got.num_columns(), schema.fields().len());

    let vot = dir.path().join("empty.vot");
    assert_eq!(write_votable(&vot, &schema, &[], "", "", &[]).unwrap(), 0);
    let got = read_all_votable(&vot);
    assert_eq!(got.num_rows(), 0);
    assert_eq!(got.num_columns(), schema.fields().len());

    let csv = dir.path().join("empty.csv");
    assert_eq!(write_csv(&csv, &schema, &[]).unwrap(), 0);
    let header = fs::read_to_string(&csv).unwrap();
    assert_eq!(header.lines().count(), 1);
    assert!(header.starts_with("name,ra_deg,"));
}

/// A one-column table whose field carries a unit and a description.
fn described_table() -> (SchemaRef, Vec<RecordBatch>) {
    let field = Field::new("ulim_mag", DataType::Float64, true).with_metadata(
        std::collections::HashMap::from([
            ("unit".to_string(), "mag".to_string()),
            ("description".to_string(), "Vega magnitude".to_string()),
        ]),
    );
    let schema: SchemaRef = Arc::new(Schema::new(vec![field]));
    let batch = RecordBatch::try_new(
        schema.clone(),
        vec![Arc::new(Float64Array::from(vec![Some(17.5), None]))],
    )
    .unwrap();
    (schema, vec![batch])
}

#[test]
fn descriptions_go_to_the_votable_field_and_the_fits_ttype_comment() {
    let dir = tempfile::tempdir().unwrap();
    let (schema, batches) = described_table();
    let vot = dir.path().join("d.vot");
    write_votable(&vot, &schema, &batches, "t", "", &[]).unwrap();
    let xml = fs::read_to_string(&vot).unwrap();
    assert!(
        xml.contains(
            "<FIELD name=\"ulim_mag\" datatype=\"double\" unit=\"mag\"><DESCRIPTION>Vega magnitude</DESCRIPTION></FIELD>\n"
        ),
        "{xml}"
    );
    let back = read_all_votable(&vot);
    assert_eq!(
        back.schema()
            .field(0)
            .metadata()
            .get("unit")
            .map(String::as_str),
        Some("mag")
    );

    let fits = dir.path().join("d.fits");
    write_fits(&fits, &schema, &batches, "T", &[]).unwrap();
    let bytes = fs::read(&fits).unwrap();
    let cards: Vec<String> = bytes[2880..]
        .chunks(80)
        .map(|c| String::from_utf8_lossy(c).trim_end().to_string())
        .take_while(|c| c != "END")
        .collect();
    assert!(
        cards.contains(&"TTYPE1  = 'ulim_mag' / Vega magnitude".to_string()),
        "{cards:?}"
    );
    assert!(
        cards.contains(&"TUNIT1  = 'mag     '".to_string()),
        "{cards:?}"
    );
}
