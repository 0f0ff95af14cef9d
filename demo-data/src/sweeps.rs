//! Field sweeps of the resistivity tensor, shared by the wafers the invented lab measures in
//! its magnet: the field program, the generation of each sweep from classical Drude carriers
//! with `mobilis_physics::forward::tensor::synthetic_sweep`, the `sweep` table it writes and
//! the truth file that records the invented carriers.
//!
//! A wafer is a set of samples, each swept at one or more temperatures. At each temperature
//! a sample is a few carriers conducting in parallel (a channel, a buffer, a surface layer,
//! a bulk film). The generator evaluates their summed conductivity tensor at every recorded
//! field, inverts it, mixes in the sample's contact misalignment and adds Gaussian noise.

use crate::format::{number, Json};
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::tensor::{
    high_field_hall_coefficient_m2_per_c, low_field_hall_coefficient_m2_per_c, resistivity_tensor, sum_conductivity,
    symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise,
};
use mobilis_physics::sweep::SweepPoint;

/// The columns of the `sweep` table, in the order of the contract.
pub const SWEEP_COLUMNS: [&str; 5] = ["sample", "temperature_K", "field_T", "rho_xx_ohm_sq", "rho_xy_ohm"];

/// The largest field of every sweep, T (the lab's magnet).
pub const MAX_FIELD_T: f64 = 9.0;
/// Setpoints per field sign: 0.125 T steps from 0 to 9 T.
pub const STEPS_PER_SIGN: usize = 72;
/// On the negative branch the field the sample sees is this much above each setpoint, T:
/// the remanent field a superconducting coil keeps after it has been reversed. It makes the
/// two branches' |B| differ, so symmetrization has to interpolate them onto a common grid
/// rather than pair the points one to one.
pub const NEGATIVE_BRANCH_OFFSET_T: f64 = 0.004;
/// Resolution of the field readback, T; every field is recorded rounded to it.
pub const FIELD_RESOLUTION_T: f64 = 1e-4;
/// Significant digits the lock-in records of rho_xx and rho_xy.
const RESISTIVITY_DIGITS: usize = 7;

/// One carrier population of a sample and where it lives.
pub struct Layer {
    /// What the carriers are, e.g. "2D electron channel".
    pub name: &'static str,
    pub carrier: Carrier,
    /// The thickness the carriers spread through, for a bulk layer whose volume density the
    /// truth file should also give; `None` for a 2D layer.
    pub thickness_m: Option<f64>,
}

/// The carriers of a sample at one sweep temperature.
pub struct SweepAt {
    pub temperature_k: f64,
    pub layers: &'static [Layer],
}

impl SweepAt {
    pub fn carriers(&self) -> Vec<Carrier> {
        self.layers.iter().map(|layer| layer.carrier).collect()
    }
}

/// One sample of a wafer and its sweeps.
pub struct SweepSample {
    pub name: &'static str,
    /// A short description of the layer stack, for the truth file.
    pub structure: &'static str,
    /// The film thickness, for samples whose volume quantities a user may want; `None` for
    /// a heterostructure, whose conducting layers are sheets.
    pub thickness_m: Option<f64>,
    /// The contacts' misalignment. It is a property of the contact geometry, so one value
    /// serves every temperature.
    pub imperfections: SweepImperfections,
    pub sweeps: &'static [SweepAt],
}

/// A wafer measured in the magnet: what goes into one directory of the demo data.
pub struct Wafer {
    /// The directory under the demo-data root.
    pub directory: &'static str,
    /// The `material` entry of the truth file.
    pub material: &'static str,
    /// The `description` entry of the truth file.
    pub description: &'static str,
    /// The seed of every random number of this wafer.
    pub seed: u64,
    pub noise: SweepNoise,
    pub samples: &'static [SweepSample],
}

/// One row of the `sweep` table.
pub struct SweepRow {
    pub sample: &'static str,
    pub temperature_k: f64,
    pub point: SweepPoint,
}

/// Everything the generator produced for one wafer, before it is written.
pub struct GeneratedSweeps {
    pub rows: Vec<SweepRow>,
    pub truth: Json,
    pub sweep_count: usize,
}

