//! `carriers.freeze_out_fit`: donor and acceptor densities and the ionization energy of the
//! majority dopant from the temperature dependence of the carrier density.
//!
//! Pure computation on slices: no DataFrames, no I/O. The plugin's table glue turns a
//! `hall.reduce` output (or any table of `temperature_K`, `density_m3`, optional
//! `density_m3_unc` and `carrier_type`) into [`DensityPoint`]s and the [`FreezeOutFit`] back
//! into a summary and a table.
//!
//! # Model
//!
//! A non-degenerate crystal with one majority dopant level and fully (or, optionally,
//! partially: [`CompensatingLevel`]) ionized compensating centres, in charge neutrality with
//! the intrinsic minority carriers of the material's band gap. For an n-type crystal
//!
//! n + N_A- = p + N_D / (1 + n / K_D), K_D = (Nc(T) / g_D) exp(-E_D / kT),
//! p = Nc Nv exp(-Eg(T) / kT) / n,
//!
//! with Nc, Nv scaled as T^1.5 from their 300 K values and Eg(T) from Varshni's relation
//! ([`crate::materials::Material`]). Without minority carriers this is the compensated
//! single-donor equation n (n + N_A) / (N_D - N_A - n) = K_D (Blakemore, Semiconductor
//! Statistics, 1962; Look, Electrical Characterization of GaAs Materials and Devices, 1989);
//! the minority term makes the fit exact into the onset of intrinsic conduction, where the
//! closed form is not. A p-type crystal is the mirror image: holes, acceptors of density N_A
//! and level E_A above the valence band with degeneracy g_A (default 4), compensating donors,
//! Nv in place of Nc. The equation is solved exactly at every temperature ([`model`]; the
//! same physics as `mobilis_physics::forward::statistics::solve_charge_neutrality`).
//!
//! # Fit
//!
//! - **Hall factor.** A density from the Hall coefficient with r_H = 1 is n_H = n / r_H. The
//!   points may say which factor was already applied to them
//!   ([`DensityPoint::applied_hall_factor`], the `hall_factor` column of `hall.reduce`).
//!   [`HallFactor::Unity`] leaves the densities as they are; [`HallFactor::Constant`],
//!   [`HallFactor::ScatteringExponent`] (r_H of tau ~ E^s from
//!   `mobilis_physics::forward::mobility::hall_scattering_factor`) and [`HallFactor::Table`]
//!   (r_H(T) from (temperature, factor) pairs, linear in T between them and held at the end
//!   values beyond them) *replace* the applied factor: n = n_given r_H(T) / r_applied. A
//!   Hall factor that changes through the series changes the slope of ln n(T), so a
//!   constant one where r_H falls from about 1.9 to 1.2 biases the energy and the
//!   compensation (a test shows it).
//! - **Residuals** r_i = (ln n_model(T_i) - ln n_i) / s_i: in logarithms, because the
//!   densities span decades and their errors are relative.
//! - **Weights: the uncertainty budget.** The densities carry a statistical (Type A, from
//!   the scatter of the readings) standard uncertainty u_stat, which weights the fit, and
//!   may carry a systematic one u_sys that is common to every point of the series (the
//!   thickness, current, voltage and field calibrations of `hall.reduce`: one scale error
//!   shared by the whole series, JCGM 100:2008, the GUM, 5.2 on correlated inputs). The
//!   common part never weights the fit: it is applied once, after the fit (see "The
//!   common scale" below). The relative statistical uncertainty is raised to at least
//!   [`FreezeOutSettings::relative_uncertainty_floor`] (default
//!   `mobilis_numerics::fit::RELATIVE_UNCERTAINTY_FLOOR`, 0.1 %), so that no single point can
//!   pin the fit (a Hall density reported to 5e-13 would otherwise outweigh the rest by
//!   twenty orders of magnitude).
//! - **Temperature errors (effective variance).** Each point's temperature has a standard
//!   uncertainty u_T (the readings' spread and the thermometer's accuracy, `hall.reduce`'s
//!   `temperature_K_unc`, or [`FreezeOutSettings::temperature_unc_k`] when the points carry
//!   none). It enters through the model's slope: s_i^2 = (u_stat/n)^2 + (d ln n/dT)^2 u_T^2
//!   at the current parameters (Clutton-Brock, Technometrics 9, 261, 1967; Orear, Am. J.
//!   Phys. 50, 912, 1982). In freeze-out d ln n/dT reaches about 0.5 to 1 per kelvin near
//!   20 K, so 30 mK of stage drift is a 1.5 to 3 % error there, far above the reading noise;
//!   on the saturation plateau the slope vanishes and the temperature costs nothing. The
//!   slope is taken by central differences of the exact model; the fit is repeated with the
//!   updated weights (from the best parameters of the previous pass, the first repetition
//!   from every start again) until no weight changes by more than 0.1 %
//!   ([`EFFECTIVE_VARIANCE_TOLERANCE`], at most [`EFFECTIVE_VARIANCE_PASSES`] passes).
//!   Without density uncertainties the fit is unweighted (s_i = 1) and the temperature
//!   uncertainties are not used (a warning says so).
//! - **Parameters** theta = (log10 N_net, log10 c, E) with N_net = N_maj - N_comp (what the
//!   saturation plateau shows) and c = N_comp / N_maj (what the depth of freeze-out below the
//!   plateau shows): nearly orthogonal, each of order one, and bounded: N_net within
//!   [n_min / 3, 1000 n_max] of the data unless [`FreezeOutSettings::net_density_bounds_m3`]
//!   says otherwise, c within [`FreezeOutSettings::compensation_bounds`] (default 1e-6 to
//!   0.995), E within [`FreezeOutSettings::ionization_energy_bounds_ev`] (default 1 meV to
//!   1 eV). Levenberg-Marquardt with box bounds (`mobilis_numerics::fit`).
//! - **Starts.** Up to twelve from the data ([`FreezeOutSettings::derive_starts_from_data`]):
//!   N_net = n_max and 3 n_max (the plateau, or above it if the data stop short of
//!   saturation); E = E_a and 2 E_a, E_a from the slope of ln(n T^-1.5) against 1/kT over
//!   the lowest-temperature third of the points (the slope is E in the compensated regime
//!   and E/2 in the uncompensated one; both are tried); c = 0.01, 0.3 and the c that makes
//!   the model pass through the lowest point in the compensated regime with E_a. Then up to
//!   four from a grid over the whole bounded box ([`FreezeOutSettings::grid_search`]): the
//!   chi-square at the plateau's N_net on 9 values of log10 c times 25 geometrically spaced
//!   energies, whose best local minima become starts. The grid depends on the bounds only,
//!   not on any guess; it is what finds the global minimum when every guess lies in the
//!   basin of the local minimum that trades compensation for energy (strong compensation
//!   with a lower level, which bends the curve much as the true one does; in the tests c
//!   near 0.6 and E near two thirds of the truth). Starts given in
//!   [`FreezeOutSettings::initial_guesses`] are added. The converged run of lowest
//!   chi-square wins; the result says how many starts reached it.
//! - **Is the model right within the errors?** chi^2 / nu and its p-value
//!   (`mobilis_numerics::fit::FitQuality`). In a weighted fit the covariance is multiplied by
//!   chi^2 / nu when that exceeds 1 (the Birge ratio, Birge, Phys. Rev. 40, 207, 1932; the
//!   Particle Data Group's practice for inconsistent data) and never shrunk; when the
//!   p-value is below 1e-3 a warning names the worst points and the inputs that set the
//!   weights. Unweighted, the covariance is scaled by chi^2 / nu both ways (the scatter is
//!   the only measure of the noise) and there is no p-value.
//! - **Uncertainties** of N_maj = N_net / (1 - c), N_comp = c N_net / (1 - c), c and E by
//!   first-order propagation of the covariance of theta: the statistical part
//!   (`_unc_stat`), which holds the reading noise and the temperature errors.
//! - **The common scale, applied once after the fit.** The relative systematic
//!   uncertainty s of the densities (the largest u_sys / n over the points, so that a
//!   series whose rows disagree is not under-reported; they agree when they come from one
//!   sample's calibration), or [`FreezeOutSettings::density_scale_relative_unc`] when the
//!   points carry none, is one error shared by every point: it shifts every ln n_i by the
//!   same s. Its effect on the parameters is the fit's own first-order response to that
//!   shift, d theta = (J^T J)^-1 J^T (1 / sigma) s (J the Jacobian of the weighted
//!   residuals at the solution; the GUM's propagation of a fully correlated input), which
//!   is what a refit of data scaled by 1 + s gives (a test checks it to 10 %). It is not a
//!   plain scale on every density: on the saturation plateau n = N_net, so N_net takes s
//!   nearly in full; deep in the compensated regime n = (N_net / N_comp) K(T) does not
//!   change when N_net and N_comp scale together, so N_comp takes little of it; between the
//!   two the model cannot follow a pure scale and the fit trades a little of it against E
//!   and c (for the silicon of the tests, 3 % moves N_net by 3.2 %, N_A by 0.5 % and E_D by
//!   0.01 meV; with the larger low-temperature errors of a real series, up to a few tenths
//!   of a meV). These shifts are the `_unc_sys` of every parameter, fully correlated among
//!   them in the reported covariance; the totals `_unc` are the quadrature sums. Without
//!   this, a coverage test shows E_D within 1 sigma of the truth in 13 % of realizations
//!   instead of 68 %.
//! - **Bounds.** A parameter that ends on a bound is not determined by the data (its
//!   uncertainty is `None` and a warning says so), and the others' uncertainties are
//!   conditional on it.
//! - **Curve.** The fitted density on [`FreezeOutSettings::curve_points`] temperatures
//!   spaced geometrically over the range of the data used.
//!
//! # Refused input
//!
//! Fewer than four distinct temperatures (three parameters plus one), the carrier type
//! switching within the series, non-positive or non-finite densities or temperatures,
//! density uncertainties for some points but not others, negative or non-finite
//! uncertainties, temperature uncertainties missing for some points when no stated one
//! stands in for them, a Hall factor table that is not a function of temperature, a
//! temperature range that excludes all data.

