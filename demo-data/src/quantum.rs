//! Low-temperature quantum oscillations of a swept sample: Shubnikov-de Haas sweeps at
//! several temperatures, on top of the classical magnetoresistance of its carriers, and the
//! truth file that records them.
//!
//! The classical part is the same Drude tensor as the other sweeps
//! (`mobilis_physics::forward::tensor`). The oscillations come from
//! `mobilis_physics::forward::oscillations`, the model `mr.oscillations` inverts:
//! rho_xx(B, T) = rho_xx,classical(B) + rho_0 a R_T R_D cos(2 pi F / |B| + phi), the
//! Lifshitz-Kosevich first harmonic of an [`OscillationComponent`] in the Ando form (a = 4,
//! phi = -pi), with the prefactor rho_0 = rho_xx(0) of [`SdhModel`]. Only the smooth
//! background is replaced: the model's polynomial by the two-carrier tensor, so that the
//! background is the one `sweeps.csv` shows. rho_xy stays classical.
//!
//! The sweeps then get the sample's contact misalignment and Gaussian noise, exactly as
//! `synthetic_sweep` applies them to a classical sweep ([`measured_point`]), and are written
//! in the `sweep` table convention of [`crate::sweeps`].

use crate::format::Json;
use crate::sweeps::{round_to_resolution, Layer, SweepRow, SweepSample, FIELD_RESOLUTION_T, MAX_FIELD_T};
use mobilis_numerics::noise::Rng;
use mobilis_physics::constants::{ELECTRON_MASS_KG, ELEMENTARY_CHARGE_C};
use mobilis_physics::field_tensor::ResistivityTensor;
use mobilis_physics::forward::oscillations::{
    dingle_damping, frequency_from_sheet_density_t, quantum_lifetime_s, thermal_damping_argument,
    thermal_damping_factor, OscillationComponent, SdhModel, LK_FIELD_PER_KELVIN,
};
use mobilis_physics::forward::tensor::{resistivity_tensor, Carrier, SweepImperfections, SweepNoise};
use mobilis_physics::sweep::{ResistivityUncertainty, SweepPoint};

/// The lowest |B| of the oscillation sweeps, T. Below it the oscillations of this channel are
/// damped far into the noise at every temperature, and the 1/B step of a sweep that reached
/// lower would have to shrink with it.
pub const SDH_MIN_FIELD_T: f64 = 1.0;
/// Recorded fields per branch of an oscillation sweep, equally spaced in 1/B from
/// 1/[`MAX_FIELD_T`] to 1/[`SDH_MIN_FIELD_T`]: about 12 points per period of a 186 T
/// oscillation everywhere, where equal steps in B would waste most points at high field.
pub const SDH_POINTS_PER_BRANCH: usize = 2000;

/// The invented quantum oscillations of one sample at low temperature.
pub struct QuantumTransport {
    /// The directory under the demo-data root.
    pub directory: &'static str,
    /// The `material` entry of the truth file.
    pub material: &'static str,
    /// The `description` entry of the truth file.
    pub description: &'static str,
    /// The sample, with the contact misalignment of its classical sweeps.
    pub sample: SweepSample,
    /// The carriers at every temperature of these sweeps.
    pub layers: &'static [Layer],
    /// The index in `layers` of the 2D layer whose Landau levels oscillate.
    pub oscillating_layer: usize,
    /// g_s of n = g_s e F / h: 2 when the spin splitting is not resolved.
    pub spin_degeneracy: f64,
    /// m*/m_0, the cyclotron mass.
    pub effective_mass_ratio: f64,
    /// T_D, K.
    pub dingle_temperature_k: f64,
    /// One oscillation sweep per temperature, in this order.
    pub sdh_temperatures_k: &'static [f64],
    pub sdh_seed: u64,
    pub sdh_noise: SweepNoise,
}

/// Everything the generator produced for one sample, before it is written.
pub struct GeneratedQuantum {
    pub sdh_rows: Vec<SweepRow>,
    pub truth: Json,
}

