//! The regularized spectrum: non-negative least squares with a second-difference
//! (smoothness) penalty, and the choice of its strength.
//!
//! Minimizes chi^2(u) + alpha ||D u||^2 over u >= 0, u the point conductivities in units of
//! the reference conductivity, chi^2 = ||A u - b||^2 the whitened misfit and D the second
//! difference along ln|mu| within each carrier sign. The problem is solved in its Gram form,
//! (A^T A + alpha D^T D) u = A^T b on the passive set, by the active-set NNLS of
//! `mobilis_numerics::nnls`, each trial warm-started from the previous one.
//!
//! alpha = lambda tr(A^T A) / tr(D^T D): lambda is dimensionless and does not depend on the
//! units or the number of points.
//!
//! # Choosing lambda
//!
//! One downward scan serves both rules: lambda from 1 (a spectrum nearly linear in ln|mu|
//! within each sign) in steps of 10^(1/3), warm-started, until the rule has what it needs
//! or chi-square stops improving (by less than 0.1 % over a decade: the misfit's floor).
//!
//! - **Discrepancy principle** (Morozov, Soviet Math. Dokl. 7, 414, 1966, from memory),
//!   for data with uncertainties: the largest lambda with chi-square <= m, m the number of
//!   whitened data, since the true spectrum would give chi-square m on average; a larger
//!   lambda is not supported by the data and a smaller one fits the noise. The crossing is
//!   bracketed by the scan and refined by bisection in ln lambda. When the misfit's floor
//!   lies above m (a grid whose spacing leaves a discretization error comparable to the
//!   noise, underestimated uncertainties, or data that are not of Drude carriers), the
//!   target becomes floor + sqrt(2 m), one standard deviation of chi-square above the
//!   floor, and a floor beyond m + 5 sqrt(2 m) is reported as a warning.
//! - **L-curve** (Hansen and O'Leary, SIAM J. Sci. Comput. 14, 1487, 1993), for data
//!   without uncertainties: on the curve (ln ||A u - b||, ln ||D u||) traced by the scan,
//!   the corner of largest curvature separates the solutions dominated by the penalty (a
//!   flat branch: the roughness drops little as the misfit grows) from those dominated by
//!   the noise (a steep branch: roughness grows with no gain in fit). The curvature at each
//!   interior point is that of the circle through it and its two neighbours (Menger
//!   curvature), signed so that the corner of the L counts positive.

use mobilis_numerics::linalg::{dot, dots, Matrix};
use mobilis_numerics::nnls::{solve_gram, solve_gram_from, NnlsError, NnlsOptions, NnlsSolution, WarmStart};
use rayon::prelude::*;

use super::error::SpectrumError;
use super::settings::{RegularizationRule, RuleUsed};
use crate::monitor::Monitor;

const LAMBDA_MAX: f64 = 1.0;
const LAMBDA_MIN: f64 = 1e-18;
/// Scan points per decade of lambda.
const PER_DECADE: usize = 3;
/// Bisection steps of the discrepancy search in ln lambda after bracketing within a factor
/// 10^(1/3): five halvings leave a factor 10^(1/96), far below anything visible.
const DISCREPANCY_BISECTIONS: usize = 5;

/// One regularized solve.
#[derive(Debug, Clone)]
pub(super) struct Trial {
    pub lambda: f64,
    pub u: Vec<f64>,
    pub chi_square: f64,
    /// ||D u||^2.
    pub roughness: f64,
}

/// The regularized least-squares problem of one data set on one grid.
pub(super) struct Problem {
    pub a: Matrix,
    pub b: Vec<f64>,
    gram: Matrix,
    g: Vec<f64>,
    /// Unknowns per carrier sign (the penalty acts within each block of this size).
    block: usize,
    /// The nonzero entries (i, j, value) of D^T D, row by row: its band.
    penalty: Vec<(usize, usize, f64)>,
    /// tr(A^T A) / tr(D^T D).
    pub scale: f64,
}

