//! The report's figures, drawn with [`crate::plot`] and inlined as SVG.
//!
//! Each function returns one `<figure>` element (SVG and caption). Figures
//! inlined in one page must not share element ids, so every figure is drawn
//! with its own page id as [`Figure::id`] (clip path `clip-<id>`).

use std::collections::BTreeMap;

use super::cards::{Card, offset_arcsec};
use super::data::OutputFolder;
use super::footprint::{self, GRID};
use super::html::{STATUSES, esc};
use super::stats::Histogram;
use super::summary::{
    BandReport, FalseMatchReport, OffsetCloud, OffsetReport, PairReport, flag_names,
};
use crate::error::Result;
use crate::plot::{Anchor, Axis, Colour, Figure, LegendKey, LineStyle, Marker, PointStyle, Scale};

const P: [Colour; 8] = Colour::PALETTE;
const LIGHT: Colour = Colour(200, 200, 200);

/// Most points one scatter layer draws; past it every k-th point is drawn (k
/// the smallest that fits), so that the figures of a million objects stay small
/// enough for a browser. Legends keep the counts of all points.
pub const MAX_LAYER_POINTS: usize = 20_000;

/// Every k-th point of `points`, at most [`MAX_LAYER_POINTS`] of them, and k.
fn thinned(points: &[(f64, f64)]) -> (Vec<(f64, f64)>, usize) {
    let step = points.len().div_ceil(MAX_LAYER_POINTS).max(1);
    (points.iter().step_by(step).copied().collect(), step)
}

/// The caption's note on thinned layers (empty when none was thinned).
fn thinning_note(step: usize) -> String {
    if step > 1 {
        format!(" Layers of more than {MAX_LAYER_POINTS} points show one point in {step} or fewer.")
    } else {
        String::new()
    }
}

/// The SVG of `fig` drawn with the page id `id`, in a `<figure>` with a caption.
fn wrap(fig: &Figure, id: &str, caption: &str) -> String {
    let mut fig = fig.clone();
    fig.id = id.to_string();
    let svg = fig.to_svg();
    format!(
        "<figure id=\"{}\">\n{svg}<figcaption>{}</figcaption>\n</figure>\n",
        esc(id),
        esc(caption)
    )
}

/// A step outline of a histogram's counts, and its expected counts as a dashed
/// step line.
fn histogram(fig: &mut Figure, h: &Histogram) {
    let steps = |values: &dyn Fn(usize) -> f64| -> Vec<(f64, f64)> {
        let mut v = vec![(h.edges[0], 0.0)];
        for i in 0..h.counts.len() {
            v.push((h.edges[i], values(i)));
            v.push((h.edges[i + 1], values(i)));
        }
        v.push((*h.edges.last().unwrap_or(&0.0), 0.0));
        v
    };
    let observed = steps(&|i| h.counts[i] as f64);
    let expected = steps(&|i| h.expected[i]);
    let top = h
        .counts
        .iter()
        .map(|&c| c as f64)
        .chain(h.expected.iter().copied())
        .fold(1.0f64, f64::max);
    fig.x_axis = Axis::linear("", h.edges[0], *h.edges.last().unwrap_or(&1.0));
    fig.y_axis = Axis::linear("pairs per bin", 0.0, top * 1.15);
    let obs = LineStyle {
        width_px: 1.8,
        ..LineStyle::solid(P[0])
    };
    let exp = LineStyle {
        width_px: 1.5,
        ..LineStyle::dashed(P[1])
    };
    fig.polyline(&observed, &obs, "observed");
    fig.polyline(&expected, &exp, "expected");
    fig.legend_entry("chosen pairs", LegendKey::Line(obs));
    fig.legend_entry("predicted", LegendKey::Line(exp));
}

fn slug(p: &PairReport) -> String {
    format!("{}-{}", p.catalog_a, p.catalog_b)
}

