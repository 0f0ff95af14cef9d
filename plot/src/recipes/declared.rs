//! The builder of declared figures: a plugin's [`FigureSpec`] and the table it describes make
//! the panels, series and axes. Every figure of an analysis's output, the built-in plugins'
//! and a lab's own, is drawn here; nothing in this file knows an analysis or its columns.

use mobilis_sdk::figure_spec::{
    AxisScale, AxisSpec as AxisDecl, DashSpec, ErrorBars, FigureSpec, LayerSpec, MarkSpec, Naming, PanelSpec, Transform,
};

use super::{all_rows, named, points, Context, Drawing, Group};
use crate::error::PlotError;
use crate::figure::{format_value, AxisSpec, Dash, Panel, Point, Series, SHAPES};
use crate::units::column_display;

/// The figure `spec` declares, drawn from the context's table.
pub(crate) fn build(ctx: &Context, spec: &FigureSpec) -> Result<Drawing, PlotError> {
    let spec = chosen(ctx, spec)?;
    let kinds = RowKinds::read(ctx, spec)?;
    let rows = figure_rows(ctx, spec, &kinds)?;
    let groups = ctx.groups(&rows, &spec.series_by)?;
    let mut panels = Vec::new();
    if spec.panel_per_series {
        // One panel per group, each drawing the first panel's layers alone.
        if let Some(panel) = spec.panels.first() {
            for group in &groups {
                let title = (groups.len() > 1 && !group.label.is_empty()).then(|| group.label.clone());
                let mut built = build_panel(ctx, panel, std::slice::from_ref(group), 1, &kinds)?;
                built.title = title;
                panels.push(built);
            }
        }
    } else {
        for panel in &spec.panels {
            panels.push(build_panel(ctx, panel, &groups, groups.len(), &kinds)?);
        }
    }
    Ok(Drawing {
        title: spec.title.clone(),
        panels,
    })
}

/// The declaration itself, or its fallback when the first layer's column has nothing to draw
/// and the fallback's is there.
fn chosen<'s>(ctx: &Context, spec: &'s FigureSpec) -> Result<&'s FigureSpec, PlotError> {
    if let Some(fallback) = &spec.fallback {
        let own = first_layer(spec).map(|l| l.y.as_str());
        let other = first_layer(fallback).map(|l| l.y.as_str());
        if let (Some(own), Some(other)) = (own, other) {
            if !has_values(ctx, own)? && ctx.has(other) {
                return chosen(ctx, fallback);
            }
        }
    }
    Ok(spec)
}

fn first_layer(spec: &FigureSpec) -> Option<&LayerSpec> {
    spec.panels.first().and_then(|p| p.layers.first())
}

/// True when a column exists and holds at least one finite value.
fn has_values(ctx: &Context, name: &str) -> Result<bool, PlotError> {
    Ok(ctx.has(name) && ctx.floats(name)?.iter().any(|v| v.is_finite()))
}

/// The rows the figure draws: its row kinds' rows in the declared order (the order that names
/// the series), trimmed in x when declared.
fn figure_rows(ctx: &Context, spec: &FigureSpec, kinds: &RowKinds) -> Result<Vec<usize>, PlotError> {
    if let Some(required) = &spec.requires {
        if kinds.rows_of(&required.kind).is_empty() {
            return Err(PlotError::Unusable(format!(
                "dataset `{}` has no rows of kind {}: {}",
                ctx.dataset, required.kind, required.hint
            )));
        }
    }
    let mut rows = if spec.row_kinds.is_empty() {
        all_rows(ctx.frame)
    } else {
        let mut rows = Vec::new();
        for kind in &spec.row_kinds {
            rows.extend(kinds.rows_of(kind));
        }
        rows
    };
    if let (Some(trim), Some(panel)) = (spec.trim_x, spec.panels.first()) {
        if let Some(layer) = panel.layers.first() {
            let x = x_values(ctx, &panel.x)?;
            let y = ctx.displayed(&layer.y)?;
            let strongest = rows
                .iter()
                .map(|&r| y[r].abs())
                .filter(|a| a.is_finite())
                .fold(0.0, f64::max);
            let highest = rows
                .iter()
                .filter(|&&r| y[r].abs() >= trim.fraction * strongest)
                .map(|&r| x[r])
                .filter(|f| f.is_finite())
                .fold(0.0, f64::max);
            if highest > 0.0 {
                rows.retain(|&r| x[r] <= trim.margin * highest);
            }
        }
    }
    Ok(rows)
}

