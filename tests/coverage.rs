//! Coverage study: 200 seeded noise replicates of a synthetic uptake experiment with known D.
//! A 95 % interval must contain the truth in about 95 % of them; with 200 replicates the
//! binomial standard deviation is 1.5 %, so 92–98 % is the accepted band (common practice:
//! a frequentist interval is checked by simulation; C. P. Robert & G. Casella, *Monte Carlo
//! Statistical Methods*, 2004, ch. 3, from memory). Checked for the Jacobian interval (in SI
//! and on the fitted log scale) and for the profile-likelihood interval.
//!
//! The data are made by the forward model itself at the truth plus Gaussian noise, so the
//! study tests the statistics, not the discretisation (which other tests cover). A coarse
//! uniform grid keeps the 200 fits and profiles fast.

use fickfit::analysis::{analyse, AnalysisOptions};
use fickfit::experiment;
use fickfit::simulate::simulate;
use rayon::prelude::*;
use std::fmt::Write as _;
use std::sync::Arc;

const D_TRUE: f64 = 2.0e-12; // m²/s
const M_INF: f64 = 0.5e-6; // kg
const SIGMA_MG: f64 = 0.01; // 2 % of M_inf
const REPLICATES: u64 = 200;

fn text(d_start: &str, m_start: &str) -> String {
    format!(
        r#"
title = "coverage study: plane sheet, both faces at a fixed value"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "100 um"
diffusivity = "D"
[ends.left]
value = "5 mg/cm3"
[ends.right]
value = "5 mg/cm3"
[initial]
value = 0.0
[parameters.D]
start = "{d_start}"
lower = "1e-16 m2/s"
transform = "log"
[parameters.M_inf]
start = "{m_start}"
[[datasets]]
name = "uptake"
file = "uptake.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "{SIGMA_MG} mg"
weighting = "absolute"
scale = "M_inf"
[solver]
uniform_cells = 40
"#
    )
}

/// 30 times over D t / L² from 0.003 to 0.6 (the curve from 6 % to 99.8 %), in s.
fn times() -> Vec<f64> {
    let l2_over_d = (100e-6f64).powi(2) / D_TRUE;
    (0..30)
        .map(|k| {
            (0.003f64.ln() + (0.6f64.ln() - 0.003f64.ln()) * k as f64 / 29.0).exp() * l2_over_d
        })
        .collect()
}

fn write_csv(dir: &std::path::Path, values_mg: &[f64]) {
    let mut s = String::from("time [s],mass [mg]\n");
    for (t, v) in times().iter().zip(values_mg) {
        writeln!(s, "{t:.10e},{v:.12e}").unwrap();
    }
    std::fs::write(dir.join("uptake.csv"), s).unwrap();
}

/// (Jacobian SI, Jacobian log-scale, profile) coverage of D for one seed.
fn replicate(seed: u64) -> (bool, bool, bool) {
    let dir = tempfile::tempdir().unwrap();
    write_csv(dir.path(), &vec![0.0; 30]);
    std::fs::write(dir.path().join("truth.toml"), text("2e-12 m2/s", "0.5 mg")).unwrap();
    let truth = experiment::load(dir.path().join("truth.toml")).unwrap();
    let mut p = truth.start_values();
    p[truth.parameter_index("M_inf").unwrap()] = M_INF;
    p[truth.parameter_index("D").unwrap()] = D_TRUE;
    let sim = simulate(&truth, &p, SIGMA_MG * 1e-6, seed).unwrap();
    let mg: Vec<f64> = sim.points.iter().map(|x| x.value * 1e6).collect();
    write_csv(dir.path(), &mg);
    std::fs::write(dir.path().join("fit.toml"), text("5e-12 m2/s", "0.4 mg")).unwrap();
    let exp = Arc::new(experiment::load(dir.path().join("fit.toml")).unwrap());
    let a = analyse(
        exp.clone(),
        &AnalysisOptions {
            profile: true,
            ..Default::default()
        },
    )
    .unwrap();
    assert!(
        a.fit.stop.converged(),
        "seed {seed}: {}",
        a.fit.stop_message
    );
    let pr = &a.fit.parameters[exp.parameter_index("D").unwrap()];
    let inside = |lo: f64, hi: f64| lo < D_TRUE && D_TRUE < hi;
    let jac = pr.interval.as_ref().unwrap();
    let log = pr.transformed_interval.as_ref().unwrap();
    let prof = pr.profile.as_ref().unwrap();
    let (lo, hi) = (
        prof.lower.value().expect("profile lower end"),
        prof.upper.value().expect("profile upper end"),
    );
    (
        inside(jac.lower, jac.upper),
        inside(log.lower, log.upper),
        inside(lo, hi),
    )
}

#[test]
fn intervals_for_d_cover_the_truth_95_percent_of_the_time() {
    let results: Vec<(bool, bool, bool)> = (0..REPLICATES).into_par_iter().map(replicate).collect();
    let share = |f: fn(&(bool, bool, bool)) -> bool| {
        results.iter().filter(|r| f(r)).count() as f64 / REPLICATES as f64
    };
    let jacobian = share(|r| r.0);
    let log_scale = share(|r| r.1);
    let profile = share(|r| r.2);
    println!(
        "coverage of the 95 % intervals for D over {REPLICATES} replicates: Jacobian {:.1} %, \
         Jacobian on the log scale {:.1} %, profile likelihood {:.1} %",
        100.0 * jacobian,
        100.0 * log_scale,
        100.0 * profile
    );
    for (name, c) in [
        ("Jacobian", jacobian),
        ("Jacobian (log scale)", log_scale),
        ("profile", profile),
    ] {
        assert!((0.92..=0.98).contains(&c), "{name} coverage {c}");
    }
}
