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
use std::sync::Arc;

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
/// formed because neither side of the difference can be evaluated. The perturbed points go to
/// the problem as one batch ([`Evaluator::eval_batch`]), which may solve them in parallel. A
/// Jacobian asked for again at the same point with the same scheme is not formed again (it is
/// shared, not copied).
pub fn jacobian<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u: &[f64],
    r0: &[f64],
    scheme: Difference,
) -> Option<Arc<DMatrix<f64>>> {
    if let Some(j) = ev.cached_jacobian(u, scheme) {
        return Some(j);
    }
    // The cached Jacobian belongs to another point: let it go before the new one is formed,
    // so that at most one is held (n × p values each), and form the new one in its storage.
    let storage = ev.recycle_jacobian();
    let jac = Arc::new(differences(ev, u, r0, scheme, storage)?);
    ev.remember_jacobian(u, scheme, jac.clone());
    Some(jac)
}

/// `u` with its entry `j` set to `x`.
fn shifted(u: &[f64], j: usize, x: f64) -> Vec<f64> {
    let mut v = u.to_vec();
    v[j] = x;
    v
}

/// Turn `col`, which holds the residuals at the plus point `u + h e_j` when `plus_ok`, into
/// column j of the Jacobian: central `(r₊ − r₋)/(2h)` when both sides were evaluated, else
/// the one-sided difference against `r0` on the side that was. `false` when neither was.
fn difference_column(
    col: &mut [f64],
    plus_ok: bool,
    minus: Option<&[f64]>,
    r0: &[f64],
    h: f64,
) -> bool {
    match (plus_ok, minus) {
        (true, Some(rm)) => col
            .iter_mut()
            .zip(rm)
            .for_each(|(c, m)| *c = (*c - m) / (2.0 * h)),
        (true, None) => col.iter_mut().zip(r0).for_each(|(c, r)| *c = (*c - r) / h),
        (false, Some(rm)) => col
            .iter_mut()
            .zip(r0.iter().zip(rm))
            .for_each(|(c, (r, m))| *c = (r - m) / h),
        (false, None) => return false,
    }
    true
}

/// Residuals at `points` into one column-major buffer (`buf`, resized), `m` values per point.
fn evaluate<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u: &[f64],
    points: &[Vec<f64>],
    m: usize,
    mut buf: Vec<f64>,
) -> (Vec<f64>, Vec<bool>) {
    buf.clear();
    buf.resize(m * points.len(), 0.0);
    let ok = {
        let mut outs: Vec<&mut [f64]> = buf.chunks_mut(m.max(1)).collect();
        ev.eval_batch(u, points, &mut outs)
    };
    (buf, ok)
}

/// The Jacobian by `scheme`, formed in `storage` (any length; reused when large enough).
fn differences<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u: &[f64],
    r0: &[f64],
    scheme: Difference,
    storage: Vec<f64>,
) -> Option<DMatrix<f64>> {
    let m = r0.len();
    let p = u.len();
    if m == 0 {
        return Some(DMatrix::zeros(0, p));
    }
    let c = match scheme {
        Difference::Forward => f64::EPSILON.sqrt(),
        Difference::Central => f64::EPSILON.cbrt(),
    };
    let steps: Vec<(f64, f64)> = u.iter().map(|&x| step(x, c)).collect();
    if scheme == Difference::Central {
        return central(ev, u, r0, &steps, storage);
    }
    // Points u + h_j e_j. The residuals of point j are overwritten by column j of the
    // Jacobian, so the matrix takes no extra memory.
    let points: Vec<Vec<f64>> = (0..p).map(|j| shifted(u, j, steps[j].0)).collect();
    let (mut buf, ok) = evaluate(ev, u, &points, m, storage);
    // A forward point that failed: try the backward side instead.
    let failed: Vec<usize> = (0..p).filter(|&j| !ok[j]).collect();
    let back: Vec<Vec<f64>> = failed
        .iter()
        .map(|&j| shifted(u, j, u[j] - steps[j].1))
        .collect();
    let (back_buf, back_ok) = if back.is_empty() {
        (Vec::new(), Vec::new())
    } else {
        evaluate(ev, u, &back, m, Vec::new())
    };
    for (j, &(_, h)) in steps.iter().enumerate() {
        let minus = failed
            .iter()
            .position(|&f| f == j)
            .filter(|&k| back_ok[k])
            .map(|k| &back_buf[k * m..(k + 1) * m]);
        if !difference_column(&mut buf[j * m..(j + 1) * m], ok[j], minus, r0, h) {
            return None;
        }
    }
    Some(DMatrix::from_vec(m, p, buf))
}

/// Up to this many Jacobian entries every central-difference point is evaluated in one
/// batch; above it, a few columns at a time.
const CENTRAL_BATCH_ENTRIES: usize = crate::fit::rfactor::LARGE_JACOBIAN_ENTRIES;