fn x_column<'a>(ctx: &Context, axis: &'a AxisDecl) -> Result<&'a str, PlotError> {
    axis.column.as_deref().ok_or_else(|| {
        PlotError::Unusable(format!(
            "the declaration of kind `{}` names no x column; the plugin's figure declaration needs panels[].x.column",
            ctx.kind.name
        ))
    })
}

/// The x values in displayed units (a reciprocal axis: numerator / stored value).
fn x_values(ctx: &Context, axis: &AxisDecl) -> Result<Vec<f64>, PlotError> {
    let column = x_column(ctx, axis)?;
    match axis.scale {
        AxisScale::Reciprocal(numerator) => Ok(ctx.floats(column)?.iter().map(|t| numerator / t).collect()),
        AxisScale::Linear | AxisScale::Log => ctx.displayed(column),
    }
}

/// "K" to "K^{−1}": the unit of a reciprocal quantity.
fn reciprocal_unit(unit: &str) -> String {
    if unit.contains([' ', '/', '^']) {
        format!("({unit})^{{−1}}")
    } else {
        format!("{unit}^{{−1}}")
    }
}

/// The axis text: its label (with the chosen part filled in) and the unit the column-name
/// convention gives `column`, changed as the `transforms` change the values.
fn axis(ctx: &Context, decl: &AxisDecl, column: &str, transforms: &[Transform]) -> Result<AxisSpec, PlotError> {
    let mut unit = column_display(column).unit;
    if let AxisScale::Reciprocal(_) = decl.scale {
        unit = unit.map(|u| reciprocal_unit(&u));
    }
    for transform in transforms {
        unit = match transform {
            Transform::Abs | Transform::Shift(_) => unit,
            Transform::Percent => Some("%".to_owned()),
            Transform::Per(other) => match (unit, column_display(other).unit) {
                (Some(unit), Some(per)) => Some(format!("{unit} {}", reciprocal_unit(&per))),
                (unit, None) => unit,
                (None, Some(per)) => Some(reciprocal_unit(&per)),
            },
            Transform::RelativeToZeroX { percent, .. } => percent.then(|| "%".to_owned()),
        };
    }
    let mut label = decl.label.clone();
    if let Some(choice) = &decl.choice {
        let value = if ctx.has(&choice.column) {
            ctx.floats(&choice.column)?.into_iter().find(|v| v.is_finite())
        } else {
            None
        };
        let text = value
            .and_then(|v| choice.cases.iter().find(|(case, _)| (v - case).abs() < 1e-9))
            .map(|(_, text)| text.as_str())
            .unwrap_or(&choice.otherwise);
        label = label.replace("{choice}", text);
    }
    Ok(AxisSpec::new(
        label,
        unit.as_deref(),
        matches!(decl.scale, AxisScale::Log),
    ))
}

/// One panel: every layer for every group, group by group.
fn build_panel(
    ctx: &Context,
    panel: &PanelSpec,
    groups: &[Group],
    named_groups: usize,
    kinds: &RowKinds,
) -> Result<Panel, PlotError> {
    let x = x_values(ctx, &panel.x)?;
    let x_name = x_column(ctx, &panel.x)?;
    let x_axis = axis(ctx, &panel.x, x_name, &[])?;
    // Layers that draw the same values (data points in and out of a fit, a fit line over the
    // same column) share one computation over the table.
    let mut computed: Vec<(&LayerSpec, LayerValues)> = Vec::new();
    let mut layers: Vec<(&LayerSpec, usize)> = Vec::new();
    for layer in &panel.layers {
        if layer.optional && !has_values(ctx, &layer.y)? {
            continue;
        }
        let same = computed.iter().position(|(other, _)| {
            other.y == layer.y && other.errors == layer.errors && other.transforms == layer.transforms
        });
        let index = match same {
            Some(index) => index,
            None => {
                computed.push((layer, layer_values(ctx, layer, (x_name, &x), groups)?));
                computed.len() - 1
            }
        };
        layers.push((layer, index));
    }
    let y_axis = match panel.layers.first() {
        Some(first) => axis(ctx, &panel.y, &first.y, &first.transforms)?,
        None => AxisSpec::new(panel.y.label.clone(), None, matches!(panel.y.scale, AxisScale::Log)),
    };
    // Boolean columns that select rows, read once for all groups.
    let mut flags: Vec<(&str, Option<Vec<bool>>)> = Vec::new();
    for (layer, _) in &layers {
        if let Some(flag) = &layer.rows.flag {
            if !flags.iter().any(|(name, _)| *name == flag.column) {
                flags.push((&flag.column, ctx.flags(&flag.column)));
            }
        }
    }
    let single = groups.len() == 1;
    let mut series = Vec::new();
    for (k, group) in groups.iter().enumerate() {
        for (layer, index) in &layers {
            let values = &computed[*index].1;
            let rows = kinds.select(ctx, layer, group, &values.y, &flags)?;
            let drawn = points(&rows, &x, &values.y, values.errors.as_deref());
            let name = series_name(ctx, layer, group, named_groups, &drawn);
            let colour = match (layer.colour, layer.colour_alone) {
                (Some(colour), _) => colour,
                (None, Some(colour)) if single => colour,
                _ => k,
            };
            series.push(match layer.mark {
                MarkSpec::Points { filled } => Series::points(name, colour, SHAPES[k % SHAPES.len()], filled, drawn),
                MarkSpec::Line { dash } => {
                    let line = Series::line(name, colour, dash_of(dash), drawn);
                    if layer.sets_range {
                        line.setting_range()
                    } else {
                        line
                    }
                }
            });
        }
    }
    Ok(Panel::new(panel.title.clone(), x_axis, y_axis, series))
}

