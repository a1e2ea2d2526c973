//! The figures of a fit report, built from an [`Analysis`] as plain [`Figure`]s: data and
//! model for every dataset, residuals, a normal Q–Q plot of the standardised residuals and the
//! correlation matrix; and, when profile-likelihood intervals were computed, one small panel
//! per free parameter with its profile curve. Values are shown in the units written in the
//! experiment file.

use super::data::Report;
use super::plot::{
    correlation_svg, grouped, profile_figure, qq_figure, residual_figure, thinned_markers,
    thinned_note, Figure, GuideKind, LegendPosition, ProfileCurve, Series, DRAW_ALL_UP_TO,
    DRAW_BINS, QQ_TAIL,
};
use crate::analysis::Analysis;
use crate::error::Result;
use crate::experiment::quantity::value_unit;
use crate::solver::Observable;
use crate::solver::{Request, Solver};

/// A figure with a file stem and a caption.
#[derive(Debug, Clone)]
pub struct NamedFigure {
    /// File stem (`uptake-sorption`, `residuals-sorption`, ...).
    pub stem: String,
    /// One-line caption for the HTML report.
    pub caption: String,
    /// The figure.
    pub figure: Figure,
}

/// Time axis unit: hours for long runs, minutes for medium, seconds otherwise.
fn time_axis(t_max: f64) -> (f64, &'static str) {
    if t_max >= 3.0 * 3600.0 {
        (3600.0, "h")
    } else if t_max >= 180.0 {
        (60.0, "min")
    } else {
        (1.0, "s")
    }
}

/// Length axis unit for positions.
fn length_axis(x_max: f64) -> (f64, &'static str) {
    if x_max < 2e-3 {
        (1e-6, "µm")
    } else if x_max < 2.0 {
        (1e-3, "mm")
    } else {
        (1.0, "m")
    }
}

/// A number with at most four significant digits and no trailing zeros.
fn short(v: f64) -> String {
    let s = format!("{:.4}", v);
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" {
        "0".to_string()
    } else {
        s
    }
}

/// Points drawn and points held by the thinned marker series of one figure (long series are
/// thinned for drawing only; see [`super::plot::thinned_markers`]).
#[derive(Debug, Default)]
struct Thinned {
    shown: usize,
    total: usize,
}

impl Thinned {
    /// The markers `(x, y)` thinned for drawing, counted.
    fn markers(&mut self, label: impl Into<String>, x: &[f64], y: &[f64]) -> Series {
        let (series, before) = thinned_markers(label, x, y);
        if let Some(n) = before {
            self.shown += series.x.len();
            self.total += n;
        }
        series
    }

    /// Put the note under `figure` and add a sentence to `caption` when something was
    /// thinned; `axis` names the x axis (`time`, `depth`).
    fn tell(&self, figure: &mut Figure, caption: &mut String, axis: &str) {
        if self.total == 0 {
            return;
        }
        let bins = grouped(DRAW_BINS);
        figure.notes.push(thinned_note(
            self.shown,
            self.total,
            &format!("lowest and highest in each of {bins} {axis} bins"),
        ));
        caption.push_str(&format!(
            " For drawing only, {} of {} points are shown: the lowest and the highest value in \
             each of {bins} bins along the {axis} axis (fitted.csv holds every point).",
            grouped(self.shown),
            grouped(self.total)
        ));
    }
}

