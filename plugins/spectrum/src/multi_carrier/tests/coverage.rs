//! Coverage: do the reported uncertainties of `spectrum.multi_carrier_fit` hold the truth
//! as often as a standard uncertainty should?
//!
//! Each realization is a sweep as a lab's magnet records it: 0.125 T steps to +-9 T, the
//! negative branch offset by a few mT of remanent field (so both branches are
//! interpolated), a Hall misalignment and a longitudinal Hall pickup to remove, and lock-in
//! noise of an absolute floor plus a fraction of each reading, stated as the points'
//! uncertainties. Once per series, as a real calibration error is, the field scale and the
//! resistivity scale are drawn from normal distributions of the stated calibration
//! uncertainties, and the sweep records the miscalibrated values. The fit is told those
//! calibration uncertainties and must include them.
//!
//! The count within 1 and 2 standard uncertainties must lie within 55-80 % and reach 90 %
//! (`mobilis_numerics::fit::Coverage::is_honest`; a normal error gives 68.3 % and 95.4 %,
//! JCGM 100:2008, G.1). Seeds are fixed, so the counts are the same on every run.

use super::*;
use mobilis_numerics::fit::Coverage;
use mobilis_physics::sweep::ResistivityUncertainty;

/// Realizations per case: 100 in a debug build, or `full` when MOBILIS_SLOW_TESTS=1.
pub(crate) fn realizations(fast: usize, full: usize) -> usize {
    if std::env::var("MOBILIS_SLOW_TESTS").is_ok_and(|value| value == "1") {
        full
    } else {
        fast
    }
}

/// Relative standard uncertainty of the magnet's field scale stated by the lab: 0.1 %
/// (a Hall-probe calibration of a superconducting magnet, common practice).
const FIELD_CALIBRATION: f64 = 1e-3;
/// Relative standard uncertainty of the resistivity scale: 0.1 % (current source and
/// voltmeter gain of a calibrated lock-in setup, common practice). Chosen, like the noise,
/// so that the statistical and calibration parts are of one size and both are tested.
const RESISTIVITY_CALIBRATION: f64 = 1e-3;

/// A lab-like sweep of `truth` with the calibration errors of this series drawn from `rng`,
/// and the carriers a perfect fit of it would return: a field read (1 + e_B) too high
/// divides every mobility by (1 + e_B) and, sigma_xx(0) = e n mu being fixed, multiplies
/// every density by it; a resistivity read (1 + e_R) too high divides every density by
/// (1 + e_R) (the Drude sums of Beck and Anderson, J. Appl. Phys. 62, 541, 1987).
fn lab_sweep(
    truth: &[Carrier],
    steps_per_sign: usize,
    remanence_t: f64,
    rng: &mut Rng,
) -> (Vec<SweepPoint>, Vec<Carrier>) {
    let field_error = FIELD_CALIBRATION * rng.standard_normal();
    let resistivity_error = RESISTIVITY_CALIBRATION * rng.standard_normal();
    let miscalibrated: Vec<Carrier> = truth
        .iter()
        .map(|c| Carrier {
            kind: c.kind,
            sheet_density_m2: c.sheet_density_m2 * (1.0 + field_error) / (1.0 + resistivity_error),
            mobility_m2_per_vs: c.mobility_m2_per_vs / (1.0 + field_error),
        })
        .collect();
    let rho_0 = resistivity_tensor(truth, 0.0).unwrap().rho_xx_ohm_sq;
    // Lock-in noise: 1e-3 of the reading plus 1e-4 of the zero-field rho_xx (a small
    // sample at a low current), so that the statistical part is not lost beside the
    // calibration part.
    let noise = SweepNoise {
        absolute_ohm: 1e-4 * rho_0,
        relative: 1e-3,
    };
    // The fields the sample sees: +-9 T in `steps_per_sign` steps, the negative branch
    // `remanence_t` above its setpoints (remanence after the coil was reversed).
    let true_fields: Vec<f64> = symmetric_fields(9.0, steps_per_sign)
        .unwrap()
        .into_iter()
        .map(|b| if b < 0.0 { b + remanence_t } else { b })
        .collect();
    let imperfections = SweepImperfections {
        hall_misalignment: 0.01,
        longitudinal_hall_pickup: 0.002,
    };
    let sweep = synthetic_sweep(truth, &true_fields, &noise, &imperfections, rng)
        .unwrap()
        .into_iter()
        .map(|p| {
            let scale = 1.0 + resistivity_error;
            SweepPoint {
                field_t: p.field_t * (1.0 + field_error),
                rho_xx_ohm_sq: p.rho_xx_ohm_sq * scale,
                rho_xy_ohm: p.rho_xy_ohm * scale,
                uncertainty: p.uncertainty.map(|u| ResistivityUncertainty {
                    rho_xx_ohm_sq: u.rho_xx_ohm_sq * scale,
                    rho_xy_ohm: u.rho_xy_ohm * scale,
                    correlation: u.correlation,
                }),
            }
        })
        .collect();
    (sweep, miscalibrated)
}

