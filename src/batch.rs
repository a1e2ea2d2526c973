//! Many experiments in one run: find the experiment files under folders (or take a list),
//! fit them in parallel, write one report folder per sample and a summary across samples
//! (`summary.csv` and `summary.html`).
//!
//! Finding samples. A folder is searched recursively (hidden entries and symbolic links to
//! folders are not followed) for files ending in `.toml`. A file whose top level has none of the
//! experiment file's tables (`[sample]`, `[[datasets]]`, `[parameters]`) is skipped with a note
//! (a configuration file, say); a file that is not valid TOML is kept as a sample, so a typo in
//! an experiment file is reported as a failed sample instead of being silently passed over.
//! File names (or paths relative to the searched folder) matching an exclusion pattern (`*` any
//! run of characters, `?` one character) are skipped too. A file named explicitly is always a
//! sample.
//!
//! Names. Each sample is named by its path relative to a common base folder (the searched
//! folder; for several inputs, their deepest common ancestor). Its report folder name is that
//! path without `.toml`, with `/` written as `--` and characters other than letters, digits,
//! `.`, `_` and `-` written as `_`; when two names would clash (also by case, or with the
//! summary files), each clashing name gets the first 8 hex digits of the SHA-256 of its relative
//! path appended. The names depend only on the files' own paths, so they are the same in every
//! run over the same inputs.
//!
//! Parallel work. Samples are fitted on a rayon pool of `jobs` threads; the profile-likelihood
//! and bootstrap work inside each fit runs on the same pool (rayon's work stealing), so the
//! machine is never given more than `jobs` busy threads. A sample that fails (unreadable or
//! invalid file, a fit error) is recorded with its message and the others go on.
//!
//! Writing. The output folder follows the rules of a single report folder
//! ([`ReportFolder`]): it must not exist or be empty unless replacing is allowed. Each sample's
//! report folder is staged and committed on its own as soon as its fit ends (so a run stopped
//! half-way keeps the reports already finished); `summary.csv` and `summary.html` are staged
//! and committed last.

use crate::analysis::{analyse, Analysis, AnalysisOptions};
use crate::error::{Error, InputKind, Location, Result};
use crate::report::data::{ParameterRow, Report};
use crate::report::folder::ReportFolder;
use crate::report::html::escape;
use crate::report::terminal::num;
use rayon::prelude::*;
use sha2::{Digest, Sha256};
use std::collections::HashMap;
use std::fmt::Write as _;
use std::io::Write;
use std::path::{Component, Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

/// Names the summary files take in the output folder (no sample folder may take them).
const SUMMARY_FILES: [&str; 2] = ["summary.csv", "summary.html"];

/// One experiment file to fit.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Sample {
    /// Path relative to the base folder, with `/` separators (`coupons/c17.toml`).
    pub name: String,
    /// Name of its report folder inside the output folder.
    pub folder: String,
    /// The file, as reached from the path the user gave.
    pub path: PathBuf,
}

/// A `.toml` file found in a folder but not fitted.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Skipped {
    /// The file.
    pub path: PathBuf,
    /// Why it was skipped.
    pub reason: String,
}

/// The samples found, sorted by name, and the files passed over.
#[derive(Debug, Clone, Default)]
pub struct Discovery {
    /// Samples to fit, sorted by name.
    pub samples: Vec<Sample>,
    /// Files found but skipped.
    pub skipped: Vec<Skipped>,
}

/// True when `name` matches `pattern`, where `*` stands for any run of characters (also
/// none) and `?` for exactly one.
pub fn wildcard_match(pattern: &str, name: &str) -> bool {
    let p: Vec<char> = pattern.chars().collect();
    let s: Vec<char> = name.chars().collect();
    // Iterative matching with one backtrack point (the last `*`).
    let (mut i, mut j) = (0, 0);
    let mut star: Option<(usize, usize)> = None;
    while j < s.len() {
        if i < p.len() && (p[i] == '?' || p[i] == s[j]) {
            i += 1;
            j += 1;
        } else if i < p.len() && p[i] == '*' {
            star = Some((i, j));
            i += 1;
        } else if let Some((si, sj)) = star {
            i = si + 1;
            j = sj + 1;
            star = Some((si, sj + 1));
        } else {
            return false;
        }
    }
    p[i..].iter().all(|&c| c == '*')
}

