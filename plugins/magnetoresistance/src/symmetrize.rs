//! `mr.symmetrize`: the even part of rho_xx and the odd part of rho_xy of a field sweep,
//! the parts removed, and what they say about the contacts.
//!
//! Pure computation: no DataFrames, no I/O. The table glue turns one sample's sweep at one
//! temperature into [`SweepPoint`]s and the [`SymmetrizedSweep`] back into a table (one row
//! per |B|, [`SymmetrizedRow`]) and a summary ([`SymmetrizeSummary`]).
//!
//! # What is computed
//!
//! The symmetrization itself is `mobilis_physics::sweep::symmetrize`, shared with
//! `spectrum.multi_carrier_fit` and the other magnetoresistance analyses, so that every
//! analysis of a sweep sees the same numbers: zero-field points averaged into one node,
//! repeats within the field resolution averaged, the two branches interpolated linearly in
//! |B| onto a common grid within their overlap, then
//!
//! - rho_xx(|B|) = (rho_xx(+B) + rho_xx(-B)) / 2 and rho_xy(|B|) = (rho_xy(+B) - rho_xy(-B)) / 2,
//! - removed: rho_xx_odd = (rho_xx(+B) - rho_xx(-B)) / 2 and rho_xy_even = (rho_xy(+B) +
//!   rho_xy(-B)) / 2,
//!
//! with the uncertainties propagated exactly through the averaging and the interpolation, a
//! point merged from repeated readings of one field sign taking their scatter when that is
//! larger (see that module for the steps and the reasons for them, and for the warning about
//! repeats that disagree). This module adds the per-field
//! relative asymmetries and two estimates of contact misalignment.
//!
//! # Relative asymmetries
//!
//! Per field, rho_xx_odd / rho_xx and rho_xy_even / rho_xx, signed, both relative to the
//! symmetrized rho_xx: that is the scale of a geometric offset (a Hall contact pair that is
//! not on one equipotential picks up a fixed fraction of the longitudinal voltage), and it
//! stays finite at zero field, where rho_xy vanishes. The summary repeats the core's largest
//! magnitudes over the grid.
//!
//! # Misalignment estimates
//!
//! - **Hall misalignment fraction** alpha: a Hall contact pair offset along the current
//!   measures rho_xy + alpha rho_xx, so rho_xy_even / rho_xx = alpha at every field. The
//!   estimate is the mean of that ratio over the low-field grid points, |B| <=
//!   [`SymmetrizeOptions::misalignment_max_field_t`] (default: the lower quarter of the
//!   overlap, and at least the [`MIN_LOW_FIELD_POINTS`] lowest grid points). Low field,
//!   because there the even part is least disturbed by what else is even in B at high
//!   field: a current distribution that the Hall angle redistributes between misplaced
//!   contacts, and the interpolation error of a large odd rho_xy between branches measured
//!   at different fields. Its standard uncertainty is the standard error of that mean (the
//!   scatter of the ratio over the points used, over sqrt k), `None` from one point.
//! - **Hall pickup fraction** beta: longitudinal contacts that are not aligned with the
//!   current measure rho_xx + beta rho_xy, so rho_xx_odd = beta rho_xy. The estimate is the
//!   least-squares slope through the origin of rho_xx_odd against rho_xy over every nonzero
//!   grid field, beta = sum rho_xx_odd rho_xy / sum rho_xy^2, its standard error from the
//!   scatter about that line (`None` from one point).
//!
//! Both are diagnostics of the contacts; the symmetrized parts are free of them to first
//! order whatever their size.
//!
//! # One field sign
//!
//! A sweep measured at one field sign has no second branch to separate the parts with, so
//! `mr.symmetrize` refuses it (naming the missing sign); the analyses that need only the
//! even part of rho_xx, or accept the misalignment with a flag, take it as measured
//! (`single_field_sign`).
//!
//! # Warnings
//!
//! - measured points outside the field range both branches cover (they are not used; the
//!   warning of `mobilis_physics::sweep::Symmetrized::outside_overlap_warning`, which names
//!   `zero_field_tolerance_T` for a magnet's remanence at its nominal zero);
//! - |rho_xy_even| above |rho_xy| at the highest field of the grid: the Hall signal is then
//!   the small difference of two large readings, and any drift or field error between the
//!   branches enters it at full size.

