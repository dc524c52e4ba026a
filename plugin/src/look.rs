//! The look shared by the editor and the report: colours, marks and map defaults, defined once
//! so that the same thing is drawn the same way on screen and on paper. The editor's `theme`
//! turns these into egui colours; the report writes them as CSS/SVG colours.
//! Words live in `fieldglass_dsp::wording`; the energy palette in `fieldglass_dsp::render`.

/// An sRGB colour.
pub type Rgb = [u8; 3];

/// Window / page background.
pub const BACKGROUND: Rgb = [18, 20, 24];
/// Panel / card background, a step lighter.
pub const PANEL: Rgb = [24, 27, 32];
/// Ordinary text.
pub const TEXT: Rgb = [196, 200, 206];
/// Secondary text (units, hints, the caution).
pub const TEXT_DIM: Rgb = [128, 134, 142];
/// Grid lines over the map (drawn with partial opacity, see `GRID_ALPHA`).
pub const GRID: Rgb = [150, 155, 160];
/// Opacity of the grid lines, 0 … 1: light so the energy stays readable.
pub const GRID_ALPHA: f32 = 0.35;
/// Warnings, "louder than W" (amber for "check this" is common practice).
pub const WARNING: Rgb = [230, 160, 40];
/// Clipping and errors (red for overload is common practice).
pub const CLIP: Rgb = [220, 60, 50];
/// Meter of W and the W reference line: the one channel the others are compared with.
pub const REFERENCE: Rgb = [232, 236, 240];
/// Meter bar of an ordinary channel.
pub const METER: Rgb = [120, 140, 150];
/// Source markers on the map (a ring with a cross, labelled with its number).
pub const SOURCE_MARK: Rgb = [250, 250, 250];

/// Expected per-order energy of each normalisation in the format check, drawn as short
/// horizontal ticks across the order's bar in both the editor and the report: SN3D white,
/// N3D blue, FuMa yellow.
pub const MARK_SN3D: Rgb = [235, 235, 235];
pub const MARK_N3D: Rgb = [110, 170, 230];
pub const MARK_FUMA: Rgb = [230, 200, 90];

/// "#rrggbb" for CSS and SVG.
pub fn css(rgb: Rgb) -> String {
    format!("#{:02x}{:02x}{:02x}", rgb[0], rgb[1], rgb[2])
}

#[cfg(test)]
mod tests {
    #[test]
    fn css_colours_are_hex() {
        assert_eq!(super::css([18, 20, 240]), "#1214f0");
    }
}
