//! The invented thin film: 5 nm of degenerately Si-doped GaN on a semi-insulating GaN
//! template, patterned into a Hall bar and swept near zero field at 2 K for its weak
//! localization.
//!
//! The film is a disordered conductor: its electrons scatter off the ionized donors and the
//! film's interfaces every 6.4 nm, a 39th of the distance over which they keep their phase.
//! That is the diffusive regime the Hikami-Larkin-Nagaoka formula describes, and the one
//! `mr.weak_localization` fits. The generation is in [`crate::weak_localization`].

use crate::sweeps::Layer;
use crate::weak_localization::WeakLocalizationSample;
use mobilis_physics::forward::tensor::{Carrier, CarrierKind, SweepImperfections, SweepNoise};

/// The film thickness, m.
const THICKNESS_M: f64 = 5e-9;
/// The electron density of the film, m^-3 (1.2e20 cm^-3).
const DENSITY_M3: f64 = 1.2e26;

/// The film `TF-B2` at 2 K.
///
/// - Carriers: 1.2e20 cm^-3 electrons through 5 nm, a sheet density of 6.0e17 m^-2, at a
///   disorder-limited mobility of 50 cm^2/(V s). The sheet resistance is 2.08 kohm/sq,
///   k_F l_e = h / (e^2 R_s) = 12.4: disordered, yet far from the Ioffe-Regel limit, so
///   the quantum correction is a small perturbation.
/// - Weak localization: GaN is made of light atoms and has a single conduction valley, and
///   in so dirty a film the scattering every few femtoseconds motionally narrows the little
///   spin precession there is. Spin-orbit scattering is then slow against dephasing, and the
///   HLN prefactor is alpha = +1 (weak localization: the conductance rises with field). The
///   phase-coherence length at 2 K is 250 nm, 39 mean free paths.
pub const FILM: WeakLocalizationSample = WeakLocalizationSample {
    directory: "thin-film",
    material: "Si-doped GaN thin film",
    description: "Invented true parameters of the GaN thin-film demo; every number was made up and then used to compute wl-sweep.csv",
    seed: 0x5111_C0DE_7FB2,
    sample: "TF-B2",
    structure: "5 nm GaN:Si on a semi-insulating Fe-doped GaN template on sapphire, Hall bar",
    thickness_m: THICKNESS_M,
    imperfections: SweepImperfections {
        hall_misalignment: -0.005,
        longitudinal_hall_pickup: 0.001,
    },
    temperature_k: 2.0,
    layer: Layer {
        name: "electrons of the Si-doped film",
        carrier: Carrier {
            kind: CarrierKind::Electron,
            sheet_density_m2: DENSITY_M3 * THICKNESS_M,
            mobility_m2_per_vs: 5e-3,
        },
        thickness_m: Some(THICKNESS_M),
    },
    spin_degeneracy: 2.0,
    hln_alpha: 1.0,
    phase_coherence_length_m: 250e-9,
    // A lock-in reading averaged through a low-noise preamplifier: 2 milliohm floor plus
    // 1e-5 of the value.
    noise: SweepNoise {
        absolute_ohm: 2e-3,
        relative: 1e-5,
    },
};
