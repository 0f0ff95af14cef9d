//! The N-carrier fit engine: the least-squares problem of several carriers whose
//! conductivity tensors add, its analytic Jacobian, and the bounded multi-start
//! Levenberg-Marquardt run around it. `spectrum.multi_carrier_fit` uses it for any N with
//! residuals in conductivity, `mr.two_band_fit` for N = 2 with residuals in resistivity; the
//! model and its derivatives are written once, here.
//!
//! # Model and parameters
//!
//! Each carrier adds a Lorentzian of width 1/mu to the conductivity tensor
//! (`crate::forward::tensor`, after Beck and Anderson, J. Appl. Phys. 62, 541, 1987). The
//! parameters are (ln n_1, ln mu_1, ln n_2, ln mu_2, ...), the kinds (signs) fixed: logarithms
//! keep densities and mobilities positive, make the steps scale-free over the decades they
//! span and the Gaussian uncertainties relative ones.
//!
//! # The objective
//!
//! The residuals are (model - data) of both tensor components per point, whitened by the
//! point's 2 x 2 covariance ([`TensorData`]), in the tensor the caller chooses
//! ([`TensorSpace`]). The Jacobian is analytic: with g = e n mu and x = (mu B)^2, per
//! carrier d sigma_xx / d ln n = g / (1 + x), d sigma_xx / d ln mu = g (1 - x) / (1 + x)^2,
//! d sigma_xy / d ln n = s g mu B / (1 + x), d sigma_xy / d ln mu = 2 s g mu B / (1 + x)^2.
//! In resistivity these are carried through the inversion rho = sigma^-1 by its Jacobian
//! 1/D^2 [[b^2 - a^2, -2ab], [-2ab, a^2 - b^2]] at (a, b) = (sigma_xx, sigma_xy),
//! D = a^2 + b^2. The whitening is linear, so it applies to derivative pairs as to residuals.

use mobilis_numerics::fit::{
    minimize_multi_start_parallel, Bounds, FitError, LeastSquares, LmOptions, MultiStartFit, SameMinimum,
};
use mobilis_numerics::linalg::Matrix;

use crate::forward::tensor::{sum_conductivity, Carrier, CarrierKind};
use crate::tensor_data::TensorData;

/// The tensor in which the residuals are taken; the data's xx and xy are in it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TensorSpace {
    /// sigma_xx and sigma_xy in S, where the carriers add.
    Conductivity,
    /// rho_xx in ohm per square and rho_xy in ohm, as measured.
    Resistivity,
}

/// The box of the fit in ln n and ln mu.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LogBounds {
    pub ln_density: (f64, f64),
    pub ln_mobility: (f64, f64),
}

/// A density or mobility range that is not a range: its setting's name and the offending
/// value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct InvalidRange {
    pub name: &'static str,
    pub value: f64,
}

impl InvalidRange {
    /// What the user should give instead.
    pub const REQUIREMENT: &'static str = "give finite positive lower and upper limits, lower < upper";
}

impl LogBounds {
    /// The box from the settings `sheet_density_bounds_m2` and `mobility_bounds_m2_per_vs`
    /// (checked in that order).
    pub fn new(sheet_density_m2: (f64, f64), mobility_m2_per_vs: (f64, f64)) -> Result<LogBounds, InvalidRange> {
        let range = |name: &'static str, (low, high): (f64, f64)| -> Result<(f64, f64), InvalidRange> {
            if !(low.is_finite() && high.is_finite() && low > 0.0 && high > low) {
                return Err(InvalidRange {
                    name,
                    value: if low.is_finite() && low > 0.0 { high } else { low },
                });
            }
            Ok((low.ln(), high.ln()))
        };
        Ok(LogBounds {
            ln_density: range("sheet_density_bounds_m2", sheet_density_m2)?,
            ln_mobility: range("mobility_bounds_m2_per_vs", mobility_m2_per_vs)?,
        })
    }

    pub fn clamp_density(&self, ln_n: f64) -> f64 {
        ln_n.clamp(self.ln_density.0, self.ln_density.1)
    }

    pub fn clamp_mobility(&self, ln_mu: f64) -> f64 {
        ln_mu.clamp(self.ln_mobility.0, self.ln_mobility.1)
    }
}

