//! mobilis-numerics: the numerical methods the physics and the plugins build on.
//!
//! - [`linalg`]: small dense linear algebra (Cholesky, QR, SVD, least squares, inverses).
//! - [`fit`]: bounded Levenberg-Marquardt least squares, multi-start, the weighted line.
//! - [`nnls`]: non-negative least squares (Lawson-Hanson active set, warm start, cancellable).
//! - [`fft`]: the discrete Fourier transform of any length (radix-2, Bluestein), spectral
//!   windows, the amplitude spectrum of a real record.
//! - [`special`]: digamma and trigamma functions, the bracket psi(1/2 + x) - ln x.
//! - [`noise`]: a portable, seeded random generator for the forward models and the tests.
//!
//! What this crate does not know:
//! - Physics: no constants, no units, no samples. A fit sees residuals and parameters, so the
//!   same solver serves a Hall series, a carrier spectrum and a freeze-out curve.
//! - Tables: no polars, because the physics crate, the CLI and the demo generator build on it
//!   and must stay light.
//! - I/O: no files, no sockets, no printing.

pub mod fft;
pub mod fit;
pub mod linalg;
pub mod nnls;
pub mod noise;
pub mod special;
