//! "Save view": writes what the editor shows to a folder the user types in: the current map
//! as a PNG (colour scale, 30° grid, direction words, numbered source markers and the picture
//! behind it, drawn by the report's own [`crate::scan::charts::map_png`]) and the snapshot's
//! numbers as JSON.
//!
//! # The `fieldglass-view/1` JSON document
//!
//! Field names are those of the scan JSON (`fieldglass-scan/1`, `docs/scan-json.md`) wherever
//! the meaning is the same, and its structs are reused for them: `tool`, `detected`, `analysis`,
//! `order_balance_db`, `channels`, `extra_channels`, `omni` and `sources` mean what they mean
//! in a scan, with "the whole programme" being everything analysed since the start or the
//! last "Reset whole programme". Channel `index` values count from 0 in file (host) order, as
//! in the scan JSON. Fields of the live view only:
//!
//! - `time_s`: seconds of audio analysed when the view was saved;
//! - `whole_programme_s`: seconds the whole-programme figures cover;
//! - `assumed`: `ordering`, `normalization` and `order` the analysis reads the input as;
//! - `map`: what the picture shows: `method`, `band`, `whole_programme` (the integrated map
//!   rather than the live one), `read_as` (format label the map reads the input as: differs
//!   from the assumption only during a comparison), `width`, `height`, `range_db` (span of the
//!   colour scale below the map's top), `max_db`, `scale` ("relative-db" or "dbfs"),
//!   `view_yaw_deg`, `picture` (path or null), `picture_opacity`, `picture_yaw_deg`;
//! - `sources`: the map's strongest directions (the live map's, strongest first, levels
//!   relative to the strongest);
//! - `findings`: the editor's finding list, most severe first, each with the scan JSON's
//!   `severity`, `code`, `message`, `channels` plus `first_seen_s` (seconds since the start or
//!   the findings reset, see `findings_from_reset`) and `active`.
//!
//! Numbers that are not finite are `null`. New fields may be added; existing ones keep their
//! meaning within `fieldglass-view/1`.

use super::picture_layer::PictureLayerState;
use super::sphere_panel::map_range_db;
use super::{EditorHost, EditorSettings, theme};
use crate::params::PictureSettings;
use crate::picture::Picture;
use crate::scan::charts::{Backdrop, map_png};
use crate::scan::json::{
    Analysis, Channel, Detected, ExtraChannel, Omni, Source, Tool, balance, channel_entries,
    detected_entry, normalization_label, num, omni_entry, ordering_label, rounded, source,
};
use fieldglass_dsp::engine::{MapScale, Snapshot};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// Value of the `schema` field.
pub const SCHEMA: &str = "fieldglass-view/1";

/// The whole document (see the module docs).
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct ViewDocument {
    pub schema: &'static str,
    pub tool: Tool,
    pub time_s: Option<f64>,
    pub whole_programme_s: Option<f64>,
    pub assumed: LiveAssumed,
    pub detected: Detected,
    pub analysis: Analysis,
    pub map: MapEntry,
    pub sources: Vec<Source>,
    pub order_balance_db: Vec<Option<f64>>,
    pub channels: Vec<Channel>,
    pub extra_channels: Vec<ExtraChannel>,
    pub omni: Omni,
    pub findings: Vec<LoggedFindingEntry>,
    pub findings_from_reset: bool,
}

/// The format the analysis reads the input as.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct LiveAssumed {
    pub ordering: &'static str,
    pub normalization: &'static str,
    pub order: usize,
}

/// What the saved map shows.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct MapEntry {
    pub method: &'static str,
    pub band: &'static str,
    pub whole_programme: bool,
    pub read_as: &'static str,
    pub width: usize,
    pub height: usize,
    pub range_db: Option<f64>,
    pub max_db: Option<f64>,
    pub scale: &'static str,
    pub view_yaw_deg: Option<f64>,
    pub picture: Option<String>,
    pub picture_opacity: Option<f64>,
    pub picture_yaw_deg: Option<f64>,
}

