//! The summary table printed to the terminal after a fit.

use super::data::{Report, ShortcutRow, ThicknessScalingReport};
use std::io::{self, Write};

/// A number in a fixed, readable format (significant digits, exponent when needed).
pub fn num(x: Option<f64>) -> String {
    match x {
        None => "–".to_string(),
        Some(0.0) => "0".to_string(),
        Some(v) if (1e-3..1e5).contains(&v.abs()) => {
            // Five significant digits.
            let decimals = (4 - v.abs().log10().floor() as i32).max(0) as usize;
            format!("{v:.decimals$}")
        }
        Some(v) => format!("{v:.4e}"),
    }
}

/// An estimate shown with enough digits that its standard error's second significant digit
/// is visible (and at least five significant digits).
pub fn num_with_error(x: Option<f64>, se: Option<f64>) -> String {
    match (x, se) {
        (Some(v), Some(e))
            if v != 0.0 && e > 0.0 && e.is_finite() && (1e-3..1e5).contains(&v.abs()) =>
        {
            let by_value = 4 - v.abs().log10().floor() as i32;
            let by_error = 1 - e.log10().floor() as i32;
            let decimals = by_value.max(by_error).clamp(0, 12) as usize;
            format!("{v:.decimals$}")
        }
        _ => num(x),
    }
}

/// The shortcut estimates as a short table, with the caveats each one carries.
pub fn write_shortcuts(rows: &[ShortcutRow], out: &mut dyn Write) -> io::Result<()> {
    if rows.is_empty() {
        return Ok(());
    }
    writeln!(out)?;
    writeln!(
        out,
        "shortcut estimates (textbook formulas under ideal conditions, for comparison):"
    )?;
    let mut caveats: Vec<&str> = Vec::new();
    for r in rows {
        let what = match (&r.parameter, r.estimate) {
            (Some(p), Some(v)) => {
                let ratio = r
                    .ratio_to_fit
                    .map_or(String::new(), |q| format!("  ({} × the fit)", num(Some(q))));
                format!("{p} = {} {}{ratio}", num(Some(v)), r.unit)
            }
            (None, Some(v)) => format!("D = {} {}", num(Some(v)), r.unit),
            (_, None) => format!(
                "not applicable: {}",
                r.unavailable.as_deref().unwrap_or("no estimate")
            ),
        };
        writeln!(out, "  {:<14} {:<36} {what}", r.dataset, r.method)?;
        for c in &r.caveats {
            if !caveats.contains(&c.as_str()) {
                caveats.push(c);
            }
        }
    }
    for c in caveats {
        writeln!(out, "  note: {c}")?;
    }
    Ok(())
}

/// The thickness-scaling check: D fitted to each sample size alone, and the verdict.
pub fn write_thickness_scaling(c: &ThicknessScalingReport, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out)?;
    writeln!(
        out,
        "{}-scaling check ({} fitted to each {} alone):",
        c.dimension, c.parameter, c.dimension
    )?;
    for g in &c.groups {
        let what = match (&g.unavailable, g.estimate) {
            (Some(why), _) => format!("not available: {why}"),
            (None, v) => format!(
                "{} ± {} {}  [{}, {}]",
                num_with_error(v, g.std_error),
                num(g.std_error),
                c.unit,
                num(g.lower),
                num(g.upper)
            ),
        };
        writeln!(
            out,
            "  {:<10} {:<28} {what}",
            g.size_label,
            g.datasets.join(", ")
        )?;
    }
    writeln!(out, "  {}", c.verdict)
}

