//! Finite-difference Jacobian of the weighted residuals with respect to the internal
//! coordinates of the free parameters.
//!
//! Per-parameter step `h_j = c · |u_j|` (or `c` when `u_j = 0`), with `c = √ε ≈ 1.5e-8` for
//! forward differences `J_ij ≈ (r_i(u + h_j e_j) − r_i(u)) / h_j` (error O(h)) and
//! `c = ε^(1/3) ≈ 6e-6` for central differences
//! `J_ij ≈ (r_i(u + h_j e_j) − r_i(u − h_j e_j)) / (2 h_j)` (error O(h²)), which balance
//! truncation against rounding error. The step is rounded so that `u + h − u` is exactly
//! representable. When one side of a difference cannot be evaluated the other side is used.
//!
//! References: J. E. Dennis & R. B. Schnabel, *Numerical Methods for Unconstrained
//! Optimization and Nonlinear Equations* (1983), §5.4; MINPACK `fdjac2` (Moré, Garbow &
//! Hillstrom, ANL-80-74, 1980).

use nalgebra::DMatrix;

use crate::fit::problem::{Evaluator, ResidualProblem};

/// Difference scheme.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Difference {
    /// One-sided (n extra evaluations).
    Forward,
    /// Two-sided (2n extra evaluations), more accurate.
    Central,
}

fn step(u: f64, c: f64) -> (f64, f64) {
    let h = if u == 0.0 { c } else { c * u.abs() };
    let up = u + h;
    (up, up - u)
}

/// Jacobian at `u` (m × p), given the residuals `r0` at `u`. `None` when a column cannot be
/// formed because neither side of the difference can be evaluated.
pub fn jacobian<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u: &[f64],
    r0: &[f64],
    scheme: Difference,
) -> Option<DMatrix<f64>> {
    let m = r0.len();
    let p = u.len();
    let mut jac = DMatrix::<f64>::zeros(m, p);
    let mut x = u.to_vec();
    let mut rp = vec![0.0; m];
    let mut rm = vec![0.0; m];
    let c = match scheme {
        Difference::Forward => f64::EPSILON.sqrt(),
        Difference::Central => f64::EPSILON.cbrt(),
    };
    for j in 0..p {
        let (up, h) = step(u[j], c);
        x[j] = up;
        let plus = ev.eval(&x, &mut rp);
        x[j] = u[j] - h;
        let minus = match scheme {
            Difference::Central => ev.eval(&x, &mut rm),
            Difference::Forward if !plus => ev.eval(&x, &mut rm),
            Difference::Forward => false,
        };
        x[j] = u[j];
        let mut col = jac.column_mut(j);
        match (plus, minus) {
            (true, true) => {
                for i in 0..m {
                    col[i] = (rp[i] - rm[i]) / (2.0 * h);
                }
            }
            (true, false) => {
                for i in 0..m {
                    col[i] = (rp[i] - r0[i]) / h;
                }
            }
            (false, true) => {
                for i in 0..m {
                    col[i] = (r0[i] - rm[i]) / h;
                }
            }
            (false, false) => return None,
        }
    }
    Some(jac)
}
