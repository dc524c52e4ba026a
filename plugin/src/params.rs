//! The plugin's parameters (automation targets) and persisted view state.
//!
//! Parameters are what a host may automate: the assumed input format, map method and band,
//! time constant, the map's dB range (automatic or manual), the louder-than-W tolerance and
//! the view rotation. Their display names are the editor's labels. Display switches (hold,
//! whole-programme map, overlays) are not automation targets; they are saved with the session
//! as one [`ViewSettings`] record, the picture behind the map as a [`PictureSettings`] record
//! (its path, never its pixels) and the folder for saved views as a path; every field falls
//! back to its default, so state from older or damaged saves loads without a crash.
//!
//! Parameter IDs are part of saved sessions and must never change (names may).

use crate::ambisonic_buses::HostStatedFormat;
use fieldglass_dsp::engine::{AnalysisSettings, Band, EngineControl, MapMethod};
use fieldglass_dsp::format::AmbiFormat;
use nice_plug::prelude::*;
use serde::{Deserialize, Serialize};
use std::sync::{Arc, RwLock};

/// Time-constant range of the map integration, ms (the engine clamps to the same range).
pub const TIME_CONSTANT_MIN_MS: f32 = 50.0;
pub const TIME_CONSTANT_MAX_MS: f32 = 10_000.0;
pub const TIME_CONSTANT_DEFAULT_MS: f32 = 300.0;

/// Range of the map's colour scale (the span from the brightest to the darkest colour), dB.
pub const MAP_RANGE_MIN_DB: f32 = 6.0;
pub const MAP_RANGE_MAX_DB: f32 = 60.0;
pub const MAP_RANGE_DEFAULT_DB: f32 = 30.0;

/// Louder-than-W tolerance, dB.
pub const TOLERANCE_MIN_DB: f32 = 0.1;
pub const TOLERANCE_MAX_DB: f32 = 3.0;
pub const TOLERANCE_DEFAULT_DB: f32 = 0.5;

/// Input formats a user can assume (the check may also consider others).
#[derive(Enum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum FormatChoice {
    #[id = "acn-sn3d"]
    #[name = "AmbiX (ACN/SN3D)"]
    AcnSn3d,
    #[id = "acn-n3d"]
    #[name = "ACN/N3D"]
    AcnN3d,
    #[id = "fuma"]
    #[name = "FuMa"]
    Fuma,
    #[id = "acn-maxn"]
    #[name = "ACN/maxN"]
    AcnMaxn,
}

impl FormatChoice {
    pub const ALL: [FormatChoice; 4] = [Self::AcnSn3d, Self::AcnN3d, Self::Fuma, Self::AcnMaxn];

    pub fn format(self) -> AmbiFormat {
        match self {
            Self::AcnSn3d => AmbiFormat::ACN_SN3D,
            Self::AcnN3d => AmbiFormat::ACN_N3D,
            Self::Fuma => AmbiFormat::FUMA,
            Self::AcnMaxn => AmbiFormat::ACN_MAXN,
        }
    }

    /// The choice for `format`, or `None` for formats the parameter does not offer (FuMa
    /// ordering with SN3D or N3D weights).
    pub fn from_format(format: AmbiFormat) -> Option<Self> {
        Self::ALL.into_iter().find(|c| c.format() == format)
    }

    /// The choices a stream of `order` can be read as (FuMa and maxN stop at third order);
    /// all of them while the order is not known yet.
    pub fn allowed_for(order: Option<usize>) -> impl Iterator<Item = FormatChoice> {
        Self::ALL
            .into_iter()
            .filter(move |c| match (order, c.format().max_order()) {
                (Some(order), Some(max_order)) => order <= max_order,
                _ => true,
            })
    }
}

/// Map method as a parameter value.
#[derive(Enum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum MethodChoice {
    #[id = "basic"]
    #[name = "Basic"]
    Basic,
    #[id = "max-re"]
    #[name = "max-rE"]
    MaxRe,
    #[id = "in-phase"]
    #[name = "In-phase"]
    InPhase,
    #[id = "mvdr"]
    #[name = "MVDR"]
    Mvdr,
    #[id = "music"]
    #[name = "MUSIC"]
    Music,
}

impl MethodChoice {
    pub fn method(self) -> MapMethod {
        match self {
            Self::Basic => MapMethod::Basic,
            Self::MaxRe => MapMethod::MaxRe,
            Self::InPhase => MapMethod::InPhase,
            Self::Mvdr => MapMethod::Mvdr,
            Self::Music => MapMethod::Music,
        }
    }
}

/// Analysis band as a parameter value.
#[derive(Enum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum BandChoice {
    #[id = "full"]
    #[name = "Full"]
    Full,
    #[id = "low"]
    #[name = "Low"]
    Low,
    #[id = "mid"]
    #[name = "Mid"]
    Mid,
    #[id = "high"]
    #[name = "High"]
    High,
}

