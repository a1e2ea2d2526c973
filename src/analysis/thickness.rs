//! The thickness-scaling check: is the uptake Fickian at all?
//!
//! For Fickian diffusion with one D, the uptake of a sheet depends on time only through
//! D t / L²: curves of M_t/M_∞ measured on samples of different thickness L collapse onto one
//! curve against √t / L (Crank 1975, ch. 4; eq. 4.18 is a function of D t / L² alone; the same
//! holds for the radius of a sphere or cylinder, chs. 5 and 6). Two-stage or case II uptake,
//! swelling, or a thickness measured wrongly break the collapse. When an experiment fits runs on
//! samples of two or more sizes (`[datasets.sample]`) with one shared diffusivity, this module
//! fits D to each size alone (every parameter the other runs use held at the joint estimate,
//! the shared ones such as h refitted) and asks whether the estimates agree within their
//! uncertainties:
//!
//! ```text
//!   y_k = ln D_k,   s_k = SE(D_k) / D_k,   w_k = 1/s_k²
//!   ȳ = Σ w_k y_k / Σ w_k,   χ² = Σ w_k (y_k − ȳ)²   on K − 1 degrees of freedom
//! ```
//!
//! The comparison is made in ln D, the scale the fit works in for a diffusivity. The estimates
//! agree when the χ² upper-tail p-value is at least 1 − level (0.05 for 95 % intervals).
//!
//! References: J. Crank, *The Mathematics of Diffusion*, 2nd ed., Oxford 1975, chs. 4–6 and
//! ch. 11 (non-Fickian diffusion; chapter number from memory); the χ² consistency test of
//! independent estimates is common practice.

use super::problem::ExperimentProblem;
use super::run::{parameter_specs, Analysis};
use crate::experiment::Weighting as DataWeighting;
use crate::fit::engine::{fit, FitOptions, Weighting};
use crate::model::Shape;
use crate::stats::intervals::chi2_sf;
use rayon::prelude::*;
use std::collections::BTreeSet;
use std::sync::Arc;

/// The runs on samples of one size, and D fitted to them alone.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeGroup {
    /// The thickness (slab) or radial extent (cylinder, sphere) of the sample, m.
    pub size: f64,
    /// Indices of the runs (into the experiment's datasets).
    pub datasets: Vec<usize>,
    /// D fitted to these runs alone, m²/s, its standard error and its interval at the fit's
    /// level (formed on the log scale), or why the fit could not be made.
    pub estimate: std::result::Result<SizeEstimate, String>,
}

/// D of one size group.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SizeEstimate {
    /// D, m²/s.
    pub value: f64,
    /// Standard error of D, m²/s.
    pub std_error: f64,
    /// Interval at the fit's level, m²/s.
    pub interval: (f64, f64),
}

/// The outcome of the check.
#[derive(Debug, Clone, PartialEq)]
pub struct ThicknessCheck {
    /// The shared diffusivity parameter (index into the experiment's parameters).
    pub parameter: usize,
    /// `"thickness"` for a slab, `"radius"` for a cylinder or sphere.
    pub dimension: &'static str,
    /// One group per sample size, thinnest first.
    pub groups: Vec<SizeGroup>,
    /// χ² of the ln D estimates about their weighted mean (NaN when a group failed).
    pub chi_square: f64,
    /// Degrees of freedom, groups − 1.
    pub dof: usize,
    /// Upper-tail p-value of `chi_square`.
    pub p_value: f64,
    /// True when the estimates agree; `None` when the check could not be made.
    pub consistent: Option<bool>,
    /// One sentence saying what the check found.
    pub verdict: String,
}

