//! Starting points of the multi-carrier fit, seeded from the data.
//!
//! A start fixes the mobilities first and takes the densities from the data: with the
//! mobilities fixed the model is linear in the densities, so the weighted linear least
//! squares of the same whitened residuals gives the densities that best match both
//! sigma_xx and sigma_xy (for one carrier of each sign this is the split of the zero-field
//! conductance and of the high-field Hall slope between them). Densities that come out zero
//! or negative, which no carrier has, are replaced by a small share of the zero-field
//! conductance.
//!
//! The mobilities come from:
//! - the spread of the field range: a carrier shows its magnetoresistance around
//!   B = 1/mu, so mobilities from 0.03 / B_max to 10 / B_min (B_min the smallest nonzero
//!   field) cover every carrier the sweep can see, and those below it as a parallel
//!   background; the deterministic starts place the N mobilities evenly in log over that
//!   range, ascending and descending through the list of kinds;
//! - the low-field Hall mobility |sigma_xy| / (sigma_xx |B|) at the smallest field, which is
//!   the conductance-weighted mobility of the carriers, spread by factors of 3 around it;
//! - the caller's guess, when given;
//! - random starts, each mobility log-uniform over the range, from a seeded generator so
//!   that a fit is reproducible.

use mobilis_numerics::linalg::{Matrix, Svd};
use mobilis_numerics::noise::Rng;
use mobilis_physics::constants::ELEMENTARY_CHARGE_C;
use mobilis_physics::forward::tensor::{Carrier, CarrierKind};

use mobilis_physics::carrier_fit::LogBounds;
use mobilis_physics::tensor_data::TensorData as Data;

/// The mobility range the starts are drawn from, as ln mu, within the bounds.
pub(super) fn mobility_seed_range(data: &Data, bounds: &LogBounds) -> (f64, f64) {
    let low = bounds.clamp_mobility((0.03 / data.max_field_t).ln());
    let high = bounds.clamp_mobility((10.0 / data.min_field_t).ln());
    (low.min(high), high.max(low))
}

/// |sigma_xy| / (sigma_xx |B|) at the smallest nonzero field: the low-field Hall mobility.
pub(super) fn hall_mobility(data: &Data) -> f64 {
    let k = (0..data.fields_t.len())
        .filter(|&k| data.fields_t[k] != 0.0)
        .min_by(|&a, &b| data.fields_t[a].abs().total_cmp(&data.fields_t[b].abs()))
        .expect("the data have a nonzero field");
    data.xy[k].abs() / (data.xx[k] * data.fields_t[k].abs())
}

/// The zero-field conductance, approximated by sigma_xx at the smallest |B|.
fn low_field_conductance(data: &Data) -> f64 {
    let k = (0..data.fields_t.len())
        .min_by(|&a, &b| data.fields_t[a].abs().total_cmp(&data.fields_t[b].abs()))
        .expect("the data are not empty");
    data.xx[k]
}

/// The densities (ln n) that best fit the data for fixed mobilities (see the module
/// documentation).
pub(super) fn densities_for(data: &Data, kinds: &[CarrierKind], mobilities: &[f64], bounds: &LogBounds) -> Vec<f64> {
    let n = kinds.len();
    let m = data.residual_count;
    let mut design = Matrix::zeros(m, n);
    let mut target = vec![0.0; m];
    let mut pair = [0.0; 2];
    for (k, &field) in data.fields_t.iter().enumerate() {
        let offset = data.offsets[k];
        let w = &data.whitening[k];
        w.apply(data.xx[k], data.xy[k], &mut pair);
        target[offset..offset + w.count()].copy_from_slice(&pair[..w.count()]);
        for (i, (&kind, &mu)) in kinds.iter().zip(mobilities).enumerate() {
            // The tensor of a unit sheet density.
            let part = Carrier {
                kind,
                sheet_density_m2: 1.0,
                mobility_m2_per_vs: mu,
            }
            .conductivity(field);
            w.apply(part.sigma_xx_s, part.sigma_xy_s, &mut pair);
            for r in 0..w.count() {
                design[(offset + r, i)] = pair[r];
            }
        }
    }
    let norms: Vec<f64> = (0..n)
        .map(|i| mobilis_numerics::linalg::norm(&design.column(i)).max(f64::MIN_POSITIVE))
        .collect();
    let scaled = Matrix::from_fn(m, n, |r, i| design[(r, i)] / norms[i]);
    let solution = Svd::new(&scaled)
        .map(|svd| svd.solve_least_squares(&target, 1e-12))
        .unwrap_or_else(|_| vec![0.0; n]);
    let conductance = low_field_conductance(data);
    (0..n)
        .map(|i| {
            let density = solution[i] / norms[i];
            let floor = 1e-3 * conductance / (n as f64 * ELEMENTARY_CHARGE_C * mobilities[i]);
            let density = if density.is_finite() && density > floor {
                density
            } else {
                floor
            };
            bounds.clamp_density(density.ln())
        })
        .collect()
}

/// A parameter vector (ln n, ln mu per carrier) from mobilities, densities from the data.
fn start_from(data: &Data, kinds: &[CarrierKind], ln_mobilities: &[f64], bounds: &LogBounds) -> Vec<f64> {
    let ln_mobilities: Vec<f64> = ln_mobilities.iter().map(|v| bounds.clamp_mobility(*v)).collect();
    let mobilities: Vec<f64> = ln_mobilities.iter().map(|v| v.exp()).collect();
    let densities = densities_for(data, kinds, &mobilities, bounds);
    densities
        .into_iter()
        .zip(ln_mobilities)
        .flat_map(|(ln_n, ln_mu)| [ln_n, ln_mu])
        .collect()
}

/// Every start for the carrier list `kinds`: deterministic ones, the guess, then `random`
/// random ones.
pub(super) fn starts(
    data: &Data,
    kinds: &[CarrierKind],
    guess: Option<&[Carrier]>,
    random: usize,
    rng: &mut Rng,
    bounds: &LogBounds,
) -> Vec<Vec<f64>> {
    let n = kinds.len();
    let (low, high) = mobility_seed_range(data, bounds);
    let mut list = Vec::new();
    let even: Vec<f64> = (0..n)
        .map(|i| low + (high - low) * (i as f64 + 0.5) / n as f64)
        .collect();
    list.push(start_from(data, kinds, &even, bounds));
    if n > 1 {
        let reversed: Vec<f64> = even.iter().rev().copied().collect();
        list.push(start_from(data, kinds, &reversed, bounds));
    }
    let hall = hall_mobility(data);
    if hall.is_finite() && hall > 0.0 {
        let around: Vec<f64> = (0..n)
            .map(|i| hall.ln() + 3f64.ln() * (i as f64 - (n as f64 - 1.0) / 2.0))
            .collect();
        list.push(start_from(data, kinds, &around, bounds));
    }
    if let Some(guess) = guess {
        list.push(
            guess
                .iter()
                .flat_map(|c| {
                    [
                        bounds.clamp_density(c.sheet_density_m2.ln()),
                        bounds.clamp_mobility(c.mobility_m2_per_vs.ln()),
                    ]
                })
                .collect(),
        );
    }
    for _ in 0..random {
        let drawn: Vec<f64> = (0..n).map(|_| rng.uniform_between(low, high)).collect();
        list.push(start_from(data, kinds, &drawn, bounds));
    }
    list
}
