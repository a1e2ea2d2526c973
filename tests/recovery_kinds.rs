//! Recovery for each kind of experiment: noise-free synthetic data made by the forward model at
//! known parameter values, fitted from starts well away from them, must give back the truth to
//! 1e-6 relative (common practice: a least-squares fit of exact model output returns the
//! parameters that made it). The film uptake case is in `fit_recovery.rs`; here: a heated rod
//! (flux heater, sensors, lateral loss), a periodically heated rod, depth profiles with a
//! surface value and background, a permeation (time-lag) membrane, sorption into spheres and
//! uptake with concentration-dependent D.

use fickfit::analysis::{analyse, AnalysisOptions};
use fickfit::experiment;
use fickfit::simulate::rewrite_data_file;
use std::sync::Arc;

struct Case {
    /// Experiment text with `{...}` placeholders for each parameter's start.
    text: &'static str,
    /// Data file name and its template (header and the times/positions; values are replaced).
    data: (&'static str, String),
    /// Per observed point's observable index: the column it is read from.
    columns: &'static [&'static str],
    /// (name, truth as written, start as written, truth in SI)
    params: &'static [(&'static str, &'static str, &'static str, f64)],
}

fn fill(text: &str, params: &[(&str, &str, &str, f64)], truth: bool) -> String {
    let mut s = text.to_string();
    for (name, t, st, _) in params {
        s = s.replace(&format!("{{{name}}}"), if truth { t } else { st });
    }
    s
}

fn run(case: &Case) -> fickfit::analysis::Analysis {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join(case.data.0), &case.data.1).unwrap();
    std::fs::write(
        dir.path().join("truth.toml"),
        fill(case.text, case.params, true),
    )
    .unwrap();
    let truth = experiment::load(dir.path().join("truth.toml")).unwrap();
    let p = truth.start_values();
    for d in 0..truth.datasets.len() {
        let ds = &truth.datasets[d];
        let cols: Vec<String> = ds
            .outputs()
            .map(|(o, _)| case.columns[o.min(case.columns.len() - 1)].to_string())
            .collect();
        let text = rewrite_data_file(&truth, d, &cols, &p, 0.0, 1).unwrap();
        std::fs::write(&ds.file, text).unwrap();
    }
    std::fs::write(
        dir.path().join("fit.toml"),
        fill(case.text, case.params, false),
    )
    .unwrap();
    let exp = Arc::new(experiment::load(dir.path().join("fit.toml")).unwrap());
    let a = analyse(exp.clone(), &AnalysisOptions::default()).unwrap();
    assert!(a.fit.stop.converged(), "{}", a.fit.stop_message);
    for (name, _, _, value) in case.params {
        let k = exp.parameter_index(name).unwrap();
        let got = a.fit.estimates[k];
        let err = if *value == 0.0 {
            got.abs()
        } else {
            (got / value - 1.0).abs()
        };
        assert!(
            err < 1e-6,
            "{}: {name} fitted {got:e}, truth {value:e} (relative error {err:e})",
            exp.title.as_deref().unwrap_or("")
        );
    }
    a
}

fn rows(header: &str, keys: impl Iterator<Item = String>, values: usize) -> String {
    let mut s = format!("{header}\n");
    for k in keys {
        s.push_str(&k);
        for _ in 0..values {
            s.push_str(",0");
        }
        s.push('\n');
    }
    s
}

