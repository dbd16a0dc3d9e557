//! Warnings a person should read before using a run, with their thresholds.
//!
//! | warning | threshold | why |
//! |---|---|---|
//! | separations wider than the errors | median d of chosen pairs > 1.5 × 1.177, with ≥ 10 chosen pairs | for right errors the median d is 1.177 (Rayleigh, FIELD.md §5.3); half as large again means σ is underestimated by a third or more, or an offset or motion is unmodelled — tolerances in σ are then too tight |
//! | separations narrower than the errors | median d < 0.5 × 1.177, ≥ 10 pairs | errors overstated by a factor two: tolerances too wide, more chance pairs |
//! | false matches | expected chance candidates > 5 % of a pair's candidates | one in twenty pairs by chance is more than the 0.27 % the 3.439 σ tolerance leaves out; the tolerance or the prior needs care |
//! | offset left uncorrected | residual offset beyond both 3 standard errors (scatter/√n) and a tenth of the scatter, in either axis | the rule the matcher itself uses to decide a correction (README); left after correction it biases d |
//! | rows skipped | > 1 % of a catalog's rows | a skipped row loses a source entirely |
//! | values rejected | > 5 % of a band's values | a band mostly rejected by quality rules is hardly usable |
//! | not covered | > 50 % of a band's SED points `not_covered` | most objects lie outside that catalog's footprint: check the footprint or the MOC |
//!
//! The thresholds are our choices (common practice in spirit, not from a publication).

use serde::Serialize;

use super::stats::RAYLEIGH_MEDIAN;
use super::summary::Summary;

/// Median-d ratio above which a pair's separations are called too wide.
pub const WIDE_RATIO: f64 = 1.5;
/// Median-d ratio below which a pair's separations are called too narrow.
pub const NARROW_RATIO: f64 = 0.5;
/// Chosen pairs a catalog pair needs before its median d is judged.
pub const MIN_PAIRS: u64 = 10;
/// False-match fraction of candidates that warns.
pub const FALSE_FRACTION: f64 = 0.05;
/// Fraction of rows skipped that warns.
pub const SKIPPED_FRACTION: f64 = 0.01;
/// Fraction of a band's values rejected that warns.
pub const REJECTED_FRACTION: f64 = 0.05;
/// Fraction of a band's SED points not covered that warns.
pub const NOT_COVERED_FRACTION: f64 = 0.5;

/// One warning: a short kind and a sentence with the numbers.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Warning {
    /// `wide_separations`, `narrow_separations`, `false_matches`, `offset_left`,
    /// `rows_skipped`, `values_rejected`, `not_covered`.
    pub kind: String,
    /// What was found, with the threshold.
    pub message: String,
}

fn warn(kind: &str, message: String) -> Warning {
    Warning {
        kind: kind.to_string(),
        message,
    }
}

