//! Hard fits: synthetic traps where the data cannot determine what is asked, or the model is
//! wrong, or the search starts far away. Each test asserts the documented outcome (see
//! docs/reliability.md, "Hard fits"): a correct estimate whose interval covers the truth, or a
//! warning naming the cause, or an error naming the cause; never a narrow interval that misses
//! the truth without a warning about that parameter.
//!
//! The data are made from published series solutions, computed here independently of
//! fickfit's own analytic module, with seeded Gaussian noise:
//!
//! - plane sheet, both faces at a fixed value: J. Crank, *The Mathematics of Diffusion*,
//!   2nd ed. 1975, eq. 4.18, `M_t/M_∞ = 1 − Σ 8/((2n+1)²π²) exp(−(2n+1)²π² D t / L²)`, L the
//!   full thickness;
//! - plane sheet with surface transfer on both faces: Crank 1975, eq. 4.55,
//!   `M_t/M_∞ = 1 − Σ 2 Bi² exp(−β_n² D t/ℓ²) / (β_n² (β_n² + Bi² + Bi))`, `β tan β = Bi`,
//!   `Bi = h ℓ / D`, ℓ the half thickness.

use fickfit::analysis::{analyse, Analysis, AnalysisOptions};
use fickfit::experiment;
use fickfit::stats::WarningKind;
use rand::{rngs::StdRng, SeedableRng};
use rand_distr::{Distribution, Normal};
use std::f64::consts::PI;
use std::fmt::Write as _;
use std::path::Path;
use std::process::Command;
use std::sync::Arc;

mod common;
use common::{robin_fraction, robin_roots, sheet_fraction};

const D_TRUE: f64 = 1.0e-12; // m²/s
const L: f64 = 100e-6; // m, full thickness
const M_INF_MG: f64 = 0.8; // mg
const SIGMA_MG: f64 = 0.002; // mg, noise and stated σ

/// `count` times log-spaced over τ = D t / L² from `tau_a` to `tau_b`, in s.
fn times(tau_a: f64, tau_b: f64, count: usize) -> Vec<f64> {
    let (a, b) = (tau_a.ln(), tau_b.ln());
    (0..count)
        .map(|k| {
            let w = if count > 1 {
                k as f64 / (count - 1) as f64
            } else {
                0.0
            };
            (a + (b - a) * w).exp() * L * L / D_TRUE
        })
        .collect()
}

/// `clean` plus seeded Gaussian noise of standard deviation `sd`.
fn noisy(clean: &[f64], sd: f64, seed: u64) -> Vec<f64> {
    let normal = Normal::new(0.0, sd).unwrap();
    let mut rng = StdRng::seed_from_u64(seed);
    clean.iter().map(|v| v + normal.sample(&mut rng)).collect()
}

fn write_data(dir: &Path, file: &str, t: &[f64], mg: &[f64]) {
    let mut s = String::from("time [s],mass [mg]\n");
    for (t, m) in t.iter().zip(mg) {
        writeln!(s, "{t:.10e},{m:.12e}").unwrap();
    }
    std::fs::write(dir.join(file), s).unwrap();
}

/// Dirichlet-sheet uptake in mg at the truth.
fn sheet_mg(t: &[f64]) -> Vec<f64> {
    t.iter()
        .map(|t| M_INF_MG * sheet_fraction(D_TRUE * t / (L * L)))
        .collect()
}

/// Surface-transfer-sheet uptake in mg at the truth and Biot number `bi`.
fn robin_mg(t: &[f64], bi: f64) -> Vec<f64> {
    let roots = robin_roots(bi, 80);
    let half = L / 2.0;
    t.iter()
        .map(|t| M_INF_MG * robin_fraction(D_TRUE * t / (half * half), bi, &roots))
        .collect()
}

/// The faces: fixed value (`"value"`) or surface transfer with coefficient `h`.
fn ends(faces: &str) -> &'static str {
    if faces == "value" {
        "[ends.left]\nvalue = \"10 mg/cm3\"\n[ends.right]\nvalue = \"10 mg/cm3\"\n"
    } else {
        "[ends.left.transfer]\ncoefficient = \"h\"\noutside = \"10 mg/cm3\"\n\
         [ends.right.transfer]\ncoefficient = \"h\"\noutside = \"10 mg/cm3\"\n"
    }
}

