//! The van der Pauw relation between the two four-terminal resistances of a thin,
//! singly connected sample and its sheet resistance (L. J. van der Pauw, Philips Res.
//! Rep. 13, 1-9, 1958):
//!
//! exp(-pi R_A / R_s) + exp(-pi R_B / R_s) = 1
//!
//! It is solved here exactly (Newton's iteration from a start on the safe side of the
//! root, see [`solve`]), not through the usual f(Q) approximation; `correction_factor` is the f of R_s = pi (R_A + R_B) / (2 ln 2) f and
//! is derived from the exact solution.

use std::f64::consts::{LN_2, PI};

/// Why the relation cannot be solved for the given resistances.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum VanDerPauwError {
    #[error("the four-terminal resistances must be positive and finite (got R_A = {0}, R_B = {1})")]
    NonPositiveResistance(f64, f64),
}

/// Sheet resistance (ohm/sq) from the two characteristic resistances R_A and R_B (ohm),
/// solving van der Pauw's equation to machine precision.
pub fn sheet_resistance(resistance_a: f64, resistance_b: f64) -> Result<f64, VanDerPauwError> {
    solve(resistance_a, resistance_b).map(|solution| solution.sheet_resistance)
}

/// The solution of van der Pauw's equation for one pair of resistances, with the two terms
/// of the equation at it, from which the correction factor and the gradient follow without
/// another exponential.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Solution {
    pub resistance_a: f64,
    pub resistance_b: f64,
    /// R_s, ohm/sq.
    pub sheet_resistance: f64,
    /// exp(-pi R_A / R_s) and exp(-pi R_B / R_s); they sum to 1.
    pub term_a: f64,
    pub term_b: f64,
}

impl Solution {
    /// The van der Pauw correction factor f of R_s = pi (R_A + R_B) / (2 ln 2) f.
    pub fn correction_factor(&self) -> f64 {
        self.sheet_resistance * 2.0 * LN_2 / (PI * (self.resistance_a + self.resistance_b))
    }

    /// (dR_s/dR_A, dR_s/dR_B), by implicit differentiation of the equation: dR_s/dR_A =
    /// R_s t_A / (R_A t_A + R_B t_B), with t the two terms.
    pub fn gradient(&self) -> (f64, f64) {
        let denominator = self.resistance_a * self.term_a + self.resistance_b * self.term_b;
        (
            self.sheet_resistance * self.term_a / denominator,
            self.sheet_resistance * self.term_b / denominator,
        )
    }
}

/// Solves van der Pauw's equation for R_s to machine precision.
///
/// In z = pi / R_s, scaled by the larger resistance so that the numbers stay O(1), the
/// equation is g(z) = exp(-z a) + exp(-z b) - 1 = 0 with a = R_A / R_max, b = R_B / R_max;
/// g is strictly decreasing and convex, so its root is unique. Newton's iteration starts at
/// z0 = 2 ln 2 / (a + b), the root for a = b; by the convexity of exp (Jensen's
/// inequality), (exp(-z0 a) + exp(-z0 b)) / 2 >= exp(-z0 (a + b) / 2) = 1/2, so g(z0) >= 0:
/// the start is at or left of the root, from where the iterates of a convex decreasing
/// function rise monotonically (and quadratically) to it. The iteration stops when g is no
/// longer positive or a step no longer raises z, that is at the root to within rounding:
/// five or six steps for ratios up to 50, a dozen at 1e4.
pub fn solve(resistance_a: f64, resistance_b: f64) -> Result<Solution, VanDerPauwError> {
    if !(resistance_a > 0.0 && resistance_b > 0.0 && resistance_a.is_finite() && resistance_b.is_finite()) {
        return Err(VanDerPauwError::NonPositiveResistance(resistance_a, resistance_b));
    }
    let scale = resistance_a.max(resistance_b);
    let a = resistance_a / scale;
    let b = resistance_b / scale;
    let mut z = 2.0 * LN_2 / (a + b);
    let mut term_a = (-z * a).exp();
    let mut term_b = (-z * b).exp();
    for _ in 0..MAX_NEWTON_STEPS {
        let value = term_a + term_b - 1.0;
        let next = z + value / (a * term_a + b * term_b);
        // Left of the root g > 0 and a step rises; at the root, to rounding, one of them fails.
        if value > 0.0 && next > z {
            z = next;
            term_a = (-z * a).exp();
            term_b = (-z * b).exp();
        } else {
            break;
        }
    }
    Ok(Solution {
        resistance_a,
        resistance_b,
        sheet_resistance: PI * scale / z,
        term_a,
        term_b,
    })
}

/// A bound that only ratios far outside any measurement (beyond 1e12) come near.
const MAX_NEWTON_STEPS: usize = 200;

/// The van der Pauw correction factor f for the resistance ratio of a measurement,
/// defined by R_s = pi (R_A + R_B) / (2 ln 2) f; f = 1 for R_A = R_B.
pub fn correction_factor(resistance_a: f64, resistance_b: f64) -> Result<f64, VanDerPauwError> {
    solve(resistance_a, resistance_b).map(|solution| solution.correction_factor())
}

/// Partial derivatives (dR_s/dR_A, dR_s/dR_B) of the exact solution, by implicit
/// differentiation of the van der Pauw equation; used to propagate uncertainties.
pub fn sheet_resistance_gradient(resistance_a: f64, resistance_b: f64) -> Result<(f64, f64), VanDerPauwError> {
    solve(resistance_a, resistance_b).map(|solution| solution.gradient())
}

