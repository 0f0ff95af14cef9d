//! `mr.ratio`: the magnetoresistance MR(B) = (rho_xx(B) - rho(0)) / rho(0) of a field sweep.
//!
//! Pure computation: no DataFrames, no I/O. The table glue calls [`magnetoresistance`] once
//! per sample and temperature with that sweep's [`SweepPoint`]s and writes the
//! [`MrCurve`]'s points as rows and its zero-field resistivity and extremes as the summary.
//!
//! # Steps and the choices made
//!
//! 1. **Symmetrization.** The sweep is symmetrized by `mobilis_physics::sweep::symmetrize`
//!    (the same as `mr.symmetrize`): MR is computed from the even part of rho_xx on the
//!    common |B| grid, so a Hall voltage picked up by the longitudinal contacts (odd in B)
//!    does not enter it. A sweep with one field sign only (most superconducting-magnet runs)
//!    is used as measured, rho_xx being even in B: the curve says so
//!    ([`MrCurve::single_field_sign`]) and warns that such a pickup stays in it.
//! 2. **rho(0)**, by [`ZeroFieldResistivity`]:
//!    - `Measured` (default): the mean rho_xx of the points with |B| at or below the
//!      zero-field tolerance of the symmetrization (`zero_field_tolerance_T`, default
//!      1e-4 T; the zero-field node of the symmetrized sweep). A magnet's remanence of a few
//!      mT at its nominal zero is a field unless that tolerance is raised above it. Its
//!      uncertainty is that of a merged point of the sweep
//!      (`mobilis_physics::sweep::repeated_readings_uncertainty`): when the points carry
//!      uncertainties, the larger of the propagated one (sqrt(sum u_i^2) / k) and the
//!      standard error of the mean from their scatter, so that zero-field readings that
//!      disagree beyond their uncertainties widen it (JCGM 100:2008, GUM 4.2.3);
//!      otherwise that standard error for two or more points, otherwise none. A sweep without such a point is refused: MR is a ratio to
//!      rho(0), and a value invented for it would shift every point.
//!    - `Extrapolated`: rho_xx = rho(0) + c B^2 fitted by weighted least squares
//!      (`mobilis_numerics::fit::fit_line` in B^2) to the lowest grid fields, rho(0) the
//!      intercept and its standard error. Any Drude conductor's rho_xx is even and analytic
//!      in B, so its low-field expansion starts with B^2 (classical MR goes as (mu B)^2
//!      while mu B << 1); the fit uses the [`DEFAULT_EXTRAPOLATION_POINTS`] lowest fields
//!      by default, or those up to a given field. A weighted fit whose chi-square per degree
//!      of freedom is above 1 + 4 sqrt(2 / nu) (four standard deviations of that statistic)
//!      raises a warning: the range is not quadratic and should be narrowed.
//! 3. **MR.** At each grid field, MR = (rho_xx(B) - rho(0)) / rho(0); MR(0) = 0 exactly.
//!    With uncertainties, u_MR^2 = (u(B) / rho(0))^2 + (rho_xx(B) u(0) / rho(0)^2)^2
//!    (first order, rho_xx(B) and rho(0) taken as independent; at B = 0 the two are the same
//!    number and u_MR = 0). The covariance that interpolation from the zero-field node or the
//!    extrapolation shares between rho_xx(B) and rho(0) at the lowest fields is positive, so
//!    ignoring it overstates u_MR slightly there and nowhere understates it. Without
//!    uncertainties on the points, MR carries none.
//! 4. **Warnings.** A negative MR beyond two standard uncertainties (or, without
//!    uncertainties, below -[`NEGATIVE_MR_FLOOR`]): independent Drude carriers never give
//!    one (the two-band MR is sigma_1 sigma_2 (mu_1 - mu_2)^2 B^2 over a positive
//!    denominator, with signed mobilities), so it points at weak localization, spin
//!    scattering, or a drifting temperature between the zero-field and the field points.

use mobilis_numerics::fit::{fit_line, FitError};
use mobilis_physics::sweep::{
    repeated_readings_uncertainty, symmetrize, SweepError, SweepPoint, SweepUse, SymmetrizeSettings, Symmetrized,
};

/// Grid fields the default extrapolation uses.
pub const DEFAULT_EXTRAPOLATION_POINTS: usize = 5;