/// A 100 µm sheet, one uptake run `uptake.csv` fitted as `M_inf` times the fractional uptake,
/// σ absolute; `parameters` and `extra` (`[fit]` etc.) as given.
fn experiment_text(faces: &str, parameters: &str, extra: &str) -> String {
    format!(
        r#"
title = "hard fit ({faces})"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "100 um"
diffusivity = "D"
{ends}
[initial]
value = 0.0
{parameters}
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
{extra}
"#,
        ends = ends(faces)
    )
}

/// D on a log scale between wide bounds, M_inf in mg.
fn params_d_m(d_start: &str) -> String {
    format!(
        r#"
[parameters.D]
start = "{d_start}"
lower = "1e-20 m2/s"
upper = "1e-4 m2/s"
transform = "log"
[parameters.M_inf]
start = "0.5 mg"
"#
    )
}

const PARAMS_D_H_M: &str = r#"
[parameters.D]
start = "3e-12 m2/s"
lower = "1e-18 m2/s"
upper = "1e-6 m2/s"
transform = "log"
[parameters.h]
start = "1e-7 m/s"
lower = "1e-14 m/s"
upper = "1 m/s"
transform = "log"
[parameters.M_inf]
start = "0.5 mg"
"#;

/// One trap: a folder with `uptake.csv` and `e.toml`.
struct Trap {
    dir: tempfile::TempDir,
}

impl Trap {
    fn new(t: &[f64], mg: &[f64], experiment: &str) -> Trap {
        let dir = tempfile::tempdir().unwrap();
        write_data(dir.path(), "uptake.csv", t, mg);
        std::fs::write(dir.path().join("e.toml"), experiment).unwrap();
        Trap { dir }
    }

    fn toml(&self) -> std::path::PathBuf {
        self.dir.path().join("e.toml")
    }

    fn analyse(&self) -> Analysis {
        let e = Arc::new(experiment::load(self.toml()).unwrap());
        analyse(e, &AnalysisOptions::default()).unwrap()
    }
}

/// Data ending before the process is a tenth done: τ up to 1.5e-3 (M_t/M_∞ ≈ 0.087).
fn trap_early() -> Trap {
    let t = times(2e-5, 1.5e-3, 30);
    let mg = noisy(&sheet_mg(&t), SIGMA_MG, 11);
    Trap::new(
        &t,
        &mg,
        &experiment_text("value", &params_d_m("3e-12 m2/s"), ""),
    )
}

/// Data starting after equilibrium: τ from 1.5 to 4 (M_t/M_∞ > 1 − 3e-7).
fn trap_late() -> Trap {
    let t = times(1.5, 4.0, 30);
    let mg = noisy(&sheet_mg(&t), SIGMA_MG, 12);
    Trap::new(
        &t,
        &mg,
        &experiment_text("value", &params_d_m("3e-12 m2/s"), ""),
    )
}

/// Surface transfer at Bi = 2 with D, h and M_inf free.
fn trap_correlated() -> Trap {
    let t = times(2e-3, 3.0, 40);
    let mg = noisy(&robin_mg(&t, 2.0), SIGMA_MG, 13);
    Trap::new(&t, &mg, &experiment_text("transfer", PARAMS_D_H_M, ""))
}

/// The whole uptake, D started six decades below (`below`) or above the truth.
fn trap_far_start(below: bool) -> Trap {
    let t = times(2e-3, 1.5, 40);
    let mg = noisy(&sheet_mg(&t), SIGMA_MG, 14);
    let start = if below { "1e-18 m2/s" } else { "1e-6 m2/s" };
    Trap::new(&t, &mg, &experiment_text("value", &params_d_m(start), ""))
}

/// Pure noise: no uptake at all (M_∞ = 0), only the balance noise.
fn trap_noise() -> Trap {
    let t = times(2e-3, 1.5, 40);
    let mg = noisy(&vec![0.0; t.len()], SIGMA_MG, 15);
    Trap::new(
        &t,
        &mg,
        &experiment_text("value", &params_d_m("3e-12 m2/s"), ""),
    )
}

