//! Recipes of field sweeps: the spectrum analyses and the magnetoresistance analyses.

use super::context::{all_rows, named, points, Context, Drawing, Group};
use crate::error::PlotError;
use crate::figure::{format_value, AxisSpec, Dash, Panel, Point, Series, SHAPES};

const FIELD: &str = "Magnetic field B";

/// Electrons and holes keep their colours in every panel (palette indices).
const ELECTRON: usize = 0;
const HOLE: usize = 6;

pub(crate) fn mobility_spectrum(ctx: &Context) -> Result<Drawing, PlotError> {
    let mobility = ctx.displayed("mobility_m2_per_Vs")?;
    let electron = ctx.displayed("electron_spectrum_S")?;
    let hole = ctx.displayed("hole_spectrum_S")?;
    let electron_envelope = ctx.displayed_opt("electron_envelope_S")?;
    let hole_envelope = ctx.displayed_opt("hole_envelope_S")?;
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample", "temperature_K"])?;
    let mut panels = Vec::new();
    for group in &groups {
        let mut series = vec![
            Series::line(
                "electrons",
                ELECTRON,
                Dash::Solid,
                points(&group.rows, &mobility, &electron, None),
            ),
            Series::line("holes", HOLE, Dash::Solid, points(&group.rows, &mobility, &hole, None)),
        ];
        if let Some(envelope) = &electron_envelope {
            series.push(Series::line(
                "electron envelope",
                ELECTRON,
                Dash::Dashed,
                points(&group.rows, &mobility, envelope, None),
            ));
        }
        if let Some(envelope) = &hole_envelope {
            series.push(Series::line(
                "hole envelope",
                HOLE,
                Dash::Dashed,
                points(&group.rows, &mobility, envelope, None),
            ));
        }
        panels.push(Panel::new(
            panel_title(group, groups.len()),
            AxisSpec::new("Mobility μ", Some("cm^{2}/(V s)"), true),
            AxisSpec::new("dσ/d ln μ", Some("S"), false),
            series,
        ));
    }
    Ok(Drawing {
        title: "Mobility spectrum".into(),
        panels,
    })
}

fn panel_title(group: &Group, groups: usize) -> Option<String> {
    (groups > 1 && !group.label.is_empty()).then(|| group.label.clone())
}

/// Two panels, xx and xy: measured points and fitted lines against field, per group.
fn tensor_fit(ctx: &Context, columns: [(&str, &str, &str, &str); 2], title: &str) -> Result<Drawing, PlotError> {
    let field = ctx.displayed("field_T")?;
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample", "temperature_K"])?;
    let mut panels = Vec::new();
    for (data, fit, label, unit) in columns {
        let measured = ctx.displayed(data)?;
        let fitted = ctx.displayed(fit)?;
        let errors = ctx.displayed_opt(&format!("{data}_unc"))?;
        let mut series = Vec::new();
        for (k, group) in groups.iter().enumerate() {
            series.push(Series::line(
                named(group, groups.len(), "fit"),
                k,
                Dash::Solid,
                points(&group.rows, &field, &fitted, None),
            ));
            series.push(Series::points(
                named(group, groups.len(), "measured"),
                k,
                SHAPES[k % SHAPES.len()],
                true,
                points(&group.rows, &field, &measured, errors.as_deref()),
            ));
        }
        panels.push(Panel::new(
            Some(label.to_owned()),
            AxisSpec::new(FIELD, Some("T"), false),
            AxisSpec::new(label, Some(unit), false),
            series,
        ));
    }
    Ok(Drawing {
        title: title.to_owned(),
        panels,
    })
}

pub(crate) fn conductivity_fit(ctx: &Context) -> Result<Drawing, PlotError> {
    tensor_fit(
        ctx,
        [
            ("sigma_xx_S", "sigma_xx_fit_S", "σ_{xx}", "S"),
            ("sigma_xy_S", "sigma_xy_fit_S", "σ_{xy}", "S"),
        ],
        "Multi-carrier fit of the conductivity tensor",
    )
}

pub(crate) fn resistivity_fit(ctx: &Context) -> Result<Drawing, PlotError> {
    tensor_fit(
        ctx,
        [
            ("rho_xx_ohm_sq", "rho_xx_fit_ohm_sq", "ρ_{xx}", "Ω/sq"),
            ("rho_xy_ohm", "rho_xy_fit_ohm", "ρ_{xy}", "Ω"),
        ],
        "Fit of the resistivity tensor",
    )
}

