//! Plausibility warnings on loaded data: irregular sampling and isolated outliers.
//!
//! These never stop a load; they are returned with the data so the user can look.
//!
//! **Irregular sampling.** For a series with at least three points and strictly increasing
//! times, the steps are `Δt_i = t_{i+1} − t_i`. When `max Δt / min Δt > 100` a warning names
//! the lines of the shortest and the longest step. Deliberately logarithmic sampling (common
//! for uptake curves) also triggers it; the warning is then informational.
//!
//! **Outliers.** Each point `y_i` (in the order of its series: by time, or by position for a
//! profile) is compared with the median of itself and up to two neighbours on each side
//! (a symmetric window of 5, shrunk near the ends; the first and last point cannot be
//! judged). The residuals `r_i = y_i − median(window_i)` are zero on any monotone stretch and
//! follow the noise elsewhere. Their robust standard deviation is
//! `σ = 1.4826 · median|r − median(r)|` (MAD); when the MAD is zero (more than half the
//! residuals equal), `σ = 1.2533 · mean|r − median(r)|` is used instead, and when that is
//! zero too nothing is flagged. A point with `|r_i − median(r)| > 5 σ` is reported. Series
//! with fewer than 5 points are not checked. At most [`MAX_OUTLIER_WARNINGS`] points are
//! named per series; the rest are counted in one further warning.
//!
//! References: F. R. Hampel, "The influence curve and its role in robust estimation",
//! J. Amer. Statist. Assoc. 69 (1974) 383–393 (median/MAD identifier); R. K. Pearson,
//! "Outliers in process modeling and identification", IEEE Trans. Control Syst. Technol. 10
//! (2002) 55–63 (running-median Hampel filter); P. J. Rousseeuw and C. Croux, J. Amer.
//! Statist. Assoc. 88 (1993) 1273–1283 (1.4826 consistency factor); B. Iglewicz and D. C.
//! Hoaglin, *How to Detect and Handle Outliers*, ASQC 1993 (modified z-score, the 1.2533
//! mean-absolute-deviation fallback is common practice) — all from memory.

use crate::error::Location;

use super::{Warning, WarningKind};

/// Ratio of the longest to the shortest time step above which sampling is called irregular.
pub const IRREGULAR_STEP_RATIO: f64 = 100.0;

/// Number of robust standard deviations beyond which a point is reported as an outlier.
pub const OUTLIER_SIGMAS: f64 = 5.0;

/// Most outliers named one by one per series.
pub const MAX_OUTLIER_WARNINGS: usize = 10;

/// Warn when the time steps of `time` (strictly increasing, s) vary by more than
/// [`IRREGULAR_STEP_RATIO`]. `loc(i)` gives the location of point `i`; `what` names the series.
pub(crate) fn irregular_sampling(
    time: &[f64],
    loc: &dyn Fn(usize) -> Location,
    what: &str,
) -> Option<Warning> {
    if time.len() < 3 {
        return None;
    }
    let (mut imin, mut imax) = (0usize, 0usize);
    let (mut dmin, mut dmax) = (f64::INFINITY, 0.0f64);
    for (i, w) in time.windows(2).enumerate() {
        let d = w[1] - w[0];
        if d < dmin {
            dmin = d;
            imin = i;
        }
        if d > dmax {
            dmax = d;
            imax = i;
        }
    }
    if dmin > 0.0 && dmax / dmin > IRREGULAR_STEP_RATIO {
        let lmin = loc(imin + 1);
        let lmax = loc(imax + 1);
        Some(Warning {
            kind: WarningKind::IrregularSampling,
            message: format!(
                "{what}: time steps vary by a factor of {:.0} (shortest {dmin:e} s ending at \
                 line {}, longest {dmax:e} s ending at line {}); fine if the sampling was \
                 meant to be uneven, otherwise check the time column",
                dmax / dmin,
                lmin.line.unwrap_or(0),
                lmax.line.unwrap_or(0)
            ),
            location: lmin,
        })
    } else {
        None
    }
}

/// Median of a small or large slice (copied; NaN-free input).
fn median(v: &mut [f64]) -> f64 {
    let n = v.len();
    if n == 0 {
        return 0.0;
    }
    let mid = n / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f64::total_cmp);
    let m = *m;
    if n % 2 == 1 {
        m
    } else {
        let lower = v[..mid].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower + m)
    }
}

