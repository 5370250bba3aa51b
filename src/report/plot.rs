//! SVG plots for reports, drawn with plotters into a `String`.
//!
//! Five plots (SPEC §8): data with the fitted curve and confidence and
//! prediction bands ([`fit_plot`]); residuals against a predictor or the
//! fitted value ([`residual_plot`]); a normal probability plot of residuals
//! ([`normal_probability_plot`]); the linearized view ([`linearized_plot`]);
//! a parameter over the run history ([`trend_plot`]).
//!
//! Inputs are plain slices. Non-finite points are left out and counted.
//! Large inputs are decimated for drawing only (the caller's fit is not
//! affected): above [`DECIMATE_ABOVE`] scatter points, one point is kept per
//! [`CELL_PX`]-pixel cell of the plot area (the first in input order), which
//! changes nothing visible at marker size; curves and bands above
//! [`CURVE_MAX`] samples keep every k-th sample plus the last. Output is
//! deterministic: the same input gives byte-identical SVG.
//!
//! Palette (our own): ink `#23272c`, data `#2b556e` (slate blue), fitted
//! line `#a4461d` (rust), confidence band `#d88c4a` (amber, 35 %),
//! prediction band `#c9b89a` (sand, 35 %), reference lines `#7a7e83`.

use std::collections::HashSet;
use std::fmt::Write as _;

use plotters::coord::Shift;
use plotters::coord::types::{RangedCoordf64, RangedCoordi32};
use plotters::prelude::*;
use serde::Serialize;

use super::context::Plot;
use super::{ReportError, Result};

/// An SVG drawing made by this module. It has no public constructor, so any
/// SVG a template inlines unescaped was drawn here (with plotters escaping
/// every text it draws).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Svg(String);

impl Svg {
    /// The SVG markup.
    pub fn as_str(&self) -> &str {
        &self.0
    }
}

impl Serialize for Svg {
    fn serialize<S: serde::Serializer>(
        &self,
        serializer: S,
    ) -> std::result::Result<S::Ok, S::Error> {
        serializer.serialize_str(&self.0)
    }
}

/// Width of every plot in SVG pixels.
pub const WIDTH: u32 = 760;
/// Height of every plot in SVG pixels.
pub const HEIGHT: u32 = 440;
/// Scatter series longer than this are decimated for drawing.
pub const DECIMATE_ABOVE: usize = 5000;
/// Cell size in pixels of the scatter decimation (about a marker's diameter).
pub const CELL_PX: i32 = 3;
/// Curves and bands longer than this are drawn with a stride.
pub const CURVE_MAX: usize = 2000;

const INK: RGBColor = RGBColor(0x23, 0x27, 0x2c);
const MUTED: RGBColor = RGBColor(0x5c, 0x61, 0x67);
const GRID_BOLD: RGBColor = RGBColor(0xdc, 0xd7, 0xcd);
const DATA: RGBColor = RGBColor(0x2b, 0x55, 0x6e);
const FIT: RGBColor = RGBColor(0xa4, 0x46, 0x1d);
const CONFIDENCE: RGBColor = RGBColor(0xd8, 0x8c, 0x4a);
const PREDICTION: RGBColor = RGBColor(0xc9, 0xb8, 0x9a);
const REFERENCE: RGBColor = RGBColor(0x7a, 0x7e, 0x83);
const FONT: &str = "sans-serif";

/// An axis title: a quantity name and its unit, drawn `name (unit)`.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct AxisLabel {
    /// Quantity, e.g. "T" or "temperature T".
    pub name: String,
    /// Unit, e.g. "°C"; none for dimensionless quantities.
    pub unit: Option<String>,
}

impl AxisLabel {
    /// An axis title with an optional unit.
    pub fn new(name: impl Into<String>, unit: Option<&str>) -> Self {
        AxisLabel {
            name: name.into(),
            unit: unit.filter(|u| !u.trim().is_empty()).map(str::to_string),
        }
    }

    /// The drawn text.
    pub fn text(&self) -> String {
        match &self.unit {
            Some(unit) => format!("{} ({unit})", self.name),
            None => self.name.clone(),
        }
    }
}

/// A band around a curve, sampled at the curve's x values.
#[derive(Debug, Clone, Copy)]
pub struct Band<'a> {
    /// Lower edge, one value per curve sample.
    pub lower: &'a [f64],
    /// Upper edge, one value per curve sample.
    pub upper: &'a [f64],
    /// Legend text, e.g. "95 % confidence band (pointwise)".
    pub label: &'a str,
}

/// Inputs of [`fit_plot`].
#[derive(Debug, Clone)]
pub struct FitPlot<'a> {
    /// Predictor values of the data.
    pub x: &'a [f64],
    /// Response values of the data.
    pub y: &'a [f64],
    /// Predictor values where the curve is sampled (ascending).
    pub curve_x: &'a [f64],
    /// Fitted response at `curve_x`.
    pub curve_y: &'a [f64],
    /// Confidence band of the fitted curve, at `curve_x`.
    pub confidence: Option<Band<'a>>,
    /// Prediction band for a new reading, at `curve_x`.
    pub prediction: Option<Band<'a>>,
    /// Predictor axis.
    pub x_axis: AxisLabel,
    /// Response axis.
    pub y_axis: AxisLabel,
}

/// Inputs of [`residual_plot`].
#[derive(Debug, Clone)]
pub struct ResidualPlot<'a> {
    /// A predictor, or the fitted values.
    pub x: &'a [f64],
    /// Residuals, one per x.
    pub residuals: &'a [f64],
    /// Horizontal axis, e.g. "T (°C)" or "fitted R (Ω)".
    pub x_axis: AxisLabel,
    /// Vertical axis, e.g. "residual (Ω)".
    pub y_axis: AxisLabel,
}

/// Inputs of [`normal_probability_plot`].
#[derive(Debug, Clone)]
pub struct NormalPlot<'a> {
    /// Residuals (Pearson residuals √w·e for weighted fits), any order.
    pub residuals: &'a [f64],
    /// Vertical axis, e.g. "Pearson residual (Ω)".
    pub y_axis: AxisLabel,
}

/// Inputs of [`linearized_plot`].
#[derive(Debug, Clone)]
pub struct LinearizedPlot<'a> {
    /// Transformed predictor (the basis function), e.g. 1/(T + 273.15).
    pub x: &'a [f64],
    /// Transformed response, e.g. ln(R).
    pub y: &'a [f64],
    /// Samples of the straight line: x values.
    pub line_x: &'a [f64],
    /// Samples of the straight line: y values.
    pub line_y: &'a [f64],
    /// Horizontal axis.
    pub x_axis: AxisLabel,
    /// Vertical axis.
    pub y_axis: AxisLabel,
}

/// One run of a parameter's history.
#[derive(Debug, Clone, PartialEq)]
pub struct TrendPoint {
    /// Short label drawn under the axis (a date such as `2026-11-28`).
    pub label: String,
    /// Parameter value.
    pub value: f64,
    /// Standard error, drawn as ± 1 SE; none when unknown.
    pub std_error: Option<f64>,
    /// Whether this is the run being reported (drawn highlighted).
    pub current: bool,
}

/// Inputs of [`trend_plot`].
#[derive(Debug, Clone)]
pub struct TrendPlot<'a> {
    /// Runs in time order.
    pub runs: &'a [TrendPoint],
    /// Vertical axis, the parameter and its unit.
    pub y_axis: AxisLabel,
    /// Acceptance limits of the parameter, drawn as dashed lines.
    pub min: Option<f64>,
    /// Upper acceptance limit.
    pub max: Option<f64>,
}

