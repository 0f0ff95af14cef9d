//! The invented silicon reference wafer: its true parameters, the temperature run a small
//! epitaxy lab would make on two van der Pauw pieces cut from it, and the raw readings that
//! run produces, all from the forward models of `mobilis_physics::forward`.
//!
//! The wafer is lightly phosphorus-doped and compensated by a trace of boron. Its electron
//! density freezes out below about 100 K, which is what `carriers.freeze_out_fit` is meant
//! to recover: donor and acceptor densities and the donor ionization energy.

use crate::format::{number, Json};
use mobilis_numerics::noise::Rng;
use mobilis_physics::forward::mobility::hall_scattering_factor;
use mobilis_physics::forward::readings::{
    van_der_pauw_readings, CurrentReversal, MeasurementProtocol, VanDerPauwSample, VoltageNoise, VoltmeterWiring,
};
use mobilis_physics::forward::statistics::{BandModel, Dopants};
use mobilis_physics::forward::transport::{n_type_transport, MobilityModel, NTypeTransport};
use mobilis_physics::readings::{RawReading, READING_COLUMNS};

/// The seed of every random number in the scenario.
pub const SEED: u64 = 0x5111_C0DE_2025;

/// cm^-3 to m^-3.
const PER_CM3: f64 = 1e6;

/// Phosphorus and boron ionization energies, eV (Sze-type table: P 0.045, B 0.045).
const PHOSPHORUS_IONIZATION_EV: f64 = 0.045;
const BORON_IONIZATION_EV: f64 = 0.045;

/// The field of the Hall readings, T (measured at +B and -B).
const HALL_FIELD_T: f64 = 0.5;
/// The voltage the lab aims for when it picks the current, V.
const TARGET_VOLTAGE_V: f64 = 10e-3;
/// The source's range of currents, A.
const SMALLEST_CURRENT_A: f64 = 1e-9;
/// Voltmeter noise: 0.5 uV floor plus 1e-4 of the reading.
const NOISE: VoltageNoise = VoltageNoise {
    absolute_v: 0.5e-6,
    relative: 1e-4,
};
/// Standard deviation of the temperature controller about its setpoint, K.
const CONTROLLER_JITTER_K: f64 = 0.02;
/// Thermoelectric offsets are drawn uniformly within +- this, V.
const THERMOELECTRIC_OFFSET_LIMIT_V: f64 = 10e-6;
/// Significant digits the voltmeter records.
const VOLTAGE_DIGITS: usize = 7;

/// Currents the source offers, A: 1-2-5 steps from 1 nA to 10 mA.
const CURRENT_LADDER_A: [f64; 22] = [
    1e-9, 2e-9, 5e-9, 1e-8, 2e-8, 5e-8, 1e-7, 2e-7, 5e-7, 1e-6, 2e-6, 5e-6, 1e-5, 2e-5, 5e-5, 1e-4, 2e-4, 5e-4, 1e-3,
    2e-3, 5e-3, 1e-2,
];

/// One van der Pauw piece of the wafer and how the lab wired it.
pub struct Piece {
    pub name: &'static str,
    pub donor_density_m3: f64,
    pub acceptor_density_m3: f64,
    pub thickness_m: f64,
    /// R_B / R_A: how far the piece is from a symmetric square.
    pub resistance_ratio_b_over_a: f64,
    /// Hall misalignment as a fraction of the sheet resistance (diagonal 1-3; the other
    /// diagonal has the opposite value, as reciprocity requires).
    pub misalignment_fraction: f64,
    pub current_reversal: CurrentReversal,
    pub voltmeter_wiring: VoltmeterWiring,
}

/// The two pieces: the centre of the wafer, and its edge, where the doping is slightly
/// higher and the piece less square.
pub const PIECES: [Piece; 2] = [
    Piece {
        name: "SiRef-centre",
        donor_density_m3: 3.0e15 * PER_CM3,
        acceptor_density_m3: 2.0e14 * PER_CM3,
        thickness_m: 500e-6,
        resistance_ratio_b_over_a: 1.06,
        misalignment_fraction: 0.021,
        // A switch matrix that exchanges both lead pairs (the NIST R_21,34 / R_12,43 habit).
        current_reversal: CurrentReversal::SwapLeads,
        voltmeter_wiring: VoltmeterWiring::FollowsCurrentLeads,
    },
    Piece {
        name: "SiRef-edge",
        donor_density_m3: 3.2e15 * PER_CM3,
        acceptor_density_m3: 2.4e14 * PER_CM3,
        thickness_m: 492e-6,
        resistance_ratio_b_over_a: 1.27,
        misalignment_fraction: -0.034,
        // A bipolar source on fixed leads.
        current_reversal: CurrentReversal::SourceSign,
        voltmeter_wiring: VoltmeterWiring::Canonical,
    },
];

