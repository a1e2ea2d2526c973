//! One TR-BDF2 step of a linear problem, F(u, t) = J u + b(t), as four fused sweeps.
//!
//! In increment form (round-off then scales with the change over the step, not with the
//! state, which keeps a sealed sample's amount constant to round-off), with c = γh/2 and
//! b₂ = (1 − γ)² / (γ (2 − γ)):
//!
//! ```text
//!   (I − cJ) δ₁ = c (F_n + J u_n + b(t + γh)),        u_γ = u_n + δ₁
//!   (I − cJ) δ₂ = b₂ δ₁ + c (J u_γ + b(t + h)),        u_{n+1} = u_γ + δ₂
//!   F_γ = δ₁ / c − F_n,    F_{n+1} = (δ₂ − b₂ δ₁) / c
//!   (I − cJ) e = 2k h (F_n / γ − F_γ / (γ (1 − γ)) + F_{n+1} / (1 − γ))      (error estimate)
//! ```
//!
//! The matrix is factored both ways ([`TwoWay`]), so the four tridiagonal solves run as
//!
//! ```text
//!   sweep A (down): right-hand side of stage 1, LU elimination of stage 1
//!   sweep B (up):   LU back-substitution of stage 1 → δ₁, u_γ; right-hand side of stage 2
//!                   (one row behind) and its UL elimination
//!   sweep C (down): UL back-substitution of stage 2 → δ₂, u_{n+1}, F_{n+1}, Σ V_i u_i;
//!                   right-hand side of the error estimate and its LU elimination
//!   sweep D (up):   LU back-substitution of the estimate and its weighted norm
//! ```
//!
//! Each sweep carries at most two independent one-multiply-add recurrences, so the processor
//! overlaps them; a step costs little more than one plain tridiagonal solve (see
//! docs/performance.md). Without the error estimate (fixed or replayed steps) sweep D and the
//! estimate's work in sweep C are skipped.

// Kernels index several arrays in step; index loops read best here.
#![allow(clippy::needless_range_loop)]

use super::tridiag::TwoWay;

/// The Jacobian bands of F: row i reads `jl[i] u[i−1] + jd[i] u[i] + ju[i] u[i+1]`.
pub(crate) struct Bands<'a> {
    pub jl: &'a [f64],
    pub jd: &'a [f64],
    pub ju: &'a [f64],
}

/// The forcing b(t) of the two stages: the volume source (interior cells) and the totals in
/// the first and last cells (source plus end terms), at t + γh and at t + h.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Forcing {
    pub interior: f64,
    pub first_g: f64,
    pub last_g: f64,
    pub first_1: f64,
    pub last_1: f64,
}

/// The state vectors of the step. On entry `u` holds u_n and `f_n` holds F(u_n); on return
/// `u` holds u_{n+1}, `u_n` u_n, `u_g` u_γ, `f_1` F(u_{n+1}) and, with the estimate, `f_g`
/// F(u_γ) and `est` the filtered local error estimate. `delta` is scratch.
pub(crate) struct Vectors<'a> {
    pub u: &'a mut [f64],
    pub u_n: &'a mut [f64],
    pub u_g: &'a mut [f64],
    pub f_n: &'a [f64],
    pub f_g: &'a mut [f64],
    pub f_1: &'a mut [f64],
    pub est: &'a mut [f64],
    pub delta: &'a mut [f64],
}

/// Weight of the error norm: the volume-weighted RMS of the estimate,
/// `√(Σ V_i e_i² / Σ V_i)` (the discrete L² norm of the error, independent of how finely the
/// grid is refined near a face), relative to `tol · s`, with
/// `s = max(scale, max_i |u_i − reference|)` (`max(|reference|, 1)` when that is 0): the span
/// the values cover, not their level. `measure_total` is `Σ V_i`.
#[derive(Debug, Clone, Copy)]
pub(crate) struct ErrorWeights {
    pub tolerance: f64,
    pub scale: f64,
    pub reference: f64,
    pub measure_total: f64,
}

/// What a step reports.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Outcome {
    /// Every new value is finite.
    pub finite: bool,
    /// Σ measures_i u_{n+1,i} (times the shape's measure factor: the amount).
    pub measure_sum: f64,
    /// Volume-weighted RMS error estimate relative to `tol · s` (0 without the estimate).
    pub error_norm: f64,
}

/// TR-BDF2 constants (γ = 2 − √2; Bank et al. 1985, Hosea & Shampine 1996).
pub(crate) struct Constants {
    pub gamma: f64,
    pub err_coef: f64,
}

