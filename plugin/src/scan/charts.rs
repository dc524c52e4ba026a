//! The pictures of the report and of the editor's "save what is shown": the map with its colour
//! scale, grid, direction words and numbered source markers; the timeline of the strongest
//! direction; the order balance with the marks each normalisation expects.
//!
//! Each picture is laid out once as a [`Drawing`] (rectangles, lines, circles, text, rasters)
//! and then written either as inline SVG, whose text the browser draws, or as a PNG, whose
//! text is set in egui's own font ([`super::font`]). Only the energy itself is a raster: the
//! heat map goes into the SVG as an embedded PNG. Colours and marks come from [`crate::look`],
//! words from [`fieldglass_dsp::wording`], the energy palette from [`fieldglass_dsp::render`].

use super::font;
use super::run::{TimelinePoint, expected_balance_db};
use crate::look::{self, Rgb};
use base64::Engine as _;
use fieldglass_dsp::engine::SourceReading;
use fieldglass_dsp::format::{AmbiFormat, Normalization};
use fieldglass_dsp::render::{palette_rgb, scale_position};
use fieldglass_dsp::wording;
use std::fmt::Write;

/// Map picture size in pixels (2 px per degree).
pub const MAP_WIDTH: usize = 720;
pub const MAP_HEIGHT: usize = 360;
/// Where the map area starts in the map picture, pixels from the left and the top (room for
/// the elevation labels in any browser's sans-serif).
pub const MAP_LEFT: f64 = 92.0;
pub const MAP_TOP: f64 = 12.0;
/// Text widths are measured in egui's font; a browser's sans-serif may run this much wider,
/// so layouts that place text after text leave this much room.
const BROWSER_TEXT_SLACK: f64 = 1.3;
/// Size of label text and of small print, pixels.
const LABEL_PX: f64 = 13.0;
const SMALL_PX: f64 = 12.0;
/// Outline under marker text so it reads on any part of the map.
const HALO: Rgb = [0, 0, 0];

// ---------------------------------------------------------------------------------------------
// Raster canvas

/// An RGB8 picture, row 0 at the top.
#[derive(Clone, Debug, PartialEq)]
pub struct Canvas {
    pub width: usize,
    pub height: usize,
    pub rgb: Vec<u8>,
}

impl Canvas {
    pub fn new(width: usize, height: usize, colour: Rgb) -> Self {
        let mut rgb = Vec::with_capacity(width * height * 3);
        for _ in 0..width * height {
            rgb.extend_from_slice(&colour);
        }
        Self { width, height, rgb }
    }

    fn index(&self, x: i64, y: i64) -> Option<usize> {
        (x >= 0 && y >= 0 && (x as usize) < self.width && (y as usize) < self.height)
            .then(|| 3 * (y as usize * self.width + x as usize))
    }

    pub fn set(&mut self, x: i64, y: i64, colour: Rgb) {
        if let Some(i) = self.index(x, y) {
            self.rgb[i..i + 3].copy_from_slice(&colour);
        }
    }

    pub fn get(&self, x: usize, y: usize) -> Rgb {
        let i = 3 * (y * self.width + x);
        [self.rgb[i], self.rgb[i + 1], self.rgb[i + 2]]
    }

    /// Mixes `colour` over the pixel with opacity `alpha` in [0, 1].
    pub fn blend(&mut self, x: i64, y: i64, colour: Rgb, alpha: f64) {
        if let Some(i) = self.index(x, y) {
            let a = alpha.clamp(0.0, 1.0);
            for (channel, &target) in self.rgb[i..i + 3].iter_mut().zip(&colour) {
                let old = f64::from(*channel);
                *channel = (old + (f64::from(target) - old) * a).round() as u8;
            }
        }
    }

    /// Blends a rectangle with fractional edges (antialiased by area coverage).
    fn blend_rect(&mut self, x: f64, y: f64, w: f64, h: f64, colour: Rgb, alpha: f64) {
        let (x1, y1) = (x + w, y + h);
        for py in y.floor() as i64..y1.ceil() as i64 {
            let cover_y = (y1.min(py as f64 + 1.0) - y.max(py as f64)).clamp(0.0, 1.0);
            for px in x.floor() as i64..x1.ceil() as i64 {
                let cover_x = (x1.min(px as f64 + 1.0) - x.max(px as f64)).clamp(0.0, 1.0);
                self.blend(px, py, colour, alpha * cover_x * cover_y);
            }
        }
    }

    /// Blends `colour` into every pixel near (cx, cy), weighted by
    /// `coverage(distance from the centre to the pixel centre)`.
    fn blend_by_distance(
        &mut self,
        cx: f64,
        cy: f64,
        reach: f64,
        colour: Rgb,
        coverage: impl Fn(f64) -> f64,
    ) {
        let reach = (reach + 1.0).ceil() as i64;
        for dy in -reach..=reach {
            for dx in -reach..=reach {
                let x = cx.floor() as i64 + dx;
                let y = cy.floor() as i64 + dy;
                let d = ((x as f64 + 0.5 - cx).powi(2) + (y as f64 + 0.5 - cy).powi(2)).sqrt();
                let c = coverage(d);
                if c > 0.0 {
                    self.blend(x, y, colour, c);
                }
            }
        }
    }

    /// Blends a coverage mask with its top-left corner at (x, y).
    fn blend_mask(&mut self, mask: &font::TextMask, x: i64, y: i64, colour: Rgb) {
        for my in 0..mask.height {
            for mx in 0..mask.width {
                let c = mask.coverage[my * mask.width + mx];
                if c > 0 {
                    self.blend(x + mx as i64, y + my as i64, colour, f64::from(c) / 255.0);
                }
            }
        }
    }

