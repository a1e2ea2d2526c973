//! Shortcut estimators on data generated from the closed-form solutions with known D.
//!
//! Reference values: the Ångström test vector and the Callister examples come from the
//! project's reference folder (copies in `tests/data/reference/`, sources in its README).

use fickfit::analytic::{self, periodic::Wave, semi_infinite, sheet, sheet::Faces, Shape};
use fickfit::shortcuts::{
    angstrom::{self, Drift},
    arrhenius::{self, GAS_CONSTANT},
    permeation, profile,
    uptake::{self, Geometry, Plateau},
};
use fickfit::Error;
use serde_json::Value;
use std::f64::consts::PI;

const COMPUTED: &str = include_str!("data/reference/computed_values.json");
const COEFFS: &str = include_str!("data/reference/diffusion_coefficients.csv");

fn computed() -> Value {
    serde_json::from_str(COMPUTED).expect("valid JSON")
}

/// A JSON value stored as a decimal string.
fn num(v: &Value) -> f64 {
    v.as_str().expect("string").parse().expect("number")
}

#[track_caller]
fn assert_rel(found: f64, expected: f64, tol: f64, what: &str) {
    let err = ((found - expected) / expected).abs();
    assert!(
        err <= tol,
        "{what}: found {found:.12e}, expected {expected:.12e}, rel {err:.2e} > {tol:.1e}"
    );
}

fn fit_reason(e: Error) -> String {
    match e {
        Error::Fit(m) => m,
        other => panic!("expected a fit error, got {other}"),
    }
}

/// Uptake curve `m_inf * M_t/M_inf` for `shape` with length scale `len`, at `n` times up to
/// `tau_max` (dimensionless), starting at t = 0.
fn uptake_curve(
    shape: Shape,
    d: f64,
    len: f64,
    tau_max: f64,
    n: usize,
    m_inf: f64,
) -> (Vec<f64>, Vec<f64>) {
    let t_max = tau_max * len * len / d;
    let t: Vec<f64> = (0..n).map(|i| t_max * i as f64 / (n - 1) as f64).collect();
    let m = t
        .iter()
        .map(|&ti| m_inf * analytic::uptake_fraction(shape, d * ti / (len * len)).unwrap())
        .collect();
    (t, m)
}

#[test]
fn half_time_recovers_d_for_each_geometry() {
    let d = 1e-12;
    // Sheet, both faces, L = 100 um, M_inf given. Accuracy target 1e-4 (common practice).
    let (t, m) = uptake_curve(Shape::Sheet, d, 1e-4, 0.5, 2001, 3.7);
    let geo = Geometry::Sheet {
        thickness: 1e-4,
        faces: Faces::Both,
    };
    let e = uptake::half_time(&t, &m, Plateau::Given(3.7), geo).unwrap();
    assert_rel(e.d, d, 1e-4, "sheet half-time");
    assert_rel(e.tau_half, 0.0491826848809, 1e-11, "exact root used");
    // Plateau estimated from the last points (curve run to D t/L^2 = 2).
    let (t, m) = uptake_curve(Shape::Sheet, d, 1e-4, 2.0, 4001, 3.7);
    let e = uptake::half_time(&t, &m, Plateau::MeanOfLast(20), geo).unwrap();
    assert_rel(e.d, d, 1e-4, "sheet half-time, estimated M_inf");
    assert!(e
        .assumptions
        .iter()
        .any(|a| a.contains("mean of the last 20")));
    // Sealed face: a 50 um sheet sealed on one side behaves like 100 um open.
    let (t, m) = uptake_curve(Shape::Sheet, d, 1e-4, 0.5, 2001, 1.0);
    let sealed = Geometry::Sheet {
        thickness: 5e-5,
        faces: Faces::OneSealed,
    };
    let e = uptake::half_time(&t, &m, Plateau::Given(1.0), sealed).unwrap();
    assert_rel(e.d, d, 1e-4, "sealed sheet half-time");
    // Sphere and cylinder of radius 30 um.
    for (shape, geo) in [
        (Shape::Sphere, Geometry::Sphere { radius: 3e-5 }),
        (Shape::Cylinder, Geometry::Cylinder { radius: 3e-5 }),
    ] {
        let (t, m) = uptake_curve(shape, d, 3e-5, 0.4, 2001, 1.0);
        let e = uptake::half_time(&t, &m, Plateau::Given(1.0), geo).unwrap();
        assert_rel(e.d, d, 1e-4, &format!("{shape:?} half-time"));
    }
}