/// `field_t` rounded to the field readback's resolution, [`FIELD_RESOLUTION_T`].
pub fn round_to_resolution(field_t: f64) -> f64 {
    (field_t / FIELD_RESOLUTION_T).round() * FIELD_RESOLUTION_T
}

/// The recorded fields of one sweep, in the order the lab takes them: up from the negative
/// end to +9 T. The positive branch sits on the setpoints (0, 0.125, ... 9 T); the negative
/// branch is offset by [`NEGATIVE_BRANCH_OFFSET_T`], so it ends at -8.996 T.
pub fn sweep_fields() -> anyhow::Result<Vec<f64>> {
    let setpoints = symmetric_fields(MAX_FIELD_T, STEPS_PER_SIGN)?;
    Ok(setpoints
        .into_iter()
        .map(|setpoint| {
            if setpoint < 0.0 {
                setpoint + NEGATIVE_BRANCH_OFFSET_T
            } else {
                setpoint
            }
        })
        // The model is evaluated at the recorded (rounded) field, so the file is consistent
        // with its own field column.
        .map(round_to_resolution)
        .collect())
}

/// The truth-file entry of one carrier population.
pub fn layer_truth(layer: &Layer) -> Json {
    let carrier = &layer.carrier;
    let mut entries = vec![
        ("layer".to_owned(), Json::text(layer.name)),
        ("kind".to_owned(), Json::text(carrier.kind.name())),
        ("carrier_type".to_owned(), Json::text(carrier.kind.code())),
        ("sheet_density_m2".to_owned(), Json::Number(carrier.sheet_density_m2)),
        (
            "mobility_m2_per_Vs".to_owned(),
            Json::Number(carrier.mobility_m2_per_vs),
        ),
    ];
    if let Some(thickness_m) = layer.thickness_m {
        entries.push(("thickness_m".to_owned(), Json::Number(thickness_m)));
        entries.push((
            "density_m3".to_owned(),
            Json::Number(carrier.sheet_density_m2 / thickness_m),
        ));
    }
    Json::Object(entries)
}

/// The positive field below [`MAX_FIELD_T`] at which rho_xy changes sign, T, if its sign at
/// 9 T differs from the low-field one: where the mobile minority carriers stop dominating
/// the Hall signal. Found by bisection (one crossing), which needs nothing but the tensor.
fn hall_sign_change_t(carriers: &[Carrier]) -> Option<f64> {
    let hall_sign = |field_t: f64| sum_conductivity(carriers, field_t).sigma_xy_s.signum();
    // Far below every 1/mu, the sign is that of the low-field limit.
    let (mut low, mut high) = (1e-6, MAX_FIELD_T);
    let low_sign = hall_sign(low);
    if low_sign == hall_sign(high) {
        return None;
    }
    for _ in 0..100 {
        let middle = 0.5 * (low + high);
        if hall_sign(middle) == low_sign {
            low = middle;
        } else {
            high = middle;
        }
    }
    Some(0.5 * (low + high))
}

fn sweep_truth(sweep: &SweepAt) -> anyhow::Result<Json> {
    let carriers = sweep.carriers();
    let zero_field = resistivity_tensor(&carriers, 0.0)?;
    let at_max = resistivity_tensor(&carriers, MAX_FIELD_T)?;
    let high_field = high_field_hall_coefficient_m2_per_c(&carriers)?
        .ok_or_else(|| anyhow::anyhow!("the invented carriers are exactly compensated; change a sheet density"))?;
    let mut entries = vec![
        ("temperature_K", Json::Number(sweep.temperature_k)),
        ("carriers", Json::Array(sweep.layers.iter().map(layer_truth).collect())),
        ("sheet_resistance_0T_ohm_sq", Json::Number(zero_field.rho_xx_ohm_sq)),
        ("rho_xx_9T_ohm_sq", Json::Number(at_max.rho_xx_ohm_sq)),
        ("rho_xy_9T_ohm", Json::Number(at_max.rho_xy_ohm)),
        (
            "low_field_sheet_hall_coefficient_m2_per_C",
            Json::Number(low_field_hall_coefficient_m2_per_c(&carriers)?),
        ),
        ("high_field_sheet_hall_coefficient_m2_per_C", Json::Number(high_field)),
    ];
    if let Some(field_t) = hall_sign_change_t(&carriers) {
        entries.push(("rho_xy_sign_change_T", Json::Number(field_t)));
    }
    Ok(Json::Object(
        entries
            .into_iter()
            .map(|(key, value)| (key.to_owned(), value))
            .collect(),
    ))
}

