//! Goodness-of-fit figures from the weighted residuals.
//!
//! With `n` residuals `r_i`, `k` free parameters and `RSS = Σ r_i²`:
//! - `RMSE = √(RSS/n)`; residual standard deviation `s = √(RSS/(n − k))`;
//! - weighted `R² = 1 − RSS / Σ w_i (y_i − ȳ_w)²`, with `w_i = 1/σ_i²` the weights used in
//!   the residuals `r_i = (y_i − f_i)/σ_i` and `ȳ_w = Σ w_i y_i / Σ w_i` (only when the
//!   problem supplies its observations);
//! - information criteria for a Gaussian likelihood with unknown variance (maximised over
//!   σ², σ̂² = RSS/n), dropping the constant `n (ln 2π + 1)`:
//!   `AIC = n ln(RSS/n) + 2K`, `AICc = AIC + 2K(K + 1)/(n − K − 1)`,
//!   `BIC = n ln(RSS/n) + K ln n`, where **K = k + 1 counts the variance** as a parameter.
//!   The same formulas are used whatever the weighting, so values from fits of the same data
//!   can be compared; only differences between models mean anything.
//! - when the residuals are divided by absolute σ: `χ² = RSS`, reduced `χ²/(n − k)` and the
//!   upper-tail probability `P(χ²_{n−k} ≥ χ²)`.
//!
//! References: K. P. Burnham & D. R. Anderson, *Model Selection and Multimodel Inference*,
//! 2nd ed. (2002), §2.2–2.4 (AIC from RSS, AICc, counting σ²); G. Schwarz, Ann. Stat. 6 (1978)
//! 461 (BIC); P. R. Bevington & D. K. Robinson, *Data Reduction and Error Analysis*, 3rd ed.
//! (2003), ch. 11 (χ² test).

use serde::Serialize;

use crate::error::{Error, Result};
use crate::stats::intervals::chi2_sf;

/// χ² figures (residuals divided by absolute σ).
#[derive(Debug, Clone, Serialize)]
pub struct ChiSquare {
    /// `χ² = Σ r_i²`.
    pub chi2: f64,
    /// Degrees of freedom `n − k`.
    pub dof: usize,
    /// `χ²/(n − k)`.
    pub reduced: f64,
    /// `P(χ²_{n−k} ≥ χ²)`; small values mean the misfit is larger than σ explains.
    pub p_value: f64,
}

/// Goodness-of-fit figures.
#[derive(Debug, Clone, Serialize)]
pub struct Goodness {
    /// Number of residuals.
    pub n: usize,
    /// Number of free parameters (not counting the variance).
    pub k: usize,
    /// Residual sum of squares (weighted).
    pub rss: f64,
    /// `√(RSS/n)`.
    pub rmse: f64,
    /// `√(RSS/(n − k))`.
    pub residual_sd: f64,
    /// Weighted R², when the observations are known.
    pub r_squared: Option<f64>,
    /// `n ln(RSS/n) + 2(k + 1)`.
    pub aic: f64,
    /// AIC with the small-sample correction (∞ when `n ≤ k + 2`).
    pub aicc: f64,
    /// `n ln(RSS/n) + (k + 1) ln n`.
    pub bic: f64,
    /// χ² figures when σ is absolute.
    pub chi_square: Option<ChiSquare>,
}

/// Information criteria `(AIC, AICc, BIC)` for `n` points, `k` free parameters and `rss`
/// (see the module documentation; `K = k + 1`).
pub fn information_criteria(n: usize, k: usize, rss: f64) -> (f64, f64, f64) {
    let nf = n as f64;
    let kk = (k + 1) as f64;
    let ll = nf * (rss / nf).ln();
    let aic = ll + 2.0 * kk;
    let aicc = if nf - kk - 1.0 > 0.0 {
        aic + 2.0 * kk * (kk + 1.0) / (nf - kk - 1.0)
    } else {
        f64::INFINITY
    };
    let bic = ll + kk * nf.ln();
    (aic, aicc, bic)
}

/// Goodness of fit from residuals `r`, `k` free parameters, optional observations and
/// their σ (`(y, σ)`, for R²) and whether σ is absolute.
pub fn goodness(
    r: &[f64],
    k: usize,
    observations: Option<(&[f64], &[f64])>,
    absolute_sigma: bool,
) -> Result<Goodness> {
    let n = r.len();
    if n <= k {
        return Err(Error::Fit(format!(
            "{n} residuals for {k} free parameters: more data points than parameters are needed"
        )));
    }
    let rss: f64 = r.iter().map(|v| v * v).sum();
    let (aic, aicc, bic) = information_criteria(n, k, rss);
    let r_squared = observations.and_then(|(y, s)| {
        if y.len() != n || s.len() != n {
            return None;
        }
        let w: Vec<f64> = s.iter().map(|v| 1.0 / (v * v)).collect();
        let sw: f64 = w.iter().sum();
        let ybar = y.iter().zip(&w).map(|(a, b)| a * b).sum::<f64>() / sw;
        let tss: f64 = y.iter().zip(&w).map(|(a, b)| b * (a - ybar).powi(2)).sum();
        (tss > 0.0 && tss.is_finite()).then(|| 1.0 - rss / tss)
    });
    let dof = n - k;
    let chi_square = if absolute_sigma {
        Some(ChiSquare {
            chi2: rss,
            dof,
            reduced: rss / dof as f64,
            p_value: chi2_sf(rss, dof as f64)?,
        })
    } else {
        None
    };
    Ok(Goodness {
        n,
        k,
        rss,
        rmse: (rss / n as f64).sqrt(),
        residual_sd: (rss / dof as f64).sqrt(),
        r_squared,
        aic,
        aicc,
        bic,
        chi_square,
    })
}
