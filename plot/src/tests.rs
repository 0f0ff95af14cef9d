//! Tests of the declared figures and renderers on small frames shaped like the plugins' outputs
//! (SI columns as the analyses write them), drawn from the built-in plugins' own figure
//! declarations, with a small XML well-formedness check standing in for an XML parser (none is
//! in the offline registry cache).

use polars::prelude::*;
use serde_json::Value;

use crate::{Figure, FigureCatalog, FigureSpec, KindInfo, PlotError, PlotOptions};

// The built-in plugins' figure declarations, read from their sources: the tests draw exactly
// what the plugins declare, without loading the plugin libraries.
#[path = "../../plugins/carriers/src/figures.rs"]
mod carriers_figures;
#[path = "../../plugins/hall/src/figures.rs"]
mod hall_figures;
#[path = "../../plugins/magnetoresistance/src/figures.rs"]
mod magnetoresistance_figures;
#[path = "../../plugins/spectrum/src/figures.rs"]
mod spectrum_figures;

/// Each built-in analysis and its declared figures, as the daemon registers them (by name).
fn builtin_figures() -> &'static [(&'static str, Vec<FigureSpec>)] {
    static FIGURES: std::sync::OnceLock<Vec<(&'static str, Vec<FigureSpec>)>> = std::sync::OnceLock::new();
    FIGURES.get_or_init(|| {
        vec![
            ("carriers.arrhenius", carriers_figures::arrhenius()),
            ("carriers.freeze_out_fit", carriers_figures::freeze_out()),
            ("carriers.mobility_scattering", carriers_figures::mobility_scattering()),
            ("carriers.purity", Vec::new()),
            ("hall.reduce", hall_figures::reduce()),
            ("mr.kohler", magnetoresistance_figures::kohler()),
            ("mr.oscillations", magnetoresistance_figures::oscillations()),
            ("mr.ratio", magnetoresistance_figures::ratio()),
            ("mr.symmetrize", magnetoresistance_figures::symmetrize()),
            ("mr.two_band_fit", magnetoresistance_figures::two_band_fit()),
            ("mr.weak_localization", magnetoresistance_figures::weak_localization()),
            ("spectrum.mobility", spectrum_figures::mobility()),
            ("spectrum.multi_carrier_fit", spectrum_figures::multi_carrier_fit()),
        ]
    })
}

fn catalog() -> FigureCatalog<'static> {
    let mut catalog = FigureCatalog::new();
    for (analysis, figures) in builtin_figures() {
        catalog.add(analysis, figures);
    }
    catalog
}

fn build(frame: &DataFrame, dataset: &str, options: &PlotOptions) -> Result<Figure, PlotError> {
    crate::build(frame, dataset, options, &catalog())
}

fn kinds() -> Vec<KindInfo> {
    catalog().kinds()
}

fn kinds_for(analysis: Option<&str>) -> Vec<String> {
    catalog().kinds_for(analysis)
}

// ---------------------------------------------------------------------------------------
// A minimal XML checker: nesting, attribute quoting, entity references, one root.

#[derive(Debug)]
struct Element {
    name: String,
    attributes: Vec<(String, String)>,
    text: String,
}

impl Element {
    fn attribute(&self, name: &str) -> Option<&str> {
        self.attributes.iter().find(|(n, _)| n == name).map(|(_, v)| v.as_str())
    }

    fn has_class(&self, class: &str) -> bool {
        self.attribute("class")
            .is_some_and(|c| c.split_whitespace().any(|w| w == class))
    }
}

fn check_entities(text: &str) -> Result<(), String> {
    let mut rest = text;
    while let Some(at) = rest.find('&') {
        let tail = &rest[at + 1..];
        let end = tail
            .find(';')
            .ok_or_else(|| format!("unterminated entity in {text:?}"))?;
        let name = &tail[..end];
        let ok = matches!(name, "amp" | "lt" | "gt" | "quot" | "apos")
            || (name.starts_with('#') && name.len() > 1 && name[1..].chars().all(|c| c.is_ascii_alphanumeric()));
        if !ok {
            return Err(format!("bad entity &{name}; in {text:?}"));
        }
        rest = &tail[end + 1..];
    }
    Ok(())
}

/// Every element in document order, or why the text is not well-formed XML.
fn parse_xml(text: &str) -> Result<Vec<Element>, String> {
    let mut elements: Vec<Element> = Vec::new();
    let mut stack: Vec<(String, usize)> = Vec::new();
    let mut roots = 0;
    let bytes = text.as_bytes();
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i] != b'<' {
            let next = text[i..].find('<').map_or(text.len(), |k| i + k);
            let content = &text[i..next];
            if stack.is_empty() && !content.trim().is_empty() {
                return Err(format!("text outside the root: {content:?}"));
            }
            check_entities(content)?;
            if let Some((_, index)) = stack.last() {
                elements[*index].text.push_str(content);
            }
            i = next;
            continue;
        }
        let rest = &text[i..];
        if rest.starts_with("<?") {
            i += rest.find("?>").ok_or("unterminated declaration")? + 2;
            continue;
        }
        if rest.starts_with("<!--") {
            i += rest.find("-->").ok_or("unterminated comment")? + 3;
            continue;
        }
        let end = rest.find('>').ok_or("unterminated tag")?;
        let tag = &rest[1..end];
        i += end + 1;
        if let Some(name) = tag.strip_prefix('/') {
            let (open, _) = stack.pop().ok_or(format!("closing </{name}> without an opening tag"))?;
            if open != name.trim() {
                return Err(format!("</{name}> closes <{open}>"));
            }
            continue;
        }
        let self_closing = tag.ends_with('/');
        let tag = tag.trim_end_matches('/');
        let name_end = tag.find(|c: char| c.is_whitespace()).unwrap_or(tag.len());
        let name = &tag[..name_end];
        if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '-' || c == ':') {
            return Err(format!("bad element name {name:?}"));
        }
        let mut attributes = Vec::new();
        let mut attrs = tag[name_end..].trim();
        while !attrs.is_empty() {
            let eq = attrs
                .find('=')
                .ok_or(format!("attribute without value in <{name} {attrs}>"))?;
            let key = attrs[..eq].trim();
            if key.is_empty() || key.contains(char::is_whitespace) {
                return Err(format!("bad attribute name {key:?} in <{name}>"));
            }
            let after = &attrs[eq + 1..];
            let quote = after.chars().next().ok_or("missing attribute value")?;
            if quote != '"' && quote != '\'' {
                return Err(format!("unquoted attribute {key} in <{name}>"));
            }
            let close = after[1..].find(quote).ok_or("unterminated attribute value")?;
            let value = &after[1..1 + close];
            if value.contains('<') {
                return Err(format!("'<' in attribute {key}"));
            }
            check_entities(value)?;
            if attributes.iter().any(|(k, _): &(String, String)| k == key) {
                return Err(format!("duplicate attribute {key} in <{name}>"));
            }
            attributes.push((key.to_owned(), value.to_owned()));
            attrs = after[2 + close..].trim_start();
        }
        if stack.is_empty() {
            roots += 1;
        }
        elements.push(Element {
            name: name.to_owned(),
            attributes,
            text: String::new(),
        });
        if !self_closing {
            stack.push((name.to_owned(), elements.len() - 1));
        }
    }
    if let Some((open, _)) = stack.pop() {
        return Err(format!("<{open}> is never closed"));
    }
    if roots != 1 {
        return Err(format!("{roots} root elements"));
    }
    Ok(elements)
}

/// Parses the SVG, checks what every figure must have, and returns its elements.
fn checked_svg(figure: &Figure) -> (String, Vec<Element>) {
    let svg = figure.to_svg();
    let elements = parse_xml(&svg).unwrap_or_else(|e| panic!("not well-formed: {e}\n{svg}"));
    assert_eq!(elements[0].name, "svg");
    for attribute in ["xmlns", "viewBox", "width", "height"] {
        assert!(elements[0].attribute(attribute).is_some(), "no {attribute}");
    }
    assert!(elements.iter().any(|e| e.name == "title" && !e.text.is_empty()));
    assert!(elements.iter().any(|e| e.has_class("plot-area")));
    assert!(elements.iter().any(|e| e.has_class("x-axis")) && elements.iter().any(|e| e.has_class("y-axis")));
    assert_eq!(
        elements.iter().filter(|e| e.has_class("axis-title")).count(),
        2 * figure.panels.len()
    );
    for word in ["NaN", "inf", "Infinity"] {
        assert!(!svg.contains(word), "{word} in the SVG");
    }
    (svg, elements)
}

