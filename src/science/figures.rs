//! Figures of the science layer, drawn with [`crate::plot`].
//!
//! - [`sed_figure`]: one object's SED, log λF_λ against log λ, detections with
//!   error bars, upper limits as downward arrows, the photosphere and the α fit
//!   with its value and class.
//! - [`colour_colour_figure`] and [`colour_magnitude_figure`]: the field, blue
//!   to the left, magnitudes bright at the top, points styled by class and
//!   excess flag, the reddening vector of the law for a chosen A_V, a reference
//!   locus when given, and on a colour–magnitude diagram the detection limits of
//!   the bands ([`band_depth`]): the `depth_mag` a survey schema states for the
//!   band (carried in the band table of `objects.parquet`), or else the depth
//!   inferred from the upper limit shared by the band's non-detections (blended
//!   points left out); the legend says which. Without either no limit line is drawn.

use super::alpha::YsoClass;
use super::compute::{ObjectScience, Science};
use super::sed_table::FieldSeds;
use crate::photometry::flux::nu_fnu_cgs;
use crate::plot::{
    Anchor, Axis, Colour, Figure, LegendKey, LegendPlace, LineStyle, Marker, PointStyle, Scale,
};

/// Styles of the five groups points are drawn in, with their legend text.
fn group_style(o: &ObjectScience, ir_excess: bool) -> (usize, PointStyle, &'static str) {
    let p = Colour::PALETTE;
    match o.alpha.class {
        Some(YsoClass::ClassI) => (0, PointStyle::filled(Marker::Triangle, p[1]), "Class I"),
        Some(YsoClass::Flat) => (1, PointStyle::filled(Marker::Diamond, p[3]), "flat"),
        Some(YsoClass::ClassII) => (2, PointStyle::filled(Marker::Circle, p[0]), "Class II"),
        Some(YsoClass::ClassIII) if ir_excess => (
            3,
            PointStyle::open(Marker::Square, p[2]),
            "Class III, IR excess",
        ),
        Some(YsoClass::ClassIII) => (
            4,
            PointStyle::open(Marker::Circle, Colour::GREY),
            "Class III",
        ),
        None if ir_excess => (
            5,
            PointStyle::open(Marker::Square, p[4]),
            "unclassified, IR excess",
        ),
        None => (
            6,
            PointStyle::open(Marker::Circle, Colour(170, 170, 170)),
            "unclassified",
        ),
    }
}

/// The class names used as SVG classes of the points of each group.
const GROUP_CLASS: [&str; 7] = [
    "point class-i",
    "point flat",
    "point class-ii",
    "point class-iii-excess",
    "point class-iii",
    "point unclassified-excess",
    "point unclassified",
];

