//! [`write_csv`]: exports record batches as comma-separated text.
//!
//! The file starts with a header line of the column names, then one line per
//! row, fields separated by `,` and lines ended by `\n`. A field is quoted as
//! RFC 4180, section 2 describes (`"` around it, inner `"` doubled) when it holds
//! a comma, a quote, a carriage return or a line feed; also when it starts with
//! `#` (so that readers skipping `#` comment lines keep the row) and when it is
//! an empty string (so that `""` differs from a null, which is an empty field).
//!
//! | Arrow type | text |
//! | --- | --- |
//! | Utf8, LargeUtf8 | as is (UTF-8), quoted as above |
//! | Float64, Float32 | the fewest digits that read back to the same value, in exponent form outside 1e-5 <= \|x\| < 1e16 (`0.25`, `-0`, `1.5e-7`, `1e300`, `NaN`, `inf`) |
//! | Int64, Int32, Int16, UInt8, UInt64, UInt32 | decimal |
//! | Boolean | `true` / `false` |
//!
//! Nulls are empty fields. Other column types are refused before anything is
//! written. The file is written under a temporary name and renamed into place
//! only when complete (see [`AtomicFile`]).
//!
//! ```no_run
//! use std::sync::Arc;
//! use arrow::array::{Float64Array, RecordBatch};
//! use arrow::datatypes::{DataType, Field, Schema};
//! use fluxloom::output::csv::write_csv;
//!
//! let schema = Arc::new(Schema::new(vec![Field::new("flux_jy", DataType::Float64, true)]));
//! let batch = RecordBatch::try_new(
//!     schema.clone(),
//!     vec![Arc::new(Float64Array::from(vec![Some(1.5e-3), None]))],
//! )?;
//! let rows = write_csv(std::path::Path::new("sed.csv"), &schema, &[batch])?;
//! assert_eq!(rows, 2);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

use std::io::Write;
use std::path::Path;

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::{
    DataType, Float32Type, Float64Type, Int16Type, Int32Type, Int64Type, SchemaRef, UInt8Type,
    UInt32Type, UInt64Type,
};

use super::atomic::AtomicFile;
use super::batches::BatchSource;
use crate::error::{Error, Result};

/// Writes `batches` (each with the columns of `schema`) to `path` as CSV; returns the rows written.
///
/// # Errors
///
/// [`Error::Format`] naming the column for a column type other than those in
/// the module table; [`Error::Format`] / [`Error::ColumnType`] when a batch does
/// not match `schema`; [`Error::Io`] when the file cannot be written. On any
/// error nothing is left under `path`.
pub fn write_csv<B: BatchSource + ?Sized>(
    path: &Path,
    schema: &SchemaRef,
    batches: &B,
) -> Result<u64> {
    for field in schema.fields() {
        if !is_exportable(field.data_type()) {
            return Err(unsupported_column(
                path,
                field.name(),
                field.data_type(),
                "CSV",
            ));
        }
    }
    let (guard, mut out) = AtomicFile::create(path)?;
    let io = |e| Error::io(path, e);
    let mut line = String::new();
    for (i, field) in schema.fields().iter().enumerate() {
        if i > 0 {
            line.push(',');
        }
        push_text_field(&mut line, field.name());
    }
    line.push('\n');
    out.write_all(line.as_bytes()).map_err(io)?;
    let mut rows = 0u64;
    let mut index = 0usize;
    batches.for_each_batch(&mut |batch| {
        check_batch(path, schema, index, batch)?;
        index += 1;
        for row in 0..batch.num_rows() {
            line.clear();
            for (i, column) in batch.columns().iter().enumerate() {
                if i > 0 {
                    line.push(',');
                }
                push_cell(&mut line, column.as_ref(), row);
            }
            line.push('\n');
            out.write_all(line.as_bytes()).map_err(io)?;
        }
        rows += batch.num_rows() as u64;
        Ok(())
    })?;
    out.flush().map_err(io)?;
    drop(out);
    guard.commit()?;
    Ok(rows)
}

/// Whether the three writers export columns of this type.
pub(crate) fn is_exportable(data_type: &DataType) -> bool {
    matches!(
        data_type,
        DataType::Utf8
            | DataType::LargeUtf8
            | DataType::Float64
            | DataType::Float32
            | DataType::Int64
            | DataType::Int32
            | DataType::Int16
            | DataType::UInt8
            | DataType::UInt64
            | DataType::UInt32
            | DataType::Boolean
    )
}

/// The error for a column of a type that `format` export does not support.
pub(crate) fn unsupported_column(
    path: &Path,
    name: &str,
    data_type: &DataType,
    format: &str,
) -> Error {
    Error::format(
        path,
        format!(
            "column \"{name}\" has type {data_type}, which {format} export does not support \
             (supported: Utf8, LargeUtf8, Float64, Float32, Int64, Int32, Int16, UInt8, UInt64, UInt32, Boolean)"
        ),
    )
}

