//! `fickfit batch` through the real binary: every sample fitted, a failed sample reported
//! without stopping the others, the summary equal to each sample's report.json.

use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fickfit"))
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap() {
        let entry = entry.unwrap();
        let target = to.join(entry.file_name());
        if entry.file_type().unwrap().is_dir() {
            copy_dir(&entry.path(), &target);
        } else {
            std::fs::copy(entry.path(), target).unwrap();
        }
    }
}

/// The three sample scenarios and one broken experiment file, in a fresh folder.
fn campaign() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let samples = dir.path().join("samples");
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-data");
    for name in ["film-uptake", "heated-rod", "depth-profiles"] {
        copy_dir(&root.join(name), &samples.join(name));
    }
    // A [sample] table without its required keys: an experiment file, but a bad one.
    std::fs::write(samples.join("broken.toml"), "[sample]\nshape = \"slab\"\n").unwrap();
    (dir, samples)
}

fn rows(csv_text: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let mut reader = csv::Reader::from_reader(csv_text.as_bytes());
    let header = reader
        .headers()
        .unwrap()
        .iter()
        .map(str::to_string)
        .collect();
    let rows = reader
        .records()
        .map(|r| r.unwrap().iter().map(str::to_string).collect())
        .collect();
    (header, rows)
}

#[test]
fn a_folder_is_fitted_and_a_broken_sample_does_not_stop_the_others() {
    let (dir, samples) = campaign();
    let out = dir.path().join("out");
    let run = bin()
        .args(["batch", "--quiet", "--exclude", "truth.toml", "--out"])
        .arg(&out)
        .arg(&samples)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&run.stderr);
    // One sample failed: exit code 1 (the README's exit codes; common practice for batch jobs).
    assert_eq!(run.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("broken.toml"), "{stderr}");
    assert!(out.join("summary.html").is_file());
    let text = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    let (header, rows) = rows(&text);
    assert_eq!(rows.len(), 4, "{text}");
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let (status, sample, report, error) =
        (col("status"), col("sample"), col("report"), col("error"));
    let broken: Vec<_> = rows.iter().filter(|r| r[status] == "failed").collect();
    assert_eq!(broken.len(), 1);
    assert_eq!(broken[0][sample], "broken.toml");
    assert!(
        broken[0][error].contains("sample.value_unit"),
        "{:?}",
        broken[0]
    );

    // Every fitted sample: its parameters in the summary are those of its report.json.
    let mut checked = 0;
    for r in rows.iter().filter(|r| r[status] == "ok") {
        let folder = out.join(Path::new(&r[report]).parent().unwrap());
        let json: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(folder.join("report.json")).unwrap())
                .unwrap();
        for p in json["parameters"].as_array().unwrap() {
            let name = p["name"].as_str().unwrap();
            let got: f64 = r[col(name)].parse().unwrap();
            let want = p["estimate"].as_f64().unwrap();
            assert!(
                (got - want).abs() <= 1e-12 * want.abs(),
                "{}: {name} {got} vs {want}",
                r[sample]
            );
            assert_eq!(r[col(&format!("{name} unit"))], p["unit"].as_str().unwrap());
            checked += 1;
        }
    }
    assert!(checked >= 10, "only {checked} parameters compared");

    // The same output folder again: refused without --force, nothing replaced.
    let before = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    let again = bin()
        .args(["batch", "--quiet", "--exclude", "truth.toml", "--out"])
        .arg(&out)
        .arg(&samples)
        .output()
        .unwrap();
    assert_eq!(again.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    assert_eq!(
        std::fs::read_to_string(out.join("summary.csv")).unwrap(),
        before
    );
}

#[test]
fn an_explicit_list_of_files_is_fitted_and_all_good_exits_0() {
    let (dir, samples) = campaign();
    let out = dir.path().join("two");
    let run = bin()
        .args(["batch", "--quiet", "--jobs", "2", "--out"])
        .arg(&out)
        .arg(samples.join("heated-rod/experiment.toml"))
        .arg(samples.join("depth-profiles/experiment.toml"))
        .output()
        .unwrap();
    assert_eq!(
        run.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let (_, rows) = rows(&std::fs::read_to_string(out.join("summary.csv")).unwrap());
    assert_eq!(rows.len(), 2);
    assert!(rows.iter().all(|r| r[1] == "ok"), "{rows:?}");
}
