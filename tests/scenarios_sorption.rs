//! The sorption sample scenarios, fitted through the binary as a user would: a coating on a
//! substrate at two thicknesses with an uncertain start of each run, and spherical beads. The
//! true values are those the data were simulated with (sample-data/README.md and each folder's
//! truth.toml); every one must lie inside the reported 95 % interval.

use std::path::{Path, PathBuf};
use std::process::Command;

fn sample(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-data")
        .join(name)
        .join("experiment.toml")
}

/// Fit a scenario into a fresh folder and return its report.json.
fn fit(name: &str, dir: &Path) -> serde_json::Value {
    let out_dir = dir.join(name);
    let out = Command::new(env!("CARGO_BIN_EXE_fickfit"))
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
    assert_eq!(report["fit"]["converged"], true, "{name}");
    assert!(out_dir.join("report.html").is_file());
    report
}

/// Every (parameter, truth in the report's unit) inside its 95 % interval (on the fitted
/// scale when the report gives one).
fn truths_inside(name: &str, report: &serde_json::Value, truths: &[(&str, f64)]) {
    let params = report["parameters"].as_array().unwrap();
    for (p, truth) in truths {
        let row = params
            .iter()
            .find(|r| r["name"] == *p)
            .unwrap_or_else(|| panic!("{name}: no {p}"));
        assert_eq!(row["ci_level"], 0.95);
        let (lo, hi) = match row.get("ci_transformed").filter(|v| !v.is_null()) {
            Some(t) => (t["low"].as_f64().unwrap(), t["high"].as_f64().unwrap()),
            None => (
                row["ci_low"].as_f64().unwrap(),
                row["ci_high"].as_f64().unwrap(),
            ),
        };
        assert!(
            lo < *truth && *truth < hi,
            "{name}: {p} truth {truth} outside [{lo}, {hi}]"
        );
    }
}

#[test]
fn coating_on_a_substrate_at_two_thicknesses_with_uncertain_starts() {
    let dir = tempfile::tempdir().unwrap();
    let report = fit("coating-substrate", dir.path());
    // sample-data/coating-substrate/truth.toml.
    truths_inside(
        "coating-substrate",
        &report,
        &[
            ("D", 4.0e-13),
            ("t0[thin]", 1.5),
            ("t0[thick]", -0.8),
            ("M_inf[thin]", 2.20),
            ("M_inf[thick]", 4.40),
            ("m0[thin]", 4825.310),
            ("m0[thick]", 4912.770),
        ],
    );
    // The exposure starts were derived from the data, not given.
    let params = report["parameters"].as_array().unwrap();
    let t0 = params.iter().find(|r| r["name"] == "t0[thin]").unwrap();
    assert!(
        t0["start_source"].as_str().unwrap().contains("sqrt(t)"),
        "{}",
        t0["start_source"]
    );
    // The thickness-scaling check: both thicknesses alone give D around the truth, and the
    // check says they agree (the data are Fickian by construction).
    let c = &report["thickness_scaling"];
    assert_eq!(c["dimension"], "thickness");
    assert_eq!(c["consistent"], true, "{}", c["verdict"]);
    let groups = c["groups"].as_array().unwrap();
    assert_eq!(groups.len(), 2);
    assert_eq!(groups[0]["size_label"], "35 um");
    assert_eq!(groups[1]["datasets"][0], "thick");
    for g in groups {
        let (lo, hi) = (g["lower"].as_f64().unwrap(), g["upper"].as_f64().unwrap());
        assert!(lo < 4.0e-13 && 4.0e-13 < hi, "{g}");
    }
    // The check is in the page too.
    let html =
        std::fs::read_to_string(dir.path().join("coating-substrate").join("report.html")).unwrap();
    assert!(html.contains("Scaling with thickness"));
}

#[test]
fn spherical_beads() {
    let dir = tempfile::tempdir().unwrap();
    let report = fit("bead-sorption", dir.path());
    // sample-data/bead-sorption/truth.toml.
    truths_inside(
        "bead-sorption",
        &report,
        &[("D", 2.5e-12), ("M_inf", 4.10), ("m0", 50.320)],
    );
    // One bead size: no thickness check.
    assert!(report["thickness_scaling"].is_null());
    // The sphere's half-time estimate (Crank 1975 eq. 6.20, D t½/a² = 0.03055) is offered.
    let shortcuts = report["shortcut_estimates"].as_array().unwrap();
    assert!(shortcuts
        .iter()
        .any(|s| s["method"] == "half-time" && s["estimate"].is_number()));
}