/// SED of object `k`.
pub fn sed_figure(seds: &FieldSeds, sci: &Science, k: usize) -> Figure {
    let o = &sci.objects[k];
    let values = &seds.values[k];
    let mut fig = Figure::new(640.0, 480.0);
    fig.title = format!("SED of {}", seds.object_id[k]);
    let mut det = Vec::new();
    let mut bars = Vec::new();
    let mut lims = Vec::new();
    let mut ys = Vec::new();
    let mut xs = Vec::new();
    for (b, v) in seds.bands.iter().zip(values) {
        let l = b.wavelength_um;
        if let Some(f) = v.flux_jy.filter(|f| *f > 0.0) {
            let y = nu_fnu_cgs(f, l);
            det.push((l, y));
            if let Some(e) = v.flux_err_jy.filter(|e| *e > 0.0) {
                let lo = nu_fnu_cgs((f - e).max(f * 1e-3), l);
                bars.push((l, lo, nu_fnu_cgs(f + e, l)));
            }
            ys.push(y);
            xs.push(l);
        } else if let Some(u) = v.ulim_jy.filter(|u| *u > 0.0) {
            let y = nu_fnu_cgs(u, l);
            lims.push((l, y));
            ys.push(y);
            ys.push(y / 3.0);
            xs.push(l);
        }
    }
    let phot: Vec<(f64, f64)> = seds
        .bands
        .iter()
        .zip(&o.bands)
        .filter_map(|(b, s)| {
            s.phot_jy
                .map(|p| (b.wavelength_um, nu_fnu_cgs(p, b.wavelength_um)))
        })
        .collect();
    xs.extend(seds.bands.iter().map(|b| b.wavelength_um));
    if o.excess_dereddened {
        ys.extend(seds.bands.iter().zip(&o.bands).filter_map(|(b, s)| {
            s.dered_flux_jy
                .filter(|f| *f > 0.0)
                .map(|f| nu_fnu_cgs(f, b.wavelength_um))
        }));
    }
    fig.x_axis = Axis::covering("wavelength λ (µm)", Scale::Log10, &xs, 0.05);
    fig.y_axis = Axis::covering("λF_λ (erg s⁻¹ cm⁻²)", Scale::Log10, &ys, 0.08);
    let black = PointStyle::filled(Marker::Circle, Colour::BLACK);
    if !phot.is_empty() {
        let style = LineStyle::dashed(Colour::GREY);
        fig.polyline(&phot, &style, "photosphere");
        let how = if o.excess_dereddened {
            ", dereddened"
        } else {
            ""
        };
        fig.legend_entry(
            &format!("photosphere ({}{how})", sci.settings.anchor),
            LegendKey::Line(style),
        );
    }
    if o.excess_dereddened {
        let dered: Vec<(f64, f64)> = seds
            .bands
            .iter()
            .zip(&o.bands)
            .filter_map(|(b, s)| {
                let f = s.dered_flux_jy.filter(|f| *f > 0.0)?;
                Some((b.wavelength_um, nu_fnu_cgs(f, b.wavelength_um)))
            })
            .collect();
        let style = PointStyle::open(Marker::Circle, Colour::BLUE);
        fig.points(&dered, &style, "dereddened");
        fig.legend_entry(
            &format!("dereddened, A_V = {:.2} mag", o.av_mag.unwrap_or(0.0)),
            LegendKey::Point(style),
        );
    }
    fig.error_bars(&bars, Colour::BLACK, "error-bar");
    fig.points(&det, &black, "detection");
    fig.upper_limits(&lims, Colour::BLACK, "upper-limit");
    fig.legend_entry("detection", LegendKey::Point(black));
    if !lims.is_empty() {
        fig.legend_entry("upper limit", LegendKey::Limit(Colour::BLACK));
    }
    let (lo, hi) = sci.settings.alpha_window_um;
    let note = match o.alpha.fit {
        Some(fit) => {
            let style = LineStyle::solid(Colour::RED);
            let grid: Vec<(f64, f64)> = (0..=20)
                .map(|i| {
                    let l = lo * (hi / lo).powf(i as f64 / 20.0);
                    (l, fit.nu_fnu_cgs_at(l))
                })
                .collect();
            fig.polyline(&grid, &style, "alpha-fit");
            fig.legend_entry(&format!("α fit {lo}–{hi} µm"), LegendKey::Line(style));
            let err = fit
                .alpha_err
                .map_or(String::new(), |e| format!(" ± {e:.2}"));
            let class = o.alpha.class.map_or("unclassified".to_string(), |c| {
                match c {
                    YsoClass::ClassI => "Class I",
                    YsoClass::Flat => "flat",
                    YsoClass::ClassII => "Class II",
                    YsoClass::ClassIII => "Class III",
                }
                .to_string()
            });
            format!(
                "α = {:.2}{err} ({class}, {} points)",
                fit.alpha, fit.n_points
            )
            .replace('-', "\u{2212}")
        }
        None => "α: fewer than two detections in the window".to_string(),
    };
    fig.note((0.03, 0.95), &note, Anchor::Start, "alpha-value");
    fig
}

/// Band indices of a colour "a-b", ordered (bluer, redder); `None` if unknown.
pub fn parse_colour(seds: &FieldSeds, text: &str) -> Option<(usize, usize)> {
    let (a, b) = text.split_once('-')?;
    let (i, j) = (seds.band_index(a.trim())?, seds.band_index(b.trim())?);
    Some((i.min(j), i.max(j)))
}

fn colour_label(seds: &FieldSeds, (i, j): (usize, usize)) -> String {
    format!("{} − {} (mag)", seds.bands[i].name, seds.bands[j].name)
}

