//! The scan itself: a stream of blocks through [`Analyzer`], then whole-file figures.
//!
//! Memory stays constant in the file length: samples go through one block of
//! [`BLOCK_FRAMES`] frames per channel; only the timeline (a few numbers per
//! [`TIMELINE_RATE_HZ`]-th of a second) grows, and it is thinned when it gets long.

use super::CliError;
use super::progress::Progress;
use crate::adm::{self, AdmDeclaration};
use crate::opus::{self, OpusReader};
use crate::wav::{Container, SampleFormat, WavReader};
use fieldglass_dsp::engine::findings::{ChannelFacts, FindingInputs, collect_findings};
use fieldglass_dsp::engine::{
    AnalysisSettings, Analyzer, Band, ChannelLayout, Finding, MapImage, MapMethod, MapScale,
    Snapshot, SourceReading, StreamSetup,
};
use fieldglass_dsp::engine::{FindingCode, FormatCheck, Severity};
use fieldglass_dsp::format::{AmbiFormat, MixedOrderExpander, Normalization};
use fieldglass_dsp::meters::FullScale;
use fieldglass_dsp::scene::{DemoScene, SceneConfig};
use fieldglass_dsp::sphere::Direction;
use fieldglass_dsp::wording;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// Frames per channel read and analysed at a time.
pub const BLOCK_FRAMES: usize = 4096;
/// Snapshots per second of audio taken for the timeline of the strongest direction.
pub const TIMELINE_RATE_HZ: f64 = 4.0;
/// Grid step of the live maps behind the timeline, degrees (coarse: only the peak is used).
pub const TIMELINE_GRID_STEP_DEG: f64 = 3.0;
/// Grid step of the whole-programme maps in the report, degrees.
pub const REPORT_GRID_STEP_DEG: f64 = 1.0;
/// The timeline is halved (every second point dropped) when it reaches this many points, so a
/// very long file keeps a bounded timeline (8192 points = 34 min at 4 Hz before thinning).
pub const TIMELINE_MAX_POINTS: usize = 8192;
/// What to scan.
#[derive(Clone, Debug, PartialEq)]
pub enum ScanInput {
    /// A WAV / RF64 / BW64 file.
    File(PathBuf),
    /// The built-in demo scene, rendered on the fly.
    Demo {
        order: usize,
        seconds: f64,
        sample_rate_hz: f64,
        format: AmbiFormat,
    },
}

/// How to scan.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ScanOptions {
    /// The format the file is read as: the user's choice, or the default when
    /// `assumed_source` is [`AssumedSource::Default`] (a file that declares its format then
    /// overrides the default, never an explicit choice). The format check only advises.
    pub assumed: AmbiFormat,
    /// Where `assumed` comes from.
    pub assumed_source: AssumedSource,
    pub method: MapMethod,
    /// Edges between the low/mid and mid/high bands, Hz.
    pub band_edges_hz: [f64; 2],
    /// Over-omni tolerance, dB.
    pub over_omni_tolerance_db: f64,
    /// Show a progress bar on stderr (only if stderr is a terminal and the input is long).
    pub progress: bool,
    /// Spread each block over the cores: the channel meters, W's loudness, the next block's
    /// decoding and the STFT frames at once (identical results; off when a batch already keeps
    /// every core busy with other files).
    pub parallel: bool,
}

impl Default for ScanOptions {
    fn default() -> Self {
        let engine = AnalysisSettings::default();
        Self {
            assumed: AmbiFormat::ACN_SN3D,
            assumed_source: AssumedSource::Default,
            method: MapMethod::MaxRe,
            band_edges_hz: engine.band_edges_hz,
            over_omni_tolerance_db: engine.over_omni_tolerance_db,
            progress: false,
            parallel: true,
        }
    }
}

/// Where the assumed format comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum AssumedSource {
    /// The user chose it (`--assume`).
    Option,
    /// The file declares it (the AMB B-format sub-format declares FuMa).
    Metadata,
    /// Nobody said: AmbiX.
    Default,
}

impl AssumedSource {
    /// JSON / summary name.
    pub fn label(self) -> &'static str {
        match self {
            Self::Option => "option",
            Self::Metadata => "metadata",
            Self::Default => "default",
        }
    }
}

