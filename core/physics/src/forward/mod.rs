//! Forward models: known material parameters in, carrier densities, mobilities and raw
//! readings out.
//!
//! The demo generator writes its invented data with these models, the tests of the
//! analysis plugins generate readings with known answers from them, and the fits evaluate
//! the same physics they invert, so that what is simulated and what is fitted cannot drift
//! apart.
//!
//! - [`statistics`]: band edges, non-degenerate carrier statistics and charge neutrality.
//! - [`mobility`]: lattice, ionized-impurity (Brooks-Herring, Conwell-Weisskopf) and
//!   empirical (Masetti) mobilities, Matthiessen's rule, the Hall scattering factor.
//! - [`transport`]: doping and temperature to resistivity, sheet resistance and Hall
//!   coefficient of an n-type layer.
//! - [`readings`]: raw four-terminal readings (van der Pauw and Hall bar) with offsets,
//!   misalignment and noise, in the `readings` table convention.
//! - [`tensor`]: the magnetoconductivity tensor of several carriers and synthetic field
//!   sweeps, in the `sweep` table convention.
//! - [`oscillations`]: Shubnikov-de Haas oscillations with Lifshitz-Kosevich damping, the
//!   Hikami-Larkin-Nagaoka weak-localization correction, synthetic sweeps of both.

pub mod mobility;
pub mod oscillations;
pub mod readings;
pub mod statistics;
pub mod tensor;
pub mod transport;

/// Why a forward model cannot be evaluated for the given parameters.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ForwardError {
    /// A parameter is outside the range the model is defined on.
    #[error("{name} = {value} is outside the model's range: {requirement}")]
    InvalidParameter {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// A configuration that the chosen geometry does not have.
    #[error("configuration {0:?} does not belong to the {1} geometry; choose from its own configuration list")]
    ForeignConfiguration(crate::contacts::Configuration, &'static str),
    /// A root-finder could not bracket or converge.
    #[error("{0}")]
    NoSolution(String),
    /// The van der Pauw relation could not be inverted.
    #[error(transparent)]
    VanDerPauw(#[from] crate::van_der_pauw::VanDerPauwError),
}

/// Checks that `value` is finite and strictly positive.
pub(crate) fn require_positive(name: &'static str, value: f64) -> Result<f64, ForwardError> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(ForwardError::InvalidParameter {
            name,
            value,
            requirement: "give a finite value greater than zero",
        })
    }
}

/// Checks that `value` is finite and not negative.
pub(crate) fn require_non_negative(name: &'static str, value: f64) -> Result<f64, ForwardError> {
    if value.is_finite() && value >= 0.0 {
        Ok(value)
    } else {
        Err(ForwardError::InvalidParameter {
            name,
            value,
            requirement: "give a finite value of zero or more",
        })
    }
}

/// Checks that `value` is finite (any sign).
pub(crate) fn require_finite(name: &'static str, value: f64) -> Result<f64, ForwardError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(ForwardError::InvalidParameter {
            name,
            value,
            requirement: "give a finite number",
        })
    }
}
