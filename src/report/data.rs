//! The report as plain data: what `report.json` holds (documented in docs/report-format.md).
//!
//! Built once from an [`Analysis`]; every writer (JSON, CSV, terminal table, HTML) reads this
//! structure and nothing else. Values are in the user's units (the unit written in the
//! experiment file), with the SI value beside each estimate for scripts. A number that is not
//! finite is written as `null`, never as NaN or infinity.

use crate::analysis::shortcuts::ShortcutEstimate;
use crate::analysis::Analysis;
use crate::experiment::quantity::value_unit;
use crate::experiment::Experiment;
use crate::fit::profile::ProfileStatistic;
use serde::Serialize;
use sha2::{Digest, Sha256};

/// Version of the report layout; raised on any incompatible change.
pub const SCHEMA_VERSION: u32 = 1;

/// `Some(x)` for a finite number, `None` otherwise.
pub fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// The whole report.
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    /// Layout version.
    pub schema_version: u32,
    /// fickfit version that wrote it.
    pub fickfit_version: String,
    /// The experiment file as given.
    pub experiment_file: String,
    /// SHA-256 of the experiment file's bytes, hex.
    pub experiment_sha256: String,
    /// Title from the experiment file.
    pub title: Option<String>,
    /// Temperature of the run from the experiment file, K (for Arrhenius analyses).
    pub temperature_k: Option<f64>,
    /// Parameters, free and fixed.
    pub parameters: Vec<ParameterRow>,
    /// Fit quality and how the search ended.
    pub fit: FitSummary,
    /// Correlation matrix of the free parameters.
    pub correlation: Correlation,
    /// Per-dataset residual statistics and checks.
    pub datasets: Vec<DatasetSummary>,
    /// Warnings in plain words.
    pub warnings: Vec<String>,
    /// Classic shortcut estimates of the diffusivity, for comparison with the fit.
    pub shortcut_estimates: Vec<ShortcutRow>,
    /// Ranking of this model against the variants given with `--compare`, when any.
    pub comparison: Option<ComparisonReport>,
    /// Quantities derived from the fit (`[derived]` in the experiment file).
    pub derived: Vec<DerivedRow>,
    /// D fitted to each sample thickness (or radius) alone, and whether they agree; null
    /// unless runs on samples of two or more sizes share one diffusivity.
    pub thickness_scaling: Option<ThicknessScalingReport>,
}

/// The thickness-scaling check (see `fickfit::analysis::thickness`).
#[derive(Debug, Clone, Serialize)]
pub struct ThicknessScalingReport {
    /// The shared diffusivity parameter.
    pub parameter: String,
    /// Unit of the estimates (the parameter's).
    pub unit: String,
    /// `thickness` (slab) or `radius` (cylinder, sphere).
    pub dimension: String,
    /// One row per sample size, thinnest first.
    pub groups: Vec<ThicknessGroupRow>,
    /// χ² of ln D of the groups about their weighted mean.
    pub chi_square: Option<f64>,
    /// Degrees of freedom (groups − 1).
    pub dof: usize,
    /// Upper-tail p-value of `chi_square`.
    pub p_value: Option<f64>,
    /// True when the estimates agree at the fit's level; null when the check could not be made.
    pub consistent: Option<bool>,
    /// One sentence.
    pub verdict: String,
}

/// D fitted to the runs on samples of one size.
#[derive(Debug, Clone, Serialize)]
pub struct ThicknessGroupRow {
    /// The thickness or radial extent, m.
    pub size_m: f64,
    /// The same, written for reading (`40 um`).
    pub size_label: String,
    /// The runs.
    pub datasets: Vec<String>,
    /// D fitted to these runs alone, in `unit`.
    pub estimate: Option<f64>,
    /// Its standard error, in `unit`.
    pub std_error: Option<f64>,
    /// Lower end of its interval at the fit's level, in `unit`.
    pub lower: Option<f64>,
    /// Upper end, in `unit`.
    pub upper: Option<f64>,
    /// D in SI (m²/s).
    pub estimate_si: Option<f64>,
    /// Why D could not be fitted to these runs alone, when it could not.
    pub unavailable: Option<String>,
}

