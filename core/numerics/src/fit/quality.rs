//! Is the model right within the stated errors? Chi-square diagnostics shared by every fit:
//! the p-value, the Birge scaling of the covariance, the points that disagree most, a floor
//! on per-point relative uncertainties and the effective variance of errors in both
//! variables.
//!
//! # Conventions
//!
//! - **p-value.** P(chi^2_nu >= chi^2) = Q(nu/2, chi^2/2), the upper regularized incomplete
//!   gamma function (Abramowitz and Stegun, Handbook of Mathematical Functions, 26.4.19 and
//!   6.5.2), evaluated by its power series below a + 1 and by the Legendre continued
//!   fraction (A&S 6.5.31, in the modified Lentz form) above.
//! - **Birge ratio.** R_B = sqrt(chi^2 / nu) (R. T. Birge, Phys. Rev. 40, 207, 1932). When it
//!   exceeds 1, the covariance of a weighted fit is multiplied by R_B^2, the practice of the
//!   Particle Data Group for inconsistent data (PDG, Review of Particle Physics,
//!   introduction, "Unconstrained averaging"). It never shrinks a covariance: a fit better
//!   than its errors keeps the stated ones.
//! - **Floor.** No single point may pin a fit: a relative per-point uncertainty below
//!   [`RELATIVE_UNCERTAINTY_FLOOR`] is raised to it, and the fit says how many were raised
//!   (common practice: a Hall density or a resistivity is seldom reproducible to better
//!   than about 0.1 % between cooldowns, whatever its noise says).
//! - **Effective variance.** For y = f(x) with errors in both variables, the variance of a
//!   point is u_y^2 + (df/dx)^2 u_x^2 at the current parameters (J. A. Clutton-Brock,
//!   Technometrics 9, 261, 1967; J. Orear, Am. J. Phys. 50, 912, 1982).
//!
//! # The uncertainty conventions every analysis follows
//!
//! The budget follows JCGM 100:2008 (the GUM); inconsistent data are handled as Birge and the
//! Particle Data Group do; errors in both variables as Clutton-Brock and Orear (above).
//!
//! - **One sigma, total.** `X_unc` is the total standard uncertainty. Where a result has both
//!   kinds, `X_unc_stat` (Type A, from the scatter of the data) and `X_unc_sys` (Type B, from
//!   stated calibrations) sit beside it, and `X_unc` is their quadrature sum.
//! - **A calibration shared by a series is one error.** `hall.reduce`'s `_unc_sys` holds only
//!   errors common to every row of a sample (thickness, field, current and voltage scales). A
//!   fit over the series weighs its points by `_unc_stat` alone and applies the calibrations
//!   once, after the fit, through its own linear response to them (JCGM 100:2008 5.1.3 and
//!   5.2). It never adds them to the points as independent noise: that made the bars of N_D too
//!   small and those of E_D too large.
//! - **Errors in both variables.** `temperature_K_unc` enters every temperature-series fit as
//!   (d model / dT)^2 u_T^2 added to each point's variance at the current parameters
//!   ([`effective_uncertainty`]), the fit repeated until the weights settle
//!   ([`largest_relative_change`]).
//! - **Is the model right?** Every fit summary carries `reduced_chi_square`,
//!   `chi_square_p_value` ([`chi_square_p_value`]) and `birge_ratio`. A fit weighted by stated
//!   errors multiplies its covariance by chi^2/nu when that exceeds 1, never shrinks it, and
//!   below p = [`POOR_FIT_P_VALUE`] warns with the worst points ([`FitQuality::warning`]).
//! - **No point pins a fit.** `relative_uncertainty_floor` raises any smaller relative
//!   uncertainty: [`RELATIVE_UNCERTAINTY_FLOOR`] (1e-3) for the temperature-series fits; 1e-5
//!   of |sigma| for the sweep fits of the spectrum plugin, whose point-to-point noise is 1e-4
//!   to 1e-3 and whose reproducibility is a common scale already in the calibrations.
//!   `floored_points` counts the raised points.
//! - **Not stated is said.** Every analysis that applies calibrations lists the ones it had to
//!   assume (`calibrations_not_stated`, or `uncertainties_not_given` in the freeze-out fit).
//!
//! # Coverage: are the error bars honest?
//!
//! Tests draw realistic data (for raw readings
//! `mobilis_physics::forward::readings::lab_van_der_pauw_series`: autoranged current, 1 uV
//! voltmeter noise, 30 mK stage drift between readings, 3 mT remanence, 0.3 mT field wander,
//! calibration errors drawn once per series; for the sweep analyses noisy sweeps with remanence,
//! misalignment and pick-up), fit each realization with a fixed seed, and count how often the
//! truth lies within 1 and 2 reported standard uncertainties ([`Coverage`]). The rule
//! ([`Coverage::is_honest`]): 55-80 % within 1 sigma and at least 90 % within 2 (68.3 and 95.4 %
//! for a normal distribution). The default counts keep `cargo test --workspace` within a few
//! minutes on two cores; `MOBILIS_SLOW_TESTS=1` runs more realizations, several times longer
//! (the Shubnikov-de Haas realizations dominate: each runs the analysis four times for its
//! budget). A test with fixed seeds holds or fails the same way on every machine; with 40 to 100
//! realizations the 55-80 % rule can fail an honest error bar a few percent of the time, so a
//! new seed that fails is worth a look before it is blamed on chance. Each plugin's module docs
//! list its coverage tests and the last counts.

