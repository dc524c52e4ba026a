//! Deterministic demo scene: a harbour-front terrace at dusk, synthesised and encoded into an
//! ambisonic stream of any supported order and format. Nothing is recorded.
//!
//! Sources (directions in the crate convention, azimuth positive to the left):
//! - `"guitar"`: a busker front-right (−35°, 0°), Karplus–Strong strings arpeggiating
//!   Am–F–C–G; the strongest steady direct source.
//! - `"talker-1"`, `"talker-2"`: two people front-left (+30°, +5° and +50°, −2°), formant-filtered
//!   pulse trains cut into syllables, taking alternate turns.
//! - `"tram bell"`: moves from +80° to −80° azimuth (elevation +5°) over each 10 s pass, rung
//!   once a second, loudest as it passes the front.
//! - `"gull-1"`, `"gull-2"`: circling overhead (elevation 65° and 70°), intermittent gliding calls.
//! - `"fountain"`: behind and a little below (180°, −10°), steady filtered noise.
//! - `"diffuse bed"`: wind and distant traffic rumble from 32 mutually incoherent noise
//!   sources on a Fibonacci spiral, about 17 dB below the direct sound in W.
//!
//! With the default levels W measures about −24 LUFS (peaks near −9 dBFS), and every format
//! and order stays below full scale (see the tests in `dsp-core/tests/scene.rs`).
//!
//! [`DemoScene::render`] is streaming, allocation-free and deterministic: a given seed gives
//! the same samples however the stream is split into blocks. Moving sources get new encoding
//! gains every [`GAIN_UPDATE_SAMPLES`] samples, interpolated linearly within that span.

mod filters;
mod random;
mod voices;

use crate::encoder::PlaneWaveEncoder;
use crate::format::{AmbiFormat, FormatError};
use crate::sh::channel_count;
use crate::sphere::Direction;
use crate::sphere::grid::SphereGrid;
use random::Random;
use std::fmt;
use voices::{BedElement, Fountain, Guitar, Gull, Talker, TramBell, Voice};

/// Highest order the scene renders.
pub const SCENE_MAX_ORDER: usize = 7;
/// Lowest and highest sample rates the scene renders, in Hz.
pub const SCENE_SAMPLE_RATE_RANGE_HZ: (f64, f64) = (22_050.0, 384_000.0);
/// Samples between encoding-gain updates of moving sources (on a grid fixed to the start of
/// the stream, so block splits do not matter).
pub const GAIN_UPDATE_SAMPLES: usize = 64;
/// Name every element of the diffuse bed answers to in [`SceneConfig::only`].
pub const DIFFUSE_BED_NAME: &str = "diffuse bed";
/// Number of incoherent sources making up the diffuse bed.
pub const DIFFUSE_BED_SOURCES: usize = 32;
/// Names accepted by [`SceneConfig::only`], in the order sources are built.
pub const SOURCE_NAMES: [&str; 8] = [
    "guitar",
    "talker-1",
    "talker-2",
    "tram bell",
    "gull-1",
    "gull-2",
    "fountain",
    DIFFUSE_BED_NAME,
];

/// What to render.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SceneConfig {
    /// Ambisonic order, 1..=[`SCENE_MAX_ORDER`] (1..=3 for FuMa and maxN).
    pub order: usize,
    /// Output format (channel order and normalisation).
    pub format: AmbiFormat,
    /// Sample rate in Hz, within [`SCENE_SAMPLE_RATE_RANGE_HZ`].
    pub sample_rate_hz: f64,
    /// Seed of every random choice; the same seed gives the same samples.
    pub seed: u64,
    /// Render only the sources with these names (see [`SOURCE_NAMES`]); `None` renders all.
    /// Each source sounds the same whether rendered alone or in the full scene.
    pub only: Option<&'static [&'static str]>,
}

impl Default for SceneConfig {
    /// Third order, AmbiX (ACN/SN3D), 48 kHz, seed 1, every source.
    fn default() -> Self {
        Self {
            order: 3,
            format: AmbiFormat::ACN_SN3D,
            sample_rate_hz: 48_000.0,
            seed: 1,
            only: None,
        }
    }
}

impl SceneConfig {
    /// This configuration restricted to the sources named in `names`.
    pub fn with_only(self, names: &'static [&'static str]) -> Self {
        Self {
            only: Some(names),
            ..self
        }
    }
}

