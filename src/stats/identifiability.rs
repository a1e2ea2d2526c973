//! Identifiability and reliability warnings as structured data with plain sentences.
//!
//! Checks (thresholds are common practice): condition number of the column-scaled `JᵀJ`
//! above `1e8` (about half the digits of a double lost when solving the normal equations);
//! a pair with `|correlation| > 0.95`; a parameter within a relative margin of `1e-6` of the
//! bound range (or of the bound's magnitude) of one of its bounds; a standard error larger than
//! the estimate; parameters that are not identifiable at all (rank-deficient Jacobian).
//!
//! Checks on the data and the fit, made by the analysis (`crate::analysis::run`) with the
//! constructors below: an uptake-type run that ends before the fitted process is half done, or
//! starts after it is 95 % done; systematic residuals (the residual checks' verdict); with
//! absolute σ, a χ² whose upper-tail p-value is below 0.001.
//!
//! References: D. A. Belsley, E. Kuh & R. E. Welsch, *Regression Diagnostics* (1980), ch. 3
//! (condition numbers).

use serde::Serialize;

use crate::fit::params::ParamSpec;
use crate::stats::covariance::Covariance;

/// Kind of warning, for programs and tests.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum WarningKind {
    /// The Jacobian is rank-deficient: these parameters cannot be determined from the data.
    NotIdentifiable {
        /// Parameter names.
        parameters: Vec<String>,
    },
    /// Ill-conditioned `JᵀJ`.
    IllConditioned {
        /// Condition number of the column-scaled `JᵀJ`.
        condition_number: f64,
    },
    /// Two parameters strongly correlated.
    HighCorrelation {
        /// First parameter.
        a: String,
        /// Second parameter.
        b: String,
        /// Correlation coefficient.
        correlation: f64,
    },
    /// A parameter ended at (or within a tiny margin of) a bound.
    AtBound {
        /// Parameter.
        parameter: String,
        /// The bound value (SI).
        bound: f64,
    },
    /// Standard error larger than the estimate's magnitude.
    LargeStdError {
        /// Parameter.
        parameter: String,
        /// Relative standard error `SE/|estimate|`.
        relative: f64,
    },
    /// The optimiser did not report convergence.
    NotConverged {
        /// The stop reason sentence.
        reason: String,
    },
    /// An uptake-type dataset ends while the fitted process is less than half done, so the
    /// rate and the final amount are hardly separable.
    EndsEarly {
        /// Dataset.
        dataset: String,
        /// Fitted fractional uptake `(M_t − M_0)/(M_∞ − M_0)` at the last data time.
        fraction: f64,
    },
    /// An uptake-type dataset starts when the fitted process is already more than 95 % done,
    /// so the rate (D) is hardly determined.
    StartsLate {
        /// Dataset.
        dataset: String,
        /// Fitted fractional uptake at the first data time.
        fraction: f64,
    },
    /// The residuals of a dataset are systematic (runs test or lag-1 autocorrelation).
    SystematicResiduals {
        /// Dataset.
        dataset: String,
        /// Two-sided p-value of the runs test.
        runs_p: f64,
        /// Lag-1 autocorrelation of the residuals.
        lag1: f64,
    },
    /// With absolute σ, χ² is far above its degrees of freedom (p < 0.001).
    ChiSquareTooLarge {
        /// Reduced χ².
        reduced: f64,
        /// Upper-tail p-value.
        p_value: f64,
    },
}

/// Fractional uptake below which the data are said to end early (common practice: before
/// half-time the uptake follows `M_t/M_∞ ≈ (4/L)√(Dt/π)` (Crank 1975, eq. 4.20) and only
/// `M_∞ √D` is determined).
pub const ENDS_EARLY_FRACTION: f64 = 0.5;

/// Fractional uptake above which the data are said to start late (common practice).
pub const STARTS_LATE_FRACTION: f64 = 0.95;

