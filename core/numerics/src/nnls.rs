//! Non-negative least squares: minimize ||A x - b||^2 subject to x >= 0, and its Gram form,
//! the convex quadratic program minimize (1/2) x^T H x - g^T x subject to x >= 0 with H
//! symmetric positive (semi)definite.
//!
//! # Method
//!
//! The active-set algorithm of Lawson and Hanson (C. L. Lawson and R. J. Hanson, "Solving
//! Least Squares Problems", Prentice-Hall 1974, chapter 23, algorithm NNLS), written on the
//! cross products H = A^T A and g = A^T b as in the FNNLS variant of Bro and De Jong
//! (J. Chemometrics 11, 393, 1997). The Gram form is what regularized problems give directly
//! (H = A^T A + alpha L^T L) and its cost per iteration does not grow with the number of
//! rows of A.
//!
//! - The variables are split into a passive set P (free, positive) and an active set Z (held
//!   at zero). The negative gradient is w = g - H x.
//! - **Outer loop.** When no variable of Z has w_j above the tolerance, x satisfies the
//!   Karush-Kuhn-Tucker conditions (w_P = 0, w_Z <= 0, x >= 0) and is the minimum. Otherwise
//!   the variable of Z with the largest w_j moves to P.
//! - **Inner loop.** z solves H_PP z_P = g_P. When every z_j of P is positive, x = z.
//!   Otherwise x moves towards z as far as feasibility allows (the step
//!   min x_j / (x_j - z_j) over the z_j <= 0), the variables that reach zero return to Z, and
//!   the solve is repeated.
//! - **Factor updates.** The Cholesky factor of H_PP is kept and updated instead of being
//!   recomputed: adding a variable appends a row (one triangular solve, O(p^2)); removing one
//!   deletes its row and column, which leaves the trailing block needing the rank-one update
//!   T T^T + v v^T (v the deleted column below the diagonal), done by plane rotations
//!   (the LINPACK `dchud` update, Dongarra et al., "LINPACK Users' Guide", SIAM 1979,
//!   chapter 10). An update never subtracts, so it cannot lose positive definiteness. Each
//!   iteration costs O(p^2) for p passive variables, against O(p^3) for a fresh factor.
//! - **Dependent variables.** A variable whose new pivot d^2 = h_jj - |L^-1 h_Pj|^2 is at or
//!   below `dependence_tolerance` h_jj is (numerically) a combination of the passive ones;
//!   adding it would make the solve meaningless, so it is skipped for that outer iteration,
//!   as Lawson and Hanson skip a column that is dependent on the passive columns.
//! - **Warm start.** A non-negative starting point (for example the solution of a nearby
//!   problem, as in a scan of regularization strengths) makes its positive entries the
//!   first passive set; the inner loop then restores optimality on that set before the
//!   outer loop continues. A start near the answer needs few iterations. The theory is the
//!   same as from zero: every step lowers the objective and keeps x feasible.
//! - **Termination.** The tolerance on w is `gradient_tolerance` times the largest of |g_j|
//!   and |(H x)_j|, the scale at which rounding makes w uncertain. Lawson and Hanson prove
//!   finite termination in exact arithmetic; in floating point an iteration limit
//!   (`max_iterations`, counting inner and outer steps) guards against cycling on ties.
//! - **Cancellation.** The caller's check runs before every iteration, so a long solve
//!   stops within one O(p^2) step of being asked to.

use crate::linalg::{dot, Matrix};

/// Settings of [`solve_gram`] and [`solve`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NnlsOptions {
    /// Inner plus outer iterations before giving up; 0 means 5 n + 50 for n variables.
    pub max_iterations: usize,
    /// A variable at zero is optimal when its negative gradient w_j is at most this times
    /// the scale of the gradient (see the module documentation).
    pub gradient_tolerance: f64,
    /// Relative pivot below which a variable counts as dependent on the passive ones.
    pub dependence_tolerance: f64,
}

