//! Tridiagonal linear systems (the Thomas algorithm).
//!
//! Row i reads `lower[i] x[i-1] + diag[i] x[i] + upper[i] x[i+1] = r[i]`, with `lower[0]` and
//! `upper[n-1]` unused. The matrices assembled by the solver are diagonally dominant
//! M-matrices (I − c J with J the diffusion Jacobian), for which elimination without pivoting
//! is stable.
//!
//! Reference: L. H. Thomas (1949); Golub & Van Loan, *Matrix Computations*, §4.3.

/// A factored tridiagonal matrix, reusable for several right-hand sides.
#[derive(Debug, Clone, Default)]
pub struct Factored {
    /// Multipliers m_i = lower_i / w_{i-1}.
    mult: Vec<f64>,
    /// 1 / w_i, the inverted pivots.
    inv_pivot: Vec<f64>,
    /// Super-diagonal.
    upper: Vec<f64>,
}

impl Factored {
    /// Workspace for n unknowns.
    pub fn with_len(n: usize) -> Self {
        Factored {
            mult: vec![0.0; n],
            inv_pivot: vec![0.0; n],
            upper: vec![0.0; n],
        }
    }

    /// Factor the matrix (lower, diag, upper). Returns false on a zero or non-finite pivot.
    pub fn factor(&mut self, lower: &[f64], diag: &[f64], upper: &[f64]) -> bool {
        let n = diag.len();
        self.mult.resize(n, 0.0);
        self.inv_pivot.resize(n, 0.0);
        self.upper.resize(n, 0.0);
        self.upper.copy_from_slice(upper);
        let mut w = diag[0];
        if w == 0.0 || !w.is_finite() {
            return false;
        }
        self.inv_pivot[0] = 1.0 / w;
        for i in 1..n {
            let m = lower[i] * self.inv_pivot[i - 1];
            self.mult[i] = m;
            w = diag[i] - m * upper[i - 1];
            if w == 0.0 || !w.is_finite() {
                return false;
            }
            self.inv_pivot[i] = 1.0 / w;
        }
        true
    }

    /// Solve in place: `x` holds the right-hand side on entry and the solution on return.
    ///
    /// Both sweeps carry the previous value in a register rather than reloading it, so the
    /// loop-carried dependency is one multiply-add, not a store-to-load round trip.
    pub fn solve(&self, x: &mut [f64]) {
        let n = x.len();
        let mult = &self.mult[..n];
        let inv = &self.inv_pivot[..n];
        let upper = &self.upper[..n];
        let mut prev = x[0];
        for (xi, m) in x[1..].iter_mut().zip(&mult[1..]) {
            prev = *xi - m * prev;
            *xi = prev;
        }
        let mut next = x[n - 1] * inv[n - 1];
        x[n - 1] = next;
        for ((xi, u), w) in x[..n - 1]
            .iter_mut()
            .zip(&upper[..n - 1])
            .zip(&inv[..n - 1])
            .rev()
        {
            next = (*xi - u * next) * w;
            *xi = next;
        }
    }
}

/// The matrix `I − c J` of a linear TR-BDF2 step, factored twice: top-down (LU) and bottom-up
/// (UL). The two factorizations share one pass (two independent recurrences), and let the
/// stepper run the back-substitution of one stage and the elimination of the next in the same
/// sweep (see [`crate::solver::linear_step`]).
///
/// With row i of the matrix `a_i x_{i−1} + d_i x_i + e_i x_{i+1}` (a = −c J_lower,
/// d = 1 − c J_diag, e = −c J_upper):
///
/// ```text
///   LU:  w_0 = d_0,      m_i = a_i / w_{i−1},  w_i = d_i − m_i e_{i−1},   g_i = e_i / w_i
///        y_i = r_i − m_i y_{i−1},  z_i = y_i / w_i,  x_i = z_i − g_i x_{i+1}      (down, then up)
///   UL:  v_{n−1} = d_{n−1},  k_i = e_i / v_{i+1},  v_i = d_i − k_i a_{i+1},   q_i = a_i / v_i
///        y_i = r_i − k_i y_{i+1},  z_i = y_i / v_i,  x_i = z_i − q_i x_{i−1}      (up, then down)
/// ```
///
/// Only the inverted pivots 1/w_i and 1/v_i are stored; the multipliers m, g, k, q are formed
/// where they are used, from the Jacobian bands, off the sweeps' loop-carried chains. Every
/// loop-carried dependency of a solve is then a single multiply-add.
#[derive(Debug, Clone, Default)]
pub struct TwoWay {
    /// c of the factored matrix I − c J.
    pub c: f64,
    /// 1 / w_i.
    pub inv_w: Vec<f64>,
    /// 1 / v_i.
    pub inv_v: Vec<f64>,
    /// Scratch: the continuants' denominators.
    den_w: Vec<f64>,
    den_v: Vec<f64>,
}

