//! Delimited-text catalogs (CSV, TSV), plain or gzip-compressed.
//!
//! [`read_csv`] reads the file once, as a stream, with every column read as
//! text; numbers are parsed later by the normalizer, which can then name the
//! row, the column and the original text of any value it cannot use. Comment
//! lines, quoting and the delimiter come from the survey schema's [`CsvOptions`].
//!
//! Messages give both the data row (from 1, header and comment lines not
//! counted) and the line of the file (from 1, every line counted), e.g.
//! `row 3 (line 6), column "kmag": ...`. An empty field is null.

use std::collections::VecDeque;
use std::fs::File;
use std::io::{BufReader, Read};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};

use arrow::array::{ArrayRef, RecordBatch, RecordBatchOptions, StringBuilder};
use arrow::datatypes::{DataType, Field, Schema, SchemaRef};
use csv::{ByteRecord, Reader, ReaderBuilder};

use super::schema::CsvOptions;
use super::{CatalogBatches, gzip};
use crate::error::{Error, Result};

/// Opens `path` as delimited text and streams its rows as all-text record batches.
///
/// # Errors
/// An I/O error if the file cannot be opened, and an [`Error::Format`] if it is
/// empty, has no header line, names a column twice, or is a broken gzip stream;
/// while iterating, an [`Error::Format`] for a row with the wrong number of
/// fields or text that is not UTF-8, naming the row and the line.
pub fn read_csv(path: &Path, options: &CsvOptions, batch_rows: usize) -> Result<CatalogBatches> {
    let newlines = Arc::new(Mutex::new(VecDeque::new()));
    let mut reader = ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .delimiter(options.delimiter)
        .quote(options.quote)
        .comment(options.comment)
        .from_reader(Newlines {
            inner: open_text(path, options)?,
            offset: 0,
            found: newlines.clone(),
        });
    let mut lines = LineCounter {
        found: newlines,
        before: 0,
        last: None,
    };
    let mut first = ByteRecord::new();
    if !next_record(&mut reader, &mut first, path)? {
        return Err(Error::format(
            path,
            "the file is empty: expected a header line naming the columns",
        ));
    }
    let first_line = lines.line_of(&reader, &first);
    let (names, pending) = if options.header {
        let mut names = Vec::with_capacity(first.len());
        for (i, field) in first.iter().enumerate() {
            let name = std::str::from_utf8(field).map_err(|_| {
                Error::format(
                    path,
                    format!(
                        "line {first_line} (the header), field {}: expected UTF-8 text, found bytes that are not UTF-8 (re-encode the file as UTF-8)",
                        i + 1
                    ),
                )
            })?;
            names.push(name.to_string());
        }
        (names, None)
    } else {
        let names = (1..=first.len()).map(|i| format!("column_{i}")).collect();
        (names, Some(first))
    };
    if names.is_empty() || (names.len() == 1 && names[0].is_empty()) {
        return Err(Error::format(
            path,
            "the file is empty: expected a header line naming the columns",
        ));
    }
    if let Some(dup) = first_duplicate(&names) {
        return Err(Error::format(
            path,
            format!("the header (line {first_line}) names column \"{dup}\" twice"),
        ));
    }
    let schema: SchemaRef = Arc::new(Schema::new(
        names
            .iter()
            .map(|n| Field::new(n, DataType::Utf8, true))
            .collect::<Vec<_>>(),
    ));
    let batches = TextBatches {
        reader,
        lines,
        path: path.to_path_buf(),
        schema: schema.clone(),
        names,
        header_line: options.header.then_some(first_line),
        pending,
        batch_rows: batch_rows.max(1),
        rows_read: 0,
        done: false,
    };
    Ok(CatalogBatches {
        path: path.to_path_buf(),
        schema,
        batches: Box::new(batches),
    })
}

/// Opens the file, decompressing gzip when asked to or when the name ends in `.gz`.
fn open_text(path: &Path, options: &CsvOptions) -> Result<Box<dyn Read + Send>> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let reader = BufReader::with_capacity(1 << 20, file);
    let gzip = options.gzip.unwrap_or_else(|| {
        path.extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("gz"))
    });
    if gzip {
        Ok(Box::new(BufReader::with_capacity(
            1 << 20,
            gzip::decoder(reader),
        )))
    } else {
        Ok(Box::new(reader))
    }
}

/// The text stream, noting the offset of every newline byte it passes on.
///
/// The CSV library counts records, not the comment lines between them, so the
/// line of a record is found from these offsets and the byte where it ends.
struct Newlines {
    inner: Box<dyn Read + Send>,
    /// Bytes passed on so far.
    offset: u64,
    /// Offsets of newlines passed on and not yet counted by [`LineCounter`].
    found: Arc<Mutex<VecDeque<u64>>>,
}

