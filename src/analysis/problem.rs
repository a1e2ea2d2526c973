//! The experiment as a least-squares problem: weighted residuals of every dataset for a full
//! parameter vector.
//!
//! r_i = (y_i − f_i(θ)) / (σ_i s_d), with σ_i the point's standard uncertainty (1 when none is
//! given) and s_d a per-dataset scale (1 unless the datasets' scatter is estimated, see
//! [`super::run`]). The prediction f_i comes from a forward solve of the dataset's run.
//!
//! Two things keep the residuals a smooth, cheap function of θ:
//! * a run whose model is unchanged (only a scale or offset parameter moved) is not solved
//!   again;
//! * a run whose parameters moved by less than [`REPLAY_RADIUS`] (relative) since its last
//!   error-controlled solve replays that solve's step sequence ([`StepPlan::Replay`]), so the
//!   finite-difference Jacobian sees no jumps from a changing adaptive step sequence.

use crate::error::{Error, Result};
use crate::experiment::Experiment;
use crate::fit::problem::{DatasetRange, ResidualProblem};
use crate::model::Model;
use crate::solver::{Solution, Solver, StepPlan};
use std::sync::Arc;

/// Relative parameter change below which a run replays its last step sequence.
pub const REPLAY_RADIUS: f64 = 1e-3;

/// Per-run solver state.
#[derive(Debug, Clone)]
struct RunState {
    solver: Solver,
    /// Parameters of the last error-controlled solve, and its step sequence.
    base: Option<(Vec<f64>, Vec<f64>)>,
    last_model: Option<Model>,
    /// Exposure start t0 of the last solve (the request depends on it, the model does not).
    last_start: Option<f64>,
    last_solution: Solution,
    prediction: Vec<f64>,
}

/// The residual problem of an experiment.
#[derive(Debug, Clone)]
pub struct ExperimentProblem {
    experiment: Arc<Experiment>,
    runs: Vec<RunState>,
    /// Per-dataset scale s_d that divides the residuals.
    scales: Vec<f64>,
    /// Scale of each parameter for the replay test (|start|, or 1 when the start is 0).
    typical: Vec<f64>,
    offsets: Vec<usize>,
    n: usize,
}

impl ExperimentProblem {
    /// Build the problem; one solver per dataset.
    pub fn new(experiment: Arc<Experiment>) -> Result<Self> {
        let mut runs = Vec::with_capacity(experiment.datasets.len());
        let mut offsets = Vec::with_capacity(experiment.datasets.len() + 1);
        let mut n = 0;
        for d in &experiment.datasets {
            offsets.push(n);
            n += d.len();
            runs.push(RunState {
                solver: Solver::new(experiment.solver.clone())?,
                base: None,
                last_model: None,
                last_start: None,
                last_solution: Solution::default(),
                prediction: Vec::with_capacity(d.len()),
            });
        }
        offsets.push(n);
        let typical = experiment
            .parameters
            .iter()
            .map(|p| if p.start != 0.0 { p.start.abs() } else { 1.0 })
            .collect();
        Ok(ExperimentProblem {
            scales: vec![1.0; experiment.datasets.len()],
            experiment,
            runs,
            typical,
            offsets,
            n,
        })
    }

    /// The experiment.
    pub fn experiment(&self) -> &Experiment {
        &self.experiment
    }

    /// Set the per-dataset residual scales s_d (all positive and finite).
    pub fn set_scales(&mut self, scales: &[f64]) -> Result<()> {
        if scales.len() != self.scales.len() || scales.iter().any(|s| !(s.is_finite() && *s > 0.0))
        {
            return Err(Error::Internal(format!(
                "invalid dataset scales {scales:?}"
            )));
        }
        self.scales.copy_from_slice(scales);
        Ok(())
    }

    /// The per-dataset residual scales.
    pub fn scales(&self) -> &[f64] {
        &self.scales
    }

    /// Predictions of every dataset at `params` (SI, data order), by solving each run.
    pub fn predictions(&mut self, params: &[f64]) -> Result<Vec<Vec<f64>>> {
        let mut out = Vec::with_capacity(self.runs.len());
        for d in 0..self.runs.len() {
            self.solve_run(d, params)?;
            out.push(self.runs[d].prediction.clone());
        }
        Ok(out)
    }

    /// True when every parameter is within [`REPLAY_RADIUS`] of `base`; the run's exposure
    /// start (`skip`) is left to [`crate::experiment::Dataset::replay_schedule`].
    fn near_base(&self, base: &[f64], params: &[f64], skip: Option<usize>) -> bool {
        base.iter()
            .zip(params)
            .zip(&self.typical)
            .enumerate()
            .all(|(i, ((b, p), t))| {
                Some(i) == skip
                    || (b - p).abs()
                        <= REPLAY_RADIUS * b.abs().max(*t * 1e-6).max(f64::MIN_POSITIVE)
            })
    }

    fn solve_run(&mut self, d: usize, params: &[f64]) -> Result<()> {
        let dataset = &self.experiment.datasets[d];
        let model = dataset.model_for(params)?;
        // The data times on the model's clock (shifted by the exposure start, if any).
        let request = dataset.request_for(params);
        let start = dataset.exposure_start(params);
        let near = match &self.runs[d].base {
            Some((b, _)) => self.near_base(b, params, dataset.exposure_start_parameter()),
            None => false,
        };
        let run = &mut self.runs[d];
        if run.last_model.as_ref() != Some(&model) || run.last_start != Some(start) {
            let replayed = match (&run.base, near) {
                (Some((b, schedule)), true) => match dataset.replay_schedule(b, schedule, params) {
                    Some(steps) => {
                        match run
                            .solver
                            .solve_with(&model, &request, StepPlan::Replay(&steps))
                        {
                            Ok(sol) => {
                                run.last_solution.clone_from(sol);
                                true
                            }
                            Err(_) => false,
                        }
                    }
                    None => false,
                },
                _ => false,
            };
            if !replayed {
                let sol = run.solver.solve(&model, &request)?;
                run.last_solution.clone_from(sol);
                let schedule = run.solver.schedule().to_vec();
                run.base = Some((params.to_vec(), schedule));
            }
            run.last_model = Some(model);
            run.last_start = Some(start);
        }
        dataset.predict_into(params, &run.last_solution, &mut run.prediction)
    }
}

impl ResidualProblem for ExperimentProblem {
    fn n_residuals(&self) -> usize {
        self.n
    }

    fn residuals(&mut self, params: &[f64], out: &mut [f64]) -> Result<()> {
        for d in 0..self.runs.len() {
            self.solve_run(d, params)?;
            let dataset = &self.experiment.datasets[d];
            let s = self.scales[d];
            let base = self.offsets[d];
            let pred = &self.runs[d].prediction;
            for i in 0..dataset.len() {
                out[base + i] = (dataset.observed[i] - pred[i]) / (dataset.sigma[i] * s);
            }
        }
        Ok(())
    }

    fn datasets(&self) -> Vec<DatasetRange> {
        self.experiment
            .datasets
            .iter()
            .enumerate()
            .map(|(d, ds)| DatasetRange {
                name: ds.name.clone(),
                range: self.offsets[d]..self.offsets[d + 1],
            })
            .collect()
    }

    fn observations(&self) -> Option<(Vec<f64>, Vec<f64>)> {
        let mut y = Vec::with_capacity(self.n);
        let mut w = Vec::with_capacity(self.n);
        for (d, ds) in self.experiment.datasets.iter().enumerate() {
            y.extend_from_slice(&ds.observed);
            w.extend(ds.sigma.iter().map(|s| s * self.scales[d]));
        }
        Some((y, w))
    }
}
