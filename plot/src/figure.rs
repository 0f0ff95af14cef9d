//! The figure model that both renderers draw, and the axis scales computed from it.
//!
//! Recipes fill panels with series in customary units; [`Figure::finish`] then drops what
//! cannot be drawn (non-finite values, non-positive values on a log axis), picks an SI prefix
//! for linear conductance and resistance axes, and fixes every axis's range and ticks once,
//! so that the SVG and the Vega-Lite specification show the same ranges, ticks and values.

use crate::units::{parse_markup, Script};

/// Marker shapes, cycled per series; distinct outlines keep series apart in grey print.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Shape {
    Circle,
    Square,
    TriangleUp,
    Diamond,
    TriangleDown,
    Cross,
}

pub(crate) const SHAPES: [Shape; 6] = [
    Shape::Circle,
    Shape::Square,
    Shape::TriangleUp,
    Shape::Diamond,
    Shape::TriangleDown,
    Shape::Cross,
];

/// Line patterns: solid for data and total fits, the others for model terms and bounds.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Dash {
    Solid,
    Dashed,
    Dotted,
    Chain,
    Long,
}

impl Dash {
    /// The SVG `stroke-dasharray` (and Vega-Lite `strokeDash`) pattern, in pixels.
    pub fn pattern(self) -> Option<&'static [u32]> {
        match self {
            Dash::Solid => None,
            Dash::Dashed => Some(&[7, 4]),
            Dash::Dotted => Some(&[2, 3]),
            Dash::Chain => Some(&[8, 3, 2, 3]),
            Dash::Long => Some(&[14, 5]),
        }
    }
}

/// How a series is drawn.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Mark {
    /// Markers, open or filled; open ones mark points left out of a fit.
    Points { shape: Shape, filled: bool },
    /// A polyline, broken where a value cannot be drawn.
    Line { dash: Dash, width: f64 },
}

/// The palette: eight hues told apart with the common forms of colour blindness and still
/// distinct in luminance when printed grey (dark blue, orange, teal, magenta, ochre, sky,
/// vermilion, slate).
pub(crate) const PALETTE: [&str; 8] = [
    "#1f4e9c", "#e08a00", "#138a72", "#b0397f", "#8a6d00", "#4aa3d8", "#c8491d", "#555f6b",
];

/// One plotted value with optional 1-sigma error bars, in displayed units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Point {
    pub x: f64,
    pub y: f64,
    pub x_err: Option<f64>,
    pub y_err: Option<f64>,
}

impl Point {
    pub fn new(x: f64, y: f64) -> Point {
        Point {
            x,
            y,
            x_err: None,
            y_err: None,
        }
    }

    pub fn with_y_err(mut self, err: Option<f64>) -> Point {
        self.y_err = err;
        self
    }
}

/// One series: its legend name, colour index, mark and points. After [`Figure::finish`],
/// `runs` holds the drawable points: one run for markers, the unbroken stretches for lines.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Series {
    pub name: String,
    pub color: usize,
    pub mark: Mark,
    pub points: Vec<Point>,
    pub runs: Vec<Vec<Point>>,
    /// A line that sets the y range as measured points do (see [`extents`]): the Landau
    /// fan's line, whose value at 1/B = 0 is read off the figure.
    pub sets_range: bool,
}

impl Series {
    pub fn points(name: impl Into<String>, color: usize, shape: Shape, filled: bool, points: Vec<Point>) -> Series {
        Series {
            name: name.into(),
            color,
            mark: Mark::Points { shape, filled },
            points,
            runs: Vec::new(),
            sets_range: false,
        }
    }

    /// A line through `points` in order of x: fitted curves and model terms are functions of x.
    pub fn line(name: impl Into<String>, color: usize, dash: Dash, mut points: Vec<Point>) -> Series {
        points.sort_by(|a, b| a.x.total_cmp(&b.x));
        Series {
            name: name.into(),
            color,
            mark: Mark::Line { dash, width: 1.8 },
            points,
            runs: Vec::new(),
            sets_range: false,
        }
    }

