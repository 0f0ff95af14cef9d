//! Small dense linear algebra for the fits: a row-major matrix, Cholesky (with a jitter
//! fallback), Householder QR, the singular value decomposition, least-squares solves and
//! inverses.
//!
//! The problems of mobilis are small (a handful of parameters, at most a few thousand
//! residuals), so clarity and accuracy come before speed and no external crate is needed.
//!
//! - [`Cholesky`] factors a symmetric positive definite matrix A = L L^T. For a matrix that
//!   is positive semidefinite, or indefinite only by rounding, [`Cholesky::with_jitter`]
//!   adds the smallest multiple of the identity from a ladder (10^-14, 10^-13, ... 10^-2
//!   times the largest diagonal element) that makes the factorization succeed, and reports
//!   it. Use the jitter only where a slightly regularized answer is acceptable (a damped
//!   step, a preconditioner), never for a covariance that is reported.
//! - [`Qr`] is a Householder QR for overdetermined systems, m >= n: least squares without
//!   forming A^T A, so the condition number is not squared. It refuses a rank-deficient
//!   matrix (a pivot of R below n eps times the largest).
//! - [`Svd`] is the one-sided Jacobi SVD of Hestenes (1958): orthogonalize the columns by
//!   plane rotations until every pair is orthogonal to rounding. It is slower than
//!   Golub-Kahan but simple and accurate in the relative sense (small singular values keep
//!   their digits when the columns are well scaled; Demmel and Veselic, SIAM J. Matrix Anal.
//!   Appl. 13, 1204, 1992). [`Svd::solve_least_squares`] gives the minimum-norm solution
//!   with singular values below a relative tolerance dropped, the robust choice for
//!   ill-conditioned or rank-deficient problems.
//! - [`Matrix::inverse`] is Gauss-Jordan elimination with partial pivoting;
//!   [`Cholesky::inverse`] inverts a symmetric positive definite matrix such as J^T J.
//!
//! Dimension mismatches are programming errors and panic (with a message naming the
//! shapes); numerical trouble (singular, not positive definite, non-finite entries) is a
//! [`LinalgError`].

use std::fmt;
use std::ops::{Index, IndexMut};

/// Why a factorization or solve is refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum LinalgError {
    /// A Cholesky pivot was not positive: the matrix is not positive definite.
    #[error(
        "the matrix is not positive definite (pivot {pivot} is {value:e}); check that it is symmetric with a positive diagonal, or use Cholesky::with_jitter for a regularized factor"
    )]
    NotPositiveDefinite { pivot: usize, value: f64 },
    /// The matrix is singular, or too close to singular for the method.
    #[error(
        "the matrix is singular to working precision (numerical rank {rank} of {size}); remove the dependent rows or columns, or use the SVD solve, which drops them"
    )]
    Singular { rank: usize, size: usize },
    /// An entry is NaN or infinite.
    #[error("entry ({row}, {column}) of the matrix is not finite; give finite numbers")]
    NonFinite { row: usize, column: usize },
    /// The Jacobi sweeps did not reach orthogonality (not seen on finite input).
    #[error("the Jacobi SVD did not converge within {sweeps} sweeps; check the matrix for extreme entries")]
    NoConvergence { sweeps: usize },
}

/// A dense matrix of f64, stored row by row.
#[derive(Clone, PartialEq)]
pub struct Matrix {
    rows: usize,
    cols: usize,
    data: Vec<f64>,
}

impl fmt::Debug for Matrix {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "Matrix {}x{} [", self.rows, self.cols)?;
        for row in 0..self.rows {
            writeln!(f, "  {:?}", self.row(row))?;
        }
        write!(f, "]")
    }
}

// Indexing is inlined: the fits index matrices inside their innermost loops, and the
// call (with its bounds message) otherwise costs more than the access.
impl Index<(usize, usize)> for Matrix {
    type Output = f64;
    #[inline]
    fn index(&self, (row, col): (usize, usize)) -> &f64 {
        assert!(
            row < self.rows && col < self.cols,
            "index ({row}, {col}) outside a {}x{} matrix",
            self.rows,
            self.cols
        );
        &self.data[row * self.cols + col]
    }
}

impl IndexMut<(usize, usize)> for Matrix {
    #[inline]
    fn index_mut(&mut self, (row, col): (usize, usize)) -> &mut f64 {
        assert!(
            row < self.rows && col < self.cols,
            "index ({row}, {col}) outside a {}x{} matrix",
            self.rows,
            self.cols
        );
        &mut self.data[row * self.cols + col]
    }
}

impl Matrix {
    /// A `rows` x `cols` matrix of zeros.
    pub fn zeros(rows: usize, cols: usize) -> Self {
        Matrix {
            rows,
            cols,
            data: vec![0.0; rows * cols],
        }
    }

    /// The n x n identity.
    pub fn identity(n: usize) -> Self {
        let mut matrix = Matrix::zeros(n, n);
        for i in 0..n {
            matrix[(i, i)] = 1.0;
        }
        matrix
    }

    /// A square matrix with `values` on the diagonal.
    pub fn from_diagonal(values: &[f64]) -> Self {
        let mut matrix = Matrix::zeros(values.len(), values.len());
        for (i, value) in values.iter().enumerate() {
            matrix[(i, i)] = *value;
        }
        matrix
    }

    /// A matrix from its rows.
    ///
    /// # Panics
    /// When the rows differ in length.
    pub fn from_rows<R: AsRef<[f64]>>(rows: &[R]) -> Self {
        let cols = rows.first().map_or(0, |row| row.as_ref().len());
        let mut data = Vec::with_capacity(rows.len() * cols);
        for (index, row) in rows.iter().enumerate() {
            let row = row.as_ref();
            assert_eq!(
                row.len(),
                cols,
                "row {index} has {} entries, row 0 has {cols}",
                row.len()
            );
            data.extend_from_slice(row);
        }
        Matrix {
            rows: rows.len(),
            cols,
            data,
        }
    }

    /// A matrix whose entry (i, j) is `entry(i, j)`.
    pub fn from_fn(rows: usize, cols: usize, mut entry: impl FnMut(usize, usize) -> f64) -> Self {
        let mut data = Vec::with_capacity(rows * cols);
        for i in 0..rows {
            for j in 0..cols {
                data.push(entry(i, j));
            }
        }
        Matrix { rows, cols, data }
    }

    #[inline]
    pub fn rows(&self) -> usize {
        self.rows
    }

    #[inline]
    pub fn cols(&self) -> usize {
        self.cols
    }

    /// The entries row by row.
    #[inline]
    pub fn as_slice(&self) -> &[f64] {
        &self.data
    }

    /// The entries row by row, to overwrite in place.
    #[inline]
    pub fn as_mut_slice(&mut self) -> &mut [f64] {
        &mut self.data
    }

    /// Row `i` as a slice.
    #[inline]
    pub fn row(&self, i: usize) -> &[f64] {
        &self.data[i * self.cols..(i + 1) * self.cols]
    }

    /// Row `i` as a slice to write into.
    #[inline]
    pub fn row_mut(&mut self, i: usize) -> &mut [f64] {
        &mut self.data[i * self.cols..(i + 1) * self.cols]
    }

    /// Column `j` copied into a vector.
    pub fn column(&self, j: usize) -> Vec<f64> {
        if self.rows == 0 {
            return Vec::new();
        }
        assert!(j < self.cols, "column {j} of a {}x{} matrix", self.rows, self.cols);
        self.data[j..].iter().step_by(self.cols).copied().collect()
    }

