//! The least-squares problem of the multi-carrier fit: validated data, the whitening of
//! each point's residuals, and the residuals and analytic Jacobian in the log parameters.

use mobilis_core::forward::tensor::{sum_conductivity, Carrier, CarrierKind};
use mobilis_core::linalg::Matrix;
use mobilis_core::sweep::TensorPoint;

use super::MultiCarrierError;

/// Turns the model-minus-data pair (d_xx, d_xy) of one field into independent unit-variance
/// residuals: L^-1 d with L the lower Cholesky factor of the point's 2 x 2 covariance
/// [[a^2, c a b], [c a b, b^2]], i.e. r_1 = d_xx / a, r_2 = (d_xy - c b r_1) / (b s),
/// s = sqrt(1 - c^2). At zero field only r_1 is used.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Whitening {
    a: f64,
    b: f64,
    c: f64,
    s: f64,
    uses_xy: bool,
}

impl Whitening {
    fn new(a: f64, b: f64, c: f64, uses_xy: bool) -> Self {
        Whitening {
            a,
            b,
            c,
            s: (1.0 - c * c).sqrt(),
            uses_xy,
        }
    }

    /// How many residuals the point gives.
    pub(super) fn count(&self) -> usize {
        1 + usize::from(self.uses_xy)
    }

    /// Writes the whitened residuals of (d_xx, d_xy) into `out` (1 or 2 entries).
    pub(super) fn apply(&self, d_xx: f64, d_xy: f64, out: &mut [f64]) {
        let r1 = d_xx / self.a;
        out[0] = r1;
        if self.uses_xy {
            out[1] = (d_xy - self.c * self.b * r1) / (self.b * self.s);
        }
    }
}

/// Validated sheet conductivity data.
#[derive(Debug, Clone)]
pub(super) struct Data {
    pub fields_t: Vec<f64>,
    pub sigma_xx_s: Vec<f64>,
    pub sigma_xy_s: Vec<f64>,
    pub whitening: Vec<Whitening>,
    /// Index of each point's first residual.
    pub offsets: Vec<usize>,
    pub residual_count: usize,
    /// True when the points carried uncertainties (the residuals are (model - data) / sigma).
    pub weighted: bool,
    /// Largest |B|, T.
    pub max_field_t: f64,
    /// Smallest nonzero |B|, T.
    pub min_field_t: f64,
}

impl Data {
    /// Checks the points and builds the whitening (see the parent module for the weights
    /// used without uncertainties).
    pub(super) fn new(points: &[TensorPoint]) -> Result<Data, MultiCarrierError> {
        if points.is_empty() {
            return Err(MultiCarrierError::NoPoints);
        }
        let mut with = 0;
        for (index, point) in points.iter().enumerate() {
            for (column, value) in [
                ("field_T", point.field_t),
                ("sigma_xx_S", point.sigma_xx_s),
                ("sigma_xy_S", point.sigma_xy_s),
            ] {
                if !value.is_finite() {
                    return Err(MultiCarrierError::NonFinite { index, column, value });
                }
            }
            if point.sigma_xx_s <= 0.0 {
                return Err(MultiCarrierError::NonPositiveSigmaXx {
                    index,
                    value: point.sigma_xx_s,
                });
            }
            if let Some(unc) = point.uncertainty {
                with += 1;
                let invalid =
                    |column: &'static str, value: f64| MultiCarrierError::InvalidUncertainty { index, column, value };
                if !(unc.sigma_xx_s.is_finite() && unc.sigma_xx_s > 0.0) {
                    return Err(invalid("sigma_xx_S_unc", unc.sigma_xx_s));
                }
                // At zero field sigma_xy is not fitted, and a symmetrized sweep gives it
                // exactly zero uncertainty there.
                if point.field_t != 0.0 && !(unc.sigma_xy_s.is_finite() && unc.sigma_xy_s > 0.0) {
                    return Err(invalid("sigma_xy_S_unc", unc.sigma_xy_s));
                }
                if !(unc.correlation.is_finite() && unc.correlation.abs() < 1.0) {
                    return Err(invalid("correlation", unc.correlation));
                }
            }
        }
        if with != 0 && with != points.len() {
            return Err(MultiCarrierError::MixedUncertainties {
                with,
                without: points.len() - with,
            });
        }
        let weighted = with > 0;
        let max_field_t = points.iter().map(|p| p.field_t.abs()).fold(0.0, f64::max);
        if max_field_t == 0.0 {
            return Err(MultiCarrierError::NoField { points: points.len() });
        }
        let min_field_t = points
            .iter()
            .map(|p| p.field_t.abs())
            .filter(|b| *b > 0.0)
            .fold(f64::INFINITY, f64::min);
        let whitening: Vec<Whitening> = points
            .iter()
            .map(|p| {
                let uses_xy = p.field_t != 0.0;
                match p.uncertainty {
                    Some(u) => Whitening::new(
                        u.sigma_xx_s,
                        u.sigma_xy_s,
                        if uses_xy { u.correlation } else { 0.0 },
                        uses_xy,
                    ),
                    None => {
                        let magnitude = p.sigma_xx_s.hypot(p.sigma_xy_s);
                        Whitening::new(magnitude, magnitude, 0.0, uses_xy)
                    }
                }
            })
            .collect();
        let mut offsets = Vec::with_capacity(points.len());
        let mut residual_count = 0;
        for w in &whitening {
            offsets.push(residual_count);
            residual_count += w.count();
        }
        Ok(Data {
            fields_t: points.iter().map(|p| p.field_t).collect(),
            sigma_xx_s: points.iter().map(|p| p.sigma_xx_s).collect(),
            sigma_xy_s: points.iter().map(|p| p.sigma_xy_s).collect(),
            whitening,
            offsets,
            residual_count,
            weighted,
            max_field_t,
            min_field_t,
        })
    }

