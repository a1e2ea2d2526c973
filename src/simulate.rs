//! Synthetic data: the forward model of every dataset at given parameter values, with optional
//! seeded Gaussian noise, as a table the CSV loader reads back.
//!
//! The table is long-format: `dataset, time [s], position [m], value`, one row per predicted
//! point (the data's times and positions), in SI; `position` is empty for observables without
//! a position. Read back a dataset's rows as a time series (time, value, with `dataset` as the
//! run column) or as profiles (position, value, time).

use crate::error::Result;
use crate::experiment::Experiment;
use crate::solver::Solver;
use rand::rngs::StdRng;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};
use std::io::{self, Write};

/// One simulated point.
#[derive(Debug, Clone, PartialEq)]
pub struct SimulatedPoint {
    /// Dataset name.
    pub dataset: String,
    /// Time, s.
    pub time: f64,
    /// Position, m, where the observable has one.
    pub position: Option<f64>,
    /// Predicted value (SI) plus noise.
    pub value: f64,
}

/// A simulated table.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SimulatedTable {
    /// Rows in dataset order, then data order.
    pub points: Vec<SimulatedPoint>,
}

impl SimulatedTable {
    /// Write the table as CSV.
    pub fn write_csv(&self, out: &mut dyn Write) -> io::Result<()> {
        writeln!(out, "dataset,time [s],position [m],value")?;
        for p in &self.points {
            let name = if p.dataset.contains([',', '"']) {
                format!("\"{}\"", p.dataset.replace('"', "\"\""))
            } else {
                p.dataset.clone()
            };
            writeln!(
                out,
                "{name},{:.10e},{},{:.10e}",
                p.time,
                p.position.map(|x| format!("{x:.10e}")).unwrap_or_default(),
                p.value
            )?;
        }
        Ok(())
    }
}

/// Simulate every dataset of `experiment` at `params` (full SI vector) with Gaussian noise of
/// standard deviation `noise` (SI unit of the values; 0 for none), seeded by `seed`.
pub fn simulate(
    experiment: &Experiment,
    params: &[f64],
    noise: f64,
    seed: u64,
) -> Result<SimulatedTable> {
    let mut rng = StdRng::seed_from_u64(seed);
    let normal = Normal::new(0.0, noise.max(0.0))
        .map_err(|e| crate::Error::setting("noise", e.to_string()))?;
    let mut solver = Solver::new(experiment.solver.clone())?;
    let mut table = SimulatedTable::default();
    for d in &experiment.datasets {
        let model = d.model_for(params)?;
        let solution = solver.solve(&model, &d.request)?;
        let predicted = d.predict(params, solution)?;
        for (i, v) in predicted.iter().enumerate() {
            let (_, k) = d.map[i];
            let e = if noise > 0.0 {
                normal.sample(&mut rng)
            } else {
                0.0
            };
            table.points.push(SimulatedPoint {
                dataset: d.name.clone(),
                time: d.request.times[k],
                position: d.positions.get(i).copied().flatten(),
                value: v + e,
            });
        }
    }
    Ok(table)
}
