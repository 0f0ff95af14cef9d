//! The dataset store: polars DataFrames in memory, each persisted in the workspace as one
//! Parquet file that carries its own manifest (provenance included) in its footer.
//!
//! **Architecture Invariant.** A dataset is in memory only once its file is committed on
//! disk, and every dataset has one commit point, the rename of its file into place (see
//! [`disk`]): a crash leaves either the old dataset or the new one, whole and with its own
//! provenance. Datasets that belong together (an analysis's output and its summary) commit
//! as a group through a commit record. On start, groups a crash interrupted are finished,
//! files of unfinished writes are removed (logged once), and every committed file is loaded;
//! one that cannot be read is reported (logged and listed by `server.info`) and left
//! untouched on disk for a person to inspect, never deleted.
//!
//! Writers of different names run in parallel: each name has its own write lock, and the
//! map that readers use is locked only for the in-memory swap, never across a write or an
//! fsync. Locks ignore poisoning, and a panic inside the Parquet writer fails only its call.
//!
//! Writing is most of what the store costs (a file is written on every import and run, read
//! only at start): how a frame is encoded, and how a Parquet import keeps its source's own
//! bytes instead, is in [`disk`].
//!
//! Every stored table gets a version ([`Manifest::version`], from [`new_version`]) when it is
//! stored, kept in its manifest; an analysis output's provenance names the version of each
//! input it read (`input_versions`), so that a name dropped and stored again with other data
//! does not pass for what the output was computed from. A version is made once per write, at
//! no cost that grows with the table; it identifies the stored table, not its values.
//!
//! Layout: `<workspace>/datasets/<name>.parquet`. Workspaces of earlier versions kept the
//! manifest beside it as `<name>.json`; such pairs are migrated to the one-file form on load.
//! The migration rewrites the file with the manifest in its footer, then removes the JSON file;
//! a JSON file beside an already migrated dataset is stale and removed.
//!
//! # Files, commits and the start
//!
//! A write stages `.tmp-<pid>-<n>-<name>.parquet` in the datasets directory
//! ([`disk::STAGING_PREFIX`]), fsyncs it, renames it into place and fsyncs the directory; a
//! drop unlinks the one file. A group (an analysis's output and its `summary_output` table;
//! each pipeline step is one) stages every file, then writes a commit record
//! `.commit-<pid>-<n>.json` ([`disk::RECORD_PREFIX`]) naming the renames and renames it into
//! place (the group's commit point), then renames the files and removes the record. At start
//! the store sweeps the directory once: records are rolled forward, every other staged file and
//! stale record is removed, and one info line gives the count. Only committed files can be
//! reported as damaged (`server.info` `damaged_files`), and those are never deleted. Steps of a
//! pipeline that finished before a crash stay stored.
//!
//! The import hashes its source (SHA-256, for provenance) on a second thread while parsing it.
//! A replaced table is freed, and the allocator trimmed after a write or a replacement of 64
//! MiB or more (`LARGE_WRITE_BYTES`), off the request path; a `dataset.drop` still frees (and
//! trims) before it answers, or, when a call is still reading the table, that call does both
//! as it lets go of it.
//! Locks of different names are taken in sorted order for a group. A panic inside the Parquet
//! writer fails its call with `storage_failure` (5004), the staged file is removed, and the
//! store serves on.
//!
//! # Memory budget
//!
//! Stored tables count against a budget, `mobilisd --memory-budget 4GiB` ([`memory`]: binary
//! units `KiB` to `TiB` or `K` to `T`, decimal `kB` to `TB`, or bytes; default half of
//! `MemTotal`, else 8 GiB). An import or analysis output that would pass it is refused with
//! `resource_limit` (4009), saying what is stored and the budget; drop datasets or raise the
//! flag. `server.info` reports `memory: {stored_bytes, budget_bytes}`. After a drop or an
//! overwrite the daemon calls glibc's `malloc_trim(0)`, so freed table memory goes back to the
//! system instead of staying in the allocator's arenas.
//!
//! # Checks
//!
//! The unit tests (`cargo test -p mobilis-rpc --lib store`) cover the panic in the writer,
//! poisoned locks, migration and an interrupted group commit. The reliability checks
//! (`tests/tests/suite/reliability/store_crashes.rs`) run kill -9 rounds (12 by default, 200 with
//! `MOBILIS_SLOW_TESTS=1`): clients import, overwrite and drop, run `fixture.scale` with a
//! summary table and two-step pipelines, the daemon is killed at a random moment, and after
//! each restart every dataset must be the acknowledged or the in-flight version, its rows
//! matching the source file or factor its provenance names, output and summary of one run
//! together, with no leftover file and no damage (the seed is printed; `MOBILIS_CRASH_SEED`
//! repeats a run). They also measure RSS over three import-and-drop cycles of a million rows
//! and the refusal past `--memory-budget`.