#[cfg(test)]
mod budget_tests;
#[cfg(test)]
mod coverage;
mod error;
pub mod model;
#[cfg(test)]
pub(crate) mod realistic;
#[cfg(test)]
mod tests;

use rayon::prelude::*;

use mobilis_numerics::fit::{
    effective_uncertainty, fit_line, floored_relative_uncertainty, minimize_multi_start_parallel, Bounds, FitError,
    FitQuality, LeastSquares, LmOptions, MultiStartFit, SameMinimum, RELATIVE_UNCERTAINTY_FLOOR,
};
use mobilis_numerics::linalg::Matrix;
use mobilis_physics::constants::BOLTZMANN_EV_PER_K;
use mobilis_physics::forward::mobility::hall_scattering_factor;

pub use error::{FreezeOutError, SeriesError};
use model::{ln_majority_density, LevelParameters, TemperatureTerms};
pub use model::{CompensatingLevel, FreezeOutModel};

use crate::carrier_type::CarrierType;
use crate::materials::Material;

/// The smallest number of distinct temperatures for three parameters plus one degree of
/// freedom.
pub const MIN_TEMPERATURES: usize = 4;

/// One measured carrier density.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct DensityPoint {
    pub temperature_k: f64,
    /// Majority carrier density (a positive magnitude), m^-3.
    pub density_m3: f64,
    /// Its statistical (Type A) standard uncertainty, m^-3: what weights the fit.
    pub density_unc_m3: Option<f64>,
    /// Its systematic standard uncertainty common to the whole series (calibrations of
    /// thickness, current, voltage and field), m^-3: applied once after the fit as a scale.
    pub density_unc_sys_m3: Option<f64>,
    /// Standard uncertainty of the temperature, K.
    pub temperature_unc_k: Option<f64>,
    /// The Hall factor already applied to `density_m3` (`None`: 1).
    pub applied_hall_factor: Option<f64>,
    /// The carrier type of this point (from the sign of the Hall coefficient), if known.
    pub carrier_type: Option<CarrierType>,
}

/// The Hall scattering factor in effect when fitting: n = r_H n_H.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum HallFactor {
    /// The densities are used as given (with whatever factor was applied to them).
    #[default]
    Unity,
    /// A constant r_H, replacing the factor applied to the points.
    Constant(f64),
    /// r_H of a relaxation time tau ~ E^s (Putley 1960): s = -1/2 acoustic phonons
    /// (3 pi / 8), s = 3/2 ionized impurities (315 pi / 512); replaces the applied factor.
    ScatteringExponent(f64),
    /// r_H(T) from (temperature in K, r_H) pairs: linear in T between them, the end values
    /// beyond them; replaces the applied factor.
    Table(Vec<(f64, f64)>),
}

impl HallFactor {
    /// The factor r_H when it does not depend on temperature (a one-entry table counts).
    pub fn value(&self) -> Result<f64, SeriesError> {
        let value = match self {
            HallFactor::Unity => 1.0,
            HallFactor::Constant(value) => *value,
            HallFactor::ScatteringExponent(exponent) => {
                let value = hall_scattering_factor(*exponent);
                if !value.is_finite() {
                    return Err(SeriesError::InvalidHallFactor { value: *exponent });
                }
                value
            }
            HallFactor::Table(table) => match table.as_slice() {
                [(_, value)] => *value,
                _ => return Err(SeriesError::HallFactorVaries),
            },
        };
        if value.is_finite() && value > 0.0 {
            Ok(value)
        } else {
            Err(SeriesError::InvalidHallFactor { value })
        }
    }

    /// Whether the factor replaces the one applied to the points.
    fn replaces_applied(&self) -> bool {
        !matches!(self, HallFactor::Unity)
    }

    /// The checked table sorted by temperature, or `None` for the other kinds.
    fn sorted_table(&self) -> Result<Option<Vec<(f64, f64)>>, SeriesError> {
        let HallFactor::Table(table) = self else {
            return Ok(None);
        };
        if table.is_empty() {
            return Err(SeriesError::EmptyHallFactorTable);
        }
        for (index, &(temperature_k, hall_factor)) in table.iter().enumerate() {
            if !(temperature_k.is_finite() && temperature_k > 0.0 && hall_factor.is_finite() && hall_factor > 0.0) {
                return Err(SeriesError::InvalidHallFactorEntry {
                    index,
                    temperature_k,
                    hall_factor,
                });
            }
        }
        let mut sorted = table.clone();
        sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
        if let Some(pair) = sorted.windows(2).find(|pair| pair[0].0 == pair[1].0) {
            return Err(SeriesError::RepeatedHallFactorTemperature {
                temperature_k: pair[0].0,
            });
        }
        Ok(Some(sorted))
    }
}

/// r_H at `temperature_k` from a sorted table: linear between the nodes, the end values
/// beyond them.
pub fn interpolate_hall_factor(sorted: &[(f64, f64)], temperature_k: f64) -> f64 {
    let (first, last) = (sorted[0], sorted[sorted.len() - 1]);
    if temperature_k <= first.0 {
        return first.1;
    }
    if temperature_k >= last.0 {
        return last.1;
    }
    let upper = sorted.partition_point(|node| node.0 <= temperature_k);
    let (low, high) = (sorted[upper - 1], sorted[upper]);
    low.1 + (high.1 - low.1) * (temperature_k - low.0) / (high.0 - low.0)
}

/// Where an uncertainty of the budget came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum UncertaintySource {
    /// From the points themselves (columns of the input).
    Points,
    /// From a value stated in the settings (for every point, or the points without one).
    Stated,
    /// Nobody gave it: it counts as zero.
    NotGiven,
}

/// A starting point given by the user.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct InitialGuess {
    /// Majority dopant density, m^-3.
    pub dopant_density_m3: f64,
    /// Compensating density, m^-3 (0 is taken as the smallest compensation allowed).
    pub compensating_density_m3: f64,
    pub ionization_energy_ev: f64,
}

/// How to fit; [`FreezeOutSettings::default`] documents the defaults.
#[derive(Debug, Clone, PartialEq)]
pub struct FreezeOutSettings {
    /// The bands (default silicon).
    pub material: Material,
    /// Replaces the majority band's effective density of states at 300 K (Nc for n-type,
    /// Nv for p-type; still scaled as T^1.5), m^-3. Handbooks differ by tens of percent
    /// here, and the fitted ionization energy and compensation follow. `None` (default)
    /// keeps the material's.
    pub effective_dos_300k_m3: Option<f64>,
    /// n or p; `None` (default) takes it from the points.
    pub carrier_type: Option<CarrierType>,
    /// Degeneracy of the majority level; `None` (default): 2 for donors, 4 for acceptors.
    pub degeneracy: Option<f64>,
    /// The compensating centres' level; `None` (default): fully ionized, which they are
    /// whenever the Fermi level is far from their band (always, in a crystal whose majority
    /// carriers are not degenerate).
    pub compensating_level: Option<CompensatingLevel>,
    /// Only points with min <= T <= max, K; `None` (default) uses all.
    pub temperature_range_k: Option<(f64, f64)>,
    pub hall_factor: HallFactor,
    /// The smallest relative statistical uncertainty a point keeps in a weighted fit.
    /// Default `RELATIVE_UNCERTAINTY_FLOOR` (1e-3).
    pub relative_uncertainty_floor: f64,
    /// Standard uncertainty of the temperature of every point that carries none, K; `None`
    /// (default): not given, taken as 0.
    pub temperature_unc_k: Option<f64>,
    /// Relative standard uncertainty of a scale common to all densities (thickness,
    /// current, voltage, field calibrations) when no point carries `density_unc_sys_m3`;
    /// `None` (default): not given, taken as 0.
    pub density_scale_relative_unc: Option<f64>,
    /// Bounds of E, eV. Default (0.001, 1.0).
    pub ionization_energy_bounds_ev: (f64, f64),
    /// Bounds of c = N_comp / N_maj. Default (1e-6, 0.995).
    pub compensation_bounds: (f64, f64),
    /// Bounds of N_maj - N_comp, m^-3; `None` (default): [n_min / 3, 1000 n_max] of the
    /// data used.
    pub net_density_bounds_m3: Option<(f64, f64)>,
    /// Extra starting points.
    pub initial_guesses: Vec<InitialGuess>,
    /// Add the twelve starts derived from the data (default true).
    pub derive_starts_from_data: bool,
    /// Scan the bounded (compensation, energy) box on a grid and add its best local minima
    /// as starts (default true): this makes the fit independent of any guess.
    pub grid_search: bool,
    /// Points of the fitted curve. Default 200.
    pub curve_points: usize,
    /// Iteration limit of each start. Default 200.
    pub max_iterations: usize,
}

