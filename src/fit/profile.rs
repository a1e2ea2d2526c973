//! Profile-likelihood confidence intervals, one free parameter at a time.
//!
//! For parameter `j`, the profile `RSS_j(v) = min over the others of RSS(θ | u_j = v)` is
//! followed outwards from the optimum on a grid of steps `h = step · SE_u` in the internal
//! coordinate (each point re-optimised by Levenberg–Marquardt from the previous one) until it
//! crosses the threshold
//! - `RSS_min · (1 + F(1, n − p; level)/(n − p))` (σ unknown or rescaled; the F-based
//!   likelihood-ratio region), or
//! - `RSS_min + χ²(1; level)` (residuals divided by absolute σ, no rescaling).
//!
//! The crossing is then located by the Illinois variant of regula falsi on
//! `RSS_j(v) − threshold`. The interval is asymmetric in general; a side that does not cross
//! within `max_steps` steps (or where the model stops evaluating) is reported unbounded.
//! Parameters are profiled in parallel, one copy of the problem per parameter.
//!
//! Besides the ends, every point computed on the way is returned as the profile curve
//! ([`ProfilePoint`]): the parameter value, the profile RSS and the likelihood-ratio
//! statistic `Λ(v) = (RSS_j(v) − RSS_min)/s²` with `s² = RSS_min/(n − p)` (σ unknown or
//! rescaled; compared with `F(1, n − p; level)`) or `s² = 1` (absolute σ; compared with
//! `χ²(1; level)`), so that the curve crosses [`ProfileInterval::statistic_threshold`]
//! exactly where the RSS crosses [`ProfileInterval::threshold`].
//!
//! References: D. M. Bates & D. G. Watts, *Nonlinear Regression Analysis and Its
//! Applications* (1988), §6.1; D. J. Venzon & S. H. Moolgavkar, Appl. Stat. 37 (1988) 87–94;
//! M. Dowell & P. Jarratt, BIT 11 (1971) 168–174 (Illinois method).

use rayon::prelude::*;
use serde::Serialize;

use crate::error::Result;
use crate::fit::engine::{FitOptions, Weighting};
use crate::fit::lm::levenberg_marquardt;
use crate::fit::params::ParamSet;
use crate::fit::problem::{Evaluator, ResidualProblem};
use crate::stats::covariance::Covariance;
use crate::stats::intervals::{chi2_quantile, f1_quantile};

/// Settings of the profile search.
#[derive(Debug, Clone, Serialize)]
pub struct ProfileOptions {
    /// Grid step in units of the internal standard error.
    pub step: f64,
    /// Maximum grid steps on each side.
    pub max_steps: usize,
    /// Relative tolerance on the crossing, in units of the step.
    pub tolerance: f64,
    /// Step (internal units) used when a parameter has no standard error.
    pub fallback_step: f64,
}

impl Default for ProfileOptions {
    fn default() -> Self {
        ProfileOptions {
            step: 0.5,
            max_steps: 40,
            tolerance: 1e-6,
            fallback_step: 0.1,
        }
    }
}

/// One end of a profile interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum ProfileEnd {
    /// The profile crosses the threshold here (SI).
    Bounded(f64),
    /// No crossing within the search range or the bounds.
    Unbounded,
}

impl ProfileEnd {
    /// The value, when bounded.
    pub fn value(self) -> Option<f64> {
        match self {
            ProfileEnd::Bounded(v) => Some(v),
            ProfileEnd::Unbounded => None,
        }
    }
}

/// One computed point of a profile curve.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ProfilePoint {
    /// Parameter value (SI).
    pub value: f64,
    /// Profile residual sum of squares `RSS_j(value)` (weighted).
    pub rss: f64,
    /// Likelihood-ratio statistic `Λ = (RSS_j − RSS_min)/s²` (dimensionless).
    pub statistic: f64,
}

/// Which distribution the likelihood-ratio statistic is compared with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum ProfileStatistic {
    /// `Λ = ΔRSS/(RSS_min/(n − p))` against `F(1, n − p; level)` (σ estimated from the fit).
    F,
    /// `Λ = ΔRSS` (= Δχ²) against `χ²(1; level)` (absolute σ, not rescaled).
    ChiSquare,
}

