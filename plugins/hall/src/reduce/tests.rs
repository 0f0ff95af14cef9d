//! Tests of the reduction against hand-built readings with known answers, against the check
//! values of the van der Pauw and Hall-effect literature, and against every refusal and flag.
//!
//! The hand-built readings come from two small explicit sample models below: a table of the
//! transfer resistances V_kl / I_ij of a van der Pauw sample in the NIST contact notation,
//! and the contact potentials of a Hall bar. Each lead also carries a thermoelectric EMF of
//! its own, so a voltage is R I + EMF(v_pos) - EMF(v_neg), as a voltmeter sees it. The
//! property test at the end uses the shared forward model of mobilis-physics instead.

use std::f64::consts::{LN_2, PI};

use mobilis_physics::constants::ELEMENTARY_CHARGE_C;
use mobilis_physics::contacts::ContactError;

use super::*;

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    (actual - expected).abs() <= relative * expected.abs()
}

#[track_caller]
fn assert_close(actual: Option<f64>, expected: f64, relative: f64, what: &str) {
    let actual = actual.unwrap_or_else(|| panic!("{what} is null, expected {expected}"));
    assert!(
        close(actual, expected, relative),
        "{what}: {actual} vs {expected} (relative {})",
        (actual / expected - 1.0).abs()
    );
}

/// A van der Pauw sample as a table of transfer resistances V_kl / I_ij (NIST notation
/// R_ij,kl: current in at i, out at j, voltage V_k - V_l).
#[derive(Debug, Clone)]
struct VanDerPauwModel {
    /// R_21,34 and R_43,12.
    resistance_a_ohm: [f64; 2],
    /// R_32,41 and R_14,23.
    resistance_b_ohm: [f64; 2],
    /// R_Hs: V_24 / I_13 = R_Hs B (positive for holes, NIST sign convention).
    sheet_hall_coefficient_m2_per_c: f64,
    /// Multiplies the Hall term of the second diagonal (V_31 / I_24); 1 for a uniform sample.
    second_diagonal_hall_scale: f64,
    /// Field-even transfer resistance of each diagonal (contact misalignment), ohm.
    misalignment_ohm: [f64; 2],
    /// Thermoelectric EMF of the lead of each contact 1..4, V.
    contact_emf_v: [f64; 4],
    /// Multiplies every transfer resistance when the current flows against the table's
    /// direction: 1 for ohmic contacts.
    reversed_current_scale: f64,
}

impl VanDerPauwModel {
    fn symmetric(resistance_ohm: f64, sheet_hall_coefficient_m2_per_c: f64) -> Self {
        Self::asymmetric(resistance_ohm, resistance_ohm, sheet_hall_coefficient_m2_per_c)
    }

    fn asymmetric(resistance_a_ohm: f64, resistance_b_ohm: f64, sheet_hall_coefficient_m2_per_c: f64) -> Self {
        VanDerPauwModel {
            resistance_a_ohm: [resistance_a_ohm; 2],
            resistance_b_ohm: [resistance_b_ohm; 2],
            sheet_hall_coefficient_m2_per_c,
            second_diagonal_hall_scale: 1.0,
            misalignment_ohm: [0.0; 2],
            contact_emf_v: [0.0; 4],
            reversed_current_scale: 1.0,
        }
    }

    /// V_kl / I_ij at field `field_t` for the contacts (i, j, k, l).
    fn transfer_ohm(&self, contacts: [i64; 4], field_t: f64) -> f64 {
        let hall = self.sheet_hall_coefficient_m2_per_c * field_t;
        let table = [
            ([2, 1, 3, 4], self.resistance_a_ohm[0]),
            ([4, 3, 1, 2], self.resistance_a_ohm[1]),
            ([3, 2, 4, 1], self.resistance_b_ohm[0]),
            ([1, 4, 2, 3], self.resistance_b_ohm[1]),
            ([1, 3, 2, 4], hall + self.misalignment_ohm[0]),
            (
                [2, 4, 3, 1],
                self.second_diagonal_hall_scale * hall + self.misalignment_ohm[1],
            ),
        ];
        let [i, j, k, l] = contacts;
        for ([ti, tj, tk, tl], value) in table {
            let current_orientation = if (i, j) == (ti, tj) {
                1.0
            } else if (i, j) == (tj, ti) {
                -1.0
            } else {
                continue;
            };
            let voltage_orientation = if (k, l) == (tk, tl) {
                1.0
            } else if (k, l) == (tl, tk) {
                -1.0
            } else {
                continue;
            };
            return value * current_orientation * voltage_orientation;
        }
        panic!("contacts {contacts:?} are not in the model's table")
    }

    fn reading(
        &self,
        sample: &str,
        temperature_k: f64,
        field_t: f64,
        contacts: [i64; 4],
        current_a: f64,
    ) -> RawReading {
        let mut transfer = self.transfer_ohm(contacts, field_t);
        // Whether this reading drives current along the table's current direction.
        let along_table = [[2, 1], [4, 3], [3, 2], [1, 4], [1, 3], [2, 4]]
            .iter()
            .any(|pair| *pair == [contacts[0], contacts[1]]);
        let physical_direction = if along_table { current_a } else { -current_a };
        if physical_direction < 0.0 {
            transfer *= self.reversed_current_scale;
        }
        let emf = self.contact_emf_v[contacts[2] as usize - 1] - self.contact_emf_v[contacts[3] as usize - 1];
        RawReading {
            sample: sample.to_owned(),
            temperature_k,
            field_t,
            i_in: contacts[0],
            i_out: contacts[1],
            v_pos: contacts[2],
            v_neg: contacts[3],
            current_a,
            voltage_v: transfer * current_a + emf,
        }
    }
}

/// The eight resistance readings of the NIST averaging, current reversed by swapping leads:
/// R21,34, R12,43, R43,12, R34,21 (R_A) and R32,41, R23,14, R14,23, R41,32 (R_B).
const NIST_RESISTANCE_CONTACTS: [[i64; 4]; 8] = [
    [2, 1, 3, 4],
    [1, 2, 4, 3],
    [4, 3, 1, 2],
    [3, 4, 2, 1],
    [3, 2, 4, 1],
    [2, 3, 1, 4],
    [1, 4, 2, 3],
    [4, 1, 3, 2],
];

/// The four NIST Hall voltages: V_C = V24 with I13, V_D = V42 with I31, V_E = V13 with I42,
/// V_F = V31 with I24.
const NIST_HALL_CONTACTS: [[i64; 4]; 4] = [[1, 3, 2, 4], [3, 1, 4, 2], [4, 2, 1, 3], [2, 4, 3, 1]];

/// A full NIST measurement: the eight resistance readings at zero field and the four Hall
/// readings at +B and at -B, all with a positive source current.
fn nist_readings(
    model: &VanDerPauwModel,
    sample: &str,
    temperature_k: f64,
    field_t: f64,
    current_a: f64,
) -> Vec<RawReading> {
    let mut readings = Vec::new();
    for contacts in NIST_RESISTANCE_CONTACTS {
        readings.push(model.reading(sample, temperature_k, 0.0, contacts, current_a));
    }
    for field in [field_t, -field_t] {
        for contacts in NIST_HALL_CONTACTS {
            readings.push(model.reading(sample, temperature_k, field, contacts, current_a));
        }
    }
    readings
}

/// The same measurement with the current reversed by the source sign: the first contacts of
/// each NIST pair at +I and at -I.
fn source_reversed_readings(
    model: &VanDerPauwModel,
    sample: &str,
    temperature_k: f64,
    field_t: f64,
    current_a: f64,
) -> Vec<RawReading> {
    let mut readings = Vec::new();
    for contacts in NIST_RESISTANCE_CONTACTS.iter().step_by(2) {
        for current in [current_a, -current_a] {
            readings.push(model.reading(sample, temperature_k, 0.0, *contacts, current));
        }
    }
    for field in [field_t, -field_t] {
        for contacts in NIST_HALL_CONTACTS.iter().step_by(2) {
            for current in [current_a, -current_a] {
                readings.push(model.reading(sample, temperature_k, field, *contacts, current));
            }
        }
    }
    readings
}

/// A Hall bar (contacts as in `mobilis_physics::contacts`): current 1 -> 2 along +x, 3 and 4 on
/// the +y edge, 5 and 6 on the -y edge. Holes at +B are pushed to -y, so V5 - V3 = R_xy I > 0.
#[derive(Debug, Clone)]
struct HallBarModel {
    longitudinal_ohm: f64,
    sheet_hall_coefficient_m2_per_c: f64,
    /// The -y contacts sit this far downstream (as a resistance): field-even transverse part.
    misalignment_ohm: f64,
    contact_emf_v: [f64; 6],
}

impl HallBarModel {
    /// Potential of a voltage contact for current `current_a` entering at 1, relative to the
    /// bar's centre line.
    fn potential_v(&self, contact: i64, field_t: f64, current_a: f64) -> f64 {
        let half_drop = 0.5 * self.longitudinal_ohm * current_a;
        let hall = self.sheet_hall_coefficient_m2_per_c * field_t * current_a;
        let misalignment = self.misalignment_ohm * current_a;
        match contact {
            3 => half_drop,
            4 => -half_drop,
            5 => half_drop + hall + misalignment,
            6 => -half_drop + hall + misalignment,
            _ => panic!("contact {contact} is not a voltage contact of the bar"),
        }
    }

    fn reading(&self, sample: &str, temperature_k: f64, field_t: f64, voltage: [i64; 2], current_a: f64) -> RawReading {
        let [pos, neg] = voltage;
        let emf = self.contact_emf_v[pos as usize - 1] - self.contact_emf_v[neg as usize - 1];
        RawReading {
            sample: sample.to_owned(),
            temperature_k,
            field_t,
            i_in: 1,
            i_out: 2,
            v_pos: pos,
            v_neg: neg,
            current_a,
            voltage_v: self.potential_v(pos, field_t, current_a) - self.potential_v(neg, field_t, current_a) + emf,
        }
    }

    fn readings(&self, sample: &str, temperature_k: f64, field_t: f64, current_a: f64) -> Vec<RawReading> {
        let mut readings = Vec::new();
        for current in [current_a, -current_a] {
            for pair in [[3, 4], [5, 6]] {
                readings.push(self.reading(sample, temperature_k, 0.0, pair, current));
            }
            for field in [field_t, -field_t] {
                for pair in [[5, 3], [6, 4]] {
                    readings.push(self.reading(sample, temperature_k, field, pair, current));
                }
            }
        }
        readings
    }
}

/// Every calibration stated, as perfect: no assumption, no warning about it.
fn perfect_instruments() -> Calibration {
    Calibration {
        field_rel: Some(0.0),
        current_rel: Some(0.0),
        voltage_rel: Some(0.0),
        temperature_accuracy_k: Some(0.0),
    }
}

fn reduce_default(readings: &[RawReading]) -> Reduction {
    reduce(readings, None, &ReduceSettings::default()).expect("valid readings reduce")
}

fn single_row(reduction: &Reduction) -> &ReducedRow {
    assert_eq!(reduction.rows.len(), 1, "rows: {:#?}", reduction.rows);
    &reduction.rows[0]
}

// ---------------------------------------------------------------- sign convention and check values

// NIST Hall-effect pages (from memory): V_C = V24P - V24N, V_D = V42P - V42N, V_E = V13P -
// V13N, V_F = V31P - V31N; a positive sum means p-type, and n_s = 8 I B / (e |sum|).
#[test]
fn nist_sign_convention_gives_p_for_a_positive_hall_sum_and_n_for_a_negative_one() {
    let current_a = 1e-4;
    let field_t = 0.5;
    for (sheet_hall_coefficient, expected_type) in [(250.0, "p"), (-250.0, "n")] {
        let model = VanDerPauwModel::symmetric(100.0, sheet_hall_coefficient);
        let readings = nist_readings(&model, "s", 300.0, field_t, current_a);
        // The NIST sum, straight from the raw readings.
        let voltage = |contacts: [i64; 4], field: f64| {
            readings
                .iter()
                .find(|r| [r.i_in, r.i_out, r.v_pos, r.v_neg] == contacts && r.field_t == field)
                .expect("reading present")
                .voltage_v
        };
        let nist_sum: f64 = NIST_HALL_CONTACTS
            .iter()
            .map(|contacts| voltage(*contacts, field_t) - voltage(*contacts, -field_t))
            .sum();
        assert_eq!(
            nist_sum > 0.0,
            expected_type == "p",
            "hand-built data follow the NIST convention"
        );

        let reduction = reduce_default(&readings);
        let row = single_row(&reduction);
        assert_eq!(row.carrier_type, Some(expected_type));
        let nist_density = 8.0 * current_a * field_t / (ELEMENTARY_CHARGE_C * nist_sum.abs());
        assert_close(
            row.sheet_density_m2,
            nist_density,
            1e-12,
            "n_s against NIST's 8 I B / (e |sum|)",
        );
        assert!(row.quality_ok, "flags: {:?}", row.flags);
    }
}