/// Indices of the points of `y` (in series order) that lie more than [`OUTLIER_SIGMAS`]
/// robust standard deviations from the running median of their neighbours (module docs).
pub fn outlier_indices(y: &[f64]) -> Vec<usize> {
    let n = y.len();
    if n < 5 {
        return Vec::new();
    }
    let mut resid = Vec::with_capacity(n - 2);
    let mut win = [0.0f64; 5];
    for i in 1..n - 1 {
        let half = 2.min(i).min(n - 1 - i);
        let w = &mut win[..2 * half + 1];
        w.copy_from_slice(&y[i - half..=i + half]);
        w.sort_unstable_by(f64::total_cmp);
        resid.push(y[i] - w[half]);
    }
    let mut tmp = resid.clone();
    let med = median(&mut tmp);
    for (t, r) in tmp.iter_mut().zip(&resid) {
        *t = (r - med).abs();
    }
    let mut sigma = 1.4826 * median(&mut tmp);
    if sigma <= 0.0 {
        let mean_ad = tmp.iter().sum::<f64>() / tmp.len() as f64;
        sigma = 1.2533 * mean_ad;
    }
    if sigma.is_nan() || sigma <= 0.0 {
        return Vec::new();
    }
    resid
        .iter()
        .enumerate()
        .filter(|(_, r)| (*r - med).abs() > OUTLIER_SIGMAS * sigma)
        .map(|(k, _)| k + 1)
        .collect()
}

/// Outlier warnings for `y` (series order); `loc(i)` locates point `i`, `show(i)` formats
/// its value for the message.
pub(crate) fn outliers(
    y: &[f64],
    loc: &dyn Fn(usize) -> Location,
    show: &dyn Fn(usize) -> String,
    what: &str,
) -> Vec<Warning> {
    let idx = outlier_indices(y);
    let mut out: Vec<Warning> = idx
        .iter()
        .take(MAX_OUTLIER_WARNINGS)
        .map(|&i| Warning {
            kind: WarningKind::Outlier,
            location: loc(i),
            message: format!(
                "{what}: value {} is more than {OUTLIER_SIGMAS} robust standard deviations \
                 from its neighbours; check the cell (a typing error or a glitch?)",
                show(i)
            ),
        })
        .collect();
    if idx.len() > MAX_OUTLIER_WARNINGS {
        if let Some(&i) = idx.get(MAX_OUTLIER_WARNINGS) {
            out.push(Warning {
                kind: WarningKind::Outlier,
                location: loc(i),
                message: format!(
                    "{what}: {} more points are far from their neighbours (not listed)",
                    idx.len() - MAX_OUTLIER_WARNINGS
                ),
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_single_spike_is_found_and_its_neighbours_are_not() {
        // Smooth rising curve with small deterministic wiggle, one spike at index 20.
        let mut y: Vec<f64> = (0..50)
            .map(|i| {
                let t = i as f64;
                1.0 - (-t / 15.0).exp() + 0.002 * ((7.0 * t).sin())
            })
            .collect();
        y[20] += 0.2;
        assert_eq!(outlier_indices(&y), vec![20]);
    }

    #[test]
    fn clean_monotone_data_has_no_outliers() {
        let y: Vec<f64> = (0..100).map(|i| (i as f64).sqrt()).collect();
        assert!(outlier_indices(&y).is_empty());
        assert!(outlier_indices(&[1.0, 2.0, 100.0, 3.0]).is_empty()); // too short to judge
    }

    #[test]
    fn irregular_steps_are_reported() {
        let loc = |i: usize| Location::default().with_line(i as u64 + 2);
        let t = [0.0, 1.0, 2.0, 3.0, 500.0];
        let w = irregular_sampling(&t, &loc, "series");
        assert!(w.is_some_and(|w| w.kind == WarningKind::IrregularSampling));
        let t = [0.0, 1.0, 2.0, 3.0, 50.0];
        assert!(irregular_sampling(&t, &loc, "series").is_none());
    }

    #[test]
    fn median_of_even_and_odd() {
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median(&mut [4.0, 1.0, 3.0, 2.0]), 2.5);
    }
}
