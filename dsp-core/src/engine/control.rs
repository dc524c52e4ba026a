//! Settings shared between whoever controls the analysis (plugin parameters, GUI, scanner) and
//! the analysis side, as atomics: writers never block and the audio thread is never involved.
//! The analysis side polls [`EngineControl::generation`] and rebuilds only what changed.

use super::snapshot::{Band, MapMethod, MapScale, Snapshot};
use crate::format::AmbiFormat;
use atomic_float::AtomicF64;
use std::sync::atomic::{AtomicBool, AtomicU8, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};

/// Analysis settings as plain data (the scanner fills one directly).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AnalysisSettings {
    pub assumed_format: AmbiFormat,
    pub method: MapMethod,
    /// Band whose map and sources the snapshot carries.
    pub band: Band,
    /// Edges between low/mid and mid/high, Hz.
    pub band_edges_hz: [f64; 2],
    /// Exponential integration time constant, ms (50 ms … 10 s).
    pub time_constant_ms: f64,
    /// Freeze the live map (the integrated accumulator keeps running).
    pub hold: bool,
    /// Show the whole-programme (integrated) map instead of the live one.
    pub show_integrated: bool,
    pub map_scale: MapScale,
    /// Grid step of the equirectangular map, degrees.
    pub grid_step_deg: f64,
    /// Map updates per second.
    pub map_rate_hz: f64,
    /// Over-omni tolerance, dB.
    pub over_omni_tolerance_db: f64,
    /// Most sources to report.
    pub max_sources: usize,
    /// Minimum separation between reported sources, degrees.
    pub source_separation_deg: f64,
    /// Sources weaker than this below the strongest are not reported, dB (positive number).
    pub source_floor_db: f64,
    /// Make the map (and its sources) reading the input as this format instead of the
    /// assumed one: a momentary comparison, e.g. with the detected format while a button is
    /// held. Meters, loudness, the format check and findings keep the assumed format, and
    /// the assumption itself does not change. `None` (the default) = the assumed format.
    pub map_format_override: Option<AmbiFormat>,
    /// The format the stream's own metadata declares (a file's ADM): the format check is
    /// compared with it too (`metadata-mismatch`). `None` where nothing is declared (a live
    /// stream).
    pub declared_format: Option<AmbiFormat>,
}

impl Default for AnalysisSettings {
    fn default() -> Self {
        Self {
            assumed_format: AmbiFormat::ACN_SN3D,
            method: MapMethod::MaxRe,
            band: Band::Full,
            band_edges_hz: [250.0, 4000.0],
            time_constant_ms: 300.0,
            hold: false,
            show_integrated: false,
            map_scale: MapScale::RelativeDb,
            grid_step_deg: 2.0,
            map_rate_hz: 30.0,
            over_omni_tolerance_db: 0.5,
            max_sources: 6,
            source_separation_deg: 20.0,
            source_floor_db: 15.0,
            map_format_override: None,
            declared_format: None,
        }
    }
}

pub const TIME_CONSTANT_RANGE_MS: (f64, f64) = (50.0, 10_000.0);

/// Lock-free cell of [`AnalysisSettings`] plus one-shot requests (resets).
#[derive(Debug)]
pub struct EngineControl {
    format: AtomicU8,
    method: AtomicU8,
    band: AtomicU8,
    scale: AtomicU8,
    edge_low_hz: AtomicF64,
    edge_high_hz: AtomicF64,
    time_constant_ms: AtomicF64,
    hold: AtomicBool,
    show_integrated: AtomicBool,
    grid_step_deg: AtomicF64,
    map_rate_hz: AtomicF64,
    over_omni_tolerance_db: AtomicF64,
    /// 0 = none, else 1 + index into [`AmbiFormat::ALL`].
    map_format_override: AtomicU8,
    generation: AtomicU64,
    reset_loudness: AtomicBool,
    reset_integrated: AtomicBool,
    reset_clips: AtomicBool,
    reset_finding_log: AtomicBool,
    /// Whether anyone looks at maps (the GUI sets it while open); analysis may skip map work.
    maps_wanted: AtomicBool,
    fixed: AnalysisSettings,
}