/// Separations of a pair's chosen pairs against the Rayleigh mixture of their own σ.
pub fn separations(p: &PairReport) -> String {
    let mut fig = Figure::new(460.0, 300.0);
    histogram(&mut fig, &p.sep_histogram);
    fig.x_axis.label = "separation (arcsec)".into();
    fig.title = format!("{} × {}: separations", p.catalog_a, p.catalog_b);
    wrap(
        &fig,
        &format!("fig-sep-{}", slug(p)),
        &format!(
            "Separations of the {} chosen pairs (solid) and the Rayleigh law of each pair's combined σ = sep/d, summed (dashed); median separation {} arcsec, median σ {} arcsec.",
            p.chosen,
            p.median_sep_arcsec
                .map_or("—".into(), |v| format!("{v:.3}")),
            p.median_sigma_arcsec
                .map_or("—".into(), |v| format!("{v:.3}")),
        ),
    )
}

/// Normalized distances of a pair's chosen pairs against the χ²₂ law.
pub fn norm_dists(p: &PairReport) -> String {
    let mut fig = Figure::new(460.0, 300.0);
    histogram(&mut fig, &p.norm_dist_histogram);
    fig.x_axis.label = "normalized distance d".into();
    fig.title = format!("{} × {}: normalized distances", p.catalog_a, p.catalog_b);
    let top = fig.y_axis.max;
    let median = LineStyle::dashed(Colour::GREY);
    fig.polyline(
        &[
            (super::stats::RAYLEIGH_MEDIAN, 0.0),
            (super::stats::RAYLEIGH_MEDIAN, top),
        ],
        &median,
        "law-median",
    );
    if let Some(m) = p.median_norm_dist {
        fig.polyline(&[(m, 0.0), (m, top)], &LineStyle::solid(P[2]), "median");
        fig.legend_entry(
            &format!("median {m:.2}"),
            LegendKey::Line(LineStyle::solid(P[2])),
        );
    }
    fig.legend_entry("law median 1.18", LegendKey::Line(median));
    wrap(
        &fig,
        &format!("fig-d-{}", slug(p)),
        &format!(
            "Normalized distances of the {} chosen pairs (solid) against P(d ≤ k) = 1 − exp(−k²/2) (dashed); median {} (1.177 expected), KS distance {}.",
            p.chosen,
            p.median_norm_dist.map_or("—".into(), |v| format!("{v:.3}")),
            p.ks_distance.map_or("—".into(), |v| format!("{v:.3}")),
        ),
    )
}

/// One cloud's median with its robust width as error bars.
fn centre(fig: &mut Figure, c: &OffsetCloud, colour: Colour, class: &str) {
    let (x, y) = (c.dra_cosdec_arcsec, c.ddec_arcsec);
    fig.x_error_bars(
        &[(y, x - c.width_ra_arcsec, x + c.width_ra_arcsec)],
        colour,
        class,
    );
    fig.error_bars(
        &[(x, y - c.width_dec_arcsec, y + c.width_dec_arcsec)],
        colour,
        class,
    );
}

fn offset_axes(fig: &mut Figure, values: &[f64]) {
    let r = values.iter().fold(0.05f64, |m, v| m.max(v.abs())) * 1.15;
    fig.x_axis = Axis::linear("Δα cos δ (arcsec)", -r, r).inverted();
    fig.y_axis = Axis::linear("Δδ (arcsec)", -r, r);
    let grey = LineStyle::solid(LIGHT);
    fig.polyline(&[(-r, 0.0), (r, 0.0)], &grey, "zero");
    fig.polyline(&[(0.0, -r), (0.0, r)], &grey, "zero");
}

/// A pair's offsets, before and after correction, when links.parquet carries them.
pub fn pair_offsets(p: &PairReport, before: &OffsetCloud, after: &OffsetCloud) -> String {
    let mut fig = Figure::new(380.0, 380.0);
    let mut values: Vec<f64> = Vec::new();
    for c in [before, after] {
        values.extend([
            c.dra_cosdec_arcsec.abs() + 3.0 * c.width_ra_arcsec,
            c.ddec_arcsec.abs() + 3.0 * c.width_dec_arcsec,
        ]);
    }
    offset_axes(&mut fig, &values);
    let small = |c| PointStyle {
        size_px: 3.0,
        ..PointStyle::filled(Marker::Circle, c)
    };
    let (before_points, step_before) = thinned(&before.points);
    let (after_points, step_after) = thinned(&after.points);
    fig.points(&before_points, &small(LIGHT), "offset-before");
    fig.points(&after_points, &small(P[0]), "offset-after");
    centre(&mut fig, before, Colour::GREY, "centre-before");
    centre(&mut fig, after, P[1], "centre-after");
    fig.legend_entry("before correction", LegendKey::Point(small(LIGHT)));
    fig.legend_entry("as matched", LegendKey::Point(small(P[0])));
    fig.title = format!("{} × {}: offsets", p.catalog_a, p.catalog_b);
    wrap(
        &fig,
        &format!("fig-off-{}", slug(p)),
        &format!(
            "Offsets of {} from {} per chosen pair (east to the left); bars: median ± 1.4826·MAD. As matched: ({:+.3}, {:+.3})″ ± ({:.3}, {:.3})″; before correction: ({:+.3}, {:+.3})″.{}",
            p.catalog_b,
            p.catalog_a,
            after.dra_cosdec_arcsec,
            after.ddec_arcsec,
            after.width_ra_arcsec,
            after.width_dec_arcsec,
            before.dra_cosdec_arcsec,
            before.ddec_arcsec,
            thinning_note(step_before.max(step_after))
        ),
    )
}

