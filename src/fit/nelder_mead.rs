//! Derivative-free pre-search: Nelder–Mead simplex on the sum of squares `F(u) = ‖r(u)‖²`
//! in the internal coordinates, using the `argmin` implementation.
//!
//! It is robust far from the optimum (where the Jacobian can be useless) and is used to hand
//! Levenberg–Marquardt a better start. A point where the model cannot be evaluated costs
//! `+∞`, so the simplex moves away from it.
//!
//! Initial simplex: `u0` and `u0 + a_j e_j` with `a_j = 0.1 |u_j|` (or 0.1 when `u_j = 0`)
//! for an unbounded identity parameter, and `a_j = max(0.1 |u_j|, 0.5)` for a transformed one
//! (0.5 in `ln x` is a factor 1.65).
//!
//! References: J. A. Nelder & R. Mead, "A simplex method for function minimization",
//! Computer Journal 7 (1965) 308–313.

use std::cell::RefCell;

use argmin::core::{CostFunction, Executor, State};
use argmin::solver::neldermead::NelderMead;

use crate::error::{Error, Result};
use crate::fit::problem::{Evaluator, ResidualProblem};

struct SumSq<'a, P> {
    ev: RefCell<&'a mut Evaluator<P>>,
}

impl<P: ResidualProblem> CostFunction for SumSq<'_, P> {
    type Param = Vec<f64>;
    type Output = f64;

    fn cost(&self, u: &Self::Param) -> std::result::Result<f64, argmin::core::Error> {
        Ok(self.ev.borrow_mut().sum_of_squares(u))
    }
}

/// Outcome of a Nelder–Mead search.
#[derive(Debug, Clone)]
pub struct NmOutcome {
    /// Best internal coordinates found.
    pub u: Vec<f64>,
    /// Sum of squares there.
    pub rss: f64,
    /// Iterations carried out.
    pub iterations: u64,
}

/// Run Nelder–Mead from `u0` for at most `max_iterations` iterations, stopping when the
/// standard deviation of the simplex values falls below `sd_tolerance`.
pub fn nelder_mead<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u0: &[f64],
    max_iterations: u64,
    sd_tolerance: f64,
) -> Result<NmOutcome> {
    let mut simplex = vec![u0.to_vec()];
    for (j, m) in ev.params().maps().iter().enumerate() {
        let mut v = u0.to_vec();
        let uj = u0[j];
        let a = if m.is_plain() {
            if uj == 0.0 {
                0.1
            } else {
                0.1 * uj.abs()
            }
        } else {
            (0.1 * uj.abs()).max(0.5)
        };
        v[j] = uj + a;
        simplex.push(v);
    }
    let solver = NelderMead::new(simplex)
        .with_sd_tolerance(sd_tolerance)
        .map_err(|e| Error::Fit(format!("Nelder–Mead setup: {e}")))?;
    let cost = SumSq {
        ev: RefCell::new(ev),
    };
    let res = Executor::new(cost, solver)
        .configure(|s| s.max_iters(max_iterations))
        .run()
        .map_err(|e| Error::Fit(format!("Nelder–Mead search failed: {e}")))?;
    let state = res.state();
    let u = state
        .get_best_param()
        .cloned()
        .ok_or_else(|| Error::Fit("Nelder–Mead search found no point".into()))?;
    Ok(NmOutcome {
        u,
        rss: state.get_best_cost(),
        iterations: state.get_iter(),
    })
}
