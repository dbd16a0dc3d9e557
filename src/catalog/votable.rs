//! [`read_votable`]: a streaming reader for one TABLE of a VOTable document.
//!
//! The document is parsed as it is read (with `quick_xml`): the FIELDs of the
//! chosen TABLE become the Arrow schema, then its rows are decoded batch by
//! batch, [`VotableOptions::batch_rows`] rows at a time, from TABLEDATA, BINARY
//! or BINARY2 (base64 STREAM). What is implemented, by section of IVOA VOTable 1.4:
//!
//! - 3 / 4.1: the TABLE is chosen by its position among all TABLE elements of
//!   the document, in document order, whatever RESOURCE holds it.
//! - 4.2 FIELD: `name` (else `ID`, else `field<n>`), `datatype`, `arraysize`,
//!   `unit` and `ucd` (kept in the Arrow field metadata under `"unit"` and
//!   `"ucd"`), and `VALUES/@null`.
//! - 2.1 datatypes: `boolean` to Boolean, `unsignedByte` to UInt8, `short` to
//!   Int16, `int` to Int32, `long` to Int64, `float` to Float32, `double` to
//!   Float64, `char` and `unicodeChar` to Utf8. `bit` fields are left out of
//!   the output (their bytes are skipped). `floatComplex` and `doubleComplex` are
//!   refused with an error naming the field.
//! - 2.2 arraysize: for `char` / `unicodeChar` the whole array is one string
//!   (fixed `n`, or variable `*` / `n*`); one-dimensional strings only. For other
//!   types a fixed size `n > 1` (or `n1xn2...`, flattened) gives a
//!   FixedSizeList; variable-length numeric arrays are refused.
//! - 5.1 TABLEDATA: one `TD` per FIELD in each `TR`; an empty `TD` is null for
//!   every type; `NaN` is null for floats; booleans read `T F 1 0 true false`
//!   (any case) and `?` as null; integers may be written in hexadecimal `0x...`;
//!   array cells hold space-separated values.
//! - 5.4 BINARY and 5.5 BINARY2: a base64 STREAM of rows, values big-endian,
//!   variable-length arrays preceded by a 4-byte count; BINARY2 rows start with
//!   a null bitmask of `ceil(nfields / 8)` bytes, first field in the high bit.
//!   Fixed-length strings stop at their first NUL.
//! - 6.1 null values: `VALUES/@null` marks nulls in integer (and float and
//!   string) columns in every serialization; NaN floats are null.
//!
//! The FITS and PARQUET serializations, remote streams (`STREAM/@href`) and
//! tables that borrow another table's FIELDs (`TABLE/@ref`) are refused by name,
//! and so are gzip-compressed and UTF-16 documents. Array sizes are capped at
//! [`limits::MAX_CELL_ELEMENTS`] elements per cell, and batches hold fewer rows
//! when rows hold many values ([`limits::MAX_BATCH_VALUES`]).
//!
//! ```no_run
//! use fluxloom::catalog::votable::{VotableOptions, read_votable};
//!
//! let options = VotableOptions { table_index: 0, batch_rows: 65_536 };
//! let table = read_votable(std::path::Path::new("field.vot"), &options)?;
//! println!("columns: {:?}", table.schema.fields().iter().map(|f| f.name()).collect::<Vec<_>>());
//! let batches = table.collect_all()?;
//! # Ok::<(), fluxloom::Error>(())
//! ```

use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::{
    ArrayRef, BooleanArray, FixedSizeListArray, Float32Array, Float64Array, Int16Array, Int32Array,
    Int64Array, RecordBatch, RecordBatchOptions, StringArray, UInt8Array,
};
use arrow::buffer::NullBuffer;
use arrow::datatypes::{DataType, Field, Metadata, Schema, SchemaRef};
use base64::Engine as _;
use base64::engine::general_purpose::STANDARD as BASE64;
use quick_xml::Reader;
use quick_xml::events::{BytesStart, Event};

use super::{CatalogBatches, gzip, limits};
use crate::error::{Error, Result};

/// Which TABLE of a VOTable document to read and how many rows go in one record batch.
#[derive(Debug, Clone)]
pub struct VotableOptions {
    /// Position of the TABLE among all TABLE elements of the document, from 0.
    pub table_index: usize,
    /// Rows per record batch (0 is taken as 1).
    pub batch_rows: usize,
}

/// Opens TABLE `options.table_index` of the VOTable `path` and streams its rows as record batches.
///
/// # Errors
///
/// [`Error::Io`] when the file cannot be read; [`Error::Format`] for malformed
/// XML or text that is not UTF-8 (with the byte position), a missing TABLE,
/// an unsupported FIELD or serialization, bad base64 and truncated data;
/// [`Error::BadValue`] (while iterating) for a TABLEDATA cell that does not
/// parse as its FIELD's datatype.
pub fn read_votable(path: &Path, options: &VotableOptions) -> Result<CatalogBatches> {
    super::check_regular_file(path)?;
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let mut input = BufReader::new(file);
    check_encoding(path, input.fill_buf().map_err(|e| Error::io(path, e))?)?;
    let mut xml = Xml {
        reader: Reader::from_reader(input),
        buf: Vec::new(),
        path: path.to_path_buf(),
        depth: 0,
    };
    let (specs, data) = find_table(&mut xml, options.table_index)?;
    let mut columns = Vec::with_capacity(specs.len());
    for (i, spec) in specs.into_iter().enumerate() {
        columns.push(Column::from_spec(spec, i, path)?);
    }
    let schema: SchemaRef = Arc::new(Schema::new(
        columns
            .iter()
            .filter_map(Column::arrow_field)
            .collect::<Vec<_>>(),
    ));
    let values_per_row: usize = columns.iter().map(Column::values_per_row).sum();
    let batch_rows = options
        .batch_rows
        .min(limits::MAX_BATCH_VALUES / values_per_row.max(1))
        .max(1);
    let batches = TableBatches {
        xml,
        schema: schema.clone(),
        columns,
        table: options.table_index,
        data,
        batch_rows,
        rows_read: 0,
        done: false,
        checked_end: false,
        cell: String::new(),
    };
    Ok(CatalogBatches {
        path: path.to_path_buf(),
        schema,
        batches: Box::new(batches),
    })
}

