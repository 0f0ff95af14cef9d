//! `lab.sheet_carriers`: a template for a lab's own mobilis plugin, small but real.
//!
//! From a table of sheet resistance R_s and sheet Hall coefficient R_H,s (one row per sample
//! and temperature, as a lab's own Hall set-up writes it), it computes the sheet carrier
//! density and the Hall mobility of a single dominant carrier:
//!
//! ```text
//! n_s = r_H / (e |R_H,s|),    mu_H = |R_H,s| / R_s,    type n for R_H,s < 0, p for R_H,s > 0
//! ```
//!
//! with e the elementary charge and r_H the Hall scattering factor (1 by default). These are
//! the single-carrier Hall relations of L. J. van der Pauw, "A method of measuring specific
//! resistivity and Hall effect of discs of arbitrary shape", Philips Research Reports 13, 1-9
//! (1958), in sheet quantities (D. K. Schroder, *Semiconductor Material and Device
//! Characterization*, 3rd ed., Wiley 2006, section 8.2).
//!
//! The plugin declares everything the daemon needs in one place, [`SheetCarriers::declaration`]:
//! its parameters (from the typed [`SheetCarriersParams`]), its input columns, its output
//! columns and its figure. The daemon draws that figure with `plot.render` and puts it in
//! `report.render` exactly as it draws its own plugins' figures.
//!
//! See `README.md` beside this crate for the walk-through: copy, rename, declare, build, load
//! with `mobilisd --plugin-dir`, test.

use mobilis_physics::constants::ELEMENTARY_CHARGE_C;
use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType, InputRole};
use mobilis_sdk::figure_spec::{AxisScale, AxisSpec, FigureSpec, LayerSpec, Naming, PanelSpec};
use mobilis_sdk::sdk::{self, Analysis, AnalysisError, AnalysisOutput, Host, Inputs, OutputBuilder};
use polars::prelude::Column;
use schemars::JsonSchema;
use serde::Deserialize;

/// The input role the analysis reads.
pub const HALL: &str = "hall";

/// The analysis.
pub struct SheetCarriers;

/// The parameters as a typed struct, the one place they are written: the SDK derives the
/// JSON Schema the host checks every call against from this type (doc comments become
/// descriptions, the serde default becomes `default`, the schemars attribute the bound).
#[derive(Debug, Clone, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SheetCarriersParams {
    /// Hall scattering factor r_H of the dominant carrier: n_s = r_H / (e |R_H,s|); 1 when
    /// unknown.
    #[serde(default = "default_hall_factor")]
    #[schemars(extend("exclusiveMinimum" = 0))]
    pub hall_factor: f64,
}

fn default_hall_factor() -> f64 {
    1.0
}

fn column(name: &str, dtype: ColumnType, unit: Option<&str>, description: &str) -> ColumnSpec {
    ColumnSpec::new(name, dtype, unit, description)
}

/// The figure of the output table: sheet density and Hall mobility against temperature, one
/// series per sample. Units are not written here: the daemon reads them from the column names
/// (`_m2` is shown in cm^-2, `_m2_per_Vs` in cm^2/(V s)).
pub fn figures() -> Vec<FigureSpec> {
    let against_temperature = |column: &str, label: &str| {
        PanelSpec::new(
            AxisSpec::x("temperature_K", "Temperature T", AxisScale::Linear),
            AxisSpec::y(label, AxisScale::Log),
        )
        .titled(label)
        .layer(LayerSpec::points(column, "{dataset}").naming(Naming::GroupOrName))
    };
    vec![FigureSpec::new(
        "sheet_carriers",
        "Sheet carriers",
        "Sheet carrier density and Hall mobility against temperature, log axes, one series per sample.",
    )
    .series_by(&["sample"])
    .panel(against_temperature("sheet_density_m2", "Sheet density n_{s}"))
    .panel(against_temperature("hall_mobility_m2_per_Vs", "Hall mobility μ_{H}"))]
}

