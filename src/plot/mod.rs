//! Scientific figures as SVG (and PNG through [`png`]), drawn our own way.
//!
//! A [`Figure`] is a canvas with margins around one plot area, an x and a y
//! [`Axis`] (linear or log10, either may be inverted — magnitudes bright at the
//! top), and marks added in data coordinates: points with a [`Marker`], error
//! bars, downward arrows for upper limits, polylines, arrows (e.g. a reddening
//! vector), ellipses, text and a legend. [`Figure::to_svg`] writes a standalone
//! SVG document; every mark carries a `class` attribute naming what it is, so a
//! test (or a stylesheet) can find the points, limits and fit lines.
//!
//! ```
//! use fluxloom::plot::{Axis, Figure, LineStyle, PointStyle, Colour};
//!
//! let mut fig = Figure::new(640.0, 480.0);
//! fig.x_axis = Axis::log10("wavelength λ (µm)", 1.0, 30.0);
//! fig.y_axis = Axis::log10("λF_λ (erg s⁻¹ cm⁻²)", 1e-12, 1e-9);
//! fig.points(&[(2.159, 2.3e-10), (3.55, 1.1e-10)], &PointStyle::default(), "detection");
//! fig.upper_limits(&[(23.675, 9e-12)], Colour::BLACK, "upper-limit");
//! fig.polyline(&[(2.0, 2.5e-10), (24.0, 8e-12)], &LineStyle::solid(Colour::RED), "fit");
//! let svg = fig.to_svg();
//! assert!(svg.starts_with("<svg"));
//! ```
//!
//! Values that cannot be placed (NaN, or ≤ 0 on a log axis) are skipped; marks
//! are clipped to the plot area.

pub mod png;
pub mod ticks;

use std::fmt::Write as _;

pub use ticks::Tick;

/// An RGB colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Colour(pub u8, pub u8, pub u8);

impl Colour {
    /// Black.
    pub const BLACK: Colour = Colour(0, 0, 0);
    /// Mid grey, for reference lines and loci.
    pub const GREY: Colour = Colour(128, 128, 128);
    /// Red.
    pub const RED: Colour = Colour(200, 40, 40);
    /// Blue.
    pub const BLUE: Colour = Colour(40, 80, 200);

    /// A palette of eight colours that stay distinct in print and for the
    /// common colour-vision deficiencies (Okabe & Ito 2008, "Color Universal
    /// Design" (from memory)).
    pub const PALETTE: [Colour; 8] = [
        Colour(0, 114, 178),
        Colour(213, 94, 0),
        Colour(0, 158, 115),
        Colour(204, 121, 167),
        Colour(230, 159, 0),
        Colour(86, 180, 233),
        Colour(0, 0, 0),
        Colour(240, 228, 66),
    ];

    /// The colour as `#rrggbb`.
    pub fn hex(&self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }
}

/// How an axis maps data values to positions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Scale {
    /// Position proportional to the value.
    Linear,
    /// Position proportional to log10 of the value; values ≤ 0 cannot be drawn.
    Log10,
}

/// One axis: label (with units), scale, range and direction.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Label text, units in parentheses, e.g. `"J − H (mag)"`.
    pub label: String,
    /// Linear or log10.
    pub scale: Scale,
    /// Value at the start of the axis (left, or bottom), before inversion.
    pub min: f64,
    /// Value at the end of the axis (right, or top), before inversion.
    pub max: f64,
    /// When true the axis runs from `max` to `min` (magnitudes: bright at the top).
    pub inverted: bool,
}

impl Axis {
    /// A linear axis from `min` to `max`.
    pub fn linear(label: &str, min: f64, max: f64) -> Axis {
        Axis {
            label: label.to_string(),
            scale: Scale::Linear,
            min,
            max,
            inverted: false,
        }
    }

    /// A log10 axis from `min` to `max` (both > 0).
    pub fn log10(label: &str, min: f64, max: f64) -> Axis {
        Axis {
            label: label.to_string(),
            scale: Scale::Log10,
            min,
            max,
            inverted: false,
        }
    }

    /// The same axis running the other way.
    pub fn inverted(mut self) -> Axis {
        self.inverted = true;
        self
    }

    /// An axis of `scale` whose range covers `values` with a margin of
    /// `pad_fraction` of the span (in log space for a log axis). Falls back to
    /// 0..1 (or 1..10) when no value can be placed.
    pub fn covering(label: &str, scale: Scale, values: &[f64], pad_fraction: f64) -> Axis {
        let usable = values.iter().copied().filter(|v| match scale {
            Scale::Linear => v.is_finite(),
            Scale::Log10 => v.is_finite() && *v > 0.0,
        });
        let t = |v: f64| match scale {
            Scale::Linear => v,
            Scale::Log10 => v.log10(),
        };
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in usable {
            lo = lo.min(t(v));
            hi = hi.max(t(v));
        }
        if !lo.is_finite() {
            (lo, hi) = (0.0, 1.0);
        }
        let span = if hi > lo { hi - lo } else { 1.0 };
        let (lo, hi) = (lo - pad_fraction * span, hi + pad_fraction * span);
        match scale {
            Scale::Linear => Axis::linear(label, lo, hi),
            Scale::Log10 => Axis::log10(label, 10f64.powf(lo), 10f64.powf(hi)),
        }
    }

