//! `mr.kohler`: magnetoresistance against B / rho(0) across temperatures, and how well the
//! curves collapse onto one (Kohler's rule).
//!
//! Pure computation: no DataFrames, no I/O. The table glue builds one [`KohlerCurve`] per
//! temperature of a sample (usually from `mr.ratio`, [`KohlerCurve::from_ratio`]) and writes
//! the scaled points, the collapse per x and the per-temperature numbers of the
//! [`KohlerAnalysis`] as tables and its verdict as the summary.
//!
//! # Kohler's rule
//!
//! In a conductor whose carriers keep their densities and share one relaxation time tau(T),
//! every mobility is tau times a constant, so mu_i B is proportional to B / rho(0) and the
//! magnetoresistance, a function of the mu_i B alone, is MR = F(B / rho(0)) with one F for
//! every temperature (M. Kohler, Ann. Phys. 424, 211, 1938; the reference from memory).
//! The curves of MR against x = B / rho(0) then collapse onto one. They do not when the
//! density changes with temperature (freeze-out, a thermally activated band), when carriers
//! scatter differently (their mobilities scale by different factors), or when a mechanism
//! beyond the Drude picture adds its own field dependence (weak localization, spin
//! scattering). Here rho(0) is the sheet resistivity, ohm per square, so x is in T/ohm; for
//! one sample the thickness is a common factor of every curve and does not change the
//! collapse.
//!
//! # The measure of collapse
//!
//! 0. **Uncertainties.** A curve given without uncertainties (its sweep had no
//!    rho_xx_ohm_sq_unc) takes each point's from the scatter of its neighbours along the
//!    curve: the median absolute third difference of MR around it, 1.4826 / sqrt(20) times
//!    (`with_estimated_uncertainties`). Without it, the lowest fields, where MR is below
//!    its noise, would be used and judged as if exact and fail the collapse by their noise
//!    alone. A curve whose scatter is below 1e-7 of its MR (computed, not measured) stays
//!    without; the summary lists the temperatures that were estimated.
//! 1. **Points used.** Per curve, the points with B > 0 and an MR that is clearly positive:
//!    MR > [`KohlerSettings::min_mr`] and, with uncertainties, MR > `significance` u_MR. A
//!    logarithm needs MR > 0, and at the lowest fields MR is far below its noise, where its
//!    logarithm is noise. (Cutting at a multiple of the noise biases the points just above
//!    the cut upwards by a fraction of their uncertainty; such points are noisier than the
//!    tolerance and are not judged in step 5.) A curve with fewer than two such points takes
//!    no part (a warning).
//! 2. **Common grid.** Each curve covers x from its lowest to its highest used point. The
//!    grid is [`KohlerSettings::grid_points`] values of x evenly spaced in ln x from the
//!    lowest x that two curves both cover to the highest; a grid point is evaluated when at
//!    least two curves cover it.
//! 3. **Resampling.** Each covering curve is evaluated at each grid x from its used points
//!    in the bin around it (ln x within half a grid step either side; the bins do not
//!    overlap, so every point enters one bin): a straight line ln MR = c + n ln x fitted to
//!    them (`mobilis_numerics::fit::fit_line`, weighted by the relative uncertainties u_MR / MR
//!    when given) and evaluated at the grid x, with its standard error when weighted. A line
//!    through a curved ln MR is off at the centre of a window of half width w by about
//!    f'' w^2 / 6 (f = ln MR as a function of ln x), up to about 1e-3 for the bend of a
//!    two-band MR at the default grid; that offset is nearly the same for every curve
//!    sampled alike. Near the end of a curve the bin is narrowed to stay symmetric about the
//!    grid x, since a one-sided window would be off by more, and only there, which would
//!    read as a spread. Where the bin holds fewer points than a line needs (2 weighted, 3
//!    unweighted), the curve is interpolated linearly in (ln x, ln MR) between its
//!    neighbouring points, with weights 1 - a and a, and the relative uncertainty of a
//!    linear combination of independent values, u^2 = (1 - a)^2 u_1^2 + a^2 u_2^2. Both are
//!    exact for a power law MR = c x^n, the shape classical MR takes at low field (n = 2); a
//!    bin's line averages its points' noise, which makes a dense sweep's comparison much
//!    sharper than its single points.
//! 4. **Spread.** At each grid x, with y_k = ln MR_k(x) of the K covering curves, the spread
//!    is their sample standard deviation s = sqrt(sum (y_k - mean y)^2 / (K - 1)): the
//!    relative scatter of the curves' MR about their mean, for example 0.05 for curves 5 %
//!    apart. Noise alone gives E[s^2] = v = (1/K) sum u_k^2 (u_k the standard uncertainty of
//!    y_k); when every covering curve has uncertainties, the noise spread is sqrt(v) and the
//!    excess spread sqrt(max(0, s^2 - v)) is what the curves differ by beyond their noise;
//!    otherwise the noise spread is unknown and the excess spread is s itself.
//! 5. **Verdict.** A grid point whose noise spread exceeds the tolerance is not judged (its
//!    curves are too noisy there to tell a collapse within the tolerance from none). A
//!    judged point has collapsed when s^2 - v <= t^2 + 3 e, t the tolerance and
//!    e = sqrt(v (4 t^2 + 2 v) / (K - 1)) the standard error of s^2 - v when the curves lie
//!    t apart (first order, Gaussian noise): a spread more than three standard errors beyond
//!    the tolerance fails. Without noise (v = 0) the test is s <= t. Perfectly collapsed
//!    curves then fail by chance with a probability below 0.3 % per grid point (chi-square
//!    with one degree of freedom beyond 9.3 at v = t^2, the worst case). Kohler's rule holds
//!    when every judged grid point has collapsed (unknown when none could be judged). Where
//!    it has not, the contiguous x ranges are reported ([`FailureRange`]) with their largest
//!    excess spread and the temperature that deviates most there.
//! 6. **Which temperatures.** At each grid point, the deviation of curve k is y_k minus the
//!    mean of the other covering curves (leave one out, so that one curve off the others
//!    stands out rather than pulling the mean towards itself); each curve's rms and mean
//!    (signed: positive above the others) over the grid points it covers say which
//!    temperatures leave the master curve and in which direction.
//! 7. **Power laws.** Per curve, MR = a x^n fitted by the weighted straight line ln MR =
//!    ln a + n ln x (`mobilis_numerics::fit::fit_line`, weights from u_MR / MR when given) over the
//!    used points, or over those within [`KohlerSettings::power_law_range`]. n is 2 in the
//!    classical low-field regime and falls towards 0 where MR saturates; curves that collapse
//!    share a and n over a common x range. a is MR at x = 1 T/ohm, possibly far outside the
//!    data, so its uncertainty is strongly correlated with that of n.
//!
//! The default tolerance, 0.05 in ln MR (curves 5 % apart), is a choice: Kohler plots are
//! judged on logarithmic axes, where 5 % is about the line width of a printed curve, and no
//! published threshold exists.

