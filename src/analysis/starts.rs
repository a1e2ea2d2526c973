//! Start values for parameters the experiment file leaves without one.
//!
//! In this order:
//! 0. a run's exposure start (`exposure_start = "t0"`): the start of the early `√t` rise of
//!    its readings ([`crate::shortcuts::start`]; the median over the runs that share it), kept
//!    inside its bounds; the other rules then see the data on the model's clock;
//! 1. a dataset's diffusivity: the median of the shortcut estimates of the datasets it drives
//!    ([`super::shortcuts`]), kept inside its bounds;
//! 2. any other parameter that enters the model (a transfer coefficient, a flux, a loss rate...)
//!    and has both bounds: a coarse search over 13 values between them (log-spaced for a
//!    log-scale parameter), one parameter at a time, each value scored by the sum of squares of
//!    all datasets;
//! 3. a dataset's scale and offset (`f = offset + scale · s(t)`): linear least squares of the
//!    observed values on the model output at the values found so far. Steps 1 and 2 also use
//!    this for each trial, so a pending scale does not spoil the search.
//!
//! A parameter for which none of these applies is an error that says which key to give.
//! The fit itself then starts from these values (and runs Nelder–Mead first, see
//! [`super::run`]), so a rough start is enough.

use super::shortcuts::{self, ShortcutEstimate};
use crate::error::{Error, Result};
use crate::experiment::{Experiment, Parameter};
use crate::shortcuts::start;
use crate::solver::{Observable, Solver};
use std::collections::BTreeMap;

/// How a start value was chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct StartNote {
    /// Index of the parameter.
    pub parameter: usize,
    /// The value chosen, SI.
    pub value: f64,
    /// How, in plain words.
    pub how: String,
}

/// Number of trial values per parameter in the coarse search.
const GRID: usize = 13;

/// The start values, with a positive placeholder inside the bounds for each pending one: good
/// for reading a run's geometry and the kind of each end, not for predictions.
pub fn values_for_models(experiment: &Experiment) -> Vec<f64> {
    let mut values: Vec<f64> = experiment
        .parameters
        .iter()
        .map(|p| {
            if p.start.is_finite() {
                p.start
            } else {
                p.placeholder()
            }
        })
        .collect();
    for (i, v, _) in exposure_starts(experiment) {
        values[i] = v;
    }
    values
}

/// Starts of pending exposure-start parameters from the early rise of the runs that use them:
/// (parameter, value, how).
fn exposure_starts(experiment: &Experiment) -> Vec<(usize, f64, String)> {
    let mut found: BTreeMap<usize, Vec<(f64, String)>> = BTreeMap::new();
    for d in experiment.datasets.iter() {
        let Some(i) = d.exposure_start_parameter() else {
            continue;
        };
        let p = &experiment.parameters[i];
        let uptake = matches!(
            d.request.observables.as_slice(),
            [Observable::Amount
                | Observable::AmountChange
                | Observable::Mean
                | Observable::FractionalUptake]
        );
        if p.start.is_finite() || !uptake {
            continue;
        }
        let mut rows: Vec<(f64, f64)> = d
            .outputs()
            .zip(&d.observed)
            .map(|((_, k), &y)| (d.request.times[k], y))
            .collect();
        rows.sort_by(|a, b| a.0.total_cmp(&b.0));
        rows.dedup_by(|a, b| a.0 == b.0);
        let (t, y): (Vec<f64>, Vec<f64>) = rows.into_iter().unzip();
        let range = p.lower.zip(p.upper);
        if let Ok(e) = start::exposure_start(&t, &y, range) {
            found.entry(i).or_default().push((e.t0, d.name.clone()));
        }
    }
    found
        .into_iter()
        .map(|(i, mut v)| {
            v.sort_by(|a, b| a.0.total_cmp(&b.0));
            let median = if v.len() % 2 == 1 {
                v[v.len() / 2].0
            } else {
                0.5 * (v[v.len() / 2 - 1].0 + v[v.len() / 2].0)
            };
            let runs: Vec<&str> = v.iter().map(|r| r.1.as_str()).collect();
            (
                i,
                inside(&experiment.parameters[i], median),
                format!("start of the early sqrt(t) rise of run {}", runs.join(", ")),
            )
        })
        .collect()
}

/// Keep a value strictly inside the parameter's bounds.
fn inside(p: &Parameter, v: f64) -> f64 {
    let mut v = v;
    if let Some(lo) = p.lower {
        if v <= lo {
            v = if p.log && lo > 0.0 {
                lo * 1.5
            } else {
                lo + 1e-3 * lo.abs().max(1e-300)
            };
        }
    }
    if let Some(hi) = p.upper {
        if v >= hi {
            v = if p.log && hi > 0.0 {
                hi / 1.5
            } else {
                hi - 1e-3 * hi.abs().max(1e-300)
            };
        }
    }
    v
}

