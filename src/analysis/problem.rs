//! The experiment as a least-squares problem: weighted residuals of every dataset for a full
//! parameter vector.
//!
//! r_i = (y_i − f_i(θ)) / (σ_i s_d), with σ_i the point's standard uncertainty (1 when none is
//! given) and s_d a per-dataset scale (1 unless the datasets' scatter is estimated, see
//! [`super::run`]). The prediction f_i comes from a forward solve of the dataset's run. A
//! reading censored at a detection limit has the one-sided residual of
//! [`crate::experiment::floor`] (zero while f_i is at or below the limit).
//!
//! Two things keep the residuals a smooth, cheap function of θ:
//! * a run whose model is unchanged (only a scale or offset parameter moved) is not solved
//!   again;
//! * a run whose parameters moved by less than [`REPLAY_RADIUS`] (relative) since its last
//!   error-controlled solve replays that solve's step sequence ([`StepPlan::Replay`]), so the
//!   finite-difference Jacobian sees no jumps from a changing adaptive step sequence.

use crate::error::{Error, Result};
use crate::experiment::{Dataset, Experiment};
use crate::fit::problem::{DatasetRange, ResidualProblem};
use crate::model::Model;
use crate::solver::{Request, Solution, Solver, StepPlan};
use rayon::prelude::*;
use std::sync::Arc;

/// Relative parameter change below which a run replays its last step sequence. Within 5 %
/// the error-controlled sequence of the base point keeps its accuracy (the local errors change
/// in proportion), and every point of a converging search is then a smooth function of the
/// parameters; the engine refreshes the base at the optimum (see
/// [`crate::fit::ResidualProblem::refresh`]).
pub const REPLAY_RADIUS: f64 = 0.05;

/// Per-run solver state.
#[derive(Debug, Clone)]
struct RunState {
    solver: Solver,
    /// Parameters of the last error-controlled solve, and its step sequence.
    base: Option<(Vec<f64>, Vec<f64>)>,
    last_model: Option<Model>,
    /// Exposure start (s) of the last solve (0 without `exposure_start`). With
    /// `last_model`, set only after a successful solve, whose solution `solver` holds.
    last_start: Option<f64>,
    /// Spare solvers for the perturbed points of a batch (finite-difference columns), kept
    /// between batches so that no work space is allocated again.
    spares: Vec<Solver>,
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
        for d in experiment.datasets.iter() {
            offsets.push(n);
            n += d.len();
            runs.push(RunState {
                solver: Solver::new(experiment.solver.clone())?,
                base: None,
                last_model: None,
                last_start: None,
                spares: Vec::new(),
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
        self.solve_all(params)?;
        self.experiment
            .datasets
            .iter()
            .zip(&self.runs)
            .map(|(d, r)| d.predict(params, r.solver.solution()))
            .collect()
    }

    /// Solve every run at `params`, the runs in parallel.
    fn solve_all(&mut self, params: &[f64]) -> Result<()> {
        let experiment = &self.experiment;
        let typical = &self.typical;
        if self.runs.len() == 1 {
            return solve_run(&experiment.datasets[0], &mut self.runs[0], typical, params);
        }
        self.runs
            .par_iter_mut()
            .enumerate()
            .map(|(d, run)| solve_run(&experiment.datasets[d], run, typical, params))
            .collect::<Result<Vec<()>>>()
            .map(|_| ())
    }
}

/// Weighted residuals of `dataset` at `params` from `solution`, into `out` (one entry per
/// observed value): predictions first, then (y − f)/(σ s) in place with the dataset scale `s`,
/// one-sided for a reading censored at a detection limit.
fn write_residuals(
    dataset: &Dataset,
    params: &[f64],
    solution: &Solution,
    scale: f64,
    out: &mut [f64],
) -> Result<()> {
    dataset.predict_to(params, solution, out)?;
    weigh(dataset, scale, out);
    Ok(())
}

/// Turn the predictions of `dataset` in `out` into its weighted residuals, in place.
fn weigh(dataset: &Dataset, scale: f64, out: &mut [f64]) {
    for (i, o) in out.iter_mut().enumerate() {
        *o = dataset.residual(i, *o, dataset.sigma[i] * scale);
    }
}

/// Whether `params` lie within [`REPLAY_RADIUS`] of `base`, parameter by parameter; the run's
/// exposure start (`skip`) is left to [`crate::experiment::Dataset::replay_schedule`].
fn near_base(typical: &[f64], base: &[f64], params: &[f64], skip: Option<usize>) -> bool {
    base.iter()
        .zip(params)
        .zip(typical)
        .enumerate()
        .all(|(i, ((b, p), t))| {
            Some(i) == skip
                || (b - p).abs() <= REPLAY_RADIUS * b.abs().max(*t * 1e-6).max(f64::MIN_POSITIVE)
        })
}

/// The step sequence to replay at `params`: the run's base sequence, carried along with the
/// exposure start when that moved; `None` when `params` are not near the base.
fn replay_steps(
    dataset: &Dataset,
    run: &RunState,
    typical: &[f64],
    params: &[f64],
) -> Option<Vec<f64>> {
    let (b, schedule) = run.base.as_ref()?;
    if !near_base(typical, b, params, dataset.exposure_start_parameter()) {
        return None;
    }
    dataset
        .replay_schedule(b, schedule, params)
        .map(|s| s.into_owned())
}

/// Solve one run at `params` (unless its model and exposure start are unchanged) and leave its
/// solution in `run.solver`. A point near the run's last error-controlled solve replays
/// that solve's steps; any other point is solved with error control and becomes the new base.
fn solve_run(dataset: &Dataset, run: &mut RunState, typical: &[f64], params: &[f64]) -> Result<()> {
    let model = dataset.model_for(params)?;
    let start = dataset.exposure_start(params);
    if run.last_model.as_ref() != Some(&model) || run.last_start != Some(start) {
        // Forget the last solve first: the solver's solution is overwritten below, and a
        // failed solve must not leave the old model paired with it.
        run.last_model = None;
        run.last_start = None;
        // The data times on the model's clock (shifted by the exposure start, if any).
        let request = dataset.request_for(params);
        let replayed = match replay_steps(dataset, run, typical, params) {
            Some(steps) => run
                .solver
                .solve_with(&model, &request, StepPlan::Replay(&steps))
                .is_ok(),
            None => false,
        };
        if !replayed {
            run.solver.solve(&model, &request)?;
            let schedule = run.solver.schedule().to_vec();
            run.base = Some((params.to_vec(), schedule));
        }
        run.last_model = Some(model);
        run.last_start = Some(start);
    }
    Ok(())
}

/// One perturbed point of one run in a batch: solved on a spare solver, replaying the run's
/// base steps when near it, never changing the run's own state.
/// A spare solver taken from a pool (or cloned from the run's own when the pool is empty)
/// and put back when dropped.
struct Lent<'p> {
    solver: Option<Solver>,
    pool: &'p std::sync::Mutex<Vec<Solver>>,
}

impl<'p> Lent<'p> {
    fn take(pool: &'p std::sync::Mutex<Vec<Solver>>, template: &Solver) -> Self {
        let spare = pool.lock().ok().and_then(|mut p| p.pop());
        Lent {
            solver: Some(spare.unwrap_or_else(|| template.spare())),
            pool,
        }
    }

