//! Match cards: the hard cases of a run — every ambiguous group and every blend —
//! each with the objects and sources involved, the candidate pairs between them
//! with their probabilities, and a small sky chart.
//!
//! A card's chart places the sources when the output folder holds
//! `hard_sources.parquet`, one row per source of a hard group:
//!
//! | column | type | meaning |
//! |---|---|---|
//! | `object_id` | text | the object the source ended in |
//! | `catalog`, `source_id` | text | the source |
//! | `ra_deg`, `dec_deg` | float | its position at the epoch pairs are compared (the reference epoch), after any offset correction |
//! | `err_major_arcsec`, `err_minor_arcsec` | float | 1σ error ellipse semi-axes |
//! | `err_pa_deg` | float | position angle of the major axis, east of north |
//!
//! Without it the chart is schematic: the objects at their positions with
//! their 1σ position errors, and the candidate pairs between objects as lines
//! (sources themselves are not placed; a member's distance from its object is
//! in the member table).

use std::collections::{BTreeMap, BTreeSet, HashMap};

use serde::Serialize;

use super::data::OutputFolder;
use super::summary::flag_names;
use crate::error::Result;

/// Cards drawn at most; the rest are counted.
pub const MAX_CARDS: usize = 50;

/// One object on a card.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CardObject {
    /// Object id.
    pub object_id: String,
    /// Position, degrees.
    pub ra_deg: f64,
    /// Position, degrees.
    pub dec_deg: f64,
    /// 1σ per-axis position error, arcsec.
    pub pos_err_arcsec: f64,
    /// Readable status.
    pub status: String,
    /// Association probability.
    pub probability: Option<f64>,
    /// Members: (catalog, source id, separation from the object in arcsec,
    /// membership probability).
    pub members: Vec<(String, String, Option<f64>, Option<f64>)>,
}

/// One candidate pair on a card.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CardLink {
    /// `catalog:source_id` of one source.
    pub source_a: String,
    /// `catalog:source_id` of the other.
    pub source_b: String,
    /// The objects they ended in.
    pub object_a: String,
    /// The objects they ended in.
    pub object_b: String,
    /// Separation, arcsec.
    pub sep_arcsec: f64,
    /// Normalized distance.
    pub norm_dist: f64,
    /// The pair's posterior probability.
    pub probability: f64,
    /// Both in one object.
    pub chosen: bool,
}

/// A source placed on the chart (from `hard_sources.parquet`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CardSource {
    /// The object it ended in.
    pub object_id: String,
    /// `catalog:source_id`.
    pub source: String,
    /// Position, degrees.
    pub ra_deg: f64,
    /// Position, degrees.
    pub dec_deg: f64,
    /// 1σ semi-major axis, arcsec.
    pub major_arcsec: f64,
    /// 1σ semi-minor axis, arcsec.
    pub minor_arcsec: f64,
    /// Major axis position angle, degrees east of north.
    pub pa_deg: f64,
}

/// One hard case.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Card {
    /// `ambiguous` or `blend`.
    pub kind: String,
    /// Anchor id for the HTML (`card-N`).
    pub anchor: String,
    /// The objects involved: for a blend, the blend first.
    pub objects: Vec<CardObject>,
    /// Candidate pairs touching these objects.
    pub links: Vec<CardLink>,
    /// Sources with positions, when the folder gives them.
    pub sources: Vec<CardSource>,
}

/// The cards of a run, capped at [`MAX_CARDS`].
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Cards {
    /// Ambiguous groups found.
    pub ambiguous_groups: u64,
    /// Blends found.
    pub blends: u64,
    /// Cards shown (ambiguous groups first, then blends, in table order of ids).
    pub shown: Vec<Card>,
    /// Hard cases beyond the cap.
    pub not_shown: u64,
}

/// One catalog's member columns of objects.parquet: source id, separation, probability.
type MemberColumns = (Vec<Option<String>>, Vec<Option<f64>>, Vec<Option<f64>>);

/// Catalog names of the `<catalog>_source_id` columns, in plan order.
fn member_catalogs(out: &OutputFolder) -> Vec<String> {
    let cols = out.objects.names();
    let mut c: Vec<String> = out
        .catalogs()
        .into_iter()
        .filter(|c| cols.contains(&format!("{c}_source_id")))
        .collect();
    if c.is_empty() {
        c = cols
            .iter()
            .filter_map(|n| n.strip_suffix("_source_id").map(str::to_string))
            .collect();
    }
    c
}