/// The inverse problem, used by the forward models: R_A and R_B of a sample with sheet
/// resistance `sheet` (ohm/sq) whose resistances stand in the ratio R_B / R_A = `ratio`.
pub fn resistances_for(sheet: f64, ratio: f64) -> Result<(f64, f64), VanDerPauwError> {
    if !(sheet > 0.0 && ratio > 0.0 && sheet.is_finite() && ratio.is_finite()) {
        return Err(VanDerPauwError::NonPositiveResistance(sheet, ratio));
    }
    // R_s is homogeneous of degree one in (R_A, R_B): solve for unit R_A and rescale.
    let unit_sheet = sheet_resistance(1.0, ratio)?;
    let resistance_a = sheet / unit_sheet;
    Ok((resistance_a, resistance_a * ratio))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        (actual / expected - 1.0).abs() <= relative
    }

    // Symmetric case R_s = pi R / ln 2 (van der Pauw, Philips Res. Rep. 13, 1958, eq. for R_A = R_B).
    #[test]
    fn symmetric_sample_gives_pi_over_ln2() {
        for r in [1e-3, 1.0, 42.0, 1e9] {
            let rs = sheet_resistance(r, r).unwrap();
            assert!(close(rs, PI * r / LN_2, 1e-13), "{r}: {rs}");
        }
    }

    // R_s check values computed from van der Pauw's relation (Philips Res. Rep. 13, 1958).
    #[test]
    fn sheet_resistance_matches_values_computed_from_the_relation() {
        let cases = [
            ((1.0, 1.0), 4.532360),
            ((1.0, 2.0), 6.528503),
            ((1.0, 10.0), 17.431126),
            ((10.0, 1.0), 17.431126),
            ((100.0, 200.0), 652.8503),
        ];
        for ((ra, rb), expected) in cases {
            let rs = sheet_resistance(ra, rb).unwrap();
            assert!(close(rs, expected, 1e-6), "({ra},{rb}): {rs} vs {expected}");
            let residual = (-PI * ra / rs).exp() + (-PI * rb / rs).exp() - 1.0;
            assert!(residual.abs() < 1e-14);
        }
    }

    // f(Q) from cosh[((Q-1)/(Q+1)) ln2 / f] = exp(ln2 / f) / 2 (van der Pauw 1958), values
    // computed from that relation; the exact solution must agree with it.
    #[test]
    fn correction_factor_agrees_with_the_f_of_q_relation() {
        let table = [
            (1.0, 1.000000),
            (1.5, 0.985986),
            (2.0, 0.960280),
            (3.0, 0.906679),
            (5.0, 0.821655),
            (10.0, 0.699259),
            (20.0, 0.588536),
            (50.0, 0.471560),
            (100.0, 0.403849),
        ];
        for (q, expected) in table {
            let f = correction_factor(q, 1.0).unwrap();
            assert!((f - expected).abs() < 1.5e-6, "Q = {q}: f = {f}, expected {expected}");
            let lhs = (((q - 1.0) / (q + 1.0)) * LN_2 / f).cosh();
            let rhs = 0.5 * (LN_2 / f).exp();
            assert!(close(lhs, rhs, 1e-12), "Q = {q}: relation not satisfied");
        }
    }

    #[test]
    fn gradient_matches_finite_differences() {
        let (ra, rb) = (3.0, 7.5);
        let (ga, gb) = sheet_resistance_gradient(ra, rb).unwrap();
        let h = 1e-6;
        let fa = (sheet_resistance(ra + h, rb).unwrap() - sheet_resistance(ra - h, rb).unwrap()) / (2.0 * h);
        let fb = (sheet_resistance(ra, rb + h).unwrap() - sheet_resistance(ra, rb - h).unwrap()) / (2.0 * h);
        assert!(close(ga, fa, 1e-6) && close(gb, fb, 1e-6));
        // Euler's theorem for a degree-one homogeneous function: R_A dA + R_B dB = R_s.
        assert!(close(ra * ga + rb * gb, sheet_resistance(ra, rb).unwrap(), 1e-12));
    }

    // The solution satisfies the equation to rounding and its terms are the equation's
    // terms at it, from equal resistances to ratios far beyond any measurement.
    #[test]
    fn solution_satisfies_the_equation_over_every_ratio() {
        for ratio in [1.0, 1.0 + 1e-9, 1.0001, 1.3, 2.0, 7.0, 50.0, 1e3, 1e4, 1e6] {
            for (ra, rb) in [(1.0, ratio), (ratio * 3.7e-2, 3.7e-2)] {
                let solution = solve(ra, rb).unwrap();
                let rs = solution.sheet_resistance;
                let term_a = (-PI * ra / rs).exp();
                let term_b = (-PI * rb / rs).exp();
                assert!((term_a + term_b - 1.0).abs() < 1e-15, "ratio {ratio}: residual");
                assert!(close(solution.term_a, term_a, 1e-12) && close(solution.term_b, term_b, 1e-12));
                assert_eq!(solution.correction_factor(), correction_factor(ra, rb).unwrap());
            }
        }
    }

    #[test]
    fn inverse_reproduces_the_sheet_resistance() {
        for (sheet, ratio) in [(100.0, 1.0), (35.2, 1.7), (1e6, 0.05)] {
            let (ra, rb) = resistances_for(sheet, ratio).unwrap();
            assert!(close(rb / ra, ratio, 1e-14));
            assert!(close(sheet_resistance(ra, rb).unwrap(), sheet, 1e-12));
        }
    }

    #[test]
    fn refuses_non_positive_input() {
        assert!(sheet_resistance(0.0, 1.0).is_err());
        assert!(sheet_resistance(-1.0, 1.0).is_err());
        assert!(sheet_resistance(f64::NAN, 1.0).is_err());
    }
}