impl Default for FreezeOutSettings {
    fn default() -> Self {
        FreezeOutSettings {
            material: Material::silicon(),
            effective_dos_300k_m3: None,
            carrier_type: None,
            degeneracy: None,
            compensating_level: None,
            temperature_range_k: None,
            hall_factor: HallFactor::Unity,
            relative_uncertainty_floor: RELATIVE_UNCERTAINTY_FLOOR,
            temperature_unc_k: None,
            density_scale_relative_unc: None,
            ionization_energy_bounds_ev: (0.001, 1.0),
            compensation_bounds: (1e-6, 0.995),
            net_density_bounds_m3: None,
            initial_guesses: Vec::new(),
            derive_starts_from_data: true,
            grid_search: true,
            curve_points: 200,
            max_iterations: 200,
        }
    }
}

impl FreezeOutSettings {
    /// The defaults with another material.
    pub fn for_material(material: Material) -> Self {
        FreezeOutSettings {
            material,
            ..FreezeOutSettings::default()
        }
    }

    fn validate(&self) -> Result<(), FreezeOutError> {
        self.material.validate()?;
        let invalid = |setting, value, requirement| {
            Err(FreezeOutError::InvalidSetting {
                setting,
                value,
                requirement,
            })
        };
        if let Some(dos) = self.effective_dos_300k_m3 {
            if !(dos.is_finite() && dos > 0.0) {
                return invalid(
                    "effective_dos_300K_m3",
                    dos,
                    "give the band-edge effective density of states at 300 K as a finite positive number in m^-3",
                );
            }
        }
        if let Some(degeneracy) = self.degeneracy {
            if !(degeneracy.is_finite() && degeneracy > 0.0) {
                return invalid(
                    "degeneracy",
                    degeneracy,
                    "give a finite positive degeneracy factor (2 for donors, 4 for acceptors)",
                );
            }
        }
        if let Some(level) = self.compensating_level {
            if !(level.ionization_energy_ev.is_finite() && level.ionization_energy_ev >= 0.0) {
                return invalid(
                    "compensating_ionization_energy_eV",
                    level.ionization_energy_ev,
                    "give a finite energy of 0 or more",
                );
            }
            if !(level.degeneracy.is_finite() && level.degeneracy > 0.0) {
                return invalid(
                    "compensating_degeneracy",
                    level.degeneracy,
                    "give a finite positive degeneracy factor",
                );
            }
        }
        let (low, high) = self.ionization_energy_bounds_ev;
        if !(low.is_finite() && high.is_finite() && low > 0.0 && low < high) {
            return invalid(
                "ionization_energy_bounds_eV",
                if low > 0.0 { high } else { low },
                "give two finite energies above 0 eV, the lower first",
            );
        }
        let (low, high) = self.compensation_bounds;
        if !(low > 0.0 && low < high && high < 1.0) {
            return invalid(
                "compensation_bounds",
                if low > 0.0 { high } else { low },
                "give two ratios N_comp / N_maj with 0 < lower < upper < 1",
            );
        }
        if let Some((low, high)) = self.net_density_bounds_m3 {
            if !(low.is_finite() && high.is_finite() && low > 0.0 && low < high) {
                return invalid(
                    "net_density_bounds_m3",
                    if low > 0.0 { high } else { low },
                    "give two finite densities above 0, the lower first",
                );
            }
        }
        if self.curve_points < 2 {
            return invalid("curve_points", self.curve_points as f64, "give 2 or more points");
        }
        if self.max_iterations == 0 {
            return invalid("max_iterations", 0.0, "give at least 1 iteration");
        }
        validate_stated_uncertainties(
            self.relative_uncertainty_floor,
            self.temperature_unc_k,
            self.density_scale_relative_unc,
        )
        .map_err(|(setting, value, requirement)| FreezeOutError::InvalidSetting {
            setting,
            value,
            requirement,
        })?;
        for guess in &self.initial_guesses {
            let ok = guess.dopant_density_m3.is_finite()
                && guess.compensating_density_m3.is_finite()
                && guess.compensating_density_m3 >= 0.0
                && guess.dopant_density_m3 > guess.compensating_density_m3
                && guess.ionization_energy_ev.is_finite();
            if !ok {
                return invalid(
                    "initial_guesses",
                    guess.dopant_density_m3,
                    "give finite densities with 0 <= compensating < dopant and a finite energy",
                );
            }
        }
        Ok(())
    }
}

/// Checks the stated parts of the uncertainty budget shared by the freeze-out and
/// Arrhenius fits; the error names the setting, its value and what to give instead.
pub(crate) fn validate_stated_uncertainties(
    floor: f64,
    temperature_unc_k: Option<f64>,
    density_scale_relative_unc: Option<f64>,
) -> Result<(), (&'static str, f64, &'static str)> {
    if !(floor.is_finite() && (0.0..1.0).contains(&floor)) {
        return Err((
            "relative_uncertainty_floor",
            floor,
            "give a relative uncertainty of 0 or more and below 1 (default 0.001)",
        ));
    }
    if let Some(value) = temperature_unc_k {
        if !(value.is_finite() && value >= 0.0) {
            return Err((
                "temperature_uncertainty_K",
                value,
                "give the standard uncertainty of the temperatures in kelvin, 0 or more",
            ));
        }
    }
    if let Some(value) = density_scale_relative_unc {
        if !(value.is_finite() && (0.0..1.0).contains(&value)) {
            return Err((
                "density_scale_relative_uncertainty",
                value,
                "give the relative standard uncertainty of the density scale, 0 or more and below 1 (0.03 for 3 %)",
            ));
        }
    }
    Ok(())
}

/// One point as fitted.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FittedPoint {
    pub temperature_k: f64,
    /// The density after the Hall-factor correction, m^-3.
    pub density_m3: f64,
    /// Its statistical uncertainty as given (after the Hall-factor correction), m^-3.
    pub density_unc_m3: Option<f64>,
    /// The temperature's standard uncertainty used, K.
    pub temperature_unc_k: f64,
    /// The Hall factor in effect for this point.
    pub hall_factor: f64,
    /// The relative uncertainty that weighted the point: the floored statistical part and
    /// the temperature's through the model's slope, before any Birge scaling (weighted
    /// fits only).
    pub effective_relative_unc: Option<f64>,
    /// The fitted model at this temperature, m^-3.
    pub model_density_m3: f64,
    /// ln(model) - ln(data).
    pub residual_ln: f64,
    /// The residual over the effective relative uncertainty (weighted fits only).
    pub normalized_residual: Option<f64>,
}

/// The fitted curve at one temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CurvePoint {
    pub temperature_k: f64,
    pub density_m3: f64,
}

/// The names of the fitted parameters, in the order of the fit.
pub const PARAMETER_NAMES: [&str; 3] = ["net dopant density", "compensation ratio", "ionization energy"];

/// A fitted value with its budget: `unc` is the total, the quadrature sum of `unc_stat`
/// (from the fit) and `unc_sys` (the common scale of the densities).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    pub value: f64,
    /// Total standard uncertainty; `None` when the fit does not determine the value.
    pub unc: Option<f64>,
    /// Statistical part: reading noise and temperature errors through the fit.
    pub unc_stat: Option<f64>,
    /// Systematic part: what the common scale of the densities moves the value by (0 when
    /// no scale uncertainty was given).
    pub unc_sys: f64,
}

impl Estimate {
    fn new(value: f64, unc_stat: Option<f64>, unc_sys: f64) -> Self {
        Estimate {
            value,
            unc: unc_stat.map(|stat| stat.hypot(unc_sys)),
            unc_stat,
            unc_sys,
        }
    }
}

