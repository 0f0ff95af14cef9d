//! `mr.oscillations`: Shubnikov-de Haas analysis of rho_xx(B) sweeps: the oscillation
//! frequencies and the sheet densities they imply, the effective mass from the thermal
//! damping, the Dingle temperature and quantum lifetime from the field damping, and an
//! optional Landau-level fan for the phase.
//!
//! Pure computation: no DataFrames, no I/O. The table glue turns the sweeps (one per
//! temperature, or several at one temperature) into [`OscillationSweep`]s and the
//! [`OscillationAnalysis`] back into a summary ([`OscillationAnalysis::summary`]) and
//! tables (spectra, per-window amplitudes, Dingle and fan points).
//!
//! # Physics
//!
//! The oscillatory part of rho_xx is periodic in 1/B with the Onsager frequency F, and in
//! two dimensions F fixes the sheet density, n = g_s e F / h (g_s the spin degeneracy of the
//! levels, 2 unless the spin splitting is resolved). Its amplitude is damped by the
//! Lifshitz-Kosevich factors R_T = X / sinh X, X = c m* T / B, and R_D = exp(-c m* T_D / B),
//! c = 2 pi^2 k_B m_0 / (hbar e) = 14.69 T/K (`mobilis_physics::forward::oscillations`, which
//! also generates the synthetic sweeps of the tests, so that simulated and fitted physics
//! are the same code). Lifshitz and Kosevich, Sov. Phys. JETP 2, 636 (1956); Shoenberg,
//! Magnetic Oscillations in Metals (1984).
//!
//! # Steps and the choices made
//!
//! 1. **Validation.** Every sweep needs a finite positive temperature, as many rho_xx values
//!    as fields, finite values, and fields that increase or decrease strictly: a sweep that
//!    goes up and down, or repeats fields, is refused (symmetrize it first with
//!    `mr.symmetrize`, which gives one branch in |B|). A sweep through zero field is
//!    accepted; only its part inside the window is used.
//! 2. **Field window** [B_min, B_max]: given, or by default from the largest B_max / 10 and
//!    lowest positive field of any sweep up to the lowest highest field. Below about a tenth
//!    of B_max the oscillations of most samples are damped into the noise and the 1/B axis
//!    is sampled coarsely; a wider window is one parameter away. Each sweep needs
//!    16 points inside it (more for a polynomial background of high degree).
//! 3. **Background** ([`Background`]). The smooth classical magnetoresistance is removed
//!    before the transform, or it dominates the low frequencies and leaks into the line:
//!    - `Polynomial { degree }` (default degree 3): least squares in B over the window (an
//!      orthonormal Legendre basis in the scaled field, so high degrees stay well
//!      conditioned). A polynomial of low degree cannot follow an oscillation with many
//!      periods, but near B_max, where a period B^2 / F spans teslas, it takes up part of
//!      the oscillation, which would shift the fitted frequency, phase and damping.
//!      Therefore every later least-squares fit (steps 6 and 7) fits the background jointly
//!      with the oscillation, by variable projection (Golub and Pereyra, SIAM J. Numer.
//!      Anal. 10, 413, 1973): the model is projected off the polynomials and compared with
//!      the data projected the same way, which is the fit of model plus best polynomial.
//!      The degrees of freedom the polynomials use are counted in the uncertainties.
//!    - `Smoothing { width_inverse_t }`: local quadratic regression (LOESS, Cleveland, J. Am.
//!      Stat. Assoc. 74, 829, 1979, tricube weights, no robustness iterations) in 1/B with
//!      the given half-width. It is done in 1/B, not in B, because the oscillation is
//!      periodic in 1/B: a half-width of several periods 1/F averages it away equally at every
//!      field, where in B the period B^2 / F changes across the window. It follows
//!      backgrounds that no low polynomial fits (a saturating two-band MR over a wide
//!      window). The smoother is not a projection, so the fits instead backfit it
//!      (Hastie and Tibshirani, Generalized Additive Models, 1990): the background is
//!      re-estimated from the data minus the fitted oscillation and the fit repeated,
//!      [`BACKFITTING_ROUNDS`] times.
//!
//!    What is left, rho_xx - background, is the oscillation at the measured points (reported
//!    with the background as last re-estimated). Its amplitude is used in ohm per square, not
//!    divided by the background: the Lifshitz-Kosevich prefactor of Delta rho is rho_0, the
//!    zero-field resistivity (Ando's form Delta rho / rho_0 = 4 R_T R_D cos(...), Isihara and
//!    Smrcka, J. Phys. C 19, 6777, 1986), so dividing by a field-dependent background would
//!    bend the Dingle plot.
//! 4. **Uniform 1/B grid.** The oscillation is interpolated by a natural cubic spline in
//!    1/B onto `grid_points` equally spaced values between 1/B_max and 1/B_min (default:
//!    twice the most points any sweep has in the window, at least 512), and its mean removed.
//!    A spline, unlike straight lines, does not flatten the peaks of an oscillation sampled
//!    with a few points per period. If the sweep samples fewer than 4 points per period
//!    anywhere in the window (the field step is widest in 1/B at B_min), a warning says so.
//! 5. **Spectrum and lines.** Each sweep's grid is multiplied by the window function
//!    (`mobilis_numerics::fft::Window`, Hann by default, rectangular or Blackman), zero-padded
//!    to a power of two at least `zero_padding` (default 8) times the grid, and transformed
//!    (`mobilis_numerics::fft`); the amplitude is scaled so that a sinusoid on a bin shows its
//!    amplitude in ohm per square. Lines are searched in the spectrum of the reference
//!    sweep (the coldest; the first given among equals) between `frequency_min_t` (default
//!    `min_periods` / (1/B_min - 1/B_max): fewer periods than that in the window are not
//!    an oscillation one can count) and `frequency_max_t` (default the grid's Nyquist
//!    frequency): local maxima, refined by a parabola through three bins, at least
//!    `min_peak_ratio` (default 6) times the median amplitude around them (within 20
//!    resolutions or half their frequency, whichever is wider: the noise passed by the
//!    resampling falls off above the sweep's own sampling limit at B_min, so a band-wide
//!    median would understate the noise at low frequencies; the amplitude of Gaussian noise
//!    exceeds 6 times its median with probability about 1e-11 per bin),
//!    at least `min_relative_amplitude` (default 0.05) of the strongest line, and outside
//!    1.5 main-lobe half-widths of a stronger line (its own lobe and sidelobes). At most
//!    `frequencies` (default 1) lines, strongest first. A line near an integer multiple of a
//!    stronger one (within 1.5 / span) is marked as its harmonic. When a feature below the
//!    lowest frequency is stronger than every line and itself significant, the window is
//!    refused with [`OscillationError::TooFewPeriods`]; when nothing stands out, with
//!    [`OscillationError::NoOscillation`]. Both say to widen the window. Before the search, a
//!    reference sweep whose rho_xx minus background has an rms below 1e-10 of rho_xx's is
//!    refused with [`OscillationError::NoVariation`]: that is rounding, whose spectrum
//!    would otherwise pass for a line with too few periods.
//!
//!    **Dense sweeps.** Once the lines are known, a sweep that samples the highest line's
//!    period in 1/B far more finely than needed (a ramp logged at 10 Hz: tens of thousands
//!    of points) is condensed for the fits of steps 6 to 9: runs of k consecutive points are
//!    replaced by their means, k the largest count whose widest run spans at most 1/32 of that
//!    period (`prepare::condense_sweep`; a warning says how many were merged). The spectra
//!    keep every point. The mean over 1/32 of a period keeps the amplitude to 0.998, the same
//!    factor at every field and temperature, and runs of equal count keep the noise equal
//!    from point to point; every later step then costs the condensed count, so the analysis
//!    of a 40,000-point sweep takes seconds, not minutes.
//! 6. **Refinement.** The FFT's frequency is good to a fraction of the resolution 1/span,
//!    often a few per cent. The lines are refined by fitting
//!    sum_k A_k exp(-lambda_k (x - x_c)) cos(2 pi F_k (x - x_c) + psi_k) (x = 1/B, x_c the
//!    window centre, where phase and frequency are nearly uncorrelated) to the reference
//!    sweep's points with bounded Levenberg-Marquardt (`mobilis_numerics::fit`), from the FFT
//!    values (F within 1.5 / span of them) and linear least-squares amplitudes and phases,
//!    two starts in lambda. The exponential envelope stands in for R_T R_D at one
//!    temperature; F, its standard error (scaled by the scatter), the phase phi of
//!    cos(2 pi F / B + phi) and its error come from this fit. If it fails, the FFT values
//!    are kept with a warning. When the waveform fit of step 7 runs, its frequencies and
//!    phases (all sweeps, the exact damping) replace these for the lines it includes
//!    ([`FrequencyLine::source`]). The sheet density n = g_s e F / h carries the relative
//!    error of F.
//! 7. **Effective mass** ([`MassRequest`], [`MassMethod`]). Needs sweeps at two or more
//!    distinct temperatures (closer than 1e-3 relative count as one);
//!    asked for with one temperature it is an error, in `Auto` mode a warning. Why not the
//!    FFT amplitude: over a wide window R_T varies strongly with 1/B (X = c m* T / B), and
//!    more so the hotter the sweep, so the FFT amplitude of a hot sweep comes from the
//!    high-field end while that of a cold one spans the window. Fitting R_T(T) to those
//!    amplitudes at one effective field biases the mass by tens of per cent (a test shows
//!    it). Two methods avoid this, and both are computed:
//!    - **Waveform fit** (default for the reported mass): the damped waveform itself,
//!      A_k R_T(c m_k T x) exp(-c m_k T_D,k (x - x_c)) cos(2 pi F_k (x - x_c) + psi_k), fitted
//!      to the points of all sweeps at once, each at its own temperature, for every line
//!      that is not a harmonic: parameters A, m*, T_D, F and psi per line, bounded (m* in
//!      [1e-3, 20], T_D in [0, 200] K), three starts (the narrow-window mass, halved and
//!      doubled). The model is exact at every field, so the window may be as wide as the data
//!      allow. It assumes the Lifshitz-Kosevich form with a field-independent prefactor and
//!      the same noise in every sweep (the errors are scaled by the scatter).
//!    - **Narrow windows**: the 1/B range is split into `mass_windows` equal windows
//!      (default: as many as hold `mass_window_periods`, default 3, periods each, at most
//!      12). In each, the amplitude of every sweep is the in-phase coefficient of a least-
//!      squares fit of a g(x) cos(theta) + b g(x) sin(theta) + c + d (x - x_mid), theta =
//!      2 pi F x + phi_w, phi_w the window's phase in the reference sweep: projecting on a
//!      fixed phase (the LK phase does not depend on temperature) keeps a weak hot amplitude
//!      unbiased, where the magnitude sqrt(a^2 + b^2) would be pushed up by the noise. Its
//!      standard error comes from the fit's scatter. g(x) = R_T(c m* T x) R_D(x) / (the same
//!      at the window's mean 1/B) refers the amplitude to the window's own effective field
//!      B_eff = 1 / mean(1/B) of the reference sweep's points, the same field for every
//!      sweep (each sweep's own mean 1/B differs when the sweeps are sampled differently,
//!      and referring each amplitude to its own field biased the mass by per cents), even
//!      though the damping changes across the window: at the
//!      higher temperatures R_T falls several-fold within even three periods, and a constant
//!      envelope would weight the window's high-field end and bias the mass low by per
//!      cents. g needs m* and T_D: the first pass takes g = 1, later passes the previous
//!      pass's mass and the Dingle temperature of the waveform fit (or of the refinement's
//!      decay), until the mass changes by less than 1e-5 of itself (at most 6 passes).
//!      R_T(T; m*, B_eff) is fitted to each window's amplitudes ([`fit_thermal_damping`],
//!      weighted), and the windows' masses are combined by their inverse-variance mean, its
//!      error scaled up by the Birge ratio when they scatter more than their errors.
//!      Windows where the reference sweep shows no oscillation above three standard errors
//!      are left out. The method uses the Lifshitz-Kosevich form only within each window,
//!      so a mass that changes with field shows as a trend of the windows' masses.
//!
//!    `MassRequest::Known` uses a given mass instead (for the Dingle plot of one sweep).
//!    When the two methods disagree by more than three combined standard errors, a warning
//!    says so.
//! 8. **Dingle plot** (with a mass, at the reference temperature): in-phase amplitudes in
//!    consecutive windows of `dingle_window_periods` periods (default 2, fewer down to 1
//!    when the window holds fewer than 10 periods, so that there are 5 windows), projected on the
//!    refined phase; windows whose amplitude is not above three times its error are dropped,
//!    and so is every weaker window beyond the first such one after usable windows (the plot
//!    ends where the oscillation sinks into the noise; a noise window passing by chance would
//!    sit far above the line). The
//!    amplitudes are referred to each window's mean 1/B with the envelope of the previous
//!    estimate of T_D, as for the narrow windows (a few passes from the waveform fit's T_D).
//!    The line ln(A sinh X / X) = const - c m* T_D / B (X at the window's mean 1/B) is fitted with
//!    weights from the amplitude errors (sigma of ln A = sigma_A / A), its slope error scaled
//!    by sqrt(chi^2 / nu) when above 1. T_D = -slope / (c m*); the mass's error adds half the
//!    change of T_D between m* - u and m* + u. tau_q = hbar / (2 pi k_B T_D). The waveform fit
//!    gives its own T_D, reported beside it.
//! 9. **Landau fan** (optional, `landau_fan`): near each extremum of the refined waveform at
//!    the reference temperature, a parabola fitted to the points within a quarter period
//!    locates the measured extremum (kept when its curvature has the right sign and its
//!    vertex lies within the quarter period). Minima get integer indices, maxima half-
//!    integers, so that the line index = F_fan / B + beta has beta in (-1/2, 1/2]. beta = 0
//!    is the conventional 2D electron gas (rho_xx minima at even filling), beta = +-1/2 a
//!    Berry phase pi; F_fan checks F. The phase of cos(2 pi F / B + phi) is
//!    phi = 2 pi (beta + 1/2).
//!
//! # Uncertainties
//!
//! Each reported number (F and n, m*, T_D and tau_q) carries a budget in the sense of the
//! GUM (JCGM 100:2008): `_unc` is the total standard uncertainty, the quadrature sum of a
//! statistical part (Type A, from the data) and a systematic part (Type B, from stated
//! calibrations) ([`UncertaintyBudget`], [`OscillationBudget`]).
//!
//! - **The fit's own error.** The waveform and refinement fits weight every point alike and
//!   scale their covariance by the scatter of the residuals (chi^2 / nu with unit weights),
//!   which is the Birge scaling (Birge 1932) of a fit without stated errors; the Dingle line
//!   is weighted by its window amplitudes' errors and scaled by sqrt(chi^2 / nu) when that
//!   exceeds one. These errors assume independent residuals, which a background that the
//!   model does not follow breaks: the misfit is smooth, correlated from point to point, and
//!   moves F, m* and T_D by several of these errors (a test shows it for F).
//! - **The spread over backgrounds and windows.** The analysis is repeated with the
//!   polynomial degree raised by 2 and by 4 (up to 12), or the smoothing half-width at 0.6
//!   and 1.5 times the given, and with the window shortened by the lowest fifth of its 1/B
//!   span (`model_spread`, default on; the variants are listed in the summary as
//!   `uncertainty_checks`). For each variant the squared change of the result, less the
//!   part the noise explains (|u_variant^2 - u^2|, the variance of the difference of two
//!   estimates from the same data when both are unbiased; after Barlow, "Systematic errors:
//!   facts and fictions", 2002, from memory), is the squared size of the choice's effect;
//!   the largest over the variants enters the statistical part in quadrature. A variant
//!   whose strongest line is another line, or that fails, is left out with a warning. This
//!   costs three more passes of the analysis.
//! - **Calibrations** (Type B, stated per call; when not given the common-practice values of
//!   `mobilis_physics::calibration` are assumed, 0.5 % and 0.02 K, and the summary lists them
//!   under `calibrations_not_stated`): `field_calibration_rel` scales F
//!   and n, and m* (X = c m* T / B), by the same relative amount, and leaves T_D (c m* T_D /
//!   B is what the data fix); `temperature_accuracy_k`, a thermometer error common to every
//!   sweep, moves m* by the change of a refit of the waveform with every temperature raised
//!   by it (a numerical sensitivity coefficient, JCGM 100:2008 5.1.3), and T_D by the same
//!   relative amount the other way (the Dingle slope fixes m* T_D).
//! - **Temperature stability** (`temperature_stability_k`, stated per call; not included
//!   when not given): each sweep's own temperature error (the stage's drift and setpoint
//!   scatter), independent from sweep to sweep. The waveform is refitted with one sweep's
//!   temperature raised by it at a time, and the changes of m* add in quadrature; T_D moves
//!   by the same relative amount. It is random from sweep to sweep, so it enters the
//!   statistical part.
//!
//! The coverage test (`oscillations/coverage.rs`) checks on realistic sweep sets that the
//! totals cover the truth as often as standard uncertainties should.
//!
//! # Performance
//!
//! The analysis is four passes (the main one and three model-spread variants). The variants
//! need only the field window, so all four run at once on the rayon pool; a variant computes
//! only the reference sweep's spectrum (the line search reads no other) and skips the
//! narrow-window mass when the waveform fit's mass is reported (it reads only the reported
//! mass). The transforms (`mobilis_numerics::fft`) share one twiddle table and skip the butterfly
//! stages that only copy the zero padding. The waveform fit's three starts are independent
//! runs and share the pool with the passes (the best is chosen in their order, as in a
//! serial run). Its Jacobian is asked for where the residuals were last evaluated (at the
//! start and after every accepted step), so it reuses the R_T, R_D and cosine the residuals
//! computed there and adds only a sine and d ln R_T / dX per point and line. A narrow
//! window's envelope computes R_T at the window's reference 1/B once, and each point's
//! envelope, cosine and sine once, not once per column of the design. None of this changes
//! a bit of the result (`OSCILLATIONS_COMPARE_OUTPUT` of the bench checks it), and neither
//! does projecting the Jacobian off a sweep's polynomials in place, every column's sums walked
//! together row by row (`prepare::project_out_rows`), nor writing the output table's
//! rows (about 200,000 for six sweeps of 4,000 points, most of them spectrum bins) a
//! stretch per sweep into reserved columns of values and flags, the eight shared columns in
//! parallel (most of the table's time is the first touch of its fresh pages). What remains
//! is mostly the Levenberg-Marquardt fits (the waveform fit over every sweep's points, three
//! starts, in each pass: the one-sided Jacobi singular value decompositions of
//! `mobilis_numerics::fit` on the whole Jacobian, which give each step U^T r without writing
//! U (`Svd::project_columns`, the same bits), and R_T = X / sinh X, exp and cos per point
//! and evaluation), the narrow windows' linear fits and the 8-fold zero-padded transforms
//! (65,536 points per 4,000-point sweep, 2^20 for a 40,000-point ramp). On six sweeps of
//! 4,000 points each pass takes 45 to 55 ms on one core of two: 3 to 7 ms to prepare and
//! transform, 3 ms to refine, the rest the narrow windows and the waveform fit (5 to 12
//! Levenberg-Marquardt steps per start on about 10,800 points). On one thread a call takes
//! about 240 ms, 135 of them in the twelve Levenberg-Marquardt runs (SVDs 50, Jacobians 33,
//! residuals 33), whose SVD sums are chains of dependent additions as the bits require, and
//! whose evaluations are exp, sinh and cos per point. A QR factorization before the
//! SVD would make each step's decomposition several times cheaper, but it changes the
//! rounding of every step, and with it where a fit stops and, near a tie, which start wins:
//! tried on the bench's inputs, results moved by up to 8e-9 relative with the defaults and
//! 7e-4 with a smoothing background, beyond the 1e-12 that speed work may move them.
//!
//! Multiple lines: the frequencies and densities are reported for each; the narrow-window
//! mass, the Dingle plot and the fan use the strongest line only, and the other lines are
//! noise to them (a warning says when a second line is above 20 % of the first).

