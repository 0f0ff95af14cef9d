//! The least-squares problem of the multi-carrier fit: the residuals and analytic Jacobian
//! in the log parameters, whitened per point as `mobilis_physics::tensor_data` sets up.

use mobilis_numerics::linalg::Matrix;
use mobilis_physics::forward::tensor::{sum_conductivity, Carrier, CarrierKind};
use mobilis_physics::tensor_data::TensorData;

/// Validated sheet conductivity data: xx is sigma_xx, xy is sigma_xy, in S (see the parent
/// module for the weights used without uncertainties).
pub(super) type Data = TensorData;

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
            model.sigma_xx_s - data.xx[k],
            model.sigma_xy_s - data.xy[k],
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
