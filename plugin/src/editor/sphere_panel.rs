//! "Sphere": the equirectangular energy map with grid, direction words, colour scale, source
//! markers and a pointer readout over an optional picture, plus the controls that choose what
//! the map shows: the assumed format (and a momentary comparison with the detected one),
//! band, method, hold, whole programme, range (automatic by default), time constant and view.

use super::channel_strip::capitalised;
use super::picture_layer::PictureLayerState;
use super::projection::{MapView, map_pixel_of};
use super::theme;
use super::{EditorHost, EditorSettings, Knob, Request};
use crate::params::{
    BandChoice, FormatChoice, MAP_RANGE_MAX_DB, MAP_RANGE_MIN_DB, MethodChoice,
    TIME_CONSTANT_MAX_MS, TIME_CONSTANT_MIN_MS,
};
use egui::{Color32, Rect, Sense, Stroke, pos2, vec2};
use fieldglass_dsp::beam::default_map_range_db;
use fieldglass_dsp::engine::{MapImage, MapScale, Snapshot};
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::render::{palette_rgb, render_map_rgba};
use fieldglass_dsp::wording;

/// Grid spacing over the map, degrees (the same in the report).
const GRID_STEP_DEG: f64 = wording::GRID_STEP_DEG;
/// Width of the colour scale bar and its labels, points.
const SCALE_BAR_W: f32 = 54.0;

/// GUI-side state: the map texture and what it was made from.
#[derive(Default)]
pub struct SpherePanelState {
    texture: Option<egui::TextureHandle>,
    /// (snapshot sequence, floor dB bits, ceiling dB bits) the texture shows.
    texture_key: Option<(u64, u32, u32)>,
    rgba: Vec<u8>,
}

impl SpherePanelState {
    /// Sequence number of the snapshot the texture was last made from.
    pub fn texture_sequence(&self) -> Option<u64> {
        self.texture_key.map(|k| k.0)
    }
}

/// The span of the colour scale the settings ask for, dB: with the automatic range, the
/// default of the map's method at the stream's order (`beam::default_map_range_db`, the
/// beam's highest side lobe), else the manual Map range; clamped to the control's range.
pub fn map_range_db(settings: &EditorSettings, snapshot: Option<&Snapshot>) -> f32 {
    let range_db = match snapshot {
        Some(s) if settings.auto_map_range && s.order > 0 => {
            default_map_range_db(s.map.method, s.order) as f32
        }
        Some(_) | None if settings.auto_map_range => {
            default_map_range_db(settings.method.method(), 1) as f32
        }
        _ => settings.map_range_db,
    };
    range_db.clamp(MAP_RANGE_MIN_DB, MAP_RANGE_MAX_DB)
}

/// The format the momentary comparison would show: the detected one, when the check is ready,
/// disagrees with the assumption, and the stream can be read as it.
pub fn comparison_format(snapshot: &Snapshot) -> Option<AmbiFormat> {
    let check = &snapshot.format_check;
    check
        .detected
        .filter(|&d| check.ready && d != snapshot.assumed_format)
        .filter(|d| d.check_order(snapshot.order).is_ok())
}

/// Top and bottom of the colour scale for `map` spanning `range_db` below its top, dB.
pub fn colour_scale_db(map: &MapImage, range_db: f32) -> (f32, f32) {
    let ceiling_db = if map.max_db.is_finite() {
        map.max_db
    } else {
        0.0
    };
    let range_db = if range_db.is_finite() {
        range_db.clamp(MAP_RANGE_MIN_DB, MAP_RANGE_MAX_DB)
    } else {
        MAP_RANGE_MAX_DB
    };
    (ceiling_db - range_db, ceiling_db)
}

/// Readout text of a map value under the pointer.
pub fn readout_text(
    azimuth_deg: f64,
    elevation_deg: f64,
    value_db: Option<f32>,
    unit: &str,
) -> String {
    let direction = wording::direction(azimuth_deg, elevation_deg);
    match value_db {
        Some(v) if v.is_finite() => format!(
            "Pointer: {direction}, {} {unit}",
            theme::format_db(v as f64)
        ),
        _ => format!("Pointer: {direction}"),
    }
}

fn unit_of(map: &MapImage) -> &'static str {
    match map.scale {
        MapScale::RelativeDb => "dB",
        MapScale::AbsoluteDbfs => "dBFS",
    }
}

