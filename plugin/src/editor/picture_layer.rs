//! "Picture": a still behind the map (see [`crate::picture`]): a path field with Load and
//! Remove, the opacity and the picture's yaw offset.
//!
//! Decoding runs on a worker thread (never the GUI thread, never the audio thread) and shrinks
//! the picture to the renderer's largest texture side (`max_texture_side` of egui's input), so
//! an oversized picture never reaches the renderer. The path, opacity and offset are saved with
//! the plugin state through the [`EditorHost`]; the pixels are read again when the editor opens.
//! A missing or broken file leaves a message in the panel, never a crash.

use super::{EditorHost, theme};
use crate::params::PictureSettings;
use crate::picture::{Picture, PictureError, load_picture};
use std::sync::Arc;
use std::sync::mpsc::{Receiver, TryRecvError, channel};

/// Width of the path field, points: fits the side panel at its default width.
pub const FIELD_WIDTH: f32 = 220.0;

/// A picture ready to draw.
pub struct LoadedPicture {
    /// The path it was read from.
    pub path: String,
    /// The (shrunk) pixels, kept for saved views.
    pub picture: Arc<Picture>,
    pub texture: egui::TextureHandle,
}

/// A load under way on the worker thread.
struct PendingLoad {
    path: String,
    result: Receiver<Result<Picture, PictureError>>,
}

/// GUI-side state of the picture: what is loaded, what is loading, the last message.
#[derive(Default)]
pub struct PictureLayerState {
    loaded: Option<LoadedPicture>,
    pending: Option<PendingLoad>,
    /// The path field's text while it is edited.
    path_field: String,
    /// The saved path was read into the field and loaded (once per editor opening).
    started: bool,
    message: Option<String>,
}

impl PictureLayerState {
    /// The picture to draw, if one is loaded.
    pub fn loaded(&self) -> Option<&LoadedPicture> {
        self.loaded.as_ref()
    }

    /// True while a picture is being decoded.
    pub fn is_loading(&self) -> bool {
        self.pending.is_some()
    }

    /// The last error or note, if any.
    pub fn message(&self) -> Option<&str> {
        self.message.as_deref()
    }

    /// Starts decoding `path` on a worker thread, shrunk to `max_side` pixels.
    fn start_load(&mut self, path: &str, max_side: usize) {
        let (send, result) = channel();
        let owned = path.to_owned();
        let spawned = std::thread::Builder::new()
            .name("fieldglass-picture".into())
            .spawn(move || {
                let _ = send.send(load_picture(std::path::Path::new(&owned), max_side));
            });
        match spawned {
            Ok(_) => {
                self.pending = Some(PendingLoad {
                    path: path.to_owned(),
                    result,
                });
                self.message = None;
            }
            Err(e) => self.message = Some(format!("cannot start loading the picture: {e}")),
        }
    }

    /// Once per frame, before drawing: loads the saved picture when the editor opens, and
    /// turns a finished decode into a texture (or a message).
    pub fn poll(&mut self, ctx: &egui::Context, host: &dyn EditorHost) {
        let max_side = ctx.input(|i| i.max_texture_side).max(2);
        if !self.started {
            self.started = true;
            let saved = host.picture_settings().path;
            saved.clone_into(&mut self.path_field);
            if !saved.trim().is_empty() {
                self.start_load(saved.trim(), max_side);
            }
        }
        let Some(pending) = &self.pending else {
            return;
        };
        match pending.result.try_recv() {
            Err(TryRecvError::Empty) => ctx.request_repaint(),
            Err(TryRecvError::Disconnected) => {
                self.message = Some("loading the picture stopped unexpectedly".to_owned());
                self.pending = None;
            }
            Ok(Err(e)) => {
                self.message = Some(capitalise_first(&e.to_string()));
                self.loaded = None;
                self.pending = None;
            }
            Ok(Ok(picture)) => {
                let path = pending.path.clone();
                self.pending = None;
                // Shrunk on the worker to this side already; checked again so that no
                // texture above the renderer's limit is ever made.
                if picture.width > max_side || picture.height > max_side {
                    self.message = Some(format!(
                        "the picture is {}×{} pixels, larger than the largest texture ({max_side})",
                        picture.width, picture.height
                    ));
                    return;
                }
                let image = egui::ColorImage::from_rgba_unmultiplied(
                    [picture.width, picture.height],
                    &picture.rgba,
                );
                let options = egui::TextureOptions {
                    wrap_mode: egui::TextureWrapMode::Repeat,
                    ..egui::TextureOptions::LINEAR
                };
                let texture = ctx.load_texture("fieldglass_picture", image, options);
                self.loaded = Some(LoadedPicture {
                    path,
                    picture: Arc::new(picture),
                    texture,
                });
            }
        }
    }
}