impl Default for NnlsOptions {
    fn default() -> Self {
        NnlsOptions {
            max_iterations: 0,
            gradient_tolerance: 1e-10,
            dependence_tolerance: 1e-13,
        }
    }
}

/// The minimizer and how it was reached.
#[derive(Debug, Clone, PartialEq)]
pub struct NnlsSolution {
    /// The minimizer, every entry >= 0.
    pub x: Vec<f64>,
    /// The passive (positive) variables, ascending.
    pub passive: Vec<usize>,
    /// Inner plus outer iterations used.
    pub iterations: usize,
    /// The negative gradient g - H x at the solution (about 0 on the passive set, at most
    /// the tolerance elsewhere).
    pub negative_gradient: Vec<f64>,
}

/// Why a non-negative least-squares solve did not finish.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum NnlsError {
    /// The caller's cancel check returned true.
    #[error("the non-negative least-squares solve was cancelled")]
    Cancelled,
    /// The iteration limit was reached (cycling on a degenerate problem).
    #[error(
        "the non-negative least-squares solve did not converge within {iterations} iterations; the problem is degenerate, so regularize it or raise max_iterations"
    )]
    NotConverged { iterations: usize },
    /// H, g, b, A or the start holds NaN or infinity.
    #[error("{what} holds a value that is not finite; give finite numbers")]
    NonFinite { what: &'static str },
    /// A starting value is negative.
    #[error("starting value {index} is {value}; a start must be non-negative")]
    NegativeStart { index: usize, value: f64 },
}

/// Minimizes ||A x - b||^2 over x >= 0 through the Gram form (H = A^T A, g = A^T b).
///
/// Forming A^T A squares the condition number, which is harmless for the well-posed or
/// regularized problems this is meant for; for a badly conditioned unregularized A the
/// dependent columns are skipped (see the module documentation).
///
/// # Panics
/// When `b` does not have one entry per row of A.
pub fn solve(a: &Matrix, b: &[f64], options: &NnlsOptions) -> Result<NnlsSolution, NnlsError> {
    assert_eq!(
        b.len(),
        a.rows(),
        "a {}x{} matrix with {} right-hand sides",
        a.rows(),
        a.cols(),
        b.len()
    );
    if a.as_slice().iter().any(|v| !v.is_finite()) {
        return Err(NnlsError::NonFinite { what: "the matrix A" });
    }
    if b.iter().any(|v| !v.is_finite()) {
        return Err(NnlsError::NonFinite { what: "the vector b" });
    }
    solve_gram(&a.gram(), &a.transpose_mul_vec(b), None, options, &|| false)
}

/// Minimizes (1/2) x^T H x - g^T x over x >= 0, from `start` when given (projected
/// nothing: it must already be non-negative), checking `cancelled` before every iteration.
/// H must be symmetric: its rows serve as its columns.
///
/// # Panics
/// When H is not square or `g` (or `start`) does not have one entry per row of H.
pub fn solve_gram(
    h: &Matrix,
    g: &[f64],
    start: Option<&[f64]>,
    options: &NnlsOptions,
    cancelled: &dyn Fn() -> bool,
) -> Result<NnlsSolution, NnlsError> {
    let n = h.rows();
    assert_eq!(
        h.cols(),
        n,
        "the Gram matrix must be square, not {}x{}",
        h.rows(),
        h.cols()
    );
    assert_eq!(g.len(), n, "a {n}x{n} Gram matrix with a gradient of {}", g.len());
    if h.as_slice().iter().any(|v| !v.is_finite()) {
        return Err(NnlsError::NonFinite {
            what: "the Gram matrix H",
        });
    }
    if g.iter().any(|v| !v.is_finite()) {
        return Err(NnlsError::NonFinite { what: "the vector g" });
    }
    let prepared = match start {
        Some(start) => WarmStart::prepare(h, start, options)?,
        None => WarmStart::cold(n),
    };
    iterate(h, g, prepared, options, cancelled)
}

