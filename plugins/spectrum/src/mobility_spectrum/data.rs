//! The validated conductivity data, their whitened residual rows, the logarithmic mobility
//! grid and the kernel that links a spectrum to the data.

use mobilis_numerics::linalg::Matrix;
use mobilis_physics::sweep::TensorPoint;

use super::error::SpectrumError;
use super::settings::{GridRange, SpectrumSettings, MIN_DISTINCT_FIELDS};

/// Fields within this (T) of the lowest of their group count as one when the distinct
/// fields are counted.
const DISTINCT_FIELD_RESOLUTION_T: f64 = 1e-6;

/// One weighted residual: cxx (model_xx - data_xx) + cxy (model_xy - data_xy) at a point.
#[derive(Debug, Clone, Copy)]
pub(super) struct Row {
    pub point: usize,
    pub cxx: f64,
    pub cxy: f64,
}

/// The measured tensor, ready for the solvers.
#[derive(Debug, Clone)]
pub(super) struct Data {
    /// |B| of each point, T.
    pub fields: Vec<f64>,
    /// Measured (sigma_xx, sigma_xy) of each point, S.
    pub sigma: Vec<(f64, f64)>,
    /// The noise scale of each point for the envelope: sqrt(u_xx^2 + u_xy^2) with
    /// uncertainties, |sigma| without.
    pub noise_scale: Vec<f64>,
    /// Standard uncertainties (u_xx, u_xy) of each point, when given.
    pub uncertainties: Option<Vec<(f64, f64)>>,
    pub has_uncertainties: bool,
    pub rows: Vec<Row>,
    /// The largest sigma_xx, S: the unknowns are conductivities in this unit.
    pub reference_s: f64,
    pub max_field_t: f64,
    pub min_nonzero_field_t: f64,
}

impl Data {
    /// Checks the points and builds the whitened rows. With uncertainties each point's
    /// residual pair is multiplied by the inverse Cholesky factor of its 2 x 2 covariance
    /// (so correlated sigma_xx and sigma_xy are weighted correctly); without, both
    /// components are divided by |sigma| = sqrt(sigma_xx^2 + sigma_xy^2), a constant relative
    /// error on the tensor. At B = 0 sigma_xy carries no information (its kernel vanishes)
    /// and only the sigma_xx row is kept.
    pub fn new(points: &[TensorPoint]) -> Result<Self, SpectrumError> {
        if points.is_empty() {
            return Err(SpectrumError::NoPoints);
        }
        let with = points.iter().filter(|p| p.uncertainty.is_some()).count();
        for (index, point) in points.iter().enumerate() {
            for (quantity, value) in [
                ("field_T", point.field_t),
                ("sigma_xx_s", point.sigma_xx_s),
                ("sigma_xy_s", point.sigma_xy_s),
            ] {
                if !value.is_finite() {
                    return Err(SpectrumError::NonFinite { index, quantity, value });
                }
            }
            if point.field_t < 0.0 {
                return Err(SpectrumError::NegativeField {
                    index,
                    field_t: point.field_t,
                });
            }
            if point.sigma_xx_s <= 0.0 {
                return Err(SpectrumError::NonPositiveConductivity {
                    index,
                    field_t: point.field_t,
                    sigma_xx_s: point.sigma_xx_s,
                });
            }
            if let Some(u) = point.uncertainty {
                let xy_may_vanish = point.field_t == 0.0;
                for (quantity, value, may_vanish) in [
                    ("sigma_xx_s_unc", u.sigma_xx_s, false),
                    ("sigma_xy_s_unc", u.sigma_xy_s, xy_may_vanish),
                ] {
                    let ok = value.is_finite() && (value > 0.0 || (may_vanish && value == 0.0));
                    if !ok {
                        return Err(SpectrumError::InvalidUncertainty { index, quantity, value });
                    }
                }
                if !(u.correlation.is_finite() && u.correlation.abs() < 1.0) {
                    return Err(SpectrumError::InvalidUncertainty {
                        index,
                        quantity: "correlation",
                        value: u.correlation,
                    });
                }
            }
        }
        if with != 0 && with != points.len() {
            return Err(SpectrumError::MixedUncertainties {
                with,
                without: points.len() - with,
            });
        }
        let mut nonzero: Vec<f64> = points.iter().map(|p| p.field_t).filter(|&b| b > 0.0).collect();
        nonzero.sort_by(f64::total_cmp);
        // Anchored groups, so that a densely logged ramp is never chained into one field.
        let distinct = mobilis_physics::sweep::anchored_groups(&nonzero, DISTINCT_FIELD_RESOLUTION_T).len();
        if distinct < MIN_DISTINCT_FIELDS {
            return Err(SpectrumError::TooFewFields {
                distinct,
                required: MIN_DISTINCT_FIELDS,
            });
        }

        let has_uncertainties = with > 0;
        let mut rows = Vec::with_capacity(2 * points.len());
        let mut noise_scale = Vec::with_capacity(points.len());
        for (index, point) in points.iter().enumerate() {
            let magnitude = point.sigma_xx_s.hypot(point.sigma_xy_s);
            match point.uncertainty {
                Some(u) => {
                    noise_scale.push(u.sigma_xx_s.hypot(u.sigma_xy_s));
                    rows.push(Row {
                        point: index,
                        cxx: 1.0 / u.sigma_xx_s,
                        cxy: 0.0,
                    });
                    if point.field_t > 0.0 {
                        let s = (1.0 - u.correlation * u.correlation).sqrt();
                        rows.push(Row {
                            point: index,
                            cxx: -u.correlation / (u.sigma_xx_s * s),
                            cxy: 1.0 / (u.sigma_xy_s * s),
                        });
                    }
                }
                None => {
                    noise_scale.push(magnitude);
                    rows.push(Row {
                        point: index,
                        cxx: 1.0 / magnitude,
                        cxy: 0.0,
                    });
                    if point.field_t > 0.0 {
                        rows.push(Row {
                            point: index,
                            cxx: 0.0,
                            cxy: 1.0 / magnitude,
                        });
                    }
                }
            }
        }
        Ok(Data {
            fields: points.iter().map(|p| p.field_t).collect(),
            sigma: points.iter().map(|p| (p.sigma_xx_s, p.sigma_xy_s)).collect(),
            noise_scale,
            uncertainties: has_uncertainties.then(|| {
                points
                    .iter()
                    .map(|p| p.uncertainty.map_or((0.0, 0.0), |u| (u.sigma_xx_s, u.sigma_xy_s)))
                    .collect()
            }),
            has_uncertainties,
            rows,
            reference_s: points.iter().map(|p| p.sigma_xx_s).fold(0.0, f64::max),
            max_field_t: nonzero[nonzero.len() - 1],
            min_nonzero_field_t: nonzero[0],
        })
    }

