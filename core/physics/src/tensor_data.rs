//! Validated two-component tensor data of a field sweep, the form in which the carrier fits
//! take it: per field B the components xx and xy (rho_xx and rho_xy of a [`SweepPoint`],
//! sigma_xx and sigma_xy of a [`TensorPoint`]), optionally with standard uncertainties and
//! their correlation.
//!
//! [`TensorData::new`] checks the points (every value finite, xx > 0, uncertainties on
//! every point or none, some point in field) and builds the [`Whitening`] of each point's
//! residuals and their offsets in the residual vector. At zero field only xx enters: xy
//! vanishes there by symmetry (a symmetrized sweep gives it exactly zero uncertainty).
//! Without uncertainties both components at field B are weighted by 1 / |z(B)| with
//! |z| = sqrt(xx^2 + xy^2) of the data, a fixed relative resolution whose scale the fit
//! estimates from the residual scatter.
//!
//! A [`TensorDataError`] names the offending column by the point type's own column names
//! ([`TwoComponentPoint::COLUMNS`]), so each caller can turn it into its own error type.

use crate::sweep::{SweepPoint, TensorPoint};

/// The column names of a point type, as its table calls them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Columns {
    pub field: &'static str,
    pub xx: &'static str,
    pub xy: &'static str,
    pub xx_unc: &'static str,
    pub xy_unc: &'static str,
    pub correlation: &'static str,
}

/// Standard uncertainties of the two components at one field and their correlation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairUncertainty {
    pub xx: f64,
    pub xy: f64,
    /// Correlation coefficient, in (-1, 1).
    pub correlation: f64,
}

/// A point of a field sweep with two tensor components: B, xx, xy and optional
/// uncertainties.
pub trait TwoComponentPoint {
    /// The names the error messages use for the point's values.
    const COLUMNS: Columns;
    fn field_t(&self) -> f64;
    fn xx(&self) -> f64;
    fn xy(&self) -> f64;
    fn uncertainty(&self) -> Option<PairUncertainty>;
}

impl TwoComponentPoint for SweepPoint {
    const COLUMNS: Columns = Columns {
        field: "field_T",
        xx: "rho_xx_ohm_sq",
        xy: "rho_xy_ohm",
        xx_unc: "rho_xx_ohm_sq_unc",
        xy_unc: "rho_xy_ohm_unc",
        correlation: "correlation",
    };

    fn field_t(&self) -> f64 {
        self.field_t
    }

    fn xx(&self) -> f64 {
        self.rho_xx_ohm_sq
    }

    fn xy(&self) -> f64 {
        self.rho_xy_ohm
    }

    fn uncertainty(&self) -> Option<PairUncertainty> {
        self.uncertainty.map(|u| PairUncertainty {
            xx: u.rho_xx_ohm_sq,
            xy: u.rho_xy_ohm,
            correlation: u.correlation,
        })
    }
}

impl TwoComponentPoint for TensorPoint {
    const COLUMNS: Columns = Columns {
        field: "field_T",
        xx: "sigma_xx_S",
        xy: "sigma_xy_S",
        xx_unc: "sigma_xx_S_unc",
        xy_unc: "sigma_xy_S_unc",
        correlation: "correlation",
    };

    fn field_t(&self) -> f64 {
        self.field_t
    }

    fn xx(&self) -> f64 {
        self.sigma_xx_s
    }

    fn xy(&self) -> f64 {
        self.sigma_xy_s
    }

    fn uncertainty(&self) -> Option<PairUncertainty> {
        self.uncertainty.map(|u| PairUncertainty {
            xx: u.sigma_xx_s,
            xy: u.sigma_xy_s,
            correlation: u.correlation,
        })
    }
}