/// A warm start made ready for solves with one Gram matrix: its positive entries factored
/// as the first passive set. Many solves with the same H and start but different g (the
/// replicas of a bootstrap) share this O(p^3) step; each solve from it goes on exactly as
/// [`solve_gram`] from the same start, to the last bit.
#[derive(Clone)]
pub struct WarmStart {
    x: Vec<f64>,
    factor: Factor,
    in_passive: Vec<bool>,
}

impl WarmStart {
    /// Factors the positive entries of `start` (non-negative, one per row of `h`) in `h`.
    ///
    /// # Panics
    /// When H is not square or `start` does not have one entry per row of H.
    pub fn new(h: &Matrix, start: &[f64], options: &NnlsOptions) -> Result<Self, NnlsError> {
        let n = h.rows();
        assert_eq!(
            h.cols(),
            n,
            "the Gram matrix must be square, not {}x{}",
            h.rows(),
            h.cols()
        );
        if h.as_slice().iter().any(|v| !v.is_finite()) {
            return Err(NnlsError::NonFinite {
                what: "the Gram matrix H",
            });
        }
        WarmStart::prepare(h, start, options)
    }

    fn cold(n: usize) -> Self {
        WarmStart {
            x: vec![0.0; n],
            factor: Factor::new(n),
            in_passive: vec![false; n],
        }
    }

    fn prepare(h: &Matrix, start: &[f64], options: &NnlsOptions) -> Result<Self, NnlsError> {
        let n = h.rows();
        assert_eq!(start.len(), n, "a start of {} values for {n} variables", start.len());
        for (index, &value) in start.iter().enumerate() {
            if !value.is_finite() {
                return Err(NnlsError::NonFinite { what: "the start" });
            }
            if value < 0.0 {
                return Err(NnlsError::NegativeStart { index, value });
            }
        }
        let mut prepared = WarmStart::cold(n);
        for (j, &value) in start.iter().enumerate() {
            if value > 0.0 && prepared.factor.append(h, j, options.dependence_tolerance) {
                prepared.in_passive[j] = true;
                prepared.x[j] = value;
            }
        }
        Ok(prepared)
    }
}

/// Minimizes (1/2) x^T H x - g^T x over x >= 0 from a [`WarmStart`] prepared with this `h`
/// (the same matrix: that is not checked), as [`solve_gram`] does from that start.
///
/// # Panics
/// When `g` does not have one entry per row of H, or the start was prepared for another size.
pub fn solve_gram_from(
    h: &Matrix,
    g: &[f64],
    start: &WarmStart,
    options: &NnlsOptions,
    cancelled: &dyn Fn() -> bool,
) -> Result<NnlsSolution, NnlsError> {
    let n = h.rows();
    assert_eq!(g.len(), n, "a {n}x{n} Gram matrix with a gradient of {}", g.len());
    assert_eq!(
        start.x.len(),
        n,
        "a start prepared for {} variables, not {n}",
        start.x.len()
    );
    if g.iter().any(|v| !v.is_finite()) {
        return Err(NnlsError::NonFinite { what: "the vector g" });
    }
    iterate(h, g, start.clone(), options, cancelled)
}

