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
    // A second --force run replaces the report files (here a stale report.json) in place.
    std::fs::write(dir.path().join("report.json"), "stale").unwrap();
    let out = bin()
        .arg("fit")
        .arg(sample("heated-rod"))
        .arg("--out")
        .arg(dir.path())
        .arg("--force")
        .arg("--quiet")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let report: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("report.json")).unwrap())
            .expect("report.json replaced by a real report");
    assert_eq!(report["schema_version"], 1);
    assert_eq!(
        visible_files(dir.path()).len(),
        report_files(dir.path()).len() + 1
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
fn fit_with_a_bad_experiment_file_exits_2_naming_the_key_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let rod = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-data/heated-rod");
    for f in ["heater.csv", "sensors.csv"] {
        std::fs::copy(rod.join(f), dir.path().join(f)).unwrap();
    }
    let text = std::fs::read_to_string(sample("heated-rod"))
        .unwrap()
        .replace("thickness = \"300 mm\"", "thickness = \"300 furlongs\"");
    assert!(text.contains("furlongs"));
    let path = dir.path().join("bad.toml");
    std::fs::write(&path, text).unwrap();
    let out_dir = dir.path().join("report");
    let out = bin()
        .arg("fit")
        .arg(&path)
        .arg("--out")
        .arg(&out_dir)
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.starts_with("fickfit: ")
            && err.contains("sample.thickness")
            && err.contains("furlongs"),
        "{err}"
    );
    assert!(
        !out_dir.exists(),
        "no report folder for a refused experiment"
    );
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

// ---------------------------------------------------------------------------------------------
// Report files, the JSON Schema, profile curves

/// The files of `dir` whose names do not start with a dot.
fn visible_files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = match std::fs::read_dir(dir) {
        Ok(rd) => rd
            .flatten()
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| !n.starts_with('.'))
            .collect(),
        Err(_) => Vec::new(),
    };
    v.sort();
    v
}

/// The visible files of `dir` that a report writes.
fn report_files(dir: &Path) -> Vec<String> {
    visible_files(dir)
        .into_iter()
        .filter(|n| {
            n.starts_with("report.")
                || n == "fitted.csv"
                || n.ends_with(".svg")
                || n.ends_with(".png")
                || n.contains("partial")
                || n.contains("tmp")
        })
        .collect()
}

fn fit_into(name: &str, out_dir: &Path, extra: &[&str]) -> serde_json::Value {
    let out = bin()
        .arg("fit")
        .arg(sample(name))
        .arg("--out")
        .arg(out_dir)
        .arg("--quiet")
        .args(extra)
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{name}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_str(&std::fs::read_to_string(out_dir.join("report.json")).unwrap()).unwrap()
}

fn schema() -> serde_json::Value {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/report.schema.json");
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).expect("the schema is JSON")
}

