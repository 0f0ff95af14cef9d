//! `spectrum.multi_carrier_fit`: the sheet density and mobility of each of several
//! carriers from the field dependence of the conductivity tensor.
//!
//! Pure computation: no DataFrames, no I/O. The plugin's table glue turns a `sweep` table
//! into [`SweepPoint`]s (or conductivity [`TensorPoint`]s) and the [`MultiCarrierFit`] back
//! into a summary and a table.
//!
//! # Why a field sweep
//!
//! When more than one kind of carrier conducts (a 2D channel over a parallel layer, surface
//! electrons over bulk holes, light and heavy holes), a Hall measurement at one field gives a
//! conductance-weighted average density and mobility that belong to no carrier. Each carrier
//! adds to the conductivity tensor a Lorentzian of its own width 1/mu
//! (`mobilis_physics::forward::tensor`, after Beck and Anderson, J. Appl. Phys. 62, 541, 1987):
//!
//! sigma_xx(B) = sum e n_i mu_i / (1 + mu_i^2 B^2), sigma_xy(B) = sum s_i e n_i mu_i^2 B /
//! (1 + mu_i^2 B^2),
//!
//! s = +1 for holes and -1 for electrons, so a sweep that reaches B ~ 1/mu_i separates
//! them. The fit works on the conductivity tensor because there the carriers add.
//!
//! # Steps and the choices made
//!
//! 1. **Data.** [`fit_sweep`] symmetrizes the sweep (`mobilis_physics::sweep::symmetrize`: even
//!    rho_xx, odd rho_xy, branches interpolated onto a common |B| grid) and converts it to
//!    sigma_xx and sigma_xy with their propagated uncertainties and correlation;
//!    [`fit_carriers`] takes the conductivity points directly. Every value must be finite,
//!    sigma_xx > 0, uncertainties on all points or none, and some point must be in field.
//!    After a first fit, [`fit_sweep`] removes from the symmetrized data the error of the
//!    linear interpolation between field points, computed on the fitted model (the
//!    `interpolation` submodule), and fits again from the first fit's carriers.
//! 2. **Residuals.** Two per field, (model - data) of sigma_xx and sigma_xy jointly, whitened
//!    by the point's 2 x 2 covariance (uncertainties and correlation), so that the sum of
//!    squares is the generalized chi-square. At B = 0 only sigma_xx enters: sigma_xy vanishes
//!    there by symmetry and carries no information. Without uncertainties each component at
//!    field B gets an uncertainty proportional to |sigma(B)| = sqrt(sigma_xx^2 +
//!    sigma_xy^2) of the data, the scale estimated from the residual scatter (the covariance
//!    is multiplied by chi^2 / nu). This is the noise of a resistivity measurement with a
//!    fixed relative resolution: the tensor inversion is the complex map z -> 1/z, which
//!    turns an isotropic scatter of size eps |rho| into one of size eps |sigma|.
//! 3. **Parameters.** ln n_i and ln mu_i per carrier, the kind (sign) fixed per carrier.
//!    Logarithms keep densities and mobilities positive, make the steps scale-free across
//!    the decades they span, and make the Gaussian uncertainty a relative one. Bounds (box
//!    constraints of the solver) keep them within [`MultiCarrierSettings::sheet_density_bounds_m2`]
//!    and [`MultiCarrierSettings::mobility_bounds_m2_per_vs`]. The Jacobian is analytic. The
//!    model, its Jacobian and the solver run are the engine of `mobilis_physics::carrier_fit`,
//!    which `mr.two_band_fit` shares.
//! 4. **Starts.** Several starts per carrier list, seeded from the data (the `seeds` submodule):
//!    mobilities spread over 0.03 / B_max .. 10 / B_min and around the low-field Hall
//!    mobility, densities from the linear least squares that fixed mobilities allow. The
//!    bounded Levenberg-Marquardt solver of `mobilis_numerics::fit` runs from each and keeps the
//!    converged run of lowest chi-square.
//! 5. **How many carriers.** Given ([`CarrierSelection::Kinds`], [`CarrierSelection::Guess`]),
//!    or chosen ([`CarrierSelection::Automatic`]): for N = 1, 2, ... every split into
//!    electrons and holes is fitted, the best of them scored by an information criterion,
//!    and N grows while the score improves by more than
//!    [`MultiCarrierSettings::min_criterion_improvement`]. The criterion is BIC by default
//!    (Schwarz, Ann. Stat. 6, 461, 1978): chi^2 + k ln m with uncertainties,
//!    m ln(chi^2 / m) + k ln m without, for k parameters (2N, plus the noise scale when it is
//!    estimated) and m residuals. BIC is consistent (it finds the true N as the data grow) and penalizes an
//!    extra carrier more than AIC does for m >= 8; spurious carriers that fit the noise are
//!    the common failure of multi-carrier fits, so the stricter criterion is the default.
//!    AICc (Hurvich and Tsai, Biometrika 76, 297, 1989), AIC + 2k(k + 1) / (m - k - 1), is the
//!    alternative. A chi-square below rounding (noise-free data) is floored at m eps^2 so
//!    that the logarithm stays finite.
//! 6. **Uncertainties** (the budget of JCGM 100:2008, the GUM; see the `budget` submodule).
//!    Statistical part: from the covariance of the best run, (J^T J)^-1 at the minimum
//!    (times chi^2 / nu without uncertainties), in ln n and ln mu; the standard uncertainty
//!    reported for n is n times that of ln n (first order), likewise for mu. With stated
//!    uncertainties, a chi^2 / nu above 1 widens it by the Birge ratio sqrt(chi^2 / nu)
//!    (R. T. Birge, Phys. Rev. 40, 207, 1932; the Particle Data Group's practice), never
//!    narrows it; a symmetrized grid that holds each reading more than once widens it by the
//!    square root of the reading reuse factor. A point merged from repeated readings already
//!    carries their scatter when it exceeds their stated uncertainties (`mobilis_physics::sweep`,
//!    "Repeated readings"), and the warning of repeats that disagree far beyond them is passed
//!    on: the fit takes its points as independent, so a disagreement common to every field
//!    (two copies of a sweep that differ by one factor) widens the result less than the
//!    copies differ, and that warning is what tells the user. Calibration part: the stated field and
//!    resistivity scale uncertainties ([`Calibration`]), applied once after the fit as the
//!    relative uncertainties they give n and mu. The total is their quadrature sum. Before
//!    the fit, a stated uncertainty below `relative_uncertainty_floor` |sigma(B)| is raised
//!    to it, so that no point pins the fit. A parameter that
//!    ends on its bound has no uncertainty (the curvature says nothing about a one-sided
//!    minimum) and raises a warning. A best minimum whose parameters the data do not
//!    determine (singular Jacobian) is refused with [`MultiCarrierError::Indistinguishable`].
//! 7. **Warnings.** A carrier's magnetoresistance appears around B = 1/mu: a carrier with
//!    mu B_max < 1 contributes to the sweep only a constant sigma_xx and a sigma_xy linear in
//!    B, and two such carriers add up to what one carrier gives, so the field range does not
//!    distinguish them. Warned: every such pair; each such carrier of a multi-carrier fit
//!    whose density or mobility is uncertain by more than 10 %; parameters on their bounds;
//!    a chi-square p-value below 1e-3 when the uncertainties are given (more than the noise
//!    explains: a missing carrier, a field-dependent mobility, or underestimated
//!    uncertainties), naming the worst points by component and field and the parameters
//!    that set the weights; points raised to the floor; an automatic selection still improving at the largest N
//!    allowed; and a best minimum that only one of several converged starts reached
//!    (carriers of one kind compared in mobility order, since their labels are arbitrary).
//!
//! The output lists the carriers electrons first, then holes, each kind by increasing
//! mobility, and gives the data and the fitted tensor at every field
//! ([`MultiCarrierFit::curve`]) and the model on any field grid
//! ([`MultiCarrierFit::model_curve`]), ready to plot.