use mobilis_numerics::fit::fit_line;

use crate::ratio::MrCurve;

/// One point of a curve: |B|, MR and its standard uncertainty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KohlerInput {
    /// T; points at B <= 0 are not used (x = 0 has no logarithm).
    pub field_t: f64,
    pub mr: f64,
    pub mr_unc: Option<f64>,
}

/// The MR curve of one temperature.
#[derive(Debug, Clone, PartialEq)]
pub struct KohlerCurve {
    pub temperature_k: f64,
    /// Zero-field sheet resistivity, ohm per square.
    pub rho0_ohm_sq: f64,
    pub points: Vec<KohlerInput>,
}

impl KohlerCurve {
    /// The curve of an `mr.ratio` result at `temperature_k`.
    pub fn from_ratio(temperature_k: f64, curve: &MrCurve) -> Self {
        KohlerCurve {
            temperature_k,
            rho0_ohm_sq: curve.zero_field.rho_ohm_sq,
            points: curve
                .points
                .iter()
                .map(|p| KohlerInput {
                    field_t: p.field_t,
                    mr: p.mr,
                    mr_unc: p.mr_unc,
                })
                .collect(),
        }
    }
}

/// Settings of [`kohler`]; [`KohlerSettings::default`] documents the defaults.
#[derive(Debug, Clone, PartialEq)]
pub struct KohlerSettings {
    /// Largest excess spread of ln MR between curves at which the rule still holds.
    /// Default 0.05 (see the module documentation).
    pub tolerance: f64,
    /// Grid points in x. Default 30: several per decade over the two or three decades a
    /// Kohler plot spans.
    pub grid_points: usize,
    /// Smallest MR used. Default 1e-6, about the resolution of a resistance bridge.
    pub min_mr: f64,
    /// With uncertainties, MR must exceed this many standard uncertainties. Default 2.
    pub significance: f64,
    /// x range (T/ohm) of the power-law fits; default: every used point.
    pub power_law_range: Option<(f64, f64)>,
}

impl Default for KohlerSettings {
    fn default() -> Self {
        KohlerSettings {
            tolerance: 0.05,
            grid_points: 30,
            min_mr: 1e-6,
            significance: 2.0,
            power_law_range: None,
        }
    }
}

/// One point of a curve on Kohler's axes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KohlerPoint {
    pub temperature_k: f64,
    pub field_t: f64,
    /// B / rho(0), T/ohm.
    pub x_t_per_ohm: f64,
    pub mr: f64,
    pub mr_unc: Option<f64>,
    /// Entered the collapse measure and the power-law fit.
    pub used: bool,
}

