//! Validation, the field window, background removal and resampling on a uniform 1/B grid
//! (steps 1 to 4 of the parent module's documentation).

use mobilis_numerics::linalg::Matrix;

use super::error::OscillationError;
use super::settings::{Background, OscillationSettings, OscillationSweep};

/// Fewest points of a sweep inside the field window.
pub const MIN_WINDOW_POINTS: usize = 16;

/// Fewest points a local fit of the smoothing background may use.
const MIN_SMOOTHING_POINTS: usize = 5;

/// A sweep restricted to the window, ordered by increasing 1/B, with its background.
#[derive(Debug, Clone)]
pub(super) struct Prepared {
    pub temperature_k: f64,
    /// 1/B, ascending (so B descending).
    pub inverse_field: Vec<f64>,
    pub field_t: Vec<f64>,
    pub rho_xx: Vec<f64>,
    pub background: Vec<f64>,
    /// rho_xx - background (the background as last updated).
    pub oscillation: Vec<f64>,
    /// The oscillation on the uniform 1/B grid, mean removed (from the first background).
    pub grid_values: Vec<f64>,
    pub model: BackgroundModel,
    /// (I - P) rho_xx for a polynomial background: what the joint fits compare the
    /// projected model with.
    pub projected: Vec<f64>,
    /// Consecutive points averaged into one for the fits (1: the sweep as measured; see
    /// [`condense_sweep`]).
    pub merged_points: usize,
}

/// The background as a linear operator on a sweep's values.
#[derive(Debug, Clone)]
pub(super) enum BackgroundModel {
    /// Orthogonal projection P = Q Q^T onto the polynomials of the degree, Q orthonormal
    /// columns over the sweep's points.
    Projection { basis: Vec<Vec<f64>> },
    /// The local quadratic smoother of this half-width in 1/B.
    Smoothing { half_width: f64 },
}

impl Prepared {
    /// What the fits compare their (projected) model with: (I - P) rho_xx for a polynomial
    /// background, rho_xx - background for a smoothing one.
    pub fn fit_target(&self) -> &[f64] {
        match self.model {
            BackgroundModel::Projection { .. } => &self.projected,
            BackgroundModel::Smoothing { .. } => &self.oscillation,
        }
    }

    /// The polynomial basis, when the background is a projection.
    pub fn projection(&self) -> Option<&[Vec<f64>]> {
        match &self.model {
            BackgroundModel::Projection { basis } => Some(basis),
            BackgroundModel::Smoothing { .. } => None,
        }
    }

    /// Re-estimates the background with the oscillation model taken out:
    /// background = B(rho_xx - model), oscillation = rho_xx - background.
    pub fn update_background(&mut self, oscillation_model: &[f64]) -> Result<(), OscillationError> {
        let difference: Vec<f64> = self.rho_xx.iter().zip(oscillation_model).map(|(r, m)| r - m).collect();
        self.background = match &self.model {
            BackgroundModel::Projection { basis } => project(basis, &difference),
            BackgroundModel::Smoothing { half_width } => {
                smoothing_background(&self.inverse_field, &difference, *half_width)?
            }
        };
        self.oscillation = self.rho_xx.iter().zip(&self.background).map(|(r, b)| r - b).collect();
        Ok(())
    }
}

/// Q Q^T v.
pub(super) fn project(basis: &[Vec<f64>], values: &[f64]) -> Vec<f64> {
    let mut result = vec![0.0; values.len()];
    for column in basis {
        let coefficient: f64 = column.iter().zip(values).map(|(q, v)| q * v).sum();
        for (r, q) in result.iter_mut().zip(column) {
            *r += coefficient * q;
        }
    }
    result
}

/// v <- v - Q Q^T v.
pub(super) fn project_out(basis: &[Vec<f64>], values: &mut [f64]) {
    for column in basis {
        let coefficient: f64 = column.iter().zip(values.iter()).map(|(q, v)| q * v).sum();
        for (v, q) in values.iter_mut().zip(column) {
            *v -= coefficient * q;
        }
    }
}