/// Refuses a document that is gzip-compressed or UTF-16 encoded, from its first bytes.
fn check_encoding(path: &Path, head: &[u8]) -> Result<()> {
    let what = if gzip::is_gzip(head) {
        "is gzip-compressed, expected an uncompressed VOTable (decompress it first)"
    } else if head.starts_with(&[0xFF, 0xFE])
        || head.starts_with(&[0xFE, 0xFF])
        || head.starts_with(&[b'<', 0])
        || head.starts_with(&[0, b'<'])
    {
        "is UTF-16 encoded, expected a UTF-8 VOTable (re-encode it as UTF-8)"
    } else {
        return Ok(());
    };
    Err(Error::format(path, what))
}

/// The XML reader over the file, with its event buffer and path.
struct Xml {
    reader: Reader<BufReader<File>>,
    buf: Vec<u8>,
    path: PathBuf,
    /// Elements open at the current position.
    depth: usize,
}

/// Reads the next XML event, turning a parse error into [`Error::Format`] with its byte position.
fn read_event<'b>(
    reader: &mut Reader<BufReader<File>>,
    buf: &'b mut Vec<u8>,
    depth: &mut usize,
    path: &Path,
) -> Result<Event<'b>> {
    buf.clear();
    let event = reader.read_event_into(buf).map_err(|e| {
        Error::format(
            path,
            format!(
                "malformed XML at byte {}: {}",
                reader.error_position(),
                limits::one_line(&e.to_string())
            ),
        )
    })?;
    match event {
        Event::Start(_) => *depth += 1,
        Event::End(_) => *depth = depth.saturating_sub(1),
        _ => {}
    }
    Ok(event)
}

/// Reads the rest of the document after the rows, so that a truncated or
/// malformed end is an error rather than a silent stop.
fn read_to_end(xml: &mut Xml) -> Result<()> {
    loop {
        let event = read_event(&mut xml.reader, &mut xml.buf, &mut xml.depth, &xml.path)?;
        if let Event::Eof = event {
            break;
        }
    }
    if xml.depth > 0 {
        return Err(Error::format(
            &xml.path,
            format!(
                "truncated VOTable: the document ends at byte {} with {} element(s) still open",
                xml.reader.buffer_position(),
                xml.depth
            ),
        ));
    }
    Ok(())
}

/// The error for text that cannot be decoded as UTF-8, ending at byte `pos`.
fn not_utf8(path: &Path, pos: u64) -> Error {
    Error::format(
        path,
        format!("text before byte {pos} is not valid UTF-8, expected a UTF-8 document"),
    )
}

/// What a FIELD element says, before it is checked.
#[derive(Debug, Default)]
struct FieldSpec {
    name: String,
    datatype: String,
    arraysize: Option<String>,
    unit: Option<String>,
    ucd: Option<String>,
    null: Option<String>,
}

/// How the rows of the chosen TABLE are serialized.
#[derive(Debug)]
enum Serialization {
    /// No rows (no DATA, or an empty one).
    Empty,
    /// `TABLEDATA`; the reader is just after its start tag.
    TableData,
    /// A base64 `STREAM` of `BINARY` (`mask: false`) or `BINARY2` (`mask: true`).
    Binary { mask: bool, stream: Base64Stream },
}

/// The attributes of an element as `(local name, unescaped value)` pairs.
fn attributes(
    e: &BytesStart<'_>,
    reader: &Reader<BufReader<File>>,
    path: &Path,
) -> Result<Vec<(String, String)>> {
    let pos = reader.buffer_position();
    let mut out = Vec::new();
    for attr in e.attributes() {
        let attr = attr.map_err(|err| {
            Error::format(
                path,
                format!(
                    "malformed XML before byte {pos}: {}",
                    limits::one_line(&err.to_string())
                ),
            )
        })?;
        let key = std::str::from_utf8(attr.key.local_name().as_ref())
            .map_err(|_| not_utf8(path, pos))?
            .to_string();
        let value = attr
            .decode_and_unescape_value(reader.decoder())
            .map_err(|err| {
                Error::format(
                    path,
                    format!(
                        "malformed XML before byte {pos}: {}",
                        limits::one_line(&err.to_string())
                    ),
                )
            })?
            .into_owned();
        out.push((key, value));
    }
    Ok(out)
}

