//! The experiments users bring, through the library: gas permeation with a solubility
//! coefficient (D, S and the permeability P = D S, time lags), depth profiles with a detection
//! floor (excluded or censored readings against naive use of floor-level readings), and heated
//! rods of handbook metals with the conductivity k = α ρ c_p.
//!
//! Synthetic data come from published solutions where one exists (Crank 1975 eq. 4.24a for
//! permeation, eq. 3.13 for in-diffusion into a deep solid), with seeded noise, so each check
//! compares a fit with truth known from outside the program.

#[allow(dead_code)]
mod common;

use fickfit::analysis::{analyse, Analysis, AnalysisOptions};
use fickfit::analytic::special::erfc;
use fickfit::experiment;
use fickfit::report::data::Report;
use rand::rngs::StdRng;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use std::path::Path;
use std::sync::Arc;

fn fit(dir: &Path, name: &str, text: &str) -> Analysis {
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    let exp = Arc::new(experiment::load(&path).unwrap());
    let a = analyse(exp, &AnalysisOptions::default()).unwrap();
    assert!(a.fit.stop.converged(), "{name}: {}", a.fit.stop_message);
    a
}

/// The 95 % interval of a parameter (on the fitted scale when there is one), SI.
fn interval(a: &Analysis, name: &str) -> (f64, f64, f64) {
    let k = a.experiment.parameter_index(name).unwrap();
    let p = &a.fit.parameters[k];
    let i = p
        .transformed_interval
        .as_ref()
        .or(p.interval.as_ref())
        .unwrap_or_else(|| panic!("{name}: no interval"));
    (p.estimate, i.lower, i.upper)
}

fn assert_covers(a: &Analysis, name: &str, truth: f64) {
    let (est, lo, hi) = interval(a, name);
    assert!(
        lo < truth && truth < hi,
        "{name}: truth {truth:e} outside [{lo:e}, {hi:e}] (estimate {est:e})"
    );
}

/// The estimate within three standard errors of the truth. Used where σ_i is taken from the
/// noisy readings themselves (relative weighting, or σ stated as a fraction of the reading):
/// such weights favour readings that came out low, a bias of the order of the squared relative
/// noise (here 0.25 %), as large as the standard error of D with 80 readings at 5 % (common
/// practice; weighting by the model instead would remove it).
fn assert_within_3se(a: &Analysis, name: &str, truth: f64) {
    let k = a.experiment.parameter_index(name).unwrap();
    let p = &a.fit.parameters[k];
    let se = p.std_error.unwrap();
    assert!(
        (p.estimate - truth).abs() < 3.0 * se,
        "{name}: estimate {:e} ± {se:e}, truth {truth:e}",
        p.estimate
    );
}

fn derived<'a>(a: &'a Analysis, name: &str) -> (f64, f64, &'a str) {
    let d = a
        .derived
        .iter()
        .find(|d| d.name == name)
        .unwrap_or_else(|| {
            panic!(
                "no derived '{name}' in {:?}",
                a.derived.iter().map(|d| &d.name).collect::<Vec<_>>()
            )
        });
    let (v, u) = d.value.clone().unwrap_or_else(|e| panic!("{name}: {e}"));
    (v, u, &d.unit)
}

// ---------------------------------------------------------------------------------------------
// Permeation: pressure upstream, solubility coefficient

const L_MEMBRANE: f64 = 100e-6; // m
const D_MEMBRANE: f64 = 2e-12; // m²/s: time lag L²/(6D) = 833.3 s
const S_MEMBRANE_PER_BAR: f64 = 0.6; // mol/m³ per bar
const P_UP_BAR: f64 = 2.0;