fn count(elements: &[Element], class: &str) -> usize {
    elements.iter().filter(|e| e.has_class(class)).count()
}

/// The marks of one series (by its data-series name) in the SVG.
fn series_marks(svg: &str, series: &str) -> usize {
    let start = format!(r#"data-series="{series}""#);
    let Some(at) = svg.find(&start) else { return 0 };
    let tail = &svg[at..];
    let end = tail.find("</g>").unwrap();
    tail[..end].matches("class=\"mark ").count()
}

fn vega_layers(spec: &Value) -> Vec<&Value> {
    match spec.get("layer") {
        Some(layers) => layers.as_array().unwrap().iter().collect(),
        None => spec["concat"]
            .as_array()
            .unwrap()
            .iter()
            .flat_map(|p| p["layer"].as_array().unwrap().iter())
            .collect(),
    }
}

fn vega_values(spec: &Value, series: &str, field: &str) -> Vec<f64> {
    vega_layers(spec)
        .into_iter()
        .flat_map(|l| l["data"]["values"].as_array().unwrap().iter())
        .filter(|v| v["series"] == series && v.get(field).is_some())
        .map(|v| v[field].as_f64().unwrap())
        .collect()
}

fn check_vega(figure: &Figure) -> Value {
    let spec = figure.to_vega_lite();
    assert_eq!(spec["$schema"], "https://vega.github.io/schema/vega-lite/v5.json");
    let text = serde_json::to_string(&spec).unwrap();
    assert!(!text.contains("NaN") && !text.contains("null,\"y\""), "{text}");
    spec
}

fn scale_types(spec: &Value, channel: &str) -> Vec<String> {
    vega_layers(spec)
        .iter()
        .filter_map(|l| l["encoding"][channel]["scale"]["type"].as_str().map(str::to_owned))
        .collect()
}

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    (actual - expected).abs() <= relative * expected.abs()
}

fn options(kind: &str) -> PlotOptions {
    PlotOptions {
        kind: Some(kind.to_owned()),
        ..PlotOptions::default()
    }
}

fn floats(name: &str, values: Vec<f64>) -> Column {
    Column::new(name.into(), values)
}

fn optional(name: &str, values: Vec<Option<f64>>) -> Column {
    Column::new(name.into(), values)
}

fn texts(name: &str, values: Vec<&str>) -> Column {
    Column::new(name.into(), values)
}

fn table(columns: Vec<Column>) -> DataFrame {
    let height = columns[0].len();
    DataFrame::new(height, columns).unwrap()
}

// ---------------------------------------------------------------------------------------
// Frames shaped like the analyses' outputs.

const BOLTZMANN_EV_PER_K: f64 = 8.617_333e-5;

/// n of an uncompensated donor level (45 meV, 1e21 m^-3, Nc = 2.8e25 m^-3 (T/300)^1.5, g = 2),
/// the closed form of n^2 / (N_D - n) = Nc exp(-E/kT) / g: a freeze-out that looks like silicon.
fn freeze_out_density(t: f64, donors: f64) -> f64 {
    let nc = 2.8e25 * (t / 300.0).powf(1.5);
    let k = nc / 2.0 * (-0.045 / (BOLTZMANN_EV_PER_K * t)).exp();
    0.5 * (-k + (k * k + 4.0 * k * donors).sqrt())
}

fn lattice_mobility(t: f64) -> f64 {
    0.14 * (t / 300.0).powf(-2.4)
}

fn impurity_mobility(t: f64) -> f64 {
    0.9 * (t / 100.0).powf(1.5)
}

fn total_mobility(t: f64) -> f64 {
    1.0 / (1.0 / lattice_mobility(t) + 1.0 / impurity_mobility(t))
}

/// A `hall.reduce` output: two samples at 12 temperatures, one field.
fn hall_frame() -> DataFrame {
    let mut sample = Vec::new();
    let (mut t, mut n, mut n_unc, mut mu) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    let (mut mu_unc, mut rho, mut field) = (Vec::new(), Vec::new(), Vec::new());
    for (name, donors) in [("W1", 1e21), ("W2", 4e21)] {
        for k in 0..12 {
            let temperature = 30.0 * 1.25f64.powi(k);
            let density = freeze_out_density(temperature, donors);
            let mobility = total_mobility(temperature);
            sample.push(name);
            t.push(temperature);
            n.push(density);
            n_unc.push(0.02 * density);
            mu.push(mobility);
            mu_unc.push(0.015 * mobility);
            rho.push(1.0 / (1.602_176_634e-19 * density * mobility));
            field.push(0.5);
        }
    }
    table(vec![
        texts("sample", sample),
        texts("carrier_type", vec!["n"; t.len()]),
        floats("temperature_K", t),
        floats("field_T", field),
        floats("density_m3", n),
        floats("density_m3_unc", n_unc),
        floats("hall_mobility_m2_per_Vs", mu),
        floats("hall_mobility_m2_per_Vs_unc", mu_unc),
        floats("resistivity_ohm_m", rho),
    ])
}

// ---------------------------------------------------------------------------------------

#[test]
fn every_kind_is_listed_and_kinds_for_analyses_exist() {
    let kinds = kinds();
    let names: Vec<&str> = kinds.iter().map(|k| k.name.as_str()).collect();
    assert_eq!(names[0], "columns");
    let mut sorted = names.clone();
    sorted.sort();
    sorted.dedup();
    assert_eq!(sorted.len(), names.len(), "duplicate kind names");
    for kind in &kinds {
        assert!(!kind.description.is_empty());
    }
    assert_eq!(
        kinds_for(Some("hall.reduce")),
        ["hall_density", "hall_mobility", "hall_resistivity"]
    );
    assert_eq!(kinds_for(Some("mr.two_band_fit")), ["resistivity_fit"]);
    assert_eq!(
        kinds_for(Some("spectrum.multi_carrier_fit")),
        ["conductivity_fit", "resistivity_fit"]
    );
    assert_eq!(kinds_for(Some("mr.oscillations"))[0], "oscillation_fft");
    assert_eq!(kinds_for(None), ["columns"]);
    assert_eq!(kinds_for(Some("carriers.purity")), ["columns"]);
    for analysis in [
        "hall.reduce",
        "carriers.freeze_out_fit",
        "carriers.arrhenius",
        "carriers.mobility_scattering",
        "spectrum.mobility",
        "spectrum.multi_carrier_fit",
        "mr.symmetrize",
        "mr.ratio",
        "mr.kohler",
        "mr.two_band_fit",
        "mr.oscillations",
        "mr.weak_localization",
    ] {
        assert_ne!(kinds_for(Some(analysis)), ["columns"], "{analysis} has no recipe");
    }
}

