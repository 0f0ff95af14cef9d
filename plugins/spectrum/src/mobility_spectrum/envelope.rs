//! The Beck-Anderson envelope: for each mobility, the largest conductance that a single
//! carrier of exactly that mobility can have while the rest of the data stays the tensor of
//! some non-negative spectrum.
//!
//! # The bound
//!
//! With F(B) = sigma_xx(B) + i sigma_xy(B) and a(mu, B) = 1 / (1 - i mu B)
//! = (1 + i mu B) / (1 + mu^2 B^2), the model is F(B) = integral s(mu) a(mu, B) dmu, s >= 0.
//! For fields B_1 .. B_N >= 0 define the Hermitian matrix
//!
//!   P_jk = (B_j F_j + B_k conj(F_k)) / (B_j + B_k)   (P_jk = sigma_xx(0) when B_j = B_k = 0).
//!
//! By partial fractions, a(mu, B_j) conj(a(mu, B_k)) = (B_j a(mu, B_j) + B_k conj(a(mu, B_k)))
//! / (B_j + B_k), so P = integral s(mu) a(mu) a(mu)^H dmu: positive semidefinite for every
//! physical spectrum (a Pick-type matrix; the diagonal is sigma_xx(B_j)). A carrier of
//! conductance c at mu takes c a a^H out of it, and what is left must stay positive
//! semidefinite, so c <= 1 / (a^H P^-1 a): the envelope. With one field it reduces to
//! c <= sigma_xx(B) (1 + mu^2 B^2); with many fields it also uses sigma_xy and the relations
//! between fields, which is what separates electrons from holes. That the envelope of Beck
//! and Anderson (J. Appl. Phys. 62, 541, 1987) is this largest conductance compatible with
//! the data, obtained from the positivity of such a matrix, is from memory; the derivation
//! above is self-contained. For exact data of one carrier the bound equals its conductance
//! at its mobility and is far smaller elsewhere.
//!
//! # Noise
//!
//! A measured P need not be positive semidefinite: noise of relative size epsilon moves its
//! eigenvalues by about N epsilon max|F|, while those of a real P fall off geometrically.
//! Beck and Anderson's bound then breaks down (recalled, not verified: they smoothed the
//! data first). Here P is loaded: Q = P + tau S^2, S = diag(noise scale of each field), and
//! the envelope is 1 / (a^H Q^-1 a). tau is the Frobenius norm (an upper bound of the
//! spectral norm) of S^-1 E S^-1, E the Pick matrix of the residuals of the regularized
//! spectrum (its fitted tensor minus the data). Then
//!
//! - P + E is the Pick matrix of the fitted, physical tensor, so Q >= P + E >= 0: Q is
//!   positive definite;
//! - any non-negative spectrum whose tensor differs from the data by no more than that
//!   (in the same norm) has its conductance at mu below the envelope, the regularized
//!   spectrum included. So the envelope is a strict upper bound for the spectra as
//!   compatible with the data as the fitted one, and for exact data (tau -> 0) it is the
//!   exact bound.
//!
//! A fit may absorb part of the noise, so with known uncertainties tau is at least the
//! root-mean-square Frobenius norm the noise itself would give (see
//! `expected_noise_norm`): the true spectrum, whose tensor differs from the data by the
//! noise, then lies under the envelope too, up to the fluctuation of that norm (the
//! Frobenius norm exceeds the spectral norm that matters, which leaves a margin).
//!
//! A floor of 64 N epsilon_machine times the largest diagonal of S^-1 P S^-1 covers the
//! rounding of P itself.
//!
//! # Computation
//!
//! The Hermitian N x N problem is solved as the real symmetric 2N x 2N one,
//! [[Re Q, -Im Q], [Im Q, Re Q]] acting on (Re v, Im v): one Cholesky factor, then one
//! triangular solve per mobility, O(N^2).

use mobilis_numerics::linalg::{Cholesky, Matrix};

use super::data::Data;
use super::error::SpectrumError;

/// The loaded Pick matrix of a data set, factored.
pub(super) struct Envelope {
    lower: Matrix,
    fields: Vec<f64>,
    scales: Vec<f64>,
    /// tau, in units of the squared noise scale.
    pub loading: f64,
    /// How many times tau had to be doubled beyond the residual norm for the factor to
    /// exist (0 in exact arithmetic; rounding only).
    pub extra_doublings: usize,
}

/// The Pick matrix (real and imaginary parts) of tensor values `f` at `fields`, each row
/// and column divided by `scales`.
fn pick_matrix(fields: &[f64], f: &[(f64, f64)], scales: &[f64]) -> (Matrix, Matrix) {
    let n = fields.len();
    let mut real = Matrix::zeros(n, n);
    let mut imaginary = Matrix::zeros(n, n);
    for j in 0..n {
        for k in 0..n {
            let (bj, bk) = (fields[j], fields[k]);
            let (xj, yj) = f[j];
            let (xk, yk) = f[k];
            let sum = bj + bk;
            let (re, im) = if sum > 0.0 {
                ((bj * xj + bk * xk) / sum, (bj * yj - bk * yk) / sum)
            } else {
                // Two zero-field points: both estimate sigma_xx(0).
                (0.5 * (xj + xk), 0.0)
            };
            let scale = scales[j] * scales[k];
            real[(j, k)] = re / scale;
            imaginary[(j, k)] = im / scale;
        }
    }
    (real, imaginary)
}