/// Build every figure of the report.
pub fn figures(analysis: &Analysis) -> Result<Vec<NamedFigure>> {
    let e = &analysis.experiment;
    let mut out = Vec::new();
    let mut solver = Solver::new(e.solver.clone())?;
    let params = &analysis.fit.estimates;
    let mut std_residuals = Vec::new();
    let s = analysis.fit.goodness.residual_sd;
    let s = if s.is_finite() && s > 0.0 { s } else { 1.0 };
    let mut offset = 0;
    for (d, ds) in e.datasets.iter().enumerate() {
        let unit = value_unit(&ds.value_unit);
        let label = if ds.value_unit.is_empty() {
            "value".to_string()
        } else {
            format!("value [{}]", ds.value_unit)
        };
        let pred = &analysis.predictions[d];
        let t_max = ds
            .outputs()
            .map(|(_, k)| ds.request.times[k])
            .fold(0.0, f64::max);
        let (tscale, tunit) = time_axis(t_max);
        let is_profile = ds.positions.len() == ds.len()
            && ds.positions.iter().all(|p| p.is_some())
            && ds.request.observables.len() > 1
            && ds.request.times.len() < ds.request.observables.len();
        // The points of one profile time or one observable, in the axis units: x, the
        // observed value and the residual (observed − fitted). Filled per series, so that no
        // more than one series is held whole.
        let points = |of: &dyn Fn(usize, (usize, usize)) -> Option<f64>| {
            let count = ds
                .outputs()
                .enumerate()
                .filter(|&(i, m)| of(i, m).is_some())
                .count();
            let (mut x, mut y, mut r) = (
                Vec::with_capacity(count),
                Vec::with_capacity(count),
                Vec::with_capacity(count),
            );
            for (i, m) in ds.outputs().enumerate() {
                if let Some(xi) = of(i, m) {
                    let yi = unit.from_si(ds.observed[i]);
                    x.push(xi);
                    y.push(yi);
                    r.push(yi - unit.from_si(pred[i]));
                }
            }
            (x, y, r)
        };
        std_residuals.extend(
            analysis.fit.residuals[offset..offset + ds.len()]
                .iter()
                .map(|r| r / s),
        );
        offset += ds.len();
        let model = ds.model_for(params)?;
        if is_profile {
            // One data series and one model curve per profile time, against depth.
            let x_max = ds.positions.iter().flatten().cloned().fold(0.0, f64::max);
            let (xs, xu) = length_axis(x_max);
            let dense_x: Vec<f64> = (0..=120).map(|k| x_max * k as f64 / 120.0).collect();
            let dense = ds.resampled(
                Request {
                    times: ds.request.times.clone(),
                    observables: dense_x.iter().map(|&x| Observable::ValueAt(x)).collect(),
                },
                (0..ds.request.times.len() as u32)
                    .flat_map(|k| (0..dense_x.len() as u32).map(move |o| (o, k)))
                    .collect(),
            );
            let sol = solver.solve(&model, &dense.request_for(params))?;
            let curve = dense.predict(params, sol)?;
            let mut fig = Figure::new(
                format!("{}: profiles", ds.name),
                format!("depth [{xu}]"),
                label.clone(),
            );
            let mut resid_series = Vec::new();
            let (mut thin_data, mut thin_resid) = (Thinned::default(), Thinned::default());
            for (k, &t) in ds.request.times.iter().enumerate() {
                let (xd, yd, rr) =
                    points(&|i, m| (m.1 == k).then(|| ds.positions[i].unwrap_or(0.0) / xs));
                let tl = format!("t = {} {tunit}", short(t / tscale));
                resid_series.push(thin_resid.markers(tl.clone(), &xd, &rr));
                fig = fig.with_series(thin_data.markers(format!("data, {tl}"), &xd, &yd));
                let yc: Vec<f64> = curve[k * dense_x.len()..(k + 1) * dense_x.len()]
                    .iter()
                    .map(|v| unit.from_si(*v))
                    .collect();
                fig = fig.with_series(Series::line(
                    format!("model, {tl}"),
                    dense_x.iter().map(|x| x / xs).collect(),
                    yc,
                ));
            }
            let mut caption = format!(
                "{}: measured profiles (markers) and the fitted model (lines).",
                ds.name
            );
            thin_data.tell(&mut fig, &mut caption, "depth");
            out.push(NamedFigure {
                stem: format!("data-{}", ds.name),
                caption,
                figure: fig,
            });
            let mut caption = format!("{}: residuals (observed − fitted) against depth.", ds.name);
            let mut figure = residual_figure(
                format!("{}: residuals", ds.name),
                format!("depth [{xu}]"),
                format!("residual [{}]", ds.value_unit),
                resid_series,
            );
            thin_resid.tell(&mut figure, &mut caption, "depth");
            out.push(NamedFigure {
                stem: format!("residuals-{}", ds.name),
                caption,
                figure,
            });
        } else {
            // Time series and sensors: one series per observable against time.
            let dense_t: Vec<f64> = (0..=200).map(|k| t_max * k as f64 / 200.0).collect();
            let no = ds.request.observables.len();
            let dense = ds.resampled(
                Request {
                    times: dense_t.clone(),
                    observables: ds.request.observables.clone(),
                },
                (0..no as u32)
                    .flat_map(|o| (0..dense_t.len() as u32).map(move |k| (o, k)))
                    .collect(),
            );
            let sol = solver.solve(&model, &dense.request_for(params))?;
            let curve = dense.predict(params, sol)?;
            let mut fig = Figure::new(
                format!("{}: data and fitted model", ds.name),
                format!("time [{tunit}]"),
                label.clone(),
            );
            let mut resid_series = Vec::new();
            let (mut thin_data, mut thin_resid) = (Thinned::default(), Thinned::default());
            for o in 0..no {
                let name = match ds.request.observables[o] {
                    Observable::ValueAt(x) => {
                        let (xs, xu) = length_axis(x.max(1e-9));
                        format!("x = {} {xu}", short(x / xs))
                    }
                    _ => ds.name.clone(),
                };
                let (td, yd, rr) =
                    points(&|_, m| (m.0 == o).then(|| ds.request.times[m.1] / tscale));
                resid_series.push(thin_resid.markers(name.clone(), &td, &rr));
                fig = fig.with_series(thin_data.markers(format!("data, {name}"), &td, &yd));
                let yc: Vec<f64> = curve[o * dense_t.len()..(o + 1) * dense_t.len()]
                    .iter()
                    .map(|v| unit.from_si(*v))
                    .collect();
                fig = fig.with_series(Series::line(
                    format!("model, {name}"),
                    dense_t.iter().map(|t| t / tscale).collect(),
                    yc,
                ));
            }
            let rising = curve
                .first()
                .zip(curve.get(dense_t.len().saturating_sub(1)))
                .is_some_and(|(a, b)| b > a);
            if rising {
                fig = fig.with_legend(LegendPosition::LowerRight);
            }
            let mut caption = format!(
                "{}: measurements (markers) and the fitted model (lines).",
                ds.name
            );
            thin_data.tell(&mut fig, &mut caption, "time");
            out.push(NamedFigure {
                stem: format!("data-{}", ds.name),
                caption,
                figure: fig,
            });
            let mut caption = format!("{}: residuals (observed − fitted) against time.", ds.name);
            let mut figure = residual_figure(
                format!("{}: residuals", ds.name),
                format!("time [{tunit}]"),
                format!("residual [{}]", ds.value_unit),
                resid_series,
            );
            thin_resid.tell(&mut figure, &mut caption, "time");
            out.push(NamedFigure {
                stem: format!("residuals-{}", ds.name),
                caption,
                figure,
            });
        }
    }
    let mut caption = "Normal Q–Q plot of the standardised residuals of all datasets: points \
                       on the line mean normally distributed errors."
        .to_string();
    let figure = qq_figure(&std_residuals);
    let finite = std_residuals.iter().filter(|r| r.is_finite()).count();
    if finite > DRAW_ALL_UP_TO {
        // The residual markers are the last series (after the reference line).
        let drawn = figure.series.last().map_or(0, |s| s.x.len());
        caption.push_str(&format!(
            " For drawing only, {} of {} residuals are shown: the {} smallest and the {} \
             largest in full and evenly spaced ranks between.",
            grouped(drawn),
            grouped(finite),
            QQ_TAIL,
            QQ_TAIL
        ));
    }
    out.push(NamedFigure {
        stem: "normal-qq".to_string(),
        caption,
        figure,
    });
    Ok(out)
}

