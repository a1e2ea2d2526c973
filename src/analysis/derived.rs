//! Quantities derived from the fitted parameters (`[derived]` in the experiment file), with
//! their standard uncertainty by the delta method ([`crate::stats::derived`]):
//!
//! - thermal conductivity `k = α ρ c_p` (W/(m K)), with ρ and c_p given with their standard
//!   uncertainties (independent of the fit);
//! - the time a run takes to reach a fraction (default 95 %) of its equilibrium uptake, from
//!   the fitted model's fractional uptake `(M_t − M_0)/(M_∞ − M_0)`;
//! - the flux in through an end at given times, `J = −D ∂u/∂x` at that face (positive in);
//! - the permeability `P = D S` of a membrane whose face is under a gas at pressure p, the
//!   concentration just inside that face being S·p (Henry's law), in mol/(m s Pa) when u is in
//!   mol/m³ (and then also in Barrer);
//! - the time lag `θ = L²/(6D)` of a membrane run (Daynes 1920; Barrer 1939; Crank 1975
//!   §4.3.4), beside the time lag read off the steady-state asymptote of the data (where the
//!   line through the late points crosses zero, [`crate::shortcuts::permeation`]) with the
//!   standard uncertainty of that line's intercept and slope.
//!
//! The model quantities are functions of the parameters through a forward solve. So that the
//! finite differences of the delta method see a smooth function, every perturbed solve replays
//! the step sequence of the solve at the estimate ([`StepPlan::Replay`]).

use super::Analysis;
use crate::error::{Error, Result};
use crate::experiment::{DerivedWhat, Experiment};
use crate::model::{End, Model};
use crate::solver::{Observable, Request, Solution, Solver, StepPlan};
use crate::stats::derived::ExtraInput;
use std::cell::RefCell;

/// One derived value.
#[derive(Debug, Clone, PartialEq)]
pub struct Derived {
    /// Name of the `[derived.NAME]` table (with the time for a flux: `flux[1 h]`).
    pub name: String,
    /// What it is, in words (`k = alpha rho c_p`).
    pub description: String,
    /// Unit label of `value` and `std_uncertainty`.
    pub unit: String,
    /// The value, in `unit`, or why it could not be computed.
    pub value: std::result::Result<(f64, f64), String>,
}

/// Compute every derived quantity the experiment asks for.
pub fn derive_all(analysis: &Analysis) -> Vec<Derived> {
    let e = &analysis.experiment;
    let mut out = Vec::new();
    for request in &e.derived {
        match &request.what {
            DerivedWhat::Conductivity {
                diffusivity,
                density,
                heat_capacity,
            } => {
                let i = *diffusivity;
                let extras = [
                    ExtraInput {
                        name: "rho".into(),
                        value: density.0,
                        std_uncertainty: density.1,
                    },
                    ExtraInput {
                        name: "c_p".into(),
                        value: heat_capacity.0,
                        std_uncertainty: heat_capacity.1,
                    },
                ];
                let value = analysis
                    .fit
                    .derived(|theta, z| theta[i] * z[0] * z[1], &extras)
                    .map(|d| (d.value, d.std_uncertainty))
                    .map_err(|err| err.to_string());
                out.push(Derived {
                    name: request.name.clone(),
                    description: format!(
                        "thermal conductivity k = {} rho c_p (rho = {} kg/m3, c_p = {} J/(kg K))",
                        e.parameters[i].name, density.0, heat_capacity.0
                    ),
                    unit: "W/(m K)".into(),
                    value,
                });
            }
            DerivedWhat::EquilibriumTime { dataset, fraction } => {
                let d = &e.datasets[*dataset];
                let value =
                    equilibrium_time(analysis, *dataset, *fraction).map_err(|err| err.to_string());
                let (scale, unit) = match &value {
                    Ok((t, _)) => time_unit(*t),
                    Err(_) => (1.0, "s"),
                };
                out.push(Derived {
                    name: request.name.clone(),
                    description: format!(
                        "time for run '{}' to reach {} % of its equilibrium uptake",
                        d.name,
                        fraction * 100.0
                    ),
                    unit: unit.into(),
                    value: value.map(|(v, u)| (v / scale, u / scale)),
                });
            }
            DerivedWhat::Permeability {
                diffusivity,
                solubility,
            } => out.extend(permeability(
                analysis,
                &request.name,
                *diffusivity,
                *solubility,
            )),
            DerivedWhat::TimeLag { dataset } => {
                out.extend(time_lags(analysis, &request.name, *dataset))
            }
            DerivedWhat::FluxIn {
                dataset,
                end,
                times,
                heat,
            } => {
                let d = &e.datasets[*dataset];
                let results = flux_in(analysis, *dataset, *end, times, heat.as_ref());
                for (t, r) in times.iter().zip(results) {
                    let (scale, tu) = label_unit(*t);
                    out.push(Derived {
                        name: format!("{}[{} {tu}]", request.name, trim(t / scale)),
                        description: format!(
                            "flux in through the {} end of run '{}' at t = {} {tu} (positive into the sample)",
                            match end {
                                End::Left => "left",
                                End::Right => "right",
                            },
                            d.name,
                            trim(t / scale)
                        ),
                        unit: match heat {
                            Some(_) => "W/m2".to_string(),
                            None => format!("{}·m/s", e.value_unit),
                        },
                        value: r.map(|(v, u)| {
                            // A heat flux is already SI (W/m²); a temperature rate is shown
                            // in the sample's value unit.
                            let s = if heat.is_some() { 1.0 } else { flux_scale(e) };
                            (v / s, u / s)
                        }),
                    });
                }
            }
        }
    }
    out
}