// Check values (computed from n_s = I B / (e V_H) and mu_H = 1 / (e n_s R_s), CODATA 2018 e):
// I = 1 mA, B = 0.5 T, n_s = 1e12 cm^-2 gives V_H = 0.312075 V; with R_s = 1000 ohm/sq,
// mu_H = 6241.51 cm^2/Vs.
#[test]
fn hall_voltage_check_value_recovers_density_and_mobility() {
    let current_a = 1e-3;
    let field_t = 0.5;
    let sheet_density_m2 = 1e12 * 1e4;
    let hall_voltage_v = current_a * field_t / (ELEMENTARY_CHARGE_C * sheet_density_m2);
    assert!((hall_voltage_v - 0.312_075).abs() <= 5e-7, "V_H = {hall_voltage_v}");
    // n-type: the Hall voltage in canonical orientation is negative.
    let sheet_hall_coefficient = -hall_voltage_v / (current_a * field_t);
    let resistance = 1000.0 * LN_2 / PI;
    let model = VanDerPauwModel::symmetric(resistance, sheet_hall_coefficient);
    let row_set = reduce_default(&nist_readings(&model, "2deg", 4.2, field_t, current_a));
    let row = single_row(&row_set);
    assert_close(row.hall_resistance_ohm, -hall_voltage_v / current_a, 1e-12, "R_xy");
    assert_close(row.sheet_density_m2, sheet_density_m2, 1e-12, "n_s");
    assert_eq!(row.carrier_type, Some("n"));
    assert_close(row.sheet_resistance_ohm_sq, 1000.0, 1e-12, "R_s");
    let mobility_cm2_per_vs = row.hall_mobility_m2_per_vs.unwrap() * 1e4;
    assert!(
        (mobility_cm2_per_vs - 6241.51).abs() <= 0.005,
        "mu_H = {mobility_cm2_per_vs} cm^2/Vs"
    );
    // A 2D sheet has no volume quantities.
    assert_eq!(row.density_m3, None);
    assert_eq!(row.resistivity_ohm_m, None);
    assert_eq!(row.hall_coefficient_m3_per_c, None);
}

// Symmetric sample: R_s = pi R / ln 2 (van der Pauw, Philips Res. Rep. 13, 1958).
#[test]
fn symmetric_van_der_pauw_gives_pi_r_over_ln2() {
    for resistance in [0.01, 3.7, 1234.5] {
        let model = VanDerPauwModel::symmetric(resistance, 10.0);
        let reduction = reduce_default(&nist_readings(&model, "s", 300.0, 1.0, 1e-3));
        let row = single_row(&reduction);
        assert_close(row.sheet_resistance_ohm_sq, PI * resistance / LN_2, 1e-13, "R_s");
        assert_close(row.geometry_factor, 1.0, 1e-13, "f");
        assert_close(row.resistance_ratio, 1.0, 1e-13, "ratio");
        assert_eq!(row.reciprocity_mismatch, Some(0.0));
    }
}

// R_s of asymmetric samples from the exact relation exp(-pi R_A/R_s) + exp(-pi R_B/R_s) = 1,
// values computed from that relation (van der Pauw, Philips Res. Rep. 13, 1958), and f(Q=2) =
// 0.960280 computed from cosh[((Q-1)/(Q+1)) ln2 / f] = exp(ln2 / f) / 2 (same source).
#[test]
fn asymmetric_van_der_pauw_uses_the_exact_equation() {
    let cases = [
        ((1.0, 2.0), 6.528_503),
        ((10.0, 1.0), 17.431_126),
        ((1.0, 10.0), 17.431_126),
        ((100.0, 200.0), 652.850_3),
    ];
    for ((resistance_a, resistance_b), expected) in cases {
        let model = VanDerPauwModel::asymmetric(resistance_a, resistance_b, 10.0);
        let reduction = reduce_default(&nist_readings(&model, "s", 300.0, 1.0, 1e-3));
        let row = single_row(&reduction);
        assert_close(row.sheet_resistance_ohm_sq, expected, 1e-6, "R_s");
        assert_close(row.resistance_a_ohm, resistance_a, 1e-13, "R_A");
        assert_close(row.resistance_b_ohm, resistance_b, 1e-13, "R_B");
    }
    let model = VanDerPauwModel::asymmetric(2.0, 1.0, 10.0);
    let reduction = reduce_default(&nist_readings(&model, "s", 300.0, 1.0, 1e-3));
    let row = single_row(&reduction);
    assert!((row.geometry_factor.unwrap() - 0.960_280).abs() < 1.5e-6);
    assert_close(row.resistance_ratio, 2.0, 1e-13, "ratio");
}

// Hall bar: rho = (V_xx / I)(w t / L) (standard texts, from memory), R_H = V_H t / (I B),
// n = 1/(e |R_H|), mu_H = |R_H| / rho (standard texts). Check value computed from
// V_H = I B / (e n t): n = 1e17 cm^-3, t = 1 um, I = 1 mA, B = 1 T gives V_H = 62.4151 mV.
#[test]
fn hall_bar_check_values() {
    let (current_a, field_t, thickness_m) = (1e-3, 1.0, 1e-6);
    let density_m3 = 1e17 * 1e6;
    let hall_voltage_v = current_a * field_t / (ELEMENTARY_CHARGE_C * density_m3 * thickness_m);
    assert!((hall_voltage_v - 62.4151e-3).abs() <= 0.5e-7, "V_H = {hall_voltage_v}");
    let (length_m, width_m) = (600e-6, 200e-6);
    let longitudinal_voltage_v = 0.0421;
    let model = HallBarModel {
        longitudinal_ohm: longitudinal_voltage_v / current_a,
        sheet_hall_coefficient_m2_per_c: -hall_voltage_v / (current_a * field_t),
        misalignment_ohm: 0.0,
        contact_emf_v: [0.0; 6],
    };
    let sheet = SampleInfo {
        name: "bar".into(),
        thickness_m: Some(thickness_m),
        thickness_unc_m: None,
        hall_factor: 1.0,
        geometry: Geometry::HallBar { length_m, width_m },
        calibration: Calibration::default(),
    };
    let readings = model.readings("bar", 77.0, field_t, current_a);
    let reduction = reduce(&readings, Some(&[sheet]), &ReduceSettings::default()).unwrap();
    let row = single_row(&reduction);
    let resistivity = longitudinal_voltage_v / current_a * width_m * thickness_m / length_m;
    let hall_coefficient = -hall_voltage_v * thickness_m / (current_a * field_t);
    assert_eq!(row.geometry, "hall_bar");
    assert_close(row.resistivity_ohm_m, resistivity, 1e-12, "rho");
    assert_close(row.hall_coefficient_m3_per_c, hall_coefficient, 1e-12, "R_H");
    assert_close(row.density_m3, density_m3, 1e-12, "n");
    assert_close(
        row.hall_mobility_m2_per_vs,
        hall_coefficient.abs() / resistivity,
        1e-12,
        "mu_H",
    );
    assert_eq!(row.carrier_type, Some("n"));
    assert_eq!(row.geometry_factor, None);
    assert_eq!(row.resistance_b_ohm, None);
    assert_eq!(row.reciprocity_mismatch, None);
    assert!(row.quality_ok, "flags: {:?}", row.flags);
}

#[test]
fn hall_bar_offsets_and_misalignment_cancel() {
    let exact = HallBarModel {
        longitudinal_ohm: 250.0,
        sheet_hall_coefficient_m2_per_c: 40.0,
        misalignment_ohm: 0.0,
        contact_emf_v: [0.0; 6],
    };
    let offset = HallBarModel {
        misalignment_ohm: 90.0,
        contact_emf_v: [0.0, 0.0, 0.01, -0.02, 0.03, 0.015],
        ..exact.clone()
    };
    let sheet = [SampleInfo {
        geometry: Geometry::HallBar {
            length_m: 1e-3,
            width_m: 2e-4,
        },
        ..SampleInfo::van_der_pauw_sheet("bar")
    }];
    let settings = ReduceSettings::default();
    let exact_rows = reduce(&exact.readings("bar", 300.0, 0.5, 1e-3), Some(&sheet), &settings).unwrap();
    let offset_rows = reduce(&offset.readings("bar", 300.0, 0.5, 1e-3), Some(&sheet), &settings).unwrap();
    let (exact_row, offset_row) = (single_row(&exact_rows), single_row(&offset_rows));
    for (what, with, without) in [
        ("R_xx", offset_row.resistance_a_ohm, exact_row.resistance_a_ohm),
        (
            "R_s",
            offset_row.sheet_resistance_ohm_sq,
            exact_row.sheet_resistance_ohm_sq,
        ),
        (
            "R_Hs",
            offset_row.sheet_hall_coefficient_m2_per_c,
            exact_row.sheet_hall_coefficient_m2_per_c,
        ),
        (
            "mu_H",
            offset_row.hall_mobility_m2_per_vs,
            exact_row.hall_mobility_m2_per_vs,
        ),
    ] {
        assert_close(with, without.unwrap(), 1e-9, what);
    }
    assert_close(
        exact_row.sheet_resistance_ohm_sq,
        250.0 * 2e-4 / 1e-3,
        1e-12,
        "R_s = R_xx W / L",
    );
    // Misalignment 90 ohm against R_xy = 40 * 0.5 = 20 ohm; offsets up to 0.05 V against
    // R_xx I = 0.25 V.
    assert_close(offset_row.misalignment_ratio, 4.5, 1e-9, "misalignment ratio");
    assert!(
        offset_row.flags.contains(&flags::LARGE_OFFSET),
        "flags {:?}",
        offset_row.flags
    );
    assert!(exact_row.quality_ok, "flags {:?}", exact_row.flags);
}

// Hall factor r_H = 3 pi / 8 for acoustic-phonon scattering (Putley, The Hall Effect and
// Related Phenomena, 1960): n = r_H / (e |R_H|) scales with r_H, mu_H = |R_H| / rho does not,
// and the drift mobility is mu_H / r_H.
#[test]
fn hall_factor_scales_density_not_hall_mobility() {
    let hall_factor = 3.0 * PI / 8.0;
    assert!((hall_factor - 1.178_097_2).abs() < 1e-7);
    let model = VanDerPauwModel::symmetric(50.0, -80.0);
    let readings = nist_readings(&model, "si", 300.0, 0.8, 1e-3);
    let sheet = |hall_factor: f64| SampleInfo {
        name: "si".into(),
        thickness_m: Some(500e-6),
        thickness_unc_m: None,
        hall_factor,
        geometry: Geometry::VanDerPauw,
        calibration: Calibration::default(),
    };
    let settings = ReduceSettings::default();
    let plain = reduce(&readings, Some(&[sheet(1.0)]), &settings).unwrap();
    let scaled = reduce(&readings, Some(&[sheet(hall_factor)]), &settings).unwrap();
    let (plain, scaled) = (single_row(&plain), single_row(&scaled));
    assert_close(scaled.density_m3, plain.density_m3.unwrap() * hall_factor, 1e-14, "n");
    assert_close(
        scaled.sheet_density_m2,
        plain.sheet_density_m2.unwrap() * hall_factor,
        1e-14,
        "n_s",
    );
    assert_eq!(scaled.hall_mobility_m2_per_vs, plain.hall_mobility_m2_per_vs);
    assert_close(
        scaled.drift_mobility_m2_per_vs,
        plain.hall_mobility_m2_per_vs.unwrap() / hall_factor,
        1e-14,
        "drift mobility",
    );
    assert_eq!(scaled.hall_factor, hall_factor);
}

// ---------------------------------------------------------------- offsets and current reversal

fn with_offsets(model: &VanDerPauwModel, emf_v: [f64; 4], misalignment_ohm: [f64; 2]) -> VanDerPauwModel {
    VanDerPauwModel {
        contact_emf_v: emf_v,
        misalignment_ohm,
        ..model.clone()
    }
}

fn assert_same_physics(with: &ReducedRow, without: &ReducedRow, relative: f64) {
    let pairs = [
        ("R_A", with.resistance_a_ohm, without.resistance_a_ohm),
        ("R_B", with.resistance_b_ohm, without.resistance_b_ohm),
        ("R_s", with.sheet_resistance_ohm_sq, without.sheet_resistance_ohm_sq),
        ("R_xy", with.hall_resistance_ohm, without.hall_resistance_ohm),
        ("n_s", with.sheet_density_m2, without.sheet_density_m2),
        ("mu_H", with.hall_mobility_m2_per_vs, without.hall_mobility_m2_per_vs),
    ];
    for (what, a, b) in pairs {
        assert_close(a, b.expect("reference present"), relative, what);
    }
    assert_eq!(with.carrier_type, without.carrier_type);
}

