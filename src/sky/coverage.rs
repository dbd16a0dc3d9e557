//! Survey footprints: which parts of the sky a catalog covers.
//!
//! A [`Coverage`] is a set of HEALPix NESTED cells at mixed orders, as in the
//! IVOA MOC standard (MOC 1.1, 2019-10-07): each cell is stored as its NUNIQ
//! number 4·4^k + p (order k, pixel p). It comes either from a MOC file (FITS
//! with a `UNIQ` column, or the ASCII serialization `order/p1-p2 p3 ...`), or from
//! a catalog's own positions ([`Coverage::from_positions`]): the cells at one
//! order that hold at least one source.
//!
//! Coverage decides between "not detected" (the survey looked and saw nothing)
//! and "not covered" (the survey never looked) for a band without a source.

use std::collections::HashSet;
use std::path::Path;

use arrow::array::AsArray;
use arrow::datatypes::{DataType, Int32Type, Int64Type, UInt32Type, UInt64Type};

use super::partition::home_cell;
use crate::catalog::fits::{FitsOptions, read_fits};
use crate::error::{Error, Result};

/// Deepest HEALPix order a MOC may hold.
pub const MAX_ORDER: u8 = 29;

/// A set of HEALPix cells at mixed orders.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Coverage {
    /// Cells per order: `cells[k]` holds the NESTED pixel numbers at order k.
    cells: Vec<HashSet<u64>>,
}

impl Coverage {
    /// The cells of `order` that hold at least one of the positions.
    pub fn from_positions(order: u8, ra_deg: &[f64], dec_deg: &[f64]) -> Coverage {
        let mut c = Coverage::default();
        for (&ra, &dec) in ra_deg.iter().zip(dec_deg) {
            c.insert(order, home_cell(order, ra, dec));
        }
        c
    }

    /// Adds cell `pixel` at `order`.
    pub fn insert(&mut self, order: u8, pixel: u64) {
        let k = order as usize;
        if self.cells.len() <= k {
            self.cells.resize_with(k + 1, HashSet::new);
        }
        self.cells[k].insert(pixel);
    }

    /// Adds a cell given as NUNIQ = 4·4^k + p.
    ///
    /// # Errors
    /// A message when the number is not a valid NUNIQ up to order 29.
    pub fn insert_nuniq(&mut self, nuniq: u64) -> std::result::Result<(), String> {
        if nuniq < 4 {
            return Err(format!(
                "{nuniq} is not a NUNIQ cell number (they start at 4)"
            ));
        }
        // Order k is the largest with 4·4^k <= nuniq: (bit length − 3) / 2.
        let order = (63 - nuniq.leading_zeros() as u64 - 2) / 2;
        if order > MAX_ORDER as u64 {
            return Err(format!("{nuniq} is beyond HEALPix order 29"));
        }
        let pixel = nuniq - 4 * (1u64 << (2 * order));
        self.insert(order as u8, pixel);
        Ok(())
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.cells.iter().map(HashSet::len).sum()
    }

    /// True when no cell is set.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Deepest order holding a cell.
    pub fn max_order(&self) -> Option<u8> {
        self.cells
            .iter()
            .rposition(|s| !s.is_empty())
            .map(|k| k as u8)
    }

    /// True when the position falls in a cell of the coverage.
    pub fn contains(&self, ra_deg: f64, dec_deg: f64) -> bool {
        let Some(deepest) = self.max_order() else {
            return false;
        };
        let pixel = home_cell(deepest, ra_deg, dec_deg);
        (0..=deepest).any(|k| {
            let set = &self.cells[k as usize];
            !set.is_empty() && set.contains(&(pixel >> (2 * (deepest - k))))
        })
    }

    /// Covered area, steradians (cells of a MOC do not overlap).
    pub fn area_sr(&self) -> f64 {
        self.cells
            .iter()
            .enumerate()
            .map(|(k, s)| s.len() as f64 * super::partition::cell_area_sr(k as u8))
            .sum()
    }

