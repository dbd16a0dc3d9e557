//! The report's figures as inline SVG, drawn with [`crate::plot`].
//!
//! Until the drawing module is merged, every figure is an empty string and
//! the page shows the tables only.
#![allow(missing_docs, clippy::missing_docs_in_private_items)]
use super::cards::Card;
use super::data::OutputFolder;
use super::summary::*;
use crate::error::Result;
use std::collections::BTreeMap;
pub fn separations(_p: &PairReport) -> String {
    String::new()
}
pub fn norm_dists(_p: &PairReport) -> String {
    String::new()
}
pub fn pair_offsets(_p: &PairReport, _b: &OffsetCloud, _a: &OffsetCloud) -> String {
    String::new()
}
pub fn offsets(_o: &[OffsetReport]) -> String {
    String::new()
}
pub fn false_matches(_o: &[FalseMatchReport]) -> String {
    String::new()
}
pub fn by_catalogs(_o: &BTreeMap<u64, u64>) -> String {
    String::new()
}
pub fn by_flag(_o: &BTreeMap<String, u64>) -> String {
    String::new()
}
pub fn bands(_o: &[BandReport]) -> String {
    String::new()
}
pub fn classes(_o: &BTreeMap<String, u64>) -> String {
    String::new()
}
pub fn card_chart(_c: &Card) -> String {
    String::new()
}
pub fn sky(_o: &OutputFolder) -> Result<Vec<String>> {
    Ok(Vec::new())
}
