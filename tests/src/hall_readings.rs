//! The raw readings of a temperature run of compensated n-type silicon van der Pauw pieces,
//! generated with the forward models of `mobilis_physics::forward` and a fixed seed: the data
//! of the `hall_reduce` and `daemon` benchmarks. Each piece is measured at 625 temperatures
//! (26 K to 650 K), 16 readings each (8 resistance readings at zero field, 8 Hall readings
//! at +-0.5 T), with voltmeter noise, thermoelectric offsets, Hall misalignment, controller
//! jitter and the six lab wirings. The sample sheet (thickness, Hall factor) is the
//! `samples` table of `hall.reduce`.

use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::mobility::hall_scattering_factor;
use mobilis_physics::forward::readings::{
    lab_van_der_pauw_series, van_der_pauw_readings, CurrentReversal, LabConditions, MeasurementProtocol,
    VanDerPauwSample, VoltageNoise, VoltmeterWiring,
};
use mobilis_physics::forward::statistics::{BandModel, Dopants};
use mobilis_physics::forward::transport::{n_type_transport, MobilityModel};
use mobilis_physics::readings::RawReading;
use polars::prelude::*;

/// The seed of every random number of the dataset.
pub const SEED: u64 = 0xB3AC_4A11_2025;
/// Samples of the standard million-reading run.
pub const SAMPLE_COUNT: usize = 100;
/// Setpoints every 1 K from here: twice the default temperature tolerance of `hall.reduce`
/// (0.5 K), so that controller jitter never merges two steps into one row.
const FIRST_SETPOINT_K: f64 = 26.0;
pub const SETPOINT_COUNT: usize = 625;
pub const READINGS_PER_TEMPERATURE: usize = 16;
const HALL_FIELD_T: f64 = 0.5;

/// cm^-3 to m^-3.
const PER_CM3: f64 = 1e6;
/// Phosphorus donors, boron acceptors, eV.
const DONOR_IONIZATION_EV: f64 = 0.045;
const ACCEPTOR_IONIZATION_EV: f64 = 0.045;
/// Voltmeter noise: 0.5 uV floor plus 1e-4 of the reading.
const NOISE: VoltageNoise = VoltageNoise {
    absolute_v: 0.5e-6,
    relative: 1e-4,
};
/// Standard deviation of the temperature controller about its setpoint, K.
const CONTROLLER_JITTER_K: f64 = 0.02;
/// Thermoelectric offsets are drawn uniformly within +- this, V: a few microvolts, as in a
/// cryostat with well-anchored leads. Tens of microvolts against the few millivolts the
/// source's 1-2-5 steps leave would raise `current_reversal` and `large_offset` on most
/// rows, and the benchmark is meant to time the common, mostly clean case.
const THERMOELECTRIC_OFFSET_LIMIT_V: f64 = 10e-6;
/// The voltage the lab aims for when it picks the current, V.
const TARGET_VOLTAGE_V: f64 = 10e-3;
/// Currents the source offers, A: 1-2-5 steps from 1 nA to 1 mA.
const CURRENT_LADDER_A: [f64; 19] = [
    1e-9, 2e-9, 5e-9, 1e-8, 2e-8, 5e-8, 1e-7, 2e-7, 5e-7, 1e-6, 2e-6, 5e-6, 1e-5, 2e-5, 5e-5, 1e-4, 2e-4, 5e-4, 1e-3,
];
/// Every way a lab reverses the current and wires the voltmeter; the pieces take turns, so
/// the reduction's canonicalisation sees all of them.
const WIRINGS: [(CurrentReversal, VoltmeterWiring); 6] = [
    (CurrentReversal::SourceSign, VoltmeterWiring::Canonical),
    (CurrentReversal::SwapLeads, VoltmeterWiring::FollowsCurrentLeads),
    (CurrentReversal::SourceSign, VoltmeterWiring::Reversed),
    (CurrentReversal::SwapLeads, VoltmeterWiring::Canonical),
    (CurrentReversal::SourceSign, VoltmeterWiring::FollowsCurrentLeads),
    (CurrentReversal::SwapLeads, VoltmeterWiring::Reversed),
];

