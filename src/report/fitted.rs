//! `fitted.csv`: one row per data point with the model's prediction and the residuals, in the
//! units of the data files.
//!
//! Columns: `dataset`, `line` (in the data file, from 1), `time [U]` (time since the step, in
//! the unit of the first dataset's time column), `position [U]` (empty when the observable has
//! no position; in the unit of the first position column, or of the sensor positions written
//! in the experiment file), `observed [U]`, `predicted [U]`, `residual [U]` (observed −
//! predicted, a difference: no temperature offset), in the value unit of the data file, and
//! `standardised residual` (weighted residual divided by the residual standard deviation s, or
//! by 1 when σ are absolute and trusted). A reading censored at a detection limit shows the
//! limit as `observed` and the one-sided residual the fit used (0 while the model is at or
//! below the limit). When the datasets' value units differ, the three
//! value columns carry no unit in the header and a last column `unit` names each row's.
//! A unit the file does not state (or that cannot be read) falls back to SI: s, m.

use crate::analysis::Analysis;
use crate::experiment::quantity::value_unit;
use crate::experiment::schema::{DatasetSpec, Scalar};
use crate::fit::engine::Weighting;
use crate::units::{Quantity, Unit};
use std::io::{self, Write};
use std::path::Path;

/// A unit of a given quantity with the label it was written with.
#[derive(Debug, Clone)]
struct Written {
    label: String,
    unit: Unit,
}

impl Written {
    fn parse(label: &str, quantity: Quantity) -> Option<Written> {
        let unit = Unit::parse(label).ok()?;
        (unit.quantity() == quantity).then(|| Written {
            label: label.trim().to_string(),
            unit,
        })
    }

    fn si(quantity: Quantity) -> Written {
        let unit = Unit::si(quantity);
        Written {
            label: quantity.si_symbol().to_string(),
            unit,
        }
    }
}

/// The unit written in a header column `name` of `header` (names compared ignoring case).
fn header_unit(header: &[(String, Option<String>)], name: &str, q: Quantity) -> Option<Written> {
    header
        .iter()
        .find(|(n, _)| n.eq_ignore_ascii_case(name.trim()))
        .and_then(|(_, u)| u.as_deref())
        .and_then(|u| Written::parse(u, q))
}

/// The unit part of a quantity written in the experiment file (`"25 mm"` → mm).
fn scalar_unit(s: &Scalar, q: Quantity) -> Option<Written> {
    match s {
        Scalar::Text(t) => t
            .trim()
            .split_once(char::is_whitespace)
            .and_then(|(_, u)| Written::parse(u, q)),
        Scalar::Number(_) => None,
    }
}

/// Time and position units of one dataset as its files state them.
fn dataset_units(
    spec: Option<&DatasetSpec>,
    data_file: &Path,
) -> (Option<Written>, Option<Written>) {
    let Some(spec) = spec else {
        return (None, None);
    };
    let header = crate::data::read_header_units(data_file).unwrap_or_default();
    let time = spec
        .time_column
        .as_deref()
        .and_then(|c| header_unit(&header, c, Quantity::Time))
        .or_else(|| {
            // a file without a named time column: its first time-unit column
            header
                .iter()
                .find_map(|(_, u)| u.as_deref().and_then(|u| Written::parse(u, Quantity::Time)))
        });
    let position = spec
        .position_column
        .as_deref()
        .and_then(|c| header_unit(&header, c, Quantity::Length))
        .or_else(|| {
            spec.sensors.as_ref().and_then(|s| {
                s.iter()
                    .find_map(|e| scalar_unit(&e.position, Quantity::Length))
            })
        })
        .or_else(|| {
            spec.position
                .as_ref()
                .and_then(|p| scalar_unit(p, Quantity::Length))
        });
    (time, position)
}

/// Write the table.
pub fn write_fitted(analysis: &Analysis, out: &mut dyn Write) -> io::Result<()> {
    let e = &analysis.experiment;
    // The dataset tables as written, for the column names; without them, SI units.
    let specs = std::fs::read_to_string(&e.file)
        .ok()
        .and_then(|text| crate::experiment::parse_str(&text, &e.file).ok())
        .map(|f| f.datasets)
        .unwrap_or_default();
    let units: Vec<_> = e
        .datasets
        .iter()
        .map(|ds| dataset_units(specs.iter().find(|s| s.name == ds.name), ds.file.as_path()))
        .collect();
    let time = units
        .iter()
        .find_map(|u| u.0.clone())
        .unwrap_or_else(|| Written::si(Quantity::Time));
    let position = e
        .datasets
        .iter()
        .zip(&units)
        .filter(|(ds, _)| ds.positions.iter().any(Option::is_some))
        .find_map(|(_, u)| u.1.clone())
        .unwrap_or_else(|| Written::si(Quantity::Length));
    let same_value_unit = e
        .datasets
        .windows(2)
        .all(|w| w[0].value_unit == w[1].value_unit);
    let value_label = match e.datasets.first() {
        Some(ds) if same_value_unit && !ds.value_unit.is_empty() => {
            format!(" [{}]", ds.value_unit)
        }
        _ => String::new(),
    };
    write!(
        out,
        "dataset,line,time [{}],position [{}],observed{v},predicted{v},residual{v},standardised residual",
        time.label,
        position.label,
        v = value_label
    )?;
    if !same_value_unit {
        write!(out, ",unit")?;
    }
    writeln!(out)?;
    let f = &analysis.fit;
    let s = match f.weighting {
        Weighting::Absolute { rescale: false } => 1.0,
        _ => f.goodness.residual_sd,
    };
    let s = if s.is_finite() && s > 0.0 { s } else { 1.0 };
    let mut offset = 0;
    for (d, ds) in e.datasets.iter().enumerate() {
        let pred = &analysis.predictions[d];
        let vu = value_unit(&ds.value_unit);
        for (i, ((_, k), &y)) in ds.outputs().zip(&ds.observed).enumerate() {
            let t = ds.request.times.get(k).copied().unwrap_or(f64::NAN);
            let pos = ds.positions.get(i).copied().flatten();
            let r = f.residuals.get(offset + i).copied().unwrap_or(f64::NAN);
            let p = pred.get(i).copied().unwrap_or(f64::NAN);
            write!(
                out,
                "{},{},{:.9e},{},{:.9e},{:.9e},{:.9e},{:.6}",
                csv_name(&ds.name),
                ds.lines.get(i).copied().unwrap_or(0),
                time.unit.from_si(t),
                pos.map(|p| format!("{:.9e}", position.unit.from_si(p)))
                    .unwrap_or_default(),
                vu.from_si(y),
                vu.from_si(p),
                // One-sided at a censored reading, as in the fit.
                vu.diff_from_si(ds.residual(i, p, 1.0)),
                r / s
            )?;
            if !same_value_unit {
                write!(out, ",{}", csv_name(&ds.value_unit))?;
            }
            writeln!(out)?;
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