fn dash_of(dash: DashSpec) -> Dash {
    match dash {
        DashSpec::Solid => Dash::Solid,
        DashSpec::Dashed => Dash::Dashed,
        DashSpec::Dotted => Dash::Dotted,
        DashSpec::Chain => Dash::Chain,
        DashSpec::Long => Dash::Long,
    }
}

/// The legend text of a layer's series in `group`.
fn series_name(ctx: &Context, layer: &LayerSpec, group: &Group, groups: usize, drawn: &[Point]) -> String {
    let mut base = layer.name.replace("{dataset}", ctx.dataset);
    if base.contains("{slope}") {
        base = match line_slope(drawn) {
            Some(slope) => base.replace("{slope}", &format_value(slope)),
            None => layer
                .name_without_slope
                .clone()
                .unwrap_or_else(|| base.replace("{slope}", "?")),
        };
    }
    let name = match layer.naming {
        Naming::WithGroup => named(group, groups, &base),
        Naming::GroupOrName if group.label.is_empty() => base,
        Naming::GroupOrName => group.label.clone(),
        Naming::AfterGroup if group.label.is_empty() => base,
        Naming::AfterGroup => format!("{}: {base}", group.label),
    };
    format!("{name}{}", layer.name_suffix)
}

/// The slope of a straight line given by its end points (None for fewer than two).
fn line_slope(line: &[Point]) -> Option<f64> {
    let (first, last) = (line.first()?, line.last()?);
    let slope = (last.y - first.y) / (last.x - first.x);
    slope.is_finite().then_some(slope)
}

/// A layer's displayed y values and error bars, transformed, indexed by row.
struct LayerValues {
    y: Vec<f64>,
    errors: Option<Vec<f64>>,
}

fn layer_values(
    ctx: &Context,
    layer: &LayerSpec,
    (x_name, x): (&str, &[f64]),
    groups: &[Group],
) -> Result<LayerValues, PlotError> {
    let display = column_display(&layer.y);
    let mut y = ctx.displayed(&layer.y)?;
    let mut errors = match &layer.errors {
        ErrorBars::None => None,
        ErrorBars::Companion => {
            let name = format!("{}_unc", layer.y);
            if ctx.has(&name) {
                // An uncertainty is shown in the unit of its value: the factor, no offset.
                Some(
                    ctx.floats(&name)?
                        .into_iter()
                        .map(|e| e * display.factor)
                        .collect::<Vec<f64>>(),
                )
            } else {
                None
            }
        }
        ErrorBars::RelativeOf(column) => {
            let name = format!("{column}_unc");
            if ctx.has(&name) {
                let value = ctx.floats(column)?;
                let unc = ctx.floats(&name)?;
                // sigma of ln c is sigma_c / c.
                Some(value.iter().zip(&unc).map(|(v, u)| (u / v).abs()).collect())
            } else {
                None
            }
        }
    };
    for transform in &layer.transforms {
        match transform {
            Transform::Abs => y.iter_mut().for_each(|v| *v = v.abs()),
            Transform::Percent => {
                y.iter_mut().for_each(|v| *v *= 100.0);
                if let Some(errors) = errors.as_mut() {
                    errors.iter_mut().for_each(|e| *e *= 100.0);
                }
            }
            Transform::Per(column) => {
                let by = ctx.floats(column)?;
                y.iter_mut().zip(&by).for_each(|(v, b)| *v /= b);
                if let Some(errors) = errors.as_mut() {
                    errors.iter_mut().zip(&by).for_each(|(e, b)| *e /= b);
                }
            }
            Transform::Shift(shift) => y.iter_mut().for_each(|v| *v += shift),
            Transform::RelativeToZeroX { within, percent, hint } => {
                let scale = if *percent { 100.0 } else { 1.0 };
                let mut relative = vec![f64::NAN; y.len()];
                let mut relative_errors = errors.as_ref().map(|_| vec![f64::NAN; y.len()]);
                for group in groups {
                    let zero = group
                        .rows
                        .iter()
                        .copied()
                        .filter(|&r| x[r].abs() <= *within && y[r].is_finite())
                        .min_by(|&a, &b| x[a].abs().total_cmp(&x[b].abs()))
                        .ok_or_else(|| {
                            PlotError::Unusable(format!(
                                "dataset `{}`{} has no row with {} within {} of zero to take the reference {} from; {hint}",
                                ctx.dataset,
                                if group.label.is_empty() { String::new() } else { format!(" ({})", group.label) },
                                x_name,
                                format_value(*within),
                                layer.y,
                            ))
                        })?;
                    let reference = y[zero];
                    for &r in &group.rows {
                        relative[r] = scale * (y[r] - reference) / reference;
                        if let (Some(out), Some(errors)) = (relative_errors.as_mut(), errors.as_ref()) {
                            out[r] = scale * errors[r] / reference;
                        }
                    }
                }
                y = relative;
                errors = relative_errors;
            }
        }
    }
    Ok(LayerValues { y, errors })
}