/// [`project_out`] of each of the `width` columns of a row-major block (row i of the block
/// is `rows[i * width..(i + 1) * width]`, one row per basis point), in place: every column
/// gets the same operations in the same order as [`project_out`] gives it alone, so the
/// results agree to the last bit. The columns' sums are walked together, row by row, so that
/// their additions overlap (a single sum waits on its previous addition at every term) and
/// no column is copied out of the block and back.
pub(super) fn project_out_rows(basis: &[Vec<f64>], rows: &mut [f64], width: usize) {
    debug_assert!(width == 0 || basis.iter().all(|column| column.len() * width == rows.len()));
    // The fits' widths (4 or 5 parameters per line, one or two lines) get loops the
    // compiler unrolls; any other width takes the general loop, with the same arithmetic.
    match width {
        0 => {}
        4 => project_out_fixed::<4>(basis, rows),
        5 => project_out_fixed::<5>(basis, rows),
        8 => project_out_fixed::<8>(basis, rows),
        10 => project_out_fixed::<10>(basis, rows),
        _ => {
            let mut coefficients = vec![-0.0f64; width];
            for column in basis {
                // -0.0 is the start of the standard library's float sum, which `project_out`
                // uses.
                coefficients.fill(-0.0);
                for (q, row) in column.iter().zip(rows.chunks_exact(width)) {
                    for (sum, v) in coefficients.iter_mut().zip(row) {
                        *sum += q * v;
                    }
                }
                for (q, row) in column.iter().zip(rows.chunks_exact_mut(width)) {
                    for (v, coefficient) in row.iter_mut().zip(&coefficients) {
                        *v -= coefficient * q;
                    }
                }
            }
        }
    }
}

/// [`project_out_rows`] for a width known at compile time.
fn project_out_fixed<const W: usize>(basis: &[Vec<f64>], rows: &mut [f64]) {
    for column in basis {
        let mut coefficients = [-0.0f64; W];
        for (q, row) in column.iter().zip(rows.chunks_exact(W)) {
            for k in 0..W {
                coefficients[k] += q * row[k];
            }
        }
        for (q, row) in column.iter().zip(rows.chunks_exact_mut(W)) {
            for k in 0..W {
                row[k] -= coefficients[k] * q;
            }
        }
    }
}

/// Orthonormal columns spanning the polynomials of `degree` in t over the points: Legendre
/// polynomials P_k(t) (well conditioned on [-1, 1], where the monomials are nearly
/// dependent at high degree), orthonormalized by modified Gram-Schmidt applied twice
/// ("twice is enough", Giraud et al., Numer. Math. 101, 87, 2005). None when the points do
/// not determine the degree.
#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > y)` refuses NaN too, in one test"
)]
fn polynomial_basis(t: &[f64], degree: usize) -> Option<Vec<Vec<f64>>> {
    let mut columns: Vec<Vec<f64>> = Vec::with_capacity(degree + 1);
    let mut previous = vec![1.0; t.len()];
    let mut current: Vec<f64> = t.to_vec();
    for k in 0..=degree {
        let column = match k {
            0 => vec![1.0; t.len()],
            1 => t.to_vec(),
            _ => {
                // (k) P_k = (2k - 1) t P_{k-1} - (k - 1) P_{k-2}
                let next: Vec<f64> = (0..t.len())
                    .map(|i| ((2 * k - 1) as f64 * t[i] * current[i] - (k - 1) as f64 * previous[i]) / k as f64)
                    .collect();
                previous = std::mem::replace(&mut current, next);
                current.clone()
            }
        };
        let mut column = column;
        let norm_before = column.iter().map(|v| v * v).sum::<f64>().sqrt();
        for _ in 0..2 {
            for q in &columns {
                let coefficient: f64 = q.iter().zip(&column).map(|(a, b)| a * b).sum();
                for (c, a) in column.iter_mut().zip(q) {
                    *c -= coefficient * a;
                }
            }
        }
        let norm = column.iter().map(|v| v * v).sum::<f64>().sqrt();
        if !(norm > 1e-10 * norm_before) {
            return None;
        }
        for value in column.iter_mut() {
            *value /= norm;
        }
        columns.push(column);
    }
    Some(columns)
}