#[test]
fn hall_density_converts_to_per_cubic_centimetre_on_a_log_axis() {
    let frame = hall_frame();
    let figure = build(
        &frame,
        "si-hall",
        &PlotOptions {
            analysis: Some("hall.reduce".into()),
            ..PlotOptions::default()
        },
    )
    .unwrap();
    assert_eq!(figure.kind(), "hall_density");
    assert!(figure.title().contains("si-hall"));
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), 24);
    assert_eq!(count(&elements, "error-bar"), 24);
    assert_eq!(series_marks(&svg, "W1"), 12);
    assert_eq!(series_marks(&svg, "W2"), 12);
    assert_eq!(count(&elements, "legend-entry"), 2);
    let y_axis = elements.iter().find(|e| e.has_class("y-axis")).unwrap();
    assert_eq!(y_axis.attribute("data-scale"), Some("log"));
    // Units with a real superscript, and decade tick labels 10^n.
    assert!(svg.contains(r#"cm<tspan baseline-shift="super" font-size="90%">−3</tspan>"#));
    assert!(
        svg.contains(r#">10<tspan baseline-shift="super" font-size="90%">15</tspan>"#),
        "{svg}"
    );

    // 1e21 m^-3 is 1e15 cm^-3 (common practice: densities per cm^3; 1 m^-3 = 1e-6 cm^-3).
    let spec = check_vega(&figure);
    assert_eq!(scale_types(&spec, "y")[0], "log");
    assert_eq!(scale_types(&spec, "x")[0], "linear");
    let shown = vega_values(&spec, "W1", "y");
    let si: Vec<f64> = frame
        .column("density_m3")
        .unwrap()
        .f64()
        .unwrap()
        .iter()
        .flatten()
        .collect();
    assert_eq!(shown.len(), 12);
    for (shown, si) in shown.iter().zip(&si) {
        assert!(close(*shown, si * 1e-6, 1e-12), "{shown} from {si}");
    }
    let plateau = shown.iter().copied().fold(0.0, f64::max);
    assert!(close(plateau, 1e15, 0.05), "{plateau}");
    // The y domain runs over whole decades.
    let domain = &vega_layers(&spec)[1]["encoding"]["y"]["scale"]["domain"];
    let (lo, hi) = (domain[0].as_f64().unwrap(), domain[1].as_f64().unwrap());
    for end in [lo, hi] {
        assert!(close(end.log10().round(), end.log10(), 1e-9), "{end}");
    }
    let title = vega_layers(&spec)[0]["encoding"]["y"]["title"].as_str().unwrap();
    assert_eq!(title, "Carrier density n (cm⁻³)");
}

#[test]
fn hall_mobility_is_log_log_in_square_centimetres_per_volt_second() {
    let frame = hall_frame();
    let figure = build(&frame, "si-hall", &options("hall_mobility")).unwrap();
    let (_, elements) = checked_svg(&figure);
    assert!(elements
        .iter()
        .filter(|e| e.has_class("axis"))
        .all(|e| e.attribute("data-scale") == Some("log")));
    let spec = check_vega(&figure);
    assert!(scale_types(&spec, "x").iter().all(|t| t == "log"));
    assert!(scale_types(&spec, "y").iter().all(|t| t == "log"));
    // 0.1 m^2/(V s) is 1000 cm^2/(V s) (common practice: mobilities in cm^2/(V s)).
    let single = table(vec![
        floats("temperature_K", vec![300.0, 77.0]),
        floats("hall_mobility_m2_per_Vs", vec![0.1, 0.5]),
    ]);
    let figure = build(&single, "one", &options("hall_mobility")).unwrap();
    let spec = check_vega(&figure);
    let values = vega_values(&spec, "one", "y");
    assert!(
        close(values[0], 1000.0, 1e-12) && close(values[1], 5000.0, 1e-12),
        "{values:?}"
    );
}

#[test]
fn hall_resistivity_in_ohm_centimetres() {
    let frame = hall_frame();
    let figure = build(&frame, "si-hall", &options("hall_resistivity")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), 24);
    assert!(svg.contains("Ω cm"));
    // A 2D sample without resistivity falls back to the sheet resistance.
    let sheet = table(vec![
        floats("temperature_K", vec![4.0, 300.0]),
        optional("resistivity_ohm_m", vec![None, None]),
        floats("sheet_resistance_ohm_sq", vec![50.0, 400.0]),
    ]);
    let figure = build(&sheet, "hemt", &options("hall_resistivity")).unwrap();
    let (svg, _) = checked_svg(&figure);
    assert!(svg.contains("Ω/sq"));
}

#[test]
fn freeze_out_draws_data_and_model_against_inverse_temperature() {
    let temperatures: Vec<f64> = (0..10).map(|k| 25.0 + 30.0 * k as f64).collect();
    let curve: Vec<f64> = (0..40).map(|k| 20.0 + 8.0 * k as f64).collect();
    let mut kind = vec!["data"; temperatures.len()];
    kind.extend(vec!["curve"; curve.len()]);
    let mut t = temperatures.clone();
    t.extend(&curve);
    let density: Vec<Option<f64>> = temperatures
        .iter()
        .map(|&t| Some(freeze_out_density(t, 1e21) * 1.01))
        .chain(curve.iter().map(|_| None))
        .collect();
    let fitted: Vec<f64> = t.iter().map(|&t| freeze_out_density(t, 1e21)).collect();
    let frame = table(vec![
        texts("kind", kind),
        floats("temperature_K", t),
        optional("density_m3", density.clone()),
        optional("density_m3_unc", density.iter().map(|d| d.map(|d| 0.03 * d)).collect()),
        floats("fitted_density_m3", fitted),
    ]);
    let figure = build(
        &frame,
        "si-freeze-out",
        &PlotOptions {
            analysis: Some("carriers.freeze_out_fit".into()),
            ..PlotOptions::default()
        },
    )
    .unwrap();
    assert_eq!(figure.kind(), "freeze_out");
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), 10);
    assert_eq!(count(&elements, "line"), 1);
    assert_eq!(count(&elements, "error-bar"), 10);
    assert!(svg.contains("1000/T"));
    let spec = check_vega(&figure);
    let x = vega_values(&spec, "measured", "x");
    assert!(close(x[0], 1000.0 / 25.0, 1e-12));
    assert!(scale_types(&spec, "y").iter().all(|t| t == "log"));
}

fn arrhenius_frame(exponent: f64) -> DataFrame {
    let t: Vec<f64> = (0..12).map(|k| 20.0 + 10.0 * k as f64).collect();
    let inverse_kt: Vec<f64> = t.iter().map(|t| 1.0 / (BOLTZMANN_EV_PER_K * t)).collect();
    let reduced: Vec<f64> = t
        .iter()
        .map(|&t| freeze_out_density(t, 1e21).ln() - exponent * t.ln())
        .collect();
    let used: Vec<bool> = t.iter().map(|&t| t <= 60.0).collect();
    // The least-squares line through the used points, as the plugin writes it.
    let inside: Vec<(f64, f64)> = (0..t.len())
        .filter(|&k| used[k])
        .map(|k| (inverse_kt[k], reduced[k]))
        .collect();
    let count = inside.len() as f64;
    let (mx, my) = (
        inside.iter().map(|p| p.0).sum::<f64>() / count,
        inside.iter().map(|p| p.1).sum::<f64>() / count,
    );
    let slope = inside.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum::<f64>()
        / inside.iter().map(|p| (p.0 - mx).powi(2)).sum::<f64>();
    let line: Vec<f64> = inverse_kt.iter().map(|x| my + slope * (x - mx)).collect();
    table(vec![
        floats("temperature_K", t.clone()),
        floats("inverse_thermal_energy_per_eV", inverse_kt),
        floats("ln_reduced_density_m3", reduced),
        floats("ln_reduced_density_m3_unc", vec![0.02; t.len()]),
        floats("ln_reduced_density_fit_m3", line),
        Column::new("used".into(), used),
        floats("temperature_exponent", vec![exponent; t.len()]),
    ])
}

