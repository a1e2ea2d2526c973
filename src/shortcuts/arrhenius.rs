//! Arrhenius fit `D = D0 exp(−Ea/(R T))` by weighted linear least squares of `ln D` on `1/T`.
//!
//! With `y = ln D` and `x = 1/T`: `y = ln D0 − (Ea/R) x`. Given standard uncertainties `σ_D`,
//! the weights are `1/σ_y²` with `σ_y = σ_D/D` (first-order propagation) and the standard
//! errors follow from the weights alone (uncertainties taken as absolute); the reduced χ² is
//! reported so the user can judge them. Without `σ_D`, the standard errors are scaled by the
//! residual scatter `s² = RSS/(n − 2)` (unavailable for two points).
//! `R = 8.314462618 J/(mol K)` (CODATA 2018; exact in the 2019 SI).
//!
//! References: N. R. Draper and H. Smith, *Applied Regression Analysis*, 3rd ed. 1998, ch. 1
//! and §9.2 (weighted least squares); E. Tiesinga et al., CODATA 2018, Rev. Mod. Phys. 93
//! (2021) 025010.

use super::{check_column, check_same_length, fit_line, too_few, LineFit};
use crate::error::{Error, InputKind, Location, Result};

/// Molar gas constant (J/(mol K)), CODATA 2018 (exact).
pub const GAS_CONSTANT: f64 = 8.314_462_618;

/// Result of the Arrhenius fit.
#[derive(Debug, Clone, PartialEq)]
pub struct ArrheniusFit {
    /// Pre-exponential factor `D0` (m²/s).
    pub d0: f64,
    /// `ln D0` (with `D0` in m²/s).
    pub ln_d0: f64,
    /// Standard error of `ln D0` (≈ relative standard error of `D0`).
    pub ln_d0_se: Option<f64>,
    /// Activation energy `Ea` (J/mol).
    pub activation_energy: f64,
    /// Standard error of `Ea` (J/mol).
    pub activation_energy_se: Option<f64>,
    /// Covariance of `ln D0` and `Ea` (J/mol).
    pub covariance: Option<f64>,
    /// Reduced χ² (weighted RSS/(n − 2)) when uncertainties were given and n > 2.
    pub reduced_chi2: Option<f64>,
    /// The underlying line `ln D` against `1/T`.
    pub line: LineFit,
}

/// Fits `ln D = ln D0 − Ea/(R T)` to temperatures `temperature` (K) and diffusion coefficients
/// `d` (m²/s), with optional standard uncertainties `sigma_d` (m²/s).
pub fn arrhenius(temperature: &[f64], d: &[f64], sigma_d: Option<&[f64]>) -> Result<ArrheniusFit> {
    check_same_length("T", temperature.len(), "D", d.len())?;
    check_column("T", temperature, false)?;
    check_column("D", d, false)?;
    for (i, (&ti, &di)) in temperature.iter().zip(d).enumerate() {
        if ti <= 0.0 || di <= 0.0 {
            return Err(Error::input(
                InputKind::BadValue,
                Location::default(),
                format!(
                    "point {}: T = {ti} K and D = {di} m^2/s must both be > 0",
                    i + 1
                ),
            ));
        }
    }
    if d.len() < 2 {
        return Err(too_few("Arrhenius fit", 2, d.len()));
    }
    let x: Vec<f64> = temperature.iter().map(|t| 1.0 / t).collect();
    let y: Vec<f64> = d.iter().map(|v| v.ln()).collect();
    let weights = match sigma_d {
        None => None,
        Some(s) => {
            check_same_length("D", d.len(), "sigma_D", s.len())?;
            check_column("sigma_D", s, false)?;
            let mut w = Vec::with_capacity(s.len());
            for (i, (&si, &di)) in s.iter().zip(d).enumerate() {
                if si <= 0.0 {
                    return Err(Error::input(
                        InputKind::BadUncertainty,
                        Location::default().with_column("sigma_D"),
                        format!("point {}: uncertainty {si} must be > 0", i + 1),
                    ));
                }
                let sy = si / di;
                w.push(1.0 / (sy * sy));
            }
            Some(w)
        }
    };
    let line = fit_line(&x, &y, weights.as_deref(), false)?;
    let n = d.len();
    Ok(ArrheniusFit {
        d0: line.intercept.exp(),
        ln_d0: line.intercept,
        ln_d0_se: line.intercept_se,
        activation_energy: -line.slope * GAS_CONSTANT,
        activation_energy_se: line.slope_se.map(|s| s * GAS_CONSTANT),
        covariance: line.covariance.map(|c| -c * GAS_CONSTANT),
        reduced_chi2: if weights.is_some() && n > 2 {
            Some(line.rss / (n - 2) as f64)
        } else {
            None
        },
        line,
    })
}
