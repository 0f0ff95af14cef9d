//! `mr.two_band_fit`: the classical two-band model fitted jointly to rho_xx(B) and
//! rho_xy(B), giving the sheet density and mobility of each band with uncertainties.
//!
//! Pure computation: no DataFrames, no I/O. The table glue calls [`fit_two_band_sweep`] per
//! sample and temperature and writes the two [`TwoBandCarrier`]s to the summary and the
//! [`TwoBandFit::curve`] (data, fit and residuals per field) to the table.
//!
//! # Model
//!
//! Two carriers of given kinds (by default one electron and one hole; any pair is allowed,
//! two electrons for a 2D channel over a parallel layer, for instance), each with a sheet
//! density n_i and a mobility mu_i and its own constant relaxation time. Their conductivity
//! tensors add (Beck and Anderson, J. Appl. Phys. 62, 541, 1987), and the resistivity is the
//! inverse of the sum: `mobilis_physics::forward::tensor`, the same forward model that
//! generates the synthetic sweeps, evaluated by [`two_band_resistivity`]. For an electron
//! (n, mu_n) and a hole (p, mu_p) band it is the closed two-band form (the two-band model,
//! Ashcroft and Mermin, Solid State Physics, 1976, ch. 12, problem 4; from memory), D = (n mu_n + p mu_p)^2 + (p - n)^2 mu_n^2 mu_p^2 B^2,
//!
//! - rho_xx = [(n mu_n + p mu_p) + (n mu_n mu_p^2 + p mu_p mu_n^2) B^2] / (e D),
//! - rho_xy = B [(p mu_p^2 - n mu_n^2) + (p - n) mu_n^2 mu_p^2 B^2] / (e D),
//!
//! rho_xy positive for holes at positive field, the sign convention of the `sweep` table.
//! Sheet quantities throughout; a volume density follows from the thickness
//! (`mobilis_physics::sweep::Thickness`).
//!
//! # Steps and the choices made
//!
//! 1. **Data.** [`fit_two_band_sweep`] symmetrizes the sweep (`mobilis_physics::sweep`, as
//!    `mr.symmetrize` does) and fits the even rho_xx and odd rho_xy at +|B| of the common
//!    grid; a sweep at one field sign is used as measured, rho_xy taken as odd without the
//!    Hall misalignment removed (`single_field_sign` and a warning, from
//!    `mobilis_physics::sweep::Symmetrized::warnings`); [`fit_two_band`] fits resistivity
//!    points as given (any field sign). Every value
//!    finite, rho_xx > 0, uncertainties on every point or none, some point in field.
//! 2. **Residuals, in resistivity space.** Two per field, (model - data) of rho_xx and
//!    rho_xy, whitened jointly by the point's 2 x 2 covariance (uncertainties and
//!    correlation), so that the sum of squares is the generalized chi-square of what was
//!    measured. At B = 0 only rho_xx enters: rho_xy vanishes there by symmetry (the
//!    symmetrized value is exactly 0 with zero uncertainty). Without uncertainties each
//!    component at field B gets one proportional to |rho(B)| = sqrt(rho_xx^2 + rho_xy^2) of
//!    the data, its scale estimated from the residual scatter (the covariance is multiplied
//!    by chi^2 / nu): a fixed relative resolution of the voltmeter, the same noise model
//!    `spectrum.multi_carrier_fit` assumes in conductivity space (the inversion z -> 1/z maps
//!    an isotropic scatter eps |rho| onto eps |sigma|), so the two fits weigh the data alike
//!    and agree to well within their uncertainties.
//! 3. **Parameters.** ln n_1, ln mu_1, ln n_2, ln mu_2, the kinds fixed. Logarithms keep
//!    densities and mobilities positive, make the steps scale-free over the decades they
//!    span and the Gaussian uncertainties relative ones. Box bounds of the solver keep them
//!    within [`TwoBandSettings::sheet_density_bounds_m2`] and
//!    [`TwoBandSettings::mobility_bounds_m2_per_vs`]. The Jacobian is analytic: the
//!    derivatives of sigma (d sigma_xx / d ln n = g / (1 + x), d sigma_xx / d ln mu =
//!    g (1 - x) / (1 + x)^2, d sigma_xy / d ln n = s g mu B / (1 + x), d sigma_xy / d ln mu =
//!    2 s g mu B / (1 + x)^2 with g = e n mu, x = (mu B)^2) carried through the inversion by
//!    its Jacobian 1/D^2 [[b^2 - a^2, -2ab], [-2ab, a^2 - b^2]] at (a, b) = (sigma_xx,
//!    sigma_xy), D = a^2 + b^2. Model, Jacobian and solver run are the N-carrier engine of
//!    `mobilis_physics::carrier_fit` with N = 2, which `spectrum.multi_carrier_fit` runs in
//!    conductivity space; this fit asks it for residuals in resistivity.
//! 4. **Starts.** The bounded Levenberg-Marquardt solver of `mobilis_numerics::fit` runs from
//!    every pair of 5 mobilities spread evenly in log over 0.03 / B_max .. 10 / B_min (a
//!    carrier shows its magnetoresistance around B = 1/mu, so this covers every carrier the
//!    sweep can see; pairs of one mobility are left out for two carriers of one kind, which
//!    are then interchangeable), from the low-field Hall mobility |rho_xy| / (rho_xx |B|)
//!    times 3 and over 3 in both orders, from the caller's guess, and from
//!    [`TwoBandSettings::random_starts`] seeded log-uniform pairs. For each pair of
//!    mobilities the densities are the linear least squares of the data's conductivity
//!    tensor (with the mobilities fixed the conductivity is linear in the densities), each
//!    component weighted by 1 / |sigma|; a density that comes out zero or negative is
//!    replaced by a small share of the zero-field conductance. The converged run of lowest
//!    chi-square is kept.
//! 5. **Uncertainties.** From the covariance (J^T J)^-1 of the best run (times chi^2 / nu
//!    without uncertainties), in ln n and ln mu; the standard uncertainty of n is n times
//!    that of ln n (first order), likewise for mu. With stated uncertainties the errors are
//!    widened by the Birge ratio sqrt(chi^2 / nu) when that exceeds 1 and never narrowed
//!    (`mobilis_numerics::fit::FitQuality`; the summary's `chi_square_p_value` and
//!    `birge_ratio`, null without uncertainties). A parameter on its bound has none (the
//!    curvature says nothing about a one-sided minimum). A best minimum whose parameters the
//!    data do not determine is refused ([`TwoBandError::Indistinguishable`]).
//! 6. **Warnings.** A carrier with mu B_max < 1 whose density or mobility is uncertain by
//!    more than 10 % (the sweep does not reach its magnetoresistance); both carriers with
//!    mu B_max < 1 (then they act as one carrier up to small curvatures); parameters on their
//!    bounds; with uncertainties given, a chi-square p-value below 1e-3, naming the worst
//!    fields (a third carrier, a field-dependent mobility, or underestimated uncertainties);
//!    a best minimum that only one of several converged starts reached.
//!
//! The carriers are reported electrons first, then holes, each kind by increasing mobility,
//! as `spectrum.multi_carrier_fit` reports them. For two carriers the two fits agree to well
//! within their uncertainties; this one works in resistivity space, the other in
//! conductivity space.