/// The check, when the analysis fits runs on samples of two or more sizes that share one free
/// diffusivity parameter; `None` otherwise.
pub fn check(analysis: &Analysis) -> Option<ThicknessCheck> {
    let e = &analysis.experiment;
    if e.datasets.len() < 2 {
        return None;
    }
    let k = e.datasets[0].diffusivity_parameter()?;
    if !e.parameters[k].free
        || e.datasets
            .iter()
            .any(|d| d.diffusivity_parameter() != Some(k))
    {
        return None;
    }
    let mut groups: Vec<SizeGroup> = Vec::new();
    for (i, d) in e.datasets.iter().enumerate() {
        let (lo, hi) = d.sample_extent()?;
        let size = hi - lo;
        match groups
            .iter_mut()
            .find(|g| (g.size - size).abs() <= 1e-9 * size)
        {
            Some(g) => g.datasets.push(i),
            None => groups.push(SizeGroup {
                size,
                datasets: vec![i],
                estimate: Err(String::new()),
            }),
        }
    }
    if groups.len() < 2 {
        return None;
    }
    groups.sort_by(|a, b| a.size.total_cmp(&b.size));
    groups
        .par_iter_mut()
        .for_each(|g| g.estimate = fit_group(analysis, k, &g.datasets));
    let dimension = match e.datasets[0].model_for(&analysis.fit.estimates) {
        Ok(m) if m.geometry.shape != Shape::Slab => "radius",
        _ => "thickness",
    };
    let level = analysis.fit.level;
    let ok: Vec<SizeEstimate> = groups
        .iter()
        .filter_map(|g| g.estimate.as_ref().ok().copied())
        .collect();
    let dof = groups.len() - 1;
    let (chi_square, p_value, consistent, verdict) = if ok.len() < groups.len() {
        let why: Vec<String> = groups
            .iter()
            .filter_map(|g| {
                g.estimate
                    .as_ref()
                    .err()
                    .map(|m| format!("{} ({m})", size_label(g.size)))
            })
            .collect();
        (
            f64::NAN,
            f64::NAN,
            None,
            format!(
                "The {dimension}-scaling check could not be made: D could not be fitted to each \
                 {dimension} alone: {}.",
                why.join("; ")
            ),
        )
    } else {
        let y: Vec<f64> = ok.iter().map(|s| s.value.ln()).collect();
        let w: Vec<f64> = ok.iter().map(|s| (s.value / s.std_error).powi(2)).collect();
        let mean = y.iter().zip(&w).map(|(y, w)| y * w).sum::<f64>() / w.iter().sum::<f64>();
        let chi: f64 = y.iter().zip(&w).map(|(y, w)| w * (y - mean).powi(2)).sum();
        let p = chi2_sf(chi, dof as f64).unwrap_or(f64::NAN);
        let spread = ok.iter().map(|s| s.value).fold(f64::NEG_INFINITY, f64::max)
            / ok.iter().map(|s| s.value).fold(f64::INFINITY, f64::min);
        let stats = format!(
            "χ² = {chi:.3} on {dof} degree{} of freedom, p = {p:.3}; largest/smallest D = {spread:.3}",
            if dof == 1 { "" } else { "s" }
        );
        if p >= 1.0 - level {
            (
                chi,
                p,
                Some(true),
                format!(
                    "D fitted to each {dimension} alone agrees within the uncertainties ({stats}): \
                     the uptake scales with the square of the {dimension}, as Fickian diffusion \
                     with one D requires."
                ),
            )
        } else {
            (
                chi,
                p,
                Some(false),
                format!(
                    "D fitted to each {dimension} alone differs beyond the uncertainties ({stats}): \
                     the uptake does not scale with the square of the {dimension}, so one Fickian D \
                     does not describe these runs; look for two-stage or case II uptake, swelling, \
                     a surface resistance missing from the model, or a wrong {dimension}."
                ),
            )
        }
    };
    Some(ThicknessCheck {
        parameter: k,
        dimension,
        groups,
        chi_square,
        dof,
        p_value,
        consistent,
        verdict,
    })
}

/// A size for messages: µm below 1 mm, else mm.
pub fn size_label(size: f64) -> String {
    let (v, u) = if size < 1e-3 {
        (size * 1e6, "um")
    } else {
        (size * 1e3, "mm")
    };
    let s = format!("{v:.3}");
    format!("{} {u}", s.trim_end_matches('0').trim_end_matches('.'))
}

/// D fitted to the runs `datasets` alone, from the joint estimate.
fn fit_group(
    analysis: &Analysis,
    k: usize,
    datasets: &[usize],
) -> std::result::Result<SizeEstimate, String> {
    let e = &analysis.experiment;
    let mut sub = (**e).clone();
    sub.datasets = Arc::new(datasets.iter().map(|&i| e.datasets[i].clone()).collect());
    sub.derived.clear();
    let used: BTreeSet<usize> = sub
        .datasets
        .iter()
        .flat_map(|d| d.parameters_used())
        .collect();
    for (i, p) in sub.parameters.iter_mut().enumerate() {
        p.start = analysis.fit.estimates[i];
        if !used.contains(&i) {
            p.free = false;
        }
    }
    let free = sub.free_count();
    let points = sub.point_count();
    if points <= free {
        return Err(format!("{points} points for {free} free parameters"));
    }
    let all_absolute = sub
        .datasets
        .iter()
        .all(|d| d.weighting == DataWeighting::Absolute);
    let mut options = FitOptions {
        level: analysis.fit.level,
        weighting: match analysis.fit.weighting {
            Weighting::Absolute { rescale } if all_absolute => Weighting::Absolute { rescale },
            _ => Weighting::Relative,
        },
        ..Default::default()
    };
    super::run::configure_search(&mut options, &sub);
    let scales: Vec<f64> = datasets
        .iter()
        .map(|&i| analysis.dataset_scales.get(i).copied().unwrap_or(1.0))
        .collect();
    let start = sub.start_values();
    let sub = Arc::new(sub);
    let mut problem = ExperimentProblem::new(sub.clone()).map_err(|e| e.to_string())?;
    problem.set_scales(&scales).map_err(|e| e.to_string())?;
    let result =
        fit(problem, parameter_specs(&sub, &start), &options).map_err(|e| e.to_string())?;
    if !result.stop.converged() {
        return Err(format!("the fit did not converge: {}", result.stop_message));
    }
    let p = &result.parameters[k];
    let se = p
        .std_error
        .filter(|s| s.is_finite() && *s > 0.0)
        .ok_or_else(|| {
            "D has no standard error (not identifiable from these runs alone)".to_string()
        })?;
    let iv = p
        .transformed_interval
        .as_ref()
        .or(p.interval.as_ref())
        .map(|i| (i.lower, i.upper))
        .unwrap_or((f64::NAN, f64::NAN));
    Ok(SizeEstimate {
        value: p.estimate,
        std_error: se,
        interval: iv,
    })
}