/// A drawn plot and what was drawn of its input.
#[derive(Debug, Clone)]
pub struct RenderedPlot {
    /// The drawing.
    pub svg: Svg,
    /// Scatter points given (finite or not).
    pub points_total: usize,
    /// Scatter points drawn.
    pub points_drawn: usize,
    /// Scatter points left out because a coordinate was not finite.
    pub points_not_finite: usize,
}

impl RenderedPlot {
    /// A sentence on decimation or left-out points, when there is one.
    pub fn drawing_note(&self) -> Option<String> {
        let mut parts = Vec::new();
        let finite = self.points_total - self.points_not_finite;
        if self.points_drawn < finite {
            parts.push(format!(
                "{} of {} points drawn (one per {CELL_PX}-pixel cell); the fit used every row",
                self.points_drawn, finite
            ));
        }
        if self.points_not_finite > 0 {
            parts.push(format!(
                "{} points with a non-finite coordinate not drawn",
                self.points_not_finite
            ));
        }
        if parts.is_empty() {
            None
        } else {
            Some(format!("{}.", parts.join("; ")))
        }
    }

    /// The context entry for this plot: `name` becomes `plots/<name>.svg`
    /// beside `report.md` and must match `[a-z0-9_-]+`. The drawing note is
    /// appended to the caption, and the title is put into the SVG as its
    /// `<title>` (for screen readers and file viewers).
    pub fn into_plot(self, name: &str, title: &str, caption: Option<&str>) -> Result<Plot> {
        check_plot_name(name)?;
        let caption = match (caption, self.drawing_note()) {
            (Some(c), Some(n)) => Some(format!("{c} {n}")),
            (Some(c), None) => Some(c.to_string()),
            (None, note) => note,
        };
        let svg = with_title(&self.svg.0, title);
        Ok(Plot {
            name: name.to_string(),
            title: title.to_string(),
            caption,
            svg: Svg(svg),
        })
    }
}

/// Checks a plot name is a safe file stem: `[a-z0-9_-]+`, at most 64 bytes.
pub fn check_plot_name(name: &str) -> Result<()> {
    let ok = !name.is_empty()
        && name.len() <= 64
        && name
            .bytes()
            .all(|b| b.is_ascii_lowercase() || b.is_ascii_digit() || b == b'_' || b == b'-');
    if ok {
        Ok(())
    } else {
        Err(ReportError::invalid(format!(
            "plot name {name:?} is not a safe file name: use 1–64 characters of a-z, 0-9, _ and -"
        )))
    }
}

fn xml_escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c => out.push(c),
        }
    }
    out
}

/// Inserts `<title>` right after the opening `<svg …>` tag.
fn with_title(svg: &str, title: &str) -> String {
    match svg.find('>') {
        Some(end) if svg.starts_with("<svg") => {
            let (head, rest) = svg.split_at(end + 1);
            format!("{head}\n<title>{}</title>{rest}", xml_escape(title))
        }
        _ => svg.to_string(),
    }
}

/// Tick label text: 6 significant digits with trailing zeros removed (ticks
/// are round numbers; `0.30000000000000004` is drawn `0.3`).
fn tick_label(v: f64) -> String {
    tick_label_in(v, 0.0)
}

/// Tick label on an axis spanning `span`: a tick within 1e-9·span of zero is drawn `0`
/// (the grid steps add up to values like 3.5e-18 there).
fn tick_label_in(v: f64, span: f64) -> String {
    let v = if v.abs() <= 1e-9 * span.abs() { 0.0 } else { v };
    let text = super::format::sig(v, 6);
    let (mantissa, exponent) = match text.split_once('e') {
        Some((m, e)) => (m.to_string(), Some(e.to_string())),
        None => (text, None),
    };
    let mantissa = if mantissa.contains('.') {
        mantissa
            .trim_end_matches('0')
            .trim_end_matches('.')
            .to_string()
    } else {
        mantissa
    };
    match exponent {
        Some(e) => format!("{mantissa}e{e}"),
        None => mantissa,
    }
}

/// Finite (x, y) pairs and the count of pairs left out.
fn finite_pairs(x: &[f64], y: &[f64]) -> (Vec<(f64, f64)>, usize) {
    let pairs: Vec<(f64, f64)> = x
        .iter()
        .zip(y)
        .filter(|(a, b)| a.is_finite() && b.is_finite())
        .map(|(a, b)| (*a, *b))
        .collect();
    let dropped = x.len() - pairs.len();
    (pairs, dropped)
}

fn check_lengths(plot: &str, what: &str, a: usize, b: usize) -> Result<()> {
    if a == b {
        Ok(())
    } else {
        Err(ReportError::plot(
            plot,
            format!("{what}: lengths differ ({a} and {b})"),
        ))
    }
}

/// Keeps every k-th sample plus the last when there are more than
/// [`CURVE_MAX`].
fn stride<T: Copy>(samples: &[T]) -> Vec<T> {
    if samples.len() <= CURVE_MAX {
        return samples.to_vec();
    }
    let step = samples.len().div_ceil(CURVE_MAX / 2);
    let mut out: Vec<T> = samples.iter().step_by(step).copied().collect();
    if !(samples.len() - 1).is_multiple_of(step)
        && let Some(last) = samples.last()
    {
        out.push(*last);
    }
    out
}

/// A padded range over values; a degenerate range is widened.
fn padded_range<'a>(values: impl Iterator<Item = &'a f64>) -> Option<(f64, f64)> {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for v in values.filter(|v| v.is_finite()) {
        lo = lo.min(*v);
        hi = hi.max(*v);
    }
    if !(lo.is_finite() && hi.is_finite()) {
        return None;
    }
    let span = hi - lo;
    let pad = if span > 0.0 {
        span * 0.05
    } else if lo != 0.0 {
        lo.abs() * 0.05
    } else {
        1.0
    };
    Some((lo - pad, hi + pad))
}

type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

fn plot_error(plot: &'static str) -> impl Fn(DrawingAreaErrorKind<std::io::Error>) -> ReportError {
    move |e| ReportError::plot(plot, e.to_string())
}

fn label_font(size: u32) -> TextStyle<'static> {
    (FONT, size).into_font().color(&INK)
}

/// Builds the frame of a plot: background, axes, grid, tick labels and
/// axis titles.
fn frame<'a, 'b>(
    root: &'a DrawingArea<SVGBackend<'b>, Shift>,
    plot: &'static str,
    x_range: (f64, f64),
    y_range: (f64, f64),
    x_axis: &AxisLabel,
    y_axis: &AxisLabel,
) -> Result<Chart<'a, 'b>> {
    root.fill(&WHITE).map_err(plot_error(plot))?;
    let mut chart = ChartBuilder::on(root)
        .margin_top(14)
        .margin_right(22)
        .margin_left(8)
        .margin_bottom(6)
        .x_label_area_size(56)
        .y_label_area_size(84)
        .build_cartesian_2d(x_range.0..x_range.1, y_range.0..y_range.1)
        .map_err(plot_error(plot))?;
    let (x_span, y_span) = (x_range.1 - x_range.0, y_range.1 - y_range.0);
    let x_formatter = |v: &f64| tick_label_in(*v, x_span);
    let y_formatter = |v: &f64| tick_label_in(*v, y_span);
    chart
        .configure_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(GRID_BOLD)
        .axis_style(MUTED)
        .x_labels(8)
        .y_labels(7)
        .x_label_formatter(&x_formatter)
        .y_label_formatter(&y_formatter)
        .label_style(label_font(16))
        .axis_desc_style(label_font(17))
        .x_desc(x_axis.text())
        .y_desc(y_axis.text())
        .draw()
        .map_err(plot_error(plot))?;
    Ok(chart)
}

