//! One experiment, fitted: weighting, the fit itself, predictions at the estimate.
//!
//! Weighting. A dataset whose σ are absolute standard uncertainties keeps them. Every other
//! dataset (σ unknown, known up to a factor, or relative) gets a scale s_d estimated from its
//! own scatter, so that datasets in different units or with different noise do not swamp each
//! other: fit with s_d = 1, set s_d² = RSS_d / (n_d (1 − p/n)), refit from the optimum, and
//! repeat until the scales change by less than 1 % (at most four passes). With one dataset the
//! scale is simply the residual standard deviation and one pass suffices.

use super::problem::ExperimentProblem;
use super::shortcuts::{self, ShortcutEstimate};
use super::starts::{self, StartNote};
use crate::error::Result;
use crate::experiment::{Experiment, Weighting as DataWeighting};
use crate::fit::bootstrap::BootstrapOptions;
use crate::fit::engine::{fit, FitOptions, FitResult, Weighting};
use crate::fit::params::ParamSpec;
use crate::fit::profile::ProfileOptions;
use crate::solver::{Observable, Request, Solver};
use crate::stats::identifiability::{
    chi_square_too_large, ends_early, starts_late, systematic_residuals, FitWarning,
    ENDS_EARLY_FRACTION, STARTS_LATE_FRACTION,
};
use crate::stats::residual_tests::ResidualVerdict;
use std::sync::Arc;

/// Relative-offset convergence tolerance of experiment fits (Bates & Watts 1981 suggest
/// 0.001; a tenth of that is used): the search stops when what is left to gain moves the
/// estimates by less than about 1e-4 standard errors. See [`crate::fit::lm`].
pub const RELATIVE_OFFSET_TOLERANCE: f64 = 1e-3;

/// Relative offset below which a rejected trial ends an experiment fit's search (the
/// estimates are then within about a hundredth of a standard error of the linearised
/// optimum; see [`crate::fit::LmOptions::stall_offset_tol`]). On the heated-rod sample the
/// search otherwise spent 15 of its 35 residual evaluations on trials rejected by the
/// solver's rounding (measured 2026-12-05).
pub const STALL_OFFSET_TOLERANCE: f64 = 1e-2;

/// Choices of the user that are not in the experiment file.
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisOptions {
    /// Confidence level; `None` takes the experiment file's.
    pub level: Option<f64>,
    /// Compute profile-likelihood intervals.
    pub profile: bool,
    /// Residual-bootstrap replicates (0: none).
    pub bootstrap: usize,
    /// Seed of the bootstrap.
    pub seed: u64,
    /// With absolute σ, multiply the covariance by the reduced χ² (default: trust σ).
    pub rescale_absolute: bool,
    /// Random extra starts of the search (each internal coordinate within ±1 of its start),
    /// searched in parallel; the best point wins. Seeded by `seed`.
    pub random_starts: usize,
}

impl Default for AnalysisOptions {
    fn default() -> Self {
        AnalysisOptions {
            level: None,
            profile: false,
            bootstrap: 0,
            seed: 1,
            rescale_absolute: false,
            random_starts: 0,
        }
    }
}

/// The outcome of fitting one experiment.
#[derive(Debug, Clone)]
pub struct Analysis {
    /// The experiment.
    pub experiment: Arc<Experiment>,
    /// The fit: estimates, intervals, covariance, goodness, residual checks, warnings.
    pub fit: FitResult,
    /// The residual scale s_d of each dataset (1 for absolute σ).
    pub dataset_scales: Vec<f64>,
    /// Predictions at the estimate, per dataset, SI, data order.
    pub predictions: Vec<Vec<f64>>,
    /// Weighting passes made.
    pub passes: usize,
    /// The classic shortcut estimates that match the experiment's datasets.
    pub shortcuts: Vec<ShortcutEstimate>,
    /// How each start value the experiment file left out was chosen.
    pub start_notes: Vec<StartNote>,
    /// The quantities the experiment file asks to derive (`[derived]`).
    pub derived: Vec<super::derived::Derived>,
    /// The thickness-scaling check, when runs on samples of two or more sizes share D.
    pub thickness_scaling: Option<super::thickness::ThicknessCheck>,
}

/// The engine's parameter specs for an experiment, starting from `start` (SI).
pub fn parameter_specs(experiment: &Experiment, start: &[f64]) -> Vec<ParamSpec> {
    experiment
        .parameters
        .iter()
        .zip(start)
        .map(|(p, &s)| {
            let mut spec =
                ParamSpec::new(p.name.clone(), p.unit.clone(), s).bounds(p.lower, p.upper);
            if p.log {
                spec = spec.log();
            }
            if !p.free {
                spec = spec.fixed();
            }
            spec
        })
        .collect()
}

