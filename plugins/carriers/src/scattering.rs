//! `carriers.mobility_scattering`: the temperature dependence of the mobility split into
//! scattering mechanisms, and the ionized-impurity density it implies.
//!
//! Pure computation: no DataFrames, no I/O. The plugin's table glue turns the input rows into
//! [`MobilityPoint`]s and the [`ScatteringFit`] back into a summary and a table.
//!
//! # The model
//!
//! The drift mobility at temperature T is combined from independent mechanisms by
//! Matthiessen's rule, 1/mu = 1/mu_L + 1/mu_I + 1/mu_N + 1/mu_C:
//!
//! - **Lattice**, mu_L = mu_300 (T / 300 K)^-alpha, with mu_300 and alpha fitted (alpha may
//!   be fixed). The power law stands for acoustic and optical phonons together; the classic
//!   silicon exponents are 2.2 to 2.6 (Arora et al. 1982; Morin and Maita 1954), well above
//!   the 1.5 of acoustic deformation-potential scattering alone.
//! - **Ionized impurities**, mu_I by Brooks-Herring (default) or Conwell-Weisskopf, the
//!   formulas reviewed by Chattopadhyay and Queisser, Rev. Mod. Phys. 53, 745 (1981), as
//!   `mobilis_physics::forward::mobility` implements them (so the fit evaluates exactly the
//!   physics the forward models simulate). The density of charged centres N_I is either one
//!   fitted constant ([`IonizedDensityModel::Constant`], default) or follows the measured
//!   carrier density as N_I = n + 2 N_comp with the compensating density N_comp fitted
//!   ([`IonizedDensityModel::CarriersPlusCompensation`]): in an n-type crystal every acceptor
//!   is charged and neutrality makes the ionized donors N_D+ = n + N_A, so N_D+ + N_A- =
//!   n + 2 N_A (p-type alike, with holes and donors). The second form is the right one in
//!   the freeze-out range, where the constant N_I of the first would have to vary.
//!   The Brooks-Herring screening density n' is chosen by [`ScreeningDensity`]: the measured
//!   carrier density at each temperature (default; N_I where a point has none), N_I itself,
//!   or Brooks' expression for a compensated crystal,
//!   n' = n + (n + N_comp) (N_dop - N_comp - n) / N_dop,
//!   which adds the screening of the partly filled donor levels (the form that
//!   `mobilis_physics::forward::statistics` derives from the full statistics). In the
//!   freeze-out range the choice matters: on data from core's forward model of a compensated
//!   silicon wafer from 20 to 400 K, the carriers-plus-compensation model with Brooks'
//!   screening recovers N_A within 1 % at chi^2/nu near 1, while screening by n alone misses
//!   the data (chi^2/nu above 10) and N_A by a factor of about 3. Give the freeze-out
//!   densities to the screening whenever they are known.
//! - **Neutral impurities** (optional), Erginsoy's formula mu_N = e / (20 a_B* hbar N_N)
//!   with the effective Bohr radius a_B* = 4 pi eps hbar^2 / (m* e^2) (C. Erginsoy, Phys.
//!   Rev. 79, 1013, 1950; the formula is recalled from memory, not checked against the
//!   paper). It does not depend on temperature, so a fitted constant N_N and the constant
//!   term below are the same term; they cannot both be fitted
//!   ([`ScatteringError::IndistinguishableTerms`]). With the net doping known (from a
//!   freeze-out fit, or the carrier density where all dopants are ionized), the neutral
//!   density follows the measured carrier density instead, N_N = (N_dop - N_comp) - n: the
//!   majority dopants not ionized (neutrality again). That term has no free parameter.
//! - **A temperature-independent term** mu_C (optional, fitted): whatever limits the
//!   mobility without a temperature dependence of its own (alloy disorder, dislocations at a
//!   fixed density, a neutral-impurity density that does not change).
//!
//! Material parameters (the conductivity effective mass m*/m0 and the static relative
//! permittivity eps_r) come in a `ScatteringMedium`; the glue takes them from a material
//! preset or the user's override. The impurity charge number Z (default 1) is a setting.
//!
//! # Hall and drift mobility
//!
//! The formulas give drift mobilities. Hall mobilities are divided by the Hall factor r_H
//! of [`ScatteringSettings::hall_factor`] (default 1: the data are taken as drift
//! mobilities) before the fit, and every mobility of the result is on that drift scale. A
//! constant r_H only rescales the data: it multiplies the fitted mu_300 by 1/r_H and, since
//! 1/mu_I is proportional to N_I, the fitted N_I by about r_H. Taking Hall mobilities as
//! drift mobilities therefore underestimates N_I by the Hall factor (1.18 to 1.93 for the
//! classic mechanisms, Putley 1960).
//!
//! # The fit
//!
//! Least squares in ln mu (so that a mobility spanning decades weighs each point by its
//! relative error), with the bounded Levenberg-Marquardt solver of `mobilis_numerics::fit` and
//! an analytic Jacobian (the ionized-impurity column by a central difference in ln N_I,
//! because the screening may depend on N_I too). The parameters are ln mu_300, alpha,
//! ln N_I (or ln N_comp), ln N_N and ln mu_C, so densities and mobilities stay positive and
//! the bounds ([`ParameterBounds`]) are boxes in those logarithms. Every combination of the
//! starting values in [`starts`] is tried and the converged run of lowest chi-square kept;
//! how many runs reached it is reported, and a warning names another minimum that fits
//! almost as well (chi-square within 4 noise variances of the best): then the data allow
//! more than one decomposition. Other warnings: a parameter that ended on a bound, a
//! weighted fit the model does not describe within the errors (below), and
//! ionized-impurity scattering below 5 % of the scattering rate at every fitted point (N_I
//! then rests on almost nothing).
//!
//! Points outside [`ScatteringSettings::temperature_min_k`, `temperature_max_k`] are not
//! fitted, but are evaluated with the fitted model for the table (flagged
//! `in_fit_range = false`). Every temperature must be valid; the other checks apply to the
//! points in the range only, so that the range is also how a bad point is left out.
//!
//! # The uncertainty budget
//!
//! - **Weights** (Type A). With mobility uncertainties the residual of a point is
//!   ln(mu_fit/mu) / s with s the point's relative uncertainty: its statistical part only
//!   (`hall_mobility_m2_per_Vs_unc_stat` of `hall.reduce`), raised to
//!   [`ScatteringSettings::relative_uncertainty_floor`] (default 0.1 %, so that no point can
//!   pin the fit; `floored_points` counts them), and widened by the temperature's
//!   uncertainty through the model's slope, s^2 = s_mu^2 + (d ln mu / dT)^2 u_T^2 (effective
//!   variance: J. A. Clutton-Brock, Technometrics 9, 261, 1967; J. Orear, Am. J. Phys. 50,
//!   912, 1982). The slope is the fitted model's at the point with its measured carrier
//!   density held, so the fit is repeated from its own solution with updated variances until
//!   the parameters settle (at most six times). Where
//!   ionized-impurity scattering rules, d ln mu / dT is steep and the temperature dominates
//!   the weight; on the lattice side it adds little.
//! - **Chi-square.** The summary carries chi^2/nu, its p-value and the Birge ratio
//!   R_B = sqrt(chi^2/nu) (R. T. Birge, Phys. Rev. 40, 207, 1932). The covariance
//!   (J^T J)^-1 is multiplied by R_B^2 when it exceeds 1 and never shrunk, as the Particle
//!   Data Group does for inconsistent data; when the p-value is below 1e-3 a warning names
//!   the worst points and the parameters that govern the weights. Without uncertainties the
//!   residuals are unweighted and the covariance is scaled by chi^2/nu (the scatter of the
//!   residuals is the noise estimate); p-value and Birge ratio are then not defined.
//! - **Calibrations** (Type B). An error common to the whole series is applied once, after
//!   the fit, never as per-point noise: the relative uncertainty of the mobility scale (a
//!   field calibration; `_unc_sys` of the mobility column) and of the carrier-density scale
//!   (thickness, field, current, voltage; `density_m3_unc_sys`, which matters only where
//!   the model reads the densities: screening by the measured carriers, the
//!   carriers-plus-compensation model). Each moves the fitted parameters by the fit's linear
//!   response dp = -(J^T J)^-1 J^T dr to the change dr it makes in the weighted residuals,
//!   the first-order sensitivity of the GUM (JCGM 100:2008, 5.1.3): a 1 % mobility scale
//!   moves mu_300 by 1 %, N_I by about 1 % the other way and alpha hardly at all. Each
//!   reported quantity X has `X_unc_stat` (from the scaled covariance), `X_unc_sys` (null
//!   when no calibration was stated; `calibrations_not_stated` lists them) and `X_unc`,
//!   their quadrature sum. Uncertainties of mu_300, N_I, N_N and mu_C are first order from
//!   those of their logarithms (u(x) = x u(ln x)).
//! - **An undetermined density.** When the ionized-impurity parameter ends on its lower
//!   bound (or has no uncertainty), the data do not determine it. The fit then reports a
//!   profile upper limit: the parameter is held at increasing values with the others refitted
//!   until chi-square grows by k^2 noise variances (k = `consistency_sigma_multiple`), and a
//!   comparison asks only whether the reference exceeds it
//!   ([`crate::purity::compare_with_upper_limit`]).
//!
//! # Comparison with a freeze-out fit
//!
//! Given the dopant and compensating densities of a freeze-out fit ([`DopantDensities`]),
//! the result carries a [`DensityComparison`]:
//!
//! - With the constant-N_I model, the fitted N_I stands for the charged centres where
//!   ionized-impurity scattering limits the mobility, which is the low-temperature end of
//!   the data, where the majority dopants may be partly frozen out. There the density of
//!   charged centres is N_dop+ + N_comp- = n + 2 N_comp (capped at N_dop + N_comp), which
//!   can be several times smaller than the total N_dop + N_comp (4e14 against 3.2e15 cm^-3
//!   in a silicon wafer with N_D = 3e15 and N_A = 2e14 cm^-3 at 20 K). Comparing with the
//!   total would call a correct fit inconsistent. So when every fitted point has a measured
//!   carrier density the reference is n + 2 N_comp averaged over the fitted temperatures in
//!   ln N, each point weighted by (s_i / u_i)^2 with s_i = d ln mu_fit / d ln N_I its
//!   sensitivity to N_I and u_i its uncertainty in ln mu: to first order this is the
//!   constant a fit of the same data would return if the true N_I varied from point to point
//!   ([`ReferenceBasis::IonizedAtFitTemperatures`]). Without carrier densities the reference
//!   is N_dop + N_comp ([`ReferenceBasis::TotalImpurities`]), right when the fitted range
//!   lies where the dopants are fully ionized.
//! - With the carriers-plus-compensation model, the fitted N_comp is compared with the
//!   freeze-out N_comp directly ([`ReferenceBasis::CompensatingDensity`]).
//!
//! The verdict is [`crate::purity::compare_densities`]: consistent when |ln(fitted /
//! reference)| is at most `sigma_multiple` times the combined relative uncertainty, which
//! includes a relative uncertainty of the scattering theory itself
//! ([`ConsistencyTolerance`]).

#[cfg(test)]
mod budget_tests;
mod error;
#[cfg(test)]
mod tests;
#[cfg(test)]
mod validation;