pub mod budget;
mod error;
mod interpolation;
mod seeds;
pub mod summary;
#[cfg(test)]
mod tests;

pub use budget::{Budget, Calibration, SWEEP_RELATIVE_UNCERTAINTY_FLOOR};
pub use error::MultiCarrierError;
pub use mobilis_physics::forward::tensor::{Carrier, CarrierKind};
pub use mobilis_physics::sweep::{SweepPoint, SymmetrizeSettings, Symmetrized, TensorPoint, TensorUncertainty};

use mobilis_numerics::fit::{FitQuality, MultiStartFit};
use mobilis_numerics::linalg::Matrix;
use mobilis_numerics::noise::Rng;
use mobilis_physics::carrier_fit::{
    output_order, starts_at_best_minimum, CarrierModel, InvalidRange, LogBounds, TensorSpace,
};
use mobilis_physics::forward::tensor::sum_conductivity;
use mobilis_physics::forward::ForwardError;
use mobilis_physics::sweep::{conductivity_points, symmetrize};
use mobilis_physics::tensor_data::TensorData as Data;
use rayon::prelude::*;

use crate::monitor::{Monitor, Unmonitored};

/// Which carriers are fitted.
#[derive(Debug, Clone, PartialEq)]
pub enum CarrierSelection {
    /// Exactly these kinds, starts seeded from the data.
    Kinds(Vec<CarrierKind>),
    /// These carriers' kinds; their densities and mobilities are one more start.
    Guess(Vec<Carrier>),
    /// N = 1 up to `max_carriers` with every electron/hole split, chosen by the criterion.
    Automatic { max_carriers: usize },
}

impl Default for CarrierSelection {
    /// Automatic, up to three carriers (a channel, a parallel layer and a carrier of the
    /// other sign cover the usual structures).
    fn default() -> Self {
        CarrierSelection::Automatic { max_carriers: 3 }
    }
}

/// The information criterion of the automatic selection.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Deserialize, serde::Serialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
pub enum InformationCriterion {
    /// Bayesian (Schwarz 1978). Default.
    #[default]
    Bic,
    /// Akaike with the small-sample correction (Hurvich and Tsai 1989).
    Aicc,
}