    /// Every column, as [`Matrix::column`] gives each, gathered in one pass over the rows
    /// instead of one strided pass per column.
    pub fn columns(&self) -> Vec<Vec<f64>> {
        let mut columns: Vec<Vec<f64>> = (0..self.cols).map(|_| Vec::with_capacity(self.rows)).collect();
        if self.cols > 0 {
            for row in self.data.chunks_exact(self.cols) {
                for (column, value) in columns.iter_mut().zip(row) {
                    column.push(*value);
                }
            }
        }
        columns
    }

    /// The diagonal entries.
    pub fn diagonal(&self) -> Vec<f64> {
        (0..self.rows.min(self.cols)).map(|i| self[(i, i)]).collect()
    }

    pub fn transpose(&self) -> Matrix {
        Matrix::from_fn(self.cols, self.rows, |i, j| self[(j, i)])
    }

    /// The matrix product self * other.
    ///
    /// # Panics
    /// When the inner dimensions differ.
    pub fn matmul(&self, other: &Matrix) -> Matrix {
        assert_eq!(
            self.cols, other.rows,
            "cannot multiply a {}x{} by a {}x{} matrix",
            self.rows, self.cols, other.rows, other.cols
        );
        let mut product = Matrix::zeros(self.rows, other.cols);
        for i in 0..self.rows {
            for k in 0..self.cols {
                let a = self[(i, k)];
                if a == 0.0 {
                    continue;
                }
                for j in 0..other.cols {
                    product.data[i * other.cols + j] += a * other.data[k * other.cols + j];
                }
            }
        }
        product
    }

    /// The product self * v.
    ///
    /// # Panics
    /// When `v` does not have one entry per column.
    pub fn mul_vec(&self, v: &[f64]) -> Vec<f64> {
        assert_eq!(
            v.len(),
            self.cols,
            "a {}x{} matrix times a vector of {}",
            self.rows,
            self.cols,
            v.len()
        );
        // Four rows at a time ([`dots`]): each entry is dot(row, v) to the last bit.
        let mut product = Vec::with_capacity(self.rows);
        let mut i = 0;
        while i + 4 <= self.rows {
            product.extend(dots(
                v,
                [self.row(i), self.row(i + 1), self.row(i + 2), self.row(i + 3)],
            ));
            i += 4;
        }
        product.extend((i..self.rows).map(|i| dot(self.row(i), v)));
        product
    }

    /// The product self^T * v.
    ///
    /// # Panics
    /// When `v` does not have one entry per row.
    pub fn transpose_mul_vec(&self, v: &[f64]) -> Vec<f64> {
        assert_eq!(
            v.len(),
            self.rows,
            "the transpose of a {}x{} matrix times a vector of {}",
            self.rows,
            self.cols,
            v.len()
        );
        // Row by row, each row scaled and added to the sums: every sum gathers its terms in
        // row order, from 0. The few columns of a fit's Jacobian keep their sums in
        // registers.
        weighted_row_sums(
            &RowMajor {
                data: &self.data,
                cols: self.cols,
            },
            v,
        )
    }

    /// The Gram matrix self^T * self (symmetric, n x n for an m x n matrix).
    pub fn gram(&self) -> Matrix {
        let n = self.cols;
        let mut gram = Matrix::zeros(n, n);
        for i in 0..self.rows {
            let row = self.row(i);
            for a in 0..n {
                if row[a] == 0.0 {
                    continue;
                }
                for b in a..n {
                    gram.data[a * n + b] += row[a] * row[b];
                }
            }
        }
        for a in 0..n {
            for b in 0..a {
                gram.data[a * n + b] = gram.data[b * n + a];
            }
        }
        gram
    }

    /// The largest |entry| (0 for an empty matrix).
    pub fn max_abs(&self) -> f64 {
        self.data.iter().fold(0.0, |largest, value| largest.max(value.abs()))
    }

    fn check_finite(&self) -> Result<(), LinalgError> {
        match self.data.iter().position(|value| !value.is_finite()) {
            Some(index) => Err(LinalgError::NonFinite {
                row: index / self.cols.max(1),
                column: index % self.cols.max(1),
            }),
            None => Ok(()),
        }
    }

    /// The inverse of a square matrix by Gauss-Jordan elimination with partial pivoting.
    /// A pivot below n eps times the largest |entry| counts as zero (singular).
    ///
    /// # Panics
    /// When the matrix is not square.
    pub fn inverse(&self) -> Result<Matrix, LinalgError> {
        assert_eq!(
            self.rows, self.cols,
            "cannot invert a {}x{} matrix",
            self.rows, self.cols
        );
        self.check_finite()?;
        let n = self.rows;
        let mut work = self.clone();
        let mut inverse = Matrix::identity(n);
        let threshold = n as f64 * f64::EPSILON * self.max_abs();
        for column in 0..n {
            let (pivot_row, pivot_value) =
                (column..n)
                    .map(|row| (row, work[(row, column)].abs()))
                    .fold(
                        (column, -1.0),
                        |best, candidate| if candidate.1 > best.1 { candidate } else { best },
                    );
            if pivot_value <= threshold || pivot_value == 0.0 {
                return Err(LinalgError::Singular { rank: column, size: n });
            }
            if pivot_row != column {
                for j in 0..n {
                    work.data.swap(pivot_row * n + j, column * n + j);
                    inverse.data.swap(pivot_row * n + j, column * n + j);
                }
            }
            let pivot = work[(column, column)];
            for j in 0..n {
                work[(column, j)] /= pivot;
                inverse[(column, j)] /= pivot;
            }
            for row in 0..n {
                if row == column {
                    continue;
                }
                let factor = work[(row, column)];
                if factor == 0.0 {
                    continue;
                }
                for j in 0..n {
                    work.data[row * n + j] -= factor * work.data[column * n + j];
                    inverse.data[row * n + j] -= factor * inverse.data[column * n + j];
                }
            }
        }
        Ok(inverse)
    }
}

/// A matrix read row by row for [`weighted_row_sums`], whichever way it is stored.
trait Rows {
    /// Its number of columns.
    fn width(&self) -> usize;
    /// Row `i`'s first `C` entries; `C` is the width.
    fn row<const C: usize>(&self, i: usize) -> [f64; C];
    /// Adds row `i` times `weight` to `sums`, one sum per column.
    fn add_weighted_row(&self, i: usize, weight: f64, sums: &mut [f64]);
}

/// A row-major matrix: `data` holds its rows one after another, `cols` entries each.
struct RowMajor<'a> {
    data: &'a [f64],
    cols: usize,
}

impl Rows for RowMajor<'_> {
    fn width(&self) -> usize {
        self.cols
    }

    #[inline(always)]
    fn row<const C: usize>(&self, i: usize) -> [f64; C] {
        self.data[i * C..(i + 1) * C].try_into().expect("a row of C entries")
    }

    #[inline(always)]
    fn add_weighted_row(&self, i: usize, weight: f64, sums: &mut [f64]) {
        let row = &self.data[i * self.cols..(i + 1) * self.cols];
        for (sum, a) in sums.iter_mut().zip(row) {
            *sum += a * weight;
        }
    }
}

/// A matrix given by its columns, each cut to the rows used.
struct ColumnMajor<'a> {
    columns: &'a [&'a [f64]],
}

impl Rows for ColumnMajor<'_> {
    fn width(&self) -> usize {
        self.columns.len()
    }

    #[inline(always)]
    fn row<const C: usize>(&self, i: usize) -> [f64; C] {
        std::array::from_fn(|k| self.columns[k][i])
    }

    #[inline(always)]
    fn add_weighted_row(&self, i: usize, weight: f64, sums: &mut [f64]) {
        for (sum, column) in sums.iter_mut().zip(self.columns) {
            *sum += column[i] * weight;
        }
    }
}

