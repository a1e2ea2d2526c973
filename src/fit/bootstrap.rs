//! Residual bootstrap of the fitted parameters, seeded and reproducible.
//!
//! With weighted residuals `r(θ) = (y − f(θ))/w` and weights independent of θ, refitting
//! synthetic data `y* = f(θ̂) + w e*` means minimising `‖r(θ) − r̂ + e*‖²`, `r̂ = r(θ̂)`, so
//! the engine needs nothing but the residual function. `e*` is drawn with replacement from
//! the fitted residuals of the same dataset, centred per dataset and inflated by
//! `√(n/(n − p))` (the residuals of a least-squares fit are on average smaller than the
//! errors).
//!
//! Reproducibility: replicate `b` uses its own generator, `StdRng` seeded with
//! `splitmix64(seed + b)`, so the result does not depend on the number of threads or on the
//! order in which replicates run. Replicates whose fit does not converge are counted and
//! left out. Percentile intervals: the `α/2` and `1 − α/2` sample quantiles (linear
//! interpolation between order statistics, Hyndman & Fan type 7).
//!
//! References: B. Efron & R. J. Tibshirani, *An Introduction to the Bootstrap* (1993), §9.5
//! (residual resampling) and ch. 13 (percentile interval); A. C. Davison & D. V. Hinkley,
//! *Bootstrap Methods and their Application* (1997), §6.2 (leverage-free inflation);
//! G. Steele, D. Lea & C. Flood, OOPSLA 2014 (splitmix64).

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};
use rayon::prelude::*;
use serde::Serialize;

use crate::error::{Error, Result};
use crate::fit::engine::FitOptions;
use crate::fit::lm::levenberg_marquardt;
use crate::fit::params::ParamSet;
use crate::fit::problem::{Evaluator, ResidualProblem, ShiftedProblem};
use crate::stats::intervals::Interval;

/// Settings of the bootstrap.
#[derive(Debug, Clone, Serialize)]
pub struct BootstrapOptions {
    /// Number of replicates.
    pub replicates: usize,
    /// Master seed.
    pub seed: u64,
}

impl Default for BootstrapOptions {
    fn default() -> Self {
        BootstrapOptions {
            replicates: 1000,
            seed: 20_240_601,
        }
    }
}

/// Bootstrap results.
#[derive(Debug, Clone, Serialize)]
pub struct BootstrapSummary {
    /// Replicates asked for.
    pub replicates: usize,
    /// Replicates whose refit failed or did not converge.
    pub failed: usize,
    /// Percentile interval of each free parameter (SI); `None` with fewer than 2 successes.
    pub intervals: Vec<Option<Interval>>,
    /// Bootstrap standard deviation of each free parameter (SI).
    pub std_devs: Vec<Option<f64>>,
    /// Estimates of every successful replicate (free parameters, SI), in replicate order.
    pub samples: Vec<Vec<f64>>,
}

/// The splitmix64 mixing function, used to derive one seed per replicate.
pub fn splitmix64(x: u64) -> u64 {
    let mut z = x.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Quantile of sorted data, Hyndman & Fan type 7.
pub fn quantile_sorted(sorted: &[f64], q: f64) -> Option<f64> {
    let n = sorted.len();
    if n == 0 {
        return None;
    }
    let h = (n - 1) as f64 * q.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    let a = *sorted.get(lo)?;
    let b = *sorted.get(hi)?;
    Some(a + (h - lo as f64) * (b - a))
}

/// Run the residual bootstrap around the fit at internal coordinates `u_hat` with residuals
/// `r_hat`.
pub fn bootstrap<P: ResidualProblem>(
    problem: &P,
    set: &ParamSet,
    u_hat: &[f64],
    r_hat: &[f64],
    opts: &FitOptions,
    bo: &BootstrapOptions,
) -> Result<BootstrapSummary> {
    let n = r_hat.len();
    let p = set.n_free();
    if n <= p || bo.replicates == 0 {
        return Err(Error::setting(
            "bootstrap.replicates",
            "the bootstrap needs at least one replicate and more points than parameters",
        ));
    }
    let inflate = (n as f64 / (n - p) as f64).sqrt();
    // centred, inflated residual pools per dataset
    let mut pools: Vec<(std::ops::Range<usize>, Vec<f64>)> = Vec::new();
    for d in problem.datasets() {
        let Some(slice) = r_hat.get(d.range.clone()) else {
            return Err(Error::Internal(format!(
                "dataset '{}' outside the residuals",
                d.name
            )));
        };
        if slice.is_empty() {
            continue;
        }
        let mean = slice.iter().sum::<f64>() / slice.len() as f64;
        pools.push((
            d.range.clone(),
            slice.iter().map(|v| (v - mean) * inflate).collect(),
        ));
    }
    let threads = rayon::current_num_threads().max(1);
    let chunk = bo.replicates.div_ceil(threads * 4).max(1);
    let jobs: Vec<(std::ops::Range<usize>, P)> = (0..bo.replicates)
        .step_by(chunk)
        .map(|s| (s..(s + chunk).min(bo.replicates), problem.clone()))
        .collect();
    let progress =
        crate::fit::progress::Counter::start(crate::fit::progress::Stage::Bootstrap, bo.replicates);
    let results: Vec<Option<Vec<f64>>> = jobs
        .into_par_iter()
        .map(|(range, prob)| {
            range
                .map(|b| {
                    let mut rng = StdRng::seed_from_u64(splitmix64(bo.seed.wrapping_add(b as u64)));
                    let mut shift = vec![0.0; n];
                    for (rg, pool) in &pools {
                        for i in rg.clone() {
                            let e = pool[rng.random_range(0..pool.len())];
                            shift[i] = e - r_hat[i];
                        }
                    }
                    let shifted = ShiftedProblem::new(prob.clone(), shift).ok()?;
                    let mut ev = Evaluator::new(shifted, set.clone());
                    let out = levenberg_marquardt(&mut ev, u_hat, &opts.lm);
                    if !out.stop.converged() {
                        return None;
                    }
                    let full = ev.external(&out.u);
                    Some(set.free_indices().iter().map(|&i| full[i]).collect())
                })
                .inspect(|_| progress.advance())
                .collect::<Vec<_>>()
        })
        .flatten()
        .collect();
    progress.finish();
    let samples: Vec<Vec<f64>> = results.into_iter().flatten().collect();
    let failed = bo.replicates - samples.len();
    let alpha = 1.0 - opts.level;
    let mut intervals = Vec::with_capacity(p);
    let mut std_devs = Vec::with_capacity(p);
    for j in 0..p {
        let mut col: Vec<f64> = samples.iter().map(|s| s[j]).collect();
        col.sort_by(|a, b| a.total_cmp(b));
        if col.len() < 2 {
            intervals.push(None);
            std_devs.push(None);
            continue;
        }
        let lo = quantile_sorted(&col, alpha / 2.0);
        let hi = quantile_sorted(&col, 1.0 - alpha / 2.0);
        intervals.push(match (lo, hi) {
            (Some(lower), Some(upper)) => Some(Interval { lower, upper }),
            _ => None,
        });
        let m = col.iter().sum::<f64>() / col.len() as f64;
        let var = col.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (col.len() - 1) as f64;
        std_devs.push(Some(var.sqrt()));
    }
    Ok(BootstrapSummary {
        replicates: bo.replicates,
        failed,
        intervals,
        std_devs,
        samples,
    })
}