pub use error::ScatteringError;

use mobilis_numerics::fit::{
    effective_uncertainty, floored_relative_uncertainty, Bounds, FitError, FitQuality, LeastSquares, LmFit, LmOptions,
    MultiStartFit, SameMinimum, StartSummary, RELATIVE_UNCERTAINTY_FLOOR,
};
use mobilis_numerics::linalg::Matrix;
use mobilis_physics::constants::{
    ELECTRON_MASS_KG, ELEMENTARY_CHARGE_C, REDUCED_PLANCK_J_S, VACUUM_PERMITTIVITY_F_PER_M,
};
use mobilis_physics::forward::mobility::{lattice_mobility_m2_per_vs, ScatteringMedium};
use std::f64::consts::PI;

use crate::carrier_type::CarrierType;
use crate::materials::Material;

use crate::purity::ScatteringDensities;
pub use crate::purity::{
    compare_densities, compare_with_upper_limit, ConsistencyTolerance, DensityComparison, DopantDensities, Estimate,
    PurityError, ReferenceBasis,
};

/// The lattice power law's reference temperature, K.
pub const REFERENCE_TEMPERATURE_K: f64 = 300.0;

/// The effective Bohr radius a_B* = 4 pi eps_r eps_0 hbar^2 / (m* e^2), m: the radius of the
/// hydrogen-like ground state of a carrier bound to a singly charged impurity in a medium of
/// permittivity eps_r with mass m*. For m* = m0 and eps_r = 1 it is the Bohr radius.
pub fn effective_bohr_radius_m(medium: &ScatteringMedium) -> f64 {
    4.0 * PI * medium.relative_permittivity * VACUUM_PERMITTIVITY_F_PER_M * REDUCED_PLANCK_J_S * REDUCED_PLANCK_J_S
        / (medium.effective_mass_ratio * ELECTRON_MASS_KG * ELEMENTARY_CHARGE_C * ELEMENTARY_CHARGE_C)
}

/// Neutral-impurity mobility after Erginsoy (Phys. Rev. 79, 1013, 1950; recalled from
/// memory), mu_N = e / (20 a_B* hbar N_N), m^2/(V s), for a neutral density N_N in m^-3:
/// the scattering rate of a carrier on hydrogen-like neutral centres, independent of its
/// energy and so of temperature. Infinite when there are no neutral centres.
pub fn neutral_impurity_mobility_m2_per_vs(medium: &ScatteringMedium, neutral_density_m3: f64) -> f64 {
    if neutral_density_m3 == 0.0 {
        return f64::INFINITY;
    }
    ELEMENTARY_CHARGE_C / (20.0 * effective_bohr_radius_m(medium) * REDUCED_PLANCK_J_S * neutral_density_m3)
}

/// One measured mobility.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct MobilityPoint {
    /// K.
    pub temperature_k: f64,
    /// Hall or drift mobility magnitude, m^2/(V s) (see [`ScatteringSettings::hall_factor`]).
    pub mobility_m2_per_vs: f64,
    /// Statistical (Type A) standard uncertainty of the mobility, m^2/(V s): the part that
    /// is independent from point to point and weights the fit. Give it for every fitted
    /// point or for none. An error common to the whole series (a field calibration) belongs
    /// in [`ScatteringSettings::mobility_scale_relative_unc`] instead.
    pub mobility_unc_m2_per_vs: Option<f64>,
    /// Standard uncertainty of the sample temperature, K (the readings' spread and the
    /// thermometer's stated accuracy in quadrature); propagated through d ln mu / dT of the
    /// model (effective variance). `None` counts as exact.
    pub temperature_unc_k: Option<f64>,
    /// Measured majority carrier density at this temperature, m^-3 (for screening, the
    /// carriers-plus-compensation model, the neutral density and the freeze-out comparison).
    pub carrier_density_m3: Option<f64>,
}

/// Which ionized-impurity formula; a parameter names it in snake case.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum IonizedImpurityFormula {
    /// Screened Coulomb potential (Brooks-Herring).
    #[default]
    BrooksHerring,
    /// Bare Coulomb potential cut off at half the mean impurity spacing (Conwell-Weisskopf).
    ConwellWeisskopf,
}

impl IonizedImpurityFormula {
    /// "brooks_herring" or "conwell_weisskopf".
    pub fn name(self) -> &'static str {
        match self {
            IonizedImpurityFormula::BrooksHerring => "brooks_herring",
            IonizedImpurityFormula::ConwellWeisskopf => "conwell_weisskopf",
        }
    }
}

/// What density of charged centres the ionized-impurity term sees; a parameter names
/// it in snake case.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum IonizedDensityModel {
    /// One constant N_I, fitted.
    #[default]
    Constant,
    /// N_I = n + 2 N_comp at each point, with the measured carrier density n and the
    /// compensating density N_comp fitted. Needs the carrier density at every fitted point.
    CarriersPlusCompensation,
}

/// The Brooks-Herring screening density n'.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum ScreeningDensity {
    /// The measured carrier density at each point; N_I where a point has none.
    #[default]
    MeasuredCarriers,
    /// N_I at every point (the usual choice without carrier densities, right when the
    /// dopants are fully ionized and uncompensated).
    ImpurityDensity,
    /// Brooks' n' = n + (n + N_comp)(N_dop - N_comp - n) / N_dop for a compensated crystal,
    /// with the measured n and known densities (the last factor taken as zero when n
    /// exceeds N_dop - N_comp). Needs the carrier density at every point evaluated.
    Compensated {
        dopant_density_m3: f64,
        compensating_density_m3: f64,
    },
}

/// The neutral-impurity term.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum NeutralImpurityModel {
    /// No neutral-impurity scattering.
    #[default]
    None,
    /// A constant neutral density N_N, fitted.
    FittedConstant,
    /// N_N = net_doping - n at each point (zero where n exceeds it), with the measured n and
    /// the known net doping N_dop - N_comp. No free parameter.
    FromCarrierDensity { net_doping_m3: f64 },
}

/// Box bounds of the fitted quantities, each (lower, upper) in SI. The defaults are wide
/// enough for any semiconductor we know of and only keep the solver out of nonsense.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ParameterBounds {
    /// Default 1e-4 to 1e2 m^2/(V s) (1 to 1e6 cm^2/(V s)).
    pub lattice_mobility_300k_m2_per_vs: (f64, f64),
    /// Default 0 to 6.
    pub lattice_exponent: (f64, f64),
    /// N_I, or N_comp of the carriers-plus-compensation model. Default 1e14 to 1e27 m^-3
    /// (1e8 to 1e21 cm^-3).
    pub ionized_density_m3: (f64, f64),
    /// Default 1e14 to 1e27 m^-3.
    pub neutral_density_m3: (f64, f64),
    /// Default 1e-4 to 1e3 m^2/(V s).
    pub constant_mobility_m2_per_vs: (f64, f64),
}

impl Default for ParameterBounds {
    fn default() -> Self {
        ParameterBounds {
            lattice_mobility_300k_m2_per_vs: (1e-4, 1e2),
            lattice_exponent: (0.0, 6.0),
            ionized_density_m3: (1e14, 1e27),
            neutral_density_m3: (1e14, 1e27),
            constant_mobility_m2_per_vs: (1e-4, 1e3),
        }
    }
}

/// Everything that shapes the model and the fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScatteringSettings {
    /// Effective mass and relative permittivity.
    pub medium: ScatteringMedium,
    pub formula: IonizedImpurityFormula,
    pub ionized_density: IonizedDensityModel,
    pub screening: ScreeningDensity,
    pub neutral: NeutralImpurityModel,
    /// Fit a temperature-independent term mu_C. Default false.
    pub constant_term: bool,
    /// Charge number Z of the ionized impurities. Default 1.
    pub charge_number: f64,
    /// The data are divided by this before the fit (r_H for Hall mobilities). Default 1.
    pub hall_factor: f64,
    /// Fit only points at or above this temperature, K.
    pub temperature_min_k: Option<f64>,
    /// Fit only points at or below this temperature, K.
    pub temperature_max_k: Option<f64>,
    /// Hold alpha at this value instead of fitting it.
    pub fixed_lattice_exponent: Option<f64>,
    pub bounds: ParameterBounds,
    /// How far the fitted density may be from the freeze-out one.
    pub tolerance: ConsistencyTolerance,
    /// The smallest relative uncertainty a mobility keeps in a weighted fit, so that no
    /// point can pin the fit. Default [`RELATIVE_UNCERTAINTY_FLOOR`] (0.1 %).
    pub relative_uncertainty_floor: f64,
    /// Relative standard uncertainty of the mobility scale common to every point (Type B:
    /// the field calibration of a Hall mobility), applied after the fit. `None`: not stated.
    pub mobility_scale_relative_unc: Option<f64>,
    /// Relative standard uncertainty of the carrier-density scale common to every point
    /// (Type B: thickness, field, current and voltage calibrations), propagated after the
    /// fit through the screening and the carriers-plus-compensation model. `None`: not
    /// stated.
    pub density_scale_relative_unc: Option<f64>,
}

impl ScatteringSettings {
    /// Defaults for a medium: Brooks-Herring, constant N_I, screening by the measured
    /// carriers, no neutral or constant term, Z = 1, r_H = 1, every point fitted.
    pub fn new(medium: ScatteringMedium) -> Self {
        ScatteringSettings {
            medium,
            formula: IonizedImpurityFormula::default(),
            ionized_density: IonizedDensityModel::default(),
            screening: ScreeningDensity::default(),
            neutral: NeutralImpurityModel::default(),
            constant_term: false,
            charge_number: 1.0,
            hall_factor: 1.0,
            temperature_min_k: None,
            temperature_max_k: None,
            fixed_lattice_exponent: None,
            bounds: ParameterBounds::default(),
            tolerance: ConsistencyTolerance::default(),
            relative_uncertainty_floor: RELATIVE_UNCERTAINTY_FLOOR,
            mobility_scale_relative_unc: None,
            density_scale_relative_unc: None,
        }
    }

