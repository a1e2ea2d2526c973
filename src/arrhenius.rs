//! Arrhenius analysis across fits: read the `report.json` of several fits made at different
//! temperatures, take one diffusivity parameter from each with its standard error, and fit
//! `D = D0 exp(−Ea / (R T))` by weighted least squares of `ln D` on `1/T`
//! ([`crate::shortcuts::arrhenius`]).
//!
//! Intervals: Student-t with n − 2 degrees of freedom on `ln D0` and `Ea`, from the standard
//! errors propagated from the reports' standard errors (weights 1/σ²_lnD, σ_lnD = σ_D/D). When
//! the points scatter more than their standard errors allow (reduced χ² > 1), the standard
//! errors are multiplied by √χ²_red (the Birge ratio; R. T. Birge, Phys. Rev. 40 (1932) 207,
//! from memory), so an interval never claims more than the scatter supports. With two points
//! there are no degrees of freedom: the interval uses the normal quantile and the reports'
//! standard errors as given.

use crate::error::{Error, InputKind, Location, Result};
use crate::report::plot::{Figure, Series};
use crate::shortcuts::arrhenius::{arrhenius, GAS_CONSTANT};
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal, StudentsT};
use std::path::{Path, PathBuf};

/// One fit's point.
#[derive(Debug, Clone, Serialize)]
pub struct ArrheniusPoint {
    /// The report it came from.
    pub report: String,
    /// Temperature, K.
    pub temperature_k: f64,
    /// The diffusivity, m²/s.
    pub d: f64,
    /// Its standard error, m²/s.
    pub d_std_error: f64,
    /// The fitted line's D at this temperature, m²/s.
    pub d_line: f64,
}

/// The Arrhenius fit and its points.
#[derive(Debug, Clone, Serialize)]
pub struct ArrheniusReport {
    /// The parameter taken from each report.
    pub parameter: String,
    /// The points, in the order given.
    pub points: Vec<ArrheniusPoint>,
    /// Pre-exponential factor D0, m²/s.
    pub d0: f64,
    /// Interval for D0 (from the interval of ln D0), m²/s.
    pub d0_interval: [f64; 2],
    /// Standard error of ln D0.
    pub ln_d0_std_error: f64,
    /// Activation energy, kJ/mol.
    pub activation_energy_kj_mol: f64,
    /// Standard error of Ea, kJ/mol.
    pub activation_energy_std_error: f64,
    /// Interval for Ea, kJ/mol.
    pub activation_energy_interval: [f64; 2],
    /// Correlation of ln D0 and Ea.
    pub correlation: f64,
    /// Confidence level.
    pub level: f64,
    /// Reduced χ² of the line (null with two points).
    pub reduced_chi2: Option<f64>,
    /// True when the standard errors were scaled by √χ²_red.
    pub scaled_by_scatter: bool,
}

fn bad(path: &Path, key: &str, message: String) -> Error {
    Error::input(
        InputKind::BadValue,
        Location::file(path).with_key(key),
        message,
    )
}

/// Read one point from a report.json: the parameter's SI estimate and standard error, and the
/// temperature (`temperature_k`, or `temperature` when given, K).
pub fn read_point(
    path: &Path,
    parameter: &str,
    temperature: Option<f64>,
) -> Result<ArrheniusPoint> {
    let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let json: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        Error::input(
            InputKind::BadValue,
            Location::file(path).with_line(e.line() as u64),
            format!("not a JSON report: {e}"),
        )
    })?;
    let params = json
        .get("parameters")
        .and_then(|p| p.as_array())
        .ok_or_else(|| {
            bad(
                path,
                "parameters",
                "no `parameters` array: is this a fickfit report.json?".into(),
            )
        })?;
    let names: Vec<&str> = params
        .iter()
        .filter_map(|p| p.get("name").and_then(|n| n.as_str()))
        .collect();
    let Some(p) = params
        .iter()
        .find(|p| p.get("name").and_then(|n| n.as_str()) == Some(parameter))
    else {
        return Err(bad(
            path,
            "parameters",
            format!(
                "no parameter '{parameter}' in this report (it has: {}); choose one with --parameter",
                names.join(", ")
            ),
        ));
    };
    let num = |key: &str| p.get(key).and_then(|v| v.as_f64());
    let d = num("estimate_si").ok_or_else(|| {
        bad(
            path,
            "parameters",
            format!("parameter '{parameter}' has no estimate"),
        )
    })?;
    if p.get("fixed").and_then(|v| v.as_bool()) == Some(true) {
        return Err(bad(
            path,
            "parameters",
            format!(
                "parameter '{parameter}' was held fixed in this fit: it carries no information"
            ),
        ));
    }
    let se = num("std_error_si").filter(|s| *s > 0.0).ok_or_else(|| {
        bad(
            path,
            "parameters",
            format!("parameter '{parameter}' has no standard error (not identifiable in that fit)"),
        )
    })?;
    let t = match temperature {
        Some(t) => t,
        None => json
            .get("temperature_k")
            .and_then(|v| v.as_f64())
            .ok_or_else(|| {
                bad(
                    path,
                    "temperature_k",
                    "the report has no temperature: add `temperature = \"1200 K\"` to its experiment \
                     file and fit again, or give the temperatures with --temperature"
                        .into(),
                )
            })?,
    };
    if !(t > 0.0 && d > 0.0) {
        return Err(bad(
            path,
            "temperature_k",
            format!("T = {t} K and D = {d} m²/s must both be positive"),
        ));
    }
    Ok(ArrheniusPoint {
        report: path.display().to_string(),
        temperature_k: t,
        d,
        d_std_error: se,
        d_line: f64::NAN,
    })
}

