//! NIST StRD nonlinear regression: the engine must reproduce the certified estimates (≥ 6
//! significant digits), certified standard deviations (≥ 4) and residual sum of squares
//! (≥ 6) from both certified starting points.
//!
//! Source: NIST/ITL Statistical Reference Datasets, nonlinear regression (public domain);
//! the raw files and the parsed certified values are in `tests/data/nist-strd/` (see the
//! README there). The certified standard deviations are `sqrt(s² [(JᵀJ)⁻¹]_jj)` with
//! `s² = RSS/(n − p)`, so they check the covariance directly. Identity transforms, unit
//! weights (`Weighting::Relative`), default engine settings.

use std::path::PathBuf;

use fickfit::fit::{fit, FitOptions, FnProblem, ParamSpec};
use fickfit::Result;

type Model = fn(&[f64], f64) -> f64;

fn misra1a(b: &[f64], x: f64) -> f64 {
    b[0] * (1.0 - (-b[1] * x).exp())
}
fn chwirut2(b: &[f64], x: f64) -> f64 {
    (-b[0] * x).exp() / (b[1] + b[2] * x)
}
fn mgh17(b: &[f64], x: f64) -> f64 {
    b[0] + b[1] * (-x * b[3]).exp() + b[2] * (-x * b[4]).exp()
}
fn eckerle4(b: &[f64], x: f64) -> f64 {
    (b[0] / b[1]) * (-0.5 * ((x - b[2]) / b[1]).powi(2)).exp()
}
fn rat43(b: &[f64], x: f64) -> f64 {
    b[0] / (1.0 + (b[1] - b[2] * x).exp()).powf(1.0 / b[3])
}

fn data_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/data/nist-strd")
}

/// Data block: the lines after the last line starting with "Data:"; column 1 y, column 2 x.
fn read_dat(file: &str) -> (Vec<f64>, Vec<f64>) {
    let text = std::fs::read_to_string(data_dir().join(file)).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let last = lines.iter().rposition(|l| l.starts_with("Data:")).unwrap();
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for l in &lines[last + 1..] {
        let cols: Vec<f64> = l.split_whitespace().map(|c| c.parse().unwrap()).collect();
        if cols.is_empty() {
            continue;
        }
        assert_eq!(cols.len(), 2, "{file}: {l}");
        y.push(cols[0]);
        x.push(cols[1]);
    }
    (x, y)
}

struct Certified {
    start1: Vec<f64>,
    start2: Vec<f64>,
    value: Vec<f64>,
    sd: Vec<f64>,
    rss: f64,
    n: usize,
}

