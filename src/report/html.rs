//! `report.html`: one self-contained file (inline SVG and CSS, no external assets, no
//! scripts) that a colleague can open offline.

use super::data::Report;
use super::figures::NamedFigure;
use super::terminal::{num, num_with_error};
use std::fmt::Write as _;

/// Escape text for HTML.
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// Strip an XML declaration so an SVG document can be inlined in HTML.
fn inline_svg(svg: &str) -> &str {
    match svg.find("<svg") {
        Some(i) => &svg[i..],
        None => svg,
    }
}

const STYLE: &str = "body{font-family:sans-serif;max-width:60rem;margin:2rem auto;padding:0 1rem;color:#1d1d1d;line-height:1.45}\
h1{font-size:1.5rem}h2{font-size:1.15rem;margin-top:2rem;border-bottom:1px solid #bbb}\
table{border-collapse:collapse;margin:.5rem 0}td,th{padding:.2rem .6rem;border-bottom:1px solid #ddd;text-align:right}\
td:first-child,th:first-child{text-align:left}figure{margin:1rem 0}figcaption{font-size:.9rem;color:#444}\
.warn{background:#fff4d6;border-left:4px solid #c98a00;padding:.4rem .8rem;margin:.3rem 0}\
.caution{background:#f3f3f3;border-left:4px solid #555;padding:.6rem .9rem}code{font-size:.92em}\
.panels{display:flex;flex-wrap:wrap;gap:1rem}.panels figure{flex:0 1 27rem;margin:0}svg{max-width:100%;height:auto}";

