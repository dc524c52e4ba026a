//! Colours, sizes and text formats of the editor: a dark, quiet screen where only the data
//! carries colour (the energy palette comes from `fieldglass_dsp::render`). The colours are
//! those of [`crate::look`], shared with the report; words come from
//! `fieldglass_dsp::wording`.

use crate::look;
use egui::{Color32, FontId, Visuals};

const fn colour(rgb: look::Rgb) -> Color32 {
    Color32::from_rgb(rgb[0], rgb[1], rgb[2])
}

/// Window background.
pub const BACKGROUND: Color32 = colour(look::BACKGROUND);
/// Panel background, a step lighter than the window.
pub const PANEL: Color32 = colour(look::PANEL);
/// Ordinary text.
pub const TEXT: Color32 = colour(look::TEXT);
/// Secondary text (units, hints, the caution line).
pub const TEXT_DIM: Color32 = colour(look::TEXT_DIM);
/// Grid lines over the map: light and thin so the energy stays readable.
pub const GRID: Color32 = Color32::from_rgba_unmultiplied_const(
    look::GRID[0],
    look::GRID[1],
    look::GRID[2],
    (look::GRID_ALPHA * 255.0) as u8,
);
/// Meter bar of an ordinary channel.
pub const METER: Color32 = colour(look::METER);
/// Meter of W and the W reference line: the one channel the others are compared with.
pub const REFERENCE: Color32 = colour(look::REFERENCE);
/// Empty meter background: between the panel and the meter colour (editor only).
pub const METER_BACK: Color32 = Color32::from_rgb(34, 38, 44);
/// "Louder than W" and other warnings.
pub const WARNING: Color32 = colour(look::WARNING);
/// Clipping and errors.
pub const CLIP: Color32 = colour(look::CLIP);
/// Marks of expected values in the format check.
pub const MARK_SN3D: Color32 = colour(look::MARK_SN3D);
pub const MARK_N3D: Color32 = colour(look::MARK_N3D);
pub const MARK_FUMA: Color32 = colour(look::MARK_FUMA);
/// Source markers on the map.
pub const SOURCE_MARK: Color32 = colour(look::SOURCE_MARK);

/// Small text painted over graphics (axis numbers, ACN indices).
pub fn small_font() -> FontId {
    FontId::proportional(10.0)
}

/// Tiny text for dense meter labels.
pub fn tiny_font() -> FontId {
    FontId::proportional(8.5)
}

/// The editor's visuals: egui's dark theme with our background colours.
pub fn visuals() -> Visuals {
    let mut visuals = Visuals::dark();
    visuals.panel_fill = PANEL;
    visuals.window_fill = PANEL;
    visuals.extreme_bg_color = BACKGROUND;
    visuals.override_text_color = Some(TEXT);
    visuals
}

/// A level in dB for display: one decimal, readings at the meters' floor shown as "-inf".
pub fn format_db(value_db: f64) -> String {
    if !value_db.is_finite() || value_db <= -150.0 {
        "-inf".to_owned()
    } else {
        let rounded = (value_db * 10.0).round() / 10.0;
        let rounded = if rounded == 0.0 { 0.0 } else { rounded };
        format!("{rounded:.1}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levels_have_a_floor_and_no_negative_zero() {
        assert_eq!(format_db(-200.0), "-inf");
        assert_eq!(format_db(-0.04), "0.0");
    }
}