mod budget;
#[cfg(test)]
mod coverage;
mod error;
mod mass;
mod prepare;
mod results;
mod settings;
mod spectrum;
#[cfg(test)]
mod tests;
mod waveform;

use std::f64::consts::PI;

use rayon::prelude::*;

use mobilis_numerics::fft::{amplitude_spectrum, AmplitudeSpectrum};
use mobilis_physics::forward::oscillations::{
    sheet_density_from_frequency_m2, thermal_damping, thermal_damping_log_derivative, LK_FIELD_PER_KELVIN,
};

pub use error::OscillationError;
pub use mass::fit_thermal_damping;
use prepare::{condense_sweep, field_window, make_grid, prepare_sweep, resample, validate_sweeps, Prepared};
pub use results::{
    DinglePlot, DinglePoint, Extremum, FanPoint, FrequencyLine, LandauFan, MassEstimate, MassWindow, NarrowWindowMass,
    OscillationAnalysis, OscillationBudget, OscillationSummary, SweepCurve, SweepSpectrum, ThermalDampingFit,
    UncertaintyBudget, WaveformComponent, WaveformFit, WindowAmplitude,
};
pub use settings::{Background, MassMethod, MassRequest, OscillationSettings, OscillationSweep};
use spectrum::{find_peaks, Peak, PeakSearch, SearchLimits};
use waveform::{
    fit_waveform, in_phase_amplitude, refine_components, FitSweep, RefinedComponent, WaveformStart,
    WAVEFORM_MASS_FACTORS,
};

