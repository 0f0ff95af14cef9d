//! How a person reads a number, shared by the command line, the demo and the report pages:
//! a value with its standard uncertainty, the uncertainty rounded to two significant digits
//! and the value to the same decimal place (GUM, JCGM 100:2008, 7.2.6), large and small ones
//! with one power of ten; and the unit the trade quotes a summary value in (cm^-3, cm^2/(V s),
//! ohm cm, meV, ps, nm ...), from the SI suffix of its name.

use crate::units::{customary_display, format_number, superscript_digit, SUPERSCRIPT_DIGITS};

/// How a power of ten is written: `3.000e15 ± 0.038e15` for a terminal or a text file,
/// `(3.000 ± 0.038) × 10¹⁵` for a page that a person prints.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Notation {
    Plain,
    Typeset,
}

/// Fixed notation within 1e-3..1e5 (as `format_number`), a shared power of ten outside.
fn common_exponent(magnitude: f64) -> i32 {
    if magnitude == 0.0 || !magnitude.is_finite() || (1e-3..1e5).contains(&magnitude) {
        0
    } else {
        magnitude.log10().floor() as i32
    }
}

/// `value` rounded to `decimals` places (negative: to tens, hundreds ...), printed.
fn fixed(value: f64, decimals: i32) -> String {
    if decimals >= 0 {
        format!("{value:.*}", decimals as usize)
    } else {
        let step = 10f64.powi(-decimals);
        format!("{:.0}", (value / step).round() * step)
    }
}

/// Digits as Unicode superscripts, so that a power of ten survives copying and PDF text.
pub fn superscript(exponent: i32) -> String {
    exponent
        .to_string()
        .chars()
        .map(|c| c.to_digit(10).map_or('⁻', |d| SUPERSCRIPT_DIGITS[d as usize]))
        .collect()
}

/// An exponent written as [`superscript`] writes it (`⁻¹⁵` -> -15).
pub fn parse_superscript(text: &str) -> Option<i32> {
    let digits: String = text
        .chars()
        .map(|c| if c == '⁻' { Some('-') } else { superscript_digit(c) })
        .collect::<Option<String>>()?;
    digits.parse().ok()
}

fn with_exponent(digits: &str, exponent: i32, notation: Notation) -> String {
    match (exponent, notation) {
        (0, _) => digits.to_owned(),
        (_, Notation::Plain) => format!("{digits}e{exponent}"),
        (_, Notation::Typeset) => format!("{digits} × 10{}", superscript(exponent)),
    }
}

/// A value without an uncertainty: four significant digits.
pub fn number(value: f64, notation: Notation) -> String {
    if !value.is_finite() {
        return "-".into();
    }
    if notation == Notation::Plain {
        return format_number(value);
    }
    let exponent = common_exponent(value.abs());
    let mantissa = value / 10f64.powi(exponent);
    let decimals = if mantissa == 0.0 {
        0
    } else {
        (3 - mantissa.abs().log10().floor() as i32).max(0)
    };
    with_exponent(&fixed(mantissa, decimals), exponent, notation)
}

/// Decimal places beyond which an uncertainty is too small for the value's digits to carry
/// it; both are then printed with four significant digits each.
const MOST_DECIMALS: i32 = 8;

/// `value ± uncertainty`, the uncertainty to two significant digits and the value to the same
/// place; a missing, zero or non-finite uncertainty gives the value alone.
pub fn with_uncertainty(value: f64, uncertainty: Option<f64>, notation: Notation) -> String {
    let Some(uncertainty) = uncertainty.filter(|u| u.is_finite() && *u > 0.0) else {
        return number(value, notation);
    };
    if !value.is_finite() {
        return "-".into();
    }
    let mut exponent = common_exponent(value.abs().max(uncertainty));
    loop {
        let scale = 10f64.powi(exponent);
        let (mantissa, spread) = (value / scale, uncertainty / scale);
        // The place of the uncertainty's second significant digit.
        let decimals = 1 - spread.log10().floor() as i32;
        if decimals > MOST_DECIMALS {
            return format!("{} ± {}", number(value, notation), number(uncertainty, notation));
        }
        let digits = fixed(mantissa, decimals);
        // Rounding can carry into the next power of ten (9.99996e14 -> 10.000e14).
        if exponent != 0 && digits.trim_start_matches('-').starts_with("10") {
            exponent += 1;
            continue;
        }
        let spread = fixed(spread, decimals);
        return match (exponent, notation) {
            (0, _) => format!("{digits} ± {spread}"),
            (_, Notation::Plain) => format!("{digits}e{exponent} ± {spread}e{exponent}"),
            (_, Notation::Typeset) => format!("({digits} ± {spread}) × 10{}", superscript(exponent)),
        };
    }
}