/// The correlation matrix as an SVG heat map, when there are at least two free parameters.
pub fn correlation(analysis: &Analysis) -> Result<Option<String>> {
    match correlation_matrix(analysis) {
        Some((names, m)) => Ok(Some(correlation_svg(names, &m)?.svg)),
        None => Ok(None),
    }
}

/// The correlation matrix as a PNG heat map at `path`, when there are at least two free
/// parameters; true when written.
pub fn correlation_png_file(analysis: &Analysis, path: &std::path::Path) -> Result<bool> {
    match correlation_matrix(analysis) {
        Some((names, m)) => {
            super::plot::correlation_png(names, &m, path)?;
            Ok(true)
        }
        None => Ok(false),
    }
}

/// Names and entries (NaN where undefined) of the correlation matrix, with ≥ 2 free
/// parameters.
fn correlation_matrix(analysis: &Analysis) -> Option<(&[String], Vec<Vec<f64>>)> {
    let names = &analysis.fit.free_names;
    if names.len() < 2 {
        return None;
    }
    let m: Vec<Vec<f64>> = analysis
        .fit
        .covariance
        .correlation
        .iter()
        .map(|r| r.iter().map(|v| v.unwrap_or(f64::NAN)).collect())
        .collect();
    Some((names, m))
}

/// Width of one profile-likelihood panel, pixels.
pub const PROFILE_PANEL_WIDTH: u32 = 420;
/// Height of one profile-likelihood panel, pixels.
pub const PROFILE_PANEL_HEIGHT: u32 = 320;