/// Warning for a dataset whose last point has fitted fractional uptake `fraction`.
pub fn ends_early(dataset: &str, fraction: f64) -> FitWarning {
    FitWarning {
        message: format!(
            "dataset {dataset}: the data end when the process is only {:.1} % done (fitted \
             fractional uptake at the last time): before half-way the uptake grows as \
             M_inf·sqrt(D t), so the diffusivity and the final amount can hardly be told \
             apart; measure longer, or fix the final amount",
            100.0 * fraction
        ),
        kind: WarningKind::EndsEarly {
            dataset: dataset.to_string(),
            fraction,
        },
    }
}

/// Warning for a dataset whose first point has fitted fractional uptake `fraction`.
pub fn starts_late(dataset: &str, fraction: f64) -> FitWarning {
    FitWarning {
        message: format!(
            "dataset {dataset}: the data start when the process is already {:.1} % done \
             (fitted fractional uptake at the first time): the approach to equilibrium is \
             missed, so the diffusivity is hardly determined; measure from the step",
            100.0 * fraction
        ),
        kind: WarningKind::StartsLate {
            dataset: dataset.to_string(),
            fraction,
        },
    }
}

/// Warning for a dataset whose residual checks found structure.
pub fn systematic_residuals(dataset: &str, runs_p: f64, lag1: f64) -> FitWarning {
    let p = if runs_p.is_finite() {
        format!("{runs_p:.2e}")
    } else {
        "not defined".to_string()
    };
    let r = if lag1.is_finite() {
        format!("{lag1:.2}")
    } else {
        "not defined".to_string()
    };
    FitWarning {
        message: format!(
            "dataset {dataset}: the residuals are systematic (runs test p = {p}, lag-1 \
             autocorrelation {r}): the model does not describe these data, so the estimates \
             may be biased and the intervals too narrow; consider other physics (surface \
             resistance, concentration-dependent D, a second process)"
        ),
        kind: WarningKind::SystematicResiduals {
            dataset: dataset.to_string(),
            runs_p,
            lag1,
        },
    }
}

/// Warning for a χ² far above its degrees of freedom with absolute σ.
pub fn chi_square_too_large(reduced: f64, p_value: f64) -> FitWarning {
    FitWarning {
        message: format!(
            "chi-square is {reduced:.3} times its degrees of freedom (p = {p_value:.2e}): \
             either the model is wrong or the given sigma are too small, and intervals that \
             trust sigma are too narrow"
        ),
        kind: WarningKind::ChiSquareTooLarge { reduced, p_value },
    }
}

/// One warning: kind plus a plain sentence.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitWarning {
    /// Structured kind.
    pub kind: WarningKind,
    /// Plain sentence for a report.
    pub message: String,
}

