//! What to draw: the options of one figure as the JSON-RPC layer passes them. The figure builders read
//! them and the crate root takes them, so they sit below both.

use serde::{Deserialize, Deserializer};

/// What to draw. Every field is optional, so that the JSON-RPC layer can take it from the
/// request parameters as they are.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct PlotOptions {
    /// A kind (see [`crate::FigureCatalog::kinds`]); None or "auto": the first figure `analysis`
    /// declares, else "columns".
    pub kind: Option<String>,
    /// The analysis that produced the dataset (from its provenance), if any.
    pub analysis: Option<String>,
    /// For kind "columns": the x column.
    pub x: Option<String>,
    /// For kind "columns": one or more y columns (a single string is accepted too).
    #[serde(deserialize_with = "one_or_many")]
    pub y: Vec<String>,
    /// Optional 1-sigma uncertainty columns, one per y column; without them a y column's
    /// `_unc` companion is used when the dataset has it.
    #[serde(deserialize_with = "one_or_many")]
    pub y_error: Vec<String>,
    /// Columns whose value combinations become separate series; None: the figure's default
    /// (sample, temperature, field where present and varying).
    pub series_by: Option<Vec<String>>,
    /// Override the figure's choice of logarithmic axes.
    pub log_x: Option<bool>,
    pub log_y: Option<bool>,
    pub title: Option<String>,
    /// The rows the caller kept, as (column, value) pairs: the daemon's `filter`. The title
    /// names them ("... (sample = W1)"), so that a figure of part of a dataset says which
    /// part it shows. Not a request parameter of its own: `plot.render` fills it from
    /// `filter`.
    #[serde(skip)]
    pub selection: Vec<(String, String)>,
    /// Size of one panel in pixels (default 640 x 420 for a figure of one panel, 500 x 400
    /// for figures of several, which tile them two to a row, 1000 px wide).
    pub width: Option<f64>,
    pub height: Option<f64>,
}

fn one_or_many<'de, D: Deserializer<'de>>(deserializer: D) -> Result<Vec<String>, D::Error> {
    #[derive(Deserialize)]
    #[serde(untagged)]
    enum OneOrMany {
        One(String),
        Many(Vec<String>),
        Null(()),
    }
    Ok(match OneOrMany::deserialize(deserializer)? {
        OneOrMany::One(one) => vec![one],
        OneOrMany::Many(many) => many,
        OneOrMany::Null(()) => Vec::new(),
    })
}
