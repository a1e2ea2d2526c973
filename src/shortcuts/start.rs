//! When did the exposure begin? The start t0 of an uptake (sorption or desorption) curve from
//! its early rise.
//!
//! At early times the amount exchanged grows as the square root of the time since the step:
//! `M_t = (4/L) M_∞ √(D (t − t0)/π)` for a plane sheet (Crank 1975, §4.3.2), and to leading
//! order likewise for a sphere or cylinder (their short-time forms, Crank 1975, chs. 5 and 6;
//! from memory). So
//! the readings of the early part are fitted by
//!
//! ```text
//!   y(t) = a + b √(max(0, t − t0))
//! ```
//!
//! for each trial t0 (a and b by linear least squares), and t0 is the trial with the smallest
//! sum of squares: a grid over the allowed range, then a golden-section refinement around the
//! best grid point. Readings taken before t0 are the baseline `a`. The early part is every
//! reading up to the first that has covered half of the total change (the mean of the last
//! three readings minus the first reading).
//!
//! A surface resistance makes the early rise linear in t rather than in √t, and this estimate
//! then comes out late; it is meant as a start value for the full fit, which has the resistance
//! in its model.
//!
//! Reference: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §4.3.2.

use super::{check_column, check_same_length, fit_line, too_few};
use crate::error::{Error, Result};

/// Points of the grid over the allowed range of t0.
const GRID: usize = 400;

/// The estimate of the start of the exposure.
#[derive(Debug, Clone, PartialEq)]
pub struct StartEstimate {
    /// t0 on the data's clock, s.
    pub t0: f64,
    /// Number of early readings used.
    pub n: usize,
    /// What was assumed, in plain sentences.
    pub assumptions: Vec<String>,
}

/// The start t0 (s, on the clock of `t`) of an uptake curve `y` (any unit; rising or falling)
/// read at times `t` (s, increasing), searched within `range` (s); with `None`, from the first
/// time minus the time to half the change up to the time of half the change.
pub fn exposure_start(t: &[f64], y: &[f64], range: Option<(f64, f64)>) -> Result<StartEstimate> {
    check_same_length("t", t.len(), "y", y.len())?;
    check_column("t", t, false)?;
    check_column("y", y, false)?;
    if t.windows(2).any(|w| w[1] <= w[0]) {
        return Err(Error::setting(
            "t",
            "times must increase for the start estimate",
        ));
    }
    if t.len() < 6 {
        return Err(too_few("exposure start estimate", 6, t.len()));
    }
    let n = t.len();
    let last = y[n - 3..].iter().sum::<f64>() / 3.0;
    let change = last - y[0];
    if change == 0.0 {
        return Err(Error::Fit(
            "the readings do not change: no exposure to place".into(),
        ));
    }
    let half = t
        .iter()
        .zip(y)
        .position(|(_, &v)| (v - y[0]) / change >= 0.5)
        .unwrap_or(n - 1);
    let early = half + 1;
    if early < 4 {
        return Err(too_few(
            "exposure start estimate (readings before half the change)",
            4,
            early,
        ));
    }
    let (t, y) = (&t[..early], &y[..early]);
    let t_half = t[early - 1];
    let (lo, hi) = match range {
        Some((lo, hi)) => (lo, hi.min(t_half)),
        None => (t[0] - (t_half - t[0]), t_half),
    };
    if lo >= hi || lo.is_nan() || hi.is_nan() {
        return Err(Error::Fit(format!(
            "no room for the start: the allowed range ends at {hi} s, before {lo} s"
        )));
    }
    let rss = |t0: f64| -> f64 {
        let x: Vec<f64> = t.iter().map(|&ti| (ti - t0).max(0.0).sqrt()).collect();
        fit_line(&x, y, None, false).map_or(f64::INFINITY, |line| line.rss)
    };
    let step = (hi - lo) / GRID as f64;
    let mut best = (f64::INFINITY, lo);
    for k in 0..=GRID {
        let t0 = lo + step * k as f64;
        let s = rss(t0);
        if s < best.0 {
            best = (s, t0);
        }
    }
    if !best.0.is_finite() {
        return Err(Error::Fit(
            "the early readings could not be fitted by a rise in sqrt(t)".into(),
        ));
    }
    // Golden-section refinement within one grid step either side.
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let (mut a, mut b) = ((best.1 - step).max(lo), (best.1 + step).min(hi));
    for _ in 0..60 {
        let (c, d) = (b - g * (b - a), a + g * (b - a));
        if rss(c) < rss(d) {
            b = d;
        } else {
            a = c;
        }
    }
    let t0 = 0.5 * (a + b);
    let t0 = if rss(t0) <= best.0 { t0 } else { best.1 };
    Ok(StartEstimate {
        t0,
        n: early,
        assumptions: vec![format!(
            "the first {early} readings (up to half the change) rise as sqrt(t - t0) from a flat \
             baseline (early-time uptake, Crank 1975 §4.3.2)"
        )],
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_the_start_of_a_square_root_rise() {
        // y = 3 + 2 √(t − 47) after t0 = 47 s, flat before; plateau reached late.
        let t: Vec<f64> = (0..60).map(|k| 10.0 * k as f64).collect();
        let y: Vec<f64> = t
            .iter()
            .map(|&t| 3.0 + 2.0 * (t - 47.0f64).max(0.0).sqrt().min(30.0))
            .collect();
        let e = exposure_start(&t, &y, None).unwrap();
        assert!((e.t0 - 47.0).abs() < 1e-3, "{}", e.t0);
        // Before the clock's zero, and falling (desorption).
        let t: Vec<f64> = (0..60).map(|k| 10.0 * k as f64).collect();
        let y: Vec<f64> = t
            .iter()
            .map(|&t| 5.0 - 0.1 * (t + 25.0).sqrt().min(15.0))
            .collect();
        let e = exposure_start(&t, &y, Some((-100.0, 100.0))).unwrap();
        assert!((e.t0 + 25.0).abs() < 1e-3, "{}", e.t0);
    }

    #[test]
    fn refuses_flat_or_short_records() {
        assert!(exposure_start(&[0.0, 1.0, 2.0], &[1.0, 2.0, 3.0], None).is_err());
        let t: Vec<f64> = (0..10).map(f64::from).collect();
        assert!(exposure_start(&t, &[4.0; 10], None).is_err());
    }
}