/// `v.round() as i32` without the library call: round half away from zero, saturating at the
/// ends of `i32` and NaN to 0, as `as i32` does. On baseline x86-64 (no SSE4.1 rounding
/// instruction) `f64::round` is a call into the math library, which was 2 % of a
/// million-point run in `decimate`. Inside ±2·10⁹ the truncation `t = v as i32` is exact and
/// so is the fraction `v − t` (it is representable), so comparing it with ±½ rounds exactly
/// and `t ± 1` still fits; points that far off the chart take the library's `round`.
#[inline]
fn round_to_i32(v: f64) -> i32 {
    if v.abs() < 2.0e9 {
        let t = v as i32;
        let frac = v - f64::from(t);
        t + i32::from(frac >= 0.5) - i32::from(frac <= -0.5)
    } else {
        // NaN (the comparison above is false) and |v| ≥ 2·10⁹.
        v.round() as i32
    }
}

/// `px.div_euclid(CELL_PX)` by an unsigned division of `px` shifted by a multiple of
/// [`CELL_PX`] that makes it non-negative (cheaper than the signed rounding fix-ups).
#[inline]
fn cell_of(px: i32) -> i32 {
    const SHIFT: i64 = CELL_PX as i64 * (1 << 31);
    (((i64::from(px) + SHIFT) as u64 / CELL_PX as u64) as i64 - SHIFT / CELL_PX as i64) as i32
}

/// The decimation cells of a chart: the pixel mapping of its plot area and the cell grid.
struct Cells<'c, 'a, 'b> {
    chart: &'c Chart<'a, 'b>,
    /// Pixel of (x_start, y_start) and pixels per unit along each axis.
    origin: (i32, i32),
    start: (f64, f64),
    scale: (f64, f64),
    affine: bool,
    /// First cell and the grid's size in cells.
    first: (i32, i32),
    cols: i32,
    rows: i32,
}

impl<'c, 'a, 'b> Cells<'c, 'a, 'b> {
    fn new(chart: &'c Chart<'a, 'b>) -> Self {
        let (xs, ys) = chart.plotting_area().get_pixel_range();
        let (cx0, cy0) = (xs.start.div_euclid(CELL_PX), ys.start.div_euclid(CELL_PX));
        let cols = (xs.end.div_euclid(CELL_PX) - cx0 + 1).max(1);
        let rows = (ys.end.div_euclid(CELL_PX) - cy0 + 1).max(1);
        // The chart's mapping is affine in each axis: taken from two corners once instead of
        // going through the chart for every point.
        let (xr, yr) = (chart.x_range(), chart.y_range());
        let (a, b) = (
            chart.backend_coord(&(xr.start, yr.start)),
            chart.backend_coord(&(xr.end, yr.end)),
        );
        let (sx, sy) = (
            f64::from(b.0 - a.0) / (xr.end - xr.start),
            f64::from(b.1 - a.1) / (yr.end - yr.start),
        );
        Cells {
            chart,
            origin: a,
            start: (xr.start, yr.start),
            scale: (sx, sy),
            affine: sx.is_finite() && sy.is_finite(),
            first: (cx0, cy0),
            cols,
            rows,
        }
    }

    /// The cell of a point (cells outside the plot area included).
    #[inline]
    fn cell(&self, p: &(f64, f64)) -> (i32, i32) {
        if self.affine {
            self.affine_cell(p)
        } else {
            let (px, py) = self.chart.backend_coord(p);
            (cell_of(px), cell_of(py))
        }
    }

    /// [`Cells::cell`] when the mapping is affine.
    #[inline(always)]
    fn affine_cell(&self, p: &(f64, f64)) -> (i32, i32) {
        let px = round_to_i32(f64::from(self.origin.0) + (p.0 - self.start.0) * self.scale.0);
        let py = round_to_i32(f64::from(self.origin.1) + (p.1 - self.start.1) * self.scale.1);
        (cell_of(px), cell_of(py))
    }

    /// Index of a cell in the grid of the plot area, `None` outside it.
    #[inline]
    fn index(&self, (cx, cy): (i32, i32)) -> Option<usize> {
        let (u, v) = (cx - self.first.0, cy - self.first.1);
        ((0..self.cols).contains(&u) && (0..self.rows).contains(&v))
            .then(|| (v * self.cols + u) as usize)
    }
}

/// Keeps one point per [`CELL_PX`]-pixel cell (the first in input order)
/// when there are more than [`DECIMATE_ABOVE`] points.
fn decimate(chart: &Chart<'_, '_>, points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    if points.len() <= DECIMATE_ABOVE {
        return points.to_vec();
    }
    let cells = Cells::new(chart);
    // The cells of the plot area are a bitmap (a hash set of a million points cost more than
    // drawing); points outside it, which the drawing clips, fall back to a set.
    let mut grid = vec![false; (cells.cols as usize) * (cells.rows as usize)];
    let mut outside: HashSet<(i32, i32)> = HashSet::new();
    let mut keep = |cell: (i32, i32)| match cells.index(cell).and_then(|k| grid.get_mut(k)) {
        Some(seen) => !std::mem::replace(seen, true),
        None => outside.insert(cell),
    };
    let mut kept = Vec::new();
    // The mapping's kind is decided once, not per point.
    if cells.affine {
        for p in points {
            if keep(cells.affine_cell(p)) {
                kept.push(*p);
            }
        }
    } else {
        for p in points {
            if keep(cells.cell(p)) {
                kept.push(*p);
            }
        }
    }
    kept
}

