//! Figures of a fit report, rendered from plain data as SVG text and as PNG files.
//!
//! A [`Figure`] is a title, two axis labels (which carry their units, such as `"time [h]"` or
//! `"depth [µm]"`), an optional logarithmic y axis, a list of [`Series`] (markers for
//! measurements, lines for model curves) and a list of [`Guide`]s (horizontal or vertical
//! reference lines such as the zero line of a residual plot or the threshold of a profile
//! likelihood). [`to_svg`] and [`to_png`] draw it; the helpers [`residual_figure`],
//! [`qq_figure`], [`profile_figure`] and [`arrhenius_figure`] build the usual figures of a
//! fit report, and [`correlation_svg`] / [`correlation_png`] draw a correlation matrix as a
//! heat map.
//!
//! Robustness: non-finite values are left out and counted; on a logarithmic axis, values
//! ≤ 0 are left out and counted; magnitudes above 10³⁰⁰ (and, on a logarithmic axis, values
//! more than 250 decades below the largest) are left out and counted; `x` and `y` of unequal length are paired up to the shorter
//! one and the rest counted. Every omission is returned in [`Notes`] and printed as a
//! footnote in the figure itself, so a reader of the printed page sees it too. A figure with
//! no point left draws an empty frame that says so. Nothing here panics on odd data.
//!
//! Look: the series are told apart without colour — marker shapes (filled circle, open
//! square, filled triangle, cross, open diamond, ...) and dash patterns (solid, dashed,
//! dotted, long dash, ...) — and the colours come from the palette of Okabe and Ito, which
//! stays distinguishable for the common forms of colour blindness. The k-th marker series
//! and the k-th line series share a colour, so that data set k and its model curve match.
//!
//! Output is deterministic: the same figure gives the same SVG text and the same PNG bytes.
//! Text is drawn with DejaVu Sans, embedded in the binary (no system fonts are needed).
//!
//! References:
//! - M. Okabe and K. Ito, *Color Universal Design (CUD): how to make figures and
//!   presentations that are friendly to colorblind people*, 2008 (the palette).
//! - G. Blom, *Statistical Estimates and Transformed Beta-Variables*, Wiley, 1958 (the
//!   plotting positions (i − 3/8)/(n + 1/4) of the normal Q–Q plot).
//! - M. Harrower and C. A. Brewer, "ColorBrewer.org: an online tool for selecting colour
//!   schemes for maps", *The Cartographic Journal* 40 (2003) 27–37 (the diverging red–blue
//!   scale of the correlation heat map).
//! - W3C, *Web Content Accessibility Guidelines 2.0*, 2008, relative luminance (the choice of
//!   black or white text in a heat-map cell).

mod chart;
mod figures;
mod heatmap;
mod raster_text;
mod thin;

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::OnceLock;

use plotters::style::FontStyle;

use crate::error::{Error, Result};

pub use figures::{
    arrhenius_figure, normal_qq_points, profile_figure, qq_figure, residual_figure, ArrheniusLine,
    ProfileCurve, QqPoints, GAS_CONSTANT,
};
pub use heatmap::{correlation_png, correlation_svg};
pub use thin::{
    bin_extremes, grouped, qq_ranks, thinned_markers, thinned_note, DRAW_ALL_UP_TO, DRAW_BINS,
    QQ_SPACED, QQ_TAIL,
};

/// Default width of a figure in pixels.
pub const DEFAULT_WIDTH: u32 = 720;
/// Default height of a figure in pixels.
pub const DEFAULT_HEIGHT: u32 = 450;

/// The font family name under which the embedded font is registered with the drawing
/// library, and which the SVG text names (a browser substitutes its own sans-serif face).
const FONT: &str = "sans-serif";

/// How a series is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SeriesKind {
    /// One marker per point, no line (measurements, residuals).
    Markers,
    /// A polyline through the points in the order given (model curves).
    Line,
    /// A polyline with a marker at every point (for example a profile computed at a few
    /// parameter values).
    LineAndMarkers,
    /// A thin dark-grey dashed reference line through the points (such as y = x in a Q–Q
    /// plot); it takes no colour, marker or dash pattern from the series cycle.
    Reference,
}

