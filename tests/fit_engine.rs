//! Behaviour of the fitting engine on synthetic problems with known answers.

use fickfit::fit::bootstrap::splitmix64;
use fickfit::fit::{
    fit, rank_models, BootstrapOptions, DatasetRange, FitOptions, FnProblem, ModelSummary,
    ParamSpec, ProfileEnd, ProfileOptions, Weighting,
};
use fickfit::stats::intervals::t_quantile;
use fickfit::stats::{delta_method, residual_checks, ExtraInput, ResidualVerdict, WarningKind};
use fickfit::{Error, Result};
use rand::rngs::StdRng;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

/// Times 1..=n (s) and noisy data y = A(1 − exp(−t/τ)) + N(0, σ²).
fn uptake_data(n: usize, a: f64, tau: f64, sigma: f64, seed: u64) -> (Vec<f64>, Vec<f64>) {
    let mut rng = StdRng::seed_from_u64(seed);
    let noise = Normal::new(0.0, sigma).unwrap();
    let t: Vec<f64> = (1..=n).map(|i| i as f64).collect();
    let y = t
        .iter()
        .map(|t| a * (1.0 - (-t / tau).exp()) + noise.sample(&mut rng))
        .collect();
    (t, y)
}

fn uptake_problem(
    t: Vec<f64>,
    y: Vec<f64>,
) -> FnProblem<impl Fn(&[f64], &mut [f64]) -> Result<()> + Clone + Send> {
    let n = t.len();
    FnProblem::new(n, move |p: &[f64], out: &mut [f64]| {
        for i in 0..t.len() {
            out[i] = y[i] - p[0] * (1.0 - (-t[i] / p[1]).exp());
        }
        Ok(())
    })
}

fn uptake_specs() -> Vec<ParamSpec> {
    vec![
        ParamSpec::new("A", "kg", 1.0),
        ParamSpec::new("tau", "s", 3.0).log(),
    ]
}

#[test]
fn student_t_quantile_matches_tables() {
    // t(0.975; 10) = 2.228139: standard t tables (NIST/SEMATECH e-Handbook of Statistical
    // Methods, §1.3.6.7.2, "Critical values of the Student's t distribution"), via statrs.
    let t = t_quantile(0.975, 10.0).unwrap();
    assert!((t - 2.228139).abs() < 5e-7, "{t}");
}

/// Coverage of the 95 % intervals over 2000 seeded replicates.
///
/// If the intervals have exact 95 % coverage, the number of replicates covering the truth is
/// Binomial(N, 0.95). For N = 200 (mean 190, sd √(200 · 0.95 · 0.05) = 3.08) the band
/// 92 %–98 % is mean ± 2 sd. With this seed base the first 200 replicates alone cover only
/// 181/200 (A) and 181/200 (τ), about 3 sd low, so the study uses N = 2000 replicates from
/// the same seed base: mean 1900, sd √(2000 · 0.95 · 0.05) = 9.75, and the band 1880..=1920
/// (94 %–96 %) is again mean ± 2 sd; an honest method falls outside it with about 5 %
/// probability for a random seed (the seed is fixed, so the test is deterministic). For this
/// nearly linear model with σ estimated from the residuals, the Student-t intervals should be
/// close to exact (Bates & Watts 1988, §2.3); the profile intervals likewise.
#[test]
fn jacobian_and_profile_intervals_cover_the_truth() {
    let (a_true, tau_true) = (2.0, 5.0);
    let reps = 2000;
    let mut cover_t = [0usize; 2];
    let mut cover_prof = [0usize; 2];
    let mut prof_done = 0;
    for r in 0..reps {
        let (t, y) = uptake_data(20, a_true, tau_true, 0.05, splitmix64(1000 + r));
        let opts = FitOptions {
            profile: Some(ProfileOptions::default()),
            ..FitOptions::default()
        };
        let res = fit(uptake_problem(t, y), uptake_specs(), &opts).unwrap();
        assert!(res.stop.converged(), "replicate {r}: {}", res.stop_message);
        for (k, truth) in [a_true, tau_true].into_iter().enumerate() {
            let iv = res.parameters[k].interval.unwrap();
            if iv.lower <= truth && truth <= iv.upper {
                cover_t[k] += 1;
            }
            let p = res.parameters[k].profile.as_ref().unwrap();
            if let (ProfileEnd::Bounded(lo), ProfileEnd::Bounded(hi)) = (p.lower, p.upper) {
                assert!(lo < res.parameters[k].estimate && res.parameters[k].estimate < hi);
                if lo <= truth && truth <= hi {
                    cover_prof[k] += 1;
                }
            }
        }
        prof_done += 1;
    }
    println!(
        "Student-t coverage {cover_t:?} / {reps}, profile coverage {cover_prof:?} / {prof_done}"
    );
    for k in 0..2 {
        assert!(
            (1880..=1920).contains(&cover_t[k]),
            "t coverage {cover_t:?}"
        );
        assert!(
            (1880..=1920).contains(&cover_prof[k]),
            "profile coverage {cover_prof:?}"
        );
    }
}

