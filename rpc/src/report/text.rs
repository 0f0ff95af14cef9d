//! What the report page and its summary blocks both write with: HTML escaping and the
//! sample names of a table. Below both, so that the summary does not import the page.

use crate::store::Dataset;
pub(crate) use mobilis_plot::escape;
use std::collections::BTreeSet;

/// The column that names the sample a row belongs to.
pub const SAMPLE_COLUMN: &str = "sample";

/// The distinct sample names of a dataset, if it has a text `sample` column.
pub(crate) fn samples_of(dataset: &Dataset) -> BTreeSet<String> {
    let Ok(column) = dataset.frame.column(SAMPLE_COLUMN) else {
        return BTreeSet::new();
    };
    let Ok(strings) = column.str() else {
        return BTreeSet::new();
    };
    strings.iter().flatten().map(str::to_owned).collect()
}