#[test]
fn heated_rod_with_flux_heater_and_lateral_loss() {
    run(&Case {
        text: r#"
title = "rod, flux heater"
[sample]
shape = "slab"
value_unit = "K"
thickness = "200 mm"
diffusivity = "alpha"
[ends.left]
flux = "q"
[ends.right]
sealed = true
[initial]
value = "295 K"
[volume]
exchange_rate = "m_loss"
ambient = "295 K"
[parameters.alpha]
start = "{alpha}"
lower = "1e-7 m2/s"
[parameters.m_loss]
start = "{m_loss}"
lower = "1e-6 1/s"
[parameters.q]
start = "{q}"
[[datasets]]
name = "sensors"
file = "rod.csv"
layout = "sensors"
observe = "value"
time_column = "time"
sigma = "0.05 K"
sensors = [
  { column = "T1", position = "20 mm" },
  { column = "T2", position = "60 mm" },
  { column = "T3", position = "100 mm" },
]
"#,
        data: (
            "rod.csv",
            rows(
                "time [s],T1 [K],T2 [K],T3 [K]",
                (1..=60).map(|k| format!("{}", 15 * k)),
                3,
            ),
        ),
        columns: &["T1", "T2", "T3"],
        // Aluminium at 300 K: α = 97.1 mm²/s (Incropera & DeWitt, Table A.1; see
        // ../shared/reference/thermal_properties_300K.csv).
        params: &[
            ("alpha", "97.1e-6 m2/s", "30e-6 m2/s", 97.1e-6),
            ("m_loss", "2e-3 1/s", "1e-2 1/s", 2e-3),
            ("q", "0.02 K m/s", "0.05 K m/s", 0.02),
        ],
    });
}

#[test]
fn periodically_heated_rod() {
    let a = run(&Case {
        text: r#"
title = "rod, periodic heater"
[sample]
shape = "slab"
value_unit = "K"
thickness = "400 mm"
diffusivity = "alpha"
[ends.left]
value = { mean = "320 K", amplitude = "10 K", period = "600 s" }
[ends.right]
sealed = true
[initial]
value = "300 K"
[volume]
exchange_rate = "m_loss"
ambient = "300 K"
[parameters.alpha]
start = "{alpha}"
lower = "1e-7 m2/s"
[parameters.m_loss]
start = "{m_loss}"
lower = "1e-6 1/s"
[[datasets]]
name = "sensors"
file = "rod.csv"
layout = "sensors"
observe = "value"
time_column = "time"
sigma = "0.05 K"
sensors = [
  { column = "T1", position = "30 mm" },
  { column = "T2", position = "70 mm" },
]
"#,
        data: (
            "rod.csv",
            rows(
                "time [s],T1 [K],T2 [K]",
                (1..=120).map(|k| format!("{}", 30 * k)),
                2,
            ),
        ),
        columns: &["T1", "T2"],
        // Copper at 300 K: α = 117 mm²/s (Incropera & DeWitt, Table A.1).
        params: &[
            ("alpha", "117e-6 m2/s", "40e-6 m2/s", 117e-6),
            ("m_loss", "1e-3 1/s", "5e-3 1/s", 1e-3),
        ],
    });
    // Ångström's relation α = ω Δx² / (2 Δφ ln(A1/A2)) holds with lateral loss (Ångström
    // 1861, from memory; the loss cancels in the product of the two logarithms). The rod is
    // finite (a wave reflected from the sealed end), so allow 3 %.
    let pairs: Vec<f64> = a.shortcuts.iter().filter_map(|s| s.estimate()).collect();
    assert_eq!(pairs.len(), 1, "{:?}", a.shortcuts);
    assert!(
        (pairs[0] / 117e-6 - 1.0).abs() < 0.03,
        "Angstrom {:e}",
        pairs[0]
    );
}

#[test]
fn depth_profiles_with_surface_value_and_background() {
    let keys = [1.0, 4.0]
        .iter()
        .flat_map(|t| (0..25).map(move |k| format!("{t},{}", 20 * k)))
        .collect::<Vec<_>>();
    run(&Case {
        text: r#"
title = "profiles"
[sample]
shape = "slab"
value_unit = "mol/m3"
thickness = "2 mm"
diffusivity = "D"
[ends.left]
value = "C_s"
[ends.right]
sealed = true
[initial]
value = "C_0"
[parameters.D]
start = "{D}"
lower = "1e-18 m2/s"
[parameters.C_s]
start = "{C_s}"
[parameters.C_0]
start = "{C_0}"
[[datasets]]
name = "sections"
file = "p.csv"
layout = "profiles"
observe = "value"
time_column = "time"
position_column = "depth"
value_column = "c"
sigma = "5 mol/m3"
"#,
        data: (
            "p.csv",
            rows("time [h],depth [um],c [mol/m3]", keys.into_iter(), 1),
        ),
        columns: &["c"],
        params: &[
            ("D", "3e-12 m2/s", "1e-11 m2/s", 3e-12),
            ("C_s", "900 mol/m3", "600 mol/m3", 900.0),
            ("C_0", "50 mol/m3", "100 mol/m3", 50.0),
        ],
    });
}