#[test]
fn arrhenius_marks_the_fitted_points_and_draws_the_line() {
    let frame = arrhenius_frame(1.5);
    let figure = build(&frame, "si-arrhenius", &options("arrhenius")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(series_marks(&svg, "in fit"), 5);
    assert_eq!(series_marks(&svg, "not in fit"), 7);
    assert_eq!(series_marks(&svg, "fitted line"), 1);
    assert_eq!(count(&elements, "point"), 12);
    // Open markers for points outside the fit.
    assert!(svg.contains(r##"class="mark point" d="##) && svg.contains(r##"fill="#ffffff""##));
    assert!(svg.contains("3/2"));
    let spec = check_vega(&figure);
    // n in cm^-3: ln(n / cm^-3) = ln(n / m^-3) - ln(1e6).
    let shown = vega_values(&spec, "in fit", "y");
    let stored = frame
        .column("ln_reduced_density_m3")
        .unwrap()
        .f64()
        .unwrap()
        .get(0)
        .unwrap();
    assert!(close(shown[0], stored - 1e6f64.ln(), 1e-12));
    let figure = build(&arrhenius_frame(0.75), "u", &options("arrhenius")).unwrap();
    assert!(figure.to_svg().contains("3/4"));
}

#[test]
fn mobility_scattering_draws_total_and_terms() {
    let t: Vec<f64> = (0..15).map(|k| 30.0 * 1.2f64.powi(k)).collect();
    let n = t.len();
    let frame = table(vec![
        texts("sample", vec!["W1"; n]),
        floats("temperature_K", t.clone()),
        Column::new("in_fit_range".into(), (0..n).map(|k| k > 1).collect::<Vec<bool>>()),
        floats(
            "mobility_m2_per_Vs",
            t.iter().map(|&t| total_mobility(t) * 1.02).collect(),
        ),
        floats(
            "mobility_m2_per_Vs_unc",
            t.iter().map(|&t| total_mobility(t) * 0.03).collect(),
        ),
        floats(
            "fitted_mobility_m2_per_Vs",
            t.iter().map(|&t| total_mobility(t)).collect(),
        ),
        floats(
            "lattice_mobility_m2_per_Vs",
            t.iter().map(|&t| lattice_mobility(t)).collect(),
        ),
        floats(
            "ionized_impurity_mobility_m2_per_Vs",
            t.iter().map(|&t| impurity_mobility(t)).collect(),
        ),
        optional("neutral_impurity_mobility_m2_per_Vs", vec![None; n]),
        optional("constant_mobility_m2_per_Vs", vec![None; n]),
    ]);
    let figure = build(&frame, "si-scattering", &options("mobility_scattering")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "line"), 3, "total, lattice, ionized");
    assert_eq!(series_marks(&svg, "measured"), 13);
    assert_eq!(series_marks(&svg, "outside fit range"), 2);
    assert!(svg.contains("stroke-dasharray"));
    let spec = check_vega(&figure);
    assert!(scale_types(&spec, "x").iter().all(|t| t == "log"));
    let fitted = vega_values(&spec, "fit (total)", "y");
    assert!(close(fitted[0], total_mobility(30.0) * 1e4, 1e-12));
}

#[test]
fn mobility_spectrum_has_a_panel_per_sweep_and_a_log_mobility_axis() {
    let mut sample = Vec::new();
    let (mut temperature, mut mobility, mut electron, mut hole, mut envelope) =
        (vec![], vec![], vec![], vec![], vec![]);
    for (name, t) in [("hemt", 2.0), ("hemt", 300.0)] {
        for k in 0..60 {
            let mu = 1e-3 * 10f64.powf(k as f64 / 12.0);
            let peak = |center: f64, height: f64| height * (-((mu / center).ln()).powi(2) / 0.2).exp();
            sample.push(name);
            temperature.push(t);
            mobility.push(mu);
            electron.push(peak(20.0, 4e-3));
            hole.push(peak(0.05, 1e-3));
            envelope.push(peak(20.0, 4e-3) * 1.3 + 1e-5);
        }
    }
    let frame = table(vec![
        texts("sample", sample),
        floats("temperature_K", temperature),
        floats("mobility_m2_per_Vs", mobility),
        floats("electron_envelope_S", envelope.clone()),
        floats("electron_spectrum_S", electron),
        floats("hole_envelope_S", envelope),
        floats("hole_spectrum_S", hole),
    ]);
    let figure = build(&frame, "hemt-spectrum", &options("mobility_spectrum")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "panel"), 2);
    assert_eq!(count(&elements, "line"), 8);
    assert!(svg.contains("2 K") && svg.contains("300 K"));
    // 4e-3 S reads as mS on a linear axis.
    assert!(svg.contains("(mS)"), "{svg}");
    let spec = check_vega(&figure);
    assert_eq!(spec["concat"].as_array().unwrap().len(), 2);
    assert!(scale_types(&spec, "x").iter().all(|t| t == "log"));
    let peak = vega_values(&spec, "electrons", "y").into_iter().fold(0.0, f64::max);
    // The grid misses the peak's centre by up to half a step.
    assert!(close(peak, 4.0, 0.05), "{peak}");
}

fn tensor_frame() -> DataFrame {
    let field: Vec<f64> = (0..30).map(|k| 0.3 * k as f64).collect();
    let sxx: Vec<f64> = field.iter().map(|b| 2e-3 / (1.0 + (0.8 * b).powi(2))).collect();
    let sxy: Vec<f64> = field
        .iter()
        .map(|b| -2e-3 * 0.8 * b / (1.0 + (0.8 * b).powi(2)))
        .collect();
    let rxx: Vec<f64> = field.iter().map(|b| 500.0 + 20.0 * b * b).collect();
    let rxy: Vec<f64> = field.iter().map(|b| -400.0 * b).collect();
    table(vec![
        floats("field_T", field),
        floats("sigma_xx_S", sxx.clone()),
        floats("sigma_xy_S", sxy.clone()),
        floats("sigma_xx_fit_S", sxx),
        floats("sigma_xy_fit_S", sxy),
        floats("rho_xx_ohm_sq", rxx.clone()),
        floats("rho_xy_ohm", rxy.clone()),
        floats("rho_xx_fit_ohm_sq", rxx),
        floats("rho_xy_fit_ohm", rxy),
        floats("residual_xx", vec![0.0; 30]),
        floats("residual_xy", vec![0.0; 30]),
    ])
}

#[test]
fn tensor_fits_draw_two_panels_of_data_and_model() {
    let frame = tensor_frame();
    for kind in ["conductivity_fit", "resistivity_fit"] {
        let figure = build(&frame, "inas-carriers", &options(kind)).unwrap();
        let (svg, elements) = checked_svg(&figure);
        assert_eq!(count(&elements, "panel"), 2, "{kind}");
        assert_eq!(count(&elements, "point"), 60, "{kind}");
        assert_eq!(count(&elements, "line"), 2, "{kind}");
        assert!(svg.contains(r#"<tspan baseline-shift="sub" font-size="90%">xy</tspan>"#));
        check_vega(&figure);
    }
}

#[test]
fn magnetoresistance_in_percent_and_kohler_log_log() {
    let field: Vec<f64> = (0..20).map(|k| 0.5 * k as f64).collect();
    let mr: Vec<f64> = field.iter().map(|b| 0.05 * b * b / 9.0).collect();
    let frame = table(vec![
        floats("field_T", field.clone()),
        floats("rho_xx_ohm_sq", mr.iter().map(|m| 100.0 * (1.0 + m)).collect()),
        floats("rho_xx_ohm_sq_unc", vec![0.1; 20]),
        floats("magnetoresistance", mr.clone()),
        floats("magnetoresistance_unc", vec![0.001; 20]),
    ]);
    let figure = build(&frame, "mr", &options("magnetoresistance")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), 20);
    assert!(svg.contains("(%)"));
    let spec = check_vega(&figure);
    let shown = vega_values(&spec, "MR", "y");
    assert!(close(shown[3], 100.0 * mr[3], 1e-12));
    // The same from a symmetrized table: rho(0) from its zero-field row.
    let symmetrized = frame
        .drop("magnetoresistance")
        .unwrap()
        .drop("magnetoresistance_unc")
        .unwrap();
    let figure = build(&symmetrized, "sym", &options("magnetoresistance")).unwrap();
    let spec = check_vega(&figure);
    assert!(close(vega_values(&spec, "MR", "y")[3], 100.0 * mr[3], 1e-9));
    let without_zero = symmetrized.slice(1, 19);
    let error = build(&without_zero, "sym", &options("magnetoresistance")).unwrap_err();
    assert!(error.to_string().contains("mr.ratio"), "{error}");

    // Kohler: two temperatures, log-log.
    let mut t = vec![10.0; 20];
    t.extend(vec![100.0; 20]);
    let x: Vec<f64> = field.iter().chain(&field).map(|b| b / 100.0).collect();
    let mrs: Vec<f64> = mr.iter().chain(&mr).copied().collect();
    let frame = table(vec![
        floats("temperature_K", t),
        floats("field_T", field.iter().chain(&field).copied().collect()),
        floats("x_T_per_ohm", x),
        floats("magnetoresistance", mrs),
        floats("magnetoresistance_unc", vec![0.0005; 40]),
        Column::new("used".into(), vec![true; 40]),
    ]);
    let figure = build(&frame, "kohler", &options("kohler")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    // The zero-field points cannot sit on log axes and are left out.
    assert_eq!(count(&elements, "point"), 38);
    assert_eq!(series_marks(&svg, "10 K"), 19);
    let spec = check_vega(&figure);
    assert!(scale_types(&spec, "x")
        .iter()
        .chain(&scale_types(&spec, "y"))
        .all(|t| t == "log"));
}

fn oscillation_frame() -> DataFrame {
    let mut kind = Vec::new();
    let mut cells: [Vec<Option<f64>>; 6] = Default::default();
    let mut push = |k: &'static str, row: [Option<f64>; 6]| {
        kind.push(k);
        for (cell, value) in cells.iter_mut().zip(row) {
            cell.push(value);
        }
    };
    let lk = |t: f64, b: f64| {
        let x = 14.69 * 0.067 * t / b;
        0.5 * x / x.sinh()
    };
    for t in [1.5, 3.0, 6.0] {
        for k in 0..50 {
            let x = 0.12 + 0.004 * k as f64;
            push(
                "oscillation",
                [
                    Some(t),
                    Some(1.0 / x),
                    Some(x),
                    None,
                    Some(0.1 * (62.8 * x).cos()),
                    None,
                ],
            );
        }
        for k in 0..64 {
            let f = 0.5 * k as f64;
            push(
                "fft",
                [
                    Some(t),
                    None,
                    None,
                    Some(f),
                    Some(lk(t, 6.0) * (-(f - 10.0).powi(2)).exp()),
                    None,
                ],
            );
        }
        for b in [5.0, 7.0] {
            push("mass", [Some(t), Some(b), None, None, Some(lk(t, b)), Some(0.005)]);
        }
    }
    for b in [5.0, 7.0] {
        for k in 0..48 {
            let t = 0.75 + 0.14 * k as f64;
            push("mass_fit", [Some(t), Some(b), None, None, Some(lk(t, b)), None]);
        }
    }
    for k in 0..5 {
        let x = 0.12 + 0.03 * k as f64;
        push(
            "dingle",
            [Some(1.5), None, Some(x), None, Some(0.3 * (-3.0 * x).exp()), Some(0.01)],
        );
    }
    // The fitted Dingle line at the first and last window.
    for x in [0.12, 0.24] {
        push("dingle_fit", [Some(1.5), None, Some(x), None, None, None]);
    }
    // The Landau fan of F = 10 T and beta = 0.25: minima at integer n, maxima at half-integer
    // n, where n = F / B + beta; its line from 1/B = 0.
    for k in 4..12 {
        let n = 0.5 * k as f64;
        push(
            "landau",
            [Some(1.5), None, Some((n - LANDAU_BETA) / LANDAU_F), None, None, None],
        );
    }
    for x in [0.0, (5.5 - LANDAU_BETA) / LANDAU_F] {
        push("landau_fit", [Some(1.5), None, Some(x), None, None, None]);
    }
    let rows = kind.len();
    let inverse_field = cells[2].clone();
    let dingle: Vec<Option<f64>> = (0..rows)
        .map(|r| match kind[r] {
            "dingle" => Some(
                DINGLE_INTERCEPT + DINGLE_SLOPE * inverse_field[r].unwrap() + if r % 2 == 0 { 0.03 } else { -0.03 },
            ),
            "dingle_fit" => Some(DINGLE_INTERCEPT + DINGLE_SLOPE * inverse_field[r].unwrap()),
            _ => None,
        })
        .collect();
    let landau_index: Vec<Option<f64>> = (0..rows)
        .map(|r| {
            kind[r]
                .starts_with("landau")
                .then(|| LANDAU_F * inverse_field[r].unwrap() + LANDAU_BETA)
        })
        .collect();
    let [t, b, inv, f, value, unc] = cells;
    table(vec![
        texts("kind", kind),
        optional("temperature_K", t),
        optional("field_T", b),
        optional("inverse_field_per_T", inv),
        optional("frequency_T", f),
        optional("value_ohm_sq", value),
        optional("value_ohm_sq_unc", unc),
        optional("dingle_ordinate", dingle),
        optional("landau_index", landau_index),
    ])
}

const LANDAU_F: f64 = 10.0;
const LANDAU_BETA: f64 = 0.25;
const DINGLE_INTERCEPT: f64 = 0.5;
const DINGLE_SLOPE: f64 = -12.0;

#[test]
fn oscillation_recipes_pick_their_row_kinds() {
    let frame = oscillation_frame();
    let figure = build(&frame, "sdh", &options("oscillation_fft")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "line"), 3);
    assert!(svg.contains("1.5 K") && svg.contains("6 K"));

    let figure = build(&frame, "sdh", &options("oscillation_mass")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), 6);
    assert_eq!(count(&elements, "line"), 2);
    assert!(svg.contains("LK fit"), "{svg}");
    let spec = check_vega(&figure);
    assert_eq!(scale_types(&spec, "y")[0], "log");
    // Amplitude / T at 1.5 K in the 5 T window.
    // Legend names are plain text in Vega-Lite, where markup would show raw.
    let points = vega_values(&spec, "B_eff = 5 T", "y");
    assert!(!points.is_empty());

    let figure = build(&frame, "sdh", &options("oscillation_curves")).unwrap();
    let (_, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "line"), 3);

    let figure = build(&frame, "sdh", &options("dingle")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), 5);
    assert_eq!(count(&elements, "error-bar"), 5);
    // The fitted line, from the dingle_fit rows, over the windows.
    assert_eq!(count(&elements, "line"), 1);
    assert_eq!(series_marks(&svg, "fitted line"), 1);
    let spec = check_vega(&figure);
    let (x, y) = (
        vega_values(&spec, "fitted line", "x"),
        vega_values(&spec, "fitted line", "y"),
    );
    assert_eq!(x, [0.12, 0.24]);
    let slope = (y[1] - y[0]) / (x[1] - x[0]);
    assert!(close(slope, DINGLE_SLOPE, 1e-9), "{slope}");

    // Without mass rows the mass plot says why.
    let no_mass = frame
        .filter(&frame.column("kind").unwrap().str().unwrap().equal("fft"))
        .unwrap();
    let error = build(&no_mass, "sdh", &options("oscillation_mass")).unwrap_err();
    assert!(error.to_string().contains("two or more temperatures"), "{error}");
}

