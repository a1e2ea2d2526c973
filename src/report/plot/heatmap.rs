//! The correlation matrix of the fitted parameters as a small heat map: one cell per pair,
//! coloured on a diverging scale from −1 (blue) through 0 (near white) to +1 (red), with the
//! value printed in the cell in black or white, whichever contrasts more with the cell.
//!
//! References: the end and middle colours are those of the diverging "RdBu" scheme of
//! Harrower and Brewer (2003); the text colour follows the relative luminance and contrast
//! ratio of WCAG 2.0 (2008).

use std::path::Path;

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::chart::draw_footnote;
use super::{
    drawing_error, ensure_fonts, tick_label, write_png_atomically, Notes, RenderedSvg, FONT,
};
use crate::error::{Error, Result};

/// Width of the heat-map image in pixels.
const WIDTH: u32 = 640;
/// Height of the heat-map image in pixels.
const HEIGHT: u32 = 480;
/// Title of the heat map.
const TITLE: &str = "Correlation of the fitted parameters";

/// Colour for −1 (dark blue), 0 (near white) and +1 (dark red).
const NEGATIVE: (f64, f64, f64) = (33.0, 102.0, 172.0);
const MIDDLE: (f64, f64, f64) = (247.0, 247.0, 247.0);
const POSITIVE: (f64, f64, f64) = (178.0, 24.0, 43.0);
/// Fill of a cell whose value is not finite.
const MISSING: RGBColor = RGBColor(0xBB, 0xBB, 0xBB);

/// Draws the correlation matrix `matrix` (row-major, `names.len()` rows of `names.len()`
/// values, each in −1..1; values outside are drawn with the end colour) as an SVG heat map
/// with the parameter names along both axes.
///
/// Non-finite cells are drawn grey, printed as `n/a` and counted in the notes.
///
/// Errors: [`Error::Internal`] when the matrix is not square with one row and column per
/// name (a mistake of the calling code, not of the user's data).
pub fn correlation_svg<S: AsRef<str>>(names: &[S], matrix: &[Vec<f64>]) -> Result<RenderedSvg> {
    ensure_fonts()?;
    let notes = check(names, matrix)?;
    let names: Vec<&str> = names.iter().map(AsRef::as_ref).collect();
    let mut svg = String::new();
    {
        let backend = SVGBackend::with_string(&mut svg, (WIDTH, HEIGHT));
        draw(backend, &names, matrix, &notes).map_err(drawing_error)?;
    }
    Ok(RenderedSvg { svg, notes })
}

/// Draws the correlation matrix as a PNG file at `path` (written to a temporary file in the
/// same folder first, then renamed). Same conventions as [`correlation_svg`].
///
/// Errors: [`Error::Internal`] for a matrix of the wrong shape; [`Error::Io`] when the file
/// cannot be written.
pub fn correlation_png<S: AsRef<str>>(
    names: &[S],
    matrix: &[Vec<f64>],
    path: impl AsRef<Path>,
) -> Result<Notes> {
    ensure_fonts()?;
    let notes = check(names, matrix)?;
    let names: Vec<&str> = names.iter().map(AsRef::as_ref).collect();
    write_png_atomically(path.as_ref(), |tmp| {
        let backend = super::raster_text::BaselineText(BitMapBackend::new(tmp, (WIDTH, HEIGHT)));
        draw(backend, &names, matrix, &notes).map_err(drawing_error)
    })?;
    Ok(notes)
}

/// Checks the shape and counts the non-finite cells.
fn check<S: AsRef<str>>(names: &[S], matrix: &[Vec<f64>]) -> Result<Notes> {
    let n = names.len();
    if matrix.len() != n {
        return Err(Error::Internal(format!(
            "correlation matrix has {} rows for {n} parameter names",
            matrix.len()
        )));
    }
    if let Some((i, row)) = matrix.iter().enumerate().find(|(_, r)| r.len() != n) {
        return Err(Error::Internal(format!(
            "correlation matrix row {} has {} values for {n} parameter names",
            i + 1,
            row.len()
        )));
    }
    let mut notes = Notes {
        non_finite: matrix.iter().flatten().filter(|v| !v.is_finite()).count(),
        ..Notes::default()
    };
    if notes.non_finite > 0 {
        notes.messages.push(format!(
            "{} non-finite correlation{} shown as n/a",
            notes.non_finite,
            if notes.non_finite == 1 { "" } else { "s" }
        ));
    }
    if n == 0 {
        notes.no_points = true;
        notes.messages.push("no parameters to show".to_string());
    }
    Ok(notes)
}