/// Cumulative amount through the downstream face, mol/m², at times `t` (s), by Crank 1975
/// eq. 4.24a with C1 = S p (Henry's law), plus Gaussian noise of `noise` mol/m².
fn permeation_csv(times: &[f64], noise: f64, seed: u64) -> String {
    let c1 = S_MEMBRANE_PER_BAR * P_UP_BAR; // mol/m³
    let mut rng = StdRng::seed_from_u64(seed);
    let normal = Normal::new(0.0, 1.0).unwrap();
    let mut s = String::from("time [min],Q [mol/m2]\n");
    for &t in times {
        let tau = D_MEMBRANE * t / (L_MEMBRANE * L_MEMBRANE);
        let q = L_MEMBRANE * c1 * common::permeation_amount(tau);
        let e = if noise > 0.0 {
            noise * normal.sample(&mut rng)
        } else {
            0.0
        };
        s.push_str(&format!("{},{:.9e}\n", t / 60.0, q + e));
    }
    s
}

fn membrane_experiment(solubility: &str, extra: &str) -> String {
    format!(
        r#"
title = "gas permeation through a 100 um membrane"
[sample]
shape = "slab"
value_unit = "mol/m3"
thickness = "100 um"
diffusivity = "D"
[ends.left]
value = {{ pressure = "2 bar", solubility = {solubility} }}
[ends.right]
value = 0.0
[initial]
value = 0.0
[parameters.D]
start = "6e-12 m2/s"
lower = "1e-16 m2/s"
{extra}
[[datasets]]
name = "downstream"
file = "q.csv"
layout = "time_series"
observe = "cumulative_out"
end = "right"
time_column = "time"
value_column = "Q"
value_unit = "mol/m2"
sigma = "4e-7 mol/m2"
"#
    )
}

#[test]
fn permeation_with_solubility_recovers_d_s_and_permeability() {
    let dir = tempfile::tempdir().unwrap();
    // Every 2 min for 2 h: the data reach 8.6 time lags, well into steady state.
    let times: Vec<f64> = (1..=60).map(|k| 120.0 * k as f64).collect();
    std::fs::write(dir.path().join("q.csv"), permeation_csv(&times, 4e-7, 7)).unwrap();
    let a = fit(
        dir.path(),
        "fit.toml",
        &membrane_experiment(
            "\"S\"",
            "[parameters.S]\nstart = \"0.2 mol/m3/bar\"\nlower = \"1e-6 mol/m3/bar\"\ntransform = \"log\"",
        ),
    );
    let s_si = S_MEMBRANE_PER_BAR / 1e5; // mol/(m³ Pa)
    assert_covers(&a, "D", D_MEMBRANE);
    assert_covers(&a, "S", s_si);
    // S reported in the unit of its start value.
    let k = a.experiment.parameter_index("S").unwrap();
    assert_eq!(a.experiment.parameters[k].unit, "mol/m3/bar");
    // P = D S in mol/(m s Pa), with the delta-method uncertainty (D and S correlated).
    let p_true = D_MEMBRANE * s_si;
    let (p, u, unit) = derived(&a, "permeability");
    assert_eq!(unit, "mol/(m s Pa)");
    assert!(
        (p - p_true).abs() < 1.96 * u,
        "P {p:e} ± {u:e}, truth {p_true:e}"
    );
    let (d, _, _) = interval(&a, "D");
    let (s, _, _) = interval(&a, "S");
    assert!((p / (d * s) - 1.0).abs() < 1e-12);
    // D and S are strongly anticorrelated here (the steady flux fixes D S / L well, the lag
    // fixes D), so the uncertainty of P is below that of S alone.
    let se = |name: &str| {
        let k = a.experiment.parameter_index(name).unwrap();
        a.fit.parameters[k].std_error.unwrap() / a.fit.estimates[k]
    };
    assert!(u / p < se("S"), "u_P/P {} vs u_S/S {}", u / p, se("S"));
    // The same in Barrer: 1 Barrer = 3.35e-16 mol/(m s Pa) (common practice, from memory).
    let (pb, ub, unit_b) = derived(&a, "permeability[Barrer]");
    assert_eq!(unit_b, "Barrer");
    assert!((pb * 3.35e-16 / p - 1.0).abs() < 2e-3, "{pb} Barrer");
    assert!((ub / pb - u / p).abs() < 1e-12);
    // Time lag θ = L²/(6D) = 833.3 s (Crank 1975 §4.3.4): the full fit's, with its
    // uncertainty, and the one read off the steady-state asymptote of the data.
    let theta_true = L_MEMBRANE * L_MEMBRANE / (6.0 * D_MEMBRANE);
    let (th, uth, tunit) = derived(&a, "time_lag");
    assert_eq!(tunit, "min");
    assert!(
        (th * 60.0 - theta_true).abs() < 1.96 * uth * 60.0,
        "fit θ {th} ± {uth} min, truth {} min",
        theta_true / 60.0
    );
    let (thd, uthd, _) = derived(&a, "time_lag_from_data");
    assert!(
        (thd * 60.0 - theta_true).abs() < 1.96 * uthd * 60.0,
        "data θ {thd} ± {uthd} min, truth {} min",
        theta_true / 60.0
    );
    // The asymptote uses the late points only, so it is less precise than the full fit.
    assert!(uthd > uth, "data θ ± {uthd} min vs fit ± {uth} min");
}

