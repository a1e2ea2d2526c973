//! Writing a report folder without losing anything the user owns.
//!
//! The folder must not exist, or be empty, unless the caller allows replacing files. Every file
//! is written to a temporary name in the same folder and renamed into place, so an interrupted
//! run never leaves a half-written file and never truncates an existing one.

use crate::error::{Error, InputKind, Location, Result};
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

/// A report folder being written.
#[derive(Debug)]
pub struct ReportFolder {
    dir: PathBuf,
}

impl ReportFolder {
    /// Open `dir` for writing: create it if missing; refuse a non-empty folder unless `force`.
    pub fn create(dir: &Path, force: bool) -> Result<Self> {
        if dir.exists() {
            if !dir.is_dir() {
                return Err(Error::input(
                    InputKind::BadValue,
                    Location::file(dir),
                    "exists and is not a folder; name a new folder for the report",
                ));
            }
            let non_empty = fs::read_dir(dir)
                .map_err(|source| Error::Io {
                    path: dir.to_path_buf(),
                    source,
                })?
                .next()
                .is_some();
            if non_empty && !force {
                return Err(Error::input(
                    InputKind::BadValue,
                    Location::file(dir),
                    "the report folder exists and is not empty; name a new folder, or add --force to replace the report files in it",
                ));
            }
        } else {
            fs::create_dir_all(dir).map_err(|source| Error::Io {
                path: dir.to_path_buf(),
                source,
            })?;
        }
        Ok(ReportFolder {
            dir: dir.to_path_buf(),
        })
    }

    /// The folder.
    pub fn path(&self) -> &Path {
        &self.dir
    }

    /// Write `name` atomically with the bytes produced by `fill`.
    pub fn write_with(
        &self,
        name: &str,
        fill: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
    ) -> Result<PathBuf> {
        write_atomic(&self.dir.join(name), fill)
    }
}

/// Write a file through a temporary sibling and a rename.
pub fn write_atomic(
    path: &Path,
    fill: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
) -> Result<PathBuf> {
    let io_err = |source| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.partial-{}", std::process::id()));
    let result = (|| {
        let file = fs::File::create(&tmp)?;
        let mut w = std::io::BufWriter::new(file);
        fill(&mut w)?;
        let file = w.into_inner().map_err(|e| e.into_error())?;
        file.sync_all()?;
        fs::rename(&tmp, path)
    })();
    if let Err(e) = result {
        let _ = fs::remove_file(&tmp);
        return Err(io_err(e));
    }
    Ok(path.to_path_buf())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn refuses_non_empty_folder_without_force() {
        let dir = tempfile::tempdir().unwrap();
        fs::write(dir.path().join("notes.txt"), "mine").unwrap();
        let e = ReportFolder::create(dir.path(), false).unwrap_err();
        assert!(e.to_string().contains("--force"), "{e}");
        let f = ReportFolder::create(dir.path(), true).unwrap();
        f.write_with("report.json", |w| w.write_all(b"{}")).unwrap();
        assert_eq!(
            fs::read_to_string(dir.path().join("notes.txt")).unwrap(),
            "mine"
        );
        assert_eq!(
            fs::read_to_string(dir.path().join("report.json")).unwrap(),
            "{}"
        );
    }

    #[test]
    fn failed_write_leaves_old_file_and_no_partial() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("fitted.csv");
        fs::write(&path, "old").unwrap();
        let e = write_atomic(&path, |w| {
            w.write_all(b"half")?;
            Err(std::io::Error::other("interrupted"))
        });
        assert!(e.is_err());
        assert_eq!(fs::read_to_string(&path).unwrap(), "old");
        let leftovers: Vec<_> = fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(leftovers.len(), 1);
    }
}
