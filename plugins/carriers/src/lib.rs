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

pub mod analyses;
pub mod arrhenius;
pub mod figures;
pub mod freeze_out;
pub mod materials;
pub mod purity;
pub mod scattering;

mobilis_core::export_plugin!(
    name: "carriers",
    analyses: [
        analyses::freeze_out_fit::FreezeOutFitAnalysis,
        analyses::arrhenius_fit::ArrheniusAnalysis,
        analyses::mobility_scattering::MobilityScatteringAnalysis,
        analyses::purity_summary::PurityAnalysis,
    ]
);
