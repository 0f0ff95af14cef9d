//! The uncertainty budget of the spectrum analyses: the per-point relative floor and the
//! stated calibrations that scale a whole sweep.
//!
//! Two kinds of error reach a carrier's density and mobility (JCGM 100:2008, the GUM):
//!
//! - **Statistical (Type A)**: the noise of the readings, propagated through the fit (the
//!   covariance of the multi-carrier fit, the bootstrap of the mobility spectrum).
//! - **Calibration (Type B)**: errors shared by every point of the sweep, stated by the
//!   user. A field scale error B_read = (1 + e_B) B_true makes every mu B product look
//!   (1 + e_B) larger, so the fitted mobilities come out divided by (1 + e_B) and, since
//!   e n mu = sigma_xx(0) is fixed by the data, the densities multiplied by it. A scale
//!   error of the resistivity, rho = V / I read through a current source and a voltmeter,
//!   rho_read = (1 + e_R) rho_true with u(e_R)^2 = u_I^2 + u_V^2, divides every
//!   conductivity, and with it every density, by (1 + e_R), and leaves the mobilities
//!   alone. (The geometry that turns a resistance into rho is the user's, already in the
//!   sweep's values.) Not stated, each calibration takes the default `hall.reduce`
//!   assumes (0.5 % field, 0.1 % current, 0.01 % voltage; common practice), and the
//!   outputs list it in `calibrations_not_stated`. Both are one error for the
//!   whole sweep, fully correlated between its points, so they are applied once after the
//!   fit as a relative uncertainty of the result and never as per-point noise:
//!   u_sys(n) / n = sqrt(e_B^2 + e_R^2), u_sys(mu) / mu = e_B (first order).
//!
//! The total is the quadrature sum of both kinds (the GUM's combined standard uncertainty
//! of independent inputs).
//!
//! # Readings counted more than once
//!
//! Symmetrization interpolates each field branch onto a common |B| grid, by default the
//! union of both branches' fields. When the branches are offset (remanent field, a
//! readback that differs from the setpoint) the union holds nearly every reading twice:
//! once at its own field and once, interpolated, at the neighbouring field of the other
//! branch. The grid points are then correlated, and a fit that treats them as independent
//! counts each reading about twice: its statistical uncertainties come out about sqrt(2)
//! too small (a coverage test found 50 % of truths within 1 sigma instead of 68 %).
//! [`reading_reuse_factor`] measures the double counting as the information the grid
//! claims, sum 1 / u_i^2 over its points, over the information the readings hold, sum
//! 1 / u_r^2 over the readings that entered (for an even or odd part each reading informs
//! with its own variance). It is 1 for branches measured at the same fields, about 2 for a
//! small offset and about 2.7 for an offset of half a step; the statistical variances are
//! multiplied by it (never by less than 1). This keeps the point-by-point weights and
//! corrects their sum, the leading effect of the correlation for parameters that, like
//! densities and mobilities, draw on many neighbouring fields.
//!
//! # The floor
//!
//! No point may pin a fit: a component's standard uncertainty below
//! `relative_uncertainty_floor` times |sigma(B)| = sqrt(sigma_xx^2 + sigma_xy^2) at that
//! field is raised to it, and the number of points raised is reported. The reference is
//! the tensor's magnitude, not the component's, because sigma_xy passes through zero at
//! zero field and a relative floor on it alone would vanish there. The default,
//! [`SWEEP_RELATIVE_UNCERTAINTY_FLOOR`] = 1e-5, is lower than the 1e-3 of the temperature
//! series (`mobilis_numerics::fit::RELATIVE_UNCERTAINTY_FLOOR`): that floor stands for the
//! reproducibility of a density between cooldowns, which within one sweep is a common
//! scale (the resistivity calibration above), not noise between its points. Point to point
//! within one sweep a lock-in or bridge reading repeats to about 1e-5 of its value at best
//! (common practice), so the floor catches only uncertainties no instrument can have
//! (rounding, a unit error), while real noise of 1e-4 to 1e-3 is kept as stated.

use mobilis_physics::sweep::{
    symmetrize, ResistivityUncertainty, SweepPoint, SymmetrizeSettings, Symmetrized, TensorPoint, TensorUncertainty,
};