/// The carriers of a parameter vector (ln n_1, ln mu_1, ln n_2, ln mu_2, ...).
pub fn carriers_of(kinds: &[CarrierKind], parameters: &[f64]) -> Vec<Carrier> {
    kinds
        .iter()
        .enumerate()
        .map(|(i, &kind)| Carrier {
            kind,
            sheet_density_m2: parameters[2 * i].exp(),
            mobility_m2_per_vs: parameters[2 * i + 1].exp(),
        })
        .collect()
}

/// The least-squares problem of carriers of `kinds` fitted to `data` in `space`.
#[derive(Debug, Clone, Copy)]
pub struct CarrierModel<'a> {
    pub data: &'a TensorData,
    pub kinds: &'a [CarrierKind],
    pub space: TensorSpace,
}

impl CarrierModel<'_> {
    /// Whitened residuals (model - data) of all points at `parameters`.
    pub fn residuals(&self, parameters: &[f64], out: &mut [f64]) {
        let data = self.data;
        let carriers = carriers_of(self.kinds, parameters);
        for (k, &field) in data.fields_t.iter().enumerate() {
            let sigma = sum_conductivity(&carriers, field);
            let (model_xx, model_xy) = match self.space {
                TensorSpace::Conductivity => (sigma.sigma_xx_s, sigma.sigma_xy_s),
                TensorSpace::Resistivity => {
                    let rho = sigma.to_resistivity();
                    (rho.rho_xx_ohm_sq, rho.rho_xy_ohm)
                }
            };
            let offset = data.offsets[k];
            let w = &data.whitening[k];
            w.apply(
                model_xx - data.xx[k],
                model_xy - data.xy[k],
                &mut out[offset..offset + w.count()],
            );
        }
    }

    /// The analytic Jacobian of [`CarrierModel::residuals`] (module documentation).
    pub fn jacobian(&self, parameters: &[f64], jacobian: &mut Matrix) {
        let data = self.data;
        let carriers = carriers_of(self.kinds, parameters);
        // What each carrier's derivatives share at every field: g = e n mu and the signed
        // factors s g and 2 s g, formed once (each product as the expressions below group
        // it, so every derivative has the same bits as when formed at each field).
        let factors: Vec<(f64, f64, f64, f64)> = carriers
            .iter()
            .map(|carrier| {
                let g = carrier.sheet_conductance_s();
                let s = carrier.kind.charge_sign();
                (carrier.mobility_m2_per_vs, g, s * g, 2.0 * s * g)
            })
            .collect();
        let mut pair = [0.0; 2];
        for (k, &field) in data.fields_t.iter().enumerate() {
            let inversion = match self.space {
                TensorSpace::Conductivity => None,
                TensorSpace::Resistivity => {
                    let total = sum_conductivity(&carriers, field);
                    let (a, b) = (total.sigma_xx_s, total.sigma_xy_s);
                    let d2 = (a * a + b * b).powi(2);
                    Some([
                        [(b * b - a * a) / d2, -2.0 * a * b / d2],
                        [-2.0 * a * b / d2, (a * a - b * b) / d2],
                    ])
                }
            };
            let offset = data.offsets[k];
            let w = &data.whitening[k];
            for (i, &(mobility, g, signed_g, twice_signed_g)) in factors.iter().enumerate() {
                let mu_b = mobility * field;
                let x = mu_b * mu_b;
                let denominator = 1.0 + x;
                let derivatives = [
                    (g / denominator, signed_g * mu_b / denominator),
                    (
                        g * (1.0 - x) / (denominator * denominator),
                        twice_signed_g * mu_b / (denominator * denominator),
                    ),
                ];
                for (p, (d_xx, d_xy)) in derivatives.into_iter().enumerate() {
                    let (d_xx, d_xy) = match &inversion {
                        None => (d_xx, d_xy),
                        Some(m) => (m[0][0] * d_xx + m[0][1] * d_xy, m[1][0] * d_xx + m[1][1] * d_xy),
                    };
                    w.apply(d_xx, d_xy, &mut pair);
                    for (r, &value) in pair[..w.count()].iter().enumerate() {
                        jacobian.row_mut(offset + r)[2 * i + p] = value;
                    }
                }
            }
        }
    }

    /// Runs the bounded Levenberg-Marquardt solver from every start (on the rayon pool, with
    /// the result of running them one after the other) and keeps the converged run of lowest
    /// chi-square.
    pub fn fit(
        &self,
        starts: &[Vec<f64>],
        bounds: &LogBounds,
        max_iterations: usize,
    ) -> Result<MultiStartFit, FitError> {
        let n = self.kinds.len();
        let lower: Vec<f64> = (0..n)
            .flat_map(|_| [bounds.ln_density.0, bounds.ln_mobility.0])
            .collect();
        let upper: Vec<f64> = (0..n)
            .flat_map(|_| [bounds.ln_density.1, bounds.ln_mobility.1])
            .collect();
        let box_bounds = Bounds::new(lower, upper)?;
        let problem = || {
            LeastSquares::new(self.data.residual_count, |p: &[f64], r: &mut [f64]| {
                self.residuals(p, r)
            })
            .with_jacobian(|p: &[f64], j: &mut Matrix| self.jacobian(p, j))
            .with_bounds(box_bounds.clone())
        };
        let options = LmOptions {
            residuals_are_weighted: self.data.weighted,
            max_iterations,
            // ln n and ln mu have a natural scale of 1 (a factor e).
            parameter_scales: Some(vec![1.0; 2 * n]),
            ..LmOptions::default()
        };
        minimize_multi_start_parallel(problem, starts, &options, &SameMinimum::default())
    }
}