/// The root-mean-square Frobenius norm of S^-1 E S^-1 for E the Pick matrix of the noise
/// itself, independent between points with standard uncertainties (u_xx, u_xy), S_j^2 =
/// u_xx^2 + u_xy^2: E|E_jk|^2 = (B_j^2 S_j^2 + B_k^2 S_k^2) / (B_j + B_k)^2 for j != k
/// (sigma_xx(0) estimates: (u_j^2 + u_k^2) / 4 when both fields are zero) and u_xx^2 on the
/// diagonal, where E_jj is the real part of the noise.
fn expected_noise_norm(fields: &[f64], uncertainties: &[(f64, f64)]) -> f64 {
    let n = fields.len();
    let variance: Vec<f64> = uncertainties.iter().map(|(xx, xy)| xx * xx + xy * xy).collect();
    let mut sum = 0.0;
    for j in 0..n {
        for k in 0..n {
            let scale = variance[j] * variance[k];
            let expected = if j == k {
                uncertainties[j].0 * uncertainties[j].0
            } else {
                let (bj, bk) = (fields[j], fields[k]);
                if bj + bk > 0.0 {
                    (bj * bj * variance[j] + bk * bk * variance[k]) / ((bj + bk) * (bj + bk))
                } else {
                    0.25 * (uncertainties[j].0.powi(2) + uncertainties[k].0.powi(2))
                }
            };
            sum += expected / scale;
        }
    }
    sum.sqrt()
}

impl Envelope {
    /// Factors the data's Pick matrix loaded by the norm of the residuals' Pick matrix.
    /// `fitted` is the tensor of the regularized spectrum at each point.
    pub fn new(data: &Data, fitted: &[(f64, f64)], cancelled: &dyn Fn() -> bool) -> Result<Self, SpectrumError> {
        let n = data.fields.len();
        let scales = &data.noise_scale;
        let (real, imaginary) = pick_matrix(&data.fields, &data.sigma, scales);
        let residuals: Vec<(f64, f64)> = fitted
            .iter()
            .zip(&data.sigma)
            .map(|(fit, measured)| (fit.0 - measured.0, fit.1 - measured.1))
            .collect();
        let (e_real, e_imaginary) = pick_matrix(&data.fields, &residuals, scales);
        let frobenius = e_real
            .as_slice()
            .iter()
            .chain(e_imaginary.as_slice())
            .map(|v| v * v)
            .sum::<f64>()
            .sqrt();
        let largest_diagonal = real.diagonal().into_iter().fold(0.0f64, f64::max);
        let floor = 64.0 * n as f64 * f64::EPSILON * largest_diagonal;
        let expected = data
            .uncertainties
            .as_ref()
            .map_or(0.0, |u| expected_noise_norm(&data.fields, u));
        let mut loading = frobenius.max(expected).max(floor);
        if cancelled() {
            return Err(SpectrumError::Cancelled);
        }
        let mut extra_doublings = 0;
        let lower = loop {
            let embedded = Matrix::from_fn(2 * n, 2 * n, |r, c| {
                let (j, k) = (r % n, c % n);
                let value = match (r < n, c < n) {
                    (true, true) | (false, false) => real[(j, k)],
                    (true, false) => -imaginary[(j, k)],
                    (false, true) => imaginary[(j, k)],
                };
                if r == c {
                    value + loading
                } else {
                    value
                }
            });
            match Cholesky::new(&embedded) {
                Ok(factor) => break factor.lower().clone(),
                Err(_) if extra_doublings < 200 => {
                    loading *= 2.0;
                    extra_doublings += 1;
                }
                Err(error) => {
                    return Err(SpectrumError::Numerical(format!(
                        "the envelope matrix could not be factored ({error}); check the data for extreme values"
                    )))
                }
            }
        };
        Ok(Envelope {
            lower,
            fields: data.fields.clone(),
            scales: scales.clone(),
            loading,
            extra_doublings,
        })
    }

    /// The largest conductance (S) of a carrier of signed mobility `mobility` (negative for
    /// electrons) compatible with the data.
    pub fn bound(&self, mobility: f64) -> f64 {
        let n = self.fields.len();
        let mut v = vec![0.0; 2 * n];
        for (j, (&field, &scale)) in self.fields.iter().zip(&self.scales).enumerate() {
            let mu_b = mobility * field;
            let denominator = (1.0 + mu_b * mu_b) * scale;
            v[j] = 1.0 / denominator;
            v[n + j] = mu_b / denominator;
        }
        // a^H Q^-1 a = |L^-1 v|^2.
        let mut quadratic = 0.0;
        for i in 0..2 * n {
            let row = self.lower.row(i);
            let sum: f64 = row[..i].iter().zip(&v[..i]).map(|(l, y)| l * y).sum();
            v[i] = (v[i] - sum) / row[i];
            quadratic += v[i] * v[i];
        }
        1.0 / quadratic
    }
}
