//! Arrhenius analysis across report.json files, in the library and through the binary.
//!
//! Reference: carbon in γ-iron, D0 = 2.3e-5 m²/s and Q = 148 kJ/mol (W. D. Callister,
//! *Materials Science and Engineering*, Table 5.2; ../shared/reference/README.md), so that
//! D(1223 K) = 1.0983e-11 m²/s and D(1273 K) = 1.9454e-11 m²/s (computed there).

use fickfit::arrhenius::{fit_points, from_reports};
use std::path::{Path, PathBuf};
use std::process::Command;

const D0: f64 = 2.3e-5;
const Q: f64 = 148e3;
const R: f64 = 8.314_462_618; // J/(mol K), CODATA 2018 (exact)

fn d_at(t: f64) -> f64 {
    D0 * (-Q / (R * t)).exp()
}

/// A minimal report.json as `fickfit fit` writes it (the keys the Arrhenius command reads).
fn write_report(dir: &Path, name: &str, t: Option<f64>, d: f64, se: f64) -> PathBuf {
    let path = dir.join(name);
    let temp = t.map_or("null".to_string(), |t| format!("{t}"));
    std::fs::write(
        &path,
        format!(
            r#"{{"schema_version": 1, "temperature_k": {temp},
  "parameters": [
    {{"name": "C_s", "unit": "mol/m3", "estimate": 900.0, "estimate_si": 900.0, "std_error_si": 4.0, "fixed": false}},
    {{"name": "D", "unit": "m2/s", "estimate": {d:e}, "estimate_si": {d:e}, "std_error_si": {se:e}, "fixed": false}}
  ]}}"#
        ),
    )
    .unwrap();
    path
}

#[test]
fn callister_table_values_are_reproduced() {
    // Published spot values (computed in ../shared/reference from Callister's D0 and Q).
    assert!((d_at(1223.0) / 1.0983e-11 - 1.0).abs() < 1e-4);
    assert!((d_at(1273.0) / 1.9454e-11 - 1.0).abs() < 1e-4);
}

#[test]
fn exact_points_give_back_d0_and_ea() {
    let dir = tempfile::tempdir().unwrap();
    let temps = [1173.0, 1223.0, 1273.0, 1323.0];
    let reports: Vec<PathBuf> = temps
        .iter()
        .enumerate()
        .map(|(i, &t)| {
            write_report(
                dir.path(),
                &format!("r{i}.json"),
                Some(t),
                d_at(t),
                0.02 * d_at(t),
            )
        })
        .collect();
    let r = from_reports(&reports, "D", None, 0.95).unwrap();
    assert!((r.d0 / D0 - 1.0).abs() < 1e-9, "D0 {:e}", r.d0);
    assert!((r.activation_energy_kj_mol / 148.0 - 1.0).abs() < 1e-9);
    // Exact points: the line's χ² is zero, so the errors are the propagated 2 % ones, unscaled.
    assert!(!r.scaled_by_scatter);
    assert!(r.d0_interval[0] < D0 && D0 < r.d0_interval[1]);
    let [lo, hi] = r.activation_energy_interval;
    assert!(lo < 148.0 && 148.0 < hi);
    // ln D0 and Ea are strongly correlated over a narrow range of 1/T (common practice).
    assert!(r.correlation > 0.99, "{}", r.correlation);
}

#[test]
fn scatter_beyond_the_standard_errors_widens_the_intervals() {
    let dir = tempfile::tempdir().unwrap();
    let temps = [1173.0, 1223.0, 1273.0, 1323.0];
    // ±10 % scatter against 1 % standard errors.
    let wiggle = [1.1, 0.9, 1.1, 0.9];
    let reports: Vec<PathBuf> = temps
        .iter()
        .zip(wiggle)
        .enumerate()
        .map(|(i, (&t, w))| {
            write_report(
                dir.path(),
                &format!("r{i}.json"),
                Some(t),
                w * d_at(t),
                0.01 * d_at(t),
            )
        })
        .collect();
    let r = from_reports(&reports, "D", None, 0.95).unwrap();
    assert!(r.scaled_by_scatter);
    assert!(r.reduced_chi2.unwrap() > 10.0);
    let [lo, hi] = r.activation_energy_interval;
    assert!(lo < 148.0 && 148.0 < hi, "[{lo}, {hi}]");
}

