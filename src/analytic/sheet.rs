//! Plane sheet with both faces held at a constant value (Dirichlet), and permeation through a
//! membrane.
//!
//! Convention: the sheet occupies `0 ≤ x ≤ L` (`L` the FULL thickness); Crank's sheet
//! `−l < x < l` has `l = L/2`. The dimensionless time is `τ = D t / L²` (= `D t / (4 l²)`).
//! The sheet starts uniformly at `u0` and both faces are held at `us` from `t = 0`.
//!
//! A sheet of thickness `L` sealed (impermeable) on one face is exactly one half of a
//! symmetric sheet of thickness `2L` with both faces exposed; [`Faces::effective_thickness`]
//! applies that doubling.
//!
//! Uptake (Crank eq. 4.18, long time, and the ierfc series of Crank §4.3.2, short time):
//!
//! `M_t/M_∞ = 1 − Σ_{n≥0} 8/((2n+1)² π²) exp(−(2n+1)² π² τ)`
//!
//! `M_t/M_∞ = 4 √τ [π^{−1/2} + 2 Σ_{n≥1} (−1)ⁿ ierfc(n / (2√τ))]`
//!
//! Both series are summed until the next term is below 1e-17 of the sum; the short-time series
//! is used for `τ < 0.05`, where it needs at most four terms, the long-time series above, where
//! it needs at most five. The two agree to about 1e-16 on their overlap (see the tests), so the
//! switch is invisible and the result is accurate to ~1e-15 relative down to `τ → 0`.
//!
//! Profile (Crank eqs. 4.16 and 4.17, equation numbers from memory), with `ξ = x/L`:
//!
//! `(u − u0)/(us − u0) = Σ_{n≥0} (−1)ⁿ [erfc((n + 1 − ξ)/(2√τ)) + erfc((n + ξ)/(2√τ))]` (short time)
//!
//! `(u − u0)/(us − u0) = 1 − (4/π) Σ_{n≥0} (−1)ⁿ/(2n+1) exp(−(2n+1)² π² τ) cos((2n+1) π (ξ − ½))`
//!
//! Permeation (membrane `0 ≤ x ≤ L`, initially empty, `u = C1` at `x = 0` and `u = 0` at
//! `x = L` from `t = 0`), cumulative amount through unit area (Crank eq. 4.24a, from memory):
//!
//! `Q_t / (L C1) = τ − 1/6 − (2/π²) Σ_{n≥1} (−1)ⁿ/n² exp(−n² π² τ)`,
//!
//! whose late-time asymptote crosses `Q = 0` at the time lag `θ = L²/(6D)`. At short times the
//! same quantity is summed from the image solution (derived here by integrating the exit flux
//! `2 C1 √(D/(πt)) Σ_{n≥0} exp(−(2n+1)² L²/(4Dt))`):
//!
//! `Q_t / (L C1) = 4 √τ Σ_{n≥0} ierfc((2n+1)/(2√τ))`,
//!
//! used for `τ < 0.1`; the two forms agree to ~1e-16 on their overlap (tested).
//!
//! References: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §4.3 (pp. 47–49) and
//! §4.3.4 (membrane, time lag).

use super::special::erfc;
use super::{check_finite, check_non_negative, check_positive, ierfc, FRAC_1_SQRT_PI};
use crate::error::{Error, Result};
use std::f64::consts::PI;

/// Which faces of a plane sheet take part in the exchange.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Faces {
    /// Both faces exposed to the same constant value.
    Both,
    /// One face exposed, the other sealed (zero flux): equivalent to half of a sheet of twice
    /// the thickness with both faces exposed.
    OneSealed,
}

impl Faces {
    /// The thickness (m) of the equivalent symmetric sheet with both faces exposed: `L` for
    /// [`Faces::Both`], `2L` for [`Faces::OneSealed`].
    pub fn effective_thickness(self, thickness: f64) -> f64 {
        match self {
            Faces::Both => thickness,
            Faces::OneSealed => 2.0 * thickness,
        }
    }
}

