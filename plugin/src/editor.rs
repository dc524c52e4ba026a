//! The egui editor: "Sphere", "Channels", "Format check" and "Omni" panels over a status line.
//!
//! The GUI only reads the latest [`Snapshot`] and turns raw numbers into pixels and text; it
//! never computes analysis. Everything it changes goes through an [`EditorHost`]: in the plugin
//! that is [`PluginHost`] (parameters through the host's `ParamSetter`, resets through
//! [`EngineControl`]); in tests it is [`MemoryHost`]. [`draw_editor`] is a plain function of
//! (ui, state, snapshot, host), so the whole editor runs headless.

pub mod channel_strip;
pub mod export;
pub mod findings_list;
pub mod format_panel;
pub mod omni_panel;
pub mod picture_layer;
pub mod projection;
pub mod sphere_panel;
pub mod status_line;
pub mod theme;

use crate::params::{
    BandChoice, FieldglassParams, FormatChoice, MethodChoice, PictureSettings, ViewSettings,
};
use fieldglass_dsp::engine::{EngineControl, Snapshot, SnapshotSlot};
use fieldglass_dsp::format::AmbiFormat;
use nice_plug::context::gui::GuiContext;
use nice_plug::editor::dpi::LogicalSize;
use nice_plug::prelude::ParamSetter;
use nice_plug_egui::{
    EguiEditor, EguiEditorState, EguiNiceSettings, NiceEguiApp, RepaintNotifier,
    resizable_window::ResizableWindow,
};
use std::sync::Arc;

/// Default editor size, logical pixels.
pub const DEFAULT_SIZE: (f32, f32) = (1100.0, 700.0);
/// Smallest size the resize corner allows, logical pixels.
pub const MIN_SIZE: (f32, f32) = (760.0, 480.0);

/// What the plugin hands the editor, created once with the plugin.
#[derive(Clone)]
pub struct EditorData {
    /// Settings cell of the analysis engine (resets go here).
    pub control: Arc<EngineControl>,
    /// Latest snapshot published by the analysis side.
    pub slot: Arc<SnapshotSlot>,
    pub params: Arc<FieldglassParams>,
    /// Window size and open flag, kept across openings of the editor.
    pub egui_state: Arc<EguiEditorState>,
}

impl EditorData {
    pub fn new(
        control: Arc<EngineControl>,
        slot: Arc<SnapshotSlot>,
        params: Arc<FieldglassParams>,
    ) -> Self {
        Self {
            control,
            slot,
            params,
            egui_state: EguiEditorState::from_size(
                LogicalSize::new(DEFAULT_SIZE.0, DEFAULT_SIZE.1),
                1.0,
            ),
        }
    }
}

/// Float parameters the editor can change.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Knob {
    TimeConstantMs,
    MapRangeDb,
    OverOmniToleranceDb,
    ViewYawDeg,
    ViewPitchDeg,
}

/// One-shot requests to the analysis side.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Request {
    ResetClips,
    ResetLoudness,
    /// Start a new whole programme (the integrated map and figures).
    ResetSessionMap,
    /// Start the finding log afresh.
    ResetFindings,
}

/// Current values of everything the editor shows as a control.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EditorSettings {
    pub assumed_format: FormatChoice,
    pub method: MethodChoice,
    pub band: BandChoice,
    pub time_constant_ms: f32,
    pub map_range_db: f32,
    /// Map range from the method and order instead of `map_range_db`.
    pub auto_map_range: bool,
    pub over_omni_tolerance_db: f32,
    pub view_yaw_deg: f32,
    pub view_pitch_deg: f32,
    pub view: ViewSettings,
    /// The momentary comparison format of the map (not a parameter, never saved).
    pub map_format_override: Option<AmbiFormat>,
}

impl Default for EditorSettings {
    fn default() -> Self {
        Self::from_params(&FieldglassParams::default())
    }
}

impl EditorSettings {
    pub fn from_params(params: &FieldglassParams) -> Self {
        Self {
            assumed_format: params.assumed_format.value(),
            method: params.method.value(),
            band: params.band.value(),
            time_constant_ms: params.time_constant_ms.value(),
            map_range_db: params.map_range_db.value(),
            auto_map_range: params.auto_map_range.value(),
            over_omni_tolerance_db: params.over_omni_tolerance_db.value(),
            view_yaw_deg: params.view_yaw_deg.value(),
            view_pitch_deg: params.view_pitch_deg.value(),
            view: params.view_settings(),
            map_format_override: None,
        }
    }

    pub fn knob(&self, knob: Knob) -> f32 {
        match knob {
            Knob::TimeConstantMs => self.time_constant_ms,
            Knob::MapRangeDb => self.map_range_db,
            Knob::OverOmniToleranceDb => self.over_omni_tolerance_db,
            Knob::ViewYawDeg => self.view_yaw_deg,
            Knob::ViewPitchDeg => self.view_pitch_deg,
        }
    }
}