/// 1 Barrer = 1e-10 cm³(STP) cm / (cm² s cmHg) in mol/(m s Pa): cm³(STP) = 1e-6 m³ of ideal
/// gas at 273.15 K and 101 325 Pa = 101325e-6/(R 273.15) mol (R = 8.314462618 J/(mol K),
/// CODATA 2018, exact), cmHg = 1333.22387415 Pa; ≈ 3.3464e-16 (common practice, from memory
/// as 3.35e-16).
pub const BARRER_SI: f64 =
    1e-10 * (101_325e-6 / (8.314_462_618 * 273.15)) * 1e-2 / (1e-4 * 1_333.223_874_15);

/// True when a value-unit label reads mol/m³.
fn is_mol_per_m3(label: &str) -> bool {
    matches!(label.trim(), "mol/m3" | "mol/m^3" | "mol/m³" | "mol m-3")
}

/// P = D S with its standard uncertainty (D and S correlated through the fit).
fn permeability(
    analysis: &Analysis,
    name: &str,
    diffusivity: usize,
    solubility: crate::experiment::Term,
) -> Vec<Derived> {
    let e = &analysis.experiment;
    let value = analysis
        .fit
        .derived(|theta, _| theta[diffusivity] * solubility.value(theta), &[])
        .map(|d| (d.value, d.std_uncertainty))
        .map_err(|err| err.to_string());
    let s_name = match solubility {
        crate::experiment::Term::Parameter(i) => e.parameters[i].name.clone(),
        crate::experiment::Term::Constant(v) => format!("{v:e} {}/Pa (given)", e.value_unit),
    };
    let description = format!(
        "permeability P = {} × {s_name} (diffusivity × solubility coefficient)",
        e.parameters[diffusivity].name
    );
    if is_mol_per_m3(&e.value_unit) {
        vec![
            Derived {
                name: name.to_string(),
                description: description.clone(),
                unit: "mol/(m s Pa)".into(),
                value: value.clone(),
            },
            Derived {
                name: format!("{name}[Barrer]"),
                description: format!(
                    "{description}, in Barrer (1 Barrer = 1e-10 cm3(STP) cm/(cm2 s cmHg) = {BARRER_SI:.5e} mol/(m s Pa))"
                ),
                unit: "Barrer".into(),
                value: value.map(|(v, u)| (v / BARRER_SI, u / BARRER_SI)),
            },
        ]
    } else {
        let s = flux_scale(e);
        vec![Derived {
            name: name.to_string(),
            description,
            unit: format!("{}·m2/(s·Pa)", e.value_unit),
            value: value.map(|(v, u)| (v / s, u / s)),
        }]
    }
}