/// Why a scene could not be built.
#[derive(Clone, Debug, PartialEq)]
pub enum SceneError {
    /// The format is not defined at the requested order.
    Format(FormatError),
    /// The order is outside 1..=[`SCENE_MAX_ORDER`].
    OrderOutOfRange { order: usize, max_order: usize },
    /// The sample rate is not finite or outside [`SCENE_SAMPLE_RATE_RANGE_HZ`].
    SampleRateOutOfRange { sample_rate_hz: f64 },
    /// [`SceneConfig::only`] names a source the scene does not have.
    UnknownSource(String),
    /// [`SceneConfig::only`] selects nothing.
    NoSourcesSelected,
}

impl fmt::Display for SceneError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SceneError::Format(error) => write!(f, "demo scene: {error}"),
            SceneError::OrderOutOfRange { order, max_order } => write!(
                f,
                "demo scene: order {order} is not rendered; choose 1 to {max_order}"
            ),
            SceneError::SampleRateOutOfRange { sample_rate_hz } => write!(
                f,
                "demo scene: sample rate {sample_rate_hz} Hz is outside {} to {} Hz",
                SCENE_SAMPLE_RATE_RANGE_HZ.0, SCENE_SAMPLE_RATE_RANGE_HZ.1
            ),
            SceneError::UnknownSource(name) => write!(
                f,
                "demo scene: no source called \"{name}\"; the sources are {}",
                SOURCE_NAMES.map(|n| format!("\"{n}\"")).join(", ")
            ),
            SceneError::NoSourcesSelected => {
                write!(f, "demo scene: the source selection is empty")
            }
        }
    }
}

impl std::error::Error for SceneError {}

impl From<FormatError> for SceneError {
    fn from(error: FormatError) -> Self {
        SceneError::Format(error)
    }
}

/// Ground truth for one direct source at one moment.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SceneSource {
    /// One of [`SOURCE_NAMES`] (the diffuse bed is not listed).
    pub name: &'static str,
    pub direction: Direction,
    /// Whether the source moves.
    pub moving: bool,
}

/// Where a source is, and how loud (linear factor on top of its level), at a time.
#[derive(Clone, Copy, Debug)]
enum Path {
    Fixed(Direction),
    /// The tram: azimuth falls linearly from `from_az_deg` to `to_az_deg` over each
    /// `period_s`, then starts again; level rises towards the front (closest approach).
    Pass {
        from_az_deg: f64,
        to_az_deg: f64,
        elevation_deg: f64,
        period_s: f64,
    },
    /// A gull: constant elevation, azimuth turning at `deg_per_s` (positive = to the left).
    Circle {
        start_az_deg: f64,
        deg_per_s: f64,
        elevation_deg: f64,
    },
}

impl Path {
    fn at(&self, t_s: f64) -> (Direction, f64) {
        match *self {
            Path::Fixed(direction) => (direction, 1.0),
            Path::Pass {
                from_az_deg,
                to_az_deg,
                elevation_deg,
                period_s,
            } => {
                let progress = t_s.rem_euclid(period_s) / period_s;
                let azimuth_deg = from_az_deg + (to_az_deg - from_az_deg) * progress;
                let level = 0.35 + 0.65 * azimuth_deg.to_radians().cos();
                (Direction::new(azimuth_deg, elevation_deg), level)
            }
            Path::Circle {
                start_az_deg,
                deg_per_s,
                elevation_deg,
            } => (
                Direction::new(start_az_deg + deg_per_s * t_s, elevation_deg),
                1.0,
            ),
        }
    }

    fn moving(&self) -> bool {
        !matches!(self, Path::Fixed(_))
    }
}

/// Levels of the sources in dB (applied to each voice's roughly unit-RMS signal while it
/// sounds), chosen by measurement of W: see the report in the tests.
mod levels_db {
    pub const GUITAR: f64 = -17.0;
    pub const TALKER: f64 = -21.0;
    pub const TRAM_BELL: f64 = -23.0;
    pub const GULL: f64 = -28.0;
    pub const FOUNTAIN: f64 = -32.0;
    /// Per bed element; 32 incoherent elements add 15 dB.
    pub const BED_ELEMENT: f64 = -57.0;
}

fn db_to_gain(db: f64) -> f64 {
    10f64.powf(db / 20.0)
}

struct Source {
    name: &'static str,
    path: Path,
    gain: f64,
    voice: Box<dyn Voice>,
    /// Encoding gains (times level) at the start and end of the current update span, indexed
    /// by [output channel]. Equal for fixed sources.
    gains_start: Vec<f32>,
    gains_end: Vec<f32>,
}

/// The demo scene renderer. Built once (allocates), then [`render`](Self::render) streams
/// blocks without allocating.
pub struct DemoScene {
    config: SceneConfig,
    encoder: PlaneWaveEncoder,
    sources: Vec<Source>,
    /// Samples rendered so far.
    position: u64,
    scratch: [f32; GAIN_UPDATE_SAMPLES],
}