/// The collapse at one x of the common grid.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GridPoint {
    pub x_t_per_ohm: f64,
    /// Curves covering this x.
    pub curves: usize,
    /// exp(mean ln MR) of the covering curves (the master curve); `None` below two curves.
    pub master_mr: Option<f64>,
    /// Sample standard deviation of ln MR between the curves.
    pub spread: Option<f64>,
    /// What noise alone would give; `None` unless every covering curve has uncertainties.
    pub noise_spread: Option<f64>,
    /// Spread beyond the noise (the spread itself without uncertainties).
    pub excess_spread: Option<f64>,
    /// The curves agree within the tolerance here (module documentation, step 5); `None`
    /// where fewer than two curves are compared or the noise spread exceeds the tolerance.
    pub collapsed: Option<bool>,
    /// The temperature whose ln MR is furthest from the mean of the others here.
    pub worst_temperature_k: Option<f64>,
}

/// How far one temperature's curve lies from the others.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CurveDeviation {
    pub temperature_k: f64,
    /// Points used.
    pub used_points: usize,
    /// x range of the used points, T/ohm.
    pub x_range: Option<(f64, f64)>,
    /// Evaluated grid points this curve covers.
    pub grid_points: usize,
    /// rms over those grid points of ln MR minus the mean of the other curves.
    pub rms_deviation: Option<f64>,
    /// The mean of the same (positive: above the others).
    pub mean_deviation: Option<f64>,
}

/// MR = a x^n fitted to one curve.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PowerLaw {
    pub temperature_k: f64,
    /// n.
    pub exponent: f64,
    pub exponent_unc: f64,
    /// a: MR at x = 1 T/ohm.
    pub prefactor: f64,
    pub prefactor_unc: f64,
    pub points: usize,
    /// x range fitted, T/ohm.
    pub x_range: (f64, f64),
    /// chi-square per degree of freedom (NaN for two weighted points).
    pub reduced_chi_square: f64,
}

/// A contiguous x range where the curves do not collapse.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FailureRange {
    pub x_low_t_per_ohm: f64,
    pub x_high_t_per_ohm: f64,
    pub max_excess_spread: f64,
    /// The temperature most often furthest from the others within the range (ties go to the
    /// one at the largest excess spread).
    pub worst_temperature_k: f64,
}

/// The Kohler analysis of a set of curves.
#[derive(Debug, Clone, PartialEq)]
pub struct KohlerAnalysis {
    /// Every input point on Kohler's axes, curve by curve in input order.
    pub points: Vec<KohlerPoint>,
    pub grid: Vec<GridPoint>,
    /// One per input curve, in input order.
    pub deviations: Vec<CurveDeviation>,
    /// One per input curve; `None` where too few points were usable.
    pub power_laws: Vec<Option<PowerLaw>>,
    /// The x range of the grid, T/ohm.
    pub overlap_t_per_ohm: (f64, f64),
    pub tolerance: f64,
    /// Kohler's rule holds within the tolerance at every judged grid point; `None` when no
    /// grid point could be judged (every one noisier than the tolerance).
    pub holds: Option<bool>,
    /// The largest excess spread over the judged grid points and where (`None` when no
    /// point could be judged, as for the two below).
    pub max_excess_spread: Option<f64>,
    pub max_excess_x_t_per_ohm: Option<f64>,
    /// rms over the judged grid points of the spread and of the excess spread.
    pub rms_spread: Option<f64>,
    pub rms_excess_spread: Option<f64>,
    pub failures: Vec<FailureRange>,
    /// The temperature of largest rms deviation.
    pub most_deviating_temperature_k: f64,
    /// The temperatures of the curves without stated uncertainties whose points took them
    /// from the curve's own scatter ([`kohler`], step 0).
    pub estimated_temperatures_k: Vec<f64>,
    pub warnings: Vec<String>,
}

/// Why the analysis cannot be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum KohlerError {
    /// Fewer than two curves given.
    #[error(
        "a Kohler plot compares curves at different temperatures and {curves} was given; give MR curves of one sample at two or more temperatures"
    )]
    TooFewCurves { curves: usize },
    /// A curve's temperature or rho(0) is not finite and positive.
    #[error("curve {curve}: {what} is {value}; give a finite positive value")]
    InvalidCurve {
        curve: usize,
        what: &'static str,
        value: f64,
    },
    /// A point's value is not usable.
    #[error(
        "curve {curve}, point {index}: {column} is {value}; give finite values and uncertainties of 0 or more, or drop the point"
    )]
    InvalidPoint {
        curve: usize,
        index: usize,
        column: &'static str,
        value: f64,
    },
    /// Some points of a curve have uncertainties and others not.
    #[error(
        "curve {curve} has uncertainties on some points and not on others; give them for every point of the curve or for none"
    )]
    MixedUncertainties { curve: usize },
    /// Fewer than two curves have two usable points.
    #[error(
        "only {usable} curve(s) have two or more points with a clearly positive MR; measure to higher field, or lower min_mr or significance"
    )]
    TooFewUsableCurves { usable: usize },
    /// No two curves share a range of x.
    #[error(
        "no two curves share a range of B / rho(0) (T/ohm: {}); measure to fields where the curves overlap",
        ranges_text(.ranges)
    )]
    NoOverlap { ranges: Vec<(f64, f64, f64)> },
    /// A setting out of its range.
    #[error("setting {name} is {value}; {requirement}")]
    InvalidSetting {
        name: &'static str,
        value: f64,
        requirement: &'static str,
    },
}