/// A small JSON Schema validator for the keywords docs/report.schema.json uses: `type` (one
/// name or a list), `enum`, `minimum`, `required`, `properties`, `additionalProperties: false`,
/// `items`, `anyOf` and `$ref` to `#/$defs/NAME`. A keyword it does not know is an error, so
/// the schema cannot say more than is checked. Semantics as in JSON Schema 2020-12,
/// Validation §6.1–6.5 and Core §10.3 (json-schema.org) — from memory. Errors name the path.
fn validate(
    root: &serde_json::Value,
    schema: &serde_json::Value,
    v: &serde_json::Value,
    at: &str,
    errors: &mut Vec<String>,
) {
    use serde_json::Value;
    let Some(obj) = schema.as_object() else {
        errors.push(format!("{at}: schema is not an object"));
        return;
    };
    for (key, rule) in obj {
        match key.as_str() {
            "$schema" | "$id" | "$defs" | "title" | "description" => {}
            "$ref" => {
                let name = rule.as_str().and_then(|r| r.strip_prefix("#/$defs/"));
                match name.and_then(|n| root["$defs"].get(n)) {
                    Some(target) => validate(root, target, v, at, errors),
                    None => errors.push(format!("{at}: unresolved $ref {rule}")),
                }
            }
            "type" => {
                let names: Vec<&str> = match rule {
                    Value::String(s) => vec![s.as_str()],
                    Value::Array(a) => a.iter().filter_map(Value::as_str).collect(),
                    _ => vec![],
                };
                let ok = names.iter().any(|t| match *t {
                    "object" => v.is_object(),
                    "array" => v.is_array(),
                    "string" => v.is_string(),
                    "boolean" => v.is_boolean(),
                    "null" => v.is_null(),
                    "number" => v.is_number(),
                    "integer" => v.is_u64() || v.is_i64(),
                    _ => false,
                });
                if !ok {
                    errors.push(format!("{at}: expected {rule}, found {v}"));
                }
            }
            "enum" => {
                if !rule.as_array().is_some_and(|a| a.contains(v)) {
                    errors.push(format!("{at}: {v} not one of {rule}"));
                }
            }
            "minimum" => {
                if let (Some(x), Some(m)) = (v.as_f64(), rule.as_f64()) {
                    if x < m {
                        errors.push(format!("{at}: {x} below the minimum {m}"));
                    }
                }
            }
            "required" => {
                if let Some(o) = v.as_object() {
                    for name in rule
                        .as_array()
                        .into_iter()
                        .flatten()
                        .filter_map(Value::as_str)
                    {
                        if !o.contains_key(name) {
                            errors.push(format!("{at}: missing required key '{name}'"));
                        }
                    }
                }
            }
            "properties" => {
                if let (Some(o), Some(props)) = (v.as_object(), rule.as_object()) {
                    for (name, sub) in props {
                        if let Some(x) = o.get(name) {
                            validate(root, sub, x, &format!("{at}.{name}"), errors);
                        }
                    }
                }
            }
            "additionalProperties" => {
                if rule != &Value::Bool(false) {
                    errors.push(format!(
                        "{at}: only additionalProperties: false is supported"
                    ));
                }
                if let Some(o) = v.as_object() {
                    let props = obj.get("properties").and_then(Value::as_object);
                    for name in o.keys() {
                        if !props.is_some_and(|p| p.contains_key(name)) {
                            errors.push(format!("{at}: key '{name}' is not in the schema"));
                        }
                    }
                }
            }
            "items" => {
                if let Some(a) = v.as_array() {
                    for (i, x) in a.iter().enumerate() {
                        validate(root, rule, x, &format!("{at}[{i}]"), errors);
                    }
                }
            }
            "anyOf" => {
                let alternatives = rule.as_array().cloned().unwrap_or_default();
                let any = alternatives.iter().any(|alt| {
                    let mut e = Vec::new();
                    validate(root, alt, v, at, &mut e);
                    e.is_empty()
                });
                if !any {
                    errors.push(format!("{at}: matches no alternative of anyOf"));
                }
            }
            other => errors.push(format!(
                "{at}: schema keyword '{other}' is not checked by this validator"
            )),
        }
    }
}

fn schema_errors(report: &serde_json::Value) -> Vec<String> {
    let s = schema();
    let mut errors = Vec::new();
    validate(&s, &s, report, "report", &mut errors);
    errors
}

/// Every property in the schema has a description (every field of report.json documented).
fn undocumented(schema: &serde_json::Value, at: &str, out: &mut Vec<String>) {
    if let Some(props) = schema.get("properties").and_then(|p| p.as_object()) {
        for (name, sub) in props {
            let text = sub.get("description").and_then(|d| d.as_str());
            if text.is_none_or(str::is_empty) {
                out.push(format!("{at}.{name}"));
            }
            undocumented(sub, &format!("{at}.{name}"), out);
        }
    }
    for key in ["items", "$defs"] {
        match schema.get(key) {
            Some(serde_json::Value::Object(m)) if key == "$defs" => {
                for (n, sub) in m {
                    undocumented(sub, &format!("$defs.{n}"), out);
                }
            }
            Some(sub) => undocumented(sub, &format!("{at}[]"), out),
            None => {}
        }
    }
    for alt in schema
        .get("anyOf")
        .and_then(|a| a.as_array())
        .into_iter()
        .flatten()
    {
        undocumented(alt, at, out);
    }
}