impl Analysis for SheetCarriers {
    const NAME: &'static str = "lab.sheet_carriers";
    type Params = SheetCarriersParams;

    fn declaration() -> AnalysisDeclaration {
        use ColumnType::*;
        AnalysisDeclaration {
            name: String::new(),
            summary: "Sheet carrier density and Hall mobility from sheet resistance and sheet Hall coefficient".into(),
            description: "Single-carrier Hall relations (van der Pauw 1958): n_s = r_H / (e |R_H,s|), mu_H = |R_H,s| / R_s; the sign of R_H,s gives the carrier type. Rows with a missing or zero value give nulls.".into(),
            inputs: vec![InputRole {
                role: HALL.into(),
                required: true,
                description: "one row per sample and temperature".into(),
                columns: vec![
                    column("sample", Str, None, "sample name"),
                    column("temperature_K", F64, Some("K"), "sample temperature"),
                    column("sheet_resistance_ohm_sq", F64, Some("ohm_sq"), "sheet resistance R_s"),
                    column(
                        "sheet_hall_coefficient_m2_per_C",
                        F64,
                        Some("m2_per_C"),
                        "sheet Hall coefficient R_H,s = V_H / (I B), signed",
                    ),
                ],
            }],
            outputs: vec![
                column("sample", Str, None, "sample name"),
                column("temperature_K", F64, Some("K"), "sample temperature"),
                column("carrier_type", Str, None, "n (electrons) or p (holes), from the sign of R_H,s"),
                column("sheet_density_m2", F64, Some("m2"), "sheet carrier density n_s"),
                column("hall_mobility_m2_per_Vs", F64, Some("m2_per_Vs"), "Hall mobility mu_H"),
            ],
            summary_keys: vec![column("rows", I64, None, "rows of the output")],
            figures: figures(),
            ..Default::default()
        }
    }

    fn run(params: SheetCarriersParams, inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        if !(params.hall_factor.is_finite() && params.hall_factor > 0.0) {
            return Err(AnalysisError::InvalidInput(format!(
                "hall_factor {} must be a number above zero; use 1 when it is not known",
                params.hall_factor
            )));
        }
        let table = inputs.required(HALL)?;
        let sample = sdk::string_column(table, "sample")?;
        let temperature = sdk::float_column(table, "temperature_K")?;
        let sheet_resistance = sdk::float_column(table, "sheet_resistance_ohm_sq")?;
        let hall = sdk::float_column(table, "sheet_hall_coefficient_m2_per_C")?;
        let rows = table.height();
        let mut carrier_type = Vec::with_capacity(rows);
        let mut density = Vec::with_capacity(rows);
        let mut mobility = Vec::with_capacity(rows);
        let mut unusable = 0usize;
        for (r_s, r_h) in sheet_resistance.iter().zip(&hall) {
            let r_h = r_h.filter(|v| v.is_finite() && *v != 0.0);
            let r_s = r_s.filter(|v| v.is_finite() && *v > 0.0);
            if r_h.is_none() || r_s.is_none() {
                unusable += 1;
            }
            carrier_type.push(r_h.map(|v| if v < 0.0 { "n" } else { "p" }));
            density.push(r_h.map(|v| params.hall_factor / (ELEMENTARY_CHARGE_C * v.abs())));
            mobility.push(r_h.zip(r_s).map(|(h, s)| h.abs() / s));
        }
        // The builder holds the output to the declaration: an undeclared column or summary key,
        // or one of another type, is reported as the plugin's bug instead of reaching a client.
        let mut output = OutputBuilder::of::<Self>();
        output
            .column(Column::new("sample".into(), sample))
            .column(Column::new("temperature_K".into(), temperature))
            .column(Column::new("carrier_type".into(), carrier_type))
            .f64_nullable("sheet_density_m2", density)
            .f64_nullable("hall_mobility_m2_per_Vs", mobility)
            .summary("rows", rows);
        if unusable > 0 {
            output.warn(format!(
                "{unusable} rows have no usable R_s (> 0) or R_H,s (non-zero) and give nulls"
            ));
        }
        output.finish(rows)
    }
}