fn band_text(band: BandChoice, edges_hz: Option<[f64; 2]>) -> String {
    let hz = |f: f64| {
        if f >= 1000.0 {
            format!("{:.1} kHz", f / 1000.0)
        } else {
            format!("{f:.0} Hz")
        }
    };
    match (band, edges_hz) {
        (BandChoice::Full, _) => "Full".to_owned(),
        (BandChoice::Low, Some([low, _])) => format!("Low (below {})", hz(low)),
        (BandChoice::Mid, Some([low, high])) => format!("Mid ({}–{})", hz(low), hz(high)),
        (BandChoice::High, Some([_, high])) => format!("High (above {})", hz(high)),
        (BandChoice::Low, None) => "Low".to_owned(),
        (BandChoice::Mid, None) => "Mid".to_owned(),
        (BandChoice::High, None) => "High".to_owned(),
    }
}

fn method_text(method: MethodChoice) -> &'static str {
    method.method().human_name()
}

/// Width of the view sliders, so a row of four fits the panel at the default window size.
const SLIDER_WIDTH: f32 = 64.0;

/// A label followed by its control, announced under the label's name (AccessKit). Both go
/// straight into the (wrapping) row, so a narrow panel wraps instead of overflowing.
fn labelled(
    ui: &mut egui::Ui,
    text: &str,
    add: impl FnOnce(&mut egui::Ui) -> egui::Response,
) -> egui::Response {
    let label = ui.label(text);
    add(ui).labelled_by(label.id)
}

fn format_text(choice: FormatChoice) -> &'static str {
    choice.format().human_name()
}

fn draw_controls(ui: &mut egui::Ui, snapshot: Option<&Snapshot>, host: &mut dyn EditorHost) {
    let settings = host.settings();
    let edges_hz = snapshot.map(|s| s.band_edges_hz);
    ui.horizontal_wrapped(|ui| {
        let mut format = settings.assumed_format;
        let order = snapshot.map(|s| s.order).filter(|&o| o > 0);
        labelled(ui, "Assumed format", |ui| {
            egui::ComboBox::from_id_salt("fieldglass_format")
                .selected_text(format_text(format))
                .show_ui(ui, |ui| {
                    for choice in FormatChoice::allowed_for(order) {
                        ui.selectable_value(&mut format, choice, format_text(choice));
                    }
                })
                .response
        });
        if format != settings.assumed_format {
            host.set_assumed_format(format);
        }
        draw_compare_button(ui, snapshot, host, &settings);
        let mut band = settings.band;
        labelled(ui, "Band", |ui| {
            egui::ComboBox::from_id_salt("fieldglass_band")
                .selected_text(band_text(band, edges_hz))
                .show_ui(ui, |ui| {
                    for choice in [
                        BandChoice::Full,
                        BandChoice::Low,
                        BandChoice::Mid,
                        BandChoice::High,
                    ] {
                        ui.selectable_value(&mut band, choice, band_text(choice, edges_hz));
                    }
                })
                .response
        });
        if band != settings.band {
            host.set_band(band);
        }
        let mut method = settings.method;
        labelled(ui, "Map method", |ui| {
            egui::ComboBox::from_id_salt("fieldglass_method")
                .selected_text(method_text(method))
                .show_ui(ui, |ui| {
                    for choice in [
                        MethodChoice::Basic,
                        MethodChoice::MaxRe,
                        MethodChoice::InPhase,
                        MethodChoice::Mvdr,
                        MethodChoice::Music,
                    ] {
                        ui.selectable_value(&mut method, choice, method_text(choice));
                    }
                })
                .response
        });
        if method != settings.method {
            host.set_method(method);
        }
        let mut view = settings.view;
        ui.checkbox(&mut view.hold, "Hold");
        ui.checkbox(
            &mut view.show_integrated,
            capitalised(wording::WHOLE_PROGRAMME),
        );
        if ui
            .button("Reset whole programme")
            .on_hover_text("Starts the whole-programme map and figures afresh")
            .clicked()
        {
            host.request(Request::ResetSessionMap);
        }
        if view != settings.view {
            host.set_view(view);
        }
    });
    ui.horizontal_wrapped(|ui| {
        ui.spacing_mut().slider_width = SLIDER_WIDTH;
        let mut automatic = settings.auto_map_range;
        // With the automatic range the slider shows (but does not take) the value in use.
        let mut range_db = map_range_db(&settings, snapshot);
        let mut time_constant_ms = settings.time_constant_ms;
        let mut yaw_deg = settings.view_yaw_deg;
        let mut pitch_deg = settings.view_pitch_deg;
        let range = egui::Slider::new(&mut range_db, MAP_RANGE_MIN_DB..=MAP_RANGE_MAX_DB)
            .step_by(1.0)
            .suffix(" dB");
        if labelled(ui, "Map range", |ui| ui.add_enabled(!automatic, range)).changed() {
            host.set_knob(Knob::MapRangeDb, range_db);
        }
        if ui
            .checkbox(&mut automatic, "Automatic range")
            .on_hover_text(
                "Range from the map method and order: the depth of the beam's highest side \
                 lobe, so side lobes stay dark",
            )
            .changed()
        {
            host.set_auto_map_range(automatic);
        }
        let time_constant = egui::Slider::new(
            &mut time_constant_ms,
            TIME_CONSTANT_MIN_MS..=TIME_CONSTANT_MAX_MS,
        )
        .logarithmic(true)
        .fixed_decimals(0)
        .suffix(" ms");
        if labelled(ui, "Time constant", |ui| ui.add(time_constant)).changed() {
            host.set_knob(Knob::TimeConstantMs, time_constant_ms);
        }
        let yaw = egui::Slider::new(&mut yaw_deg, -180.0..=180.0)
            .step_by(1.0)
            .suffix("°");
        if labelled(ui, "View yaw", |ui| ui.add(yaw)).changed() {
            host.set_knob(Knob::ViewYawDeg, yaw_deg);
        }
        let pitch = egui::Slider::new(&mut pitch_deg, -90.0..=90.0)
            .step_by(1.0)
            .suffix("°");
        let pitch_changed = labelled(ui, "View pitch", |ui| {
            ui.add(pitch).on_hover_text(
                "Shifts the picture up or down (an approximation of tilting the view)",
            )
        })
        .changed();
        if pitch_changed {
            host.set_knob(Knob::ViewPitchDeg, pitch_deg);
        }
    });
}

