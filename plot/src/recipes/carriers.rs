//! Recipes of temperature series: the `hall.reduce` output and the carriers fits (freeze-out,
//! Arrhenius, mobility scattering).

use super::context::{all_rows, inverse_temperature, named, points, Context, Drawing};
use crate::error::PlotError;
use crate::figure::{AxisSpec, Dash, Series, SHAPES};

const TEMPERATURE: &str = "Temperature T";
const INVERSE_TEMPERATURE: &str = "1000/T";
const INVERSE_TEMPERATURE_UNIT: &str = "K^{−1}";

/// True when a column exists and holds at least one finite value.
fn has_values(ctx: &Context, name: &str) -> Result<bool, PlotError> {
    Ok(ctx.has(name) && ctx.floats(name)?.iter().any(|v| v.is_finite()))
}

/// One series of points per group against temperature, with the column's `_unc` as error
/// bars: the three `hall.reduce` plots differ only in the column and the axes.
fn hall_series(ctx: &Context, column: &str, y: AxisSpec, log_x: bool, title: &str) -> Result<Drawing, PlotError> {
    let rows = all_rows(ctx.frame);
    let temperature = ctx.displayed("temperature_K")?;
    let values: Vec<f64> = ctx.displayed(column)?.into_iter().map(f64::abs).collect();
    let errors = ctx.displayed_opt(&format!("{column}_unc"))?;
    let groups = ctx.groups(&rows, &["sample", "field_T"])?;
    let series = groups
        .iter()
        .enumerate()
        .map(|(k, g)| {
            let name = if g.label.is_empty() {
                ctx.dataset.to_owned()
            } else {
                g.label.clone()
            };
            Series::points(
                name,
                k,
                SHAPES[k % SHAPES.len()],
                true,
                points(&g.rows, &temperature, &values, errors.as_deref()),
            )
        })
        .collect();
    Ok(Drawing::single(
        title,
        AxisSpec::new(TEMPERATURE, Some("K"), log_x),
        y,
        series,
    ))
}

pub(crate) fn hall_density(ctx: &Context) -> Result<Drawing, PlotError> {
    if !has_values(ctx, "density_m3")? && ctx.has("sheet_density_m2") {
        let y = AxisSpec::new("Sheet carrier density n_{s}", Some("cm^{−2}"), true);
        return hall_series(ctx, "sheet_density_m2", y, false, "Sheet carrier density");
    }
    let y = AxisSpec::new("Carrier density n", Some("cm^{−3}"), true);
    hall_series(ctx, "density_m3", y, false, "Carrier density")
}

pub(crate) fn hall_mobility(ctx: &Context) -> Result<Drawing, PlotError> {
    let y = AxisSpec::new("Hall mobility μ_{H}", Some("cm^{2}/(V s)"), true);
    hall_series(ctx, "hall_mobility_m2_per_Vs", y, true, "Hall mobility")
}

pub(crate) fn hall_resistivity(ctx: &Context) -> Result<Drawing, PlotError> {
    if !has_values(ctx, "resistivity_ohm_m")? && ctx.has("sheet_resistance_ohm_sq") {
        let y = AxisSpec::new("Sheet resistance R_{s}", Some("Ω/sq"), true);
        return hall_series(ctx, "sheet_resistance_ohm_sq", y, false, "Sheet resistance");
    }
    let y = AxisSpec::new("Resistivity ρ", Some("Ω cm"), true);
    hall_series(ctx, "resistivity_ohm_m", y, false, "Resistivity")
}

pub(crate) fn freeze_out(ctx: &Context) -> Result<Drawing, PlotError> {
    let x = inverse_temperature(&ctx.floats("temperature_K")?);
    let density = ctx.displayed("density_m3")?;
    let errors = ctx.displayed_opt("density_m3_unc")?;
    let fitted = ctx.displayed("fitted_density_m3")?;
    let data_rows = ctx.rows_of_kind("data")?;
    let curve_rows = ctx.rows_of_kind("curve")?;
    let mut all = data_rows.clone();
    all.extend(&curve_rows);
    let groups = ctx.groups(&all, &["sample"])?;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        let data: Vec<usize> = group.rows.iter().copied().filter(|r| data_rows.contains(r)).collect();
        let curve: Vec<usize> = group.rows.iter().copied().filter(|r| curve_rows.contains(r)).collect();
        // Without curve rows (a table cut to its data) the model at the data points serves.
        let line_rows = if curve.is_empty() { &data } else { &curve };
        series.push(Series::line(
            named(group, groups.len(), "model"),
            k,
            Dash::Solid,
            points(line_rows, &x, &fitted, None),
        ));
        series.push(Series::points(
            named(group, groups.len(), "measured"),
            k,
            SHAPES[k % SHAPES.len()],
            true,
            points(&data, &x, &density, errors.as_deref()),
        ));
    }
    Ok(Drawing::single(
        "Carrier freeze-out and charge-neutrality fit",
        AxisSpec::new(INVERSE_TEMPERATURE, Some(INVERSE_TEMPERATURE_UNIT), false),
        AxisSpec::new("Carrier density n", Some("cm^{−3}"), true),
        series,
    ))
}

