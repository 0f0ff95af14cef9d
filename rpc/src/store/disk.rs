//! The on-disk form of a dataset: one Parquet file whose footer carries the manifest, and
//! the commit records that make several datasets appear together.
//!
//! **Architecture Invariant.** A dataset has exactly one commit point, the rename of its
//! Parquet file into place (POSIX `rename(2)` replaces the target atomically). The manifest
//! travels in the footer's key-value metadata (Apache Parquet format, `FileMetaData`
//! `key_value_metadata`), so rows, columns and provenance can never disagree with each other.
//! Writes that must land together (an analysis's output and its summary) first stage every
//! file, then write one commit record; from the moment the record is renamed into place the
//! whole group counts as committed, and a start after a crash finishes the renames.

use super::{storage_error, Manifest};
use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use polars::io::parquet::write::{KeyValueMetadata, ParquetCompression, StatisticsOptions};
use polars::prelude::*;
use serde::{Deserialize, Serialize};
use std::fs::File;
use std::io::Write;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// The footer key under which a dataset's manifest (JSON) is stored.
pub const MANIFEST_KEY: &str = "mobilis.manifest";
/// Files of unfinished writes start with this; nothing committed ever does.
pub const STAGING_PREFIX: &str = ".tmp-";
/// Commit records of groups of datasets start with this.
pub const RECORD_PREFIX: &str = ".commit-";

/// How stored datasets are compressed: LZ4 (the Parquet format's `LZ4_RAW` codec), about
/// half the encoding time of the zstd default for a few percent more bytes (a million
/// readings: 8.7 MB against 8.2 MB). A stored file is written on every import and every
/// analysis run but read only when the daemon starts, so writing is what counts. Files
/// written with other codecs (earlier versions wrote zstd) read as before.
pub const STORED_COMPRESSION: ParquetCompression = ParquetCompression::Lz4Raw;

static STAGING_COUNTER: AtomicU64 = AtomicU64::new(0);

/// A unique name for a staged file in the datasets directory. Unique within this process;
/// the start-up sweep removes everything a previous process left, so pids that come round
/// again cannot collide with old files.
fn staging_name(suffix: &str) -> String {
    format!(
        "{STAGING_PREFIX}{}-{}-{suffix}",
        std::process::id(),
        STAGING_COUNTER.fetch_add(1, Ordering::Relaxed)
    )
}

/// Flushes a directory so that renames and unlinks in it survive a power cut (POSIX
/// `fsync` on a directory descriptor; not every platform supports it, hence best effort).
pub fn sync_directory(directory: &Path) {
    if let Ok(dir) = File::open(directory) {
        let _ = dir.sync_all();
    }
}

/// A file written and flushed, not yet renamed into place.
pub struct Staged {
    pub temporary: PathBuf,
    pub target: PathBuf,
}

impl Staged {
    /// Removes the staged file; the call failed before its commit point.
    pub fn discard(self) {
        let _ = std::fs::remove_file(&self.temporary);
    }
}

/// Writes `frame` with `manifest` in its footer to a staged file beside `target`, flushed to
/// disk. A panic inside the Parquet writer fails this write only: it is caught here so that
/// no lock a caller holds is poisoned and the staged file is removed.
pub fn stage_dataset(
    directory: &Path,
    target: PathBuf,
    frame: &mut DataFrame,
    manifest: &Manifest,
    #[allow(unused_variables)] inject_panic: bool,
) -> ServiceResult<Staged> {
    let file_name = target
        .file_name()
        .and_then(|n| n.to_str())
        .unwrap_or("dataset")
        .to_owned();
    let temporary = directory.join(staging_name(&file_name));
    let manifest_json = serde_json::to_string(manifest).expect("a manifest serialises");
    let written = catch_unwind(AssertUnwindSafe(|| -> ServiceResult<()> {
        let mut file = File::create(&temporary).map_err(|e| storage_error("create", &temporary, e))?;
        #[cfg(test)]
        if inject_panic {
            panic!("injected failure inside the Parquet writer");
        }
        let started = std::time::Instant::now();
        ParquetWriter::new(&mut file)
            .with_compression(STORED_COMPRESSION)
            // Column statistics serve readers that skip row groups; the daemon reads whole
            // files, and computing them cost a tenth of the write.
            .with_statistics(StatisticsOptions::empty())
            .with_key_value_metadata(Some(KeyValueMetadata::from_static(vec![(
                MANIFEST_KEY.to_owned(),
                manifest_json,
            )])))
            .finish(frame)
            .map_err(|e| storage_error("write", &temporary, e))?;
        let written = started.elapsed();
        file.sync_all().map_err(|e| storage_error("flush", &temporary, e))?;
        tracing::debug!(
            dataset = %manifest.name,
            rows = frame.height(),
            encode_ms = written.as_secs_f64() * 1e3,
            fsync_ms = (started.elapsed() - written).as_secs_f64() * 1e3,
            "store write timings"
        );
        Ok(())
    }));
    let outcome = match written {
        Ok(result) => result,
        Err(panic) => {
            let what = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "no message".into());
            tracing::error!(file = %temporary.display(), panic = %what, "the Parquet writer panicked");
            Err(ServiceError::new(
                ErrorKind::StorageFailure,
                format!("writing dataset `{}` failed inside the Parquet writer: {what}", manifest.name),
            )
            .with_help("stored datasets are unchanged and the daemon serves on; retry, and report the data that caused it if it fails again"))
        }
    };
    match outcome {
        Ok(()) => Ok(Staged { temporary, target }),
        Err(error) => {
            let _ = std::fs::remove_file(&temporary);
            Err(error)
        }
    }
}