use mobilis_numerics::fit::{FitError, FitQuality, MultiStartFit};
use mobilis_numerics::linalg::{Matrix, Svd};
use mobilis_numerics::noise::Rng;
use mobilis_physics::carrier_fit::{
    output_order, starts_at_best_minimum, CarrierModel, InvalidRange, LogBounds, TensorSpace,
};
use mobilis_physics::constants::ELEMENTARY_CHARGE_C;
use mobilis_physics::forward::tensor::{
    high_field_hall_coefficient_m2_per_c, low_field_hall_coefficient_m2_per_c, sum_conductivity,
};
use mobilis_physics::sweep::{symmetrize, SweepError, SweepUse, SymmetrizeSettings, Symmetrized};
use mobilis_physics::tensor_data::{TensorData, TensorDataError};

use mobilis_physics::field_tensor::invert_tensor;
pub use mobilis_physics::field_tensor::ResistivityTensor;
pub use mobilis_physics::forward::tensor::{Carrier, CarrierKind};
pub use mobilis_physics::sweep::{ResistivityUncertainty, SweepPoint};

/// Mobilities per carrier in the grid of deterministic starts.
const GRID_MOBILITIES: usize = 5;

/// Relative standard uncertainty above which a carrier with mu B_max < 1 gets a warning:
/// 10 %, where a density stops being a useful number for a growth run (common practice).
const POORLY_DETERMINED: f64 = 0.1;