    /// The same series, setting the y range even as a line beside measured points.
    pub fn setting_range(mut self) -> Series {
        self.sets_range = true;
        self
    }

    pub fn is_line(&self) -> bool {
        matches!(self.mark, Mark::Line { .. })
    }

    pub fn drawn_points(&self) -> usize {
        self.runs.iter().map(Vec::len).sum()
    }
}

/// The order in which both renderers draw a panel's series: markers (with their error bars)
/// first, lines after them, so that a fitted line is never hidden under the points it was
/// fitted to. Within each, the recipe's order.
pub(crate) fn drawing_order(series: &[Series]) -> Vec<&Series> {
    let mut order: Vec<&Series> = series.iter().filter(|s| !s.is_line()).collect();
    order.extend(series.iter().filter(|s| s.is_line()));
    order
}

/// An axis title: the quantity and its unit, both in markup.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Label {
    pub text: String,
    pub unit: Option<String>,
}

impl Label {
    pub fn new(text: impl Into<String>, unit: Option<&str>) -> Label {
        Label {
            text: text.into(),
            unit: unit.map(str::to_owned),
        }
    }

    /// "quantity (unit)", in markup.
    pub fn markup(&self) -> String {
        match &self.unit {
            Some(unit) if !unit.is_empty() => format!("{} ({unit})", self.text),
            _ => self.text.clone(),
        }
    }
}

/// What a recipe asks of an axis.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct AxisSpec {
    pub label: Label,
    pub log: bool,
}

impl AxisSpec {
    pub fn new(text: impl Into<String>, unit: Option<&str>, log: bool) -> AxisSpec {
        AxisSpec {
            label: Label::new(text, unit),
            log,
        }
    }
}

/// One tick: its value, whether it is major, and its label (markup) if it has one.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Tick {
    pub value: f64,
    pub major: bool,
    pub label: Option<String>,
}

/// An axis as drawn: range, ticks, and the mapping of values onto [0, 1].
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Scale {
    pub log: bool,
    pub lo: f64,
    pub hi: f64,
    pub ticks: Vec<Tick>,
}

impl Scale {
    /// The position of `value` along the axis, 0 at `lo` and 1 at `hi`.
    pub fn fraction(&self, value: f64) -> f64 {
        if self.log {
            (value.log10() - self.lo.log10()) / (self.hi.log10() - self.lo.log10())
        } else {
            (value - self.lo) / (self.hi - self.lo)
        }
    }

    /// The lower end of an error bar, kept inside a log axis (a bar reaching zero or below
    /// is drawn down to the axis).
    pub fn lower(&self, value: f64, err: f64) -> f64 {
        let low = value - err;
        if self.log && low <= self.lo {
            self.lo
        } else {
            low
        }
    }

    pub fn upper(&self, value: f64, err: f64) -> f64 {
        value + err
    }
}

/// One panel: a pair of axes and the series drawn on them.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Panel {
    pub title: Option<String>,
    pub x: AxisSpec,
    pub y: AxisSpec,
    pub series: Vec<Series>,
    pub x_scale: Scale,
    pub y_scale: Scale,
}

impl Panel {
    pub fn new(title: Option<String>, x: AxisSpec, y: AxisSpec, series: Vec<Series>) -> Panel {
        let placeholder = Scale {
            log: false,
            lo: 0.0,
            hi: 1.0,
            ticks: Vec::new(),
        };
        Panel {
            title,
            x,
            y,
            series,
            x_scale: placeholder.clone(),
            y_scale: placeholder,
        }
    }

    /// Distinct legend entries in order of first appearance.
    pub fn legend(&self) -> Vec<&Series> {
        let mut entries: Vec<&Series> = Vec::new();
        for series in &self.series {
            if series.drawn_points() > 0 && !entries.iter().any(|e| e.name == series.name) {
                entries.push(series);
            }
        }
        entries
    }
}

