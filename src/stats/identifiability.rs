//! Identifiability and reliability warnings as structured data with plain sentences.
//!
//! Checks (thresholds are common practice): condition number of the column-scaled `JᵀJ`
//! above `1e8` (about half the digits of a double lost when solving the normal equations);
//! a pair with `|correlation| > 0.95`; a parameter within a relative margin of `1e-6` of the
//! bound range (or of the bound's magnitude) of one of its bounds; a standard error larger than
//! the estimate; parameters that are not identifiable at all (rank-deficient Jacobian).
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
    if !cov.non_identifiable.is_empty() {
        let names: Vec<String> = cov
            .non_identifiable
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
    if cov.condition_number > 1e8 {
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
        for bound in [s.lower, s.upper].into_iter().flatten() {
            let scale = if range.is_finite() {
                range
            } else {
                bound.abs().max(x.abs()).max(f64::MIN_POSITIVE)
            };
            if (x - bound).abs() <= 1e-6 * scale {
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
                w.push(FitWarning {
                    kind: WarningKind::LargeStdError {
                        parameter: s.name.clone(),
                        relative: se / x.abs(),
                    },
                    message: format!(
                        "the standard error of {} is larger than the estimate itself: the data \
                         hardly determine it",
                        s.name
                    ),
                });
            }
        }
    }
    w
}