/// One linear TR-BDF2 step of size h with c = γh/2 on a matrix factored for that c. `ESTIMATE`
/// selects the error estimate. Grids have at least two cells (three sweeps below peel the
/// end rows).
#[allow(clippy::too_many_arguments)]
pub(crate) fn step<const ESTIMATE: bool>(
    tw: &TwoWay,
    bands: &Bands<'_>,
    forcing: Forcing,
    k: &Constants,
    c: f64,
    h: f64,
    measures: &[f64],
    v: Vectors<'_>,
    weights: ErrorWeights,
) -> Outcome {
    let n = v.u.len();
    debug_assert!(n >= 2);
    let gamma = k.gamma;
    let b2 = (1.0 - gamma) * (1.0 - gamma) / (gamma * (2.0 - gamma));
    let inv_c = 1.0 / c;
    let (jl, jd, ju) = (&bands.jl[..n], &bands.jd[..n], &bands.ju[..n]);
    let (inv_w, inv_v) = (&tw.inv_w[..n], &tw.inv_v[..n]);
    // The multipliers of [`TwoWay`], formed where used (off the loop-carried chains):
    // m_i = a_i/w_{i−1}, g_i = e_i/w_i, k_i = e_i/v_{i+1}, q_i = a_i/v_i with a = −c J_lower,
    // e = −c J_upper.
    let m = |i: usize| -c * jl[i] * inv_w[i - 1];
    let g = |i: usize| -c * ju[i] * inv_w[i];
    let kk = |i: usize| -c * ju[i] * inv_v[i + 1];
    let q = |i: usize| -c * jl[i] * inv_v[i];
    let u = &mut v.u[..n];
    let u_n = &mut v.u_n[..n];
    let u_g = &mut v.u_g[..n];
    let f_n = &v.f_n[..n];
    let f_g = &mut v.f_g[..n];
    let f_1 = &mut v.f_1[..n];
    let est = &mut v.est[..n];
    let z = &mut v.delta[..n];
    let measures = &measures[..n];
    let src = forcing.interior;

    // Sweep A (down): r₁ = c (F_n + J u_n + b(t+γh)); LU elimination; z = y / w.
    let mut y = c * (f_n[0] + jd[0] * u[0] + ju[0] * u[1] + forcing.first_g);
    z[0] = y * inv_w[0];
    u_n[0] = u[0];
    for i in 1..n - 1 {
        let r = c * (f_n[i] + jl[i] * u[i - 1] + jd[i] * u[i] + ju[i] * u[i + 1] + src);
        y = r - m(i) * y;
        z[i] = y * inv_w[i];
        u_n[i] = u[i];
    }
    {
        let i = n - 1;
        let r = c * (f_n[i] + jl[i] * u[i - 1] + jd[i] * u[i] + forcing.last_g);
        y = r - m(i) * y;
        z[i] = y * inv_w[i];
        u_n[i] = u[i];
    }

    // Sweep B (up): δ₁ by LU back-substitution (into est as b₂ δ₁, and u_γ); the stage-2
    // right-hand side one row behind, r₂ = b₂ δ₁ + c (J u_γ + b(t+h)), and its UL
    // elimination, whose z₂ overwrites z (row i+1 of z is no longer needed).
    let mut d1 = z[n - 1];
    u_g[n - 1] = u_n[n - 1] + d1;
    est[n - 1] = b2 * d1;
    if ESTIMATE {
        f_g[n - 1] = d1 * inv_c - f_n[n - 1];
    }
    let mut y2;
    {
        // Row n − 2 of δ₁, then row n − 1 of stage 2.
        let i = n - 2;
        d1 = z[i] - g(i) * d1;
        u_g[i] = u_n[i] + d1;
        est[i] = b2 * d1;
        if ESTIMATE {
            f_g[i] = d1 * inv_c - f_n[i];
        }
        let j = n - 1;
        let r = est[j] + c * (jl[j] * u_g[j - 1] + jd[j] * u_g[j] + forcing.last_1);
        y2 = r;
        z[j] = y2 * inv_v[j];
    }
    for i in (0..n - 2).rev() {
        d1 = z[i] - g(i) * d1;
        u_g[i] = u_n[i] + d1;
        est[i] = b2 * d1;
        if ESTIMATE {
            f_g[i] = d1 * inv_c - f_n[i];
        }
        let j = i + 1;
        let r = est[j] + c * (jl[j] * u_g[i] + jd[j] * u_g[j] + ju[j] * u_g[j + 1] + src);
        y2 = r - kk(j) * y2;
        z[j] = y2 * inv_v[j];
    }
    {
        let r = est[0] + c * (jd[0] * u_g[0] + ju[0] * u_g[1] + forcing.first_1);
        y2 = r - kk(0) * y2;
        z[0] = y2 * inv_v[0];
    }

    // Sweep C (down): δ₂ by UL back-substitution; u_{n+1}, F_{n+1}, Σ V u; with the
    // estimate, its right-hand side and LU elimination (into est, whose row i is consumed
    // here first).
    let gamma1 = 1.0 - gamma;
    let (e0, e1, e2) = (
        2.0 * k.err_coef * h / gamma,
        2.0 * k.err_coef * h / (gamma * gamma1),
        2.0 * k.err_coef * h / gamma1,
    );
    let mut d2 = 0.0;
    let mut ye = 0.0;
    let mut sum = 0.0;
    let mut umax = 0.0f64;
    let reference = weights.reference;
    for i in 0..n {
        let qi = if i > 0 { q(i) } else { 0.0 };
        d2 = z[i] - qi * d2;
        let x = u_g[i] + d2;
        u[i] = x;
        sum += measures[i] * x;
        let f1 = (d2 - est[i]) * inv_c;
        f_1[i] = f1;
        if ESTIMATE {
            umax = umax.max((x - reference).abs());
            let r = e0 * f_n[i] - e1 * f_g[i] + e2 * f1;
            let mi = if i > 0 { m(i) } else { 0.0 };
            ye = r - mi * ye;
            est[i] = ye * inv_w[i];
        }
    }
    let finite = sum.is_finite() && umax.is_finite();
    if !ESTIMATE || !finite {
        return Outcome {
            finite,
            measure_sum: sum,
            error_norm: 0.0,
        };
    }

    // Sweep D (up): the estimate's LU back-substitution and its weighted RMS norm.
    let s = weights.scale.max(umax);
    let s = if s > 0.0 { s } else { reference.abs().max(1.0) };
    let mut e = est[n - 1];
    let mut acc = measures[n - 1] * e * e;
    for i in (0..n - 1).rev() {
        e = est[i] - g(i) * e;
        est[i] = e;
        acc += measures[i] * e * e;
    }
    Outcome {
        finite,
        measure_sum: sum,
        error_norm: (acc / weights.measure_total).sqrt() / (weights.tolerance * s),
    }
}