#[test]
fn thermoelectric_offsets_and_misalignment_cancel() {
    let current_a = 1e-3;
    let model = VanDerPauwModel::asymmetric(120.0, 180.0, 300.0);
    let exact = reduce_default(&nist_readings(&model, "s", 300.0, 0.5, current_a));
    // Offsets of the order of the resistive voltage (0.1 V) and a misalignment five times the
    // Hall resistance at 0.5 T (150 ohm).
    let noisy_model = with_offsets(&model, [0.03, -0.05, 0.02, 0.045], [700.0, -650.0]);
    let offset = reduce_default(&nist_readings(&noisy_model, "s", 300.0, 0.5, current_a));
    let (exact_row, offset_row) = (single_row(&exact), single_row(&offset));
    assert_same_physics(offset_row, exact_row, 1e-9);
    // The offsets are there and are measured: the largest is |EMF_1 - EMF_2| or similar
    // against R I = 0.12 V.
    let offset_ratio = offset_row.thermoelectric_offset_ratio.unwrap();
    assert!(offset_ratio > 0.2, "offset ratio {offset_ratio}");
    assert_close(offset_row.misalignment_ratio, 700.0 / 150.0, 1e-9, "misalignment ratio");
    assert!(
        offset_row.flags.contains(&flags::LARGE_OFFSET),
        "flags {:?}",
        offset_row.flags
    );
    assert!(!exact_row.flags.contains(&flags::LARGE_OFFSET));
    assert!(exact_row.thermoelectric_offset_ratio.unwrap() < 1e-12);
}

#[test]
fn large_offset_follows_its_thresholds() {
    let model = VanDerPauwModel::symmetric(100.0, 200.0);
    // Small EMFs (offset ratio about 1e-3) and a misalignment 12 times the Hall resistance
    // at 0.5 T (100 ohm).
    let offset_model = with_offsets(&model, [1e-4, 0.0, -1e-4, 0.0], [1200.0, 1200.0]);
    let readings = nist_readings(&offset_model, "s", 300.0, 0.5, 1e-3);
    let row = reduce_default(&readings).rows.remove(0);
    assert_close(row.misalignment_ratio, 12.0, 1e-9, "misalignment ratio");
    assert!(row.thermoelectric_offset_ratio.unwrap() < 0.01);
    assert!(row.flags.contains(&flags::LARGE_OFFSET));
    let mut lenient = ReduceSettings::default();
    lenient.thresholds.misalignment_ratio = 15.0;
    let row = reduce(&readings, None, &lenient).unwrap().rows.remove(0);
    assert!(!row.flags.contains(&flags::LARGE_OFFSET), "flags {:?}", row.flags);
}

#[test]
fn current_reversal_by_source_sign_or_by_swapped_leads_is_the_same_measurement() {
    let model = with_offsets(
        &VanDerPauwModel::asymmetric(75.0, 90.0, -42.0),
        [2e-3, -1e-3, 0.5e-3, 1.5e-3],
        [30.0, -12.0],
    );
    let by_leads = reduce_default(&nist_readings(&model, "s", 300.0, 0.5, 1e-3));
    let by_source = reduce_default(&source_reversed_readings(&model, "s", 300.0, 0.5, 1e-3));
    let (leads, source) = (single_row(&by_leads), single_row(&by_source));
    assert_same_physics(source, leads, 1e-12);
    assert_close(
        source.misalignment_ratio,
        leads.misalignment_ratio.unwrap(),
        1e-12,
        "misalignment",
    );
    assert_close(
        source.thermoelectric_offset_ratio,
        leads.thermoelectric_offset_ratio.unwrap(),
        1e-12,
        "offset ratio",
    );
    assert_eq!(source.flags, leads.flags);
}

#[test]
fn non_ohmic_contacts_raise_current_reversal() {
    let mut model = VanDerPauwModel::symmetric(100.0, 50.0);
    model.reversed_current_scale = 1.05;
    let row = reduce_default(&source_reversed_readings(&model, "s", 300.0, 0.5, 1e-3))
        .rows
        .remove(0);
    // V/I at +I is R, at -I 1.05 R: mismatch 0.05 / 1.025.
    assert_close(row.current_reversal_mismatch, 0.05 / 1.025, 1e-12, "mismatch");
    assert!(row.flags.contains(&flags::CURRENT_REVERSAL), "flags {:?}", row.flags);
    model.reversed_current_scale = 1.01;
    let row = reduce_default(&source_reversed_readings(&model, "s", 300.0, 0.5, 1e-3))
        .rows
        .remove(0);
    assert!(!row.flags.contains(&flags::CURRENT_REVERSAL), "flags {:?}", row.flags);
}

#[test]
fn fit_removes_the_offset_of_a_current_sweep() {
    // One polarity, several currents: the line fit still separates the offset, but the
    // current was never reversed.
    let model = with_offsets(
        &VanDerPauwModel::symmetric(10.0, 5.0),
        [0.0, 0.0, 0.02, -0.01],
        [0.0; 2],
    );
    let mut readings = Vec::new();
    for current in [1e-3, 2e-3, 3e-3, 4e-3] {
        for contacts in NIST_RESISTANCE_CONTACTS.iter().step_by(2) {
            readings.push(model.reading("s", 300.0, 0.0, *contacts, current));
        }
    }
    let row = reduce_default(&readings).rows.remove(0);
    assert_close(row.sheet_resistance_ohm_sq, PI * 10.0 / LN_2, 1e-12, "R_s");
    assert!(row.flags.contains(&flags::NO_CURRENT_REVERSAL));
    assert!(row.flags.contains(&flags::NO_FIELD_DATA));
    // Four readings on an exact line: the residuals are rounding errors, and the statistical
    // part is the arithmetic's resolution, never zero.
    let sheet = row.sheet_resistance_ohm_sq.unwrap();
    let statistical = row.sheet_resistance_ohm_sq_unc_stat.unwrap();
    assert!(statistical > 0.0 && statistical <= 2e-12 * sheet, "{statistical}");
    // The systematic part is the assumed current and voltage calibrations (0.1 % and 0.01 %).
    assert_close(
        row.sheet_resistance_ohm_sq_unc_sys,
        (1e-3f64).hypot(1e-4) * sheet,
        1e-12,
        "u_sys(R_s)",
    );
}

// ---------------------------------------------------------------- uncertainties

// First-order propagation through the exact van der Pauw gradient: for R_A = R_B the two
// partial derivatives are equal and sum to R_s / R (Euler's theorem for the degree-one
// homogeneous R_s), so u(R_s) = (R_s / 2R) sqrt(u_A^2 + u_B^2).
#[test]
fn redundant_configurations_give_the_resistance_uncertainty() {
    let resistance = 100.0;
    let (spread_a, spread_b) = (0.01, 0.02);
    let mut model = VanDerPauwModel::symmetric(resistance, 100.0);
    model.resistance_a_ohm = [resistance * (1.0 + spread_a), resistance * (1.0 - spread_a)];
    model.resistance_b_ohm = [resistance * (1.0 + spread_b), resistance * (1.0 - spread_b)];
    let row = reduce_default(&nist_readings(&model, "s", 300.0, 1.0, 1e-3))
        .rows
        .remove(0);
    let sheet = PI * resistance / LN_2;
    assert_close(row.sheet_resistance_ohm_sq, sheet, 1e-12, "R_s");
    // The statistical part pools the row's evidence about its voltage noise: each family's
    // two estimates (weights 2 I^2, the two-reading fits' 1 / c^2) give 4 I^2 R^2 d^2 on one
    // degree of freedom, the four Hall values agree exactly on three more. So
    // sigma_V^2 = 4 I^2 R^2 (d_A^2 + d_B^2) / 5; with the noise coefficient of R_s,
    // R_s / (2 sqrt(2) R I), and the Student factor sqrt(5/3) (JCGM 101:2008, 6.4.9.4):
    // u_stat(R_s) = R_s sqrt((d_A^2 + d_B^2) / 6). The scatter of the families alone
    // would give R_s sqrt(d_A^2 + d_B^2) / 2 (first-order propagation through the exact
    // van der Pauw gradient; for R_A = R_B the partial derivatives are R_s / 2R each).
    assert_close(
        row.sheet_resistance_ohm_sq_unc_stat,
        sheet * ((spread_a * spread_a + spread_b * spread_b) / 6.0).sqrt(),
        1e-9,
        "u_stat(R_s)",
    );
    assert_close(row.reciprocity_mismatch, 2.0 * spread_b, 1e-12, "reciprocity mismatch");
    let relative = row.sheet_resistance_ohm_sq_unc_stat.unwrap() / sheet;
    let mobility_relative = row.hall_mobility_m2_per_vs_unc_stat.unwrap() / row.hall_mobility_m2_per_vs.unwrap();
    assert!(
        mobility_relative >= relative * (1.0 - 1e-12),
        "{mobility_relative} vs {relative}"
    );
    // The Hall values agree exactly, but the same voltmeter measured them: they keep the
    // pooled noise.
    assert!(row.hall_resistance_ohm_unc.unwrap() > 0.0);
    // The mobility's systematic part is the field calibration alone (0.5 % assumed).
    assert_close(
        row.hall_mobility_m2_per_vs_unc_sys,
        5e-3 * row.hall_mobility_m2_per_vs.unwrap(),
        1e-12,
        "u_sys(mu_H)",
    );
}

#[test]
fn thickness_uncertainty_enters_volume_quantities_only() {
    let model = VanDerPauwModel::symmetric(100.0, -300.0);
    let readings = nist_readings(&model, "film", 300.0, 0.5, 1e-3);
    let sheet = SampleInfo {
        name: "film".into(),
        thickness_m: Some(2e-6),
        thickness_unc_m: Some(0.1e-6),
        hall_factor: 1.0,
        geometry: Geometry::VanDerPauw,
        calibration: Calibration::default(),
    };
    // Every other calibration stated perfect, so that the thickness stands alone.
    let settings = ReduceSettings {
        calibration: perfect_instruments(),
        ..ReduceSettings::default()
    };
    let row = reduce(&readings, Some(&[sheet]), &settings).unwrap().rows.remove(0);
    // Exact readings: the sheet quantities have only rounding scatter.
    assert!(row.sheet_density_m2_unc.unwrap() <= 2e-12 * row.sheet_density_m2.unwrap());
    assert!(row.hall_mobility_m2_per_vs_unc.unwrap() <= 2e-12 * row.hall_mobility_m2_per_vs.unwrap());
    // The thickness is one error for the whole series: systematic, not statistical.
    assert!(row.density_m3_unc_stat.unwrap() <= 2e-12 * row.density_m3.unwrap());
    assert_close(
        row.density_m3_unc_sys,
        0.05 * row.density_m3.unwrap(),
        1e-12,
        "u_sys(n)",
    );
    assert_close(row.density_m3_unc, 0.05 * row.density_m3.unwrap(), 1e-12, "u(n)");
    assert_close(
        row.resistivity_ohm_m_unc,
        0.05 * row.resistivity_ohm_m.unwrap(),
        1e-12,
        "u(rho)",
    );
    assert_close(
        row.hall_coefficient_m3_per_c_unc,
        0.05 * row.hall_coefficient_m3_per_c.unwrap().abs(),
        1e-12,
        "u(R_H)",
    );
}

// ---------------------------------------------------------------- grouping

#[test]
fn temperatures_within_tolerance_share_a_row() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut readings = Vec::new();
    // A drift 300.0 -> 300.2 -> 300.4 chains into one group; 310 is another.
    for temperature in [300.0, 300.2, 300.4] {
        readings.extend(nist_readings(&model, "s", temperature, 0.5, 1e-3));
    }
    readings.extend(nist_readings(&model, "s", 310.0, 0.5, 1e-3));
    let reduction = reduce_default(&readings);
    assert_eq!(reduction.rows.len(), 2);
    assert_close(Some(reduction.rows[0].temperature_k), 300.2, 1e-12, "mean T");
    assert_close(Some(reduction.rows[0].temperature_spread_k), 0.4, 1e-9, "spread");
    assert_eq!(reduction.rows[0].reading_count, 48);
    assert_eq!(reduction.rows[1].temperature_k, 310.0);
    let strict = ReduceSettings {
        temperature_tolerance_k: 0.1,
        ..ReduceSettings::default()
    };
    assert_eq!(reduce(&readings, None, &strict).unwrap().rows.len(), 4);
}

#[test]
fn a_sub_kelvin_series_stays_apart() {
    // Setpoints 0.1 K apart from 0.3 to 1.5 K, each read 16 times while the stage drifts by
    // 2 mK: thirteen rows, not one chain.
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut readings = Vec::new();
    for step in 0..13 {
        let setpoint = 0.3 + 0.1 * step as f64;
        for (index, reading) in nist_readings(&model, "s", setpoint, 0.5, 1e-3).into_iter().enumerate() {
            readings.push(RawReading {
                temperature_k: setpoint + 0.002 * index as f64 / 16.0,
                ..reading
            });
        }
    }
    let reduction = reduce_default(&readings);
    assert_eq!(reduction.rows.len(), 13);
    for (step, row) in reduction.rows.iter().enumerate() {
        assert!(
            (row.temperature_k - (0.3 + 0.1 * step as f64)).abs() < 2e-3,
            "{}",
            row.temperature_k
        );
        assert!(row.quality_ok, "{:?}", row.flags);
    }
}