/// Wrong physics: uptake through a strong surface resistance (Bi = 0.3) fitted with faces at
/// a fixed value.
fn trap_wrong_model() -> Trap {
    let t = times(2e-3, 12.0, 40);
    let mg = noisy(&robin_mg(&t, 0.3), SIGMA_MG, 16);
    Trap::new(
        &t,
        &mg,
        &experiment_text("value", &params_d_m("3e-12 m2/s"), ""),
    )
}

/// Non-convergence: D three decades off and one iteration allowed.
fn trap_iteration_limit() -> Trap {
    let t = times(2e-3, 1.5, 40);
    let mg = noisy(&sheet_mg(&t), SIGMA_MG, 17);
    Trap::new(
        &t,
        &mg,
        &experiment_text(
            "value",
            &params_d_m("1e-15 m2/s"),
            "[fit]\nmaximum_iterations = 1\n",
        ),
    )
}

fn index(a: &Analysis, name: &str) -> usize {
    a.experiment.parameter_index(name).unwrap()
}

/// The reported interval of a parameter: the one formed on its fitted scale when there is
/// one (what the terminal shows), else the symmetric one.
fn interval(a: &Analysis, name: &str) -> Option<(f64, f64)> {
    let p = &a.fit.parameters[index(a, name)];
    p.transformed_interval
        .as_ref()
        .or(p.interval.as_ref())
        .map(|i| (i.lower, i.upper))
}

/// Whether a warning about parameter `name` itself was raised (not identifiable, strongly
/// correlated, at a bound, standard error larger than the estimate).
fn warned_about(a: &Analysis, name: &str) -> bool {
    a.fit.warnings.iter().any(|w| match &w.kind {
        WarningKind::NotIdentifiable { parameters } => parameters.iter().any(|p| p == name),
        WarningKind::HighCorrelation { a, b, .. } => a == name || b == name,
        WarningKind::AtBound { parameter, .. } | WarningKind::LargeStdError { parameter, .. } => {
            parameter == name
        }
        _ => false,
    })
}

fn messages(a: &Analysis) -> String {
    a.fit
        .warnings
        .iter()
        .map(|w| w.message.as_str())
        .collect::<Vec<_>>()
        .join("\n")
}

/// "Never a confident-looking wrong interval": either the interval covers the truth, or there
/// is no interval, or a warning names the parameter (or the whole fit is flagged by
/// `fit_flagged`).
fn assert_honest(a: &Analysis, name: &str, truth: f64, fit_flagged: bool) {
    let covered = interval(a, name).is_none_or(|(lo, hi)| lo <= truth && truth <= hi);
    assert!(
        covered || warned_about(a, name) || fit_flagged,
        "{name}: interval {:?} misses the truth {truth:e} and no warning names it; warnings:\n{}",
        interval(a, name),
        messages(a)
    );
}

fn describe(a: &Analysis) -> String {
    let mut s = String::new();
    for p in &a.fit.parameters {
        let _ = writeln!(
            s,
            "{} = {:e} ± {:?}, interval {:?} / {:?}",
            p.name, p.estimate, p.std_error, p.interval, p.transformed_interval
        );
    }
    let _ = writeln!(s, "stop: {}", a.fit.stop_message);
    s + &messages(a)
}

#[test]
fn series_helpers_match_published_values() {
    // Crank 1975 §4.3.4: D t½ / L² = 0.0492 (exact root 0.0491827,
    // the shared reference values, computed_values.json).
    let (mut a, mut b) = (0.01, 0.1);
    for _ in 0..100 {
        let m = 0.5 * (a + b);
        if sheet_fraction(m) < 0.5 {
            a = m;
        } else {
            b = m;
        }
    }
    assert!((a - 0.0491827).abs() < 2e-7, "tau_half = {a}");
    // Crank 1975 Table 4.1 (roots of β tan β = L): L = 1 gives β1 = 0.8603.
    let r = robin_roots(1.0, 2);
    assert!((r[0] - 0.8603).abs() < 1e-4, "beta1 = {}", r[0]);
    // Early-time limit, Crank 1975 eq. 4.20: M_t/M_∞ ≈ 4 √(τ/π) for small τ.
    let tau = 1.5e-3_f64;
    assert!((sheet_fraction(tau) - 4.0 * (tau / PI).sqrt()).abs() < 1e-9);
}