/// Rounds of backfitting (background re-estimated from the data minus the fitted
/// oscillation) for the smoothing background: each round shrinks the share of the
/// oscillation the smoother took by that share again.
pub const BACKFITTING_ROUNDS: usize = 3;

/// Runs the analysis of the module documentation on `sweeps`, with its uncertainty budget.
pub fn analyze_oscillations(
    sweeps: &[OscillationSweep],
    settings: &OscillationSettings,
) -> Result<OscillationAnalysis, OscillationError> {
    if !settings.model_spread {
        let mut analysis = analyze_once(sweeps, settings, Pass::Main)?;
        budget::assign(&mut analysis, &[], settings);
        return Ok(analysis);
    }
    // The variants need only the field window of the main pass (and its line, to decide
    // whether the shorter window holds enough periods, which is decided afterwards): they
    // run in parallel with it, so that on two cores the four passes take the time of two.
    // When the window itself is refused, the main pass alone says why.
    let candidates = match settings
        .validate()
        .and_then(|()| validate_sweeps(sweeps))
        .and_then(|()| field_window(sweeps, settings))
    {
        Ok(window) => budget::variants(settings, window),
        Err(_) => Vec::new(),
    };
    let (main, results) = rayon::join(
        || analyze_once(sweeps, settings, Pass::Main),
        || {
            candidates
                .par_iter()
                .map(|(_, variant)| analyze_once(sweeps, variant, Pass::Variant))
                .collect::<Vec<_>>()
        },
    );
    let mut analysis = main?;
    let mut outcomes = Vec::new();
    {
        // The variants are independent analyses of the same sweeps: they run in parallel
        // and are taken in their order, as one after the other would give them.
        for ((label, variant), result) in candidates.into_iter().zip(results) {
            if !budget::variant_applies(settings, &variant, &analysis) {
                continue;
            }
            // A variant that fails (too few points for a high degree, a window without a
            // line) has nothing to say about the spread; it is left out, and named.
            match result {
                Ok(other) => outcomes.push((label, other)),
                Err(error) => analysis.warnings.push(format!(
                    "the check of the uncertainty with {label} failed and was left out: {error}"
                )),
            }
        }
    }
    budget::assign(&mut analysis, &outcomes, settings);
    Ok(analysis)
}