/// The uniform 1/B grid shared by all sweeps.
#[derive(Debug, Clone, Copy)]
pub(super) struct Grid {
    pub start: f64,
    pub spacing: f64,
    pub points: usize,
}

impl Grid {
    pub fn x(&self, k: usize) -> f64 {
        self.start + k as f64 * self.spacing
    }
}

/// Checks lengths, finiteness, temperatures and the strict order of the fields.
pub(super) fn validate_sweeps(sweeps: &[OscillationSweep]) -> Result<(), OscillationError> {
    if sweeps.is_empty() {
        return Err(OscillationError::NoSweeps);
    }
    for (sweep, data) in sweeps.iter().enumerate() {
        if !(data.temperature_k.is_finite() && data.temperature_k > 0.0) {
            return Err(OscillationError::InvalidTemperature {
                sweep,
                value: data.temperature_k,
            });
        }
        if data.field_t.len() != data.rho_xx_ohm_sq.len() {
            return Err(OscillationError::LengthMismatch {
                sweep,
                fields: data.field_t.len(),
                values: data.rho_xx_ohm_sq.len(),
            });
        }
        for (index, (field, rho)) in data.field_t.iter().zip(&data.rho_xx_ohm_sq).enumerate() {
            if !field.is_finite() {
                return Err(OscillationError::NonFinite {
                    sweep,
                    index,
                    column: "field_t",
                    value: *field,
                });
            }
            if !rho.is_finite() {
                return Err(OscillationError::NonFinite {
                    sweep,
                    index,
                    column: "rho_xx_ohm_sq",
                    value: *rho,
                });
            }
        }
        if data.field_t.len() >= 2 {
            let ascending = data.field_t[1] > data.field_t[0];
            for index in 1..data.field_t.len() {
                let step = data.field_t[index] - data.field_t[index - 1];
                let ordered = if ascending { step > 0.0 } else { step < 0.0 };
                if !ordered {
                    return Err(OscillationError::NonMonotonic {
                        sweep,
                        index,
                        field_t: data.field_t[index],
                    });
                }
            }
        }
    }
    Ok(())
}

/// The field window: the settings' limits, or by default [max(lowest positive field,
/// B_max / 10), the lowest of the sweeps' highest fields], B_max the latter.
pub(super) fn field_window(
    sweeps: &[OscillationSweep],
    settings: &OscillationSettings,
) -> Result<(f64, f64), OscillationError> {
    let highest = sweeps
        .iter()
        .map(|s| s.field_t.iter().copied().fold(f64::NEG_INFINITY, f64::max))
        .fold(f64::INFINITY, f64::min);
    let lowest_positive = sweeps
        .iter()
        .map(|s| {
            s.field_t
                .iter()
                .copied()
                .filter(|b| *b > 0.0)
                .fold(f64::INFINITY, f64::min)
        })
        .fold(f64::NEG_INFINITY, f64::max);
    let field_max = settings.field_max_t.unwrap_or(highest);
    let field_min = settings
        .field_min_t
        .unwrap_or_else(|| lowest_positive.max(field_max / DEFAULT_FIELD_RATIO));
    if !(field_min.is_finite() && field_max.is_finite() && field_min > 0.0 && field_min < field_max) {
        return Err(OscillationError::InvalidWindow {
            field_min_t: field_min,
            field_max_t: field_max,
        });
    }
    Ok((field_min, field_max))
}

/// A dense sweep is condensed for the fits until the widest group of merged points spans at
/// most this fraction of the highest line's period in 1/B.
pub const CONDENSED_FRACTION_OF_PERIOD: f64 = 1.0 / 32.0;

