//! Closed-form solutions against reference tables outside the project.
//!
//! The tables are copies of the project's reference folder (`../shared/reference/`) kept in
//! `tests/data/reference/`; see the README there for every source. "computed (mpmath)" marks
//! values computed at 40 significant digits with mpmath from the published formulas (and
//! cross-checked there against an independent form); "published" marks values printed in a
//! book or handbook.

use fickfit::analytic::{
    self, cylinder, flash, periodic::Wave, robin, semi_infinite, sheet, sphere, Shape,
};
use serde_json::Value;
use std::f64::consts::PI;

const SHEET: &str = include_str!("data/reference/plane_sheet_uptake.csv");
const ROBIN: &str = include_str!("data/reference/plane_sheet_robin_uptake.csv");
const ROOTS: &str = include_str!("data/reference/roots_beta_tan_beta.csv");
const SPHERE: &str = include_str!("data/reference/sphere_uptake.csv");
const CYLINDER: &str = include_str!("data/reference/cylinder_uptake.csv");
const ERF: &str = include_str!("data/reference/erf_erfc.csv");
const THIN_FILM: &str = include_str!("data/reference/thin_film_gaussian.csv");
const FLASH: &str = include_str!("data/reference/flash_rear_face_rise.csv");
const COMPUTED: &str = include_str!("data/reference/computed_values.json");
const WORKED: &str = include_str!("data/reference/worked_examples.json");

/// Numeric rows of a simple CSV (header skipped, no quoted cells).
fn rows(text: &str) -> Vec<Vec<f64>> {
    text.lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            l.split(',')
                .map(|c| c.trim().parse::<f64>().expect("numeric cell"))
                .collect()
        })
        .collect()
}

fn json(text: &str) -> Value {
    serde_json::from_str(text).expect("valid JSON")
}

/// A JSON value stored as a decimal string or a number.
fn num(v: &Value) -> f64 {
    match v {
        Value::String(s) => s.parse().expect("numeric string"),
        Value::Number(n) => n.as_f64().expect("f64"),
        other => panic!("not a number: {other}"),
    }
}

#[track_caller]
fn assert_rel(found: f64, expected: f64, tol: f64, what: &str) {
    let err = if expected == 0.0 {
        found.abs()
    } else {
        ((found - expected) / expected).abs()
    };
    assert!(
        err <= tol,
        "{what}: found {found:.16e}, expected {expected:.16e}, rel. error {err:.2e} > {tol:.1e}"
    );
}

// ---------------------------------------------------------------------------------------------
// Plane sheet, constant surface value

#[test]
fn sheet_uptake_matches_crank_series_table() {
    // plane_sheet_uptake.csv: computed (mpmath) from Crank eq. 4.18 / §4.3.2, 15 digits.
    for r in rows(SHEET) {
        let (tau, tau_l, expected, early) = (r[0], r[1], r[2], r[3]);
        assert_rel(
            sheet::uptake(tau),
            expected,
            1e-12,
            &format!("sheet tau={tau}"),
        );
        let shape = analytic::uptake_fraction(Shape::Sheet, tau).unwrap();
        assert_rel(shape, expected, 1e-12, "uptake_fraction(Sheet)");
        // Half-thickness column: same curve at D t / l^2 = 4 D t / L^2.
        assert_rel(tau_l / 4.0, tau, 1e-15, "table convention l = L/2");
        // Early-time relation (4/L) sqrt(Dt/pi) (Crank §4.3.2): computed column; the README
        // states it equals the series to < 1e-12 for tau <= 0.01 (computed).
        if tau <= 0.005 {
            assert_rel(sheet::uptake(tau), early, 1e-12, "early-time relation");
        }
    }
}

#[test]
fn sheet_short_and_long_series_agree_on_overlap() {
    // Two independent series (Crank eq. 4.18 and §4.3.2) must agree where both converge.
    let mut tau = 0.005;
    while tau < 0.5 {
        let a = sheet::uptake_short_series(tau);
        let b = sheet::uptake_long_series(tau);
        assert_rel(a, b, 5e-15, &format!("series overlap tau={tau}"));
        tau *= 1.2;
    }
    // tau -> 0: the leading behaviour 4 sqrt(tau/pi) (Crank §4.3.2) holds to rounding.
    for tau in [1e-16, 1e-12, 1e-8] {
        assert_rel(
            sheet::uptake(tau),
            4.0 * (tau / PI).sqrt(),
            1e-14,
            "tau -> 0",
        );
    }
    assert_eq!(sheet::uptake(0.0), 0.0);
}

