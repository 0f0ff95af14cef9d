//! The summary entries of `spectrum.mobility` that carry each peak's uncertainty budget and
//! the spectrum's bookkeeping, kept beside the physics they describe so that the table
//! glue in `analyses.rs` only places them.
//!
//! Per peak: `sheet_density_m2` and `mobility_m2_per_Vs` with `_unc` (total), `_unc_stat`
//! (replica spread and, for the density, the width term) and `_unc_sys` (stated
//! calibrations), the bounds `integrated_density_m2` and `hall_density_m2` of the density
//! and `hall_mobility_m2_per_Vs` and `density_mobility_m2_per_Vs` of the mobility, and
//! `density_m3` likewise when a thickness is given. For the spectrum: `floored_points`,
//! `reading_reuse_factor` and `calibrations_not_stated`.

use serde_json::{json, Map, Value};

use super::{MobilitySpectrum, Peak};

fn finite(value: f64) -> Option<f64> {
    value.is_finite().then_some(value)
}

/// One peak's summary entry. `thickness_m` (taken as exact) adds volume densities.
pub fn peak_summary(peak: &Peak, thickness_m: Option<f64>) -> Value {
    let density = &peak.sheet_density_budget;
    let mobility = &peak.mobility_budget;
    let mut entry = json!({
        "carrier_type": peak.carrier.code(),
        "sheet_density_m2": peak.sheet_density_m2,
        "sheet_density_m2_unc": finite(peak.sheet_density_unc_m2),
        "sheet_density_m2_unc_stat": density.stat,
        "sheet_density_m2_unc_sys": density.sys,
        "integrated_density_m2": peak.integrated_density_m2,
        "hall_density_m2": peak.hall_density_m2,
        "mobility_m2_per_Vs": peak.mobility_m2_per_vs,
        "mobility_m2_per_Vs_unc": finite(peak.mobility_unc_m2_per_vs),
        "mobility_m2_per_Vs_unc_stat": mobility.stat,
        "mobility_m2_per_Vs_unc_sys": mobility.sys,
        "hall_mobility_m2_per_Vs": peak.hall_mobility_m2_per_vs,
        "density_mobility_m2_per_Vs": peak.density_mobility_m2_per_vs,
        "peak_mobility_m2_per_Vs": peak.peak_mobility_m2_per_vs,
        "conductance_S": peak.conductance_s,
        "conductance_fraction": peak.conductance_fraction,
        "at_grid_edge": peak.at_grid_edge,
        "within_field_window": peak.within_field_window,
    });
    if let Some(t) = thickness_m {
        entry["density_m3"] = json!(peak.sheet_density_m2 / t);
        entry["density_m3_unc"] = json!(finite(peak.sheet_density_unc_m2 / t));
        entry["density_m3_unc_stat"] = json!(density.stat.map(|u| u / t));
        entry["density_m3_unc_sys"] = json!(density.sys / t);
    }
    entry
}

/// The spectrum's budget bookkeeping.
pub fn spectrum_summary(spectrum: &MobilitySpectrum) -> Map<String, Value> {
    let mut summary = Map::new();
    summary.insert("floored_points".into(), json!(spectrum.floored_points));
    summary.insert("reading_reuse_factor".into(), json!(spectrum.reading_reuse_factor));
    summary.insert(
        "calibrations_not_stated".into(),
        json!(spectrum.calibration.not_stated()),
    );
    summary
}