pub mod disk;
mod manifest;
pub mod memory;

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use manifest::storage_error;
pub use manifest::{column_infos, new_version, ColumnInfo, Manifest, Provenance, MANIFEST_FORMAT};
use polars::prelude::*;
use serde::Serialize;
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex, MutexGuard, PoisonError, RwLock};

/// A stored dataset.
pub struct Dataset {
    pub frame: DataFrame,
    pub manifest: Manifest,
    /// Set by `dataset.drop`: whoever lets go of the dataset last (the store, or a call that
    /// was still reading it) frees it and gives the allocator's unused memory back, so that
    /// a drop returns the memory even when a reader held the table a moment longer.
    trim_when_freed: AtomicBool,
}

impl Dataset {
    pub fn new(frame: DataFrame, manifest: Manifest) -> Self {
        Dataset {
            frame,
            manifest,
            trim_when_freed: AtomicBool::new(false),
        }
    }
}

impl Drop for Dataset {
    fn drop(&mut self) {
        if *self.trim_when_freed.get_mut() {
            drop(std::mem::take(&mut self.frame));
            memory::return_freed_memory();
        }
    }
}

/// A workspace file that could not be loaded.
#[derive(Debug, Clone, Serialize)]
pub struct DamagedFile {
    pub file: String,
    pub reason: String,
}

pub struct DatasetStore {
    directory: PathBuf,
    /// What readers see. Locked only to look up or swap an entry, never across disk work.
    datasets: RwLock<BTreeMap<String, Arc<Dataset>>>,
    /// One write lock per dataset name, so that two writes of one name cannot interleave
    /// their renames while writes of different names proceed in parallel.
    name_locks: Mutex<HashMap<String, Arc<Mutex<()>>>>,
    /// Bytes of the stored tables plus those reserved by writes under way.
    stored_bytes: AtomicU64,
    budget_bytes: AtomicU64,
    damaged: Vec<DamagedFile>,
    /// Makes the next Parquet write panic, to test that the store survives it.
    #[cfg(test)]
    panic_in_next_write: std::sync::atomic::AtomicBool,
}

/// The write lock of one dataset name, held from the first check to the in-memory swap.
struct NameLock<'a> {
    store: &'a DatasetStore,
    name: String,
    lock: Arc<Mutex<()>>,
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

/// Locks a mutex whether or not an earlier holder panicked: every structure behind the
/// store's locks is changed by single assignments, so a panic cannot leave it half-changed.
fn lock<T>(mutex: &Mutex<T>) -> MutexGuard<'_, T> {
    mutex.lock().unwrap_or_else(PoisonError::into_inner)
}

/// The size of a table as the memory budget counts it.
fn table_bytes(frame: &DataFrame) -> u64 {
    frame.estimated_size() as u64
}

/// Bytes of tables written, or replaced, at once from which the allocator is trimmed after
/// the write.
const LARGE_WRITE_BYTES: u64 = 64 << 20;

/// A dataset to store with [`DatasetStore::insert_all`].
pub struct NewDataset {
    pub name: String,
    pub frame: DataFrame,
    pub provenance: Provenance,
    /// The bytes of a Parquet file that `frame` was decoded from with nothing changed. When
    /// given, the stored file is these bytes with the manifest added to the footer (see
    /// [`disk::stage_dataset`]); encoding the frame again would only cost time.
    pub parquet_source: Option<Vec<u8>>,
}

impl DatasetStore {
    /// Opens (creating if needed) a workspace and loads every dataset in it, with the
    /// default memory budget ([`memory::default_budget`]).
    pub fn open(workspace: &Path) -> std::io::Result<Self> {
        let directory = workspace.join("datasets");
        std::fs::create_dir_all(&directory)?;
        let mut store = DatasetStore {
            directory,
            datasets: RwLock::new(BTreeMap::new()),
            name_locks: Mutex::new(HashMap::new()),
            stored_bytes: AtomicU64::new(0),
            budget_bytes: AtomicU64::new(memory::default_budget()),
            damaged: Vec::new(),
            #[cfg(test)]
            panic_in_next_write: std::sync::atomic::AtomicBool::new(false),
        };
        store.reload()?;
        Ok(store)
    }

