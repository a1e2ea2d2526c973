//! Ångström's periodic method: diffusivity (and lateral loss) from the amplitude decay and
//! phase lag of a periodic temperature wave between sensors along a rod.
//!
//! Each sensor series is fitted by linear least squares to
//! `T(t) = c0 + c1 t' [+ c2 t'²] + A cos ωt + B sin ωt` (`t'` the centred, scaled time; the
//! polynomial removes slow drift), solved through the SVD of the design matrix (nalgebra).
//! With `R = √(A² + B²)` and `φ = atan2(B, A)` the oscillation is `R cos(ωt − φ)`.
//! For sensors at `x_i < x_j`, `Δx = x_j − x_i`, amplitude ratio `R_i/R_j` and phase lag
//! `Δφ = φ_j − φ_i` reduced to `(0, 2π)` (so sensors must be less than one wavelength apart):
//!
//! `α = ω Δx² / (2 Δφ ln(R_i/R_j))`, and with `a = ln(R_i/R_j)/Δx`, `b = Δφ/Δx`, the loss
//! coefficient of `T_t = α T_xx − ε T` is `ε = α (a² − b²)`.
//!
//! Both follow from `T = A e^{−ax} cos(ωt − bx)`, `ab = ω/(2α)`, `a² − b² = ε/α`
//! ([`crate::analytic::periodic`]); the formula for `α` is therefore unaffected by the loss.
//!
//! References: A. J. Ångström, Ann. Phys. Chem. 114 (1861) 513 (from memory); H. S. Carslaw and
//! J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed. 1959, §2.6 (from memory).

use super::{check_column, check_same_length, too_few};
use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};
use std::f64::consts::PI;

/// Polynomial drift removed together with the sinusoid.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Drift {
    /// A constant offset only.
    Constant,
    /// Offset and linear trend.
    Linear,
    /// Offset, linear and quadratic trend.
    Quadratic,
}

/// Least-squares sinusoid of one sensor.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sinusoid {
    /// Amplitude `R` (unit of the data).
    pub amplitude: f64,
    /// Phase `φ` (rad, in (−π, π]) in `R cos(ωt − φ)`.
    pub phase: f64,
    /// Root-mean-square residual of the fit (unit of the data).
    pub rms_residual: f64,
}

/// Fits `drift + A cos ωt + B sin ωt` to `y` at times `t` (s) for angular frequency `omega`
/// (rad/s).
pub fn fit_sinusoid(t: &[f64], y: &[f64], omega: f64, drift: Drift) -> Result<Sinusoid> {
    check_same_length("t", t.len(), "T", y.len())?;
    check_column("t", t, true)?;
    check_column("T", y, false)?;
    if !(omega.is_finite() && omega > 0.0) {
        return Err(Error::setting(
            "angular_frequency",
            format!("expected ω > 0 rad/s, found {omega}"),
        ));
    }
    let poly = match drift {
        Drift::Constant => 1,
        Drift::Linear => 2,
        Drift::Quadratic => 3,
    };
    let p = poly + 2;
    let n = t.len();
    if n < p + 1 {
        return Err(too_few("sinusoid fit", p + 1, n));
    }
    let (t0, t1) = (t[0], t[n - 1]);
    let span = t1 - t0;
    if span * omega < 2.0 * PI * 0.999 {
        return Err(Error::Fit(format!(
            "the series covers {:.3} periods; at least one full period is needed to separate the \
             oscillation from the drift",
            span * omega / (2.0 * PI)
        )));
    }
    let mid = 0.5 * (t0 + t1);
    let mut a = DMatrix::<f64>::zeros(n, p);
    for (i, &ti) in t.iter().enumerate() {
        let s = (ti - mid) / (0.5 * span);
        let mut pw = 1.0;
        for j in 0..poly {
            a[(i, j)] = pw;
            pw *= s;
        }
        a[(i, poly)] = (omega * ti).cos();
        a[(i, poly + 1)] = (omega * ti).sin();
    }
    let b = DVector::from_column_slice(y);
    let svd = a.clone().svd(true, true);
    let coef = svd
        .solve(&b, 1e-12 * svd.singular_values.max())
        .map_err(|e| Error::Fit(format!("sinusoid fit failed: {e}")))?;
    let resid = &a * &coef - &b;
    let (ca, cb) = (coef[poly], coef[poly + 1]);
    Ok(Sinusoid {
        amplitude: ca.hypot(cb),
        phase: cb.atan2(ca),
        rms_residual: (resid.norm_squared() / n as f64).sqrt(),
    })
}

