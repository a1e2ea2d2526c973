//! Model comparison: several experiment files that describe the same data with different
//! physics (constant D against D(u), with or without a surface resistance...), each fitted,
//! ranked by AICc with Akaike weights and evidence ratios ([`crate::fit::compare`]).
//!
//! The criteria need one common weighting: every model's residuals are divided by the same
//! σ_i s_d, those of the first (reference) model, whose dataset scales s_d were estimated from
//! its own scatter. The models must fit the same datasets with the same observed values.
//!
//! Plain-language verdicts follow the usual reading of ΔAICc (Burnham & Anderson 2002, §2.6,
//! p. 70): below 2, substantial support for both; 4–7, considerably less for the worse one;
//! above 10, essentially none.

use super::Analysis;
use crate::error::{Error, Result};
use crate::fit::compare::{rank_models, ModelSummary, RankedModel};

/// The ranking of a set of fitted models.
#[derive(Debug, Clone)]
pub struct Comparison {
    /// Each model's name (title, else file name), in the order given.
    pub names: Vec<String>,
    /// Residual sum of squares of each model under the common weighting, in the order given.
    pub rss: Vec<f64>,
    /// Free parameters of each model, in the order given.
    pub free: Vec<usize>,
    /// The ranking, best first.
    pub ranked: Vec<RankedModel>,
    /// The verdict in words.
    pub verdict: String,
}

/// A model's display name.
pub fn model_name(a: &Analysis) -> String {
    a.experiment.title.clone().unwrap_or_else(|| {
        a.experiment.file.file_name().map_or_else(
            || a.experiment.file.display().to_string(),
            |f| f.to_string_lossy().into(),
        )
    })
}

/// Rank `models` (the first is the reference whose weighting all share) by AICc.
pub fn compare(models: &[&Analysis]) -> Result<Comparison> {
    let Some(reference) = models.first() else {
        return Err(Error::Fit("no models to compare".into()));
    };
    let re = &reference.experiment;
    let mut names = Vec::new();
    let mut rss = Vec::new();
    let mut free = Vec::new();
    for (i, a) in models.iter().enumerate() {
        let e = &a.experiment;
        let mut name = model_name(a);
        if names.contains(&name) {
            name = format!("{name} [model {}]", i + 1);
        }
        if e.datasets.len() != re.datasets.len() {
            return Err(Error::Fit(format!(
                "'{name}' has {} datasets and '{}' has {}: models compared by AICc must fit the same data",
                e.datasets.len(),
                model_name(reference),
                re.datasets.len()
            )));
        }
        let mut total = 0.0;
        for (d, (ds, rds)) in e.datasets.iter().zip(re.datasets.iter()).enumerate() {
            if ds.observed != rds.observed || ds.sigma.len() != rds.sigma.len() {
                return Err(Error::Fit(format!(
                    "dataset {} ('{}') of '{name}' holds other values than dataset '{}' of '{}': \
                     models compared by AICc must fit the same data",
                    d + 1,
                    ds.name,
                    rds.name,
                    model_name(reference)
                )));
            }
            let s_d = reference.dataset_scales[d];
            total += ds
                .observed
                .iter()
                .zip(&a.predictions[d])
                .zip(&rds.sigma)
                .map(|((y, f), sigma)| {
                    let w = if sigma.is_finite() && *sigma > 0.0 {
                        *sigma
                    } else {
                        1.0
                    };
                    ((y - f) / (w * s_d)).powi(2)
                })
                .sum::<f64>();
        }
        names.push(name);
        rss.push(total);
        free.push(a.fit.free_names.len());
    }
    let summaries: Vec<ModelSummary> = names
        .iter()
        .zip(&rss)
        .zip(&free)
        .map(|((n, r), k)| ModelSummary {
            name: n.clone(),
            n: re.point_count(),
            rss: *r,
            k: *k,
        })
        .collect();
    let ranked = rank_models(&summaries)?;
    let verdict = verdict(&ranked);
    Ok(Comparison {
        names,
        rss,
        free,
        ranked,
        verdict,
    })
}

fn verdict(ranked: &[RankedModel]) -> String {
    let Some(best) = ranked.first() else {
        return String::new();
    };
    let Some(second) = ranked.get(1) else {
        return format!("only one model: '{}'", best.name);
    };
    let d = second.delta;
    let strength = if d < 2.0 {
        "The data cannot tell these models apart"
    } else if d < 4.0 {
        "The data favour"
    } else if d < 10.0 {
        "The data clearly favour"
    } else {
        "The data strongly favour"
    };
    if d < 2.0 {
        format!(
            "{strength}: '{}' and '{}' differ by ΔAICc = {d:.2} (evidence ratio {:.2}); prefer the \
             simpler one unless the physics says otherwise",
            best.name, second.name, second.evidence_ratio
        )
    } else {
        format!(
            "{strength} '{}' over '{}': ΔAICc = {d:.2}, evidence ratio {}",
            best.name,
            second.name,
            if second.evidence_ratio > 1e6 {
                "above a million".to_string()
            } else {
                format!("{:.3}", second.evidence_ratio)
            }
        )
    }
}
