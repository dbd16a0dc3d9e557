//! Typed access to a file's columns, whatever type the file stored them as.
//!
//! Catalog files store numbers as floats, integers or text (CSV always text).
//! [`NumberColumn`] gives every row as `Option<f64>`, treating empty text, NaN
//! and the schema's null sentinels as missing and reporting any other text it
//! cannot parse, with the user's original text. [`TextColumn`] gives flags and
//! identifiers as strings.

use arrow::array::{Array, ArrayRef, AsArray, Float64Array, Int64Array, StringArray, UInt64Array};
use arrow::compute::cast;
use arrow::datatypes::{DataType, UInt64Type};

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

impl TextColumn {
    /// The longest value (in characters, surrounding blanks removed) of rows
    /// `0..len`, with its length; `None` when every row is null.
    pub fn longest(&self) -> Option<(usize, &str)> {
        let mut best: Option<(usize, &str)> = None;
        for i in 0..self.0.len() {
            if let Some(text) = self.get(i) {
                let n = text.chars().count();
                if best.is_none_or(|(m, _)| n > m) {
                    best = Some((n, text));
                }
            }
        }
        best
    }
}

/// An integer flag column whose bits are tested, whatever type the file
/// stored it as (integers, booleans, integral floats, or text holding them).
pub enum BitsColumn {
    /// Stored as integers or booleans, as signed 64-bit values.
    Signed(Int64Array),
    /// Stored as unsigned 64-bit integers.
    Unsigned(UInt64Array),
    /// Stored as floats (FITS and VOTable readers may scale integers).
    Float(Float64Array),
    /// Stored as text (CSV).
    Text(StringArray),
}

impl BitsColumn {
    /// Wraps a file column; `None` when its type holds neither numbers nor text.
    pub fn new(array: &ArrayRef) -> Option<BitsColumn> {
        match array.data_type() {
            DataType::Utf8 | DataType::LargeUtf8 | DataType::Utf8View => {
                let text = cast(array, &DataType::Utf8).ok()?;
                Some(BitsColumn::Text(text.as_string::<i32>().clone()))
            }
            DataType::UInt64 => Some(BitsColumn::Unsigned(
                array.as_primitive::<UInt64Type>().clone(),
            )),
            DataType::Float16 | DataType::Float32 | DataType::Float64 => {
                let values = cast(array, &DataType::Float64).ok()?;
                Some(BitsColumn::Float(values.as_primitive().clone()))
            }
            t if t.is_integer() || *t == DataType::Boolean || *t == DataType::Null => {
                let values = cast(array, &DataType::Int64).ok()?;
                Some(BitsColumn::Signed(values.as_primitive().clone()))
            }
            _ => None,
        }
    }

    /// The bits of row `i`: `Ok(None)` when null or empty, an error carrying the
    /// original text when the cell is not a non-negative integer.
    #[inline]
    pub fn get(&self, i: usize) -> Result<Option<u64>, NotANumber> {
        let bad = |found: String| Err(NotANumber { found });
        match self {
            BitsColumn::Signed(a) => {
                if a.is_null(i) {
                    return Ok(None);
                }
                let v = a.value(i);
                u64::try_from(v).map(Some).or_else(|_| bad(v.to_string()))
            }
            BitsColumn::Unsigned(a) => Ok(a.is_valid(i).then(|| a.value(i))),
            BitsColumn::Float(a) => {
                if a.is_null(i) || a.value(i).is_nan() {
                    return Ok(None);
                }
                let v = a.value(i);
                // 2^64 is exactly representable; every integral float below it converts.
                if (0.0..18_446_744_073_709_551_616.0).contains(&v) && v.fract() == 0.0 {
                    Ok(Some(v as u64))
                } else {
                    bad(v.to_string())
                }
            }
            BitsColumn::Text(a) => {
                if a.is_null(i) {
                    return Ok(None);
                }
                let raw = a.value(i);
                let text = raw.trim();
                if text.is_empty() {
                    return Ok(None);
                }
                match text.parse::<u64>() {
                    Ok(v) => Ok(Some(v)),
                    Err(_) => bad(raw.to_string()),
                }
            }
        }
    }

    /// True when row `i` has any (with `all`, every) bit of `mask` set; a null
    /// row has none set.
    #[inline]
    pub fn matches(&self, i: usize, mask: u64, all: bool) -> Result<bool, NotANumber> {
        Ok(match self.get(i)? {
            None => false,
            Some(v) if all => v & mask == mask,
            Some(v) => v & mask != 0,
        })
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
    fn bits_from_integers_floats_and_text() {
        // 12 = 0b1100: bits 2 and 3 set.
        let ints: ArrayRef = Arc::new(Int32Array::from(vec![Some(12), Some(1), None, Some(-1)]));
        let c = BitsColumn::new(&ints).unwrap();
        assert_eq!(c.matches(0, 0x08, false), Ok(true));
        assert_eq!(c.matches(0, 0x0c, true), Ok(true));
        assert_eq!(c.matches(1, 0x0c, false), Ok(false));
        assert_eq!(c.matches(2, 0x0c, false), Ok(false));
        assert_eq!(c.get(3), Err(NotANumber { found: "-1".into() }));
        let text: ArrayRef = Arc::new(StringArray::from(vec![" 5 ", "", "3.5", "0x4"]));
        let c = BitsColumn::new(&text).unwrap();
        assert_eq!(c.get(0), Ok(Some(5)));
        assert_eq!(c.get(1), Ok(None));
        assert_eq!(
            c.get(2),
            Err(NotANumber {
                found: "3.5".into()
            })
        );
        assert_eq!(
            c.get(3),
            Err(NotANumber {
                found: "0x4".into()
            })
        );
        // 5 = 0b101: all of 0x5 set, not all of 0x7.
        assert_eq!(c.matches(0, 0x5, true), Ok(true));
        assert_eq!(c.matches(0, 0x7, true), Ok(false));
        assert_eq!(c.matches(0, 0x7, false), Ok(true));
        let floats: ArrayRef = Arc::new(Float64Array::from(vec![Some(8.0), Some(8.5), None]));
        let c = BitsColumn::new(&floats).unwrap();
        assert_eq!(c.get(0), Ok(Some(8)));
        assert_eq!(
            c.get(1),
            Err(NotANumber {
                found: "8.5".into()
            })
        );
        assert_eq!(c.get(2), Ok(None));
        let bools: ArrayRef = Arc::new(arrow::array::BooleanArray::from(vec![true, false]));
        let c = BitsColumn::new(&bools).unwrap();
        assert_eq!(c.matches(0, 1, false), Ok(true));
        assert_eq!(c.matches(1, 1, false), Ok(false));
    }

    #[test]
    fn the_longest_flag_value() {
        let a: ArrayRef = Arc::new(StringArray::from(vec![Some("AB "), None, Some("ABC")]));
        assert_eq!(TextColumn::new(&a).unwrap().longest(), Some((3, "ABC")));
        let none: ArrayRef = Arc::new(StringArray::from(vec![None::<&str>]));
        assert_eq!(TextColumn::new(&none).unwrap().longest(), None);
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