    fn validate(&self) -> Result<(), ScatteringError> {
        let positive = "give a finite positive value";
        let mut checks: Vec<(&'static str, f64, bool, &'static str)> = vec![
            (
                "effective_mass_ratio",
                self.medium.effective_mass_ratio,
                self.medium.effective_mass_ratio > 0.0,
                "give the conductivity effective mass over m0, finite and positive",
            ),
            (
                "relative_permittivity",
                self.medium.relative_permittivity,
                self.medium.relative_permittivity > 0.0,
                "give the static relative permittivity, finite and positive",
            ),
            ("charge_number", self.charge_number, self.charge_number > 0.0, positive),
            (
                "relative_uncertainty_floor",
                self.relative_uncertainty_floor,
                (0.0..1.0).contains(&self.relative_uncertainty_floor),
                "give a relative uncertainty from 0 up to (not including) 1; 0.001 is the default",
            ),
            (
                "hall_factor",
                self.hall_factor,
                self.hall_factor > 0.0,
                "give the Hall factor r_H (1 for drift mobilities), finite and positive",
            ),
        ];
        for (name, bound) in [
            ("temperature_min_K", self.temperature_min_k),
            ("temperature_max_K", self.temperature_max_k),
        ] {
            if let Some(value) = bound {
                checks.push((
                    name,
                    value,
                    value > 0.0,
                    "give a temperature in kelvin above 0, or none",
                ));
            }
        }
        for (name, scale) in [
            ("mobility_scale_relative_unc", self.mobility_scale_relative_unc),
            ("density_scale_relative_unc", self.density_scale_relative_unc),
        ] {
            if let Some(value) = scale {
                checks.push((
                    name,
                    value,
                    value >= 0.0,
                    "give a finite relative standard uncertainty of 0 or more, or none",
                ));
            }
        }
        if let Some(alpha) = self.fixed_lattice_exponent {
            checks.push((
                "lattice_exponent",
                alpha,
                alpha >= self.bounds.lattice_exponent.0 && alpha <= self.bounds.lattice_exponent.1,
                "give a fixed lattice exponent inside the exponent bounds (default 0 to 6)",
            ));
        }
        match self.screening {
            ScreeningDensity::Compensated {
                dopant_density_m3,
                compensating_density_m3,
            } => {
                checks.push((
                    "screening dopant_density_m3",
                    dopant_density_m3,
                    dopant_density_m3 > 0.0,
                    positive,
                ));
                checks.push((
                    "screening compensating_density_m3",
                    compensating_density_m3,
                    compensating_density_m3 >= 0.0,
                    "give a finite density of 0 or more",
                ));
            }
            ScreeningDensity::MeasuredCarriers | ScreeningDensity::ImpurityDensity => {}
        }
        if let NeutralImpurityModel::FromCarrierDensity { net_doping_m3 } = self.neutral {
            checks.push(("net_doping_m3", net_doping_m3, net_doping_m3 > 0.0, positive));
        }
        let bounds = &self.bounds;
        for (name, (lower, upper), floor) in [
            (
                "lattice_mobility_300K bounds",
                bounds.lattice_mobility_300k_m2_per_vs,
                0.0,
            ),
            ("ionized_density bounds", bounds.ionized_density_m3, 0.0),
            ("neutral_density bounds", bounds.neutral_density_m3, 0.0),
            ("constant_mobility bounds", bounds.constant_mobility_m2_per_vs, 0.0),
            ("lattice_exponent bounds", bounds.lattice_exponent, f64::NEG_INFINITY),
        ] {
            let requirement = "give finite bounds, lower below upper (and above 0 for a density or mobility)";
            checks.push((
                name,
                lower,
                lower > floor && upper.is_finite() && lower < upper,
                requirement,
            ));
        }
        for (setting, value, ok, requirement) in checks {
            if !(ok && value.is_finite()) {
                return Err(ScatteringError::InvalidSetting {
                    setting,
                    value,
                    requirement,
                });
            }
        }
        if self.constant_term && self.neutral == NeutralImpurityModel::FittedConstant {
            return Err(ScatteringError::IndistinguishableTerms(
                "a fitted constant neutral-impurity density and the temperature-independent term cannot both be \
                 fitted: Erginsoy's mobility does not depend on temperature, so they are the same term; keep one, or \
                 give the net doping so that the neutral density follows the carrier density",
            ));
        }
        self.tolerance.validate().map_err(ScatteringError::from)
    }
}

/// A fitted quantity's name in the parameter list, covariance and correlation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FittedParameter {
    /// ln of mu_300 in m^2/(V s).
    LnLatticeMobility300K,
    /// alpha.
    LatticeExponent,
    /// ln of N_I (or of N_comp for the carriers-plus-compensation model) in m^-3.
    LnIonizedDensity,
    /// ln of N_N in m^-3.
    LnNeutralDensity,
    /// ln of mu_C in m^2/(V s).
    LnConstantMobility,
}

impl FittedParameter {
    /// The name used in the result: "ln_lattice_mobility_300K", "lattice_exponent",
    /// "ln_ionized_density" (or "ln_compensating_density"), "ln_neutral_density",
    /// "ln_constant_mobility".
    pub fn name(self, ionized_density: IonizedDensityModel) -> &'static str {
        match self {
            FittedParameter::LnLatticeMobility300K => "ln_lattice_mobility_300K",
            FittedParameter::LatticeExponent => "lattice_exponent",
            FittedParameter::LnIonizedDensity => match ionized_density {
                IonizedDensityModel::Constant => "ln_ionized_density",
                IonizedDensityModel::CarriersPlusCompensation => "ln_compensating_density",
            },
            FittedParameter::LnNeutralDensity => "ln_neutral_density",
            FittedParameter::LnConstantMobility => "ln_constant_mobility",
        }
    }
}

/// One row of the result table: a data point and every term of the fitted model there.
/// Mobilities are drift mobilities (data divided by the Hall factor), m^2/(V s); a term
/// that the model does not have is `None`.
#[derive(Debug, Clone, PartialEq)]
pub struct ScatteringRow {
    /// Position of the point in the input.
    pub index: usize,
    pub temperature_k: f64,
    pub in_fit_range: bool,
    pub mobility_data: f64,
    pub mobility_data_unc: Option<f64>,
    /// The whole model (Matthiessen sum); `None` where a term cannot be evaluated (a point
    /// outside the range without the carrier density the model needs).
    pub mobility_fit: Option<f64>,
    pub mobility_lattice: Option<f64>,
    pub mobility_ionized: Option<f64>,
    pub mobility_neutral: Option<f64>,
    pub mobility_constant: Option<f64>,
    /// N_I at this point, m^-3.
    pub ionized_density_m3: Option<f64>,
    /// Brooks-Herring n' at this point, m^-3 (`None` for Conwell-Weisskopf).
    pub screening_density_m3: Option<f64>,
    /// N_N at this point, m^-3.
    pub neutral_density_m3: Option<f64>,
    /// ln(mu_data / mu_fit).
    pub log_residual: Option<f64>,
    /// The residual in units of its uncertainty (ln space); equal to `log_residual` for an
    /// unweighted fit.
    pub normalized_residual: Option<f64>,
    /// The uncertainty of ln mu the fit weighted this point by (floor and temperature
    /// included; 1 for an unweighted fit).
    pub ln_sigma: Option<f64>,
    /// d ln mu_fit / d ln N_I (d ln N_comp for the carriers-plus-compensation model): how
    /// strongly this point constrains the ionized density.
    pub ionized_sensitivity: Option<f64>,
    /// The measured carrier density given with the point, m^-3.
    pub carrier_density_m3: Option<f64>,
}

/// How well the model describes the data.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GoodnessOfFit {
    /// Sum of squared (normalized) residuals in ln mu.
    pub chi_square: f64,
    pub degrees_of_freedom: usize,
    pub reduced_chi_square: f64,
    /// P(chi^2_nu >= chi^2) of a weighted fit; NaN for an unweighted one, whose chi-square
    /// is the noise estimate itself.
    pub p_value: f64,
    /// sqrt(chi^2/nu) when above 1, else 1, for a weighted fit (the factor its standard
    /// uncertainties were multiplied by); NaN for an unweighted one.
    pub birge_ratio: f64,
    /// Points whose relative mobility uncertainty was raised to the floor.
    pub floored_points: usize,
    /// True when temperature uncertainties entered the weights (effective variance).
    pub temperature_uncertainty_used: bool,
    /// Refits with updated effective variances after the first fit.
    pub effective_variance_passes: usize,
    /// Root mean square of ln(mu_data / mu_fit) over the fitted points: the typical
    /// relative misfit.
    pub rms_log_residual: f64,
    /// True when mobility uncertainties weighted the fit.
    pub weighted: bool,
    /// The factor the covariance of (J^T J)^-1 was multiplied by.
    pub covariance_scale: f64,
}

/// The result of [`fit_mobility_scattering`].
#[derive(Debug, Clone, PartialEq)]
pub struct ScatteringFit {
    pub formula: IonizedImpurityFormula,
    pub ionized_density_model: IonizedDensityModel,
    /// mu_300, m^2/(V s) (drift scale).
    pub lattice_mobility_300k_m2_per_vs: Estimate,
    /// alpha; its uncertainty is `None` when it was fixed.
    pub lattice_exponent: Estimate,
    pub lattice_exponent_fixed: bool,
    /// N_I, m^-3: the fitted constant; for the carriers-plus-compensation model, n + 2 N_comp
    /// at the highest fitted temperature (the closest to full ionization), its uncertainty
    /// that of 2 N_comp alone (the measured n is taken as exact).
    pub ionized_impurity_density_m3: Estimate,
    /// When the data do not determine the ionized-impurity parameter (it ended on its lower
    /// bound, or has no uncertainty): the largest value of it (N_I, or N_comp for the
    /// carriers-plus-compensation model), m^-3, that raises the chi-square by no more than
    /// `sigma_multiple`^2 noise variances with the other parameters refitted (a profile
    /// upper limit at that many standard uncertainties). `None` when the parameter is
    /// determined, or no value up to the upper bound is excluded.
    pub ionized_parameter_upper_limit_m3: Option<f64>,
    /// N_comp of the carriers-plus-compensation model, m^-3.
    pub compensating_density_m3: Option<Estimate>,
    /// The fitted constant N_N, m^-3.
    pub neutral_impurity_density_m3: Option<Estimate>,
    /// The fitted mu_C, m^2/(V s).
    pub constant_mobility_m2_per_vs: Option<Estimate>,
    /// The statistical and systematic parts of each reported uncertainty, by the summary
    /// name of the quantity ("lattice_exponent", "ionized_impurity_density_m3", ...). The
    /// `uncertainty` of each estimate is their quadrature sum.
    pub budget: Vec<(&'static str, UncertaintySplit)>,
    /// The common-scale calibrations that could matter and were not stated (their
    /// systematic part is then absent, not zero).
    pub calibrations_not_stated: Vec<&'static str>,
    /// The fitted parameters in order, with their names ([`FittedParameter::name`]).
    pub parameters: Vec<FittedParameter>,
    /// The fitted model's parameters, for [`evaluate_model`] (smooth curves).
    pub fitted_parameters: ScatteringParameters,
    pub parameter_names: Vec<&'static str>,
    /// Values of the fitted parameters (logarithms as listed).
    pub parameter_values: Vec<f64>,
    /// Covariance of the fitted parameters (after the scale of [`GoodnessOfFit`]).
    pub covariance: Matrix,
    /// Their correlation matrix.
    pub correlation: Matrix,
    /// Parameters that ended on a bound (or are fixed).
    pub at_bound: Vec<bool>,
    pub goodness: GoodnessOfFit,
    /// Points fitted.
    pub points_used: usize,
    /// Starts tried, runs that converged, and converged runs at the best minimum.
    pub starts: usize,
    pub converged_starts: usize,
    pub same_minimum_starts: usize,
    /// One row per input point, in input order.
    pub rows: Vec<ScatteringRow>,
    pub hall_factor: f64,
    /// The comparison with a freeze-out fit, when one was given.
    pub comparison: Option<DensityComparison>,
    pub warnings: Vec<String>,
}

/// The statistical (Type A, from the scatter of the data) and systematic (Type B, from
/// stated calibrations) parts of a standard uncertainty, in the quantity's unit. `None`: not
/// estimated (statistical) or no calibration stated (systematic).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct UncertaintySplit {
    pub statistical: Option<f64>,
    pub systematic: Option<f64>,
}