/// Reads up to the DATA of TABLE `index`, returning its FIELDs and serialization.
fn find_table(xml: &mut Xml, index: usize) -> Result<(Vec<FieldSpec>, Serialization)> {
    let path = xml.path.clone();
    let mut tables_seen = 0usize;
    let mut root_seen = false;
    let mut in_table = false;
    let mut in_field = false;
    let mut in_data = false;
    let mut fields: Vec<FieldSpec> = Vec::new();
    loop {
        let event = read_event(&mut xml.reader, &mut xml.buf, &mut xml.depth, &path)?;
        let (start, empty) = match event {
            Event::Start(e) => (e, false),
            Event::Empty(e) => (e, true),
            Event::End(e) => {
                match e.local_name().as_ref() {
                    b"TABLE" if in_table => return Ok((fields, Serialization::Empty)),
                    b"FIELD" => in_field = false,
                    b"DATA" => in_data = false,
                    _ => {}
                }
                continue;
            }
            Event::Eof => {
                let pos = xml.reader.buffer_position();
                let message = if !root_seen {
                    format!(
                        "not a VOTable: the document ends at byte {pos} without a VOTABLE element"
                    )
                } else if in_table {
                    format!(
                        "truncated VOTable: the document ends at byte {pos} inside TABLE {index}"
                    )
                } else {
                    format!(
                        "no TABLE with index {index}: the document has {tables_seen} TABLE element(s), counted from 0"
                    )
                };
                return Err(Error::format(&path, message));
            }
            _ => continue,
        };
        let name = start.local_name().as_ref().to_vec();
        if !root_seen {
            if name != b"VOTABLE" {
                return Err(Error::format(
                    &path,
                    format!(
                        "not a VOTable: the root element is <{}>, expected <VOTABLE>",
                        String::from_utf8_lossy(&name)
                    ),
                ));
            }
            root_seen = true;
            continue;
        }
        match name.as_slice() {
            b"TABLE" => {
                if tables_seen == index {
                    let reference = attributes(&start, &xml.reader, &path)?
                        .into_iter()
                        .find(|(k, _)| k == "ref");
                    if let Some((_, target)) = reference {
                        return Err(Error::format(
                            &path,
                            format!(
                                "TABLE {index} refers to another table (ref=\"{target}\") for its FIELDs, which is not supported; expected a TABLE with its own FIELDs"
                            ),
                        ));
                    }
                    if empty {
                        return Ok((fields, Serialization::Empty));
                    }
                    in_table = true;
                }
                tables_seen += 1;
            }
            b"FIELD" if in_table => {
                let mut spec = FieldSpec::default();
                let mut id = String::new();
                for (key, value) in attributes(&start, &xml.reader, &path)? {
                    match key.as_str() {
                        "name" => spec.name = value,
                        "ID" => id = value,
                        "datatype" => spec.datatype = value,
                        "arraysize" => spec.arraysize = Some(value),
                        "unit" => spec.unit = Some(value),
                        "ucd" => spec.ucd = Some(value),
                        _ => {}
                    }
                }
                if spec.name.is_empty() {
                    spec.name = if id.is_empty() {
                        format!("field{}", fields.len() + 1)
                    } else {
                        id
                    };
                }
                fields.push(spec);
                in_field = !empty;
            }
            b"VALUES" if in_field => {
                let null = attributes(&start, &xml.reader, &path)?
                    .into_iter()
                    .find(|(k, _)| k == "null")
                    .map(|(_, v)| v);
                if let Some(last) = fields.last_mut() {
                    last.null = null;
                }
            }
            b"TABLEDATA" if in_table => {
                let data = if empty {
                    Serialization::Empty
                } else {
                    Serialization::TableData
                };
                return Ok((fields, data));
            }
            b"BINARY" | b"BINARY2" if in_table => {
                let mask = name == b"BINARY2";
                if empty {
                    return Ok((fields, Serialization::Empty));
                }
                let data = open_stream(xml, index, mask)?;
                return Ok((fields, data));
            }
            b"DATA" if in_table => in_data = !empty,
            b"INFO" => {}
            other if in_data => {
                return Err(Error::format(
                    &path,
                    format!(
                        "DATA of TABLE {index} is in the {} serialization, expected TABLEDATA, BINARY or BINARY2",
                        String::from_utf8_lossy(other)
                    ),
                ));
            }
            _ => {}
        }
    }
}

/// Reads from just inside BINARY / BINARY2 to the start of its base64 STREAM.
fn open_stream(xml: &mut Xml, table: usize, mask: bool) -> Result<Serialization> {
    let path = xml.path.clone();
    loop {
        let event = read_event(&mut xml.reader, &mut xml.buf, &mut xml.depth, &path)?;
        let (start, empty) = match event {
            Event::Start(e) => (e, false),
            Event::Empty(e) => (e, true),
            Event::End(_) => return Ok(Serialization::Empty),
            Event::Eof => {
                return Err(Error::format(
                    &path,
                    format!(
                        "truncated VOTable: the document ends at byte {} inside TABLE {table}",
                        xml.reader.buffer_position()
                    ),
                ));
            }
            _ => continue,
        };
        if start.local_name().as_ref() != b"STREAM" {
            continue;
        }
        for (key, value) in attributes(&start, &xml.reader, &path)? {
            let refused = match key.as_str() {
                "href" => Some(format!("a remote STREAM (href=\"{value}\")")),
                "encoding" if value != "base64" => Some(format!("STREAM encoding \"{value}\"")),
                _ => None,
            };
            if let Some(what) = refused {
                return Err(Error::format(
                    &path,
                    format!("TABLE {table} has {what}, expected an inline base64 STREAM"),
                ));
            }
        }
        let stream = Base64Stream {
            ended: empty,
            ..Base64Stream::default()
        };
        return Ok(Serialization::Binary { mask, stream });
    }
}

/// Bytes decoded from a base64 STREAM, filled from the XML as rows need them.
#[derive(Debug, Default)]
struct Base64Stream {
    /// Base64 characters not yet decoded (fewer than 4 after each fill).
    pending: Vec<u8>,
    /// Decoded bytes; those before `pos` are consumed.
    bytes: Vec<u8>,
    pos: usize,
    /// Bytes decoded so far, for messages.
    total: u64,
    /// `</STREAM>` has been read.
    ended: bool,
}

impl Base64Stream {
    /// Makes `n` bytes available; `false` if the stream ends first.
    fn fill(&mut self, n: usize, xml: &mut Xml, table: usize) -> Result<bool> {
        while self.bytes.len() - self.pos < n && !self.ended {
            let event = read_event(&mut xml.reader, &mut xml.buf, &mut xml.depth, &xml.path)?;
            match event {
                Event::Text(t) => self
                    .pending
                    .extend(t.iter().filter(|b| !b.is_ascii_whitespace())),
                Event::CData(t) => self
                    .pending
                    .extend(t.iter().filter(|b| !b.is_ascii_whitespace())),
                Event::End(_) => self.ended = true,
                Event::Eof => {
                    return Err(Error::format(
                        &xml.path,
                        format!(
                            "truncated VOTable: the document ends at byte {} inside the STREAM of TABLE {table}",
                            xml.reader.buffer_position()
                        ),
                    ));
                }
                _ => continue,
            }
            let usable = if self.ended {
                self.pending.len()
            } else {
                self.pending.len() / 4 * 4
            };
            if self.pos > 0 {
                self.bytes.drain(..self.pos);
                self.pos = 0;
            }
            let before = self.bytes.len();
            BASE64
                .decode_vec(&self.pending[..usable], &mut self.bytes)
                .map_err(|e| {
                    Error::format(
                        &xml.path,
                        format!(
                            "STREAM of TABLE {table} is not valid base64 before byte {}: {e}",
                            xml.reader.buffer_position()
                        ),
                    )
                })?;
            self.total += (self.bytes.len() - before) as u64;
            self.pending.drain(..usable);
        }
        Ok(self.bytes.len() - self.pos >= n)
    }

