//! The numbers of the report, computed from an output folder's tables and
//! `run.json`; serialized as `report.json` and drawn as the report's figures.

use std::collections::BTreeMap;

use serde::Serialize;

use super::data::OutputFolder;
use super::stats::{
    Histogram, RAYLEIGH_MEDIAN, ks_distance, median, norm_dist_histogram, pair_sigmas,
    robust_width, separation_histogram,
};
use crate::error::Result;

/// Median and robust width of a set of offsets, arcsec.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct OffsetCloud {
    /// Pairs used.
    pub n: u64,
    /// Median Δα cos δ (catalog b minus catalog a).
    pub dra_cosdec_arcsec: f64,
    /// Median Δδ.
    pub ddec_arcsec: f64,
    /// 1.4826 · MAD of Δα cos δ.
    pub width_ra_arcsec: f64,
    /// 1.4826 · MAD of Δδ.
    pub width_dec_arcsec: f64,
    /// The offsets themselves, (Δα cos δ, Δδ) per pair, for the scatter plot.
    #[serde(skip)]
    pub points: Vec<(f64, f64)>,
}

impl OffsetCloud {
    fn of(points: Vec<(f64, f64)>) -> Option<OffsetCloud> {
        let ra: Vec<f64> = points.iter().map(|p| p.0).collect();
        let dec: Vec<f64> = points.iter().map(|p| p.1).collect();
        Some(OffsetCloud {
            n: points.len() as u64,
            dra_cosdec_arcsec: median(&ra)?,
            ddec_arcsec: median(&dec)?,
            width_ra_arcsec: robust_width(&ra)?,
            width_dec_arcsec: robust_width(&dec)?,
            points,
        })
    }
}

/// One catalog pair: its chosen pairs against the law of the stated errors.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct PairReport {
    /// The earlier catalog in the plan.
    pub catalog_a: String,
    /// The later catalog.
    pub catalog_b: String,
    /// Candidate pairs (rows of links.parquet for this pair).
    pub candidates: u64,
    /// Chosen pairs (both sources in one object).
    pub chosen: u64,
    /// Median separation of chosen pairs, arcsec.
    pub median_sep_arcsec: Option<f64>,
    /// Median combined 1σ recovered as sep / norm_dist, arcsec.
    pub median_sigma_arcsec: Option<f64>,
    /// Median normalized distance of chosen pairs (1.177 expected).
    pub median_norm_dist: Option<f64>,
    /// `median_norm_dist` / 1.177.
    pub median_ratio: Option<f64>,
    /// Kolmogorov–Smirnov distance of chosen d from the χ²₂ law.
    pub ks_distance: Option<f64>,
    /// Fraction of chosen pairs with d > 3.439 (0.0027 expected).
    pub fraction_beyond_3439: Option<f64>,
    /// Chosen separations against the Rayleigh mixture of the pairs' own σ.
    pub sep_histogram: Histogram,
    /// Chosen normalized distances against the χ²₂ law.
    pub norm_dist_histogram: Histogram,
    /// Chosen pairs by the status of the object they are in.
    pub chosen_by_status: BTreeMap<String, u64>,
    /// Offsets of chosen pairs, when links.parquet carries `dra_cosdec_arcsec`
    /// and `ddec_arcsec`: as matched (after any correction).
    pub offsets_after: Option<OffsetCloud>,
    /// The same, with the applied corrections of run.json taken back out.
    pub offsets_before: Option<OffsetCloud>,
}

/// One catalog's astrometric offset against the reference, from run.json.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct OffsetReport {
    /// The catalog.
    pub catalog: String,
    /// The reference catalog.
    pub reference: String,
    /// Before correction: pairs, median and scatter (run.json `initial`).
    pub initial: Option<OffsetCloud>,
    /// After correction (run.json `residual`).
    pub residual: Option<OffsetCloud>,
    /// Correction added to the catalog's positions, (Δα cos δ, Δδ) arcsec.
    pub applied_arcsec: (f64, f64),
    /// The catalog's systematic floor measured from the same pairs, arcsec
    /// (run.json `floors[].measured_arcsec`).
    pub floor_measured_arcsec: Option<f64>,
    /// The floor the match used, arcsec (run.json `floors[].floor_arcsec`).
    pub floor_used_arcsec: Option<f64>,
    /// Where that floor comes from: `fixed`, `measured` or `not_measured`.
    pub floor_origin: Option<String>,
}

