//! [`read_fits`]: a streaming reader for FITS binary tables (BINTABLE extensions).
//!
//! It walks the header-data units (HDUs) of a file, skipping each by its data
//! size, and decodes the chosen BINTABLE into Arrow record batches of
//! [`FitsOptions::batch_rows`] rows, reading one batch of rows at a time.
//! Files starting with the gzip magic bytes are decompressed on the fly (every
//! member of a multi-member file; the gzip stream is read to its end so that
//! its CRC-32 and length trailers are checked).
//!
//! Header sizes are checked before anything is allocated: the data an HDU
//! declares must fit in the file (for gzip, in the most its compressed bytes can
//! expand to, [`limits::DEFLATE_MAX_RATIO`]), row widths are summed with checked
//! arithmetic, a header must start with `SIMPLE` or `XTENSION` and end within
//! [`limits::MAX_HEADER_BLOCKS`] blocks, and the rows read must match `NAXIS2`.
//!
//! What is implemented, by section of the FITS Standard 4.0:
//!
//! - 3.1-3.3 and 4.1-4.2: 2880-byte blocks of 80-character header cards,
//!   keyword / value indicator / value / comment, string values with `''`
//!   escapes, logical, integer and floating-point values (`E` or `D` exponent).
//!   `CONTINUE` long strings are not joined.
//! - 4.4.1: data size `|BITPIX| / 8 * GCOUNT * (PCOUNT + NAXIS1 * ... * NAXISn)`
//!   (random groups: without `NAXIS1`), padded to whole blocks, used to skip HDUs.
//! - 7.3.1-7.3.3: the BINTABLE header (`NAXIS1` bytes per row, `NAXIS2` rows,
//!   `TFIELDS`, `TTYPEn`, `TFORMn`, `TUNITn`, `TNULLn`, `TSCALn`, `TZEROn`) and
//!   the big-endian field layout of each row.
//! - 7.3.4 / table 19: the unsigned conventions `TZERO = -128` for `B` (to Int8),
//!   `2^15` for `I`, `2^31` for `J` and `2^63` for `K` (to UInt16 / UInt32 / UInt64).
//!
//! Column mapping (`r` is the repeat count; `r > 1` gives a FixedSizeList of the type):
//!
//! | TFORM | Arrow | nulls |
//! | --- | --- | --- |
//! | `L` | Boolean | byte 0 |
//! | `X` | UInt8 holding `ceil(r / 8)` bytes of bits, first bit in the high bit | none |
//! | `B` `I` `J` `K` | UInt8, Int16, Int32, Int64 (or the unsigned conventions above) | `TNULLn` |
//! | `E` `D` | Float32, Float64 | NaN |
//! | any integer or float with other `TSCALn` / `TZEROn` | Float64 = raw * TSCAL + TZERO | as raw |
//! | `rA` | Utf8: up to the first NUL, trailing spaces removed; never null | none |
//!
//! `TNULLn` is compared with the stored value, before scaling. Columns with
//! repeat 0 take no room and are left out. `TDIMn` is ignored (arrays stay flat).
//! Complex (`C`, `M`) and variable-length (`P`, `Q`) columns are refused with an
//! error naming the column. Every Arrow field is nullable; a non-empty `TUNITn`
//! is kept in the field metadata under `"unit"`.
//!
//! ```no_run
//! use fluxloom::catalog::fits::{FitsOptions, read_fits};
//!
//! let options = FitsOptions { hdu: None, batch_rows: 65_536 };
//! let table = read_fits(std::path::Path::new("field.fits"), &options)?;
//! for batch in table.batches {
//!     println!("{} rows", batch?.num_rows());
//! }
//! # Ok::<(), fluxloom::Error>(())
//! ```

use std::fs::File;
use std::io::{self, BufReader, Read, Seek};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use super::gzip::{self, MultiGzDecoder};
use super::{CatalogBatches, DeclaredRows, limits};
use crate::error::{Error, Result};
use arrow::array::{
    ArrayRef, BooleanArray, FixedSizeListArray, PrimitiveArray, RecordBatch, RecordBatchOptions,
    StringArray,
};
use arrow::datatypes::{
    ArrowPrimitiveType, DataType, Field, Float32Type, Float64Type, Int8Type, Int16Type, Int32Type,
    Int64Type, Schema, SchemaRef, UInt8Type, UInt16Type, UInt32Type, UInt64Type,
};

/// Size in bytes of a FITS block (FITS Standard 4.0, section 3.1).
const BLOCK_BYTES: usize = 2880;
/// Size in bytes of one header card (FITS Standard 4.0, section 4.1).
const CARD_BYTES: usize = 80;

/// Which HDU of a FITS file to read and how many rows go in one record batch.
#[derive(Debug, Clone)]
pub struct FitsOptions {
    /// `None`: the first BINTABLE extension; `Some(n)`: HDU `n`, the primary HDU being 0.
    pub hdu: Option<usize>,
    /// Rows per record batch (0 is taken as 1).
    pub batch_rows: usize,
}

/// Opens the BINTABLE of `path` chosen by `options` and streams its rows as record batches.
///
/// # Errors
///
/// [`Error::Io`] when the file cannot be read; [`Error::Format`] for an empty or
/// truncated file, a header without `END`, a missing BINTABLE, or an unsupported
/// column; [`Error::BadValue`] (while iterating) for a logical byte other than
/// `T`, `F` or 0 and for text that is not UTF-8.
pub fn read_fits(path: &Path, options: &FitsOptions) -> Result<CatalogBatches> {
    super::check_regular_file(path)?;
    let mut source = Source::open(path).map_err(|e| Error::io(path, e))?;
    let mut kinds: Vec<String> = Vec::new();
    loop {
        let index = kinds.len();
        let Some(header) = read_header(&mut source, path, index)? else {
            return Err(no_table_error(path, options.hdu, &kinds));
        };
        let kind = hdu_kind(&header, path, index)?;
        let wanted = match options.hdu {
            None => kind == "BINTABLE",
            Some(n) => index == n,
        };
        if wanted {
            if kind != "BINTABLE" {
                return Err(Error::format(
                    path,
                    format!("HDU {index} is a {kind} HDU, expected a BINTABLE extension"),
                ));
            }
            return open_table(source, path, index, &header, options.batch_rows.max(1));
        }
        let data_bytes = data_size(&header, path, index)?;
        let padded = data_bytes.div_ceil(BLOCK_BYTES as u64) * BLOCK_BYTES as u64;
        let skipped = source
            .skip(padded)
            .map_err(|e| source.read_error(path, e))?;
        if skipped < data_bytes {
            return Err(Error::format(
                path,
                format!(
                    "truncated FITS file: data of HDU {index} has {skipped} bytes, expected {data_bytes}"
                ),
            ));
        }
        kinds.push(kind);
    }
}