/// The total standard uncertainty of a statistical and a systematic part: their quadrature
/// sum, the statistical part alone when no calibration was stated, none without a
/// statistical part.
fn combine(statistical: Option<f64>, systematic: Option<f64>) -> Option<f64> {
    match (statistical, systematic) {
        (Some(a), Some(b)) => Some(a.hypot(b)),
        (Some(a), None) => Some(a),
        (None, _) => None,
    }
}

/// A validated point of the fitted range, in the fit's variables.
#[derive(Debug, Clone, Copy)]
struct FitPoint {
    /// Position in the input.
    index: usize,
    temperature_k: f64,
    /// ln of the drift mobility.
    ln_mobility: f64,
    /// Uncertainty of ln mu used as the weight: the data's (floored) relative uncertainty,
    /// widened by the temperature's through the effective variance; 1 for an unweighted fit.
    ln_sigma: f64,
    /// The data's own relative uncertainty after the floor (1 for an unweighted fit).
    ln_sigma_data: f64,
    /// Whether the floor raised it.
    floored: bool,
    /// Standard uncertainty of the temperature, K (0 when not given).
    temperature_unc_k: f64,
    carrier_density_m3: Option<f64>,
}

/// The model's parameters in physical form (SI). For the forward evaluation
/// [`evaluate_model`] and in the result ([`ScatteringFit::parameters`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ScatteringParameters {
    /// mu_300, m^2/(V s).
    pub lattice_mobility_300k_m2_per_vs: f64,
    /// alpha.
    pub lattice_exponent: f64,
    /// N_I, or N_comp of the carriers-plus-compensation model, m^-3 (0: no ionized-impurity
    /// scattering).
    pub ionized_density_m3: f64,
    /// Constant N_N of [`NeutralImpurityModel::FittedConstant`], m^-3 (ignored otherwise).
    pub neutral_density_m3: Option<f64>,
    /// mu_C when the model has the constant term, m^2/(V s).
    pub constant_mobility_m2_per_vs: Option<f64>,
}

/// Every term of the model at one temperature: drift mobilities in m^2/(V s), infinite for
/// a term that is absent or zero, and the densities they were computed from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MobilityTerms {
    /// The Matthiessen sum.
    pub total: f64,
    pub lattice: f64,
    pub ionized: f64,
    pub neutral: f64,
    pub constant: f64,
    /// N_I, m^-3.
    pub ionized_density_m3: f64,
    /// Brooks-Herring n', m^-3 (`None` for Conwell-Weisskopf).
    pub screening_density_m3: Option<f64>,
    /// N_N, m^-3 (`None` without neutral-impurity scattering).
    pub neutral_density_m3: Option<f64>,
}

/// The model at one temperature for given parameters: what the fit evaluates, for smooth
/// curves and synthetic data. `None` when the settings need a carrier density and none is
/// given. The settings are not validated here; unphysical values give NaN or infinity.
pub fn evaluate_model(
    settings: &ScatteringSettings,
    parameters: &ScatteringParameters,
    temperature_k: f64,
    carrier_density_m3: Option<f64>,
) -> Option<MobilityTerms> {
    let model = Model::new(settings);
    let terms = model.terms(parameters, temperature_k, carrier_density_m3)?;
    let mobility = |inverse: f64| 1.0 / inverse;
    Some(MobilityTerms {
        total: mobility(terms.inverse_total()),
        lattice: mobility(terms.lattice),
        ionized: mobility(terms.ionized),
        neutral: mobility(terms.neutral),
        constant: mobility(terms.constant),
        ionized_density_m3: terms.ionized_density_m3,
        screening_density_m3: terms.screening_density_m3,
        neutral_density_m3: terms.neutral_density_m3,
    })
}

/// The scattering medium of a material preset for its electrons or holes: the conductivity
/// effective mass and the static relative permittivity.
pub fn medium_for(material: &Material, carrier_type: CarrierType) -> ScatteringMedium {
    ScatteringMedium {
        effective_mass_ratio: match carrier_type {
            CarrierType::N => material.electron_conductivity_mass_ratio,
            CarrierType::P => material.hole_conductivity_mass_ratio,
        },
        relative_permittivity: material.relative_permittivity,
    }
}

/// Inverse mobilities of each term at one point, V s/m^2, and what they were computed from.
#[derive(Debug, Clone, Copy)]
struct Terms {
    lattice: f64,
    ionized: f64,
    neutral: f64,
    constant: f64,
    ionized_density_m3: f64,
    screening_density_m3: Option<f64>,
    neutral_density_m3: Option<f64>,
}

impl Terms {
    fn inverse_total(&self) -> f64 {
        self.lattice + self.ionized + self.neutral + self.constant
    }
}

/// The model: settings and the order of the fitted parameters.
struct Model<'a> {
    settings: &'a ScatteringSettings,
    parameters: Vec<FittedParameter>,
}

/// Chi-square margin, in noise variances, within which another minimum is reported.
const RIVAL_CHI_SQUARE: f64 = 4.0;

/// Refits with updated effective variances at most; two or three suffice in practice, since
/// the variances depend on the parameters only through the model's slope.
const EFFECTIVE_VARIANCE_PASSES: usize = 6;

/// Relative step in T of the central difference of d ln mu / dT.
const TEMPERATURE_STEP: f64 = 1e-4;

/// Relative step in ln N_I of the central difference of the ionized term; the truncation
/// error h^2/6 times a third derivative of order one is far below any data's noise.
const LN_DENSITY_STEP: f64 = 1e-5;

impl<'a> Model<'a> {
    fn new(settings: &'a ScatteringSettings) -> Self {
        // A fixed exponent stays in the list with equal bounds, so that the layout and the
        // names do not depend on it.
        let mut parameters = vec![
            FittedParameter::LnLatticeMobility300K,
            FittedParameter::LatticeExponent,
            FittedParameter::LnIonizedDensity,
        ];
        if settings.neutral == NeutralImpurityModel::FittedConstant {
            parameters.push(FittedParameter::LnNeutralDensity);
        }
        if settings.constant_term {
            parameters.push(FittedParameter::LnConstantMobility);
        }
        Model { settings, parameters }
    }

    fn position(&self, parameter: FittedParameter) -> Option<usize> {
        self.parameters.iter().position(|p| *p == parameter)
    }

    fn free_parameter_count(&self) -> usize {
        self.parameters.len() - usize::from(self.settings.fixed_lattice_exponent.is_some())
    }

    fn unpack(&self, values: &[f64]) -> ScatteringParameters {
        let get = |parameter| self.position(parameter).map(|index| values[index]);
        ScatteringParameters {
            lattice_mobility_300k_m2_per_vs: get(FittedParameter::LnLatticeMobility300K).map_or(f64::NAN, f64::exp),
            lattice_exponent: get(FittedParameter::LatticeExponent).unwrap_or(f64::NAN),
            ionized_density_m3: get(FittedParameter::LnIonizedDensity).map_or(f64::NAN, f64::exp),
            neutral_density_m3: get(FittedParameter::LnNeutralDensity).map(f64::exp),
            constant_mobility_m2_per_vs: get(FittedParameter::LnConstantMobility).map(f64::exp),
        }
    }

    /// N_I at a point for a value of the ionized-density parameter; `None` when the model
    /// needs a carrier density the point lacks.
    fn ionized_density_at(&self, parameter: f64, carrier_density_m3: Option<f64>) -> Option<f64> {
        match self.settings.ionized_density {
            IonizedDensityModel::Constant => Some(parameter),
            IonizedDensityModel::CarriersPlusCompensation => carrier_density_m3.map(|n| n + 2.0 * parameter),
        }
    }

    fn screening_density_at(&self, ionized_density_m3: f64, carrier_density_m3: Option<f64>) -> Option<f64> {
        match self.settings.screening {
            ScreeningDensity::MeasuredCarriers => Some(carrier_density_m3.unwrap_or(ionized_density_m3)),
            ScreeningDensity::ImpurityDensity => Some(ionized_density_m3),
            ScreeningDensity::Compensated {
                dopant_density_m3,
                compensating_density_m3,
            } => carrier_density_m3.map(|n| brooks_screening_density_m3(n, dopant_density_m3, compensating_density_m3)),
        }
    }

    /// 1/mu_I at a point for a value of the ionized-density parameter, and N_I and n' there.
    fn inverse_ionized(
        &self,
        parameter: f64,
        temperature_k: f64,
        carrier_density_m3: Option<f64>,
    ) -> Option<(f64, f64, Option<f64>)> {
        let medium = &self.settings.medium;
        let charge = self.settings.charge_number;
        let density = self.ionized_density_at(parameter, carrier_density_m3)?;
        match self.settings.formula {
            IonizedImpurityFormula::BrooksHerring => {
                let screening = self.screening_density_at(density, carrier_density_m3)?;
                let mobility = medium.brooks_herring_mobility_m2_per_vs(density, screening, temperature_k, charge);
                Some((1.0 / mobility, density, Some(screening)))
            }
            IonizedImpurityFormula::ConwellWeisskopf => {
                let mobility = medium.conwell_weisskopf_mobility_m2_per_vs(density, temperature_k, charge);
                Some((1.0 / mobility, density, None))
            }
        }
    }

    fn neutral_density_at(
        &self,
        parameters: &ScatteringParameters,
        carrier_density_m3: Option<f64>,
    ) -> Option<Option<f64>> {
        match self.settings.neutral {
            NeutralImpurityModel::None => Some(None),
            NeutralImpurityModel::FittedConstant => Some(parameters.neutral_density_m3),
            NeutralImpurityModel::FromCarrierDensity { net_doping_m3 } => {
                carrier_density_m3.map(|n| Some((net_doping_m3 - n).max(0.0)))
            }
        }
    }

    /// Every term at one point; `None` when a needed carrier density is missing.
    fn terms(
        &self,
        parameters: &ScatteringParameters,
        temperature_k: f64,
        carrier_density_m3: Option<f64>,
    ) -> Option<Terms> {
        let lattice = 1.0
            / lattice_mobility_m2_per_vs(
                parameters.lattice_mobility_300k_m2_per_vs,
                parameters.lattice_exponent,
                temperature_k,
            );
        let (ionized, ionized_density_m3, screening_density_m3) =
            self.inverse_ionized(parameters.ionized_density_m3, temperature_k, carrier_density_m3)?;
        let neutral_density_m3 = self.neutral_density_at(parameters, carrier_density_m3)?;
        let neutral = neutral_density_m3.map_or(0.0, |density| {
            1.0 / neutral_impurity_mobility_m2_per_vs(&self.settings.medium, density)
        });
        let constant = if self.settings.constant_term {
            parameters
                .constant_mobility_m2_per_vs
                .map_or(0.0, |mobility| 1.0 / mobility)
        } else {
            0.0
        };
        Some(Terms {
            lattice,
            ionized,
            neutral,
            constant,
            ionized_density_m3,
            screening_density_m3,
            neutral_density_m3,
        })
    }