/// What was scanned.
#[derive(Clone, Debug, PartialEq)]
pub struct InputInfo {
    /// The file path, or `None` for the demo scene.
    pub path: Option<PathBuf>,
    /// Human description ("48000 Hz, 16 channels, 24-bit PCM, RF64" or the demo scene).
    pub description: String,
    pub channels: usize,
    pub sample_rate_hz: f64,
    pub frames: u64,
    /// "pcm16", "pcm24", "pcm32", "float32", … ; "opus" for Ogg Opus; "float32" for the demo.
    pub sample_format: String,
    /// "riff", "rf64", "bw64", "ogg-opus" or "demo".
    pub container: String,
    /// The file declares the AMB B-format sub-format (a FuMa file).
    pub declares_b_format: bool,
    /// FuMa letters of a horizontal or mixed-order channel set ("WXYUV"), when the file is one
    /// and is read as FuMa; the analysis then runs on the full order with the rest absent.
    pub mixed_order_set: Option<String>,
    /// What the reader had to repair (unfinalised or wrapped sizes), in plain words.
    pub warnings: Vec<String>,
    /// What a sample at full scale is in this file's encoding.
    pub full_scale: FullScale,
    /// ADM metadata of a BW64 file: what it declares, or why it cannot be used; None when the
    /// file carries none.
    pub metadata: Option<Result<AdmDeclaration, String>>,
    /// For each analysed channel, the file channel it comes from, when the analysis does not
    /// take the file's channels as they are (HOA tracks in a declared order, beside objects).
    pub route: Option<Vec<usize>>,
}

impl InputInfo {
    pub fn duration_s(&self) -> f64 {
        self.frames as f64 / self.sample_rate_hz
    }

    /// Path for messages, or the demo scene's name.
    pub fn display_name(&self) -> String {
        match &self.path {
            Some(p) => p.display().to_string(),
            None => wording::DEMO_SCENE.to_string(),
        }
    }
}

/// Whole-programme figures of one input channel (the engine's).
pub type ChannelSummary = fieldglass_dsp::engine::ChannelProgramme;

/// Whole-programme picture of one band.
#[derive(Clone, Debug, PartialEq)]
pub struct BandResult {
    pub band: Band,
    /// Band limits, Hz.
    pub range_hz: [f64; 2],
    pub map: MapImage,
    /// Strongest first, levels relative to the strongest.
    pub sources: Vec<SourceReading>,
    pub diffuseness: Option<f64>,
    /// Mean square of W in the band, dBFS.
    pub w_level_dbfs: f64,
}

/// Strongest direction of the live map at one moment.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TimelinePoint {
    pub time_s: f64,
    /// `None` when the map had no peak (silence).
    pub direction: Option<Direction>,
    /// W's short-window RMS (SN3D), dBFS.
    pub w_rms_dbfs: f64,
}

/// Everything a scan found.
#[derive(Clone, Debug)]
pub struct ScanResult {
    pub input: InputInfo,
    pub layout: ChannelLayout,
    pub options: ScanOptions,
    /// The engine's snapshot at the end of the file (W loudness, format check).
    pub snapshot: Snapshot,
    /// Per file channel, in file order (spatial first, then extra channels): the engine's
    /// programme figures, renumbered to file channels for a mixed-order set.
    pub channels: Vec<ChannelSummary>,
    /// Full, low, mid, high.
    pub bands: Vec<BandResult>,
    pub timeline: Vec<TimelinePoint>,
    /// Whole-file findings, most severe first: the engine's, naming file channels, plus what
    /// the reader had to repair.
    pub findings: Vec<Finding>,
    /// Wall-clock time of the analysis, seconds.
    pub analysis_s: f64,
}

impl ScanResult {
    pub fn band(&self, band: Band) -> Option<&BandResult> {
        self.bands.iter().find(|b| b.band == band)
    }

    /// Full-band energy per order relative to W under the assumed format, dB, indexed [order].
    pub fn order_balance_db(&self) -> &[f64] {
        &self.snapshot.programme.order_balance_db
    }

    /// Highest order that carries energy.
    pub fn effective_order(&self) -> usize {
        self.snapshot.programme.effective_order
    }
}

/// The file channel of each analysed channel, and the file-order buffers read into.
type RoutedTracks = (Vec<usize>, Vec<Vec<f32>>);

