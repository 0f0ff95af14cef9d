//! Why no figure could be built. The recipes raise it and the crate root returns it, so it
//! sits below both.

/// Why no figure could be built; every message says what to change.
#[derive(thiserror::Error, Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum PlotError {
    #[error("unknown plot kind `{kind}`; use one of: {known}")]
    UnknownKind { kind: String, known: String },
    #[error("plot kind `{kind}` needs column `{column}`, which dataset `{dataset}` does not have; {detail}")]
    MissingColumn {
        kind: String,
        column: String,
        dataset: String,
        /// The columns the kind needs, the dataset's columns and the analyses that make such a
        /// dataset.
        detail: String,
    },
    #[error("column `{column}` holds {dtype}, not numbers; choose a numeric column")]
    NotNumeric { column: String, dtype: String },
    #[error("dataset `{dataset}` has no finite values to draw as kind `{kind}`{hint}")]
    NoFinitePoints {
        dataset: String,
        kind: String,
        hint: String,
    },
    #[error("{0}")]
    BadOption(String),
    #[error("{0}")]
    Unusable(String),
    /// More than the daemon draws in one figure (series, points); the message names the
    /// filter to use.
    #[error("{0}")]
    TooLarge(String),
}