    fn solver(&mut self) -> &mut Solver {
        // Present from `take` until `drop`.
        self.solver
            .as_mut()
            .expect("a lent solver is only given back on drop")
    }
}

impl Drop for Lent<'_> {
    fn drop(&mut self) {
        if let (Some(s), Ok(mut pool)) = (self.solver.take(), self.pool.lock()) {
            pool.push(s);
        }
    }
}

struct Task<'d, 'o> {
    /// Index of the point in the batch.
    index: usize,
    point: &'d [f64],
    model: Model,
    /// The data times on the model's clock: borrowed unless an exposure start shifts them.
    request: std::borrow::Cow<'d, Request>,
    schedule: Option<Vec<f64>>,
    /// This run's part of the point's residual vector.
    out: &'o mut [f64],
    result: Result<()>,
}

impl Task<'_, '_> {
    /// Solve the task's model on `solver`, replaying the base steps when `replay` (and there
    /// are some), with error control otherwise; `into_out`: record the values straight into
    /// the task's residual slice (a dataset that [`Dataset::reads_in_order`]).
    fn solve(&mut self, solver: &mut Solver, replay: bool, into_out: bool) -> Result<()> {
        let plan = match (&self.schedule, replay) {
            (Some(s), true) => StepPlan::Replay(s),
            _ => StepPlan::Adaptive,
        };
        if into_out {
            solver
                .solve_into(&self.model, &self.request, plan, self.out)
                .map(|_| ())
        } else {
            solver
                .solve_with(&self.model, &self.request, plan)
                .map(|_| ())
        }
    }
}

impl ResidualProblem for ExperimentProblem {
    fn n_residuals(&self) -> usize {
        self.n
    }

    fn inactive(&mut self, params: &[f64]) -> Result<Vec<bool>> {
        self.solve_all(params)?;
        let mut out = vec![false; self.n];
        for (d, dataset) in self.experiment.datasets.iter().enumerate() {
            let Some(dl) = &dataset.detection_limit else {
                continue;
            };
            let pred = dataset.predict(params, self.runs[d].solver.solution())?;
            for i in 0..dataset.len() {
                // The residual of a censored reading is zero while the model is at or below it.
                out[self.offsets[d] + i] = dl.is_censored(i) && pred[i] <= dataset.observed[i];
            }
        }
        Ok(out)
    }

