//! Time-lag method for permeation through a membrane.
//!
//! For a membrane of thickness `L`, initially empty, upstream value constant and downstream
//! value 0, the cumulative amount per area approaches the straight line
//! `Q_t = (D C1 / L)(t − θ)` with time lag `θ = L²/(6D)` (Crank §4.3.4), so `D = L²/(6θ)`.
//!
//! Choice of the late part: the exit flux differs from its steady value by
//! `2 Σ (−1)ⁿ exp(−n² π² D t/L²)`, which at `t = 6θ` is `2 e^{−π²} ≈ 1.0e-4` (the offset of
//! `Q` from its asymptote there, `(2/π²) e^{−π²}` in units of `L C1`, biases `θ` by about
//! 6e-5 relative). The line is first fitted to the last third of the points, giving `θ₀`;
//! then refitted to the points with `t ≥ 6 θ_k` until the selection stops changing (at most
//! 20 rounds). If fewer than three points lie beyond `6θ`, the last third is kept and the
//! result carries a warning that steady state was not reached (the estimate is then biased:
//! `D` too high, because the curve still bends upwards).
//!
//! Reference: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §4.3.4 (eq. 4.24a,
//! from memory); H. A. Daynes, Proc. R. Soc. A 97 (1920) 286 (from memory).

use super::{check_column, check_same_length, fit_line, too_few, LineFit};
use crate::error::{Error, Result};

/// Result of the time-lag method.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeLagEstimate {
    /// Diffusion coefficient `D = L²/(6θ)` (m²/s).
    pub d: f64,
    /// Time lag `θ` (s): where the steady-state line crosses `Q = 0`.
    pub time_lag: f64,
    /// The steady-state line `Q = intercept + slope t` (slope = steady flux).
    pub line: LineFit,
    /// Index (from 0) of the first point used.
    pub first_used: usize,
    /// True when at least three points lie at `t ≥ 6θ`.
    pub steady_state_reached: bool,
    /// Warnings about the data.
    pub warnings: Vec<String>,
    /// What was assumed.
    pub assumptions: Vec<String>,
}

fn line_from(t: &[f64], q: &[f64], first: usize) -> Result<(LineFit, f64)> {
    let line = fit_line(&t[first..], &q[first..], None, false)?;
    if line.slope <= 0.0 {
        return Err(Error::Fit(format!(
            "the late part of the cumulative curve does not rise (slope {:e}): no steady flux",
            line.slope
        )));
    }
    Ok((line, -line.intercept / line.slope))
}

/// Time-lag estimate of `D` from the cumulative permeated amount `q` (any unit per area) at
/// times `t` (s, increasing, from the start of exposure) through a membrane `thickness` m thick.
pub fn time_lag(t: &[f64], q: &[f64], thickness: f64) -> Result<TimeLagEstimate> {
    check_same_length("t", t.len(), "Q", q.len())?;
    check_column("t", t, true)?;
    check_column("Q", q, false)?;
    if !(thickness.is_finite() && thickness > 0.0) {
        return Err(Error::setting(
            "thickness",
            format!("expected a thickness > 0 m, found {thickness}"),
        ));
    }
    let n = t.len();
    if n < 6 {
        return Err(too_few("time-lag method", 6, n));
    }
    let last_third = n - n / 3;
    let (mut line, mut theta) = line_from(t, q, last_third)?;
    let mut first = last_third;
    let mut steady = false;
    for _ in 0..20 {
        if theta <= 0.0 {
            break;
        }
        let Some(k) = t.iter().position(|&ti| ti >= 6.0 * theta) else {
            steady = false;
            break;
        };
        if n - k < 3 {
            steady = false;
            break;
        }
        steady = true;
        if k == first {
            break;
        }
        first = k;
        (line, theta) = line_from(t, q, first)?;
    }
    if !steady && first != last_third {
        first = last_third;
        (line, theta) = line_from(t, q, first)?;
    }
    if theta <= 0.0 {
        return Err(Error::Fit(format!(
            "the steady-state line crosses Q = 0 at t = {theta:e} s, not after the start: the data \
             do not look like permeation into an initially empty membrane"
        )));
    }
    let mut warnings = Vec::new();
    if !steady {
        warnings.push(format!(
            "steady state not reached: fewer than 3 points at t >= 6 theta = {:e} s (data end at \
             {:e} s = {:.2} theta); the line through the last third is used and D is biased",
            6.0 * theta,
            t[n - 1],
            t[n - 1] / theta
        ));
    }
    Ok(TimeLagEstimate {
        d: thickness * thickness / (6.0 * theta),
        time_lag: theta,
        line,
        first_used: first,
        steady_state_reached: steady,
        warnings,
        assumptions: vec![
            "constant D; membrane initially empty; upstream value constant and downstream value 0 from t = 0".into(),
            format!("steady-state line through the {} points from t = {:e} s", n - first, t[first]),
        ],
    })
}
