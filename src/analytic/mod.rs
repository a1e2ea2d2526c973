//! Closed-form solutions of the one-dimensional diffusion equation `∂u/∂t = D ∂²u/∂x²`.
//!
//! These serve two purposes: they are independent oracles for the numerical solver, and they
//! give start values for fits (through the half-time and the other shortcut estimators in
//! [`crate::shortcuts`]). Every function works on plain `f64` in SI units (m, s, m²/s) or on a
//! dimensionless time `τ = D t / ℓ²` whose length scale `ℓ` is named in each function.
//!
//! Contents:
//! - [`sheet`]: plane sheet with both faces at a constant value (Dirichlet), uptake by the
//!   long-time and the short-time series, the concentration profile, and permeation through a
//!   membrane with its time lag;
//! - [`robin`]: plane sheet with a surface transfer (Robin) condition, roots of `β tan β = Bi`;
//! - [`sphere`] and [`cylinder`] (with Bessel functions `J0`, `J1` and the zeros of `J0`);
//! - [`semi_infinite`]: erfc profile, uptake per area, inverse problems, thin-film Gaussians;
//! - [`special`]: erf, erfc, erfcx, ierfc and the inverse of erfc to full precision;
//! - [`periodic`]: periodic surface value on a rod with linear lateral loss;
//! - [`flash`]: rear-face rise after an instantaneous pulse;
//! - [`Shape`], [`uptake_fraction`], [`tau_at_fraction`], [`tau_half`]: a common interface for
//!   the uptake curves and their inverse (half-times and other fractions).
//!
//! Root finding uses Brent's method on a sign-changing bracket (argmin's `BrentRoot`).
//!
//! References: J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford 1975 (chapters 2–6);
//! M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions*, 1964 (ch. 7 and 9);
//! R. P. Brent, *Algorithms for Minimization without Derivatives*, 1973 (ch. 4).

pub mod cylinder;
pub mod flash;
pub mod periodic;
pub mod robin;
pub mod semi_infinite;
pub mod sheet;
pub mod special;
pub mod sphere;

use crate::error::{Error, Result};
use argmin::core::{CostFunction, Executor, State};
use argmin::solver::brent::BrentRoot;

pub(crate) use special::{ierfc, FRAC_1_SQRT_PI};

/// The geometries whose uptake curves `M_t/M_∞` are available through [`uptake_fraction`].
///
/// Each variant fixes the length scale `ℓ` of the dimensionless time `τ = D t / ℓ²`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Shape {
    /// Plane sheet of full thickness `L`, both faces held at a constant value; `ℓ = L`.
    /// A sheet of thickness `L` sealed on one face behaves as half of a sheet of thickness
    /// `2L` with both faces exposed, so use `ℓ = 2L` for it (see [`sheet::Faces`]).
    Sheet,
    /// Plane sheet with surface transfer `−D ∂u/∂n = h (u − u_eq)` at both faces;
    /// `ℓ = l`, the HALF-thickness, and `biot = h l / D` (Crank's convention).
    RobinSheet {
        /// `Bi = h l / D` with `l` the half-thickness (dimensionless, > 0).
        biot: f64,
    },
    /// Sphere of radius `a`, surface at a constant value; `ℓ = a`.
    Sphere,
    /// Infinite solid cylinder of radius `a`, surface at a constant value; `ℓ = a`.
    Cylinder,
}

impl Shape {
    fn check(&self) -> Result<()> {
        if let Shape::RobinSheet { biot } = self {
            robin::check_biot(*biot)?;
        }
        Ok(())
    }
}

/// Fractional uptake `M_t/M_∞` at dimensionless time `τ = D t / ℓ²` (`ℓ` as in [`Shape`]).
///
/// Errors when `τ` is negative or not finite, or when the Biot number is invalid.
pub fn uptake_fraction(shape: Shape, tau: f64) -> Result<f64> {
    shape.check()?;
    check_tau(tau)?;
    Ok(match shape {
        Shape::Sheet => sheet::uptake(tau),
        Shape::RobinSheet { biot } => robin::uptake(biot, tau)?,
        Shape::Sphere => sphere::uptake(tau),
        Shape::Cylinder => cylinder::uptake(tau),
    })
}