use mobilis_physics::sweep::{symmetrize, SweepError, SweepUse, SymmetrizeSettings, Symmetrized};

pub use mobilis_physics::sweep::{FieldGrid, ResistivityUncertainty, SweepPoint};

/// The fewest grid points the default misalignment estimate uses (when the sweep has them),
/// so that the estimate has a scatter and is not one noisy reading.
pub const MIN_LOW_FIELD_POINTS: usize = 3;

/// How a sweep is symmetrized and its misalignment estimated.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SymmetrizeOptions {
    /// Zero-field tolerance, field resolution and grid of the symmetrization (defaults of
    /// `mobilis_physics::sweep::SymmetrizeSettings`: 1e-4 T, 1e-4 T, the union grid).
    pub sweep: SymmetrizeSettings,
    /// Grid fields at or below this enter the Hall misalignment estimate, T. Default `None`:
    /// the lower quarter of the overlap, and at least the [`MIN_LOW_FIELD_POINTS`] lowest
    /// grid points.
    pub misalignment_max_field_t: Option<f64>,
}

/// One |B| of a symmetrized sweep, ready for a table row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SymmetrizedRow {
    /// |B|, T.
    pub field_t: f64,
    /// Even part of rho_xx, ohm per square.
    pub rho_xx_ohm_sq: f64,
    pub rho_xx_unc_ohm_sq: Option<f64>,
    /// Odd part of rho_xy at +|B|, ohm (positive for holes).
    pub rho_xy_ohm: f64,
    pub rho_xy_unc_ohm: Option<f64>,
    /// Correlation of the two symmetrized components.
    pub correlation: Option<f64>,
    /// The odd part removed from rho_xx, ohm per square.
    pub rho_xx_odd_ohm_sq: f64,
    /// The even part removed from rho_xy, ohm.
    pub rho_xy_even_ohm: f64,
    /// rho_xx_odd / rho_xx (signed).
    pub rho_xx_asymmetry: f64,
    /// rho_xy_even / rho_xx (signed).
    pub rho_xy_asymmetry: f64,
}

/// A fraction estimated from several grid points, with its standard error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FractionEstimate {
    pub fraction: f64,
    /// Standard error; `None` from a single point.
    pub fraction_unc: Option<f64>,
    /// Grid points used.
    pub points: usize,
    /// The highest |B| used, T.
    pub max_field_t: f64,
}

/// Summary numbers of a symmetrized sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct SymmetrizeSummary {
    /// The |B| range both branches cover, T.
    pub overlap_t: (f64, f64),
    pub grid_points: usize,
    pub positive_points: usize,
    pub negative_points: usize,
    pub zero_field_points: usize,
    /// Measured points outside the overlap, not used.
    pub points_outside_overlap: usize,
    /// Largest |rho_xx_odd| / rho_xx over the grid.
    pub max_rho_xx_asymmetry: f64,
    /// Largest |rho_xy_even| / rho_xx over the grid.
    pub max_rho_xy_asymmetry: f64,
    /// Hall misalignment fraction alpha (see the module documentation).
    pub misalignment: FractionEstimate,
    /// Hall pickup fraction beta of the longitudinal contacts; `None` when the grid has no
    /// nonzero field with a nonzero rho_xy.
    pub hall_pickup: Option<FractionEstimate>,
}

/// A symmetrized sweep: rows, summary, warnings, and the core's result (which the other
/// analyses take as their input).
#[derive(Debug, Clone, PartialEq)]
pub struct SymmetrizedSweep {
    /// Ascending in |B|.
    pub rows: Vec<SymmetrizedRow>,
    pub summary: SymmetrizeSummary,
    pub symmetrized: Symmetrized,
    pub warnings: Vec<String>,
}

