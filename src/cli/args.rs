//! Command-line arguments: every flag defined once, with its help; the man page and shell
//! completions are generated from these same definitions.

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;

/// Diffusion coefficients with honest uncertainties, from uptake curves, depth profiles and
/// heated-rod temperatures.
#[derive(Debug, Parser)]
#[command(
    name = "fickfit",
    version,
    about = "Diffusion coefficients with honest uncertainties",
    long_about = "fickfit fits the 1-D diffusion equation to measured uptake curves, depth \
profiles or sensor temperatures described in an experiment file, and reports the diffusion \
coefficient (or thermal diffusivity), boundary values and fluxes with confidence intervals, \
correlations and residual diagnostics.",
    after_help = "Exit codes: 0 success; 1 the fit ran but did not converge or failed a check \
you asked to enforce; 2 bad input or usage.\n\nExample:\n  fickfit fit sample-data/film-uptake/experiment.toml --out film-report"
)]
pub struct Cli {
    /// The command.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Fit an experiment and write a report folder.
    #[command(
        after_help = "Example:\n  fickfit fit sample-data/film-uptake/experiment.toml --out film-report\n  fickfit fit rod.toml --profile --bootstrap 500 --seed 7 --out rod-report\n  fickfit fit film.toml --compare film-exponential-D.toml --out film-report"
    )]
    Fit(FitArgs),
    /// Run the forward model at the experiment's parameter values and write a CSV in the
    /// shape the loader reads (plan experiments, make synthetic data).
    #[command(
        after_help = "Example:\n  fickfit simulate film.toml --out film-sim.csv --noise 0.002 --seed 3"
    )]
    Simulate(SimulateArgs),
    /// Validate an experiment and its data, show what would be fitted and the shortcut
    /// estimates; fit nothing.
    #[command(after_help = "Example:\n  fickfit check sample-data/film-uptake/experiment.toml")]
    Check(CheckArgs),
    /// Fit D = D0 exp(-Ea/(R T)) to one diffusivity taken from the report.json of several fits
    /// made at different temperatures, and write an Arrhenius plot.
    #[command(
        after_help = "Example:\n  fickfit arrhenius anneal-1100K/report.json anneal-1150K/report.json anneal-1200K/report.json --out arrhenius\n  fickfit arrhenius a/report.json b/report.json --temperature \"827 degC,877 degC\" --parameter D"
    )]
    Arrhenius(ArrheniusArgs),
    /// Fit every experiment file under folders (or a list of files) in parallel, write a
    /// report folder for each and a summary across samples (summary.csv, summary.html).
    #[command(
        long_about = "Fit every experiment file under folders (or a list of files) in parallel, \
write a report folder for each sample and a summary across samples: summary.csv and summary.html, \
one row per sample with the parameters and their intervals, the fit quality, the warnings, and \
the error of a sample that failed. A folder is searched recursively for .toml files; TOML files \
without the experiment file's tables are skipped with a note. A failed sample is reported and \
the others go on.",
        after_help = "Exit codes: 0 every sample fitted and converged; 1 some sample failed or \
did not converge (the others are still fitted and in the summary); 2 bad usage, no experiment \
file found, or the output folder refused.\n\nExample:\n  fickfit batch coupons/ --out coupons-fits\n  \
fickfit batch sample-data --exclude truth.toml --out sample-fits --jobs 2\n  fickfit batch \
a.toml b.toml c.toml --out abc --profile"
    )]
    Batch(BatchArgs),
    /// Write shell completions or the man page.
    #[command(
        after_help = "Example:\n  fickfit generate completions bash > fickfit.bash\n  fickfit generate man > fickfit.1"
    )]
    Generate(GenerateArgs),
}

/// Options of `fickfit fit`.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// The experiment file (TOML).
    #[arg(value_name = "EXPERIMENT")]
    pub experiment: PathBuf,
    /// Folder for the report (created; must not exist or be empty unless --force).
    #[arg(long, short, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Replace the files of an existing, non-empty report folder.
    #[arg(long)]
    pub force: bool,
    /// Confidence level of every interval, between 0 and 1 (default: the experiment file's,
    /// else 0.95).
    #[arg(long, value_name = "LEVEL")]
    pub level: Option<f64>,
    /// Also compute profile-likelihood intervals.
    #[arg(long)]
    pub profile: bool,
    /// Residual-bootstrap replicates (0: none).
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub bootstrap: usize,
    /// Seed for the bootstrap and random starts.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// Also search from N random starts around the start values (each internal coordinate
    /// within ±1 of its start: a factor e either way for a log-scale parameter), in parallel,
    /// and keep the best: for fits that may have several minima.
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub starts: usize,
    /// Also fit this experiment file (the same data with other physics, e.g. D(u) or no
    /// surface resistance) and rank the models by AICc; repeat for more variants.
    #[arg(long, value_name = "EXPERIMENT")]
    pub compare: Vec<PathBuf>,
    /// With absolute uncertainties, multiply the covariance by the reduced χ² (use when the
    /// stated σ may be too small or too large; default: trust the σ as given).
    #[arg(long)]
    pub rescale: bool,
    /// Print the report as JSON on standard output instead of the summary table.
    #[arg(long)]
    pub json: bool,
    /// Print nothing but errors (and no progress bar).
    #[arg(long, short)]
    pub quiet: bool,
}