/// The sweep's points in the window condensed for the fits: runs of k consecutive points
/// (in 1/B order) replaced by their mean field (taken in 1/B) and mean rho_xx, with k the
/// largest count whose widest run still spans at most [`CONDENSED_FRACTION_OF_PERIOD`] of the
/// period 1 / `highest_frequency_t`. None when k < 2 (the sweep is not dense).
///
/// Why: a sweep logged along a ramp (10 Hz, tens of thousands of points) samples each period
/// hundreds of times, and every least-squares fit of the analysis costs its point count. A
/// mean over 1/32 of a period keeps the oscillation's amplitude to sinc(pi/32) = 0.998 (the
/// same factor at every field and temperature, so neither m* nor T_D notices) and its noise
/// information (the mean of k points with equal noise is a sufficient statistic for a model
/// that is straight across them), and groups of equal count keep the noise equal from point
/// to point as the unweighted fits assume.
pub(super) fn condense_sweep(
    data: &OscillationSweep,
    window: (f64, f64),
    highest_frequency_t: f64,
) -> Option<OscillationSweep> {
    let mut points: Vec<(f64, f64)> = data
        .field_t
        .iter()
        .zip(&data.rho_xx_ohm_sq)
        .filter(|(b, _)| **b >= window.0 && **b <= window.1)
        .map(|(b, rho)| (1.0 / *b, *rho))
        .collect();
    points.sort_by(|a, b| a.0.total_cmp(&b.0));
    let widest_step = points
        .windows(2)
        .map(|pair| pair[1].0 - pair[0].0)
        .fold(0.0f64, f64::max);
    if !(widest_step > 0.0 && highest_frequency_t > 0.0) {
        return None;
    }
    let allowed = CONDENSED_FRACTION_OF_PERIOD / highest_frequency_t;
    // A run of k points spans k - 1 steps.
    let count = (allowed / widest_step).floor() as usize + 1;
    if count < 2 || points.len() / count < MIN_WINDOW_POINTS {
        return None;
    }
    let (mut field_t, mut rho_xx_ohm_sq) = (Vec::new(), Vec::new());
    for run in points.chunks(count) {
        let n = run.len() as f64;
        field_t.push(n / run.iter().map(|p| p.0).sum::<f64>());
        rho_xx_ohm_sq.push(run.iter().map(|p| p.1).sum::<f64>() / n);
    }
    Some(OscillationSweep {
        temperature_k: data.temperature_k,
        field_t,
        rho_xx_ohm_sq,
    })
}

/// The default window starts at B_max divided by this.
pub const DEFAULT_FIELD_RATIO: f64 = 10.0;