/// The error for a file that ended before the wanted HDU was found.
fn no_table_error(path: &Path, wanted: Option<usize>, kinds: &[String]) -> Error {
    if kinds.is_empty() {
        return Error::format(
            path,
            "empty FITS file: 0 bytes, expected a primary header of 2880-byte blocks",
        );
    }
    let list = kinds
        .iter()
        .enumerate()
        .map(|(i, k)| format!("{i}: {k}"))
        .collect::<Vec<_>>()
        .join(", ");
    let message = match wanted {
        None => format!("no BINTABLE extension: the file has HDUs {list}"),
        Some(n) => format!("no HDU {n}: the file has HDUs {list}"),
    };
    Error::format(path, message)
}

/// The bytes of a FITS file, plain or gzip-compressed, with a count of bytes consumed.
struct Source {
    input: Input,
    /// Bytes consumed from the (decompressed) stream.
    pos: u64,
    /// Length of the file as stored (compressed, for gzip).
    file_len: u64,
    /// The most bytes the stream can yield (see [`limits::stream_bound`]).
    bound: u64,
}

/// The underlying reader.
enum Input {
    Plain(BufReader<File>),
    Gzip(Box<MultiGzDecoder<BufReader<File>>>),
}

impl Source {
    /// Opens `path`, choosing gzip decompression from the first two bytes.
    fn open(path: &Path) -> io::Result<Self> {
        let mut file = File::open(path)?;
        let len = file.metadata()?.len();
        let mut magic = [0u8; 2];
        let is_gzip = len >= 2 && {
            file.read_exact(&mut magic)?;
            file.rewind()?;
            magic == [0x1f, 0x8b]
        };
        let reader = BufReader::new(file);
        let input = if is_gzip {
            Input::Gzip(Box::new(gzip::decoder(reader)))
        } else {
            Input::Plain(reader)
        };
        Ok(Source {
            input,
            pos: 0,
            file_len: len,
            bound: limits::stream_bound(len, is_gzip),
        })
    }

    /// A read error: a broken gzip stream is a format error, anything else an I/O error.
    fn read_error(&self, path: &Path, e: io::Error) -> Error {
        if self.is_gzip() && e.kind() != io::ErrorKind::PermissionDenied {
            Error::format(path, gzip::describe(&e))
        } else {
            Error::io(path, e)
        }
    }

    /// Whether the file is gzip-compressed.
    fn is_gzip(&self) -> bool {
        matches!(self.input, Input::Gzip(_))
    }

    /// Reads a gzip stream to its end, so that every member's trailer is checked.
    fn finish(&mut self) -> io::Result<()> {
        if let Input::Gzip(r) = &mut self.input {
            gzip::drain(r)?;
        }
        Ok(())
    }

    /// Fills `buf` as far as the stream allows; returns the number of bytes read.
    fn read_full(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        let mut filled = 0;
        while filled < buf.len() {
            let n = match &mut self.input {
                Input::Plain(r) => r.read(&mut buf[filled..]),
                Input::Gzip(r) => r.read(&mut buf[filled..]),
            };
            match n {
                Ok(0) => break,
                Ok(n) => filled += n,
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e),
            }
        }
        self.pos += filled as u64;
        Ok(filled)
    }

    /// Skips up to `n` bytes; returns how many were there to skip.
    fn skip(&mut self, n: u64) -> io::Result<u64> {
        let skipped = match &mut self.input {
            Input::Plain(r) => {
                let k = n.min(self.file_len.saturating_sub(self.pos));
                r.seek_relative(k as i64)?;
                k
            }
            Input::Gzip(r) => io::copy(&mut r.take(n), &mut io::sink())?,
        };
        self.pos += skipped;
        Ok(skipped)
    }

    /// The most bytes left: exact for a plain file, a bound for a gzip stream.
    fn remaining(&self) -> u64 {
        self.bound.saturating_sub(self.pos)
    }

    /// The error for an HDU whose declared data cannot be in the file.
    fn too_large(&self, path: &Path, index: usize, expected: u64, dims: &str) -> Error {
        let left = self.remaining();
        let message = if self.is_gzip() {
            format!(
                "data of HDU {index} declares {expected} bytes ({dims}), more than a gzip file of {} bytes can hold (at most {left} more bytes)",
                self.file_len
            )
        } else {
            format!(
                "truncated FITS file: data of HDU {index} has {left} bytes, expected {expected} ({dims})"
            )
        };
        Error::format(path, message)
    }
}

/// A header keyword value (FITS Standard 4.0, section 4.2).
#[derive(Debug, Clone, PartialEq)]
enum Value {
    /// A character string, trailing spaces removed.
    Str(String),
    /// `T` or `F`.
    Logical(bool),
    /// An integer that fits in 64 bits.
    Int(i64),
    /// A floating-point number (or an integer too large for 64 bits).
    Float(f64),
    /// An empty value field.
    Undefined,
    /// Anything else (e.g. a complex number), as written.
    Other(String),
}

