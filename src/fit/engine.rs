//! The fit driver: search (Levenberg–Marquardt, with a Nelder–Mead pre-search when asked or
//! when LM fails, optionally from several starts), then covariance, intervals, goodness of
//! fit, residual checks, warnings and, on request, profile-likelihood and bootstrap intervals,
//! all gathered in one serialisable [`FitResult`].
//!
//! Search: from each start LM runs with forward differences; if it does not converge,
//! Nelder–Mead runs from the same start and LM again from its best point. The lowest sum of
//! squares over all starts wins, and is polished by LM with central differences and then by
//! at most five tiny undamped Gauss–Newton steps (see `refine` below: in ill-conditioned
//! directions the sum of squares is flat to rounding, so only the step itself can still move
//! the estimate to the stationary point; this took MGH17 from 8e-7 to 1.5e-9 relative error
//! against the certified values). Random
//! extra starts draw each internal coordinate uniformly in `u₀ ± spread` (seeded).
//!
//! Statistics: the Jacobian at the optimum by central differences; `s² = RSS/(n − p)`;
//! covariance, Student-t intervals `x̂ ± t(1 − α/2; n − p) SE` in SI (symmetric, from the
//! chain-rule SE), the same interval formed in the internal coordinate and mapped back
//! (asymmetric, positive for a log parameter), and on request profile-likelihood intervals,
//! the ones to prefer when the model is strongly nonlinear in a parameter.
//!
//! References: see [`crate::fit::lm`], [`crate::stats::covariance`], [`crate::fit::profile`],
//! [`crate::fit::bootstrap`].

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use rayon::prelude::*;
use serde::Serialize;

use crate::error::{Error, InputKind, Location, Result};
use crate::fit::bootstrap::{bootstrap, BootstrapOptions, BootstrapSummary};
use crate::fit::jacobian::{jacobian, Difference};
use crate::fit::lm::{levenberg_marquardt, LmOptions, LmOutcome, StopReason};
use crate::fit::nelder_mead::nelder_mead;
use crate::fit::params::{ParamSet, ParamSpec};
use crate::fit::problem::{Evaluator, ResidualProblem};
use crate::fit::profile::{profile_all, ProfileInterval, ProfileOptions};
use crate::fit::rfactor::r_factor;
use crate::stats::covariance::{covariance_without, Covariance};
use crate::stats::derived::{delta_method, DerivedValue, ExtraInput};
use crate::stats::goodness::{goodness, Goodness};
use crate::stats::identifiability::{identifiability_warnings, FitWarning, WarningKind};
use crate::stats::intervals::{t_critical, Interval};
use crate::stats::residual_tests::{residual_checks, ResidualChecks};

/// What the residuals were divided by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Weighting {
    /// Unit weights or relative scales: σ is unknown and estimated as `s² = RSS/(n − p)`.
    Relative,
    /// Absolute standard uncertainties σ_i: χ² statistics are reported. With
    /// `rescale = true` the covariance is still multiplied by `s²` (reduced χ²); with
    /// `false` it is `(JᵀJ)⁻¹`, trusting σ.
    Absolute {
        /// Multiply the covariance by the reduced χ².
        rescale: bool,
    },
}

/// Settings of a fit.
#[derive(Debug, Clone, Serialize)]
pub struct FitOptions {
    /// Levenberg–Marquardt settings.
    pub lm: LmOptions,
    /// Weighting of the residuals.
    pub weighting: Weighting,
    /// Confidence level of all intervals (default 0.95).
    pub level: f64,
    /// Run Nelder–Mead before LM from every start.
    pub nelder_mead_first: bool,
    /// Iteration limit of Nelder–Mead.
    pub nelder_mead_iterations: u64,
    /// Further start points (full SI vectors, free and fixed; fixed entries are ignored).
    pub extra_starts: Vec<Vec<f64>>,
    /// Number of random starts around the given start.
    pub random_starts: usize,
    /// Half-width of the random starts in internal coordinates (for a log parameter, 1.0 is a
    /// factor e).
    pub random_spread: f64,
    /// Seed for the random starts.
    pub seed: u64,
    /// Relative singular-value threshold of the rank test.
    pub rank_tol: f64,
    /// Significance level of the residual checks.
    pub residual_alpha: f64,
    /// Profile-likelihood intervals, when wanted.
    pub profile: Option<ProfileOptions>,
    /// Residual bootstrap, when wanted.
    pub bootstrap: Option<BootstrapOptions>,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            lm: LmOptions::default(),
            weighting: Weighting::Relative,
            level: 0.95,
            nelder_mead_first: false,
            nelder_mead_iterations: 5000,
            extra_starts: Vec::new(),
            random_starts: 0,
            random_spread: 1.0,
            seed: 1,
            rank_tol: 1e-8,
            residual_alpha: 0.05,
            profile: None,
            bootstrap: None,
        }
    }
}