impl BandChoice {
    pub fn band(self) -> Band {
        match self {
            Self::Full => Band::Full,
            Self::Low => Band::Low,
            Self::Mid => Band::Mid,
            Self::High => Band::High,
        }
    }
}

/// Display switches saved with the session (not automation targets). Every field has a
/// default, unknown fields are ignored, so older and newer saves load.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default)]
pub struct ViewSettings {
    /// Freeze the live map.
    pub hold: bool,
    /// Show the whole-programme (integrated) map instead of the live one.
    pub show_integrated: bool,
    /// Draw the 30° grid over the map.
    pub show_grid: bool,
    /// Draw azimuth/elevation numbers and direction words.
    pub show_labels: bool,
    /// Mark the strongest directions.
    pub show_sources: bool,
}

impl Default for ViewSettings {
    fn default() -> Self {
        Self {
            hold: false,
            show_integrated: false,
            show_grid: true,
            show_labels: true,
            show_sources: true,
        }
    }
}

/// The picture behind the map, saved with the session: where it is, how strongly it shows
/// and how it is turned. The pixels are read again from `path` when the editor opens.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct PictureSettings {
    /// PNG or JPEG file, equirectangular 2:1; empty = no picture.
    pub path: String,
    /// How much of the picture shows through the map, 0 (none) … 1 (only the picture).
    pub opacity: f32,
    /// Azimuth of the sound field that the picture's centre shows, degrees (positive = the
    /// picture turned to the left).
    pub yaw_offset_deg: f32,
}

/// Default opacity of a picture behind the map: enough to recognise the scene while the
/// map's colours still read.
pub const PICTURE_OPACITY_DEFAULT: f32 = 0.4;

impl Default for PictureSettings {
    fn default() -> Self {
        Self {
            path: String::new(),
            opacity: PICTURE_OPACITY_DEFAULT,
            yaw_offset_deg: 0.0,
        }
    }
}

impl PictureSettings {
    /// The values with out-of-range numbers brought back into range (a damaged save).
    pub fn sanitised(mut self) -> Self {
        self.opacity = if self.opacity.is_finite() {
            self.opacity.clamp(0.0, 1.0)
        } else {
            PICTURE_OPACITY_DEFAULT
        };
        self.yaw_offset_deg = if self.yaw_offset_deg.is_finite() {
            self.yaw_offset_deg.clamp(-180.0, 180.0)
        } else {
            0.0
        };
        self
    }
}

/// Everything the host saves and may automate.
#[derive(Params)]
pub struct FieldglassParams {
    /// How the incoming channels are assumed to be ordered and scaled.
    #[id = "format"]
    pub assumed_format: EnumParam<FormatChoice>,
    #[id = "method"]
    pub method: EnumParam<MethodChoice>,
    #[id = "band"]
    pub band: EnumParam<BandChoice>,
    /// Integration time constant of the live map, ms.
    #[id = "time_constant"]
    pub time_constant_ms: FloatParam,
    /// Span of the map's colour scale below its top, dB (used when the automatic range is off).
    #[id = "map_range"]
    pub map_range_db: FloatParam,
    /// Choose the map range from the method and order (the beam's highest side lobe, see
    /// `fieldglass_dsp::beam::display_range`) instead of the manual Map range.
    #[id = "auto_map_range"]
    pub auto_map_range: BoolParam,
    /// A channel more than this above W (after conversion to SN3D) is flagged, dB.
    #[id = "over_omni_tolerance"]
    pub over_omni_tolerance_db: FloatParam,
    /// Display rotation about the vertical axis (positive turns the view to the left), degrees.
    #[id = "view_yaw"]
    pub view_yaw_deg: FloatParam,
    /// Display tilt (positive looks up), degrees.
    #[id = "view_pitch"]
    pub view_pitch_deg: FloatParam,
    /// Display switches, saved with the session.
    #[persist = "view"]
    pub view: Arc<RwLock<ViewSettings>>,
    /// The picture behind the map (path, opacity, yaw offset), saved with the session.
    #[persist = "picture"]
    pub picture: Arc<RwLock<PictureSettings>>,
    /// Folder the editor's "Save view" writes to, saved with the session.
    #[persist = "save_folder"]
    pub save_folder: Arc<RwLock<String>>,
    /// The format the host stated for the buses (not saved: the host states it again).
    pub host_stated_format: HostStatedFormat,
}