impl TwoWay {
    /// Workspace for n unknowns.
    pub fn with_len(n: usize) -> Self {
        TwoWay {
            c: 0.0,
            inv_w: vec![0.0; n],
            inv_v: vec![0.0; n],
            den_w: vec![0.0; n],
            den_v: vec![0.0; n],
        }
    }

    /// Factor `I − c J` for the Jacobian bands `(jl, jd, ju)` (n ≥ 2). Returns false on a zero
    /// or non-finite pivot.
    ///
    /// The pivots come from the continuants rather than from the division recurrence
    /// `w_i = d_i − a_i e_{i−1} / w_{i−1}`, whose loop-carried chain holds a division:
    ///
    /// ```text
    ///   P_{−1} = 1,  P_0 = d_0,  P_i = d_i P_{i−1} − a_i e_{i−1} P_{i−2},   w_i = P_i / P_{i−1}
    /// ```
    ///
    /// (and the mirror image from the bottom for the UL pivots). The chain is then one multiply
    /// and one subtraction; the divisions run afterwards, independent of each other. The pair
    /// (P_{i−1}, P_i) is rescaled by a power of two every eight rows, which changes no ratio
    /// and keeps the continuants far from overflow. Should they still overflow, the classic
    /// recurrence is used instead. Reference: G. H. Golub & C. F. Van Loan, *Matrix
    /// Computations*, 4th ed. (2013), §4.3 (continuants of a tridiagonal matrix).
    pub fn factor(&mut self, c: f64, jl: &[f64], jd: &[f64], ju: &[f64]) -> bool {
        let n = jd.len();
        if n < 2 || jl.len() < n || ju.len() < n {
            return false;
        }
        for v in [
            &mut self.inv_w,
            &mut self.inv_v,
            &mut self.den_w,
            &mut self.den_v,
        ] {
            v.resize(n, 0.0);
        }
        self.c = c;
        if self.factor_by_continuants(c, &jl[..n], &jd[..n], &ju[..n]) {
            return true;
        }
        self.factor_by_recurrence(c, &jl[..n], &jd[..n], &ju[..n])
    }

    fn factor_by_continuants(&mut self, c: f64, jl: &[f64], jd: &[f64], ju: &[f64]) -> bool {
        let n = jd.len();
        let (inv_w, den_w) = (&mut self.inv_w[..n], &mut self.den_w[..n]);
        let (inv_v, den_v) = (&mut self.inv_v[..n], &mut self.den_v[..n]);
        let c2 = c * c;
        // Pass 1: continuants. inv_w[i] and inv_v[r] hold the numerators P_i, Q_r for now,
        // den_w[i] and den_v[r] the denominators P_{i−1}, Q_{r+1} (in the same scale).
        let (mut p0, mut p1) = (1.0, 1.0 - c * jd[0]);
        let (mut q0, mut q1) = (1.0, 1.0 - c * jd[n - 1]);
        inv_w[0] = p1;
        den_w[0] = 1.0;
        inv_v[n - 1] = q1;
        den_v[n - 1] = 1.0;
        for j in 1..n {
            let p = (1.0 - c * jd[j]) * p1 - c2 * (jl[j] * ju[j - 1]) * p0;
            inv_w[j] = p;
            den_w[j] = p1;
            p0 = p1;
            p1 = p;
            let r = n - 1 - j;
            let qq = (1.0 - c * jd[r]) * q1 - c2 * (ju[r] * jl[r + 1]) * q0;
            inv_v[r] = qq;
            den_v[r] = q1;
            q0 = q1;
            q1 = qq;
            if j % 8 == 0 {
                let sp = power_of_two_scale(p1);
                p0 *= sp;
                p1 *= sp;
                let sq = power_of_two_scale(q1);
                q0 *= sq;
                q1 *= sq;
            }
        }
        // Pass 2: the inverted pivots as ratios.
        let mut ok = true;
        for i in 0..n {
            let a = den_w[i] / inv_w[i];
            let b = den_v[i] / inv_v[i];
            ok &= a.is_finite() & (a != 0.0) & b.is_finite() & (b != 0.0);
            inv_w[i] = a;
            inv_v[i] = b;
        }
        ok
    }