/// One staged file of a commit record, as file names inside the datasets directory.
#[derive(Debug, Serialize, Deserialize)]
struct RecordedRename {
    from: String,
    to: String,
}

#[derive(Debug, Serialize, Deserialize)]
struct CommitRecord {
    renames: Vec<RecordedRename>,
}

fn file_name_of(path: &Path) -> String {
    path.file_name().and_then(|n| n.to_str()).unwrap_or_default().to_owned()
}

/// Renames staged files into place: the commit. One file is committed by its own rename;
/// several by a commit record written before the first rename, so that a crash part-way
/// is finished at the next start rather than leaving some of the group behind.
pub fn commit(directory: &Path, staged: Vec<Staged>) -> ServiceResult<()> {
    if staged.len() == 1 {
        let one = staged.into_iter().next().expect("one staged file");
        if let Err(e) = std::fs::rename(&one.temporary, &one.target) {
            let error = storage_error("rename into", &one.target, e);
            one.discard();
            return Err(error);
        }
        sync_directory(directory);
        return Ok(());
    }
    let record = CommitRecord {
        renames: staged
            .iter()
            .map(|s| RecordedRename {
                from: file_name_of(&s.temporary),
                to: file_name_of(&s.target),
            })
            .collect(),
    };
    let record_path = directory.join(format!(
        "{RECORD_PREFIX}{}-{}.json",
        std::process::id(),
        STAGING_COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    let record_staging = directory.join(staging_name("commit.json"));
    let written = (|| -> std::io::Result<()> {
        let mut file = File::create(&record_staging)?;
        file.write_all(&serde_json::to_vec(&record).expect("a commit record serialises"))?;
        file.sync_all()?;
        std::fs::rename(&record_staging, &record_path)?;
        sync_directory(directory);
        Ok(())
    })();
    if let Err(e) = written {
        let _ = std::fs::remove_file(&record_staging);
        for one in staged {
            one.discard();
        }
        return Err(storage_error("write the commit record", &record_path, e));
    }
    // Past the commit point: a failing rename from here on is finished at the next start.
    let mut failure = None;
    for one in &staged {
        if let Err(e) = std::fs::rename(&one.temporary, &one.target) {
            failure.get_or_insert_with(|| storage_error("rename into", &one.target, e));
        }
    }
    sync_directory(directory);
    if let Some(error) = failure {
        return Err(error.with_help(
            "the datasets are committed on disk and appear after a restart; check the workspace's permissions",
        ));
    }
    let _ = std::fs::remove_file(&record_path);
    Ok(())
}

/// What the start-up sweep did: commit groups finished, unfinished files removed.
#[derive(Debug, Default, PartialEq)]
pub struct Sweep {
    pub rolled_forward: usize,
    pub removed: usize,
}

/// Finishes every commit record left by a crash, then removes what interrupted writes left
/// (staged files and records that name nothing). Nothing here was ever committed on its
/// own, so nothing here is reported as damage.
pub fn sweep(directory: &Path) -> std::io::Result<Sweep> {
    let mut sweep = Sweep::default();
    let mut names: Vec<String> = std::fs::read_dir(directory)?
        .filter_map(|e| e.ok())
        .filter_map(|e| e.file_name().to_str().map(str::to_owned))
        .collect();
    names.sort();
    for record_name in names.iter().filter(|n| n.starts_with(RECORD_PREFIX)) {
        let record_path = directory.join(record_name);
        let mut renamed = 0;
        let record: Option<CommitRecord> = std::fs::read(&record_path)
            .ok()
            .and_then(|bytes| serde_json::from_slice(&bytes).ok());
        if let Some(record) = record {
            for rename in &record.renames {
                // A record only ever names plain files of this directory; anything else
                // did not come from this daemon and is not followed.
                let plain = |n: &str| !n.contains(['/', '\\']) && n != ".." && n != ".";
                if !(plain(&rename.from) && plain(&rename.to) && rename.from.starts_with(STAGING_PREFIX)) {
                    continue;
                }
                let from = directory.join(&rename.from);
                if from.exists() && std::fs::rename(&from, directory.join(&rename.to)).is_ok() {
                    renamed += 1;
                }
            }
            if renamed > 0 {
                sweep.rolled_forward += 1;
            }
            sync_directory(directory);
        }
        // A record that names nothing left to rename is plain leftover of a finished commit.
        if std::fs::remove_file(&record_path).is_ok() && renamed == 0 {
            sweep.removed += 1;
        }
    }
    for name in names.iter().filter(|n| n.starts_with(STAGING_PREFIX)) {
        let path = directory.join(name);
        if path.exists() && std::fs::remove_file(&path).is_ok() {
            sweep.removed += 1;
        }
    }
    if sweep.removed > 0 || sweep.rolled_forward > 0 {
        sync_directory(directory);
    }
    Ok(sweep)
}

/// Reads a dataset file: its frame and, when present, the manifest from its footer.
pub fn read_dataset(path: &Path) -> Result<(DataFrame, Option<String>), String> {
    let file = File::open(path).map_err(|e| format!("{}: {e}", path.display()))?;
    let mut reader = ParquetReader::new(file);
    let manifest = reader
        .get_metadata()
        .map_err(|e| format!("Parquet unreadable: {e}"))?
        .key_value_metadata()
        .as_ref()
        .and_then(|pairs| pairs.iter().find(|kv| kv.key == MANIFEST_KEY))
        .and_then(|kv| kv.value.clone());
    let frame = reader.finish().map_err(|e| format!("Parquet unreadable: {e}"))?;
    Ok((frame, manifest))
}