#[test]
fn permeation_with_known_solubility_and_noise_free_data() {
    let dir = tempfile::tempdir().unwrap();
    let times: Vec<f64> = (1..=60).map(|k| 120.0 * k as f64).collect();
    std::fs::write(dir.path().join("q.csv"), permeation_csv(&times, 0.0, 1)).unwrap();
    // S known: only D is fitted. Noise-free data from the series, so the fit must return D to
    // the accuracy of the forward model (solver tolerance 1e-6 relative per step; 1e-4 is
    // common practice for the accumulated error).
    let a = fit(
        dir.path(),
        "fit.toml",
        &membrane_experiment("\"0.6 mol/m3/bar\"", ""),
    );
    let (d, _, _) = interval(&a, "D");
    assert!((d / D_MEMBRANE - 1.0).abs() < 1e-4, "D {d:e}");
    // P with S given: u_P = S u_D.
    let (p, u, _) = derived(&a, "permeability");
    let k = a.experiment.parameter_index("D").unwrap();
    let u_d = a.fit.parameters[k].std_error.unwrap();
    assert!((p / (d * 6e-6) - 1.0).abs() < 1e-12);
    assert!(
        (u / (u_d * 6e-6) - 1.0).abs() < 1e-6,
        "{u:e} vs {:e}",
        u_d * 6e-6
    );
    // The data's time lag, exact data: within 1e-3 of L²/(6D) (the asymptote is reached to
    // about 1e-4 relative at 6 θ, see src/shortcuts/permeation.rs).
    let theta_true = L_MEMBRANE * L_MEMBRANE / (6.0 * D_MEMBRANE);
    let (thd, _, _) = derived(&a, "time_lag_from_data");
    assert!(
        (thd * 60.0 / theta_true - 1.0).abs() < 1e-3,
        "data θ {thd} min"
    );
}

#[test]
fn gas_face_input_errors_name_the_key() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("q.csv"),
        "time [min],Q [mol/m2]\n1,0\n2,0\n3,0\n",
    )
    .unwrap();
    let load = |text: String| {
        let path = dir.path().join("bad.toml");
        std::fs::write(&path, text).unwrap();
        experiment::load(&path).unwrap_err().to_string()
    };
    let err = load(membrane_experiment("\"0.6 mol/m3/furlong\"", ""));
    assert!(
        err.contains("ends.left.value.solubility") && err.contains("unknown pressure unit"),
        "{err}"
    );
    let err = load(membrane_experiment("\"0.6 kg/m3/bar\"", ""));
    assert!(
        err.contains("differs from the sample's value unit"),
        "{err}"
    );
    let err = load(
        membrane_experiment("\"S\"", "[parameters.S]\nstart = \"0.2 mol/m3/bar\"")
            .replace("pressure = \"2 bar\", ", ""),
    );
    assert!(
        err.contains("ends.left.value.pressure") && err.contains("needs both"),
        "{err}"
    );
    let err = load(membrane_experiment("\"-0.6 mol/m3/bar\"", ""));
    assert!(err.contains("must be a positive"), "{err}");
}

// ---------------------------------------------------------------------------------------------
// Depth profiles with a detection floor

const D_PROFILE: f64 = 5e-13; // m²/s
const CS_PROFILE: f64 = 1000.0; // mol/m³
const FLOOR: f64 = 0.1; // mol/m³: 1e-4 of the surface value

