//! mobilis-physics: the transport physics of mobilis, with no tables and no I/O.
//!
//! - [`constants`]: CODATA 2018 physical constants.
//! - [`calibration`]: the names of the instrument calibrations a lab states and the values
//!   assumed when it states none.
//! - [`units`]: the `quantity_unit` column convention and conversion from lab units to SI.
//! - [`quote`]: a value with its uncertainty, rounded and printed the way a lab book quotes it.
//! - [`van_der_pauw`]: the exact van der Pauw relation and its derivatives.
//! - [`contacts`]: contact pairs, their notation and the measurement configurations they form.
//! - [`readings`]: one raw reading of a resistivity or Hall measurement.
//! - [`field_tensor`]: the resistivity and conductivity tensors at one field, each the
//!   inverse of the other.
//! - [`forward`]: forward models, parameters in and raw readings out, shared by the demo
//!   generator, the property tests and the plugins' fits.
//! - [`sweep`]: field sweeps: symmetrization in field, resistivity <-> conductivity tensor,
//!   sheet <-> volume quantities.
//! - [`tensor_data`]: validated two-component tensor data of a sweep (rho or sigma) and the
//!   whitening of their residuals, shared by the carrier fits.
//! - [`carrier_fit`]: the N-carrier fit engine (model, analytic Jacobian, bounded
//!   multi-start solver run) that the multi-carrier and two-band fits share.
//!
//! What this crate does not know:
//! - polars, because the CLI and the demo generator link it and need no table engine to
//!   print a quantity or to write readings. Tables of sweeps are read in `mobilis-sdk`.
//! - The plugin ABI and JSON-RPC: the same models serve the daemon, the plugins, the demo
//!   generator and the tests.
//! - I/O: no files, no sockets, no printing.

pub mod calibration;
pub mod carrier_fit;
pub mod constants;
pub mod contacts;
pub mod field_tensor;
pub mod forward;
pub mod quote;
pub mod readings;
pub mod sweep;
pub mod tensor_data;
pub mod units;
pub mod van_der_pauw;