impl InformationCriterion {
    pub fn name(self) -> &'static str {
        match self {
            InformationCriterion::Bic => "BIC",
            InformationCriterion::Aicc => "AICc",
        }
    }

    /// The score of a fit with `chi_square` over `residuals` residuals and `carriers`
    /// carriers (lower is better; infinite when AICc is undefined, m <= k + 1).
    pub fn score(self, chi_square: f64, residuals: usize, carriers: usize, weighted: bool) -> f64 {
        let m = residuals as f64;
        let k = (2 * carriers + usize::from(!weighted)) as f64;
        let misfit = if weighted {
            chi_square
        } else {
            m * (chi_square.max(m * f64::EPSILON * f64::EPSILON) / m).ln()
        };
        match self {
            InformationCriterion::Bic => misfit + k * m.ln(),
            InformationCriterion::Aicc => {
                if m - k - 1.0 <= 0.0 {
                    f64::INFINITY
                } else {
                    misfit + 2.0 * k + 2.0 * k * (k + 1.0) / (m - k - 1.0)
                }
            }
        }
    }
}

/// Settings of the fit; [`MultiCarrierSettings::default`] documents the defaults.
#[derive(Debug, Clone, PartialEq)]
pub struct MultiCarrierSettings {
    /// Default: automatic, up to 3 carriers.
    pub selection: CarrierSelection,
    /// Default BIC.
    pub criterion: InformationCriterion,
    /// How much the criterion must fall for one more carrier to be kept. Default 0: any
    /// improvement (the penalty k ln m already charges for the extra parameters).
    pub min_criterion_improvement: f64,
    /// Random starts per carrier list, besides the 2 to 4 deterministic ones. Default 12.
    pub random_starts: usize,
    /// Seed of the random starts. Default 1.
    pub seed: u64,
    /// Allowed mobilities, m^2/(V s). Default (1e-5, 1e4): 0.1 cm^2/(V s), below any
    /// carrier that still conducts measurably, to 1e8 cm^2/(V s), beyond the best 2D
    /// electron gases.
    pub mobility_bounds_m2_per_vs: (f64, f64),
    /// Allowed sheet densities, m^-2. Default (1e6, 1e26): 1e2 to 1e22 cm^-2, beyond a
    /// millimetre of a metal-like 1e23 cm^-3 on the high side.
    pub sheet_density_bounds_m2: (f64, f64),
    /// Iterations per start. Default 300.
    pub max_iterations: usize,
    /// A stated component uncertainty below this fraction of |sigma(B)| is raised to it, so
    /// that no point pins the fit. Default [`SWEEP_RELATIVE_UNCERTAINTY_FLOOR`] (1e-5; the
    /// `budget` submodule says why it is below the temperature series' 1e-3).
    pub relative_uncertainty_floor: f64,
    /// Stated scale calibrations of the sweep, applied once after the fit. Default: none
    /// stated, the defaults of the `budget` submodule assumed.
    pub calibration: Calibration,
}

impl Default for MultiCarrierSettings {
    fn default() -> Self {
        MultiCarrierSettings {
            selection: CarrierSelection::default(),
            criterion: InformationCriterion::Bic,
            min_criterion_improvement: 0.0,
            random_starts: 12,
            seed: 1,
            mobility_bounds_m2_per_vs: (1e-5, 1e4),
            sheet_density_bounds_m2: (1e6, 1e26),
            max_iterations: 300,
            relative_uncertainty_floor: SWEEP_RELATIVE_UNCERTAINTY_FLOOR,
            calibration: Calibration::default(),
        }
    }
}

/// One fitted carrier.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedCarrier {
    pub kind: CarrierKind,
    pub sheet_density_m2: f64,
    /// Total standard uncertainty (statistical and calibration in quadrature); `None` when
    /// the density ended on its bound.
    pub sheet_density_unc_m2: Option<f64>,
    /// Its statistical and calibration parts.
    pub sheet_density_budget: Budget,
    pub mobility_m2_per_vs: f64,
    /// Total standard uncertainty; `None` when the mobility ended on its bound.
    pub mobility_unc_m2_per_vs: Option<f64>,
    pub mobility_budget: Budget,
    /// Zero-field sheet conductance e n mu, S.
    pub sheet_conductance_s: f64,
    /// mu B_max: below 1 the sweep does not reach this carrier's magnetoresistance.
    pub mobility_field_product: f64,
    /// A parameter ended on its bound.
    pub at_bound: bool,
}

impl FittedCarrier {
    /// As a forward-model carrier.
    pub fn carrier(&self) -> Carrier {
        Carrier {
            kind: self.kind,
            sheet_density_m2: self.sheet_density_m2,
            mobility_m2_per_vs: self.mobility_m2_per_vs,
        }
    }
}

/// One carrier list tried by the fit.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    pub kinds: Vec<CarrierKind>,
    /// chi-square of the best run; `None` when the fit failed.
    pub chi_square: Option<f64>,
    /// The criterion's score; `None` when the fit failed.
    pub score: Option<f64>,
    /// Why the fit failed.
    pub failure: Option<String>,
}

