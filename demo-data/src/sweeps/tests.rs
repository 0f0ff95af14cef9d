//! Tests of the swept wafers: the field program, the table contract, the invented carriers recovered.

use super::*;
use crate::{heterostructure, inas_film};
use mobilis_physics::sweep::{symmetrize, SymmetrizeSettings};

const WAFERS: [&Wafer; 2] = [&heterostructure::WAFER, &inas_film::WAFER];

#[test]
fn the_field_program_covers_both_signs_on_different_points() {
    let fields = sweep_fields().unwrap();
    assert_eq!(fields.len(), 145);
    assert_eq!((fields[0], fields[72], fields[144]), (-8.996, 0.0, 9.0));
    assert!(fields.windows(2).all(|pair| pair[0] < pair[1]));
    // No negative |B| coincides with a positive one.
    for negative in fields.iter().filter(|b| **b < 0.0) {
        assert!(fields.iter().all(|b| (b + negative).abs() > 1e-3), "{negative}");
    }
}

#[test]
fn the_sweep_table_has_the_contract_columns_and_one_row_per_field() {
    let fields = sweep_fields().unwrap();
    for wafer in WAFERS {
        let generated = generate(wafer).unwrap();
        let csv = sweeps_csv(&generated.rows);
        assert!(csv.starts_with("sample,temperature_K,field_T,rho_xx_ohm_sq,rho_xy_ohm\n"));
        let sweeps: usize = wafer.samples.iter().map(|s| s.sweeps.len()).sum();
        assert_eq!(generated.sweep_count, sweeps);
        assert_eq!(generated.rows.len(), sweeps * fields.len());
        assert_eq!(csv.lines().count(), 1 + generated.rows.len());
        assert!(generated.rows.iter().all(|row| row.point.rho_xx_ohm_sq > 0.0));
    }
}

// Symmetrizing a generated sweep (the `mr.symmetrize` step) must give back the invented
// carriers' tensor within the noise, and the even part it removes from rho_xy must be
// the invented Hall misalignment: the data carry the physics and the defect they claim.
#[test]
fn symmetrized_sweeps_return_the_invented_tensor_and_misalignment() {
    for wafer in WAFERS {
        let generated = generate(wafer).unwrap();
        for sample in wafer.samples {
            for sweep in sample.sweeps {
                let points: Vec<SweepPoint> = generated
                    .rows
                    .iter()
                    .filter(|row| row.sample == sample.name && row.temperature_k == sweep.temperature_k)
                    .map(|row| row.point)
                    .collect();
                let symmetrized = symmetrize(&points, &SymmetrizeSettings::default()).unwrap();
                // The union grid holds zero, the 72 negative-branch |B| and the positive
                // ones up to 8.875 T; 9 T lies beyond the negative branch's reach.
                assert_eq!(symmetrized.points.len(), 1 + 72 + 71);
                let carriers = sweep.carriers();
                for point in &symmetrized.points {
                    let ideal = resistivity_tensor(&carriers, point.field_t).unwrap();
                    let unc = point.uncertainty.unwrap();
                    // Five standard uncertainties, plus the error of interpolating the
                    // other branch across its 4 mT offset (below 2e-5 of rho_xx even
                    // where the magnetoresistance bends most).
                    let allowance_xx = 5.0 * unc.rho_xx_ohm_sq + 2e-4 * ideal.rho_xx_ohm_sq;
                    let allowance_xy = 5.0 * unc.rho_xy_ohm + 2e-4 * ideal.rho_xx_ohm_sq;
                    assert!(
                        (point.rho_xx_ohm_sq - ideal.rho_xx_ohm_sq).abs() < allowance_xx,
                        "{} {} K at {} T: rho_xx {} vs {}",
                        sample.name,
                        sweep.temperature_k,
                        point.field_t,
                        point.rho_xx_ohm_sq,
                        ideal.rho_xx_ohm_sq
                    );
                    assert!(
                        (point.rho_xy_ohm - ideal.rho_xy_ohm).abs() < allowance_xy,
                        "{} {} K at {} T: rho_xy {} vs {}",
                        sample.name,
                        sweep.temperature_k,
                        point.field_t,
                        point.rho_xy_ohm,
                        ideal.rho_xy_ohm
                    );
                }
                let alpha = sample.imperfections.hall_misalignment.abs();
                assert!(
                    (symmetrized.max_rho_xy_asymmetry / alpha - 1.0).abs() < 0.2,
                    "{} {} K: misalignment {} vs {alpha}",
                    sample.name,
                    sweep.temperature_k,
                    symmetrized.max_rho_xy_asymmetry
                );
            }
        }
    }
}

// The sign of rho_xy follows the contract (positive for holes at positive field): the
// heterostructure's electrons give a negative Hall resistivity at every positive field,
// while the InAs film's is negative at low field, where the mobile surface electrons
// dominate, and positive at high field, where the net charge of the holes does.
#[test]
fn hall_signs_follow_the_carriers() {
    for sweep in heterostructure::WAFER.samples[0].sweeps {
        let carriers = sweep.carriers();
        for field in [0.5, 3.0, 9.0] {
            assert!(resistivity_tensor(&carriers, field).unwrap().rho_xy_ohm < 0.0);
        }
    }
    for sweep in heterostructure::WAFER.samples[0].sweeps {
        assert_eq!(hall_sign_change_t(&sweep.carriers()), None);
    }
    for sweep in inas_film::WAFER.samples[0].sweeps {
        let carriers = sweep.carriers();
        assert!(resistivity_tensor(&carriers, 0.2).unwrap().rho_xy_ohm < 0.0);
        assert!(resistivity_tensor(&carriers, 9.0).unwrap().rho_xy_ohm > 0.0);
        // One electron and one hole population: sigma_xy vanishes where
        // n mu_n^2 (1 + mu_p^2 B^2) = p mu_p^2 (1 + mu_n^2 B^2).
        let (n, mu_n) = (carriers[0].sheet_density_m2, carriers[0].mobility_m2_per_vs);
        let (p, mu_p) = (carriers[1].sheet_density_m2, carriers[1].mobility_m2_per_vs);
        let closed = ((n * mu_n * mu_n - p * mu_p * mu_p) / (mu_n * mu_n * mu_p * mu_p * (p - n))).sqrt();
        let found = hall_sign_change_t(&carriers).unwrap();
        assert!((found / closed - 1.0).abs() < 1e-9, "{found} vs {closed}");
    }
}