/// Checks that batch number `b` has the columns of `schema`, in order and with the same types.
///
/// Shared by the three writers of this folder.
pub(crate) fn check_batch(
    path: &Path,
    schema: &SchemaRef,
    b: usize,
    batch: &RecordBatch,
) -> Result<()> {
    let fields = schema.fields();
    if batch.num_columns() != fields.len() {
        return Err(Error::format(
            path,
            format!(
                "record batch {b} has {} columns, expected {} as in the schema",
                batch.num_columns(),
                fields.len()
            ),
        ));
    }
    for (field, column) in fields.iter().zip(batch.columns()) {
        if column.data_type() != field.data_type() {
            return Err(Error::ColumnType {
                path: path.to_path_buf(),
                column: field.name().clone(),
                expected: format!("{} as in the schema", field.data_type()),
                found: format!("{} in record batch {b}", column.data_type()),
            });
        }
    }
    Ok(())
}

/// The text of row `row` of a Utf8 or LargeUtf8 column, `None` when null or not text.
pub(crate) fn text_at(column: &dyn Array, row: usize) -> Option<&str> {
    if column.is_null(row) {
        return None;
    }
    match column.data_type() {
        DataType::Utf8 => Some(column.as_string::<i32>().value(row)),
        DataType::LargeUtf8 => Some(column.as_string::<i64>().value(row)),
        _ => None,
    }
}

/// Appends the CSV text of one cell; nothing for a null.
fn push_cell(line: &mut String, column: &dyn Array, row: usize) {
    use std::fmt::Write as _;
    if column.is_null(row) {
        return;
    }
    // Writing to a String cannot fail.
    let _ = match column.data_type() {
        DataType::Utf8 | DataType::LargeUtf8 => {
            push_text_field(line, text_at(column, row).unwrap_or_default());
            Ok(())
        }
        DataType::Float64 => {
            let v = column.as_primitive::<Float64Type>().value(row);
            write_float(line, v, v != 0.0 && !(1e-5..1e16).contains(&v.abs()))
        }
        DataType::Float32 => {
            let v = column.as_primitive::<Float32Type>().value(row);
            write_float(line, v, v != 0.0 && !(1e-5..1e16).contains(&v.abs()))
        }
        DataType::Int64 => write!(line, "{}", column.as_primitive::<Int64Type>().value(row)),
        DataType::Int32 => write!(line, "{}", column.as_primitive::<Int32Type>().value(row)),
        DataType::Int16 => write!(line, "{}", column.as_primitive::<Int16Type>().value(row)),
        DataType::UInt8 => write!(line, "{}", column.as_primitive::<UInt8Type>().value(row)),
        DataType::UInt64 => write!(line, "{}", column.as_primitive::<UInt64Type>().value(row)),
        DataType::UInt32 => write!(line, "{}", column.as_primitive::<UInt32Type>().value(row)),
        DataType::Boolean => write!(line, "{}", column.as_boolean().value(row)),
        _ => Ok(()),
    };
}

/// Appends a float with the fewest digits that read back to the same value:
/// in exponent form (`1.5e-7`) when `exponent`, else positional (`0.25`).
fn write_float<T>(line: &mut String, v: T, exponent: bool) -> std::fmt::Result
where
    T: std::fmt::Display + std::fmt::LowerExp,
{
    use std::fmt::Write as _;
    if exponent {
        write!(line, "{v:e}")
    } else {
        write!(line, "{v}")
    }
}

/// Appends `text` as one field, quoted when RFC 4180 requires it, when it starts
/// with `#`, or when it is empty.
fn push_text_field(line: &mut String, text: &str) {
    let quote = text.is_empty() || text.starts_with('#') || text.contains([',', '"', '\r', '\n']);
    if quote {
        line.push('"');
        line.push_str(&text.replace('"', "\"\""));
        line.push('"');
    } else {
        line.push_str(text);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn field(text: &str) -> String {
        let mut line = String::new();
        push_text_field(&mut line, text);
        line
    }

    #[test]
    fn fields_are_quoted_only_when_needed() {
        assert_eq!(field("plain text"), "plain text");
        assert_eq!(field("a,b"), "\"a,b\"");
        assert_eq!(field("say \"hi\""), "\"say \"\"hi\"\"\"");
        assert_eq!(field("two\nlines"), "\"two\nlines\"");
        assert_eq!(field("cr\rhere"), "\"cr\rhere\"");
        assert_eq!(field("#1"), "\"#1\"");
        assert_eq!(field(""), "\"\"");
        assert_eq!(field("x#1"), "x#1");
    }

    fn float(v: f64) -> String {
        let mut line = String::new();
        write_float(&mut line, v, v != 0.0 && !(1e-5..1e16).contains(&v.abs())).unwrap();
        line
    }

    #[test]
    fn floats_use_the_fewest_digits_that_read_back() {
        for (v, text) in [
            (0.1, "0.1"),
            (-0.0, "-0"),
            (1e-5, "0.00001"),
            (9.999e-6, "9.999e-6"),
            (1e16, "1e16"),
            (123456789012345.6, "123456789012345.6"),
            (5e-324, "5e-324"),
            (f64::NAN, "NaN"),
            (f64::NEG_INFINITY, "-inf"),
        ] {
            assert_eq!(float(v), text);
            if v.is_finite() {
                assert_eq!(text.parse::<f64>().unwrap().to_bits(), v.to_bits());
            }
        }
    }

    #[test]
    fn only_listed_types_are_exportable() {
        assert!(is_exportable(&DataType::LargeUtf8));
        assert!(is_exportable(&DataType::UInt64));
        assert!(!is_exportable(&DataType::Int8));
        assert!(!is_exportable(&DataType::UInt16));
        assert!(!is_exportable(&DataType::Date32));
    }
}