    /// PNG (8-bit RGB) of the canvas.
    pub fn to_png(&self) -> Result<Vec<u8>, String> {
        let mut out = Vec::new();
        {
            let mut encoder = png::Encoder::new(&mut out, self.width as u32, self.height as u32);
            encoder.set_color(png::ColorType::Rgb);
            encoder.set_depth(png::BitDepth::Eight);
            encoder.set_compression(png::Compression::Best);
            let mut writer = encoder.write_header().map_err(|e| e.to_string())?;
            writer
                .write_image_data(&self.rgb)
                .map_err(|e| e.to_string())?;
        }
        Ok(out)
    }

    /// `data:image/png;base64,…` of the canvas.
    pub fn to_data_uri(&self) -> Result<String, String> {
        Ok(format!(
            "data:image/png;base64,{}",
            base64::engine::general_purpose::STANDARD.encode(self.to_png()?)
        ))
    }
}

// ---------------------------------------------------------------------------------------------
// Drawings: one layout, written as SVG or as a PNG

/// Where a text's x coordinate sits on it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Anchor {
    Start,
    Middle,
    End,
}

/// One element of a drawing. Coordinates in pixels, y down; lines are horizontal or vertical.
#[derive(Clone, Debug, PartialEq)]
pub enum Item {
    Rect {
        x: f64,
        y: f64,
        w: f64,
        h: f64,
        fill: Rgb,
        opacity: f64,
    },
    Line {
        x0: f64,
        y0: f64,
        x1: f64,
        y1: f64,
        stroke: Rgb,
        width: f64,
        opacity: f64,
    },
    /// A disc (`fill`) or a ring (`stroke` of `width` centred on radius `r`).
    Circle {
        cx: f64,
        cy: f64,
        r: f64,
        fill: Option<Rgb>,
        stroke: Option<(Rgb, f64)>,
    },
    /// One line of text; `y` is the baseline. `halo` draws a dark outline under it.
    Text {
        x: f64,
        y: f64,
        text: String,
        size: f64,
        colour: Rgb,
        anchor: Anchor,
        halo: bool,
    },
    /// A raster placed pixel for pixel at (x, y).
    Raster { x: f64, y: f64, canvas: Canvas },
}

/// A picture as a list of items over a background.
#[derive(Clone, Debug, PartialEq)]
pub struct Drawing {
    pub width: f64,
    pub height: f64,
    pub background: Rgb,
    /// What the picture shows, for people who cannot see it (the SVG's title).
    pub title: String,
    pub items: Vec<Item>,
}

fn escape(text: &str) -> String {
    super::report_html::escape(text)
}

/// Numbers in SVG attributes: short, and never NaN.
fn n(value: f64) -> String {
    if !value.is_finite() {
        return "0".to_string();
    }
    let s = format!("{value:.2}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".to_string()
    } else {
        s.to_string()
    }
}

impl Drawing {
    fn new(width: f64, height: f64, title: impl Into<String>) -> Self {
        Self {
            width,
            height,
            background: look::BACKGROUND,
            title: title.into(),
            items: Vec::new(),
        }
    }

    fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, fill: Rgb, opacity: f64) {
        self.items.push(Item::Rect {
            x,
            y,
            w,
            h,
            fill,
            opacity,
        });
    }

    fn line(&mut self, from: (f64, f64), to: (f64, f64), stroke: Rgb, width: f64, opacity: f64) {
        self.items.push(Item::Line {
            x0: from.0,
            y0: from.1,
            x1: to.0,
            y1: to.1,
            stroke,
            width,
            opacity,
        });
    }

    fn text(&mut self, x: f64, y: f64, text: impl Into<String>, colour: Rgb, anchor: Anchor) {
        self.text_sized(x, y, text, LABEL_PX, colour, anchor);
    }

    fn text_sized(
        &mut self,
        x: f64,
        y: f64,
        text: impl Into<String>,
        size: f64,
        colour: Rgb,
        anchor: Anchor,
    ) {
        self.items.push(Item::Text {
            x,
            y,
            text: text.into(),
            size,
            colour,
            anchor,
            halo: false,
        });
    }

    /// Inline SVG: text as `<text>` (the browser draws it), rasters as embedded PNGs.
    pub fn to_svg(&self) -> Result<String, String> {
        let mut s = String::with_capacity(4096);
        let _ = write!(
            s,
            "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 {w} {h}\" width=\"{w}\" height=\"{h}\" role=\"img\" font-family=\"system-ui, -apple-system, 'Segoe UI', sans-serif\"><title>{}</title><rect width=\"{w}\" height=\"{h}\" fill=\"{}\"/>",
            escape(&self.title),
            look::css(self.background),
            w = n(self.width),
            h = n(self.height),
        );
        for item in &self.items {
            match item {
                Item::Rect {
                    x,
                    y,
                    w,
                    h,
                    fill,
                    opacity,
                } => {
                    let _ = write!(
                        s,
                        "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"{}\"{}/>",
                        n(*x),
                        n(*y),
                        n(*w),
                        n(*h),
                        look::css(*fill),
                        opacity_attr("fill-opacity", *opacity)
                    );
                }
                Item::Line {
                    x0,
                    y0,
                    x1,
                    y1,
                    stroke,
                    width,
                    opacity,
                } => {
                    let _ = write!(
                        s,
                        "<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\" stroke=\"{}\" stroke-width=\"{}\"{}/>",
                        n(*x0),
                        n(*y0),
                        n(*x1),
                        n(*y1),
                        look::css(*stroke),
                        n(*width),
                        opacity_attr("stroke-opacity", *opacity)
                    );
                }
                Item::Circle {
                    cx,
                    cy,
                    r,
                    fill,
                    stroke,
                } => {
                    let fill = fill.map_or("none".to_string(), look::css);
                    let stroke = stroke.map_or(String::new(), |(c, w)| {
                        format!(" stroke=\"{}\" stroke-width=\"{}\"", look::css(c), n(w))
                    });
                    let _ = write!(
                        s,
                        "<circle cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{fill}\"{stroke}/>",
                        n(*cx),
                        n(*cy),
                        n(*r)
                    );
                }
                Item::Text {
                    x,
                    y,
                    text,
                    size,
                    colour,
                    anchor,
                    halo,
                } => {
                    let anchor = match anchor {
                        Anchor::Start => "",
                        Anchor::Middle => " text-anchor=\"middle\"",
                        Anchor::End => " text-anchor=\"end\"",
                    };
                    let halo = if *halo {
                        format!(
                            " stroke=\"{}\" stroke-width=\"3\" stroke-linejoin=\"round\" paint-order=\"stroke\"",
                            look::css(HALO)
                        )
                    } else {
                        String::new()
                    };
                    let _ = write!(
                        s,
                        "<text x=\"{}\" y=\"{}\" font-size=\"{}\" fill=\"{}\"{anchor}{halo}>{}</text>",
                        n(*x),
                        n(*y),
                        n(*size),
                        look::css(*colour),
                        escape(text)
                    );
                }
                Item::Raster { x, y, canvas } => {
                    let _ = write!(
                        s,
                        "<image x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" preserveAspectRatio=\"none\" href=\"{}\"/>",
                        n(*x),
                        n(*y),
                        canvas.width,
                        canvas.height,
                        canvas.to_data_uri()?
                    );
                }
            }
        }
        s.push_str("</svg>");
        Ok(s)
    }

    /// The drawing as pixels, text set in egui's font.
    pub fn to_canvas(&self) -> Canvas {
        let mut canvas = Canvas::new(
            self.width.ceil() as usize,
            self.height.ceil() as usize,
            self.background,
        );
        for item in &self.items {
            match item {
                Item::Rect {
                    x,
                    y,
                    w,
                    h,
                    fill,
                    opacity,
                } => canvas.blend_rect(*x, *y, *w, *h, *fill, *opacity),
                Item::Line {
                    x0,
                    y0,
                    x1,
                    y1,
                    stroke,
                    width,
                    opacity,
                } => {
                    let (xa, xb) = (x0.min(*x1), x0.max(*x1));
                    let (ya, yb) = (y0.min(*y1), y0.max(*y1));
                    let half = width / 2.0;
                    if (y1 - y0).abs() < 1e-9 {
                        canvas.blend_rect(xa, ya - half, xb - xa, *width, *stroke, *opacity);
                    } else {
                        canvas.blend_rect(xa - half, ya, *width, yb - ya, *stroke, *opacity);
                    }
                }
                Item::Circle {
                    cx,
                    cy,
                    r,
                    fill,
                    stroke,
                } => {
                    // Pixel centres sit at +0.5 in SVG coordinates as well.
                    if let Some(fill) = fill {
                        canvas.blend_by_distance(*cx, *cy, *r, *fill, |d| {
                            (r - d + 0.5).clamp(0.0, 1.0)
                        });
                    }
                    if let Some((colour, w)) = stroke {
                        let (outer, inner) = (r + w / 2.0, r - w / 2.0);
                        canvas.blend_by_distance(*cx, *cy, outer, *colour, |d| {
                            (outer - d + 0.5).clamp(0.0, 1.0) * (d - inner + 0.5).clamp(0.0, 1.0)
                        });
                    }
                }
                Item::Text {
                    x,
                    y,
                    text,
                    size,
                    colour,
                    anchor,
                    halo,
                } => {
                    let Some(mask) = font::rasterise(text, *size as f32) else {
                        continue;
                    };
                    let width = font::text_width(text, *size as f32);
                    let left = match anchor {
                        Anchor::Start => *x,
                        Anchor::Middle => x - width / 2.0,
                        Anchor::End => x - width,
                    };
                    // The mask has a one-pixel margin around the pen's start and the baseline.
                    let mx = (left - 1.0).round() as i64;
                    let my = (y - mask.baseline as f64).round() as i64;
                    if *halo {
                        for (dx, dy) in [(-1, 0), (1, 0), (0, -1), (0, 1), (-1, -1), (1, 1)] {
                            canvas.blend_mask(&mask, mx + dx, my + dy, HALO);
                        }
                    }
                    canvas.blend_mask(&mask, mx, my, *colour);
                }
                Item::Raster { x, y, canvas: r } => {
                    let (x0, y0) = (x.round() as i64, y.round() as i64);
                    for ry in 0..r.height {
                        for rx in 0..r.width {
                            canvas.set(x0 + rx as i64, y0 + ry as i64, r.get(rx, ry));
                        }
                    }
                }
            }
        }
        canvas
    }

    pub fn to_png(&self) -> Result<Vec<u8>, String> {
        self.to_canvas().to_png()
    }
}

fn opacity_attr(name: &str, opacity: f64) -> String {
    if opacity >= 1.0 {
        String::new()
    } else {
        format!(" {name}=\"{}\"", n(opacity))
    }
}