/// Central differences. Column j is formed in the slot of its plus point; the minus points
/// go to a scratch buffer. For a large Jacobian the columns are taken in groups of about
/// half the worker threads (two points per column), so the scratch holds a few columns
/// rather than a second n × p matrix; the values do not depend on the grouping.
fn central<P: ResidualProblem>(
    ev: &mut Evaluator<P>,
    u: &[f64],
    r0: &[f64],
    steps: &[(f64, f64)],
    mut buf: Vec<f64>,
) -> Option<DMatrix<f64>> {
    let (m, p) = (r0.len(), u.len());
    let group = if m * p <= CENTRAL_BATCH_ENTRIES {
        p.max(1)
    } else {
        rayon::current_num_threads().div_ceil(2).clamp(1, p.max(1))
    };
    buf.clear();
    buf.resize(m * p, 0.0);
    let mut scratch = vec![0.0; m * group];
    for (g, cols) in buf.chunks_mut(m * group).enumerate() {
        let j0 = g * group;
        let width = cols.len() / m;
        let mut points: Vec<Vec<f64>> = (j0..j0 + width)
            .map(|j| shifted(u, j, steps[j].0))
            .collect();
        points.extend((j0..j0 + width).map(|j| shifted(u, j, u[j] - steps[j].1)));
        let ok = {
            let mut outs: Vec<&mut [f64]> = cols
                .chunks_mut(m)
                .chain(scratch.chunks_mut(m).take(width))
                .collect();
            ev.eval_batch(u, &points, &mut outs)
        };
        for (c, col) in cols.chunks_mut(m).enumerate() {
            let minus = ok[width + c].then(|| &scratch[c * m..(c + 1) * m]);
            if !difference_column(col, ok[c], minus, r0, steps[j0 + c].1) {
                return None;
            }
        }
    }
    Some(DMatrix::from_vec(m, p, buf))
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

    #[test]
    fn large_central_jacobian_taken_in_groups_matches_the_analytic_one() {
        // Above CENTRAL_BATCH_ENTRIES the columns are formed a few at a time; the values must
        // be those of the analytic Jacobian all the same. r_i = y_i − (a + b x_i + c x_i²):
        // ∂r/∂a = −1, ∂r/∂b = −x, ∂r/∂c = −x² (hand derivation; central differences are
        // exact for a quadratic up to rounding).
        let m = CENTRAL_BATCH_ENTRIES / 3 + 1000;
        let x: Vec<f64> = (0..m).map(|i| i as f64 / m as f64).collect();
        let xs = x.clone();
        let prob = FnProblem::new(m, move |p: &[f64], out: &mut [f64]| {
            for (o, xi) in out.iter_mut().zip(&xs) {
                *o = 1.0 - (p[0] + p[1] * xi + p[2] * xi * xi);
            }
            Ok(())
        });
        let set = ParamSet::new(vec![
            ParamSpec::new("a", "-", 0.5),
            ParamSpec::new("b", "-", -1.5),
            ParamSpec::new("c", "-", 2.0),
        ])
        .unwrap();
        let mut ev = Evaluator::new(prob, set.clone());
        let u = set.to_internal(&set.start_full());
        let r0 = ev.residuals(&u).unwrap();
        let j = jacobian(&mut ev, &u, &r0, Difference::Central).unwrap();
        assert_eq!(j.shape(), (m, 3));
        for i in (0..m).step_by(997) {
            let xi = x[i];
            assert!((j[(i, 0)] + 1.0).abs() < 1e-8, "{i}");
            assert!((j[(i, 1)] + xi).abs() < 1e-8, "{i}");
            assert!((j[(i, 2)] + xi * xi).abs() < 1e-8, "{i}");
        }
    }

    #[test]
    fn a_side_that_cannot_be_evaluated_falls_back_to_the_other() {
        // r_i = y_i − a exp(−k x_i), evaluable only for a ≤ 2 (the model "fails" above), and
        // the start is a = 2 exactly: the plus point of column a fails, so the forward scheme
        // must use the backward difference and the central scheme the one-sided one.
        // ∂r/∂a = −exp(−k x), ∂r/∂k = a x exp(−k x) (hand derivation). r is linear in a, so
        // the one-sided column a is exact to rounding; column k carries the scheme's own error
        // (forward O(h), h ≈ 1.5e-8; central O(h²), h ≈ 6e-6). Treating the failed side as
        // zeros, or giving up, would miss by orders of magnitude.
        let x: Vec<f64> = (0..8).map(|i| 0.5 * i as f64).collect();
        let xs = x.clone();
        let prob = FnProblem::new(8, move |p: &[f64], out: &mut [f64]| {
            if p[0] > 2.0 {
                return Err(crate::error::Error::Internal("outside the model".into()));
            }
            for i in 0..8 {
                out[i] = 1.0 - p[0] * (-p[1] * xs[i]).exp();
            }
            Ok(())
        });
        let set = ParamSet::new(vec![
            ParamSpec::new("a", "-", 2.0),
            ParamSpec::new("k", "1/s", 0.7),
        ])
        .unwrap();
        let mut ev = Evaluator::new(prob, set.clone());
        let u = set.to_internal(&set.start_full());
        let r0 = ev.residuals(&u).unwrap();
        for (scheme, tol) in [(Difference::Forward, 1e-6), (Difference::Central, 1e-8)] {
            let j = jacobian(&mut ev, &u, &r0, scheme).unwrap();
            for (i, &xi) in x.iter().enumerate() {
                let e = (-0.7 * xi).exp();
                assert!((j[(i, 0)] + e).abs() < tol, "{scheme:?} {i} {}", j[(i, 0)]);
                assert!((j[(i, 1)] - 2.0 * xi * e).abs() < tol, "{scheme:?} {i}");
            }
        }
    }
}
