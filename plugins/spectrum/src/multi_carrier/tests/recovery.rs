//! Recovery: sweeps generated from known carriers with noise, fitted with the kinds given;
//! every density and mobility must come back within its reported uncertainty.

use super::support::{given, noisy_sweep};
use crate::multi_carrier::*;
use CarrierKind::{Electron, Hole};

/// How many reported standard uncertainties a recovered value may be off. With about 200
/// recovered values in this file, a Gaussian error beyond 4 sigma has a chance of about
/// 200 x 6.3e-5 = 1.3 % of appearing anywhere; 3 sigma would make a failure likely by
/// chance alone.
const TOLERANCE_SIGMAS: f64 = 4.0;

/// Checks every carrier of `fit` against `truth` (matched in the output order: kind, then
/// mobility). A carrier the sweep reaches (mu B_max >= 1) must also be determined to better
/// than 30 %, so that a huge uncertainty cannot pass the check by itself.
pub(super) fn assert_recovered(fit: &MultiCarrierFit, truth: &[Carrier], label: &str) {
    let mut expected = truth.to_vec();
    expected.sort_by(|a, b| {
        a.kind
            .cmp(&b.kind)
            .then(a.mobility_m2_per_vs.total_cmp(&b.mobility_m2_per_vs))
    });
    assert_eq!(fit.carriers.len(), expected.len(), "{label}: {:#?}", fit.carriers);
    for (fitted, true_carrier) in fit.carriers.iter().zip(&expected) {
        assert_eq!(fitted.kind, true_carrier.kind, "{label}");
        let checks = [
            (
                "sheet density",
                fitted.sheet_density_m2,
                fitted.sheet_density_unc_m2,
                true_carrier.sheet_density_m2,
            ),
            (
                "mobility",
                fitted.mobility_m2_per_vs,
                fitted.mobility_unc_m2_per_vs,
                true_carrier.mobility_m2_per_vs,
            ),
        ];
        for (what, value, unc, true_value) in checks {
            let unc = unc.unwrap_or_else(|| panic!("{label}: {what} of {fitted:?} has no uncertainty"));
            let z = (value - true_value) / unc;
            assert!(
                z.abs() <= TOLERANCE_SIGMAS,
                "{label}: {what} {value:e} +- {unc:e}, true {true_value:e} (z = {z:.2}); warnings {:#?}",
                fit.warnings
            );
            if true_carrier.mobility_m2_per_vs * fit.max_field_t >= 1.0 {
                assert!(
                    unc < 0.3 * value,
                    "{label}: {what} {value:e} +- {unc:e} is barely determined"
                );
            }
        }
    }
}

fn recover(truth: &[Carrier], seed: u64, label: &str) -> MultiCarrierFit {
    let kinds: Vec<CarrierKind> = truth.iter().map(|c| c.kind).collect();
    let sweep = noisy_sweep(truth, 9.0, 36, seed);
    let fit = fit_sweep(&sweep, &SymmetrizeSettings::default(), &given(&kinds))
        .unwrap_or_else(|e| panic!("{label}: {e}"))
        .fit;
    assert_recovered(&fit, truth, label);
    fit
}

// One carrier of either sign over four decades of density and two of mobility.
#[test]
fn multi_carrier_recovers_one_carrier_of_either_sign() {
    let mut seed = 0;
    for kind in [Electron, Hole] {
        for density in [1e14, 1e16, 1e18] {
            for mobility in [0.01, 0.2, 3.0] {
                let truth = [Carrier {
                    kind,
                    sheet_density_m2: density,
                    mobility_m2_per_vs: mobility,
                }];
                seed += 1;
                let fit = recover(&truth, seed, &format!("{kind:?} {density:e} {mobility}"));
                assert!(fit.warnings.is_empty(), "{:#?}", fit.warnings);
            }
        }
    }
}

// Two carriers of every sign pairing, mobility ratios 3, 10 and 30 (the second carrier at
// mu B_max = 3, 0.9 and 0.3) and density ratios 0.1, 1 and 10.
#[test]
fn multi_carrier_recovers_two_carriers_over_mobility_and_density_ratios() {
    let mut seed = 500;
    for (first, second) in [(Electron, Electron), (Electron, Hole), (Hole, Electron), (Hole, Hole)] {
        for ratio in [3.0, 10.0, 30.0] {
            for density_ratio in [0.1, 1.0, 10.0] {
                let truth = [
                    Carrier {
                        kind: first,
                        sheet_density_m2: 1e16,
                        mobility_m2_per_vs: 1.0,
                    },
                    Carrier {
                        kind: second,
                        sheet_density_m2: 1e16 * density_ratio,
                        mobility_m2_per_vs: 1.0 / ratio,
                    },
                ];
                seed += 1;
                recover(
                    &truth,
                    seed,
                    &format!("{first:?} + {second:?}, mobility ratio {ratio}, density ratio {density_ratio}"),
                );
            }
        }
    }
}

// Three carriers: a 2D channel over a parallel layer with holes below (the demo's
// heterostructure and film cases), light and heavy holes with electrons, and three
// electron populations.
#[test]
fn multi_carrier_recovers_three_carriers() {
    let cases: [(&str, [Carrier; 3]); 3] = [
        (
            "channel, parallel layer, holes",
            [
                Carrier::electron(1e16, 2.0),
                Carrier::electron(5e16, 0.2),
                Carrier::hole(3e17, 0.04),
            ],
        ),
        (
            "light and heavy holes, electrons",
            [
                Carrier::hole(5e15, 1.0),
                Carrier::hole(1e17, 0.1),
                Carrier::electron(2e16, 0.3),
            ],
        ),
        (
            "three electron populations",
            [
                Carrier::electron(5e15, 5.0),
                Carrier::electron(2e16, 0.8),
                Carrier::electron(1e17, 0.12),
            ],
        ),
    ];
    for (index, (label, truth)) in cases.iter().enumerate() {
        recover(truth, 900 + index as u64, label);
    }
}
