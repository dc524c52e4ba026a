//! The report's pictures, drawn into plain RGB canvases and encoded as PNG: the whole-programme
//! map with source markers and a dB scale, the timeline of the strongest direction, and the
//! order-balance chart. Energy colours come from the shared renderer's palette
//! ([`fieldglass_dsp::render::palette_rgb`]); labels use the built-in 5×7 font.

use super::font::{GLYPH_HEIGHT, GLYPH_WIDTH, glyph, text_width};
use super::run::{BandResult, TimelinePoint, expected_balance_db};
use fieldglass_dsp::format::{AmbiFormat, Normalization};
use fieldglass_dsp::render::{palette_rgb, scale_position};

/// Background, panel, grid, text colours of the quiet dark look.
pub const BACKGROUND: [u8; 3] = [17, 19, 23];
const PANEL: [u8; 3] = [27, 30, 35];
const GRID: [u8; 3] = [120, 126, 136];
const TEXT: [u8; 3] = [196, 200, 207];
const DIM_TEXT: [u8; 3] = [130, 136, 145];
const MARKER: [u8; 3] = [250, 250, 250];
const MARKER_EDGE: [u8; 3] = [0, 0, 0];
/// Expected-mark colours of the order-balance chart (differ in lightness as well as hue).
const MARK_SN3D: [u8; 3] = [240, 240, 240];
const MARK_N3D: [u8; 3] = [236, 152, 52];
const MARK_FUMA: [u8; 3] = [80, 196, 210];

/// Dynamic range of the map colour scale, dB below the map's maximum.
pub const MAP_RANGE_DB: f32 = 24.0;
/// Map picture size in pixels (2 px per degree).
pub const MAP_WIDTH: usize = 720;
pub const MAP_HEIGHT: usize = 360;

/// An RGB8 picture, row 0 at the top.
#[derive(Clone, Debug, PartialEq)]
pub struct Canvas {
    pub width: usize,
    pub height: usize,
    pub rgb: Vec<u8>,
}

