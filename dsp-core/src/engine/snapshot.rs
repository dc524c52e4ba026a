//! The snapshot: plain data the analysis side publishes for the GUI and the report writer.
//!
//! Everything here is raw numbers in physical units (dB, degrees, seconds); colours and text are
//! made at the edges (see [`crate::render`]). Cheap to clone; the GUI holds the latest one.

use super::finding_log::LoggedFinding;
use crate::format::AmbiFormat;
use crate::meters::ChannelReading;
use crate::sphere::Direction;

/// Which beam or estimator the map uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub enum MapMethod {
    /// Basic (max-DI) beam: highest directivity, strongest side lobes.
    Basic,
    /// max-rE beam (weights P_n(r_E)): the default, a good compromise.
    #[default]
    MaxRe,
    /// In-phase beam: no side lobes, widest main lobe.
    InPhase,
    /// Minimum-variance distortionless response (Capon 1969), diagonally loaded.
    Mvdr,
    /// Noise-subspace pseudo-spectrum (Schmidt 1986).
    Music,
}

impl MapMethod {
    pub const ALL: [MapMethod; 5] = [
        Self::Basic,
        Self::MaxRe,
        Self::InPhase,
        Self::Mvdr,
        Self::Music,
    ];

    /// Stable command-line / JSON name.
    pub fn label(self) -> &'static str {
        match self {
            Self::Basic => "basic",
            Self::MaxRe => "max-re",
            Self::InPhase => "in-phase",
            Self::Mvdr => "mvdr",
            Self::Music => "music",
        }
    }

    /// Name for people.
    pub fn human_name(self) -> &'static str {
        match self {
            Self::Basic => "Basic",
            Self::MaxRe => "max-rE",
            Self::InPhase => "In-phase",
            Self::Mvdr => "MVDR",
            Self::Music => "MUSIC",
        }
    }

    pub fn from_label(label: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|m| m.label() == label)
    }
}

/// Frequency band of an analysis: the full band or one of three splits at two user edges.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub enum Band {
    #[default]
    Full,
    Low,
    Mid,
    High,
}

impl Band {
    pub const ALL: [Band; 4] = [Self::Full, Self::Low, Self::Mid, Self::High];

    /// Index into per-band arrays ([full, low, mid, high]).
    pub fn index(self) -> usize {
        self as usize
    }

    pub fn label(self) -> &'static str {
        match self {
            Self::Full => "full",
            Self::Low => "low",
            Self::Mid => "mid",
            Self::High => "high",
        }
    }
}

/// How map values are expressed.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub enum MapScale {
    /// dB relative to the map's maximum (the maximum reads 0 dB).
    #[default]
    RelativeDb,
    /// Beam output in dBFS: the level, in W's units, of a plane wave from that direction that
    /// would give the same beam output (0 dBFS = a full-scale plane wave). For MVDR/MUSIC the
    /// pseudo-spectrum has no such meaning and is shown relative instead.
    AbsoluteDbfs,
}

/// An equirectangular map in dB: row 0 at the top (+90°), column 0 at azimuth +180° (see
/// [`crate::sphere::grid::EquirectGrid`]). `values_db` is indexed [row·width + col].
#[derive(Clone, Debug, PartialEq, Default)]
pub struct MapImage {
    pub width: usize,
    pub height: usize,
    pub values_db: Vec<f32>,
    /// Largest value in `values_db`.
    pub max_db: f32,
    pub scale: MapScale,
    pub method: MapMethod,
    pub band: Band,
    /// True for the whole-programme (integrated) map, false for the live one.
    pub integrated: bool,
}

/// A strong direction in the map.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct SourceReading {
    pub direction: Direction,
    /// Level relative to the strongest source, dB (0 for the strongest).
    pub level_db: f64,
}

/// DirAC quantities of one band (Pulkki 2007), from the first-order part, SN3D scaling.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct BandIntensity {
    /// Direction of arrival (opposite to the active intensity), if the band carries energy.
    pub direction: Option<Direction>,
    /// Diffuseness ψ in [0, 1]: 0 for one plane wave, 1 for an isotropic diffuse field.
    pub diffuseness: Option<f64>,
    /// Mean square of W in the band, dBFS.
    pub w_level_dbfs: f64,
}

