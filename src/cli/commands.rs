//! The commands: each loads what it needs through the library and prints the result.

use super::args::{ArrheniusArgs, BatchArgs, CheckArgs, FitArgs, SimulateArgs};
use super::Outcome;
use anyhow::{bail, Context};
use fickfit::analysis::{analyse, AnalysisOptions};
use fickfit::report::data::Report;
use fickfit::report::folder::ReportFolder;
use fickfit::report::terminal;
use rayon::prelude::*;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Arc;

fn load(path: &Path) -> anyhow::Result<(fickfit::experiment::Experiment, Vec<u8>)> {
    // The library's reader first: its errors name the place.
    let experiment = fickfit::experiment::load(path)?;
    let bytes = std::fs::read(path)
        .with_context(|| format!("cannot read the experiment file {}", path.display()))?;
    Ok((experiment, bytes))
}

/// The default report folder: `<experiment file stem>-report` in the current folder.
fn default_out(experiment: &Path) -> PathBuf {
    let stem = experiment
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "fickfit".to_string());
    PathBuf::from(format!("{stem}-report"))
}

/// `fickfit fit`.
pub fn fit(args: &FitArgs) -> anyhow::Result<Outcome> {
    if let Some(l) = args.level {
        if !(l > 0.0 && l < 1.0) {
            bail!("--level must be between 0 and 1 (for example 0.95), found {l}");
        }
    }
    let (experiment, bytes) = load(&args.experiment)?;
    let out_dir = args
        .out
        .clone()
        .unwrap_or_else(|| default_out(&args.experiment));
    // Check the folder before the (possibly long) fit, so a refusal comes at once.
    let folder = ReportFolder::create(&out_dir, args.force)?;
    let options = AnalysisOptions {
        level: args.level,
        profile: args.profile,
        bootstrap: args.bootstrap,
        seed: args.seed,
        rescale_absolute: args.rescale,
        random_starts: args.starts,
    };
    // Variants to compare are loaded before the fit, so a bad file fails at once.
    let variants = args
        .compare
        .iter()
        .map(|p| load(p).map(|(e, _)| e))
        .collect::<anyhow::Result<Vec<_>>>()?;
    let plain = AnalysisOptions {
        profile: false,
        bootstrap: 0,
        ..options.clone()
    };
    // The variants (plain fits) run beside the main fit, on rayon's pool.
    let fit_all = || {
        rayon::join(
            || analyse(Arc::new(experiment), &options),
            || {
                variants
                    .into_par_iter()
                    .zip(args.compare.par_iter())
                    .map(|(e, path)| {
                        analyse(Arc::new(e), &plain)
                            .with_context(|| format!("fitting the variant {}", path.display()))
                    })
                    .collect::<anyhow::Result<Vec<_>>>()
            },
        )
    };
    // A progress bar on stderr for the long extras (profile sides, bootstrap refits); hidden
    // when stderr is not a terminal, none with --quiet or --json.
    let (analysis, others) = if (args.profile || args.bootstrap > 0) && !args.quiet && !args.json {
        let bar = Arc::new(super::progress::Bar::new("fitting"));
        let both = fickfit::fit::progress::observe(bar.clone(), fit_all);
        bar.clear();
        both
    } else {
        fit_all()
    };
    let analysis = analysis?;
    let others = others?;
    let mut report = Report::new(&analysis, &bytes);
    if !others.is_empty() {
        let mut all = vec![&analysis];
        all.extend(others.iter());
        let cmp = fickfit::analysis::compare::compare(&all)?;
        report.comparison = Some(fickfit::report::data::ComparisonReport::new(&cmp, &all));
    }
    let command = std::env::args().collect::<Vec<_>>().join(" ");
    fickfit::batch::write_report(&folder, &analysis, &report, &command)?;
    // Everything is written: only now does the report appear in the folder.
    let folder_path = folder.path().to_path_buf();
    folder.commit()?;
    let mut stdout = std::io::stdout().lock();
    if args.json {
        serde_json::to_writer_pretty(&mut stdout, &report)?;
        writeln!(stdout)?;
    } else if !args.quiet {
        terminal::write_summary(&report, &mut stdout)?;
        writeln!(stdout, "\nreport written to {}", folder_path.display())?;
    }
    Ok(if report.fit.converged {
        Outcome::Success
    } else {
        Outcome::FitProblem
    })
}