#[test]
fn half_time_refuses_curves_without_half_uptake_or_plateau() {
    let geo = Geometry::Sheet {
        thickness: 1e-4,
        faces: Faces::Both,
    };
    // Stops at D t/L^2 = 0.02 (fraction 0.32).
    let (t, m) = uptake_curve(Shape::Sheet, 1e-12, 1e-4, 0.02, 200, 1.0);
    let r = fit_reason(uptake::half_time(&t, &m, Plateau::Given(1.0), geo).unwrap_err());
    assert!(r.contains("never reaches half"), "{r}");
    // Still rising: the last points are no plateau.
    let (t, m) = uptake_curve(Shape::Sheet, 1e-12, 1e-4, 0.1, 200, 1.0);
    let r = fit_reason(uptake::half_time(&t, &m, Plateau::MeanOfLast(10), geo).unwrap_err());
    assert!(r.contains("plateau"), "{r}");
    // Malformed input.
    let err = uptake::half_time(&[0.0, 2.0, 1.0], &[0.0, 0.6, 0.7], Plateau::Given(1.0), geo)
        .unwrap_err();
    assert_eq!(
        err.input_kind(),
        Some(fickfit::InputKind::TimeNotIncreasing)
    );
}

#[test]
fn initial_slope_recovers_d() {
    let (d, l) = (1e-12, 1e-4);
    let (t, m) = uptake_curve(Shape::Sheet, d, l, 0.5, 4001, 2.0);
    // Early part up to 0.3, where the sqrt(t) relation is exact to < 1e-6 (Crank §4.3.2).
    for origin in [true, false] {
        let e = uptake::initial_slope(&t, &m, Plateau::Given(2.0), l, Faces::Both, 0.3, origin)
            .unwrap();
        assert_rel(
            e.d,
            d,
            1e-4,
            &format!("sqrt-t slope, limit 0.3, origin {origin}"),
        );
    }
    // Default limit 0.5: the sqrt(t) relation overshoots the curve by up to 0.10 % there
    // (README §1, computed), so the fitted slope is low and D biased low (measured -4.5e-4).
    let e = uptake::initial_slope(&t, &m, Plateau::Given(2.0), l, Faces::Both, 0.5, true).unwrap();
    let bias = e.d / d - 1.0;
    assert!(bias < 0.0 && bias > -1e-3, "bias at limit 0.5: {bias:e}");
    // Sealed face doubles the thickness.
    let e = uptake::initial_slope(
        &t,
        &m,
        Plateau::Given(2.0),
        l / 2.0,
        Faces::OneSealed,
        0.3,
        true,
    )
    .unwrap();
    assert_rel(e.d, d, 1e-4, "sqrt-t slope, sealed");
    // Refusal: the data start beyond the early part.
    let (t2, m2): (Vec<f64>, Vec<f64>) = t
        .iter()
        .zip(&m)
        .filter(|(_, &v)| v > 1.3)
        .map(|(a, b)| (*a, *b))
        .unzip();
    let err = uptake::initial_slope(&t2, &m2, Plateau::Given(2.0), l, Faces::Both, 0.5, true)
        .unwrap_err();
    assert_eq!(err.input_kind(), Some(fickfit::InputKind::TooFewPoints));
}