impl Value {
    /// The value as a float, if it is a number.
    fn as_f64(&self) -> Option<f64> {
        match self {
            Value::Int(i) => Some(*i as f64),
            Value::Float(f) => Some(*f),
            _ => None,
        }
    }

    /// How the value reads in an error message.
    fn describe(&self) -> String {
        match self {
            Value::Str(s) => format!("'{s}'"),
            Value::Logical(b) => (if *b { "T" } else { "F" }).to_string(),
            Value::Int(i) => i.to_string(),
            Value::Float(f) => f.to_string(),
            Value::Undefined => "no value".to_string(),
            Value::Other(s) => s.clone(),
        }
    }
}

/// Splits one 80-byte card into its keyword and value (FITS Standard 4.0, section 4.1.2).
///
/// Cards without the value indicator `"= "` in bytes 9-10 (COMMENT, HISTORY, END,
/// blank) give `Value::Undefined`. An unterminated string gives `Err`.
fn parse_card(card: &[u8]) -> std::result::Result<(String, Value), String> {
    let keyword = String::from_utf8_lossy(&card[..card.len().min(8)])
        .trim_end()
        .to_string();
    if card.len() < 10 || &card[8..10] != b"= " {
        return Ok((keyword, Value::Undefined));
    }
    let text = String::from_utf8_lossy(&card[10..]);
    let field = text.trim_start();
    if let Some(rest) = field.strip_prefix('\'') {
        let mut value = String::new();
        let mut chars = rest.chars().peekable();
        loop {
            match chars.next() {
                None => {
                    return Err(format!(
                        "keyword {keyword}: string value has no closing quote"
                    ));
                }
                Some('\'') if chars.peek() == Some(&'\'') => {
                    chars.next();
                    value.push('\'');
                }
                Some('\'') => break,
                Some(c) => value.push(c),
            }
        }
        return Ok((keyword, Value::Str(value.trim_end().to_string())));
    }
    let raw = field.split('/').next().unwrap_or("").trim();
    let value = match raw {
        "" => Value::Undefined,
        "T" => Value::Logical(true),
        "F" => Value::Logical(false),
        _ => {
            if let Ok(i) = raw.parse::<i64>() {
                Value::Int(i)
            } else if let Ok(f) = raw.replace(['D', 'd'], "E").parse::<f64>() {
                Value::Float(f)
            } else {
                Value::Other(raw.to_string())
            }
        }
    };
    Ok((keyword, value))
}

/// The keyword/value cards of one HDU header, in order.
#[derive(Debug)]
struct Header {
    cards: Vec<(String, Value)>,
}

impl Header {
    /// The first value of `keyword`, if present.
    fn get(&self, keyword: &str) -> Option<&Value> {
        self.cards
            .iter()
            .find(|(k, _)| k == keyword)
            .map(|(_, v)| v)
    }

    /// The integer value of `keyword`, `default` when absent; other values are an error.
    fn int_or(&self, keyword: &str, default: Option<i64>, path: &Path, hdu: usize) -> Result<i64> {
        match (self.get(keyword), default) {
            (Some(Value::Int(i)), _) => Ok(*i),
            (None, Some(d)) => Ok(d),
            (None, None) => Err(Error::format(
                path,
                format!("header of HDU {hdu} has no {keyword} keyword, expected an integer"),
            )),
            (Some(other), _) => Err(Error::format(
                path,
                format!(
                    "header of HDU {hdu}: {keyword} is {}, expected an integer",
                    other.describe()
                ),
            )),
        }
    }

    /// A required non-negative integer keyword.
    fn count(&self, keyword: &str, path: &Path, hdu: usize) -> Result<u64> {
        let value = self.int_or(keyword, None, path, hdu)?;
        u64::try_from(value).map_err(|_| {
            Error::format(
                path,
                format!("header of HDU {hdu}: {keyword} is {value}, expected 0 or more"),
            )
        })
    }

    /// The string value of `keyword`, trimmed, or "" when absent or not a string.
    fn text(&self, keyword: &str) -> String {
        match self.get(keyword) {
            Some(Value::Str(s)) => s.trim().to_string(),
            _ => String::new(),
        }
    }
}

/// Reads the header of HDU `index`; `None` when the stream ends exactly before it.
fn read_header(source: &mut Source, path: &Path, index: usize) -> Result<Option<Header>> {
    let mut cards = Vec::new();
    let mut block = vec![0u8; BLOCK_BYTES];
    let mut header_bytes = 0usize;
    loop {
        let n = source
            .read_full(&mut block)
            .map_err(|e| source.read_error(path, e))?;
        if n == 0 && header_bytes == 0 {
            if index > 0 {
                return Ok(None);
            }
            return Err(no_table_error(path, None, &[]));
        }
        if n < BLOCK_BYTES {
            return Err(Error::format(
                path,
                format!(
                    "truncated FITS file: header of HDU {index} ends after {} bytes, expected an END card",
                    header_bytes + n
                ),
            ));
        }
        if header_bytes == 0 {
            check_first_card(&block[..CARD_BYTES], path, index)?;
        }
        header_bytes += n;
        if header_bytes > limits::MAX_HEADER_BLOCKS * BLOCK_BYTES {
            return Err(Error::format(
                path,
                format!(
                    "header of HDU {index} has no END card in its first {} blocks of 2880 bytes",
                    limits::MAX_HEADER_BLOCKS
                ),
            ));
        }
        for card in block.chunks_exact(CARD_BYTES) {
            if card.starts_with(b"END") && card[3..].iter().all(|&b| b == b' ') {
                return Ok(Some(Header { cards }));
            }
            let (keyword, value) = parse_card(card)
                .map_err(|m| Error::format(path, format!("header of HDU {index}: {m}")))?;
            if !keyword.is_empty() {
                cards.push((keyword, value));
            }
        }
    }
}