    /// The value transformed to the axis' own linear space (log10 for log axes);
    /// `None` when it cannot be drawn.
    fn transform(&self, v: f64) -> Option<f64> {
        match self.scale {
            Scale::Linear if v.is_finite() => Some(v),
            Scale::Log10 if v.is_finite() && v > 0.0 => Some(v.log10()),
            _ => None,
        }
    }

    /// Position of `v` as a fraction 0..1 along the axis (0 = start), or `None`.
    pub fn fraction(&self, v: f64) -> Option<f64> {
        let t = self.transform(v)?;
        let a = self.transform(self.min)?;
        let b = self.transform(self.max)?;
        if a == b {
            return None;
        }
        let f = (t - a) / (b - a);
        Some(if self.inverted { 1.0 - f } else { f })
    }

    /// The ticks of this axis.
    pub fn ticks(&self) -> Vec<Tick> {
        match self.scale {
            Scale::Linear => ticks::linear_ticks(self.min, self.max, 6),
            Scale::Log10 => ticks::log_ticks(self.min, self.max),
        }
    }
}

/// The symbol drawn at a point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// A circle.
    Circle,
    /// A square.
    Square,
    /// A triangle pointing up.
    Triangle,
    /// A diamond.
    Diamond,
    /// A diagonal cross (stroke only).
    Cross,
}

/// How points are drawn.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PointStyle {
    /// Symbol.
    pub marker: Marker,
    /// Symbol size (diameter), px.
    pub size_px: f64,
    /// Outline colour.
    pub stroke: Colour,
    /// Fill colour; `None` for an open symbol.
    pub fill: Option<Colour>,
}

impl Default for PointStyle {
    fn default() -> Self {
        PointStyle {
            marker: Marker::Circle,
            size_px: 6.0,
            stroke: Colour::BLACK,
            fill: Some(Colour::BLACK),
        }
    }
}

impl PointStyle {
    /// A filled symbol of one colour.
    pub fn filled(marker: Marker, colour: Colour) -> PointStyle {
        PointStyle {
            marker,
            stroke: colour,
            fill: Some(colour),
            ..PointStyle::default()
        }
    }

    /// An open symbol.
    pub fn open(marker: Marker, colour: Colour) -> PointStyle {
        PointStyle {
            marker,
            stroke: colour,
            fill: None,
            ..PointStyle::default()
        }
    }
}

/// How lines are drawn.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineStyle {
    /// Colour.
    pub colour: Colour,
    /// Width, px.
    pub width_px: f64,
    /// Dash length and gap, px; `None` for a solid line.
    pub dash_px: Option<(f64, f64)>,
}

impl LineStyle {
    /// A solid line 1.5 px wide.
    pub fn solid(colour: Colour) -> LineStyle {
        LineStyle {
            colour,
            width_px: 1.5,
            dash_px: None,
        }
    }

    /// A dashed line 1.5 px wide.
    pub fn dashed(colour: Colour) -> LineStyle {
        LineStyle {
            colour,
            width_px: 1.5,
            dash_px: Some((6.0, 4.0)),
        }
    }
}

/// Horizontal placement of text relative to its anchor point.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Anchor {
    /// Text starts at the point.
    Start,
    /// Text is centred on the point.
    Middle,
    /// Text ends at the point.
    End,
}

impl Anchor {
    fn svg(&self) -> &'static str {
        match self {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        }
    }
}

/// What a legend entry shows beside its text.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LegendKey {
    /// A point symbol.
    Point(PointStyle),
    /// A short line.
    Line(LineStyle),
    /// A downward arrow (upper limit) of a colour.
    Limit(Colour),
}

