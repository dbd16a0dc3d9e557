//! [`write_fits`]: exports record batches as a FITS file holding one binary table.
//!
//! The file has an empty primary HDU (`SIMPLE = T`, `BITPIX = 8`, `NAXIS = 0`,
//! `EXTEND = T`) followed by one BINTABLE extension. What is implemented, by
//! section of the FITS Standard 4.0:
//!
//! - 3.1-3.3: 2880-byte blocks; headers padded with spaces, data with zero bytes.
//! - 4.1-4.2: fixed-format 80-character cards: keywords of at most 8 characters
//!   from `A-Z 0-9 - _`, logical and integer values right-justified to column
//!   30, string values from column 11 in single quotes with inner quotes doubled
//!   and at least 8 characters between the quotes; header text is printable
//!   ASCII (0x20-0x7E).
//! - 4.2.1.2: extra string cards longer than one card are split with `&` and
//!   `CONTINUE` cards (a reader that does not join them sees the first part,
//!   ending in `&`); `COMMENT` and `HISTORY` cards are wrapped at 72 characters.
//! - 7.3.1-7.3.3: the mandatory BINTABLE keywords in their order, then `TTYPEn`,
//!   `TFORMn`, `TUNITn`, `TNULLn`, `TZEROn`, `EXTNAME`; rows of `NAXIS1` bytes,
//!   fields big-endian and contiguous.
//! - 7.3.4 / table 19: unsigned integers by offset, `TZEROn = 2^31` on `J` and
//!   `2^63` on `K`.
//!
//! Column mapping:
//!
//! | Arrow | TFORM | null stored as |
//! | --- | --- | --- |
//! | Utf8, LargeUtf8 | `nA`, `n` = longest value in bytes (at least 1), padded with spaces | spaces (reads back as the empty string) |
//! | Float64 | `D` | NaN |
//! | Float32 | `E` | NaN |
//! | Int64, Int32, Int16 | `K`, `J`, `I` | `TNULLn`: the smallest value of the type the column does not use |
//! | UInt8 | `B` | `TNULLn`: the largest value the column does not use |
//! | UInt64, UInt32 | `K` + `TZEROn = 9223372036854775808`, `J` + `TZEROn = 2147483648` | `TNULLn` (stored value) for the largest value not used |
//! | Boolean | `L` (`T` / `F`) | byte 0 |
//!
//! `TNULLn` is written only for integer columns that hold a null. The field
//! metadata `"unit"` becomes `TUNITn` (a FITS unit string, FITS Standard 4.0
//! section 4.3), and `"description"` the comment of `TTYPEn` when it fits the card. Text values must be printable ASCII
//! (section 7.3.3.1 allows ASCII text only); a FITS string cannot tell null from
//! empty, and trailing spaces are not significant. Column names, units and the
//! extension name must fit one card (at most 68 characters, a `'` counting
//! twice). Every value of `header_cards` is written as a character string.
//!
//! The data are read twice from the given batches: once for the string widths
//! and `TNULLn` values the header needs, once to write the rows. The file is
//! written under a temporary name and renamed into place only when complete
//! (see [`AtomicFile`]).
//!
//! ```no_run
//! use std::sync::Arc;
//! use arrow::array::{Float64Array, RecordBatch};
//! use arrow::datatypes::{DataType, Field, Schema};
//! use fluxloom::output::fits::write_fits;
//!
//! let field = Field::new("flux_jy", DataType::Float64, true)
//!     .with_metadata([("unit", "Jy")]);
//! let schema = Arc::new(Schema::new(vec![field]));
//! let batch = RecordBatch::try_new(
//!     schema.clone(),
//!     vec![Arc::new(Float64Array::from(vec![Some(1.5e-3), None]))],
//! )?;
//! let cards = [("ORIGIN".to_string(), "fluxloom".to_string())];
//! let rows = write_fits(std::path::Path::new("sed.fits"), &schema, &[batch], "SED", &cards)?;
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
use super::csv::{check_batch, is_exportable, text_at, unsupported_column};
use crate::error::{Error, Result};