#[test]
fn sheet_half_time_and_fractions() {
    // computed_values.json plane_sheet: exact roots computed (mpmath).
    let c = json(COMPUTED);
    let ps = &c["plane_sheet"];
    let half = analytic::tau_half(Shape::Sheet).unwrap();
    assert_rel(half, num(&ps["tau_half_exact"]), 1e-12, "sheet tau_half");
    assert_rel(
        4.0 * half,
        num(&ps["tau_half_in_half_thickness_units_Dt_over_l2"]),
        1e-12,
        "sheet tau_half in D t / l^2",
    );
    for (f, v) in ps["tau_at_fraction"].as_object().unwrap() {
        let f: f64 = f.parse().unwrap();
        let tau = analytic::tau_at_fraction(Shape::Sheet, f).unwrap();
        assert_rel(tau, num(v), 1e-10, &format!("sheet tau at {f}"));
    }
    // Crank's two-term formula (eq. 4.20, from memory) is 1.0e-4 (relative) above the root.
    let x = PI * PI / 16.0;
    let crank = -(x - x.powi(9) / 9.0).ln() / (PI * PI);
    assert_rel(
        crank,
        num(&ps["tau_half_crank_two_term_formula"]),
        1e-12,
        "Crank 4.20",
    );
    assert_rel(crank / half - 1.0, 9.7e-5, 0.02, "two-term formula bias");
}

#[test]
fn sheet_profile_integrates_to_uptake_and_has_sealed_mid_plane() {
    // Mass balance (common practice): the mean of the profile (Crank 4.16/4.17) over the sheet
    // equals M_t/M_inf (Crank 4.18), computed by composite Simpson with 4000 panels.
    for tau in [0.001, 0.01, 0.049, 0.051, 0.2, 0.6] {
        let n = 4000;
        let h = 1.0 / n as f64;
        let mut s = 0.0;
        for i in 0..=n {
            let w = if i == 0 || i == n {
                1.0
            } else if i % 2 == 1 {
                4.0
            } else {
                2.0
            };
            s += w * sheet::profile(tau, i as f64 * h);
        }
        let mean = s * h / 3.0;
        assert_rel(
            mean,
            sheet::uptake(tau),
            1e-9,
            &format!("profile mean tau={tau}"),
        );
    }
    // Symmetry and zero gradient at the mid-plane: why a sheet sealed on one face is half of
    // a sheet of twice the thickness (Crank §4.3).
    for tau in [0.01, 0.1] {
        for xi in [0.1, 0.3, 0.45] {
            assert_rel(
                sheet::profile(tau, xi),
                sheet::profile(tau, 1.0 - xi),
                1e-13,
                "sym",
            );
        }
        let d = 1e-5;
        let grad = (sheet::profile(tau, 0.5 + d) - sheet::profile(tau, 0.5 - d)) / (2.0 * d);
        assert!(grad.abs() < 1e-9, "mid-plane gradient {grad}");
    }
    // Sealed face: thickness L sealed = 2L open, in the SI wrapper.
    let open = sheet::uptake_si(1e-12, 3600.0, 2e-4, sheet::Faces::Both).unwrap();
    let sealed = sheet::uptake_si(1e-12, 3600.0, 1e-4, sheet::Faces::OneSealed).unwrap();
    assert_eq!(open, sealed);
    // SI profile: surface value on the faces, near u0 deep inside at early time.
    let u = sheet::profile_si(2.0, 5.0, 1e-12, 1.0, 1e-3, 0.0).unwrap();
    assert_rel(u, 5.0, 1e-15, "face value");
    let u = sheet::profile_si(2.0, 5.0, 1e-12, 1.0, 1e-3, 5e-4).unwrap();
    assert_rel(u, 2.0, 1e-15, "centre value at early time");
    assert!(sheet::profile_si(0.0, 1.0, 1e-12, 1.0, 1e-3, 2e-3).is_err());
    assert!(sheet::uptake_si(-1.0, 1.0, 1e-3, sheet::Faces::Both).is_err());
}