fn format_index(f: AmbiFormat) -> u8 {
    AmbiFormat::ALL.iter().position(|&x| x == f).unwrap_or(0) as u8
}

impl EngineControl {
    pub fn new(settings: AnalysisSettings) -> Arc<Self> {
        let c = Arc::new(Self {
            format: AtomicU8::new(0),
            method: AtomicU8::new(0),
            band: AtomicU8::new(0),
            scale: AtomicU8::new(0),
            edge_low_hz: AtomicF64::new(0.0),
            edge_high_hz: AtomicF64::new(0.0),
            time_constant_ms: AtomicF64::new(0.0),
            hold: AtomicBool::new(false),
            show_integrated: AtomicBool::new(false),
            grid_step_deg: AtomicF64::new(0.0),
            map_rate_hz: AtomicF64::new(0.0),
            over_omni_tolerance_db: AtomicF64::new(0.0),
            map_format_override: AtomicU8::new(0),
            generation: AtomicU64::new(0),
            reset_loudness: AtomicBool::new(false),
            reset_integrated: AtomicBool::new(false),
            reset_clips: AtomicBool::new(false),
            reset_finding_log: AtomicBool::new(false),
            maps_wanted: AtomicBool::new(true),
            fixed: settings,
        });
        c.store(&settings);
        c
    }

    /// Writes every setting and bumps the generation if anything changed.
    pub fn store(&self, s: &AnalysisSettings) {
        if self.load() == *s && self.generation() > 0 {
            return;
        }
        let r = Ordering::Relaxed;
        self.format.store(format_index(s.assumed_format), r);
        self.method.store(
            MapMethod::ALL
                .iter()
                .position(|&m| m == s.method)
                .unwrap_or(1) as u8,
            r,
        );
        self.band.store(s.band.index() as u8, r);
        self.scale
            .store(matches!(s.map_scale, MapScale::AbsoluteDbfs) as u8, r);
        self.edge_low_hz.store(s.band_edges_hz[0], r);
        self.edge_high_hz.store(s.band_edges_hz[1], r);
        self.time_constant_ms.store(
            s.time_constant_ms
                .clamp(TIME_CONSTANT_RANGE_MS.0, TIME_CONSTANT_RANGE_MS.1),
            r,
        );
        self.hold.store(s.hold, r);
        self.show_integrated.store(s.show_integrated, r);
        self.grid_step_deg.store(s.grid_step_deg, r);
        self.map_rate_hz.store(s.map_rate_hz, r);
        self.over_omni_tolerance_db
            .store(s.over_omni_tolerance_db, r);
        self.map_format_override
            .store(s.map_format_override.map_or(0, |f| format_index(f) + 1), r);
        self.generation.fetch_add(1, Ordering::Release);
    }

    /// Changes settings through a closure over the current ones.
    pub fn update(&self, f: impl FnOnce(&mut AnalysisSettings)) {
        let mut s = self.load();
        f(&mut s);
        self.store(&s);
    }

    /// The current settings.
    pub fn load(&self) -> AnalysisSettings {
        let r = Ordering::Relaxed;
        AnalysisSettings {
            assumed_format: AmbiFormat::ALL[self.format.load(r) as usize % AmbiFormat::ALL.len()],
            method: MapMethod::ALL[self.method.load(r) as usize % MapMethod::ALL.len()],
            band: Band::ALL[self.band.load(r) as usize % Band::ALL.len()],
            band_edges_hz: [self.edge_low_hz.load(r), self.edge_high_hz.load(r)],
            time_constant_ms: self.time_constant_ms.load(r),
            hold: self.hold.load(r),
            show_integrated: self.show_integrated.load(r),
            map_scale: if self.scale.load(r) == 1 {
                MapScale::AbsoluteDbfs
            } else {
                MapScale::RelativeDb
            },
            grid_step_deg: self.grid_step_deg.load(r),
            map_rate_hz: self.map_rate_hz.load(r),
            over_omni_tolerance_db: self.over_omni_tolerance_db.load(r),
            map_format_override: match self.map_format_override.load(r) {
                0 => None,
                i => AmbiFormat::ALL.get(i as usize - 1).copied(),
            },
            ..self.fixed
        }
    }