    /// Reads a MOC file: FITS (a binary table with an integer `UNIQ` column) or the
    /// ASCII serialization (`3/1-4 6 5/120-130`), decided by the file's first bytes.
    ///
    /// # Errors
    /// I/O errors, and [`Error::Format`] naming the file and what was found.
    pub fn from_moc_file(path: &Path) -> Result<Coverage> {
        let head = {
            use std::io::Read;
            let mut buf = [0u8; 6];
            let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
            let n = f.read(&mut buf).map_err(|e| Error::io(path, e))?;
            buf[..n].to_vec()
        };
        let coverage = if head.starts_with(b"SIMPLE") {
            Self::from_moc_fits(path)?
        } else {
            let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
            Self::from_moc_ascii(&text).map_err(|m| Error::format(path, m))?
        };
        if coverage.is_empty() {
            return Err(Error::format(
                path,
                "the MOC covers no sky cell, expected at least one (an empty coverage would mark every object not_covered)",
            ));
        }
        Ok(coverage)
    }

    fn from_moc_fits(path: &Path) -> Result<Coverage> {
        let stream = read_fits(
            path,
            &FitsOptions {
                hdu: None,
                batch_rows: 65_536,
            },
        )?;
        let Some((index, field)) = stream.schema.column_with_name("UNIQ") else {
            return Err(Error::format(
                path,
                "a MOC FITS file needs a binary table column named UNIQ",
            ));
        };
        let data_type = field.data_type().clone();
        let mut coverage = Coverage::default();
        for batch in stream.batches {
            let batch = batch?;
            let col = batch.column(index);
            let values: Vec<u64> = match data_type {
                DataType::Int64 => col
                    .as_primitive::<Int64Type>()
                    .iter()
                    .flatten()
                    .map(|v| v as u64)
                    .collect(),
                DataType::Int32 => col
                    .as_primitive::<Int32Type>()
                    .iter()
                    .flatten()
                    .map(|v| v as u64)
                    .collect(),
                DataType::UInt64 => col.as_primitive::<UInt64Type>().iter().flatten().collect(),
                DataType::UInt32 => col
                    .as_primitive::<UInt32Type>()
                    .iter()
                    .flatten()
                    .map(u64::from)
                    .collect(),
                ref other => {
                    return Err(Error::format(
                        path,
                        format!(
                            "MOC column UNIQ has type {other}, expected 32- or 64-bit integers"
                        ),
                    ));
                }
            };
            for v in values {
                coverage
                    .insert_nuniq(v)
                    .map_err(|m| Error::format(path, format!("MOC column UNIQ: {m}")))?;
            }
        }
        Ok(coverage)
    }

