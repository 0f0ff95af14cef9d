//! The SVG rendering of a [`Figure`]: one self-contained document, no scripts, no external
//! fonts or styles, so that it can be embedded in a report, opened in a browser or printed.
//!
//! The elements carry classes (`plot-area`, `axis x-axis`, `series` with `data-series`,
//! `mark point`, `mark line`, `error-bar`, `legend`) so that tests and browsers can count what
//! was drawn without parsing geometry.

use std::fmt::Write;

use crate::figure::{text_width, Dash, Figure, Mark, Panel, Point, Scale, Shape, PALETTE};
use crate::units::{parse_markup, Script};

const FONT: &str = "'DejaVu Sans', 'Helvetica Neue', Arial, sans-serif";

/// Font sizes in pixels. A figure is drawn at its natural width or narrower in a report
/// (640 px for one panel, 1000 px for two side by side), and no text of it, super- and
/// subscripts ([`SCRIPT_PERCENT`] of their text) included, may be under 10 px there.
pub(crate) const TITLE_FONT: f64 = 16.0;
pub(crate) const MIN_TITLE_FONT: f64 = 12.5;
pub(crate) const PANEL_TITLE_FONT: f64 = 14.0;
pub(crate) const AXIS_TITLE_FONT: f64 = 14.0;
pub(crate) const TICK_FONT: f64 = 13.0;
pub(crate) const LEGEND_FONT: f64 = 12.5;
/// Scripts at 90 % of their text, so that they too stay at 10 px or more where a report draws
/// the figure at its natural width (at 80 % the 12.5 px legend's came out near 9.3 px).
pub(crate) const SCRIPT_PERCENT: f64 = 90.0;
const LEGEND_ROW: f64 = 19.0;
const TITLE_BAND: f64 = 34.0;
const MARGIN_LEFT: f64 = 84.0;
const MARGIN_BOTTOM: f64 = 54.0;
const MARGIN_TOP: f64 = 28.0;
const MARGIN_RIGHT: f64 = 18.0;
const MARKER: f64 = 4.2;
const AXIS_COLOR: &str = "#2b2b2b";
const GRID_COLOR: &str = "#e3e6ea";

/// Escapes text for XML and HTML content and attribute values: the five markup characters
/// become references, and control characters other than newline and tab become spaces
/// (XML 1.0 forbids them, section 2.2). `'` is written `&#39;`, which HTML 4 and every XML
/// parser accept, so the report's HTML and the figures' SVG share this one escaper.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c if (c as u32) < 0x20 && c != '\n' && c != '\t' => out.push(' '),
            c => out.push(c),
        }
    }
    out
}

/// Markup as SVG text content: super- and subscripts as shifted, smaller `tspan`s.
fn rich_text(markup: &str) -> String {
    let mut out = String::new();
    for (script, run) in parse_markup(markup) {
        match script {
            Script::Normal => out.push_str(&escape(&run)),
            Script::Super => {
                let _ = write!(
                    out,
                    r#"<tspan baseline-shift="super" font-size="{SCRIPT_PERCENT}%">{}</tspan>"#,
                    escape(&run)
                );
            }
            Script::Sub => {
                let _ = write!(
                    out,
                    r#"<tspan baseline-shift="sub" font-size="{SCRIPT_PERCENT}%">{}</tspan>"#,
                    escape(&run)
                );
            }
        }
    }
    out
}

/// A number for coordinates: two decimals, never NaN (callers only pass finite values; a
/// non-finite one becomes 0 rather than invalid SVG).
fn n(value: f64) -> String {
    if !value.is_finite() {
        return "0".into();
    }
    let text = format!("{value:.2}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    if text == "-0" {
        "0".into()
    } else {
        text.to_owned()
    }
}

/// A short identifier for clip paths, stable for a figure, so that several figures inlined in
/// one HTML page do not share ids.
fn figure_id(figure: &Figure) -> String {
    let mut hash: u64 = 0xcbf2_9ce4_8422_2325;
    for byte in figure.kind.bytes().chain(figure.title.bytes()) {
        hash ^= byte as u64;
        hash = hash.wrapping_mul(0x0100_0000_01b3);
    }
    for panel in &figure.panels {
        for series in &panel.series {
            for byte in series.name.bytes() {
                hash ^= byte as u64;
                hash = hash.wrapping_mul(0x0100_0000_01b3);
            }
            hash ^= series.points.len() as u64;
        }
    }
    format!("mp{:08x}", hash as u32)
}