/// The time lag of a run: L²/(6D) at the fitted parameters, and from the steady-state
/// asymptote of its data.
fn time_lags(analysis: &Analysis, name: &str, dataset: usize) -> Vec<Derived> {
    let e = &analysis.experiment;
    let d = &e.datasets[dataset];
    // θ(θ_params) from the run's model: one slab layer with constant D.
    let lag = |theta: &[f64]| -> f64 {
        let Ok(model) = d.model_for(theta) else {
            return f64::NAN;
        };
        match model.geometry.layers.as_slice() {
            [layer] => match layer.diffusivity {
                crate::model::DiffusivityLaw::Constant { d0 } => {
                    layer.thickness * layer.thickness / (6.0 * d0)
                }
                _ => f64::NAN,
            },
            _ => f64::NAN,
        }
    };
    let fitted = analysis
        .fit
        .derived(|theta, _| lag(theta), &[])
        .map_err(|err| err.to_string())
        .and_then(|v| {
            if v.value.is_finite() && v.std_uncertainty.is_finite() {
                Ok((v.value, v.std_uncertainty))
            } else {
                Err("the run's sample is not one slab layer with constant D".to_string())
            }
        });
    let thickness = d
        .model_for(&analysis.fit.estimates)
        .map(|m| m.geometry.layers.iter().map(|l| l.thickness).sum::<f64>());
    // The data's own time lag, as the time-lag method reads it.
    let mut rows: Vec<(f64, f64)> = d
        .outputs()
        .zip(&d.observed)
        .enumerate()
        .filter(|(i, _)| {
            !d.detection_limit
                .as_ref()
                .is_some_and(|dl| dl.is_censored(*i))
        })
        .map(|(_, ((_, k), &y))| (d.request.times[k], y))
        .collect();
    rows.sort_by(|a, b| a.0.total_cmp(&b.0));
    let t: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let q: Vec<f64> = rows.iter().map(|r| r.1).collect();
    let from_data = thickness
        .map_err(|err| err.to_string())
        .and_then(|l| {
            crate::shortcuts::permeation::time_lag(&t, &q, l).map_err(|err| err.to_string())
        })
        .map(|est| {
            // θ = −a/b: var θ = (var a + θ² var b + 2 θ cov(a, b)) / b² (first order).
            let line = &est.line;
            let theta = est.time_lag;
            let u = match (line.intercept_se, line.slope_se, line.covariance) {
                (Some(sa), Some(sb), Some(cab)) => {
                    ((sa * sa + theta * theta * sb * sb + 2.0 * theta * cab).max(0.0)).sqrt()
                        / line.slope.abs()
                }
                _ => f64::NAN,
            };
            (
                theta,
                u,
                est.steady_state_reached,
                est.first_used,
                est.line.n,
            )
        });
    let reference = match (&fitted, &from_data) {
        (Ok((v, _)), _) => *v,
        (Err(_), Ok((v, ..))) => *v,
        _ => 1.0,
    };
    let (scale, unit) = time_unit(reference);
    let data_description = match &from_data {
        Ok((_, _, steady, first, n)) => format!(
            "time lag of run '{}' from the steady-state asymptote of its data: the line through the last {n} points (from t = {} s{}) crosses zero there (Daynes 1920; Barrer 1939)",
            d.name,
            trim(t.get(*first).copied().unwrap_or(f64::NAN)),
            if *steady {
                ""
            } else {
                "; steady state not reached, so this is biased low"
            }
        ),
        Err(_) => format!(
            "time lag of run '{}' from the steady-state asymptote of its data",
            d.name
        ),
    };
    let data_name = match name.strip_prefix("time_lag") {
        Some(rest) => format!("time_lag_from_data{rest}"),
        None => format!("{name}_from_data"),
    };
    vec![
        Derived {
            name: name.to_string(),
            description: format!(
                "time lag L²/(6D) of run '{}' at the fitted D (Crank 1975, §4.3.4)",
                d.name
            ),
            unit: unit.into(),
            value: fitted.map(|(v, u)| (v / scale, u / scale)),
        },
        Derived {
            name: data_name,
            description: data_description,
            unit: unit.into(),
            value: from_data.map(|(v, u, ..)| (v / scale, u / scale)),
        },
    ]
}