/// Why [`TensorData::new`] refuses the points. Columns are named as in
/// [`TwoComponentPoint::COLUMNS`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum TensorDataError {
    #[error("no points were given; give both tensor components over a field sweep")]
    NoPoints,
    /// A value is NaN or infinite.
    #[error("point {index}: {column} is {value}; give a finite number or drop the point")]
    NonFinite {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// The longitudinal component is zero or negative.
    #[error("point {index}: {column} is {value}; it is positive for a conducting sample, so check the sign and the units, or drop the point")]
    NonPositiveXx {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// An uncertainty is not a finite positive number, or a correlation not within (-1, 1).
    #[error("point {index}: the uncertainty {column} is {value}; give a finite positive standard uncertainty (a correlation within (-1, 1))")]
    InvalidUncertainty {
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// Some points have uncertainties and others not.
    #[error("{with} points have uncertainties and {without} do not; give uncertainties for every point or for none")]
    MixedUncertainties { with: usize, without: usize },
    /// Every point is at zero field.
    #[error("all {points} points are at zero field; give a field sweep")]
    NoField { points: usize },
}

/// Turns the model-minus-data pair (d_xx, d_xy) of one field into independent unit-variance
/// residuals: L^-1 d with L the lower Cholesky factor of the point's 2 x 2 covariance
/// [[a^2, c a b], [c a b, b^2]], i.e. r_1 = d_xx / a, r_2 = (d_xy - c b r_1) / (b s),
/// s = sqrt(1 - c^2). At zero field only r_1 is used.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Whitening {
    a: f64,
    b: f64,
    c: f64,
    s: f64,
    uses_xy: bool,
}

impl Whitening {
    pub fn new(a: f64, b: f64, c: f64, uses_xy: bool) -> Self {
        Whitening {
            a,
            b,
            c,
            s: (1.0 - c * c).sqrt(),
            uses_xy,
        }
    }

    /// How many residuals the point gives.
    pub fn count(&self) -> usize {
        1 + usize::from(self.uses_xy)
    }

    /// Writes the whitened residuals of (d_xx, d_xy) into `out` (1 or 2 entries).
    pub fn apply(&self, d_xx: f64, d_xy: f64, out: &mut [f64]) {
        let r1 = d_xx / self.a;
        out[0] = r1;
        if self.uses_xy {
            out[1] = (d_xy - self.c * self.b * r1) / (self.b * self.s);
        }
    }
}

/// Validated two-component data and the bookkeeping of their residuals.
#[derive(Debug, Clone, PartialEq)]
pub struct TensorData {
    pub fields_t: Vec<f64>,
    pub xx: Vec<f64>,
    pub xy: Vec<f64>,
    pub whitening: Vec<Whitening>,
    /// Index of each point's first residual.
    pub offsets: Vec<usize>,
    pub residual_count: usize,
    /// True when the points carried uncertainties (the residuals are (model - data) / sigma).
    pub weighted: bool,
    /// Largest |B|, T.
    pub max_field_t: f64,
    /// Smallest nonzero |B|, T.
    pub min_field_t: f64,
}

impl TensorData {
    /// Checks the points and builds the whitening of their residuals.
    pub fn new<P: TwoComponentPoint>(points: &[P]) -> Result<TensorData, TensorDataError> {
        let columns = P::COLUMNS;
        if points.is_empty() {
            return Err(TensorDataError::NoPoints);
        }
        let mut with = 0;
        for (index, point) in points.iter().enumerate() {
            for (column, value) in [
                (columns.field, point.field_t()),
                (columns.xx, point.xx()),
                (columns.xy, point.xy()),
            ] {
                if !value.is_finite() {
                    return Err(TensorDataError::NonFinite { index, column, value });
                }
            }
            if point.xx() <= 0.0 {
                return Err(TensorDataError::NonPositiveXx {
                    index,
                    column: columns.xx,
                    value: point.xx(),
                });
            }
            if let Some(unc) = point.uncertainty() {
                with += 1;
                let invalid =
                    |column: &'static str, value: f64| TensorDataError::InvalidUncertainty { index, column, value };
                if !(unc.xx.is_finite() && unc.xx > 0.0) {
                    return Err(invalid(columns.xx_unc, unc.xx));
                }
                // At zero field xy is not fitted, and a symmetrized sweep gives it exactly
                // zero uncertainty there.
                if point.field_t() != 0.0 && !(unc.xy.is_finite() && unc.xy > 0.0) {
                    return Err(invalid(columns.xy_unc, unc.xy));
                }
                if !(unc.correlation.is_finite() && unc.correlation.abs() < 1.0) {
                    return Err(invalid(columns.correlation, unc.correlation));
                }
            }
        }
        if with != 0 && with != points.len() {
            return Err(TensorDataError::MixedUncertainties {
                with,
                without: points.len() - with,
            });
        }
        let weighted = with > 0;
        let max_field_t = points.iter().map(|p| p.field_t().abs()).fold(0.0, f64::max);
        if max_field_t == 0.0 {
            return Err(TensorDataError::NoField { points: points.len() });
        }
        let min_field_t = points
            .iter()
            .map(|p| p.field_t().abs())
            .filter(|b| *b > 0.0)
            .fold(f64::INFINITY, f64::min);
        let whitening: Vec<Whitening> = points
            .iter()
            .map(|p| {
                let uses_xy = p.field_t() != 0.0;
                match p.uncertainty() {
                    Some(u) => Whitening::new(u.xx, u.xy, if uses_xy { u.correlation } else { 0.0 }, uses_xy),
                    None => {
                        let magnitude = p.xx().hypot(p.xy());
                        Whitening::new(magnitude, magnitude, 0.0, uses_xy)
                    }
                }
            })
            .collect();
        let mut offsets = Vec::with_capacity(points.len());
        let mut residual_count = 0;
        for w in &whitening {
            offsets.push(residual_count);
            residual_count += w.count();
        }
        Ok(TensorData {
            fields_t: points.iter().map(|p| p.field_t()).collect(),
            xx: points.iter().map(|p| p.xx()).collect(),
            xy: points.iter().map(|p| p.xy()).collect(),
            whitening,
            offsets,
            residual_count,
            weighted,
            max_field_t,
            min_field_t,
        })
    }

    /// Parameters the residuals can determine: one fewer without uncertainties, where the
    /// noise level is estimated from the same residuals.
    pub fn max_parameters(&self) -> usize {
        if self.weighted {
            self.residual_count
        } else {
            self.residual_count.saturating_sub(1)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sweep::{ResistivityUncertainty, TensorUncertainty};

    #[test]
    fn errors_name_the_point_types_columns() {
        let mut rho = vec![SweepPoint::new(0.0, 100.0, 0.0), SweepPoint::new(1.0, 110.0, 5.0)];
        rho[1].rho_xy_ohm = f64::NAN;
        assert!(matches!(
            TensorData::new(&rho),
            Err(TensorDataError::NonFinite {
                index: 1,
                column: "rho_xy_ohm",
                ..
            })
        ));
        let sigma = [TensorPoint::new(1.0, -1e-3, 1e-4)];
        assert!(matches!(
            TensorData::new(&sigma),
            Err(TensorDataError::NonPositiveXx {
                index: 0,
                column: "sigma_xx_S",
                ..
            })
        ));
        let unc = [TensorPoint::new(1.0, 1e-3, 1e-4).with_uncertainty(TensorUncertainty {
            sigma_xx_s: 1e-6,
            sigma_xy_s: 0.0,
            correlation: 0.0,
        })];
        assert!(matches!(
            TensorData::new(&unc),
            Err(TensorDataError::InvalidUncertainty {
                index: 0,
                column: "sigma_xy_S_unc",
                ..
            })
        ));
        assert_eq!(TensorData::new::<SweepPoint>(&[]), Err(TensorDataError::NoPoints));
        assert_eq!(
            TensorData::new(&[SweepPoint::new(0.0, 100.0, 0.0)]),
            Err(TensorDataError::NoField { points: 1 })
        );
    }

    #[test]
    fn zero_field_gives_one_residual_and_no_xy_uncertainty_is_needed() {
        let points = [
            SweepPoint::new(0.0, 100.0, 0.0).with_uncertainty(ResistivityUncertainty::independent(0.1, 0.0)),
            SweepPoint::new(0.5, 101.0, 3.0).with_uncertainty(ResistivityUncertainty::independent(0.1, 0.2)),
            SweepPoint::new(-1.0, 104.0, -6.0).with_uncertainty(ResistivityUncertainty::independent(0.1, 0.2)),
        ];
        let data = TensorData::new(&points).unwrap();
        assert_eq!(data.offsets, vec![0, 1, 3]);
        assert_eq!(data.residual_count, 5);
        assert!(data.weighted);
        assert_eq!(data.max_parameters(), 5);
        assert_eq!((data.min_field_t, data.max_field_t), (0.5, 1.0));
        let mut out = [0.0; 2];
        data.whitening[1].apply(0.1, 0.4, &mut out);
        assert_eq!(out, [1.0, 2.0]);

        let unweighted = TensorData::new(&points.map(|p| SweepPoint { uncertainty: None, ..p })).unwrap();
        assert_eq!(unweighted.max_parameters(), 4);
    }

    #[test]
    fn correlated_whitening_decorrelates() {
        // Covariance [[a^2, c a b], [c a b, b^2]] with a = 2, b = 3, c = 0.6: the whitened
        // pair of d = L e is e.
        let w = Whitening::new(2.0, 3.0, 0.6, true);
        let s = (1.0f64 - 0.36).sqrt();
        let e = [0.7, -1.3];
        let d = [2.0 * e[0], 0.6 * 3.0 * e[0] + 3.0 * s * e[1]];
        let mut out = [0.0; 2];
        w.apply(d[0], d[1], &mut out);
        assert!(
            (out[0] - e[0]).abs() < 1e-12 && (out[1] - e[1]).abs() < 1e-12,
            "{out:?}"
        );
    }
}
