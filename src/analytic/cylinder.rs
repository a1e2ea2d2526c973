//! Infinite solid cylinder of radius `a`, surface held at a constant value from `t = 0`, and the
//! Bessel functions it needs.
//!
//! With `τ = D t / a²` and `α_n` the positive zeros of `J0`:
//!
//! `M_t/M_∞ = 1 − Σ_{n≥1} (4/α_n²) exp(−α_n² τ)` (Crank eq. 5.52, equation number from memory).
//!
//! For `τ < 0.002` the series needs hundreds of zeros and loses relative accuracy (it computes
//! `1 − (sum near 1)`), so the short-time expansion is used instead. It follows from the
//! Laplace transform `M̄/M_∞ = 2 I1(√p)/(p^{3/2} I0(√p))` (`p` conjugate to `τ`) and the
//! large-argument expansion `I1(z)/I0(z) ~ Σ_k r_k z^{−k}`, whose coefficients follow from the
//! Riccati equation `R' = 1 − R/z − R²` satisfied by `R = I1/I0`:
//! `r_0 = 1`, `r_m = [(m−2) r_{m−1} − Σ_{i=1}^{m−1} r_i r_{m−i}] / 2` (so `r_1 = −1/2`,
//! `r_2 = r_3 = −1/8`). Term-by-term inversion gives
//!
//! `M_t/M_∞ ~ Σ_k 2 r_k τ^{(k+1)/2} / Γ((k+3)/2) = (4/√π) τ^{1/2} − τ − τ^{3/2}/(3√π) − ...`,
//!
//! which reproduces Crank's three-term short-time formula; the neglected part is of order
//! `exp(−1/τ)`. The two forms agree to ~1e-15 on `1e-3 ≤ τ ≤ 5e-3` (tested).
//!
//! `J0` and `J1` are computed by Miller's backward recurrence normalised with
//! `J0 + 2 Σ_k J_{2k} = 1` (power series for `|x| < 2`); the zeros start from McMahon's
//! asymptotic expansion `j ≈ β + 1/(8β) − 124/(3 (8β)³) + 120928/(15 (8β)⁵)`, `β = (n − ¼)π`
//! (A&S 9.5.12 with ν = 0), and are refined by Newton's method with `J0' = −J1`.
//!
//! References: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §5.3.2;
//! Abramowitz & Stegun 9.1.27 (recurrence), 9.1.46 (normalisation), 9.5.12 (McMahon),
//! Table 9.5 (zeros); W. H. Press et al., *Numerical Recipes*, §6.5 (Miller's algorithm).

use super::{check_non_negative, check_positive};
use crate::error::{Error, Result};
use std::f64::consts::PI;
use std::sync::OnceLock;

/// `(J0(x), J1(x))`, the Bessel functions of the first kind of orders 0 and 1, to about 1e-15
/// absolute for any finite `x`.
pub fn bessel_j0_j1(x: f64) -> (f64, f64) {
    let ax = x.abs();
    let (j0, j1) = if ax < 2.0 {
        // Power series: J0 = Σ (−x²/4)^k/(k!)², J1 = (x/2) Σ (−x²/4)^k/(k!(k+1)!).
        let q = -0.25 * ax * ax;
        let (mut t0, mut t1) = (1.0, 0.5 * ax);
        let (mut s0, mut s1) = (t0, t1);
        for k in 1..40 {
            let kf = k as f64;
            t0 *= q / (kf * kf);
            t1 *= q / (kf * (kf + 1.0));
            s0 += t0;
            s1 += t1;
            if t0.abs() < 1e-18 && t1.abs() < 1e-18 {
                break;
            }
        }
        (s0, s1)
    } else {
        miller(ax)
    };
    (j0, if x < 0.0 { -j1 } else { j1 })
}

fn miller(x: f64) -> (f64, f64) {
    // Start order: far enough beyond the turning point k = x that J_M(x) < 1e-30.
    let start = x + 40.0 + 12.0 * x.cbrt();
    let mut m = start.ceil() as usize;
    if m % 2 == 1 {
        m += 1;
    }
    let mut jp = 0.0; // J_{k+1}
    let mut jc = 1.0; // J_k, starting at k = m (even)
    let mut norm = 2.0 * jc;
    let mut j1 = 0.0;
    for k in (1..=m).rev() {
        let jm = 2.0 * k as f64 / x * jc - jp;
        jp = jc;
        jc = jm; // now J_{k-1}
        let order = k - 1;
        if order == 1 {
            j1 = jc;
        } else if order > 0 && order % 2 == 0 {
            norm += 2.0 * jc;
        }
        if jc.abs() > 1e250 {
            jc *= 1e-250;
            jp *= 1e-250;
            norm *= 1e-250;
            j1 *= 1e-250;
        }
    }
    norm += jc;
    (jc / norm, j1 / norm)
}

/// `J0(x)`; see [`bessel_j0_j1`].
pub fn bessel_j0(x: f64) -> f64 {
    bessel_j0_j1(x).0
}

