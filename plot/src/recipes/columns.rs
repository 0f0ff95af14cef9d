//! The `columns` figure: any numeric columns against one another, for imported data and for
//! the columns no declared figure draws.

use super::{all_rows, points, Context, Drawing};
use crate::error::PlotError;
use crate::figure::{AxisSpec, Series, SHAPES};
use crate::units::{column_display, is_density_unit};
use mobilis_sdk::figure_spec::SeriesKey;

pub(crate) fn build(ctx: &Context) -> Result<Drawing, PlotError> {
    let options = ctx.options;
    let x_name = options.x.as_deref().filter(|x| !x.is_empty()).ok_or_else(|| {
        PlotError::BadOption(format!(
            "kind `columns` needs `x` and at least one `y`: name columns of dataset `{}` ({})",
            ctx.dataset,
            column_list(ctx)
        ))
    })?;
    if options.y.is_empty() {
        return Err(PlotError::BadOption(format!(
            "kind `columns` needs at least one `y` column besides x = `{x_name}`; dataset `{}` has {}",
            ctx.dataset,
            column_list(ctx)
        )));
    }
    if !options.y_error.is_empty() && options.y_error.len() != options.y.len() {
        return Err(PlotError::BadOption(format!(
            "y_error has {} columns for {} y columns; give one uncertainty column per y column, or none",
            options.y_error.len(),
            options.y.len()
        )));
    }
    let x = ctx.displayed(x_name)?;
    let x_display = column_display(x_name);
    let rows = all_rows(ctx.frame);
    // The x column is the abscissa, never a series key.
    let defaults: Vec<SeriesKey> = ["sample", "temperature_K"]
        .into_iter()
        .filter(|c| *c != x_name)
        .map(SeriesKey::column)
        .collect();
    let groups = ctx.groups(&rows, &defaults)?;
    let y_displays: Vec<_> = options.y.iter().map(|y| column_display(y)).collect();
    let mut series = Vec::new();
    for (j, y_name) in options.y.iter().enumerate() {
        let y = ctx.displayed(y_name)?;
        let error_name = match options.y_error.get(j) {
            Some(name) => Some(name.clone()),
            None => Some(format!("{y_name}_unc")).filter(|name| ctx.has(name)),
        };
        let errors = match &error_name {
            // An uncertainty is shown in the unit of its value, whatever its name says.
            Some(name) => Some(
                ctx.floats(name)?
                    .into_iter()
                    .map(|e| e * y_displays[j].factor)
                    .collect::<Vec<f64>>(),
            ),
            None => None,
        };
        for group in &groups {
            let index = series.len();
            let name = match (options.y.len(), group.label.is_empty()) {
                (1, true) => y_name.clone(),
                (1, false) => group.label.clone(),
                (_, true) => y_name.clone(),
                (_, false) => format!("{}: {y_name}", group.label),
            };
            series.push(Series::points(
                name,
                index,
                SHAPES[index % SHAPES.len()],
                true,
                points(&group.rows, &x, &y, errors.as_deref()),
            ));
        }
    }
    let first = &y_displays[0];
    let same_unit = y_displays.iter().all(|d| d.unit == first.unit);
    let y_text = if options.y.len() == 1 {
        first.name.clone()
    } else {
        y_displays
            .iter()
            .map(|d| d.name.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    };
    let y_unit = if same_unit { first.unit.clone() } else { None };
    let log_y = y_displays.iter().all(|d| is_density_unit(d.unit.as_deref()));
    let log_x = is_density_unit(x_display.unit.as_deref());
    Ok(Drawing {
        title: format!("{y_text} against {}", x_display.name),
        panels: vec![crate::figure::Panel::new(
            None,
            AxisSpec::new(x_display.name.clone(), x_display.unit.as_deref(), log_x),
            AxisSpec::new(y_text, y_unit.as_deref(), log_y),
            series,
        )],
    })
}

fn column_list(ctx: &Context) -> String {
    ctx.frame
        .get_column_names()
        .iter()
        .map(|c| c.to_string())
        .collect::<Vec<_>>()
        .join(", ")
}
