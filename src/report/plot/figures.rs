//! Builders of the usual figures of a fit report: residuals, normal Q–Q plot, profile
//! likelihood and Arrhenius plot. Each returns a plain [`Figure`] that the caller may adjust
//! before rendering.

use statrs::distribution::{ContinuousCDF, Normal};

use super::thin::{qq_ranks, thinned_note, DRAW_ALL_UP_TO};
use super::{tick_label, Figure, Guide, LegendPosition, Series, SeriesKind, Stroke};

/// Molar gas constant R in J/(mol·K) (exact since the 2019 SI redefinition, CODATA 2018).
pub const GAS_CONSTANT: f64 = 8.314_462_618;

/// A residual plot: every series is drawn as markers against a solid zero line.
///
/// `x_label` names the abscissa with its unit (`"time [h]"`, `"depth [µm]"`), `y_label` the
/// residual with its unit (or `"standardised residual"`).
pub fn residual_figure(
    title: impl Into<String>,
    x_label: impl Into<String>,
    y_label: impl Into<String>,
    series: Vec<Series>,
) -> Figure {
    let mut fig = Figure::new(title, x_label, y_label);
    fig.series = series
        .into_iter()
        .map(|s| Series {
            kind: SeriesKind::Markers,
            ..s
        })
        .collect();
    fig.guides.push(Guide::horizontal(0.0, "", Stroke::Solid));
    fig
}

/// The points of a normal Q–Q plot.
#[derive(Debug, Clone, PartialEq)]
pub struct QqPoints {
    /// Standard normal quantiles Φ⁻¹(pᵢ) at the plotting positions
    /// pᵢ = (i − 3/8)/(n + 1/4), i = 1..n (Blom 1958), increasing.
    pub theoretical: Vec<f64>,
    /// The finite residuals, sorted increasing (paired with `theoretical`).
    pub sample: Vec<f64>,
    /// How many residuals were left out because they were NaN or infinite.
    pub skipped_non_finite: usize,
}

/// Sorts the finite standardised residuals and pairs them with the standard normal quantiles
/// Φ⁻¹((i − 0.375)/(n + 0.25)), i = 1..n, where n counts the finite residuals (plotting
/// positions of Blom 1958). Non-finite residuals are left out and counted.
pub fn normal_qq_points(std_residuals: &[f64]) -> QqPoints {
    let mut sample: Vec<f64> = std_residuals
        .iter()
        .copied()
        .filter(|r| r.is_finite())
        .collect();
    let skipped_non_finite = std_residuals.len() - sample.len();
    sample.sort_by(f64::total_cmp);
    let n = sample.len() as f64;
    let normal = Normal::standard();
    let theoretical = (1..=sample.len())
        .map(|i| normal.inverse_cdf((i as f64 - 0.375) / (n + 0.25)))
        .collect();
    QqPoints {
        theoretical,
        sample,
        skipped_non_finite,
    }
}

/// The points of a normal Q–Q plot at the order statistics of ranks `qq_ranks(n)` only
/// (from 0; `n` finite residuals), for drawing a long series: the plotting positions are
/// those of the whole sample.
fn thinned_qq_points(std_residuals: &[f64]) -> QqPoints {
    let mut sorted: Vec<f64> = std_residuals
        .iter()
        .copied()
        .filter(|r| r.is_finite())
        .collect();
    let skipped_non_finite = std_residuals.len() - sorted.len();
    sorted.sort_by(f64::total_cmp);
    let n = sorted.len();
    let normal = Normal::standard();
    let ranks = qq_ranks(n);
    QqPoints {
        theoretical: ranks
            .iter()
            .map(|&r| normal.inverse_cdf(((r + 1) as f64 - 0.375) / (n as f64 + 0.25)))
            .collect(),
        sample: ranks.iter().map(|&r| sorted[r]).collect(),
        skipped_non_finite,
    }
}

/// A normal Q–Q plot of standardised residuals (markers) with the reference line y = x
/// (standardised residuals from a correct model with correct uncertainties follow the
/// standard normal distribution). Plotting positions (i − 0.375)/(n + 0.25) (Blom 1958).
/// With more than [`DRAW_ALL_UP_TO`] finite residuals only the order statistics of
/// [`qq_ranks`] are drawn (both tails in full), and a note says so.
pub fn qq_figure(std_residuals: &[f64]) -> Figure {
    let finite = std_residuals.iter().filter(|r| r.is_finite()).count();
    let thinned = finite > DRAW_ALL_UP_TO;
    let qq = if thinned {
        thinned_qq_points(std_residuals)
    } else {
        normal_qq_points(std_residuals)
    };
    let mut fig = Figure::new(
        "Normal Q–Q plot of standardised residuals",
        "standard normal quantile Φ⁻¹(p)",
        "standardised residual (sorted)",
    )
    .with_legend(LegendPosition::UpperLeft);
    if qq.skipped_non_finite > 0 {
        fig.notes.push(format!(
            "{} non-finite residual{} left out before ranking",
            qq.skipped_non_finite,
            if qq.skipped_non_finite == 1 { "" } else { "s" }
        ));
    }
    let ends: Vec<f64> = match (qq.theoretical.first(), qq.theoretical.last()) {
        (Some(&a), Some(&b)) => {
            let lo = a.min(qq.sample.first().copied().unwrap_or(a));
            let hi = b.max(qq.sample.last().copied().unwrap_or(b));
            vec![lo, hi]
        }
        _ => Vec::new(),
    };
    fig.series.push(Series {
        label: "reference y = x".to_string(),
        x: ends.clone(),
        y: ends,
        kind: SeriesKind::Reference,
    });
    if thinned {
        fig.notes.push(thinned_note(
            qq.sample.len(),
            finite,
            "both tails in full, evenly spaced ranks between",
        ));
    }
    fig.series.push(Series::markers(
        format!("residuals (n = {finite})"),
        qq.theoretical,
        qq.sample,
    ));
    fig
}