/// A false-match estimate for one catalog pair, from run.json.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct FalseMatchReport {
    /// First catalog.
    pub catalog_a: String,
    /// Second catalog (the shifted one).
    pub catalog_b: String,
    /// Candidates in the real run.
    pub real_candidates: u64,
    /// Mean candidates over the shifted copies: chance pairs expected.
    pub expected_false: f64,
    /// `expected_false` / `real_candidates`.
    pub false_fraction: f64,
    /// The shift, arcsec.
    pub shift_arcsec: Option<f64>,
    /// Per radius (arcsec, fraction), when run.json gives `by_radius`.
    pub by_radius: Vec<(f64, f64)>,
}

/// SED points of one catalog band by status, counted in photometry.parquet.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct BandReport {
    /// Catalog that measures the band.
    pub catalog: String,
    /// Band id.
    pub band: String,
    /// Points per status (`saturated` appears when the tables use it).
    pub by_status: BTreeMap<String, u64>,
}

/// Objects and flags, counted in objects.parquet.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ObjectCounts {
    /// Objects.
    pub objects: u64,
    /// Objects by number of catalogs.
    pub by_catalogs: BTreeMap<u64, u64>,
    /// Objects carrying each flag (names from the `status` column).
    pub by_flag: BTreeMap<String, u64>,
    /// Objects by `status` text.
    pub by_status: BTreeMap<String, u64>,
}

/// A catalog input's provenance and read counts, from run.json.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct InputReport {
    /// Catalog name.
    pub catalog: String,
    /// File as given in the plan.
    pub file: String,
    /// SHA-256 of the file.
    pub sha256: String,
    /// Rows read.
    pub rows_read: u64,
    /// Rows kept.
    pub rows_kept: u64,
    /// Rows skipped, all reasons.
    pub rows_skipped: u64,
    /// Band values rejected, per band.
    pub rejected_by_band: BTreeMap<String, u64>,
}

/// Everything in `report.json`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Summary {
    /// Field name.
    pub field: String,
    /// fluxloom version that wrote the run.
    pub fluxloom_version: String,
    /// Inputs.
    pub inputs: Vec<InputReport>,
    /// Per catalog pair, in plan order.
    pub pairs: Vec<PairReport>,
    /// Per catalog offsets against the reference.
    pub offsets: Vec<OffsetReport>,
    /// Per catalog pair false-match estimates.
    pub false_matches: Vec<FalseMatchReport>,
    /// Per catalog band statuses.
    pub bands: Vec<BandReport>,
    /// Object counts.
    pub objects: ObjectCounts,
    /// Science classes (`class` or `*_class` column of science.parquet), when present.
    pub science_classes: Option<BTreeMap<String, u64>>,
}

fn count<K: Ord>(map: &mut BTreeMap<K, u64>, key: K) {
    *map.entry(key).or_insert(0) += 1;
}

/// Flag names of one object's `status` text: `clean` is no flag, `single`
/// (a clean one-catalog object) is `single_catalog`.
pub fn flag_names(status: &str) -> impl Iterator<Item = &str> {
    status
        .split('+')
        .filter(|s| !s.is_empty() && *s != "clean")
        .map(|s| if s == "single" { "single_catalog" } else { s })
}

