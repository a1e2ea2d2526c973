//! Text for the PNG backend, drawn glyph by glyph on a common baseline.
//!
//! The bitmap backend of the drawing library places each glyph from its own truncated
//! bounding box, so glyphs that sit low (the decimal point, the comma) end up a pixel or two
//! above the baseline of the digits: "1.5" reads as "1·5". This wrapper forwards every
//! drawing call to the wrapped backend except text, which it rasterises itself with the
//! embedded DejaVu Sans faces: the baseline is rounded once per string, every glyph's outline
//! is placed at its exact (sub-pixel) advance on that baseline, and the coverage of each
//! pixel becomes its alpha. Layout boxes (used for alignment and for sizing the chart
//! areas) are still those of the drawing library, so positions match the SVG output.

use ab_glyph::{point, Font, FontRef, ScaleFont};
use plotters::style::FontStyle;
use plotters_backend::text_anchor::{HPos, VPos};
use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingBackend, DrawingErrorKind,
};
use std::sync::OnceLock;

/// A backend whose text is rasterised on a common baseline (see the module docs).
pub(crate) struct BaselineText<DB: DrawingBackend>(pub(crate) DB);

/// The embedded face for a font style, parsed once.
fn face(style: FontStyle) -> Option<&'static FontRef<'static>> {
    static REGULAR: OnceLock<Option<FontRef<'static>>> = OnceLock::new();
    static BOLD: OnceLock<Option<FontRef<'static>>> = OnceLock::new();
    static OBLIQUE: OnceLock<Option<FontRef<'static>>> = OnceLock::new();
    let (cell, bytes): (_, fn() -> &'static [u8]) = match style {
        FontStyle::Bold => (&BOLD, dejavu::sans::bold),
        FontStyle::Italic | FontStyle::Oblique => (&OBLIQUE, dejavu::sans::oblique),
        FontStyle::Normal => (&REGULAR, dejavu::sans::regular),
    };
    cell.get_or_init(|| FontRef::try_from_slice(bytes()).ok())
        .as_ref()
}

/// The error a font failure is reported as.
#[derive(Debug)]
struct FaceUnavailable;

impl std::fmt::Display for FaceUnavailable {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "the embedded font could not be parsed")
    }
}

impl std::error::Error for FaceUnavailable {}

impl<DB: DrawingBackend> DrawingBackend for BaselineText<DB> {
    type ErrorType = DB::ErrorType;

    fn get_size(&self) -> (u32, u32) {
        self.0.get_size()
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.ensure_prepared()
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.present()
    }

    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_pixel(point, color)
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_line(from, to, style)
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_rect(upper_left, bottom_right, style, fill)
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_path(path, style)
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_circle(center, radius, style, fill)
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.fill_polygon(vert, style)
    }

    fn blit_bitmap(
        &mut self,
        pos: BackendCoord,
        size: (u32, u32),
        src: &[u8],
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.blit_bitmap(pos, size, src)
    }

    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        let color = style.color();
        if color.alpha == 0.0 {
            return Ok(());
        }
        let ((min_x, min_y), (max_x, max_y)) = style
            .layout_box(text)
            .map_err(|e| DrawingErrorKind::FontError(Box::new(e)))?;
        let (width, height) = (max_x - min_x, max_y - min_y);
        let dx = match style.anchor().h_pos {
            HPos::Left => 0,
            HPos::Right => -width,
            HPos::Center => -width / 2,
        };
        let dy = match style.anchor().v_pos {
            VPos::Top => 0,
            VPos::Center => -height / 2,
            VPos::Bottom => -height,
        };
        let font = face(style.style())
            .ok_or_else(|| DrawingErrorKind::FontError(Box::new(FaceUnavailable)))?;
        let size = style.size() as f32;
        let scaled = font.as_scaled(size);
        // The same baseline as the drawing library's layout (half the size below the top),
        // rounded once for the whole string.
        let baseline = (size / 2.0).round();
        let transform = style.transform();
        let (w, h) = self.0.get_size();
        let mut caret = 0f32;
        let mut previous = None;
        for c in text.chars() {
            let id = scaled.glyph_id(c);
            if let Some(p) = previous {
                caret += scaled.kern(p, id);
            }
            previous = Some(id);
            let glyph = id.with_scale_and_position(scaled.scale(), point(caret, baseline));
            caret += scaled.h_advance(id);
            let Some(outline) = scaled.outline_glyph(glyph) else {
                continue;
            };
            let bounds = outline.px_bounds();
            let (bx, by) = (bounds.min.x as i32, bounds.min.y as i32);
            let mut result = Ok(());
            outline.draw(|x, y, coverage| {
                if result.is_err() || coverage <= 0.0 {
                    return;
                }
                let (tx, ty) =
                    transform.transform(bx + x as i32 + dx - min_x, by + y as i32 + dy - min_y);
                let (px, py) = (pos.0 + tx, pos.1 + ty);
                if px >= 0 && py >= 0 && px < w as i32 && py < h as i32 {
                    result = self.0.draw_pixel(
                        (px, py),
                        BackendColor {
                            alpha: color.alpha * f64::from(coverage.min(1.0)),
                            rgb: color.rgb,
                        },
                    );
                }
            });
            result?;
        }
        Ok(())
    }
}