/// Measured colour of object `k` (both bands detected).
fn measured(seds: &FieldSeds, k: usize, (i, j): (usize, usize)) -> Option<f64> {
    let v = &seds.values[k];
    let (mi, _) = v[i].detected_mag(&seds.bands[i])?;
    let (mj, _) = v[j].detected_mag(&seds.bands[j])?;
    Some(mi - mj)
}

fn ir_flag(seds: &FieldSeds, sci: &Science, o: &ObjectScience) -> bool {
    seds.band_index(&sci.settings.anchor)
        .is_some_and(|a| o.ir_excess(&seds.bands, seds.bands[a].wavelength_um))
}

/// One group of points: style, legend text, positions.
type Group = (PointStyle, &'static str, Vec<(f64, f64)>);

/// Plots points grouped by class; returns nothing (marks added to `fig`).
fn grouped_points(fig: &mut Figure, seds: &FieldSeds, sci: &Science, xy: &[(usize, f64, f64)]) {
    let mut groups: Vec<Group> = Vec::new();
    let mut index = [usize::MAX; 7];
    for &(k, x, y) in xy {
        let o = &sci.objects[k];
        let (g, style, label) = group_style(o, ir_flag(seds, sci, o));
        if index[g] == usize::MAX {
            index[g] = groups.len();
            groups.push((style, label, Vec::new()));
        }
        groups[index[g]].2.push((x, y));
    }
    // Faint groups first, so classified objects are drawn on top.
    let mut order: Vec<usize> = (0..7).filter(|g| index[*g] != usize::MAX).collect();
    order.reverse();
    for g in order {
        let (style, label, pts) = &groups[index[g]];
        fig.points(pts, style, GROUP_CLASS[g]);
        fig.legend_entry(
            &format!("{label} ({})", pts.len()),
            LegendKey::Point(*style),
        );
    }
}

/// The reddening of colour (i, j) per magnitude of A_V: A_i/A_V − A_j/A_V.
fn reddening(sci: &Science, (i, j): (usize, usize)) -> Option<f64> {
    Some(sci.a_over_av[i]? - sci.a_over_av[j]?)
}

fn add_vector(fig: &mut Figure, sci: &Science, dx: Option<f64>, dy: Option<f64>, av_mag: f64) {
    let (Some(dx), Some(dy)) = (dx, dy) else {
        return;
    };
    let (x0, y0) = (
        fig.x_axis.min + 0.08 * (fig.x_axis.max - fig.x_axis.min),
        fig.y_axis.min + 0.12 * (fig.y_axis.max - fig.y_axis.min),
    );
    let style = LineStyle::solid(Colour::RED);
    fig.arrow(
        (x0, y0),
        (x0 + av_mag * dx, y0 + av_mag * dy),
        &style,
        "reddening-vector",
    );
    let law = match sci.settings.law.infrared {
        super::extinction::InfraredLaw::Xue16 => "Xue et al. 2016",
        super::extinction::InfraredLaw::Indebetouw05 => "Indebetouw et al. 2005",
    };
    let optical = match sci.settings.law.optical {
        super::extinction::OpticalLaw::Ccm89 => "CCM89",
        super::extinction::OpticalLaw::ODonnell94 => "O'Donnell 1994",
    };
    fig.legend_entry(
        &format!("A_V = {av_mag} mag ({optical} / {law})"),
        LegendKey::Line(style),
    );
}

/// A reference locus: a polyline of (x, y) in the diagram's units.
pub type Locus = Vec<(f64, f64)>;

/// Colour–colour diagram: `y` against `x`.
pub fn colour_colour_figure(
    seds: &FieldSeds,
    sci: &Science,
    y: (usize, usize),
    x: (usize, usize),
    av_mag: f64,
    locus: Option<&Locus>,
) -> Figure {
    let mut fig = Figure::new(960.0, 560.0);
    fig.margins_px.1 = 340.0;
    fig.legend_place = LegendPlace::Outside;
    let pts: Vec<(usize, f64, f64)> = (0..seds.object_id.len())
        .filter_map(|k| Some((k, measured(seds, k, x)?, measured(seds, k, y)?)))
        .collect();
    fig.title = format!("{} objects with both colours", pts.len());
    let mut xs: Vec<f64> = pts.iter().map(|p| p.1).collect();
    let mut ys: Vec<f64> = pts.iter().map(|p| p.2).collect();
    if let Some(l) = locus {
        xs.extend(l.iter().map(|p| p.0));
        ys.extend(l.iter().map(|p| p.1));
    }
    fig.x_axis = Axis::covering(&colour_label(seds, x), Scale::Linear, &xs, 0.06);
    fig.y_axis = Axis::covering(&colour_label(seds, y), Scale::Linear, &ys, 0.06);
    if let Some(l) = locus {
        let style = LineStyle::solid(Colour::GREY);
        fig.polyline(l, &style, "locus");
        fig.legend_entry("reference locus", LegendKey::Line(style));
    }
    grouped_points(&mut fig, seds, sci, &pts);
    add_vector(&mut fig, sci, reddening(sci, x), reddening(sci, y), av_mag);
    fig
}

/// Where a band's detection limit comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum DepthSource {
    /// The `depth_mag` of a survey schema, with its S/N when stated.
    Schema {
        /// The catalog whose schema states it.
        catalog: Option<String>,
        /// The signal-to-noise ratio of the depth.
        snr: Option<f64>,
    },
    /// The upper limit shared by this many non-detections ([`depth_mag`]).
    Inferred {
        /// How many non-detections share it.
        count: usize,
    },
}