/// Data and fit at one measured field.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CurvePoint {
    pub field_t: f64,
    pub sigma_xx_s: f64,
    pub sigma_xy_s: f64,
    pub sigma_xx_fit_s: f64,
    pub sigma_xy_fit_s: f64,
    /// The data's resistivity tensor (the inverse of the data's conductivity).
    pub rho_xx_ohm_sq: f64,
    pub rho_xy_ohm: f64,
    pub rho_xx_fit_ohm_sq: f64,
    pub rho_xy_fit_ohm: f64,
    /// Whitened residuals (model - data) of the point: the first is sigma_xx's; the second
    /// is sigma_xy's after its correlation with sigma_xx is removed (`None` at zero field).
    pub residual_xx: f64,
    pub residual_xy: Option<f64>,
}

/// The fitted model at one field.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ModelPoint {
    pub field_t: f64,
    pub sigma_xx_s: f64,
    pub sigma_xy_s: f64,
    pub rho_xx_ohm_sq: f64,
    pub rho_xy_ohm: f64,
}

/// The result of a multi-carrier fit.
#[derive(Debug, Clone, PartialEq)]
pub struct MultiCarrierFit {
    /// Electrons first, then holes, each by increasing mobility.
    pub carriers: Vec<FittedCarrier>,
    /// Correlation matrix of (ln n, ln mu) of each carrier in the order of `carriers`
    /// (2N x 2N; rows of parameters on a bound are zero).
    pub correlation: Matrix,
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    /// chi^2 / nu; without uncertainties, the square of the relative scatter of the data
    /// about the fit.
    pub reduced_chi_square: f64,
    /// P(chi^2_nu >= chi^2): `None` without uncertainties, where the noise scale is
    /// estimated from the same residuals and chi-square tests nothing.
    pub chi_square_p_value: Option<f64>,
    /// The factor the statistical uncertainties were multiplied by: sqrt(chi^2 / nu) when
    /// the weighted fit is worse than its uncertainties allow (Birge 1932), else 1.
    pub birge_ratio: f64,
    /// Points whose stated uncertainty was raised to the floor.
    pub floored_points: usize,
    /// How many times over the symmetrized grid counts the readings (1 for conductivity
    /// points given directly); the statistical variances are multiplied by it (see the
    /// `budget` submodule).
    pub reading_reuse_factor: f64,
    /// The floor applied (relative to |sigma(B)|).
    pub relative_uncertainty_floor: f64,
    /// The calibrations applied after the fit.
    pub calibration: Calibration,
    pub residual_count: usize,
    /// The data carried uncertainties.
    pub weighted: bool,
    pub criterion: InformationCriterion,
    pub score: f64,
    /// Every carrier list tried, in order.
    pub candidates: Vec<Candidate>,
    /// Starts of the chosen fit, how many converged, how many reached its minimum.
    pub starts: usize,
    pub starts_converged: usize,
    pub starts_at_minimum: usize,
    pub max_field_t: f64,
    /// Data and fit at each field of the input, in input order.
    pub curve: Vec<CurvePoint>,
    pub warnings: Vec<String>,
}

impl MultiCarrierFit {
    /// The fitted carriers as forward-model carriers.
    pub fn model_carriers(&self) -> Vec<Carrier> {
        self.carriers.iter().map(FittedCarrier::carrier).collect()
    }

    /// The fitted tensor at each of `fields_t` (for a smooth curve through the data).
    pub fn model_curve(&self, fields_t: &[f64]) -> Vec<ModelPoint> {
        let carriers = self.model_carriers();
        fields_t
            .iter()
            .map(|&field| {
                let sigma = sum_conductivity(&carriers, field);
                let rho = sigma.to_resistivity();
                ModelPoint {
                    field_t: field,
                    sigma_xx_s: sigma.sigma_xx_s,
                    sigma_xy_s: sigma.sigma_xy_s,
                    rho_xx_ohm_sq: rho.rho_xx_ohm_sq,
                    rho_xy_ohm: rho.rho_xy_ohm,
                }
            })
            .collect()
    }
}

/// A symmetrized sweep and the fit to it.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepFit {
    pub symmetrized: Symmetrized,
    pub fit: MultiCarrierFit,
    /// The largest correction of the interpolation between field points, relative to
    /// |rho(B)|, that the second pass applied (0 when the branches needed none).
    pub max_interpolation_correction: f64,
}

/// Symmetrizes a sweep, converts it to the conductivity tensor and fits it.
pub fn fit_sweep(
    points: &[SweepPoint],
    sweep_settings: &SymmetrizeSettings,
    settings: &MultiCarrierSettings,
) -> Result<SweepFit, MultiCarrierError> {
    fit_sweep_monitored(points, sweep_settings, settings, &Unmonitored)
}