/// Why a `.toml` file found in a folder is not an experiment file, or `None` when it should
/// be fitted.
fn not_an_experiment(path: &Path) -> Option<String> {
    let text = std::fs::read_to_string(path).ok()?;
    // Not TOML at all (or unreadable): a broken experiment file is reported, not skipped.
    let table: toml::Table = text.parse().ok()?;
    let has = |k: &str| table.contains_key(k);
    if has("sample") || has("datasets") || has("parameters") {
        None
    } else {
        Some(
            "not an experiment file: it has no [sample], [[datasets]] or [parameters] table".into(),
        )
    }
}

fn io_error(path: &Path) -> impl FnOnce(std::io::Error) -> Error + '_ {
    move |source| Error::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// Every `.toml` file under `dir`, recursively, sorted; hidden entries and links to folders
/// are not followed.
fn toml_files(dir: &Path, out: &mut Vec<PathBuf>) -> Result<()> {
    let mut entries: Vec<_> = std::fs::read_dir(dir)
        .map_err(io_error(dir))?
        .collect::<std::io::Result<Vec<_>>>()
        .map_err(io_error(dir))?;
    entries.sort_by_key(|e| e.file_name());
    for entry in entries {
        let name = entry.file_name();
        if name.to_string_lossy().starts_with('.') {
            continue;
        }
        let path = entry.path();
        let kind = entry.file_type().map_err(io_error(&path))?;
        if kind.is_dir() {
            toml_files(&path, out)?;
        } else if path.extension().is_some_and(|x| x == "toml") && path.is_file() {
            out.push(path);
        }
    }
    Ok(())
}

/// The deepest folder that contains every one of `dirs` (absolute paths).
fn common_ancestor(dirs: &[PathBuf]) -> PathBuf {
    let mut base: Vec<Component> = match dirs.first() {
        Some(d) => d.components().collect(),
        None => return PathBuf::new(),
    };
    for d in &dirs[1..] {
        let c: Vec<Component> = d.components().collect();
        let same = base.iter().zip(&c).take_while(|(a, b)| a == b).count();
        base.truncate(same);
    }
    base.iter().collect()
}

/// The report folder name for a relative path (see the module documentation).
fn folder_name(relative: &Path) -> String {
    let parts: Vec<String> = relative
        .with_extension("")
        .components()
        .filter_map(|c| match c {
            Component::Normal(s) => Some(
                s.to_string_lossy()
                    .chars()
                    .map(|ch| {
                        if ch.is_ascii_alphanumeric() || matches!(ch, '.' | '_' | '-') {
                            ch
                        } else {
                            '_'
                        }
                    })
                    .collect::<String>(),
            ),
            _ => None,
        })
        .collect();
    let name = parts.join("--");
    if name.is_empty() || name.starts_with('.') {
        format!("sample{name}")
    } else {
        name
    }
}