    fn factor_by_recurrence(&mut self, c: f64, jl: &[f64], jd: &[f64], ju: &[f64]) -> bool {
        let n = jd.len();
        let (inv_w, inv_v) = (&mut self.inv_w[..n], &mut self.inv_v[..n]);
        // Both recurrences advance in one loop: LU at row j, UL at row n − 1 − j.
        let mut w = 1.0 - c * jd[0];
        let mut v = 1.0 - c * jd[n - 1];
        let mut ok = w.is_finite() & (w != 0.0) & v.is_finite() & (v != 0.0);
        let mut iw = 1.0 / w;
        let mut iv = 1.0 / v;
        inv_w[0] = iw;
        inv_v[n - 1] = iv;
        for j in 1..n {
            // LU, row j: w_j = d_j − a_j e_{j−1} / w_{j−1}.
            w = (1.0 - c * jd[j]) - (c * jl[j]) * (c * ju[j - 1]) * iw;
            iw = 1.0 / w;
            inv_w[j] = iw;
            // UL, row r = n − 1 − j: v_r = d_r − e_r a_{r+1} / v_{r+1}.
            let r = n - 1 - j;
            v = (1.0 - c * jd[r]) - (c * ju[r]) * (c * jl[r + 1]) * iv;
            iv = 1.0 / v;
            inv_v[r] = iv;
            ok &= w.is_finite() & (w != 0.0) & v.is_finite() & (v != 0.0);
        }
        ok
    }

    /// Solve in place by LU (down, then up) for the bands the matrix was factored from; `x`
    /// holds the right-hand side on entry.
    pub fn solve_lu(&self, jl: &[f64], ju: &[f64], x: &mut [f64]) {
        let n = x.len();
        let (c, inv_w) = (self.c, &self.inv_w[..n]);
        let mut y = x[0];
        x[0] = y * inv_w[0];
        for i in 1..n {
            y = x[i] + c * jl[i] * inv_w[i - 1] * y;
            x[i] = y * inv_w[i];
        }
        let mut next = x[n - 1];
        for i in (0..n - 1).rev() {
            next = x[i] + c * ju[i] * inv_w[i] * next;
            x[i] = next;
        }
    }

    /// Solve in place by UL (up, then down) for the bands the matrix was factored from; `x`
    /// holds the right-hand side on entry.
    pub fn solve_ul(&self, jl: &[f64], ju: &[f64], x: &mut [f64]) {
        let n = x.len();
        let (c, inv_v) = (self.c, &self.inv_v[..n]);
        let mut y = x[n - 1];
        x[n - 1] = y * inv_v[n - 1];
        for i in (0..n - 1).rev() {
            y = x[i] + c * ju[i] * inv_v[i + 1] * y;
            x[i] = y * inv_v[i];
        }
        let mut prev = x[0];
        for i in 1..n {
            prev = x[i] + c * jl[i] * inv_v[i] * prev;
            x[i] = prev;
        }
    }
}

/// A power of two that brings `x` near 1 (1 for zero, subnormal or non-finite `x`): exact
/// scaling, no rounding.
fn power_of_two_scale(x: f64) -> f64 {
    let e = (x.to_bits() >> 52) & 0x7ff;
    if e == 0 || e == 0x7ff {
        return 1.0;
    }
    f64::from_bits((2046 - e.min(2045)) << 52)
}