    /// Takes the next `n` bytes, which [`Base64Stream::fill`] made available.
    fn take(&mut self, n: usize) -> &[u8] {
        let out = &self.bytes[self.pos..self.pos + n];
        self.pos += n;
        out
    }
}

/// A VOTable element datatype that maps to an Arrow primitive or Boolean (VOTable 1.4, 2.1).
#[derive(Debug, Clone, Copy, PartialEq)]
enum Prim {
    Bool,
    U8,
    I16,
    I32,
    I64,
    F32,
    F64,
}

impl Prim {
    /// Bytes per value in BINARY / BINARY2.
    fn size(self) -> usize {
        match self {
            Prim::Bool | Prim::U8 => 1,
            Prim::I16 => 2,
            Prim::I32 | Prim::F32 => 4,
            Prim::I64 | Prim::F64 => 8,
        }
    }

    /// The Arrow type.
    fn arrow(self) -> DataType {
        match self {
            Prim::Bool => DataType::Boolean,
            Prim::U8 => DataType::UInt8,
            Prim::I16 => DataType::Int16,
            Prim::I32 => DataType::Int32,
            Prim::I64 => DataType::Int64,
            Prim::F32 => DataType::Float32,
            Prim::F64 => DataType::Float64,
        }
    }

    /// What a cell should hold, for error messages.
    fn expected(self) -> &'static str {
        match self {
            Prim::Bool => "a boolean (T, F, 1, 0, true, false or ?)",
            Prim::U8 => "an integer from 0 to 255 (unsignedByte)",
            Prim::I16 => "a 16-bit integer (short)",
            Prim::I32 => "a 32-bit integer (int)",
            Prim::I64 => "a 64-bit integer (long)",
            Prim::F32 => "a number (float)",
            Prim::F64 => "a number (double)",
        }
    }

    /// Whether the datatype is an integer.
    fn is_integer(self) -> bool {
        matches!(self, Prim::U8 | Prim::I16 | Prim::I32 | Prim::I64)
    }
}

/// An element count from `arraysize`: fixed, or variable (`*`, `n*`).
#[derive(Debug, Clone, Copy, PartialEq)]
enum Size {
    Fixed(usize),
    Variable,
}

/// Parses an `arraysize` (VOTable 1.4, 2.2): `None` is one element; `n1xn2x...` multiplies.
fn parse_arraysize(arraysize: Option<&str>) -> Option<Size> {
    let Some(text) = arraysize else {
        return Some(Size::Fixed(1));
    };
    let mut product = 1usize;
    let mut variable = false;
    for part in text.trim().split('x') {
        if let Some(bound) = part.strip_suffix('*') {
            if !bound.is_empty() {
                bound.parse::<usize>().ok()?;
            }
            variable = true;
        } else {
            product = product.checked_mul(part.parse().ok()?)?;
        }
    }
    Some(if variable {
        Size::Variable
    } else {
        Size::Fixed(product)
    })
}

/// What a column holds.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Kind {
    /// `count` values of a primitive type per row (1: a scalar, more: a FixedSizeList).
    Prim { prim: Prim, count: usize },
    /// One string per row (`char`, or UCS-2 `unicodeChar`).
    Text { unicode: bool, size: Size },
    /// A `bit` field: read past, not output.
    Skip { size: Size },
}

/// The VALUES/@null of a field, parsed for its type.
#[derive(Debug, Default)]
struct Null {
    int: Option<i64>,
    float: Option<f64>,
    text: Option<String>,
}

/// One FIELD: its output values for the current batch and how to decode its cells.
struct Column {
    name: String,
    kind: Kind,
    unit: Option<String>,
    ucd: Option<String>,
    null: Null,
    values: Values,
    /// Row validity for FixedSizeList columns.
    validity: Vec<bool>,
}

impl Column {
    /// Checks a FIELD (the `index`-th, from 0) and prepares its column.
    fn from_spec(spec: FieldSpec, index: usize, path: &Path) -> Result<Self> {
        let field_error = |what: String| {
            Error::format(
                path,
                format!("FIELD {} \"{}\" {what}", index + 1, spec.name),
            )
        };
        let size = parse_arraysize(spec.arraysize.as_deref()).ok_or_else(|| {
            field_error(format!(
                "has arraysize \"{}\", expected n, n*, * or n1xn2...",
                spec.arraysize.clone().unwrap_or_default()
            ))
        })?;
        if let Size::Fixed(n) = size
            && n > limits::MAX_CELL_ELEMENTS
        {
            return Err(field_error(format!(
                "has arraysize \"{}\" ({n} elements), expected at most {} elements per cell",
                spec.arraysize.clone().unwrap_or_default(),
                limits::MAX_CELL_ELEMENTS
            )));
        }
        let prim = match spec.datatype.as_str() {
            "boolean" => Some(Prim::Bool),
            "unsignedByte" => Some(Prim::U8),
            "short" => Some(Prim::I16),
            "int" => Some(Prim::I32),
            "long" => Some(Prim::I64),
            "float" => Some(Prim::F32),
            "double" => Some(Prim::F64),
            _ => None,
        };
        let kind = match (spec.datatype.as_str(), prim, size) {
            (_, Some(_), Size::Variable) => {
                return Err(field_error(format!(
                    "is a variable-length {} array, which is not supported (fixed arraysize only)",
                    spec.datatype
                )));
            }
            (_, Some(prim), Size::Fixed(count)) if count > 0 => Kind::Prim { prim, count },
            ("char" | "unicodeChar", _, _)
                if spec.arraysize.as_deref().is_some_and(|a| a.contains('x')) =>
            {
                return Err(field_error(format!(
                    "is a multidimensional {} array, expected one string per cell",
                    spec.datatype
                )));
            }
            ("char", _, size) => Kind::Text {
                unicode: false,
                size,
            },
            ("unicodeChar", _, size) => Kind::Text {
                unicode: true,
                size,
            },
            ("bit", _, size) => Kind::Skip { size },
            ("floatComplex" | "doubleComplex", _, _) => {
                return Err(field_error(format!(
                    "has datatype {}, which is not supported",
                    spec.datatype
                )));
            }
            (_, Some(_), Size::Fixed(_)) => {
                return Err(field_error(
                    "has arraysize 0, expected at least 1".to_string(),
                ));
            }
            (other, None, _) => {
                return Err(field_error(format!(
                    "has datatype \"{other}\", expected boolean, bit, unsignedByte, short, int, long, char, unicodeChar, float or double"
                )));
            }
        };
        let mut null = Null::default();
        if let Some(text) = spec.null {
            match kind {
                Kind::Prim { prim, .. } if prim.is_integer() => {
                    null.int = Some(parse_int(&text).ok_or_else(|| {
                        field_error(format!("has VALUES null=\"{text}\", expected an integer"))
                    })?);
                }
                Kind::Prim {
                    prim: Prim::F32 | Prim::F64,
                    ..
                } => {
                    null.float = text.trim().parse().ok();
                }
                Kind::Text { .. } => null.text = Some(text),
                _ => {}
            }
        }
        let values = match kind {
            Kind::Prim { prim, .. } => Values::new(prim),
            Kind::Text { .. } | Kind::Skip { .. } => Values::Str(Vec::new()),
        };
        Ok(Column {
            name: spec.name,
            kind,
            unit: spec.unit,
            ucd: spec.ucd,
            null,
            values,
            validity: Vec::new(),
        })
    }

