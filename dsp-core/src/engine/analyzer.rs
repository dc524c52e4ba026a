//! The analysis side: raw blocks in, [`Snapshot`]s out. Driven synchronously by the scanner
//! and tests, or from its own thread by [`super::AnalysisThread`].
//!
//! Per block: meters on the raw input, W loudness after conversion, one STFT over the raw
//! spatial channels producing band covariances (converted to SN3D only when needed: the
//! conversion is a permutation with gains, so R_sn3d = C·R_raw·Cᵀ exactly). At the map rate:
//! maps, sources, DirAC, format check and findings.

use super::control::AnalysisSettings;
use super::diffuseness::{
    DiffusenessTracker, FirstOrderMoments, energy_and_diffuseness, first_order_moments,
};
use super::finding_log::FindingLog;
use super::findings::{ChannelFacts, FindingInputs, collect_findings, live_findings};
use super::layout::{ChannelLayout, LayoutError};
use super::maps::MapMaker;
use super::snapshot::*;
use crate::covariance::{BAND_COUNT, BandCovariance};
use crate::format::{AmbiFormat, ConversionPlan, FormatError};
use crate::format_check::{FormatCheckInput, FormatChecker};
use crate::loudness::LoudnessMeter;
use crate::meters::{
    ChannelMeterConfig, ChannelMeters, FullScale, LEVEL_FLOOR_DB, ProgrammeTotals,
    mean_square_to_db,
};
use crate::sh::order_degree;
use crate::sphere::Direction;
use crate::sphere::grid::EquirectGrid;
use std::fmt;
use std::time::Instant;

/// Below this mean square a channel counts as silent (−120 dBFS).
pub const SILENT_MEAN_SQUARE: f64 = 1e-12;
/// Format check runs at most this often, per second of audio.
const FORMAT_CHECK_RATE_HZ: f64 = 2.0;

/// What the analysis needs to know about the stream, fixed for its lifetime.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StreamSetup {
    pub sample_rate_hz: f64,
    /// Input channels in all (spatial + extra).
    pub channels: usize,
}

/// Why an analysis cannot be built.
#[derive(Debug, Clone, PartialEq)]
pub enum EngineError {
    Layout(LayoutError),
    Format(FormatError),
    SampleRate { sample_rate_hz: f64 },
    Settings(String),
}

impl fmt::Display for EngineError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Layout(e) => e.fmt(f),
            Self::Format(e) => e.fmt(f),
            Self::SampleRate { sample_rate_hz } => write!(
                f,
                "sample rate {sample_rate_hz} Hz is outside the supported 8 kHz … 768 kHz"
            ),
            Self::Settings(s) => write!(f, "invalid analysis settings: {s}"),
        }
    }
}

impl std::error::Error for EngineError {}

impl From<FormatError> for EngineError {
    fn from(e: FormatError) -> Self {
        Self::Format(e)
    }
}

/// The analysis. Construction allocates everything; [`process`](Self::process) allocates only
/// when a snapshot is produced (map buffers on first use, finding messages).
pub struct Analyzer {
    setup: StreamSetup,
    layout: ChannelLayout,
    settings: AnalysisSettings,
    conversion: ConversionPlan,
    /// Conversion the map uses instead of `conversion` while a comparison format is asked for
    /// ([`AnalysisSettings::map_format_override`]); `None` = the assumed format.
    map_conversion: Option<ConversionPlan>,
    meters: ChannelMeters,
    loudness: LoudnessMeter,
    covariance: BandCovariance,
    /// Live (exponentially integrated) raw covariance per band, [band][i·M + j].
    live: Vec<Vec<f64>>,
    /// Whole-programme sum of frame covariances per band.
    integrated: Vec<Vec<f64>>,
    /// STFT frames summed into `integrated`, per band (split bands restart when their edges move).
    integrated_frames: [u64; BAND_COUNT],
    /// Short-time DirAC, averaged over the programme.
    diffuseness: DiffusenessTracker,
    frames_since_map: usize,
    frames_since_check: usize,
    maps: MapMaker,
    checker: FormatChecker,
    w_scratch: Vec<f32>,
    r_sn3d: Vec<f64>,
    /// Audio frames analysed since the start or the last programme reset.
    programme_frames: u64,
    snapshot: Snapshot,
    sequence: u64,
    time_s: f64,
    load_busy_s: f64,
    load_audio_s: f64,
    /// Why the requested format is not the one in use (see [`Analyzer::apply_settings`]).
    format_not_applied: Option<String>,
    /// Input channels known to be absent (zero-filled components of a mixed-order set).
    absent_channels: Vec<usize>,
    /// Spread each block over the rayon pool ([`Analyzer::set_parallel`]).
    parallel: bool,
    finding_log: FindingLog,
}