/// The smallest relative standard uncertainty a point keeps in a weighted fit (0.1 %).
pub const RELATIVE_UNCERTAINTY_FLOOR: f64 = 1e-3;

/// A p-value below this makes a fit's disagreement with its errors worth a warning.
pub const POOR_FIT_P_VALUE: f64 = 1e-3;

/// Chi-square statistics of a weighted fit and what was done with them.
#[derive(Debug, Clone, PartialEq)]
pub struct FitQuality {
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    /// chi^2 / nu (NaN when nu = 0).
    pub reduced_chi_square: f64,
    /// P(chi^2_nu >= chi^2) when the residuals are weighted by known errors (NaN when nu = 0).
    pub p_value: f64,
    /// The factor the standard errors were multiplied by: sqrt(chi^2 / nu) when that exceeds
    /// 1, else 1.
    pub birge_ratio: f64,
}

impl FitQuality {
    /// The statistics of `chi_square` on `degrees_of_freedom`.
    pub fn assess(chi_square: f64, degrees_of_freedom: usize) -> FitQuality {
        let nu = degrees_of_freedom as f64;
        let (reduced, p_value) = if degrees_of_freedom == 0 {
            (f64::NAN, f64::NAN)
        } else {
            (chi_square / nu, chi_square_p_value(chi_square, degrees_of_freedom))
        };
        let birge_ratio = if reduced.is_finite() && reduced > 1.0 {
            reduced.sqrt()
        } else {
            1.0
        };
        FitQuality {
            chi_square,
            degrees_of_freedom,
            reduced_chi_square: reduced,
            p_value,
            birge_ratio,
        }
    }

    /// True when the uncertainties were scaled up by the Birge ratio.
    pub fn scaled(&self) -> bool {
        self.birge_ratio > 1.0
    }

    /// True when the data disagree with the model beyond their errors ([`POOR_FIT_P_VALUE`]).
    pub fn poor(&self) -> bool {
        self.p_value.is_finite() && self.p_value < POOR_FIT_P_VALUE
    }

    /// A warning for a fit whose chi-square says the errors or the model fall short, naming
    /// the worst points by `describe_point(index)`; None for a fit consistent with its
    /// errors. `residuals` are the normalized residuals (model - data) / sigma.
    pub fn warning(&self, residuals: &[f64], describe_point: impl Fn(usize) -> String) -> Option<String> {
        if !self.poor() {
            return None;
        }
        let worst: Vec<String> = worst_points(residuals, 3)
            .into_iter()
            .map(|i| format!("{} ({:+.1} sigma)", describe_point(i), residuals[i]))
            .collect();
        Some(format!(
            "the model does not describe the data within their errors (reduced chi-square {:.3} on {} degrees of freedom, p = {:.2e}); the uncertainties were scaled by the Birge ratio {:.3}; worst points: {}",
            self.reduced_chi_square,
            self.degrees_of_freedom,
            self.p_value,
            self.birge_ratio,
            worst.join(", ")
        ))
    }
}

/// The indices of the `count` largest |residuals|, largest first (NaN residuals last).
pub fn worst_points(residuals: &[f64], count: usize) -> Vec<usize> {
    let mut order: Vec<usize> = (0..residuals.len()).collect();
    order.sort_by(|&a, &b| {
        let (x, y) = (residuals[a].abs(), residuals[b].abs());
        y.partial_cmp(&x).unwrap_or_else(|| x.is_nan().cmp(&y.is_nan()))
    });
    order.truncate(count);
    order
}

/// `relative` raised to `floor` (NaN stays NaN); the second value says whether it was raised.
pub fn floored_relative_uncertainty(relative: f64, floor: f64) -> (f64, bool) {
    if relative < floor {
        (floor, true)
    } else {
        (relative, false)
    }
}