    /// The Arrow field, with `unit` and `ucd` metadata; `None` for a skipped `bit` field.
    fn arrow_field(&self) -> Option<Field> {
        let data_type = match self.kind {
            Kind::Skip { .. } => return None,
            Kind::Text { .. } => DataType::Utf8,
            Kind::Prim { prim, count: 1 } => prim.arrow(),
            Kind::Prim { prim, count } => DataType::FixedSizeList(
                Arc::new(Field::new("item", prim.arrow(), true)),
                count as i32,
            ),
        };
        let metadata = [("unit", &self.unit), ("ucd", &self.ucd)]
            .into_iter()
            .filter_map(|(k, v)| v.clone().map(|v| (k, v)))
            .collect::<Metadata>();
        Some(Field::new(&self.name, data_type, true).with_metadata(metadata))
    }

    /// Values one row adds to the batch (1 for strings and skipped fields).
    fn values_per_row(&self) -> usize {
        match self.kind {
            Kind::Prim { count, .. } => count,
            _ => 1,
        }
    }

    /// Appends a null row.
    fn push_null(&mut self) {
        match self.kind {
            Kind::Skip { .. } => {}
            Kind::Text { .. } => self.values.push_null(),
            Kind::Prim { count, .. } => {
                (0..count).for_each(|_| self.values.push_null());
                if count > 1 {
                    self.validity.push(false);
                }
            }
        }
    }

    /// Appends the text of a TABLEDATA cell; `Err(())` if it does not parse.
    fn push_text(&mut self, text: &str) -> std::result::Result<(), ()> {
        match self.kind {
            Kind::Skip { .. } => Ok(()),
            _ if text.is_empty() => {
                self.push_null();
                Ok(())
            }
            Kind::Text { .. } => {
                let value = (self.null.text.as_deref() != Some(text)).then(|| text.to_string());
                self.values.push_str(value);
                Ok(())
            }
            Kind::Prim { count: 1, .. } => self.values.push_token(text, &self.null),
            Kind::Prim { count, .. } => {
                if text.split_whitespace().count() != count {
                    return Err(());
                }
                for token in text.split_whitespace() {
                    self.values.push_token(token, &self.null)?;
                }
                self.validity.push(true);
                Ok(())
            }
        }
    }

    /// What a TABLEDATA cell of this column should hold, for error messages.
    fn expected(&self) -> String {
        match self.kind {
            Kind::Prim { prim, count: 1 } => prim.expected().to_string(),
            Kind::Prim { prim, count } => {
                format!("{count} space-separated values, each {}", prim.expected())
            }
            _ => "text".to_string(),
        }
    }

    /// Reads this column's value for one BINARY / BINARY2 row; `row` counts from 1.
    fn read_binary(
        &mut self,
        stream: &mut Base64Stream,
        xml: &mut Xml,
        at: (usize, u64),
        is_null: bool,
    ) -> Result<()> {
        let (table, row) = at;
        let mut need = |stream: &mut Base64Stream, n: usize| -> Result<()> {
            if stream.fill(n, xml, table)? {
                return Ok(());
            }
            Err(Error::format(
                &xml.path,
                format!(
                    "truncated BINARY data: the STREAM of TABLE {table} ends after {} bytes, inside row {row} (FIELD \"{}\")",
                    stream.total, self.name
                ),
            ))
        };
        let mut count = |stream: &mut Base64Stream, size: Size| -> Result<usize> {
            Ok(match size {
                Size::Fixed(n) => n,
                Size::Variable => {
                    need(stream, 4)?;
                    let b = stream.take(4);
                    u32::from_be_bytes([b[0], b[1], b[2], b[3]]) as usize
                }
            })
        };
        let (expected, found) = match self.kind {
            Kind::Skip { size } => {
                let bytes = count(stream, size)?.div_ceil(8);
                need(stream, bytes)?;
                stream.take(bytes);
                return Ok(());
            }
            Kind::Text { unicode, size } => {
                let width = if unicode { 2 } else { 1 };
                let bytes = count(stream, size)? * width;
                need(stream, bytes)?;
                let bytes = stream.take(bytes);
                let text = if unicode {
                    let units: Vec<u16> = bytes
                        .chunks_exact(2)
                        .map(|b| u16::from_be_bytes([b[0], b[1]]))
                        .take_while(|&u| u != 0)
                        .collect();
                    String::from_utf16(&units)
                        .map_err(|_| ("UCS-2 text", String::from_utf16_lossy(&units)))
                } else {
                    let end = bytes.iter().position(|&b| b == 0).unwrap_or(bytes.len());
                    String::from_utf8(bytes[..end].to_vec()).map_err(|e| {
                        (
                            "UTF-8 text",
                            String::from_utf8_lossy(e.as_bytes()).into_owned(),
                        )
                    })
                };
                match text {
                    Ok(text) => {
                        let keep = !is_null && self.null.text.as_deref() != Some(text.as_str());
                        self.values.push_str(keep.then_some(text));
                        return Ok(());
                    }
                    Err(bad) => bad,
                }
            }
            Kind::Prim { prim, count } => {
                let size = prim.size();
                need(stream, size * count)?;
                let bytes = stream.take(size * count);
                if count > 1 {
                    self.validity.push(!is_null);
                }
                if is_null {
                    (0..count).for_each(|_| self.values.push_null());
                    return Ok(());
                }
                let bad = bytes
                    .chunks_exact(size)
                    .find_map(|b| self.values.push_be(b, &self.null).err().map(|()| b[0]));
                match bad {
                    None => return Ok(()),
                    Some(byte) => (
                        "a boolean byte (T, F, 1, 0, ?, space or NUL)",
                        format!("byte 0x{byte:02X}"),
                    ),
                }
            }
        };
        Err(Error::BadValue {
            path: xml.path.clone(),
            row,
            column: self.name.clone(),
            expected: expected.to_string(),
            found: limits::one_line(&found),
        })
    }