fn sample_truth(sample: &SweepSample) -> anyhow::Result<Json> {
    let mut entries = vec![
        ("sample".to_owned(), Json::text(sample.name)),
        ("structure".to_owned(), Json::text(sample.structure)),
    ];
    if let Some(thickness_m) = sample.thickness_m {
        entries.push(("thickness_m".to_owned(), Json::Number(thickness_m)));
    }
    entries.push((
        "hall_misalignment".to_owned(),
        Json::Number(sample.imperfections.hall_misalignment),
    ));
    entries.push((
        "longitudinal_hall_pickup".to_owned(),
        Json::Number(sample.imperfections.longitudinal_hall_pickup),
    ));
    let temperatures = sample
        .sweeps
        .iter()
        .map(sweep_truth)
        .collect::<anyhow::Result<Vec<_>>>()?;
    entries.push(("temperatures".to_owned(), Json::Array(temperatures)));
    Ok(Json::Object(entries))
}

/// Runs the invented sweeps of `wafer`: every sample at every temperature, in the order of
/// the definitions, all drawing on one generator seeded with the wafer's seed.
pub fn generate(wafer: &Wafer) -> anyhow::Result<GeneratedSweeps> {
    let fields = sweep_fields()?;
    let mut rng = Rng::seeded(wafer.seed);
    let mut rows = Vec::new();
    let mut sweep_count = 0;
    let mut sample_truths = Vec::new();
    for sample in wafer.samples {
        for sweep in sample.sweeps {
            let points = synthetic_sweep(
                &sweep.carriers(),
                &fields,
                &wafer.noise,
                &sample.imperfections,
                &mut rng,
            )?;
            rows.extend(points.into_iter().map(|point| SweepRow {
                sample: sample.name,
                temperature_k: sweep.temperature_k,
                point,
            }));
            sweep_count += 1;
        }
        sample_truths.push(sample_truth(sample)?);
    }
    let truth = Json::object([
        ("description", Json::text(wafer.description)),
        ("generator", Json::text("mobilis-demo-gen")),
        ("seed", Json::Integer(i64::try_from(wafer.seed)?)),
        ("material", Json::text(wafer.material)),
        (
            "model",
            Json::text(
                "classical Drude carriers conducting in parallel, each with its own constant relaxation time (Hall factor 1); no quantum oscillations",
            ),
        ),
        (
            "field_program",
            Json::object([
                ("max_field_T", Json::Number(MAX_FIELD_T)),
                ("step_T", Json::Number(MAX_FIELD_T / STEPS_PER_SIGN as f64)),
                ("negative_branch_offset_T", Json::Number(NEGATIVE_BRANCH_OFFSET_T)),
                ("field_resolution_T", Json::Number(FIELD_RESOLUTION_T)),
                ("points_per_sweep", Json::Integer(i64::try_from(fields.len())?)),
            ]),
        ),
        (
            "noise",
            Json::object([
                ("absolute_ohm", Json::Number(wafer.noise.absolute_ohm)),
                ("relative", Json::Number(wafer.noise.relative)),
            ]),
        ),
        ("samples", Json::Array(sample_truths)),
    ]);
    Ok(GeneratedSweeps {
        rows,
        truth,
        sweep_count,
    })
}

/// sweeps.csv: the `sweep` role, one row per recorded field, sheet quantities in SI units.
pub fn sweeps_csv(rows: &[SweepRow]) -> String {
    let mut out = SWEEP_COLUMNS.join(",");
    out.push('\n');
    for row in rows {
        out.push_str(&format!(
            "{},{},{},{},{}\n",
            row.sample,
            number(row.temperature_k, 10),
            number(row.point.field_t, 10),
            number(row.point.rho_xx_ohm_sq, RESISTIVITY_DIGITS),
            number(row.point.rho_xy_ohm, RESISTIVITY_DIGITS),
        ));
    }
    out
}

#[cfg(test)]
mod tests;