/// Where blocks come from.
pub(crate) enum Source {
    File {
        reader: WavReader<std::io::BufReader<std::fs::File>>,
        /// For a FuMa mixed-order set: the expander and the file-order buffers it reads from.
        mixed: Option<Box<(MixedOrderExpander, Vec<Vec<f32>>)>>,
        /// For routed HOA tracks: the file channel of each analysed channel, and the
        /// file-order buffers.
        routed: Option<Box<RoutedTracks>>,
    },
    Demo {
        scene: Box<DemoScene>,
        remaining: u64,
    },
    /// An Ogg Opus stream of channel mapping family 2 or 3, decoded to ACN/SN3D.
    Opus(Box<OpusReader<std::io::BufReader<std::fs::File>>>),
}

impl Source {
    pub(crate) fn read(&mut self, buffers: &mut [Vec<f32>], name: &str) -> Result<usize, CliError> {
        match self {
            Source::File {
                reader,
                mixed,
                routed,
            } => {
                let unreadable = |e| CliError::input(format!("cannot read '{name}': {e}"));
                if let Some(routed) = routed {
                    let (route, file_buffers) = &mut **routed;
                    let n = reader
                        .read_planar(file_buffers, BLOCK_FRAMES)
                        .map_err(unreadable)?;
                    for (buffer, &file_channel) in buffers.iter_mut().zip(route.iter()) {
                        buffer.clear();
                        buffer.extend_from_slice(&file_buffers[file_channel][..n]);
                    }
                    return Ok(n);
                }
                let Some(mixed) = mixed else {
                    return reader
                        .read_planar(buffers, BLOCK_FRAMES)
                        .map_err(unreadable);
                };
                let (expander, file_buffers) = &mut **mixed;
                let n = reader
                    .read_planar(file_buffers, BLOCK_FRAMES)
                    .map_err(unreadable)?;
                for b in buffers.iter_mut() {
                    b.resize(n, 0.0);
                }
                let input: Vec<&[f32]> = file_buffers.iter().map(|b| &b[..n]).collect();
                let mut output: Vec<&mut [f32]> =
                    buffers.iter_mut().map(|b| b.as_mut_slice()).collect();
                expander
                    .expand(&input, &mut output)
                    .map_err(|e| CliError::input(format!("cannot read '{name}': {e}")))?;
                Ok(n)
            }
            Source::Opus(reader) => reader
                .read_planar(buffers, BLOCK_FRAMES)
                .map_err(|e| CliError::input(format!("cannot read '{name}': {e}"))),
            Source::Demo { scene, remaining } => {
                let n = (*remaining).min(BLOCK_FRAMES as u64) as usize;
                for b in buffers.iter_mut() {
                    b.resize(n, 0.0);
                }
                let mut refs: Vec<&mut [f32]> =
                    buffers.iter_mut().map(|b| b.as_mut_slice()).collect();
                if n > 0 {
                    scene.render(&mut refs);
                }
                *remaining -= n as u64;
                Ok(n)
            }
        }
    }
}

fn describe_sample_format(format: SampleFormat, bits: u16) -> String {
    match format {
        SampleFormat::Int => format!("pcm{bits}"),
        SampleFormat::Float => format!("float{bits}"),
    }
}

