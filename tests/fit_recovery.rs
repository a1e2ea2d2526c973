//! Recovery: fits of synthetic data made by the forward model at known parameter values.
//! Noise-free data must give back the truth to 1e-6 relative (common practice: a fit of exact
//! model output recovers the parameters that made it); noisy data must give intervals that
//! contain the truth.

use fickfit::analysis::{analyse, AnalysisOptions};
use fickfit::experiment;
use fickfit::simulate::simulate;
use std::fmt::Write as _;
use std::sync::Arc;

/// A film uptake experiment with surface resistance: D and h shared, M_inf and m0 fitted.
fn film_toml(d_start: &str, h_start: &str, sigma: &str) -> String {
    format!(
        r#"
title = "synthetic film"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "80 um"
diffusivity = "D"

[ends.left.transfer]
coefficient = "h"
partition = 1.0
outside = "3 mg/cm3"

[ends.right]
sealed = true

[initial]
value = 0.0

[parameters.D]
start = "{d_start}"
lower = "1e-16 m2/s"
transform = "log"

[parameters.h]
start = "{h_start}"
lower = "1e-12 m/s"
transform = "log"

[parameters.M_inf]
start = "0.5 mg"

[parameters.m0]
start = "20 mg"

[[datasets]]
name = "uptake"
file = "uptake.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "{sigma}"
weighting = "absolute"
scale = "M_inf"
offset = "m0"
"#
    )
}

/// Times in minutes, spread over the whole uptake.
fn minutes() -> Vec<f64> {
    (1..=40).map(|k| 0.5 * (k as f64).powf(1.8)).collect()
}

fn write_csv(dir: &std::path::Path, values: &[f64]) {
    let mut s = String::from("time [min],mass [mg]\n");
    for (t, v) in minutes().iter().zip(values) {
        writeln!(s, "{t},{v:.15e}").unwrap();
    }
    std::fs::write(dir.join("uptake.csv"), s).unwrap();
}

/// Make synthetic data at the truth in a temporary folder; returns the folder.
fn synthetic(noise_mg: f64, seed: u64) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    // Placeholder data to define the times; the values are replaced by the simulation.
    write_csv(dir.path(), &vec![20.0; minutes().len()]);
    let truth = film_toml("2.0e-13 m2/s", "4e-9 m/s", "0.002 mg");
    std::fs::write(dir.path().join("truth.toml"), &truth).unwrap();
    let exp = experiment::load(dir.path().join("truth.toml")).unwrap();
    let mut params = exp.start_values();
    // M_inf = 0.42 mg, m0 = 20.137 mg at the truth (SI: kg).
    params[exp.parameter_index("M_inf").unwrap()] = 0.42e-6;
    params[exp.parameter_index("m0").unwrap()] = 20.137e-6;
    let sim = simulate(&exp, &params, noise_mg * 1e-6, seed).unwrap();
    let mg: Vec<f64> = sim.points.iter().map(|p| p.value * 1e6).collect();
    write_csv(dir.path(), &mg);
    dir
}

/// Fit synthetic data from a start 3× off in D and 5× off in h.
fn fit_synthetic(
    noise_mg: f64,
    seed: u64,
) -> (Arc<experiment::Experiment>, fickfit::analysis::Analysis) {
    let dir = synthetic(noise_mg, seed);
    std::fs::write(
        dir.path().join("fit.toml"),
        film_toml("6e-13 m2/s", "2e-8 m/s", "0.002 mg"),
    )
    .unwrap();
    let exp = Arc::new(experiment::load(dir.path().join("fit.toml")).unwrap());
    let a = analyse(exp.clone(), &AnalysisOptions::default()).unwrap();
    assert!(a.fit.stop.converged(), "{}", a.fit.stop_message);
    (exp, a)
}

#[test]
fn noise_free_film_uptake_recovers_truth() {
    let (exp, a) = fit_synthetic(0.0, 1);
    let truth = [
        ("D", 2.0e-13),
        ("h", 4e-9),
        ("M_inf", 0.42e-6),
        ("m0", 20.137e-6),
    ];
    for (name, value) in truth {
        let k = exp.parameter_index(name).unwrap();
        let got = a.fit.estimates[k];
        assert!(
            (got / value - 1.0).abs() < 1e-6,
            "{name}: fitted {got:e}, truth {value:e}"
        );
    }
}

#[test]
fn noisy_film_uptake_intervals_cover_truth() {
    let (exp, a) = fit_synthetic(0.002, 7);
    for (name, value) in [("D", 2.0e-13), ("h", 4e-9)] {
        let k = exp.parameter_index(name).unwrap();
        let p = &a.fit.parameters[k];
        let i = p
            .transformed_interval
            .as_ref()
            .or(p.interval.as_ref())
            .unwrap();
        assert!(
            i.lower < value && value < i.upper,
            "{name}: truth {value:e} outside [{:e}, {:e}]",
            i.lower,
            i.upper
        );
        // The interval is informative: narrower than a factor 2 either side.
        assert!(
            i.upper / i.lower < 4.0,
            "{name}: interval [{:e}, {:e}] too wide",
            i.lower,
            i.upper
        );
    }
    // χ² consistent with the noise that was added.
    let chi = a.fit.goodness.chi_square.as_ref().unwrap();
    assert!(
        chi.p_value > 0.001 && chi.p_value < 0.999,
        "χ² p = {}",
        chi.p_value
    );
}
