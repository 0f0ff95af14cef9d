//! The dataset store: polars DataFrames in memory, each persisted in the workspace as a
//! Parquet file plus a JSON manifest with its provenance.
//!
//! **Architecture Invariant.** A dataset is in memory only once both of its files are on
//! disk: writes go to a temporary file, are flushed with fsync and renamed into place, so a
//! crash leaves either the old dataset or the new one, never a torn file. On start every
//! manifest is reloaded; a file that cannot be read is reported (logged and listed by
//! `server.info`) and left untouched on disk for a person to inspect, never deleted.
//!
//! Layout: `<workspace>/datasets/<name>.parquet` and `<workspace>/datasets/<name>.json`.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use polars::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::fs::File;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, RwLock};

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

/// The manifest persisted beside each dataset's Parquet file.
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

#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct ColumnInfo {
    pub name: String,
    pub dtype: String,
}

/// A stored dataset.
pub struct Dataset {
    pub frame: DataFrame,
    pub manifest: Manifest,
}

/// A workspace file that could not be loaded.
#[derive(Debug, Clone, Serialize)]
pub struct DamagedFile {
    pub file: String,
    pub reason: String,
}

pub struct DatasetStore {
    directory: PathBuf,
    datasets: RwLock<BTreeMap<String, Arc<Dataset>>>,
    /// Serialises writers so that two writes of one name cannot interleave their renames.
    write_lock: Mutex<()>,
    damaged: Vec<DamagedFile>,
}

/// Checks a dataset name: 1 to 128 characters from `A-Z a-z 0-9 _ - .`, starting with a
/// letter or digit, without `..`. Names become file names, so nothing else is allowed.
pub fn validate_name(name: &str) -> ServiceResult<()> {
    let valid_chars = name
        .chars()
        .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'));
    let starts_well = name.chars().next().is_some_and(|c| c.is_ascii_alphanumeric());
    if name.is_empty() || name.len() > 128 || !valid_chars || !starts_well || name.contains("..") {
        return Err(ServiceError::invalid_params(format!("`{name}` is not a valid dataset name")).with_help(
            "use 1 to 128 characters from letters, digits, `_`, `-` and `.`, starting with a letter or digit, without `..` or path separators",
        ));
    }
    Ok(())
}

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

fn storage_error(action: &str, path: &Path, error: impl std::fmt::Display) -> ServiceError {
    ServiceError::new(
        ErrorKind::StorageFailure,
        format!("cannot {action} {}: {error}", path.display()),
    )
    .with_help("check the workspace directory's permissions and free space; stored datasets are unchanged")
}

static TEMPORARY_COUNTER: AtomicU64 = AtomicU64::new(0);

/// Writes `bytes_writer`'s output to `target` atomically: temporary file, fsync, rename, fsync dir.
fn write_atomically(target: &Path, write: impl FnOnce(&mut File) -> Result<(), String>) -> ServiceResult<()> {
    let directory = target.parent().expect("dataset files live in a directory");
    let temporary = directory.join(format!(
        ".tmp-{}-{}-{}",
        std::process::id(),
        TEMPORARY_COUNTER.fetch_add(1, Ordering::Relaxed),
        target.file_name().and_then(|n| n.to_str()).unwrap_or("file")
    ));
    let result = (|| {
        let mut file = File::create(&temporary).map_err(|e| storage_error("create", &temporary, e))?;
        write(&mut file).map_err(|e| storage_error("write", &temporary, e))?;
        file.sync_all().map_err(|e| storage_error("flush", &temporary, e))?;
        std::fs::rename(&temporary, target).map_err(|e| storage_error("rename into", target, e))?;
        if let Ok(dir) = File::open(directory) {
            // Persist the rename itself; not every platform supports syncing a directory.
            let _ = dir.sync_all();
        }
        Ok(())
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&temporary);
    }
    result
}

impl DatasetStore {
    /// Opens (creating if needed) a workspace and loads every dataset in it.
    pub fn open(workspace: &Path) -> std::io::Result<Self> {
        let directory = workspace.join("datasets");
        std::fs::create_dir_all(&directory)?;
        let mut store = DatasetStore {
            directory,
            datasets: RwLock::new(BTreeMap::new()),
            write_lock: Mutex::new(()),
            damaged: Vec::new(),
        };
        store.reload()?;
        Ok(store)
    }