/// Finds and assembles the cards.
///
/// # Errors
/// A missing column, named with its file.
pub fn cards(out: &OutputFolder) -> Result<Cards> {
    let o = &out.objects;
    let ids: Vec<String> = o
        .text("object_id")?
        .into_iter()
        .map(Option::unwrap_or_default)
        .collect();
    let status: Vec<String> = o
        .text("status")?
        .into_iter()
        .map(Option::unwrap_or_default)
        .collect();
    let (ra, dec, err) = (
        o.float("ra_deg")?,
        o.float("dec_deg")?,
        o.float("pos_err_arcsec")?,
    );
    let prob = o.float("probability")?;
    let related = o.text("related")?;
    let row_of: HashMap<&str, usize> = ids
        .iter()
        .enumerate()
        .map(|(i, s)| (s.as_str(), i))
        .collect();
    let catalogs = member_catalogs(out);
    let member_cols: Vec<MemberColumns> = catalogs
        .iter()
        .map(|c| -> Result<_> {
            let opt = |name: String| -> Result<Vec<Option<f64>>> {
                if o.has(&name) {
                    o.float(&name)
                } else {
                    Ok(vec![None; o.rows()])
                }
            };
            Ok((
                o.text(&format!("{c}_source_id"))?,
                opt(format!("{c}_sep_arcsec"))?,
                opt(format!("{c}_probability"))?,
            ))
        })
        .collect::<Result<_>>()?;

    let l = &out.links;
    let (oa, ob) = (l.text("object_a")?, l.text("object_b")?);
    let (ca, sa, cb, sb) = (
        l.text("catalog_a")?,
        l.text("source_id_a")?,
        l.text("catalog_b")?,
        l.text("source_id_b")?,
    );
    let (sep, nd, lp) = (
        l.float("sep_arcsec")?,
        l.float("norm_dist")?,
        l.float("probability")?,
    );
    let chosen = l.boolean("chosen")?;
    let s = |v: &Option<String>| v.clone().unwrap_or_default();
    let links: Vec<CardLink> = (0..l.rows())
        .map(|i| CardLink {
            source_a: format!("{}:{}", s(&ca[i]), s(&sa[i])),
            source_b: format!("{}:{}", s(&cb[i]), s(&sb[i])),
            object_a: s(&oa[i]),
            object_b: s(&ob[i]),
            sep_arcsec: sep[i].unwrap_or(f64::NAN),
            norm_dist: nd[i].unwrap_or(f64::NAN),
            probability: lp[i].unwrap_or(f64::NAN),
            chosen: chosen[i],
        })
        .collect();
    let mut links_of: HashMap<&str, Vec<usize>> = HashMap::new();
    for (k, link) in links.iter().enumerate() {
        links_of.entry(link.object_a.as_str()).or_default().push(k);
        if link.object_b != link.object_a {
            links_of.entry(link.object_b.as_str()).or_default().push(k);
        }
    }
    let has_flag = |row: usize, flag: &str| flag_names(&status[row]).any(|f| f == flag);

    // Ambiguous groups: objects connected through candidate pairs, holding an ambiguous object.
    let mut seen: BTreeSet<usize> = BTreeSet::new();
    let mut groups: Vec<(String, Vec<usize>)> = Vec::new();
    for start in 0..ids.len() {
        if !has_flag(start, "ambiguous") || seen.contains(&start) {
            continue;
        }
        let mut stack = vec![start];
        let mut members = BTreeSet::new();
        while let Some(r) = stack.pop() {
            if !members.insert(r) {
                continue;
            }
            for &k in links_of.get(ids[r].as_str()).into_iter().flatten() {
                for other in [&links[k].object_a, &links[k].object_b] {
                    if let Some(&j) = row_of.get(other.as_str())
                        && !members.contains(&j)
                        && !has_flag(j, "blend")
                    {
                        stack.push(j);
                    }
                }
            }
        }
        seen.extend(members.iter().copied());
        groups.push(("ambiguous".into(), members.into_iter().collect()));
    }
    let ambiguous_groups = groups.len() as u64;
    // Blends: the blend and the objects under it.
    for (r, rel) in related.iter().enumerate() {
        if !has_flag(r, "blend") {
            continue;
        }
        let mut rows = vec![r];
        for id in rel.as_deref().unwrap_or("").split(',') {
            if let Some(&j) = row_of.get(id.trim())
                && !rows.contains(&j)
            {
                rows.push(j);
            }
        }
        groups.push(("blend".into(), rows));
    }
    let blends = groups.len() as u64 - ambiguous_groups;

    let sources = hard_sources(out)?;
    let total = groups.len();
    let shown: Vec<Card> = groups
        .into_iter()
        .take(MAX_CARDS)
        .enumerate()
        .map(|(n, (kind, rows))| {
            let objects: Vec<CardObject> = rows
                .iter()
                .map(|&r| CardObject {
                    object_id: ids[r].clone(),
                    ra_deg: ra[r].unwrap_or(f64::NAN),
                    dec_deg: dec[r].unwrap_or(f64::NAN),
                    pos_err_arcsec: err[r].unwrap_or(0.0),
                    status: status[r].clone(),
                    probability: prob[r],
                    members: catalogs
                        .iter()
                        .zip(&member_cols)
                        .filter_map(|(c, (id, sep, p))| {
                            Some((c.clone(), id[r].clone()?, sep[r], p[r]))
                        })
                        .collect(),
                })
                .collect();
            let names: BTreeSet<&str> = rows.iter().map(|&r| ids[r].as_str()).collect();
            let mut ks: Vec<usize> = rows
                .iter()
                .flat_map(|&r| links_of.get(ids[r].as_str()).cloned().unwrap_or_default())
                .collect();
            ks.sort_unstable();
            ks.dedup();
            // For a blend, the pairs of the blend source; for a group, all pairs touching it.
            let card_links: Vec<CardLink> = ks
                .into_iter()
                .map(|k| links[k].clone())
                .filter(|link| {
                    kind == "ambiguous"
                        || link.object_a == objects[0].object_id
                        || link.object_b == objects[0].object_id
                })
                .collect();
            let card_sources: Vec<CardSource> = sources
                .iter()
                .filter(|s| names.contains(s.object_id.as_str()))
                .cloned()
                .collect();
            Card {
                kind,
                anchor: format!("card-{}", n + 1),
                objects,
                links: card_links,
                sources: card_sources,
            }
        })
        .collect();
    Ok(Cards {
        ambiguous_groups,
        blends,
        not_shown: (total - shown.len()) as u64,
        shown,
    })
}