/// A finding of the editor's list.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct LoggedFindingEntry {
    pub severity: &'static str,
    pub code: &'static str,
    pub message: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channels: Option<Vec<usize>>,
    pub first_seen_s: Option<f64>,
    pub active: bool,
}

/// The JSON document of what the editor shows.
pub fn view_document(
    snapshot: &Snapshot,
    settings: &EditorSettings,
    picture: &PictureSettings,
    picture_shown: bool,
) -> ViewDocument {
    let check = &snapshot.format_check;
    let (ordering, normalization) = (
        ordering_label(snapshot.assumed_format.ordering),
        normalization_label(snapshot.assumed_format.normalization),
    );
    let programme = &snapshot.programme;
    let (channels, extra_channels) = channel_entries(&programme.channels);
    let map = &snapshot.map;
    ViewDocument {
        schema: SCHEMA,
        tool: Tool {
            name: "fieldglass",
            version: env!("CARGO_PKG_VERSION"),
        },
        time_s: rounded(num(snapshot.time_s), 3),
        whole_programme_s: rounded(num(programme.duration_s), 3),
        assumed: LiveAssumed {
            ordering,
            normalization,
            order: snapshot.order,
        },
        detected: detected_entry(check, snapshot.order, check.effective_order),
        analysis: Analysis {
            method: map.method.label(),
            band_edges_hz: snapshot.band_edges_hz.map(num),
            over_omni_tolerance_db: rounded(num(f64::from(settings.over_omni_tolerance_db)), 2),
        },
        map: MapEntry {
            method: map.method.label(),
            band: map.band.label(),
            whole_programme: map.integrated,
            read_as: snapshot.map_format.label(),
            width: map.width,
            height: map.height,
            range_db: num(f64::from(map_range_db(settings, Some(snapshot)))),
            max_db: rounded(num(f64::from(map.max_db)), 3),
            scale: match map.scale {
                MapScale::RelativeDb => "relative-db",
                MapScale::AbsoluteDbfs => "dbfs",
            },
            view_yaw_deg: num(f64::from(settings.view_yaw_deg)),
            picture: picture_shown.then(|| picture.path.clone()),
            picture_opacity: picture_shown.then_some(f64::from(picture.opacity)),
            picture_yaw_deg: picture_shown.then_some(f64::from(picture.yaw_offset_deg)),
        },
        sources: snapshot.sources.iter().map(source).collect(),
        order_balance_db: balance(&programme.order_balance_db),
        channels,
        extra_channels,
        omni: omni_entry(&programme.omni),
        findings: snapshot
            .finding_log
            .iter()
            .map(|e| LoggedFindingEntry {
                severity: e.finding.severity.label(),
                code: e.finding.code.label(),
                message: e.finding.message.clone(),
                channels: (!e.finding.channels.is_empty()).then(|| e.finding.channels.clone()),
                first_seen_s: rounded(num(e.first_seen_s), 2),
                active: e.active,
            })
            .collect(),
        findings_from_reset: snapshot.finding_log_from_reset,
    }
}

/// The map PNG of what the editor shows: the report's map picture with the editor's range,
/// view yaw and picture.
pub fn view_png(
    snapshot: &Snapshot,
    settings: &EditorSettings,
    picture: Option<(&Picture, &PictureSettings)>,
) -> Result<Vec<u8>, String> {
    let map = &snapshot.map;
    let sample = |az: f64, el: f64| picture.map_or([0; 4], |(p, _)| p.sample(az, el));
    let backdrop = picture.map(|(_, s)| Backdrop {
        sample: &sample,
        yaw_deg: f64::from(s.yaw_offset_deg),
        opacity: f64::from(s.opacity),
    });
    map_png(
        &map.values_db,
        map.width,
        map.height,
        f64::from(map_range_db(settings, Some(snapshot))),
        f64::from(settings.view_yaw_deg),
        &snapshot.sources,
        backdrop,
    )
}