/// A figure of one or more panels, ready to render.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    pub(crate) kind: String,
    pub(crate) title: String,
    pub(crate) panels: Vec<Panel>,
    /// Size of one panel in pixels; a figure of several panels tiles them.
    pub(crate) panel_width: f64,
    pub(crate) panel_height: f64,
}

impl Figure {
    /// The recipe that built the figure.
    pub fn kind(&self) -> &str {
        &self.kind
    }

    pub fn title(&self) -> &str {
        &self.title
    }

    /// Panels per row: one, or two side by side, never more, so that a figure of several
    /// panels stays about 1000 px wide and its text legible there.
    pub(crate) fn columns(&self) -> usize {
        match self.panels.len() {
            0 | 1 => 1,
            _ => 2,
        }
    }

    pub(crate) fn rows(&self) -> usize {
        self.panels.len().div_ceil(self.columns())
    }

    /// Cleans the series and fixes the scales; false when no panel has a drawable point.
    pub(crate) fn finish(&mut self) -> bool {
        let mut any = false;
        for panel in &mut self.panels {
            for series in &mut panel.series {
                series.runs = drawable_runs(series, panel.x.log, panel.y.log);
            }
            let count = |lines: bool| -> usize {
                panel
                    .series
                    .iter()
                    .filter(|s| s.is_line() == lines)
                    .map(Series::drawn_points)
                    .sum()
            };
            let (markers, vertices) = (count(false), count(true));
            for series in &mut panel.series {
                // Each series gets the share of the panel's budget that its size earns, and
                // never more than a series of its own may draw.
                let (panel_total, panel_budget, own_budget) = if series.is_line() {
                    (vertices, MAX_PANEL_VERTICES, MAX_LINE_VERTICES)
                } else {
                    (markers, MAX_PANEL_MARKERS, MAX_MARKERS)
                };
                let share = (panel_budget as f64 * series.drawn_points() as f64 / panel_total.max(1) as f64) as usize;
                thin(series, share.clamp(2, own_budget));
            }
            if !panel.y.log {
                apply_prefix(&mut panel.y.label, &mut panel.series, Axis::Y);
            }
            if !panel.x.log {
                apply_prefix(&mut panel.x.label, &mut panel.series, Axis::X);
            }
            let (xs, ys) = extents(&panel.series);
            any |= !xs.is_empty() && !ys.is_empty();
            panel.x_scale = scale(&xs, panel.x.log);
            panel.y_scale = scale(&ys, panel.y.log);
        }
        any
    }
}

/// The most markers one series draws. Above it an evenly spaced subset is drawn and the
/// legend says so: 4000 markers already cover a panel, while the markers of a million
/// readings would make an SVG of tens of megabytes that no browser lays out quickly. The
/// dataset keeps every value.
pub(crate) const MAX_MARKERS: usize = 4000;

/// The most vertices of one line. Above it, each bucket of consecutive vertices keeps its
/// lowest and highest value, in their order, so that narrow peaks (an FFT line) survive.
pub(crate) const MAX_LINE_VERTICES: usize = 8000;

/// The most markers and line vertices of one panel, all series together: a hundred samples
/// of 625 temperatures each would otherwise make a 17 MB figure.
pub(crate) const MAX_PANEL_MARKERS: usize = 12_000;
pub(crate) const MAX_PANEL_VERTICES: usize = 24_000;

/// Thins a series to at most `budget` markers, or about `budget` line vertices.
fn thin(series: &mut Series, budget: usize) {
    let total = series.drawn_points();
    if total <= budget {
        return;
    }
    if series.is_line() {
        let buckets = (budget / 2).max(1);
        for run in &mut series.runs {
            let share = (buckets * run.len()).div_ceil(total).max(1);
            *run = min_max_decimate(run, share);
        }
    } else {
        let stride = total.div_ceil(budget);
        for run in &mut series.runs {
            *run = run.iter().step_by(stride).copied().collect();
        }
        series.name = format!("{} (1 in {stride} of {total} shown)", series.name);
    }
}