/// A^T v for the matrix A that `rows` reads (`v` has one entry per row): every sum gathers
/// its terms row by row from 0.0, so the result is the same to the bit however A is stored.
/// Widths up to 8 (a fit's Jacobian) keep their sums in registers.
fn weighted_row_sums(rows: &impl Rows, v: &[f64]) -> Vec<f64> {
    match rows.width() {
        0 => Vec::new(),
        1 => weighted_row_sums_of::<1>(rows, v).to_vec(),
        2 => weighted_row_sums_of::<2>(rows, v).to_vec(),
        3 => weighted_row_sums_of::<3>(rows, v).to_vec(),
        4 => weighted_row_sums_of::<4>(rows, v).to_vec(),
        5 => weighted_row_sums_of::<5>(rows, v).to_vec(),
        6 => weighted_row_sums_of::<6>(rows, v).to_vec(),
        7 => weighted_row_sums_of::<7>(rows, v).to_vec(),
        8 => weighted_row_sums_of::<8>(rows, v).to_vec(),
        width => {
            let mut sums = vec![0.0; width];
            for (i, vi) in v.iter().enumerate() {
                rows.add_weighted_row(i, *vi, &mut sums);
            }
            sums
        }
    }
}

/// [`weighted_row_sums`] for a width of `C`.
#[inline(always)]
fn weighted_row_sums_of<const C: usize>(rows: &impl Rows, v: &[f64]) -> [f64; C] {
    let mut sums = [0.0; C];
    for (i, vi) in v.iter().enumerate() {
        let row = rows.row::<C>(i);
        for (sum, a) in sums.iter_mut().zip(row) {
            *sum += a * vi;
        }
    }
    sums
}

/// Whether every value is finite: the whole slice is read (no early exit), which lets the
/// test run on several values at once.
pub(crate) fn all_finite(values: &[f64]) -> bool {
    values.iter().fold(true, |finite, value| finite & value.is_finite())
}

/// The dot product of two equally long slices.
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    debug_assert_eq!(a.len(), b.len());
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// The dot products of `a` with each of `others`, each to the last bit what [`dot`] gives:
/// every product is summed in the same order from the same start (-0.0, the start of the
/// standard library's float sum). Walking the K sums together lets their additions overlap
/// in the processor's pipeline; a single sum waits on its previous addition at every term.
pub fn dots<const K: usize>(a: &[f64], others: [&[f64]; K]) -> [f64; K] {
    for other in &others {
        assert_eq!(a.len(), other.len(), "dot products of slices of unequal length");
    }
    let mut sums = [-0.0f64; K];
    for (i, x) in a.iter().enumerate() {
        for (sum, other) in sums.iter_mut().zip(&others) {
            *sum += x * other[i];
        }
    }
    sums
}