#[test]
fn log_transform_finds_a_parameter_three_decades_away() {
    // y = A (1 − exp(−D t / L²)), L = 1 mm, D = 2e-10 m²/s; start D at 2e-13 (3 decades off).
    let (a, d, l) = (1.5, 2e-10, 1e-3);
    let t: Vec<f64> = (1..=30).map(|i| 200.0 * i as f64).collect();
    let y: Vec<f64> = t
        .iter()
        .map(|t| a * (1.0 - (-d * t / (l * l)).exp()))
        .collect();
    let problem = FnProblem::new(t.len(), move |p: &[f64], out: &mut [f64]| {
        for i in 0..t.len() {
            out[i] = y[i] - p[0] * (1.0 - (-p[1] * t[i] / (p[2] * p[2])).exp());
        }
        Ok(())
    });
    let specs = vec![
        ParamSpec::new("A", "kg/m^2", 1.0),
        ParamSpec::new("D", "m^2/s", 2e-13)
            .log()
            .bounds(Some(1e-16), Some(1e-6)),
        ParamSpec::new("L", "m", l).fixed(),
    ];
    let res = fit(problem, specs, &FitOptions::default()).unwrap();
    assert!(res.stop.converged(), "{}", res.stop_message);
    let d_hat = res.parameters[1].estimate;
    assert!((d_hat - d).abs() / d < 1e-8, "D = {d_hat}");
    assert!((res.parameters[0].estimate - a).abs() / a < 1e-8);
    assert_eq!(res.parameters[2].estimate, l);
}

#[test]
fn runs_test_and_durbin_watson_on_a_hand_example() {
    // e = [1, 2, −1, −2, 1, −1, 2, 1, −2, −1]; signs + + − − + − + + − −: R = 6 runs,
    // n₊ = n₋ = 5, N = 10. E[R] = 2·5·5/10 + 1 = 6, Var[R] = 2·25·(50 − 10)/(100·9) = 20/9,
    // z = 0, p = 1. Mean 0, Σe² = 22, Σ(e_i − e_{i−1})² = 1+9+1+9+4+9+1+9+1 = 44, so
    // DW = 2; Σ e_i e_{i−1} = 2−2+2−2−1−2+2−2+2 = −1, ρ₁ = −1/22. (Formulas: Wald & Wolfowitz
    // 1940; Durbin & Watson 1950; hand computation.)
    let e = [1.0, 2.0, -1.0, -2.0, 1.0, -1.0, 2.0, 1.0, -2.0, -1.0];
    let c = residual_checks("hand", &e, 0.05);
    assert_eq!(c.runs, 6);
    assert_eq!((c.n_positive, c.n_negative), (5, 5));
    assert!((c.expected_runs - 6.0).abs() < 1e-12);
    assert!(c.runs_z.abs() < 1e-12);
    assert!((c.runs_p - 1.0).abs() < 1e-12);
    assert!((c.durbin_watson - 2.0).abs() < 1e-12);
    assert!((c.lag1_autocorrelation + 1.0 / 22.0).abs() < 1e-12);
    assert_eq!(c.verdict, ResidualVerdict::LookRandom);
    assert!(c.message.contains("residuals look random"));

    // A structured sequence: e_i = sin(2π (i + 1/2)/20), i = 0..39: four blocks of 10 of one
    // sign, R = 4, n₊ = n₋ = 20: E[R] = 21, Var[R] = 2·400·760/(1600·39) = 9.74359,
    // z = −17/3.12147 = −5.4462 (hand computation).
    let e: Vec<f64> = (0..40)
        .map(|i| (2.0 * std::f64::consts::PI * (i as f64 + 0.5) / 20.0).sin())
        .collect();
    let c = residual_checks("sine", &e, 0.05);
    assert_eq!(c.runs, 4);
    assert!((c.runs_z + 5.4462).abs() < 1e-4, "{}", c.runs_z);
    assert!(c.durbin_watson < 0.5, "{}", c.durbin_watson);
    assert_eq!(c.verdict, ResidualVerdict::Structured);
    assert!(c.message.contains("missing physics"));
}

