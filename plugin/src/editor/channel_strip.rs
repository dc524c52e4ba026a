//! "Channels": one meter per input channel, grouped by ambisonic order, W drawn as the
//! reference the others are compared with.
//!
//! The bar is the channel's short-window level after conversion to SN3D (the level the
//! louder-than-W test compares with W's); the thin tick is the raw sample-peak hold (what
//! clips). A channel louder than W by more than the tolerance turns amber and is named in a
//! warning line; a channel that has clipped shows a red box on top (click the row of boxes to
//! clear them). Under each meter: the channel's number (1-based, file or host order) and, in
//! dim, its ACN; text names channels as "channel 7 (ACN 6)" (`wording::channel_label`).

use super::{EditorHost, Knob, Request, theme};
use egui::{Rect, Sense, Stroke, pos2, vec2};
use fieldglass_dsp::engine::{ChannelStatus, Snapshot};
use fieldglass_dsp::wording;

/// Meter scale, dBFS.
const METER_MIN_DB: f64 = -60.0;
const METER_MAX_DB: f64 = 0.0;

/// Warning line naming every channel louder than W, or `None` when there is none:
/// "Louder than W: channel 7 (ACN 6)" / "Louder than W: channels 3 (ACN 2), 4 (ACN 3)".
pub fn over_omni_text(snapshot: &Snapshot) -> Option<String> {
    let inputs: Vec<usize> = snapshot
        .channel_status
        .iter()
        .filter(|c| c.over_omni)
        .map(|c| c.input_index)
        .collect();
    (!inputs.is_empty()).then(|| {
        format!(
            "{}: {}",
            capitalised(wording::LOUDER_THAN_W),
            wording::channel_list(&inputs, |i| acn_of(snapshot, i))
        )
    })
}

/// The ACN the snapshot gives input channel `input_index` (None for extra channels).
pub fn acn_of(snapshot: &Snapshot, input_index: usize) -> Option<usize> {
    snapshot.channel_status.get(input_index).and_then(|c| c.acn)
}

/// "channel 7 (ACN 6)", "channel 17 (extra)".
pub fn channel_name(status: &ChannelStatus) -> String {
    wording::channel_label(status.input_index, status.acn)
}

/// The wording's phrase at the start of a line.
pub fn capitalised(phrase: &str) -> String {
    let mut chars = phrase.chars();
    chars
        .next()
        .map(|first| first.to_uppercase().chain(chars).collect())
        .unwrap_or_default()
}

fn level_y(rect: Rect, level_db: f64) -> f32 {
    let t =
        (level_db.clamp(METER_MIN_DB, METER_MAX_DB) - METER_MIN_DB) / (METER_MAX_DB - METER_MIN_DB);
    rect.bottom() - rect.height() * t as f32
}

/// Channels in display order: spatial ones by ACN, then extras by input index.
fn display_order(snapshot: &Snapshot) -> Vec<&ChannelStatus> {
    let mut channels: Vec<&ChannelStatus> = snapshot.channel_status.iter().collect();
    channels.sort_by_key(|c| {
        (
            c.acn.is_none(),
            c.acn.unwrap_or(c.input_index),
            c.input_index,
        )
    });
    channels
}

pub fn draw(ui: &mut egui::Ui, snapshot: Option<&Snapshot>, host: &mut dyn EditorHost) {
    ui.horizontal(|ui| {
        ui.heading("Channels");
        let mut tolerance_db = host.settings().over_omni_tolerance_db;
        let slider = egui::Slider::new(
            &mut tolerance_db,
            crate::params::TOLERANCE_MIN_DB..=crate::params::TOLERANCE_MAX_DB,
        )
        .step_by(0.1)
        .suffix(" dB");
        let label = ui.label("Louder-than-W tolerance");
        if ui.add(slider).labelled_by(label.id).changed() {
            host.set_knob(Knob::OverOmniToleranceDb, tolerance_db);
        }
        if ui.button("Reset clips").clicked() {
            host.request(Request::ResetClips);
        }
    });
    let Some(snapshot) = snapshot else {
        ui.label(egui::RichText::new("Waiting for audio").color(theme::TEXT_DIM));
        return;
    };
    match over_omni_text(snapshot) {
        Some(text) => {
            ui.label(egui::RichText::new(text).color(theme::WARNING).strong());
        }
        None => {
            ui.label(egui::RichText::new("No channel louder than W").color(theme::TEXT_DIM));
        }
    }
    draw_strip(ui, snapshot, host);
}

