//! Checks that the residuals of one dataset look like independent noise.
//!
//! - Wald–Wolfowitz runs test on the signs of the residuals (zeros dropped): with `n₊`
//!   positive, `n₋` negative and `R` runs, `E[R] = 2n₊n₋/N + 1`,
//!   `Var[R] = 2n₊n₋(2n₊n₋ − N) / (N²(N − 1))`, `N = n₊ + n₋`; `z = (R − E[R])/√Var[R]`
//!   (normal approximation, no continuity correction) and two-sided `p = 2(1 − Φ(|z|))`.
//!   Too few runs (z ≪ 0) means the residuals come in long blocks of one sign.
//! - lag-1 autocorrelation `ρ₁ = Σ_{i≥2}(e_i − ē)(e_{i−1} − ē) / Σ(e_i − ē)²`;
//! - Durbin–Watson `d = Σ_{i≥2}(e_i − e_{i−1})² / Σ e_i²` (≈ 2(1 − ρ₁); near 2 for
//!   independent residuals, towards 0 for positive correlation).
//!
//! Verdict: structured when the runs test gives `p < α` or `|ρ₁| √N > z(1 − α/2)`
//! (the large-sample standard error of ρ₁ for white noise is `1/√N`); too few points when
//! `N < 10` or all residuals have one sign.
//!
//! References: A. Wald & J. Wolfowitz, Ann. Math. Stat. 11 (1940) 147–162; J. Durbin &
//! G. S. Watson, Biometrika 37 (1950) 409–428; G. E. P. Box & G. M. Jenkins, *Time Series
//! Analysis* (1976), §2.1 (standard error of the autocorrelation).

use serde::Serialize;

use crate::stats::intervals::{normal_critical, normal_two_sided_p};

/// Verdict of the residual checks.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum ResidualVerdict {
    /// No evidence of structure.
    LookRandom,
    /// The residuals show systematic structure.
    Structured,
    /// Too few points (or only one sign) for the checks to say anything.
    TooFewPoints,
}

impl ResidualVerdict {
    /// A plain-language sentence.
    pub fn sentence(self) -> &'static str {
        match self {
            ResidualVerdict::LookRandom => "residuals look random",
            ResidualVerdict::Structured => {
                "residuals are structured: the model is missing physics, e.g. \
                 concentration-dependent D, surface resistance, a second process"
            }
            ResidualVerdict::TooFewPoints => {
                "too few residuals (or all of one sign) to judge whether they are random"
            }
        }
    }
}

/// Results of the residual checks on one dataset.
#[derive(Debug, Clone, Serialize)]
pub struct ResidualChecks {
    /// Dataset name.
    pub dataset: String,
    /// Number of residuals.
    pub n: usize,
    /// Positive residuals.
    pub n_positive: usize,
    /// Negative residuals.
    pub n_negative: usize,
    /// Observed number of runs of one sign.
    pub runs: usize,
    /// Expected number of runs for random signs.
    pub expected_runs: f64,
    /// Normal-approximation statistic.
    pub runs_z: f64,
    /// Two-sided p-value of the runs test.
    pub runs_p: f64,
    /// Lag-1 autocorrelation.
    pub lag1_autocorrelation: f64,
    /// Durbin–Watson statistic.
    pub durbin_watson: f64,
    /// Verdict.
    pub verdict: ResidualVerdict,
    /// The verdict as a sentence.
    pub message: String,
}

/// Run the checks on the residuals `e` of dataset `name` at significance `alpha`.
pub fn residual_checks(name: &str, e: &[f64], alpha: f64) -> ResidualChecks {
    let signs: Vec<bool> = e.iter().filter(|v| **v != 0.0).map(|v| *v > 0.0).collect();
    let np = signs.iter().filter(|s| **s).count();
    let nm = signs.len() - np;
    let runs = if signs.is_empty() {
        0
    } else {
        1 + signs.windows(2).filter(|w| w[0] != w[1]).count()
    };
    let nn = (np + nm) as f64;
    let (a, b) = (np as f64, nm as f64);
    let expected = 2.0 * a * b / nn + 1.0;
    let var = 2.0 * a * b * (2.0 * a * b - nn) / (nn * nn * (nn - 1.0));
    let z = if var > 0.0 {
        (runs as f64 - expected) / var.sqrt()
    } else {
        f64::NAN
    };
    let p = if z.is_finite() {
        normal_two_sided_p(z)
    } else {
        f64::NAN
    };
    let n = e.len();
    let mean = e.iter().sum::<f64>() / n.max(1) as f64;
    let den: f64 = e.iter().map(|v| (v - mean).powi(2)).sum();
    let num: f64 = e.windows(2).map(|w| (w[1] - mean) * (w[0] - mean)).sum();
    let rho1 = if den > 0.0 { num / den } else { f64::NAN };
    let ss: f64 = e.iter().map(|v| v * v).sum();
    let dw = if ss > 0.0 {
        e.windows(2).map(|w| (w[1] - w[0]).powi(2)).sum::<f64>() / ss
    } else {
        f64::NAN
    };
    let zc = normal_critical(1.0 - alpha).unwrap_or(1.959964);
    let verdict = if n < 10 || np == 0 || nm == 0 || !p.is_finite() {
        ResidualVerdict::TooFewPoints
    } else if p < alpha || rho1.abs() * (n as f64).sqrt() > zc {
        ResidualVerdict::Structured
    } else {
        ResidualVerdict::LookRandom
    };
    ResidualChecks {
        dataset: name.to_string(),
        n,
        n_positive: np,
        n_negative: nm,
        runs,
        expected_runs: expected,
        runs_z: z,
        runs_p: p,
        lag1_autocorrelation: rho1,
        durbin_watson: dw,
        verdict,
        message: format!("{name}: {}", verdict.sentence()),
    }
}