/// The penalized Gram matrix A^T A + alpha D^T D of one strength at a time, kept in one
/// buffer through a scan: a new strength rewrites the band of D^T D (at most five entries
/// a row), not the whole matrix, which a fresh copy per trial would (n^2 entries, the cost
/// of several NNLS iterations).
pub(super) struct PenalizedGram {
    /// Equals the Gram matrix outside the band of D^T D.
    matrix: Matrix,
}

impl Problem {
    /// Forms A^T A and A^T b, asking `cancelled` every 16 rows of the Gram matrix (the one
    /// O(M N^2) step, a second or more for the largest grids).
    pub fn new(
        a: Matrix,
        b: Vec<f64>,
        points_per_sign: usize,
        cancelled: &dyn Fn() -> bool,
    ) -> Result<Self, SpectrumError> {
        let n = a.cols();
        let columns: Vec<Vec<f64>> = (0..n).map(|j| a.column(j)).collect();
        let mut gram = Matrix::zeros(n, n);
        // Rows of the upper triangle in blocks of 16, the rows of a block on the worker
        // threads at once and the cancel check (on this thread) between blocks. Every entry
        // is the plain dot product of two columns, whichever thread computes it.
        for block in (0..n).step_by(16) {
            if cancelled() {
                return Err(SpectrumError::Cancelled);
            }
            let rows: Vec<(usize, Vec<f64>)> = (block..(block + 16).min(n))
                .into_par_iter()
                .map(|i| (i, gram_row(&columns, i)))
                .collect();
            for (i, row) in rows {
                for (offset, value) in row.into_iter().enumerate() {
                    gram[(i, i + offset)] = value;
                    gram[(i + offset, i)] = value;
                }
            }
        }
        let g = a.transpose_mul_vec(&b);
        let penalty: Vec<(usize, usize, f64)> = (0..n)
            .flat_map(|i| {
                penalty_row(points_per_sign, i)
                    .into_iter()
                    .map(move |(j, value)| (i, j, value))
            })
            .collect();
        let trace_gram: f64 = gram.diagonal().iter().sum();
        let trace_penalty: f64 = penalty
            .iter()
            .filter(|&&(i, j, _)| i == j)
            .map(|&(_, _, value)| value)
            .sum();
        Ok(Problem {
            a,
            b,
            gram,
            g,
            block: points_per_sign,
            penalty,
            scale: trace_gram / trace_penalty,
        })
    }

    /// A^T A + lambda scale D^T D.
    pub fn regularized_gram(&self, lambda: f64) -> Matrix {
        let mut h = self.penalized_gram();
        self.penalize(lambda, &mut h);
        h.matrix
    }

    /// A buffer for [`Problem::penalize`].
    pub fn penalized_gram(&self) -> PenalizedGram {
        PenalizedGram {
            matrix: self.gram.clone(),
        }
    }