#[test]
fn permeation_forms_agree_and_time_lag() {
    // The image form (derived from the exit flux) and Crank eq. 4.24a (from memory) are
    // independent; they must agree where both converge.
    let mut tau = 0.03;
    while tau < 0.6 {
        let a = sheet::permeation_short_series(tau);
        let b = sheet::permeation_long_series(tau);
        // Rounding level: the long form cancels from O(0.2) terms; the short form carries the
        // absolute error of erfc near 2 (about 1e-16).
        assert!(
            (a - b).abs() < 1e-15 + 1e-13 * b,
            "tau={tau}: {a:e} vs {b:e}"
        );
        tau *= 1.15;
    }
    // Late times: Q/(L C1) -> tau - 1/6, crossing zero at the time lag L^2/(6D) (Crank §4.3.4).
    assert_rel(
        sheet::permeation(10.0),
        10.0 - 1.0 / 6.0,
        1e-15,
        "asymptote",
    );
    let lag = sheet::time_lag(2e-11, 1e-4).unwrap();
    assert_rel(lag, 1e-8 / 1.2e-10, 1e-15, "time lag");
    let q = sheet::permeation_si(3.0, 2e-11, 1e-4, 20.0 * lag).unwrap();
    assert_rel(
        q,
        1e-4 * 3.0 * (20.0 / 6.0 - 1.0 / 6.0),
        1e-14,
        "Q at 20 lags",
    );
}

// ---------------------------------------------------------------------------------------------
// Surface transfer (Robin) sheet

#[test]
fn robin_roots_match_published_and_computed_tables() {
    // roots_beta_tan_beta.csv: published 4-dp table (Essentials of Applied Mathematics for
    // Scientists and Engineers, App. A, Table A.1, confirmed) and computed (mpmath) roots.
    for r in rows(ROOTS) {
        let (bi, n, published, computed) = (r[0], r[1] as usize, r[2], r[3]);
        let b = robin::root(bi, n).unwrap();
        assert_rel(b, computed, 1e-12, &format!("root Bi={bi} n={n} (mpmath)"));
        assert!(
            (b - published).abs() <= 5.01e-5,
            "published 4-dp root Bi={bi} n={n}: {b}"
        );
    }
    // Bi = 100 from computed_values.json (mpmath).
    let c = json(COMPUTED);
    let table = &c["plane_sheet_robin"]["roots_beta_tan_beta_eq_Bi_first6"];
    for (bi, list) in table.as_object().unwrap() {
        let bi: f64 = bi.parse().unwrap();
        let ours = robin::roots(bi, 6).unwrap();
        for (b, v) in ours.iter().zip(list.as_array().unwrap()) {
            assert_rel(*b, num(v), 1e-10, &format!("root Bi={bi}"));
        }
    }
}

#[test]
fn robin_roots_for_extreme_biot_numbers() {
    // Residual of beta tan beta = Bi (common practice) and the branch of each root.
    for bi in [1e-6, 1e-3, 1.0, 1e3, 1e6] {
        for n in 1..=30 {
            let b = robin::root(bi, n).unwrap();
            let lo = (n - 1) as f64 * PI;
            assert!(
                b > lo && b < lo + PI / 2.0,
                "Bi={bi} n={n}: {b} off its branch"
            );
            // Relative residual of beta sin beta = Bi cos beta.
            let res = (b * b.sin() - bi * b.cos()).abs() / (b.abs() + bi);
            assert!(res < 1e-14, "Bi={bi} n={n}: residual {res:e}");
        }
    }
    // Small Bi: beta_1^2 = Bi (1 - Bi/3 + ...) (series of beta tan beta, common practice).
    let b = robin::root(1e-6, 1).unwrap();
    assert_rel(
        b * b,
        1e-6 * (1.0 - 1e-6 / 3.0),
        1e-12,
        "beta_1 at Bi = 1e-6",
    );
    // Large Bi: beta_n -> (n - 1/2) pi (1 - 1/Bi) (common practice).
    let b = robin::root(1e6, 3).unwrap();
    assert_rel(b, 2.5 * PI * (1.0 - 1e-6), 1e-11, "beta_3 at Bi = 1e6");
    assert!(robin::root(0.0, 1).is_err());
    assert!(robin::root(f64::NAN, 1).is_err());
    assert!(robin::root(1.0, 0).is_err());
}

