//! Special functions of real argument that the analyses need and the standard library lacks:
//! the digamma function psi = Gamma'/Gamma, its derivative the trigamma function, and the
//! combination psi(1/2 + x) - ln x of the Hikami-Larkin-Nagaoka weak-localization formula.
//!
//! # Method
//!
//! - **Recurrence** psi(x + 1) = psi(x) + 1/x and psi'(x + 1) = psi'(x) - 1/x^2
//!   (Abramowitz and Stegun, Handbook of Mathematical Functions, 6.3.5 and 6.4.6) carries
//!   the argument up to [`ASYMPTOTIC_FROM`], where
//! - **the asymptotic series** (A&S 6.3.18 and 6.4.12; DLMF 5.11.2 and 5.15.8)
//!   psi(z) ~ ln z - 1/(2z) - sum_k B_2k / (2k z^2k) and
//!   psi'(z) ~ 1/z + 1/(2z^2) + sum_k B_2k / z^(2k+1), with the Bernoulli numbers B_2k
//!   through B_12, are accurate to better than 1e-16 relative: the first omitted term is
//!   below 1e-16 of the sum at z = 10. The terms of the recurrence, of order 1 each, leave
//!   an absolute rounding error of a few 1e-15 for arguments below 10 (so a relative one
//!   that grows near the root of psi at 1.4616).
//! - **Reflection** psi(1 - x) - psi(x) = pi cot(pi x) and psi'(1 - x) + psi'(x) =
//!   pi^2 / sin^2(pi x) (A&S 6.3.7 and 6.4.7) for negative non-integer x. The poles at
//!   0, -1, -2, ... give NaN for psi (the sign of the infinity depends on the side of
//!   approach) and +inf for psi'.
//!
//! # psi(1/2 + x) - ln x
//!
//! The bracket of the HLN formula tends to 1/(24 x^2) for large x, where psi(1/2 + x) and
//! ln x agree to many digits and their difference computed directly loses them. For
//! x >= [`HALF_SHIFT_SERIES_FROM`] [`digamma_half_shift_minus_ln`] sums the expansion of
//! psi(x + h) at h = 1/2 (DLMF 5.11.8 with B_n(1/2) = -(1 - 2^(1-n)) B_n, DLMF 24.4.27):
//! psi(x + 1/2) - ln x ~ sum_k (1 - 2^(1-2k)) B_2k / (2k x^2k)
//! = 1/(24 x^2) - 7/(960 x^4) + 31/(8064 x^6) - ...; below it the difference is taken
//! directly, where it is large enough to keep about 11 significant digits.

use std::f64::consts::PI;

/// The recurrence raises the argument to at least this before the asymptotic series.
pub const ASYMPTOTIC_FROM: f64 = 10.0;

/// From this x on, psi(1/2 + x) - ln x is summed as a series in 1/x^2.
pub const HALF_SHIFT_SERIES_FROM: f64 = 30.0;

/// The Bernoulli numbers B_2, B_4, ..., B_12 (A&S table 23.2), exact rationals.
const BERNOULLI_EVEN: [f64; 6] = [
    1.0 / 6.0,
    -1.0 / 30.0,
    1.0 / 42.0,
    -1.0 / 30.0,
    5.0 / 66.0,
    -691.0 / 2730.0,
];

/// The digamma function psi(x) = d ln Gamma(x) / dx for real x. NaN at the poles
/// x = 0, -1, -2, ... and for NaN; +inf at +inf.
pub fn digamma(x: f64) -> f64 {
    if x.is_nan() || x == f64::NEG_INFINITY {
        return f64::NAN;
    }
    if x == f64::INFINITY {
        return f64::INFINITY;
    }
    if x <= 0.0 && x == x.floor() {
        return f64::NAN;
    }
    if x < 0.0 {
        // psi(x) = psi(1 - x) - pi cot(pi x); 1 - x > 1, so no further reflection.
        return digamma(1.0 - x) - PI / (PI * x).tan();
    }
    let mut shift = 0.0;
    let mut z = x;
    while z < ASYMPTOTIC_FROM {
        shift -= 1.0 / z;
        z += 1.0;
    }
    let inverse_square = 1.0 / (z * z);
    let mut power = inverse_square;
    let mut series = 0.0;
    for (index, bernoulli) in BERNOULLI_EVEN.iter().enumerate() {
        let order = 2.0 * (index as f64 + 1.0);
        series += bernoulli / order * power;
        power *= inverse_square;
    }
    shift + z.ln() - 0.5 / z - series
}