/// [`fit_sweep`] with progress reports and cancellation (see [`fit_carriers_monitored`]).
pub fn fit_sweep_monitored(
    points: &[SweepPoint],
    sweep_settings: &SymmetrizeSettings,
    settings: &MultiCarrierSettings,
    monitor: &dyn Monitor,
) -> Result<SweepFit, MultiCarrierError> {
    let symmetrized = symmetrize(points, sweep_settings)?;
    let reuse = budget::reading_reuse_factor(points, sweep_settings, &symmetrized);
    let first = fit_points(&conductivity_points(&symmetrized), settings, monitor, reuse)?;
    let Some((corrected, max_interpolation_correction)) =
        interpolation::corrected(points, sweep_settings, &symmetrized, &first.model_carriers())
    else {
        return Ok(SweepFit {
            symmetrized,
            fit: first,
            max_interpolation_correction: 0.0,
        });
    };
    // The second pass starts from the first's carriers; the carrier list stays the one the
    // first pass chose, with its candidates and score.
    let refine = MultiCarrierSettings {
        selection: CarrierSelection::Guess(first.model_carriers()),
        random_starts: 0,
        ..settings.clone()
    };
    let mut fit = fit_points(&corrected, &refine, monitor, reuse)?;
    // The choice of carriers and the search for the best minimum were the first pass's:
    // its candidates, score and starts stand, and so do its warnings about them. The
    // warnings about the fit itself come from the second pass.
    fit.candidates = first.candidates;
    fit.score = first.score;
    fit.criterion = first.criterion;
    fit.starts = first.starts;
    fit.starts_converged = first.starts_converged;
    fit.starts_at_minimum = first.starts_at_minimum;
    let about_the_search =
        |w: &String| w.contains("max_carriers") || w.contains("residuals allow") || w.contains("converged starts");
    fit.warnings.retain(|w| !about_the_search(w));
    fit.warnings
        .extend(first.warnings.into_iter().filter(|w| about_the_search(w)));
    Ok(SweepFit {
        symmetrized,
        fit,
        max_interpolation_correction,
    })
}

/// One fitted carrier list.
struct CandidateFit {
    kinds: Vec<CarrierKind>,
    run: MultiStartFit,
    score: f64,
}

fn validate_settings(settings: &MultiCarrierSettings) -> Result<LogBounds, MultiCarrierError> {
    let bounds = LogBounds::new(settings.sheet_density_bounds_m2, settings.mobility_bounds_m2_per_vs).map_err(
        |InvalidRange { name, value }| MultiCarrierError::InvalidSetting {
            name,
            value,
            requirement: InvalidRange::REQUIREMENT,
        },
    )?;
    if !(settings.min_criterion_improvement.is_finite() && settings.min_criterion_improvement >= 0.0) {
        return Err(MultiCarrierError::InvalidSetting {
            name: "min_criterion_improvement",
            value: settings.min_criterion_improvement,
            requirement: "give a finite value of 0 or more",
        });
    }
    let floor = settings.relative_uncertainty_floor;
    if !(floor.is_finite() && (0.0..0.1).contains(&floor)) {
        return Err(MultiCarrierError::InvalidSetting {
            name: "relative_uncertainty_floor",
            value: floor,
            requirement: "give a relative uncertainty of 0 or more and below 0.1 (1e-5 is the default)",
        });
    }
    if let Some((name, value)) = settings.calibration.invalid() {
        return Err(MultiCarrierError::InvalidSetting {
            name,
            value,
            requirement:
                "give a relative standard uncertainty of 0 or more and below 1 (0.002 is 0.2 %), or leave it out",
        });
    }
    if settings.max_iterations == 0 {
        return Err(MultiCarrierError::InvalidSetting {
            name: "max_iterations",
            value: 0.0,
            requirement: "give at least one iteration",
        });
    }
    match &settings.selection {
        CarrierSelection::Automatic { max_carriers: 0 } => Err(MultiCarrierError::InvalidSetting {
            name: "max_carriers",
            value: 0.0,
            requirement: "give at least 1",
        }),
        CarrierSelection::Kinds(kinds) if kinds.is_empty() => Err(MultiCarrierError::NoCarriers),
        CarrierSelection::Guess(guess) if guess.is_empty() => Err(MultiCarrierError::NoCarriers),
        CarrierSelection::Guess(guess) => {
            for (index, carrier) in guess.iter().enumerate() {
                // The forward model's rule for a carrier (density and mobility finite and
                // positive), which names the offending value.
                if let Err(ForwardError::InvalidParameter { name, value, .. }) = carrier.validate() {
                    return Err(MultiCarrierError::InvalidGuess {
                        index,
                        what: name,
                        value,
                    });
                }
            }
            Ok(bounds)
        }
        _ => Ok(bounds),
    }
}

/// Fits one carrier list from all its starts.
fn fit_kinds(
    data: &Data,
    kinds: &[CarrierKind],
    guess: Option<&[Carrier]>,
    settings: &MultiCarrierSettings,
    bounds: &LogBounds,
) -> Result<CandidateFit, MultiCarrierError> {
    let n = kinds.len();
    // Each list gets its own generator, so a list's starts do not depend on which lists
    // were tried before it.
    let list_seed = kinds
        .iter()
        .fold(settings.seed, |acc, k| acc.wrapping_mul(31).wrapping_add(1 + *k as u64));
    let mut rng = Rng::seeded(list_seed);
    let starts = seeds::starts(data, kinds, guess, settings.random_starts, &mut rng, bounds);
    // The starts are independent runs: on the worker threads, with the same result as one
    // after the other. Together with the carrier lists solved at once this keeps both cores
    // busy when the lists are fewer than the cores or of unequal cost, and the second pass
    // of `fit_sweep`, one list, gets them too.
    let model = CarrierModel {
        data,
        kinds,
        space: TensorSpace::Conductivity,
    };
    let run = model
        .fit(&starts, bounds, settings.max_iterations)
        .map_err(|e| MultiCarrierError::from_fit(kinds, e))?;
    let score = settings
        .criterion
        .score(run.best.chi_square, data.residual_count, n, data.weighted);
    Ok(CandidateFit {
        kinds: kinds.to_vec(),
        run,
        score,
    })
}