impl Canvas {
    pub fn new(width: usize, height: usize, colour: [u8; 3]) -> Self {
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

    pub fn set(&mut self, x: i64, y: i64, colour: [u8; 3]) {
        if let Some(i) = self.index(x, y) {
            self.rgb[i..i + 3].copy_from_slice(&colour);
        }
    }

    /// Mixes `colour` over the pixel with opacity `alpha` in [0, 1].
    pub fn blend(&mut self, x: i64, y: i64, colour: [u8; 3], alpha: f32) {
        if let Some(i) = self.index(x, y) {
            let a = alpha.clamp(0.0, 1.0);
            for (channel, &target) in self.rgb[i..i + 3].iter_mut().zip(&colour) {
                let old = *channel as f32;
                *channel = (old + (target as f32 - old) * a).round() as u8;
            }
        }
    }

    pub fn fill_rect(&mut self, x: i64, y: i64, w: i64, h: i64, colour: [u8; 3]) {
        for yy in y..y + h {
            for xx in x..x + w {
                self.set(xx, yy, colour);
            }
        }
    }

    pub fn hline(&mut self, x0: i64, x1: i64, y: i64, colour: [u8; 3], alpha: f32) {
        for x in x0.min(x1)..=x0.max(x1) {
            self.blend(x, y, colour, alpha);
        }
    }

    pub fn vline(&mut self, x: i64, y0: i64, y1: i64, colour: [u8; 3], alpha: f32) {
        for y in y0.min(y1)..=y0.max(y1) {
            self.blend(x, y, colour, alpha);
        }
    }

    /// Dashed horizontal line: `on` pixels drawn, `off` skipped.
    fn dashed_hline(&mut self, x0: i64, x1: i64, y: i64, colour: [u8; 3], on: i64, off: i64) {
        for x in x0..=x1 {
            if (x - x0) % (on + off) < on {
                self.set(x, y, colour);
            }
        }
    }

    /// Ring of outer radius `r` and thickness `t` (pixels), antialiased at its edges.
    pub fn ring(&mut self, cx: f64, cy: f64, r: f64, t: f64, colour: [u8; 3]) {
        self.blend_by_distance(cx, cy, r, colour, |d| {
            (r - d + 0.5).clamp(0.0, 1.0) * (d - (r - t) + 0.5).clamp(0.0, 1.0)
        });
    }

    /// Blends `colour` into every pixel within `r` + 1 of (cx, cy), weighted by
    /// `coverage(distance from the centre to the pixel centre)`.
    fn blend_by_distance(
        &mut self,
        cx: f64,
        cy: f64,
        r: f64,
        colour: [u8; 3],
        coverage: impl Fn(f64) -> f64,
    ) {
        let reach = (r + 1.0).ceil() as i64;
        for dy in -reach..=reach {
            for dx in -reach..=reach {
                let x = cx.floor() as i64 + dx;
                let y = cy.floor() as i64 + dy;
                let d = ((x as f64 + 0.5 - cx).powi(2) + (y as f64 + 0.5 - cy).powi(2)).sqrt();
                let c = coverage(d);
                if c > 0.0 {
                    self.blend(x, y, colour, c as f32);
                }
            }
        }
    }

    /// Filled disc of radius `r`.
    pub fn disc(&mut self, cx: f64, cy: f64, r: f64, colour: [u8; 3], alpha: f32) {
        self.blend_by_distance(cx, cy, r, colour, |d| {
            (r - d + 0.5).clamp(0.0, 1.0) * f64::from(alpha)
        });
    }

    /// Draws `text` with its top-left corner at (x, y), each font pixel `scale` pixels wide.
    pub fn text(&mut self, x: i64, y: i64, text: &str, colour: [u8; 3], scale: i64) {
        let mut pen = x;
        for c in text.chars() {
            if let Some(rows) = glyph(c) {
                for (ry, row) in rows.iter().enumerate() {
                    for (rx, ink) in row.bytes().enumerate() {
                        if ink == b'#' {
                            self.fill_rect(
                                pen + rx as i64 * scale,
                                y + ry as i64 * scale,
                                scale,
                                scale,
                                colour,
                            );
                        }
                    }
                }
            }
            pen += (GLYPH_WIDTH as i64 + 1) * scale;
        }
    }

    /// Text centred horizontally on `cx`.
    pub fn text_centred(&mut self, cx: i64, y: i64, text: &str, colour: [u8; 3], scale: i64) {
        let w = text_width(text) as i64 * scale;
        self.text(cx - w / 2, y, text, colour, scale);
    }

    /// Text ending at `right`.
    pub fn text_right(&mut self, right: i64, y: i64, text: &str, colour: [u8; 3], scale: i64) {
        let w = text_width(text) as i64 * scale;
        self.text(right - w, y, text, colour, scale);
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
}

/// Half the glyph height in pixels at `scale`, to centre a label on a tick.
fn half_text(scale: i64) -> i64 {
    GLYPH_HEIGHT as i64 * scale / 2
}

/// Signed number without a "+" for zero, with a real minus.
fn signed(value: f64, decimals: usize) -> String {
    let s = format!("{value:+.decimals$}");
    if s.trim_start_matches(['+', '-'])
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        s.trim_start_matches(['+', '-']).to_string()
    } else {
        s
    }
}

/// Pixel x of azimuth `az_deg` in an equirectangular area starting at `x0`, `w` wide (+180° at
/// the left edge, front in the centre, left of centre = left).
pub fn azimuth_x(az_deg: f64, x0: f64, w: f64) -> f64 {
    x0 + (180.0 - az_deg) / 360.0 * w
}

/// Pixel y of elevation `el_deg` in an area starting at `y0`, `h` high (top = up).
pub fn elevation_y(el_deg: f64, y0: f64, h: f64) -> f64 {
    y0 + (90.0 - el_deg) / 180.0 * h
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

/// The whole-programme map of one band with its sources marked and a dB scale.
pub fn map_chart(band: &BandResult) -> Canvas {
    let (x0, y0) = (52i64, 14i64);
    let (mw, mh) = (MAP_WIDTH as i64, MAP_HEIGHT as i64);
    let bar_x = x0 + mw + 22;
    let mut canvas = Canvas::new(
        (bar_x + 16 + 46) as usize,
        (y0 + mh + 30) as usize,
        BACKGROUND,
    );
    let map = &band.map;
    let ceiling = map.max_db;
    let floor = ceiling - MAP_RANGE_DB;
    let has_map = map.width > 0 && map.height > 0 && map.values_db.len() >= map.width * map.height;
    let empty =
        !has_map || map.values_db.iter().all(|&v| v <= map.values_db[0]) || band.sources.is_empty();
    for py in 0..mh {
        for px in 0..mw {
            let colour = if empty {
                PANEL
            } else {
                let row = (py as f64 + 0.5) * map.height as f64 / mh as f64 - 0.5;
                let col = (px as f64 + 0.5) * map.width as f64 / mw as f64 - 0.5;
                palette_rgb(scale_position(
                    sample_map(&map.values_db, map.width, map.height, row, col),
                    floor,
                    ceiling,
                ))
            };
            canvas.set(x0 + px, y0 + py, colour);
        }
    }
    // Grid: every 45° of azimuth and 30° of elevation, stronger on the front and the horizon.
    for az in (-180..=180).step_by(45) {
        let x = azimuth_x(az as f64, x0 as f64, mw as f64).round() as i64;
        let x = x.min(x0 + mw - 1);
        canvas.vline(x, y0, y0 + mh - 1, GRID, if az == 0 { 0.55 } else { 0.25 });
        let label = format!("{az}°");
        canvas.text_centred(x, y0 + mh + 8, &label, DIM_TEXT, 1);
    }
    for el in (-90..=90).step_by(30) {
        let y = elevation_y(el as f64, y0 as f64, mh as f64).round() as i64;
        let y = y.min(y0 + mh - 1);
        canvas.hline(x0, x0 + mw - 1, y, GRID, if el == 0 { 0.55 } else { 0.25 });
        canvas.text_right(x0 - 6, y - half_text(1), &format!("{el}°"), DIM_TEXT, 1);
    }
    canvas.text_centred(x0 + mw / 2, y0 + mh + 20, "FRONT", DIM_TEXT, 1);
    canvas.text_centred(x0 + mw / 4, y0 + mh + 20, "LEFT", DIM_TEXT, 1);
    canvas.text_centred(x0 + 3 * mw / 4, y0 + mh + 20, "RIGHT", DIM_TEXT, 1);
    canvas.text(x0, y0 + mh + 20, "BACK", DIM_TEXT, 1);
    canvas.text_right(x0 + mw, y0 + mh + 20, "BACK", DIM_TEXT, 1);
    if empty {
        canvas.text_centred(
            x0 + mw / 2,
            y0 + mh / 2 - 7,
            "NO SIGNAL IN THIS BAND",
            TEXT,
            2,
        );
    } else {
        for (i, source) in band.sources.iter().enumerate() {
            let d = source.direction;
            let x = azimuth_x(d.azimuth_deg, x0 as f64, mw as f64);
            let y = elevation_y(d.elevation_deg, y0 as f64, mh as f64);
            canvas.ring(x, y, 12.0, 4.0, MARKER_EDGE);
            canvas.ring(x, y, 11.0, 2.0, MARKER);
            let label = (i + 1).to_string();
            let (lx, ly) = (x.round() as i64 + 12, y.round() as i64 - 22);
            let lw = text_width(&label) as i64 * 2;
            canvas.fill_rect(
                lx - 2,
                ly - 2,
                lw + 4,
                GLYPH_HEIGHT as i64 * 2 + 4,
                MARKER_EDGE,
            );
            canvas.text(lx, ly, &label, MARKER, 2);
        }
    }
    // Colour scale: top = the map's maximum, bottom = MAP_RANGE_DB below.
    for py in 0..mh {
        let t = 1.0 - (py as f32 + 0.5) / mh as f32;
        canvas.fill_rect(bar_x, y0 + py, 16, 1, palette_rgb(t));
    }
    let mut db = 0.0f32;
    while db <= MAP_RANGE_DB + 0.01 {
        let y = y0 + ((db / MAP_RANGE_DB) * (mh - 1) as f32).round() as i64;
        canvas.hline(bar_x + 16, bar_x + 19, y, TEXT, 1.0);
        canvas.text(
            bar_x + 23,
            y - half_text(1),
            &signed(-(db as f64), 0),
            DIM_TEXT,
            1,
        );
        db += 6.0;
    }
    canvas.text(bar_x + 23, y0 + mh + 8, "DB", DIM_TEXT, 1);
    canvas
}

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
pub fn timeline_chart(points: &[TimelinePoint], duration_s: f64) -> Canvas {
    let (x0, w) = (52i64, MAP_WIDTH as i64);
    let (az_y, az_h) = (22i64, 200i64);
    let (el_y, el_h) = (az_y + az_h + 30, 110i64);
    let mut canvas = Canvas::new(
        (x0 + w + 84) as usize,
        (el_y + el_h + 36) as usize,
        BACKGROUND,
    );
    let duration_s = duration_s.max(1e-3);
    canvas.fill_rect(x0, az_y, w, az_h, PANEL);
    canvas.fill_rect(x0, el_y, w, el_h, PANEL);
    canvas.text(x0, az_y - 14, "AZIMUTH (+90° = LEFT)", TEXT, 1);
    canvas.text(x0, el_y - 14, "ELEVATION (+90° = UP)", TEXT, 1);
    for az in (-180..=180).step_by(90) {
        let y = az_y + ((180 - az) as f64 / 360.0 * (az_h - 1) as f64).round() as i64;
        canvas.hline(x0, x0 + w - 1, y, GRID, if az == 0 { 0.5 } else { 0.22 });
        canvas.text_right(x0 - 6, y - half_text(1), &format!("{az}°"), DIM_TEXT, 1);
    }
    for el in (-90..=90).step_by(45) {
        let y = el_y + ((90 - el) as f64 / 180.0 * (el_h - 1) as f64).round() as i64;
        canvas.hline(x0, x0 + w - 1, y, GRID, if el == 0 { 0.5 } else { 0.22 });
        canvas.text_right(x0 - 6, y - half_text(1), &format!("{el}°"), DIM_TEXT, 1);
    }
    let step = time_step_s(duration_s);
    let mut t = 0.0;
    while t <= duration_s + 1e-9 {
        let x = x0 + (t / duration_s * (w - 1) as f64).round() as i64;
        canvas.vline(x, az_y, az_y + az_h - 1, GRID, 0.15);
        canvas.vline(x, el_y, el_y + el_h - 1, GRID, 0.15);
        canvas.text_centred(x, el_y + el_h + 8, &time_label(t, duration_s), DIM_TEXT, 1);
        t += step;
    }
    let unit = if duration_s >= 120.0 {
        "TIME (M:SS)"
    } else {
        "TIME (S)"
    };
    canvas.text_right(x0 + w, el_y + el_h + 22, unit, DIM_TEXT, 1);

    let loudest = points
        .iter()
        .map(|p| p.w_rms_dbfs)
        .filter(|v| v.is_finite())
        .fold(f64::NEG_INFINITY, f64::max);
    let mut drawn = 0;
    for p in points {
        let Some(d) = p.direction else { continue };
        let x = x0 as f64 + (p.time_s / duration_s).clamp(0.0, 1.0) * (w - 1) as f64 + 0.5;
        let level = scale_position(p.w_rms_dbfs as f32, (loudest - 30.0) as f32, loudest as f32);
        let colour = palette_rgb(0.3 + 0.7 * level);
        let ya = az_y as f64 + (180.0 - d.azimuth_deg) / 360.0 * (az_h - 1) as f64 + 0.5;
        let ye = el_y as f64 + (90.0 - d.elevation_deg) / 180.0 * (el_h - 1) as f64 + 0.5;
        canvas.disc(x, ya, 2.2, colour, 1.0);
        canvas.disc(x, ye, 2.2, colour, 1.0);
        drawn += 1;
    }
    if drawn == 0 {
        canvas.text_centred(
            x0 + w / 2,
            az_y + az_h / 2 - 7,
            "NO DIRECTION FOUND",
            TEXT,
            2,
        );
    }
    canvas
}

/// Per-order energy relative to W (bars) with the marks expected for an isotropic field
/// stored as SN3D, N3D or FuMa and read as `assumed`.
pub fn order_balance_chart(balance_db: &[f64], assumed: AmbiFormat) -> Canvas {
    let order = balance_db.len().saturating_sub(1).max(1);
    let (x0, y0, w, h) = (60i64, 34i64, 520i64, 230i64);
    let mut canvas = Canvas::new((x0 + w + 20) as usize, (y0 + h + 40) as usize, BACKGROUND);
    canvas.fill_rect(x0, y0, w, h, PANEL);
    let content = [
        ("SN3D", Normalization::Sn3d, MARK_SN3D),
        ("N3D", Normalization::N3d, MARK_N3D),
        ("FUMA", Normalization::MaxN, MARK_FUMA),
    ];
    let expected: Vec<Vec<Option<f64>>> = content
        .iter()
        .map(|&(_, n, _)| expected_balance_db(n, assumed.normalization, order))
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
    let y_of = |db: f64| y0 as f64 + (hi - db.clamp(lo, hi)) / (hi - lo) * (h - 1) as f64;
    let mut db = lo;
    while db <= hi + 1e-9 {
        let y = y_of(db).round() as i64;
        canvas.hline(x0, x0 + w - 1, y, GRID, if db == 0.0 { 0.6 } else { 0.2 });
        canvas.text_right(x0 - 6, y - half_text(1), &signed(db, 0), DIM_TEXT, 1);
        db += 6.0;
    }
    canvas.text(x0 - 50, y0 - 26, "DB RELATIVE TO W", DIM_TEXT, 1);
    let group = w as f64 / order as f64;
    let zero_y = y_of(0.0);
    for n in 1..=order {
        let cx = x0 as f64 + (n as f64 - 0.5) * group;
        let value = balance_db.get(n).copied().unwrap_or(f64::NEG_INFINITY);
        let bar_w = (group * 0.34).clamp(6.0, 60.0);
        let top = y_of(value.max(lo));
        let (ya, yb) = if top < zero_y {
            (top, zero_y)
        } else {
            (zero_y, top)
        };
        canvas.fill_rect(
            (cx - bar_w / 2.0).round() as i64,
            ya.round() as i64,
            bar_w.round() as i64,
            (yb - ya).round().max(1.0) as i64,
            palette_rgb(0.62),
        );
        let label = if value > -100.0 {
            signed(value, 1)
        } else {
            "EMPTY".to_string()
        };
        let label_y = if value >= 0.0 { ya - 12.0 } else { yb + 4.0 };
        canvas.text_centred(cx.round() as i64, label_y.round() as i64, &label, TEXT, 1);
        let mark_w = (group * 0.36).clamp(8.0, 70.0);
        for (k, &(_, _, colour)) in content.iter().enumerate() {
            let Some(Some(e)) = expected[k].get(n) else {
                continue;
            };
            let y = y_of(*e).round() as i64;
            let xa = (cx + bar_w / 2.0 + 4.0).round() as i64;
            let xb = xa + mark_w.round() as i64;
            match k {
                0 => {
                    canvas.hline(xa, xb, y, colour, 1.0);
                    canvas.hline(xa, xb, y + 1, colour, 1.0);
                }
                1 => {
                    canvas.dashed_hline(xa, xb, y, colour, 6, 3);
                    canvas.dashed_hline(xa, xb, y + 1, colour, 6, 3);
                }
                _ => {
                    canvas.dashed_hline(xa, xb, y, colour, 2, 2);
                    canvas.dashed_hline(xa, xb, y + 1, colour, 2, 2);
                }
            }
        }
        canvas.text_centred(cx.round() as i64, y0 + h + 8, &format!("N = {n}"), TEXT, 1);
    }
    canvas.text_centred(x0 + w / 2, y0 + h + 24, "ORDER", DIM_TEXT, 1);
    // Legend across the top.
    let mut lx = x0 + 130;
    canvas.fill_rect(lx, y0 - 24, 14, 7, palette_rgb(0.62));
    canvas.text(lx + 18, y0 - 24, "MEASURED", TEXT, 1);
    lx += 90;
    canvas.text(lx, y0 - 24, "EXPECTED IF STORED AS:", DIM_TEXT, 1);
    lx += 140;
    for (k, &(name, _, colour)) in content.iter().enumerate() {
        match k {
            0 => canvas.hline(lx, lx + 16, y0 - 21, colour, 1.0),
            1 => canvas.dashed_hline(lx, lx + 16, y0 - 21, colour, 6, 3),
            _ => canvas.dashed_hline(lx, lx + 16, y0 - 21, colour, 2, 2),
        }
        canvas.text(lx + 20, y0 - 24, name, TEXT, 1);
        lx += 20 + text_width(name) as i64 + 16;
    }
    canvas
}