/// Writes `<stem>.png` and `<stem>.json` into `folder` (created if missing); returns both
/// paths. The stem names the moment: `fieldglass-view-<seconds of audio>s-<snapshot>`.
pub fn save_view(
    folder: &Path,
    snapshot: &Snapshot,
    settings: &EditorSettings,
    picture: Option<(&Picture, &PictureSettings)>,
    picture_settings: &PictureSettings,
) -> Result<(PathBuf, PathBuf), String> {
    if folder.as_os_str().is_empty() {
        return Err("type a folder to save into first".to_owned());
    }
    std::fs::create_dir_all(folder)
        .map_err(|e| format!("cannot use the folder {}: {e}", folder.display()))?;
    let stem = format!(
        "fieldglass-view-{:.0}s-{}",
        snapshot.time_s.max(0.0),
        snapshot.sequence
    );
    let png_path = folder.join(format!("{stem}.png"));
    let json_path = folder.join(format!("{stem}.json"));
    let png = view_png(snapshot, settings, picture)?;
    let document = view_document(snapshot, settings, picture_settings, picture.is_some());
    let json = serde_json::to_string_pretty(&document).map_err(|e| e.to_string())?;
    std::fs::write(&png_path, png)
        .map_err(|e| format!("cannot write {}: {e}", png_path.display()))?;
    std::fs::write(&json_path, json + "\n")
        .map_err(|e| format!("cannot write {}: {e}", json_path.display()))?;
    Ok((png_path, json_path))
}

/// GUI-side state of the save controls.
#[derive(Default)]
pub struct ExportState {
    folder_field: String,
    started: bool,
    message: Option<(bool, String)>,
}

impl ExportState {
    /// The last outcome: (succeeded, text).
    pub fn message(&self) -> Option<(bool, &str)> {
        self.message.as_ref().map(|(ok, m)| (*ok, m.as_str()))
    }
}

pub fn draw(
    ui: &mut egui::Ui,
    state: &mut ExportState,
    picture: &PictureLayerState,
    snapshot: Option<&Snapshot>,
    host: &mut dyn EditorHost,
) {
    if !state.started {
        state.started = true;
        state.folder_field = host.save_folder();
    }
    ui.heading("Save view");
    ui.horizontal(|ui| {
        let label = ui.label("Save folder");
        let field = egui::TextEdit::singleline(&mut state.folder_field)
            .hint_text("folder for the PNG and JSON")
            .desired_width(super::picture_layer::FIELD_WIDTH);
        ui.add(field).labelled_by(label.id);
    });
    let button = ui
        .add_enabled(snapshot.is_some(), egui::Button::new("Save view"))
        .on_hover_text("Writes the map as shown (PNG) and the readings (JSON) into the folder");
    if button.clicked()
        && let Some(snapshot) = snapshot
    {
        let folder = state.folder_field.trim().to_owned();
        host.set_save_folder(&folder);
        let settings = host.settings();
        let picture_settings = host.picture_settings();
        let shown = picture
            .loaded()
            .filter(|_| picture_settings.opacity > 0.0)
            .map(|l| (l.picture.as_ref(), &picture_settings));
        state.message = Some(
            match save_view(
                Path::new(&folder),
                snapshot,
                &settings,
                shown,
                &picture_settings,
            ) {
                Ok((png, json)) => (
                    true,
                    format!(
                        "Saved {} and {}",
                        png.file_name().unwrap_or_default().to_string_lossy(),
                        json.file_name().unwrap_or_default().to_string_lossy()
                    ),
                ),
                Err(e) => (false, super::channel_strip::capitalised(&e)),
            },
        );
    }
    if let Some((ok, message)) = &state.message {
        let colour = if *ok { theme::TEXT_DIM } else { theme::WARNING };
        ui.label(egui::RichText::new(message).color(colour));
    }
}