impl Summary {
    /// Computes the summary of an output folder.
    ///
    /// # Errors
    /// A missing column, named with its file.
    pub fn of(out: &OutputFolder) -> Result<Summary> {
        let catalogs = out.catalogs();
        Ok(Summary {
            field: out.run["field"].as_str().unwrap_or("").to_string(),
            fluxloom_version: out.run["fluxloom_version"]
                .as_str()
                .unwrap_or("")
                .to_string(),
            inputs: inputs(out),
            pairs: pairs(out, &catalogs)?,
            offsets: offsets(out),
            false_matches: false_matches(out),
            bands: bands(out)?,
            objects: objects(out)?,
            science_classes: science_classes(out)?,
        })
    }

    /// The report as pretty-printed JSON.
    ///
    /// # Errors
    /// A usage error if serialization fails (it does not for these types).
    pub fn to_json(&self) -> Result<String> {
        serde_json::to_string_pretty(self).map_err(|e| crate::Error::Usage(e.to_string()))
    }
}

/// Objects per class of science.parquet: its column `class`, else the first
/// column whose name ends in `_class`.
fn science_classes(out: &OutputFolder) -> Result<Option<BTreeMap<String, u64>>> {
    let Some(t) = &out.science else {
        return Ok(None);
    };
    let names = t.names();
    let Some(column) = names
        .iter()
        .find(|n| *n == "class")
        .or_else(|| names.iter().find(|n| n.ends_with("_class")))
    else {
        return Ok(None);
    };
    let mut m = BTreeMap::new();
    for c in t.text(column)? {
        count(&mut m, c.unwrap_or_else(|| "(none)".into()));
    }
    Ok(Some(m))
}

fn u(v: &serde_json::Value) -> u64 {
    v.as_u64().unwrap_or(0)
}

fn inputs(out: &OutputFolder) -> Vec<InputReport> {
    let Some(inputs) = out.run["inputs"].as_array() else {
        return Vec::new();
    };
    inputs
        .iter()
        .map(|i| {
            let n = &i["normalize"];
            let skipped = n["rows_skipped"]
                .as_object()
                .map(|m| m.values().map(u).sum())
                .unwrap_or(0);
            let rejected_by_band = n["bands"]
                .as_array()
                .map(|bands| {
                    bands
                        .iter()
                        .map(|b| {
                            (
                                b["band"].as_str().unwrap_or("?").to_string(),
                                u(&b["by_status"]["rejected"]),
                            )
                        })
                        .collect()
                })
                .unwrap_or_default();
            InputReport {
                catalog: i["catalog"].as_str().unwrap_or("?").to_string(),
                file: i["file"].as_str().unwrap_or("?").to_string(),
                sha256: i["sha256"].as_str().unwrap_or("").to_string(),
                rows_read: u(&n["rows_read"]),
                rows_kept: u(&n["rows_kept"]),
                rows_skipped: skipped,
                rejected_by_band,
            }
        })
        .collect()
}

/// (plan rank a, plan rank b, catalog a, catalog b) of a catalog pair.
type PairKey = (usize, usize, String, String);

