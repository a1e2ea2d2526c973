//! The transport scenarios of sample-data/ through the binary, as a user runs them: a permeation
//! membrane under a gas (D, S, P = D S, time lag), a periodically heated rod (Ångström) and depth
//! profiles at three anneal temperatures with a detection limit. Each is fitted with
//! `fickfit fit` and the values the data were simulated with (sample-data/README.md) must lie in
//! the reported 95 % intervals. Also: a textbook worked example reproduced by `fickfit simulate`.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fickfit"))
}

fn sample(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-data")
        .join(rel)
}

/// Fit an experiment into `out_dir`; the report.json and the terminal summary.
fn fit(experiment: &Path, out_dir: &Path) -> (Value, String) {
    let out = bin()
        .arg("fit")
        .arg(experiment)
        .arg("--out")
        .arg(out_dir)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}: {}",
        experiment.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    let report: Value =
        serde_json::from_str(&std::fs::read_to_string(out_dir.join("report.json")).unwrap())
            .unwrap();
    assert_eq!(report["fit"]["converged"], true);
    (report, String::from_utf8_lossy(&out.stdout).into_owned())
}

/// The truth (in the parameter's report unit) lies in its 95 % interval: the one formed on the
/// fitted scale when there is one, else the symmetric one.
fn assert_in_interval(report: &Value, name: &str, truth: f64) {
    let row = report["parameters"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["name"] == name)
        .unwrap_or_else(|| panic!("no parameter {name}"));
    let (lo, hi) = match row.get("ci_transformed").filter(|v| !v.is_null()) {
        Some(t) => (t["low"].as_f64().unwrap(), t["high"].as_f64().unwrap()),
        None => (
            row["ci_low"].as_f64().unwrap(),
            row["ci_high"].as_f64().unwrap(),
        ),
    };
    assert!(
        lo < truth && truth < hi,
        "{name}: truth {truth} outside [{lo}, {hi}] {}",
        row["unit"]
    );
}

/// A derived row: (value, standard uncertainty, unit).
fn derived(report: &Value, name: &str) -> (f64, f64, String) {
    let row = report["derived"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["name"] == name)
        .unwrap_or_else(|| panic!("no derived {name}: {}", report["derived"]));
    (
        row["value"].as_f64().unwrap(),
        row["std_uncertainty"].as_f64().unwrap(),
        row["unit"].as_str().unwrap().to_string(),
    )
}

/// |value − truth| within 1.96 standard uncertainties (a 95 % normal interval).
fn assert_within(value: (f64, f64, String), truth: f64, what: &str) {
    let (v, u, unit) = value;
    assert!(
        (v - truth).abs() < 1.96 * u,
        "{what}: {v} ± {u} {unit}, truth {truth}"
    );
}

#[test]
fn permeation_membrane_gives_d_s_permeability_and_time_lag() {
    let dir = tempfile::tempdir().unwrap();
    let (report, text) = fit(
        &sample("permeation-membrane/experiment.toml"),
        &dir.path().join("r"),
    );
    // Truth: sample-data/README.md (D = 3.0e-12 m²/s, S = 0.40 mol/m³/bar).
    assert_in_interval(&report, "D", 3.0e-12);
    assert_in_interval(&report, "S", 0.40);
    // P = D S = 3.0e-12 m²/s × 4.0e-6 mol/(m³ Pa) = 1.2e-17 mol/(m s Pa).
    let p = derived(&report, "permeability");
    assert_eq!(p.2, "mol/(m s Pa)");
    assert_within(p, 1.2e-17, "P");
    // In Barrer: 1.2e-17 / 3.3464e-16 = 0.03586 (1 Barrer = 3.35e-16 mol/(m s Pa), common
    // practice).
    let pb = derived(&report, "permeability[Barrer]");
    assert_within(pb, 1.2e-17 / 3.3464e-16, "P in Barrer");
    // Time lag L²/(6D) = (75e-6)²/(6 × 3e-12) = 312.5 s = 5.208 min (Crank 1975 §4.3.4), from
    // the fit and from the data's steady-state asymptote.
    let lag = derived(&report, "time_lag");
    assert_eq!(lag.2, "min");
    assert_within(lag, 312.5 / 60.0, "fitted time lag");
    let lag_data = derived(&report, "time_lag_from_data");
    assert_within(lag_data, 312.5 / 60.0, "time lag from the data");
    // The summary shows them.
    assert!(
        text.contains("permeability") && text.contains("time_lag_from_data"),
        "{text}"
    );
    // The time-lag shortcut is reported beside the fit.
    let shortcuts = report["shortcut_estimates"].as_array().unwrap();
    assert!(
        shortcuts.iter().any(|s| s["method"] == "time lag"),
        "{shortcuts:?}"
    );
}