/// Restricts a sweep to the window, orders it by 1/B and removes the background.
pub(super) fn prepare_sweep(
    index: usize,
    data: &OscillationSweep,
    window: (f64, f64),
    background: &Background,
) -> Result<Prepared, OscillationError> {
    let (field_min, field_max) = window;
    let mut points: Vec<(f64, f64)> = data
        .field_t
        .iter()
        .zip(&data.rho_xx_ohm_sq)
        .filter(|(b, _)| **b >= field_min && **b <= field_max)
        .map(|(b, rho)| (*b, *rho))
        .collect();
    let required = match background {
        Background::Polynomial { degree } => MIN_WINDOW_POINTS.max(degree + 2),
        Background::Smoothing { .. } => MIN_WINDOW_POINTS,
    };
    if points.len() < required {
        return Err(OscillationError::TooFewPoints {
            sweep: index,
            points: points.len(),
            required,
            field_min_t: field_min,
            field_max_t: field_max,
        });
    }
    // Descending B is ascending 1/B.
    points.sort_by(|a, b| b.0.total_cmp(&a.0));
    let field_t: Vec<f64> = points.iter().map(|p| p.0).collect();
    let rho_xx: Vec<f64> = points.iter().map(|p| p.1).collect();
    let inverse_field: Vec<f64> = field_t.iter().map(|b| 1.0 / b).collect();
    let (model, background_values) = match background {
        Background::Polynomial { degree } => {
            // The scaled variable t = (B - B_mid) / (half width) keeps the powers of order 1.
            let middle = 0.5 * (field_min + field_max);
            let half = 0.5 * (field_max - field_min);
            let scaled: Vec<f64> = field_t.iter().map(|b| (b - middle) / half).collect();
            let basis = polynomial_basis(&scaled, *degree).ok_or(OscillationError::InvalidSetting {
                name: "background_degree",
                value: *degree as f64,
                requirement: "the fields in the window do not determine a polynomial of this degree; give a lower degree or more distinct fields",
            })?;
            let values = project(&basis, &rho_xx);
            (BackgroundModel::Projection { basis }, values)
        }
        Background::Smoothing { width_inverse_t } => (
            BackgroundModel::Smoothing {
                half_width: *width_inverse_t,
            },
            smoothing_background(&inverse_field, &rho_xx, *width_inverse_t)?,
        ),
    };
    let oscillation: Vec<f64> = rho_xx.iter().zip(&background_values).map(|(r, b)| r - b).collect();
    let projected = match model {
        BackgroundModel::Projection { .. } => oscillation.clone(),
        BackgroundModel::Smoothing { .. } => Vec::new(),
    };
    Ok(Prepared {
        temperature_k: data.temperature_k,
        inverse_field,
        field_t,
        rho_xx,
        background: background_values,
        oscillation,
        grid_values: Vec::new(),
        model,
        projected,
        merged_points: 1,
    })
}

/// Local quadratic regression in x = 1/B with tricube weights (1 - (d/h)^3)^3 over
/// |d| < h (Cleveland, J. Am. Stat. Assoc. 74, 829, 1979, without the robustness
/// iterations). `x` ascending.
fn smoothing_background(x: &[f64], rho: &[f64], half_width: f64) -> Result<Vec<f64>, OscillationError> {
    let mut values = Vec::with_capacity(x.len());
    let mut low = 0;
    let mut high = 0;
    for &centre in x {
        while x[low] < centre - half_width {
            low += 1;
        }
        while high < x.len() && x[high] <= centre + half_width {
            high += 1;
        }
        let neighbours = high - low;
        if neighbours < MIN_SMOOTHING_POINTS {
            return Err(OscillationError::InvalidSetting {
                name: "background_width_per_T",
                value: half_width,
                requirement: "the smoothing half-width holds fewer than 5 points somewhere in the window; give a wider one (it should span several oscillation periods 1/F anyway)",
            });
        }
        // Weighted normal equations of a + b d + c d^2, d = (x - centre) / h: a 3 x 3
        // system, well conditioned in the scaled variable.
        let mut moments = [0.0; 5];
        let mut right = [0.0; 3];
        for j in low..high {
            let d = (x[j] - centre) / half_width;
            let r = (1.0 - d.abs().powi(3)).max(0.0);
            let weight = r * r * r;
            let mut power = weight;
            for (k, moment) in moments.iter_mut().enumerate() {
                *moment += power;
                if k < 3 {
                    right[k] += power * rho[j];
                }
                power *= d;
            }
        }
        let normal = Matrix::from_fn(3, 3, |a, b| moments[a + b]);
        let solution = normal.inverse().map_err(|_| OscillationError::InvalidSetting {
            name: "background_width_per_T",
            value: half_width,
            requirement:
                "the points within the smoothing half-width do not determine a local parabola; give a wider one",
        })?;
        values.push((0..3).map(|k| solution[(0, k)] * right[k]).sum::<f64>());
    }
    Ok(values)
}