#[test]
fn rows_sorted_by_sample_temperature_and_field() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut readings = Vec::new();
    for (sample, temperature) in [("zeta", 77.0), ("alpha", 300.0), ("alpha", 77.0)] {
        readings.extend(nist_readings(&model, sample, temperature, 1.0, 1e-3));
        // A second field magnitude shares the zero-field readings of the group.
        for field in [0.25, -0.25] {
            for contacts in NIST_HALL_CONTACTS {
                readings.push(model.reading(sample, temperature, field, contacts, 1e-3));
            }
        }
    }
    let rows = reduce_default(&readings).rows;
    let keys: Vec<(&str, f64, Option<f64>)> = rows
        .iter()
        .map(|row| (row.sample.as_str(), row.temperature_k, row.field_t))
        .collect();
    assert_eq!(
        keys,
        vec![
            ("alpha", 77.0, Some(0.25)),
            ("alpha", 77.0, Some(1.0)),
            ("alpha", 300.0, Some(0.25)),
            ("alpha", 300.0, Some(1.0)),
            ("zeta", 77.0, Some(0.25)),
            ("zeta", 77.0, Some(1.0)),
        ]
    );
    for row in &rows {
        assert_close(row.sheet_hall_coefficient_m2_per_c, 50.0, 1e-12, "R_Hs");
        assert_eq!(row.reading_count, 16);
    }
}

#[test]
fn slightly_unequal_field_magnitudes_are_averaged() {
    // +0.502 T and -0.498 T: the odd part is R_Hs (0.502 + 0.498) / 2.
    let model = VanDerPauwModel::symmetric(100.0, 80.0);
    let mut readings: Vec<RawReading> = NIST_RESISTANCE_CONTACTS
        .iter()
        .map(|contacts| model.reading("s", 300.0, 0.0, *contacts, 1e-3))
        .collect();
    for field in [0.502, -0.498] {
        for contacts in NIST_HALL_CONTACTS {
            readings.push(model.reading("s", 300.0, field, contacts, 1e-3));
        }
    }
    let row = reduce_default(&readings).rows.remove(0);
    assert_close(row.field_t, 0.5, 1e-12, "field");
    assert_close(row.sheet_hall_coefficient_m2_per_c, 80.0, 1e-12, "R_Hs");
}

// ---------------------------------------------------------------- flags

#[test]
fn no_field_reversal_nulls_the_hall_quantities() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .filter(|reading| reading.field_t >= 0.0)
        .collect();
    let reduction = reduce_default(&readings);
    let warnings = reduction.warnings.join("\n");
    assert!(
        warnings.contains("Hall configurations 13,24 and 24,31 measured at +B only"),
        "{warnings}"
    );

    assert!(warnings.contains("measure them at -0.5000 T as well"), "{warnings}");
    assert!(!warnings.contains("field_tolerance_T"), "{warnings}");
    let row = reduction.rows[0].clone();
    assert!(row.flags.contains(&flags::NO_FIELD_REVERSAL), "flags {:?}", row.flags);
    assert!(!row.quality_ok);
    assert_eq!(row.field_t, Some(0.5));
    assert_eq!(row.hall_resistance_ohm, None);
    assert_eq!(row.sheet_density_m2, None);
    assert_eq!(row.carrier_type, None);
    assert_eq!(row.hall_mobility_m2_per_vs, None);
    // The resistance part is unaffected.
    assert_close(row.sheet_resistance_ohm_sq, PI * 100.0 / LN_2, 1e-12, "R_s");
}

#[test]
fn zero_field_only_gives_a_row_without_hall_quantities() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .filter(|reading| reading.field_t == 0.0)
        .collect();
    let row = reduce_default(&readings).rows.remove(0);
    assert_eq!(row.flags, vec![flags::NO_FIELD_DATA]);
    assert_eq!(row.field_t, None);
    assert_eq!(row.sheet_hall_coefficient_m2_per_c, None);
    assert_close(row.sheet_resistance_ohm_sq, PI * 100.0 / LN_2, 1e-12, "R_s");
}

#[test]
fn resistance_from_field_readings_when_there_is_no_zero_field() {
    // Resistance configurations measured only at +-B (no magnetoresistance in this model).
    let model = VanDerPauwModel::asymmetric(100.0, 150.0, 50.0);
    let mut readings = Vec::new();
    for field in [0.5, -0.5] {
        for contacts in NIST_RESISTANCE_CONTACTS.iter().chain(NIST_HALL_CONTACTS.iter()) {
            readings.push(model.reading("s", 300.0, field, *contacts, 1e-3));
        }
    }
    let reduction = reduce_default(&readings);
    let row = single_row(&reduction);
    assert!(row.flags.contains(&flags::RESISTANCE_FROM_FIELD_READINGS));
    assert_close(
        row.sheet_resistance_ohm_sq,
        mobilis_physics::van_der_pauw::sheet_resistance(100.0, 150.0).unwrap(),
        1e-12,
        "R_s",
    );
    assert_close(row.sheet_hall_coefficient_m2_per_c, 50.0, 1e-12, "R_Hs");
    assert!(
        reduction.warnings.iter().any(|w| w.contains("field-even")),
        "{:?}",
        reduction.warnings
    );
}

/// Whether a reading drives its current along an edge of family B (2-3 or 1-4).
fn is_family_b(reading: &RawReading) -> bool {
    matches!(
        (reading.i_in.min(reading.i_out), reading.i_in.max(reading.i_out)),
        (2, 3) | (1, 4)
    )
}

// Van der Pauw's equation needs R_A and R_B (L. J. van der Pauw, Philips Res. Rep. 13, 1
// (1958)): a family never measured is not made up from the other one.
#[test]
fn missing_family_is_null_and_so_is_the_sheet_resistance() {
    // An asymmetric sample, so that assuming R_B = R_A would give a wrong R_s.
    let model = VanDerPauwModel::asymmetric(100.0, 150.0, 50.0);
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .filter(|reading| !is_family_b(reading))
        .collect();
    let reduction = reduce_default(&readings);
    let row = single_row(&reduction);
    assert_eq!(row.flags, vec![flags::MISSING_CONFIGURATIONS]);
    assert_close(row.resistance_a_ohm, 100.0, 1e-12, "R_A");
    for (what, value) in [
        ("resistance_b_ohm", row.resistance_b_ohm),
        ("resistance_ratio", row.resistance_ratio),
        ("geometry_factor", row.geometry_factor),
        ("sheet_resistance_ohm_sq", row.sheet_resistance_ohm_sq),
        ("sheet_resistance_ohm_sq_unc", row.sheet_resistance_ohm_sq_unc),
        ("hall_mobility_m2_per_Vs", row.hall_mobility_m2_per_vs),
        ("drift_mobility_m2_per_Vs", row.drift_mobility_m2_per_vs),
    ] {
        assert_eq!(value, None, "{what} was not measured");
    }
    // The Hall part needs no R_s.
    assert_close(row.sheet_hall_coefficient_m2_per_c, 50.0, 1e-12, "R_Hs");
    assert_eq!(row.carrier_type, Some("p"));
    // The warning names what is missing and what to measure, and does not send the user to
    // the grouping tolerances: no R_B reading exists anywhere in the series.
    let warning = reduction
        .warnings
        .iter()
        .find(|warning| warning.contains("R_B not measured"))
        .unwrap_or_else(|| panic!("{:?}", reduction.warnings));
    for words in [
        "32,41",
        "14,23",
        "sheet_resistance_ohm_sq",
        "resistance_b_ohm",
        "measure",
    ] {
        assert!(warning.contains(words), "{words:?} missing from {warning}");
    }
    assert!(!warning.contains("field_tolerance_T"), "{warning}");
}

// R_s = pi R / ln 2 for a sample symmetric under a 90-degree rotation (L. J. van der Pauw,
// Philips Res. Rep. 13, 1 (1958)), when the lab states that symmetry.
#[test]
fn a_lab_that_states_the_symmetry_gets_pi_r_over_ln2_flagged() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .filter(|reading| !is_family_b(reading))
        .collect();
    let settings = ReduceSettings {
        assume_symmetric_sample: true,
        ..ReduceSettings::default()
    };
    let reduction = reduce(&readings, None, &settings).unwrap();
    let row = single_row(&reduction);
    assert_eq!(row.flags, vec![flags::MISSING_CONFIGURATIONS, flags::ASSUMED_SYMMETRIC]);
    assert_close(row.sheet_resistance_ohm_sq, PI * 100.0 / LN_2, 1e-12, "R_s");
    assert_close(row.hall_mobility_m2_per_vs, 50.0 / (PI * 100.0 / LN_2), 1e-12, "mu_H");
    assert!(row.sheet_resistance_ohm_sq_unc.is_some());
    for (what, value) in [
        ("resistance_b_ohm", row.resistance_b_ohm),
        ("resistance_ratio", row.resistance_ratio),
        ("geometry_factor", row.geometry_factor),
    ] {
        assert_eq!(value, None, "{what} was not measured");
    }
    let warnings = reduction.warnings.join("\n");
    assert!(
        warnings.contains("sheet_resistance_ohm_sq is pi R_A / ln 2 under assume_symmetric_sample"),
        "{warnings}"
    );
    assert!(warnings.contains("does not include any asymmetry"), "{warnings}");
    // With both families measured the parameter changes nothing.
    let full = nist_readings(&VanDerPauwModel::asymmetric(100.0, 150.0, 50.0), "s", 300.0, 0.5, 1e-3);
    assert_eq!(reduce(&full, None, &settings).unwrap().rows, reduce_default(&full).rows);
}

#[test]
fn missing_family_a_and_a_single_reading_are_null_too() {
    let model = VanDerPauwModel::asymmetric(100.0, 150.0, 50.0);
    let without_a: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .filter(|reading| reading.field_t != 0.0 || is_family_b(reading))
        .collect();
    let row = reduce_default(&without_a).rows.remove(0);
    assert_eq!(row.resistance_a_ohm, None);
    assert_close(row.resistance_b_ohm, 150.0, 1e-12, "R_B");
    assert_eq!(row.sheet_resistance_ohm_sq, None);
    assert_eq!(row.geometry_factor, None);
    // A file of one reading: R_21,34 alone.
    let single = [model.reading("s", 300.0, 0.0, [2, 1, 3, 4], 1e-3)];
    let reduction = reduce_default(&single);
    let row = single_row(&reduction);
    assert_close(row.resistance_a_ohm, 100.0, 1e-12, "R_A");
    assert_eq!(row.resistance_b_ohm, None);
    assert_eq!(row.sheet_resistance_ohm_sq, None);
    assert!(row.flags.contains(&flags::MISSING_CONFIGURATIONS));
    let warnings = reduction.warnings.join("\n");
    for words in ["43,12", "R_B not measured", "32,41"] {
        assert!(warnings.contains(words), "{words:?} missing from {warnings}");
    }
}

#[test]
fn a_missing_reciprocal_configuration_keeps_the_family_and_says_so() {
    let model = VanDerPauwModel::asymmetric(100.0, 150.0, 50.0);
    // Drop R_43,12 and R_34,21, the reciprocal configuration of R_A.
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .filter(|reading| {
            !matches!(
                (reading.i_in.min(reading.i_out), reading.i_in.max(reading.i_out)),
                (3, 4)
            )
        })
        .collect();
    let reduction = reduce_default(&readings);
    let row = single_row(&reduction);
    assert_close(
        row.sheet_resistance_ohm_sq,
        mobilis_physics::van_der_pauw::sheet_resistance(100.0, 150.0).unwrap(),
        1e-12,
        "R_s",
    );
    let warnings = reduction.warnings.join("\n");
    assert!(
        warnings.contains("configuration 43,12 not measured: R_A rests on 21,34 alone"),
        "{warnings}"
    );
}

#[test]
fn a_configuration_split_into_another_row_points_to_the_tolerances() {
    let model = VanDerPauwModel::asymmetric(100.0, 150.0, 50.0);
    // The R_B readings logged 2 K warmer: a second temperature group of their own.
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .map(|mut reading| {
            if is_family_b(&reading) {
                reading.temperature_k = 302.0;
            }
            reading
        })
        .collect();
    let reduction = reduce_default(&readings);
    let warnings = reduction.warnings.join("\n");
    assert!(warnings.contains("R_B not measured"), "{warnings}");
    assert!(warnings.contains("temperature_tolerance_K (now 0.5 K)"), "{warnings}");
}

#[test]
fn missing_hall_diagonal_is_flagged_but_the_other_one_is_used() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .filter(|r| !(r.field_t != 0.0 && (r.i_in == 2 || r.i_in == 4)))
        .collect();
    let reduction = reduce_default(&readings);
    let row = single_row(&reduction);
    assert_eq!(row.flags, vec![flags::MISSING_CONFIGURATIONS]);
    assert_close(row.sheet_hall_coefficient_m2_per_c, 50.0, 1e-12, "R_Hs");
    let warnings = reduction.warnings.join("\n");
    assert!(
        warnings.contains("Hall configuration 24,31 not measured: the Hall resistance rests on 13,24 alone"),
        "{warnings}"
    );
    assert!(!warnings.contains("field_tolerance_T"), "{warnings}");
}

