//! Classic shortcut estimators of diffusion coefficients, for comparison with the full fit and
//! as start values.
//!
//! Each estimator takes measured data as SI slices and returns an estimate together with the
//! assumptions it made (as plain sentences), or an error that says why the data do not allow
//! the estimate (for example, an uptake curve that never reaches one half). Malformed input
//! (different lengths, non-finite values, times that do not increase) is an
//! [`Error::Input`](crate::error::Error::Input) naming the point; data that are well formed
//! but unsuitable give [`Error::Fit`](crate::error::Error::Fit) with the reason.
//!
//! - [`uptake`]: half-time method and initial `√t` slope for uptake (sorption) curves;
//! - [`start`]: the start of the exposure of an uptake curve from its early `√t` rise;
//! - [`profile`]: erfc and Gaussian (drive-in) linearisations of a depth profile;
//! - [`permeation`]: time-lag method for a membrane;
//! - [`angstrom`]: Ångström's periodic method with sinusoid fits and lateral loss;
//! - [`arrhenius`]: weighted straight-line fit of `ln D` against `1/T`.
//!
//! All straight lines are fitted by (weighted) linear least squares with centred sums
//! ([`LineFit`]).
//!
//! References: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975 (§4.3, §4.3.4, ch. 3);
//! A. J. Ångström, Ann. Phys. Chem. 114 (1861) 513 (from memory); N. R. Draper and H. Smith,
//! *Applied Regression Analysis*, 3rd ed. 1998, ch. 1 (straight-line least squares).

pub mod angstrom;
pub mod arrhenius;
pub mod permeation;
pub mod profile;
pub mod start;
pub mod uptake;

use crate::error::{Error, InputKind, Location, Result};

/// A straight line `y = intercept + slope x` fitted by (weighted) least squares.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineFit {
    /// Slope (unit of y per unit of x).
    pub slope: f64,
    /// Intercept at `x = 0` (unit of y); exactly 0 for a fit through the origin.
    pub intercept: f64,
    /// Standard error of the slope: from the residual scatter `s² = RSS/(n − p)` when no
    /// weights are given, from the weights (taken as `1/σ²`, absolute) otherwise. `None` when
    /// unweighted and `n = p` (no degrees of freedom left).
    pub slope_se: Option<f64>,
    /// Standard error of the intercept (same rules; `None` for a fit through the origin).
    pub intercept_se: Option<f64>,
    /// Covariance of intercept and slope (same rules; `None` when unavailable).
    pub covariance: Option<f64>,
    /// (Weighted) residual sum of squares.
    pub rss: f64,
    /// Number of points used.
    pub n: usize,
}

/// Fits `y = b0 + b1 x` (or `y = b1 x` when `through_origin`) by least squares with optional
/// weights `w_i = 1/σ_i²`. Needs at least 2 points (1 through the origin) and spread in `x`.
pub fn fit_line(
    x: &[f64],
    y: &[f64],
    weights: Option<&[f64]>,
    through_origin: bool,
) -> Result<LineFit> {
    let n = x.len();
    if y.len() != n || weights.is_some_and(|w| w.len() != n) {
        return Err(Error::Internal(
            "fit_line: slices of different lengths".into(),
        ));
    }
    let p = if through_origin { 1 } else { 2 };
    if n < p {
        return Err(Error::input(
            InputKind::TooFewPoints,
            Location::default(),
            format!("a straight line needs at least {p} points, found {n}"),
        ));
    }
    let w = |i: usize| weights.and_then(|w| w.get(i).copied()).unwrap_or(1.0);
    let sw: f64 = (0..n).map(w).sum();
    let (xm, ym) = if through_origin {
        (0.0, 0.0)
    } else {
        (
            (0..n).map(|i| w(i) * x[i]).sum::<f64>() / sw,
            (0..n).map(|i| w(i) * y[i]).sum::<f64>() / sw,
        )
    };
    let sxx: f64 = (0..n).map(|i| w(i) * (x[i] - xm).powi(2)).sum();
    let sxy: f64 = (0..n).map(|i| w(i) * (x[i] - xm) * (y[i] - ym)).sum();
    if sxx <= 0.0 || !sxx.is_finite() {
        return Err(Error::Fit(
            "the abscissae have no spread: a straight line is not determined".into(),
        ));
    }
    let slope = sxy / sxx;
    let intercept = ym - slope * xm;
    let rss: f64 = (0..n)
        .map(|i| w(i) * (y[i] - intercept - slope * x[i]).powi(2))
        .sum();
    let scale = if weights.is_some() {
        Some(1.0)
    } else if n > p {
        Some(rss / (n - p) as f64)
    } else {
        None
    };
    let slope_se = scale.map(|s| (s / sxx).sqrt());
    let (intercept_se, covariance) = if through_origin {
        (None, None)
    } else {
        (
            scale.map(|s| (s * (1.0 / sw + xm * xm / sxx)).sqrt()),
            scale.map(|s| -s * xm / sxx),
        )
    };
    Ok(LineFit {
        slope,
        intercept,
        slope_se,
        intercept_se,
        covariance,
        rss,
        n,
    })
}

/// Checks a data column: finite values, and (for `increasing`) strictly increasing.
pub(crate) fn check_column(name: &str, v: &[f64], increasing: bool) -> Result<()> {
    for (i, &a) in v.iter().enumerate() {
        if !a.is_finite() {
            return Err(Error::input(
                InputKind::NotFinite,
                Location::default().with_column(name),
                format!("point {} is {a}; expected a finite number", i + 1),
            ));
        }
        if increasing && i > 0 && a <= v[i - 1] {
            return Err(Error::input(
                InputKind::TimeNotIncreasing,
                Location::default().with_column(name),
                format!(
                    "point {} ({a}) does not exceed point {} ({}); values must increase",
                    i + 1,
                    i,
                    v[i - 1]
                ),
            ));
        }
    }
    Ok(())
}

/// Checks that two columns have the same length.
pub(crate) fn check_same_length(a: &str, la: usize, b: &str, lb: usize) -> Result<()> {
    if la != lb {
        return Err(Error::input(
            InputKind::RaggedRow,
            Location::default().with_column(b),
            format!("'{a}' has {la} points but '{b}' has {lb}"),
        ));
    }
    Ok(())
}

/// Error for too few usable points.
pub(crate) fn too_few(what: &str, need: usize, found: usize) -> Error {
    Error::input(
        InputKind::TooFewPoints,
        Location::default(),
        format!("{what}: need at least {need} points, found {found}"),
    )
}
