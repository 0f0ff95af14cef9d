//! `carriers.arrhenius`: an activation energy from the slope of the carrier density in
//! freeze-out, the quick look that precedes (or checks) the full freeze-out fit.
//!
//! Pure computation on slices; the plugin's table glue supplies [`DensityPoint`]s (as for
//! [`crate::freeze_out`]) and turns the [`ArrheniusFit`] into a summary and a table.
//!
//! # What is fitted and what is reported
//!
//! In freeze-out the compensated single-donor equation (Blakemore, Semiconductor Statistics,
//! 1962; Look, Electrical Characterization of GaAs Materials and Devices, 1989),
//! n (n + N_A) / (N_D - N_A - n) = (Nc / g) exp(-E_D / kT) with Nc ~ T^1.5, has two limits:
//!
//! - [`ArrheniusRegime::Compensated`], n << N_A: n = (N_D - N_A) / N_A (Nc / g) exp(-E_D / kT),
//!   so y = ln(n T^-3/2) is a straight line in x = 1/kT with slope -E_D. The reported
//!   activation energy is **E = -slope**.
//! - [`ArrheniusRegime::Uncompensated`], N_A << n << N_D: n = sqrt(N_D Nc / g) exp(-E_D / 2kT),
//!   so y = ln(n T^-3/4) has slope -E_D / 2. The reported activation energy is
//!   **E = -2 x slope** (the donor's ionization energy, not the slope), and its uncertainty
//!   is twice the slope's.
//!
//! The same holds for holes and acceptors. n is in m^-3, T in K, 1/kT in eV^-1, so the slope
//! is in eV. Which regime applies is the user's judgement; the freeze-out fit
//! ([`crate::freeze_out::fit_freeze_out`]) needs no such assumption.
//!
//! # The straight line
//!
//! A weighted least-squares line (`mobilis_numerics::fit::fit_line`) when every point has a
//! density uncertainty; unweighted otherwise (standard errors from the scatter about the
//! line, and no use for temperature uncertainties). The weights:
//!
//! - **Statistical part.** u_y = u_stat(n) / n, raised to at least
//!   [`ArrheniusSettings::relative_uncertainty_floor`] (default
//!   `mobilis_numerics::fit::RELATIVE_UNCERTAINTY_FLOOR`, 0.1 %) so that no point pins the
//!   line. A common scale of the densities (thickness, current, field calibrations) moves
//!   every y by the same amount and leaves the slope alone, so it has no part here.
//! - **Temperature (effective variance).** The temperature enters x = 1/kT and the
//!   T^-r of y. An error dT of the reported temperature moves the point off the line by
//!   (b / kT^2 - r / T) dT (b the slope, r the exponent), so u_y^2 + (b / kT^2 - r / T)^2
//!   u_T^2 is the point's variance (Clutton-Brock, Technometrics 9, 261, 1967; Orear, Am.
//!   J. Phys. 50, 912, 1982). u_T is the point's `temperature_K_unc` or
//!   [`ArrheniusSettings::temperature_unc_k`]. The line is refitted with the weights of its
//!   own slope until no weight changes by more than 0.1 % (at most 20 passes).
//! - **Birge scaling.** With chi^2 / nu above 1 the slope's standard error is multiplied by
//!   sqrt(chi^2 / nu) (Birge, Phys. Rev. 40, 207, 1932; the Particle Data Group's practice)
//!   and never reduced; with a p-value below 1e-3 a warning names the worst points.
//!
//! # The range
//!
//! [`ArrheniusRange::Temperatures`] uses the points with min <= T <= max.
//! [`ArrheniusRange::Automatic`] chooses the freeze-out range by this rule:
//!
//! 1. points at one temperature are merged (mean of y) into one node, nodes sorted by
//!    temperature;
//! 2. a node is a candidate when its density is at most `plateau_fraction` (default 0.1) of the
//!    largest density of the series: well below saturation;
//! 3. between consecutive candidate nodes the local slope s_k = dy / dx is computed; a
//!    window of consecutive candidates is *steady* when all its local slopes are negative
//!    (the density rises with temperature) and max s - min s <= `slope_spread` (default 0.25)
//!    x min |s|;
//! 4. the longest steady window of at least `min_points` (default 4) nodes is chosen; among
//!    equally long ones the lowest in temperature (deepest freeze-out);
//! 5. every point with a temperature inside the window enters the line fit.
//!
//! Noise widens the spread of local slopes roughly as sqrt(2) u_y / dx between neighbours:
//! closely spaced noisy points may need a larger `slope_spread`, or an explicit range.