/// sqrt(u_y^2 + (dy/dx)^2 u_x^2): the effective standard uncertainty of y when x is
/// uncertain too (Clutton-Brock 1967; Orear 1982).
pub fn effective_uncertainty(u_y: f64, dy_dx: f64, u_x: f64) -> f64 {
    (u_y * u_y + (dy_dx * u_x).powi(2)).sqrt()
}

/// The largest |new_i / old_i - 1|: how far one pass of re-weighting (effective variance)
/// moved the per-point uncertainties, to decide when they have settled.
pub fn largest_relative_change(new: &[f64], old: &[f64]) -> f64 {
    new.iter()
        .zip(old)
        .map(|(new, old)| (new / old - 1.0).abs())
        .fold(0.0, f64::max)
}

/// P(chi^2_nu >= chi_square): the probability that a chi-square variable with nu degrees of
/// freedom is at least as large. 1 for chi_square <= 0, NaN for nu = 0 or a NaN argument.
pub fn chi_square_p_value(chi_square: f64, degrees_of_freedom: usize) -> f64 {
    if degrees_of_freedom == 0 || chi_square.is_nan() {
        return f64::NAN;
    }
    if chi_square <= 0.0 {
        return 1.0;
    }
    upper_regularized_gamma(degrees_of_freedom as f64 / 2.0, chi_square / 2.0)
}

/// ln Gamma(x) for x > 0 by the Lanczos approximation with g = 7 and nine coefficients
/// (C. Lanczos, SIAM J. Numer. Anal. B 1, 86, 1964; the coefficient set of Godfrey, as
/// used widely), accurate to about 1e-15 relative.
pub fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const COEFFICIENTS: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // Reflection: Gamma(x) Gamma(1 - x) = pi / sin(pi x) (A&S 6.1.17).
        let pi = std::f64::consts::PI;
        return (pi / (pi * x).sin()).abs().ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut sum = COEFFICIENTS[0];
    for (k, c) in COEFFICIENTS.iter().enumerate().skip(1) {
        sum += c / (x + k as f64);
    }
    let t = x + G + 0.5;
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + sum.ln()
}

/// Q(a, x) = Gamma(a, x) / Gamma(a), the upper regularized incomplete gamma function.
pub fn upper_regularized_gamma(a: f64, x: f64) -> f64 {
    if x <= 0.0 {
        return 1.0;
    }
    let log_prefactor = a * x.ln() - x - ln_gamma(a);
    if x < a + 1.0 {
        // Series for P(a, x) (A&S 6.5.29): gamma(a, x) = x^a e^-x sum x^n / (a (a+1) ... (a+n)).
        let mut term = 1.0 / a;
        let mut sum = term;
        let mut denominator = a;
        for _ in 0..10_000 {
            denominator += 1.0;
            term *= x / denominator;
            sum += term;
            if term.abs() < sum.abs() * 1e-16 {
                break;
            }
        }
        (1.0 - sum * log_prefactor.exp()).clamp(0.0, 1.0)
    } else {
        // Continued fraction for Q(a, x) (A&S 6.5.31), evaluated by the modified Lentz method.
        let tiny = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / tiny;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..10_000 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < tiny {
                d = tiny;
            }
            c = b + an / c;
            if c.abs() < tiny {
                c = tiny;
            }
            d = 1.0 / d;
            let delta = d * c;
            h *= delta;
            if (delta - 1.0).abs() < 1e-16 {
                break;
            }
        }
        (log_prefactor.exp() * h).clamp(0.0, 1.0)
    }
}

/// How often a reported interval held the truth over repeated realizations: the count
/// within 1 and within 2 standard uncertainties.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Coverage {
    pub realizations: usize,
    pub within_one_sigma: usize,
    pub within_two_sigma: usize,
}

impl Coverage {
    /// Counts one realization: `estimate` with standard uncertainty `uncertainty` against
    /// `truth`. A missing or non-finite uncertainty counts as a miss.
    pub fn record(&mut self, estimate: f64, uncertainty: f64, truth: f64) {
        self.realizations += 1;
        if !(uncertainty.is_finite() && uncertainty > 0.0 && estimate.is_finite()) {
            return;
        }
        let z = ((estimate - truth) / uncertainty).abs();
        if z <= 1.0 {
            self.within_one_sigma += 1;
        }
        if z <= 2.0 {
            self.within_two_sigma += 1;
        }
    }

    /// The fraction of realizations whose truth lay within 1 sigma.
    pub fn one_sigma_fraction(&self) -> f64 {
        self.within_one_sigma as f64 / self.realizations as f64
    }

    /// The fraction of realizations whose truth lay within 2 sigma.
    pub fn two_sigma_fraction(&self) -> f64 {
        self.within_two_sigma as f64 / self.realizations as f64
    }

