//! `mr.weak_localization`: the Hikami-Larkin-Nagaoka fit of the low-field conductance
//! correction of a thin film: the phase-coherence length l_phi and the prefactor alpha.
//!
//! Pure computation: no DataFrames, no I/O. The table glue turns one low-field sweep into a
//! [`WeakLocalizationSweep`] and the [`WeakLocalizationFit`] back into a summary (alpha,
//! l_phi, B_phi with uncertainties) and a table (the correction and the model per field).
//!
//! # Physics
//!
//! In a film thinner than l_phi the interference of time-reversed paths changes the sheet
//! conductance at low field by (Hikami, Larkin and Nagaoka, Prog. Theor. Phys. 63, 707, 1980)
//!
//! d_sigma(B) = alpha (e^2 / 2 pi^2 hbar) [psi(1/2 + B_phi / B) - ln(B_phi / B)],
//! B_phi = hbar / (4 e l_phi^2),
//!
//! evaluated by `mobilis_physics::forward::oscillations::hln_correction_s` (psi the digamma
//! function of `mobilis_numerics::special`), the same code that generates the tests' synthetic
//! sweeps. The bracket is positive, grows as (B / B_phi)^2 / 24 below B_phi and as
//! ln(B / B_phi) above it: the field where the quadratic cusp turns logarithmic fixes B_phi,
//! the size fixes alpha. alpha = -1/2 per independent channel is weak antilocalization (strong
//! spin-orbit coupling, conductance falling with field), alpha > 0 weak localization; two
//! decoupled surfaces give -1. The form assumes a mean free path well below l_phi (the
//! diffusive limit).
//!
//! # Steps and the choices made
//!
//! 1. **Validation.** Fields, rho_xx (and rho_xy and the rho_xx uncertainties when given)
//!    finite, as many of each, rho_xx > 0, uncertainties positive. Errors name the 0-based
//!    point.
//! 2. **Conductance.** sigma_xx = rho_xx / (rho_xx^2 + rho_xy^2) when rho_xy is given (the
//!    tensor inversion), 1 / rho_xx otherwise (exact to second order in the Hall angle,
//!    which is small in the films this fit is for). The sweep need not be symmetrized: the
//!    correction is even in B and the fit uses |B|, so the two branches simply both enter.
//!    A sweep at one field sign (nonzero fields of one sign only) is fitted the same way and
//!    flagged ([`WeakLocalizationFit::single_field_sign`], with a warning): a Hall voltage
//!    picked up by misaligned longitudinal contacts, odd in B, then stays in rho_xx instead
//!    of averaging out between the branches.
//! 3. **Zero field.** sigma(0) is the mean sigma_xx of the points with |B| <=
//!    `zero_field_tolerance_t` (default 1e-3 T); a sweep without such a point is refused,
//!    since d_sigma is defined against it and the cusp at zero field carries B_phi. With
//!    `fit_offset` (the analysis's default) a constant is fitted as well, which lets every
//!    field point, not just the zero-field ones, set the reference (the zero-field average
//!    already holds part of the cusp when B_phi is small, and it may be noisy or drift).
//! 4. **Fit.** d_sigma(B) = sigma(B) - sigma(0) at the nonzero fields up to `max_field_t`
//!    (default: all) is fitted with alpha, ln B_phi (a logarithm keeps B_phi positive and
//!    makes its steps relative over the decades it can span), and optionally a classical
//!    term beta B^2 (`classical_term`; the Drude magnetoconductance -sigma_0 mu^2 B^2 that adds
//!    at higher field) and the offset, by bounded Levenberg-Marquardt (`mobilis_numerics::fit`).
//!    ln B_phi is bounded by l_phi within `phase_coherence_length_bounds_m` (default 1 nm to
//!    1 mm). Starts: for 25 values of B_phi spread geometrically from a hundredth of the
//!    lowest nonzero |B| to ten times the highest, the model is linear in alpha (and beta and
//!    the offset) and solved exactly; the three best become the starts of the nonlinear fit.
//!    With rho_xx uncertainties the residuals are weighted by the full covariance of the
//!    d_sigma: each point's own error and the error of sigma(0), which they all share
//!    (whitened by the Sherman-Morrison form of the rank-one update); treating the shared
//!    error as independent would understate the uncertainties. Without uncertainties the
//!    scatter sets the errors (the shared error of sigma(0) is then invisible to the fit;
//!    use `fit_offset`).
//! 5. **Uncertainties.** From the fit's covariance; l_phi = sqrt(hbar / (4 e B_phi)) has
//!    the relative error of B_phi halved. Weighted by stated errors, the covariance is
//!    multiplied by chi^2 / nu when that exceeds 1 (the Birge ratio, Birge 1932, as the
//!    Particle Data Group does; never shrunk); weighted by the scatter, it is scaled by the
//!    scatter; the summary's `chi_square_p_value` and `birge_ratio` are then null. A coverage
//!    test (`weak_localization/coverage.rs`) checks that l_phi's
//!    uncertainty covers the truth as often as a standard uncertainty should.
//! 6. **Warnings.** B_phi below a third of the lowest nonzero |B| (the cusp is not resolved:
//!    only a lower bound on l_phi is meaningful; measure closer to zero field); B_phi above the
//!    highest field (every point is in the quadratic regime, where only alpha / B_phi^2 is
//!    determined); a parameter on its bound; with uncertainties given, a chi-square p-value
//!    below 1e-3, naming the worst points (the HLN form alone does not describe the data:
//!    add the classical term or lower `max_field_t`, or check the stated uncertainties).