/// Every catalog's offset against the reference, before and after correction.
pub fn offsets(o: &[OffsetReport]) -> String {
    let mut fig = Figure::new(520.0, 460.0);
    // The axes follow the medians (a coarse catalog's width would hide them);
    // error bars run off the plot when wider.
    let mut values = Vec::new();
    for r in o {
        for c in [&r.initial, &r.residual].into_iter().flatten() {
            values.extend([
                2.0 * c.dra_cosdec_arcsec.abs(),
                2.0 * c.ddec_arcsec.abs(),
                c.width_ra_arcsec.min(0.2),
            ]);
        }
    }
    offset_axes(&mut fig, &values);
    for (k, r) in o.iter().enumerate() {
        let colour = P[k % 7];
        if let Some(i) = &r.initial {
            centre(&mut fig, i, colour, "offset-initial");
            fig.points(
                &[(i.dra_cosdec_arcsec, i.ddec_arcsec)],
                &PointStyle::open(Marker::Circle, colour),
                "offset-initial",
            );
            fig.text(
                (i.dra_cosdec_arcsec, i.ddec_arcsec),
                &format!(" {}", r.catalog),
                Anchor::Start,
                colour,
                "label",
            );
            if let Some(f) = &r.residual
                && (f.dra_cosdec_arcsec, f.ddec_arcsec) != (i.dra_cosdec_arcsec, i.ddec_arcsec)
            {
                fig.arrow(
                    (i.dra_cosdec_arcsec, i.ddec_arcsec),
                    (f.dra_cosdec_arcsec, f.ddec_arcsec),
                    &LineStyle::solid(colour),
                    "correction",
                );
            }
        }
        if let Some(f) = &r.residual {
            fig.points(
                &[(f.dra_cosdec_arcsec, f.ddec_arcsec)],
                &PointStyle::filled(Marker::Circle, colour),
                "offset-residual",
            );
        }
    }
    fig.legend_entry(
        "before correction",
        LegendKey::Point(PointStyle::open(Marker::Circle, Colour::BLACK)),
    );
    fig.legend_entry(
        "after",
        LegendKey::Point(PointStyle::filled(Marker::Circle, Colour::BLACK)),
    );
    fig.title = "Offsets against the astrometric reference".into();
    wrap(
        &fig,
        "fig-offsets",
        "Median offset of each catalog from the reference (east to the left), before correction (open, bars ± 1.4826·MAD) and after (filled); arrows show applied corrections.",
    )
}