/// All warnings of a summary, in a fixed order.
pub fn warnings(s: &Summary) -> Vec<Warning> {
    let mut w = Vec::new();
    for p in &s.pairs {
        let (Some(m), true) = (p.median_norm_dist, p.chosen >= MIN_PAIRS) else {
            continue;
        };
        if m > WIDE_RATIO * RAYLEIGH_MEDIAN {
            w.push(warn(
                "wide_separations",
                format!(
                    "{} x {}: median normalized distance of {} chosen pairs is {m:.2}, above {WIDE_RATIO} x {RAYLEIGH_MEDIAN:.3}: the stated errors are too small, or an offset or proper motion is not modelled",
                    p.catalog_a, p.catalog_b, p.chosen
                ),
            ));
        } else if m < NARROW_RATIO * RAYLEIGH_MEDIAN {
            w.push(warn(
                "narrow_separations",
                format!(
                    "{} x {}: median normalized distance of {} chosen pairs is {m:.2}, below {NARROW_RATIO} x {RAYLEIGH_MEDIAN:.3}: the stated errors are too large",
                    p.catalog_a, p.catalog_b, p.chosen
                ),
            ));
        }
    }
    for f in &s.false_matches {
        if f.false_fraction > FALSE_FRACTION {
            w.push(warn(
                "false_matches",
                format!(
                    "{} x {}: {:.1} of {} candidates ({:.1} %) expected by chance, above {:.0} %",
                    f.catalog_a,
                    f.catalog_b,
                    f.expected_false,
                    f.real_candidates,
                    100.0 * f.false_fraction,
                    100.0 * FALSE_FRACTION
                ),
            ));
        }
    }
    for o in &s.offsets {
        let Some(r) = &o.residual else { continue };
        if r.n < 3 {
            continue;
        }
        let root_n = (r.n as f64).sqrt();
        let left =
            |off: f64, width: f64| off.abs() > 3.0 * width / root_n && off.abs() > 0.1 * width;
        if left(r.dra_cosdec_arcsec, r.width_ra_arcsec) || left(r.ddec_arcsec, r.width_dec_arcsec) {
            w.push(warn(
                "offset_left",
                format!(
                    "{} vs {}: offset ({:+.3}, {:+.3})\" left after correction, scatter ({:.3}, {:.3})\" over {} pairs: beyond 3 standard errors and a tenth of the scatter",
                    o.catalog,
                    o.reference,
                    r.dra_cosdec_arcsec,
                    r.ddec_arcsec,
                    r.width_ra_arcsec,
                    r.width_dec_arcsec,
                    r.n
                ),
            ));
        }
    }
    for i in &s.inputs {
        if i.rows_read > 0 && i.rows_skipped as f64 > SKIPPED_FRACTION * i.rows_read as f64 {
            w.push(warn(
                "rows_skipped",
                format!(
                    "{}: {} of {} rows skipped, above {:.0} %",
                    i.catalog,
                    i.rows_skipped,
                    i.rows_read,
                    100.0 * SKIPPED_FRACTION
                ),
            ));
        }
        for (band, &n) in &i.rejected_by_band {
            if i.rows_kept > 0 && n as f64 > REJECTED_FRACTION * i.rows_kept as f64 {
                w.push(warn(
                    "values_rejected",
                    format!(
                        "{} {band}: {n} of {} values rejected, above {:.0} %",
                        i.catalog,
                        i.rows_kept,
                        100.0 * REJECTED_FRACTION
                    ),
                ));
            }
        }
    }
    for b in &s.bands {
        let total: u64 = b.by_status.values().sum();
        let n = b.by_status.get("not_covered").copied().unwrap_or(0);
        if total > 0 && n as f64 > NOT_COVERED_FRACTION * total as f64 {
            w.push(warn(
                "not_covered",
                format!(
                    "{} {}: {n} of {total} objects not covered, above {:.0} %",
                    b.catalog,
                    b.band,
                    100.0 * NOT_COVERED_FRACTION
                ),
            ));
        }
    }
    w
}

/// The lines the build summary ends with: the report files, then the
/// warnings (nothing when the plan turned the report off).
pub fn build_lines(w: Option<&[Warning]>) -> String {
    let Some(w) = w else {
        return String::new();
    };
    format!(
        "         {}\n         {}\n{}",
        super::HTML_FILE,
        super::JSON_FILE,
        if w.is_empty() {
            String::new()
        } else {
            format!("\n{}", summary_lines(w))
        }
    )
}

