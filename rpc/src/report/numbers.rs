//! Numbers as a report prints them: a value with its standard uncertainty to two significant
//! digits of the uncertainty and the value to the same decimal place (GUM, JCGM 100:2008,
//! 7.2.6), with a common power of ten written out (`(2.797 ± 0.031) × 10¹⁵`), and the units
//! a person reads (cm⁻³, cm²/(V s), Ω cm, meV, K, T).

/// Digits as Unicode superscripts, so that a power of ten survives copying and PDF text.
fn superscript(exponent: i32) -> String {
    exponent
        .to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect()
}

/// The power of ten written out for a value: none within 1e-3..1e5, where fixed notation
/// shows the digits, as `format_number` does for tables.
fn common_exponent(value: f64) -> i32 {
    let magnitude = value.abs();
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

/// A value without an uncertainty: four significant digits.
pub fn plain(value: f64) -> String {
    if !value.is_finite() {
        return "–".into();
    }
    let exponent = common_exponent(value);
    let mantissa = value / 10f64.powi(exponent);
    let decimals = if mantissa == 0.0 {
        0
    } else {
        (3 - mantissa.abs().log10().floor() as i32).max(0)
    };
    let digits = fixed(mantissa, decimals);
    if exponent == 0 {
        digits
    } else {
        format!("{digits} × 10{}", superscript(exponent))
    }
}

/// `value ± uncertainty`, the uncertainty to two significant digits and the value to the
/// same place; a missing, zero or non-finite uncertainty gives the value alone.
pub fn with_uncertainty(value: f64, uncertainty: Option<f64>) -> String {
    let Some(uncertainty) = uncertainty.filter(|u| u.is_finite() && *u > 0.0) else {
        return plain(value);
    };
    if !value.is_finite() {
        return "–".into();
    }
    let exponent = common_exponent(if value == 0.0 { uncertainty } else { value });
    let scale = 10f64.powi(exponent);
    let (value, uncertainty) = (value / scale, uncertainty / scale);
    let decimals = 1 - uncertainty.log10().floor() as i32;
    let text = format!("{} ± {}", fixed(value, decimals), fixed(uncertainty, decimals));
    if exponent == 0 {
        text
    } else {
        format!("({text}) × 10{}", superscript(exponent))
    }
}

/// How the report shows a quantity named by an SI key: the factor into the displayed unit and
/// the unit's symbol. Covers the suffixes of the analyses' summaries; others are shown as
/// stored, with their suffix as the unit.
pub fn display_unit(key: &str, value: f64) -> (f64, &'static str) {
    let key = key.strip_suffix("_unc").unwrap_or(key);
    const UNITS: &[(&str, f64, &str)] = &[
        ("_m2_per_Vs", 1e4, "cm²/(V s)"),
        ("_m3_per_C", 1e6, "cm³/C"),
        ("_m2_per_C", 1e4, "cm²/C"),
        ("_ohm_sq", 1.0, "Ω/□"),
        ("_ohm_m", 100.0, "Ω cm"),
        ("_ohm", 1.0, "Ω"),
        ("_m3", 1e-6, "cm⁻³"),
        ("_m2", 1e-4, "cm⁻²"),
        ("_eV", 1e3, "meV"),
        ("_s", 1e12, "ps"),
        ("_S", 1.0, "S"),
        ("_K", 1.0, "K"),
        ("_T", 1.0, "T"),
        ("_V", 1.0, "V"),
        ("_A", 1.0, "A"),
    ];
    if let Some(&(_, factor, unit)) = UNITS.iter().find(|(suffix, _, _)| key.ends_with(suffix)) {
        return (factor, unit);
    }
    if key.ends_with("_m") {
        // Lengths: coherence and mean free paths in nm, films and bars in µm.
        return if value.abs() < 1e-6 { (1e9, "nm") } else { (1e6, "µm") };
    }
    (1.0, "")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uncertainties_keep_two_digits_and_the_value_follows_them() {
        assert_eq!(with_uncertainty(2.797e15, Some(3.140e13)), "(2.797 ± 0.031) × 10¹⁵");
        assert_eq!(with_uncertainty(44.999, Some(0.09382)), "44.999 ± 0.094");
        assert_eq!(with_uncertainty(48083.0, Some(244.9)), "48080 ± 240");
        assert_eq!(with_uncertainty(0.2300, Some(3.277e-4)), "0.23000 ± 0.00033");
        assert_eq!(with_uncertainty(1.8e-4, Some(2e-6)), "(1.800 ± 0.020) × 10⁻⁴");
        assert_eq!(with_uncertainty(5.0, None), "5.000");
        assert_eq!(with_uncertainty(5.0, Some(0.0)), "5.000");
        assert_eq!(with_uncertainty(f64::NAN, Some(1.0)), "–");
    }

    #[test]
    fn plain_numbers_have_four_digits() {
        assert_eq!(plain(2.8e15), "2.800 × 10¹⁵");
        assert_eq!(plain(300.0), "300.0");
        assert_eq!(plain(0.06668), "0.06668");
        assert_eq!(plain(-2.0e-5), "-2.000 × 10⁻⁵");
    }

    #[test]
    fn quantities_are_shown_in_the_units_of_the_trade() {
        assert_eq!(display_unit("dopant_density_m3", 3e21), (1e-6, "cm⁻³"));
        assert_eq!(display_unit("ionization_energy_eV_unc", 1e-4), (1e3, "meV"));
        assert_eq!(display_unit("hall_mobility_m2_per_Vs", 0.1), (1e4, "cm²/(V s)"));
        assert_eq!(display_unit("resistivity_ohm_m", 0.015), (100.0, "Ω cm"));
        assert_eq!(display_unit("phase_coherence_length_m", 2.5e-7), (1e9, "nm"));
        assert_eq!(display_unit("quantum_lifetime_s", 3e-13), (1e12, "ps"));
        assert_eq!(display_unit("effective_mass_ratio", 0.23), (1.0, ""));
    }
}