/// Collect the warnings for free parameters `specs` with `estimates` (SI) and covariance.
pub fn identifiability_warnings(
    specs: &[&ParamSpec],
    estimates: &[f64],
    cov: &Covariance,
) -> Vec<FitWarning> {
    let mut w = Vec::new();
    let insensitive: Vec<String> = cov
        .insensitive
        .iter()
        .filter_map(|&j| specs.get(j).map(|s| s.name.clone()))
        .collect();
    if !insensitive.is_empty() {
        w.push(FitWarning {
            message: format!(
                "not identifiable: changing {} by a whole factor of e moves the fitted curve by \
                 less than a tenth of the noise (a 95 % interval would span more than a factor of 10⁸), so the data do not determine it; \
                 it is left out of the other parameters' uncertainties (they are given with it \
                 held at its estimate). Fix it, or measure where it matters.",
                insensitive.join(", ")
            ),
            kind: WarningKind::NotIdentifiable {
                parameters: insensitive,
            },
        });
    }
    let combined: Vec<usize> = cov
        .non_identifiable
        .iter()
        .copied()
        .filter(|j| !cov.insensitive.contains(j))
        .collect();
    if !combined.is_empty() {
        let names: Vec<String> = combined
            .iter()
            .filter_map(|&j| specs.get(j).map(|s| s.name.clone()))
            .collect();
        w.push(FitWarning {
            message: format!(
                "not identifiable: {} cannot be determined separately from these data (only a \
                 combination of them affects the residuals); fix one of them or add data that \
                 separate them. No standard errors are given for them.",
                names.join(", ")
            ),
            kind: WarningKind::NotIdentifiable { parameters: names },
        });
    }
    if cov.condition_number.is_finite() && cov.condition_number > 1e8 {
        w.push(FitWarning {
            kind: WarningKind::IllConditioned {
                condition_number: cov.condition_number,
            },
            message: format!(
                "the problem is ill-conditioned (condition number {:.2e}): the data barely \
                 distinguish some parameter combinations, so estimates are sensitive to noise",
                cov.condition_number
            ),
        });
    }
    if !cov.condition_number.is_finite() && cov.non_identifiable.is_empty() {
        w.push(FitWarning {
            kind: WarningKind::IllConditioned {
                condition_number: f64::MAX,
            },
            message: "the problem is singular (the Jacobian at the estimate has a zero \
                      singular value): some parameter combination does not affect the fit"
                .to_string(),
        });
    }
    let p = specs.len();
    for a in 0..p {
        for b in (a + 1)..p {
            if let Some(r) = cov.correlation[a][b] {
                if r.abs() > 0.95 {
                    w.push(FitWarning {
                        kind: WarningKind::HighCorrelation {
                            a: specs[a].name.clone(),
                            b: specs[b].name.clone(),
                            correlation: r,
                        },
                        message: format!(
                            "{} and {} are strongly correlated (r = {r:.3}): the data constrain \
                             mainly a combination of the two",
                            specs[a].name, specs[b].name
                        ),
                    });
                }
            }
        }
    }
    for (j, s) in specs.iter().enumerate() {
        let x = estimates[j];
        let range = match (s.lower, s.upper) {
            (Some(l), Some(h)) => h - l,
            _ => f64::NAN,
        };
        let log_scale = s.transform == crate::fit::params::Transform::Log && x > 0.0;
        for bound in [s.lower, s.upper].into_iter().flatten() {
            // A log parameter is judged on the log scale it is fitted on: its bounds may span
            // many decades, and "near" the lower one means near in ratio, not in difference.
            let at = if log_scale && bound > 0.0 {
                let span = match (s.lower, s.upper) {
                    (Some(l), Some(h)) if l > 0.0 && h > l => (h / l).ln(),
                    _ => 1.0,
                };
                (x / bound).ln().abs() <= 1e-6 * span.max(1.0)
            } else {
                let scale = if range.is_finite() {
                    range
                } else {
                    bound.abs().max(x.abs()).max(f64::MIN_POSITIVE)
                };
                (x - bound).abs() <= 1e-6 * scale
            };
            if at {
                w.push(FitWarning {
                    kind: WarningKind::AtBound {
                        parameter: s.name.clone(),
                        bound,
                    },
                    message: format!(
                        "{} ended at its bound {bound:e} {}: the best value may lie beyond it, \
                         and its uncertainty is not meaningful",
                        s.name, s.unit
                    ),
                });
            }
        }
        if let Some(se) = cov.std_errors.get(j).copied().flatten() {
            if se > x.abs() {
                let relative = if x != 0.0 { se / x.abs() } else { f64::MAX };
                w.push(FitWarning {
                    kind: WarningKind::LargeStdError {
                        parameter: s.name.clone(),
                        relative,
                    },
                    message: format!(
                        "the standard error of {} is larger than the estimate itself \
                         ({se:.3e} against {x:.3e}, SI units): the data hardly determine it, \
                         and it is consistent with zero",
                        s.name
                    ),
                });
            }
        }
    }
    w
}
