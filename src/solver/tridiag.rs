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
}