#[test]
fn data_ending_before_a_tenth_warn_that_d_and_m_inf_are_not_separable() {
    let a = trap_early().analyse();
    let info = describe(&a);
    eprintln!("{info}");
    // The run ends at M_t/M_∞ ≈ 0.087 (Crank eq. 4.20 at τ = 1.5e-3): the warning names the
    // dataset and the fraction reached.
    let early = a.fit.warnings.iter().find_map(|w| match &w.kind {
        WarningKind::EndsEarly { dataset, fraction } => Some((dataset.clone(), *fraction, w)),
        _ => None,
    });
    let (dataset, fraction, w) = early.unwrap_or_else(|| panic!("no early-end warning\n{info}"));
    assert_eq!(dataset, "uptake");
    assert!(fraction < 0.5, "{info}");
    assert!(w.message.contains("uptake") && w.message.contains("M_inf"));
    // Only M_inf √D is determined: D and M_inf are strongly (anti-)correlated, or not
    // identifiable at all.
    let coupled = a.fit.warnings.iter().any(|w| match &w.kind {
        WarningKind::HighCorrelation { a, b, correlation } => {
            let pair = [a.as_str(), b.as_str()];
            pair.contains(&"D") && pair.contains(&"M_inf") && correlation.abs() > 0.95
        }
        WarningKind::NotIdentifiable { parameters } => parameters.iter().any(|p| p == "D"),
        _ => false,
    });
    assert!(coupled, "no warning names D and M_inf\n{info}");
    assert_honest(&a, "D", D_TRUE, false);
    assert_honest(&a, "M_inf", M_INF_MG * 1e-6, false);
}

#[test]
fn data_starting_after_equilibrium_warn_that_d_is_not_determined() {
    let a = trap_late().analyse();
    let info = describe(&a);
    eprintln!("{info}");
    let late = a.fit.warnings.iter().find_map(|w| match &w.kind {
        WarningKind::StartsLate { dataset, fraction } => Some((dataset.clone(), *fraction)),
        _ => None,
    });
    let (dataset, fraction) = late.unwrap_or_else(|| panic!("no late-start warning\n{info}"));
    assert_eq!(dataset, "uptake");
    assert!(fraction > 0.95, "{info}");
    // Observed: D's own interval can look tight yet miss the truth; the late-start warning
    // above is what tells the user that the diffusivity is hardly determined, so the fit
    // counts as flagged for D.
    assert!(
        a.fit
            .warnings
            .iter()
            .any(|w| w.message.contains("diffusivity is hardly determined")),
        "{info}"
    );
    assert_honest(&a, "D", D_TRUE, true);
    // M_inf is the plateau: determined to about σ/√n (common practice), and covered.
    let (lo, hi) = interval(&a, "M_inf").expect("M_inf has an interval");
    assert!(lo <= M_INF_MG * 1e-6 && M_INF_MG * 1e-6 <= hi, "{info}");
    assert!(hi - lo < 0.01 * M_INF_MG * 1e-6, "{info}");
}

#[test]
fn strong_d_h_correlation_is_named_and_intervals_stay_honest() {
    let a = trap_correlated().analyse();
    let info = describe(&a);
    eprintln!("{info}");
    let r = a.fit.warnings.iter().find_map(|w| match &w.kind {
        WarningKind::HighCorrelation { a, b, correlation }
            if {
                let pair = [a.as_str(), b.as_str()];
                pair.contains(&"D") && pair.contains(&"h")
            } =>
        {
            Some((*correlation, w.message.clone()))
        }
        _ => None,
    });
    let (r, message) = r.unwrap_or_else(|| panic!("no D-h correlation warning\n{info}"));
    assert!(r.abs() > 0.95);
    assert!(message.contains("D and h") || message.contains("h and D"));
    // Bi = h ℓ / D = 2 with ℓ = 50 µm: h = 4e-8 m/s.
    assert_honest(&a, "D", D_TRUE, false);
    assert_honest(&a, "h", 2.0 * D_TRUE / (L / 2.0), false);
}