/// The readings table and the sample sheet of `sample_count` pieces, each at
/// [`SETPOINT_COUNT`] temperatures with [`READINGS_PER_TEMPERATURE`] readings: 10,000
/// readings per piece. The pieces are drawn in order from one seeded stream, so the first
/// pieces of a larger run are those of a smaller one.
pub fn generate(sample_count: usize) -> Result<(DataFrame, DataFrame), String> {
    let bands = BandModel::silicon();
    let model = mobility_model();
    let mut rng = Rng::seeded(SEED);
    let mut tables = Tables::with_capacity(sample_count * SETPOINT_COUNT * READINGS_PER_TEMPERATURE);
    for index in 0..sample_count {
        let piece = Piece::draw(index, &mut rng);
        let name = piece.name.as_str();
        for step in 0..SETPOINT_COUNT {
            let setpoint_k = FIRST_SETPOINT_K + step as f64;
            // The lab records the controller's reading to 1 mK once per step.
            let temperature = ((setpoint_k + CONTROLLER_JITTER_K * rng.standard_normal()) * 1000.0).round() / 1000.0;
            let layer = n_type_transport(&piece.dopants, &bands, piece.thickness_m, temperature, &model)
                .map_err(|error| format!("transport model of {name} at {temperature} K: {error}"))?;
            let misalignment_ohm = piece.misalignment_fraction * layer.sheet_resistance_ohm_sq;
            let mut offsets_v = [0.0; 6];
            for offset in &mut offsets_v {
                *offset = rng.uniform_between(-THERMOELECTRIC_OFFSET_LIMIT_V, THERMOELECTRIC_OFFSET_LIMIT_V);
            }
            let sample = VanDerPauwSample {
                thermoelectric_offsets_v: offsets_v,
                hall_misalignment_ohm: [misalignment_ohm, -misalignment_ohm],
                ..VanDerPauwSample::ideal(
                    name,
                    temperature,
                    layer.sheet_resistance_ohm_sq,
                    piece.resistance_ratio_b_over_a,
                    layer.sheet_hall_coefficient_m2_per_c,
                )
            };
            let (resistance_a, resistance_b) = sample
                .characteristic_resistances_ohm()
                .map_err(|error| format!("{name} at {temperature} K: {error}"))?;
            let hall_ohm = layer.sheet_hall_coefficient_m2_per_c.abs() * HALL_FIELD_T + misalignment_ohm.abs();
            let protocol = piece.protocol(choose_current_a(resistance_a.max(resistance_b).max(hall_ohm)));
            let readings = van_der_pauw_readings(&sample, &protocol, &mut rng)
                .map_err(|error| format!("readings of {name} at {temperature} K: {error}"))?;
            if readings.len() != READINGS_PER_TEMPERATURE {
                return Err(format!(
                    "the protocol gave {} readings per temperature, {READINGS_PER_TEMPERATURE} expected",
                    readings.len()
                ));
            }
            tables.push_readings(index, &readings);
        }
        tables.push_piece(piece.name, piece.thickness_m);
    }
    tables.finish(model.hall_factor)
}