/// W after conversion to SN3D into `w_scratch`, then into the loudness meter.
fn measure_w(
    conversion: &ConversionPlan,
    loudness: &mut LoudnessMeter,
    w_scratch: &mut Vec<f32>,
    block: &[&[f32]],
    frames: usize,
) {
    let source = conversion.source_channel(0);
    let gain = conversion.gain(0) as f32;
    let Some(w) = block.get(source) else { return };
    if w_scratch.len() < frames {
        w_scratch.resize(frames, 0.0);
    }
    for (d, &x) in w_scratch[..frames].iter_mut().zip(w.iter()) {
        *d = x * gain;
    }
    loudness.push(&w_scratch[..frames]);
}

impl Analyzer {
    pub fn new(setup: StreamSetup, settings: AnalysisSettings) -> Result<Self, EngineError> {
        if !(setup.sample_rate_hz.is_finite()
            && (8_000.0..=768_000.0).contains(&setup.sample_rate_hz))
        {
            return Err(EngineError::SampleRate {
                sample_rate_hz: setup.sample_rate_hz,
            });
        }
        let layout =
            ChannelLayout::from_channel_count(setup.channels).map_err(EngineError::Layout)?;
        let conversion = ConversionPlan::to_sn3d(settings.assumed_format, layout.order)?;
        let meter_config = ChannelMeterConfig {
            over_omni_tolerance_db: settings.over_omni_tolerance_db.clamp(0.0, 100.0),
            ..ChannelMeterConfig::default()
        };
        let meters = ChannelMeters::new(setup.channels, setup.sample_rate_hz, meter_config)
            .map_err(|e| EngineError::Settings(e.to_string()))?;
        let loudness = LoudnessMeter::new(setup.sample_rate_hz)
            .map_err(|e| EngineError::Settings(e.to_string()))?;
        let m = layout.spatial_channels;
        let covariance = BandCovariance::new(m, setup.sample_rate_hz, settings.band_edges_hz);
        let diffuseness = DiffusenessTracker::new(covariance.framing().hop, setup.sample_rate_hz);
        let grid = grid_for(settings.grid_step_deg)?;
        let checker =
            FormatChecker::new(layout.order).map_err(|e| EngineError::Settings(e.to_string()))?;
        let maps = MapMaker::new(layout.order, grid, settings.max_sources)
            .map_err(EngineError::Settings)?;
        Ok(Self {
            setup,
            layout,
            settings,
            conversion,
            map_conversion: None,
            meters,
            loudness,
            covariance,
            live: vec![vec![0.0; m * m]; BAND_COUNT],
            integrated: vec![vec![0.0; m * m]; BAND_COUNT],
            integrated_frames: [0; BAND_COUNT],
            diffuseness,
            frames_since_map: 0,
            frames_since_check: usize::MAX / 2,
            maps,
            checker,
            w_scratch: Vec::new(),
            r_sn3d: vec![0.0; m * m],
            programme_frames: 0,
            snapshot: Snapshot {
                sample_rate_hz: setup.sample_rate_hz,
                order: layout.order,
                channels: setup.channels,
                assumed_format: settings.assumed_format,
                band_edges_hz: settings.band_edges_hz,
                ..Snapshot::default()
            },
            sequence: 0,
            time_s: 0.0,
            load_busy_s: 0.0,
            load_audio_s: 0.0,
            format_not_applied: None,
            absent_channels: Vec::new(),
            parallel: false,
            finding_log: FindingLog::default(),
        })
        .map(|mut analyzer| {
            analyzer.set_map_format_override(settings.map_format_override);
            analyzer
        })
    }

    /// Declares input channels that are known to be absent (the components a FuMa mixed-order
    /// file does not carry, zero-filled by the reader): never reported as silent or duplicated.
    pub fn set_absent_channels(&mut self, channels: &[usize]) {
        self.absent_channels = channels.to_vec();
    }

    pub fn layout(&self) -> ChannelLayout {
        self.layout
    }

    pub fn settings(&self) -> &AnalysisSettings {
        &self.settings
    }

    pub fn setup(&self) -> StreamSetup {
        self.setup
    }