#[test]
fn residual_checks_are_reported_per_dataset() {
    // a straight-line model fitted to data with a hidden curvature in the second dataset
    let x: Vec<f64> = (0..60).map(|i| (i % 30) as f64).collect();
    let y: Vec<f64> = (0..60)
        .map(|i| {
            let xi = (i % 30) as f64;
            let wiggle = if i < 30 {
                0.01 * ((i * 7919) % 13) as f64 - 0.06
            } else {
                0.0
            };
            let curve = if i >= 30 {
                0.02 * (xi - 15.0).powi(2)
            } else {
                0.0
            };
            1.0 + 0.5 * xi + wiggle + curve
        })
        .collect();
    let problem = FnProblem::new(60, move |p: &[f64], out: &mut [f64]| {
        for i in 0..60 {
            let off = if i < 30 { 0.0 } else { p[2] };
            out[i] = y[i] - (p[0] + off + p[1] * x[i]);
        }
        Ok(())
    })
    .with_datasets(vec![
        DatasetRange {
            name: "run1".into(),
            range: 0..30,
        },
        DatasetRange {
            name: "run2".into(),
            range: 30..60,
        },
    ]);
    let specs = vec![
        ParamSpec::new("a", "-", 0.0),
        ParamSpec::new("b", "-", 1.0),
        ParamSpec::new("c", "-", 0.0),
    ];
    let res = fit(problem, specs, &FitOptions::default()).unwrap();
    assert_eq!(res.residual_checks.len(), 2);
    assert_eq!(res.residual_checks[1].dataset, "run2");
    assert_eq!(res.residual_checks[1].verdict, ResidualVerdict::Structured);
}

#[test]
fn aicc_ranking_picks_the_true_model() {
    // data from y = A(1 − exp(−t/τ)); candidates: linear y = b t (k = 1), the true model
    // (k = 2) and the true model plus a drift c t (k = 3).
    let (t, y) = uptake_data(40, 2.0, 5.0, 0.05, 77);
    let mk = |k: usize| {
        let (t, y) = (t.clone(), y.clone());
        FnProblem::new(t.len(), move |p: &[f64], out: &mut [f64]| {
            for i in 0..t.len() {
                let f = match k {
                    1 => p[0] * t[i],
                    2 => p[0] * (1.0 - (-t[i] / p[1]).exp()),
                    _ => p[0] * (1.0 - (-t[i] / p[1]).exp()) + p[2] * t[i],
                };
                out[i] = y[i] - f;
            }
            Ok(())
        })
    };
    let mut summaries = Vec::new();
    for (k, specs) in [
        (1, vec![ParamSpec::new("b", "-", 0.1)]),
        (2, uptake_specs()),
        (3, {
            let mut s = uptake_specs();
            s.push(ParamSpec::new("c", "-", 0.0));
            s
        }),
    ] {
        let res = fit(mk(k), specs, &FitOptions::default()).unwrap();
        summaries.push(ModelSummary {
            name: format!("k{k}"),
            n: res.goodness.n,
            rss: res.goodness.rss,
            k: res.goodness.k,
        });
    }
    let ranked = rank_models(&summaries).unwrap();
    assert_eq!(ranked[0].name, "k2", "{ranked:?}");
    let wsum: f64 = ranked.iter().map(|r| r.weight).sum();
    assert!((wsum - 1.0).abs() < 1e-12);
    for r in &ranked {
        assert!((r.evidence_ratio - ranked[0].weight / r.weight).abs() <= 1e-9 * r.evidence_ratio);
    }
}

#[test]
fn bootstrap_is_reproducible_and_independent_of_threads() {
    let (t, y) = uptake_data(20, 2.0, 5.0, 0.05, 5);
    let opts = FitOptions {
        bootstrap: Some(BootstrapOptions {
            replicates: 200,
            seed: 42,
        }),
        ..FitOptions::default()
    };
    let run = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| fit(uptake_problem(t.clone(), y.clone()), uptake_specs(), &opts).unwrap())
    };
    let a = run(1);
    let b = run(2);
    let c = run(2);
    let (ba, bb, bc) = (
        a.bootstrap.unwrap(),
        b.bootstrap.unwrap(),
        c.bootstrap.unwrap(),
    );
    assert_eq!(ba.failed, 0);
    assert_eq!(ba.samples.len(), 200);
    assert_eq!(ba.samples, bb.samples);
    assert_eq!(bb.samples, bc.samples);
    // the bootstrap spread agrees roughly with the Jacobian standard error (within 30 %)
    for k in 0..2 {
        let sd = ba.std_devs[k].unwrap();
        let se = a.parameters[k].std_error.unwrap();
        assert!(
            (sd / se - 1.0).abs() < 0.3,
            "param {k}: bootstrap sd {sd}, se {se}"
        );
        let iv = ba.intervals[k].unwrap();
        assert!(iv.lower < a.parameters[k].estimate && a.parameters[k].estimate < iv.upper);
    }
    // another seed gives other samples
    let opts2 = FitOptions {
        bootstrap: Some(BootstrapOptions {
            replicates: 200,
            seed: 43,
        }),
        ..FitOptions::default()
    };
    let d = fit(uptake_problem(t.clone(), y.clone()), uptake_specs(), &opts2).unwrap();
    assert_ne!(d.bootstrap.unwrap().samples, ba.samples);
}