#[cfg(test)]
mod tests;

use crate::carrier_type::CarrierType;
use mobilis_numerics::fit::{
    effective_uncertainty, fit_line, floored_relative_uncertainty, FitError, FitQuality, LineFit,
    RELATIVE_UNCERTAINTY_FLOOR,
};
use mobilis_physics::constants::BOLTZMANN_EV_PER_K;

use crate::freeze_out::{
    prepare_series, validate_stated_uncertainties, DensityPoint, HallFactor, Series, SeriesError, SeriesOptions,
    UncertaintySource, EFFECTIVE_VARIANCE_PASSES, EFFECTIVE_VARIANCE_TOLERANCE,
};

/// Which limit of the freeze-out equation the range is taken to be in; a parameter names it
/// in snake case.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum ArrheniusRegime {
    /// n << N_A: fit ln(n T^-3/2); E = -slope.
    Compensated,
    /// N_A << n << N_D: fit ln(n T^-3/4); E = -2 slope.
    Uncompensated,
}

impl ArrheniusRegime {
    /// The power of T divided out of n: 1.5 or 0.75.
    pub fn temperature_exponent(self) -> f64 {
        match self {
            ArrheniusRegime::Compensated => 1.5,
            ArrheniusRegime::Uncompensated => 0.75,
        }
    }

    /// Reported energy over -slope: 1 or 2.
    pub fn energy_per_slope(self) -> f64 {
        match self {
            ArrheniusRegime::Compensated => 1.0,
            ArrheniusRegime::Uncompensated => 2.0,
        }
    }

    /// "compensated" or "uncompensated".
    pub fn as_str(self) -> &'static str {
        match self {
            ArrheniusRegime::Compensated => "compensated",
            ArrheniusRegime::Uncompensated => "uncompensated",
        }
    }
}

/// The rule of the automatic range (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AutomaticRange {
    /// Candidates have a density at most this fraction of the largest. Default 0.1.
    pub plateau_fraction: f64,
    /// Largest (max - min) / min |s| of the local slopes of a steady window. Default 0.25.
    pub slope_spread: f64,
    /// Fewest nodes (distinct temperatures) in the window. Default 4; at least 3.
    pub min_points: usize,
}

impl Default for AutomaticRange {
    fn default() -> Self {
        AutomaticRange {
            plateau_fraction: 0.1,
            slope_spread: 0.25,
            min_points: 4,
        }
    }
}

/// The temperature range of the line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ArrheniusRange {
    /// The points with min_k <= T <= max_k.
    Temperatures { min_k: f64, max_k: f64 },
    /// Chosen from the data.
    Automatic(AutomaticRange),
}

/// How to fit; the default is the compensated regime over the automatic range.
#[derive(Debug, Clone, PartialEq)]
pub struct ArrheniusSettings {
    pub regime: ArrheniusRegime,
    pub range: ArrheniusRange,
    /// n or p; `None` (default) takes it from the points.
    pub carrier_type: Option<CarrierType>,
    pub hall_factor: HallFactor,
    /// The smallest relative statistical uncertainty a point keeps in a weighted line.
    /// Default `RELATIVE_UNCERTAINTY_FLOOR` (1e-3).
    pub relative_uncertainty_floor: f64,
    /// Standard uncertainty of the temperature of every point that carries none, K; `None`
    /// (default): not given, taken as 0.
    pub temperature_unc_k: Option<f64>,
}