/// Everything the editor may change. Parameter changes are always explicit user actions;
/// nothing here is called automatically from analysis results.
pub trait EditorHost {
    fn settings(&self) -> EditorSettings;
    fn set_assumed_format(&mut self, format: FormatChoice);
    fn set_method(&mut self, method: MethodChoice);
    fn set_band(&mut self, band: BandChoice);
    fn set_knob(&mut self, knob: Knob, value: f32);
    fn set_auto_map_range(&mut self, automatic: bool);
    fn set_view(&mut self, view: ViewSettings);
    /// Shows the map under `format` while a comparison is held; `None` ends it. Never
    /// changes the assumed format.
    fn set_map_format_override(&mut self, format: Option<AmbiFormat>);
    fn picture_settings(&self) -> PictureSettings;
    fn set_picture_settings(&mut self, settings: PictureSettings);
    fn save_folder(&self) -> String;
    fn set_save_folder(&mut self, folder: &str);
    fn request(&mut self, request: Request);
}

/// An [`EditorHost`] in memory: for tests and previews.
#[derive(Clone, Debug, Default)]
pub struct MemoryHost {
    pub settings: EditorSettings,
    /// Requests made, in order.
    pub requests: Vec<Request>,
    pub picture: PictureSettings,
    pub save_folder: String,
}

impl EditorHost for MemoryHost {
    fn settings(&self) -> EditorSettings {
        self.settings
    }
    fn set_assumed_format(&mut self, format: FormatChoice) {
        self.settings.assumed_format = format;
    }
    fn set_method(&mut self, method: MethodChoice) {
        self.settings.method = method;
    }
    fn set_band(&mut self, band: BandChoice) {
        self.settings.band = band;
    }
    fn set_knob(&mut self, knob: Knob, value: f32) {
        let s = &mut self.settings;
        match knob {
            Knob::TimeConstantMs => s.time_constant_ms = value,
            Knob::MapRangeDb => s.map_range_db = value,
            Knob::OverOmniToleranceDb => s.over_omni_tolerance_db = value,
            Knob::ViewYawDeg => s.view_yaw_deg = value,
            Knob::ViewPitchDeg => s.view_pitch_deg = value,
        }
    }
    fn set_auto_map_range(&mut self, automatic: bool) {
        self.settings.auto_map_range = automatic;
    }
    fn set_view(&mut self, view: ViewSettings) {
        self.settings.view = view;
    }
    fn set_map_format_override(&mut self, format: Option<AmbiFormat>) {
        self.settings.map_format_override = format;
    }
    fn picture_settings(&self) -> PictureSettings {
        self.picture.clone()
    }
    fn set_picture_settings(&mut self, settings: PictureSettings) {
        self.picture = settings.sanitised();
    }
    fn save_folder(&self) -> String {
        self.save_folder.clone()
    }
    fn set_save_folder(&mut self, folder: &str) {
        folder.clone_into(&mut self.save_folder);
    }
    fn request(&mut self, request: Request) {
        self.requests.push(request);
    }
}

/// The plugin's [`EditorHost`]: parameters through the host, resets through the engine.
pub struct PluginHost<'a> {
    pub params: &'a FieldglassParams,
    pub setter: &'a ParamSetter<'a>,
    pub control: &'a EngineControl,
}

impl PluginHost<'_> {
    /// One complete automation gesture (begin, set, end), as a click or a slider step.
    fn gesture<P: nice_plug::prelude::Param>(&self, param: &P, value: P::Plain) {
        self.setter.begin_set_parameter(param);
        self.setter.set_parameter(param, value);
        self.setter.end_set_parameter(param);
    }
}

impl EditorHost for PluginHost<'_> {
    fn settings(&self) -> EditorSettings {
        EditorSettings {
            map_format_override: self.control.load().map_format_override,
            ..EditorSettings::from_params(self.params)
        }
    }
    fn set_assumed_format(&mut self, format: FormatChoice) {
        self.gesture(&self.params.assumed_format, format);
    }
    fn set_method(&mut self, method: MethodChoice) {
        self.gesture(&self.params.method, method);
    }
    fn set_band(&mut self, band: BandChoice) {
        self.gesture(&self.params.band, band);
    }
    fn set_knob(&mut self, knob: Knob, value: f32) {
        let p = self.params;
        let param = match knob {
            Knob::TimeConstantMs => &p.time_constant_ms,
            Knob::MapRangeDb => &p.map_range_db,
            Knob::OverOmniToleranceDb => &p.over_omni_tolerance_db,
            Knob::ViewYawDeg => &p.view_yaw_deg,
            Knob::ViewPitchDeg => &p.view_pitch_deg,
        };
        self.gesture(param, value);
    }
    fn set_auto_map_range(&mut self, automatic: bool) {
        self.gesture(&self.params.auto_map_range, automatic);
    }
    fn set_view(&mut self, view: ViewSettings) {
        self.params.update_view(|v| *v = view);
        self.params.apply_to(self.control);
    }
    fn set_map_format_override(&mut self, format: Option<AmbiFormat>) {
        self.control.set_map_format_override(format);
    }
    fn picture_settings(&self) -> PictureSettings {
        self.params.picture_settings()
    }
    fn set_picture_settings(&mut self, settings: PictureSettings) {
        self.params.set_picture_settings(settings);
    }
    fn save_folder(&self) -> String {
        self.params.save_folder()
    }
    fn set_save_folder(&mut self, folder: &str) {
        self.params.set_save_folder(folder);
    }
    fn request(&mut self, request: Request) {
        match request {
            Request::ResetClips => self.control.request_clip_reset(),
            Request::ResetLoudness => self.control.request_loudness_reset(),
            Request::ResetSessionMap => self.control.request_integrated_reset(),
            Request::ResetFindings => self.control.request_finding_log_reset(),
        }
    }
}