/// The default per-point relative floor of the sweep fits (see the module documentation).
pub const SWEEP_RELATIVE_UNCERTAINTY_FLOOR: f64 = 1e-5;

/// The values assumed when a calibration is not stated, as in `hall.reduce` (common practice).
pub use mobilis_physics::calibration::{
    DEFAULT_CURRENT_CALIBRATION_REL, DEFAULT_FIELD_CALIBRATION_REL, DEFAULT_VOLTAGE_CALIBRATION_REL,
};

/// Stated calibrations: relative standard uncertainties of scale errors common to a whole
/// sweep. `None` means not stated: the default is assumed and the outputs list it.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Calibration {
    /// The field scale (the magnet's field-to-current constant or the Hall probe).
    pub field_rel: Option<f64>,
    /// The current source's scale.
    pub current_rel: Option<f64>,
    /// The voltmeter's gain.
    pub voltage_rel: Option<f64>,
}

impl Calibration {
    /// The parameter names, as the analyses (and `hall.reduce`) take them.
    pub const FIELD_PARAMETER: &'static str = "field_calibration_rel";
    pub const CURRENT_PARAMETER: &'static str = "current_calibration_rel";
    pub const VOLTAGE_PARAMETER: &'static str = "voltage_calibration_rel";

    /// Every calibration stated as `value`.
    pub fn all(value: f64) -> Calibration {
        Calibration {
            field_rel: Some(value),
            current_rel: Some(value),
            voltage_rel: Some(value),
        }
    }

    fn entries(&self) -> [(&'static str, Option<f64>, f64); 3] {
        [
            (Self::FIELD_PARAMETER, self.field_rel, DEFAULT_FIELD_CALIBRATION_REL),
            (
                Self::CURRENT_PARAMETER,
                self.current_rel,
                DEFAULT_CURRENT_CALIBRATION_REL,
            ),
            (
                Self::VOLTAGE_PARAMETER,
                self.voltage_rel,
                DEFAULT_VOLTAGE_CALIBRATION_REL,
            ),
        ]
    }

    /// The first stated value that is not a finite number in [0, 1), by parameter name.
    pub fn invalid(&self) -> Option<(&'static str, f64)> {
        self.entries().into_iter().find_map(|(name, value, _)| {
            value
                .filter(|v| !(v.is_finite() && (0.0..1.0).contains(v)))
                .map(|v| (name, v))
        })
    }

    /// The field, current and voltage uncertainties in use: stated, or the defaults.
    fn used(&self) -> (f64, f64, f64) {
        let [field, current, voltage] = self.entries().map(|(_, value, default)| value.unwrap_or(default));
        (field, current, voltage)
    }

    /// Relative uncertainty of the resistivity scale: rho is V / I times a geometry that
    /// the sweep's own values already carry, so sqrt(u_I^2 + u_V^2).
    pub fn resistivity_relative(&self) -> f64 {
        let (_, current, voltage) = self.used();
        current.hypot(voltage)
    }

    /// Relative calibration uncertainty of a density (sheet or volume, or a conductance
    /// divided by a mobility): sqrt(u_B^2 + u_R^2).
    pub fn density_relative(&self) -> f64 {
        self.used().0.hypot(self.resistivity_relative())
    }

    /// Relative calibration uncertainty of a mobility: u_B.
    pub fn mobility_relative(&self) -> f64 {
        self.used().0
    }

    /// The calibrations the caller did not state (their defaults were assumed), by
    /// parameter name.
    pub fn not_stated(&self) -> Vec<&'static str> {
        self.entries()
            .into_iter()
            .filter(|(_, value, _)| value.is_none())
            .map(|(name, _, _)| name)
            .collect()
    }
}

/// A standard uncertainty split into its statistical and calibration parts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Budget {
    /// From the scatter of the data; `None` when the data do not determine it (a parameter
    /// on a bound, no bootstrap replicas).
    pub stat: Option<f64>,
    /// From the stated calibrations (0 when none was stated).
    pub sys: f64,
}