fn candidate_record(kinds: &[CarrierKind], result: &Result<CandidateFit, MultiCarrierError>) -> Candidate {
    match result {
        Ok(fit) => Candidate {
            kinds: kinds.to_vec(),
            chi_square: Some(fit.run.best.chi_square),
            score: Some(fit.score),
            failure: None,
        },
        Err(error) => Candidate {
            kinds: kinds.to_vec(),
            chi_square: None,
            score: None,
            failure: Some(error.to_string()),
        },
    }
}

/// Fits the carriers of `settings.selection` to conductivity points (see the module
/// documentation).
pub fn fit_carriers(
    points: &[TensorPoint],
    settings: &MultiCarrierSettings,
) -> Result<MultiCarrierFit, MultiCarrierError> {
    fit_carriers_monitored(points, settings, &Unmonitored)
}

/// [`fit_carriers`], reporting after each candidate carrier list of an automatic selection
/// (the part that runs long: one multi-start fit per list) and stopping when cancelled.
pub fn fit_carriers_monitored(
    points: &[TensorPoint],
    settings: &MultiCarrierSettings,
    monitor: &dyn Monitor,
) -> Result<MultiCarrierFit, MultiCarrierError> {
    fit_points(points, settings, monitor, 1.0)
}

/// The fit of independent conductivity points, or of a symmetrized grid whose points count
/// the readings `reading_reuse_factor` times over (see the `budget` submodule).
fn fit_points(
    points: &[TensorPoint],
    settings: &MultiCarrierSettings,
    monitor: &dyn Monitor,
    reading_reuse_factor: f64,
) -> Result<MultiCarrierFit, MultiCarrierError> {
    let bounds = validate_settings(settings)?;
    let (floored, floored_points) = budget::floor_uncertainties(points, settings.relative_uncertainty_floor);
    let points = floored.as_slice();
    let data = Data::new(points)?;
    let too_few = |carriers: usize| MultiCarrierError::TooFewPoints {
        points: points.len(),
        residuals: data.residual_count,
        carriers,
        weighted: data.weighted,
    };
    let mut candidates = Vec::new();
    let mut warnings = Vec::new();
    let chosen = match &settings.selection {
        CarrierSelection::Kinds(kinds) => {
            if 2 * kinds.len() > data.max_parameters() {
                return Err(too_few(kinds.len()));
            }
            let result = fit_kinds(&data, kinds, None, settings, &bounds);
            candidates.push(candidate_record(kinds, &result));
            result?
        }
        CarrierSelection::Guess(guess) => {
            if 2 * guess.len() > data.max_parameters() {
                return Err(too_few(guess.len()));
            }
            let kinds: Vec<CarrierKind> = guess.iter().map(|c| c.kind).collect();
            let result = fit_kinds(&data, &kinds, Some(guess), settings, &bounds);
            candidates.push(candidate_record(&kinds, &result));
            result?
        }
        &CarrierSelection::Automatic { max_carriers } => {
            let allowed = max_carriers.min(data.max_parameters() / 2);
            if allowed == 0 {
                return Err(too_few(1));
            }
            if allowed < max_carriers {
                warnings.push(format!(
                    "the {} residuals allow at most {allowed} carrier(s), fewer than max_carriers = {max_carriers}; give more field points to try more",
                    data.residual_count
                ));
            }
            let mut best: Option<CandidateFit> = None;
            let mut first_error: Option<MultiCarrierError> = None;
            let mut improved_at_last = false;
            // n carriers come in n + 1 sign mixtures: lists 1 + 2 + ... with n = 1..=allowed.
            let total_lists = (allowed * (allowed + 3) / 2) as f64;
            let mut lists_done = 0usize;
            for n in 1..=allowed {
                let mut best_here: Option<CandidateFit> = None;
                if monitor.is_cancelled() {
                    return Err(MultiCarrierError::Cancelled);
                }
                monitor.progress(
                    lists_done as f64 / total_lists,
                    &format!("fitting {n} carrier(s), every electron/hole split"),
                );
                lists_done += n + 1;
                // The n + 1 sign mixtures of n carriers are independent fits (each list has
                // its own generator), solved at once on the cores there are and then taken
                // in order, so that the choice is the same as one after the other.
                let lists: Vec<Vec<CarrierKind>> = (0..=n)
                    .map(|holes| {
                        std::iter::repeat_n(CarrierKind::Electron, n - holes)
                            .chain(std::iter::repeat_n(CarrierKind::Hole, holes))
                            .collect()
                    })
                    .collect();
                let results: Vec<Result<CandidateFit, MultiCarrierError>> = lists
                    .par_iter()
                    .map(|kinds| fit_kinds(&data, kinds, None, settings, &bounds))
                    .collect();
                for (kinds, result) in lists.iter().zip(results) {
                    candidates.push(candidate_record(kinds, &result));
                    match result {
                        Ok(fit) => {
                            if best_here.as_ref().is_none_or(|b| fit.score < b.score) {
                                best_here = Some(fit);
                            }
                        }
                        Err(error) => {
                            first_error.get_or_insert(error);
                        }
                    }
                }
                let Some(here) = best_here else { break };
                let better = match &best {
                    None => true,
                    Some(previous) => here.score < previous.score - settings.min_criterion_improvement,
                };
                if !better {
                    improved_at_last = false;
                    break;
                }
                best = Some(here);
                improved_at_last = true;
            }
            let Some(best) = best else {
                return Err(first_error.expect("a failed selection recorded its error"));
            };
            if improved_at_last && best.kinds.len() == allowed && allowed == max_carriers && allowed > 1 {
                warnings.push(format!(
                    "{} still improved with {allowed} carriers, the most tried; raise max_carriers to see whether more are present",
                    settings.criterion.name()
                ));
            }
            best
        }
    };
    let counts = Counts {
        floored_points,
        reading_reuse_factor,
    };
    Ok(finish(&data, points, chosen, candidates, warnings, settings, counts))
}

