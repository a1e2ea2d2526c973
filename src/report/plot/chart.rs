//! Drawing of a general x–y [`Figure`] on any plotting backend: data preparation (filtering,
//! axis ranges), styles (palette, markers, dash patterns) and the drawing itself.

use plotters::coord::ranged1d::{Ranged, ValueFormatter};
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::element::{DashedPathElement, Drawable, DynElement, IntoDynElement, PointCollection};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters_backend::{BackendCoord, DrawingErrorKind};

use super::{tick_label, Figure, GuideKind, LegendPosition, Notes, SeriesKind, Stroke, FONT};

/// The Okabe–Ito palette (2008) without its yellow (too light on white paper), in the order
/// used: blue, vermillion, bluish green, reddish purple, orange, sky blue, black.
pub(crate) const PALETTE: [RGBColor; 7] = [
    RGBColor(0x00, 0x72, 0xB2),
    RGBColor(0xD5, 0x5E, 0x00),
    RGBColor(0x00, 0x9E, 0x73),
    RGBColor(0xCC, 0x79, 0xA7),
    RGBColor(0xE6, 0x9F, 0x00),
    RGBColor(0x56, 0xB4, 0xE9),
    RGBColor(0x00, 0x00, 0x00),
];

/// Colour of reference lines, axes and footnotes.
const GUIDE_GREY: RGBColor = RGBColor(0x44, 0x44, 0x44);
/// Colour of the grid.
const GRID_GREY: RGBColor = RGBColor(0xDD, 0xDD, 0xDD);
/// Largest magnitude of a coordinate that is drawn; beyond it, spans overflow.
const MAX_MAGNITUDE: f64 = 1e300;
/// Most decades a logarithmic axis spans.
const MAX_LOG_DECADES: i32 = 250;
/// Height of the footnote strip in pixels.
const FOOTNOTE_HEIGHT: u32 = 22;

/// Marker shapes, cycled in this order over the marker series of a figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Marker {
    FilledCircle,
    OpenSquare,
    FilledTriangle,
    Cross,
    OpenDiamond,
    Plus,
    OpenCircle,
    FilledSquare,
    OpenTriangleDown,
    FilledDiamond,
}

const MARKERS: [Marker; 10] = [
    Marker::FilledCircle,
    Marker::OpenSquare,
    Marker::FilledTriangle,
    Marker::Cross,
    Marker::OpenDiamond,
    Marker::Plus,
    Marker::OpenCircle,
    Marker::FilledSquare,
    Marker::OpenTriangleDown,
    Marker::FilledDiamond,
];

/// Dash patterns (dash length, gap) in pixels, cycled over the line series; `None` is solid.
const DASHES: [Option<(u32, u32)>; 5] = [
    None,
    Some((9, 5)),
    Some((2, 4)),
    Some((16, 6)),
    Some((5, 3)),
];

/// A figure's data after filtering, with the axis ranges.
pub(crate) struct Prepared {
    /// The kept points of each series, in the order of `Figure::series`.
    points: Vec<Vec<(f64, f64)>>,
    /// Reference lines that can be drawn (finite, and positive on a log y axis).
    guides: Vec<usize>,
    /// x range of the plot.
    x: (f64, f64),
    /// y range of the plot (positive when the axis is logarithmic).
    y: (f64, f64),
    /// What was left out.
    pub(crate) notes: Notes,
}

