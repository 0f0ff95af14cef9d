//! Axis units of the trade and the small text markup of axis titles.
//!
//! Datasets hold SI values; readers of transport measurements expect cm^-3, cm^2/(V s), ohm cm
//! and the like. `mobilis_physics::units::customary_display` is the one place that knows those
//! conversions for the contract's suffixes, so it is asked first; this module adds only the
//! columns it does not cover (conductances in S, 1/T, T/ohm, Hall coefficients, eV) and turns
//! the unit spelling into the title markup.
//!
//! The markup is plain text with `^{...}` for a superscript and `_{...}` for a subscript, so
//! that one title serves both renderers: the SVG draws shifted `tspan`s, Vega-Lite gets
//! Unicode super- and subscripts where they exist.

use mobilis_physics::units::customary_display;

/// How a column is shown: displayed = SI value * `factor` + `offset`, in `unit` (markup), with
/// a readable `name` taken from the column's stem. The offset is zero except for the logarithm
/// of a density (`ln_..._m3`, shown as ln(n / cm^-3)); uncertainties take the factor alone.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct ColumnDisplay {
    pub name: String,
    pub unit: Option<String>,
    pub factor: f64,
    pub offset: f64,
}

/// Suffixes that `customary_display` would misread (`x_T_per_ohm` is no resistance) or does
/// not know, longest first. The Hall coefficients are quoted in cm^2/C and cm^3/C in the
/// trade (1 m^2 = 1e4 cm^2, 1 m^3 = 1e6 cm^3).
const LOCAL: &[(&str, &str, f64)] = &[
    ("_T_per_ohm", "T/Ω", 1.0),
    ("_m2_per_C", "cm^{2}/C", 1e4),
    ("_m3_per_C", "cm^{3}/C", 1e6),
    ("_per_T", "T^{−1}", 1.0),
    ("_per_eV", "eV^{−1}", 1.0),
    ("_eV", "eV", 1.0),
    ("_S", "S", 1.0),
    ("_s", "s", 1.0),
];

/// The display of an SI column; a column without a known unit suffix is shown as it is.
pub(crate) fn column_display(column: &str) -> ColumnDisplay {
    // An uncertainty and the parts of its budget are shown in the unit of their value.
    let (stem, which) = [
        ("_unc_stat", " statistical uncertainty"),
        ("_unc_sys", " systematic uncertainty"),
        ("_unc", " uncertainty"),
    ]
    .iter()
    .find_map(|(suffix, which)| {
        column
            .strip_suffix(suffix)
            .filter(|stem| !stem.is_empty())
            .map(|stem| (stem, *which))
    })
    .unwrap_or((column, ""));
    let with_unc = |name: &str| format!("{}{which}", name.replace('_', " "));
    for &(suffix, unit, factor) in LOCAL {
        if let Some(base) = stem.strip_suffix(suffix).filter(|b| !b.is_empty()) {
            return ColumnDisplay {
                name: with_unc(base),
                unit: Some(unit.to_owned()),
                factor,
                offset: 0.0,
            };
        }
    }
    if let Some(display) = customary_display(column) {
        if let Some(inner) = stem.strip_prefix("ln_") {
            // ln(n / cm^-3): the unit belongs inside the logarithm, so it goes in the name.
            let (base, unit) = match inner.strip_suffix("_m2") {
                Some(base) => (base, "cm^{−2}"),
                None => (inner.strip_suffix("_m3").unwrap_or(inner), "cm^{−3}"),
            };
            return ColumnDisplay {
                name: with_unc(&format!("ln {base} (n in {unit})")),
                unit: None,
                factor: display.factor,
                offset: display.offset,
            };
        }
        let base = strip_display_suffix(stem);
        return ColumnDisplay {
            name: with_unc(base),
            unit: Some(unit_markup(display.unit_label)),
            factor: display.factor,
            offset: display.offset,
        };
    }
    ColumnDisplay {
        name: with_unc(stem),
        unit: None,
        factor: 1.0,
        offset: 0.0,
    }
}

