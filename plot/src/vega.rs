//! The Vega-Lite v5 rendering of a [`Figure`]: the same panels, series, scales and titles as
//! the SVG, with the data inline in the displayed units, for notebooks that render figures
//! interactively (zoom, tooltips) instead of as pictures.
//!
//! One layer per series (and one for its error bars), each with its own inline data, so that
//! marker shapes, fill and dashes follow the SVG exactly; the colour encoding shares one
//! domain and range across the layers of a panel, which gives one legend.

use serde_json::{json, Map, Value};

use crate::figure::{Figure, Mark, Panel, Scale, Shape, PALETTE};
use crate::units::plain_text;

pub(crate) const SCHEMA: &str = "https://vega.github.io/schema/vega-lite/v5.json";

fn shape_name(shape: Shape) -> &'static str {
    match shape {
        Shape::Circle => "circle",
        Shape::Square => "square",
        Shape::TriangleUp => "triangle-up",
        Shape::Diamond => "diamond",
        Shape::TriangleDown => "triangle-down",
        Shape::Cross => "cross",
    }
}

/// A positional encoding with the SVG's scale: same type and the same fixed domain.
fn position(field: &str, title: Option<String>, scale: &Scale) -> Value {
    let mut encoding = json!({
        "field": field,
        "type": "quantitative",
        "scale": {
            "type": if scale.log { "log" } else { "linear" },
            "domain": [scale.lo, scale.hi],
            "nice": false,
        },
    });
    // A linear scale would otherwise stretch to include zero; a log scale never does, and
    // Vega-Lite warns when told so.
    if !scale.log {
        encoding["scale"]["zero"] = json!(false);
    }
    match title {
        Some(title) => encoding["title"] = json!(title),
        None => encoding["title"] = Value::Null,
    }
    encoding
}

fn color(panel: &Panel) -> Value {
    let entries = panel.legend();
    let domain: Vec<String> = entries.iter().map(|s| plain_text(&s.name)).collect();
    let range: Vec<&str> = entries.iter().map(|s| PALETTE[s.color % PALETTE.len()]).collect();
    let mut encoding = json!({
        "field": "series",
        "type": "nominal",
        "scale": {"domain": domain, "range": range},
        "legend": {"title": null, "labelLimit": 360},
    });
    if entries.len() < 2 {
        encoding["legend"] = Value::Null;
    }
    encoding
}