/// One input channel's meters plus its place in the ambisonic layout.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct ChannelStatus {
    /// Index of the channel in the input (file or host order).
    pub input_index: usize,
    /// ACN index after mapping from the assumed format; None for extra non-spatial channels.
    pub acn: Option<usize>,
    pub order: Option<usize>,
    pub degree: Option<i32>,
    /// Raw meters of the input channel.
    pub reading: ChannelReading,
    /// Short-window level after conversion to SN3D, dBFS (the level compared with W).
    pub sn3d_level_dbfs: f64,
    /// Converted level above W's by more than the tolerance.
    pub over_omni: bool,
    /// No signal at all (below −120 dBFS) while W carries signal, or always silent.
    pub silent: bool,
}

/// Gain staging of the omni channel W (after conversion to SN3D).
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct OmniReading {
    /// SN3D-equivalent W level minus the stream's own W level, dB: 0 for AmbiX and ACN/N3D,
    /// +3.01 dB for FuMa and ACN/maxN. The levels below are SN3D-equivalent; subtract this for
    /// the stream's own W.
    pub conversion_gain_db: f64,
    pub sample_peak_dbfs: f64,
    pub true_peak_dbtp: f64,
    pub max_true_peak_dbtp: f64,
    pub rms_dbfs: f64,
    pub momentary_lufs: Option<f64>,
    pub short_term_lufs: Option<f64>,
    pub integrated_lufs: Option<f64>,
    pub max_momentary_lufs: Option<f64>,
    pub max_short_term_lufs: Option<f64>,
}

/// How serious a finding is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Severity {
    Info,
    Warning,
    Error,
}

impl Severity {
    pub fn label(self) -> &'static str {
        match self {
            Self::Info => "info",
            Self::Warning => "warning",
            Self::Error => "error",
        }
    }
}

/// Stable finding codes (part of the JSON contract).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum FindingCode {
    Clipping,
    OverOmni,
    SilentChannel,
    DuplicateChannels,
    OrderDeficit,
    FormatMismatch,
    InvalidSamples,
    DcOffset,
    /// The file's declared sizes were wrong (an unfinalised recording, a size that wrapped
    /// past 4 GiB) and the reader recovered them from the file's length.
    SizeRecovered,
    /// The scene is horizontal only (info).
    NoHeightContent,
    /// The four channels look like unconverted microphone capsule signals.
    AFormatSuspected,
    /// The signal disagrees, with confidence, with the format the file's metadata declares.
    MetadataMismatch,
    /// The file carries format metadata that cannot be used; the signal decides.
    MetadataUnreadable,
}

impl FindingCode {
    pub fn label(self) -> &'static str {
        match self {
            Self::Clipping => "clipping",
            Self::OverOmni => "over-omni",
            Self::SilentChannel => "silent-channel",
            Self::DuplicateChannels => "duplicate-channels",
            Self::OrderDeficit => "order-deficit",
            Self::FormatMismatch => "format-mismatch",
            Self::InvalidSamples => "invalid-samples",
            Self::DcOffset => "dc-offset",
            Self::SizeRecovered => "size-recovered",
            Self::NoHeightContent => "no-height-content",
            Self::AFormatSuspected => "a-format-suspected",
            Self::MetadataMismatch => "metadata-mismatch",
            Self::MetadataUnreadable => "metadata-unreadable",
        }
    }
}

/// Something a reviewer should know, in plain words.
#[derive(Clone, Debug, PartialEq)]
pub struct Finding {
    pub severity: Severity,
    pub code: FindingCode,
    pub message: String,
    /// Input channel indices concerned, if any.
    pub channels: Vec<usize>,
}