#[test]
fn product_of_two_parameters_is_not_identifiable() {
    // y = a·b·exp(−c x): only the product a·b is determined.
    let x: Vec<f64> = (0..25).map(|i| 0.2 * i as f64).collect();
    let mut rng = StdRng::seed_from_u64(9);
    let noise = Normal::new(0.0, 0.01).unwrap();
    let y: Vec<f64> = x
        .iter()
        .map(|x| 3.0 * (-0.7 * x).exp() + noise.sample(&mut rng))
        .collect();
    let problem = FnProblem::new(x.len(), move |p: &[f64], out: &mut [f64]| {
        for i in 0..x.len() {
            out[i] = y[i] - p[0] * p[1] * (-p[2] * x[i]).exp();
        }
        Ok(())
    });
    let specs = vec![
        ParamSpec::new("a", "-", 1.0),
        ParamSpec::new("b", "-", 2.0),
        ParamSpec::new("c", "1/s", 1.0),
    ];
    let res = fit(problem, specs, &FitOptions::default()).unwrap();
    assert_eq!(res.covariance.rank, 2);
    assert_eq!(res.covariance.non_identifiable, vec![0, 1]);
    assert!(res.parameters[0].std_error.is_none());
    assert!(res.parameters[1].std_error.is_none());
    assert!(res.parameters[0].interval.is_none());
    assert!(res.parameters[2].std_error.is_some());
    assert!(res.warnings.iter().any(|w| matches!(
        &w.kind,
        WarningKind::NotIdentifiable { parameters } if parameters == &["a".to_string(), "b".to_string()]
    )));
    // the product itself is fine
    assert!((res.estimates[0] * res.estimates[1] - 3.0).abs() < 0.05);
}

#[test]
fn delta_method_matches_analytic_propagation() {
    // k = α ρ c_p with copper near 300 K (Incropera & DeWitt, Table A.1: α = 117e-6 m²/s,
    // ρ = 8933 kg/m³, c_p = 385 J/(kg K)); assumed standard uncertainties u(α) = 2e-6,
    // u(ρ) = 10, u(c_p) = 4. For a product the first-order propagation is exact in relative
    // terms: (u_k/k)² = (u_α/α)² + (u_ρ/ρ)² + (u_c/c_p)² (GUM, JCGM 100:2008, eq. 12).
    let (alpha, ua, rho, ur, cp, uc) = (117e-6, 2e-6, 8933.0, 10.0, 385.0, 4.0);
    let extras = [
        ExtraInput {
            name: "rho".into(),
            value: rho,
            std_uncertainty: ur,
        },
        ExtraInput {
            name: "c_p".into(),
            value: cp,
            std_uncertainty: uc,
        },
    ];
    let g = |th: &[f64], z: &[f64]| th[0] * z[0] * z[1];
    let d = delta_method(g, &[alpha], &[vec![Some(ua * ua)]], &extras).unwrap();
    let k = alpha * rho * cp;
    let uk = k * ((ua / alpha).powi(2) + (ur / rho).powi(2) + (uc / cp).powi(2)).sqrt();
    assert!((d.value - k).abs() < 1e-12 * k);
    assert!(
        (d.std_uncertainty - uk).abs() < 1e-7 * uk,
        "{} vs {uk}",
        d.std_uncertainty
    );

    // the same through a fit result: α fitted from a(1 − exp(−α t)) style data
    let (t, y) = uptake_data(20, 2.0, 5.0, 0.05, 3);
    let res = fit(uptake_problem(t, y), uptake_specs(), &FitOptions::default()).unwrap();
    let tau = res.estimates[1];
    let se = res.parameters[1].std_error.unwrap();
    let d = res.derived(|th, z| z[0] / th[1], &extras[..1]).unwrap();
    let expect = (rho / tau) * ((se / tau).powi(2) + (ur / rho).powi(2)).sqrt();
    assert!((d.std_uncertainty - expect).abs() < 1e-6 * expect);
}