/// In-diffusion into a deep solid from a surface held at C_s, Crank 1975 eq. 3.13:
/// C = C_s erfc(x / (2 √(D t))), at 1 h and 4 h, depths every 15 um to 600 um. Readings carry
/// 5 % relative noise; the instrument reports the floor for anything below it (as depth
/// profilers do at their background), and states each reading's standard uncertainty as 5 % of
/// the reading (`u_c`). The profiles span seven decades above the floor.
fn profile_csv(seed: u64) -> String {
    let mut rng = StdRng::seed_from_u64(seed);
    let normal = Normal::new(0.0, 1.0).unwrap();
    let mut s = String::from("time [h],depth [um],c [mol/m3],u_c [mol/m3]\n");
    for hours in [1.0, 4.0] {
        let t = hours * 3600.0;
        for k in 0..=40 {
            let x = 15e-6 * k as f64;
            let c = CS_PROFILE * erfc(x / (2.0 * (D_PROFILE * t).sqrt()));
            let reading = (c * (1.0 + 0.05 * normal.sample(&mut rng))).max(FLOOR);
            s.push_str(&format!(
                "{hours},{},{reading:.6e},{:.6e}\n",
                15 * k,
                0.05 * reading
            ));
        }
    }
    s
}

/// Weighting by relative error: σ_i = 0.05 |y_i| up to one factor estimated from the scatter.
const RELATIVE: &str = "weighting = \"relative\"\nrelative_sigma = 0.05";
/// The instrument's stated standard uncertainties, taken as absolute.
const ABSOLUTE: &str = "sigma_column = \"u_c\"";

fn profile_experiment(floor: &str) -> String {
    profile_experiment_weighted(RELATIVE, floor)
}

fn profile_experiment_weighted(weighting: &str, floor: &str) -> String {
    format!(
        r#"
title = "in-diffusion profiles with a detection floor"
[sample]
shape = "slab"
value_unit = "mol/m3"
thickness = "3 mm"
diffusivity = "D"
[ends.left]
value = "C_s"
[ends.right]
sealed = true
[initial]
value = 0.0
[parameters.D]
start = "2e-12 m2/s"
lower = "1e-18 m2/s"
[parameters.C_s]
start = "600 mol/m3"
lower = "1 mol/m3"
transform = "log"
[[datasets]]
name = "profiles"
file = "p.csv"
layout = "profiles"
observe = "value"
time_column = "time"
position_column = "depth"
value_column = "c"
{weighting}
{floor}
"#
    )
}

