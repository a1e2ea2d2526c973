//! Synthetic data: the forward model of every dataset at given parameter values, with optional
//! seeded Gaussian noise.
//!
//! Two forms: [`simulate`] gives every predicted point (dataset, time, position, value, SI),
//! and [`rewrite_data_file`] writes a copy of a dataset's own data file with every measured
//! cell replaced by the simulated value in that column's unit — the same shape, header, units,
//! comments and other columns, so the experiment file can read it back unchanged. That is how
//! the sample data were made.

use crate::error::Result;
use crate::experiment::Experiment;
use crate::solver::Solver;
use rand::rngs::StdRng;
use rand::SeedableRng;
use rand_distr::{Distribution, Normal};

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
    for d in experiment.datasets.iter() {
        let model = d.model_for(params)?;
        let solution = solver.solve(&model, &d.request_for(params))?;
        let predicted = d.predict(params, solution)?;
        for (i, v) in predicted.iter().enumerate() {
            let (_, k) = d.output_of(i);
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

/// A copy of dataset `d`'s data file with the measured cells replaced by the model at `params`
/// (SI) plus Gaussian noise of standard deviation `noise` **in the column's own unit**.
/// `value_columns[i]` names the column of observed point i. Cells are found by the data-file
/// line of each point and the column's position in the header; the file must use plain
/// (unquoted) cells.
pub fn rewrite_data_file(
    experiment: &Experiment,
    d: usize,
    value_columns: &[String],
    params: &[f64],
    noise: f64,
    seed: u64,
) -> Result<String> {
    use crate::error::{Error, InputKind, Location};
    let ds = &experiment.datasets[d];
    let text = std::fs::read_to_string(&ds.file).map_err(|source| Error::Io {
        path: ds.file.clone(),
        source,
    })?;
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let header_idx = lines
        .iter()
        .position(|l| !l.trim().is_empty() && !l.trim_start().starts_with('#'))
        .ok_or_else(|| Error::input(InputKind::Empty, Location::file(&ds.file), "no header row"))?;
    let header = lines[header_idx].trim_start_matches('\u{feff}').to_string();
    let delim = [',', ';', '\t']
        .into_iter()
        .max_by_key(|c| header.matches(*c).count())
        .unwrap_or(',');
    let cells: Vec<&str> = header.split(delim).collect();
    let find = |name: &str| -> Result<(usize, crate::units::Unit)> {
        for (c, cell) in cells.iter().enumerate() {
            let (n, u) = crate::units::split_header(cell.trim().trim_matches('"'));
            if n.eq_ignore_ascii_case(name) {
                // The same reading of the header unit as the experiment loader's.
                let unit = match u {
                    Some(u) => crate::units::Unit::parse(u)
                        .unwrap_or_else(|_| crate::experiment::quantity::value_unit(u)),
                    None => crate::units::Unit::none(),
                };
                return Ok((c, unit));
            }
        }
        Err(Error::input(
            InputKind::UnknownColumn,
            Location::file(&ds.file).with_line(header_idx as u64 + 1),
            format!("no column '{name}' in the header"),
        ))
    };
    let model = ds.model_for(params)?;
    let mut solver = Solver::new(experiment.solver.clone())?;
    let solution = solver.solve(&model, &ds.request_for(params))?;
    let predicted = ds.predict(params, solution)?;
    let mut rng = StdRng::seed_from_u64(seed);
    let normal = Normal::new(0.0, noise.max(0.0))
        .map_err(|e| crate::Error::setting("noise", e.to_string()))?;
    for (i, v) in predicted.iter().enumerate() {
        let name = value_columns
            .get(i)
            .ok_or_else(|| Error::Internal("a simulated point has no column".into()))?;
        let (col, unit) = find(name)?;
        let line = ds.lines[i] as usize;
        let row = lines.get_mut(line.wrapping_sub(1)).ok_or_else(|| {
            Error::Internal(format!("line {line} is not in {}", ds.file.display()))
        })?;
        let mut parts: Vec<String> = row.split(delim).map(str::to_string).collect();
        let e = if noise > 0.0 {
            normal.sample(&mut rng)
        } else {
            0.0
        };
        let value = unit.from_si(*v) + e;
        let mut cell = format!("{value:.8e}");
        if delim == ';' && parts.get(col).is_some_and(|c| c.contains(',')) {
            cell = cell.replace('.', ",");
        }
        match parts.get_mut(col) {
            Some(slot) => *slot = cell,
            None => {
                return Err(Error::input(
                    InputKind::RaggedRow,
                    Location::file(&ds.file).with_line(line as u64),
                    "row has fewer cells than the header",
                ))
            }
        }
        *row = parts.join(&delim.to_string());
    }
    let mut out = lines.join("\n");
    out.push('\n');
    Ok(out)
}