fn trim(x: f64) -> String {
    let s = format!("{x:.6}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// A readable unit for a time in s: (seconds per unit, label).
fn time_unit(t: f64) -> (f64, &'static str) {
    if t >= 2.0 * 86400.0 {
        (86400.0, "d")
    } else if t >= 7200.0 {
        (3600.0, "h")
    } else if t >= 120.0 {
        (60.0, "min")
    } else {
        (1.0, "s")
    }
}

/// The unit in which a time (s) reads as the shortest number: h or min when it is a whole
/// number of them, else s.
fn label_unit(t: f64) -> (f64, &'static str) {
    let whole = |x: f64| (x - x.round()).abs() < 1e-9 * x.abs().max(1.0);
    if t >= 3600.0 && whole(t / 3600.0) {
        (3600.0, "h")
    } else if t >= 60.0 && whole(t / 60.0) {
        (60.0, "min")
    } else {
        (1.0, "s")
    }
}

/// SI per (value unit · m/s): the value unit's scale.
fn flux_scale(e: &Experiment) -> f64 {
    crate::experiment::quantity::value_unit(&e.value_unit).diff_to_si(1.0)
}

/// A model quantity g(θ) for the delta method: solves with the step sequence of the solve at
/// the estimate.
struct Replayed<'a> {
    experiment: &'a Experiment,
    dataset: usize,
    request: Request,
    solver: RefCell<Solver>,
    schedule: Vec<f64>,
    /// The models solved so far and their solutions, the estimate's first (its error-controlled
    /// solve): the same model is not solved twice, so a derivative with respect to a parameter
    /// the model does not depend on (a scale, an offset, an exposure start) needs no solve, and
    /// a quantity asked for at several times (one delta method each) solves each perturbed
    /// point once.
    solved: RefCell<Vec<(Model, Solution)>>,
}

impl<'a> Replayed<'a> {
    fn new(analysis: &'a Analysis, dataset: usize, request: Request) -> Result<Self> {
        let e = &*analysis.experiment;
        let mut solver = Solver::new(e.solver.clone())?;
        let model = e.datasets[dataset].model_for(&analysis.fit.estimates)?;
        let solution = solver.solve(&model, &request)?.clone();
        let schedule = solver.schedule().to_vec();
        Ok(Replayed {
            experiment: e,
            dataset,
            request,
            solver: RefCell::new(solver),
            schedule,
            solved: RefCell::new(vec![(model, solution)]),
        })
    }

    /// Series `o` of the solution at `theta`, or NaNs when the model cannot be solved there.
    fn series(&self, theta: &[f64], o: usize) -> Vec<f64> {
        let n = self.request.times.len();
        let Ok(model) = self.experiment.datasets[self.dataset].model_for(theta) else {
            return vec![f64::NAN; n];
        };
        let mut solved = self.solved.borrow_mut();
        if let Some((_, sol)) = solved.iter().find(|(m, _)| *m == model) {
            return sol.series(o).to_vec();
        }
        let mut solver = self.solver.borrow_mut();
        match solver.solve_with(&model, &self.request, StepPlan::Replay(&self.schedule)) {
            Ok(sol) => {
                let series = sol.series(o).to_vec();
                // The delta method perturbs each parameter both ways: 2p + 1 models at most
                // per quantity; beyond that the oldest perturbed one goes (never the estimate's).
                if solved.len() > 2 * self.experiment.parameters.len() + 1 {
                    solved.remove(1);
                }
                solved.push((model, sol.clone()));
                series
            }
            Err(_) => vec![f64::NAN; n],
        }
    }
}

/// Time (s) at which the fractional uptake of a run first reaches `fraction`, and its standard
/// uncertainty.
fn equilibrium_time(analysis: &Analysis, dataset: usize, fraction: f64) -> Result<(f64, f64)> {
    let e = &analysis.experiment;
    let d = &e.datasets[dataset];
    let model = d.model_for(&analysis.fit.estimates)?;
    let mut solver = Solver::new(e.solver.clone())?;
    let t_last = d
        .request_for(&analysis.fit.estimates)
        .times
        .iter()
        .copied()
        .fold(0.0, f64::max);
    if t_last <= 0.0 {
        return Err(Error::Fit("the run has no positive times".into()));
    }
    // Bracket the crossing on a coarse logarithmic grid, extending it if need be.
    let mut end = 10.0 * t_last;
    let mut bracket = None;
    for _ in 0..8 {
        let times: Vec<f64> = (0..=120)
            .map(|k| end * 1e-7f64.powf(1.0 - k as f64 / 120.0))
            .collect();
        let request = Request {
            times: times.clone(),
            observables: vec![Observable::FractionalUptake],
        };
        let f = solver.solve(&model, &request)?.series(0).to_vec();
        if f.iter().any(|v| !v.is_finite()) {
            return Err(Error::Fit(
                "the run's model has no finite equilibrium (fractional uptake undefined)".into(),
            ));
        }
        if f[0] >= fraction {
            return Err(Error::Fit(format!(
                "the model is past {} % already at t = {:e} s",
                fraction * 100.0,
                times[0]
            )));
        }
        if let Some(k) = f.iter().position(|&v| v >= fraction) {
            bracket = Some((times[k - 1], times[k]));
            break;
        }
        end *= 100.0;
    }
    let Some((a, b)) = bracket else {
        return Err(Error::Fit(format!(
            "the model does not reach {} % of its equilibrium within {:e} s",
            fraction * 100.0,
            end
        )));
    };
    // Fine times across the bracket (with margins, so a perturbed crossing stays inside).
    let (lo, hi) = (a * 0.8, b * 1.25);
    let times: Vec<f64> = (0..=96)
        .map(|k| lo * (hi / lo).powf(k as f64 / 96.0))
        .collect();
    let request = Request {
        times: times.clone(),
        observables: vec![Observable::FractionalUptake],
    };
    let replayed = Replayed::new(analysis, dataset, request)?;
    let crossing = |theta: &[f64], _: &[f64]| -> f64 {
        let f = replayed.series(theta, 0);
        for k in 1..f.len() {
            if f[k] >= fraction && f[k - 1] < fraction {
                let w = (fraction - f[k - 1]) / (f[k] - f[k - 1]);
                return times[k - 1] + w * (times[k] - times[k - 1]);
            }
        }
        f64::NAN
    };
    let v = analysis.fit.derived(crossing, &[])?;
    if !(v.value.is_finite() && v.std_uncertainty.is_finite()) {
        return Err(Error::Fit(
            "the crossing time or its uncertainty is not finite".into(),
        ));
    }
    Ok((v.value, v.std_uncertainty))
}

/// Flux in (SI) through `end` of a run at each time, with standard uncertainties.
fn flux_in(
    analysis: &Analysis,
    dataset: usize,
    end: End,
    times: &[f64],
    heat: Option<&crate::experiment::build::HeatInputs>,
) -> Vec<std::result::Result<(f64, f64), String>> {
    // ρ c_p J with the uncertainties of ρ and c_p propagated (JCGM 100:2008 §5); without
    // them, J alone.
    let extras: Vec<ExtraInput> = match heat {
        Some((rho, cp)) => vec![
            ExtraInput {
                name: "rho".into(),
                value: rho.0,
                std_uncertainty: rho.1,
            },
            ExtraInput {
                name: "c_p".into(),
                value: cp.0,
                std_uncertainty: cp.1,
            },
        ],
        None => Vec::new(),
    };
    let mut sorted = times.to_vec();
    sorted.sort_by(f64::total_cmp);
    sorted.dedup();
    let request = Request {
        times: sorted.clone(),
        observables: vec![Observable::FluxIn(end)],
    };
    let replayed = match Replayed::new(analysis, dataset, request) {
        Ok(r) => r,
        Err(err) => return times.iter().map(|_| Err(err.to_string())).collect(),
    };
    times
        .iter()
        .map(|t| {
            let k = sorted
                .iter()
                .position(|s| s == t)
                .ok_or_else(|| "time not found".to_string())?;
            let g = |theta: &[f64], z: &[f64]| {
                let j = replayed.series(theta, 0)[k];
                if z.is_empty() {
                    j
                } else {
                    j * z[0] * z[1]
                }
            };
            analysis
                .fit
                .derived(g, &extras)
                .map(|d| (d.value, d.std_uncertainty))
                .map_err(|err| err.to_string())
                .and_then(|v| {
                    if v.0.is_finite() && v.1.is_finite() {
                        Ok(v)
                    } else {
                        Err("the flux or its uncertainty is not finite".into())
                    }
                })
        })
        .collect()
}