/// The x range of each curve, "T K: low to high".
fn ranges_text(ranges: &[(f64, f64, f64)]) -> String {
    let text: Vec<String> = ranges
        .iter()
        .map(|(t, lo, hi)| format!("{} K: {lo:.4e} to {hi:.4e}", mobilis_physics::units::format_number(*t)))
        .collect();
    text.join("; ")
}

/// How many standard errors of the spread estimate a judged grid point may exceed the
/// tolerance by (see the module documentation, step 5).
const STANDARD_ERRORS_ALLOWED: f64 = 3.0;

/// A curve's used points in log coordinates.
struct LogCurve {
    ln_x: Vec<f64>,
    ln_mr: Vec<f64>,
    /// Relative uncertainty u_MR / MR per point, when the curve has uncertainties.
    relative_unc: Option<Vec<f64>>,
}

impl LogCurve {
    fn covers(&self, ln_x: f64) -> bool {
        self.ln_x.len() >= 2 && ln_x >= self.ln_x[0] && ln_x <= self.ln_x[self.ln_x.len() - 1]
    }

    /// ln MR and its standard uncertainty at `ln_x` (which it covers), from the points in
    /// [ln_x - w, ln_x + w), w the half width narrowed to stay within the curve.
    fn at(&self, ln_x: f64, half_width: f64) -> (f64, Option<f64>) {
        let last = self.ln_x.len() - 1;
        let w = half_width.min(ln_x - self.ln_x[0]).min(self.ln_x[last] - ln_x);
        let start = self.ln_x.partition_point(|v| *v < ln_x - w);
        let end = self.ln_x.partition_point(|v| *v < ln_x + w);
        let required = if self.relative_unc.is_some() { 2 } else { 3 };
        if end - start >= required {
            let sigma = self.relative_unc.as_ref().map(|u| &u[start..end]);
            if let Ok(line) = fit_line(&self.ln_x[start..end], &self.ln_mr[start..end], sigma) {
                let unc = sigma.map(|_| line.evaluate_unc(ln_x));
                return (line.evaluate(ln_x), unc);
            }
        }
        self.interpolate(ln_x)
    }

    /// Linear interpolation in (ln x, ln MR) between the neighbouring points.
    fn interpolate(&self, ln_x: f64) -> (f64, Option<f64>) {
        let last = self.ln_x.len() - 1;
        let upper = self.ln_x.partition_point(|v| *v <= ln_x).clamp(1, last);
        let (a, b) = (upper - 1, upper);
        let w = ((ln_x - self.ln_x[a]) / (self.ln_x[b] - self.ln_x[a])).clamp(0.0, 1.0);
        let value = (1.0 - w) * self.ln_mr[a] + w * self.ln_mr[b];
        let unc = self.relative_unc.as_ref().map(|u| ((1.0 - w) * u[a]).hypot(w * u[b]));
        (value, unc)
    }
}

fn validate(curves: &[KohlerCurve], settings: &KohlerSettings) -> Result<(), KohlerError> {
    let setting = |name: &'static str, value: f64, ok: bool, requirement: &'static str| {
        if ok {
            Ok(())
        } else {
            Err(KohlerError::InvalidSetting {
                name,
                value,
                requirement,
            })
        }
    };
    setting(
        "tolerance",
        settings.tolerance,
        settings.tolerance.is_finite() && settings.tolerance >= 0.0,
        "give a finite spread of ln MR of 0 or more, such as 0.05 for curves 5 % apart",
    )?;
    setting(
        "grid_points",
        settings.grid_points as f64,
        settings.grid_points >= 2,
        "give at least 2 grid points",
    )?;
    setting(
        "min_mr",
        settings.min_mr,
        settings.min_mr.is_finite() && settings.min_mr > 0.0,
        "give a finite positive MR (its logarithm must exist)",
    )?;
    setting(
        "significance",
        settings.significance,
        settings.significance.is_finite() && settings.significance >= 0.0,
        "give a finite number of standard uncertainties of 0 or more",
    )?;
    if let Some((low, high)) = settings.power_law_range {
        setting(
            "power_law_range",
            if low.is_finite() && low > 0.0 { high } else { low },
            low.is_finite() && high.is_finite() && low > 0.0 && high > low,
            "give a finite positive x range in T/ohm, lower < upper",
        )?;
    }
    if curves.len() < 2 {
        return Err(KohlerError::TooFewCurves { curves: curves.len() });
    }
    for (c, curve) in curves.iter().enumerate() {
        for (what, value) in [
            ("temperature_K", curve.temperature_k),
            ("rho0_ohm_sq", curve.rho0_ohm_sq),
        ] {
            if !(value.is_finite() && value > 0.0) {
                return Err(KohlerError::InvalidCurve { curve: c, what, value });
            }
        }
        let with = curve.points.iter().filter(|p| p.mr_unc.is_some()).count();
        if with != 0 && with != curve.points.len() {
            return Err(KohlerError::MixedUncertainties { curve: c });
        }
        for (index, point) in curve.points.iter().enumerate() {
            let invalid = |column: &'static str, value: f64| KohlerError::InvalidPoint {
                curve: c,
                index,
                column,
                value,
            };
            if !point.field_t.is_finite() {
                return Err(invalid("field_T", point.field_t));
            }
            if !point.mr.is_finite() {
                return Err(invalid("mr", point.mr));
            }
            if let Some(u) = point.mr_unc {
                if !(u.is_finite() && u >= 0.0) {
                    return Err(invalid("mr_unc", u));
                }
            }
        }
    }
    Ok(())
}

