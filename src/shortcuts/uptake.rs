//! Half-time method and initial `√t` slope for uptake (sorption or desorption) curves.
//!
//! The data are the amount exchanged since the start, rising from 0 towards `M_∞`; for a
//! desorption run pass the amount lost (`M_0 − M_t`). For constant D the desorption curve
//! equals the sorption curve (Crank ch. 4).
//!
//! Half-time: with `t½` the time at which `M_t/M_∞ = 1/2`,
//! `D = τ½ ℓ² / t½`, where `τ½` is the exact root of the uptake series
//! ([`crate::analytic::tau_half`]): 0.0491826848809 for a plane sheet of full thickness `L`
//! with both faces exposed (`ℓ = L`; one face sealed: `ℓ = 2L`), 0.0305465242980 for a sphere
//! and 0.0630581941915 for a cylinder (`ℓ = a`, the radius). Crank's two-term value 0.04919
//! is 1.0e-4 (relative) too high and is not used.
//!
//! `t½` is found at the first point where the fraction reaches 1/2, by linear interpolation in
//! `√t` between that point and the one before (the early curve is nearly linear in `√t`, so
//! this is more accurate than interpolating in `t`). `M_∞` is either given or estimated as the
//! mean of the last `k` points; the estimate is refused unless those points look like a
//! plateau (they span less than 1 % of their mean — a rule of common practice).
//!
//! Initial slope: for a sheet, `M_t/M_∞ = (4/L) √(D t/π)` at early times (Crank §4.3.2), so a
//! straight line of `M_t/M_∞` against `√t` over the early part (fraction ≤ `limit`, default
//! 0.5) with slope `s` gives `D = π (s L / 4)²`. The relation is exact to 1e-12 up to
//! fraction ≈ 0.22 and 0.10 % high at 0.5, so with the default limit the fitted slope is low
//! and `D` comes out about 5e-4 (relative) too low on ideal data (measured in the tests); use a
//! lower limit (such as 0.3) on good data.
//!
//! Reference: J. Crank, *The Mathematics of Diffusion*, 2nd ed. 1975, §4.3.2 and §6.3.

use super::{check_column, check_same_length, fit_line, too_few, LineFit};
use crate::analytic::{self, sheet::Faces, Shape};
use crate::error::{Error, Result};

/// Geometry of the sample for the uptake shortcuts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Geometry {
    /// Plane sheet of thickness `thickness` (m), both faces exposed or one sealed.
    Sheet {
        /// Thickness (m).
        thickness: f64,
        /// Exposed faces.
        faces: Faces,
    },
    /// Sphere of radius `radius` (m).
    Sphere {
        /// Radius (m).
        radius: f64,
    },
    /// Infinite cylinder of radius `radius` (m).
    Cylinder {
        /// Radius (m).
        radius: f64,
    },
}

impl Geometry {
    fn shape_and_length(&self) -> Result<(Shape, f64, String)> {
        let (shape, len, what) = match *self {
            Geometry::Sheet { thickness, faces } => (
                Shape::Sheet,
                faces.effective_thickness(thickness),
                match faces {
                    Faces::Both => format!("plane sheet of thickness {thickness} m, both faces exposed"),
                    Faces::OneSealed => format!(
                        "plane sheet of thickness {thickness} m sealed on one face (treated as half of a sheet {} m thick)",
                        2.0 * thickness
                    ),
                },
            ),
            Geometry::Sphere { radius } => (Shape::Sphere, radius, format!("sphere of radius {radius} m")),
            Geometry::Cylinder { radius } => (
                Shape::Cylinder,
                radius,
                format!("infinite cylinder of radius {radius} m (no uptake through the ends)"),
            ),
        };
        if !(len.is_finite() && len > 0.0) {
            return Err(Error::setting(
                "geometry",
                format!("expected a length > 0 m, found {len}"),
            ));
        }
        Ok((shape, len, what))
    }
}