/// False-match fractions per pair: one point each, or a curve per pair against radius.
pub fn false_matches(f: &[FalseMatchReport]) -> String {
    let curves = f.iter().any(|x| !x.by_radius.is_empty());
    let mut fig = Figure::new(520.0, (80.0 + 22.0 * f.len() as f64).max(260.0));
    let pct: Vec<f64> = f.iter().map(|x| 100.0 * x.false_fraction).collect();
    if curves {
        let radii: Vec<f64> = f
            .iter()
            .flat_map(|x| x.by_radius.iter().map(|r| r.0))
            .collect();
        let fr: Vec<f64> = f
            .iter()
            .flat_map(|x| x.by_radius.iter().map(|r| 100.0 * r.1))
            .collect();
        fig.x_axis = Axis::covering("radius (arcsec)", Scale::Linear, &radii, 0.05);
        fig.y_axis = Axis::covering("false candidates (%)", Scale::Linear, &fr, 0.1);
        for (k, x) in f.iter().enumerate() {
            let c = P[k % 7];
            let pts: Vec<(f64, f64)> = x.by_radius.iter().map(|r| (r.0, 100.0 * r.1)).collect();
            fig.polyline(&pts, &LineStyle::solid(c), "false-fraction");
            fig.legend_entry(
                &format!("{} × {}", x.catalog_a, x.catalog_b),
                LegendKey::Line(LineStyle::solid(c)),
            );
        }
    } else {
        let top = pct.iter().fold(1.0f64, |m, v| m.max(*v)) * 1.9;
        fig.x_axis = Axis::linear("false candidates (% of candidates)", 0.0, top);
        fig.y_axis = Axis::linear("", -0.7, f.len() as f64 - 0.3).inverted();
        fig.margins_px.0 = 20.0;
        let limit = 100.0 * super::warnings::FALSE_FRACTION;
        if limit < top {
            fig.polyline(
                &[(limit, -0.7), (limit, f.len() as f64)],
                &LineStyle::dashed(Colour::RED),
                "threshold",
            );
        }
        for (k, x) in f.iter().enumerate() {
            let y = k as f64;
            fig.points(
                &[(pct[k], y)],
                &PointStyle::filled(Marker::Circle, P[0]),
                "false-fraction",
            );
            fig.text(
                (pct[k], y),
                &format!(
                    "  {} × {}: {:.1} of {} ({:.2} %)",
                    x.catalog_a, x.catalog_b, x.expected_false, x.real_candidates, pct[k]
                ),
                Anchor::Start,
                Colour::BLACK,
                "label",
            );
        }
    }
    fig.title = "False matches from shifted catalogs".into();
    wrap(
        &fig,
        "fig-false",
        if curves {
            "False candidates as a fraction of the real candidates, against radius, per catalog pair."
        } else {
            "Chance candidates expected per catalog pair at its own tolerance (one point per pair: run.json gives no rates per radius); the dashed line is the 5 % warning threshold."
        },
    )
}

/// A horizontal bar chart of labelled counts.
fn bars(id: &str, title: &str, x_label: &str, items: &[(String, u64)], caption: &str) -> String {
    let mut fig = Figure::new(520.0, (70.0 + 24.0 * items.len() as f64).max(160.0));
    let top = items.iter().map(|i| i.1).max().unwrap_or(1).max(1) as f64;
    fig.x_axis = Axis::linear(x_label, 0.0, top * 1.45);
    fig.y_axis = Axis::linear("", -0.7, items.len() as f64 - 0.3).inverted();
    fig.margins_px.0 = 20.0;
    let bar = LineStyle {
        width_px: 14.0,
        ..LineStyle::solid(P[0])
    };
    for (k, (name, n)) in items.iter().enumerate() {
        let y = k as f64;
        fig.polyline(&[(0.0, y), (*n as f64, y)], &bar, "bar");
        fig.text(
            (*n as f64, y + 0.15),
            &format!(" {name}: {n}"),
            Anchor::Start,
            Colour::BLACK,
            "label",
        );
    }
    fig.title = title.into();
    wrap(&fig, id, caption)
}

/// Objects by number of catalogs.
pub fn by_catalogs(m: &BTreeMap<u64, u64>) -> String {
    let items: Vec<(String, u64)> = m
        .iter()
        .map(|(k, v)| (format!("{k} catalog(s)"), *v))
        .collect();
    bars(
        "fig-catalogs",
        "Objects by number of catalogs",
        "objects",
        &items,
        "Objects by the number of catalogs with a member in them.",
    )
}

/// Objects by flag.
pub fn by_flag(m: &BTreeMap<String, u64>) -> String {
    let items: Vec<(String, u64)> = m.iter().map(|(k, v)| (k.clone(), *v)).collect();
    bars(
        "fig-flags",
        "Objects by flag",
        "objects",
        &items,
        "Objects carrying each flag (an object may carry several).",
    )
}

/// Science classes.
pub fn classes(m: &BTreeMap<String, u64>) -> String {
    let items: Vec<(String, u64)> = m.iter().map(|(k, v)| (k.clone(), *v)).collect();
    bars(
        "fig-classes",
        "Science classes",
        "objects",
        &items,
        "Objects by class in science.parquet.",
    )
}

