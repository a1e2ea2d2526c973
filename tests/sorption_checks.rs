//! Sorption and desorption of sheets: the parts the film examples do not cover. Synthetic data
//! come from published series solutions, computed in `tests/common` independently of
//! fickfit's solver:
//!
//! - plane sheet, both faces held at a fixed value: J. Crank, *The Mathematics of Diffusion*,
//!   2nd ed. 1975, eq. 4.18, `M_t/M_∞ = 1 − Σ 8/((2n+1)²π²) exp(−(2n+1)²π² D t / L²)`, L the
//!   full thickness; a sheet of thickness ℓ with one face sealed takes up like half of a sheet
//!   of thickness 2ℓ (by symmetry about the sealed face);
//! - the half-time `D t½ / L² = 0.04919` (Crank 1975 §4.3.4).
//!
//! Checked here: an uncertain start of the exposure fitted as a parameter (`exposure_start`),
//! with its Jacobian column; two thicknesses sharing D (`[datasets.sample]`) and the
//! thickness-scaling check of the report; a film on a substrate (one face sealed), where the
//! half-time formula needs twice the thickness.

use fickfit::analysis::{analyse, AnalysisOptions, ExperimentProblem};
use fickfit::experiment;
use fickfit::fit::ResidualProblem;
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};
use std::f64::consts::PI;
use std::fmt::Write as _;
use std::path::Path;
use std::sync::Arc;

// Each test binary uses only some of the shared helpers.
#[allow(dead_code)]
mod common;
use common::sheet_fraction;

const D_TRUE: f64 = 1.0e-12; // m²/s
const M_INF_MG: f64 = 0.8; // mg

/// d(M_t/M_∞)/dτ of Crank 1975 eq. 4.18, term by term: Σ 8 exp(−(2n+1)²π² τ).
fn sheet_fraction_rate(tau: f64) -> f64 {
    (0..400)
        .map(|n| {
            let k = (2 * n + 1) as f64;
            8.0 * (-(k * k) * PI * PI * tau).exp()
        })
        .sum()
}

/// Clock times, s: every 20 s for the first 10 min, then 40 log-spaced times to `t_end`.
fn clock_times(t_end: f64) -> Vec<f64> {
    let mut t: Vec<f64> = (0..30).map(|k| 20.0 * k as f64).collect();
    let (a, b) = (600f64.ln(), t_end.ln());
    t.extend((1..=40).map(|k| (a + (b - a) * k as f64 / 40.0).exp()));
    t
}

/// Mass uptake (mg) of a sheet whose exposure began at clock time `t0`: Crank eq. 4.18 at
/// `t − t0` for an effective thickness `l_eff` (the full thickness with both faces open, twice
/// the thickness with one sealed), zero before the exposure.
fn shifted_uptake(t: f64, t0: f64, l_eff: f64) -> f64 {
    let tau = D_TRUE * (t - t0) / (l_eff * l_eff);
    if tau <= 0.0 {
        0.0
    } else {
        M_INF_MG * sheet_fraction(tau)
    }
}

fn write_csv(path: &Path, t: &[f64], mg: &[f64]) {
    let mut s = String::from("time [s],mass [mg]\n");
    for (t, m) in t.iter().zip(mg) {
        writeln!(s, "{t:.10e},{m:.12e}").unwrap();
    }
    std::fs::write(path, s).unwrap();
}

fn noisy(values: Vec<f64>, sigma: f64, seed: u64) -> Vec<f64> {
    if sigma == 0.0 {
        return values;
    }
    let normal = Normal::new(0.0, sigma).unwrap();
    let mut rng = StdRng::seed_from_u64(seed);
    values
        .into_iter()
        .map(|v| v + normal.sample(&mut rng))
        .collect()
}

fn load(dir: &Path, text: &str) -> Arc<experiment::Experiment> {
    std::fs::write(dir.join("e.toml"), text).unwrap();
    Arc::new(experiment::load(dir.join("e.toml")).unwrap())
}

/// A 100 µm sheet, both faces at a fixed value, fitted for D, M_inf and the exposure start.
fn sheet_with_start(sigma_mg: f64, t0_start: &str) -> String {
    format!(
        r#"
title = "sheet with an uncertain start"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "100 um"
diffusivity = "D"
[ends.left]
value = "10 mg/cm3"
[ends.right]
value = "10 mg/cm3"
[initial]
value = 0.0
[parameters.D]
start = "3e-12 m2/s"
lower = "1e-16 m2/s"
[parameters.M_inf]
start = "0.6 mg"
[parameters.t0]
start = "{t0_start}"
[[datasets]]
name = "uptake"
file = "uptake.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "{sigma_mg} mg"
weighting = "absolute"
scale = "M_inf"
exposure_start = "t0"
"#
    )
}