/// Filters the data of `fig` and computes the axis ranges.
pub(crate) fn prepare(fig: &Figure) -> Prepared {
    let mut notes = Notes::default();
    let mut messages = Vec::new();
    let mut points = Vec::with_capacity(fig.series.len());
    let mut xs = Bounds::default();
    let mut ys = Bounds::default();
    // On a log axis, the smallest y shown: the plotting library's tick search overflows
    // when the axis spans more than about 308 decades.
    let log_floor = if fig.log_y {
        fig.series
            .iter()
            .flat_map(|s| s.y.iter().copied())
            .chain(
                fig.guides
                    .iter()
                    .filter(|g| g.kind == GuideKind::Horizontal)
                    .map(|g| g.value),
            )
            .filter(|y| y.is_finite() && *y > 0.0 && *y <= MAX_MAGNITUDE)
            .fold(None, |m: Option<f64>, y| Some(m.map_or(y, |m| m.max(y))))
            .map_or(0.0, |max| max * 10f64.powi(-MAX_LOG_DECADES))
    } else {
        0.0
    };
    for (index, s) in fig.series.iter().enumerate() {
        let name = series_name(&s.label, index);
        let unpaired = s.x.len().abs_diff(s.y.len());
        let mut non_finite = 0;
        let mut non_positive = 0;
        let mut out_of_range = 0;
        let mut kept = Vec::with_capacity(s.x.len().min(s.y.len()));
        for (&x, &y) in s.x.iter().zip(&s.y) {
            if !x.is_finite() || !y.is_finite() {
                non_finite += 1;
            } else if fig.log_y && y <= 0.0 {
                non_positive += 1;
            } else if x.abs() > MAX_MAGNITUDE
                || y.abs() > MAX_MAGNITUDE
                || (fig.log_y && y < log_floor)
            {
                out_of_range += 1;
            } else {
                xs.add(x);
                ys.add(y);
                kept.push((x, y));
            }
        }
        if non_finite > 0 {
            messages.push(format!(
                "{name}: {non_finite} {} with a non-finite value left out",
                plural(non_finite, "point", "points")
            ));
        }
        if non_positive > 0 {
            messages.push(format!(
                "{name}: {non_positive} {} with y ≤ 0 left out (logarithmic axis)",
                plural(non_positive, "point", "points")
            ));
        }
        if unpaired > 0 {
            messages.push(format!(
                "{name}: x and y differ in length, {unpaired} unpaired {} left out",
                plural(unpaired, "value", "values")
            ));
        }
        if out_of_range > 0 {
            messages.push(format!(
                "{name}: {out_of_range} {} beyond the plotting range left out (magnitude \
                 above 1e300, or more than {MAX_LOG_DECADES} decades below the largest y)",
                plural(out_of_range, "point", "points")
            ));
        }
        notes.out_of_range += out_of_range;
        notes.non_finite += non_finite;
        notes.non_positive_on_log += non_positive;
        notes.unpaired += unpaired;
        points.push(kept);
    }
    let has_points = points.iter().any(|p| !p.is_empty());
    let mut guides = Vec::new();
    for (index, g) in fig.guides.iter().enumerate() {
        if !g.value.is_finite() {
            notes.non_finite += 1;
            messages.push(format!(
                "reference line {}: non-finite, left out",
                index + 1
            ));
            continue;
        }
        if g.value.abs() > MAX_MAGNITUDE
            || (g.kind == GuideKind::Horizontal
                && fig.log_y
                && g.value > 0.0
                && g.value < log_floor)
        {
            notes.out_of_range += 1;
            messages.push(format!(
                "reference line at {}: beyond the plotting range, left out",
                tick_label(g.value)
            ));
            continue;
        }
        match g.kind {
            GuideKind::Horizontal if fig.log_y && g.value <= 0.0 => {
                notes.non_positive_on_log += 1;
                messages.push(format!(
                    "reference line y = {}: not on the logarithmic axis, left out",
                    tick_label(g.value)
                ));
                continue;
            }
            GuideKind::Horizontal => ys.add(g.value),
            GuideKind::Vertical => xs.add(g.value),
        }
        guides.push(index);
    }
    if !has_points {
        notes.no_points = true;
        messages.push("no finite data points to show".to_string());
    }
    messages.extend(fig.notes.iter().cloned());
    notes.messages = messages;
    Prepared {
        points,
        guides,
        x: linear_range(xs),
        y: if fig.log_y {
            log_range(ys)
        } else {
            linear_range(ys)
        },
        notes,
    }
}

fn series_name(label: &str, index: usize) -> String {
    if label.is_empty() {
        format!("series {}", index + 1)
    } else {
        format!("'{label}'")
    }
}

fn plural<'a>(n: usize, one: &'a str, many: &'a str) -> &'a str {
    if n == 1 {
        one
    } else {
        many
    }
}

/// Smallest and largest value seen.
#[derive(Debug, Clone, Copy, Default)]
struct Bounds(Option<(f64, f64)>);

impl Bounds {
    fn add(&mut self, v: f64) {
        self.0 = Some(match self.0 {
            None => (v, v),
            Some((lo, hi)) => (lo.min(v), hi.max(v)),
        });
    }
}

/// A linear axis range: the data span plus 5 % on each side; a single value gets a range
/// around it; no value gets 0..1.
fn linear_range(b: Bounds) -> (f64, f64) {
    match b.0 {
        None => (0.0, 1.0),
        Some((lo, hi)) => {
            let span = hi - lo;
            let pad = if span > 0.0 && span.is_finite() {
                0.05 * span
            } else if lo == 0.0 {
                1.0
            } else {
                0.1 * lo.abs()
            };
            let (a, b) = (lo - pad, hi + pad);
            if a.is_finite() && b.is_finite() && a < b {
                (a, b)
            } else {
                // Spans near the largest f64: fall back to the data span itself.
                (lo.min(-1.0), hi.max(1.0))
            }
        }
    }
}

