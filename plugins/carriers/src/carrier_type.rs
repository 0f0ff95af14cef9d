//! Which carriers dominate a sample, electrons (n) or holes (p): named by the freeze-out
//! fit, the Arrhenius fit and the material table alike, so it sits below all three.

use std::fmt;

use mobilis_physics::forward::statistics::{ACCEPTOR_DEGENERACY_DEFAULT, DONOR_DEGENERACY_DEFAULT};
use mobilis_sdk::choices::CarrierChoice;

/// Which carriers dominate: electrons (n) or holes (p). A parameter names it with the
/// SDK's [`CarrierChoice`], the choice every plugin shares.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum CarrierType {
    /// electrons
    N,
    /// holes
    P,
}

impl CarrierType {
    /// "n" or "p", as in the `carrier_type` column of `hall.reduce`.
    pub fn as_str(self) -> &'static str {
        match self {
            CarrierType::N => "n",
            CarrierType::P => "p",
        }
    }

    /// Parses "n" or "p" (also "N", "P", "electrons", "holes").
    pub fn parse(text: &str) -> Option<CarrierType> {
        match text.trim().to_ascii_lowercase().as_str() {
            "n" | "electron" | "electrons" => Some(CarrierType::N),
            "p" | "hole" | "holes" => Some(CarrierType::P),
            _ => None,
        }
    }

    /// The default degeneracy of the majority dopant level: 2 for donors, 4 for acceptors.
    pub fn default_degeneracy(self) -> f64 {
        match self {
            CarrierType::N => DONOR_DEGENERACY_DEFAULT,
            CarrierType::P => ACCEPTOR_DEGENERACY_DEFAULT,
        }
    }
}

impl From<CarrierChoice> for CarrierType {
    fn from(choice: CarrierChoice) -> Self {
        match choice {
            CarrierChoice::N => CarrierType::N,
            CarrierChoice::P => CarrierType::P,
        }
    }
}

impl fmt::Display for CarrierType {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}