mobilis_sdk::export_plugin!(name: "lab", analyses: [SheetCarriers]);

#[cfg(test)]
mod tests {
    use super::*;
    use polars::prelude::DataFrame;

    fn run(table: DataFrame, params: &str) -> Result<AnalysisOutput, AnalysisError> {
        let inputs = Inputs::from_tables([(HALL.to_owned(), table)]);
        sdk::run_typed::<SheetCarriers>(params, &inputs, &Host::detached())
    }

    #[test]
    fn density_and_mobility_follow_the_single_carrier_relations() {
        // 1e16 m^-2 electrons (1e12 cm^-2) at R_s = 1000 ohm/sq: R_H,s = -1 / (e n_s).
        let n_s = 1e16;
        let r_h = -1.0 / (ELEMENTARY_CHARGE_C * n_s);
        let table = polars::df!(
            "sample" => ["A", "A", "B"],
            "temperature_K" => [77.0, 300.0, 300.0],
            "sheet_resistance_ohm_sq" => [1000.0, 1000.0, 500.0],
            "sheet_hall_coefficient_m2_per_C" => [r_h, 0.0, -2.0 * r_h],
        )
        .unwrap();
        let output = run(table, "{}").unwrap();
        let density = sdk::float_column(&output.table, "sheet_density_m2").unwrap();
        let mobility = sdk::float_column(&output.table, "hall_mobility_m2_per_Vs").unwrap();
        let kind = sdk::string_column(&output.table, "carrier_type").unwrap();
        assert!((density[0].unwrap() / n_s - 1.0).abs() < 1e-12);
        assert!((mobility[0].unwrap() - r_h.abs() / 1000.0).abs() < 1e-15);
        assert_eq!(kind[0].as_deref(), Some("n"));
        assert_eq!((density[1], mobility[1]), (None, None), "R_H,s = 0 has no density");
        assert_eq!(kind[2].as_deref(), Some("p"));
        assert!((density[2].unwrap() / (0.5 * n_s) - 1.0).abs() < 1e-12);
        assert_eq!(output.summary["rows"], 3);
        assert_eq!(output.warnings.len(), 1);
        // The Hall factor scales the density only.
        let table = polars::df!(
            "sample" => ["A"], "temperature_K" => [300.0],
            "sheet_resistance_ohm_sq" => [1000.0], "sheet_hall_coefficient_m2_per_C" => [r_h],
        )
        .unwrap();
        let scaled = run(table, r#"{"hall_factor": 1.18}"#).unwrap();
        let density = sdk::float_column(&scaled.table, "sheet_density_m2").unwrap();
        assert!((density[0].unwrap() / (1.18 * n_s) - 1.0).abs() < 1e-12);
    }

    #[test]
    fn the_declared_outputs_and_figure_match_what_run_writes() {
        let declaration = SheetCarriers::declaration();
        let table = polars::df!(
            "sample" => ["A"], "temperature_K" => [300.0],
            "sheet_resistance_ohm_sq" => [1000.0], "sheet_hall_coefficient_m2_per_C" => [-600.0],
        )
        .unwrap();
        let output = run(table, "{}").unwrap();
        let written: Vec<String> = output.table.get_column_names().iter().map(|c| c.to_string()).collect();
        let declared: Vec<String> = declaration.outputs.iter().map(|c| c.name.clone()).collect();
        assert_eq!(written, declared);
        for figure in &declaration.figures {
            for column in figure.needed_columns() {
                assert!(
                    declared.contains(&column),
                    "figure {} draws undeclared {column}",
                    figure.name
                );
            }
        }
    }
}
