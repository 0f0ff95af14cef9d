//! A weak-localization sweep of a thin film near zero field, and the truth file that records
//! it.
//!
//! The classical part is the Drude tensor of the film's one carrier population
//! (`mobilis_physics::forward::tensor`): its 1/rho_xx does not depend on the field, and its
//! rho_xy is the Hall resistivity -B / (n e) of electrons. The Hikami-Larkin-Nagaoka
//! correction of `mobilis_physics::forward::oscillations` is added to the sheet conductance
//! 1/rho_xx, as [`WeakLocalizationModel`] adds it to sigma_0 + beta B^2. rho_xy stays
//! classical, as it does to first order in the theory (weak localization leaves the Hall
//! coefficient unchanged). The sweep then gets the sample's contact misalignment and Gaussian
//! noise as the other sweeps do ([`measured_point`]), and is written in the `sweep` table
//! convention of [`crate::sweeps`].
//!
//! The HLN form describes diffusive motion in a film thinner than the phase-coherence length
//! l_phi: an elastic mean free path l_e well below l_phi, and fields well below the transport
//! field B_tr = hbar / (2 e l_e^2). The truth file records l_e, B_tr and k_F l_e, and the
//! tests check that the invented film lies inside those limits.

use std::f64::consts::PI;

use crate::format::Json;
use crate::quantum::{measured_point, noise_truth};
use crate::sweeps::{layer_truth, round_to_resolution, Layer, SweepRow, FIELD_RESOLUTION_T};
use mobilis_numerics::noise::Rng;
use mobilis_physics::constants::{ELEMENTARY_CHARGE_C, REDUCED_PLANCK_J_S};
use mobilis_physics::field_tensor::ResistivityTensor;
use mobilis_physics::forward::oscillations::{
    hln_correction_s, phase_coherence_field_t, WeakLocalizationModel, HLN_CONDUCTANCE_S,
};
use mobilis_physics::forward::tensor::{resistivity_tensor, symmetric_fields, Carrier, SweepImperfections, SweepNoise};

/// The largest |B| of the weak-localization sweep, T: a few tens of B_phi, where the
/// correction has long become logarithmic, and still far below the transport field.
pub const WEAK_LOCALIZATION_MAX_FIELD_T: f64 = 0.1;
/// Field steps per sign of the weak-localization sweep: 0.2 mT, a small fraction of B_phi.
pub const WEAK_LOCALIZATION_STEPS_PER_SIGN: usize = 500;

/// The invented film of one weak-localization sweep.
pub struct WeakLocalizationSample {
    /// The directory under the demo-data root.
    pub directory: &'static str,
    /// The `material` entry of the truth file.
    pub material: &'static str,
    /// The `description` entry of the truth file.
    pub description: &'static str,
    /// The seed of the sweep's noise.
    pub seed: u64,
    pub sample: &'static str,
    /// A short description of the layer stack and the contact geometry.
    pub structure: &'static str,
    /// The film thickness, m.
    pub thickness_m: f64,
    /// The contacts' misalignment.
    pub imperfections: SweepImperfections,
    pub temperature_k: f64,
    /// The film's one carrier population.
    pub layer: Layer,
    /// g_s of the degenerate Fermi circle, n = g_s k_F^2 / (4 pi).
    pub spin_degeneracy: f64,
    /// The HLN prefactor alpha (+1: weak localization without spin-orbit scattering; -1/2:
    /// antilocalization with strong spin-orbit scattering).
    pub hln_alpha: f64,
    /// l_phi, m.
    pub phase_coherence_length_m: f64,
    pub noise: SweepNoise,
}

/// Everything the generator produced for one film, before it is written.
pub struct GeneratedWeakLocalization {
    pub rows: Vec<SweepRow>,
    pub truth: Json,
}

/// The recorded fields of the weak-localization sweep: from -0.1 T to +0.1 T in 0.2 mT
/// steps. The lab approached zero field in the magnet's oscillating mode, which leaves
/// almost no remanent field, so the two branches mirror each other.
pub fn weak_localization_fields() -> anyhow::Result<Vec<f64>> {
    Ok(
        symmetric_fields(WEAK_LOCALIZATION_MAX_FIELD_T, WEAK_LOCALIZATION_STEPS_PER_SIGN)?
            .into_iter()
            .map(round_to_resolution)
            .collect(),
    )
}