/// Profile-likelihood interval of one parameter.
#[derive(Debug, Clone, Serialize)]
pub struct ProfileInterval {
    /// Parameter name.
    pub name: String,
    /// Lower end.
    pub lower: ProfileEnd,
    /// Upper end.
    pub upper: ProfileEnd,
    /// Threshold on the RSS.
    pub threshold: f64,
    /// Kind of the likelihood-ratio statistic of `points`.
    pub statistic: ProfileStatistic,
    /// Threshold on the statistic (`F(1, n − p; level)` or `χ²(1; level)`).
    pub statistic_threshold: f64,
    /// The computed points of the profile, the optimum included, sorted by value.
    pub points: Vec<ProfilePoint>,
    /// Plain sentence.
    pub message: String,
}

/// Profile `RSS_j(v)` for free parameter `k` at internal value `v`, re-optimising the others
/// from `warm` (internal coordinates of the others). Returns the RSS and the new warm start.
fn profile_point<P: ResidualProblem>(
    problem: &P,
    set: &ParamSet,
    k: usize,
    v: f64,
    warm: &[f64],
    opts: &FitOptions,
) -> Option<(f64, Vec<f64>)> {
    let map = set.maps()[k];
    let x = map.to_external(v);
    if !x.is_finite() {
        return None;
    }
    if set.n_free() == 1 {
        let mut ev = Evaluator::new(problem.clone(), set.clone());
        let rss = ev.sum_of_squares(&[v]);
        return rss.is_finite().then(|| (rss, Vec::new()));
    }
    let sub = set.with_fixed(k, x).ok()?;
    let mut ev = Evaluator::new(problem.clone(), sub);
    let out = levenberg_marquardt(&mut ev, warm, &opts.lm);
    out.rss.is_finite().then_some((out.rss, out.u))
}

/// Follow the profile from the optimum in steps of `h` (internal units) until it crosses
/// `threshold`; the crossing (internal units, `None`: none found) and every computed
/// `(internal value, RSS)`, the crossing included.
#[allow(clippy::too_many_arguments)]
fn profile_side<P: ResidualProblem>(
    problem: &P,
    set: &ParamSet,
    k: usize,
    u_hat: &[f64],
    h: f64,
    threshold: f64,
    opts: &FitOptions,
    po: &ProfileOptions,
) -> (Option<f64>, Vec<(f64, f64)>) {
    let mut points = Vec::new();
    let end = profile_search(problem, set, k, u_hat, h, threshold, opts, po, &mut points);
    if let Some(v) = end {
        // The crossing lies on the threshold by construction (to the search tolerance).
        points.push((v, threshold));
    }
    (end, points)
}

/// The search of [`profile_side`]; every computed `(internal value, RSS)` goes to `points`.
#[allow(clippy::too_many_arguments)]
fn profile_search<P: ResidualProblem>(
    problem: &P,
    set: &ParamSet,
    k: usize,
    u_hat: &[f64],
    h: f64,
    threshold: f64,
    opts: &FitOptions,
    po: &ProfileOptions,
    points: &mut Vec<(f64, f64)>,
) -> Option<f64> {
    let others = |u: &[f64]| -> Vec<f64> {
        u.iter()
            .enumerate()
            .filter(|(i, _)| *i != k)
            .map(|(_, v)| *v)
            .collect()
    };
    let v0 = u_hat[k];
    let rss0 = {
        let mut ev = Evaluator::new(problem.clone(), set.clone());
        ev.sum_of_squares(u_hat)
    };
    let mut prev = (v0, rss0, others(u_hat));
    for i in 1..=po.max_steps {
        let v = v0 + h * i as f64;
        let (rss, warm) = profile_point(problem, set, k, v, &prev.2, opts)?;
        points.push((v, rss));
        if rss >= threshold {
            // Illinois regula falsi between prev (below) and v (above)
            let (mut a, mut fa) = (prev.0, prev.1 - threshold);
            let (mut b, mut fb) = (v, rss - threshold);
            let mut warm_a = prev.2.clone();
            let mut side = 0;
            for _ in 0..60 {
                if (b - a).abs() <= po.tolerance * h.abs() {
                    break;
                }
                let c = b - fb * (b - a) / (fb - fa);
                let c = if c.is_finite() && (c - a) * (c - b) < 0.0 {
                    c
                } else {
                    0.5 * (a + b)
                };
                let (rc, wc) = profile_point(problem, set, k, c, &warm_a, opts)?;
                points.push((c, rc));
                let fc = rc - threshold;
                if fc == 0.0 {
                    return Some(c);
                }
                if fc < 0.0 {
                    a = c;
                    fa = fc;
                    warm_a = wc;
                    if side == -1 {
                        fb *= 0.5;
                    }
                    side = -1;
                } else {
                    b = c;
                    fb = fc;
                    if side == 1 {
                        fa *= 0.5;
                    }
                    side = 1;
                }
            }
            return Some(a - fa * (b - a) / (fb - fa));
        }
        prev = (v, rss.min(f64::MAX), warm);
    }
    None
}