/// The iterations of [`solve_gram`] from a prepared start (inputs already checked).
fn iterate(
    h: &Matrix,
    g: &[f64],
    prepared: WarmStart,
    options: &NnlsOptions,
    cancelled: &dyn Fn() -> bool,
) -> Result<NnlsSolution, NnlsError> {
    let n = h.rows();
    let max_iterations = if options.max_iterations == 0 {
        5 * n + 50
    } else {
        options.max_iterations
    };
    let g_scale = g.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let WarmStart {
        mut x,
        mut factor,
        mut in_passive,
    } = prepared;
    let mut iterations = 0usize;
    // A warm start: restore optimality on its passive set first.
    if !factor.order.is_empty() {
        restore_feasibility(
            g,
            &mut x,
            &mut factor,
            &mut in_passive,
            None,
            &mut iterations,
            max_iterations,
            cancelled,
        )?;
    }

    let mut skipped = vec![false; n];
    loop {
        if cancelled() {
            return Err(NnlsError::Cancelled);
        }
        iterations += 1;
        if iterations > max_iterations {
            return Err(NnlsError::NotConverged {
                iterations: max_iterations,
            });
        }
        let (w, hx_scale) = negative_gradient(h, g, &x, &factor.order);
        let tolerance = options.gradient_tolerance * g_scale.max(hx_scale);
        let candidate = (0..n)
            .filter(|&j| !in_passive[j] && !skipped[j])
            .max_by(|&a, &b| w[a].total_cmp(&w[b]));
        let Some(j) = candidate.filter(|&j| w[j] > tolerance) else {
            let passive = {
                let mut p = factor.order.clone();
                p.sort_unstable();
                p
            };
            return Ok(NnlsSolution {
                x,
                passive,
                iterations,
                negative_gradient: w,
            });
        };
        if !factor.append(h, j, options.dependence_tolerance) {
            skipped[j] = true;
            continue;
        }
        in_passive[j] = true;
        if restore_feasibility(
            g,
            &mut x,
            &mut factor,
            &mut in_passive,
            Some(j),
            &mut iterations,
            max_iterations,
            cancelled,
        )? {
            // The new variable went straight back to zero: rounding made the step
            // useless, so do not offer it again until something else has changed.
            skipped[j] = true;
        } else {
            skipped.iter_mut().for_each(|s| *s = false);
        }
    }
}

/// The inner loop: solve on the passive set, step back to feasibility, drop the variables
/// that reach zero, repeat until the passive solution is positive. Returns true when the
/// variable `entering` (just added) was dropped at the first step.
#[allow(clippy::too_many_arguments)]
fn restore_feasibility(
    g: &[f64],
    x: &mut [f64],
    factor: &mut Factor,
    in_passive: &mut [bool],
    entering: Option<usize>,
    iterations: &mut usize,
    max_iterations: usize,
    cancelled: &dyn Fn() -> bool,
) -> Result<bool, NnlsError> {
    let mut first = true;
    loop {
        if cancelled() {
            return Err(NnlsError::Cancelled);
        }
        let rhs: Vec<f64> = factor.order.iter().map(|&j| g[j]).collect();
        let z = factor.solve(&rhs);
        if z.iter().all(|&value| value > 0.0) {
            for (&j, &value) in factor.order.iter().zip(&z) {
                x[j] = value;
            }
            return Ok(false);
        }
        *iterations += 1;
        if *iterations > max_iterations {
            return Err(NnlsError::NotConverged {
                iterations: max_iterations,
            });
        }
        if first {
            if let Some(j) = entering {
                let position = factor
                    .order
                    .iter()
                    .position(|&k| k == j)
                    .expect("the entering variable is passive");
                if z[position] <= 0.0 && x[j] == 0.0 {
                    factor.remove(position);
                    in_passive[j] = false;
                    return Ok(true);
                }
            }
        }
        first = false;
        // The longest step from x towards z that keeps every passive variable >= 0.
        let mut step = 1.0f64;
        let mut blocking = None;
        for (position, (&j, &target)) in factor.order.iter().zip(&z).enumerate() {
            if target <= 0.0 {
                let ratio = x[j] / (x[j] - target);
                if ratio < step {
                    step = ratio;
                    blocking = Some(position);
                }
            }
        }
        for (&j, &target) in factor.order.iter().zip(&z) {
            x[j] += step * (target - x[j]);
        }
        if let Some(position) = blocking {
            x[factor.order[position]] = 0.0;
        }
        // Remove, from the end so the positions stay valid, every passive variable that
        // reached zero (the blocking one exactly, others to rounding).
        let mut position = factor.order.len();
        while position > 0 {
            position -= 1;
            let j = factor.order[position];
            if x[j] <= 0.0 {
                x[j] = 0.0;
                factor.remove(position);
                in_passive[j] = false;
            }
        }
        if factor.order.is_empty() {
            return Ok(false);
        }
    }
}