impl Budget {
    /// The budget of `value` with statistical uncertainty `stat` and a relative calibration
    /// uncertainty `relative_sys`.
    pub fn new(value: f64, stat: Option<f64>, relative_sys: f64) -> Budget {
        Budget {
            stat: stat.filter(|u| u.is_finite()),
            sys: value.abs() * relative_sys,
        }
    }

    /// The combined standard uncertainty, sqrt(stat^2 + sys^2); `None` without a
    /// statistical part (a bound or missing replicas leave the total unknown too).
    pub fn total(&self) -> Option<f64> {
        self.stat.map(|stat| stat.hypot(self.sys))
    }
}

/// `points` with each stated component uncertainty raised to `floor` |sigma(B)|, and how
/// many points were raised. Points without uncertainties are returned as they are, and so
/// are uncertainties that are not finite and positive: those are refused by the validation
/// that follows, with the point named, rather than quietly raised.
pub fn floor_uncertainties(points: &[TensorPoint], floor: f64) -> (Vec<TensorPoint>, usize) {
    let mut raised = 0;
    let floored = points
        .iter()
        .map(|point| {
            let Some(u) = point.uncertainty else {
                return *point;
            };
            let minimum = floor * point.sigma_xx_s.hypot(point.sigma_xy_s);
            // At zero field sigma_xy is not fitted and may carry no uncertainty at all.
            let xy_fitted = point.field_t != 0.0;
            let below = |value: f64| value.is_finite() && value > 0.0 && value < minimum;
            let raise_xx = below(u.sigma_xx_s);
            let raise_xy = xy_fitted && below(u.sigma_xy_s);
            if !(raise_xx || raise_xy) {
                return *point;
            }
            raised += 1;
            point.with_uncertainty(TensorUncertainty {
                sigma_xx_s: if raise_xx { minimum } else { u.sigma_xx_s },
                sigma_xy_s: if raise_xy { minimum } else { u.sigma_xy_s },
                correlation: u.correlation,
            })
        })
        .collect();
    (floored, raised)
}

/// How many times over the symmetrized grid counts the readings' information (at least 1;
/// see the module documentation). `raw` is the sweep as measured and `symmetrized` what
/// `symmetrize(raw, settings)` returned. Readings without uncertainties are given a
/// uniform relative one for the count, the weighting the fits use without them.
pub fn reading_reuse_factor(raw: &[SweepPoint], settings: &SymmetrizeSettings, symmetrized: &Symmetrized) -> f64 {
    if raw.iter().all(|p| p.uncertainty.is_some()) {
        return reuse_of(raw, settings, symmetrized);
    }
    let relative: Vec<SweepPoint> = raw
        .iter()
        .map(|p| {
            let magnitude = p.rho_xx_ohm_sq.hypot(p.rho_xy_ohm);
            SweepPoint {
                uncertainty: Some(ResistivityUncertainty::independent(magnitude, magnitude)),
                ..*p
            }
        })
        .collect();
    match symmetrize(&relative, settings) {
        Ok(copy) => reuse_of(&relative, settings, &copy),
        Err(_) => 1.0,
    }
}