/// Score of one format hypothesis.
#[derive(Clone, Debug, PartialEq)]
pub struct HypothesisScore {
    pub format: AmbiFormat,
    /// Energy per order relative to W under this hypothesis, dB, indexed [order] (entry 0 is 0).
    pub order_balance_db: Vec<f64>,
    /// How well the dominant covariance eigenvectors fit a plane-wave steering vector, in [0, 1].
    pub steering_fit: f64,
    /// Combined plausibility in [0, 1]; the scores of all hypotheses sum to 1.
    pub probability: f64,
}

/// Result of the format check. It advises; it never changes the assumption.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct FormatCheck {
    /// False until enough signal has been seen to judge.
    pub ready: bool,
    /// Energy per order relative to W under the assumed format, dB, indexed [order].
    pub order_balance_db: Vec<f64>,
    pub hypotheses: Vec<HypothesisScore>,
    /// Most likely format, if ready.
    pub detected: Option<AmbiFormat>,
    /// Probability of the detected format, in [0, 1].
    pub confidence: f64,
    /// Highest order that carries energy.
    pub effective_order: usize,
    /// Input channels that carry no signal while W does and that nothing explains (known-absent
    /// channels and the empty channels of a horizontal scene are not listed).
    pub silent_channels: Vec<usize>,
    /// Pairs of input channels that carry the same signal where the scene's geometry does
    /// not explain it (a few plane waves or horizontal-only content tie channels by physics).
    pub duplicate_channels: Vec<(usize, usize)>,
    /// The scene has no height content: the horizontal-plane identities of the SH hold.
    pub horizontal_only: bool,
    /// Input channels that carry no signal because the scene is horizontal (components
    /// with n + |m| odd); not a fault.
    pub silent_by_geometry: Vec<usize>,
    /// A first-order stream looks like the four capsule signals of a tetrahedral microphone
    /// (A-format) rather than B-format; only set when ready.
    pub a_format_suspected: bool,
}

/// Load and hand-off health.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct EngineHealth {
    /// Analysis time divided by the audio time it covered, averaged over the last second.
    pub analysis_load: f64,
    pub dropped_blocks: u64,
    pub received_blocks: u64,
}

/// Everything the analysis knows at one moment.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Snapshot {
    /// Increases by one with every published snapshot.
    pub sequence: u64,
    /// Audio time analysed so far, seconds.
    pub time_s: f64,
    pub sample_rate_hz: f64,
    /// Ambisonic order of the stream.
    pub order: usize,
    /// Input channels in all (spatial + extra).
    pub channels: usize,
    /// The format the analysis reads the input as.
    pub assumed_format: AmbiFormat,
    /// Set when the requested format could not be used (FuMa above third order): why, and
    /// which format is used instead.
    pub format_not_applied: Option<String>,
    /// The map of the selected band and method (live or integrated as selected).
    pub map: MapImage,
    /// The format the map and its sources read the input as: `assumed_format`, or the
    /// momentary comparison's ([`AnalysisSettings::map_format_override`](super::AnalysisSettings::map_format_override)).
    pub map_format: AmbiFormat,
    /// Strongest directions in `map`, strongest first.
    pub sources: Vec<SourceReading>,
    /// DirAC per band, indexed by [`Band::index`].
    pub intensity: [BandIntensity; 4],
    /// Band edges in use, Hz.
    pub band_edges_hz: [f64; 2],
    /// Per input channel, indexed [input channel].
    pub channel_status: Vec<ChannelStatus>,
    pub omni: OmniReading,
    pub format_check: FormatCheck,
    pub findings: Vec<Finding>,
    /// The live findings with their history: first seen, still active; most severe first
    /// (see [`super::FindingLog`]).
    pub finding_log: Vec<LoggedFinding>,
    /// The finding log's times count from its last reset rather than from the start.
    pub finding_log_from_reset: bool,
    pub health: EngineHealth,
    /// True while the map is frozen (hold).
    pub frozen: bool,
    /// Whole-programme figures, refreshed with every format check (twice a second of audio)
    /// and at [`Analyzer::finish`](super::Analyzer::finish).
    pub programme: ProgrammeSummary,
}

impl Default for AmbiFormat {
    fn default() -> Self {
        AmbiFormat::ACN_SN3D
    }
}