/// beta of 1/rho_xx = sigma_0 + beta B^2 + O(B^4) for classical carriers, S/T^2: with
/// sigma_xx = sum sigma_i (1 - mu_i^2 B^2) and sigma_xy = B sum s_i sigma_i mu_i to that
/// order, 1/rho_xx = sigma_xx + sigma_xy^2 / sigma_xx gives
/// beta = -[sum sigma_i mu_i^2 - (sum s_i sigma_i mu_i)^2 / sigma_0]
/// = -sum_ij sigma_i sigma_j (mu_i - s_i s_j mu_j)^2 / (2 sigma_0), written in the second
/// form: never positive, and exactly zero for one carrier.
pub fn classical_conductance_curvature_s_per_t2(carriers: &[Carrier]) -> f64 {
    let sigma_0: f64 = carriers.iter().map(Carrier::sheet_conductance_s).sum();
    let mut sum = 0.0;
    for i in carriers {
        for j in carriers {
            let difference = i.mobility_m2_per_vs - i.kind.charge_sign() * j.kind.charge_sign() * j.mobility_m2_per_vs;
            sum += i.sheet_conductance_s() * j.sheet_conductance_s() * difference * difference;
        }
    }
    -sum / (2.0 * sigma_0)
}

impl WeakLocalizationSample {
    pub fn carriers(&self) -> Vec<Carrier> {
        vec![self.layer.carrier]
    }

    /// rho_xx of the classical tensor at zero field, ohm per square.
    pub fn zero_field_rho_xx_ohm_sq(&self) -> anyhow::Result<f64> {
        Ok(resistivity_tensor(&self.carriers(), 0.0)?.rho_xx_ohm_sq)
    }

    /// The weak-localization model of the low-field sheet conductance 1/rho_xx.
    pub fn model(&self) -> anyhow::Result<WeakLocalizationModel> {
        let model = WeakLocalizationModel {
            sigma_0_s: 1.0 / self.zero_field_rho_xx_ohm_sq()?,
            alpha: self.hln_alpha,
            phase_coherence_length_m: self.phase_coherence_length_m,
            classical_s_per_t2: classical_conductance_curvature_s_per_t2(&self.carriers()),
        };
        model.validate()?;
        Ok(model)
    }

    /// B_phi = hbar / (4 e l_phi^2), T.
    pub fn phase_coherence_field_t(&self) -> f64 {
        phase_coherence_field_t(self.phase_coherence_length_m)
    }

    /// The ideal tensor with the weak-localization correction at `field_t`. The classical
    /// conductance is the tensor's own 1/rho_xx, which for one carrier is sigma_0 at every
    /// field.
    pub fn tensor(&self, field_t: f64) -> anyhow::Result<ResistivityTensor> {
        let classical = resistivity_tensor(&self.carriers(), field_t)?;
        let conductance =
            1.0 / classical.rho_xx_ohm_sq + hln_correction_s(field_t, self.hln_alpha, self.phase_coherence_field_t());
        Ok(ResistivityTensor {
            rho_xx_ohm_sq: 1.0 / conductance,
            rho_xy_ohm: classical.rho_xy_ohm,
        })
    }

    /// k_F = sqrt(4 pi n / g_s) of a degenerate two-dimensional gas of the film's sheet
    /// density, 1/m.
    pub fn fermi_wavevector_per_m(&self) -> f64 {
        (4.0 * PI * self.layer.carrier.sheet_density_m2 / self.spin_degeneracy).sqrt()
    }

    /// The elastic mean free path l_e = hbar k_F mu / e, m.
    pub fn mean_free_path_m(&self) -> f64 {
        REDUCED_PLANCK_J_S * self.fermi_wavevector_per_m() * self.layer.carrier.mobility_m2_per_vs / ELEMENTARY_CHARGE_C
    }

    /// The transport field B_tr = hbar / (2 e l_e^2), T: the field whose magnetic length is
    /// the mean free path. The diffusive HLN form holds well below it.
    pub fn transport_field_t(&self) -> f64 {
        let mean_free_path = self.mean_free_path_m();
        REDUCED_PLANCK_J_S / (2.0 * ELEMENTARY_CHARGE_C * mean_free_path * mean_free_path)
    }
}

