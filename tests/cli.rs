//! The command-line tool, run as a user would: every command on every sample scenario, the
//! report folder's safety rules, exit codes and error messages.

use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fickfit"))
}

fn sample(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-data")
        .join(name)
        .join("experiment.toml")
}

/// (scenario, [(parameter, truth in the report's unit)]) — the truths from
/// sample-data/README.md (the values the data were simulated with).
fn scenarios() -> Vec<(&'static str, Vec<(&'static str, f64)>)> {
    vec![
        (
            "film-uptake",
            vec![
                ("D", 1.8e-13),
                ("h", 6e-9),
                ("M_inf[sorption]", 0.40),
                ("m0[sorption]", 15.2),
            ],
        ),
        ("heated-rod", vec![("alpha", 97.1), ("m_loss", 1.2e-3)]),
        (
            "depth-profiles",
            vec![("D", 1.9e-11), ("C_s", 1050.0), ("C_0", 180.0)],
        ),
    ]
}

#[test]
fn check_accepts_every_sample() {
    for (name, _) in scenarios() {
        let out = bin().arg("check").arg(sample(name)).output().unwrap();
        assert!(
            out.status.success(),
            "{name}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(text.contains("valid") && text.contains("free"), "{text}");
    }
}

#[test]
fn fit_recovers_the_true_values_of_every_sample() {
    for (name, truths) in scenarios() {
        let dir = tempfile::tempdir().unwrap();
        let out_dir = dir.path().join("report");
        let out = bin()
            .arg("fit")
            .arg(sample(name))
            .arg("--out")
            .arg(&out_dir)
            .arg("--quiet")
            .output()
            .unwrap();
        assert_eq!(
            out.status.code(),
            Some(0),
            "{name}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let report: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out_dir.join("report.json")).unwrap())
                .unwrap();
        assert_eq!(report["schema_version"], 1);
        assert_eq!(report["fit"]["converged"], true);
        let params = report["parameters"].as_array().unwrap();
        for (p, truth) in truths {
            let row = params
                .iter()
                .find(|r| r["name"] == p)
                .unwrap_or_else(|| panic!("{name}: no {p}"));
            // The interval on the fitted scale when there is one, else the symmetric one.
            let (lo, hi) = match row.get("ci_transformed").filter(|v| !v.is_null()) {
                Some(t) => (t["low"].as_f64().unwrap(), t["high"].as_f64().unwrap()),
                None => (
                    row["ci_low"].as_f64().unwrap(),
                    row["ci_high"].as_f64().unwrap(),
                ),
            };
            assert!(
                lo < truth && truth < hi,
                "{name}: {p} truth {truth} outside [{lo}, {hi}]"
            );
        }
        // fitted.csv: a header and one row per point.
        let fitted = std::fs::read_to_string(out_dir.join("fitted.csv")).unwrap();
        let n = report["fit"]["n_points"].as_u64().unwrap() as usize;
        assert_eq!(fitted.lines().count(), n + 1);
        // No NaN or infinity anywhere in the JSON (serde_json cannot write them; make sure
        // no string smuggles them in either).
        let text = std::fs::read_to_string(out_dir.join("report.json")).unwrap();
        assert!(
            !text.contains("NaN") && !text.contains("Infinity"),
            "{name}"
        );
    }
}

#[test]
fn report_folder_is_never_clobbered_without_force() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("my-notes.txt"), "keep me").unwrap();
    let out = bin()
        .arg("fit")
        .arg(sample("heated-rod"))
        .arg("--out")
        .arg(dir.path())
        .arg("--quiet")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.starts_with("fickfit: ") && err.contains("--force"),
        "{err}"
    );
    assert!(!dir.path().join("report.json").exists());
    let out = bin()
        .arg("fit")
        .arg(sample("heated-rod"))
        .arg("--out")
        .arg(dir.path())
        .arg("--force")
        .arg("--quiet")
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(dir.path().join("report.json").exists());
    assert_eq!(
        std::fs::read_to_string(dir.path().join("my-notes.txt")).unwrap(),
        "keep me"
    );
}

#[test]
fn bad_experiment_file_exits_2_naming_the_key() {
    let dir = tempfile::tempdir().unwrap();
    let text = std::fs::read_to_string(sample("heated-rod"))
        .unwrap()
        .replace("thickness = \"300 mm\"", "thicknes = \"300 mm\"");
    let path = dir.path().join("bad.toml");
    std::fs::write(&path, text).unwrap();
    let out = bin().arg("check").arg(&path).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("thicknes") && err.contains("thickness"),
        "{err}"
    );
    assert_eq!(err.lines().count(), 1, "one line: {err}");
}

#[test]
fn simulate_writes_the_data_shape_and_refuses_to_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let out_file = dir.path().join("rod.csv");
    let run = || {
        bin()
            .arg("simulate")
            .arg(sample("heated-rod"))
            .arg("--out")
            .arg(&out_file)
            .arg("--noise")
            .arg("0.1")
            .arg("--seed")
            .arg("3")
            .output()
            .unwrap()
    };
    let out = run();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&out_file).unwrap();
    assert!(
        text.contains("time [s],T1 [degC],T2 [degC],T3 [degC],T4 [degC]"),
        "{text}"
    );
    let again = run();
    assert_eq!(again.status.code(), Some(2));
    assert_eq!(std::fs::read_to_string(&out_file).unwrap(), text);
}

#[test]
fn help_man_page_and_completions() {
    let out = bin().args(["fit", "--help"]).output().unwrap();
    assert!(out.status.success());
    assert!(String::from_utf8_lossy(&out.stdout).contains("Example"));
    let man = bin().args(["generate", "man"]).output().unwrap();
    assert!(man.status.success() && String::from_utf8_lossy(&man.stdout).contains(".TH"));
    let comp = bin()
        .args(["generate", "completions", "bash"])
        .output()
        .unwrap();
    assert!(comp.status.success() && String::from_utf8_lossy(&comp.stdout).contains("fickfit"));
    let bad = bin().args(["fit"]).output().unwrap();
    assert_eq!(bad.status.code(), Some(2));
}