/// Stops at the first card of a header unless it is `SIMPLE` (HDU 0) or
/// `XTENSION` (later HDUs), before any more of the header is read.
fn check_first_card(card: &[u8], path: &Path, index: usize) -> Result<()> {
    let keyword = if index == 0 { "SIMPLE" } else { "XTENSION" };
    if card.starts_with(keyword.as_bytes()) && card[keyword.len()..8].iter().all(|&b| b == b' ') {
        return Ok(());
    }
    let found = String::from_utf8_lossy(&card[..8]);
    let found = if found.trim().is_empty()
        || !card[..8].iter().all(|b| b.is_ascii_graphic() || *b == b' ')
    {
        "no keyword".to_string()
    } else {
        format!("keyword {}", found.trim_end())
    };
    let message = if index == 0 {
        format!("not a FITS file: the first card has {found}, expected SIMPLE = T")
    } else {
        format!("header of HDU {index} starts with {found}, expected XTENSION")
    };
    Err(Error::format(path, message))
}

/// `PRIMARY` for HDU 0 (checked to start with `SIMPLE = T`), else the `XTENSION` value.
fn hdu_kind(header: &Header, path: &Path, index: usize) -> Result<String> {
    let first = header.cards.first();
    if index == 0 {
        return match first {
            Some((k, Value::Logical(true))) if k == "SIMPLE" => Ok("PRIMARY".to_string()),
            _ => Err(Error::format(
                path,
                format!(
                    "not a FITS file: first card is {}, expected SIMPLE = T",
                    first.map_or("missing".to_string(), |(k, v)| format!(
                        "{k} = {}",
                        v.describe()
                    ))
                ),
            )),
        };
    }
    match first {
        Some((k, Value::Str(s))) if k == "XTENSION" => Ok(s.trim().to_string()),
        _ => Err(Error::format(
            path,
            format!("header of HDU {index} does not start with XTENSION, expected an extension"),
        )),
    }
}

/// Data size in bytes of an HDU, without padding (FITS Standard 4.0, section 4.4.1.1).
fn data_size(header: &Header, path: &Path, index: usize) -> Result<u64> {
    let overflow = || {
        Error::format(
            path,
            format!("header of HDU {index}: data size overflows 64 bits"),
        )
    };
    let bitpix = header.int_or("BITPIX", None, path, index)?;
    let naxis = header.count("NAXIS", path, index)?;
    if naxis == 0 {
        return Ok(0);
    }
    let mut axes = Vec::new();
    for n in 1..=naxis {
        axes.push(header.count(&format!("NAXIS{n}"), path, index)?);
    }
    let groups = index == 0 && header.get("GROUPS") == Some(&Value::Logical(true)) && axes[0] == 0;
    let first_axis = usize::from(groups);
    let product = axes[first_axis..]
        .iter()
        .try_fold(1u64, |acc, &a| acc.checked_mul(a))
        .ok_or_else(overflow)?;
    let pcount = u64::try_from(header.int_or("PCOUNT", Some(0), path, index)?).unwrap_or(0);
    let gcount = u64::try_from(header.int_or("GCOUNT", Some(1), path, index)?).unwrap_or(1);
    let bits = bitpix
        .unsigned_abs()
        .checked_mul(gcount)
        .and_then(|b| b.checked_mul(pcount.checked_add(product)?))
        .ok_or_else(overflow)?;
    Ok(bits / 8)
}

/// The stored element type of a BINTABLE column (FITS Standard 4.0, table 18).
#[derive(Debug, Clone, Copy, PartialEq)]
enum Stored {
    Logical,
    Bits,
    U8,
    I16,
    I32,
    I64,
    F32,
    F64,
    Text,
}

impl Stored {
    /// Bytes per element (for `Bits` and `Text`, per repeat unit of 8 bits / 1 character).
    fn size(self) -> usize {
        match self {
            Stored::Logical | Stored::Bits | Stored::U8 | Stored::Text => 1,
            Stored::I16 => 2,
            Stored::I32 | Stored::F32 => 4,
            Stored::I64 | Stored::F64 => 8,
        }
    }
}

/// How stored values turn into column values.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Scaling {
    /// Stored values as they are.
    None,
    /// The unsigned (or, for `B`, signed) offset convention of table 19.
    Offset,
    /// `raw * scale + zero` as Float64.
    Linear { scale: f64, zero: f64 },
}

/// One BINTABLE column: where its bytes are in a row and how to decode them.
#[derive(Debug, Clone)]
struct Column {
    name: String,
    stored: Stored,
    /// Elements per row (for `Bits`, the number of bytes).
    repeat: usize,
    /// Byte offset of the column in a row.
    offset: usize,
    scaling: Scaling,
    tnull: Option<i64>,
    /// The non-empty `TUNITn`.
    unit: Option<String>,
}

impl Column {
    /// Bytes the column takes in a row.
    fn width(&self) -> usize {
        self.repeat * self.stored.size()
    }

    /// The Arrow type of one element.
    fn element_type(&self) -> DataType {
        match (self.stored, self.scaling) {
            (Stored::Logical, _) => DataType::Boolean,
            (Stored::Text, _) => DataType::Utf8,
            (Stored::Bits, _) => DataType::UInt8,
            (_, Scaling::Linear { .. }) => DataType::Float64,
            (Stored::U8, Scaling::Offset) => DataType::Int8,
            (Stored::U8, _) => DataType::UInt8,
            (Stored::I16, Scaling::Offset) => DataType::UInt16,
            (Stored::I16, _) => DataType::Int16,
            (Stored::I32, Scaling::Offset) => DataType::UInt32,
            (Stored::I32, _) => DataType::Int32,
            (Stored::I64, Scaling::Offset) => DataType::UInt64,
            (Stored::I64, _) => DataType::Int64,
            (Stored::F32, _) => DataType::Float32,
            (Stored::F64, _) => DataType::Float64,
        }
    }

    /// The Arrow type of the column: the element type, or a FixedSizeList of it.
    fn data_type(&self) -> DataType {
        let element = self.element_type();
        if self.repeat > 1 && self.stored != Stored::Text {
            DataType::FixedSizeList(
                Arc::new(Field::new("item", element, true)),
                self.repeat as i32,
            )
        } else {
            element
        }
    }
}