fn short_hash(text: &str) -> String {
    Sha256::digest(text.as_bytes())
        .iter()
        .take(4)
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// Find the samples in `inputs` (folders searched recursively, or experiment files).
/// `exclude` patterns apply to the files found in folders, matched against the file name and
/// against the path relative to the searched folder.
///
/// # Errors
/// An input that does not exist or cannot be read; no experiment file found at all.
pub fn discover(inputs: &[PathBuf], exclude: &[String]) -> Result<Discovery> {
    if inputs.is_empty() {
        return Err(Error::setting(
            "inputs",
            "name at least one folder or experiment file",
        ));
    }
    // (path as reached from the user's input, canonical path)
    let mut found: Vec<(PathBuf, PathBuf)> = Vec::new();
    let mut bases = Vec::new();
    let mut skipped = Vec::new();
    for input in inputs {
        let canonical = input.canonicalize().map_err(|e| {
            Error::input(
                InputKind::Unreadable,
                Location::file(input),
                format!("cannot open it ({e}); name an existing folder or experiment file"),
            )
        })?;
        if canonical.is_dir() {
            bases.push(canonical.clone());
            let mut files = Vec::new();
            toml_files(input, &mut files)?;
            for f in files {
                let rel = f.strip_prefix(input).unwrap_or(&f);
                let rel_text = rel.to_string_lossy().replace('\\', "/");
                let file_name = f
                    .file_name()
                    .map(|n| n.to_string_lossy().into_owned())
                    .unwrap_or_default();
                if let Some(p) = exclude
                    .iter()
                    .find(|p| wildcard_match(p, &file_name) || wildcard_match(p, &rel_text))
                {
                    skipped.push(Skipped {
                        path: f,
                        reason: format!("excluded by the pattern '{p}'"),
                    });
                    continue;
                }
                if let Some(reason) = not_an_experiment(&f) {
                    skipped.push(Skipped { path: f, reason });
                    continue;
                }
                let c = f.canonicalize().map_err(io_error(&f))?;
                found.push((f, c));
            }
        } else {
            bases.push(
                canonical
                    .parent()
                    .map(Path::to_path_buf)
                    .unwrap_or_default(),
            );
            found.push((input.clone(), canonical));
        }
    }
    // The same file reached twice is fitted once.
    let mut seen = std::collections::HashSet::new();
    found.retain(|(_, c)| seen.insert(c.clone()));
    if found.is_empty() {
        return Err(Error::input(
            InputKind::Empty,
            Location::file(&inputs[0]),
            format!(
                "no experiment file found ({} .toml file(s) skipped); name a folder that holds experiment files, or the files themselves",
                skipped.len()
            ),
        ));
    }
    let base = common_ancestor(&bases);
    let mut samples: Vec<Sample> = found
        .into_iter()
        .map(|(path, canonical)| {
            let rel = canonical
                .strip_prefix(&base)
                .map(Path::to_path_buf)
                .unwrap_or_else(|_| canonical.clone());
            let name = rel
                .components()
                .filter_map(|c| match c {
                    Component::Normal(s) => Some(s.to_string_lossy().into_owned()),
                    _ => None,
                })
                .collect::<Vec<_>>()
                .join("/");
            Sample {
                folder: folder_name(&rel),
                name,
                path,
            }
        })
        .collect();
    samples.sort_by(|a, b| a.name.cmp(&b.name));
    // Clashing folder names (also by case, for case-insensitive file systems) get a hash.
    let mut count: HashMap<String, usize> = HashMap::new();
    for s in &samples {
        *count.entry(s.folder.to_lowercase()).or_default() += 1;
    }
    for s in &mut samples {
        let key = s.folder.to_lowercase();
        if count[&key] > 1 || SUMMARY_FILES.contains(&key.as_str()) {
            s.folder = format!("{}-{}", s.folder, short_hash(&s.name));
        }
    }
    Ok(Discovery { samples, skipped })
}

/// How a sample ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Status {
    /// Fitted, converged, report written.
    Ok,
    /// Fitted and report written, but the search did not converge.
    NotConverged,
    /// No report: the file could not be loaded, or the fit or the report failed.
    Failed,
}

impl Status {
    /// The word written in the summary.
    pub fn label(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::NotConverged => "not converged",
            Status::Failed => "failed",
        }
    }
}

/// The outcome of one sample.
#[derive(Debug, Clone)]
pub struct SampleResult {
    /// The sample.
    pub sample: Sample,
    /// How it ended.
    pub status: Status,
    /// Its report (none when it failed).
    pub report: Option<Report>,
    /// The error message, for a failed sample.
    pub error: Option<String>,
    /// Wall time of the sample's fit and report, s.
    pub seconds: f64,
}

/// Choices for a batch run.
#[derive(Debug, Clone)]
pub struct BatchOptions {
    /// The options of every sample's fit.
    pub analysis: AnalysisOptions,
    /// Samples fitted at once (threads of the pool), at least 1.
    pub jobs: usize,
    /// Allow writing into an existing, non-empty output folder (replacing report files).
    pub force: bool,
}

/// The outcome of a batch run.
#[derive(Debug, Clone)]
pub struct BatchSummary {
    /// One result per sample, sorted by sample name.
    pub results: Vec<SampleResult>,
    /// Files found but skipped.
    pub skipped: Vec<Skipped>,
    /// Wall time of the whole run, s.
    pub seconds: f64,
}

impl BatchSummary {
    /// Number of samples with `status`.
    pub fn count(&self, status: Status) -> usize {
        self.results.iter().filter(|r| r.status == status).count()
    }
}

