//! Joining the output folders of runs over disjoint parts of the sky (`build
//! --cells`) into the folder one run over all of it writes.
//!
//! Each part holds the objects anchored in its cells, the links whose
//! lower-ranked source is in its cells, and the hard cases of those; every
//! object, link and hard-case row is in exactly one part, with the values a
//! whole run gives it (the cells' outputs do not depend on the partition).
//! The whole run orders its tables by rank — catalog in plan order, then
//! source identifier — of the object's anchor (objects, photometry, hard
//! cases, then the source's rank), or of the pair's two sources (links); so
//! the parts, each already in that order, join by a k-way merge on those keys
//! ([`super::kway`]). run.json joins by adding the counts and checking that
//! everything else agrees.

use std::path::{Path, PathBuf};

use serde_json::Value;

use super::run_record::SubsetRecord;
use crate::error::{Error, Result};

/// The rank of a source: its catalog's position in the plan and its identifier.
type Rank<'a> = (usize, &'a str);

/// Catalog names of a plan, to turn names and object identifiers into ranks.
pub struct Ranker<'a> {
    names: &'a [String],
}

impl<'a> Ranker<'a> {
    /// Ranks against the catalogs `names`, in plan order.
    pub fn new(names: &'a [String]) -> Ranker<'a> {
        Ranker { names }
    }

    /// The plan position of catalog `name`.
    pub(crate) fn catalog(&self, name: &str, origin: &Path) -> Result<usize> {
        self.names.iter().position(|n| n == name).ok_or_else(|| {
            Error::format(
                origin,
                format!("catalog \"{name}\" is not one of the plan's"),
            )
        })
    }

    /// The rank of `<catalog>:<source id>` (the longest catalog name that prefixes it).
    pub(crate) fn object<'b>(&self, object_id: &'b str, origin: &Path) -> Result<Rank<'b>> {
        self.names
            .iter()
            .enumerate()
            .filter(|(_, n)| {
                object_id.len() > n.len()
                    && object_id.starts_with(n.as_str())
                    && object_id.as_bytes()[n.len()] == b':'
            })
            .max_by_key(|(_, n)| n.len())
            .map(|(k, n)| (k, &object_id[n.len() + 1..]))
            .ok_or_else(|| {
                Error::format(
                    origin,
                    format!("object \"{object_id}\" does not start with a catalog of the plan"),
                )
            })
    }
}

/// Which table is being joined, and so which key orders it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TableKind {
    /// objects.parquet and photometry.parquet: the object's rank.
    PerObject,
    /// links.parquet: the ranks of source a, then source b.
    Links,
    /// hard_sources.parquet: the object's rank, then the source's.
    HardSources,
}

/// Reads the run.json of each part folder.
///
/// # Errors
/// [`Error::Io`] / [`Error::Format`] naming the file.
pub fn read_records(parts: &[PathBuf]) -> Result<Vec<Value>> {
    parts
        .iter()
        .map(|p| {
            let path = p.join("run.json");
            let text = std::fs::read_to_string(&path).map_err(|e| Error::io(&path, e))?;
            serde_json::from_str(&text).map_err(|e| Error::format(&path, e.to_string()))
        })
        .collect()
}

/// The subset record of each part, checked: one cell order, no cell in two
/// parts, and together every cell that holds sources.
///
/// # Errors
/// [`Error::Usage`] naming the part that breaks a rule.
pub fn check_subsets(parts: &[PathBuf], records: &[Value]) -> Result<Vec<SubsetRecord>> {
    let mut subsets: Vec<SubsetRecord> = Vec::with_capacity(parts.len());
    for (p, r) in parts.iter().zip(records) {
        let s: SubsetRecord = r
            .get("subset")
            .cloned()
            .ok_or_else(|| {
                Error::Usage(format!(
                    "{}: not the output of a run over some cells (build --cells)",
                    p.display()
                ))
            })
            .and_then(|v| {
                serde_json::from_value(v)
                    .map_err(|e| Error::format(p.join("run.json"), e.to_string()))
            })?;
        if let Some(first) = subsets.first()
            && (s.order != first.order
                || s.cells_with_sources_in_all != first.cells_with_sources_in_all)
        {
            return Err(Error::Usage(format!(
                "{}: cells at order {} of {} with sources, but {} has order {} of {}",
                p.display(),
                s.order,
                s.cells_with_sources_in_all,
                parts[0].display(),
                first.order,
                first.cells_with_sources_in_all
            )));
        }
        for (q, other) in parts.iter().zip(&subsets) {
            if let Some(c) = s
                .cells
                .iter()
                .find(|c| other.cells.binary_search(c).is_ok())
            {
                return Err(Error::Usage(format!(
                    "cell {c} is in both {} and {}",
                    q.display(),
                    p.display()
                )));
            }
        }
        subsets.push(s);
    }
    let covered: usize = subsets.iter().map(|s| s.cells_with_sources).sum();
    let all = subsets.first().map_or(0, |s| s.cells_with_sources_in_all);
    if covered != all {
        return Err(Error::Usage(format!(
            "the parts hold {covered} of the {all} cells with sources; every cell must be in one part"
        )));
    }
    Ok(subsets)
}

