//! The figures of the magnetoresistance analyses' tables, declared for the host to draw:
//! symmetrized sweeps, magnetoresistance and Kohler plots, the two-band fit, the quantum
//! oscillation plots (spectrum, mass, curves, Dingle, Landau fan) and weak localization.

use mobilis_sdk::figure_spec::{
    AxisScale, AxisSpec, DashSpec, ErrorBars, FigureSpec, LayerSpec, Naming, PanelSpec, SeriesKey, Transform,
};

const FIELD: &str = "Magnetic field B";

fn field_axis() -> AxisSpec {
    AxisSpec::x("field_T", FIELD, AxisScale::Linear)
}

/// Fields at or below this count as zero when rho(0) is taken from a symmetrized table, as
/// `hall.reduce` counts them by default, T.
const ZERO_FIELD_T: f64 = 1e-4;

/// (rho(B) - rho(0)) / rho(0) in percent: `mr.ratio`'s column, or computed from a symmetrized
/// table's rho_xx and its zero-field row.
fn magnetoresistance() -> FigureSpec {
    let of = |column: &str, transform: Transform| {
        FigureSpec::new(
            "magnetoresistance",
            "Magnetoresistance",
            "Magnetoresistance (rho(B) - rho(0)) / rho(0) in percent against field, one series per sample and temperature, with error bars; from mr.symmetrize output rho(0) is the zero-field row.",
        )
        .series_by(&["sample", "temperature_K"])
        .panel(
            PanelSpec::new(field_axis(), AxisSpec::y("Δρ/ρ_{0}", AxisScale::Linear)).layer(
                LayerSpec::points(column, "MR")
                    .naming(Naming::GroupOrName)
                    .with_errors()
                    .transform(transform),
            ),
        )
    };
    of("magnetoresistance", Transform::Percent).fallback(of(
        "rho_xx_ohm_sq",
        Transform::RelativeToZeroX {
            within: ZERO_FIELD_T,
            percent: true,
            hint: "run mr.ratio (with zero_field: extrapolated when the sweep has no zero-field point) and plot its output".into(),
        },
    ))
}

/// `mr.ratio`.
pub fn ratio() -> Vec<FigureSpec> {
    vec![magnetoresistance()]
}

/// `mr.symmetrize`: the magnetoresistance first, then the symmetrized components.
pub fn symmetrize() -> Vec<FigureSpec> {
    let component = |column: &str, label: &str| {
        PanelSpec::new(field_axis(), AxisSpec::y(label, AxisScale::Linear))
            .titled(&format!("{label} (symmetrized)"))
            .layer(
                LayerSpec::points(column, label)
                    .naming(Naming::GroupOrName)
                    .with_errors(),
            )
    };
    vec![
        magnetoresistance(),
        FigureSpec::new(
            "symmetrized",
            "Symmetrized sweep",
            "The symmetrized sweep: even rho_xx and odd rho_xy against field, one panel each, with error bars.",
        )
        .series_by(&["sample", "temperature_K"])
        .panel(component("rho_xx_ohm_sq", "ρ_{xx}"))
        .panel(component("rho_xy_ohm", "ρ_{xy}")),
    ]
}

/// `mr.kohler`.
pub fn kohler() -> Vec<FigureSpec> {
    vec![FigureSpec::new(
        "kohler",
        "Kohler plot",
        "Kohler plot: Delta rho / rho0 against B / rho0, log-log, one series per temperature; points outside the range common to all curves open.",
    )
    .series_by(&["sample", "temperature_K"])
    .panel(
        PanelSpec::new(
            AxisSpec::x("x_T_per_ohm", "B/ρ_{0}", AxisScale::Log),
            AxisSpec::y("Δρ/ρ_{0}", AxisScale::Log),
        )
        .layer(
            LayerSpec::points("magnetoresistance", "MR")
                .naming(Naming::GroupOrName)
                .with_errors()
                .flag("used", true),
        )
        .layer(
            LayerSpec::open_points("magnetoresistance", "MR")
                .naming(Naming::GroupOrName)
                .name_suffix(" (outside common range)")
                .with_errors()
                .flag("used", false),
        ),
    )]
}