/// Size in bytes of a FITS block (FITS Standard 4.0, section 3.1).
const BLOCK_BYTES: usize = 2880;
/// Size in bytes of one header card (FITS Standard 4.0, section 4.1).
const CARD_BYTES: usize = 80;
/// Most characters between the quotes of a string value on one card: columns 12-79.
const MAX_STRING_CHARS: usize = 68;
/// `TZEROn` of a `J` column holding unsigned 32-bit integers: 2^31 (FITS Standard 4.0, table 19).
const TZERO_U32: &str = "2147483648";
/// `TZEROn` of a `K` column holding unsigned 64-bit integers: 2^63 (FITS Standard 4.0, table 19).
const TZERO_U64: &str = "9223372036854775808";

/// Writes `batches` (each with the columns of `schema`) to `path` as a FITS
/// BINTABLE named `extname`; returns the rows written.
///
/// # Arguments
///
/// - `extname`: the `EXTNAME` value; left out when empty.
/// - `header_cards`: extra `(keyword, value)` cards for the table header, in
///   order, e.g. `("ORIGIN", "fluxloom")`. Values are written as strings
///   (split over `CONTINUE` cards when long); the keywords `COMMENT` and
///   `HISTORY` give commentary cards instead.
///
/// # Errors
///
/// [`Error::Format`] naming the column for an unsupported column type, a
/// column name or unit that is not printable ASCII or longer than 68
/// characters, and an integer column with nulls that uses every value of its
/// type; [`Error::Format`] for a bad or reserved keyword in `header_cards` or a
/// value that is not printable ASCII; [`Error::BadValue`] for a text value that
/// is not printable ASCII; [`Error::Format`] / [`Error::ColumnType`] when a
/// batch does not match `schema`; [`Error::Io`] when the file cannot be
/// written. On any error nothing is left under `path`.
pub fn write_fits<B: BatchSource + ?Sized>(
    path: &Path,
    schema: &SchemaRef,
    batches: &B,
    extname: &str,
    header_cards: &[(String, String)],
) -> Result<u64> {
    let (columns, rows) = plan_columns(path, schema, batches)?;
    let row_bytes: usize = columns.iter().map(|c| c.width).sum();
    let mut header = table_header(path, &columns, row_bytes, rows, extname)?;
    for (keyword, value) in header_cards {
        extra_cards(path, &mut header, keyword, value)?;
    }

    let (guard, mut out) = AtomicFile::create(path)?;
    let io = |e| Error::io(path, e);
    let mut primary = Cards::default();
    primary.logical("SIMPLE", true, "conforms to FITS Standard 4.0");
    primary.integer("BITPIX", "8", "");
    primary.integer("NAXIS", "0", "no primary data array");
    primary.logical("EXTEND", true, "extensions may follow");
    out.write_all(&primary.finish()).map_err(io)?;
    out.write_all(&header.finish()).map_err(io)?;

    let mut data_bytes = 0usize;
    batches.for_each_batch(&mut |batch| {
        let buf = encode_rows(batch, &columns, row_bytes);
        out.write_all(&buf).map_err(io)?;
        data_bytes += buf.len();
        Ok(())
    })?;
    let pad = data_bytes.next_multiple_of(BLOCK_BYTES) - data_bytes;
    out.write_all(&vec![0u8; pad]).map_err(io)?;
    out.flush().map_err(io)?;
    drop(out);
    guard.commit()?;
    Ok(rows)
}

/// How one Arrow column is stored in the table.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Kind {
    Text,
    F64,
    F32,
    I64,
    I32,
    I16,
    U8,
    U64,
    U32,
    Bool,
}

/// One table column: its TFORM, byte width and null marker.
#[derive(Debug)]
struct Column {
    name: String,
    kind: Kind,
    /// Bytes in a row.
    width: usize,
    unit: Option<String>,
    /// The field metadata `"description"`, written as the comment of `TTYPEn`
    /// when it fits the card (printable ASCII only).
    description: Option<String>,
    /// Stored value marking a null (integer kinds with nulls only).
    tnull: Option<i64>,
}

impl Column {
    /// The `TFORMn` value (FITS Standard 4.0, table 18).
    fn tform(&self) -> String {
        match self.kind {
            Kind::Text => format!("{}A", self.width),
            Kind::F64 => "D".to_string(),
            Kind::F32 => "E".to_string(),
            Kind::I64 | Kind::U64 => "K".to_string(),
            Kind::I32 | Kind::U32 => "J".to_string(),
            Kind::I16 => "I".to_string(),
            Kind::U8 => "B".to_string(),
            Kind::Bool => "L".to_string(),
        }
    }
}