impl ThicknessScalingReport {
    /// The report section of a check.
    pub fn new(e: &Experiment, c: &crate::analysis::thickness::ThicknessCheck) -> Self {
        let p = &e.parameters[c.parameter];
        // A difference (standard error) converts with the unit's scale only.
        let diff = |si: f64| finite(si / p.unit_scale);
        ThicknessScalingReport {
            parameter: p.name.clone(),
            unit: p.unit.clone(),
            dimension: c.dimension.to_string(),
            groups: c
                .groups
                .iter()
                .map(|g| {
                    let ok = g.estimate.as_ref().ok();
                    ThicknessGroupRow {
                        size_m: g.size,
                        size_label: crate::analysis::thickness::size_label(g.size),
                        datasets: g
                            .datasets
                            .iter()
                            .map(|&i| e.datasets[i].name.clone())
                            .collect(),
                        estimate: ok.and_then(|s| finite(p.to_unit(s.value))),
                        std_error: ok.and_then(|s| diff(s.std_error)),
                        lower: ok.and_then(|s| finite(p.to_unit(s.interval.0))),
                        upper: ok.and_then(|s| finite(p.to_unit(s.interval.1))),
                        estimate_si: ok.and_then(|s| finite(s.value)),
                        unavailable: g.estimate.as_ref().err().cloned(),
                    }
                })
                .collect(),
            chi_square: finite(c.chi_square),
            dof: c.dof,
            p_value: finite(c.p_value),
            consistent: c.consistent,
            verdict: c.verdict.clone(),
        }
    }
}

/// A derived quantity.
#[derive(Debug, Clone, Serialize)]
pub struct DerivedRow {
    /// Name (the `[derived.NAME]` table; a flux adds its time: `flux[1 h]`).
    pub name: String,
    /// What it is.
    pub description: String,
    /// Unit of `value` and `std_uncertainty`.
    pub unit: String,
    /// Value (null when it could not be computed: see `unavailable`).
    pub value: Option<f64>,
    /// Standard uncertainty by the delta method (fit covariance and given input uncertainties).
    pub std_uncertainty: Option<f64>,
    /// Why it could not be computed.
    pub unavailable: Option<String>,
}

/// One parameter.
#[derive(Debug, Clone, Serialize)]
pub struct ParameterRow {
    /// Name (`D`, `M_inf[sorption]`).
    pub name: String,
    /// Unit of the values below.
    pub unit: String,
    /// Estimate.
    pub estimate: Option<f64>,
    /// Standard error.
    pub std_error: Option<f64>,
    /// Lower end of the Student-t interval.
    pub ci_low: Option<f64>,
    /// Upper end of the Student-t interval.
    pub ci_high: Option<f64>,
    /// Confidence level of every interval.
    pub ci_level: f64,
    /// The interval formed in the fit's internal coordinate and mapped back (asymmetric; for
    /// a log-scale parameter always positive), when it differs from the symmetric one.
    pub ci_transformed: Option<IntervalRow>,
    /// True when held at its given value.
    pub fixed: bool,
    /// Profile-likelihood interval (null ends: no crossing found) and its curve, when computed.
    pub profile: Option<ProfileRow>,
    /// Bootstrap percentile interval, when computed.
    pub bootstrap: Option<IntervalRow>,
    /// Estimate in SI.
    pub estimate_si: Option<f64>,
    /// Standard error in SI.
    pub std_error_si: Option<f64>,
    /// Start value of the fit, in `unit`.
    pub start: Option<f64>,
    /// Where the start value came from: `"experiment file"`, or how it was derived.
    pub start_source: String,
}

/// An interval in the parameter's unit.
#[derive(Debug, Clone, Serialize)]
pub struct IntervalRow {
    /// Lower end (null when unbounded).
    pub low: Option<f64>,
    /// Upper end (null when unbounded).
    pub high: Option<f64>,
}

