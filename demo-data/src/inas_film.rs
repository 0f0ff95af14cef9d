//! The invented InAs film wafer: a p-type film whose surface carries an accumulation layer
//! of electrons, swept to 9 T at 77 K and at 300 K.
//!
//! The few surface electrons are more than ten times as mobile as the many bulk holes, so
//! they dominate the Hall signal at low field, where rho_xy is negative, while at high
//! field rho_xy follows the net charge and turns positive. The sign change (near 1 T at
//! 77 K, near 2 T at 300 K) is the classic signature of mixed conduction that a
//! single-carrier Hall analysis reads as an n-type film.

use crate::sweeps::{Layer, SweepAt, SweepSample, Wafer};
use mobilis_physics::forward::tensor::{Carrier, CarrierKind, SweepImperfections, SweepNoise};

/// The film thickness, m.
const THICKNESS_M: f64 = 10e-6;

const SURFACE: &str = "surface accumulation layer";
const BULK: &str = "bulk holes of the p-type film";

const fn surface_electrons(sheet_density_m2: f64, mobility_m2_per_vs: f64) -> Layer {
    Layer {
        name: SURFACE,
        carrier: Carrier {
            kind: CarrierKind::Electron,
            sheet_density_m2,
            mobility_m2_per_vs,
        },
        thickness_m: None,
    }
}

/// Holes of volume density `density_m3` through the whole film.
const fn bulk_holes(density_m3: f64, mobility_m2_per_vs: f64) -> Layer {
    Layer {
        name: BULK,
        carrier: Carrier {
            kind: CarrierKind::Hole,
            sheet_density_m2: density_m3 * THICKNESS_M,
            mobility_m2_per_vs,
        },
        thickness_m: Some(THICKNESS_M),
    }
}

/// The wafer's one van der Pauw square, `InAs-F3`. Cooling to 77 K freezes a few of the
/// holes back onto their acceptors and thins the accumulation layer slightly, while both
/// mobilities rise as phonon scattering weakens.
pub const WAFER: Wafer = Wafer {
    directory: "inas-film",
    material: "InAs",
    description:
        "Invented true parameters of the InAs film demo; every number was made up and then used to compute sweeps.csv",
    seed: 0x5111_C0DE_1A55,
    // A lock-in reading: 2 milliohm floor plus 2e-4 of the value.
    noise: SweepNoise {
        absolute_ohm: 2e-3,
        relative: 2e-4,
    },
    samples: &[SweepSample {
        name: "InAs-F3",
        structure: "10 um p-type InAs film on a semi-insulating substrate, van der Pauw square",
        thickness_m: Some(THICKNESS_M),
        imperfections: SweepImperfections {
            hall_misalignment: -0.008,
            longitudinal_hall_pickup: -0.003,
        },
        sweeps: &[
            SweepAt {
                temperature_k: 77.0,
                layers: &[surface_electrons(1.2e16, 0.85), bulk_holes(1.7e23, 0.055)],
            },
            SweepAt {
                temperature_k: 300.0,
                layers: &[surface_electrons(1.5e16, 0.5), bulk_holes(2.0e23, 0.03)],
            },
        ],
    }],
};