/// Why a sweep cannot be symmetrized.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SymmetrizeError {
    /// Refused by the symmetrization (no points, one field sign only, rho_xx <= 0, NaN ...).
    #[error("{0}")]
    Sweep(#[from] SweepError),
    /// An option out of its range.
    #[error("option {name} is {value}; {requirement}")]
    InvalidOption {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
}

/// Symmetrizes a sweep and reports its asymmetries (see the module documentation).
pub fn symmetrize_sweep(
    points: &[SweepPoint],
    options: &SymmetrizeOptions,
) -> Result<SymmetrizedSweep, SymmetrizeError> {
    if let Some(limit) = options.misalignment_max_field_t {
        if !(limit.is_finite() && limit >= 0.0) {
            return Err(SymmetrizeError::InvalidOption {
                name: "misalignment_max_field_t",
                value: limit,
                requirement:
                    "give a finite |B| of 0 or more in tesla, or leave it unset for the lower quarter of the sweep",
            });
        }
    }
    let symmetrized = symmetrize(points, &options.sweep)?;
    if let Some(present) = symmetrized.measured_sign() {
        let fields = points.iter().map(|p| p.field_t.abs());
        return Err(SymmetrizeError::Sweep(SweepError::OneFieldSign {
            present,
            missing: if present == "positive" { "negative" } else { "positive" },
            min_t: fields.clone().fold(f64::INFINITY, f64::min),
            max_t: fields.fold(0.0, f64::max),
        }));
    }
    Ok(describe(symmetrized, options.misalignment_max_field_t))
}

/// Rows, summary and warnings of an already symmetrized sweep; `misalignment_max_field_t`
/// as in [`SymmetrizeOptions`].
pub fn describe(symmetrized: Symmetrized, misalignment_max_field_t: Option<f64>) -> SymmetrizedSweep {
    let rows: Vec<SymmetrizedRow> = symmetrized
        .points
        .iter()
        .map(|p| SymmetrizedRow {
            field_t: p.field_t,
            rho_xx_ohm_sq: p.rho_xx_ohm_sq,
            rho_xx_unc_ohm_sq: p.uncertainty.map(|u| u.rho_xx_ohm_sq),
            rho_xy_ohm: p.rho_xy_ohm,
            rho_xy_unc_ohm: p.uncertainty.map(|u| u.rho_xy_ohm),
            correlation: p.uncertainty.map(|u| u.correlation),
            rho_xx_odd_ohm_sq: p.rho_xx_odd_ohm_sq,
            rho_xy_even_ohm: p.rho_xy_even_ohm,
            rho_xx_asymmetry: p.rho_xx_odd_ohm_sq / p.rho_xx_ohm_sq,
            rho_xy_asymmetry: p.rho_xy_even_ohm / p.rho_xx_ohm_sq,
        })
        .collect();

    let misalignment = misalignment_estimate(&rows, symmetrized.overlap_t.1, misalignment_max_field_t);
    let hall_pickup = pickup_estimate(&rows);

    // Every unused point is reported here, however little field range it takes: describing
    // the symmetrization is this analysis's job.
    let mut warnings = symmetrized.warnings(SweepUse::Tensor);
    if let Some(outside) = symmetrized.outside_overlap_warning() {
        if !warnings.contains(&outside) {
            warnings.push(outside);
        }
    }
    if let Some(top) = rows.last() {
        if top.field_t > 0.0 && top.rho_xy_even_ohm.abs() > top.rho_xy_ohm.abs() {
            warnings.push(format!(
                "at {:.4} T the even part of rho_xy ({:.4e} ohm) exceeds the Hall signal ({:.4e} ohm): the Hall contacts are far from one equipotential, so the Hall resistivity is a small difference of large readings and any drift between the field signs enters it; check the contact placement",
                top.field_t, top.rho_xy_even_ohm, top.rho_xy_ohm
            ));
        }
    }

    let summary = SymmetrizeSummary {
        overlap_t: symmetrized.overlap_t,
        grid_points: rows.len(),
        positive_points: symmetrized.positive_points,
        negative_points: symmetrized.negative_points,
        zero_field_points: symmetrized.zero_field_points,
        points_outside_overlap: symmetrized.points_outside_overlap,
        max_rho_xx_asymmetry: symmetrized.max_rho_xx_asymmetry,
        max_rho_xy_asymmetry: symmetrized.max_rho_xy_asymmetry,
        misalignment,
        hall_pickup,
    };
    SymmetrizedSweep {
        rows,
        summary,
        symmetrized,
        warnings,
    }
}

/// Mean and standard error of the mean; `None` for the error of a single value.
fn mean_and_error(values: &[f64]) -> (f64, Option<f64>) {
    let k = values.len() as f64;
    let mean = values.iter().sum::<f64>() / k;
    let error = (values.len() > 1).then(|| {
        let variance = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (k - 1.0);
        (variance / k).sqrt()
    });
    (mean, error)
}

/// The Hall misalignment fraction from the low-field rows (the grid is never empty: the core
/// refuses a sweep without an overlap).
fn misalignment_estimate(rows: &[SymmetrizedRow], top_t: f64, limit: Option<f64>) -> FractionEstimate {
    let selected: Vec<&SymmetrizedRow> = match limit {
        Some(limit) => {
            let within: Vec<&SymmetrizedRow> = rows.iter().filter(|r| r.field_t <= limit).collect();
            // A limit below the lowest grid field still gives the lowest point, so that a
            // summary number always exists.
            if within.is_empty() {
                rows.iter().take(1).collect()
            } else {
                within
            }
        }
        None => {
            let quarter = 0.25 * top_t;
            let count = rows
                .iter()
                .filter(|r| r.field_t <= quarter)
                .count()
                .max(MIN_LOW_FIELD_POINTS)
                .min(rows.len());
            rows.iter().take(count).collect()
        }
    };
    let ratios: Vec<f64> = selected.iter().map(|r| r.rho_xy_asymmetry).collect();
    let (fraction, fraction_unc) = mean_and_error(&ratios);
    FractionEstimate {
        fraction,
        fraction_unc,
        points: selected.len(),
        max_field_t: selected.iter().map(|r| r.field_t).fold(0.0, f64::max),
    }
}

/// The Hall pickup fraction: the slope through the origin of rho_xx_odd against rho_xy.
#[allow(
    clippy::neg_cmp_op_on_partial_ord,
    reason = "`!(x > y)` refuses NaN too, in one test"
)]
fn pickup_estimate(rows: &[SymmetrizedRow]) -> Option<FractionEstimate> {
    let used: Vec<&SymmetrizedRow> = rows.iter().filter(|r| r.field_t > 0.0).collect();
    let sxx: f64 = used.iter().map(|r| r.rho_xy_ohm * r.rho_xy_ohm).sum();
    if used.is_empty() || !(sxx > 0.0) {
        return None;
    }
    let slope = used.iter().map(|r| r.rho_xx_odd_ohm_sq * r.rho_xy_ohm).sum::<f64>() / sxx;
    let k = used.len();
    let fraction_unc = (k > 1).then(|| {
        let scatter: f64 = used
            .iter()
            .map(|r| (r.rho_xx_odd_ohm_sq - slope * r.rho_xy_ohm).powi(2))
            .sum::<f64>()
            / (k - 1) as f64;
        (scatter / sxx).sqrt()
    });
    Some(FractionEstimate {
        fraction: slope,
        fraction_unc,
        points: k,
        max_field_t: used.iter().map(|r| r.field_t).fold(0.0, f64::max),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use mobilis_numerics::noise::Rng;
    use mobilis_physics::forward::tensor::{
        resistivity_tensor, symmetric_fields, synthetic_sweep, Carrier, SweepImperfections, SweepNoise,
    };

    fn carriers() -> Vec<Carrier> {
        vec![Carrier::electron(2e15, 1.0), Carrier::hole(5e15, 0.2)]
    }

    fn sweep(imperfections: SweepImperfections, noise: SweepNoise, fields: &[f64]) -> Vec<SweepPoint> {
        synthetic_sweep(&carriers(), fields, &noise, &imperfections, &mut Rng::seeded(11)).unwrap()
    }

    // The synthetic sweep of the forward model adds alpha rho_xx(B) to rho_xy and beta
    // rho_xy(B) to rho_xx; on a sweep without noise both estimates must return them, and the
    // symmetrized parts must be the ideal tensor (the defects cancel exactly by parity).
    #[test]
    fn symmetrize_recovers_the_misalignment_and_the_ideal_tensor() {
        let imperfections = SweepImperfections {
            hall_misalignment: 0.031,
            longitudinal_hall_pickup: -0.012,
        };
        let fields = symmetric_fields(9.0, 90).unwrap();
        let result = symmetrize_sweep(&sweep(imperfections, SweepNoise::NONE, &fields), &Default::default()).unwrap();
        assert_eq!(result.rows.len(), 91);
        for row in &result.rows {
            let ideal = resistivity_tensor(&carriers(), row.field_t).unwrap();
            assert!((row.rho_xx_ohm_sq / ideal.rho_xx_ohm_sq - 1.0).abs() < 1e-12, "{row:?}");
            assert!((row.rho_xy_ohm - ideal.rho_xy_ohm).abs() < 1e-12 * ideal.rho_xx_ohm_sq);
            assert!((row.rho_xy_asymmetry - 0.031).abs() < 1e-12, "{row:?}");
            assert!((row.rho_xx_odd_ohm_sq - (-0.012) * ideal.rho_xy_ohm).abs() < 1e-12 * ideal.rho_xx_ohm_sq);
        }
        let summary = &result.summary;
        assert!((summary.misalignment.fraction - 0.031).abs() < 1e-12);
        // A quarter of 9 T holds the grid fields 0 .. 2.2 T, 23 of them.
        assert_eq!(summary.misalignment.points, 23);
        assert!((summary.misalignment.max_field_t - 2.2).abs() < 1e-9);
        let pickup = summary.hall_pickup.unwrap();
        assert!((pickup.fraction + 0.012).abs() < 1e-12, "{pickup:?}");
        assert!(pickup.fraction_unc.unwrap() < 1e-12);
        assert_eq!(pickup.points, 90);
        assert_eq!(summary.zero_field_points, 1);
        assert_eq!((summary.positive_points, summary.negative_points), (90, 90));
        assert!((summary.max_rho_xy_asymmetry - 0.031).abs() < 1e-12);
        assert!(result.warnings.is_empty(), "{:?}", result.warnings);
    }

    // Branches on different fields: the core interpolates them. One carrier has a constant
    // rho_xx and a rho_xy linear in B, which linear interpolation reproduces exactly, so the
    // estimate is limited by the noise alone; the uncertainties propagate to every row.
    #[test]
    fn symmetrize_interpolated_branches_keep_the_estimates_and_uncertainties() {
        let carriers = [Carrier::electron(2e15, 1.0)];
        let imperfections = SweepImperfections {
            hall_misalignment: -0.05,
            longitudinal_hall_pickup: 0.0,
        };
        let positive: Vec<f64> = (0..=60).map(|k| 0.15 * k as f64).collect();
        let negative: Vec<f64> = (1..=45).map(|k| -0.2 * k as f64 + 0.07).collect();
        let fields: Vec<f64> = positive.iter().chain(&negative).copied().collect();
        let noise = SweepNoise {
            absolute_ohm: 1e-3,
            relative: 1e-5,
        };
        let points = synthetic_sweep(&carriers, &fields, &noise, &imperfections, &mut Rng::seeded(3)).unwrap();
        let result = symmetrize_sweep(&points, &Default::default()).unwrap();
        let summary = &result.summary;
        let alpha = summary.misalignment;
        // rho_xx = 1 / (e n mu) = 3121 ohm; the noise on rho_xy_even, about 0.03 ohm, is 1e-5
        // of it per point.
        assert!((alpha.fraction + 0.05).abs() < 1e-4, "{alpha:?}");
        assert!(alpha.fraction_unc.unwrap() < 1e-4);
        assert!(result
            .rows
            .iter()
            .all(|r| r.rho_xx_unc_ohm_sq.is_some() && r.correlation.is_some()));
        // The negative branch stops at 8.93 T, so the positive points above it are not used.
        assert!(summary.points_outside_overlap > 0);
        assert!(result.warnings.iter().any(|w| w.contains("outside the |B| range")));
        assert!(summary.overlap_t.1 < 8.94);
    }

    #[test]
    fn symmetrize_given_limit_selects_the_low_field_points() {
        let imperfections = SweepImperfections {
            hall_misalignment: 0.01,
            longitudinal_hall_pickup: 0.0,
        };
        let fields = symmetric_fields(4.0, 40).unwrap();
        let options = SymmetrizeOptions {
            misalignment_max_field_t: Some(0.35),
            ..Default::default()
        };
        let result = symmetrize_sweep(&sweep(imperfections, SweepNoise::NONE, &fields), &options).unwrap();
        assert_eq!(result.summary.misalignment.points, 4);
        // A limit below the first nonzero field keeps the zero-field point alone.
        let options = SymmetrizeOptions {
            misalignment_max_field_t: Some(0.0),
            ..Default::default()
        };
        let result = symmetrize_sweep(&sweep(imperfections, SweepNoise::NONE, &fields), &options).unwrap();
        assert_eq!(result.summary.misalignment.points, 1);
        assert_eq!(result.summary.misalignment.fraction_unc, None);
    }

    #[test]
    fn symmetrize_warns_when_the_even_part_exceeds_the_hall_signal() {
        // 2 % of rho_xx of a low-mobility sample (1250 ohm) is more than its Hall resistivity
        // at 1 T (6.2 ohm).
        let carriers = [Carrier::hole(1e18, 0.005)];
        let imperfections = SweepImperfections {
            hall_misalignment: 0.02,
            longitudinal_hall_pickup: 0.0,
        };
        let fields = symmetric_fields(1.0, 10).unwrap();
        let points = synthetic_sweep(
            &carriers,
            &fields,
            &SweepNoise::NONE,
            &imperfections,
            &mut Rng::seeded(1),
        )
        .unwrap();
        let result = symmetrize_sweep(&points, &Default::default()).unwrap();
        assert!(
            result.warnings.iter().any(|w| w.contains("exceeds the Hall signal")),
            "{:?}",
            result.warnings
        );
    }

    #[test]
    fn symmetrize_refuses_one_field_sign_and_bad_options() {
        let fields: Vec<f64> = (0..=10).map(|k| 0.5 * k as f64).collect();
        let error = symmetrize_sweep(
            &sweep(SweepImperfections::default(), SweepNoise::NONE, &fields),
            &Default::default(),
        )
        .unwrap_err();
        assert!(matches!(error, SymmetrizeError::Sweep(SweepError::OneFieldSign { .. })));
        let message = error.to_string();
        assert!(message.contains("measure the negative branch"), "{message}");
        assert!(!message.ends_with('.'));
        let options = SymmetrizeOptions {
            misalignment_max_field_t: Some(f64::NAN),
            ..Default::default()
        };
        let fields = symmetric_fields(1.0, 4).unwrap();
        let error = symmetrize_sweep(
            &sweep(SweepImperfections::default(), SweepNoise::NONE, &fields),
            &options,
        )
        .unwrap_err();
        assert!(error.to_string().contains("misalignment_max_field_t"), "{error}");
        assert!(matches!(
            symmetrize_sweep(&[], &Default::default()),
            Err(SymmetrizeError::Sweep(SweepError::Empty))
        ));
    }
}