/// A profile-likelihood interval with the computed points of its curve.
#[derive(Debug, Clone, Serialize)]
pub struct ProfileRow {
    /// Lower end in the parameter's unit (null when unbounded).
    pub low: Option<f64>,
    /// Upper end in the parameter's unit (null when unbounded).
    pub high: Option<f64>,
    /// The likelihood-ratio statistic of `points`: `"F"` (ΔRSS/(RSS_min/(n − p)), σ estimated
    /// from the fit) or `"chi_square"` (ΔRSS = Δχ², absolute σ).
    pub statistic: &'static str,
    /// Threshold on the statistic at the confidence level (F(1, n − p; level) or χ²(1; level)).
    pub threshold: Option<f64>,
    /// The computed points, sorted by value; the optimum is one of them.
    pub points: Vec<ProfilePointRow>,
}

/// One point of a profile curve.
#[derive(Debug, Clone, Serialize)]
pub struct ProfilePointRow {
    /// Parameter value in the parameter's unit.
    pub value: Option<f64>,
    /// Profile residual sum of squares (weighted), with the other parameters re-optimised.
    pub rss: Option<f64>,
    /// Likelihood-ratio statistic (dimensionless; 0 at the optimum).
    pub statistic: Option<f64>,
}

/// Fit quality.
#[derive(Debug, Clone, Serialize)]
pub struct FitSummary {
    /// Data points.
    pub n_points: usize,
    /// Free parameters.
    pub n_free: usize,
    /// Weighted residual sum of squares.
    pub rss: Option<f64>,
    /// √(RSS/n), weighted.
    pub rmse: Option<f64>,
    /// Weighted R².
    pub r2: Option<f64>,
    /// Akaike information criterion.
    pub aic: Option<f64>,
    /// AIC with the small-sample correction.
    pub aicc: Option<f64>,
    /// Bayesian information criterion.
    pub bic: Option<f64>,
    /// χ² figures when σ are absolute.
    pub chi_square: Option<ChiSquareRow>,
    /// True when the search met a convergence criterion.
    pub converged: bool,
    /// Levenberg–Marquardt iterations.
    pub iterations: usize,
    /// Why the search stopped, in words.
    pub stop_reason: String,
    /// Residual evaluations (forward solves per dataset).
    pub evaluations: usize,
    /// Weighting of the residuals.
    pub weighting: String,
}

/// χ² statistics.
#[derive(Debug, Clone, Serialize)]
pub struct ChiSquareRow {
    /// χ².
    pub chi2: Option<f64>,
    /// Degrees of freedom.
    pub dof: usize,
    /// χ²/dof.
    pub reduced: Option<f64>,
    /// P(χ² ≥ observed).
    pub p_value: Option<f64>,
}

/// Correlation matrix with names.
#[derive(Debug, Clone, Serialize)]
pub struct Correlation {
    /// Free-parameter names, the matrix's order.
    pub names: Vec<String>,
    /// Entries (null where a parameter is not identifiable).
    pub matrix: Vec<Vec<Option<f64>>>,
}

/// One dataset's residuals.
#[derive(Debug, Clone, Serialize)]
pub struct DatasetSummary {
    /// Name.
    pub name: String,
    /// Data file as written.
    pub file: String,
    /// Points.
    pub n_points: usize,
    /// Root-mean-square residual (unweighted), in `unit`.
    pub rms_residual: Option<f64>,
    /// Unit of the data as written in the data file.
    pub unit: String,
    /// Residual scale used for weighting (1 for absolute σ).
    pub weight_scale: Option<f64>,
    /// Runs of one sign.
    pub runs: usize,
    /// Expected runs for random signs.
    pub expected_runs: Option<f64>,
    /// Two-sided p-value of the runs test.
    pub runs_p_value: Option<f64>,
    /// Lag-1 autocorrelation of the residuals.
    pub lag1_autocorrelation: Option<f64>,
    /// Durbin–Watson statistic.
    pub durbin_watson: Option<f64>,
    /// Verdict in words.
    pub verdict: String,
    /// The instrument's detection limit and the readings at or below it, when the experiment
    /// file gives one (`detection_limit`).
    pub detection_limit: Option<DetectionLimitRow>,
}