/// Splits a TFORM value into repeat count and type letter (FITS Standard 4.0, section 7.3.1).
fn parse_tform(tform: &str) -> Option<(usize, char)> {
    let tform = tform.trim();
    let digits = tform.chars().take_while(char::is_ascii_digit).count();
    let repeat = if digits == 0 {
        1
    } else {
        tform[..digits].parse().ok()?
    };
    let letter = tform[digits..].chars().next()?;
    Some((repeat, letter))
}

/// Builds the columns of a BINTABLE from its header (FITS Standard 4.0, section 7.3.1-7.3.2).
fn table_columns(header: &Header, path: &Path, index: usize, naxis1: usize) -> Result<Vec<Column>> {
    let tfields = header.count("TFIELDS", path, index)?;
    if tfields > 999 {
        return Err(Error::format(
            path,
            format!("header of HDU {index}: TFIELDS is {tfields}, expected 0 to 999"),
        ));
    }
    let mut columns = Vec::new();
    let mut offset = 0usize;
    for n in 1..=tfields {
        let mut name = header.text(&format!("TTYPE{n}"));
        if name.is_empty() {
            name = format!("col{n}");
        }
        let tform = header.text(&format!("TFORM{n}"));
        let unsupported = |what: &str| {
            Error::format(
                path,
                format!("HDU {index}, column {n} \"{name}\": TFORM{n} = '{tform}' is {what}"),
            )
        };
        let (repeat, letter) = parse_tform(&tform).ok_or_else(|| {
            unsupported("not a binary-table format, expected rT with T one of L X B I J K A E D")
        })?;
        let stored = match letter {
            'L' => Stored::Logical,
            'X' => Stored::Bits,
            'B' => Stored::U8,
            'I' => Stored::I16,
            'J' => Stored::I32,
            'K' => Stored::I64,
            'A' => Stored::Text,
            'E' => Stored::F32,
            'D' => Stored::F64,
            'C' | 'M' => return Err(unsupported("a complex column, which is not supported")),
            'P' | 'Q' => {
                return Err(unsupported(
                    "a variable-length array column, which is not supported",
                ));
            }
            _ => {
                return Err(unsupported(
                    "not a binary-table format, expected rT with T one of L X B I J K A E D",
                ));
            }
        };
        let repeat = if stored == Stored::Bits {
            repeat.div_ceil(8)
        } else {
            repeat
        };
        let too_wide = || {
            Error::format(
                path,
                format!(
                    "HDU {index}, column {n} \"{name}\": TFORM{n} = '{tform}' is wider than a row (NAXIS1 = {naxis1} bytes)"
                ),
            )
        };
        let width = repeat.checked_mul(stored.size()).ok_or_else(too_wide)?;
        if width > naxis1 || repeat > i32::MAX as usize {
            return Err(too_wide());
        }
        let scale = header
            .get(&format!("TSCAL{n}"))
            .and_then(Value::as_f64)
            .unwrap_or(1.0);
        let zero = header
            .get(&format!("TZERO{n}"))
            .and_then(Value::as_f64)
            .unwrap_or(0.0);
        let integer = matches!(stored, Stored::U8 | Stored::I16 | Stored::I32 | Stored::I64);
        let offset_zero = match stored {
            Stored::U8 => -128.0,
            Stored::I16 => 32_768.0,
            Stored::I32 => 2_147_483_648.0,
            Stored::I64 => 9_223_372_036_854_775_808.0,
            _ => f64::NAN,
        };
        let scaling = if matches!(stored, Stored::Logical | Stored::Bits | Stored::Text)
            || (scale == 1.0 && zero == 0.0)
        {
            Scaling::None
        } else if integer && scale == 1.0 && zero == offset_zero {
            Scaling::Offset
        } else {
            Scaling::Linear { scale, zero }
        };
        let tnull = match header.get(&format!("TNULL{n}")) {
            Some(Value::Int(v)) if integer => Some(*v),
            _ => None,
        };
        let unit = header.text(&format!("TUNIT{n}"));
        let end = offset.checked_add(width).ok_or_else(too_wide)?;
        let column = Column {
            name,
            stored,
            repeat,
            offset,
            scaling,
            tnull,
            unit: (!unit.is_empty()).then_some(unit),
        };
        offset = end;
        if repeat > 0 {
            columns.push(column);
        }
    }
    if offset > naxis1 {
        return Err(Error::format(
            path,
            format!(
                "header of HDU {index}: the TFORMs add up to {offset} bytes per row, expected at most NAXIS1 = {naxis1}"
            ),
        ));
    }
    Ok(columns)
}

/// Reads the BINTABLE header of HDU `index` and returns the batch stream over its rows.
fn open_table(
    source: Source,
    path: &Path,
    index: usize,
    header: &Header,
    batch_rows: usize,
) -> Result<CatalogBatches> {
    let bitpix = header.int_or("BITPIX", None, path, index)?;
    let naxis = header.int_or("NAXIS", None, path, index)?;
    if bitpix != 8 || naxis != 2 {
        return Err(Error::format(
            path,
            format!(
                "header of HDU {index}: BINTABLE has BITPIX = {bitpix} and NAXIS = {naxis}, expected 8 and 2"
            ),
        ));
    }
    let naxis1 = header.count("NAXIS1", path, index)?;
    let naxis2 = header.count("NAXIS2", path, index)?;
    let expected = naxis1.checked_mul(naxis2).ok_or_else(|| {
        Error::format(
            path,
            format!("header of HDU {index}: data size overflows 64 bits"),
        )
    })?;
    let dims = format!("NAXIS1 {naxis1} x NAXIS2 {naxis2}");
    if source.remaining() < expected {
        return Err(source.too_large(path, index, expected, &dims));
    }
    let naxis1 = usize::try_from(naxis1).map_err(|_| {
        Error::format(
            path,
            format!("header of HDU {index}: NAXIS1 = {naxis1} is too large"),
        )
    })?;
    let columns = table_columns(header, path, index, naxis1)?;
    let fields: Vec<Field> = columns
        .iter()
        .map(|c| {
            let field = Field::new(&c.name, c.data_type(), true);
            match &c.unit {
                Some(unit) => field.with_metadata([("unit", unit.clone())]),
                None => field,
            }
        })
        .collect();
    let schema: SchemaRef = Arc::new(Schema::new(fields));
    let batches = TableBatches {
        source,
        path: path.to_path_buf(),
        hdu: index,
        schema: schema.clone(),
        columns,
        naxis1,
        rows_total: naxis2,
        rows_done: 0,
        batch_rows: limits::batch_rows_for(batch_rows, naxis1),
        dims,
        failed: false,
    };
    Ok(CatalogBatches {
        path: path.to_path_buf(),
        schema,
        batches: Box::new(DeclaredRows::new(batches, path, naxis2, "NAXIS2")),
    })
}

