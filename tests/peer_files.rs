//! Reads the FITS binary tables and VOTables that astropy ships as its own test
//! data (found inside the installed astropy package, never copied here) with
//! fluxloom's readers, and compares every value, nulls included, with astropy's
//! reading of the same file, dumped by `tests/fixtures/peer/astropy_dump.py`.
//!
//! The interpreter comes from FLUXLOOM_PYTHON (a virtual environment with
//! astropy 6.1.7 and numpy 2.1.3 that `.ci/run` makes). Without it the test says
//! it is skipped, unless CI=true, where it fails. Files the readers do not take
//! are listed in [`REFUSED`] with the reason; each must give a one-line error
//! naming the file, never a panic or a silent read.

use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::process::Command;

use arrow::array::{Array, ArrayRef, AsArray, RecordBatch};
use arrow::datatypes::{
    DataType, Float32Type, Float64Type, Int8Type, Int16Type, Int32Type, Int64Type, UInt8Type,
    UInt16Type, UInt32Type, UInt64Type,
};
use fluxloom::catalog::fits::{FitsOptions, read_fits};
use fluxloom::catalog::votable::{VotableOptions, read_votable};
use serde_json::{Value, json};

/// Files out of scope, by path inside the astropy package, with why they are refused.
const REFUSED: &[(&str, &str)] = &[
    (
        "io/fits/hdu/compressed/tests/data/compressed_with_nan.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/hdu/compressed/tests/data/m13_gzip.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/hdu/compressed/tests/data/m13_hcomp.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/hdu/compressed/tests/data/m13_plio.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/hdu/compressed/tests/data/m13_rice.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/tests/data/comp.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/tests/data/compressed_float_bzero.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/tests/data/compressed_image.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/tests/data/double_ext.fits",
        "a tile-compressed image: its BINTABLE holds variable-length arrays",
    ),
    (
        "io/fits/tests/data/theap-gap.fits",
        "a variable-length array column (PJ)",
    ),
    (
        "io/fits/tests/data/variable_length_table.fits",
        "a variable-length array column (PI)",
    ),
    (
        "io/votable/tests/data/irsa-nph-m31.xml",
        "double cells hold the text \"null\", which is not a number and not a declared VALUES null",
    ),
    (
        "io/votable/tests/data/parquet_binary.xml",
        "DATA in the PARQUET serialization, which fluxloom refuses by name (astropy reads it when pyarrow is installed)",
    ),
    (
        "io/votable/tests/data/regression.bin.tabledata.truth.1.1.xml",
        "a variable-length numeric array FIELD (arraysize=\"*\")",
    ),
    (
        "io/votable/tests/data/regression.bin.tabledata.truth.1.3.xml",
        "a variable-length numeric array FIELD (arraysize=\"*\")",
    ),
    (
        "io/votable/tests/data/regression.xml",
        "a FIELD of datatype unicodeString, which is not a VOTable datatype",
    ),
    (
        "modeling/tests/data/idcompspec.fits",
        "not FITS: the first card is not SIMPLE (astropy refuses it too)",
    ),
];

/// Files where astropy 6.1.7 gives a value for a cell that fluxloom reads as
/// null, with why; in these files (only) an astropy `""`, `0` or `false` matches
/// a fluxloom null.
const EMPTY_AS_VALUE: &[(&str, &str)] = &[
    (
        "io/votable/tests/data/gemini.xml",
        "empty <TD/> cells: VOTable 1.4 section 5.1 makes them null; astropy gives \"\" for char and 0 for long",
    ),
    (
        "io/votable/tests/data/binary2_masked_strings.xml",
        "strings flagged null in the BINARY2 null mask: astropy gives \"\" without a mask",
    ),
];