/// `mr.two_band_fit`: the fit in resistivity space, drawn as `spectrum.multi_carrier_fit`'s.
pub fn two_band_fit() -> Vec<FigureSpec> {
    let component = |measured: &str, fitted: &str, label: &str| {
        PanelSpec::new(field_axis(), AxisSpec::y(label, AxisScale::Linear))
            .titled(label)
            .layer(LayerSpec::line(fitted, "fit", DashSpec::Solid))
            .layer(LayerSpec::points(measured, "measured").with_errors())
    };
    vec![FigureSpec::new(
        "resistivity_fit",
        "Fit of the resistivity tensor",
        "Fit in resistivity space: measured rho_xx and rho_xy (points) and the fitted model (lines) against field, one panel each.",
    )
    .series_by(&["sample", "temperature_K"])
    .panel(component("rho_xx_ohm_sq", "rho_xx_fit_ohm_sq", "ρ_{xx}"))
    .panel(component("rho_xy_ohm", "rho_xy_fit_ohm", "ρ_{xy}"))]
}

/// The amplitude FFT is kept up to 1.5 times the highest frequency whose amplitude reaches 2 %
/// of the strongest line: the transform runs to the grid's Nyquist frequency, often ten times
/// the lines, and the lines would otherwise crowd the left edge.
const FFT_VISIBLE_FRACTION: f64 = 0.02;
const FFT_MARGIN: f64 = 1.5;

fn inverse_field_axis() -> AxisSpec {
    AxisSpec::x("inverse_field_per_T", "1/B", AxisScale::Linear)
}