/// A dataset's detection limit and what was done with the readings at or below it.
#[derive(Debug, Clone, Serialize)]
pub struct DetectionLimitRow {
    /// The limit, in the dataset's `unit`.
    pub limit: Option<f64>,
    /// `"exclude"` (left out of the fit) or `"censor"` (kept; the model only has to stay at or
    /// below the limit there).
    pub treatment: &'static str,
    /// Readings at or below the limit.
    pub count: usize,
    /// Censored readings where the fitted model lies above the limit (the only ones with a
    /// non-zero residual); null for `exclude`.
    pub model_above_limit: Option<usize>,
    /// The readings at or below the limit, in data order.
    pub points: Vec<BelowLimitRow>,
    /// The same in one sentence, as the terminal summary and report.html show it.
    pub summary: String,
}

/// One reading at or below a detection limit.
#[derive(Debug, Clone, Serialize)]
pub struct BelowLimitRow {
    /// Line of the data file, from 1.
    pub line: u64,
    /// Time of the reading, s.
    pub time_s: Option<f64>,
    /// Position (depth) of the reading, m; null when the observable has no position.
    pub position_m: Option<f64>,
    /// The reading as found in the data file, in the dataset's `unit`.
    pub reading: Option<f64>,
}

/// Readable length: (metres per unit, label).
fn length_unit(max: f64) -> (f64, &'static str) {
    if max >= 1e-2 {
        (1e-3, "mm")
    } else if max >= 1e-6 {
        (1e-6, "um")
    } else {
        (1e-9, "nm")
    }
}

/// Readable time: (seconds per unit, label).
fn time_unit(t: f64) -> (f64, &'static str) {
    if t >= 2.0 * 86400.0 {
        (86400.0, "d")
    } else if t >= 7200.0 {
        (3600.0, "h")
    } else if t >= 120.0 {
        (60.0, "min")
    } else {
        (1.0, "s")
    }
}

