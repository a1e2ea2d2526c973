//! Parameter specifications and the map between user space and the engine's internal space.
//!
//! The user describes every parameter of the model (free or fixed) in SI units. The engine
//! works on the free parameters only, each mapped to an unbounded internal coordinate `u`:
//!
//! 1. a base transform `y = g(x)`: identity (`y = x`) or logarithm (`y = ln x`, for strictly
//!    positive quantities such as a diffusion coefficient, so a search spans decades);
//! 2. the bounds, mapped through `g` to `[gl, gh]`, are then removed:
//!    - no bounds: `u = y`;
//!    - lower bound only: `u = ln(y − gl)`;
//!    - upper bound only: `u = ln(gh − y)`;
//!    - both bounds: `u = logit((y − gl)/(gh − gl))`, so `y = gl + (gh − gl)/(1 + e^(−u))`.
//!
//! A bound is therefore never crossed; a parameter pushed against it shows up as `|u|`
//! growing large (in floating point `x` may then equal the bound, where `dx/du = 0` and the
//! parameter has no standard error), which the identifiability checks report. For a log transform a lower
//! bound ≤ 0 is no bound at all (ln x is already defined only for x > 0) and is ignored.
//!
//! The covariance found in `u` is carried to `x` with the chain rule
//! `C_x = G C_u G`, `G = diag(dx/du)` (first-order propagation).
//!
//! References: J. Nocedal & S. J. Wright, *Numerical Optimization*, 2nd ed. (2006) — change of
//! variables for simple bounds (common practice).

use serde::Serialize;

use crate::error::{Error, InputKind, Location, Result};

/// Base transform applied to a parameter before the bounds are removed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Transform {
    /// `y = x`.
    Identity,
    /// `y = ln x`; the parameter must be strictly positive.
    Log,
}

/// One model parameter as the user describes it (values in SI).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ParamSpec {
    /// Name, e.g. `D`.
    pub name: String,
    /// Unit label for reports, e.g. `m^2/s`.
    pub unit: String,
    /// Start value (SI). For a fixed parameter this is its value.
    pub start: f64,
    /// Optional lower bound (SI).
    pub lower: Option<f64>,
    /// Optional upper bound (SI).
    pub upper: Option<f64>,
    /// Whether the fit adjusts this parameter.
    pub free: bool,
    /// Base transform.
    pub transform: Transform,
}

impl ParamSpec {
    /// A free, unbounded parameter with the identity transform.
    pub fn new(name: impl Into<String>, unit: impl Into<String>, start: f64) -> Self {
        ParamSpec {
            name: name.into(),
            unit: unit.into(),
            start,
            lower: None,
            upper: None,
            free: true,
            transform: Transform::Identity,
        }
    }

    /// The same parameter with the log transform (strictly positive quantity).
    pub fn log(mut self) -> Self {
        self.transform = Transform::Log;
        self
    }

    /// The same parameter with bounds `lower ≤ x ≤ upper` (either may be `None`).
    pub fn bounds(mut self, lower: Option<f64>, upper: Option<f64>) -> Self {
        self.lower = lower;
        self.upper = upper;
        self
    }

    /// The same parameter held fixed at its start value.
    pub fn fixed(mut self) -> Self {
        self.free = false;
        self
    }
}

/// How the bounds are removed, in the base-transformed coordinate `y`.
#[derive(Debug, Clone, Copy, PartialEq)]
enum BoundMap {
    None,
    Lower(f64),
    Upper(f64),
    Both(f64, f64),
}

/// The internal map of one free parameter: `x ↔ u`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ParamMap {
    transform: Transform,
    bounds: BoundMap,
}

impl ParamMap {
    fn g(&self, x: f64) -> f64 {
        match self.transform {
            Transform::Identity => x,
            Transform::Log => x.ln(),
        }
    }

    fn g_inv(&self, y: f64) -> f64 {
        match self.transform {
            Transform::Identity => y,
            Transform::Log => y.exp(),
        }
    }

    /// True for an unbounded identity map (`u = x`).
    pub fn is_plain(&self) -> bool {
        self.transform == Transform::Identity && self.bounds == BoundMap::None
    }

    /// Internal coordinate `u` of the user value `x` (may be ±∞ or NaN outside the domain).
    pub fn to_internal(&self, x: f64) -> f64 {
        let y = self.g(x);
        match self.bounds {
            BoundMap::None => y,
            BoundMap::Lower(l) => (y - l).ln(),
            BoundMap::Upper(h) => (h - y).ln(),
            BoundMap::Both(l, h) => {
                let s = (y - l) / (h - l);
                (s / (1.0 - s)).ln()
            }
        }
    }

