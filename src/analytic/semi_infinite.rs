//! Semi-infinite medium `x ≥ 0`: constant surface value (erfc solution), its inverse
//! problems, and instantaneous plane sources (thin film, Gaussian solutions).
//!
//! Constant surface value `us` from `t = 0`, uniform start `u0` (Crank ch. 3, p. 32):
//!
//! `u(x, t) = u0 + (us − u0) erfc(x / (2√(D t)))`,
//!
//! uptake through unit area `M_t = 2 (us − u0) √(D t / π)` (Crank ch. 3, from memory).
//!
//! Thin film of `m` per unit area released at `t = 0` (Crank eq. 2.6, from memory):
//! in an infinite medium `u = m / (2√(π D t)) exp(−x²/(4 D t))`; deposited on the impermeable
//! surface of a semi-infinite medium (reflection doubles it) `u = m / √(π D t) exp(−x²/(4Dt))`.
//!
//! `erfc` and `erfc⁻¹` come from [`super::special`] (full double precision).
//!
//! References: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §2.2 and §3.2;
//! Abramowitz & Stegun ch. 7.

use super::special::erfc;
use super::{check_finite, check_non_negative, check_positive};
use crate::error::{Error, Result};
use std::f64::consts::PI;

/// `u(x, t) = u0 + (us − u0) erfc(x/(2√(D t)))` for `x ≥ 0` (m), `t ≥ 0` (s), `d` (m²/s).
/// At `t = 0` the value is `u0` for `x > 0` and `us` at `x = 0`.
pub fn erfc_profile(u0: f64, us: f64, d: f64, t: f64, x: f64) -> Result<f64> {
    check_finite("initial_value", u0)?;
    check_finite("surface_value", us)?;
    check_positive("diffusion_coefficient", d)?;
    check_non_negative("time", t)?;
    check_non_negative("position", x)?;
    if t == 0.0 {
        return Ok(if x == 0.0 { us } else { u0 });
    }
    Ok(u0 + (us - u0) * erfc(x / (2.0 * (d * t).sqrt())))
}

/// Amount taken up through unit area, `M_t = 2 (us − u0) √(D t/π)` (value unit × m).
pub fn erfc_uptake_per_area(u0: f64, us: f64, d: f64, t: f64) -> Result<f64> {
    check_finite("initial_value", u0)?;
    check_finite("surface_value", us)?;
    check_positive("diffusion_coefficient", d)?;
    check_non_negative("time", t)?;
    Ok(2.0 * (us - u0) * (d * t / PI).sqrt())
}

pub use super::special::inverse_erfc;

/// `z = x / (2√(D t))` at which the reduced value `(u − u0)/(us − u0)` equals `ratio`.
fn z_for(u0: f64, us: f64, u: f64) -> Result<f64> {
    check_finite("initial_value", u0)?;
    check_finite("surface_value", us)?;
    check_finite("target_value", u)?;
    if us == u0 {
        return Err(Error::setting(
            "surface_value",
            "surface and initial values are equal: the profile is flat",
        ));
    }
    let ratio = (u - u0) / (us - u0);
    if !(ratio > 0.0 && ratio < 1.0) {
        return Err(Error::setting(
            "target_value",
            format!(
                "the target {u} must lie strictly between the initial value {u0} and the \
                 surface value {us} (reduced value {ratio})"
            ),
        ));
    }
    inverse_erfc(ratio)
}

/// Time (s) at which the erfc profile reaches the value `u` at depth `x` (m):
/// `t = x² / (4 D z²)` with `erfc z = (u − u0)/(us − u0)`.
pub fn time_to_reach(u0: f64, us: f64, u: f64, x: f64, d: f64) -> Result<f64> {
    check_positive("position", x)?;
    check_positive("diffusion_coefficient", d)?;
    let z = z_for(u0, us, u)?;
    Ok(x * x / (4.0 * d * z * z))
}

/// Depth (m) at which the erfc profile has the value `u` at time `t` (s):
/// `x = 2 z √(D t)` with `erfc z = (u − u0)/(us − u0)`.
pub fn depth_of_value(u0: f64, us: f64, u: f64, d: f64, t: f64) -> Result<f64> {
    check_positive("diffusion_coefficient", d)?;
    check_positive("time", t)?;
    let z = z_for(u0, us, u)?;
    Ok(2.0 * z * (d * t).sqrt())
}

fn gaussian(m: f64, d: f64, t: f64, x: f64) -> Result<f64> {
    check_finite("amount_per_area", m)?;
    check_positive("diffusion_coefficient", d)?;
    check_positive("time", t)?;
    check_finite("position", x)?;
    Ok(m / (2.0 * (PI * d * t).sqrt()) * (-x * x / (4.0 * d * t)).exp())
}

/// Plane source of `m` per unit area at `x = 0` in an infinite medium:
/// `u = m / (2√(π D t)) exp(−x²/(4 D t))` (Crank eq. 2.6); `t > 0` (s), `x` (m) any sign.
pub fn thin_film_infinite(m: f64, d: f64, t: f64, x: f64) -> Result<f64> {
    gaussian(m, d, t, x)
}

/// Deposit of `m` per unit area on the impermeable surface `x = 0` of a semi-infinite medium:
/// `u = m / √(π D t) exp(−x²/(4 D t))`, `x ≥ 0` (m), `t > 0` (s).
pub fn thin_film_surface(m: f64, d: f64, t: f64, x: f64) -> Result<f64> {
    check_non_negative("position", x)?;
    Ok(2.0 * gaussian(m, d, t, x)?)
}