/// One parameter in the result.
#[derive(Debug, Clone, Serialize)]
pub struct ParameterResult {
    /// Name.
    pub name: String,
    /// Unit label.
    pub unit: String,
    /// Whether it was fitted.
    pub free: bool,
    /// Estimate (SI); the fixed value for a fixed parameter.
    pub estimate: f64,
    /// Standard error (SI); `None` for fixed or non-identifiable parameters.
    pub std_error: Option<f64>,
    /// Student-t interval at the fit's level (SI), symmetric: `x̂ ± t SE`.
    pub interval: Option<Interval>,
    /// The Student-t interval formed in the internal coordinate, `u ± t SE_u`, mapped back
    /// to SI: asymmetric, and inside the domain of the transform (for a log parameter
    /// `[x̂ e^(−t SE_u), x̂ e^(t SE_u)]`, always positive). Equal to `interval` for an
    /// unbounded identity parameter.
    pub transformed_interval: Option<Interval>,
    /// Profile-likelihood interval, when computed.
    pub profile: Option<ProfileInterval>,
    /// Bootstrap percentile interval, when computed.
    pub bootstrap: Option<Interval>,
}

/// Everything a fit found, as plain data.
#[derive(Debug, Clone, Serialize)]
pub struct FitResult {
    /// All parameters, in the model's order.
    pub parameters: Vec<ParameterResult>,
    /// Full estimate vector (SI).
    pub estimates: Vec<f64>,
    /// Names of the free parameters (order of the covariance).
    pub free_names: Vec<String>,
    /// Free-parameter estimates (SI).
    pub free_estimates: Vec<f64>,
    /// Covariance, standard errors, correlation, rank.
    pub covariance: Covariance,
    /// Goodness of fit.
    pub goodness: Goodness,
    /// Weighting used.
    pub weighting: Weighting,
    /// Confidence level.
    pub level: f64,
    /// Degrees of freedom `n − p`.
    pub dof: usize,
    /// Two-sided Student-t critical value used.
    pub t_critical: f64,
    /// Why the final search stopped.
    pub stop: StopReason,
    /// The stop reason as a sentence.
    pub stop_message: String,
    /// LM iterations of the final search.
    pub iterations: usize,
    /// Residual evaluations in total (searches and Jacobians, not profile/bootstrap).
    pub evaluations: usize,
    /// Evaluations that failed or were non-finite.
    pub failed_evaluations: usize,
    /// Whether Nelder–Mead was used for the winning start.
    pub used_nelder_mead: bool,
    /// Number of starts tried.
    pub starts_tried: usize,
    /// Weighted residuals at the optimum.
    pub residuals: Vec<f64>,
    /// Residuals that are not observations at the optimum (readings censored at a detection
    /// limit that the model stays under); they are left out of the point count and `dof`.
    pub inactive: Vec<bool>,
    /// Residual checks per dataset.
    pub residual_checks: Vec<ResidualChecks>,
    /// Warnings.
    pub warnings: Vec<FitWarning>,
    /// Bootstrap summary, when run.
    pub bootstrap: Option<BootstrapSummary>,
}

impl FitResult {
    /// Value and standard uncertainty of `g(θ, z)` by the delta method, where θ is the full
    /// SI parameter vector (fixed parameters have zero variance) and `z` the extra inputs.
    pub fn derived<G>(&self, g: G, extras: &[ExtraInput]) -> Result<DerivedValue>
    where
        G: Fn(&[f64], &[f64]) -> f64,
    {
        let n = self.parameters.len();
        let mut cov = vec![vec![Some(0.0); n]; n];
        let free: Vec<usize> = (0..n).filter(|&i| self.parameters[i].free).collect();
        for (a, &ia) in free.iter().enumerate() {
            for (b, &ib) in free.iter().enumerate() {
                cov[ia][ib] = self.covariance.external[a][b];
            }
        }
        delta_method(g, &self.estimates, &cov, extras)
    }
}

