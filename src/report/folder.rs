//! Writing a report folder without losing anything the user owns.
//!
//! The folder must not exist, or be empty, unless the caller allows replacing files. The files
//! of a report are first written into a hidden staging folder inside it
//! (`.fickfit-staging-<process id>`) and moved into place together by
//! [`ReportFolder::commit`], only after every file was written. So a run that fails or is
//! killed before the commit leaves no report file at all, and the files of a previous report
//! (with `--force`) stay as they were; the renames of the commit take microseconds. A staging
//! folder left by a killed run is hidden, ignored when judging whether the folder is empty, and
//! removed by the next run into the same folder (on Linux, once its process is gone). A single
//! file outside a report ([`write_atomic`]) goes through a temporary sibling and a rename.
//!
//! A commit also records the names it moved in a hidden list (`.fickfit-report-files`). The next
//! commit into the same folder (with `--force`) removes the files of that list it did not
//! write again, so a report never mixes with leftovers of an earlier one (a profile panel of a
//! run with `--profile`, say); files the user put in the folder are never on that list and are
//! never touched.
//!
//! Every staging folder and temporary file not yet committed is also listed in this process
//! ([`abandon_pending`]), so a program that is asked to stop (Ctrl-C) can remove them, and the
//! report folder it created, before it exits: nothing is then left behind at all. A run killed
//! outright (SIGKILL, power loss) cannot clean up; its staging folder stays hidden until the
//! next run into the same folder removes it.

use crate::error::{Error, InputKind, Location, Result};
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::{Mutex, MutexGuard};

/// Output of this process not yet committed.
#[derive(Debug)]
enum Pending {
    /// A staging folder, and the report folder when this run created it.
    Staging {
        staging: PathBuf,
        created: Option<PathBuf>,
    },
    /// A temporary file of [`write_atomic`].
    Temporary(PathBuf),
}

/// The uncommitted output of this process. A commit holds the lock while it moves files, so
/// [`abandon_pending`] either waits for a commit to finish or keeps it from starting.
static PENDING: Mutex<Vec<Pending>> = Mutex::new(Vec::new());

fn pending() -> MutexGuard<'static, Vec<Pending>> {
    // A panic while the list was held leaves it usable: it is only a list of paths.
    PENDING.lock().unwrap_or_else(|e| e.into_inner())
}

fn forget(list: &mut Vec<Pending>, path: &Path) {
    list.retain(|p| match p {
        Pending::Staging { staging, .. } => staging != path,
        Pending::Temporary(t) => t != path,
    });
}

/// Held after [`abandon_pending`]: while it lives, no report can be committed and no
/// temporary file renamed into place.
#[must_use = "hold it until the process has exited"]
pub struct Abandoned {
    _guard: MutexGuard<'static, Vec<Pending>>,
}

/// Remove every staging folder and temporary file this process has not committed, and the
/// report folders it created if they are then empty. For a program about to exit on an
/// interrupt: the returned guard keeps any commit from starting (or finishing half-way), so
/// hold it until the process has exited.
pub fn abandon_pending() -> Abandoned {
    let mut list = pending();
    for p in list.drain(..) {
        match p {
            Pending::Staging { staging, created } => {
                let _ = fs::remove_dir_all(&staging);
                if let Some(dir) = created {
                    // Fails, harmlessly, when the folder holds anything else.
                    let _ = fs::remove_dir(&dir);
                }
            }
            Pending::Temporary(t) => {
                let _ = fs::remove_file(&t);
            }
        }
    }
    Abandoned { _guard: list }
}

/// Prefix of the hidden staging folder.
const STAGING_PREFIX: &str = ".fickfit-staging-";

/// A report folder being written.
#[derive(Debug)]
pub struct ReportFolder {
    dir: PathBuf,
    staging: PathBuf,
    created: bool,
    committed: bool,
}

/// True for the name of a staging folder (ours or a killed run's).
fn is_staging(name: &std::ffi::OsStr) -> bool {
    name.to_string_lossy().starts_with(STAGING_PREFIX)
}

/// Remove staging folders left by runs that are gone (known only where `/proc` exists).
fn remove_stale_staging(dir: &Path) {
    let proc = Path::new("/proc");
    if !proc.is_dir() {
        return;
    }
    let Ok(entries) = fs::read_dir(dir) else {
        return;
    };
    for entry in entries.flatten() {
        let name = entry.file_name();
        let name = name.to_string_lossy();
        let Some(pid) = name.strip_prefix(STAGING_PREFIX) else {
            continue;
        };
        if pid.parse::<u32>().is_ok() && !proc.join(pid).exists() {
            let _ = fs::remove_dir_all(entry.path());
        }
    }
}