    /// d ln(1/mu_I) / d ln(parameter) at a point, by a central difference in ln.
    fn ionized_log_derivative(&self, parameter: f64, temperature_k: f64, carrier_density_m3: Option<f64>) -> f64 {
        let up = self.inverse_ionized(parameter * LN_DENSITY_STEP.exp(), temperature_k, carrier_density_m3);
        let down = self.inverse_ionized(parameter * (-LN_DENSITY_STEP).exp(), temperature_k, carrier_density_m3);
        match (up, down) {
            (Some((up, _, _)), Some((down, _, _))) => (up.ln() - down.ln()) / (2.0 * LN_DENSITY_STEP),
            _ => f64::NAN,
        }
    }

    /// d ln mu_fit / d p_j at one point (a row of the unweighted Jacobian of ln mu).
    fn log_mobility_gradient(&self, values: &[f64], point: &FitPoint, gradient: &mut [f64]) {
        let parameters = self.unpack(values);
        let Some(terms) = self.terms(&parameters, point.temperature_k, point.carrier_density_m3) else {
            gradient.fill(f64::NAN);
            return;
        };
        let total = terms.inverse_total();
        for (slot, parameter) in gradient.iter_mut().zip(&self.parameters) {
            // ln mu = -ln(sum of inverse mobilities): d ln mu = -d(sum) / sum.
            *slot = match parameter {
                FittedParameter::LnLatticeMobility300K => terms.lattice / total,
                FittedParameter::LatticeExponent => {
                    -terms.lattice * (point.temperature_k / REFERENCE_TEMPERATURE_K).ln() / total
                }
                FittedParameter::LnIonizedDensity => {
                    -terms.ionized
                        * self.ionized_log_derivative(
                            parameters.ionized_density_m3,
                            point.temperature_k,
                            point.carrier_density_m3,
                        )
                        / total
                }
                FittedParameter::LnNeutralDensity => -terms.neutral / total,
                FittedParameter::LnConstantMobility => terms.constant / total,
            };
        }
    }

    /// d ln mu_fit / dT at a point with the carrier density held (the measured n belongs to
    /// the true temperature, so only the model's explicit temperature dependence turns a
    /// temperature error into a mobility error), by a central difference.
    fn log_mobility_temperature_slope(&self, values: &[f64], point: &FitPoint) -> f64 {
        let step = TEMPERATURE_STEP * point.temperature_k;
        let at = |temperature_k: f64| {
            self.log_mobility(
                values,
                &FitPoint {
                    temperature_k,
                    ..*point
                },
            )
        };
        let slope = (at(point.temperature_k + step) - at(point.temperature_k - step)) / (2.0 * step);
        if slope.is_finite() {
            slope
        } else {
            0.0
        }
    }

    /// Whether the model reads the measured carrier densities at the fitted points.
    fn uses_carrier_densities(&self, points: &[FitPoint]) -> bool {
        let settings = self.settings;
        if carrier_density_needed_by(settings).is_some() {
            return true;
        }
        settings.formula == IonizedImpurityFormula::BrooksHerring
            && settings.screening == ScreeningDensity::MeasuredCarriers
            && points.iter().any(|point| point.carrier_density_m3.is_some())
    }

    fn log_mobility(&self, values: &[f64], point: &FitPoint) -> f64 {
        let parameters = self.unpack(values);
        self.terms(&parameters, point.temperature_k, point.carrier_density_m3)
            .map_or(f64::NAN, |terms| -terms.inverse_total().ln())
    }
}

/// Brooks' screening density of a compensated crystal,
/// n' = n + (n + N_comp) (N_dop - N_comp - n) / N_dop,
/// the bound-carrier part taken as zero once n reaches N_dop - N_comp.
pub fn brooks_screening_density_m3(
    carrier_density_m3: f64,
    dopant_density_m3: f64,
    compensating_density_m3: f64,
) -> f64 {
    let neutral_majority = (dopant_density_m3 - compensating_density_m3 - carrier_density_m3).max(0.0);
    carrier_density_m3 + (carrier_density_m3 + compensating_density_m3) * neutral_majority / dopant_density_m3
}

/// The starting values tried: every combination of these (alpha only when it is fitted),
/// with mu_300 from the data for each alpha (see [`fit_mobility_scattering`]).
pub mod starts {
    /// Starting alpha values: below and above the classic 2.2 to 2.6 of silicon, so that
    /// one start is on each side of a typical answer.
    pub const LATTICE_EXPONENTS: [f64; 2] = [1.5, 2.7];
    /// Starting N_I (or N_comp), m^-3: 1e14, 1e16 and 1e18 cm^-3, a start in every third
    /// decade of the densities met in practice.
    pub const IONIZED_DENSITIES_M3: [f64; 3] = [1e20, 1e22, 1e24];
    /// Starting N_N, m^-3 (1e16 cm^-3).
    pub const NEUTRAL_DENSITY_M3: f64 = 1e22;
    /// Starting mu_C as a multiple of the largest mobility of the data: a weak term that
    /// the fit may grow.
    pub const CONSTANT_MOBILITY_FACTOR: f64 = 10.0;
}