/// A logarithmic axis range: the data span plus 5 % of its decades on each side; a single
/// value gets half a decade on each side; no value gets 1..10.
fn log_range(b: Bounds) -> (f64, f64) {
    match b.0 {
        None => (1.0, 10.0),
        Some((lo, hi)) => {
            let (l, h) = (lo.log10(), hi.log10());
            let pad = if h > l { 0.05 * (h - l) } else { 0.5 };
            let (a, b) = (10f64.powf(l - pad), 10f64.powf(h + pad));
            if a > 0.0 && b.is_finite() && a < b && (b / a).is_finite() {
                (a, b)
            } else if hi > 0.0 && hi.is_finite() {
                (hi * 10f64.powi(-MAX_LOG_DECADES), hi * 10.0)
            } else {
                (1.0, 10.0)
            }
        }
    }
}

/// Draws `fig` on `backend` and presents (writes) the result.
pub(crate) fn draw<DB: DrawingBackend>(
    backend: DB,
    fig: &Figure,
    prep: &Prepared,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let root = backend.into_drawing_area();
    root.fill(&WHITE)?;
    let (_, height) = root.dim_in_pixel();
    let plot_area = if prep.notes.messages.is_empty() || height <= 3 * FOOTNOTE_HEIGHT {
        root.clone()
    } else {
        let (upper, lower) = root.split_vertically(height - FOOTNOTE_HEIGHT);
        draw_footnote(&lower, &prep.notes.messages)?;
        upper
    };
    let mut builder = ChartBuilder::on(&plot_area);
    builder
        .caption(&fig.title, (FONT, 20).into_font().style(FontStyle::Bold))
        .margin(12)
        .x_label_area_size(46)
        .y_label_area_size(72);
    let x = prep.x.0..prep.x.1;
    if fig.log_y {
        let y = (prep.y.0..prep.y.1).log_scale();
        let mut chart = builder.build_cartesian_2d(x, y)?;
        draw_body(&mut chart, fig, prep)?;
    } else {
        let y = prep.y.0..prep.y.1;
        let mut chart = builder.build_cartesian_2d(x, y)?;
        draw_body(&mut chart, fig, prep)?;
    }
    root.present()?;
    Ok(())
}

/// Prints the notes in one line at the left of `area`.
pub(crate) fn draw_footnote<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    messages: &[String],
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let text = format!("Note: {}.", messages.join("; "));
    let style = (FONT, 12)
        .into_font()
        .color(&GUIDE_GREY)
        .pos(Pos::new(HPos::Left, VPos::Center));
    area.draw(&Text::new(text, (12, (FOOTNOTE_HEIGHT / 2) as i32), style))
}

/// Draws mesh, guides, series, legend and the empty-frame note on a built chart.
fn draw_body<'a, DB, Y>(
    chart: &mut ChartContext<'a, DB, Cartesian2d<RangedCoordf64, Y>>,
    fig: &Figure,
    prep: &Prepared,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>>