impl fmt::Debug for DemoScene {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("DemoScene")
            .field("config", &self.config)
            .field("sources", &self.sources.len())
            .field("position", &self.position)
            .finish()
    }
}

impl DemoScene {
    /// Builds the scene. Errors name the bad order, format limit, sample rate or source name.
    pub fn new(config: SceneConfig) -> Result<Self, SceneError> {
        if config.order == 0 || config.order > SCENE_MAX_ORDER {
            return Err(SceneError::OrderOutOfRange {
                order: config.order,
                max_order: SCENE_MAX_ORDER,
            });
        }
        config.format.check_order(config.order)?;
        let fs = config.sample_rate_hz;
        let (min_hz, max_hz) = SCENE_SAMPLE_RATE_RANGE_HZ;
        if !(fs.is_finite() && (min_hz..=max_hz).contains(&fs)) {
            return Err(SceneError::SampleRateOutOfRange { sample_rate_hz: fs });
        }
        if let Some(names) = config.only {
            if names.is_empty() {
                return Err(SceneError::NoSourcesSelected);
            }
            if let Some(unknown) = names.iter().find(|name| !SOURCE_NAMES.contains(name)) {
                return Err(SceneError::UnknownSource(unknown.to_string()));
            }
        }
        let selected = |name: &str| config.only.is_none_or(|names| names.contains(&name));
        let stream = |index: u64| Random::new(config.seed, index);

        let mut specs: Vec<(&'static str, Path, f64, Box<dyn Voice>)> = Vec::new();
        let fixed = |az: f64, el: f64| Path::Fixed(Direction::new(az, el));
        if selected("guitar") {
            let voice = Box::new(Guitar::new(fs, stream(1)));
            specs.push(("guitar", fixed(-35.0, 0.0), levels_db::GUITAR, voice));
        }
        if selected("talker-1") {
            let voice = Box::new(Talker::new(fs, 0, stream(2)));
            specs.push(("talker-1", fixed(30.0, 5.0), levels_db::TALKER, voice));
        }
        if selected("talker-2") {
            let voice = Box::new(Talker::new(fs, 1, stream(3)));
            specs.push(("talker-2", fixed(50.0, -2.0), levels_db::TALKER, voice));
        }
        if selected("tram bell") {
            let path = Path::Pass {
                from_az_deg: 80.0,
                to_az_deg: -80.0,
                elevation_deg: 5.0,
                period_s: voices::TRAM_CYCLE_S,
            };
            let voice = Box::new(TramBell::new(fs, stream(4)));
            specs.push(("tram bell", path, levels_db::TRAM_BELL, voice));
        }
        if selected("gull-1") {
            let path = Path::Circle {
                start_az_deg: 40.0,
                deg_per_s: 9.0,
                elevation_deg: 65.0,
            };
            let voice = Box::new(Gull::new(fs, stream(5)));
            specs.push(("gull-1", path, levels_db::GULL, voice));
        }
        if selected("gull-2") {
            let path = Path::Circle {
                start_az_deg: -140.0,
                deg_per_s: -6.5,
                elevation_deg: 70.0,
            };
            let voice = Box::new(Gull::new(fs, stream(6)));
            specs.push(("gull-2", path, levels_db::GULL, voice));
        }
        if selected("fountain") {
            let voice = Box::new(Fountain::new(fs, stream(7)));
            specs.push(("fountain", fixed(180.0, -10.0), levels_db::FOUNTAIN, voice));
        }
        if selected(DIFFUSE_BED_NAME) {
            let grid = SphereGrid::fibonacci(DIFFUSE_BED_SOURCES)
                .expect("a non-empty Fibonacci grid always builds");
            for (k, &direction) in grid.points().iter().enumerate() {
                let voice = Box::new(BedElement::new(fs, stream(100 + k as u64)));
                let path = Path::Fixed(direction);
                specs.push((DIFFUSE_BED_NAME, path, levels_db::BED_ELEMENT, voice));
            }
        }

        let mut encoder = PlaneWaveEncoder::new(config.order, config.format)?;
        let channels = channel_count(config.order);
        let sources = specs
            .into_iter()
            .map(|(name, path, level_db, voice)| {
                let mut source = Source {
                    name,
                    path,
                    gain: db_to_gain(level_db),
                    voice,
                    gains_start: vec![0.0; channels],
                    gains_end: vec![0.0; channels],
                };
                source.update_gains(&mut encoder, 0, fs);
                source
            })
            .collect();
        Ok(Self {
            config,
            encoder,
            sources,
            position: 0,
            scratch: [0.0; GAIN_UPDATE_SAMPLES],
        })
    }

    /// The configuration the scene was built with.
    pub fn config(&self) -> &SceneConfig {
        &self.config
    }

    /// Number of output channels, (order+1)².
    pub fn channels(&self) -> usize {
        self.encoder.channels()
    }

    /// Time of the next sample to render, in seconds from the start.
    pub fn time_s(&self) -> f64 {
        self.position as f64 / self.config.sample_rate_hz
    }

    /// Directions of the selected direct sources at `at_time_s` (the diffuse bed is left out).
    /// Allocates; meant for tests and displays, not the audio thread.
    pub fn source_directions(&self, at_time_s: f64) -> Vec<SceneSource> {
        self.sources
            .iter()
            .filter(|source| source.name != DIFFUSE_BED_NAME)
            .map(|source| SceneSource {
                name: source.name,
                direction: source.path.at(at_time_s).0,
                moving: source.path.moving(),
            })
            .collect()
    }

    /// Overwrites `out` (one buffer per channel, in the format's channel order, all the same
    /// length, any length including 0) with the next samples of the scene. Never allocates.
    ///
    /// # Panics
    /// If `out` does not hold [`channels`](Self::channels) buffers or their lengths differ
    /// (a caller bug).
    pub fn render(&mut self, out: &mut [&mut [f32]]) {
        assert_eq!(
            out.len(),
            self.channels(),
            "demo scene output channel count"
        );
        let block_len = out.first().map_or(0, |buffer| buffer.len());
        assert!(
            out.iter().all(|buffer| buffer.len() == block_len),
            "demo scene output buffers differ in length"
        );
        for buffer in out.iter_mut() {
            buffer.fill(0.0);
        }
        let fs = self.config.sample_rate_hz;
        let mut done = 0;
        while done < block_len {
            let offset = (self.position % GAIN_UPDATE_SAMPLES as u64) as usize;
            let span_index = self.position / GAIN_UPDATE_SAMPLES as u64;
            if offset == 0 && span_index > 0 {
                for source in &mut self.sources {
                    if source.path.moving() {
                        source.update_gains(&mut self.encoder, span_index, fs);
                    }
                }
            }
            let len = (GAIN_UPDATE_SAMPLES - offset).min(block_len - done);
            let signal = &mut self.scratch[..len];
            for source in &mut self.sources {
                source.voice.fill(signal);
                source.add_encoded(signal, offset, out, done);
            }
            done += len;
            self.position += len as u64;
        }
    }
}

impl Source {
    /// Sets the gains for update span `span_index` (samples span_index·64 … +64).
    fn update_gains(&mut self, encoder: &mut PlaneWaveEncoder, span_index: u64, fs: f64) {
        let span_start = span_index * GAIN_UPDATE_SAMPLES as u64;
        let times_s = [
            span_start as f64 / fs,
            (span_start + GAIN_UPDATE_SAMPLES as u64) as f64 / fs,
        ];
        for (gains, t_s) in [&mut self.gains_start, &mut self.gains_end]
            .into_iter()
            .zip(times_s)
        {
            let (direction, level) = self.path.at(t_s);
            let scale = self.gain * level;
            for (gain, &unit) in gains.iter_mut().zip(encoder.gains(direction)) {
                *gain = (unit * scale) as f32;
            }
        }
    }