    /// Sets the memory budget for stored tables (`--memory-budget`). Tables stored already
    /// stay; while they exceed the budget, new ones are refused.
    pub fn set_memory_budget(&self, bytes: u64) {
        self.budget_bytes.store(bytes, Ordering::Relaxed);
        let stored = self.stored_bytes.load(Ordering::Relaxed);
        if stored > bytes {
            tracing::warn!(
                stored = %memory::human_bytes(stored),
                budget = %memory::human_bytes(bytes),
                "the stored datasets exceed the memory budget; imports are refused until some are dropped"
            );
        }
    }

    /// Bytes held by stored tables, and the budget.
    pub fn memory_usage(&self) -> (u64, u64) {
        (
            self.stored_bytes.load(Ordering::Relaxed),
            self.budget_bytes.load(Ordering::Relaxed),
        )
    }

    fn reload(&mut self) -> std::io::Result<()> {
        let sweep = disk::sweep(&self.directory)?;
        if sweep.removed > 0 || sweep.rolled_forward > 0 {
            tracing::info!(
                removed = sweep.removed,
                finished_commits = sweep.rolled_forward,
                "cleaned up after interrupted writes"
            );
        }
        let mut entries: Vec<PathBuf> = std::fs::read_dir(&self.directory)?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .collect();
        // Dataset files first, manifests of earlier versions after: whether such a manifest
        // is stale depends on whether its dataset file loaded.
        entries.sort_by_key(|path| (path.extension().is_some_and(|e| e == "json"), path.clone()));
        let mut loaded = BTreeMap::new();
        let mut damaged = Vec::new();
        let mut migrated = 0;
        for path in &entries {
            let file_name = path.file_name().and_then(|n| n.to_str()).unwrap_or("").to_owned();
            if let Some(name) = file_name.strip_suffix(".parquet") {
                if file_name.starts_with('.') {
                    continue;
                }
                match self.load_one(name) {
                    Ok((dataset, was_legacy)) => {
                        migrated += usize::from(was_legacy);
                        loaded.insert(name.to_owned(), Arc::new(dataset));
                    }
                    Err(reason) => damaged.push(DamagedFile {
                        file: path.display().to_string(),
                        reason,
                    }),
                }
            } else if let Some(name) = file_name.strip_suffix(".json") {
                if file_name.starts_with('.') {
                    continue;
                }
                let parquet = self.directory.join(format!("{name}.parquet"));
                if loaded.contains_key(name) {
                    // Manifest of an earlier version whose dataset is now one file (a
                    // migration stopped after its commit): the footer is the truth.
                    let _ = std::fs::remove_file(path);
                } else if !parquet.exists() {
                    damaged.push(DamagedFile {
                        file: path.display().to_string(),
                        reason: "manifest of an earlier workspace version without its Parquet file".into(),
                    });
                }
            }
        }
        for file in &damaged {
            tracing::warn!(file = %file.file, reason = %file.reason, "workspace file skipped");
        }
        if migrated > 0 {
            tracing::info!(datasets = migrated, "migrated to one file per dataset");
        }
        tracing::info!(datasets = loaded.len(), damaged = damaged.len(), "workspace loaded");
        let bytes = loaded.values().map(|d: &Arc<Dataset>| table_bytes(&d.frame)).sum();
        self.stored_bytes = AtomicU64::new(bytes);
        self.datasets = RwLock::new(loaded);
        self.damaged = damaged;
        Ok(())
    }