/// Iterator over the record batches of one BINTABLE.
struct TableBatches {
    source: Source,
    path: PathBuf,
    hdu: usize,
    schema: SchemaRef,
    columns: Vec<Column>,
    naxis1: usize,
    rows_total: u64,
    rows_done: u64,
    batch_rows: usize,
    /// `NAXIS1 a x NAXIS2 b`, for error messages.
    dims: String,
    failed: bool,
}

impl Iterator for TableBatches {
    type Item = Result<RecordBatch>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.failed {
            return None;
        }
        if self.rows_done >= self.rows_total {
            self.failed = true;
            return match self.source.finish() {
                Ok(()) => None,
                Err(e) => Some(Err(Error::format(&self.path, gzip::describe(&e)))),
            };
        }
        let rows = (self.rows_total - self.rows_done).min(self.batch_rows as u64) as usize;
        let result = self.read_batch(rows);
        self.failed = result.is_err();
        self.rows_done += rows as u64;
        Some(result)
    }
}

impl TableBatches {
    /// Reads and decodes the next `rows` rows.
    fn read_batch(&mut self, rows: usize) -> Result<RecordBatch> {
        let mut buf = limits::zeroed(&self.path, rows.saturating_mul(self.naxis1))?;
        let got = self
            .source
            .read_full(&mut buf)
            .map_err(|e| self.source.read_error(&self.path, e))?;
        if got < buf.len() {
            let has = self.rows_done * self.naxis1 as u64 + got as u64;
            let expected = self.rows_total * self.naxis1 as u64;
            return Err(Error::format(
                &self.path,
                format!(
                    "truncated FITS file: data of HDU {} has {has} bytes, expected {expected} ({})",
                    self.hdu, self.dims
                ),
            ));
        }
        let first_row = self.rows_done;
        let arrays = self
            .columns
            .iter()
            .map(|c| {
                let cells = Cells {
                    buf: &buf,
                    stride: self.naxis1,
                    rows,
                    column: c,
                };
                decode_column(&cells, &self.path, first_row)
            })
            .collect::<Result<Vec<_>>>()?;
        let options = RecordBatchOptions::new().with_row_count(Some(rows));
        RecordBatch::try_new_with_options(self.schema.clone(), arrays, &options)
            .map_err(|e| Error::columnar(&self.path, e))
    }
}

/// The bytes of one column over a batch of rows.
struct Cells<'a> {
    buf: &'a [u8],
    stride: usize,
    rows: usize,
    column: &'a Column,
}

impl Cells<'_> {
    /// Every element of the column, row by row, as `(row in batch, bytes)`.
    fn elements(&self) -> impl Iterator<Item = (usize, &[u8])> + '_ {
        let size = self.column.stored.size();
        (0..self.rows).flat_map(move |row| {
            let start = row * self.stride + self.column.offset;
            self.buf[start..start + self.column.width()]
                .chunks_exact(size)
                .map(move |b| (row, b))
        })
    }

    /// A primitive array of every element, each mapped by `map` from its big-endian bytes.
    fn primitive<T: ArrowPrimitiveType>(
        &self,
        map: impl Fn(&[u8]) -> Option<T::Native>,
    ) -> ArrayRef {
        let values: PrimitiveArray<T> = self.elements().map(|(_, b)| map(b)).collect();
        Arc::new(values)
    }
}

/// The first `N` bytes of `b` as an array, ready for `from_be_bytes`.
fn be<const N: usize>(b: &[u8]) -> [u8; N] {
    let mut out = [0u8; N];
    out.copy_from_slice(&b[..N]);
    out
}

