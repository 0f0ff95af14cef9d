//! mobilis-core: what every part of mobilis shares and nothing that does I/O.
//!
//! - [`constants`]: CODATA 2018 physical constants.
//! - [`calibration`]: the names of the instrument calibrations a lab states and the values
//!   assumed when it states none.
//! - [`units`]: the `quantity_unit` column convention and conversion from lab units to SI.
//! - [`van_der_pauw`]: the exact van der Pauw relation and its derivatives.
//! - [`noise`]: a portable, seeded random generator for the forward models.
//! - [`forward`]: forward models, parameters in and raw readings out, shared by the demo
//!   generator, the property tests and the plugins' fits.
//! - [`linalg`]: small dense linear algebra (Cholesky, QR, SVD, least squares, inverses).
//! - [`fit`]: bounded Levenberg-Marquardt least squares, multi-start, the weighted line.
//! - [`nnls`]: non-negative least squares (Lawson-Hanson active set, warm start, cancellable).
//! - [`fft`]: the discrete Fourier transform of any length (radix-2, Bluestein), spectral
//!   windows, the amplitude spectrum of a real record.
//! - [`special`]: digamma and trigamma functions, the bracket psi(1/2 + x) - ln x.
//! - [`sweep`]: field sweeps: symmetrization in field, resistivity <-> conductivity tensor,
//!   sheet <-> volume quantities.
//! - [`sweep_table`]: the `sweep` input role of plugins and its conversion into sweep points.
//! - [`tensor_data`]: validated two-component tensor data of a sweep (rho or sigma) and the
//!   whitening of their residuals, shared by the carrier fits.
//! - [`abi`]: the C ABI between the daemon and plugin libraries (mirrored by
//!   `include/mobilis_plugin.h`).
//! - [`table_ffi`]: DataFrames across the Arrow C Data Interface.
//! - [`sdk`]: the Rust SDK for plugin authors (typed analyses and the `export_plugin!` macro).

pub mod abi;
pub mod calibration;
pub mod constants;
pub mod contacts;
pub mod fft;
pub mod figure_spec;
pub mod fit;
pub mod forward;
pub mod linalg;
pub mod nnls;
pub mod noise;
pub mod quote;
pub mod readings;
pub mod sdk;
pub mod special;
pub mod sweep;
pub mod sweep_table;
pub mod table_ffi;
pub mod tensor_data;
pub mod units;
pub mod van_der_pauw;
