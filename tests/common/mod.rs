//! Published series solutions shared by the synthetic-data tests, written here independently
//! of fickfit's solver so the tests compare the program with the literature.

use std::f64::consts::PI;

/// Crank 1975 eq. 4.18, τ = D t / L².
pub fn sheet_fraction(tau: f64) -> f64 {
    let mut s = 0.0;
    for n in 0..400 {
        let k = (2 * n + 1) as f64;
        s += 8.0 / (k * k * PI * PI) * (-(k * k) * PI * PI * tau).exp();
    }
    1.0 - s
}

/// Roots of β tan β = Bi, by bisection on (nπ, nπ + π/2).
pub fn robin_roots(bi: f64, count: usize) -> Vec<f64> {
    (0..count)
        .map(|n| {
            let (mut a, mut b) = (n as f64 * PI + 1e-12, n as f64 * PI + PI / 2.0 - 1e-12);
            for _ in 0..200 {
                let m = 0.5 * (a + b);
                if m * m.tan() - bi > 0.0 {
                    b = m;
                } else {
                    a = m;
                }
            }
            0.5 * (a + b)
        })
        .collect()
}

/// Crank 1975 eq. 4.55, T = D t / ℓ².
pub fn robin_fraction(t_reduced: f64, bi: f64, roots: &[f64]) -> f64 {
    1.0 - roots
        .iter()
        .map(|b| 2.0 * bi * bi * (-b * b * t_reduced).exp() / (b * b * (b * b + bi * bi + bi)))
        .sum::<f64>()
}

/// Crank 1975 eq. 4.24a: amount through the downstream face of a membrane, initially empty,
/// upstream face held at C1 and downstream face at 0 from t = 0, per unit area, in units of
/// L C1: Q_t/(L C1) = τ − 1/6 − (2/π²) Σ_{n≥1} (−1)ⁿ/n² exp(−n² π² τ), τ = D t/L².
#[allow(dead_code)]
pub fn permeation_amount(tau: f64) -> f64 {
    let mut s = 0.0;
    for n in 1..400 {
        let nf = n as f64;
        let sign = if n % 2 == 0 { 1.0 } else { -1.0 };
        s += sign / (nf * nf) * (-(nf * nf) * PI * PI * tau).exp();
    }
    tau - 1.0 / 6.0 - 2.0 / (PI * PI) * s
}