    /// Reserves scratch for blocks up to `frames` long so that `process` never grows it.
    pub fn reserve_block(&mut self, frames: usize) {
        self.w_scratch
            .reserve(frames.saturating_sub(self.w_scratch.len()));
    }

    /// Applies new settings. Changing the format or band edges keeps the accumulated
    /// covariance (it is kept in the raw input domain); changing the grid rebuilds the map plan.
    ///
    /// A format the stream cannot be read as (FuMa above third order) is refused: the previous
    /// format stays in use, every other setting is still applied, the error is returned and the
    /// snapshot says why ([`Snapshot::format_not_applied`]) until a usable format is chosen.
    pub fn apply_settings(&mut self, settings: AnalysisSettings) -> Result<(), EngineError> {
        let mut settings = settings;
        let mut refused = None;
        if settings.assumed_format != self.settings.assumed_format {
            match ConversionPlan::to_sn3d(settings.assumed_format, self.layout.order) {
                Ok(conversion) => {
                    self.conversion = conversion;
                    self.loudness.reset();
                    // Short-time DirAC is formed after conversion; the raw covariances stay.
                    self.diffuseness.reset();
                    self.format_not_applied = None;
                }
                Err(e) => {
                    self.refuse_format(&e);
                    settings.assumed_format = self.settings.assumed_format;
                    refused = Some(e);
                }
            }
        } else {
            // The format in use is the one asked for (again): nothing is refused any more.
            self.format_not_applied = None;
        }
        if settings.band_edges_hz != self.settings.band_edges_hz {
            self.covariance
                .set_band_edges(self.setup.sample_rate_hz, settings.band_edges_hz);
            // What the split bands accumulated belongs to the old edges; the full band stays.
            for band in [Band::Low, Band::Mid, Band::High] {
                let b = band.index();
                self.live[b].fill(0.0);
                self.integrated[b].fill(0.0);
                self.integrated_frames[b] = 0;
                self.diffuseness.reset_band(b);
            }
        }
        if settings.grid_step_deg != self.settings.grid_step_deg
            || settings.max_sources != self.settings.max_sources
        {
            let grid = grid_for(settings.grid_step_deg)?;
            self.maps = MapMaker::new(self.layout.order, grid, settings.max_sources)
                .map_err(EngineError::Settings)?;
        }
        self.settings = settings;
        self.set_map_format_override(settings.map_format_override);
        match refused {
            Some(e) => Err(e.into()),
            None => Ok(()),
        }
    }

    /// Records that a requested format could not be applied (`error` says why); the snapshot
    /// shows it with the format in use.
    pub fn refuse_format(&mut self, error: &FormatError) {
        self.format_not_applied = Some(format!(
            "{error}: the stream is analysed as {} instead",
            self.settings.assumed_format.human_name()
        ));
    }

    /// Reads the input as `format` for the map only (see
    /// [`AnalysisSettings::map_format_override`]). A format the stream cannot be read as
    /// (FuMa above third order) or the assumed format itself leaves the map on the assumed
    /// format. Builds a small conversion plan: analysis thread only.
    fn set_map_format_override(&mut self, format: Option<AmbiFormat>) {
        let wanted = format.filter(|&f| f != self.settings.assumed_format);
        if wanted == self.map_conversion.as_ref().map(|c| c.format()) {
            return;
        }
        self.map_conversion =
            wanted.and_then(|f| ConversionPlan::to_sn3d(f, self.layout.order).ok());
    }

    /// The format the map reads the input as.
    pub fn map_format(&self) -> AmbiFormat {
        self.map_conversion
            .as_ref()
            .map_or(self.settings.assumed_format, |c| c.format())
    }

    /// Starts the finding log afresh: first-seen times count from now.
    pub fn reset_finding_log(&mut self) {
        self.finding_log.reset(self.time_s);
    }

    pub fn reset_loudness(&mut self) {
        self.loudness.reset();
    }

    /// Starts a new whole programme (the whole-session view): integrated covariances, the
    /// format check's evidence, diffuseness and the per-channel programme figures. Loudness
    /// and clip counts have their own resets.
    pub fn reset_integrated(&mut self) {
        for r in &mut self.integrated {
            r.fill(0.0);
        }
        self.integrated_frames = [0; BAND_COUNT];
        self.diffuseness.reset();
        self.meters.reset_programme();
        self.programme_frames = 0;
        self.snapshot.format_check = Default::default();
        self.frames_since_check = usize::MAX / 2;
    }