    /// Loads one committed dataset file; true when it was in the two-file form of earlier
    /// versions and has just been migrated.
    fn load_one(&self, name: &str) -> Result<(Dataset, bool), String> {
        let parquet = self.directory.join(format!("{name}.parquet"));
        let (frame, footer) = disk::read_dataset(&parquet)?;
        let legacy_path = self.directory.join(format!("{name}.json"));
        let (manifest_text, legacy) = match footer {
            Some(text) => (text, false),
            None => match std::fs::read_to_string(&legacy_path) {
                Ok(text) => (text, true),
                Err(_) => return Err("Parquet file without a manifest".into()),
            },
        };
        let manifest: Manifest =
            serde_json::from_str(&manifest_text).map_err(|e| format!("manifest unreadable: {e}"))?;
        if manifest.format != MANIFEST_FORMAT {
            return Err(format!("manifest format {} is not {MANIFEST_FORMAT}", manifest.format));
        }
        if manifest.name != name {
            return Err(format!("manifest names `{}` but the file is `{name}`", manifest.name));
        }
        if frame.height() != manifest.rows || column_infos(&frame) != manifest.columns {
            return Err(format!(
                "Parquet file holds {} rows and columns {:?}, the manifest says {} rows and {:?}",
                frame.height(),
                column_infos(&frame).iter().map(|c| &c.name).collect::<Vec<_>>(),
                manifest.rows,
                manifest.columns.iter().map(|c| &c.name).collect::<Vec<_>>()
            ));
        }
        if legacy {
            // One file, one rename: the footer now carries the manifest, then the old
            // manifest goes. A crash between the two leaves a stale manifest that the next
            // start removes, since the footer's copy wins. A workspace that cannot be
            // written (read-only, full) keeps its two files and still loads.
            let migrated = disk::stage_dataset(&self.directory, parquet, &frame, &manifest, None, false)
                .and_then(|staged| disk::commit(&self.directory, vec![staged]));
            match migrated {
                Ok(()) => {
                    let _ = std::fs::remove_file(&legacy_path);
                    disk::sync_directory(&self.directory);
                }
                Err(error) => {
                    tracing::warn!(dataset = name, error = %error.message, "kept in the two-file form of earlier versions");
                    return Ok((Dataset::new(frame, manifest), false));
                }
            }
        }
        Ok((Dataset::new(frame, manifest), legacy))
    }

    pub fn directory(&self) -> &Path {
        &self.directory
    }

    pub fn damaged(&self) -> &[DamagedFile] {
        &self.damaged
    }