#[test]
fn weak_localization_in_microsiemens_with_the_fit() {
    let field: Vec<f64> = (-20..=20).map(|k| 0.005 * k as f64).collect();
    let delta: Vec<f64> = field.iter().map(|b| 2e-6 * (b.abs() / 0.01).ln_1p()).collect();
    let n = field.len();
    let frame = table(vec![
        texts("sample", vec!["gan"; n]),
        floats("temperature_K", vec![2.0; n]),
        floats("field_T", field.clone()),
        floats("delta_sigma_S", delta.clone()),
        floats("delta_sigma_S_unc", vec![5e-8; n]),
        floats("model_S", delta),
        Column::new(
            "fitted".into(),
            field.iter().map(|b| b.abs() <= 0.08).collect::<Vec<bool>>(),
        ),
    ]);
    let figure = build(
        &frame,
        "film-wl",
        &PlotOptions {
            analysis: Some("mr.weak_localization".into()),
            ..PlotOptions::default()
        },
    )
    .unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), n);
    assert_eq!(count(&elements, "line"), 1);
    assert!(svg.contains("(µS)"), "{svg}");
    let spec = check_vega(&figure);
    let top = vega_values(&spec, "measured", "y").into_iter().fold(0.0, f64::max);
    // The largest fitted field is 0.08 T: 2 ln(1 + 8) µS.
    assert!(close(top, 2.0 * (8.0f64).ln_1p(), 1e-9), "{top}");
}

#[test]
fn columns_plots_any_dataset_and_skips_what_cannot_be_drawn() {
    let frame = table(vec![
        texts("sample", vec!["a", "a", "a", "b", "b", "b"]),
        floats("temperature_K", vec![10.0, 20.0, 30.0, 10.0, 20.0, 30.0]),
        floats("density_m3", vec![1e21, f64::NAN, -3e20, 2e21, 3e21, 4e21]),
        floats("density_m3_unc", vec![1e19, 1e19, 1e19, 5e21, f64::INFINITY, 1e19]),
        floats("weird", vec![f64::INFINITY, 1.0, 2.0, 3.0, 4.0, 5.0]),
    ]);
    let opts = PlotOptions {
        x: Some("temperature_K".into()),
        y: vec!["density_m3".into()],
        ..PlotOptions::default()
    };
    let figure = build(&frame, "imported", &opts).unwrap();
    assert_eq!(figure.kind(), "columns");
    let (svg, elements) = checked_svg(&figure);
    // NaN and the negative density on the log axis are skipped; the infinite error bar too.
    assert_eq!(count(&elements, "point"), 4);
    assert_eq!(count(&elements, "error-bar"), 3);
    assert_eq!(series_marks(&svg, "a"), 1);
    // An error bar reaching below zero on a log axis stops at the axis.
    let spec = check_vega(&figure);
    assert_eq!(scale_types(&spec, "y")[0], "log");
    // Linear axis on request: the negative value is drawn.
    let figure = build(
        &frame,
        "imported",
        &PlotOptions {
            log_y: Some(false),
            ..opts.clone()
        },
    )
    .unwrap();
    let (_, elements) = checked_svg(&figure);
    assert_eq!(count(&elements, "point"), 5);
    // Several y columns and explicit error columns.
    let figure = build(
        &frame,
        "imported",
        &PlotOptions {
            y: vec!["density_m3".into(), "weird".into()],
            y_error: vec!["density_m3_unc".into(), "density_m3_unc".into()],
            series_by: Some(vec![]),
            log_y: Some(false),
            ..opts.clone()
        },
    )
    .unwrap();
    let (svg, _) = checked_svg(&figure);
    assert_eq!(series_marks(&svg, "weird"), 5);
}