/// What a pass of the analysis is for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Pass {
    /// The reported analysis: everything.
    Main,
    /// A variant of the model spread: only its lines, mass and Dingle temperature are read
    /// (`budget::assign`), so the spectra of the sweeps other than the reference, which the
    /// line search does not look at, are not computed and not returned, nor is the
    /// narrow-window mass when the waveform fit's mass is the one reported.
    Variant,
}

/// The inverse-field window of a pass, 1/T: its ends, its span and its centre.
#[derive(Debug, Clone, Copy)]
struct InverseWindow {
    range: (f64, f64),
    span: f64,
    centre: f64,
}

/// What every phase of one pass reads: the settings, the pass, the reference (coldest)
/// sweep, the window and the number of backfitting rounds.
#[derive(Clone, Copy)]
struct PassContext<'a> {
    settings: &'a OscillationSettings,
    pass: Pass,
    reference: usize,
    inverse: InverseWindow,
    rounds: usize,
}

/// The lines the search found in the reference spectrum, and the highest frequency searched
/// (the spectra are reported up to it).
struct LineSearch {
    peaks: Vec<Peak>,
    highest_t: f64,
}

/// What the mass phase found: the reported mass, the two estimates behind it, and the
/// thermometer's effect on the waveform fit.
#[derive(Default)]
struct MassFindings {
    mass: Option<MassEstimate>,
    narrow: Option<NarrowWindowMass>,
    waveform: Option<WaveformFit>,
    temperature_sensitivity: Option<(f64, f64)>,
    temperature_stability_effect: Option<(f64, f64)>,
}

/// One pass of the analysis with these settings, without the spread over variants: the
/// sweeps prepared and resampled, the lines found and refined, the mass, the Dingle plot
/// and the fan, each a phase of its own below.
fn analyze_once(
    sweeps: &[OscillationSweep],
    settings: &OscillationSettings,
    pass: Pass,
) -> Result<OscillationAnalysis, OscillationError> {
    settings.validate()?;
    validate_sweeps(sweeps)?;
    let window = field_window(sweeps, settings)?;
    let mut prepared = sweeps
        .iter()
        .enumerate()
        .map(|(index, sweep)| prepare_sweep(index, sweep, window, &settings.background))
        .collect::<Result<Vec<_>, _>>()?;
    let grid = make_grid(&prepared, window, settings);
    resample(&mut prepared, &grid);
    let range = (1.0 / window.1, 1.0 / window.0);
    let inverse = InverseWindow {
        range,
        span: range.1 - range.0,
        centre: 0.5 * (range.0 + range.1),
    };
    let span = inverse.span;
    let mut warnings = Vec::new();

    let reference = (0..prepared.len())
        .min_by(|a, b| prepared[*a].temperature_k.total_cmp(&prepared[*b].temperature_k))
        .unwrap_or(0);
    let spectra: Vec<Option<AmplitudeSpectrum>> = prepared
        .iter()
        .enumerate()
        .map(|(index, sweep)| {
            (pass == Pass::Main || index == reference)
                .then(|| amplitude_spectrum(&sweep.grid_values, grid.spacing, settings.window, settings.zero_padding))
        })
        .collect();
    flat_sweep_check(&prepared[reference], reference)?;
    let reference_spectrum = spectra[reference]
        .as_ref()
        .expect("the reference spectrum is always computed");

    let search = search_lines(reference_spectrum, settings, span, grid.spacing, &mut warnings)?;
    let fft_frequencies: Vec<f64> = search.peaks.iter().map(|p| p.frequency_t).collect();
    // A smoothing background is re-estimated from the data minus the fitted oscillation and
    // the fit repeated (backfitting); a polynomial one is fitted jointly in one pass.
    let rounds = match settings.background {
        Background::Polynomial { .. } => 1,
        Background::Smoothing { .. } => BACKFITTING_ROUNDS,
    };
    let context = PassContext {
        settings,
        pass,
        reference,
        inverse,
        rounds,
    };
    condense_dense_sweeps(sweeps, &mut prepared, window, &context, &fft_frequencies, &mut warnings)?;
    let (refined, source) = refine_reference(&mut prepared, &context, &search.peaks, &fft_frequencies, &mut warnings)?;
    let mut lines = frequency_lines(&search.peaks, &refined, source, settings, span);
    sampling_warnings(&prepared[reference], &lines, &mut warnings);

    let masses = mass_phase(&context, &mut prepared, &refined, &mut lines, &mut warnings)?;
    let dingle = dingle_phase(&context, &prepared[reference], &lines, &masses, &mut warnings);
    let mut landau_fan = None;
    if settings.landau_fan {
        match mass::landau_fan(&prepared[reference], lines[0].frequency_t, lines[0].phase_rad) {
            Ok(fan) => landau_fan = Some(fan),
            Err(message) => warnings.push(message),
        }
    }

    let spectra_out = sweep_spectra(&prepared, &spectra, search.highest_t);
    let padded_length = reference_spectrum.padded_length;
    Ok(OscillationAnalysis {
        field_window_t: window,
        inverse_field_window_per_t: range,
        grid_points: grid.points,
        grid_spacing_per_t: grid.spacing,
        padded_length,
        resolution_t: 1.0 / span,
        reference_sweep: reference,
        lines,
        spectra: spectra_out,
        curves: sweep_curves(prepared),
        mass: masses.mass,
        narrow_windows: masses.narrow,
        waveform: masses.waveform,
        dingle,
        landau_fan,
        budget: OscillationBudget::default(),
        temperature_sensitivity: masses.temperature_sensitivity,
        temperature_stability_effect: masses.temperature_stability_effect,
        warnings,
    })
}