/// Sources of `hard_sources.parquet` (empty when the file is absent).
fn hard_sources(out: &OutputFolder) -> Result<Vec<CardSource>> {
    let Some(t) = &out.hard_sources else {
        return Ok(Vec::new());
    };
    let (obj, cat, src) = (
        t.text("object_id")?,
        t.text("catalog")?,
        t.text("source_id")?,
    );
    let (ra, dec) = (t.float("ra_deg")?, t.float("dec_deg")?);
    let (a, b, pa) = (
        t.float("err_major_arcsec")?,
        t.float("err_minor_arcsec")?,
        t.float("err_pa_deg")?,
    );
    let mut v = Vec::new();
    for i in 0..t.rows() {
        let (Some(r), Some(d)) = (ra[i], dec[i]) else {
            continue;
        };
        v.push(CardSource {
            object_id: obj[i].clone().unwrap_or_default(),
            source: format!(
                "{}:{}",
                cat[i].clone().unwrap_or_default(),
                src[i].clone().unwrap_or_default()
            ),
            ra_deg: r,
            dec_deg: d,
            major_arcsec: a[i].unwrap_or(0.0),
            minor_arcsec: b[i].or(a[i]).unwrap_or(0.0),
            pa_deg: pa[i].unwrap_or(0.0),
        });
    }
    Ok(v)
}

/// Tangent-plane offsets (east, north) in arcsec of a position from a centre,
/// small-angle (FIELD.md §5.1: Δα cos δ, Δδ, with Δα wrapped into (−180°, 180°]).
pub fn offset_arcsec(ra_deg: f64, dec_deg: f64, ra0_deg: f64, dec0_deg: f64) -> (f64, f64) {
    let mut dra = ra_deg - ra0_deg;
    if dra > 180.0 {
        dra -= 360.0;
    } else if dra <= -180.0 {
        dra += 360.0;
    }
    (
        dra * dec0_deg.to_radians().cos() * 3600.0,
        (dec_deg - dec0_deg) * 3600.0,
    )
}

/// Objects per card kind, for the table of contents.
pub fn kinds(c: &Cards) -> BTreeMap<String, usize> {
    let mut m = BTreeMap::new();
    for card in &c.shown {
        *m.entry(card.kind.clone()).or_insert(0) += 1;
    }
    m
}