/// Result of one search (all starts).
pub(crate) struct SearchOutcome {
    pub lm: LmOutcome,
    pub used_nm: bool,
    pub starts: usize,
}

/// LM from `u0`, with Nelder–Mead first when asked or when LM does not converge.
pub(crate) fn search_from<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u0: &[f64],
    opts: &FitOptions,
) -> (LmOutcome, bool) {
    let nm_then_lm = |ev: &mut Evaluator<P>| -> Option<LmOutcome> {
        // stop when the simplex values agree to 1e-12 of the start's sum of squares
        let f0 = ev.sum_of_squares(u0);
        let tol = if f0.is_finite() && f0 > 0.0 {
            1e-12 * f0
        } else {
            1e-14
        };
        let nm = nelder_mead(ev, u0, opts.nelder_mead_iterations, tol).ok()?;
        nm.rss
            .is_finite()
            .then(|| levenberg_marquardt(ev, &nm.u, &opts.lm))
    };
    if opts.nelder_mead_first {
        if let Some(out) = nm_then_lm(ev) {
            return (out, true);
        }
        return (levenberg_marquardt(ev, u0, &opts.lm), false);
    }
    let first = levenberg_marquardt(ev, u0, &opts.lm);
    if first.stop.converged() {
        return (first, false);
    }
    match nm_then_lm(ev) {
        Some(second) if second.rss < first.rss || !first.rss.is_finite() => (second, true),
        _ => (first, false),
    }
}

fn better(a: &LmOutcome, b: &LmOutcome) -> bool {
    // prefer converged; then lower RSS
    match (a.stop.converged(), b.stop.converged()) {
        (true, false) => true,
        (false, true) => false,
        _ => a.rss < b.rss,
    }
}

/// Search from all starts (given start, extra starts, random starts) and polish.
/// Largest effect, in units of the noise, that a change of a log-scale parameter by a factor e
/// may have on the residuals (their Euclidean norm) for the parameter to count as
/// insensitive: `‖∂r/∂ln x‖ < 0.1 √s²` means moving it by a whole factor e changes χ² by less
/// than 0.01, so that a 95 % interval (Δχ² = 3.84) would span more than e^19.6, a factor of
/// 3·10⁸, even before the other parameters take up part of the change. Data that determine a
/// parameter to within a factor of ten give `‖∂r/∂ln x‖ ≳ 0.85`.
const INSENSITIVE_EFFECT: f64 = 0.1;

/// Free parameters on a log scale whose Jacobian column is below [`INSENSITIVE_EFFECT`]:
/// `‖J_j‖ · |x_j / (dx_j/du_j)| < 0.1 √scale` (the column per unit of ln x; `scale` the
/// residual variance, 1 for absolute σ). Linear-scale parameters are never flagged: they
/// have no natural unit of change, and an offset near zero is not insensitive.
fn insensitive_parameters(
    jac: &nalgebra::DMatrix<f64>,
    scale: f64,
    dx_du: &[f64],
    set: &ParamSet,
    full: &[f64],
) -> Vec<bool> {
    let noise = scale.max(0.0).sqrt();
    set.free_indices()
        .iter()
        .enumerate()
        .map(|(j, &i)| {
            let spec = &set.specs()[i];
            let x = full.get(i).copied().unwrap_or(f64::NAN);
            let slope = dx_du.get(j).copied().unwrap_or(f64::NAN);
            if spec.transform != crate::fit::params::Transform::Log
                || x.is_nan()
                || x <= 0.0
                || !slope.is_finite()
                || slope == 0.0
                || j >= jac.ncols()
            {
                return false;
            }
            let effect = jac.column(j).norm() * (x / slope).abs();
            effect.is_finite() && effect < INSENSITIVE_EFFECT * noise
        })
        .collect()
}