#[test]
fn report_json_validates_against_the_documented_schema() {
    let mut missing = Vec::new();
    undocumented(&schema(), "report", &mut missing);
    assert!(missing.is_empty(), "undocumented: {missing:?}");

    let dir = tempfile::tempdir().unwrap();
    // Absolute σ, two free parameters, with every optional part present.
    let rod = dir.path().join("rod");
    let report = fit_into("heated-rod", &rod, &["--profile", "--bootstrap", "20"]);
    let errors = schema_errors(&report);
    assert!(errors.is_empty(), "{errors:#?}");
    // Relative weighting, no extras: the optional parts are null.
    let profiles = dir.path().join("profiles");
    let plain = fit_into("depth-profiles", &profiles, &[]);
    let errors = schema_errors(&plain);
    assert!(errors.is_empty(), "{errors:#?}");
    assert!(plain["parameters"][0]["profile"].is_null());
    // A model comparison (the profiles' model against itself: a tie).
    let compared = dir.path().join("compared");
    let variant = sample("depth-profiles");
    let with_cmp = fit_into(
        "depth-profiles",
        &compared,
        &["--compare", variant.to_str().unwrap()],
    );
    let errors = schema_errors(&with_cmp);
    assert!(errors.is_empty(), "{errors:#?}");
    assert_eq!(
        with_cmp["comparison"]["models"].as_array().unwrap().len(),
        2
    );
    assert!(with_cmp["comparison"]["verdict"]
        .as_str()
        .unwrap()
        .contains("cannot tell"));
    // The thickness-scaling check (two coating thicknesses sharing D).
    let coating = fit_into("coating-substrate", &dir.path().join("coating"), &[]);
    let errors = schema_errors(&coating);
    assert!(errors.is_empty(), "{errors:#?}");
    assert_eq!(
        coating["thickness_scaling"]["groups"]
            .as_array()
            .unwrap()
            .len(),
        2
    );

    // The validator can fail: an undocumented key, a wrong type and a missing key are found.
    let mut bad = report.clone();
    bad["parameters"][0]["surprise"] = serde_json::json!(1);
    bad["fit"]["n_points"] = serde_json::json!("many");
    bad.as_object_mut().unwrap().remove("warnings");
    let errors = schema_errors(&bad);
    assert_eq!(errors.len(), 3, "{errors:#?}");

    // The hash is the SHA-256 of the experiment file's bytes (FIPS 180-4, via the sha2 crate).
    use sha2::Digest;
    let digest = sha2::Sha256::digest(std::fs::read(sample("heated-rod")).unwrap());
    let hex: String = digest.iter().map(|b| format!("{b:02x}")).collect();
    assert_eq!(report["experiment_sha256"], hex.as_str());
}