/// Fill in every pending start of `experiment` (see the module docs) and say how each was
/// chosen. `shortcut` are the experiment's shortcut estimates (from
/// [`shortcuts::estimate_all`]); they are computed here when `None`.
pub fn complete(
    experiment: &mut Experiment,
    shortcut: Option<&[ShortcutEstimate]>,
) -> Result<Vec<StartNote>> {
    let pending = experiment.pending_starts();
    if pending.is_empty() {
        return Ok(Vec::new());
    }
    let mut values = values_for_models(experiment);
    let owned;
    let estimates = match shortcut {
        Some(s) => s,
        None => {
            owned = shortcuts::estimate_all(experiment, &values);
            &owned
        }
    };
    let linear: Vec<usize> = experiment
        .datasets
        .iter()
        .flat_map(|d| [d.scale_parameter(), d.offset_parameter()])
        .flatten()
        .filter(|i| pending.contains(i))
        .collect();
    let mut notes = Vec::new();
    let mut searched = Vec::new();
    let starts = exposure_starts(experiment);
    for &i in &pending {
        if linear.contains(&i) {
            continue;
        }
        if let Some((_, v, how)) = starts.iter().find(|s| s.0 == i) {
            notes.push(StartNote {
                parameter: i,
                value: *v,
                how: how.clone(),
            });
            continue;
        }
        let p = &experiment.parameters[i];
        let is_diffusivity = experiment
            .datasets
            .iter()
            .any(|d| d.diffusivity_parameter() == Some(i));
        if is_diffusivity {
            let mut ds: Vec<(f64, String)> = estimates
                .iter()
                .filter(|e| e.parameter == Some(i))
                .filter_map(|e| e.estimate().map(|d| (d, e.method.label())))
                .collect();
            if !ds.is_empty() {
                ds.sort_by(|a, b| a.0.total_cmp(&b.0));
                let median = if ds.len() % 2 == 1 {
                    ds[ds.len() / 2].0
                } else {
                    (ds[ds.len() / 2 - 1].0 * ds[ds.len() / 2].0).sqrt()
                };
                let v = inside(p, median);
                values[i] = v;
                let methods: Vec<&str> = ds.iter().map(|d| d.1.as_str()).collect();
                notes.push(StartNote {
                    parameter: i,
                    value: v,
                    how: if ds.len() == 1 {
                        format!("shortcut estimate ({})", methods[0])
                    } else {
                        format!(
                            "median of {} shortcut estimates ({})",
                            ds.len(),
                            methods.join("; ")
                        )
                    },
                });
                continue;
            }
        }
        if p.lower.is_some() && p.upper.is_some() {
            searched.push(i);
            continue;
        }
        let why = if is_diffusivity {
            let reasons: Vec<String> = estimates
                .iter()
                .filter(|e| e.parameter == Some(i))
                .filter_map(|e| {
                    e.value
                        .as_ref()
                        .err()
                        .map(|r| format!("{}: {r}", e.method.label()))
                })
                .collect();
            if reasons.is_empty() {
                " (no shortcut estimator matches this experiment)".to_string()
            } else {
                format!(" (shortcut estimators failed: {})", reasons.join("; "))
            }
        } else {
            String::new()
        };
        return Err(Error::setting(
            format!("{}.start", p.key),
            format!(
                "parameter '{}' has no start value and none can be derived from the data{why}: \
                 give `start`, or both `lower` and `upper` so fickfit can search between them",
                p.name
            ),
        ));
    }

    let mut search = Search::new(experiment)?;
    for &i in &searched {
        let p = &experiment.parameters[i];
        let (lo, hi) = (p.lower.unwrap_or(0.0), p.upper.unwrap_or(1.0));
        let mut best = (f64::INFINITY, values[i]);
        for k in 0..GRID {
            // Trial values strictly inside the bounds.
            let f = (k as f64 + 0.5) / GRID as f64;
            let v = if p.log && lo > 0.0 {
                (lo.ln() + f * (hi.ln() - lo.ln())).exp()
            } else {
                lo + f * (hi - lo)
            };
            values[i] = v;
            let rss = search
                .rss(experiment, &mut values.clone(), &linear)
                .unwrap_or(f64::INFINITY);
            if rss < best.0 {
                best = (rss, v);
            }
        }
        values[i] = best.1;
        if !best.0.is_finite() {
            return Err(Error::setting(
                format!("{}.start", p.key),
                format!(
                    "parameter '{}' has no start value and the model could not be solved anywhere \
                     between its bounds: give `start`",
                    p.name
                ),
            ));
        }
        notes.push(StartNote {
            parameter: i,
            value: best.1,
            how: format!("best of {GRID} trial values between its bounds"),
        });
    }
    if !linear.is_empty() {
        search.rss(experiment, &mut values, &linear)?;
        for &i in &linear {
            notes.push(StartNote {
                parameter: i,
                value: values[i],
                how: "linear least squares of the data on the model output".into(),
            });
        }
    }
    for n in &notes {
        let v = n.value;
        if !v.is_finite() {
            return Err(Error::Fit(format!(
                "the automatic start of '{}' is not finite: give `start`",
                experiment.parameters[n.parameter].name
            )));
        }
        experiment.parameters[n.parameter].start = inside(&experiment.parameters[n.parameter], v);
    }
    notes.sort_by_key(|n| n.parameter);
    Ok(notes)
}