pub(crate) fn symmetrized(ctx: &Context) -> Result<Drawing, PlotError> {
    let field = ctx.displayed("field_T")?;
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample", "temperature_K"])?;
    let mut panels = Vec::new();
    for (column, label, unit) in [("rho_xx_ohm_sq", "ρ_{xx}", "Ω/sq"), ("rho_xy_ohm", "ρ_{xy}", "Ω")] {
        let values = ctx.displayed(column)?;
        let errors = ctx.displayed_opt(&format!("{column}_unc"))?;
        let series = groups
            .iter()
            .enumerate()
            .map(|(k, g)| {
                Series::points(
                    if g.label.is_empty() {
                        label.to_owned()
                    } else {
                        g.label.clone()
                    },
                    k,
                    SHAPES[k % SHAPES.len()],
                    true,
                    points(&g.rows, &field, &values, errors.as_deref()),
                )
            })
            .collect();
        panels.push(Panel::new(
            Some(format!("{label} (symmetrized)")),
            AxisSpec::new(FIELD, Some("T"), false),
            AxisSpec::new(label, Some(unit), false),
            series,
        ));
    }
    Ok(Drawing {
        title: "Symmetrized sweep".into(),
        panels,
    })
}

/// Fields at or below this count as zero when rho(0) is taken from a symmetrized table, as
/// `hall.reduce` counts them by default.
const ZERO_FIELD_T: f64 = 1e-4;

pub(crate) fn magnetoresistance(ctx: &Context) -> Result<Drawing, PlotError> {
    let field = ctx.displayed("field_T")?;
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample", "temperature_K"])?;
    let (mr, errors): (Vec<f64>, Option<Vec<f64>>) = if ctx.has("magnetoresistance") {
        let percent = |v: Vec<f64>| v.into_iter().map(|m| 100.0 * m).collect::<Vec<f64>>();
        let errors = if ctx.has("magnetoresistance_unc") {
            Some(percent(ctx.floats("magnetoresistance_unc")?))
        } else {
            None
        };
        (percent(ctx.floats("magnetoresistance")?), errors)
    } else {
        let rho = ctx.floats("rho_xx_ohm_sq").map_err(|_| {
            let mut columns: Vec<String> = ctx.frame.get_column_names().iter().map(|c| c.to_string()).collect();
            columns.sort();
            super::context::missing_column(ctx.recipe, ctx.dataset, "magnetoresistance", &columns)
        })?;
        let rho_unc = if ctx.has("rho_xx_ohm_sq_unc") {
            Some(ctx.floats("rho_xx_ohm_sq_unc")?)
        } else {
            None
        };
        let mut mr = vec![f64::NAN; rho.len()];
        let mut errors = rho_unc.as_ref().map(|_| vec![f64::NAN; rho.len()]);
        for group in &groups {
            let zero = group
                .rows
                .iter()
                .copied()
                .filter(|&r| field[r].abs() <= ZERO_FIELD_T && rho[r].is_finite())
                .min_by(|&a, &b| field[a].abs().total_cmp(&field[b].abs()))
                .ok_or_else(|| {
                    PlotError::Unusable(format!(
                        "dataset `{}`{} has no zero-field row (|B| <= {ZERO_FIELD_T} T) to take rho(0) from; run mr.ratio (with zero_field: extrapolated when the sweep has no zero-field point) and plot its output",
                        ctx.dataset,
                        if group.label.is_empty() { String::new() } else { format!(" ({})", group.label) }
                    ))
                })?;
            let rho0 = rho[zero];
            for &r in &group.rows {
                mr[r] = 100.0 * (rho[r] - rho0) / rho0;
                if let (Some(errors), Some(unc)) = (errors.as_mut(), rho_unc.as_ref()) {
                    errors[r] = 100.0 * unc[r] / rho0;
                }
            }
        }
        (mr, errors)
    };
    let series = groups
        .iter()
        .enumerate()
        .map(|(k, g)| {
            Series::points(
                if g.label.is_empty() {
                    "MR".to_owned()
                } else {
                    g.label.clone()
                },
                k,
                SHAPES[k % SHAPES.len()],
                true,
                points(&g.rows, &field, &mr, errors.as_deref()),
            )
        })
        .collect();
    Ok(Drawing::single(
        "Magnetoresistance",
        AxisSpec::new(FIELD, Some("T"), false),
        AxisSpec::new("Δρ/ρ_{0}", Some("%"), false),
        series,
    ))
}