/// The Kohler analysis of `curves` (see the module documentation).
pub fn kohler(curves: &[KohlerCurve], settings: &KohlerSettings) -> Result<KohlerAnalysis, KohlerError> {
    validate(curves, settings)?;
    let mut warnings = Vec::new();

    // Step 0: a curve without uncertainties takes them from its own scatter.
    let estimated: Vec<Option<KohlerCurve>> = curves.iter().map(with_estimated_uncertainties).collect();
    let estimated_temperatures_k: Vec<f64> = curves
        .iter()
        .zip(&estimated)
        .filter(|(_, estimate)| estimate.is_some())
        .map(|(curve, _)| curve.temperature_k)
        .collect();
    if !estimated_temperatures_k.is_empty() {
        let temperatures: Vec<String> = estimated_temperatures_k
            .iter()
            .map(|t| format!("{} K", mobilis_physics::units::format_number(*t)))
            .collect();
        warnings.push(format!(
            "the curves at {} carry no MR uncertainties: each point's was estimated from the scatter of its neighbours along the curve (third differences), and sets which points are clearly positive and the noise the spread is judged against; give rho_xx_ohm_sq_unc for stated ones",
            temperatures.join(", ")
        ));
    }
    let owned: Vec<KohlerCurve> = curves
        .iter()
        .zip(estimated)
        .map(|(curve, estimate)| estimate.unwrap_or_else(|| curve.clone()))
        .collect();
    let curves = &owned[..];

    // Step 1: scaled points and the ones used.
    let mut points = Vec::new();
    let mut log_curves = Vec::with_capacity(curves.len());
    for curve in curves {
        let mut used: Vec<(f64, f64, Option<f64>)> = Vec::new();
        for p in &curve.points {
            let x = p.field_t / curve.rho0_ohm_sq;
            let usable =
                p.field_t > 0.0 && p.mr > settings.min_mr && p.mr_unc.is_none_or(|u| p.mr > settings.significance * u);
            points.push(KohlerPoint {
                temperature_k: curve.temperature_k,
                field_t: p.field_t,
                x_t_per_ohm: x,
                mr: p.mr,
                mr_unc: p.mr_unc,
                used: usable,
            });
            if usable {
                used.push((x.ln(), p.mr.ln(), p.mr_unc.map(|u| u / p.mr)));
            }
        }
        used.sort_by(|a, b| a.0.total_cmp(&b.0));
        // Repeated fields of one curve (the symmetrized grid has none) would make a zero
        // interval; the first of equal x is kept.
        used.dedup_by(|b, a| b.0 == a.0);
        let weighted = curve.points.first().is_some_and(|p| p.mr_unc.is_some());
        if used.len() < 2 {
            warnings.push(format!(
                "the {} K curve has {} point(s) with a clearly positive MR (above {:e}{}) and takes no part; measure to higher field or lower min_mr",
                mobilis_physics::units::format_number(curve.temperature_k),
                used.len(),
                settings.min_mr,
                if weighted {
                    format!(" and {} standard uncertainties", settings.significance)
                } else {
                    String::new()
                }
            ));
        }
        log_curves.push(LogCurve {
            ln_x: used.iter().map(|u| u.0).collect(),
            ln_mr: used.iter().map(|u| u.1).collect(),
            relative_unc: weighted.then(|| used.iter().map(|u| u.2.unwrap_or(0.0)).collect()),
        });
    }
    let usable: Vec<usize> = (0..curves.len()).filter(|&k| log_curves[k].ln_x.len() >= 2).collect();
    if usable.len() < 2 {
        return Err(KohlerError::TooFewUsableCurves { usable: usable.len() });
    }

    // Step 2: the x range two curves share.
    let span = |k: usize| (log_curves[k].ln_x[0], *log_curves[k].ln_x.last().expect("two points"));
    let (mut low, mut high) = (f64::INFINITY, f64::NEG_INFINITY);
    for (i, &a) in usable.iter().enumerate() {
        for &b in &usable[i + 1..] {
            let (lo, hi) = (span(a).0.max(span(b).0), span(a).1.min(span(b).1));
            if lo <= hi {
                low = low.min(lo);
                high = high.max(hi);
            }
        }
    }
    if low > high {
        return Err(KohlerError::NoOverlap {
            ranges: usable
                .iter()
                .map(|&k| (curves[k].temperature_k, span(k).0.exp(), span(k).1.exp()))
                .collect(),
        });
    }
    let n = if high > low { settings.grid_points } else { 1 };
    let half_width = if n > 1 {
        0.5 * (high - low) / (n - 1) as f64
    } else {
        0.0
    };
    let grid_ln: Vec<f64> = (0..n)
        .map(|i| {
            if n == 1 {
                low
            } else {
                // The ends exactly, so that the curves defining them cover them.
                match i {
                    0 => low,
                    _ if i == n - 1 => high,
                    _ => low + (high - low) * i as f64 / (n - 1) as f64,
                }
            }
        })
        .collect();

    // Steps 3, 4 and 6 per grid point.
    let mut grid = Vec::with_capacity(n);
    let mut sums = vec![(0usize, 0.0f64, 0.0f64); curves.len()];
    // Per evaluated grid point: the worst curve, for the failure ranges.
    for &ln_x in &grid_ln {
        let covering: Vec<(usize, f64, Option<f64>)> = usable
            .iter()
            .filter(|&&k| log_curves[k].covers(ln_x))
            .map(|&k| {
                let (y, u) = log_curves[k].at(ln_x, half_width);
                (k, y, u)
            })
            .collect();
        let count = covering.len();
        if count < 2 {
            grid.push(GridPoint {
                x_t_per_ohm: ln_x.exp(),
                curves: count,
                master_mr: None,
                spread: None,
                noise_spread: None,
                excess_spread: None,
                collapsed: None,
                worst_temperature_k: None,
            });
            continue;
        }
        let k = count as f64;
        let total: f64 = covering.iter().map(|c| c.1).sum();
        let mean = total / k;
        let spread = (covering.iter().map(|c| (c.1 - mean).powi(2)).sum::<f64>() / (k - 1.0)).sqrt();
        let noise_spread = covering
            .iter()
            .map(|c| c.2)
            .collect::<Option<Vec<f64>>>()
            .map(|u| (u.iter().map(|v| v * v).sum::<f64>() / k).sqrt());
        let variance = noise_spread.map_or(0.0, |noise| noise * noise);
        let excess = (spread * spread - variance).max(0.0).sqrt();
        let tolerance = settings.tolerance;
        let judged = noise_spread.is_none_or(|noise| noise <= tolerance);
        let standard_error = (variance * (4.0 * tolerance * tolerance + 2.0 * variance) / (k - 1.0)).sqrt();
        let collapsed = judged
            .then_some(spread * spread - variance <= tolerance * tolerance + STANDARD_ERRORS_ALLOWED * standard_error);
        let mut worst = (f64::NEG_INFINITY, 0usize);
        for &(curve, y, _) in &covering {
            let others = (total - y) / (k - 1.0);
            let deviation = y - others;
            let entry = &mut sums[curve];
            entry.0 += 1;
            entry.1 += deviation * deviation;
            entry.2 += deviation;
            if deviation.abs() > worst.0 {
                worst = (deviation.abs(), curve);
            }
        }
        grid.push(GridPoint {
            x_t_per_ohm: ln_x.exp(),
            curves: count,
            master_mr: Some(mean.exp()),
            spread: Some(spread),
            noise_spread,
            excess_spread: Some(excess),
            collapsed,
            worst_temperature_k: Some(curves[worst.1].temperature_k),
        });
    }

    // Step 5: verdict and failure ranges, and the summary numbers over the judged points
    // (where the spread is noise, its size says nothing about the collapse).
    let evaluated = grid.iter().filter(|g| g.excess_spread.is_some()).count();
    let judged: Vec<&GridPoint> = grid.iter().filter(|g| g.collapsed.is_some()).collect();
    let unjudged = evaluated - judged.len();
    let holds = (!judged.is_empty()).then(|| judged.iter().all(|g| g.collapsed == Some(true)));
    let max_excess = judged
        .iter()
        .map(|g| (g.excess_spread.expect("judged"), g.x_t_per_ohm))
        .reduce(|best, next| if next.0 > best.0 { next } else { best });
    let rms = |f: &dyn Fn(&GridPoint) -> f64| {
        (!judged.is_empty()).then(|| (judged.iter().map(|g| f(g).powi(2)).sum::<f64>() / judged.len() as f64).sqrt())
    };
    let rms_spread = rms(&|g| g.spread.expect("judged"));
    let rms_excess_spread = rms(&|g| g.excess_spread.expect("judged"));
    let failures = failure_ranges(&grid);

    // Per-curve deviations and power laws.
    let deviations: Vec<CurveDeviation> = curves
        .iter()
        .enumerate()
        .map(|(k, curve)| {
            let (count, sum_sq, sum) = sums[k];
            let lc = &log_curves[k];
            CurveDeviation {
                temperature_k: curve.temperature_k,
                used_points: lc.ln_x.len(),
                x_range: (!lc.ln_x.is_empty()).then(|| (lc.ln_x[0].exp(), lc.ln_x[lc.ln_x.len() - 1].exp())),
                grid_points: count,
                rms_deviation: (count > 0).then(|| (sum_sq / count as f64).sqrt()),
                mean_deviation: (count > 0).then(|| sum / count as f64),
            }
        })
        .collect();
    let most_deviating_temperature_k = deviations
        .iter()
        .filter_map(|d| d.rms_deviation.map(|r| (r, d.temperature_k)))
        .fold(
            (f64::NEG_INFINITY, f64::NAN),
            |best, next| if next.0 > best.0 { next } else { best },
        )
        .1;
    let power_laws: Vec<Option<PowerLaw>> = curves
        .iter()
        .zip(&log_curves)
        .map(|(curve, lc)| power_law(curve.temperature_k, lc, settings.power_law_range, &mut warnings))
        .collect();

    if evaluated < grid.len() {
        warnings.push(format!(
            "{} of {} grid points between {:.4e} and {:.4e} T/ohm are covered by fewer than two curves and were not compared",
            grid.len() - evaluated,
            grid.len(),
            low.exp(),
            high.exp()
        ));
    }
    if unjudged > 0 {
        warnings.push(format!(
            "at {unjudged} of {evaluated} compared grid points the curves are noisier than the tolerance {}, so the collapse was not judged there",
            settings.tolerance
        ));
        if judged.is_empty() {
            warnings.push(
                "no grid point could be judged, so whether Kohler's rule holds is unknown; measure with less noise or to higher field, or raise the tolerance".to_string(),
            );
        }
    }
    for &index in &usable {
        if sums[index].0 == 0 {
            warnings.push(format!(
                "the {} K curve shares no x range with another curve and was not compared",
                mobilis_physics::units::format_number(curves[index].temperature_k)
            ));
        }
    }

    Ok(KohlerAnalysis {
        points,
        grid,
        deviations,
        power_laws,
        overlap_t_per_ohm: (low.exp(), high.exp()),
        tolerance: settings.tolerance,
        holds,
        max_excess_spread: max_excess.map(|m| m.0),
        max_excess_x_t_per_ohm: max_excess.map(|m| m.1),
        rms_spread,
        rms_excess_spread,
        failures,
        most_deviating_temperature_k,
        estimated_temperatures_k,
        warnings,
    })
}