/// Degrees for labels, whole, with a real minus sign: "−30°".
fn deg(value: f64) -> String {
    format!("{}°", wording::degrees(value).replace('-', "−"))
}

/// Signed number with a real minus sign and no sign for zero.
fn signed(value: f64, decimals: usize) -> String {
    let s = format!("{value:+.decimals$}");
    let digits = s.trim_start_matches(['+', '-']);
    if digits.chars().all(|c| c == '0' || c == '.') {
        digits.to_string()
    } else {
        s.replace('-', "−")
    }
}

// ---------------------------------------------------------------------------------------------
// The map

/// A picture shown behind the map (a still of the video the sound goes with).
#[derive(Clone, Copy)]
pub struct Backdrop<'a> {
    /// Colour (RGBA) of the picture at a direction in the picture's own frame, azimuth and
    /// elevation in degrees; e.g. `&|az, el| picture.sample(az, el)`.
    pub sample: &'a dyn Fn(f64, f64) -> [u8; 4],
    /// Scene azimuth of the picture's centre column, degrees (the editor's picture yaw): the
    /// picture is sampled at `azimuth − yaw_deg`.
    pub yaw_deg: f64,
    /// How much of the picture shows through the map, 0 (map only) … 1 (picture only).
    pub opacity: f64,
}

impl std::fmt::Debug for Backdrop<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Backdrop")
            .field("yaw_deg", &self.yaw_deg)
            .field("opacity", &self.opacity)
            .finish_non_exhaustive()
    }
}

/// A map to draw: equirectangular dB values as [`fieldglass_dsp::engine::MapImage`] holds
/// them (row 0 at +90°, column 0 at azimuth +180°, indexed [row·width + col]).
#[derive(Clone, Copy, Debug)]
pub struct MapLayers<'a> {
    pub map_db: &'a [f32],
    pub width: usize,
    pub height: usize,
    /// Colour-scale range, dB below the map's maximum.
    pub range_db: f64,
    /// Azimuth shown in the centre, degrees (0: front in the centre).
    pub view_yaw_deg: f64,
    /// Strongest first, numbered from 1 in that order.
    pub sources: &'a [SourceReading],
    pub backdrop: Option<Backdrop<'a>>,
}

impl MapLayers<'_> {
    fn has_signal(&self) -> bool {
        let complete =
            self.width > 0 && self.height > 0 && self.map_db.len() >= self.width * self.height;
        complete
            && self
                .map_db
                .iter()
                .any(|v| v.is_finite() && *v > self.map_db[0])
    }
}

/// Wraps an azimuth to (−180, 180].
fn wrap_deg(az: f64) -> f64 {
    let a = (az + 180.0).rem_euclid(360.0) - 180.0;
    if a <= -180.0 { a + 360.0 } else { a }
}

/// Bilinear sample of the map at continuous grid coordinates (pixel centres are integers);
/// columns wrap around, rows are clamped.
fn sample_map(values: &[f32], width: usize, height: usize, row: f64, col: f64) -> f32 {
    let r = row.clamp(0.0, (height - 1) as f64);
    let r0 = r.floor() as usize;
    let r1 = (r0 + 1).min(height - 1);
    let fr = (r - r0 as f64) as f32;
    let c = col.rem_euclid(width as f64);
    let c0 = c.floor() as usize % width;
    let c1 = (c0 + 1) % width;
    let fc = (c - c.floor()) as f32;
    let v = |r: usize, c: usize| values[r * width + c];
    let top = v(r0, c0) * (1.0 - fc) + v(r0, c1) * fc;
    let bottom = v(r1, c0) * (1.0 - fc) + v(r1, c1) * fc;
    top * (1.0 - fr) + bottom * fr
}

/// The heat map alone, `width`×`height` pixels (the backdrop mixed in), as the report embeds
/// it under its SVG axes. Without signal the picture is the panel colour (or the backdrop).
pub fn heat_map(layers: &MapLayers, width: usize, height: usize) -> Canvas {
    let mut canvas = Canvas::new(width, height, look::PANEL);
    let signal = layers.has_signal();
    let ceiling = layers
        .map_db
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(f32::NEG_INFINITY, f32::max);
    let floor = ceiling - layers.range_db as f32;
    for py in 0..height {
        let el = 90.0 - (py as f64 + 0.5) / height as f64 * 180.0;
        for px in 0..width {
            let az =
                wrap_deg(layers.view_yaw_deg + 180.0 - (px as f64 + 0.5) / width as f64 * 360.0);
            let mut colour = look::PANEL;
            if signal {
                let row = (90.0 - el) / 180.0 * layers.height as f64 - 0.5;
                let col = (180.0 - az) / 360.0 * layers.width as f64 - 0.5;
                let value = sample_map(layers.map_db, layers.width, layers.height, row, col);
                colour = palette_rgb(scale_position(value, floor, ceiling));
            }
            canvas.set(px as i64, py as i64, colour);
            if let Some(b) = &layers.backdrop {
                let [r, g, bl, a] = (b.sample)(wrap_deg(az - b.yaw_deg), el);
                let alpha = b.opacity.clamp(0.0, 1.0) * f64::from(a) / 255.0;
                canvas.blend(px as i64, py as i64, [r, g, bl], alpha);
            }
        }
    }
    canvas
}

/// A label step for a dB scale of `range_db`: about five steps of 1, 2, 3, 5, 6 or 10 dB.
fn scale_step_db(range_db: f64) -> f64 {
    [1.0, 2.0, 3.0, 5.0, 6.0, 10.0, 20.0]
        .into_iter()
        .find(|&s| range_db / s <= 6.0)
        .unwrap_or(30.0)
}