    /// Takes the values of the current batch as an Arrow array (`None` for a skipped field).
    fn finish(&mut self, path: &Path) -> Result<Option<ArrayRef>> {
        let values = self.values.finish();
        match self.kind {
            Kind::Skip { .. } => Ok(None),
            Kind::Prim { prim, count } if count > 1 => {
                let validity = NullBuffer::from(std::mem::take(&mut self.validity));
                let item = Arc::new(Field::new("item", prim.arrow(), true));
                let list = FixedSizeListArray::try_new(item, count as i32, values, Some(validity))
                    .map_err(|e| Error::columnar(path, e))?;
                Ok(Some(Arc::new(list)))
            }
            _ => Ok(Some(values)),
        }
    }
}

/// Parses a VOTable integer: decimal or `0x` hexadecimal.
fn parse_int(text: &str) -> Option<i64> {
    let text = text.trim();
    match text.strip_prefix("0x").or_else(|| text.strip_prefix("0X")) {
        Some(hex) => i64::from_str_radix(hex, 16).ok(),
        None => text.parse().ok(),
    }
}

/// The values of one column for the current batch.
enum Values {
    Bool(Vec<Option<bool>>),
    U8(Vec<Option<u8>>),
    I16(Vec<Option<i16>>),
    I32(Vec<Option<i32>>),
    I64(Vec<Option<i64>>),
    F32(Vec<Option<f32>>),
    F64(Vec<Option<f64>>),
    Str(Vec<Option<String>>),
}

impl Values {
    /// An empty accumulator for `prim`.
    fn new(prim: Prim) -> Self {
        match prim {
            Prim::Bool => Values::Bool(Vec::new()),
            Prim::U8 => Values::U8(Vec::new()),
            Prim::I16 => Values::I16(Vec::new()),
            Prim::I32 => Values::I32(Vec::new()),
            Prim::I64 => Values::I64(Vec::new()),
            Prim::F32 => Values::F32(Vec::new()),
            Prim::F64 => Values::F64(Vec::new()),
        }
    }

    /// Appends a null.
    fn push_null(&mut self) {
        match self {
            Values::Bool(v) => v.push(None),
            Values::U8(v) => v.push(None),
            Values::I16(v) => v.push(None),
            Values::I32(v) => v.push(None),
            Values::I64(v) => v.push(None),
            Values::F32(v) => v.push(None),
            Values::F64(v) => v.push(None),
            Values::Str(v) => v.push(None),
        }
    }

    /// Appends a string (or null).
    fn push_str(&mut self, value: Option<String>) {
        if let Values::Str(v) = self {
            v.push(value);
        }
    }

    /// Appends one TABLEDATA token; `Err(())` if it does not parse.
    fn push_token(&mut self, token: &str, null: &Null) -> std::result::Result<(), ()> {
        let token = token.trim();
        let int = || -> std::result::Result<Option<i64>, ()> {
            let value = parse_int(token).ok_or(())?;
            Ok((null.int != Some(value)).then_some(value))
        };
        let float = || -> std::result::Result<Option<f64>, ()> {
            let value: f64 = token.parse().map_err(|_| ())?;
            Ok((!value.is_nan() && null.float != Some(value)).then_some(value))
        };
        match self {
            Values::Bool(v) => v.push(match token.to_ascii_lowercase().as_str() {
                "t" | "true" | "1" => Some(true),
                "f" | "false" | "0" => Some(false),
                "?" | "" => None,
                _ => return Err(()),
            }),
            Values::U8(v) => v.push(int()?.map(u8::try_from).transpose().map_err(|_| ())?),
            Values::I16(v) => v.push(int()?.map(i16::try_from).transpose().map_err(|_| ())?),
            Values::I32(v) => v.push(int()?.map(i32::try_from).transpose().map_err(|_| ())?),
            Values::I64(v) => v.push(int()?),
            Values::F32(v) => v.push(float()?.map(|x| x as f32)),
            Values::F64(v) => v.push(float()?),
            Values::Str(v) => v.push(Some(token.to_string())),
        }
        Ok(())
    }