    fn refresh(&mut self) {
        for run in &mut self.runs {
            run.base = None;
            run.last_model = None;
            run.last_start = None;
        }
    }

    fn residuals(&mut self, params: &[f64], out: &mut [f64]) -> Result<()> {
        if out.len() != self.n {
            return Err(Error::Internal(format!(
                "{} residuals asked for {} readings",
                out.len(),
                self.n
            )));
        }
        self.solve_all(params)?;
        for (d, dataset) in self.experiment.datasets.iter().enumerate() {
            write_residuals(
                dataset,
                params,
                self.runs[d].solver.solution(),
                self.scales[d],
                &mut out[self.offsets[d]..self.offsets[d + 1]],
            )?;
        }
        Ok(())
    }

    /// The points of a finite-difference Jacobian, solved in parallel: first the base point
    /// (it becomes the runs' replay base when it is not near the last one), then every
    /// (point, run) pair whose model differs from the base's, each on a spare solver that
    /// replays the base steps. A point whose model equals the base's for a run (only a scale
    /// or offset moved) reuses the base solution.
    fn residuals_batch(
        &mut self,
        base: &[f64],
        points: &[Vec<f64>],
        outs: &mut [&mut [f64]],
    ) -> Vec<Result<()>> {
        let mut status: Vec<Result<()>> = (0..points.len()).map(|_| Ok(())).collect();
        if let Err(e) = self.solve_all(base) {
            let message = e.to_string();
            return points
                .iter()
                .map(|_| Err(Error::Internal(format!("the base point failed: {message}"))))
                .collect();
        }
        let experiment = self.experiment.clone();
        for (d, dataset) in experiment.datasets.iter().enumerate() {
            let typical = &self.typical;
            let run = &mut self.runs[d];
            let Some(base_model) = run.last_model.clone() else {
                continue;
            };
            let base_start = run.last_start;
            let (scale, range) = (self.scales[d], self.offsets[d]..self.offsets[d + 1]);
            let write = |point: &[f64], sol: &Solution, out: &mut [f64]| {
                write_residuals(dataset, point, sol, scale, out)
            };
            let mut tasks = Vec::new();
            let mut unchanged = Vec::new();
            for ((k, point), out) in points.iter().enumerate().zip(outs.iter_mut()) {
                if status[k].is_err() {
                    continue;
                }
                let out = &mut out[range.clone()];
                let start = dataset.exposure_start(point);
                match dataset.model_for(point) {
                    Ok(model) if model == base_model && Some(start) == base_start => {
                        unchanged.push((k, out));
                    }
                    Ok(model) => {
                        tasks.push(Task {
                            index: k,
                            point,
                            model,
                            request: dataset.request_for(point),
                            schedule: replay_steps(dataset, run, typical, point),
                            out,
                            result: Ok(()),
                        });
                    }
                    Err(e) => status[k] = Err(e),
                }
            }
            // Spare solvers are lent to rayon's workers, one per worker at a time, and come
            // back to the run: their buffers grow with the number of data times, so one per
            // task would cost a copy per Jacobian column (tens of MB at 10⁶ points). Each task
            // writes its residuals as soon as it is solved, so no solution is kept.
            let pool = std::sync::Mutex::new(std::mem::take(&mut run.spares));
            let main_solver = &run.solver;
            // A series of one quantity is recorded straight into the task's residual slice and
            // weighed there, so a spare holds no solution at all.
            let in_order = dataset.reads_in_order();
            tasks.par_iter_mut().for_each_init(
                || Lent::take(&pool, main_solver),
                |lent, task| {
                    let solver = lent.solver();
                    let solved = match task.solve(solver, task.schedule.is_some(), in_order) {
                        Err(_) if task.schedule.is_some() => task.solve(solver, false, in_order),
                        other => other,
                    };
                    task.result = solved.and_then(|()| {
                        if in_order {
                            dataset.predict_in_place(task.point, task.out)?;
                            weigh(dataset, scale, task.out);
                            Ok(())
                        } else {
                            write(task.point, solver.solution(), task.out)
                        }
                    });
                },
            );
            run.spares = pool.into_inner().unwrap_or_else(|p| p.into_inner());
            for task in tasks {
                if let Err(e) = task.result {
                    status[task.index] = Err(e);
                }
            }
            for (k, out) in unchanged {
                if let Err(e) = write(&points[k], run.solver.solution(), out) {
                    status[k] = Err(e);
                }
            }
        }
        status
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