/// The hidden list of the files the last commit wrote into a report folder.
const MANIFEST: &str = ".fickfit-report-files";

impl ReportFolder {
    /// Open `dir` for writing: create it if missing; refuse a non-empty folder unless `force`.
    /// Nothing is visible in `dir` until [`ReportFolder::commit`].
    pub fn create(dir: &Path, force: bool) -> Result<Self> {
        let io_err = |source| Error::Io {
            path: dir.to_path_buf(),
            source,
        };
        let mut created = false;
        if dir.exists() {
            if !dir.is_dir() {
                return Err(Error::input(
                    InputKind::BadValue,
                    Location::file(dir),
                    "exists and is not a folder; name a new folder for the report",
                ));
            }
            let non_empty = fs::read_dir(dir)
                .map_err(io_err)?
                .flatten()
                .any(|e| !is_staging(&e.file_name()));
            if non_empty && !force {
                return Err(Error::input(
                    InputKind::BadValue,
                    Location::file(dir),
                    "the report folder exists and is not empty; name a new folder, or add --force to replace the report files in it",
                ));
            }
            remove_stale_staging(dir);
        } else {
            fs::create_dir_all(dir).map_err(io_err)?;
            created = true;
        }
        let staging = dir.join(format!("{STAGING_PREFIX}{}", std::process::id()));
        if staging.exists() {
            fs::remove_dir_all(&staging).map_err(io_err)?;
        }
        fs::create_dir(&staging).map_err(io_err)?;
        pending().push(Pending::Staging {
            staging: staging.clone(),
            created: created.then(|| dir.to_path_buf()),
        });
        Ok(ReportFolder {
            dir: dir.to_path_buf(),
            staging,
            created,
            committed: false,
        })
    }

    /// The folder the report ends up in.
    pub fn path(&self) -> &Path {
        &self.dir
    }

    /// Where a file of the report is written before the commit (for writers that take a
    /// path, such as the PNG encoder).
    pub fn staged(&self, name: &str) -> PathBuf {
        self.staging.join(name)
    }

    /// Write `name` (into the staging folder) with the bytes produced by `fill`.
    pub fn write_with(
        &self,
        name: &str,
        fill: impl FnOnce(&mut dyn Write) -> std::io::Result<()>,
    ) -> Result<PathBuf> {
        write_atomic(&self.staged(name), fill)
    }

    /// Move every staged file into the folder (replacing files of the same name), remove the
    /// files an earlier commit wrote that this one did not write again, record the names and
    /// remove the staging folder. Returns the names moved, sorted.
    pub fn commit(mut self) -> Result<Vec<String>> {
        let io_err = |path: &Path| {
            let path = path.to_path_buf();
            move |source| Error::Io { path, source }
        };
        let mut names: Vec<String> = fs::read_dir(&self.staging)
            .map_err(io_err(&self.staging))?
            .flatten()
            .filter(|e| e.path().is_file())
            .map(|e| e.file_name().to_string_lossy().into_owned())
            // A writer's own temporary file (hidden) is not part of the report.
            .filter(|n| !n.starts_with('.'))
            .collect();
        names.sort();
        // The new list of files, staged like the files (before the lock: writing takes it).
        let manifest = self.dir.join(MANIFEST);
        let staged_manifest = self.staging.join(MANIFEST);
        let mut listed = names.join("\n");
        listed.push('\n');
        write_atomic(&staged_manifest, |w| w.write_all(listed.as_bytes()))?;
        let previous = fs::read_to_string(&manifest).unwrap_or_default();
        // Held while the files move: an interrupt waits for the commit to finish.
        let mut list = pending();
        for n in &names {
            let target = self.dir.join(n);
            fs::rename(self.staging.join(n), &target).map_err(io_err(&target))?;
        }
        for stale in previous.lines().map(str::trim) {
            // Only plain names this program wrote: never a path out of the folder.
            let plain = !stale.is_empty()
                && !stale.starts_with('.')
                && !stale.contains(['/', '\\'])
                && Path::new(stale).file_name() == Some(std::ffi::OsStr::new(stale));
            if plain && !names.iter().any(|n| n == stale) {
                let _ = fs::remove_file(self.dir.join(stale));
            }
        }
        fs::rename(&staged_manifest, &manifest).map_err(io_err(&manifest))?;
        fs::remove_dir_all(&self.staging).map_err(io_err(&self.staging))?;
        forget(&mut list, &self.staging);
        self.committed = true;
        Ok(names)
    }
}