/// "Compare with detected": while the button is held, the map reads the input as the
/// detected format; on release it returns to the assumed one. Nothing changes the assumption.
fn draw_compare_button(
    ui: &mut egui::Ui,
    snapshot: Option<&Snapshot>,
    host: &mut dyn EditorHost,
    settings: &EditorSettings,
) {
    let target = snapshot.and_then(comparison_format);
    let hint = match target {
        Some(format) => format!(
            "Hold to see the map read as {} (the detected format); release to return. \
             The assumed format does not change.",
            format.human_name()
        ),
        None => "Available when the format check detects another format".to_owned(),
    };
    let button = ui
        .add_enabled(target.is_some(), egui::Button::new("Compare with detected"))
        .on_hover_text(hint)
        .on_disabled_hover_text("Available when the format check detects another format");
    let held = target.filter(|_| button.is_pointer_button_down_on());
    if held != settings.map_format_override {
        host.set_map_format_override(held);
    }
}

/// Re-renders the texture only when the snapshot or the colour scale changed.
fn update_texture(
    ui: &egui::Ui,
    state: &mut SpherePanelState,
    snapshot: &Snapshot,
    floor_db: f32,
    ceiling_db: f32,
) {
    let map = &snapshot.map;
    let key = (snapshot.sequence, floor_db.to_bits(), ceiling_db.to_bits());
    if state.texture.is_some() && state.texture_key == Some(key) {
        return;
    }
    render_map_rgba(map, floor_db, ceiling_db, &mut state.rgba);
    let image = egui::ColorImage::from_rgba_unmultiplied([map.width, map.height], &state.rgba);
    let options = egui::TextureOptions {
        wrap_mode: egui::TextureWrapMode::Repeat,
        ..egui::TextureOptions::LINEAR
    };
    match state.texture.as_mut() {
        Some(texture) if texture.size() == [map.width, map.height] => texture.set(image, options),
        _ => state.texture = Some(ui.ctx().load_texture("fieldglass_map", image, options)),
    }
    state.texture_key = Some(key);
}

