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
//!
//! **How a file is written.** A frame is encoded by [`write_parquet`]: numeric columns in plain
//! encoding (no dictionary tries, which cost more time than they save bytes on measurements),
//! text and categorical columns dictionary-encoded, the column chunks of a row group encoded and
//! compressed in parallel, then written in order through one buffer. Row groups hold about
//! 8 MiB each, and the disk is set to work on each as soon as it is written (Linux
//! `sync_file_range`, from a thread beside the writer) while the next is encoded, so the
//! `fsync` that makes the file durable waits for the last stretch only (an analysis's
//! 62,500-row output: 2 ms instead of 11). Only one row group's encoded pages are held at a
//! time, so writing a large table costs little memory beyond the table. A Parquet import
//! whose decoded frame is stored unchanged keeps the source file's bytes
//! instead of encoding them again ([`stage_dataset`], [`footer_with_entry`]): the data pages
//! stay as they are and only the footer is rewritten with the manifest added, so the stored file
//! reads back to the very frame the import decoded.
//!
//! Files are compressed with LZ4 (Parquet's `LZ4_RAW`) and written without column statistics
//! ([`STORED_COMPRESSION`]): a file is written on every import and run but read only at start,
//! and this halves the encoding time of the zstd default for a few percent more bytes. A
//! column chunk whose first page LZ4 would shrink by less than a tenth (noisy measured values)
//! is stored uncompressed ([`chunk_codec`]), which saves the compression's time for a few
//! percent more bytes of that column. Files written by earlier versions (zstd) load as
//! before. A kept Parquet import stays in its source's own codec; bytes that cannot be taken
//! apart are encoded as usual.

use super::manifest::{storage_error, Manifest};
use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use polars::io::parquet::write::{ParquetCompression, StatisticsOptions};
use polars::prelude::*;
use polars_arrow::datatypes::{ArrowSchema, PhysicalType as ArrowPhysicalType};
use polars_parquet::parquet::page::Page;
use polars_parquet::write::{
    array_to_columns, compress, fallible_streaming_iterator, get_dtype_encoding, schema_to_metadata_key,
    CompressedPage, CompressionOptions, DynIter, DynStreamingIterator, Encoding, FileWriter, KeyValue, Version,
    WriteOptions,
};
use polars_parquet_format::thrift::protocol::{TCompactInputProtocol, TCompactOutputProtocol};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::fs::File;
use std::io::{BufWriter, Write};
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
/// disk. `source`, when given, is a Parquet file that `frame` was decoded from unchanged:
/// it is written with the manifest added to its footer instead of encoding `frame` (one
/// that cannot be taken apart is ignored and `frame` encoded). A panic inside the Parquet
/// writer fails this write only: it is caught here so that no lock a caller holds is
/// poisoned and the staged file is removed.
pub fn stage_dataset(
    directory: &Path,
    target: PathBuf,
    frame: &DataFrame,
    manifest: &Manifest,
    source: Option<&[u8]>,
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
        // A source kept as it is when its footer can be rewritten; encoded otherwise.
        let kept = source.and_then(|bytes| footer_with_entry(bytes, MANIFEST_KEY, &manifest_json).map(|f| (bytes, f)));
        let form = if kept.is_some() { "source kept" } else { "encoded" };
        match kept {
            Some((bytes, (data_end, footer))) => {
                file.write_all(&bytes[..data_end])
                    .and_then(|()| file.write_all(&footer))
                    .map_err(|e| storage_error("write", &temporary, e))?;
            }
            None => {
                write_parquet(&mut file, frame, manifest_json).map_err(|e| storage_error("write", &temporary, e))?
            }
        }
        let written = started.elapsed();
        file.sync_all().map_err(|e| storage_error("flush", &temporary, e))?;
        tracing::debug!(
            dataset = %manifest.name,
            rows = frame.height(),
            form,
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

/// The most rows per row group of a stored file, polars' own default (512 x 512): large
/// enough that per-group costs vanish, small enough that one group's encoded pages are
/// little memory.
const ROW_GROUP_ROWS: usize = 512 * 512;

/// The in-memory bytes a row group holds at most (the fewest rows being
/// [`SMALLEST_ROW_GROUP_ROWS`]): a wide table is cut into several groups so that the first
/// ones are on their way to the disk ([`WritebackFile`]) while the next are encoded, and the
/// final fsync waits for the last group only. Groups of about 8 MiB cost nothing
/// measurable against larger ones: the columns of each are still encoded in parallel.
const ROW_GROUP_BYTES: usize = 8 << 20;
const SMALLEST_ROW_GROUP_ROWS: usize = 4096;

/// Rows per row group for a frame of `height` rows and `bytes` in memory (see
/// [`ROW_GROUP_BYTES`]).
fn row_group_rows(height: usize, bytes: usize) -> usize {
    let bytes_per_row = bytes.div_ceil(height.max(1)).max(1);
    (ROW_GROUP_BYTES / bytes_per_row).clamp(SMALLEST_ROW_GROUP_ROWS, ROW_GROUP_ROWS)
}

/// Bytes written before the operating system is asked to start writing them to the disk.
const WRITEBACK_BYTES: u64 = 2 << 20;

/// A staged file that has the kernel start writing its pages to the disk as they are
/// written, every [`WRITEBACK_BYTES`] (Linux `sync_file_range` with
/// `SYNC_FILE_RANGE_WRITE`, which promises no durability), from a thread of its own, since
/// the call may wait for the disk's queue: the disk works while the next row group is
/// encoded, and the `fsync` that makes the file durable, unchanged, has only the tail left
/// to wait for. Elsewhere a plain file.
struct WritebackFile<'a> {
    file: &'a mut File,
    written: u64,
    started: u64,
    ranges: Option<std::sync::mpsc::Sender<(u64, u64)>>,
}

impl Write for WritebackFile<'_> {
    fn write(&mut self, buffer: &[u8]) -> std::io::Result<usize> {
        let written = self.file.write(buffer)?;
        self.written += written as u64;
        if self.written - self.started >= WRITEBACK_BYTES {
            if let Some(ranges) = &self.ranges {
                let _ = ranges.send((self.started, self.written - self.started));
            }
            self.started = self.written;
        }
        Ok(written)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.file.flush()
    }
}