/// `α = ω Δx² / (2 Δφ ln(A1/A2))` (m²/s) from angular frequency `omega` (rad/s), sensor
/// spacing `dx` (m), amplitude ratio `A1/A2 > 1` (near/far) and phase lag `Δφ > 0` (rad).
pub fn alpha_from_pair(omega: f64, dx: f64, amplitude_ratio: f64, phase_lag: f64) -> Result<f64> {
    if !(omega > 0.0 && dx > 0.0 && omega.is_finite() && dx.is_finite()) {
        return Err(Error::setting(
            "spacing",
            format!("expected ω > 0 and Δx > 0, found {omega}, {dx}"),
        ));
    }
    if !(amplitude_ratio > 1.0 && amplitude_ratio.is_finite()) {
        return Err(Error::Fit(format!(
            "amplitude ratio near/far is {amplitude_ratio}; the wave must decay along the rod (> 1)"
        )));
    }
    if !(phase_lag > 0.0 && phase_lag.is_finite()) {
        return Err(Error::Fit(format!(
            "phase lag {phase_lag} rad; it must be positive"
        )));
    }
    Ok(omega * dx * dx / (2.0 * phase_lag * amplitude_ratio.ln()))
}

/// Loss coefficient `ε = α (a² − b²)` (1/s) with `a = ln(A1/A2)/Δx`, `b = Δφ/Δx`.
pub fn loss_from_pair(alpha: f64, dx: f64, amplitude_ratio: f64, phase_lag: f64) -> f64 {
    let a = amplitude_ratio.ln() / dx;
    let b = phase_lag / dx;
    alpha * (a * a - b * b)
}

/// Estimate for one sensor pair.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairEstimate {
    /// Index of the nearer sensor (from 0, in the order given).
    pub near: usize,
    /// Index of the farther sensor.
    pub far: usize,
    /// Spacing (m).
    pub dx: f64,
    /// Amplitude ratio near/far.
    pub amplitude_ratio: f64,
    /// Phase lag (rad), in (0, 2π).
    pub phase_lag: f64,
    /// Diffusivity `α` (m²/s).
    pub alpha: f64,
    /// Lateral loss coefficient `ε` (1/s); negative values mean the data are not consistent
    /// with the model (noise or a non-sinusoidal source).
    pub loss: f64,
}

/// Result of the Ångström method.
#[derive(Debug, Clone, PartialEq)]
pub struct AngstromEstimate {
    /// Sinusoid fit of each sensor, in the order given.
    pub sensors: Vec<Sinusoid>,
    /// Estimates for every usable pair.
    pub pairs: Vec<PairEstimate>,
    /// Pairs that could not be used, with the reason.
    pub warnings: Vec<String>,
    /// What was assumed.
    pub assumptions: Vec<String>,
}

/// Ångström's method for sensors at `positions` (m) along the rod, each with a temperature
/// series in `series` sampled at the common times `t` (s); `omega` is the angular frequency
/// (rad/s) of the periodic heating.
pub fn angstrom(
    t: &[f64],
    positions: &[f64],
    series: &[&[f64]],
    omega: f64,
    drift: Drift,
) -> Result<AngstromEstimate> {
    check_same_length("positions", positions.len(), "series", series.len())?;
    check_column("positions", positions, false)?;
    if positions.len() < 2 {
        return Err(too_few("Ångström method (sensors)", 2, positions.len()));
    }
    let sensors = series
        .iter()
        .map(|y| fit_sinusoid(t, y, omega, drift))
        .collect::<Result<Vec<_>>>()?;
    let mut pairs = Vec::new();
    let mut warnings = Vec::new();
    for i in 0..positions.len() {
        for j in 0..positions.len() {
            let dx = positions[j] - positions[i];
            if dx <= 0.0 {
                if i < j && dx == 0.0 {
                    warnings.push(format!(
                        "sensors {} and {} share a position; pair skipped",
                        i + 1,
                        j + 1
                    ));
                }
                continue;
            }
            let (si, sj) = (sensors[i], sensors[j]);
            let ratio = si.amplitude / sj.amplitude;
            let lag = (sj.phase - si.phase).rem_euclid(2.0 * PI);
            match alpha_from_pair(omega, dx, ratio, lag) {
                Ok(alpha) => pairs.push(PairEstimate {
                    near: i,
                    far: j,
                    dx,
                    amplitude_ratio: ratio,
                    phase_lag: lag,
                    alpha,
                    loss: loss_from_pair(alpha, dx, ratio, lag),
                }),
                Err(e) => warnings.push(format!("sensors {} and {}: {e}", i + 1, j + 1)),
            }
        }
    }
    if pairs.is_empty() {
        return Err(Error::Fit(format!(
            "no sensor pair gives a decaying, lagging wave: {}",
            warnings.join("; ")
        )));
    }
    Ok(AngstromEstimate {
        sensors,
        pairs,
        warnings,
        assumptions: vec![
            "semi-infinite rod (no wave reflected from the far end), steady periodic state, \
             T_t = alpha T_xx - eps T with constant alpha and eps"
                .into(),
            format!("drift removed: {drift:?}; sensors less than one wavelength apart"),
        ],
    })
}
