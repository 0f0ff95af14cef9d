//! Settings of the regularized mobility spectrum: the grid, the rule that sets the
//! smoothness penalty, the peak threshold, the bootstrap and the calibrations. The steps of
//! the spectrum (data, regularization) read them, so they sit below those steps and below the
//! module root that re-exports them.

use crate::multi_carrier::budget::{Calibration, SWEEP_RELATIVE_UNCERTAINTY_FLOOR};

/// The fewest distinct nonzero fields a spectrum is computed from.
pub const MIN_DISTINCT_FIELDS: usize = 4;

/// How the strength of the smoothness penalty is chosen.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum RegularizationRule {
    /// The discrepancy principle with uncertainties, the L-curve without.
    #[default]
    Auto,
    /// The largest strength whose chi-square is at most the number of data (needs
    /// uncertainties).
    Discrepancy,
    /// The corner of the L-curve.
    LCurve,
    /// This dimensionless strength lambda (alpha = lambda tr(A^T A) / tr(D^T D)).
    Fixed(f64),
}

/// The rule that was actually applied.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RuleUsed {
    Discrepancy,
    LCurve,
    Fixed,
}

impl RuleUsed {
    /// "discrepancy", "l_curve" or "fixed".
    pub fn name(self) -> &'static str {
        match self {
            RuleUsed::Discrepancy => "discrepancy",
            RuleUsed::LCurve => "l_curve",
            RuleUsed::Fixed => "fixed",
        }
    }
}

/// The mobility range of the grid, m^2/(V s), the same for both signs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridRange {
    pub min_mobility_m2_per_vs: f64,
    pub max_mobility_m2_per_vs: f64,
}

/// Settings of [`mobility_spectrum`].
#[derive(Debug, Clone, PartialEq)]
pub struct SpectrumSettings {
    /// Grid mobilities per carrier sign (8 to 1000). Default 200: about 50 per decade over
    /// the default range, fine enough that the grid's discretization error (of order
    /// Delta^2 / 8 of a narrow peak's tensor) stays below a noise of 1e-3.
    pub points_per_sign: usize,
    /// Default: 0.1 / B_max to 10 / B_min (B_min the lowest nonzero field).
    pub mobility_range: Option<GridRange>,
    pub rule: RegularizationRule,
    /// A local maximum is a peak when it reaches this fraction of the largest spectrum
    /// value of either sign, in (0, 1). Default 0.05.
    pub peak_threshold: f64,
    /// Bootstrap replicas for the peaks' uncertainties (0 to 1000; 0: no uncertainties,
    /// reported as NaN). Default 24, which estimates a standard deviation to about 15 %.
    pub uncertainty_replicas: usize,
    /// A stated component uncertainty below this fraction of |sigma(B)| is raised to it.
    /// Default 1e-5 (see `multi_carrier::budget`).
    pub relative_uncertainty_floor: f64,
    /// Stated scale calibrations, applied to the peaks after the spectrum. Default: none
    /// stated, the defaults of `multi_carrier::budget` assumed.
    pub calibration: Calibration,
}

impl Default for SpectrumSettings {
    fn default() -> Self {
        SpectrumSettings {
            points_per_sign: 200,
            mobility_range: None,
            rule: RegularizationRule::Auto,
            peak_threshold: 0.05,
            uncertainty_replicas: 24,
            relative_uncertainty_floor: SWEEP_RELATIVE_UNCERTAINTY_FLOOR,
            calibration: Calibration::default(),
        }
    }
}
