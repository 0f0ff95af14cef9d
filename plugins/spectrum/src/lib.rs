//! The `spectrum` plugin: several carriers at once, from the field dependence of the
//! conductivity tensor.
//!
//! - `spectrum.multi_carrier_fit`: N discrete carriers fitted to sigma_xx(B) and sigma_xy(B)
//!   ([`multi_carrier`]);
//! - `spectrum.mobility`: the Beck-Anderson envelope and a regularized mobility spectrum with
//!   its peaks ([`mobility_spectrum`]).
//!
//! Sweeps are symmetrized by `mobilis_core::sweep` (shared with the magnetoresistance
//! plugin); [`analyses`] is the table glue.

pub mod analyses;
pub mod figures;
pub mod mobility_spectrum;
pub mod multi_carrier;
pub mod reduction;

mobilis_core::export_plugin!(
    name: "spectrum",
    analyses: [analyses::MultiCarrierFitAnalysis, analyses::MobilitySpectrumAnalysis]
);