/// The resistivity tensor of two carriers at `field_t`: the model the fit adjusts.
pub fn two_band_resistivity(carriers: &[Carrier; 2], field_t: f64) -> ResistivityTensor {
    sum_conductivity(carriers, field_t).to_resistivity()
}

/// Settings of the fit; [`TwoBandSettings::default`] documents the defaults.
#[derive(Debug, Clone, PartialEq)]
pub struct TwoBandSettings {
    /// The two carriers' kinds. Default: an electron and a hole.
    pub kinds: [CarrierKind; 2],
    /// Densities and mobilities to start from as well, of the kinds of `kinds` in the same
    /// order. Default none.
    pub guess: Option<[Carrier; 2]>,
    /// Random starts besides the deterministic ones. Default 8.
    pub random_starts: usize,
    /// Seed of the random starts. Default 1.
    pub seed: u64,
    /// Allowed mobilities, m^2/(V s). Default (1e-5, 1e4), as in `spectrum.multi_carrier_fit`:
    /// 0.1 cm^2/(V s), below any carrier that still conducts measurably, to 1e8 cm^2/(V s).
    pub mobility_bounds_m2_per_vs: (f64, f64),
    /// Allowed sheet densities, m^-2. Default (1e6, 1e26): 1e2 to 1e22 cm^-2.
    pub sheet_density_bounds_m2: (f64, f64),
    /// Iterations per start. Default 300.
    pub max_iterations: usize,
}

impl Default for TwoBandSettings {
    fn default() -> Self {
        TwoBandSettings {
            kinds: [CarrierKind::Electron, CarrierKind::Hole],
            guess: None,
            random_starts: 8,
            seed: 1,
            mobility_bounds_m2_per_vs: (1e-5, 1e4),
            sheet_density_bounds_m2: (1e6, 1e26),
            max_iterations: 300,
        }
    }
}

/// One fitted band.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TwoBandCarrier {
    pub kind: CarrierKind,
    pub sheet_density_m2: f64,
    /// Standard uncertainty; `None` when the density ended on its bound.
    pub sheet_density_unc_m2: Option<f64>,
    pub mobility_m2_per_vs: f64,
    /// Standard uncertainty; `None` when the mobility ended on its bound.
    pub mobility_unc_m2_per_vs: Option<f64>,
    /// Zero-field sheet conductance e n mu, S.
    pub sheet_conductance_s: f64,
    /// mu B_max: below 1 the sweep does not reach this band's magnetoresistance.
    pub mobility_field_product: f64,
    /// A parameter ended on its bound.
    pub at_bound: bool,
}

impl TwoBandCarrier {
    /// As a forward-model carrier.
    pub fn carrier(&self) -> Carrier {
        Carrier {
            kind: self.kind,
            sheet_density_m2: self.sheet_density_m2,
            mobility_m2_per_vs: self.mobility_m2_per_vs,
        }
    }
}

/// Data and fit at one field.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TwoBandCurvePoint {
    pub field_t: f64,
    pub rho_xx_ohm_sq: f64,
    pub rho_xy_ohm: f64,
    pub rho_xx_fit_ohm_sq: f64,
    pub rho_xy_fit_ohm: f64,
    /// Whitened residuals (model - data): rho_xx's, and rho_xy's after its correlation with
    /// rho_xx is removed (`None` at zero field).
    pub residual_xx: f64,
    pub residual_xy: Option<f64>,
}

/// The fitted model at one field.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TwoBandModelPoint {
    pub field_t: f64,
    pub rho_xx_ohm_sq: f64,
    pub rho_xy_ohm: f64,
    /// (rho_xx(B) - rho_xx(0)) / rho_xx(0) of the model.
    pub mr: f64,
}