/// `fickfit check`.
pub fn check(args: &CheckArgs) -> anyhow::Result<Outcome> {
    let (e, _) = load(&args.experiment)?;
    let mut out = std::io::stdout().lock();
    writeln!(out, "experiment {}: valid", args.experiment.display())?;
    if let Some(t) = &e.title {
        writeln!(out, "  {t}")?;
    }
    writeln!(
        out,
        "parameters ({} free of {}):",
        e.free_count(),
        e.parameters.len()
    )?;
    for p in &e.parameters {
        let bounds = match (p.lower, p.upper) {
            (None, None) => String::new(),
            (lo, hi) => format!(
                "  bounds [{}, {}]",
                lo.map_or("−∞".into(), |v| terminal::num(Some(p.to_unit(v)))),
                hi.map_or("+∞".into(), |v| terminal::num(Some(p.to_unit(v))))
            ),
        };
        writeln!(
            out,
            "  {:<20} {} {}  {}{}{}",
            p.name,
            if p.start_given {
                terminal::num(Some(p.to_unit(p.start)))
            } else {
                "(from data)".to_string()
            },
            p.unit,
            if p.free { "free" } else { "fixed" },
            if p.log { ", log scale" } else { "" },
            bounds
        )?;
    }
    writeln!(out, "datasets ({} points in all):", e.point_count())?;
    for d in e.datasets.iter() {
        writeln!(
            out,
            "  {:<20} {} points from {} at {} times",
            d.name,
            d.len(),
            d.file_as_written,
            d.request.times.len()
        )?;
        for w in &d.warnings {
            writeln!(out, "    warning: {}: {}", w.location, w.message)?;
        }
    }
    let shortcut_list = fickfit::analysis::shortcuts::estimate_all(
        &e,
        &fickfit::analysis::starts::values_for_models(&e),
    );
    terminal::write_shortcuts(
        &fickfit::report::data::shortcut_rows(&e, &shortcut_list, None),
        &mut out,
    )?;
    if !e.pending_starts().is_empty() {
        let mut filled = e.clone();
        let notes = fickfit::analysis::starts::complete(&mut filled, Some(&shortcut_list))?;
        writeln!(out)?;
        writeln!(out, "start values derived from the data:")?;
        for n in notes {
            let p = &filled.parameters[n.parameter];
            writeln!(
                out,
                "  {:<20} {} {}  ({})",
                p.name,
                terminal::num(Some(p.to_unit(n.value))),
                p.unit,
                n.how
            )?;
        }
    }
    if e.point_count() <= e.free_count() {
        bail!(
            "{} data points for {} free parameters: the fit needs more points than free parameters",
            e.point_count(),
            e.free_count()
        );
    }
    Ok(Outcome::Success)
}