/// The interpreter, or `None` (after saying so) when the test is skipped.
fn python() -> Option<PathBuf> {
    match std::env::var_os("FLUXLOOM_PYTHON") {
        Some(p) => Some(PathBuf::from(p)),
        None if std::env::var("CI").is_ok_and(|v| v == "true") => {
            panic!(
                "FLUXLOOM_PYTHON is unset under CI=true; .ci/run sets it to its virtual environment"
            )
        }
        None => {
            println!(
                "peer_files skipped: FLUXLOOM_PYTHON is unset (set it to a python with astropy 6.1.7, as .ci/run does)"
            );
            None
        }
    }
}

/// One cell as the dump script writes it.
fn cell(array: &ArrayRef, row: usize) -> Value {
    if array.is_null(row) {
        return Value::Null;
    }
    let float = |v: f64| {
        if v.is_nan() {
            Value::Null
        } else {
            json!({ "f": v.to_bits() })
        }
    };
    match array.data_type() {
        DataType::Boolean => json!(array.as_boolean().value(row)),
        DataType::Int8 => json!(array.as_primitive::<Int8Type>().value(row)),
        DataType::Int16 => json!(array.as_primitive::<Int16Type>().value(row)),
        DataType::Int32 => json!(array.as_primitive::<Int32Type>().value(row)),
        DataType::Int64 => json!(array.as_primitive::<Int64Type>().value(row)),
        DataType::UInt8 => json!(array.as_primitive::<UInt8Type>().value(row)),
        DataType::UInt16 => json!(array.as_primitive::<UInt16Type>().value(row)),
        DataType::UInt32 => json!(array.as_primitive::<UInt32Type>().value(row)),
        DataType::UInt64 => json!(array.as_primitive::<UInt64Type>().value(row)),
        DataType::Float32 => float(f64::from(array.as_primitive::<Float32Type>().value(row))),
        DataType::Float64 => float(array.as_primitive::<Float64Type>().value(row)),
        DataType::Utf8 => json!(array.as_string::<i32>().value(row)),
        DataType::FixedSizeList(_, _) => {
            let list = array.as_fixed_size_list();
            let values = list.value(row);
            Value::Array((0..values.len()).map(|j| cell(&values, j)).collect())
        }
        other => json!(format!("unexpected type {other}")),
    }
}

/// Our reading of `path` as `kind`, or the error text; a panic is `Err` with a marker.
fn ours(kind: &str, path: &Path, hdu: usize) -> Result<Vec<RecordBatch>, String> {
    let read = || {
        let stream = if kind == "fits" {
            read_fits(
                path,
                &FitsOptions {
                    hdu: Some(hdu),
                    batch_rows: 1000,
                },
            )
        } else {
            read_votable(
                path,
                &VotableOptions {
                    table_index: 0,
                    batch_rows: 1000,
                },
            )
        };
        stream
            .and_then(|s| s.collect_all())
            .map_err(|e| e.to_string())
    };
    catch_unwind(AssertUnwindSafe(read)).unwrap_or_else(|_| Err("PANIC".to_string()))
}

/// Compares our columns with astropy's; returns the differences.
fn compare(
    batches: &[RecordBatch],
    columns: &[Value],
    kind: &str,
    empty_as_value: bool,
) -> Vec<String> {
    let mut problems = Vec::new();
    let Some(first) = batches.first() else {
        let rows: usize = columns
            .iter()
            .map(|c| c["values"].as_array().map_or(0, Vec::len))
            .max()
            .unwrap_or(0);
        if rows > 0 {
            problems.push(format!("no rows read, astropy has {rows}"));
        }
        return problems;
    };
    let table = arrow::compute::concat_batches(&first.schema(), batches).unwrap();
    if table.num_columns() != columns.len() {
        problems.push(format!(
            "{} columns, astropy has {}",
            table.num_columns(),
            columns.len()
        ));
        return problems;
    }
    for (i, theirs) in columns.iter().enumerate() {
        let name = theirs["name"].as_str().unwrap_or("");
        let field = table.schema().field(i).name().clone();
        if kind == "fits" && field != name {
            problems.push(format!(
                "column {}: name {field:?}, astropy {name:?}",
                i + 1
            ));
        }
        let values = theirs["values"].as_array().cloned().unwrap_or_default();
        if values.len() != table.num_rows() {
            problems.push(format!(
                "column {field:?}: {} rows, astropy has {}",
                table.num_rows(),
                values.len()
            ));
            continue;
        }
        let array = table.column(i);
        let matches = |ours: &Value, theirs: &Value| {
            ours == theirs
                || (empty_as_value
                    && ours.is_null()
                    && matches!(theirs, Value::String(t) if t.is_empty())
                    || empty_as_value
                        && ours.is_null()
                        && (theirs == &json!(0) || theirs == &json!(false)))
        };
        let wrong: Vec<usize> = (0..values.len())
            .filter(|&r| !matches(&cell(array, r), &values[r]))
            .collect();
        if let Some(&r) = wrong.first() {
            problems.push(format!(
                "column {field:?}: {} of {} values differ, the first row {}: ours {}, astropy {}",
                wrong.len(),
                values.len(),
                r + 1,
                cell(array, r),
                values[r]
            ));
        }
    }
    problems
}

