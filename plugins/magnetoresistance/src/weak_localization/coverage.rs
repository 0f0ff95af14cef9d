//! Coverage of the weak-localization uncertainty of l_phi: many realizations of a thin
//! film's low-field sweep from known alpha and l_phi, and how often the truth lies within
//! the reported 1 and 2 standard uncertainties (the project's rule: 55 % to 80 % and at
//! least 90 %; 68.3 % and 95.4 % expected for a normal distribution, JCGM 100:2008 G.1).
//!
//! The film is the demo's kind (invented test inputs): sigma_0 = 1/2080.5 S, alpha = 1,
//! l_phi = 250 nm (B_phi = 2.6 mT), fields from -0.1 T to 0.1 T in 0.2 mT steps. Each
//! realization draws a lock-in's noise (2 milliohm plus 1e-5 of the value), a slow drift of
//! the sample's resistance along the sweep (a few parts in 1e6, the temperature of a stage
//! that settles), and runs the fit as `mr.weak_localization` does by default (offset
//! fitted), once weighted by the stated noise and once by the scatter.

use super::*;
use mobilis_numerics::fit::Coverage;
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::oscillations::WeakLocalizationModel;

const PHASE_COHERENCE_LENGTH_M: f64 = 250e-9;
const REALIZATIONS: usize = 100;

fn realization(rng: &mut Rng, weighted: bool) -> WeakLocalizationSweep {
    let model = WeakLocalizationModel {
        sigma_0_s: 1.0 / 2080.5,
        alpha: 1.0,
        phase_coherence_length_m: PHASE_COHERENCE_LENGTH_M,
        classical_s_per_t2: 0.0,
    };
    let steps = 500;
    let drift_per_sweep = 3e-6 * rng.standard_normal();
    let mut field_t = Vec::with_capacity(2 * steps + 1);
    let mut rho = Vec::with_capacity(2 * steps + 1);
    let mut unc = Vec::with_capacity(2 * steps + 1);
    for k in 0..=2 * steps {
        let b = 0.1 * (k as f64 - steps as f64) / steps as f64;
        let progress = k as f64 / (2 * steps) as f64;
        let ideal = (1.0 / model.conductance_s(b)) * (1.0 + drift_per_sweep * progress);
        let sd = 2e-3 + 1e-5 * ideal;
        field_t.push(b);
        rho.push(ideal + sd * rng.standard_normal());
        unc.push(sd);
    }
    WeakLocalizationSweep {
        field_t,
        rho_xx_ohm_sq: rho,
        rho_xy_ohm: None,
        rho_xx_unc_ohm_sq: weighted.then_some(unc),
    }
}

// The reported l_phi covers the truth as often as an honest error bar does, weighted by the
// stated noise and weighted by the scatter alike.
#[test]
fn weak_localization_phase_coherence_length_uncertainty_covers_the_truth() {
    let settings = WeakLocalizationSettings {
        fit_offset: true,
        ..WeakLocalizationSettings::default()
    };
    for (weighted, seed) in [(true, 0x3A11_0C01), (false, 0x3A11_0C02)] {
        let mut rng = Rng::seeded(seed);
        let mut coverage = Coverage::default();
        for _ in 0..REALIZATIONS {
            let fit = fit_weak_localization(&realization(&mut rng, weighted), &settings).unwrap();
            coverage.record(
                fit.phase_coherence_length_m,
                fit.phase_coherence_length_unc_m.unwrap_or(f64::NAN),
                PHASE_COHERENCE_LENGTH_M,
            );
        }
        eprintln!("l_phi (weighted {weighted}): {}", coverage.describe());
        assert!(coverage.is_honest(), "weighted {weighted}: {}", coverage.describe());
    }
}
