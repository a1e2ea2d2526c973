//! The triangular factor of a tall Jacobian, formed a block of rows at a time.
//!
//! For `J` (n × p) with thin QR factorisation `J = Q R`, everything the Levenberg–Marquardt
//! step, the Gauss–Newton refinement and the covariance need is in the small factor
//! `R` (k × p, k = min(n, p)) and the first k entries of `Qᵀ r`:
//! `JᵀJ = RᵀR`, `Jᵀr = Rᵀ (Qᵀr)`, `‖J δ‖ = ‖R δ‖`, `rᵀ J δ = (Qᵀr)ᵀ R δ`, and the singular
//! values and right singular vectors of `J D⁻¹` are those of `R D⁻¹` (D diagonal). Taking the
//! SVD of `R` instead of `J` is how LAPACK's `dgesvd` treats a tall matrix.
//!
//! `R` is built by Householder QR of `[R_prev; rows of J]` for one block of rows after
//! another (a sequential "tall-skinny QR"), with `r` carried as an extra column, so that only
//! one block is copied at a time: the memory is O(b p) for blocks of b rows instead of a
//! second n × p matrix. Each block step is an orthogonal transformation, so the result is
//! backward stable like a single Householder QR of `J` (G. H. Golub & C. F. Van Loan, *Matrix
//! Computations*, 4th ed., 2013, §5.2 and §5.3.4; J. Demmel, L. Grigori, M. Hoemmen &
//! J. Langou, "Communication-optimal parallel and sequential QR and LU factorizations",
//! SIAM J. Sci. Comput. 34, 2012).

use nalgebra::{DMatrix, DVector};

/// Above this many entries (16 MB) a Jacobian counts as large: the Levenberg–Marquardt step
/// works from its factor R instead of a copy, and central differences are formed a few
/// columns at a time. Both ways agree to rounding; rounding can still change the number of
/// iterations of a fit whose residuals carry the solver's step-to-step noise.
pub const LARGE_JACOBIAN_ENTRIES: usize = 1 << 21;

/// Rows of `J` taken per block.
const BLOCK_ROWS: usize = 512;

/// `R` (k × p, upper triangular up to the signs of its rows) and the first k entries of
/// `Qᵀ r` for `J = Q R`, k = min(n, p). `r`, when given, has one entry per row of `J`
/// (missing entries count as zero); without it `Qᵀ r` is zero.
pub fn r_factor(jac: &DMatrix<f64>, r: Option<&[f64]>) -> (DMatrix<f64>, DVector<f64>) {
    let (n, p) = jac.shape();
    let mut tri = DMatrix::<f64>::zeros(0, p);
    let mut qtr = DVector::<f64>::zeros(0);
    let mut start = 0;
    while start < n {
        let rows = BLOCK_ROWS.max(p).min(n - start);
        let k = tri.nrows();
        let mut a = DMatrix::<f64>::zeros(k + rows, p + 1);
        a.view_mut((0, 0), (k, p)).copy_from(&tri);
        a.view_mut((0, p), (k, 1)).copy_from(&qtr);
        a.view_mut((k, 0), (rows, p))
            .copy_from(&jac.view((start, 0), (rows, p)));
        if let Some(r) = r {
            for (i, v) in r.iter().skip(start).take(rows).enumerate() {
                a[(k + i, p)] = *v;
            }
        }
        // Householder QR of [A | b]: the top rows of its R are [R_A | (Qᵀb)_k].
        let ra = a.qr().r();
        let kk = (k + rows).min(p);
        tri = ra.view((0, 0), (kk, p)).into_owned();
        qtr = ra.view((0, p), (kk, 1)).column(0).into_owned();
        start += rows;
    }
    (tri, qtr)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A tall matrix with a known structure and a right-hand side (deterministic values).
    fn tall(n: usize, p: usize) -> (DMatrix<f64>, Vec<f64>) {
        let jac = DMatrix::from_fn(n, p, |i, j| {
            let x = i as f64 / n as f64;
            (1.0 + j as f64) * x.powi(j as i32) + 0.1 * ((i * 7 + j * 3) % 11) as f64
        });
        let r: Vec<f64> = (0..n).map(|i| ((i * 13) % 17) as f64 - 8.0).collect();
        (jac, r)
    }

    #[test]
    fn normal_equations_and_projection_match_the_full_matrix() {
        // JᵀJ = RᵀR and Jᵀr = Rᵀ(Qᵀr) for J = QR (definition of the QR factorisation;
        // Golub & Van Loan 2013, §5.2), across several blocks and a ragged last block.
        for &(n, p) in &[(3, 3), (10, 2), (1500, 3), (2049, 4)] {
            let (jac, r) = tall(n, p);
            let (tri, qtr) = r_factor(&jac, Some(&r));
            assert_eq!(tri.shape(), (n.min(p), p));
            let jtj = jac.transpose() * &jac;
            let rtr = tri.transpose() * &tri;
            let rv = DVector::from_column_slice(&r);
            let jtr = jac.transpose() * &rv;
            let rq = tri.transpose() * &qtr;
            for a in 0..p {
                assert!(
                    (jtr[a] - rq[a]).abs() <= 1e-10 * jtr.amax().max(1.0),
                    "{n} {p}"
                );
                for b in 0..p {
                    let tol = 1e-11 * jtj.amax();
                    assert!((jtj[(a, b)] - rtr[(a, b)]).abs() <= tol, "{n} {p} {a} {b}");
                }
            }
            // Below the diagonal R is zero.
            for i in 0..tri.nrows() {
                for j in 0..i.min(p) {
                    assert_eq!(tri[(i, j)], 0.0);
                }
            }
        }
    }

    #[test]
    fn singular_values_equal_those_of_the_full_matrix() {
        // The SVD of R equals that of J in singular values (J = QR with Q orthonormal columns;
        // Golub & Van Loan 2013, §8.6.1).
        let (jac, r) = tall(5000, 3);
        let (tri, _) = r_factor(&jac, Some(&r));
        let mut a: Vec<f64> = jac
            .svd(false, false)
            .singular_values
            .iter()
            .copied()
            .collect();
        let mut b: Vec<f64> = tri
            .svd(false, false)
            .singular_values
            .iter()
            .copied()
            .collect();
        a.sort_by(f64::total_cmp);
        b.sort_by(f64::total_cmp);
        for (x, y) in a.iter().zip(&b) {
            assert!((x - y).abs() <= 1e-12 * a[2], "{x} {y}");
        }
    }

    #[test]
    fn short_matrix_keeps_its_rows() {
        // n < p: R is n × p and J = QR still reproduces JᵀJ.
        let (jac, r) = tall(2, 3);
        let (tri, qtr) = r_factor(&jac, Some(&r));
        assert_eq!(tri.shape(), (2, 3));
        assert_eq!(qtr.len(), 2);
        let d = jac.transpose() * &jac - tri.transpose() * &tri;
        assert!(d.amax() < 1e-12);
    }
}