#[test]
fn robin_uptake_matches_table_and_half_times() {
    // plane_sheet_robin_uptake.csv: computed (mpmath) from Crank eq. 4.55, 15 digits.
    for r in rows(ROBIN) {
        let (bi, t, expected) = (r[0], r[1], r[2]);
        let m = robin::uptake(bi, t).unwrap();
        if expected == 1.0 {
            assert!((m - 1.0).abs() < 1e-15, "Bi={bi} T={t}: {m}");
        } else {
            assert_rel(m, expected, 1e-11, &format!("Robin Bi={bi} T={t}"));
        }
        let s = analytic::uptake_fraction(Shape::RobinSheet { biot: bi }, t).unwrap();
        assert_eq!(s, m);
    }
    // Half-times in D t / l^2 (computed_values.json, mpmath).
    let c = json(COMPUTED);
    for (bi, v) in c["plane_sheet_robin"]["T_half_Dt_over_l2"]
        .as_object()
        .unwrap()
    {
        let bi: f64 = bi.parse().unwrap();
        let t = analytic::tau_half(Shape::RobinSheet { biot: bi }).unwrap();
        assert_rel(t, num(v), 1e-10, &format!("Robin half-time Bi={bi}"));
    }
    // Half-time at the extremes: Bi -> inf gives the sheet value 0.196730739524 (README §1b,
    // computed); Bi -> 0 gives ln 2 / beta_1^2 with beta_1^2 = Bi (1 - Bi/3) (common practice).
    let t = analytic::tau_half(Shape::RobinSheet { biot: 1e6 }).unwrap();
    assert_rel(t, 0.196730739524, 2e-5, "Robin half-time Bi = 1e6");
    let t = analytic::tau_half(Shape::RobinSheet { biot: 1e-6 }).unwrap();
    assert_rel(
        t,
        2f64.ln() / (1e-6 * (1.0 - 1e-6 / 3.0)),
        1e-6,
        "Robin half-time Bi = 1e-6",
    );
    // Limit Bi -> inf: the constant-surface sheet (README §1b: Bi = 1e6 within 1e-5).
    for t in [0.01, 0.1, 0.5, 2.0] {
        let m = robin::uptake(1e6, t).unwrap();
        assert!((m - sheet::uptake(t / 4.0)).abs() < 1e-5, "Bi=1e6 T={t}");
    }
    // Limit Bi -> 0: uniform interior, M/M_inf = 1 - exp(-Bi T) (lumped, common practice).
    let m = robin::uptake(1e-6, 3e5).unwrap();
    assert_rel(m, 1.0 - (-0.3f64).exp(), 1e-6, "lumped limit");
    // Full-thickness convention: Bi = h L / (2D), T = 4 D t / L^2.
    let (h, d, l, t) = (1e-6, 1e-11, 2e-4, 500.0);
    let a = robin::uptake_full_thickness(h, d, l, t).unwrap();
    let b = robin::uptake(h * 1e-4 / d, d * t / 1e-8).unwrap();
    assert_eq!(a, b);
}

#[test]
fn robin_short_and_long_forms_agree_on_overlap() {
    // Semi-infinite surface-transfer solution (Crank §3.3, from memory) against eq. 4.55.
    for bi in [1e-3, 0.1, 1.0, 10.0, 100.0, 1e4] {
        for t in [0.01, 0.015, 0.02, 0.025, 0.03] {
            let a = robin::uptake_short_time(bi, t).unwrap();
            let b = robin::uptake_long_series(bi, t).unwrap();
            assert!(
                (a - b).abs() < 1e-15 + 1e-13 * b,
                "Bi={bi} T={t}: {a:e} vs {b:e}"
            );
        }
    }
    // T -> 0: M/M_inf -> Bi T (surface flux h (u_eq - u0) on both faces, common practice).
    let m = robin::uptake(0.1, 1e-12).unwrap();
    assert_rel(m, 0.1 * 1e-12, 1e-6, "initial slope");
}

// ---------------------------------------------------------------------------------------------
// Sphere and cylinder

