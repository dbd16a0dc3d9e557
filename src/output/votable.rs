//! [`write_votable`]: exports record batches as a VOTable 1.4 document with one
//! TABLE in the BINARY2 serialization.
//!
//! The document is one `RESOURCE` holding one `TABLE` (with `name`, `nrows`, a
//! `DESCRIPTION` and one `PARAM` per given pair), a `FIELD` per column and the
//! rows as a base64 `STREAM` (lines of 76 characters). What is implemented, by
//! section of IVOA VOTable 1.4:
//!
//! - 2.1 datatypes and 4.2 FIELD (`name`, `datatype`, `arraysize`, `unit`, and
//!   `ucd` from the field metadata `"ucd"`, and a `DESCRIPTION` from the field
//!   metadata `"description"`); units should be VOUnit strings (IVOA VOUnits
//!   1.0), e.g. `Jy`, `mag`, `yr`, `mW.m**-2`. Datatypes are mapped as:
//!
//! | Arrow | datatype | bytes in a row |
//! | --- | --- | --- |
//! | Utf8, LargeUtf8 (all ASCII) | `char`, `arraysize="*"` | 4-byte count, then the bytes |
//! | Utf8, LargeUtf8 (other text) | `unicodeChar`, `arraysize="*"` | 4-byte count of characters, then UCS-2 |
//! | Float64 / Float32 | `double` / `float` | 8 / 4 (NaN when null) |
//! | Int64, UInt64, UInt32 | `long` | 8 |
//! | Int32 / Int16 / UInt8 | `int` / `short` / `unsignedByte` | 4 / 2 / 1 |
//! | Boolean | `boolean` | 1: `T`, `F` (`?` when null) |
//!
//! - 5.5 BINARY2: each row starts with a null mask of `ceil(nfields / 8)` bytes,
//!   the first field in the high bit of the first byte, so nulls of every type
//!   (and the difference between a null and an empty string) are kept exactly;
//!   values are big-endian.
//! - 4.4 PARAM: each `(name, value)` pair as `datatype="char" arraysize="*"`.
//!
//! VOTable has no unsigned 64-bit datatype: a UInt64 value above
//! 9223372036854775807 is refused. Text outside the Basic Multilingual Plane
//! cannot be written as UCS-2 and is refused too; both are checked before
//! anything is written. Names, units, descriptions and values are XML-escaped;
//! characters XML 1.0 cannot hold (control characters other than tab, line
//! feed and carriage return) are refused in them. The file is written under a
//! temporary name and renamed into place only when complete (see [`AtomicFile`]).
//!
//! ```no_run
//! use std::sync::Arc;
//! use arrow::array::{Float64Array, RecordBatch};
//! use arrow::datatypes::{DataType, Field, Schema};
//! use fluxloom::output::votable::write_votable;
//!
//! let field = Field::new("flux_jy", DataType::Float64, true)
//!     .with_metadata([("unit", "Jy")]);
//! let schema = Arc::new(Schema::new(vec![field]));
//! let batch = RecordBatch::try_new(
//!     schema.clone(),
//!     vec![Arc::new(Float64Array::from(vec![Some(1.5e-3), None]))],
//! )?;
//! let params = [("origin".to_string(), "fluxloom".to_string())];
//! let path = std::path::Path::new("sed.vot");
//! let rows = write_votable(path, &schema, &[batch], "sed", "Flux densities per source", &params)?;
//! assert_eq!(rows, 2);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

use std::io::Write;
use std::path::Path;

use arrow::array::{Array, AsArray};
use arrow::datatypes::{
    DataType, Float32Type, Float64Type, Int16Type, Int32Type, Int64Type, SchemaRef, UInt8Type,
    UInt32Type, UInt64Type,
};
use base64::Engine as _;
use base64::engine::general_purpose::STANDARD as BASE64;

use super::atomic::AtomicFile;
use super::batches::BatchSource;
use super::csv::{check_batch, is_exportable, text_at, unsupported_column};
use crate::error::{Error, Result};