    /// Makes `h` A^T A + lambda scale D^T D: every entry of the band is set to its Gram
    /// entry plus alpha times its D^T D entry, the same sum as adding the penalty to a
    /// fresh copy of the Gram matrix.
    fn penalize<'h>(&self, lambda: f64, h: &'h mut PenalizedGram) -> &'h Matrix {
        let alpha = lambda * self.scale;
        for &(i, j, value) in &self.penalty {
            h.matrix[(i, j)] = self.gram[(i, j)] + alpha * value;
        }
        &h.matrix
    }

    /// ||D u||^2.
    fn roughness(&self, u: &[f64]) -> f64 {
        let n = self.block;
        (0..2)
            .flat_map(|block| (1..n - 1).map(move |k| block * n + k))
            .map(|k| {
                let second = u[k - 1] - 2.0 * u[k] + u[k + 1];
                second * second
            })
            .sum()
    }

    /// The solution at `lambda`, from `start` when given; `h` is the buffer the penalized
    /// Gram matrix is formed in.
    pub fn solve(
        &self,
        lambda: f64,
        start: Option<&[f64]>,
        h: &mut PenalizedGram,
        cancelled: &dyn Fn() -> bool,
    ) -> Result<Trial, SpectrumError> {
        let h = self.penalize(lambda, h);
        let solution = nnls(h, &self.g, start, lambda, cancelled)?;
        let u = solution.x;
        let fit = self.a.mul_vec(&u);
        let chi_square = fit.iter().zip(&self.b).map(|(f, b)| (f - b) * (f - b)).sum();
        let roughness = self.roughness(&u);
        Ok(Trial {
            lambda,
            u,
            chi_square,
            roughness,
        })
    }

    /// The start `start` factored in the penalized Gram matrix `h` of `lambda`, once for
    /// all the replicas solved from it ([`Problem::solve_for`]).
    pub fn warm_start(&self, h: &Matrix, lambda: f64, start: &[f64]) -> Result<WarmStart, SpectrumError> {
        WarmStart::new(h, start, &NnlsOptions::default()).map_err(|error| numerical(lambda, error))
    }

    /// The solution at `lambda` for other whitened data `b`, given the penalized Gram
    /// matrix `h` of that lambda and a start prepared in it: one replica of the bootstrap.
    /// The same as a solve from that start with [`solve_gram`], to the last bit.
    pub fn solve_for(
        &self,
        h: &Matrix,
        lambda: f64,
        b: &[f64],
        start: &WarmStart,
        cancelled: &dyn Fn() -> bool,
    ) -> Result<Vec<f64>, SpectrumError> {
        let g = self.a.transpose_mul_vec(b);
        let solution = solve_gram_from(h, &g, start, &NnlsOptions::default(), cancelled)
            .map_err(|error| numerical(lambda, error))?;
        Ok(solution.x)
    }
}

/// An NNLS failure as the spectrum reports it.
fn numerical(lambda: f64, error: NnlsError) -> SpectrumError {
    match error {
        NnlsError::Cancelled => SpectrumError::Cancelled,
        other => SpectrumError::Numerical(format!(
            "the regularized spectrum could not be solved at lambda = {lambda:e}: {other}"
        )),
    }
}

/// Entries i..n of row i of the Gram matrix of `columns`: the dot products of column i with
/// columns i, i + 1, ..., four at a time ([`dots`] gives each to the last bit as [`dot`]).
fn gram_row(columns: &[Vec<f64>], i: usize) -> Vec<f64> {
    let n = columns.len();
    let own = &columns[i];
    let mut row = Vec::with_capacity(n - i);
    let mut j = i;
    while j + 4 <= n {
        row.extend(dots(
            own,
            [&columns[j], &columns[j + 1], &columns[j + 2], &columns[j + 3]],
        ));
        j += 4;
    }
    for column in &columns[j..] {
        row.push(dot(own, column));
    }
    row
}

fn nnls(
    h: &Matrix,
    g: &[f64],
    start: Option<&[f64]>,
    lambda: f64,
    cancelled: &dyn Fn() -> bool,
) -> Result<NnlsSolution, SpectrumError> {
    solve_gram(h, g, start, &NnlsOptions::default(), cancelled).map_err(|error| numerical(lambda, error))
}