/// w = g - H x, using only the passive columns (the others are zero), and the largest
/// |H_ij x_j| term, the scale of rounding in H x.
///
/// H is symmetric, so column j of H is its row j, contiguous in memory: each passive
/// variable's row, times x_j, is added to all the sums (H x)_i at once, a loop the compiler
/// vectorizes. Every (H x)_i is still the sum over the passive variables in their order
/// from -0.0, as the standard library's float sum gives it row by row, and the largest
/// term does not depend on the order in which the terms are met (each |term| is kept per
/// row, then the largest of those taken).
fn negative_gradient(h: &Matrix, g: &[f64], x: &[f64], passive: &[usize]) -> (Vec<f64>, f64) {
    let n = h.rows();
    let mut sums = vec![-0.0f64; n];
    let mut largest = vec![0.0f64; n];
    for &j in passive {
        let xj = x[j];
        for ((sum, top), &h_ji) in sums.iter_mut().zip(largest.iter_mut()).zip(h.row(j)) {
            let term = h_ji * xj;
            *sum += term;
            *top = top.max(term.abs());
        }
    }
    let scale = largest.into_iter().fold(0.0f64, f64::max);
    let w = g.iter().zip(&sums).map(|(gi, sum)| gi - sum).collect();
    (w, scale)
}

/// The Cholesky factor L of H_PP for the passive variables in `order` (row i of L has i + 1
/// entries).
#[derive(Clone)]
struct Factor {
    order: Vec<usize>,
    rows: Vec<Vec<f64>>,
}

impl Factor {
    fn new(capacity: usize) -> Self {
        Factor {
            order: Vec::with_capacity(capacity),
            rows: Vec::with_capacity(capacity),
        }
    }