/// The trigamma function psi'(x) for real x. +inf at the poles x = 0, -1, -2, ...; NaN for
/// NaN and -inf; 0 at +inf.
pub fn trigamma(x: f64) -> f64 {
    if x.is_nan() || x == f64::NEG_INFINITY {
        return f64::NAN;
    }
    if x == f64::INFINITY {
        return 0.0;
    }
    if x <= 0.0 && x == x.floor() {
        return f64::INFINITY;
    }
    if x < 0.0 {
        let sine = (PI * x).sin();
        return PI * PI / (sine * sine) - trigamma(1.0 - x);
    }
    let mut shift = 0.0;
    let mut z = x;
    while z < ASYMPTOTIC_FROM {
        shift += 1.0 / (z * z);
        z += 1.0;
    }
    let inverse = 1.0 / z;
    let inverse_square = inverse * inverse;
    let mut power = inverse_square * inverse;
    let mut series = 0.0;
    for bernoulli in BERNOULLI_EVEN {
        series += bernoulli * power;
        power *= inverse_square;
    }
    shift + inverse + 0.5 * inverse_square + series
}

/// psi(1/2 + x) - ln x for x > 0, accurate also for large x where it tends to 1/(24 x^2)
/// (see the module documentation). NaN for x <= 0 or NaN; 0 at +inf.
pub fn digamma_half_shift_minus_ln(x: f64) -> f64 {
    if x.is_nan() || x <= 0.0 {
        return f64::NAN;
    }
    if x == f64::INFINITY {
        return 0.0;
    }
    if x < HALF_SHIFT_SERIES_FROM {
        return digamma(0.5 + x) - x.ln();
    }
    let inverse_square = 1.0 / (x * x);
    let mut power = inverse_square;
    let mut sum = 0.0;
    for (index, bernoulli) in BERNOULLI_EVEN.iter().enumerate() {
        let k = index as i32 + 1;
        let order = 2.0 * k as f64;
        sum += (1.0 - 2f64.powi(1 - 2 * k)) * bernoulli / order * power;
        power *= inverse_square;
    }
    sum
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Euler's constant gamma (A&S 6.1.3, 0.57721 56649 01532 86060 65120 90082).
    const EULER_GAMMA: f64 = 0.577_215_664_901_532_9;

    fn close(actual: f64, expected: f64, relative: f64) -> bool {
        (actual - expected).abs() <= relative * expected.abs()
    }

    // Absolute tolerances of 4e-15: the rounding of the recurrence (module documentation).
    // psi(1) = -gamma (A&S 6.3.2), psi(1/2) = -gamma - 2 ln 2 (A&S 6.3.3),
    // psi(n + 1) = -gamma + sum_{k<=n} 1/k (A&S 6.3.2), the root of psi at
    // x0 = 1.46163 21449 68362 (A&S 6.3.19 gives x0 = 1.46163 21449 68362 34126 to
    // twenty digits, from memory of the table).
    #[test]
    fn special_digamma_matches_closed_values() {
        assert!((digamma(1.0) + EULER_GAMMA).abs() < 4e-15, "{}", digamma(1.0));
        let half = -EULER_GAMMA - 2.0 * 2f64.ln();
        assert!((digamma(0.5) - half).abs() < 4e-15, "{}", digamma(0.5));
        let mut harmonic = 0.0;
        for n in 1..=40 {
            harmonic += 1.0 / n as f64;
            let expected = harmonic - EULER_GAMMA;
            assert!((digamma(n as f64 + 1.0) - expected).abs() < 4e-15, "psi({})", n + 1);
        }
        assert!(digamma(1.461_632_144_968_362).abs() < 4e-15);
        // psi(1/4) = -gamma - pi/2 - 3 ln 2 (Gauss's digamma theorem, from memory).
        let quarter = -EULER_GAMMA - PI / 2.0 - 3.0 * 2f64.ln();
        assert!((digamma(0.25) - quarter).abs() < 4e-15, "{}", digamma(0.25));
    }

    // The recurrence (A&S 6.3.5) and the reflection (A&S 6.3.7) hold across the switch to the
    // asymptotic series and for negative arguments; the poles are NaN.
    #[test]
    fn special_digamma_recurrence_reflection_and_poles() {
        for x in [1e-8, 0.013, 0.7, 3.3, 8.999, 9.5, 10.0, 42.0, 1.7e4, 3e12] {
            let lhs = digamma(x + 1.0);
            let rhs = digamma(x) + 1.0 / x;
            assert!((lhs - rhs).abs() <= 4e-15 * lhs.abs().max(1.0 / x).max(1.0), "{x}");
        }
        for x in [-0.5, -1.25, -7.9, -0.01] {
            let reflected = digamma(1.0 - x) - PI / (PI * x).tan();
            assert!((digamma(x) - reflected).abs() < 1e-13 * reflected.abs().max(1.0), "{x}");
        }
        // psi(-1/2) = psi(1/2) + 2 (the recurrence at x = -1/2).
        assert!((digamma(-0.5) - digamma(0.5) - 2.0).abs() < 8e-15);
        for pole in [0.0, -1.0, -12.0] {
            assert!(digamma(pole).is_nan());
        }
        assert!(digamma(f64::NAN).is_nan());
        assert_eq!(digamma(f64::INFINITY), f64::INFINITY);
        // Large argument: psi(x) = ln x - 1/(2x) - 1/(12 x^2) + ... (A&S 6.3.18), to the
        // rounding of ln x.
        let big: f64 = 1e10;
        assert!((digamma(big) - (big.ln() - 0.5 / big)).abs() < 1e-14);
    }

    // psi'(1) = pi^2/6 (A&S 6.4.2), psi'(1/2) = pi^2/2 (A&S 6.4.4), the recurrence
    // (A&S 6.4.6), the reflection (A&S 6.4.7), and agreement with a central difference of psi.
    #[test]
    fn special_trigamma_matches_closed_values_and_the_derivative_of_digamma() {
        assert!(close(trigamma(1.0), PI * PI / 6.0, 1e-15), "{}", trigamma(1.0));
        assert!(close(trigamma(0.5), PI * PI / 2.0, 1e-15), "{}", trigamma(0.5));
        for x in [0.3, 2.0, 9.7, 55.0] {
            assert!(close(trigamma(x + 1.0), trigamma(x) - 1.0 / (x * x), 1e-14), "{x}");
            let h = 1e-5 * x;
            let derivative = (digamma(x + h) - digamma(x - h)) / (2.0 * h);
            assert!(close(trigamma(x), derivative, 1e-8), "{x}");
        }
        let x = -2.3;
        let sine = (PI * x).sin();
        assert!(close(trigamma(x) + trigamma(1.0 - x), PI * PI / (sine * sine), 1e-13));
        assert_eq!(trigamma(-3.0), f64::INFINITY);
        assert_eq!(trigamma(f64::INFINITY), 0.0);
    }

    // The series branch of psi(1/2 + x) - ln x joins the direct difference at the switch,
    // tends to 1/(24 x^2) (DLMF 5.11.8), and is psi(1/2) = -gamma - 2 ln 2 plus -ln x for
    // small x.
    #[test]
    fn special_half_shift_bracket_is_continuous_and_has_the_right_limits() {
        let at = HALF_SHIFT_SERIES_FROM;
        let series = digamma_half_shift_minus_ln(at);
        let direct = digamma(0.5 + at) - at.ln();
        assert!(close(series, direct, 1e-10), "{series} {direct}");
        // Just below the switch the direct branch is used; the two sides agree.
        let below = digamma_half_shift_minus_ln(at * (1.0 - 1e-12));
        assert!(close(below, series, 1e-9), "{below} {series}");
        for x in [1e3, 1e6, 1e9] {
            let value = digamma_half_shift_minus_ln(x);
            let leading = 1.0 / (24.0 * x * x);
            assert!(close(value, leading, 1.0 / (x * x)), "{x}: {value}");
        }
        let small: f64 = 1e-9;
        let expected = -EULER_GAMMA - 2.0 * 2f64.ln() - small.ln();
        assert!(close(digamma_half_shift_minus_ln(small), expected, 1e-8));
        assert!(digamma_half_shift_minus_ln(0.0).is_nan());
        assert!(digamma_half_shift_minus_ln(-1.0).is_nan());
        assert_eq!(digamma_half_shift_minus_ln(f64::INFINITY), 0.0);
    }
}
