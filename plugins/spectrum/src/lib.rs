//! The `spectrum` plugin: several carriers at once, from the field dependence of the
//! conductivity tensor.
//!
//! - `spectrum.multi_carrier_fit`: N discrete carriers fitted to sigma_xx(B) and sigma_xy(B)
//!   ([`multi_carrier`]);
//! - `spectrum.mobility`: the Beck-Anderson envelope and a regularized mobility spectrum with
//!   its peaks ([`mobility_spectrum`]).
//!
//! Sweeps are symmetrized by `mobilis_physics::sweep` (shared with the magnetoresistance
//! plugin); [`analyses`] is the table glue.
//!
//! # Input, shared parameters and what both analyses report
//!
//! Input role `sweep` (`mobilis_sdk::sweep_table`): `field_T`, `rho_xx_ohm_sq`, `rho_xy_ohm`
//! (sheet quantities, `rho_xy` positive for holes at positive field), optional `_unc` columns,
//! one sample and temperature per call (`group_by: ["sample", "temperature_K"]`). With both
//! field signs rho_xx is symmetrized and rho_xy antisymmetrized after interpolating each branch
//! onto the common |B| points (`mobilis_physics::sweep`: Onsager's reciprocity removes what
//! misaligned contacts add), then converted to sigma_xx, sigma_xy; one sign is accepted too,
//! with `single_field_sign: true` and a warning. `zero_field_tolerance_T` (1e-4 T) and
//! `field_resolution_T` (1e-4 T) are explained there, and so is why readings merged into one
//! point carry their scatter when it exceeds their stated uncertainties, and the warning when
//! they disagree far beyond them (two copies of a sweep that do not agree).
//!
//! Both analyses take `field_calibration_rel`, `current_calibration_rel` and
//! `voltage_calibration_rel` (the names and defaults of `hall.reduce`, listed in
//! `calibrations_not_stated` when assumed), applied once after the fit: densities get
//! sqrt(u_B^2 + u_I^2 + u_V^2), mobilities u_B. `relative_uncertainty_floor` (1e-5 of |sigma|)
//! raises smaller point uncertainties, and `reading_reuse_factor` widens the statistical
//! variances when the symmetrized grid holds readings twice (both in
//! [`multi_carrier::budget`]). A sweep of more than 2,000 readings is first reduced onto a
//! field grid ([`reduction`]), with a warning.
//!
//! `spectrum.multi_carrier_fit` also reports `max_interpolation_correction`: a second pass runs
//! the fitted model through the symmetrization itself, subtracts the interpolation error this
//! reveals and refits. Its progress is reported per candidate carrier list; `spectrum.mobility`
//! reports while it chooses the regularization, bounds the envelope and resamples the
//! uncertainties. Both stop between those steps when `analysis.cancel` asks: these are the
//! analyses whose time grows with their settings.
//!
//! # Coverage
//!
//! Rule and method in `mobilis_numerics::fit::quality`, "Coverage"; within 1 sigma / within 2
//! sigma, default run; then `MOBILIS_SLOW_TESTS=1`:
//!
//! | quantity | test | realizations | coverage |
//! |---|---|---|---|
//! | `spectrum.multi_carrier_fit`, 2 carriers, n / mu of each | `multi_carrier/tests/coverage.rs` | 100; 400 | 67-71 % / 95-96 % |
//! | `spectrum.multi_carrier_fit`, 3 carriers, n / mu of each | same | 100; 400 | 66-71 % / 92-97 % |
//! | `spectrum.mobility` peak densities n_e / n_h | `mobility_spectrum/tests/coverage.rs` | 50; 200 | 64 / 72 % and 96 / 96 % |
//!
//! Known limit: the mobility of a narrow high-mobility peak of `spectrum.mobility` is 0.1-0.3 %
//! high (grid and smoothing), beyond its error bar; use `spectrum.multi_carrier_fit` for
//! mobilities. The reduction's tests (`reduction.rs`): the multi-carrier fit of a 2,400-reading
//! ramp reduced and as measured agree within their uncertainties (and with the truth within
//! three), and the spectrum of a reduced 20,000-reading ramp recovers both carriers within
//! three of its uncertainties.

pub mod analyses;
pub mod figures;
pub mod mobility_spectrum;
pub mod monitor;
pub mod multi_carrier;
pub mod reduction;

mobilis_sdk::export_plugin!(
    name: "spectrum",
    analyses: [analyses::MultiCarrierFitAnalysis, analyses::MobilitySpectrumAnalysis]
);