#[test]
fn permeation_membrane_cumulative_amount() {
    run(&Case {
        text: r#"
title = "permeation"
[sample]
shape = "slab"
value_unit = "mol/m3"
thickness = "50 um"
diffusivity = "D"
[ends.left]
value = "C_up"
[ends.right]
value = 0.0
[initial]
value = 0.0
[parameters.D]
start = "{D}"
lower = "1e-16 m2/s"
[parameters.C_up]
start = "{C_up}"
lower = "0 mol/m3"
[[datasets]]
name = "downstream"
file = "q.csv"
layout = "time_series"
observe = "cumulative_out"
end = "right"
time_column = "time"
value_column = "Q"
value_unit = "mol/m2"
sigma = "1e-6 mol/m2"
"#,
        data: (
            "q.csv",
            rows(
                "time [min],Q [mol/m2]",
                (1..=40).map(|k| format!("{}", 5 * k)),
                1,
            ),
        ),
        columns: &["Q"],
        // Time lag L²/(6D) = 417 s at D = 1e-12 m²/s; data to 200 min reach steady state.
        params: &[
            ("D", "1e-12 m2/s", "4e-12 m2/s", 1e-12),
            ("C_up", "20 mol/m3", "8 mol/m3", 20.0),
        ],
    });
}

#[test]
fn sorption_into_spheres() {
    run(&Case {
        text: r#"
title = "beads"
[sample]
shape = "sphere"
value_unit = "mg/cm3"
radius = "250 um"
diffusivity = "D"
[ends.right.transfer]
coefficient = "h"
outside = "40 mg/cm3"
[initial]
value = 0.0
[parameters.D]
start = "{D}"
lower = "1e-16 m2/s"
[parameters.h]
start = "{h}"
lower = "1e-12 m/s"
[parameters.M_inf]
start = "{M_inf}"
[[datasets]]
name = "uptake"
file = "u.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "0.001 mg"
scale = "M_inf"
"#,
        data: (
            "u.csv",
            rows(
                "time [min],mass [mg]",
                (1..=40).map(|k| format!("{}", (k * k) as f64 * 0.5)),
                1,
            ),
        ),
        columns: &["mass"],
        params: &[
            ("D", "5e-12 m2/s", "1.5e-11 m2/s", 5e-12),
            ("h", "2e-7 m/s", "1e-6 m/s", 2e-7),
            ("M_inf", "1.2 mg", "1 mg", 1.2e-6),
        ],
    });
}

#[test]
fn uptake_with_exponential_concentration_dependent_d() {
    run(&Case {
        text: r#"
title = "D(u)"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "100 um"
diffusivity = { law = "exponential", d0 = "D0", beta = "beta", u_ref = "30 mg/cm3" }
[ends.left]
value = "30 mg/cm3"
[ends.right]
sealed = true
[initial]
value = 0.0
[parameters.D0]
start = "{D0}"
lower = "1e-16 m2/s"
[parameters.beta]
start = "{beta}"
[parameters.M_inf]
start = "{M_inf}"
[[datasets]]
name = "uptake"
file = "u.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "0.001 mg"
scale = "M_inf"
"#,
        data: (
            "u.csv",
            rows(
                "time [min],mass [mg]",
                (1..=40).map(|k| format!("{}", (k * k) as f64 * 0.4)),
                1,
            ),
        ),
        columns: &["mass"],
        params: &[
            ("D0", "1e-12 m2/s", "3e-12 m2/s", 1e-12),
            ("beta", "1.5", "0.5", 1.5),
            ("M_inf", "0.9 mg", "0.7 mg", 0.9e-6),
        ],
    });
}