    /// Parameters the residuals can determine: one fewer without uncertainties, where the
    /// noise level is estimated from the same residuals.
    pub(super) fn max_parameters(&self) -> usize {
        if self.weighted {
            self.residual_count
        } else {
            self.residual_count.saturating_sub(1)
        }
    }
}

/// The carriers of a parameter vector (ln n_1, ln mu_1, ln n_2, ln mu_2, ...).
pub(super) fn carriers_of(kinds: &[CarrierKind], parameters: &[f64]) -> Vec<Carrier> {
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

/// Whitened residuals (model - data) of all points at `parameters`.
pub(super) fn residuals(data: &Data, kinds: &[CarrierKind], parameters: &[f64], out: &mut [f64]) {
    let carriers = carriers_of(kinds, parameters);
    for (k, &field) in data.fields_t.iter().enumerate() {
        let model = sum_conductivity(&carriers, field);
        let offset = data.offsets[k];
        let w = &data.whitening[k];
        w.apply(
            model.sigma_xx_s - data.sigma_xx_s[k],
            model.sigma_xy_s - data.sigma_xy_s[k],
            &mut out[offset..offset + w.count()],
        );
    }
}

/// The analytic Jacobian of [`residuals`]. With g = e n mu and x = (mu B)^2, per carrier:
/// d sigma_xx / d ln n = g / (1 + x), d sigma_xx / d ln mu = g (1 - x) / (1 + x)^2,
/// d sigma_xy / d ln n = s g mu B / (1 + x), d sigma_xy / d ln mu = 2 s g mu B / (1 + x)^2;
/// the whitening is linear, so it applies to the derivative pairs as to the residuals.
pub(super) fn jacobian(data: &Data, kinds: &[CarrierKind], parameters: &[f64], jacobian: &mut Matrix) {
    let carriers = carriers_of(kinds, parameters);
    let mut pair = [0.0; 2];
    for (k, &field) in data.fields_t.iter().enumerate() {
        let offset = data.offsets[k];
        let w = &data.whitening[k];
        for (i, carrier) in carriers.iter().enumerate() {
            let g = carrier.sheet_conductance_s();
            let mu_b = carrier.mobility_m2_per_vs * field;
            let x = mu_b * mu_b;
            let denominator = 1.0 + x;
            let s = carrier.kind.charge_sign();
            let derivatives = [
                (g / denominator, s * g * mu_b / denominator),
                (
                    g * (1.0 - x) / (denominator * denominator),
                    2.0 * s * g * mu_b / (denominator * denominator),
                ),
            ];
            for (p, (d_xx, d_xy)) in derivatives.into_iter().enumerate() {
                w.apply(d_xx, d_xy, &mut pair);
                for r in 0..w.count() {
                    jacobian[(offset + r, 2 * i + p)] = pair[r];
                }
            }
        }
    }
}