#[test]
fn sphere_uptake_table_and_half_time() {
    // sphere_uptake.csv: computed (mpmath) from Crank eq. 6.20.
    for r in rows(SPHERE) {
        assert_rel(
            sphere::uptake(r[0]),
            r[1],
            1e-12,
            &format!("sphere tau={}", r[0]),
        );
    }
    let mut tau = 0.01;
    while tau < 0.5 {
        let (a, b) = (
            sphere::uptake_short_series(tau),
            sphere::uptake_long_series(tau),
        );
        assert_rel(a, b, 5e-15, &format!("sphere overlap tau={tau}"));
        tau *= 1.3;
    }
    let c = json(COMPUTED);
    let half = analytic::tau_half(Shape::Sphere).unwrap();
    assert_rel(
        half,
        num(&c["sphere"]["tau_half"]),
        1e-12,
        "sphere tau_half",
    );
    assert_rel(
        half / 4.0,
        num(&c["sphere"]["tau_half_in_diameter_units_Dt_over_d2"]),
        1e-11,
        "sphere tau_half in diameter units",
    );
}

#[test]
fn bessel_zeros_match_abramowitz_stegun() {
    // A&S Table 9.5, zeros of J0 (published, values from memory; computed column agrees).
    let published = [
        2.40482555770,
        5.52007811029,
        8.65372791291,
        11.7915344390,
        14.9309177085,
    ];
    let c = json(COMPUTED);
    let computed = c["cylinder"]["first_J0_zeros"].as_array().unwrap();
    for (n, (p, m)) in published.iter().zip(computed).enumerate() {
        let z = cylinder::j0_zero(n + 1).unwrap();
        assert!((z - p).abs() < 6e-11, "zero {}: {z} vs A&S {p}", n + 1);
        assert_rel(z, num(m), 1e-13, "zero (mpmath)");
    }
    // J0(1), J1(1): A&S Table 9.1 (published, from memory).
    assert!((cylinder::bessel_j0(1.0) - 0.765_197_686_557_967).abs() < 1e-15);
    assert!((cylinder::bessel_j1(1.0) - 0.440_050_585_744_934).abs() < 1e-15);
    // Large argument: Hankel's expansion (A&S 9.2.5 with 9.2.9/9.2.10, from memory), two terms
    // each of P and Q; the neglected terms are below 1e-13 at x = 500.
    for x in [500.0f64, 1000.0] {
        let chi = x - PI / 4.0;
        let p = 1.0 - 9.0 / (128.0 * x * x);
        let q = -1.0 / (8.0 * x) + 75.0 / (1024.0 * x.powi(3));
        let hankel = (2.0 / (PI * x)).sqrt() * (p * chi.cos() - q * chi.sin());
        let j0 = cylinder::bessel_j0(x);
        assert!(
            (j0 - hankel).abs() < 1e-13,
            "J0({x}) = {j0:e}, Hankel {hankel:e}"
        );
    }
    // Higher zeros: Newton-refined values are roots, and McMahon is close.
    for n in [10, 50, 200] {
        let z = cylinder::j0_zero(n).unwrap();
        assert!(cylinder::bessel_j0(z).abs() < 1e-14, "J0 at zero {n}");
        assert!(
            (z - cylinder::j0_zero_mcmahon(n)).abs() < 1e-9,
            "McMahon {n}"
        );
    }
}

#[test]
fn cylinder_uptake_table_and_half_time() {
    // cylinder_uptake.csv: computed (mpmath) from Crank eq. 5.52.
    for r in rows(CYLINDER) {
        assert_rel(
            cylinder::uptake(r[0]),
            r[1],
            1e-12,
            &format!("cyl tau={}", r[0]),
        );
    }
    // Short-time expansion (derived in the module) against the Bessel series on the overlap.
    for tau in [1e-3, 1.5e-3, 2e-3, 3e-3, 5e-3] {
        let (a, b) = (
            cylinder::uptake_short_series(tau),
            cylinder::uptake_long_series(tau),
        );
        assert_rel(a, b, 1e-14, &format!("cylinder overlap tau={tau}"));
    }
    let c = json(COMPUTED);
    let half = analytic::tau_half(Shape::Cylinder).unwrap();
    assert_rel(
        half,
        num(&c["cylinder"]["tau_half"]),
        1e-12,
        "cylinder tau_half",
    );
    // Crank's three-term short-time formula is off by 6.42e-5 at tau = 0.01 (README §2, computed).
    let tau: f64 = 0.01;
    let crank3 = 4.0 / PI.sqrt() * tau.sqrt() - tau - tau.powf(1.5) / (3.0 * PI.sqrt());
    let rel = crank3 / cylinder::uptake(tau) - 1.0;
    assert_rel(
        rel,
        num(&c["cylinder"]["short_time_expansion_rel_error_at_tau_0.01"]),
        1e-4,
        "",
    );
}

