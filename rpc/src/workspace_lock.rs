//! One daemon per workspace: an advisory lock on `<workspace>/mobilisd.lock`, held for the
//! daemon's lifetime.
//!
//! Two daemons on one workspace would each keep their own view of it in memory: what one
//! overwrites or drops, the other keeps serving, and after a restart the disk's version wins
//! over what clients of the other were told. So a daemon takes the lock before it loads the
//! workspace, and a second one refuses to start, naming the workspace and the process that
//! holds it.
//!
//! The lock is the operating system's (`flock` on Unix, `LockFileEx` on Windows, through
//! `std::fs::File::try_lock`): it belongs to the open file, so it vanishes when the process
//! ends however it ends, a `kill -9` included, and a stale file never blocks a start. The
//! file's text, the holder's process id, is only for the message; the lock alone decides.
//! The file is opened close-on-exec (Rust's default), so the isolated plugin workers the
//! daemon starts do not inherit it and cannot keep a workspace locked after the daemon died;
//! they never open the workspace themselves.

use std::fs::{File, OpenOptions, TryLockError};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

/// The lock file's name inside the workspace.
pub const LOCK_FILE_NAME: &str = "mobilisd.lock";

/// The workspace lock; released when dropped or when the process ends.
#[derive(Debug)]
pub struct WorkspaceLock {
    _file: File,
}

/// Why a workspace could not be locked.
#[derive(Debug, thiserror::Error)]
pub enum WorkspaceLockError {
    #[error(
        "the workspace {} is in use by another mobilisd{}; stop that daemon first, or start this one with another --workspace",
        workspace.display(),
        holder.map(|pid| format!(" (process {pid})")).unwrap_or_default()
    )]
    InUse { workspace: PathBuf, holder: Option<u32> },
    #[error("cannot lock the workspace {} through {}: {source}", workspace.display(), file.display())]
    Io {
        workspace: PathBuf,
        file: PathBuf,
        source: std::io::Error,
    },
}

impl WorkspaceLock {
    /// Takes the lock of `workspace` (an existing directory) without waiting, and writes this
    /// process's id into the lock file.
    pub fn acquire(workspace: &Path) -> Result<WorkspaceLock, WorkspaceLockError> {
        let path = workspace.join(LOCK_FILE_NAME);
        let io_error = |source| WorkspaceLockError::Io {
            workspace: workspace.to_owned(),
            file: path.clone(),
            source,
        };
        // Not truncated on open: the holder's id must stay readable for whoever is refused.
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(io_error)?;
        match file.try_lock() {
            Ok(()) => {}
            Err(TryLockError::WouldBlock) => {
                return Err(WorkspaceLockError::InUse {
                    workspace: workspace.to_owned(),
                    holder: holder_pid(&mut file),
                })
            }
            Err(TryLockError::Error(source)) => return Err(io_error(source)),
        }
        let written = file
            .set_len(0)
            .and_then(|()| file.seek(SeekFrom::Start(0)))
            .and_then(|_| writeln!(file, "{}", std::process::id()))
            .and_then(|()| file.flush());
        if let Err(error) = written {
            // The lock is what protects the workspace; the id is only for a refused start's message.
            tracing::warn!(file = %path.display(), %error, "cannot write this process's id into the workspace lock file");
        }
        Ok(WorkspaceLock { _file: file })
    }
}

/// The process id the holder wrote into the lock file, if it is there yet.
fn holder_pid(file: &mut File) -> Option<u32> {
    let mut text = String::new();
    file.read_to_string(&mut text).ok()?;
    text.trim().parse().ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_second_lock_of_one_workspace_is_refused_until_the_first_is_released() {
        let workspace = tempfile::tempdir().unwrap();
        let first = WorkspaceLock::acquire(workspace.path()).unwrap();
        // A second open of the file is a second lock holder, as another process would be.
        let refused = WorkspaceLock::acquire(workspace.path()).unwrap_err();
        let WorkspaceLockError::InUse { holder, .. } = &refused else {
            panic!("{refused}")
        };
        assert_eq!(*holder, Some(std::process::id()));
        let message = refused.to_string();
        assert!(message.contains(&workspace.path().display().to_string()), "{message}");
        assert!(message.contains("--workspace"), "{message}");
        drop(first);
        WorkspaceLock::acquire(workspace.path()).expect("free again once released");
    }
}