fn draw_strip(ui: &mut egui::Ui, snapshot: &Snapshot, host: &mut dyn EditorHost) {
    let channels = display_order(snapshot);
    if channels.is_empty() {
        return;
    }
    let size = vec2(ui.available_width(), ui.available_height().max(90.0));
    let (rect, strip_response) = ui.allocate_exact_size(size, Sense::hover());
    let painter = ui.painter_at(rect);

    // Vertical layout: order labels, clip boxes, meters, channel numbers over ACNs.
    let order_label_h = 12.0;
    let clip_h = 7.0;
    let index_h = 22.0;
    let scale_w = 26.0;
    let meters_rect = Rect::from_min_max(
        pos2(
            rect.left() + scale_w,
            rect.top() + order_label_h + clip_h + 3.0,
        ),
        pos2(rect.right(), rect.bottom() - index_h),
    );
    // Columns: one per channel, plus a gap between order groups.
    let group_of = |c: &ChannelStatus| c.order.unwrap_or(usize::MAX);
    let gaps = channels
        .windows(2)
        .filter(|w| group_of(w[0]) != group_of(w[1]))
        .count();
    let gap_w = 6.0;
    let column_w = ((meters_rect.width() - gap_w * gaps as f32) / channels.len() as f32).max(2.0);
    let bar_w = (column_w - 2.0).max(1.5);

    // Captions of the two rows under the meters, left of them.
    for (row, caption) in [(1.0, "ch"), (11.0, "ACN")] {
        painter.text(
            pos2(rect.left() + scale_w - 4.0, meters_rect.bottom() + row),
            egui::Align2::RIGHT_TOP,
            caption,
            theme::tiny_font(),
            theme::TEXT_DIM,
        );
    }

    // Scale on the left.
    for level_db in [0.0, -12.0, -24.0, -36.0, -48.0, -60.0] {
        let y = level_y(meters_rect, level_db);
        painter.text(
            pos2(rect.left() + scale_w - 4.0, y),
            egui::Align2::RIGHT_CENTER,
            format!("{level_db:.0}"),
            theme::tiny_font(),
            theme::TEXT_DIM,
        );
        painter.hline(
            meters_rect.x_range(),
            y,
            Stroke::new(0.5, theme::METER_BACK),
        );
    }

    let w_level_db = channels
        .iter()
        .find(|c| c.acn == Some(0))
        .map(|c| c.sn3d_level_dbfs);
    let clip_row = Rect::from_min_max(
        pos2(meters_rect.left(), rect.top() + order_label_h),
        pos2(meters_rect.right(), rect.top() + order_label_h + clip_h),
    );
    let pointer = ui.ctx().pointer_hover_pos();
    let mut hovered: Option<&ChannelStatus> = None;
    let mut x = meters_rect.left();
    let mut group_start_x = x;
    for (i, &channel) in channels.iter().enumerate() {
        if i > 0 && group_of(channels[i - 1]) != group_of(channel) {
            draw_group_label(&painter, channels[i - 1], group_start_x, x, rect.top());
            painter.vline(
                x + gap_w / 2.0,
                rect.top()..=meters_rect.bottom(),
                Stroke::new(1.0, theme::GRID),
            );
            x += gap_w;
            group_start_x = x;
        }
        let column = Rect::from_min_max(
            pos2(x + (column_w - bar_w) / 2.0, meters_rect.top()),
            pos2(x + (column_w + bar_w) / 2.0, meters_rect.bottom()),
        );
        draw_meter(&painter, column, channel, clip_row);
        // The channel's number for people, and under it its ACN ("x" for extra channels).
        painter.text(
            pos2(column.center().x, meters_rect.bottom() + 1.0),
            egui::Align2::CENTER_TOP,
            (channel.input_index + 1).to_string(),
            theme::tiny_font(),
            if channel.acn == Some(0) {
                theme::REFERENCE
            } else {
                theme::TEXT
            },
        );
        painter.text(
            pos2(column.center().x, meters_rect.bottom() + 11.0),
            egui::Align2::CENTER_TOP,
            channel
                .acn
                .map(|a| a.to_string())
                .unwrap_or_else(|| "x".to_owned()),
            theme::tiny_font(),
            theme::TEXT_DIM,
        );
        if pointer.is_some_and(|p| {
            p.x >= x && p.x < x + column_w && p.y >= rect.top() && p.y <= rect.bottom()
        }) {
            hovered = Some(channel);
        }
        x += column_w;
    }
    if let Some(last) = channels.last() {
        draw_group_label(&painter, last, group_start_x, x, rect.top());
    }

    // W's level as a reference line across the strip.
    if let Some(w_db) = w_level_db.filter(|&w| w > METER_MIN_DB) {
        let y = level_y(meters_rect, w_db);
        painter.hline(
            meters_rect.x_range(),
            y,
            Stroke::new(1.0, theme::REFERENCE.gamma_multiply(0.6)),
        );
    }

    let clip_response = ui.interact(
        clip_row,
        ui.scope_id().with("fieldglass_clip_row"),
        Sense::click(),
    );
    if clip_response
        .on_hover_text("Click to clear the clip marks")
        .clicked()
    {
        host.request(Request::ResetClips);
    }
    if let Some(channel) = hovered {
        strip_response.on_hover_text_at_pointer(channel_tooltip(channel));
    }
}