/// The Euclidean norm, scaled so that it neither overflows nor underflows.
pub fn norm(v: &[f64]) -> f64 {
    let scale = v.iter().fold(0.0f64, |largest, value| largest.max(value.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return scale;
    }
    scale
        * v.iter()
            .map(|value| (value / scale) * (value / scale))
            .sum::<f64>()
            .sqrt()
}

/// The Cholesky factor L (lower triangular) of a symmetric positive definite A = L L^T.
#[derive(Debug, Clone, PartialEq)]
pub struct Cholesky {
    lower: Matrix,
    jitter: f64,
}

/// The jitter ladder of [`Cholesky::with_jitter`]: multiples of the largest diagonal entry.
const JITTER_LADDER: [f64; 13] = [
    1e-14, 1e-13, 1e-12, 1e-11, 1e-10, 1e-9, 1e-8, 1e-7, 1e-6, 1e-5, 1e-4, 1e-3, 1e-2,
];

impl Cholesky {
    /// Factors `a`, reading its lower triangle (the upper one is assumed to mirror it).
    ///
    /// # Panics
    /// When `a` is not square.
    pub fn new(a: &Matrix) -> Result<Self, LinalgError> {
        assert_eq!(
            a.rows, a.cols,
            "Cholesky needs a square matrix, not {}x{}",
            a.rows, a.cols
        );
        a.check_finite()?;
        Self::factor(a, 0.0)
    }

    /// Factors `a`, or if it is not numerically positive definite, a + jitter I with the
    /// smallest jitter of the ladder 10^-14 ... 10^-2 times the largest diagonal entry that
    /// succeeds. [`Cholesky::jitter`] tells which (0 when none was needed).
    ///
    /// # Panics
    /// When `a` is not square.
    pub fn with_jitter(a: &Matrix) -> Result<Self, LinalgError> {
        assert_eq!(
            a.rows, a.cols,
            "Cholesky needs a square matrix, not {}x{}",
            a.rows, a.cols
        );
        a.check_finite()?;
        let first_failure = match Self::factor(a, 0.0) {
            Ok(factor) => return Ok(factor),
            Err(error) => error,
        };
        let scale = a.diagonal().iter().fold(0.0f64, |largest, value| largest.max(*value));
        if scale <= 0.0 {
            return Err(first_failure);
        }
        for multiple in JITTER_LADDER {
            if let Ok(factor) = Self::factor(a, multiple * scale) {
                return Ok(factor);
            }
        }
        Err(first_failure)
    }

    fn factor(a: &Matrix, jitter: f64) -> Result<Self, LinalgError> {
        let n = a.rows;
        let mut lower = Matrix::zeros(n, n);
        for j in 0..n {
            let mut diagonal = a[(j, j)] + jitter;
            for k in 0..j {
                diagonal -= lower[(j, k)] * lower[(j, k)];
            }
            if diagonal.is_nan() || diagonal <= 0.0 {
                return Err(LinalgError::NotPositiveDefinite {
                    pivot: j,
                    value: diagonal,
                });
            }
            let pivot = diagonal.sqrt();
            lower[(j, j)] = pivot;
            for i in j + 1..n {
                let mut value = a[(i, j)];
                for k in 0..j {
                    value -= lower[(i, k)] * lower[(j, k)];
                }
                lower[(i, j)] = value / pivot;
            }
        }
        Ok(Cholesky { lower, jitter })
    }

    /// The lower-triangular factor L.
    pub fn lower(&self) -> &Matrix {
        &self.lower
    }

    /// The multiple of the identity that was added before factoring (0 for an exact
    /// factor of the matrix given).
    pub fn jitter(&self) -> f64 {
        self.jitter
    }

    /// Solves A x = b by forward and back substitution.
    ///
    /// # Panics
    /// When `b` has the wrong length.
    pub fn solve(&self, b: &[f64]) -> Vec<f64> {
        let n = self.lower.rows;
        assert_eq!(
            b.len(),
            n,
            "right-hand side of {} entries for a {n}x{n} system",
            b.len()
        );
        let l = &self.lower;
        let mut y = b.to_vec();
        for i in 0..n {
            for k in 0..i {
                y[i] -= l[(i, k)] * y[k];
            }
            y[i] /= l[(i, i)];
        }
        for i in (0..n).rev() {
            for k in i + 1..n {
                y[i] -= l[(k, i)] * y[k];
            }
            y[i] /= l[(i, i)];
        }
        y
    }

    /// A^-1 (of the jittered matrix if a jitter was added).
    pub fn inverse(&self) -> Matrix {
        let n = self.lower.rows;
        let mut inverse = Matrix::zeros(n, n);
        let mut unit = vec![0.0; n];
        for j in 0..n {
            unit.iter_mut().for_each(|value| *value = 0.0);
            unit[j] = 1.0;
            let column = self.solve(&unit);
            for i in 0..n {
                inverse[(i, j)] = column[i];
            }
        }
        // Symmetrize: the two triangles differ only by rounding.
        for i in 0..n {
            for j in 0..i {
                let mean = 0.5 * (inverse[(i, j)] + inverse[(j, i)]);
                inverse[(i, j)] = mean;
                inverse[(j, i)] = mean;
            }
        }
        inverse
    }

    /// ln det A = 2 sum ln L_ii.
    pub fn ln_determinant(&self) -> f64 {
        2.0 * self.lower.diagonal().iter().map(|value| value.ln()).sum::<f64>()
    }
}

/// Householder QR of an m x n matrix with m >= n: A = Q R.
#[derive(Debug, Clone, PartialEq)]
pub struct Qr {
    /// R on and above the diagonal; the Householder vectors (without their leading 1)
    /// below it.
    packed: Matrix,
    /// The Householder coefficients beta_k of H_k = I - beta_k v_k v_k^T.
    betas: Vec<f64>,
    /// The diagonal of R.
    r_diagonal: Vec<f64>,
}

impl Qr {
    /// Factors `a`.
    ///
    /// # Panics
    /// When `a` has fewer rows than columns.
    pub fn new(a: &Matrix) -> Result<Self, LinalgError> {
        let (m, n) = (a.rows, a.cols);
        assert!(
            m >= n,
            "QR least squares needs at least as many rows as columns, not {m}x{n}"
        );
        a.check_finite()?;
        let mut packed = a.clone();
        let mut betas = vec![0.0; n];
        let mut r_diagonal = vec![0.0; n];
        for k in 0..n {
            let column: Vec<f64> = (k..m).map(|i| packed[(i, k)]).collect();
            let column_norm = norm(&column);
            if column_norm == 0.0 {
                betas[k] = 0.0;
                r_diagonal[k] = 0.0;
                continue;
            }
            // alpha takes the sign opposite to the leading entry, so v_0 = x_0 - alpha never
            // cancels.
            let alpha = if column[0] > 0.0 { -column_norm } else { column_norm };
            let v0 = column[0] - alpha;
            // v = (1, x_1/v0, x_2/v0, ...), beta = -v0 / alpha.
            for i in k + 1..m {
                packed[(i, k)] /= v0;
            }
            let beta = -v0 / alpha;
            betas[k] = beta;
            r_diagonal[k] = alpha;
            for j in k + 1..n {
                let mut projection = packed[(k, j)];
                for i in k + 1..m {
                    projection += packed[(i, k)] * packed[(i, j)];
                }
                projection *= beta;
                packed[(k, j)] -= projection;
                for i in k + 1..m {
                    let vi = packed[(i, k)];
                    packed[(i, j)] -= projection * vi;
                }
            }
            packed[(k, k)] = alpha;
        }
        Ok(Qr {
            packed,
            betas,
            r_diagonal,
        })
    }

    /// The n x n upper-triangular factor R.
    pub fn r(&self) -> Matrix {
        let n = self.packed.cols;
        Matrix::from_fn(n, n, |i, j| if j >= i { self.packed[(i, j)] } else { 0.0 })
    }

    /// Q^T b.
    ///
    /// # Panics
    /// When `b` does not have one entry per row.
    pub fn q_transpose_mul(&self, b: &[f64]) -> Vec<f64> {
        let (m, n) = (self.packed.rows, self.packed.cols);
        assert_eq!(b.len(), m, "a vector of {} for a QR of {m} rows", b.len());
        let mut result = b.to_vec();
        for k in 0..n {
            if self.betas[k] == 0.0 {
                continue;
            }
            let mut projection = result[k];
            for (i, value) in result.iter().enumerate().skip(k + 1) {
                projection += self.packed[(i, k)] * value;
            }
            projection *= self.betas[k];
            result[k] -= projection;
            for (i, value) in result.iter_mut().enumerate().skip(k + 1) {
                *value -= projection * self.packed[(i, k)];
            }
        }
        result
    }

    /// The x minimizing ||A x - b||. Refuses a rank-deficient A (a diagonal entry of R at
    /// or below n eps times the largest); use [`Svd::solve_least_squares`] for those.
    ///
    /// # Panics
    /// When `b` does not have one entry per row.
    pub fn solve_least_squares(&self, b: &[f64]) -> Result<Vec<f64>, LinalgError> {
        let n = self.packed.cols;
        let largest = self.r_diagonal.iter().fold(0.0f64, |acc, value| acc.max(value.abs()));
        let threshold = n as f64 * f64::EPSILON * largest;
        let rank = self.r_diagonal.iter().filter(|value| value.abs() > threshold).count();
        if rank < n || largest == 0.0 {
            return Err(LinalgError::Singular { rank, size: n });
        }
        let qtb = self.q_transpose_mul(b);
        let mut x = qtb[..n].to_vec();
        for i in (0..n).rev() {
            for j in i + 1..n {
                x[i] -= self.packed[(i, j)] * x[j];
            }
            x[i] /= self.packed[(i, i)];
        }
        Ok(x)
    }
}

/// The thin singular value decomposition A = U diag(s) V^T of an m x n matrix, k = min(m, n):
/// U is m x k, V is n x k, both with orthonormal columns (a column of U belonging to a zero
/// singular value is zero), s descending.
#[derive(Debug, Clone, PartialEq)]
pub struct Svd {
    u: Matrix,
    singular_values: Vec<f64>,
    v: Matrix,
}

/// What [`Svd::project_columns`] gives: the SVD of A without U, and U^T b.
#[derive(Debug, Clone, PartialEq)]
pub struct ProjectedSvd {
    /// Descending, as [`Svd::singular_values`].
    pub singular_values: Vec<f64>,
    /// As [`Svd::v`].
    pub v: Matrix,
    /// U^T b, as `u().transpose_mul_vec(b)`.
    pub projected: Vec<f64>,
}

/// The result of the Jacobi rotations: U's columns, the singular values and V, in the order
/// of the singular values.
struct Rotated {
    u_columns: Vec<Vec<f64>>,
    singular_values: Vec<f64>,
    v: Matrix,
}

/// Enough sweeps for any matrix of the sizes used here (quadratic convergence typically
/// ends in 6 to 10).
const JACOBI_MAX_SWEEPS: usize = 80;

impl Svd {
    /// Decomposes `a`.
    pub fn new(a: &Matrix) -> Result<Self, LinalgError> {
        a.check_finite()?;
        if a.rows < a.cols {
            let transposed = Svd::new(&a.transpose())?;
            return Ok(Svd {
                u: transposed.v,
                singular_values: transposed.singular_values,
                v: transposed.u,
            });
        }
        // Columns stored contiguously: the rotations act on pairs of columns.
        Svd::decompose(a.rows, (0..a.cols).map(|j| a.column(j)).collect())
    }

    /// [`Svd::new`] of the m x n matrix whose columns are `columns` (each of length m,
    /// m >= n): the same decomposition to the last bit, without building the matrix first,
    /// for callers that produce a matrix column by column (a scaled Jacobian).
    ///
    /// # Panics
    /// When a column's length is not `rows` or there are more columns than rows.
    pub fn from_columns(rows: usize, columns: Vec<Vec<f64>>) -> Result<Self, LinalgError> {
        Svd::check_columns(rows, &columns)?;
        Svd::decompose(rows, columns)
    }

    /// The checks of [`Svd::from_columns`]: the shape (a panic), then the first non-finite
    /// entry in row order, as [`Matrix::check_finite`] reports it, looked for only when a
    /// column holds one.
    fn check_columns(rows: usize, columns: &[Vec<f64>]) -> Result<(), LinalgError> {
        assert!(
            columns.len() <= rows && columns.iter().all(|column| column.len() == rows),
            "columns of unequal length or more columns than rows"
        );
        if !columns.iter().all(|column| all_finite(column)) {
            for i in 0..rows {
                if let Some(j) = columns.iter().position(|column| !column[i].is_finite()) {
                    return Err(LinalgError::NonFinite { row: i, column: j });
                }
            }
        }
        Ok(())
    }

    /// One-sided Jacobi on the columns of an m x n matrix, m >= n.
    fn decompose(m: usize, columns: Vec<Vec<f64>>) -> Result<Self, LinalgError> {
        let Rotated {
            u_columns,
            singular_values,
            v,
        } = Svd::rotate_columns(m, columns)?;
        // U written row by row from its columns.
        let n = u_columns.len();
        let mut u = Vec::with_capacity(m * n);
        for i in 0..m {
            u.extend(u_columns.iter().map(|column| column[i]));
        }
        let u = Matrix {
            rows: m,
            cols: n,
            data: u,
        };
        Ok(Svd { u, singular_values, v })
    }

    /// What a damped least-squares step (Levenberg-Marquardt) reads of the SVD of the m x n
    /// matrix whose columns are `columns` (as [`Svd::from_columns`]): the singular values, V
    /// and U^T b, without U. Each is the same to the last bit as that of
    /// [`Svd::from_columns`] followed by `u().transpose_mul_vec(b)`: U^T b is summed from U's
    /// columns in the same order, row by row from 0.0, so the m x n matrix U is never
    /// written (at every step of a fit on 10,000 points, half a megabyte written and read
    /// back across its rows).
    ///
    /// # Panics
    /// As [`Svd::from_columns`], and when `b` does not have `rows` entries.
    pub fn project_columns(rows: usize, columns: Vec<Vec<f64>>, b: &[f64]) -> Result<ProjectedSvd, LinalgError> {
        assert_eq!(b.len(), rows, "U^T b needs one entry of b per row");
        Svd::check_columns(rows, &columns)?;
        let Rotated {
            u_columns,
            singular_values,
            v,
        } = Svd::rotate_columns(rows, columns)?;
        let columns: Vec<&[f64]> = u_columns.iter().map(|column| &column[..rows]).collect();
        let projected = weighted_row_sums(&ColumnMajor { columns: &columns }, b);
        Ok(ProjectedSvd {
            singular_values,
            v,
            projected,
        })
    }

    /// The rotations of the one-sided Jacobi method on the columns of an m x n matrix,
    /// m >= n, then the singular values in descending order, U's columns (the rotated
    /// columns over their singular values) and V in that order.
    fn rotate_columns(m: usize, mut columns: Vec<Vec<f64>>) -> Result<Rotated, LinalgError> {
        let n = columns.len();
        let mut v_columns: Vec<Vec<f64>> = (0..n)
            .map(|j| (0..n).map(|i| if i == j { 1.0 } else { 0.0 }).collect())
            .collect();
        // Orthogonal to rounding: |c_p . c_q| <= sqrt(m) eps ||c_p|| ||c_q||, the threshold of
        // LAPACK's dgesvj (a dot product of m terms carries about sqrt(m) eps of rounding, so
        // a stricter test could chase rounding forever).
        let tolerance = (m as f64).sqrt().max(1.0) * f64::EPSILON;
        let mut converged = n < 2;
        // The squared norm of each column as `dot` gives it, kept while the column is not
        // rotated: the same value a fresh `dot` would return, so caching it changes no
        // result, and late sweeps (few rotations) then need one product per pair, not three.
        let mut squared: Vec<Option<f64>> = vec![None; n];
        // Products of column p with the next columns, computed up to four at a time while
        // column p stands (see `ahead_of`): `ahead[q - ready.start]` for q in `ready`.
        let mut ahead = [0.0f64; 4];
        for _ in 0..JACOBI_MAX_SWEEPS {
            let mut rotated = false;
            for p in 0..n {
                let mut ready = 0..0;
                for q in p + 1..n {
                    let (alpha, beta, gamma) = match (squared[p], squared[q]) {
                        (Some(alpha), Some(beta)) => {
                            if !ready.contains(&q) {
                                ready = ahead_of(&columns, p, q, &mut ahead);
                            }
                            (alpha, beta, ahead[q - ready.start])
                        }
                        (Some(alpha), None) => {
                            let (beta, gamma) = dot_pair(&columns[q], &columns[p]);
                            (alpha, beta, gamma)
                        }
                        (None, Some(beta)) => {
                            let (alpha, gamma) = dot_pair(&columns[p], &columns[q]);
                            (alpha, beta, gamma)
                        }
                        (None, None) => dot_triple(&columns[p], &columns[q]),
                    };
                    squared[p] = Some(alpha);
                    squared[q] = Some(beta);
                    if gamma == 0.0 || gamma.abs() <= tolerance * alpha.sqrt() * beta.sqrt() {
                        continue;
                    }
                    squared[p] = None;
                    squared[q] = None;
                    rotated = true;
                    // Column p changes: the products computed ahead are stale.
                    ready = 0..0;
                    // The rotation that makes columns p and q orthogonal:
                    // tan(theta) = t, the smaller root of t^2 + 2 zeta t - 1 = 0.
                    let zeta = (beta - alpha) / (2.0 * gamma);
                    let t = zeta.signum() / (zeta.abs() + 1.0f64.hypot(zeta));
                    let c = 1.0 / 1.0f64.hypot(t);
                    let s = c * t;
                    let (left, right) = columns.split_at_mut(q);
                    rotate(&mut left[p], &mut right[0], c, s);
                    let (left, right) = v_columns.split_at_mut(q);
                    rotate(&mut left[p], &mut right[0], c, s);
                }
            }
            if !rotated {
                converged = true;
                break;
            }
        }
        if !converged {
            return Err(LinalgError::NoConvergence {
                sweeps: JACOBI_MAX_SWEEPS,
            });
        }
        let mut order: Vec<(usize, f64)> = columns.iter().map(|column| norm(column)).enumerate().collect();
        order.sort_by(|a, b| b.1.total_cmp(&a.1));
        let singular_values: Vec<f64> = order.iter().map(|&(_, sigma)| sigma).collect();
        // The columns of U are the rotated columns over their singular values (zero for a
        // zero one), in the order of the singular values; V is written row by row.
        let mut slots: Vec<Option<Vec<f64>>> = columns.into_iter().map(Some).collect();
        let u_columns: Vec<Vec<f64>> = order
            .iter()
            .map(|&(source, sigma)| {
                let mut column = slots[source].take().expect("each column once");
                if sigma > 0.0 {
                    column.iter_mut().for_each(|value| *value /= sigma);
                } else {
                    column.fill(0.0);
                }
                column
            })
            .collect();
        let v_sources: Vec<&[f64]> = order.iter().map(|&(source, _)| &v_columns[source][..n]).collect();
        let mut v = Vec::with_capacity(n * n);
        for i in 0..n {
            v.extend(v_sources.iter().map(|column| column[i]));
        }
        Ok(Rotated {
            u_columns,
            singular_values,
            v: Matrix {
                rows: n,
                cols: n,
                data: v,
            },
        })
    }

    pub fn u(&self) -> &Matrix {
        &self.u
    }

    /// The singular values, largest first.
    pub fn singular_values(&self) -> &[f64] {
        &self.singular_values
    }

    pub fn v(&self) -> &Matrix {
        &self.v
    }

    /// s_max / s_min (infinite for a singular matrix).
    pub fn condition_number(&self) -> f64 {
        match (self.singular_values.first(), self.singular_values.last()) {
            (Some(largest), Some(smallest)) if *smallest > 0.0 => largest / smallest,
            _ => f64::INFINITY,
        }
    }

    /// How many singular values exceed `relative_tolerance` times the largest.
    pub fn rank(&self, relative_tolerance: f64) -> usize {
        let threshold = relative_tolerance * self.singular_values.first().copied().unwrap_or(0.0);
        self.singular_values
            .iter()
            .filter(|s| **s > threshold && **s > 0.0)
            .count()
    }

    /// The minimum-norm x minimizing ||A x - b||, with singular values at or below
    /// `relative_tolerance` times the largest treated as zero.
    ///
    /// # Panics
    /// When `b` does not have one entry per row of A.
    pub fn solve_least_squares(&self, b: &[f64], relative_tolerance: f64) -> Vec<f64> {
        let utb = self.u.transpose_mul_vec(b);
        let rank = self.rank(relative_tolerance);
        let coefficients: Vec<f64> = (0..self.singular_values.len())
            .map(|k| {
                if k < rank {
                    utb[k] / self.singular_values[k]
                } else {
                    0.0
                }
            })
            .collect();
        self.v.mul_vec(&coefficients)
    }

    /// The Moore-Penrose pseudo-inverse V diag(1/s) U^T, singular values at or below
    /// `relative_tolerance` times the largest dropped.
    pub fn pseudo_inverse(&self, relative_tolerance: f64) -> Matrix {
        let rank = self.rank(relative_tolerance);
        let (n, m) = (self.v.rows, self.u.rows);
        Matrix::from_fn(n, m, |i, j| {
            (0..rank)
                .map(|k| self.v[(i, k)] * self.u[(j, k)] / self.singular_values[k])
                .sum()
        })
    }
}

/// (a . a, a . b) in one pass, each sum in the order of [`dot`] (so the values are the
/// same to the last bit): the two chains of additions interleave, which is what makes it
/// faster than two passes.
fn dot_pair(a: &[f64], b: &[f64]) -> (f64, f64) {
    debug_assert_eq!(a.len(), b.len());
    // -0.0 is the start of the standard library's float sum, which `dot` uses.
    let (mut aa, mut ab) = (-0.0, -0.0);
    for (x, y) in a.iter().zip(b) {
        aa += x * x;
        ab += x * y;
    }
    (aa, ab)
}

/// (a . a, b . b, a . b) in one pass, as [`dot_pair`].
fn dot_triple(a: &[f64], b: &[f64]) -> (f64, f64, f64) {
    debug_assert_eq!(a.len(), b.len());
    let (mut aa, mut bb, mut ab) = (-0.0, -0.0, -0.0);
    for (x, y) in a.iter().zip(b) {
        aa += x * x;
        bb += y * y;
        ab += x * y;
    }
    (aa, bb, ab)
}

/// The products of column p with columns q, q + 1, ... (up to four, as many as there are)
/// into `ahead`, each equal to `dot` of the two columns to the last bit; returns the range
/// of q they cover. In the late sweeps of the Jacobi SVD most pairs need no rotation, so
/// the products of one column with the next few are all used while it stands, and four
/// sums walked together cost about what one does (each addition waits on its sum's last).
fn ahead_of(columns: &[Vec<f64>], p: usize, q: usize, ahead: &mut [f64; 4]) -> std::ops::Range<usize> {
    let own = &columns[p];
    let count = (columns.len() - q).min(4);
    match count {
        4 => *ahead = dots(own, [&columns[q], &columns[q + 1], &columns[q + 2], &columns[q + 3]]),
        3 => ahead[..3].copy_from_slice(&dots(own, [&columns[q], &columns[q + 1], &columns[q + 2]])),
        2 => ahead[..2].copy_from_slice(&dots(own, [&columns[q], &columns[q + 1]])),
        _ => ahead[0] = dot(own, &columns[q]),
    }
    q..q + count
}

/// Applies the plane rotation (c, s) to the column pair (p, q).
fn rotate(p: &mut [f64], q: &mut [f64], c: f64, s: f64) {
    for (a, b) in p.iter_mut().zip(q.iter_mut()) {
        let (x, y) = (*a, *b);
        *a = c * x - s * y;
        *b = s * x + c * y;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::noise::Rng;

    #[test]
    fn fused_products_equal_dot_to_the_bit() {
        let mut rng = Rng::seeded(5);
        for len in [0, 1, 7, 280, 1001] {
            let a: Vec<f64> = (0..len).map(|_| rng.standard_normal() * 1e3).collect();
            let b: Vec<f64> = (0..len).map(|_| rng.standard_normal() * 1e-3).collect();
            let (aa, bb, ab) = dot_triple(&a, &b);
            assert_eq!(aa.to_bits(), dot(&a, &a).to_bits());
            assert_eq!(bb.to_bits(), dot(&b, &b).to_bits());
            assert_eq!(ab.to_bits(), dot(&a, &b).to_bits());
            let (aa, ab) = dot_pair(&a, &b);
            assert_eq!(
                (aa.to_bits(), ab.to_bits()),
                (dot(&a, &a).to_bits(), dot(&a, &b).to_bits())
            );
            let c: Vec<f64> = b.iter().map(|v| -v * 7.0).collect();
            let products = dots(&a, [&a, &b, &c, &a]);
            let expected = [dot(&a, &a), dot(&a, &b), dot(&a, &c), dot(&a, &a)];
            assert_eq!(products.map(f64::to_bits), expected.map(f64::to_bits));
        }
    }

    #[test]
    fn transposed_products_and_columns_equal_their_definitions_to_the_bit() {
        let mut rng = Rng::seeded(21);
        for cols in 1..=10 {
            let a = random_matrix(&mut rng, 37, cols);
            let v: Vec<f64> = (0..37).map(|_| rng.standard_normal()).collect();
            // (A^T v)_j summed over the rows in order, from 0.
            let mut expected = vec![0.0; cols];
            for (i, vi) in v.iter().enumerate() {
                for (j, sum) in expected.iter_mut().enumerate() {
                    *sum += a[(i, j)] * vi;
                }
            }
            let bits = |values: Vec<f64>| values.into_iter().map(f64::to_bits).collect::<Vec<_>>();
            assert_eq!(bits(a.transpose_mul_vec(&v)), bits(expected), "{cols} columns");
            for j in 0..cols {
                assert_eq!(a.column(j), (0..37).map(|i| a[(i, j)]).collect::<Vec<_>>());
            }
        }
        assert!(all_finite(&[1.0, -0.0, f64::MAX]));
        assert!(!all_finite(&[1.0, f64::NAN]) && !all_finite(&[f64::NEG_INFINITY]));
    }

    fn assert_matrix_close(actual: &Matrix, expected: &Matrix, tolerance: f64) {
        assert_eq!((actual.rows(), actual.cols()), (expected.rows(), expected.cols()));
        for i in 0..actual.rows() {
            for j in 0..actual.cols() {
                assert!(
                    (actual[(i, j)] - expected[(i, j)]).abs() <= tolerance,
                    "({i}, {j}): {} vs {}\n{actual:?}\n{expected:?}",
                    actual[(i, j)],
                    expected[(i, j)]
                );
            }
        }
    }

    fn random_matrix(rng: &mut Rng, rows: usize, cols: usize) -> Matrix {
        Matrix::from_fn(rows, cols, |_, _| rng.standard_normal())
    }

    /// The Hilbert matrix H_ij = 1/(i + j + 1): the classic ill-conditioned example
    /// (condition number about 1.5e7 for n = 6, from memory of the usual tables).
    fn hilbert(rows: usize, cols: usize) -> Matrix {
        Matrix::from_fn(rows, cols, |i, j| 1.0 / (i + j + 1) as f64)
    }

    #[test]
    fn linalg_products_and_transpose() {
        let a = Matrix::from_rows(&[[1.0, 2.0, 3.0], [4.0, 5.0, 6.0]]);
        let b = Matrix::from_rows(&[[1.0, 0.0], [0.0, 1.0], [1.0, 1.0]]);
        assert_eq!(a.matmul(&b), Matrix::from_rows(&[[4.0, 5.0], [10.0, 11.0]]));
        assert_eq!(a.mul_vec(&[1.0, 1.0, 1.0]), vec![6.0, 15.0]);
        assert_eq!(a.transpose_mul_vec(&[1.0, 1.0]), vec![5.0, 7.0, 9.0]);
        assert_eq!(a.gram(), a.transpose().matmul(&a));
        assert_eq!(a.transpose().transpose(), a);
        assert!((norm(&[3e200, 4e200]) - 5e200).abs() < 1e186);
        assert_eq!(norm(&[0.0, 0.0]), 0.0);
    }

    #[test]
    fn linalg_inverse_of_a_known_matrix() {
        // [[4, 7], [2, 6]]^-1 = [[0.6, -0.7], [-0.2, 0.4]] (det 10).
        let a = Matrix::from_rows(&[[4.0, 7.0], [2.0, 6.0]]);
        assert_matrix_close(
            &a.inverse().unwrap(),
            &Matrix::from_rows(&[[0.6, -0.7], [-0.2, 0.4]]),
            1e-15,
        );
        // A zero leading entry needs the pivoting.
        let permutation = Matrix::from_rows(&[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [1.0, 0.0, 0.0]]);
        assert_eq!(permutation.inverse().unwrap(), permutation.transpose());
        let mut rng = Rng::seeded(11);
        let random = random_matrix(&mut rng, 6, 6);
        assert_matrix_close(&random.matmul(&random.inverse().unwrap()), &Matrix::identity(6), 1e-12);
        let singular = Matrix::from_rows(&[[1.0, 2.0], [2.0, 4.0]]);
        assert!(matches!(
            singular.inverse(),
            Err(LinalgError::Singular { rank: 1, size: 2 })
        ));
        let not_finite = Matrix::from_rows(&[[1.0, f64::NAN], [0.0, 1.0]]);
        assert_eq!(not_finite.inverse(), Err(LinalgError::NonFinite { row: 0, column: 1 }));
    }

    #[test]
    fn linalg_cholesky_factors_solves_and_inverts() {
        // [[4, 12, -16], [12, 37, -43], [-16, -43, 98]] = L L^T with
        // L = [[2, 0, 0], [6, 1, 0], [-8, 5, 3]] (the usual textbook example, checked by
        // multiplying out).
        let a = Matrix::from_rows(&[[4.0, 12.0, -16.0], [12.0, 37.0, -43.0], [-16.0, -43.0, 98.0]]);
        let factor = Cholesky::new(&a).unwrap();
        assert_eq!(
            factor.lower(),
            &Matrix::from_rows(&[[2.0, 0.0, 0.0], [6.0, 1.0, 0.0], [-8.0, 5.0, 3.0]])
        );
        assert_eq!(factor.jitter(), 0.0);
        // det A = (2 * 1 * 3)^2 = 36.
        assert!((factor.ln_determinant() - 36f64.ln()).abs() < 1e-12);
        let x = factor.solve(&[1.0, 2.0, 3.0]);
        let back = a.mul_vec(&x);
        for (got, want) in back.iter().zip([1.0, 2.0, 3.0]) {
            assert!((got - want).abs() < 1e-10);
        }
        assert_matrix_close(&a.matmul(&factor.inverse()), &Matrix::identity(3), 1e-10);
        assert_matrix_close(&factor.inverse(), &a.inverse().unwrap(), 1e-10);
    }

    #[test]
    fn linalg_cholesky_refuses_indefinite_and_jitter_rescues_semidefinite() {
        let indefinite = Matrix::from_rows(&[[1.0, 2.0], [2.0, 1.0]]);
        assert!(matches!(
            Cholesky::new(&indefinite),
            Err(LinalgError::NotPositiveDefinite { pivot: 1, .. })
        ));
        // Still indefinite with any jitter up to 1e-2 of the diagonal.
        assert!(Cholesky::with_jitter(&indefinite).is_err());
        // Rank one, positive semidefinite: v v^T with v = (1, 2, 3).
        let v = [1.0, 2.0, 3.0];
        let semidefinite = Matrix::from_fn(3, 3, |i, j| v[i] * v[j]);
        assert!(Cholesky::new(&semidefinite).is_err());
        let factor = Cholesky::with_jitter(&semidefinite).unwrap();
        assert!(factor.jitter() > 0.0 && factor.jitter() <= 1e-2 * 9.0);
        // The factor reproduces the jittered matrix.
        let product = factor.lower().matmul(&factor.lower().transpose());
        let mut jittered = semidefinite.clone();
        for i in 0..3 {
            jittered[(i, i)] += factor.jitter();
        }
        assert_matrix_close(&product, &jittered, 1e-12);
    }

    #[test]
    fn linalg_qr_reconstructs_and_solves_least_squares() {
        let mut rng = Rng::seeded(5);
        let a = random_matrix(&mut rng, 9, 4);
        let qr = Qr::new(&a).unwrap();
        // R^T R = A^T A (Q orthogonal).
        let r = qr.r();
        assert_matrix_close(&r.transpose().matmul(&r), &a.gram(), 1e-12);
        // Least squares agrees with the normal equations on a well-conditioned problem.
        let b: Vec<f64> = (0..9).map(|_| rng.standard_normal()).collect();
        let x = qr.solve_least_squares(&b).unwrap();
        let normal = Cholesky::new(&a.gram()).unwrap().solve(&a.transpose_mul_vec(&b));
        for (got, want) in x.iter().zip(&normal) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        // An exactly consistent system is solved exactly.
        let truth = [1.0, -2.0, 0.5, 3.0];
        let consistent = a.mul_vec(&truth);
        let recovered = qr.solve_least_squares(&consistent).unwrap();
        for (got, want) in recovered.iter().zip(truth) {
            assert!((got - want).abs() < 1e-13);
        }
        // Two equal columns: refused.
        let dependent = Matrix::from_fn(5, 2, |i, _| i as f64 + 1.0);
        assert!(matches!(
            Qr::new(&dependent).unwrap().solve_least_squares(&[1.0; 5]),
            Err(LinalgError::Singular { rank: 1, size: 2 })
        ));
    }

    #[test]
    fn linalg_svd_of_a_known_matrix() {
        // [[3, 0], [4, 5]]: A^T A = [[25, 20], [20, 25]] has eigenvalues 45 and 5, so the
        // singular values are 3 sqrt(5) and sqrt(5) (computed by hand).
        let a = Matrix::from_rows(&[[3.0, 0.0], [4.0, 5.0]]);
        let svd = Svd::new(&a).unwrap();
        assert!((svd.singular_values()[0] - 3.0 * 5f64.sqrt()).abs() < 1e-14);
        assert!((svd.singular_values()[1] - 5f64.sqrt()).abs() < 1e-14);
        assert!((svd.condition_number() - 3.0).abs() < 1e-14);
    }

    #[test]
    fn linalg_svd_reconstructs_with_orthonormal_factors() {
        let mut rng = Rng::seeded(17);
        for (rows, cols) in [(7, 3), (3, 7), (5, 5), (40, 6)] {
            let a = random_matrix(&mut rng, rows, cols);
            let svd = Svd::new(&a).unwrap();
            let k = rows.min(cols);
            let s = Matrix::from_diagonal(svd.singular_values());
            let rebuilt = svd.u().matmul(&s).matmul(&svd.v().transpose());
            assert_matrix_close(&rebuilt, &a, 1e-12);
            assert_matrix_close(&svd.u().gram(), &Matrix::identity(k), 1e-12);
            assert_matrix_close(&svd.v().gram(), &Matrix::identity(k), 1e-12);
            assert!(svd.singular_values().windows(2).all(|pair| pair[0] >= pair[1]));
            // The pseudo-inverse of a full-rank matrix: A A+ A = A.
            let pinv = svd.pseudo_inverse(1e-12);
            assert_matrix_close(&a.matmul(&pinv).matmul(&a), &a, 1e-11);
        }
    }

    /// The cyclic one-sided Jacobi method as written in the textbooks (Demmel and Veselic,
    /// SIAM J. Matrix Anal. Appl. 13, 1204, 1992, cited from memory): every pair's three products computed
    /// afresh, then the rotation. [`Svd`] keeps norms that did not change and computes
    /// products ahead; it must give the same numbers to the last bit.
    fn plain_jacobi(a: &Matrix) -> (Vec<Vec<f64>>, Vec<Vec<f64>>) {
        let (m, n) = (a.rows(), a.cols());
        let mut columns: Vec<Vec<f64>> = (0..n).map(|j| a.column(j)).collect();
        let mut v: Vec<Vec<f64>> = (0..n)
            .map(|j| (0..n).map(|i| if i == j { 1.0 } else { 0.0 }).collect())
            .collect();
        let tolerance = (m as f64).sqrt().max(1.0) * f64::EPSILON;
        for _ in 0..JACOBI_MAX_SWEEPS {
            let mut rotated = false;
            for p in 0..n {
                for q in p + 1..n {
                    let alpha = dot(&columns[p], &columns[p]);
                    let beta = dot(&columns[q], &columns[q]);
                    let gamma = dot(&columns[p], &columns[q]);
                    if gamma == 0.0 || gamma.abs() <= tolerance * alpha.sqrt() * beta.sqrt() {
                        continue;
                    }
                    rotated = true;
                    let zeta = (beta - alpha) / (2.0 * gamma);
                    let t = zeta.signum() / (zeta.abs() + 1.0f64.hypot(zeta));
                    let c = 1.0 / 1.0f64.hypot(t);
                    let s = c * t;
                    let (left, right) = columns.split_at_mut(q);
                    rotate(&mut left[p], &mut right[0], c, s);
                    let (left, right) = v.split_at_mut(q);
                    rotate(&mut left[p], &mut right[0], c, s);
                }
            }
            if !rotated {
                break;
            }
        }
        (columns, v)
    }

    #[test]
    fn linalg_svd_equals_the_plain_jacobi_method_to_the_bit() {
        let mut rng = Rng::seeded(23);
        for (rows, cols) in [(2, 2), (9, 3), (40, 5), (301, 5), (1000, 7), (64, 10)] {
            let mut a = random_matrix(&mut rng, rows, cols);
            // Columns of very different sizes and two nearly parallel ones, as a fit's
            // scaled Jacobian has.
            for i in 0..rows {
                a[(i, 0)] *= 1e3;
                if cols > 2 {
                    a[(i, 2)] = a[(i, 1)] + 1e-6 * a[(i, 2)];
                }
            }
            let (columns, v) = plain_jacobi(&a);
            let mut expected: Vec<(f64, usize)> = columns.iter().map(|column| (norm(column), 0)).collect();
            for (j, entry) in expected.iter_mut().enumerate() {
                entry.1 = j;
            }
            expected.sort_by(|x, y| y.0.total_cmp(&x.0));
            let svd = Svd::new(&a).unwrap();
            for (k, &(sigma, source)) in expected.iter().enumerate() {
                assert_eq!(
                    svd.singular_values()[k].to_bits(),
                    sigma.to_bits(),
                    "{rows}x{cols}: s{k}"
                );
                for (i, value) in columns[source].iter().enumerate() {
                    assert_eq!(svd.u()[(i, k)].to_bits(), (value / sigma).to_bits());
                }
                for (i, value) in v[source].iter().enumerate() {
                    assert_eq!(svd.v()[(i, k)].to_bits(), value.to_bits());
                }
            }
        }
    }

    #[test]
    fn linalg_columns_are_the_columns_one_by_one() {
        let mut rng = Rng::seeded(31);
        for (rows, cols) in [(0, 3), (1, 1), (7, 3), (40, 5)] {
            let a = random_matrix(&mut rng, rows, cols);
            let one_by_one: Vec<Vec<f64>> = (0..cols).map(|j| a.column(j)).collect();
            assert_eq!(a.columns(), one_by_one, "{rows}x{cols}");
        }
    }

    /// The decomposition without U gives the singular values, V and U^T b of the full one to
    /// the bit: narrow and wide matrices (the summing paths of 1 to 8 columns and the general
    /// one), columns 1e3 apart in size, and a zero column (a zero singular value).
    #[test]
    fn linalg_svd_projection_equals_the_full_decomposition_to_the_bit() {
        let mut rng = Rng::seeded(29);
        for (rows, cols) in [(3, 1), (9, 2), (40, 5), (301, 5), (1000, 8), (64, 10)] {
            let mut a = random_matrix(&mut rng, rows, cols);
            for i in 0..rows {
                a[(i, 0)] *= 1e3;
                if cols > 3 {
                    a[(i, 3)] = 0.0;
                }
            }
            let b: Vec<f64> = (0..rows).map(|_| rng.normal(0.0, 1.0)).collect();
            let columns: Vec<Vec<f64>> = (0..cols).map(|j| a.column(j)).collect();
            let full = Svd::from_columns(rows, columns.clone()).unwrap();
            let projected = Svd::project_columns(rows, columns, &b).unwrap();
            let bits = |values: &[f64]| values.iter().map(|value| value.to_bits()).collect::<Vec<u64>>();
            assert_eq!(
                bits(&projected.singular_values),
                bits(full.singular_values()),
                "{rows}x{cols}"
            );
            assert_eq!(bits(projected.v.as_slice()), bits(full.v().as_slice()), "{rows}x{cols}");
            assert_eq!(
                bits(&projected.projected),
                bits(&full.u().transpose_mul_vec(&b)),
                "{rows}x{cols}"
            );
        }
    }

    #[test]
    fn linalg_svd_least_squares_handles_rank_deficiency() {
        // Columns 0 and 1 equal: the minimum-norm solution splits their coefficient.
        let a = Matrix::from_fn(6, 3, |i, j| match j {
            0 | 1 => 1.0 + i as f64,
            _ => (i as f64).powi(2),
        });
        let b: Vec<f64> = (0..6)
            .map(|i| 2.0 * (1.0 + i as f64) + 0.5 * (i as f64).powi(2))
            .collect();
        let svd = Svd::new(&a).unwrap();
        assert_eq!(svd.rank(1e-12), 2);
        let x = svd.solve_least_squares(&b, 1e-12);
        assert!((x[0] - 1.0).abs() < 1e-12 && (x[1] - 1.0).abs() < 1e-12, "{x:?}");
        assert!((x[2] - 0.5).abs() < 1e-12);
    }

    #[test]
    fn linalg_svd_least_squares_on_an_ill_conditioned_problem() {
        // Polynomial fit on the Hilbert-like design: a consistent right-hand side built from
        // known coefficients is recovered through the SVD far better than through the
        // normal equations, whose condition number is squared.
        let a = hilbert(12, 6);
        let truth = [1.0, -1.0, 2.0, 0.5, -0.25, 1.5];
        let b = a.mul_vec(&truth);
        let svd = Svd::new(&a).unwrap();
        assert!(svd.condition_number() > 1e6);
        let x = svd.solve_least_squares(&b, 1e-15);
        for (got, want) in x.iter().zip(truth) {
            assert!((got - want).abs() < 1e-6, "{got} vs {want}");
        }
        let qr_x = Qr::new(&a).unwrap().solve_least_squares(&b).unwrap();
        for (got, want) in qr_x.iter().zip(truth) {
            assert!((got - want).abs() < 1e-6, "{got} vs {want}");
        }
    }
}