/// The result of a two-band fit.
#[derive(Debug, Clone, PartialEq)]
pub struct TwoBandFit {
    /// Electrons first, then holes, each kind by increasing mobility.
    pub carriers: [TwoBandCarrier; 2],
    /// Correlation of (ln n_1, ln mu_1, ln n_2, ln mu_2) in the order of `carriers` (rows of
    /// parameters on a bound are zero).
    pub correlation: Matrix,
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    /// chi^2 / nu; without uncertainties, the square of the relative scatter of the data
    /// about the fit.
    pub reduced_chi_square: f64,
    /// P(chi^2_nu >= chi^2) when the data carried uncertainties.
    pub chi_square_p_value: Option<f64>,
    /// The factor the uncertainties were widened by when the data carried uncertainties and
    /// chi^2 / nu exceeded 1 (Birge 1932), else 1; `None` without uncertainties (the scatter
    /// then sets the errors).
    pub birge_ratio: Option<f64>,
    pub residual_count: usize,
    /// The data carried uncertainties.
    pub weighted: bool,
    pub starts: usize,
    pub starts_converged: usize,
    /// Converged starts that reached the best minimum.
    pub starts_at_minimum: usize,
    pub max_field_t: f64,
    /// rho_xx(0) of the fitted model, ohm per square.
    pub zero_field_rho_ohm_sq: f64,
    /// Low- and high-field sheet Hall coefficients of the fitted model, m^2/C (the second
    /// `None` for exactly compensated bands).
    pub low_field_hall_coefficient_m2_per_c: f64,
    pub high_field_hall_coefficient_m2_per_c: Option<f64>,
    /// Data and fit at each input point, in input order.
    pub curve: Vec<TwoBandCurvePoint>,
    pub warnings: Vec<String>,
}

impl TwoBandFit {
    /// The fitted bands as forward-model carriers.
    pub fn model_carriers(&self) -> [Carrier; 2] {
        [self.carriers[0].carrier(), self.carriers[1].carrier()]
    }

    /// The fitted model at each of `fields_t` (for a smooth curve through the data).
    pub fn model_curve(&self, fields_t: &[f64]) -> Vec<TwoBandModelPoint> {
        let carriers = self.model_carriers();
        let rho0 = two_band_resistivity(&carriers, 0.0).rho_xx_ohm_sq;
        fields_t
            .iter()
            .map(|&field_t| {
                let rho = two_band_resistivity(&carriers, field_t);
                TwoBandModelPoint {
                    field_t,
                    rho_xx_ohm_sq: rho.rho_xx_ohm_sq,
                    rho_xy_ohm: rho.rho_xy_ohm,
                    mr: (rho.rho_xx_ohm_sq - rho0) / rho0,
                }
            })
            .collect()
    }
}

/// A symmetrized sweep and the two-band fit to it.
#[derive(Debug, Clone, PartialEq)]
pub struct TwoBandSweepFit {
    pub symmetrized: Symmetrized,
    pub fit: TwoBandFit,
}

/// Why a two-band fit is refused or fails.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum TwoBandError {
    /// The sweep could not be symmetrized (zero field only, rho_xx <= 0, NaN ...).
    #[error("{0}")]
    Sweep(#[from] SweepError),
    /// The resistivity points break a rule of every two-component fit (no points, a value
    /// not finite, rho_xx <= 0, an invalid or partial set of uncertainties, no point in
    /// field), checked once by `mobilis_physics::tensor_data`.
    #[error(transparent)]
    Data(#[from] TensorDataError),
    /// Fewer residuals than the four parameters need.
    #[error(
        "{points} points give {residuals} residuals, too few for the 4 parameters of two bands ({} needed); give more field points",
        residuals_needed(.weighted)
    )]
    TooFewPoints {
        points: usize,
        residuals: usize,
        weighted: bool,
    },
    #[error("setting {name} is {value}; {requirement}")]
    InvalidSetting {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The guess is of other kinds than `kinds`, or not finite and positive.
    #[error(
        "guess carrier {index}: {what}; give carriers of the kinds of `kinds`, in that order, with finite positive densities and mobilities"
    )]
    InvalidGuess { index: usize, what: String },
    /// The data do not determine the parameters.
    #[error(
        "the data do not determine the two bands (parameters {parameters:?} of ln n_1, ln mu_1, ln n_2, ln mu_2 are degenerate); measure to higher field, where the bands' magnetoresistance appears, or fit one carrier"
    )]
    Indistinguishable { parameters: Vec<usize> },
    #[error(
        "none of {starts} starts converged within {max_iterations} iterations; raise max_iterations or random_starts, or give a guess"
    )]
    NotConverged { starts: usize, max_iterations: usize },
    /// Any other failure of the solver.
    #[error("the two-band fit failed: {0}")]
    Fit(FitError),
}

