//! Temperature series shaped like a real lab's, for the tests of the uncertainty budget:
//! reading noise that grows as the sample freezes out, a stated noise estimated from a few
//! readings, stage drift between the reported and the true temperature, and a thickness
//! calibration error drawn once per series.
//!
//! The densities come from `mobilis_physics::forward::statistics::solve_charge_neutrality`,
//! the forward model the freeze-out fit inverts (the compensating acceptors get a 45 meV
//! level, whose occupancy the fit neglects; it is below 1e-6 of N_A here). Every number
//! below is an invented test input, chosen to resemble a van der Pauw series on compensated
//! silicon measured with an autoranging current source and a 1 uV voltmeter (common
//! practice).

use super::DensityPoint;
use crate::carrier_type::CarrierType;
use crate::materials::Material;
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::statistics::{solve_charge_neutrality, Dopants};

/// cm^-3 to m^-3.
pub(crate) const CM3: f64 = 1e6;

/// How a synthetic series is measured and what it is made of.
#[derive(Debug, Clone)]
pub(crate) struct RealisticSeries {
    pub donors_m3: f64,
    pub acceptors_m3: f64,
    pub donor_energy_ev: f64,
    /// Reported temperatures, K.
    pub temperatures_k: Vec<f64>,
    /// Standard deviation of true minus reported temperature (stage drift), K; reported as
    /// every point's temperature uncertainty.
    pub drift_k: f64,
    /// Relative standard uncertainty of the thickness calibration, drawn once per series and
    /// reported as the densities' systematic part.
    pub thickness_relative_unc: f64,
    /// Relative reading noise of the density on the saturation plateau. It grows as
    /// (n_plateau / n)^(1/6) into freeze-out: an autoranging source keeps the voltages up
    /// until the sample's resistance outruns it (0.2 % on the plateau becomes 2 % a million
    /// times lower).
    pub plateau_noise: f64,
    /// The stated statistical uncertainty is the scatter of this many readings, so it is
    /// itself uncertain (a chi-square with readings - 1 degrees of freedom); 0: stated
    /// exactly.
    pub readings_per_point: usize,
}

/// One drawn series and what was drawn for it.
#[derive(Debug, Clone)]
pub(crate) struct Realization {
    pub points: Vec<DensityPoint>,
    /// Stated over true thickness: every density is multiplied by it.
    pub thickness_factor: f64,
}

impl RealisticSeries {
    /// The compensated silicon of the issue that prompted the budget: N_D 3.3e15 cm^-3,
    /// N_A 4.1e14 cm^-3, E_D 45.2 meV, 32 temperatures from 24 K to 400 K spaced evenly in
    /// ln T, 30 mK of stage drift, 3 % thickness calibration, 0.2 % reading noise on the
    /// plateau from eight readings.
    pub fn compensated_silicon() -> Self {
        RealisticSeries {
            donors_m3: 3.3e15 * CM3,
            acceptors_m3: 4.1e14 * CM3,
            donor_energy_ev: 0.0452,
            temperatures_k: geometric(24.0, 400.0, 32),
            drift_k: 0.030,
            thickness_relative_unc: 0.03,
            plateau_noise: 0.002,
            readings_per_point: 8,
        }
    }

    fn dopants(&self) -> Dopants {
        Dopants::new(self.donors_m3, self.acceptors_m3, self.donor_energy_ev, 0.045)
    }

    /// The true electron density at `temperature_k`, m^-3.
    pub fn true_density(&self, temperature_k: f64) -> f64 {
        solve_charge_neutrality(&self.dopants(), &Material::silicon().band_model(), temperature_k)
            .expect("the forward model solves silicon at these temperatures")
            .electron_density_m3
    }

    /// The relative reading noise at a true density.
    pub fn relative_noise(&self, density_m3: f64) -> f64 {
        let plateau = self.donors_m3 - self.acceptors_m3;
        self.plateau_noise * (plateau / density_m3).max(1.0).powf(1.0 / 6.0)
    }

    /// Draws one measured series.
    pub fn draw(&self, rng: &mut Rng) -> Realization {
        let thickness_factor = 1.0 + self.thickness_relative_unc * rng.standard_normal();
        let points = self
            .temperatures_k
            .iter()
            .map(|&reported| {
                let true_temperature = reported + self.drift_k * rng.standard_normal();
                let density = self.true_density(true_temperature);
                let noise = self.relative_noise(density);
                let measured = thickness_factor * density * (1.0 + noise * rng.standard_normal());
                let stated_noise = if self.readings_per_point > 1 {
                    let dof = self.readings_per_point - 1;
                    let chi_square: f64 = (0..dof).map(|_| rng.standard_normal().powi(2)).sum();
                    noise * (chi_square / dof as f64).sqrt()
                } else {
                    noise
                };
                DensityPoint {
                    temperature_k: reported,
                    density_m3: measured,
                    density_unc_m3: Some(stated_noise * measured),
                    density_unc_sys_m3: Some(self.thickness_relative_unc * measured),
                    temperature_unc_k: Some(self.drift_k),
                    applied_hall_factor: None,
                    carrier_type: Some(CarrierType::N),
                }
            })
            .collect();
        Realization {
            points,
            thickness_factor,
        }
    }
}

/// `count` values from `low` to `high` evenly spaced in the logarithm.
pub(crate) fn geometric(low: f64, high: f64, count: usize) -> Vec<f64> {
    (0..count)
        .map(|k| low * (high / low).powf(k as f64 / (count - 1) as f64))
        .collect()
}

/// The number of realizations of a coverage test: `default` in the ordinary suite, `full`
/// when `MOBILIS_SLOW_TESTS=1`.
pub(crate) fn realizations(default: usize, full: usize) -> usize {
    if std::env::var("MOBILIS_SLOW_TESTS").is_ok_and(|value| value == "1") {
        full
    } else {
        default
    }
}