#[test]
fn erfc_linearisation_recovers_callister_carburising_d() {
    // Callister Example 5.2 (3rd ed. 1994): C0 = 0.25, Cs = 1.20 wt%, D = 1.6e-11 m^2/s at
    // 950 C; profile generated at the exact carburising time 25,370.245 s (computed, mpmath).
    let (c0, cs, d, t) = (0.25, 1.20, 1.6e-11, 25_370.245);
    let x: Vec<f64> = (0..=100).map(|i| 5e-3 * i as f64 / 100.0).collect();
    let u: Vec<f64> = x
        .iter()
        .map(|&xi| semi_infinite::erfc_profile(c0, cs, d, t, xi).unwrap())
        .collect();
    let e = profile::erfc_linearisation(&x, &u, t, Some(cs), Some(c0), None).unwrap();
    assert_rel(e.d, d, 1e-9, "erfc linearisation, known us and u0");
    assert!(e.line.intercept.abs() < 1e-9);
    // The profile reproduces Callister's target: 0.80 wt% at 0.5 mm (worked_examples.json).
    let at = semi_infinite::erfc_profile(c0, cs, d, t, 5e-4).unwrap();
    assert!((at - 0.80).abs() < 1e-8);
    // Surface and background estimated from the shallowest and deepest points.
    let e = profile::erfc_linearisation(&x, &u, t, None, None, None).unwrap();
    assert_rel(e.d, d, 1e-6, "erfc linearisation, estimated us and u0");
    assert_eq!(e.assumptions.len(), 4);
    // Refusal: a flat profile has no resolved points.
    let flat = vec![c0 + 1e-6; x.len()];
    let r = fit_reason(
        profile::erfc_linearisation(&x, &flat, t, Some(cs), Some(c0), None).unwrap_err(),
    );
    assert!(r.contains("not resolved"), "{r}");
}

#[test]
fn gaussian_linearisation_recovers_thin_film() {
    // Parameters of thin_film_gaussian.csv: M = 1 per area, D = 1e-14 m^2/s, t = 3600 s.
    let (m, d, t) = (1.0, 1e-14, 3600.0);
    let x: Vec<f64> = (0..=30).map(|i| 1e-6 * i as f64).collect();
    let u: Vec<f64> = x
        .iter()
        .map(|&xi| semi_infinite::thin_film_surface(m, d, t, xi).unwrap())
        .collect();
    let e = profile::gaussian_linearisation(&x, &u, t).unwrap();
    assert_rel(e.profile.d, d, 1e-10, "Gaussian D");
    assert_rel(e.amount_per_area, m, 1e-10, "deposited amount");
    // Slope -1/(4 D t) = -6944444444.44 (computed_values.json, mpmath).
    assert_rel(e.profile.line.slope, -6_944_444_444.444_44, 1e-10, "slope");
    // Refusal: a rising profile.
    let rising: Vec<f64> = u.iter().rev().cloned().collect();
    let r = fit_reason(profile::gaussian_linearisation(&x, &rising, t).unwrap_err());
    assert!(r.contains("not a Gaussian"), "{r}");
}

#[test]
fn time_lag_recovers_d_and_warns_without_steady_state() {
    let (d, l, c1) = (1e-11, 1e-4, 5.0);
    let lag = sheet::time_lag(d, l).unwrap();
    let series = |t_end: f64, n: usize| -> (Vec<f64>, Vec<f64>) {
        let t: Vec<f64> = (1..=n).map(|i| t_end * i as f64 / n as f64).collect();
        let q = t
            .iter()
            .map(|&ti| sheet::permeation_si(c1, d, l, ti).unwrap())
            .collect();
        (t, q)
    };
    // Data to 10 lags: within 1 % (brief), in fact far better.
    let (t, q) = series(10.0 * lag, 200);
    let e = permeation::time_lag(&t, &q, l).unwrap();
    assert_rel(e.d, d, 1e-2, "time lag D (1 %)");
    // Method bias with the 6-theta start: about 6e-5 (module docs).
    assert_rel(e.d, d, 2e-4, "time lag D (bias of the late-part rule)");
    assert!(e.steady_state_reached && e.warnings.is_empty());
    assert_rel(e.line.slope, d * c1 / l, 1e-4, "steady flux D C1 / L");
    // Data to 2 lags only: an estimate with a warning, biased low.
    let (t, q) = series(2.0 * lag, 100);
    let e = permeation::time_lag(&t, &q, l).unwrap();
    assert!(!e.steady_state_reached);
    assert!(e
        .warnings
        .iter()
        .any(|w| w.contains("steady state not reached")));
    assert!(
        (e.d / d - 1.0).abs() > 1e-3,
        "a visible bias is expected: {}",
        e.d / d - 1.0
    );
    // Refusal: no flux at all.
    let flat = vec![0.0; t.len()];
    let r = fit_reason(permeation::time_lag(&t, &flat, l).unwrap_err());
    assert!(r.contains("does not rise"), "{r}");
}