    /// The weighted data vector b (row r: cxx data_xx + cxy data_xy).
    pub fn weighted_values(&self) -> Vec<f64> {
        self.rows
            .iter()
            .map(|row| {
                let (xx, xy) = self.sigma[row.point];
                row.cxx * xx + row.cxy * xy
            })
            .collect()
    }

    /// The weighted design matrix: entry (r, j) is the row's combination of the kernel of
    /// unknown j, times the reference conductivity (the unknowns are in that unit).
    pub fn design(&self, grid: &Grid) -> Matrix {
        let columns = grid.unknowns();
        Matrix::from_fn(self.rows.len(), columns, |r, j| {
            let row = self.rows[r];
            let (xx, xy) = kernel(grid.signed_mobility(j), self.fields[row.point]);
            self.reference_s * (row.cxx * xx + row.cxy * xy)
        })
    }
}

/// The kernel of one carrier of unit conductance and signed mobility mu at field B:
/// (1 / (1 + mu^2 B^2), mu B / (1 + mu^2 B^2)).
pub(super) fn kernel(signed_mobility: f64, field_t: f64) -> (f64, f64) {
    let mu_b = signed_mobility * field_t;
    let denominator = 1.0 + mu_b * mu_b;
    (1.0 / denominator, mu_b / denominator)
}

/// The logarithmic grid in |mu|, the same for both signs. Unknown j < N is the electron
/// at -mu_j, unknown N + k the hole at +mu_k.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Grid {
    pub mobilities: Vec<f64>,
    /// ln(mu_{k+1} / mu_k).
    pub log_step: f64,
}

/// The densest grid accepted, against typing mistakes: the Gram matrix has (2 N)^2
/// entries, 32 MB at N = 1000, and a million points would need 32 TB.
const MAX_POINTS_PER_SIGN: usize = 1000;
const MIN_POINTS_PER_SIGN: usize = 8;

impl Grid {
    /// The grid of the settings, or by default from 0.1 / B_max to 10 / B_min (B_min the
    /// lowest nonzero field): a decade beyond the window 1/B_max .. 1/B_min in which the
    /// kernel changes shape within the measured fields, so that a carrier at the window's
    /// edge still has a peak inside the grid.
    pub fn new(settings: &SpectrumSettings, data: &Data) -> Result<Self, SpectrumError> {
        let points = settings.points_per_sign;
        if !(MIN_POINTS_PER_SIGN..=MAX_POINTS_PER_SIGN).contains(&points) {
            return Err(SpectrumError::InvalidSetting {
                setting: "points_per_sign",
                value: points as f64,
                requirement: "give between 8 and 1000 mobilities per carrier sign",
            });
        }
        let range = settings.mobility_range.unwrap_or(GridRange {
            min_mobility_m2_per_vs: 0.1 / data.max_field_t,
            max_mobility_m2_per_vs: 10.0 / data.min_nonzero_field_t,
        });
        let (low, high) = (range.min_mobility_m2_per_vs, range.max_mobility_m2_per_vs);
        if !(low.is_finite() && low > 0.0) {
            return Err(SpectrumError::InvalidSetting {
                setting: "min_mobility_m2_per_Vs",
                value: low,
                requirement: "give a positive mobility in m^2/(V s)",
            });
        }
        if !(high.is_finite() && high > low * 1.01) {
            return Err(SpectrumError::InvalidSetting {
                setting: "max_mobility_m2_per_Vs",
                value: high,
                requirement: "give a finite mobility above min_mobility_m2_per_Vs",
            });
        }
        Ok(Grid::logarithmic(low, high, points))
    }

    /// `points` mobilities from `low` to `high`, equally spaced in ln mu.
    pub fn logarithmic(low: f64, high: f64, points: usize) -> Self {
        let log_step = (high / low).ln() / (points - 1) as f64;
        let mobilities = (0..points)
            .map(|k| {
                if k + 1 == points {
                    high
                } else {
                    low * (k as f64 * log_step).exp()
                }
            })
            .collect();
        Grid { mobilities, log_step }
    }

    pub fn points_per_sign(&self) -> usize {
        self.mobilities.len()
    }

    /// Electrons then holes.
    pub fn unknowns(&self) -> usize {
        2 * self.mobilities.len()
    }

    /// The signed mobility of unknown j: negative for electrons.
    pub fn signed_mobility(&self, j: usize) -> f64 {
        let n = self.mobilities.len();
        if j < n {
            -self.mobilities[j]
        } else {
            self.mobilities[j - n]
        }
    }
}
