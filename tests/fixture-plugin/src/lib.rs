//! A plugin that exists for the tests and benchmarks of the plugin boundary, written with
//! the Rust SDK like any other plugin:
//!
//! - `fixture.identity` returns its `values` table unchanged, so that a benchmark measures
//!   the cost of crossing the boundary and nothing else;
//! - `fixture.scale` multiplies column `x` by the required parameter `factor`, the smallest
//!   analysis with a parameter schema, a required column and a summary;
//! - `fixture.panic` panics, to show that the SDK turns a panic into an error status and
//!   that the plugin and the daemon keep working;
//! - `fixture.wait` runs until cancelled (or for `seconds`), reporting progress, to test
//!   `analysis.cancel` and `analysis.progress`;
//! - `fixture.undeclared` returns a column its declaration does not name, bypassing the
//!   SDK's output builder as a plugin written without the SDK could, to show that the host
//!   refuses such an output and keeps working.
//!
//! The library is named `test_fixture_plugin`, not `mobilis_*`, so a daemon never loads it
//! unless its directory is passed with `--plugin-dir`.

use mobilis_sdk::abi::{AnalysisDeclaration, ColumnSpec, ColumnType, InputRole};
use mobilis_sdk::sdk::{self, Analysis, AnalysisError, AnalysisOutput, Host, Inputs, OutputBuilder};
use polars::prelude::{Column, DataFrame};
use schemars::JsonSchema;
use serde::Deserialize;
use std::time::{Duration, Instant};

/// The text `fixture.panic` panics with; tests look for it in the daemon's error message.
pub const PANIC_MESSAGE: &str = "fixture.panic was asked to fail: deliberate panic 7e3f";

/// The input role every fixture analysis that takes a table reads.
const VALUES: &str = "values";

/// Parameters of the analyses that take none; unknown names are refused.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct NoParams {}

/// The `values` role, with the given declared columns.
fn values_role(columns: Vec<ColumnSpec>, description: &str) -> InputRole {
    InputRole {
        role: VALUES.into(),
        required: true,
        description: description.into(),
        columns,
    }
}

/// `fixture.identity`.
pub struct Identity;

impl Analysis for Identity {
    const NAME: &'static str = "fixture.identity";
    type Params = NoParams;

    fn declaration() -> AnalysisDeclaration {
        AnalysisDeclaration {
            name: String::new(),
            summary: "Returns the `values` table unchanged".into(),
            description:
                "Measures the cost of the plugin boundary: the table crosses into the plugin and back without a copy."
                    .into(),
            inputs: vec![values_role(Vec::new(), "any table; every column is returned")],
            open_outputs: true,
            ..Default::default()
        }
    }

    fn run(_params: NoParams, inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        Ok(AnalysisOutput::new(inputs.required(VALUES)?.clone()))
    }
}

/// `fixture.scale`.
pub struct Scale;

/// Parameters of `fixture.scale`.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ScaleParams {
    /// what every `x` is multiplied by
    pub factor: f64,
}

impl Analysis for Scale {
    const NAME: &'static str = "fixture.scale";
    type Params = ScaleParams;

    fn declaration() -> AnalysisDeclaration {
        AnalysisDeclaration {
            name: String::new(),
            summary: "Multiplies column `x` by `factor`".into(),
            description: "Nulls stay null and are left out of the sum.".into(),
            inputs: vec![values_role(
                vec![ColumnSpec::new("x", ColumnType::F64, None, "the values to scale")],
                "a table with a numeric column `x`",
            )],
            outputs: vec![ColumnSpec::new("x_scaled", ColumnType::F64, None, "factor times x")],
            summary_keys: vec![ColumnSpec::new(
                "sum",
                ColumnType::F64,
                None,
                "sum of the non-null x_scaled",
            )],
            ..Default::default()
        }
    }

    fn run(params: ScaleParams, inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let values = sdk::float_column(inputs.required(VALUES)?, "x")?;
        let scaled: Vec<Option<f64>> = values.iter().map(|x| x.map(|x| x * params.factor)).collect();
        let sum: f64 = scaled.iter().flatten().sum();
        let height = scaled.len();
        OutputBuilder::of::<Self>()
            .f64_nullable("x_scaled", scaled)
            .summary("sum", sum)
            .finish(height)
    }
}

/// `fixture.panic`.
pub struct Panic;

impl Analysis for Panic {
    const NAME: &'static str = "fixture.panic";
    type Params = NoParams;

    fn declaration() -> AnalysisDeclaration {
        AnalysisDeclaration {
            name: String::new(),
            summary: "Panics after taking over its input table".into(),
            description: "The input is taken over by the plugin before the panic, so the unwinding drops (and releases) a table the host exported: the stored dataset must not suffer.".into(),
            inputs: vec![values_role(Vec::new(), "any table")],
            ..Default::default()
        }
    }

    fn run(_params: NoParams, inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let values = inputs.required(VALUES)?;
        panic!("{PANIC_MESSAGE} (after reading {} rows)", values.height());
    }
}

/// `fixture.wait`.
pub struct Wait;

/// Parameters of `fixture.wait`.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct WaitParams {
    /// how long to wait, s
    #[serde(default = "default_wait_seconds")]
    #[schemars(range(min = 0.0))]
    pub seconds: f64,
}

fn default_wait_seconds() -> f64 {
    30.0
}

/// How often `fixture.wait` reports progress and looks for a cancellation: often enough
/// that a test waits no longer than this after asking to cancel.
const WAIT_TICK: Duration = Duration::from_millis(10);

impl Analysis for Wait {
    const NAME: &'static str = "fixture.wait";
    type Params = WaitParams;