/// SED points of each catalog band by status, as stacked fractions.
pub fn bands(b: &[BandReport]) -> String {
    let used: Vec<&str> = STATUSES
        .iter()
        .copied()
        .filter(|st| {
            b.iter()
                .any(|x| x.by_status.get(*st).copied().unwrap_or(0) > 0)
        })
        .collect();
    let mut fig = Figure::new(660.0, (80.0 + 20.0 * b.len() as f64).max(200.0));
    fig.x_axis = Axis::linear("fraction of objects", 0.0, 1.9);
    fig.y_axis = Axis::linear("", -0.7, b.len() as f64 - 0.3).inverted();
    fig.margins_px.0 = 20.0;
    let style = |k: usize| LineStyle {
        width_px: 12.0,
        ..LineStyle::solid(P[k % 8])
    };
    for (k, band) in b.iter().enumerate() {
        let total: u64 = band.by_status.values().sum();
        let mut x = 0.0;
        for (s, st) in used.iter().enumerate() {
            let f = band.by_status.get(*st).copied().unwrap_or(0) as f64 / total.max(1) as f64;
            if f > 0.0 {
                fig.polyline(&[(x, k as f64), (x + f, k as f64)], &style(s), st);
            }
            x += f;
        }
        fig.text(
            (1.01, k as f64 + 0.15),
            &format!("{} {}", band.catalog, band.band),
            Anchor::Start,
            Colour::BLACK,
            "label",
        );
    }
    for (s, st) in used.iter().enumerate() {
        fig.legend_entry(st, LegendKey::Line(style(s)));
    }
    fig.title = "Band statuses".into();
    wrap(
        &fig,
        "fig-bands",
        "Fraction of the objects in each status, per catalog band (photometry.parquet).",
    )
}

/// Flag class of an object for the sky map, with its colour and marker.
fn sky_class(status: &str) -> usize {
    let flags: Vec<&str> = flag_names(status).collect();
    if flags.contains(&"ambiguous") {
        0
    } else if flags.contains(&"blend") {
        1
    } else if flags.contains(&"has_blend") {
        2
    } else if flags.contains(&"single_catalog") {
        3
    } else {
        4
    }
}

const SKY_CLASSES: [(&str, Marker, Colour); 5] = [
    ("ambiguous", Marker::Square, Colour(213, 94, 0)),
    ("blend", Marker::Diamond, Colour(204, 121, 167)),
    ("has_blend", Marker::Triangle, Colour(0, 158, 115)),
    ("single_catalog", Marker::Cross, Colour(0, 114, 178)),
    ("clean / other", Marker::Circle, Colour(128, 128, 128)),
];