#[test]
fn profile_curves_reach_the_report_and_the_figures() {
    let dir = tempfile::tempdir().unwrap();
    let out_dir = dir.path().join("rod");
    let report = fit_into("heated-rod", &out_dir, &["--profile"]);
    // χ²(1) quantile at 0.95 = 3.841459 (NIST/SEMATECH e-Handbook of Statistical Methods,
    // §1.3.6.7.4, upper critical values of the chi-square distribution: 3.841 at ν = 1).
    for p in report["parameters"].as_array().unwrap() {
        let name = p["name"].as_str().unwrap();
        let pr = &p["profile"];
        assert_eq!(pr["statistic"], "chi_square", "{name}: absolute σ");
        let thr = pr["threshold"].as_f64().unwrap();
        assert!((thr - 3.841459).abs() < 1e-5, "{name}: threshold {thr}");
        let points = pr["points"].as_array().unwrap();
        assert!(points.len() >= 5, "{name}: {} points", points.len());
        let pts: Vec<(f64, f64)> = points
            .iter()
            .map(|q| {
                (
                    q["value"].as_f64().unwrap(),
                    q["statistic"].as_f64().unwrap(),
                )
            })
            .collect();
        assert!(
            pts.windows(2).all(|w| w[0].0 <= w[1].0),
            "{name}: sorted by value"
        );
        let est = p["estimate"].as_f64().unwrap();
        let (low, high) = (pr["low"].as_f64().unwrap(), pr["high"].as_f64().unwrap());
        let scale = (high - low).abs();
        // The optimum (statistic 0) and both ends (statistic = threshold) are on the curve.
        assert!(
            pts.iter()
                .any(|&(v, s)| (v - est).abs() <= 1e-9 * est.abs().max(1e-300) && s.abs() < 1e-9),
            "{name}: optimum"
        );
        for end in [low, high] {
            assert!(
                pts.iter()
                    .any(|&(v, s)| (v - end).abs() <= 1e-9 * scale && (s - thr).abs() < 1e-9),
                "{name}: end {end}"
            );
        }
        // Every point is a minimum over the others: never below the optimum (common practice:
        // a profile of a least-squares optimum is ≥ 0), and inside the interval below the
        // threshold, outside above it (allowing the search tolerance).
        for &(v, s) in &pts {
            assert!(s >= -1e-6, "{name}: statistic {s} at {v}");
            if v > low + 1e-6 * scale && v < high - 1e-6 * scale {
                assert!(
                    s <= thr + 1e-6,
                    "{name}: {s} above the threshold inside at {v}"
                );
            }
            if v < low - 1e-6 * scale || v > high + 1e-6 * scale {
                assert!(
                    s >= thr - 1e-6,
                    "{name}: {s} below the threshold outside at {v}"
                );
            }
        }
        // One panel per parameter, SVG and PNG, axis in the parameter's unit.
        let stem = format!("profile-{name}");
        let svg = std::fs::read_to_string(out_dir.join(format!("{stem}.svg"))).unwrap();
        let unit = p["unit"].as_str().unwrap();
        assert!(
            svg.contains(&format!("{name} [{unit}]")),
            "{stem}.svg: axis label with unit"
        );
        assert!(
            svg.contains("threshold"),
            "{stem}.svg: threshold in the legend"
        );
        let png = std::fs::read(out_dir.join(format!("{stem}.png"))).unwrap();
        assert!(png.starts_with(b"\x89PNG\r\n\x1a\n"), "{stem}.png");
    }
    let html = std::fs::read_to_string(out_dir.join("report.html")).unwrap();
    assert!(html.contains("Profile likelihood"));
    // one panel (its SVG title) per free parameter
    assert_eq!(html.matches("Profile of ").count(), 2);
    // Two free parameters: the correlation heat map in both formats.
    assert!(out_dir.join("correlation.svg").is_file());
    let png = std::fs::read(out_dir.join("correlation.png")).unwrap();
    assert!(png.starts_with(b"\x89PNG\r\n\x1a\n"));

    // Without --profile, no panel and no section.
    let plain_dir = dir.path().join("plain");
    fit_into("heated-rod", &plain_dir, &[]);
    assert!(!visible_files(&plain_dir)
        .iter()
        .any(|n| n.starts_with("profile-")));
    let html = std::fs::read_to_string(plain_dir.join("report.html")).unwrap();
    assert!(!html.contains("Profile likelihood"));
}

