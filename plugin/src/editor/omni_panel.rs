//! "Omni": gain staging of W — sample peak, true peak, RMS and W loudness (BS.1770-4 as a
//! mono programme), with a loudness reset and the product's caution in small text.

use super::{EditorHost, Request, theme};
use fieldglass_dsp::engine::Snapshot;

/// The caution DESIGN.md asks the product to show.
pub const CAUTION: &str = "Loud monitoring can damage hearing. These meters do not replace a \
    calibrated monitoring chain. Loudness and peak limits come from each delivery's \
    specification and local rules: this tool reports, it does not certify.";

fn lufs_text(value: Option<f64>) -> String {
    match value {
        Some(v) if v.is_finite() && v > -150.0 => format!("{v:.1} LUFS"),
        _ => "—".to_owned(),
    }
}

pub fn draw(ui: &mut egui::Ui, snapshot: Option<&Snapshot>, host: &mut dyn EditorHost) {
    ui.heading("Omni");
    let Some(snapshot) = snapshot else {
        ui.label(egui::RichText::new("Waiting for audio").color(theme::TEXT_DIM));
        ui.label(egui::RichText::new(CAUTION).small().color(theme::TEXT_DIM));
        return;
    };
    let omni = &snapshot.omni;
    egui::Grid::new("fieldglass_omni_grid")
        .num_columns(3)
        .spacing([12.0, 3.0])
        .show(ui, |ui| {
            ui.label("W sample peak");
            ui.label(format!("{} dBFS", theme::format_db(omni.sample_peak_dbfs)));
            ui.label("");
            ui.end_row();
            ui.label("W true peak");
            let true_peak =
                egui::RichText::new(format!("{} dBTP", theme::format_db(omni.true_peak_dbtp)));
            ui.label(if omni.true_peak_dbtp > 0.0 {
                true_peak.color(theme::CLIP)
            } else {
                true_peak
            });
            ui.label(
                egui::RichText::new(format!(
                    "max {} dBTP",
                    theme::format_db(omni.max_true_peak_dbtp)
                ))
                .color(theme::TEXT_DIM),
            );
            ui.end_row();
            ui.label("W RMS");
            ui.label(format!("{} dBFS", theme::format_db(omni.rms_dbfs)));
            ui.label("");
            ui.end_row();
            ui.label("Momentary");
            ui.label(lufs_text(omni.momentary_lufs));
            ui.label(
                egui::RichText::new(format!("max {}", lufs_text(omni.max_momentary_lufs)))
                    .color(theme::TEXT_DIM),
            );
            ui.end_row();
            ui.label("Short-term");
            ui.label(lufs_text(omni.short_term_lufs));
            ui.label(
                egui::RichText::new(format!("max {}", lufs_text(omni.max_short_term_lufs)))
                    .color(theme::TEXT_DIM),
            );
            ui.end_row();
            ui.label("Integrated");
            ui.label(lufs_text(omni.integrated_lufs));
            ui.label("");
            ui.end_row();
        });
    if ui.button("Reset loudness").clicked() {
        host.request(Request::ResetLoudness);
    }
    ui.label(egui::RichText::new(CAUTION).small().color(theme::TEXT_DIM));
}