/// Reads the batches to choose each column's form, string width and `TNULLn`
/// (a second pass only when an integer column has nulls); returns the columns
/// and the number of rows.
fn plan_columns<B: BatchSource + ?Sized>(
    path: &Path,
    schema: &SchemaRef,
    batches: &B,
) -> Result<(Vec<Column>, u64)> {
    let fields = schema.fields();
    let mut kinds = Vec::with_capacity(fields.len());
    for field in fields {
        let name = field.name();
        check_header_text(path, &format!("column \"{name}\": the name"), name)?;
        if let Some(unit) = field.metadata().get("unit") {
            check_header_text(path, &format!("column \"{name}\": the unit"), unit)?;
        }
        kinds.push(match field.data_type() {
            DataType::Utf8 | DataType::LargeUtf8 => Kind::Text,
            DataType::Float64 => Kind::F64,
            DataType::Float32 => Kind::F32,
            DataType::Int64 => Kind::I64,
            DataType::Int32 => Kind::I32,
            DataType::Int16 => Kind::I16,
            DataType::UInt8 => Kind::U8,
            DataType::UInt64 => Kind::U64,
            DataType::UInt32 => Kind::U32,
            DataType::Boolean => Kind::Bool,
            other => {
                debug_assert!(!is_exportable(other));
                return Err(unsupported_column(path, name, other, "FITS"));
            }
        });
    }
    let mut widths: Vec<usize> = kinds
        .iter()
        .map(|kind| match kind {
            Kind::Text => 1,
            Kind::F64 | Kind::I64 | Kind::U64 => 8,
            Kind::F32 | Kind::I32 | Kind::U32 => 4,
            Kind::I16 => 2,
            Kind::U8 | Kind::Bool => 1,
        })
        .collect();
    let mut nulls = vec![0u64; fields.len()];
    let mut rows = 0u64;
    let mut index = 0usize;
    batches.for_each_batch(&mut |batch| {
        check_batch(path, schema, index, batch)?;
        index += 1;
        for (i, kind) in kinds.iter().enumerate() {
            let column = batch.column(i);
            nulls[i] += column.null_count() as u64;
            if *kind == Kind::Text {
                let width = text_width(path, fields[i].name(), column.as_ref(), rows)?;
                widths[i] = widths[i].max(width);
            }
        }
        rows += batch.num_rows() as u64;
        Ok(())
    })?;
    let with_nulls: Vec<usize> = (0..fields.len())
        .filter(|&i| nulls[i] > 0 && is_integer(kinds[i]))
        .collect();
    let mut tnulls: Vec<Option<i64>> = vec![None; fields.len()];
    if !with_nulls.is_empty() {
        let free = free_null_values(path, schema, &kinds, &with_nulls, rows, batches)?;
        for (i, v) in with_nulls.into_iter().zip(free) {
            tnulls[i] = Some(v);
        }
    }
    let columns = fields
        .iter()
        .enumerate()
        .map(|(i, field)| Column {
            name: field.name().clone(),
            kind: kinds[i],
            width: widths[i],
            unit: field.metadata().get("unit").cloned(),
            description: field
                .metadata()
                .get("description")
                .filter(|d| d.bytes().all(|b| (0x20..=0x7e).contains(&b)))
                .cloned(),
            tnull: tnulls[i],
        })
        .collect();
    Ok((columns, rows))
}

/// Whether `kind` is stored as an integer and so marks nulls with `TNULLn`.
fn is_integer(kind: Kind) -> bool {
    matches!(
        kind,
        Kind::I64 | Kind::I32 | Kind::I16 | Kind::U8 | Kind::U64 | Kind::U32
    )
}

/// The longest text of one batch's text `column` in bytes (at least 1),
/// checking that all of it is printable ASCII; `rows_before` is the number of
/// rows in earlier batches, for the row number of an error.
fn text_width(path: &Path, name: &str, column: &dyn Array, rows_before: u64) -> Result<usize> {
    let mut width = 1;
    for r in 0..column.len() {
        let Some(text) = text_at(column, r) else {
            continue;
        };
        if !is_printable_ascii(text) {
            return Err(Error::BadValue {
                path: path.to_path_buf(),
                row: rows_before + r as u64 + 1,
                column: name.to_string(),
                expected: "printable ASCII text (FITS Standard 4.0, section 7.3.3.1)".to_string(),
                found: text.to_string(),
            });
        }
        width = width.max(text.len());
    }
    Ok(width)
}

