//! Linearisations of a concentration depth profile measured at one time.
//!
//! erfc profile (constant surface value `us`, background `u0`, Crank ch. 3):
//! `(u − u0)/(us − u0) = erfc(x/(2√(D t)))`, so `z = erfc⁻¹((u − u0)/(us − u0))` is a straight
//! line in `x` with slope `1/(2√(D t))`: `D = 1/(4 t slope²)`. Only points with reduced value
//! in a well-conditioned window (default `0.02 < ratio < 0.98`) are used: near 0 and 1 the
//! inverse erfc magnifies measurement noise without bound (`dz/dratio = −(√π/2) e^{z²}`).
//! The line keeps a free intercept (a small offset of the surface position shows up there).
//! When `us` or `u0` are not given they are taken from the data (shallowest and deepest point,
//! a crude choice that is reported in the assumptions).
//!
//! Gaussian (thin-film / drive-in) profile: `u = u(0) exp(−x²/(4 D t))`, so `ln u` is a
//! straight line in `x²` with slope `−1/(4 D t)`: `D = −1/(4 t slope)`. For a deposit on an
//! impermeable surface `u(0) = m/√(π D t)`, which gives the deposited amount per area.
//!
//! Reference: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §2.2, §3.2.

use super::{check_column, check_same_length, fit_line, too_few, LineFit};
use crate::analytic::special::inverse_erfc;
use crate::error::{Error, Result};

/// Result of a profile linearisation.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfileEstimate {
    /// Diffusion coefficient (m²/s).
    pub d: f64,
    /// The fitted straight line (erfc: `z` against `x` in m; Gaussian: `ln u` against `x²`).
    pub line: LineFit,
    /// Indices (from 0) of the points used.
    pub used: Vec<usize>,
    /// What was assumed.
    pub assumptions: Vec<String>,
}

fn check_profile(x: &[f64], u: &[f64], t: f64) -> Result<()> {
    check_same_length("x", x.len(), "u", u.len())?;
    check_column("x", x, false)?;
    check_column("u", u, false)?;
    if !(t.is_finite() && t > 0.0) {
        return Err(Error::setting(
            "time",
            format!("expected a diffusion time > 0 s, found {t}"),
        ));
    }
    Ok(())
}

/// erfc linearisation of a depth profile `u(x)` (x in m, from the surface) measured at time
/// `t` (s). `surface`/`background`: `us`/`u0` when known. `window`: the open range of the
/// reduced value kept (default `(0.02, 0.98)` when `None`).
pub fn erfc_linearisation(
    x: &[f64],
    u: &[f64],
    t: f64,
    surface: Option<f64>,
    background: Option<f64>,
    window: Option<(f64, f64)>,
) -> Result<ProfileEstimate> {
    check_profile(x, u, t)?;
    if x.len() < 2 {
        return Err(too_few("erfc linearisation", 2, x.len()));
    }
    let mut assumptions =
        vec!["semi-infinite medium, constant D, constant surface value from t = 0".to_string()];
    let by_depth = |pick_max: bool| -> Option<usize> {
        (0..x.len()).reduce(|a, b| if (x[b] > x[a]) == pick_max { b } else { a })
    };
    let us = match surface {
        Some(v) => v,
        None => {
            let i = by_depth(false).ok_or_else(|| too_few("erfc linearisation", 2, 0))?;
            assumptions.push(format!(
                "surface value us = {} taken from the shallowest point (x = {} m)",
                u[i], x[i]
            ));
            u[i]
        }
    };
    let u0 = match background {
        Some(v) => v,
        None => {
            let i = by_depth(true).ok_or_else(|| too_few("erfc linearisation", 2, 0))?;
            assumptions.push(format!(
                "background u0 = {} taken from the deepest point (x = {} m)",
                u[i], x[i]
            ));
            u[i]
        }
    };
    if !(us.is_finite() && u0.is_finite()) || us == u0 {
        return Err(Error::Fit(format!(
            "surface value {us} and background {u0} must be finite and different"
        )));
    }
    let (lo, hi) = window.unwrap_or((0.02, 0.98));
    if !(lo > 0.0 && hi < 1.0 && lo < hi) {
        return Err(Error::setting(
            "window",
            format!("expected 0 < low < high < 1, found ({lo}, {hi})"),
        ));
    }
    assumptions.push(format!("points with {lo} < (u - u0)/(us - u0) < {hi} only"));
    let mut xs = Vec::new();
    let mut zs = Vec::new();
    let mut used = Vec::new();
    for (i, (&xi, &ui)) in x.iter().zip(u).enumerate() {
        let r = (ui - u0) / (us - u0);
        if r > lo && r < hi {
            xs.push(xi);
            zs.push(inverse_erfc(r)?);
            used.push(i);
        }
    }
    if xs.len() < 2 {
        return Err(Error::Fit(format!(
            "only {} point(s) have a reduced value inside ({lo}, {hi}): the profile is not resolved",
            xs.len()
        )));
    }
    let line = fit_line(&xs, &zs, None, false)?;
    if line.slope <= 0.0 {
        return Err(Error::Fit(format!(
            "erfc^-1 of the reduced value does not grow with depth (slope {:e}): not an erfc profile \
             with the given surface and background values",
            line.slope
        )));
    }
    Ok(ProfileEstimate {
        d: 1.0 / (4.0 * t * line.slope * line.slope),
        line,
        used,
        assumptions,
    })
}

/// Result of the Gaussian linearisation.
#[derive(Debug, Clone, PartialEq)]
pub struct GaussianEstimate {
    /// Profile estimate (`line`: `ln u` against `x²`).
    pub profile: ProfileEstimate,
    /// Fitted surface value `u(0) = exp(intercept)`.
    pub surface_value: f64,
    /// Amount per area if the profile is a deposit on an impermeable surface:
    /// `m = u(0) √(π D t)` (value unit × m).
    pub amount_per_area: f64,
}

/// Gaussian (drive-in) linearisation: `ln u` against `x²` (x in m) at time `t` (s). Only points
/// with `u > 0` can be used.
pub fn gaussian_linearisation(x: &[f64], u: &[f64], t: f64) -> Result<GaussianEstimate> {
    check_profile(x, u, t)?;
    let mut xs = Vec::new();
    let mut ys = Vec::new();
    let mut used = Vec::new();
    for (i, (&xi, &ui)) in x.iter().zip(u).enumerate() {
        if ui > 0.0 {
            xs.push(xi * xi);
            ys.push(ui.ln());
            used.push(i);
        }
    }
    if xs.len() < 2 {
        return Err(too_few(
            "Gaussian linearisation (points with u > 0)",
            2,
            xs.len(),
        ));
    }
    let line = fit_line(&xs, &ys, None, false)?;
    if line.slope >= 0.0 {
        return Err(Error::Fit(format!(
            "ln u does not fall with x^2 (slope {:e}): not a Gaussian profile",
            line.slope
        )));
    }
    let d = -1.0 / (4.0 * t * line.slope);
    let surface_value = line.intercept.exp();
    Ok(GaussianEstimate {
        amount_per_area: surface_value * (std::f64::consts::PI * d * t).sqrt(),
        surface_value,
        profile: ProfileEstimate {
            d,
            line,
            used,
            assumptions: vec![
                "instantaneous plane source (thin film), constant D, no loss at the surface; \
                 points with u > 0 only"
                    .to_string(),
            ],
        },
    })
}