/// At most two points (the lowest and the highest y, in their order) from each of
/// `buckets` runs of consecutive points.
fn min_max_decimate(run: &[Point], buckets: usize) -> Vec<Point> {
    if run.len() <= 2 * buckets {
        return run.to_vec();
    }
    let size = run.len().div_ceil(buckets);
    let mut kept = Vec::with_capacity(2 * buckets);
    for chunk in run.chunks(size) {
        let by_y = |a: &(usize, &Point), b: &(usize, &Point)| a.1.y.total_cmp(&b.1.y);
        let low = chunk.iter().enumerate().min_by(by_y).map_or(0, |(i, _)| i);
        let high = chunk.iter().enumerate().max_by(by_y).map_or(0, |(i, _)| i);
        kept.push(chunk[low.min(high)]);
        if low != high {
            kept.push(chunk[low.max(high)]);
        }
    }
    kept
}

/// The stretches of a series that can be drawn: finite, and positive on a log axis. Error
/// bars that are not finite and positive are dropped, not the point.
fn drawable_runs(series: &Series, log_x: bool, log_y: bool) -> Vec<Vec<Point>> {
    let ok = |v: f64, log: bool| v.is_finite() && (!log || v > 0.0);
    let err = |e: Option<f64>| e.filter(|e| e.is_finite() && *e > 0.0);
    let mut runs: Vec<Vec<Point>> = vec![Vec::new()];
    for point in &series.points {
        if ok(point.x, log_x) && ok(point.y, log_y) {
            runs.last_mut().expect("one run").push(Point {
                x: point.x,
                y: point.y,
                x_err: err(point.x_err),
                y_err: err(point.y_err),
            });
        } else if series.is_line() && !runs.last().expect("one run").is_empty() {
            runs.push(Vec::new());
        }
    }
    runs.retain(|run| !run.is_empty());
    runs
}

#[derive(Clone, Copy)]
enum Axis {
    X,
    Y,
}

/// Units that take an SI prefix on a linear axis, so that a sheet conductance of 2e-3 S
/// reads 2 mS rather than 0.002.
const PREFIXABLE: [&str; 4] = ["S", "Ω", "Ω/sq", "V"];

