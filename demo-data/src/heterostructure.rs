//! The invented AlGaN/GaN heterostructure wafer: a two-dimensional electron channel at the
//! AlGaN/GaN interface, in parallel with a weakly conducting layer in the GaN buffer, swept
//! to 9 T at 2 K and at 300 K.
//!
//! At 2 K the buffer carries about 2 % of the zero-field conductance, too little to show in
//! a single-field Hall measurement, yet it takes over sigma_xx once the channel's mu B is
//! well above 1, and rho_xx then rises about fourfold by 9 T. At 300 K the channel's
//! mobility has fallen and the buffer's share is about 16 %. This is the parallel
//! conduction `spectrum.multi_carrier_fit` and `spectrum.mobility` are meant to separate.

use crate::sweeps::{Layer, SweepAt, SweepSample, Wafer};
use mobilis_core::forward::tensor::{Carrier, CarrierKind, SweepImperfections, SweepNoise};

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
    samples: &[SweepSample {
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
                layers: &[
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
                ],
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
    }],
};
