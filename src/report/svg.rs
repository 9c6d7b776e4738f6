//! SVG pictures. plotters (SVG backend) draws the frame: caption, axes, grid and tick labels; this
//! module writes the data, markers and legend as plain SVG elements that carry their meaning in
//! the markup (text stays text: no fonts are needed to make the pictures):
//!
//! - `<clipPath id="plot-area">` holds the plotting area's rectangle; the data sit in
//!   `<g class="data" clip-path="url(#plot-area)">`;
//! - a curve is a `<polyline class="curve holds|outside" data-series=KEY>`, a marker a
//!   `<g class="marker holds|outside|sim" data-series=KEY transform="translate(x,y)">` around
//!   one shape; survey points are `<g class="point" data-name=…>` with a
//!   `<text class="point-label">`;
//! - the legend is `<g class="legend">` with a `<rect class="legend-box">`, below the frame, so
//!   it never covers data.
//!
//! Pictures:
//! - scans: each rate a curve with a marker at every point, in its own colour and marker shape;
//!   solid with filled markers where the formula holds at that point (the rates `rate` marks
//!   "holds here"), dashed and faded with hollow markers where it does not; the simulation as
//!   black points with 95% error bars. Friction scans: k/k_TST against γ/ω_b with the regime
//!   bands; temperature scans: the Arrhenius plot, ln k against 1000/T, with the fitted apparent
//!   activation energy and prefactor in the legend; force scans: ln k against the force with the
//!   fitted distance to the barrier; any other key: k against the value. The x axis is
//!   logarithmic only when the values were spaced logarithmically (`--log`, which needs positive
//!   ends), never for 1000/T or the force; rates are on a log axis when all are positive.
//! - survey: U(x) titled with the scenario's title (or file name), reactant, barrier, product
//!   and target marked with labels placed so that they do not overlap, a 1 kT bar, and optional
//!   measured points with error bars ([`ProfilePoint`]).
//! - observe: the histogram's U(x) as points with ±σ_U bars and the two cores shaded; with
//!   `--diffusion` a panel below with the interfaces' D(x) (posterior median, 95% interval) and the
//!   conditional-moment D as a lighter series.
//! - survival: the fraction not yet escaped (log scale) with the fitted exponential.
//!
//! Tick labels carry the fewest significant digits that give the tick's value ([`tick`]).

use crate::scan::{Kind, ScanReport};
use crate::theory::RateKey;
use crate::theory::catalogue::{CATALOGUE, Formula};
use plotters::coord::Shift;
use plotters::coord::combinators::{LogCoord, WithKeyPoints};
use plotters::coord::ranged1d::{AsRangedCoord, ValueFormatter};
use plotters::prelude::*;
use std::fmt::Write;

/// Width of every picture.
const W: u32 = 900;
/// Height of the frame (axes and data); the legend goes below it.
const H: u32 = 580;
/// Legend font size and line height (pixels).
const LEGEND_FONT: f64 = 13.0;
const LEGEND_ROW: f64 = 20.0;

// ---------------------------------------------------------------------------------------------
// numbers

use super::table::{round_sig, sig};

/// `v` with `n` significant digits, trailing zeros dropped: decimal from 0.001 to below 1000,
/// otherwise mantissa e exponent (5e-6, 1.5e3).
fn sig_str(v: f64, n: usize) -> String {
    sig(v, n, 1e3)
}

/// A tick label: the fewest significant digits (up to 6) that give `v` to 1e-9 relative, so
/// 4.9999999999999996e-6 reads 5e-6; decimal from 0.001 to below 1000 (0.25, 40), otherwise
/// mantissa e exponent (1.5e3). A value within 1e-9 of the axis length `span` of zero is
/// rounding noise of a linear axis through zero and reads "0".
pub fn tick(v: f64, span: f64) -> String {
    if !v.is_finite() {
        return String::new();
    }
    if v == 0.0 || v.abs() <= 1e-9 * span.abs() {
        return "0".into();
    }
    let sig = (1..=6)
        .find(|&d| (round_sig(v, d) - v).abs() <= 1e-9 * v.abs())
        .unwrap_or(6);
    sig_str(v, sig)
}

// ---------------------------------------------------------------------------------------------
// axes

/// One axis: its range and whether it is logarithmic.
#[derive(Debug, Clone, Copy)]
struct Axis {
    lo: f64,
    hi: f64,
    log: bool,
}

impl Axis {
    /// Covers the finite values (the positive ones on a log axis) with a margin of `pad` of its
    /// length on each side. Always a finite, non-empty range (positive on a log axis), whatever
    /// the values: plotters is never handed a range it cannot lay out.
    fn fit(vals: impl IntoIterator<Item = f64>, log: bool, pad: f64) -> Self {
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in vals {
            if !v.is_finite() || (log && v <= 0.0) {
                continue;
            }
            let t = if log { v.ln() } else { v };
            lo = lo.min(t);
            hi = hi.max(t);
        }
        if !lo.is_finite() {
            (lo, hi) = (0.0, 1.0);
        }
        if hi > lo {
            let w = hi - lo;
            (lo, hi) = (lo - pad * w, hi + pad * w);
        } else {
            // one value: a unit (a factor e on a log axis) or a fifth of it around it
            let w = if log || lo == 0.0 {
                1.0
            } else {
                0.2 * lo.abs()
            };
            (lo, hi) = (lo - 0.5 * w, hi + 0.5 * w);
        }
        if log {
            // e^±700 stays finite
            Self {
                lo: lo.clamp(-700.0, 699.0).exp(),
                hi: hi.clamp(-699.0, 700.0).exp(),
                log,
            }
        } else {
            Self { lo, hi, log }
        }
    }

    fn t(&self, v: f64) -> f64 {
        if self.log { v.ln() } else { v }
    }

    /// Where `v` falls along the axis, 0 at `lo` and 1 at `hi`.
    fn frac(&self, v: f64) -> f64 {
        (self.t(v) - self.t(self.lo)) / (self.t(self.hi) - self.t(self.lo))
    }

    fn contains(&self, v: f64) -> bool {
        v.is_finite() && (!self.log || v > 0.0) && v >= self.lo && v <= self.hi
    }
}

/// The plotting area in pixels and the axes, to place data.
#[derive(Debug, Clone, Copy)]
struct Px {
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
    x: Axis,
    y: Axis,
}

impl Px {
    /// Pixel position of (x, y); y grows downwards.
    fn at(&self, x: f64, y: f64) -> (f64, f64) {
        (
            self.x0 + self.x.frac(x) * (self.x1 - self.x0),
            self.y1 - self.y.frac(y) * (self.y1 - self.y0),
        )
    }

    fn contains(&self, x: f64, y: f64) -> bool {
        self.x.contains(x) && self.y.contains(y)
    }

    /// Pixel height of y clamped to the axis (for error bars that leave it).
    fn y_clamped(&self, y: f64) -> f64 {
        // NaN, and zero or below on a log axis, fall to the bottom
        let f = if y.is_nan() || (self.y.log && y <= 0.0) {
            0.0
        } else {
            self.y.frac(y).clamp(0.0, 1.0)
        };
        self.y1 - f * (self.y1 - self.y0)
    }
}

/// What the frame shows.
struct Frame<'a> {
    title: &'a str,
    x: Axis,
    y: Axis,
    xdesc: &'a str,
    ydesc: &'a str,
}

type DrawResult<T, DB> = Result<T, DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>>;

/// Draws in pixel coordinates below the grid.
type Underlay<'a, DB> = &'a dyn Fn(&DrawingArea<DB, Shift>, &Px) -> DrawResult<(), DB>;

