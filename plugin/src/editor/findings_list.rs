//! "Findings": what the analysis reports, most severe first, each with its severity word, the
//! channels concerned (numbered for people, with their ACN), when it first appeared and whether
//! it still holds; a reset starts the list afresh. The history is kept by the engine
//! ([`fieldglass_dsp::engine::FindingLog`]); this panel only formats it.

use super::channel_strip::{acn_of, capitalised};
use super::{EditorHost, Request, theme};
use fieldglass_dsp::engine::{LoggedFinding, Severity, Snapshot};
use fieldglass_dsp::wording;

/// A time on the log's clock: "0:07", "12:40", "1:02:03" (hours:minutes:seconds).
pub fn clock_text(seconds: f64) -> String {
    let total = if seconds.is_finite() {
        seconds.max(0.0).floor() as u64
    } else {
        0
    };
    let (h, m, s) = (total / 3600, total / 60 % 60, total % 60);
    if h > 0 {
        format!("{h}:{m:02}:{s:02}")
    } else {
        format!("{m}:{s:02}")
    }
}

/// "Error", "Warning", "Info".
pub fn severity_word(severity: Severity) -> String {
    capitalised(severity.label())
}

/// The line under a finding: its channels (if any), when it first appeared, and whether it
/// still holds, e.g. "channel 7 (ACN 6) · first at 0:42 · still active".
pub fn detail_text(snapshot: &Snapshot, entry: &LoggedFinding) -> String {
    let mut parts = Vec::new();
    if !entry.finding.channels.is_empty() {
        parts.push(wording::channel_list(&entry.finding.channels, |i| {
            acn_of(snapshot, i)
        }));
    }
    parts.push(format!("first at {}", clock_text(entry.first_seen_s)));
    parts.push(if entry.active {
        "still active".to_owned()
    } else {
        format!("last at {}", clock_text(entry.last_seen_s))
    });
    parts.join(" · ")
}

fn severity_colour(severity: Severity) -> egui::Color32 {
    match severity {
        Severity::Info => theme::TEXT,
        Severity::Warning => theme::WARNING,
        Severity::Error => theme::CLIP,
    }
}

pub fn draw(ui: &mut egui::Ui, snapshot: Option<&Snapshot>, host: &mut dyn EditorHost) {
    ui.horizontal(|ui| {
        ui.heading("Findings");
        if ui
            .button("Reset findings")
            .on_hover_text("Clears the list; times then count from now")
            .clicked()
        {
            host.request(Request::ResetFindings);
        }
    });
    let Some(snapshot) = snapshot else {
        ui.label(egui::RichText::new("Waiting for audio").color(theme::TEXT_DIM));
        return;
    };
    let clock = if snapshot.finding_log_from_reset {
        "Times count from the last reset"
    } else {
        "Times count from the start"
    };
    ui.label(egui::RichText::new(clock).small().color(theme::TEXT_DIM));
    if snapshot.finding_log.is_empty() {
        ui.label(egui::RichText::new("Nothing to report").color(theme::TEXT_DIM));
    }
    for entry in &snapshot.finding_log {
        let finding = &entry.finding;
        let colour = severity_colour(finding.severity);
        let colour = if entry.active {
            colour
        } else {
            colour.gamma_multiply(0.6)
        };
        ui.horizontal_wrapped(|ui| {
            ui.label(
                egui::RichText::new(severity_word(finding.severity))
                    .strong()
                    .color(colour),
            );
            ui.label(egui::RichText::new(capitalised(&finding.message)).color(colour));
        });
        ui.label(
            egui::RichText::new(detail_text(snapshot, entry))
                .small()
                .color(theme::TEXT_DIM),
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clock_reads_minutes_and_seconds() {
        assert_eq!(clock_text(7.9), "0:07");
        assert_eq!(clock_text(760.0), "12:40");
        assert_eq!(clock_text(3723.0), "1:02:03");
        assert_eq!(clock_text(f64::NAN), "0:00");
        assert_eq!(severity_word(Severity::Warning), "Warning");
    }
}