/// `J1(x)`; see [`bessel_j0_j1`].
pub fn bessel_j1(x: f64) -> f64 {
    bessel_j0_j1(x).1
}

/// McMahon's asymptotic estimate of the `n`-th zero of `J0` (A&S 9.5.12, ν = 0).
pub fn j0_zero_mcmahon(n: usize) -> f64 {
    let beta = (n as f64 - 0.25) * PI;
    let e = 8.0 * beta;
    beta + 1.0 / e - 124.0 / (3.0 * e.powi(3)) + 120_928.0 / (15.0 * e.powi(5))
}

/// The `n`-th positive zero of `J0` (n = 1, 2, ...): McMahon's estimate refined by Newton.
pub fn j0_zero(n: usize) -> Result<f64> {
    if n == 0 {
        return Err(Error::setting("zero_index", "zeros are numbered from 1"));
    }
    let mut x = j0_zero_mcmahon(n);
    for _ in 0..50 {
        let (j0, j1) = bessel_j0_j1(x);
        let step = j0 / j1;
        x += step;
        if step.abs() <= 1e-16 * x {
            return Ok(x);
        }
    }
    // Newton may dither by one ulp around the root; accept the last iterate if it is a root.
    if bessel_j0(x).abs() < 1e-14 {
        Ok(x)
    } else {
        Err(Error::Internal(format!("zero {n} of J0 did not converge")))
    }
}

const CACHED_ZEROS: usize = 200;

fn zeros() -> &'static [f64] {
    static Z: OnceLock<Vec<f64>> = OnceLock::new();
    Z.get_or_init(|| {
        (1..=CACHED_ZEROS)
            .map(|n| j0_zero(n).unwrap_or_else(|_| j0_zero_mcmahon(n)))
            .collect()
    })
}

/// `M_t/M_∞` by the Bessel-zero series (Crank eq. 5.52) at `τ = D t / a²`, using up to 200
/// zeros (enough for ~1e-16 truncation when `τ ≥ 0.002`).
pub fn uptake_long_series(tau: f64) -> f64 {
    if tau <= 0.0 {
        return 0.0;
    }
    let mut sum = 0.0;
    for &a in zeros() {
        let decay = (-a * a * tau).exp();
        sum += 4.0 / (a * a) * decay;
        if decay < 1e-18 {
            break;
        }
    }
    1.0 - sum
}

fn short_coefficients() -> &'static [f64] {
    // c_k = 2 r_k / Γ((k+3)/2), k = 0..K.
    static C: OnceLock<Vec<f64>> = OnceLock::new();
    C.get_or_init(|| {
        const K: usize = 60;
        let mut r = vec![0.0; K + 1];
        r[0] = 1.0;
        for m in 1..=K {
            let mut conv = 0.0;
            for i in 1..m {
                conv += r[i] * r[m - i];
            }
            r[m] = ((m as f64 - 2.0) * r[m - 1] - conv) / 2.0;
        }
        // Γ(3/2) = √π/2, Γ(2) = 1, Γ(x + 1) = x Γ(x).
        let mut gam = vec![0.0; K + 1];
        for k in 0..=K {
            gam[k] = if k == 0 {
                0.5 * PI.sqrt()
            } else if k == 1 {
                1.0
            } else {
                gam[k - 2] * ((k as f64 + 3.0) / 2.0 - 1.0)
            };
        }
        r.iter().zip(&gam).map(|(rk, g)| 2.0 * rk / g).collect()
    })
}

/// `M_t/M_∞` by the short-time asymptotic expansion at `τ = D t / a²` (see module docs),
/// summed to its smallest term. Accurate to ~1e-16 relative for `τ ≤ 0.005`.
pub fn uptake_short_series(tau: f64) -> f64 {
    if tau <= 0.0 {
        return 0.0;
    }
    let s = tau.sqrt();
    let mut pow = s; // τ^{(k+1)/2}
    let mut sum = 0.0;
    let mut last = f64::INFINITY;
    for c in short_coefficients() {
        let term = c * pow;
        if term.abs() > last {
            break; // asymptotic series: stop before the terms start to grow
        }
        sum += term;
        last = term.abs();
        if term.abs() < 1e-17 * sum.abs() {
            break;
        }
        pow *= s;
    }
    sum
}

/// `M_t/M_∞` of an infinite cylinder at `τ = D t / a²` (short-time expansion below 0.002).
pub fn uptake(tau: f64) -> f64 {
    if tau < 0.002 {
        uptake_short_series(tau)
    } else {
        uptake_long_series(tau)
    }
}

/// `M_t/M_∞` of a cylinder of radius `radius` (m) at time `t` (s) with `D = d` (m²/s).
pub fn uptake_si(d: f64, t: f64, radius: f64) -> Result<f64> {
    check_positive("diffusion_coefficient", d)?;
    check_non_negative("time", t)?;
    check_positive("radius", radius)?;
    Ok(uptake(d * t / (radius * radius)))
}
