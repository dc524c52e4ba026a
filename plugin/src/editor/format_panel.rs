//! "Format check": order balance against the expected values of each normalisation, the
//! verdict with its likelihood, the effective order, and a button that adopts the detected
//! format — only when the user presses it. The findings have their own list
//! ([`super::findings_list`]).
//!
//! The bars show each order's energy relative to W with the stream read as ACN/SN3D (the
//! ACN/SN3D hypothesis of the check), so the expected values for an incoherent field are:
//! SN3D 0 dB (addition theorem), N3D 10·log10(2n+1) dB, FuMa Σ_m k²/(2n+1) + 3.01 dB with k the
//! maxN/SN3D gains (exactly +3.01 dB at first order; FuMa keeps every order's channels
//! together, so ordering does not change these sums). FuMa is defined to third order only, so
//! higher orders get no FuMa mark.

use super::{EditorHost, theme};
use crate::params::FormatChoice;
use egui::{Color32, Stroke, pos2, vec2};
use fieldglass_dsp::engine::Snapshot;
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::format::fuma::maxn_gain;
use fieldglass_dsp::wording;

/// Bar scale of the order balance, dB.
const BALANCE_MIN_DB: f64 = -12.0;
const BALANCE_MAX_DB: f64 = 12.0;

/// Expected order balance (energy of order n relative to W, read as ACN/SN3D) of an
/// incoherent field in SN3D: 0 dB.
pub fn expected_sn3d_db(_order: usize) -> f64 {
    0.0
}

/// … in N3D: 10·log10(2n+1) dB.
pub fn expected_n3d_db(order: usize) -> f64 {
    10.0 * ((2 * order + 1) as f64).log10()
}

/// … in FuMa (maxN weights, W at 1/√2): 10·log10(Σ_m k_nm² / (2n+1)) + 10·log10(2) dB, or
/// `None` above third order.
pub fn expected_fuma_db(order: usize) -> Option<f64> {
    if order == 0 {
        return Some(0.0);
    }
    let w_gain = maxn_gain(0)?;
    let sum_squares: f64 = (order * order..(order + 1) * (order + 1))
        .map(maxn_gain)
        .try_fold(0.0, |sum, k| k.map(|k| sum + k * k))?;
    Some(10.0 * (sum_squares / (2 * order + 1) as f64 / (w_gain * w_gain)).log10())
}

/// The order balance read as ACN/SN3D, if the check has produced it.
fn balance_as_sn3d(snapshot: &Snapshot) -> Option<&[f64]> {
    snapshot
        .format_check
        .hypotheses
        .iter()
        .find(|h| h.format == AmbiFormat::ACN_SN3D)
        .map(|h| h.order_balance_db.as_slice())
}

/// Verdict in plain words.
pub fn verdict_text(snapshot: &Snapshot) -> String {
    let check = &snapshot.format_check;
    match (check.ready, check.detected) {
        (true, Some(detected)) => format!(
            "Looks like {} ({})",
            detected.human_name(),
            wording::likelihood(check.confidence)
        ),
        _ => "Not enough signal yet to judge the format".to_owned(),
    }
}

pub fn draw(ui: &mut egui::Ui, snapshot: Option<&Snapshot>, host: &mut dyn EditorHost) {
    ui.heading("Format check");
    let assumed = host.settings().assumed_format;
    ui.label(format!("Assumed: {}", assumed.format().human_name()));
    let Some(snapshot) = snapshot else {
        ui.label(egui::RichText::new("Waiting for audio").color(theme::TEXT_DIM));
        return;
    };
    if let Some(reason) = &snapshot.format_not_applied {
        ui.label(egui::RichText::new(reason).color(theme::WARNING));
    }
    let check = &snapshot.format_check;
    let detected = if check.ready { check.detected } else { None };
    let disagrees = detected.is_some_and(|d| d != assumed.format());
    let verdict = egui::RichText::new(verdict_text(snapshot)).strong();
    ui.label(if disagrees {
        verdict.color(theme::WARNING)
    } else {
        verdict
    });
    let offered = detected.and_then(FormatChoice::from_format);
    if disagrees && offered.is_none() {
        ui.label(
            egui::RichText::new("The detected format is not one the plugin can assume.")
                .color(theme::TEXT_DIM),
        );
    }
    let can_adopt = disagrees && offered.is_some();
    let button = ui
        .add_enabled(can_adopt, egui::Button::new("Use detected format"))
        .on_hover_text("Sets the assumed format to the detected one. Never done automatically.");
    if button.clicked()
        && let Some(choice) = offered
    {
        host.set_assumed_format(choice);
    }
    ui.label(format!(
        "Signal reaches order {} of {}",
        check.effective_order, snapshot.order
    ));

    if let Some(balance) = balance_as_sn3d(snapshot) {
        ui.add_space(4.0);
        ui.label(egui::RichText::new("Energy per order relative to W, read as SN3D").small());
        draw_balance(ui, balance);
    }

    if !check.hypotheses.is_empty() {
        ui.add_space(4.0);
        egui::Grid::new("fieldglass_hypotheses")
            .num_columns(2)
            .show(ui, |ui| {
                for hypothesis in &check.hypotheses {
                    ui.label(hypothesis.format.human_name());
                    ui.add(
                        egui::ProgressBar::new(hypothesis.probability.clamp(0.0, 1.0) as f32)
                            .desired_width(120.0)
                            .text(wording::likelihood(hypothesis.probability)),
                    );
                    ui.end_row();
                }
            });
    }
}