use mobilis_numerics::fit::{Bounds, FitError, FitQuality, LeastSquares, LmOptions, SameMinimum};
use mobilis_numerics::linalg::{Matrix, Svd};
use mobilis_physics::forward::oscillations::{
    hln_bracket, phase_coherence_field_t, phase_coherence_length_m, HLN_CONDUCTANCE_S,
};

#[cfg(test)]
mod coverage;
#[cfg(test)]
mod tests;

/// One low-field sweep of a thin film.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct WeakLocalizationSweep {
    /// T; any sign, any order.
    pub field_t: Vec<f64>,
    /// Sheet rho_xx, ohm per square.
    pub rho_xx_ohm_sq: Vec<f64>,
    /// Sheet rho_xy, ohm, for the tensor inversion (optional).
    pub rho_xy_ohm: Option<Vec<f64>>,
    /// Standard uncertainties of rho_xx, ohm per square (optional).
    pub rho_xx_unc_ohm_sq: Option<Vec<f64>>,
}

/// Settings of [`fit_weak_localization`]; the defaults are those of the module
/// documentation.
#[derive(Debug, Clone, PartialEq)]
pub struct WeakLocalizationSettings {
    /// Fit only |B| at or below this, T (default: all fields).
    pub max_field_t: Option<f64>,
    /// |B| at or below this is zero field, T (default 1e-3).
    pub zero_field_tolerance_t: f64,
    /// Fit a classical beta B^2 term as well (default false).
    pub classical_term: bool,
    /// Fit a constant offset of d_sigma as well (default false).
    pub fit_offset: bool,
    /// Bounds on l_phi, m (default 1e-9 to 1e-3).
    pub phase_coherence_length_bounds_m: (f64, f64),
}

impl Default for WeakLocalizationSettings {
    fn default() -> Self {
        WeakLocalizationSettings {
            max_field_t: None,
            zero_field_tolerance_t: 1e-3,
            classical_term: false,
            fit_offset: false,
            phase_coherence_length_bounds_m: (1e-9, 1e-3),
        }
    }
}

/// One field of the fit: the measured correction and the model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CorrectionPoint {
    pub field_t: f64,
    /// sigma(B) - sigma(0), S.
    pub delta_sigma_s: f64,
    pub delta_sigma_unc_s: Option<f64>,
    /// The fitted model at this field, S.
    pub model_s: f64,
    /// Whether the point entered the fit (nonzero field, |B| <= max_field_t).
    pub fitted: bool,
}