/// Fits the scattering model to `points` and, when `freeze_out` is given, compares the
/// fitted ionized density with it.
pub fn fit_mobility_scattering(
    points: &[MobilityPoint],
    settings: &ScatteringSettings,
    freeze_out: Option<&DopantDensities>,
) -> Result<ScatteringFit, ScatteringError> {
    settings.validate()?;
    let mut fit_points = select_points(points, settings)?;
    let model = Model::new(settings);
    let parameter_count = model.parameters.len();
    let free = model.free_parameter_count();
    if fit_points.len() < free + 1 {
        return Err(ScatteringError::TooFewPoints {
            points: fit_points.len(),
            parameters: free,
        });
    }
    let weighted = points_are_weighted(points, settings);
    let bounds = fit_bounds(&model);
    let starts = starting_points(&model, &fit_points, &bounds);
    let floored_points = fit_points.iter().filter(|point| point.floored).count();
    let temperature_uncertainty_used = weighted && fit_points.iter().any(|point| point.temperature_unc_k > 0.0);

    let mut multi =
        solve(&model, &fit_points, &bounds, &starts, weighted).map_err(|error| describe_fit_error(error, &model))?;
    // Errors in both variables (effective variance, Clutton-Brock 1967; Orear 1982): each
    // point's variance in ln mu gains (d ln mu / dT)^2 u_T^2 at the current parameters, and
    // the fit is repeated from its own solution with those variances until the parameters
    // settle (iteratively reweighted, so the variances are never themselves minimized).
    let mut effective_variance_passes = 0;
    if temperature_uncertainty_used {
        for _ in 0..EFFECTIVE_VARIANCE_PASSES {
            let previous = multi.best.parameters.clone();
            for point in fit_points.iter_mut() {
                let slope = model.log_mobility_temperature_slope(&previous, point);
                point.ln_sigma = effective_uncertainty(point.ln_sigma_data, slope, point.temperature_unc_k);
            }
            multi = solve(&model, &fit_points, &bounds, std::slice::from_ref(&previous), weighted)
                .map_err(|error| describe_fit_error(error, &model))?;
            effective_variance_passes += 1;
            let settled = multi
                .best
                .parameters
                .iter()
                .zip(&previous)
                .zip(&multi.best.standard_errors)
                .all(|((now, before), error)| {
                    let step = (now - before).abs();
                    step <= 1e-9 * before.abs().max(1.0) || (error.is_finite() && step <= 1e-3 * error)
                });
            if settled {
                break;
            }
        }
    }
    // The passes refit from one start; the last weights get every start again (and the
    // passes' solution), so that other minima and the start counts refer to the final fit.
    let mut start_count = starts.len();
    if effective_variance_passes > 0 {
        let mut final_starts = starts.clone();
        final_starts.push(multi.best.parameters.clone());
        start_count = final_starts.len();
        multi = solve(&model, &fit_points, &bounds, &final_starts, weighted)
            .map_err(|error| describe_fit_error(error, &model))?;
    }
    let best = multi.best.clone();
    let quality = FitQuality::assess(best.chi_square, best.degrees_of_freedom);

    // Weighted residuals give an unscaled covariance; scale it by the Birge ratio squared,
    // max(1, chi^2/nu) (module documentation). Unweighted, the solver has already scaled it
    // by chi^2/nu.
    let covariance_scale = if weighted {
        quality.birge_ratio * quality.birge_ratio
    } else {
        best.reduced_chi_square
    };
    let extra_scale = if weighted { covariance_scale } else { 1.0 };
    let covariance = Matrix::from_fn(parameter_count, parameter_count, |i, j| {
        best.covariance[(i, j)] * extra_scale
    });
    let standard_errors: Vec<f64> = best
        .standard_errors
        .iter()
        .map(|error| error * extra_scale.sqrt())
        .collect();
    let correlation = best.correlation();
    let error_of = |parameter: FittedParameter| -> Option<f64> {
        model
            .position(parameter)
            .map(|index| standard_errors[index])
            .filter(|error| error.is_finite() && *error > 0.0)
    };
    let fitted = model.unpack(&best.parameters);
    // The common-scale calibrations, as shifts of the fitted parameters per unit of their
    // relative error (the fit's linear response; module documentation).
    let shifts = systematic_shifts(&model, &fit_points, &best, weighted, settings);
    let systematic_of = |parameter: FittedParameter| -> Option<f64> {
        let index = model.position(parameter)?;
        let of = |shift: &Option<Vec<f64>>| shift.as_ref().map(|shift| shift[index]);
        match (of(&shifts.mobility), of(&shifts.density)) {
            (None, None) => None,
            (a, b) => Some(a.unwrap_or(0.0).hypot(b.unwrap_or(0.0))),
        }
    };
    let log_estimate = |value: f64, parameter: FittedParameter| {
        let statistical = error_of(parameter).map(|error| value * error);
        let systematic = systematic_of(parameter).map(|error| value * error);
        (
            Estimate {
                value,
                uncertainty: combine(statistical, systematic),
            },
            UncertaintySplit {
                statistical,
                systematic,
            },
        )
    };

    let effective_sigmas: Vec<(usize, f64)> = fit_points.iter().map(|point| (point.index, point.ln_sigma)).collect();
    let rows = build_rows(points, settings, &model, &best.parameters, weighted, &effective_sigmas);
    let mut warnings = Vec::new();
    let log_residuals: Vec<f64> = rows
        .iter()
        .filter(|row| row.in_fit_range)
        .filter_map(|row| row.log_residual)
        .collect();
    let rms_log_residual = (log_residuals.iter().map(|r| r * r).sum::<f64>() / log_residuals.len() as f64).sqrt();
    let goodness = GoodnessOfFit {
        chi_square: best.chi_square,
        degrees_of_freedom: best.degrees_of_freedom,
        reduced_chi_square: best.reduced_chi_square,
        p_value: if weighted { quality.p_value } else { f64::NAN },
        birge_ratio: if weighted { quality.birge_ratio } else { f64::NAN },
        rms_log_residual,
        weighted,
        covariance_scale,
        floored_points,
        temperature_uncertainty_used,
        effective_variance_passes,
    };
    if weighted {
        let fitted_rows: Vec<&ScatteringRow> = rows.iter().filter(|row| row.in_fit_range).collect();
        // FitQuality wants (model - data) / sigma; the rows hold (data - model) / sigma.
        let residuals: Vec<f64> = fitted_rows
            .iter()
            .map(|row| row.normalized_residual.map_or(f64::NAN, |r| -r))
            .collect();
        if let Some(warning) = quality.warning(&residuals, |i| format!("T = {:.2} K", fitted_rows[i].temperature_k)) {
            warnings.push(format!(
                "{warning}. The weights come from the mobility uncertainties (hall_mobility_m2_per_Vs_unc_stat), \
                 temperature_K_unc and relative_uncertainty_floor; consider another ionized-density model, \
                 screening, or a narrower temperature range"
            ));
        }
        if floored_points > 0 {
            warnings.push(format!(
                "{floored_points} point(s) had a mobility uncertainty below {} of the mobility and were raised to it \
                 (relative_uncertainty_floor)",
                settings.relative_uncertainty_floor
            ));
        }
    }
    let mut calibrations_not_stated = Vec::new();
    if settings.mobility_scale_relative_unc.is_none() {
        calibrations_not_stated.push("mobility scale (field calibration)");
    }
    if settings.density_scale_relative_unc.is_none() && model.uses_carrier_densities(&fit_points) {
        calibrations_not_stated.push("carrier-density scale (thickness, field, current and voltage calibrations)");
    }

    let lattice_exponent_fixed = settings.fixed_lattice_exponent.is_some();
    let (ionized_parameter, ionized_split) = log_estimate(fitted.ionized_density_m3, FittedParameter::LnIonizedDensity);
    let mut budget: Vec<(&'static str, UncertaintySplit)> = Vec::new();
    let (ionized_impurity_density_m3, compensating_density_m3) = match settings.ionized_density {
        IonizedDensityModel::Constant => {
            budget.push(("ionized_impurity_density_m3", ionized_split));
            (ionized_parameter, None)
        }
        IonizedDensityModel::CarriersPlusCompensation => {
            let hottest = fit_points
                .iter()
                .max_by(|a, b| a.temperature_k.total_cmp(&b.temperature_k))
                .expect("the fit has points");
            let carriers = hottest
                .carrier_density_m3
                .expect("validated: every fitted point has a density");
            // The measured n scales with the density calibration too, fully correlated with
            // the shift it causes in N_comp.
            let index = model
                .position(FittedParameter::LnIonizedDensity)
                .expect("the ionized density is always a parameter");
            let density_shift = shifts.density.as_ref().map(|shift| {
                carriers * settings.density_scale_relative_unc.unwrap_or(0.0)
                    + 2.0 * ionized_parameter.value * shift[index]
            });
            let mobility_shift = shifts
                .mobility
                .as_ref()
                .map(|shift| 2.0 * ionized_parameter.value * shift[index]);
            let statistical = ionized_split.statistical.map(|error| 2.0 * error);
            let systematic = match (mobility_shift, density_shift) {
                (None, None) => None,
                (a, b) => Some(a.unwrap_or(0.0).hypot(b.unwrap_or(0.0))),
            };
            let implied = Estimate {
                value: carriers + 2.0 * ionized_parameter.value,
                uncertainty: combine(statistical, systematic),
            };
            budget.push((
                "ionized_impurity_density_m3",
                UncertaintySplit {
                    statistical,
                    systematic,
                },
            ));
            budget.push(("compensating_density_m3", ionized_split));
            (implied, Some(ionized_parameter))
        }
    };

    for (index, parameter) in model.parameters.iter().enumerate() {
        if best.at_bound[index] && !(lattice_exponent_fixed && *parameter == FittedParameter::LatticeExponent) {
            warnings.push(format!(
                "{} ended on its bound ({}): the data do not pin it down within the bounds; widen the bounds, the \
                 temperature range, or drop the term",
                parameter.name(settings.ionized_density),
                best.parameters[index]
            ));
        }
    }
    // Another minimum matters when it fits almost as well: within a chi-square difference of
    // 4 noise variances (two standard deviations of one parameter). Minima far above the
    // best are starts that wandered off (into a bound, typically) and are not reported.
    let rival_minima: Vec<&StartSummary> = multi
        .outcomes
        .iter()
        .filter_map(|outcome| outcome.result.as_ref().ok())
        .filter(|run| {
            run.converged
                && !run.same_minimum_as_best
                && run.chi_square - best.chi_square <= RIVAL_CHI_SQUARE * covariance_scale
        })
        .collect();
    if let Some(rival) = rival_minima.first() {
        let described: Vec<String> = model
            .parameters
            .iter()
            .zip(&rival.parameters)
            .map(|(parameter, value)| format!("{} = {value:.4}", parameter.name(settings.ionized_density)))
            .collect();
        warnings.push(format!(
            "{} start(s) converged to another minimum that fits almost as well (chi-square {:.3} against {:.3}; {}): \
             the data allow more than one decomposition; the best is reported. Narrow the bounds, fix the lattice \
             exponent or extend the temperature range",
            rival_minima.len(),
            rival.chi_square,
            best.chi_square,
            described.join(", ")
        ));
    }
    // The share of ionized-impurity scattering in 1/mu, mu_fit / mu_I, at its largest.
    let largest_ionized_share = rows
        .iter()
        .filter(|row| row.in_fit_range)
        .filter_map(|row| Some(row.mobility_fit? / row.mobility_ionized?))
        .fold(0.0, f64::max);
    if largest_ionized_share < 0.05 {
        warnings.push(format!(
            "ionized-impurity scattering is at most {:.1} % of the scattering rate at every fitted point, so the \
             ionized density is poorly determined; include lower temperatures",
            100.0 * largest_ionized_share
        ));
    }
    // Brooks-Herring assumes a screening length well above the carriers' wavelength, b >> 1
    // (Chattopadhyay and Queisser 1981). Below b = 1 its mobility falls with temperature like
    // a second lattice term, which a fit can use to mimic the phonons with an absurd N_I.
    if settings.formula == IonizedImpurityFormula::BrooksHerring {
        let weakest = rows
            .iter()
            .filter(|row| row.in_fit_range)
            .filter(|row| matches!((row.mobility_fit, row.mobility_ionized), (Some(fit), Some(ionized)) if fit / ionized > 0.05))
            .filter_map(|row| {
                let screening = row.screening_density_m3?;
                let b = settings
                    .medium
                    .brooks_herring_screening_parameter(screening, row.temperature_k);
                Some((b, row.temperature_k))
            })
            .min_by(|a, b| a.0.total_cmp(&b.0));
        if let Some((b, temperature_k)) = weakest.filter(|(b, _)| *b < 1.0) {
            warnings.push(format!(
                "the Brooks-Herring screening parameter b falls to {b:.3} at {} K, where ionized-impurity \
                 scattering matters; the formula assumes b >> 1, so the fitted density is outside its validity. Give \
                 the measured carrier densities (density_m3) for the screening, narrow the temperature range, or use \
                 formula conwell_weisskopf",
                mobilis_physics::units::format_number(temperature_k)
            ));
        }
    }

    let (lattice_mobility_300k_m2_per_vs, lattice_split) = log_estimate(
        fitted.lattice_mobility_300k_m2_per_vs,
        FittedParameter::LnLatticeMobility300K,
    );
    budget.push(("lattice_mobility_300K_m2_per_Vs", lattice_split));
    let exponent_split = if lattice_exponent_fixed {
        UncertaintySplit::default()
    } else {
        UncertaintySplit {
            statistical: error_of(FittedParameter::LatticeExponent),
            systematic: systematic_of(FittedParameter::LatticeExponent),
        }
    };
    let lattice_exponent = Estimate {
        value: fitted.lattice_exponent,
        uncertainty: combine(exponent_split.statistical, exponent_split.systematic),
    };
    budget.push(("lattice_exponent", exponent_split));
    let neutral_impurity_density_m3 = fitted.neutral_density_m3.map(|value| {
        let (estimate, split) = log_estimate(value, FittedParameter::LnNeutralDensity);
        budget.push(("neutral_impurity_density_m3", split));
        estimate
    });
    let constant_mobility_m2_per_vs = fitted.constant_mobility_m2_per_vs.map(|value| {
        let (estimate, split) = log_estimate(value, FittedParameter::LnConstantMobility);
        budget.push(("constant_mobility_m2_per_Vs", split));
        estimate
    });
    let ionized_index = model
        .position(FittedParameter::LnIonizedDensity)
        .expect("the ionized density is always a parameter");
    let ionized_lower_bound = bounds.lower()[ionized_index];
    let undetermined = error_of(FittedParameter::LnIonizedDensity).is_none()
        || best.parameters[ionized_index] <= ionized_lower_bound + 1e-9;
    let ionized_parameter_upper_limit_m3 = if undetermined {
        profile_upper_limit(
            &model,
            &fit_points,
            &bounds,
            &best,
            weighted,
            settings.tolerance.sigma_multiple.powi(2) * covariance_scale,
        )
    } else {
        None
    };
    if let Some(limit) = ionized_parameter_upper_limit_m3 {
        warnings.push(format!(
            "the mobilities do not determine the {}: it ended at {:.3e} cm^-3 without an uncertainty; the data \
             exclude values above {:.3e} cm^-3 ({} standard uncertainties), which is what a comparison uses",
            match settings.ionized_density {
                IonizedDensityModel::Constant => "ionized-impurity density",
                IonizedDensityModel::CarriersPlusCompensation => "compensating density",
            },
            fitted.ionized_density_m3 * 1e-6,
            limit * 1e-6,
            settings.tolerance.sigma_multiple
        ));
    }
    let mut fit = ScatteringFit {
        ionized_parameter_upper_limit_m3,
        formula: settings.formula,
        ionized_density_model: settings.ionized_density,
        lattice_mobility_300k_m2_per_vs,
        lattice_exponent,
        lattice_exponent_fixed,
        ionized_impurity_density_m3,
        compensating_density_m3,
        neutral_impurity_density_m3,
        constant_mobility_m2_per_vs,
        budget,
        calibrations_not_stated,
        fitted_parameters: fitted,
        parameter_names: model
            .parameters
            .iter()
            .map(|p| p.name(settings.ionized_density))
            .collect(),
        parameters: model.parameters.clone(),
        parameter_values: best.parameters.clone(),
        covariance,
        correlation,
        at_bound: best.at_bound.clone(),
        goodness,
        points_used: fit_points.len(),
        starts: start_count,
        converged_starts: multi.converged,
        same_minimum_starts: multi.same_minimum,
        rows,
        hall_factor: settings.hall_factor,
        comparison: None,
        warnings,
    };
    if let Some(densities) = freeze_out {
        let comparison = compare_with_freeze_out(&fit, densities, &settings.tolerance)?;
        if !comparison.consistent {
            fit.warnings.push(format!(
                "the fitted {} ({:.4e} cm^-3) and the freeze-out {} ({:.4e} cm^-3) differ by {:.2} combined standard \
                 uncertainties, more than the tolerance of {}",
                comparison.quantity,
                comparison.fitted.value * 1e-6,
                comparison.basis.description(),
                comparison.reference.value * 1e-6,
                comparison.deviation_sigma,
                settings.tolerance.sigma_multiple
            ));
        }
        fit.comparison = Some(comparison);
    }
    Ok(fit)
}

/// The reference density of a freeze-out result for a scattering fit (module
/// documentation) and the verdict. Refuses an invalid freeze-out result.
pub fn compare_with_freeze_out(
    fit: &ScatteringFit,
    densities: &DopantDensities,
    tolerance: &ConsistencyTolerance,
) -> Result<DensityComparison, PurityError> {
    densities.validate()?;
    match fit.ionized_density_model {
        IonizedDensityModel::CarriersPlusCompensation => {
            let fitted = fit
                .compensating_density_m3
                .expect("the carriers-plus-compensation model fits N_comp");
            let reference = Estimate {
                value: densities.compensating_density_m3,
                uncertainty: densities.compensating_density_unc_m3,
            };
            Ok(match fit.ionized_parameter_upper_limit_m3 {
                Some(limit) => compare_with_upper_limit(
                    "compensating_density",
                    fitted,
                    limit,
                    reference,
                    ReferenceBasis::CompensatingDensity,
                    tolerance,
                ),
                None => compare_densities(
                    "compensating_density",
                    fitted,
                    reference,
                    ReferenceBasis::CompensatingDensity,
                    tolerance,
                ),
            })
        }
        IonizedDensityModel::Constant => {
            let (reference, basis) = ionized_reference(fit, densities);
            Ok(match fit.ionized_parameter_upper_limit_m3 {
                Some(limit) => compare_with_upper_limit(
                    "ionized_impurity_density",
                    fit.ionized_impurity_density_m3,
                    limit,
                    reference,
                    basis,
                    tolerance,
                ),
                None => compare_densities(
                    "ionized_impurity_density",
                    fit.ionized_impurity_density_m3,
                    reference,
                    basis,
                    tolerance,
                ),
            })
        }
    }
}

/// The sensitivity-weighted ionized density n + 2 N_comp over the fitted points, or the
/// total N_dop + N_comp when a fitted point has no carrier density or no point constrains
/// N_I, with its uncertainty from the freeze-out densities' (covariance-aware).
fn ionized_reference(fit: &ScatteringFit, densities: &DopantDensities) -> (Estimate, ReferenceBasis) {
    let dopant = densities.dopant_density_m3;
    let compensating = densities.compensating_density_m3;
    let total = dopant + compensating;
    let total_estimate = Estimate {
        value: total,
        uncertainty: densities.sum_uncertainty_m3(),
    };
    let fitted_rows: Vec<&ScatteringRow> = fit.rows.iter().filter(|row| row.in_fit_range).collect();
    if fitted_rows.iter().any(|row| row.carrier_density_m3.is_none()) {
        return (total_estimate, ReferenceBasis::TotalImpurities);
    }
    let mut weight_sum = 0.0;
    let mut log_sum = 0.0;
    // d ln N_ref / d N_dop and / d N_comp, accumulated with the same weights.
    let mut dopant_slope = 0.0;
    let mut compensating_slope = 0.0;
    for row in &fitted_rows {
        let (Some(sensitivity), Some(carriers)) = (row.ionized_sensitivity, row.carrier_density_m3) else {
            continue;
        };
        let ln_sigma = if fit.goodness.weighted {
            row.ln_sigma.unwrap_or(1.0)
        } else {
            1.0
        };
        let weight = (sensitivity / ln_sigma).powi(2);
        if !(weight.is_finite() && weight > 0.0) {
            continue;
        }
        let ionized = carriers + 2.0 * compensating;
        let (value, d_dopant, d_compensating) = if ionized < total {
            (ionized, 0.0, 2.0)
        } else {
            (total, 1.0, 1.0)
        };
        weight_sum += weight;
        log_sum += weight * value.ln();
        dopant_slope += weight * d_dopant / value;
        compensating_slope += weight * d_compensating / value;
    }
    if weight_sum <= 0.0 {
        return (total_estimate, ReferenceBasis::TotalImpurities);
    }
    let value = (log_sum / weight_sum).exp();
    let gradient = [
        value * dopant_slope / weight_sum,
        value * compensating_slope / weight_sum,
    ];
    let uncertainty = densities.propagate(gradient);
    (
        Estimate { value, uncertainty },
        ReferenceBasis::IonizedAtFitTemperatures,
    )
}

fn points_are_weighted(points: &[MobilityPoint], settings: &ScatteringSettings) -> bool {
    points
        .iter()
        .filter(|point| in_range(point.temperature_k, settings))
        .any(|point| point.mobility_unc_m2_per_vs.is_some())
}

fn in_range(temperature_k: f64, settings: &ScatteringSettings) -> bool {
    settings
        .temperature_min_k
        .is_none_or(|minimum| temperature_k >= minimum)
        && settings
            .temperature_max_k
            .is_none_or(|maximum| temperature_k <= maximum)
}

/// Validates the input and returns the points of the fitted range in the fit's variables.
fn select_points(points: &[MobilityPoint], settings: &ScatteringSettings) -> Result<Vec<FitPoint>, ScatteringError> {
    if points.is_empty() {
        return Err(ScatteringError::TooFewPoints {
            points: 0,
            parameters: Model::new(settings).free_parameter_count(),
        });
    }
    for (index, point) in points.iter().enumerate() {
        if !(point.temperature_k.is_finite() && point.temperature_k > 0.0) {
            return Err(ScatteringError::InvalidTemperature {
                index,
                value: point.temperature_k,
            });
        }
        if let Some(density) = point.carrier_density_m3 {
            if !(density.is_finite() && density > 0.0) {
                return Err(ScatteringError::InvalidCarrierDensity { index, value: density });
            }
        }
    }
    let mut selected = Vec::new();
    let mut with_uncertainty = 0;
    for (index, point) in points.iter().enumerate() {
        if !in_range(point.temperature_k, settings) {
            continue;
        }
        let mobility = point.mobility_m2_per_vs;
        if !(mobility.is_finite() && mobility > 0.0) {
            return Err(ScatteringError::InvalidMobility { index, value: mobility });
        }
        if let Some(unc) = point.mobility_unc_m2_per_vs {
            if !(unc.is_finite() && unc > 0.0) {
                return Err(ScatteringError::InvalidMobilityUncertainty { index, value: unc });
            }
            with_uncertainty += 1;
        }
        if point.carrier_density_m3.is_none() {
            if let Some(needed_by) = carrier_density_needed_by(settings) {
                return Err(ScatteringError::MissingCarrierDensity { index, needed_by });
            }
        }
        let temperature_unc_k = match point.temperature_unc_k {
            Some(unc) if !(unc.is_finite() && unc >= 0.0) => {
                return Err(ScatteringError::InvalidTemperatureUncertainty { index, value: unc });
            }
            Some(unc) => unc,
            None => 0.0,
        };
        let drift_mobility = mobility / settings.hall_factor;
        let (ln_sigma_data, floored) = match point.mobility_unc_m2_per_vs {
            Some(unc) => floored_relative_uncertainty(unc / mobility, settings.relative_uncertainty_floor),
            None => (1.0, false),
        };
        selected.push(FitPoint {
            index,
            temperature_k: point.temperature_k,
            ln_mobility: drift_mobility.ln(),
            ln_sigma: ln_sigma_data,
            ln_sigma_data,
            floored,
            temperature_unc_k,
            carrier_density_m3: point.carrier_density_m3,
        });
    }
    if selected.is_empty() {
        let (low, high) = points
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(low, high), point| {
                (low.min(point.temperature_k), high.max(point.temperature_k))
            });
        return Err(ScatteringError::RangeExcludesAllData {
            minimum_k: settings.temperature_min_k,
            maximum_k: settings.temperature_max_k,
            data_minimum_k: low,
            data_maximum_k: high,
        });
    }
    if with_uncertainty > 0 && with_uncertainty < selected.len() {
        return Err(ScatteringError::MixedUncertainties {
            with: with_uncertainty,
            without: selected.len() - with_uncertainty,
        });
    }
    Ok(selected)
}