/// Coverage of the sheet density and mobility of each carrier of `truth` (given in output
/// order: electrons, then holes, each by increasing mobility) over `count` realizations.
fn coverage_of(
    truth: &[Carrier],
    steps_per_sign: usize,
    remanence_t: f64,
    count: usize,
    seed: u64,
) -> Vec<(String, Coverage)> {
    let kinds: Vec<CarrierKind> = truth.iter().map(|c| c.kind).collect();
    let settings = MultiCarrierSettings {
        selection: CarrierSelection::Kinds(kinds),
        calibration: Calibration {
            field_rel: Some(FIELD_CALIBRATION),
            // rho = V / I: the drawn resistivity error is that of the pair, u_R^2 = u_I^2 + u_V^2.
            current_rel: Some(RESISTIVITY_CALIBRATION / std::f64::consts::SQRT_2),
            voltage_rel: Some(RESISTIVITY_CALIBRATION / std::f64::consts::SQRT_2),
        },
        // The deterministic starts from the data find these carriers; random ones
        // would only slow the test in a debug build.
        random_starts: 0,
        ..MultiCarrierSettings::default()
    };
    let mut rng = Rng::seeded(seed);
    let mut table: Vec<(String, Coverage)> = truth
        .iter()
        .enumerate()
        .flat_map(|(k, c)| {
            let name = c.kind.name();
            [
                (
                    format!("carrier {k} ({name}) sheet density, total"),
                    Coverage::default(),
                ),
                (format!("carrier {k} ({name}) mobility, total"), Coverage::default()),
                (
                    format!("carrier {k} ({name}) sheet density, statistical part"),
                    Coverage::default(),
                ),
                (
                    format!("carrier {k} ({name}) mobility, statistical part"),
                    Coverage::default(),
                ),
            ]
        })
        .collect();
    for _ in 0..count {
        let (sweep, miscalibrated) = lab_sweep(truth, steps_per_sign, remanence_t, &mut rng);
        let fit = fit_sweep(&sweep, &SymmetrizeSettings::default(), &settings)
            .unwrap()
            .fit;
        for (k, fitted) in fit.carriers.iter().enumerate() {
            let (n, mu) = (fitted.sheet_density_m2, fitted.mobility_m2_per_vs);
            let missing = f64::NAN;
            // The total against the truth; the statistical part against what a perfect fit
            // of the miscalibrated sweep gives, which tests it apart from the calibrations.
            let rows = [
                (n, fitted.sheet_density_unc_m2, truth[k].sheet_density_m2),
                (mu, fitted.mobility_unc_m2_per_vs, truth[k].mobility_m2_per_vs),
                (n, fitted.sheet_density_budget.stat, miscalibrated[k].sheet_density_m2),
                (mu, fitted.mobility_budget.stat, miscalibrated[k].mobility_m2_per_vs),
            ];
            for (row, (estimate, unc, true_value)) in rows.into_iter().enumerate() {
                table[4 * k + row]
                    .1
                    .record(estimate, unc.unwrap_or(missing), true_value);
            }
        }
    }
    table
}

