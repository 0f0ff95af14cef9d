//! The figures of the carriers analyses' tables, declared for the host to draw: the freeze-out
//! and Arrhenius plots against 1000/T and the mobility with its scattering terms. Units come
//! from the column names; only the quantities' names are written here.

use mobilis_sdk::figure_spec::{AxisScale, AxisSpec, DashSpec, FigureSpec, LayerSpec, PanelSpec, Transform};

/// 1000/T, the customary abscissa of freeze-out and Arrhenius plots.
fn inverse_temperature() -> AxisSpec {
    AxisSpec::x("temperature_K", "1000/T", AxisScale::Reciprocal(1000.0))
}

/// `carriers.freeze_out_fit`: measured density (rows of kind data) and the model curve (rows of
/// kind curve; the model at the data points when a table has no curve rows).
pub fn freeze_out() -> Vec<FigureSpec> {
    vec![FigureSpec::new(
        "freeze_out",
        "Carrier freeze-out and charge-neutrality fit",
        "Freeze-out: measured density (points with error bars) and the fitted charge-neutrality model (line) against 1000/T, log density axis, one colour per sample.",
    )
    .row_kinds(&["data", "curve"])
    .series_by(&["sample"])
    .panel(
        PanelSpec::new(inverse_temperature(), AxisSpec::y("Carrier density n", AxisScale::Log))
            .layer(
                LayerSpec::line("fitted_density_m3", "model", DashSpec::Solid)
                    .kind("curve")
                    .kind_fallback("data"),
            )
            .layer(LayerSpec::points("density_m3", "measured").kind("data").with_errors()),
    )]
}

/// The Arrhenius plot of one set of columns, shifted by `shift` (a legacy table's ordinate is in
/// m^-3 where the figure shows cm^-3).
fn arrhenius_of(ordinate: &str, fitted: &str, shift: f64) -> FigureSpec {
    let shifted = |layer: LayerSpec| {
        if shift == 0.0 {
            layer
        } else {
            layer.transform(Transform::Shift(shift))
        }
    };
    FigureSpec::new(
        "arrhenius",
        "Arrhenius plot",
        "Arrhenius plot: ln(n T^-3/2) (or ln(n T^-3/4), as the fit used) with n in cm^-3 against 1000/T; points on the fitted line filled, the others open, and the fitted line over its range.",
    )
    .series_by(&["sample"])
    .panel(
        PanelSpec::new(
            inverse_temperature(),
            AxisSpec::y("ln[(n/cm^{−3}) (T/K)^{−{choice}}]", AxisScale::Linear).choice(
                "temperature_exponent",
                &[(0.75, "3/4"), (1.5, "3/2")],
                "r",
            ),
        )
        .layer(shifted(
            LayerSpec::line(fitted, "fitted line", DashSpec::Solid).required_flag("used", true),
        ))
        .layer(shifted(
            LayerSpec::points(ordinate, "in fit")
                .with_errors()
                .required_flag("used", true),
        ))
        .layer(shifted(
            LayerSpec::open_points(ordinate, "not in fit")
                .with_errors()
                .required_flag("used", false),
        )),
    )
}

/// `carriers.arrhenius`: ln(n / m^-3) - r ln(T / K) as stored (`ln_reduced_density_m3`), shown
/// with n in cm^-3 by the column convention. Tables stored before the columns carried their
/// unit (`reduced_ln_density`, `line`, in m^-3) are drawn shifted by -ln(1e6).
pub fn arrhenius() -> Vec<FigureSpec> {
    vec![
        arrhenius_of("ln_reduced_density_m3", "ln_reduced_density_fit_m3", 0.0).fallback(arrhenius_of(
            "reduced_ln_density",
            "line",
            -(1e6f64.ln()),
        )),
    ]
}

/// The scattering terms of the output, their legend names and dashes.
const TERMS: [(&str, &str, DashSpec); 4] = [
    ("lattice_mobility_m2_per_Vs", "lattice", DashSpec::Dashed),
    (
        "ionized_impurity_mobility_m2_per_Vs",
        "ionized impurities",
        DashSpec::Chain,
    ),
    (
        "neutral_impurity_mobility_m2_per_Vs",
        "neutral impurities",
        DashSpec::Dotted,
    ),
    ("constant_mobility_m2_per_Vs", "constant", DashSpec::Long),
];

/// `carriers.mobility_scattering`: measured mobility, the fitted total and each term. One
/// sample: every term its own colour; several: a colour per sample, terms by dash.
pub fn mobility_scattering() -> Vec<FigureSpec> {
    let mut panel = PanelSpec::new(
        AxisSpec::x("temperature_K", "Temperature T", AxisScale::Log),
        AxisSpec::y("Mobility μ", AxisScale::Log),
    )
    .layer(LayerSpec::line(
        "fitted_mobility_m2_per_Vs",
        "fit (total)",
        DashSpec::Solid,
    ));
    for (t, (column, name, dash)) in TERMS.iter().enumerate() {
        panel = panel.layer(LayerSpec::line(column, name, *dash).optional().colour_alone(t + 1));
    }
    panel = panel
        .layer(
            LayerSpec::points("mobility_m2_per_Vs", "measured")
                .with_errors()
                .flag("in_fit_range", true),
        )
        .layer(
            LayerSpec::open_points("mobility_m2_per_Vs", "outside fit range")
                .with_errors()
                .flag("in_fit_range", false),
        );
    vec![FigureSpec::new(
        "mobility_scattering",
        "Mobility and scattering mechanisms",
        "Mobility against temperature, log-log: measured points with error bars (open when outside the fitted range), the fitted total (Matthiessen) and each scattering term as dashed lines.",
    )
    .series_by(&["sample"])
    .panel(panel)]
}