fn certified(name: &str) -> Certified {
    let text = std::fs::read_to_string(data_dir().join("certified_values.json")).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let d = &v[name];
    let num = |x: &serde_json::Value| -> f64 { x.as_str().unwrap().trim().parse().unwrap() };
    let params = d["parameters"].as_array().unwrap();
    Certified {
        start1: params.iter().map(|p| num(&p["start1"])).collect(),
        start2: params.iter().map(|p| num(&p["start2"])).collect(),
        value: params.iter().map(|p| num(&p["certified"])).collect(),
        sd: params.iter().map(|p| num(&p["certified_sd"])).collect(),
        rss: num(&d["residual_sum_of_squares"]),
        n: d["n_observations"].as_u64().unwrap() as usize,
    }
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

fn check(name: &str, file: &str, model: Model, start: usize) {
    let (x, y) = read_dat(file);
    let c = certified(name);
    assert_eq!(x.len(), c.n, "{name}: number of observations");
    let st = if start == 1 { &c.start1 } else { &c.start2 };
    let specs: Vec<ParamSpec> = st
        .iter()
        .enumerate()
        .map(|(i, &s)| ParamSpec::new(format!("b{}", i + 1), "-", s))
        .collect();
    let (xs, ys) = (x.clone(), y.clone());
    let problem = FnProblem::new(x.len(), move |b: &[f64], out: &mut [f64]| -> Result<()> {
        for i in 0..xs.len() {
            out[i] = ys[i] - model(b, xs[i]);
        }
        Ok(())
    });
    let opts = FitOptions::default();
    let res = fit(problem, specs, &opts).unwrap();
    let mut report = format!(
        "{name} start {start}: stop {:?}, {} iterations, {} evaluations, NM used {}\n",
        res.stop, res.iterations, res.evaluations, res.used_nelder_mead
    );
    let mut worst_est: f64 = 0.0;
    let mut worst_sd: f64 = 0.0;
    for (j, p) in res.parameters.iter().enumerate() {
        let se = p.std_error.unwrap_or(f64::NAN);
        let (re, rs) = (rel(p.estimate, c.value[j]), rel(se, c.sd[j]));
        worst_est = worst_est.max(if re.is_nan() { f64::INFINITY } else { re });
        worst_sd = worst_sd.max(if rs.is_nan() { f64::INFINITY } else { rs });
        report += &format!(
            "  {}: {:.10e} (cert {:.10e}, rel {re:.1e}); se {se:.6e} (cert {:.6e}, rel {rs:.1e})\n",
            p.name, p.estimate, c.value[j], c.sd[j]
        );
    }
    let rr = rel(res.goodness.rss, c.rss);
    report += &format!(
        "  RSS {:.10e} (cert {:.10e}, rel {rr:.1e})",
        res.goodness.rss, c.rss
    );
    println!("{report}");
    assert!(worst_est <= 1e-6, "estimates: {report}");
    assert!(worst_sd <= 1e-4, "standard errors: {report}");
    assert!(rr <= 1e-6, "RSS: {report}");
}

macro_rules! nist {
    ($t1:ident, $t2:ident, $name:literal, $model:ident) => {
        #[test]
        fn $t1() {
            check($name, concat!($name, ".dat"), $model, 1);
        }
        #[test]
        fn $t2() {
            check($name, concat!($name, ".dat"), $model, 2);
        }
    };
}

nist!(misra1a_start1, misra1a_start2, "Misra1a", misra1a);
nist!(chwirut2_start1, chwirut2_start2, "Chwirut2", chwirut2);
nist!(mgh17_start1, mgh17_start2, "MGH17", mgh17);
nist!(boxbod_start1, boxbod_start2, "BoxBOD", misra1a);
nist!(eckerle4_start1, eckerle4_start2, "Eckerle4", eckerle4);
nist!(rat43_start1, rat43_start2, "Rat43", rat43);

/// Misra1a with every observation repeated `k` times, so that the Jacobian (n × 2) exceeds
/// `LARGE_JACOBIAN_ENTRIES` and the engine works from its factor R and forms central
/// differences a few columns at a time. Repeating every row k times leaves the least-squares
/// estimates unchanged and multiplies JᵀJ and the RSS by k (common practice), so the
/// certified values hold with RSS k·RSS and standard deviations
/// `sd · sqrt((n − p) / (k n − p))`.
#[test]
fn misra1a_replicated_past_the_large_jacobian_size() {
    let (x, y) = read_dat("Misra1a.dat");
    let c = certified("Misra1a");
    let p = c.value.len();
    let k = fickfit::fit::rfactor::LARGE_JACOBIAN_ENTRIES / (p * x.len()) + 1;
    let xs: Vec<f64> = x.iter().flat_map(|&v| std::iter::repeat_n(v, k)).collect();
    let ys: Vec<f64> = y.iter().flat_map(|&v| std::iter::repeat_n(v, k)).collect();
    let n = xs.len();
    assert!(n * p > fickfit::fit::rfactor::LARGE_JACOBIAN_ENTRIES);
    let specs: Vec<ParamSpec> = c
        .start1
        .iter()
        .enumerate()
        .map(|(i, &s)| ParamSpec::new(format!("b{}", i + 1), "-", s))
        .collect();
    let problem = FnProblem::new(n, move |b: &[f64], out: &mut [f64]| -> Result<()> {
        for ((o, xi), yi) in out.iter_mut().zip(&xs).zip(&ys) {
            *o = yi - misra1a(b, *xi);
        }
        Ok(())
    });
    let res = fit(problem, specs, &FitOptions::default()).unwrap();
    let sd_scale = ((c.n - p) as f64 / (n - p) as f64).sqrt();
    for (j, q) in res.parameters.iter().enumerate() {
        let se = q.std_error.unwrap();
        assert!(
            rel(q.estimate, c.value[j]) <= 1e-6,
            "{}: {}",
            q.name,
            q.estimate
        );
        assert!(rel(se, c.sd[j] * sd_scale) <= 1e-4, "{}: se {se}", q.name);
    }
    assert!(rel(res.goodness.rss, k as f64 * c.rss) <= 1e-6);
}