/// `mr.oscillations`: its table holds several row kinds, one figure per kind (and its fit).
pub fn oscillations() -> Vec<FigureSpec> {
    vec![
        FigureSpec::new(
            "oscillation_fft",
            "Shubnikov-de Haas oscillation spectrum",
            "Shubnikov-de Haas spectrum: FFT amplitude against frequency (T), one line per temperature (rows of kind fft).",
        )
        .row_kinds(&["fft"])
        .trim_x(FFT_VISIBLE_FRACTION, FFT_MARGIN)
        .series_by(&["sample", "temperature_K"])
        .panel(
            PanelSpec::new(
                AxisSpec::x("frequency_T", "Frequency F", AxisScale::Linear),
                AxisSpec::y("FFT amplitude", AxisScale::Linear),
            )
            .layer(LayerSpec::line("value_ohm_sq", "FFT", DashSpec::Solid).naming(Naming::GroupOrName)),
        ),
        // Amplitude / T, whose logarithm falls linearly with T at large X, so that a log axis
        // shows the thermal damping the mass comes from.
        FigureSpec::new(
            "oscillation_mass",
            "Effective mass from the thermal damping",
            "Mass plot: oscillation amplitude / T against T (log amplitude axis) for each narrow 1/B window, with the window's Lifshitz-Kosevich fit as a line (rows of kind mass and mass_fit).",
        )
        .requires(
            "mass",
            "mr.oscillations fits a mass only from sweeps at two or more temperatures (mass: auto or fit)",
        )
        .row_kinds(&["mass", "mass_fit"])
        .series_by(&["sample"])
        .series_key(SeriesKey {
            column: "field_T".into(),
            prefix: "B_{eff} = ".into(),
            exact: true,
            always: true,
        })
        .panel(
            PanelSpec::new(
                AxisSpec::x("temperature_K", "Temperature T", AxisScale::Linear),
                AxisSpec::y("Amplitude/T", AxisScale::Log),
            )
            .layer(
                LayerSpec::line("value_ohm_sq", "LK fit", DashSpec::Solid)
                    .naming(Naming::AfterGroup)
                    .kind("mass_fit")
                    .transform(Transform::Abs)
                    .transform(Transform::Per("temperature_K".into())),
            )
            .layer(
                LayerSpec::points("value_ohm_sq", "")
                    .naming(Naming::GroupOrName)
                    .kind("mass")
                    .with_errors()
                    .transform(Transform::Abs)
                    .transform(Transform::Per("temperature_K".into())),
            ),
        ),
        FigureSpec::new(
            "oscillation_curves",
            "Shubnikov-de Haas oscillations (background removed)",
            "The oscillatory part of rho_xx (background removed) against 1/B, one line per temperature (rows of kind oscillation).",
        )
        .row_kinds(&["oscillation"])
        .series_by(&["sample", "temperature_K"])
        .panel(
            PanelSpec::new(inverse_field_axis(), AxisSpec::y("Δρ_{xx}", AxisScale::Linear))
                .layer(LayerSpec::line("value_ohm_sq", "Δρ_{xx}", DashSpec::Solid).naming(Naming::GroupOrName)),
        ),
        // The windows' ln(A sinh X / X) with error bars (sigma of ln A is sigma_A / A) and the
        // line the analysis fitted (a table stored without dingle_fit rows shows the windows).
        FigureSpec::new(
            "dingle",
            "Dingle plot",
            "Dingle plot: ln(A sinh X / X) against 1/B at the reference temperature, with error bars (rows of kind dingle), and the fitted line whose slope gives T_D (rows of kind dingle_fit).",
        )
        .row_kinds(&["dingle", "dingle_fit"])
        .series_by(&["sample", "temperature_K"])
        .panel(
            PanelSpec::new(
                inverse_field_axis(),
                AxisSpec::y("ln(A sinh X / X), A in Ω/sq", AxisScale::Linear),
            )
            .layer(
                LayerSpec::points("dingle_ordinate", "Dingle windows")
                    .kind("dingle")
                    .errors(ErrorBars::RelativeOf("value_ohm_sq".into())),
            )
            .layer(LayerSpec::line("dingle_ordinate", "fitted line", DashSpec::Solid).kind("dingle_fit")),
        ),
        // The level index of each extremum against 1/B, minima (integer index) filled and
        // maxima (half-integer) open, with the fitted line from 1/B = 0, whose slope is the
        // frequency F and whose intercept is the phase offset beta; the line sets the range.
        FigureSpec::new(
            "landau_fan",
            "Landau fan",
            "Landau fan: the Landau level index of each extremum of rho_xx against 1/B (minima filled at integers, maxima open at half-integers, rows of kind landau) and the fitted line from 1/B = 0, slope F and intercept beta (rows of kind landau_fit); needs mr.oscillations with landau_fan: true.",
        )
        .requires(
            "landau",
            "run mr.oscillations with landau_fan: true to locate the extrema of the oscillation",
        )
        .row_kinds(&["landau", "landau_fit"])
        .series_by(&["sample", "temperature_K"])
        .panel(
            PanelSpec::new(inverse_field_axis(), AxisSpec::y("Landau level index n", AxisScale::Linear))
                .layer(LayerSpec::points("landau_index", "minima").kind("landau").whole_y(true))
                .layer(LayerSpec::open_points("landau_index", "maxima").kind("landau").whole_y(false))
                .layer(
                    LayerSpec::line("landau_index", "fit, F = {slope} T", DashSpec::Solid)
                        .name_without_slope("fit")
                        .kind("landau_fit")
                        .sets_range(),
                ),
        ),
    ]
}

/// `mr.weak_localization`.
pub fn weak_localization() -> Vec<FigureSpec> {
    vec![FigureSpec::new(
        "weak_localization",
        "Weak localization",
        "Weak localization: Delta sigma against field (points with error bars, open outside the fitted range) and the Hikami-Larkin-Nagaoka fit (line).",
    )
    .series_by(&["sample", "temperature_K"])
    .panel(
        PanelSpec::new(field_axis(), AxisSpec::y("Δσ", AxisScale::Linear))
            .layer(LayerSpec::line("model_S", "HLN fit", DashSpec::Solid).flag("fitted", true))
            .layer(LayerSpec::points("delta_sigma_S", "measured").with_errors().flag("fitted", true))
            .layer(
                LayerSpec::open_points("delta_sigma_S", "not fitted")
                    .with_errors()
                    .flag("fitted", false),
            ),
    )]
}