/// The natural cubic spline through (x_i, y_i), x ascending, evaluated at `targets`
/// (within [x_0, x_last]). The second derivatives solve the tridiagonal system of
/// continuity of the first derivative with zero curvature at the ends (the Thomas
/// algorithm, stable here because the system is diagonally dominant).
pub(super) fn natural_spline(x: &[f64], y: &[f64], targets: impl Iterator<Item = f64>) -> Vec<f64> {
    let n = x.len();
    let mut second = vec![0.0; n];
    if n > 2 {
        let mut diagonal = vec![0.0; n];
        let mut rhs = vec![0.0; n];
        for i in 1..n - 1 {
            let h0 = x[i] - x[i - 1];
            let h1 = x[i + 1] - x[i];
            diagonal[i] = 2.0 * (h0 + h1);
            rhs[i] = 6.0 * ((y[i + 1] - y[i]) / h1 - (y[i] - y[i - 1]) / h0);
        }
        // Forward elimination: row i has sub-diagonal h_{i-1}, super-diagonal h_i.
        for i in 2..n - 1 {
            let h_sub = x[i] - x[i - 1];
            let factor = h_sub / diagonal[i - 1];
            diagonal[i] -= factor * h_sub;
            rhs[i] -= factor * rhs[i - 1];
        }
        for i in (1..n - 1).rev() {
            let h_super = x[i + 1] - x[i];
            let next = if i + 1 < n - 1 { second[i + 1] } else { 0.0 };
            second[i] = (rhs[i] - h_super * next) / diagonal[i];
        }
    }
    let mut segment = 0;
    targets
        .map(|t| {
            while segment + 2 < n && t > x[segment + 1] {
                segment += 1;
            }
            let (x0, x1) = (x[segment], x[segment + 1]);
            let h = x1 - x0;
            let a = (x1 - t) / h;
            let b = (t - x0) / h;
            a * y[segment]
                + b * y[segment + 1]
                + ((a * a * a - a) * second[segment] + (b * b * b - b) * second[segment + 1]) * h * h / 6.0
        })
        .collect()
}

/// Resamples each sweep's oscillation onto the grid and removes its mean.
pub(super) fn resample(prepared: &mut [Prepared], grid: &Grid) {
    for sweep in prepared.iter_mut() {
        let targets = (0..grid.points).map(|k| {
            grid.x(k)
                .clamp(sweep.inverse_field[0], *sweep.inverse_field.last().unwrap())
        });
        let mut values = natural_spline(&sweep.inverse_field, &sweep.oscillation, targets);
        let mean = values.iter().sum::<f64>() / values.len() as f64;
        for value in values.iter_mut() {
            *value -= mean;
        }
        sweep.grid_values = values;
    }
}