/// The path of a marker centred at (x, y).
fn marker_path(shape: Shape, x: f64, y: f64) -> String {
    let r = MARKER;
    match shape {
        Shape::Circle => format!(
            "M{} {}a{r} {r} 0 1 0 {} 0a{r} {r} 0 1 0 {} 0Z",
            n(x - r),
            n(y),
            n(2.0 * r),
            n(-2.0 * r)
        ),
        Shape::Square => {
            let s = r * 0.9;
            format!(
                "M{} {}h{}v{}h{}Z",
                n(x - s),
                n(y - s),
                n(2.0 * s),
                n(2.0 * s),
                n(-2.0 * s)
            )
        }
        Shape::TriangleUp => {
            let s = r * 1.2;
            format!(
                "M{} {}L{} {}L{} {}Z",
                n(x),
                n(y - s),
                n(x + s),
                n(y + 0.8 * s),
                n(x - s),
                n(y + 0.8 * s)
            )
        }
        Shape::TriangleDown => {
            let s = r * 1.2;
            format!(
                "M{} {}L{} {}L{} {}Z",
                n(x),
                n(y + s),
                n(x + s),
                n(y - 0.8 * s),
                n(x - s),
                n(y - 0.8 * s)
            )
        }
        Shape::Diamond => {
            let s = r * 1.25;
            format!(
                "M{} {}L{} {}L{} {}L{} {}Z",
                n(x),
                n(y - s),
                n(x + s),
                n(y),
                n(x),
                n(y + s),
                n(x - s),
                n(y)
            )
        }
        Shape::Cross => {
            let s = r;
            format!(
                "M{} {}L{} {}M{} {}L{} {}",
                n(x - s),
                n(y - s),
                n(x + s),
                n(y + s),
                n(x - s),
                n(y + s),
                n(x + s),
                n(y - s)
            )
        }
    }
}

