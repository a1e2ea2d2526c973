//! Levenberg–Marquardt minimisation of `F(u) = ‖r(u)‖²` in the internal coordinates.
//!
//! Each iteration forms the finite-difference Jacobian `J`, the scaling `D = diag(d_j)` with
//! `d_j = max over iterations of ‖J_j‖` (MINPACK-style: the column norms, never decreasing),
//! and the SVD of the scaled Jacobian `J D⁻¹ = U S Vᵀ`. The damped step for a damping `λ` is
//! `δ = −D⁻¹ V diag(s_i/(s_i² + λ)) Uᵀ r`, i.e. the solution of
//! `(JᵀJ + λ D²) δ = −Jᵀ r` computed without forming `JᵀJ`. A trial point is accepted when the
//! gain ratio `ρ = (F(u) − F(u + δ)) / (F(u) − ‖r + Jδ‖²)` exceeds 1e-4; then
//! `λ ← λ · max(1/3, 1 − (2ρ − 1)³)`, otherwise `λ ← λ ν`, `ν ← 2ν` (Nielsen's update).
//! A trial point whose residuals cannot be evaluated (the model returned an error or a
//! non-finite value) is rejected like a point that increased `F`.
//!
//! A large Jacobian (more than [`crate::fit::rfactor::LARGE_JACOBIAN_ENTRIES`] entries) is
//! replaced by its triangular factor `R` (`J = QR`) and `r` by `Qᵀr`: every quantity above
//! (`Jᵀr`, the column norms, the SVD's `S` and `V`, `Uᵀr`, `‖r + Jδ‖²`) is the same for both
//! pairs, and the factor is p × p however many residuals there are.
//!
//! The initial damping is conservative, `λ₀ = 100 s_max²` (s_max: largest singular value of
//! the scaled Jacobian), so the first steps are short, close to scaled steepest descent, and
//! the damping then falls by up to a factor 3 per successful step. A small `λ₀` lets the first
//! Gauss–Newton-like step jump into a region where a parameter drops out of the model
//! (e.g. an exponential rate so large that its term vanishes) and the search stalls there: on
//! the NIST StRD set (tests/nist_strd.rs) `λ₀ = 10⁻³ s_max²` fails BoxBOD and MGH17 from
//! their first certified start, while every value from 30 to 10⁴ s_max² tried solved all twelve
//! cases.
//!
//! Stopping (after an accepted step unless noted):
//! - relative reduction: actual and predicted relative reductions of `F` both ≤ `ftol`;
//! - step size: `‖D δ‖ ≤ xtol (‖D u‖ + xtol)` (also tested for rejected steps, where it means
//!   no further progress is possible at this precision);
//! - gradient: `max_j |J_jᵀ r| / (‖J_j‖ ‖r‖) ≤ gtol` (the residuals are orthogonal to the
//!   columns of the Jacobian);
//! - relative offset (only when `offset_tol > 0`): the Gauss–Newton decrease still available
//!   at the current point is negligible against the residual variance,
//!   `√(‖Uᵀr‖² / p) / √(‖r‖² / (n − p)) ≤ offset_tol`, with `U` the left singular vectors of the
//!   Jacobian (Bates & Watts 1981). The estimates are then within about `offset_tol` standard
//!   errors of the optimum, so further iterations change nothing a user can see; with a model
//!   solved numerically they would only chase the solver's own rounding. With exact data
//!   (`‖r‖ → 0`) the offset does not become small and the other criteria decide;
//! - stalled within the noise (only when `stall_offset_tol > 0`): a trial was rejected while
//!   the relative offset at the current point is at most `stall_offset_tol`. With a model
//!   solved numerically the sum of squares is only smooth to the solver's rounding, so a
//!   Gauss–Newton gain of a few hundredths of a standard error can be below what a trial
//!   step can resolve; the search then stops rather than raising the damping until the step
//!   is negligible. Reported as the relative-offset stop;
//! - zero residuals; iteration or evaluation limit.
//!
//! References: J. J. Moré, "The Levenberg–Marquardt algorithm: implementation and theory",
//! Lecture Notes in Mathematics 630 (1978) 105–116; H. B. Nielsen, "Damping parameter in
//! Marquardt's method", IMM-REP-1999-05, DTU (1999); K. Madsen, H. B. Nielsen & O. Tingleff,
//! *Methods for Non-Linear Least Squares Problems*, 2nd ed. (2004), §3.2; D. M. Bates &
//! D. G. Watts, "A relative offset orthogonality convergence criterion for nonlinear least
//! squares", Technometrics 23 (1981) 179–183.