/// `fickfit simulate`: a copy of each dataset's data file with the measured cells replaced by
/// the model at the experiment's start values (plus seeded noise). With one dataset the copy
/// is written to `--out`; with several, to `<stem>-<dataset>.<ext>` beside it.
pub fn simulate(args: &SimulateArgs) -> anyhow::Result<Outcome> {
    use fickfit::experiment::schema::LayoutName;
    let (experiment, bytes) = load(&args.experiment)?;
    if !(args.noise.is_finite() && args.noise >= 0.0) {
        bail!(
            "--noise must be zero or a positive number, found {}",
            args.noise
        );
    }
    let text = String::from_utf8_lossy(&bytes);
    let written = fickfit::experiment::parse_str(&text, &args.experiment)?;
    let n = experiment.datasets.len();
    let mut targets = Vec::with_capacity(n);
    for ds in experiment.datasets.iter() {
        let path = if n == 1 {
            args.out.clone()
        } else {
            let stem = args
                .out
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default();
            let ext = args
                .out
                .extension()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_else(|| "csv".into());
            args.out.with_file_name(format!("{stem}-{}.{ext}", ds.name))
        };
        if path.exists() && !args.force {
            bail!(
                "{} exists; name a new file, or add --force to replace it",
                path.display()
            );
        }
        targets.push(path);
    }
    if let Some(&i) = experiment.pending_starts().first() {
        let p = &experiment.parameters[i];
        return Err(fickfit::error::Error::setting(
            format!("{}.start", p.key),
            format!(
                "simulate runs the model at the start values, and parameter '{}' has none: give `start`",
                p.name
            ),
        )
        .into());
    }
    let params = experiment.start_values();
    for (d, (spec, ds)) in written
        .datasets
        .iter()
        .zip(experiment.datasets.iter())
        .enumerate()
    {
        let columns: Vec<String> = match spec.layout {
            LayoutName::Sensors => {
                let sensors = spec.sensors.as_deref().unwrap_or_default();
                ds.outputs()
                    .map(|(o, _)| sensors.get(o).map(|s| s.column.clone()).unwrap_or_default())
                    .collect()
            }
            _ => vec![spec.value_column.clone().unwrap_or_default(); ds.len()],
        };
        let seed = args.seed.wrapping_add(d as u64);
        let out = fickfit::simulate::rewrite_data_file(
            &experiment,
            d,
            &columns,
            &params,
            args.noise,
            seed,
        )?;
        fickfit::report::folder::write_atomic(&targets[d], |w| w.write_all(out.as_bytes()))?;
        eprintln!(
            "wrote {} ({} simulated values)",
            targets[d].display(),
            ds.len()
        );
    }
    Ok(Outcome::Success)
}

/// `fickfit arrhenius`.
pub fn arrhenius(args: &ArrheniusArgs) -> anyhow::Result<Outcome> {
    use fickfit::units::{Quantity, Unit};
    let temperatures = if args.temperature.is_empty() {
        None
    } else {
        let mut t = Vec::new();
        for (i, text) in args.temperature.iter().enumerate() {
            let w = fickfit::experiment::quantity::split_number(text)
                .filter(|w| w.unit.is_some())
                .with_context(|| {
                    format!(
                        "--temperature: entry {} ('{text}') is not a temperature with unit, such as 1100 K",
                        i + 1
                    )
                })?;
            let unit = Unit::parse_at(
                w.unit.as_deref().unwrap_or(""),
                Some(Quantity::Temperature),
                &fickfit::Location::default().with_key("--temperature"),
            )?;
            t.push(unit.to_si(w.number));
        }
        Some(t)
    };
    let folder = match &args.out {
        Some(dir) => Some(ReportFolder::create(dir, args.force)?),
        None => None,
    };
    let report = fickfit::arrhenius::from_reports(
        &args.reports,
        &args.parameter,
        temperatures.as_deref(),
        args.level,
    )?;
    let written = folder.as_ref().map(|f| f.path().to_path_buf());
    if let Some(folder) = folder {
        folder.write_with("arrhenius.json", |w| {
            serde_json::to_writer_pretty(&mut *w, &report).map_err(std::io::Error::other)?;
            writeln!(w)
        })?;
        let fig = fickfit::arrhenius::figure(&report);
        let svg = fickfit::report::plot::to_svg(&fig)?.svg;
        folder.write_with("arrhenius.svg", |w| w.write_all(svg.as_bytes()))?;
        fickfit::report::plot::to_png(&fig, folder.staged("arrhenius.png"))?;
        folder.commit()?;
    }
    let mut out = std::io::stdout().lock();
    if args.json {
        serde_json::to_writer_pretty(&mut out, &report)?;
        writeln!(out)?;
        return Ok(Outcome::Success);
    }
    writeln!(
        out,
        "Arrhenius fit of {} from {} reports:",
        report.parameter,
        report.points.len()
    )?;
    writeln!(
        out,
        "  {:>10} {:>14} {:>12} {:>14}  report",
        "T [K]", "D [m2/s]", "std. error", "line [m2/s]"
    )?;
    for p in &report.points {
        writeln!(
            out,
            "  {:>10} {:>14} {:>12} {:>14}  {}",
            terminal::num(Some(p.temperature_k)),
            terminal::num(Some(p.d)),
            terminal::num(Some(p.d_std_error)),
            terminal::num(Some(p.d_line)),
            p.report
        )?;
    }
    let pct = report.level * 100.0;
    writeln!(
        out,
        "  D0 = {} m2/s, {pct:.0} % interval [{}, {}]",
        terminal::num(Some(report.d0)),
        terminal::num(Some(report.d0_interval[0])),
        terminal::num(Some(report.d0_interval[1]))
    )?;
    writeln!(
        out,
        "  Ea = {} ± {} kJ/mol, {pct:.0} % interval [{}, {}]; correlation of ln D0 and Ea {}",
        terminal::num(Some(report.activation_energy_kj_mol)),
        terminal::num(Some(report.activation_energy_std_error)),
        terminal::num(Some(report.activation_energy_interval[0])),
        terminal::num(Some(report.activation_energy_interval[1])),
        terminal::num(Some(report.correlation))
    )?;
    if let Some(c) = report.reduced_chi2 {
        writeln!(
            out,
            "  reduced χ² of the line {}{}",
            terminal::num(Some(c)),
            if report.scaled_by_scatter {
                ": the points scatter more than their standard errors; errors scaled by its root"
            } else {
                ""
            }
        )?;
    }
    if let Some(dir) = &written {
        writeln!(out, "written to {}", dir.display())?;
    }
    Ok(Outcome::Success)
}