/// Render the report. `profiles` are the small profile-likelihood panels (empty without
/// `--profile`), shown side by side. `command` is the command line that reproduces it.
pub fn render(
    report: &Report,
    figures: &[(NamedFigure, String)],
    profiles: &[(NamedFigure, String)],
    correlation_svg: Option<&str>,
    command: &str,
) -> String {
    let mut h = String::new();
    let title = report
        .title
        .clone()
        .unwrap_or_else(|| "Diffusion fit".to_string());
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>{}</title><style>{STYLE}</style></head><body>\n",
        escape(&title)
    );
    let _ = write!(
        h,
        "<h1>{}</h1>\n<p>The diffusion equation was fitted to the measurements below; the table \
         gives each parameter with its standard error and confidence interval.</p>\n",
        escape(&title)
    );
    let _ = writeln!(
        h,
        "<p>Experiment file <code>{}</code>, {} data points in {} dataset(s), {} free parameters.</p>",
        escape(&report.experiment_file),
        report.fit.n_points,
        report.datasets.len(),
        report.fit.n_free
    );

    h.push_str("<h2>Parameters</h2>\n<table><tr><th>parameter</th><th>estimate</th><th>std. error</th><th>interval</th><th>unit</th></tr>\n");
    let level = report.parameters.first().map_or(0.95, |p| p.ci_level) * 100.0;
    for p in &report.parameters {
        let interval = if p.fixed {
            "fixed".to_string()
        } else if let Some(t) = &p.ci_transformed {
            format!("[{}, {}]*", num(t.low), num(t.high))
        } else {
            format!("[{}, {}]", num(p.ci_low), num(p.ci_high))
        };
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&p.name),
            num_with_error(p.estimate, p.std_error),
            if p.fixed {
                String::new()
            } else {
                num(p.std_error)
            },
            escape(&interval),
            escape(&p.unit)
        );
        if let Some(pr) = &p.profile {
            let _ = writeln!(
                h,
                "<tr><td></td><td></td><td>profile</td><td>[{}, {}]</td><td></td></tr>",
                num(pr.low),
                num(pr.high)
            );
        }
        if let Some(b) = &p.bootstrap {
            let _ = writeln!(
                h,
                "<tr><td></td><td></td><td>bootstrap</td><td>[{}, {}]</td><td></td></tr>",
                num(b.low),
                num(b.high)
            );
        }
    }
    let _ = writeln!(
        h,
        "</table>\n<p>Intervals at {level:.0} % confidence (Student t from the Jacobian). \
         * marks an interval formed on the parameter's fitted (log or bounded) scale.</p>"
    );

    let f = &report.fit;
    h.push_str("<h2>Fit quality</h2>\n<table>");
    for (k, v) in [
        ("data points", f.n_points.to_string()),
        ("free parameters", f.n_free.to_string()),
        ("weighted RMSE", num(f.rmse)),
        ("R²", num(f.r2)),
        ("AICc", num(f.aicc)),
        ("BIC", num(f.bic)),
        ("iterations", f.iterations.to_string()),
    ] {
        let _ = writeln!(h, "<tr><td>{k}</td><td>{}</td></tr>", escape(&v));
    }
    if let Some(c) = &f.chi_square {
        let _ = writeln!(
            h,
            "<tr><td>χ² (dof {})</td><td>{} (reduced {}, p = {})</td></tr>",
            c.dof,
            num(c.chi2),
            num(c.reduced),
            num(c.p_value)
        );
    }
    let _ = writeln!(h, "</table>\n<p>{}</p>", escape(&f.stop_reason));

    derived_section(&mut h, report);
    shortcut_section(&mut h, report);
    thickness_section(&mut h, report);
    comparison_section(&mut h, report);

    h.push_str("<h2>Residual checks</h2>\n<table><tr><th>dataset</th><th>points</th><th>runs (expected)</th><th>Durbin–Watson</th><th>verdict</th></tr>\n");
    for d in report.datasets.iter() {
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{} ({})</td><td>{}</td><td>{}</td></tr>",
            escape(&d.name),
            d.n_points,
            d.runs,
            num(d.expected_runs),
            num(d.durbin_watson),
            escape(&d.verdict)
        );
    }
    h.push_str("</table>\n");
    for d in report.datasets.iter() {
        if let Some(dl) = &d.detection_limit {
            let _ = writeln!(
                h,
                "<p class=\"floor\"><b>Detection limit, dataset {}:</b> {}</p>",
                escape(&d.name),
                escape(&dl.summary)
            );
        }
    }

    if !report.warnings.is_empty() {
        h.push_str("<h2>Warnings</h2>\n");
        for w in &report.warnings {
            let _ = writeln!(h, "<div class=\"warn\">{}</div>", escape(w));
        }
    }

    h.push_str("<h2>Figures</h2>\n");
    for (fig, svg) in figures {
        let _ = writeln!(
            h,
            "<figure>{}<figcaption>{}</figcaption></figure>",
            inline_svg(svg),
            escape(&fig.caption)
        );
    }
    if !profiles.is_empty() {
        h.push_str(
            "<h3>Profile likelihood</h3>\n<p>Each panel follows one free parameter with the \
             others re-optimised; the confidence interval is where the statistic stays below the \
             dashed threshold, its ends are marked.</p>\n<div class=\"panels\">\n",
        );
        for (fig, svg) in profiles {
            let _ = writeln!(
                h,
                "<figure>{}<figcaption>{}</figcaption></figure>",
                inline_svg(svg),
                escape(&fig.caption)
            );
        }
        h.push_str("</div>\n");
    }
    if let Some(svg) = correlation_svg {
        let _ = writeln!(
            h,
            "<figure>{}<figcaption>Correlation matrix of the free parameters: values near ±1 \
             mean the data constrain only a combination of the two.</figcaption></figure>",
            inline_svg(svg)
        );
    }

    h.push_str(
        "<h2>Caution</h2>\n<p class=\"caution\">These numbers are what the data and the chosen \
         model support, within the stated uncertainties; the fit cannot see an experiment that \
         differs from its description. Heated rods and furnaces burn, and solvents and dopant \
         sources can be hazardous: follow your laboratory's safety rules. Have any result that \
         feeds a safety-relevant design (case depth, barrier or coating life) confirmed under the \
         applicable codes and by a qualified, licensed professional.</p>\n",
    );
    let _ = write!(
        h,
        "<h2>Reproduce</h2>\n<p><code>{}</code><br>fickfit {}, experiment file SHA-256 \
         <code>{}</code>, report schema {}.</p>\n</body></html>\n",
        escape(command),
        escape(&report.fickfit_version),
        escape(&report.experiment_sha256),
        report.schema_version
    );
    h
}

