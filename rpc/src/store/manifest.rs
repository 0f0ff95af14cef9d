//! What a stored dataset says about itself: the manifest in its file's footer (format,
//! columns, creation time, provenance), and the error of a failed storage action. The store
//! and its disk layer both read these, so they sit below both.

use crate::errors::{ErrorKind, ServiceError};
use polars::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::Path;

/// Version of the manifest format written by this daemon.
pub const MANIFEST_FORMAT: u32 = 1;

/// Where a dataset came from: enough to reproduce it.
// One per dataset, read and written with its manifest: the size of the analysis variant costs nothing.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Provenance {
    /// Read from a file.
    File {
        path: String,
        format: String,
        #[serde(default)]
        units: BTreeMap<String, String>,
        /// Columns renamed before the units applied, source name to new name.
        #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
        rename: BTreeMap<String, String>,
        /// The CSV dialect the file was read with (absent for other formats and the defaults).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        csv: Option<crate::csv_dialect::CsvDialect>,
        /// SHA-256 of the file's bytes as read, lower-case hex (absent in older workspaces).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        sha256: Option<String>,
        /// The file's size in bytes.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        size_bytes: Option<u64>,
        /// The file's last modification, UTC, RFC 3339.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        modified: Option<String>,
    },
    /// Sent inline by a client.
    Inline {
        #[serde(default)]
        units: BTreeMap<String, String>,
    },
    /// Produced by an analysis.
    Analysis {
        analysis: String,
        plugin: String,
        plugin_version: String,
        params: serde_json::Value,
        inputs: BTreeMap<String, String>,
        #[serde(default)]
        group_by: Vec<String>,
        /// True for the table of an analysis's summary (`summary_output`).
        #[serde(default)]
        summary: bool,
        /// The summary the run answered (per group under `groups` for a grouped run), kept
        /// on its output dataset so that a report shows the fitted values as they were
        /// computed, without running anything again. Null in manifests written before it
        /// was kept, and on the `summary_output` table, which holds it as rows.
        #[serde(default, skip_serializing_if = "serde_json::Value::is_null")]
        run_summary: serde_json::Value,
        /// The run's warnings, as answered.
        #[serde(default, skip_serializing_if = "Vec::is_empty")]
        warnings: Vec<String>,
    },
}

/// The manifest persisted in the footer of each dataset's Parquet file.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct Manifest {
    pub format: u32,
    pub name: String,
    pub rows: usize,
    pub columns: Vec<ColumnInfo>,
    /// UTC, RFC 3339.
    pub created: String,
    pub provenance: Provenance,
}

/// A stored column's name and type, as manifests keep it and clients see it.
pub use mobilis_protocol::results::ColumnInfo;

pub fn column_infos(frame: &DataFrame) -> Vec<ColumnInfo> {
    frame
        .columns()
        .iter()
        .map(|column| ColumnInfo {
            name: column.name().to_string(),
            dtype: column.dtype().to_string(),
        })
        .collect()
}

pub(super) fn storage_error(action: &str, path: &Path, error: impl std::fmt::Display) -> ServiceError {
    ServiceError::new(
        ErrorKind::StorageFailure,
        format!("cannot {action} {}: {error}", path.display()),
    )
    .with_help("check the workspace directory's permissions and free space; stored datasets are unchanged")
}