/// `fickfit batch`.
pub fn batch(args: &BatchArgs) -> anyhow::Result<Outcome> {
    use fickfit::batch::{BatchOptions, Status};
    use std::io::IsTerminal;
    if let Some(l) = args.level {
        if !(l > 0.0 && l < 1.0) {
            bail!("--level must be between 0 and 1 (for example 0.95), found {l}");
        }
    }
    let discovery = fickfit::batch::discover(&args.inputs, &args.exclude)?;
    if !args.quiet {
        for s in &discovery.skipped {
            eprintln!("fickfit: skipped {}: {}", s.path.display(), s.reason);
        }
    }
    let options = BatchOptions {
        analysis: AnalysisOptions {
            level: args.level,
            profile: args.profile,
            bootstrap: args.bootstrap,
            seed: args.seed,
            rescale_absolute: args.rescale,
            random_starts: 0,
        },
        jobs: args
            .jobs
            .map_or_else(rayon::current_num_threads, usize::from),
        force: args.force,
    };
    let total = discovery.samples.len() as u64;
    let bar = if args.quiet || !std::io::stderr().is_terminal() {
        indicatif::ProgressBar::hidden()
    } else {
        let bar = indicatif::ProgressBar::new(total);
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "{msg:<10} [{bar:30}] {pos}/{len} ({elapsed}, about {eta} left)",
        ) {
            bar.set_style(style.progress_chars("=> "));
        }
        bar.set_message("samples");
        bar
    };
    let on_done = |r: &fickfit::batch::SampleResult| {
        match r.status {
            Status::Failed => bar.suspend(|| {
                eprintln!(
                    "fickfit: sample {} failed: {}",
                    r.sample.name,
                    r.error.as_deref().unwrap_or("unknown error")
                )
            }),
            Status::NotConverged => bar.suspend(|| {
                eprintln!(
                    "fickfit: sample {}: the fit did not converge",
                    r.sample.name
                )
            }),
            Status::Ok => {}
        }
        bar.inc(1);
    };
    let summary = fickfit::batch::run(&discovery, &args.out, &options, &on_done);
    bar.finish_and_clear();
    let summary = summary?;
    if !args.quiet {
        let mut out = std::io::stdout().lock();
        writeln!(
            out,
            "{} samples in {:.1} s on {} job(s): {} ok, {} did not converge, {} failed",
            summary.results.len(),
            summary.seconds,
            options.jobs,
            summary.count(Status::Ok),
            summary.count(Status::NotConverged),
            summary.count(Status::Failed)
        )?;
        writeln!(
            out,
            "summary written to {}",
            args.out.join("summary.html").display()
        )?;
    }
    Ok(
        if summary.count(Status::Failed) + summary.count(Status::NotConverged) == 0 {
            Outcome::Success
        } else {
            Outcome::FitProblem
        },
    )
}