fn dash_attribute(dash: Dash) -> String {
    match dash.pattern() {
        Some(pattern) => {
            let list: Vec<String> = pattern.iter().map(u32::to_string).collect();
            format!(r#" stroke-dasharray="{}""#, list.join(" "))
        }
        None => String::new(),
    }
}

/// The width the legend needs, zero without one (a single series needs none).
fn legend_width(panel: &Panel, panel_width: f64) -> f64 {
    let entries = panel.legend();
    if entries.len() < 2 {
        return 0.0;
    }
    let widest = entries
        .iter()
        .map(|s| text_width(&truncate(&s.name, panel_width), LEGEND_FONT))
        .fold(0.0, f64::max);
    widest + 40.0
}

/// Legend names are cut with an ellipsis where the legend would take more than about 40 %
/// of the panel's width (at most 34 characters, at least 14).
pub(crate) fn truncate(name: &str, panel_width: f64) -> String {
    let fitting = (0.4 * panel_width - 40.0) / (0.58 * LEGEND_FONT);
    let limit = (fitting.floor() as usize).clamp(14, 34);
    let runs = parse_markup(name);
    let visible: usize = runs.iter().map(|(_, run)| run.chars().count()).sum();
    if visible <= limit {
        return name.to_owned();
    }
    // Cut the visible text, keeping the markup of the runs kept whole.
    let mut left = limit - 1;
    let mut out = String::new();
    for (script, run) in runs {
        if left == 0 {
            break;
        }
        let kept: String = run.chars().take(left).collect();
        left -= kept.chars().count();
        match script {
            Script::Normal => out.push_str(&kept),
            Script::Super => out.push_str(&format!("^{{{kept}}}")),
            Script::Sub => out.push_str(&format!("_{{{kept}}}")),
        }
    }
    out.push('…');
    out
}

/// The width of the widest labelled y tick.
fn y_tick_width(panel: &Panel) -> f64 {
    panel
        .y_scale
        .ticks
        .iter()
        .filter_map(|t| t.label.as_deref())
        .map(|label| text_width(label, TICK_FONT))
        .fold(0.0, f64::max)
}

/// Renders the figure.
pub(crate) fn render(figure: &Figure) -> String {
    let columns = figure.columns();
    let rows = figure.rows();
    let width = figure.panel_width * columns as f64;
    let height = TITLE_BAND + figure.panel_height * rows as f64;
    let id = figure_id(figure);
    let mut out = String::new();
    let _ = write!(
        out,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" class="mobilis-figure" data-kind="{kind}" font-family="{FONT}" font-size="{TICK_FONT}">"#,
        w = n(width),
        h = n(height),
        kind = escape(&figure.kind),
    );
    let _ = write!(
        out,
        "<title>{}</title>",
        escape(&crate::units::plain_text(&figure.title))
    );
    let _ = write!(
        out,
        r##"<rect class="background" x="0" y="0" width="{}" height="{}" fill="#ffffff"/>"##,
        n(width),
        n(height)
    );
    // A long title shrinks to the width rather than running off the picture.
    let natural = text_width(&figure.title, TITLE_FONT) * 1.08;
    let title_size = (TITLE_FONT * (width - 24.0) / natural.max(1.0)).clamp(MIN_TITLE_FONT, TITLE_FONT);
    let _ = write!(
        out,
        r#"<text class="figure-title" x="{}" y="22" text-anchor="middle" font-size="{}" font-weight="600" fill="{AXIS_COLOR}">{}</text>"#,
        n(width / 2.0),
        n(title_size),
        rich_text(&figure.title)
    );
    for (index, panel) in figure.panels.iter().enumerate() {
        let ox = (index % columns) as f64 * figure.panel_width;
        let oy = TITLE_BAND + (index / columns) as f64 * figure.panel_height;
        render_panel(&mut out, figure, panel, index, ox, oy, &id);
    }
    out.push_str("</svg>\n");
    out
}

#[allow(clippy::too_many_arguments)]
fn render_panel(out: &mut String, figure: &Figure, panel: &Panel, index: usize, ox: f64, oy: f64, id: &str) {
    let legend = legend_width(panel, figure.panel_width);
    // Room for the widest y tick label and the axis title beside it.
    let tick_width = y_tick_width(panel);
    let left = (tick_width + 40.0).max(MARGIN_LEFT);
    let top = MARGIN_TOP;
    let right = figure.panel_width - MARGIN_RIGHT - legend;
    let bottom = figure.panel_height - MARGIN_BOTTOM;
    let (pw, ph) = ((right - left).max(40.0), (bottom - top).max(40.0));
    let x_of = |v: f64| left + panel.x_scale.fraction(v) * pw;
    let y_of = |v: f64| top + ph - panel.y_scale.fraction(v) * ph;

    let _ = write!(
        out,
        r#"<g class="panel" data-panel="{index}" transform="translate({},{})">"#,
        n(ox),
        n(oy)
    );
    if let Some(title) = &panel.title {
        let _ = write!(
            out,
            r#"<text class="panel-title" x="{}" y="16" text-anchor="middle" font-size="{PANEL_TITLE_FONT}" fill="{AXIS_COLOR}">{}</text>"#,
            n(left + pw / 2.0),
            rich_text(title)
        );
    }
    let clip = format!("{id}-clip{index}");
    let _ = write!(
        out,
        r#"<defs><clipPath id="{clip}"><rect x="{}" y="{}" width="{}" height="{}"/></clipPath></defs>"#,
        n(left - MARKER),
        n(top - MARKER),
        n(pw + 2.0 * MARKER),
        n(ph + 2.0 * MARKER)
    );
    let _ = write!(
        out,
        r##"<g class="plot-area"><rect class="frame" x="{}" y="{}" width="{}" height="{}" fill="#fcfcfd" stroke="none"/>"##,
        n(left),
        n(top),
        n(pw),
        n(ph)
    );

    // Grid lines under the data, at the major ticks.
    out.push_str(r#"<g class="grid" stroke-width="1">"#);
    for tick in panel.x_scale.ticks.iter().filter(|t| t.major) {
        let x = x_of(tick.value);
        let _ = write!(
            out,
            r#"<line x1="{x}" y1="{}" x2="{x}" y2="{}" stroke="{GRID_COLOR}"/>"#,
            n(top),
            n(top + ph),
            x = n(x)
        );
    }
    for tick in panel.y_scale.ticks.iter().filter(|t| t.major) {
        let y = y_of(tick.value);
        let _ = write!(
            out,
            r#"<line x1="{}" y1="{y}" x2="{}" y2="{y}" stroke="{GRID_COLOR}"/>"#,
            n(left),
            n(left + pw),
            y = n(y)
        );
    }
    out.push_str("</g>");

    // Series: markers first, lines last, so that a fitted line stays visible through the
    // points it was fitted to.
    for series in crate::figure::drawing_order(&panel.series) {
        if series.drawn_points() == 0 {
            continue;
        }
        let color = PALETTE[series.color % PALETTE.len()];
        let (mark_name, style) = match series.mark {
            Mark::Points { .. } => ("points", String::new()),
            Mark::Line { dash, .. } => ("line", dash_attribute(dash)),
        };
        let _ = write!(
            out,
            r#"<g class="series" data-series="{}" data-mark="{mark_name}" clip-path="url(#{clip})">"#,
            escape(&series.name)
        );
        match series.mark {
            Mark::Line { width, .. } => {
                for run in &series.runs {
                    let mut d = String::new();
                    for (k, p) in run.iter().enumerate() {
                        let _ = write!(d, "{}{} {}", if k == 0 { "M" } else { "L" }, n(x_of(p.x)), n(y_of(p.y)));
                    }
                    if run.len() == 1 {
                        let _ = write!(d, "h0.01");
                    }
                    let _ = write!(
                        out,
                        r#"<path class="mark line" d="{d}" fill="none" stroke="{color}" stroke-width="{}" stroke-linejoin="round" stroke-linecap="round"{style}/>"#,
                        n(width)
                    );
                }
            }
            Mark::Points { shape, filled } => {
                for p in series.runs.iter().flatten() {
                    error_bars(out, p, &panel.x_scale, &panel.y_scale, &x_of, &y_of, color);
                }
                let (fill, stroke_width) = if shape == Shape::Cross {
                    ("none", 1.6)
                } else if filled {
                    (color, 0.8)
                } else {
                    ("#ffffff", 1.4)
                };
                for p in series.runs.iter().flatten() {
                    let _ = write!(
                        out,
                        r#"<path class="mark point" d="{}" fill="{fill}" stroke="{color}" stroke-width="{}"/>"#,
                        marker_path(shape, x_of(p.x), y_of(p.y)),
                        n(stroke_width)
                    );
                }
            }
        }
        out.push_str("</g>");
    }
    let _ = write!(
        out,
        r#"<rect class="frame-border" x="{}" y="{}" width="{}" height="{}" fill="none" stroke="{AXIS_COLOR}" stroke-width="1"/>"#,
        n(left),
        n(top),
        n(pw),
        n(ph)
    );
    out.push_str("</g>");

    axes(out, panel, left, top, pw, ph, &x_of, &y_of);
    if legend > 0.0 {
        legend_block(out, panel, right + 12.0, top, figure.panel_width);
    }
    if panel.series.iter().all(|s| s.drawn_points() == 0) {
        let _ = write!(
            out,
            r##"<text class="no-data" x="{}" y="{}" text-anchor="middle" fill="#777777">no finite points</text>"##,
            n(left + pw / 2.0),
            n(top + ph / 2.0)
        );
    }
    out.push_str("</g>");
}

#[allow(clippy::too_many_arguments)]
fn error_bars(
    out: &mut String,
    p: &Point,
    xs: &Scale,
    ys: &Scale,
    x_of: &dyn Fn(f64) -> f64,
    y_of: &dyn Fn(f64) -> f64,
    color: &str,
) {
    const CAP: f64 = 3.0;
    let mut d = String::new();
    if let Some(e) = p.y_err {
        let (x, y1, y2) = (x_of(p.x), y_of(ys.lower(p.y, e)), y_of(ys.upper(p.y, e)));
        let _ = write!(
            d,
            "M{} {}V{}M{} {}h{}M{} {}h{}",
            n(x),
            n(y1),
            n(y2),
            n(x - CAP),
            n(y1),
            n(2.0 * CAP),
            n(x - CAP),
            n(y2),
            n(2.0 * CAP)
        );
    }
    if let Some(e) = p.x_err {
        let (y, x1, x2) = (y_of(p.y), x_of(xs.lower(p.x, e)), x_of(xs.upper(p.x, e)));
        let _ = write!(
            d,
            "M{} {}H{}M{} {}v{}M{} {}v{}",
            n(x1),
            n(y),
            n(x2),
            n(x1),
            n(y - CAP),
            n(2.0 * CAP),
            n(x2),
            n(y - CAP),
            n(2.0 * CAP)
        );
    }
    if !d.is_empty() {
        let _ = write!(
            out,
            r#"<path class="error-bar" d="{d}" fill="none" stroke="{color}" stroke-width="1" stroke-opacity="0.8"/>"#
        );
    }
}

#[allow(clippy::too_many_arguments)]
fn axes(
    out: &mut String,
    panel: &Panel,
    left: f64,
    top: f64,
    pw: f64,
    ph: f64,
    x_of: &dyn Fn(f64) -> f64,
    y_of: &dyn Fn(f64) -> f64,
) {
    let bottom = top + ph;
    let scale_name = |s: &Scale| if s.log { "log" } else { "linear" };
    let _ = write!(
        out,
        r#"<g class="axis x-axis" data-scale="{}" stroke="{AXIS_COLOR}" fill="{AXIS_COLOR}">"#,
        scale_name(&panel.x_scale)
    );
    for tick in &panel.x_scale.ticks {
        let x = x_of(tick.value);
        if !(left - 0.5..=left + pw + 0.5).contains(&x) {
            continue;
        }
        let length = if tick.major { 6.0 } else { 3.5 };
        let class = if tick.major { "tick major" } else { "tick minor" };
        let _ = write!(
            out,
            r#"<line class="{class}" x1="{x}" y1="{}" x2="{x}" y2="{}"/>"#,
            n(bottom),
            n(bottom + length),
            x = n(x)
        );
        if let Some(label) = &tick.label {
            let _ = write!(
                out,
                r#"<text class="tick-label" x="{}" y="{}" text-anchor="middle" stroke="none" font-size="{TICK_FONT}">{}</text>"#,
                n(x),
                n(bottom + 20.0),
                rich_text(label)
            );
        }
    }
    let _ = write!(
        out,
        r#"<text class="axis-title" x="{}" y="{}" text-anchor="middle" stroke="none" font-size="{AXIS_TITLE_FONT}">{}</text>"#,
        n(left + pw / 2.0),
        n(bottom + 42.0),
        rich_text(&panel.x.label.markup())
    );
    out.push_str("</g>");

    let _ = write!(
        out,
        r#"<g class="axis y-axis" data-scale="{}" stroke="{AXIS_COLOR}" fill="{AXIS_COLOR}">"#,
        scale_name(&panel.y_scale)
    );
    for tick in &panel.y_scale.ticks {
        let y = y_of(tick.value);
        if !(top - 0.5..=bottom + 0.5).contains(&y) {
            continue;
        }
        let length = if tick.major { 6.0 } else { 3.5 };
        let class = if tick.major { "tick major" } else { "tick minor" };
        let _ = write!(
            out,
            r#"<line class="{class}" x1="{}" y1="{y}" x2="{}" y2="{y}"/>"#,
            n(left - length),
            n(left),
            y = n(y)
        );
        if let Some(label) = &tick.label {
            let _ = write!(
                out,
                r#"<text class="tick-label" x="{}" y="{}" text-anchor="end" stroke="none" font-size="{TICK_FONT}">{}</text>"#,
                n(left - 9.0),
                n(y + 4.0),
                rich_text(label)
            );
        }
    }
    let cx = (left - 9.0 - y_tick_width(panel) - 14.0).max(12.0);
    let cy = top + ph / 2.0;
    let _ = write!(
        out,
        r#"<text class="axis-title" x="{}" y="{}" text-anchor="middle" stroke="none" font-size="{AXIS_TITLE_FONT}" transform="rotate(-90 {} {})">{}</text>"#,
        n(cx),
        n(cy),
        n(cx),
        n(cy),
        rich_text(&panel.y.label.markup())
    );
    out.push_str("</g>");
}

fn legend_block(out: &mut String, panel: &Panel, x: f64, top: f64, panel_width: f64) {
    let entries = panel.legend();
    let height = 8.0 + LEGEND_ROW * entries.len() as f64;
    let width = legend_width(panel, panel_width) - 6.0;
    let _ = write!(
        out,
        r##"<g class="legend"><rect x="{}" y="{}" width="{}" height="{}" fill="#ffffff" stroke="#c9ced4" rx="3"/>"##,
        n(x),
        n(top),
        n(width),
        n(height)
    );
    for (k, series) in entries.iter().enumerate() {
        let y = top + 15.0 + LEGEND_ROW * k as f64;
        let color = PALETTE[series.color % PALETTE.len()];
        let _ = write!(
            out,
            r#"<g class="legend-entry" data-series="{}">"#,
            escape(&series.name)
        );
        match series.mark {
            Mark::Line { dash, .. } => {
                let _ = write!(
                    out,
                    r#"<line x1="{}" y1="{}" x2="{}" y2="{}" stroke="{color}" stroke-width="2"{}/>"#,
                    n(x + 6.0),
                    n(y - 4.0),
                    n(x + 26.0),
                    n(y - 4.0),
                    dash_attribute(dash)
                );
            }
            Mark::Points { shape, filled } => {
                let fill = if shape == Shape::Cross {
                    "none"
                } else if filled {
                    color
                } else {
                    "#ffffff"
                };
                let _ = write!(
                    out,
                    r#"<path d="{}" fill="{fill}" stroke="{color}" stroke-width="1.2"/>"#,
                    marker_path(shape, x + 16.0, y - 4.0)
                );
            }
        }
        let _ = write!(
            out,
            r##"<text x="{}" y="{}" font-size="{LEGEND_FONT}" fill="#222222">{}</text></g>"##,
            n(x + 32.0),
            n(y),
            rich_text(&truncate(&series.name, panel_width))
        );
    }
    out.push_str("</g>");
}
