//! The report page: one self-contained XHTML-compatible HTML file with inline
//! SVG and CSS, no script, no fetched fonts or images.

use std::fmt::Write;

use super::cards::{Card, Cards};
use super::figures;
use super::summary::Summary;
use super::warnings::Warning;

/// Escapes text for HTML element content and attribute values.
pub fn esc(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&#39;"),
            _ => o.push(c),
        }
    }
    o
}

/// A number with `digits` decimals, or an em dash for none.
fn num(v: Option<f64>, digits: usize) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x:.digits$}"),
        _ => "—".to_string(),
    }
}

const CSS: &str = "
body{font-family:sans-serif;max-width:62rem;margin:0 auto;padding:0 0.8rem 3rem;line-height:1.4;color:#111;background:#fff;overflow-wrap:anywhere}
h1{font-size:1.5rem}h2{font-size:1.25rem;border-bottom:1px solid #ccc;margin-top:2rem}h3{font-size:1.05rem}
.scroll{overflow-x:auto;max-width:100%}
table{border-collapse:collapse;font-size:0.85rem;margin:0.4rem 0}
td,th{border:1px solid #ccc;padding:0.15rem 0.4rem;text-align:right;white-space:nowrap}
td.l,th.l{text-align:left}
.warn{background:#fff3cd;border:1px solid #d39e00;padding:0.5rem 0.8rem;margin:0.6rem 0}
.ok{background:#e8f5e9;border:1px solid #4caf50;padding:0.5rem 0.8rem}
.note{color:#444;font-size:0.9rem}
figure{margin:0.6rem 0;display:inline-block;vertical-align:top;max-width:100%}
figure svg{max-width:100%;height:auto;display:block}
figcaption{font-size:0.85rem;color:#333;max-width:30rem}
pre{overflow-x:auto;background:#f6f6f6;padding:0.5rem;font-size:0.8rem;white-space:pre}
code{overflow-wrap:anywhere}
.card{border:1px solid #bbb;padding:0.5rem;margin:0.8rem 0}
nav ol{padding-left:1.4rem}
";

/// Inputs to the page besides the summary.
pub struct Page<'a> {
    /// The numbers.
    pub summary: &'a Summary,
    /// Warnings, shown first.
    pub warnings: &'a [Warning],
    /// The match cards.
    pub cards: &'a Cards,
    /// The sky map and footprint panels, ready SVG figures.
    pub sky: &'a [String],
    /// What the outputs did not carry, one sentence each.
    pub gaps: &'a [String],
    /// `run.json`, for provenance.
    pub run: &'a serde_json::Value,
}

/// The whole page.
pub fn page(p: &Page) -> String {
    let s = p.summary;
    let mut h = String::new();
    let title = format!("Match audit of field {}", s.field);
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n<title>{}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<h1>{}</h1>\n<p class=\"note\">fluxloom {} · {} objects · {} catalog pairs with candidates · written from the output tables and run.json of this folder.</p>\n",
        esc(&title),
        esc(&title),
        esc(&s.fluxloom_version),
        s.objects.objects,
        s.pairs.len()
    );
    // Warnings first.
    h.push_str("<section id=\"warnings\">\n<h2>Warnings</h2>\n");
    if p.warnings.is_empty() {
        h.push_str("<p class=\"ok\">No warning: separations agree with the stated errors, false-match rates, offsets, skipped rows, rejected values and coverage are within the thresholds (see the README's report section).</p>\n");
    } else {
        for w in p.warnings {
            let _ = writeln!(
                h,
                "<p class=\"warn\"><strong>{}</strong>: {}</p>",
                esc(&w.kind),
                esc(&w.message)
            );
        }
    }
    h.push_str("</section>\n");

    // Contents.
    h.push_str("<nav id=\"contents\">\n<h2>Contents</h2>\n<ol>\n");
    for (id, name) in [
        (
            "pairs",
            "Catalog pairs: separations and normalized distances",
        ),
        ("offsets", "Astrometric offsets"),
        ("false-matches", "False matches"),
        ("flags", "Objects and flags"),
        ("bands", "Band statuses"),
        ("sky", "Sky map and footprints"),
        ("science", "Science classes"),
        ("cards", "Match cards"),
        ("gaps", "What the outputs do not carry"),
        ("provenance", "Provenance"),
    ] {
        let _ = writeln!(h, "<li><a href=\"#{id}\">{name}</a></li>");
    }
    h.push_str("</ol>\n</nav>\n");

    pairs(&mut h, s);
    offsets(&mut h, s);
    false_matches(&mut h, s);
    flags(&mut h, s);
    bands(&mut h, s);
    h.push_str("<section id=\"sky\">\n<h2>Sky map and footprints</h2>\n");
    for f in p.sky {
        h.push_str(f);
    }
    h.push_str("</section>\n");
    science(&mut h, s);
    cards(&mut h, p.cards);
    h.push_str("<section id=\"gaps\">\n<h2>What the outputs do not carry</h2>\n");
    if p.gaps.is_empty() {
        h.push_str("<p>Nothing: every figure is drawn from the tables.</p>\n");
    } else {
        h.push_str("<ul>\n");
        for g in p.gaps {
            let _ = writeln!(h, "<li>{}</li>", esc(g));
        }
        h.push_str("</ul>\n");
    }
    h.push_str("</section>\n");
    provenance(&mut h, s, p.run);
    h.push_str("</body>\n</html>\n");
    h
}

fn table_start(h: &mut String, headers: &[&str]) {
    h.push_str("<div class=\"scroll\"><table>\n<tr>");
    for (i, x) in headers.iter().enumerate() {
        let class = if i == 0 { " class=\"l\"" } else { "" };
        let _ = write!(h, "<th{class}>{}</th>", esc(x));
    }
    h.push_str("</tr>\n");
}

fn row(h: &mut String, cells: &[String]) {
    h.push_str("<tr>");
    for (i, x) in cells.iter().enumerate() {
        let class = if i == 0 { " class=\"l\"" } else { "" };
        let _ = write!(h, "<td{class}>{}</td>", esc(x));
    }
    h.push_str("</tr>\n");
}

fn table_end(h: &mut String) {
    h.push_str("</table></div>\n");
}

fn pairs(h: &mut String, s: &Summary) {
    h.push_str(
        "<section id=\"pairs\">\n<h2>Catalog pairs: separations and normalized distances</h2>\n",
    );
    h.push_str("<p class=\"note\">Chosen pairs are candidate pairs whose two sources ended in one object. For Gaussian errors their normalized distance d follows P(d ≤ k) = 1 − exp(−k²/2) (median 1.177) and their separation a Rayleigh law of the pair's combined σ, here recovered per pair as σ = sep / d (exact for circular errors).</p>\n");
    table_start(
        h,
        &[
            "pair",
            "candidates",
            "chosen",
            "median sep (″)",
            "median σ (″)",
            "median d",
            "d / 1.177",
            "KS distance",
            "d > 3.439",
        ],
    );
    for p in &s.pairs {
        row(
            h,
            &[
                format!("{} × {}", p.catalog_a, p.catalog_b),
                p.candidates.to_string(),
                p.chosen.to_string(),
                num(p.median_sep_arcsec, 3),
                num(p.median_sigma_arcsec, 3),
                num(p.median_norm_dist, 3),
                num(p.median_ratio, 2),
                num(p.ks_distance, 3),
                num(p.fraction_beyond_3439.map(|f| 100.0 * f), 2) + " %",
            ],
        );
    }
    table_end(h);
    for p in &s.pairs {
        let id = format!("pair-{}-{}", p.catalog_a, p.catalog_b);
        let _ = writeln!(
            h,
            "<div class=\"pair\" id=\"{}\">\n<h3>{} × {}</h3>",
            esc(&id),
            esc(&p.catalog_a),
            esc(&p.catalog_b)
        );
        h.push_str(&figures::separations(p));
        h.push_str(&figures::norm_dists(p));
        if let (Some(before), Some(after)) = (&p.offsets_before, &p.offsets_after) {
            h.push_str(&figures::pair_offsets(p, before, after));
        }
        let by: Vec<String> = p
            .chosen_by_status
            .iter()
            .map(|(k, v)| format!("{k} {v}"))
            .collect();
        let _ = writeln!(
            h,
            "<p class=\"note\">Chosen pairs by the status of their object: {}.</p>\n</div>",
            esc(&by.join(", "))
        );
    }
    h.push_str("</section>\n");
}

fn offsets(h: &mut String, s: &Summary) {
    h.push_str("<section id=\"offsets\">\n<h2>Astrometric offsets</h2>\n");
    if s.offsets.is_empty() {
        h.push_str(
            "<p>No astrometric reference in the plan: no offsets were measured.</p>\n</section>\n",
        );
        return;
    }
    h.push_str("<p class=\"note\">Median offset (Δα cos δ, Δδ) of each catalog against the reference from pairs unique within the largest tolerance, with its robust width 1.4826·MAD, before and after the correction the build applied (run.json <code>offsets</code>), and each catalog's systematic floor measured from the same pairs beside the floor the match used, fixed in the plan or measured (run.json <code>floors</code>).</p>\n");
    h.push_str(&figures::offsets(&s.offsets));
    table_start(
        h,
        &[
            "catalog",
            "pairs",
            "before Δα cos δ (″)",
            "before Δδ (″)",
            "width α, δ (″)",
            "applied (″)",
            "after Δα cos δ (″)",
            "after Δδ (″)",
            "floor measured (″)",
            "floor used (″)",
        ],
    );
    for o in &s.offsets {
        let i = o.initial.as_ref();
        let r = o.residual.as_ref();
        row(
            h,
            &[
                format!("{} vs {}", o.catalog, o.reference),
                i.map(|c| c.n.to_string()).unwrap_or_default(),
                num(i.map(|c| c.dra_cosdec_arcsec), 3),
                num(i.map(|c| c.ddec_arcsec), 3),
                format!(
                    "{}, {}",
                    num(i.map(|c| c.width_ra_arcsec), 3),
                    num(i.map(|c| c.width_dec_arcsec), 3)
                ),
                format!("({:+.3}, {:+.3})", o.applied_arcsec.0, o.applied_arcsec.1),
                num(r.map(|c| c.dra_cosdec_arcsec), 3),
                num(r.map(|c| c.ddec_arcsec), 3),
                num(o.floor_measured_arcsec, 3),
                match (o.floor_used_arcsec, o.floor_origin.as_deref()) {
                    (Some(f), Some(origin)) => format!("{f:.3} ({})", origin.replace('_', " ")),
                    _ => String::new(),
                },
            ],
        );
    }
    table_end(h);
    h.push_str("</section>\n");
}

fn false_matches(h: &mut String, s: &Summary) {
    h.push_str("<section id=\"false-matches\">\n<h2>False matches</h2>\n");
    if s.false_matches.is_empty() {
        h.push_str("<p>The build did not estimate false matches (plan option <code>false_matches</code>).</p>\n</section>\n");
        return;
    }
    h.push_str("<p class=\"note\">Chance candidates expected per catalog pair: the mean number of candidates found against copies of the second catalog shifted far beyond the tolerance, as a fraction of the real run's candidates (run.json <code>false_matches</code>). run.json gives one number per pair at the pair's own tolerance, so each pair is one point, not a curve against radius.</p>\n");
    h.push_str("<p class=\"note\">The shifted copies count neighbours as if the sky around each source were empty; a survey cannot hold a second source within its resolution of a true counterpart, so where tolerances are below the resolution these numbers are an upper bound of the chance candidates.</p>\n");
    h.push_str(&figures::false_matches(&s.false_matches));
    table_start(
        h,
        &[
            "pair",
            "candidates",
            "expected by chance",
            "fraction",
            "shift (″)",
        ],
    );
    for f in &s.false_matches {
        row(
            h,
            &[
                format!("{} × {}", f.catalog_a, f.catalog_b),
                f.real_candidates.to_string(),
                format!("{:.2}", f.expected_false),
                format!("{:.2} %", 100.0 * f.false_fraction),
                num(f.shift_arcsec, 0),
            ],
        );
    }
    table_end(h);
    h.push_str("</section>\n");
}

fn flags(h: &mut String, s: &Summary) {
    h.push_str("<section id=\"flags\">\n<h2>Objects and flags</h2>\n");
    h.push_str(&figures::by_catalogs(&s.objects.by_catalogs));
    h.push_str(&figures::by_flag(&s.objects.by_flag));
    table_start(h, &["status", "objects"]);
    for (k, v) in &s.objects.by_status {
        row(h, &[k.clone(), v.to_string()]);
    }
    table_end(h);
    h.push_str("</section>\n");
}

/// Statuses in the order the tables are read (`saturated` only when used).
pub const STATUSES: [&str; 9] = [
    "detected",
    "upper_limit",
    "not_detected",
    "not_covered",
    "blended",
    "saturated",
    "rejected",
    "missing",
    "(none)",
];

fn bands(h: &mut String, s: &Summary) {
    h.push_str("<section id=\"bands\">\n<h2>Band statuses</h2>\n<p class=\"note\">SED points of each catalog's bands by status, counted in photometry.parquet: one per object and band.</p>\n");
    h.push_str(&figures::bands(&s.bands));
    let used: Vec<&str> = STATUSES
        .iter()
        .copied()
        .filter(|st| s.bands.iter().any(|b| b.by_status.contains_key(*st)))
        .collect();
    let mut headers = vec!["catalog band"];
    headers.extend(used.iter().copied());
    table_start(h, &headers);
    for b in &s.bands {
        let mut cells = vec![format!("{} {}", b.catalog, b.band)];
        cells.extend(
            used.iter()
                .map(|st| b.by_status.get(*st).copied().unwrap_or(0).to_string()),
        );
        row(h, &cells);
    }
    table_end(h);
    h.push_str("</section>\n");
}

fn science(h: &mut String, s: &Summary) {
    h.push_str("<section id=\"science\">\n<h2>Science classes</h2>\n");
    match &s.science_classes {
        Some(c) => {
            h.push_str(&figures::classes(c));
        }
        None => h.push_str("<p>No science table (science.parquet with a <code>class</code> or <code>*_class</code> column) in this folder.</p>\n"),
    }
    h.push_str("</section>\n");
}

fn cards(h: &mut String, c: &Cards) {
    let _ = writeln!(
        h,
        "<section id=\"cards\">\n<h2>Match cards</h2>\n<p class=\"note\">{} ambiguous group(s) and {} blend(s); {} card(s) shown{}.</p>",
        c.ambiguous_groups,
        c.blends,
        c.shown.len(),
        if c.not_shown > 0 {
            format!(", {} more not shown", c.not_shown)
        } else {
            String::new()
        }
    );
    for card in &c.shown {
        card_html(h, card);
    }
    h.push_str("</section>\n");
}

fn card_html(h: &mut String, c: &Card) {
    let title = match c.kind.as_str() {
        "blend" => format!(
            "Blend {} over {}",
            c.objects[0].object_id,
            c.objects[1..]
                .iter()
                .map(|o| o.object_id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
        _ => format!(
            "Ambiguous group: {}",
            c.objects
                .iter()
                .map(|o| o.object_id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    let _ = writeln!(
        h,
        "<div class=\"card {}\" id=\"{}\">\n<h3>{}</h3>",
        esc(&c.kind),
        esc(&c.anchor),
        esc(&title)
    );
    h.push_str(&figures::card_chart(c));
    table_start(
        h,
        &[
            "object",
            "status",
            "probability",
            "member",
            "sep from object (″)",
            "membership",
        ],
    );
    for o in &c.objects {
        for (k, (cat, src, sep, p)) in o.members.iter().enumerate() {
            let first = k == 0;
            row(
                h,
                &[
                    if first {
                        o.object_id.clone()
                    } else {
                        String::new()
                    },
                    if first {
                        o.status.clone()
                    } else {
                        String::new()
                    },
                    if first {
                        num(o.probability, 4)
                    } else {
                        String::new()
                    },
                    format!("{cat}:{src}"),
                    num(*sep, 3),
                    num(*p, 4),
                ],
            );
        }
    }
    table_end(h);
    if !c.links.is_empty() {
        table_start(
            h,
            &[
                "source a",
                "source b",
                "sep (″)",
                "d",
                "probability",
                "chosen",
            ],
        );
        for l in &c.links {
            row(
                h,
                &[
                    l.source_a.clone(),
                    l.source_b.clone(),
                    format!("{:.3}", l.sep_arcsec),
                    format!("{:.2}", l.norm_dist),
                    format!("{:.4}", l.probability),
                    if l.chosen { "yes".into() } else { "no".into() },
                ],
            );
        }
        table_end(h);
    }
    h.push_str("</div>\n");
}

fn provenance(h: &mut String, s: &Summary, run: &serde_json::Value) {
    h.push_str("<section id=\"provenance\">\n<h2>Provenance</h2>\n");
    let _ = writeln!(
        h,
        "<p>fluxloom {}, field {}, plan file <code>{}</code>, astrometric reference {}.</p>",
        esc(&s.fluxloom_version),
        esc(&s.field),
        esc(run["plan_file"].as_str().unwrap_or("")),
        esc(run["astrometric_reference"].as_str().unwrap_or("none"))
    );
    table_start(
        h,
        &["catalog", "file", "rows read", "kept", "skipped", "SHA-256"],
    );
    for i in &s.inputs {
        row(
            h,
            &[
                i.catalog.clone(),
                i.file.clone(),
                i.rows_read.to_string(),
                i.rows_kept.to_string(),
                i.rows_skipped.to_string(),
                i.sha256.clone(),
            ],
        );
    }
    table_end(h);
    if let Some(outputs) = run["outputs"].as_array() {
        table_start(h, &["output", "rows"]);
        for o in outputs {
            row(
                h,
                &[
                    o["file"].as_str().unwrap_or("").to_string(),
                    o["rows"].as_u64().unwrap_or(0).to_string(),
                ],
            );
        }
        table_end(h);
    }
    let _ = writeln!(
        h,
        "<h3>Plan</h3>\n<pre>{}</pre>\n<h3>Match settings</h3>\n<pre>{}</pre>",
        esc(run["plan"].as_str().unwrap_or("")),
        esc(&serde_json::to_string_pretty(&run["match_settings"]).unwrap_or_default())
    );
    h.push_str("</section>\n");
}