/// One set of points of a figure.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text; an empty label leaves the series out of the legend.
    pub label: String,
    /// Abscissae, in the unit the figure's x label states.
    pub x: Vec<f64>,
    /// Ordinates, in the unit the figure's y label states. Paired with `x` index by index.
    pub y: Vec<f64>,
    /// Markers, line, or both.
    pub kind: SeriesKind,
}

impl Series {
    /// A series of markers (measurements).
    pub fn markers(label: impl Into<String>, x: Vec<f64>, y: Vec<f64>) -> Self {
        Series {
            label: label.into(),
            x,
            y,
            kind: SeriesKind::Markers,
        }
    }

    /// A series drawn as a line (a model curve).
    pub fn line(label: impl Into<String>, x: Vec<f64>, y: Vec<f64>) -> Self {
        Series {
            label: label.into(),
            x,
            y,
            kind: SeriesKind::Line,
        }
    }
}

/// The stroke pattern of a reference line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stroke {
    /// Unbroken.
    Solid,
    /// Dashes of about 8 px with 5 px gaps.
    Dashed,
    /// Dots of about 2 px with 4 px gaps.
    Dotted,
}

/// Which way a reference line runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GuideKind {
    /// A horizontal line `y = value` across the whole plot.
    Horizontal,
    /// A vertical line `x = value` across the whole plot.
    Vertical,
}

/// A reference line across the whole plot area, drawn thin and dark grey.
#[derive(Debug, Clone, PartialEq)]
pub struct Guide {
    /// Horizontal or vertical.
    pub kind: GuideKind,
    /// The y value (horizontal) or x value (vertical), in the axis unit.
    pub value: f64,
    /// Legend text; empty leaves it out of the legend.
    pub label: String,
    /// Stroke pattern.
    pub stroke: Stroke,
}

impl Guide {
    /// A horizontal line at `y`.
    pub fn horizontal(y: f64, label: impl Into<String>, stroke: Stroke) -> Self {
        Guide {
            kind: GuideKind::Horizontal,
            value: y,
            label: label.into(),
            stroke,
        }
    }

    /// A vertical line at `x`.
    pub fn vertical(x: f64, label: impl Into<String>, stroke: Stroke) -> Self {
        Guide {
            kind: GuideKind::Vertical,
            value: x,
            label: label.into(),
            stroke,
        }
    }
}

/// Where the legend box sits inside the plot area.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum LegendPosition {
    /// Top right corner (the default; suits decaying profiles).
    #[default]
    UpperRight,
    /// Top left corner.
    UpperLeft,
    /// Top centre (suits a profile-likelihood curve, high at both ends).
    UpperMiddle,
    /// Bottom right corner (suits rising uptake curves).
    LowerRight,
    /// Bottom left corner.
    LowerLeft,
}

/// A general x–y figure.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// Title above the plot.
    pub title: String,
    /// x axis label with its unit, such as `"time [h]"`.
    pub x_label: String,
    /// y axis label with its unit, such as `"concentration [mol/m³]"`.
    pub y_label: String,
    /// Logarithmic (base 10) y axis; points with y ≤ 0 are then left out and counted.
    pub log_y: bool,
    /// The data and model series, drawn in order.
    pub series: Vec<Series>,
    /// Reference lines, drawn beneath the series.
    pub guides: Vec<Guide>,
    /// Legend placement.
    pub legend: LegendPosition,
    /// Notes that the builder of the figure wants printed under it (for example how many
    /// residuals a helper left out before building it); rendering adds its own.
    pub notes: Vec<String>,
    /// Width in pixels (SVG user units and PNG pixels).
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
}