#[test]
fn a_hall_bar_with_one_longitudinal_pair_names_the_other() {
    let model = HallBarModel {
        longitudinal_ohm: 42.1,
        sheet_hall_coefficient_m2_per_c: -62.4,
        misalignment_ohm: 0.0,
        contact_emf_v: [0.0; 6],
    };
    let sheet = SampleInfo {
        name: "bar".into(),
        thickness_m: None,
        thickness_unc_m: None,
        hall_factor: 1.0,
        geometry: Geometry::HallBar {
            length_m: 600e-6,
            width_m: 200e-6,
        },
        calibration: Calibration::default(),
    };
    // Only the edge 3-4 measured along the bar: R_xx is a measurement of its own.
    let readings: Vec<RawReading> = model
        .readings("bar", 77.0, 1.0, 1e-3)
        .into_iter()
        .filter(|reading| reading.v_pos.min(reading.v_neg) != 5 || reading.v_pos.max(reading.v_neg) != 6)
        .collect();
    let reduction = reduce(&readings, Some(&[sheet]), &ReduceSettings::default()).unwrap();
    let row = single_row(&reduction);
    assert_close(row.resistance_a_ohm, 42.1, 1e-12, "R_xx");
    assert_close(row.sheet_resistance_ohm_sq, 42.1 * 200.0 / 600.0, 1e-12, "R_s");
    assert_eq!(row.resistance_b_ohm, None);
    let warnings = reduction.warnings.join("\n");
    assert!(
        warnings.contains("longitudinal configuration 12,56 not measured: R_xx rests on 12,34 alone"),
        "{warnings}"
    );
}

#[test]
fn opposite_signs_on_the_diagonals_are_inconsistent() {
    let mut model = VanDerPauwModel::symmetric(100.0, 50.0);
    model.second_diagonal_hall_scale = -1.0;
    let row = reduce_default(&nist_readings(&model, "s", 300.0, 0.5, 1e-3))
        .rows
        .remove(0);
    assert!(row.flags.contains(&flags::HALL_INCONSISTENT), "flags {:?}", row.flags);
    // A 20 % difference between the diagonals: spread (1.2 - 1) / 1.1 above 0.10.
    model.second_diagonal_hall_scale = 1.2;
    let row = reduce_default(&nist_readings(&model, "s", 300.0, 0.5, 1e-3))
        .rows
        .remove(0);
    assert_close(row.hall_spread, 0.2 / 1.1, 1e-12, "spread");
    assert!(row.flags.contains(&flags::HALL_INCONSISTENT));
    model.second_diagonal_hall_scale = 1.05;
    let row = reduce_default(&nist_readings(&model, "s", 300.0, 0.5, 1e-3))
        .rows
        .remove(0);
    assert!(row.quality_ok, "flags {:?}", row.flags);
}

#[test]
fn reciprocity_and_resistance_ratio_flags() {
    let mut model = VanDerPauwModel::symmetric(100.0, 50.0);
    model.resistance_a_ohm = [100.0, 110.0];
    let row = reduce_default(&nist_readings(&model, "s", 300.0, 0.5, 1e-3))
        .rows
        .remove(0);
    assert_close(row.reciprocity_mismatch, 10.0 / 105.0, 1e-12, "mismatch");
    assert_eq!(row.flags, vec![flags::RECIPROCITY]);
    let model = VanDerPauwModel::asymmetric(100.0, 250.0, 50.0);
    let row = reduce_default(&nist_readings(&model, "s", 300.0, 0.5, 1e-3))
        .rows
        .remove(0);
    assert_eq!(row.flags, vec![flags::RESISTANCE_RATIO]);
}

#[test]
fn swapped_voltmeter_leads_give_a_nonpositive_resistance_flag() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings: Vec<RawReading> = nist_readings(&model, "s", 300.0, 0.5, 1e-3)
        .into_iter()
        .map(|mut reading| {
            if reading.field_t == 0.0 {
                reading.voltage_v = -reading.voltage_v;
            }
            reading
        })
        .collect();
    let reduction = reduce_default(&readings);
    let row = single_row(&reduction);
    assert!(row.flags.contains(&flags::NONPOSITIVE_RESISTANCE));
    assert_eq!(row.sheet_resistance_ohm_sq, None);
    assert_eq!(row.hall_mobility_m2_per_vs, None);
    assert!(row.sheet_density_m2.is_some());
    assert!(reduction.warnings.iter().any(|w| w.contains("counterclockwise")));
}

#[test]
fn flag_names_are_unique_and_described() {
    for (index, flag) in flags::ALL.iter().enumerate() {
        assert!(!flags::ALL[..index].contains(flag), "{flag} listed twice");
        assert_eq!(flags::DESCRIPTIONS[index].0, *flag);
    }
}

// ---------------------------------------------------------------- refusals

#[test]
fn sample_missing_from_the_sheet_is_named() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut readings = nist_readings(&model, "wafer-b", 300.0, 0.5, 1e-3);
    readings.extend(nist_readings(&model, "wafer-a", 300.0, 0.5, 1e-3));
    readings.extend(nist_readings(&model, "wafer-c", 300.0, 0.5, 1e-3));
    let sheet = [SampleInfo::van_der_pauw_sheet("wafer-a")];
    let error = reduce(&readings, Some(&sheet), &ReduceSettings::default()).unwrap_err();
    assert_eq!(
        error,
        ReduceError::SamplesMissingFromSheet {
            samples: vec!["wafer-b".into(), "wafer-c".into()]
        }
    );
    let message = error.to_string();
    assert!(
        message.contains("\"wafer-b\", \"wafer-c\"") && message.contains("add them"),
        "{message}"
    );
}

#[test]
fn invalid_readings_are_refused_with_row_and_reason() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let good = nist_readings(&model, "s", 300.0, 0.5, 1e-3);
    type Spoil = Box<dyn Fn(&mut RawReading)>;
    let cases: Vec<(Spoil, ReadingProblem)> = vec![
        (Box::new(|r| r.current_a = 0.0), ReadingProblem::ZeroCurrent),
        (
            Box::new(|r| r.voltage_v = f64::NAN),
            ReadingProblem::NonFiniteVoltage(f64::NAN),
        ),
        (
            Box::new(|r| r.temperature_k = -3.0),
            ReadingProblem::NonPositiveTemperature(-3.0),
        ),
        (
            Box::new(|r| r.field_t = f64::INFINITY),
            ReadingProblem::NonFiniteField(f64::INFINITY),
        ),
        (
            Box::new(|r| r.current_a = f64::NAN),
            ReadingProblem::NonFiniteCurrent(f64::NAN),
        ),
        (
            Box::new(|r| r.temperature_k = f64::NAN),
            ReadingProblem::NonFiniteTemperature(f64::NAN),
        ),
        (
            Box::new(|r| r.v_neg = 5),
            ReadingProblem::Contacts {
                error: ContactError::OutOfRange {
                    contact: 5,
                    max: 4,
                    geometry: "van der Pauw",
                },
                geometry: "van_der_pauw",
            },
        ),
    ];
    for (spoil, expected) in cases {
        let mut readings = good.clone();
        spoil(&mut readings[5]);
        let error = reduce(&readings, None, &ReduceSettings::default()).unwrap_err();
        let ReduceError::InvalidReading { row, sample, problem } = &error else {
            panic!("expected an invalid reading, got {error:?}");
        };
        assert_eq!((*row, sample.as_str()), (5, "s"));
        // NaN != NaN: compare the variants through their messages.
        assert_eq!(problem.to_string(), expected.to_string());
        let message = error.to_string();
        assert!(
            message.starts_with("reading in data row 6 (offset 5), sample \"s\""),
            "{message}"
        );
        assert!(
            message.contains("skip_invalid_readings") && !message.ends_with('.'),
            "{message}"
        );

        // With skipping, the reading is dropped and counted, and the result is unchanged.
        let settings = ReduceSettings {
            skip_invalid_readings: true,
            ..ReduceSettings::default()
        };
        let reduction = reduce(&readings, None, &settings).unwrap();
        assert_eq!(reduction.skipped_readings, 1);
        assert!(
            reduction.warnings[0].starts_with("reading in data row 6 (offset 5)"),
            "{:?}",
            reduction.warnings
        );
        // Reading 5 is R23,14 (an R_B reading); its partner R_32,41 still gives R_B.
        assert_close(
            reduction.rows[0].sheet_resistance_ohm_sq,
            PI * 100.0 / LN_2,
            1e-12,
            "R_s after skipping",
        );
    }
}

/// Two samples at 750 temperatures each (24,000 readings, above the size at which samples
/// are reduced in parallel), each sample's readings in temperature order; slightly different
/// currents make every reading's value its own.
fn two_sample_series() -> (Vec<RawReading>, Vec<RawReading>) {
    let first = VanDerPauwModel::asymmetric(100.0, 130.0, 50.0);
    let second = VanDerPauwModel::symmetric(7.5, -0.2);
    let series = |model: &VanDerPauwModel, name: &str| {
        (0..750)
            .flat_map(|step| {
                let current = 1e-3 * (1.0 + 1e-3 * (step % 7) as f64);
                nist_readings(model, name, 20.0 + 0.8 * step as f64, 0.5, current)
            })
            .collect::<Vec<_>>()
    };
    (series(&first, "a"), series(&second, "b"))
}

/// Runs of 5 readings of one sample, then 5 of the other.
fn alternate_runs(first: &[RawReading], second: &[RawReading]) -> Vec<RawReading> {
    first
        .chunks(5)
        .zip(second.chunks(5))
        .flat_map(|(a, b)| a.iter().chain(b).cloned())
        .collect()
}

// A sample's readings may alternate with another's in the input, and its temperatures may
// come in any order: the reduction is that of the same readings grouped by sample and
// sorted by temperature, to the bit (readings at one temperature keep their input order).
#[test]
fn interleaved_and_unordered_samples_reduce_as_grouped_ones() {
    let (first, second) = two_sample_series();
    let grouped: Vec<RawReading> = first.iter().chain(&second).cloned().collect();
    let settings = ReduceSettings::default();
    let expected = reduce(&grouped, None, &settings).unwrap();
    assert_eq!(expected.rows.len(), 1500);

    let interleaved = alternate_runs(&first, &second);
    assert_eq!(reduce(&interleaved, None, &settings).unwrap(), expected);

    // The temperatures from the warmest down, each temperature's readings in their order.
    let descending: Vec<RawReading> = first
        .chunks(16)
        .rev()
        .chain(second.chunks(16).rev())
        .flatten()
        .cloned()
        .collect();
    assert_eq!(reduce(&descending, None, &settings).unwrap(), expected);
}

// Invalid readings of several samples, reduced in parallel, are reported in input order:
// the first as the error, and all of them, in order, when they are skipped.
#[test]
fn invalid_readings_of_parallel_samples_are_reported_in_input_order() {
    let (first, second) = two_sample_series();
    let mut interleaved = alternate_runs(&first, &second);
    // Reading 10,007 belongs to "b" (5..10 of every ten), reading 15,001 to "a".
    assert_eq!(
        (interleaved[10_007].sample.as_str(), interleaved[15_001].sample.as_str()),
        ("b", "a")
    );
    interleaved[15_001].current_a = 0.0;
    interleaved[10_007].temperature_k = f64::NAN;
    let error = reduce(&interleaved, None, &ReduceSettings::default()).unwrap_err();
    let ReduceError::InvalidReading { row, sample, .. } = &error else {
        panic!("expected an invalid reading, got {error:?}");
    };
    assert_eq!((*row, sample.as_str()), (10_007, "b"));

    let settings = ReduceSettings {
        skip_invalid_readings: true,
        ..ReduceSettings::default()
    };
    let reduction = reduce(&interleaved, None, &settings).unwrap();
    assert_eq!(reduction.skipped_readings, 2);
    assert!(
        reduction.warnings[0].starts_with("reading in data row 10008 (offset 10007), sample \"b\""),
        "{:?}",
        reduction.warnings
    );
    assert!(
        reduction.warnings[1].starts_with("reading in data row 15002 (offset 15001), sample \"a\""),
        "{:?}",
        reduction.warnings
    );
    assert_eq!(reduction.rows.len(), 1500);
}

#[test]
fn contact_5_on_a_van_der_pauw_sample_suggests_the_hall_bar() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut readings = nist_readings(&model, "s", 300.0, 0.5, 1e-3);
    readings[0].v_pos = 5;
    let message = reduce(&readings, None, &ReduceSettings::default())
        .unwrap_err()
        .to_string();
    assert!(
        message.contains("contact number 5") && message.contains("Hall bar"),
        "{message}"
    );
}

#[test]
fn many_skipped_readings_are_summarized() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut readings = nist_readings(&model, "s", 300.0, 0.5, 1e-3);
    let broken = RawReading {
        current_a: 0.0,
        ..readings[0].clone()
    };
    readings.extend(std::iter::repeat_n(broken, 50));
    let settings = ReduceSettings {
        skip_invalid_readings: true,
        calibration: perfect_instruments(),
        ..ReduceSettings::default()
    };
    let reduction = reduce(&readings, None, &settings).unwrap();
    assert_eq!(reduction.skipped_readings, 50);
    assert_eq!(reduction.warnings.len(), DETAILED_WARNINGS + 1);
    assert!(reduction.warnings.last().unwrap().contains("30 further"));
}

