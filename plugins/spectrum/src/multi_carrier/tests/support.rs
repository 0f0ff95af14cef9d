//! Sweeps and settings that the recovery and the other multi-carrier tests both build from,
//! below both of them.

use crate::multi_carrier::{Carrier, CarrierKind, CarrierSelection, MultiCarrierSettings, SweepPoint};
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::tensor::{
    resistivity_tensor, symmetric_fields, synthetic_sweep, SweepImperfections, SweepNoise,
};

/// A noisy symmetric sweep of `carriers` to +-`max_field_t` in `steps` steps per sign:
/// noise 0.1 % of each component plus a floor of 1e-4 rho_xx(0), with uncertainties.
pub(super) fn noisy_sweep(carriers: &[Carrier], max_field_t: f64, steps: usize, seed: u64) -> Vec<SweepPoint> {
    let rho_0 = resistivity_tensor(carriers, 0.0).unwrap().rho_xx_ohm_sq;
    let noise = SweepNoise {
        absolute_ohm: 1e-4 * rho_0,
        relative: 1e-3,
    };
    synthetic_sweep(
        carriers,
        &symmetric_fields(max_field_t, steps).unwrap(),
        &noise,
        &SweepImperfections {
            hall_misalignment: 0.01,
            longitudinal_hall_pickup: 0.002,
        },
        &mut Rng::seeded(seed),
    )
    .unwrap()
}

pub(super) fn given(kinds: &[CarrierKind]) -> MultiCarrierSettings {
    MultiCarrierSettings {
        selection: CarrierSelection::Kinds(kinds.to_vec()),
        ..MultiCarrierSettings::default()
    }
}