fn capitalise_first(text: &str) -> String {
    super::channel_strip::capitalised(text)
}

/// The picture controls, in the side panel.
pub fn draw_controls(ui: &mut egui::Ui, state: &mut PictureLayerState, host: &mut dyn EditorHost) {
    ui.heading("Picture");
    let settings = host.picture_settings();
    ui.horizontal(|ui| {
        let label = ui.label("Picture file");
        let field = egui::TextEdit::singleline(&mut state.path_field)
            .hint_text("equirectangular PNG or JPEG")
            .desired_width(FIELD_WIDTH);
        ui.add(field).labelled_by(label.id);
    });
    ui.horizontal(|ui| {
        let max_side = ui.ctx().input(|i| i.max_texture_side).max(2);
        let load = ui.add_enabled(!state.is_loading(), egui::Button::new("Load picture"));
        if load.clicked() {
            let path = state.path_field.trim().to_owned();
            host.set_picture_settings(PictureSettings {
                path: path.clone(),
                ..settings.clone()
            });
            if path.is_empty() {
                state.loaded = None;
                state.message = Some("No picture file given".to_owned());
            } else {
                state.start_load(&path, max_side);
            }
        }
        let remove = ui.add_enabled(
            state.loaded.is_some() || !settings.path.is_empty(),
            egui::Button::new("Remove picture"),
        );
        if remove.clicked() {
            state.loaded = None;
            state.pending = None;
            state.path_field.clear();
            state.message = None;
            host.set_picture_settings(PictureSettings {
                path: String::new(),
                ..settings.clone()
            });
        }
        if state.is_loading() {
            ui.label(egui::RichText::new("Loading…").color(theme::TEXT_DIM));
        }
    });
    if let Some(message) = &state.message {
        ui.label(egui::RichText::new(message).color(theme::WARNING));
    }
    if let Some(loaded) = &state.loaded {
        ui.label(
            egui::RichText::new(format!(
                "Showing {}×{} pixels",
                loaded.picture.width, loaded.picture.height
            ))
            .small()
            .color(theme::TEXT_DIM),
        );
    }
    ui.spacing_mut().slider_width = 120.0;
    let mut opacity_percent = settings.opacity * 100.0;
    let mut yaw_offset_deg = settings.yaw_offset_deg;
    let opacity = ui.horizontal(|ui| {
        let label = ui.label("Picture opacity");
        ui.add(
            egui::Slider::new(&mut opacity_percent, 0.0..=100.0)
                .step_by(5.0)
                .suffix(" %"),
        )
        .labelled_by(label.id)
    });
    let yaw = ui.horizontal(|ui| {
        let label = ui.label("Picture yaw");
        ui.add(
            egui::Slider::new(&mut yaw_offset_deg, -180.0..=180.0)
                .step_by(1.0)
                .suffix("°"),
        )
        .labelled_by(label.id)
        .on_hover_text(
            "Azimuth of the sound field that the picture's centre shows; the picture turns \
                 with the map's view yaw",
        )
    });
    if opacity.inner.changed() || yaw.inner.changed() {
        host.set_picture_settings(PictureSettings {
            opacity: opacity_percent / 100.0,
            yaw_offset_deg,
            ..settings.clone()
        });
    }
}