impl Read for Newlines {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        let mut found = self.found.lock().unwrap_or_else(|e| e.into_inner());
        for (i, _) in buf[..n].iter().enumerate().filter(|(_, b)| **b == b'\n') {
            found.push_back(self.offset + i as u64);
        }
        self.offset += n as u64;
        Ok(n)
    }
}

/// Turns the end of each record into the file line (from 1) where it starts.
struct LineCounter {
    found: Arc<Mutex<VecDeque<u64>>>,
    /// Newlines before the last record's end.
    before: u64,
    /// Offset of the last newline counted.
    last: Option<u64>,
}

impl LineCounter {
    /// The line where `record`, just read by `reader`, starts.
    fn line_of(&mut self, reader: &Reader<Newlines>, record: &ByteRecord) -> u64 {
        let end = reader.position().byte();
        let mut found = self.found.lock().unwrap_or_else(|e| e.into_inner());
        while let Some(&at) = found.front() {
            if at >= end {
                break;
            }
            self.before += 1;
            self.last = Some(at);
            found.pop_front();
        }
        // The record's own terminating newline is not a line before it.
        let own = u64::from(end > 0 && self.last == Some(end - 1));
        let inside: u64 = record
            .iter()
            .map(|f| f.iter().filter(|&&b| b == b'\n').count() as u64)
            .sum();
        1 + self.before.saturating_sub(own).saturating_sub(inside)
    }
}

/// Reads the next record; `false` at the end of the file.
fn next_record(
    reader: &mut Reader<Newlines>,
    record: &mut ByteRecord,
    path: &Path,
) -> Result<bool> {
    reader
        .read_byte_record(record)
        .map_err(|e| match e.into_kind() {
            csv::ErrorKind::Io(io) => {
                use std::io::ErrorKind::{InvalidData, InvalidInput, UnexpectedEof};
                if matches!(io.kind(), InvalidData | InvalidInput | UnexpectedEof) {
                    Error::format(path, gzip::describe(&io))
                } else {
                    Error::io(path, io)
                }
            }
            other => Error::format(path, format!("{other:?}")),
        })
}

fn first_duplicate(names: &[String]) -> Option<&str> {
    let mut seen = std::collections::HashSet::new();
    names
        .iter()
        .find(|n| !seen.insert(n.as_str()))
        .map(|s| s.as_str())
}

/// Iterator over the record batches of a delimited-text file.
struct TextBatches {
    reader: Reader<Newlines>,
    lines: LineCounter,
    path: PathBuf,
    schema: SchemaRef,
    names: Vec<String>,
    /// The header's line, when the file has one.
    header_line: Option<u64>,
    /// The first data record, already read (files without a header).
    pending: Option<ByteRecord>,
    batch_rows: usize,
    rows_read: u64,
    done: bool,
}

impl Iterator for TextBatches {
    type Item = Result<RecordBatch>;

    fn next(&mut self) -> Option<Self::Item> {
        if self.done {
            return None;
        }
        match self.read_batch() {
            Ok(Some(batch)) => Some(Ok(batch)),
            Ok(None) => {
                self.done = true;
                None
            }
            Err(e) => {
                self.done = true;
                Some(Err(e))
            }
        }
    }
}