/// The Arrhenius fit of the given points at confidence `level`.
pub fn fit_points(
    parameter: &str,
    mut points: Vec<ArrheniusPoint>,
    level: f64,
) -> Result<ArrheniusReport> {
    if !(level > 0.0 && level < 1.0) {
        return Err(Error::setting(
            "level",
            format!("expected 0 < level < 1, found {level}"),
        ));
    }
    let t: Vec<f64> = points.iter().map(|p| p.temperature_k).collect();
    let mut sorted = t.clone();
    sorted.sort_by(f64::total_cmp);
    if sorted.windows(2).all(|w| w[0] == w[1]) {
        return Err(Error::Fit(
            "every report is at the same temperature: an Arrhenius fit needs at least two".into(),
        ));
    }
    let d: Vec<f64> = points.iter().map(|p| p.d).collect();
    let se: Vec<f64> = points.iter().map(|p| p.d_std_error).collect();
    let fit = arrhenius(&t, &d, Some(&se))?;
    let n = points.len();
    let (scale, scaled) = match fit.reduced_chi2 {
        Some(c) if c > 1.0 => (c.sqrt(), true),
        _ => (1.0, false),
    };
    let q = if n > 2 {
        StudentsT::new(0.0, 1.0, (n - 2) as f64)
            .map_err(|e| Error::Internal(e.to_string()))?
            .inverse_cdf(0.5 + level / 2.0)
    } else {
        Normal::new(0.0, 1.0)
            .map_err(|e| Error::Internal(e.to_string()))?
            .inverse_cdf(0.5 + level / 2.0)
    };
    let se_ln = fit.ln_d0_se.unwrap_or(f64::NAN) * scale;
    let se_ea = fit.activation_energy_se.unwrap_or(f64::NAN) * scale / 1e3;
    let ea = fit.activation_energy / 1e3;
    let correlation = fit
        .covariance
        .zip(fit.ln_d0_se.zip(fit.activation_energy_se))
        .map_or(f64::NAN, |(c, (a, b))| c / (a * b));
    for p in &mut points {
        p.d_line = fit.d0 * (-fit.activation_energy / (GAS_CONSTANT * p.temperature_k)).exp();
    }
    Ok(ArrheniusReport {
        parameter: parameter.to_string(),
        points,
        d0: fit.d0,
        d0_interval: [(fit.ln_d0 - q * se_ln).exp(), (fit.ln_d0 + q * se_ln).exp()],
        ln_d0_std_error: se_ln,
        activation_energy_kj_mol: ea,
        activation_energy_std_error: se_ea,
        activation_energy_interval: [ea - q * se_ea, ea + q * se_ea],
        correlation,
        level,
        reduced_chi2: fit.reduced_chi2,
        scaled_by_scatter: scaled,
    })
}

/// Read the reports and fit (see the module docs). `temperatures`, when given, are in the
/// order of `reports`, K.
pub fn from_reports(
    reports: &[PathBuf],
    parameter: &str,
    temperatures: Option<&[f64]>,
    level: f64,
) -> Result<ArrheniusReport> {
    if let Some(t) = temperatures {
        if t.len() != reports.len() {
            return Err(Error::setting(
                "temperature",
                format!(
                    "{} temperatures for {} reports: give one per report, in the same order",
                    t.len(),
                    reports.len()
                ),
            ));
        }
    }
    if reports.len() < 2 {
        return Err(Error::setting(
            "reports",
            format!(
                "{} report(s): an Arrhenius fit needs at least two temperatures",
                reports.len()
            ),
        ));
    }
    let points = reports
        .iter()
        .enumerate()
        .map(|(i, r)| read_point(r, parameter, temperatures.map(|t| t[i])))
        .collect::<Result<Vec<_>>>()?;
    fit_points(parameter, points, level)
}

/// The Arrhenius plot: log10 D against 1000/T, the points and the fitted line.
pub fn figure(report: &ArrheniusReport) -> Figure {
    let x: Vec<f64> = report
        .points
        .iter()
        .map(|p| 1e3 / p.temperature_k)
        .collect();
    let y: Vec<f64> = report.points.iter().map(|p| p.d).collect();
    let (lo, hi) = x
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    let line_x: Vec<f64> = (0..=50).map(|k| lo + (hi - lo) * k as f64 / 50.0).collect();
    let ea = report.activation_energy_kj_mol * 1e3;
    let line_y: Vec<f64> = line_x
        .iter()
        .map(|x| report.d0 * (-ea * x / 1e3 / GAS_CONSTANT).exp())
        .collect();
    Figure::new(
        format!(
            "Arrhenius plot of {}: Ea = {:.1} ± {:.1} kJ/mol",
            report.parameter, report.activation_energy_kj_mol, report.activation_energy_std_error
        ),
        "1000 / T [1/K]",
        format!("{} [m²/s]", report.parameter),
    )
    .with_log_y(true)
    .with_series(Series::markers("fitted D of each report", x, y))
    .with_series(Series::line("D0 exp(-Ea/(R T))", line_x, line_y))
}