#[test]
fn exposure_start_and_d_are_recovered_from_a_shifted_sheet() {
    let l = 100e-6;
    for t0_true in [150.0, -200.0] {
        let dir = tempfile::tempdir().unwrap();
        let t = clock_times(1.5 * l * l / D_TRUE);
        let mg: Vec<f64> = t.iter().map(|&t| shifted_uptake(t, t0_true, l)).collect();
        write_csv(&dir.path().join("uptake.csv"), &t, &mg);
        let exp = load(dir.path(), &sheet_with_start(0.001, "0 s"));
        let a = analyse(exp.clone(), &AnalysisOptions::default()).unwrap();
        assert!(a.fit.stop.converged(), "{}", a.fit.stop_message);
        let est = |n: &str| a.fit.estimates[exp.parameter_index(n).unwrap()];
        // Exact (series) data: the fit is limited by the solver's accuracy, about 1e-4 of
        // M_t/M_∞ (docs/model.md, verification table).
        assert!(
            (est("D") / D_TRUE - 1.0).abs() < 1e-3,
            "t0 = {t0_true} s: D = {:e}",
            est("D")
        );
        assert!(
            (est("t0") - t0_true).abs() < 1.0,
            "t0 = {t0_true} s: fitted {} s",
            est("t0")
        );
        assert!((est("M_inf") / (M_INF_MG * 1e-6) - 1.0).abs() < 1e-3);
    }
}

#[test]
fn exposure_start_intervals_cover_the_truth_on_noisy_data() {
    let l = 100e-6;
    let t0_true = 95.0;
    let sigma = 0.002; // mg, 0.25 % of the uptake
    let dir = tempfile::tempdir().unwrap();
    let t = clock_times(1.5 * l * l / D_TRUE);
    let mg = noisy(
        t.iter().map(|&t| shifted_uptake(t, t0_true, l)).collect(),
        sigma,
        7,
    );
    write_csv(&dir.path().join("uptake.csv"), &t, &mg);
    let exp = load(dir.path(), &sheet_with_start(sigma, "0 s"));
    let a = analyse(exp.clone(), &AnalysisOptions::default()).unwrap();
    assert!(a.fit.stop.converged(), "{}", a.fit.stop_message);
    for (name, truth) in [("D", D_TRUE), ("t0", t0_true), ("M_inf", M_INF_MG * 1e-6)] {
        let p = &a.fit.parameters[exp.parameter_index(name).unwrap()];
        let iv = p.transformed_interval.as_ref().unwrap();
        assert!(
            iv.lower <= truth && truth <= iv.upper,
            "{name}: truth {truth:e} outside [{:e}, {:e}]",
            iv.lower,
            iv.upper
        );
    }
}