#[test]
fn fitted_csv_is_in_the_data_files_units() {
    let dir = tempfile::tempdir().unwrap();
    // Sensors: time in s (the file's header), positions in mm (the experiment file's sensor
    // positions), temperatures in degC.
    let rod = dir.path().join("rod");
    fit_into("heated-rod", &rod, &[]);
    let text = std::fs::read_to_string(rod.join("fitted.csv")).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "dataset,line,time [s],position [mm],observed [degC],predicted [degC],residual [degC],standardised residual"
    );
    // The first row is line 3 of sensors.csv: t = 0 s, sensor T1 at 25 mm, 21.4502307 degC
    // (the values in sample-data/heated-rod/sensors.csv and experiment.toml).
    let row: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(row[1], "3");
    let num = |i: usize| row[i].parse::<f64>().unwrap();
    assert_eq!(num(2), 0.0);
    assert!((num(3) - 25.0).abs() < 1e-9, "{row:?}");
    assert!((num(4) - 21.4502307).abs() < 1e-7, "{row:?}");
    assert!(
        (num(4) - num(5) - num(6)).abs() < 1e-8,
        "residual = observed − predicted"
    );
    // Profiles: time in h and depth in um as the file's header writes them.
    let prof = dir.path().join("profiles");
    fit_into("depth-profiles", &prof, &[]);
    let text = std::fs::read_to_string(prof.join("fitted.csv")).unwrap();
    let header = text.lines().next().unwrap();
    assert!(
        header.starts_with("dataset,line,time [h],position [um],observed [mol/m3]"),
        "{header}"
    );
    let row: Vec<&str> = text.lines().nth(2).unwrap().split(',').collect();
    // line 4 of profiles.csv: 1 h, 50 um, 966.365207 mol/m3
    assert_eq!(row[1], "4");
    assert!((row[2].parse::<f64>().unwrap() - 1.0).abs() < 1e-12);
    assert!((row[3].parse::<f64>().unwrap() - 50.0).abs() < 1e-9);
    assert!((row[4].parse::<f64>().unwrap() - 966.365207).abs() < 1e-6);
}

/// True when `dir` holds a staging folder (a run is writing into it).
fn has_staging(dir: &Path) -> bool {
    std::fs::read_dir(dir).is_ok_and(|rd| {
        rd.flatten().any(|e| {
            e.file_name()
                .to_string_lossy()
                .starts_with(".fickfit-staging-")
        })
    })
}

/// Hidden entries of `dir` (staging folders, temporary files).
/// Hidden files and folders of `dir` other than the committed list of report files
/// (`.fickfit-report-files`, see src/report/folder.rs): staging leftovers.
fn hidden_files(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .map(|rd| {
            rd.flatten()
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .filter(|n| n.starts_with('.') && n != ".fickfit-report-files")
                .collect()
        })
        .unwrap_or_default()
}

/// Start a long fit (minutes: 2000 bootstrap refits and profiles) into `out_dir`, wait until
/// it has opened its staging folder (so it is inside the fit; up to 2 minutes on a loaded
/// machine), and send it `signal` (a name for kill(1)).
#[cfg(unix)]
fn start_and_kill(out_dir: &Path, force: bool, signal: &str) -> std::process::ExitStatus {
    let mut cmd = bin();
    cmd.arg("fit")
        .arg(sample("film-uptake"))
        .args(["--profile", "--bootstrap", "2000", "--quiet", "--out"])
        .arg(out_dir)
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null());
    if force {
        cmd.arg("--force");
    }
    let mut child = cmd.spawn().unwrap();
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(120);
    while !has_staging(out_dir) {
        assert!(
            child.try_wait().unwrap().is_none(),
            "the run ended before staging anything: the test would prove nothing"
        );
        assert!(
            std::time::Instant::now() < deadline,
            "no staging folder after 2 minutes"
        );
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    if !force {
        assert!(
            visible_files(out_dir).is_empty(),
            "report files visible before the commit: {:?}",
            visible_files(out_dir)
        );
    }
    if signal == "KILL" {
        child.kill().unwrap();
    } else {
        let status = Command::new("kill")
            .arg(format!("-{signal}"))
            .arg(child.id().to_string())
            .status()
            .unwrap();
        assert!(status.success());
    }
    let status = child.wait().unwrap();
    assert!(!status.success(), "killed runs do not succeed");
    status
}