#[test]
fn errors_say_what_to_change() {
    let frame = hall_frame();
    let error = build(&frame, "si-hall", &options("histogram")).unwrap_err();
    assert!(matches!(error, PlotError::UnknownKind { .. }));
    let message = error.to_string();
    assert!(message.contains("histogram") && message.contains("hall_density") && message.contains("kohler"));

    let error = build(&frame, "si-hall", &options("kohler")).unwrap_err();
    let message = error.to_string();
    assert!(matches!(error, PlotError::MissingColumn { .. }), "{message}");
    assert!(message.contains("x_T_per_ohm"), "{message}");
    assert!(message.contains("density_m3, density_m3_unc"), "{message}");
    assert!(message.contains("mr.kohler"), "{message}");

    let error = build(&frame, "si-hall", &PlotOptions::default()).unwrap_err();
    assert!(error.to_string().contains("needs `x`"), "{error}");

    let bad_size = PlotOptions {
        analysis: Some("hall.reduce".into()),
        width: Some(f64::NAN),
        ..PlotOptions::default()
    };
    assert!(build(&frame, "si-hall", &bad_size)
        .unwrap_err()
        .to_string()
        .contains("width"));

    let wrong = PlotOptions {
        x: Some("sample".into()),
        y: vec!["density_m3".into()],
        ..PlotOptions::default()
    };
    let error = build(&frame, "si-hall", &wrong).unwrap_err();
    assert!(matches!(error, PlotError::NotNumeric { .. }), "{error}");

    let nothing = table(vec![
        floats("temperature_K", vec![1.0, 2.0]),
        floats("hall_mobility_m2_per_Vs", vec![f64::NAN, -f64::INFINITY]),
    ]);
    let error = build(&nothing, "empty", &options("hall_mobility")).unwrap_err();
    assert!(matches!(error, PlotError::NoFinitePoints { .. }), "{error}");
    // Nothing finite at all: the values are to blame, not the log axis.
    assert!(error.to_string().contains("null or not finite in every row"), "{error}");
    assert!(!error.to_string().contains("log axis"), "{error}");
    // Finite values that only the log axis drops: the log axis is named.
    let negative = table(vec![
        floats("temperature_K", vec![0.0, -2.0]),
        floats("hall_mobility_m2_per_Vs", vec![1.0, 2.0]),
    ]);
    let error = build(&negative, "negative", &options("hall_mobility")).unwrap_err();
    assert!(error.to_string().contains("log axis"), "{error}");

    let error = build(
        &frame,
        "si-hall",
        &PlotOptions {
            kind: Some("hall_density".into()),
            series_by: Some(vec!["wafer".into()]),
            ..PlotOptions::default()
        },
    )
    .unwrap_err();
    assert!(error.to_string().contains("series_by names `wafer`"), "{error}");
}

#[test]
fn options_parse_from_json_params() {
    let options: PlotOptions = serde_json::from_value(serde_json::json!({
        "kind": "columns", "x": "field_T", "y": "rho_xx_ohm_sq", "series_by": ["sample"],
        "log_y": true, "width": 800, "title": "mine"
    }))
    .unwrap();
    assert_eq!(options.y, ["rho_xx_ohm_sq"]);
    assert_eq!(options.width, Some(800.0));
    let options: PlotOptions = serde_json::from_value(serde_json::json!({"y": ["a", "b"], "y_error": null})).unwrap();
    assert_eq!(options.y.len(), 2);
    assert!(options.y_error.is_empty());
    assert!(serde_json::from_value::<PlotOptions>(serde_json::json!({"colour": "red"})).is_err());
    assert_eq!(
        serde_json::from_value::<PlotOptions>(serde_json::json!({})).unwrap(),
        PlotOptions::default()
    );
}

#[test]
fn text_is_escaped_in_titles_and_legends() {
    let frame = table(vec![
        texts("sample", vec!["<A&B>", "<A&B>", "\"q\""]),
        floats("temperature_K", vec![10.0, 20.0, 30.0]),
        floats("density_m3", vec![1e21, 2e21, 3e21]),
    ]);
    let figure = build(
        &frame,
        "a&b",
        &PlotOptions {
            kind: Some("hall_density".into()),
            title: Some("n < 10^{16} & T > 4 K".into()),
            ..PlotOptions::default()
        },
    )
    .unwrap();
    let (svg, elements) = checked_svg(&figure);
    assert!(svg.contains("&lt;A&amp;B&gt;"));
    assert_eq!(count(&elements, "legend-entry"), 2);
}

/// The sample figures, one of each common recipe, render whole in both formats: each SVG is
/// well-formed with its title, axes and marks, and each Vega-Lite spec is v5 with data. When
/// `MOBILIS_PLOT_SAMPLES` names a folder, they are also written there (`NAME.svg`,
/// `NAME.vl.json`) for a person to look at; that part alone waits for the switch.
#[test]
fn sample_figures_render_and_are_written_when_asked() {
    let hall = hall_frame();
    let figures = [
        (
            "hall_density",
            build(&hall, "si-hall", &options("hall_density")).unwrap(),
        ),
        (
            "hall_mobility",
            build(&hall, "si-hall", &options("hall_mobility")).unwrap(),
        ),
        (
            "arrhenius",
            build(&arrhenius_frame(1.5), "si-arrhenius", &options("arrhenius")).unwrap(),
        ),
        (
            "oscillation_mass",
            build(&oscillation_frame(), "hemt-oscillations", &options("oscillation_mass")).unwrap(),
        ),
        (
            "resistivity_fit",
            build(&tensor_frame(), "inas-two-band", &options("resistivity_fit")).unwrap(),
        ),
        (
            "dingle",
            build(&oscillation_frame(), "hemt-oscillations", &options("dingle")).unwrap(),
        ),
        (
            "landau_fan",
            build(&oscillation_frame(), "hemt-oscillations", &options("landau_fan")).unwrap(),
        ),
        (
            "hall_density_jittered",
            build(
                &jittered_hall_frame(),
                "si-hall",
                &PlotOptions {
                    series_by: Some(vec!["sample".into(), "field_T".into()]),
                    selection: vec![("field_T".into(), "0.5".into())],
                    ..options("hall_density")
                },
            )
            .unwrap(),
        ),
    ];
    let folder = std::env::var_os("MOBILIS_PLOT_SAMPLES").map(std::path::PathBuf::from);
    match &folder {
        Some(folder) => {
            std::fs::create_dir_all(folder).unwrap();
            println!("writing the sample figures into {}", folder.display());
        }
        None => println!("set MOBILIS_PLOT_SAMPLES=FOLDER to write the sample figures there"),
    }
    for (name, figure) in figures {
        let kind = name.strip_suffix("_jittered").unwrap_or(name);
        assert_eq!(figure.kind(), kind, "{name}");
        let (svg, elements) = checked_svg(&figure);
        assert!(count(&elements, "mark") > 0, "{name} draws no marks:\n{svg}");
        assert!(svg.trim_end().ends_with("</svg>"), "{name} is cut short");
        let spec = check_vega(&figure);
        let layers = vega_layers(&spec);
        assert!(!layers.is_empty(), "{name}: a Vega-Lite spec without layers");
        assert!(
            layers.iter().any(|layer| layer["data"]["values"]
                .as_array()
                .is_some_and(|values| !values.is_empty())),
            "{name}: a Vega-Lite spec without data"
        );
        if let Some(folder) = &folder {
            std::fs::write(folder.join(format!("{name}.svg")), &svg).unwrap();
            std::fs::write(
                folder.join(format!("{name}.vl.json")),
                serde_json::to_string_pretty(&spec).unwrap(),
            )
            .unwrap();
        }
    }
}