    /// Spreads each block over the threads of the rayon pool: the channel meters (with true
    /// peak), W's loudness and the STFT frames of the block run as separate tasks (off by
    /// default: the plugin's analysis thread stays one thread; the scanner uses every core).
    /// The results are identical either way: the tasks share no state, and each frame's
    /// covariances are computed alone and then accumulated in order.
    pub fn set_parallel(&mut self, parallel: bool) {
        self.parallel = parallel;
    }

    pub fn reset_clips(&mut self) {
        self.meters.reset_clips();
        self.meters.reset_holds();
    }

    /// Analyses one block (planar, one slice per input channel, equal lengths). Returns true
    /// when a new snapshot is ready in [`snapshot`](Self::snapshot).
    pub fn process(&mut self, block: &[&[f32]]) -> bool {
        self.process_beside(block, || ()).0
    }

    /// [`process`](Self::process), running `beside` meanwhile: in parallel
    /// ([`set_parallel`](Self::set_parallel)) it is one more task of the pool beside the
    /// block's (a scanner decodes its next block there), otherwise it runs after the block.
    /// Returns whether a snapshot is ready, and what `beside` returned.
    pub fn process_beside<T: Send>(
        &mut self,
        block: &[&[f32]],
        beside: impl FnOnce() -> T + Send,
    ) -> (bool, T) {
        let started = Instant::now();
        let frames = block.first().map_or(0, |c| c.len());
        if frames == 0 {
            return (false, beside());
        }
        self.programme_frames += frames as u64;
        let m = self.layout.spatial_channels;
        let alpha = self.integration_factor();
        let hold = self.settings.hold;
        // Level side (meters with true peak, W loudness) and spatial side (STFT, covariance,
        // DirAC) read the same block and write disjoint state, so they may run at once.
        let (meters, loudness, w_scratch, conversion) = (
            &mut self.meters,
            &mut self.loudness,
            &mut self.w_scratch,
            &self.conversion,
        );
        let mut levels = move |parallel: bool| {
            if parallel {
                // Channels spread over the pool; W's loudness and `beside` run meanwhile.
                rayon::join(
                    || meters.push_parallel(block),
                    || measure_w(conversion, loudness, w_scratch, block, frames),
                );
            } else {
                meters.push(block);
                measure_w(conversion, loudness, w_scratch, block, frames);
            }
        };
        let parallel = self.parallel;
        let (live, integrated, count, diffuseness) = (
            &mut self.live,
            &mut self.integrated,
            &mut self.integrated_frames,
            &mut self.diffuseness,
        );
        let conversion = &self.conversion;
        let covariance = &mut self.covariance;
        let mut spatial = move |parallel: bool| {
            let on_frame = |bands: &[Vec<f64>]| {
                for (b, frame) in bands.iter().enumerate() {
                    if !hold {
                        for (l, &f) in live[b].iter_mut().zip(frame) {
                            *l = alpha * *l + (1.0 - alpha) * f;
                        }
                    }
                    for (s, &f) in integrated[b].iter_mut().zip(frame) {
                        *s += f;
                    }
                    count[b] += 1;
                    if m >= 4 {
                        diffuseness.push(b, &raw_first_order_moments(frame, m, conversion));
                    }
                }
            };
            let spatial_block = &block[..m.min(block.len())];
            if parallel {
                // The frames of the block spread over the pool, beside the level side.
                covariance.push_parallel(spatial_block, on_frame);
            } else {
                covariance.push(spatial_block, on_frame);
            }
        };
        let beside_result = if parallel {
            // Every piece of the block becomes a task of the pool (channel meters, loudness,
            // `beside`, the STFT frames), so the cores share the work whatever its mix.
            let (_, result) = rayon::join(
                move || rayon::join(move || levels(true), move || spatial(true)),
                beside,
            );
            result
        } else {
            levels(false);
            spatial(false);
            beside()
        };

        self.time_s += frames as f64 / self.setup.sample_rate_hz;
        self.frames_since_map += frames;
        self.frames_since_check = self.frames_since_check.saturating_add(frames);
        let map_interval =
            (self.setup.sample_rate_hz / self.settings.map_rate_hz.max(0.01)).max(1.0) as usize;
        let ready = self.frames_since_map >= map_interval;
        if ready {
            // Keep the remainder so the average rate is the requested one.
            self.frames_since_map = (self.frames_since_map - map_interval).min(map_interval);
            self.build_snapshot();
        }
        self.load_busy_s += started.elapsed().as_secs_f64();
        self.load_audio_s += frames as f64 / self.setup.sample_rate_hz;
        if self.load_audio_s >= 1.0 {
            self.snapshot.health.analysis_load = self.load_busy_s / self.load_audio_s;
            self.load_busy_s = 0.0;
            self.load_audio_s = 0.0;
        }
        (ready, beside_result)
    }