/// The map drawing: heat map, 30° grid with degrees and direction words, numbered source
/// markers, colour scale.
pub fn map_drawing(layers: &MapLayers, title: &str) -> Drawing {
    let (x0, y0) = (MAP_LEFT, MAP_TOP);
    let (mw, mh) = (MAP_WIDTH as f64, MAP_HEIGHT as f64);
    let bar_x = x0 + mw + 24.0;
    let mut d = Drawing::new(bar_x + 16.0 + 48.0, y0 + mh + 46.0, title);
    d.items.push(Item::Raster {
        x: x0,
        y: y0,
        canvas: heat_map(layers, MAP_WIDTH, MAP_HEIGHT),
    });
    let x_of = |az: f64| x0 + (180.0 - wrap_deg(az - layers.view_yaw_deg)) / 360.0 * mw;
    let y_of = |el: f64| y0 + (90.0 - el) / 180.0 * mh;
    let step = wording::GRID_STEP_DEG;
    // Azimuth lines at multiples of the step, labelled below with degrees and direction words.
    let lines = (360.0 / step).round() as i64;
    for k in 0..lines {
        let az = wrap_deg(-180.0 + k as f64 * step);
        let x = x_of(az);
        let front = az == 0.0;
        d.line(
            (x, y0),
            (x, y0 + mh),
            look::GRID,
            1.0,
            f64::from(look::GRID_ALPHA) * if front { 1.8 } else { 1.0 },
        );
        let edge = x - x0 < 1.0;
        // The line at the left edge repeats at the right edge.
        let places: &[f64] = if edge { &[x0, x0 + mw] } else { &[x] };
        for &px in places {
            d.text(px, y0 + mh + 16.0, deg(az), look::TEXT_DIM, Anchor::Middle);
            if let Some(word) = wording::azimuth_word(az) {
                d.text(px, y0 + mh + 32.0, word, look::TEXT, Anchor::Middle);
            }
        }
    }
    let rows = (180.0 / step).round() as i64;
    for k in 0..=rows {
        let el = -90.0 + k as f64 * step;
        let y = y_of(el);
        let horizon = el == 0.0;
        if k > 0 && k < rows {
            d.line(
                (x0, y),
                (x0 + mw, y),
                look::GRID,
                1.0,
                f64::from(look::GRID_ALPHA) * if horizon { 1.8 } else { 1.0 },
            );
        }
        let label = match el {
            90.0 => format!("{} {}", wording::UP, deg(el)),
            -90.0 => format!("{} {}", wording::DOWN, deg(el)),
            _ => deg(el),
        };
        d.text(x0 - 6.0, y + 4.5, label, look::TEXT_DIM, Anchor::End);
    }
    if !layers.has_signal() {
        d.text_sized(
            x0 + mw / 2.0,
            y0 + mh / 2.0 + 6.0,
            "no signal in this band",
            18.0,
            look::TEXT,
            Anchor::Middle,
        );
    } else {
        for (i, s) in layers.sources.iter().enumerate() {
            let (az, el) = (s.direction.azimuth_deg, s.direction.elevation_deg);
            source_marker(&mut d, x_of(az), y_of(el), i + 1);
        }
    }
    // Colour scale: top = the map's maximum, bottom = range below.
    let bar_h = MAP_HEIGHT;
    let mut bar = Canvas::new(14, bar_h, look::BACKGROUND);
    for py in 0..bar_h {
        let colour = palette_rgb(1.0 - (py as f32 + 0.5) / bar_h as f32);
        for px in 0..14 {
            bar.set(px, py as i64, colour);
        }
    }
    d.items.push(Item::Raster {
        x: bar_x,
        y: y0,
        canvas: bar,
    });
    let range = layers.range_db.max(1.0);
    let tick = scale_step_db(range);
    let mut marks: Vec<f64> = (0..)
        .map(|k| k as f64 * tick)
        .take_while(|db| *db <= range + 1e-6)
        .collect();
    // The floor is always labelled, unless a tick already sits close to it.
    if marks.last().is_some_and(|last| range - last > tick / 2.0) {
        marks.push(range);
    }
    for db in marks {
        let y = y0 + db / range * mh;
        d.line((bar_x + 14.0, y), (bar_x + 18.0, y), look::TEXT, 1.0, 1.0);
        d.text(
            bar_x + 21.0,
            y + 4.5,
            signed(-db, 0),
            look::TEXT_DIM,
            Anchor::Start,
        );
    }
    d.text(bar_x, y0 + mh + 16.0, "dB", look::TEXT_DIM, Anchor::Start);
    d
}

/// A ring with a cross, numbered: where a source was found.
fn source_marker(d: &mut Drawing, x: f64, y: f64, number: usize) {
    d.items.push(Item::Circle {
        cx: x,
        cy: y,
        r: 10.0,
        fill: None,
        stroke: Some((HALO, 4.0)),
    });
    d.items.push(Item::Circle {
        cx: x,
        cy: y,
        r: 10.0,
        fill: None,
        stroke: Some((look::SOURCE_MARK, 2.0)),
    });
    for (from, to) in [((x - 4.0, y), (x + 4.0, y)), ((x, y - 4.0), (x, y + 4.0))] {
        d.line(from, to, look::SOURCE_MARK, 1.5, 1.0);
    }
    d.items.push(Item::Text {
        x: x + 12.0,
        y: y - 10.0,
        text: number.to_string(),
        size: 15.0,
        colour: look::SOURCE_MARK,
        anchor: Anchor::Start,
        halo: true,
    });
}