/// Row `i` of D^T D, (column, value) pairs, for D the second difference within each of the
/// two blocks of `n` unknowns (electrons, holes): no row couples the two signs, and the
/// ends are free (no boundary condition), so a carrier beyond the grid shows as weight
/// piled at the edge. D^T D is pentadiagonal within a block: interior rows
/// (1, -4, 6, -4, 1), fewer and smaller entries within two points of a block's ends.
fn penalty_row(n: usize, i: usize) -> Vec<(usize, f64)> {
    let offset = i / n * n;
    let k = i % n;
    let mut row: Vec<(usize, f64)> = Vec::with_capacity(5);
    // Each difference row r (centre r, 1 <= r <= n - 2) has weights (1, -2, 1) on
    // r - 1, r, r + 1; entry (k, l) of D^T D sums their products over the rows that touch
    // both k and l.
    let weight = |r: usize, index: usize| -> f64 {
        match index as isize - r as isize {
            -1 | 1 => 1.0,
            0 => -2.0,
            _ => 0.0,
        }
    };
    for l in k.saturating_sub(2)..(k + 3).min(n) {
        let rows = k.max(l).saturating_sub(1).max(1)..=(k.min(l) + 1).min(n - 2);
        let value: f64 = rows.map(|r| weight(r, k) * weight(r, l)).sum();
        if value != 0.0 {
            row.push((offset + l, value));
        }
    }
    row
}

/// The chosen solution and the record of the search.
pub(super) struct Selection {
    pub chosen: Trial,
    pub rule: RuleUsed,
    /// Every trial, in the order solved: (lambda, chi-square, roughness).
    pub trials: Vec<(f64, f64, f64)>,
    pub warnings: Vec<String>,
}

/// Chooses lambda by `rule` (Auto: the discrepancy principle when the data carry
/// uncertainties, the L-curve otherwise) and returns the solution there. Progress runs from
/// `progress_range.0` to `progress_range.1`.
pub(super) fn select(
    problem: &Problem,
    rule: RegularizationRule,
    has_uncertainties: bool,
    monitor: &dyn Monitor,
    progress_range: (f64, f64),
) -> Result<Selection, SpectrumError> {
    let cancelled = || monitor.is_cancelled();
    let mut search = Search {
        problem,
        gram: problem.penalized_gram(),
        trials: Vec::new(),
        monitor,
        progress_range,
        cancelled: &cancelled,
        notes: Vec::new(),
    };
    let mut warnings = Vec::new();
    let m = problem.b.len() as f64;
    let (chosen, rule_used) = match rule {
        RegularizationRule::Fixed(lambda) => (search.trial(lambda, None, 1.0)?, RuleUsed::Fixed),
        RegularizationRule::Discrepancy if !has_uncertainties => {
            return Err(SpectrumError::DiscrepancyNeedsUncertainties);
        }
        RegularizationRule::LCurve => {
            let scan = search.scan(None)?;
            (l_curve_choice(scan), RuleUsed::LCurve)
        }
        RegularizationRule::Auto if !has_uncertainties => {
            let scan = search.scan(None)?;
            (l_curve_choice(scan), RuleUsed::LCurve)
        }
        RegularizationRule::Discrepancy | RegularizationRule::Auto => {
            let scan = search.scan(Some(m))?;
            let floor = scan.iter().map(|t| t.chi_square).fold(f64::INFINITY, f64::min);
            let crossed = scan.last().is_some_and(|t| t.chi_square <= m);
            // Without a crossing the scan ran to the floor of the misfit; the target is
            // then one standard deviation of chi-square above it.
            let target = if crossed { m } else { floor + (2.0 * m).sqrt() };
            if !crossed && floor > m + 5.0 * (2.0 * m).sqrt() {
                warnings.push(format!(
                    "the best spectrum misses the data by chi-square {floor:.4e} for {m} values, more than their uncertainties allow; the uncertainties may be underestimated, the grid too coarse for this noise level (raise points_per_sign) or the data not of independent Drude carriers"
                ));
            }
            let index = scan
                .iter()
                .position(|t| t.chi_square <= target)
                .expect("the floor is within the target");
            let chosen = if index == 0 {
                warnings.push(format!(
                    "even the smoothest spectrum tried (lambda = {LAMBDA_MAX}) fits the data within their uncertainties; the uncertainties may be overestimated, and the spectrum shows only what such noisy data can resolve"
                ));
                scan.into_iter().next().expect("the scan has a trial")
            } else {
                let too_smooth = scan[index - 1].lambda;
                let fits = scan.into_iter().nth(index).expect("the index is within the scan");
                search.bisect(fits, too_smooth, target)?
            };
            (chosen, RuleUsed::Discrepancy)
        }
    };
    warnings.append(&mut search.notes);
    Ok(Selection {
        chosen,
        rule: rule_used,
        trials: search.trials,
        warnings,
    })
}

