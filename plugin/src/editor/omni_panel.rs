//! "Omni": gain staging of W — sample peak, true peak, RMS and W loudness (BS.1770-4 as a
//! mono programme), with a loudness reset and the product's caution in small text.

use super::{EditorHost, Request, theme};
use fieldglass_dsp::engine::Snapshot;

/// The caution DESIGN.md asks the product to show, worded once for every front end.
pub use fieldglass_dsp::wording::CAUTION;

fn lufs_text(value: Option<f64>) -> String {
    match value {
        Some(v) if v.is_finite() && v > -150.0 => format!("{v:.1} LUFS"),
        _ => "—".to_owned(),
    }
}

/// One grid row: name, reading, and the since-reset maximum (dimmed) where there is one.
fn row(ui: &mut egui::Ui, name: &str, reading: egui::RichText, max: Option<String>) {
    ui.label(name);
    ui.label(reading);
    ui.label(egui::RichText::new(max.unwrap_or_default()).color(theme::TEXT_DIM));
    ui.end_row();
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
            let db = theme::format_db;
            row(
                ui,
                "W sample peak",
                format!("{} dBFS", db(omni.sample_peak_dbfs)).into(),
                None,
            );
            let true_peak = egui::RichText::new(format!("{} dBTP", db(omni.true_peak_dbtp)));
            let true_peak = if omni.true_peak_dbtp > 0.0 {
                true_peak.color(theme::CLIP)
            } else {
                true_peak
            };
            let max_true_peak = format!("max {} dBTP", db(omni.max_true_peak_dbtp));
            row(ui, "W true peak", true_peak, Some(max_true_peak));
            row(
                ui,
                "W RMS",
                format!("{} dBFS", db(omni.rms_dbfs)).into(),
                None,
            );
            let max_momentary = format!("max {}", lufs_text(omni.max_momentary_lufs));
            row(
                ui,
                "Momentary",
                lufs_text(omni.momentary_lufs).into(),
                Some(max_momentary),
            );
            let max_short_term = format!("max {}", lufs_text(omni.max_short_term_lufs));
            row(
                ui,
                "Short-term",
                lufs_text(omni.short_term_lufs).into(),
                Some(max_short_term),
            );
            row(
                ui,
                "Integrated",
                lufs_text(omni.integrated_lufs).into(),
                None,
            );
            // Where the stream's W is scaled (FuMa, maxN), the readings above are its
            // SN3D equivalent; show the stream's own W beside them.
            if omni.conversion_gain_db.abs() > 0.005 {
                row(
                    ui,
                    "W as stored",
                    format!("{} dBTP", db(omni.as_stored(omni.true_peak_dbtp))).into(),
                    Some(format!(
                        "levels above are SN3D, {:+.2} dB",
                        omni.conversion_gain_db
                    )),
                );
            }
        });
    if ui.button("Reset loudness").clicked() {
        host.request(Request::ResetLoudness);
    }
    ui.label(egui::RichText::new(CAUTION).small().color(theme::TEXT_DIM));
}