/// The stem of an SI column without its unit suffix (`hall_mobility_m2_per_Vs` -> `hall_mobility`).
fn strip_display_suffix(stem: &str) -> &str {
    for suffix in [
        "_m2_per_Vs",
        "_ohm_sq",
        "_ohm_m",
        "_ohm",
        "_m3",
        "_m2",
        "_m",
        "_K",
        "_T",
        "_A",
        "_V",
    ] {
        if let Some(base) = stem.strip_suffix(suffix).filter(|b| !b.is_empty()) {
            return base;
        }
    }
    stem
}

/// The core's unit spelling (`cm^-3`, `cm^2/(V s)`, `ohm cm`, `ohm/sq`, `um`) as title markup.
pub(crate) fn unit_markup(unit: &str) -> String {
    match unit {
        "cm^-3" => "cm^{−3}".into(),
        "cm^-2" => "cm^{−2}".into(),
        "cm^2/(V s)" => "cm^{2}/(V s)".into(),
        "ohm cm" => "Ω cm".into(),
        "ohm/sq" => "Ω/sq".into(),
        "ohm" => "Ω".into(),
        "um" => "µm".into(),
        other => other.replace("ohm", "Ω"),
    }
}

/// True for the units whose axes the trade draws logarithmic by default (densities).
pub(crate) fn is_density_unit(unit: Option<&str>) -> bool {
    matches!(unit, Some("cm^{−3}") | Some("cm^{−2}"))
}

/// One piece of a title: plain, superscript or subscript text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Script {
    Normal,
    Super,
    Sub,
}

/// Splits markup into runs of one script. An unclosed brace runs to the end.
pub(crate) fn parse_markup(text: &str) -> Vec<(Script, String)> {
    let mut runs: Vec<(Script, String)> = Vec::new();
    let mut chars = text.chars().peekable();
    let mut current = String::new();
    while let Some(c) = chars.next() {
        let script = match c {
            '^' => Script::Super,
            '_' => Script::Sub,
            _ => {
                current.push(c);
                continue;
            }
        };
        if chars.peek() != Some(&'{') {
            current.push(c);
            continue;
        }
        chars.next();
        if !current.is_empty() {
            runs.push((Script::Normal, std::mem::take(&mut current)));
        }
        let mut inner = String::new();
        for c in chars.by_ref() {
            if c == '}' {
                break;
            }
            inner.push(c);
        }
        runs.push((script, inner));
    }
    if !current.is_empty() {
        runs.push((Script::Normal, current));
    }
    runs
}

fn superscript(c: char) -> Option<char> {
    Some(match c {
        '0' => '⁰',
        '1' => '¹',
        '2' => '²',
        '3' => '³',
        '4' => '⁴',
        '5' => '⁵',
        '6' => '⁶',
        '7' => '⁷',
        '8' => '⁸',
        '9' => '⁹',
        '-' | '−' => '⁻',
        '+' => '⁺',
        'n' => 'ⁿ',
        '/' => 'ᐟ',
        _ => return None,
    })
}

fn subscript(c: char) -> Option<char> {
    Some(match c {
        '0' => '₀',
        '1' => '₁',
        '2' => '₂',
        '3' => '₃',
        '4' => '₄',
        '5' => '₅',
        '6' => '₆',
        '7' => '₇',
        '8' => '₈',
        '9' => '₉',
        'a' => 'ₐ',
        'e' => 'ₑ',
        'h' => 'ₕ',
        'k' => 'ₖ',
        'l' => 'ₗ',
        'm' => 'ₘ',
        'n' => 'ₙ',
        'o' => 'ₒ',
        'p' => 'ₚ',
        's' => 'ₛ',
        't' => 'ₜ',
        'x' => 'ₓ',
        _ => return None,
    })
}