impl Figure {
    /// An empty figure of the default size with a linear y axis.
    pub fn new(
        title: impl Into<String>,
        x_label: impl Into<String>,
        y_label: impl Into<String>,
    ) -> Self {
        Figure {
            title: title.into(),
            x_label: x_label.into(),
            y_label: y_label.into(),
            log_y: false,
            series: Vec::new(),
            guides: Vec::new(),
            legend: LegendPosition::default(),
            notes: Vec::new(),
            width: DEFAULT_WIDTH,
            height: DEFAULT_HEIGHT,
        }
    }

    /// This figure with a logarithmic y axis (or not).
    pub fn with_log_y(mut self, log_y: bool) -> Self {
        self.log_y = log_y;
        self
    }

    /// This figure with one more series.
    pub fn with_series(mut self, series: Series) -> Self {
        self.series.push(series);
        self
    }

    /// This figure with one more reference line.
    pub fn with_guide(mut self, guide: Guide) -> Self {
        self.guides.push(guide);
        self
    }

    /// This figure with the legend at `position`.
    pub fn with_legend(mut self, position: LegendPosition) -> Self {
        self.legend = position;
        self
    }

    /// This figure with a size of `width` × `height` pixels.
    pub fn with_size(mut self, width: u32, height: u32) -> Self {
        self.width = width;
        self.height = height;
        self
    }
}

/// What was left out while drawing, so the report can say so.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Notes {
    /// Points (or heat-map cells) left out because a coordinate was NaN or infinite.
    pub non_finite: usize,
    /// Points left out because y ≤ 0 on a logarithmic axis (reference lines included).
    pub non_positive_on_log: usize,
    /// Points left out because `x` and `y` of a series have different lengths.
    pub unpaired: usize,
    /// Points (and reference lines) left out because a coordinate's magnitude exceeds
    /// 10³⁰⁰, or because on a logarithmic axis y lies more than 250 decades below the
    /// largest y (the axis could not be drawn otherwise).
    pub out_of_range: usize,
    /// True when nothing was left to draw, so the frame is empty.
    pub no_points: bool,
    /// The same in words, one entry per cause and series, plus the figure's own notes;
    /// printed under the figure.
    pub messages: Vec<String>,
}

impl Notes {
    /// True when nothing was left out and nothing needs saying.
    pub fn is_empty(&self) -> bool {
        self.messages.is_empty()
    }
}

/// An SVG document and what was left out while drawing it.
#[derive(Debug, Clone, PartialEq)]
pub struct RenderedSvg {
    /// The complete `<svg>` document, UTF-8, ready to inline in HTML.
    pub svg: String,
    /// What was left out.
    pub notes: Notes,
}

/// Draws `figure` as an SVG document.
///
/// Errors: only a failure inside the drawing library (reported as [`Error::Internal`]); odd
/// data never fails.
pub fn to_svg(figure: &Figure) -> Result<RenderedSvg> {
    ensure_fonts()?;
    let prepared = chart::prepare(figure);
    let mut svg = String::new();
    {
        let backend =
            plotters::backend::SVGBackend::with_string(&mut svg, (figure.width, figure.height));
        chart::draw(backend, figure, &prepared).map_err(drawing_error)?;
    }
    Ok(RenderedSvg {
        svg,
        notes: prepared.notes,
    })
}

/// Draws `figure` as a PNG file at `path`.
///
/// The image is first written to a temporary file in the same folder and then renamed onto
/// `path`, so an interrupted run never leaves a half-written PNG behind.
///
/// Errors: [`Error::Io`] when the file cannot be written or renamed; [`Error::Internal`] for
/// a failure inside the drawing library.
pub fn to_png(figure: &Figure, path: impl AsRef<Path>) -> Result<Notes> {
    ensure_fonts()?;
    let prepared = chart::prepare(figure);
    write_png_atomically(path.as_ref(), |tmp| {
        let backend = raster_text::BaselineText(plotters::backend::BitMapBackend::new(
            tmp,
            (figure.width, figure.height),
        ));
        chart::draw(backend, figure, &prepared).map_err(drawing_error)
    })?;
    Ok(prepared.notes)
}

