//! The status line: order, channels, sample rate, analysis load and dropped blocks.

use super::theme;
use fieldglass_dsp::engine::Snapshot;

/// Status text for a snapshot (also used by tests).
pub fn status_text(snapshot: &Snapshot) -> String {
    let health = &snapshot.health;
    format!(
        "Order {} · {} channels · {:.1} kHz · {} · analysis load {:.0}% · dropped blocks {} of {} · {:.1} s analysed",
        snapshot.order,
        snapshot.channels,
        snapshot.sample_rate_hz / 1000.0,
        snapshot.assumed_format.human_name(),
        health.analysis_load * 100.0,
        health.dropped_blocks,
        health.received_blocks + health.dropped_blocks,
        snapshot.time_s,
    )
}

pub fn draw(ui: &mut egui::Ui, snapshot: Option<&Snapshot>) {
    ui.horizontal(|ui| {
        ui.label(egui::RichText::new("Status").strong());
        match snapshot {
            None => {
                ui.label(egui::RichText::new("Waiting for audio").color(theme::TEXT_DIM));
            }
            Some(snapshot) => {
                let text = egui::RichText::new(status_text(snapshot));
                let text = if snapshot.health.dropped_blocks > 0 {
                    text.color(theme::WARNING)
                } else {
                    text.color(theme::TEXT_DIM)
                };
                ui.label(text);
            }
        }
    });
}