/// The HLN fit.
#[derive(Debug, Clone, PartialEq)]
pub struct WeakLocalizationFit {
    pub alpha: f64,
    pub alpha_unc: Option<f64>,
    pub phase_coherence_length_m: f64,
    pub phase_coherence_length_unc_m: Option<f64>,
    pub phase_coherence_field_t: f64,
    pub phase_coherence_field_unc_t: Option<f64>,
    /// beta, S/T^2, when fitted.
    pub classical_s_per_t2: Option<f64>,
    pub classical_unc_s_per_t2: Option<f64>,
    /// The fitted offset of d_sigma, S, when fitted.
    pub offset_s: Option<f64>,
    pub offset_unc_s: Option<f64>,
    /// sigma(0), S: the mean of the zero-field points, and its standard uncertainty.
    pub zero_field_conductance_s: f64,
    pub zero_field_conductance_unc_s: Option<f64>,
    pub zero_field_points: usize,
    pub chi_square: f64,
    pub reduced_chi_square: f64,
    /// The chi-square statistics of a fit weighted by stated errors (p-value, Birge ratio,
    /// which scaled the uncertainties when above 1); None when the scatter set the weights.
    pub quality: Option<FitQuality>,
    pub fitted_points: usize,
    /// True when the residuals were weighted by the given uncertainties.
    pub weighted: bool,
    /// True when the nonzero fields were all of one sign (see the module documentation).
    pub single_field_sign: bool,
    /// Every point of the sweep, in input order.
    pub curve: Vec<CorrectionPoint>,
    pub warnings: Vec<String>,
}

impl WeakLocalizationFit {
    /// The fitted d_sigma at `field_t`, S.
    pub fn model_s(&self, field_t: f64) -> f64 {
        model(
            self.alpha,
            self.phase_coherence_field_t,
            self.classical_s_per_t2.unwrap_or(0.0),
            self.offset_s.unwrap_or(0.0),
            field_t,
        )
    }
}

/// alpha G [psi(1/2 + B_phi/|B|) - ln(B_phi/|B|)] + beta B^2 + offset (the offset is not
/// added at B = 0, where d_sigma is 0 by definition).
fn model(alpha: f64, b_phi: f64, beta: f64, offset: f64, field_t: f64) -> f64 {
    if field_t == 0.0 {
        return 0.0;
    }
    alpha * HLN_CONDUCTANCE_S * hln_bracket(b_phi, field_t) + beta * field_t * field_t + offset
}

/// Why [`fit_weak_localization`] refuses its input or finds no fit.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum WeakLocalizationError {
    /// A column has another length than the fields.
    #[error("{column} has {got} values for {expected} fields; give one per field")]
    LengthMismatch {
        column: &'static str,
        expected: usize,
        got: usize,
    },
    /// A value is NaN or infinite.
    #[error("point {index}: {column} is {value}; give a finite number or drop the point")]
    NonFinite {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// rho_xx is zero or negative.
    #[error(
        "point {index}: rho_xx is {value} ohm per square; a conducting film has rho_xx > 0, so check the sign and the units, or drop the point"
    )]
    NonPositiveResistivity { index: usize, value: f64 },
    /// An uncertainty is not finite and positive.
    #[error("point {index}: the rho_xx uncertainty is {value}; give finite positive uncertainties, or none")]
    InvalidUncertainty { index: usize, value: f64 },
    /// No point at zero field.
    #[error(
        "no point lies at zero field (|B| <= {tolerance_t} T; the lowest |B| is {lowest_field_t} T): d_sigma is sigma(B) - sigma(0), so measure a point at zero field, or raise zero_field_tolerance_T if the zero-field setpoint reads a small residual field (a magnet's remanence)"
    )]
    NoZeroField { tolerance_t: f64, lowest_field_t: f64 },
    /// Too few nonzero fields for the parameters.
    #[error(
        "{points} nonzero fields are within the fitted range, but the fit needs at least {required}; give more low-field points, raise max_field_T, or fit fewer terms"
    )]
    TooFewPoints { points: usize, required: usize },
    /// A setting out of its range.
    #[error("setting {name} is {value}; {requirement}")]
    InvalidSetting {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The least-squares fit failed.
    #[error("the HLN fit failed: {0}")]
    Fit(FitError),
}

/// B_phi values tried for the starting values.
const START_GRID: usize = 25;