    /// Adds `signal`, which starts `offset` samples into the current update span, to
    /// `out[channel][at..]`.
    fn add_encoded(&self, signal: &[f32], offset: usize, out: &mut [&mut [f32]], at: usize) {
        let moving = self.path.moving();
        for ((buffer, &g0), &g1) in out.iter_mut().zip(&self.gains_start).zip(&self.gains_end) {
            let buffer = &mut buffer[at..at + signal.len()];
            if moving {
                let step = (g1 - g0) / GAIN_UPDATE_SAMPLES as f32;
                for (i, (o, &s)) in buffer.iter_mut().zip(signal).enumerate() {
                    *o += (g0 + step * (offset + i) as f32) * s;
                }
            } else {
                for (o, &s) in buffer.iter_mut().zip(signal) {
                    *o += g0 * s;
                }
            }
        }
    }
}

/// Renders the first `seconds` of a scene into one `Vec` per channel (allocates; for tests,
/// examples and the command line).
pub fn render_seconds(config: SceneConfig, seconds: f64) -> Result<Vec<Vec<f32>>, SceneError> {
    let mut scene = DemoScene::new(config)?;
    let total = (seconds.max(0.0) * config.sample_rate_hz).round() as usize;
    let mut channels = vec![vec![0.0f32; total]; scene.channels()];
    let mut refs: Vec<&mut [f32]> = channels.iter_mut().map(|c| c.as_mut_slice()).collect();
    scene.render(&mut refs);
    Ok(channels)
}