/// Write the files of one report (report.json, fitted.csv, the figures as SVG and PNG, the
/// correlation plot, report.html) into a staged report folder; `command` is the command
/// line that reproduces it, shown in report.html. The caller commits the folder.
pub fn write_report(
    folder: &ReportFolder,
    analysis: &Analysis,
    report: &Report,
    command: &str,
) -> Result<()> {
    use crate::report::{figures, fitted, html, plot};
    folder.write_with("report.json", |w| {
        serde_json::to_writer_pretty(&mut *w, report).map_err(std::io::Error::other)?;
        writeln!(w)
    })?;
    folder.write_with("fitted.csv", |w| fitted::write_fitted(analysis, w))?;
    // Figures: SVG and PNG files, and the same SVGs inline in report.html. Each figure is
    // drawn on its own (rayon; drawing is most of the report's time), kept in order.
    let draw = |list: Vec<figures::NamedFigure>| -> Result<Vec<(figures::NamedFigure, String)>> {
        list.into_par_iter()
            .map(|fig| {
                let svg = plot::to_svg(&fig.figure)?.svg;
                folder.write_with(&format!("{}.svg", fig.stem), |w| {
                    w.write_all(svg.as_bytes())
                })?;
                plot::to_png(&fig.figure, folder.staged(&format!("{}.png", fig.stem)))?;
                Ok((fig, svg))
            })
            .collect()
    };
    let correlation_figure = || -> Result<Option<String>> {
        let correlation = figures::correlation(analysis)?;
        if let Some(svg) = &correlation {
            folder.write_with("correlation.svg", |w| w.write_all(svg.as_bytes()))?;
            figures::correlation_png_file(analysis, &folder.staged("correlation.png"))?;
        }
        Ok(correlation)
    };
    let (main, correlation) = rayon::join(
        || -> Result<_> {
            let rendered = draw(figures::figures(analysis)?)?;
            let profiles = draw(figures::profile_figures(report))?;
            Ok((rendered, profiles))
        },
        correlation_figure,
    );
    let (rendered, profiles) = main?;
    let correlation = correlation?;
    let page = html::render(
        report,
        &rendered,
        &profiles,
        correlation.as_deref(),
        command,
    );
    folder.write_with("report.html", |w| w.write_all(page.as_bytes()))?;
    Ok(())
}

/// The `fickfit fit` command line that makes the same report as the batch did for `sample`.
fn fit_command(sample: &Sample, dir: &Path, options: &AnalysisOptions) -> String {
    let mut c = format!(
        "fickfit fit {} --out {}",
        sample.path.display(),
        dir.display()
    );
    if let Some(l) = options.level {
        let _ = write!(c, " --level {l}");
    }
    if options.profile {
        c.push_str(" --profile");
    }
    if options.bootstrap > 0 {
        let _ = write!(
            c,
            " --bootstrap {} --seed {}",
            options.bootstrap, options.seed
        );
    }
    if options.rescale_absolute {
        c.push_str(" --rescale");
    }
    c
}

/// Fit one sample and write its report folder `out/<folder>`.
fn fit_sample(sample: &Sample, out: &Path, options: &BatchOptions) -> SampleResult {
    let started = Instant::now();
    let attempt = || -> Result<Report> {
        let bytes = std::fs::read(&sample.path).map_err(|e| {
            Error::input(
                InputKind::Unreadable,
                Location::file(&sample.path),
                format!("cannot read the experiment file: {e}"),
            )
        })?;
        let experiment = crate::experiment::load(&sample.path)?;
        let analysis = analyse(Arc::new(experiment), &options.analysis)?;
        let report = Report::new(&analysis, &bytes);
        let dir = out.join(&sample.folder);
        let folder = ReportFolder::create(&dir, options.force)?;
        write_report(
            &folder,
            &analysis,
            &report,
            &fit_command(sample, &dir, &options.analysis),
        )?;
        folder.commit()?;
        Ok(report)
    };
    let (status, report, error) = match attempt() {
        Ok(r) if r.fit.converged => (Status::Ok, Some(r), None),
        Ok(r) => (Status::NotConverged, Some(r), None),
        Err(e) => (Status::Failed, None, Some(e.to_string())),
    };
    SampleResult {
        sample: sample.clone(),
        status,
        report,
        error,
        seconds: started.elapsed().as_secs_f64(),
    }
}