/// ln(n / m^-3) - r ln(T / K) as the plugin stores it (`ln_reduced_density_m3`), shown with n
/// in cm^-3 (the unit the trade quotes densities in, and the table's display):
/// ln(n / cm^-3) = ln(n / m^-3) - ln(1e6). Tables stored before the columns carried their unit
/// (`reduced_ln_density`, `line`) are read too.
pub(crate) fn arrhenius(ctx: &Context) -> Result<Drawing, PlotError> {
    let x = inverse_temperature(&ctx.floats("temperature_K")?);
    let legacy = !ctx.has("ln_reduced_density_m3") && ctx.has("reduced_ln_density");
    let (ordinate, uncertainty, fitted) = if legacy {
        ("reduced_ln_density", "reduced_ln_density_unc", "line")
    } else {
        (
            "ln_reduced_density_m3",
            "ln_reduced_density_m3_unc",
            "ln_reduced_density_fit_m3",
        )
    };
    let shift = if legacy { 1e6f64.ln() } else { 0.0 };
    let y: Vec<f64> = ctx.displayed(ordinate)?.iter().map(|v| v - shift).collect();
    let errors = if ctx.has(uncertainty) {
        Some(ctx.floats(uncertainty)?)
    } else {
        None
    };
    let line: Vec<f64> = ctx.displayed(fitted)?.iter().map(|v| v - shift).collect();
    let used = ctx.flags("used").ok_or_else(|| ctx_missing(ctx, "used"))?;
    let exponent = if ctx.has("temperature_exponent") {
        ctx.floats("temperature_exponent")?.into_iter().find(|v| v.is_finite())
    } else {
        None
    };
    let power = match exponent {
        Some(e) if (e - 0.75).abs() < 1e-9 => "3/4",
        Some(e) if (e - 1.5).abs() < 1e-9 => "3/2",
        Some(_) | None => "r",
    };
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample"])?;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        let inside: Vec<usize> = group.rows.iter().copied().filter(|&r| used[r]).collect();
        let outside: Vec<usize> = group.rows.iter().copied().filter(|&r| !used[r]).collect();
        let shape = SHAPES[k % SHAPES.len()];
        series.push(Series::line(
            named(group, groups.len(), "fitted line"),
            k,
            Dash::Solid,
            points(&inside, &x, &line, None),
        ));
        series.push(Series::points(
            named(group, groups.len(), "in fit"),
            k,
            shape,
            true,
            points(&inside, &x, &y, errors.as_deref()),
        ));
        series.push(Series::points(
            named(group, groups.len(), "not in fit"),
            k,
            shape,
            false,
            points(&outside, &x, &y, errors.as_deref()),
        ));
    }
    let ordinate = format!("ln[(n/cm^{{−3}}) (T/K)^{{−{power}}}]");
    Ok(Drawing::single(
        "Arrhenius plot",
        AxisSpec::new(INVERSE_TEMPERATURE, Some(INVERSE_TEMPERATURE_UNIT), false),
        AxisSpec::new(ordinate, None, false),
        series,
    ))
}

fn ctx_missing(ctx: &Context, column: &str) -> PlotError {
    match ctx.floats(column) {
        Err(error) => error,
        Ok(_) => PlotError::NotNumeric {
            column: column.to_owned(),
            dtype: "not boolean".to_owned(),
        },
    }
}

/// The scattering terms of the output, their legend names and dashes.
const TERMS: [(&str, &str, Dash); 4] = [
    ("lattice_mobility_m2_per_Vs", "lattice", Dash::Dashed),
    ("ionized_impurity_mobility_m2_per_Vs", "ionized impurities", Dash::Chain),
    (
        "neutral_impurity_mobility_m2_per_Vs",
        "neutral impurities",
        Dash::Dotted,
    ),
    ("constant_mobility_m2_per_Vs", "constant", Dash::Long),
];

pub(crate) fn mobility_scattering(ctx: &Context) -> Result<Drawing, PlotError> {
    let temperature = ctx.displayed("temperature_K")?;
    let mobility = ctx.displayed("mobility_m2_per_Vs")?;
    let errors = ctx.displayed_opt("mobility_m2_per_Vs_unc")?;
    let fitted = ctx.displayed("fitted_mobility_m2_per_Vs")?;
    let in_range = ctx.flags("in_fit_range");
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample"])?;
    let single = groups.len() == 1;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        // One sample: every term its own colour. Several: a colour per sample, terms by dash.
        let base = if single { 0 } else { k };
        let shape = SHAPES[k % SHAPES.len()];
        series.push(Series::line(
            named(group, groups.len(), "fit (total)"),
            base,
            Dash::Solid,
            points(&group.rows, &temperature, &fitted, None),
        ));
        for (t, (column, name, dash)) in TERMS.iter().enumerate() {
            if !has_values(ctx, column)? {
                continue;
            }
            let values = ctx.displayed(column)?;
            series.push(Series::line(
                named(group, groups.len(), name),
                if single { t + 1 } else { base },
                *dash,
                points(&group.rows, &temperature, &values, None),
            ));
        }
        let (inside, outside): (Vec<usize>, Vec<usize>) = match &in_range {
            Some(flags) => group.rows.iter().partition(|&&r| flags[r]),
            None => (group.rows.clone(), Vec::new()),
        };
        series.push(Series::points(
            named(group, groups.len(), "measured"),
            base,
            shape,
            true,
            points(&inside, &temperature, &mobility, errors.as_deref()),
        ));
        series.push(Series::points(
            named(group, groups.len(), "outside fit range"),
            base,
            shape,
            false,
            points(&outside, &temperature, &mobility, errors.as_deref()),
        ));
    }
    Ok(Drawing::single(
        "Mobility and scattering mechanisms",
        AxisSpec::new(TEMPERATURE, Some("K"), true),
        AxisSpec::new("Mobility μ", Some("cm^{2}/(V s)"), true),
        series,
    ))
}