/// [`decimate`] of the points `point(0), …, point(n − 1)` whose two coordinates are each
/// monotone in the index (as the sorted residuals against their normal scores): each cell is
/// then met in one run of consecutive indices and never again, so the kept points are the
/// first of each run. The end of a run is found by doubling steps and bisection, so `point`
/// is evaluated some 2·log₂(run length) times per kept point instead of once per point;
/// the result is the same as [`decimate`] of all the points.
fn decimate_monotone(
    chart: &Chart<'_, '_>,
    n: usize,
    point: impl Fn(usize) -> (f64, f64),
) -> Vec<(f64, f64)> {
    if n <= DECIMATE_ABOVE {
        return (0..n).map(point).collect();
    }
    let cells = Cells::new(chart);
    let cell = |i: usize| cells.cell(&point(i));
    let mut kept = Vec::new();
    let mut i = 0;
    while i < n {
        let here = point(i);
        let c = cells.cell(&here);
        kept.push(here);
        // cell(lo) == c; hi is the first index known to be in another cell (or n).
        let (mut lo, mut step) = (i, 1usize);
        let mut hi = loop {
            let j = lo.saturating_add(step);
            if j >= n {
                break n;
            }
            if cell(j) != c {
                break j;
            }
            lo = j;
            step = step.saturating_mul(2);
        };
        while hi - lo > 1 {
            let mid = lo + (hi - lo) / 2;
            if cell(mid) == c {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        i = hi;
    }
    kept
}

/// The legend corner with the fewest points near it.
fn emptiest_corner(points: &[(f64, f64)], x: (f64, f64), y: (f64, f64)) -> SeriesLabelPosition {
    let fx = |v: f64| (v - x.0) / (x.1 - x.0);
    let fy = |v: f64| (v - y.0) / (y.1 - y.0);
    let mut counts = [0usize; 4]; // upper-left, upper-right, lower-left, lower-right
    for (px, py) in points {
        let (u, v) = (fx(*px), fy(*py));
        let left = u < 0.4;
        let right = u > 0.6;
        let upper = v > 0.65;
        let lower = v < 0.35;
        if upper && left {
            counts[0] += 1;
        }
        if upper && right {
            counts[1] += 1;
        }
        if lower && left {
            counts[2] += 1;
        }
        if lower && right {
            counts[3] += 1;
        }
    }
    let best = (0..4)
        .min_by_key(|i| counts.get(*i).copied().unwrap_or(usize::MAX))
        .unwrap_or(0);
    match best {
        0 => SeriesLabelPosition::UpperLeft,
        1 => SeriesLabelPosition::UpperRight,
        2 => SeriesLabelPosition::LowerLeft,
        _ => SeriesLabelPosition::LowerRight,
    }
}

fn draw_legend<'a, 'b: 'a>(
    chart: &mut Chart<'a, 'b>,
    plot: &'static str,
    position: SeriesLabelPosition,
) -> Result<()> {
    chart
        .configure_series_labels()
        .position(position)
        .margin(10)
        .legend_area_size(26)
        .background_style(WHITE.mix(0.9))
        .border_style(GRID_BOLD)
        .label_font(label_font(15))
        .draw()
        .map_err(plot_error(plot))
}

fn band_polygon(xs: &[f64], lower: &[f64], upper: &[f64]) -> Vec<(f64, f64)> {
    let mut poly: Vec<(f64, f64)> = Vec::with_capacity(2 * xs.len());
    for (x, u) in xs.iter().zip(upper) {
        if x.is_finite() && u.is_finite() {
            poly.push((*x, *u));
        }
    }
    for (x, l) in xs.iter().zip(lower).rev() {
        if x.is_finite() && l.is_finite() {
            poly.push((*x, *l));
        }
    }
    poly
}

fn draw_band(
    chart: &mut Chart<'_, '_>,
    plot: &'static str,
    xs: &[f64],
    band: &Band<'_>,
    color: RGBColor,
) -> Result<()> {
    let poly = band_polygon(&stride(xs), &stride(band.lower), &stride(band.upper));
    if poly.len() < 3 {
        return Ok(());
    }
    chart
        .draw_series(std::iter::once(Polygon::new(
            poly,
            color.mix(0.35).filled(),
        )))
        .map_err(plot_error(plot))?
        .label(band.label)
        .legend(move |(x, y)| {
            Rectangle::new([(x, y - 6), (x + 18, y + 6)], color.mix(0.5).filled())
        });
    Ok(())
}

/// Scatter points, drawn as plotters draws one `Circle` per point but written afterwards by
/// [`Points::splice`]: the series (and its legend entry) is drawn with a single marker
/// circle, and the points' `<circle>` tags, in the SVG backend's own bytes, replace it once
/// the plot is finished. Formatting each tag through the backend cost some 6,000
/// instructions a point (seven `format!`s); the output is the same, byte for byte, points
/// outside the plot area clamped to its edge as the drawing area does (pinned by
/// `points_are_written_as_the_backend_writes_them`).
fn draw_points(
    chart: &mut Chart<'_, '_>,
    plot: &'static str,
    points: &[(f64, f64)],
    label: Option<&str>,
) -> Result<Points> {
    let series = chart
        .draw_series(std::iter::once(Circle::new((0.0, 0.0), 1, marker_style())))
        .map_err(plot_error(plot))?;
    if let Some(label) = label {
        series
            .label(label)
            .legend(|(x, y)| Circle::new((x + 9, y), 3, DATA.stroke_width(1)));
    }
    let tail = circle_tail(3, point_style());
    let mut tags = String::with_capacity(points.len() * (tail.len() + 24));
    // The drawing area clamps each point to its pixel rectangle, ends included.
    let (xs, ys) = chart.plotting_area().get_pixel_range();
    for p in points {
        let (cx, cy) = chart.backend_coord(p);
        let (cx, cy) = (cx.min(xs.end).max(xs.start), cy.min(ys.end).max(ys.start));
        // Writing to a String cannot fail.
        let _ = write!(tags, "<circle cx=\"{cx}\" cy=\"{cy}\"{tail}");
    }
    Ok(Points { plot, tags })
}

/// The points' style: slate blue at 85 %, outlined.
fn point_style() -> ShapeStyle {
    DATA.mix(0.85).stroke_width(1)
}

/// The marker that holds the points' place: a colour and width no plot uses.
fn marker_style() -> ShapeStyle {
    RGBColor(0x01, 0x02, 0x03).stroke_width(97)
}

/// What the SVG backend writes after a circle's centre for this radius and outline style
/// (` r="3" opacity="0.85" … stroke-width="1"/>` and the line break), taken from the backend
/// itself so that the points' tags stay its bytes.
fn circle_tail(radius: u32, style: ShapeStyle) -> String {
    let mut scratch = String::new();
    {
        let mut backend = SVGBackend::with_string(&mut scratch, (1, 1));
        let _ = backend.draw_circle((0, 0), radius, &style, false);
        let _ = backend.present();
    }
    let head = "<circle cx=\"0\" cy=\"0\"";
    scratch
        .find(head)
        .and_then(|at| scratch.get(at + head.len()..))
        .and_then(|rest| rest.find('\n').and_then(|end| rest.get(..=end)))
        .unwrap_or_default()
        .to_string()
}

/// Points drawn by [`draw_points`], waiting for the finished SVG.
#[must_use = "the points are only in the plot once spliced into its SVG"]
struct Points {
    plot: &'static str,
    tags: String,
}

impl Points {
    /// Replaces the marker circle of the finished `svg` with the points' tags.
    fn splice(self, svg: &mut String) -> Result<()> {
        let tail = circle_tail(1, marker_style());
        let missing =
            || ReportError::plot(self.plot, "the points' place was not found in the drawing");
        let end = svg
            .find(&tail)
            .map(|at| at + tail.len())
            .ok_or_else(missing)?;
        let start = svg
            .get(..end)
            .and_then(|head| head.rfind("<circle"))
            .ok_or_else(missing)?;
        svg.replace_range(start..end, &self.tags);
        Ok(())
    }
}

fn draw_line(
    chart: &mut Chart<'_, '_>,
    plot: &'static str,
    line: &[(f64, f64)],
    label: &str,
) -> Result<()> {
    let line = stride(line);
    chart
        .draw_series(LineSeries::new(line, FIT.stroke_width(2)))
        .map_err(plot_error(plot))?
        .label(label)
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], FIT.stroke_width(2)));
    Ok(())
}

fn finish(root: &DrawingArea<SVGBackend<'_>, Shift>, plot: &'static str) -> Result<()> {
    root.present().map_err(plot_error(plot))
}

fn rendered(svg: String, total: usize, drawn: usize, not_finite: usize) -> RenderedPlot {
    RenderedPlot {
        svg: Svg(svg),
        points_total: total,
        points_drawn: drawn,
        points_not_finite: not_finite,
    }
}