/// Counts of run.json that add up over parts (the rest must agree), as paths.
const SUMMED: [&[&str]; 5] = [
    &["matching", "candidates"],
    &["matching", "groups"],
    &["matching", "approximate_groups"],
    &["matching", "objects"],
    &["matching", "objects_not_primary"],
];
/// Maps of counts that add up key by key.
const SUMMED_MAPS: [&[&str]; 3] = [
    &["matching", "objects_by_members"],
    &["matching", "flags"],
    &["forced_without_counterpart"],
];

fn at<'v>(v: &'v mut Value, path: &[&str]) -> Option<&'v mut Value> {
    path.iter().try_fold(v, |v, k| v.get_mut(*k))
}

fn add(a: &Value, b: &Value) -> Value {
    match (a.as_u64(), b.as_u64()) {
        (Some(x), Some(y)) => Value::from(x + y),
        _ => Value::Null,
    }
}

fn add_maps(into: &mut Value, from: &Value) {
    if let (Some(into), Some(from)) = (into.as_object_mut(), from.as_object()) {
        for (k, v) in from {
            let sum = into.get(k).map_or_else(|| v.clone(), |old| add(old, v));
            into.insert(k.clone(), sum);
        }
    }
}

/// The parts' counts zeroed, so that what remains must be equal.
fn without_counts(r: &Value) -> Value {
    let mut v = r.clone();
    for path in SUMMED.iter().chain(&SUMMED_MAPS) {
        if let Some(x) = at(&mut v, path) {
            *x = Value::Null;
        }
    }
    if let Some(x) = at(&mut v, &["matching", "largest_group"]) {
        *x = Value::Null;
    }
    for key in ["sed_points", "outputs", "subset"] {
        if let Some(o) = v.as_object_mut() {
            o.remove(key);
        }
    }
    v
}

/// The run.json of the joined folder: the counts of `records` added, the
/// rest of the first (checked equal in all), `outputs` as given, no subset.
///
/// # Errors
/// [`Error::Usage`] naming the part whose record differs other than in its counts.
pub fn join_records(parts: &[PathBuf], records: &[Value], outputs: Value) -> Result<Value> {
    let mut joined = records
        .first()
        .cloned()
        .ok_or_else(|| Error::Usage("no parts to merge".to_string()))?;
    let reference = without_counts(&joined);
    for (p, r) in parts.iter().zip(records).skip(1) {
        if without_counts(r) != reference {
            return Err(Error::Usage(format!(
                "{}: its run.json differs from {}'s in more than its counts (another plan, inputs or version?)",
                p.display(),
                parts[0].display()
            )));
        }
        for path in SUMMED {
            let b = r
                .pointer(&format!("/{}", path.join("/")))
                .cloned()
                .unwrap_or(Value::Null);
            if let Some(a) = at(&mut joined, path) {
                *a = add(a, &b);
            }
        }
        for path in SUMMED_MAPS {
            let b = r
                .pointer(&format!("/{}", path.join("/")))
                .cloned()
                .unwrap_or(Value::Null);
            if let Some(a) = at(&mut joined, path) {
                add_maps(a, &b);
            }
        }
        let largest = r.pointer("/matching/largest_group").and_then(Value::as_u64);
        if let Some(a) = at(&mut joined, &["matching", "largest_group"]) {
            let m = a.as_u64().max(largest).unwrap_or(0);
            *a = Value::from(m);
        }
        if let (Some(into), Some(from)) = (
            joined.get_mut("sed_points").and_then(Value::as_array_mut),
            r.get("sed_points").and_then(Value::as_array),
        ) {
            for (a, b) in into.iter_mut().zip(from) {
                if let (Some(a), Some(b)) = (a.get_mut("by_status"), b.get("by_status")) {
                    add_maps(a, b);
                }
            }
        }
    }
    if let Some(o) = joined.as_object_mut() {
        o.remove("subset");
        o.insert("outputs".to_string(), outputs);
    }
    Ok(joined)
}