/// Residuals the four parameters need: one more without uncertainties, whose scale is then
/// estimated from the same residuals.
fn residuals_needed(weighted: &bool) -> usize {
    if *weighted {
        4
    } else {
        5
    }
}

impl From<FitError> for TwoBandError {
    fn from(error: FitError) -> Self {
        match error {
            FitError::Singular { parameters } => TwoBandError::Indistinguishable { parameters },
            other => TwoBandError::Fit(other),
        }
    }
}

/// Validated resistivity data: xx is rho_xx in ohm per square, xy is rho_xy in ohm.
type Data = TensorData;

/// Checks the points and builds the whitening; refuses fewer residuals than the four
/// parameters need (one more without uncertainties, whose scale is then estimated from the
/// same residuals).
fn validated_data(points: &[SweepPoint]) -> Result<Data, TwoBandError> {
    let data = TensorData::new(points)?;
    if data.max_parameters() < 4 {
        return Err(TwoBandError::TooFewPoints {
            points: points.len(),
            residuals: data.residual_count,
            weighted: data.weighted,
        });
    }
    Ok(data)
}

/// ln n of both carriers for fixed mobilities: the weighted linear least squares of the
/// data's conductivity tensor (module documentation, step 4).
fn densities_for(data: &Data, kinds: &[CarrierKind; 2], mobilities: [f64; 2], bounds: &LogBounds) -> [f64; 2] {
    let mut rows: Vec<[f64; 3]> = Vec::with_capacity(data.residual_count);
    let mut zero_field_conductance = 0.0;
    let mut lowest = f64::INFINITY;
    for (k, &field) in data.fields_t.iter().enumerate() {
        let (sigma_xx, sigma_xy) = invert_tensor(data.xx[k], data.xy[k]);
        let weight = 1.0 / sigma_xx.hypot(sigma_xy);
        if field.abs() < lowest {
            lowest = field.abs();
            zero_field_conductance = sigma_xx;
        }
        let parts = [0, 1].map(|i| {
            Carrier {
                kind: kinds[i],
                sheet_density_m2: 1.0,
                mobility_m2_per_vs: mobilities[i],
            }
            .conductivity(field)
        });
        rows.push([
            parts[0].sigma_xx_s * weight,
            parts[1].sigma_xx_s * weight,
            sigma_xx * weight,
        ]);
        if field != 0.0 {
            rows.push([
                parts[0].sigma_xy_s * weight,
                parts[1].sigma_xy_s * weight,
                sigma_xy * weight,
            ]);
        }
    }
    let norms: [f64; 2] = [0, 1].map(|i| {
        rows.iter()
            .map(|r| r[i] * r[i])
            .sum::<f64>()
            .sqrt()
            .max(f64::MIN_POSITIVE)
    });
    let design = Matrix::from_fn(rows.len(), 2, |r, i| rows[r][i] / norms[i]);
    let target: Vec<f64> = rows.iter().map(|r| r[2]).collect();
    let solution = Svd::new(&design)
        .map(|svd| svd.solve_least_squares(&target, 1e-12))
        .unwrap_or_else(|_| vec![0.0; 2]);
    [0, 1].map(|i| {
        let density = solution[i] / norms[i];
        let floor = 1e-3 * zero_field_conductance / (2.0 * ELEMENTARY_CHARGE_C * mobilities[i]);
        let density = if density.is_finite() && density > floor {
            density
        } else {
            floor
        };
        density.ln().clamp(bounds.ln_density.0, bounds.ln_density.1)
    })
}