/// Which rows hold which of the kinds a figure names, read once per figure.
struct RowKinds {
    names: Vec<String>,
    /// Each row's kind as an index into `names`; None when the figure names no kind.
    codes: Option<Vec<Option<usize>>>,
}

impl RowKinds {
    fn read(ctx: &Context, spec: &FigureSpec) -> Result<RowKinds, PlotError> {
        let mut names: Vec<String> = Vec::new();
        let mentioned =
            spec.requires
                .iter()
                .map(|r| &r.kind)
                .chain(&spec.row_kinds)
                .chain(spec.panels.iter().flat_map(|p| {
                    p.layers
                        .iter()
                        .flat_map(|l| l.rows.kind.iter().chain(l.rows.kind_fallback.iter()))
                }));
        for kind in mentioned {
            if !names.contains(kind) {
                names.push(kind.clone());
            }
        }
        let codes = if names.is_empty() {
            None
        } else {
            let borrowed: Vec<&str> = names.iter().map(String::as_str).collect();
            Some(ctx.kind_codes(&borrowed)?)
        };
        Ok(RowKinds { names, codes })
    }

    fn code(&self, kind: &str) -> Option<usize> {
        self.names.iter().position(|n| n == kind)
    }

    /// Every row of `kind`, in table order.
    fn rows_of(&self, kind: &str) -> Vec<usize> {
        let (Some(codes), Some(code)) = (&self.codes, self.code(kind)) else {
            return Vec::new();
        };
        (0..codes.len()).filter(|&r| codes[r] == Some(code)).collect()
    }

    /// The rows of `group` that `layer` draws.
    fn select(
        &self,
        ctx: &Context,
        layer: &LayerSpec,
        group: &Group,
        y: &[f64],
        flags: &[(&str, Option<Vec<bool>>)],
    ) -> Result<Vec<usize>, PlotError> {
        let selection = &layer.rows;
        let of_kind = |kind: &str| -> Vec<usize> {
            match (&self.codes, self.code(kind)) {
                (Some(codes), Some(code)) => group.rows.iter().copied().filter(|&r| codes[r] == Some(code)).collect(),
                _ => Vec::new(),
            }
        };
        let mut rows = match &selection.kind {
            Some(kind) => {
                let rows = of_kind(kind);
                match &selection.kind_fallback {
                    Some(fallback) if rows.is_empty() => of_kind(fallback),
                    _ => rows,
                }
            }
            None => group.rows.clone(),
        };
        if let Some(flag) = &selection.flag {
            let read = flags
                .iter()
                .find(|(name, _)| *name == flag.column)
                .and_then(|(_, f)| f.as_ref());
            match read {
                Some(flags) => rows.retain(|&r| flags[r] == flag.value),
                None if flag.required => {
                    return Err(match ctx.floats(&flag.column) {
                        Err(error) => error,
                        Ok(_) => PlotError::NotNumeric {
                            column: flag.column.clone(),
                            dtype: "not boolean".to_owned(),
                        },
                    })
                }
                None if flag.value => {}
                None => rows.clear(),
            }
        }
        if let Some(whole) = selection.whole_y {
            rows.retain(|&r| (y[r].fract() == 0.0) == whole);
        }
        Ok(rows)
    }
}
