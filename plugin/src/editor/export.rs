//! "Save view": writes what the editor shows to a folder (filled in below).

use super::EditorHost;
use super::sphere_panel::SpherePanelState;
use fieldglass_dsp::engine::Snapshot;

/// GUI-side state of the save controls.
#[derive(Default)]
pub struct ExportState {}

pub fn draw(
    _ui: &mut egui::Ui,
    _state: &mut ExportState,
    _sphere: &SpherePanelState,
    _snapshot: Option<&Snapshot>,
    _host: &mut dyn EditorHost,
) {
}