fn balance_x(rect: egui::Rect, value_db: f64) -> f32 {
    let t = (value_db.clamp(BALANCE_MIN_DB, BALANCE_MAX_DB) - BALANCE_MIN_DB)
        / (BALANCE_MAX_DB - BALANCE_MIN_DB);
    rect.left() + rect.width() * t as f32
}

/// One row per order: a bar from 0 dB to the measured value and the three expected marks.
fn draw_balance(ui: &mut egui::Ui, balance_db: &[f64]) {
    let row_height = 14.0;
    let orders = balance_db.len().saturating_sub(1);
    let width = ui.available_width().min(300.0);
    let label_width = 54.0;
    let (rect, _) = ui.allocate_exact_size(
        vec2(width, row_height * orders as f32 + 14.0),
        egui::Sense::hover(),
    );
    let painter = ui.painter_at(rect);
    let bars = egui::Rect::from_min_max(
        pos2(rect.left() + label_width, rect.top()),
        pos2(rect.right() - 4.0, rect.bottom() - 14.0),
    );
    let zero_x = balance_x(bars, 0.0);
    for (order, &value_db) in balance_db.iter().enumerate().skip(1) {
        let top = bars.top() + row_height * (order - 1) as f32;
        let row = egui::Rect::from_min_max(
            pos2(bars.left(), top + 2.0),
            pos2(bars.right(), top + row_height - 2.0),
        );
        painter.rect_filled(row, 1.0, theme::METER_BACK);
        let x = balance_x(bars, value_db);
        painter.rect_filled(
            egui::Rect::from_x_y_ranges(zero_x.min(x)..=zero_x.max(x), row.y_range()),
            0.0,
            theme::METER,
        );
        painter.text(
            pos2(rect.left(), row.center().y),
            egui::Align2::LEFT_CENTER,
            format!("n={order} {:+.1}", value_db),
            theme::small_font(),
            theme::TEXT,
        );
        // The expected values as ticks across the bar, one colour per normalisation (the
        // report draws the same marks: `look::MARK_*`).
        let mark = |x_db: f64, colour: Color32| {
            let x = balance_x(bars, x_db);
            painter.line_segment(
                [pos2(x, row.top() - 1.0), pos2(x, row.bottom() + 1.0)],
                Stroke::new(2.0, colour),
            );
        };
        mark(expected_sn3d_db(order), theme::MARK_SN3D);
        mark(expected_n3d_db(order), theme::MARK_N3D);
        if let Some(fuma_db) = expected_fuma_db(order) {
            mark(fuma_db, theme::MARK_FUMA);
        }
    }
    // Legend and scale.
    let legend_y = rect.bottom() - 6.0;
    let mut x = bars.left();
    for (text, colour) in [
        ("SN3D", theme::MARK_SN3D),
        ("N3D", theme::MARK_N3D),
        ("FuMa", theme::MARK_FUMA),
    ] {
        let c = pos2(x + 4.0, legend_y);
        painter.line_segment(
            [pos2(c.x, c.y - 5.0), pos2(c.x, c.y + 5.0)],
            Stroke::new(2.0, colour),
        );
        let r = painter.text(
            pos2(x + 11.0, legend_y),
            egui::Align2::LEFT_CENTER,
            text,
            theme::small_font(),
            theme::TEXT_DIM,
        );
        x = r.right() + 10.0;
    }
    painter.text(
        pos2(bars.right(), legend_y),
        egui::Align2::RIGHT_CENTER,
        format!("{BALANCE_MIN_DB:+.0} … {BALANCE_MAX_DB:+.0} dB"),
        theme::small_font(),
        theme::TEXT_DIM,
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn expected_balances_match_design_values() {
        // DESIGN.md / REFERENCES: N3D read as SN3D gives 4.77, 6.99, 8.45 dB for n = 1..3;
        // FuMa gives +3.01 dB at first order (W carries −3 dB).
        assert!((expected_n3d_db(1) - 4.771).abs() < 1e-3);
        assert!((expected_n3d_db(2) - 6.990).abs() < 1e-3);
        assert!((expected_n3d_db(3) - 8.451).abs() < 1e-3);
        assert!((expected_fuma_db(1).unwrap() - 3.0103).abs() < 1e-3);
        // Second order by hand: k² = 1, 4/3, 4/3, 4/3, 4/3 → Σ = 19/3; /5 → 1.2667 (+1.03 dB),
        // plus 3.01 dB for W.
        let by_hand = 10.0 * (19.0f64 / 15.0).log10() + 10.0 * 2f64.log10();
        assert!((expected_fuma_db(2).unwrap() - by_hand).abs() < 1e-9);
        assert_eq!(expected_fuma_db(4), None);
    }
}