fn draw_group_label(painter: &egui::Painter, channel: &ChannelStatus, x0: f32, x1: f32, top: f32) {
    let text = match channel.order {
        Some(order) if x1 - x0 >= 44.0 => format!("order {order}"),
        Some(order) => order.to_string(),
        None => "extra".to_owned(),
    };
    painter.text(
        pos2((x0 + x1) / 2.0, top),
        egui::Align2::CENTER_TOP,
        text,
        theme::tiny_font(),
        theme::TEXT_DIM,
    );
}

fn draw_meter(painter: &egui::Painter, column: Rect, channel: &ChannelStatus, clip_row: Rect) {
    let is_w = channel.acn == Some(0);
    painter.rect_filled(column, 0.0, theme::METER_BACK);
    let colour = if channel.over_omni {
        theme::WARNING
    } else if is_w {
        theme::REFERENCE
    } else {
        theme::METER
    };
    let level_db = channel.sn3d_level_dbfs;
    if level_db > METER_MIN_DB {
        let bar = Rect::from_min_max(pos2(column.left(), level_y(column, level_db)), column.max);
        painter.rect_filled(bar, 0.0, colour);
    }
    if is_w {
        painter.rect_stroke(
            column.expand(1.0),
            0.0,
            Stroke::new(1.0, theme::REFERENCE),
            egui::StrokeKind::Outside,
        );
    }
    let hold_db = channel.reading.peak_hold_dbfs;
    if hold_db > METER_MIN_DB {
        let y = level_y(column, hold_db);
        painter.hline(column.x_range(), y, Stroke::new(1.5, theme::TEXT));
    }
    if channel.silent {
        painter.line_segment(
            [column.left_bottom(), column.right_top()],
            Stroke::new(1.0, theme::TEXT_DIM),
        );
    }
    let clip_box = Rect::from_x_y_ranges(column.x_range(), clip_row.y_range());
    let clipped = channel.reading.clip_count > 0 || channel.reading.invalid_sample_count > 0;
    painter.rect_filled(
        clip_box,
        1.0,
        if clipped {
            theme::CLIP
        } else {
            theme::METER_BACK
        },
    );
    if channel.over_omni {
        painter.rect_stroke(
            column.expand(1.0),
            0.0,
            Stroke::new(1.5, theme::WARNING),
            egui::StrokeKind::Outside,
        );
    }
}

fn channel_tooltip(channel: &ChannelStatus) -> String {
    let place = match (channel.order, channel.degree) {
        (Some(n), Some(m)) => format!(" (order {n}, degree {m})"),
        _ => " (not spatial)".to_owned(),
    };
    let r = &channel.reading;
    let mut text = format!(
        "{}{place}\nLevel (SN3D) {} dBFS\nSample peak {} dBFS, hold {} dBFS\nTrue peak {} dBTP\nRMS {} dBFS\nClips {}",
        capitalised(&channel_name(channel)),
        theme::format_db(channel.sn3d_level_dbfs),
        theme::format_db(r.sample_peak_dbfs),
        theme::format_db(r.peak_hold_dbfs),
        theme::format_db(r.true_peak_dbtp),
        theme::format_db(r.rms_dbfs),
        r.clip_count,
    );
    if r.invalid_sample_count > 0 {
        text.push_str(&format!(", invalid samples {}", r.invalid_sample_count));
    }
    if channel.over_omni {
        text.push_str(&format!(
            "\n{} by more than the tolerance",
            capitalised(wording::LOUDER_THAN_W)
        ));
    }
    if channel.silent {
        text.push_str("\nSilent while W carries signal");
    }
    text
}