const SWITCH_UPTAKE: f64 = 0.05;
const SWITCH_PROFILE: f64 = 0.05;
const SWITCH_PERMEATION: f64 = 0.1;
const MAX_TERMS: usize = 100_000;

/// `M_t/M_∞` by the long-time series (Crank eq. 4.18) at `τ = D t / L²`, summed to
/// convergence. Slow for very small `τ` (about `1/√τ` terms); prefer [`uptake`].
pub fn uptake_long_series(tau: f64) -> f64 {
    if tau <= 0.0 {
        return 0.0;
    }
    let mut sum = 0.0;
    for n in 0..MAX_TERMS {
        let k = (2 * n + 1) as f64;
        let term = 8.0 / (k * k * PI * PI) * (-(k * k) * PI * PI * tau).exp();
        sum += term;
        if term < 1e-17 * sum {
            break;
        }
    }
    1.0 - sum
}

/// `M_t/M_∞` by the short-time ierfc series (Crank §4.3.2) at `τ = D t / L²`.
/// Accurate for `τ` up to about 0.3; prefer [`uptake`].
pub fn uptake_short_series(tau: f64) -> f64 {
    if tau <= 0.0 {
        return 0.0;
    }
    let s = tau.sqrt();
    let mut sum = FRAC_1_SQRT_PI;
    for n in 1..MAX_TERMS {
        let sign = if n % 2 == 1 { -1.0 } else { 1.0 };
        let term = 2.0 * sign * ierfc(n as f64 / (2.0 * s));
        sum += term;
        if term.abs() < 1e-17 * sum.abs() {
            break;
        }
    }
    4.0 * s * sum
}

/// `M_t/M_∞` of a plane sheet of full thickness `L`, both faces at a constant value, at
/// `τ = D t / L²`: the short-time series for `τ < 0.05`, the long-time series above
/// (accurate to ~1e-15 everywhere). `τ ≤ 0` gives 0.
pub fn uptake(tau: f64) -> f64 {
    if tau < SWITCH_UPTAKE {
        uptake_short_series(tau)
    } else {
        uptake_long_series(tau)
    }
}

/// `M_t/M_∞` of a sheet of thickness `thickness` (m) with diffusion coefficient `d` (m²/s) at
/// time `t` (s), with one or both faces exposed ([`Faces`]).
pub fn uptake_si(d: f64, t: f64, thickness: f64, faces: Faces) -> Result<f64> {
    check_positive("diffusion_coefficient", d)?;
    check_non_negative("time", t)?;
    check_positive("thickness", thickness)?;
    let l = faces.effective_thickness(thickness);
    Ok(uptake(d * t / (l * l)))
}

/// Reduced concentration `(u − u0)/(us − u0)` at `ξ = x/L` (0 ≤ ξ ≤ 1) and `τ = D t / L²` in
/// a sheet with both faces at `us` (Crank eqs. 4.16/4.17; short-time erfc series for
/// `τ < 0.05`). For a sheet sealed at `x = L`, use `ξ = x/(2L)` and `τ = D t/(2L)²`.
/// At `τ = 0` the value is 0 inside and 1 on the faces.
pub fn profile(tau: f64, xi: f64) -> f64 {
    if tau <= 0.0 {
        return if xi <= 0.0 || xi >= 1.0 { 1.0 } else { 0.0 };
    }
    if tau < SWITCH_PROFILE {
        let w = 2.0 * tau.sqrt();
        let mut sum = 0.0;
        for n in 0..MAX_TERMS {
            let sign = if n % 2 == 0 { 1.0 } else { -1.0 };
            let nn = n as f64;
            let term = sign * (erfc((nn + 1.0 - xi) / w) + erfc((nn + xi) / w));
            sum += term;
            if term.abs() < 1e-18 && nn > 1.0 {
                break;
            }
        }
        sum
    } else {
        let mut sum = 0.0;
        for n in 0..MAX_TERMS {
            let k = (2 * n + 1) as f64;
            let sign = if n % 2 == 0 { 1.0 } else { -1.0 };
            let decay = (-(k * k) * PI * PI * tau).exp();
            sum += sign / k * decay * (k * PI * (xi - 0.5)).cos();
            if decay < 1e-18 {
                break;
            }
        }
        1.0 - 4.0 / PI * sum
    }
}