impl Default for ArrheniusSettings {
    fn default() -> Self {
        ArrheniusSettings {
            regime: ArrheniusRegime::Compensated,
            range: ArrheniusRange::Automatic(AutomaticRange::default()),
            carrier_type: None,
            hall_factor: HallFactor::Unity,
            relative_uncertainty_floor: RELATIVE_UNCERTAINTY_FLOOR,
            temperature_unc_k: None,
        }
    }
}

/// One point of the Arrhenius plot.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ArrheniusPoint {
    pub temperature_k: f64,
    /// The density after the Hall-factor correction, m^-3.
    pub density_m3: f64,
    /// x = 1 / kT, eV^-1.
    pub inverse_thermal_energy_per_ev: f64,
    /// y = ln(n / m^-3) - exponent ln(T / K).
    pub reduced_ln_density: f64,
    /// The standard uncertainty of y that weighs the point: u_stat(n) / n raised to the
    /// floor, with the temperature's through the line's slope (weighted lines only).
    pub reduced_ln_density_unc: Option<f64>,
    /// u_stat(n) / n as given.
    pub relative_density_unc_stat: Option<f64>,
    /// The temperature's standard uncertainty, K.
    pub temperature_unc_k: f64,
    /// The Hall factor in effect.
    pub hall_factor: f64,
    /// Inside the range of the line.
    pub used: bool,
}

/// The activation energy and the line it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct ArrheniusFit {
    /// E (see the module documentation for what it is in each regime), eV.
    pub activation_energy_ev: f64,
    /// Its standard uncertainty (statistical: reading noise and temperature errors; after
    /// Birge scaling).
    pub activation_energy_ev_unc: f64,
    pub regime: ArrheniusRegime,
    pub carrier_type: CarrierType,
    /// The Hall factor when it is the same for every point.
    pub hall_factor: Option<f64>,
    /// P(chi^2_nu >= chi^2) of a weighted line; NaN unweighted or without degrees of
    /// freedom.
    pub chi_square_p_value: f64,
    /// The factor the slope's standard error was multiplied by; NaN unweighted.
    pub birge_ratio: f64,
    /// Points on the line whose relative uncertainty was raised to the floor.
    pub floored_points: usize,
    pub relative_uncertainty_floor: f64,
    /// Line fits repeated with updated effective-variance weights.
    pub effective_variance_passes: usize,
    pub temperature_unc_source: UncertaintySource,
    /// The range of the line: the lowest and highest temperature used, K.
    pub temperature_min_k: f64,
    pub temperature_max_k: f64,
    pub points_used: usize,
    /// True when the range was chosen automatically.
    pub automatic_range: bool,
    /// The line y = intercept + slope x (slope in eV).
    pub line: LineFit,
    /// Every point considered, sorted by temperature.
    pub points: Vec<ArrheniusPoint>,
    pub warnings: Vec<String>,
}

/// Why `fit_arrhenius` refuses its input.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ArrheniusError {
    #[error("{0}")]
    Series(SeriesError),
    #[error("{setting} is {value}; {requirement}")]
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The automatic rule found no steady freeze-out window.
    #[error(
        "no steady freeze-out range of {min_points} or more temperatures was found ({candidates} temperatures lie well below the saturation density); give temperature_min_K and temperature_max_K, or relax slope_spread or plateau_fraction"
    )]
    NoFreezeOutRange { candidates: usize, min_points: usize },
    /// Too few distinct temperatures in the range.
    #[error("the range holds {count} distinct temperatures; give a range with at least {required}")]
    TooFewPointsInRange { count: usize, required: usize },
    #[error("the Arrhenius line could not be fitted: {0}")]
    Fit(FitError),
}

