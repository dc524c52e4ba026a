//! Text for the PNG pictures, set in the proportional font egui ships with (Ubuntu Light, from
//! `epaint_default_fonts`), so the saved pictures read like the editor. Glyph outlines come from
//! skrifa and are filled by vello_cpu's antialiasing rasteriser into a coverage mask that the
//! canvas blends in. No font file of our own, no system font.
//!
//! Layout is deliberately simple: one line, glyphs placed by their advance widths (no kerning,
//! no shaping), which is all axis labels and legends need.

use skrifa::instance::{LocationRef, Size};
use skrifa::outline::{DrawSettings, OutlinePen};
use skrifa::{FontRef, GlyphId, MetadataProvider};
use vello_cpu::kurbo::{Affine, BezPath};
use vello_cpu::{Pixmap, RenderContext, Resources, color};

/// The font bytes: egui's default proportional face.
const FONT: &[u8] = epaint_default_fonts::UBUNTU_LIGHT;

fn font() -> Option<FontRef<'static>> {
    FontRef::new(FONT).ok()
}

/// Coverage of one line of text, 0 … 255 per pixel, row 0 at the top.
#[derive(Clone, Debug, PartialEq)]
pub struct TextMask {
    pub width: usize,
    pub height: usize,
    pub coverage: Vec<u8>,
    /// Distance from the mask's top row to the baseline, pixels.
    pub baseline: usize,
}

/// The glyph of `c`, with typographic stand-ins for signs the face may lack.
fn glyph_of(font: &FontRef, c: char) -> GlyphId {
    let charmap = font.charmap();
    charmap
        .map(c)
        .or_else(|| match c {
            '−' | '–' => charmap.map('-'),
            _ => None,
        })
        .unwrap_or(GlyphId::NOTDEF)
}

/// Glyphs of `text` with their pen positions (pixels from the start of the line).
fn place(font: &FontRef, text: &str, size_px: f32) -> (Vec<(GlyphId, f32)>, f32) {
    let metrics = font.glyph_metrics(Size::new(size_px), LocationRef::default());
    let mut pen = 0.0f32;
    let mut placed = Vec::with_capacity(text.len());
    for c in text.chars() {
        let glyph = glyph_of(font, c);
        placed.push((glyph, pen));
        pen += metrics.advance_width(glyph).unwrap_or(size_px * 0.5);
    }
    (placed, pen)
}

/// Width of `text` at `size_px`, pixels.
pub fn text_width(text: &str, size_px: f32) -> f64 {
    font().map_or(0.0, |f| f64::from(place(&f, text, size_px).1))
}

/// Ascent (baseline to the top of tall letters) and descent (below the baseline, positive) of
/// the face at `size_px`.
pub fn ascent_descent(size_px: f32) -> (f64, f64) {
    font().map_or((f64::from(size_px), 0.0), |f| {
        let m = f.metrics(Size::new(size_px), LocationRef::default());
        (f64::from(m.ascent), f64::from(-m.descent))
    })
}

/// Collects outlines into one path, flipping y to point down and shifting by (dx, dy).
struct PathPen<'a> {
    path: &'a mut BezPath,
    dx: f64,
    dy: f64,
}

impl PathPen<'_> {
    fn at(&self, x: f32, y: f32) -> (f64, f64) {
        (f64::from(x) + self.dx, self.dy - f64::from(y))
    }
}

impl OutlinePen for PathPen<'_> {
    fn move_to(&mut self, x: f32, y: f32) {
        let p = self.at(x, y);
        self.path.move_to(p);
    }
    fn line_to(&mut self, x: f32, y: f32) {
        let p = self.at(x, y);
        self.path.line_to(p);
    }
    fn quad_to(&mut self, cx0: f32, cy0: f32, x: f32, y: f32) {
        let (c, p) = (self.at(cx0, cy0), self.at(x, y));
        self.path.quad_to(c, p);
    }
    fn curve_to(&mut self, cx0: f32, cy0: f32, cx1: f32, cy1: f32, x: f32, y: f32) {
        let (c0, c1, p) = (self.at(cx0, cy0), self.at(cx1, cy1), self.at(x, y));
        self.path.curve_to(c0, c1, p);
    }
    fn close(&mut self) {
        self.path.close_path();
    }
}

/// Rasterises one line of `text` at `size_px`; `None` for empty text or a failed outline.
pub fn rasterise(text: &str, size_px: f32) -> Option<TextMask> {
    let font = font()?;
    let (placed, width) = place(&font, text, size_px);
    let (ascent, descent) = ascent_descent(size_px);
    let pad = 1.0;
    let baseline = (ascent + pad).ceil();
    let mask_w = (f64::from(width) + 2.0 * pad).ceil();
    let mask_h = (baseline + descent + pad).ceil();
    if placed.is_empty() || mask_w < 1.0 || mask_h < 1.0 || mask_w > 4096.0 || mask_h > 4096.0 {
        return None;
    }
    let outlines = font.outline_glyphs();
    let mut path = BezPath::new();
    for (glyph, x) in placed {
        let Some(outline) = outlines.get(glyph) else {
            continue;
        };
        let mut pen = PathPen {
            path: &mut path,
            dx: pad + f64::from(x),
            dy: baseline,
        };
        let settings = DrawSettings::unhinted(Size::new(size_px), LocationRef::default());
        outline.draw(settings, &mut pen).ok()?;
    }
    let (w, h) = (mask_w as u16, mask_h as u16);
    let mut ctx = RenderContext::new(w, h);
    ctx.set_transform(Affine::IDENTITY);
    ctx.set_paint(color::OpaqueColor::<color::Srgb>::WHITE);
    ctx.fill_path(&path);
    let mut pixmap = Pixmap::new(w, h);
    let mut resources = Resources::new();
    ctx.render(&mut pixmap, &mut resources);
    // Premultiplied white: the alpha channel is the coverage.
    let coverage = pixmap
        .data_as_u8_slice()
        .chunks_exact(4)
        .map(|px| px[3])
        .collect();
    Some(TextMask {
        width: usize::from(w),
        height: usize::from(h),
        coverage,
        baseline: baseline as usize,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lower_case_and_signs_have_ink_and_widths_grow_with_the_text() {
        let mask = rasterise("dB −12 °", 13.0).expect("text rasterises");
        let ink: u32 = mask.coverage.iter().map(|&c| u32::from(c)).sum();
        assert!(ink > 0);
        assert!(text_width("back", 13.0) > text_width("up", 13.0));
        assert!(text_width("x", 26.0) > 1.9 * text_width("x", 13.0));
        // A descender reaches below the baseline, a capital does not.
        let below = |m: &TextMask| {
            (m.baseline + 1..m.height)
                .flat_map(|y| (0..m.width).map(move |x| (x, y)))
                .any(|(x, y)| m.coverage[y * m.width + x] > 64)
        };
        assert!(below(&rasterise("gyp", 20.0).unwrap()));
        assert!(!below(&rasterise("HE", 20.0).unwrap()));
    }
}