/// The value range of an integer kind, as `(min, max)`.
fn value_range(kind: Kind) -> (i128, i128) {
    match kind {
        Kind::I64 => (i64::MIN.into(), i64::MAX.into()),
        Kind::I32 => (i32::MIN.into(), i32::MAX.into()),
        Kind::I16 => (i16::MIN.into(), i16::MAX.into()),
        Kind::U8 => (0, u8::MAX.into()),
        Kind::U64 => (0, u64::MAX.into()),
        Kind::U32 => (0, u32::MAX.into()),
        _ => (0, 0),
    }
}

/// The stored (raw, before `TZEROn`) form of value `v` of an integer kind
/// (FITS Standard 4.0, section 7.3.4: stored = value - TZERO).
fn stored_value(kind: Kind, v: i128) -> i64 {
    match kind {
        Kind::U64 => (v - (1i128 << 63)) as i64,
        Kind::U32 => (v - (1i128 << 31)) as i64,
        _ => v as i64,
    }
}

/// Chooses the stored value marking nulls in each integer column of
/// `columns`: for signed kinds the smallest value the column does not use, for
/// unsigned kinds the largest. One pass over the batches; only the used values
/// within `rows` of the end of the range are kept, since the free value lies there.
fn free_null_values<B: BatchSource + ?Sized>(
    path: &Path,
    schema: &SchemaRef,
    kinds: &[Kind],
    columns: &[usize],
    rows: u64,
    batches: &B,
) -> Result<Vec<i64>> {
    let window = i128::from(rows) + 1;
    let mut used: Vec<Vec<i128>> = vec![Vec::new(); columns.len()];
    batches.for_each_batch(&mut |batch| {
        for (k, &i) in columns.iter().enumerate() {
            let kind = kinds[i];
            let (min, max) = value_range(kind);
            let unsigned = matches!(kind, Kind::U8 | Kind::U64 | Kind::U32);
            let column = batch.column(i);
            for r in (0..batch.num_rows()).filter(|&r| column.is_valid(r)) {
                let v = integer_at(column.as_ref(), kind, r);
                let near_end = if unsigned {
                    v > max - window
                } else {
                    v < min + window
                };
                if near_end {
                    used[k].push(v);
                }
            }
        }
        Ok(())
    })?;
    columns
        .iter()
        .zip(used)
        .map(|(&i, mut used)| {
            let kind = kinds[i];
            used.sort_unstable();
            used.dedup();
            let (min, max) = value_range(kind);
            let unsigned = matches!(kind, Kind::U8 | Kind::U64 | Kind::U32);
            let free = if unsigned {
                // Walk down from the maximum past the used values at the top.
                let mut candidate = max;
                for &v in used.iter().rev() {
                    if v == candidate {
                        candidate -= 1;
                    } else {
                        break;
                    }
                }
                (candidate >= min).then_some(candidate)
            } else {
                let mut candidate = min;
                for &v in &used {
                    if v == candidate {
                        candidate += 1;
                    } else {
                        break;
                    }
                }
                (candidate <= max).then_some(candidate)
            };
            let name = schema.field(i).name();
            let free = free.ok_or_else(|| {
                Error::format(
                    path,
                    format!(
                        "column \"{name}\" has nulls and uses every value of its type, so no value is free to mark them (TNULL)"
                    ),
                )
            })?;
            Ok(stored_value(kind, free))
        })
        .collect()
}

/// Row `r` of an integer column, widened.
fn integer_at(column: &dyn Array, kind: Kind, r: usize) -> i128 {
    match kind {
        Kind::I64 => column.as_primitive::<Int64Type>().value(r).into(),
        Kind::I32 => column.as_primitive::<Int32Type>().value(r).into(),
        Kind::I16 => column.as_primitive::<Int16Type>().value(r).into(),
        Kind::U8 => column.as_primitive::<UInt8Type>().value(r).into(),
        Kind::U64 => column.as_primitive::<UInt64Type>().value(r).into(),
        Kind::U32 => column.as_primitive::<UInt32Type>().value(r).into(),
        _ => 0,
    }
}