/// Decodes one column of a batch into its Arrow array.
fn decode_column(cells: &Cells<'_>, path: &Path, first_row: u64) -> Result<ArrayRef> {
    let c = cells.column;
    let keep = |raw: i64| c.tnull != Some(raw);
    let nan_null = |v: f64| (!v.is_nan()).then_some(v);
    let values: ArrayRef = match (c.stored, c.scaling) {
        (Stored::Text, _) => return decode_text(cells, path, first_row),
        (Stored::Logical, _) => {
            let mut out = Vec::with_capacity(cells.rows * c.repeat);
            for (row, b) in cells.elements() {
                out.push(match b[0] {
                    b'T' => Some(true),
                    b'F' => Some(false),
                    0 => None,
                    other => {
                        return Err(Error::BadValue {
                            path: path.to_path_buf(),
                            row: first_row + row as u64 + 1,
                            column: c.name.clone(),
                            expected: "a logical byte T, F or 0".to_string(),
                            found: format!("byte 0x{other:02X}"),
                        });
                    }
                });
            }
            Arc::new(BooleanArray::from(out))
        }
        (Stored::Bits, _) => cells.primitive::<UInt8Type>(|b| Some(b[0])),
        (Stored::U8, Scaling::None) => {
            cells.primitive::<UInt8Type>(|b| keep(i64::from(b[0])).then_some(b[0]))
        }
        (Stored::U8, Scaling::Offset) => {
            cells.primitive::<Int8Type>(|b| keep(i64::from(b[0])).then_some((b[0] ^ 0x80) as i8))
        }
        (Stored::I16, Scaling::None) => cells.primitive::<Int16Type>(|b| {
            let raw = i16::from_be_bytes(be(b));
            keep(i64::from(raw)).then_some(raw)
        }),
        (Stored::I16, Scaling::Offset) => cells.primitive::<UInt16Type>(|b| {
            let raw = i16::from_be_bytes(be(b));
            keep(i64::from(raw)).then_some(raw as u16 ^ 0x8000)
        }),
        (Stored::I32, Scaling::None) => cells.primitive::<Int32Type>(|b| {
            let raw = i32::from_be_bytes(be(b));
            keep(i64::from(raw)).then_some(raw)
        }),
        (Stored::I32, Scaling::Offset) => cells.primitive::<UInt32Type>(|b| {
            let raw = i32::from_be_bytes(be(b));
            keep(i64::from(raw)).then_some(raw as u32 ^ 0x8000_0000)
        }),
        (Stored::I64, Scaling::None) => cells.primitive::<Int64Type>(|b| {
            let raw = i64::from_be_bytes(be(b));
            keep(raw).then_some(raw)
        }),
        (Stored::I64, Scaling::Offset) => cells.primitive::<UInt64Type>(|b| {
            let raw = i64::from_be_bytes(be(b));
            keep(raw).then_some(raw as u64 ^ 0x8000_0000_0000_0000)
        }),
        (Stored::F32, Scaling::None) => cells.primitive::<Float32Type>(|b| {
            let v = f32::from_be_bytes(be(b));
            (!v.is_nan()).then_some(v)
        }),
        (Stored::F64, Scaling::None) => {
            cells.primitive::<Float64Type>(|b| nan_null(f64::from_be_bytes(be(b))))
        }
        (stored, Scaling::Linear { scale, zero }) => cells.primitive::<Float64Type>(|b| {
            let raw = match stored {
                Stored::U8 => keep(i64::from(b[0])).then_some(f64::from(b[0])),
                Stored::I16 => {
                    let r = i16::from_be_bytes(be(b));
                    keep(i64::from(r)).then_some(f64::from(r))
                }
                Stored::I32 => {
                    let r = i32::from_be_bytes(be(b));
                    keep(i64::from(r)).then_some(f64::from(r))
                }
                Stored::I64 => {
                    let r = i64::from_be_bytes(be(b));
                    keep(r).then_some(r as f64)
                }
                Stored::F32 => nan_null(f64::from(f32::from_be_bytes(be(b)))),
                _ => nan_null(f64::from_be_bytes(be(b))),
            };
            raw.map(|r| r * scale + zero)
        }),
        (Stored::F32 | Stored::F64, Scaling::Offset) => {
            unreachable!("the offset convention is only chosen for integer columns")
        }
    };
    if c.repeat == 1 {
        return Ok(values);
    }
    let item = Arc::new(Field::new("item", c.element_type(), true));
    FixedSizeListArray::try_new(item, c.repeat as i32, values, None)
        .map(|list| Arc::new(list) as ArrayRef)
        .map_err(|e| Error::columnar(path, e))
}