    /// Parses the MOC ASCII serialization: `order/` followed by pixels and ranges.
    ///
    /// # Errors
    /// A message naming the token that is not understood.
    pub fn from_moc_ascii(text: &str) -> std::result::Result<Coverage, String> {
        let mut coverage = Coverage::default();
        let mut order: Option<u8> = None;
        for token in text
            .split(|c: char| c.is_whitespace() || c == ',')
            .filter(|t| !t.is_empty())
        {
            let (new_order, rest) = match token.split_once('/') {
                Some((o, rest)) => {
                    let o: u8 = o.parse().ok().filter(|o| *o <= MAX_ORDER).ok_or_else(|| {
                        format!("\"{token}\": expected an order 0 to 29 before '/'")
                    })?;
                    (Some(o), rest)
                }
                None => (order, token),
            };
            order = new_order;
            if rest.is_empty() {
                continue;
            }
            let k = order
                .ok_or_else(|| format!("\"{token}\": expected an order first, as in 3/1-4"))?;
            let max_pixel = 12u64 << (2 * k as u64);
            let (lo, hi) = match rest.split_once('-') {
                Some((a, b)) => (a.parse::<u64>(), b.parse::<u64>()),
                None => (rest.parse::<u64>(), rest.parse::<u64>()),
            };
            let (Ok(lo), Ok(hi)) = (lo, hi) else {
                return Err(format!(
                    "\"{token}\": expected a pixel number or a range such as 4-7"
                ));
            };
            if lo > hi || hi >= max_pixel {
                return Err(format!(
                    "\"{token}\": pixels at order {k} run from 0 to {}",
                    max_pixel - 1
                ));
            }
            for p in lo..=hi {
                coverage.insert(k, p);
            }
        }
        Ok(coverage)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nuniq_round_trip() {
        // NUNIQ = 4·4^k + p (IVOA MOC 1.1 §2.3.1): order 0 pixel 0 is 4, order 1
        // pixel 0 is 16, order 29 pixel 0 is 4^30.
        let mut c = Coverage::default();
        c.insert_nuniq(4).unwrap();
        c.insert_nuniq(16 + 5).unwrap();
        c.insert_nuniq(1u64 << 60).unwrap();
        assert_eq!(c.cells[0], HashSet::from([0]));
        assert_eq!(c.cells[1], HashSet::from([5]));
        assert_eq!(c.cells[29], HashSet::from([0]));
        assert!(c.insert_nuniq(3).is_err());
    }

    #[test]
    fn ascii_serialization() {
        let c = Coverage::from_moc_ascii("3/1-3 7\n4/100").unwrap();
        assert_eq!(c.len(), 5);
        assert_eq!(c.max_order(), Some(4));
        assert!(Coverage::from_moc_ascii("1-3").is_err());
        assert!(Coverage::from_moc_ascii("0/12").is_err());
        assert!(Coverage::from_moc_ascii("2/x").is_err());
    }

    #[test]
    fn containment_through_parent_cells() {
        // A position's order-8 cell p lies in the order-5 cell p >> 6 (NESTED scheme,
        // Górski et al. 2005).
        let (ra, dec) = (150.1, 2.2);
        let p8 = home_cell(8, ra, dec);
        let mut c = Coverage::default();
        c.insert(5, p8 >> 6);
        assert!(c.contains(ra, dec));
        assert!(!c.contains(ra + 10.0, dec));
        let derived = Coverage::from_positions(8, &[ra], &[dec]);
        assert!(derived.contains(ra, dec));
        assert!((derived.area_sr() - super::super::partition::cell_area_sr(8)).abs() < 1e-18);
    }
}

#[cfg(test)]
mod file_tests {
    use std::sync::Arc;

    use arrow::array::{Int64Array, RecordBatch};
    use arrow::datatypes::{DataType, Field, Schema};

    use super::*;

    #[test]
    fn a_moc_fits_file_with_a_uniq_column_is_read() {
        // Two cells: order 3 pixel 100 (NUNIQ 4·4³ + 100 = 356) and order 5 pixel 7
        // (NUNIQ 4·4⁵ + 7 = 4103), written as a FITS binary table the way MOC 1.1
        // files are (one 64-bit integer column UNIQ).
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("moc.fits");
        let schema = Arc::new(Schema::new(vec![Field::new(
            "UNIQ",
            DataType::Int64,
            false,
        )]));
        let batch = RecordBatch::try_new(
            schema.clone(),
            vec![Arc::new(Int64Array::from(vec![356, 4103]))],
        )
        .unwrap();
        crate::output::fits::write_fits(&path, &schema, &[batch], "MOC", &[]).unwrap();
        let c = Coverage::from_moc_file(&path).unwrap();
        assert_eq!(c.len(), 2);
        assert_eq!(c.max_order(), Some(5));
        assert!(c.cells[3].contains(&100));
        assert!(c.cells[5].contains(&7));

        let ascii = dir.path().join("moc.txt");
        std::fs::write(&ascii, "3/100 5/7\n").unwrap();
        assert_eq!(Coverage::from_moc_file(&ascii).unwrap(), c);

        let bad = dir.path().join("bad.txt");
        std::fs::write(&bad, "3/100 5/x\n").unwrap();
        let err = Coverage::from_moc_file(&bad).unwrap_err().to_string();
        assert!(
            err.ends_with("bad.txt: \"5/x\": expected a pixel number or a range such as 4-7"),
            "{err}"
        );
    }

    #[test]
    fn an_empty_moc_file_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        for (name, text) in [("empty.txt", ""), ("orders.txt", "3/ 5/\n")] {
            let path = dir.path().join(name);
            std::fs::write(&path, text).unwrap();
            let err = Coverage::from_moc_file(&path).unwrap_err().to_string();
            assert_eq!(
                err,
                format!(
                    "{}: the MOC covers no sky cell, expected at least one (an empty coverage would mark every object not_covered)",
                    path.display()
                )
            );
        }
    }
}