/// The sky map of objects by flag, and one footprint panel per catalog.
///
/// # Errors
/// A missing column, named with its file.
pub fn sky(out: &OutputFolder) -> Result<Vec<String>> {
    let o = &out.objects;
    let (ra, dec) = (o.float("ra_deg")?, o.float("dec_deg")?);
    let status = o.text("status")?;
    let pos: Vec<(f64, f64, usize)> = ra
        .iter()
        .zip(&dec)
        .zip(&status)
        .filter_map(|((r, d), s)| Some(((*r)?, (*d)?, sky_class(s.as_deref().unwrap_or("")))))
        .collect();
    let all_ra: Vec<f64> = pos.iter().map(|p| p.0).collect();
    let all_dec: Vec<f64> = pos.iter().map(|p| p.1).collect();
    let b = footprint::bounds(&all_ra, &all_dec);
    let axes = |fig: &mut Figure| {
        fig.x_axis = Axis::linear("RA (deg)", b.0, b.1).inverted();
        fig.y_axis = Axis::linear("Dec (deg)", b.2, b.3);
    };
    let mut figs = Vec::new();
    let mut fig = Figure::new(560.0, 520.0);
    axes(&mut fig);
    let mut step = 1;
    for (k, (name, marker, colour)) in SKY_CLASSES.iter().enumerate().rev() {
        let pts: Vec<(f64, f64)> = pos
            .iter()
            .filter(|p| p.2 == k)
            .map(|p| (p.0, p.1))
            .collect();
        let style = PointStyle {
            size_px: if k == 4 { 3.5 } else { 6.0 },
            ..PointStyle::filled(*marker, *colour)
        };
        let (shown, k_step) = thinned(&pts);
        step = step.max(k_step);
        fig.points(&shown, &style, name);
        fig.legend_entry(&format!("{name} ({})", pts.len()), LegendKey::Point(style));
    }
    fig.title = "Objects by flag".into();
    figs.push(wrap(
        &fig,
        "fig-sky",
        &format!(
            "Objects at the reference epoch, by flag (east to the left).{}",
            thinning_note(step)
        ),
    ));

    let plan_file = std::path::PathBuf::from(out.run["plan_file"].as_str().unwrap_or(""));
    let plan = footprint::plan_coverage(out.run["plan"].as_str().unwrap_or(""), &plan_file);
    for (k, catalog) in out.catalogs().iter().enumerate() {
        let col = format!("{catalog}_source_id");
        if !o.has(&col) {
            continue;
        }
        let ids = o.text(&col)?;
        let seen: Vec<(f64, f64)> = ids
            .iter()
            .zip(ra.iter().zip(&dec))
            .filter_map(|(id, (r, d))| {
                id.as_ref()?;
                Some(((*r)?, (*d)?))
            })
            .collect();
        let (sr, sd): (Vec<f64>, Vec<f64>) = seen.iter().copied().unzip();
        let f = footprint::footprint(catalog, plan.get(k), &sr, &sd, b);
        let mut fig = Figure::new(300.0, 290.0);
        axes(&mut fig);
        let cell_px = (300.0 - 78.0 - 20.0) / GRID as f64 + 0.6;
        let mut cells = Vec::new();
        for j in 0..GRID {
            for i in 0..GRID {
                if f.inside[j * GRID + i] {
                    cells.push(footprint::grid_point(b, i, j));
                }
            }
        }
        let cell = PointStyle {
            size_px: cell_px,
            ..PointStyle::filled(Marker::Square, Colour(222, 235, 247))
        };
        fig.points(&cells, &cell, "footprint");
        let dot = PointStyle {
            size_px: 2.5,
            ..PointStyle::filled(Marker::Circle, P[k % 7])
        };
        let (shown, step) = thinned(&seen);
        fig.points(&shown, &dot, "member");
        fig.title = format!("{catalog}: {} objects", seen.len());
        figs.push(wrap(
            &fig,
            &format!("fig-foot-{catalog}"),
            &format!(
                "Footprint of {catalog} (shaded: {}) and the objects it has a member in.{}",
                f.source,
                thinning_note(step)
            ),
        ));
    }
    Ok(figs)
}