use nalgebra::DVector;
use serde::Serialize;

use crate::fit::jacobian::{jacobian, Difference};
use crate::fit::problem::{Evaluator, ResidualProblem};
use crate::fit::rfactor::{r_factor, LARGE_JACOBIAN_ENTRIES};

/// Settings of the Levenberg–Marquardt search.
#[derive(Debug, Clone, Serialize)]
pub struct LmOptions {
    /// Relative-reduction tolerance on the sum of squares.
    pub ftol: f64,
    /// Relative step-size tolerance (in scaled internal coordinates).
    pub xtol: f64,
    /// Gradient (orthogonality) tolerance.
    pub gtol: f64,
    /// Maximum number of iterations (Jacobian evaluations).
    pub max_iterations: usize,
    /// Maximum number of residual evaluations, including those for the Jacobian.
    pub max_evaluations: usize,
    /// Difference scheme for the Jacobian during the search.
    pub difference: Difference,
    /// Initial damping `λ₀ = initial_damping · s_max²`, `s_max` the largest singular value
    /// of the scaled Jacobian at the start (default 100, see the module documentation).
    pub initial_damping: f64,
    /// Relative-offset tolerance (Bates & Watts 1981); 0 turns the criterion off (default).
    pub offset_tol: f64,
    /// Relative-offset tolerance after a rejected trial (only with `offset_tol > 0`; 0, the
    /// default, turns it off): when a step fails to lower the sum of squares although the
    /// estimates are already within about this many standard errors of the linearised
    /// optimum, the search stops there instead of raising the damping again and again.
    pub stall_offset_tol: f64,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions {
            ftol: 1e-14,
            xtol: 1e-12,
            gtol: 1e-12,
            max_iterations: 2000,
            max_evaluations: 50_000,
            difference: Difference::Forward,
            initial_damping: 100.0,
            offset_tol: 0.0,
            stall_offset_tol: 0.0,
        }
    }
}

/// Why the search stopped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum StopReason {
    /// The relative reduction of the sum of squares fell below `ftol`.
    RelativeReduction,
    /// The step fell below `xtol` relative to the parameters.
    StepSize,
    /// The gradient fell below `gtol`.
    Gradient,
    /// The relative offset fell below `offset_tol`: what is left to gain is far below the
    /// statistical uncertainty.
    RelativeOffset,
    /// All residuals are zero.
    ZeroResiduals,
    /// The iteration limit was reached.
    MaxIterations,
    /// The evaluation limit was reached.
    MaxEvaluations,
    /// Steps kept being rejected although the step was not yet small: no progress possible.
    NoProgress,
    /// The residuals could not be evaluated at the start point.
    StartFailed,
    /// The Jacobian could not be formed (the model fails next to the current point).
    JacobianFailed,
}

impl StopReason {
    /// Whether this counts as convergence to a minimum.
    pub fn converged(self) -> bool {
        matches!(
            self,
            StopReason::RelativeReduction
                | StopReason::StepSize
                | StopReason::Gradient
                | StopReason::RelativeOffset
                | StopReason::ZeroResiduals
        )
    }