/// Below this rms of rho_xx minus its background, relative to the rms of rho_xx, a sweep is
/// flat to rounding: the rounding of a background fit over a hundred thousand points stays
/// far below it, and no voltmeter resolves a relative change this small (common practice).
const FLAT_RELATIVE_RMS: f64 = 1e-10;

/// Refuses a reference sweep whose oscillatory part is rounding: its spectrum would still
/// have a strongest feature, and the line search would describe it as an oscillation with
/// too few periods or too little amplitude, which sends the user to the wrong remedy.
fn flat_sweep_check(reference: &Prepared, index: usize) -> Result<(), OscillationError> {
    let rms = |values: &[f64]| (values.iter().map(|value| value * value).sum::<f64>() / values.len() as f64).sqrt();
    let scale = rms(&reference.rho_xx);
    let relative_rms = rms(&reference.oscillation) / scale;
    if scale > 0.0 && relative_rms >= FLAT_RELATIVE_RMS {
        return Ok(());
    }
    Err(OscillationError::NoVariation {
        sweep: index,
        temperature_k: reference.temperature_k,
        relative_rms: if scale > 0.0 { relative_rms } else { 0.0 },
    })
}

/// Lines: the peaks of the reference spectrum between the lowest and highest frequency
/// searched, or the error that says why there are none.
fn search_lines(
    reference_spectrum: &AmplitudeSpectrum,
    settings: &OscillationSettings,
    span: f64,
    grid_spacing: f64,
    warnings: &mut Vec<String>,
) -> Result<LineSearch, OscillationError> {
    let lowest = settings.frequency_min_t.unwrap_or(settings.min_periods / span);
    let highest = settings.frequency_max_t.unwrap_or(0.5 / grid_spacing);
    if lowest >= highest {
        return Err(OscillationError::InvalidSetting {
            name: "frequency_min_t",
            value: lowest,
            requirement: "the lowest frequency searched (the fewest periods counted as an oscillation over the window's 1/B span) is not below the highest (the Nyquist frequency of the 1/B grid); widen the field window (a lower field_min_T or a higher field_max_T) or give a denser sweep",
        });
    }
    let limits = SearchLimits {
        lowest_t: lowest,
        highest_t: highest,
        count: settings.frequencies,
        window: settings.window,
        min_ratio: settings.min_peak_ratio,
        min_relative_amplitude: settings.min_relative_amplitude,
    };
    let peaks = match find_peaks(reference_spectrum, &limits) {
        PeakSearch::Found(peaks) => peaks,
        PeakSearch::TooFewPeriods { frequency_t } => {
            return Err(OscillationError::TooFewPeriods {
                frequency_t,
                periods: frequency_t * span,
                required: settings.min_periods,
                inverse_span_per_t: span,
            })
        }
        PeakSearch::Nothing { best_ratio } => {
            return Err(OscillationError::NoOscillation {
                lowest_frequency_t: lowest,
                highest_frequency_t: highest,
                best_ratio,
                required_ratio: settings.min_peak_ratio,
            })
        }
    };
    if peaks.len() < settings.frequencies {
        warnings.push(format!(
            "{} frequencies were asked for but only {} line(s) stand out of the noise; the others are not reported",
            settings.frequencies,
            peaks.len()
        ));
    }
    Ok(LineSearch {
        peaks,
        highest_t: highest,
    })
}

/// Dense sweeps are condensed for the fits (the spectra used every point); each keeps its
/// resampled values.
fn condense_dense_sweeps(
    sweeps: &[OscillationSweep],
    prepared: &mut [Prepared],
    window: (f64, f64),
    context: &PassContext,
    fft_frequencies: &[f64],
    warnings: &mut Vec<String>,
) -> Result<(), OscillationError> {
    let highest_line = fft_frequencies.iter().copied().fold(0.0f64, f64::max) + 2.0 / context.inverse.span;
    for (index, sweep) in sweeps.iter().enumerate() {
        if let Some(condensed) = condense_sweep(sweep, window, highest_line) {
            let grid_values = std::mem::take(&mut prepared[index].grid_values);
            let merged = sweep.field_t.len() / condensed.field_t.len().max(1);
            prepared[index] = prepare_sweep(index, &condensed, window, &context.settings.background)?;
            prepared[index].grid_values = grid_values;
            prepared[index].merged_points = merged;
            warnings.push(format!(
                "the sweep at {} K samples each period densely: about {merged} consecutive points were averaged into one for the fits (each group spans at most 1/32 of the shortest period), which keeps the result and takes a fraction of the time",
                sweep.temperature_k
            ));
        }
    }
    Ok(())
}