pub(crate) fn open(
    input: &ScanInput,
    options: &mut ScanOptions,
) -> Result<(Source, InputInfo), CliError> {
    match input {
        ScanInput::File(path) if opus::file_is_ogg(path) => open_opus(path, options),
        ScanInput::File(path) => {
            let name = path.display().to_string();
            let reader = WavReader::open(path)
                .map_err(|e| CliError::input(format!("cannot read '{name}': {e}")))?;
            let spec = reader.spec();
            let container = match reader.container() {
                Container::Riff => "riff",
                Container::Rf64 => "rf64",
                Container::Bw64 => "bw64",
            };
            let sample_format = describe_sample_format(spec.sample_format, spec.bits_per_sample);
            let declares_b_format = reader.declares_b_format();
            let channels = spec.channels as usize;
            let metadata = adm::read_declaration(
                reader.metadata_chunk(b"chna"),
                reader.metadata_chunk(b"axml"),
                channels,
            );
            let mut route = None;
            if let Some(Ok(declared)) = &metadata
                && options.assumed_source == AssumedSource::Default
            {
                options.assumed = declared.format();
                options.assumed_source = AssumedSource::Metadata;
                route = declared.route();
            }
            if declares_b_format && options.assumed_source == AssumedSource::Default {
                options.assumed = AmbiFormat::FUMA;
                options.assumed_source = AssumedSource::Metadata;
            }
            let mixed = MixedOrderExpander::for_stream(options.assumed, channels)
                .filter(|_| route.is_none())
                .map(|e| Box::new((e, vec![Vec::with_capacity(BLOCK_FRAMES); channels])));
            let routed = route
                .clone()
                .map(|r| Box::new((r, vec![Vec::with_capacity(BLOCK_FRAMES); channels])));
            let mixed_order_set = mixed.as_ref().map(|m| m.0.set().letters());
            let info = InputInfo {
                path: Some(path.clone()),
                description: format!(
                    "{} Hz, {} channels, {}, {}{}",
                    spec.sample_rate,
                    spec.channels,
                    sample_format,
                    container.to_uppercase(),
                    if declares_b_format {
                        " (extensible, AMB B-format)"
                    } else if spec.channel_mask.is_some() {
                        " (extensible)"
                    } else {
                        ""
                    }
                ),
                channels,
                sample_rate_hz: spec.sample_rate as f64,
                frames: reader.frames(),
                sample_format,
                container: container.to_string(),
                declares_b_format,
                mixed_order_set,
                warnings: reader.warnings().to_vec(),
                full_scale: match spec.sample_format {
                    SampleFormat::Int => FullScale::Integer {
                        bits: spec.bits_per_sample,
                    },
                    SampleFormat::Float => FullScale::Float,
                },
                metadata,
                route,
            };
            Ok((
                Source::File {
                    reader,
                    mixed,
                    routed,
                },
                info,
            ))
        }
        ScanInput::Demo {
            order,
            seconds,
            sample_rate_hz,
            format,
        } => {
            let config = SceneConfig {
                order: *order,
                format: *format,
                sample_rate_hz: *sample_rate_hz,
                ..SceneConfig::default()
            };
            let scene = DemoScene::new(config)
                .map_err(|e| CliError::input(format!("cannot build the demo: {e}")))?;
            let frames = (seconds.max(0.0) * sample_rate_hz).round() as u64;
            let info = InputInfo {
                path: None,
                description: format!(
                    "{}, order {order}, {}, {sample_rate_hz} Hz",
                    wording::DEMO_SCENE,
                    format.human_name()
                ),
                channels: scene.channels(),
                sample_rate_hz: *sample_rate_hz,
                frames,
                sample_format: "float32".to_string(),
                container: "demo".to_string(),
                declares_b_format: false,
                mixed_order_set: None,
                warnings: Vec::new(),
                full_scale: FullScale::Float,
                metadata: None,
                route: None,
            };
            Ok((
                Source::Demo {
                    scene: Box::new(scene),
                    remaining: frames,
                },
                info,
            ))
        }
    }
}

/// An Ogg Opus file (chosen by its capture pattern, whatever its name). Families 2 and 3 declare
/// ACN/SN3D, so that is the assumption unless --assume says otherwise.
fn open_opus(path: &Path, options: &mut ScanOptions) -> Result<(Source, InputInfo), CliError> {
    let reader = OpusReader::open(path)
        .map_err(|e| CliError::input(format!("cannot read '{}': {e}", path.display())))?;
    if options.assumed_source == AssumedSource::Default {
        options.assumed = AmbiFormat::ACN_SN3D;
        options.assumed_source = AssumedSource::Metadata;
    }
    let head = reader.head();
    let info = InputInfo {
        path: Some(path.to_path_buf()),
        description: format!(
            "{} Hz, {} channels, Opus, Ogg (channel mapping family {}{}{})",
            reader.sample_rate(),
            reader.channels(),
            head.mapping_family,
            if head.mapping_family == 3 {
                ", demixing matrix"
            } else {
                ""
            },
            if reader.has_stereo_pair() {
                "; with a non-diegetic stereo pair"
            } else {
                ""
            },
        ),
        channels: reader.channels(),
        sample_rate_hz: f64::from(reader.sample_rate()),
        frames: reader.frames(),
        sample_format: "opus".to_string(),
        container: "ogg-opus".to_string(),
        declares_b_format: false,
        mixed_order_set: None,
        warnings: Vec::new(),
        full_scale: FullScale::Float,
        metadata: None,
        route: None,
    };
    Ok((Source::Opus(Box::new(reader)), info))
}