/// Third differences that estimate one point's noise: those of the points within this many
/// places either side.
const SCATTER_WINDOW: usize = 20;

/// Fewest third differences a scatter estimate is made from.
const SCATTER_MIN_DIFFERENCES: usize = 5;

/// Below this noise relative to MR (at the median point), a curve is taken as computed, not
/// measured, and left without uncertainties: a tenth of the default `min_mr`, itself about
/// the resolution of a resistance bridge. A dense computed two-band curve shows about 6e-9
/// (its curvature and rounding).
const NEGLIGIBLE_RELATIVE_SCATTER: f64 = 1e-7;

/// `curve` with each point's MR uncertainty estimated from the scatter of its neighbours,
/// when it has none stated and enough points for the estimate; `None` otherwise.
///
/// Along a dense sweep, the third difference m[i+2] - 3 m[i+1] + 3 m[i] - m[i-1] of the MR
/// values cancels any quadratic trend, so it is noise alone wherever the curve's third
/// derivative times the field step cubed is small; independent noise of standard deviation
/// u gives it the variance 20 u^2 (1 + 9 + 9 + 1). Each point's u is taken from the median
/// absolute third difference around it (1.4826 x the median estimates a normal standard
/// deviation robustly: P. J. Rousseeuw and C. Croux, J. Am. Stat. Assoc. 88, 1273 (1993)),
/// so that a noise growing with MR is followed along the curve. On a sparse sweep the trend
/// does not cancel and the estimate is too large, which marks fewer points as clearly
/// positive and judges fewer grid points: the verdict errs towards "unknown".
fn with_estimated_uncertainties(curve: &KohlerCurve) -> Option<KohlerCurve> {
    if curve.points.iter().any(|p| p.mr_unc.is_some()) {
        return None;
    }
    let mut order: Vec<usize> = (0..curve.points.len())
        .filter(|&i| curve.points[i].field_t > 0.0)
        .collect();
    order.sort_by(|&a, &b| curve.points[a].field_t.total_cmp(&curve.points[b].field_t));
    if order.len() < SCATTER_MIN_DIFFERENCES + 3 {
        return None;
    }
    let mr = |k: usize| curve.points[order[k]].mr;
    let differences: Vec<f64> = (1..order.len() - 2)
        .map(|k| (mr(k + 2) - 3.0 * mr(k + 1) + 3.0 * mr(k) - mr(k - 1)).abs())
        .collect();
    // Difference j is centred between points j + 1 and j + 2.
    let mut uncertainties = vec![None; curve.points.len()];
    let mut window: Vec<f64> = Vec::with_capacity(2 * SCATTER_WINDOW + 2);
    for (k, &point) in order.iter().enumerate() {
        let first = (k + 1).saturating_sub(SCATTER_WINDOW + 2);
        let last = (k + SCATTER_WINDOW).min(differences.len() - 1);
        window.clear();
        window.extend_from_slice(&differences[first..=last]);
        window.sort_unstable_by(f64::total_cmp);
        let median = if window.len() % 2 == 1 {
            window[window.len() / 2]
        } else {
            0.5 * (window[window.len() / 2 - 1] + window[window.len() / 2])
        };
        uncertainties[point] = Some(1.4826 * median / 20f64.sqrt());
    }
    // A curve computed without noise leaves only rounding in its differences.
    let mut relative: Vec<f64> = order
        .iter()
        .filter(|&&i| curve.points[i].mr > 0.0)
        .map(|&i| uncertainties[i].unwrap_or(0.0) / curve.points[i].mr)
        .collect();
    relative.sort_unstable_by(f64::total_cmp);
    if relative
        .get(relative.len() / 2)
        .is_none_or(|&median| median < NEGLIGIBLE_RELATIVE_SCATTER)
    {
        return None;
    }
    // Points at B <= 0 are not used, but a curve is uncertain at every point or at none:
    // they take the smallest estimate.
    let smallest = uncertainties.iter().flatten().copied().fold(f64::INFINITY, f64::min);
    Some(KohlerCurve {
        temperature_k: curve.temperature_k,
        rho0_ohm_sq: curve.rho0_ohm_sq,
        points: curve
            .points
            .iter()
            .zip(uncertainties)
            .map(|(point, estimate)| KohlerInput {
                mr_unc: Some(estimate.unwrap_or(smallest)),
                ..*point
            })
            .collect(),
    })
}