/// A band's detection limit, magnitudes in the band's own system.
#[derive(Debug, Clone, PartialEq)]
pub struct Depth {
    /// The limiting magnitude.
    pub mag: f64,
    /// Where it comes from.
    pub source: DepthSource,
}

impl Depth {
    /// The legend text of the limit line of band `name`.
    pub fn legend(&self, name: &str) -> String {
        let how = match &self.source {
            DepthSource::Schema { catalog, snr } => {
                let snr = snr.map_or(String::new(), |n| format!("{n}σ, "));
                match catalog {
                    Some(c) => format!("{snr}schema of {c}"),
                    None => format!("{snr}survey schema"),
                }
            }
            DepthSource::Inferred { count } => {
                format!("inferred: limit of {count} non-detections")
            }
        };
        format!("{name} depth {:.2} mag ({how})", self.mag)
    }
}

/// The detection limit of band `b`: the schema's `depth_mag` when the band
/// table has one, else the depth inferred from repeated upper limits.
pub fn band_depth(seds: &FieldSeds, b: usize) -> Option<Depth> {
    let band = &seds.bands[b];
    if let Some(mag) = band.depth_mag {
        return Some(Depth {
            mag,
            source: DepthSource::Schema {
                catalog: band.depth_catalog.clone(),
                snr: band.depth_snr,
            },
        });
    }
    inferred_depth(seds, b).map(|(mag, count)| Depth {
        mag,
        source: DepthSource::Inferred { count },
    })
}

/// The survey depth of band `b` as a magnitude: the upper limit most often
/// repeated exactly (at least 3 times), which is how `build` marks a catalog's
/// depth for its non-detections.
pub fn depth_mag(seds: &FieldSeds, b: usize) -> Option<f64> {
    inferred_depth(seds, b).map(|d| d.0)
}

/// [`depth_mag`] and the number of non-detections at it.
fn inferred_depth(seds: &FieldSeds, b: usize) -> Option<(f64, usize)> {
    let mut counts: Vec<(u64, usize, f64)> = Vec::new();
    for v in &seds.values {
        // A blended point's limit is a coarse source's flux, which several
        // objects under it share: it says nothing about the survey's depth.
        if v[b].flux_jy.is_some() || v[b].mag.is_some() || v[b].blended {
            continue;
        }
        if let Some(m) = v[b].limit_mag(&seds.bands[b]) {
            let key = m.to_bits();
            match counts.iter_mut().find(|c| c.0 == key) {
                Some(c) => c.1 += 1,
                None => counts.push((key, 1, m)),
            }
        }
    }
    counts
        .into_iter()
        .filter(|c| c.1 >= 3)
        .max_by_key(|c| c.1)
        .map(|c| (c.2, c.1))
}