#[cfg(unix)]
#[test]
fn a_killed_run_leaves_no_report_and_keeps_a_previous_one() {
    use std::os::unix::process::ExitStatusExt;
    let dir = tempfile::tempdir().unwrap();
    for signal in ["KILL", "INT", "TERM"] {
        let fresh = dir.path().join(format!("fresh-{signal}"));
        let status = start_and_kill(&fresh, false, signal);
        assert!(
            visible_files(&fresh).is_empty(),
            "{signal}: {:?} left in a new report folder",
            visible_files(&fresh)
        );
        if signal == "KILL" {
            // Killed outright, the run cannot clean up: its hidden staging folder stays
            // until the next run into the folder.
            assert_eq!(status.signal(), Some(9));
            assert!(has_staging(&fresh));
        } else {
            // Asked to stop, it removes what it staged and the folder it created, and exits
            // with 128 + the signal number (130 for SIGINT, 143 for SIGTERM).
            let number = if signal == "INT" { 2 } else { 15 };
            assert_eq!(status.code(), Some(128 + number), "{signal}");
            assert!(!fresh.exists(), "{signal}: {:?}", hidden_files(&fresh));
        }

        // A previous report, replaced with --force by a run that is killed mid-way.
        let old = dir.path().join(format!("old-{signal}"));
        fit_into("heated-rod", &old, &[]);
        let before: Vec<(String, Vec<u8>)> = visible_files(&old)
            .into_iter()
            .map(|n| {
                let bytes = std::fs::read(old.join(&n)).unwrap();
                (n, bytes)
            })
            .collect();
        assert!(before.iter().any(|(n, _)| n == "report.json"));
        start_and_kill(&old, true, signal);
        let after: Vec<(String, Vec<u8>)> = visible_files(&old)
            .into_iter()
            .map(|n| {
                let bytes = std::fs::read(old.join(&n)).unwrap();
                (n, bytes)
            })
            .collect();
        assert!(before == after, "{signal}: the previous report changed");
        if signal != "KILL" {
            assert!(
                hidden_files(&old).is_empty(),
                "{signal}: {:?}",
                hidden_files(&old)
            );
        }

        // The next run into the same folders works and cleans up after the killed one.
        fit_into("heated-rod", &fresh, &[]);
        assert!(
            hidden_files(&fresh).is_empty(),
            "{signal}: staging left behind"
        );
    }
}

#[test]
fn no_progress_bar_when_stderr_is_not_a_terminal() {
    // Here stderr is a pipe: the bar must stay hidden even without --quiet.
    let dir = tempfile::tempdir().unwrap();
    let out = bin()
        .arg("fit")
        .arg(sample("heated-rod"))
        .args(["--bootstrap", "10", "--out"])
        .arg(dir.path().join("r"))
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("bootstrap refits"), "{err}");
    assert!(err.is_empty(), "{err}");
    assert!(String::from_utf8_lossy(&out.stdout).contains("report written to"));
}

#[test]
fn report_html_shows_derived_quantities_and_shortcut_estimates() {
    // The HTML report carries what report.json carries (issue list for the report; common
    // practice: the colleague reading the page sees the same numbers as the script).
    let dir = tempfile::tempdir().unwrap();
    let out_dir = dir.path().join("film");
    let report = fit_into("film-uptake", &out_dir, &[]);
    let html = std::fs::read_to_string(out_dir.join("report.html")).unwrap();
    let derived = report["derived"].as_array().unwrap();
    assert!(
        !derived.is_empty(),
        "the film sample asks for derived quantities"
    );
    assert!(html.contains("<h2>Derived quantities</h2>"));
    for d in derived {
        let name = d["name"].as_str().unwrap();
        assert!(html.contains(&format!("<td>{name}</td>")), "derived {name}");
    }
    let shortcuts = report["shortcut_estimates"].as_array().unwrap();
    assert!(!shortcuts.is_empty());
    assert!(html.contains("<h2>Shortcut estimates</h2>"));
    assert_eq!(
        html.matches("<td>half-time</td>").count(),
        shortcuts
            .iter()
            .filter(|s| s["method"] == "half-time")
            .count()
    );
    // No comparison was asked for, so no comparison section.
    assert!(!html.contains("Model comparison"));
    assert!(!html.contains("NaN") && !html.contains("inf<"));
}