pub fn draw(
    ui: &mut egui::Ui,
    state: &mut SpherePanelState,
    picture: &PictureLayerState,
    snapshot: Option<&Snapshot>,
    host: &mut dyn EditorHost,
) {
    ui.horizontal(|ui| {
        ui.heading("Sphere");
        if let Some(s) = snapshot.filter(|s| s.map_format != s.assumed_format) {
            ui.label(
                egui::RichText::new(format!(
                    "Map read as {} for comparison",
                    s.map_format.human_name()
                ))
                .color(theme::WARNING),
            );
        }
    });
    draw_controls(ui, snapshot, host);
    let settings = host.settings();
    let Some(snapshot) = snapshot else {
        ui.label(egui::RichText::new("Waiting for audio").color(theme::TEXT_DIM));
        return;
    };
    let map = &snapshot.map;
    let has_map = map.width > 0 && map.height > 0 && map.values_db.len() >= map.width * map.height;
    let view = MapView::new(settings.view_yaw_deg as f64, settings.view_pitch_deg as f64);
    let (floor_db, ceiling_db) = colour_scale_db(map, map_range_db(&settings, Some(snapshot)));

    // Map rectangle: 2:1, fitted into the room left for it (two text lines below).
    let room = ui.available_size() - vec2(SCALE_BAR_W, 48.0);
    let map_w = room.x.min(room.y * 2.0).max(120.0);
    let (outer, response) =
        ui.allocate_exact_size(vec2(map_w + SCALE_BAR_W, map_w / 2.0), Sense::hover());
    let map_rect = Rect::from_min_size(outer.min, vec2(map_w, map_w / 2.0));
    let bar_rect = Rect::from_min_max(
        pos2(map_rect.right() + 8.0, map_rect.top()),
        pos2(map_rect.right() + 22.0, map_rect.bottom()),
    );
    let painter = ui.painter_at(map_rect);
    painter.rect_filled(map_rect, 0.0, theme::BACKGROUND);

    let (u0, v_offset) = view.texture_placement();
    let image_rect = map_rect.translate(vec2(0.0, v_offset as f32 * map_rect.height()));
    // The picture first, turned by its offset and the view yaw alike; the map over it at
    // 1 − opacity, the same blend as `picture::composite_under`.
    let picture_settings = host.picture_settings();
    let mut map_tint = Color32::WHITE;
    if let Some(loaded) = picture.loaded()
        && picture_settings.opacity > 0.0
    {
        let pu0 = u0 as f32 + picture_settings.yaw_offset_deg / 360.0;
        let uv = Rect::from_min_max(pos2(pu0, 0.0), pos2(pu0 + 1.0, 1.0));
        painter.image(loaded.texture.id(), image_rect, uv, Color32::WHITE);
        map_tint = Color32::WHITE.gamma_multiply(1.0 - picture_settings.opacity);
    }
    if has_map {
        update_texture(ui, state, snapshot, floor_db, ceiling_db);
        if let Some(texture) = &state.texture {
            let uv = Rect::from_min_max(pos2(u0 as f32, 0.0), pos2(u0 as f32 + 1.0, 1.0));
            painter.image(texture.id(), image_rect, uv, map_tint);
        }
    } else {
        painter.text(
            map_rect.center(),
            egui::Align2::CENTER_CENTER,
            "No map yet",
            theme::small_font(),
            theme::TEXT_DIM,
        );
    }

    let to_screen = |azimuth_deg: f64, elevation_deg: f64| {
        let (u, v) = view.direction_to_uv(azimuth_deg, elevation_deg);
        pos2(
            map_rect.left() + u as f32 * map_rect.width(),
            map_rect.top() + v as f32 * map_rect.height(),
        )
    };
    if settings.view.show_grid {
        draw_grid(&painter, map_rect, &to_screen);
    }
    if settings.view.show_labels {
        draw_labels(&painter, map_rect, &to_screen);
    }
    if settings.view.show_sources {
        for (rank, source) in snapshot.sources.iter().enumerate() {
            let d = source.direction;
            let p = to_screen(d.azimuth_deg, d.elevation_deg);
            let radius = if rank == 0 { 7.0 } else { 5.0 };
            painter.circle_stroke(p, radius, Stroke::new(1.5, theme::SOURCE_MARK));
            painter.circle_filled(p, 1.5, theme::SOURCE_MARK);
            // Keep the label inside the map: flip it left near the right edge, down near the top.
            let flip_left = p.x > map_rect.right() - MARKER_LABEL_ROOM;
            let flip_down = p.y < map_rect.top() + 16.0;
            let offset = vec2(
                if flip_left {
                    -(radius + 3.0)
                } else {
                    radius + 3.0
                },
                if flip_down {
                    radius + 2.0
                } else {
                    -radius - 2.0
                },
            );
            let anchor = match (flip_left, flip_down) {
                (false, false) => egui::Align2::LEFT_BOTTOM,
                (true, false) => egui::Align2::RIGHT_BOTTOM,
                (false, true) => egui::Align2::LEFT_TOP,
                (true, true) => egui::Align2::RIGHT_TOP,
            };
            painter.text(
                p + offset,
                anchor,
                wording::direction(d.azimuth_deg, d.elevation_deg),
                theme::small_font(),
                theme::SOURCE_MARK,
            );
        }
    }
    let mut state_words = Vec::new();
    if snapshot.frozen {
        state_words.push("Held".to_owned());
    }
    if map.integrated {
        state_words.push(capitalised(wording::WHOLE_PROGRAMME));
    }
    if snapshot.map_format != snapshot.assumed_format {
        state_words.push(format!(
            "Read as {} for comparison",
            snapshot.map_format.human_name()
        ));
    }
    if !state_words.is_empty() {
        // Above the azimuth numbers along the bottom edge, where markers are rare.
        painter.text(
            map_rect.left_bottom() + vec2(6.0, -20.0),
            egui::Align2::LEFT_BOTTOM,
            state_words.join(" · "),
            theme::small_font(),
            theme::TEXT,
        );
    }
    draw_scale_bar(ui, bar_rect, floor_db, ceiling_db, unit_of(map));

    // Pointer readout.
    let readout = response
        .hover_pos()
        .filter(|p| map_rect.contains(*p))
        .and_then(|p| {
            let u = ((p.x - map_rect.left()) / map_rect.width()) as f64;
            let v = ((p.y - map_rect.top()) / map_rect.height()) as f64;
            view.uv_to_direction(u, v)
        })
        .map(|(az, el)| {
            let value = map_pixel_of(map.width, map.height, az, el)
                .and_then(|(c, r)| map.values_db.get(r * map.width + c).copied());
            readout_text(az, el, value, unit_of(map))
        })
        .unwrap_or_else(|| "Pointer: outside the map".to_owned());
    ui.horizontal(|ui| {
        ui.label(egui::RichText::new(readout).color(theme::TEXT_DIM));
        ui.with_layout(egui::Layout::right_to_left(egui::Align::Center), |ui| {
            draw_overlay_switches(ui, host);
        });
    });

    ui.horizontal_wrapped(|ui| {
        ui.label(egui::RichText::new("Sources").strong());
        if snapshot.sources.is_empty() {
            ui.label(egui::RichText::new("none found").color(theme::TEXT_DIM));
        }
        // One line's worth; the markers on the map show them all.
        for source in snapshot.sources.iter().take(LISTED_SOURCES) {
            let d = source.direction;
            ui.label(format!(
                "{} ({} dB)",
                wording::direction(d.azimuth_deg, d.elevation_deg),
                theme::format_db(source.level_db)
            ));
        }
        let unlisted = snapshot.sources.len().saturating_sub(LISTED_SOURCES);
        if unlisted > 0 {
            ui.label(
                egui::RichText::new(format!("and {unlisted} more on the map"))
                    .color(theme::TEXT_DIM),
            );
        }
    });
}