/// A file-name-safe stem for a parameter name (`M_inf[sorption]` → `M_inf-sorption`).
fn file_stem(name: &str) -> String {
    let s: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '_' || c == '-' {
                c
            } else {
                '-'
            }
        })
        .collect();
    s.trim_matches('-').to_string()
}

/// One small figure per parameter whose profile was computed: the likelihood-ratio statistic
/// against the parameter value in the parameter's unit (line with markers), the threshold at
/// the confidence level (dashed), and the interval ends (dotted verticals and open markers on
/// the threshold). Empty when no profile was computed.
pub fn profile_figures(report: &Report) -> Vec<NamedFigure> {
    let mut out = Vec::new();
    for p in &report.parameters {
        let Some(pr) = &p.profile else { continue };
        let (values, delta): (Vec<f64>, Vec<f64>) = pr
            .points
            .iter()
            .filter_map(|pt| Some((pt.value?, pt.statistic?)))
            .unzip();
        let objective = match pr.statistic {
            "chi_square" => "Δχ² [–]",
            _ => "ΔRSS/s² [–]",
        };
        let parameter = if p.unit.is_empty() {
            format!("{} [–]", p.name)
        } else {
            format!("{} [{}]", p.name, p.unit)
        };
        let curve = ProfileCurve {
            parameter,
            objective: objective.to_string(),
            values,
            delta,
            threshold: pr.threshold.unwrap_or(f64::NAN),
            lower: pr.low,
            upper: pr.high,
            level: p.ci_level,
        };
        let mut figure =
            profile_figure(&curve).with_size(PROFILE_PANEL_WIDTH, PROFILE_PANEL_HEIGHT);
        figure.title = format!("Profile of {}", p.name);
        // Short legend entries, so the box stays clear of the curve in a small panel; the
        // numbers are in the tables of the report.
        for g in &mut figure.guides {
            g.label = match g.kind {
                GuideKind::Horizontal => format!("threshold {}", short(curve.threshold)),
                GuideKind::Vertical => String::new(),
            };
        }
        let ends: Vec<f64> = [pr.low, pr.high].into_iter().flatten().collect();
        if !ends.is_empty() {
            let y = vec![curve.threshold; ends.len()];
            let label = format!("{} % interval ends", short(100.0 * p.ci_level));
            figure.series.push(Series::markers(label, ends, y));
        }
        let stat = match pr.statistic {
            "chi_square" => "Δχ² (absolute σ)",
            _ => "ΔRSS/s² (σ estimated from the fit; F threshold)",
        };
        out.push(NamedFigure {
            stem: format!("profile-{}", file_stem(&p.name)),
            caption: format!(
                "{}: profile likelihood, {stat} with the other parameters re-optimised; the \
                 {} % interval is where the curve stays below the dashed threshold.",
                p.name,
                short(100.0 * p.ci_level)
            ),
            figure,
        });
    }
    out
}