/// The part of the model that needs a carrier density at every fitted point, if any.
fn carrier_density_needed_by(settings: &ScatteringSettings) -> Option<&'static str> {
    if settings.ionized_density == IonizedDensityModel::CarriersPlusCompensation {
        return Some("the carriers-plus-compensation ionized-density model");
    }
    if let NeutralImpurityModel::FromCarrierDensity { .. } = settings.neutral {
        return Some("a neutral-impurity density that follows the carrier density");
    }
    if settings.formula == IonizedImpurityFormula::BrooksHerring {
        if let ScreeningDensity::Compensated { .. } = settings.screening {
            return Some("Brooks' compensated screening density");
        }
    }
    None
}

/// The multi-start least-squares fit of `points` with their current weights.
fn solve(
    model: &Model,
    points: &[FitPoint],
    bounds: &Bounds,
    starts: &[Vec<f64>],
    weighted: bool,
) -> Result<MultiStartFit, FitError> {
    let problem = LeastSquares::new(points.len(), move |values: &[f64], residuals: &mut [f64]| {
        for (residual, point) in residuals.iter_mut().zip(points) {
            *residual = (model.log_mobility(values, point) - point.ln_mobility) / point.ln_sigma;
        }
    })
    .with_jacobian(move |values: &[f64], jacobian: &mut Matrix| {
        let mut gradient = vec![0.0; model.parameters.len()];
        for (row, point) in points.iter().enumerate() {
            model.log_mobility_gradient(values, point, &mut gradient);
            for (column, derivative) in gradient.iter().enumerate() {
                jacobian[(row, column)] = derivative / point.ln_sigma;
            }
        }
    })
    .with_bounds(bounds.clone());
    let options = LmOptions {
        residuals_are_weighted: weighted,
        max_iterations: 500,
        // The parameters are logarithms and an exponent: all of order one in their own
        // units, whatever the start.
        parameter_scales: Some(vec![1.0; model.parameters.len()]),
        ..LmOptions::default()
    };
    problem.minimize_multi_start(starts, &options, &SameMinimum::default())
}

/// Shifts of the fitted parameters (in the fit's variables) caused by a one-standard-
/// uncertainty error of each stated common-scale calibration; `None` for a calibration not
/// stated (or, for the density scale, one the model does not read).
struct SystematicShifts {
    mobility: Option<Vec<f64>>,
    density: Option<Vec<f64>>,
}

/// The fit's linear response to an error shared by every point: a change dr of the weighted
/// residuals moves the least-squares solution by dp = -(J^T J)^-1 J^T dr (to first order, the
/// GUM's sensitivity coefficients of the fitted parameters to the calibration; JCGM
/// 100:2008, 5.1.3). Held parameters have zero rows in the covariance and do not move.
fn systematic_shifts(
    model: &Model,
    points: &[FitPoint],
    best: &LmFit,
    weighted: bool,
    settings: &ScatteringSettings,
) -> SystematicShifts {
    let none = SystematicShifts {
        mobility: None,
        density: None,
    };
    // The solver scales an unweighted covariance by chi^2/nu; undo it to get (J^T J)^-1.
    let scale = if weighted { 1.0 } else { best.reduced_chi_square };
    if !(scale.is_finite() && scale > 0.0) {
        return none;
    }
    let count = model.parameters.len();
    let mut jacobian = Matrix::zeros(points.len(), count);
    let mut gradient = vec![0.0; count];
    for (row, point) in points.iter().enumerate() {
        model.log_mobility_gradient(&best.parameters, point, &mut gradient);
        for (column, derivative) in gradient.iter().enumerate() {
            jacobian[(row, column)] = derivative / point.ln_sigma;
        }
    }
    let response = |change: &[f64], relative_unc: f64| -> Vec<f64> {
        let projected = jacobian.transpose_mul_vec(change);
        (0..count)
            .map(|i| {
                let shift: f64 = (0..count).map(|j| best.covariance[(i, j)] / scale * projected[j]).sum();
                -shift * relative_unc
            })
            .collect()
    };
    // Mobilities scaled by (1 + u): every ln mu_data grows by u, every residual falls by
    // u / sigma.
    let mobility = settings.mobility_scale_relative_unc.map(|unc| {
        let change: Vec<f64> = points.iter().map(|point| -1.0 / point.ln_sigma).collect();
        response(&change, unc)
    });
    let density = settings
        .density_scale_relative_unc
        .filter(|_| model.uses_carrier_densities(points))
        .map(|unc| {
            let change: Vec<f64> = points
                .iter()
                .map(|point| {
                    let Some(density) = point.carrier_density_m3 else {
                        return 0.0;
                    };
                    let at = |factor: f64| {
                        model.log_mobility(
                            &best.parameters,
                            &FitPoint {
                                carrier_density_m3: Some(density * factor),
                                ..*point
                            },
                        )
                    };
                    let step = LN_DENSITY_STEP;
                    let slope = (at(step.exp()) - at((-step).exp())) / (2.0 * step);
                    if slope.is_finite() {
                        slope / point.ln_sigma
                    } else {
                        0.0
                    }
                })
                .collect();
            response(&change, unc)
        });
    SystematicShifts { mobility, density }
}

