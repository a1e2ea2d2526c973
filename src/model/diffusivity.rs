//! Diffusivity laws D(u).
//!
//! A law gives D (m²/s) as a function of the local value u, and the Kirchhoff integral
//! Φ(u) = ∫₀ᵘ D(v) dv (m²/s times the unit of u), which the solver uses so that the flux between
//! two cells, J = (Φ(u₁) − Φ(u₂)) / Δx, is exact at steady state for any D(u).

use crate::error::{Error, Result};

/// How the diffusivity depends on the local value u.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum DiffusivityLaw {
    /// D = D₀, m²/s.
    Constant {
        /// Diffusivity D₀, m²/s.
        d0: f64,
    },
    /// D = D₀ exp(β u / u_ref).
    Exponential {
        /// Diffusivity at u = 0, m²/s.
        d0: f64,
        /// Dimensionless strength β.
        beta: f64,
        /// Reference value u_ref, same unit as u (for example the saturation concentration).
        u_ref: f64,
    },
    /// D = D₀ (1 + β u / u_ref). Must stay positive over the values the sample reaches.
    Linear {
        /// Diffusivity at u = 0, m²/s.
        d0: f64,
        /// Dimensionless strength β.
        beta: f64,
        /// Reference value u_ref, same unit as u.
        u_ref: f64,
    },
}

impl DiffusivityLaw {
    /// A constant diffusivity D₀ (m²/s).
    pub fn constant(d0: f64) -> Self {
        DiffusivityLaw::Constant { d0 }
    }

    /// True when D does not depend on u (the discrete problem is then linear).
    pub fn is_constant(&self) -> bool {
        match *self {
            DiffusivityLaw::Constant { .. } => true,
            DiffusivityLaw::Exponential { beta, .. } | DiffusivityLaw::Linear { beta, .. } => {
                beta == 0.0
            }
        }
    }

    /// D₀, m²/s.
    pub fn d0(&self) -> f64 {
        match *self {
            DiffusivityLaw::Constant { d0 }
            | DiffusivityLaw::Exponential { d0, .. }
            | DiffusivityLaw::Linear { d0, .. } => d0,
        }
    }

    /// D(u), m²/s.
    #[inline]
    pub fn at(&self, u: f64) -> f64 {
        match *self {
            DiffusivityLaw::Constant { d0 } => d0,
            DiffusivityLaw::Exponential { d0, beta, u_ref } => d0 * (beta * u / u_ref).exp(),
            DiffusivityLaw::Linear { d0, beta, u_ref } => d0 * (1.0 + beta * u / u_ref),
        }
    }

    /// Kirchhoff integral Φ(u) = ∫₀ᵘ D(v) dv.
    #[inline]
    pub fn kirchhoff(&self, u: f64) -> f64 {
        match *self {
            DiffusivityLaw::Constant { d0 } => d0 * u,
            DiffusivityLaw::Exponential { d0, beta, u_ref } => {
                let z = beta * u / u_ref;
                if z.abs() < 1e-8 {
                    d0 * u * (1.0 + 0.5 * z)
                } else {
                    d0 * u_ref / beta * z.exp_m1()
                }
            }
            DiffusivityLaw::Linear { d0, beta, u_ref } => d0 * (u + 0.5 * beta * u * u / u_ref),
        }
    }

    /// Check that the law is physical; `name` is the setting's name for the message.
    pub fn validate(&self, name: &str) -> Result<()> {
        let d0 = self.d0();
        if !(d0.is_finite() && d0 > 0.0) {
            return Err(Error::setting(
                name,
                format!("diffusivity must be a positive finite number of m²/s, found {d0}"),
            ));
        }
        match *self {
            DiffusivityLaw::Constant { .. } => Ok(()),
            DiffusivityLaw::Exponential { beta, u_ref, .. }
            | DiffusivityLaw::Linear { beta, u_ref, .. } => {
                if !beta.is_finite() {
                    return Err(Error::setting(
                        name,
                        format!("beta must be finite, found {beta}"),
                    ));
                }
                if !(u_ref.is_finite() && u_ref != 0.0) {
                    return Err(Error::setting(
                        name,
                        format!("reference value u_ref must be finite and non-zero, found {u_ref}"),
                    ));
                }
                Ok(())
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Φ' = D, checked by central differences (common practice).
    #[test]
    fn kirchhoff_derivative_is_diffusivity() {
        let laws = [
            DiffusivityLaw::constant(2e-12),
            DiffusivityLaw::Exponential {
                d0: 1e-12,
                beta: 2.5,
                u_ref: 3.0,
            },
            DiffusivityLaw::Linear {
                d0: 1e-12,
                beta: 0.7,
                u_ref: 2.0,
            },
        ];
        for law in laws {
            for &u in &[0.0, 0.3, 1.7, 3.0] {
                let h = 1e-5;
                let fd = (law.kirchhoff(u + h) - law.kirchhoff(u - h)) / (2.0 * h);
                let d = law.at(u);
                assert!((fd - d).abs() <= 1e-7 * d, "{law:?} u={u}: {fd} vs {d}");
            }
        }
    }

    #[test]
    fn rejects_nonpositive_d0() {
        assert!(DiffusivityLaw::constant(0.0).validate("D").is_err());
        assert!(DiffusivityLaw::constant(-1e-9).validate("D").is_err());
        assert!(DiffusivityLaw::constant(1e-9).validate("D").is_ok());
        let e = DiffusivityLaw::constant(f64::NAN)
            .validate("layers[0].diffusivity")
            .unwrap_err();
        assert!(e.to_string().contains("layers[0].diffusivity"), "{e}");
    }
}