pub(crate) fn search<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    opts: &FitOptions,
) -> Result<SearchOutcome> {
    let set = ev.params().clone();
    let u0 = set.to_internal(&set.start_full());
    let mut starts = vec![u0.clone()];
    for s in &opts.extra_starts {
        if s.len() != set.n_total() {
            return Err(Error::setting(
                "extra_starts",
                format!("a start needs {} values, found {}", set.n_total(), s.len()),
            ));
        }
        let u = set.to_internal(s);
        if u.iter().any(|v| !v.is_finite()) {
            return Err(Error::setting(
                "extra_starts",
                "a start lies outside the bounds or the domain of a transform",
            ));
        }
        starts.push(u);
    }
    let mut rng = StdRng::seed_from_u64(opts.seed);
    let spread = opts.random_spread.abs();
    for _ in 0..opts.random_starts {
        let u: Vec<f64> = u0
            .iter()
            .map(|v| {
                if spread > 0.0 {
                    v + rng.random_range(-spread..spread)
                } else {
                    *v
                }
            })
            .collect();
        starts.push(u);
    }
    // Several starts are searched in parallel, each on its own copy of the problem; the best
    // is chosen in the order of the starts, so the result does not depend on the threads.
    let candidates: Vec<(LmOutcome, bool)> = if starts.len() == 1 {
        vec![search_from(ev, &starts[0], opts)]
    } else {
        let copies: Vec<(Evaluator<P>, Vec<f64>)> =
            starts.iter().map(|u| (ev.clone(), u.clone())).collect();
        let runs: Vec<((LmOutcome, bool), usize, usize)> = copies
            .into_par_iter()
            .map(|(mut own, u)| {
                let (e0, f0) = (own.evaluations(), own.failures());
                let found = search_from(&mut own, &u, opts);
                (found, own.evaluations() - e0, own.failures() - f0)
            })
            .collect();
        let mut out = Vec::with_capacity(runs.len());
        for (found, evaluations, failures) in runs {
            ev.add_counts(evaluations, failures);
            out.push(found);
        }
        out
    };
    let mut best: Option<(LmOutcome, bool)> = None;
    for cand in candidates {
        best = match best {
            Some(b) if !better(&cand.0, &b.0) => Some(b),
            _ => Some(cand),
        };
    }
    let Some((lm, used_nm)) = best else {
        return Err(Error::Internal("no start point".into()));
    };
    if !lm.rss.is_finite() {
        return Err(Error::Fit(format!(
            "the model could not be evaluated at any start point ({})",
            lm.stop.sentence()
        )));
    }
    // Polish with central differences; near the optimum Gauss–Newton steps are good, so
    // the damping starts small. The problem first forgets its replay state, so that the model
    // near the optimum is the one computed afresh there.
    ev.refresh();
    let polish_opts = LmOptions {
        difference: Difference::Central,
        initial_damping: 1e-3,
        ..opts.lm.clone()
    };
    // The search's sum of squares comes from replayed steps, the polish's from a fresh solve
    // at the same point; they differ by the solver's step-to-step noise, so they are not
    // compared. A converged polish is the result: its model is the one reported, and its
    // Jacobian at the end point is the one the covariance reuses.
    let polished = levenberg_marquardt(ev, &lm.u, &polish_opts);
    let lm = if polished.stop.converged() {
        LmOutcome {
            iterations: lm.iterations + polished.iterations,
            evaluations: lm.evaluations + polished.evaluations,
            failed_trials: lm.failed_trials + polished.failed_trials,
            ..polished
        }
    } else {
        lm
    };
    // The Gauss–Newton refinement serves exact-arithmetic problems (certified datasets); after
    // a stop on the relative offset it could only move the estimate by a small fraction of a
    // standard error.
    let lm = if lm.stop.converged() && lm.stop != StopReason::RelativeOffset {
        refine(ev, lm)
    } else {
        lm
    };
    Ok(SearchOutcome {
        lm,
        used_nm,
        starts: starts.len(),
    })
}

