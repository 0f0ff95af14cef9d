//! What the report page and its summary blocks both write with: HTML escaping and the
//! sample names of a table. Below both, so that the summary does not import the page.

use crate::store::Dataset;
use std::collections::BTreeSet;

/// The column that names the sample a row belongs to.
pub const SAMPLE_COLUMN: &str = "sample";

pub(crate) fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

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