/// Data points with the fitted curve, the confidence band and the
/// prediction band (each band drawn when given).
pub fn fit_plot(input: &FitPlot<'_>) -> Result<RenderedPlot> {
    const PLOT: &str = "fit";
    check_lengths(PLOT, "data x and y", input.x.len(), input.y.len())?;
    check_lengths(
        PLOT,
        "curve x and y",
        input.curve_x.len(),
        input.curve_y.len(),
    )?;
    for (band, what) in [
        (input.confidence, "confidence band"),
        (input.prediction, "prediction band"),
    ] {
        if let Some(band) = band {
            check_lengths(PLOT, what, band.lower.len(), input.curve_x.len())?;
            check_lengths(PLOT, what, band.upper.len(), input.curve_x.len())?;
        }
    }
    let (points, not_finite) = finite_pairs(input.x, input.y);
    let (curve, _) = finite_pairs(input.curve_x, input.curve_y);
    if points.is_empty() {
        return Err(ReportError::plot(
            PLOT,
            "no data point with finite coordinates",
        ));
    }
    let bands = [input.prediction, input.confidence];
    let x_range = padded_range(
        points
            .iter()
            .map(|p| &p.0)
            .chain(curve.iter().map(|p| &p.0)),
    )
    .ok_or_else(|| ReportError::plot(PLOT, "no finite x"))?;
    let band_values = bands
        .iter()
        .flatten()
        .flat_map(|b| b.lower.iter().chain(b.upper.iter()));
    let y_range = padded_range(
        points
            .iter()
            .map(|p| &p.1)
            .chain(curve.iter().map(|p| &p.1))
            .chain(band_values),
    )
    .ok_or_else(|| ReportError::plot(PLOT, "no finite y"))?;

    let mut svg = String::new();
    let (drawn, drawing);
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        let mut chart = frame(&root, PLOT, x_range, y_range, &input.x_axis, &input.y_axis)?;
        if let Some(band) = &input.prediction {
            draw_band(&mut chart, PLOT, input.curve_x, band, PREDICTION)?;
        }
        if let Some(band) = &input.confidence {
            draw_band(&mut chart, PLOT, input.curve_x, band, CONFIDENCE)?;
        }
        let shown = decimate(&chart, &points);
        drawn = shown.len();
        drawing = draw_points(&mut chart, PLOT, &shown, Some("data"))?;
        if curve.len() >= 2 {
            draw_line(&mut chart, PLOT, &curve, "fitted curve")?;
        }
        draw_legend(&mut chart, PLOT, emptiest_corner(&points, x_range, y_range))?;
        finish(&root, PLOT)?;
    }
    drawing.splice(&mut svg)?;
    Ok(rendered(svg, input.x.len(), drawn, not_finite))
}

/// Residuals against a predictor or against the fitted value, with the zero
/// line. The vertical range is symmetric about zero.
pub fn residual_plot(input: &ResidualPlot<'_>) -> Result<RenderedPlot> {
    const PLOT: &str = "residual";
    check_lengths(
        PLOT,
        "x and residuals",
        input.x.len(),
        input.residuals.len(),
    )?;
    let (points, not_finite) = finite_pairs(input.x, input.residuals);
    if points.is_empty() {
        return Err(ReportError::plot(
            PLOT,
            "no residual with finite coordinates",
        ));
    }
    let x_range = padded_range(points.iter().map(|p| &p.0))
        .ok_or_else(|| ReportError::plot(PLOT, "no finite x"))?;
    let largest = points.iter().map(|p| p.1.abs()).fold(0.0, f64::max);
    let half = if largest > 0.0 { largest * 1.1 } else { 1.0 };

    let mut svg = String::new();
    let (drawn, drawing);
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        let mut chart = frame(
            &root,
            PLOT,
            x_range,
            (-half, half),
            &input.x_axis,
            &input.y_axis,
        )?;
        chart
            .draw_series(LineSeries::new(
                [(x_range.0, 0.0), (x_range.1, 0.0)],
                REFERENCE.stroke_width(1),
            ))
            .map_err(plot_error(PLOT))?;
        let shown = decimate(&chart, &points);
        drawn = shown.len();
        drawing = draw_points(&mut chart, PLOT, &shown, None)?;
        finish(&root, PLOT)?;
    }
    drawing.splice(&mut svg)?;
    Ok(rendered(svg, input.x.len(), drawn, not_finite))
}

/// The normal score of rank i (1-based) among n: Blom's plotting position
/// `(i − 3/8)/(n + 1/4)` mapped through the standard normal quantile (Blom 1958, from
/// memory); `None` if the distribution cannot be built.
fn normal_score(n: usize) -> Option<impl Fn(usize) -> f64> {
    use statrs::distribution::{ContinuousCDF, Normal};
    let standard = Normal::new(0.0, 1.0).ok()?;
    Some(move |i: usize| standard.inverse_cdf((i as f64 - 0.375) / (n as f64 + 0.25)))
}

#[cfg(test)]
fn normal_scores(n: usize) -> Vec<f64> {
    normal_score(n).map_or_else(Vec::new, |score| (1..=n).map(score).collect())
}

/// Quantile of sorted values by linear interpolation between order
/// statistics, `h = (n − 1)·p` (Hyndman & Fan 1996 type 7, from memory).
fn quantile_sorted(sorted: &[f64], p: f64) -> Option<f64> {
    let last = sorted.len().checked_sub(1)?;
    let h = last as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(last);
    let a = *sorted.get(lo)?;
    let b = *sorted.get(hi)?;
    Some(a + (h - lo as f64) * (b - a))
}

/// Normal probability plot: sorted residuals against normal scores, with the
/// reference line through the quartiles (Chambers et al. 1983, Graphical
/// Methods for Data Analysis, from memory). Points on the line are what a
/// normal sample gives.
pub fn normal_probability_plot(input: &NormalPlot<'_>) -> Result<RenderedPlot> {
    const PLOT: &str = "normal probability";
    let mut sorted: Vec<f64> = input
        .residuals
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    let not_finite = input.residuals.len() - sorted.len();
    if sorted.len() < 2 {
        return Err(ReportError::plot(PLOT, "fewer than 2 finite residuals"));
    }
    // In `f64::total_cmp` order, by a radix sort of the bits for large sets (same result).
    crate::stats::sort::sort_total(&mut sorted);
    // Scores are computed only for the points drawn (see `decimate_monotone`): both
    // coordinates grow with the rank, the scores as the normal quantile of Blom's position
    // and the residuals as sorted, so the extremes are at the ends.
    let n = sorted.len();
    let score = normal_score(n).ok_or_else(|| ReportError::plot(PLOT, "no scores"))?;
    let ends = [score(1), score(n)];
    let x_range = padded_range(ends.iter()).ok_or_else(|| ReportError::plot(PLOT, "no scores"))?;
    let y_range = padded_range(sorted.first().into_iter().chain(sorted.last()))
        .ok_or_else(|| ReportError::plot(PLOT, "no residuals"))?;
    // Reference line through (z₀.₂₅, q₀.₂₅) and (z₀.₇₅, q₀.₇₅); z₀.₇₅ ≈ 0.6745.
    let z = 0.674_489_750_196_081_7;
    let line = match (
        quantile_sorted(&sorted, 0.25),
        quantile_sorted(&sorted, 0.75),
    ) {
        (Some(q1), Some(q3)) => {
            let slope = (q3 - q1) / (2.0 * z);
            let mid = (q1 + q3) / 2.0;
            Some(vec![
                (x_range.0, mid + slope * x_range.0),
                (x_range.1, mid + slope * x_range.1),
            ])
        }
        _ => None,
    };

    let mut svg = String::new();
    let (drawn, drawing);
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        let x_axis = AxisLabel::new("normal score", None);
        let mut chart = frame(&root, PLOT, x_range, y_range, &x_axis, &input.y_axis)?;
        if let Some(line) = line {
            let clipped: Vec<(f64, f64)> = line;
            chart
                .draw_series(LineSeries::new(clipped, REFERENCE.stroke_width(1)))
                .map_err(plot_error(PLOT))?
                .label("line through the quartiles")
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 18, y)], REFERENCE.stroke_width(1))
                });
        }
        let shown = decimate_monotone(&chart, n, |i| {
            (score(i + 1), sorted.get(i).copied().unwrap_or(f64::NAN))
        });
        drawn = shown.len();
        drawing = draw_points(&mut chart, PLOT, &shown, Some("residuals, sorted"))?;
        draw_legend(&mut chart, PLOT, SeriesLabelPosition::UpperLeft)?;
        finish(&root, PLOT)?;
    }
    drawing.splice(&mut svg)?;
    Ok(rendered(svg, input.residuals.len(), drawn, not_finite))
}