/// One mark in data coordinates.
#[derive(Debug, Clone, PartialEq)]
enum Mark {
    Points {
        xy: Vec<(f64, f64)>,
        style: PointStyle,
        class: String,
    },
    ErrorBars {
        /// (x, y_low, y_high) or, when `horizontal`, (y, x_low, x_high).
        bars: Vec<(f64, f64, f64)>,
        horizontal: bool,
        colour: Colour,
        class: String,
    },
    Limits {
        xy: Vec<(f64, f64)>,
        colour: Colour,
        class: String,
    },
    Polyline {
        xy: Vec<(f64, f64)>,
        style: LineStyle,
        class: String,
    },
    Arrow {
        from: (f64, f64),
        to: (f64, f64),
        style: LineStyle,
        class: String,
    },
    Ellipse {
        centre: (f64, f64),
        radii: (f64, f64),
        angle_deg: f64,
        style: LineStyle,
        class: String,
    },
    Text {
        at: (f64, f64),
        text: String,
        anchor: Anchor,
        colour: Colour,
        class: String,
    },
    Note {
        /// Fractions of the plot area, from its top-left corner.
        at_fraction: (f64, f64),
        text: String,
        anchor: Anchor,
        class: String,
    },
}

/// Where the legend goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LegendPlace {
    /// Inside the plot area, top-right corner.
    TopRight,
    /// Inside the plot area, top-left corner.
    TopLeft,
    /// Inside the plot area, bottom-right corner.
    BottomRight,
    /// Inside the plot area, bottom-left corner.
    BottomLeft,
    /// Outside, in the right margin (widen `margins_px.1` to make room).
    Outside,
}

/// A figure: canvas, margins, two axes, marks and a legend.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// Canvas width, px.
    pub width_px: f64,
    /// Canvas height, px.
    pub height_px: f64,
    /// Margins left, right, top, bottom around the plot area, px.
    pub margins_px: (f64, f64, f64, f64),
    /// Title above the plot area (may be empty).
    pub title: String,
    /// The horizontal axis.
    pub x_axis: Axis,
    /// The vertical axis.
    pub y_axis: Axis,
    /// Font size of tick labels, px (labels and title are scaled from it).
    pub font_px: f64,
    /// Where the legend is drawn.
    pub legend_place: LegendPlace,
    /// Name of the figure inside a page: its clip path gets the element id
    /// `clip-<id>`. Empty (the default): `clip-` and 16 hexadecimal digits of a
    /// 64-bit FNV-1a hash of the figure's own SVG, so different figures inlined
    /// in one HTML page never share an id and the same figure always gets the
    /// same one. Set it to a name unique in the page to choose the id yourself.
    pub id: String,
    marks: Vec<Mark>,
    legend: Vec<(String, LegendKey)>,
}

/// Escapes text for XML character data and attribute values.
pub fn xml_escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c => out.push(c),
        }
    }
    out
}

/// Stands for the clip-path id while the SVG is written. It cannot come from
/// a title, label or legend text: those go through [`xml_escape`], which
/// writes every `<` as `&lt;`.
const CLIP_PLACEHOLDER: &str = "<clip-id>";