/// Options of `fickfit simulate`.
#[derive(Debug, Args)]
pub struct SimulateArgs {
    /// The experiment file (TOML).
    #[arg(value_name = "EXPERIMENT")]
    pub experiment: PathBuf,
    /// The CSV file to write (refused if it exists, unless --force).
    #[arg(long, short, value_name = "FILE")]
    pub out: PathBuf,
    /// Replace an existing output file.
    #[arg(long)]
    pub force: bool,
    /// Standard deviation of Gaussian noise added to every value, in the data's unit.
    #[arg(long, value_name = "SIGMA", default_value_t = 0.0)]
    pub noise: f64,
    /// Seed of the noise.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
}

/// Options of `fickfit check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// The experiment file (TOML).
    #[arg(value_name = "EXPERIMENT")]
    pub experiment: PathBuf,
}

/// Options of `fickfit arrhenius`.
#[derive(Debug, Args)]
pub struct ArrheniusArgs {
    /// The report.json files of the fits, one per temperature.
    #[arg(value_name = "REPORT", required = true, num_args = 1..)]
    pub reports: Vec<PathBuf>,
    /// The diffusivity parameter to take from each report.
    #[arg(long, value_name = "NAME", default_value = "D")]
    pub parameter: String,
    /// The temperature of each report, in order, with unit ("1100 K,1150 K"); default: the
    /// `temperature` each experiment file gave.
    #[arg(long, value_name = "T,T,...", value_delimiter = ',')]
    pub temperature: Vec<String>,
    /// Confidence level of the intervals, between 0 and 1.
    #[arg(long, value_name = "LEVEL", default_value_t = 0.95)]
    pub level: f64,
    /// Folder for arrhenius.json and the plot (created; must not exist or be empty unless
    /// --force).
    #[arg(long, short, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Replace the files of an existing, non-empty folder.
    #[arg(long)]
    pub force: bool,
    /// Print the result as JSON on standard output instead of the summary.
    #[arg(long)]
    pub json: bool,
}

/// Options of `fickfit batch`.
#[derive(Debug, Args)]
pub struct BatchArgs {
    /// Folders to search for experiment files (recursively), or experiment files.
    #[arg(value_name = "PATH", required = true, num_args = 1..)]
    pub inputs: Vec<PathBuf>,
    /// Folder for the summary and one report folder per sample (created; must not exist or be
    /// empty unless --force).
    #[arg(long, short, value_name = "DIR")]
    pub out: PathBuf,
    /// Replace the files of an existing, non-empty output folder and of its report folders.
    #[arg(long)]
    pub force: bool,
    /// Samples fitted at once (default: the number of cores, or RAYON_NUM_THREADS).
    #[arg(long, short, value_name = "N", value_parser = clap::value_parser!(u16).range(1..))]
    pub jobs: Option<u16>,
    /// Skip files found in folders whose name (or path below the folder) matches this pattern
    /// (`*` any characters, `?` one); repeat for more. Files named directly are always fitted.
    #[arg(long, value_name = "PATTERN")]
    pub exclude: Vec<String>,
    /// Confidence level of every interval, between 0 and 1 (default: each experiment file's,
    /// else 0.95).
    #[arg(long, value_name = "LEVEL")]
    pub level: Option<f64>,
    /// Also compute profile-likelihood intervals for every sample.
    #[arg(long)]
    pub profile: bool,
    /// Residual-bootstrap replicates per sample (0: none).
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub bootstrap: usize,
    /// Seed for the bootstrap.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// With absolute uncertainties, multiply the covariance by the reduced χ².
    #[arg(long)]
    pub rescale: bool,
    /// Print nothing but errors (and no progress bar).
    #[arg(long, short)]
    pub quiet: bool,
}

/// What `fickfit generate` writes.
#[derive(Debug, Args)]
pub struct GenerateArgs {
    /// Completions for a shell, or the man page.
    #[arg(value_enum)]
    pub what: Generated,
    /// The shell, for completions.
    #[arg(value_enum, required_if_eq("what", "completions"))]
    pub shell: Option<clap_complete::Shell>,
}

/// Generated files.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Generated {
    /// Shell completions.
    Completions,
    /// A man page (roff) for the whole tool.
    Man,
}