/// Without uncertainties, an MR below minus this counts as negative (above the rounding of
/// a ratio of two resistivities by many orders, below any resolved MR).
pub const NEGATIVE_MR_FLOOR: f64 = 1e-9;

/// Where rho(0) comes from.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum ZeroFieldResistivity {
    /// The mean of the points at |B| <= the zero-field tolerance (default).
    #[default]
    Measured,
    /// rho_xx = rho(0) + c B^2 fitted to the lowest `points` grid fields, or to those at or
    /// below `max_field_t` when given (then `points` is ignored).
    Extrapolated { points: usize, max_field_t: Option<f64> },
}

impl ZeroFieldResistivity {
    /// The method's name in the summary: "zero_field" or "quadratic_extrapolation".
    pub fn name(&self) -> &'static str {
        match self {
            ZeroFieldResistivity::Measured => "zero_field",
            ZeroFieldResistivity::Extrapolated { .. } => "quadratic_extrapolation",
        }
    }
}

/// Settings of [`magnetoresistance`].
#[derive(Debug, Clone, PartialEq, Default)]
pub struct RatioSettings {
    /// Symmetrization (defaults of `mobilis_physics::sweep::SymmetrizeSettings`).
    pub sweep: SymmetrizeSettings,
    /// Default: measured.
    pub zero_field: ZeroFieldResistivity,
}

/// rho(0) and how it was found.
#[derive(Debug, Clone, PartialEq)]
pub struct ZeroFieldValue {
    /// ohm per square.
    pub rho_ohm_sq: f64,
    pub rho_unc_ohm_sq: Option<f64>,
    /// "zero_field" or "quadratic_extrapolation".
    pub method: &'static str,
    /// Measured points averaged, or grid points fitted.
    pub points: usize,
    /// Extrapolation only: the coefficient c of B^2, ohm per square per T^2, and its
    /// standard error.
    pub quadratic_coefficient: Option<(f64, f64)>,
    /// Extrapolation only: chi-square per degree of freedom of the quadratic fit.
    pub reduced_chi_square: Option<f64>,
    /// The highest |B| that entered rho(0), T (0 for the measured value).
    pub max_field_t: f64,
}

/// MR at one |B|.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MrPoint {
    /// |B|, T.
    pub field_t: f64,
    /// Symmetrized rho_xx, ohm per square.
    pub rho_xx_ohm_sq: f64,
    pub rho_xx_unc_ohm_sq: Option<f64>,
    /// (rho_xx - rho(0)) / rho(0), dimensionless.
    pub mr: f64,
    pub mr_unc: Option<f64>,
}

/// The magnetoresistance of one sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct MrCurve {
    /// Ascending in |B|.
    pub points: Vec<MrPoint>,
    pub zero_field: ZeroFieldValue,
    /// The highest grid field and the MR there.
    pub max_field_t: f64,
    pub mr_at_max_field: f64,
    /// The largest MR of the grid and its field.
    pub max_mr: f64,
    pub max_mr_field_t: f64,
    pub symmetrized: Symmetrized,
    /// True when the sweep had one field sign and was used as measured.
    pub single_field_sign: bool,
    pub warnings: Vec<String>,
}

/// Why MR cannot be computed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum RatioError {
    /// The sweep could not be symmetrized (one field sign only, rho_xx <= 0, NaN ...).
    #[error("{0}")]
    Sweep(#[from] SweepError),
    /// rho(0) is to be measured but no point is at zero field.
    #[error(
        "the sweep has no point at zero field (|B| <= {tolerance_t} T; the lowest |B| is {lowest_field_t} T), so rho(0) is unknown; measure at zero field, raise zero_field_tolerance_T if the lowest field is zero within the magnet's remanence, or extrapolate rho(0) quadratically from the lowest fields"
    )]
    NoZeroField { tolerance_t: f64, lowest_field_t: f64 },
    /// Too few grid fields for the extrapolation.
    #[error(
        "the quadratic extrapolation of rho(0) needs at least {required} field points (3 without uncertainties, 2 with) and the chosen range has {available}; raise the number of points or the field limit of the extrapolation"
    )]
    TooFewForExtrapolation { available: usize, required: usize },
    /// A setting out of its range.
    #[error("setting {name} is {value}; {requirement}")]
    InvalidSetting {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The extrapolation failed.
    #[error("the quadratic extrapolation of rho(0) failed: {0}")]
    Fit(FitError),
    /// The extrapolated rho(0) is not positive.
    #[error(
        "the quadratic extrapolation gives rho(0) = {value} ohm/sq, which no sample has; the chosen fields are not in the quadratic regime, so extrapolate from fewer, lower fields or measure at zero field"
    )]
    NonPositiveExtrapolation { value: f64 },
}