/// Registers the embedded DejaVu Sans faces with the drawing library, once per process.
fn ensure_fonts() -> Result<()> {
    static REGISTERED: OnceLock<std::result::Result<(), String>> = OnceLock::new();
    REGISTERED
        .get_or_init(|| {
            let faces: [(FontStyle, &'static [u8]); 4] = [
                (FontStyle::Normal, dejavu::sans::regular()),
                (FontStyle::Bold, dejavu::sans::bold()),
                (FontStyle::Italic, dejavu::sans::oblique()),
                (FontStyle::Oblique, dejavu::sans::oblique()),
            ];
            for (style, bytes) in faces {
                plotters::style::register_font(FONT, style, bytes).map_err(|_| {
                    format!(
                        "the embedded font (DejaVu Sans, {}) could not be loaded",
                        style.as_str()
                    )
                })?;
            }
            Ok(())
        })
        .clone()
        .map_err(Error::Internal)
}

/// Maps a drawing-library error to the crate error.
fn drawing_error<E: std::fmt::Display>(e: E) -> Error {
    Error::Internal(format!("drawing the figure failed: {e}"))
}

/// Runs `draw` on a temporary `.png` path beside `path`, then renames it onto `path`. The
/// temporary file is removed when drawing or renaming fails.
fn write_png_atomically(path: &Path, draw: impl FnOnce(&Path) -> Result<()>) -> Result<()> {
    static COUNTER: AtomicU64 = AtomicU64::new(0);
    let io_error = |source: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let name = path.file_name().ok_or_else(|| {
        io_error(std::io::Error::new(
            std::io::ErrorKind::InvalidInput,
            "a PNG path must end in a file name",
        ))
    })?;
    let folder = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    // The drawing library picks the image format from the extension, so the temporary name
    // must end in `.png`.
    let tmp = folder.join(format!(
        ".{}.{}-{}.tmp.png",
        name.to_string_lossy(),
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    // Creating the file first turns a missing or read-only folder into a plain I/O error
    // (the encoder would report it only as a drawing failure).
    std::fs::File::create(&tmp).map_err(io_error)?;
    let outcome = draw(&tmp).and_then(|()| {
        if !tmp.is_file() {
            return Err(io_error(std::io::Error::other(
                "the PNG encoder wrote no file",
            )));
        }
        std::fs::rename(&tmp, path).map_err(io_error)
    });
    if outcome.is_err() {
        // Best effort: the file may not exist at all.
        let _ = std::fs::remove_file(&tmp);
    }
    outcome
}

/// Formats an axis tick value compactly: plain decimals between 10⁻³ and 10⁵, otherwise
/// scientific notation (`1e-5`, `2.5e6`), with trailing zeros removed.
pub(crate) fn tick_label(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return if v.is_nan() {
            String::new()
        } else if v == 0.0 {
            "0".to_string()
        } else {
            format!("{v}")
        };
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        // Six significant digits at most, then trimmed.
        let decimals = (5 - a.log10().floor() as i32).clamp(0, 8) as usize;
        trim_decimal(&format!("{v:.decimals$}"))
    } else {
        let s = format!("{v:.3e}");
        match s.split_once('e') {
            Some((mantissa, exponent)) => format!("{}e{}", trim_decimal(mantissa), exponent),
            None => s,
        }
    }
}

/// Removes trailing zeros (and a trailing point) after a decimal point.
fn trim_decimal(s: &str) -> String {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tick_labels_are_compact() {
        assert_eq!(tick_label(0.0), "0");
        assert_eq!(tick_label(0.30000000000000004), "0.3");
        assert_eq!(tick_label(-2.5), "-2.5");
        assert_eq!(tick_label(1500.0), "1500");
        assert_eq!(tick_label(1e-5), "1e-5");
        assert_eq!(tick_label(2.5e6), "2.5e6");
        assert_eq!(tick_label(0.001), "0.001");
    }
}
