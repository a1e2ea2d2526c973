//! `fitted.csv`: one row per data point with the model's prediction and the residuals.
//!
//! Columns: dataset, line (in the data file), time [s], position [m] (empty when the
//! observable has no position), observed, predicted, residual (observed − predicted), both in
//! SI, and the standardised residual (weighted residual divided by the residual standard
//! deviation s, or by 1 when σ are absolute and trusted).

use crate::analysis::Analysis;
use crate::fit::engine::Weighting;
use std::io::{self, Write};

/// Write the table.
pub fn write_fitted(analysis: &Analysis, out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        "dataset,line,time [s],position [m],observed,predicted,residual,standardised residual"
    )?;
    let f = &analysis.fit;
    let s = match f.weighting {
        Weighting::Absolute { rescale: false } => 1.0,
        _ => f.goodness.residual_sd,
    };
    let s = if s.is_finite() && s > 0.0 { s } else { 1.0 };
    let mut offset = 0;
    for (d, ds) in analysis.experiment.datasets.iter().enumerate() {
        let pred = &analysis.predictions[d];
        for (i, (&(_, k), &y)) in ds.map.iter().zip(&ds.observed).enumerate() {
            let t = ds.request.times.get(k).copied().unwrap_or(f64::NAN);
            let pos = ds.positions.get(i).copied().flatten();
            let r = f.residuals.get(offset + i).copied().unwrap_or(f64::NAN);
            writeln!(
                out,
                "{},{},{:.9e},{},{:.9e},{:.9e},{:.9e},{:.6}",
                csv_name(&ds.name),
                ds.lines.get(i).copied().unwrap_or(0),
                t,
                pos.map(|p| format!("{p:.9e}")).unwrap_or_default(),
                y,
                pred[i],
                y - pred[i],
                r / s
            )?;
        }
        offset += ds.len();
    }
    Ok(())
}

/// Quote a name for CSV when needed.
fn csv_name(name: &str) -> String {
    if name.contains([',', '"', '\n']) {
        format!("\"{}\"", name.replace('"', "\"\""))
    } else {
        name.to_string()
    }
}