/// The MR of one sweep (see the module documentation).
pub fn magnetoresistance(points: &[SweepPoint], settings: &RatioSettings) -> Result<MrCurve, RatioError> {
    if let ZeroFieldResistivity::Extrapolated { points, max_field_t } = &settings.zero_field {
        if max_field_t.is_none() && *points < 2 {
            return Err(RatioError::InvalidSetting {
                name: "points",
                value: *points as f64,
                requirement: "give at least 2 field points for the extrapolation (3 without uncertainties)",
            });
        }
        if let Some(limit) = max_field_t {
            if !(limit.is_finite() && *limit > 0.0) {
                return Err(RatioError::InvalidSetting {
                    name: "max_field_t",
                    value: *limit,
                    requirement: "give a finite positive field in tesla",
                });
            }
        }
    }
    let symmetrized = symmetrize(points, &settings.sweep)?;
    let zero_field = match &settings.zero_field {
        ZeroFieldResistivity::Measured => measured_zero_field(points, &settings.sweep)?,
        ZeroFieldResistivity::Extrapolated { points, max_field_t } => {
            extrapolated_zero_field(&symmetrized, *points, *max_field_t)?
        }
    };
    Ok(curve(symmetrized, zero_field))
}

/// The mean of the measured points at zero field.
fn measured_zero_field(points: &[SweepPoint], sweep: &SymmetrizeSettings) -> Result<ZeroFieldValue, RatioError> {
    let tolerance = sweep.zero_field_tolerance_t;
    let zero: Vec<&SweepPoint> = points.iter().filter(|p| p.field_t.abs() <= tolerance).collect();
    if zero.is_empty() {
        return Err(RatioError::NoZeroField {
            tolerance_t: tolerance,
            lowest_field_t: points.iter().map(|p| p.field_t.abs()).fold(f64::INFINITY, f64::min),
        });
    }
    let k = zero.len() as f64;
    let values: Vec<f64> = zero.iter().map(|p| p.rho_xx_ohm_sq).collect();
    let mean = values.iter().sum::<f64>() / k;
    // The core has validated the points: uncertainties are on all of them or on none.
    let stated: Option<Vec<f64>> = zero.iter().map(|p| p.uncertainty.map(|u| u.rho_xx_ohm_sq)).collect();
    let unc = repeated_readings_uncertainty(&values, stated.as_deref());
    Ok(ZeroFieldValue {
        rho_ohm_sq: mean,
        rho_unc_ohm_sq: unc,
        method: ZeroFieldResistivity::Measured.name(),
        points: zero.len(),
        quadratic_coefficient: None,
        reduced_chi_square: None,
        max_field_t: 0.0,
    })
}

/// rho(0) from rho_xx = a + c B^2 over the lowest grid fields.
#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > y)` refuses NaN too, in one test"
)]
fn extrapolated_zero_field(
    symmetrized: &Symmetrized,
    count: usize,
    max_field_t: Option<f64>,
) -> Result<ZeroFieldValue, RatioError> {
    let grid = &symmetrized.points;
    let chosen: Vec<_> = match max_field_t {
        Some(limit) => grid.iter().filter(|p| p.field_t <= limit).collect(),
        None => grid.iter().take(count).collect(),
    };
    let weighted = grid.first().is_some_and(|p| p.uncertainty.is_some());
    let required = if weighted { 2 } else { 3 };
    if chosen.len() < required {
        return Err(RatioError::TooFewForExtrapolation {
            available: chosen.len(),
            required,
        });
    }
    let x: Vec<f64> = chosen.iter().map(|p| p.field_t * p.field_t).collect();
    let y: Vec<f64> = chosen.iter().map(|p| p.rho_xx_ohm_sq).collect();
    let sigma: Option<Vec<f64>> = weighted.then(|| {
        chosen
            .iter()
            .map(|p| p.uncertainty.map_or(f64::NAN, |u| u.rho_xx_ohm_sq))
            .collect()
    });
    let line = fit_line(&x, &y, sigma.as_deref()).map_err(RatioError::Fit)?;
    if !(line.intercept > 0.0) {
        return Err(RatioError::NonPositiveExtrapolation { value: line.intercept });
    }
    let unc = line.intercept_unc;
    Ok(ZeroFieldValue {
        rho_ohm_sq: line.intercept,
        rho_unc_ohm_sq: unc.is_finite().then_some(unc),
        method: ZeroFieldResistivity::Extrapolated {
            points: count,
            max_field_t,
        }
        .name(),
        points: chosen.len(),
        quadratic_coefficient: Some((line.slope, line.slope_unc)),
        reduced_chi_square: Some(line.reduced_chi_square),
        max_field_t: chosen.iter().map(|p| p.field_t).fold(0.0, f64::max),
    })
}