#[test]
fn angstrom_recovers_readme_test_vector() {
    // README §6 / computed_values.json (mpmath): alpha = 1.17e-4 m^2/s, eps = 0.002 1/s,
    // period 60 s, dx = 0.05 m: A1/A2 = 2.90921178400, dphi = 1.04768187318 rad.
    let (ratio, dphi, omega, dx) = (
        2.909_211_784_001_23,
        1.047_681_873_179_32,
        2.0 * PI / 60.0,
        0.05,
    );
    let alpha = angstrom::alpha_from_pair(omega, dx, ratio, dphi).unwrap();
    assert_rel(alpha, 1.17e-4, 1e-11, "alpha from the published pair");
    assert_rel(
        angstrom::loss_from_pair(alpha, dx, ratio, dphi),
        0.002,
        1e-9,
        "eps",
    );

    // Full method on analytic periodic data with lateral loss and a drifting baseline.
    let wave = Wave::new(1.17e-4, 0.002, omega).unwrap();
    let positions = [0.02, 0.07, 0.12];
    let t: Vec<f64> = (0..=1200).map(|i| 0.5 * i as f64).collect();
    for drift in [Drift::Linear, Drift::Quadratic] {
        let cols: Vec<Vec<f64>> = positions
            .iter()
            .map(|&x| {
                t.iter()
                    .map(|&ti| {
                        let trend = 20.0
                            + 3e-3 * ti
                            + if drift == Drift::Quadratic {
                                2e-6 * ti * ti
                            } else {
                                0.0
                            };
                        trend + wave.value(5.0, omega, x, ti)
                    })
                    .collect()
            })
            .collect();
        let refs: Vec<&[f64]> = cols.iter().map(|c| c.as_slice()).collect();
        let e = angstrom::angstrom(&t, &positions, &refs, omega, drift).unwrap();
        assert_eq!(e.pairs.len(), 3);
        for p in &e.pairs {
            assert_rel(
                p.alpha,
                1.17e-4,
                1e-9,
                &format!("alpha {}-{}", p.near, p.far),
            );
            assert_rel(p.loss, 0.002, 1e-7, "eps");
        }
        let p01 = e.pairs.iter().find(|p| p.near == 0 && p.far == 1).unwrap();
        assert_rel(p01.amplitude_ratio, ratio, 1e-10, "A1/A2");
        assert_rel(p01.phase_lag, dphi, 1e-10, "dphi");
    }
}

#[test]
fn angstrom_refuses_unusable_data() {
    let omega = 2.0 * PI / 60.0;
    let t: Vec<f64> = (0..100).map(|i| 0.5 * i as f64).collect(); // 49.5 s < one period
    let y: Vec<f64> = t.iter().map(|&ti| (omega * ti).cos()).collect();
    let r = fit_reason(angstrom::fit_sinusoid(&t, &y, omega, Drift::Linear).unwrap_err());
    assert!(r.contains("period"), "{r}");
    // Two sensors with the same amplitude: no decay, no estimate.
    let t: Vec<f64> = (0..600).map(|i| 0.5 * i as f64).collect();
    let y: Vec<f64> = t.iter().map(|&ti| (omega * ti).cos()).collect();
    let r = fit_reason(
        angstrom::angstrom(&t, &[0.0, 0.05], &[&y, &y], omega, Drift::Constant).unwrap_err(),
    );
    assert!(r.contains("no sensor pair"), "{r}");
    assert!(angstrom::alpha_from_pair(omega, 0.05, 0.9, 1.0).is_err());
}