/// Fit an experiment. Start values the experiment file leaves out are chosen first
/// ([`starts::complete`]).
pub fn analyse(experiment: Arc<Experiment>, options: &AnalysisOptions) -> Result<Analysis> {
    let shortcut_list =
        shortcuts::estimate_all(&experiment, &starts::values_for_models(&experiment));
    let (experiment, start_notes) = if experiment.pending_starts().is_empty() {
        (experiment, Vec::new())
    } else {
        let mut e = (*experiment).clone();
        let notes = starts::complete(&mut e, Some(&shortcut_list))?;
        (Arc::new(e), notes)
    };
    let absolute: Vec<bool> = experiment
        .datasets
        .iter()
        .map(|d| d.weighting == DataWeighting::Absolute)
        .collect();
    let all_absolute = absolute.iter().all(|&a| a);
    let mut fit_options = FitOptions {
        level: options.level.unwrap_or(experiment.fit.interval_level),
        weighting: if all_absolute {
            Weighting::Absolute {
                rescale: options.rescale_absolute,
            }
        } else {
            Weighting::Relative
        },
        ..Default::default()
    };
    configure_search(&mut fit_options, &experiment);
    fit_options.random_starts = options.random_starts;
    fit_options.seed = options.seed;

    let mut problem = ExperimentProblem::new(experiment.clone())?;
    let n_sets = experiment.datasets.len();
    let needs_scales = !all_absolute && n_sets > 1;
    let mut start = experiment.start_values();
    let mut scales = vec![1.0; n_sets];
    let mut passes = 0;
    let mut result;
    loop {
        passes += 1;
        problem.set_scales(&scales)?;
        // Intervals are only wanted from the last pass.
        let last_pass_possible = !needs_scales || passes >= 4;
        let mut opts = fit_options.clone();
        if !last_pass_possible {
            opts.profile = None;
            opts.bootstrap = None;
        } else {
            set_interval_options(&mut opts, options);
        }
        result = fit(problem.clone(), parameter_specs(&experiment, &start), &opts)?;
        if !needs_scales || passes >= 4 {
            break;
        }
        // Censored readings under the model are not points (see FitResult::inactive).
        let active = |range: std::ops::Range<usize>| {
            range
                .filter(|&i| !result.inactive.get(i).copied().unwrap_or(false))
                .count()
        };
        let n = active(0..result.residuals.len()) as f64;
        let p = result.free_names.len() as f64;
        let mut changed = false;
        let mut new_scales = scales.clone();
        for (d, range) in problem_ranges(&problem).into_iter().enumerate() {
            if absolute[d] {
                continue;
            }
            let nd = active(range.clone()) as f64;
            let rss_d: f64 =
                result.residuals[range].iter().map(|r| r * r).sum::<f64>() * scales[d] * scales[d];
            let s = (rss_d / (nd * (1.0 - p / n))).sqrt();
            if s.is_finite() && s > 0.0 {
                if (s / scales[d] - 1.0).abs() > 0.01 {
                    changed = true;
                }
                new_scales[d] = s;
            }
        }
        start = result.estimates.clone();
        scales = new_scales;
        if !changed {
            // Scales settled: one more pass with intervals, from the optimum.
            problem.set_scales(&scales)?;
            let mut opts = fit_options.clone();
            set_interval_options(&mut opts, options);
            result = fit(problem.clone(), parameter_specs(&experiment, &start), &opts)?;
            passes += 1;
            break;
        }
    }
    problem.set_scales(&scales)?;
    let mut analysis = Analysis {
        experiment,
        fit: result,
        dataset_scales: scales,
        predictions: Vec::new(),
        passes,
        shortcuts: shortcut_list,
        start_notes,
        derived: Vec::new(),
        thickness_scaling: None,
    };
    // The derived quantities (serial solves), the thickness check (refits, themselves in
    // parallel) and the predictions with the data warnings (solves at the estimates) share the
    // cores; none of them reads what the others produce.
    let (derived, (thickness, (predictions, warnings))) = rayon::join(
        || super::derived::derive_all(&analysis),
        || {
            rayon::join(
                || super::thickness::check(&analysis),
                || {
                    (
                        problem.predictions(&analysis.fit.estimates),
                        data_warnings(&analysis.experiment, &analysis.fit),
                    )
                },
            )
        },
    );
    analysis.predictions = predictions?;
    analysis.fit.warnings.extend(warnings);
    analysis.derived = derived;
    analysis.thickness_scaling = thickness;
    Ok(analysis)
}