/// The result of [`fit_freeze_out`]. Uncertainties are one standard uncertainty; `None`
/// where the parameter ended on a bound.
#[derive(Debug, Clone, PartialEq)]
pub struct FreezeOutFit {
    pub carrier_type: CarrierType,
    /// Majority dopant density (donors for n-type), m^-3.
    pub dopant_density_m3: f64,
    /// Its total uncertainty (statistical and common scale).
    pub dopant_density_m3_unc: Option<f64>,
    /// Compensating density (acceptors for n-type), m^-3.
    pub compensating_density_m3: f64,
    pub compensating_density_m3_unc: Option<f64>,
    /// Dopant minus compensating density (the saturation density), m^-3.
    pub net_density_m3: f64,
    pub net_density_m3_unc: Option<f64>,
    /// The three densities with their budgets (the same values as above).
    pub dopant: Estimate,
    pub compensating: Estimate,
    pub net: Estimate,
    /// Compensating over dopant density.
    pub compensation_ratio: f64,
    /// Its total uncertainty.
    pub compensation_ratio_unc: Option<f64>,
    /// The majority level's distance from its band edge, eV.
    pub ionization_energy_ev: f64,
    /// Its total uncertainty.
    pub ionization_energy_ev_unc: Option<f64>,
    /// The compensation ratio and the energy with their budgets.
    pub ratio: Estimate,
    pub energy: Estimate,
    /// Total covariance of (dopant density, compensating density, ionization energy), in
    /// m^-3 and eV: the fit's (after Birge scaling) plus the common scale's, which is fully
    /// correlated; rows and columns of a parameter on a bound are zero.
    pub covariance: [[f64; 3]; 3],
    /// The degeneracy factor used.
    pub degeneracy: f64,
    /// The Hall factor in effect when it is the same for every point; `None` when it
    /// varies with temperature (see the points).
    pub hall_factor: Option<f64>,
    /// True when the density uncertainties weighted the fit.
    pub weighted: bool,
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    pub reduced_chi_square: f64,
    /// P(chi^2_nu >= chi^2) of a weighted fit; NaN unweighted.
    pub chi_square_p_value: f64,
    /// The factor the statistical uncertainties were multiplied by (1 when chi^2/nu <= 1);
    /// NaN unweighted.
    pub birge_ratio: f64,
    /// Points whose relative statistical uncertainty was raised to the floor.
    pub floored_points: usize,
    /// The floor used.
    pub relative_uncertainty_floor: f64,
    /// Fits repeated with updated effective-variance weights (0 without temperature
    /// uncertainties).
    pub effective_variance_passes: usize,
    /// The common relative scale uncertainty applied to the densities (0 when not given).
    pub density_scale_relative_unc: f64,
    pub density_scale_source: UncertaintySource,
    pub temperature_unc_source: UncertaintySource,
    /// Names (from [`PARAMETER_NAMES`]) of the parameters that ended on a bound.
    pub at_bound: Vec<&'static str>,
    /// Starts tried, converged, and converged at the reported minimum.
    pub starts: usize,
    pub starts_converged: usize,
    pub starts_at_best: usize,
    /// Iterations of the best run.
    pub iterations: usize,
    /// The fitted model (to evaluate it anywhere).
    pub model: FreezeOutModel,
    /// The points used, sorted by temperature.
    pub points: Vec<FittedPoint>,
    pub curve: Vec<CurvePoint>,
    pub warnings: Vec<String>,
}

/// A validated series: sorted by temperature, Hall factor applied.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Series {
    pub carrier_type: CarrierType,
    pub temperatures_k: Vec<f64>,
    pub densities_m3: Vec<f64>,
    /// Statistical uncertainties (after the Hall-factor correction).
    pub uncertainties_m3: Option<Vec<f64>>,
    /// Standard uncertainty of each temperature, K (0 when not given).
    pub temperature_unc_k: Vec<f64>,
    pub temperature_unc_source: UncertaintySource,
    /// The Hall factor in effect for each point.
    pub hall_factors: Vec<f64>,
    /// The common relative scale uncertainty of the densities (0 when not given).
    pub density_scale_relative_unc: f64,
    pub density_scale_source: UncertaintySource,
    /// The smallest relative systematic uncertainty among the points (equal to the
    /// largest when the rows agree, as one sample's calibration does).
    pub smallest_point_scale: f64,
    /// Points outside the temperature range of a Hall factor table (they take its end
    /// values).
    pub outside_hall_factor_table: usize,
}

impl Series {
    pub fn len(&self) -> usize {
        self.temperatures_k.len()
    }

    /// Temperatures that differ (sorted input: count the changes).
    pub fn distinct_temperatures(&self) -> usize {
        let mut count = 0;
        let mut last = f64::NAN;
        for t in &self.temperatures_k {
            if *t != last {
                count += 1;
                last = *t;
            }
        }
        count
    }

    /// The Hall factor when every point has the same one.
    pub fn common_hall_factor(&self) -> Option<f64> {
        let first = *self.hall_factors.first()?;
        self.hall_factors.iter().all(|f| *f == first).then_some(first)
    }

    /// Whether any temperature uncertainty is above zero.
    pub fn has_temperature_unc(&self) -> bool {
        self.temperature_unc_k.iter().any(|u| *u > 0.0)
    }
}

/// What [`prepare_series`] needs besides the points.
#[derive(Debug, Clone, Copy)]
pub(crate) struct SeriesOptions<'a> {
    pub carrier_type: Option<CarrierType>,
    pub range_k: Option<(f64, f64)>,
    pub hall_factor: &'a HallFactor,
    /// For points without their own temperature uncertainty.
    pub temperature_unc_k: Option<f64>,
    /// For a series whose points carry no systematic uncertainty.
    pub density_scale_relative_unc: Option<f64>,
}