where
    DB: DrawingBackend + 'a,
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    let fmt = |v: &f64| tick_label(*v);
    chart
        .configure_mesh()
        // The library's 10 ticks at the default size; fewer on a small panel, where long
        // tick labels would run into each other.
        .x_labels(if fig.width >= 720 {
            10
        } else {
            (fig.width as usize / 100).max(3)
        })
        .x_desc(fig.x_label.as_str())
        .y_desc(fig.y_label.as_str())
        .x_label_formatter(&fmt)
        .y_label_formatter(&fmt)
        .axis_desc_style((FONT, 16))
        .label_style((FONT, 13))
        .bold_line_style(GRID_GREY.stroke_width(1))
        .light_line_style(TRANSPARENT)
        .axis_style(GUIDE_GREY.stroke_width(1))
        .draw()?;

    let (x0, x1) = prep.x;
    let (y0, y1) = prep.y;
    let mut any_label = false;
    for &index in &prep.guides {
        let Some(g) = fig.guides.get(index) else {
            continue;
        };
        let ends = match g.kind {
            GuideKind::Horizontal => vec![(x0, g.value), (x1, g.value)],
            GuideKind::Vertical => vec![(g.value, y0), (g.value, y1)],
        };
        let style = GUIDE_GREY.stroke_width(1);
        let dash = match g.stroke {
            Stroke::Solid => None,
            Stroke::Dashed => Some((8, 5)),
            Stroke::Dotted => Some((2, 4)),
        };
        chart
            .plotting_area()
            .draw(&line_element::<'a, DB, _>(ends, dash, style))?;
        if !g.label.is_empty() {
            let anno = chart.draw_series(no_elements())?;
            any_label = true;
            anno.label(g.label.as_str()).legend(move |(x, y)| {
                Group::new(vec![line_element::<'a, DB, _>(
                    vec![(x, y), (x + 24, y)],
                    dash,
                    style,
                )])
            });
        }
    }

    let mut marker_count = 0usize;
    let mut line_count = 0usize;
    for (s, pts) in fig.series.iter().zip(&prep.points) {
        let line_style = match s.kind {
            SeriesKind::Line | SeriesKind::LineAndMarkers => {
                let colour = PALETTE[line_count % PALETTE.len()];
                let dash = DASHES[line_count % DASHES.len()];
                line_count += 1;
                Some((colour, dash))
            }
            SeriesKind::Markers | SeriesKind::Reference => None,
        };
        let marker_style = match s.kind {
            SeriesKind::Markers | SeriesKind::LineAndMarkers => {
                let colour = match line_style {
                    Some((c, _)) => c,
                    None => PALETTE[marker_count % PALETTE.len()],
                };
                let shape = MARKERS[marker_count % MARKERS.len()];
                marker_count += 1;
                Some((colour, shape))
            }
            SeriesKind::Line | SeriesKind::Reference => None,
        };
        let reference = s.kind == SeriesKind::Reference;
        if reference && pts.len() >= 2 {
            chart.plotting_area().draw(&line_element::<'a, DB, _>(
                pts.clone(),
                Some((8, 5)),
                GUIDE_GREY.stroke_width(1),
            ))?;
        }
        if let Some((colour, dash)) = line_style {
            if pts.len() >= 2 {
                chart.plotting_area().draw(&line_element::<'a, DB, _>(
                    pts.clone(),
                    dash,
                    colour.stroke_width(2),
                ))?;
            }
        }
        if let Some((colour, shape)) = marker_style {
            for &p in pts {
                chart
                    .plotting_area()
                    .draw(&marker_element::<'a, DB, _>(shape, p, colour))?;
            }
        }
        if !s.label.is_empty() {
            let anno = chart.draw_series(no_elements())?;
            any_label = true;
            anno.label(s.label.as_str()).legend(move |(x, y)| {
                let mut parts: Vec<DynElement<'a, DB, (i32, i32)>> = Vec::new();
                if reference {
                    parts.push(line_element::<'a, DB, _>(
                        vec![(x, y), (x + 24, y)],
                        Some((8, 5)),
                        GUIDE_GREY.stroke_width(1),
                    ));
                }
                if let Some((colour, dash)) = line_style {
                    parts.push(line_element::<'a, DB, _>(
                        vec![(x, y), (x + 24, y)],
                        dash,
                        colour.stroke_width(2),
                    ));
                }
                if let Some((colour, shape)) = marker_style {
                    parts.push(marker_element::<'a, DB, _>(shape, (x + 12, y), colour));
                }
                Group::new(parts)
            });
        }
    }

    if any_label {
        chart
            .configure_series_labels()
            .position(match fig.legend {
                LegendPosition::UpperRight => SeriesLabelPosition::UpperRight,
                LegendPosition::UpperLeft => SeriesLabelPosition::UpperLeft,
                LegendPosition::UpperMiddle => SeriesLabelPosition::UpperMiddle,
                LegendPosition::LowerRight => SeriesLabelPosition::LowerRight,
                LegendPosition::LowerLeft => SeriesLabelPosition::LowerLeft,
            })
            .legend_area_size(34)
            .margin(10)
            .label_font((FONT, 13))
            .background_style(WHITE.mix(0.9))
            .border_style(GUIDE_GREY.mix(0.6))
            .draw()?;
    }

    if prep.notes.no_points {
        let area = chart.plotting_area().strip_coord_spec();
        let (w, h) = area.dim_in_pixel();
        let style = (FONT, 16)
            .into_font()
            .color(&GUIDE_GREY)
            .pos(Pos::new(HPos::Center, VPos::Center));
        area.draw(&Text::new(
            "no finite data points to show",
            ((w / 2) as i32, (h / 2) as i32),
            style,
        ))?;
    }
    Ok(())
}

