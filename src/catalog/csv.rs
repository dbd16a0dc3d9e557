//! Delimited-text catalogs (CSV, TSV), plain or gzip-compressed.
//!
//! [`read_csv`] streams the file through the Arrow CSV reader with every column
//! read as text; numbers are parsed later by the normalizer, which can then name
//! the row, the column and the original text of any value it cannot use.
//! Comment lines, quoting and the delimiter come from the survey schema's
//! [`CsvOptions`].

use std::fs::File;
use std::io::{BufReader, Read};
use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::csv::ReaderBuilder;
use arrow::csv::reader::Format;
use arrow::datatypes::{DataType, Field, Schema};
use arrow::error::ArrowError;

use super::CatalogBatches;
use super::schema::CsvOptions;
use crate::error::{Error, Result};

/// Opens `path` as delimited text and streams its rows as all-text record batches.
///
/// # Errors
/// An I/O error if the file cannot be opened, and an [`Error::Format`] if it is
/// empty, has no header line, or is a broken gzip stream.
pub fn read_csv(path: &Path, options: &CsvOptions, batch_rows: usize) -> Result<CatalogBatches> {
    let format = arrow_format(options);
    let (header, _) = format
        .infer_schema(open_text(path, options)?, Some(0))
        .map_err(|e| csv_error(path, &[], e))?;
    let names: Vec<String> = header.fields().iter().map(|f| f.name().clone()).collect();
    if names.is_empty() || (names.len() == 1 && names[0].is_empty()) {
        return Err(Error::format(
            path,
            "the file is empty: expected a header line naming the columns",
        ));
    }
    if let Some(dup) = first_duplicate(&names) {
        return Err(Error::format(
            path,
            format!("the header names column \"{dup}\" twice"),
        ));
    }
    let schema = Arc::new(Schema::new(
        names
            .iter()
            .map(|n| Field::new(n, DataType::Utf8, true))
            .collect::<Vec<_>>(),
    ));
    let reader = ReaderBuilder::new(schema.clone())
        .with_format(format)
        .with_batch_size(batch_rows)
        .build(open_text(path, options)?)
        .map_err(|e| csv_error(path, &names, e))?;
    let owned_path: PathBuf = path.to_path_buf();
    let batches = reader.map(move |b| b.map_err(|e| csv_error(&owned_path, &names, e)));
    Ok(CatalogBatches {
        schema,
        batches: Box::new(batches),
    })
}

fn arrow_format(options: &CsvOptions) -> Format {
    let mut format = Format::default()
        .with_header(options.header)
        .with_delimiter(options.delimiter)
        .with_quote(options.quote);
    if let Some(c) = options.comment {
        format = format.with_comment(c);
    }
    format
}

/// Opens the file, decompressing gzip when asked to or when the name ends in `.gz`.
fn open_text(path: &Path, options: &CsvOptions) -> Result<Box<dyn Read + Send>> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let gzip = options.gzip.unwrap_or_else(|| {
        path.extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("gz"))
    });
    let reader = BufReader::with_capacity(1 << 20, file);
    if gzip {
        Ok(Box::new(BufReader::with_capacity(
            1 << 20,
            flate2::read::MultiGzDecoder::new(reader),
        )))
    } else {
        Ok(Box::new(reader))
    }
}

fn first_duplicate(names: &[String]) -> Option<&str> {
    let mut seen = std::collections::HashSet::new();
    names
        .iter()
        .find(|n| !seen.insert(n.as_str()))
        .map(|s| s.as_str())
}

/// Turns an Arrow CSV error into a message that names the file, and the column
/// where the library gives a field number.
fn csv_error(path: &Path, names: &[String], err: ArrowError) -> Error {
    let message = match err {
        ArrowError::CsvError(m) => m,
        ArrowError::IoError(_, io) => {
            use std::io::ErrorKind::{InvalidData, InvalidInput, UnexpectedEof};
            if matches!(io.kind(), InvalidData | InvalidInput | UnexpectedEof) {
                format!("broken or truncated compressed stream: {io}")
            } else {
                return Error::io(path, io);
            }
        }
        other => other.to_string(),
    };
    if let Some((line, field)) = invalid_utf8_position(&message) {
        let column = names
            .get(field.saturating_sub(1))
            .map(|n| format!("column \"{n}\""))
            .unwrap_or_else(|| format!("field {field}"));
        return Error::format(
            path,
            format!(
                "row {line}, {column}: expected UTF-8 text, found bytes that are not UTF-8 (re-encode the file as UTF-8)"
            ),
        );
    }
    Error::format(path, message)
}

/// Reads "line L and field F" out of the Arrow CSV invalid-UTF-8 message.
fn invalid_utf8_position(message: &str) -> Option<(usize, usize)> {
    let rest = message.split("invalid UTF-8 data for line ").nth(1)?;
    let mut parts = rest.split(" and field ");
    let line = parts.next()?.trim().parse().ok()?;
    let field = parts.next()?.trim().parse().ok()?;
    Some((line, field))
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
    fn non_utf8_names_row_and_column() {
        let dir = tempfile::tempdir().unwrap();
        let p = write(dir.path(), "n.csv", b"id,name\n1,ok\n2,caf\xe9\n");
        let err = read_csv(&p, &CsvOptions::default(), 64)
            .and_then(|b| b.collect_all())
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("column \"name\": expected UTF-8 text"),
            "{err}"
        );
    }
}