/// Every start (module documentation, step 4).
fn starts(data: &Data, settings: &TwoBandSettings, bounds: &LogBounds) -> Vec<Vec<f64>> {
    let kinds = &settings.kinds;
    let clamp_mu = |ln_mu: f64| ln_mu.clamp(bounds.ln_mobility.0, bounds.ln_mobility.1);
    let low = clamp_mu((0.03 / data.max_field_t).ln());
    let high = clamp_mu((10.0 / data.min_field_t).ln());
    let (low, high) = (low.min(high), high.max(low));
    let start_from = |ln_mu: [f64; 2]| -> Vec<f64> {
        let ln_mu = ln_mu.map(clamp_mu);
        let ln_n = densities_for(data, kinds, ln_mu.map(f64::exp), bounds);
        vec![ln_n[0], ln_mu[0], ln_n[1], ln_mu[1]]
    };
    let grid: Vec<f64> = (0..GRID_MOBILITIES)
        .map(|i| low + (high - low) * (i as f64 + 0.5) / GRID_MOBILITIES as f64)
        .collect();
    let same_kind = kinds[0] == kinds[1];
    let mut list = Vec::new();
    for (i, &first) in grid.iter().enumerate() {
        for (j, &second) in grid.iter().enumerate() {
            // Two carriers of one kind are interchangeable: one order of each pair suffices,
            // and equal mobilities make them one carrier.
            if !same_kind || i < j {
                list.push(start_from([first, second]));
            }
        }
    }
    // The low-field Hall mobility |rho_xy| / (rho_xx |B|) at the smallest nonzero field.
    if let Some(k) = (0..data.fields_t.len())
        .filter(|&k| data.fields_t[k] != 0.0)
        .min_by(|&a, &b| data.fields_t[a].abs().total_cmp(&data.fields_t[b].abs()))
    {
        let hall = data.xy[k].abs() / (data.xx[k] * data.fields_t[k].abs());
        if hall.is_finite() && hall > 0.0 {
            let spread = 3f64.ln();
            list.push(start_from([hall.ln() + spread, hall.ln() - spread]));
            list.push(start_from([hall.ln() - spread, hall.ln() + spread]));
        }
    }
    if let Some(guess) = &settings.guess {
        list.push(
            guess
                .iter()
                .flat_map(|c| {
                    [
                        c.sheet_density_m2.ln().clamp(bounds.ln_density.0, bounds.ln_density.1),
                        clamp_mu(c.mobility_m2_per_vs.ln()),
                    ]
                })
                .collect(),
        );
    }
    let mut rng = Rng::seeded(settings.seed);
    for _ in 0..settings.random_starts {
        let drawn = [rng.uniform_between(low, high), rng.uniform_between(low, high)];
        list.push(start_from(drawn));
    }
    list
}

fn validate_settings(settings: &TwoBandSettings) -> Result<LogBounds, TwoBandError> {
    let bounds = LogBounds::new(settings.sheet_density_bounds_m2, settings.mobility_bounds_m2_per_vs).map_err(
        |InvalidRange { name, value }| TwoBandError::InvalidSetting {
            name,
            value,
            requirement: InvalidRange::REQUIREMENT,
        },
    )?;
    if settings.max_iterations == 0 {
        return Err(TwoBandError::InvalidSetting {
            name: "max_iterations",
            value: 0.0,
            requirement: "give at least one iteration",
        });
    }
    if let Some(guess) = &settings.guess {
        for (index, carrier) in guess.iter().enumerate() {
            if carrier.kind != settings.kinds[index] {
                return Err(TwoBandError::InvalidGuess {
                    index,
                    what: "its kind differs from the one in `kinds`".into(),
                });
            }
            // The forward model's own rule for a carrier: finite positive density and mobility.
            carrier.validate().map_err(|error| TwoBandError::InvalidGuess {
                index,
                what: error.to_string(),
            })?;
        }
    }
    Ok(bounds)
}