/// The recorded fields of one oscillation sweep, in the order the lab takes them: the
/// magnet ramps from -9 T to +9 T, and the lab records at fields equally spaced in 1/B
/// while |B| >= 1 T. It sets each field from a readback at the sample, so the negative
/// branch mirrors the positive one to the 0.1 mT resolution and symmetrization pairs the
/// points one to one instead of interpolating an oscillation between them.
pub fn sdh_fields() -> Vec<f64> {
    let (low, high) = (1.0 / MAX_FIELD_T, 1.0 / SDH_MIN_FIELD_T);
    let step = (high - low) / (SDH_POINTS_PER_BRANCH - 1) as f64;
    // From 1 T up: the largest 1/B first.
    let positive: Vec<f64> = (0..SDH_POINTS_PER_BRANCH)
        .map(|k| round_to_resolution(1.0 / (high - k as f64 * step)))
        .collect();
    positive
        .iter()
        .rev()
        .map(|field| -field)
        .chain(positive.iter().copied())
        .collect()
}

impl QuantumTransport {
    pub fn carriers(&self) -> Vec<Carrier> {
        self.layers.iter().map(|layer| layer.carrier).collect()
    }

    /// The carriers of the oscillating 2D layer.
    pub fn channel(&self) -> Carrier {
        self.layers[self.oscillating_layer].carrier
    }

    /// The Onsager frequency of the channel's Fermi circle, F = n h / (g_s e), T.
    pub fn frequency_t(&self) -> f64 {
        frequency_from_sheet_density_t(self.channel().sheet_density_m2, self.spin_degeneracy)
    }

    pub fn oscillation(&self) -> OscillationComponent {
        OscillationComponent::two_dimensional(self.frequency_t(), self.effective_mass_ratio, self.dingle_temperature_k)
    }

    /// rho_xx of the classical tensor at zero field, ohm per square.
    pub fn zero_field_rho_xx_ohm_sq(&self) -> anyhow::Result<f64> {
        Ok(resistivity_tensor(&self.carriers(), 0.0)?.rho_xx_ohm_sq)
    }

    /// The oscillation model with its prefactor rho_0; its background holds rho_0 only,
    /// because the generator takes the field dependence of the background from the tensor.
    pub fn sdh_model(&self) -> anyhow::Result<SdhModel> {
        let model = SdhModel {
            background_ohm_sq: vec![self.zero_field_rho_xx_ohm_sq()?],
            components: vec![self.oscillation()],
        };
        model.validate()?;
        Ok(model)
    }

    /// The ideal tensor with oscillations at `field_t` and `temperature_k`.
    pub fn sdh_tensor(&self, model: &SdhModel, field_t: f64, temperature_k: f64) -> anyhow::Result<ResistivityTensor> {
        let classical = resistivity_tensor(&self.carriers(), field_t)?;
        Ok(ResistivityTensor {
            rho_xx_ohm_sq: classical.rho_xx_ohm_sq + model.oscillatory_part_ohm_sq(field_t, temperature_k),
            rho_xy_ohm: classical.rho_xy_ohm,
        })
    }

    /// The transport lifetime tau = mu m* / e of the channel, s.
    pub fn transport_lifetime_s(&self) -> f64 {
        self.channel().mobility_m2_per_vs * self.effective_mass_ratio * ELECTRON_MASS_KG / ELEMENTARY_CHARGE_C
    }
}

/// One recorded point: the ideal tensor with the contact misalignment and the noise of
/// `synthetic_sweep` (rho_xx's deviate drawn before rho_xy's), so these sweeps carry the
/// same imperfections as the classical ones.
pub fn measured_point(
    field_t: f64,
    ideal: ResistivityTensor,
    noise: &SweepNoise,
    imperfections: &SweepImperfections,
    rng: &mut Rng,
) -> SweepPoint {
    let rho_xx = ideal.rho_xx_ohm_sq + imperfections.longitudinal_hall_pickup * ideal.rho_xy_ohm;
    let rho_xy = ideal.rho_xy_ohm + imperfections.hall_misalignment * ideal.rho_xx_ohm_sq;
    let sd_xx = noise.absolute_ohm + noise.relative * rho_xx.abs();
    let sd_xy = noise.absolute_ohm + noise.relative * rho_xy.abs();
    SweepPoint::new(
        field_t,
        rho_xx + sd_xx * rng.standard_normal(),
        rho_xy + sd_xy * rng.standard_normal(),
    )
    .with_uncertainty(ResistivityUncertainty::independent(sd_xx, sd_xy))
}