    /// Forces a snapshot now (e.g. at the end of a file).
    pub fn finish(&mut self) -> &Snapshot {
        self.frames_since_check = usize::MAX / 2;
        self.build_snapshot();
        &self.snapshot
    }

    /// The latest snapshot.
    pub fn snapshot(&self) -> &Snapshot {
        &self.snapshot
    }

    /// Sets hand-off health figures the analysis side cannot see itself.
    pub fn set_health_counters(&mut self, received_blocks: u64, dropped_blocks: u64) {
        self.snapshot.health.received_blocks = received_blocks;
        self.snapshot.health.dropped_blocks = dropped_blocks;
    }

    fn integration_factor(&self) -> f64 {
        let hop = self.covariance.framing().hop as f64;
        let tau_s = self.settings.time_constant_ms.max(1.0) / 1000.0;
        (-hop / (tau_s * self.setup.sample_rate_hz)).exp()
    }

    /// 1 / frames in the whole-programme accumulator of `band` (0 before the first frame).
    fn integrated_scale(&self, band: usize) -> f64 {
        match self.integrated_frames[band] {
            0 => 0.0,
            n => 1.0 / n as f64,
        }
    }

    /// Fills `r_sn3d` with the live or whole-programme covariance of `band` converted from the
    /// raw input to SN3D (ACN order): R[a][b] = g_a g_b R_raw[s_a][s_b].
    fn load_sn3d(&mut self, band: usize, integrated: bool) {
        self.load_sn3d_as(band, integrated, false);
    }

    /// [`load_sn3d`](Self::load_sn3d), converting with the map's format when `for_map`.
    fn load_sn3d_as(&mut self, band: usize, integrated: bool, for_map: bool) {
        let m = self.layout.spatial_channels;
        let (raw, scale) = if integrated {
            (&self.integrated[band], self.integrated_scale(band))
        } else {
            (&self.live[band], 1.0)
        };
        let conversion = match &self.map_conversion {
            Some(map_conversion) if for_map => map_conversion,
            _ => &self.conversion,
        };
        for a in 0..m {
            let (sa, ga) = (conversion.source_channel(a), conversion.gain(a));
            for b in 0..m {
                let (sb, gb) = (conversion.source_channel(b), conversion.gain(b));
                self.r_sn3d[a * m + b] = ga * gb * raw[sa * m + sb] * scale;
            }
        }
    }

    fn build_snapshot(&mut self) {
        let m = self.layout.spatial_channels;
        self.sequence += 1;
        let s = &self.settings;
        let (band, method, scale) = (s.band, s.method, s.map_scale);
        let (separation, floor) = (s.source_separation_deg, s.source_floor_db);
        let show_integrated = s.show_integrated;

        // Map of the selected band, under the comparison format while one is asked for.
        self.load_sn3d_as(band.index(), show_integrated, true);
        let mut map = std::mem::take(&mut self.snapshot.map);
        let mut sources = std::mem::take(&mut self.snapshot.sources);
        self.maps.make(
            &self.r_sn3d,
            method,
            scale,
            separation,
            floor,
            &mut map,
            &mut sources,
        );
        map.band = band;
        map.integrated = show_integrated;
        self.snapshot.map = map;
        self.snapshot.sources = sources;

        // DirAC per band, from the live covariance.
        for b in 0..BAND_COUNT {
            self.load_sn3d(b, false);
            self.snapshot.intensity[b] = dirac(&self.r_sn3d, m);
        }

        self.update_channels();

        if self.frames_since_check as f64 >= self.setup.sample_rate_hz / FORMAT_CHECK_RATE_HZ {
            self.frames_since_check = 0;
            self.run_format_check();
        }

        let map_format = self.map_format();
        let snap = &mut self.snapshot;
        snap.sequence = self.sequence;
        snap.time_s = self.time_s;
        snap.assumed_format = self.settings.assumed_format;
        snap.format_not_applied.clone_from(&self.format_not_applied);
        snap.band_edges_hz = self.covariance.layout().edges_hz();
        snap.frozen = self.settings.hold;
        snap.map_format = map_format;
        snap.findings = live_findings(snap, &self.settings);
        self.finding_log.update(self.time_s, &snap.findings);
        snap.finding_log.clear();
        snap.finding_log
            .extend_from_slice(self.finding_log.entries());
        snap.finding_log_from_reset = self.finding_log.counts_from_reset();
    }