/// [`reading_reuse_factor`] of readings that all carry uncertainties.
fn reuse_of(readings: &[SweepPoint], settings: &SymmetrizeSettings, grid: &Symmetrized) -> f64 {
    let (low, high) = grid.overlap_t;
    let slack = 1e-9 * high.max(1.0);
    let entered = |p: &&SweepPoint| {
        let b = p.field_t.abs();
        b <= settings.zero_field_tolerance_t || (b >= low - slack && b <= high + slack)
    };
    let information = |values: &mut dyn Iterator<Item = f64>| -> f64 {
        values
            .filter(|u| u.is_finite() && *u > 0.0)
            .map(|u| 1.0 / (u * u))
            .sum()
    };
    let mut factor: f64 = 1.0;
    for component in 0..2 {
        let pick = |u: &ResistivityUncertainty| if component == 0 { u.rho_xx_ohm_sq } else { u.rho_xy_ohm };
        // sigma_xy is not used at zero field.
        let used = |field: f64| component == 0 || field.abs() > settings.zero_field_tolerance_t;
        let claimed = information(
            &mut grid
                .points
                .iter()
                .filter(|p| used(p.field_t))
                .filter_map(|p| p.uncertainty.as_ref().map(pick)),
        );
        let held = information(
            &mut readings
                .iter()
                .filter(entered)
                .filter(|p| used(p.field_t))
                .filter_map(|p| p.uncertainty.as_ref().map(pick)),
        );
        if held > 0.0 && claimed.is_finite() {
            factor = factor.max(claimed / held);
        }
    }
    factor
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn calibrations_scale_densities_and_mobilities_as_the_drude_sums_say() {
        // sigma_xx(0) = e n mu and mu B: a field scale moves n and mu by the same relative
        // amount, a resistivity scale V / I only n (computed from the Drude sums, Beck and
        // Anderson, J. Appl. Phys. 62, 541, 1987).
        let calibration = Calibration {
            field_rel: Some(0.003),
            current_rel: Some(0.0024),
            voltage_rel: Some(0.0032),
        };
        assert!((calibration.resistivity_relative() - 0.004).abs() < 1e-15);
        assert!((calibration.density_relative() - 0.005).abs() < 1e-15);
        assert_eq!(calibration.mobility_relative(), 0.003);
        assert!(calibration.not_stated().is_empty());
        // Not stated: the defaults, listed.
        let none = Calibration::default();
        assert_eq!(none.mobility_relative(), DEFAULT_FIELD_CALIBRATION_REL);
        let expected = DEFAULT_FIELD_CALIBRATION_REL
            .hypot(DEFAULT_CURRENT_CALIBRATION_REL)
            .hypot(DEFAULT_VOLTAGE_CALIBRATION_REL);
        assert!((none.density_relative() - expected).abs() < 1e-15);
        assert_eq!(
            none.not_stated(),
            vec![
                "field_calibration_rel",
                "current_calibration_rel",
                "voltage_calibration_rel"
            ]
        );
        assert_eq!(Calibration::all(0.0).density_relative(), 0.0);
        let bad = Calibration {
            field_rel: Some(-0.1),
            ..Calibration::default()
        };
        assert_eq!(bad.invalid(), Some(("field_calibration_rel", -0.1)));
    }

    #[test]
    fn budgets_add_in_quadrature_and_need_a_statistical_part() {
        let budget = Budget::new(-200.0, Some(3.0), 0.02);
        assert_eq!(budget.sys, 4.0);
        assert!((budget.total().unwrap() - 5.0).abs() < 1e-12);
        assert_eq!(Budget::new(1.0, None, 0.1).total(), None);
        assert_eq!(Budget::new(1.0, Some(f64::NAN), 0.1).total(), None);
    }

    #[test]
    fn the_floor_raises_only_what_is_below_it() {
        let u = |xx: f64, xy: f64| TensorUncertainty {
            sigma_xx_s: xx,
            sigma_xy_s: xy,
            correlation: 0.2,
        };
        // |sigma| = 5e-3 S at 1 T (3e-3, 4e-3): the floor 1e-3 gives 5e-6 S.
        let points = [
            TensorPoint::new(1.0, 3e-3, 4e-3).with_uncertainty(u(1e-9, 1e-5)),
            TensorPoint::new(2.0, 3e-3, 4e-3).with_uncertainty(u(1e-5, 1e-5)),
            TensorPoint::new(0.0, 5e-3, 0.0).with_uncertainty(u(1e-5, 0.0)),
            TensorPoint::new(3.0, 3e-3, 4e-3),
        ];
        let (floored, raised) = floor_uncertainties(&points, 1e-3);
        assert_eq!(raised, 1);
        let first = floored[0].uncertainty.unwrap();
        assert!((first.sigma_xx_s - 5e-6).abs() < 1e-18 && first.sigma_xy_s == 1e-5);
        assert_eq!(first.correlation, 0.2);
        assert_eq!(&floored[1..], &points[1..]);
        // A zero uncertainty is an error of the input, left for the validation to refuse.
        let zero = [TensorPoint::new(1.0, 3e-3, 4e-3).with_uncertainty(u(0.0, 1e-5))];
        assert_eq!(floor_uncertainties(&zero, 1e-3), (zero.to_vec(), 0));
    }
}
