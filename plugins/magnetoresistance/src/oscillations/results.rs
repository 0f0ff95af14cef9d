//! What the oscillation analysis gives: the frequency lines, spectra, mass and Dingle fits,
//! the Landau fan, the uncertainty budget and the summary of the strongest line. The steps
//! that fill them build on these types, so they sit below the steps and the module root.

/// One line of the spectrum, refined.
#[derive(Debug, Clone, PartialEq)]
pub struct FrequencyLine {
    /// F, T: from the waveform fit across temperatures when the line is in it, else from
    /// the refinement at the reference temperature, else the FFT peak ([`Self::source`]).
    pub frequency_t: f64,
    pub frequency_unc_t: Option<f64>,
    /// The FFT peak, T, and its amplitude, ohm per square.
    pub fft_frequency_t: f64,
    pub fft_amplitude_ohm_sq: f64,
    /// The refined envelope at the window centre in 1/B, reference sweep, ohm per square.
    pub amplitude_ohm_sq: f64,
    /// phi of cos(2 pi F / B + phi), rad.
    pub phase_rad: f64,
    /// From the refinement; None when the phase comes from the waveform fit or the FFT.
    pub phase_unc_rad: Option<f64>,
    /// n = g_s e F / h, m^-2.
    pub sheet_density_m2: f64,
    pub sheet_density_unc_m2: Option<f64>,
    /// F times the span of 1/B.
    pub periods_in_window: f64,
    /// The index of the stronger line this one is a harmonic of, and the order.
    pub harmonic_of: Option<(usize, u32)>,
    /// Where F, its error and the phase come from: "waveform_fit", "refinement" or "fft".
    pub source: &'static str,
}

/// The amplitude spectrum of one sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepSpectrum {
    pub temperature_k: f64,
    pub frequencies_t: Vec<f64>,
    pub amplitudes_ohm_sq: Vec<f64>,
}

/// One sweep in the window: data, background and oscillation, ordered by increasing 1/B.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepCurve {
    pub temperature_k: f64,
    pub field_t: Vec<f64>,
    pub inverse_field_per_t: Vec<f64>,
    pub rho_xx_ohm_sq: Vec<f64>,
    pub background_ohm_sq: Vec<f64>,
    pub oscillation_ohm_sq: Vec<f64>,
    /// The oscillation on the uniform 1/B grid (mean removed).
    pub resampled_ohm_sq: Vec<f64>,
}

/// R_T(T) fitted at one effective field ([`fit_thermal_damping`](super::fit_thermal_damping)).
#[derive(Debug, Clone, PartialEq)]
pub struct ThermalDampingFit {
    pub effective_mass_ratio: f64,
    pub effective_mass_ratio_unc: Option<f64>,
    /// A_0 of A_0 R_T, ohm per square.
    pub prefactor_ohm_sq: f64,
    pub effective_field_t: f64,
    pub chi_square: f64,
    pub points: usize,
    pub converged: bool,
}

/// One sweep's amplitude in one window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WindowAmplitude {
    pub temperature_k: f64,
    pub amplitude_ohm_sq: f64,
    pub amplitude_unc_ohm_sq: f64,
}

/// One narrow window of the mass analysis (the points of the mass plot).
#[derive(Debug, Clone, PartialEq)]
pub struct MassWindow {
    pub inverse_field_range_per_t: (f64, f64),
    /// B_eff = 1 / mean(1/B), T.
    pub effective_field_t: f64,
    pub amplitudes: Vec<WindowAmplitude>,
    /// None when the fit failed (a warning says why).
    pub fit: Option<ThermalDampingFit>,
}

/// The narrow-window mass.
#[derive(Debug, Clone, PartialEq)]
pub struct NarrowWindowMass {
    pub windows: Vec<MassWindow>,
    pub effective_mass_ratio: f64,
    pub effective_mass_ratio_unc: Option<f64>,
    /// sqrt(chi^2 / (K - 1)) of the windows' masses about their mean.
    pub birge_ratio: Option<f64>,
}

/// One line of the waveform fit.
#[derive(Debug, Clone, PartialEq)]
pub struct WaveformComponent {
    /// Index into [`OscillationAnalysis::lines`].
    pub line: usize,
    pub frequency_t: f64,
    pub frequency_unc_t: Option<f64>,
    pub effective_mass_ratio: f64,
    pub effective_mass_ratio_unc: Option<f64>,
    pub dingle_temperature_k: f64,
    pub dingle_temperature_unc_k: Option<f64>,
    /// A_0 at the window centre without thermal damping, ohm per square.
    pub amplitude_ohm_sq: f64,
    pub phase_rad: f64,
}

