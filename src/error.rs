//! The one error type of fluxloom.
//!
//! [`Error`] variants carry where a problem was found (file, schema line, row,
//! column) and what was expected versus found, so that the message shown to a
//! person reads from place to problem in one line, e.g.
//!
//! ```text
//! wise.csv: row 1043, column "w1mpro": expected a number, found "--"
//! ```
//!
//! Wrapper variants ([`Error::InFile`]) add the file to an error raised deeper
//! down, in the manner of a context chain.

use std::path::{Path, PathBuf};

/// Shorthand for results whose error is [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can go wrong in fluxloom, with enough context to fix it.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// An operating-system error while opening, reading or writing a path.
    #[error("{}: {source}", path.display())]
    Io {
        /// The file or folder involved.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },

    /// A value in a data file that cannot be used.
    #[error("{}: row {row}, column \"{column}\": expected {expected}, found \"{found}\"", path.display())]
    BadValue {
        /// The catalog file.
        path: PathBuf,
        /// Data row, counted from 1 (header and comment lines not counted).
        row: u64,
        /// The column name in the file.
        column: String,
        /// What the column should hold.
        expected: String,
        /// The text or value that was found (the user's original text where there is one).
        found: String,
    },

    /// A column a schema names is absent from the file.
    #[error("{}: column \"{column}\" {named_at} is not in the file (it has: {available})", path.display())]
    MissingColumn {
        /// The catalog file.
        path: PathBuf,
        /// The missing column.
        column: String,
        /// Where the schema asked for it, e.g. `named at wise.toml:12`.
        named_at: String,
        /// A comma-separated list of the columns the file does have.
        available: String,
    },

    /// A column exists but holds the wrong kind of data.
    #[error("{}: column \"{column}\" has type {found}, expected {expected}", path.display())]
    ColumnType {
        /// The catalog file.
        path: PathBuf,
        /// The column name.
        column: String,
        /// The accepted types.
        expected: String,
        /// The type the file declares.
        found: String,
    },

    /// A schema, plan or band file that is well-formed TOML but says something impossible.
    #[error("{}:{line}: {message}", path.display())]
    Config {
        /// The TOML file.
        path: PathBuf,
        /// Line in that file, counted from 1 (0 when unknown).
        line: usize,
        /// What is wrong, and what is expected.
        message: String,
    },

    /// A TOML file that does not parse or does not fit its expected shape.
    #[error("{}: {message}", path.display())]
    Toml {
        /// The TOML file.
        path: PathBuf,
        /// The parser's message, which includes line and column.
        message: String,
    },

    /// A file whose format is broken: truncated, empty, wrong magic bytes, bad header.
    #[error("{}: {message}", path.display())]
    Format {
        /// The file.
        path: PathBuf,
        /// What is wrong with it.
        message: String,
    },

    /// An error from the Arrow or Parquet libraries, with the file it concerns.
    #[error("{}: {message}", path.display())]
    Columnar {
        /// The file being read or written.
        path: PathBuf,
        /// The library's message.
        message: String,
    },

    /// A problem with the command line that clap cannot express.
    #[error("{0}")]
    Usage(String),
}

impl Error {
    /// Wraps an I/O error with the path it concerns.
    pub fn io(path: impl AsRef<Path>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.as_ref().to_path_buf(),
            source,
        }
    }

    /// A format error for `path` with `message`.
    pub fn format(path: impl AsRef<Path>, message: impl Into<String>) -> Self {
        Error::Format {
            path: path.as_ref().to_path_buf(),
            message: message.into(),
        }
    }

    /// A configuration error at `line` (1-based) of the TOML file `path`.
    pub fn config(path: impl AsRef<Path>, line: usize, message: impl Into<String>) -> Self {
        Error::Config {
            path: path.as_ref().to_path_buf(),
            line,
            message: message.into(),
        }
    }

    /// An Arrow or Parquet library error concerning `path`.
    pub fn columnar(path: impl AsRef<Path>, err: impl std::fmt::Display) -> Self {
        Error::Columnar {
            path: path.as_ref().to_path_buf(),
            message: err.to_string(),
        }
    }
}

