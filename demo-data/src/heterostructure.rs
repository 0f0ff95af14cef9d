//! The invented AlGaN/GaN heterostructure wafer: a two-dimensional electron channel at the
//! AlGaN/GaN interface, in parallel with a weakly conducting layer in the GaN buffer, swept
//! to 9 T at 2 K and at 300 K, and measured once more at low temperature for the quantum
//! oscillations of its channel.
//!
//! At 2 K the buffer carries about 2 % of the zero-field conductance, too little to show in
//! a single-field Hall measurement, yet it takes over sigma_xx once the channel's mu B is
//! well above 1, and rho_xx then rises about fourfold by 9 T. At 300 K the channel's
//! mobility has fallen and the buffer's share is about 16 %. This is the parallel
//! conduction `spectrum.multi_carrier_fit` and `spectrum.mobility` are meant to separate.
//!
//! Below 10 K the channel's Landau quantization shows: Shubnikov-de Haas oscillations at
//! high field, whose frequency gives the channel's density and whose damping gives its
//! effective mass and quantum lifetime (`mr.oscillations`). [`QUANTUM`] holds those invented
//! parameters; the generation is in [`crate::quantum`].

use crate::quantum::QuantumTransport;
use crate::sweeps::{Layer, SweepAt, SweepSample, Wafer};
use mobilis_physics::forward::tensor::{Carrier, CarrierKind, SweepImperfections, SweepNoise};

const fn electrons(sheet_density_m2: f64, mobility_m2_per_vs: f64) -> Carrier {
    Carrier {
        kind: CarrierKind::Electron,
        sheet_density_m2,
        mobility_m2_per_vs,
    }
}

const CHANNEL: &str = "2D electron channel at the AlGaN/GaN interface";
// A degenerately doped layer near the nucleation interface: its electrons do not freeze
// out, so its density and its (disorder-limited) mobility hardly change with temperature.
const BUFFER: &str = "parallel conduction in the GaN buffer near the nucleation layer";

/// The carriers at 2 K. Below about 10 K neither population changes measurably (phonon
/// scattering has died out, and the channel's density is fixed by the polarization charge),
/// so the low-temperature quantum-transport sweeps of [`QUANTUM`] use these at every
/// temperature, and their classical background is the 2 K sweep of `sweeps.csv`.
const LOW_TEMPERATURE_LAYERS: &[Layer] = &[
    Layer {
        name: CHANNEL,
        carrier: electrons(9.0e16, 1.5),
        thickness_m: None,
    },
    Layer {
        name: BUFFER,
        carrier: electrons(1.9e17, 0.014),
        thickness_m: None,
    },
];

/// The wafer's one Hall bar. The longitudinal and Hall contacts are the same in every run,
/// so their misalignment is too.
const HALL_BAR: SweepSample = SweepSample {
    name: "HEMT-A1",
    structure: "25 nm Al0.25Ga0.75N barrier on a 2 um GaN buffer, Hall bar",
    thickness_m: None,
    imperfections: SweepImperfections {
        hall_misalignment: 0.012,
        longitudinal_hall_pickup: 0.002,
    },
    sweeps: &[
        SweepAt {
            temperature_k: 2.0,
            layers: LOW_TEMPERATURE_LAYERS,
        },
        SweepAt {
            temperature_k: 300.0,
            layers: &[
                Layer {
                    name: CHANNEL,
                    carrier: electrons(9.2e16, 0.18),
                    thickness_m: None,
                },
                Layer {
                    name: BUFFER,
                    carrier: electrons(2.0e17, 0.016),
                    thickness_m: None,
                },
            ],
        },
    ],
};

/// The wafer's one Hall bar, `HEMT-A1`. The channel density comes from the polarization
/// charge and barely moves with temperature; its mobility falls from the interface-roughness
/// and alloy-scattering limit at 2 K to the polar-optical-phonon limit at 300 K.
pub const WAFER: Wafer = Wafer {
    directory: "heterostructure",
    material: "AlGaN/GaN heterostructure",
    description: "Invented true parameters of the AlGaN/GaN heterostructure demo; every number was made up and then used to compute sweeps.csv",
    seed: 0x5111_C0DE_2DE6,
    // A lock-in reading: 5 milliohm floor plus 2e-4 of the value.
    noise: SweepNoise {
        absolute_ohm: 5e-3,
        relative: 2e-4,
    },
    samples: &[HALL_BAR],
};

/// The quantum oscillations of `HEMT-A1`'s channel below 10 K.
///
/// The channel's 9.0e16 m^-2 make a spin-degenerate Fermi circle of Onsager frequency
/// 186.1 T. The cyclotron mass 0.23 m_0 is that of GaN's conduction band, raised a little
/// above its band-edge value by non-parabolicity at this density. The Dingle temperature of
/// 4 K is a quantum lifetime of 0.30 ps, about 6.5 times shorter than the 1.96 ps transport
/// time of the 1.5 m^2/(V s) mobility: the remote ionized donors and the charged dislocations
/// scatter mostly by small angles, which broadens the Landau levels but hardly relaxes the
/// current.
pub const QUANTUM: QuantumTransport = QuantumTransport {
    directory: "heterostructure",
    material: "AlGaN/GaN heterostructure",
    description: "Invented true parameters of the quantum transport of the AlGaN/GaN heterostructure demo; every number was made up and then used to compute sdh-sweeps.csv",
    sample: HALL_BAR,
    layers: LOW_TEMPERATURE_LAYERS,
    oscillating_layer: 0,
    spin_degeneracy: 2.0,
    effective_mass_ratio: 0.23,
    dingle_temperature_k: 4.0,
    sdh_temperatures_k: &[2.0, 3.0, 4.5, 6.0, 8.0, 10.0],
    sdh_seed: 0x5111_C0DE_5D45,
    // The lock-in of the classical sweeps: 5 milliohm floor plus 2e-4 of the value.
    sdh_noise: SweepNoise {
        absolute_ohm: 5e-3,
        relative: 2e-4,
    },
};
