//! What the oscillation analysis takes: the sweeps, the background model, the mass request
//! and the settings with their validation. Every step of the analysis reads them, so they
//! sit below the steps and below the module root that re-exports them.

use super::error::OscillationError;
use mobilis_numerics::fft::Window;

/// One rho_xx(B) sweep at one temperature.
#[derive(Debug, Clone, PartialEq)]
pub struct OscillationSweep {
    pub temperature_k: f64,
    /// Fields, T, strictly increasing or decreasing.
    pub field_t: Vec<f64>,
    /// Sheet rho_xx, ohm per square (symmetrized in field).
    pub rho_xx_ohm_sq: Vec<f64>,
}

/// How the smooth background is removed (step 3 of the module documentation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Background {
    /// Least-squares polynomial of this degree in B over the window.
    Polynomial { degree: usize },
    /// Local quadratic regression in 1/B with this half-width, 1/T.
    Smoothing { width_inverse_t: f64 },
}

impl Default for Background {
    fn default() -> Self {
        Background::Polynomial { degree: 3 }
    }
}

/// Whether and how a mass is obtained.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum MassRequest {
    /// Fitted when the sweeps span two or more temperatures, otherwise none (a warning).
    #[default]
    Auto,
    /// Fitted; an error when the sweeps are at one temperature.
    Fit,
    /// Given (for the Dingle plot); no fit.
    Known { effective_mass_ratio: f64 },
    /// No mass and no Dingle plot.
    Skip,
}

/// Which fitted mass is reported as the result (both are computed). Its wire names, those
/// of the `mass_method` parameter, are [`MassMethod::name`]'s.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Deserialize, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum MassMethod {
    /// the damped waveform fitted across temperatures
    #[default]
    WaveformFit,
    /// the Lifshitz-Kosevich damping fitted in narrow 1/B windows, each with its own field,
    /// the windows combined
    NarrowWindows,
}

impl MassMethod {
    pub fn name(self) -> &'static str {
        match self {
            MassMethod::WaveformFit => "waveform_fit",
            MassMethod::NarrowWindows => "narrow_windows",
        }
    }
}

/// Settings of [`analyze_oscillations`](super::analyze_oscillations); [`OscillationSettings::default`] gives the defaults
/// of the module documentation.
#[derive(Debug, Clone, PartialEq)]
pub struct OscillationSettings {
    /// B_min of the window, T (default: see step 2).
    pub field_min_t: Option<f64>,
    /// B_max of the window, T (default: the lowest highest field of the sweeps).
    pub field_max_t: Option<f64>,
    pub background: Background,
    /// Points of the uniform 1/B grid (default: twice the most points in the window, >= 512).
    pub grid_points: Option<usize>,
    pub window: Window,
    /// The transform is at least this many times the grid (default 8).
    pub zero_padding: usize,
    /// Lines to report (default 1).
    pub frequencies: usize,
    /// Lowest frequency searched, T (default: min_periods / span of 1/B).
    pub frequency_min_t: Option<f64>,
    /// Highest frequency searched, T (default: the grid's Nyquist frequency).
    pub frequency_max_t: Option<f64>,
    /// Periods a line must complete in the window (default 2).
    pub min_periods: f64,
    /// A line must be this many times the median amplitude of the band (default 6).
    pub min_peak_ratio: f64,
    /// A line must be this fraction of the strongest (default 0.05).
    pub min_relative_amplitude: f64,
    /// g_s of n = g_s e F / h (default 2).
    pub spin_degeneracy: f64,
    pub mass: MassRequest,
    pub mass_method: MassMethod,
    /// Narrow windows (default: as many as hold `mass_window_periods` periods, 1 to 12).
    pub mass_windows: Option<usize>,
    /// Periods per narrow window when their number is not given (default 3).
    pub mass_window_periods: f64,
    /// Fit the Dingle plot when a mass is known (default true).
    pub dingle: bool,
    /// Periods per window of the Dingle plot (default: 2, or fewer down to 1 so that the
    /// window holds at least 5 Dingle windows).
    pub dingle_window_periods: Option<f64>,
    /// Build the Landau-level fan (default false).
    pub landau_fan: bool,
    /// Repeat the analysis with other backgrounds and a shorter window and add the spread of
    /// the results to the uncertainties (default true; see "Uncertainties").
    pub model_spread: bool,
    /// Relative standard uncertainty of the field calibration (Type B; not given: 0.5 % is
    /// assumed and listed).
    pub field_calibration_rel: Option<f64>,
    /// Standard uncertainty of the thermometer, K, common to every sweep (Type B; not given:
    /// 0.02 K is assumed and listed).
    pub temperature_accuracy_k: Option<f64>,
    /// Standard uncertainty of each sweep's temperature on its own, K: the stage's drift and
    /// setpoint scatter, independent from sweep to sweep (Type A; default: not given, not
    /// included).
    pub temperature_stability_k: Option<f64>,
}

