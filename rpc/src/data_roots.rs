//! Where path imports and exports may read and write.
//!
//! A JSON-RPC client names files on the daemon's machine, so every path is resolved to
//! its canonical form (following `..` and every symlink) and must then lie inside one of
//! the data roots: by default the directory the daemon started in and the workspace,
//! plus each `--data-root`. A path that escapes, directly or through a symlink, is refused.

use crate::errors::{ErrorKind, ServiceError, ServiceResult};
use std::path::{Component, Path, PathBuf};

#[derive(Debug, Clone)]
pub struct DataRoots {
    /// Canonical root directories; relative paths resolve against the first.
    roots: Vec<PathBuf>,
}

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
        DataRoots { roots: canonical }
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

    /// Resolves a file to read: it must exist and resolve inside a root.
    pub fn readable(&self, path: &Path) -> ServiceResult<PathBuf> {
        let absolute = self.absolute(path);
        let canonical = absolute.canonicalize().map_err(|error| {
            ServiceError::new(
                ErrorKind::FileProblem,
                format!("cannot open {}: {error}", path.display()),
            )
            .with_help("check the path; relative paths are resolved against the daemon's first data root")
        })?;
        if !self.inside(&canonical) {
            return Err(self.refused(path, "lies outside the data roots"));
        }
        if !canonical.is_file() {
            return Err(ServiceError::new(
                ErrorKind::FileProblem,
                format!("{} is not a file", path.display()),
            ));
        }
        Ok(canonical)
    }

    /// Resolves a file to write: its directory must exist inside a root, its name must be
    /// a plain file name, and an existing file there must not be a link leading out.
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
        if !self.inside(&canonical_parent) {
            return Err(self.refused(path, "lies outside the data roots"));
        }
        let target = canonical_parent.join(file_name);
        if let Ok(metadata) = std::fs::symlink_metadata(&target) {
            if metadata.file_type().is_symlink() {
                let resolved = target
                    .canonicalize()
                    .map_err(|_| self.refused(path, "is a dangling symlink"))?;
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
}