/// A card's sky chart at the common epoch, in arcsec east and north of the
/// objects' mean position (east to the left). With source positions: each
/// source with its 1σ error ellipse, coloured by the object it ended in, and
/// its candidate pairs; else the objects with their 1σ position errors and
/// the candidate pairs between objects.
pub fn card_chart(c: &Card) -> String {
    let n = c.objects.len().max(1) as f64;
    let ra0 = c.objects.iter().map(|o| o.ra_deg).sum::<f64>() / n;
    let dec0 = c.objects.iter().map(|o| o.dec_deg).sum::<f64>() / n;
    let colour_of = |id: &str| {
        let k = c
            .objects
            .iter()
            .position(|o| o.object_id == id)
            .unwrap_or(7);
        P[k % 8]
    };
    let mut fig = Figure::new(380.0, 380.0 + 30.0 * n);
    let mut extent = 0.3f64;
    let at = |ra: f64, dec: f64| offset_arcsec(ra, dec, ra0, dec0);
    let placed: Vec<(String, (f64, f64))> = if c.sources.is_empty() {
        c.objects
            .iter()
            .map(|o| (o.object_id.clone(), at(o.ra_deg, o.dec_deg)))
            .collect()
    } else {
        c.sources
            .iter()
            .map(|s| (s.source.clone(), at(s.ra_deg, s.dec_deg)))
            .collect()
    };
    for (_, p) in &placed {
        extent = extent.max(p.0.abs()).max(p.1.abs());
    }
    for o in &c.objects {
        extent = extent.max(o.pos_err_arcsec * 2.0);
    }
    // Room above for the legend of objects.
    let r = extent * 1.35;
    fig.x_axis = Axis::linear("east (arcsec)", -r, r).inverted();
    fig.y_axis = Axis::linear("north (arcsec)", -r, r * (1.0 + 0.22 * n));
    let where_is = |name: &str| placed.iter().find(|(n, _)| n == name).map(|p| p.1);
    // One probability label per joined pair of places: the highest.
    let mut labelled: Vec<((f64, f64), (f64, f64))> = Vec::new();
    let mut links: Vec<&super::cards::CardLink> = c.links.iter().collect();
    links.sort_by(|a, b| b.probability.total_cmp(&a.probability));
    for l in links {
        let (a, b) = if c.sources.is_empty() {
            (where_is(&l.object_a), where_is(&l.object_b))
        } else {
            (where_is(&l.source_a), where_is(&l.source_b))
        };
        if let (Some(a), Some(b)) = (a, b)
            && a != b
        {
            let style = if l.chosen {
                LineStyle::solid(Colour::GREY)
            } else {
                LineStyle::dashed(Colour::RED)
            };
            fig.polyline(
                &[a, b],
                &style,
                if l.chosen {
                    "chosen-pair"
                } else {
                    "rejected-pair"
                },
            );
            if labelled.contains(&(a, b)) || labelled.contains(&(b, a)) {
                continue;
            }
            labelled.push((a, b));
            fig.text(
                ((a.0 + b.0) / 2.0, (a.1 + b.1) / 2.0),
                &format!("{:.2}", l.probability),
                Anchor::Middle,
                Colour::BLACK,
                "probability",
            );
        }
    }
    if c.sources.is_empty() {
        for (o, (_, p)) in c.objects.iter().zip(&placed) {
            let colour = colour_of(&o.object_id);
            let e = o.pos_err_arcsec.max(1e-3);
            fig.ellipse(*p, (e, e), 0.0, &LineStyle::solid(colour), "error");
            let style = PointStyle::filled(Marker::Circle, colour);
            fig.points(&[*p], &style, "object");
            fig.legend_entry(&o.object_id, LegendKey::Point(style));
        }
    } else {
        for (s, (_, p)) in c.sources.iter().zip(&placed) {
            let colour = colour_of(&s.object_id);
            // Major axis along north rotated towards east (left on the page) by PA.
            fig.ellipse(
                *p,
                (s.minor_arcsec, s.major_arcsec),
                -s.pa_deg,
                &LineStyle::solid(colour),
                "error",
            );
            fig.points(&[*p], &PointStyle::filled(Marker::Circle, colour), "source");
            fig.text(
                *p,
                &format!(" {}", s.source),
                Anchor::Start,
                colour,
                "label",
            );
        }
        for o in &c.objects {
            let style = PointStyle::filled(Marker::Circle, colour_of(&o.object_id));
            fig.legend_entry(&o.object_id, LegendKey::Point(style));
        }
    }
    fig.title = if c.sources.is_empty() {
        "objects (schematic)".into()
    } else {
        "sources".into()
    };
    wrap(
        &fig,
        &format!("fig-{}", c.anchor),
        if c.sources.is_empty() {
            "Objects at the reference epoch with their 1σ position errors (circles); lines join objects with candidate pairs between their members (grey: chosen, red dashed: not chosen), labelled with the highest pair probability between them. Sources are not placed: the outputs carry no source positions."
        } else {
            "Sources at the common epoch with their 1σ error ellipses, coloured by the object they ended in; lines are candidate pairs (grey: chosen, red dashed: not chosen) labelled with their probability (the highest, where pairs coincide)."
        },
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layers_past_the_cap_are_thinned_evenly() {
        let pts: Vec<(f64, f64)> = (0..(2 * MAX_LAYER_POINTS + 1))
            .map(|i| (i as f64, 0.0))
            .collect();
        let (shown, step) = thinned(&pts);
        assert_eq!(step, 3);
        assert!(shown.len() <= MAX_LAYER_POINTS);
        assert_eq!(shown[1], (3.0, 0.0));
        let (all, one) = thinned(&pts[..MAX_LAYER_POINTS]);
        assert_eq!((all.len(), one), (MAX_LAYER_POINTS, 1));
        assert!(thinning_note(1).is_empty());
        assert!(thinning_note(3).contains("one point in 3"));
    }
}