impl Drop for ReportFolder {
    /// Without a commit (an error on the way), remove what was staged, and the folder itself
    /// when this run created it and it is empty.
    fn drop(&mut self) {
        if self.committed {
            return;
        }
        let mut list = pending();
        forget(&mut list, &self.staging);
        let _ = fs::remove_dir_all(&self.staging);
        if self.created {
            // Fails, harmlessly, when something else was put there meanwhile.
            let _ = fs::remove_dir(&self.dir);
        }
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
    pending().push(Pending::Temporary(tmp.clone()));
    let result = (|| {
        let file = fs::File::create(&tmp)?;
        let mut w = std::io::BufWriter::new(file);
        fill(&mut w)?;
        let file = w.into_inner().map_err(|e| e.into_error())?;
        file.sync_all()?;
        let mut list = pending();
        let moved = fs::rename(&tmp, path);
        forget(&mut list, &tmp);
        moved
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
        // nothing is visible before the commit
        assert!(!dir.path().join("report.json").exists());
        assert_eq!(f.commit().unwrap(), vec!["report.json".to_string()]);
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
    fn a_forced_report_removes_the_files_of_the_previous_one_but_not_the_users() {
        let dir = tempfile::tempdir().unwrap();
        let f = ReportFolder::create(dir.path(), false).unwrap();
        for name in ["report.json", "profile-D.svg"] {
            f.write_with(name, |w| w.write_all(b"old")).unwrap();
        }
        f.commit().unwrap();
        fs::write(dir.path().join("notes.txt"), "mine").unwrap();
        let f = ReportFolder::create(dir.path(), true).unwrap();
        f.write_with("report.json", |w| w.write_all(b"new"))
            .unwrap();
        assert_eq!(f.commit().unwrap(), vec!["report.json".to_string()]);
        // The earlier report's profile panel is gone; the new report and the user's file stay.
        assert!(!dir.path().join("profile-D.svg").exists());
        assert_eq!(
            fs::read_to_string(dir.path().join("report.json")).unwrap(),
            "new"
        );
        assert_eq!(
            fs::read_to_string(dir.path().join("notes.txt")).unwrap(),
            "mine"
        );
        // A list naming something outside the folder is not followed.
        let outside = tempfile::tempdir().unwrap();
        let victim = outside.path().join("keep.txt");
        fs::write(&victim, "keep").unwrap();
        fs::write(
            dir.path().join(MANIFEST),
            format!("report.json\n{}\n../keep.txt\n", victim.display()),
        )
        .unwrap();
        let f = ReportFolder::create(dir.path(), true).unwrap();
        f.write_with("report.json", |w| w.write_all(b"newer"))
            .unwrap();
        f.commit().unwrap();
        assert_eq!(fs::read_to_string(&victim).unwrap(), "keep");
    }

    #[test]
    fn uncommitted_report_leaves_nothing_and_keeps_old_files() {
        let parent = tempfile::tempdir().unwrap();
        let fresh = parent.path().join("new-report");
        {
            let f = ReportFolder::create(&fresh, false).unwrap();
            f.write_with("report.json", |w| w.write_all(b"{}")).unwrap();
        }
        assert!(
            !fresh.exists(),
            "a folder this run created is removed again"
        );
        let old = parent.path().join("old-report");
        fs::create_dir(&old).unwrap();
        fs::write(old.join("report.json"), "old").unwrap();
        {
            let f = ReportFolder::create(&old, true).unwrap();
            f.write_with("report.json", |w| w.write_all(b"new"))
                .unwrap();
        }
        assert_eq!(fs::read_to_string(old.join("report.json")).unwrap(), "old");
        assert_eq!(fs::read_dir(&old).unwrap().count(), 1);
    }

    #[test]
    fn a_killed_runs_staging_folder_does_not_count_and_is_removed() {
        let dir = tempfile::tempdir().unwrap();
        // A process id far above any Linux pid_max (4 194 304): no such process.
        let stale = dir.path().join(format!("{STAGING_PREFIX}999999999"));
        fs::create_dir(&stale).unwrap();
        fs::write(stale.join("report.json"), "half").unwrap();
        let f = ReportFolder::create(dir.path(), false).unwrap();
        if Path::new("/proc").is_dir() {
            assert!(!stale.exists());
        }
        f.commit().unwrap();
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