/// The linearized view: transformed data and the straight line of the
/// linear fit in transformed space.
pub fn linearized_plot(input: &LinearizedPlot<'_>) -> Result<RenderedPlot> {
    const PLOT: &str = "linearized";
    check_lengths(PLOT, "x and y", input.x.len(), input.y.len())?;
    check_lengths(PLOT, "line x and y", input.line_x.len(), input.line_y.len())?;
    let (points, not_finite) = finite_pairs(input.x, input.y);
    let (line, _) = finite_pairs(input.line_x, input.line_y);
    if points.is_empty() {
        return Err(ReportError::plot(
            PLOT,
            "no transformed point with finite coordinates",
        ));
    }
    let x_range = padded_range(points.iter().map(|p| &p.0).chain(line.iter().map(|p| &p.0)))
        .ok_or_else(|| ReportError::plot(PLOT, "no finite x"))?;
    let y_range = padded_range(points.iter().map(|p| &p.1).chain(line.iter().map(|p| &p.1)))
        .ok_or_else(|| ReportError::plot(PLOT, "no finite y"))?;

    let mut svg = String::new();
    let (drawn, drawing);
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        let mut chart = frame(&root, PLOT, x_range, y_range, &input.x_axis, &input.y_axis)?;
        let shown = decimate(&chart, &points);
        drawn = shown.len();
        drawing = draw_points(&mut chart, PLOT, &shown, Some("transformed data"))?;
        if line.len() >= 2 {
            draw_line(&mut chart, PLOT, &line, "linear fit (transformed space)")?;
        }
        draw_legend(&mut chart, PLOT, emptiest_corner(&points, x_range, y_range))?;
        finish(&root, PLOT)?;
    }
    drawing.splice(&mut svg)?;
    Ok(rendered(svg, input.x.len(), drawn, not_finite))
}

