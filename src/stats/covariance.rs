//! Parameter covariance from the Jacobian at the optimum, with a rank check.
//!
//! `C_u = s² (JᵀJ)⁻¹` in the internal coordinates, where `s² = RSS/(n − p)` (residual
//! variance; unknown σ or relative weights) or `s² = 1` (residuals divided by absolute σ
//! and no rescaling requested). `(JᵀJ)⁻¹` is formed from the SVD of the column-scaled
//! Jacobian `J_s = J C⁻¹`, `C = diag(‖J_j‖)`: `(JᵀJ)⁻¹ = C⁻¹ V S⁻² Vᵀ C⁻¹`, never by
//! inverting `JᵀJ` itself. The SVD is taken of the column-scaled triangular factor `R`
//! (`J = QR`, [`crate::fit::rfactor`]), which has the same singular values and right singular
//! vectors as `J_s` and is p × p however long `J` is. Column scaling makes the rank test
//! independent of the parameters' units: singular values `s_i < rank_tol · s_max` are
//! treated as zero. A parameter with a component `|V_jk| > 0.1` along such a null direction
//! `k` is not identifiable: its variance and correlations are reported as absent (`None`),
//! not as numbers. The others are estimable and get the pseudo-inverse values.
//!
//! A parameter can also be declared *insensitive* by the caller (see
//! [`crate::fit::engine`]: a log-scale parameter whose change by a factor e moves the
//! residuals by less than a tenth of the noise): its column is set to zero before the
//! SVD, so it becomes a null direction of its own and the others get the covariance they
//! have with it held fixed. Without this, a column made only of the forward model's numerical
//! noise (relative 1e-10, say) is scaled to unit norm like any other and can look strongly
//! correlated with an offset or a scale, inflating their standard errors for nothing.
//!
//! User-space covariance by the chain rule: `C_x = G C_u G`, `G = diag(dx/du)`.
//! Reported condition number: `κ(J_sᵀ J_s) = (s_max/s_min)²` of the column-scaled matrix.
//!
//! References: G. H. Golub & C. F. Van Loan, *Matrix Computations*, 4th ed. (2013), §5.5;
//! D. M. Bates & D. G. Watts, *Nonlinear Regression Analysis and Its Applications* (1988), §2.3.

use crate::fit::rfactor::r_factor;
use nalgebra::DMatrix;
use serde::Serialize;

/// Covariance of the free parameters.
#[derive(Debug, Clone, Serialize)]
pub struct Covariance {
    /// Numerical rank of the Jacobian.
    pub rank: usize,
    /// Singular values of the column-scaled Jacobian, largest first.
    pub singular_values: Vec<f64>,
    /// Condition number of the column-scaled `JᵀJ` (∞ when singular).
    pub condition_number: f64,
    /// Scale factor used (`s²`, or 1 for absolute σ without rescaling).
    pub scale: f64,
    /// Indices (among the free parameters) that are not identifiable (including the
    /// insensitive ones).
    pub non_identifiable: Vec<usize>,
    /// Indices of the parameters the caller declared insensitive (left out, see the module
    /// docs).
    pub insensitive: Vec<usize>,
    /// Covariance in internal coordinates (`None` where not identifiable).
    pub internal: Vec<Vec<Option<f64>>>,
    /// Covariance in user space, SI (`None` where not identifiable).
    pub external: Vec<Vec<Option<f64>>>,
    /// Standard errors in user space, SI.
    pub std_errors: Vec<Option<f64>>,
    /// Standard errors in internal coordinates.
    pub std_errors_internal: Vec<Option<f64>>,
    /// Correlation matrix.
    pub correlation: Vec<Vec<Option<f64>>>,
}

/// Covariance from the Jacobian `jac` (n × p, internal coordinates), the scale `s²`, the
/// chain-rule factors `dx/du` and the relative rank tolerance.
pub fn covariance(jac: &DMatrix<f64>, scale: f64, dx_du: &[f64], rank_tol: f64) -> Covariance {
    covariance_without(jac, scale, dx_du, rank_tol, &vec![false; jac.ncols()])
}

