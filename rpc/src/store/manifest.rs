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
        /// The stored version of each input as the run read it, role to
        /// [`Manifest::version`]: `inputs` names datasets, and a name may since have been
        /// dropped or stored again with other data. Empty in manifests written before
        /// versions were kept; an input stored before then has none.
        #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
        input_versions: BTreeMap<String, String>,
        #[serde(default)]
        group_by: Vec<String>,
        /// `group_tolerance` of the run: columns grouped by value clusters, not exact values.
        #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
        group_tolerance: BTreeMap<String, f64>,
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
    /// The identity of this stored table: assigned once when it is stored (an import, an
    /// analysis output, an overwrite) and never reused, so that a table stored later under
    /// the same name has another. It names one stored version, not the values: the same
    /// values stored twice get two. Absent in workspaces written before versions were kept.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub version: Option<String>,
    pub provenance: Provenance,
}

/// A new dataset version: 128 bits as 32 hex digits, hashed from the clock, this process's
/// id, a count of this process's versions and the standard library's random per-process hash
/// keys, so that no two stored tables share one, in one daemon or across restarts. Made
/// once per stored table; its cost does not grow with the table.
pub fn new_version() -> String {
    use std::hash::{BuildHasher, Hasher};
    use std::sync::atomic::{AtomicU64, Ordering};
    static VERSIONS_MADE: AtomicU64 = AtomicU64::new(0);
    let count = VERSIONS_MADE.fetch_add(1, Ordering::Relaxed);
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|elapsed| elapsed.as_nanos())
        .unwrap_or(0);
    let half = |which: u8| {
        let mut hasher = std::collections::hash_map::RandomState::new().build_hasher();
        hasher.write_u8(which);
        hasher.write_u128(nanos);
        hasher.write_u32(std::process::id());
        hasher.write_u64(count);
        hasher.finish()
    };
    format!("{:016x}{:016x}", half(0), half(1))
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