#[test]
fn the_residuals_are_a_smooth_function_of_the_exposure_start() {
    // The derivative of each residual with respect to t0, by central differences through the
    // fit's residual problem, against Crank eq. 4.18 differentiated in time:
    // r = (y − M_∞ F(D (t − t0)/L²))/σ, so ∂r/∂t0 = M_∞ F'(τ) D/(L² σ).
    let l = 100e-6;
    let t0 = 150.0;
    let sigma = 0.001e-6; // kg
    let dir = tempfile::tempdir().unwrap();
    let t = clock_times(1.5 * l * l / D_TRUE);
    let mg: Vec<f64> = t.iter().map(|&t| shifted_uptake(t, t0, l)).collect();
    write_csv(&dir.path().join("uptake.csv"), &t, &mg);
    let exp = load(dir.path(), &sheet_with_start(0.001, "150 s"));
    let k0 = exp.parameter_index("t0").unwrap();
    let mut p = vec![0.0; exp.parameters.len()];
    p[exp.parameter_index("D").unwrap()] = D_TRUE;
    p[exp.parameter_index("M_inf").unwrap()] = M_INF_MG * 1e-6;
    p[k0] = t0;
    let mut problem = ExperimentProblem::new(exp.clone()).unwrap();
    let n = problem.n_residuals();
    let mut r0 = vec![0.0; n];
    problem.residuals(&p, &mut r0).unwrap();
    let exact: Vec<f64> = t
        .iter()
        .map(|&t| {
            let tau = D_TRUE * (t - t0) / (l * l);
            if tau <= 0.0 {
                0.0
            } else {
                M_INF_MG * 1e-6 * sheet_fraction_rate(tau) * D_TRUE / (l * l * sigma)
            }
        })
        .collect();
    let largest = exact.iter().cloned().fold(0.0, f64::max);
    // Steps from 1 s down to 1e-5 s (the engine's central step here is 6e-6 · 150 s ≈ 1e-3 s).
    // Each must give the slope to 3e-4 of the largest: the solver's accuracy in the slope of
    // M_t is about 6e-5 of it here, and the central-difference truncation at 1 s below that
    // (common practice). A new adaptive step sequence at t0 ± h (no replay) was measured at
    // 1.1e-3 of it with h = 0.1 s: the jumps this check is there to catch.
    for h in [1.0, 0.1, 1e-3, 1e-5] {
        let (mut rp, mut rm) = (vec![0.0; n], vec![0.0; n]);
        let mut q = p.clone();
        q[k0] = t0 + h;
        problem.residuals(&q, &mut rp).unwrap();
        q[k0] = t0 - h;
        problem.residuals(&q, &mut rm).unwrap();
        let mut checked = 0;
        for i in 0..n {
            // Points within 20 s after the start see the kink of the step itself.
            if t[i] < t0 + 20.0 {
                continue;
            }
            let fd = (rp[i] - rm[i]) / (2.0 * h);
            assert!(
                (fd - exact[i]).abs() < 3e-4 * largest,
                "h = {h} s, t = {} s: finite difference {fd:e}, Crank {:e} (largest {largest:e})",
                t[i],
                exact[i]
            );
            checked += 1;
        }
        assert!(checked > 40, "only {checked} points checked");
    }
}

/// A coating on an impermeable substrate (left face exposed, right face sealed) measured at
/// two thicknesses, one file each; D shared, M_inf per run.
fn coating_two_thicknesses(sigma_mg: f64, l1_um: f64, l2_um: f64) -> String {
    format!(
        r#"
title = "coating on a substrate at two thicknesses"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "{l1_um} um"
diffusivity = "D"
[ends.left]
value = "10 mg/cm3"
[ends.right]
sealed = true
[initial]
value = 0.0
[parameters.D]
start = "3e-12 m2/s"
lower = "1e-16 m2/s"
[parameters.M_inf]
start = "0.5 mg"
per_dataset = true
[[datasets]]
name = "thin"
file = "thin.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "{sigma_mg} mg"
weighting = "absolute"
scale = "M_inf"
[[datasets]]
name = "thick"
file = "thick.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "{sigma_mg} mg"
weighting = "absolute"
scale = "M_inf"
[datasets.sample]
thickness = "{l2_um} um"
"#
    )
}

/// Writes thin.csv and thick.csv for coatings of `l1` and `l2` (m) with one face sealed, the
/// thick one taking up with `d2` instead of D (to imitate uptake that does not scale).
fn write_coatings(dir: &Path, l1: f64, l2: f64, d2: f64, sigma_mg: f64) {
    for (name, l, d, seed) in [("thin", l1, D_TRUE, 3), ("thick", l2, d2, 4)] {
        // One face sealed: half of a sheet of twice the thickness (symmetry).
        let l_eff = 2.0 * l;
        let t = clock_times(1.2 * l_eff * l_eff / d);
        let mg = noisy(
            t.iter()
                .map(|&t| M_INF_MG * sheet_fraction(d * t / (l_eff * l_eff)))
                .collect(),
            sigma_mg,
            seed,
        );
        write_csv(&dir.join(format!("{name}.csv")), &t, &mg);
    }
}