#[test]
fn periodically_heated_rod_gives_alpha_and_conductivity() {
    let dir = tempfile::tempdir().unwrap();
    let (report, _) = fit(
        &sample("periodic-rod/experiment.toml"),
        &dir.path().join("r"),
    );
    // α = 117 mm²/s (pure copper at 300 K, Incropera & DeWitt Table A.1), m = 1.5e-3 1/s.
    assert_in_interval(&report, "alpha", 117.0);
    assert_in_interval(&report, "m_loss", 1.5e-3);
    // k = α ρ c_p with the handbook's ρ = 8933 kg/m³ and c_p = 385 J/(kg K): the handbook's own
    // k = 401 W/(m K) (same table) lies within the propagated uncertainty.
    let k = derived(&report, "conductivity");
    assert_eq!(k.2, "W/(m K)");
    assert_within(k, 401.0, "k");
    // Ångström's relation on each sensor pair, beside the fit: within 5 % of the fitted α (the
    // record starts at switch-on, so the first periods carry the transient).
    let pairs: Vec<&Value> = report["shortcut_estimates"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|s| s["method"].as_str().unwrap_or("").starts_with("Angstrom"))
        .collect();
    assert_eq!(pairs.len(), 3, "{pairs:?}");
    for s in pairs {
        let r = s["ratio_to_fit"].as_f64().unwrap();
        assert!((r - 1.0).abs() < 0.05, "{s}");
    }
}

/// (folder, temperature K, D m²/s) of the anneal series: carbon in γ-iron,
/// D = 2.3e-5 exp(−148 kJ/mol /(R T)) m²/s (Callister, Table 5.2; R = 8.314462618 J/(mol K)).
const ANNEALS: [(&str, f64, f64); 3] = [
    ("1173K", 1173.0, 5.906_043_654_66e-12),
    ("1223K", 1223.0, 1.098_332_263_49e-11),
    ("1273K", 1273.0, 1.945_383_858_83e-11),
];