    /// Appends one big-endian BINARY value; `Err(())` for a boolean byte that means nothing.
    fn push_be(&mut self, b: &[u8], null: &Null) -> std::result::Result<(), ()> {
        let keep_int = |raw: i64| null.int != Some(raw);
        let keep_float = |raw: f64| !raw.is_nan() && null.float != Some(raw);
        match self {
            Values::Bool(v) => v.push(match b[0] {
                b'T' | b't' | b'1' => Some(true),
                b'F' | b'f' | b'0' => Some(false),
                b'?' | b' ' | 0 => None,
                _ => return Err(()),
            }),
            Values::U8(v) => v.push(Some(b[0]).filter(|&x| keep_int(i64::from(x)))),
            Values::I16(v) => {
                v.push(Some(i16::from_be_bytes([b[0], b[1]])).filter(|&x| keep_int(i64::from(x))))
            }
            Values::I32(v) => {
                let x = i32::from_be_bytes([b[0], b[1], b[2], b[3]]);
                v.push(Some(x).filter(|&x| keep_int(i64::from(x))));
            }
            Values::I64(v) => {
                let x = i64::from_be_bytes(b[..8].try_into().map_err(|_| ())?);
                v.push(Some(x).filter(|&x| keep_int(x)));
            }
            Values::F32(v) => {
                let x = f32::from_be_bytes([b[0], b[1], b[2], b[3]]);
                v.push(Some(x).filter(|&x| keep_float(f64::from(x))));
            }
            Values::F64(v) => {
                let x = f64::from_be_bytes(b[..8].try_into().map_err(|_| ())?);
                v.push(Some(x).filter(|&x| keep_float(x)));
            }
            Values::Str(_) => {}
        }
        Ok(())
    }

    /// Takes the accumulated values as an Arrow array, leaving the accumulator empty.
    fn finish(&mut self) -> ArrayRef {
        match self {
            Values::Bool(v) => Arc::new(BooleanArray::from(std::mem::take(v))),
            Values::U8(v) => Arc::new(UInt8Array::from(std::mem::take(v))),
            Values::I16(v) => Arc::new(Int16Array::from(std::mem::take(v))),
            Values::I32(v) => Arc::new(Int32Array::from(std::mem::take(v))),
            Values::I64(v) => Arc::new(Int64Array::from(std::mem::take(v))),
            Values::F32(v) => Arc::new(Float32Array::from(std::mem::take(v))),
            Values::F64(v) => Arc::new(Float64Array::from(std::mem::take(v))),
            Values::Str(v) => Arc::new(StringArray::from(std::mem::take(v))),
        }
    }
}

/// Iterator over the record batches of one TABLE.
struct TableBatches {
    xml: Xml,
    schema: SchemaRef,
    columns: Vec<Column>,
    table: usize,
    data: Serialization,
    batch_rows: usize,
    /// Rows read so far, over all batches.
    rows_read: u64,
    done: bool,
    /// The rest of the document has been read (or reading stopped at an error).
    checked_end: bool,
    /// The text of the TD being read.
    cell: String,
}

impl Iterator for TableBatches {
    type Item = Result<RecordBatch>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.done {
            if self.checked_end {
                return None;
            }
            self.checked_end = true;
            return read_to_end(&mut self.xml).err().map(Err);
        }
        let rows = match &self.data {
            Serialization::Empty => Ok(0),
            Serialization::TableData => self.read_tabledata(),
            Serialization::Binary { .. } => self.read_binary(),
        };
        let rows = match rows {
            Ok(rows) => rows,
            Err(e) => {
                self.done = true;
                self.checked_end = true;
                return Some(Err(e));
            }
        };
        if rows < self.batch_rows {
            self.done = true;
        }
        if rows == 0 {
            return self.next();
        }
        Some(self.finish_batch(rows))
    }
}

impl TableBatches {
    /// Builds the record batch of the `rows` rows just read.
    fn finish_batch(&mut self, rows: usize) -> Result<RecordBatch> {
        let mut arrays = Vec::with_capacity(self.columns.len());
        for column in &mut self.columns {
            if let Some(array) = column.finish(&self.xml.path)? {
                arrays.push(array);
            }
        }
        let options = RecordBatchOptions::new().with_row_count(Some(rows));
        RecordBatch::try_new_with_options(self.schema.clone(), arrays, &options)
            .map_err(|e| Error::columnar(&self.xml.path, e))
    }

    /// The error for a TR with the wrong number of TD cells.
    fn cell_count_error(&self, found: usize) -> Error {
        Error::format(
            &self.xml.path,
            format!(
                "row {} of TABLE {} has {found} TD cells, expected {} (one per FIELD)",
                self.rows_read + 1,
                self.table,
                self.columns.len()
            ),
        )
    }

    /// Reads up to `batch_rows` TABLEDATA rows; returns how many were read.
    fn read_tabledata(&mut self) -> Result<usize> {
        let mut rows = 0usize;
        let mut cells = 0usize;
        let mut in_td = false;
        while rows < self.batch_rows {
            let xml = &mut self.xml;
            let event = read_event(&mut xml.reader, &mut xml.buf, &mut xml.depth, &xml.path)?;
            let pos = xml.reader.buffer_position();
            match event {
                Event::Start(e) => match e.local_name().as_ref() {
                    b"TR" => cells = 0,
                    b"TD" => {
                        in_td = true;
                        self.cell.clear();
                    }
                    _ => {}
                },
                Event::Text(t) if in_td => {
                    self.cell
                        .push_str(&t.decode().map_err(|_| not_utf8(&xml.path, pos))?);
                }
                Event::CData(t) if in_td => {
                    self.cell
                        .push_str(&t.decode().map_err(|_| not_utf8(&xml.path, pos))?);
                }
                Event::GeneralRef(r) if in_td => {
                    let malformed = |what: String| {
                        Error::format(
                            &xml.path,
                            format!("malformed XML before byte {pos}: {what}"),
                        )
                    };
                    match r.resolve_char_ref().map_err(|e| malformed(e.to_string()))? {
                        Some(ch) => self.cell.push(ch),
                        None => {
                            let name = r.decode().map_err(|_| not_utf8(&xml.path, pos))?;
                            let text = quick_xml::escape::resolve_predefined_entity(&name)
                                .ok_or_else(|| malformed(format!("unknown entity &{name};")))?;
                            self.cell.push_str(text);
                        }
                    }
                }
                Event::Empty(e) if e.local_name().as_ref() == b"TD" => {
                    if cells >= self.columns.len() {
                        return Err(self.cell_count_error(cells + 1));
                    }
                    self.columns[cells].push_null();
                    cells += 1;
                }
                Event::End(e) => match e.local_name().as_ref() {
                    b"TD" => {
                        in_td = false;
                        if cells >= self.columns.len() {
                            return Err(self.cell_count_error(cells + 1));
                        }
                        let column = &mut self.columns[cells];
                        if column.push_text(&self.cell).is_err() {
                            return Err(Error::BadValue {
                                path: self.xml.path.clone(),
                                row: self.rows_read + 1,
                                column: column.name.clone(),
                                expected: column.expected(),
                                found: limits::one_line(&self.cell),
                            });
                        }
                        cells += 1;
                    }
                    b"TR" => {
                        if cells != self.columns.len() {
                            return Err(self.cell_count_error(cells));
                        }
                        rows += 1;
                        self.rows_read += 1;
                    }
                    b"TABLEDATA" => {
                        self.data = Serialization::Empty;
                        break;
                    }
                    _ => {}
                },
                Event::Eof => {
                    return Err(Error::format(
                        &self.xml.path,
                        format!(
                            "truncated VOTable: the document ends at byte {pos} inside the TABLEDATA of TABLE {}",
                            self.table
                        ),
                    ));
                }
                _ => {}
            }
        }
        Ok(rows)
    }