/// Fit every sample of `discovery` on a pool of `options.jobs` threads, write each report
/// folder under `out` and then `summary.csv` and `summary.html`. `on_done` is called (from
/// the worker threads) as each sample ends, for progress and messages.
///
/// # Errors
/// The output folder is refused (not empty without `force`) or cannot be written; the thread
/// pool cannot be made. A failing sample is not an error: it is in the summary.
pub fn run(
    discovery: &Discovery,
    out: &Path,
    options: &BatchOptions,
    on_done: &(dyn Fn(&SampleResult) + Sync),
) -> Result<BatchSummary> {
    if options.jobs == 0 {
        return Err(Error::setting("jobs", "at least one job is needed"));
    }
    let started = Instant::now();
    let folder = ReportFolder::create(out, options.force)?;
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(options.jobs)
        .thread_name(|i| format!("fickfit-batch-{i}"))
        .build()
        .map_err(|e| Error::Internal(format!("cannot start the worker threads: {e}")))?;
    let results: Vec<SampleResult> = pool.install(|| {
        discovery
            .samples
            .par_iter()
            // One sample per task: samples differ in cost, so let idle threads take the next.
            .with_max_len(1)
            .map(|s| {
                let r = fit_sample(s, out, options);
                on_done(&r);
                r
            })
            .collect()
    });
    let summary = BatchSummary {
        results,
        skipped: discovery.skipped.clone(),
        seconds: started.elapsed().as_secs_f64(),
    };
    folder.write_with("summary.csv", |w| write_summary_csv(&summary, w))?;
    let page = summary_html(&summary);
    folder.write_with("summary.html", |w| w.write_all(page.as_bytes()))?;
    folder.commit()?;
    Ok(summary)
}

/// The first sentence of a warning, at most 120 characters.
pub fn short_warning(text: &str) -> String {
    let first = match text.find(". ") {
        Some(i) => &text[..=i],
        None => text,
    };
    if first.chars().count() > 120 {
        let cut: String = first.chars().take(119).collect();
        format!("{cut}…")
    } else {
        first.to_string()
    }
}

/// Parameter names over all reports, in order of first appearance.
fn parameter_names(summary: &BatchSummary) -> Vec<String> {
    let mut names: Vec<String> = Vec::new();
    for r in summary.results.iter().filter_map(|r| r.report.as_ref()) {
        for p in &r.parameters {
            if !names.contains(&p.name) {
                names.push(p.name.clone());
            }
        }
    }
    names
}

/// The interval report.html shows for a parameter: the one formed on the fitted scale when
/// there is one, else the Student-t interval; none for a fixed parameter.
pub fn shown_interval(p: &ParameterRow) -> (Option<f64>, Option<f64>) {
    if p.fixed {
        (None, None)
    } else if let Some(t) = &p.ci_transformed {
        (t.low, t.high)
    } else {
        (p.ci_low, p.ci_high)
    }
}

fn cell(x: Option<f64>) -> String {
    x.map(|v| v.to_string()).unwrap_or_default()
}