/// The Hall factor the lab assumes and the generator uses, rounded from the acoustic-phonon
/// value 3 pi / 8 (tau ~ E^-1/2, Putley 1960) as a lab would type it.
pub fn hall_factor() -> f64 {
    (hall_scattering_factor(-0.5) * 100.0).round() / 100.0
}

/// Temperature setpoints, K: 20 to 100 every 5 K, then 110 to 400 every 10 K.
pub fn setpoints_k() -> Vec<f64> {
    let low = (20..=100).step_by(5);
    let high = (110..=400).step_by(10);
    low.chain(high).map(f64::from).collect()
}

/// Everything the generator produced, before it is written.
pub struct Generated {
    pub readings: Vec<RawReading>,
    /// (sample, temperature, true transport) of every temperature step; the tests compare
    /// the readings with it.
    #[cfg_attr(not(test), allow(dead_code))]
    pub layers: Vec<(String, f64, NTypeTransport)>,
    pub truth: Json,
    pub sample_rows: Vec<(String, f64, f64)>,
    pub temperature_count: usize,
}

/// The electron-transport model of the wafer.
fn mobility_model() -> MobilityModel {
    MobilityModel {
        hall_factor: hall_factor(),
        ..MobilityModel::silicon_electrons()
    }
}

/// The largest current of the ladder that keeps the largest |V| at or below the target.
fn choose_current_a(largest_resistance_ohm: f64) -> f64 {
    let wanted = TARGET_VOLTAGE_V / largest_resistance_ohm;
    CURRENT_LADDER_A
        .iter()
        .copied()
        .rev()
        .find(|&current| current <= wanted)
        .unwrap_or(SMALLEST_CURRENT_A)
}

fn temperature_truth(
    temperature_k: f64,
    setpoint_k: f64,
    current_a: f64,
    piece: &Piece,
    layer: &NTypeTransport,
) -> Json {
    let state = &layer.equilibrium;
    Json::object([
        ("setpoint_K", Json::Number(setpoint_k)),
        ("temperature_K", Json::Number(temperature_k)),
        ("current_A", Json::Number(current_a)),
        ("electron_density_m3", Json::Number(state.electron_density_m3)),
        ("hole_density_m3", Json::Number(state.hole_density_m3)),
        (
            "sheet_density_m2",
            Json::Number(state.electron_density_m3 * piece.thickness_m),
        ),
        ("ionized_donor_fraction", Json::Number(state.ionized_donor_fraction)),
        (
            "fermi_level_below_conduction_band_eV",
            Json::Number(state.fermi_level_below_conduction_ev),
        ),
        (
            "lattice_mobility_m2_per_Vs",
            Json::Number(layer.lattice_mobility_m2_per_vs),
        ),
        (
            "impurity_mobility_m2_per_Vs",
            Json::Number(layer.impurity_mobility_m2_per_vs),
        ),
        ("mobility_m2_per_Vs", Json::Number(layer.mobility_m2_per_vs)),
        ("hall_mobility_m2_per_Vs", Json::Number(layer.hall_mobility_m2_per_vs)),
        ("resistivity_ohm_m", Json::Number(layer.resistivity_ohm_m)),
        ("sheet_resistance_ohm_sq", Json::Number(layer.sheet_resistance_ohm_sq)),
        (
            "hall_coefficient_m3_per_C",
            Json::Number(layer.hall_coefficient_m3_per_c),
        ),
        (
            "sheet_hall_coefficient_m2_per_C",
            Json::Number(layer.sheet_hall_coefficient_m2_per_c),
        ),
    ])
}