impl Default for OscillationSettings {
    fn default() -> Self {
        OscillationSettings {
            field_min_t: None,
            field_max_t: None,
            background: Background::default(),
            grid_points: None,
            window: Window::Hann,
            zero_padding: 8,
            frequencies: 1,
            frequency_min_t: None,
            frequency_max_t: None,
            min_periods: 2.0,
            min_peak_ratio: 6.0,
            min_relative_amplitude: 0.05,
            spin_degeneracy: 2.0,
            mass: MassRequest::Auto,
            mass_method: MassMethod::WaveformFit,
            mass_windows: None,
            mass_window_periods: 3.0,
            dingle: true,
            dingle_window_periods: None,
            landau_fan: false,
            model_spread: true,
            field_calibration_rel: None,
            temperature_accuracy_k: None,
            temperature_stability_k: None,
        }
    }
}

impl OscillationSettings {
    pub(super) fn validate(&self) -> Result<(), OscillationError> {
        let invalid = |name: &'static str, value: f64, requirement: &'static str| {
            Err(OscillationError::InvalidSetting {
                name,
                value,
                requirement,
            })
        };
        let positive = |value: f64| value.is_finite() && value > 0.0;
        for (name, value) in [
            ("field_min_T", self.field_min_t),
            ("field_max_T", self.field_max_t),
            ("frequency_min_t", self.frequency_min_t),
            ("frequency_max_t", self.frequency_max_t),
        ] {
            if let Some(value) = value {
                if !positive(value) {
                    return invalid(
                        name,
                        value,
                        "give a finite positive value, or leave it out for the default",
                    );
                }
            }
        }
        match self.background {
            Background::Polynomial { degree } if degree > 12 => return invalid(
                "background_degree",
                degree as f64,
                "give a degree of at most 12 (a smooth background needs few terms; more would follow the oscillation)",
            ),
            Background::Smoothing { width_inverse_t } if !positive(width_inverse_t) => {
                return invalid(
                    "background_width_per_T",
                    width_inverse_t,
                    "give a finite positive half-width in 1/T, several oscillation periods 1/F",
                )
            }
            _ => {}
        }
        if let Some(points) = self.grid_points {
            if !(64..=1 << 22).contains(&points) {
                return invalid("grid_points", points as f64, "give between 64 and 4194304 grid points");
            }
        }
        if !(1..=64).contains(&self.zero_padding) {
            return invalid(
                "zero_padding",
                self.zero_padding as f64,
                "give a padding factor from 1 to 64",
            );
        }
        if !(1..=10).contains(&self.frequencies) {
            return invalid("frequencies", self.frequencies as f64, "ask for 1 to 10 frequencies");
        }
        if !(self.min_periods.is_finite() && self.min_periods >= 1.0) {
            return invalid(
                "min_periods",
                self.min_periods,
                "give at least 1 period (2 is the default)",
            );
        }
        if !(self.min_peak_ratio.is_finite() && self.min_peak_ratio > 1.0) {
            return invalid(
                "min_peak_ratio",
                self.min_peak_ratio,
                "give a ratio above 1 (6 is the default)",
            );
        }
        if !(0.0..=1.0).contains(&self.min_relative_amplitude) {
            return invalid(
                "min_relative_amplitude",
                self.min_relative_amplitude,
                "give a fraction of the strongest line from 0 to 1",
            );
        }
        if !positive(self.spin_degeneracy) {
            return invalid(
                "spin_degeneracy",
                self.spin_degeneracy,
                "give g_s > 0 (2 without resolved spin splitting, 1 with)",
            );
        }
        if let MassRequest::Known { effective_mass_ratio } = self.mass {
            if !positive(effective_mass_ratio) {
                return invalid(
                    "effective_mass_ratio",
                    effective_mass_ratio,
                    "give a finite positive m*/m_0",
                );
            }
        }
        if let Some(windows) = self.mass_windows {
            if !(1..=50).contains(&windows) {
                return invalid("mass_windows", windows as f64, "give 1 to 50 windows");
            }
        }
        if !(self.mass_window_periods.is_finite() && self.mass_window_periods >= 1.0) {
            return invalid(
                "mass_window_periods",
                self.mass_window_periods,
                "give at least 1 period per window",
            );
        }
        if let Some(accuracy) = self.field_calibration_rel {
            if !(accuracy.is_finite() && (0.0..0.5).contains(&accuracy)) {
                return invalid(
                    "field_calibration_rel",
                    accuracy,
                    "give the field calibration's relative standard uncertainty, from 0 to 0.5 (0.001 is 0.1 %)",
                );
            }
        }
        if let Some(accuracy) = self.temperature_accuracy_k {
            if !(accuracy.is_finite() && accuracy >= 0.0) {
                return invalid(
                    "temperature_accuracy_K",
                    accuracy,
                    "give the thermometer's standard uncertainty in K, 0 or more",
                );
            }
        }
        if let Some(stability) = self.temperature_stability_k {
            if !(stability.is_finite() && stability >= 0.0) {
                return invalid(
                    "temperature_stability_K",
                    stability,
                    "give each sweep's temperature stability as a standard uncertainty in K, 0 or more",
                );
            }
        }
        if let Some(periods) = self.dingle_window_periods {
            if !(periods.is_finite() && periods >= 0.5) {
                return invalid(
                    "dingle_window_periods",
                    periods,
                    "give at least half a period per window, or leave it out for the default",
                );
            }
        }
        Ok(())
    }
}