/// The unit a summary value is quoted in.
#[derive(Debug, Clone, PartialEq)]
pub struct QuotedUnit {
    /// The name without its SI suffix (`dopant_density` of `dopant_density_m3`).
    pub quantity: String,
    /// Quoted value = SI value * factor.
    pub factor: f64,
    /// The unit as ASCII text (`cm^-3`, `cm^2/(V s)`, `ohm cm`, `meV`).
    pub ascii: String,
    /// The same for a page (`cm⁻³`, `cm²/(V s)`, `Ω cm`).
    pub typeset: String,
}

impl QuotedUnit {
    pub fn label(&self, notation: Notation) -> &str {
        match notation {
            Notation::Plain => &self.ascii,
            Notation::Typeset => &self.typeset,
        }
    }
}

/// The typeset form of an ASCII unit label of the tables.
fn typeset(ascii: &str) -> String {
    ascii
        .replace("^-3", "⁻³")
        .replace("^-2", "⁻²")
        .replace("^2", "²")
        .replace("^3", "³")
        .replace("ohm/sq", "Ω/□")
        .replace("ohm", "Ω")
        .replace("um", "µm")
}

/// How a summary value named `key` (an SI name such as `dopant_density_m3`, or its `_unc`)
/// is quoted: the tables' customary units (cm^-3, cm^-2, cm^2/(V s), ohm cm, cm^3/C), energies
/// in meV, lifetimes in ps, lengths in nm below a micrometre and in µm above; `None` for a
/// key without a unit suffix. `value` picks the length unit.
pub fn summary_unit(key: &str, value: f64) -> Option<QuotedUnit> {
    let key = ["_unc_stat", "_unc_sys", "_unc"]
        .iter()
        .find_map(|suffix| key.strip_suffix(suffix))
        .unwrap_or(key);
    let quoted = |quantity: &str, factor: f64, ascii: &str| QuotedUnit {
        quantity: quantity.to_owned(),
        factor,
        ascii: ascii.to_owned(),
        typeset: typeset(ascii),
    };
    if let Some(quantity) = key.strip_suffix("_eV") {
        return Some(quoted(quantity, 1e3, "meV"));
    }
    if let Some(quantity) = key
        .strip_suffix("_s")
        .filter(|q| q.contains("lifetime") || q.contains("time"))
    {
        // Scattering and quantum lifetimes are quoted in picoseconds (`n_s`, a sheet
        // density's symbol, is not a time).
        return Some(quoted(quantity, 1e12, "ps"));
    }
    if let Some(quantity) = key.strip_suffix("_S") {
        return Some(quoted(quantity, 1.0, "S"));
    }
    if let Some(quantity) = key.strip_suffix("_m").filter(|q| !q.ends_with("_ohm")) {
        // Coherence lengths and mean free paths in nm, films and bars in µm.
        return Some(if value.abs() < 1e-6 {
            quoted(quantity, 1e9, "nm")
        } else {
            quoted(quantity, 1e6, "um")
        });
    }
    let display = customary_display(key)?;
    if display.unit_label.is_empty() {
        return None;
    }
    // The label is the quantity followed by the displayed unit's token (`dopant_density_cm3`).
    let token_start = display
        .label
        .rfind(['_'])
        .map(|at| {
            // Compound tokens: cm2_per_Vs, cm3_per_C, ohm_cm, ohm_sq.
            let head = &display.label[..at];
            ["_cm2_per", "_cm3_per", "_cm2", "_ohm"]
                .iter()
                .find_map(|compound| head.ends_with(compound).then(|| head.len() - compound.len()))
                .unwrap_or(at)
        })
        .unwrap_or(display.label.len());
    Some(quoted(
        &display.label[..token_start],
        display.factor,
        display.unit_label,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uncertainties_keep_two_digits_and_values_the_same_place() {
        // GUM (JCGM 100:2008) 7.2.6: the uncertainty to at most two significant digits, the
        // value rounded to the same place. (value, uncertainty, plain, typeset)
        let cases = [
            (2.9999921e15, 3.802e13, "3.000e15 ± 0.038e15", "(3.000 ± 0.038) × 10¹⁵"),
            (2.797e15, 3.140e13, "2.797e15 ± 0.031e15", "(2.797 ± 0.031) × 10¹⁵"),
            (44.999266, 0.0938, "44.999 ± 0.094", "44.999 ± 0.094"),
            (1234.5, 12.3, "1234 ± 12", "1234 ± 12"),
            (48083.0, 244.9, "48080 ± 240", "48080 ± 240"),
            (140.17, 0.7293, "140.17 ± 0.73", "140.17 ± 0.73"),
            (0.2300, 3.277e-4, "0.23000 ± 0.00033", "0.23000 ± 0.00033"),
            (1.8e-4, 2e-6, "1.800e-4 ± 0.020e-4", "(1.800 ± 0.020) × 10⁻⁴"),
            (
                9.99963e14,
                2.1e10,
                "9.99963e14 ± 0.00021e14",
                "(9.99963 ± 0.00021) × 10¹⁴",
            ),
            (9.99996e14, 2.1e12, "1.0000e15 ± 0.0021e15", "(1.0000 ± 0.0021) × 10¹⁵"),
            (-3.2e-6, 1.5e-7, "-3.20e-6 ± 0.15e-6", "(-3.20 ± 0.15) × 10⁻⁶"),
            (4.93e14, 1e3, "4.930e14 ± 1000", "4.930 × 10¹⁴ ± 1000"),
        ];
        for (value, uncertainty, plain, typeset) in cases {
            assert_eq!(with_uncertainty(value, Some(uncertainty), Notation::Plain), plain);
            assert_eq!(with_uncertainty(value, Some(uncertainty), Notation::Typeset), typeset);
        }
        assert_eq!(with_uncertainty(4.93e14, Some(0.0), Notation::Plain), "4.930e14");
        assert_eq!(with_uncertainty(5.0, None, Notation::Typeset), "5.000");
        assert_eq!(with_uncertainty(f64::NAN, Some(1.0), Notation::Plain), "-");
        assert_eq!(number(2.8e15, Notation::Typeset), "2.800 × 10¹⁵");
        assert_eq!(number(300.0, Notation::Typeset), "300.0");
        for exponent in [-15, -4, 0, 7, 23] {
            assert_eq!(parse_superscript(&superscript(exponent)), Some(exponent));
        }
        assert_eq!(parse_superscript("1x"), None);
    }

    #[test]
    fn summary_values_are_quoted_in_the_units_of_the_trade() {
        let unit = |key: &str, value: f64| summary_unit(key, value).unwrap();
        // 1 m^-3 = 1e-6 cm^-3, 1 m^2/(V s) = 1e4 cm^2/(V s), 1 ohm m = 100 ohm cm (the
        // centimetre's definition); 1 eV = 1000 meV; 1 s = 1e12 ps.
        let density = unit("dopant_density_m3_unc", 1e21);
        assert_eq!((density.quantity.as_str(), density.factor), ("dopant_density", 1e-6));
        assert_eq!((density.ascii.as_str(), density.typeset.as_str()), ("cm^-3", "cm⁻³"));
        let mobility = unit("mobility_m2_per_Vs", 0.1);
        assert_eq!((mobility.quantity.as_str(), mobility.factor), ("mobility", 1e4));
        assert_eq!(mobility.typeset, "cm²/(V s)");
        let resistivity = unit("resistivity_ohm_m", 0.01);
        assert_eq!(
            (resistivity.quantity.as_str(), resistivity.ascii.as_str()),
            ("resistivity", "ohm cm")
        );
        assert_eq!(resistivity.typeset, "Ω cm");
        assert_eq!(unit("ionization_energy_eV", 0.045).factor, 1e3);
        assert_eq!(unit("quantum_lifetime_s", 3e-13).ascii, "ps");
        assert_eq!(unit("phase_coherence_length_m", 2.5e-7).ascii, "nm");
        assert_eq!(unit("thickness_m", 5e-4).typeset, "µm");
        assert_eq!(unit("frequency_T", 186.0).quantity, "frequency");
        assert_eq!(unit("sheet_resistance_ohm_sq", 100.0).typeset, "Ω/□");
        assert_eq!(summary_unit("compensation_ratio", 0.1), None);
        assert_eq!(summary_unit("alpha", 1.0), None);
        assert_eq!(summary_unit("n_s", 1.0), None);
    }
}