/// An empty series: drawing it only creates the legend entry that the caller fills in (the
/// elements themselves are drawn directly on the plotting area, because the series API
/// requires `'static` elements and the SVG backend borrows its output string).
fn no_elements() -> std::iter::Empty<PathElement<(f64, f64)>> {
    std::iter::empty()
}

/// A polyline, solid or dashed (`dash` = (dash length, gap) in pixels).
fn line_element<'a, DB: DrawingBackend + 'a, C: Clone + 'a>(
    points: Vec<C>,
    dash: Option<(u32, u32)>,
    style: ShapeStyle,
) -> DynElement<'a, DB, C> {
    match dash {
        None => PathElement::new(points, style).into_dyn(),
        Some((size, gap)) => DashedPathElement::new(points, size, gap, style).into_dyn(),
    }
}

/// One marker of `shape` centred at `at`, about 10 px across.
fn marker_element<'a, DB: DrawingBackend + 'a, C: Clone + 'a>(
    shape: Marker,
    at: C,
    colour: RGBColor,
) -> DynElement<'a, DB, C> {
    let filled = colour.filled();
    let open = colour.stroke_width(2);
    let base = EmptyElement::at(at);
    match shape {
        Marker::FilledCircle => (base + Circle::new((0, 0), 4, filled)).into_dyn(),
        Marker::OpenCircle => (base + Circle::new((0, 0), 4, open)).into_dyn(),
        Marker::OpenSquare => (base + Rectangle::new([(-4, -4), (4, 4)], open)).into_dyn(),
        Marker::FilledSquare => (base + Rectangle::new([(-4, -4), (4, 4)], filled)).into_dyn(),
        Marker::FilledTriangle => {
            (base + Polygon::new(vec![(0, -5), (5, 4), (-5, 4)], filled)).into_dyn()
        }
        Marker::OpenTriangleDown => {
            (base + PathElement::new(vec![(0, 5), (5, -4), (-5, -4), (0, 5)], open)).into_dyn()
        }
        Marker::Cross => (base
            + PathElement::new(vec![(-4, -4), (4, 4)], open)
            + PathElement::new(vec![(-4, 4), (4, -4)], open))
        .into_dyn(),
        Marker::Plus => (base
            + PathElement::new(vec![(-5, 0), (5, 0)], open)
            + PathElement::new(vec![(0, -5), (0, 5)], open))
        .into_dyn(),
        Marker::OpenDiamond => (base
            + PathElement::new(vec![(0, -5), (5, 0), (0, 5), (-5, 0), (0, -5)], open))
        .into_dyn(),
        Marker::FilledDiamond => {
            (base + Polygon::new(vec![(0, -5), (5, 0), (0, 5), (-5, 0)], filled)).into_dyn()
        }
    }
}

/// Several backend-coordinate elements drawn as one (for legend entries). The points of all
/// parts are exposed in order, so the drawing area maps them, and each part is then drawn
/// with its own share of the mapped points.
struct Group<'a, DB: DrawingBackend> {
    parts: Vec<DynElement<'a, DB, (i32, i32)>>,
    points: Vec<(i32, i32)>,
}

impl<'a, DB: DrawingBackend> Group<'a, DB> {
    fn new(parts: Vec<DynElement<'a, DB, (i32, i32)>>) -> Self {
        let points = parts
            .iter()
            .flat_map(|p| p.point_iter().iter().copied())
            .collect();
        Group { parts, points }
    }
}

impl<'b, 'a, DB: DrawingBackend> PointCollection<'b, (i32, i32)> for &'b Group<'a, DB> {
    type Point = &'b (i32, i32);
    type IntoIter = &'b Vec<(i32, i32)>;
    fn point_iter(self) -> &'b Vec<(i32, i32)> {
        &self.points
    }
}

impl<'a, DB: DrawingBackend> Drawable<DB> for Group<'a, DB> {
    fn draw<I: Iterator<Item = BackendCoord>>(
        &self,
        pos: I,
        backend: &mut DB,
        parent_dim: (u32, u32),
    ) -> Result<(), DrawingErrorKind<DB::ErrorType>> {
        let mapped: Vec<BackendCoord> = pos.collect();
        let mut rest = mapped.as_slice();
        for part in &self.parts {
            let n = part.point_iter().len().min(rest.len());
            let (mine, others) = rest.split_at(n);
            part.draw(mine.iter().copied(), backend, parent_dim)?;
            rest = others;
        }
        Ok(())
    }
}
