//! Which carriers dominate a sample, electrons (n) or holes (p): named by the freeze-out
//! fit, the Arrhenius fit and the material table alike, so it sits below all three.

use std::fmt;

use mobilis_physics::forward::statistics::{ACCEPTOR_DEGENERACY_DEFAULT, DONOR_DEGENERACY_DEFAULT};

/// Which carriers dominate: electrons (n) or holes (p). A parameter names it "n" or "p".
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
#[serde(rename_all = "lowercase")]
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

impl fmt::Display for CarrierType {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}