/// Checks the points, applies the temperature range and the Hall factor, and sorts by
/// temperature. Every point is checked for finite values (also those outside the range);
/// the carrier type and the uncertainties are judged over the points in the range.
pub(crate) fn prepare_series(points: &[DensityPoint], options: &SeriesOptions<'_>) -> Result<Series, SeriesError> {
    if points.is_empty() {
        return Err(SeriesError::NoPoints);
    }
    let hall_factor = options.hall_factor;
    let table = hall_factor.sorted_table()?;
    let constant = if table.is_none() {
        Some(hall_factor.value()?)
    } else {
        None
    };
    for (index, point) in points.iter().enumerate() {
        let t = point.temperature_k;
        if !t.is_finite() {
            return Err(SeriesError::NonFiniteTemperature { index, value: t });
        }
        if t <= 0.0 {
            return Err(SeriesError::NonPositiveTemperature { index, value: t });
        }
        let n = point.density_m3;
        if !n.is_finite() {
            return Err(SeriesError::NonFiniteDensity { index, value: n });
        }
        if n <= 0.0 {
            return Err(SeriesError::NonPositiveDensity { index, value: n });
        }
        if let Some(u) = point.density_unc_m3 {
            if !(u.is_finite() && u > 0.0) {
                return Err(SeriesError::InvalidUncertainty { index, value: u });
            }
        }
        if let Some(u) = point.density_unc_sys_m3 {
            if !(u.is_finite() && u >= 0.0) {
                return Err(SeriesError::InvalidSystematicUncertainty { index, value: u });
            }
        }
        if let Some(u) = point.temperature_unc_k {
            if !(u.is_finite() && u >= 0.0) {
                return Err(SeriesError::InvalidTemperatureUncertainty { index, value: u });
            }
        }
        if let Some(factor) = point.applied_hall_factor {
            if !(factor.is_finite() && factor > 0.0) {
                return Err(SeriesError::InvalidAppliedHallFactor { index, value: factor });
            }
        }
    }
    let mut selected: Vec<usize> = (0..points.len()).collect();
    if let Some((min_k, max_k)) = options.range_k {
        // A missing bound is 0 K or infinity (`temperature_min_K` or `temperature_max_K`
        // given alone), so only NaN, a negative lower bound and a reversed range are wrong.
        if !(min_k >= 0.0 && max_k >= min_k) {
            return Err(SeriesError::InvalidRange { min_k, max_k });
        }
        selected.retain(|&i| points[i].temperature_k >= min_k && points[i].temperature_k <= max_k);
        if selected.is_empty() {
            let data_min_k = points.iter().map(|p| p.temperature_k).fold(f64::INFINITY, f64::min);
            let data_max_k = points.iter().map(|p| p.temperature_k).fold(f64::NEG_INFINITY, f64::max);
            return Err(SeriesError::RangeExcludesAllData {
                min_k,
                max_k,
                data_min_k,
                data_max_k,
            });
        }
    }
    selected.sort_by(|a, b| points[*a].temperature_k.total_cmp(&points[*b].temperature_k));
    let mut data_type: Option<(CarrierType, usize)> = None;
    for &index in &selected {
        if let Some(kind) = points[index].carrier_type {
            match data_type {
                None => data_type = Some((kind, index)),
                Some((first, _)) if first != kind => {
                    return Err(SeriesError::CarrierTypeSwitch {
                        index,
                        temperature_k: points[index].temperature_k,
                        first,
                        then: kind,
                    })
                }
                Some(_) => {}
            }
        }
    }
    let carrier_type = match (options.carrier_type, data_type) {
        (Some(requested), Some((found, index))) if requested != found => {
            return Err(SeriesError::CarrierTypeMismatch {
                requested,
                found,
                index,
            })
        }
        (Some(requested), _) => requested,
        (None, Some((found, _))) => found,
        (None, None) => return Err(SeriesError::CarrierTypeUnknown),
    };
    let with = selected.iter().filter(|&&i| points[i].density_unc_m3.is_some()).count();
    if with != 0 && with != selected.len() {
        return Err(SeriesError::MixedUncertainties {
            with,
            without: selected.len() - with,
        });
    }

    // Temperature uncertainties: the point's own, else the stated one.
    let own = selected
        .iter()
        .filter(|&&i| points[i].temperature_unc_k.is_some())
        .count();
    let temperature_unc_source = match (own, options.temperature_unc_k) {
        (0, None) => UncertaintySource::NotGiven,
        (own, None) if own < selected.len() => {
            let index = *selected
                .iter()
                .find(|&&i| points[i].temperature_unc_k.is_none())
                .expect("a point without one");
            return Err(SeriesError::MissingTemperatureUncertainty {
                index,
                with: own,
                without: selected.len() - own,
            });
        }
        (own, _) if own == selected.len() => UncertaintySource::Points,
        _ => UncertaintySource::Stated,
    };
    let temperature_unc_k: Vec<f64> = selected
        .iter()
        .map(|&i| points[i].temperature_unc_k.or(options.temperature_unc_k).unwrap_or(0.0))
        .collect();

    // The common scale: the largest relative systematic uncertainty of the points, else
    // the stated one.
    let point_scales: Vec<f64> = selected
        .iter()
        .filter_map(|&i| points[i].density_unc_sys_m3.map(|u| u / points[i].density_m3))
        .collect();
    let smallest_point_scale = point_scales.iter().copied().fold(f64::INFINITY, f64::min);
    let (density_scale_relative_unc, density_scale_source) = if !point_scales.is_empty() {
        (
            point_scales.iter().copied().fold(0.0, f64::max),
            UncertaintySource::Points,
        )
    } else if let Some(stated) = options.density_scale_relative_unc {
        (stated, UncertaintySource::Stated)
    } else {
        (0.0, UncertaintySource::NotGiven)
    };

    // Hall factors: as given, or replacing the applied one.
    let mut outside_hall_factor_table = 0;
    let mut hall_factors = Vec::with_capacity(selected.len());
    let mut corrections = Vec::with_capacity(selected.len());
    for &i in &selected {
        let applied = points[i].applied_hall_factor.unwrap_or(1.0);
        let in_effect = match (&table, constant) {
            (Some(table), _) => {
                let t = points[i].temperature_k;
                if t < table[0].0 || t > table[table.len() - 1].0 {
                    outside_hall_factor_table += 1;
                }
                interpolate_hall_factor(table, t)
            }
            (None, Some(value)) if hall_factor.replaces_applied() => value,
            _ => applied,
        };
        hall_factors.push(in_effect);
        corrections.push(in_effect / applied);
    }
    Ok(Series {
        carrier_type,
        temperatures_k: selected.iter().map(|&i| points[i].temperature_k).collect(),
        densities_m3: selected
            .iter()
            .zip(&corrections)
            .map(|(&i, factor)| factor * points[i].density_m3)
            .collect(),
        uncertainties_m3: (with > 0).then(|| {
            selected
                .iter()
                .zip(&corrections)
                .map(|(&i, factor)| factor * points[i].density_unc_m3.expect("checked: every point has one"))
                .collect()
        }),
        temperature_unc_k,
        temperature_unc_source,
        hall_factors,
        density_scale_relative_unc,
        density_scale_source,
        smallest_point_scale,
        outside_hall_factor_table,
    })
}

/// theta = (log10 N_net, log10 c, E) to the solver's parameters.
fn level_parameters(theta: &[f64], ln_degeneracy: f64, compensating_level: Option<(f64, f64)>) -> LevelParameters {
    let ln_net = theta[0] * std::f64::consts::LN_10;
    let ln_ratio = theta[1] * std::f64::consts::LN_10;
    // N_maj = N_net / (1 - c), N_comp = c N_maj.
    let ln_dopant = ln_net - (-ln_ratio.exp()).ln_1p();
    LevelParameters {
        ln_dopant,
        ln_compensating: ln_dopant + ln_ratio,
        ln_net,
        ionization_energy_ev: theta[2],
        ln_degeneracy,
        compensating_level,
        compensating_ratio: f64::NAN,
        net_ratio: f64::NAN,
    }
    .with_ratios()
}

/// The slope of ln(n T^-1.5) against 1/kT over the lowest-temperature third (at least three
/// points) as an energy, eV; `None` when it is not a positive number.
fn low_temperature_activation_ev(series: &Series) -> Option<f64> {
    let count = (series.len() / 3).max(3).min(series.len());
    let x: Vec<f64> = series.temperatures_k[..count]
        .iter()
        .map(|t| 1.0 / (BOLTZMANN_EV_PER_K * t))
        .collect();
    let y: Vec<f64> = series.temperatures_k[..count]
        .iter()
        .zip(&series.densities_m3)
        .map(|(t, n)| n.ln() - 1.5 * t.ln())
        .collect();
    let line = fit_line(&x, &y, None).ok()?;
    let energy = -line.slope;
    (energy.is_finite() && energy > 0.0).then_some(energy)
}

/// Nodes of the start grid along log10 c (from its lower to its upper bound).
const GRID_COMPENSATION_NODES: usize = 9;
/// Nodes along E, spaced geometrically between its bounds: 25 nodes over the default
/// 1 meV to 1 eV are a factor 1.33 apart, finer than the basin of the global minimum
/// (about a factor 1.5 either side of the true energy in the synthetic tests).
const GRID_ENERGY_NODES: usize = 25;
/// How many grid minima become starts.
const GRID_STARTS: usize = 4;

/// The chi-square of theta on a (log10 c, E) grid at the plateau's net density; its local
/// minima (no lower neighbour among the eight around it), best first, are returned as
/// starts. The grid covers the whole bounded box, so it finds every basin wider than a grid
/// step whatever the user guessed.
fn grid_starts(
    residual: &(dyn Fn(&[f64], &mut [f64]) + Sync),
    count: usize,
    log_net: f64,
    lower: &[f64],
    upper: &[f64],
) -> Vec<Vec<f64>> {
    let (rows, columns) = (GRID_COMPENSATION_NODES, GRID_ENERGY_NODES);
    let compensation = |i: usize| lower[1] + (upper[1] - lower[1]) * i as f64 / (rows - 1) as f64;
    let energy = |j: usize| lower[2] * (upper[2] / lower[2]).powf(j as f64 / (columns - 1) as f64);
    // The nodes are independent: computed in parallel node by node (nine rows would share
    // two cores five to four), each with a residual buffer per worker.
    let nodes: Vec<f64> = (0..rows * columns)
        .into_par_iter()
        .map_init(
            || vec![0.0; count],
            |r, node| {
                let (i, j) = (node / columns, node % columns);
                residual(&[log_net, compensation(i), energy(j)], r);
                let sum: f64 = r.iter().map(|x| x * x).sum();
                if sum.is_finite() {
                    sum
                } else {
                    f64::INFINITY
                }
            },
        )
        .collect();
    let chi: Vec<&[f64]> = nodes.chunks(columns).collect();
    let mut minima: Vec<(f64, usize, usize)> = Vec::new();
    for i in 0..rows {
        for j in 0..columns {
            let value = chi[i][j];
            if !value.is_finite() {
                continue;
            }
            let mut lowest = true;
            for di in -1i64..=1 {
                for dj in -1i64..=1 {
                    let (ni, nj) = (i as i64 + di, j as i64 + dj);
                    if (di, dj) != (0, 0) && ni >= 0 && nj >= 0 && (ni as usize) < rows && (nj as usize) < columns {
                        lowest &= chi[ni as usize][nj as usize] >= value;
                    }
                }
            }
            if lowest {
                minima.push((value, i, j));
            }
        }
    }
    minima.sort_by(|a, b| a.0.total_cmp(&b.0));
    minima
        .into_iter()
        .take(GRID_STARTS)
        .map(|(_, i, j)| vec![log_net, compensation(i), energy(j)])
        .collect()
}