/// One-shot Thomas solve (factor and solve together), the baseline the benchmarks compare
/// against. `scratch` must have the length of `diag`. `x` holds the right-hand side on entry.
pub fn solve_tridiagonal(
    lower: &[f64],
    diag: &[f64],
    upper: &[f64],
    x: &mut [f64],
    scratch: &mut [f64],
) {
    let n = diag.len();
    let mut w = diag[0];
    let mut c_prev = upper[0] / w;
    scratch[0] = c_prev;
    let mut x_prev = x[0] / w;
    x[0] = x_prev;
    for i in 1..n {
        w = diag[i] - lower[i] * c_prev;
        c_prev = upper[i] / w;
        scratch[i] = c_prev;
        x_prev = (x[i] - lower[i] * x_prev) / w;
        x[i] = x_prev;
    }
    let mut next = x[n - 1];
    for i in (0..n - 1).rev() {
        next = x[i] - scratch[i] * next;
        x[i] = next;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn factored_and_one_shot_agree_with_known_solution() {
        // A x = r with x = (1, 2, 3, 4) and A = tridiag(-1, 4, -1): r computed by hand.
        let lower = [0.0, -1.0, -1.0, -1.0];
        let diag = [4.0; 4];
        let upper = [-1.0, -1.0, -1.0, 0.0];
        let r = [4.0 - 2.0, -1.0 + 8.0 - 3.0, -2.0 + 12.0 - 4.0, -3.0 + 16.0];
        let mut f = Factored::with_len(4);
        assert!(f.factor(&lower, &diag, &upper));
        let mut x = r;
        f.solve(&mut x);
        let mut y = r;
        let mut s = [0.0; 4];
        solve_tridiagonal(&lower, &diag, &upper, &mut y, &mut s);
        for i in 0..4 {
            assert!((x[i] - (i + 1) as f64).abs() < 1e-14);
            assert!((y[i] - (i + 1) as f64).abs() < 1e-14);
        }
    }

    #[test]
    fn two_way_factors_solve_the_same_system_both_ways() {
        // I − c J with J = tridiag(1, −2, 1) on 7 unknowns, c = 0.3, and a non-symmetric
        // perturbation; x = (1, −2, 3, …) and r = A x computed directly.
        let n = 7;
        let c = 0.3;
        let jl: Vec<f64> = (0..n).map(|i| 1.0 + 0.1 * i as f64).collect();
        let jd: Vec<f64> = (0..n).map(|i| -2.0 - 0.05 * i as f64).collect();
        let ju: Vec<f64> = (0..n).map(|i| 0.9 + 0.02 * i as f64).collect();
        let x: Vec<f64> = (0..n)
            .map(|i| (i + 1) as f64 * if i % 2 == 0 { 1.0 } else { -1.0 })
            .collect();
        let mut r = vec![0.0; n];
        for i in 0..n {
            r[i] = (1.0 - c * jd[i]) * x[i];
            if i > 0 {
                r[i] -= c * jl[i] * x[i - 1];
            }
            if i + 1 < n {
                r[i] -= c * ju[i] * x[i + 1];
            }
        }
        let mut tw = TwoWay::with_len(n);
        assert!(tw.factor(c, &jl, &jd, &ju));
        let mut a = r.clone();
        tw.solve_lu(&jl, &ju, &mut a);
        let mut b = r.clone();
        tw.solve_ul(&jl, &ju, &mut b);
        for i in 0..n {
            assert!(
                (a[i] - x[i]).abs() < 1e-13,
                "LU row {i}: {} vs {}",
                a[i],
                x[i]
            );
            assert!(
                (b[i] - x[i]).abs() < 1e-13,
                "UL row {i}: {} vs {}",
                b[i],
                x[i]
            );
        }
        // Large steps on tiny cells: entries of 1e12 per row; the continuants are rescaled and
        // agree with the classic recurrence.
        let big: Vec<f64> = (0..40).map(|i| 1e12 * (1.0 + 0.01 * i as f64)).collect();
        let bigd: Vec<f64> = big.iter().map(|b| -2.0 * b).collect();
        let mut fast = TwoWay::with_len(40);
        assert!(fast.factor_by_continuants(1.0, &big, &bigd, &big));
        let mut slow = TwoWay::with_len(40);
        assert!(slow.factor_by_recurrence(1.0, &big, &bigd, &big));
        for i in 0..40 {
            for (a, b) in [
                (fast.inv_w[i], slow.inv_w[i]),
                (fast.inv_v[i], slow.inv_v[i]),
            ] {
                assert!((a - b).abs() <= 1e-12 * b.abs(), "row {i}: {a} vs {b}");
            }
        }
        // A singular matrix (zero pivot) is reported, not divided through.
        let zero = vec![0.0; n];
        assert!(!tw.factor(1.0, &zero, &vec![1.0; n], &zero));
    }
}