    /// Whether the error bars are honest by the project's rule: 55 % to 80 % of the truths
    /// within 1 sigma (68.3 % expected for a normal distribution) and at least 90 % within 2
    /// sigma (95.4 % expected).
    pub fn is_honest(&self) -> bool {
        let one = self.one_sigma_fraction();
        (0.55..=0.80).contains(&one) && self.two_sigma_fraction() >= 0.90
    }

    /// "68/100 within 1 sigma, 96/100 within 2 sigma", for test messages and tables.
    pub fn describe(&self) -> String {
        format!(
            "{}/{} within 1 sigma ({:.0} %), {}/{} within 2 sigma ({:.0} %)",
            self.within_one_sigma,
            self.realizations,
            100.0 * self.one_sigma_fraction(),
            self.within_two_sigma,
            self.realizations,
            100.0 * self.two_sigma_fraction()
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ln_gamma_matches_factorials_and_the_half_integer_value() {
        // Gamma(n) = (n - 1)! and Gamma(1/2) = sqrt(pi) (A&S 6.1.6 and 6.1.8).
        for (n, factorial) in [(1.0, 1.0), (2.0, 1.0), (5.0, 24.0), (11.0, 3_628_800.0_f64)] {
            assert!((ln_gamma(n) - factorial.ln()).abs() < 1e-12, "ln Gamma({n})");
        }
        let half = 0.5 * std::f64::consts::PI.ln();
        assert!((ln_gamma(0.5) - half).abs() < 1e-13);
        assert!((ln_gamma(0.1) - 2.252_712_651_734_206).abs() < 1e-12); // Gamma(0.1) = Gamma(1.1) / 0.1, A&S table 6.1
    }

    #[test]
    fn p_values_match_the_chi_square_table() {
        // Upper-tail critical values of the chi-square distribution (A&S table 26.8; NIST/SEMATECH
        // e-Handbook of Statistical Methods, 1.3.6.7.4): P(chi^2_nu >= x) = alpha.
        let table = [
            (1, 3.841, 0.05),
            (1, 6.635, 0.01),
            (2, 5.991, 0.05),
            (5, 11.070, 0.05),
            (10, 18.307, 0.05),
            (10, 23.209, 0.01),
            (30, 43.773, 0.05),
            (100, 124.342, 0.05),
        ];
        for (nu, x, alpha) in table {
            let p = chi_square_p_value(x, nu);
            // The table gives x to 3 decimals: 1 % of alpha covers that rounding.
            assert!((p - alpha).abs() < 0.01 * alpha, "nu {nu}, x {x}: p {p}");
        }
        // For nu = 2 the tail is exactly exp(-x/2).
        for x in [0.1, 1.0, 7.0, 40.0] {
            assert!((chi_square_p_value(x, 2) - (-x / 2.0_f64).exp()).abs() < 1e-14);
        }
        assert_eq!(chi_square_p_value(0.0, 3), 1.0);
        assert!(chi_square_p_value(1.0, 0).is_nan());
    }

    #[test]
    fn the_birge_ratio_only_ever_widens() {
        let good = FitQuality::assess(8.0, 10);
        assert_eq!(good.birge_ratio, 1.0);
        assert!(!good.scaled() && !good.poor());
        assert!(good.warning(&[0.1, -0.2], |i| format!("point {i}")).is_none());
        let bad = FitQuality::assess(400.0, 10);
        assert!((bad.birge_ratio - 40.0_f64.sqrt()).abs() < 1e-12);
        assert!(bad.scaled() && bad.poor());
        let warning = bad.warning(&[0.5, -9.0, 3.0, 1.0], |i| format!("T{i}")).unwrap();
        assert!(warning.contains("T1 (-9.0 sigma), T2 (+3.0 sigma), T3"), "{warning}");
    }

    #[test]
    fn coverage_counts_the_truth_inside_one_and_two_sigma() {
        let mut coverage = Coverage::default();
        coverage.record(1.0, 1.0, 0.5);
        coverage.record(1.0, 1.0, -0.5);
        coverage.record(1.0, 1.0, 4.0);
        coverage.record(1.0, f64::NAN, 1.0);
        assert_eq!((coverage.within_one_sigma, coverage.within_two_sigma), (1, 2));
        assert_eq!(coverage.realizations, 4);
    }

    #[test]
    fn the_floor_and_the_effective_variance() {
        assert_eq!(floored_relative_uncertainty(1e-9, 1e-3), (1e-3, true));
        assert_eq!(floored_relative_uncertainty(0.02, 1e-3), (0.02, false));
        assert!((effective_uncertainty(3.0, 2.0, 2.0) - 5.0).abs() < 1e-15);
        assert!((largest_relative_change(&[1.0, 2.2, 3.0], &[1.0, 2.0, 3.3]) - 0.1).abs() < 1e-12);
    }
}