    fn reload(&mut self) -> std::io::Result<()> {
        let mut entries: Vec<PathBuf> = std::fs::read_dir(&self.directory)?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .collect();
        entries.sort();
        let mut loaded = BTreeMap::new();
        let mut damaged = Vec::new();
        for path in &entries {
            let file_name = path.file_name().and_then(|n| n.to_str()).unwrap_or("").to_owned();
            if file_name.starts_with(".tmp-") {
                // An interrupted write: the rename never happened, so nothing refers to it.
                damaged.push(DamagedFile {
                    file: path.display().to_string(),
                    reason: "left over from an interrupted write".into(),
                });
                continue;
            }
            let Some(name) = file_name.strip_suffix(".json") else {
                if let Some(name) = file_name.strip_suffix(".parquet") {
                    if !self.directory.join(format!("{name}.json")).exists() {
                        damaged.push(DamagedFile {
                            file: path.display().to_string(),
                            reason: "Parquet file without a manifest".into(),
                        });
                    }
                }
                continue;
            };
            match Self::load_one(&self.directory, name) {
                Ok(dataset) => {
                    loaded.insert(name.to_owned(), Arc::new(dataset));
                }
                Err(reason) => damaged.push(DamagedFile {
                    file: path.display().to_string(),
                    reason,
                }),
            }
        }
        for file in &damaged {
            tracing::warn!(file = %file.file, reason = %file.reason, "workspace file skipped");
        }
        tracing::info!(datasets = loaded.len(), damaged = damaged.len(), "workspace loaded");
        self.datasets = RwLock::new(loaded);
        self.damaged = damaged;
        Ok(())
    }

    fn load_one(directory: &Path, name: &str) -> Result<Dataset, String> {
        let manifest_text =
            std::fs::read_to_string(directory.join(format!("{name}.json"))).map_err(|e| e.to_string())?;
        let manifest: Manifest =
            serde_json::from_str(&manifest_text).map_err(|e| format!("manifest unreadable: {e}"))?;
        if manifest.format != MANIFEST_FORMAT {
            return Err(format!("manifest format {} is not {MANIFEST_FORMAT}", manifest.format));
        }
        if manifest.name != name {
            return Err(format!("manifest names `{}` but the file is `{name}`", manifest.name));
        }
        let parquet = directory.join(format!("{name}.parquet"));
        let file = File::open(&parquet).map_err(|e| format!("{}: {e}", parquet.display()))?;
        let frame = ParquetReader::new(file)
            .finish()
            .map_err(|e| format!("Parquet unreadable: {e}"))?;
        if frame.height() != manifest.rows || column_infos(&frame) != manifest.columns {
            return Err(format!(
                "Parquet file holds {} rows and columns {:?}, the manifest says {} rows and {:?}",
                frame.height(),
                column_infos(&frame).iter().map(|c| &c.name).collect::<Vec<_>>(),
                manifest.rows,
                manifest.columns.iter().map(|c| &c.name).collect::<Vec<_>>()
            ));
        }
        Ok(Dataset { frame, manifest })
    }

    pub fn directory(&self) -> &Path {
        &self.directory
    }

    pub fn damaged(&self) -> &[DamagedFile] {
        &self.damaged
    }

    pub fn get(&self, name: &str) -> ServiceResult<Arc<Dataset>> {
        self.datasets
            .read()
            .expect("store lock")
            .get(name)
            .cloned()
            .ok_or_else(|| ServiceError::unknown_dataset(name))
    }

    pub fn contains(&self, name: &str) -> bool {
        self.datasets.read().expect("store lock").contains_key(name)
    }

    pub fn list(&self) -> Vec<Arc<Dataset>> {
        self.datasets.read().expect("store lock").values().cloned().collect()
    }

    /// Persists and stores a dataset. Refuses to replace an existing one unless `overwrite`.
    pub fn insert(
        &self,
        name: &str,
        mut frame: DataFrame,
        provenance: Provenance,
        overwrite: bool,
    ) -> ServiceResult<Arc<Dataset>> {
        validate_name(name)?;
        let _writer = self.write_lock.lock().expect("store write lock");
        if !overwrite && self.contains(name) {
            return Err(ServiceError::new(
                ErrorKind::DatasetExists,
                format!("a dataset named `{name}` exists already"),
            )
            .with_help("choose another name, drop the old dataset, or pass overwrite: true"));
        }
        if frame.width() == 0 {
            return Err(ServiceError::new(
                ErrorKind::InvalidData,
                format!("dataset `{name}` would have no columns"),
            ));
        }
        frame.rechunk_mut();
        let manifest = Manifest {
            format: MANIFEST_FORMAT,
            name: name.to_owned(),
            rows: frame.height(),
            columns: column_infos(&frame),
            created: utc_timestamp(std::time::SystemTime::now()),
            provenance,
        };
        let parquet_path = self.directory.join(format!("{name}.parquet"));
        let manifest_path = self.directory.join(format!("{name}.json"));
        write_atomically(&parquet_path, |file| {
            ParquetWriter::new(&mut *file)
                .finish(&mut frame)
                .map(|_| ())
                .map_err(|e| e.to_string())
        })?;
        let manifest_json = serde_json::to_vec_pretty(&manifest).expect("manifest serialises");
        write_atomically(&manifest_path, |file| {
            file.write_all(&manifest_json).map_err(|e| e.to_string())
        })?;
        let dataset = Arc::new(Dataset { frame, manifest });
        self.datasets
            .write()
            .expect("store lock")
            .insert(name.to_owned(), dataset.clone());
        Ok(dataset)
    }