fn assert_honest(table: &[(String, Coverage)], case: &str) {
    let report: Vec<String> = table
        .iter()
        .map(|(what, c)| format!("{what}: {}", c.describe()))
        .collect();
    // Printed so that `cargo test -- --nocapture` shows the measured table.
    println!("{case}\n  {}", report.join("\n  "));
    for (what, coverage) in table {
        assert!(
            coverage.is_honest(),
            "{case}: {what}: {}\n  {}",
            coverage.describe(),
            report.join("\n  ")
        );
    }
}

// A two-dimensional electron channel over a p-type buffer of lower mobility: both carriers
// reach mu B_max > 1 within 9 T, as in a typical heterostructure run.
#[test]
fn multi_carrier_two_carrier_uncertainties_cover_the_truth() {
    let truth = [Carrier::electron(1e16, 1.0), Carrier::hole(5e16, 0.12)];
    // 0.125 T steps, the demo magnet's program, with 4 mT of remanence on the negative
    // branch: the branches are interpolated, and the reading reuse factor must correct the
    // double counting of the union grid.
    let table = coverage_of(&truth, 72, 0.004, realizations(100, 400), 0x2c0f);
    assert_honest(&table, "two carriers");
}

// Three carriers: a channel, a parallel electron layer of low mobility and holes, with 4 mT
// of remanence on the negative branch. Before the fit's second pass removed the error of
// linear interpolation between field points (the `interpolation` submodule), that error
// moved the channel's mobility (mu = 1.2 m^2/(V s), curvature near 1/mu = 0.8 T) by about
// a statistical standard uncertainty: its statistical part held the miscalibrated truth in
// only 49 % of realizations (83 % within 2 sigma).
#[test]
fn multi_carrier_three_carrier_uncertainties_cover_the_truth() {
    let truth = [
        Carrier::electron(3e16, 0.15),
        Carrier::electron(8e15, 1.2),
        Carrier::hole(4e16, 0.4),
    ];
    let table = coverage_of(&truth, 72, 0.004, realizations(100, 400), 0x3c0f);
    assert_honest(&table, "three carriers");
}

// The diagnostics on one sweep whose stated uncertainties are 4 times too small: chi^2 / nu
// near 16, a p-value far below 1e-3, the statistical uncertainties widened by the Birge
// ratio sqrt(chi^2 / nu) (Birge 1932), and a warning that names the worst points by
// component and field and the parameters that set the weights.
#[test]
fn multi_carrier_understated_uncertainties_are_widened_by_the_birge_ratio() {
    let truth = [Carrier::electron(1e16, 1.0), Carrier::hole(5e16, 0.12)];
    let (sweep, _) = lab_sweep(&truth, 36, 0.0, &mut Rng::seeded(77));
    let understated: Vec<SweepPoint> = sweep
        .iter()
        .map(|p| SweepPoint {
            uncertainty: p.uncertainty.map(|u| ResistivityUncertainty {
                rho_xx_ohm_sq: u.rho_xx_ohm_sq / 4.0,
                rho_xy_ohm: u.rho_xy_ohm / 4.0,
                correlation: u.correlation,
            }),
            ..*p
        })
        .collect();
    let settings = given(&[Electron, Hole]);
    let honest = fit_sweep(&sweep, &SymmetrizeSettings::default(), &settings)
        .unwrap()
        .fit;
    let fit = fit_sweep(&understated, &SymmetrizeSettings::default(), &settings)
        .unwrap()
        .fit;
    assert!((fit.birge_ratio - fit.reduced_chi_square.sqrt()).abs() < 1e-12);
    // A chi-square of 16 nu is far out: the ratio lands near 4 (3 to 5 for 72 points).
    assert!(fit.birge_ratio > 3.0 && fit.birge_ratio < 5.0, "{}", fit.birge_ratio);
    assert!(fit.chi_square_p_value.unwrap() < 1e-6);
    assert!(honest.birge_ratio < 1.3 && honest.chi_square_p_value.unwrap() > 1e-3);
    // Widened, the statistical uncertainties are those of the honest fit again (within the
    // scatter of chi-square, 15 % here).
    for (scaled, reference) in fit.carriers.iter().zip(&honest.carriers) {
        let ratio = scaled.sheet_density_budget.stat.unwrap() / reference.sheet_density_budget.stat.unwrap();
        assert!((ratio - 1.0).abs() < 0.15 * honest.birge_ratio.max(1.0), "{ratio}");
    }
    let warning = fit
        .warnings
        .iter()
        .find(|w| w.contains("Birge ratio"))
        .unwrap_or_else(|| panic!("{:#?}", fit.warnings));
    assert!(
        warning.contains(" at B = ") && warning.contains(" T (point "),
        "{warning}"
    );
    assert!(
        warning.contains("rho_xx_ohm_sq_unc") && warning.contains("relative_uncertainty_floor"),
        "{warning}"
    );
}