pub(crate) fn kohler(ctx: &Context) -> Result<Drawing, PlotError> {
    let x = ctx.displayed("x_T_per_ohm")?;
    let mr = ctx.floats("magnetoresistance")?;
    let errors = if ctx.has("magnetoresistance_unc") {
        Some(ctx.floats("magnetoresistance_unc")?)
    } else {
        None
    };
    let used = ctx.flags("used");
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample", "temperature_K"])?;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        let (inside, outside): (Vec<usize>, Vec<usize>) = match &used {
            Some(flags) => group.rows.iter().partition(|&&r| flags[r]),
            None => (group.rows.clone(), Vec::new()),
        };
        let shape = SHAPES[k % SHAPES.len()];
        let name = if group.label.is_empty() {
            "MR".to_owned()
        } else {
            group.label.clone()
        };
        series.push(Series::points(
            name.clone(),
            k,
            shape,
            true,
            points(&inside, &x, &mr, errors.as_deref()),
        ));
        series.push(Series::points(
            format!("{name} (outside common range)"),
            k,
            shape,
            false,
            points(&outside, &x, &mr, errors.as_deref()),
        ));
    }
    Ok(Drawing::single(
        "Kohler plot",
        AxisSpec::new("B/ρ_{0}", Some("T/Ω"), true),
        AxisSpec::new("Δρ/ρ_{0}", None, true),
        series,
    ))
}

/// One solid line per sweep (sample and temperature) of `rows`, labelled by the sweep, or by
/// `fallback` when there is a single unlabelled one.
fn lines_per_sweep(
    ctx: &Context,
    rows: &[usize],
    x: &[f64],
    y: &[f64],
    fallback: &str,
) -> Result<Vec<Series>, PlotError> {
    let groups = ctx.groups(rows, &["sample", "temperature_K"])?;
    Ok(groups
        .iter()
        .enumerate()
        .map(|(k, g)| {
            let label = if g.label.is_empty() {
                fallback.to_owned()
            } else {
                g.label.clone()
            };
            Series::line(label, k, Dash::Solid, points(&g.rows, x, y, None))
        })
        .collect())
}

/// The FFT is kept up to 1.5 times the highest frequency whose amplitude reaches 2 % of the
/// strongest line: the transform runs to the grid's Nyquist frequency, often ten times the
/// lines, and the lines would otherwise crowd the left edge.
const FFT_VISIBLE_FRACTION: f64 = 0.02;
const FFT_MARGIN: f64 = 1.5;

pub(crate) fn oscillation_fft(ctx: &Context) -> Result<Drawing, PlotError> {
    let rows = ctx.rows_of_kind("fft")?;
    let frequency = ctx.displayed("frequency_T")?;
    let amplitude = ctx.displayed("value_ohm_sq")?;
    let strongest = rows
        .iter()
        .map(|&r| amplitude[r].abs())
        .filter(|a| a.is_finite())
        .fold(0.0, f64::max);
    let highest_line = rows
        .iter()
        .filter(|&&r| amplitude[r].abs() >= FFT_VISIBLE_FRACTION * strongest)
        .map(|&r| frequency[r])
        .filter(|f| f.is_finite())
        .fold(0.0, f64::max);
    let rows: Vec<usize> = if highest_line > 0.0 {
        rows.into_iter()
            .filter(|&r| frequency[r] <= FFT_MARGIN * highest_line)
            .collect()
    } else {
        rows
    };
    let series = lines_per_sweep(ctx, &rows, &frequency, &amplitude, "FFT")?;
    Ok(Drawing::single(
        "Shubnikov-de Haas oscillation spectrum",
        AxisSpec::new("Frequency F", Some("T"), false),
        AxisSpec::new("FFT amplitude", Some("Ω/sq"), false),
        series,
    ))
}