/// The same kind of run as [`generate`] as a real cryostat records it
/// ([`LabConditions::TYPICAL`]): the stage drifts by 30 mK between readings, so every
/// reading of a temperature has its own temperature and `hall.reduce` corrects the drift;
/// the current is autoranged per temperature, the field has remanence and wander, and each
/// piece's calibrations are off by their typical errors (the sheet states the thickness as
/// the lab believes it). Other seeds than [`generate`]'s, and fixed thermoelectric offsets
/// and misalignment per piece.
pub fn generate_drifting(sample_count: usize) -> Result<(DataFrame, DataFrame), String> {
    let bands = BandModel::silicon();
    let model = mobility_model();
    let mut rng = Rng::seeded(SEED ^ DRIFTING_SEED);
    let setpoints_k: Vec<f64> = (0..SETPOINT_COUNT).map(|step| FIRST_SETPOINT_K + step as f64).collect();
    let lab = LabConditions::TYPICAL;
    let mut tables = Tables::with_capacity(sample_count * SETPOINT_COUNT * READINGS_PER_TEMPERATURE);
    for index in 0..sample_count {
        let piece = Piece::draw(index, &mut rng);
        let mut offsets_v = [0.0; 6];
        for offset in &mut offsets_v {
            *offset = rng.uniform_between(-THERMOELECTRIC_OFFSET_LIMIT_V, THERMOELECTRIC_OFFSET_LIMIT_V);
        }
        let sample_at = |temperature_k: f64| {
            let layer = n_type_transport(&piece.dopants, &bands, piece.thickness_m, temperature_k, &model)?;
            let misalignment_ohm = piece.misalignment_fraction * layer.sheet_resistance_ohm_sq;
            Ok(VanDerPauwSample {
                thermoelectric_offsets_v: offsets_v,
                hall_misalignment_ohm: [misalignment_ohm, -misalignment_ohm],
                ..VanDerPauwSample::ideal(
                    piece.name.as_str(),
                    temperature_k,
                    layer.sheet_resistance_ohm_sq,
                    piece.resistance_ratio_b_over_a,
                    layer.sheet_hall_coefficient_m2_per_c,
                )
            })
        };
        // The autorange picks the current per temperature; this one is its fallback.
        let protocol = piece.protocol(CURRENT_LADDER_A[9]);
        let series = lab_van_der_pauw_series(&setpoints_k, sample_at, &protocol, &lab, &mut rng)
            .map_err(|error| format!("drifting series of {}: {error}", piece.name))?;
        tables.push_readings(index, &series.readings);
        let stated_thickness_m = series.calibration.stated_thickness_m(piece.thickness_m);
        tables.push_piece(piece.name, stated_thickness_m);
    }
    tables.finish(model.hall_factor)
}

/// Mixed into [`SEED`] for [`generate_drifting`].
const DRIFTING_SEED: u64 = 0xD41F_7000;

/// Silicon electrons with the Hall factor a lab would type for acoustic-phonon scattering,
/// 3 pi / 8 rounded; the sheet gives the reduction the same value, so its densities are
/// the true ones.
fn mobility_model() -> MobilityModel {
    MobilityModel {
        hall_factor: (hall_scattering_factor(-0.5) * 100.0).round() / 100.0,
        ..MobilityModel::silicon_electrons()
    }
}

/// What is drawn once per piece.
struct Piece {
    name: String,
    dopants: Dopants,
    thickness_m: f64,
    resistance_ratio_b_over_a: f64,
    misalignment_fraction: f64,
    current_reversal: CurrentReversal,
    voltmeter_wiring: VoltmeterWiring,
}

impl Piece {
    fn draw(index: usize, rng: &mut Rng) -> Piece {
        // Donors log-uniform over two decades, 5e14 to 5e16 cm^-3, compensated by 2 to 15 %
        // acceptors: lightly doped epitaxial and bulk silicon, frozen out at the cold end.
        let donor_density_m3 = 5e14 * PER_CM3 * 100f64.powf(rng.uniform());
        let acceptor_density_m3 = donor_density_m3 * rng.uniform_between(0.02, 0.15);
        let thickness_m = rng.uniform_between(300e-6, 650e-6);
        let resistance_ratio_b_over_a = rng.uniform_between(1.0, 1.4);
        let misalignment_fraction = rng.uniform_between(-0.04, 0.04);
        let (current_reversal, voltmeter_wiring) = WIRINGS[index % WIRINGS.len()];
        Piece {
            name: format!("Si-{index:03}"),
            dopants: Dopants::new(
                donor_density_m3,
                acceptor_density_m3,
                DONOR_IONIZATION_EV,
                ACCEPTOR_IONIZATION_EV,
            ),
            thickness_m,
            resistance_ratio_b_over_a,
            misalignment_fraction,
            current_reversal,
            voltmeter_wiring,
        }
    }