/// `--starts N` searches from N random starts as well (in parallel) and keeps the best: on the
/// depth-profile sample, whose sum of squares has one minimum, it finds the same optimum as a
/// plain fit (within a hundredth of a standard error), and the result does not depend on the
/// number of threads (common practice: a seeded search is reproducible).
#[test]
fn random_starts_find_the_same_optimum_whatever_the_threads() {
    let dir = tempfile::tempdir().unwrap();
    let plain = fit_into("depth-profiles", &dir.path().join("plain"), &[]);
    let run = |threads: &str, out: &str| -> serde_json::Value {
        let out_dir = dir.path().join(out);
        let status = bin()
            .env("RAYON_NUM_THREADS", threads)
            .args(["fit", sample("depth-profiles").to_str().unwrap(), "--quiet"])
            .args(["--starts", "3", "--seed", "5", "--out"])
            .arg(&out_dir)
            .status()
            .unwrap();
        assert!(status.success());
        serde_json::from_str(&std::fs::read_to_string(out_dir.join("report.json")).unwrap())
            .unwrap()
    };
    let one = run("1", "one");
    let two = run("2", "two");
    for ((p, q), r) in plain["parameters"]
        .as_array()
        .unwrap()
        .iter()
        .zip(one["parameters"].as_array().unwrap())
        .zip(two["parameters"].as_array().unwrap())
    {
        let (a, b, c) = (
            p["estimate_si"].as_f64().unwrap(),
            q["estimate_si"].as_f64().unwrap(),
            r["estimate_si"].as_f64().unwrap(),
        );
        let se = p["std_error_si"].as_f64().unwrap();
        assert!(
            (a - b).abs() < 1e-2 * se,
            "{}: plain {a}, 4 starts {b}",
            p["name"]
        );
        assert_eq!(b, c, "{}: 1 thread {b}, 2 threads {c}", p["name"]);
    }
}

/// Uptake of a plane sheet of full thickness L from both faces, τ = D t / L²: J. Crank, *The
/// Mathematics of Diffusion*, 2nd ed. 1975, eq. 4.18 (from memory), with the short-time form
/// `M_t/M_∞ = 4 √(τ/π)` (eq. 4.20, first term) below τ = 0.01.
fn crank_sheet(tau: f64) -> f64 {
    if tau < 0.01 {
        return 4.0 * (tau / std::f64::consts::PI).sqrt();
    }
    let pi2 = std::f64::consts::PI.powi(2);
    1.0 - (0..200)
        .map(|n| {
            let m = (2 * n + 1) as f64;
            8.0 / (m * m * pi2) * (-m * m * pi2 * tau).exp()
        })
        .sum::<f64>()
}

/// `(cx, cy)` of every `<circle>` in an SVG document.
fn svg_circles(svg: &str) -> Vec<(f64, f64)> {
    let attr = |tag: &str, name: &str| -> Option<f64> {
        let start = tag.find(&format!(" {name}=\""))? + name.len() + 3;
        let end = start + tag[start..].find('"')?;
        tag[start..end].parse().ok()
    };
    svg.split("<circle")
        .skip(1)
        .filter_map(|t| {
            let tag = &t[..t.find('>')?];
            Some((attr(tag, "cx")?, attr(tag, "cy")?))
        })
        .collect()
}