#[test]
fn detection_floor_excluded_or_censored_is_unbiased_and_naive_use_is_not() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("p.csv"), profile_csv(3)).unwrap();
    let naive = fit(dir.path(), "naive.toml", &profile_experiment(""));
    let excluded = fit(
        dir.path(),
        "exclude.toml",
        &profile_experiment(
            "detection_limit = \"0.1 mol/m3\"\nbelow_detection_limit = \"exclude\"",
        ),
    );
    let censored = fit(
        dir.path(),
        "censor.toml",
        &profile_experiment("detection_limit = 0.1\nbelow_detection_limit = \"censor\""),
    );
    // Left out or censored, the floor readings do no harm: the estimates are within three
    // standard errors of the truth, and the interval is narrow (5 % noise, 80-odd points).
    for a in [&excluded, &censored] {
        assert_within_3se(a, "D", D_PROFILE);
        assert_within_3se(a, "C_s", CS_PROFILE);
        let (d, lo, hi) = interval(a, "D");
        assert!((hi - lo) / d < 0.05, "[{lo:e}, {hi:e}]");
    }
    // Floor readings taken at face value pull the tail of the profile up: D biased high, out of
    // the honest fits' intervals. With σ estimated from the scatter the misfit of the floor
    // readings also inflates the naive interval (here it is several times wider), so it does
    // not show the bias by itself ...
    let (d_naive, lo_naive, hi_naive) = interval(&naive, "D");
    let (_, lo_c, hi_c) = interval(&censored, "D");
    assert!(
        d_naive > hi_c && d_naive > 1.015 * D_PROFILE,
        "naive D {d_naive:e}, censored interval [{lo_c:e}, {hi_c:e}]"
    );
    assert!((hi_naive - lo_naive) > 3.0 * (hi_c - lo_c));
    // ... with the instrument's stated σ taken as absolute, the naive interval misses the
    // truth and the χ² test flags the misfit, while the censored fit covers it.
    let naive_abs = fit(
        dir.path(),
        "naive-abs.toml",
        &profile_experiment_weighted(ABSOLUTE, ""),
    );
    let (d_abs, lo_abs, _) = interval(&naive_abs, "D");
    assert!(
        lo_abs > D_PROFILE,
        "naive (absolute σ) D {d_abs:e}, interval from {lo_abs:e}, truth {D_PROFILE:e}"
    );
    let chi = naive_abs.fit.goodness.chi_square.as_ref().unwrap();
    assert!(chi.p_value < 1e-3, "χ² p = {}", chi.p_value);
    let censored_abs = fit(
        dir.path(),
        "censor-abs.toml",
        &profile_experiment_weighted(ABSOLUTE, "detection_limit = \"0.1 mol/m3\""),
    );
    assert_within_3se(&censored_abs, "D", D_PROFILE);
    let chi = censored_abs.fit.goodness.chi_square.as_ref().unwrap();
    assert!(chi.p_value > 1e-3, "χ² p = {}", chi.p_value);
    // What was done is stated: the count and the depths of the floor readings.
    let below: Vec<usize> = profile_csv(3)
        .lines()
        .enumerate()
        .skip(1)
        .filter(|(_, l)| l.split(',').nth(2) == Some(format!("{FLOOR:.6e}").as_str()))
        .map(|(i, _)| i + 1)
        .collect();
    assert!(below.len() >= 10, "{} floor readings", below.len());
    for (a, word) in [(&excluded, "exclude"), (&censored, "censor")] {
        let d = &a.experiment.datasets[0];
        let dl = d.detection_limit.as_ref().unwrap();
        assert_eq!(dl.treatment.word(), word);
        let lines: Vec<usize> = dl.points.iter().map(|p| p.line as usize).collect();
        assert_eq!(lines, below);
        let report = Report::new(a, b"");
        let row = report.datasets[0].detection_limit.as_ref().unwrap();
        assert_eq!(row.count, below.len());
        assert_eq!(row.treatment, word);
        assert_eq!(row.limit, Some(FLOOR));
        let deepest = dl
            .points
            .iter()
            .filter_map(|p| p.position)
            .fold(0.0, f64::max);
        assert!((deepest - 600e-6).abs() < 1e-12);
        assert!(
            row.summary.contains("at 4 h:") && row.summary.contains("600 um"),
            "{}",
            row.summary
        );
        let json = serde_json::to_value(&report).unwrap();
        assert_eq!(
            json["datasets"][0]["detection_limit"]["points"]
                .as_array()
                .unwrap()
                .len(),
            below.len()
        );
    }
    // Excluded readings are gone from the fit; censored ones stay, at the limit.
    let n_all = naive.experiment.datasets[0].len();
    assert_eq!(excluded.experiment.datasets[0].len(), n_all - below.len());
    assert_eq!(censored.experiment.datasets[0].len(), n_all);
    let report = Report::new(&censored, b"");
    let row = report.datasets[0].detection_limit.as_ref().unwrap();
    // At the estimate the model stays below the floor at nearly every censored depth.
    assert!(row.model_above_limit.unwrap() <= 2, "{}", row.summary);
    assert!(row.summary.contains("censored"), "{}", row.summary);
    // Censored readings under the model carry no scatter: they are not counted as points, so
    // the degrees of freedom are the other readings less the free parameters, and the scatter
    // estimated from the residuals (relative weighting) matches the fit that excludes them
    // (common practice: a residual that is zero by construction is not an observation).
    let under = censored.fit.inactive.iter().filter(|x| **x).count();
    assert!(under > 0 && under + row.model_above_limit.unwrap() == below.len());
    let p = censored.fit.free_names.len();
    assert_eq!(censored.fit.dof, n_all - under - p);
    let (s_c, s_e) = (censored.dataset_scales[0], excluded.dataset_scales[0]);
    assert!(
        (s_c / s_e - 1.0).abs() < 0.15,
        "scatter with censoring {s_c}, with exclusion {s_e}"
    );
    assert!(!report.warnings.iter().any(|w| w.contains("too narrow")));
    let report = Report::new(&censored_abs, b"");
    assert!(!report.warnings.iter().any(|w| w.contains("too narrow")));
}