/// Scans `input`. Errors carry the exit code: 2 for anything about the input.
pub fn scan(input: &ScanInput, options: ScanOptions) -> Result<ScanResult, CliError> {
    scan_observed(input, options, |info| {
        Progress::new(info.frames, info.sample_rate_hz, options.progress)
    })
}

/// [`scan`] with the progress display made by `progress` once the input is open.
pub fn scan_observed(
    input: &ScanInput,
    options: ScanOptions,
    progress: impl FnOnce(&InputInfo) -> Progress,
) -> Result<ScanResult, CliError> {
    let started = Instant::now();
    let mut options = options;
    let (mut source, info) = open(input, &mut options)?;
    let name = info.display_name();
    let expander = match &source {
        Source::File {
            mixed: Some(mixed), ..
        } => Some(mixed.0),
        _ => None,
    };
    let analysed_channels = match &info.route {
        Some(route) => route.len(),
        None => expander.map_or(info.channels, |e| e.output_channels()),
    };
    let layout = ChannelLayout::from_channel_count(analysed_channels)
        .map_err(|e| CliError::input(format!("cannot scan '{name}': {e}")))?;
    if info.frames == 0 {
        return Err(CliError::input(format!(
            "cannot scan '{name}': it holds no audio frames"
        )));
    }
    let [low_hz, high_hz] = options.band_edges_hz;
    let nyquist_hz = info.sample_rate_hz / 2.0;
    if !(low_hz > 0.0 && low_hz < high_hz && high_hz < nyquist_hz) {
        return Err(CliError::input(format!(
            "cannot scan '{name}': band edges {low_hz}-{high_hz} Hz must satisfy 0 < low < high < {nyquist_hz} Hz (half the sample rate)"
        )));
    }
    let settings = AnalysisSettings {
        assumed_format: options.assumed,
        method: options.method,
        band: Band::Full,
        band_edges_hz: options.band_edges_hz,
        map_rate_hz: TIMELINE_RATE_HZ,
        grid_step_deg: TIMELINE_GRID_STEP_DEG,
        over_omni_tolerance_db: options.over_omni_tolerance_db,
        time_constant_ms: 1000.0 / TIMELINE_RATE_HZ,
        max_sources: 1,
        declared_format: comparable_declaration(&info, &options),
        ..AnalysisSettings::default()
    };
    let setup = StreamSetup {
        sample_rate_hz: info.sample_rate_hz,
        channels: analysed_channels,
    };
    let mut analyzer = Analyzer::new(setup, settings)
        .map_err(|e| CliError::input(format!("cannot scan '{name}': {e}")))?;
    analyzer
        .set_full_scale(info.full_scale)
        .map_err(|e| CliError::input(format!("cannot scan '{name}': {e}")))?;
    if let Some(e) = &expander {
        analyzer.set_absent_channels(e.absent_channels());
    }
    analyzer.reserve_block(BLOCK_FRAMES);
    analyzer.set_parallel(options.parallel);
    // The scan reads the true-peak maxima only, never the live window.
    analyzer
        .set_live_true_peak(false)
        .map_err(|e| CliError::input(format!("cannot scan '{name}': {e}")))?;

    let mut progress = progress(&info);
    let mut stream = || analyse_stream(&mut analyzer, &mut source, &name, &mut progress);
    // Split, the loop runs on a thread of the pool the engine spreads each block over, so
    // that no block has to be handed from this thread to the pool and back.
    let (timeline, frames_read) = if options.parallel {
        rayon::scope(|_| stream())?
    } else {
        stream()?
    };
    progress.finish();
    if frames_read == 0 {
        return Err(CliError::input(format!(
            "cannot scan '{name}': it holds no audio frames"
        )));
    }

    // Every whole-programme figure comes from the engine's programme summary.
    let snapshot = analyzer.finish().clone();
    let programme = &snapshot.programme;
    let mut channels = programme.channels.clone();
    let mut findings = programme.findings.clone();
    let finding_context = FindingContext {
        format_check: &programme.format_check,
        order: layout.order,
        assumed: options.assumed,
        settings: analyzer.settings(),
    };
    if let Some(e) = &expander {
        let source_channel = |c| e.source_channel(c);
        to_file_channels(source_channel, &mut channels);
        findings = file_channel_findings(source_channel, &channels, &finding_context);
    }
    if let Some(route) = &info.route {
        let source_channel = |c: usize| route.get(c).copied();
        to_file_channels(source_channel, &mut channels);
        findings = file_channel_findings(source_channel, &channels, &finding_context);
    }
    findings.extend(unreadable_metadata(&info, &options));
    for warning in &info.warnings {
        findings.push(Finding {
            severity: Severity::Warning,
            code: FindingCode::SizeRecovered,
            message: warning.clone(),
            channels: Vec::new(),
        });
    }
    findings.sort_by_key(|f| std::cmp::Reverse(f.severity));

    // Whole-programme maps per band on a finer grid.
    let report_settings = AnalysisSettings {
        grid_step_deg: REPORT_GRID_STEP_DEG,
        max_sources: 8,
        ..*analyzer.settings()
    };
    analyzer
        .apply_settings(report_settings)
        .map_err(|e| CliError::input(format!("cannot scan '{name}': {e}")))?;
    let edges = snapshot.band_edges_hz;
    let bands = Band::ALL
        .into_iter()
        .map(|band| {
            let (map, sources) =
                analyzer.integrated_map(band, options.method, MapScale::RelativeDb);
            let intensity = analyzer.integrated_intensity(band);
            let range_hz = match band {
                Band::Full => [0.0, nyquist_hz],
                Band::Low => [0.0, edges[0]],
                Band::Mid => [edges[0], edges[1]],
                Band::High => [edges[1], nyquist_hz],
            };
            BandResult {
                band,
                range_hz,
                map,
                sources,
                diffuseness: intensity.diffuseness,
                w_level_dbfs: intensity.w_level_dbfs,
            }
        })
        .collect();

    Ok(ScanResult {
        input: InputInfo {
            frames: frames_read,
            ..info
        },
        layout,
        options,
        snapshot,
        channels,
        bands,
        timeline,
        findings,
        analysis_s: started.elapsed().as_secs_f64(),
    })
}