fn pairs(out: &OutputFolder, catalogs: &[String]) -> Result<Vec<PairReport>> {
    let l = &out.links;
    let (ca, cb) = (l.text("catalog_a")?, l.text("catalog_b")?);
    let (sep, d) = (l.float("sep_arcsec")?, l.float("norm_dist")?);
    let chosen = l.boolean("chosen")?;
    let object_a = l.text("object_a")?;
    let offsets = if l.has("dra_cosdec_arcsec") && l.has("ddec_arcsec") {
        Some((l.float("dra_cosdec_arcsec")?, l.float("ddec_arcsec")?))
    } else {
        None
    };
    let ids = out.objects.text("object_id")?;
    let status = out.objects.text("status")?;
    let status_of: std::collections::HashMap<&str, &str> = ids
        .iter()
        .zip(&status)
        .filter_map(|(i, s)| Some((i.as_deref()?, s.as_deref()?)))
        .collect();
    let rank = |c: &str| catalogs.iter().position(|x| x == c).unwrap_or(usize::MAX);
    let applied = applied_corrections(out);

    // (rank a, rank b) -> row indices, oriented so that a is the earlier catalog.
    let mut by_pair: BTreeMap<PairKey, Vec<(usize, bool)>> = BTreeMap::new();
    for i in 0..l.rows() {
        let (a, b) = (
            ca[i].clone().unwrap_or_default(),
            cb[i].clone().unwrap_or_default(),
        );
        let swapped = (rank(&a), &a) > (rank(&b), &b);
        let key = if swapped {
            (rank(&b), rank(&a), b, a)
        } else {
            (rank(&a), rank(&b), a, b)
        };
        by_pair.entry(key).or_default().push((i, swapped));
    }
    let mut reports = Vec::new();
    for ((_, _, a, b), rows) in by_pair {
        let picked: Vec<(usize, bool)> = rows.iter().copied().filter(|(i, _)| chosen[*i]).collect();
        let s: Vec<f64> = picked.iter().map(|(i, _)| sep[*i].unwrap_or(0.0)).collect();
        let n: Vec<f64> = picked.iter().map(|(i, _)| d[*i].unwrap_or(0.0)).collect();
        let sigma = pair_sigmas(&s, &n);
        let mut chosen_by_status = BTreeMap::new();
        for (i, _) in &picked {
            let st = object_a[*i]
                .as_deref()
                .and_then(|o| status_of.get(o))
                .unwrap_or(&"(unknown)");
            count(&mut chosen_by_status, st.to_string());
        }
        let (offsets_after, offsets_before) = match &offsets {
            Some((dra, ddec)) => {
                let after: Vec<(f64, f64)> = picked
                    .iter()
                    .filter_map(|(i, swapped)| {
                        let (x, y) = (dra[*i]?, ddec[*i]?);
                        Some(if *swapped { (-x, -y) } else { (x, y) })
                    })
                    .collect();
                // Corrections were added to each catalog's positions: undo them.
                let (pa, pb) = (
                    applied.get(&a).copied().unwrap_or((0.0, 0.0)),
                    applied.get(&b).copied().unwrap_or((0.0, 0.0)),
                );
                let before: Vec<(f64, f64)> = after
                    .iter()
                    .map(|(x, y)| (x - (pb.0 - pa.0), y - (pb.1 - pa.1)))
                    .collect();
                (OffsetCloud::of(after), OffsetCloud::of(before))
            }
            None => (None, None),
        };
        let med_d = median(&n);
        reports.push(PairReport {
            catalog_a: a,
            catalog_b: b,
            candidates: rows.len() as u64,
            chosen: picked.len() as u64,
            median_sep_arcsec: median(&s),
            median_sigma_arcsec: median(&sigma),
            median_norm_dist: med_d,
            median_ratio: med_d.map(|m| m / RAYLEIGH_MEDIAN),
            ks_distance: ks_distance(&n),
            fraction_beyond_3439: (!n.is_empty())
                .then(|| n.iter().filter(|&&x| x > 3.439).count() as f64 / n.len() as f64),
            sep_histogram: separation_histogram(&s, &sigma),
            norm_dist_histogram: norm_dist_histogram(&n),
            chosen_by_status,
            offsets_after,
            offsets_before,
        });
    }
    Ok(reports)
}

/// Applied correction per catalog name, from run.json `offsets[].applied_arcsec`.
fn applied_corrections(out: &OutputFolder) -> BTreeMap<String, (f64, f64)> {
    let mut m = BTreeMap::new();
    for o in out.run["offsets"].as_array().into_iter().flatten() {
        let a = &o["applied_arcsec"];
        if let (Some(x), Some(y)) = (a[0].as_f64(), a[1].as_f64()) {
            m.insert(out.catalog_name(&o["catalog"]), (x, y));
        }
    }
    m
}

fn cloud(v: &serde_json::Value) -> Option<OffsetCloud> {
    Some(OffsetCloud {
        n: v["n"].as_u64()?,
        dra_cosdec_arcsec: v["dra_cosdec_arcsec"].as_f64()?,
        ddec_arcsec: v["ddec_arcsec"].as_f64()?,
        width_ra_arcsec: v["scatter_ra_arcsec"].as_f64()?,
        width_dec_arcsec: v["scatter_dec_arcsec"].as_f64()?,
        points: Vec::new(),
    })
}