/// Symmetrizes a sweep and fits the two bands to it.
pub fn fit_two_band_sweep(
    points: &[SweepPoint],
    sweep_settings: &SymmetrizeSettings,
    settings: &TwoBandSettings,
) -> Result<TwoBandSweepFit, TwoBandError> {
    validate_settings(settings)?;
    let symmetrized = symmetrize(points, sweep_settings)?;
    let grid: Vec<SweepPoint> = symmetrized.points.iter().map(|p| p.to_sweep_point()).collect();
    let mut fit = fit_two_band(&grid, settings)?;
    fit.warnings.splice(0..0, symmetrized.warnings(SweepUse::Tensor));
    Ok(TwoBandSweepFit { symmetrized, fit })
}

/// Fits the two bands of `settings.kinds` to resistivity points as given (see the module
/// documentation).
pub fn fit_two_band(points: &[SweepPoint], settings: &TwoBandSettings) -> Result<TwoBandFit, TwoBandError> {
    let bounds = validate_settings(settings)?;
    let data = validated_data(points)?;
    let kinds = settings.kinds;
    // The engine of `spectrum.multi_carrier_fit` with N = 2, its residuals taken in
    // resistivity (module documentation, step 2).
    let model = CarrierModel {
        data: &data,
        kinds: &kinds,
        space: TensorSpace::Resistivity,
    };
    let starts = starts(&data, settings, &bounds);
    let run = model
        .fit(&starts, &bounds, settings.max_iterations)
        .map_err(|error| match error {
            FitError::NotConverged {
                starts, max_iterations, ..
            } => TwoBandError::NotConverged { starts, max_iterations },
            other => TwoBandError::from(other),
        })?;
    Ok(finish(&data, points, &kinds, &run))
}