#[test]
fn bad_reports_are_refused_with_the_reason() {
    let dir = tempfile::tempdir().unwrap();
    let a = write_report(dir.path(), "a.json", None, d_at(1223.0), 1e-13);
    let b = write_report(dir.path(), "b.json", Some(1273.0), d_at(1273.0), 1e-13);
    let err = from_reports(&[a.clone(), b.clone()], "D", None, 0.95)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("no temperature") && err.contains("a.json"),
        "{err}"
    );
    let err = from_reports(&[a.clone(), b.clone()], "alpha", None, 0.95)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("no parameter 'alpha'") && err.contains("C_s, D"),
        "{err}"
    );
    // Temperatures given on the command line replace the reports' own.
    let r = from_reports(&[a.clone(), b.clone()], "D", Some(&[1223.0, 1273.0]), 0.95).unwrap();
    assert!((r.activation_energy_kj_mol / 148.0 - 1.0).abs() < 1e-9);
    let err = fit_points("D", Vec::new(), 1.5).unwrap_err().to_string();
    assert!(err.contains("level"), "{err}");
    std::fs::write(dir.path().join("c.json"), "{ not json").unwrap();
    let err = from_reports(&[b, dir.path().join("c.json")], "D", None, 0.95)
        .unwrap_err()
        .to_string();
    assert!(err.contains("c.json") && err.contains("line 1"), "{err}");
}

#[test]
fn the_command_writes_a_plot_and_json() {
    let dir = tempfile::tempdir().unwrap();
    let reports: Vec<PathBuf> = [1173.0, 1223.0, 1273.0]
        .iter()
        .enumerate()
        .map(|(i, &t)| {
            write_report(
                dir.path(),
                &format!("r{i}.json"),
                Some(t),
                d_at(t),
                0.03 * d_at(t),
            )
        })
        .collect();
    let out = dir.path().join("arr");
    let run = Command::new(env!("CARGO_BIN_EXE_fickfit"))
        .arg("arrhenius")
        .args(&reports)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let text = String::from_utf8_lossy(&run.stdout);
    assert!(text.contains("Ea = 148.00"), "{text}");
    for f in ["arrhenius.json", "arrhenius.svg", "arrhenius.png"] {
        assert!(out.join(f).is_file(), "{f} missing");
    }
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("arrhenius.json")).unwrap())
            .unwrap();
    assert!((json["d0"].as_f64().unwrap() / D0 - 1.0).abs() < 1e-9);
    // A second run into the same folder is refused (exit code 2) without --force.
    let again = Command::new(env!("CARGO_BIN_EXE_fickfit"))
        .arg("arrhenius")
        .args(&reports)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert_eq!(again.status.code(), Some(2));
    // A bad temperature list names the option.
    let bad = Command::new(env!("CARGO_BIN_EXE_fickfit"))
        .arg("arrhenius")
        .args(&reports)
        .args(["--temperature", "1100 K,hot,1200 K"])
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("--temperature"));
}

#[test]
fn published_couple_through_fit_and_arrhenius() {
    // The whole chain on synthetic data: depth profiles of carbon simulated at 1173, 1223 and
    // 1273 K with D from Callister's D0 and Q (sample-data/anneal-series, made by `fickfit
    // simulate` with noise; readings below the profiler's detection limit censored), each fitted
    // with `fickfit fit`, then `fickfit arrhenius` on the three report.json files. D0 and Ea
    // must lie within the reported 95 % intervals. Status of the values: D0 and Q confirmed
    // in a stored problem statement quoting Callister's table (tests/data/reference/README.md).
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-data/anneal-series");
    let mut reports = Vec::new();
    for folder in ["1173K", "1223K", "1273K"] {
        let out = dir.path().join(folder);
        let run = Command::new(env!("CARGO_BIN_EXE_fickfit"))
            .arg("fit")
            .arg(root.join(folder).join("experiment.toml"))
            .arg("--out")
            .arg(&out)
            .arg("--quiet")
            .output()
            .unwrap();
        assert_eq!(
            run.status.code(),
            Some(0),
            "{folder}: {}",
            String::from_utf8_lossy(&run.stderr)
        );
        reports.push(out.join("report.json"));
    }
    let out = dir.path().join("arrhenius");
    let run = Command::new(env!("CARGO_BIN_EXE_fickfit"))
        .arg("arrhenius")
        .args(&reports)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("arrhenius.json")).unwrap())
            .unwrap();
    let interval = |key: &str| {
        let a = json[key].as_array().unwrap();
        (a[0].as_f64().unwrap(), a[1].as_f64().unwrap())
    };
    let (lo, hi) = interval("d0_interval");
    assert!(lo < D0 && D0 < hi, "D0 {D0:e} outside [{lo:e}, {hi:e}]");
    let (lo, hi) = interval("activation_energy_interval");
    assert!(
        lo < 148.0 && 148.0 < hi,
        "Ea 148 kJ/mol outside [{lo}, {hi}]"
    );
    // Three points: the line has one degree of freedom, so the interval is wide (t = 12.7),
    // but the estimate itself is close: the fits' D are good to about 1 %.
    let ea = json["activation_energy_kj_mol"].as_f64().unwrap();
    assert!((ea / 148.0 - 1.0).abs() < 0.05, "Ea {ea} kJ/mol");
    let temps: Vec<f64> = json["points"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["temperature_k"].as_f64().unwrap())
        .collect();
    assert_eq!(temps, vec![1173.0, 1223.0, 1273.0]);
}