/// The largest relative change of an effective-variance weight at which the passes stop.
pub const EFFECTIVE_VARIANCE_TOLERANCE: f64 = 1e-3;
/// The most fits one call repeats with updated effective-variance weights.
pub const EFFECTIVE_VARIANCE_PASSES: usize = 20;
/// The relative temperature step of the central difference d ln n / dT: small enough for
/// the curvature of ln n(T) not to matter (its error is of order step^2), large enough for
/// rounding of ln n (about 1e-14 absolute) to stay below 1e-8 of the slope.
const SLOPE_STEP: f64 = 1e-4;
/// A stated relative uncertainty this far below the floor is worth a warning: whatever
/// produced it did not measure the point's reproducibility.
const IMPLAUSIBLE_BELOW_FLOOR: f64 = 1e-2;

/// The model at the series' temperatures, and the residuals a pass minimizes.
struct NeutralityProblem<'a> {
    terms: &'a [TemperatureTerms],
    /// The terms at T (1 + step) and T (1 - step) for the slope.
    slope_terms: Vec<(TemperatureTerms, TemperatureTerms, f64)>,
    ln_data: &'a [f64],
    ln_degeneracy: f64,
    compensating_level: Option<(f64, f64)>,
}

impl NeutralityProblem<'_> {
    fn residuals(&self, theta: &[f64], sigma: &[f64], r: &mut [f64]) {
        let parameters = level_parameters(theta, self.ln_degeneracy, self.compensating_level);
        for i in 0..r.len() {
            r[i] = (ln_majority_density(&self.terms[i], &parameters) - self.ln_data[i]) / sigma[i];
        }
    }

    /// d ln n / dT of the model at every point, K^-1 (0 where the model is not finite).
    fn ln_density_slopes(&self, theta: &[f64]) -> Vec<f64> {
        let parameters = level_parameters(theta, self.ln_degeneracy, self.compensating_level);
        self.slope_terms
            .iter()
            .map(|(above, below, span)| {
                let slope = (ln_majority_density(above, &parameters) - ln_majority_density(below, &parameters)) / span;
                if slope.is_finite() {
                    slope
                } else {
                    0.0
                }
            })
            .collect()
    }
}

/// d theta / d delta: how the best parameters move when every ln n_i moves by delta, to
/// first order: (J^T J)^-1 J^T (1 / sigma) with J the Jacobian of the weighted residuals at
/// the solution, over the parameters not on a bound (those do not move). Zero when J^T J
/// cannot be inverted.
fn common_shift_sensitivity(
    problem: &NeutralityProblem<'_>,
    theta: &[f64],
    sigma: &[f64],
    at_bound: &[bool],
) -> [f64; 3] {
    // Central differences of the residuals; steps of 1e-6 in log10 N_net and log10 c and
    // 1e-8 eV in E, far inside every basin and far above rounding.
    let steps = [1e-6, 1e-6, 1e-8];
    let free: Vec<usize> = (0..3).filter(|&j| !at_bound[j]).collect();
    let count = sigma.len();
    let mut jacobian = Matrix::zeros(count, free.len());
    let (mut above, mut below) = (vec![0.0; count], vec![0.0; count]);
    for (column, &j) in free.iter().enumerate() {
        let mut shifted = theta.to_vec();
        shifted[j] = theta[j] + steps[j];
        problem.residuals(&shifted, sigma, &mut above);
        shifted[j] = theta[j] - steps[j];
        problem.residuals(&shifted, sigma, &mut below);
        for i in 0..count {
            jacobian[(i, column)] = (above[i] - below[i]) / (2.0 * steps[j]);
        }
    }
    let mut shift = [0.0; 3];
    if free.is_empty() {
        return shift;
    }
    let inverse_weights: Vec<f64> = sigma.iter().map(|s| 1.0 / s).collect();
    let Ok(inverse) = jacobian.gram().inverse() else {
        return shift;
    };
    let moved = inverse.mul_vec(&jacobian.transpose_mul_vec(&inverse_weights));
    for (column, &j) in free.iter().enumerate() {
        if moved[column].is_finite() {
            shift[j] = moved[column];
        }
    }
    shift
}

