//! The figures of the spectrum analyses' tables, declared for the host to draw: the mobility
//! spectrum (one panel per sweep) and the measured and fitted tensor components against field.

use mobilis_sdk::figure_spec::{AxisScale, AxisSpec, DashSpec, FigureSpec, LayerSpec, PanelSpec};

/// Palette indices that keep electrons and holes in their colours in every panel.
const ELECTRON: usize = 0;
const HOLE: usize = 6;

/// `spectrum.mobility`.
pub fn mobility() -> Vec<FigureSpec> {
    vec![FigureSpec::new(
        "mobility_spectrum",
        "Mobility spectrum",
        "Mobility spectrum: d sigma / d ln mu against mobility (log axis), electrons and holes in their own colours, the regularized spectrum solid and the Beck-Anderson envelope dashed; one panel per sample and temperature.",
    )
    .series_by(&["sample", "temperature_K"])
    .panel_per_series()
    .panel(
        PanelSpec::new(
            AxisSpec::x("mobility_m2_per_Vs", "Mobility μ", AxisScale::Log),
            AxisSpec::y("dσ/d ln μ", AxisScale::Linear),
        )
        .layer(LayerSpec::line("electron_spectrum_S", "electrons", DashSpec::Solid).colour(ELECTRON))
        .layer(LayerSpec::line("hole_spectrum_S", "holes", DashSpec::Solid).colour(HOLE))
        .layer(
            LayerSpec::line("electron_envelope_S", "electron envelope", DashSpec::Dashed)
                .colour(ELECTRON)
                .optional(),
        )
        .layer(
            LayerSpec::line("hole_envelope_S", "hole envelope", DashSpec::Dashed)
                .colour(HOLE)
                .optional(),
        ),
    )]
}

/// One panel of a tensor fit: the fitted line and the measured points of one component.
fn component(measured: &str, fitted: &str, label: &str) -> PanelSpec {
    PanelSpec::new(
        AxisSpec::x("field_T", "Magnetic field B", AxisScale::Linear),
        AxisSpec::y(label, AxisScale::Linear),
    )
    .titled(label)
    .layer(LayerSpec::line(fitted, "fit", DashSpec::Solid))
    .layer(LayerSpec::points(measured, "measured").with_errors())
}

/// `spectrum.multi_carrier_fit`: the fit in conductivity space (its objective) and the same
/// fit seen in resistivity space.
pub fn multi_carrier_fit() -> Vec<FigureSpec> {
    vec![
        FigureSpec::new(
            "conductivity_fit",
            "Multi-carrier fit of the conductivity tensor",
            "Multi-carrier fit in conductivity space: measured sigma_xx and sigma_xy (points) and the fitted model (lines) against field, one panel each.",
        )
        .series_by(&["sample", "temperature_K"])
        .panel(component("sigma_xx_S", "sigma_xx_fit_S", "σ_{xx}"))
        .panel(component("sigma_xy_S", "sigma_xy_fit_S", "σ_{xy}")),
        resistivity_fit(),
    ]
}

/// The fit seen in resistivity space.
pub fn resistivity_fit() -> FigureSpec {
    FigureSpec::new(
        "resistivity_fit",
        "Fit of the resistivity tensor",
        "Fit in resistivity space: measured rho_xx and rho_xy (points) and the fitted model (lines) against field, one panel each.",
    )
    .series_by(&["sample", "temperature_K"])
    .panel(component("rho_xx_ohm_sq", "rho_xx_fit_ohm_sq", "ρ_{xx}"))
    .panel(component("rho_xy_ohm", "rho_xy_fit_ohm", "ρ_{xy}"))
}
