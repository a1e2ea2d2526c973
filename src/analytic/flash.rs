//! Rear-face temperature rise of a slab after an instantaneous uniform pulse on the front face
//! (adiabatic faces).
//!
//! With `ω = π² α t / L²` (α the diffusivity in m²/s, `L` the thickness in m):
//!
//! `V(ω) = T_rear / T_max = 1 + 2 Σ_{n≥1} (−1)ⁿ exp(−n² ω)` (Parker et al. 1961, equation from
//! memory).
//!
//! For `ω < π` the Jacobi imaginary transformation of this theta series is summed instead:
//! `V(ω) = 2 √(π/ω) Σ_{k≥0} exp(−(2k+1)² π² / (4ω))`, which converges fast at small `ω`;
//! both forms need at most five terms and agree to ~1e-16 (tested). The half-rise time gives
//! `α = c L² / t½` with `c = ω½/π² ≈ 0.138785` ([`half_rise_coefficient`]).
//!
//! References: W. J. Parker, R. J. Jenkins, C. P. Butler, G. L. Abbott, J. Appl. Phys. 32 (1961)
//! 1679; E. T. Whittaker and G. N. Watson, *A Course of Modern Analysis*, §21.51 (theta
//! transformation).

use super::{check_non_negative, check_positive, find_root};
use crate::error::{Error, Result};
use std::f64::consts::PI;

/// `V(ω)`, the rear-face rise as a fraction of its final value, at `ω = π² α t / L²`.
/// `ω ≤ 0` gives 0.
pub fn rear_face_rise(omega: f64) -> f64 {
    if omega < PI {
        rear_face_rise_theta(omega)
    } else {
        rear_face_rise_series(omega)
    }
}

/// `V(ω)` by the transformed series `2 √(π/ω) Σ_{k≥0} exp(−(2k+1)² π²/(4ω))` (fast for small
/// `ω`; exact for every `ω > 0`). `ω ≤ 0` gives 0.
pub fn rear_face_rise_theta(omega: f64) -> f64 {
    if omega <= 0.0 {
        return 0.0;
    }
    let mut sum = 0.0;
    for k in 0..1000 {
        let m = (2 * k + 1) as f64;
        let term = (-(m * m) * PI * PI / (4.0 * omega)).exp();
        sum += term;
        if term < 1e-18 * sum || term == 0.0 {
            break;
        }
    }
    2.0 * (PI / omega).sqrt() * sum
}

/// `V(ω)` by the original series `1 + 2 Σ_{n≥1} (−1)ⁿ exp(−n² ω)` (fast for large `ω`).
/// `ω ≤ 0` gives 0.
pub fn rear_face_rise_series(omega: f64) -> f64 {
    if omega <= 0.0 {
        return 0.0;
    }
    let mut sum = 0.0;
    for n in 1..100_000 {
        let nn = n as f64;
        let decay = (-nn * nn * omega).exp();
        sum += if n % 2 == 1 { -decay } else { decay };
        if decay < 1e-18 {
            break;
        }
    }
    1.0 + 2.0 * sum
}

/// `V` for diffusivity `alpha` (m²/s), time `t` (s) after the pulse and thickness `L` (m).
pub fn rear_face_rise_si(alpha: f64, t: f64, thickness: f64) -> Result<f64> {
    check_positive("diffusivity", alpha)?;
    check_non_negative("time", t)?;
    check_positive("thickness", thickness)?;
    Ok(rear_face_rise(
        PI * PI * alpha * t / (thickness * thickness),
    ))
}

/// `α t / L²` at which the rear face reaches `fraction` (0 < fraction < 1) of its final rise.
pub fn alpha_t_over_l2_at_fraction(fraction: f64) -> Result<f64> {
    if !(fraction > 0.0 && fraction < 1.0) {
        return Err(Error::setting(
            "fraction",
            format!("expected a fraction strictly between 0 and 1, found {fraction}"),
        ));
    }
    // V rises monotonically from 0 to 1; V(0.05) < 1e-20 and V(60) > 1 − 1e-25.
    let w = find_root(|w| Ok(rear_face_rise(w) - fraction), 0.05, 60.0)?;
    Ok(w / (PI * PI))
}

/// The half-rise coefficient `c` in `α = c L² / t½` (exact root of `V(ω) = 1/2`, divided by π²).
pub fn half_rise_coefficient() -> Result<f64> {
    alpha_t_over_l2_at_fraction(0.5)
}
