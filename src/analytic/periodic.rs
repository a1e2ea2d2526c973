//! Periodic surface value on a semi-infinite rod with linear lateral loss.
//!
//! For `T_t = α T_xx − ε T` (α the diffusivity in m²/s, ε ≥ 0 the lateral loss coefficient in
//! 1/s) with `T(0, t) = A cos(ω t)`, the steady periodic solution is
//! `T = A exp(−a x) cos(ω t − b x)` with `(a + i b)² = (ε + i ω)/α`, that is
//!
//! `a b = ω/(2α)`, `a² − b² = ε/α`,
//!
//! so `a = √((√(ε² + ω²) + ε)/(2α))` and `b = ω/(2α a)` (written so that no cancellation
//! occurs when ε ≫ ω). Between two positions `Δx` apart the amplitude ratio is `exp(a Δx)`
//! and the phase lag `b Δx` (rad), whatever ε is — which is why the two-station formula
//! `α = ω Δx² / (2 Δφ ln(A1/A2))` holds with lateral loss.
//!
//! References: A. J. Ångström, Ann. Phys. Chem. 114 (1861) 513 (from memory); derivation as in
//! the reference notes of this project (`../shared/reference/README.md` §6).

use super::{check_non_negative, check_positive};
use crate::error::Result;

/// Decay and phase coefficients `(a, b)` (1/m) of the periodic wave on a lossy rod.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Wave {
    /// Amplitude decay coefficient `a` (1/m): amplitude ∝ `exp(−a x)`.
    pub decay: f64,
    /// Phase coefficient `b` (rad/m): phase lag `b x`.
    pub phase: f64,
}

impl Wave {
    /// The wave for diffusivity `alpha` (m²/s), loss `eps` (1/s), angular frequency `omega`
    /// (rad/s).
    pub fn new(alpha: f64, eps: f64, omega: f64) -> Result<Self> {
        check_positive("diffusivity", alpha)?;
        check_non_negative("lateral_loss", eps)?;
        check_positive("angular_frequency", omega)?;
        let a = (((eps * eps + omega * omega).sqrt() + eps) / (2.0 * alpha)).sqrt();
        Ok(Wave {
            decay: a,
            phase: omega / (2.0 * alpha * a),
        })
    }

    /// Amplitude ratio `A1/A2 = exp(a Δx)` between positions `dx` (m) apart (`dx > 0`).
    pub fn amplitude_ratio(&self, dx: f64) -> f64 {
        (self.decay * dx).exp()
    }

    /// Phase lag `Δφ = b Δx` (rad) between positions `dx` (m) apart.
    pub fn phase_lag(&self, dx: f64) -> f64 {
        self.phase * dx
    }

    /// Temperature excursion `A exp(−a x) cos(ω t − b x)` at position `x` (m) and time `t` (s)
    /// for surface amplitude `amplitude` and angular frequency `omega` (rad/s).
    pub fn value(&self, amplitude: f64, omega: f64, x: f64, t: f64) -> f64 {
        amplitude * (-self.decay * x).exp() * (omega * t - self.phase * x).cos()
    }
}
