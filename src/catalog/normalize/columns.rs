//! Typed access to a file's columns, whatever type the file stored them as.
//!
//! Catalog files store numbers as floats, integers or text (CSV always text).
//! [`NumberColumn`] gives every row as `Option<f64>`, treating empty text, NaN
//! and the schema's null sentinels as missing and reporting any other text it
//! cannot parse, with the user's original text. [`TextColumn`] gives flags and
//! identifiers as strings.

use arrow::array::{Array, ArrayRef, AsArray, Float64Array, StringArray};
use arrow::compute::cast;
use arrow::datatypes::DataType;

/// Why a cell could not be read as a number.
#[derive(Debug, Clone, PartialEq)]
pub struct NotANumber {
    /// The cell's text as found in the file.
    pub found: String,
}

/// A column read as numbers.
pub enum NumberColumn {
    /// Stored as a number of some type, converted to f64.
    Numeric(Float64Array),
    /// Stored as text: parsed in one pass where possible (null where the text is
    /// not a plain number), with the text kept for everything else.
    Text(StringArray, Float64Array),
}

impl NumberColumn {
    /// Wraps a file column; `None` when its type holds neither numbers nor text.
    pub fn new(array: &ArrayRef) -> Option<NumberColumn> {
        match array.data_type() {
            DataType::Utf8 | DataType::LargeUtf8 | DataType::Utf8View => {
                let text = cast(array, &DataType::Utf8).ok()?;
                let parsed = cast(&text, &DataType::Float64).ok()?;
                Some(NumberColumn::Text(
                    text.as_string::<i32>().clone(),
                    parsed.as_primitive().clone(),
                ))
            }
            t if t.is_numeric() || *t == DataType::Null => {
                let values = cast(array, &DataType::Float64).ok()?;
                Some(NumberColumn::Numeric(values.as_primitive().clone()))
            }
            _ => None,
        }
    }

    /// The value of row `i`: `Ok(None)` when missing (null, empty, NaN, or one of
    /// `null_text` / `null_values`), an error carrying the original text otherwise.
    #[inline]
    pub fn get(
        &self,
        i: usize,
        null_text: &[String],
        null_values: &[f64],
    ) -> Result<Option<f64>, NotANumber> {
        let value = match self {
            NumberColumn::Numeric(a) => {
                if a.is_null(i) {
                    return Ok(None);
                }
                a.value(i)
            }
            NumberColumn::Text(a, parsed) => {
                if a.is_null(i) {
                    return Ok(None);
                }
                if parsed.is_valid(i) && null_text.is_empty() {
                    parsed.value(i)
                } else {
                    Self::parse_text(a.value(i), null_text)?.unwrap_or(f64::NAN)
                }
            }
        };
        if value.is_nan() || null_values.contains(&value) {
            return Ok(None);
        }
        if value.is_infinite() {
            return Err(NotANumber {
                found: value.to_string(),
            });
        }
        Ok(Some(value))
    }

    /// The slow path for text that is not a plain number: blanks, null text,
    /// Fortran exponents, or garbage.
    fn parse_text(raw: &str, null_text: &[String]) -> Result<Option<f64>, NotANumber> {
        let text = raw.trim();
        if text.is_empty() || null_text.iter().any(|n| n == text) {
            return Ok(None);
        }
        match parse_number(text) {
            Some(v) => Ok(Some(v)),
            None => Err(NotANumber {
                found: raw.to_string(),
            }),
        }
    }
}

/// Parses a decimal number, also accepting a Fortran `D` exponent (`1.5D+03`).
fn parse_number(text: &str) -> Option<f64> {
    if let Ok(v) = text.parse::<f64>() {
        return Some(v);
    }
    if text.contains(['D', 'd'])
        && !text
            .chars()
            .any(|c| c.is_ascii_alphabetic() && c != 'D' && c != 'd')
    {
        return text.replace(['D', 'd'], "E").parse().ok();
    }
    None
}

/// A column read as text (flags, identifiers, sexagesimal positions).
pub struct TextColumn(StringArray);

impl TextColumn {
    /// Wraps a file column, converting numbers and booleans to their text; `None`
    /// when the type cannot be shown as text.
    pub fn new(array: &ArrayRef) -> Option<TextColumn> {
        let text = match array.data_type() {
            DataType::Utf8 => array.clone(),
            _ => cast(array, &DataType::Utf8).ok()?,
        };
        Some(TextColumn(text.as_string::<i32>().clone()))
    }

    /// Row `i` with surrounding blanks removed, or `None` when null.
    #[inline]
    pub fn get(&self, i: usize) -> Option<&str> {
        if self.0.is_null(i) {
            None
        } else {
            Some(self.0.value(i).trim())
        }
    }

    /// True when row `i` (or its character at 1-based `char_position`) is one of `values`.
    #[inline]
    pub fn matches(&self, i: usize, values: &[String], char_position: Option<usize>) -> bool {
        let Some(text) = self.get(i) else {
            return false;
        };
        match char_position {
            None => values.iter().any(|v| v == text),
            Some(pos) => match text.chars().nth(pos - 1) {
                Some(c) => values
                    .iter()
                    .any(|v| v.chars().count() == 1 && v.starts_with(c)),
                None => false,
            },
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use arrow::array::{Int32Array, StringArray};
    use std::sync::Arc;

    #[test]
    fn text_numbers_with_sentinels() {
        let a: ArrayRef = Arc::new(StringArray::from(vec![
            Some(" 12.5 "),
            Some(""),
            Some("--"),
            Some("99.999"),
            Some("NaN"),
            Some("abc"),
            None,
            Some("1.5D+02"),
        ]));
        let c = NumberColumn::new(&a).unwrap();
        let nt = vec!["--".to_string()];
        let nv = vec![99.999];
        assert_eq!(c.get(0, &nt, &nv), Ok(Some(12.5)));
        assert_eq!(c.get(1, &nt, &nv), Ok(None));
        assert_eq!(c.get(2, &nt, &nv), Ok(None));
        assert_eq!(c.get(3, &nt, &nv), Ok(None));
        assert_eq!(c.get(4, &nt, &nv), Ok(None));
        assert_eq!(
            c.get(5, &nt, &nv),
            Err(NotANumber {
                found: "abc".into()
            })
        );
        assert_eq!(c.get(6, &nt, &nv), Ok(None));
        assert_eq!(c.get(7, &nt, &nv), Ok(Some(150.0)));
    }

    #[test]
    fn integer_columns_read_as_numbers_and_text() {
        let a: ArrayRef = Arc::new(Int32Array::from(vec![Some(-9999), Some(3), None]));
        let c = NumberColumn::new(&a).unwrap();
        assert_eq!(c.get(0, &[], &[-9999.0]), Ok(None));
        assert_eq!(c.get(1, &[], &[-9999.0]), Ok(Some(3.0)));
        assert_eq!(c.get(2, &[], &[]), Ok(None));
        let t = TextColumn::new(&a).unwrap();
        assert_eq!(t.get(1), Some("3"));
    }

    #[test]
    fn flag_characters() {
        let a: ArrayRef = Arc::new(StringArray::from(vec!["AAU", "AUA", "A"]));
        let t = TextColumn::new(&a).unwrap();
        let u = vec!["U".to_string()];
        assert!(t.matches(0, &u, Some(3)));
        assert!(!t.matches(1, &u, Some(3)));
        assert!(!t.matches(2, &u, Some(3)));
        assert!(!t.matches(0, &u, None));
    }
}