/// Orders the carriers and computes uncertainties, the curve and the warnings.
fn finish(data: &Data, points: &[SweepPoint], kinds: &[CarrierKind; 2], run: &MultiStartFit) -> TwoBandFit {
    let best = &run.best;
    let order: [usize; 2] = output_order(kinds, &best.parameters).try_into().expect("two carriers");
    let raw_correlation = best.correlation();
    let index = |k: usize| 2 * order[k / 2] + k % 2;
    let correlation = Matrix::from_fn(4, 4, |i, j| raw_correlation[(index(i), index(j))]);
    // Weighted by stated uncertainties, the covariance is taken as it stands unless the fit is
    // worse than they allow: then it is widened by the Birge ratio, never narrowed.
    let quality = data
        .weighted
        .then(|| FitQuality::assess(best.chi_square, best.degrees_of_freedom));
    let widening = quality.as_ref().map_or(1.0, |q| q.birge_ratio);
    let unc = |value: f64, se: f64| se.is_finite().then_some(value * se * widening);
    let carriers: [TwoBandCarrier; 2] = order.map(|i| {
        let density = best.parameters[2 * i].exp();
        let mobility = best.parameters[2 * i + 1].exp();
        TwoBandCarrier {
            kind: kinds[i],
            sheet_density_m2: density,
            sheet_density_unc_m2: unc(density, best.standard_errors[2 * i]),
            mobility_m2_per_vs: mobility,
            mobility_unc_m2_per_vs: unc(mobility, best.standard_errors[2 * i + 1]),
            sheet_conductance_s: ELEMENTARY_CHARGE_C * density * mobility,
            mobility_field_product: mobility * data.max_field_t,
            at_bound: best.at_bound[2 * i] || best.at_bound[2 * i + 1],
        }
    });
    let model = carriers.map(|c| c.carrier());
    let curve: Vec<TwoBandCurvePoint> = points
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let fit = two_band_resistivity(&model, p.field_t);
            let offset = data.offsets[k];
            TwoBandCurvePoint {
                field_t: p.field_t,
                rho_xx_ohm_sq: p.rho_xx_ohm_sq,
                rho_xy_ohm: p.rho_xy_ohm,
                rho_xx_fit_ohm_sq: fit.rho_xx_ohm_sq,
                rho_xy_fit_ohm: fit.rho_xy_ohm,
                residual_xx: best.residuals[offset],
                residual_xy: (data.whitening[k].count() == 2).then(|| best.residuals[offset + 1]),
            }
        })
        .collect();

    let mut warnings = Vec::new();
    let label = |c: &TwoBandCarrier| {
        format!(
            "the {} band (mu = {:.4e} cm^2/(V s))",
            c.kind.name(),
            c.mobility_m2_per_vs * 1e4
        )
    };
    for c in &carriers {
        let relative = |value: f64, unc: Option<f64>| unc.map_or(f64::INFINITY, |u| u / value);
        let worst = relative(c.sheet_density_m2, c.sheet_density_unc_m2)
            .max(relative(c.mobility_m2_per_vs, c.mobility_unc_m2_per_vs));
        if c.mobility_field_product < 1.0 && worst > POORLY_DETERMINED {
            warnings.push(format!(
                "{} has mu B_max = {:.3} < 1 and is determined to only {:.0} %: the sweep does not reach its magnetoresistance (near B = 1/mu = {:.3} T), so its density and mobility rest on its share of the low-field conductance and Hall slope; measure to higher field to pin it down",
                label(c),
                c.mobility_field_product,
                100.0 * worst.min(1e4),
                1.0 / c.mobility_m2_per_vs
            ));
        }
        if c.at_bound {
            warnings.push(format!(
                "{} ended on a bound of its density or mobility (sheet density {:.4e} cm^-2), so it has no uncertainty; the sample may hold one band only, or the bounds are too narrow",
                label(c),
                c.sheet_density_m2 * 1e-4
            ));
        }
    }
    if carriers.iter().all(|c| c.mobility_field_product < 1.0) {
        warnings.push(format!(
            "both bands have mu B_max < 1 ({:.3} and {:.3}), so the sweep does not reach the magnetoresistance of either and the two act as one carrier up to small curvatures of the data; read them as one parallel conductance, or measure to higher field",
            carriers[0].mobility_field_product, carriers[1].mobility_field_product
        ));
    }
    if let Some(quality) = &quality {
        // Each residual belongs to a field; the whitened pair of a point shares its field.
        let field_of_residual: Vec<f64> = points
            .iter()
            .enumerate()
            .flat_map(|(k, p)| std::iter::repeat_n(p.field_t, data.whitening[k].count()))
            .collect();
        let describe = |i: usize| {
            field_of_residual
                .get(i)
                .map_or_else(|| format!("residual {i}"), |b| format!("B = {b:.4} T"))
        };
        if let Some(warning) = quality.warning(&best.residuals, describe) {
            warnings.push(format!(
                "{warning}: a third carrier may conduct, a mobility may depend on field, or the stated rho_xx_ohm_sq_unc and rho_xy_ohm_unc are too small (spectrum.multi_carrier_fit can try more carriers)"
            ));
        }
    }
    let starts_at_minimum = starts_at_best_minimum(kinds, run);
    if run.converged > 1 && starts_at_minimum == 1 {
        warnings.push(format!(
            "only 1 of {} converged starts reached the best minimum; raise random_starts to check that no better one exists",
            run.converged
        ));
    }
    TwoBandFit {
        carriers,
        correlation,
        chi_square: best.chi_square,
        degrees_of_freedom: best.degrees_of_freedom,
        reduced_chi_square: best.reduced_chi_square,
        chi_square_p_value: quality.as_ref().map(|q| q.p_value),
        birge_ratio: quality.as_ref().map(|q| q.birge_ratio),
        residual_count: data.residual_count,
        weighted: data.weighted,
        starts: run.outcomes.len(),
        starts_converged: run.converged,
        starts_at_minimum,
        max_field_t: data.max_field_t,
        zero_field_rho_ohm_sq: two_band_resistivity(&model, 0.0).rho_xx_ohm_sq,
        low_field_hall_coefficient_m2_per_c: low_field_hall_coefficient_m2_per_c(&model)
            .expect("fitted carriers are positive"),
        high_field_hall_coefficient_m2_per_c: high_field_hall_coefficient_m2_per_c(&model)
            .expect("fitted carriers are positive"),
        curve,
        warnings,
    }
}

#[cfg(test)]
mod tests;