// ---------------------------------------------------------------------------------------------
// Semi-infinite medium and thin films

#[test]
fn erfc_profile_reproduces_erf_table() {
    // erf_erfc.csv: computed (mpmath), 16 digits; A&S Table 7.1 values (published) for
    // erf(0.5), erf(1), erf(1.5), erf(2) to 10 places.
    let (d, t): (f64, f64) = (1e-10, 100.0);
    for r in rows(ERF) {
        let (z, erfc) = (r[0], r[2]);
        let x = 2.0 * z * (d * t).sqrt();
        let u = semi_infinite::erfc_profile(0.0, 1.0, d, t, x).unwrap();
        assert_rel(u, erfc, 1e-13, &format!("erfc({z})"));
        assert_rel(
            semi_infinite::inverse_erfc(erfc).unwrap(),
            z,
            1e-13,
            "erfc^-1",
        );
    }
    for (z, erf) in [
        (0.5, 0.5204998778),
        (1.0, 0.8427007929),
        (2.0, 0.9953222650),
    ] {
        let x = 2.0 * z * (d * t).sqrt();
        let u = semi_infinite::erfc_profile(0.0, 1.0, d, t, x).unwrap();
        assert!((1.0 - u - erf).abs() < 6e-11, "A&S 7.1 erf({z})");
    }
    // computed_values.json semi_infinite (mpmath).
    let c = json(COMPUTED);
    let s = &c["semi_infinite"];
    let m = semi_infinite::erfc_uptake_per_area(0.0, 1.0, 1e-10, 100.0).unwrap();
    assert_rel(
        m,
        num(&s["uptake_per_area_over_(Cs-C0)_at_D=1e-10_t=100"]),
        1e-13,
        "uptake",
    );
    let u = semi_infinite::erfc_profile(0.0, 1.0, 1e-10, 100.0, 1e-4).unwrap();
    assert_rel(
        u,
        num(&s["profile_erfc_x=1e-4_D=1e-10_t=100"]),
        1e-13,
        "profile",
    );
    assert!(semi_infinite::inverse_erfc(2.0).is_err());
    assert!(semi_infinite::erfc_profile(0.0, 1.0, 0.0, 1.0, 1.0).is_err());
}

#[test]
fn special_functions_full_precision() {
    use fickfit::analytic::special;
    // erf_erfc.csv (computed, mpmath, 16 digits): erf and erfc to about 1e-15 relative.
    for r in rows(ERF) {
        assert_rel(
            special::erf(r[0]),
            r[1],
            2e-16 / r[1] + 1e-15,
            &format!("erf({})", r[0]),
        );
        assert_rel(special::erfc(r[0]), r[2], 2e-15, &format!("erfc({})", r[0]));
        assert_rel(
            special::erfc(-r[0]),
            2.0 - r[2],
            1e-15,
            "erfc(-x) = 2 - erfc(x)",
        );
        assert_rel(
            special::erfcx(r[0]),
            (r[0] * r[0]).exp() * r[2],
            1e-14,
            "erfcx",
        );
    }
    // Large argument: erfcx(x) ~ (1/(x sqrt(pi))) (1 - 1/(2x^2) + 3/(4x^4) - 15/(8x^6))
    // (A&S 7.1.23); the next term is below 1e-16 relative at x = 100.
    let x: f64 = 100.0;
    let y = 1.0 / (2.0 * x * x);
    let asym = (1.0 - y + 3.0 * y * y - 15.0 * y.powi(3)) / (x * PI.sqrt());
    assert_rel(special::erfcx(x), asym, 1e-15, "erfcx(100)");
    // ierfc: ierfc(0) = 1/sqrt(pi) and d ierfc/dz = -erfc z (A&S 7.2.1, common practice).
    assert_rel(special::ierfc(0.0), 1.0 / PI.sqrt(), 1e-16, "ierfc(0)");
    for z in [0.3, 1.0, 1.99, 2.01, 3.0] {
        let h = 1e-5;
        let deriv = (special::ierfc(z + h) - special::ierfc(z - h)) / (2.0 * h);
        assert_rel(deriv, -special::erfc(z), 1e-8, &format!("ierfc'({z})"));
    }
}