    /// A readable sentence.
    pub fn sentence(self) -> &'static str {
        match self {
            StopReason::RelativeReduction => {
                "converged: the sum of squares no longer decreases noticeably"
            }
            StopReason::StepSize => "converged: the parameter steps became negligibly small",
            StopReason::Gradient => {
                "converged: the gradient of the sum of squares is zero to working precision"
            }
            StopReason::RelativeOffset => {
                "converged: what is left to gain is far below the statistical uncertainty"
            }
            StopReason::ZeroResiduals => "converged: the model reproduces the data exactly",
            StopReason::MaxIterations => {
                "not converged: the iteration limit was reached; try another start or a larger limit"
            }
            StopReason::MaxEvaluations => {
                "not converged: the evaluation limit was reached; try another start or a larger limit"
            }
            StopReason::NoProgress => {
                "not converged: no step reduced the sum of squares; the model may fail near this point"
            }
            StopReason::StartFailed => {
                "not started: the model could not be evaluated at the start values"
            }
            StopReason::JacobianFailed => {
                "stopped: the model could not be evaluated next to the current point, so no slope is known"
            }
        }
    }
}

/// Outcome of one Levenberg–Marquardt search.
#[derive(Debug, Clone)]
pub struct LmOutcome {
    /// Internal coordinates at the end.
    pub u: Vec<f64>,
    /// Residuals at `u` (empty when the start failed).
    pub residuals: Vec<f64>,
    /// Sum of squares at `u` (`+∞` when the start failed).
    pub rss: f64,
    /// Iterations (Jacobians formed).
    pub iterations: usize,
    /// Residual evaluations, including those for Jacobians.
    pub evaluations: usize,
    /// Trial points rejected because the model failed there.
    pub failed_trials: usize,
    /// Why it stopped.
    pub stop: StopReason,
}

fn sumsq(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum()
}