    fn update_channels(&mut self) {
        let tolerance = self.settings.over_omni_tolerance_db;
        let explained: Vec<bool> = (0..self.setup.channels)
            .map(|c| self.emptiness_explained(c))
            .collect();
        let acn_of: Vec<Option<usize>> = (0..self.setup.channels)
            .map(|c| self.acn_of_input(c))
            .collect();
        let status = &mut self.snapshot.channel_status;
        status.resize(self.setup.channels, ChannelStatus::default());
        // SN3D level of a file channel = its raw level + 20·log10|gain of the ACN it carries|.
        let w_input = self.conversion.source_channel(0);
        let w_level = self.meters.rms_dbfs(w_input).unwrap_or(LEVEL_FLOOR_DB)
            + 20.0 * self.conversion.gain(0).abs().log10();
        for (c, st) in status.iter_mut().enumerate() {
            let reading = self.meters.reading(c).unwrap_or_default();
            let acn = acn_of[c];
            let sn3d_level = match acn {
                Some(a) => {
                    reading.rms_dbfs + 20.0 * self.conversion.gain(a).abs().max(1e-30).log10()
                }
                None => reading.rms_dbfs,
            };
            let w_active = w_level > -100.0;
            let over = acn.is_some_and(|a| a != 0) && w_active && sn3d_level > w_level + tolerance;
            let mut reading = reading;
            reading.over_omni = over;
            *st = ChannelStatus {
                input_index: c,
                acn,
                order: acn.map(|a| order_degree(a).0),
                degree: acn.map(|a| order_degree(a).1),
                reading,
                sn3d_level_dbfs: sn3d_level,
                over_omni: over,
                silent: reading.rms_dbfs < -120.0 && !explained[c],
            };
        }
        // Omni: W's raw meters, shifted by its conversion gain.
        let w_gain_db = 20.0 * self.conversion.gain(0).abs().log10();
        let w = self.meters.reading(w_input).unwrap_or_default();
        let omni = &mut self.snapshot.omni;
        omni.conversion_gain_db = w_gain_db;
        omni.sample_peak_dbfs = w.sample_peak_dbfs + w_gain_db;
        omni.true_peak_dbtp = w.true_peak_dbtp + w_gain_db;
        omni.max_true_peak_dbtp = w.max_true_peak_dbtp + w_gain_db;
        omni.rms_dbfs = w.rms_dbfs + w_gain_db;
        omni.momentary_lufs = self.loudness.momentary_lufs();
        omni.short_term_lufs = self.loudness.short_term_lufs();
        omni.integrated_lufs = self.loudness.integrated_lufs();
        omni.max_momentary_lufs = self.loudness.max_momentary_lufs();
        omni.max_short_term_lufs = self.loudness.max_short_term_lufs();
    }

    /// The format check on the whole-programme full-band covariance (the JSON and the report
    /// call its balance and effective order "whole programme", so it covers every frequency).
    /// Readiness counts the audio in analysed STFT frames, so a reset clears it.
    fn run_format_check(&mut self) {
        let m = self.layout.spatial_channels;
        let full = Band::Full.index();
        let scale = self.integrated_scale(full);
        let cov: Vec<f64> = self.integrated[full].iter().map(|v| v * scale).collect();
        let mid = Band::Mid.index();
        let mid_scale = self.integrated_scale(mid);
        let mid_cov: Vec<f64> = self.integrated[mid].iter().map(|v| v * mid_scale).collect();
        let mean_square = self.programme_mean_square();
        let input = FormatCheckInput {
            raw_covariance: &cov,
            order: self.layout.order,
            assumed: self.settings.assumed_format,
            channel_mean_square: &mean_square[..m],
            frames_seen: self.integrated_frames[full] * self.covariance.framing().hop as u64,
            absent_channels: &self.absent_channels,
            // The A-format test tells capsule signals from a close source's proximity effect
            // in the mid band.
            mid_band_covariance: (self.integrated_frames[mid] > 0).then_some(mid_cov.as_slice()),
        };
        self.snapshot.format_check = self.checker.check(&input).unwrap_or_default();
        self.snapshot.programme = self.programme_summary();
    }

