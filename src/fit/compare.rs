//! Model comparison by the small-sample Akaike criterion.
//!
//! For models fitted to the same data: `Δ_i = AICc_i − min AICc`, Akaike weights
//! `w_i = exp(−Δ_i/2) / Σ_j exp(−Δ_j/2)` and the evidence ratio `w_best / w_i`
//! (`= exp(Δ_i/2)`), how many times more likely the best model is. AICc as in
//! [`crate::stats::goodness`] (variance counted as a parameter).
//!
//! References: K. P. Burnham & D. R. Anderson, *Model Selection and Multimodel Inference*,
//! 2nd ed. (2002), §2.9–2.10.

use serde::Serialize;

use crate::error::{Error, Result};
use crate::stats::goodness::information_criteria;

/// What the comparison needs from one fit.
#[derive(Debug, Clone, Serialize)]
pub struct ModelSummary {
    /// Model name.
    pub name: String,
    /// Number of residuals.
    pub n: usize,
    /// Residual sum of squares.
    pub rss: f64,
    /// Number of free parameters (without the variance).
    pub k: usize,
}

/// One row of the ranking.
#[derive(Debug, Clone, Serialize)]
pub struct RankedModel {
    /// Model name.
    pub name: String,
    /// AICc.
    pub aicc: f64,
    /// `AICc − min AICc`.
    pub delta: f64,
    /// Akaike weight.
    pub weight: f64,
    /// `w_best / w`.
    pub evidence_ratio: f64,
}

/// Rank models by AICc, best first. All must have the same `n` (same data).
pub fn rank_models(models: &[ModelSummary]) -> Result<Vec<RankedModel>> {
    let Some(first) = models.first() else {
        return Err(Error::Fit("no models to compare".into()));
    };
    if models.iter().any(|m| m.n != first.n) {
        return Err(Error::Fit(
            "models fitted to different numbers of points cannot be compared by AICc".into(),
        ));
    }
    let aicc: Vec<f64> = models
        .iter()
        .map(|m| information_criteria(m.n, m.k, m.rss).1)
        .collect();
    let best = aicc.iter().copied().fold(f64::INFINITY, f64::min);
    if !best.is_finite() {
        return Err(Error::Fit(
            "AICc is not finite for any model (too few points)".into(),
        ));
    }
    let rel: Vec<f64> = aicc.iter().map(|a| (-(a - best) / 2.0).exp()).collect();
    let total: f64 = rel.iter().sum();
    let mut out: Vec<RankedModel> = models
        .iter()
        .zip(aicc.iter().zip(&rel))
        .map(|(m, (a, r))| RankedModel {
            name: m.name.clone(),
            aicc: *a,
            delta: a - best,
            weight: r / total,
            evidence_ratio: ((a - best) / 2.0).exp(),
        })
        .collect();
    out.sort_by(|a, b| a.delta.total_cmp(&b.delta));
    Ok(out)
}