#[test]
fn two_thicknesses_share_d_and_pass_the_scaling_check() {
    let sigma = 0.002;
    let dir = tempfile::tempdir().unwrap();
    write_coatings(dir.path(), 40e-6, 80e-6, D_TRUE, sigma);
    let exp = load(dir.path(), &coating_two_thicknesses(sigma, 40.0, 80.0));
    // The per-run size reached the model.
    let size = |d: usize| {
        let (lo, hi) = exp.datasets[d].sample_extent().unwrap();
        hi - lo
    };
    assert!((size(0) - 40e-6).abs() < 1e-15 && (size(1) - 80e-6).abs() < 1e-15);
    let a = analyse(exp.clone(), &AnalysisOptions::default()).unwrap();
    assert!(a.fit.stop.converged(), "{}", a.fit.stop_message);
    let kd = exp.parameter_index("D").unwrap();
    let iv = a.fit.parameters[kd].transformed_interval.unwrap();
    assert!(iv.lower <= D_TRUE && D_TRUE <= iv.upper, "{iv:?}");
    let c = a.thickness_scaling.as_ref().expect("a thickness check");
    assert_eq!(c.dimension, "thickness");
    assert_eq!(c.groups.len(), 2);
    assert_eq!(c.groups[0].datasets, vec![0]);
    for g in &c.groups {
        let s = g.estimate.as_ref().unwrap();
        assert!(
            s.interval.0 <= D_TRUE && D_TRUE <= s.interval.1,
            "{} m: D = {:e}, interval {:?}",
            g.size,
            s.value,
            s.interval
        );
    }
    assert_eq!(c.consistent, Some(true), "{}", c.verdict);
    assert!(c.verdict.contains("agrees"), "{}", c.verdict);
}

#[test]
fn uptake_that_does_not_scale_with_thickness_fails_the_check() {
    // The thick coating takes up as if D were 2.5 times larger: doubling the thickness
    // multiplies the half-time by 1.6 instead of 4 (invented; two-stage or case II uptake
    // does not scale as L² either).
    let sigma = 0.002;
    let dir = tempfile::tempdir().unwrap();
    write_coatings(dir.path(), 40e-6, 80e-6, 2.5 * D_TRUE, sigma);
    let exp = load(dir.path(), &coating_two_thicknesses(sigma, 40.0, 80.0));
    let a = analyse(exp.clone(), &AnalysisOptions::default()).unwrap();
    let c = a.thickness_scaling.as_ref().expect("a thickness check");
    assert_eq!(c.consistent, Some(false), "{}", c.verdict);
    assert!(c.p_value < 0.05, "p = {}", c.p_value);
    let (d1, d2) = (
        c.groups[0].estimate.as_ref().unwrap().value,
        c.groups[1].estimate.as_ref().unwrap().value,
    );
    assert!((d1 / D_TRUE - 1.0).abs() < 0.02, "thin alone: {d1:e}");
    assert!(
        (d2 / (2.5 * D_TRUE) - 1.0).abs() < 0.02,
        "thick alone: {d2:e}"
    );
}

#[test]
fn a_sealed_face_needs_twice_the_thickness_in_the_half_time_formula() {
    use fickfit::analytic::sheet::Faces;
    use fickfit::shortcuts::uptake::{half_time, initial_slope, Geometry, Plateau};
    // A 50 µm coating on a substrate, exact data (Crank eq. 4.18 for a sheet of 100 µm).
    let l = 50e-6;
    let dir = tempfile::tempdir().unwrap();
    let t = clock_times(1.5 * (2.0 * l) * (2.0 * l) / D_TRUE);
    let mg: Vec<f64> = t
        .iter()
        .map(|&t| M_INF_MG * sheet_fraction(D_TRUE * t / (4.0 * l * l)))
        .collect();
    write_csv(&dir.path().join("uptake.csv"), &t, &mg);
    // The naive reading: the half-time formula D = 0.04919 L²/t½ with the coating's own
    // thickness, as for a free film open on both faces (Crank 1975 §4.3.4).
    let plateau = Plateau::Given(M_INF_MG);
    let naive = half_time(
        &t,
        &mg,
        plateau,
        Geometry::Sheet {
            thickness: l,
            faces: Faces::Both,
        },
    )
    .unwrap();
    assert!(
        (naive.d / (D_TRUE / 4.0) - 1.0).abs() < 0.01,
        "naive half-time D = {:e}: a quarter of the truth expected",
        naive.d
    );
    // Crank's check on t½ itself: D t½/(2L)² = 0.04919.
    assert!((D_TRUE * naive.t_half / (4.0 * l * l) / 0.04919 - 1.0).abs() < 0.01);
    let naive_slope = initial_slope(&t, &mg, plateau, l, Faces::Both, 0.5, false).unwrap();
    assert!((naive_slope.d / (D_TRUE / 4.0) - 1.0).abs() < 0.02);
    // The analysis reads the sealed face off the model, so its shortcuts use 2L; the fit
    // needs no such reading.
    let text = sheet_with_start(0.001, "0 s")
        .replace(
            "[ends.right]\nvalue = \"10 mg/cm3\"",
            "[ends.right]\nsealed = true",
        )
        .replace("thickness = \"100 um\"", "thickness = \"50 um\"")
        .replace("[parameters.t0]\nstart = \"0 s\"\n", "")
        .replace("exposure_start = \"t0\"\n", "");
    let exp = load(dir.path(), &text);
    let a = analyse(exp.clone(), &AnalysisOptions::default()).unwrap();
    assert!(a.fit.stop.converged(), "{}", a.fit.stop_message);
    let estimates: Vec<f64> = a.shortcuts.iter().filter_map(|s| s.estimate()).collect();
    assert_eq!(estimates.len(), 2, "{:?}", a.shortcuts);
    for d in estimates {
        // Interpolation between 70 points: 1 % (common practice).
        assert!((d / D_TRUE - 1.0).abs() < 0.01, "shortcut with 2L: {d:e}");
    }
    let d = a.fit.estimates[exp.parameter_index("D").unwrap()];
    assert!((d / D_TRUE - 1.0).abs() < 1e-3, "fit D = {d:e}");
}