#[test]
fn a_long_series_gives_small_figures_that_keep_the_extreme_residual() {
    use rand::{rngs::StdRng, SeedableRng};
    use rand_distr::{Distribution, Normal};
    use std::fmt::Write as _;
    // An invented film, 100 µm thick, D = 3e-13 m²/s, weighed every 0.167 s for 9.3 h
    // (2·10⁵ readings, balance noise 0.002 mg), one reading 0.05 mg (25 σ) too high.
    let n = 200_000;
    let planted = 123_457;
    let (d, l) = (3e-13, 100e-6);
    let t_end = l * l / d;
    let mut rng = StdRng::seed_from_u64(31);
    let noise = Normal::new(0.0, 0.002).unwrap();
    let mut csv = String::from("time [s],mass [mg]\n");
    for k in 1..=n {
        let t = t_end * k as f64 / n as f64;
        let mut m = 12.5 + 0.8 * crank_sheet(d * t / (l * l)) + noise.sample(&mut rng);
        if k - 1 == planted {
            m += 0.05;
        }
        writeln!(csv, "{t:.6},{m:.6}").unwrap();
    }
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("long.csv"), csv).unwrap();
    let experiment = r#"title = "long uptake log"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "100 um"
diffusivity = "D"
[ends.left]
value = 1.0
[ends.right]
value = 1.0
[initial]
value = 0.0
[parameters.D]
lower = "1e-18 m2/s"
upper = "1e-8 m2/s"
transform = "log"
[parameters.M_inf]
unit = "mg"
[parameters.m0]
unit = "mg"
[[datasets]]
name = "uptake"
file = "long.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "0.002 mg"
weighting = "absolute"
scale = "M_inf"
offset = "m0"
"#;
    std::fs::write(dir.path().join("long.toml"), experiment).unwrap();
    let out_dir = dir.path().join("report");
    let out = bin()
        .arg("fit")
        .arg(dir.path().join("long.toml"))
        .arg("--out")
        .arg(&out_dir)
        .arg("--quiet")
        .output()
        .unwrap();
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    // Every figure is small; the data files keep every point.
    for entry in std::fs::read_dir(&out_dir).unwrap() {
        let path = entry.unwrap().path();
        let size = std::fs::metadata(&path).unwrap().len();
        let name = path.file_name().unwrap().to_string_lossy().to_string();
        if name.ends_with(".svg") || name.ends_with(".png") {
            assert!(size < 1_000_000, "{name}: {size} bytes");
        }
        if name == "report.html" {
            assert!(size < 4_000_000, "{name}: {size} bytes");
        }
    }
    let fitted = std::fs::read_to_string(out_dir.join("fitted.csv")).unwrap();
    let rows = fitted.lines().filter(|l| l.starts_with("uptake,")).count();
    assert_eq!(rows, n, "fitted.csv rows");
    let html = std::fs::read_to_string(out_dir.join("report.html")).unwrap();
    assert!(
        html.contains("of 200 000 points are shown"),
        "caption of a thinned figure"
    );
    assert!(
        html.contains("of 200 000 residuals are shown"),
        "caption of the Q–Q plot"
    );
    // The planted reading is the highest residual marker, far above the noise band: if it
    // were thinned away, the top marker would sit on the band's edge.
    let svg = std::fs::read_to_string(out_dir.join("residuals-uptake.svg")).unwrap();
    assert!(svg.contains("of 200 000 points shown"));
    // The legend's sample marker is drawn last.
    let mut circles = svg_circles(&svg);
    circles.pop();
    let mut cy: Vec<f64> = circles.iter().map(|&(_, y)| y).collect();
    cy.sort_by(f64::total_cmp);
    assert!(cy.len() > 1000 && cy.len() < 4000, "{} markers", cy.len());
    let band = cy[cy.len() - 1] - cy[1];
    let gap = cy[1] - cy[0];
    assert!(
        gap > 1.5 * band,
        "top marker gap {gap} px, noise band {band} px"
    );
}