/// The BINTABLE header up to (not including) the extra cards (FITS Standard 4.0, section 7.3.1).
fn table_header(
    path: &Path,
    columns: &[Column],
    row_bytes: usize,
    rows: u64,
    extname: &str,
) -> Result<Cards> {
    let mut cards = Cards::default();
    cards.string("XTENSION", "BINTABLE", "binary table extension");
    cards.integer("BITPIX", "8", "8-bit bytes");
    cards.integer("NAXIS", "2", "2-dimensional table");
    cards.integer("NAXIS1", &row_bytes.to_string(), "bytes per row");
    cards.integer("NAXIS2", &rows.to_string(), "number of rows");
    cards.integer("PCOUNT", "0", "no heap");
    cards.integer("GCOUNT", "1", "one group");
    cards.integer("TFIELDS", &columns.len().to_string(), "number of columns");
    for (i, c) in columns.iter().enumerate() {
        let n = i + 1;
        cards.string(
            &format!("TTYPE{n}"),
            &c.name,
            c.description.as_deref().unwrap_or(""),
        );
        cards.string(&format!("TFORM{n}"), &c.tform(), "");
        if let Some(unit) = &c.unit {
            cards.string(&format!("TUNIT{n}"), unit, "");
        }
        if let Some(tnull) = c.tnull {
            cards.integer(
                &format!("TNULL{n}"),
                &tnull.to_string(),
                "stored value of a null",
            );
        }
        match c.kind {
            Kind::U64 => cards.integer(&format!("TZERO{n}"), TZERO_U64, "unsigned 64-bit offset"),
            Kind::U32 => cards.integer(&format!("TZERO{n}"), TZERO_U32, "unsigned 32-bit offset"),
            _ => {}
        }
    }
    if !extname.is_empty() {
        check_header_text(path, "the extension name", extname)?;
        cards.string("EXTNAME", extname, "");
    }
    Ok(cards)
}

/// Keywords the writer sets itself, which extra cards may not redefine.
fn is_reserved(keyword: &str) -> bool {
    const FIXED: [&str; 12] = [
        "SIMPLE", "XTENSION", "BITPIX", "NAXIS", "PCOUNT", "GCOUNT", "TFIELDS", "EXTNAME",
        "EXTEND", "THEAP", "END", "CONTINUE",
    ];
    const INDEXED: [&str; 9] = [
        "NAXIS", "TTYPE", "TFORM", "TUNIT", "TNULL", "TZERO", "TSCAL", "TDIM", "TDISP",
    ];
    FIXED.contains(&keyword)
        || INDEXED.iter().any(|prefix| {
            keyword
                .strip_prefix(prefix)
                .is_some_and(|rest| !rest.is_empty() && rest.bytes().all(|b| b.is_ascii_digit()))
        })
}

/// Appends the card(s) for one extra `(keyword, value)` pair.
fn extra_cards(path: &Path, cards: &mut Cards, keyword: &str, value: &str) -> Result<()> {
    let bad = |why: &str| Error::format(path, format!("header card \"{keyword}\": {why}"));
    let valid = !keyword.is_empty()
        && keyword.len() <= 8
        && keyword
            .bytes()
            .all(|b| b.is_ascii_uppercase() || b.is_ascii_digit() || b == b'-' || b == b'_');
    if !valid {
        return Err(bad(
            "expected a keyword of 1 to 8 characters from A-Z 0-9 - _ (FITS Standard 4.0, section 4.1.2.1)",
        ));
    }
    if is_reserved(keyword) {
        return Err(bad(
            "this keyword describes the table and is set by the writer; choose another keyword",
        ));
    }
    if !is_printable_ascii(value) {
        return Err(bad(&format!(
            "the value \"{value}\" is not printable ASCII, expected characters 0x20-0x7E (FITS Standard 4.0, section 4.2.1.1)"
        )));
    }
    if keyword == "COMMENT" || keyword == "HISTORY" {
        cards.commentary(keyword, value);
    } else {
        cards.long_string(keyword, value);
    }
    Ok(())
}

/// Checks text bound for a single-card string value: printable ASCII, at most 68 characters.
fn check_header_text(path: &Path, what: &str, text: &str) -> Result<()> {
    if !is_printable_ascii(text) {
        return Err(Error::format(
            path,
            format!(
                "{what} \"{text}\" is not printable ASCII, expected characters 0x20-0x7E for a FITS header (FITS Standard 4.0, section 4.2.1.1)"
            ),
        ));
    }
    if escaped_len(text) > MAX_STRING_CHARS {
        return Err(Error::format(
            path,
            format!(
                "{what} \"{text}\" is {} characters long once quotes are doubled, expected at most {MAX_STRING_CHARS} to fit one FITS header card",
                escaped_len(text)
            ),
        ));
    }
    Ok(())
}