/// The damped-cosine refinement of the lines on the reference sweep (with backfitting of a
/// smoothing background), or the FFT lines with their in-phase phases when it fails; and
/// the name of the source.
fn refine_reference(
    prepared: &mut [Prepared],
    context: &PassContext,
    peaks: &[Peak],
    fft_frequencies: &[f64],
    warnings: &mut Vec<String>,
) -> Result<(Vec<RefinedComponent>, &'static str), OscillationError> {
    let reference = context.reference;
    let InverseWindow { range, span, centre } = context.inverse;
    let mut refined: Option<Vec<RefinedComponent>> = None;
    let mut source = "refinement";
    for _ in 0..context.rounds {
        let sweep = &prepared[reference];
        let fit_sweep = FitSweep {
            x: &sweep.inverse_field,
            target: sweep.fit_target(),
            temperature_k: sweep.temperature_k,
            projection: sweep.projection(),
        };
        match refine_components(&fit_sweep, fft_frequencies, centre, span) {
            Ok(refinement) => {
                prepared[reference].update_background(&refinement.model)?;
                refined = Some(refinement.components);
            }
            Err(error) => {
                if refined.is_none() {
                    warnings.push(format!(
                        "the damped-cosine refinement of the frequencies failed ({error}); the FFT frequencies are reported without uncertainties"
                    ));
                }
                break;
            }
        }
    }
    let reference_sweep = &prepared[reference];
    if refined.is_none() {
        source = "fft";
    }
    let refined: Vec<RefinedComponent> = refined.unwrap_or_else(|| {
        peaks
            .iter()
            .map(|peak| {
                let whole = in_phase_amplitude(
                    &reference_sweep.inverse_field,
                    &reference_sweep.oscillation,
                    range,
                    peak.frequency_t,
                    0.0,
                    None,
                    None,
                );
                RefinedComponent {
                    frequency_t: peak.frequency_t,
                    frequency_unc_t: None,
                    amplitude_ohm_sq: peak.amplitude,
                    decay_t: 0.0,
                    phase_rad: whole.map_or(0.0, |w| waveform::wrap_phase(-w.phase_correction())),
                    phase_unc_rad: None,
                }
            })
            .collect()
    });
    Ok((refined, source))
}

/// The reported lines, strongest first, each with its density and the stronger line it is
/// a harmonic of, if any.
fn frequency_lines(
    peaks: &[Peak],
    refined: &[RefinedComponent],
    source: &'static str,
    settings: &OscillationSettings,
    span: f64,
) -> Vec<FrequencyLine> {
    let mut lines: Vec<FrequencyLine> = Vec::with_capacity(peaks.len());
    for (peak, component) in peaks.iter().zip(refined) {
        let density = sheet_density_from_frequency_m2(component.frequency_t, settings.spin_degeneracy);
        let harmonic_of = lines.iter().enumerate().find_map(|(index, stronger)| {
            let order = (component.frequency_t / stronger.frequency_t).round();
            (order >= 2.0 && (component.frequency_t - order * stronger.frequency_t).abs() <= 1.5 / span)
                .then_some((index, order as u32))
        });
        lines.push(FrequencyLine {
            frequency_t: component.frequency_t,
            frequency_unc_t: component.frequency_unc_t,
            fft_frequency_t: peak.frequency_t,
            fft_amplitude_ohm_sq: peak.amplitude,
            amplitude_ohm_sq: component.amplitude_ohm_sq,
            phase_rad: component.phase_rad,
            phase_unc_rad: component.phase_unc_rad,
            sheet_density_m2: density,
            sheet_density_unc_m2: component
                .frequency_unc_t
                .map(|unc| density * unc / component.frequency_t),
            periods_in_window: component.frequency_t * span,
            harmonic_of,
            source,
        });
    }
    lines
}

/// Warnings about the sampling of the strongest line and a second line that beats with it.
fn sampling_warnings(reference_sweep: &Prepared, lines: &[FrequencyLine], warnings: &mut Vec<String>) {
    let dominant_frequency = lines[0].frequency_t;
    let widest_step = reference_sweep
        .inverse_field
        .windows(2)
        .map(|pair| pair[1] - pair[0])
        .fold(0.0f64, f64::max);
    let samples_per_period = 1.0 / (dominant_frequency * widest_step);
    if samples_per_period < 4.0 {
        warnings.push(format!(
            "the field step samples the {dominant_frequency:.3} T oscillation with only {samples_per_period:.1} points per period near B_min; raise field_min_T or measure more densely there"
        ));
    }
    if lines.len() > 1 && lines[1].amplitude_ohm_sq > 0.2 * lines[0].amplitude_ohm_sq {
        warnings.push(
            "a second line above 20 % of the strongest beats with it in the narrow-window amplitudes, the Dingle plot and the fan, which use the strongest line only".to_string(),
        );
    }
}

/// Mass: whether one is fitted (two or more temperatures, unless known or skipped), and if
/// so the fit.
fn mass_phase(
    context: &PassContext,
    prepared: &mut [Prepared],
    refined: &[RefinedComponent],
    lines: &mut [FrequencyLine],
    warnings: &mut Vec<String>,
) -> Result<MassFindings, OscillationError> {
    let settings = context.settings;
    let temperatures: Vec<f64> = prepared.iter().map(|p| p.temperature_k).collect();
    let distinct = mass::distinct_temperatures(&temperatures);
    let fit_mass = match settings.mass {
        MassRequest::Fit if distinct.len() < 2 => {
            return Err(OscillationError::SingleTemperature {
                temperature_k: distinct[0],
                sweeps: prepared.len(),
            })
        }
        MassRequest::Auto if distinct.len() < 2 => {
            warnings.push(format!(
                "all sweeps are at {} K, so no effective mass is fitted (it needs two or more temperatures) and there is no Dingle plot unless a known mass is given",
                mobilis_physics::units::format_number(distinct[0])
            ));
            false
        }
        MassRequest::Fit | MassRequest::Auto => true,
        MassRequest::Known { .. } | MassRequest::Skip => false,
    };
    if fit_mass {
        return fit_mass_across_temperatures(context, prepared, refined, lines, warnings);
    }
    let mass = match settings.mass {
        MassRequest::Known { effective_mass_ratio } => Some(MassEstimate {
            effective_mass_ratio,
            effective_mass_ratio_unc: None,
            method: "known",
        }),
        _ => None,
    };
    Ok(MassFindings {
        mass,
        ..MassFindings::default()
    })
}