/// Amplitude / T, the ordinate whose logarithm falls linearly with T at large X, so that a
/// log axis shows the thermal damping the mass comes from.
pub(crate) fn oscillation_mass(ctx: &Context) -> Result<Drawing, PlotError> {
    let rows = ctx.rows_of_kind("mass")?;
    if rows.is_empty() {
        return Err(PlotError::Unusable(format!(
            "dataset `{}` has no rows of kind mass: mr.oscillations fits a mass only from sweeps at two or more temperatures (mass: auto or fit)",
            ctx.dataset
        )));
    }
    let fit_rows = ctx.rows_of_kind("mass_fit")?;
    let temperature = ctx.floats("temperature_K")?;
    let amplitude = ctx.displayed("value_ohm_sq")?;
    let errors = ctx.displayed_opt("value_ohm_sq_unc")?;
    let field = ctx.floats("field_T")?;
    let per_t: Vec<f64> = amplitude.iter().zip(&temperature).map(|(a, t)| a.abs() / t).collect();
    let per_t_err: Option<Vec<f64>> = errors
        .as_ref()
        .map(|e| e.iter().zip(&temperature).map(|(e, t)| e / t).collect());
    let mut all = rows.clone();
    all.extend(&fit_rows);
    let groups = ctx.groups(&all, &["sample", "field_T"])?;
    // The sample is named only when there are several: legends stay short.
    let several_samples = ctx.has("sample") && {
        let samples = ctx.texts("sample")?;
        let first = &samples[all[0]];
        all.iter().any(|&r| samples[r] != *first)
    };
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        let data: Vec<usize> = group.rows.iter().copied().filter(|r| rows.contains(r)).collect();
        let fit: Vec<usize> = group.rows.iter().copied().filter(|r| fit_rows.contains(r)).collect();
        let label = match data.first() {
            Some(&r) if group.label.is_empty() || ctx.options.series_by.is_none() => {
                let sample = if several_samples {
                    ctx.texts("sample")?[r]
                        .clone()
                        .map(|s| format!("{s}, "))
                        .unwrap_or_default()
                } else {
                    String::new()
                };
                format!("{sample}B_{{eff}} = {} T", format_value(field[r]))
            }
            _ => group.label.clone(),
        };
        series.push(Series::line(
            format!("{label}: LK fit"),
            k,
            Dash::Solid,
            points(&fit, &temperature, &per_t, None),
        ));
        series.push(Series::points(
            label,
            k,
            SHAPES[k % SHAPES.len()],
            true,
            points(&data, &temperature, &per_t, per_t_err.as_deref()),
        ));
    }
    Ok(Drawing::single(
        "Effective mass from the thermal damping",
        AxisSpec::new("Temperature T", Some("K"), false),
        AxisSpec::new("Amplitude/T", Some("Ω/sq K^{−1}"), true),
        series,
    ))
}

pub(crate) fn oscillation_curves(ctx: &Context) -> Result<Drawing, PlotError> {
    let rows = ctx.rows_of_kind("oscillation")?;
    let inverse_field = ctx.floats("inverse_field_per_T")?;
    let value = ctx.displayed("value_ohm_sq")?;
    let series = lines_per_sweep(ctx, &rows, &inverse_field, &value, "Δρ_{xx}")?;
    Ok(Drawing::single(
        "Shubnikov-de Haas oscillations (background removed)",
        AxisSpec::new("1/B", Some("T^{−1}"), false),
        AxisSpec::new("Δρ_{xx}", Some("Ω/sq"), false),
        series,
    ))
}

/// The Dingle plot: the windows' ln(A sinh X / X) with error bars and, above them, the line
/// the analysis fitted (rows of kind dingle_fit; a table stored without them shows the
/// windows alone).
pub(crate) fn dingle(ctx: &Context) -> Result<Drawing, PlotError> {
    let rows = ctx.rows_of_kind("dingle")?;
    let fit_rows = ctx.rows_of_kind("dingle_fit")?;
    let inverse_field = ctx.floats("inverse_field_per_T")?;
    let ordinate = ctx.floats("dingle_ordinate")?;
    // sigma of ln A is sigma_A / A.
    let errors: Option<Vec<f64>> = if ctx.has("value_ohm_sq_unc") {
        let value = ctx.floats("value_ohm_sq")?;
        let unc = ctx.floats("value_ohm_sq_unc")?;
        Some(value.iter().zip(&unc).map(|(v, u)| (u / v).abs()).collect())
    } else {
        None
    };
    let mut all = rows.clone();
    all.extend(&fit_rows);
    let groups = ctx.groups(&all, &["sample", "temperature_K"])?;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        let data: Vec<usize> = group.rows.iter().copied().filter(|r| rows.contains(r)).collect();
        let fit: Vec<usize> = group.rows.iter().copied().filter(|r| fit_rows.contains(r)).collect();
        series.push(Series::points(
            named(group, groups.len(), "Dingle windows"),
            k,
            SHAPES[k % SHAPES.len()],
            true,
            points(&data, &inverse_field, &ordinate, errors.as_deref()),
        ));
        series.push(Series::line(
            named(group, groups.len(), "fitted line"),
            k,
            Dash::Solid,
            points(&fit, &inverse_field, &ordinate, None),
        ));
    }
    Ok(Drawing::single(
        "Dingle plot",
        AxisSpec::new("1/B", Some("T^{−1}"), false),
        AxisSpec::new("ln(A sinh X / X), A in Ω/sq", None, false),
        series,
    ))
}