#[test]
fn thin_film_gaussians_match_table() {
    // thin_film_gaussian.csv: computed (mpmath), M = 1, D = 1e-14 m^2/s, t = 3600 s.
    let (d, t) = (1e-14, 3600.0);
    for r in rows(THIN_FILM) {
        let x = r[0] * 1e-6;
        let s = semi_infinite::thin_film_surface(1.0, d, t, x).unwrap();
        let i = semi_infinite::thin_film_infinite(1.0, d, t, x).unwrap();
        assert_rel(s, r[1], 1e-12, &format!("surface deposit x={} um", r[0]));
        assert_rel(i, r[2], 1e-12, &format!("infinite medium x={} um", r[0]));
    }
    // d ln c / d(x^2) = -1/(4 D t) (computed_values.json, mpmath).
    let c = json(COMPUTED);
    let (x1, x2) = (2e-6, 9e-6);
    let l1 = semi_infinite::thin_film_surface(1.0, d, t, x1)
        .unwrap()
        .ln();
    let l2 = semi_infinite::thin_film_surface(1.0, d, t, x2)
        .unwrap()
        .ln();
    let slope = (l2 - l1) / (x2 * x2 - x1 * x1);
    assert_rel(
        slope,
        num(&c["thin_film"]["ln_c_vs_x2_slope_equals_-1/(4Dt)"]),
        1e-10,
        "slope",
    );
}

#[test]
fn callister_worked_examples() {
    let w = json(WORKED);
    // Example Problem 5.2 (Callister 3rd ed.): carburising time. Exact value computed (mpmath);
    // the book's 25,400 s (= 7.1 h) used z = 0.392 from its table.
    let e = &w["callister_example_5_2_carburizing_time"];
    let i = &e["inputs"];
    let t = semi_infinite::time_to_reach(
        num(&i["C0_wt_pct"]),
        num(&i["Cs_wt_pct"]),
        num(&i["Cx_wt_pct"]),
        num(&i["x_m"]),
        num(&i["D_m2_s"]),
    )
    .unwrap();
    assert_rel(
        t,
        num(&e["computed_here"]["t_s_exact"]),
        1e-7,
        "5.2 exact time (mpmath)",
    );
    assert_rel(
        t / 3600.0,
        num(&e["computed_here"]["t_h_exact"]),
        1e-6,
        "5.2 hours",
    );
    assert_rel(
        t,
        num(&e["book_answer"]["t_s"]),
        5e-3,
        "5.2 book 25,400 s (published)",
    );
    // Problem 5.12 (Callister 6th ed.): decarburisation depth.
    let e = &w["callister_problem_5_12_decarburization_depth"];
    let i = &e["inputs"];
    let x = semi_infinite::depth_of_value(
        num(&i["C0_wt_pct"]),
        num(&i["Cs_wt_pct"]),
        num(&i["Cx_wt_pct"]),
        num(&i["D_m2_s"]),
        num(&i["t_s"]),
    )
    .unwrap();
    assert_rel(
        x,
        num(&e["computed_here"]["x_m_exact"]),
        1e-7,
        "5.12 depth (mpmath)",
    );
    assert_rel(
        x,
        num(&e["book_answer"]["x_m"]),
        5e-3,
        "5.12 book 1.06 mm (published)",
    );
    // Problem 5.13: nitriding concentration.
    let e = &w["callister_problem_5_13_nitriding_concentration"];
    let i = &e["inputs"];
    let (d, t, xm) = (num(&i["D_m2_s"]), num(&i["t_s"]), num(&i["x_m"]));
    let u =
        semi_infinite::erfc_profile(num(&i["C0_wt_pct"]), num(&i["Cs_wt_pct"]), d, t, xm).unwrap();
    assert_rel(
        u,
        num(&e["computed_here"]["Cx_wt_pct"]),
        1e-7,
        "5.13 Cx (mpmath)",
    );
    let arg = xm / (2.0 * (d * t).sqrt());
    assert!(
        (arg - num(&e["book_answer"]["erf_argument"])).abs() < 5e-4,
        "5.13 argument"
    );
}