/// The lowest field of the oscillation sweeps above which the oscillation's amplitude
/// rho_0 a R_T R_D exceeds one noise standard deviation of rho_xx, T; `None` if it never
/// does below 9 T. The amplitude grows with B faster than the noise, so one crossing.
fn amplitude_above_noise_from_t(
    transport: &QuantumTransport,
    model: &SdhModel,
    temperature_k: f64,
) -> anyhow::Result<Option<f64>> {
    let carriers = transport.carriers();
    let excess = |field_t: f64| -> anyhow::Result<f64> {
        let amplitude = model.background_ohm_sq[0] * model.components[0].envelope(temperature_k, field_t);
        let background = resistivity_tensor(&carriers, field_t)?.rho_xx_ohm_sq;
        let noise = transport.sdh_noise.absolute_ohm + transport.sdh_noise.relative * background;
        Ok(amplitude - noise)
    };
    let (mut low, mut high) = (SDH_MIN_FIELD_T, MAX_FIELD_T);
    if excess(high)? <= 0.0 {
        return Ok(None);
    }
    if excess(low)? > 0.0 {
        return Ok(Some(low));
    }
    for _ in 0..60 {
        let middle = 0.5 * (low + high);
        if excess(middle)? > 0.0 {
            high = middle;
        } else {
            low = middle;
        }
    }
    Ok(Some(0.5 * (low + high)))
}

/// The truth-file entry of a sweep's noise: each of rho_xx and rho_xy gets a standard
/// deviation of `absolute_ohm + relative |rho|`.
pub fn noise_truth(noise: &SweepNoise) -> Json {
    Json::object([
        ("absolute_ohm", Json::Number(noise.absolute_ohm)),
        ("relative", Json::Number(noise.relative)),
    ])
}

fn layer_truth(layer: &Layer) -> Json {
    Json::object([
        ("layer", Json::text(layer.name)),
        ("kind", Json::text(layer.carrier.kind.name())),
        ("carrier_type", Json::text(layer.carrier.kind.code())),
        ("sheet_density_m2", Json::Number(layer.carrier.sheet_density_m2)),
        ("mobility_m2_per_Vs", Json::Number(layer.carrier.mobility_m2_per_vs)),
    ])
}