/// The diverging colour of a correlation `r` (clamped to −1..1), linear in sRGB between the
/// end colours and the middle.
pub(crate) fn diverging_colour(r: f64) -> RGBColor {
    let r = r.clamp(-1.0, 1.0);
    let (end, t) = if r < 0.0 {
        (NEGATIVE, -r)
    } else {
        (POSITIVE, r)
    };
    let mix = |a: f64, b: f64| (a + (b - a) * t).round().clamp(0.0, 255.0) as u8;
    RGBColor(
        mix(MIDDLE.0, end.0),
        mix(MIDDLE.1, end.1),
        mix(MIDDLE.2, end.2),
    )
}

/// Black or white, whichever has the larger WCAG 2.0 contrast ratio against `c`.
pub(crate) fn text_colour_on(c: RGBColor) -> RGBColor {
    let lin = |v: u8| {
        let s = f64::from(v) / 255.0;
        if s <= 0.03928 {
            s / 12.92
        } else {
            ((s + 0.055) / 1.055).powf(2.4)
        }
    };
    let l = 0.2126 * lin(c.0) + 0.7152 * lin(c.1) + 0.0722 * lin(c.2);
    // Contrast with black: (l + 0.05)/0.05; with white: 1.05/(l + 0.05).
    if (l + 0.05) / 0.05 >= 1.05 / (l + 0.05) {
        BLACK
    } else {
        WHITE
    }
}

/// A correlation as printed in a cell: two decimals, no negative zero.
fn cell_text(r: f64) -> String {
    if !r.is_finite() {
        return "n/a".to_string();
    }
    let rounded = (r * 100.0).round() / 100.0;
    if rounded == 0.0 {
        "0.00".to_string()
    } else {
        format!("{rounded:.2}")
    }
}

