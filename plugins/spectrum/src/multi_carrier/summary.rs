//! The summary entries of `spectrum.multi_carrier_fit` that carry the uncertainty budget
//! and the fit diagnostics, kept beside the physics they describe so that the table glue
//! in `analyses.rs` only places them.
//!
//! Per carrier: `sheet_density_m2` and `mobility_m2_per_Vs` with `_unc` (the total
//! standard uncertainty), `_unc_stat` (from the scatter of the sweep, widened by the Birge
//! ratio and the reading reuse factor) and `_unc_sys` (from the stated calibrations), and
//! `density_m3` likewise when a thickness is given. For the fit: `reduced_chi_square`,
//! `chi_square_p_value`, `birge_ratio`, `floored_points`, `relative_uncertainty_floor`,
//! `reading_reuse_factor` and `calibrations_not_stated`.

use serde_json::{json, Map, Value};

use super::budget::{DEFAULT_CURRENT_CALIBRATION_REL, DEFAULT_FIELD_CALIBRATION_REL, DEFAULT_VOLTAGE_CALIBRATION_REL};
use super::{Calibration, FittedCarrier, MultiCarrierFit, SWEEP_RELATIVE_UNCERTAINTY_FLOOR};

/// The budget's parameters as both spectrum analyses take them (flattened into their
/// parameters, so their schema is derived with theirs).
#[derive(Debug, serde::Deserialize, schemars::JsonSchema)]
pub struct BudgetParams {
    /// a stated uncertainty of sigma_xx or sigma_xy below this fraction of |sigma(B)| is raised to it, so that no point pins the fit
    #[serde(default = "BudgetParams::relative_uncertainty_floor")]
    #[schemars(range(min = 0), extend("exclusiveMaximum" = 0.1))]
    pub relative_uncertainty_floor: f64,
    #[schemars(range(min = 0), extend("exclusiveMaximum" = 1), description = calibration_description(
        "the field scale (gaussmeter, magnet constant), applied once after the fit to densities and mobilities",
        DEFAULT_FIELD_CALIBRATION_REL,
    ))]
    pub field_calibration_rel: Option<f64>,
    #[schemars(range(min = 0), extend("exclusiveMaximum" = 1), description = calibration_description(
        "the current source's scale, applied once after the fit to the densities",
        DEFAULT_CURRENT_CALIBRATION_REL,
    ))]
    pub current_calibration_rel: Option<f64>,
    #[schemars(range(min = 0), extend("exclusiveMaximum" = 1), description = calibration_description(
        "the voltmeter's gain, applied once after the fit to the densities",
        DEFAULT_VOLTAGE_CALIBRATION_REL,
    ))]
    pub voltage_calibration_rel: Option<f64>,
}

/// The description of a calibration parameter: not stated is a meaning of its own (the
/// default is assumed and listed in `calibrations_not_stated`).
fn calibration_description(what: &str, default: f64) -> String {
    format!("relative standard uncertainty of {what}; when not stated {default} is assumed (common practice) and calibrations_not_stated says so")
}

impl Default for BudgetParams {
    fn default() -> Self {
        BudgetParams {
            relative_uncertainty_floor: Self::relative_uncertainty_floor(),
            field_calibration_rel: None,
            current_calibration_rel: None,
            voltage_calibration_rel: None,
        }
    }
}

impl BudgetParams {
    /// The floor both settings default to.
    fn relative_uncertainty_floor() -> f64 {
        SWEEP_RELATIVE_UNCERTAINTY_FLOOR
    }

    /// The stated calibrations (`None` where not stated, to be assumed and listed).
    pub fn calibration(&self) -> Calibration {
        Calibration {
            field_rel: self.field_calibration_rel,
            current_rel: self.current_calibration_rel,
            voltage_rel: self.voltage_calibration_rel,
        }
    }
}

/// One carrier's summary entry. `thickness_m` adds the volume density (the thickness
/// taken as exact: it is the user's model of where the carriers live).
pub fn carrier_summary(carrier: &FittedCarrier, thickness_m: Option<f64>) -> Value {
    let density = &carrier.sheet_density_budget;
    let mobility = &carrier.mobility_budget;
    let mut entry = json!({
        "carrier_type": carrier.kind.code(),
        "sheet_density_m2": carrier.sheet_density_m2,
        "sheet_density_m2_unc": carrier.sheet_density_unc_m2,
        "sheet_density_m2_unc_stat": density.stat,
        "sheet_density_m2_unc_sys": density.sys,
        "mobility_m2_per_Vs": carrier.mobility_m2_per_vs,
        "mobility_m2_per_Vs_unc": carrier.mobility_unc_m2_per_vs,
        "mobility_m2_per_Vs_unc_stat": mobility.stat,
        "mobility_m2_per_Vs_unc_sys": mobility.sys,
        "sheet_conductance_S": carrier.sheet_conductance_s,
        "mobility_field_product": carrier.mobility_field_product,
        "at_bound": carrier.at_bound,
    });
    if let Some(t) = thickness_m {
        entry["density_m3"] = json!(carrier.sheet_density_m2 / t);
        entry["density_m3_unc"] = json!(carrier.sheet_density_unc_m2.map(|u| u / t));
        entry["density_m3_unc_stat"] = json!(density.stat.map(|u| u / t));
        entry["density_m3_unc_sys"] = json!(density.sys / t);
    }
    entry
}

/// The fit's diagnostics and budget entries.
pub fn fit_summary(fit: &MultiCarrierFit) -> Map<String, Value> {
    let finite = |v: f64| v.is_finite().then_some(v);
    let mut summary = Map::new();
    summary.insert(
        "reduced_chi_square".into(),
        json!(finite(fit.reduced_chi_square).filter(|_| fit.weighted)),
    );
    summary.insert("chi_square_p_value".into(), json!(fit.chi_square_p_value));
    summary.insert("birge_ratio".into(), json!(fit.birge_ratio));
    summary.insert("floored_points".into(), json!(fit.floored_points));
    summary.insert(
        "relative_uncertainty_floor".into(),
        json!(fit.relative_uncertainty_floor),
    );
    summary.insert("reading_reuse_factor".into(), json!(fit.reading_reuse_factor));
    summary.insert("calibrations_not_stated".into(), json!(fit.calibration.not_stated()));
    summary
}
