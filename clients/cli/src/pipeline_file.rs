//! Pipeline files: TOML with `[[import]]` tables (datasets to import first) and `[[step]]`
//! tables (the parameters of `analysis.run`), run through `pipeline.run`.
//!
//! ```toml
//! [[import]]
//! name = "si-readings"
//! path = "si-wafer/readings.csv"     # relative to the pipeline file
//! units = { }                        # optional: column = "unit"
//! # optional, as in an import recipe: recipe = "station.toml" (relative to this file),
//! # format, rename = { "Sample ID" = "sample" }, csv = { separator = ";" }
//!
//! [[step]]
//! analysis = "hall.reduce"
//! inputs = { readings = "si-readings", samples = "si-samples" }
//! output = "si-hall"
//! group_by = ["sample"]
//! params = { temperature_tolerance_K = 0.5 }
//! ```
//!
//! Imports and steps overwrite datasets of the same name: a pipeline file describes how
//! its outputs are made, so running it again remakes them.

use anyhow::{bail, Context};
use mobilis_client::Client;
use mobilis_protocol::method;
use mobilis_protocol::params::{PipelineParams, RunParams};
use mobilis_protocol::results::RunResult;
use serde::Deserialize;
use std::path::Path;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PipelineFile {
    /// The `[[import]]` tables: name, path and the keys of an import recipe.
    #[serde(default, rename = "import")]
    pub imports: Vec<toml::Table>,
    #[serde(default, rename = "step")]
    pub steps: Vec<toml::Table>,
}

/// Reads a pipeline file.
pub fn load(file: &Path) -> anyhow::Result<PipelineFile> {
    let text = std::fs::read_to_string(file).with_context(|| format!("cannot read {}", file.display()))?;
    let pipeline: PipelineFile =
        toml::from_str(&text).with_context(|| format!("{} is not a valid pipeline file", file.display()))?;
    if pipeline.steps.is_empty() {
        bail!("{} has no [[step]]", file.display());
    }
    Ok(pipeline)
}

/// Imports the file's datasets, then runs its steps, handing the pipeline's progress to
/// `on_progress`; returns the step results.
pub async fn run(
    client: &Client,
    file: &Path,
    on_progress: impl FnMut(&mobilis_client::ProgressEvent),
) -> anyhow::Result<Vec<RunResult>> {
    let pipeline = load(file)?;
    let base = file.canonicalize()?.parent().map(Path::to_owned).unwrap_or_default();
    for import in pipeline.imports {
        let (name, params) = crate::import_recipe::pipeline_import(import, &base)?;
        client
            .request::<method::DatasetImport>(&params)
            .await
            .with_context(|| format!("importing {name}"))?;
    }
    let steps: Vec<RunParams> = pipeline
        .steps
        .iter()
        .enumerate()
        .map(|(index, step)| {
            let mut step = step.clone();
            step.entry("overwrite").or_insert(toml::Value::Boolean(true));
            let value = serde_json::to_value(step).expect("TOML converts to JSON");
            serde_json::from_value(value).with_context(|| {
                format!(
                    "[[step]] {} of {} is not an analysis.run request",
                    index + 1,
                    file.display()
                )
            })
        })
        .collect::<anyhow::Result<_>>()?;
    let params = PipelineParams { steps, call_id: None };
    let result = client
        .request_with_progress::<method::PipelineRun>(&params, None, on_progress)
        .await?;
    Ok(result.steps)
}
