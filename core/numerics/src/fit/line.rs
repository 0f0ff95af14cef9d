//! The weighted straight line y = intercept + slope x in closed form.

use super::error::FitError;

/// A fitted line and its uncertainties.
#[derive(Debug, Clone, PartialEq)]
pub struct LineFit {
    pub slope: f64,
    pub intercept: f64,
    /// Standard error of the slope.
    pub slope_unc: f64,
    /// Standard error of the intercept.
    pub intercept_unc: f64,
    /// Covariance of slope and intercept.
    pub slope_intercept_covariance: f64,
    /// sum w_i (y_i - a - b x_i)^2, w_i = 1/sigma_i^2 (1 without uncertainties).
    pub chi_square: f64,
    /// Points minus 2.
    pub degrees_of_freedom: usize,
    /// chi^2 / nu (NaN for two weighted points).
    pub reduced_chi_square: f64,
    /// 1 - sum w r^2 / sum w (y - y_mean)^2 (weighted mean; 1 for a perfect fit).
    pub r_squared: f64,
    /// The weighted mean of x, where slope and intercept are uncorrelated.
    pub x_mean: f64,
    pub points: usize,
    /// True when uncertainties were given: the standard errors then follow from them
    /// alone. Without, they are scaled by the scatter (chi^2 / nu).
    pub weighted: bool,
}

impl LineFit {
    /// intercept + slope x.
    pub fn evaluate(&self, x: f64) -> f64 {
        self.intercept + self.slope * x
    }

    /// Standard error of the line's value at x (from the slope-intercept covariance).
    pub fn evaluate_unc(&self, x: f64) -> f64 {
        (self.intercept_unc * self.intercept_unc
            + 2.0 * x * self.slope_intercept_covariance
            + x * x * self.slope_unc * self.slope_unc)
            .max(0.0)
            .sqrt()
    }
}

/// Fits y = a + b x. With `sigma` (the standard uncertainty of each y) the fit is weighted
/// by 1/sigma^2 and the standard errors are those the uncertainties imply (at least two
/// points); without, every point has weight 1 and the standard errors come from the
/// scatter about the line (at least three points).
///
/// With W = sum w, x_m = sum w x / W, y_m = sum w y / W and S_xx = sum w (x - x_m)^2:
/// b = sum w (x - x_m)(y - y_m) / S_xx, a = y_m - b x_m, var b = 1/S_xx,
/// var a = 1/W + x_m^2 / S_xx, cov(a, b) = -x_m / S_xx (each times chi^2/nu when unweighted);
/// the standard result of weighted least squares (e.g. Bevington and Robinson, Data
/// Reduction and Error Analysis for the Physical Sciences, ch. 6), written about the mean.
pub fn fit_line(x: &[f64], y: &[f64], sigma: Option<&[f64]>) -> Result<LineFit, FitError> {
    let points = x.len();
    if y.len() != points {
        return Err(FitError::LengthMismatch {
            what: "y",
            expected: points,
            got: y.len(),
        });
    }
    if let Some(sigma) = sigma {
        if sigma.len() != points {
            return Err(FitError::LengthMismatch {
                what: "sigma",
                expected: points,
                got: sigma.len(),
            });
        }
    }
    for index in 0..points {
        if !x[index].is_finite() {
            return Err(FitError::InvalidPoint {
                index,
                what: "x",
                value: x[index],
            });
        }
        if !y[index].is_finite() {
            return Err(FitError::InvalidPoint {
                index,
                what: "y",
                value: y[index],
            });
        }
        if let Some(sigma) = sigma {
            if !(sigma[index].is_finite() && sigma[index] > 0.0) {
                return Err(FitError::InvalidPoint {
                    index,
                    what: "the uncertainty of y",
                    value: sigma[index],
                });
            }
        }
    }
    let required = if sigma.is_some() { 2 } else { 3 };
    if points < required {
        return Err(FitError::TooFewPoints { points, required });
    }
    let weights: Vec<f64> = match sigma {
        Some(sigma) => sigma.iter().map(|s| 1.0 / (s * s)).collect(),
        None => vec![1.0; points],
    };
    let total: f64 = weights.iter().sum();
    let x_mean = weights.iter().zip(x).map(|(w, v)| w * v).sum::<f64>() / total;
    let y_mean = weights.iter().zip(y).map(|(w, v)| w * v).sum::<f64>() / total;
    let mut sxx = 0.0;
    let mut sxy = 0.0;
    let mut syy = 0.0;
    for i in 0..points {
        let dx = x[i] - x_mean;
        let dy = y[i] - y_mean;
        sxx += weights[i] * dx * dx;
        sxy += weights[i] * dx * dy;
        syy += weights[i] * dy * dy;
    }
    let spread = x.iter().fold(0.0f64, |acc, v| acc.max((v - x_mean).abs()));
    if sxx == 0.0 || spread <= 8.0 * f64::EPSILON * x_mean.abs() {
        return Err(FitError::NoSpread);
    }
    let slope = sxy / sxx;
    let intercept = y_mean - slope * x_mean;
    let chi_square: f64 = (0..points)
        .map(|i| {
            let residual = y[i] - intercept - slope * x[i];
            weights[i] * residual * residual
        })
        .sum();
    let degrees_of_freedom = points - 2;
    let reduced_chi_square = if degrees_of_freedom > 0 {
        chi_square / degrees_of_freedom as f64
    } else {
        f64::NAN
    };
    let variance_scale = if sigma.is_some() { 1.0 } else { reduced_chi_square };
    let slope_variance = variance_scale / sxx;
    let intercept_variance = variance_scale * (1.0 / total + x_mean * x_mean / sxx);
    let r_squared = if syy > 0.0 { 1.0 - chi_square / syy } else { 1.0 };
    Ok(LineFit {
        slope,
        intercept,
        slope_unc: slope_variance.sqrt(),
        intercept_unc: intercept_variance.sqrt(),
        slope_intercept_covariance: -variance_scale * x_mean / sxx,
        chi_square,
        degrees_of_freedom,
        reduced_chi_square,
        r_squared,
        x_mean,
        points,
        weighted: sigma.is_some(),
    })
}