/// Decodes an `rA` column: text up to the first NUL, trailing spaces removed.
fn decode_text(cells: &Cells<'_>, path: &Path, first_row: u64) -> Result<ArrayRef> {
    let c = cells.column;
    let mut out: Vec<&str> = Vec::with_capacity(cells.rows);
    for row in 0..cells.rows {
        let start = row * cells.stride + c.offset;
        let bytes = &cells.buf[start..start + c.width()];
        let end = bytes.iter().position(|&b| b == 0).unwrap_or(bytes.len());
        let text = std::str::from_utf8(&bytes[..end]).map_err(|_| Error::BadValue {
            path: path.to_path_buf(),
            row: first_row + row as u64 + 1,
            column: c.name.clone(),
            expected: "UTF-8 text".to_string(),
            found: limits::one_line(&String::from_utf8_lossy(&bytes[..end])),
        })?;
        out.push(text.trim_end_matches(' '));
    }
    Ok(Arc::new(StringArray::from(out)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use arrow::array::Array;

    /// Pads `text` to one 80-byte card.
    fn card(text: &str) -> Vec<u8> {
        format!("{text:<80}").into_bytes()
    }

    #[test]
    fn cards_give_keyword_and_typed_value() {
        let cases = [
            (
                "SIMPLE  =                    T / conforms",
                "SIMPLE",
                Value::Logical(true),
            ),
            (
                "NAXIS1  =                   66 / width",
                "NAXIS1",
                Value::Int(66),
            ),
            (
                "TSCAL3  =                 0.01",
                "TSCAL3",
                Value::Float(0.01),
            ),
            (
                "TZERO3  =               1.5D2",
                "TZERO3",
                Value::Float(150.0),
            ),
            (
                "TTYPE1  = 'it''s a name  ' / quoted",
                "TTYPE1",
                Value::Str("it's a name".into()),
            ),
            ("TUNIT1  = ''", "TUNIT1", Value::Str(String::new())),
            (
                "TZERO4  =  9223372036854775808",
                "TZERO4",
                Value::Float(9_223_372_036_854_775_808.0),
            ),
            ("BLANK   =", "BLANK", Value::Undefined),
            (
                "KEEP    = (1.0, 2.0)",
                "KEEP",
                Value::Other("(1.0, 2.0)".into()),
            ),
        ];
        for (text, keyword, value) in &cases {
            assert_eq!(
                parse_card(&card(text)),
                Ok((keyword.to_string(), value.clone())),
                "{text}"
            );
        }
        // "= " only counts in bytes 9-10.
        assert_eq!(
            parse_card(&card("COMMENT  = is commentary")),
            Ok(("COMMENT".to_string(), Value::Undefined))
        );
    }

    #[test]
    fn unterminated_string_is_an_error() {
        assert_eq!(
            parse_card(&card("TTYPE1  = 'open")),
            Err("keyword TTYPE1: string value has no closing quote".to_string())
        );
    }

    #[test]
    fn tform_splits_repeat_and_letter() {
        assert_eq!(parse_tform("E"), Some((1, 'E')));
        assert_eq!(parse_tform("10A"), Some((10, 'A')));
        assert_eq!(parse_tform(" 3E "), Some((3, 'E')));
        assert_eq!(parse_tform("1PE(100)"), Some((1, 'P')));
        assert_eq!(parse_tform(""), None);
        assert_eq!(parse_tform("12"), None);
    }

    fn header(cards: &[(&str, Value)]) -> Header {
        Header {
            cards: cards
                .iter()
                .map(|(k, v)| (k.to_string(), v.clone()))
                .collect(),
        }
    }

    #[test]
    fn data_size_follows_bitpix_axes_pcount_gcount() {
        let path = Path::new("t.fits");
        let image = header(&[
            ("BITPIX", Value::Int(-32)),
            ("NAXIS", Value::Int(2)),
            ("NAXIS1", Value::Int(5)),
            ("NAXIS2", Value::Int(3)),
        ]);
        assert_eq!(data_size(&image, path, 1).unwrap(), 60);
        let table = header(&[
            ("BITPIX", Value::Int(8)),
            ("NAXIS", Value::Int(2)),
            ("NAXIS1", Value::Int(66)),
            ("NAXIS2", Value::Int(10)),
            ("PCOUNT", Value::Int(100)),
            ("GCOUNT", Value::Int(1)),
        ]);
        assert_eq!(data_size(&table, path, 1).unwrap(), 760);
        let groups = header(&[
            ("BITPIX", Value::Int(16)),
            ("NAXIS", Value::Int(2)),
            ("NAXIS1", Value::Int(0)),
            ("NAXIS2", Value::Int(4)),
            ("GROUPS", Value::Logical(true)),
            ("PCOUNT", Value::Int(2)),
            ("GCOUNT", Value::Int(3)),
        ]);
        assert_eq!(data_size(&groups, path, 0).unwrap(), 36);
        let empty = header(&[("BITPIX", Value::Int(8)), ("NAXIS", Value::Int(0))]);
        assert_eq!(data_size(&empty, path, 0).unwrap(), 0);
    }

    #[test]
    fn logical_zero_is_null_and_other_bytes_are_refused() {
        let column = Column {
            name: "ok".into(),
            stored: Stored::Logical,
            repeat: 1,
            offset: 1,
            scaling: Scaling::None,
            tnull: None,
            unit: None,
        };
        let buf = [9, b'T', 9, b'F', 9, 0];
        let cells = Cells {
            buf: &buf,
            stride: 2,
            rows: 3,
            column: &column,
        };
        let array = decode_column(&cells, Path::new("t.fits"), 0).unwrap();
        let array = array.as_any().downcast_ref::<BooleanArray>().unwrap();
        assert_eq!(
            array.iter().collect::<Vec<_>>(),
            [Some(true), Some(false), None]
        );

        let bad = [9, b'T', 9, b'x'];
        let cells = Cells {
            buf: &bad,
            stride: 2,
            rows: 2,
            column: &column,
        };
        let err = decode_column(&cells, Path::new("t.fits"), 40).unwrap_err();
        assert_eq!(
            err.to_string(),
            "t.fits: row 42, column \"ok\": expected a logical byte T, F or 0, found \"byte 0x78\""
        );
    }

    #[test]
    fn signed_byte_and_scaled_columns_apply_tzero_after_tnull() {
        let path = Path::new("t.fits");
        let mut column = Column {
            name: "b".into(),
            stored: Stored::U8,
            repeat: 1,
            offset: 0,
            scaling: Scaling::Offset,
            tnull: Some(0),
            unit: None,
        };
        let buf = [0u8, 0x7f, 0x80, 0xff];
        let cells = |c: &Column| {
            decode_column(
                &Cells {
                    buf: &buf,
                    stride: 1,
                    rows: 4,
                    column: c,
                },
                path,
                0,
            )
            .unwrap()
        };
        let signed = cells(&column);
        let signed = signed
            .as_any()
            .downcast_ref::<PrimitiveArray<Int8Type>>()
            .unwrap();
        assert_eq!(
            signed.iter().collect::<Vec<_>>(),
            [None, Some(-1), Some(0), Some(127)]
        );
        column.scaling = Scaling::Linear {
            scale: 2.0,
            zero: 0.5,
        };
        let scaled = cells(&column);
        let scaled = scaled
            .as_any()
            .downcast_ref::<PrimitiveArray<Float64Type>>()
            .unwrap();
        assert_eq!(
            scaled.iter().collect::<Vec<_>>(),
            [None, Some(254.5), Some(256.5), Some(510.5)]
        );
    }

    #[test]
    fn text_that_is_not_utf8_names_row_and_column() {
        let column = Column {
            name: "label".into(),
            stored: Stored::Text,
            repeat: 3,
            offset: 0,
            scaling: Scaling::None,
            tnull: None,
            unit: None,
        };
        let buf = *b"ab c\0z\xff  ";
        let cells = Cells {
            buf: &buf,
            stride: 3,
            rows: 3,
            column: &column,
        };
        let err = decode_column(&cells, Path::new("t.fits"), 0).unwrap_err();
        assert_eq!(
            err.to_string(),
            "t.fits: row 3, column \"label\": expected UTF-8 text, found \"\u{fffd}  \""
        );
        let ok = Cells { rows: 2, ..cells };
        let array = decode_column(&ok, Path::new("t.fits"), 0).unwrap();
        let array = array.as_any().downcast_ref::<StringArray>().unwrap();
        assert_eq!(array.iter().collect::<Vec<_>>(), [Some("ab"), Some("c")]);
    }
}