#[test]
fn row_warnings_are_capped() {
    // Resistance configurations only in field, at 30 temperatures: every row warns.
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut readings = Vec::new();
    for step in 0..30 {
        for field in [0.5, -0.5] {
            for contacts in NIST_RESISTANCE_CONTACTS.iter().chain(NIST_HALL_CONTACTS.iter()) {
                readings.push(model.reading("s", 10.0 + 10.0 * step as f64, field, *contacts, 1e-3));
            }
        }
    }
    let settings = ReduceSettings {
        calibration: perfect_instruments(),
        ..ReduceSettings::default()
    };
    let reduction = reduce(&readings, None, &settings).unwrap();
    assert_eq!(reduction.rows.len(), 30);
    assert!(reduction
        .rows
        .iter()
        .all(|row| row.flags.contains(&flags::RESISTANCE_FROM_FIELD_READINGS)));
    assert_eq!(reduction.warnings.len(), DETAILED_WARNINGS + 1);
    assert!(reduction
        .warnings
        .last()
        .unwrap()
        .starts_with("10 further row warnings"));
}

#[test]
fn empty_or_all_invalid_input_is_refused() {
    let error = reduce(&[], None, &ReduceSettings::default()).unwrap_err();
    assert_eq!(
        error,
        ReduceError::NoValidReadings {
            total: 0,
            skipped: 0,
            first_problems: Vec::new()
        }
    );
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let mut reading = model.reading("s", 300.0, 0.0, [2, 1, 3, 4], 1e-3);
    reading.current_a = 0.0;
    let settings = ReduceSettings {
        skip_invalid_readings: true,
        ..ReduceSettings::default()
    };
    let error = reduce(&[reading.clone()], None, &settings).unwrap_err();
    assert!(matches!(
        error,
        ReduceError::NoValidReadings {
            total: 1,
            skipped: 1,
            ..
        }
    ));
    // A refused call returns no warnings, so the error itself gives the reasons.
    let message = error.to_string();
    assert!(
        message
            .contains("each with its reason: reading in data row 1 (offset 0), sample \"s\", skipped: current_A is 0"),
        "{message}"
    );
    let many = vec![reading; 16];
    let message = reduce(&many, None, &settings).unwrap_err().to_string();
    assert!(
        message.starts_with(
            "all 16 readings are invalid (16 skipped), the first 3 with its reason: reading in data row 1 (offset 0)"
        ),
        "{message}"
    );
    assert!(
        message.contains("data row 3 (offset 2), sample") && !message.contains("data row 4 (offset 3), sample"),
        "{message}"
    );
}

// Values far beyond any laboratory's (a unit or export error) are invalid readings with
// their column and reason, not a NaN resistance blamed on the contact numbering.
#[test]
fn overflowing_magnitudes_are_invalid_readings() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings = nist_readings(&model, "s", 300.0, 0.5, 1e-3);
    let scaled = |scale: f64| -> Vec<RawReading> {
        readings
            .iter()
            .cloned()
            .map(|mut reading| {
                reading.current_a *= scale;
                reading.voltage_v *= scale;
                reading
            })
            .collect()
    };
    let error = reduce(&scaled(1e298), None, &ReduceSettings::default()).unwrap_err();
    let ReduceError::InvalidReading { row: 0, problem, .. } = &error else {
        panic!("{error:?}")
    };
    assert_eq!(
        *problem,
        ReadingProblem::BeyondRange {
            column: "current_A",
            value: 1e-3 * 1e298,
            unit: "A"
        }
    );
    let message = error.to_string();
    assert!(message.contains("current_A is 1e295, beyond the 1e30 A"), "{message}");
    assert!(!message.contains("counterclockwise"), "{message}");
    let error = reduce(&scaled(1e-300), None, &ReduceSettings::default()).unwrap_err();
    assert!(
        matches!(
            &error,
            ReduceError::InvalidReading {
                problem: ReadingProblem::CurrentTooSmall(_),
                ..
            }
        ),
        "{error:?}"
    );
    // Skipped, they leave the well-formed readings to reduce as before.
    let mut mixed = readings.clone();
    mixed.push(scaled(1e298).remove(0));
    let settings = ReduceSettings {
        skip_invalid_readings: true,
        ..ReduceSettings::default()
    };
    let reduction = reduce(&mixed, None, &settings).unwrap();
    assert_eq!(reduction.skipped_readings, 1);
    assert_eq!(reduction.rows, reduce_default(&readings).rows);
}

#[test]
fn bad_sample_sheet_rows_are_refused() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings = nist_readings(&model, "s", 300.0, 0.5, 1e-3);
    let settings = ReduceSettings::default();
    let base = SampleInfo {
        thickness_m: Some(1e-6),
        ..SampleInfo::van_der_pauw_sheet("s")
    };
    let check = |info: SampleInfo, expected: ReduceError| {
        let error = reduce(&readings, Some(&[info]), &settings).unwrap_err();
        assert_eq!(error, expected);
        assert!(!error.to_string().ends_with('.'));
    };
    check(
        SampleInfo {
            thickness_m: Some(0.0),
            ..base.clone()
        },
        ReduceError::InvalidThickness {
            sample: "s".into(),
            thickness_m: 0.0,
        },
    );
    check(
        SampleInfo {
            thickness_m: Some(-1e-6),
            ..base.clone()
        },
        ReduceError::InvalidThickness {
            sample: "s".into(),
            thickness_m: -1e-6,
        },
    );
    check(
        SampleInfo {
            hall_factor: 0.0,
            ..base.clone()
        },
        ReduceError::InvalidHallFactor {
            sample: "s".into(),
            hall_factor: 0.0,
        },
    );
    check(
        SampleInfo {
            thickness_unc_m: Some(-1e-9),
            ..base.clone()
        },
        ReduceError::InvalidThicknessUncertainty {
            sample: "s".into(),
            thickness_unc_m: -1e-9,
        },
    );
    check(
        SampleInfo {
            geometry: Geometry::HallBar {
                length_m: 0.0,
                width_m: 1e-4,
            },
            ..base.clone()
        },
        ReduceError::InvalidHallBarDimensions {
            sample: "s".into(),
            length_m: 0.0,
            width_m: 1e-4,
        },
    );
    let error = reduce(&readings, Some(&[base.clone(), base.clone()]), &settings).unwrap_err();
    assert_eq!(error, ReduceError::DuplicateSample { sample: "s".into() });
    // The messages name the sheet's columns as the sheet spells them.
    let message = |info: SampleInfo| reduce(&readings, Some(&[info]), &settings).unwrap_err().to_string();
    let thickness = message(SampleInfo {
        thickness_unc_m: Some(-1e-9),
        ..base.clone()
    });
    assert!(thickness.starts_with("thickness_m_unc of sample \"s\""), "{thickness}");
    let bar = message(SampleInfo {
        geometry: Geometry::HallBar {
            length_m: 0.0,
            width_m: 1e-4,
        },
        ..base.clone()
    });
    assert!(bar.contains("bar_length_m = 0 and bar_width_m = 0.0001"), "{bar}");
}

#[test]
fn bad_settings_are_refused() {
    let readings = nist_readings(&VanDerPauwModel::symmetric(100.0, 50.0), "s", 300.0, 0.5, 1e-3);
    let settings = ReduceSettings {
        field_tolerance_t: -1.0,
        ..ReduceSettings::default()
    };
    let error = reduce(&readings, None, &settings).unwrap_err();
    assert!(matches!(
        error,
        ReduceError::InvalidSetting {
            setting: "field_tolerance_T",
            ..
        }
    ));
    let mut settings = ReduceSettings::default();
    settings.thresholds.max_resistance_ratio = 0.5;
    let error = reduce(&readings, None, &settings).unwrap_err();
    assert!(matches!(
        error,
        ReduceError::InvalidSetting {
            setting: "max_resistance_ratio",
            ..
        }
    ));
    let settings = ReduceSettings {
        temperature_tolerance_k: f64::NAN,
        ..ReduceSettings::default()
    };
    assert!(reduce(&readings, None, &settings).is_err());
}

#[test]
fn sheet_rows_without_readings_are_reported() {
    let readings = nist_readings(&VanDerPauwModel::symmetric(100.0, 50.0), "s", 300.0, 0.5, 1e-3);
    let sheet = [
        SampleInfo::van_der_pauw_sheet("s"),
        SampleInfo::van_der_pauw_sheet("spare"),
    ];
    let reduction = reduce(&readings, Some(&sheet), &ReduceSettings::default()).unwrap();
    assert_eq!(reduction.rows.len(), 1);
    assert!(reduction.warnings.iter().any(|w| w.contains("spare")));
}

#[test]
fn hall_bar_refuses_van_der_pauw_contacts() {
    let model = VanDerPauwModel::symmetric(100.0, 50.0);
    let readings = nist_readings(&model, "bar", 300.0, 0.5, 1e-3);
    let sheet = SampleInfo {
        geometry: Geometry::HallBar {
            length_m: 1e-3,
            width_m: 2e-4,
        },
        ..SampleInfo::van_der_pauw_sheet("bar")
    };
    // Readings 0 and 1 (R21,34 and R12,43) happen to be a valid bar measurement; reading 2
    // (R43,12) drives current between 4 and 3.
    let error = reduce(&readings, Some(&[sheet]), &ReduceSettings::default()).unwrap_err();
    let ReduceError::InvalidReading { row: 2, problem, .. } = &error else {
        panic!("{error:?}")
    };
    assert!(matches!(
        problem,
        ReadingProblem::Contacts {
            error: ContactError::BarCurrentContacts(4, 3),
            ..
        }
    ));
}

// ---------------------------------------------------------------- columns

#[test]
fn columns_and_structs_give_the_same_reduction() {
    let model = with_offsets(
        &VanDerPauwModel::asymmetric(90.0, 60.0, 25.0),
        [1e-3, 0.0, -2e-3, 0.0],
        [5.0, 3.0],
    );
    let mut readings = nist_readings(&model, "b", 300.0, 0.5, 1e-3);
    readings.extend(nist_readings(&model, "a", 10.0, 2.0, 1e-4));
    let sample = sample_runs(readings.iter().map(|r| r.sample.as_str()));
    let float = |f: fn(&RawReading) -> f64| readings.iter().map(f).collect::<Vec<f64>>();
    let int = |f: fn(&RawReading) -> i64| readings.iter().map(f).collect::<Vec<i64>>();
    let (temperature, field, current, voltage) = (
        float(|r| r.temperature_k),
        float(|r| r.field_t),
        float(|r| r.current_a),
        float(|r| r.voltage_v),
    );
    let (i_in, i_out, v_pos, v_neg) = (int(|r| r.i_in), int(|r| r.i_out), int(|r| r.v_pos), int(|r| r.v_neg));
    let columns = ReadingColumns {
        sample_runs: &sample,
        temperature_k: &temperature,
        field_t: &field,
        i_in: &i_in,
        i_out: &i_out,
        v_pos: &v_pos,
        v_neg: &v_neg,
        current_a: &current,
        voltage_v: &voltage,
    };
    let settings = ReduceSettings::default();
    assert_eq!(
        reduce_columns(&columns, None, &settings).unwrap(),
        reduce(&readings, None, &settings).unwrap()
    );
    let short = ReadingColumns {
        voltage_v: &voltage[1..],
        ..columns
    };
    assert_eq!(
        reduce_columns(&short, None, &settings).unwrap_err(),
        ReduceError::ColumnLengthMismatch {
            column: "voltage_V",
            length: readings.len() - 1,
            expected: readings.len(),
        }
    );
}

// ---------------------------------------------------------------- real setups

/// The forward model's readings of a lab (remanence, wander, drift as asked) for a sample
/// whose sheet density freezes out with 12 meV and whose mobility goes as T^-1.5 (invented).
mod real_setups {
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::constants::{BOLTZMANN_EV_PER_K, ELEMENTARY_CHARGE_C};
    use mobilis_physics::forward::readings::{
        lab_van_der_pauw_series, LabConditions, MeasurementProtocol, VanDerPauwSample, VoltageNoise,
    };
    use mobilis_physics::forward::ForwardError;

    use super::super::*;
    use super::assert_close;

    fn sheet_density_m2(temperature_k: f64) -> f64 {
        5e15 * (-(0.012 / BOLTZMANN_EV_PER_K) * (1.0 / temperature_k - 1.0 / 300.0)).exp()
    }

    fn mobility(temperature_k: f64) -> f64 {
        0.2 * (temperature_k / 300.0).powf(-1.5)
    }

    fn sheet_resistance(temperature_k: f64) -> f64 {
        1.0 / (ELEMENTARY_CHARGE_C * sheet_density_m2(temperature_k) * mobility(temperature_k))
    }