/// Colour–magnitude diagram: band `m` (bright at the top) against colour `x`.
pub fn colour_magnitude_figure(
    seds: &FieldSeds,
    sci: &Science,
    x: (usize, usize),
    m: usize,
    av_mag: f64,
    locus: Option<&Locus>,
) -> Figure {
    let mut fig = Figure::new(900.0, 640.0);
    fig.margins_px.1 = 340.0;
    fig.legend_place = LegendPlace::Outside;
    let pts: Vec<(usize, f64, f64)> = (0..seds.object_id.len())
        .filter_map(|k| {
            let (mag, _) = seds.values[k][m].detected_mag(&seds.bands[m])?;
            Some((k, measured(seds, k, x)?, mag))
        })
        .collect();
    fig.title = format!("{} objects", pts.len());
    let mut xs: Vec<f64> = pts.iter().map(|p| p.1).collect();
    let mut ys: Vec<f64> = pts.iter().map(|p| p.2).collect();
    // The magnitude band is often one of the colour's: each band's limit once.
    let mut limit_bands = vec![x.0, x.1];
    if !limit_bands.contains(&m) {
        limit_bands.push(m);
    }
    let depths: Vec<(usize, Depth)> = limit_bands
        .into_iter()
        .filter_map(|b| band_depth(seds, b).map(|d| (b, d)))
        .collect();
    ys.extend(depths.iter().filter(|d| d.0 == m).map(|d| d.1.mag));
    if let Some(l) = locus {
        xs.extend(l.iter().map(|p| p.0));
        ys.extend(l.iter().map(|p| p.1));
    }
    let band = &seds.bands[m];
    fig.x_axis = Axis::covering(&colour_label(seds, x), Scale::Linear, &xs, 0.06);
    fig.y_axis = Axis::covering(
        &format!("{} ({} mag)", band.name, band.system),
        Scale::Linear,
        &ys,
        0.05,
    )
    .inverted();
    if let Some(l) = locus {
        let style = LineStyle::solid(Colour::GREY);
        fig.polyline(l, &style, "locus");
        fig.legend_entry("reference locus", LegendKey::Line(style));
    }
    let (x_lo, x_hi) = (fig.x_axis.min, fig.x_axis.max);
    for (b, depth) in &depths {
        let d = &depth.mag;
        let style = LineStyle::dashed(Colour::BLUE);
        // y = m. Depth in m: y = d. Depth in the other colour band: if m is the
        // colour's red band, m_blue = d gives y = d − x; if m is its blue band,
        // m_red = d gives y = d + x; a third band's depth is not a line here.
        let line = if *b == m {
            Some(vec![(x_lo, *d), (x_hi, *d)])
        } else if m == x.1 && *b == x.0 {
            Some(vec![(x_lo, d - x_lo), (x_hi, d - x_hi)])
        } else if m == x.0 && *b == x.1 {
            Some(vec![(x_lo, d + x_lo), (x_hi, d + x_hi)])
        } else {
            None
        };
        if let Some(line) = line {
            fig.polyline(&line, &style, "detection-limit");
            fig.legend_entry(&depth.legend(&seds.bands[*b].name), LegendKey::Line(style));
        }
    }
    grouped_points(&mut fig, seds, sci, &pts);
    let dy = sci.a_over_av[m];
    add_vector(&mut fig, sci, reddening(sci, x), dy, av_mag);
    fig
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::science::ScienceSettings;
    use crate::science::compute::compute;
    use crate::science::sed_table::{BandInfo, BandValue};

    /// Five objects with H and Ks detected and three whose Ks is an upper limit
    /// at Ks = 15.0 (a depth that can be inferred); `ks_depth` is the schema's.
    fn field(ks_depth: Option<f64>) -> FieldSeds {
        let band = |id: &str, name: &str, l: f64, f0: f64| BandInfo {
            id: id.into(),
            system: "vega".into(),
            name: name.into(),
            wavelength_um: l,
            zero_point_jy: Some(f0),
            ..BandInfo::default()
        };
        let mut ks = band("tmass_ks", "Ks", 2.159, 666.7);
        ks.depth_mag = ks_depth;
        ks.depth_snr = ks_depth.map(|_| 10.0);
        ks.depth_catalog = ks_depth.map(|_| "tiny".to_string());
        let bands = vec![band("tmass_h", "H", 1.662, 1024.0), ks];
        let det = |f0: f64, m: f64| {
            let f = f0 * 10f64.powf(-0.4 * m);
            BandValue {
                flux_jy: Some(f),
                flux_err_jy: Some(0.02 * f),
                ..BandValue::default()
            }
        };
        let mut values: Vec<Vec<BandValue>> = (0..5)
            .map(|k| {
                let ks = 11.0 + k as f64;
                vec![det(1024.0, ks + 0.2), det(666.7, ks)]
            })
            .collect();
        for _ in 0..3 {
            values.push(vec![
                det(1024.0, 15.5),
                BandValue {
                    ulim_jy: Some(666.7 * 10f64.powf(-0.4 * 15.0)),
                    ..BandValue::default()
                },
            ]);
        }
        FieldSeds {
            path: "objects.parquet".into(),
            bands,
            object_id: (0..values.len()).map(|k| format!("t:{k}")).collect(),
            values,
            metadata: Vec::new(),
        }
    }

    /// The page y of every vertex of the `detection-limit` paths of `svg`.
    fn limit_line_ys(svg: &str) -> Vec<f64> {
        svg.lines()
            .filter(|l| l.contains("class=\"detection-limit\""))
            .flat_map(|l| {
                let d = l.split(" d=\"").nth(1).unwrap();
                let d = &d[..d.find('"').unwrap()];
                d.split(['M', 'L'])
                    .filter(|p| !p.is_empty())
                    .map(|p| p.split(' ').nth(1).unwrap().parse::<f64>().unwrap())
                    .collect::<Vec<_>>()
            })
            .collect()
    }

    fn legend_texts(svg: &str) -> Vec<String> {
        svg.lines()
            .filter(|l| l.contains("class=\"legend-text\""))
            .map(|l| {
                let t = &l[l.find('>').unwrap() + 1..];
                t[..t.find('<').unwrap()].to_string()
            })
            .collect()
    }

    #[test]
    fn a_schema_depth_draws_the_limit_line_at_its_value() {
        let seds = field(Some(14.3));
        let sci = compute(&seds, &ScienceSettings::default()).unwrap();
        let fig = colour_magnitude_figure(&seds, &sci, (0, 1), 1, 1.0, None);
        let svg = fig.to_svg();
        // One horizontal line, at the page height of Ks = 14.3 (not at the 15.0
        // the non-detections share: the schema's depth comes first).
        let want = fig.to_page(0.0, 14.3).unwrap().1;
        let ys = limit_line_ys(&svg);
        assert_eq!(ys.len(), 2, "{svg}");
        for y in ys {
            assert!((y - want).abs() < 0.006, "{y} vs {want}");
        }
        assert!(
            legend_texts(&svg).contains(&"Ks depth 14.30 mag (10σ, schema of tiny)".to_string()),
            "{:?}",
            legend_texts(&svg)
        );
    }

    #[test]
    fn without_a_schema_depth_the_inferred_one_is_drawn_and_named() {
        let seds = field(None);
        let sci = compute(&seds, &ScienceSettings::default()).unwrap();
        let fig = colour_magnitude_figure(&seds, &sci, (0, 1), 1, 1.0, None);
        let svg = fig.to_svg();
        let want = fig.to_page(0.0, 15.0).unwrap().1;
        let ys = limit_line_ys(&svg);
        assert_eq!(ys.len(), 2, "{svg}");
        for y in ys {
            assert!((y - want).abs() < 0.006, "{y} vs {want}");
        }
        assert!(
            legend_texts(&svg)
                .contains(&"Ks depth 15.00 mag (inferred: limit of 3 non-detections)".to_string()),
            "{:?}",
            legend_texts(&svg)
        );
        // Two repeats are not a depth: no line at all.
        let mut seds = field(None);
        seds.values.pop();
        seds.object_id.pop();
        let sci = compute(&seds, &ScienceSettings::default()).unwrap();
        let svg = colour_magnitude_figure(&seds, &sci, (0, 1), 1, 1.0, None).to_svg();
        assert!(limit_line_ys(&svg).is_empty());
    }
}