    /// The whole-programme summary as of now (see [`ProgrammeSummary`]); the format check in
    /// it is the latest one.
    pub fn programme_summary(&self) -> ProgrammeSummary {
        let tolerance = self.settings.over_omni_tolerance_db;
        let totals: Vec<ProgrammeTotals> = (0..self.setup.channels)
            .map(|c| self.meters.programme(c).unwrap_or_default())
            .collect();
        let sn3d_mean_square = |c: usize| {
            let gain = self
                .acn_of_input(c)
                .map_or(1.0, |a| self.conversion.gain(a));
            totals[c].mean_square() * gain * gain
        };
        let w_input = self.conversion.source_channel(0);
        let w_sn3d_db = mean_square_to_db(sn3d_mean_square(w_input));
        let w_active = sn3d_mean_square(w_input) >= SILENT_MEAN_SQUARE;
        let check = &self.snapshot.format_check;
        let channels: Vec<ChannelProgramme> = (0..self.setup.channels)
            .map(|c| {
                let t = &totals[c];
                let acn = self.acn_of_input(c);
                let sn3d_db = mean_square_to_db(sn3d_mean_square(c));
                ChannelProgramme {
                    input_index: c,
                    acn,
                    order: acn.map(|a| order_degree(a).0),
                    degree: acn.map(|a| order_degree(a).1),
                    sample_peak_dbfs: t.sample_peak_dbfs(),
                    true_peak_dbtp: t.true_peak_dbtp(),
                    rms_dbfs: t.rms_dbfs(),
                    sn3d_rms_dbfs: sn3d_db,
                    clip_count: t.clip_count,
                    longest_clip_run: t.longest_clip_run,
                    invalid_samples: t.invalid_samples,
                    dc_offset: t.mean(),
                    over_omni: acn.is_some_and(|a| a != 0)
                        && w_active
                        && sn3d_db > w_sn3d_db + tolerance,
                    silent: t.mean_square() < SILENT_MEAN_SQUARE && !self.emptiness_explained(c),
                }
            })
            .collect();
        let w_gain_db = 20.0 * self.conversion.gain(0).abs().log10();
        let w = &totals[w_input];
        let omni = OmniProgramme {
            conversion_gain_db: w_gain_db,
            sample_peak_dbfs: w.sample_peak_dbfs() + w_gain_db,
            true_peak_dbtp: w.true_peak_dbtp() + w_gain_db,
            rms_dbfs: w_sn3d_db,
            integrated_lufs: self.loudness.integrated_lufs(),
            max_momentary_lufs: self.loudness.max_momentary_lufs(),
            max_short_term_lufs: self.loudness.max_short_term_lufs(),
        };
        let mut summary = ProgrammeSummary {
            duration_s: self.programme_frames as f64 / self.setup.sample_rate_hz,
            channels,
            order_balance_db: check.order_balance_db.clone(),
            effective_order: check.effective_order,
            diffuseness: std::array::from_fn(|b| self.diffuseness.mean(b)),
            omni,
            format_check: check.clone(),
            findings: Vec::new(),
        };
        summary.findings = self.programme_findings(&summary);
        summary
    }

    /// The engine's finding rules applied to whole-programme figures.
    fn programme_findings(&self, summary: &ProgrammeSummary) -> Vec<Finding> {
        let channels: Vec<ChannelFacts> = summary.channels.iter().map(Into::into).collect();
        collect_findings(
            &FindingInputs {
                channels: &channels,
                format_check: &summary.format_check,
                order: self.layout.order,
                assumed_format: self.settings.assumed_format,
                whole_programme: true,
            },
            &self.settings,
        )
    }

    /// Mean square of the valid samples of every input channel over the whole programme.
    pub fn programme_mean_square(&self) -> Vec<f64> {
        (0..self.setup.channels)
            .map(|c| self.meters.programme(c).unwrap_or_default().mean_square())
            .collect()
    }

    /// The ACN index input channel `c` carries under the assumed format; `None` for an extra
    /// (non-spatial) channel.
    fn acn_of_input(&self, c: usize) -> Option<usize> {
        (0..self.layout.spatial_channels).find(|&acn| self.conversion.source_channel(acn) == c)
    }

    /// Channel `c` is empty for a known reason, so it is not a silent channel: absent from a
    /// mixed-order file, or empty by the scene's geometry (a horizontal-only scene).
    fn emptiness_explained(&self, c: usize) -> bool {
        self.absent_channels.contains(&c)
            || self.snapshot.format_check.silent_by_geometry.contains(&c)
    }