/// Minimise `‖r(u)‖²` from `u0` with Levenberg–Marquardt.
pub fn levenberg_marquardt<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u0: &[f64],
    opts: &LmOptions,
) -> LmOutcome {
    let start_evals = ev.evaluations();
    let p = u0.len();
    let mut u = u0.to_vec();
    let mut out = LmOutcome {
        u: u.clone(),
        residuals: Vec::new(),
        rss: f64::INFINITY,
        iterations: 0,
        evaluations: 0,
        failed_trials: 0,
        stop: StopReason::StartFailed,
    };
    let Some(mut r) = ev.residuals(&u) else {
        out.evaluations = ev.evaluations() - start_evals;
        return out;
    };
    let mut f = sumsq(&r);
    let mut diag = vec![0.0_f64; p];
    let mut lambda = -1.0_f64;
    let mut nu = 2.0;
    let mut trial_r = vec![0.0; r.len()];
    let stop = 'outer: loop {
        if f == 0.0 {
            break StopReason::ZeroResiduals;
        }
        if out.iterations >= opts.max_iterations {
            break StopReason::MaxIterations;
        }
        if ev.evaluations() - start_evals >= opts.max_evaluations {
            break StopReason::MaxEvaluations;
        }
        let Some(jac) = jacobian(ev, &u, &r, opts.difference) else {
            break StopReason::JacobianFailed;
        };
        out.iterations += 1;
        // `tri` and `qtr` stand for J and r: below, only JᵀJ, Jᵀr, ‖Jδ‖ and rᵀJδ and the SVD of
        // J D⁻¹ are used, and these are the same for (J, r) and for (R, Qᵀr) with J = QR. A
        // large Jacobian is replaced by its small factor R (see `rfactor`), so that it is
        // neither copied nor factorised whole; a small one is used as it is.
        let (tri, qtr) = if jac.nrows() * p > LARGE_JACOBIAN_ENTRIES {
            r_factor(&jac, Some(&r))
        } else {
            ((*jac).clone(), DVector::from_column_slice(&r))
        };
        drop(jac);
        let grad = tri.transpose() * &qtr;
        let rnorm = f.sqrt();
        let mut gmax = 0.0_f64;
        for j in 0..p {
            let cn = tri.column(j).norm();
            if cn > 0.0 {
                gmax = gmax.max(grad[j].abs() / (cn * rnorm));
            }
            diag[j] = diag[j].max(cn);
            if diag[j] == 0.0 {
                diag[j] = 1.0;
            }
        }
        if gmax <= opts.gtol {
            break StopReason::Gradient;
        }
        let mut ts = tri.clone();
        for (j, d) in diag.iter().enumerate() {
            ts.column_mut(j).scale_mut(1.0 / d);
        }
        let svd = ts.svd(true, true);
        let (Some(uu), Some(vt)) = (svd.u.as_ref(), svd.v_t.as_ref()) else {
            break StopReason::JacobianFailed;
        };
        let s = &svd.singular_values;
        let utr = uu.transpose() * &qtr;
        let n_res = r.len();
        // Relative offset at this point (+∞ when the criterion is off).
        let mut offset = f64::INFINITY;
        if opts.offset_tol > 0.0 && n_res > p {
            let projected: f64 = utr
                .iter()
                .zip(s.iter())
                .filter(|(_, si)| **si > 0.0)
                .map(|(x, _)| x * x)
                .sum();
            offset = (projected / p as f64).sqrt() / (f / (n_res - p) as f64).sqrt();
            if offset <= opts.offset_tol {
                break StopReason::RelativeOffset;
            }
        }
        let smax = s.iter().cloned().fold(0.0_f64, f64::max);
        if lambda < 0.0 {
            lambda = opts.initial_damping * smax * smax;
        }
        let dnorm_u: f64 = u
            .iter()
            .zip(&diag)
            .map(|(x, d)| (x * d).powi(2))
            .sum::<f64>()
            .sqrt();
        loop {
            if ev.evaluations() - start_evals >= opts.max_evaluations {
                break 'outer StopReason::MaxEvaluations;
            }
            // scaled step δs = −V diag(s/(s²+λ)) Uᵀ r
            let mut coef = DVector::<f64>::zeros(s.len());
            for i in 0..s.len() {
                let si = s[i];
                coef[i] = if si > 0.0 {
                    -si * utr[i] / (si * si + lambda)
                } else {
                    0.0
                };
            }
            let ds = vt.transpose() * &coef;
            let delta: Vec<f64> = (0..p).map(|j| ds[j] / diag[j]).collect();
            let dnorm: f64 = delta
                .iter()
                .zip(&diag)
                .map(|(a, d)| (a * d).powi(2))
                .sum::<f64>()
                .sqrt();
            // ‖r + Jδ‖² − ‖r‖² = 2 (Qᵀr)ᵀ Rδ + ‖Rδ‖²
            let jd = &tri * DVector::from_column_slice(&delta);
            let pred = -(2.0 * qtr.dot(&jd) + jd.norm_squared());
            let trial: Vec<f64> = u.iter().zip(&delta).map(|(a, b)| a + b).collect();
            let small_step = dnorm <= opts.xtol * (dnorm_u + opts.xtol);
            let ok = ev.eval(&trial, &mut trial_r);
            let fnew = if ok { sumsq(&trial_r) } else { f64::INFINITY };
            if !ok {
                out.failed_trials += 1;
            }
            let rho = if pred > 0.0 { (f - fnew) / pred } else { -1.0 };
            if ok && fnew < f && rho > 1e-4 {
                let actred = (f - fnew) / f;
                let prered = pred / f;
                u = trial;
                std::mem::swap(&mut r, &mut trial_r);
                f = fnew;
                lambda *= (1.0_f64 / 3.0).max(1.0 - (2.0 * rho - 1.0).powi(3));
                nu = 2.0;
                if actred.abs() <= opts.ftol && prered <= opts.ftol {
                    break 'outer StopReason::RelativeReduction;
                }
                if small_step {
                    break 'outer StopReason::StepSize;
                }
                break;
            }
            if small_step {
                break 'outer StopReason::StepSize;
            }
            // A rejected step where the Gauss–Newton gain left is already below the noise of
            // the model: further trials would only chase the solver's rounding.
            if offset <= opts.stall_offset_tol {
                break 'outer StopReason::RelativeOffset;
            }
            lambda *= nu;
            nu *= 2.0;
            if !lambda.is_finite() || lambda > 1e300 {
                break 'outer StopReason::NoProgress;
            }
        }
    };
    out.u = u;
    out.rss = f;
    out.residuals = r;
    out.stop = stop;
    out.evaluations = ev.evaluations() - start_evals;
    out
}