#[test]
fn anneal_series_recovers_d_at_each_temperature_and_reports_the_floor() {
    for (folder, t, d) in ANNEALS {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("r");
        let (report, text) = fit(
            &sample(&format!("anneal-series/{folder}/experiment.toml")),
            &out,
        );
        assert_eq!(report["temperature_k"].as_f64(), Some(t));
        assert_in_interval(&report, "D", d);
        assert_in_interval(&report, "C_s", 1.10);
        // The profiler's detection limit: the readings at or below it, their depths and what
        // was done, in report.json, the terminal summary and report.html.
        let dl = &report["datasets"][0]["detection_limit"];
        assert_eq!(dl["treatment"], "censor", "{folder}");
        assert_eq!(dl["limit"].as_f64(), Some(0.02));
        let count = dl["count"].as_u64().unwrap() as usize;
        let points = dl["points"].as_array().unwrap();
        assert_eq!(points.len(), count);
        // The deepest readings (2 mm, far beyond 2√(Dt) ≤ 1.3 mm) are below the limit.
        assert!(count >= 20, "{folder}: {count} readings below the limit");
        assert!(points
            .iter()
            .any(|p| (p["position_m"].as_f64().unwrap() - 2e-3).abs() < 1e-9));
        let summary = dl["summary"].as_str().unwrap();
        assert!(
            summary.contains("censored") && summary.contains("2000 um"),
            "{summary}"
        );
        assert!(text.contains(summary), "{text}");
        let html = std::fs::read_to_string(out.join("report.html")).unwrap();
        assert!(
            html.contains("Detection limit, dataset profiles"),
            "{folder}"
        );
        // Absolute σ: censoring does not shrink a scatter estimate, so no warning about it.
        assert!(!report["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap_or("").contains("too narrow")));
    }
}

#[test]
fn callister_carburising_example_through_simulate() {
    // Callister, Materials Science and Engineering: An Introduction, Example Problem 5.2
    // (tests/data/reference/worked_examples.json): C0 = 0.25 wt%, Cs = 1.20 wt%, D = 1.6e-11
    // m²/s; C = 0.80 wt% is reached at x = 0.5 mm after t = 25 370.245 s (exact, mpmath; the
    // book's 7.1 h used a rounded erf argument). A 20 mm slab with a sealed back face is deep
    // here: 2√(Dt) = 1.27 mm.
    let w: Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/reference/worked_examples.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let e = &w["callister_example_5_2_carburizing_time"];
    let t_exact = e["computed_here"]["t_s_exact"].as_f64().unwrap();
    let t_book = e["book_answer"]["t_h"].as_f64().unwrap() * 3600.0;
    let i = &e["inputs"];
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("at-half-mm.csv"),
        format!("time [s],C [wt%]\n{t_exact},0\n{t_book},0\n"),
    )
    .unwrap();
    std::fs::write(
        dir.path().join("carburise.toml"),
        format!(
            r#"
title = "Callister Example 5.2 on a deep slab"
[sample]
shape = "slab"
value_unit = "wt%"
thickness = "20 mm"
diffusivity = "{d} m2/s"
[ends.left]
value = "{cs} wt%"
[ends.right]
sealed = true
[initial]
value = "{c0} wt%"
[[datasets]]
name = "probe"
file = "at-half-mm.csv"
layout = "time_series"
observe = "value"
position = "{x} m"
time_column = "time"
value_column = "C"
"#,
            d = i["D_m2_s"],
            cs = i["Cs_wt_pct"],
            c0 = i["C0_wt_pct"],
            x = i["x_m"],
        ),
    )
    .unwrap();
    let out_csv = dir.path().join("sim.csv");
    let run = bin()
        .arg("simulate")
        .arg(dir.path().join("carburise.toml"))
        .arg("--out")
        .arg(&out_csv)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let text = std::fs::read_to_string(&out_csv).unwrap();
    let values: Vec<f64> = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("time"))
        .map(|l| l.split(',').nth(1).unwrap().trim().parse().unwrap())
        .collect();
    assert_eq!(values.len(), 2, "{text}");
    let target = i["Cx_wt_pct"].as_f64().unwrap();
    // At the exact time: 0.80 wt% to 1e-4 wt% (the finite-volume solution's error at a point
    // is about 1e-5 wt% here: second order in a 10-20 um cell).
    assert!(
        (values[0] - target).abs() < 1e-4,
        "C(0.5 mm, {t_exact} s) = {} wt%, expected {target}",
        values[0]
    );
    // At the book's 7.1 h the concentration is a little higher, within the book's rounding
    // (0.5 % in time: about 0.002 wt%).
    assert!(
        values[1] > values[0] && values[1] - target < 0.003,
        "C(0.5 mm, 7.1 h) = {} wt%",
        values[1]
    );
}

#[test]
fn check_accepts_the_transport_samples() {
    for rel in [
        "permeation-membrane/experiment.toml",
        "periodic-rod/experiment.toml",
        "anneal-series/1173K/experiment.toml",
        "anneal-series/1223K/experiment.toml",
        "anneal-series/1273K/experiment.toml",
    ] {
        let out = bin().arg("check").arg(sample(rel)).output().unwrap();
        assert!(
            out.status.success(),
            "{rel}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        let text = String::from_utf8_lossy(&out.stdout);
        assert!(text.contains("valid") && text.contains("free"), "{text}");
    }
}
