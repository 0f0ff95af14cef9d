//! The `carriers` plugin: how many donors and acceptors a crystal holds and how pure it is,
//! from a temperature series of Hall results (the output of `hall.reduce`).
//!
//! - `carriers.freeze_out_fit`: majority and compensating densities and the ionization
//!   energy from the charge-neutrality equation ([`freeze_out`]);
//! - `carriers.arrhenius`: an activation energy from the slope of the Arrhenius plot
//!   ([`arrhenius`]);
//! - `carriers.mobility_scattering`: the lattice exponent and the ionized-impurity density
//!   from mobility against temperature with Matthiessen's rule ([`scattering`]);
//! - `carriers.purity`: net doping, compensation ratio and total impurities from both
//!   counts ([`purity`]).
//!
//! The physics modules are plain Rust on slices and structs; [`analyses`] is the table glue
//! and the declarations; `export_plugin!` writes the C side.
//!
//! # The input and the shared parameters
//!
//! Input role `hall`: a temperature series, the output of `hall.reduce` (`temperature_K`,
//! `density_m3` with optional `density_m3_unc`, `density_m3_unc_stat`, `density_m3_unc_sys`,
//! `temperature_K_unc`, `hall_factor` (the factor already applied), `carrier_type`,
//! `hall_mobility_m2_per_Vs` and `drift_mobility_m2_per_Vs` with their `_unc`, `_unc_stat` and
//! `_unc_sys`). A table without the `_stat`/`_sys` split (from elsewhere, or older) is
//! accepted: `_unc` is then taken as statistical, with a warning that no calibration budget was
//! given. Run the analyses with `group_by: "sample"` for several samples;
//! `demo-data/pipeline.toml` chains all four.
//!
//! Parameters several analyses share (each analysis's declaration, `analysis.describe`, says
//! which it takes):
//!
//! - `material` (the presets of [`materials`]: Si, Ge, GaAs, InP, GaN, 4H-SiC, each value with
//!   its source, values recalled rather than read marked so) and `material_overrides`
//!   (freeze-out and scattering fits);
//! - `carrier_type`, to force n or p;
//! - the Hall factor, at most one of `hall_factor`, `hall_factor_scattering_exponent` (Putley's
//!   r_H for tau ~ E^s) and, for the freeze-out fit and the Arrhenius line, `hall_factor_table`
//!   ([temperature_K, r_H] pairs, linear in T and held at the end values, for an r_H that
//!   varies with temperature). In the density fits each *replaces* the factor `hall.reduce`
//!   applied: n = n_given r_H(T) / r_applied ([`freeze_out::HallFactor`]), and the summary's
//!   `hall_factor` is null when it varies with temperature. The scattering fit divides the Hall
//!   mobilities by it ([`scattering`], "Hall and drift mobility");
//! - `temperature_min_K`, `temperature_max_K`: the range fitted;
//! - `relative_uncertainty_floor` (default 1e-3,
//!   `mobilis_numerics::fit::RELATIVE_UNCERTAINTY_FLOOR`);
//! - `temperature_uncertainty_K` for rows without `temperature_K_unc` (0 when not given;
//!   freeze-out fit and Arrhenius line), and for the freeze-out fit only
//!   `density_scale_relative_uncertainty` for a table without `density_m3_unc_sys` (0 when not
//!   given). The freeze-out fit lists what was not given in `uncertainties_not_given`; the
//!   scattering fit lists missing calibrations in `calibrations_not_stated`.
//!
//! Every fit weighs its points by the statistical part alone and applies the calibrations
//! common to the series once, after the fit, through its own linear response (the conventions
//! of `mobilis_numerics::fit::quality`).
//!
//! # Coverage and validation
//!
//! The coverage tests (rule and method in `mobilis_numerics::fit::quality`, "Coverage") and their
//! last counts, within 1 sigma / within 2 sigma, for the default run and then the
//! `MOBILIS_SLOW_TESTS=1` run:
//!
//! | quantity | test | realizations | coverage |
//! |---|---|---|---|
//! | `carriers.freeze_out_fit` N_D | `freeze_out/coverage.rs` | 100; 400 | 66 % / 96 %; 67 % / 95 % |
//! | `carriers.freeze_out_fit` N_A | same | 100; 400 | 67 % / 96 %; 68 % / 95 % |
//! | `carriers.freeze_out_fit` E_D | same | 100; 400 | 69 % / 95 %; 69 % / 95 % |
//! | raw readings -> `hall.reduce` -> `carriers.freeze_out_fit` through the daemon, N_D / N_A / E_D | `tests/tests/suite/carriers_chain.rs` | 60; 200 | 63 / 62 / 65 % and 97 % each; 69 / 68 / 70 % and 94 / 96 / 95 % |
//! | `carriers.arrhenius` E | `arrhenius/tests.rs` | 400; 2000 | 72 % / 97 %; 68 % / 96 % |
//! | `carriers.mobility_scattering` mu_300 / alpha / N_I (constant N_I) | `scattering/budget_tests.rs` | 100 | 73 / 63 / 71 % and 95 / 97 / 95 % |
//! | `carriers.mobility_scattering` N_A / mu_300 / alpha (n + 2 N_comp) | same | 100 | 66 / 68 / 74 % and 92 / 98 / 97 % |
//!
//! On a realistic compensated silicon series with stage drift (N_D 3.3e15 cm^-3), the
//! freeze-out fit returns N_D within 5 % in every realization once the drawn thickness error
//! (which no fit can know) is divided out (worst 2.3 % through the daemon); with a 3 %
//! thickness error drawn, about 85 % land within 5 %, and the error bars cover the rest.
//!
//! `scattering/validation.rs` checks the physics against published measurements and empirical
//! fits, each source beside its check: Arora et al. (IEEE Trans. Electron Devices 29, 292,
//! 1982) against Masetti et al. (IEEE Trans. Electron Devices 30, 764, 1983) for silicon
//! electron and hole mobility at 300 K (within 11 % from 1e14 to 1e18 cm^-3); the silicon
//! preset's lattice laws against Jacoboni et al. (Solid-State Electron. 20, 77, 1977) from 77 K
//! to 400 K (within 11 %); silicon's intrinsic density from the preset against Sproul and Green
//! (J. Appl. Phys. 70, 846, 1991; the preset is 13 % low at 300 K) and Misiakos and Tsamakis
//! (J. Appl. Phys. 74, 3293, 1993; within 14 % from 78 K to 340 K); the purity margin against
//! the scattering fit of Arora's and Masetti's silicon from 1e14 to 1e18 cm^-3 (no good sample
//! called inconsistent; the largest deviation is 1.7 sigma). Parameters recalled rather than
//! read from the paper are marked "from memory" there.
//!

pub mod analyses;
pub mod arrhenius;
pub mod carrier_type;
pub mod figures;
pub mod freeze_out;
pub mod materials;
pub mod purity;
pub mod scattering;

mobilis_sdk::export_plugin!(
    name: "carriers",
    analyses: [
        analyses::freeze_out_fit::FreezeOutFitAnalysis,
        analyses::arrhenius_fit::ArrheniusAnalysis,
        analyses::mobility_scattering::MobilityScatteringAnalysis,
        analyses::purity_summary::PurityAnalysis,
    ]
);