/// Sources named in the line under the map.
const LISTED_SOURCES: usize = 4;

/// Room a marker label needs to the right of its marker, in points.
const MARKER_LABEL_ROOM: f32 = 100.0;

/// The map's overlay switches (grid, labels, markers), drawn right to left.
fn draw_overlay_switches(ui: &mut egui::Ui, host: &mut dyn EditorHost) {
    let settings = host.settings();
    let mut view = settings.view;
    ui.checkbox(&mut view.show_sources, "Markers");
    ui.checkbox(&mut view.show_labels, "Labels");
    ui.checkbox(&mut view.show_grid, "Grid");
    ui.label(egui::RichText::new("Show").color(theme::TEXT_DIM));
    if view != settings.view {
        host.set_view(view);
    }
}

fn draw_grid(painter: &egui::Painter, rect: Rect, to_screen: &dyn Fn(f64, f64) -> egui::Pos2) {
    let meridians = (360.0 / GRID_STEP_DEG) as i32;
    for i in 0..meridians {
        let azimuth_deg = -180.0 + GRID_STEP_DEG * i as f64;
        let x = to_screen(azimuth_deg, 0.0).x;
        let strong = azimuth_deg == 0.0;
        painter.vline(
            x,
            rect.y_range(),
            Stroke::new(if strong { 1.2 } else { 0.6 }, theme::GRID),
        );
    }
    let mut elevation_deg = -90.0 + GRID_STEP_DEG;
    while elevation_deg < 90.0 {
        let y = to_screen(0.0, elevation_deg).y;
        let strong = elevation_deg == 0.0;
        painter.hline(
            rect.x_range(),
            y,
            Stroke::new(if strong { 1.2 } else { 0.6 }, theme::GRID),
        );
        elevation_deg += GRID_STEP_DEG;
    }
}

