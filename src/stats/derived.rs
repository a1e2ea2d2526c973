//! Derived quantities and their standard uncertainty by the delta method.
//!
//! For `q = g(θ, z)` with fitted parameters θ (covariance `C`) and extra independent inputs
//! `z_k` with standard uncertainties `u_k` (e.g. ρ and c_p in `k = α ρ c_p`):
//! `u(q)² = ∇_θgᵀ C ∇_θg + Σ_k (∂g/∂z_k)² u_k²` (first-order propagation, GUM eq. 13 with
//! the z independent of θ and of each other). The gradient is taken by central differences
//! with step `h = ε^(1/3) · |v|` (or `ε^(1/3)` at zero).
//!
//! References: JCGM 100:2008 (GUM), §5.1–5.2; M. Abramowitz & I. A. Stegun (1964) 25.3.21.

use serde::Serialize;

use crate::error::{Error, Result};

/// An extra input that is not fitted, with its standard uncertainty (SI).
#[derive(Debug, Clone, Serialize)]
pub struct ExtraInput {
    /// Name, e.g. `rho`.
    pub name: String,
    /// Value (SI).
    pub value: f64,
    /// Standard uncertainty (SI).
    pub std_uncertainty: f64,
}

/// A derived quantity with its standard uncertainty.
#[derive(Debug, Clone, Serialize)]
pub struct DerivedValue {
    /// Value `g(θ̂, z)`.
    pub value: f64,
    /// Standard uncertainty (first order).
    pub std_uncertainty: f64,
    /// Contribution of the fitted parameters to the variance.
    pub variance_from_fit: f64,
    /// Contribution of each extra input to the variance.
    pub variance_from_extras: Vec<f64>,
}

fn central<F: Fn(f64) -> f64>(f: F, v: f64) -> f64 {
    let c = f64::EPSILON.cbrt();
    let h = if v == 0.0 { c } else { c * v.abs() };
    let vp = v + h;
    let vm = v - (vp - v);
    (f(vp) - f(vm)) / (vp - vm)
}

/// Delta-method propagation. `theta` is the parameter vector that `g` takes as its first
/// argument, `cov` its covariance (entries `None` where not identifiable; a parameter with
/// a zero gradient may have `None`), `extras` the further inputs passed as second argument.
pub fn delta_method<G>(
    g: G,
    theta: &[f64],
    cov: &[Vec<Option<f64>>],
    extras: &[ExtraInput],
) -> Result<DerivedValue>
where
    G: Fn(&[f64], &[f64]) -> f64,
{
    let z: Vec<f64> = extras.iter().map(|e| e.value).collect();
    let value = g(theta, &z);
    if !value.is_finite() {
        return Err(Error::Fit(
            "the derived quantity is not finite at the estimates".into(),
        ));
    }
    let p = theta.len();
    if cov.len() != p || cov.iter().any(|row| row.len() != p) {
        return Err(Error::Internal(
            "covariance size does not match the parameters".into(),
        ));
    }
    let grad: Vec<f64> = (0..p)
        .map(|j| {
            central(
                |v| {
                    let mut t = theta.to_vec();
                    t[j] = v;
                    g(&t, &z)
                },
                theta[j],
            )
        })
        .collect();
    let mut var_fit = 0.0;
    for a in 0..p {
        for b in 0..p {
            if grad[a] == 0.0 || grad[b] == 0.0 {
                continue;
            }
            let c = cov[a][b].ok_or_else(|| {
                Error::Fit(
                    "the derived quantity depends on a parameter that is not identifiable, \
                     so it has no standard uncertainty"
                        .into(),
                )
            })?;
            var_fit += grad[a] * c * grad[b];
        }
    }
    let mut var_extra = Vec::with_capacity(extras.len());
    for (k, e) in extras.iter().enumerate() {
        if !(e.std_uncertainty >= 0.0 && e.std_uncertainty.is_finite()) {
            return Err(Error::setting(
                e.name.clone(),
                format!(
                    "standard uncertainty must be ≥ 0, found {}",
                    e.std_uncertainty
                ),
            ));
        }
        let d = central(
            |v| {
                let mut zz = z.clone();
                zz[k] = v;
                g(theta, &zz)
            },
            z[k],
        );
        var_extra.push((d * e.std_uncertainty).powi(2));
    }
    let total = var_fit + var_extra.iter().sum::<f64>();
    if !total.is_finite() {
        return Err(Error::Fit("the propagated variance is not finite".into()));
    }
    Ok(DerivedValue {
        value,
        std_uncertainty: total.max(0.0).sqrt(),
        variance_from_fit: var_fit,
        variance_from_extras: var_extra,
    })
}