/// Fits the charge-neutrality model to a temperature series of carrier densities.
pub fn fit_freeze_out(points: &[DensityPoint], settings: &FreezeOutSettings) -> Result<FreezeOutFit, FreezeOutError> {
    settings.validate()?;
    let series = prepare_series(
        points,
        &SeriesOptions {
            carrier_type: settings.carrier_type,
            range_k: settings.temperature_range_k,
            hall_factor: &settings.hall_factor,
            temperature_unc_k: settings.temperature_unc_k,
            density_scale_relative_unc: settings.density_scale_relative_unc,
        },
    )?;
    let distinct = series.distinct_temperatures();
    if distinct < MIN_TEMPERATURES {
        return Err(SeriesError::TooFewTemperatures {
            count: distinct,
            required: MIN_TEMPERATURES,
        }
        .into());
    }
    let carrier_type = series.carrier_type;
    let mut bands = settings.material.band_model();
    if let Some(dos) = settings.effective_dos_300k_m3 {
        match carrier_type {
            CarrierType::N => bands.conduction_dos_300k_m3 = dos,
            CarrierType::P => bands.valence_dos_300k_m3 = dos,
        }
    }
    let degeneracy = settings.degeneracy.unwrap_or(carrier_type.default_degeneracy());
    let ln_degeneracy = degeneracy.ln();
    let compensating_level = settings
        .compensating_level
        .map(|level| (level.ionization_energy_ev, level.degeneracy.ln()));
    let terms: Vec<TemperatureTerms> = series
        .temperatures_k
        .iter()
        .map(|t| TemperatureTerms::new(&bands, carrier_type, *t))
        .collect();
    let ln_data: Vec<f64> = series.densities_m3.iter().map(|n| n.ln()).collect();
    let count = series.len();

    // The statistical weights, floored.
    let weighted = series.uncertainties_m3.is_some();
    let floor = settings.relative_uncertainty_floor;
    let mut floored_points = 0;
    let mut implausibly_small = 0;
    let base: Vec<f64> = match &series.uncertainties_m3 {
        Some(unc) => unc
            .iter()
            .zip(&series.densities_m3)
            .map(|(u, n)| {
                let (relative, raised) = floored_relative_uncertainty(u / n, floor);
                floored_points += usize::from(raised);
                implausibly_small += usize::from(u / n < IMPLAUSIBLE_BELOW_FLOOR * floor);
                relative
            })
            .collect(),
        None => vec![1.0; count],
    };
    let use_temperature = weighted && series.has_temperature_unc();
    let problem = NeutralityProblem {
        terms: &terms,
        slope_terms: if use_temperature {
            series
                .temperatures_k
                .iter()
                .map(|t| {
                    (
                        TemperatureTerms::new(&bands, carrier_type, t * (1.0 + SLOPE_STEP)),
                        TemperatureTerms::new(&bands, carrier_type, t * (1.0 - SLOPE_STEP)),
                        2.0 * SLOPE_STEP * t,
                    )
                })
                .collect()
        } else {
            Vec::new()
        },
        ln_data: &ln_data,
        ln_degeneracy,
        compensating_level,
    };

    // Bounds of theta.
    let n_max = series.densities_m3.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let n_min = series.densities_m3.iter().copied().fold(f64::INFINITY, f64::min);
    let (net_low, net_high) = settings.net_density_bounds_m3.unwrap_or((n_min / 3.0, 1000.0 * n_max));
    let (c_low, c_high) = settings.compensation_bounds;
    let (e_low, e_high) = settings.ionization_energy_bounds_ev;
    let lower = vec![net_low.log10(), c_low.log10(), e_low];
    let upper = vec![net_high.log10(), c_high.log10(), e_high];
    let bounds = Bounds::new(lower.clone(), upper.clone()).map_err(FreezeOutError::Fit)?;
    let clamp = |j: usize, value: f64| value.max(lower[j]).min(upper[j]);

    // Starts.
    let mut starts: Vec<Vec<f64>> = Vec::new();
    if settings.derive_starts_from_data {
        let activation = low_temperature_activation_ev(&series).unwrap_or(0.05);
        let net_starts = [n_max.log10(), (3.0 * n_max).log10()];
        let energy_starts = [activation, 2.0 * activation];
        // c through the lowest point in the compensated regime with E = E_a:
        // n = K N_net / N_comp, N_comp = K N_net / n, c = N_comp / (N_net + N_comp).
        let lowest = &terms[0];
        let ln_k = lowest.ln_majority_dos - ln_degeneracy - activation * lowest.inverse_thermal_ev;
        let ratio = (ln_k - ln_data[0]).exp();
        let c_estimate = ratio / (1.0 + ratio);
        let mut compensation_starts = vec![0.01f64.log10(), 0.3f64.log10()];
        if c_estimate.is_finite() && c_estimate > c_low && c_estimate < c_high {
            compensation_starts.push(c_estimate.log10());
        }
        for net in net_starts {
            for energy in energy_starts {
                for compensation in &compensation_starts {
                    starts.push(vec![clamp(0, net), clamp(1, *compensation), clamp(2, energy)]);
                }
            }
        }
    }
    for guess in &settings.initial_guesses {
        let net = guess.dopant_density_m3 - guess.compensating_density_m3;
        let ratio = guess.compensating_density_m3 / guess.dopant_density_m3;
        let compensation = if ratio > 0.0 { ratio.log10() } else { lower[1] };
        starts.push(vec![
            clamp(0, net.log10()),
            clamp(1, compensation),
            clamp(2, guess.ionization_energy_ev),
        ]);
    }
    if settings.grid_search {
        let residual = |theta: &[f64], r: &mut [f64]| problem.residuals(theta, &base, r);
        starts.extend(grid_starts(&residual, count, clamp(0, n_max.log10()), &lower, &upper));
    }
    if starts.is_empty() {
        return Err(FreezeOutError::InvalidSetting {
            setting: "initial_guesses",
            value: 0.0,
            requirement: "give at least one initial guess when derive_starts_from_data and grid_search are false",
        });
    }
    let options = LmOptions {
        residuals_are_weighted: weighted,
        // Typical magnitudes: decades for the two logarithms, 10 meV for the energy.
        parameter_scales: Some(vec![1.0, 1.0, 0.01]),
        max_iterations: settings.max_iterations,
        ..LmOptions::default()
    };
    let solve = |sigma: &[f64], starts: &[Vec<f64>]| -> Result<MultiStartFit, FreezeOutError> {
        // The starts are independent: they run in parallel, with the same result as one
        // after the other. A single start (the later effective-variance passes) spreads the
        // columns of its finite-difference Jacobian over the pool instead. The model is
        // finite everywhere in the box (every term of the balance is, and so is its root), so
        // only the chosen run computes the Jacobian at its end.
        let result = minimize_multi_start_parallel(
            || {
                let residual = |theta: &[f64], r: &mut [f64]| problem.residuals(theta, sigma, r);
                LeastSquares::new_shared(count, residual)
                    .with_bounds(bounds.clone())
                    .with_residuals_finite_in_bounds()
            },
            starts,
            &options,
            &SameMinimum::default(),
        );
        result.map_err(|error| match error {
            FitError::Singular { parameters } => FreezeOutError::Undetermined {
                parameters: parameters.iter().map(|&j| PARAMETER_NAMES[j]).collect(),
            },
            other => FreezeOutError::Fit(other),
        })
    };

    // The first pass weighs by the statistical part alone; then the temperature errors
    // enter through the slope of the model at the previous pass's best parameters, until
    // the weights settle (effective variance).
    let mut sigma = base.clone();
    let mut multi = solve(&sigma, &starts)?;
    // The counts of the last multi-start solve, with the number of starts it tried (the
    // re-weighted solve also tries the previous best), so that converged <= tried.
    let (mut starts_tried, mut starts_converged, mut starts_at_best) =
        (starts.len(), multi.converged, multi.same_minimum);
    let mut passes = 0;
    let mut settled = true;
    if use_temperature {
        settled = false;
        while passes < EFFECTIVE_VARIANCE_PASSES {
            let slopes = problem.ln_density_slopes(&multi.best.parameters);
            let updated: Vec<f64> = (0..count)
                .map(|i| effective_uncertainty(base[i], slopes[i], series.temperature_unc_k[i]))
                .collect();
            let change = mobilis_numerics::fit::largest_relative_change(&updated, &sigma);
            if change <= EFFECTIVE_VARIANCE_TOLERANCE {
                settled = true;
                break;
            }
            sigma = updated;
            if passes == 0 {
                // The new weights may move the global minimum: every start again, and the
                // previous best.
                let mut again = starts.clone();
                again.push(multi.best.parameters.clone());
                multi = solve(&sigma, &again)?;
                starts_tried = again.len();
                starts_converged = multi.converged;
                starts_at_best = multi.same_minimum;
            } else {
                multi = solve(&sigma, std::slice::from_ref(&multi.best.parameters))?;
            }
            passes += 1;
        }
    }
    let fit = &multi.best;
    let theta = &fit.parameters;

    // Is the model right within the errors? Birge scaling of a weighted fit's covariance.
    let quality = FitQuality::assess(fit.chi_square, fit.degrees_of_freedom);
    let theta_covariance = if weighted {
        let factor = quality.birge_ratio * quality.birge_ratio;
        Matrix::from_fn(3, 3, |i, j| factor * fit.covariance[(i, j)])
    } else {
        fit.covariance.clone()
    };

    // Physical parameters and first-order propagation of the covariance of theta.
    let ln10 = std::f64::consts::LN_10;
    let net = 10f64.powf(theta[0]);
    let ratio = 10f64.powf(theta[1]);
    let dopant = net / (1.0 - ratio);
    let compensating = ratio * dopant;
    let energy = theta[2];
    // Rows: dopant, compensating, energy; columns: log10 N_net, log10 c, E.
    let d_over_dc = net / ((1.0 - ratio) * (1.0 - ratio)) * ln10 * ratio;
    let gradient = Matrix::from_rows(&[
        [ln10 * dopant, d_over_dc, 0.0],
        [ln10 * compensating, d_over_dc, 0.0],
        [0.0, 0.0, 1.0],
    ]);
    let physical = gradient.matmul(&theta_covariance).matmul(&gradient.transpose());
    // The common scale of the densities, applied once: a relative error s of every
    // density shifts every ln n_i by s, and the fit's parameters by s times their
    // sensitivity to that shift (first-order propagation of a fully correlated input, the
    // GUM's 5.2). On the saturation plateau it lands on N_net in full; in the compensated
    // regime n ~ (N_net / N_comp) K(T) it leaves N_comp alone; between the two the model
    // cannot follow a pure scale, and the fit trades some of it against E and c. Zero
    // without a stated scale.
    let scale = series.density_scale_relative_unc;
    let theta_shift = if scale > 0.0 {
        common_shift_sensitivity(&problem, theta, &sigma, &fit.at_bound)
    } else {
        [0.0; 3]
    };
    let physical_shift: Vec<f64> = (0..3)
        .map(|i| scale * (0..3).map(|j| gradient[(i, j)] * theta_shift[j]).sum::<f64>())
        .collect();
    let mut covariance = [[0.0; 3]; 3];
    for (i, row) in covariance.iter_mut().enumerate() {
        for (j, entry) in row.iter_mut().enumerate() {
            *entry = physical[(i, j)] + physical_shift[i] * physical_shift[j];
        }
    }
    let free = |j: usize| !fit.at_bound[j];
    let standard = |variance: f64| (variance >= 0.0).then(|| variance.sqrt());
    let dopant_unc = if free(0) { standard(physical[(0, 0)]) } else { None };
    let compensating_unc = if free(0) && free(1) {
        standard(physical[(1, 1)])
    } else {
        None
    };
    let energy_unc = if free(2) { standard(physical[(2, 2)]) } else { None };
    let net_unc = if free(0) {
        standard(theta_covariance[(0, 0)]).map(|sigma| ln10 * net * sigma)
    } else {
        None
    };
    let ratio_unc = if free(1) {
        standard(theta_covariance[(1, 1)]).map(|sigma| ln10 * ratio * sigma)
    } else {
        None
    };
    let dopant_estimate = Estimate::new(dopant, dopant_unc, physical_shift[0].abs());
    let compensating_estimate = Estimate::new(compensating, compensating_unc, physical_shift[1].abs());
    let energy_estimate = Estimate::new(energy, energy_unc, physical_shift[2].abs());
    let net_estimate = Estimate::new(net, net_unc, (ln10 * net * scale * theta_shift[0]).abs());
    let ratio_estimate = Estimate::new(ratio, ratio_unc, (ln10 * ratio * scale * theta_shift[1]).abs());

    let model = FreezeOutModel {
        carrier_type,
        bands,
        dopant_density_m3: dopant,
        compensating_density_m3: compensating,
        ionization_energy_ev: energy,
        degeneracy,
        compensating_level: settings.compensating_level,
    };
    let parameters = level_parameters(theta, ln_degeneracy, compensating_level);
    let fitted_points: Vec<FittedPoint> = (0..count)
        .map(|i| {
            let ln_model = ln_majority_density(&terms[i], &parameters);
            let residual_ln = ln_model - ln_data[i];
            FittedPoint {
                temperature_k: series.temperatures_k[i],
                density_m3: series.densities_m3[i],
                density_unc_m3: series.uncertainties_m3.as_ref().map(|unc| unc[i]),
                temperature_unc_k: series.temperature_unc_k[i],
                hall_factor: series.hall_factors[i],
                effective_relative_unc: weighted.then_some(sigma[i]),
                model_density_m3: ln_model.exp(),
                residual_ln,
                normalized_residual: weighted.then_some(residual_ln / sigma[i]),
            }
        })
        .collect();
    let t_min = series.temperatures_k[0];
    let t_max = series.temperatures_k[count - 1];
    let curve: Vec<CurvePoint> = (0..settings.curve_points)
        .map(|k| {
            let fraction = k as f64 / (settings.curve_points - 1) as f64;
            let temperature_k = if k + 1 == settings.curve_points {
                t_max
            } else {
                t_min * (t_max / t_min).powf(fraction)
            };
            let terms = TemperatureTerms::new(&bands, carrier_type, temperature_k);
            CurvePoint {
                temperature_k,
                density_m3: ln_majority_density(&terms, &parameters).exp(),
            }
        })
        .collect();

    let at_bound: Vec<&'static str> = (0..3)
        .filter(|&j| fit.at_bound[j])
        .map(|j| PARAMETER_NAMES[j])
        .collect();
    let mut warnings = collect_warnings(&WarningInputs {
        fit_at_bound: &fit.at_bound,
        theta,
        lower: &lower,
        weighted,
        quality: &quality,
        starts: starts_tried,
        starts_at_best,
        terms: &terms,
        temperatures_k: &series.temperatures_k,
        points: &fitted_points,
        bands: &bands,
        carrier_type,
    });
    if !settled {
        warnings.push(format!(
            "the effective-variance weights still changed after {EFFECTIVE_VARIANCE_PASSES} passes: the temperature uncertainties are large against the curvature of ln n(T), so the uncertainties are approximate; check temperature_K_unc (or temperature_uncertainty_K)"
        ));
    }
    if series.uncertainties_m3.is_none() && series.has_temperature_unc() {
        warnings.push(
            "the temperature uncertainties were not used: without density uncertainties the fit is unweighted and its errors come from the scatter; give density_m3_unc_stat (or density_m3_unc) to weigh the points and propagate the temperatures"
                .into(),
        );
    }
    if implausibly_small > 0 {
        warnings.push(format!(
            "{implausibly_small} points state a relative density uncertainty below {:.0e}, which no Hall measurement reproduces; they were raised to relative_uncertainty_floor ({floor}) so that no point pins the fit",
            IMPLAUSIBLE_BELOW_FLOOR * floor
        ));
    }
    if series.density_scale_source == UncertaintySource::Points && series.smallest_point_scale < 0.9 * scale {
        warnings.push(format!(
            "the rows' density_m3_unc_sys / density_m3 range from {:.3e} to {scale:.3e}; the largest was applied as the scale common to the series, but a part that differs between rows is not common to them (check the calibration inputs of hall.reduce)",
            series.smallest_point_scale
        ));
    }
    if series.outside_hall_factor_table > 0 {
        warnings.push(format!(
            "{} points lie outside the temperatures of hall_factor_table and take its end values; extend the table to cover {t_min} K to {t_max} K",
            series.outside_hall_factor_table
        ));
    }
    Ok(FreezeOutFit {
        carrier_type,
        dopant_density_m3: dopant,
        dopant_density_m3_unc: dopant_estimate.unc,
        compensating_density_m3: compensating,
        compensating_density_m3_unc: compensating_estimate.unc,
        net_density_m3: net,
        net_density_m3_unc: net_estimate.unc,
        dopant: dopant_estimate,
        compensating: compensating_estimate,
        net: net_estimate,
        compensation_ratio: ratio,
        compensation_ratio_unc: ratio_estimate.unc,
        ionization_energy_ev: energy,
        ionization_energy_ev_unc: energy_estimate.unc,
        ratio: ratio_estimate,
        energy: energy_estimate,
        covariance,
        degeneracy,
        hall_factor: series.common_hall_factor(),
        weighted,
        chi_square: fit.chi_square,
        degrees_of_freedom: fit.degrees_of_freedom,
        reduced_chi_square: fit.reduced_chi_square,
        chi_square_p_value: if weighted { quality.p_value } else { f64::NAN },
        birge_ratio: if weighted { quality.birge_ratio } else { f64::NAN },
        floored_points,
        relative_uncertainty_floor: floor,
        effective_variance_passes: passes,
        density_scale_relative_unc: scale,
        density_scale_source: series.density_scale_source,
        temperature_unc_source: series.temperature_unc_source,
        at_bound,
        starts: starts_tried,
        starts_converged,
        starts_at_best,
        iterations: fit.iterations,
        model,
        points: fitted_points,
        curve,
        warnings,
    })
}