    fn read_map(&self) -> std::sync::RwLockReadGuard<'_, BTreeMap<String, Arc<Dataset>>> {
        self.datasets.read().unwrap_or_else(PoisonError::into_inner)
    }

    fn write_map(&self) -> std::sync::RwLockWriteGuard<'_, BTreeMap<String, Arc<Dataset>>> {
        self.datasets.write().unwrap_or_else(PoisonError::into_inner)
    }

    pub fn get(&self, name: &str) -> ServiceResult<Arc<Dataset>> {
        self.read_map()
            .get(name)
            .cloned()
            .ok_or_else(|| ServiceError::unknown_dataset(name))
    }

    pub fn contains(&self, name: &str) -> bool {
        self.read_map().contains_key(name)
    }

    pub fn list(&self) -> Vec<Arc<Dataset>> {
        self.read_map().values().cloned().collect()
    }

    /// Takes the write locks of `names` in sorted order, so that two groups of names can
    /// never wait for each other.
    fn lock_names(&self, names: &[&str]) -> Vec<NameLock<'_>> {
        let mut sorted: Vec<&str> = names.to_vec();
        sorted.sort_unstable();
        sorted.dedup();
        sorted
            .into_iter()
            .map(|name| {
                let lock = lock(&self.name_locks).entry(name.to_owned()).or_default().clone();
                NameLock {
                    store: self,
                    name: name.to_owned(),
                    lock,
                }
            })
            .collect()
    }

    /// Reserves `adding` bytes of the budget, counting `freeing` bytes that the same write
    /// releases (an overwrite). The reservation is atomic so that parallel writers of
    /// different names cannot together pass the budget.
    fn reserve(&self, adding: u64, freeing: u64) -> ServiceResult<()> {
        let budget = self.budget_bytes.load(Ordering::Relaxed);
        self.stored_bytes
            .fetch_update(Ordering::SeqCst, Ordering::SeqCst, |stored| {
                (stored.saturating_sub(freeing).saturating_add(adding) <= budget).then(|| stored + adding)
            })
            .map(|_| ())
            .map_err(|stored| {
                ServiceError::new(
                    ErrorKind::ResourceLimit,
                    format!(
                        "storing {} more would pass the memory budget: stored tables hold {} of {}",
                        memory::human_bytes(adding.saturating_sub(freeing)),
                        memory::human_bytes(stored),
                        memory::human_bytes(budget)
                    ),
                )
                .with_help("drop datasets that are no longer needed (dataset.drop), or start mobilisd with a larger --memory-budget")
            })
    }

    fn release(&self, bytes: u64) {
        let _ = self
            .stored_bytes
            .fetch_update(Ordering::SeqCst, Ordering::SeqCst, |s| Some(s.saturating_sub(bytes)));
    }

    /// Persists and stores a dataset. Refuses to replace an existing one unless `overwrite`.
    pub fn insert(
        &self,
        name: &str,
        frame: DataFrame,
        provenance: Provenance,
        overwrite: bool,
    ) -> ServiceResult<Arc<Dataset>> {
        let mut stored = self.insert_all(
            vec![NewDataset {
                name: name.to_owned(),
                frame,
                provenance,
                parquet_source: None,
            }],
            overwrite,
        )?;
        Ok(stored.remove(0))
    }

    /// Persists and stores several datasets as one commit: after a crash at any moment,
    /// either all of them are stored or none is (old versions stay). Refuses to replace
    /// existing ones unless `overwrite`.
    pub fn insert_all(&self, items: Vec<NewDataset>, overwrite: bool) -> ServiceResult<Vec<Arc<Dataset>>> {
        if items.is_empty() {
            return Ok(Vec::new());
        }
        for (index, item) in items.iter().enumerate() {
            validate_name(&item.name)?;
            if items[..index].iter().any(|earlier| earlier.name == item.name) {
                return Err(ServiceError::invalid_params(format!(
                    "dataset `{}` is named twice in one write",
                    item.name
                )));
            }
            if item.frame.width() == 0 {
                return Err(ServiceError::new(
                    ErrorKind::InvalidData,
                    format!("dataset `{}` would have no columns", item.name),
                ));
            }
        }
        let names: Vec<&str> = items.iter().map(|i| i.name.as_str()).collect();
        let locks = self.lock_names(&names);
        let _guards: Vec<MutexGuard<'_, ()>> = locks.iter().map(|l| lock(&l.lock)).collect();
        let replaced: Vec<Arc<Dataset>> = {
            let map = self.read_map();
            items.iter().filter_map(|i| map.get(&i.name).cloned()).collect()
        };
        if let (false, Some(existing)) = (overwrite, replaced.first()) {
            return Err(ServiceError::new(
                ErrorKind::DatasetExists,
                format!("a dataset named `{}` exists already", existing.manifest.name),
            )
            .with_help("choose another name, drop the old dataset, or pass overwrite: true"));
        }
        let created = utc_timestamp(std::time::SystemTime::now());
        let mut prepared: Vec<(DataFrame, Manifest, Option<Vec<u8>>)> = items
            .into_iter()
            .map(|item| {
                let mut frame = item.frame;
                // One chunk per column, so that a plugin gets each column as one Arrow
                // array; a decoded Parquet file comes as one chunk per row group. Copied on
                // this thread: copies made on polars' pool landed in allocator arenas that
                // did not give their memory back after a drop.
                frame.rechunk_mut();
                let manifest = Manifest {
                    format: MANIFEST_FORMAT,
                    name: item.name,
                    rows: frame.height(),
                    columns: column_infos(&frame),
                    created: created.clone(),
                    version: Some(new_version()),
                    provenance: item.provenance,
                };
                (frame, manifest, item.parquet_source)
            })
            .collect();
        let adding: u64 = prepared.iter().map(|(frame, _, _)| table_bytes(frame)).sum();
        let freeing: u64 = replaced.iter().map(|d| table_bytes(&d.frame)).sum();
        self.reserve(adding, freeing)?;
        let committed = self.write_files(&mut prepared);
        if let Err(error) = committed {
            self.release(adding);
            return Err(error);
        }
        let stored: Vec<Arc<Dataset>> = prepared
            .into_iter()
            .map(|(frame, manifest, _)| Arc::new(Dataset::new(frame, manifest)))
            .collect();
        {
            let mut map = self.write_map();
            for dataset in &stored {
                map.insert(dataset.manifest.name.clone(), dataset.clone());
            }
        }
        self.release(freeing);
        // A replaced table is freed off the request path. After a large write or a large
        // replacement, so is what it leaves in the allocator: the buffers that decoding a
        // file or running an analysis freed just before, which glibc keeps unless trimmed,
        // so that the next call (an analysis of this very table, say) starts from the
        // table's own size. A small replacement (an analysis writing its output again) leaves
        // the allocator as it is: trimming there handed back the pages that the next call
        // faulted in again, a million-reading `hall.reduce` a fifth slower in the daemon
        // than alone.
        let large = adding >= LARGE_WRITE_BYTES || freeing >= LARGE_WRITE_BYTES;
        if large || !replaced.is_empty() {
            memory::free_in_background(replaced, large);
        }
        Ok(stored)
    }

    /// Stages every file, then commits them together; nothing is left behind on failure.
    fn write_files(&self, prepared: &mut [(DataFrame, Manifest, Option<Vec<u8>>)]) -> ServiceResult<()> {
        let mut staged = Vec::with_capacity(prepared.len());
        for (frame, manifest, source) in prepared.iter_mut() {
            #[cfg(test)]
            let inject = self.panic_in_next_write.swap(false, Ordering::SeqCst);
            #[cfg(not(test))]
            let inject = false;
            let target = self.directory.join(format!("{}.parquet", manifest.name));
            let written = disk::stage_dataset(&self.directory, target, frame, manifest, source.as_deref(), inject);
            // The source's bytes are not needed past its write: give them back before the
            // next file of the group and the commit.
            *source = None;
            match written {
                Ok(one) => staged.push(one),
                Err(error) => {
                    for one in staged {
                        one.discard();
                    }
                    return Err(error);
                }
            }
        }
        disk::commit(&self.directory, staged)
    }

    /// Removes a dataset from memory and disk: one unlink is its commit point.
    pub fn remove(&self, name: &str) -> ServiceResult<()> {
        let locks = self.lock_names(&[name]);
        let _guard = lock(&locks[0].lock);
        if !self.contains(name) {
            return Err(ServiceError::unknown_dataset(name));
        }
        let path = self.directory.join(format!("{name}.parquet"));
        std::fs::remove_file(&path).map_err(|e| storage_error("remove", &path, e))?;
        disk::sync_directory(&self.directory);
        let removed = self.write_map().remove(name);
        if let Some(dataset) = removed {
            self.release(table_bytes(&dataset.frame));
            // Here, not in the background: whoever drops a dataset expects its memory back
            // when the call answers. When this is the last reference, the dataset is freed
            // and the allocator trimmed right here; when a call is still reading it, that
            // call does both as it lets go.
            dataset.trim_when_freed.store(true, Ordering::Release);
            drop(dataset);
        }
        Ok(())
    }
}