/// The search settings of every fit of an experiment (the main fit and the refits of its
/// checks): the experiment file's iteration limit (which also bounds the Nelder–Mead fallback,
/// 25 simplex iterations per LM iteration: 5000 at the default 200) and relative-reduction
/// tolerance, the relative-offset stop and a light initial damping (`λ₀ = 0.01 s_max²`; the
/// engine's default of 100 s_max² serves certified problems started far from their optimum,
/// while experiment fits start from shortcut estimates or the user's values; over the bundled
/// samples and a 60-point uptake curve, λ₀ = 1, 0.1, 0.01 and 0.001 s_max² took 528, 445, 392
/// and 443 residual evaluations in all, measured 2026-12-04).
pub(crate) fn configure_search(options: &mut FitOptions, experiment: &Experiment) {
    options.lm.max_iterations = experiment.fit.maximum_iterations;
    options.nelder_mead_iterations = 25 * experiment.fit.maximum_iterations as u64;
    options.lm.ftol = experiment.fit.tolerance;
    options.lm.offset_tol = RELATIVE_OFFSET_TOLERANCE;
    options.lm.stall_offset_tol = STALL_OFFSET_TOLERANCE;
    options.lm.initial_damping = 1e-2;
}

/// Warnings about the data as seen by the fit, beyond the identifiability checks of the
/// engine (see [`crate::stats::identifiability`]):
///
/// - an uptake-type run (every observable an amount, amount change, mean or fractional uptake)
///   whose fitted fractional uptake is below one half at its last time, or above 0.95 at its
///   first time (computed by a forward solve at the estimate; runs whose fractional uptake is
///   not defined, such as time-varying ends, are skipped);
/// - a run whose residuals are systematic at the 0.001 level: runs-test p < 0.001 or
///   `|r₁| √n > 3.29` (the two-sided 0.001 point of the normal; the report's verdict uses the
///   fit's 0.05 level, the warning only strong evidence);
/// - with absolute σ, a χ² upper-tail p-value below 0.001.
fn data_warnings(experiment: &Experiment, result: &FitResult) -> Vec<FitWarning> {
    let mut out = Vec::new();
    let uptake_like = |o: &Observable| {
        matches!(
            o,
            Observable::Amount
                | Observable::AmountChange
                | Observable::Mean
                | Observable::FractionalUptake
        )
    };
    for d in experiment.datasets.iter() {
        if d.request.observables.is_empty() || !d.request.observables.iter().all(uptake_like) {
            continue;
        }
        let (first, last) = d
            .request_for(&result.estimates)
            .times
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &t| {
                (a.min(t), b.max(t))
            });
        if !(first.is_finite() && last.is_finite()) {
            continue;
        }
        let times = if last > first {
            vec![first, last]
        } else {
            vec![last]
        };
        let fractions = d.model_for(&result.estimates).and_then(|model| {
            let mut solver = Solver::new(experiment.solver.clone())?;
            let request = Request {
                times,
                observables: vec![Observable::FractionalUptake],
            };
            Ok(solver.solve(&model, &request)?.series(0).to_vec())
        });
        let Ok(f) = fractions else { continue };
        let (Some(&f_first), Some(&f_last)) = (f.first(), f.last()) else {
            continue;
        };
        if !(f_first.is_finite() && f_last.is_finite()) {
            continue;
        }
        if f_last < ENDS_EARLY_FRACTION {
            out.push(ends_early(&d.name, f_last.max(0.0)));
        }
        if f_first > STARTS_LATE_FRACTION {
            out.push(starts_late(&d.name, f_first.min(1.0)));
        }
    }
    for c in &result.residual_checks {
        let by_runs = c.runs_p.is_finite() && c.runs_p < 1e-3;
        let by_lag = c.n >= 10
            && c.lag1_autocorrelation.is_finite()
            && c.lag1_autocorrelation.abs() * (c.n as f64).sqrt() > 3.29;
        if c.verdict == ResidualVerdict::Structured && (by_runs || by_lag) {
            out.push(systematic_residuals(
                &c.dataset,
                c.runs_p,
                c.lag1_autocorrelation,
            ));
        }
    }
    if let Some(chi) = &result.goodness.chi_square {
        if chi.p_value.is_finite() && chi.p_value < 1e-3 && chi.reduced > 1.0 {
            out.push(chi_square_too_large(chi.reduced, chi.p_value));
        }
    }
    out
}

fn set_interval_options(opts: &mut FitOptions, options: &AnalysisOptions) {
    if options.profile {
        opts.profile = Some(ProfileOptions::default());
    }
    if options.bootstrap > 0 {
        opts.bootstrap = Some(BootstrapOptions {
            replicates: options.bootstrap,
            seed: options.seed,
        });
    }
}

fn problem_ranges(problem: &ExperimentProblem) -> Vec<std::ops::Range<usize>> {
    use crate::fit::problem::ResidualProblem;
    problem.datasets().into_iter().map(|d| d.range).collect()
}