impl TextBatches {
    /// Reads up to `batch_rows` rows; `None` at the end of the file.
    fn read_batch(&mut self) -> Result<Option<RecordBatch>> {
        let mut builders: Vec<StringBuilder> =
            self.names.iter().map(|_| StringBuilder::new()).collect();
        let mut record = ByteRecord::new();
        let mut rows = 0usize;
        while rows < self.batch_rows {
            match self.pending.take() {
                Some(r) => record = r,
                None => {
                    if !next_record(&mut self.reader, &mut record, &self.path)? {
                        self.done = true;
                        break;
                    }
                }
            }
            let row = self.rows_read + 1;
            let line = self.lines.line_of(&self.reader, &record);
            if record.len() != self.names.len() {
                let against = match self.header_line {
                    Some(h) => format!("as in the header (line {h})"),
                    None => "as in the first row".to_string(),
                };
                return Err(Error::format(
                    &self.path,
                    format!(
                        "row {row} (line {line}) has {} fields, expected {} {against}",
                        record.len(),
                        self.names.len()
                    ),
                ));
            }
            for (i, field) in record.iter().enumerate() {
                if field.is_empty() {
                    builders[i].append_null();
                    continue;
                }
                let text = std::str::from_utf8(field).map_err(|_| {
                    Error::format(
                        &self.path,
                        format!(
                            "row {row} (line {line}), column \"{}\": expected UTF-8 text, found bytes that are not UTF-8 (re-encode the file as UTF-8)",
                            self.names[i]
                        ),
                    )
                })?;
                builders[i].append_value(text);
            }
            rows += 1;
            self.rows_read += 1;
        }
        if rows == 0 {
            return Ok(None);
        }
        let arrays: Vec<ArrayRef> = builders
            .iter_mut()
            .map(|b| Arc::new(b.finish()) as ArrayRef)
            .collect();
        let options = RecordBatchOptions::new().with_row_count(Some(rows));
        RecordBatch::try_new_with_options(self.schema.clone(), arrays, &options)
            .map(Some)
            .map_err(|e| Error::columnar(&self.path, e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use arrow::array::{Array, AsArray};
    use std::io::Write;

    fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
        let p = dir.join(name);
        std::fs::File::create(&p).unwrap().write_all(bytes).unwrap();
        p
    }

    fn read_err(p: &Path) -> String {
        read_csv(p, &CsvOptions::default(), 2)
            .and_then(|b| b.collect_all())
            .unwrap_err()
            .to_string()
    }

    #[test]
    fn comments_quotes_and_delimiters() {
        let dir = tempfile::tempdir().unwrap();
        let p = write(
            dir.path(),
            "a.tsv",
            b"# a comment\nid\tname\tmag\n1\t\"x\ty\"\t12.5\n# another\n2\tz\t\n",
        );
        let options = CsvOptions {
            delimiter: b'\t',
            ..CsvOptions::default()
        };
        let batches = read_csv(&p, &options, 1024).unwrap().collect_all().unwrap();
        assert_eq!(batches.len(), 1);
        let b = &batches[0];
        assert_eq!(b.num_rows(), 2);
        assert_eq!(b.column(1).as_string::<i32>().value(0), "x\ty");
        assert!(b.column(2).is_null(1));
    }

    #[test]
    fn a_file_without_header_names_columns_by_position() {
        let dir = tempfile::tempdir().unwrap();
        let p = write(dir.path(), "h.csv", b"1,2\n3,4\n");
        let options = CsvOptions {
            header: false,
            ..CsvOptions::default()
        };
        let t = read_csv(&p, &options, 8).unwrap();
        assert_eq!(t.schema.field(1).name(), "column_2");
        let b = t.collect_all().unwrap();
        assert_eq!(b[0].num_rows(), 2);
        assert_eq!(b[0].column(0).as_string::<i32>().value(1), "3");
    }

    #[test]
    fn gzip_is_read_by_extension() {
        let dir = tempfile::tempdir().unwrap();
        let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
        enc.write_all(b"id,mag\n1,10.0\n2,11.0\n").unwrap();
        let p = write(dir.path(), "a.csv.gz", &enc.finish().unwrap());
        let rows: usize = read_csv(&p, &CsvOptions::default(), 1)
            .unwrap()
            .collect_all()
            .unwrap()
            .iter()
            .map(|b| b.num_rows())
            .sum();
        assert_eq!(rows, 2);
    }

    #[test]
    fn a_truncated_gzip_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        let full = {
            let mut e = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::fast());
            e.write_all(b"id,mag\n").unwrap();
            for i in 0..5000 {
                writeln!(e, "{i},{i}.5").unwrap();
            }
            e.finish().unwrap()
        };
        let p = write(dir.path(), "t.csv.gz", &full[..full.len() / 2]);
        let result = read_csv(&p, &CsvOptions::default(), 64).and_then(|b| b.collect_all());
        let err = result.unwrap_err().to_string();
        assert!(
            err.contains("t.csv.gz: broken or truncated compressed stream"),
            "{err}"
        );
    }

    #[test]
    fn an_empty_file_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        let p = write(dir.path(), "e.csv", b"");
        let err = read_csv(&p, &CsvOptions::default(), 64)
            .err()
            .unwrap()
            .to_string();
        assert!(
            err.ends_with("e.csv: the file is empty: expected a header line naming the columns"),
            "{err}"
        );
    }

    #[test]
    fn positions_count_rows_and_file_lines() {
        let dir = tempfile::tempdir().unwrap();
        let p = write(
            dir.path(),
            "n.csv",
            b"# one\n# two\nid,name\n1,ok\n# three\n2,ok\n3,caf\xe9\n",
        );
        assert_eq!(
            read_err(&p),
            format!(
                "{}: row 3 (line 7), column \"name\": expected UTF-8 text, found bytes that are not UTF-8 (re-encode the file as UTF-8)",
                p.display()
            )
        );
        let p = write(dir.path(), "s.csv", b"# one\nid,name\n1,ok\n# two\n2\n");
        assert_eq!(
            read_err(&p),
            format!(
                "{}: row 2 (line 5) has 1 fields, expected 2 as in the header (line 2)",
                p.display()
            )
        );
        let p = write(dir.path(), "h.csv", b"#\n#\n#\n#\nid,n\xe9me\n1,2\n");
        assert_eq!(
            read_err(&p),
            format!(
                "{}: line 5 (the header), field 2: expected UTF-8 text, found bytes that are not UTF-8 (re-encode the file as UTF-8)",
                p.display()
            )
        );
    }
}