/// Draws caption, axes, grid and rounded tick labels; `under` draws in pixel coordinates below
/// the grid (regime bands). Returns the plotting area.
fn frame<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    f: &Frame,
    under: Underlay<DB>,
) -> DrawResult<Px, DB> {
    let (xa, xb, ya, yb) = (f.x.lo, f.x.hi, f.y.lo, f.y.hi);
    match (f.x.log, f.y.log) {
        (false, false) => mesh(area, f, xa..xb, ya..yb, under),
        (true, false) => mesh(area, f, log_axis(xa, xb), ya..yb, under),
        (false, true) => mesh(area, f, xa..xb, log_axis(ya, yb), under),
        (true, true) => mesh(area, f, log_axis(xa, xb), log_axis(ya, yb), under),
    }
}

/// A log axis with its ticks: 1, 2 and 5 per decade over one or two decades (every 1 to 9 when
/// that gives fewer than three), each decade over a few, every few decades over many; the grid at
/// 1 to 9 per decade. (plotters' own choice leaves ranges under a decade almost unlabelled.)
fn log_axis(lo: f64, hi: f64) -> WithKeyPoints<LogCoord<f64>> {
    let (a, b) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
    let decades = b - a;
    let within = |mults: &[f64], every: i32| -> Vec<f64> {
        (a..=b)
            .filter(|k| (k - a) % every == 0)
            .flat_map(|k| mults.iter().map(move |m| m * 10f64.powi(k)))
            .filter(|v| *v >= lo * (1.0 - 1e-12) && *v <= hi * (1.0 + 1e-12))
            .collect()
    };
    let all: [f64; 9] = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0];
    let mut bold = if decades <= 2 {
        within(&[1.0, 2.0, 5.0], 1)
    } else {
        within(&[1.0], (decades + 7) / 8)
    };
    if bold.len() < 3 {
        bold = within(&all, 1);
    }
    let light = if decades <= 12 {
        within(&all, 1)
    } else {
        Vec::new()
    };
    (lo..hi)
        .log_scale()
        .with_key_points(bold)
        .with_light_points(light)
}

fn mesh<DB, X, Y>(
    area: &DrawingArea<DB, Shift>,
    f: &Frame,
    x: X,
    y: Y,
    under: Underlay<DB>,
) -> DrawResult<Px, DB>
where
    DB: DrawingBackend,
    X: AsRangedCoord<Value = f64>,
    Y: AsRangedCoord<Value = f64>,
    X::CoordDescType: ValueFormatter<f64>,
    Y::CoordDescType: ValueFormatter<f64>,
{
    let mut chart = ChartBuilder::on(area)
        .caption(f.title, ("sans-serif", 24))
        .margin(20)
        .x_label_area_size(50)
        .y_label_area_size(80)
        .build_cartesian_2d(x, y)?;
    let (xr, yr) = chart.plotting_area().get_pixel_range();
    let px = Px {
        x0: f64::from(xr.start),
        x1: f64::from(xr.end - 1),
        y0: f64::from(yr.start),
        y1: f64::from(yr.end - 1),
        x: f.x,
        y: f.y,
    };
    under(area, &px)?;
    let (xs, ys) = (f.x.hi - f.x.lo, f.y.hi - f.y.lo);
    let xfmt = move |v: &f64| tick(*v, xs);
    let yfmt = move |v: &f64| tick(*v, ys);
    chart
        .configure_mesh()
        .x_desc(f.xdesc)
        .y_desc(f.ydesc)
        .x_label_formatter(&xfmt)
        .y_label_formatter(&yfmt)
        .light_line_style(RGBColor(220, 220, 220).mix(0.5))
        .label_style(("sans-serif", 16))
        .draw()?;
    Ok(px)
}

// ---------------------------------------------------------------------------------------------
// plain SVG elements

/// Marker shapes; every rate has its own, so curves are told apart without colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Shape {
    Circle,
    Square,
    Diamond,
    Up,
    Down,
    Right,
    Left,
    Pentagon,
    Hexagon,
    Star,
}

impl Shape {
    /// Vertices around the origin (None for the circle). Sizes give the shapes about the same
    /// area as a circle of radius 5.
    fn vertices(self) -> Option<Vec<(f64, f64)>> {
        let ring = |n: usize, r: f64, turn: f64| -> Vec<(f64, f64)> {
            (0..n)
                .map(|i| {
                    let a = turn + std::f64::consts::TAU * i as f64 / n as f64;
                    (r * a.sin(), -r * a.cos())
                })
                .collect()
        };
        use std::f64::consts::PI;
        Some(match self {
            Self::Circle => return None,
            Self::Square => vec![(-4.5, -4.5), (4.5, -4.5), (4.5, 4.5), (-4.5, 4.5)],
            Self::Diamond => ring(4, 6.0, 0.0),
            Self::Up => ring(3, 6.5, 0.0),
            Self::Down => ring(3, 6.5, PI),
            Self::Right => ring(3, 6.5, PI / 2.0),
            Self::Left => ring(3, 6.5, -PI / 2.0),
            Self::Pentagon => ring(5, 5.5, 0.0),
            Self::Hexagon => ring(6, 5.3, 0.0),
            Self::Star => {
                let (outer, inner) = (ring(5, 7.0, 0.0), ring(5, 3.0, PI / 5.0));
                outer
                    .into_iter()
                    .zip(inner)
                    .flat_map(|(a, b)| [a, b])
                    .collect()
            }
        })
    }
}

fn hex(c: RGBColor) -> String {
    format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
}

/// XML text and attribute escaping.
fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Plain SVG written after plotters' output.
#[derive(Default)]
struct Raw(String);

impl Raw {
    /// A polyline; `dashed` curves are also faded.
    fn polyline(&mut self, pts: &[(f64, f64)], c: RGBColor, dashed: bool, class: &str, key: &str) {
        if pts.len() < 2 {
            return;
        }
        let p: String = pts.iter().fold(String::new(), |mut s, (x, y)| {
            let _ = write!(s, "{x:.1},{y:.1} ");
            s
        });
        let style = if dashed {
            r#" stroke-dasharray="7 5" stroke-opacity="0.5""#
        } else {
            ""
        };
        let _ = writeln!(
            self.0,
            r#"<polyline class="{class}" data-series="{key}" fill="none" stroke="{}" stroke-width="2"{style} points="{}"/>"#,
            hex(c),
            p.trim_end()
        );
    }