/// Raw bytes per base64 line: 57 bytes give 76 characters.
const LINE_BYTES: usize = 57;

/// Writes `batches` (each with the columns of `schema`) to `path` as a VOTable
/// 1.4 document; returns the rows written.
///
/// # Arguments
///
/// - `table_name`: the TABLE `name` attribute; left out when empty.
/// - `description`: the TABLE `DESCRIPTION`; left out when empty.
/// - `params`: `(name, value)` pairs written as char `PARAM`s of the TABLE, in order.
///
/// # Errors
///
/// [`Error::Format`] naming the column for an unsupported column type, and for
/// a name, unit, description or parameter holding a character XML 1.0 cannot
/// hold; [`Error::BadValue`] for a UInt64 value above 2^63 - 1 or text outside
/// the Basic Multilingual Plane; [`Error::Format`] / [`Error::ColumnType`] when
/// a batch does not match `schema`; [`Error::Io`] when the file cannot be
/// written. On any error nothing is left under `path`.
pub fn write_votable<B: BatchSource + ?Sized>(
    path: &Path,
    schema: &SchemaRef,
    batches: &B,
    table_name: &str,
    description: &str,
    params: &[(String, String)],
) -> Result<u64> {
    let (columns, rows) = plan_columns(path, schema, batches)?;
    let head = document_head(path, &columns, rows, table_name, description, params)?;

    let (guard, mut out) = AtomicFile::create(path)?;
    let io = |e| Error::io(path, e);
    out.write_all(head.as_bytes()).map_err(io)?;
    let mut stream = Base64Lines::default();
    let mask_bytes = columns.len().div_ceil(8);
    let mut row_bytes = Vec::new();
    batches.for_each_batch(&mut |batch| {
        for r in 0..batch.num_rows() {
            row_bytes.clear();
            row_bytes.resize(mask_bytes, 0);
            for (i, (c, array)) in columns.iter().zip(batch.columns()).enumerate() {
                if array.is_null(r) {
                    row_bytes[i / 8] |= 0x80 >> (i % 8);
                }
                encode_value(array.as_ref(), c.kind, r, &mut row_bytes);
            }
            stream.push(&row_bytes);
            if stream.text.len() >= 1 << 16 {
                out.write_all(stream.text.as_bytes()).map_err(io)?;
                stream.text.clear();
            }
        }
        Ok(())
    })?;
    stream.finish();
    out.write_all(stream.text.as_bytes()).map_err(io)?;
    out.write_all(DOCUMENT_TAIL.as_bytes()).map_err(io)?;
    out.flush().map_err(io)?;
    drop(out);
    guard.commit()?;
    Ok(rows)
}

/// Everything after the base64 text.
const DOCUMENT_TAIL: &str = "</STREAM>
</BINARY2>
</DATA>
</TABLE>
</RESOURCE>
</VOTABLE>
";

/// How one Arrow column is serialized (VOTable 1.4, section 2.1).
#[derive(Debug, Clone, Copy, PartialEq)]
enum Kind {
    Char,
    UnicodeChar,
    Double,
    Float,
    /// Int64, and UInt32 / UInt64 widened.
    Long,
    Int,
    Short,
    UnsignedByte,
    Boolean,
}

impl Kind {
    /// The `datatype` and `arraysize` attributes.
    fn attributes(self) -> &'static str {
        match self {
            Kind::Char => r#"datatype="char" arraysize="*""#,
            Kind::UnicodeChar => r#"datatype="unicodeChar" arraysize="*""#,
            Kind::Double => r#"datatype="double""#,
            Kind::Float => r#"datatype="float""#,
            Kind::Long => r#"datatype="long""#,
            Kind::Int => r#"datatype="int""#,
            Kind::Short => r#"datatype="short""#,
            Kind::UnsignedByte => r#"datatype="unsignedByte""#,
            Kind::Boolean => r#"datatype="boolean""#,
        }
    }
}