    fn layer_at(temperature_k: f64) -> Result<VanDerPauwSample, ForwardError> {
        let sheet = sheet_resistance(temperature_k);
        let mut sample = VanDerPauwSample::ideal(
            "layer",
            temperature_k,
            sheet,
            1.1,
            -1.0 / (ELEMENTARY_CHARGE_C * sheet_density_m2(temperature_k)),
        );
        sample.thermoelectric_offsets_v = [3e-6, -2e-6, 1e-6, 4e-6, -3e-6, 2e-6];
        sample.hall_misalignment_ohm = [0.03 * sheet, -0.03 * sheet];
        Ok(sample)
    }

    fn setpoints() -> Vec<f64> {
        (0..16).map(|i| 30.0 + 18.0 * i as f64).collect()
    }

    fn series(lab: &LabConditions, noise_v: f64) -> Vec<RawReading> {
        let protocol = MeasurementProtocol {
            noise: VoltageNoise {
                absolute_v: noise_v,
                relative: 0.0,
            },
            ..MeasurementProtocol::van_der_pauw(1e-6, vec![0.5]).with_resistance_at_zero_and_hall_in_field()
        };
        lab_van_der_pauw_series(&setpoints(), layer_at, &protocol, lab, &mut Rng::seeded(12))
            .expect("valid series")
            .readings
    }

    fn sheet(thickness_m: f64) -> SampleInfo {
        SampleInfo {
            thickness_m: Some(thickness_m),
            ..SampleInfo::van_der_pauw_sheet("layer")
        }
    }

    /// Checks one row per setpoint, free of flags, with rho and mu at the row's temperature.
    #[track_caller]
    fn assert_one_clean_row_per_temperature(reduction: &Reduction, relative: f64) {
        assert_eq!(reduction.rows.len(), 16, "one row per temperature");
        for row in &reduction.rows {
            assert!(row.flags.is_empty(), "{:?} at {} K", row.flags, row.temperature_k);
            let t = row.temperature_k;
            assert_close(row.resistivity_ohm_m, sheet_resistance(t) * 1e-6, relative, "rho");
            assert_close(row.hall_mobility_m2_per_vs, mobility(t), relative, "mu_H");
            assert_close(row.sheet_density_m2, sheet_density_m2(t), relative, "n_s");
        }
    }

    /// A field column in gauss read as tesla: 0.5 T becomes 5000 "T", beyond any magnet
    /// (about 100 T; common practice, from memory), and the warning names the import that
    /// converts it; the run in tesla has no such warning.
    #[test]
    fn a_field_beyond_any_magnet_is_reported_as_a_unit_error() {
        let lab = LabConditions::IDEAL;
        let readings = series(&lab, 1e-7);
        let in_tesla = reduce(&readings, Some(&[sheet(1e-6)]), &ReduceSettings::default()).unwrap();
        assert!(!in_tesla
            .warnings
            .iter()
            .any(|w| w.contains("strongest laboratory magnets")));
        let mut in_gauss = readings.clone();
        for reading in &mut in_gauss {
            reading.field_t *= 1e4;
        }
        let reduction = reduce(&in_gauss, Some(&[sheet(1e-6)]), &ReduceSettings::default()).unwrap();
        let warning = reduction
            .warnings
            .iter()
            .find(|w| w.contains("strongest laboratory magnets"))
            .expect("the field is reported");
        assert!(
            warning.starts_with("field_T reaches 5000 T") && warning.contains("--unit field_T=mT"),
            "{warning}"
        );
    }

    #[test]
    fn three_millitesla_of_remanence_give_one_row_per_temperature() {
        let lab = LabConditions {
            remanent_field_t: 3e-3,
            autorange: Some(mobilis_physics::forward::readings::Autorange::TYPICAL),
            ..LabConditions::IDEAL
        };
        let readings = series(&lab, 1e-7);
        let reduction = reduce(&readings, Some(&[sheet(1e-6)]), &ReduceSettings::default()).unwrap();
        // 1e-7 V on about 10 mV: 1e-5 relative per reading.
        assert_one_clean_row_per_temperature(&reduction, 1e-4);
        let named = reduction
            .warnings
            .iter()
            .find(|warning| warning.contains("taken as zero field"))
            .expect("the remanence is reported");
        assert!(
            named.contains("zero_field_tolerance_T") && named.contains("0.0030"),
            "{named}"
        );
        // With a 1 G zero-field window the remanent readings become a field of their own:
        // rows split, and every such row's warning names the parameters to widen.
        let strict = ReduceSettings {
            zero_field_tolerance_t: 1e-4,
            ..ReduceSettings::default()
        };
        let split = reduce(&readings, Some(&[sheet(1e-6)]), &strict).unwrap();
        assert_eq!(split.rows.len(), 32);
        assert!(split
            .warnings
            .iter()
            .any(|warning| warning.contains("zero_field_tolerance_T") && warning.contains("field_tolerance_T")));
    }

    #[test]
    fn wandering_field_setpoints_give_one_row_and_the_right_hall_coefficient() {
        let lab = LabConditions {
            remanent_field_t: -2e-3,
            field_wander_t: 4e-4,
            ..LabConditions::IDEAL
        };
        // Noise-free: what remains is the reduction's own error. Each polarity's field-odd
        // part is divided by its own fields, so the wander leaves no trace.
        let reduction = reduce(&series(&lab, 0.0), Some(&[sheet(1e-6)]), &ReduceSettings::default()).unwrap();
        assert_one_clean_row_per_temperature(&reduction, 1e-9);
    }

    #[test]
    fn a_drifting_stage_is_brought_to_the_mean_temperature() {
        let lab = LabConditions {
            stage_drift_k: 0.03,
            ..LabConditions::IDEAL
        };
        let readings = series(&lab, 0.0);
        let reduction = reduce(&readings, Some(&[sheet(1e-6)]), &ReduceSettings::default()).unwrap();
        // At 30 K, d ln n_s / dT = 0.15 per K and the readings spread over about 0.13 K: of
        // order a percent off before the correction, a few parts in 1e5 after it (what is
        // left is the second order: the parabola's error in the series' slope, largest at
        // the coldest end where the parabola is one-sided, and the misalignment corrected
        // with the Hall slope).
        assert_one_clean_row_per_temperature(&reduction, 3e-4);
        assert!(reduction.rows.iter().all(|row| row.drift_corrected));
        // The thermometer accuracy alone remains (0.02 K assumed).
        assert!(reduction
            .rows
            .iter()
            .all(|row| (row.temperature_k_unc - 0.02).abs() < 1e-15));
    }

    /// 40 000 Hall readings logged along a ramp to +-1 T, 1e-4 T apart, far closer than
    /// field_tolerance_T: setpoints of at most 5 mT each, never one chained cluster.
    #[test]
    fn a_densely_logged_ramp_keeps_its_field_range() {
        let model = super::VanDerPauwModel::symmetric(100.0, -250.0);
        let mut readings: Vec<RawReading> = super::NIST_RESISTANCE_CONTACTS
            .iter()
            .map(|contacts| model.reading("ramp", 4.2, 0.0, *contacts, 1e-4))
            .collect();
        for step in 1..=10_000 {
            let field = 1e-4 * step as f64;
            for signed in [field, -field] {
                for offset in 0..2 {
                    let contacts = super::NIST_HALL_CONTACTS[(2 * step + offset) % 4];
                    readings.push(model.reading("ramp", 4.2, signed, contacts, 1e-4));
                }
            }
        }
        assert_eq!(readings.len(), 40_008);
        let reduction = super::reduce_default(&readings);
        let fields: Vec<f64> = reduction.rows.iter().map(|row| row.field_t.unwrap()).collect();
        // The ramp from 0.0101 T (the first above the 0.01 T zero-field window) to 1 T in
        // pieces 5 mT wide: 198 of them.
        assert!((197..=199).contains(&fields.len()), "{} rows", fields.len());
        assert!(
            fields[0] < 0.016 && *fields.last().unwrap() > 0.99,
            "{:?}",
            (fields[0], fields.last())
        );
        for row in &reduction.rows {
            assert_close(row.sheet_hall_coefficient_m2_per_c, -250.0, 1e-9, "R_Hs");
        }
    }

    #[test]
    fn calibrations_make_the_systematic_part_and_are_reported() {
        let readings = series(&LabConditions::IDEAL, 1e-7);
        let stated = SampleInfo {
            thickness_unc_m: Some(0.03e-6),
            calibration: Calibration {
                field_rel: Some(0.02),
                ..Calibration::default()
            },
            ..sheet(1e-6)
        };
        let settings = ReduceSettings {
            calibration: Calibration {
                field_rel: Some(0.01),
                current_rel: Some(0.002),
                voltage_rel: Some(0.001),
                temperature_accuracy_k: Some(0.05),
            },
            ..ReduceSettings::default()
        };
        let reduction = reduce(&readings, Some(&[stated]), &settings).unwrap();
        assert!(reduction.calibrations[0].not_stated.is_empty());
        assert!(!reduction.warnings.iter().any(|w| w.contains("not stated")));
        // First-order budget (JCGM 100:2008, 5.1.6, relative form for products and
        // quotients): R = V/I; R_Hs = R_xy / B; rho = R_s t; n = n_s / t; mu_H = R_Hs / R_s,
        // in which voltage and current cancel. The sheet's field calibration (2 %)
        // overrides the call's (1 %).
        let (voltage, current, field, thickness) = (0.001f64, 0.002f64, 0.02f64, 0.03f64);
        let electrical = voltage.hypot(current);
        for row in &reduction.rows {
            let check = |value: Option<f64>, systematic: Option<f64>, relative: f64, what: &str| {
                assert_close(systematic, relative * value.unwrap().abs(), 1e-12, what);
            };
            check(
                row.sheet_resistance_ohm_sq,
                row.sheet_resistance_ohm_sq_unc_sys,
                electrical,
                "R_s",
            );
            check(
                row.resistivity_ohm_m,
                row.resistivity_ohm_m_unc_sys,
                electrical.hypot(thickness),
                "rho",
            );
            check(
                row.sheet_density_m2,
                row.sheet_density_m2_unc_sys,
                electrical.hypot(field),
                "n_s",
            );
            check(
                row.density_m3,
                row.density_m3_unc_sys,
                electrical.hypot(field).hypot(thickness),
                "n",
            );
            check(
                row.hall_mobility_m2_per_vs,
                row.hall_mobility_m2_per_vs_unc_sys,
                field,
                "mu_H",
            );
            // The total is the quadrature sum; the statistical part is the scatter's.
            let total = row.density_m3_unc_stat.unwrap().hypot(row.density_m3_unc_sys.unwrap());
            assert_close(row.density_m3_unc, total, 1e-12, "u(n)");
            assert!(row.density_m3_unc_stat.unwrap() < 1e-3 * row.density_m3.unwrap());
            assert_close(Some(row.temperature_k_unc), 0.05, 1e-12, "u(T)");
        }

        // Nothing stated: the defaults are assumed, listed and warned about by name.
        let reduction = reduce(&readings, Some(&[sheet(1e-6)]), &ReduceSettings::default()).unwrap();
        assert_eq!(
            reduction.calibrations[0].not_stated,
            vec![
                calibration_names::FIELD,
                calibration_names::CURRENT,
                calibration_names::VOLTAGE,
                calibration_names::TEMPERATURE,
                calibration_names::THICKNESS
            ]
        );
        let warning = reduction
            .warnings
            .iter()
            .find(|w| w.starts_with("calibrations not stated"))
            .expect("a warning lists the assumptions");
        assert!(warning.contains("field_calibration_rel (assumed 0.005"), "{warning}");
        assert!(warning.contains("temperature_accuracy_K (assumed 0.02 K"), "{warning}");
    }

    #[test]
    fn bad_calibrations_are_refused_with_their_names() {
        let readings = series(&LabConditions::IDEAL, 1e-7);
        let cases: [(Calibration, &str); 4] = [
            (
                Calibration {
                    field_rel: Some(-0.01),
                    ..Calibration::default()
                },
                "field_calibration_rel",
            ),
            (
                Calibration {
                    current_rel: Some(f64::NAN),
                    ..Calibration::default()
                },
                "current_calibration_rel",
            ),
            (
                Calibration {
                    voltage_rel: Some(f64::INFINITY),
                    ..Calibration::default()
                },
                "voltage_calibration_rel",
            ),
            (
                Calibration {
                    temperature_accuracy_k: Some(-1.0),
                    ..Calibration::default()
                },
                "temperature_accuracy_K",
            ),
        ];
        for (calibration, name) in cases {
            let settings = ReduceSettings {
                calibration,
                ..ReduceSettings::default()
            };
            let message = reduce(&readings, None, &settings).unwrap_err().to_string();
            assert!(message.starts_with(&format!("setting {name} is ")), "{message}");
            assert!(!message.ends_with('.'), "{message}");
            let in_sheet = SampleInfo {
                calibration,
                ..sheet(1e-6)
            };
            let message = reduce(&readings, Some(&[in_sheet]), &ReduceSettings::default())
                .unwrap_err()
                .to_string();
            assert!(
                message.starts_with(&format!("{name} of sample \"layer\" is ")),
                "{message}"
            );
        }
    }