/// A profile-likelihood curve: Δ(objective) against one parameter, with the threshold that
/// defines the confidence interval and the interval's ends.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfileCurve {
    /// The parameter with its unit, such as `"D [m²/s]"`.
    pub parameter: String,
    /// The objective difference being plotted, such as `"Δχ²"` or `"Δ(−2 ln L)"`.
    pub objective: String,
    /// Parameter values at which the profile was computed, in the unit of `parameter`.
    pub values: Vec<f64>,
    /// Objective minus its minimum at each value (≥ 0 for a converged fit).
    pub delta: Vec<f64>,
    /// Threshold on Δ(objective) that defines the interval (3.84 for 95 % with one
    /// parameter and a χ² objective).
    pub threshold: f64,
    /// Lower end of the interval, `None` when the profile never rises above the threshold
    /// on that side.
    pub lower: Option<f64>,
    /// Upper end of the interval, `None` when open on that side.
    pub upper: Option<f64>,
    /// Confidence level of the interval as a fraction (0.95), used in the legend.
    pub level: f64,
}

/// The figure of a profile-likelihood curve: the profile as line with markers, the
/// threshold as a dashed horizontal line and the interval ends as dotted vertical lines.
/// An end that is `None` is stated as open in the legend.
pub fn profile_figure(curve: &ProfileCurve) -> Figure {
    let mut fig = Figure::new(
        format!("Profile of {}", curve.objective),
        curve.parameter.clone(),
        curve.objective.clone(),
    )
    .with_legend(LegendPosition::UpperMiddle);
    fig.series.push(Series {
        label: "profile".to_string(),
        x: curve.values.clone(),
        y: curve.delta.clone(),
        kind: SeriesKind::LineAndMarkers,
    });
    fig.guides.push(Guide::horizontal(
        curve.threshold,
        format!(
            "threshold {} = {}",
            curve.objective,
            tick_label(curve.threshold)
        ),
        Stroke::Dashed,
    ));
    let end = |v: Option<f64>, open: &str| v.map(tick_label).unwrap_or_else(|| open.to_string());
    let label = format!(
        "{} % interval [{}, {}]",
        tick_label(100.0 * curve.level),
        end(curve.lower, "open"),
        end(curve.upper, "open")
    );
    let mut first = true;
    for v in [curve.lower, curve.upper].into_iter().flatten() {
        let text = if first { label.clone() } else { String::new() };
        fig.guides.push(Guide::vertical(v, text, Stroke::Dotted));
        first = false;
    }
    if first {
        fig.notes
            .push(format!("{label}: no end within the profile"));
    }
    fig
}

/// A fitted Arrhenius law D(T) = D₀ exp(−E_a/(R T)).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ArrheniusLine {
    /// Pre-exponential factor D₀ in m²/s.
    pub pre_factor: f64,
    /// Activation energy E_a in J/mol.
    pub activation_energy: f64,
}

/// An Arrhenius plot: ln(D / (m²/s)) against 1000/T (T in K), measured diffusion
/// coefficients as markers and, when given, the fitted line
/// ln D = ln D₀ − (E_a/R)·(1/T) drawn across the range of the data.
///
/// Points with T ≤ 0, D ≤ 0 or a non-finite value are left out and stated in the figure's
/// notes.
pub fn arrhenius_figure(
    temperature_k: &[f64],
    diffusivity_m2_s: &[f64],
    fit: Option<ArrheniusLine>,
) -> Figure {
    let mut fig = Figure::new("Arrhenius plot", "1000/T [1/K]", "ln(D / (m²/s))");
    let mut x = Vec::new();
    let mut y = Vec::new();
    let mut skipped = 0usize;
    for (&t, &d) in temperature_k.iter().zip(diffusivity_m2_s) {
        if t.is_finite() && d.is_finite() && t > 0.0 && d > 0.0 {
            x.push(1000.0 / t);
            y.push(d.ln());
        } else {
            skipped += 1;
        }
    }
    skipped += temperature_k.len().abs_diff(diffusivity_m2_s.len());
    if skipped > 0 {
        fig.notes.push(format!(
            "{skipped} measurement{} with T ≤ 0 K, D ≤ 0 or a missing value left out",
            if skipped == 1 { "" } else { "s" }
        ));
    }
    let range = x.iter().fold(None, |acc: Option<(f64, f64)>, &v| {
        Some(acc.map_or((v, v), |(lo, hi)| (lo.min(v), hi.max(v))))
    });
    fig.series.push(Series::markers("measured D", x, y));
    if let (Some(line), Some((lo, hi))) = (fit, range) {
        let xs = vec![lo, hi];
        // x = 1000/T, so 1/T = x/1000.
        let ys = xs
            .iter()
            .map(|&xv| line.pre_factor.ln() - line.activation_energy / GAS_CONSTANT * xv / 1000.0)
            .collect();
        fig.series.push(Series::line(
            format!(
                "fit: E_a = {} kJ/mol",
                tick_label((line.activation_energy / 1000.0 * 100.0).round() / 100.0)
            ),
            xs,
            ys,
        ));
    }
    fig
}