impl Drop for NameLock<'_> {
    /// Forgets a name's lock once nobody else holds or waits for it, so that the lock table
    /// does not grow with every name ever written. Runs after the guard is released; the
    /// check and removal happen under the table's lock, where new waiters take their copy.
    fn drop(&mut self) {
        let mut table = lock(&self.store.name_locks);
        if Arc::strong_count(&self.lock) == 2 {
            table.remove(&self.name);
        }
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

    fn inline(name: &str, frame: DataFrame) -> NewDataset {
        NewDataset {
            name: name.into(),
            frame,
            provenance: provenance(),
            parquet_source: None,
        }
    }

    fn listing(directory: &Path) -> Vec<String> {
        let mut names: Vec<String> = std::fs::read_dir(directory)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }

    #[test]
    fn a_dataset_is_one_file_with_its_manifest_in_the_footer() {
        let workspace = tempfile::tempdir().unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        store
            .insert("wafer", df!("x" => [1.0, 2.0, 3.0]).unwrap(), provenance(), false)
            .unwrap();
        assert_eq!(listing(store.directory()), ["wafer.parquet"]);
        let (frame, footer) = disk::read_dataset(&store.directory().join("wafer.parquet")).unwrap();
        let manifest: Manifest = serde_json::from_str(&footer.expect("a manifest in the footer")).unwrap();
        assert_eq!((manifest.name.as_str(), manifest.rows, frame.height()), ("wafer", 3, 3));
        store.remove("wafer").unwrap();
        assert!(listing(store.directory()).is_empty(), "a drop removes the one file");
    }

    #[test]
    fn a_panic_in_the_writer_fails_that_call_and_the_store_serves_on() {
        let workspace = tempfile::tempdir().unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        store
            .insert("kept", df!("x" => [1]).unwrap(), provenance(), false)
            .unwrap();
        store.panic_in_next_write.store(true, Ordering::SeqCst);
        let error = store
            .insert("kept", df!("x" => [7, 8]).unwrap(), provenance(), true)
            .err()
            .expect("the write is refused");
        assert_eq!(error.kind, ErrorKind::StorageFailure, "{error:?}");
        assert!(error.message.contains("injected failure"), "{}", error.message);
        // The old version is untouched, nothing is left behind, and writes work again.
        assert_eq!(store.get("kept").unwrap().frame.height(), 1);
        assert_eq!(listing(store.directory()), ["kept.parquet"]);
        store
            .insert("next", df!("x" => [1, 2]).unwrap(), provenance(), false)
            .unwrap();
        store
            .insert("kept", df!("x" => [3, 4, 5]).unwrap(), provenance(), true)
            .unwrap();
        store.remove("next").unwrap();
        let reopened = DatasetStore::open(workspace.path()).unwrap();
        assert_eq!(reopened.get("kept").unwrap().frame.height(), 3);
        assert!(reopened.damaged().is_empty());
    }

    #[test]
    fn a_poisoned_lock_does_not_stop_later_writes() {
        let workspace = tempfile::tempdir().unwrap();
        let store = Arc::new(DatasetStore::open(workspace.path()).unwrap());
        let poisoner = store.clone();
        // A thread that panics while holding both the map lock and a name lock.
        let _ = std::thread::spawn(move || {
            let locks = poisoner.lock_names(&["held"]);
            let _name = locks[0].lock.lock().unwrap();
            let _map = poisoner.datasets.write().unwrap();
            panic!("a writer panicked while holding the store's locks");
        })
        .join();
        assert!(store.datasets.is_poisoned());
        store
            .insert("held", df!("x" => [1]).unwrap(), provenance(), false)
            .unwrap();
        assert_eq!(store.list().len(), 1);
        store.remove("held").unwrap();
    }

    #[test]
    fn two_file_workspaces_are_migrated_on_load() {
        let workspace = tempfile::tempdir().unwrap();
        let directory = workspace.path().join("datasets");
        std::fs::create_dir_all(&directory).unwrap();
        // The layout of earlier versions: plain Parquet plus a JSON manifest beside it.
        let mut frame = df!("temperature_K" => [10.0, 20.0]).unwrap();
        ParquetWriter::new(std::fs::File::create(directory.join("old.parquet")).unwrap())
            .finish(&mut frame)
            .unwrap();
        let manifest = Manifest {
            format: MANIFEST_FORMAT,
            name: "old".into(),
            rows: 2,
            columns: column_infos(&frame),
            created: "2025-01-01T00:00:00Z".into(),
            version: None,
            provenance: Provenance::File {
                path: "/data/old.csv".into(),
                format: "csv".into(),
                units: BTreeMap::new(),
                rename: BTreeMap::new(),
                csv: None,
                sha256: None,
                size_bytes: None,
                modified: None,
            },
        };
        std::fs::write(directory.join("old.json"), serde_json::to_vec(&manifest).unwrap()).unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        assert!(store.damaged().is_empty(), "{:?}", store.damaged());
        assert_eq!(store.get("old").unwrap().manifest.provenance, manifest.provenance);
        assert_eq!(listing(&directory), ["old.parquet"]);
        // A stale manifest beside a migrated file (a migration stopped before removing it)
        // is removed and does not override the footer.
        std::fs::write(directory.join("old.json"), b"{\"stale\": true}").unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        assert!(store.damaged().is_empty(), "{:?}", store.damaged());
        assert_eq!(store.get("old").unwrap().manifest.created, "2025-01-01T00:00:00Z");
        assert_eq!(listing(&directory), ["old.parquet"]);
    }

    #[test]
    fn an_interrupted_group_commit_is_finished_and_leftovers_removed() {
        let workspace = tempfile::tempdir().unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        let directory = store.directory().to_owned();
        store
            .insert("output", df!("x" => [1]).unwrap(), provenance(), false)
            .unwrap();
        // Stage a group as a killed daemon would have left it: both files written, the
        // commit record in place, only the first rename done.
        let mut staged = Vec::new();
        for (name, rows) in [("output", 3), ("summary", 1)] {
            let frame = DataFrame::new(rows, vec![Column::new("x".into(), vec![1i32; rows])]).unwrap();
            let manifest = Manifest {
                format: MANIFEST_FORMAT,
                name: name.into(),
                rows,
                columns: column_infos(&frame),
                created: "2026-01-01T00:00:00Z".into(),
                version: None,
                provenance: provenance(),
            };
            let target = directory.join(format!("{name}.parquet"));
            staged.push(disk::stage_dataset(&directory, target, &frame, &manifest, None, false).unwrap());
        }
        let record = serde_json::json!({"renames": staged.iter().map(|s| serde_json::json!({
            "from": s.temporary.file_name().unwrap().to_str().unwrap(),
            "to": s.target.file_name().unwrap().to_str().unwrap(),
        })).collect::<Vec<_>>()});
        std::fs::write(directory.join(".commit-1-1.json"), record.to_string()).unwrap();
        std::fs::rename(&staged[0].temporary, &staged[0].target).unwrap();
        // And the leftovers of writes that never reached their commit point.
        std::fs::write(directory.join(".tmp-99-0-lost.parquet"), b"half a file").unwrap();
        std::fs::write(directory.join(".commit-2-2.json"), b"{\"renames\": []}").unwrap();
        drop(store);
        let store = DatasetStore::open(workspace.path()).unwrap();
        assert!(store.damaged().is_empty(), "{:?}", store.damaged());
        assert_eq!(store.get("output").unwrap().frame.height(), 3);
        assert_eq!(store.get("summary").unwrap().frame.height(), 1);
        assert_eq!(listing(&directory), ["output.parquet", "summary.parquet"]);
    }

    #[test]
    fn groups_commit_together_and_the_budget_refuses_what_does_not_fit() {
        let workspace = tempfile::tempdir().unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        let stored = store
            .insert_all(
                vec![
                    inline("out", df!("x" => [1.0; 1000]).unwrap()),
                    inline("out.summary", df!("y" => [2.0]).unwrap()),
                ],
                false,
            )
            .unwrap();
        assert_eq!(stored.len(), 2);
        assert_eq!(listing(store.directory()), ["out.parquet", "out.summary.parquet"]);
        let (stored_bytes, _) = store.memory_usage();
        assert!(stored_bytes >= 8000, "{stored_bytes}");
        store.set_memory_budget(stored_bytes + 4000);
        let error = store
            .insert("big", df!("x" => [1.0; 1000]).unwrap(), provenance(), false)
            .err()
            .expect("the write is refused");
        assert_eq!(error.kind, ErrorKind::ResourceLimit);
        assert!(error.help.as_deref().unwrap().contains("--memory-budget"), "{error:?}");
        assert!(!store.contains("big") && !store.directory().join("big.parquet").exists());
        // An overwrite counts what it frees; a drop gives its bytes back.
        store
            .insert("out", df!("x" => [1.0; 1200]).unwrap(), provenance(), true)
            .unwrap();
        store.remove("out").unwrap();
        assert!(store.memory_usage().0 < 1000, "{:?}", store.memory_usage());
        store
            .insert("big", df!("x" => [1.0; 1000]).unwrap(), provenance(), false)
            .unwrap();
    }

    #[test]
    fn writes_of_different_names_run_in_parallel() {
        let workspace = tempfile::tempdir().unwrap();
        let store = Arc::new(DatasetStore::open(workspace.path()).unwrap());
        // Hold one name's write lock: writes of other names and reads go on meanwhile.
        let locks = store.lock_names(&["busy"]);
        let _held = locks[0].lock.lock().unwrap();
        let other = store.clone();
        std::thread::spawn(move || {
            other
                .insert("free", df!("x" => [1]).unwrap(), provenance(), false)
                .unwrap();
        })
        .join()
        .unwrap();
        // Readers do not wait for a writer either.
        assert!(store.contains("free") && store.get("free").is_ok() && store.list().len() == 1);
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
    fn every_stored_table_gets_its_own_version_which_a_restart_keeps() {
        let workspace = tempfile::tempdir().unwrap();
        let store = DatasetStore::open(workspace.path()).unwrap();
        let frame = df!("x" => [1.0, 2.0]).unwrap();
        let version_of = |store: &DatasetStore| store.get("t").unwrap().manifest.version.clone().unwrap();
        store.insert("t", frame.clone(), provenance(), false).unwrap();
        let first = version_of(&store);
        assert!(
            first.len() == 32 && first.chars().all(|c| c.is_ascii_hexdigit()),
            "{first}"
        );
        // The same values stored again are another stored table.
        store.insert("t", frame, provenance(), true).unwrap();
        let second = version_of(&store);
        assert_ne!(first, second);
        drop(store);
        assert_eq!(version_of(&DatasetStore::open(workspace.path()).unwrap()), second);
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