/// The trial at the L-curve corner of a scan.
fn l_curve_choice(mut scan: Vec<Trial>) -> Trial {
    let points: Vec<(f64, f64)> = scan
        .iter()
        .map(|t| {
            (
                0.5 * t.chi_square.max(f64::MIN_POSITIVE).ln(),
                0.5 * t.roughness.max(f64::MIN_POSITIVE).ln(),
            )
        })
        .collect();
    let corner = l_curve_corner(&points);
    scan.swap_remove(corner)
}

struct Search<'a> {
    problem: &'a Problem,
    /// The penalized Gram matrix of the trial being solved.
    gram: PenalizedGram,
    trials: Vec<(f64, f64, f64)>,
    monitor: &'a dyn Monitor,
    progress_range: (f64, f64),
    cancelled: &'a dyn Fn() -> bool,
    /// Notes for the caller (a scan cut short by a failed solve).
    notes: Vec<String>,
}

impl Search<'_> {
    /// One solve; `done` is the fraction of the search finished after it.
    fn trial(&mut self, lambda: f64, start: Option<&[f64]>, done: f64) -> Result<Trial, SpectrumError> {
        if (self.cancelled)() {
            return Err(SpectrumError::Cancelled);
        }
        let trial = self.problem.solve(lambda, start, &mut self.gram, self.cancelled)?;
        self.trials.push((trial.lambda, trial.chi_square, trial.roughness));
        let (from, to) = self.progress_range;
        self.monitor.progress(
            from + (to - from) * done.clamp(0.0, 1.0),
            &format!(
                "regularized spectrum: lambda {lambda:.2e}, chi-square {:.4e}",
                trial.chi_square
            ),
        );
        Ok(trial)
    }

    /// The downward scan shared by both rules: lambda from 1 in steps of 10^(1/3), each
    /// solve warm-started from the previous. It stops at 1e-18, once chi-square is at or
    /// below `stop_at`, or once chi-square has improved by less than 0.1 % over a decade of
    /// lambda (the misfit's floor is reached: the steep branch of the L-curve, where only
    /// the noise is being fitted and further solves cost time for nothing), or when a solve
    /// fails after three have succeeded (noted as a warning).
    fn scan(&mut self, stop_at: Option<f64>) -> Result<Vec<Trial>, SpectrumError> {
        let steps = ((LAMBDA_MAX / LAMBDA_MIN).log10() * PER_DECADE as f64).round() as usize;
        let mut trials: Vec<Trial> = Vec::new();
        for step in 0..=steps {
            let lambda = LAMBDA_MAX * 10f64.powf(-(step as f64) / PER_DECADE as f64);
            let start = trials.last().map(|t| t.u.clone());
            let trial = match self.trial(lambda, start.as_deref(), 0.85 * step as f64 / steps as f64) {
                Ok(trial) => trial,
                // A nearly unregularized problem can be too degenerate for the active-set
                // iteration limit; the smoother solutions already found are kept.
                Err(SpectrumError::Numerical(message)) if trials.len() >= 3 => {
                    self.notes
                        .push(format!("the scan of regularization strengths stopped early: {message}"));
                    break;
                }
                Err(error) => return Err(error),
            };
            let chi_square = trial.chi_square;
            trials.push(trial);
            if stop_at.is_some_and(|target| chi_square <= target) {
                break;
            }
            if trials.len() > PER_DECADE + 3 && chi_square > 0.999 * trials[trials.len() - 1 - PER_DECADE].chi_square {
                break;
            }
        }
        Ok(trials)
    }

    /// The discrepancy principle (V. A. Morozov, Soviet Math. Dokl. 7, 414, 1966, from
    /// memory) refined between two scan points: the largest lambda whose chi-square does
    /// not exceed `target`, by bisection in ln lambda between `fits` (at or below the
    /// target) and `too_smooth` (above it). chi-square grows with lambda.
    fn bisect(&mut self, fits: Trial, too_smooth: f64, target: f64) -> Result<Trial, SpectrumError> {
        let (mut low, mut high) = (fits, too_smooth);
        for bisection in 0..DISCREPANCY_BISECTIONS {
            let middle = (low.lambda * high).sqrt();
            let done = 0.85 + 0.15 * (bisection + 1) as f64 / DISCREPANCY_BISECTIONS as f64;
            let candidate = self.trial(middle, Some(&low.u), done)?;
            if candidate.chi_square <= target {
                low = candidate;
            } else {
                high = middle;
            }
        }
        Ok(low)
    }
}

