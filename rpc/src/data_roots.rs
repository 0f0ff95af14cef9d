//! Where path imports and exports may read and write.
//!
//! A JSON-RPC client names files on the daemon's machine, so every path is resolved to
//! its canonical form (following `..` and every symlink) and must then lie inside one of
//! the data roots: by default the directory the daemon started in, plus each `--data-root`.
//! A path that escapes, directly or through a symlink, is refused.
//!
//! The workspace is the daemon's alone, whatever the roots say: a root that contains it
//! (the start directory is often its parent) still cannot reach into it. A path is refused
//! when its canonical form lies in the workspace, when one of its directories is the
//! workspace under another name (a bind mount: same device and inode), or, for reads, when
//! the file is a hard link to a workspace file. A root inside the workspace is dropped.
//!
//! Exports never write into an existing file. They write a temporary file in the target
//! directory, fsync it and rename it into place (rename is atomic, POSIX `rename()`), all
//! relative to a handle on that directory opened and checked before, so that swapping a
//! directory for a symlink during the call cannot redirect the write. Without `overwrite`
//! the rename refuses to replace anything (Linux `renameat2` with `RENAME_NOREPLACE`, or
//! POSIX `link()`, which fails with `EEXIST`), so a file that appears meanwhile is kept.
//!
//! Refusals are error 4006 (`path_refused`). The checks are repeated on the file or directory
//! as opened (its path from `/proc/self/fd`), so a directory swapped for a symlink between the
//! check and the open is caught too; a root inside the workspace is dropped at start with a
//! warning. The temporary file of an export is `.NAME.PID-N.partial`; an existing file is
//! replaced only with `overwrite: true` (`mobilis export --overwrite`), otherwise the call
//! fails with 4008 naming `overwrite`.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use std::ffi::CString;
use std::fs::File;
use std::os::unix::ffi::OsStrExt;
use std::os::unix::fs::MetadataExt;
use std::os::unix::io::{AsRawFd, FromRawFd};
use std::path::{Component, Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// A directory the daemon keeps to itself, by path and by identity.
#[derive(Debug, Clone)]
struct PrivateDir {
    path: PathBuf,
    device: u64,
    inode: u64,
}

#[derive(Debug, Clone)]
pub struct DataRoots {
    /// Canonical root directories; relative paths resolve against the first.
    roots: Vec<PathBuf>,
    /// The workspace: never read or written through a path, even inside a root.
    private: Option<PrivateDir>,
}

/// Temporary export files get a number unique within the process.
static NEXT_TEMPORARY: AtomicU64 = AtomicU64::new(0);

impl DataRoots {
    /// Canonicalises each root; roots that do not exist are skipped with a warning.
    pub fn new(roots: impl IntoIterator<Item = PathBuf>) -> Self {
        let mut canonical = Vec::new();
        for root in roots {
            match root.canonicalize() {
                Ok(path) if !canonical.contains(&path) => canonical.push(path),
                Ok(_) => {}
                Err(error) => tracing::warn!(root = %root.display(), %error, "data root skipped"),
            }
        }
        DataRoots {
            roots: canonical,
            private: None,
        }
    }

    /// Keeps imports and exports out of `workspace`: roots inside it are dropped (with a
    /// warning), and paths into it are refused from now on.
    pub fn keeping_out(mut self, workspace: &Path) -> Self {
        let Ok(path) = workspace.canonicalize() else {
            tracing::warn!(workspace = %workspace.display(), "the workspace cannot be resolved; paths are checked against its name only");
            self.private = Some(PrivateDir {
                path: workspace.to_owned(),
                device: u64::MAX,
                inode: u64::MAX,
            });
            return self;
        };
        let metadata = std::fs::metadata(&path).ok();
        let private = PrivateDir {
            device: metadata.as_ref().map_or(u64::MAX, |m| m.dev()),
            inode: metadata.as_ref().map_or(u64::MAX, |m| m.ino()),
            path,
        };
        self.roots.retain(|root| {
            let inside = root.starts_with(&private.path);
            if inside {
                tracing::warn!(root = %root.display(), "data root skipped: it lies inside the workspace, which is the daemon's alone");
            }
            !inside
        });
        self.private = Some(private);
        self
    }

    pub fn roots(&self) -> &[PathBuf] {
        &self.roots
    }

    fn refused(&self, path: &Path, why: &str) -> ServiceError {
        let roots: Vec<String> = self.roots.iter().map(|r| r.display().to_string()).collect();
        ServiceError::new(ErrorKind::PathRefused, format!("{} {why}", path.display())).with_help(format!(
            "use a path inside one of the data roots ({}) or start the daemon with --data-root",
            roots.join(", ")
        ))
    }

    fn refused_private(&self, path: &Path, why: &str) -> ServiceError {
        ServiceError::new(ErrorKind::PathRefused, format!("{} {why}", path.display()))
            .with_param("path")
            .with_help("the workspace holds the daemon's own files and is never read or written through a path; export the dataset to a file outside it, or use dataset.rows")
    }

    fn absolute(&self, path: &Path) -> PathBuf {
        if path.is_absolute() {
            path.to_owned()
        } else {
            self.roots
                .first()
                .map(|root| root.join(path))
                .unwrap_or_else(|| path.to_owned())
        }
    }

    fn inside(&self, canonical: &Path) -> bool {
        self.roots.iter().any(|root| canonical.starts_with(root))
    }

    /// Whether a canonical path is the workspace or lies in it, by name or, through a bind
    /// mount or another name of the same directory, by identity of one of its ancestors.
    fn in_workspace(&self, canonical: &Path) -> bool {
        let Some(private) = &self.private else {
            return false;
        };
        if canonical.starts_with(&private.path) {
            return true;
        }
        canonical.ancestors().any(|ancestor| {
            std::fs::metadata(ancestor).is_ok_and(|m| m.dev() == private.device && m.ino() == private.inode)
        })
    }

    /// Whether `metadata` describes a file of the workspace reached through a hard link.
    fn hard_link_into_workspace(&self, metadata: &std::fs::Metadata) -> bool {
        let Some(private) = &self.private else {
            return false;
        };
        // A file with one name cannot also be named in the workspace; most files end here.
        if metadata.nlink() < 2 || metadata.dev() != private.device {
            return false;
        }
        let mut directories = vec![private.path.clone()];
        while let Some(directory) = directories.pop() {
            let Ok(entries) = std::fs::read_dir(&directory) else {
                continue;
            };
            for entry in entries.flatten() {
                let Ok(found) = entry.metadata() else { continue };
                if found.is_dir() {
                    directories.push(entry.path());
                } else if found.ino() == metadata.ino() && found.dev() == metadata.dev() {
                    return true;
                }
            }
        }
        false
    }

    /// Resolves a file to read: it must exist and resolve inside a root, outside the workspace.
    pub fn readable(&self, path: &Path) -> ServiceResult<PathBuf> {
        self.open_readable(path).map(|(canonical, _)| canonical)
    }

    /// [`Self::readable`], and the file opened. The checks are repeated on what was opened
    /// (its path as the kernel reports it, its identity), so that a symlink swapped in
    /// between the check and the open is caught.
    pub fn open_readable(&self, path: &Path) -> ServiceResult<(PathBuf, File)> {
        let absolute = self.absolute(path);
        let canonical = absolute.canonicalize().map_err(|error| {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("cannot open {}: {error}", path.display()),
            )
            .with_help("check the path; relative paths are resolved against the daemon's first data root")
        })?;
        self.check_readable(path, &canonical)?;
        let file = File::open(&canonical).map_err(|error| {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("cannot open {}: {error}", path.display()),
            )
        })?;
        if let Some(opened) = opened_path(&file) {
            if opened != canonical {
                self.check_readable(path, &opened)?;
            }
        }
        let metadata = file.metadata().map_err(|error| {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("cannot read {}: {error}", path.display()),
            )
        })?;
        if !metadata.is_file() {
            return Err(ServiceError::new(
                ErrorKind::FileProblem,
                format!("{} is not a file", path.display()),
            ));
        }
        if self.hard_link_into_workspace(&metadata) {
            return Err(self.refused_private(path, "is a hard link to a file of the workspace"));
        }
        Ok((canonical, file))
    }

    fn check_readable(&self, path: &Path, canonical: &Path) -> ServiceResult<()> {
        if self.in_workspace(canonical) {
            return Err(self.refused_private(path, "lies in the daemon's workspace"));
        }
        if !self.inside(canonical) {
            return Err(self.refused(path, "lies outside the data roots"));
        }
        if !canonical.is_file() {
            return Err(ServiceError::new(
                ErrorKind::FileProblem,
                format!("{} is not a file", path.display()),
            ));
        }
        Ok(())
    }

    /// Resolves a file to write: its directory must exist inside a root and outside the
    /// workspace, its name must be a plain file name, and an existing file there must not be
    /// a link leading out.
    pub fn writable(&self, path: &Path) -> ServiceResult<PathBuf> {
        let absolute = self.absolute(path);
        let file_name = match absolute.components().next_back() {
            Some(Component::Normal(name)) => name.to_owned(),
            _ => return Err(self.refused(path, "does not end in a file name")),
        };
        let parent = absolute
            .parent()
            .ok_or_else(|| self.refused(path, "has no directory"))?;
        let canonical_parent = parent.canonicalize().map_err(|error| {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("cannot use directory {}: {error}", parent.display()),
            )
            .with_help("create the directory first; exports do not create directories")
        })?;
        self.check_directory(path, &canonical_parent)?;
        let target = canonical_parent.join(file_name);
        if self.in_workspace(&target) {
            return Err(self.refused_private(path, "is the daemon's workspace"));
        }
        if let Ok(metadata) = std::fs::symlink_metadata(&target) {
            if metadata.file_type().is_symlink() {
                let resolved = target
                    .canonicalize()
                    .map_err(|_| self.refused(path, "is a dangling symlink"))?;
                if self.in_workspace(&resolved) {
                    return Err(self.refused_private(path, "is a symlink into the daemon's workspace"));
                }
                if !self.inside(&resolved) {
                    return Err(self.refused(path, "is a symlink leading outside the data roots"));
                }
            } else if metadata.is_dir() {
                return Err(ServiceError::new(
                    ErrorKind::FileProblem,
                    format!("{} is a directory", path.display()),
                ));
            }
        }
        Ok(target)
    }

    fn check_directory(&self, path: &Path, canonical_directory: &Path) -> ServiceResult<()> {
        if self.in_workspace(canonical_directory) {
            return Err(self.refused_private(path, "lies in the daemon's workspace"));
        }
        if !self.inside(canonical_directory) {
            return Err(self.refused(path, "lies outside the data roots"));
        }
        Ok(())
    }

    /// Writes a file at `path` atomically: `write` fills a temporary file in the target
    /// directory, which is then synced and renamed into place inside `commit` (the caller's
    /// last chance to refuse, for example when its deadline has passed). An existing file is
    /// replaced only with `overwrite`. Returns the canonical path written.
    pub fn place(
        &self,
        path: &Path,
        overwrite: bool,
        write: impl FnOnce(&mut File) -> ServiceResult<()>,
        commit: impl FnOnce(&mut dyn FnMut() -> ServiceResult<()>) -> ServiceResult<()>,
    ) -> ServiceResult<PathBuf> {
        let target = self.writable(path)?;
        let exists_error = || {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("{} exists already; it was left as it is", path.display()),
            )
            .with_param("overwrite")
            .with_help("pass overwrite: true to replace it, or choose another file name")
        };
        if !overwrite && std::fs::symlink_metadata(&target).is_ok() {
            return Err(exists_error());
        }
        let directory_path = target.parent().expect("a target has a directory");
        let name = target.file_name().expect("a target has a file name");
        let directory = open_directory(directory_path).map_err(|error| {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("cannot use directory {}: {error}", directory_path.display()),
            )
        })?;
        // Checked again on the directory as opened: everything below is relative to it.
        if let Some(opened) = opened_path(&directory) {
            self.check_directory(path, &opened)?;
        }
        let write_error = |error: &dyn std::fmt::Display| {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("cannot write {}: {error}", path.display()),
            )
        };
        let temporary = format!(
            ".{}.{}-{}.partial",
            name.to_string_lossy(),
            std::process::id(),
            NEXT_TEMPORARY.fetch_add(1, Ordering::Relaxed)
        );
        let temporary_c = CString::new(temporary.as_bytes()).map_err(|e| write_error(&e))?;
        let name_c = CString::new(name.as_bytes()).map_err(|_| self.refused(path, "holds a NUL byte"))?;
        let mut file = create_in(&directory, &temporary_c).map_err(|e| write_error(&e))?;
        let placed = (|| {
            write(&mut file)?;
            file.sync_all().map_err(|e| write_error(&e))?;
            drop(file);
            let mut rename = || -> ServiceResult<()> {
                match rename_in(&directory, &temporary_c, &name_c, overwrite) {
                    Ok(()) => Ok(()),
                    Err(error) if error.kind() == std::io::ErrorKind::AlreadyExists => Err(exists_error()),
                    Err(error) => Err(write_error(&error)),
                }
            };
            commit(&mut rename)?;
            // The rename is durable once the directory is (POSIX fsync of the directory).
            let _ = directory.sync_all();
            Ok(())
        })();
        if placed.is_err() {
            // SAFETY: unlinkat with a valid directory descriptor and a NUL-terminated name.
            unsafe { libc::unlinkat(directory.as_raw_fd(), temporary_c.as_ptr(), 0) };
        }
        placed.map(|_| target)
    }
}