/// Runs the invented measurement campaign.
pub fn generate() -> anyhow::Result<Generated> {
    let bands = BandModel::silicon();
    let model = mobility_model();
    let setpoints = setpoints_k();
    let mut rng = Rng::seeded(SEED);
    let mut readings = Vec::new();
    let mut layers = Vec::new();
    let mut sample_truths = Vec::new();
    let mut sample_rows = Vec::new();

    for piece in &PIECES {
        let dopants = Dopants::new(
            piece.donor_density_m3,
            piece.acceptor_density_m3,
            PHOSPHORUS_IONIZATION_EV,
            BORON_IONIZATION_EV,
        );
        let mut temperature_truths = Vec::new();
        for &setpoint_k in &setpoints {
            // The controller settles a few hundredths of a kelvin off the setpoint; the lab
            // records its reading (to 1 mK) once per step, and that is the true temperature.
            let temperature_k = ((setpoint_k + CONTROLLER_JITTER_K * rng.standard_normal()) * 1000.0).round() / 1000.0;
            let layer = n_type_transport(&dopants, &bands, piece.thickness_m, temperature_k, &model)?;
            let misalignment_ohm = piece.misalignment_fraction * layer.sheet_resistance_ohm_sq;
            let mut offsets_v = [0.0; 6];
            for offset in &mut offsets_v {
                *offset = rng.uniform_between(-THERMOELECTRIC_OFFSET_LIMIT_V, THERMOELECTRIC_OFFSET_LIMIT_V);
            }
            let sample = VanDerPauwSample {
                resistance_field_odd_ohm_per_t: [0.0; 2],
                thermoelectric_offsets_v: offsets_v,
                hall_misalignment_ohm: [misalignment_ohm, -misalignment_ohm],
                ..VanDerPauwSample::ideal(
                    piece.name,
                    temperature_k,
                    layer.sheet_resistance_ohm_sq,
                    piece.resistance_ratio_b_over_a,
                    layer.sheet_hall_coefficient_m2_per_c,
                )
            };
            let (resistance_a, resistance_b) = sample.characteristic_resistances_ohm()?;
            let hall_ohm = layer.sheet_hall_coefficient_m2_per_c.abs() * HALL_FIELD_T + misalignment_ohm.abs();
            let current_a = choose_current_a(resistance_a.max(resistance_b).max(hall_ohm));
            let protocol = MeasurementProtocol {
                current_reversal: piece.current_reversal,
                voltmeter_wiring: piece.voltmeter_wiring,
                noise: NOISE,
                ..MeasurementProtocol::van_der_pauw(current_a, vec![HALL_FIELD_T])
            }
            .with_resistance_at_zero_and_hall_in_field();
            readings.extend(van_der_pauw_readings(&sample, &protocol, &mut rng)?);
            temperature_truths.push(temperature_truth(temperature_k, setpoint_k, current_a, piece, &layer));
            layers.push((piece.name.to_owned(), temperature_k, layer));
        }
        sample_rows.push((piece.name.to_owned(), piece.thickness_m, hall_factor()));
        sample_truths.push(Json::object([
            ("sample", Json::text(piece.name)),
            ("donor_density_m3", Json::Number(piece.donor_density_m3)),
            ("acceptor_density_m3", Json::Number(piece.acceptor_density_m3)),
            ("donor_ionization_energy_eV", Json::Number(PHOSPHORUS_IONIZATION_EV)),
            ("acceptor_ionization_energy_eV", Json::Number(BORON_IONIZATION_EV)),
            ("donor_degeneracy", Json::Number(dopants.donor_degeneracy)),
            ("acceptor_degeneracy", Json::Number(dopants.acceptor_degeneracy)),
            ("thickness_m", Json::Number(piece.thickness_m)),
            ("hall_factor", Json::Number(hall_factor())),
            (
                "resistance_ratio_b_over_a",
                Json::Number(piece.resistance_ratio_b_over_a),
            ),
            (
                "hall_misalignment_per_sheet_resistance",
                Json::Number(piece.misalignment_fraction),
            ),
            ("current_reversal", Json::text(&format!("{:?}", piece.current_reversal))),
            ("voltmeter_wiring", Json::text(&format!("{:?}", piece.voltmeter_wiring))),
            ("temperatures", Json::Array(temperature_truths)),
        ]));
    }

    let truth = Json::object([
        (
            "description",
            Json::text(
                "Invented true parameters of the silicon reference wafer demo; every number was made up and then used to compute readings.csv",
            ),
        ),
        ("generator", Json::text("mobilis-demo-gen")),
        ("seed", Json::Integer(SEED as i64)),
        ("material", Json::text("Si")),
        (
            "band_model",
            Json::object([
                ("conduction_dos_300K_m3", Json::Number(bands.conduction_dos_300k_m3)),
                ("valence_dos_300K_m3", Json::Number(bands.valence_dos_300k_m3)),
                ("band_gap_0K_eV", Json::Number(bands.band_gap_0k_ev)),
                ("varshni_alpha_eV_per_K", Json::Number(bands.varshni_alpha_ev_per_k)),
                ("varshni_beta_K", Json::Number(bands.varshni_beta_k)),
            ]),
        ),
        (
            "mobility_model",
            Json::object([
                (
                    "lattice_mobility_300K_m2_per_Vs",
                    Json::Number(model.lattice_mobility_300k_m2_per_vs),
                ),
                ("lattice_exponent", Json::Number(model.lattice_exponent)),
                ("effective_mass_ratio", Json::Number(model.medium.effective_mass_ratio)),
                ("relative_permittivity", Json::Number(model.medium.relative_permittivity)),
                ("hall_factor", Json::Number(model.hall_factor)),
            ]),
        ),
        (
            "measurement",
            Json::object([
                ("hall_field_T", Json::Number(HALL_FIELD_T)),
                ("target_voltage_V", Json::Number(TARGET_VOLTAGE_V)),
                ("noise_absolute_V", Json::Number(NOISE.absolute_v)),
                ("noise_relative", Json::Number(NOISE.relative)),
                ("temperature_jitter_K", Json::Number(CONTROLLER_JITTER_K)),
                (
                    "stated_calibrations",
                    Json::object([
                        ("thickness_m_unc", Json::Number(STATED_THICKNESS_UNC_M)),
                        ("field_calibration_rel", Json::Number(STATED_FIELD_CALIBRATION_REL)),
                        ("current_calibration_rel", Json::Number(STATED_CURRENT_CALIBRATION_REL)),
                        ("voltage_calibration_rel", Json::Number(STATED_VOLTAGE_CALIBRATION_REL)),
                        ("temperature_accuracy_K", Json::Number(STATED_TEMPERATURE_ACCURACY_K)),
                    ]),
                ),
                (
                    "thermoelectric_offset_limit_V",
                    Json::Number(THERMOELECTRIC_OFFSET_LIMIT_V),
                ),
            ]),
        ),
        ("samples", Json::Array(sample_truths)),
    ]);
    Ok(Generated {
        readings,
        layers,
        truth,
        sample_rows,
        temperature_count: setpoints.len(),
    })
}

