//! Parameter choices that several plugins' analyses share, typed once so that every analysis
//! names them with the same words and the same schema.

use mobilis_physics::forward::tensor::CarrierKind;
use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

/// A kind of carrier as parameters name it: `n` (electrons) or `p` (holes), the codes of the
/// `carrier_type` column every analysis writes.
// Serialize so that a derived schema can state a default of this type.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize, JsonSchema)]
pub enum CarrierChoice {
    /// electrons
    #[serde(rename = "n")]
    N,
    /// holes
    #[serde(rename = "p")]
    P,
}

impl From<CarrierChoice> for CarrierKind {
    fn from(choice: CarrierChoice) -> Self {
        match choice {
            CarrierChoice::N => CarrierKind::Electron,
            CarrierChoice::P => CarrierKind::Hole,
        }
    }
}

impl From<CarrierKind> for CarrierChoice {
    fn from(kind: CarrierKind) -> Self {
        match kind {
            CarrierKind::Electron => CarrierChoice::N,
            CarrierKind::Hole => CarrierChoice::P,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_wire_names_are_the_carrier_type_codes() {
        assert_eq!(
            serde_json::from_str::<CarrierChoice>("\"n\"").unwrap(),
            CarrierChoice::N
        );
        assert_eq!(
            serde_json::from_str::<CarrierChoice>("\"p\"").unwrap(),
            CarrierChoice::P
        );
        let refused = serde_json::from_str::<CarrierChoice>("\"e\"").unwrap_err().to_string();
        assert!(refused.contains("`n`") && refused.contains("`p`"), "{refused}");
        assert_eq!(CarrierKind::from(CarrierChoice::P), CarrierKind::Hole);
        assert_eq!(CarrierChoice::from(CarrierKind::Electron), CarrierChoice::N);
        assert_eq!(CarrierKind::Electron.code(), "n");
    }
}