/// Fits the HLN correction to `sweep` (see the module documentation).
pub fn fit_weak_localization(
    sweep: &WeakLocalizationSweep,
    settings: &WeakLocalizationSettings,
) -> Result<WeakLocalizationFit, WeakLocalizationError> {
    let n = sweep.field_t.len();
    validate(sweep, settings)?;
    // Conductance and its uncertainty.
    let sigma: Vec<f64> = (0..n)
        .map(|i| {
            let rho_xx = sweep.rho_xx_ohm_sq[i];
            let rho_xy = sweep.rho_xy_ohm.as_ref().map_or(0.0, |v| v[i]);
            rho_xx / (rho_xx * rho_xx + rho_xy * rho_xy)
        })
        .collect();
    let sigma_unc: Option<Vec<f64>> = sweep.rho_xx_unc_ohm_sq.as_ref().map(|unc| {
        (0..n)
            .map(|i| {
                let a = sweep.rho_xx_ohm_sq[i];
                let b = sweep.rho_xy_ohm.as_ref().map_or(0.0, |v| v[i]);
                let denominator = a * a + b * b;
                unc[i] * ((b * b - a * a) / (denominator * denominator)).abs()
            })
            .collect()
    });
    // Zero field.
    let zero: Vec<usize> = (0..n)
        .filter(|&i| sweep.field_t[i].abs() <= settings.zero_field_tolerance_t)
        .collect();
    if zero.is_empty() {
        return Err(WeakLocalizationError::NoZeroField {
            tolerance_t: settings.zero_field_tolerance_t,
            lowest_field_t: sweep.field_t.iter().fold(f64::INFINITY, |acc, b| acc.min(b.abs())),
        });
    }
    let k = zero.len() as f64;
    let sigma_0 = zero.iter().map(|&i| sigma[i]).sum::<f64>() / k;
    let sigma_0_unc = match &sigma_unc {
        Some(unc) => Some(zero.iter().map(|&i| unc[i] * unc[i]).sum::<f64>().sqrt() / k),
        None if zero.len() >= 2 => {
            let variance = zero.iter().map(|&i| (sigma[i] - sigma_0).powi(2)).sum::<f64>() / (k - 1.0);
            Some((variance / k).sqrt())
        }
        None => None,
    };
    let max_field = settings.max_field_t.unwrap_or(f64::INFINITY);
    let fitted: Vec<usize> = (0..n)
        .filter(|&i| {
            let b = sweep.field_t[i].abs();
            b > settings.zero_field_tolerance_t && b <= max_field
        })
        .collect();
    let weighted = sigma_unc.is_some();
    let linear_terms = 1 + usize::from(settings.classical_term) + usize::from(settings.fit_offset);
    let parameters = linear_terms + 1;
    let required = if weighted { parameters + 1 } else { parameters + 2 };
    if fitted.len() < required {
        return Err(WeakLocalizationError::TooFewPoints {
            points: fitted.len(),
            required,
        });
    }
    let fields: Vec<f64> = fitted.iter().map(|&i| sweep.field_t[i]).collect();
    let delta: Vec<f64> = fitted.iter().map(|&i| sigma[i] - sigma_0).collect();
    // Every d_sigma shares the error of sigma(0). With uncertainties the residuals are
    // whitened by the covariance D^2 + u_0^2 1 1^T (D the points' own errors): by
    // Sherman-Morrison its inverse square root is (I - k v v^T) D^-1 with v = D^-1 1 / |D^-1 1|
    // and k = 1 - 1 / sqrt(1 + u_0^2 |D^-1 1|^2), so the common error is not counted as
    // independent information.
    let (weights, common): (Vec<f64>, Option<(Vec<f64>, f64)>) = match &sigma_unc {
        Some(unc) => {
            let weights: Vec<f64> = fitted.iter().map(|&i| 1.0 / unc[i]).collect();
            let u0 = sigma_0_unc.unwrap_or(0.0);
            let s: f64 = weights.iter().map(|w| w * w).sum();
            let direction: Vec<f64> = weights.iter().map(|w| w / s.sqrt()).collect();
            let k = 1.0 - 1.0 / (1.0 + u0 * u0 * s).sqrt();
            (weights, (u0 > 0.0).then_some((direction, k)))
        }
        None => (vec![1.0; fields.len()], None),
    };
    let whiten = |r: &mut [f64]| {
        if let Some((direction, k)) = &common {
            let projection: f64 = direction.iter().zip(r.iter()).map(|(v, x)| v * x).sum();
            for (x, v) in r.iter_mut().zip(direction) {
                *x -= k * projection * v;
            }
        }
    };

    // Parameters: [alpha, ln B_phi, (beta), (offset)].
    let beta_index = settings.classical_term.then_some(2);
    let offset_index = settings.fit_offset.then_some(2 + usize::from(settings.classical_term));
    let unpack = |p: &[f64]| {
        (
            p[0],
            p[1].exp(),
            beta_index.map_or(0.0, |j| p[j]),
            offset_index.map_or(0.0, |j| p[j]),
        )
    };
    let residuals = |p: &[f64], r: &mut [f64]| {
        let (alpha, b_phi, beta, offset) = unpack(p);
        for i in 0..fields.len() {
            r[i] = (model(alpha, b_phi, beta, offset, fields[i]) - delta[i]) * weights[i];
        }
        whiten(r);
    };
    let (l_low, l_high) = settings.phase_coherence_length_bounds_m;
    let ln_b_low = phase_coherence_field_t(l_high).ln();
    let ln_b_high = phase_coherence_field_t(l_low).ln();
    let lowest = fields.iter().fold(f64::INFINITY, |acc, b| acc.min(b.abs()));
    let highest = fields.iter().fold(0.0f64, |acc, b| acc.max(b.abs()));

    // Starts: the linear terms solved exactly on a grid of B_phi.
    let grid_low = (0.01 * lowest).ln().max(ln_b_low);
    let grid_high = (10.0 * highest).ln().min(ln_b_high);
    let mut candidates: Vec<(f64, Vec<f64>)> = (0..START_GRID)
        .filter_map(|j| {
            let ln_b_phi = grid_low + (grid_high - grid_low) * j as f64 / (START_GRID - 1) as f64;
            let b_phi = ln_b_phi.exp();
            let mut design = Matrix::from_fn(fields.len(), linear_terms, |i, col| {
                let b = fields[i];
                let value = match col {
                    0 => HLN_CONDUCTANCE_S * hln_bracket(b_phi, b),
                    1 if settings.classical_term => b * b,
                    _ => 1.0,
                };
                value * weights[i]
            });
            for col in 0..linear_terms {
                let mut column = design.column(col);
                whiten(&mut column);
                for (i, value) in column.into_iter().enumerate() {
                    design[(i, col)] = value;
                }
            }
            let mut target: Vec<f64> = delta.iter().zip(&weights).map(|(d, w)| d * w).collect();
            whiten(&mut target);
            let svd = Svd::new(&design).ok()?;
            let solution = svd.solve_least_squares(&target, 1e-12);
            let fitted_values = design.mul_vec(&solution);
            let cost: f64 = fitted_values.iter().zip(&target).map(|(a, b)| (a - b).powi(2)).sum();
            let mut start = vec![solution[0], ln_b_phi];
            start.extend_from_slice(&solution[1..]);
            cost.is_finite().then_some((cost, start))
        })
        .collect();
    candidates.sort_by(|a, b| a.0.total_cmp(&b.0));
    let starts: Vec<Vec<f64>> = candidates.into_iter().take(3).map(|(_, start)| start).collect();
    if starts.is_empty() {
        return Err(WeakLocalizationError::Fit(FitError::NoStarts));
    }
    let mut lower = vec![f64::NEG_INFINITY, ln_b_low];
    let mut upper = vec![f64::INFINITY, ln_b_high];
    lower.resize(parameters, f64::NEG_INFINITY);
    upper.resize(parameters, f64::INFINITY);
    let bounds = Bounds::new(lower, upper).map_err(WeakLocalizationError::Fit)?;
    let scale_of = |j: usize| {
        starts[0]
            .get(j)
            .map_or(1.0, |v: &f64| if *v != 0.0 { v.abs() } else { 1.0 })
    };
    let mut scales: Vec<f64> = (0..parameters).map(scale_of).collect();
    scales[1] = 1.0;
    let options = LmOptions {
        residuals_are_weighted: weighted,
        parameter_scales: Some(scales),
        ..LmOptions::default()
    };
    let multi = LeastSquares::new(fields.len(), residuals)
        .with_bounds(bounds)
        .minimize_multi_start(&starts, &options, &SameMinimum::default())
        .map_err(WeakLocalizationError::Fit)?;
    let fit = multi.best;
    // Weighted by stated errors, the covariance is (J^T J)^-1 as it stands; when chi^2 / nu
    // exceeds 1 it is multiplied by chi^2 / nu (the Birge ratio squared, Birge 1932, as the
    // Particle Data Group does), never shrunk. Weighted by the scatter, the solver has
    // already scaled it.
    let quality = FitQuality::assess(fit.chi_square, fit.degrees_of_freedom);
    let error_scale = if weighted { quality.birge_ratio } else { 1.0 };
    let standard_errors: Vec<f64> = fit.standard_errors.iter().map(|e| e * error_scale).collect();
    let (alpha, b_phi, beta, offset) = unpack(&fit.parameters);
    let finite = |v: f64| v.is_finite().then_some(v);
    let ln_b_unc = finite(standard_errors[1]);
    let l_phi = phase_coherence_length_m(b_phi);
    let mut warnings = Vec::new();
    let nonzero = || {
        sweep
            .field_t
            .iter()
            .filter(|b| b.abs() > settings.zero_field_tolerance_t)
    };
    let single_field_sign = !(nonzero().any(|b| *b > 0.0) && nonzero().any(|b| *b < 0.0));
    if single_field_sign {
        let sign = if nonzero().any(|b| *b > 0.0) {
            "positive"
        } else {
            "negative"
        };
        warnings.push(format!(
            "single_field_sign: the sweep has {sign} fields only, so rho_xx was taken as even in B as measured, not averaged over both signs: a Hall voltage picked up by misaligned longitudinal contacts (odd in B) stays in it; measure both field signs to remove it"
        ));
    }
    if b_phi < lowest / 3.0 {
        warnings.push(format!(
            "B_phi = {b_phi:.3e} T lies below a third of the lowest nonzero field ({lowest:.3e} T): the cusp is not resolved and l_phi = {l_phi:.3e} m is only a lower bound; measure closer to zero field"
        ));
    }
    if b_phi > highest {
        warnings.push(format!(
            "B_phi = {b_phi:.3e} T lies above the highest fitted field ({highest:.3e} T): every point is in the quadratic regime, where only alpha / B_phi^2 is determined; fit to higher field"
        ));
    }
    let names = ["alpha", "ln B_phi", "beta", "offset"];
    for (j, at_bound) in fit.at_bound.iter().enumerate() {
        if *at_bound {
            let name = if j < 2 {
                names[j]
            } else if Some(j) == beta_index {
                names[2]
            } else {
                names[3]
            };
            warnings.push(format!(
                "{name} ended on its bound and has no uncertainty; widen phase_coherence_length_bounds_m or check the field range"
            ));
        }
    }
    if weighted {
        if let Some(warning) = quality.warning(&fit.residuals, |i| format!("B = {:.5} T", fields[i])) {
            warnings.push(format!(
                "{warning}; add the classical term or lower max_field_T, or check the stated rho_xx uncertainties (rho_xx_ohm_sq_unc), which weight the points"
            ));
        }
    }
    let result_unc = |j: Option<usize>| j.and_then(|j| finite(standard_errors[j]));
    let curve = (0..n)
        .map(|i| {
            let b = sweep.field_t[i];
            let in_fit = b.abs() > settings.zero_field_tolerance_t && b.abs() <= max_field;
            let at_zero = b.abs() <= settings.zero_field_tolerance_t;
            CorrectionPoint {
                field_t: b,
                delta_sigma_s: sigma[i] - sigma_0,
                delta_sigma_unc_s: sigma_unc.as_ref().map(|unc| {
                    if at_zero {
                        unc[i]
                    } else {
                        unc[i].hypot(sigma_0_unc.unwrap_or(0.0))
                    }
                }),
                model_s: if at_zero {
                    0.0
                } else {
                    model(alpha, b_phi, beta, offset, b)
                },
                fitted: in_fit,
            }
        })
        .collect();
    Ok(WeakLocalizationFit {
        alpha,
        alpha_unc: finite(standard_errors[0]),
        phase_coherence_length_m: l_phi,
        phase_coherence_length_unc_m: ln_b_unc.map(|u| 0.5 * u * l_phi),
        phase_coherence_field_t: b_phi,
        phase_coherence_field_unc_t: ln_b_unc.map(|u| u * b_phi),
        classical_s_per_t2: beta_index.map(|_| beta),
        classical_unc_s_per_t2: result_unc(beta_index),
        offset_s: offset_index.map(|_| offset),
        offset_unc_s: result_unc(offset_index),
        zero_field_conductance_s: sigma_0,
        zero_field_conductance_unc_s: sigma_0_unc,
        zero_field_points: zero.len(),
        chi_square: fit.chi_square,
        reduced_chi_square: fit.reduced_chi_square,
        quality: weighted.then_some(quality),
        fitted_points: fields.len(),
        weighted,
        single_field_sign,
        curve,
        warnings,
    })
}