/// One FIELD: name, serialization, unit and UCD.
#[derive(Debug)]
struct Column {
    name: String,
    kind: Kind,
    unit: Option<String>,
    ucd: Option<String>,
    description: Option<String>,
}

/// Reads the batches once to choose each column's datatype and check that every
/// value fits it; returns the columns and the number of rows.
fn plan_columns<B: BatchSource + ?Sized>(
    path: &Path,
    schema: &SchemaRef,
    batches: &B,
) -> Result<(Vec<Column>, u64)> {
    let fields = schema.fields();
    let mut kinds = Vec::with_capacity(fields.len());
    for field in fields {
        kinds.push(match field.data_type() {
            DataType::Utf8 | DataType::LargeUtf8 => Kind::Char,
            DataType::Float64 => Kind::Double,
            DataType::Float32 => Kind::Float,
            DataType::Int64 | DataType::UInt32 | DataType::UInt64 => Kind::Long,
            DataType::Int32 => Kind::Int,
            DataType::Int16 => Kind::Short,
            DataType::UInt8 => Kind::UnsignedByte,
            DataType::Boolean => Kind::Boolean,
            other => {
                debug_assert!(!is_exportable(other));
                return Err(unsupported_column(path, field.name(), other, "VOTable"));
            }
        });
    }
    let mut rows = 0u64;
    let mut index = 0usize;
    batches.for_each_batch(&mut |batch| {
        check_batch(path, schema, index, batch)?;
        index += 1;
        for (i, field) in fields.iter().enumerate() {
            let bad_value = |r: usize, expected: &str, found: String| Error::BadValue {
                path: path.to_path_buf(),
                row: rows + r as u64 + 1,
                column: field.name().clone(),
                expected: expected.to_string(),
                found,
            };
            let column = batch.column(i);
            match field.data_type() {
                DataType::Utf8 | DataType::LargeUtf8 => {
                    for r in 0..batch.num_rows() {
                        let Some(text) = text_at(column.as_ref(), r) else {
                            continue;
                        };
                        if text.is_ascii() {
                            continue;
                        }
                        kinds[i] = Kind::UnicodeChar;
                        if let Some(c) = text.chars().find(|&c| u32::from(c) > 0xFFFF) {
                            return Err(bad_value(
                                r,
                                "text in the Basic Multilingual Plane (VOTable 1.4 unicodeChar is UCS-2)",
                                format!("{text} (character U+{:04X})", u32::from(c)),
                            ));
                        }
                    }
                }
                DataType::UInt64 => {
                    let values = column.as_primitive::<UInt64Type>();
                    for r in 0..batch.num_rows() {
                        if values.is_valid(r) && i64::try_from(values.value(r)).is_err() {
                            return Err(bad_value(
                                r,
                                "a value up to 9223372036854775807 (VOTable 1.4 has no unsigned 64-bit datatype)",
                                values.value(r).to_string(),
                            ));
                        }
                    }
                }
                _ => {}
            }
        }
        rows += batch.num_rows() as u64;
        Ok(())
    })?;
    let columns = fields
        .iter()
        .zip(kinds)
        .map(|(field, kind)| Column {
            name: field.name().clone(),
            kind,
            unit: field.metadata().get("unit").cloned(),
            ucd: field.metadata().get("ucd").cloned(),
            description: field.metadata().get("description").cloned(),
        })
        .collect();
    Ok((columns, rows))
}