/// Reads `source` to its end through `analyzer`, the next block decoded beside the analysis of
/// the current one. Returns the timeline and the frames read.
fn analyse_stream(
    analyzer: &mut Analyzer,
    source: &mut Source,
    name: &str,
    progress: &mut Progress,
) -> Result<(Vec<TimelinePoint>, u64), CliError> {
    let channels = analyzer.setup().channels;
    // Two sets of buffers: the next block is decoded into one while the other is analysed.
    let mut buffers: Vec<Vec<f32>> = vec![Vec::with_capacity(BLOCK_FRAMES); channels];
    let mut next_buffers = buffers.clone();
    let mut timeline = Vec::new();
    let mut timeline_stride = 1usize;
    let mut snapshots_seen = 0usize;
    let mut frames_read = 0u64;
    let mut n = source.read(&mut buffers, name)?;
    while n > 0 {
        frames_read += n as u64;
        let block: Vec<&[f32]> = buffers.iter().map(|b| &b[..n]).collect();
        let (ready, next) =
            analyzer.process_beside(&block, || source.read(&mut next_buffers, name));
        if ready {
            snapshots_seen += 1;
            if snapshots_seen.is_multiple_of(timeline_stride) {
                timeline.push(timeline_point(analyzer.snapshot()));
                if timeline.len() >= TIMELINE_MAX_POINTS {
                    timeline = timeline.into_iter().step_by(2).collect();
                    timeline_stride *= 2;
                }
            }
        }
        progress.advance(n as u64);
        std::mem::swap(&mut buffers, &mut next_buffers);
        n = next?;
    }
    Ok((timeline, frames_read))
}

fn timeline_point(snapshot: &Snapshot) -> TimelinePoint {
    TimelinePoint {
        time_s: snapshot.time_s,
        direction: snapshot.sources.first().map(|s| s.direction),
        w_rms_dbfs: snapshot.omni.rms_dbfs,
    }
}