/// The same data fitted from the truth: the optimum a far start should reach.
fn far_start_reference() -> Analysis {
    let t = times(2e-3, 1.5, 40);
    let mg = noisy(&sheet_mg(&t), SIGMA_MG, 14);
    Trap::new(
        &t,
        &mg,
        &experiment_text("value", &params_d_m("1e-12 m2/s"), ""),
    )
    .analyse()
}

/// Whether `a` reached the optimum of the fit started at the truth (D within a hundredth of a
/// standard error: both searches stop within about 1e-3 standard errors of the optimum).
fn reached_reference(a: &Analysis, reference: &Analysis) -> bool {
    let k = index(reference, "D");
    let se = reference.fit.parameters[k]
        .std_error
        .unwrap_or(f64::INFINITY);
    (a.fit.estimates[k] - reference.fit.estimates[k]).abs() <= 1e-2 * se
}

#[test]
fn a_start_six_decades_below_finds_the_truth_or_says_it_did_not() {
    // Either the search reaches the optimum it reaches from the truth, or (observed
    // 2026-12-02, before the relative-offset stop and the moderate initial damping) it stalls
    // where the model predicts almost no uptake. Then fickfit must give D an interval that
    // still covers the truth (it spans many decades) and name D in a warning (D and M_inf
    // correlated, ill-conditioned), never a tight wrong interval.
    let a = trap_far_start(true).analyse();
    let info = describe(&a);
    eprintln!("{info}");
    if reached_reference(&a, &far_start_reference()) {
        return;
    }
    let (lo, hi) = interval(&a, "D").unwrap();
    assert!(lo <= D_TRUE && D_TRUE <= hi, "{info}");
    assert!(warned_about(&a, "D"), "D not flagged\n{info}");
}

#[test]
fn a_start_six_decades_above_finds_the_truth_or_says_it_did_not() {
    // Observed 2026-12-04: from D six decades too large the search now reaches the optimum it
    // reaches from the truth (whose interval, for this noise draw, lies 2.3 standard errors
    // above the true D: a property of the data, shared by every start). Observed 2026-12-02:
    // it stalled on the plateau where the sample is saturated at once. When it stalls, the fit
    // must be flagged as not describing the data (systematic residuals, or chi-square far
    // above its degrees of freedom), or as not converged.
    let a = trap_far_start(false).analyse();
    let info = describe(&a);
    eprintln!("{info}");
    if reached_reference(&a, &far_start_reference()) {
        return;
    }
    let flagged = a.fit.warnings.iter().any(|w| {
        matches!(
            w.kind,
            WarningKind::NotConverged { .. }
                | WarningKind::SystematicResiduals { .. }
                | WarningKind::ChiSquareTooLarge { .. }
        )
    });
    assert!(flagged, "{info}");
    assert_honest(&a, "D", D_TRUE, flagged);
    assert_honest(&a, "M_inf", M_INF_MG * 1e-6, flagged);
}

#[test]
fn pure_noise_gives_an_amount_consistent_with_zero_and_flags_d() {
    let a = trap_noise().analyse();
    let info = describe(&a);
    eprintln!("{info}");
    // No signal: the amount's interval contains zero, and D is flagged.
    let (lo, hi) = interval(&a, "M_inf").expect("M_inf has an interval");
    assert!(lo <= 0.0 && 0.0 <= hi, "{info}");
    assert!(warned_about(&a, "D"), "D not flagged\n{info}");
    // M_inf needs no warning of its own: its interval already includes zero (checked above).
}

#[test]
fn a_single_point_with_two_free_parameters_is_an_error_naming_the_cause() {
    let t = [0.05 * L * L / D_TRUE];
    let dir = tempfile::tempdir().unwrap();
    write_data(dir.path(), "uptake.csv", &t, &sheet_mg(&t));
    let path = dir.path().join("e.toml");
    std::fs::write(
        &path,
        experiment_text("value", &params_d_m("3e-12 m2/s"), ""),
    )
    .unwrap();
    let err = experiment::load(&path).unwrap_err().to_string();
    assert!(
        err.contains("1 data points for 2 free parameters") && err.contains("datasets"),
        "{err}"
    );
    // Through the binary: exit code 2 (bad input), the message on stderr, no report.
    let out = dir.path().join("report");
    let run = Command::new(env!("CARGO_BIN_EXE_fickfit"))
        .arg("fit")
        .arg(&path)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&run.stderr);
    assert_eq!(run.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("1 data points for 2 free parameters"),
        "{stderr}"
    );
    assert!(!out.join("report.json").exists());
}