/// Write `summary.csv`: one row per sample (columns in docs/report-format.md). Numbers are
/// written with every digit (shortest text that reads back to the same double), so they
/// equal those of each report.json.
pub fn write_summary_csv(summary: &BatchSummary, out: &mut dyn Write) -> std::io::Result<()> {
    let names = parameter_names(summary);
    let profile = summary
        .results
        .iter()
        .filter_map(|r| r.report.as_ref())
        .any(|r| r.parameters.iter().any(|p| p.profile.is_some()));
    let bootstrap = summary
        .results
        .iter()
        .filter_map(|r| r.report.as_ref())
        .any(|r| r.parameters.iter().any(|p| p.bootstrap.is_some()));
    let mut w = csv::Writer::from_writer(out);
    let mut header: Vec<String> = [
        "sample",
        "status",
        "experiment_file",
        "report",
        "n_points",
        "n_free",
        "rmse",
        "r2",
        "aicc",
        "ci_level",
        "warnings",
        "warning_text",
        "error",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    for n in &names {
        header.push(n.clone());
        for suffix in ["std_error", "low", "high", "unit"] {
            header.push(format!("{n} {suffix}"));
        }
        if profile {
            header.push(format!("{n} profile_low"));
            header.push(format!("{n} profile_high"));
        }
        if bootstrap {
            header.push(format!("{n} bootstrap_low"));
            header.push(format!("{n} bootstrap_high"));
        }
    }
    w.write_record(&header)?;
    for r in &summary.results {
        let mut row = vec![
            r.sample.name.clone(),
            r.status.label().to_string(),
            r.sample.path.display().to_string(),
        ];
        match &r.report {
            None => {
                row.extend(std::iter::repeat_n(String::new(), 9));
                row.push(r.error.clone().unwrap_or_default());
                row.extend(std::iter::repeat_n(String::new(), header.len() - row.len()));
            }
            Some(rep) => {
                row.push(format!("{}/report.html", r.sample.folder));
                row.push(rep.fit.n_points.to_string());
                row.push(rep.fit.n_free.to_string());
                row.push(cell(rep.fit.rmse));
                row.push(cell(rep.fit.r2));
                row.push(cell(rep.fit.aicc));
                row.push(cell(rep.parameters.first().map(|p| p.ci_level)));
                row.push(rep.warnings.len().to_string());
                row.push(
                    rep.warnings
                        .iter()
                        .map(|t| short_warning(t))
                        .collect::<Vec<_>>()
                        .join(" | "),
                );
                row.push(String::new());
                for n in &names {
                    match rep.parameters.iter().find(|p| &p.name == n) {
                        Some(p) => {
                            let (lo, hi) = shown_interval(p);
                            row.push(cell(p.estimate));
                            row.push(cell(p.std_error));
                            row.push(cell(lo));
                            row.push(cell(hi));
                            row.push(p.unit.clone());
                            if profile {
                                row.push(cell(p.profile.as_ref().and_then(|x| x.low)));
                                row.push(cell(p.profile.as_ref().and_then(|x| x.high)));
                            }
                            if bootstrap {
                                row.push(cell(p.bootstrap.as_ref().and_then(|x| x.low)));
                                row.push(cell(p.bootstrap.as_ref().and_then(|x| x.high)));
                            }
                        }
                        None => {
                            let k = 5 + 2 * usize::from(profile) + 2 * usize::from(bootstrap);
                            row.extend(std::iter::repeat_n(String::new(), k));
                        }
                    }
                }
            }
        }
        w.write_record(&row)?;
    }
    w.flush()
}

const SUMMARY_STYLE: &str = "body{font-family:sans-serif;margin:2rem;color:#1d1d1d;line-height:1.4}\
h1{font-size:1.4rem}h2{font-size:1.1rem;margin-top:1.6rem;border-bottom:1px solid #bbb}\
table{border-collapse:collapse;font-size:.9rem}td,th{padding:.2rem .5rem;border-bottom:1px solid #ddd;text-align:left;vertical-align:top}\
th{background:#f3f3f3;position:sticky;top:0}td.num{text-align:right;white-space:nowrap}\
.failed{background:#fde3e0}.notconv{background:#fff4d6}.small{font-size:.85rem;color:#444}";

/// `summary.html`: the summary as one self-contained page (no scripts, no external files),
/// each sample linking to its report.html.
pub fn summary_html(summary: &BatchSummary) -> String {
    let names = parameter_names(summary);
    let mut h = String::new();
    let n = summary.results.len();
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>fickfit batch summary</title><style>{SUMMARY_STYLE}</style></head><body>\n\
         <h1>Batch summary: {n} samples</h1>\n<p>{} ok, {} did not converge, {} failed; {} \
         file(s) skipped.</p>\n",
        summary.count(Status::Ok),
        summary.count(Status::NotConverged),
        summary.count(Status::Failed),
        summary.skipped.len()
    );
    let level = summary
        .results
        .iter()
        .filter_map(|r| r.report.as_ref()?.parameters.first().map(|p| p.ci_level))
        .next()
        .unwrap_or(0.95);
    let _ = writeln!(
        h,
        "<p class=\"small\">Each parameter cell: estimate [interval] unit, the interval at {:.0} % \
         confidence as each report shows it (* formed on the parameter's fitted log or bounded \
         scale). RMSE is weighted.</p>",
        level * 100.0
    );
    h.push_str("<table><tr><th>sample</th><th>status</th><th>RMSE</th><th>R²</th><th>AICc</th>");
    for name in &names {
        let _ = write!(h, "<th>{}</th>", escape(name));
    }
    h.push_str("<th>warnings</th><th>error</th></tr>\n");
    for r in &summary.results {
        let class = match r.status {
            Status::Ok => "",
            Status::NotConverged => " class=\"notconv\"",
            Status::Failed => " class=\"failed\"",
        };
        let sample = if r.report.is_some() {
            format!(
                "<a href=\"{}/report.html\">{}</a>",
                escape(&r.sample.folder),
                escape(&r.sample.name)
            )
        } else {
            escape(&r.sample.name)
        };
        let _ = write!(
            h,
            "<tr{class}><td>{sample}</td><td>{}</td>",
            r.status.label()
        );
        match &r.report {
            Some(rep) => {
                let _ = write!(
                    h,
                    "<td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>",
                    num(rep.fit.rmse),
                    num(rep.fit.r2),
                    num(rep.fit.aicc)
                );
                for name in &names {
                    let text = match rep.parameters.iter().find(|p| &p.name == name) {
                        None => String::new(),
                        Some(p) if p.fixed => format!("{} {} (fixed)", num(p.estimate), p.unit),
                        Some(p) => {
                            let (lo, hi) = shown_interval(p);
                            let star = if p.ci_transformed.is_some() { "*" } else { "" };
                            format!(
                                "{} [{}, {}]{star} {}",
                                num(p.estimate),
                                num(lo),
                                num(hi),
                                p.unit
                            )
                        }
                    };
                    let _ = write!(h, "<td class=\"num\">{}</td>", escape(&text));
                }
                let warnings = if rep.warnings.is_empty() {
                    "0".to_string()
                } else {
                    format!(
                        "{}: {}",
                        rep.warnings.len(),
                        rep.warnings
                            .iter()
                            .map(|w| escape(&short_warning(w)))
                            .collect::<Vec<_>>()
                            .join("<br>")
                    )
                };
                let _ = writeln!(h, "<td>{warnings}</td><td></td></tr>");
            }
            None => {
                h.push_str("<td></td><td></td><td></td>");
                for _ in &names {
                    h.push_str("<td></td>");
                }
                let _ = writeln!(
                    h,
                    "<td></td><td>{}</td></tr>",
                    escape(r.error.as_deref().unwrap_or(""))
                );
            }
        }
    }
    h.push_str("</table>\n");
    if !summary.skipped.is_empty() {
        h.push_str("<h2>Files skipped</h2>\n<ul>\n");
        for s in &summary.skipped {
            let _ = writeln!(
                h,
                "<li><code>{}</code>: {}</li>",
                escape(&s.path.display().to_string()),
                escape(&s.reason)
            );
        }
        h.push_str("</ul>\n");
    }
    let _ = writeln!(
        h,
        "<p class=\"small\">fickfit {}; every sample's numbers are in its report.json, and all of \
         them in summary.csv beside this page.</p>\n</body></html>",
        env!("CARGO_PKG_VERSION")
    );
    h
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wildcards() {
        // Common practice: shell-style `*` and `?` on a file name.
        assert!(wildcard_match("truth.toml", "truth.toml"));
        assert!(wildcard_match("*.toml", "a.toml"));
        assert!(wildcard_match("t*h.toml", "truth.toml"));
        assert!(wildcard_match("old/*", "old/x/y.toml"));
        assert!(wildcard_match("?.toml", "a.toml"));
        assert!(!wildcard_match("?.toml", "ab.toml"));
        assert!(!wildcard_match("truth.toml", "truth.toml.bak"));
        assert!(!wildcard_match("*.csv", "a.toml"));
        assert!(wildcard_match("*", ""));
    }

    #[test]
    fn folder_names_are_flat_and_plain() {
        assert_eq!(
            folder_name(Path::new("film/experiment.toml")),
            "film--experiment"
        );
        assert_eq!(folder_name(Path::new("a b/c#1.toml")), "a_b--c_1");
        assert_eq!(folder_name(Path::new(".toml")), "sample.toml");
    }

    #[test]
    fn short_warnings_keep_the_first_sentence() {
        assert_eq!(short_warning("One. Two."), "One.");
        let long = "x".repeat(200);
        assert_eq!(short_warning(&long).chars().count(), 120);
    }
}