/// Relative standard uncertainty above which a carrier with mu B_max < 1 gets a warning of
/// its own: 10 %, where a density stops being a useful number for a growth run (common
/// practice).
const POORLY_DETERMINED: f64 = 0.1;

/// Bookkeeping of the data passed on to [`finish`].
struct Counts {
    floored_points: usize,
    reading_reuse_factor: f64,
}

/// What each whitened residual is, for warnings: "sigma_xx at B = 2.5 T". The second
/// residual of a point is sigma_xy after its correlation with sigma_xx is removed.
fn residual_labels(data: &Data) -> Vec<String> {
    let mut labels = Vec::with_capacity(data.residual_count);
    for (k, &field) in data.fields_t.iter().enumerate() {
        labels.push(format!("sigma_xx at B = {field:.4} T (point {k})"));
        if data.whitening[k].count() == 2 {
            labels.push(format!("sigma_xy at B = {field:.4} T (point {k})"));
        }
    }
    labels
}

/// Orders the carriers, computes uncertainties, the curve and the warnings.
fn finish(
    data: &Data,
    points: &[TensorPoint],
    chosen: CandidateFit,
    candidates: Vec<Candidate>,
    mut warnings: Vec<String>,
    settings: &MultiCarrierSettings,
    counts: Counts,
) -> MultiCarrierFit {
    let Counts {
        floored_points,
        reading_reuse_factor,
    } = counts;
    let CandidateFit { kinds, run, score } = chosen;
    let best = &run.best;
    let n = kinds.len();
    // With stated uncertainties the covariance is (J^T J)^-1 as it stands; when chi^2 / nu
    // exceeds 1 it is widened by the Birge ratio (never narrowed). Without them the solver
    // already scaled it by the estimated noise, and chi-square has nothing left to test.
    let quality = FitQuality::assess(best.chi_square, best.degrees_of_freedom);
    let birge_ratio = if data.weighted { quality.birge_ratio } else { 1.0 };
    let statistical_scale = birge_ratio * reading_reuse_factor.max(1.0).sqrt();
    let calibration = settings.calibration;
    let order = output_order(&kinds, &best.parameters);
    let correlation_raw = best.correlation();
    let parameter_index = |k: usize| 2 * order[k / 2] + k % 2;
    let correlation = Matrix::from_fn(2 * n, 2 * n, |i, j| {
        correlation_raw[(parameter_index(i), parameter_index(j))]
    });
    let stat = |value: f64, se: f64| (se.is_finite()).then_some(value * se * statistical_scale);
    let carriers: Vec<FittedCarrier> = order
        .iter()
        .map(|&i| {
            let density = best.parameters[2 * i].exp();
            let mobility = best.parameters[2 * i + 1].exp();
            let carrier = Carrier {
                kind: kinds[i],
                sheet_density_m2: density,
                mobility_m2_per_vs: mobility,
            };
            let sheet_density_budget = Budget::new(
                density,
                stat(density, best.standard_errors[2 * i]),
                calibration.density_relative(),
            );
            let mobility_budget = Budget::new(
                mobility,
                stat(mobility, best.standard_errors[2 * i + 1]),
                calibration.mobility_relative(),
            );
            FittedCarrier {
                kind: kinds[i],
                sheet_density_m2: density,
                sheet_density_unc_m2: sheet_density_budget.total(),
                sheet_density_budget,
                mobility_m2_per_vs: mobility,
                mobility_unc_m2_per_vs: mobility_budget.total(),
                mobility_budget,
                sheet_conductance_s: carrier.sheet_conductance_s(),
                mobility_field_product: mobility * data.max_field_t,
                at_bound: best.at_bound[2 * i] || best.at_bound[2 * i + 1],
            }
        })
        .collect();

    // Curve: data, fit and whitened residuals at every input point.
    let model_carriers: Vec<Carrier> = carriers.iter().map(FittedCarrier::carrier).collect();
    let curve: Vec<CurvePoint> = points
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let fit = sum_conductivity(&model_carriers, p.field_t);
            let fit_rho = fit.to_resistivity();
            let data_rho = mobilis_physics::field_tensor::ConductivityTensor {
                sigma_xx_s: p.sigma_xx_s,
                sigma_xy_s: p.sigma_xy_s,
            }
            .to_resistivity();
            let offset = data.offsets[k];
            let uses_xy = data.whitening[k].count() == 2;
            CurvePoint {
                field_t: p.field_t,
                sigma_xx_s: p.sigma_xx_s,
                sigma_xy_s: p.sigma_xy_s,
                sigma_xx_fit_s: fit.sigma_xx_s,
                sigma_xy_fit_s: fit.sigma_xy_s,
                rho_xx_ohm_sq: data_rho.rho_xx_ohm_sq,
                rho_xy_ohm: data_rho.rho_xy_ohm,
                rho_xx_fit_ohm_sq: fit_rho.rho_xx_ohm_sq,
                rho_xy_fit_ohm: fit_rho.rho_xy_ohm,
                residual_xx: best.residuals[offset],
                residual_xy: uses_xy.then(|| best.residuals[offset + 1]),
            }
        })
        .collect();

    // Warnings.
    let label = |k: usize| {
        let c = &carriers[k];
        format!(
            "carrier {k} ({}, mu = {:.4e} cm^2/(V s))",
            c.kind.name(),
            c.mobility_m2_per_vs * 1e4
        )
    };
    if n > 1 {
        for (k, c) in carriers.iter().enumerate() {
            let product = c.mobility_field_product;
            let relative = |value: f64, unc: Option<f64>| unc.map_or(f64::INFINITY, |u| u / value);
            let worst = relative(c.sheet_density_m2, c.sheet_density_unc_m2)
                .max(relative(c.mobility_m2_per_vs, c.mobility_unc_m2_per_vs));
            if product < 1.0 && worst > POORLY_DETERMINED {
                warnings.push(format!(
                    "{} has mu B_max = {product:.3} < 1 and is determined to only {:.0} %: the sweep does not reach its magnetoresistance (near B = 1/mu = {:.3} T), so its density and mobility rest on its share of the low-field conductance and Hall slope; measure to higher field to pin it down",
                    label(k),
                    100.0 * worst.min(1e4),
                    1.0 / c.mobility_m2_per_vs
                ));
            }
        }
        for a in 0..n {
            for b in a + 1..n {
                if carriers[a].mobility_field_product < 1.0 && carriers[b].mobility_field_product < 1.0 {
                    warnings.push(format!(
                        "{} and {} both have mu B_max < 1, so they are not distinguishable in this field range: the sweep does not reach the magnetoresistance of either, and a pair of such carriers acts as one up to small curvatures of the data, so their separation rests on the noise and on the model; check their uncertainties and correlation, read them as one parallel conductance, or measure to higher field",
                        label(a),
                        label(b)
                    ));
                }
            }
        }
    }
    for (k, carrier) in carriers.iter().enumerate() {
        if carrier.at_bound {
            warnings.push(format!(
                "{} ended on a bound of its density or mobility (sheet density {:.4e} cm^-2), so it has no uncertainty; it may not be present: fit fewer carriers, or widen the bounds if it is real",
                label(k),
                carrier.sheet_density_m2 * 1e-4
            ));
        }
    }
    if data.weighted {
        let describe = residual_labels(data);
        if let Some(warning) = quality.warning(&best.residuals, |i| describe[i].clone()) {
            warnings.push(format!(
                "{warning}; a carrier may be missing or a mobility may depend on field, or the stated uncertainties (the sweep's rho_xx_ohm_sq_unc and rho_xy_ohm_unc, raised to relative_uncertainty_floor = {:.1e} of |sigma|) are too small",
                settings.relative_uncertainty_floor
            ));
        }
    }
    if floored_points > 0 {
        warnings.push(format!(
            "{floored_points} of {} points had a stated uncertainty below relative_uncertainty_floor = {:.1e} of |sigma(B)| and were raised to it, so that no point pins the fit; lower relative_uncertainty_floor if the instrument really resolves that finely",
            points.len(),
            settings.relative_uncertainty_floor
        ));
    }
    let starts_at_minimum = starts_at_best_minimum(&kinds, &run);
    if run.converged > 1 && starts_at_minimum == 1 {
        warnings.push(format!(
            "only 1 of {} converged starts reached the best minimum; raise random_starts to check that no better one exists",
            run.converged
        ));
    }
    MultiCarrierFit {
        carriers,
        correlation,
        chi_square: best.chi_square,
        degrees_of_freedom: best.degrees_of_freedom,
        reduced_chi_square: best.reduced_chi_square,
        chi_square_p_value: (data.weighted && quality.p_value.is_finite()).then_some(quality.p_value),
        birge_ratio,
        floored_points,
        reading_reuse_factor: reading_reuse_factor.max(1.0),
        relative_uncertainty_floor: settings.relative_uncertainty_floor,
        calibration,
        residual_count: data.residual_count,
        weighted: data.weighted,
        criterion: settings.criterion,
        score,
        candidates,
        starts: run.outcomes.len(),
        starts_converged: run.converged,
        starts_at_minimum,
        max_field_t: data.max_field_t,
        curve,
        warnings,
    }
}