impl From<SeriesError> for ArrheniusError {
    fn from(error: SeriesError) -> Self {
        ArrheniusError::Series(error)
    }
}

/// Points at one temperature merged: the node of the automatic rule.
struct Node {
    temperature_k: f64,
    x: f64,
    y: f64,
    density_m3: f64,
}

fn nodes(points: &[ArrheniusPoint]) -> Vec<Node> {
    let mut nodes: Vec<Node> = Vec::new();
    let mut count = 0usize;
    for point in points {
        match nodes.last_mut() {
            Some(node) if node.temperature_k == point.temperature_k => {
                count += 1;
                node.y += (point.reduced_ln_density - node.y) / count as f64;
                node.density_m3 += (point.density_m3 - node.density_m3) / count as f64;
            }
            _ => {
                count = 1;
                nodes.push(Node {
                    temperature_k: point.temperature_k,
                    x: point.inverse_thermal_energy_per_ev,
                    y: point.reduced_ln_density,
                    density_m3: point.density_m3,
                });
            }
        }
    }
    nodes
}

/// The automatic rule: the temperature window (lowest, highest) or the number of
/// candidates when there is none.
fn automatic_window(points: &[ArrheniusPoint], rule: &AutomaticRange) -> Result<(f64, f64), ArrheniusError> {
    let nodes = nodes(points);
    let largest = nodes
        .iter()
        .map(|node| node.density_m3)
        .fold(f64::NEG_INFINITY, f64::max);
    let candidate: Vec<bool> = nodes
        .iter()
        .map(|node| node.density_m3 <= rule.plateau_fraction * largest)
        .collect();
    let mut best: Option<(usize, usize)> = None;
    for start in 0..nodes.len() {
        if !candidate[start] {
            continue;
        }
        let (mut low, mut high) = (f64::INFINITY, f64::NEG_INFINITY);
        let mut end = start;
        while end + 1 < nodes.len() && candidate[end + 1] {
            let slope = (nodes[end + 1].y - nodes[end].y) / (nodes[end + 1].x - nodes[end].x);
            let (new_low, new_high) = (low.min(slope), high.max(slope));
            let steady =
                slope.is_finite() && new_high < 0.0 && new_high - new_low <= rule.slope_spread * new_high.abs();
            if !steady {
                break;
            }
            low = new_low;
            high = new_high;
            end += 1;
        }
        let length = end - start + 1;
        if length >= rule.min_points && best.is_none_or(|(a, b)| length > b - a + 1) {
            best = Some((start, end));
        }
    }
    match best {
        Some((start, end)) => Ok((nodes[start].temperature_k, nodes[end].temperature_k)),
        None => Err(ArrheniusError::NoFreezeOutRange {
            candidates: candidate.iter().filter(|c| **c).count(),
            min_points: rule.min_points,
        }),
    }
}

fn arrhenius_points(series: &Series, exponent: f64) -> Vec<ArrheniusPoint> {
    (0..series.len())
        .map(|i| {
            let t = series.temperatures_k[i];
            let n = series.densities_m3[i];
            ArrheniusPoint {
                temperature_k: t,
                density_m3: n,
                inverse_thermal_energy_per_ev: 1.0 / (BOLTZMANN_EV_PER_K * t),
                reduced_ln_density: n.ln() - exponent * t.ln(),
                reduced_ln_density_unc: None,
                relative_density_unc_stat: series.uncertainties_m3.as_ref().map(|unc| unc[i] / n),
                temperature_unc_k: series.temperature_unc_k[i],
                hall_factor: series.hall_factors[i],
                used: false,
            }
        })
        .collect()
}

/// d(y - line)/dT of a point: how far an error of its reported temperature moves it off a
/// line of slope `slope` (x = 1/kT, y = ln n - r ln T), per kelvin.
fn temperature_sensitivity(slope: f64, exponent: f64, temperature_k: f64) -> f64 {
    slope / (BOLTZMANN_EV_PER_K * temperature_k * temperature_k) - exponent / temperature_k
}