fn draw_labels(painter: &egui::Painter, rect: Rect, to_screen: &dyn Fn(f64, f64) -> egui::Pos2) {
    let font = theme::small_font();
    let meridians = (360.0 / GRID_STEP_DEG) as i32;
    for i in 0..meridians {
        let azimuth_deg = -150.0 + GRID_STEP_DEG * i as f64;
        let x = to_screen(azimuth_deg, 0.0).x;
        painter.text(
            pos2(x + 2.0, rect.bottom() - 2.0),
            egui::Align2::LEFT_BOTTOM,
            format!("{}°", wording::degrees(azimuth_deg)),
            font.clone(),
            theme::TEXT_DIM,
        );
    }
    for (elevation_deg, word, anchor) in [
        (90.0, wording::UP, egui::Align2::LEFT_TOP),
        (-90.0, wording::DOWN, egui::Align2::LEFT_BOTTOM),
    ] {
        let y = to_screen(0.0, elevation_deg).y;
        // Below the direction words along the top edge, above the azimuth numbers along the
        // bottom edge.
        let y = y.clamp(rect.top() + 16.0, rect.bottom() - 14.0);
        painter.text(
            pos2(rect.left() + 2.0, y),
            anchor,
            word,
            font.clone(),
            theme::TEXT,
        );
    }
    for elevation_deg in [-60.0, -30.0, 0.0, 30.0, 60.0] {
        let y = to_screen(0.0, elevation_deg).y;
        painter.text(
            pos2(rect.left() + 2.0, y - 1.0),
            egui::Align2::LEFT_BOTTOM,
            format!("{:+}°", elevation_deg as i32),
            font.clone(),
            theme::TEXT_DIM,
        );
    }
    for (azimuth_deg, word) in [
        (0.0, wording::FRONT),
        (90.0, wording::LEFT),
        (-90.0, wording::RIGHT),
        (180.0, wording::BACK),
    ] {
        let x = to_screen(azimuth_deg, 0.0).x;
        // "back" sits on the seam; keep it inside the rectangle.
        let x = x.clamp(rect.left() + 24.0, rect.right() - 24.0);
        painter.text(
            pos2(x, rect.top() + 3.0),
            egui::Align2::CENTER_TOP,
            word,
            font.clone(),
            theme::TEXT,
        );
    }
}

fn draw_scale_bar(ui: &egui::Ui, bar: Rect, floor_db: f32, ceiling_db: f32, unit: &str) {
    let painter = ui.painter();
    let steps = 64;
    for i in 0..steps {
        let t0 = i as f32 / steps as f32;
        let t1 = (i + 1) as f32 / steps as f32;
        let [r, g, b] = palette_rgb((t0 + t1) / 2.0);
        let y0 = bar.bottom() - bar.height() * t1;
        let y1 = bar.bottom() - bar.height() * t0;
        painter.rect_filled(
            Rect::from_x_y_ranges(bar.x_range(), y0..=y1),
            0.0,
            Color32::from_rgb(r, g, b),
        );
    }
    painter.rect_stroke(
        bar,
        0.0,
        Stroke::new(0.5, theme::GRID),
        egui::StrokeKind::Outside,
    );
    let span_db = ceiling_db - floor_db;
    let tick_step_db = if span_db > 30.0 { 10.0 } else { 5.0 };
    let mut level_db = ceiling_db;
    while level_db >= floor_db - 0.01 {
        let t = (level_db - floor_db) / span_db.max(1e-6);
        let y = bar.bottom() - bar.height() * t;
        painter.text(
            pos2(bar.right() + 3.0, y),
            egui::Align2::LEFT_CENTER,
            theme::format_db(level_db as f64),
            theme::tiny_font(),
            theme::TEXT_DIM,
        );
        level_db -= tick_step_db;
    }
    painter.text(
        pos2(bar.center().x, bar.bottom() + 2.0),
        egui::Align2::CENTER_TOP,
        unit,
        theme::tiny_font(),
        theme::TEXT_DIM,
    );
}
