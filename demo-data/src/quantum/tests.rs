//! Tests of the quantum-oscillation sweeps: the invented heterostructure's oscillations and their truth.

use super::*;
use crate::heterostructure::QUANTUM;
use crate::sweeps::sweeps_csv;
use mobilis_physics::forward::oscillations::sheet_density_from_frequency_m2;
use mobilis_physics::sweep::{symmetrize, SymmetrizeSettings, SymmetrizedPoint};

fn close(actual: f64, expected: f64, relative: f64) -> bool {
    ((actual - expected) / expected).abs() <= relative
}

fn symmetrized(rows: &[SweepRow], temperature_k: f64) -> Vec<SymmetrizedPoint> {
    let points: Vec<SweepPoint> = rows
        .iter()
        .filter(|row| row.temperature_k == temperature_k)
        .map(|row| row.point)
        .collect();
    let result = symmetrize(&points, &SymmetrizeSettings::default()).unwrap();
    // The branches mirror each other, so every pair is one grid point.
    assert_eq!(2 * result.points.len(), points.len() + result.zero_field_points);
    let alpha = QUANTUM.sample.imperfections.hall_misalignment;
    assert!(
        (result.max_rho_xy_asymmetry / alpha - 1.0).abs() < 0.2,
        "{temperature_k} K: misalignment {} vs {alpha}",
        result.max_rho_xy_asymmetry
    );
    result.points
}

#[test]
fn the_oscillation_field_program_resolves_the_frequency_on_mirrored_branches() {
    let fields = sdh_fields();
    assert_eq!(fields.len(), 2 * SDH_POINTS_PER_BRANCH);
    let n = SDH_POINTS_PER_BRANCH;
    assert_eq!(
        (fields[0], fields[n - 1], fields[n], fields[2 * n - 1]),
        (-9.0, -1.0, 1.0, 9.0)
    );
    assert!(fields.windows(2).all(|pair| pair[0] < pair[1]));
    for k in 0..n {
        assert_eq!(fields[k], -fields[2 * n - 1 - k]);
    }
    let period = 1.0 / QUANTUM.frequency_t();
    for pair in fields[n..].windows(2) {
        // Distinct after rounding (the symmetrization keeps them apart) and at least 10
        // points per period of the oscillation everywhere.
        assert!(pair[1] - pair[0] > 1.5 * FIELD_RESOLUTION_T, "{pair:?}");
        assert!(1.0 / pair[0] - 1.0 / pair[1] < period / 10.0, "{pair:?}");
    }
}

// The invented numbers the documentation quotes.
#[test]
fn the_invented_channel_has_the_documented_frequency_and_lifetimes() {
    assert!(close(QUANTUM.frequency_t(), 186.105, 1e-5), "{}", QUANTUM.frequency_t());
    let density = sheet_density_from_frequency_m2(QUANTUM.frequency_t(), QUANTUM.spin_degeneracy);
    assert!(close(density, 9.0e16, 1e-12));
    assert!(close(quantum_lifetime_s(QUANTUM.dingle_temperature_k), 3.039e-13, 1e-3));
    assert!(close(QUANTUM.transport_lifetime_s(), 1.962e-12, 1e-3));
    assert!(close(QUANTUM.zero_field_rho_xx_ohm_sq().unwrap(), 45.34, 1e-4));
    // The classical sweeps of sweeps.csv at 2 K have the same carriers.
    let two_kelvin = crate::heterostructure::WAFER.samples[0].sweeps[0].carriers();
    assert_eq!(two_kelvin, QUANTUM.carriers());
}

#[test]
fn the_tables_have_the_contract_columns_and_one_row_per_field() {
    let generated = generate(&QUANTUM).unwrap();
    let sdh = sweeps_csv(&generated.sdh_rows);
    assert!(sdh.starts_with("sample,temperature_K,field_T,rho_xx_ohm_sq,rho_xy_ohm\n"));
    assert_eq!(generated.sdh_rows.len(), 6 * 2 * SDH_POINTS_PER_BRANCH);
    assert_eq!(sdh.lines().count(), 1 + generated.sdh_rows.len());
    // Small enough to keep in the repository.
    assert!(sdh.len() < 1_000_000, "{} bytes", sdh.len());
    for row in &generated.sdh_rows {
        assert_eq!(row.sample, "HEMT-A1");
        assert!(row.point.rho_xx_ohm_sq > 0.0);
    }
}

// Symmetrized, each oscillation sweep minus the classical tensor is the
// Lifshitz-Kosevich oscillation within the noise at every field, and projecting it on the
// model oscillation gives back the model's amplitude: the files carry the frequency, the
// phase and the damping (so the mass and the Dingle temperature) that truth-sdh.json
// claims.
#[test]
fn symmetrized_oscillation_sweeps_are_the_classical_tensor_plus_the_lk_oscillation() {
    let generated = generate(&QUANTUM).unwrap();
    let model = QUANTUM.sdh_model().unwrap();
    let carriers = QUANTUM.carriers();
    for &temperature_k in QUANTUM.sdh_temperatures_k {
        let points = symmetrized(&generated.sdh_rows, temperature_k);
        assert_eq!(points.len(), SDH_POINTS_PER_BRANCH);
        let (mut projection, mut norm, mut variance) = (0.0, 0.0, 0.0);
        for point in &points {
            let classical = resistivity_tensor(&carriers, point.field_t).unwrap().rho_xx_ohm_sq;
            let oscillation = model.oscillatory_part_ohm_sq(point.field_t, temperature_k);
            let unc = point.uncertainty.unwrap().rho_xx_ohm_sq;
            let residual = point.rho_xx_ohm_sq - classical - oscillation;
            assert!(
                residual.abs() < 5.0 * unc,
                "{temperature_k} K at {} T: {residual} vs {unc}",
                point.field_t
            );
            projection += (point.rho_xx_ohm_sq - classical) * oscillation;
            norm += oscillation * oscillation;
            variance += (unc * oscillation).powi(2);
        }
        let scale = projection / norm;
        let scale_unc = variance.sqrt() / norm;
        // Even at 10 K the oscillation stands far out of the noise.
        assert!(scale_unc < 1e-2, "{temperature_k} K: {scale_unc}");
        assert!(
            (scale - 1.0).abs() < 5.0 * scale_unc,
            "{temperature_k} K: amplitude scale {scale} +- {scale_unc}"
        );
    }
}