#[test]
fn failed_evaluations_reject_the_step_instead_of_ending_the_fit() {
    // The model refuses every fifth evaluation (as a forward solver might fail for some
    // settings): with an error on evaluations 4, 14, 24, ... and NaN values on 9, 19, 29, ...
    // The search must reject those points and still reach the optimum of the well-behaved
    // model.
    let (t, y) = uptake_data(20, 2.0, 5.0, 0.02, 11);
    let reference = fit(
        uptake_problem(t.clone(), y.clone()),
        uptake_specs(),
        &FitOptions::default(),
    )
    .unwrap();
    let count = std::sync::Arc::new(std::sync::atomic::AtomicUsize::new(0));
    let problem = FnProblem::new(t.len(), move |p: &[f64], out: &mut [f64]| {
        let c = count.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        if c % 10 == 4 {
            return Err(Error::setting("tau", "solver refused this value"));
        }
        for i in 0..t.len() {
            out[i] = if c % 10 == 9 {
                f64::NAN
            } else {
                y[i] - p[0] * (1.0 - (-t[i] / p[1]).exp())
            };
        }
        Ok(())
    });
    let res = fit(problem, uptake_specs(), &FitOptions::default()).unwrap();
    assert!(res.stop.converged(), "{}", res.stop_message);
    assert!(res.failed_evaluations > 10, "{}", res.failed_evaluations);
    for k in 0..2 {
        let se = reference.parameters[k].std_error.unwrap();
        let d = (res.estimates[k] - reference.estimates[k]).abs();
        assert!(
            d < 1e-4 * se,
            "{k}: {} vs {}",
            res.estimates[k],
            reference.estimates[k]
        );
    }
}

#[test]
fn absolute_sigma_gives_chi_square_and_unscaled_covariance() {
    // straight line with known σ = 0.1: Var(b̂) = σ²/Σ(x − x̄)² exactly (linear regression,
    // e.g. Bevington & Robinson 2003, eq. 6.21), whatever the noise realisation.
    let sigma = 0.1;
    let x: Vec<f64> = (0..15).map(|i| i as f64).collect();
    let mut rng = StdRng::seed_from_u64(21);
    let noise = Normal::new(0.0, sigma).unwrap();
    let y: Vec<f64> = x
        .iter()
        .map(|x| 1.0 + 0.3 * x + noise.sample(&mut rng))
        .collect();
    let (xs, ys) = (x.clone(), y.clone());
    let problem = FnProblem::new(15, move |p: &[f64], out: &mut [f64]| {
        for i in 0..15 {
            out[i] = (ys[i] - p[0] - p[1] * xs[i]) / sigma;
        }
        Ok(())
    })
    .with_observations(y.clone(), vec![sigma; 15]);
    let specs = vec![ParamSpec::new("a", "-", 0.0), ParamSpec::new("b", "-", 0.0)];
    let opts = FitOptions {
        weighting: Weighting::Absolute { rescale: false },
        ..FitOptions::default()
    };
    let res = fit(problem, specs, &opts).unwrap();
    let xbar = x.iter().sum::<f64>() / 15.0;
    let sxx: f64 = x.iter().map(|v| (v - xbar).powi(2)).sum();
    let se_b = sigma / sxx.sqrt();
    let got = res.parameters[1].std_error.unwrap();
    assert!((got - se_b).abs() < 1e-6 * se_b, "{got} vs {se_b}");
    let chi = res.goodness.chi_square.as_ref().unwrap();
    assert_eq!(chi.dof, 13);
    assert!(chi.p_value > 0.0 && chi.p_value < 1.0);
    assert!((chi.reduced - chi.chi2 / 13.0).abs() < 1e-12);
    let r2 = res.goodness.r_squared.unwrap();
    assert!(r2 > 0.99 && r2 < 1.0, "{r2}");
}

#[test]
fn invalid_input_is_an_error_not_a_panic() {
    let (t, y) = uptake_data(20, 2.0, 5.0, 0.05, 1);
    let bad = vec![
        ParamSpec::new("A", "kg", 1.0),
        ParamSpec::new("tau", "s", -3.0).log(),
    ];
    assert!(fit(
        uptake_problem(t.clone(), y.clone()),
        bad,
        &FitOptions::default()
    )
    .is_err());
    let opts = FitOptions {
        level: 1.5,
        ..FitOptions::default()
    };
    assert!(fit(uptake_problem(t.clone(), y.clone()), uptake_specs(), &opts).is_err());
    let (t2, y2) = (t[..2].to_vec(), y[..2].to_vec());
    let e = fit(
        uptake_problem(t2, y2),
        uptake_specs(),
        &FitOptions::default(),
    )
    .unwrap_err();
    assert_eq!(e.input_kind(), Some(fickfit::InputKind::TooFewPoints));
}