/// Final refinement: at most 5 undamped Gauss–Newton steps `δ = −J⁺ r` (central-difference
/// Jacobian, SVD), each taken only when it is tiny (`‖D δ‖ ≤ 1e-6 ‖D u‖`) and does not raise
/// the sum of squares beyond rounding (`F(u + δ) ≤ F(u)(1 + 1e-13)`). Near the optimum the
/// sum of squares is flat to rounding in ill-conditioned directions, so the damped search
/// cannot tell better from worse there; the Gauss–Newton step still points at the
/// stationary point of the linearised problem.
fn refine<P: ResidualProblem>(ev: &mut Evaluator<P>, mut lm: LmOutcome) -> LmOutcome {
    let start = ev.evaluations();
    for _ in 0..5 {
        let Some(jac) = jacobian(ev, &lm.u, &lm.residuals, Difference::Central) else {
            break;
        };
        let p = lm.u.len();
        // Least squares J D⁻¹ ds = −r, solved as R D⁻¹ ds = −Qᵀr (see `rfactor`).
        let (mut js, qtr) = r_factor(&jac, Some(&lm.residuals));
        drop(jac);
        let mut d = vec![1.0; p];
        for (j, dj) in d.iter_mut().enumerate() {
            let n = js.column(j).norm();
            if n > 0.0 && n.is_finite() {
                *dj = n;
            }
            js.column_mut(j).scale_mut(1.0 / *dj);
        }
        let svd = js.svd(true, true);
        let Ok(ds) = svd.solve(&(-qtr), 1e-12 * svd.singular_values.max()) else {
            break;
        };
        let step: Vec<f64> = (0..p).map(|j| ds[j] / d[j]).collect();
        let dn = ds.norm();
        let un: f64 =
            lm.u.iter()
                .zip(&d)
                .map(|(a, b)| (a * b).powi(2))
                .sum::<f64>()
                .sqrt();
        if dn.is_nan() || dn > 1e-6 * un || dn == 0.0 {
            break;
        }
        let trial: Vec<f64> = lm.u.iter().zip(&step).map(|(a, b)| a + b).collect();
        let Some(rt) = ev.residuals(&trial) else {
            break;
        };
        let ft: f64 = rt.iter().map(|v| v * v).sum();
        if ft > lm.rss * (1.0 + 1e-13) {
            break;
        }
        lm.u = trial;
        lm.residuals = rt;
        lm.rss = ft;
        lm.iterations += 1;
        if dn <= 1e-15 * un {
            break;
        }
    }
    lm.evaluations += ev.evaluations() - start;
    lm
}