#[test]
fn arrhenius_recovers_carbon_in_gamma_iron() {
    // Callister Table 5.2: C in gamma-Fe, D0 = 2.3e-5 m^2/s, Q = 148 kJ/mol (published),
    // read from diffusion_coefficients.csv.
    let mut rdr = csv::Reader::from_reader(COEFFS.as_bytes());
    let row = rdr
        .records()
        .map(|r| r.expect("csv row"))
        .find(|r| r[0].starts_with("carbon in gamma-iron"))
        .expect("C in gamma-Fe row");
    // "D0=2.3e-5; Q=148 kJ/mol"
    let field = row[2].to_string();
    let mut parts = field.split(';');
    let d0: f64 = parts
        .next()
        .unwrap()
        .trim()
        .trim_start_matches("D0=")
        .parse()
        .unwrap();
    let q: f64 = parts
        .next()
        .unwrap()
        .trim()
        .trim_start_matches("Q=")
        .trim_end_matches(" kJ/mol")
        .parse::<f64>()
        .unwrap()
        * 1e3;
    assert_eq!((d0, q), (2.3e-5, 148e3));
    let temps = [1100.0, 1223.0, 1273.0];
    let d: Vec<f64> = temps
        .iter()
        .map(|&t| d0 * (-q / (GAS_CONSTANT * t)).exp())
        .collect();
    // The model reproduces the computed reference values (computed_values.json, mpmath).
    let c = computed();
    let a = &c["carbon_in_gamma_iron_arrhenius"];
    assert_rel(d[1], num(&a["D_at_1223K"]), 1e-5, "D(1223 K)");
    assert_rel(d[2], num(&a["D_at_1273K"]), 1e-5, "D(1273 K)");
    let f = arrhenius::arrhenius(&temps, &d, None).unwrap();
    assert_rel(f.d0, d0, 1e-10, "D0");
    assert_rel(f.activation_energy, q, 1e-11, "Q");
    // Exact data: the scatter-based standard errors are at rounding level.
    assert!(f.activation_energy_se.unwrap() < 1e-6 * q);
    // With 10 % uncertainties: standard errors from the weights. For equal relative sigma,
    // se(Ea) = R sigma_y / sqrt(Sxx) (straight-line least squares, Draper & Smith ch. 1).
    let sig: Vec<f64> = d.iter().map(|v| 0.1 * v).collect();
    let f = arrhenius::arrhenius(&temps, &d, Some(&sig)).unwrap();
    let xs: Vec<f64> = temps.iter().map(|t| 1.0 / t).collect();
    let xm = xs.iter().sum::<f64>() / 3.0;
    let sxx: f64 = xs.iter().map(|x| (x - xm).powi(2)).sum();
    assert_rel(
        f.activation_energy_se.unwrap(),
        GAS_CONSTANT * 0.1 / sxx.sqrt(),
        1e-9,
        "se(Ea)",
    );
    assert!(f.reduced_chi2.unwrap() < 1e-20);
    // Refusals.
    assert!(arrhenius::arrhenius(&[1000.0], &[1e-11], None).is_err());
    assert!(arrhenius::arrhenius(&[1000.0, -5.0], &[1e-11, 1e-12], None).is_err());
    let r = fit_reason(arrhenius::arrhenius(&[1000.0, 1000.0], &[1e-11, 2e-11], None).unwrap_err());
    assert!(r.contains("no spread"), "{r}");
    assert!(arrhenius::arrhenius(&temps, &d, Some(&[1e-12, 0.0, 1e-12])).is_err());
}