/// Derived quantities (delta-method standard uncertainties), when the experiment asked for any.
fn derived_section(h: &mut String, report: &Report) {
    if report.derived.is_empty() {
        return;
    }
    h.push_str("<h2>Derived quantities</h2>\n<table><tr><th>quantity</th><th>value</th><th>std. uncertainty</th><th>unit</th><th>what it is</th></tr>\n");
    for d in &report.derived {
        let value = match (&d.unavailable, d.value) {
            (Some(why), _) => format!("not available: {why}"),
            (None, v) => num_with_error(v, d.std_uncertainty),
        };
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&d.name),
            escape(&value),
            escape(&num(d.std_uncertainty)),
            escape(&d.unit),
            escape(&d.description)
        );
    }
    h.push_str(
        "</table>\n<p>Uncertainties propagated from the fitted parameters' covariance and the \
         stated uncertainties of given inputs (first-order delta method).</p>\n",
    );
}

/// The textbook shortcut estimates beside the full fit, with the assumptions they rest on.
fn shortcut_section(h: &mut String, report: &Report) {
    if report.shortcut_estimates.is_empty() {
        return;
    }
    h.push_str("<h2>Shortcut estimates</h2>\n<p>Classic closed-form estimates from the same data. \
        They assume ideal conditions; where they differ from the full fit, the notes say which \
        assumption the data break.</p>\n<table><tr><th>dataset</th><th>method</th><th>estimate</th><th>unit</th><th>full fit</th><th>ratio</th><th>notes</th></tr>\n");
    for r in &report.shortcut_estimates {
        let estimate = match &r.unavailable {
            Some(why) => format!("not available: {why}"),
            None => num(r.estimate),
        };
        let mut notes: Vec<String> = Vec::new();
        if let Some(d) = &r.detail {
            notes.push(d.clone());
        }
        notes.extend(r.caveats.iter().cloned());
        let notes = notes
            .iter()
            .map(|n| escape(n))
            .collect::<Vec<_>>()
            .join("<br>");
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&r.dataset),
            escape(&r.method),
            escape(&estimate),
            escape(&r.unit),
            escape(&num(r.fitted)),
            escape(&num(r.ratio_to_fit)),
            notes
        );
    }
    h.push_str("</table>\n");
}

/// The thickness-scaling check: D fitted to each sample size alone, and the verdict.
fn thickness_section(h: &mut String, report: &Report) {
    let Some(c) = &report.thickness_scaling else {
        return;
    };
    let _ = writeln!(
        h,
        "<h2>Scaling with {}</h2>\n<p>Fickian uptake depends on time only through D t / L², so \
         runs on samples of different {} must give the same D when fitted alone.</p>\n\
         <table><tr><th>{}</th><th>runs</th><th>{} fitted alone</th><th>std. error</th>\
         <th>interval</th><th>unit</th></tr>",
        escape(&c.dimension),
        escape(&c.dimension),
        escape(&c.dimension),
        escape(&c.parameter)
    );
    for g in &c.groups {
        let (value, interval) = match &g.unavailable {
            Some(why) => (format!("not available: {why}"), String::new()),
            None => (
                num_with_error(g.estimate, g.std_error),
                format!("[{}, {}]", num(g.lower), num(g.upper)),
            ),
        };
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&g.size_label),
            escape(&g.datasets.join(", ")),
            escape(&value),
            escape(&num(g.std_error)),
            escape(&interval),
            escape(&c.unit)
        );
    }
    let _ = writeln!(h, "</table>\n<p>{}</p>", escape(&c.verdict));
}

/// The model comparison by AICc, when other experiment files were fitted beside this one.
fn comparison_section(h: &mut String, report: &Report) {
    let Some(c) = &report.comparison else {
        return;
    };
    h.push_str("<h2>Model comparison</h2>\n<table><tr><th>model</th><th>free parameters</th><th>AICc</th><th>ΔAICc</th><th>Akaike weight</th><th>evidence ratio</th><th>converged</th></tr>\n");
    for m in &c.models {
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&m.name),
            m.n_free,
            escape(&num(m.aicc)),
            escape(&num(m.delta_aicc)),
            escape(&num(m.akaike_weight)),
            escape(&num(m.evidence_ratio)),
            if m.converged { "yes" } else { "no" }
        );
    }
    let _ = writeln!(h, "</table>\n<p>{}</p>", escape(&c.verdict));
}