/// Contiguous runs of evaluated grid points beyond the tolerance; a grid point covered by
/// fewer than two curves ends a run.
fn failure_ranges(grid: &[GridPoint]) -> Vec<FailureRange> {
    let mut ranges = Vec::new();
    let mut run: Vec<&GridPoint> = Vec::new();
    let mut close = |run: &mut Vec<&GridPoint>| {
        if run.is_empty() {
            return;
        }
        // The temperature furthest from the others at most of the run's points.
        let mut votes: Vec<(f64, usize, f64)> = Vec::new();
        for g in run.iter() {
            let (t, excess) = (
                g.worst_temperature_k.expect("evaluated"),
                g.excess_spread.expect("evaluated"),
            );
            match votes.iter_mut().find(|v| v.0 == t) {
                Some(v) => {
                    v.1 += 1;
                    v.2 = v.2.max(excess);
                }
                None => votes.push((t, 1, excess)),
            }
        }
        let worst = votes
            .iter()
            .max_by(|a, b| a.1.cmp(&b.1).then(a.2.total_cmp(&b.2)))
            .expect("a run has points");
        ranges.push(FailureRange {
            x_low_t_per_ohm: run[0].x_t_per_ohm,
            x_high_t_per_ohm: run[run.len() - 1].x_t_per_ohm,
            max_excess_spread: run
                .iter()
                .map(|g| g.excess_spread.expect("evaluated"))
                .fold(0.0, f64::max),
            worst_temperature_k: worst.0,
        });
        run.clear();
    };
    for g in grid {
        if g.collapsed == Some(false) {
            run.push(g);
        } else {
            close(&mut run);
        }
    }
    close(&mut run);
    ranges
}