/// The document up to and including `<STREAM encoding="base64">` and its line break.
fn document_head(
    path: &Path,
    columns: &[Column],
    rows: u64,
    table_name: &str,
    description: &str,
    params: &[(String, String)],
) -> Result<String> {
    let mut xml = String::from(concat!(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n",
        "<VOTABLE version=\"1.4\" xmlns:xsi=\"http://www.w3.org/2001/XMLSchema-instance\"",
        " xmlns=\"http://www.ivoa.net/xml/VOTable/v1.3\"",
        " xsi:schemaLocation=\"http://www.ivoa.net/xml/VOTable/v1.3",
        " http://www.ivoa.net/xml/VOTable/VOTable-1.4.xsd\">\n",
        "<RESOURCE type=\"results\">\n",
        "<TABLE",
    ));
    if !table_name.is_empty() {
        xml.push_str(&format!(
            " name=\"{}\"",
            escape_attr(path, "the table name", table_name)?
        ));
    }
    xml.push_str(&format!(" nrows=\"{rows}\">\n"));
    if !description.is_empty() {
        let text = escape_text(path, "the description", description)?;
        xml.push_str(&format!("<DESCRIPTION>{text}</DESCRIPTION>\n"));
    }
    for (name, value) in params {
        let what = format!("parameter \"{name}\"");
        xml.push_str(&format!(
            "<PARAM name=\"{}\" datatype=\"char\" arraysize=\"*\" value=\"{}\"/>\n",
            escape_attr(path, &what, name)?,
            escape_attr(path, &what, value)?
        ));
    }
    for c in columns {
        let what = format!("column \"{}\"", c.name);
        xml.push_str(&format!(
            "<FIELD name=\"{}\" {}",
            escape_attr(path, &what, &c.name)?,
            c.kind.attributes()
        ));
        if let Some(unit) = &c.unit {
            xml.push_str(&format!(" unit=\"{}\"", escape_attr(path, &what, unit)?));
        }
        if let Some(ucd) = &c.ucd {
            xml.push_str(&format!(" ucd=\"{}\"", escape_attr(path, &what, ucd)?));
        }
        match &c.description {
            Some(d) => xml.push_str(&format!(
                "><DESCRIPTION>{}</DESCRIPTION></FIELD>\n",
                escape_text(path, &what, d)?
            )),
            None => xml.push_str("/>\n"),
        }
    }
    xml.push_str("<DATA>\n<BINARY2>\n<STREAM encoding=\"base64\">\n");
    Ok(xml)
}

/// The error for a character that XML 1.0 cannot hold, or `Ok` (XML 1.0, production 2 `Char`).
fn check_xml_chars(path: &Path, what: &str, text: &str) -> Result<()> {
    match text.chars().find(|&c| {
        (c < ' ' && !matches!(c, '\t' | '\n' | '\r')) || matches!(c, '\u{FFFE}' | '\u{FFFF}')
    }) {
        None => Ok(()),
        Some(c) => Err(Error::format(
            path,
            format!(
                "{what}: \"{}\" holds the character U+{:04X}, which an XML document cannot hold",
                text.escape_debug(),
                u32::from(c)
            ),
        )),
    }
}

