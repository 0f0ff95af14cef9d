//! The `magnetoresistance` plugin: field sweeps beyond the carrier count.
//!
//! - `mr.symmetrize`, `mr.ratio`, `mr.kohler`, `mr.two_band_fit`: classical
//!   magnetoresistance ([`symmetrize`], [`ratio`], [`kohler`], [`two_band`]);
//! - `mr.oscillations`: Shubnikov-de Haas frequencies, densities, effective mass and Dingle
//!   temperature ([`oscillations`]);
//! - `mr.weak_localization`: the Hikami-Larkin-Nagaoka fit ([`weak_localization`]).
//!
//! Sweeps are symmetrized by `mobilis_core::sweep`; [`analyses`] is the table glue.

pub mod analyses;
pub mod figures;
pub mod kohler;
pub mod oscillations;
pub mod ratio;
pub mod symmetrize;
pub mod two_band;
pub mod weak_localization;

mobilis_core::export_plugin!(
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