#[test]
fn profile_reports_an_unbounded_side() {
    // data sampled long after the transient (t = 10..30 s, τ = 0.5 s): exp(−t/τ) < 2e-9, so
    // any τ below about 1 s fits equally well and the lower profile end does not exist.
    let t: Vec<f64> = (10..=30).map(|i| i as f64).collect();
    let mut rng = StdRng::seed_from_u64(4);
    let noise = Normal::new(0.0, 0.01).unwrap();
    let y: Vec<f64> = t
        .iter()
        .map(|t| 2.0 * (1.0 - (-t / 0.5f64).exp()) + noise.sample(&mut rng))
        .collect();
    let specs = vec![
        ParamSpec::new("A", "kg", 1.0),
        ParamSpec::new("tau", "s", 0.5).log(),
    ];
    let opts = FitOptions {
        profile: Some(ProfileOptions::default()),
        ..FitOptions::default()
    };
    let res = fit(uptake_problem(t, y), specs, &opts).unwrap();
    let p = res.parameters[1].profile.as_ref().unwrap();
    assert_eq!(p.lower, ProfileEnd::Unbounded, "{}", p.message);
    assert!(p.message.contains("unbounded"));
    // A is well determined: both ends bounded and around the estimate
    let pa = res.parameters[0].profile.as_ref().unwrap();
    let (lo, hi) = (pa.lower.value().unwrap(), pa.upper.value().unwrap());
    assert!(lo < res.estimates[0] && res.estimates[0] < hi);
}

#[test]
fn parameter_pushed_against_a_bound_is_flagged() {
    // y = a + b x with true b = 2 but b restricted to (0, 1)
    let x: Vec<f64> = (0..20).map(|i| i as f64).collect();
    let y: Vec<f64> = x
        .iter()
        .map(|x| 1.0 + 2.0 * x + 0.1 * (x * 1.7).sin())
        .collect();
    let problem = FnProblem::new(20, move |p: &[f64], out: &mut [f64]| {
        for i in 0..20 {
            out[i] = y[i] - p[0] - p[1] * x[i];
        }
        Ok(())
    });
    let specs = vec![
        ParamSpec::new("a", "-", 0.0),
        ParamSpec::new("b", "-", 0.5).bounds(Some(0.0), Some(1.0)),
    ];
    let res = fit(problem, specs, &FitOptions::default()).unwrap();
    assert!(
        res.estimates[1] > 0.999_999 && res.estimates[1] <= 1.0,
        "{}",
        res.estimates[1]
    );
    assert!(res.warnings.iter().any(|w| matches!(
        &w.kind,
        WarningKind::AtBound { parameter, bound } if parameter == "b" && *bound == 1.0
    )));
}

/// A log-scale parameter whose bounds span many decades is "at its bound" only when it is
/// there in ratio: D ≈ 1e-12 with bounds [1e-20, 1e-5] is fifteen decades above the lower
/// bound, although 1e-12 − 1e-20 is below 1e-6 of the linear range (regression: that linear
/// test once flagged such a fit). A rate pushed to its upper bound on the log scale is still
/// flagged (common practice: an estimate on a bound has no meaningful uncertainty).
#[test]
fn log_parameter_is_judged_at_a_bound_on_the_log_scale() {
    let (t, y) = uptake_data(30, 2.0, 5.0, 0.01, 3);
    // k = 1/τ in 1/s, fitted on the log scale; the truth 0.2 lies inside very wide bounds
    // (0.2 − 1e-20 is below 1e-6 of the linear range 1e6).
    let (t2, y2) = (t.clone(), y.clone());
    let rate_problem = move |p: &[f64], out: &mut [f64]| -> Result<()> {
        for i in 0..t2.len() {
            out[i] = y2[i] - p[0] * (1.0 - (-t2[i] * p[1]).exp());
        }
        Ok(())
    };
    let specs = vec![
        ParamSpec::new("A", "kg", 1.0),
        ParamSpec::new("k", "1/s", 0.1)
            .log()
            .bounds(Some(1e-20), Some(1e6)),
    ];
    let res = fit(
        FnProblem::new(30, rate_problem.clone()),
        specs,
        &FitOptions::default(),
    )
    .unwrap();
    assert!(
        (res.estimates[1] - 0.2).abs() < 0.02,
        "{}",
        res.estimates[1]
    );
    assert!(
        !res.warnings
            .iter()
            .any(|w| matches!(w.kind, WarningKind::AtBound { .. })),
        "{:?}",
        res.warnings
    );
    // The same rate held below 0.05 on the log scale ends on that bound and is flagged.
    let specs = vec![
        ParamSpec::new("A", "kg", 1.0),
        ParamSpec::new("k", "1/s", 0.01)
            .log()
            .bounds(Some(1e-20), Some(0.05)),
    ];
    let res = fit(
        FnProblem::new(30, rate_problem),
        specs,
        &FitOptions::default(),
    )
    .unwrap();
    assert!(
        res.warnings.iter().any(|w| matches!(
            &w.kind,
            WarningKind::AtBound { parameter, bound } if parameter == "k" && *bound == 0.05
        )),
        "{:?}",
        res.warnings
    );
}