/// How `M_∞` is obtained.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Plateau {
    /// `M_∞` known (same unit as the data).
    Given(f64),
    /// `M_∞` = mean of the last `k` points, which must span < 1 % of their mean.
    MeanOfLast(usize),
}

/// Result of the half-time method.
#[derive(Debug, Clone, PartialEq)]
pub struct HalfTimeEstimate {
    /// Diffusion coefficient `D = τ½ ℓ²/t½` (m²/s).
    pub d: f64,
    /// Half-time `t½` (s).
    pub t_half: f64,
    /// `M_∞` used (data unit).
    pub m_inf: f64,
    /// `τ½` used (exact root for the geometry).
    pub tau_half: f64,
    /// Length scale `ℓ` (m).
    pub length: f64,
    /// What was assumed, in plain sentences.
    pub assumptions: Vec<String>,
}

fn m_inf_of(m: &[f64], plateau: Plateau, assumptions: &mut Vec<String>) -> Result<f64> {
    match plateau {
        Plateau::Given(v) => {
            if !(v.is_finite() && v != 0.0) {
                return Err(Error::setting(
                    "m_inf",
                    format!("expected a finite non-zero M_inf, found {v}"),
                ));
            }
            assumptions.push(format!("M_inf = {v} as given"));
            Ok(v)
        }
        Plateau::MeanOfLast(k) => {
            if k == 0 || k > m.len() {
                return Err(Error::setting(
                    "plateau_points",
                    format!("expected 1..={} points for the plateau, found {k}", m.len()),
                ));
            }
            let tail = &m[m.len() - k..];
            let mean = tail.iter().sum::<f64>() / k as f64;
            let lo = tail.iter().cloned().fold(f64::INFINITY, f64::min);
            let hi = tail.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
            if mean == 0.0 || (hi - lo) > 0.01 * mean.abs() {
                return Err(Error::Fit(format!(
                    "the last {k} points span {} ({:.2} % of their mean {mean}): the curve has not \
                     reached a plateau, so M_inf cannot be estimated; give M_inf or measure longer",
                    hi - lo,
                    100.0 * (hi - lo) / mean.abs()
                )));
            }
            assumptions.push(format!(
                "M_inf = {mean}, the mean of the last {k} points (plateau: they span {:.3} %)",
                100.0 * (hi - lo) / mean.abs()
            ));
            Ok(mean)
        }
    }
}

fn check_uptake(t: &[f64], m: &[f64]) -> Result<()> {
    check_same_length("t", t.len(), "M_t", m.len())?;
    check_column("t", t, true)?;
    check_column("M_t", m, false)?;
    if let Some(&t0) = t.first() {
        if t0 < 0.0 {
            return Err(crate::error::Error::input(
                crate::error::InputKind::NegativeTime,
                crate::error::Location::default().with_column("t"),
                format!("the first time is {t0} s; uptake times count from the start at 0"),
            ));
        }
    }
    Ok(())
}