/// Whether every byte of `text` is printable ASCII (0x20-0x7E).
fn is_printable_ascii(text: &str) -> bool {
    text.bytes().all(|b| (0x20..=0x7e).contains(&b))
}

/// Length of `text` inside FITS quotes, each `'` written twice.
fn escaped_len(text: &str) -> usize {
    text.len() + text.matches('\'').count()
}

/// Header cards being assembled, 80 bytes each.
#[derive(Debug, Default)]
struct Cards {
    bytes: Vec<u8>,
}

impl Cards {
    /// Appends one card: `text` padded with spaces (or cut) to 80 bytes.
    fn push(&mut self, text: &str) {
        let mut card = text.as_bytes().to_vec();
        card.resize(CARD_BYTES, b' ');
        self.bytes.extend_from_slice(&card);
    }

    /// `keyword = value / comment`, the value field already formatted; the comment
    /// is left out when it does not fit.
    fn valued(&mut self, keyword: &str, value: &str, comment: &str) {
        let mut text = format!("{keyword:<8}= {value}");
        if !comment.is_empty() && text.len() + 3 + comment.len() <= CARD_BYTES {
            text.push_str(" / ");
            text.push_str(comment);
        }
        self.push(&text);
    }

    /// A logical value, `T` or `F` in column 30 (section 4.2.2).
    fn logical(&mut self, keyword: &str, value: bool, comment: &str) {
        let v = if value { "T" } else { "F" };
        self.valued(keyword, &format!("{v:>20}"), comment);
    }

    /// An integer value (given as its decimal text), right-justified to column 30 (section 4.2.3).
    fn integer(&mut self, keyword: &str, value: &str, comment: &str) {
        self.valued(keyword, &format!("{value:>20}"), comment);
    }

    /// A string value of at most 68 characters once quotes are doubled (section 4.2.1.1).
    fn string(&mut self, keyword: &str, value: &str, comment: &str) {
        let quoted = format!("'{:<8}'", value.replace('\'', "''"));
        self.valued(keyword, &quoted, comment);
    }

    /// A string value of any length, continued on `CONTINUE` cards when it does
    /// not fit one card (section 4.2.1.2).
    fn long_string(&mut self, keyword: &str, value: &str) {
        if escaped_len(value) <= MAX_STRING_CHARS {
            self.string(keyword, value, "");
            return;
        }
        // Each piece but the last ends in `&`, so holds at most 67 escaped characters.
        let mut pieces: Vec<String> = Vec::new();
        let mut piece = String::new();
        for c in value.chars() {
            let escaped = if c == '\'' { 2 } else { c.len_utf8() };
            if piece.len() + escaped > MAX_STRING_CHARS - 1 {
                pieces.push(std::mem::take(&mut piece));
            }
            if c == '\'' {
                piece.push_str("''");
            } else {
                piece.push(c);
            }
        }
        pieces.push(piece);
        let last = pieces.len() - 1;
        for (k, piece) in pieces.iter().enumerate() {
            let amp = if k < last { "&" } else { "" };
            if k == 0 {
                self.push(&format!("{keyword:<8}= '{piece}{amp}'"));
            } else {
                self.push(&format!("CONTINUE  '{piece}{amp}'"));
            }
        }
    }

    /// `COMMENT` or `HISTORY` text in columns 9-80, wrapped over as many cards as needed.
    fn commentary(&mut self, keyword: &str, text: &str) {
        let width = CARD_BYTES - 8;
        if text.is_empty() {
            self.push(keyword);
        }
        for chunk in text.as_bytes().chunks(width) {
            // The text is ASCII, so any byte boundary is a character boundary.
            self.push(&format!("{keyword:<8}{}", String::from_utf8_lossy(chunk)));
        }
    }

    /// The header bytes: the cards, `END`, and spaces to a whole block (section 4.4.1).
    fn finish(mut self) -> Vec<u8> {
        self.push("END");
        let len = self.bytes.len().next_multiple_of(BLOCK_BYTES);
        self.bytes.resize(len, b' ');
        self.bytes
    }
}

/// The rows of one batch, `row_bytes` each, big-endian (FITS Standard 4.0, section 7.3.3).
fn encode_rows(batch: &RecordBatch, columns: &[Column], row_bytes: usize) -> Vec<u8> {
    let rows = batch.num_rows();
    let mut buf = vec![0u8; rows * row_bytes];
    let mut offset = 0;
    for (c, column) in columns.iter().zip(batch.columns()) {
        let array = column.as_ref();
        let cells = buf
            .chunks_exact_mut(row_bytes.max(1))
            .take(rows)
            .map(|row| &mut row[offset..offset + c.width]);
        for (r, cell) in cells.enumerate() {
            encode_cell(array, c, r, cell);
        }
        offset += c.width;
    }
    buf
}