/// The activation energy from the Arrhenius slope over a given or automatic range.
pub fn fit_arrhenius(points: &[DensityPoint], settings: &ArrheniusSettings) -> Result<ArrheniusFit, ArrheniusError> {
    let invalid = |setting, value, requirement| {
        Err(ArrheniusError::InvalidSetting {
            setting,
            value,
            requirement,
        })
    };
    let (range_k, rule) = match settings.range {
        ArrheniusRange::Temperatures { min_k, max_k } => (Some((min_k, max_k)), None),
        ArrheniusRange::Automatic(rule) => {
            if !(rule.plateau_fraction > 0.0 && rule.plateau_fraction < 1.0) {
                return invalid(
                    "plateau_fraction",
                    rule.plateau_fraction,
                    "give a fraction of the largest density between 0 and 1 (0.1 is usual)",
                );
            }
            if !(rule.slope_spread.is_finite() && rule.slope_spread > 0.0) {
                return invalid(
                    "slope_spread",
                    rule.slope_spread,
                    "give a finite positive relative spread",
                );
            }
            if rule.min_points < 3 {
                return invalid("min_points", rule.min_points as f64, "give 3 or more");
            }
            (None, Some(rule))
        }
    };
    if let Err((setting, value, requirement)) =
        validate_stated_uncertainties(settings.relative_uncertainty_floor, settings.temperature_unc_k, None)
    {
        return invalid(setting, value, requirement);
    }
    let series = prepare_series(
        points,
        &SeriesOptions {
            carrier_type: settings.carrier_type,
            range_k,
            hall_factor: &settings.hall_factor,
            temperature_unc_k: settings.temperature_unc_k,
            density_scale_relative_unc: None,
        },
    )?;
    let exponent = settings.regime.temperature_exponent();
    let mut arrhenius = arrhenius_points(&series, exponent);
    let (low_k, high_k) = match rule {
        Some(rule) => automatic_window(&arrhenius, &rule)?,
        None => (series.temperatures_k[0], series.temperatures_k[series.len() - 1]),
    };
    for point in arrhenius.iter_mut() {
        point.used = point.temperature_k >= low_k && point.temperature_k <= high_k;
    }
    let used: Vec<ArrheniusPoint> = arrhenius.iter().filter(|point| point.used).copied().collect();
    let distinct = nodes(&used).len();
    if distinct < 3 {
        return Err(ArrheniusError::TooFewPointsInRange {
            count: distinct,
            required: 3,
        });
    }
    let x: Vec<f64> = used.iter().map(|point| point.inverse_thermal_energy_per_ev).collect();
    let y: Vec<f64> = used.iter().map(|point| point.reduced_ln_density).collect();
    let floor = settings.relative_uncertainty_floor;
    let floored = |relative: f64| floored_relative_uncertainty(relative, floor);
    let base: Option<Vec<f64>> = used
        .iter()
        .map(|point| point.relative_density_unc_stat.map(|u| floored(u).0))
        .collect();
    let floored_points = used
        .iter()
        .filter(|point| point.relative_density_unc_stat.is_some_and(|u| floored(u).1))
        .count();
    let effective = |slope: f64, point: &ArrheniusPoint, base: f64| {
        effective_uncertainty(
            base,
            temperature_sensitivity(slope, exponent, point.temperature_k),
            point.temperature_unc_k,
        )
    };
    let mut line = fit_line(&x, &y, base.as_deref()).map_err(ArrheniusError::Fit)?;
    let mut passes = 0;
    let mut settled = true;
    if let Some(base) = &base {
        if used.iter().any(|point| point.temperature_unc_k > 0.0) {
            // Effective variance: weights from the line's own slope until they settle.
            let mut sigma = base.clone();
            settled = false;
            while passes < EFFECTIVE_VARIANCE_PASSES {
                let updated: Vec<f64> = used
                    .iter()
                    .zip(base)
                    .map(|(point, base)| effective(line.slope, point, *base))
                    .collect();
                let change = mobilis_numerics::fit::largest_relative_change(&updated, &sigma);
                if change <= EFFECTIVE_VARIANCE_TOLERANCE {
                    settled = true;
                    break;
                }
                sigma = updated;
                line = fit_line(&x, &y, Some(&sigma)).map_err(ArrheniusError::Fit)?;
                passes += 1;
            }
        }
    }
    // The uncertainty of y that weighed each point (the final slope for the points off the
    // line too, so that a plot shows comparable error bars).
    for point in arrhenius.iter_mut() {
        point.reduced_ln_density_unc = point
            .relative_density_unc_stat
            .map(|u| effective(line.slope, point, floored(u).0));
    }
    let quality = FitQuality::assess(line.chi_square, line.degrees_of_freedom);
    let birge_ratio = if line.weighted { quality.birge_ratio } else { f64::NAN };
    let slope_unc = if line.weighted {
        quality.birge_ratio * line.slope_unc
    } else {
        line.slope_unc
    };
    let factor = settings.regime.energy_per_slope();
    let activation_energy_ev = -factor * line.slope;

    let mut warnings = Vec::new();
    if activation_energy_ev <= 0.0 {
        warnings.push(format!(
            "the density does not rise with temperature between {low_k} K and {high_k} K (slope {:.4} eV), so this is not a freeze-out range; choose another temperature range",
            line.slope
        ));
    }
    if line.weighted {
        let residuals: Vec<f64> = used
            .iter()
            .enumerate()
            .map(|(i, point)| {
                let sigma = effective(line.slope, point, base.as_ref().expect("weighted")[i]);
                (line.evaluate(x[i]) - y[i]) / sigma
            })
            .collect();
        if let Some(warning) = quality.warning(&residuals, |i| format!("{:.2} K", used[i].temperature_k)) {
            warnings.push(format!(
                "{warning}. The range may include the bend towards another regime (narrow temperature_min_K..temperature_max_K), or the weights are too small: the statistical density uncertainties (density_m3_unc_stat, at least relative_uncertainty_floor) and the temperature uncertainties (temperature_K_unc or temperature_uncertainty_K)"
            ));
        }
    } else if used.iter().any(|point| point.temperature_unc_k > 0.0) {
        warnings.push(
            "the temperature uncertainties were not used: without density uncertainties the line is unweighted and its errors come from the scatter; give density_m3_unc_stat (or density_m3_unc)"
                .into(),
        );
    }
    if !settled {
        warnings.push(format!(
            "the effective-variance weights still changed after {EFFECTIVE_VARIANCE_PASSES} passes, so the uncertainty is approximate; check temperature_K_unc (or temperature_uncertainty_K)"
        ));
    }
    if series.outside_hall_factor_table > 0 {
        warnings.push(format!(
            "{} points lie outside the temperatures of hall_factor_table and take its end values; extend the table",
            series.outside_hall_factor_table
        ));
    }
    Ok(ArrheniusFit {
        activation_energy_ev,
        activation_energy_ev_unc: factor * slope_unc,
        regime: settings.regime,
        carrier_type: series.carrier_type,
        hall_factor: series.common_hall_factor(),
        chi_square_p_value: if line.weighted { quality.p_value } else { f64::NAN },
        birge_ratio,
        floored_points,
        relative_uncertainty_floor: floor,
        effective_variance_passes: passes,
        temperature_unc_source: series.temperature_unc_source,
        temperature_min_k: low_k,
        temperature_max_k: high_k,
        points_used: used.len(),
        automatic_range: rule.is_some(),
        line,
        points: arrhenius,
        warnings,
    })
}