#[test]
fn run_sizes_and_exposure_starts_are_checked_where_written() {
    use fickfit::InputKind;
    let dir = tempfile::tempdir().unwrap();
    let t = clock_times(2e4);
    let mg: Vec<f64> = t.iter().map(|&t| shifted_uptake(t, 0.0, 100e-6)).collect();
    write_csv(&dir.path().join("uptake.csv"), &t, &mg);
    let base = sheet_with_start(0.001, "0 s");
    let cases: Vec<(String, InputKind, &str, &str)> = vec![
        (
            format!("{base}[datasets.sample]\nradius = \"1 mm\"\n"),
            InputKind::BadValue,
            "datasets[0].sample.radius",
            "radius =",
        ),
        (
            format!("{base}[datasets.sample]\n"),
            InputKind::MissingKey,
            "datasets[0].sample",
            "[datasets.sample]",
        ),
        (
            format!("{base}[datasets.sample]\nthicknes = \"1 mm\"\n"),
            InputKind::UnknownKey,
            "datasets[0].sample.thicknes",
            "thicknes =",
        ),
        (
            format!("{base}[datasets.sample]\nthickness = \"-5 um\"\n"),
            InputKind::BadValue,
            "datasets[0].sample.thickness",
            "thickness = \"-5",
        ),
        (
            base.replace("exposure_start = \"t0\"", "exposure_start = \"t1\""),
            InputKind::UndefinedParameter,
            "datasets[0].exposure_start",
            "exposure_start =",
        ),
        (
            base.replace(
                "[ends.left]\nvalue = \"10 mg/cm3\"",
                "[ends.left]\nvalue = { rows = [[0, 0], [1, 10]], time_unit = \"min\" }",
            ),
            InputKind::BadValue,
            "datasets[0].exposure_start",
            "exposure_start =",
        ),
    ];
    for (text, kind, key, line_of) in cases {
        std::fs::write(dir.path().join("e.toml"), &text).unwrap();
        let e = match experiment::load(dir.path().join("e.toml")) {
            Ok(_) => panic!("{key}: should not load"),
            Err(e) => e,
        };
        assert_eq!(e.input_kind(), Some(kind), "{key}: {e}");
        let loc = e.location().unwrap();
        assert_eq!(loc.key.as_deref(), Some(key), "{e}");
        let line = text.lines().position(|l| l.contains(line_of)).unwrap() as u64 + 1;
        assert_eq!(loc.line, Some(line), "{e}");
    }
    // Accepted: a sphere's radius per run.
    let sphere = base
        .replace(
            "shape = \"slab\"\nvalue_unit = \"mg/cm3\"\nthickness = \"100 um\"",
            "shape = \"sphere\"\nvalue_unit = \"mg/cm3\"\nradius = \"100 um\"",
        )
        .replace("[ends.left]\nvalue = \"10 mg/cm3\"\n", "")
        + "[datasets.sample]\nradius = \"250 um\"\n";
    let exp = load(dir.path(), &sphere);
    assert_eq!(exp.datasets[0].sample_extent(), Some((0.0, 250e-6)));
}