/// Half-time estimate of `D` from an uptake curve `m` (any unit) at times `t` (s, from the
/// start of the exposure, increasing).
pub fn half_time(
    t: &[f64],
    m: &[f64],
    plateau: Plateau,
    geometry: Geometry,
) -> Result<HalfTimeEstimate> {
    check_uptake(t, m)?;
    if t.len() < 2 {
        return Err(too_few("half-time method", 2, t.len()));
    }
    let (shape, length, what) = geometry.shape_and_length()?;
    let mut assumptions = vec![format!(
        "{what}; constant D; surface at its final value from t = 0; uniform start"
    )];
    let m_inf = m_inf_of(m, plateau, &mut assumptions)?;
    let frac = |i: usize| m[i] / m_inf;
    let Some(i) = (0..m.len()).find(|&i| frac(i) >= 0.5) else {
        let max = (0..m.len()).map(frac).fold(f64::NEG_INFINITY, f64::max);
        return Err(Error::Fit(format!(
            "the curve never reaches half of M_inf (largest fraction {max:.4}): no half-time"
        )));
    };
    let t_half = if i == 0 {
        if frac(0) == 0.5 {
            t[0]
        } else {
            return Err(Error::Fit(format!(
                "the first point (t = {} s) is already past half uptake (fraction {:.4}): \
                 the half-time is not bracketed by data",
                t[0],
                frac(0)
            )));
        }
    } else {
        let (f0, f1) = (frac(i - 1), frac(i));
        let (s0, s1) = (t[i - 1].sqrt(), t[i].sqrt());
        let s = s0 + (0.5 - f0) * (s1 - s0) / (f1 - f0);
        s * s
    };
    assumptions.push(format!(
        "t_half = {t_half} s by linear interpolation in sqrt(t) between points {} and {}",
        i,
        i + 1
    ));
    let tau_half = analytic::tau_half(shape)?;
    assumptions.push(format!(
        "tau_half = {tau_half:.12} (exact root of the series)"
    ));
    if t_half <= 0.0 {
        return Err(Error::Fit("the half-time is not positive".into()));
    }
    Ok(HalfTimeEstimate {
        d: tau_half * length * length / t_half,
        t_half,
        m_inf,
        tau_half,
        length,
        assumptions,
    })
}

/// Result of the initial-slope method.
#[derive(Debug, Clone, PartialEq)]
pub struct SqrtSlopeEstimate {
    /// Diffusion coefficient `D = π (s ℓ/4)²` (m²/s).
    pub d: f64,
    /// The straight line of `M_t/M_∞` against `√t` (slope in s^−1/2).
    pub line: LineFit,
    /// `M_∞` used.
    pub m_inf: f64,
    /// What was assumed.
    pub assumptions: Vec<String>,
}

/// Initial-slope estimate of `D` for a plane sheet from an uptake curve `m` at times `t` (s):
/// regress `M_t/M_∞` on `√t` over the points with fraction ≤ `limit` (0 < limit ≤ 0.6),
/// optionally through the origin, and use `D = π (s ℓ/4)²` with `ℓ` the effective thickness.
pub fn initial_slope(
    t: &[f64],
    m: &[f64],
    plateau: Plateau,
    thickness: f64,
    faces: Faces,
    limit: f64,
    through_origin: bool,
) -> Result<SqrtSlopeEstimate> {
    check_uptake(t, m)?;
    if !(limit > 0.0 && limit <= 0.6) {
        return Err(Error::setting(
            "limit",
            format!("expected an upper fraction in (0, 0.6] for the early part, found {limit}"),
        ));
    }
    let (_, length, what) = Geometry::Sheet { thickness, faces }.shape_and_length()?;
    let mut assumptions = vec![format!(
        "{what}; constant D; early-time relation M_t/M_inf = (4/L) sqrt(D t/pi)"
    )];
    let m_inf = m_inf_of(m, plateau, &mut assumptions)?;
    // Early part: points before the fraction first exceeds the limit.
    let mut xs = Vec::new();
    let mut ys = Vec::new();
    for (&ti, &mi) in t.iter().zip(m) {
        let f = mi / m_inf;
        if f > limit {
            break;
        }
        xs.push(ti.sqrt());
        ys.push(f);
    }
    let need = if through_origin { 2 } else { 3 };
    if xs.len() < need {
        return Err(too_few(
            &format!("initial slope (points with M_t/M_inf <= {limit})"),
            need,
            xs.len(),
        ));
    }
    let line = fit_line(&xs, &ys, None, through_origin)?;
    if line.slope <= 0.0 {
        return Err(Error::Fit(format!(
            "the early uptake does not rise with sqrt(t) (slope {:e})",
            line.slope
        )));
    }
    assumptions.push(format!(
        "{} points with M_t/M_inf <= {limit}, line {}",
        xs.len(),
        if through_origin {
            "through the origin"
        } else {
            "with free intercept"
        }
    ));
    let q = line.slope * length / 4.0;
    Ok(SqrtSlopeEstimate {
        d: std::f64::consts::PI * q * q,
        line,
        m_inf,
        assumptions,
    })
}