#[test]
fn multi_start_escapes_a_local_minimum() {
    // y = sin(ω t): the sum of squares in ω has many local minima; from ω = 0.5 rad/s plain
    // LM stops in one of them, random starts (log ω ± 2) reach ω = 2.
    let t: Vec<f64> = (0..50).map(|i| 0.2 * i as f64).collect();
    let y: Vec<f64> = t.iter().map(|t| (2.0 * t).sin()).collect();
    let problem = FnProblem::new(50, move |p: &[f64], out: &mut [f64]| {
        for i in 0..50 {
            out[i] = y[i] - (p[0] * t[i]).sin();
        }
        Ok(())
    });
    let specs = vec![ParamSpec::new("omega", "rad/s", 0.5).log()];
    let single = fit(problem.clone(), specs.clone(), &FitOptions::default()).unwrap();
    assert!(
        (single.estimates[0] - 2.0).abs() > 0.1,
        "single start found {}",
        single.estimates[0]
    );
    let opts = FitOptions {
        random_starts: 30,
        random_spread: 2.0,
        seed: 7,
        ..FitOptions::default()
    };
    let multi = fit(problem, specs, &opts).unwrap();
    assert_eq!(multi.starts_tried, 31);
    assert!(
        (multi.estimates[0] - 2.0).abs() < 1e-8,
        "{}",
        multi.estimates[0]
    );
}

#[test]
fn fit_result_serialises() {
    let (t, y) = uptake_data(20, 2.0, 5.0, 0.05, 8);
    let res = fit(uptake_problem(t, y), uptake_specs(), &FitOptions::default()).unwrap();
    let json = serde_json::to_string(&res).unwrap();
    assert!(json.contains("\"tau\"") && json.contains("\"stop_message\""));
}

#[test]
fn nelder_mead_pre_search_reaches_the_same_optimum() {
    let (t, y) = uptake_data(20, 2.0, 5.0, 0.05, 12);
    let lm = fit(
        uptake_problem(t.clone(), y.clone()),
        uptake_specs(),
        &FitOptions::default(),
    )
    .unwrap();
    let opts = FitOptions {
        nelder_mead_first: true,
        ..FitOptions::default()
    };
    let nm = fit(uptake_problem(t, y), uptake_specs(), &opts).unwrap();
    assert!(nm.used_nelder_mead && !lm.used_nelder_mead);
    // both stop on the sum-of-squares criteria (ftol = 1e-14), which fixes the optimum to a
    // small fraction of a standard error, not to machine precision: compare in SE units
    for k in 0..2 {
        let (a, b) = (lm.estimates[k], nm.estimates[k]);
        let se = lm.parameters[k].std_error.unwrap();
        assert!((a - b).abs() < 1e-4 * se, "{k}: {a} vs {b} (se {se})");
    }
}

#[test]
fn correlated_ill_conditioned_parameters_are_flagged() {
    // y = a + b x with x in [10000, 10001]: the intercept is an extrapolation over 10⁴ ranges
    // of x, so a and b are almost perfectly anti-correlated (r ≈ −1), the column-scaled
    // JᵀJ has the condition number (1 + ρ)/(1 − ρ) ≈ 4 x̄²/s_x² ≈ 4e9 (ρ = x̄/√(x̄² + s_x²) the
    // cosine between the scaled columns, s_x = 0.303; hand computation) and the
    // standard error of a (true value 0.1) is far larger than a itself.
    let x: Vec<f64> = (0..21).map(|i| 10_000.0 + 0.05 * i as f64).collect();
    let mut rng = StdRng::seed_from_u64(31);
    let noise = Normal::new(0.0, 0.01).unwrap();
    let y: Vec<f64> = x
        .iter()
        .map(|x| 0.1 + 0.5 * x + noise.sample(&mut rng))
        .collect();
    let problem = FnProblem::new(21, move |p: &[f64], out: &mut [f64]| {
        for i in 0..21 {
            out[i] = y[i] - p[0] - p[1] * x[i];
        }
        Ok(())
    });
    let specs = vec![ParamSpec::new("a", "-", 0.0), ParamSpec::new("b", "-", 1.0)];
    let res = fit(problem, specs, &FitOptions::default()).unwrap();
    let r = res.covariance.correlation[0][1].unwrap();
    assert!(r < -0.999, "{r}");
    let kappa = res.covariance.condition_number;
    assert!(kappa > 2e9 && kappa < 8e9, "{kappa:e}");
    let kinds: Vec<&WarningKind> = res.warnings.iter().map(|w| &w.kind).collect();
    assert!(
        kinds
            .iter()
            .any(|k| matches!(k, WarningKind::HighCorrelation { .. })),
        "{kinds:?}"
    );
    assert!(
        kinds
            .iter()
            .any(|k| matches!(k, WarningKind::IllConditioned { .. })),
        "{kinds:?}"
    );
    assert!(
        kinds
            .iter()
            .any(|k| matches!(k, WarningKind::LargeStdError { parameter, .. } if parameter == "a")),
        "{kinds:?}"
    );
    // the slope is still well determined
    assert!((res.estimates[1] - 0.5).abs() < 5.0 * res.parameters[1].std_error.unwrap());
}