/// The path the kernel holds for an open file (Linux `/proc/self/fd`); None elsewhere.
fn opened_path(file: &File) -> Option<PathBuf> {
    std::fs::read_link(format!("/proc/self/fd/{}", file.as_raw_fd())).ok()
}

fn open_directory(path: &Path) -> std::io::Result<File> {
    use std::os::unix::fs::OpenOptionsExt;
    std::fs::OpenOptions::new()
        .read(true)
        .custom_flags(libc::O_DIRECTORY | libc::O_CLOEXEC)
        .open(path)
}

/// Creates a new file in `directory` (never an existing one, never through a symlink).
fn create_in(directory: &File, name: &CString) -> std::io::Result<File> {
    // SAFETY: openat with a valid directory descriptor and a NUL-terminated name; the
    // returned descriptor is owned by the File from here on.
    let fd = unsafe {
        libc::openat(
            directory.as_raw_fd(),
            name.as_ptr(),
            libc::O_WRONLY | libc::O_CREAT | libc::O_EXCL | libc::O_NOFOLLOW | libc::O_CLOEXEC,
            0o644 as libc::c_uint,
        )
    };
    if fd < 0 {
        return Err(std::io::Error::last_os_error());
    }
    Ok(unsafe { File::from_raw_fd(fd) })
}