/// The mass from the sweeps' temperatures: a first narrow-window pass for a starting mass,
/// the waveform fit across temperatures (with the thermometer's effect on it), the second
/// narrow-window pass, and the choice of the reported mass.
fn fit_mass_across_temperatures(
    context: &PassContext,
    prepared: &mut [Prepared],
    refined: &[RefinedComponent],
    lines: &mut [FrequencyLine],
    warnings: &mut Vec<String>,
) -> Result<MassFindings, OscillationError> {
    let settings = context.settings;
    let reference = context.reference;
    let InverseWindow { range, span, centre } = context.inverse;
    let periods = lines[0].frequency_t * span;
    // With the damping across each window taken into account, a single window is
    // unbiased too; more windows show whether the mass depends on the field.
    let count = settings
        .mass_windows
        .unwrap_or(((periods / settings.mass_window_periods).floor() as usize).clamp(1, 12));
    // First pass: a starting mass for the waveform fit, with the Dingle temperature the
    // refinement's decay implies for a typical mass.
    let reference_temperature = prepared[reference].temperature_k;
    let dingle_from_decay = |mass: f64, decay: f64| {
        let x_centre = LK_FIELD_PER_KELVIN * mass * reference_temperature * centre;
        (decay / (LK_FIELD_PER_KELVIN * mass) + reference_temperature * thermal_damping_log_derivative(x_centre))
            .clamp(0.0, 100.0)
    };
    let mut scratch = Vec::new();
    let (_, first) = mass::narrow_window_mass(
        prepared,
        reference,
        lines[0].frequency_t,
        range,
        count,
        dingle_from_decay(0.1, refined[0].decay_t),
        &mut scratch,
    );
    let mass_start = first.map_or(0.1, |(m, _, _)| m.clamp(0.005, 5.0));
    let included: Vec<usize> = (0..lines.len()).filter(|&i| lines[i].harmonic_of.is_none()).collect();
    let mut starts: Vec<WaveformStart> = included
        .iter()
        .map(|&i| {
            let component = &refined[i];
            let x_centre = LK_FIELD_PER_KELVIN * mass_start * reference_temperature * centre;
            WaveformStart {
                amplitude: component.amplitude_ohm_sq / thermal_damping(x_centre).max(1e-12),
                mass: mass_start,
                dingle_k: dingle_from_decay(mass_start, component.decay_t).max(0.05),
                frequency: component.frequency_t,
                phase: waveform::wrap_phase(component.phase_rad + 2.0 * PI * component.frequency_t * centre),
            }
        })
        .collect();
    let waveform_fit = waveform_rounds(context, prepared, &mut starts, &included, warnings)?;
    let mut findings = MassFindings::default();
    if let Some(fit) = &waveform_fit {
        (findings.temperature_sensitivity, findings.temperature_stability_effect) =
            thermometer_effects(context, prepared, &starts, fit);
        adopt_waveform_lines(lines, fit, settings, span);
    }
    // Second pass, on the backgrounds the waveform fit re-estimated and with its Dingle
    // temperature for the damping across each window.
    let dingle_hint = waveform_fit.as_ref().map_or_else(
        || dingle_from_decay(mass_start, refined[0].decay_t),
        |w| w.components[0].dingle_temperature_k,
    );
    // A variant reads only the reported mass: with the waveform fit's mass reported and
    // present, the narrow windows (its fallback and cross-check) would not be read.
    let narrow_unread =
        context.pass == Pass::Variant && settings.mass_method == MassMethod::WaveformFit && waveform_fit.is_some();
    if !narrow_unread {
        let (windows, combined) = mass::narrow_window_mass(
            prepared,
            reference,
            lines[0].frequency_t,
            range,
            count,
            dingle_hint,
            warnings,
        );
        match combined {
            Some((mass, unc, birge)) => {
                findings.narrow = Some(NarrowWindowMass {
                    windows,
                    effective_mass_ratio: mass,
                    effective_mass_ratio_unc: unc,
                    birge_ratio: birge,
                })
            }
            None => warnings.push("no narrow window gave a mass".to_string()),
        }
    }
    findings.mass = choose_mass(settings, waveform_fit.as_ref(), findings.narrow.as_ref(), warnings)?;
    findings.waveform = waveform_fit;
    Ok(findings)
}

/// The waveform fit across temperatures, repeated for backfitting: each round re-estimates
/// the backgrounds and starts where the last ended (`starts` is left there).
fn waveform_rounds(
    context: &PassContext,
    prepared: &mut [Prepared],
    starts: &mut [WaveformStart],
    included: &[usize],
    warnings: &mut Vec<String>,
) -> Result<Option<WaveformFit>, OscillationError> {
    let InverseWindow { span, centre, .. } = context.inverse;
    let mut waveform_fit = None;
    for round in 0..context.rounds {
        let fit_sweeps: Vec<FitSweep> = prepared
            .iter()
            .map(|sweep| FitSweep {
                x: &sweep.inverse_field,
                target: sweep.fit_target(),
                temperature_k: sweep.temperature_k,
                projection: sweep.projection(),
            })
            .collect();
        match fit_waveform(&fit_sweeps, starts, centre, span, &WAVEFORM_MASS_FACTORS) {
            Ok(outcome) => {
                for (sweep, model) in prepared.iter_mut().zip(&outcome.models) {
                    sweep.update_background(model)?;
                }
                // The next round starts where this one ended.
                for (start, component) in starts.iter_mut().zip(&outcome.components) {
                    start.mass = component.effective_mass_ratio;
                    start.dingle_k = component.dingle_temperature_k;
                    start.frequency = component.frequency_t;
                    start.amplitude = component.amplitude_ohm_sq;
                    start.phase = waveform::wrap_phase(component.phase_rad + 2.0 * PI * component.frequency_t * centre);
                }
                waveform_fit = Some(WaveformFit {
                    components: outcome
                        .components
                        .iter()
                        .zip(included)
                        .map(|(c, &line)| WaveformComponent {
                            line,
                            frequency_t: c.frequency_t,
                            frequency_unc_t: c.frequency_unc_t,
                            effective_mass_ratio: c.effective_mass_ratio,
                            effective_mass_ratio_unc: c.effective_mass_ratio_unc,
                            dingle_temperature_k: c.dingle_temperature_k,
                            dingle_temperature_unc_k: c.dingle_temperature_unc_k,
                            amplitude_ohm_sq: c.amplitude_ohm_sq,
                            phase_rad: c.phase_rad,
                        })
                        .collect(),
                    reduced_chi_square: outcome.reduced_chi_square,
                    points: outcome.points,
                    starts_at_best: outcome.starts_at_best,
                    starts: outcome.starts,
                });
            }
            Err(error) => {
                if round == 0 {
                    warnings.push(format!("the waveform fit across temperatures failed: {error}"));
                }
                break;
            }
        }
    }
    Ok(waveform_fit)
}

/// A pair of effects on the effective mass ratio and the Dingle temperature (K).
type MassAndDingle = (f64, f64);

/// The thermometer: the waveform refitted, from where the fit ended, with every
/// temperature raised by the stated accuracy (an error common to the series), and with
/// each sweep's alone raised by the stated stability (errors independent from sweep to
/// sweep, added in quadrature): numerical sensitivity coefficients, JCGM 100:2008 5.1.3.
/// Returns the sensitivity (per K) and the stability's effect, on m* and T_D.
fn thermometer_effects(
    context: &PassContext,
    prepared: &[Prepared],
    starts: &[WaveformStart],
    fit: &WaveformFit,
) -> (Option<MassAndDingle>, Option<MassAndDingle>) {
    let settings = context.settings;
    let InverseWindow { span, centre, .. } = context.inverse;
    let base = &fit.components[0];
    let refit = |raise: &dyn Fn(usize) -> f64| -> Option<(f64, f64)> {
        let shifted: Vec<FitSweep> = prepared
            .iter()
            .enumerate()
            .map(|(index, sweep)| FitSweep {
                x: &sweep.inverse_field,
                target: sweep.fit_target(),
                temperature_k: sweep.temperature_k + raise(index),
                projection: sweep.projection(),
            })
            .collect();
        let outcome = fit_waveform(&shifted, starts, centre, span, &[1.0]).ok()?;
        let moved = &outcome.components[0];
        Some((
            moved.effective_mass_ratio - base.effective_mass_ratio,
            moved.dingle_temperature_k - base.dingle_temperature_k,
        ))
    };
    let mut temperature_sensitivity = None;
    let mut temperature_stability_effect = None;
    if let Some(accuracy) = settings.temperature_accuracy_k.filter(|a| *a > 0.0) {
        temperature_sensitivity = refit(&|_| accuracy).map(|(m, t)| (m / accuracy, t / accuracy));
    }
    if let Some(stability) = settings.temperature_stability_k.filter(|s| *s > 0.0) {
        let mut squares = (0.0, 0.0);
        for index in 0..prepared.len() {
            if let Some((m, t)) = refit(&|i| if i == index { stability } else { 0.0 }) {
                squares.0 += m * m;
                squares.1 += t * t;
            }
        }
        temperature_stability_effect = Some((squares.0.sqrt(), squares.1.sqrt()));
    }
    (temperature_sensitivity, temperature_stability_effect)
}