/// Expected order balance (dB, indexed [order]) of an isotropic incoherent field stored in
/// `content` and read as `assumed`: E_n = Σ_m (k_c/k_a)²(acn) / (2n+1) ÷ (k_c/k_a)²(W), with k
/// the gain from SN3D of each normalisation (each SN3D component of order n carries 1/(2n+1)
/// of W's energy in such a field, by the addition theorem). `None` where a normalisation is not
/// defined (maxN above order 3).
pub fn expected_balance_db(
    content: Normalization,
    assumed: Normalization,
    order: usize,
) -> Vec<Option<f64>> {
    let ratio = |acn: usize| -> Option<f64> {
        Some(content.gain_from_sn3d(acn)? / assumed.gain_from_sn3d(acn)?)
    };
    let Some(w) = ratio(0) else {
        return vec![None; order + 1];
    };
    (0..=order)
        .map(|n| {
            let mut energy = 0.0;
            for acn in n * n..(n + 1) * (n + 1) {
                energy += ratio(acn)?.powi(2);
            }
            Some(10.0 * (energy / (2 * n + 1) as f64 / (w * w)).log10())
        })
        .collect()
}

/// Channel figures of an expanded mixed-order stream or of routed tracks, back in file
/// channels (`source_channel` maps an analysed channel to its file channel): the absent
/// components have no row.
fn to_file_channels(
    source_channel: impl Fn(usize) -> Option<usize>,
    channels: &mut Vec<ChannelSummary>,
) {
    channels.retain_mut(|c| match source_channel(c.input_index) {
        Some(file_channel) => {
            c.input_index = file_channel;
            true
        }
        None => false,
    });
    channels.sort_by_key(|c| c.input_index);
}

/// What the finding rules need besides the channels.
struct FindingContext<'a> {
    format_check: &'a FormatCheck,
    order: usize,
    assumed: AmbiFormat,
    settings: &'a AnalysisSettings,
}

/// The engine's finding rules run again on file channels, so that both the indices and the
/// messages ("channel 4 (ACN 8)") name the channels of the file rather than those of the
/// expanded full-order layout. `channels` are already in file channels.
fn file_channel_findings(
    source_channel: impl Fn(usize) -> Option<usize>,
    channels: &[ChannelSummary],
    context: &FindingContext,
) -> Vec<Finding> {
    let to_file =
        |list: &[usize]| -> Vec<usize> { list.iter().filter_map(|&c| source_channel(c)).collect() };
    let check = context.format_check;
    let file_check = FormatCheck {
        silent_channels: to_file(&check.silent_channels),
        silent_by_geometry: to_file(&check.silent_by_geometry),
        duplicate_channels: check
            .duplicate_channels
            .iter()
            .filter_map(|&(a, b)| Some((source_channel(a)?, source_channel(b)?)))
            .collect(),
        ..check.clone()
    };
    let facts: Vec<ChannelFacts> = channels.iter().map(Into::into).collect();
    collect_findings(
        &FindingInputs {
            channels: &facts,
            format_check: &file_check,
            order: context.order,
            assumed_format: context.assumed,
            whole_programme: true,
        },
        context.settings,
    )
}

/// The format a file's ADM metadata declares, when the format check can be compared with it:
/// a declaration whose tracks had to be routed was analysed in its own order only when it was
/// the assumption; otherwise the check saw the file's channels as they are.
fn comparable_declaration(info: &InputInfo, options: &ScanOptions) -> Option<AmbiFormat> {
    let Some(Ok(declared)) = &info.metadata else {
        return None;
    };
    let from_metadata = options.assumed_source == AssumedSource::Metadata;
    (from_metadata || info.route.is_none() && declared.route().is_none()).then(|| declared.format())
}

/// Metadata a file carries that cannot be used (`metadata-unreadable`); the engine's rules
/// compare a usable declaration with the signal (`metadata-mismatch`).
fn unreadable_metadata(info: &InputInfo, options: &ScanOptions) -> Option<Finding> {
    let Some(Err(why)) = &info.metadata else {
        return None;
    };
    Some(Finding {
        severity: Severity::Warning,
        code: FindingCode::MetadataUnreadable,
        message: format!(
            "the file's ADM metadata cannot be used ({why}); the format was taken from {}",
            match options.assumed_source {
                AssumedSource::Option => "--assume",
                _ => "the default, and the signal was checked against it",
            }
        ),
        channels: Vec::new(),
    })
}