// The floor raises a point whose stated uncertainty no instrument has, and says so; the
// calibrations left out are listed; branches measured at the same fields count each reading
// once, offset ones about twice (the union grid holds each reading at its own field and,
// interpolated, at the other branch's neighbouring field).
#[test]
fn multi_carrier_floor_calibrations_and_reading_reuse_are_reported() {
    let truth = [Carrier::electron(1e16, 1.0), Carrier::hole(5e16, 0.12)];
    let mut rng = Rng::seeded(78);
    let (aligned, _) = lab_sweep(&truth, 36, 0.0, &mut rng);
    let (offset, _) = lab_sweep(&truth, 36, 0.004, &mut rng);
    // Both components of both readings at |B| = 1 T (indices 40 and 32 of the 73 fields
    // from -9 T), so that the symmetrized conductivity there is pinned too.
    let mut pinned = aligned.clone();
    for index in [40, 32] {
        let u = pinned[index].uncertainty.unwrap();
        pinned[index].uncertainty = Some(ResistivityUncertainty {
            rho_xx_ohm_sq: u.rho_xx_ohm_sq * 1e-9,
            rho_xy_ohm: u.rho_xy_ohm * 1e-9,
            correlation: u.correlation,
        });
    }
    let pinned_at = pinned[40].field_t;
    // 1 T read through the drawn field calibration (0.1 %).
    assert!((pinned_at - 1.0).abs() < 1e-2 && (pinned[32].field_t + pinned_at).abs() < 1e-12);
    let settings = MultiCarrierSettings {
        calibration: Calibration::all(0.0),
        ..given(&[Electron, Hole])
    };
    let fit = fit_sweep(&pinned, &SymmetrizeSettings::default(), &settings)
        .unwrap()
        .fit;
    assert_eq!(fit.floored_points, 1, "the point at {pinned_at} T");
    assert!(fit.warnings.iter().any(|w| w.contains("relative_uncertainty_floor")));
    // Calibrations stated as exact: the total is the statistical part alone.
    assert!(fit.calibration.not_stated().is_empty());
    let carrier = &fit.carriers[0];
    assert_eq!(carrier.sheet_density_budget.sys, 0.0);
    assert_eq!(carrier.sheet_density_unc_m2, carrier.sheet_density_budget.stat);

    // Not stated, the calibrations take their defaults and are listed.
    let settings = given(&[Electron, Hole]);
    let aligned_fit = fit_sweep(&aligned, &SymmetrizeSettings::default(), &settings)
        .unwrap()
        .fit;
    assert_eq!(
        aligned_fit.calibration.not_stated(),
        vec![
            "field_calibration_rel",
            "current_calibration_rel",
            "voltage_calibration_rel"
        ]
    );
    let carrier = &aligned_fit.carriers[0];
    let relative_sys = carrier.sheet_density_budget.sys / carrier.sheet_density_m2;
    assert!((relative_sys - Calibration::default().density_relative()).abs() < 1e-12);
    let offset_fit = fit_sweep(&offset, &SymmetrizeSettings::default(), &settings)
        .unwrap()
        .fit;
    assert!(
        (aligned_fit.reading_reuse_factor - 1.0).abs() < 0.05,
        "{}",
        aligned_fit.reading_reuse_factor
    );
    assert!(
        (offset_fit.reading_reuse_factor - 2.0).abs() < 0.2,
        "{}",
        offset_fit.reading_reuse_factor
    );
}