/// Renames `from` to `to` inside `directory`; without `overwrite`, fails with
/// `AlreadyExists` rather than replace anything, even a file created a moment ago.
fn rename_in(directory: &File, from: &CString, to: &CString, overwrite: bool) -> std::io::Result<()> {
    let fd = directory.as_raw_fd();
    if overwrite {
        // SAFETY: renameat with valid descriptors and NUL-terminated names.
        if unsafe { libc::renameat(fd, from.as_ptr(), fd, to.as_ptr()) } != 0 {
            return Err(std::io::Error::last_os_error());
        }
        return Ok(());
    }
    #[cfg(target_os = "linux")]
    {
        const RENAME_NOREPLACE: libc::c_uint = 1;
        // SAFETY: the renameat2 system call with valid descriptors and NUL-terminated names.
        let status = unsafe {
            libc::syscall(
                libc::SYS_renameat2,
                fd,
                from.as_ptr(),
                fd,
                to.as_ptr(),
                RENAME_NOREPLACE,
            )
        };
        if status == 0 {
            return Ok(());
        }
        let error = std::io::Error::last_os_error();
        // File systems without the flag answer EINVAL; old kernels ENOSYS. Fall back to link.
        if !matches!(error.raw_os_error(), Some(libc::EINVAL) | Some(libc::ENOSYS)) {
            return Err(error);
        }
    }
    // POSIX link() refuses an existing name with EEXIST; then the temporary name goes.
    // SAFETY: linkat and unlinkat with valid descriptors and NUL-terminated names.
    if unsafe { libc::linkat(fd, from.as_ptr(), fd, to.as_ptr(), 0) } != 0 {
        return Err(std::io::Error::last_os_error());
    }
    unsafe { libc::unlinkat(fd, from.as_ptr(), 0) };
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_are_refused_and_inside_paths_accepted() {
        let outside = tempfile::tempdir().unwrap();
        let root = tempfile::tempdir().unwrap();
        std::fs::write(root.path().join("in.csv"), "a\n1\n").unwrap();
        std::fs::write(outside.path().join("secret.csv"), "a\n1\n").unwrap();
        std::os::unix::fs::symlink(outside.path().join("secret.csv"), root.path().join("link.csv")).unwrap();
        std::os::unix::fs::symlink(outside.path(), root.path().join("door")).unwrap();
        let roots = DataRoots::new([root.path().to_owned()]);

        assert!(roots.readable(Path::new("in.csv")).is_ok());
        assert!(roots.readable(&root.path().join("in.csv")).is_ok());
        let kind = |r: ServiceResult<PathBuf>| r.unwrap_err().kind;
        assert_eq!(
            kind(roots.readable(&outside.path().join("secret.csv"))),
            ErrorKind::PathRefused
        );
        assert_eq!(
            kind(
                roots.readable(
                    &root
                        .path()
                        .join("../")
                        .join(outside.path().file_name().unwrap())
                        .join("secret.csv")
                )
            ),
            ErrorKind::PathRefused
        );
        assert_eq!(kind(roots.readable(Path::new("link.csv"))), ErrorKind::PathRefused);
        assert_eq!(
            kind(roots.readable(Path::new("door/secret.csv"))),
            ErrorKind::PathRefused
        );

        assert!(roots.writable(Path::new("out.csv")).is_ok());
        assert_eq!(kind(roots.writable(Path::new("link.csv"))), ErrorKind::PathRefused);
        assert_eq!(kind(roots.writable(Path::new("door/new.csv"))), ErrorKind::PathRefused);
        assert_eq!(kind(roots.writable(Path::new(".."))), ErrorKind::PathRefused);
        assert_eq!(
            kind(roots.writable(&outside.path().join("new.csv"))),
            ErrorKind::PathRefused
        );
    }

    #[test]
    fn the_workspace_is_out_of_reach_even_inside_a_root() {
        let root = tempfile::tempdir().unwrap();
        let workspace = root.path().join("ws");
        std::fs::create_dir_all(workspace.join("datasets")).unwrap();
        std::fs::write(workspace.join("datasets/victim.parquet"), "stored").unwrap();
        std::os::unix::fs::symlink(workspace.join("datasets"), root.path().join("door")).unwrap();
        std::fs::hard_link(
            workspace.join("datasets/victim.parquet"),
            root.path().join("twin.parquet"),
        )
        .unwrap();
        // A root inside the workspace is dropped.
        let roots = DataRoots::new([root.path().to_owned(), workspace.join("datasets")]).keeping_out(&workspace);
        assert_eq!(roots.roots().len(), 1);
        let kind = |r: ServiceResult<PathBuf>| r.unwrap_err().kind;
        for attempt in [
            "ws/datasets/victim.parquet",
            "door/victim.parquet",
            "ws/../ws/datasets/victim.parquet",
            "twin.parquet",
        ] {
            assert_eq!(
                kind(roots.readable(Path::new(attempt))),
                ErrorKind::PathRefused,
                "{attempt}"
            );
        }
        for attempt in ["ws/datasets/victim.parquet", "door/victim.json", "ws/new.csv", "ws"] {
            assert_eq!(
                kind(roots.writable(Path::new(attempt))),
                ErrorKind::PathRefused,
                "{attempt}"
            );
        }
        assert_eq!(
            std::fs::read(workspace.join("datasets/victim.parquet")).unwrap(),
            b"stored"
        );
    }

    #[test]
    fn placing_never_replaces_without_overwrite() {
        let root = tempfile::tempdir().unwrap();
        let roots = DataRoots::new([root.path().to_owned()]);
        let write = |text: &'static str| {
            move |file: &mut File| -> ServiceResult<()> {
                use std::io::Write;
                file.write_all(text.as_bytes())
                    .map_err(|e| ServiceError::new(ErrorKind::FileProblem, e.to_string()))
            }
        };
        let now = |rename: &mut dyn FnMut() -> ServiceResult<()>| rename();
        roots.place(Path::new("out.csv"), false, write("first"), now).unwrap();
        let error = roots
            .place(Path::new("out.csv"), false, write("second"), now)
            .unwrap_err();
        assert_eq!(error.param.as_deref(), Some("overwrite"));
        assert_eq!(std::fs::read_to_string(root.path().join("out.csv")).unwrap(), "first");
        roots.place(Path::new("out.csv"), true, write("third"), now).unwrap();
        assert_eq!(std::fs::read_to_string(root.path().join("out.csv")).unwrap(), "third");
        // A refused commit leaves neither the file nor its temporary behind.
        let refuse =
            |_: &mut dyn FnMut() -> ServiceResult<()>| Err(ServiceError::new(ErrorKind::DeadlineExceeded, "late"));
        assert!(roots
            .place(Path::new("late.csv"), false, write("late"), refuse)
            .is_err());
        let names: Vec<String> = std::fs::read_dir(root.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        assert_eq!(names, ["out.csv"]);
    }
}
