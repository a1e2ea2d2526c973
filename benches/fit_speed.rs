//! Fit speed: whole analyses (start values, search, covariance, checks; no report files).
//!
//! - `uptake_60_points_3_parameters`: a 60-point sorption curve of a 100 µm film (both faces at
//!   a fixed value) with balance noise, fitted for D, M_inf and the balance offset m0, starting
//!   from the shortcut estimates; with Jacobian intervals, and again with profile-likelihood
//!   intervals for all three parameters. The data are Crank's plane-sheet series (1975, eq.
//!   4.18, `fickfit::analytic::sheet::uptake`) with seeded Gaussian noise.
//! - `sample/<name>`: every bundled sample scenario in sample-data/, as `fickfit fit` analyses
//!   it (Jacobian intervals).
//!
//! Criterion prints the median time of each; docs/performance.md records a run.

use criterion::{criterion_group, criterion_main, Criterion};
use fickfit::analysis::{analyse, AnalysisOptions};
use fickfit::experiment;
use rand::rngs::StdRng;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use std::fmt::Write as _;
use std::hint::black_box;
use std::path::{Path, PathBuf};
use std::sync::Arc;

const THICKNESS: f64 = 100e-6;
const D_TRUE: f64 = 3e-13;
const M_INF_MG: f64 = 0.8;
const M0_MG: f64 = 12.5;
const SIGMA_MG: f64 = 0.002;

/// Write the 60-point uptake experiment into `dir`; returns the experiment file.
fn write_uptake(dir: &Path) -> PathBuf {
    let noise = Normal::new(0.0, SIGMA_MG).expect("normal");
    let mut rng = StdRng::seed_from_u64(7);
    let mut data = String::from("time [s],mass [mg]\n");
    // Logarithmic sampling over 0.002 ≤ D t / L² ≤ 1.
    for k in 0..60 {
        let tau = (0.002f64.ln() + (1.0f64.ln() - 0.002f64.ln()) * k as f64 / 59.0).exp();
        let t = tau * THICKNESS * THICKNESS / D_TRUE;
        let m = M0_MG + M_INF_MG * fickfit::analytic::sheet::uptake(tau) + noise.sample(&mut rng);
        writeln!(data, "{t:.6e},{m:.6}").expect("string");
    }
    std::fs::write(dir.join("uptake.csv"), data).expect("write data");
    let text = r#"
title = "60-point sorption curve, 100 um film"
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
file = "uptake.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "0.002 mg"
weighting = "absolute"
scale = "M_inf"
offset = "m0"
"#;
    let path = dir.join("uptake.toml");
    std::fs::write(&path, text).expect("write experiment");
    path
}

/// Every experiment.toml under sample-data/ (one level or two deep).
fn samples() -> Vec<(String, PathBuf)> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-data");
    let mut out = Vec::new();
    let mut visit = |dir: &Path, name: String| {
        let f = dir.join("experiment.toml");
        if f.is_file() {
            out.push((name, f));
        }
    };
    let mut dirs: Vec<_> = std::fs::read_dir(&root)
        .expect("sample-data")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_dir())
        .collect();
    dirs.sort();
    for d in dirs {
        let name = d
            .file_name()
            .unwrap_or_default()
            .to_string_lossy()
            .into_owned();
        visit(&d, name.clone());
        let mut subs: Vec<_> = std::fs::read_dir(&d)
            .expect("folder")
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.is_dir())
            .collect();
        subs.sort();
        for s in subs {
            let sub = s
                .file_name()
                .unwrap_or_default()
                .to_string_lossy()
                .into_owned();
            visit(&s, format!("{name}/{sub}"));
        }
    }
    out
}

fn bench(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temporary folder");
    let file = write_uptake(dir.path());
    let uptake = Arc::new(experiment::load(&file).expect("experiment"));
    let mut g = c.benchmark_group("fit_speed");
    g.sample_size(20);
    g.bench_function("uptake_60_points_3_parameters", |b| {
        b.iter(|| {
            let a = analyse(black_box(uptake.clone()), &AnalysisOptions::default()).expect("fit");
            black_box(a.fit.estimates[0]);
        })
    });
    let with_profile = AnalysisOptions {
        profile: true,
        ..Default::default()
    };
    g.bench_function("uptake_60_points_3_parameters_with_profiles", |b| {
        b.iter(|| {
            let a = analyse(black_box(uptake.clone()), &with_profile).expect("fit");
            black_box(a.fit.estimates[0]);
        })
    });
    for (name, path) in samples() {
        let e = Arc::new(experiment::load(&path).expect("sample experiment"));
        g.bench_function(format!("sample/{name}"), |b| {
            b.iter(|| {
                let a = analyse(black_box(e.clone()), &AnalysisOptions::default()).expect("fit");
                black_box(a.fit.estimates[0]);
            })
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