/// Writes row `r` of `array` into its `cell` bytes.
fn encode_cell(array: &dyn Array, c: &Column, r: usize, cell: &mut [u8]) {
    let valid = array.is_valid(r);
    let tnull = c.tnull.unwrap_or(0);
    match c.kind {
        Kind::Text => {
            let text = text_at(array, r).unwrap_or_default().as_bytes();
            cell[..text.len()].copy_from_slice(text);
            cell[text.len()..].fill(b' ');
        }
        Kind::F64 => {
            let v = if valid {
                array.as_primitive::<Float64Type>().value(r)
            } else {
                f64::NAN
            };
            cell.copy_from_slice(&v.to_be_bytes());
        }
        Kind::F32 => {
            let v = if valid {
                array.as_primitive::<Float32Type>().value(r)
            } else {
                f32::NAN
            };
            cell.copy_from_slice(&v.to_be_bytes());
        }
        Kind::Bool => {
            cell[0] = match (valid, valid && array.as_boolean().value(r)) {
                (false, _) => 0,
                (true, true) => b'T',
                (true, false) => b'F',
            };
        }
        Kind::I64 | Kind::U64 => {
            let v = if valid {
                stored_value(c.kind, integer_at(array, c.kind, r))
            } else {
                tnull
            };
            cell.copy_from_slice(&v.to_be_bytes());
        }
        Kind::I32 | Kind::U32 => {
            let v = if valid {
                stored_value(c.kind, integer_at(array, c.kind, r))
            } else {
                tnull
            };
            cell.copy_from_slice(&(v as i32).to_be_bytes());
        }
        Kind::I16 => {
            let v = if valid {
                integer_at(array, c.kind, r) as i64
            } else {
                tnull
            };
            cell.copy_from_slice(&(v as i16).to_be_bytes());
        }
        Kind::U8 => {
            let v = if valid {
                integer_at(array, c.kind, r) as i64
            } else {
                tnull
            };
            cell[0] = v as u8;
        }
    }
}

#[cfg(test)]
mod tests {
    use std::sync::Arc;

    use arrow::array::{Int64Array, UInt8Array};
    use arrow::datatypes::Field;

    use super::*;

    /// The null markers `plan_columns` chooses for a signed and an unsigned
    /// column whose values at the ends of their ranges are spread over batches.
    #[test]
    fn null_markers_skip_used_values_across_batches() {
        let schema = Arc::new(arrow::datatypes::Schema::new(vec![
            Field::new("s", DataType::Int64, true),
            Field::new("u", DataType::UInt8, true),
        ]));
        let batch = |s: Vec<Option<i64>>, u: Vec<Option<u8>>| {
            RecordBatch::try_new(
                schema.clone(),
                vec![Arc::new(Int64Array::from(s)), Arc::new(UInt8Array::from(u))],
            )
            .unwrap()
        };
        let batches = vec![
            batch(vec![Some(i64::MIN + 1), None], vec![Some(255), Some(7)]),
            batch(vec![Some(5), Some(i64::MIN)], vec![None, Some(254)]),
        ];
        let (columns, rows) = plan_columns(Path::new("t.fits"), &schema, &batches).unwrap();
        assert_eq!(rows, 4);
        assert_eq!(columns[0].tnull, Some(i64::MIN + 2));
        // Unsigned bytes are stored as they are (no TZERO): 255 and 254 are used.
        assert_eq!(columns[1].tnull, Some(253));
    }

    #[test]
    fn a_column_using_every_value_of_its_type_has_no_null_marker() {
        let schema = Arc::new(arrow::datatypes::Schema::new(vec![Field::new(
            "u",
            DataType::UInt8,
            true,
        )]));
        let mut values: Vec<Option<u8>> = (0..=255).map(Some).collect();
        values.push(None);
        let (a, b) = values.split_at(100);
        let batches: Vec<RecordBatch> = [a, b]
            .iter()
            .map(|v| {
                RecordBatch::try_new(schema.clone(), vec![Arc::new(UInt8Array::from(v.to_vec()))])
                    .unwrap()
            })
            .collect();
        let e = plan_columns(Path::new("t.fits"), &schema, &batches).unwrap_err();
        assert!(
            e.to_string()
                .contains("column \"u\" has nulls and uses every value of its type"),
            "{e}"
        );
    }