fn offsets(out: &OutputFolder) -> Vec<OffsetReport> {
    let reference = out.run["astrometric_reference"]
        .as_str()
        .unwrap_or("")
        .to_string();
    out.run["offsets"]
        .as_array()
        .into_iter()
        .flatten()
        .map(|o| {
            let catalog = out.catalog_name(&o["catalog"]);
            let floor = out.run["floors"]
                .as_array()
                .into_iter()
                .flatten()
                .find(|f| f["name"].as_str() == Some(catalog.as_str()));
            OffsetReport {
                reference: reference.clone(),
                initial: cloud(&o["initial"]),
                residual: cloud(&o["residual"]),
                applied_arcsec: (
                    o["applied_arcsec"][0].as_f64().unwrap_or(0.0),
                    o["applied_arcsec"][1].as_f64().unwrap_or(0.0),
                ),
                floor_measured_arcsec: floor.and_then(|f| f["measured_arcsec"].as_f64()),
                floor_used_arcsec: floor.and_then(|f| f["floor_arcsec"].as_f64()),
                floor_origin: floor.and_then(|f| f["origin"].as_str().map(str::to_string)),
                catalog,
            }
        })
        .collect()
}

fn false_matches(out: &OutputFolder) -> Vec<FalseMatchReport> {
    out.run["false_matches"]
        .as_array()
        .into_iter()
        .flatten()
        .map(|f| FalseMatchReport {
            catalog_a: out.catalog_name(&f["catalog_a"]),
            catalog_b: out.catalog_name(&f["catalog_b"]),
            real_candidates: u(&f["real_candidates"]),
            expected_false: f["shifted_candidates_mean"].as_f64().unwrap_or(0.0),
            false_fraction: f["false_fraction"].as_f64().unwrap_or(0.0),
            shift_arcsec: f["shift_arcsec"].as_f64(),
            by_radius: f["by_radius"]
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(|r| Some((r["radius_arcsec"].as_f64()?, r["false_fraction"].as_f64()?)))
                .collect(),
        })
        .collect()
}

fn bands(out: &OutputFolder) -> Result<Vec<BandReport>> {
    let p = &out.photometry;
    let (catalog, band, status) = (p.text("catalog")?, p.text("band")?, p.text("status")?);
    let mut order: Vec<(String, String)> = Vec::new();
    let mut counts: BTreeMap<(String, String), BTreeMap<String, u64>> = BTreeMap::new();
    for i in 0..p.rows() {
        let key = (
            catalog[i].clone().unwrap_or_default(),
            band[i].clone().unwrap_or_default(),
        );
        if !counts.contains_key(&key) {
            order.push(key.clone());
        }
        count(
            counts.entry(key).or_default(),
            status[i].clone().unwrap_or_else(|| "(none)".into()),
        );
    }
    Ok(order
        .into_iter()
        .map(|k| BandReport {
            by_status: counts.remove(&k).unwrap_or_default(),
            catalog: k.0,
            band: k.1,
        })
        .collect())
}

fn objects(out: &OutputFolder) -> Result<ObjectCounts> {
    let o = &out.objects;
    let mut by_catalogs = BTreeMap::new();
    for n in o.float("n_catalogs")? {
        count(&mut by_catalogs, n.unwrap_or(0.0) as u64);
    }
    let mut by_flag = BTreeMap::new();
    let mut by_status = BTreeMap::new();
    for s in o.text("status")?.into_iter().flatten() {
        for f in flag_names(&s) {
            count(&mut by_flag, f.to_string());
        }
        count(&mut by_status, s);
    }
    Ok(ObjectCounts {
        objects: o.rows() as u64,
        by_catalogs,
        by_flag,
        by_status,
    })
}