/// The damped waveform fitted across temperatures.
#[derive(Debug, Clone, PartialEq)]
pub struct WaveformFit {
    pub components: Vec<WaveformComponent>,
    pub reduced_chi_square: f64,
    pub points: usize,
    /// Starts that reached the best minimum, of how many.
    pub starts_at_best: usize,
    pub starts: usize,
}

/// The reported mass and where it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct MassEstimate {
    pub effective_mass_ratio: f64,
    pub effective_mass_ratio_unc: Option<f64>,
    /// "waveform_fit", "narrow_windows" or "known".
    pub method: &'static str,
}

/// One window of the Dingle plot.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DinglePoint {
    pub inverse_field_per_t: f64,
    pub amplitude_ohm_sq: f64,
    pub amplitude_unc_ohm_sq: f64,
    /// ln(A sinh X / X), A in ohm per square.
    pub ordinate: f64,
    pub ordinate_unc: f64,
}

/// The Dingle plot and the Dingle temperature and quantum lifetime from it.
#[derive(Debug, Clone, PartialEq)]
pub struct DinglePlot {
    pub temperature_k: f64,
    pub effective_mass_ratio: f64,
    pub window_periods: f64,
    pub points: Vec<DinglePoint>,
    /// Slope of ln(A sinh X / X) against 1/B, T.
    pub slope_t: f64,
    pub slope_unc_t: f64,
    pub intercept: f64,
    pub reduced_chi_square: f64,
    pub dingle_temperature_k: f64,
    pub dingle_temperature_unc_k: f64,
    pub quantum_lifetime_s: f64,
    pub quantum_lifetime_unc_s: f64,
    /// Windows left out (too few points, no amplitude above three times its error, or beyond
    /// the first such window).
    pub dropped_windows: usize,
}

/// A minimum or a maximum of rho_xx.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Extremum {
    Minimum,
    Maximum,
}

/// One extremum of the Landau fan.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FanPoint {
    pub inverse_field_per_t: f64,
    /// Integer for minima, half-integer for maxima.
    pub index: f64,
    pub kind: Extremum,
}

/// The Landau-level fan: index = F_fan / B + intercept.
#[derive(Debug, Clone, PartialEq)]
pub struct LandauFan {
    pub temperature_k: f64,
    pub points: Vec<FanPoint>,
    pub frequency_t: f64,
    pub frequency_unc_t: f64,
    /// beta, in about (-1/2, 1/2]: 0 for a conventional 2D gas, +-1/2 for a Berry phase pi.
    pub intercept: f64,
    pub intercept_unc: f64,
    /// phi = 2 pi (beta + 1/2), rad.
    pub phase_rad: f64,
}

/// The contract's summary numbers (and their uncertainties: `_unc` the total standard
/// uncertainty, the budgets its parts).
#[derive(Debug, Clone, PartialEq)]
pub struct OscillationSummary {
    pub frequency_t: f64,
    pub frequency_unc_t: Option<f64>,
    pub frequency_budget: Option<UncertaintyBudget>,
    pub sheet_density_budget: Option<UncertaintyBudget>,
    pub effective_mass_budget: Option<UncertaintyBudget>,
    pub dingle_temperature_budget: Option<UncertaintyBudget>,
    pub sheet_density_m2: f64,
    pub sheet_density_unc_m2: Option<f64>,
    pub effective_mass_ratio: Option<f64>,
    pub effective_mass_ratio_unc: Option<f64>,
    pub mass_method: Option<&'static str>,
    pub dingle_temperature_k: Option<f64>,
    pub dingle_temperature_unc_k: Option<f64>,
    pub quantum_lifetime_s: Option<f64>,
    pub quantum_lifetime_unc_s: Option<f64>,
}

/// Everything [`analyze_oscillations`](super::analyze_oscillations) found.
#[derive(Debug, Clone, PartialEq)]
pub struct OscillationAnalysis {
    /// [B_min, B_max], T.
    pub field_window_t: (f64, f64),
    /// [1/B_max, 1/B_min], 1/T.
    pub inverse_field_window_per_t: (f64, f64),
    pub grid_points: usize,
    pub grid_spacing_per_t: f64,
    /// The transform length after padding.
    pub padded_length: usize,
    /// 1 / span of 1/B, T.
    pub resolution_t: f64,
    /// Index of the reference (coldest) sweep.
    pub reference_sweep: usize,
    /// Strongest first.
    pub lines: Vec<FrequencyLine>,
    /// One per sweep, in input order.
    pub spectra: Vec<SweepSpectrum>,
    pub curves: Vec<SweepCurve>,
    pub mass: Option<MassEstimate>,
    pub narrow_windows: Option<NarrowWindowMass>,
    pub waveform: Option<WaveformFit>,
    pub dingle: Option<DinglePlot>,
    pub landau_fan: Option<LandauFan>,
    /// The uncertainty budget of F, n, m* and T_D ("Uncertainties" in the module
    /// documentation).
    pub budget: OscillationBudget,
    /// d m* / d T_thermometer and d T_D / d T_thermometer of the waveform fit (per K), from
    /// a refit with every temperature raised by the stated thermometer accuracy.
    pub(super) temperature_sensitivity: Option<(f64, f64)>,
    /// The change of m* and of the waveform's T_D from the stated per-sweep temperature
    /// stability, each sweep's effect in quadrature.
    pub(super) temperature_stability_effect: Option<(f64, f64)>,
    pub warnings: Vec<String>,
}