/// Bounds in the fit's variables; a fixed exponent has equal bounds.
fn fit_bounds(model: &Model) -> Bounds {
    let settings = model.settings;
    let bounds = &settings.bounds;
    let log = |(lower, upper): (f64, f64)| (lower.ln(), upper.ln());
    let (lower, upper): (Vec<f64>, Vec<f64>) = model
        .parameters
        .iter()
        .map(|parameter| match parameter {
            FittedParameter::LnLatticeMobility300K => log(bounds.lattice_mobility_300k_m2_per_vs),
            FittedParameter::LatticeExponent => match settings.fixed_lattice_exponent {
                Some(alpha) => (alpha, alpha),
                None => bounds.lattice_exponent,
            },
            FittedParameter::LnIonizedDensity => log(bounds.ionized_density_m3),
            FittedParameter::LnNeutralDensity => log(bounds.neutral_density_m3),
            FittedParameter::LnConstantMobility => log(bounds.constant_mobility_m2_per_vs),
        })
        .unzip();
    Bounds::new(lower, upper).expect("bounds validated with the settings")
}

/// Every combination of the starting values of [`starts`], clamped into the bounds. For
/// each alpha, mu_300 starts at twice the largest mu_i (T_i / 300)^alpha: the lattice
/// mobility can only exceed each measured one, and twice leaves room for the other terms.
fn starting_points(model: &Model, points: &[FitPoint], bounds: &Bounds) -> Vec<Vec<f64>> {
    let settings = model.settings;
    let exponents: Vec<f64> = match settings.fixed_lattice_exponent {
        Some(alpha) => vec![alpha],
        None => starts::LATTICE_EXPONENTS.to_vec(),
    };
    let largest_mobility = points
        .iter()
        .map(|point| point.ln_mobility)
        .fold(f64::NEG_INFINITY, f64::max)
        .exp();
    let median_carriers = {
        let mut densities: Vec<f64> = points.iter().filter_map(|point| point.carrier_density_m3).collect();
        densities.sort_by(f64::total_cmp);
        densities.get(densities.len() / 2).copied()
    };
    let ionized_starts: Vec<f64> = match (settings.ionized_density, median_carriers) {
        // N_comp starts at a tenth, equal to, and ten times the typical carrier density:
        // weak, moderate and strong compensation.
        (IonizedDensityModel::CarriersPlusCompensation, Some(median)) => vec![0.1 * median, median, 10.0 * median],
        _ => starts::IONIZED_DENSITIES_M3.to_vec(),
    };
    let mut list = Vec::new();
    for &alpha in &exponents {
        let lattice_floor = points
            .iter()
            .map(|point| point.ln_mobility + alpha * (point.temperature_k / REFERENCE_TEMPERATURE_K).ln())
            .fold(f64::NEG_INFINITY, f64::max);
        for &density in &ionized_starts {
            let mut start = Vec::with_capacity(model.parameters.len());
            for parameter in &model.parameters {
                start.push(match parameter {
                    FittedParameter::LnLatticeMobility300K => lattice_floor + 2f64.ln(),
                    FittedParameter::LatticeExponent => alpha,
                    FittedParameter::LnIonizedDensity => density.ln(),
                    FittedParameter::LnNeutralDensity => starts::NEUTRAL_DENSITY_M3.ln(),
                    FittedParameter::LnConstantMobility => (starts::CONSTANT_MOBILITY_FACTOR * largest_mobility).ln(),
                });
            }
            for (index, value) in start.iter_mut().enumerate() {
                *value = bounds.clamp(index, *value);
            }
            list.push(start);
        }
    }
    list
}

/// The solver's error in the terms of this model.
fn describe_fit_error(error: FitError, model: &Model) -> ScatteringError {
    match error {
        FitError::Singular { parameters } => {
            let names: Vec<&str> = parameters
                .iter()
                .filter_map(|index| model.parameters.get(*index))
                .map(|parameter| parameter.name(model.settings.ionized_density))
                .collect();
            ScatteringError::FitFailed(format!(
                "the data do not determine {} (they trade off against each other); fix the lattice exponent, drop \
                 an optional term, or include temperatures where each mechanism matters",
                names.join(" and ")
            ))
        }
        other => ScatteringError::FitFailed(other.to_string()),
    }
}

/// The profile upper limit of the ionized-impurity parameter (see
/// [`ScatteringFit::ionized_parameter_upper_limit_m3`]): the parameter is held at increasing
/// values, the others refitted from the best solution, until the chi-square exceeds the best
/// by `chi_square_margin`; the crossing is then bisected in ln to 1e-3.
fn profile_upper_limit(
    model: &Model,
    points: &[FitPoint],
    bounds: &Bounds,
    best: &LmFit,
    weighted: bool,
    chi_square_margin: f64,
) -> Option<f64> {
    let index = model.position(FittedParameter::LnIonizedDensity)?;
    let threshold = best.chi_square + chi_square_margin;
    let chi_square_at = |ln_value: f64| -> Option<f64> {
        let mut lower = bounds.lower().to_vec();
        let mut upper = bounds.upper().to_vec();
        lower[index] = ln_value;
        upper[index] = ln_value;
        let held = Bounds::new(lower, upper).ok()?;
        let mut start = best.parameters.clone();
        start[index] = ln_value;
        solve(model, points, &held, &[start], weighted)
            .ok()
            .map(|fit| fit.best.chi_square)
    };
    let ceiling = bounds.upper()[index];
    let mut low = best.parameters[index];
    let mut high = low;
    loop {
        // Half a decade per step.
        high = (high + 0.5 * std::f64::consts::LN_10).min(ceiling);
        if chi_square_at(high)? > threshold {
            break;
        }
        if high >= ceiling {
            return None;
        }
        low = high;
    }
    while high - low > 1e-3 {
        let middle = 0.5 * (low + high);
        if chi_square_at(middle)? > threshold {
            high = middle;
        } else {
            low = middle;
        }
    }
    Some(high.exp())
}

/// The result table: every input point with the fitted model's terms.
fn build_rows(
    points: &[MobilityPoint],
    settings: &ScatteringSettings,
    model: &Model,
    values: &[f64],
    weighted: bool,
    effective_sigmas: &[(usize, f64)],
) -> Vec<ScatteringRow> {
    let parameters = model.unpack(values);
    let ionized_index = model
        .position(FittedParameter::LnIonizedDensity)
        .expect("the ionized density is always a parameter");
    let mut gradient = vec![0.0; model.parameters.len()];
    points
        .iter()
        .enumerate()
        .map(|(index, point)| {
            let in_fit_range = in_range(point.temperature_k, settings);
            let mobility_data = point.mobility_m2_per_vs / settings.hall_factor;
            let mobility_data_unc = point.mobility_unc_m2_per_vs.map(|unc| unc / settings.hall_factor);
            let terms = model.terms(&parameters, point.temperature_k, point.carrier_density_m3);
            let inverse = |value: f64| if value > 0.0 { Some(1.0 / value) } else { None };
            let mobility_fit = terms.map(|terms| 1.0 / terms.inverse_total());
            let log_residual = mobility_fit
                .filter(|_| mobility_data.is_finite() && mobility_data > 0.0)
                .map(|fit| (mobility_data / fit).ln());
            // The weight the fit used (floor and effective variance included); a point outside
            // the range gets the floored uncertainty of its own mobility.
            let fitted_sigma = effective_sigmas
                .iter()
                .find(|(fitted, _)| *fitted == index)
                .map(|(_, sigma)| *sigma);
            let ln_sigma = match (weighted, fitted_sigma, point.mobility_unc_m2_per_vs) {
                (true, Some(sigma), _) => Some(sigma),
                (true, None, Some(unc)) => Some(
                    floored_relative_uncertainty(unc / point.mobility_m2_per_vs, settings.relative_uncertainty_floor).0,
                ),
                (true, None, None) => None,
                (false, _, _) => Some(1.0),
            };
            let normalized_residual = log_residual.zip(ln_sigma).map(|(residual, sigma)| residual / sigma);
            let ionized_sensitivity = terms.map(|_| {
                let fit_point = FitPoint {
                    index,
                    temperature_k: point.temperature_k,
                    ln_mobility: f64::NAN,
                    ln_sigma: 1.0,
                    ln_sigma_data: 1.0,
                    floored: false,
                    temperature_unc_k: 0.0,
                    carrier_density_m3: point.carrier_density_m3,
                };
                model.log_mobility_gradient(values, &fit_point, &mut gradient);
                gradient[ionized_index]
            });
            ScatteringRow {
                index,
                temperature_k: point.temperature_k,
                in_fit_range,
                mobility_data,
                mobility_data_unc,
                mobility_fit,
                mobility_lattice: terms.and_then(|terms| inverse(terms.lattice)),
                mobility_ionized: terms.and_then(|terms| inverse(terms.ionized)),
                mobility_neutral: terms.and_then(|terms| inverse(terms.neutral)),
                mobility_constant: terms.and_then(|terms| inverse(terms.constant)),
                ionized_density_m3: terms.map(|terms| terms.ionized_density_m3),
                screening_density_m3: terms.and_then(|terms| terms.screening_density_m3),
                neutral_density_m3: terms.and_then(|terms| terms.neutral_density_m3),
                log_residual,
                normalized_residual,
                ln_sigma,
                ionized_sensitivity,
                carrier_density_m3: point.carrier_density_m3,
            }
        })
        .collect()
}

// Written here rather than beside `ScatteringDensities` so that the purity summary does not
// import the scattering fit, which imports it.
impl From<&ScatteringFit> for ScatteringDensities {
    fn from(fit: &ScatteringFit) -> Self {
        ScatteringDensities {
            ionized_impurity_density_m3: fit.ionized_impurity_density_m3,
            compensating_density_m3: fit.compensating_density_m3,
            comparison: fit.comparison,
            upper_limit_m3: fit.ionized_parameter_upper_limit_m3,
        }
    }
}