/// `text` escaped for element content.
fn escape_text(path: &Path, what: &str, text: &str) -> Result<String> {
    check_xml_chars(path, what, text)?;
    Ok(text
        .replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;"))
}

/// `text` escaped for a double-quoted attribute; tab, line feed and carriage return
/// become character references so that attribute-value normalization keeps them.
fn escape_attr(path: &Path, what: &str, text: &str) -> Result<String> {
    Ok(escape_text(path, what, text)?
        .replace('"', "&quot;")
        .replace('\t', "&#9;")
        .replace('\n', "&#10;")
        .replace('\r', "&#13;"))
}

/// Appends the BINARY2 bytes of row `r` of `array` (VOTable 1.4, sections 5.4-5.5);
/// a null gets a placeholder (empty string, NaN, zero, `?`).
fn encode_value(array: &dyn Array, kind: Kind, r: usize, out: &mut Vec<u8>) {
    let valid = array.is_valid(r);
    match kind {
        Kind::Char => {
            let text = text_at(array, r).unwrap_or_default();
            out.extend_from_slice(&(text.len() as u32).to_be_bytes());
            out.extend_from_slice(text.as_bytes());
        }
        Kind::UnicodeChar => {
            let text = text_at(array, r).unwrap_or_default();
            let units: Vec<u16> = text.encode_utf16().collect();
            out.extend_from_slice(&(units.len() as u32).to_be_bytes());
            units
                .iter()
                .for_each(|u| out.extend_from_slice(&u.to_be_bytes()));
        }
        Kind::Double => {
            let v = if valid {
                array.as_primitive::<Float64Type>().value(r)
            } else {
                f64::NAN
            };
            out.extend_from_slice(&v.to_be_bytes());
        }
        Kind::Float => {
            let v = if valid {
                array.as_primitive::<Float32Type>().value(r)
            } else {
                f32::NAN
            };
            out.extend_from_slice(&v.to_be_bytes());
        }
        Kind::Long => {
            let v: i64 = if !valid {
                0
            } else {
                match array.data_type() {
                    DataType::UInt64 => array.as_primitive::<UInt64Type>().value(r) as i64,
                    DataType::UInt32 => array.as_primitive::<UInt32Type>().value(r).into(),
                    _ => array.as_primitive::<Int64Type>().value(r),
                }
            };
            out.extend_from_slice(&v.to_be_bytes());
        }
        Kind::Int => {
            let v = if valid {
                array.as_primitive::<Int32Type>().value(r)
            } else {
                0
            };
            out.extend_from_slice(&v.to_be_bytes());
        }
        Kind::Short => {
            let v = if valid {
                array.as_primitive::<Int16Type>().value(r)
            } else {
                0
            };
            out.extend_from_slice(&v.to_be_bytes());
        }
        Kind::UnsignedByte => {
            let v = if valid {
                array.as_primitive::<UInt8Type>().value(r)
            } else {
                0
            };
            out.push(v);
        }
        Kind::Boolean => out.push(match (valid, valid && array.as_boolean().value(r)) {
            (false, _) => b'?',
            (true, true) => b'T',
            (true, false) => b'F',
        }),
    }
}

/// Base64 text of a byte stream, 76 characters a line; bytes that do not yet
/// fill a line wait for the next row.
#[derive(Debug, Default)]
struct Base64Lines {
    pending: Vec<u8>,
    text: String,
}

impl Base64Lines {
    /// Adds bytes, encoding every complete line.
    fn push(&mut self, bytes: &[u8]) {
        self.pending.extend_from_slice(bytes);
        let whole = self.pending.len() / LINE_BYTES * LINE_BYTES;
        for line in self.pending[..whole].chunks_exact(LINE_BYTES) {
            BASE64.encode_string(line, &mut self.text);
            self.text.push('\n');
        }
        self.pending.drain(..whole);
    }

    /// Encodes the last, shorter line (with `=` padding).
    fn finish(&mut self) {
        if !self.pending.is_empty() {
            BASE64.encode_string(&self.pending, &mut self.text);
            self.text.push('\n');
            self.pending.clear();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markup_is_escaped_and_control_characters_refused() {
        let path = Path::new("t.vot");
        assert_eq!(
            escape_attr(path, "x", "a<b & \"c\"\td").unwrap(),
            "a&lt;b &amp; &quot;c&quot;&#9;d"
        );
        assert_eq!(
            escape_text(path, "x", "1 > 0 \"ok\"").unwrap(),
            "1 &gt; 0 \"ok\""
        );
        let err = escape_text(path, "the description", "bell\u{7}").unwrap_err();
        assert_eq!(
            err.to_string(),
            "t.vot: the description: \"bell\\u{7}\" holds the character U+0007, which an XML document cannot hold"
        );
    }

    #[test]
    fn base64_lines_match_one_shot_encoding() {
        let bytes: Vec<u8> = (0..=255u8).cycle().take(1000).collect();
        let mut lines = Base64Lines::default();
        for chunk in bytes.chunks(13) {
            lines.push(chunk);
        }
        lines.finish();
        assert!(lines.text.lines().all(|l| l.len() <= 76));
        assert_eq!(lines.text.lines().next().unwrap().len(), 76);
        assert_eq!(lines.text.replace('\n', ""), BASE64.encode(&bytes));
    }
}
