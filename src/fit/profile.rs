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
    let threshold = match opts.weighting {
        Weighting::Absolute { rescale: false } => rss_min + chi2_quantile(opts.level, 1.0)?,
        _ => rss_min * (1.0 + f1_quantile(opts.level, dof as f64)? / dof as f64),
    };
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
            let up = profile_side(&prob, set, k, u_hat, h, threshold, opts, po)
                .map(|v| map.to_external(v));
            let down = profile_side(&prob, set, k, u_hat, -h, threshold, opts, po)
                .map(|v| map.to_external(v));
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
                message,
            }
        })
        .collect();
    Ok(out)
}
