//! The van der Pauw relation between the two four-terminal resistances of a thin,
//! singly connected sample and its sheet resistance (L. J. van der Pauw, Philips Res.
//! Rep. 13, 1-9, 1958):
//!
//! exp(-pi R_A / R_s) + exp(-pi R_B / R_s) = 1
//!
//! It is solved here exactly (bracketed Newton iteration), not through the usual f(Q)
//! approximation; `correction_factor` is the f of R_s = pi (R_A + R_B) / (2 ln 2) f and
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
    if !(resistance_a > 0.0 && resistance_b > 0.0 && resistance_a.is_finite() && resistance_b.is_finite()) {
        return Err(VanDerPauwError::NonPositiveResistance(resistance_a, resistance_b));
    }
    // Work in z = pi / R_s, scaled by the larger resistance so that the numbers stay O(1):
    // g(z) = exp(-z a) + exp(-z b) - 1 with a = R_A / R_max, b = R_B / R_max.
    // g is strictly decreasing and convex in z, g(0) = 1 and g -> -1, so the root is unique
    // and Newton from the left of the root converges monotonically.
    let scale = resistance_a.max(resistance_b);
    let a = resistance_a / scale;
    let b = resistance_b / scale;
    // Bracket: at z = ln 2 the larger term alone is 1/2 and the other is >= 1/2, so
    // g >= 0; at z = ln 2 / min(a, b) + 1 both terms are < 1/2, so g < 0.
    let mut low = 0.0_f64;
    let mut high = LN_2 / a.min(b) + 1.0;
    let g = |z: f64| (-z * a).exp() + (-z * b).exp() - 1.0;
    let dg = |z: f64| -a * (-z * a).exp() - b * (-z * b).exp();
    // Start left of the root (g > 0): convexity then makes Newton monotone and safe.
    let mut z = LN_2;
    for _ in 0..200 {
        let value = g(z);
        if value > 0.0 {
            low = z;
        } else {
            high = z;
        }
        let mut next = z - value / dg(z);
        if !(next > low && next < high) {
            next = 0.5 * (low + high);
        }
        if (next - z).abs() <= 1e-16 * next.abs() {
            z = next;
            break;
        }
        z = next;
    }
    Ok(PI * scale / z)
}

/// The van der Pauw correction factor f for the resistance ratio of a measurement,
/// defined by R_s = pi (R_A + R_B) / (2 ln 2) f; f = 1 for R_A = R_B.
pub fn correction_factor(resistance_a: f64, resistance_b: f64) -> Result<f64, VanDerPauwError> {
    let sheet = sheet_resistance(resistance_a, resistance_b)?;
    Ok(sheet * 2.0 * LN_2 / (PI * (resistance_a + resistance_b)))
}

/// Partial derivatives (dR_s/dR_A, dR_s/dR_B) of the exact solution, by implicit
/// differentiation of the van der Pauw equation; used to propagate uncertainties.
pub fn sheet_resistance_gradient(resistance_a: f64, resistance_b: f64) -> Result<(f64, f64), VanDerPauwError> {
    let sheet = sheet_resistance(resistance_a, resistance_b)?;
    let term_a = (-PI * resistance_a / sheet).exp();
    let term_b = (-PI * resistance_b / sheet).exp();
    let denominator = resistance_a * term_a + resistance_b * term_b;
    Ok((sheet * term_a / denominator, sheet * term_b / denominator))
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