impl Default for FieldglassParams {
    fn default() -> Self {
        let db_to_string = Arc::new(|value: f32| format!("{value:.1}"));
        let degrees_to_string = Arc::new(|value: f32| format!("{value:.0}"));
        Self {
            assumed_format: EnumParam::new("Assumed format", FormatChoice::AcnSn3d),
            method: EnumParam::new("Map method", MethodChoice::MaxRe),
            band: EnumParam::new("Band", BandChoice::Full),
            // Skewed towards short times so the slider is close to logarithmic over 50 ms–10 s.
            time_constant_ms: FloatParam::new(
                "Time constant",
                TIME_CONSTANT_DEFAULT_MS,
                FloatRange::Skewed {
                    min: TIME_CONSTANT_MIN_MS,
                    max: TIME_CONSTANT_MAX_MS,
                    factor: FloatRange::skew_factor(-2.0),
                },
            )
            .with_unit(" ms")
            .with_value_to_string(Arc::new(|value: f32| format!("{value:.0}"))),
            map_range_db: FloatParam::new(
                "Map range",
                MAP_RANGE_DEFAULT_DB,
                FloatRange::Linear {
                    min: MAP_RANGE_MIN_DB,
                    max: MAP_RANGE_MAX_DB,
                },
            )
            .with_step_size(1.0)
            .with_unit(" dB")
            .with_value_to_string(Arc::new(|value: f32| format!("{value:.0}"))),
            auto_map_range: BoolParam::new("Automatic range", true),
            over_omni_tolerance_db: FloatParam::new(
                "Louder-than-W tolerance",
                TOLERANCE_DEFAULT_DB,
                FloatRange::Linear {
                    min: TOLERANCE_MIN_DB,
                    max: TOLERANCE_MAX_DB,
                },
            )
            .with_step_size(0.1)
            .with_unit(" dB")
            .with_value_to_string(db_to_string),
            view_yaw_deg: FloatParam::new(
                "View yaw",
                0.0,
                FloatRange::Linear {
                    min: -180.0,
                    max: 180.0,
                },
            )
            .with_step_size(1.0)
            .with_unit("°")
            .with_value_to_string(degrees_to_string.clone()),
            view_pitch_deg: FloatParam::new(
                "View pitch",
                0.0,
                FloatRange::Linear {
                    min: -90.0,
                    max: 90.0,
                },
            )
            .with_step_size(1.0)
            .with_unit("°")
            .with_value_to_string(degrees_to_string),
            view: Arc::new(RwLock::new(ViewSettings::default())),
            picture: Arc::new(RwLock::new(PictureSettings::default())),
            save_folder: Arc::new(RwLock::new(String::new())),
            host_stated_format: HostStatedFormat::default(),
        }
    }
}

impl FieldglassParams {
    /// The persisted view switches (defaults if the lock was poisoned).
    pub fn view_settings(&self) -> ViewSettings {
        self.view.read().map(|v| *v).unwrap_or_default()
    }

    /// The persisted picture settings, sanitised (defaults if the lock was poisoned).
    pub fn picture_settings(&self) -> PictureSettings {
        self.picture
            .read()
            .map(|p| p.clone())
            .unwrap_or_default()
            .sanitised()
    }

    /// Replaces the persisted picture settings.
    pub fn set_picture_settings(&self, settings: PictureSettings) {
        if let Ok(mut picture) = self.picture.write() {
            *picture = settings.sanitised();
        }
    }

    /// The persisted folder for saved views.
    pub fn save_folder(&self) -> String {
        self.save_folder
            .read()
            .map(|f| f.clone())
            .unwrap_or_default()
    }

    /// Replaces the persisted folder for saved views.
    pub fn set_save_folder(&self, folder: &str) {
        if let Ok(mut saved) = self.save_folder.write() {
            folder.clone_into(&mut saved);
        }
    }

    /// Changes the persisted view switches.
    pub fn update_view(&self, f: impl FnOnce(&mut ViewSettings)) {
        if let Ok(mut view) = self.view.write() {
            f(&mut view);
        }
    }

    /// Copies parameter values and persisted switches into the engine's settings. Cheap and
    /// lock-free on the engine side (the view lock is held only for a copy); the engine's
    /// generation changes only if something differs. View rotation and the map range are
    /// display-only and not copied.
    pub fn apply_to(&self, control: &EngineControl) {
        let view = self.view_settings();
        control.update(|settings| {
            self.copy_automatable_into(settings);
            settings.hold = view.hold;
            settings.show_integrated = view.show_integrated;
        });
    }

    /// The format the analysis assumes: the user's choice if the Assumed format parameter is
    /// off its default, else what the host stated, else the default (AmbiX). Plain atomics only.
    #[inline]
    pub fn effective_format(&self) -> AmbiFormat {
        let chosen = self.assumed_format.value();
        if chosen != self.assumed_format.default_plain_value() {
            return chosen.format();
        }
        self.host_stated_format
            .load()
            .unwrap_or_else(|| chosen.format())
    }

    /// Writes the automatable parameters that the analysis uses into `settings`. Reads plain
    /// atomics only, so the audio thread may call it.
    #[inline]
    pub fn copy_automatable_into(&self, settings: &mut AnalysisSettings) {
        settings.assumed_format = self.effective_format();
        settings.method = self.method.value().method();
        settings.band = self.band.value().band();
        settings.time_constant_ms = f64::from(self.time_constant_ms.value());
        settings.over_omni_tolerance_db = f64::from(self.over_omni_tolerance_db.value());
    }
}