    /// User value `x` of the internal coordinate `u`.
    pub fn to_external(&self, u: f64) -> f64 {
        let y = match self.bounds {
            BoundMap::None => u,
            BoundMap::Lower(l) => l + u.exp(),
            BoundMap::Upper(h) => h - u.exp(),
            BoundMap::Both(l, h) => l + (h - l) / (1.0 + (-u).exp()),
        };
        self.g_inv(y)
    }

    /// Derivative `dx/du` at `u` (chain rule of the two steps).
    pub fn dx_du(&self, u: f64) -> f64 {
        let (y, dy_du) = match self.bounds {
            BoundMap::None => (u, 1.0),
            BoundMap::Lower(l) => (l + u.exp(), u.exp()),
            BoundMap::Upper(h) => (h - u.exp(), -u.exp()),
            BoundMap::Both(l, h) => {
                let s = 1.0 / (1.0 + (-u).exp());
                (l + (h - l) * s, (h - l) * s * (1.0 - s))
            }
        };
        match self.transform {
            Transform::Identity => dy_du,
            Transform::Log => y.exp() * dy_du,
        }
    }
}

/// The full parameter set: specs plus the map of the free ones.
#[derive(Debug, Clone, PartialEq)]
pub struct ParamSet {
    specs: Vec<ParamSpec>,
    free: Vec<usize>,
    maps: Vec<ParamMap>,
}

impl ParamSet {
    /// Check the specs and build the maps. Errors: empty set, duplicate names, a non-finite
    /// start, bounds with lower ≥ upper or excluding the start (the start must lie strictly
    /// inside), a log-transformed parameter that is not > 0, no free parameter.
    pub fn new(specs: Vec<ParamSpec>) -> Result<Self> {
        let mut free = Vec::new();
        let mut maps = Vec::new();
        for (i, s) in specs.iter().enumerate() {
            let loc = Location::key(format!("parameters.{}", s.name));
            if specs[..i].iter().any(|o| o.name == s.name) {
                return Err(Error::input(
                    InputKind::BadValue,
                    loc,
                    format!(
                        "parameter '{}' is defined twice; give each a unique name",
                        s.name
                    ),
                ));
            }
            if !s.start.is_finite() {
                return Err(Error::input(
                    InputKind::NotFinite,
                    loc,
                    format!(
                        "start value of '{}' must be a finite number, found {}",
                        s.name, s.start
                    ),
                ));
            }
            for b in [s.lower, s.upper].into_iter().flatten() {
                if b.is_nan() {
                    return Err(Error::input(
                        InputKind::BadBounds,
                        loc.clone(),
                        format!("a bound of '{}' is NaN", s.name),
                    ));
                }
            }
            if let (Some(l), Some(h)) = (s.lower, s.upper) {
                if l >= h {
                    return Err(Error::input(
                        InputKind::BadBounds,
                        loc,
                        format!(
                            "bounds of '{}' need lower < upper, found [{l}, {h}]",
                            s.name
                        ),
                    ));
                }
            }
            if s.transform == Transform::Log && s.start <= 0.0 {
                return Err(Error::input(
                    InputKind::BadValue,
                    loc,
                    format!(
                        "'{}' uses the log transform, so its start must be > 0, found {}",
                        s.name, s.start
                    ),
                ));
            }
            if !s.free {
                continue;
            }
            let lower_inside = s.lower.is_none_or(|l| s.start > l);
            let upper_inside = s.upper.is_none_or(|h| s.start < h);
            if !lower_inside || !upper_inside {
                return Err(Error::input(
                    InputKind::BadBounds,
                    loc,
                    format!(
                        "start {} of '{}' must lie strictly inside its bounds [{}, {}]",
                        s.start,
                        s.name,
                        s.lower.map_or("-inf".to_string(), |v| v.to_string()),
                        s.upper.map_or("+inf".to_string(), |v| v.to_string())
                    ),
                ));
            }
            let g = |x: f64| match s.transform {
                Transform::Identity => Some(x),
                Transform::Log => (x > 0.0).then(|| x.ln()),
            };
            let gl = s.lower.and_then(g).filter(|v| v.is_finite());
            let gh = s.upper.and_then(g).filter(|v| v.is_finite());
            let bounds = match (gl, gh) {
                (None, None) => BoundMap::None,
                (Some(l), None) => BoundMap::Lower(l),
                (None, Some(h)) => BoundMap::Upper(h),
                (Some(l), Some(h)) => BoundMap::Both(l, h),
            };
            free.push(i);
            maps.push(ParamMap {
                transform: s.transform,
                bounds,
            });
        }
        if specs.is_empty() || free.is_empty() {
            return Err(Error::input(
                InputKind::MissingKey,
                Location::key("parameters"),
                "the fit needs at least one free parameter",
            ));
        }
        Ok(ParamSet { specs, free, maps })
    }