/// The waveform fit's frequencies and phases use every sweep and the exact damping, so
/// they replace the refinement's in the lines it fitted.
fn adopt_waveform_lines(lines: &mut [FrequencyLine], fit: &WaveformFit, settings: &OscillationSettings, span: f64) {
    for component in &fit.components {
        let line = &mut lines[component.line];
        line.frequency_t = component.frequency_t;
        line.frequency_unc_t = component.frequency_unc_t;
        line.phase_rad = component.phase_rad;
        line.phase_unc_rad = None;
        line.sheet_density_m2 = sheet_density_from_frequency_m2(component.frequency_t, settings.spin_degeneracy);
        line.sheet_density_unc_m2 = component
            .frequency_unc_t
            .map(|unc| line.sheet_density_m2 * unc / component.frequency_t);
        line.periods_in_window = component.frequency_t * span;
        line.source = "waveform_fit";
    }
}

/// The reported mass: the one `mass_method` asks for, else the other with a warning; a
/// warning when the two disagree; an error when a mass was required and neither exists.
fn choose_mass(
    settings: &OscillationSettings,
    waveform_fit: Option<&WaveformFit>,
    narrow: Option<&NarrowWindowMass>,
    warnings: &mut Vec<String>,
) -> Result<Option<MassEstimate>, OscillationError> {
    let from_waveform = waveform_fit.map(|w| MassEstimate {
        effective_mass_ratio: w.components[0].effective_mass_ratio,
        effective_mass_ratio_unc: w.components[0].effective_mass_ratio_unc,
        method: MassMethod::WaveformFit.name(),
    });
    let from_windows = narrow.map(|n| MassEstimate {
        effective_mass_ratio: n.effective_mass_ratio,
        effective_mass_ratio_unc: n.effective_mass_ratio_unc,
        method: MassMethod::NarrowWindows.name(),
    });
    if let (Some(a), Some(b)) = (&from_waveform, &from_windows) {
        if let (Some(ua), Some(ub)) = (a.effective_mass_ratio_unc, b.effective_mass_ratio_unc) {
            let difference = (a.effective_mass_ratio - b.effective_mass_ratio).abs();
            if difference > 3.0 * ua.hypot(ub) {
                warnings.push(format!(
                    "the waveform-fit mass {:.4} and the narrow-window mass {:.4} differ by more than three combined standard errors: a temperature or field dependence other than Lifshitz-Kosevich's (a mass that changes with field, a drifting temperature, a second line) affects the two differently; compare the masses of the narrow windows",
                    a.effective_mass_ratio, b.effective_mass_ratio
                ));
            }
        }
    }
    let (primary, secondary) = match settings.mass_method {
        MassMethod::WaveformFit => (from_waveform, from_windows),
        MassMethod::NarrowWindows => (from_windows, from_waveform),
    };
    Ok(match (primary, secondary) {
        (Some(primary), _) => Some(primary),
        (None, Some(secondary)) => {
            warnings.push(format!(
                "the {} mass is not available; the {} mass is reported instead",
                settings.mass_method.name(),
                secondary.method
            ));
            Some(secondary)
        }
        (None, None) => {
            if settings.mass == MassRequest::Fit {
                return Err(OscillationError::MassNotDetermined {
                    reasons: std::mem::take(warnings),
                });
            }
            None
        }
    })
}

/// Dingle plot: of the strongest line on the reference sweep, with the reported mass.
fn dingle_phase(
    context: &PassContext,
    reference_sweep: &Prepared,
    lines: &[FrequencyLine],
    masses: &MassFindings,
    warnings: &mut Vec<String>,
) -> Option<DinglePlot> {
    let settings = context.settings;
    if !settings.dingle {
        return None;
    }
    let estimate = masses.mass.as_ref()?;
    let dominant_frequency = lines[0].frequency_t;
    match mass::dingle_plot(
        reference_sweep,
        dominant_frequency,
        lines[0].phase_rad,
        context.inverse.range,
        settings
            .dingle_window_periods
            .unwrap_or((dominant_frequency * context.inverse.span / 5.0).clamp(1.0, 2.0)),
        estimate.effective_mass_ratio,
        estimate.effective_mass_ratio_unc,
        masses
            .waveform
            .as_ref()
            .map_or(0.0, |w| w.components[0].dingle_temperature_k),
    ) {
        Ok(plot) => {
            if plot.dingle_temperature_k < 0.0 {
                warnings.push(format!(
                    "the Dingle plot rises with 1/B (T_D = {:.3} K < 0): the amplitude grows toward low field, which the Lifshitz-Kosevich form does not allow; check the background removal and the window",
                    plot.dingle_temperature_k
                ));
            }
            Some(plot)
        }
        Err(message) => {
            warnings.push(message);
            None
        }
    }
}

/// The spectra computed, each up to the highest frequency searched.
fn sweep_spectra(prepared: &[Prepared], spectra: &[Option<AmplitudeSpectrum>], highest: f64) -> Vec<SweepSpectrum> {
    prepared
        .iter()
        .zip(spectra)
        .filter_map(|(sweep, spectrum)| spectrum.as_ref().map(|spectrum| (sweep, spectrum)))
        .map(|(sweep, spectrum)| {
            let keep = spectrum.frequencies.iter().take_while(|f| **f <= highest).count();
            SweepSpectrum {
                temperature_k: sweep.temperature_k,
                frequencies_t: spectrum.frequencies[..keep].to_vec(),
                amplitudes_ohm_sq: spectrum.amplitudes[..keep].to_vec(),
            }
        })
        .collect()
}

/// The prepared sweeps as reported curves.
fn sweep_curves(prepared: Vec<Prepared>) -> Vec<SweepCurve> {
    prepared
        .into_iter()
        .map(|sweep| SweepCurve {
            temperature_k: sweep.temperature_k,
            field_t: sweep.field_t,
            inverse_field_per_t: sweep.inverse_field,
            rho_xx_ohm_sq: sweep.rho_xx,
            background_ohm_sq: sweep.background,
            oscillation_ohm_sq: sweep.oscillation,
            resampled_ohm_sq: sweep.grid_values,
        })
        .collect()
}