/// GUI-side state of every panel (textures, last pointer reading, the picture being loaded,
/// the last save); `Default` is a fresh editor.
#[derive(Default)]
pub struct EditorState {
    pub sphere: sphere_panel::SpherePanelState,
    pub picture: picture_layer::PictureLayerState,
    pub export: export::ExportState,
}

/// Draws the whole editor into `ui`. With no snapshot yet, every panel shows a calm waiting
/// state.
pub fn draw_editor(
    ui: &mut egui::Ui,
    state: &mut EditorState,
    snapshot: Option<&Snapshot>,
    host: &mut dyn EditorHost,
) {
    ui.style_mut().visuals = theme::visuals();
    egui::Panel::bottom("fieldglass_status")
        .resizable(false)
        .show(ui, |ui| status_line::draw(ui, snapshot));
    egui::Panel::right("fieldglass_side")
        .default_size(340.0)
        .min_size(280.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                format_panel::draw(ui, snapshot, host);
                ui.separator();
                findings_list::draw(ui, snapshot, host);
                ui.separator();
                omni_panel::draw(ui, snapshot, host);
                ui.separator();
                picture_layer::draw_controls(ui, &mut state.picture, host);
                ui.separator();
                export::draw(ui, &mut state.export, &state.picture, snapshot, host);
            });
        });
    egui::Panel::bottom("fieldglass_channels")
        .default_size(210.0)
        .min_size(150.0)
        .show(ui, |ui| channel_strip::draw(ui, snapshot, host));
    egui::CentralPanel::default().show(ui, |ui| {
        state.picture.poll(ui.ctx(), host);
        sphere_panel::draw(ui, &mut state.sphere, &state.picture, snapshot, host);
    });
}

/// The nice-plug-egui application: reads the slot each frame and draws the editor.
pub struct FieldglassApp {
    data: EditorData,
    state: EditorState,
    gui_context: Option<GuiContext>,
}

impl FieldglassApp {
    pub fn new(data: EditorData) -> Self {
        Self {
            data,
            state: EditorState::default(),
            gui_context: None,
        }
    }
}

impl NiceEguiApp for FieldglassApp {
    fn build(
        &mut self,
        egui_ctx: egui::Context,
        nice_gui_ctx: GuiContext,
        _frame: &mut nice_plug_egui::Frame,
    ) -> Result<(), nice_plug_egui::baseview::HandlerError> {
        egui_ctx.set_visuals(theme::visuals());
        self.gui_context = Some(nice_gui_ctx);
        self.state = EditorState::default();
        self.data.control.set_maps_wanted(true);
        Ok(())
    }

    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut nice_plug_egui::Frame) {
        let Some(gui_context) = self.gui_context.as_ref() else {
            return;
        };
        let setter = gui_context.param_setter();
        let mut host = PluginHost {
            params: &self.data.params,
            setter: &setter,
            control: &self.data.control,
        };
        // Keep the engine in step with automation and loaded state (no-op when unchanged).
        self.data.params.apply_to(&self.data.control);
        let snapshot = self.data.slot.latest();
        let state = &mut self.state;
        ResizableWindow::new("fieldglass_resize")
            .min_size(egui::vec2(MIN_SIZE.0, MIN_SIZE.1))
            .show(ui, |ui| {
                draw_editor(ui, state, snapshot.as_deref(), &mut host)
            });
        // Meters move continuously; ask for the next frame.
        ui.ctx().request_repaint();
    }

    fn editor_closed(&mut self) {
        // A comparison held while the window closes must not outlive it.
        self.data.control.set_map_format_override(None);
        self.gui_context = None;
        self.state = EditorState::default();
        self.data.control.set_maps_wanted(false);
    }
}

/// The editor for the plugin's `fn editor`.
pub fn create_editor(data: EditorData) -> Option<EguiEditor<FieldglassApp>> {
    let egui_state = data.egui_state.clone();
    let settings = EguiNiceSettings::new()
        .with_tile("Fieldglass")
        .with_resize_hint(nice_plug::prelude::ResizeHint::RESIZABLE);
    nice_plug_egui::create_egui_editor(
        egui_state,
        RepaintNotifier::new(),
        settings,
        FieldglassApp::new(data),
    )
}