    fn lines(cards: Cards) -> Vec<String> {
        cards
            .bytes
            .chunks(CARD_BYTES)
            .map(|c| String::from_utf8(c.to_vec()).unwrap())
            .collect()
    }

    #[test]
    fn values_sit_in_fixed_format_columns() {
        let mut cards = Cards::default();
        cards.logical("SIMPLE", true, "");
        cards.integer("NAXIS1", "57", "bytes per row");
        cards.string("TUNIT1", "Jy", "");
        cards.string("TTYPE2", "it's", "");
        let got = lines(cards);
        // Section 4.2.2 / 4.2.3: logical and integer values end in column 30.
        assert_eq!(got[0].trim_end(), "SIMPLE  =                    T");
        assert_eq!(
            got[1].trim_end(),
            "NAXIS1  =                   57 / bytes per row"
        );
        // Section 4.2.1.1: quote in column 11, at least 8 characters, '' for '.
        assert_eq!(got[2].trim_end(), "TUNIT1  = 'Jy      '");
        assert_eq!(got[3].trim_end(), "TTYPE2  = 'it''s   '");
        assert!(got.iter().all(|c| c.len() == 80));
    }

    #[test]
    fn long_strings_continue_without_splitting_a_doubled_quote() {
        let value = format!("{}'{}", "a".repeat(66), "b".repeat(80));
        let mut cards = Cards::default();
        cards.long_string("NOTE", &value);
        let got = lines(cards);
        assert_eq!(got.len(), 3);
        assert_eq!(
            got[0].trim_end(),
            format!("NOTE    = '{}&'", "a".repeat(66))
        );
        assert_eq!(got[1], format!("CONTINUE  '''{}&'", "b".repeat(65)));
        assert_eq!(got[2].trim_end(), format!("CONTINUE  '{}'", "b".repeat(15)));
        let joined: String = got
            .iter()
            .map(|c| {
                let inner = &c.trim_end()[11..c.trim_end().len() - 1];
                inner.strip_suffix('&').unwrap_or(inner).replace("''", "'")
            })
            .collect();
        assert_eq!(joined, value);
    }

    #[test]
    fn commentary_wraps_at_72_characters() {
        let mut cards = Cards::default();
        cards.commentary("HISTORY", &"x".repeat(100));
        let got = lines(cards);
        assert_eq!(got.len(), 2);
        assert_eq!(got[0], format!("HISTORY {}", "x".repeat(72)));
        assert_eq!(got[1].trim_end(), format!("HISTORY {}", "x".repeat(28)));
    }

    #[test]
    fn reserved_and_malformed_keywords_are_refused() {
        assert!(is_reserved("TFORM12"));
        assert!(is_reserved("NAXIS2"));
        assert!(is_reserved("EXTNAME"));
        assert!(!is_reserved("TFORMAT"));
        assert!(!is_reserved("ORIGIN"));
        let mut cards = Cards::default();
        let path = Path::new("x.fits");
        assert!(extra_cards(path, &mut cards, "origin", "x").is_err());
        assert!(extra_cards(path, &mut cards, "LONGKEYWORD", "x").is_err());
        assert!(extra_cards(path, &mut cards, "TTYPE1", "x").is_err());
        assert!(extra_cards(path, &mut cards, "ORIGIN", "caf\u{e9}").is_err());
        assert!(cards.bytes.is_empty());
        extra_cards(path, &mut cards, "ORIGIN", "fluxloom").unwrap();
        assert_eq!(lines(cards)[0].trim_end(), "ORIGIN  = 'fluxloom'");
    }

    #[test]
    fn unsigned_values_are_stored_offset_by_tzero() {
        // Section 7.3.4: stored = value - TZERO.
        assert_eq!(stored_value(Kind::U64, 0), i64::MIN);
        assert_eq!(stored_value(Kind::U64, u64::MAX.into()), i64::MAX);
        assert_eq!(stored_value(Kind::U32, 0), i64::from(i32::MIN));
        assert_eq!(
            stored_value(Kind::U32, u32::MAX.into()),
            i64::from(i32::MAX)
        );
        assert_eq!(stored_value(Kind::I16, -5), -5);
    }
}