struct WarningInputs<'a> {
    fit_at_bound: &'a [bool],
    theta: &'a [f64],
    lower: &'a [f64],
    weighted: bool,
    quality: &'a FitQuality,
    starts: usize,
    starts_at_best: usize,
    terms: &'a [TemperatureTerms],
    temperatures_k: &'a [f64],
    points: &'a [FittedPoint],
    bands: &'a mobilis_physics::forward::statistics::BandModel,
    carrier_type: CarrierType,
}

/// The conditions a careful analyst would want pointed out.
fn collect_warnings(inputs: &WarningInputs<'_>) -> Vec<String> {
    let mut warnings = Vec::new();
    for (j, name) in PARAMETER_NAMES.iter().enumerate() {
        if inputs.fit_at_bound[j] {
            let side = if inputs.theta[j] <= inputs.lower[j] {
                "lower"
            } else {
                "upper"
            };
            let advice = match j {
                0 => "check the data's density range or give net_density_bounds_m3",
                1 if side == "lower" => {
                    "the densities do not fall far enough below the compensating density to show it, so read the value as an upper estimate"
                }
                1 => "the data look more compensated than the bound allows: check the carrier type and the model",
                _ => "widen ionization_energy_bounds_eV or check the temperature range",
            };
            warnings.push(format!(
                "the {name} ended on its {side} bound, so the data do not determine it and no uncertainty is given; {advice}"
            ));
        }
    }
    let quality = inputs.quality;
    if inputs.weighted {
        let residuals: Vec<f64> = inputs
            .points
            .iter()
            .map(|point| point.normalized_residual.unwrap_or(f64::NAN))
            .collect();
        if let Some(warning) = quality.warning(&residuals, |i| format!("{:.2} K", inputs.points[i].temperature_k)) {
            warnings.push(format!(
                "{warning}. The weights are the statistical density uncertainties (density_m3_unc_stat, at least relative_uncertainty_floor) and the temperature uncertainties (temperature_K_unc or temperature_uncertainty_K) through the model's slope: check them, or the model (a second level, hopping conduction at the lowest temperatures, a Hall factor that varies with temperature: hall_factor_table)"
            ));
        }
        let nu = quality.degrees_of_freedom as f64;
        // chi^2 / nu has standard deviation sqrt(2 / nu): four of those below 1 is improbable.
        if nu >= 10.0 && quality.reduced_chi_square < 1.0 - 4.0 * (2.0 / nu).sqrt() {
            warnings.push(format!(
                "the reduced chi-square is {:.3} for {} degrees of freedom: the density uncertainties look overestimated, so the standard errors are too large (they are never scaled down)",
                quality.reduced_chi_square, quality.degrees_of_freedom
            ));
        }
    }
    if inputs.starts > 1 && inputs.starts_at_best == 1 {
        warnings.push(format!(
            "only one of {} starting points reached the reported minimum: check the fitted curve against the data",
            inputs.starts
        ));
    }
    // Minority carriers: n_i^2 / n against n at the hottest point.
    if let (Some(terms), Some(point)) = (inputs.terms.last(), inputs.points.last()) {
        let ln_model = point.model_density_m3.ln();
        let minority_fraction = (terms.ln_intrinsic_squared - 2.0 * ln_model).exp();
        if minority_fraction > 0.01 {
            warnings.push(format!(
                "intrinsic carriers reach {:.1} % of the majority density at {:.1} K: the fit there depends on the material's band gap and densities of states",
                100.0 * minority_fraction,
                point.temperature_k
            ));
        }
    }
    // Boltzmann statistics need the density well below the band's density of states.
    for (t, point) in inputs.temperatures_k.iter().zip(inputs.points) {
        let dos = match inputs.carrier_type {
            CarrierType::N => inputs.bands.conduction_dos_m3(*t),
            CarrierType::P => inputs.bands.valence_dos_m3(*t),
        };
        if point.model_density_m3 > 0.1 * dos {
            warnings.push(format!(
                "at {t:.1} K the carrier density is {:.0} % of the band's effective density of states: Boltzmann statistics, which the model assumes, begin to fail",
                100.0 * point.model_density_m3 / dos
            ));
            break;
        }
    }
    warnings
}