#[test]
fn a_crowded_panel_is_thinned_to_its_budget_and_says_so() {
    // 60 samples x 500 temperatures: 30 000 markers asked for, a panel draws at most 12 000.
    let (mut sample, mut temperature, mut density) = (Vec::new(), Vec::new(), Vec::new());
    for s in 0..60 {
        for t in 0..500 {
            sample.push(format!("S{s:02}"));
            temperature.push(20.0 + t as f64);
            density.push(1e21 * (1.0 + s as f64 * 0.01));
        }
    }
    let sample: Vec<&str> = sample.iter().map(String::as_str).collect();
    let frame = table(vec![
        texts("sample", sample),
        floats("temperature_K", temperature),
        floats("density_m3", density),
    ]);
    let figure = build(&frame, "crowded", &options("hall_density")).unwrap();
    let (svg, _) = checked_svg(&figure);
    let marks = svg.matches("class=\"mark ").count();
    assert!(
        (6_000..=crate::figure::MAX_PANEL_MARKERS).contains(&marks),
        "{marks} marks"
    );
    assert!(
        svg.contains("(1 in 3 of 500 shown)"),
        "the legend says the series are thinned"
    );
}

// ---------------------------------------------------------------------------------------
// Series by nominal setpoints, drawing order, the Landau fan, titles and units.

/// `hall.reduce` output of two samples whose field setpoint wandered: every row's mean field
/// lies between 0.4997 and 0.5002 T, and the temperatures scatter around their setpoints.
fn jittered_hall_frame() -> DataFrame {
    let mut frame = hall_frame();
    let rows = frame.height();
    let field: Vec<f64> = (0..rows)
        .map(|r| 0.4997 + 0.0005 * ((r * 7) % 11) as f64 / 10.0)
        .collect();
    let distinct = {
        let mut f = field.clone();
        f.sort_by(f64::total_cmp);
        f.dedup();
        f.len()
    };
    assert!(distinct >= 10, "the fields differ: {distinct}");
    frame.with_column(floats("field_T", field)).unwrap();
    frame
}

fn legend_names(figure: &Figure) -> Vec<String> {
    let (_, elements) = checked_svg(figure);
    elements
        .iter()
        .filter(|e| e.has_class("legend-entry"))
        .map(|e| e.attribute("data-series").unwrap().to_owned())
        .collect()
}

#[test]
fn jittered_fields_make_one_series_per_sample_named_by_the_nominal_value() {
    let frame = jittered_hall_frame();
    // Default: sample, and the field only where its nominal value varies: two series.
    let figure = build(&frame, "hall", &options("hall_density")).unwrap();
    assert_eq!(legend_names(&figure), ["W1", "W2"]);
    // Asked for by field too: still two, labelled with the nominal field.
    let by_field = PlotOptions {
        series_by: Some(vec!["sample".into(), "field_T".into()]),
        ..options("hall_density")
    };
    let figure = build(&frame, "hall", &by_field).unwrap();
    assert_eq!(legend_names(&figure), ["W1, 0.5 T", "W2, 0.5 T"]);
    // A second setpoint 0.1 T higher is a series of its own.
    let mut two_fields = frame.clone();
    let field: Vec<f64> = frame
        .column("field_T")
        .unwrap()
        .f64()
        .unwrap()
        .iter()
        .enumerate()
        .map(|(r, b)| b.unwrap() + if r % 2 == 0 { 0.1 } else { 0.0 })
        .collect();
    two_fields.with_column(floats("field_T", field)).unwrap();
    let figure = build(&two_fields, "hall", &options("hall_density")).unwrap();
    assert_eq!(
        legend_names(&figure),
        ["W1, 0.6 T", "W1, 0.5 T", "W2, 0.6 T", "W2, 0.5 T"]
    );
}

#[test]
fn temperatures_group_by_setpoint_and_are_named_by_their_nominal_value() {
    // Two setpoints whose readings scatter: 299.6-300.4 K and 77.12-77.2 K; a third at 4.2 K.
    let t = vec![299.6, 300.4, 300.1, 77.12, 77.2, 77.15, 4.2, 4.21];
    let field: Vec<f64> = (0..t.len()).map(|k| 0.1 * k as f64 - 0.35).collect();
    let rows = t.len();
    let frame = table(vec![
        floats("temperature_K", t),
        floats("field_T", field),
        floats("magnetoresistance", vec![0.01; rows]),
    ]);
    let figure = build(&frame, "mr", &options("magnetoresistance")).unwrap();
    assert_eq!(legend_names(&figure), ["300 K", "77 K", "4.2 K"]);
}

#[test]
fn nominal_values_are_the_roundest_within_the_tolerance() {
    use crate::recipes::{nominal_keys, roundest, Setpoint};
    assert_eq!(roundest(0.49996, 2.5e-3), 0.5);
    assert_eq!(roundest(0.5002, 2.5e-3), 0.5);
    assert_eq!(roundest(9.0001, 2.5e-3), 9.0);
    assert_eq!(roundest(-0.0003, 2.5e-3), 0.0);
    assert!((roundest(77.31, 0.19) - 77.3).abs() < 1e-12);
    assert_eq!(roundest(1.998, 0.025), 2.0);
    // Sub-kelvin setpoints 0.1 K apart stay apart (the sweep grouping allows 0.05 K).
    let values = [0.3, 0.301, 0.4, 0.5, 1.5];
    let keys = nominal_keys(&values, &[0, 1, 2, 3, 4], Setpoint::Temperature);
    let keys: Vec<&str> = keys.iter().map(|k| k.as_deref().unwrap()).collect();
    assert_eq!(keys, ["0.3", "0.3", "0.4", "0.5", "1.5"]);
    // Fields: runs no wider than 5 mT, signs kept.
    let values = [-0.5001, -0.4998, 0.4999, 0.5003, 0.52, 1.0];
    let keys = nominal_keys(&values, &[0, 1, 2, 3, 4, 5], Setpoint::Field);
    let keys: Vec<&str> = keys.iter().map(|k| k.as_deref().unwrap()).collect();
    assert_eq!(keys, ["−0.5", "−0.5", "0.5", "0.5", "0.52", "1"]);
    // Rows outside the selection get no key.
    let keys = nominal_keys(&values, &[5], Setpoint::Field);
    assert_eq!(keys.iter().filter(|k| k.is_some()).count(), 1);
}

/// In every panel of the SVG, each series group drawn as a line comes after every group of
/// markers; in Vega-Lite, every line layer after every point layer.
fn assert_lines_drawn_last(figure: &Figure) {
    let (_, elements) = checked_svg(figure);
    let mut panel_marks: Vec<Vec<String>> = Vec::new();
    for element in &elements {
        if element.has_class("panel") {
            panel_marks.push(Vec::new());
        }
        if element.has_class("series") {
            let mark = element.attribute("data-mark").unwrap().to_owned();
            panel_marks.last_mut().unwrap().push(mark);
        }
    }
    for marks in &panel_marks {
        let first_line = marks.iter().position(|m| m == "line").expect("a line");
        let last_points = marks.iter().rposition(|m| m == "points").expect("points");
        assert!(last_points < first_line, "{marks:?}");
    }
    let spec = check_vega(figure);
    let panels: Vec<&Value> = match spec.get("concat") {
        Some(panels) => panels.as_array().unwrap().iter().collect(),
        None => vec![&spec],
    };
    for panel in panels {
        let marks: Vec<&str> = panel["layer"]
            .as_array()
            .unwrap()
            .iter()
            .map(|l| l["mark"]["type"].as_str().unwrap())
            .collect();
        let first_line = marks.iter().position(|m| *m == "line").unwrap();
        let last_point = marks.iter().rposition(|m| *m == "point").unwrap();
        assert!(last_point < first_line, "{marks:?}");
    }
}

#[test]
fn fit_lines_are_drawn_above_the_markers() {
    let figure = build(&arrhenius_frame(1.5), "a", &options("arrhenius")).unwrap();
    assert_lines_drawn_last(&figure);
    let figure = build(&tensor_frame(), "t", &options("resistivity_fit")).unwrap();
    assert_eq!(figure.panels.len(), 2);
    assert_lines_drawn_last(&figure);
    let frame = oscillation_frame();
    for kind in ["dingle", "landau_fan", "oscillation_mass"] {
        assert_lines_drawn_last(&build(&frame, "sdh", &options(kind)).unwrap());
    }
}