fn draw<DB: DrawingBackend>(
    backend: DB,
    names: &[&str],
    matrix: &[Vec<f64>],
    notes: &Notes,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let root = backend.into_drawing_area();
    root.fill(&WHITE)?;
    let footnote = 22u32;
    let area = if notes.messages.is_empty() {
        root.clone()
    } else {
        let (upper, lower) = root.split_vertically(HEIGHT - footnote);
        draw_footnote(&lower, &notes.messages)?;
        upper
    };
    let area = area
        .margin(8, 0, 0, 0)
        .titled(TITLE, (FONT, 20).into_font().style(FontStyle::Bold))?;
    let (w, h) = area.dim_in_pixel();
    let n = names.len();
    let label_font = (FONT, 14).into_font();
    let label_text: TextStyle = label_font.clone().into();

    let mut name_width = 0u32;
    for name in names {
        name_width = name_width.max(area.estimate_text_size(name, &label_text)?.0);
    }
    let left = name_width.min(w / 3) + 20;
    let bar_room = 80u32;
    let top = 10u32;
    // Room under the grid for the names: their width when written vertically.
    let bottom_room = (name_width.min(h / 3) + 16).max(30);
    let side = (w.saturating_sub(left + bar_room + 10))
        .min(h.saturating_sub(top + bottom_room))
        .max(1);
    let cell = if n > 0 {
        (side / n as u32).max(1)
    } else {
        side
    };
    let grid = cell * n.max(1) as u32;
    let (gx, gy) = (left as i32, top as i32);

    if n == 0 {
        area.draw(&Rectangle::new(
            [(gx, gy), (gx + grid as i32, gy + grid as i32)],
            BLACK.mix(0.6).stroke_width(1),
        ))?;
        let style = (FONT, 16)
            .into_font()
            .color(&RGBColor(0x44, 0x44, 0x44))
            .pos(Pos::new(HPos::Center, VPos::Center));
        area.draw(&Text::new(
            "no parameters to show",
            (gx + grid as i32 / 2, gy + grid as i32 / 2),
            style,
        ))?;
    }

    // Value text: at most 14 px, smaller in small cells; none when cells are tiny.
    let value_size = (f64::from(cell) / 3.2).min(14.0);
    let c = cell as i32;
    for (i, row) in matrix.iter().enumerate() {
        for (j, &r) in row.iter().enumerate() {
            let x0 = gx + j as i32 * c;
            let y0 = gy + i as i32 * c;
            let fill = if r.is_finite() {
                diverging_colour(r)
            } else {
                MISSING
            };
            area.draw(&Rectangle::new([(x0, y0), (x0 + c, y0 + c)], fill.filled()))?;
            if value_size >= 7.0 {
                let style = (FONT, value_size)
                    .into_font()
                    .color(&text_colour_on(fill))
                    .pos(Pos::new(HPos::Center, VPos::Center));
                area.draw(&Text::new(cell_text(r), (x0 + c / 2, y0 + c / 2), style))?;
            }
        }
    }
    // Thin white lines between the cells and a frame around the grid.
    for k in 1..n {
        let p = k as i32 * c;
        area.draw(&PathElement::new(
            vec![(gx + p, gy), (gx + p, gy + grid as i32)],
            WHITE.stroke_width(1),
        ))?;
        area.draw(&PathElement::new(
            vec![(gx, gy + p), (gx + grid as i32, gy + p)],
            WHITE.stroke_width(1),
        ))?;
    }
    if n > 0 {
        area.draw(&Rectangle::new(
            [(gx, gy), (gx + grid as i32, gy + grid as i32)],
            BLACK.mix(0.6).stroke_width(1),
        ))?;
    }

    // Names: left of each row (right-aligned) and under each column.
    for (k, name) in names.iter().enumerate() {
        let centre = k as i32 * c + c / 2;
        let style = label_font
            .clone()
            .color(&BLACK)
            .pos(Pos::new(HPos::Right, VPos::Center));
        area.draw(&Text::new(name.to_string(), (gx - 8, gy + centre), style))?;
        let (tw, _) = area.estimate_text_size(name, &label_text)?;
        let below = gy + grid as i32 + 8;
        if tw + 4 <= cell {
            let style = label_font
                .clone()
                .color(&BLACK)
                .pos(Pos::new(HPos::Center, VPos::Top));
            area.draw(&Text::new(name.to_string(), (gx + centre, below), style))?;
        } else {
            // Too wide for the column: written upwards-reading, ending below the grid.
            let style = label_font
                .clone()
                .transform(FontTransform::Rotate270)
                .color(&BLACK)
                .pos(Pos::new(HPos::Right, VPos::Center));
            area.draw(&Text::new(name.to_string(), (gx + centre, below), style))?;
        }
    }

    // Colour bar from −1 (bottom) to +1 (top).
    if n > 0 {
        let bx = gx + grid as i32 + 24;
        let bw = 18;
        let steps = 64;
        let bh = grid as i32;
        for s in 0..steps {
            let y_top = gy + bh * s / steps;
            let y_bottom = gy + bh * (s + 1) / steps;
            let r = 1.0 - 2.0 * (f64::from(s) + 0.5) / f64::from(steps);
            area.draw(&Rectangle::new(
                [(bx, y_top), (bx + bw, y_bottom)],
                diverging_colour(r).filled(),
            ))?;
        }
        area.draw(&Rectangle::new(
            [(bx, gy), (bx + bw, gy + bh)],
            BLACK.mix(0.6).stroke_width(1),
        ))?;
        for r in [1.0, 0.5, 0.0, -0.5, -1.0] {
            let y = gy + ((1.0 - r) / 2.0 * f64::from(bh)).round() as i32;
            area.draw(&PathElement::new(
                vec![(bx + bw, y), (bx + bw + 4, y)],
                BLACK.stroke_width(1),
            ))?;
            let style = (FONT, 12)
                .into_font()
                .color(&BLACK)
                .pos(Pos::new(HPos::Left, VPos::Center));
            area.draw(&Text::new(tick_label(r), (bx + bw + 7, y), style))?;
        }
    }
    root.present()?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn diverging_scale_ends_and_middle() {
        assert_eq!(diverging_colour(-1.0), RGBColor(33, 102, 172));
        assert_eq!(diverging_colour(0.0), RGBColor(247, 247, 247));
        assert_eq!(diverging_colour(1.0), RGBColor(178, 24, 43));
        assert_eq!(diverging_colour(7.0), diverging_colour(1.0));
    }

    #[test]
    fn text_contrasts_with_cell() {
        // Dark ends get white text, the light middle black (WCAG 2.0 contrast ratio).
        assert_eq!(text_colour_on(diverging_colour(-1.0)), WHITE);
        assert_eq!(text_colour_on(diverging_colour(1.0)), WHITE);
        assert_eq!(text_colour_on(diverging_colour(0.0)), BLACK);
        assert_eq!(cell_text(-0.001), "0.00");
        assert_eq!(cell_text(-0.936), "-0.94");
    }
}