/// Runs `write` on a [`WritebackFile`] of `file`, with the thread that starts the writeback
/// beside it on Linux.
fn with_writeback<T>(file: &mut File, write: impl FnOnce(WritebackFile<'_>) -> T) -> T {
    #[cfg(target_os = "linux")]
    {
        use std::os::fd::AsRawFd;
        let descriptor = file.as_raw_fd();
        let (sender, receiver) = std::sync::mpsc::channel::<(u64, u64)>();
        std::thread::scope(|scope| {
            scope.spawn(move || {
                for (offset, length) in receiver {
                    // A hint: its failure (a file system without it) changes only the timing.
                    // SAFETY: the descriptor stays open until the scope ends (the file is
                    // borrowed for it), and the range lies within what was written.
                    unsafe {
                        libc::sync_file_range(
                            descriptor,
                            offset as libc::off64_t,
                            length as libc::off64_t,
                            libc::SYNC_FILE_RANGE_WRITE,
                        );
                    }
                }
            });
            write(WritebackFile {
                file,
                written: 0,
                started: 0,
                ranges: Some(sender),
            })
        })
    }
    #[cfg(not(target_os = "linux"))]
    {
        write(WritebackFile {
            file,
            written: 0,
            started: 0,
            ranges: None,
        })
    }
}

/// The encoding of each leaf column: plain for numbers, polars' choice (dictionary) for
/// text, binary and categorical columns. Measured values rarely repeat, so a dictionary
/// try on them (a cardinality estimate, and a hash of every value when it looks worth it)
/// costs time on every write for bytes that LZ4 mostly saves anyway.
fn stored_encodings(schema: &ArrowSchema) -> Vec<Vec<Encoding>> {
    schema
        .iter_values()
        .map(|field| {
            let numeric = matches!(field.dtype.to_physical_type(), ArrowPhysicalType::Primitive(_));
            get_dtype_encoding(&field.dtype)
                .into_iter()
                .map(|encoding| match encoding {
                    Encoding::RleDictionary if numeric => Encoding::Plain,
                    other => other,
                })
                .collect()
        })
        .collect()
}

/// Encodes `frame` as one Parquet file into `file` (Apache Parquet format, version 1 data
/// pages, [`STORED_COMPRESSION`], no statistics: the daemon reads whole files, and
/// computing them cost a tenth of the write), with polars' Arrow schema and the manifest in
/// the footer's key-value metadata, so that polars reads back the same dtypes (categorical
/// included). Row groups are written one after another; within one, the column chunks are
/// encoded and compressed in parallel.
pub fn write_parquet(file: &mut File, frame: &DataFrame, manifest_json: String) -> PolarsResult<()> {
    let schema = frame.schema().to_arrow(CompatLevel::newest());
    let options = WriteOptions {
        statistics: StatisticsOptions::empty(),
        compression: CompressionOptions::from(STORED_COMPRESSION),
        version: Version::V1,
        data_page_size: None,
    };
    with_writeback(file, |file| {
        write_row_groups(file, frame, schema, options, manifest_json)
    })
}

/// The body of [`write_parquet`], on the staged file.
fn write_row_groups(
    file: WritebackFile<'_>,
    frame: &DataFrame,
    schema: ArrowSchema,
    options: WriteOptions,
    manifest_json: String,
) -> PolarsResult<()> {
    let encodings = stored_encodings(&schema);
    let height = frame.height();
    let group_rows = row_group_rows(height, frame.estimated_size());
    let mut writer = FileWriter::try_new(BufWriter::with_capacity(1 << 20, file), schema, options)?;
    let fields = writer.parquet_schema().fields().to_vec();
    let mut offset = 0;
    while offset < height {
        let length = group_rows.min(height - offset);
        let group = frame.slice(offset as i64, length);
        for batch in group.iter_chunks(CompatLevel::newest(), false) {
            if batch.is_empty() {
                continue;
            }
            let columns: Vec<Vec<Vec<CompressedPage>>> = batch
                .columns()
                .par_iter()
                .zip(&fields)
                .zip(&encodings)
                .map(|((array, parquet_type), encoding)| {
                    array_to_columns(array, parquet_type.clone(), options, encoding)?
                        .into_iter()
                        .map(|pages| {
                            // One codec for a column chunk (the format's rule), chosen on its first page.
                            let mut codec = None;
                            pages
                                .map(|page| {
                                    let page = page?;
                                    let codec = *codec.get_or_insert_with(|| chunk_codec(&page, options.compression));
                                    compress(page, Vec::new(), codec).map_err(PolarsError::from)
                                })
                                .collect::<PolarsResult<Vec<CompressedPage>>>()
                        })
                        .collect::<PolarsResult<Vec<_>>>()
                })
                .collect::<PolarsResult<Vec<_>>>()?;
            let leaves = columns.iter().flatten().map(|pages| {
                Ok(DynStreamingIterator::new(fallible_streaming_iterator::convert(
                    pages.iter().map(Ok::<_, PolarsError>),
                )))
            });
            writer.write(batch.len() as u64, DynIter::new(leaves))?;
        }
        offset += length;
    }
    let key_value = vec![
        schema_to_metadata_key(writer.schema()),
        KeyValue {
            key: MANIFEST_KEY.to_owned(),
            value: Some(manifest_json),
        },
    ];
    writer.end(Some(key_value))?;
    writer.into_inner().flush()?;
    Ok(())
}

/// The bytes from the middle of a column chunk's first data page that [`chunk_codec`]
/// tries to compress.
const CODEC_PROBE_BYTES: usize = 8 << 10;

/// A column chunk whose probe compresses to more than this share of its size is stored
/// uncompressed.
const INCOMPRESSIBLE_SHARE: f64 = 0.9;

/// The codec of one column chunk, chosen on its first page: `stored` unless
/// [`CODEC_PROBE_BYTES`] from the middle of a data page compress to more than
/// [`INCOMPRESSIBLE_SHARE`] of their size, when the chunk is stored uncompressed (a page too
/// small to probe keeps `stored`). Measured values in plain encoding
/// (an analysis's uncertainties, say) have noisy low bytes that LZ4 barely shrinks, and
/// compressing them was about a quarter of an analysis output's encoding; columns that
/// repeat (contacts, setpoints, flags, dictionaries) still compress. Readers take each
/// chunk's codec from its own metadata (Apache Parquet format, `ColumnMetaData.codec`).
fn chunk_codec(page: &Page, stored: CompressionOptions) -> CompressionOptions {
    let Page::Data(data) = page else {
        return stored;
    };
    let buffer = data.buffer();
    if matches!(stored, CompressionOptions::Uncompressed) || buffer.len() < 2 * CODEC_PROBE_BYTES {
        return stored;
    }
    // The page's middle, past its levels and any run at its start.
    let middle = buffer.len() / 2 - CODEC_PROBE_BYTES / 2;
    let probe = &buffer[middle..middle + CODEC_PROBE_BYTES];
    let mut compressed = Vec::with_capacity(CODEC_PROBE_BYTES + 64);
    match polars_parquet::parquet::compression::compress(stored, probe, &mut compressed) {
        Ok(()) if (compressed.len() as f64) <= INCOMPRESSIBLE_SHARE * probe.len() as f64 => stored,
        Ok(()) => CompressionOptions::Uncompressed,
        Err(_) => stored,
    }
}

/// Takes a Parquet file apart at its footer and sets `key` to `value` in the footer's
/// key-value metadata. Returns where the file's data ends (everything before the footer,
/// kept byte for byte) and the new footer with its length and closing magic; `None` for
/// bytes that are not a plain Parquet file (an encrypted footer, say).
///
/// Layout (Apache Parquet format, "File Format"): `PAR1`, the column chunks, the
/// `FileMetaData` in Thrift's compact protocol, its length as 4-byte little-endian, `PAR1`.
/// Column chunks are located by absolute offsets in the metadata, so they stay valid as
/// long as everything before the footer is unchanged, which it is.
pub fn footer_with_entry(bytes: &[u8], key: &str, value: &str) -> Option<(usize, Vec<u8>)> {
    const MAGIC: &[u8; 4] = b"PAR1";
    let size = bytes.len();
    if size < 12 || &bytes[..4] != MAGIC || &bytes[size - 4..] != MAGIC {
        return None;
    }
    let footer_length = u32::from_le_bytes(bytes[size - 8..size - 4].try_into().ok()?) as usize;
    let footer_start = size.checked_sub(8 + footer_length).filter(|start| *start >= 4)?;
    let footer = &bytes[footer_start..size - 8];
    // The bound on what the decoder may allocate, as polars' own footer reader sets it.
    let mut input = TCompactInputProtocol::new(footer, footer_length * 2 + 1024);
    let mut metadata = polars_parquet_format::FileMetaData::read_from_in_protocol(&mut input).ok()?;
    if metadata.encryption_algorithm.is_some() {
        return None;
    }
    let mut pairs = metadata.key_value_metadata.take().unwrap_or_default();
    pairs.retain(|pair| pair.key != key);
    pairs.push(polars_parquet_format::KeyValue {
        key: key.to_owned(),
        value: Some(value.to_owned()),
    });
    metadata.key_value_metadata = Some(pairs);
    let mut written = Vec::with_capacity(footer_length + value.len() + 64);
    metadata
        .write_to_out_protocol(&mut TCompactOutputProtocol::new(&mut written))
        .ok()?;
    let length = u32::try_from(written.len()).ok()?;
    written.extend_from_slice(&length.to_le_bytes());
    written.extend_from_slice(MAGIC);
    Some((footer_start, written))
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
    // The files the renames replace keep a name of their own until the commit is done.
    let replaced: Vec<SetAside> = staged
        .iter()
        .filter_map(|one| set_aside(directory, &one.target))
        .collect();
    let committed = commit_renames(directory, staged);
    if !replaced.is_empty() {
        super::memory::free_in_background(replaced, false);
    }
    committed
}

/// A committed file that a commit replaces, under a second name ([`STAGING_PREFIX`], so a
/// start after a crash sweeps it): the rename that replaces the first name then leaves the
/// file's blocks and cached pages to this name's removal, which the commit does off the
/// caller's path. Freeing them took the rename 5.6 ms for an analysis's 62,500-row output,
/// a sixth of storing it. Dropping this removes the name.
struct SetAside(PathBuf);

impl Drop for SetAside {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}

/// Gives `target` a second name if it exists (a hard link, on the same file system by
/// construction); `None` when it does not or the link fails, in which case the rename
/// frees the file as before.
fn set_aside(directory: &Path, target: &Path) -> Option<SetAside> {
    let aside = directory.join(staging_name("replaced"));
    std::fs::hard_link(target, &aside).ok().map(|()| SetAside(aside))
}

/// The renames of [`commit`] and the record that makes several of them one commit.
fn commit_renames(directory: &Path, staged: Vec<Staged>) -> ServiceResult<()> {
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::manifest::{column_infos, Provenance, MANIFEST_FORMAT};

    fn manifest_of(name: &str, frame: &DataFrame) -> Manifest {
        Manifest {
            format: MANIFEST_FORMAT,
            name: name.into(),
            rows: frame.height(),
            columns: column_infos(frame),
            created: "2026-01-01T00:00:00Z".into(),
            version: None,
            provenance: Provenance::Inline {
                units: Default::default(),
            },
        }
    }

    /// Every column kind a dataset holds, with nulls, over more rows than one row group.
    fn mixed_frame(rows: usize) -> DataFrame {
        let index: Vec<i64> = (0..rows as i64).collect();
        let field: Vec<Option<f64>> = (0..rows)
            .map(|i| (i % 97 != 5).then(|| (i as f64 * 0.37).sin() * 14.0))
            .collect();
        let setpoint: Vec<f64> = (0..rows).map(|i| 2.0 + (i / 16 % 625) as f64 * 0.5).collect();
        let sample: Vec<Option<String>> = (0..rows)
            .map(|i| (i % 1013 != 7).then(|| format!("wafer-{:03}", i / 10_000)))
            .collect();
        let flag: Vec<Option<bool>> = (0..rows).map(|i| (i % 11 != 0).then_some(i % 3 == 0)).collect();
        let count: Vec<Option<i32>> = (0..rows).map(|i| (i % 5 != 0).then_some(i as i32 % 40)).collect();
        df!(
            "index" => index,
            "field_T" => field,
            "temperature_K" => setpoint,
            "sample" => sample,
            "good" => flag,
            "count" => count,
        )
        .unwrap()
    }

    fn assert_same(read: &DataFrame, written: &DataFrame) {
        assert_eq!(read.schema(), written.schema());
        assert!(read.equals_missing(written), "{read:?}\n{written:?}");
    }

    #[test]
    fn an_encoded_file_reads_back_to_the_same_frame() {
        let directory = tempfile::tempdir().unwrap();
        for rows in [0, 1, 1000, ROW_GROUP_ROWS + 1234] {
            let frame = mixed_frame(rows);
            let manifest = manifest_of("mixed", &frame);
            let target = directory.path().join("mixed.parquet");
            let staged = stage_dataset(directory.path(), target.clone(), &frame, &manifest, None, false).unwrap();
            commit(directory.path(), vec![staged]).unwrap();
            let (read, footer) = read_dataset(&target).unwrap();
            assert_same(&read, &frame);
            let footer: Manifest = serde_json::from_str(&footer.unwrap()).unwrap();
            assert_eq!((footer.rows, footer.columns), (rows, column_infos(&frame)));
            // The largest frame holds more than ROW_GROUP_BYTES: several row groups, each
            // of the rows row_group_rows gives but the last.
            let groups = ParquetReader::new(File::open(&target).unwrap())
                .get_metadata()
                .unwrap()
                .row_groups
                .iter()
                .map(|group| group.num_rows())
                .collect::<Vec<_>>();
            let per_group = row_group_rows(rows, frame.estimated_size());
            assert_eq!(groups.len(), rows.div_ceil(per_group), "{rows} rows: {groups:?}");
            assert!(
                groups.iter().rev().skip(1).all(|&group| group == per_group),
                "{groups:?}"
            );
        }
    }

    #[test]
    fn a_replaced_file_is_set_aside_and_removed_after_the_commit() {
        let directory = tempfile::tempdir().unwrap();
        let target = directory.path().join("mixed.parquet");
        let first = mixed_frame(100);
        let second = mixed_frame(200);
        for frame in [&first, &second] {
            let manifest = manifest_of("mixed", frame);
            let staged = stage_dataset(directory.path(), target.clone(), frame, &manifest, None, false).unwrap();
            commit(directory.path(), vec![staged]).unwrap();
        }
        assert_same(&read_dataset(&target).unwrap().0, &second);
        // The first file's second name goes on a thread of its own; a start would sweep it.
        let leftovers = || {
            std::fs::read_dir(directory.path())
                .unwrap()
                .map(|entry| entry.unwrap().file_name().into_string().unwrap())
                .filter(|name| name.starts_with(STAGING_PREFIX))
                .collect::<Vec<_>>()
        };
        let deadline = std::time::Instant::now() + std::time::Duration::from_secs(30);
        while !leftovers().is_empty() && std::time::Instant::now() < deadline {
            std::thread::sleep(std::time::Duration::from_millis(10));
        }
        assert_eq!(leftovers(), Vec::<String>::new());
        // Set aside and not removed (a crash in between): the start-up sweep removes it.
        let aside = set_aside(directory.path(), &target).unwrap();
        let name = aside.0.clone();
        std::mem::forget(aside);
        assert!(name.exists());
        sweep(directory.path()).unwrap();
        assert!(!name.exists() && target.exists());
        assert_same(&read_dataset(&target).unwrap().0, &second);
    }

    #[test]
    fn noisy_measurements_are_stored_uncompressed_and_repeating_columns_compressed() {
        let directory = tempfile::tempdir().unwrap();
        let rows = 50_000;
        // A noisy value (an uncertainty, say: every bit of its mantissa varies) beside a
        // setpoint that repeats and a count.
        let mut state = 0x2545_f491_4f6c_dd1d_u64;
        let noisy: Vec<f64> = (0..rows)
            .map(|_| {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                1e-3 * (1.0 + (state >> 11) as f64 / (1u64 << 53) as f64)
            })
            .collect();
        let setpoint: Vec<f64> = (0..rows).map(|i| 2.0 + (i / 16 % 625) as f64 * 0.5).collect();
        let count: Vec<i64> = (0..rows as i64).map(|i| 16 + i % 2).collect();
        let frame = df!("noisy" => noisy, "setpoint_K" => setpoint, "count" => count).unwrap();
        let target = directory.path().join("codecs.parquet");
        let manifest = manifest_of("codecs", &frame);
        let staged = stage_dataset(directory.path(), target.clone(), &frame, &manifest, None, false).unwrap();
        commit(directory.path(), vec![staged]).unwrap();
        assert_same(&read_dataset(&target).unwrap().0, &frame);
        let metadata = ParquetReader::new(File::open(&target).unwrap())
            .get_metadata()
            .unwrap()
            .clone();
        for group in &metadata.row_groups {
            let codecs: Vec<_> = group
                .parquet_columns()
                .iter()
                .map(|column| column.compression())
                .collect();
            assert_eq!(
                codecs,
                [
                    polars_parquet::parquet::compression::Compression::Uncompressed,
                    polars_parquet::parquet::compression::Compression::Lz4Raw,
                    polars_parquet::parquet::compression::Compression::Lz4Raw
                ]
            );
        }
    }

    #[test]
    fn a_row_group_holds_about_row_group_bytes_within_its_bounds() {
        // 400 bytes a row (an analysis's wide output): 8 MiB / 400 rows.
        assert_eq!(row_group_rows(62_500, 62_500 * 400), (8 << 20) / 400);
        // Narrow rows reach polars' default, very wide ones the smallest group.
        assert_eq!(row_group_rows(1_000_000, 8_000_000), ROW_GROUP_ROWS);
        assert_eq!(row_group_rows(10_000, 10_000 * 100_000), SMALLEST_ROW_GROUP_ROWS);
        // No rows, or no bytes, divide by nothing.
        assert_eq!(row_group_rows(0, 0), ROW_GROUP_ROWS);
    }

    #[test]
    fn a_kept_source_reads_back_to_the_frame_it_decoded_to() {
        let directory = tempfile::tempdir().unwrap();
        // A source as another program writes it: zstd, statistics, dictionaries, its own
        // footer entries, and a manifest of another workspace that must be replaced.
        let mut source_frame = mixed_frame(ROW_GROUP_ROWS + 77);
        let mut bytes = Vec::new();
        ParquetWriter::new(&mut bytes)
            .with_key_value_metadata(Some(polars::io::parquet::write::KeyValueMetadata::from_static(vec![
                ("origin".to_owned(), "a lab script".to_owned()),
                (MANIFEST_KEY.to_owned(), "{\"stale\": true}".to_owned()),
            ])))
            .finish(&mut source_frame)
            .unwrap();
        let decoded = ParquetReader::new(std::io::Cursor::new(&bytes[..])).finish().unwrap();
        let manifest = manifest_of("kept", &decoded);
        let target = directory.path().join("kept.parquet");
        let staged = stage_dataset(
            directory.path(),
            target.clone(),
            &decoded,
            &manifest,
            Some(&bytes),
            false,
        )
        .unwrap();
        commit(directory.path(), vec![staged]).unwrap();
        let stored = std::fs::read(&target).unwrap();
        let (data_end, _) = footer_with_entry(&bytes, MANIFEST_KEY, "x").unwrap();
        assert_eq!(
            &stored[..data_end],
            &bytes[..data_end],
            "the data pages are kept byte for byte"
        );
        let (read, footer) = read_dataset(&target).unwrap();
        assert_same(&read, &decoded);
        let footer: Manifest = serde_json::from_str(&footer.unwrap()).unwrap();
        assert_eq!(footer.name, "kept");
        let metadata = ParquetReader::new(File::open(&target).unwrap())
            .get_metadata()
            .unwrap()
            .clone();
        let pairs = metadata.key_value_metadata().clone().unwrap();
        assert!(pairs.iter().any(|kv| kv.key == "origin"));
        assert_eq!(pairs.iter().filter(|kv| kv.key == MANIFEST_KEY).count(), 1);
    }

    #[test]
    fn bytes_that_are_not_plain_parquet_are_encoded_instead() {
        for junk in [
            &b""[..],
            b"PAR1",
            b"PAR1\x00\x00\x00\x00PAR1",
            b"PAR1garbage\xff\xff\x00\x00PAR1",
        ] {
            assert!(footer_with_entry(junk, MANIFEST_KEY, "x").is_none(), "{junk:?}");
        }
        let directory = tempfile::tempdir().unwrap();
        let frame = mixed_frame(100);
        let manifest = manifest_of("junk", &frame);
        let target = directory.path().join("junk.parquet");
        let staged = stage_dataset(
            directory.path(),
            target.clone(),
            &frame,
            &manifest,
            Some(b"PAR1 not a file PAR1"),
            false,
        )
        .unwrap();
        commit(directory.path(), vec![staged]).unwrap();
        assert_same(&read_dataset(&target).unwrap().0, &frame);
    }

    #[test]
    fn files_of_earlier_versions_in_zstd_still_load() {
        let directory = tempfile::tempdir().unwrap();
        let mut frame = mixed_frame(5000);
        let manifest = serde_json::to_string(&manifest_of("old", &frame)).unwrap();
        let path = directory.path().join("old.parquet");
        ParquetWriter::new(File::create(&path).unwrap())
            .with_compression(ParquetCompression::Zstd(None))
            .with_key_value_metadata(Some(polars::io::parquet::write::KeyValueMetadata::from_static(vec![(
                MANIFEST_KEY.to_owned(),
                manifest.clone(),
            )])))
            .finish(&mut frame)
            .unwrap();
        let (read, footer) = read_dataset(&path).unwrap();
        assert_same(&read, &frame);
        assert_eq!(footer.unwrap(), manifest);
    }
}