/// The dimensionless time `τ = D t / ℓ²` at which `M_t/M_∞` reaches `fraction` (0 < fraction < 1),
/// found by Brent's method on the (monotone) uptake series to about 1e-14 relative.
pub fn tau_at_fraction(shape: Shape, fraction: f64) -> Result<f64> {
    shape.check()?;
    if !(fraction > 0.0 && fraction < 1.0) {
        return Err(Error::setting(
            "fraction",
            format!("expected a fraction strictly between 0 and 1, found {fraction}"),
        ));
    }
    let f = |tau: f64| -> Result<f64> { Ok(uptake_fraction(shape, tau)? - fraction) };
    // Bracket: start from a small τ and double until the uptake exceeds the fraction.
    let mut lo = 0.0;
    let mut hi = 1e-3;
    let mut guard = 0;
    while f(hi)? < 0.0 {
        lo = hi;
        hi *= 2.0;
        guard += 1;
        if guard > 200 {
            return Err(Error::Internal(format!(
                "no bracket for fraction {fraction} of {shape:?}"
            )));
        }
    }
    find_root(f, lo, hi)
}

/// The half-time `τ½`: the dimensionless time at which `M_t/M_∞ = 1/2` ([`tau_at_fraction`]).
///
/// Exact values: sheet 0.0491826848809 (`D t½ / L²`), sphere 0.0305465242980, cylinder
/// 0.0630581941915 (`D t½ / a²`). Crank's two-term formula gives 0.04919 for the sheet, which is
/// 1.0e-4 (relative) too high.
pub fn tau_half(shape: Shape) -> Result<f64> {
    tau_at_fraction(shape, 0.5)
}

pub(crate) fn check_tau(tau: f64) -> Result<()> {
    if !(tau.is_finite() && tau >= 0.0) {
        return Err(Error::setting(
            "time",
            format!("expected a finite dimensionless time D t / l^2 >= 0, found {tau}"),
        ));
    }
    Ok(())
}

/// Checks that an SI quantity is finite and strictly positive.
pub(crate) fn check_positive(name: &str, value: f64) -> Result<()> {
    if !(value.is_finite() && value > 0.0) {
        return Err(Error::setting(
            name,
            format!("expected a finite value > 0, found {value}"),
        ));
    }
    Ok(())
}

/// Checks that an SI quantity is finite and not negative.
pub(crate) fn check_non_negative(name: &str, value: f64) -> Result<()> {
    if !(value.is_finite() && value >= 0.0) {
        return Err(Error::setting(
            name,
            format!("expected a finite value >= 0, found {value}"),
        ));
    }
    Ok(())
}

/// Checks that a value is finite.
pub(crate) fn check_finite(name: &str, value: f64) -> Result<()> {
    if !value.is_finite() {
        return Err(Error::setting(
            name,
            format!("expected a finite value, found {value}"),
        ));
    }
    Ok(())
}

struct RootProblem<F: Fn(f64) -> Result<f64>>(F);

impl<F: Fn(f64) -> Result<f64>> CostFunction for RootProblem<F> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, x: &f64) -> std::result::Result<f64, argmin::core::Error> {
        (self.0)(*x).map_err(|e| argmin::core::Error::msg(e.to_string()))
    }
}

/// A root of `f` in `[lo, hi]`, where `f(lo)` and `f(hi)` differ in sign, by Brent's method to
/// about two ulp of the root.
pub(crate) fn find_root<F: Fn(f64) -> Result<f64>>(f: F, lo: f64, hi: f64) -> Result<f64> {
    let flo = f(lo)?;
    if flo == 0.0 {
        return Ok(lo);
    }
    let fhi = f(hi)?;
    if fhi == 0.0 {
        return Ok(hi);
    }
    if flo.signum() == fhi.signum() || flo.is_nan() || fhi.is_nan() {
        return Err(Error::Internal(format!(
            "root bracket [{lo:e}, {hi:e}] does not change sign ({flo:e}, {fhi:e})"
        )));
    }
    let solver = BrentRoot::new(lo, hi, 0.0);
    let res = Executor::new(RootProblem(f), solver)
        .configure(|s| s.max_iters(500))
        .run()
        .map_err(|e| Error::Internal(format!("root finding failed: {e}")))?;
    res.state()
        .get_param()
        .copied()
        .ok_or_else(|| Error::Internal("root finding returned no value".into()))
}