#[test]
fn landau_fan_draws_the_extrema_and_a_line_whose_slope_is_the_frequency() {
    let frame = oscillation_frame();
    assert!(kinds_for(Some("mr.oscillations")).iter().any(|k| k == "landau_fan"));
    let figure = build(&frame, "sdh", &options("landau_fan")).unwrap();
    let (svg, elements) = checked_svg(&figure);
    // Minima (integer index) filled, maxima (half-integer) open.
    assert_eq!(series_marks(&svg, "minima"), 4);
    assert_eq!(series_marks(&svg, "maxima"), 4);
    assert_eq!(count(&elements, "line"), 1);
    let spec = check_vega(&figure);
    let name = "fit, F = 10 T";
    assert!(svg.contains(name), "{svg}");
    let (x, y) = (vega_values(&spec, name, "x"), vega_values(&spec, name, "y"));
    assert_eq!(x[0], 0.0, "the line starts at 1/B = 0");
    assert!(close(y[0], LANDAU_BETA, 1e-12));
    // The y axis reaches down to the line's intercept, which the figure is read for.
    let domain = &vega_layers(&spec)[0]["encoding"]["y"]["scale"]["domain"];
    assert!(domain[0].as_f64().unwrap() <= LANDAU_BETA, "{domain}");
    let slope = (y[1] - y[0]) / (x[1] - x[0]);
    assert!(close(slope, LANDAU_F, 1e-9), "{slope}");
    // Every extremum lies on the line.
    for kind in ["minima", "maxima"] {
        let (px, py) = (vega_values(&spec, kind, "x"), vega_values(&spec, kind, "y"));
        for (x, n) in px.iter().zip(&py) {
            assert!((slope * x + y[0] - n).abs() < 1e-9);
        }
    }
    // A table without extrema says how to get them.
    let no_fan = frame
        .filter(&frame.column("kind").unwrap().str().unwrap().equal("fft"))
        .unwrap();
    let error = build(&no_fan, "sdh", &options("landau_fan")).unwrap_err();
    assert!(error.to_string().contains("landau_fan: true"), "{error}");
}

#[test]
fn the_title_names_the_rows_kept() {
    let filtered = PlotOptions {
        selection: vec![("sample".into(), "W1".into()), ("temperature_K".into(), "300".into())],
        ..options("hall_density")
    };
    let figure = build(&hall_frame(), "si-hall", &filtered).unwrap();
    assert_eq!(
        figure.title(),
        "Carrier density — si-hall (sample = W1, temperature = 300 K)"
    );
    let (_, elements) = checked_svg(&figure);
    let title = elements.iter().find(|e| e.name == "title").unwrap();
    assert!(title.text.contains("sample = W1"), "{}", title.text);
    assert!(check_vega(&figure)["title"].as_str().unwrap().contains("sample = W1"));
    // A title given by the caller keeps the selection too.
    let titled = PlotOptions {
        title: Some("Wafer W1".into()),
        ..filtered
    };
    assert_eq!(
        build(&hall_frame(), "si-hall", &titled).unwrap().title(),
        "Wafer W1 (sample = W1, temperature = 300 K)"
    );
    // Without a selection, no parentheses.
    assert_eq!(
        build(&hall_frame(), "si-hall", &options("hall_density"))
            .unwrap()
            .title(),
        "Carrier density — si-hall"
    );
}

#[test]
fn hall_coefficients_and_log_densities_are_shown_in_the_tables_units() {
    // The Hall coefficient in cm^3/C, as the table shows it (1 m^3/C = 1e6 cm^3/C).
    let frame = table(vec![
        floats("temperature_K", vec![100.0, 200.0, 300.0]),
        floats("hall_coefficient_m3_per_C", vec![-6.25e-3, -6.0e-3, -5.5e-3]),
        floats("ln_reduced_density_m3", vec![40.0, 41.0, 42.0]),
    ]);
    let figure = build(
        &frame,
        "rh",
        &PlotOptions {
            x: Some("temperature_K".into()),
            y: vec!["hall_coefficient_m3_per_C".into()],
            ..options("columns")
        },
    )
    .unwrap();
    let (svg, _) = checked_svg(&figure);
    assert!(
        svg.contains(r#"cm<tspan baseline-shift="super" font-size="90%">3</tspan>/C"#),
        "{svg}"
    );
    let spec = check_vega(&figure);
    assert_eq!(
        vega_values(&spec, "hall_coefficient_m3_per_C", "y"),
        [-6250.0, -6000.0, -5500.0]
    );
    // ln(n / cm^-3) = ln(n / m^-3) - ln(1e6), as customary_display shows the column.
    let figure = build(
        &frame,
        "ln",
        &PlotOptions {
            x: Some("temperature_K".into()),
            y: vec!["ln_reduced_density_m3".into()],
            ..options("columns")
        },
    )
    .unwrap();
    let spec = check_vega(&figure);
    let shown = vega_values(&spec, "ln_reduced_density_m3", "y");
    let table_shows = mobilis_physics::units::customary_display("ln_reduced_density_m3").unwrap();
    for (shown, stored) in shown.iter().zip([40.0, 41.0, 42.0]) {
        assert!(close(*shown, stored - 1e6f64.ln(), 1e-12));
        assert!(close(*shown, table_shows.from_si(stored), 1e-12));
    }
    assert!(
        figure.to_svg().contains("n in cm"),
        "the axis says the unit inside the logarithm"
    );
}

/// The smallest text of a figure as drawn at the width a report gives it (its natural width,
/// at most 1000 px), super- and subscripts included.
fn smallest_drawn_text(figure: &Figure) -> (f64, String) {
    let svg = figure.to_svg();
    let elements = parse_xml(&svg).unwrap();
    let width: f64 = elements[0].attribute("width").unwrap().parse().unwrap();
    let scale = (1000.0 / width).min(1.0);
    let root: f64 = elements[0].attribute("font-size").unwrap().parse().unwrap();
    let mut smallest = (f64::INFINITY, String::new());
    for element in &elements {
        let size = match element.name.as_str() {
            "text" => element
                .attribute("font-size")
                .map_or(root, |s| s.parse::<f64>().unwrap()),
            _ => continue,
        };
        // A script inside shrinks to its percentage of the text.
        let inner = if svg.contains("<tspan") {
            crate::svg::SCRIPT_PERCENT / 100.0
        } else {
            1.0
        };
        let drawn = size * scale * inner;
        if drawn < smallest.0 {
            smallest = (drawn, element.text.clone());
        }
    }
    smallest
}

#[test]
fn no_text_is_under_ten_pixels_at_the_drawn_width() {
    let oscillations = oscillation_frame();
    let figures = [
        build(&hall_frame(), "si-hall", &options("hall_density")).unwrap(),
        build(&arrhenius_frame(1.5), "si-arrhenius", &options("arrhenius")).unwrap(),
        build(&tensor_frame(), "inas-two-band", &options("resistivity_fit")).unwrap(),
        build(&tensor_frame(), "inas-two-band", &options("conductivity_fit")).unwrap(),
        build(&oscillations, "sdh", &options("oscillation_mass")).unwrap(),
        build(&oscillations, "sdh", &options("landau_fan")).unwrap(),
    ];
    for figure in &figures {
        let (size, text) = smallest_drawn_text(figure);
        assert!(size >= 10.0, "{}: {size} px for {text:?}", figure.kind());
    }
    // Two panels side by side fit the 1000 px a report gives them.
    let two = &figures[2];
    assert_eq!(two.panels.len(), 2);
    assert!(two
        .to_svg()
        .starts_with(r#"<svg xmlns="http://www.w3.org/2000/svg" width="1000""#));
}

#[test]
fn long_legend_names_are_cut_in_their_visible_text_and_keep_their_markup() {
    use crate::svg::truncate;
    let name = "HEMT-A1, B_{eff} = 6.756 T: Lifshitz-Kosevich fit";
    // 14 to 34 visible characters, 40 % of the panel.
    let cut = truncate(name, 500.0);
    assert!(cut.ends_with('…'), "{cut}");
    assert!(cut.starts_with("HEMT-A1, B_{eff} = "), "{cut}");
    assert_eq!(cut.matches('{').count(), cut.matches('}').count(), "{cut}");
    let visible = crate::units::plain_text(&cut).chars().count();
    assert!((14..=27).contains(&visible), "{visible}: {cut}");
    // Short names, and names that fit a wide panel, are left alone.
    assert_eq!(truncate("W1, 0.5 T", 500.0), "W1, 0.5 T");
    assert_eq!(
        truncate("B_{eff} = 6.756 T: LK fit", 640.0),
        "B_{eff} = 6.756 T: LK fit"
    );
}