/// Concentration `u(x, t)` in a sheet of thickness `thickness` (m), initially `u0`, both faces
/// held at `us` (any unit), with diffusion coefficient `d` (m²/s); `0 ≤ x ≤ thickness` (m).
pub fn profile_si(u0: f64, us: f64, d: f64, t: f64, thickness: f64, x: f64) -> Result<f64> {
    check_finite("initial_value", u0)?;
    check_finite("surface_value", us)?;
    check_positive("diffusion_coefficient", d)?;
    check_non_negative("time", t)?;
    check_positive("thickness", thickness)?;
    if !(x.is_finite() && (0.0..=thickness).contains(&x)) {
        return Err(Error::setting(
            "position",
            format!("expected 0 <= x <= {thickness} m, found {x}"),
        ));
    }
    let tau = d * t / (thickness * thickness);
    Ok(u0 + (us - u0) * profile(tau, x / thickness))
}

/// Reduced cumulative permeation `Q_t / (L C1)` at `τ = D t / L²`: the image form
/// [`permeation_short_series`] for `τ < 0.1`, Crank eq. 4.24a ([`permeation_long_series`])
/// above. `τ ≤ 0` gives 0.
pub fn permeation(tau: f64) -> f64 {
    if tau < SWITCH_PERMEATION {
        permeation_short_series(tau)
    } else {
        permeation_long_series(tau)
    }
}

/// `Q_t / (L C1) = 4 √τ Σ_{n≥0} ierfc((2n+1)/(2√τ))` (image solution; good for `τ ≲ 0.5`).
pub fn permeation_short_series(tau: f64) -> f64 {
    if tau <= 0.0 {
        return 0.0;
    }
    let s = tau.sqrt();
    let mut sum = 0.0;
    for n in 0..MAX_TERMS {
        let term = ierfc((2 * n + 1) as f64 / (2.0 * s));
        sum += term;
        if term <= 1e-17 * sum {
            break;
        }
    }
    4.0 * s * sum
}

/// `Q_t / (L C1) = τ − 1/6 − (2/π²) Σ_{n≥1} (−1)ⁿ/n² exp(−n² π² τ)` (Crank eq. 4.24a, from
/// memory); loses relative accuracy as `τ → 0`, where it cancels to zero.
pub fn permeation_long_series(tau: f64) -> f64 {
    if tau <= 0.0 {
        return 0.0;
    }
    let mut sum = 0.0;
    for n in 1..MAX_TERMS {
        let nn = n as f64;
        let sign = if n % 2 == 1 { -1.0 } else { 1.0 };
        let decay = (-nn * nn * PI * PI * tau).exp();
        sum += sign / (nn * nn) * decay;
        if decay < 1e-18 {
            break;
        }
    }
    tau - 1.0 / 6.0 - 2.0 / (PI * PI) * sum
}

/// Cumulative amount per unit area `Q_t` (concentration unit × m) that has passed through a
/// membrane of thickness `thickness` (m), upstream value `c1`, downstream 0, initially empty.
pub fn permeation_si(c1: f64, d: f64, thickness: f64, t: f64) -> Result<f64> {
    check_finite("upstream_value", c1)?;
    check_positive("diffusion_coefficient", d)?;
    check_positive("thickness", thickness)?;
    check_non_negative("time", t)?;
    Ok(thickness * c1 * permeation(d * t / (thickness * thickness)))
}

/// Time lag `θ = L²/(6D)` (s) of a membrane of thickness `thickness` (m) (Crank §4.3.4).
pub fn time_lag(d: f64, thickness: f64) -> Result<f64> {
    check_positive("diffusion_coefficient", d)?;
    check_positive("thickness", thickness)?;
    Ok(thickness * thickness / (6.0 * d))
}