    /// Increases with every change of settings.
    pub fn generation(&self) -> u64 {
        self.generation.load(Ordering::Acquire)
    }

    pub fn request_loudness_reset(&self) {
        self.reset_loudness.store(true, Ordering::Release);
    }

    pub fn request_integrated_reset(&self) {
        self.reset_integrated.store(true, Ordering::Release);
    }

    pub fn request_clip_reset(&self) {
        self.reset_clips.store(true, Ordering::Release);
    }

    /// Takes (and clears) the pending one-shot requests: (loudness, integrated map, clips).
    pub fn take_requests(&self) -> (bool, bool, bool) {
        (
            self.reset_loudness.swap(false, Ordering::AcqRel),
            self.reset_integrated.swap(false, Ordering::AcqRel),
            self.reset_clips.swap(false, Ordering::AcqRel),
        )
    }

    /// Asks the analysis to start its finding log afresh (first-seen times count from now).
    pub fn request_finding_log_reset(&self) {
        self.reset_finding_log.store(true, Ordering::Release);
    }

    /// Takes (and clears) a pending finding-log reset.
    pub fn take_finding_log_reset(&self) -> bool {
        self.reset_finding_log.swap(false, Ordering::AcqRel)
    }

    /// Shows the map under `format` (or under the assumed format again with `None`) without
    /// touching any other setting: the momentary comparison of the Sphere panel.
    pub fn set_map_format_override(&self, format: Option<AmbiFormat>) {
        self.update(|s| s.map_format_override = format);
    }

    pub fn set_maps_wanted(&self, wanted: bool) {
        self.maps_wanted.store(wanted, Ordering::Relaxed);
    }

    pub fn maps_wanted(&self) -> bool {
        self.maps_wanted.load(Ordering::Relaxed)
    }
}

/// The latest snapshot, for readers on other threads (GUI). Never touched by the audio thread,
/// so a short mutex is fine here.
#[derive(Debug, Default)]
pub struct SnapshotSlot {
    latest: Mutex<Option<Arc<Snapshot>>>,
}

impl SnapshotSlot {
    pub fn new() -> Arc<Self> {
        Arc::new(Self::default())
    }

    pub fn publish(&self, snapshot: Arc<Snapshot>) {
        if let Ok(mut slot) = self.latest.lock() {
            *slot = Some(snapshot);
        }
    }

    /// The most recent snapshot, if any has been published.
    pub fn latest(&self) -> Option<Arc<Snapshot>> {
        self.latest.lock().ok().and_then(|s| s.clone())
    }

    pub fn clear(&self) {
        if let Ok(mut slot) = self.latest.lock() {
            *slot = None;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn settings_round_trip_and_generation() {
        let control = EngineControl::new(AnalysisSettings::default());
        let g0 = control.generation();
        control.update(|s| {
            s.assumed_format = AmbiFormat::FUMA;
            s.method = MapMethod::Music;
            s.band = Band::High;
            s.hold = true;
            s.map_format_override = Some(AmbiFormat::ACN_MAXN);
        });
        let s = control.load();
        assert_eq!(s.assumed_format, AmbiFormat::FUMA);
        assert_eq!(s.method, MapMethod::Music);
        assert_eq!(s.band, Band::High);
        assert!(s.hold);
        assert_eq!(s.map_format_override, Some(AmbiFormat::ACN_MAXN));
        assert!(control.generation() > g0);
        let g1 = control.generation();
        control.store(&s);
        assert_eq!(
            control.generation(),
            g1,
            "storing the same settings changes nothing"
        );
        control.set_map_format_override(None);
        assert_eq!(control.load().map_format_override, None);
        assert_eq!(control.load().assumed_format, AmbiFormat::FUMA);
        assert!(control.generation() > g1);
        assert!(!control.take_finding_log_reset());
        control.request_finding_log_reset();
        assert!(control.take_finding_log_reset());
        assert!(!control.take_finding_log_reset(), "a request is taken once");
    }
}