fn apply_prefix(label: &mut Label, series: &mut [Series], axis: Axis) {
    let Some(unit) = label.unit.clone().filter(|u| PREFIXABLE.contains(&u.as_str())) else {
        return;
    };
    let value = |p: &Point| match axis {
        Axis::X => p.x.abs() + p.x_err.unwrap_or(0.0),
        Axis::Y => p.y.abs() + p.y_err.unwrap_or(0.0),
    };
    let largest = series
        .iter()
        .flat_map(|s| s.runs.iter().flatten())
        .map(value)
        .fold(0.0, f64::max);
    if largest <= 0.0 {
        return;
    }
    let (factor, prefix) = [(1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"), (1e-9, "n")]
        .into_iter()
        .find(|(factor, _)| largest >= *factor)
        .unwrap_or((1e-12, "p"));
    if factor == 1.0 {
        return;
    }
    for point in series.iter_mut().flat_map(|s| s.runs.iter_mut().flatten()) {
        match axis {
            Axis::X => {
                point.x /= factor;
                point.x_err = point.x_err.map(|e| e / factor);
            }
            Axis::Y => {
                point.y /= factor;
                point.y_err = point.y_err.map(|e| e / factor);
            }
        }
    }
    label.unit = Some(format!("{prefix}{unit}"));
}

/// Every x and y that must fit on the axes, error bars included (on a log axis only their
/// positive ends). When a panel has measured points, they alone set the y range: a fitted
/// curve drawn beside them (a Lifshitz-Kosevich fit extrapolated to where the signal is
/// gone, say) is clipped to the plot area rather than stretching it over decades of nothing.
fn extents(series: &[Series]) -> (Vec<f64>, Vec<f64>) {
    let has_points = series.iter().any(|s| !s.is_line() && s.drawn_points() > 0);
    let (mut xs, mut ys) = (Vec::new(), Vec::new());
    for s in series {
        let sets_y = !has_points || !s.is_line() || s.sets_range;
        for point in s.runs.iter().flatten() {
            xs.push(point.x);
            if let Some(e) = point.x_err {
                xs.extend([point.x - e, point.x + e]);
            }
            if sets_y {
                ys.push(point.y);
                if let Some(e) = point.y_err {
                    ys.extend([point.y - e, point.y + e]);
                }
            }
        }
    }
    (xs, ys)
}

fn scale(values: &[f64], log: bool) -> Scale {
    if log {
        let positive: Vec<f64> = values.iter().copied().filter(|v| *v > 0.0 && v.is_finite()).collect();
        let lo = positive.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = positive.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if positive.is_empty() {
            return log_scale(1.0, 10.0);
        }
        log_scale(lo, hi)
    } else {
        let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
        if finite.is_empty() {
            return linear_scale(0.0, 1.0);
        }
        let lo = finite.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = finite.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        linear_scale(lo, hi)
    }
}

/// A 1, 2 or 5 times a power of ten at or above `raw`.
pub(crate) fn nice_step(raw: f64) -> f64 {
    let exponent = raw.log10().floor();
    let base = 10f64.powf(exponent);
    let mantissa = raw / base;
    let nice = if mantissa <= 1.0 + 1e-9 {
        1.0
    } else if mantissa <= 2.0 + 1e-9 {
        2.0
    } else if mantissa <= 5.0 + 1e-9 {
        5.0
    } else {
        10.0
    };
    nice * base
}

/// A linear axis over [lo, hi] padded by 3 %, extended to whole steps of 1, 2 or 5 times a
/// power of ten, with about five to ten labelled ticks.
pub(crate) fn linear_scale(lo: f64, hi: f64) -> Scale {
    let (mut lo, mut hi) = (lo, hi);
    if hi <= lo {
        let half = if lo == 0.0 { 1.0 } else { 0.1 * lo.abs() };
        lo -= half;
        hi += half;
    }
    let pad = 0.03 * (hi - lo);
    // Do not pad a range that starts at zero below it: MR and densities start there.
    let lo_padded = if lo >= 0.0 && lo - pad < 0.0 { 0.0 } else { lo - pad };
    let hi_padded = hi + pad;
    let step = nice_step((hi_padded - lo_padded) / 6.0);
    let lo = (lo_padded / step).floor() * step;
    let hi = (hi_padded / step).ceil() * step;
    let count = ((hi - lo) / step).round() as i64;
    let ticks = (0..=count)
        .map(|k| {
            let mut value = lo + k as f64 * step;
            if value.abs() < 1e-9 * step {
                value = 0.0;
            }
            Tick {
                value,
                major: true,
                label: Some(format_linear(value, step)),
            }
        })
        .collect();
    Scale {
        log: false,
        lo,
        hi,
        ticks,
    }
}

/// A log axis over whole decades enclosing [lo, hi]: major ticks at the decades labelled
/// 10^n (every k-th decade when there are many), minor ticks at 2..9 times each decade.
pub(crate) fn log_scale(lo: f64, hi: f64) -> Scale {
    let mut first = (lo.log10() + 1e-9).floor() as i32;
    let mut last = (hi.log10() - 1e-9).ceil() as i32;
    if last <= first {
        last = first + 1;
    }
    if last - first > 60 {
        first = last - 60;
    }
    let decades = last - first;
    let every = ((decades as f64) / 8.0).ceil().max(1.0) as i32;
    let mut ticks = Vec::new();
    for n in first..=last {
        ticks.push(Tick {
            value: 10f64.powi(n),
            major: true,
            label: ((n - first) % every == 0).then(|| format!("10^{{{}}}", minus(&n.to_string()))),
        });
        if n < last && decades <= 8 {
            for m in 2..=9 {
                ticks.push(Tick {
                    value: m as f64 * 10f64.powi(n),
                    major: false,
                    label: None,
                });
            }
        }
    }
    Scale {
        log: true,
        lo: 10f64.powi(first),
        hi: 10f64.powi(last),
        ticks,
    }
}

/// The typographic minus in place of a hyphen.
pub(crate) fn minus(text: &str) -> String {
    text.replace('-', "−")
}

/// A tick value with as many decimals as the step needs; very large or small values as
/// m×10^e (markup).
pub(crate) fn format_linear(value: f64, step: f64) -> String {
    if value == 0.0 {
        return "0".into();
    }
    let magnitude = value.abs().max(step);
    if !(1e-3..1e5).contains(&magnitude) {
        let exponent = value.abs().log10().floor() as i32;
        let mantissa = value / 10f64.powi(exponent);
        let step_exponent = step.log10().floor() as i32;
        let decimals = (exponent - step_exponent).clamp(0, 6) as usize;
        let text = trim_decimals(&format!("{mantissa:.decimals$}"));
        return minus(&format!("{text}×10^{{{exponent}}}"));
    }
    let decimals = (-(step.log10() + 1e-9).floor()).clamp(0.0, 9.0) as usize;
    minus(&format!("{value:.decimals$}"))
}

fn trim_decimals(text: &str) -> String {
    if text.contains('.') {
        text.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        text.to_owned()
    }
}

/// A number for legends and group labels: four significant digits, no trailing zeros.
pub(crate) fn format_value(value: f64) -> String {
    if value == 0.0 || !value.is_finite() {
        return format!("{value}");
    }
    let magnitude = value.abs().log10().floor() as i32;
    if !(-3..6).contains(&magnitude) {
        return minus(&format!("{value:.3e}"));
    }
    let decimals = (3 - magnitude).clamp(0, 9) as usize;
    minus(&trim_decimals(&format!("{value:.decimals$}")))
}

/// Rough width of markup text at a font size: enough to lay out legends and margins.
pub(crate) fn text_width(markup: &str, font_size: f64) -> f64 {
    parse_markup(markup)
        .iter()
        .map(|(script, run)| {
            let scale = if *script == Script::Normal { 1.0 } else { 0.7 };
            run.chars().count() as f64 * 0.58 * font_size * scale
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn large_series_are_thinned_and_lines_keep_their_peaks() {
        let many: Vec<Point> = (0..100_000).map(|i| Point::new(i as f64, (i % 7) as f64)).collect();
        let mut markers = Series::points("readings", 0, SHAPES[0], true, many.clone());
        markers.runs = drawable_runs(&markers, false, false);
        thin(&mut markers, MAX_MARKERS);
        assert!(markers.drawn_points() <= MAX_MARKERS, "{}", markers.drawn_points());
        assert_eq!(markers.name, "readings (1 in 25 of 100000 shown)");

        // A flat line with one narrow spike: the spike's vertex survives the thinning.
        let mut spiky: Vec<Point> = (0..100_000).map(|i| Point::new(i as f64, 1.0)).collect();
        spiky[54_321].y = 500.0;
        let mut line = Series::line("fft", 0, Dash::Solid, spiky);
        line.runs = drawable_runs(&line, false, false);
        thin(&mut line, MAX_LINE_VERTICES);
        assert!(line.drawn_points() <= MAX_LINE_VERTICES, "{}", line.drawn_points());
        let kept: Vec<&Point> = line.runs.iter().flatten().collect();
        assert!(kept.iter().any(|p| p.y == 500.0 && p.x == 54_321.0));
        assert!(kept.windows(2).all(|w| w[0].x < w[1].x), "vertices stay in order");
        assert_eq!(line.name, "fft", "a thinned line looks the same and keeps its name");

        // Small series are left alone.
        let mut few = Series::points("few", 0, SHAPES[0], true, many[..10].to_vec());
        few.runs = drawable_runs(&few, false, false);
        thin(&mut few, MAX_MARKERS);
        assert_eq!(few.drawn_points(), 10);
    }

    #[test]
    fn measured_points_alone_set_the_y_range_beside_a_fitted_curve() {
        let measured = Series::points(
            "data",
            0,
            SHAPES[0],
            true,
            vec![Point::new(2.0, 10.0), Point::new(4.0, 1.0)],
        );
        let fit = Series::line(
            "fit",
            0,
            Dash::Solid,
            vec![Point::new(1.0, 30.0), Point::new(12.0, 1e-12)],
        );
        let [measured, fit] = [measured, fit].map(|mut series| {
            series.runs = drawable_runs(&series, false, true);
            series
        });
        let (xs, ys) = extents(&[measured.clone(), fit.clone()]);
        assert_eq!(ys, vec![10.0, 1.0], "the fit does not stretch the y axis");
        assert!(xs.contains(&12.0) && xs.contains(&1.0), "but it does widen x");
        // A panel of lines only is ranged by its lines.
        let (_, ys) = extents(&[fit]);
        assert_eq!(ys, vec![30.0, 1e-12]);
    }

    #[test]
    fn nice_steps_are_one_two_five() {
        for (raw, nice) in [
            (0.13, 0.2),
            (0.9, 1.0),
            (3.0, 5.0),
            (7.0, 10.0),
            (1.0, 1.0),
            (42.0, 50.0),
        ] {
            assert!((nice_step(raw) - nice).abs() < 1e-12, "{raw}");
        }
    }

    #[test]
    fn linear_ticks_cover_the_data_in_nice_steps() {
        let scale = linear_scale(0.0, 9.3);
        assert_eq!(scale.lo, 0.0);
        assert!(scale.hi >= 9.3);
        let values: Vec<f64> = scale.ticks.iter().map(|t| t.value).collect();
        let step = values[1] - values[0];
        assert!([1.0, 2.0, 5.0].iter().any(|s| (step - s).abs() < 1e-12), "{values:?}");
        let labels: Vec<String> = scale.ticks.iter().map(|t| t.label.clone().unwrap()).collect();
        assert_eq!(labels[0], "0");
        assert!(labels.iter().all(|l| !l.contains('.')), "{labels:?}");
        // Negative values carry a typographic minus; small steps show their decimals.
        let scale = linear_scale(-0.42, 0.13);
        assert!(
            scale.ticks.iter().any(|t| t.label.as_deref() == Some("−0.4")),
            "{:?}",
            scale.ticks
        );
    }

    #[test]
    fn log_ticks_sit_at_decades() {
        let scale = log_scale(3.2e14, 4.0e17);
        assert_eq!((scale.lo, scale.hi), (1e14, 1e18));
        let majors: Vec<&Tick> = scale.ticks.iter().filter(|t| t.major).collect();
        assert_eq!(majors.len(), 5);
        for (tick, n) in majors.iter().zip(14..) {
            assert!((tick.value / 10f64.powi(n) - 1.0).abs() < 1e-12);
            assert_eq!(tick.label.as_deref(), Some(format!("10^{{{n}}}").as_str()));
        }
        // Minor ticks at 2..9 per decade.
        assert_eq!(scale.ticks.iter().filter(|t| !t.major).count(), 4 * 8);
        // Within one decade the axis still spans a whole decade.
        let scale = log_scale(20.0, 80.0);
        assert_eq!((scale.lo, scale.hi), (10.0, 100.0));
        assert_eq!(log_scale(0.05, 0.5).ticks[0].label.as_deref(), Some("10^{−2}"));
    }

    #[test]
    fn values_are_formatted_compactly() {
        assert_eq!(format_value(300.0), "300");
        assert_eq!(format_value(1.23456), "1.235");
        assert_eq!(format_value(4.2e15), "4.200e15");
        assert_eq!(format_linear(2e-6, 1e-6), "2×10^{−6}");
        assert_eq!(format_linear(0.25, 0.05), "0.25");
    }
}
