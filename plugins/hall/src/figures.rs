//! The figures of `hall.reduce`'s table, declared for the host to draw: density, mobility and
//! resistivity against temperature, one series per sample (and field), in the units of the
//! column names (the host converts to cm^-3, cm^2/(V s), ohm cm).

use mobilis_sdk::figure_spec::{AxisScale, AxisSpec, FigureSpec, LayerSpec, Naming, PanelSpec, Transform};

/// One series of |column| per sample and field against temperature, with error bars.
fn against_temperature(
    name: &str,
    title: &str,
    description: &str,
    column: &str,
    label: &str,
    temperature_scale: AxisScale,
) -> FigureSpec {
    FigureSpec::new(name, title, description)
        .series_by(&["sample", "field_T"])
        .panel(
            PanelSpec::new(
                AxisSpec::x("temperature_K", "Temperature T", temperature_scale),
                AxisSpec::y(label, AxisScale::Log),
            )
            .layer(
                LayerSpec::points(column, "{dataset}")
                    .naming(Naming::GroupOrName)
                    .with_errors()
                    .transform(Transform::Abs),
            ),
        )
}

/// The figures of `hall.reduce`, the density first (the default).
pub fn reduce() -> Vec<FigureSpec> {
    vec![
        against_temperature(
            "hall_density",
            "Carrier density",
            "Carrier density against temperature, log density axis, one series per sample (and field): the volume density in cm^-3, or the sheet density in cm^-2 for 2D samples.",
            "density_m3",
            "Carrier density n",
            AxisScale::Linear,
        )
        .fallback(against_temperature(
            "hall_density",
            "Sheet carrier density",
            "",
            "sheet_density_m2",
            "Sheet carrier density n_{s}",
            AxisScale::Linear,
        )),
        against_temperature(
            "hall_mobility",
            "Hall mobility",
            "Hall mobility in cm^2/(V s) against temperature, log-log, one series per sample (and field).",
            "hall_mobility_m2_per_Vs",
            "Hall mobility μ_{H}",
            AxisScale::Log,
        ),
        against_temperature(
            "hall_resistivity",
            "Resistivity",
            "Resistivity in ohm cm (sheet resistance in ohm/sq for 2D samples) against temperature, log resistivity axis, one series per sample.",
            "resistivity_ohm_m",
            "Resistivity ρ",
            AxisScale::Linear,
        )
        .fallback(against_temperature(
            "hall_resistivity",
            "Sheet resistance",
            "",
            "sheet_resistance_ohm_sq",
            "Sheet resistance R_{s}",
            AxisScale::Linear,
        )),
    ]
}