// ---------------------------------------------------------------------------------------------
// Periodic (Angstrom) and flash

#[test]
fn angstrom_test_vectors() {
    // computed_values.json angstrom.cases (mpmath), T_t = alpha T_xx - eps T.
    let c = json(COMPUTED);
    for case in c["angstrom"]["cases"].as_array().unwrap() {
        let alpha = num(&case["alpha_true"]);
        let eps = num(&case["eps_lateral_loss_per_s"]);
        let omega = 2.0 * PI / num(&case["period_s"]);
        let dx = num(&case["dx_m"]);
        let w = Wave::new(alpha, eps, omega).unwrap();
        assert_rel(
            w.amplitude_ratio(dx),
            num(&case["amplitude_ratio_A1_over_A2"]),
            1e-13,
            "A1/A2",
        );
        assert_rel(w.phase_lag(dx), num(&case["phase_lag_rad"]), 1e-13, "dphi");
        assert_rel(
            w.phase_lag(dx) / omega,
            num(&case["time_lag_s"]),
            1e-13,
            "time lag",
        );
        // The defining relations ab = w/(2 alpha), a^2 - b^2 = eps/alpha (README §6).
        assert_rel(w.decay * w.phase, omega / (2.0 * alpha), 1e-14, "ab");
        assert!((w.decay.powi(2) - w.phase.powi(2) - eps / alpha).abs() < 1e-12 * w.decay.powi(2));
    }
    assert!(Wave::new(0.0, 0.0, 1.0).is_err());
    assert!(Wave::new(1e-4, -1.0, 1.0).is_err());
}

#[test]
fn flash_rear_face_table_and_half_rise() {
    // flash_rear_face_rise.csv: computed (mpmath) from Parker et al. 1961 (formula from memory).
    for r in rows(FLASH) {
        assert_rel(
            flash::rear_face_rise(r[0]),
            r[2],
            1e-12,
            &format!("V({})", r[0]),
        );
        let v = flash::rear_face_rise_si(1e-5, r[1] * 1e-6 / 1e-5, 1e-3).unwrap();
        assert_rel(v, r[2], 1e-10, "V via SI");
    }
    // The theta-transformed and the original series (two forms of one function) agree.
    for omega in [0.3, 1.0, 2.0, PI, 5.0, 8.0] {
        let (a, b) = (
            flash::rear_face_rise_theta(omega),
            flash::rear_face_rise_series(omega),
        );
        assert!((a - b).abs() < 5e-16, "V({omega}): {a:e} vs {b:e}");
    }
    let c = json(COMPUTED);
    let f = &c["flash_parker"];
    let k = flash::half_rise_coefficient().unwrap();
    assert_rel(
        k,
        num(&f["coefficient_alpha_t_half_over_L2"]),
        1e-12,
        "0.138785297043",
    );
    assert_rel(k * PI * PI, num(&f["omega_half"]), 1e-12, "omega_half");
    for (fr, v) in f["other_fractions_alpha_t_over_L2"].as_object().unwrap() {
        let fr: f64 = fr.parse().unwrap();
        let x = flash::alpha_t_over_l2_at_fraction(fr).unwrap();
        assert_rel(x, num(v), 1e-10, &format!("flash fraction {fr}"));
    }
    assert!(flash::alpha_t_over_l2_at_fraction(1.0).is_err());
}

#[test]
fn fraction_inputs_are_checked() {
    assert!(analytic::tau_at_fraction(Shape::Sheet, 0.0).is_err());
    assert!(analytic::tau_at_fraction(Shape::Sphere, 1.0).is_err());
    assert!(analytic::tau_at_fraction(Shape::RobinSheet { biot: -1.0 }, 0.5).is_err());
    assert!(analytic::uptake_fraction(Shape::Cylinder, -1.0).is_err());
    assert!(analytic::uptake_fraction(Shape::Cylinder, f64::NAN).is_err());
}