/// The carrier indices of a parameter vector in output order: electrons first, then holes,
/// each kind by increasing mobility.
pub fn output_order(kinds: &[CarrierKind], parameters: &[f64]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..kinds.len()).collect();
    order.sort_by(|&a, &b| {
        kinds[a]
            .cmp(&kinds[b])
            .then(parameters[2 * a + 1].total_cmp(&parameters[2 * b + 1]))
    });
    order
}

/// How many converged starts reached the best minimum. Carriers of the same kind are
/// interchangeable, so each run's carriers are put in output order before the comparison;
/// otherwise a run that found the same carriers with their labels swapped would count as
/// another minimum. Agreement means a chi-square within 1e-3 of the noise variance and
/// every parameter within 0.1 standard errors (the tolerances of
/// `mobilis_numerics::fit::SameMinimum`).
pub fn starts_at_best_minimum(kinds: &[CarrierKind], run: &MultiStartFit) -> usize {
    run.starts_at_best_minimum_reordered(|parameters: &[f64]| -> Vec<usize> {
        output_order(kinds, parameters)
            .iter()
            .flat_map(|&i| [2 * i, 2 * i + 1])
            .collect()
    })
}

#[cfg(test)]
mod tests {
    //! The Jacobian is checked against finite differences in both spaces by the fits that
    //! use it (spectrum in conductivity, two-band in resistivity, with uncertainties).
    use super::*;

    #[test]
    fn output_order_puts_electrons_first_then_mobility() {
        let kinds = [CarrierKind::Hole, CarrierKind::Electron, CarrierKind::Electron];
        let p = [0.0, 1.0, 0.0, 2.0, 0.0, -1.0];
        assert_eq!(output_order(&kinds, &p), vec![2, 1, 0]);
    }
}
