//! Plane sheet with a surface transfer (Robin) condition at both faces.
//!
//! Crank's convention (used by every function here unless its name says otherwise): the sheet
//! occupies `−l < x < l` (`l` the HALF-thickness), starts at `u0`, and exchanges with a
//! surrounding value `u_eq` through `−D ∂u/∂n = h (u − u_eq)` on both faces. The Biot number
//! is `Bi = h l / D` (Crank writes it `L`) and the dimensionless time is `T = D t / l²`.
//! With the FULL thickness `L = 2l` instead: `Bi = h L / (2D)` and `T = 4 D t / L²`;
//! [`biot_from_full_thickness`] and [`uptake_full_thickness`] take those inputs directly.
//!
//! Roots `β_n` of `β tan β = Bi` (one on each branch `((n−1)π, (n−½)π)`, n = 1, 2, ...) are
//! found by Brent's method on `g(β) = β sin β − Bi cos β`, which has no poles and changes sign
//! on every branch for any `Bi > 0`, then polished by one Newton step. This works from
//! `Bi = 1e-6` (`β_1 ≈ √Bi`) to `Bi = 1e6` (`β_n → (n−½)π`).
//!
//! Uptake (Crank eq. 4.55, p. 60):
//!
//! `M_t/M_∞ = 1 − Σ_n 2 Bi² exp(−β_n² T) / (β_n² (β_n² + Bi² + Bi))`.
//!
//! For `T < 0.025` the faces do not yet see each other (the first image term is of order
//! `exp(−1/T) < 5e-18`) and the exact semi-infinite solution with surface transfer is used,
//! doubled for two faces (Crank §3.3.3, from memory; derived by Laplace transform):
//!
//! `M_t/M_∞ = [erfcx(s) − 1 + 2 s/√π] / Bi`, `s = Bi √T`, `erfcx(s) = exp(s²) erfc(s)` ([`super::special::erfcx`]),
//!
//! with the bracket summed from its Taylor series `Σ_{k≥2} (−s)^k / Γ(k/2 + 1)` for `s < 2`
//! (no cancellation as `T → 0`, where `M_t/M_∞ → Bi T`). The two forms agree to ~1e-15 on
//! their overlap (tested). Limit `Bi → ∞` is the constant-surface sheet.
//!
//! References: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §4.3.5 (eq. 4.55, p. 60)
//! and §3.3; Abramowitz & Stegun 7.1.

use super::special::erfcx;
use super::{check_positive, check_tau, find_root, FRAC_1_SQRT_PI};
use crate::error::{Error, Result};
use std::f64::consts::{FRAC_PI_2, PI};

pub(crate) fn check_biot(biot: f64) -> Result<()> {
    if !(biot.is_finite() && biot > 0.0) {
        return Err(Error::setting(
            "biot",
            format!("expected a finite Biot number h l / D > 0, found {biot}"),
        ));
    }
    Ok(())
}

/// `Bi = h l / D` (dimensionless) from the transfer coefficient `h` (m/s), the HALF-thickness
/// `l` (m) and `D` (m²/s).
pub fn biot_from_half_thickness(h: f64, half_thickness: f64, d: f64) -> Result<f64> {
    check_positive("transfer_coefficient", h)?;
    check_positive("half_thickness", half_thickness)?;
    check_positive("diffusion_coefficient", d)?;
    Ok(h * half_thickness / d)
}

/// `Bi = h L / (2D)` (dimensionless) from the FULL thickness `L` (m): the same number as
/// [`biot_from_half_thickness`] with `l = L/2`.
pub fn biot_from_full_thickness(h: f64, thickness: f64, d: f64) -> Result<f64> {
    biot_from_half_thickness(h, 0.5 * thickness, d)
}

fn g(beta: f64, biot: f64) -> f64 {
    beta * beta.sin() - biot * beta.cos()
}

/// The `n`-th positive root (n = 1, 2, ...) of `β tan β = Bi`, on `((n−1)π, (n−½)π)`.
pub fn root(biot: f64, n: usize) -> Result<f64> {
    check_biot(biot)?;
    if n == 0 {
        return Err(Error::setting("root_index", "roots are numbered from 1"));
    }
    let lo = (n - 1) as f64 * PI;
    let hi = lo + FRAC_PI_2;
    let beta = find_root(|b| Ok(g(b, biot)), lo, hi)?;
    // One Newton step on g (g' = sin β + β cos β + Bi sin β), kept only if it stays inside.
    let dg = beta.sin() * (1.0 + biot) + beta * beta.cos();
    let polished = beta - g(beta, biot) / dg;
    Ok(if polished > lo && polished < hi && dg != 0.0 {
        polished
    } else {
        beta
    })
}