/// Fit `problem` with the parameters `specs`.
///
/// Errors: invalid specs; fewer residuals than free parameters + 1; the model cannot be
/// evaluated at any start; invalid settings (confidence level outside (0, 1)).
pub fn fit<P: ResidualProblem>(
    problem: P,
    specs: Vec<ParamSpec>,
    opts: &FitOptions,
) -> Result<FitResult> {
    let set = ParamSet::new(specs)?;
    let n = problem.n_residuals();
    let p = set.n_free();
    if n <= p {
        return Err(Error::input(
            InputKind::TooFewPoints,
            Location::default(),
            format!("{n} data points for {p} free parameters: the fit needs more points than free parameters"),
        ));
    }
    t_critical(opts.level, (n - p) as f64)?;
    let mut ev = Evaluator::new(problem.clone(), set.clone());
    let found = search(&mut ev, opts)?;
    let lm = found.lm;
    let u = lm.u.clone();
    let r = lm.residuals;
    // Censored readings under the model are not observations: n counts the others.
    let inactive = ev
        .inactive(&u)
        .ok()
        .filter(|m| m.len() == n)
        .unwrap_or_else(|| vec![false; n]);
    let n_active = inactive.iter().filter(|x| !**x).count();
    if n_active <= p {
        return Err(Error::input(
            InputKind::TooFewPoints,
            Location::default(),
            format!(
                "{n_active} data points (besides {} censored readings under the model) for {p} \
                 free parameters: the fit needs more points than free parameters",
                n - n_active
            ),
        ));
    }
    let dof = n_active - p;
    let tcrit = t_critical(opts.level, dof as f64)?;
    // The entries of `v` in `range` that are observations (borrowed when all are).
    fn observed_part<'a>(
        inactive: Option<&[bool]>,
        range: std::ops::Range<usize>,
        v: &'a [f64],
    ) -> std::borrow::Cow<'a, [f64]> {
        match (inactive, v.get(range.clone())) {
            (None, Some(all)) => std::borrow::Cow::Borrowed(all),
            _ => std::borrow::Cow::Owned(
                range
                    .filter(|&i| !inactive.is_some_and(|m| m[i]))
                    .filter_map(|i| v.get(i).copied())
                    .collect(),
            ),
        }
    }
    let censored = inactive.iter().any(|x| *x).then_some(inactive.as_slice());
    let active = |range, v| observed_part(censored, range, v);
    let jac = jacobian(&mut ev, &u, &r, Difference::Central)
        .ok_or_else(|| Error::Fit("the Jacobian at the optimum could not be formed".into()))?;
    let rss = lm.rss;
    let s2 = rss / dof as f64;
    let (scale, absolute) = match opts.weighting {
        Weighting::Relative => (s2, false),
        Weighting::Absolute { rescale: true } => (s2, true),
        Weighting::Absolute { rescale: false } => (1.0, true),
    };
    let dx = set.dx_du(&u);
    let full = ev.external(&u);
    let insensitive = insensitive_parameters(&jac, scale, &dx, &set, &full);
    let cov = covariance_without(&jac, scale, &dx, opts.rank_tol, &insensitive);
    // The Jacobian (n × p) is not needed any more.
    drop(jac);
    ev.forget_jacobian();
    let free_estimates: Vec<f64> = set.free_indices().iter().map(|&i| full[i]).collect();
    let obs = problem.observations();
    let obs = obs
        .as_ref()
        .map(|(y, s)| (active(0..n, y), active(0..n, s)));
    let good = goodness(
        &active(0..n, &r),
        p,
        obs.as_ref().map(|(y, s)| (y.as_ref(), s.as_ref())),
        absolute,
    )?;
    drop(obs);
    let mut checks = Vec::new();
    for d in problem.datasets() {
        if d.range.end <= r.len() {
            checks.push(residual_checks(
                &d.name,
                &active(d.range.clone(), &r),
                opts.residual_alpha,
            ));
        }
    }
    let free_specs = set.free_specs();
    let mut warnings = identifiability_warnings(&free_specs, &free_estimates, &cov);
    if !lm.stop.converged() {
        warnings.push(FitWarning {
            kind: WarningKind::NotConverged {
                reason: lm.stop.sentence().to_string(),
            },
            message: format!(
                "the search did not converge ({}); the values reported are the best point \
                 found, not an optimum, and their intervals are not meaningful: {}",
                lm.stop.sentence(),
                free_specs
                    .iter()
                    .zip(&free_estimates)
                    .map(|(s, x)| format!("{} = {x:.6e}", s.name))
                    .collect::<Vec<_>>()
                    .join(", ")
                    + " (SI units)"
            ),
        });
    }
    let profiles = match &opts.profile {
        Some(po) => Some(profile_all(&problem, &set, &u, rss, &cov, dof, opts, po)?),
        None => None,
    };
    let boot = match &opts.bootstrap {
        Some(bo) => Some(bootstrap(&problem, &set, &u, &r, opts, bo)?),
        None => None,
    };
    let mut parameters = Vec::new();
    let mut k = 0;
    for (i, s) in set.specs().iter().enumerate() {
        if s.free {
            let se = cov.std_errors[k];
            parameters.push(ParameterResult {
                name: s.name.clone(),
                unit: s.unit.clone(),
                free: true,
                estimate: full[i],
                std_error: se,
                interval: se.map(|se| Interval {
                    lower: full[i] - tcrit * se,
                    upper: full[i] + tcrit * se,
                }),
                transformed_interval: cov.std_errors_internal[k].and_then(|se_u| {
                    let m = set.maps()[k];
                    let a = m.to_external(u[k] - tcrit * se_u);
                    let b = m.to_external(u[k] + tcrit * se_u);
                    (a.is_finite() && b.is_finite()).then(|| Interval {
                        lower: a.min(b),
                        upper: a.max(b),
                    })
                }),
                profile: profiles.as_ref().and_then(|v| v.get(k).cloned()),
                bootstrap: boot
                    .as_ref()
                    .and_then(|b| b.intervals.get(k).copied().flatten()),
            });
            k += 1;
        } else {
            parameters.push(ParameterResult {
                name: s.name.clone(),
                unit: s.unit.clone(),
                free: false,
                estimate: full[i],
                std_error: None,
                interval: None,
                transformed_interval: None,
                profile: None,
                bootstrap: None,
            });
        }
    }
    Ok(FitResult {
        parameters,
        estimates: full,
        free_names: set.free_names(),
        free_estimates,
        covariance: cov,
        goodness: good,
        weighting: opts.weighting,
        level: opts.level,
        dof,
        t_critical: tcrit,
        stop: lm.stop,
        stop_message: lm.stop.sentence().to_string(),
        iterations: lm.iterations,
        evaluations: ev.evaluations(),
        failed_evaluations: ev.failures(),
        used_nelder_mead: found.used_nm,
        starts_tried: found.starts,
        residuals: r,
        inactive,
        residual_checks: checks,
        warnings,
        bootstrap: boot,
    })
}