    /// All specs, in the model's order.
    pub fn specs(&self) -> &[ParamSpec] {
        &self.specs
    }

    /// Number of parameters (free and fixed).
    pub fn n_total(&self) -> usize {
        self.specs.len()
    }

    /// Number of free parameters.
    pub fn n_free(&self) -> usize {
        self.free.len()
    }

    /// Indices (into the full vector) of the free parameters.
    pub fn free_indices(&self) -> &[usize] {
        &self.free
    }

    /// Maps of the free parameters, in the order of [`ParamSet::free_indices`].
    pub fn maps(&self) -> &[ParamMap] {
        &self.maps
    }

    /// Full start vector (SI).
    pub fn start_full(&self) -> Vec<f64> {
        self.specs.iter().map(|s| s.start).collect()
    }

    /// Internal coordinates of the free parameters of a full vector.
    pub fn to_internal(&self, full: &[f64]) -> Vec<f64> {
        self.free
            .iter()
            .zip(&self.maps)
            .map(|(&i, m)| m.to_internal(full.get(i).copied().unwrap_or(f64::NAN)))
            .collect()
    }

    /// Write the free parameters given by internal coordinates `u` into `full` (SI).
    pub fn fill_external(&self, u: &[f64], full: &mut [f64]) {
        for ((&i, m), &ui) in self.free.iter().zip(&self.maps).zip(u) {
            if let Some(slot) = full.get_mut(i) {
                *slot = m.to_external(ui);
            }
        }
    }

    /// `dx/du` for each free parameter at internal coordinates `u`.
    pub fn dx_du(&self, u: &[f64]) -> Vec<f64> {
        self.maps
            .iter()
            .zip(u)
            .map(|(m, &ui)| m.dx_du(ui))
            .collect()
    }

    /// Names of the free parameters.
    pub fn free_names(&self) -> Vec<String> {
        self.free
            .iter()
            .map(|&i| self.specs[i].name.clone())
            .collect()
    }

    /// Specs of the free parameters.
    pub fn free_specs(&self) -> Vec<&ParamSpec> {
        self.free.iter().map(|&i| &self.specs[i]).collect()
    }

    /// The same set with free parameter `k` (index among the free ones) fixed at the user
    /// value `value`. Used by the profile likelihood.
    pub fn with_fixed(&self, k: usize, value: f64) -> Result<ParamSet> {
        let idx = *self
            .free
            .get(k)
            .ok_or_else(|| Error::Internal(format!("free parameter index {k} out of range")))?;
        let mut specs = self.specs.clone();
        specs[idx].free = false;
        specs[idx].start = value;
        ParamSet::new(specs)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn maps_round_trip_and_derivative() {
        let set = ParamSet::new(vec![
            ParamSpec::new("a", "-", 2.0),
            ParamSpec::new("D", "m^2/s", 1e-10).log(),
            ParamSpec::new("b", "-", 0.3).bounds(Some(0.0), Some(1.0)),
            ParamSpec::new("c", "-", 5.0).bounds(Some(1.0), None),
            ParamSpec::new("h", "W/(m^2 K)", 10.0)
                .log()
                .bounds(Some(1.0), Some(1e4)),
        ])
        .unwrap();
        let x = set.start_full();
        let u = set.to_internal(&x);
        let mut back = vec![0.0; 5];
        set.fill_external(&u, &mut back);
        for (a, b) in x.iter().zip(&back) {
            assert!((a - b).abs() <= 1e-12 * a.abs());
        }
        // derivative against a central difference
        let d = set.dx_du(&u);
        for k in 0..5 {
            let h = 1e-6;
            let xp = set.maps()[k].to_external(u[k] + h);
            let xm = set.maps()[k].to_external(u[k] - h);
            let fd = (xp - xm) / (2.0 * h);
            assert!(
                (fd - d[k]).abs() <= 1e-6 * d[k].abs(),
                "{k}: {fd} vs {}",
                d[k]
            );
        }
    }

    #[test]
    fn bad_specs_are_rejected() {
        let e = ParamSet::new(vec![ParamSpec::new("a", "-", 2.0).bounds(Some(3.0), None)]);
        assert_eq!(e.unwrap_err().input_kind(), Some(InputKind::BadBounds));
        let e = ParamSet::new(vec![ParamSpec::new("D", "-", -1.0).log()]);
        assert_eq!(e.unwrap_err().input_kind(), Some(InputKind::BadValue));
        let e = ParamSet::new(vec![ParamSpec::new("a", "-", 1.0).fixed()]);
        assert!(e.is_err());
    }
}