/// [`covariance`] with the parameters flagged in `insensitive` left out (their columns taken
/// as zero; see the module docs).
pub fn covariance_without(
    jac: &DMatrix<f64>,
    scale: f64,
    dx_du: &[f64],
    rank_tol: f64,
    insensitive: &[bool],
) -> Covariance {
    let p = jac.ncols();
    let mut colnorm = vec![1.0; p];
    // The SVD of R (J = QR) has the singular values and right singular vectors of J, and R
    // is p × p however many rows J has (see `crate::fit::rfactor`).
    let (mut js, _) = r_factor(jac, None);
    for (j, c) in colnorm.iter_mut().enumerate() {
        let nj = js.column(j).norm();
        if nj > 0.0 && nj.is_finite() {
            *c = nj;
        }
        let factor = if insensitive.get(j).copied().unwrap_or(false) {
            0.0
        } else {
            1.0 / *c
        };
        js.column_mut(j).scale_mut(factor);
    }
    let svd = js.svd(false, true);
    let s: Vec<f64> = svd.singular_values.iter().copied().collect();
    let smax = s.iter().copied().fold(0.0_f64, f64::max);
    let mut order: Vec<usize> = (0..s.len()).collect();
    order.sort_by(|&a, &b| s[b].total_cmp(&s[a]));
    let sorted: Vec<f64> = order.iter().map(|&i| s[i]).collect();
    let keep: Vec<bool> = s.iter().map(|&v| v > rank_tol * smax && v > 0.0).collect();
    let rank = keep.iter().filter(|k| **k).count();
    let smin = sorted.last().copied().unwrap_or(0.0);
    let condition_number = if smin > 0.0 && rank == p {
        (smax / smin).powi(2)
    } else {
        f64::INFINITY
    };
    let mut internal = vec![vec![None; p]; p];
    let mut non_identifiable = Vec::new();
    if let Some(vt) = svd.v_t.as_ref() {
        // rows of vt are right singular vectors
        let mut bad = vec![false; p];
        for (k, kept) in keep.iter().enumerate() {
            if !kept {
                for (j, b) in bad.iter_mut().enumerate() {
                    if vt[(k, j)].abs() > 0.1 {
                        *b = true;
                    }
                }
            }
        }
        // a short Jacobian (n < p) also has null directions not represented in vt
        if s.len() < p {
            bad.iter_mut().for_each(|b| *b = true);
        }
        for (j, b) in bad.iter().enumerate() {
            if *b {
                non_identifiable.push(j);
            }
        }
        for a in 0..p {
            for b in 0..p {
                if bad[a] || bad[b] {
                    continue;
                }
                let mut sum = 0.0;
                for (k, kept) in keep.iter().enumerate() {
                    if *kept {
                        sum += vt[(k, a)] * vt[(k, b)] / (s[k] * s[k]);
                    }
                }
                internal[a][b] = Some(scale * sum / (colnorm[a] * colnorm[b]));
            }
        }
    } else {
        non_identifiable = (0..p).collect();
    }
    let mut external = vec![vec![None; p]; p];
    for a in 0..p {
        for b in 0..p {
            external[a][b] = internal[a][b].map(|c| c * dx_du[a] * dx_du[b]);
        }
    }
    let std_errors: Vec<Option<f64>> = (0..p)
        .map(|j| external[j][j].map(|v| v.max(0.0).sqrt()))
        .collect();
    let std_errors_internal: Vec<Option<f64>> = (0..p)
        .map(|j| internal[j][j].map(|v| v.max(0.0).sqrt()))
        .collect();
    let mut correlation = vec![vec![None; p]; p];
    for a in 0..p {
        for b in 0..p {
            if let (Some(c), Some(va), Some(vb)) = (internal[a][b], internal[a][a], internal[b][b])
            {
                if va > 0.0 && vb > 0.0 {
                    // the chain-rule factors cancel in a correlation, up to their signs
                    let sign = (dx_du[a] * dx_du[b]).signum();
                    correlation[a][b] = Some(sign * c / (va * vb).sqrt());
                }
            }
        }
    }
    Covariance {
        rank,
        singular_values: sorted,
        condition_number,
        scale,
        non_identifiable,
        insensitive: (0..p)
            .filter(|&j| insensitive.get(j).copied().unwrap_or(false))
            .collect(),
        internal,
        external,
        std_errors,
        std_errors_internal,
        correlation,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    #[allow(clippy::needless_range_loop)]
    fn linear_regression_covariance() {
        // straight line y = a + b x at x = 0,1,2,3: (JᵀJ)⁻¹ = [[7/10, -3/10],[-3/10, 1/5]]
        // (hand computation: JᵀJ = [[4, 6],[6, 14]], det 20)
        let jac = DMatrix::from_row_slice(4, 2, &[1.0, 0.0, 1.0, 1.0, 1.0, 2.0, 1.0, 3.0]);
        let c = covariance(&jac, 2.0, &[1.0, 1.0], 1e-10);
        assert_eq!(c.rank, 2);
        let e = [[0.7, -0.3], [-0.3, 0.2]];
        for a in 0..2 {
            for b in 0..2 {
                let v = c.external[a][b].unwrap();
                assert!((v - 2.0 * e[a][b]).abs() < 1e-12, "{a}{b}: {v}");
            }
        }
        let r = c.correlation[0][1].unwrap();
        assert!((r + 0.3 / (0.7f64 * 0.2).sqrt()).abs() < 1e-12);
    }

    /// A third column of numerical noise almost parallel to the intercept's, declared
    /// insensitive, leaves the line's covariance as if it were absent (the same hand-computed
    /// `(JᵀJ)⁻¹` as above: the covariance of the others with it held fixed, common practice);
    /// without the flag, the noise column is scaled up and inflates the intercept's variance.
    #[test]
    #[allow(clippy::needless_range_loop)]
    fn insensitive_column_is_left_out() {
        let noise = [1e-12, 1.1e-12, 0.9e-12, 1.05e-12];
        let mut rows = Vec::new();
        for (i, n) in noise.iter().enumerate() {
            rows.extend_from_slice(&[1.0, i as f64, *n]);
        }
        let jac = DMatrix::from_row_slice(4, 3, &rows);
        let c = covariance_without(&jac, 2.0, &[1.0, 1.0, 1.0], 1e-10, &[false, false, true]);
        assert_eq!(c.insensitive, vec![2]);
        assert_eq!(c.non_identifiable, vec![2]);
        assert!(c.std_errors[2].is_none());
        let e = [[0.7, -0.3], [-0.3, 0.2]];
        for a in 0..2 {
            for b in 0..2 {
                let v = c.external[a][b].unwrap();
                assert!((v - 2.0 * e[a][b]).abs() < 1e-12, "{a}{b}: {v}");
            }
        }
        let plain = covariance(&jac, 2.0, &[1.0, 1.0, 1.0], 1e-10);
        assert!(plain.std_errors[0].unwrap() > 3.0 * c.std_errors[0].unwrap());
    }

    #[test]
    fn proportional_columns_are_flagged() {
        let jac = DMatrix::from_row_slice(3, 3, &[1.0, 2.0, 0.0, 2.0, 4.0, 1.0, 3.0, 6.0, 0.0]);
        let c = covariance(&jac, 1.0, &[1.0, 1.0, 1.0], 1e-10);
        assert_eq!(c.rank, 2);
        assert_eq!(c.non_identifiable, vec![0, 1]);
        assert!(c.std_errors[0].is_none() && c.std_errors[1].is_none());
        assert!(c.std_errors[2].is_some());
    }
}
