//! Nothing the user owns is lost: input files are only ever read, and an output the user has
//! is never replaced without --force. (Interrupted and killed runs: `tests/cli.rs`,
//! `a_killed_run_leaves_no_report_and_keeps_a_previous_one`; refusals of batch and arrhenius
//! output folders: `tests/batch.rs` and `tests/arrhenius_reports.rs`; the staging folder
//! itself: unit tests of `src/report/folder.rs`.)

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::SystemTime;

use sha2::{Digest, Sha256};

fn fickfit(cwd: &Path, args: &[&std::ffi::OsStr]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_fickfit"))
        .current_dir(cwd)
        .args(args)
        .output()
        .unwrap()
}

fn os(s: &str) -> &std::ffi::OsStr {
    std::ffi::OsStr::new(s)
}

/// SHA-256, size, modification time and permissions of every file under `dir`.
type Snapshot = BTreeMap<PathBuf, ([u8; 32], u64, SystemTime, bool)>;

fn snapshot(dir: &Path) -> Snapshot {
    let mut out = BTreeMap::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap().flatten() {
            let path = e.path();
            let meta = std::fs::metadata(&path).unwrap();
            if meta.is_dir() {
                stack.push(path);
                continue;
            }
            let hash: [u8; 32] = Sha256::digest(std::fs::read(&path).unwrap()).into();
            out.insert(
                path.strip_prefix(dir).unwrap().to_path_buf(),
                (
                    hash,
                    meta.len(),
                    meta.modified().unwrap(),
                    meta.permissions().readonly(),
                ),
            );
        }
    }
    out
}

/// The heated-rod sample copied into `<tmp>/inputs`, with its files made read-only (a
/// program that tried to write them would fail, and the test with it).
fn inputs() -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("inputs");
    std::fs::create_dir(&dir).unwrap();
    let from = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-data/heated-rod");
    for f in ["experiment.toml", "heater.csv", "sensors.csv"] {
        std::fs::copy(from.join(f), dir.join(f)).unwrap();
        let mut perm = std::fs::metadata(dir.join(f)).unwrap().permissions();
        perm.set_readonly(true);
        std::fs::set_permissions(dir.join(f), perm).unwrap();
    }
    (tmp, dir)
}

fn assert_ok(out: &Output, what: &str) {
    assert!(
        out.status.success(),
        "{what}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn input_files_are_only_read() {
    let (tmp, dir) = inputs();
    let before = snapshot(&dir);
    assert_eq!(before.len(), 3);
    let exp = dir.join("experiment.toml");
    let out = tmp.path().join("out");
    std::fs::create_dir(&out).unwrap();

    assert_ok(
        &fickfit(tmp.path(), &[os("check"), exp.as_os_str()]),
        "check",
    );
    assert_ok(
        &fickfit(
            tmp.path(),
            &[
                os("fit"),
                exp.as_os_str(),
                os("--quiet"),
                os("--out"),
                out.join("fit").as_os_str(),
            ],
        ),
        "fit",
    );
    assert_ok(
        &fickfit(
            tmp.path(),
            &[
                os("simulate"),
                exp.as_os_str(),
                os("--out"),
                out.join("sim.csv").as_os_str(),
            ],
        ),
        "simulate",
    );
    assert_ok(
        &fickfit(
            tmp.path(),
            &[
                os("batch"),
                dir.as_os_str(),
                os("--quiet"),
                os("--out"),
                out.join("batch").as_os_str(),
            ],
        ),
        "batch",
    );
    // Same files, same bytes, same modification times, still read-only; nothing new beside
    // them (no lock, temporary or cache file in the input folder).
    assert_eq!(snapshot(&dir), before);
    assert!(out.join("fit/report.json").is_file());
    assert!(out.join("batch/summary.csv").is_file());
}

#[test]
fn the_default_report_folder_is_not_replaced_without_force() {
    let (tmp, dir) = inputs();
    let exp = dir.join("experiment.toml");
    // No --out: the report goes to `experiment-report` in the current folder.
    assert_ok(
        &fickfit(tmp.path(), &[os("fit"), exp.as_os_str(), os("--quiet")]),
        "first fit",
    );
    let report = tmp.path().join("experiment-report");
    let first = snapshot(&report);
    assert!(first.contains_key(Path::new("report.json")), "{first:?}");
    let again = fickfit(tmp.path(), &[os("fit"), exp.as_os_str(), os("--quiet")]);
    assert_eq!(again.status.code(), Some(2));
    let err = String::from_utf8_lossy(&again.stderr);
    assert!(
        err.starts_with("fickfit: ")
            && err.contains("experiment-report")
            && err.contains("--force"),
        "{err}"
    );
    assert_eq!(snapshot(&report), first, "the first report changed");
}

#[test]
fn an_output_path_that_is_a_file_is_refused_and_kept() {
    let (tmp, dir) = inputs();
    let exp = dir.join("experiment.toml");
    let mine = tmp.path().join("notes.txt");
    std::fs::write(&mine, "my notes").unwrap();
    for cmd in ["fit", "batch"] {
        let target = if cmd == "fit" { &exp } else { &dir };
        let out = fickfit(
            tmp.path(),
            &[
                os(cmd),
                target.as_os_str(),
                os("--quiet"),
                os("--force"),
                os("--out"),
                mine.as_os_str(),
            ],
        );
        assert_eq!(out.status.code(), Some(2), "{cmd}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(
            err.contains("notes.txt") && err.contains("not a folder"),
            "{cmd}: {err}"
        );
        assert_eq!(std::fs::read_to_string(&mine).unwrap(), "my notes");
    }
    // simulate writes a file: an existing one is kept without --force.
    let out = fickfit(
        tmp.path(),
        &[
            os("simulate"),
            exp.as_os_str(),
            os("--out"),
            mine.as_os_str(),
        ],
    );
    assert_eq!(out.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&mine).unwrap(), "my notes");
    // Nothing else appeared beside it.
    let names: Vec<_> = std::fs::read_dir(tmp.path())
        .unwrap()
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), 2, "{names:?}");
}