/// MR = a x^n over the used points of one curve (within `range` when given).
fn power_law(
    temperature_k: f64,
    curve: &LogCurve,
    range: Option<(f64, f64)>,
    warnings: &mut Vec<String>,
) -> Option<PowerLaw> {
    let selected: Vec<usize> = (0..curve.ln_x.len())
        .filter(|&i| range.is_none_or(|(lo, hi)| curve.ln_x[i] >= lo.ln() && curve.ln_x[i] <= hi.ln()))
        .collect();
    let x: Vec<f64> = selected.iter().map(|&i| curve.ln_x[i]).collect();
    let y: Vec<f64> = selected.iter().map(|&i| curve.ln_mr[i]).collect();
    // A zero relative uncertainty (an exact point) cannot weight a fit; such a curve is
    // fitted unweighted.
    let sigma: Option<Vec<f64>> = curve
        .relative_unc
        .as_ref()
        .map(|u| selected.iter().map(|&i| u[i]).collect::<Vec<f64>>())
        .filter(|u| u.iter().all(|v| *v > 0.0));
    match fit_line(&x, &y, sigma.as_deref()) {
        Ok(line) => {
            let prefactor = line.intercept.exp();
            Some(PowerLaw {
                temperature_k,
                exponent: line.slope,
                exponent_unc: line.slope_unc,
                prefactor,
                prefactor_unc: prefactor * line.intercept_unc,
                points: x.len(),
                x_range: (x[0].exp(), x[x.len() - 1].exp()),
                reduced_chi_square: line.reduced_chi_square,
            })
        }
        Err(error) => {
            warnings.push(format!(
                "no power law for the {} K curve ({} usable point(s) in range): {error}",
                mobilis_physics::units::format_number(temperature_k),
                x.len()
            ));
            None
        }
    }
}

#[cfg(test)]
mod tests;