fn layers(panel: &Panel) -> Vec<Value> {
    let x_title = plain_text(&panel.x.label.markup());
    let y_title = plain_text(&panel.y.label.markup());
    let color = color(panel);
    let mut layers = Vec::new();
    // Later layers are drawn on top: markers first, fitted lines last, as in the SVG.
    for series in crate::figure::drawing_order(&panel.series) {
        if series.drawn_points() == 0 {
            continue;
        }
        let x = position("x", Some(x_title.clone()), &panel.x_scale);
        let y = position("y", Some(y_title.clone()), &panel.y_scale);
        match series.mark {
            Mark::Line { dash, width } => {
                let mut values = Vec::new();
                let mut order = 0usize;
                for (segment, run) in series.runs.iter().enumerate() {
                    for p in run {
                        values.push(
                            json!({"series": plain_text(&series.name), "segment": segment, "order": order, "x": p.x, "y": p.y}),
                        );
                        order += 1;
                    }
                }
                let mut mark = json!({"type": "line", "strokeWidth": width, "clip": true});
                if let Some(pattern) = dash.pattern() {
                    mark["strokeDash"] = json!(pattern);
                }
                layers.push(json!({
                    "data": {"values": values},
                    "mark": mark,
                    "encoding": {
                        "x": x, "y": y, "color": color,
                        "detail": {"field": "segment", "type": "nominal"},
                        "order": {"field": "order", "type": "quantitative"},
                    },
                }));
            }
            Mark::Points { shape, filled } => {
                let points: Vec<_> = series.runs.iter().flatten().collect();
                let values: Vec<Value> = points
                    .iter()
                    .map(|p| json!({"series": plain_text(&series.name), "x": p.x, "y": p.y}))
                    .collect();
                let y_bars: Vec<Value> = points
                    .iter()
                    .filter_map(|p| {
                        p.y_err.map(|e| {
                            json!({"series": plain_text(&series.name), "x": p.x,
                                   "y_low": panel.y_scale.lower(p.y, e), "y_high": panel.y_scale.upper(p.y, e)})
                        })
                    })
                    .collect();
                let x_bars: Vec<Value> = points
                    .iter()
                    .filter_map(|p| {
                        p.x_err.map(|e| {
                            json!({"series": plain_text(&series.name), "y": p.y,
                                   "x_low": panel.x_scale.lower(p.x, e), "x_high": panel.x_scale.upper(p.x, e)})
                        })
                    })
                    .collect();
                if !y_bars.is_empty() {
                    layers.push(json!({
                        "data": {"values": y_bars},
                        "mark": {"type": "rule", "strokeWidth": 1, "clip": true},
                        "encoding": {
                            "x": position("x", Some(x_title.clone()), &panel.x_scale),
                            "y": position("y_low", Some(y_title.clone()), &panel.y_scale),
                            "y2": {"field": "y_high"},
                            "color": color,
                        },
                    }));
                }
                if !x_bars.is_empty() {
                    layers.push(json!({
                        "data": {"values": x_bars},
                        "mark": {"type": "rule", "strokeWidth": 1, "clip": true},
                        "encoding": {
                            "x": position("x_low", Some(x_title.clone()), &panel.x_scale),
                            "x2": {"field": "x_high"},
                            "y": position("y", Some(y_title.clone()), &panel.y_scale),
                            "color": color,
                        },
                    }));
                }
                let filled = filled && shape != Shape::Cross;
                layers.push(json!({
                    "data": {"values": values},
                    "mark": {"type": "point", "shape": shape_name(shape), "filled": filled, "size": 48,
                             "strokeWidth": if filled { 0.8 } else { 1.4 }, "opacity": 1, "clip": true},
                    "encoding": {
                        "x": x, "y": y, "color": color,
                        "tooltip": [
                            {"field": "series", "type": "nominal"},
                            {"field": "x", "type": "quantitative", "title": x_title, "format": ".4~g"},
                            {"field": "y", "type": "quantitative", "title": y_title, "format": ".4~g"},
                        ],
                    },
                }));
            }
        }
    }
    layers
}

fn panel_spec(panel: &Panel, width: f64, height: f64) -> Map<String, Value> {
    let mut spec = Map::new();
    if let Some(title) = &panel.title {
        spec.insert("title".into(), json!(plain_text(title)));
    }
    spec.insert("width".into(), json!((width - 150.0).max(120.0).round()));
    spec.insert("height".into(), json!((height - 90.0).max(100.0).round()));
    spec.insert("layer".into(), Value::Array(layers(panel)));
    spec
}

/// Renders the figure as a Vega-Lite specification.
pub(crate) fn render(figure: &Figure) -> Value {
    let mut top = Map::new();
    top.insert("$schema".into(), json!(SCHEMA));
    top.insert("title".into(), json!(plain_text(&figure.title)));
    top.insert(
        "description".into(),
        json!(format!("mobilis figure of kind {}", figure.kind)),
    );
    top.insert("usermeta".into(), json!({"mobilis_kind": figure.kind}));
    top.insert(
        "config".into(),
        json!({
            "font": "DejaVu Sans, Helvetica Neue, Arial, sans-serif",
            "title": {"fontSize": crate::svg::TITLE_FONT},
            "axis": {"labelFontSize": crate::svg::TICK_FONT, "titleFontSize": crate::svg::AXIS_TITLE_FONT},
            "legend": {"labelFontSize": crate::svg::LEGEND_FONT},
            "header": {"labelFontSize": crate::svg::PANEL_TITLE_FONT},
        }),
    );
    if figure.panels.len() == 1 {
        top.extend(panel_spec(&figure.panels[0], figure.panel_width, figure.panel_height));
    } else {
        let panels: Vec<Value> = figure
            .panels
            .iter()
            .map(|p| Value::Object(panel_spec(p, figure.panel_width, figure.panel_height)))
            .collect();
        top.insert("columns".into(), json!(figure.columns()));
        top.insert("concat".into(), Value::Array(panels));
        top.insert(
            "resolve".into(),
            json!({"scale": {"color": "independent", "x": "independent", "y": "independent"}, "legend": {"color": "independent"}}),
        );
    }
    Value::Object(top)
}