/// The grid over [1/B_max, 1/B_min] with `points` points (default: twice the most points
/// any sweep has in the window, at least 512).
pub(super) fn make_grid(prepared: &[Prepared], window: (f64, f64), settings: &OscillationSettings) -> Grid {
    let most = prepared.iter().map(|p| p.inverse_field.len()).max().unwrap_or(0);
    let points = settings.grid_points.unwrap_or((2 * most).max(512));
    let start = 1.0 / window.1;
    let end = 1.0 / window.0;
    Grid {
        start,
        spacing: (end - start) / (points - 1) as f64,
        points,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // A cubic is reproduced exactly by the natural spline only if its end curvature is zero;
    // a straight line and the nodes themselves always are (definition of the spline).
    #[test]
    fn prepare_spline_interpolates_nodes_and_lines() {
        let x = [0.0, 0.3, 0.35, 1.0, 1.7, 2.0];
        let line: Vec<f64> = x.iter().map(|v| 2.0 - 3.0 * v).collect();
        let at_nodes = natural_spline(&x, &line, x.iter().copied());
        for (a, b) in at_nodes.iter().zip(&line) {
            assert!((a - b).abs() < 1e-14);
        }
        let targets: Vec<f64> = (0..=40).map(|k| k as f64 * 0.05).collect();
        let values = natural_spline(&x, &line, targets.iter().copied());
        for (t, v) in targets.iter().zip(&values) {
            assert!((v - (2.0 - 3.0 * t)).abs() < 1e-13, "{t}");
        }
        // A smooth function sampled densely: the error falls as h^4 away from the ends.
        let dense: Vec<f64> = (0..=200).map(|k| k as f64 * 0.01).collect();
        let sine: Vec<f64> = dense.iter().map(|v| (3.0 * v).sin()).collect();
        let mid: Vec<f64> = (0..100).map(|k| 0.5 + k as f64 * 0.01 + 0.005).collect();
        let interpolated = natural_spline(&dense, &sine, mid.iter().copied());
        for (t, v) in mid.iter().zip(&interpolated) {
            assert!((v - (3.0 * t).sin()).abs() < 1e-8, "{t}");
        }
    }

    // The projection onto the polynomial basis reproduces a polynomial of its degree and
    // removes it from a sum (the defining property of an orthogonal projection), and a
    // basis of too high a degree for the points is refused.
    #[test]
    fn prepare_polynomial_projection_is_exact_on_polynomials() {
        let t: Vec<f64> = (0..200).map(|k| -1.0 + k as f64 * 0.01).collect();
        let basis = polynomial_basis(&t, 5).unwrap();
        for (a, column_a) in basis.iter().enumerate() {
            for (b, column_b) in basis.iter().enumerate() {
                let product: f64 = column_a.iter().zip(column_b).map(|(x, y)| x * y).sum();
                assert!((product - if a == b { 1.0 } else { 0.0 }).abs() < 1e-13);
            }
        }
        let quintic: Vec<f64> = t.iter().map(|v| 3.0 - v + 2.0 * v.powi(3) - 0.7 * v.powi(5)).collect();
        let projected = project(&basis, &quintic);
        for (a, b) in projected.iter().zip(&quintic) {
            assert!((a - b).abs() < 1e-12);
        }
        let mut residual: Vec<f64> = quintic.iter().zip(&t).map(|(q, v)| q + (40.0 * v).sin()).collect();
        project_out(&basis, &mut residual);
        let sine: Vec<f64> = t.iter().map(|v| (40.0 * v).sin()).collect();
        let mut sine_out = sine.clone();
        project_out(&basis, &mut sine_out);
        for (a, b) in residual.iter().zip(&sine_out) {
            assert!((a - b).abs() < 1e-12);
        }
        assert!(polynomial_basis(&t[..4], 5).is_none());
    }

    // Projecting the columns of a row-major block together gives each column exactly what
    // projecting it alone gives (the fits' Jacobians must not depend on the layout).
    #[test]
    fn prepare_projecting_block_columns_equals_one_at_a_time() {
        let t: Vec<f64> = (0..157).map(|k| -1.0 + k as f64 * 0.0127).collect();
        let basis = polynomial_basis(&t, 4).unwrap();
        for width in [1, 3, 4, 5, 8, 10] {
            let block: Vec<f64> = (0..t.len() * width)
                .map(|k| ((k as f64) * 0.37).sin() * 10f64.powi((k % 7) as i32 - 3))
                .collect();
            let mut together = block.clone();
            project_out_rows(&basis, &mut together, width);
            for j in 0..width {
                let mut column: Vec<f64> = block.iter().skip(j).step_by(width).copied().collect();
                project_out(&basis, &mut column);
                for (i, value) in column.iter().enumerate() {
                    assert_eq!(
                        value.to_bits(),
                        together[i * width + j].to_bits(),
                        "width {width} ({i}, {j})"
                    );
                }
            }
        }
    }

    // Local quadratic regression reproduces a parabola exactly (it is in the local model).
    #[test]
    fn prepare_smoothing_reproduces_a_parabola() {
        let x: Vec<f64> = (0..100).map(|k| 0.1 + k as f64 * 0.01).collect();
        let y: Vec<f64> = x.iter().map(|v| 5.0 - v + 0.3 * v * v).collect();
        let smooth = smoothing_background(&x, &y, 0.1).unwrap();
        for (a, b) in smooth.iter().zip(&y) {
            assert!((a - b).abs() < 1e-11, "{a} {b}");
        }
        assert!(smoothing_background(&x, &y, 0.015).is_err());
    }
}
