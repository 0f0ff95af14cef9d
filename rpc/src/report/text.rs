//! What the report page and its summary blocks both write with: HTML escaping and the
//! sample names of a table. Below both, so that the summary does not import the page.

use crate::store::{Dataset, Provenance};
pub(crate) use mobilis_plot::escape;
use std::collections::BTreeSet;

/// The column that names the sample a row belongs to.
pub const SAMPLE_COLUMN: &str = "sample";

/// The distinct sample names of a dataset: those of its text `sample` column or, for an
/// analysis output without one (an ungrouped run over one sample's series, such as a
/// quantum-oscillation analysis), the sample its run summary names, so that the sample's
/// report shows that output too.
pub(crate) fn samples_of(dataset: &Dataset) -> BTreeSet<String> {
    let Ok(column) = dataset.frame.column(SAMPLE_COLUMN) else {
        return summary_sample(dataset).into_iter().collect();
    };
    let Ok(strings) = column.str() else {
        return BTreeSet::new();
    };
    strings.iter().flatten().map(str::to_owned).collect()
}

/// The sample named by the run summary of an analysis output (its `sample` key).
fn summary_sample(dataset: &Dataset) -> Option<String> {
    match &dataset.manifest.provenance {
        Provenance::Analysis { run_summary, .. } => run_summary.get(SAMPLE_COLUMN)?.as_str().map(str::to_owned),
        _ => None,
    }
}