/// Sums of squares for the coarse search.
struct Search {
    solver: Solver,
}

impl Search {
    fn new(experiment: &Experiment) -> Result<Self> {
        Ok(Search {
            solver: Solver::new(experiment.solver.clone())?,
        })
    }

    /// Sum of squares (σ-weighted where σ are given) over all datasets at `values`, after
    /// setting each dataset's pending scale and offset (`linear`) by linear least squares;
    /// those are written into `values`.
    fn rss(
        &mut self,
        experiment: &Experiment,
        values: &mut [f64],
        linear: &[usize],
    ) -> Result<f64> {
        let mut total = 0.0;
        for d in experiment.datasets.iter() {
            let model = d.model_for(values)?;
            let sol = self.solver.solve(&model, &d.request_for(values))?;
            let raw: Vec<f64> = d.outputs().map(|(o, k)| sol.get(o, k)).collect();
            let w: Vec<f64> = d
                .sigma
                .iter()
                .map(|&s| {
                    if s.is_finite() && s > 0.0 {
                        1.0 / (s * s)
                    } else {
                        1.0
                    }
                })
                .collect();
            let (scale, offset) = d.scale_and_offset(values);
            let free_scale = d.scale_parameter().filter(|i| linear.contains(i));
            let free_offset = d.offset_parameter().filter(|i| linear.contains(i));
            let (scale, offset) = linear_fit(
                &raw,
                &d.observed,
                &w,
                scale,
                offset,
                free_scale.is_some(),
                free_offset.is_some(),
            );
            if let Some(i) = free_scale {
                values[i] = scale;
            }
            if let Some(i) = free_offset {
                values[i] = offset;
            }
            total += raw
                .iter()
                .zip(&d.observed)
                .zip(&w)
                .map(|((s, y), w)| {
                    let r = y - (offset + scale * s);
                    w * r * r
                })
                .sum::<f64>();
        }
        if total.is_finite() {
            Ok(total)
        } else {
            Err(Error::Fit("the sum of squares is not finite".into()))
        }
    }
}

/// Weighted least squares for `y ≈ offset + scale · s`, with either or both free; a fixed one
/// keeps its given value. A degenerate fit keeps the given values.
fn linear_fit(
    s: &[f64],
    y: &[f64],
    w: &[f64],
    scale: f64,
    offset: f64,
    fit_scale: bool,
    fit_offset: bool,
) -> (f64, f64) {
    let sw: f64 = w.iter().sum();
    let mean = |v: &dyn Fn(usize) -> f64| (0..s.len()).map(|i| w[i] * v(i)).sum::<f64>() / sw;
    match (fit_scale, fit_offset) {
        (true, true) => {
            let ms = mean(&|i| s[i]);
            let my = mean(&|i| y[i]);
            let sxx: f64 = (0..s.len()).map(|i| w[i] * (s[i] - ms).powi(2)).sum();
            let sxy: f64 = (0..s.len()).map(|i| w[i] * (s[i] - ms) * (y[i] - my)).sum();
            if sxx > 0.0 && sxx.is_finite() {
                let b = sxy / sxx;
                (b, my - b * ms)
            } else {
                (scale, my - scale * ms)
            }
        }
        (true, false) => {
            let sxx: f64 = (0..s.len()).map(|i| w[i] * s[i] * s[i]).sum();
            let sxy: f64 = (0..s.len()).map(|i| w[i] * s[i] * (y[i] - offset)).sum();
            if sxx > 0.0 && sxx.is_finite() {
                (sxy / sxx, offset)
            } else {
                (scale, offset)
            }
        }
        (false, true) => (scale, mean(&|i| y[i] - scale * s[i])),
        (false, false) => (scale, offset),
    }
}