/// The map as a PNG with its colour scale, 30° grid, direction words and numbered source
/// markers: the report's map files and the editor's "save what is shown".
///
/// `map_db` is indexed [row·width + col], row 0 at +90° and column 0 at azimuth +180° (as
/// `MapImage`); the colour scale spans `range_db` below the map's maximum; `view_yaw_deg` is
/// the azimuth shown in the centre; `sources` are strongest first, numbered from 1 in that order.
pub fn map_png(
    map_db: &[f32],
    width: usize,
    height: usize,
    range_db: f64,
    view_yaw_deg: f64,
    sources: &[SourceReading],
    backdrop: Option<Backdrop>,
) -> Result<Vec<u8>, String> {
    if width == 0 || height == 0 || map_db.len() < width * height {
        return Err(format!(
            "a map of {width}×{height} needs {} values, got {}",
            width * height,
            map_db.len()
        ));
    }
    let layers = MapLayers {
        map_db,
        width,
        height,
        range_db,
        view_yaw_deg,
        sources,
        backdrop,
    };
    map_drawing(&layers, "energy map").to_png()
}

// ---------------------------------------------------------------------------------------------
// The timeline

/// A tick step (in seconds) that gives at most about ten ticks over `duration_s`.
fn time_step_s(duration_s: f64) -> f64 {
    const STEPS: [f64; 14] = [
        0.1, 0.25, 0.5, 1.0, 2.0, 5.0, 10.0, 15.0, 30.0, 60.0, 120.0, 300.0, 600.0, 1800.0,
    ];
    STEPS
        .into_iter()
        .find(|&s| duration_s / s <= 10.0)
        .unwrap_or(3600.0)
}

fn time_label(t_s: f64, duration_s: f64) -> String {
    if duration_s >= 120.0 {
        let total = t_s.round() as u64;
        format!("{}:{:02}", total / 60, total % 60)
    } else if (t_s - t_s.round()).abs() < 1e-6 {
        format!("{}", t_s.round() as i64)
    } else {
        format!("{t_s:.2}").trim_end_matches('0').to_string()
    }
}