/// MR on the symmetrized grid, extremes and warnings.
fn curve(symmetrized: Symmetrized, zero_field: ZeroFieldValue) -> MrCurve {
    let rho0 = zero_field.rho_ohm_sq;
    let u0 = zero_field.rho_unc_ohm_sq;
    let measured = zero_field.method == ZeroFieldResistivity::Measured.name();
    let points: Vec<MrPoint> = symmetrized
        .points
        .iter()
        .map(|p| {
            // A measured rho(0) is the zero-field grid point itself.
            let at_zero = p.field_t == 0.0 && measured;
            let u = p.uncertainty.map(|u| u.rho_xx_ohm_sq);
            let mr = if at_zero { 0.0 } else { (p.rho_xx_ohm_sq - rho0) / rho0 };
            let mr_unc = u.map(|u| {
                if at_zero {
                    0.0
                } else {
                    let from_zero = u0.map_or(0.0, |u0| p.rho_xx_ohm_sq * u0 / (rho0 * rho0));
                    (u / rho0).hypot(from_zero)
                }
            });
            MrPoint {
                field_t: p.field_t,
                rho_xx_ohm_sq: p.rho_xx_ohm_sq,
                rho_xx_unc_ohm_sq: u,
                mr,
                mr_unc,
            }
        })
        .collect();
    let last = points
        .last()
        .copied()
        .expect("a symmetrized sweep has at least one grid field");
    let (max_mr, max_mr_field_t) = points.iter().fold((f64::NEG_INFINITY, 0.0), |(best, at), p| {
        if p.mr > best {
            (p.mr, p.field_t)
        } else {
            (best, at)
        }
    });

    let mut warnings = symmetrized.warnings(SweepUse::EvenRhoXx);
    let negative: Vec<&MrPoint> = points
        .iter()
        .filter(|p| match p.mr_unc {
            Some(u) => p.mr < -2.0 * u,
            None => p.mr < -NEGATIVE_MR_FLOOR,
        })
        .collect();
    if let Some(most) = negative.iter().min_by(|a, b| a.mr.total_cmp(&b.mr)) {
        warnings.push(format!(
            "MR is negative at {} field(s), down to {:.4e} at {:.4} T; independent carriers give none, so this is weak localization, magnetic scattering, or a temperature drift between the zero-field and the field readings",
            negative.len(),
            most.mr,
            most.field_t
        ));
    }
    if let Some(chi) = zero_field.reduced_chi_square {
        let nu = zero_field.points.saturating_sub(2) as f64;
        let weighted = symmetrized.points.first().is_some_and(|p| p.uncertainty.is_some());
        if weighted && nu > 0.0 && chi > 1.0 + 4.0 * (2.0 / nu).sqrt() {
            warnings.push(format!(
                "rho_xx is not quadratic in B up to {:.4} T (chi-square per degree of freedom {chi:.3} of the extrapolation); extrapolate rho(0) from fewer, lower fields",
                zero_field.max_field_t
            ));
        }
    }
    MrCurve {
        max_field_t: last.field_t,
        mr_at_max_field: last.mr,
        max_mr,
        max_mr_field_t,
        points,
        zero_field,
        single_field_sign: symmetrized.single_field_sign,
        symmetrized,
        warnings,
    }
}

#[cfg(test)]
mod tests;