/// The Landau fan: the level index of each extremum of rho_xx against 1/B, minima (integer
/// index) filled and maxima (half-integer) open, with the analysis's fitted line from 1/B = 0,
/// whose slope is the frequency F and whose intercept is the phase offset beta.
pub(crate) fn landau_fan(ctx: &Context) -> Result<Drawing, PlotError> {
    let rows = ctx.rows_of_kind("landau")?;
    if rows.is_empty() {
        return Err(PlotError::Unusable(format!(
            "dataset `{}` has no rows of kind landau: run mr.oscillations with landau_fan: true to locate the extrema of the oscillation",
            ctx.dataset
        )));
    }
    let fit_rows = ctx.rows_of_kind("landau_fit")?;
    let inverse_field = ctx.floats("inverse_field_per_T")?;
    let index = ctx.floats("landau_index")?;
    let mut all = rows.clone();
    all.extend(&fit_rows);
    let groups = ctx.groups(&all, &["sample", "temperature_K"])?;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        let (minima, maxima): (Vec<usize>, Vec<usize>) = group
            .rows
            .iter()
            .copied()
            .filter(|r| rows.contains(r))
            .partition(|&r| index[r].fract() == 0.0);
        let fit: Vec<usize> = group.rows.iter().copied().filter(|r| fit_rows.contains(r)).collect();
        let line = points(&fit, &inverse_field, &index, None);
        let fit_name = match line_slope(&line) {
            Some(slope) => format!("fit, F = {} T", format_value(slope)),
            None => "fit".to_owned(),
        };
        let shape = SHAPES[k % SHAPES.len()];
        series.push(Series::points(
            named(group, groups.len(), "minima"),
            k,
            shape,
            true,
            points(&minima, &inverse_field, &index, None),
        ));
        series.push(Series::points(
            named(group, groups.len(), "maxima"),
            k,
            shape,
            false,
            points(&maxima, &inverse_field, &index, None),
        ));
        series.push(
            Series::line(named(group, groups.len(), &fit_name), k, Dash::Solid, line)
                // The line sets the range too: its value at 1/B = 0 is the phase offset beta.
                .setting_range(),
        );
    }
    Ok(Drawing::single(
        "Landau fan",
        AxisSpec::new("1/B", Some("T^{−1}"), false),
        AxisSpec::new("Landau level index n", None, false),
        series,
    ))
}

/// The slope of a straight line given by its end points (None for fewer than two).
fn line_slope(line: &[Point]) -> Option<f64> {
    let (first, last) = (line.first()?, line.last()?);
    let slope = (last.y - first.y) / (last.x - first.x);
    slope.is_finite().then_some(slope)
}

pub(crate) fn weak_localization(ctx: &Context) -> Result<Drawing, PlotError> {
    let field = ctx.displayed("field_T")?;
    let delta = ctx.displayed("delta_sigma_S")?;
    let errors = ctx.displayed_opt("delta_sigma_S_unc")?;
    let model = ctx.displayed("model_S")?;
    let fitted = ctx.flags("fitted");
    let rows = all_rows(ctx.frame);
    let groups = ctx.groups(&rows, &["sample", "temperature_K"])?;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        let (inside, outside): (Vec<usize>, Vec<usize>) = match &fitted {
            Some(flags) => group.rows.iter().partition(|&&r| flags[r]),
            None => (group.rows.clone(), Vec::new()),
        };
        let shape = SHAPES[k % SHAPES.len()];
        series.push(Series::line(
            named(group, groups.len(), "HLN fit"),
            k,
            Dash::Solid,
            points(&inside, &field, &model, None),
        ));
        series.push(Series::points(
            named(group, groups.len(), "measured"),
            k,
            shape,
            true,
            points(&inside, &field, &delta, errors.as_deref()),
        ));
        series.push(Series::points(
            named(group, groups.len(), "not fitted"),
            k,
            shape,
            false,
            points(&outside, &field, &delta, errors.as_deref()),
        ));
    }
    Ok(Drawing::single(
        "Weak localization",
        AxisSpec::new(FIELD, Some("T"), false),
        AxisSpec::new("Δσ", Some("S"), false),
        series,
    ))
}