#[test]
fn detection_limit_keys_are_checked() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("p.csv"), profile_csv(3)).unwrap();
    let load = |text: String| {
        let path = dir.path().join("bad.toml");
        std::fs::write(&path, text).unwrap();
        experiment::load(&path)
            .map(|_| ())
            .map_err(|e| e.to_string())
    };
    let err = load(profile_experiment("below_detection_limit = \"exclude\"")).unwrap_err();
    assert!(
        err.contains("datasets[0].detection_limit") && err.contains("needs"),
        "{err}"
    );
    let err = load(profile_experiment(
        "detection_limit = 0.1\nbelow_detection_limit = \"drop\"",
    ))
    .unwrap_err();
    assert!(err.contains("drop") && err.contains("exclude"), "{err}");
    let err = load(profile_experiment("detection_limit = \"0.1 kg/m3\"")).unwrap_err();
    assert!(err.contains("detection_limit"), "{err}");
    let err = load(profile_experiment("detection_limit = \"2000 mol/m3\"")).unwrap_err();
    assert!(err.contains("every reading"), "{err}");
    // Accepted: censoring is the default treatment.
    let path = dir.path().join("ok.toml");
    std::fs::write(
        &path,
        profile_experiment("detection_limit = \"0.1 mol/m3\""),
    )
    .unwrap();
    let e = experiment::load(&path).unwrap();
    let dl = e.datasets[0].detection_limit.as_ref().unwrap();
    assert_eq!(dl.treatment.word(), "censor");
    assert!(dl.is_censored(40) && !dl.is_censored(0));
}

// ---------------------------------------------------------------------------------------------
// Heated rods of handbook metals

/// (material row of tests/data/reference/thermal_properties_300K.csv, rod length in mm)
struct Metal {
    row: &'static str,
    length_mm: f64,
}

/// ρ, c_p, k and tabulated α of a row: Incropera & DeWitt, *Fundamentals of Heat and Mass
/// Transfer*, Table A.1, 300 K (the file's `status` column says which rows were confirmed).
fn handbook(row: &str) -> (f64, f64, f64, f64) {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/data/reference/thermal_properties_300K.csv"),
    )
    .unwrap();
    let line = text
        .lines()
        .find(|l| l.starts_with(&format!("{row},")))
        .unwrap_or_else(|| panic!("no row {row}"));
    let cells: Vec<&str> = line.split(',').collect();
    assert!(cells[8].starts_with("published"), "{row}: {}", cells[8]);
    let n = |i: usize| cells[i].parse::<f64>().unwrap();
    (n(3), n(4), n(5), n(6))
}

