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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::params::{ParamSet, ParamSpec};
    use crate::fit::problem::FnProblem;

    #[test]
    fn differences_match_the_analytic_jacobian() {
        // r_i = y_i − a exp(−k x_i) in internal coordinates (a, ln k):
        // ∂r/∂a = −exp(−k x), ∂r/∂(ln k) = a k x exp(−k x) (hand derivation)
        let x: Vec<f64> = (0..8).map(|i| 0.5 * i as f64).collect();
        let xs = x.clone();
        let prob = FnProblem::new(8, move |p: &[f64], out: &mut [f64]| {
            for i in 0..8 {
                out[i] = 1.0 - p[0] * (-p[1] * xs[i]).exp();
            }
            Ok(())
        });
        let set = ParamSet::new(vec![
            ParamSpec::new("a", "-", 2.0),
            ParamSpec::new("k", "1/s", 0.7).log(),
        ])
        .unwrap();
        let mut ev = Evaluator::new(prob, set.clone());
        let u = set.to_internal(&set.start_full());
        let r0 = ev.residuals(&u).unwrap();
        for (scheme, tol) in [(Difference::Forward, 1e-6), (Difference::Central, 1e-9)] {
            let j = jacobian(&mut ev, &u, &r0, scheme).unwrap();
            for (i, &xi) in x.iter().enumerate() {
                let e = (-0.7 * xi).exp();
                assert!((j[(i, 0)] + e).abs() < tol, "{scheme:?} {i}");
                assert!(
                    (j[(i, 1)] - 2.0 * 0.7 * xi * e).abs() < tol,
                    "{scheme:?} {i}"
                );
            }
        }
    }
}
