//! The `magnetoresistance` plugin: field sweeps beyond the carrier count.
//!
//! - `mr.symmetrize`, `mr.ratio`, `mr.kohler`, `mr.two_band_fit`: classical
//!   magnetoresistance ([`symmetrize`], [`ratio`], [`kohler`], [`two_band`]);
//! - `mr.oscillations`: Shubnikov-de Haas frequencies, densities, effective mass and Dingle
//!   temperature ([`oscillations`]);
//! - `mr.weak_localization`: the Hikami-Larkin-Nagaoka fit ([`weak_localization`]).
//!
//! Sweeps are symmetrized by `mobilis_physics::sweep`; [`analyses`] is the table glue.
//!
//! # Input
//!
//! Input role `sweep`, as for the spectrum plugin (`mobilis_sdk::sweep_table`: `field_T`,
//! `rho_xx_ohm_sq`, `rho_xy_ohm`, optional `_unc` columns). `mr.symmetrize`, `mr.ratio`,
//! `mr.two_band_fit` and `mr.weak_localization` take one sweep per call (`group_by: ["sample",
//! "temperature_K"]`); `mr.kohler` and `mr.oscillations` take one sample's sweeps at several
//! temperatures (`group_by: "sample"`), split where the sorted temperatures jump by more than
//! the larger of `temperature_tolerance_K` (0.05 K) and `temperature_relative_tolerance` x T
//! (0.5 %). Zero field is |B| <= `zero_field_tolerance_T`: 1e-4 T by default, as in
//! `mobilis_physics::sweep`, except `mr.weak_localization`, whose sigma(0) takes 1e-3 T. A sweep
//! at one field sign is accepted (flagged `single_field_sign`) by every analysis but
//! `mr.symmetrize`.
//!
//! - `mr.symmetrize`: the even rho_xx and odd rho_xy on the common |B| points, the removed
//!   parts point by point, a Hall misalignment fraction over the low fields
//!   (`misalignment_max_field_T`) and a Hall pickup fraction in rho_xx.
//! - `mr.ratio`: (rho(B) - rho(0)) / rho(0), rho(0) the mean of the zero-field points, or with
//!   `zero_field: "extrapolated"` a quadratic fit to the lowest fields (a sweep without a
//!   zero-field point is otherwise refused).
//! - `mr.kohler`: MR against x = B / rho(0) for every temperature on a common log grid of x
//!   (`grid_points`), the spread of ln MR between temperatures beyond their noise compared with
//!   `tolerance` (0.05, a choice, not a standard); `kohler_holds`, the failing x ranges with
//!   their most deviating temperature, and a power law MR = a x^n per temperature.
//! - `mr.two_band_fit`: two Drude carriers (`carriers`, default `["n", "p"]`) fitted in
//!   resistivity space; for two carriers it agrees with `spectrum.multi_carrier_fit`, which
//!   fits in conductivity space.
//! - `mr.oscillations`: Shubnikov-de Haas frequencies and densities, the effective mass
//!   (`mass_method: waveform_fit`, the default, or `narrow_windows`; never from one wide-window
//!   FFT amplitude, which comes out 10-25 % low), the Dingle temperature at the coldest sweep
//!   and, with `landau_fan`, the fan of the extrema; the budget's parts in [`oscillations`],
//!   "Uncertainties".
//! - `mr.weak_localization`: the Hikami-Larkin-Nagaoka correction fitted for alpha and l_phi,
//!   with a fitted zero-field offset by default (`fit_offset`) and optionally a classical B^2
//!   term (`classical_term`).
//!
//! Every fit weighted by stated uncertainties widens its errors by the Birge ratio when
//! chi^2/nu > 1 and warns below p = 1e-3 with the worst fields (`mobilis_numerics::fit::quality`).
//!
//! # Coverage
//!
//! Rule and method in `mobilis_numerics::fit::quality`, "Coverage"; within 1 sigma / within 2
//! sigma, default run; then `MOBILIS_SLOW_TESTS=1`:
//!
//! | quantity | test | realizations | coverage |
//! |---|---|---|---|
//! | `mr.oscillations` F | `oscillations/coverage.rs` | 40; 200 | 62 % / 95 %; 68 % / 96 % |
//! | `mr.oscillations` m* | same | 40; 200 | 65 % / 98 %; 61 % / 98 % |
//! | `mr.oscillations` T_D (Dingle plot) | same | 40; 200 | 70 % / 100 %; 70 % / 99 % |
//! | `mr.weak_localization` l_phi, weighted by stated noise / by the scatter | `weak_localization/coverage.rs` | 100 | 63 % / 96 %; 67 % / 95 % |
//!
//! The Shubnikov-de Haas realizations have a saturating background that changes a little with
//! temperature, four temperatures each sampled differently, noise on rho_xx, and a thermometer
//! offset and field-scale error drawn once per realization and stated; a companion test shows
//! that the fit's own errors alone fail the rule for F (so the check can fail). Stage drift
//! between sweeps is implemented (`temperature_stability_K`) but not yet in a coverage test,
//! and m* sat about 0.9 sigma low on average in one trial with another seed (still 100 % within
//! 2 sigma): a background that changes with temperature, which the repeats do not fully follow,
//! is the suspect.

pub mod analyses;
pub mod figures;
pub mod kohler;
pub mod oscillations;
pub mod ratio;
pub mod symmetrize;
pub mod two_band;
pub mod weak_localization;

mobilis_sdk::export_plugin!(
    name: "magnetoresistance",
    analyses: [
        analyses::classical::SymmetrizeAnalysis,
        analyses::classical::RatioAnalysis,
        analyses::classical::KohlerAnalysis,
        analyses::classical::TwoBandAnalysis,
        analyses::quantum::OscillationsAnalysis,
        analyses::quantum::WeakLocalizationAnalysis,
    ]
);