/// A parameter over the run history: value ± 1 SE per run, the current run
/// highlighted, acceptance limits dashed.
pub fn trend_plot(input: &TrendPlot<'_>) -> Result<RenderedPlot> {
    const PLOT: &str = "trend";
    let runs: Vec<(usize, &TrendPoint)> = input
        .runs
        .iter()
        .enumerate()
        .filter(|(_, r)| r.value.is_finite())
        .collect();
    let not_finite = input.runs.len() - runs.len();
    if runs.is_empty() {
        return Err(ReportError::plot(PLOT, "no run with a finite value"));
    }
    let n = input.runs.len();
    let mut ys: Vec<f64> = Vec::new();
    for (_, r) in &runs {
        ys.push(r.value);
        if let Some(se) = r.std_error.filter(|s| s.is_finite()) {
            ys.push(r.value - se);
            ys.push(r.value + se);
        }
    }
    ys.extend(
        input
            .min
            .iter()
            .chain(input.max.iter())
            .filter(|v| v.is_finite()),
    );
    let y_range =
        padded_range(ys.iter()).ok_or_else(|| ReportError::plot(PLOT, "no finite value"))?;
    let n_i32 = i32::try_from(n).map_err(|_| ReportError::plot(PLOT, "too many runs"))?;
    let labels: Vec<&str> = input.runs.iter().map(|r| r.label.as_str()).collect();

    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
        root.fill(&WHITE).map_err(plot_error(PLOT))?;
        let mut chart: ChartContext<
            '_,
            SVGBackend<'_>,
            Cartesian2d<RangedCoordi32, RangedCoordf64>,
        > = ChartBuilder::on(&root)
            .margin_top(14)
            .margin_right(22)
            .margin_left(8)
            .margin_bottom(6)
            .x_label_area_size(56)
            .y_label_area_size(84)
            .build_cartesian_2d(-1..n_i32, y_range.0..y_range.1)
            .map_err(plot_error(PLOT))?;
        let x_formatter = |i: &i32| {
            usize::try_from(*i)
                .ok()
                .and_then(|i| labels.get(i))
                .map(|s| s.to_string())
                .unwrap_or_default()
        };
        let y_formatter = |v: &f64| tick_label(*v);
        chart
            .configure_mesh()
            .light_line_style(TRANSPARENT)
            .bold_line_style(GRID_BOLD)
            .axis_style(MUTED)
            .x_labels((n + 2).min(9))
            .y_labels(7)
            .x_label_formatter(&x_formatter)
            .y_label_formatter(&y_formatter)
            .label_style(label_font(14))
            .axis_desc_style(label_font(17))
            .x_desc("run")
            .y_desc(input.y_axis.text())
            .draw()
            .map_err(plot_error(PLOT))?;
        let limits: Vec<f64> = [input.min, input.max]
            .into_iter()
            .flatten()
            .filter(|v| v.is_finite())
            .collect();
        for (k, v) in limits.iter().enumerate() {
            let series = chart
                .draw_series(DashedLineSeries::new(
                    [(-1, *v), (n_i32, *v)],
                    6,
                    4,
                    REFERENCE.stroke_width(1),
                ))
                .map_err(plot_error(PLOT))?;
            if k == 0 {
                series.label("acceptance limits").legend(|(x, y)| {
                    EmptyElement::at((x, y))
                        + PathElement::new(vec![(0, 0), (7, 0)], REFERENCE.stroke_width(1))
                        + PathElement::new(vec![(11, 0), (18, 0)], REFERENCE.stroke_width(1))
                });
            }
        }
        let bars: Vec<(i32, f64, f64)> = runs
            .iter()
            .filter_map(|(i, r)| {
                let se = r.std_error.filter(|s| s.is_finite() && *s > 0.0)?;
                Some((i32::try_from(*i).ok()?, r.value - se, r.value + se))
            })
            .collect();
        let stems = bars
            .iter()
            .map(|(i, lo, hi)| PathElement::new(vec![(*i, *lo), (*i, *hi)], DATA.stroke_width(1)));
        chart.draw_series(stems).map_err(plot_error(PLOT))?;
        let caps = bars.iter().flat_map(|(i, lo, hi)| {
            [*lo, *hi].map(|v| {
                EmptyElement::at((*i, v))
                    + PathElement::new(vec![(-5, 0), (5, 0)], DATA.stroke_width(1))
            })
        });
        chart.draw_series(caps).map_err(plot_error(PLOT))?;
        let earlier = runs
            .iter()
            .filter(|(_, r)| !r.current)
            .filter_map(|(i, r)| {
                Some(Circle::new(
                    (i32::try_from(*i).ok()?, r.value),
                    4,
                    DATA.filled(),
                ))
            });
        chart
            .draw_series(earlier)
            .map_err(plot_error(PLOT))?
            .label("earlier runs (± 1 SE)")
            .legend(|(x, y)| Circle::new((x + 9, y), 4, DATA.filled()));
        let current = runs.iter().filter(|(_, r)| r.current).filter_map(|(i, r)| {
            Some(Circle::new(
                (i32::try_from(*i).ok()?, r.value),
                6,
                FIT.filled(),
            ))
        });
        chart
            .draw_series(current)
            .map_err(plot_error(PLOT))?
            .label("this run")
            .legend(|(x, y)| Circle::new((x + 9, y), 6, FIT.filled()));
        let placed: Vec<(f64, f64)> = runs
            .iter()
            .map(|(i, r)| (*i as f64, r.value))
            .chain(limits.iter().flat_map(|v| [(-1.0, *v), (n as f64, *v)]))
            .collect();
        chart
            .configure_series_labels()
            .position(emptiest_corner(&placed, (-1.0, n as f64), y_range))
            .margin(10)
            .legend_area_size(26)
            .background_style(WHITE.mix(0.9))
            .border_style(GRID_BOLD)
            .label_font(label_font(15))
            .draw()
            .map_err(plot_error(PLOT))?;
        finish(&root, PLOT)?;
    }
    Ok(rendered(svg, n, runs.len(), not_finite))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// x, y, curve x, curve y, band low, band high.
    type Series = (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>);

    fn demo_fit_inputs() -> Series {
        // Invented thermistor-like curve: R = 10000·exp(3900·(1/(T+273.15) − 1/298.15)).
        let model = |t: f64| 10_000.0 * (3900.0 * (1.0 / (t + 273.15) - 1.0 / 298.15)).exp();
        let x: Vec<f64> = (0..21).map(|i| -20.0 + 4.0 * i as f64).collect();
        let y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(i, t)| model(*t) * (1.0 + 0.002 * ((i * 7 % 5) as f64 - 2.0)))
            .collect();
        let cx: Vec<f64> = (0..=100).map(|i| -20.0 + 0.8 * i as f64).collect();
        let cy: Vec<f64> = cx.iter().map(|t| model(*t)).collect();
        let lo: Vec<f64> = cy.iter().map(|v| v * 0.995).collect();
        let hi: Vec<f64> = cy.iter().map(|v| v * 1.005).collect();
        (x, y, cx, cy, lo, hi)
    }

    #[test]
    fn fit_plot_has_axis_titles_with_units_and_is_deterministic() {
        let (x, y, cx, cy, lo, hi) = demo_fit_inputs();
        let input = FitPlot {
            x: &x,
            y: &y,
            curve_x: &cx,
            curve_y: &cy,
            confidence: Some(Band {
                lower: &lo,
                upper: &hi,
                label: "95 % confidence band",
            }),
            prediction: None,
            x_axis: AxisLabel::new("T", Some("°C")),
            y_axis: AxisLabel::new("R", Some("Ω")),
        };
        let a = fit_plot(&input).expect("draws");
        let b = fit_plot(&input).expect("draws");
        assert_eq!(a.svg, b.svg);
        let svg = a.svg.as_str();
        assert!(svg.starts_with("<svg"), "{}", &svg[..40.min(svg.len())]);
        assert!(svg.contains("T (°C)"));
        assert!(svg.contains("R (Ω)"));
        assert!(svg.contains("<polygon"), "band drawn as a polygon");
        assert_eq!(
            svg.matches("<circle").count(),
            21 + 1,
            "21 points + legend marker"
        );
        assert_eq!(a.points_drawn, 21);
        assert!(a.drawing_note().is_none());
    }

    #[test]
    fn text_drawn_in_plots_is_escaped() {
        let x = [1.0, 2.0, 3.0];
        let r = [0.1, -0.2, 0.1];
        let out = residual_plot(&ResidualPlot {
            x: &x,
            residuals: &r,
            x_axis: AxisLabel::new("<script>alert(1)</script>", Some("\"><img onerror=x>")),
            y_axis: AxisLabel::new("residual", None),
        })
        .expect("draws");
        assert!(!out.svg.as_str().contains("<script"));
        assert!(!out.svg.as_str().contains("<img"));
        assert!(out.svg.as_str().contains("&lt;script&gt;"));
    }

    #[test]
    fn large_scatter_is_decimated_deterministically_and_says_so() {
        let n = 200_000;
        let x: Vec<f64> = (0..n).map(|i| i as f64 / n as f64).collect();
        let r: Vec<f64> = (0..n)
            .map(|i| ((i * 7919) % 1000) as f64 / 1000.0 - 0.5)
            .collect();
        let input = ResidualPlot {
            x: &x,
            residuals: &r,
            x_axis: AxisLabel::new("x", None),
            y_axis: AxisLabel::new("residual", None),
        };
        let a = residual_plot(&input).expect("draws");
        let b = residual_plot(&input).expect("draws");
        assert_eq!(a.svg, b.svg);
        assert!(a.points_drawn < n / 4, "drawn {}", a.points_drawn);
        // Plot area is at most WIDTH×HEIGHT, so at most that many cells.
        let cells =
            (WIDTH as usize / CELL_PX as usize + 1) * (HEIGHT as usize / CELL_PX as usize + 1);
        assert!(a.points_drawn <= cells);
        let note = a.drawing_note().expect("decimation noted");
        assert!(note.contains("of 200000 points drawn"), "{note}");
    }

    #[test]
    fn non_finite_points_are_left_out_and_counted() {
        let x = [1.0, 2.0, f64::NAN, 4.0];
        let y = [1.0, f64::INFINITY, 3.0, 4.0];
        let out = linearized_plot(&LinearizedPlot {
            x: &x,
            y: &y,
            line_x: &[0.0, 5.0],
            line_y: &[0.0, 5.0],
            x_axis: AxisLabel::new("u", None),
            y_axis: AxisLabel::new("v", None),
        })
        .expect("draws");
        assert_eq!(out.points_drawn, 2);
        assert_eq!(out.points_not_finite, 2);
        assert!(
            out.drawing_note()
                .expect("noted")
                .contains("2 points with a non-finite")
        );
    }

    #[test]
    fn mismatched_lengths_and_empty_input_are_errors_not_panics() {
        let err = residual_plot(&ResidualPlot {
            x: &[1.0, 2.0],
            residuals: &[1.0],
            x_axis: AxisLabel::new("x", None),
            y_axis: AxisLabel::new("r", None),
        })
        .expect_err("lengths differ");
        assert!(
            err.to_string().contains("lengths differ (2 and 1)"),
            "{err}"
        );
        assert!(
            normal_probability_plot(&NormalPlot {
                residuals: &[f64::NAN],
                y_axis: AxisLabel::new("r", None)
            })
            .is_err()
        );
        assert!(
            trend_plot(&TrendPlot {
                runs: &[],
                y_axis: AxisLabel::new("B", None),
                min: None,
                max: None
            })
            .is_err()
        );
    }

    #[test]
    fn normal_scores_are_symmetric_blom_positions() {
        let s = normal_scores(5);
        // Blom positions for n = 5: (1 − 0.375)/5.25 = 0.119048 → z = −1.1798
        // (standard normal table value, from memory).
        assert!((s[0] + 1.1798).abs() < 1e-3, "{}", s[0]);
        assert!((s[0] + s[4]).abs() < 1e-12);
        assert!(s[2].abs() < 1e-12);
    }

    #[test]
    fn quantiles_interpolate_between_order_statistics() {
        let v = [1.0, 2.0, 3.0, 4.0];
        // Type 7: h = 3·0.25 = 0.75 → 1 + 0.75·(2 − 1) = 1.75.
        assert_eq!(quantile_sorted(&v, 0.25), Some(1.75));
        assert_eq!(quantile_sorted(&v, 0.75), Some(3.25));
        assert_eq!(quantile_sorted(&[], 0.5), None);
    }

    #[test]
    fn trend_plot_marks_the_current_run_and_limits() {
        let runs = vec![
            TrendPoint {
                label: "2025-12-01".into(),
                value: 3905.0,
                std_error: Some(9.0),
                current: false,
            },
            TrendPoint {
                label: "2026-03-02".into(),
                value: 3911.0,
                std_error: Some(8.5),
                current: false,
            },
            TrendPoint {
                label: "2026-06-01".into(),
                value: 3902.0,
                std_error: None,
                current: false,
            },
            TrendPoint {
                label: "2026-11-28".into(),
                value: 3918.0,
                std_error: Some(7.9),
                current: true,
            },
        ];
        let out = trend_plot(&TrendPlot {
            runs: &runs,
            y_axis: AxisLabel::new("B", Some("K")),
            min: Some(3800.0),
            max: Some(4000.0),
        })
        .expect("draws");
        let svg = out.svg.as_str();
        assert!(svg.contains("2026-11-28"));
        assert!(svg.contains("this run"));
        assert!(svg.contains("acceptance limits"));
        assert_eq!(
            svg.matches("acceptance limits").count(),
            1,
            "one legend entry"
        );
        assert!(svg.contains("B (K)"));
    }

    #[test]
    fn into_plot_checks_the_name_and_adds_a_title() {
        let out = residual_plot(&ResidualPlot {
            x: &[1.0, 2.0, 3.0],
            residuals: &[0.1, -0.1, 0.0],
            x_axis: AxisLabel::new("x", None),
            y_axis: AxisLabel::new("r", None),
        })
        .expect("draws");
        assert!(out.clone().into_plot("../evil", "t", None).is_err());
        assert!(out.clone().into_plot("", "t", None).is_err());
        let plot = out
            .into_plot("residuals-t", "Residuals <vs> T", Some("Zero line dashed."))
            .expect("ok");
        assert!(
            plot.svg
                .as_str()
                .contains("<title>Residuals &lt;vs&gt; T</title>")
        );
        assert_eq!(plot.caption.as_deref(), Some("Zero line dashed."));
    }

    #[test]
    fn inline_rounding_matches_round_then_as_i32() {
        let half = 0.5f64;
        let below_half = f64::from_bits(half.to_bits() - 1);
        let mut cases = vec![
            0.0,
            -0.0,
            half,
            -half,
            below_half,
            -below_half,
            1.5,
            -1.5,
            2.5,
            -2.5,
            2.499_999_999_999_999_6,
            -7.5,
            123.456,
            -123.456,
            1_999_999_999.5,
            -1_999_999_999.5,
            2e9,
            -2e9,
            2_000_000_000.7,
            -2_000_000_000.7,
            2_147_483_646.5,
            2_147_483_647.0,
            2_147_483_647.49,
            2_147_483_647.5,
            -2_147_483_648.0,
            -2_147_483_648.49,
            -2_147_483_648.5,
            -2_147_483_649.0,
            3.99e9,
            -3.99e9,
            4.0e9,
            -4.0e9,
            1e300,
            -1e300,
            f64::MIN_POSITIVE,
            -f64::MIN_POSITIVE,
            f64::NAN,
            -f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::MAX,
            f64::MIN,
        ];
        // Every tie and its two neighbours in ULPs over a pixel range, and a deterministic
        // sweep of fractions.
        for k in -2000..2000 {
            let tie = f64::from(k) + 0.5;
            cases.extend([
                tie,
                f64::from_bits(tie.to_bits() + 1),
                f64::from_bits(tie.to_bits() - 1),
            ]);
            cases.push(f64::from(k) * 0.123_456_789);
        }
        for v in cases {
            assert_eq!(
                round_to_i32(v),
                v.round() as i32,
                "{v:e} ({:#x})",
                v.to_bits()
            );
        }
    }

    #[test]
    fn cell_of_matches_div_euclid() {
        let edges = [
            i32::MIN,
            i32::MIN + 1,
            i32::MIN + 2,
            i32::MAX - 2,
            i32::MAX - 1,
            i32::MAX,
        ];
        for px in (-3000..3000).chain(edges) {
            assert_eq!(cell_of(px), px.div_euclid(CELL_PX), "{px}");
        }
    }

    #[test]
    fn points_are_written_as_the_backend_writes_them() {
        // Points inside, on the edges of and outside the plot area, at fractional pixels.
        let points: Vec<(f64, f64)> = (0..500)
            .map(|i| {
                let t = f64::from(i) * 0.013;
                (t * 1.7 - 0.4, (t * 3.1).sin() * 1.3)
            })
            .collect();
        let draw = |fast: bool| -> String {
            let mut svg = String::new();
            let drawing;
            {
                let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
                let x_axis = AxisLabel::new("x", None);
                let y_axis = AxisLabel::new("y", None);
                let mut chart =
                    frame(&root, "test", (0.0, 8.0), (-1.2, 1.2), &x_axis, &y_axis).expect("frame");
                if fast {
                    drawing = Some(
                        draw_points(&mut chart, "test", &points, Some("data")).expect("points"),
                    );
                } else {
                    chart
                        .draw_series(
                            points
                                .iter()
                                .map(|p| Circle::new(*p, 3, DATA.mix(0.85).stroke_width(1))),
                        )
                        .expect("series")
                        .label("data")
                        .legend(|(x, y)| Circle::new((x + 9, y), 3, DATA.stroke_width(1)));
                    drawing = None;
                }
                draw_legend(&mut chart, "test", SeriesLabelPosition::UpperLeft).expect("legend");
                finish(&root, "test").expect("finish");
            }
            if let Some(d) = drawing {
                d.splice(&mut svg).expect("splice");
            }
            svg
        };
        let (backend, ours) = (draw(false), draw(true));
        // Every point and the legend's circle.
        assert_eq!(backend.matches("<circle").count(), points.len() + 1);
        assert_eq!(ours, backend);
    }

    #[test]
    fn monotone_decimation_keeps_the_points_of_the_full_decimation() {
        // Sorted heavy-tailed residuals against their normal scores, as the normal
        // probability plot draws them, and a monotone staircase with long flat runs.
        let n = 200_000;
        let mut r: Vec<f64> = (0..n)
            .map(|i| {
                let u = ((i as u64 * 2_654_435_761) % 1_000_003) as f64 / 1_000_003.0 - 0.5;
                u / (0.51 - u.abs())
            })
            .collect();
        r.sort_unstable_by(f64::total_cmp);
        let scores = normal_scores(n);
        let stairs: Vec<f64> = (0..n).map(|i| (i / 5000) as f64).collect();
        for ys in [&r, &stairs] {
            let points: Vec<(f64, f64)> = scores.iter().copied().zip(ys.iter().copied()).collect();
            let x_range = padded_range(scores.iter()).expect("finite");
            let y_range = padded_range(ys.iter()).expect("finite");
            let mut svg = String::new();
            let root = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT)).into_drawing_area();
            let x_axis = AxisLabel::new("normal score", None);
            let y_axis = AxisLabel::new("residual", None);
            let chart = frame(&root, "test", x_range, y_range, &x_axis, &y_axis).expect("frame");
            let full = decimate(&chart, &points);
            let fast = decimate_monotone(&chart, n, |i| points[i]);
            assert!(full.len() > 100 && full.len() < n / 100, "{}", full.len());
            assert_eq!(full, fast);
        }
    }

    #[test]
    fn normal_scores_do_not_decrease_with_the_rank() {
        // What `decimate_monotone` relies on, checked over sizes around the decimation
        // threshold and one large set.
        for n in [DECIMATE_ABOVE + 1, 12_345, 100_000, 1_000_000] {
            let s = normal_scores(n);
            assert!(s.windows(2).all(|w| w[0] <= w[1]), "n = {n}");
        }
    }

    #[test]
    fn stride_keeps_first_and_last() {
        let v: Vec<usize> = (0..5001).collect();
        let s = stride(&v);
        assert!(s.len() <= CURVE_MAX);
        assert_eq!(s.first(), Some(&0));
        assert_eq!(s.last(), Some(&5000));
        assert_eq!(tick_label(0.30000000000000004), "0.3");
        assert_eq!(tick_label(10000.0), "10000");
        assert_eq!(tick_label(2e-6), "2e-6");
    }
}