    fn declaration() -> AnalysisDeclaration {
        AnalysisDeclaration {
            name: String::new(),
            summary: "Waits for `seconds` or until cancelled, reporting progress".into(),
            description: "Checks for cancellation and reports progress every 10 ms.".into(),
            inputs: Vec::new(),
            outputs: vec![ColumnSpec::new(
                "waited_s",
                ColumnType::F64,
                Some("s"),
                "time spent waiting",
            )],
            ..Default::default()
        }
    }

    fn run(params: WaitParams, _inputs: &Inputs, host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let started = Instant::now();
        let total = Duration::try_from_secs_f64(params.seconds).map_err(|_| {
            AnalysisError::InvalidInput(format!("seconds = {} is not a usable duration", params.seconds))
        })?;
        loop {
            let waited = started.elapsed();
            if waited >= total {
                break;
            }
            host.progress(waited.as_secs_f64() / params.seconds, "waiting");
            host.check_cancelled()?;
            std::thread::sleep(WAIT_TICK.min(total - waited));
        }
        let waited = started.elapsed().as_secs_f64();
        OutputBuilder::of::<Self>().f64("waited_s", vec![waited]).finish(1)
    }
}

/// `fixture.undeclared`.
pub struct Undeclared;

/// The column `fixture.undeclared` returns without declaring it.
pub const UNDECLARED_COLUMN: &str = "not_in_the_declaration";

impl Analysis for Undeclared {
    const NAME: &'static str = "fixture.undeclared";
    type Params = NoParams;

    fn declaration() -> AnalysisDeclaration {
        AnalysisDeclaration {
            name: String::new(),
            summary: "Returns a column it does not declare".into(),
            description: "Builds its table by hand, as a plugin without the SDK could, and breaks its own declaration: the host must refuse the output.".into(),
            outputs: vec![ColumnSpec::new("x", ColumnType::F64, None, "the only declared column")],
            ..Default::default()
        }
    }

    fn run(_params: NoParams, _inputs: &Inputs, _host: &Host) -> Result<AnalysisOutput, AnalysisError> {
        let columns = vec![
            Column::new("x".into(), [1.0]),
            Column::new(UNDECLARED_COLUMN.into(), [2.0]),
        ];
        let table = DataFrame::new(1, columns).map_err(|error| AnalysisError::Numerical(error.to_string()))?;
        Ok(AnalysisOutput::new(table))
    }
}

mobilis_sdk::export_plugin!(name: "fixture", analyses: [Identity, Scale, Panic, Wait, Undeclared]);

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    fn values(x: Vec<Option<f64>>) -> Inputs {
        let height = x.len();
        let frame = DataFrame::new(height, vec![Column::new("x".into(), x)]).unwrap();
        Inputs::from_tables([(VALUES.to_owned(), frame)])
    }

    #[test]
    fn scale_multiplies_and_skips_nulls_in_the_sum() {
        let output = sdk::run_typed::<Scale>(
            r#"{"factor": 2.5}"#,
            &values(vec![Some(1.0), None, Some(3.0)]),
            &Host::detached(),
        )
        .unwrap();
        let scaled: Vec<Option<f64>> = output.table.column("x_scaled").unwrap().f64().unwrap().iter().collect();
        assert_eq!(scaled, vec![Some(2.5), None, Some(7.5)]);
        assert_eq!(output.summary["sum"], json!(10.0));
    }

    #[test]
    fn wait_ends_after_its_time_without_a_host() {
        let output =
            sdk::run_typed::<Wait>(r#"{"seconds": 0.05}"#, &Inputs::from_tables([]), &Host::detached()).unwrap();
        let waited = output.table.column("waited_s").unwrap().f64().unwrap().get(0).unwrap();
        assert!((0.05..5.0).contains(&waited), "{waited}");
    }

    #[test]
    fn the_sdk_refuses_an_output_that_breaks_the_declaration() {
        let error = sdk::run_typed::<Undeclared>("{}", &Inputs::from_tables([]), &Host::detached()).unwrap_err();
        assert!(error.to_string().contains("plugin bug"), "{error}");
        assert!(error.to_string().contains(UNDECLARED_COLUMN), "{error}");
        let error = OutputBuilder::of::<Scale>()
            .f64("x_scaled", vec![1.0])
            .summary("total", 1.0)
            .finish(1)
            .unwrap_err();
        assert!(
            error.to_string().contains("summary key `total` is not declared"),
            "{error}"
        );
        let error = OutputBuilder::of::<Scale>().finish(0).unwrap_err();
        assert!(error.to_string().contains("`x_scaled` is missing"), "{error}");
        let error = OutputBuilder::of::<Scale>()
            .i64("x_scaled", vec![1])
            .finish(1)
            .unwrap_err();
        assert!(error.to_string().contains("declared f64 but holds i64"), "{error}");
    }

    #[test]
    fn derived_parameter_schemas_are_closed_and_carry_defaults_and_bounds() {
        let wait = sdk::declaration_of::<Wait>().params;
        assert_eq!(wait["additionalProperties"], json!(false));
        assert_eq!(wait["properties"]["seconds"]["default"], json!(30.0));
        assert_eq!(wait["properties"]["seconds"]["minimum"], json!(0.0));
        assert_eq!(
            wait["properties"]["seconds"]["description"],
            json!("how long to wait, s")
        );
        let scale = sdk::declaration_of::<Scale>().params;
        assert_eq!(scale["required"], json!(["factor"]));
    }

    #[test]
    fn identity_returns_the_table_it_was_given() {
        let inputs = values(vec![Some(1.0), None]);
        let output = sdk::run_typed::<Identity>("{}", &inputs, &Host::detached()).unwrap();
        assert!(output.table.equals_missing(inputs.required(VALUES).unwrap()));
    }
}