/// The warnings as lines for the build summary ("" when there are none).
pub fn summary_lines(w: &[Warning]) -> String {
    let mut s = String::new();
    for x in w {
        s.push_str(&format!("warning  {}\n", x.message));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::stats::norm_dist_histogram;
    use crate::report::summary::{
        BandReport, FalseMatchReport, InputReport, ObjectCounts, OffsetCloud, OffsetReport,
        PairReport,
    };
    use std::collections::BTreeMap;

    fn pair(median_d: f64, chosen: u64) -> PairReport {
        PairReport {
            catalog_a: "a".into(),
            catalog_b: "b".into(),
            candidates: chosen,
            chosen,
            median_sep_arcsec: None,
            median_sigma_arcsec: None,
            median_norm_dist: Some(median_d),
            median_ratio: Some(median_d / RAYLEIGH_MEDIAN),
            ks_distance: None,
            fraction_beyond_3439: None,
            sep_histogram: norm_dist_histogram(&[]),
            norm_dist_histogram: norm_dist_histogram(&[]),
            chosen_by_status: BTreeMap::new(),
            offsets_after: None,
            offsets_before: None,
        }
    }

    fn summary() -> Summary {
        Summary {
            field: "f".into(),
            fluxloom_version: "0".into(),
            inputs: Vec::new(),
            pairs: Vec::new(),
            offsets: Vec::new(),
            false_matches: Vec::new(),
            bands: Vec::new(),
            objects: ObjectCounts {
                objects: 0,
                by_catalogs: BTreeMap::new(),
                by_flag: BTreeMap::new(),
                by_status: BTreeMap::new(),
            },
            science_classes: None,
        }
    }

    #[test]
    fn each_threshold_warns_just_beyond_it() {
        let mut s = summary();
        // 1.5 x 1.177 = 1.766: 1.75 passes, 1.78 warns; too few pairs never warn.
        s.pairs = vec![
            pair(1.75, 100),
            pair(1.78, 100),
            pair(3.0, 9),
            pair(0.5, 100),
        ];
        s.false_matches = vec![FalseMatchReport {
            catalog_a: "a".into(),
            catalog_b: "b".into(),
            real_candidates: 100,
            expected_false: 6.0,
            false_fraction: 0.06,
            shift_arcsec: Some(30.0),
            by_radius: Vec::new(),
        }];
        s.bands = vec![BandReport {
            catalog: "c".into(),
            band: "x".into(),
            by_status: BTreeMap::from([("not_covered".into(), 6), ("detected".into(), 4)]),
        }];
        let w = warnings(&s);
        let kinds: Vec<&str> = w.iter().map(|x| x.kind.as_str()).collect();
        assert_eq!(
            kinds,
            [
                "wide_separations",
                "narrow_separations",
                "false_matches",
                "not_covered"
            ]
        );
        assert_eq!(
            w[0].message,
            "a x b: median normalized distance of 100 chosen pairs is 1.78, above 1.5 x 1.177: the stated errors are too small, or an offset or proper motion is not modelled"
        );
        assert_eq!(
            w[2].message,
            "a x b: 6.0 of 100 candidates (6.0 %) expected by chance, above 5 %"
        );
        assert_eq!(
            summary_lines(&w[3..]),
            "warning  c x: 6 of 10 objects not covered, above 50 %\n"
        );
        assert!(warnings(&summary()).is_empty());
    }

    #[test]
    fn offsets_left_and_rows_lost_warn() {
        let cloud = |dra: f64| OffsetCloud {
            n: 100,
            dra_cosdec_arcsec: dra,
            ddec_arcsec: 0.0,
            width_ra_arcsec: 0.1,
            width_dec_arcsec: 0.1,
            points: Vec::new(),
        };
        let mut s = summary();
        // Standard error 0.1 / 10 = 0.01: 3 of them is 0.03, a tenth of the scatter 0.01.
        s.offsets = [0.029, 0.031]
            .iter()
            .map(|&d| OffsetReport {
                catalog: format!("c{d}"),
                reference: "r".into(),
                initial: Some(cloud(d)),
                residual: Some(cloud(d)),
                applied_arcsec: (0.0, 0.0),
                floor_measured_arcsec: None,
                floor_used_arcsec: None,
                floor_origin: None,
            })
            .collect();
        s.inputs = vec![InputReport {
            catalog: "c".into(),
            file: "c.csv".into(),
            sha256: String::new(),
            rows_read: 1000,
            rows_kept: 989,
            rows_skipped: 11,
            rejected_by_band: BTreeMap::from([("x".into(), 49), ("y".into(), 50)]),
        }];
        let w = warnings(&s);
        let text: Vec<&str> = w.iter().map(|x| x.message.as_str()).collect();
        assert_eq!(
            text,
            [
                "c0.031 vs r: offset (+0.031, +0.000)\" left after correction, scatter (0.100, 0.100)\" over 100 pairs: beyond 3 standard errors and a tenth of the scatter",
                "c: 11 of 1000 rows skipped, above 1 %",
                "c y: 50 of 989 values rejected, above 5 %",
            ]
        );
    }
}
