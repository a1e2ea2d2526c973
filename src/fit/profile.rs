//! Profile-likelihood confidence intervals, one free parameter at a time.
//!
//! For parameter `j`, the profile `RSS_j(v) = min over the others of RSS(θ | u_j = v)` (each
//! point re-optimised by Levenberg–Marquardt) is compared with the threshold
//! - `RSS_min · (1 + F(1, n − p; level)/(n − p))` (σ unknown or rescaled; the F-based
//!   likelihood-ratio region), or
//! - `RSS_min + χ²(1; level)` (residuals divided by absolute σ, no rescaling).
//!
//! The search works on the signed root `ρ(v) = √((RSS_j(v) − RSS_min)/s²)`, which is exactly
//! linear in `v` for a model linear in its parameters and nearly so for most others, so its
//! crossing of `z* = √(threshold statistic)` is found in few re-optimisations: the first
//! point is the Jacobian's prediction `v̂ ± z*·SE_u`; while `ρ` stays below `z*` the next point
//! is extrapolated along the line through the optimum (at most four times as far, never more
//! than `max_steps · step` standard errors out); once the crossing is bracketed, the Illinois
//! variant of regula falsi on `ρ(v) − z*` locates it to `tolerance` standard errors. The other
//! parameters start each re-optimisation from the nearest computed point, moved along the
//! regression of the others on `u_j` that the covariance matrix gives. A side that does not
//! cross within the range (or where the model stops evaluating) is reported unbounded.
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
//! Applications* (1988), §6.1 (the profile t, i.e. the signed root); D. J. Venzon &
//! S. H. Moolgavkar, Appl. Stat. 37 (1988) 87–94;
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
    /// Unit of the search range, in internal standard errors.
    pub step: f64,
    /// The search reaches at most `max_steps · step` standard errors from the optimum.
    pub max_steps: usize,
    /// Tolerance on the crossing, in internal standard errors (and on the signed root).
    pub tolerance: f64,
    /// First step (internal units) when a parameter has no standard error.
    pub fallback_step: f64,
}

impl Default for ProfileOptions {
    fn default() -> Self {
        ProfileOptions {
            step: 0.5,
            max_steps: 40,
            tolerance: 1e-4,
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
    // The warm start is close to the constrained optimum, where Gauss–Newton steps are good:
    // start with little damping, as the polishing search does.
    let lm = crate::fit::lm::LmOptions {
        initial_damping: opts.lm.initial_damping.min(1e-3),
        ..opts.lm.clone()
    };
    let out = levenberg_marquardt(&mut ev, warm, &lm);
    out.rss.is_finite().then_some((out.rss, out.u))
}

/// What one side of a profile needs to know about the optimum.
struct SideSetup<'a> {
    k: usize,
    u_hat: &'a [f64],
    rss_min: f64,
    s2: f64,
    /// `z* = √(threshold statistic)`.
    z_star: f64,
    /// Internal standard error of parameter k, when known.
    se: Option<f64>,
    /// Regression of the other internal coordinates on u_k (from the covariance), when known.
    slope: Option<Vec<f64>>,
}

/// Follow the profile from the optimum in direction `dir` (±1) until it crosses the
/// threshold; the crossing (internal units, `None`: none found) and every computed
/// `(internal value, RSS)`, the crossing included (with the threshold RSS).
fn profile_side<P: ResidualProblem>(
    problem: &P,
    set: &ParamSet,
    setup: &SideSetup<'_>,
    dir: f64,
    threshold: f64,
    opts: &FitOptions,
    po: &ProfileOptions,
) -> (Option<f64>, Vec<(f64, f64)>) {
    let mut points = Vec::new();
    let end = profile_search(problem, set, setup, dir, opts, po, &mut points);
    if let Some(v) = end {
        // The crossing lies on the threshold by construction (to the search tolerance).
        points.push((v, threshold));
    }
    (end, points)
}

/// The search of [`profile_side`] (see the module docs); every computed
/// `(internal value, RSS)` goes to `points`.
fn profile_search<P: ResidualProblem>(
    problem: &P,
    set: &ParamSet,
    setup: &SideSetup<'_>,
    dir: f64,
    opts: &FitOptions,
    po: &ProfileOptions,
    points: &mut Vec<(f64, f64)>,
) -> Option<f64> {
    let k = setup.k;
    let v0 = setup.u_hat[k];
    let others_hat: Vec<f64> = setup
        .u_hat
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != k)
        .map(|(_, v)| *v)
        .collect();
    // Warm start at v from a computed point (v_near, warm_near).
    let warm_at = |v: f64, v_near: f64, warm_near: &[f64]| -> Vec<f64> {
        match &setup.slope {
            Some(slope) => warm_near
                .iter()
                .zip(slope)
                .map(|(w, b)| w + b * (v - v_near))
                .collect(),
            None => warm_near.to_vec(),
        }
    };
    let root = |rss: f64| ((rss - setup.rss_min).max(0.0) / setup.s2).sqrt();
    let z = setup.z_star;
    let (unit, first) = match setup.se {
        Some(se) => (se, z * se),
        None => {
            let h = po.fallback_step * v0.abs().max(1.0);
            (h, h)
        }
    };
    let reach = (po.max_steps as f64 * po.step).max(1.0) * unit;
    let tol_v = po.tolerance * unit;
    let tol_z = po.tolerance;