fn sdh_truth(transport: &QuantumTransport, model: &SdhModel, fields: &[f64]) -> anyhow::Result<Json> {
    let component = &model.components[0];
    let rho_0 = model.background_ohm_sq[0];
    let quantum_lifetime = quantum_lifetime_s(transport.dingle_temperature_k);
    let mut temperatures = Vec::new();
    for &temperature_k in transport.sdh_temperatures_k {
        let mut entries = vec![
            ("temperature_K".to_owned(), Json::Number(temperature_k)),
            (
                "thermal_damping_argument_9T".to_owned(),
                Json::Number(thermal_damping_argument(
                    temperature_k,
                    transport.effective_mass_ratio,
                    MAX_FIELD_T,
                )),
            ),
            (
                "thermal_damping_9T".to_owned(),
                Json::Number(thermal_damping_factor(
                    temperature_k,
                    transport.effective_mass_ratio,
                    MAX_FIELD_T,
                )),
            ),
            (
                "oscillation_amplitude_9T_ohm_sq".to_owned(),
                Json::Number(rho_0 * component.envelope(temperature_k, MAX_FIELD_T)),
            ),
        ];
        if let Some(field_t) = amplitude_above_noise_from_t(transport, model, temperature_k)? {
            entries.push(("amplitude_above_noise_from_T".to_owned(), Json::Number(field_t)));
        }
        temperatures.push(Json::Object(entries));
    }
    let classical_9t = resistivity_tensor(&transport.carriers(), MAX_FIELD_T)?;
    let inverse_step = (1.0 / SDH_MIN_FIELD_T - 1.0 / MAX_FIELD_T) / (SDH_POINTS_PER_BRANCH - 1) as f64;
    Ok(Json::object([
        ("file", Json::text("sdh-sweeps.csv")),
        ("seed", Json::Integer(i64::try_from(transport.sdh_seed)?)),
        (
            "model",
            Json::text(
                "rho_xx = classical two-carrier rho_xx(B) + rho_0 a R_T R_D cos(2 pi F / |B| + phi), the Lifshitz-Kosevich first harmonic in the Ando form; rho_xy classical",
            ),
        ),
        ("frequency_T", Json::Number(component.frequency_t)),
        ("spin_degeneracy", Json::Number(transport.spin_degeneracy)),
        ("sheet_density_m2", Json::Number(transport.channel().sheet_density_m2)),
        ("effective_mass_ratio", Json::Number(component.effective_mass_ratio)),
        ("dingle_temperature_K", Json::Number(component.dingle_temperature_k)),
        ("quantum_lifetime_s", Json::Number(quantum_lifetime)),
        ("transport_lifetime_s", Json::Number(transport.transport_lifetime_s())),
        (
            "transport_to_quantum_lifetime_ratio",
            Json::Number(transport.transport_lifetime_s() / quantum_lifetime),
        ),
        ("amplitude", Json::Number(component.amplitude)),
        ("phase_rad", Json::Number(component.phase_rad)),
        ("g_factor", Json::Number(component.g_factor)),
        ("zero_field_rho_xx_ohm_sq", Json::Number(rho_0)),
        ("classical_rho_xx_9T_ohm_sq", Json::Number(classical_9t.rho_xx_ohm_sq)),
        (
            "dingle_damping_9T",
            Json::Number(dingle_damping(
                component.dingle_temperature_k,
                component.effective_mass_ratio,
                MAX_FIELD_T,
            )),
        ),
        ("lifshitz_kosevich_field_per_kelvin_T_per_K", Json::Number(LK_FIELD_PER_KELVIN)),
        (
            "field_program",
            Json::object([
                ("min_field_T", Json::Number(SDH_MIN_FIELD_T)),
                ("max_field_T", Json::Number(MAX_FIELD_T)),
                ("spacing", Json::text("equal steps in 1/B on each branch; branches mirrored")),
                ("inverse_field_step_per_T", Json::Number(inverse_step)),
                ("period_in_inverse_field_per_T", Json::Number(1.0 / component.frequency_t)),
                ("field_resolution_T", Json::Number(FIELD_RESOLUTION_T)),
                ("points_per_branch", Json::Integer(i64::try_from(SDH_POINTS_PER_BRANCH)?)),
                ("points_per_sweep", Json::Integer(i64::try_from(fields.len())?)),
            ]),
        ),
        ("noise", noise_truth(&transport.sdh_noise)),
        ("temperatures", Json::Array(temperatures)),
    ]))
}

/// Runs the invented oscillation sweeps of `transport` in the order of their temperatures,
/// all from one seed.
pub fn generate(transport: &QuantumTransport) -> anyhow::Result<GeneratedQuantum> {
    let sample = &transport.sample;
    let model = transport.sdh_model()?;
    let fields = sdh_fields();
    let mut rng = Rng::seeded(transport.sdh_seed);
    let mut sdh_rows = Vec::with_capacity(fields.len() * transport.sdh_temperatures_k.len());
    for &temperature_k in transport.sdh_temperatures_k {
        for &field_t in &fields {
            let ideal = transport.sdh_tensor(&model, field_t, temperature_k)?;
            sdh_rows.push(SweepRow {
                sample: sample.name,
                temperature_k,
                point: measured_point(field_t, ideal, &transport.sdh_noise, &sample.imperfections, &mut rng),
            });
        }
    }

    let truth = Json::object([
        ("description", Json::text(transport.description)),
        ("generator", Json::text("mobilis-demo-gen")),
        ("material", Json::text(transport.material)),
        ("sample", Json::text(sample.name)),
        ("structure", Json::text(sample.structure)),
        (
            "hall_misalignment",
            Json::Number(sample.imperfections.hall_misalignment),
        ),
        (
            "longitudinal_hall_pickup",
            Json::Number(sample.imperfections.longitudinal_hall_pickup),
        ),
        (
            "carriers",
            Json::Array(transport.layers.iter().map(layer_truth).collect()),
        ),
        ("oscillations", sdh_truth(transport, &model, &fields)?),
    ]);
    Ok(GeneratedQuantum { sdh_rows, truth })
}

#[cfg(test)]
mod tests;