fn short(x: f64) -> String {
    let s = format!("{x:.4}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// Numbers in order, with every run of three or more equally spaced ones written as `a–b`:
/// `700, 725, 750, 775, 850` → `700–775, 850`.
fn ranges(xs: &[f64]) -> String {
    let same_step = |a: f64, b: f64| (a - b).abs() <= 1e-9 * a.abs().max(b.abs());
    let n = xs.len();
    let mut parts = Vec::new();
    let mut i = 0;
    while i < n {
        // The last index j of an equally spaced run starting at i.
        let mut j = i;
        if i + 1 < n && xs[i + 1] > xs[i] {
            let step = xs[i + 1] - xs[i];
            j = i + 1;
            while j + 1 < n && same_step(xs[j + 1] - xs[j], step) {
                j += 1;
            }
        }
        if j - i + 1 >= 3 {
            parts.push(format!("{}–{}", short(xs[i]), short(xs[j])));
            i = j + 1;
        } else {
            parts.push(short(xs[i]));
            i += 1;
        }
    }
    parts.join(", ")
}

/// The report row of a dataset's detection limit; `predicted` are the fitted predictions.
fn detection_limit_row(
    ds: &crate::experiment::Dataset,
    predicted: &[f64],
) -> Option<DetectionLimitRow> {
    use crate::experiment::BelowLimit;
    let dl = ds.detection_limit.as_ref()?;
    let unit = value_unit(&ds.value_unit);
    let limit = finite(unit.from_si(dl.limit));
    let model_above_limit = match dl.treatment {
        BelowLimit::Exclude => None,
        BelowLimit::Censor => Some(
            (0..ds.len())
                .filter(|&i| dl.is_censored(i) && predicted.get(i).is_some_and(|&f| f > dl.limit))
                .count(),
        ),
    };
    let points: Vec<BelowLimitRow> = dl
        .points
        .iter()
        .map(|p| BelowLimitRow {
            line: p.line,
            time_s: finite(p.time),
            position_m: p.position.and_then(finite),
            reading: finite(unit.from_si(p.reading)),
        })
        .collect();
    // "at 1 h: 600, 700 um; at 4 h: 900 um" (depths by time), or the times when there are no
    // positions.
    let listing = if dl.points.is_empty() {
        String::new()
    } else if dl.points.iter().all(|p| p.position.is_some()) {
        let max = dl
            .points
            .iter()
            .filter_map(|p| p.position)
            .fold(0.0, f64::max);
        let (ls, ll) = length_unit(max);
        let mut groups: Vec<(f64, Vec<f64>)> = Vec::new();
        for p in &dl.points {
            let x = p.position.unwrap_or(f64::NAN);
            match groups.iter_mut().find(|g| g.0 == p.time) {
                Some(g) => g.1.push(x),
                None => groups.push((p.time, vec![x])),
            }
        }
        let parts: Vec<String> = groups
            .iter()
            .map(|(t, xs)| {
                let (ts, tl) = time_unit(*t);
                let xs: Vec<f64> = xs.iter().map(|x| x / ls).collect();
                format!("at {} {tl}: {} {ll}", short(t / ts), ranges(&xs))
            })
            .collect();
        format!(" (depths {})", parts.join("; "))
    } else {
        let max = dl.points.iter().map(|p| p.time).fold(0.0, f64::max);
        let (ts, tl) = time_unit(max);
        let ts_list: Vec<String> = dl.points.iter().map(|p| short(p.time / ts)).collect();
        format!(" (times {} {tl})", ts_list.join(", "))
    };
    let what = match (dl.treatment, model_above_limit) {
        (BelowLimit::Exclude, _) => "excluded from the fit".to_string(),
        (BelowLimit::Censor, Some(m)) => format!(
            "censored: the model only has to stay at or below the limit there (the fitted model lies above it at {m} of them)"
        ),
        (BelowLimit::Censor, None) => "censored".to_string(),
    };
    let summary = format!(
        "{} reading(s) at or below the detection limit {} {}{listing}: {what}",
        dl.points.len(),
        limit.map_or("?".into(), short),
        ds.value_unit,
    );
    Some(DetectionLimitRow {
        limit,
        treatment: dl.treatment.word(),
        count: dl.points.len(),
        model_above_limit,
        points,
        summary,
    })
}

/// Convert a user-unit value through the parameter's reporting unit.
fn in_unit(experiment: &Experiment, k: usize, si: f64) -> Option<f64> {
    finite(experiment.parameters[k].to_unit(si))
}

fn diff_in_unit(experiment: &Experiment, k: usize, si: f64) -> Option<f64> {
    finite(si / experiment.parameters[k].unit_scale)
}

impl Report {
    /// Build the report from an analysis and the experiment file's bytes.
    pub fn new(analysis: &Analysis, experiment_bytes: &[u8]) -> Report {
        let e = &analysis.experiment;
        let f = &analysis.fit;
        let hash = Sha256::digest(experiment_bytes);
        let parameters = f
            .parameters
            .iter()
            .enumerate()
            .map(|(k, p)| ParameterRow {
                name: p.name.clone(),
                unit: e.parameters[k].unit.clone(),
                estimate: in_unit(e, k, p.estimate),
                std_error: p.std_error.and_then(|s| diff_in_unit(e, k, s)),
                ci_low: p.interval.as_ref().and_then(|i| in_unit(e, k, i.lower)),
                ci_high: p.interval.as_ref().and_then(|i| in_unit(e, k, i.upper)),
                ci_level: f.level,
                ci_transformed: p
                    .transformed_interval
                    .as_ref()
                    .filter(|t| {
                        p.interval
                            .as_ref()
                            .is_none_or(|i| i.lower != t.lower || i.upper != t.upper)
                    })
                    .map(|t| IntervalRow {
                        low: in_unit(e, k, t.lower),
                        high: in_unit(e, k, t.upper),
                    }),
                fixed: !p.free,
                profile: p.profile.as_ref().map(|pi| ProfileRow {
                    low: pi.lower.value().and_then(|v| in_unit(e, k, v)),
                    high: pi.upper.value().and_then(|v| in_unit(e, k, v)),
                    statistic: match pi.statistic {
                        ProfileStatistic::F => "F",
                        ProfileStatistic::ChiSquare => "chi_square",
                    },
                    threshold: finite(pi.statistic_threshold),
                    points: pi
                        .points
                        .iter()
                        .map(|pt| ProfilePointRow {
                            value: in_unit(e, k, pt.value),
                            rss: finite(pt.rss),
                            statistic: finite(pt.statistic),
                        })
                        .collect(),
                }),
                bootstrap: p.bootstrap.as_ref().map(|i| IntervalRow {
                    low: in_unit(e, k, i.lower),
                    high: in_unit(e, k, i.upper),
                }),
                estimate_si: finite(p.estimate),
                std_error_si: p.std_error.and_then(finite),
                start: in_unit(e, k, e.parameters[k].start),
                start_source: analysis
                    .start_notes
                    .iter()
                    .find(|n| n.parameter == k)
                    .map_or_else(|| "experiment file".to_string(), |n| n.how.clone()),
            })
            .collect();
        let g = &f.goodness;
        let fit = FitSummary {
            n_points: g.n,
            n_free: g.k,
            rss: finite(g.rss),
            rmse: finite(g.rmse),
            r2: g.r_squared.and_then(finite),
            aic: finite(g.aic),
            aicc: finite(g.aicc),
            bic: finite(g.bic),
            chi_square: g.chi_square.as_ref().map(|c| ChiSquareRow {
                chi2: finite(c.chi2),
                dof: c.dof,
                reduced: finite(c.reduced),
                p_value: finite(c.p_value),
            }),
            converged: f.stop.converged(),
            iterations: f.iterations,
            stop_reason: f.stop_message.clone(),
            evaluations: f.evaluations,
            weighting: format!("{:?}", f.weighting),
        };
        let correlation = Correlation {
            names: f.free_names.clone(),
            matrix: f
                .covariance
                .correlation
                .iter()
                .map(|row| row.iter().map(|v| v.and_then(finite)).collect())
                .collect(),
        };
        let datasets = e
            .datasets
            .iter()
            .enumerate()
            .map(|(d, ds)| {
                let pred = &analysis.predictions[d];
                let n = ds.len().max(1) as f64;
                // Unweighted residuals, one-sided at censored readings as in the fit.
                let rms = (pred
                    .iter()
                    .enumerate()
                    .map(|(i, p)| ds.residual(i, *p, 1.0).powi(2))
                    .sum::<f64>()
                    / n)
                    .sqrt();
                let checks = f.residual_checks.iter().find(|c| c.dataset == ds.name);
                DatasetSummary {
                    name: ds.name.clone(),
                    file: ds.file_as_written.clone(),
                    n_points: ds.len(),
                    // A residual is a difference: scale only, no temperature offset.
                    rms_residual: finite(value_unit(&ds.value_unit).diff_from_si(rms)),
                    unit: ds.value_unit.clone(),
                    weight_scale: finite(analysis.dataset_scales[d]),
                    runs: checks.map_or(0, |c| c.runs),
                    expected_runs: checks.and_then(|c| finite(c.expected_runs)),
                    runs_p_value: checks.and_then(|c| finite(c.runs_p)),
                    lag1_autocorrelation: checks.and_then(|c| finite(c.lag1_autocorrelation)),
                    durbin_watson: checks.and_then(|c| finite(c.durbin_watson)),
                    verdict: checks.map_or_else(
                        || "not checked".to_string(),
                        |c| {
                            let prefix = format!("{}: ", ds.name);
                            c.message
                                .strip_prefix(&prefix)
                                .unwrap_or(&c.message)
                                .to_string()
                        },
                    ),
                    detection_limit: detection_limit_row(ds, pred),
                }
            })
            .collect();
        let mut warnings: Vec<String> = f.warnings.iter().map(|w| w.message.clone()).collect();
        for ds in e.datasets.iter() {
            for w in &ds.warnings {
                warnings.push(format!("{}: {}", w.location, w.message));
            }
        }
        if !f.stop.converged() {
            warnings.insert(0, format!("The fit did not converge: {}", f.stop_message));
        }
        Report {
            schema_version: SCHEMA_VERSION,
            fickfit_version: env!("CARGO_PKG_VERSION").to_string(),
            experiment_file: e.file.display().to_string(),
            experiment_sha256: hash.iter().map(|b| format!("{b:02x}")).collect(),
            title: e.title.clone(),
            temperature_k: e.temperature,
            parameters,
            fit,
            correlation,
            datasets,
            warnings,
            shortcut_estimates: shortcut_rows(e, &analysis.shortcuts, Some(&f.estimates)),
            comparison: None,
            thickness_scaling: analysis
                .thickness_scaling
                .as_ref()
                .map(|c| ThicknessScalingReport::new(e, c)),
            derived: analysis
                .derived
                .iter()
                .map(|d| DerivedRow {
                    name: d.name.clone(),
                    description: d.description.clone(),
                    unit: d.unit.clone(),
                    value: d.value.as_ref().ok().and_then(|v| finite(v.0)),
                    std_uncertainty: d.value.as_ref().ok().and_then(|v| finite(v.1)),
                    unavailable: d.value.as_ref().err().cloned(),
                })
                .collect(),
        }
    }
}

/// One shortcut estimate, beside the fitted value of the parameter it estimates.
#[derive(Debug, Clone, Serialize)]
pub struct ShortcutRow {
    /// Dataset name.
    pub dataset: String,
    /// Method (`half-time`, `initial sqrt(t) slope`, `erfc linearisation at t = 4 h`, ...).
    pub method: String,
    /// Parameter estimated (null when the run's diffusivity is not a parameter).
    pub parameter: Option<String>,
    /// Unit of `estimate` and `fitted` (the parameter's; m2/s when there is none).
    pub unit: String,
    /// The shortcut estimate (null when the method could not be applied: see `unavailable`).
    pub estimate: Option<f64>,
    /// The estimate in SI (m²/s).
    pub estimate_si: Option<f64>,
    /// The fitted value of the same parameter.
    pub fitted: Option<f64>,
    /// estimate / fitted.
    pub ratio_to_fit: Option<f64>,
    /// Intermediate results of the method (half-time, slope...), SI.
    pub detail: Option<String>,
    /// Why the method could not be applied, when it could not.
    pub unavailable: Option<String>,
    /// What the method assumes.
    pub assumptions: Vec<String>,
    /// Where this experiment departs from those assumptions.
    pub caveats: Vec<String>,
}

/// The report rows of shortcut estimates, beside the fitted values (SI, one per parameter)
/// when there are any.
pub fn shortcut_rows(
    e: &Experiment,
    shortcuts: &[ShortcutEstimate],
    fitted: Option<&[f64]>,
) -> Vec<ShortcutRow> {
    shortcuts
        .iter()
        .map(|s| {
            let param = s.parameter.map(|k| &e.parameters[k]);
            let to_unit = |si: f64| match param {
                Some(p) => finite(p.to_unit(si)),
                None => finite(si),
            };
            let fitted_si = s.parameter.zip(fitted).map(|(k, f)| f[k]);
            let est = s.estimate();
            ShortcutRow {
                dataset: e.datasets[s.dataset].name.clone(),
                method: s.method.label(),
                parameter: param.map(|p| p.name.clone()),
                unit: param.map_or_else(|| "m2/s".to_string(), |p| p.unit.clone()),
                estimate: est.and_then(to_unit),
                estimate_si: est.and_then(finite),
                fitted: fitted_si.and_then(to_unit),
                ratio_to_fit: est.zip(fitted_si).and_then(|(a, b)| finite(a / b)),
                detail: s.detail.clone(),
                unavailable: s.value.as_ref().err().cloned(),
                assumptions: s.assumptions.clone(),
                caveats: s.caveats.clone(),
            }
        })
        .collect()
}

/// The model comparison.
#[derive(Debug, Clone, Serialize)]
pub struct ComparisonReport {
    /// The models, best first.
    pub models: Vec<ComparedModel>,
    /// The verdict in words.
    pub verdict: String,
}

/// One model of the comparison.
#[derive(Debug, Clone, Serialize)]
pub struct ComparedModel {
    /// Title of its experiment file, else the file name.
    pub name: String,
    /// Its experiment file.
    pub file: String,
    /// Free parameters.
    pub n_free: usize,
    /// Residual sum of squares under the common weighting (that of this report's model).
    pub rss: Option<f64>,
    /// AICc.
    pub aicc: Option<f64>,
    /// AICc minus the best AICc.
    pub delta_aicc: Option<f64>,
    /// Akaike weight.
    pub akaike_weight: Option<f64>,
    /// How many times more likely the best model is than this one.
    pub evidence_ratio: Option<f64>,
    /// True when its fit converged.
    pub converged: bool,
    /// Its fitted parameters: name, estimate and standard error in the parameter's unit.
    pub parameters: Vec<ComparedParameter>,
}

/// A fitted parameter of a compared model.
#[derive(Debug, Clone, Serialize)]
pub struct ComparedParameter {
    /// Name.
    pub name: String,
    /// Unit.
    pub unit: String,
    /// Estimate.
    pub estimate: Option<f64>,
    /// Standard error.
    pub std_error: Option<f64>,
}

impl ComparisonReport {
    /// The report section for `comparison` of `models` (in the order given to
    /// [`crate::analysis::compare::compare`]).
    pub fn new(
        comparison: &crate::analysis::compare::Comparison,
        models: &[&Analysis],
    ) -> ComparisonReport {
        let rows = comparison
            .ranked
            .iter()
            .filter_map(|r| {
                let i = comparison.names.iter().position(|n| *n == r.name)?;
                let a = models[i];
                let e = &a.experiment;
                Some(ComparedModel {
                    name: r.name.clone(),
                    file: e.file.display().to_string(),
                    n_free: comparison.free[i],
                    rss: finite(comparison.rss[i]),
                    aicc: finite(r.aicc),
                    delta_aicc: finite(r.delta),
                    akaike_weight: finite(r.weight),
                    evidence_ratio: finite(r.evidence_ratio),
                    converged: a.fit.stop.converged(),
                    parameters: a
                        .fit
                        .parameters
                        .iter()
                        .enumerate()
                        .filter(|(_, p)| p.free)
                        .map(|(k, p)| ComparedParameter {
                            name: p.name.clone(),
                            unit: e.parameters[k].unit.clone(),
                            estimate: in_unit(e, k, p.estimate),
                            std_error: p.std_error.and_then(|s| diff_in_unit(e, k, s)),
                        })
                        .collect(),
                })
            })
            .collect();
        ComparisonReport {
            models: rows,
            verdict: comparison.verdict.clone(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::ranges;

    #[test]
    fn runs_of_equal_steps_become_ranges() {
        assert_eq!(ranges(&[700.0, 725.0, 750.0, 775.0, 850.0]), "700–775, 850");
        assert_eq!(ranges(&[1.0, 2.0]), "1, 2");
        assert_eq!(ranges(&[1.0, 2.0, 3.0, 5.0, 7.0, 9.0]), "1–3, 5–9");
        assert_eq!(ranges(&[]), "");
        assert_eq!(ranges(&[4.0]), "4");
    }
}