    /// Eight resistance readings at zero field and eight Hall readings at +-0.5 T.
    fn protocol(&self, current_a: f64) -> MeasurementProtocol {
        MeasurementProtocol {
            current_reversal: self.current_reversal,
            voltmeter_wiring: self.voltmeter_wiring,
            noise: NOISE,
            ..MeasurementProtocol::van_der_pauw(current_a, vec![HALL_FIELD_T])
        }
        .with_resistance_at_zero_and_hall_in_field()
    }
}

/// The readings and the sheet, column by column.
struct Tables {
    sample_index: Vec<u32>,
    temperature_k: Vec<f64>,
    field_t: Vec<f64>,
    contacts: [Vec<i64>; 4],
    current_a: Vec<f64>,
    voltage_v: Vec<f64>,
    names: Vec<String>,
    thicknesses_m: Vec<f64>,
}

impl Tables {
    fn with_capacity(capacity: usize) -> Tables {
        Tables {
            sample_index: Vec::with_capacity(capacity),
            temperature_k: Vec::with_capacity(capacity),
            field_t: Vec::with_capacity(capacity),
            contacts: std::array::from_fn(|_| Vec::with_capacity(capacity)),
            current_a: Vec::with_capacity(capacity),
            voltage_v: Vec::with_capacity(capacity),
            names: Vec::new(),
            thicknesses_m: Vec::new(),
        }
    }

    fn push_readings(&mut self, sample_index: usize, readings: &[RawReading]) {
        for reading in readings {
            self.sample_index.push(sample_index as u32);
            self.temperature_k.push(reading.temperature_k);
            self.field_t.push(reading.field_t);
            self.contacts[0].push(reading.i_in);
            self.contacts[1].push(reading.i_out);
            self.contacts[2].push(reading.v_pos);
            self.contacts[3].push(reading.v_neg);
            self.current_a.push(reading.current_a);
            self.voltage_v.push(reading.voltage_v);
        }
    }

    fn push_piece(&mut self, name: String, stated_thickness_m: f64) {
        self.names.push(name);
        self.thicknesses_m.push(stated_thickness_m);
    }

    fn finish(self, hall_factor: f64) -> Result<(DataFrame, DataFrame), String> {
        let sample: Vec<&str> = self
            .sample_index
            .iter()
            .map(|&index| self.names[index as usize].as_str())
            .collect();
        let [i_in, i_out, v_pos, v_neg] = self.contacts;
        let height = sample.len();
        let readings = DataFrame::new(
            height,
            vec![
                Column::new("sample".into(), sample),
                Column::new("temperature_K".into(), self.temperature_k),
                Column::new("field_T".into(), self.field_t),
                Column::new("i_in".into(), i_in),
                Column::new("i_out".into(), i_out),
                Column::new("v_pos".into(), v_pos),
                Column::new("v_neg".into(), v_neg),
                Column::new("current_A".into(), self.current_a),
                Column::new("voltage_V".into(), self.voltage_v),
            ],
        )
        .map_err(|error| format!("cannot build the readings table: {error}"))?;
        let sample_count = self.names.len();
        let sheet = DataFrame::new(
            sample_count,
            vec![
                Column::new("sample".into(), self.names.clone()),
                Column::new("thickness_m".into(), self.thicknesses_m),
                Column::new("hall_factor".into(), vec![hall_factor; sample_count]),
            ],
        )
        .map_err(|error| format!("cannot build the sample sheet: {error}"))?;
        Ok((readings, sheet))
    }
}

/// The largest current of the ladder that keeps the largest |V| at or below the target, as
/// a lab picks it.
fn choose_current_a(largest_resistance_ohm: f64) -> f64 {
    let wanted = TARGET_VOLTAGE_V / largest_resistance_ohm;
    CURRENT_LADDER_A
        .iter()
        .copied()
        .rev()
        .find(|&current| current <= wanted)
        .unwrap_or(CURRENT_LADDER_A[0])
}