    // Walk out until ρ ≥ z*.
    let mut below = (v0, 0.0_f64, others_hat.clone());
    let mut dist = first.min(reach);
    let above = loop {
        let v = v0 + dir * dist;
        let warm = warm_at(v, below.0, &below.2);
        let (rss, warm) = profile_point(problem, set, k, v, &warm, opts)?;
        points.push((v, rss));
        let rho = root(rss);
        if (rho - z).abs() <= tol_z {
            return Some(v);
        }
        if rho > z {
            break (v, rho);
        }
        if dist >= reach {
            return None;
        }
        // Extrapolate ρ along the line through the optimum, aiming a little beyond z*.
        let aim = if rho > 0.05 * z {
            1.1 * dist * z / rho
        } else {
            4.0 * dist
        };
        below = (v, rho, warm);
        dist = aim.clamp(1.2 * dist, 4.0 * dist).min(reach);
    };

    // Illinois regula falsi on g(v) = ρ(v) − z* between `below` (g < 0) and `above` (g > 0).
    let (mut a, mut ga, mut warm_a) = (below.0, below.1 - z, below.2);
    let (mut b, mut gb) = (above.0, above.1 - z);
    let mut side = 0;
    for _ in 0..60 {
        if (b - a).abs() <= tol_v {
            break;
        }
        let c = b - gb * (b - a) / (gb - ga);
        let c = if c.is_finite() && (c - a) * (c - b) < 0.0 {
            c
        } else {
            0.5 * (a + b)
        };
        let warm = warm_at(c, a, &warm_a);
        let (rc, wc) = profile_point(problem, set, k, c, &warm, opts)?;
        points.push((c, rc));
        let gc = root(rc) - z;
        if gc.abs() <= tol_z {
            return Some(c);
        }
        if gc < 0.0 {
            a = c;
            ga = gc;
            warm_a = wc;
            if side == -1 {
                gb *= 0.5;
            }
            side = -1;
        } else {
            b = c;
            gb = gc;
            if side == 1 {
                ga *= 0.5;
            }
            side = 1;
        }
    }
    Some(a - ga * (b - a) / (gb - ga))
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
            let se = cov
                .std_errors_internal
                .get(k)
                .copied()
                .flatten()
                .filter(|se| *se > 0.0 && se.is_finite());
            let setup = SideSetup {
                k,
                u_hat,
                rss_min,
                s2,
                z_star: statistic_threshold.sqrt(),
                se,
                slope: regression_on(cov, k),
            };
            let map = set.maps()[k];
            let (up, mut raw) = profile_side(&prob, set, &setup, 1.0, threshold, opts, po);
            progress.advance();
            let up = up.map(|v| map.to_external(v));
            let (down, raw_down) = profile_side(&prob, set, &setup, -1.0, threshold, opts, po);
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

/// The regression of the other internal coordinates on `u_k` given by the internal
/// covariance, `Σ_ok / Σ_kk` for every other free parameter o, in the order of the others;
/// `None` when an entry is missing.
fn regression_on(cov: &Covariance, k: usize) -> Option<Vec<f64>> {
    let row = cov.internal.get(k)?;
    let var = row
        .get(k)
        .copied()
        .flatten()
        .filter(|v| *v > 0.0 && v.is_finite())?;
    row.iter()
        .enumerate()
        .filter(|(o, _)| *o != k)
        .map(|(_, c)| c.map(|c| c / var).filter(|b| b.is_finite()))
        .collect()
}