/// The uncertainty budget of one result: `statistical` (Type A: the fit's standard error,
/// scaled by the residual scatter, and the spread over backgrounds and windows) and
/// `systematic` (Type B: the stated calibrations), `total` their quadrature sum.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UncertaintyBudget {
    /// The fit's own standard error (scaled by the scatter of the residuals).
    pub fit: Option<f64>,
    /// The spread over the other backgrounds and windows beyond what their noise explains,
    /// with the effect of the stated per-sweep temperature stability in quadrature.
    pub analysis_spread: f64,
    /// From the stated field and temperature calibrations.
    pub calibration: f64,
    pub statistical: Option<f64>,
    pub systematic: f64,
    pub total: Option<f64>,
}

impl UncertaintyBudget {
    pub(super) fn new(fit: Option<f64>, analysis_spread: f64, calibration: f64) -> Self {
        let statistical = fit.map(|u| u.hypot(analysis_spread));
        UncertaintyBudget {
            fit,
            analysis_spread,
            calibration,
            statistical,
            systematic: calibration,
            total: statistical.map(|u| u.hypot(calibration)),
        }
    }
}

/// The budgets of the summary's numbers and what went into them.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct OscillationBudget {
    pub frequency: Option<UncertaintyBudget>,
    pub sheet_density: Option<UncertaintyBudget>,
    pub effective_mass: Option<UncertaintyBudget>,
    pub dingle_temperature: Option<UncertaintyBudget>,
    /// The repeated analyses whose spread entered ("background degree 5", ...).
    pub variants: Vec<String>,
    /// Calibrations not stated, so assumed: parameter names.
    pub calibrations_not_stated: Vec<&'static str>,
}

impl OscillationAnalysis {
    /// The summary numbers of the strongest line, with the totals of the budget as their
    /// uncertainties.
    pub fn summary(&self) -> OscillationSummary {
        let line = &self.lines[0];
        let budget = &self.budget;
        let total = |b: &Option<UncertaintyBudget>, fit: Option<f64>| match b {
            Some(b) => b.total,
            None => fit,
        };
        let dingle_temperature_k = self.dingle.as_ref().map(|d| d.dingle_temperature_k);
        let dingle_temperature_unc_k = total(
            &budget.dingle_temperature,
            self.dingle.as_ref().map(|d| d.dingle_temperature_unc_k),
        );
        let quantum_lifetime_s = self.dingle.as_ref().map(|d| d.quantum_lifetime_s);
        // tau_q = hbar / (2 pi k_B T_D): the relative uncertainty of T_D.
        let quantum_lifetime_unc_s = match (quantum_lifetime_s, dingle_temperature_k, dingle_temperature_unc_k) {
            (Some(tau), Some(t), Some(u)) => Some((tau * u / t).abs()),
            _ => None,
        };
        OscillationSummary {
            frequency_t: line.frequency_t,
            frequency_unc_t: total(&budget.frequency, line.frequency_unc_t),
            frequency_budget: budget.frequency,
            sheet_density_budget: budget.sheet_density,
            effective_mass_budget: budget.effective_mass,
            dingle_temperature_budget: budget.dingle_temperature,
            sheet_density_m2: line.sheet_density_m2,
            sheet_density_unc_m2: total(&budget.sheet_density, line.sheet_density_unc_m2),
            effective_mass_ratio: self.mass.as_ref().map(|m| m.effective_mass_ratio),
            effective_mass_ratio_unc: total(
                &budget.effective_mass,
                self.mass.as_ref().and_then(|m| m.effective_mass_ratio_unc),
            ),
            mass_method: self.mass.as_ref().map(|m| m.method),
            dingle_temperature_k,
            dingle_temperature_unc_k,
            quantum_lifetime_s,
            quantum_lifetime_unc_s,
        }
    }
}