/// Whole-programme figures of one input channel, over everything analysed since the start
/// (or since the last [`Analyzer::reset_programme`](super::Analyzer::reset_programme)).
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct ChannelProgramme {
    /// Index of the channel in the input (file or host order, counted from 0).
    pub input_index: usize,
    /// ACN index it carries under the assumed format; `None` for an extra channel.
    pub acn: Option<usize>,
    pub order: Option<usize>,
    pub degree: Option<i32>,
    /// Highest sample peak, dBFS (the channel as stored).
    pub sample_peak_dbfs: f64,
    /// Highest true peak (BS.1770-4 Annex 2), dBTP (as stored).
    pub true_peak_dbtp: f64,
    /// RMS over the programme, dBFS (as stored).
    pub rms_dbfs: f64,
    /// RMS after conversion to SN3D, dBFS: what is compared with W.
    pub sn3d_rms_dbfs: f64,
    /// Samples at full scale, both signs (either extreme code in integer PCM, |x| ≥ 1 in float).
    pub clip_count: u64,
    /// Longest run of consecutive full-scale samples.
    pub longest_clip_run: u64,
    /// NaN or infinite samples.
    pub invalid_samples: u64,
    /// Mean of the valid samples over the programme (DC), linear full scale.
    pub dc_offset: f64,
    /// SN3D level above W's by more than the over-omni tolerance.
    pub over_omni: bool,
    /// Below −120 dBFS over the whole programme.
    pub silent: bool,
}

/// W over the whole programme. Levels are SN3D-equivalent (what the analysis compares and
/// what loudness is measured on); `file_w_offset_db` says how far the stream's own W differs.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct OmniProgramme {
    /// SN3D-equivalent W level minus the stream's own W level, dB: 0 for AmbiX and ACN/N3D,
    /// +3.01 dB for FuMa and ACN/maxN (their W carries −3.01 dB).
    pub conversion_gain_db: f64,
    pub sample_peak_dbfs: f64,
    pub true_peak_dbtp: f64,
    pub rms_dbfs: f64,
    pub integrated_lufs: Option<f64>,
    pub max_momentary_lufs: Option<f64>,
    pub max_short_term_lufs: Option<f64>,
}

impl OmniProgramme {
    /// A level in the stream's own W scale, from its SN3D-equivalent value.
    pub fn as_stored(&self, sn3d_value: f64) -> f64 {
        sn3d_value - self.conversion_gain_db
    }
}

impl OmniReading {
    /// A level in the stream's own W scale, from its SN3D-equivalent value.
    pub fn as_stored(&self, sn3d_value: f64) -> f64 {
        sn3d_value - self.conversion_gain_db
    }
}

/// Whole-programme summary: what the scanner reports and the whole-session view shows.
/// Computed in one place, [`Analyzer::programme_summary`](super::Analyzer::programme_summary).
#[derive(Clone, Debug, PartialEq, Default)]
pub struct ProgrammeSummary {
    /// Audio analysed, seconds.
    pub duration_s: f64,
    /// Per input channel, indexed [input channel].
    pub channels: Vec<ChannelProgramme>,
    /// Full-band energy per order relative to W under the assumed format, dB, indexed [order].
    pub order_balance_db: Vec<f64>,
    /// Highest order that carries energy (full band).
    pub effective_order: usize,
    /// Per band ([`Band::index`]): the energy-weighted mean of short-time DirAC diffuseness.
    pub diffuseness: [Option<f64>; 4],
    pub omni: OmniProgramme,
    /// The format check on the whole-programme full-band covariance.
    pub format_check: FormatCheck,
    /// Findings over the whole programme, most severe first.
    pub findings: Vec<Finding>,
}

impl ChannelProgramme {
    /// A non-spatial channel after the (N+1)² spatial ones.
    pub fn is_extra(&self) -> bool {
        self.acn.is_none()
    }

    /// True when a table should draw attention to the channel.
    pub fn needs_attention(&self) -> bool {
        self.clip_count > 0 || self.invalid_samples > 0 || self.over_omni || self.silent
    }
}