    /// A marker centred at (x, y): filled, or hollow (white inside) for a formula that does not
    /// hold there.
    fn marker(
        &mut self,
        shape: Shape,
        (x, y): (f64, f64),
        c: RGBColor,
        filled: bool,
        class: &str,
        key: &str,
    ) {
        let fill = if filled { hex(c) } else { "#FFFFFF".into() };
        let paint = format!(r#"fill="{fill}" stroke="{}" stroke-width="1.5""#, hex(c));
        let body = match shape.vertices() {
            None => format!(r#"<circle cx="0" cy="0" r="5" {paint}/>"#),
            Some(v) => {
                let p: Vec<String> = v.iter().map(|(a, b)| format!("{a:.2},{b:.2}")).collect();
                format!(r#"<polygon points="{}" {paint}/>"#, p.join(" "))
            }
        };
        let _ = writeln!(
            self.0,
            r#"<g class="{class}" data-series="{key}" transform="translate({x:.1},{y:.1})">{body}</g>"#
        );
    }

    fn line(
        &mut self,
        (x1, y1): (f64, f64),
        (x2, y2): (f64, f64),
        c: RGBColor,
        width: f64,
        class: &str,
    ) {
        let _ = writeln!(
            self.0,
            r#"<line class="{class}" x1="{x1:.1}" y1="{y1:.1}" x2="{x2:.1}" y2="{y2:.1}" stroke="{}" stroke-width="{width}"/>"#,
            hex(c)
        );
    }

    /// Text with its baseline at y.
    fn text(&mut self, (x, y): (f64, f64), s: &str, size: f64, anchor: &str, class: &str) {
        let _ = writeln!(
            self.0,
            r##"<text class="{class}" x="{x:.1}" y="{y:.1}" font-family="sans-serif" font-size="{size}" text-anchor="{anchor}" fill="#000000">{}</text>"##,
            esc(s)
        );
    }

    /// A simulated point with its 95% interval (y values already in pixels; `y` None when no
    /// escape was seen: the bar alone then shows the upper bound).
    fn sim_point(&mut self, x: f64, y: Option<f64>, lo: f64, hi: f64) {
        self.line((x, lo), (x, hi), BLACK, 1.2, "errorbar");
        self.line((x - 4.0, hi), (x + 4.0, hi), BLACK, 1.2, "errorbar");
        self.line((x - 4.0, lo), (x + 4.0, lo), BLACK, 1.2, "errorbar");
        if let Some(y) = y {
            self.marker(
                Shape::Circle,
                (x, y),
                BLACK,
                true,
                "marker sim",
                "simulation",
            );
        }
    }

    /// Opens the data group clipped to the plotting area.
    fn open_data(&mut self, p: &Px) {
        let _ = writeln!(
            self.0,
            r#"<defs><clipPath id="plot-area"><rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}"/></clipPath></defs>"#,
            p.x0,
            p.y0,
            p.x1 - p.x0,
            p.y1 - p.y0
        );
        self.0
            .push_str("<g class=\"data\" clip-path=\"url(#plot-area)\">\n");
    }

    fn close(&mut self) {
        self.0.push_str("</g>\n");
    }
}

/// Width of `s` in sans-serif at `size` px (about 0.6 em per character on average).
fn text_width(s: &str, size: f64) -> f64 {
    0.6 * size * s.chars().count() as f64
}

// ---------------------------------------------------------------------------------------------
// legend

/// One legend entry: a line sample and/or a marker, and its text.
struct Entry {
    text: String,
    colour: RGBColor,
    shape: Option<Shape>,
    line: bool,
    /// the simulation's black point with an error bar
    sim: bool,
}

/// The legend below the frame: entries in as many columns as fit, then an optional key line.
struct Legend {
    entries: Vec<Entry>,
    /// what solid and filled, and dashed and hollow, mean
    key: Option<[&'static str; 2]>,
}

const SAMPLE: f64 = 40.0;

impl Legend {
    fn columns(&self) -> (usize, f64) {
        let widest = self
            .entries
            .iter()
            .map(|e| text_width(&e.text, LEGEND_FONT))
            .fold(0.0, f64::max);
        let col = SAMPLE + 10.0 + widest + 20.0;
        let avail = f64::from(W) - 60.0;
        let n = ((avail / col).floor() as usize).clamp(1, self.entries.len().max(1));
        (n, col)
    }

    /// Height in pixels (0 when empty).
    fn height(&self) -> u32 {
        if self.entries.is_empty() {
            return 0;
        }
        let (n, _) = self.columns();
        let rows = self.entries.len().div_ceil(n) + 2 * usize::from(self.key.is_some());
        (16.0 + rows as f64 * LEGEND_ROW).ceil() as u32 + 10
    }

    /// Writes the legend with its top edge at `top`.
    fn draw(&self, raw: &mut Raw, top: f64) {
        if self.entries.is_empty() {
            return;
        }
        let (n, col) = self.columns();
        let h = f64::from(self.height()) - 10.0;
        let left = 30.0;
        raw.0.push_str("<g class=\"legend\">\n");
        let _ = writeln!(
            raw.0,
            r##"<rect class="legend-box" x="{:.1}" y="{top:.1}" width="{:.1}" height="{h:.1}" fill="#FFFFFF" stroke="#000000" stroke-width="1"/>"##,
            left - 10.0,
            f64::from(W) - 2.0 * (left - 10.0)
        );
        for (i, e) in self.entries.iter().enumerate() {
            let x = left + (i % n) as f64 * col;
            let y = top + 8.0 + ((i / n) as f64 + 0.5) * LEGEND_ROW;
            let mid = x + SAMPLE / 2.0;
            if e.line {
                raw.line((x, y), (x + SAMPLE, y), e.colour, 2.0, "legend-line");
            }
            if e.sim {
                raw.line((mid, y - 7.0), (mid, y + 7.0), e.colour, 1.2, "legend-line");
                raw.marker(
                    Shape::Circle,
                    (mid, y),
                    e.colour,
                    true,
                    "marker",
                    "simulation",
                );
            } else if let Some(s) = e.shape {
                raw.marker(s, (mid, y), e.colour, true, "marker", "");
            }
            raw.text(
                (x + SAMPLE + 10.0, y + 4.5),
                &e.text,
                LEGEND_FONT,
                "start",
                "legend-text",
            );
        }
        // the key: solid and filled, then dashed and hollow, one row each
        let rows = self.entries.len().div_ceil(n) as f64;
        let grey = RGBColor(90, 90, 90);
        for (j, (text, holds)) in self
            .key
            .iter()
            .flat_map(|k| [(k[0], true), (k[1], false)])
            .enumerate()
        {
            let y = top + 8.0 + (rows + j as f64 + 0.5) * LEGEND_ROW;
            let class = if holds {
                "legend-line"
            } else {
                "legend-line outside"
            };
            raw.polyline(&[(left, y), (left + SAMPLE, y)], grey, !holds, class, "");
            raw.marker(
                Shape::Square,
                (left + SAMPLE / 2.0, y),
                grey,
                holds,
                "marker",
                "",
            );
            raw.text(
                (left + SAMPLE + 10.0, y + 4.5),
                text,
                LEGEND_FONT,
                "start",
                "legend-text",
            );
        }
        raw.0.push_str("</g>\n");
    }
}

/// Renders a picture of frame height `H` plus the legend: `draw` fills the frame (plotters) and
/// returns the plain SVG of the data; the legend goes below.
fn render(
    legend: &Legend,
    draw: impl for<'b> FnOnce(&DrawingArea<SVGBackend<'b>, Shift>) -> DrawResult<Raw, SVGBackend<'b>>,
) -> String {
    render_tall(legend, H, draw)
}

/// [`render`] with a frame of height `h`.
fn render_tall(
    legend: &Legend,
    h: u32,
    draw: impl for<'b> FnOnce(&DrawingArea<SVGBackend<'b>, Shift>) -> DrawResult<Raw, SVGBackend<'b>>,
) -> String {
    let mut buf = String::new();
    let raw = {
        let root = SVGBackend::with_string(&mut buf, (W, h + legend.height())).into_drawing_area();
        let _ = root.fill(&WHITE);
        let (top, _) = root.split_vertically(h);
        let raw = draw(&top).unwrap_or_default();
        let _ = root.present();
        raw
    };
    let mut raw = raw;
    legend.draw(&mut raw, f64::from(h));
    match buf.rfind("</svg>") {
        Some(i) => buf.insert_str(i, &raw.0),
        None => buf.push_str(&raw.0),
    }
    buf
}

// ---------------------------------------------------------------------------------------------
// scans

/// Colours (the tab10 palette) and marker shapes of the rates, by place in the catalogue.
const COLOURS: [RGBColor; 10] = [
    RGBColor(31, 119, 180),
    RGBColor(255, 127, 14),
    RGBColor(44, 160, 44),
    RGBColor(214, 39, 40),
    RGBColor(148, 103, 189),
    RGBColor(140, 86, 75),
    RGBColor(227, 119, 194),
    RGBColor(127, 127, 127),
    RGBColor(188, 189, 34),
    RGBColor(23, 190, 207),
];
const SHAPES: [Shape; 10] = [
    Shape::Square,
    Shape::Diamond,
    Shape::Up,
    Shape::Down,
    Shape::Right,
    Shape::Pentagon,
    Shape::Hexagon,
    Shape::Star,
    Shape::Left,
    Shape::Circle,
];

/// Colour and marker shape of each rate (fixed per rate, so every picture agrees): the i-th
/// formula of the catalogue has colour i mod 10 and a shape shifted by i/10, so the pairs stay
/// distinct for up to 100 formulas.
fn style(key: RateKey) -> (RGBColor, Shape) {
    let i = CATALOGUE
        .iter()
        .position(|f| f.key == key)
        .unwrap_or_default();
    (COLOURS[i % 10], SHAPES[(i + i / 10) % 10])
}

fn time_unit(r: &ScanReport) -> &str {
    if r.units.time == "1" {
        "τ"
    } else {
        &r.units.time
    }
}

/// One rate over the scan: per point (x, y, holds there), None where it is absent or off the
/// axis.
struct Curve {
    key: RateKey,
    pts: Vec<Option<(f64, f64, bool)>>,
}

/// The key line of scan legends.
const HOLDS_KEY: [&str; 2] = [
    "solid line, filled marker: the formula holds at that point",
    "dashed line, hollow marker: it does not hold there (outside its regime, or an upper bound)",
];

/// The scan as an SVG document.
pub fn scan(r: &ScanReport) -> String {
    let tu = time_unit(r);
    let lu = if r.units.length == "1" {
        "L"
    } else {
        r.units.length.as_str()
    };
    let friction = r.kind == Kind::Friction;
    let x_of = |p: &crate::scan::Point| match r.kind {
        Kind::Friction => p.gamma_over_omega_barrier.unwrap_or(p.value),
        Kind::Temperature => 1000.0 / p.value,
        _ => p.value,
    };
    // normalised by harmonic TST, the friction-independent reference
    let norm = friction && r.points.iter().all(|p| p.rates[RateKey::Tst].is_some());
    let ln_y = matches!(r.kind, Kind::Temperature | Kind::Force);
    let y_of = |p: &crate::scan::Point, k: f64| -> f64 {
        let k = if norm {
            k / p.rates[RateKey::Tst].unwrap_or(1.0)
        } else {
            k
        };
        if ln_y { k.ln() } else { k }
    };
    let curves: Vec<Curve> = CATALOGUE
        .iter()
        .map(|f| f.key)
        .filter(|k| !(norm && *k == RateKey::Tst))
        .map(|k| Curve {
            key: k,
            pts: r
                .points
                .iter()
                .map(|p| {
                    let y = y_of(p, p.rates[k]?);
                    y.is_finite().then(|| (x_of(p), y, p.holds.contains(&k)))
                })
                .collect(),
        })
        .filter(|c| c.pts.iter().any(Option::is_some))
        .collect();
    // (x, y, lo, hi) of the simulated points
    let sims: Vec<(f64, f64, f64, f64)> = r
        .points
        .iter()
        .filter_map(|p| {
            p.simulation.as_ref().map(|s| {
                (
                    x_of(p),
                    y_of(p, s.rate),
                    y_of(p, s.rate_ci95[0]),
                    y_of(p, s.rate_ci95[1]),
                )
            })
        })
        .collect();
    let x_log = r.log && !matches!(r.kind, Kind::Temperature | Kind::Force);
    let xs = r.points.iter().map(x_of).filter(|x| !x_log || *x > 0.0);
    let x = Axis::fit(xs, x_log, 0.05);
    let ys: Vec<f64> = curves
        .iter()
        .flat_map(|c| c.pts.iter().flatten().map(|p| p.1))
        .chain(sims.iter().flat_map(|s| [s.1, s.2, s.3]))
        .collect();
    // rates are positive: a log axis unless ln k is plotted or the rates span less than a
    // decade (a simulated interval reaching zero is cut at the axis)
    // rates spanning more than a decade
    let positive: Vec<f64> = curves
        .iter()
        .flat_map(|c| c.pts.iter().flatten().map(|p| p.1))
        .collect();
    let (pmin, pmax) = positive
        .iter()
        .fold((f64::INFINITY, 0f64), |(a, b), &v| (a.min(v), b.max(v)));
    let y_log = !ln_y && positive.iter().all(|v| *v > 0.0) && (norm || pmax > 10.0 * pmin);
    let mut y = Axis::fit(ys.iter().copied(), y_log, 0.06);
    if norm && y.log {
        // k/k_TST above a few is where the overdamped formulas leave their regime: clip there,
        // but show at least a decade
        y.hi = y.hi.min(5.0);
        y.lo = y.lo.min(y.hi / 10.0);
    }
    let (xdesc, ydesc) = match r.kind {
        Kind::Friction => (
            if r.points
                .iter()
                .all(|p| p.gamma_over_omega_barrier.is_some())
            {
                "γ/ω_b".to_string()
            } else {
                r.key.clone()
            },
            if norm {
                "k / k_TST".to_string()
            } else {
                format!("k (1/{tu})")
            },
        ),
        Kind::Temperature => ("1000 / T (1/K)".to_string(), format!("ln(k · {tu})")),
        Kind::Force => (
            format!("tilt force ({}/{lu})", r.units.energy),
            format!("ln(k · {tu})"),
        ),
        Kind::Other => (r.key.clone(), format!("k (1/{tu})")),
    };
    let title = match r.kind {
        Kind::Friction => "friction scan: the turnover",
        Kind::Temperature => "Arrhenius plot",
        Kind::Force => "rate under a tilt force",
        Kind::Other => "scan",
    };
    let legend = scan_legend(r, &curves, !sims.is_empty(), tu, lu);
    let bands = friction
        .then_some(())
        .and(r.action_first.zip(r.omega_barrier_first));
    let f = Frame {
        title,
        x,
        y,
        xdesc: &xdesc,
        ydesc: &ydesc,
    };
    render(&legend, |area| {
        let px = frame(area, &f, &|a, px| match bands {
            Some((ib, wb)) => regime_bands(a, px, ib, wb),
            None => Ok(()),
        })?;
        let mut raw = Raw::default();
        raw.open_data(&px);
        for c in &curves {
            draw_curve(&mut raw, &px, c);
        }
        for &(x, y, lo, hi) in &sims {
            if !px.x.contains(x) {
                continue;
            }
            let (sx, sy) = px.at(x, y);
            let yv = px.contains(x, y).then_some(sy);
            raw.sim_point(sx, yv, px.y_clamped(lo), px.y_clamped(hi));
        }
        raw.close();
        Ok(raw)
    })
}

/// A curve: solid between points where the formula holds at both ends, dashed otherwise, broken
/// where it is absent; a marker at every point on the axes.
fn draw_curve(raw: &mut Raw, px: &Px, c: &Curve) {
    let (colour, shape) = style(c.key);
    let mut run: Vec<(f64, f64)> = Vec::new();
    let mut run_holds = true;
    let mut flush = |run: &mut Vec<(f64, f64)>, holds: bool| {
        let class = if holds {
            "curve holds"
        } else {
            "curve outside"
        };
        raw.polyline(run, colour, !holds, class, c.key.as_str());
        run.clear();
    };
    for w in c.pts.windows(2) {
        match (w[0], w[1]) {
            (Some(a), Some(b)) => {
                let holds = a.2 && b.2;
                if !run.is_empty() && holds != run_holds {
                    let last = *run.last().expect("not empty");
                    flush(&mut run, run_holds);
                    run.push(last);
                }
                run_holds = holds;
                if run.is_empty() {
                    run.push(px.at(a.0, a.1));
                }
                run.push(px.at(b.0, b.1));
            }
            _ => flush(&mut run, run_holds),
        }
    }
    flush(&mut run, run_holds);
    for &(x, y, holds) in c.pts.iter().flatten() {
        if px.contains(x, y) {
            let class = if holds {
                "marker holds"
            } else {
                "marker outside"
            };
            raw.marker(shape, px.at(x, y), colour, holds, class, c.key.as_str());
        }
    }
}

/// The legend of a scan: each rate (with its fit for temperature and force scans), the
/// simulation, and the key to solid and dashed.
fn scan_legend(r: &ScanReport, curves: &[Curve], sim: bool, tu: &str, lu: &str) -> Legend {
    let fit_text = |name: &str, key: &str| -> String {
        let Some(f) = r.fits.iter().find(|f| f.rate == key) else {
            return name.to_string();
        };
        let iv = |v: f64, [a, b]: [f64; 2]| {
            format!("{} [{}, {}]", sig_str(v, 4), sig_str(a, 4), sig_str(b, 4))
        };
        match r.kind {
            Kind::Temperature => format!(
                "{name}: Ea = {} {}, A = {} /{tu}",
                iv(f.value, f.value_ci95),
                r.units.energy,
                sig_str(f.prefactor, 3)
            ),
            Kind::Force => format!("{name}: x‡ = {} {lu}", iv(f.value, f.value_ci95)),
            _ => name.to_string(),
        }
    };
    let mut entries: Vec<Entry> = curves
        .iter()
        .map(|c| {
            let (colour, shape) = style(c.key);
            Entry {
                text: fit_text(Formula::of(c.key).legend, c.key.as_str()),
                colour,
                shape: Some(shape),
                line: true,
                sim: false,
            }
        })
        .collect();
    if sim {
        entries.push(Entry {
            text: fit_text("simulation (95% interval)", "simulation"),
            colour: BLACK,
            shape: None,
            line: false,
            sim: true,
        });
    }
    Legend {
        key: (!curves.is_empty()).then_some(HOLDS_KEY),
        entries,
    }
}

/// The friction regimes as shaded bands: δ = γ I_b/kT = 1 and 10 at γ/ω_b = δ/(I_b ω_b);
/// overdamped from γ/ω_b = 5.
fn regime_bands<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    px: &Px,
    ib: f64,
    wb: f64,
) -> DrawResult<(), DB> {
    let (xa, xb) = (px.x.lo, px.x.hi);
    let e1 = (1.0 / (ib * wb)).clamp(xa, xb);
    let e10 = (10.0 / (ib * wb)).clamp(xa, xb);
    let o = 5f64.clamp(xa, xb);
    let bands = [
        (xa, e1, "energy diffusion", RGBColor(230, 240, 255)),
        (e1, e10, "turnover", RGBColor(255, 245, 225)),
        (e10, o, "spatial diffusion", RGBColor(235, 250, 235)),
        (o, xb, "overdamped", RGBColor(245, 235, 250)),
    ];
    for (a, b, name, col) in bands {
        if b <= a {
            continue;
        }
        let (x0, y0) = px.at(a, px.y.hi);
        let (x1, y1) = px.at(b, px.y.lo);
        let r = |v: f64| v.round() as i32;
        area.draw(&Rectangle::new(
            [(r(x0), r(y0)), (r(x1), r(y1))],
            col.filled(),
        ))?;
        // the name only where the band is wide enough to hold it
        if x1 - x0 > text_width(name, 14.0) + 8.0 {
            area.draw(&Text::new(name, (r(x0) + 4, r(y0) + 6), ("sans-serif", 14)))?;
        }
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------------
// survey

/// A measured point of the profile with its standard deviation, in internal units (x in the
/// length unit, U and σ in kT on the same zero as `Potential::u`): drawn with an error bar of
/// ±σ on the survey picture.
#[derive(Debug, Clone, Copy)]
pub struct ProfilePoint {
    /// position
    pub x: f64,
    /// U in kT
    pub u: f64,
    /// standard deviation of U in kT
    pub sigma: f64,
}

/// Most table rows drawn as points on the survey picture (more would hide the curve): every k-th
/// row is drawn, k chosen to stay below this.
const MAX_DRAWN_ROWS: usize = 120;

/// The rows of a fitted (noisy) table as measured points for [`landscape`]: x, U and σ_U in kT,
/// thinned to at most [`MAX_DRAWN_ROWS`]; None for formulas, families, periodic profiles and exact
/// tables (whose curve passes through every row).
pub fn fitted_rows(m: &crate::model::Model) -> Option<Vec<ProfilePoint>> {
    use crate::potential::Potential;
    let crate::potential::AnyPotential::Table(t) = &m.system.potential else {
        return None;
    };
    if t.fit()?.method != "smoothing spline" {
        return None;
    }
    let x = t.spline().knots();
    let sigma = t.sigma_u()?;
    let step = x.len().div_ceil(MAX_DRAWN_ROWS);
    Some(
        (0..x.len())
            .step_by(step)
            .map(|i| ProfilePoint {
                x: x[i],
                u: t.knot_u()[i],
                sigma: sigma[i],
            })
            .collect(),
    )
}

/// U(x) with the reactant, barrier, product and target marked and a 1 kT scale bar (`survey`),
/// titled with the scenario's title (or its file name); `data`, when given, adds measured
/// points with error bars.
pub fn landscape(
    m: &crate::model::Model,
    l: &crate::landscape::Landscape,
    data: Option<&[ProfilePoint]>,
) -> String {
    use crate::potential::Potential;
    let pot: &dyn Potential = &m.system.potential;
    let units = &m.units;
    let (lo, hi) = pot.domain();
    let e = |u_kt: f64| units.energy_from_kt(u_kt - l.u_reactant);
    let n = 800;
    let curve: Vec<(f64, f64)> = (0..=n)
        .map(|i| {
            let x = lo + (hi - lo) * f64::from(i) / f64::from(n);
            (x, e(pot.u(x)))
        })
        .collect();
    // up to twice the barrier (the walls of steep potentials would flatten the picture)
    let top = units.energy_from_kt(2.0 * l.barrier_height.max(1.0));
    // down to the lowest marked point and a barrier below it: a potential that keeps falling
    // beyond the target (a metastable well) would flatten the picture
    let lowest = [Some(l.target), l.product]
        .into_iter()
        .flatten()
        .map(|x| e(pot.u(x)))
        .fold(0f64, f64::min);
    let ymin = curve
        .iter()
        .map(|p| p.1)
        .filter(|v| v.is_finite())
        .fold(f64::INFINITY, f64::min)
        .max(lowest - 0.5 * top)
        .min(lowest);
    let x = Axis::fit([lo, hi], false, 0.0);
    // room below the minima for their labels
    let y = Axis::fit([ymin - 0.12 * top, top], false, 0.0);
    let lu = if units.names.length == "1" {
        "L"
    } else {
        &units.names.length
    };
    let title = m.title.clone().unwrap_or_else(|| {
        std::path::Path::new(&m.source)
            .file_name()
            .map_or_else(|| m.source.clone(), |f| f.to_string_lossy().into_owned())
    });
    let xdesc = format!("x ({lu})");
    let ydesc = format!("U − U(reactant) ({})", units.names.energy);
    let f = Frame {
        title: &title,
        x,
        y,
        xdesc: &xdesc,
        ydesc: &ydesc,
    };
    let marks = landscape_marks(l, hi - lo);
    let legend = fit_legend(data.and(pot.fit()));
    render(&legend, |area| {
        let px = frame(area, &f, &|_, _| Ok(()))?;
        let mut raw = Raw::default();
        raw.open_data(&px);
        let pts: Vec<(f64, f64)> = curve
            .iter()
            .filter(|p| p.1.is_finite())
            .map(|&(x, y)| px.at(x, y_near(&px, y)))
            .collect();
        // measured rows under the curve, in grey, so the fit stays readable on dense tables
        if let Some(d) = data {
            measured_rows(&mut raw, &px, d, &e);
        }
        raw.polyline(&pts, RGBColor(31, 119, 180), false, "curve", "U");
        raw.close();
        // the points and their labels, placed clear of each other and of the curve
        let centres: Vec<(f64, f64)> = marks
            .iter()
            .map(|&(_, x, _)| px.at(x, e(pot.u(x))))
            .collect();
        point_marks(&mut raw, &px, &marks, &centres, &pts);
        // the 1 kT bar at the lower right
        let kt = units.energy_from_kt(1.0);
        scale_bar(&mut raw, &px, hi - 0.04 * (hi - lo), ymin + 0.1 * top, kt);
        Ok(raw)
    })
}

/// The marked points of a landscape picture: name, position and colour (`span` is the domain's
/// width, to tell a product minimum apart from the target).
fn landscape_marks(
    l: &crate::landscape::Landscape,
    span: f64,
) -> Vec<(&'static str, f64, RGBColor)> {
    let mut marks = vec![
        ("reactant", l.reactant, RGBColor(44, 160, 44)),
        ("barrier", l.barrier, RGBColor(214, 39, 40)),
    ];
    match l.product {
        Some(p) if (p - l.target).abs() > 1e-9 * span => {
            marks.push(("product", p, RGBColor(255, 127, 14)));
            marks.push(("target", l.target, RGBColor(148, 103, 189)));
        }
        Some(_) => marks.push((
            "target (product minimum)",
            l.target,
            RGBColor(148, 103, 189),
        )),
        None => marks.push(("target", l.target, RGBColor(148, 103, 189))),
    }
    marks
}

/// The legend of a landscape picture: for a fitted table, which fit the curve is, beside its rows
/// with their error bars; empty otherwise.
fn fit_legend(fit: Option<&crate::potential::FitSummary>) -> Legend {
    let entries = match fit {
        Some(fit) => vec![
            Entry {
                text: match (fit.rule, fit.chi2) {
                    (Some(rule), Some(chi2)) => format!(
                        "{} ({rule}): χ² = {chi2:.0}, {:.1} effective dof of {} rows",
                        fit.method, fit.effective_dof, fit.rows
                    ),
                    _ => fit.method.to_string(),
                },
                colour: RGBColor(31, 119, 180),
                shape: None,
                line: true,
                sim: false,
            },
            Entry {
                text: "table rows ± σ_U".into(),
                colour: RGBColor(150, 150, 150),
                shape: None,
                line: false,
                sim: true,
            },
        ],
        None => Vec::new(),
    };
    Legend { entries, key: None }
}

/// A fitted table's rows as grey points with ±σ_U error bars; `e` turns U (kT) into the
/// picture's energy.
fn measured_rows(raw: &mut Raw, px: &Px, d: &[ProfilePoint], e: &dyn Fn(f64) -> f64) {
    let grey = RGBColor(150, 150, 150);
    for p in d {
        let (sx, sy) = px.at(p.x, e(p.u));
        let lo = px.y_clamped(e(p.u - p.sigma));
        let hi = px.y_clamped(e(p.u + p.sigma));
        raw.line((sx, lo), (sx, hi), grey, 1.0, "errorbar");
        if px.contains(p.x, e(p.u)) {
            let _ = writeln!(
                raw.0,
                r##"<g class="marker data" transform="translate({sx:.1},{sy:.1})"><circle cx="0" cy="0" r="2" fill="#969696"/></g>"##
            );
        }
    }
}

/// The marked points at `centres` and their labels, placed clear of each other and of the curve
/// `pts`, with a leader line where a label had to move away.
fn point_marks(
    raw: &mut Raw,
    px: &Px,
    marks: &[(&str, f64, RGBColor)],
    centres: &[(f64, f64)],
    pts: &[(f64, f64)],
) {
    for ((name, _, c), &(cx, cy)) in marks.iter().zip(centres) {
        let _ = writeln!(
            raw.0,
            r#"<g class="point" data-name="{name}" transform="translate({cx:.1},{cy:.1})"><circle cx="0" cy="0" r="6" fill="{}"/></g>"#,
            hex(*c)
        );
    }
    let names: Vec<&str> = marks.iter().map(|m| m.0).collect();
    for (i, b) in place_labels(&names, centres, pts, px)
        .into_iter()
        .enumerate()
    {
        let (cx, cy) = centres[i];
        // a leader line when the label had to move away from its point
        let (bx, by) = (b[0] + b[2] / 2.0, b[1] + b[3] / 2.0);
        if (bx - cx).abs() > b[2] / 2.0 + 12.0 || (by - cy).abs() > b[3] / 2.0 + 12.0 {
            let ty = if by < cy {
                b[1] + b[3] + 1.0
            } else {
                b[1] - 1.0
            };
            raw.line((cx, cy), (bx, ty), RGBColor(120, 120, 120), 0.8, "leader");
        }
        raw.text(
            (bx, b[1] + 0.8 * LABEL_FONT),
            names[i],
            LABEL_FONT,
            "middle",
            "point-label",
        );
    }
}

/// A vertical bar `kt` (1 kT in the picture's energy) high from (x, y0), labelled "1 kT".
fn scale_bar(raw: &mut Raw, px: &Px, x: f64, y0: f64, kt: f64) {
    let (bx, by0) = px.at(x, y0);
    let (_, by1) = px.at(x, y0 + kt);
    raw.line((bx, by0), (bx, by1), BLACK, 3.0, "scale-bar");
    raw.text(
        (bx - 8.0, (by0 + by1) / 2.0 + 5.0),
        "1 kT",
        15.0,
        "end",
        "scale-label",
    );
}

/// Values beyond the axis are drawn just beyond it (the clip path cuts them off cleanly).
fn y_near(px: &Px, y: f64) -> f64 {
    let m = 0.05 * (px.y.hi - px.y.lo);
    y.clamp(px.y.lo - m, px.y.hi + m)
}

const LABEL_FONT: f64 = 14.0;

fn boxes_overlap(a: [f64; 4], b: [f64; 4], gap: f64) -> bool {
    a[0] < b[0] + b[2] + gap
        && b[0] < a[0] + a[2] + gap
        && a[1] < b[1] + b[3] + gap
        && b[1] < a[1] + a[3] + gap
}

/// Label boxes [x, y, w, h] (top left, pixels) for points at `centres`: the first of above,
/// below, right, left and then further above or below that overlaps no other label and no
/// point marker and stays inside the plotting area, preferring places the curve does not cross.
fn place_labels(
    names: &[&str],
    centres: &[(f64, f64)],
    curve: &[(f64, f64)],
    px: &Px,
) -> Vec<[f64; 4]> {
    let h = LABEL_FONT;
    let markers: Vec<[f64; 4]> = centres
        .iter()
        .map(|&(x, y)| [x - 7.0, y - 7.0, 14.0, 14.0])
        .collect();
    let mut placed: Vec<[f64; 4]> = Vec::new();
    // left to right, so neighbours are placed next to each other
    let mut order: Vec<usize> = (0..names.len()).collect();
    order.sort_by(|&a, &b| centres[a].0.total_cmp(&centres[b].0));
    let mut out = vec![[0.0; 4]; names.len()];
    for i in order {
        let w = text_width(names[i], LABEL_FONT);
        let (cx, cy) = centres[i];
        let mut cands = vec![
            [cx - w / 2.0, cy - 10.0 - h],
            [cx - w / 2.0, cy + 10.0],
            [cx + 11.0, cy - h / 2.0],
            [cx - 11.0 - w, cy - h / 2.0],
        ];
        for k in 1..=10 {
            let d = 10.0 + f64::from(k) * (h + 4.0);
            cands.push([cx - w / 2.0, cy - d - h]);
            cands.push([cx - w / 2.0, cy + d]);
        }
        let inside = |b: &[f64; 4]| {
            b[0] >= px.x0 + 2.0
                && b[0] + b[2] <= px.x1 - 2.0
                && b[1] >= px.y0 + 2.0
                && b[1] + b[3] <= px.y1 - 2.0
        };
        let free = |b: &[f64; 4]| {
            inside(b)
                && !placed.iter().any(|p| boxes_overlap(*b, *p, 3.0))
                && !markers.iter().any(|m| boxes_overlap(*b, *m, 1.0))
        };
        let crossings = |b: &[f64; 4]| {
            curve
                .iter()
                .filter(|(x, y)| *x >= b[0] && *x <= b[0] + b[2] && *y >= b[1] && *y <= b[1] + b[3])
                .count()
        };
        let boxes: Vec<[f64; 4]> = cands.iter().map(|c| [c[0], c[1], w, h]).collect();
        let best = boxes
            .iter()
            .find(|b| free(b) && crossings(b) == 0)
            .or_else(|| {
                boxes
                    .iter()
                    .filter(|b| free(b))
                    .min_by_key(|b| crossings(b))
            })
            .copied()
            .unwrap_or(boxes[0]);
        placed.push(best);
        out[i] = best;
    }
    out
}

// ---------------------------------------------------------------------------------------------
// observe

/// Height of the D(x) panel below the U(x) panel (`observe --plot --diffusion`).
const D_PANEL: u32 = 400;

const U_BLUE: RGBColor = RGBColor(31, 119, 180);
const D_RED: RGBColor = RGBColor(214, 39, 40);
/// the conditional-moment D: the same hue, lighter
const D_LIGHT: RGBColor = RGBColor(240, 150, 150);
const CORE_GREEN: RGBColor = RGBColor(44, 160, 44);

/// The observed trajectories (`observe --plot`): U(x) from the histogram in the energy unit
/// (zero at the lowest bin) as points with ±σ_U bars, the two cores shaded; with `--diffusion`
/// a panel below with D(x) at the interfaces (posterior median with its 95% interval) and the
/// conditional-moment D (± one standard error) as a lighter series beside it.
pub fn observed(r: &super::observe::ObserveReport) -> String {
    let o = &r.observed;
    let bins = &o.free_energy.bins;
    let k = &o.kinetics;
    let lowest = bins.iter().map(|b| b.u).fold(f64::INFINITY, f64::min);
    let e = |u_kt: f64| r.kt * (u_kt - lowest);
    let d = o.diffusion.as_ref();
    let interfaces = d.map_or(&[][..], |d| &d.interfaces[..]);
    let x = Axis::fit(
        bins.iter()
            .map(|b| b.x)
            .chain(interfaces.iter().map(|i| i.x))
            .chain([k.core_a.lo, k.core_a.hi, k.core_b.lo, k.core_b.hi]),
        false,
        0.02,
    );
    let y = Axis::fit(
        bins.iter().flat_map(|b| {
            let s = b.sigma_u.unwrap_or(0.0);
            [e(b.u - s), e(b.u + s)]
        }),
        false,
        0.06,
    );
    let names = &r.units;
    let lu = if names.length == "1" {
        "L"
    } else {
        &names.length
    };
    let tu = if names.time == "1" { "τ" } else { &names.time };
    let title = format!(
        "U(x) from {} trajectories ({} samples)",
        o.trajectories.len(),
        o.samples
    );
    let xdesc = format!("x ({lu})");
    let ydesc = format!("U − U(lowest bin) ({})", names.energy);
    let top = Frame {
        title: &title,
        x,
        y,
        xdesc: &xdesc,
        ydesc: &ydesc,
    };
    // D from 0 to its largest value, but no higher than twice the largest point: the wide
    // intervals of rarely crossed edge interfaces would flatten the rest (their bars are cut)
    let points = interfaces
        .iter()
        .map(|i| i.d)
        .chain(interfaces.iter().filter_map(|i| i.moments_d))
        .filter(|v| v.is_finite())
        .fold(0f64, f64::max);
    let reach = interfaces
        .iter()
        .flat_map(|i| {
            [
                i.ci95[1],
                i.moments_d.unwrap_or(0.0) + i.moments_se.unwrap_or(0.0),
            ]
        })
        .filter(|v| v.is_finite())
        .fold(points, f64::max)
        .min(2.0 * points);
    let dy = Axis {
        lo: 0.0,
        hi: if reach > 0.0 { 1.06 * reach } else { 1.0 },
        log: false,
    };
    let dtitle = d.map_or_else(String::new, |d| {
        format!("D(x) at a lag of {} {tu}", tick(d.lag_time, d.lag_time))
    });
    let ddesc = format!("D ({lu}²/{tu})");
    let bottom = Frame {
        title: &dtitle,
        x,
        y: dy,
        xdesc: &xdesc,
        ydesc: &ddesc,
    };
    let legend = observed_legend(d.is_some());
    let h = if d.is_some() { H + D_PANEL } else { H };
    render_tall(&legend, h, |area| {
        let (upper, lower) = area.split_vertically(H);
        let px = frame(&upper, &top, &|_, _| Ok(()))?;
        let mut raw = Raw::default();
        raw.open_data(&px);
        cores(&mut raw, &px, [k.core_a, k.core_b], true);
        for b in bins {
            let (sx, sy) = px.at(b.x, e(b.u));
            if let Some(s) = b.sigma_u {
                let (lo, hi) = (px.y_clamped(e(b.u - s)), px.y_clamped(e(b.u + s)));
                raw.line((sx, lo), (sx, hi), U_BLUE, 1.0, "errorbar sigma-u");
            }
            let _ = writeln!(
                raw.0,
                r#"<g class="marker data" data-series="U" transform="translate({sx:.1},{sy:.1})"><circle cx="0" cy="0" r="3" fill="{}"/></g>"#,
                hex(U_BLUE)
            );
        }
        raw.close();
        if d.is_none() {
            return Ok(raw);
        }
        // (plotters gives the lower panel's pixels in the whole picture)
        let dpx = frame(&lower, &bottom, &|_, _| Ok(()))?;
        let _ = writeln!(
            raw.0,
            r#"<defs><clipPath id="plot-area-d"><rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}"/></clipPath></defs>"#,
            dpx.x0,
            dpx.y0,
            dpx.x1 - dpx.x0,
            dpx.y1 - dpx.y0
        );
        raw.0
            .push_str("<g class=\"data\" clip-path=\"url(#plot-area-d)\">\n");
        cores(&mut raw, &dpx, [k.core_a, k.core_b], false);
        for i in interfaces {
            // the lighter series a few pixels to the right, so both stay visible
            if let Some(m) = i.moments_d {
                let se = i.moments_se.unwrap_or(0.0);
                let (sx, sy) = dpx.at(i.x, m);
                let sx = sx + 5.0;
                let bar = [dpx.y_clamped(m - se), dpx.y_clamped(m + se)];
                d_bar(&mut raw, sx, bar, D_LIGHT, "errorbar d-moments");
                raw.marker(
                    Shape::Diamond,
                    (sx, sy),
                    D_LIGHT,
                    true,
                    "marker data",
                    "D-moments",
                );
            }
            let (sx, sy) = dpx.at(i.x, i.d);
            let bar = [dpx.y_clamped(i.ci95[0]), dpx.y_clamped(i.ci95[1])];
            d_bar(&mut raw, sx, bar, D_RED, "errorbar d-ci95");
            raw.marker(Shape::Square, (sx, sy), D_RED, true, "marker data", "D");
        }
        raw.close();
        Ok(raw)
    })
}

/// The two cores shaded across the plotting area, labelled A and B in the `named` panel.
fn cores(raw: &mut Raw, px: &Px, [a, b]: [crate::observe::Interval; 2], named: bool) {
    for (name, c) in [("A", a), ("B", b)] {
        let (x0, y0) = px.at(c.lo, px.y.hi);
        let (x1, y1) = px.at(c.hi, px.y.lo);
        let _ = writeln!(
            raw.0,
            r#"<rect class="core" data-name="{name}" x="{x0:.1}" y="{y0:.1}" width="{:.1}" height="{:.1}" fill="{}" fill-opacity="0.13"/>"#,
            x1 - x0,
            y1 - y0,
            hex(CORE_GREEN)
        );
        if named {
            raw.text(
                ((x0 + x1) / 2.0, y0 + 18.0),
                &format!("core {name}"),
                LABEL_FONT,
                "middle",
                "core-label",
            );
        }
    }
}

/// A vertical error bar with caps between the pixel heights `[lo, hi]`.
fn d_bar(raw: &mut Raw, x: f64, [lo, hi]: [f64; 2], c: RGBColor, class: &str) {
    raw.line((x, lo), (x, hi), c, 1.2, class);
    raw.line((x - 3.0, lo), (x + 3.0, lo), c, 1.2, class);
    raw.line((x - 3.0, hi), (x + 3.0, hi), c, 1.2, class);
}

fn observed_legend(diffusion: bool) -> Legend {
    let entry = |text: &str, colour, shape, sim| Entry {
        text: text.into(),
        colour,
        shape,
        line: false,
        sim,
    };
    let mut entries = vec![
        entry("U ± σ_U (histogram, block bootstrap)", U_BLUE, None, true),
        entry("cores", RGBColor(200, 230, 200), Some(Shape::Square), false),
    ];
    if diffusion {
        entries.push(entry(
            "D: posterior median, 95% interval",
            D_RED,
            Some(Shape::Square),
            false,
        ));
        entries.push(entry(
            "D: conditional moments ± se",
            D_LIGHT,
            Some(Shape::Diamond),
            false,
        ));
    }
    Legend { entries, key: None }
}

// ---------------------------------------------------------------------------------------------
// survival

/// The survival curve of a brute-force run (fraction not yet escaped, log scale) with the fitted
/// exponential e^{−kt} (`simulate --plot`).
pub fn survival(outcomes: &[crate::stats::Outcome], dt: f64, rate: f64, tu: &str) -> String {
    let n = outcomes.len().max(1) as f64;
    let mut t: Vec<f64> = outcomes
        .iter()
        .filter(|o| o.escaped)
        .map(|o| o.steps as f64 * dt)
        .collect();
    t.sort_by(f64::total_cmp);
    let tmax = t.last().copied().unwrap_or(1.0).max(1e-300);
    let floor = (0.5 / n).max(1e-6);
    let steps: Vec<(f64, f64)> = std::iter::once((0.0, 1.0))
        .chain(
            t.iter()
                .enumerate()
                .flat_map(|(i, &ti)| [(ti, 1.0 - i as f64 / n), (ti, 1.0 - (i + 1) as f64 / n)]),
        )
        .filter(|p| p.1 >= floor)
        .collect();
    let fitted: Vec<(f64, f64)> = (0..=200)
        .map(|i| {
            let x = tmax * f64::from(i) / 200.0;
            (x, (-rate * x).exp())
        })
        .filter(|p| p.1 >= floor)
        .collect();
    let red = RGBColor(214, 39, 40);
    let legend = Legend {
        entries: vec![
            Entry {
                text: "simulated".into(),
                colour: BLACK,
                shape: None,
                line: true,
                sim: false,
            },
            Entry {
                text: format!("exp(−k t), k = {} /{tu}", sig_str(rate, 4)),
                colour: red,
                shape: None,
                line: true,
                sim: false,
            },
        ],
        key: None,
    };
    let xdesc = format!("t ({tu})");
    let f = Frame {
        title: "survival: fraction not yet escaped",
        x: Axis::fit([0.0, tmax], false, 0.0),
        y: Axis {
            lo: floor,
            hi: 1.2,
            log: true,
        },
        xdesc: &xdesc,
        ydesc: "S(t)",
    };
    render(&legend, |area| {
        let px = frame(area, &f, &|_, _| Ok(()))?;
        let mut raw = Raw::default();
        raw.open_data(&px);
        let at =
            |v: &[(f64, f64)]| -> Vec<(f64, f64)> { v.iter().map(|&(x, y)| px.at(x, y)).collect() };
        raw.polyline(&at(&steps), BLACK, false, "curve", "simulated");
        raw.polyline(&at(&fitted), red, false, "curve", "fitted");
        raw.close();
        Ok(raw)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // common practice, no source: the labels a person would write
    #[test]
    fn ticks_are_rounded() {
        assert_eq!(tick(4.999_999_999_999_999_6e-6, 1e-5), "5e-6");
        assert_eq!(tick(0.25, 1.0), "0.25");
        assert_eq!(tick(1500.0, 1e4), "1.5e3");
        assert_eq!(tick(0.300_000_000_000_000_04, 1.0), "0.3");
        assert_eq!(tick(-2.000_000_000_000_000_4, 6.0), "-2");
        assert_eq!(tick(40.0, 100.0), "40");
        assert_eq!(tick(0.01, 1.0), "0.01");
        assert_eq!(tick(0.005, 1.0), "0.005");
        assert_eq!(tick(0.0005, 1.0), "5e-4");
        assert_eq!(tick(1.234_567e-7, 1e-6), "1.23457e-7");
        // rounding noise next to zero on a linear axis through zero
        assert_eq!(tick(2.2e-17, 6.0), "0");
        assert_eq!(tick(1e-300, 1e-299), "1e-300");
    }

    // common practice, no source: measured points appear as markers with ±σ bars, on the
    // picture's energy scale (U − U(reactant))
    #[test]
    fn survey_draws_measured_points_with_error_bars() {
        let m = crate::model::Model::from_text(
            "[particle]\ndiffusion = 1.0\n[potential]\nexpr = \"6*(x^2 - 1)^2\"\ndomain = [-2.0, 2.0]\n[states]\nstart = -1.0\n",
            "w.toml",
            std::path::Path::new("."),
            &[],
        )
        .unwrap();
        let l = crate::landscape::Landscape::analyse(
            &m.system.potential,
            m.system.start,
            m.system.target,
            m.system.mass,
        )
        .unwrap();
        let pts = [
            ProfilePoint {
                x: -1.0,
                u: 0.0,
                sigma: 0.5,
            },
            ProfilePoint {
                x: 0.0,
                u: 6.0,
                sigma: 1.0,
            },
            ProfilePoint {
                x: 0.5,
                u: 3.4,
                sigma: 0.2,
            },
        ];
        let svg = landscape(&m, &l, Some(&pts));
        let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
        let class = |c: &str| {
            doc.descendants()
                .filter(|n| n.attribute("class") == Some(c))
                .collect::<Vec<_>>()
        };
        let marks = class("marker data");
        assert_eq!(marks.len(), 3);
        let bars = class("errorbar");
        assert_eq!(bars.len(), 3);
        // the barrier point's bar spans ±1 kT: twice the reactant's ±0.5 kT, in pixels
        let len = |n: &roxmltree::Node| {
            let y = |k: &str| n.attribute(k).unwrap().parse::<f64>().unwrap();
            (y("y1") - y("y2")).abs()
        };
        assert!((len(&bars[1]) / len(&bars[0]) - 2.0).abs() < 0.02);
        // no title: the file name
        assert!(
            doc.descendants()
                .any(|n| n.is_text() && n.text().map(str::trim) == Some("w.toml"))
        );
    }

    #[test]
    fn axes_are_always_finite_and_ordered() {
        for (vals, log) in [
            (vec![-3.0, 3.0], false),
            (vec![-3.0, -0.5], false),
            (vec![0.0, 0.0], false),
            (vec![f64::NAN], true),
            (vec![-1.0, 0.0], true),
            (vec![2.0], true),
            (vec![1e-320, 1e308], true),
        ] {
            let a = Axis::fit(vals.iter().copied(), log, 0.05);
            assert!(
                a.lo.is_finite() && a.hi.is_finite() && a.lo < a.hi,
                "{vals:?}: {a:?}"
            );
            assert!(!log || a.lo > 0.0, "{vals:?}: {a:?}");
        }
    }
}