/// Profile intervals for all free parameters (in parallel).
#[allow(clippy::too_many_arguments)]
pub fn profile_all<P: ResidualProblem>(
    problem: &P,
    set: &ParamSet,
    u_hat: &[f64],
    rss_min: f64,
    cov: &Covariance,
    dof: usize,
    opts: &FitOptions,
    po: &ProfileOptions,
) -> Result<Vec<ProfileInterval>> {
    let (statistic, statistic_threshold, s2) = match opts.weighting {
        Weighting::Absolute { rescale: false } => (
            ProfileStatistic::ChiSquare,
            chi2_quantile(opts.level, 1.0)?,
            1.0,
        ),
        _ => (
            ProfileStatistic::F,
            f1_quantile(opts.level, dof as f64)?,
            rss_min / dof as f64,
        ),
    };
    let threshold = rss_min + statistic_threshold * s2;
    let progress = crate::fit::progress::Counter::start(
        crate::fit::progress::Stage::Profile,
        2 * set.n_free(),
    );
    let names = set.free_names();
    let copies: Vec<(usize, P)> = (0..set.n_free()).map(|k| (k, problem.clone())).collect();
    let out = copies
        .into_par_iter()
        .map(|(k, prob)| {
            let h = match cov.std_errors_internal.get(k).copied().flatten() {
                Some(se) if se > 0.0 && se.is_finite() => po.step * se,
                _ => po.fallback_step * u_hat[k].abs().max(1.0),
            };
            let map = set.maps()[k];
            let (up, mut raw) = profile_side(&prob, set, k, u_hat, h, threshold, opts, po);
            progress.advance();
            let up = up.map(|v| map.to_external(v));
            let (down, raw_down) = profile_side(&prob, set, k, u_hat, -h, threshold, opts, po);
            progress.advance();
            let down = down.map(|v| map.to_external(v));
            raw.extend(raw_down);
            raw.push((u_hat[k], rss_min));
            let mut points: Vec<ProfilePoint> = raw
                .into_iter()
                .map(|(v, rss)| ProfilePoint {
                    value: map.to_external(v),
                    rss,
                    statistic: (rss - rss_min) / s2,
                })
                .filter(|p| p.value.is_finite() && p.rss.is_finite())
                .collect();
            points.sort_by(|a, b| a.value.total_cmp(&b.value));
            // the map may be decreasing (upper bound only): order the ends by value
            let (lo, hi) = match (down, up) {
                (Some(a), Some(b)) if a > b => (Some(b), Some(a)),
                (a, b) if map.dx_du(u_hat[k]) < 0.0 => (b, a),
                (a, b) => (a, b),
            };
            let end = |v: Option<f64>| v.map_or(ProfileEnd::Unbounded, ProfileEnd::Bounded);
            let (lower, upper) = (end(lo), end(hi));
            let name = names.get(k).cloned().unwrap_or_default();
            let message = match (lower, upper) {
                (ProfileEnd::Bounded(a), ProfileEnd::Bounded(b)) => {
                    format!("{name}: profile interval [{a:e}, {b:e}]")
                }
                (ProfileEnd::Bounded(a), ProfileEnd::Unbounded) => format!(
                    "{name}: profile interval from {a:e} upwards, unbounded (the data do not set an upper limit within the search range)"
                ),
                (ProfileEnd::Unbounded, ProfileEnd::Bounded(b)) => format!(
                    "{name}: profile interval up to {b:e}, unbounded below (the data do not set a lower limit within the search range)"
                ),
                _ => format!("{name}: profile interval unbounded on both sides: the data do not determine {name}"),
            };
            ProfileInterval {
                name,
                lower,
                upper,
                threshold,
                statistic,
                statistic_threshold,
                points,
                message,
            }
        })
        .collect();
    progress.finish();
    Ok(out)
}
