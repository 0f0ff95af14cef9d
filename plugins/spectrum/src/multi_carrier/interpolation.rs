//! The second pass of a sweep fit: the error that linear interpolation between field
//! points puts into the symmetrized data, computed on the fitted model and removed.
//!
//! Symmetrization interpolates each field branch linearly onto the common |B| grid. Between
//! two readings h apart, at a fraction w of the way, linear interpolation of a curve f
//! misses it by about w (1 - w) h^2 f'' / 2, and in the same direction wherever the curve
//! bends the same way: a bias, not noise. With branches offset by a few mT of remanence and
//! 0.125 T steps it moved the mobility of a high-mobility carrier (curvature near 1/mu) by
//! about one statistical standard uncertainty in a coverage test.
//!
//! The fitted model is a smooth stand-in for the true curve. Its values at the measured
//! fields, passed through the same `symmetrize` with the same settings, carry the same
//! interpolation error as the data; the difference from the model at the grid fields is
//! that error, to first order in the model's misfit. It is subtracted from the symmetrized
//! data, which are then fitted again. Using `symmetrize` itself, rather than a copy of its
//! rules, keeps the correction right whatever the symmetrization does (grouping of close
//! fields, zero field, the grid).

use mobilis_physics::forward::tensor::{sum_conductivity, Carrier};
use mobilis_physics::sweep::{
    conductivity_point, symmetrize, SweepPoint, SymmetrizeSettings, Symmetrized, TensorPoint,
};

/// The symmetrized data with the model's interpolation error removed, as conductivity
/// points, and the largest correction relative to |rho|; `None` when no point needed one
/// (the branches were measured at the same fields) or the model's sweep could not be
/// symmetrized onto the same grid.
pub(super) fn corrected(
    raw: &[SweepPoint],
    settings: &SymmetrizeSettings,
    symmetrized: &Symmetrized,
    model: &[Carrier],
) -> Option<(Vec<TensorPoint>, f64)> {
    let model_rho = |field: f64| sum_conductivity(model, field).to_resistivity();
    let model_sweep: Vec<SweepPoint> = raw
        .iter()
        .map(|p| {
            let rho = model_rho(p.field_t);
            SweepPoint {
                rho_xx_ohm_sq: rho.rho_xx_ohm_sq,
                rho_xy_ohm: rho.rho_xy_ohm,
                ..*p
            }
        })
        .collect();
    let model_symmetrized = symmetrize(&model_sweep, settings).ok()?;
    if model_symmetrized.points.len() != symmetrized.points.len() {
        return None;
    }
    let mut largest: f64 = 0.0;
    let mut points = Vec::with_capacity(symmetrized.points.len());
    for (data, interpolated) in symmetrized.points.iter().zip(&model_symmetrized.points) {
        if data.field_t != interpolated.field_t {
            return None;
        }
        let exact = model_rho(data.field_t);
        let d_xx = interpolated.rho_xx_ohm_sq - exact.rho_xx_ohm_sq;
        let d_xy = interpolated.rho_xy_ohm - exact.rho_xy_ohm;
        let magnitude = data.rho_xx_ohm_sq.hypot(data.rho_xy_ohm);
        largest = largest.max(d_xx.hypot(d_xy) / magnitude);
        let mut point = data.to_sweep_point();
        point.rho_xx_ohm_sq -= d_xx;
        point.rho_xy_ohm -= d_xy;
        points.push(conductivity_point(&point));
    }
    // Below rounding there is nothing to correct, and the first pass stands.
    (largest > 1e-12).then_some((points, largest))
}