    #[test]
    fn a_single_drifting_temperature_reports_the_spread_of_its_readings() {
        let model = super::VanDerPauwModel::symmetric(100.0, 50.0);
        let mut readings = Vec::new();
        for temperature in [300.0, 300.2, 300.4] {
            readings.extend(super::nist_readings(&model, "s", temperature, 0.5, 1e-3));
        }
        let settings = ReduceSettings {
            calibration: Calibration {
                temperature_accuracy_k: Some(0.1),
                ..Calibration::default()
            },
            ..ReduceSettings::default()
        };
        let row = reduce(&readings, None, &settings).unwrap().rows.remove(0);
        // No neighbouring temperature to take a slope from: no correction, and the
        // readings' standard deviation (16 readings at each of three temperatures 0.2 K
        // apart: sqrt(32 x 0.04 / 47)) joins the thermometer's 0.1 K.
        assert!(!row.drift_corrected);
        let deviation = (32.0f64 * 0.04 / 47.0).sqrt();
        assert_close(Some(row.temperature_k_unc), deviation.hypot(0.1), 1e-9, "u(T)");
    }
}

// ---------------------------------------------------------------- property test

/// Readings generated by the shared forward model (mobilis-physics `forward::readings`) from known
/// parameters, with offsets, misalignment, every wiring habit and Gaussian noise, reduced
/// again: the reduction must recover what went in, within its own reported uncertainties.
mod recovers_forward_model {
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::constants::ELEMENTARY_CHARGE_C;
    use mobilis_physics::forward::readings::{
        hall_bar_readings, van_der_pauw_readings, CurrentReversal, HallBarSample, MeasurementProtocol,
        VanDerPauwSample, VoltageNoise, VoltmeterWiring,
    };
    use proptest::prelude::*;

    use super::super::*;

    /// How many reported standard uncertainties an estimate may be off. The uncertainties
    /// rest on few degrees of freedom (two redundant configurations, four Hall values), so
    /// their tails are wider than a normal distribution's: over 20 000 cases of this
    /// generator the median error was 0.36 and the largest 4.0 reported uncertainties.
    const COVERAGE_FACTOR: f64 = 5.0;
    /// Independent of the reported uncertainty: with relative noise at most 1e-5 per reading,
    /// nothing should be off by more than this.
    const LOOSE_RELATIVE_BOUND: f64 = 1e-2;
    /// Every measurement is repeated, so that each fit has residual degrees of freedom (with
    /// three repeats the largest error over 20 000 cases was 6.1 reported uncertainties).
    const REPEATS: usize = 5;
    const FIELD_T: f64 = 0.5;

    #[derive(Debug, Clone)]
    struct Case {
        sheet_resistance_ohm_sq: f64,
        ratio_b_over_a: f64,
        hall_mobility_m2_per_vs: f64,
        holes: bool,
        /// Thermoelectric offsets as fractions of R_s I.
        offset_fractions: [f64; 6],
        /// Misalignment as fractions of R_s.
        misalignment_fractions: [f64; 2],
        noise_relative: f64,
        noise_seed: u64,
        swap_leads: bool,
        wiring: u8,
        hall_bar: bool,
        usual_split: bool,
    }

    fn log_uniform(low: f64, high: f64) -> impl Strategy<Value = f64> {
        (low.ln()..high.ln()).prop_map(f64::exp)
    }

    prop_compose! {
        fn cases()(
            sheet_resistance_ohm_sq in log_uniform(1e-1, 1e6),
            ratio_b_over_a in 0.3..3.0f64,
            hall_mobility_m2_per_vs in log_uniform(1e-3, 10.0),
            holes in any::<bool>(),
            offset_fractions in proptest::array::uniform6(-0.3..0.3f64),
            misalignment_fractions in proptest::array::uniform2(-0.2..0.2f64),
            noise_relative in log_uniform(1e-9, 1e-5),
            noise_seed in any::<u64>(),
            swap_leads in any::<bool>(),
            wiring in 0u8..3,
            hall_bar in proptest::bool::weighted(0.25),
            usual_split in any::<bool>(),
        ) -> Case {
            Case {
                sheet_resistance_ohm_sq, ratio_b_over_a, hall_mobility_m2_per_vs, holes, offset_fractions,
                misalignment_fractions, noise_relative, noise_seed, swap_leads, wiring, hall_bar, usual_split,
            }
        }
    }

    fn protocol(case: &Case, current_a: f64) -> MeasurementProtocol {
        let base = if case.hall_bar {
            MeasurementProtocol::hall_bar(current_a, vec![FIELD_T])
        } else {
            MeasurementProtocol::van_der_pauw(current_a, vec![FIELD_T])
        };
        let base = if case.usual_split {
            base.with_resistance_at_zero_and_hall_in_field()
        } else {
            base
        };
        MeasurementProtocol {
            current_reversal: if case.swap_leads {
                CurrentReversal::SwapLeads
            } else {
                CurrentReversal::SourceSign
            },
            voltmeter_wiring: match case.wiring {
                0 => VoltmeterWiring::Canonical,
                1 => VoltmeterWiring::Reversed,
                _ => VoltmeterWiring::FollowsCurrentLeads,
            },
            noise: VoltageNoise {
                absolute_v: 0.0,
                relative: case.noise_relative,
            },
            ..base
        }
    }

    /// The readings and the sample sheet of a case.
    fn generate(case: &Case, sheet_hall_coefficient: f64) -> (Vec<RawReading>, SampleInfo) {
        // About 10 mV across the resistance configurations.
        let current_a = 1e-2 / case.sheet_resistance_ohm_sq;
        let offset_scale_v = case.sheet_resistance_ohm_sq * current_a;
        let misalignment_ohm = case.misalignment_fractions.map(|f| f * case.sheet_resistance_ohm_sq);
        let protocol = protocol(case, current_a);
        let mut rng = Rng::seeded(case.noise_seed);
        let mut readings = Vec::new();
        let sheet = if case.hall_bar {
            let (probe_spacing_m, width_m) = (500e-6, 100e-6 * case.ratio_b_over_a);
            let mut bar = HallBarSample::ideal(
                "bar",
                300.0,
                case.sheet_resistance_ohm_sq,
                probe_spacing_m,
                width_m,
                sheet_hall_coefficient,
            );
            bar.thermoelectric_offsets_v = [0, 1, 2, 3].map(|i| case.offset_fractions[i] * offset_scale_v);
            bar.transverse_misalignment_ohm = misalignment_ohm;
            for _ in 0..REPEATS {
                readings.extend(hall_bar_readings(&bar, &protocol, &mut rng).expect("valid bar"));
            }
            SampleInfo {
                geometry: Geometry::HallBar {
                    length_m: probe_spacing_m,
                    width_m,
                },
                ..SampleInfo::van_der_pauw_sheet("bar")
            }
        } else {
            let mut sample = VanDerPauwSample::ideal(
                "vdp",
                300.0,
                case.sheet_resistance_ohm_sq,
                case.ratio_b_over_a,
                sheet_hall_coefficient,
            );
            sample.thermoelectric_offsets_v = case.offset_fractions.map(|f| f * offset_scale_v);
            sample.hall_misalignment_ohm = misalignment_ohm;
            for _ in 0..REPEATS {
                readings.extend(van_der_pauw_readings(&sample, &protocol, &mut rng).expect("valid sample"));
            }
            SampleInfo::van_der_pauw_sheet("vdp")
        };
        (readings, sheet)
    }

    fn check(what: &str, estimate: Option<f64>, uncertainty: Option<f64>, truth: f64) -> Result<(), TestCaseError> {
        let estimate = estimate.ok_or_else(|| TestCaseError::fail(format!("{what} is null")))?;
        let uncertainty = uncertainty.ok_or_else(|| TestCaseError::fail(format!("{what} has no uncertainty")))?;
        let error = (estimate - truth).abs();
        // The floor covers rounding when the noise is far below double precision of the sums.
        prop_assert!(
            error <= COVERAGE_FACTOR * uncertainty + 1e-9 * truth.abs(),
            "{what}: {estimate} vs {truth}, error {error:e} = {:.2} reported uncertainties",
            error / uncertainty
        );
        prop_assert!(
            error <= LOOSE_RELATIVE_BOUND * truth.abs(),
            "{what}: {estimate} vs {truth}, relative error {:e}",
            error / truth.abs()
        );
        Ok(())
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]

        #[test]
        fn reduction_recovers_the_forward_model(case in cases()) {
            let sign = if case.holes { 1.0 } else { -1.0 };
            let sheet_hall_coefficient = sign * case.hall_mobility_m2_per_vs * case.sheet_resistance_ohm_sq;
            let (readings, sheet) = generate(&case, sheet_hall_coefficient);
            let reduction = reduce(&readings, Some(&[sheet]), &ReduceSettings::default())
                .map_err(|error| TestCaseError::fail(error.to_string()))?;
            prop_assert_eq!(reduction.rows.len(), 1);
            let row = &reduction.rows[0];
            prop_assert_eq!(row.carrier_type, Some(if case.holes { "p" } else { "n" }));
            prop_assert_eq!(row.reading_count, readings.len());
            check("R_s", row.sheet_resistance_ohm_sq, row.sheet_resistance_ohm_sq_unc, case.sheet_resistance_ohm_sq)?;
            check(
                "R_Hs",
                row.sheet_hall_coefficient_m2_per_c,
                row.sheet_hall_coefficient_m2_per_c_unc,
                sheet_hall_coefficient,
            )?;
            check(
                "n_s",
                row.sheet_density_m2,
                row.sheet_density_m2_unc,
                1.0 / (ELEMENTARY_CHARGE_C * sheet_hall_coefficient.abs()),
            )?;
            check(
                "mu_H",
                row.hall_mobility_m2_per_vs,
                row.hall_mobility_m2_per_vs_unc,
                case.hall_mobility_m2_per_vs,
            )?;
            // Offsets and misalignment of any size never pass for a missing measurement.
            for flag in [flags::MISSING_CONFIGURATIONS, flags::NO_FIELD_REVERSAL, flags::NO_CURRENT_REVERSAL] {
                prop_assert!(!row.flags.contains(&flag), "unexpected {} in {:?}", flag, row.flags);
            }
        }
    }
}

// The quadrature sum of two uncertainties agrees with `f64::hypot` (the C library's hypot,
// ISO/IEC 9899:1999 7.12.7.3, the reference here) to a unit in the last place inside the
// range it computes directly, and is `hypot` outside it, where the
// squares would overflow or underflow.
#[test]
fn quadrature_sum_agrees_with_hypot() {
    use super::cells::quadrature_sum;
    let mut state = 0x2545_f491_4f6c_dd1d_u64;
    let mut next = || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    for _ in 0..10_000 {
        let x = (next() - 0.5) * 10f64.powf(60.0 * next() - 30.0);
        let y = (next() - 0.5) * 10f64.powf(60.0 * next() - 30.0);
        let (fast, exact) = (quadrature_sum(x, y), x.hypot(y));
        assert!(
            (fast - exact).abs() <= f64::EPSILON * exact,
            "{x}, {y}: {fast} vs {exact}"
        );
    }
    for (x, y) in [(3e200, 4e200), (3e-200, 4e-200), (0.0, 0.0), (f64::INFINITY, 1.0)] {
        assert_eq!(quadrature_sum(x, y), x.hypot(y));
    }
    assert!(quadrature_sum(f64::NAN, 1.0).is_nan());
}

/// The columns are filled by tasks of whole validity words (2,048 rows), not by samples: a
/// table whose samples start inside words and inside tasks (1, 2,100 and 77 rows) holds the
/// same rows as each sample reduced alone, where every sample starts at row 0.
#[test]
fn samples_across_validity_words_and_tasks_read_back_as_reduced_alone() {
    let groups = [("a", 1usize), ("b", 2_100), ("c", 77)];
    let readings_of = |sample: &str, count: usize| -> Vec<RawReading> {
        (0..count)
            .flat_map(|k| {
                let model =
                    VanDerPauwModel::asymmetric(100.0 + 0.37 * k as f64, 130.0, -1e-3 * (1.0 + 1e-3 * k as f64));
                // No field readings in every third group: its Hall quantities are null, the
                // others' present, so the validity words mix.
                let mut readings = nist_readings(&model, sample, 20.0 + k as f64, 0.5, 1e-4);
                if k % 3 == 0 {
                    readings.retain(|reading| reading.field_t == 0.0);
                }
                readings
            })
            .collect()
    };
    let settings = ReduceSettings::default();
    let mut together = Vec::new();
    let mut alone = Vec::new();
    for (sample, count) in groups {
        let readings = readings_of(sample, count);
        alone.extend(reduce(&readings, None, &settings).expect("one sample reduces").rows);
        together.extend(readings);
    }
    let combined = reduce(&together, None, &settings).expect("the samples reduce").rows;
    assert_eq!(combined.len(), 2_178);
    let without_hall = combined.iter().filter(|row| row.hall_resistance_ohm.is_none()).count();
    assert_eq!(without_hall, 1 + 700 + 26, "null in every third group of each sample");
    assert_eq!(combined, alone);
}