    /// Removes a dataset from memory and disk.
    pub fn remove(&self, name: &str) -> ServiceResult<()> {
        let _writer = self.write_lock.lock().expect("store write lock");
        if !self.contains(name) {
            return Err(ServiceError::unknown_dataset(name));
        }
        // Manifest first: without it the dataset is gone at the next start, whatever happens next.
        let manifest_path = self.directory.join(format!("{name}.json"));
        std::fs::remove_file(&manifest_path).map_err(|e| storage_error("remove", &manifest_path, e))?;
        let parquet_path = self.directory.join(format!("{name}.parquet"));
        if let Err(error) = std::fs::remove_file(&parquet_path) {
            tracing::warn!(file = %parquet_path.display(), %error, "could not remove a dropped dataset's Parquet file");
        }
        self.datasets.write().expect("store lock").remove(name);
        Ok(())
    }
}

/// Formats a time as RFC 3339 UTC with second precision (civil-from-days, H. Hinnant's algorithm).
pub fn utc_timestamp(time: std::time::SystemTime) -> String {
    let seconds = time
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs() as i64)
        .unwrap_or(0);
    let days = seconds.div_euclid(86_400);
    let second_of_day = seconds.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let day_of_era = z - era * 146_097;
    let year_of_era = (day_of_era - day_of_era / 1460 + day_of_era / 36_524 - day_of_era / 146_096) / 365;
    let day_of_year = day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
    let month_index = (5 * day_of_year + 2) / 153;
    let day = day_of_year - (153 * month_index + 2) / 5 + 1;
    let month = if month_index < 10 {
        month_index + 3
    } else {
        month_index - 9
    };
    let year = year_of_era + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z",
        second_of_day / 3600,
        (second_of_day / 60) % 60,
        second_of_day % 60
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn provenance() -> Provenance {
        Provenance::Inline { units: BTreeMap::new() }
    }

    #[test]
    fn names_that_could_escape_the_workspace_are_refused() {
        for bad in ["", "../x", "a/b", "a\\b", "..", ".hidden", "a..b", "x y", "é"] {
            assert!(validate_name(bad).is_err(), "{bad:?} accepted");
        }
        for good in ["wafer-7", "si_ref.reduced", "A1"] {
            assert!(validate_name(good).is_ok(), "{good:?} refused");
        }
    }

    #[test]
    fn datasets_survive_a_restart_and_damage_is_reported() {
        let workspace = tempfile::tempdir().unwrap();
        {
            let store = DatasetStore::open(workspace.path()).unwrap();
            let frame = df!("temperature_K" => [10.0, 20.0], "sample" => ["a", "b"]).unwrap();
            store.insert("one", frame.clone(), provenance(), false).unwrap();
            store.insert("two", frame, provenance(), false).unwrap();
            assert!(store
                .insert("one", df!("x" => [1]).unwrap(), provenance(), false)
                .is_err());
        }
        std::fs::write(workspace.path().join("datasets/two.parquet"), b"not parquet").unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        assert_eq!(store.get("one").unwrap().frame.height(), 2);
        assert!(store.get("two").is_err());
        assert_eq!(store.damaged().len(), 1);
        assert!(
            workspace.path().join("datasets/two.parquet").exists(),
            "damaged files are never deleted"
        );
    }

    #[test]
    fn manifests_written_before_run_summaries_were_kept_still_load() {
        let old = r#"{"kind": "analysis", "analysis": "hall.reduce", "plugin": "hall",
            "plugin_version": "0.1.0", "params": {}, "inputs": {"readings": "r"}}"#;
        let provenance: Provenance = serde_json::from_str(old).unwrap();
        let Provenance::Analysis {
            run_summary,
            warnings,
            summary,
            ..
        } = &provenance
        else {
            panic!("{provenance:?}")
        };
        assert!(run_summary.is_null() && warnings.is_empty() && !summary);
        // Written back, it reads as before: nothing new appears for what was not kept.
        let text = serde_json::to_string(&provenance).unwrap();
        assert!(!text.contains("run_summary") && !text.contains("warnings"), "{text}");
    }

    #[test]
    fn timestamps_are_rfc3339() {
        let t = std::time::UNIX_EPOCH + std::time::Duration::from_secs(1_700_000_000);
        assert_eq!(utc_timestamp(t), "2023-11-14T22:13:20Z");
    }

    #[test]
    fn file_provenance_of_older_workspaces_still_loads() {
        let old = serde_json::json!({"kind": "file", "path": "/data/r.csv", "format": "csv", "units": {}});
        let provenance: Provenance = serde_json::from_value(old).unwrap();
        let Provenance::File {
            sha256,
            size_bytes,
            rename,
            ..
        } = &provenance
        else {
            panic!("a file provenance")
        };
        assert!(sha256.is_none() && size_bytes.is_none() && rename.is_empty());
        // And an absent member stays absent when written again.
        let written = serde_json::to_value(&provenance).unwrap();
        assert!(written.get("sha256").is_none());
    }
}