/// Two runs of one point each, sharing D; per-run M_inf free: 2 points, 3 free parameters.
fn one_point_per_dataset(m_inf_free: bool) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let t1 = [0.02 * L * L / D_TRUE];
    let t2 = [0.08 * L * L / D_TRUE];
    write_data(
        dir.path(),
        "a.csv",
        &t1,
        &noisy(&sheet_mg(&t1), SIGMA_MG, 21),
    );
    write_data(
        dir.path(),
        "b.csv",
        &t2,
        &noisy(&sheet_mg(&t2), SIGMA_MG, 22),
    );
    let m_inf = if m_inf_free {
        "[parameters.M_inf]\nstart = \"0.5 mg\"\nper_dataset = true\n"
    } else {
        "[parameters.M_inf]\nstart = \"0.8 mg\"\nfixed = true\n"
    };
    let mut text = format!(
        r#"
title = "one point per run"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "100 um"
diffusivity = "D"
{ends}
[initial]
value = 0.0
[parameters.D]
start = "3e-12 m2/s"
lower = "1e-20 m2/s"
upper = "1e-4 m2/s"
{m_inf}
"#,
        ends = ends("value")
    );
    for (name, file) in [("a", "a.csv"), ("b", "b.csv")] {
        write!(
            text,
            r#"
[[datasets]]
name = "{name}"
file = "{file}"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "{SIGMA_MG} mg"
weighting = "absolute"
scale = "M_inf"
"#
        )
        .unwrap();
    }
    std::fs::write(dir.path().join("e.toml"), text).unwrap();
    dir
}

#[test]
fn a_single_point_per_dataset_errors_when_n_is_at_most_p_and_fits_otherwise() {
    // 2 points, 3 free parameters (D, M_inf[a], M_inf[b]): an error naming the counts.
    let dir = one_point_per_dataset(true);
    let err = experiment::load(dir.path().join("e.toml"))
        .unwrap_err()
        .to_string();
    assert!(err.contains("2 data points for 3 free parameters"), "{err}");
    // 2 points, D alone free (M_inf fixed at the truth): one degree of freedom. The fit runs;
    // the residual checks say they cannot judge, and the interval (t(0.975; 1) = 12.71) covers
    // the truth.
    let dir = one_point_per_dataset(false);
    let e = Arc::new(experiment::load(dir.path().join("e.toml")).unwrap());
    let a = analyse(e, &AnalysisOptions::default()).unwrap();
    let info = describe(&a);
    eprintln!("{info}");
    assert_eq!(a.fit.dof, 1);
    // Student t, 1 degree of freedom, two-sided 95 %: 12.706 (NIST/SEMATECH e-Handbook,
    // table 1.3.6.7.2).
    assert!(
        (a.fit.t_critical - 12.706).abs() < 1e-3,
        "{}",
        a.fit.t_critical
    );
    assert!(a
        .fit
        .residual_checks
        .iter()
        .all(|c| c.verdict == fickfit::stats::ResidualVerdict::TooFewPoints));
    assert_honest(&a, "D", D_TRUE, false);
}

#[test]
fn wrong_physics_is_flagged_by_systematic_residuals_and_chi_square() {
    let a = trap_wrong_model().analyse();
    let info = describe(&a);
    eprintln!("{info}");
    let systematic = a.fit.warnings.iter().any(|w| {
        matches!(&w.kind, WarningKind::SystematicResiduals { dataset, .. } if dataset == "uptake")
            && w.message.contains("does not describe")
    });
    assert!(systematic, "no systematic-residual warning\n{info}");
    let chi = a.fit.warnings.iter().any(|w| {
        matches!(&w.kind, WarningKind::ChiSquareTooLarge { reduced, p_value }
            if *reduced > 1.0 && *p_value < 1e-3)
    });
    assert!(chi, "no chi-square warning\n{info}");
    // The D of a sheet without surface resistance is not the truth; the warnings above are
    // what keeps its interval from looking trustworthy.
    assert_honest(&a, "D", D_TRUE, systematic && chi);
}