    /// Reads integer PCM of `bits` bits (or float): decides what counts as a sample at full
    /// scale (either extreme code in integer PCM, |x| ≥ 1 in float). Call before the first
    /// block; it restarts the meters.
    pub fn set_full_scale(&mut self, full_scale: FullScale) -> Result<(), EngineError> {
        self.reconfigure_meters(ChannelMeterConfig {
            full_scale,
            ..*self.meters.config()
        })
    }

    /// Keeps only the true-peak maxima, not the window and hold true peaks (see
    /// [`ChannelMeterConfig::live_true_peak`]): for a file scan, which reads the whole-programme
    /// figures. The maxima read the same bits either way. Call before the first block; it
    /// restarts the meters.
    pub fn set_live_true_peak(&mut self, live: bool) -> Result<(), EngineError> {
        self.reconfigure_meters(ChannelMeterConfig {
            live_true_peak: live,
            ..*self.meters.config()
        })
    }

    fn reconfigure_meters(&mut self, config: ChannelMeterConfig) -> Result<(), EngineError> {
        self.meters = ChannelMeters::new(self.setup.channels, self.setup.sample_rate_hz, config)
            .map_err(|e| EngineError::Settings(e.to_string()))?;
        Ok(())
    }

    /// Whole-programme map of `band` with `method` (for reports); does not touch the snapshot.
    pub fn integrated_map(
        &mut self,
        band: Band,
        method: MapMethod,
        scale: MapScale,
    ) -> (MapImage, Vec<SourceReading>) {
        self.load_sn3d(band.index(), true);
        let mut map = MapImage::default();
        let mut sources = Vec::new();
        let s = &self.settings;
        self.maps.make(
            &self.r_sn3d,
            method,
            scale,
            s.source_separation_deg,
            s.source_floor_db,
            &mut map,
            &mut sources,
        );
        map.band = band;
        map.integrated = true;
        (map, sources)
    }

    /// Whole-programme DirAC of `band`: direction and W level from the programme covariance,
    /// diffuseness as the energy-weighted mean of short-time values.
    pub fn integrated_intensity(&mut self, band: Band) -> BandIntensity {
        self.load_sn3d(band.index(), true);
        let mut intensity = dirac(&self.r_sn3d, self.layout.spatial_channels);
        if intensity.diffuseness.is_some() {
            intensity.diffuseness = self.diffuseness.mean(band.index());
        }
        intensity
    }
}

/// First-order SN3D moments of one raw frame covariance (M×M, input order) for DirAC.
fn raw_first_order_moments(
    raw: &[f64],
    m: usize,
    conversion: &ConversionPlan,
) -> FirstOrderMoments {
    first_order_moments(|a, b| {
        let (sa, sb) = (conversion.source_channel(a), conversion.source_channel(b));
        conversion.gain(a) * conversion.gain(b) * raw[sa * m + sb]
    })
}

fn grid_for(step_deg: f64) -> Result<EquirectGrid, EngineError> {
    if !(step_deg.is_finite() && (0.25..=15.0).contains(&step_deg)) {
        return Err(EngineError::Settings(format!(
            "grid step {step_deg}° outside 0.25° … 15°"
        )));
    }
    EquirectGrid::with_step_deg(step_deg).map_err(|e| EngineError::Settings(e.to_string()))
}

/// DirAC from an SN3D covariance (Pulkki 2007): intensity ∝ ⟨Re W*·[X, Y, Z]⟩ = (R₀₃, R₀₁, R₀₂);
/// energy ∝ ⟨|W|² + ‖X‖²⟩ in SN3D; ψ = 1 − 2‖I‖/E.
pub fn dirac(r_sn3d: &[f64], m: usize) -> BandIntensity {
    let w2 = r_sn3d[0];
    let w_level_dbfs = if w2 > 0.0 {
        10.0 * w2.log10()
    } else {
        LEVEL_FLOOR_DB
    };
    if m < 4 || w2 <= SILENT_MEAN_SQUARE {
        return BandIntensity {
            direction: None,
            diffuseness: None,
            w_level_dbfs,
        };
    }
    let moments = first_order_moments(|a, b| r_sn3d[a * m + b]);
    let intensity = [moments[4], moments[5], moments[6]];
    BandIntensity {
        direction: intensity
            .iter()
            .any(|&v| v != 0.0)
            .then(|| Direction::from_cartesian(intensity)),
        diffuseness: energy_and_diffuseness(&moments).map(|(_, psi)| psi),
        w_level_dbfs,
    }
}