#[test]
fn transformed_interval_of_a_log_parameter_is_positive_and_multiplicative() {
    let (t, y) = uptake_data(20, 2.0, 5.0, 0.05, 14);
    let res = fit(uptake_problem(t, y), uptake_specs(), &FitOptions::default()).unwrap();
    let p = &res.parameters[1];
    let iv = p.transformed_interval.unwrap();
    // for u = ln τ: [τ̂ e^(−t SE_u), τ̂ e^(t SE_u)], so the geometric mean of the ends is τ̂
    assert!(iv.lower > 0.0);
    assert!(((iv.lower * iv.upper).sqrt() - p.estimate).abs() < 1e-12 * p.estimate);
    // first order, SE_u = SE/τ̂: the width in ln τ is 2 t SE/τ̂
    let w = (iv.upper / iv.lower).ln();
    let expect = 2.0 * res.t_critical * p.std_error.unwrap() / p.estimate;
    assert!((w - expect).abs() < 1e-9 * expect);
    // for the identity parameter both intervals agree
    let a = &res.parameters[0];
    let (i1, i2) = (a.interval.unwrap(), a.transformed_interval.unwrap());
    assert!((i1.lower - i2.lower).abs() < 1e-12 && (i1.upper - i2.upper).abs() < 1e-12);
}

/// For a model linear in its parameters, the profile of a parameter is exactly quadratic:
/// ΔRSS(v) = (v − â)²/[(XᵀX)⁻¹]ⱼⱼ, so the F statistic ΔRSS/s² = ((v − â)/SE)² and the F-profile
/// interval equals the Student-t interval because t²(n − p) = F(1, n − p) (N. R. Draper &
/// H. Smith, *Applied Regression Analysis*, 3rd ed., 1998, §5.2; Bates & Watts 1988, §6.1.2 —
/// from memory). Checks every point of the returned curve against that parabola.
#[test]
fn profile_curve_of_a_linear_model_is_the_parabola() {
    let x: Vec<f64> = (0..15).map(|i| i as f64 * 0.5).collect();
    let mut rng = StdRng::seed_from_u64(11);
    let noise = Normal::new(0.0, 0.2).unwrap();
    let y: Vec<f64> = x
        .iter()
        .map(|x| 1.5 + 0.8 * x + noise.sample(&mut rng))
        .collect();
    let problem = FnProblem::new(x.len(), move |p: &[f64], out: &mut [f64]| {
        for i in 0..x.len() {
            out[i] = y[i] - (p[0] + p[1] * x[i]);
        }
        Ok(())
    });
    let specs = vec![ParamSpec::new("a", "-", 0.0), ParamSpec::new("b", "-", 1.0)];
    let opts = FitOptions {
        profile: Some(ProfileOptions::default()),
        ..FitOptions::default()
    };
    let res = fit(problem, specs, &opts).unwrap();
    let t = t_quantile(0.975, 13.0).unwrap();
    for k in 0..2 {
        let p = &res.parameters[k];
        let pr = p.profile.as_ref().unwrap();
        let se = p.std_error.unwrap();
        assert_eq!(pr.statistic, fickfit::fit::ProfileStatistic::F);
        assert!(
            (pr.statistic_threshold - t * t).abs() < 1e-9 * t * t,
            "F(1, 13; 0.95) = t² = {}, found {}",
            t * t,
            pr.statistic_threshold
        );
        assert!(pr.points.len() >= 5, "{} points", pr.points.len());
        for pt in &pr.points {
            let expected = ((pt.value - p.estimate) / se).powi(2);
            assert!(
                (pt.statistic - expected).abs() < 1e-6 * (1.0 + expected),
                "{}: at {} statistic {} expected {expected}",
                p.name,
                pt.value,
                pt.statistic
            );
        }
        let iv = p.interval.unwrap();
        let (lo, hi) = (pr.lower.value().unwrap(), pr.upper.value().unwrap());
        assert!((lo - iv.lower).abs() < 1e-6 * se && (hi - iv.upper).abs() < 1e-6 * se);
    }
}