/// readings.csv: the `readings` role of `hall.reduce`, one row per reading.
pub fn readings_csv(readings: &[RawReading]) -> String {
    let mut out = READING_COLUMNS.join(",");
    out.push('\n');
    for reading in readings {
        out.push_str(&format!(
            "{},{},{},{},{},{},{},{},{}\n",
            reading.sample,
            number(reading.temperature_k, 10),
            number(reading.field_t, 10),
            reading.i_in,
            reading.i_out,
            reading.v_pos,
            reading.v_neg,
            number(reading.current_a, 10),
            number(reading.voltage_v, VOLTAGE_DIGITS),
        ));
    }
    out
}

/// The calibrations the invented lab states for its own instruments, as `hall.reduce` reads
/// them from the sample sheet: its micrometer (thickness, m), the Hall probe that sets the
/// field scale, the current source and the voltmeter (relative), and the thermometer (K).
/// The readings were made with perfect instruments, so these only widen the error bars, as a
/// stated budget does; `truth.json` repeats them.
pub const STATED_THICKNESS_UNC_M: f64 = 5e-6;
pub const STATED_FIELD_CALIBRATION_REL: f64 = 5e-3;
pub const STATED_CURRENT_CALIBRATION_REL: f64 = 1e-3;
pub const STATED_VOLTAGE_CALIBRATION_REL: f64 = 2e-4;
pub const STATED_TEMPERATURE_ACCURACY_K: f64 = 0.05;

/// samples.csv: the `samples` role, one row per piece, with the lab's stated calibrations.
pub fn samples_csv(rows: &[(String, f64, f64)]) -> String {
    let mut out = String::from(
        "sample,thickness_m,thickness_m_unc,hall_factor,field_calibration_rel,current_calibration_rel,voltage_calibration_rel,temperature_accuracy_K\n",
    );
    for (sample, thickness_m, hall_factor) in rows {
        out.push_str(&format!(
            "{sample},{},{},{},{},{},{},{}\n",
            number(*thickness_m, 10),
            number(STATED_THICKNESS_UNC_M, 10),
            number(*hall_factor, 10),
            number(STATED_FIELD_CALIBRATION_REL, 10),
            number(STATED_CURRENT_CALIBRATION_REL, 10),
            number(STATED_VOLTAGE_CALIBRATION_REL, 10),
            number(STATED_TEMPERATURE_ACCURACY_K, 10),
        ));
    }
    out
}