    /// Appends variable j; false (and nothing changed) when its pivot is too small.
    #[allow(
        clippy::neg_cmp_op_on_partial_ord,
        reason = "`!(x > y)` refuses NaN too, in one test"
    )]
    fn append(&mut self, h: &Matrix, j: usize, dependence_tolerance: f64) -> bool {
        let diagonal = h[(j, j)];
        if !(diagonal > 0.0) {
            return false;
        }
        let column: Vec<f64> = self.order.iter().map(|&k| h[(k, j)]).collect();
        let y = self.forward(&column);
        let pivot_squared = diagonal - dot(&y, &y);
        if pivot_squared <= dependence_tolerance * diagonal {
            return false;
        }
        let mut row = y;
        row.push(pivot_squared.sqrt());
        self.rows.push(row);
        self.order.push(j);
        true
    }

    /// Deletes the variable at `position` and restores a triangular factor by a rank-one
    /// update of the trailing block.
    fn remove(&mut self, position: usize) {
        self.order.remove(position);
        self.rows.remove(position);
        // v: the deleted column, below the deleted row.
        let mut v: Vec<f64> = self.rows[position..]
            .iter_mut()
            .map(|row| row.remove(position))
            .collect();
        let trailing = &mut self.rows[position..];
        for i in 0..trailing.len() {
            let column = position + i;
            let diagonal = trailing[i][column];
            let r = diagonal.hypot(v[i]);
            let (c, s) = (r / diagonal, v[i] / diagonal);
            trailing[i][column] = r;
            for k in i + 1..trailing.len() {
                let updated = (trailing[k][column] + s * v[k]) / c;
                v[k] = c * v[k] - s * updated;
                trailing[k][column] = updated;
            }
        }
    }

    /// Solves L y = b.
    fn forward(&self, b: &[f64]) -> Vec<f64> {
        let mut y = Vec::with_capacity(b.len());
        for (i, row) in self.rows.iter().enumerate() {
            let sum = dot(&row[..i], &y[..i]);
            y.push((b[i] - sum) / row[i]);
        }
        y
    }

    /// Solves L L^T z = b.
    fn solve(&self, b: &[f64]) -> Vec<f64> {
        let mut z = self.forward(b);
        for i in (0..z.len()).rev() {
            let mut sum = z[i];
            for (k, zk) in z.iter().enumerate().skip(i + 1) {
                sum -= self.rows[k][i] * zk;
            }
            z[i] = sum / self.rows[i][i];
        }
        z
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::Cholesky;
    use crate::noise::Rng;

    /// The exhaustive reference for small problems: the KKT point is the unconstrained
    /// minimum on one passive set; try every set, keep the feasible one of least cost.
    fn brute_force(h: &Matrix, g: &[f64]) -> (Vec<f64>, f64) {
        let n = g.len();
        let mut best = (vec![0.0; n], 0.0);
        for mask in 1u32..(1 << n) {
            let set: Vec<usize> = (0..n).filter(|j| mask & (1 << j) != 0).collect();
            let sub = Matrix::from_fn(set.len(), set.len(), |a, b| h[(set[a], set[b])]);
            let Ok(chol) = Cholesky::new(&sub) else { continue };
            let rhs: Vec<f64> = set.iter().map(|&j| g[j]).collect();
            let z = chol.solve(&rhs);
            if z.iter().any(|&v| v < 0.0) {
                continue;
            }
            let mut x = vec![0.0; n];
            for (&j, &v) in set.iter().zip(&z) {
                x[j] = v;
            }
            let cost = objective(h, g, &x);
            if cost < best.1 {
                best = (x, cost);
            }
        }
        best
    }

    fn objective(h: &Matrix, g: &[f64], x: &[f64]) -> f64 {
        0.5 * dot(x, &h.mul_vec(x)) - dot(g, x)
    }

    #[test]
    fn nnls_solves_small_problems_by_hand() {
        // Identity: the projection of b onto the non-negative orthant.
        let a = Matrix::identity(3);
        let solution = solve(&a, &[1.0, -2.0, 0.5], &NnlsOptions::default()).unwrap();
        assert_eq!(solution.x, vec![1.0, 0.0, 0.5]);
        assert_eq!(solution.passive, vec![0, 2]);
        // A = [[1, 1], [1, -1], [0, 1]], b = (2, 0, -3): unconstrained x = (1, -1/3) (normal
        // equations [[2, 0], [0, 3]] x = (2, -1)), infeasible; with x_2 = 0 the best x_1 is
        // (1 * 2 + 1 * 0) / 2 = 1, and there w_2 = A_2 . (b - A x) = (1, -1, 1) . (1, -1, -3)
        // = -1 < 0, so (1, 0) is optimal (worked by hand).
        let a = Matrix::from_rows(&[[1.0, 1.0], [1.0, -1.0], [0.0, 1.0]]);
        let solution = solve(&a, &[2.0, 0.0, -3.0], &NnlsOptions::default()).unwrap();
        assert!(
            (solution.x[0] - 1.0).abs() < 1e-14 && solution.x[1] == 0.0,
            "{:?}",
            solution.x
        );
        assert!((solution.negative_gradient[1] + 1.0).abs() < 1e-14);
        // b = 0: x = 0 without iterating into anything.
        let solution = solve(&a, &[0.0; 3], &NnlsOptions::default()).unwrap();
        assert_eq!(solution.x, vec![0.0, 0.0]);
    }

    #[test]
    fn nnls_matches_exhaustive_search_on_random_problems() {
        let mut rng = Rng::seeded(31);
        for trial in 0..200 {
            // More rows than columns: H positive definite, so the minimizer is unique.
            let cols = 2 + trial % 6;
            let rows = cols + 1 + trial % 5;
            let a = Matrix::from_fn(rows, cols, |_, _| rng.standard_normal());
            let b: Vec<f64> = (0..rows).map(|_| rng.standard_normal()).collect();
            let (h, g) = (a.gram(), a.transpose_mul_vec(&b));
            let solution = solve(&a, &b, &NnlsOptions::default()).unwrap();
            let (reference, best) = brute_force(&h, &g);
            let cost = objective(&h, &g, &solution.x);
            assert!(
                cost <= best + 1e-10 * best.abs().max(1.0),
                "trial {trial}: {cost} vs {best}"
            );
            for (got, want) in solution.x.iter().zip(&reference) {
                assert!(
                    (got - want).abs() < 1e-8,
                    "trial {trial}: {:?} vs {reference:?}",
                    solution.x
                );
            }
            // Karush-Kuhn-Tucker: feasible, stationary on the passive set, no descent
            // direction into the active set.
            let w = &solution.negative_gradient;
            assert_eq!((solution.x.len(), w.len()), (cols, cols));
            for (j, (&x, &wj)) in solution.x.iter().zip(w).enumerate() {
                assert!(x >= 0.0);
                if x > 0.0 {
                    assert!(wj.abs() < 1e-9, "trial {trial}: w[{j}] = {wj}");
                } else {
                    assert!(wj < 1e-9, "trial {trial}: w[{j}] = {wj}");
                }
            }
        }
    }

    #[test]
    fn nnls_warm_start_reaches_the_same_minimum_faster() {
        // A smooth non-negative deconvolution: Gaussian blur of a two-spike signal with a
        // ridge, solved cold and from the solution of a slightly different ridge.
        let n = 60;
        let a = Matrix::from_fn(80, n, |i, j| {
            let d = i as f64 * (n as f64 / 80.0) - j as f64;
            (-d * d / 18.0).exp()
        });
        let truth: Vec<f64> = (0..n).map(|j| if j == 17 || j == 40 { 1.0 } else { 0.0 }).collect();
        let mut rng = Rng::seeded(3);
        let b: Vec<f64> = a
            .mul_vec(&truth)
            .iter()
            .map(|v| v + 1e-3 * rng.standard_normal())
            .collect();
        let with_ridge = |ridge: f64| {
            let mut h = a.gram();
            for j in 0..n {
                h[(j, j)] += ridge;
            }
            h
        };
        let g = a.transpose_mul_vec(&b);
        let options = NnlsOptions::default();
        let nearby = solve_gram(&with_ridge(2e-3), &g, None, &options, &|| false).unwrap();
        let h = with_ridge(1e-3);
        let cold = solve_gram(&h, &g, None, &options, &|| false).unwrap();
        let warm = solve_gram(&h, &g, Some(&nearby.x), &options, &|| false).unwrap();
        for (c, w) in cold.x.iter().zip(&warm.x) {
            assert!((c - w).abs() < 1e-9, "{c} vs {w}");
        }
        assert!(
            warm.iterations < cold.iterations,
            "{} vs {}",
            warm.iterations,
            cold.iterations
        );
        // Both spikes are found, within a few points.
        let total: f64 = cold.x.iter().sum();
        let near = |centre: usize| -> f64 { cold.x[centre - 4..=centre + 4].iter().sum() };
        assert!(near(17) > 0.4 * total && near(40) > 0.4 * total, "{:?}", cold.x);
    }

    #[test]
    fn nnls_prepared_warm_start_gives_the_same_bits_as_a_plain_warm_start() {
        // One matrix and start, several right-hand sides: the bootstrap's use.
        let mut rng = Rng::seeded(12);
        let n = 40;
        let a = Matrix::from_fn(60, n, |i, j| {
            let d = i as f64 * (n as f64 / 60.0) - j as f64;
            (-d * d / 10.0).exp()
        });
        let mut h = a.gram();
        for j in 0..n {
            h[(j, j)] += 1e-3;
        }
        let truth: Vec<f64> = (0..n).map(|j| if (10..16).contains(&j) { 1.0 } else { 0.0 }).collect();
        let clean = a.mul_vec(&truth);
        let options = NnlsOptions::default();
        let start = solve_gram(&h, &a.transpose_mul_vec(&clean), None, &options, &|| false)
            .unwrap()
            .x;
        let prepared = WarmStart::new(&h, &start, &options).unwrap();
        for _ in 0..5 {
            let b: Vec<f64> = clean.iter().map(|v| v + 0.05 * rng.standard_normal()).collect();
            let g = a.transpose_mul_vec(&b);
            let plain = solve_gram(&h, &g, Some(&start), &options, &|| false).unwrap();
            let shared = solve_gram_from(&h, &g, &prepared, &options, &|| false).unwrap();
            assert_eq!(plain.iterations, shared.iterations);
            assert_eq!(plain.passive, shared.passive);
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&plain.x), bits(&shared.x));
            assert_eq!(bits(&plain.negative_gradient), bits(&shared.negative_gradient));
        }
    }

    #[test]
    fn nnls_factor_updates_agree_with_a_fresh_factorization() {
        let mut rng = Rng::seeded(8);
        let a = Matrix::from_fn(12, 8, |_, _| rng.standard_normal());
        let h = a.gram();
        let mut factor = Factor::new(8);
        for j in [3, 0, 7, 5, 1, 6] {
            assert!(factor.append(&h, j, 1e-13));
        }
        factor.remove(1);
        factor.remove(3);
        assert_eq!(factor.order, vec![3, 7, 5, 6]);
        let sub = Matrix::from_fn(4, 4, |p, q| h[(factor.order[p], factor.order[q])]);
        let rebuilt = Matrix::from_fn(4, 4, |p, q| {
            (0..=p.min(q))
                .map(|k| factor.rows[p][k] * factor.rows[q][k])
                .sum::<f64>()
        });
        for p in 0..4 {
            for q in 0..4 {
                assert!((rebuilt[(p, q)] - sub[(p, q)]).abs() < 1e-12 * sub.max_abs());
            }
        }
        // A copy of a passive column is refused as dependent.
        let twin = Matrix::from_fn(12, 3, |i, j| if j == 2 { a[(i, 0)] } else { a[(i, j)] });
        let mut factor = Factor::new(3);
        assert!(factor.append(&twin.gram(), 0, 1e-13));
        assert!(factor.append(&twin.gram(), 1, 1e-13));
        assert!(!factor.append(&twin.gram(), 2, 1e-13));
    }

    #[test]
    fn nnls_stops_when_cancelled_and_refuses_bad_input() {
        let h = Matrix::identity(4);
        let g = [1.0, 2.0, 3.0, 4.0];
        let calls = std::cell::Cell::new(0);
        let cancel_on_third = || {
            calls.set(calls.get() + 1);
            calls.get() >= 3
        };
        assert_eq!(
            solve_gram(&h, &g, None, &NnlsOptions::default(), &cancel_on_third),
            Err(NnlsError::Cancelled)
        );
        assert!(matches!(
            solve_gram(&h, &[1.0, f64::NAN, 0.0, 0.0], None, &NnlsOptions::default(), &|| false),
            Err(NnlsError::NonFinite { .. })
        ));
        assert!(matches!(
            solve_gram(&h, &g, Some(&[1.0, -1.0, 0.0, 0.0]), &NnlsOptions::default(), &|| false),
            Err(NnlsError::NegativeStart { index: 1, .. })
        ));
        let limited = NnlsOptions {
            max_iterations: 2,
            ..NnlsOptions::default()
        };
        assert!(matches!(
            solve_gram(&h, &g, None, &limited, &|| false),
            Err(NnlsError::NotConverged { iterations: 2 })
        ));
    }
}