/// Azimuth and elevation of the strongest direction against time. Dot brightness follows W's
/// level at that moment (quiet moments are dim).
pub fn timeline_drawing(points: &[TimelinePoint], duration_s: f64) -> Drawing {
    let (x0, w) = (MAP_LEFT, MAP_WIDTH as f64);
    let (az_y, az_h) = (26.0, 200.0);
    let (el_y, el_h) = (az_y + az_h + 36.0, 110.0);
    let mut d = Drawing::new(
        x0 + w + 24.0,
        el_y + el_h + 44.0,
        "azimuth and elevation of the strongest direction against time",
    );
    let duration_s = duration_s.max(1e-3);
    d.rect(x0, az_y, w, az_h, look::PANEL, 1.0);
    d.rect(x0, el_y, w, el_h, look::PANEL, 1.0);
    d.text(x0, az_y - 8.0, "Azimuth", look::TEXT, Anchor::Start);
    d.text(x0, el_y - 8.0, "Elevation", look::TEXT, Anchor::Start);
    let grid = f64::from(look::GRID_ALPHA);
    for k in 0..=4 {
        let az = 180.0 - 90.0 * k as f64;
        let y = az_y + (180.0 - az) / 360.0 * az_h;
        d.line((x0, y), (x0 + w, y), look::GRID, 1.0, grid);
        let word = wording::azimuth_word(az).unwrap_or("");
        d.text(
            x0 - 6.0,
            y + 4.5,
            format!("{word} {}", deg(az)),
            look::TEXT_DIM,
            Anchor::End,
        );
    }
    for k in 0..=4 {
        let el = 90.0 - 45.0 * k as f64;
        let y = el_y + (90.0 - el) / 180.0 * el_h;
        d.line((x0, y), (x0 + w, y), look::GRID, 1.0, grid);
        let label = match k {
            0 => format!("{} {}", wording::UP, deg(el)),
            4 => format!("{} {}", wording::DOWN, deg(el)),
            _ => deg(el),
        };
        d.text(x0 - 6.0, y + 4.5, label, look::TEXT_DIM, Anchor::End);
    }
    let step = time_step_s(duration_s);
    let mut t = 0.0;
    while t <= duration_s + 1e-9 {
        let x = x0 + t / duration_s * w;
        d.line((x, az_y), (x, az_y + az_h), look::GRID, 1.0, grid * 0.5);
        d.line((x, el_y), (x, el_y + el_h), look::GRID, 1.0, grid * 0.5);
        d.text(
            x,
            el_y + el_h + 16.0,
            time_label(t, duration_s),
            look::TEXT_DIM,
            Anchor::Middle,
        );
        t += step;
    }
    let unit = if duration_s >= 120.0 {
        "time (m:ss)"
    } else {
        "time (s)"
    };
    d.text(
        x0 + w,
        el_y + el_h + 34.0,
        unit,
        look::TEXT_DIM,
        Anchor::End,
    );

    let loudest = points
        .iter()
        .map(|p| p.w_rms_dbfs)
        .filter(|v| v.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    let mut drawn = 0;
    for p in points {
        let Some(dir) = p.direction else { continue };
        let x = x0 + (p.time_s / duration_s).clamp(0.0, 1.0) * w;
        let level = scale_position(p.w_rms_dbfs as f32, (loudest - 30.0) as f32, loudest as f32);
        let colour = palette_rgb(0.3 + 0.7 * level);
        for y in [
            az_y + (180.0 - dir.azimuth_deg) / 360.0 * az_h,
            el_y + (90.0 - dir.elevation_deg) / 180.0 * el_h,
        ] {
            d.items.push(Item::Circle {
                cx: x,
                cy: y,
                r: 2.2,
                fill: Some(colour),
                stroke: None,
            });
        }
        drawn += 1;
    }
    if drawn == 0 {
        d.text_sized(
            x0 + w / 2.0,
            az_y + az_h / 2.0 + 6.0,
            "no direction found",
            18.0,
            look::TEXT,
            Anchor::Middle,
        );
    }
    d
}

// ---------------------------------------------------------------------------------------------
// The order balance

/// Per-order energy relative to W (bars) with the energy each normalisation would show here
/// for an isotropic field (short horizontal ticks, as in the editor's format panel: SN3D white,
/// N3D blue, FuMa yellow), read as `assumed`.
pub fn order_balance_drawing(balance_db: &[f64], assumed: AmbiFormat) -> Drawing {
    let order = balance_db.len().saturating_sub(1).max(1);
    let (x0, y0, w, h) = (64.0, 40.0, 520.0, 230.0);
    let mut d = Drawing::new(
        x0 + w + 60.0,
        y0 + h + 44.0,
        "energy per order relative to W",
    );
    d.rect(x0, y0, w, h, look::PANEL, 1.0);
    let marks: [(&str, Normalization, Rgb); 3] = [
        ("SN3D", Normalization::Sn3d, look::MARK_SN3D),
        ("N3D", Normalization::N3d, look::MARK_N3D),
        ("FuMa", Normalization::MaxN, look::MARK_FUMA),
    ];
    let expected: Vec<Vec<Option<f64>>> = marks
        .iter()
        .map(|&(_, norm, _)| expected_balance_db(norm, assumed.normalization, order))
        .collect();
    let finite = balance_db
        .iter()
        .skip(1)
        .copied()
        .filter(|v| *v > -100.0)
        .chain(expected.iter().flatten().flatten().copied());
    let (lo, hi) = finite.fold((-12.0f64, 12.0f64), |(lo, hi), v| {
        (lo.min(v - 3.0), hi.max(v + 3.0))
    });
    let lo = (lo / 6.0).floor().max(-10.0) * 6.0;
    let hi = (hi / 6.0).ceil().min(6.0) * 6.0;
    let y_of = |db: f64| y0 + (hi - db.clamp(lo, hi)) / (hi - lo) * h;
    let grid = f64::from(look::GRID_ALPHA);
    let mut db = lo;
    while db <= hi + 1e-9 {
        let y = y_of(db);
        d.line(
            (x0, y),
            (x0 + w, y),
            look::GRID,
            1.0,
            if db == 0.0 { grid * 1.8 } else { grid },
        );
        d.text(
            x0 - 6.0,
            y + 4.5,
            signed(db, 0),
            look::TEXT_DIM,
            Anchor::End,
        );
        db += 6.0;
    }
    d.text(
        x0 - 56.0,
        y0 - 26.0,
        "dB relative to W",
        look::TEXT_DIM,
        Anchor::Start,
    );
    let group = w / order as f64;
    let zero_y = y_of(0.0);
    let bar_colour = palette_rgb(0.62);
    for n in 1..=order {
        let cx = x0 + (n as f64 - 0.5) * group;
        let value = balance_db.get(n).copied().unwrap_or(f64::NEG_INFINITY);
        let bar_w = (group * 0.34).clamp(6.0, 60.0);
        let top = y_of(value.max(lo));
        let (ya, yb) = if top < zero_y {
            (top, zero_y)
        } else {
            (zero_y, top)
        };
        d.rect(
            cx - bar_w / 2.0,
            ya,
            bar_w,
            (yb - ya).max(1.0),
            bar_colour,
            1.0,
        );
        let label = if value > -100.0 {
            signed(value, 1)
        } else {
            "empty".to_string()
        };
        let label_y = if value >= 0.0 { ya - 5.0 } else { yb + 15.0 };
        d.text(cx, label_y, label, look::TEXT, Anchor::Middle);
        let mark_w = (group * 0.36).clamp(8.0, 70.0);
        for (k, &(_, _, colour)) in marks.iter().enumerate() {
            let Some(Some(e)) = expected[k].get(n) else {
                continue;
            };
            let y = y_of(*e);
            let xa = cx + bar_w / 2.0 + 4.0;
            d.line((xa, y), (xa + mark_w, y), colour, 2.0, 1.0);
        }
        d.text(
            cx,
            y0 + h + 18.0,
            format!("order {n}"),
            look::TEXT,
            Anchor::Middle,
        );
    }
    // Legend across the top.
    let legend_y = y0 - 12.0;
    let mut lx = x0 + 110.0;
    d.rect(lx, legend_y - 8.0, 14.0, 8.0, bar_colour, 1.0);
    d.text(lx + 18.0, legend_y, "measured", look::TEXT, Anchor::Start);
    let room = |text: &str, size: f64| font::text_width(text, size as f32) * BROWSER_TEXT_SLACK;
    lx += 18.0 + room("measured", LABEL_PX) + 14.0;
    let lead = "expected if stored as:";
    d.text_sized(lx, legend_y, lead, SMALL_PX, look::TEXT_DIM, Anchor::Start);
    lx += room(lead, SMALL_PX) + 8.0;
    for &(name, _, colour) in &marks {
        d.line(
            (lx, legend_y - 4.0),
            (lx + 16.0, legend_y - 4.0),
            colour,
            2.0,
            1.0,
        );
        d.text(lx + 20.0, legend_y, name, look::TEXT, Anchor::Start);
        lx += 20.0 + room(name, LABEL_PX) + 12.0;
    }
    d
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The strongest source, at (azimuth, elevation) in degrees.
    fn source_at(azimuth_deg: f64, elevation_deg: f64) -> SourceReading {
        SourceReading {
            direction: fieldglass_dsp::sphere::Direction::new(azimuth_deg, elevation_deg),
            level_db: 0.0,
        }
    }

    /// A 4×2 map, strongest at the column of azimuth +45° (upper row).
    fn small_map() -> Vec<f32> {
        vec![-20.0, 0.0, -20.0, -20.0, -20.0, -20.0, -20.0, -20.0]
    }

    #[test]
    fn map_png_is_a_png_with_the_map_and_rejects_short_data() {
        let map = small_map();
        let png = map_png(&map, 4, 2, 30.0, 0.0, &[source_at(45.0, 45.0)], None).unwrap();
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
        assert!(map_png(&map, 5, 2, 30.0, 0.0, &[], None).is_err());
    }

    #[test]
    fn heat_map_puts_front_in_the_centre_and_left_left_of_it() {
        // Columns of a 4-wide map sit at azimuth 135°, 45°, −45°, −135° (column 0 at +180°).
        let map = small_map();
        let layers = MapLayers {
            map_db: &map,
            width: 4,
            height: 2,
            range_db: 30.0,
            view_yaw_deg: 0.0,
            sources: &[],
            backdrop: None,
        };
        let canvas = heat_map(&layers, 8, 2);
        // +45° lies left of centre: pixel columns 2..3 of 8 are the brightest.
        let brightest = (0..8)
            .max_by_key(|&x| canvas.get(x, 0).iter().map(|&c| u32::from(c)).sum::<u32>())
            .unwrap();
        assert!((2..=3).contains(&brightest), "{brightest}");
        // Turning the view by +45° brings that direction to the centre.
        let turned = heat_map(
            &MapLayers {
                view_yaw_deg: 45.0,
                ..layers
            },
            8,
            2,
        );
        let brightest = (0..8)
            .max_by_key(|&x| turned.get(x, 0).iter().map(|&c| u32::from(c)).sum::<u32>())
            .unwrap();
        assert!((3..=4).contains(&brightest), "{brightest}");
    }

    #[test]
    fn backdrop_shows_through_by_its_opacity_and_follows_its_yaw() {
        let map = vec![-20.0f32; 8];
        // The picture is red on its left half (positive azimuth in its own frame).
        let red_left = |az: f64, _el: f64| {
            if az > 0.0 {
                [255, 0, 0, 255]
            } else {
                [0, 0, 0, 255]
            }
        };
        let layers = MapLayers {
            map_db: &map,
            width: 4,
            height: 2,
            range_db: 30.0,
            view_yaw_deg: 0.0,
            sources: &[],
            backdrop: Some(Backdrop {
                sample: &red_left,
                yaw_deg: 0.0,
                opacity: 1.0,
            }),
        };
        let canvas = heat_map(&layers, 8, 2);
        assert_eq!(canvas.get(2, 0), [255, 0, 0], "left of centre is red");
        assert_eq!(canvas.get(5, 0), [0, 0, 0]);
        // Picture yaw 180°: its left half now covers the scene's right.
        let turned = heat_map(
            &MapLayers {
                backdrop: Some(Backdrop {
                    sample: &red_left,
                    yaw_deg: 180.0,
                    opacity: 1.0,
                }),
                ..layers
            },
            8,
            2,
        );
        assert_eq!(turned.get(5, 0), [255, 0, 0]);
        let faint = heat_map(
            &MapLayers {
                backdrop: Some(Backdrop {
                    sample: &red_left,
                    yaw_deg: 0.0,
                    opacity: 0.0,
                }),
                ..layers
            },
            8,
            2,
        );
        assert_eq!(
            faint.get(2, 0),
            heat_map(
                &MapLayers {
                    backdrop: None,
                    ..layers
                },
                8,
                2
            )
            .get(2, 0)
        );
    }

    #[test]
    fn svg_has_text_the_browser_draws_and_the_heat_map_as_an_embedded_png() {
        let map = small_map();
        let layers = MapLayers {
            map_db: &map,
            width: 4,
            height: 2,
            range_db: 30.0,
            view_yaw_deg: 0.0,
            sources: &[source_at(45.0, 45.0)],
            backdrop: None,
        };
        let svg = map_drawing(&layers, "full band").to_svg().unwrap();
        assert!(svg.starts_with("<svg"));
        assert!(svg.contains("<image") && svg.contains("href=\"data:image/png;base64,"));
        for word in [
            "front",
            "left",
            "right",
            "back",
            "up 90°",
            "down −90°",
            "−30°",
        ] {
            assert!(svg.contains(&format!(">{word}</text>")), "{word}");
        }
        assert!(svg.contains(">1</text>"), "source numbered");
    }

    #[test]
    fn labels_read_as_written() {
        assert_eq!(deg(-30.0), "−30°");
        assert_eq!(signed(-6.0, 0), "−6");
        assert_eq!(signed(0.0, 1), "0.0");
        assert_eq!(signed(4.77, 1), "+4.8");
        assert_eq!(wrap_deg(190.0), -170.0);
        assert_eq!(wrap_deg(-180.0), 180.0);
    }
}