/// Write the summary: parameters, shortcut estimates, fit quality, residual verdicts,
/// warnings.
pub fn write_summary(report: &Report, out: &mut dyn Write) -> io::Result<()> {
    if let Some(t) = &report.title {
        writeln!(out, "{t}")?;
    }
    let level = report.parameters.first().map_or(0.95, |p| p.ci_level) * 100.0;
    writeln!(
        out,
        "{:<22} {:>13} {:>12} {:>27}  unit",
        "parameter",
        "estimate",
        "std. error",
        format!("{level:.0} % interval"),
    )?;
    for p in &report.parameters {
        // For a parameter fitted on a log scale the interval formed there is the honest one
        // (asymmetric, positive); the symmetric one stays in report.json.
        let interval = if p.fixed {
            "(fixed)".to_string()
        } else if let Some(t) = &p.ci_transformed {
            format!("[{}, {}]*", num(t.low), num(t.high))
        } else {
            format!("[{}, {}]", num(p.ci_low), num(p.ci_high))
        };
        writeln!(
            out,
            "{:<22} {:>13} {:>12} {:>27}  {}",
            p.name,
            num_with_error(p.estimate, p.std_error),
            if p.fixed {
                String::new()
            } else {
                num(p.std_error)
            },
            interval,
            p.unit
        )?;
        if let Some(pr) = &p.profile {
            writeln!(
                out,
                "{:<22} {:>13} {:>12} {:>27}",
                "",
                "",
                "profile",
                format!("[{}, {}]", num(pr.low), num(pr.high))
            )?;
        }
        if let Some(b) = &p.bootstrap {
            writeln!(
                out,
                "{:<22} {:>13} {:>12} {:>27}",
                "",
                "",
                "bootstrap",
                format!("[{}, {}]", num(b.low), num(b.high))
            )?;
        }
    }
    if report
        .parameters
        .iter()
        .any(|p| !p.fixed && p.ci_transformed.is_some())
    {
        writeln!(
            out,
            "* interval formed on the parameter's fitted (log or bounded) scale"
        )?;
    }
    if !report.derived.is_empty() {
        writeln!(out)?;
        writeln!(out, "derived quantities:")?;
        for d in &report.derived {
            match d.value {
                Some(_) => writeln!(
                    out,
                    "  {:<20} {} ± {} {}   {}",
                    d.name,
                    num(d.value),
                    num(d.std_uncertainty),
                    d.unit,
                    d.description
                )?,
                None => writeln!(
                    out,
                    "  {:<20} not available: {}",
                    d.name,
                    d.unavailable.as_deref().unwrap_or("")
                )?,
            }
        }
    }
    write_shortcuts(&report.shortcut_estimates, out)?;
    if let Some(c) = &report.thickness_scaling {
        write_thickness_scaling(c, out)?;
    }
    let f = &report.fit;
    writeln!(out)?;
    writeln!(
        out,
        "fit: {} points, {} free parameters, RMSE (weighted) {}, R² {}, AICc {}",
        f.n_points,
        f.n_free,
        num(f.rmse),
        num(f.r2),
        num(f.aicc)
    )?;
    if let Some(c) = &f.chi_square {
        writeln!(
            out,
            "     χ² = {} on {} degrees of freedom (reduced {}, p = {})",
            num(c.chi2),
            c.dof,
            num(c.reduced),
            num(c.p_value)
        )?;
    }
    writeln!(
        out,
        "     {} after {} iterations ({} model evaluations)",
        f.stop_reason, f.iterations, f.evaluations
    )?;
    for d in report.datasets.iter() {
        writeln!(
            out,
            "dataset {} ({} points): {}",
            d.name, d.n_points, d.verdict
        )?;
        if let Some(dl) = &d.detection_limit {
            writeln!(out, "  {}", dl.summary)?;
        }
    }
    if let Some(c) = &report.comparison {
        writeln!(out)?;
        writeln!(
            out,
            "model comparison (AICc, same data and weighting):\n  {:<40} {:>6} {:>12} {:>9} {:>8} {:>10}",
            "model", "free", "AICc", "ΔAICc", "weight", "evidence"
        )?;
        for m in &c.models {
            writeln!(
                out,
                "  {:<40} {:>6} {:>12} {:>9} {:>8} {:>10}{}",
                m.name,
                m.n_free,
                num(m.aicc),
                num(m.delta_aicc),
                num(m.akaike_weight),
                num(m.evidence_ratio),
                if m.converged {
                    ""
                } else {
                    "  (did not converge)"
                }
            )?;
        }
        writeln!(out, "  {}", c.verdict)?;
    }
    if !report.warnings.is_empty() {
        writeln!(out)?;
        for w in &report.warnings {
            writeln!(out, "warning: {w}")?;
        }
    }
    Ok(())
}
