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
//! A weighted least-squares line (`mobilis_core::fit::fit_line`) with weights 1/u_y^2,
//! u_y = u(n)/n, when every point has a density uncertainty (standard errors from those
//! uncertainties); unweighted otherwise (standard errors from the scatter about the line).
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

use std::fmt;

use mobilis_core::constants::BOLTZMANN_EV_PER_K;
use mobilis_core::fit::{fit_line, FitError, LineFit};

use crate::freeze_out::{prepare_series, CarrierType, DensityPoint, HallFactor, Series, SeriesError};

/// Which limit of the freeze-out equation the range is taken to be in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
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
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ArrheniusSettings {
    pub regime: ArrheniusRegime,
    pub range: ArrheniusRange,
    /// n or p; `None` (default) takes it from the points.
    pub carrier_type: Option<CarrierType>,
    pub hall_factor: HallFactor,
}

impl Default for ArrheniusSettings {
    fn default() -> Self {
        ArrheniusSettings {
            regime: ArrheniusRegime::Compensated,
            range: ArrheniusRange::Automatic(AutomaticRange::default()),
            carrier_type: None,
            hall_factor: HallFactor::Unity,
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
    /// u(n) / n, when given.
    pub reduced_ln_density_unc: Option<f64>,
    /// Inside the range of the line.
    pub used: bool,
}

/// The activation energy and the line it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct ArrheniusFit {
    /// E (see the module documentation for what it is in each regime), eV.
    pub activation_energy_ev: f64,
    pub activation_energy_ev_unc: f64,
    pub regime: ArrheniusRegime,
    pub carrier_type: CarrierType,
    pub hall_factor: f64,
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
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ArrheniusError {
    Series(SeriesError),
    InvalidSetting {
        setting: &'static str,
        value: f64,
        requirement: &'static str,
    },
    /// The automatic rule found no steady freeze-out window.
    NoFreezeOutRange {
        candidates: usize,
        min_points: usize,
    },
    /// Too few distinct temperatures in the range.
    TooFewPointsInRange {
        count: usize,
        required: usize,
    },
    Fit(FitError),
}

impl fmt::Display for ArrheniusError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ArrheniusError::Series(error) => error.fmt(f),
            ArrheniusError::InvalidSetting {
                setting,
                value,
                requirement,
            } => write!(f, "{setting} is {value}; {requirement}"),
            ArrheniusError::NoFreezeOutRange { candidates, min_points } => write!(
                f,
                "no steady freeze-out range of {min_points} or more temperatures was found ({candidates} temperatures lie well below the saturation density); give temperature_min_K and temperature_max_K, or relax slope_spread or plateau_fraction"
            ),
            ArrheniusError::TooFewPointsInRange { count, required } => write!(
                f,
                "the range holds {count} distinct temperatures; give a range with at least {required}"
            ),
            ArrheniusError::Fit(error) => write!(f, "the Arrhenius line could not be fitted: {error}"),
        }
    }
}

impl std::error::Error for ArrheniusError {}

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
                reduced_ln_density_unc: series.uncertainties_m3.as_ref().map(|unc| unc[i] / n),
                used: false,
            }
        })
        .collect()
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
    let series = prepare_series(points, settings.carrier_type, range_k, &settings.hall_factor)?;
    let exponent = settings.regime.temperature_exponent();
    let mut arrhenius = arrhenius_points(&series, exponent);
    let (low_k, high_k) = match rule {
        Some(rule) => automatic_window(&arrhenius, &rule)?,
        None => (series.temperatures_k[0], series.temperatures_k[series.len() - 1]),
    };
    for point in arrhenius.iter_mut() {
        point.used = point.temperature_k >= low_k && point.temperature_k <= high_k;
    }
    let used: Vec<&ArrheniusPoint> = arrhenius.iter().filter(|point| point.used).collect();
    let distinct = nodes(&used.iter().map(|point| **point).collect::<Vec<_>>()).len();
    if distinct < 3 {
        return Err(ArrheniusError::TooFewPointsInRange {
            count: distinct,
            required: 3,
        });
    }
    let x: Vec<f64> = used.iter().map(|point| point.inverse_thermal_energy_per_ev).collect();
    let y: Vec<f64> = used.iter().map(|point| point.reduced_ln_density).collect();
    let sigma: Option<Vec<f64>> = used.iter().map(|point| point.reduced_ln_density_unc).collect();
    let line = fit_line(&x, &y, sigma.as_deref()).map_err(ArrheniusError::Fit)?;
    let factor = settings.regime.energy_per_slope();
    let activation_energy_ev = -factor * line.slope;

    let mut warnings = Vec::new();
    if activation_energy_ev <= 0.0 {
        warnings.push(format!(
            "the density does not rise with temperature between {low_k} K and {high_k} K (slope {:.4} eV), so this is not a freeze-out range; choose another temperature range",
            line.slope
        ));
    }
    if line.weighted && line.degrees_of_freedom > 0 {
        let nu = line.degrees_of_freedom as f64;
        if line.reduced_chi_square > 1.0 + 4.0 * (2.0 / nu).sqrt() {
            warnings.push(format!(
                "the points scatter about the line with reduced chi-square {:.3}: the range may include the bend towards another regime, or the uncertainties are too small",
                line.reduced_chi_square
            ));
        }
    }
    Ok(ArrheniusFit {
        activation_energy_ev,
        activation_energy_ev_unc: factor * line.slope_unc,
        regime: settings.regime,
        carrier_type: series.carrier_type,
        hall_factor: series.hall_factor,
        temperature_min_k: low_k,
        temperature_max_k: high_k,
        points_used: used.len(),
        automatic_range: rule.is_some(),
        line,
        points: arrhenius,
        warnings,
    })
}