/// Reads a TOML file (schema, plan or band file) as text.
///
/// TOML files must be UTF-8 (TOML 1.0, "Spec"); bytes that are not UTF-8 give an
/// [`Error::Toml`] naming the line and the byte column (both from 1) of the
/// first bad byte.
///
/// # Errors
/// [`Error::Io`] when the file cannot be read, [`Error::Toml`] as above.
pub fn read_toml_text(path: &Path) -> Result<String> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
    String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let bytes = e.as_bytes();
        let line_start = bytes[..at]
            .iter()
            .rposition(|&b| b == b'\n')
            .map_or(0, |i| i + 1);
        let line = bytes[..at].iter().filter(|&&b| b == b'\n').count() + 1;
        Error::Toml {
            path: path.to_path_buf(),
            message: format!(
                "line {line}, byte column {}: byte 0x{:02X} is not valid UTF-8; TOML files must be UTF-8 text",
                at - line_start + 1,
                bytes[at]
            ),
        }
    })
}

/// Turns a TOML parse or shape error on `text` into [`Error::Toml`].
///
/// The message reads `line L, column C: <problem>` and, on the following
/// lines, the offending source line with a caret under the column, so that it
/// stays readable after the `fluxloom: error: <file>: ` prefix:
///
/// ```text
/// plan.toml: line 2, column 8: invalid string
///     |
///   2 | name = fl1
///     |        ^
/// ```
pub fn toml_error(path: &Path, text: &str, err: &toml::de::Error) -> Error {
    let problem = err.message().trim_end().replace('\n', "; ");
    let message = match err.span() {
        Some(span) => {
            let start = span.start.min(text.len());
            let line = line_of_offset(text, start);
            let line_start = text[..start].rfind('\n').map_or(0, |i| i + 1);
            let line_end = text[start..].find('\n').map_or(text.len(), |i| start + i);
            let source = text[line_start..line_end].trim_end_matches('\r');
            let column = text[line_start..start].chars().count() + 1;
            let gutter = " ".repeat(line.to_string().len() + 3);
            let caret_pad: String = source
                .chars()
                .take(column - 1)
                .map(|c| if c == '\t' { '\t' } else { ' ' })
                .collect();
            format!(
                "line {line}, column {column}: {problem}\n{gutter}|\n  {line} | {source}\n{gutter}| {caret_pad}^"
            )
        }
        None => problem,
    };
    Error::Toml {
        path: path.to_path_buf(),
        message,
    }
}

/// Converts a byte offset in `text` into a 1-based line number.
pub fn line_of_offset(text: &str, offset: usize) -> usize {
    let end = offset.min(text.len());
    text.as_bytes()[..end]
        .iter()
        .filter(|&&b| b == b'\n')
        .count()
        + 1
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_value_reads_from_place_to_problem() {
        let err = Error::BadValue {
            path: "wise.csv".into(),
            row: 1043,
            column: "w1mpro".into(),
            expected: "a number".into(),
            found: "--".into(),
        };
        assert_eq!(
            err.to_string(),
            "wise.csv: row 1043, column \"w1mpro\": expected a number, found \"--\""
        );
    }

    #[test]
    fn non_utf8_toml_names_line_and_byte_column() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.toml");
        std::fs::write(&path, b"survey = \"a\"\ndescription = \"caf\xe9\"\n").unwrap();
        let err = read_toml_text(&path).unwrap_err().to_string();
        assert_eq!(
            err,
            format!(
                "{}: line 2, byte column 19: byte 0xE9 is not valid UTF-8; TOML files must be UTF-8 text",
                path.display()
            )
        );
    }

    #[test]
    fn toml_errors_keep_the_caret_drawing_on_separate_lines() {
        let text = "[field]\nname = fl1\n";
        let err = toml::from_str::<toml::Value>(text).unwrap_err();
        let err = toml_error(Path::new("plan.toml"), text, &err).to_string();
        let lines: Vec<&str> = err.lines().collect();
        assert_eq!(lines.len(), 4, "{err}");
        assert!(
            lines[0].starts_with("plan.toml: line 2, column 8: "),
            "{err}"
        );
        assert_eq!(lines[1], "    |");
        assert_eq!(lines[2], "  2 | name = fl1");
        assert_eq!(lines[3], "    |        ^");
    }

    #[test]
    fn line_numbers_count_from_one() {
        let text = "a = 1\nb = 2\nc = 3\n";
        assert_eq!(line_of_offset(text, 0), 1);
        assert_eq!(line_of_offset(text, 6), 2);
        assert_eq!(line_of_offset(text, 14), 3);
    }
}