#[test]
fn astropy_test_files_read_the_same_or_are_refused_clearly() {
    let Some(python) = python() else {
        return;
    };
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/peer/astropy_dump.py");
    let out = Command::new(&python).arg(&script).output().unwrap();
    assert!(
        out.status.success(),
        "{} failed: {}",
        script.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    let dump: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(dump["astropy"], "6.1.7", "the pinned astropy");
    let files = dump["files"].as_array().unwrap();
    let mut failures = Vec::new();
    let (mut same, mut refused, mut both_refuse) = (0, 0, 0);
    for entry in files {
        let relative = entry["relative"].as_str().unwrap();
        let path = PathBuf::from(entry["path"].as_str().unwrap());
        let kind = entry["kind"].as_str().unwrap();
        let hdu = entry["hdu"].as_u64().unwrap_or(0) as usize;
        let result = ours(kind, &path, hdu);
        let name = path.file_name().unwrap().to_string_lossy().into_owned();
        let clear = |e: &str| e != "PANIC" && !e.contains('\n') && e.contains(&name);
        if let Some((_, reason)) = REFUSED.iter().find(|(f, _)| *f == relative) {
            match &result {
                Err(e) if clear(e) => {
                    refused += 1;
                    println!("refused  {relative} ({reason}): {e}");
                }
                Err(e) => failures.push(format!("{relative}: unclear refusal {e:?}")),
                Ok(_) => failures.push(format!("{relative}: read, expected a refusal ({reason})")),
            }
            continue;
        }
        if let Some(theirs) = entry.get("astropy_error") {
            match &result {
                Err(e) if clear(e) => {
                    both_refuse += 1;
                    println!("both refuse {relative}: astropy {theirs}; ours {e}");
                }
                Err(e) => failures.push(format!("{relative}: unclear error {e:?}")),
                Ok(_) => println!("astropy refuses, ours reads {relative}: astropy {theirs}"),
            }
            continue;
        }
        match &result {
            Ok(batches) => {
                let allowance = EMPTY_AS_VALUE.iter().find(|(f, _)| *f == relative);
                if let Some((_, why)) = allowance {
                    println!("note     {relative}: {why}");
                }
                let columns = entry["columns"].as_array().unwrap();
                let problems = compare(batches, columns, kind, allowance.is_some());
                if problems.is_empty() {
                    same += 1;
                    let rows: usize = batches.iter().map(|b| b.num_rows()).sum();
                    println!("same     {relative} ({rows} rows)");
                } else {
                    failures.push(format!("{relative}: {}", problems.join("; ")));
                }
            }
            Err(e) => failures.push(format!("{relative}: not read, astropy reads it: {e}")),
        }
    }
    println!(
        "{} files: {same} read the same as astropy, {refused} refused as listed, {both_refuse} refused by both",
        files.len()
    );
    assert!(same > 0, "no file compared");
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