/// Run `fickfit fit` on a trap into a new folder; returns (exit code, stdout, stderr,
/// report.json text if written).
fn run_binary(trap: &Trap) -> (Option<i32>, String, String, Option<String>) {
    let out = trap.dir.path().join("report");
    let run = Command::new(env!("CARGO_BIN_EXE_fickfit"))
        .arg("fit")
        .arg(trap.toml())
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    (
        run.status.code(),
        String::from_utf8_lossy(&run.stdout).into_owned(),
        String::from_utf8_lossy(&run.stderr).into_owned(),
        std::fs::read_to_string(out.join("report.json")).ok(),
    )
}

#[test]
fn non_convergence_exits_1_with_the_reason_and_the_best_point() {
    let trap = trap_iteration_limit();
    let (code, stdout, stderr, report) = run_binary(&trap);
    eprintln!("{stdout}\n{stderr}");
    assert_eq!(code, Some(1), "{stdout}\n{stderr}");
    // The reason (the iteration limit) and the best point, on the terminal and in the report.
    assert!(stdout.contains("iteration limit was reached"), "{stdout}");
    assert!(stdout.contains("best point found"), "{stdout}");
    assert!(stdout.contains("D = "), "{stdout}");
    let report: serde_json::Value = serde_json::from_str(&report.expect("report.json")).unwrap();
    assert_eq!(report["fit"]["converged"], false);
    assert!(report["fit"]["stop_reason"]
        .as_str()
        .unwrap()
        .contains("iteration limit"));
    let warnings = report["warnings"].to_string();
    assert!(warnings.contains("best point found"), "{warnings}");
    // The best point is in the report as the estimates, finite.
    let d = report["parameters"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["name"] == "D")
        .unwrap();
    assert!(d["estimate_si"].as_f64().is_some_and(|v| v > 0.0), "{d}");
}

/// Words that would mean a non-finite number got printed: NaN, inf, infinity, ∞.
fn non_finite_tokens(text: &str) -> Vec<String> {
    let mut found = Vec::new();
    if text.contains('∞') {
        found.push("∞".to_string());
    }
    for token in text.split(|c: char| !(c.is_ascii_alphanumeric() || c == '_')) {
        let t = token.trim_start_matches(|c: char| c.is_ascii_digit() || c == '_');
        let lower = t.to_ascii_lowercase();
        if lower == "nan" || lower == "inf" || lower == "infinity" {
            found.push(token.to_string());
        }
    }
    found
}

#[test]
fn no_nan_or_infinity_reaches_report_json_or_the_terminal() {
    assert_eq!(
        non_finite_tokens("M_inf infinite 1e5 information"),
        Vec::<String>::new()
    );
    assert_eq!(non_finite_tokens("D = NaN, h = inf"), vec!["NaN", "inf"]);
    let traps: Vec<(&str, Trap)> = vec![
        ("early", trap_early()),
        ("late", trap_late()),
        ("correlated", trap_correlated()),
        ("far start below", trap_far_start(true)),
        ("far start above", trap_far_start(false)),
        ("noise", trap_noise()),
        ("wrong model", trap_wrong_model()),
        ("iteration limit", trap_iteration_limit()),
    ];
    for (name, trap) in &traps {
        let (code, stdout, stderr, report) = run_binary(trap);
        assert!(
            code == Some(0) || code == Some(1),
            "{name}: exit {code:?}\n{stderr}"
        );
        let report = report.unwrap_or_else(|| panic!("{name}: no report.json\n{stderr}"));
        for (what, text) in [
            ("report.json", &report),
            ("stdout", &stdout),
            ("stderr", &stderr),
        ] {
            let bad = non_finite_tokens(text);
            assert!(bad.is_empty(), "{name}: {what} holds {bad:?}\n{text}");
        }
        // Every number in report.json is a finite JSON number (serde_json rejects NaN).
        let v: serde_json::Value = serde_json::from_str(&report).unwrap();
        assert!(v["parameters"].is_array(), "{name}");
    }
}