fn weak_localization_truth(film: &WeakLocalizationSample, fields: &[f64]) -> anyhow::Result<Json> {
    let model = film.model()?;
    let b_phi = film.phase_coherence_field_t();
    let max_field = WEAK_LOCALIZATION_MAX_FIELD_T;
    let mean_free_path = film.mean_free_path_m();
    let transport_field = film.transport_field_t();
    let classical_max = resistivity_tensor(&film.carriers(), max_field)?;
    Ok(Json::object([
        ("file", Json::text("wl-sweep.csv")),
        (
            "model",
            Json::text(
                "1/rho_xx = classical one-carrier 1/rho_xx(B) + alpha e^2/(2 pi^2 hbar) [psi(1/2 + B_phi/|B|) - ln(B_phi/|B|)] (Hikami-Larkin-Nagaoka); rho_xy classical",
            ),
        ),
        ("temperature_K", Json::Number(film.temperature_k)),
        ("alpha", Json::Number(model.alpha)),
        ("phase_coherence_length_m", Json::Number(model.phase_coherence_length_m)),
        ("phase_coherence_field_T", Json::Number(b_phi)),
        ("hln_conductance_unit_S", Json::Number(HLN_CONDUCTANCE_S)),
        ("zero_field_sheet_conductance_S", Json::Number(model.sigma_0_s)),
        ("classical_S_per_T2", Json::Number(model.classical_s_per_t2)),
        (
            "correction_at_max_field_S",
            Json::Number(hln_correction_s(max_field, model.alpha, b_phi)),
        ),
        ("zero_field_rho_xx_ohm_sq", Json::Number(1.0 / model.sigma_0_s)),
        (
            "rho_xx_max_field_ohm_sq",
            Json::Number(film.tensor(max_field)?.rho_xx_ohm_sq),
        ),
        ("classical_rho_xx_max_field_ohm_sq", Json::Number(classical_max.rho_xx_ohm_sq)),
        ("spin_degeneracy", Json::Number(film.spin_degeneracy)),
        ("fermi_wavevector_per_m", Json::Number(film.fermi_wavevector_per_m())),
        ("mean_free_path_m", Json::Number(mean_free_path)),
        (
            "fermi_wavevector_times_mean_free_path",
            Json::Number(film.fermi_wavevector_per_m() * mean_free_path),
        ),
        ("transport_field_T", Json::Number(transport_field)),
        (
            "phase_coherence_length_over_mean_free_path",
            Json::Number(model.phase_coherence_length_m / mean_free_path),
        ),
        (
            "phase_coherence_field_over_transport_field",
            Json::Number(b_phi / transport_field),
        ),
        ("max_field_over_transport_field", Json::Number(max_field / transport_field)),
        (
            "field_program",
            Json::object([
                ("max_field_T", Json::Number(max_field)),
                (
                    "step_T",
                    Json::Number(max_field / WEAK_LOCALIZATION_STEPS_PER_SIGN as f64),
                ),
                ("field_resolution_T", Json::Number(FIELD_RESOLUTION_T)),
                ("points_per_sweep", Json::Integer(i64::try_from(fields.len())?)),
            ]),
        ),
        ("noise", noise_truth(&film.noise)),
    ]))
}

/// Runs the invented weak-localization sweep of `film`, from its own seed.
pub fn generate(film: &WeakLocalizationSample) -> anyhow::Result<GeneratedWeakLocalization> {
    let fields = weak_localization_fields()?;
    let mut rng = Rng::seeded(film.seed);
    let mut rows = Vec::with_capacity(fields.len());
    for &field_t in &fields {
        let ideal = film.tensor(field_t)?;
        rows.push(SweepRow {
            sample: film.sample,
            temperature_k: film.temperature_k,
            point: measured_point(field_t, ideal, &film.noise, &film.imperfections, &mut rng),
        });
    }
    let truth = Json::object([
        ("description", Json::text(film.description)),
        ("generator", Json::text("mobilis-demo-gen")),
        ("seed", Json::Integer(i64::try_from(film.seed)?)),
        ("material", Json::text(film.material)),
        ("sample", Json::text(film.sample)),
        ("structure", Json::text(film.structure)),
        ("thickness_m", Json::Number(film.thickness_m)),
        ("hall_misalignment", Json::Number(film.imperfections.hall_misalignment)),
        (
            "longitudinal_hall_pickup",
            Json::Number(film.imperfections.longitudinal_hall_pickup),
        ),
        ("carriers", Json::Array(vec![layer_truth(&film.layer)])),
        ("weak_localization", weak_localization_truth(film, &fields)?),
    ]);
    Ok(GeneratedWeakLocalization { rows, truth })
}

#[cfg(test)]
mod tests;