/// Markup as plain text: Unicode super- and subscripts where every character has one,
/// otherwise `^(...)` for a superscript and the bare text for a subscript.
pub(crate) fn plain_text(text: &str) -> String {
    let mut out = String::new();
    for (script, run) in parse_markup(text) {
        match script {
            Script::Normal => out.push_str(&run),
            Script::Super => match run.chars().map(superscript).collect::<Option<String>>() {
                Some(mapped) => out.push_str(&mapped),
                None => out.push_str(&format!("^({run})")),
            },
            Script::Sub => match run.chars().map(subscript).collect::<Option<String>>() {
                Some(mapped) => out.push_str(&mapped),
                // Unicode has no subscript f or c: `B_eff` reads better than `Beff`.
                None => out.push_str(&format!("_{run}")),
            },
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs()
    }

    /// Conversions to the units of the trade (common practice: densities per cm^3 and cm^2,
    /// mobilities in cm^2/(V s), resistivities in ohm cm; from the centimetre's definition,
    /// 1 m^-3 = 1e-6 cm^-3, 1 m^2 = 1e4 cm^2, 1 ohm m = 100 ohm cm).
    #[test]
    fn columns_display_in_the_units_of_the_trade() {
        let cases: &[(&str, &str, Option<&str>, f64, f64)] = &[
            // (column, name, unit, SI value, displayed value)
            ("density_m3", "density", Some("cm^{−3}"), 1e21, 1e15),
            ("density_m3_unc", "density uncertainty", Some("cm^{−3}"), 2e19, 2e13),
            (
                "density_m3_unc_sys",
                "density systematic uncertainty",
                Some("cm^{−3}"),
                2e19,
                2e13,
            ),
            ("sheet_density_m2", "sheet density", Some("cm^{−2}"), 5e15, 5e11),
            (
                "hall_mobility_m2_per_Vs",
                "hall mobility",
                Some("cm^{2}/(V s)"),
                0.1,
                1000.0,
            ),
            ("resistivity_ohm_m", "resistivity", Some("Ω cm"), 0.02, 2.0),
            (
                "sheet_resistance_ohm_sq",
                "sheet resistance",
                Some("Ω/sq"),
                120.0,
                120.0,
            ),
            ("temperature_K", "temperature", Some("K"), 77.0, 77.0),
            ("field_T", "field", Some("T"), 0.5, 0.5),
            ("x_T_per_ohm", "x", Some("T/Ω"), 0.01, 0.01),
            ("sigma_xx_S", "sigma xx", Some("S"), 1e-3, 1e-3),
            ("inverse_field_per_T", "inverse field", Some("T^{−1}"), 0.2, 0.2),
            (
                "hall_coefficient_m3_per_C",
                "hall coefficient",
                Some("cm^{3}/C"),
                1e-3,
                1e3,
            ),
            ("magnetoresistance", "magnetoresistance", None, 0.3, 0.3),
        ];
        for &(column, name, unit, si, shown) in cases {
            let display = column_display(column);
            assert_eq!(display.name, name, "{column}");
            assert_eq!(display.unit.as_deref(), unit, "{column}");
            assert!(close(si * display.factor, shown), "{column}: {}", si * display.factor);
        }
    }

    #[test]
    fn markup_becomes_unicode_or_plain_text() {
        assert_eq!(plain_text("n (cm^{−3})"), "n (cm⁻³)");
        assert_eq!(plain_text("μ (cm^{2}/(V s))"), "μ (cm²/(V s))");
        assert_eq!(plain_text("ρ_{xx}"), "ρₓₓ");
        assert_eq!(plain_text("σ_{xy}"), "σ_xy");
        assert_eq!(plain_text("B_{eff}"), "B_eff");
        assert_eq!(plain_text("10^{ab}"), "10^(ab)");
        assert_eq!(
            parse_markup("a^{2}b_{c}"),
            vec![
                (Script::Normal, "a".to_owned()),
                (Script::Super, "2".to_owned()),
                (Script::Normal, "b".to_owned()),
                (Script::Sub, "c".to_owned())
            ]
        );
        // A caret without a brace is text.
        assert_eq!(plain_text("a^b"), "a^b");
    }
}