fn validate(sweep: &WeakLocalizationSweep, settings: &WeakLocalizationSettings) -> Result<(), WeakLocalizationError> {
    let n = sweep.field_t.len();
    let check_length = |column: &'static str, got: usize| {
        if got == n {
            Ok(())
        } else {
            Err(WeakLocalizationError::LengthMismatch {
                column,
                expected: n,
                got,
            })
        }
    };
    check_length("rho_xx_ohm_sq", sweep.rho_xx_ohm_sq.len())?;
    if let Some(v) = &sweep.rho_xy_ohm {
        check_length("rho_xy_ohm", v.len())?;
    }
    if let Some(v) = &sweep.rho_xx_unc_ohm_sq {
        check_length("rho_xx_unc_ohm_sq", v.len())?;
    }
    for i in 0..n {
        let mut columns = vec![("field_t", sweep.field_t[i]), ("rho_xx_ohm_sq", sweep.rho_xx_ohm_sq[i])];
        if let Some(v) = &sweep.rho_xy_ohm {
            columns.push(("rho_xy_ohm", v[i]));
        }
        for (column, value) in columns {
            if !value.is_finite() {
                return Err(WeakLocalizationError::NonFinite {
                    index: i,
                    column,
                    value,
                });
            }
        }
        if sweep.rho_xx_ohm_sq[i] <= 0.0 {
            return Err(WeakLocalizationError::NonPositiveResistivity {
                index: i,
                value: sweep.rho_xx_ohm_sq[i],
            });
        }
        if let Some(unc) = &sweep.rho_xx_unc_ohm_sq {
            if !(unc[i].is_finite() && unc[i] > 0.0) {
                return Err(WeakLocalizationError::InvalidUncertainty {
                    index: i,
                    value: unc[i],
                });
            }
        }
    }
    let invalid = |name: &'static str, value: f64, requirement: &'static str| {
        Err(WeakLocalizationError::InvalidSetting {
            name,
            value,
            requirement,
        })
    };
    if !(settings.zero_field_tolerance_t.is_finite() && settings.zero_field_tolerance_t >= 0.0) {
        return invalid(
            "zero_field_tolerance_T",
            settings.zero_field_tolerance_t,
            "give a finite tolerance of 0 or more (1e-3 T is the default)",
        );
    }
    if let Some(max) = settings.max_field_t {
        if !(max.is_finite() && max > settings.zero_field_tolerance_t) {
            return invalid(
                "max_field_T",
                max,
                "give a finite field above the zero-field tolerance, or leave it out to fit every field",
            );
        }
    }
    let (low, high) = settings.phase_coherence_length_bounds_m;
    if !(low.is_finite() && high.is_finite() && low > 0.0 && low < high) {
        return invalid(
            "phase_coherence_length_bounds_m",
            low,
            "give 0 < lower < upper, finite, in metres",
        );
    }
    Ok(())
}