/// 64-bit FNV-1a hash (Fowler, Noll & Vo; offset basis 0xcbf29ce484222325,
/// prime 0x100000001b3, from the authors' published parameters, from memory):
/// small, stable across platforms and releases, unlike `std`'s hasher.
fn fnv1a_64(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// A number written compactly for SVG coordinates (two decimals).
fn n(v: f64) -> String {
    let s = format!("{v:.2}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".to_string()
    } else {
        s.to_string()
    }
}

impl Figure {
    /// An empty figure of `width_px` × `height_px` with unit linear axes.
    pub fn new(width_px: f64, height_px: f64) -> Figure {
        Figure {
            width_px,
            height_px,
            margins_px: (78.0, 20.0, 36.0, 56.0),
            title: String::new(),
            x_axis: Axis::linear("", 0.0, 1.0),
            y_axis: Axis::linear("", 0.0, 1.0),
            font_px: 12.0,
            legend_place: LegendPlace::TopRight,
            id: String::new(),
            marks: Vec::new(),
            legend: Vec::new(),
        }
    }

    /// Adds points drawn with `style`; `class` names them in the SVG.
    pub fn points(&mut self, xy: &[(f64, f64)], style: &PointStyle, class: &str) {
        self.marks.push(Mark::Points {
            xy: xy.to_vec(),
            style: *style,
            class: class.to_string(),
        });
    }

    /// Adds vertical error bars, each `(x, y_low, y_high)`.
    pub fn error_bars(&mut self, bars: &[(f64, f64, f64)], colour: Colour, class: &str) {
        self.marks.push(Mark::ErrorBars {
            bars: bars.to_vec(),
            horizontal: false,
            colour,
            class: class.to_string(),
        });
    }

    /// Adds horizontal error bars, each `(y, x_low, x_high)`.
    pub fn x_error_bars(&mut self, bars: &[(f64, f64, f64)], colour: Colour, class: &str) {
        self.marks.push(Mark::ErrorBars {
            bars: bars.to_vec(),
            horizontal: true,
            colour,
            class: class.to_string(),
        });
    }

    /// Adds upper limits: a bar at each `(x, y)` with an arrow pointing down
    /// the page (towards fainter on a flux axis).
    pub fn upper_limits(&mut self, xy: &[(f64, f64)], colour: Colour, class: &str) {
        self.marks.push(Mark::Limits {
            xy: xy.to_vec(),
            colour,
            class: class.to_string(),
        });
    }

    /// Adds a polyline through `xy` (points that cannot be placed break nothing: they are skipped).
    pub fn polyline(&mut self, xy: &[(f64, f64)], style: &LineStyle, class: &str) {
        self.marks.push(Mark::Polyline {
            xy: xy.to_vec(),
            style: *style,
            class: class.to_string(),
        });
    }

    /// Adds an arrow from `from` to `to` with a head at `to` (e.g. a reddening vector).
    pub fn arrow(&mut self, from: (f64, f64), to: (f64, f64), style: &LineStyle, class: &str) {
        self.marks.push(Mark::Arrow {
            from,
            to,
            style: *style,
            class: class.to_string(),
        });
    }

    /// Adds an ellipse centred at `centre` with semi-axes `radii` in data units
    /// along x and y (linear axes), rotated by `angle_deg` on the page.
    pub fn ellipse(
        &mut self,
        centre: (f64, f64),
        radii: (f64, f64),
        angle_deg: f64,
        style: &LineStyle,
        class: &str,
    ) {
        self.marks.push(Mark::Ellipse {
            centre,
            radii,
            angle_deg,
            style: *style,
            class: class.to_string(),
        });
    }

    /// Adds text at a data position.
    pub fn text(
        &mut self,
        at: (f64, f64),
        text: &str,
        anchor: Anchor,
        colour: Colour,
        class: &str,
    ) {
        self.marks.push(Mark::Text {
            at,
            text: text.to_string(),
            anchor,
            colour,
            class: class.to_string(),
        });
    }

    /// Adds text placed by fractions of the plot area from its top-left corner
    /// (e.g. `(0.03, 0.06)` for a note in the top-left).
    pub fn note(&mut self, at_fraction: (f64, f64), text: &str, anchor: Anchor, class: &str) {
        self.marks.push(Mark::Note {
            at_fraction,
            text: text.to_string(),
            anchor,
            class: class.to_string(),
        });
    }

    /// Adds a legend entry (the legend is drawn where [`Figure::legend_place`] says).
    pub fn legend_entry(&mut self, text: &str, key: LegendKey) {
        self.legend.push((text.to_string(), key));
    }

    /// The plot area: left, top, width, height, px.
    fn area(&self) -> (f64, f64, f64, f64) {
        let (l, r, t, b) = self.margins_px;
        (
            l,
            t,
            (self.width_px - l - r).max(1.0),
            (self.height_px - t - b).max(1.0),
        )
    }

    /// Page position of a data point, or `None` when it cannot be placed.
    pub fn to_page(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let (l, t, w, h) = self.area();
        let fx = self.x_axis.fraction(x)?;
        let fy = self.y_axis.fraction(y)?;
        Some((l + fx * w, t + (1.0 - fy) * h))
    }

    /// The figure as a standalone SVG document.
    pub fn to_svg(&self) -> String {
        let mut s = String::with_capacity(4096);
        let (w, h) = (self.width_px, self.height_px);
        let fs = self.font_px;
        let _ = writeln!(
            s,
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{}" height="{}" viewBox="0 0 {} {}" font-family="DejaVu Sans, sans-serif" font-size="{}">"#,
            n(w),
            n(h),
            n(w),
            n(h),
            n(fs)
        );
        let (l, t, aw, ah) = self.area();
        let _ = writeln!(
            s,
            r#"<defs><clipPath id="{CLIP_PLACEHOLDER}"><rect x="{}" y="{}" width="{}" height="{}"/></clipPath></defs>"#,
            n(l),
            n(t),
            n(aw),
            n(ah)
        );
        let _ = writeln!(
            s,
            r##"<rect class="background" x="0" y="0" width="{}" height="{}" fill="#ffffff"/>"##,
            n(w),
            n(h)
        );
        self.write_axes(&mut s);
        let _ = writeln!(s, "<g clip-path=\"url(#{CLIP_PLACEHOLDER})\">");
        for mark in &self.marks {
            self.write_mark(&mut s, mark);
        }
        s.push_str("</g>\n");
        self.write_legend(&mut s);
        let _ = writeln!(
            s,
            r##"<rect class="frame" x="{}" y="{}" width="{}" height="{}" fill="none" stroke="#000000" stroke-width="1"/>"##,
            n(l),
            n(t),
            n(aw),
            n(ah)
        );
        if !self.title.is_empty() {
            let _ = writeln!(
                s,
                r#"<text class="title" x="{}" y="{}" text-anchor="middle" font-size="{}">{}</text>"#,
                n(l + aw / 2.0),
                n(t - 0.8 * fs),
                n(fs * 1.2),
                xml_escape(&self.title)
            );
        }
        s.push_str("</svg>\n");
        s.replace(CLIP_PLACEHOLDER, &self.clip_id(&s))
    }

    /// The element id of the clip path: `clip-<id>`, or `clip-` and the
    /// FNV-1a hash of `svg` (the document with the placeholder id) when the
    /// figure has no [`Figure::id`].
    fn clip_id(&self, svg: &str) -> String {
        if self.id.is_empty() {
            format!("clip-{:016x}", fnv1a_64(svg.as_bytes()))
        } else {
            format!("clip-{}", xml_escape(&self.id))
        }
    }

    fn write_tick_label(s: &mut String, x: f64, y: f64, anchor: &str, tick: &Tick, class: &str) {
        match tick.exponent {
            Some(k) => {
                let exp = if k < 0 {
                    format!("\u{2212}{}", -k)
                } else {
                    k.to_string()
                };
                let _ = writeln!(
                    s,
                    r#"<text class="{class}" x="{}" y="{}" text-anchor="{anchor}">10<tspan dy="-5" font-size="80%">{}</tspan></text>"#,
                    n(x),
                    n(y),
                    exp
                );
            }
            None => {
                let _ = writeln!(
                    s,
                    r#"<text class="{class}" x="{}" y="{}" text-anchor="{anchor}">{}</text>"#,
                    n(x),
                    n(y),
                    xml_escape(&tick.label)
                );
            }
        }
    }

    fn write_axes(&self, s: &mut String) {
        let (l, t, aw, ah) = self.area();
        let fs = self.font_px;
        s.push_str("<g class=\"axes\" stroke=\"#000000\" stroke-width=\"1\">\n");
        for tick in self.x_axis.ticks() {
            if let Some(f) = self.x_axis.fraction(tick.value)
                && (-1e-9..=1.0 + 1e-9).contains(&f)
            {
                let x = l + f * aw;
                let _ = writeln!(
                    s,
                    r#"<line class="x-tick" x1="{0}" y1="{1}" x2="{0}" y2="{2}"/>"#,
                    n(x),
                    n(t + ah),
                    n(t + ah - 5.0)
                );
                Self::write_tick_label(s, x, t + ah + fs * 1.4, "middle", &tick, "x-tick-label");
            }
        }
        for tick in self.y_axis.ticks() {
            if let Some(f) = self.y_axis.fraction(tick.value)
                && (-1e-9..=1.0 + 1e-9).contains(&f)
            {
                let y = t + (1.0 - f) * ah;
                let _ = writeln!(
                    s,
                    r#"<line class="y-tick" x1="{0}" y1="{1}" x2="{2}" y2="{1}"/>"#,
                    n(l),
                    n(y),
                    n(l + 5.0)
                );
                Self::write_tick_label(s, l - 6.0, y + fs * 0.35, "end", &tick, "y-tick-label");
            }
        }
        s.push_str("</g>\n");
        let _ = writeln!(
            s,
            r#"<text class="x-label" x="{}" y="{}" text-anchor="middle" font-size="{}">{}</text>"#,
            n(l + aw / 2.0),
            n(t + ah + fs * 3.2),
            n(fs * 1.1),
            xml_escape(&self.x_axis.label)
        );
        let (yx, yy) = (l - fs * 4.8, t + ah / 2.0);
        let _ = writeln!(
            s,
            r#"<text class="y-label" x="{0}" y="{1}" text-anchor="middle" font-size="{2}" transform="rotate(-90 {0} {1})">{3}</text>"#,
            n(yx),
            n(yy),
            n(fs * 1.1),
            xml_escape(&self.y_axis.label)
        );
    }

    fn marker_svg(s: &mut String, x: f64, y: f64, style: &PointStyle, class: &str) {
        let r = style.size_px / 2.0;
        let fill = style.fill.map_or("none".to_string(), |c| c.hex());
        let stroke = style.stroke.hex();
        let common = format!(r#"class="{class}" fill="{fill}" stroke="{stroke}" stroke-width="1""#);
        let _ = match style.marker {
            Marker::Circle => writeln!(
                s,
                r#"<circle {common} cx="{}" cy="{}" r="{}"/>"#,
                n(x),
                n(y),
                n(r)
            ),
            Marker::Square => writeln!(
                s,
                r#"<rect {common} x="{}" y="{}" width="{}" height="{}"/>"#,
                n(x - r),
                n(y - r),
                n(2.0 * r),
                n(2.0 * r)
            ),
            Marker::Triangle => writeln!(
                s,
                r#"<path {common} d="M{} {}L{} {}L{} {}Z"/>"#,
                n(x),
                n(y - 1.15 * r),
                n(x + r),
                n(y + 0.6 * r),
                n(x - r),
                n(y + 0.6 * r)
            ),
            Marker::Diamond => writeln!(
                s,
                r#"<path {common} d="M{} {}L{} {}L{} {}L{} {}Z"/>"#,
                n(x),
                n(y - 1.2 * r),
                n(x + r),
                n(y),
                n(x),
                n(y + 1.2 * r),
                n(x - r),
                n(y)
            ),
            Marker::Cross => writeln!(
                s,
                r#"<path class="{class}" fill="none" stroke="{stroke}" stroke-width="1.5" d="M{} {}L{} {}M{} {}L{} {}"/>"#,
                n(x - r),
                n(y - r),
                n(x + r),
                n(y + r),
                n(x - r),
                n(y + r),
                n(x + r),
                n(y - r)
            ),
        };
    }

    fn line_attrs(style: &LineStyle) -> String {
        let mut a = format!(
            r#"fill="none" stroke="{}" stroke-width="{}""#,
            style.colour.hex(),
            n(style.width_px)
        );
        if let Some((d, g)) = style.dash_px {
            let _ = write!(a, r#" stroke-dasharray="{} {}""#, n(d), n(g));
        }
        a
    }

    fn limit_svg(s: &mut String, x: f64, y: f64, colour: Colour, class: &str) {
        // A short bar at the limit and an arrow 18 px long pointing down the page.
        let c = colour.hex();
        let _ = writeln!(
            s,
            r#"<path class="{class}" fill="none" stroke="{c}" stroke-width="1.5" d="M{} {}L{} {}M{} {}L{} {}"/><path class="{class}-head" fill="{c}" stroke="none" d="M{} {}L{} {}L{} {}Z"/>"#,
            n(x - 4.0),
            n(y),
            n(x + 4.0),
            n(y),
            n(x),
            n(y),
            n(x),
            n(y + 13.0),
            n(x - 4.0),
            n(y + 12.0),
            n(x + 4.0),
            n(y + 12.0),
            n(x),
            n(y + 18.0)
        );
    }

    fn write_mark(&self, s: &mut String, mark: &Mark) {
        match mark {
            Mark::Points { xy, style, class } => {
                for &(x, y) in xy {
                    if let Some((px, py)) = self.to_page(x, y) {
                        Self::marker_svg(s, px, py, style, class);
                    }
                }
            }
            Mark::ErrorBars {
                bars,
                horizontal,
                colour,
                class,
            } => {
                for &(c, lo, hi) in bars {
                    let ends = if *horizontal {
                        (self.to_page(lo, c), self.to_page(hi, c))
                    } else {
                        (self.to_page(c, lo), self.to_page(c, hi))
                    };
                    if let (Some(a), Some(b)) = ends {
                        let _ = writeln!(
                            s,
                            r#"<path class="{class}" fill="none" stroke="{}" stroke-width="1" d="M{} {}L{} {}"/>"#,
                            colour.hex(),
                            n(a.0),
                            n(a.1),
                            n(b.0),
                            n(b.1)
                        );
                    }
                }
            }
            Mark::Limits { xy, colour, class } => {
                for &(x, y) in xy {
                    if let Some((px, py)) = self.to_page(x, y) {
                        Self::limit_svg(s, px, py, *colour, class);
                    }
                }
            }
            Mark::Polyline { xy, style, class } => {
                let mut d = String::new();
                for &(x, y) in xy {
                    if let Some((px, py)) = self.to_page(x, y) {
                        let cmd = if d.is_empty() { 'M' } else { 'L' };
                        let _ = write!(d, "{cmd}{} {}", n(px), n(py));
                    }
                }
                if !d.is_empty() {
                    let _ = writeln!(
                        s,
                        r#"<path class="{class}" {} d="{d}"/>"#,
                        Self::line_attrs(style)
                    );
                }
            }
            Mark::Arrow {
                from,
                to,
                style,
                class,
            } => {
                if let (Some(a), Some(b)) = (self.to_page(from.0, from.1), self.to_page(to.0, to.1))
                {
                    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
                    let len = dx.hypot(dy).max(1e-9);
                    let (ux, uy) = (dx / len, dy / len);
                    let head = 9.0_f64.min(len * 0.5);
                    let base = (b.0 - ux * head, b.1 - uy * head);
                    let (px, py) = (-uy * head * 0.45, ux * head * 0.45);
                    let _ = writeln!(
                        s,
                        r#"<g class="{class}"><path {} d="M{} {}L{} {}"/><path fill="{}" stroke="none" d="M{} {}L{} {}L{} {}Z"/></g>"#,
                        Self::line_attrs(style),
                        n(a.0),
                        n(a.1),
                        n(base.0),
                        n(base.1),
                        style.colour.hex(),
                        n(b.0),
                        n(b.1),
                        n(base.0 + px),
                        n(base.1 + py),
                        n(base.0 - px),
                        n(base.1 - py)
                    );
                }
            }
            Mark::Ellipse {
                centre,
                radii,
                angle_deg,
                style,
                class,
            } => {
                let c = self.to_page(centre.0, centre.1);
                let ex = self.to_page(centre.0 + radii.0, centre.1);
                let ey = self.to_page(centre.0, centre.1 + radii.1);
                if let (Some(c), Some(ex), Some(ey)) = (c, ex, ey) {
                    let rx = (ex.0 - c.0).abs();
                    let ry = (ey.1 - c.1).abs();
                    let _ = writeln!(
                        s,
                        r#"<ellipse class="{class}" {} cx="{}" cy="{}" rx="{}" ry="{}" transform="rotate({} {} {})"/>"#,
                        Self::line_attrs(style),
                        n(c.0),
                        n(c.1),
                        n(rx),
                        n(ry),
                        n(*angle_deg),
                        n(c.0),
                        n(c.1)
                    );
                }
            }
            Mark::Text {
                at,
                text,
                anchor,
                colour,
                class,
            } => {
                if let Some((px, py)) = self.to_page(at.0, at.1) {
                    let _ = writeln!(
                        s,
                        r#"<text class="{class}" x="{}" y="{}" text-anchor="{}" fill="{}">{}</text>"#,
                        n(px),
                        n(py),
                        anchor.svg(),
                        colour.hex(),
                        xml_escape(text)
                    );
                }
            }
            Mark::Note {
                at_fraction,
                text,
                anchor,
                class,
            } => {
                let (l, t, aw, ah) = self.area();
                let _ = writeln!(
                    s,
                    r#"<text class="{class}" x="{}" y="{}" text-anchor="{}">{}</text>"#,
                    n(l + at_fraction.0 * aw),
                    n(t + at_fraction.1 * ah),
                    anchor.svg(),
                    xml_escape(text)
                );
            }
        }
    }

    fn write_legend(&self, s: &mut String) {
        if self.legend.is_empty() {
            return;
        }
        let (l, t, aw, ah) = self.area();
        let fs = self.font_px;
        let longest = self
            .legend
            .iter()
            .map(|(text, _)| text.chars().count())
            .max()
            .unwrap_or(0) as f64;
        let row = fs * 1.5;
        let box_w = 34.0 + longest * fs * 0.62;
        let box_h = row * self.legend.len() as f64 + fs * 0.5;
        let (x0, y0) = match self.legend_place {
            LegendPlace::TopRight => (l + aw - box_w - 8.0, t + 8.0),
            LegendPlace::TopLeft => (l + 8.0, t + 8.0),
            LegendPlace::BottomRight => (l + aw - box_w - 8.0, t + ah - box_h - 8.0),
            LegendPlace::BottomLeft => (l + 8.0, t + ah - box_h - 8.0),
            LegendPlace::Outside => (l + aw + 10.0, t),
        };
        let _ = writeln!(
            s,
            r##"<g class="legend"><rect x="{}" y="{}" width="{}" height="{}" fill="#ffffff" fill-opacity="0.85" stroke="#888888" stroke-width="0.8"/>"##,
            n(x0),
            n(y0),
            n(box_w),
            n(box_h)
        );
        for (i, (text, key)) in self.legend.iter().enumerate() {
            let cy = y0 + fs * 0.25 + row * (i as f64 + 0.5);
            let kx = x0 + 14.0;
            match key {
                LegendKey::Point(style) => Self::marker_svg(s, kx, cy, style, "legend-key"),
                LegendKey::Line(style) => {
                    let _ = writeln!(
                        s,
                        r#"<path class="legend-key" {} d="M{} {}L{} {}"/>"#,
                        Self::line_attrs(style),
                        n(kx - 9.0),
                        n(cy),
                        n(kx + 9.0),
                        n(cy)
                    );
                }
                LegendKey::Limit(colour) => {
                    Self::limit_svg(s, kx, cy - 8.0, *colour, "legend-key");
                }
            }
            let _ = writeln!(
                s,
                r#"<text class="legend-text" x="{}" y="{}">{}</text>"#,
                n(x0 + 28.0),
                n(cy + fs * 0.35),
                xml_escape(text)
            );
        }
        s.push_str("</g>\n");
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_covers_the_five_xml_characters() {
        assert_eq!(
            xml_escape(r#"a<b & "c" > 'd'"#),
            "a&lt;b &amp; &quot;c&quot; &gt; &apos;d&apos;"
        );
    }

    #[test]
    fn inverted_axis_puts_the_small_value_at_the_top() {
        let mut fig = Figure::new(400.0, 300.0);
        fig.y_axis = Axis::linear("Ks (mag)", 8.0, 16.0).inverted();
        let bright = fig.to_page(0.5, 8.0).unwrap();
        let faint = fig.to_page(0.5, 16.0).unwrap();
        assert!(bright.1 < faint.1);
        let (_, t, _, _) = fig.area();
        assert!((bright.1 - t).abs() < 1e-9);
    }

    #[test]
    fn log_axis_places_decades_evenly_and_skips_non_positive() {
        let a = Axis::log10("λ (µm)", 1.0, 100.0);
        assert!((a.fraction(10.0).unwrap() - 0.5).abs() < 1e-12);
        assert_eq!(a.fraction(0.0), None);
        assert_eq!(a.fraction(-1.0), None);
    }

    #[test]
    fn covering_pads_the_range() {
        let a = Axis::covering("x", Scale::Linear, &[0.0, 10.0, f64::NAN], 0.1);
        assert!((a.min + 1.0).abs() < 1e-12 && (a.max - 11.0).abs() < 1e-12);
        let a = Axis::covering("x", Scale::Log10, &[1.0, 100.0, -5.0], 0.0);
        assert!((a.min - 1.0).abs() < 1e-9 && (a.max - 100.0).abs() < 1e-9);
    }

    /// The clip-path id and the one reference to it in `svg`.
    fn clip_ids(svg: &str) -> (String, String) {
        let def = svg.split("<clipPath id=\"").nth(1).unwrap();
        let used = svg.split("clip-path=\"url(#").nth(1).unwrap();
        (
            def[..def.find('"').unwrap()].to_string(),
            used[..used.find(')').unwrap()].to_string(),
        )
    }

    #[test]
    fn clip_ids_differ_between_figures_and_repeat_for_the_same_figure() {
        let figure = |title: &str| {
            let mut fig = Figure::new(400.0, 300.0);
            fig.title = title.to_string();
            fig.points(&[(0.5, 0.5)], &PointStyle::default(), "p");
            fig
        };
        let (a_def, a_use) = clip_ids(&figure("SED of a:1").to_svg());
        let (b_def, b_use) = clip_ids(&figure("SED of a:2").to_svg());
        // Each document refers to its own clip path...
        assert_eq!(a_def, a_use);
        assert_eq!(b_def, b_use);
        // ...and two figures inlined in one page do not share it.
        assert_ne!(a_def, b_def);
        assert!(
            a_def.starts_with("clip-") && a_def.len() == 5 + 16,
            "{a_def}"
        );
        assert!(!figure("x").to_svg().contains("plot-area"));
        // Reproducible: the same figure gives the same document, byte for byte.
        assert_eq!(figure("SED of a:1").to_svg(), figure("SED of a:1").to_svg());
        // A title holding the placeholder text is escaped, not replaced.
        let svg = figure("<clip-id>").to_svg();
        assert!(svg.contains("&lt;clip-id&gt;"), "{svg}");
        // A figure with an id uses it.
        let mut named = figure("x");
        named.id = "offsets-ask".into();
        assert_eq!(
            clip_ids(&named.to_svg()),
            (
                "clip-offsets-ask".to_string(),
                "clip-offsets-ask".to_string()
            )
        );
    }

    #[test]
    fn fnv1a_matches_the_published_test_vectors() {
        // FNV-1a 64-bit of "" is the offset basis and of "a" is 0xaf63dc4c8601ec8c
        // (test vectors of the FNV reference code, from memory).
        assert_eq!(fnv1a_64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a_64(b"a"), 0xaf63_dc4c_8601_ec8c);
    }

    #[test]
    fn svg_holds_marks_with_their_classes_and_escaped_labels() {
        let mut fig = Figure::new(400.0, 300.0);
        fig.x_axis = Axis::linear("H − Ks (mag) <obs>", 0.0, 2.0);
        fig.y_axis = Axis::linear("J − H (mag)", 0.0, 3.0);
        fig.points(
            &[(0.5, 1.0), (1.0, 2.0), (f64::NAN, 1.0)],
            &PointStyle::default(),
            "star",
        );
        fig.upper_limits(&[(1.5, 2.5)], Colour::BLUE, "ulim");
        fig.arrow(
            (0.1, 0.1),
            (0.3, 0.6),
            &LineStyle::solid(Colour::RED),
            "reddening-vector",
        );
        fig.legend_entry("stars & more", LegendKey::Point(PointStyle::default()));
        let svg = fig.to_svg();
        assert_eq!(svg.matches(r#"<circle class="star""#).count(), 2);
        assert_eq!(svg.matches(r#"class="ulim""#).count(), 1);
        assert!(svg.contains(r#"<g class="reddening-vector">"#));
        assert!(svg.contains("H − Ks (mag) &lt;obs&gt;"));
        assert!(svg.contains("stars &amp; more"));
    }
}