    /// Reads up to `batch_rows` BINARY / BINARY2 rows; returns how many were read.
    fn read_binary(&mut self) -> Result<usize> {
        let Serialization::Binary { mask, stream } = &mut self.data else {
            return Ok(0);
        };
        let mask_bytes = if *mask {
            self.columns.len().div_ceil(8)
        } else {
            0
        };
        let mut nulls = vec![0u8; mask_bytes];
        let mut rows = 0usize;
        while rows < self.batch_rows {
            if !stream.fill(1, &mut self.xml, self.table)? {
                break;
            }
            let row = self.rows_read + 1;
            if mask_bytes > 0 {
                if !stream.fill(mask_bytes, &mut self.xml, self.table)? {
                    return Err(Error::format(
                        &self.xml.path,
                        format!(
                            "truncated BINARY2 data: the STREAM of TABLE {} ends after {} bytes, inside the null mask of row {row}",
                            self.table, stream.total
                        ),
                    ));
                }
                nulls.copy_from_slice(stream.take(mask_bytes));
            }
            for (i, column) in self.columns.iter_mut().enumerate() {
                let is_null = mask_bytes > 0 && nulls[i / 8] & (0x80 >> (i % 8)) != 0;
                column.read_binary(stream, &mut self.xml, (self.table, row), is_null)?;
            }
            rows += 1;
            self.rows_read += 1;
        }
        Ok(rows)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn arraysize_reads_fixed_variable_and_products() {
        assert_eq!(parse_arraysize(None), Some(Size::Fixed(1)));
        assert_eq!(parse_arraysize(Some("3")), Some(Size::Fixed(3)));
        assert_eq!(parse_arraysize(Some("2x3")), Some(Size::Fixed(6)));
        assert_eq!(parse_arraysize(Some("*")), Some(Size::Variable));
        assert_eq!(parse_arraysize(Some("12*")), Some(Size::Variable));
        assert_eq!(parse_arraysize(Some("2x*")), Some(Size::Variable));
        assert_eq!(parse_arraysize(Some("two")), None);
        assert_eq!(parse_arraysize(Some("")), None);
    }

    #[test]
    fn integers_read_decimal_and_hexadecimal() {
        assert_eq!(parse_int(" -42 "), Some(-42));
        assert_eq!(parse_int("+7"), Some(7));
        assert_eq!(parse_int("0x1F"), Some(31));
        assert_eq!(parse_int("1.5"), None);
        assert_eq!(parse_int("NaN"), None);
    }

    #[test]
    fn tabledata_tokens_apply_null_rules() {
        let null = Null {
            int: Some(-1),
            ..Null::default()
        };
        let mut ints = Values::new(Prim::I16);
        for token in ["5", "-1", "0x10"] {
            ints.push_token(token, &null).unwrap();
        }
        assert_eq!(ints.push_token("40000", &null), Err(()));
        assert_eq!(ints.push_token("abc", &null), Err(()));
        let array = ints.finish();
        let array = array.as_any().downcast_ref::<Int16Array>().unwrap();
        assert_eq!(array.iter().collect::<Vec<_>>(), [Some(5), None, Some(16)]);

        let mut flags = Values::new(Prim::Bool);
        for token in ["T", "false", "1", "?", "TRUE", "0"] {
            flags.push_token(token, &Null::default()).unwrap();
        }
        assert_eq!(flags.push_token("yes", &Null::default()), Err(()));
        let array = flags.finish();
        let array = array.as_any().downcast_ref::<BooleanArray>().unwrap();
        let expected = [
            Some(true),
            Some(false),
            Some(true),
            None,
            Some(true),
            Some(false),
        ];
        assert_eq!(array.iter().collect::<Vec<_>>(), expected);

        let mut floats = Values::new(Prim::F64);
        for token in ["NaN", "-Inf", "2.5e3"] {
            floats.push_token(token, &Null::default()).unwrap();
        }
        let array = floats.finish();
        let array = array.as_any().downcast_ref::<Float64Array>().unwrap();
        assert_eq!(
            array.iter().collect::<Vec<_>>(),
            [None, Some(f64::NEG_INFINITY), Some(2500.0)]
        );
    }

    #[test]
    fn binary_values_are_big_endian() {
        let null = Null {
            int: Some(-999),
            ..Null::default()
        };
        let mut ints = Values::new(Prim::I32);
        ints.push_be(&7i32.to_be_bytes(), &null).unwrap();
        ints.push_be(&(-999i32).to_be_bytes(), &null).unwrap();
        let array = ints.finish();
        let array = array.as_any().downcast_ref::<Int32Array>().unwrap();
        assert_eq!(array.iter().collect::<Vec<_>>(), [Some(7), None]);

        let mut flags = Values::new(Prim::Bool);
        assert_eq!(flags.push_be(b"x", &Null::default()), Err(()));
    }
}
