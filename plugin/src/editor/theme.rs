//! Colours, sizes and text formats of the editor: a dark, quiet screen where only the data
//! carries colour (the energy palette comes from `fieldglass_dsp::render`).

use egui::{Color32, FontId, Visuals};

/// Window background.
pub const BACKGROUND: Color32 = Color32::from_rgb(18, 20, 24);
/// Panel background, a step lighter than the window.
pub const PANEL: Color32 = Color32::from_rgb(24, 27, 32);
/// Ordinary text.
pub const TEXT: Color32 = Color32::from_rgb(196, 200, 206);
/// Secondary text (units, hints, the caution line).
pub const TEXT_DIM: Color32 = Color32::from_rgb(128, 134, 142);
/// Grid lines over the map: light and thin so the energy stays readable.
pub const GRID: Color32 = Color32::from_rgba_premultiplied(150, 155, 160, 70);
/// Meter bar of an ordinary channel.
pub const METER: Color32 = Color32::from_rgb(120, 140, 150);
/// Meter of W and the W reference line: the one channel the others are compared with.
pub const REFERENCE: Color32 = Color32::from_rgb(232, 236, 240);
/// Empty meter background.
pub const METER_BACK: Color32 = Color32::from_rgb(34, 38, 44);
/// Over-omni and other warnings (amber is common practice for "check this").
pub const WARNING: Color32 = Color32::from_rgb(230, 160, 40);
/// Clipping (red is common practice for overload).
pub const CLIP: Color32 = Color32::from_rgb(220, 60, 50);
/// Marks of expected values in the format check.
pub const MARK_SN3D: Color32 = Color32::from_rgb(235, 235, 235);
pub const MARK_N3D: Color32 = Color32::from_rgb(110, 170, 230);
pub const MARK_FUMA: Color32 = Color32::from_rgb(230, 200, 90);
/// Source markers on the map.
pub const SOURCE_MARK: Color32 = Color32::from_rgb(250, 250, 250);

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

/// Whole degrees without a "-0".
pub fn format_deg(value_deg: f64) -> String {
    let rounded = value_deg.round();
    let rounded = if rounded == 0.0 { 0.0 } else { rounded };
    format!("{rounded:.0}")
}

/// "az -35°, el 0°": the direction text used by readouts and markers.
pub fn format_direction(azimuth_deg: f64, elevation_deg: f64) -> String {
    format!(
        "az {}°, el {}°",
        format_deg(azimuth_deg),
        format_deg(elevation_deg)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn direction_text_has_no_negative_zero() {
        assert_eq!(format_direction(-35.2, -0.3), "az -35°, el 0°");
        assert_eq!(format_direction(179.6, 45.0), "az 180°, el 45°");
        assert_eq!(format_db(-200.0), "-inf");
        assert_eq!(format_db(-0.04), "0.0");
    }
}