/// The index of the L-curve corner among points ordered by decreasing lambda (misfit
/// falling, roughness rising). The corner turns clockwise in (ln misfit, ln roughness):
/// from leftwards along the flat branch to upwards along the steep one. When no interior
/// point turns that way (a curve without a corner), the point farthest below the chord
/// joining the ends is taken, which is the corner of a convex curve.
pub(super) fn l_curve_corner(points: &[(f64, f64)]) -> usize {
    if points.len() < 3 {
        return points.len().saturating_sub(1);
    }
    let mut best: Option<(usize, f64)> = None;
    for k in 1..points.len() - 1 {
        let (p, q, r) = (points[k - 1], points[k], points[k + 1]);
        let (ax, ay) = (q.0 - p.0, q.1 - p.1);
        let (bx, by) = (r.0 - q.0, r.1 - q.1);
        let (cx, cy) = (r.0 - p.0, r.1 - p.1);
        let lengths = ax.hypot(ay) * bx.hypot(by) * cx.hypot(cy);
        if lengths == 0.0 || !lengths.is_finite() {
            continue;
        }
        // Menger curvature 4 area / (|a| |b| |c|); the cross product is twice the signed
        // area, negative for a clockwise turn.
        let curvature = -2.0 * (ax * by - ay * bx) / lengths;
        if curvature > 0.0 && best.is_none_or(|(_, c)| curvature > c) {
            best = Some((k, curvature));
        }
    }
    if let Some((k, _)) = best {
        return k;
    }
    let (first, last) = (points[0], points[points.len() - 1]);
    let (dx, dy) = (last.0 - first.0, last.1 - first.1);
    (1..points.len() - 1)
        .max_by(|&a, &b| {
            let below = |k: usize| {
                // Positive on the side of the chord towards the origin of the L.
                let (x, y) = (points[k].0 - first.0, points[k].1 - first.1);
                y * dx - x * dy
            };
            below(a).total_cmp(&below(b))
        })
        .unwrap_or(0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn penalty_rows_are_those_of_the_explicit_second_difference() {
        // D explicitly: one row (1, -2, 1) per interior point of each block; D^T D by
        // multiplication must equal the banded rows.
        for n in [3, 4, 5, 9] {
            let mut d = Matrix::zeros(2 * (n - 2), 2 * n);
            for block in 0..2 {
                for k in 1..n - 1 {
                    let row = block * (n - 2) + k - 1;
                    for (offset, weight) in [(0, 1.0), (1, -2.0), (2, 1.0)] {
                        d[(row, block * n + k - 1 + offset)] = weight;
                    }
                }
            }
            let explicit = d.gram();
            for i in 0..2 * n {
                let mut banded = vec![0.0; 2 * n];
                for (j, value) in penalty_row(n, i) {
                    banded[j] = value;
                }
                assert_eq!(banded, explicit.row(i), "n = {n}, row {i}");
            }
        }
    }
}