/// The first `count` roots of `β tan β = Bi`, in increasing order.
pub fn roots(biot: f64, count: usize) -> Result<Vec<f64>> {
    (1..=count).map(|n| root(biot, n)).collect()
}

/// `[erfcx(s) − 1 + 2 s/√π]` for `s ≥ 0`, without cancellation at small `s`.
fn surface_bracket(s: f64) -> f64 {
    if s < 2.0 {
        // Σ_{k≥2} (−s)^k / Γ(k/2 + 1): even k give s^{2m}/m!, odd k give −s^{2m+1}/Γ(m + 3/2).
        let s2 = s * s;
        let mut even = s2; // k = 2: s²/Γ(2)
        let mut odd = -s2 * s / (0.75 / FRAC_1_SQRT_PI); // k = 3: −s³/Γ(5/2), Γ(5/2) = 3√π/4
        let mut sum = even + odd;
        let mut m = 1.0;
        loop {
            m += 1.0;
            even *= s2 / m; // s^{2m}/m!
            odd *= s2 / (m + 0.5); // Γ(m + 3/2) = (m + 1/2) Γ(m + 1/2)
            sum += even + odd;
            if even.abs() + odd.abs() < 1e-18 * sum.abs() || m > 400.0 {
                break;
            }
        }
        sum
    } else {
        erfcx(s) - 1.0 + 2.0 * s * FRAC_1_SQRT_PI
    }
}

/// `M_t/M_∞` of the surface-transfer sheet at `Bi = h l / D` and `T = D t / l²`
/// (HALF-thickness `l`): [`uptake_short_time`] for `T < 0.025`, [`uptake_long_series`] above.
/// `T ≤ 0` gives 0.
pub fn uptake(biot: f64, tau_half_thickness: f64) -> Result<f64> {
    check_biot(biot)?;
    check_tau(tau_half_thickness)?;
    if tau_half_thickness < 0.025 {
        uptake_short_time(biot, tau_half_thickness)
    } else {
        uptake_long_series(biot, tau_half_thickness)
    }
}

/// Short-time form `[erfcx(s) − 1 + 2s/√π]/Bi`, `s = Bi √T` (two independent semi-infinite
/// faces); exact up to terms of order `exp(−1/T)`, so use it only for `T ≲ 0.03`.
pub fn uptake_short_time(biot: f64, tau_half_thickness: f64) -> Result<f64> {
    check_biot(biot)?;
    check_tau(tau_half_thickness)?;
    Ok(surface_bracket(biot * tau_half_thickness.sqrt()) / biot)
}

/// Root series (Crank eq. 4.55) at `Bi = h l / D`, `T = D t / l²`, summed until
/// `exp(−β_n² T) < 1e-18` (about `√(41/T)/π` roots: slow as `T → 0`).
pub fn uptake_long_series(biot: f64, tau_half_thickness: f64) -> Result<f64> {
    check_biot(biot)?;
    check_tau(tau_half_thickness)?;
    let t = tau_half_thickness;
    if t == 0.0 {
        return Ok(0.0);
    }
    let mut sum = 0.0;
    let mut n = 1;
    loop {
        let b = root(biot, n)?;
        let b2 = b * b;
        let decay = (-b2 * t).exp();
        sum += 2.0 * biot * biot * decay / (b2 * (b2 + biot * biot + biot));
        if decay < 1e-18 || n > 100_000 {
            break;
        }
        n += 1;
    }
    Ok(1.0 - sum)
}

/// `M_t/M_∞` of a surface-transfer sheet of FULL thickness `thickness` (m) with transfer
/// coefficient `h` (m/s), `D` (m²/s), at time `t` (s): converts to `Bi = h L/(2D)`,
/// `T = 4 D t / L²` and calls [`uptake`].
pub fn uptake_full_thickness(h: f64, d: f64, thickness: f64, t: f64) -> Result<f64> {
    let biot = biot_from_full_thickness(h, thickness, d)?;
    let l = 0.5 * thickness;
    uptake(biot, d * t / (l * l))
}