#[test]
fn heated_rods_of_handbook_metals_recover_alpha_and_conductivity() {
    for metal in [
        Metal {
            row: "copper_pure",
            length_mm: 200.0,
        },
        Metal {
            row: "aluminium_pure",
            length_mm: 200.0,
        },
        Metal {
            row: "stainless_AISI_316",
            length_mm: 50.0,
        },
    ] {
        let (rho, cp, k_table, alpha) = handbook(metal.row);
        let length = metal.length_mm * 1e-3;
        // Times up to 1.5 L²/α, the heater face following a logged ramp to 60 K above the
        // room (a measured-temperature heater), the far end insulated, lateral loss m.
        let tscale = length * length / alpha;
        let t_end = 1.5 * tscale;
        let dir = tempfile::tempdir().unwrap();
        let template: String = std::iter::once("time [s],T1 [K],T2 [K],T3 [K]\n".to_string())
            .chain((1..=60).map(|i| format!("{:.3},0,0,0\n", t_end * i as f64 / 60.0)))
            .collect();
        std::fs::write(dir.path().join("rod.csv"), &template).unwrap();
        let ramp = 0.1 * tscale;
        let text = |alpha_start: &str, m_start: &str| {
            format!(
                r#"
title = "{row} rod"
[sample]
shape = "slab"
value_unit = "K"
thickness = "{len} mm"
diffusivity = "alpha"
[ends.left]
value = {{ rows = [[0, 295], [{ramp}, 355], [{end}, 355]], time_unit = "s" }}
[ends.right]
sealed = true
[initial]
value = "295 K"
[volume]
exchange_rate = "m_loss"
ambient = "295 K"
[parameters.alpha]
start = "{alpha_start}"
lower = "1e-7 m2/s"
[parameters.m_loss]
start = "{m_start}"
lower = "1e-7 1/s"
[[datasets]]
name = "sensors"
file = "rod.csv"
layout = "sensors"
observe = "value"
time_column = "time"
sigma = "0.05 K"
sensors = [
  {{ column = "T1", position = "{x1} mm" }},
  {{ column = "T2", position = "{x2} mm" }},
  {{ column = "T3", position = "{x3} mm" }},
]
[derived.k]
quantity = "conductivity"
density = "{rho} kg/m3"
density_uncertainty = "{u_rho} kg/m3"
heat_capacity = "{cp} J/(kg K)"
heat_capacity_uncertainty = "{u_cp} J/(kg K)"
"#,
                row = metal.row,
                len = metal.length_mm,
                end = 2.0 * t_end,
                x1 = 0.1 * metal.length_mm,
                x2 = 0.3 * metal.length_mm,
                x3 = 0.5 * metal.length_mm,
                u_rho = 0.005 * rho,
                u_cp = 0.01 * cp,
            )
        };
        let m_true = 0.2 / tscale;
        std::fs::write(
            dir.path().join("truth.toml"),
            text(&format!("{alpha} m2/s"), &format!("{m_true} 1/s")),
        )
        .unwrap();
        let truth = experiment::load(dir.path().join("truth.toml")).unwrap();
        let cols: Vec<String> = truth.datasets[0]
            .outputs()
            .map(|(o, _)| format!("T{}", o + 1))
            .collect();
        let data =
            fickfit::simulate::rewrite_data_file(&truth, 0, &cols, &truth.start_values(), 0.05, 11)
                .unwrap();
        std::fs::write(dir.path().join("rod.csv"), data).unwrap();
        let a = fit(
            dir.path(),
            "fit.toml",
            &text(
                &format!("{} m2/s", 0.4 * alpha),
                &format!("{} 1/s", 3.0 * m_true),
            ),
        );
        assert_covers(&a, "alpha", alpha);
        assert_covers(&a, "m_loss", m_true);
        // k = α ρ c_p with the uncertainties of α (fit), ρ (0.5 %) and c_p (1 %) combined:
        // u_k² = (ρ c_p u_α)² + (α c_p u_ρ)² + (α ρ u_cp)² (JCGM 100:2008 eq. 10).
        let (k, u_k, unit) = derived(&a, "k");
        assert_eq!(unit, "W/(m K)");
        let (a_fit, _, _) = interval(&a, "alpha");
        let i = a.experiment.parameter_index("alpha").unwrap();
        let u_a = a.fit.parameters[i].std_error.unwrap();
        assert!(
            (k / (a_fit * rho * cp) - 1.0).abs() < 1e-12,
            "{}",
            metal.row
        );
        let expected = ((rho * cp * u_a).powi(2)
            + (a_fit * cp * 0.005 * rho).powi(2)
            + (a_fit * rho * 0.01 * cp).powi(2))
        .sqrt();
        assert!(
            (u_k / expected - 1.0).abs() < 1e-3,
            "{}: u_k {u_k} vs {expected}",
            metal.row
        );
        // The handbook's own k lies within about two standard uncertainties of k = α ρ c_p
        // (its α is rounded to three digits, 0.3 % at most).
        assert!(
            (k - k_table).abs() < 2.0 * u_k,
            "{}: k {k} ± {u_k}, handbook {k_table}",
            metal.row
        );
    }
}
