//! The `fieldglass-scan/1` JSON document (documented in docs/scan-json.md). Typed structs,
//! serialised with serde; every number that is not finite (silence, undefined loudness)
//! becomes `null`.

use super::run::{ChannelSummary, ScanResult};
use fieldglass_dsp::engine::{Finding, FormatCheck, OmniProgramme, SourceReading};
use fieldglass_dsp::format::{AmbiFormat, ChannelOrdering, Normalization};
use fieldglass_dsp::meters::LEVEL_FLOOR_DB;
use serde::Serialize;

/// Value of the `schema` field.
pub const SCHEMA: &str = "fieldglass-scan/1";

/// The whole document.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct ScanDocument {
    pub schema: &'static str,
    pub tool: Tool,
    pub input: Input,
    pub assumed: Assumed,
    pub detected: Detected,
    pub analysis: Analysis,
    /// Per order n = 0..N, dB relative to W under the assumed format (entry 0 is 0).
    pub order_balance_db: Vec<Option<f64>>,
    /// Spatial channels, in file order.
    pub channels: Vec<Channel>,
    /// Non-spatial channels after the (N+1)² spatial ones, in file order.
    pub extra_channels: Vec<ExtraChannel>,
    pub omni: Omni,
    /// Whole-programme sources of the full band, strongest first.
    pub sources: Vec<Source>,
    /// Whole-programme full-band diffuseness (DirAC), 0 … 1.
    pub diffuseness: Option<f64>,
    pub bands: Vec<BandEntry>,
    pub findings: Vec<FindingEntry>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Tool {
    pub name: &'static str,
    pub version: &'static str,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Input {
    /// File path as given, or null for the demo scene.
    pub path: Option<String>,
    pub demo: bool,
    pub channels: usize,
    pub spatial_channels: usize,
    pub extra_channels: usize,
    pub sample_rate: f64,
    pub frames: u64,
    pub duration_s: Option<f64>,
    pub sample_format: String,
    pub container: String,
    /// The file declares the AMB B-format sub-format (FuMa).
    pub declares_b_format: bool,
    /// FuMa letters of a horizontal or mixed-order set read as FuMa ("WXYUV"), else null.
    pub mixed_order_set: Option<String>,
    /// ADM metadata of a BW64 file (chna + axml); null when the file carries none.
    pub metadata: Option<Metadata>,
}

/// What a file's ADM metadata declares (ITU-R BS.2076 / BS.2088 / BS.2094).
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Metadata {
    /// "ITU-R BS.2076" (ADM).
    pub standard: &'static str,
    /// audioPackFormatID of the HOA pack; null when unreadable.
    pub pack_id: Option<String>,
    pub pack_name: Option<String>,
    /// "SN3D", "N3D" or "FuMa" as declared; null when unreadable.
    pub normalization: Option<&'static str>,
    pub order: Option<usize>,
    /// The HOA tracks in file order.
    pub tracks: Vec<MetadataTrack>,
    /// Tracks outside the HOA pack (objects, beds): listed, not analysed.
    pub other_tracks: Vec<OtherTrack>,
    /// Some IDs were resolved from the ITU-R BS.2094 common definitions.
    pub common_definitions: bool,
    /// Why the metadata cannot be used (then the signal decides); null when it can.
    pub error: Option<String>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct MetadataTrack {
    /// File channel, 0-based.
    pub index: usize,
    pub order: usize,
    pub degree: i32,
    pub acn: usize,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct OtherTrack {
    /// File channel, 0-based.
    pub index: usize,
    /// ADM type ("Objects", "DirectSpeakers", …) or "unknown".
    #[serde(rename = "type")]
    pub kind: String,
    pub name: String,
}

fn metadata_entry(metadata: &Result<crate::adm::AdmDeclaration, String>) -> Metadata {
    match metadata {
        Ok(d) => Metadata {
            standard: "ITU-R BS.2076",
            pack_id: Some(d.pack_id.clone()),
            pack_name: Some(d.pack_name.clone()),
            normalization: Some(d.normalization.label()),
            order: Some(d.order),
            tracks: d
                .hoa_tracks
                .iter()
                .map(|t| MetadataTrack {
                    index: t.file_channel,
                    order: t.order,
                    degree: t.degree,
                    acn: t.acn,
                })
                .collect(),
            other_tracks: d
                .other_tracks
                .iter()
                .map(|t| OtherTrack {
                    index: t.file_channel,
                    kind: t.kind.clone(),
                    name: t.name.clone(),
                })
                .collect(),
            common_definitions: d.uses_common_definitions,
            error: None,
        },
        Err(why) => Metadata {
            standard: "ITU-R BS.2076",
            pack_id: None,
            pack_name: None,
            normalization: None,
            order: None,
            tracks: Vec::new(),
            other_tracks: Vec::new(),
            common_definitions: false,
            error: Some(why.clone()),
        },
    }
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Assumed {
    pub ordering: &'static str,
    pub normalization: &'static str,
    pub order: usize,
    /// "option" (--assume), "metadata" (declared by the file) or "default".
    pub source: &'static str,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Detected {
    /// "acn" or "fuma"; null if the check could not judge.
    pub ordering: Option<&'static str>,
    /// "sn3d", "n3d" or "maxn"; null if the check could not judge.
    pub normalization: Option<&'static str>,
    pub order: usize,
    pub effective_order: usize,
    /// Probability of the detected format, 0 … 1; null if the check could not judge.
    pub confidence: Option<f64>,
    /// Every tested hypothesis, most likely first.
    pub hypotheses: Vec<Hypothesis>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Hypothesis {
    pub format: &'static str,
    pub probability: Option<f64>,
    pub steering_fit: Option<f64>,
    pub order_balance_db: Vec<Option<f64>>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Analysis {
    pub method: &'static str,
    pub band_edges_hz: [Option<f64>; 2],
    pub over_omni_tolerance_db: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Channel {
    pub index: usize,
    pub acn: usize,
    pub order: usize,
    pub degree: i32,
    pub peak_dbfs: Option<f64>,
    pub true_peak_dbtp: Option<f64>,
    pub rms_dbfs: Option<f64>,
    pub sn3d_rms_dbfs: Option<f64>,
    pub clipped_samples: u64,
    pub longest_clip_run: u64,
    pub invalid_samples: u64,
    pub dc_offset: Option<f64>,
    pub over_omni: bool,
    pub silent: bool,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct ExtraChannel {
    pub index: usize,
    pub peak_dbfs: Option<f64>,
    pub true_peak_dbtp: Option<f64>,
    pub rms_dbfs: Option<f64>,
    pub clipped_samples: u64,
    pub longest_clip_run: u64,
    pub invalid_samples: u64,
    pub dc_offset: Option<f64>,
    pub silent: bool,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Omni {
    pub integrated_lufs: Option<f64>,
    pub max_momentary_lufs: Option<f64>,
    pub max_short_term_lufs: Option<f64>,
    pub true_peak_dbtp: Option<f64>,
    pub peak_dbfs: Option<f64>,
    pub rms_dbfs: Option<f64>,
    /// SN3D-equivalent W minus the file's own W, dB (0 for AmbiX and N3D, +3.01 for FuMa).
    pub conversion_gain_db: Option<f64>,
    /// The same W levels as stored in the file (before conversion).
    pub stored: StoredW,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct StoredW {
    pub true_peak_dbtp: Option<f64>,
    pub peak_dbfs: Option<f64>,
    pub rms_dbfs: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Source {
    pub azimuth_deg: Option<f64>,
    pub elevation_deg: Option<f64>,
    pub level_db: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct BandEntry {
    pub band: &'static str,
    pub low_hz: Option<f64>,
    pub high_hz: Option<f64>,
    pub w_level_dbfs: Option<f64>,
    pub diffuseness: Option<f64>,
    pub sources: Vec<Source>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct FindingEntry {
    pub severity: &'static str,
    pub code: &'static str,
    pub message: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channels: Option<Vec<usize>>,
}

// The number helpers and entry builders below are shared by every JSON the program writes
// (`scan`, the editor's saved view, `compare`), so one figure reads the same in all of them.

/// `Some(x)` for a finite number, `None` (JSON null) otherwise.
pub fn num(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// Like [`num`], but levels at the meters' floor (no signal at all) are null too.
pub fn level(x: f64) -> Option<f64> {
    num(x).filter(|&v| v > LEVEL_FLOOR_DB)
}

/// Rounds to `decimals` places (keeps the document readable; far below any meter's accuracy),
/// without a "-0".
pub fn rounded(x: Option<f64>, decimals: i32) -> Option<f64> {
    let k = 10f64.powi(decimals);
    x.map(|v| (v * k).round() / k + 0.0)
}

pub fn ordering_label(o: ChannelOrdering) -> &'static str {
    match o {
        ChannelOrdering::Acn => "acn",
        ChannelOrdering::Fuma => "fuma",
    }
}

pub fn normalization_label(n: Normalization) -> &'static str {
    match n {
        Normalization::Sn3d => "sn3d",
        Normalization::N3d => "n3d",
        Normalization::MaxN => "maxn",
    }
}

pub fn source(s: &SourceReading) -> Source {
    Source {
        azimuth_deg: rounded(num(s.direction.azimuth_deg), 2),
        elevation_deg: rounded(num(s.direction.elevation_deg), 2),
        level_db: rounded(num(s.level_db), 2),
    }
}

fn finding(f: &Finding) -> FindingEntry {
    FindingEntry {
        severity: f.severity.label(),
        code: f.code.label(),
        message: f.message.clone(),
        channels: (!f.channels.is_empty()).then(|| f.channels.clone()),
    }
}

/// Energy per order relative to W, dB; null below −200 dB.
pub fn balance(values: &[f64]) -> Vec<Option<f64>> {
    values
        .iter()
        .map(|&v| rounded(num(v).filter(|&v| v > -200.0), 3))
        .collect()
}

/// The spatial and the extra channels of the engine's programme figures, in input order.
pub fn channel_entries(channels: &[ChannelSummary]) -> (Vec<Channel>, Vec<ExtraChannel>) {
    (
        channels.iter().filter_map(spatial).collect(),
        channels
            .iter()
            .filter(|c| c.is_extra())
            .map(extra)
            .collect(),
    )
}

/// W's programme figures, SN3D-equivalent and as stored.
pub fn omni_entry(omni: &OmniProgramme) -> Omni {
    Omni {
        integrated_lufs: rounded(omni.integrated_lufs.and_then(num), 2),
        max_momentary_lufs: rounded(omni.max_momentary_lufs.and_then(num), 2),
        max_short_term_lufs: rounded(omni.max_short_term_lufs.and_then(num), 2),
        true_peak_dbtp: rounded(level(omni.true_peak_dbtp), 2),
        peak_dbfs: rounded(level(omni.sample_peak_dbfs), 2),
        rms_dbfs: rounded(level(omni.rms_dbfs), 2),
        conversion_gain_db: rounded(num(omni.conversion_gain_db), 3),
        stored: StoredW {
            true_peak_dbtp: rounded(level(omni.as_stored(omni.true_peak_dbtp)), 2),
            peak_dbfs: rounded(level(omni.as_stored(omni.sample_peak_dbfs)), 2),
            rms_dbfs: rounded(level(omni.as_stored(omni.rms_dbfs)), 2),
        },
    }
}

/// The format check's verdict (only once it is ready) and every hypothesis, most likely first.
pub fn detected_entry(check: &FormatCheck, order: usize, effective_order: usize) -> Detected {
    let detected = check.detected.filter(|_| check.ready);
    let mut hypotheses: Vec<Hypothesis> = check
        .hypotheses
        .iter()
        .map(|h| Hypothesis {
            format: h.format.label(),
            probability: rounded(num(h.probability), 4),
            steering_fit: rounded(num(h.steering_fit), 4),
            order_balance_db: balance(&h.order_balance_db),
        })
        .collect();
    hypotheses.sort_by(|a, b| {
        b.probability
            .unwrap_or(0.0)
            .total_cmp(&a.probability.unwrap_or(0.0))
    });
    Detected {
        ordering: detected.map(|f| ordering_label(f.ordering)),
        normalization: detected.map(|f| normalization_label(f.normalization)),
        order,
        effective_order,
        confidence: detected.and_then(|_| rounded(num(check.confidence), 4)),
        hypotheses,
    }
}

fn spatial(c: &ChannelSummary) -> Option<Channel> {
    Some(Channel {
        index: c.input_index,
        acn: c.acn?,
        order: c.order?,
        degree: c.degree?,
        peak_dbfs: rounded(level(c.sample_peak_dbfs), 3),
        true_peak_dbtp: rounded(level(c.true_peak_dbtp), 3),
        rms_dbfs: rounded(level(c.rms_dbfs), 3),
        sn3d_rms_dbfs: rounded(level(c.sn3d_rms_dbfs), 3),
        clipped_samples: c.clip_count,
        longest_clip_run: c.longest_clip_run,
        invalid_samples: c.invalid_samples,
        dc_offset: rounded(num(c.dc_offset), 7),
        over_omni: c.over_omni,
        silent: c.silent,
    })
}

fn extra(c: &ChannelSummary) -> ExtraChannel {
    ExtraChannel {
        index: c.input_index,
        peak_dbfs: rounded(level(c.sample_peak_dbfs), 3),
        true_peak_dbtp: rounded(level(c.true_peak_dbtp), 3),
        rms_dbfs: rounded(level(c.rms_dbfs), 3),
        clipped_samples: c.clip_count,
        longest_clip_run: c.longest_clip_run,
        invalid_samples: c.invalid_samples,
        dc_offset: rounded(num(c.dc_offset), 7),
        silent: c.silent,
    }
}

fn format_labels(f: AmbiFormat) -> (&'static str, &'static str) {
    (
        ordering_label(f.ordering),
        normalization_label(f.normalization),
    )
}

/// The JSON document of a scan.
pub fn document(result: &ScanResult) -> ScanDocument {
    let snap = &result.snapshot;
    let check = &snap.format_check;
    let (ordering, normalization) = format_labels(result.options.assumed);
    let (channels, extra_channels) = channel_entries(&result.channels);
    let full = result.band(fieldglass_dsp::engine::Band::Full);
    ScanDocument {
        schema: SCHEMA,
        tool: Tool {
            name: "fieldglass",
            version: env!("CARGO_PKG_VERSION"),
        },
        input: Input {
            path: result.input.path.as_ref().map(|p| p.display().to_string()),
            demo: result.input.path.is_none(),
            channels: result.input.channels,
            spatial_channels: result.layout.spatial_channels,
            extra_channels: result.layout.extra_channels,
            sample_rate: result.input.sample_rate_hz,
            frames: result.input.frames,
            duration_s: rounded(num(result.input.duration_s()), 6),
            sample_format: result.input.sample_format.clone(),
            container: result.input.container.clone(),
            declares_b_format: result.input.declares_b_format,
            mixed_order_set: result.input.mixed_order_set.clone(),
            metadata: result.input.metadata.as_ref().map(metadata_entry),
        },
        assumed: Assumed {
            ordering,
            normalization,
            order: result.layout.order,
            source: result.options.assumed_source.label(),
        },
        detected: detected_entry(check, result.layout.order, result.effective_order()),
        analysis: Analysis {
            method: result.options.method.label(),
            band_edges_hz: [num(snap.band_edges_hz[0]), num(snap.band_edges_hz[1])],
            over_omni_tolerance_db: num(result.options.over_omni_tolerance_db),
        },
        order_balance_db: balance(result.order_balance_db()),
        channels,
        extra_channels,
        omni: omni_entry(&snap.programme.omni),
        sources: full
            .map(|b| b.sources.iter().map(source).collect())
            .unwrap_or_default(),
        diffuseness: rounded(full.and_then(|b| b.diffuseness).and_then(num), 4),
        bands: result
            .bands
            .iter()
            .map(|b| BandEntry {
                band: b.band.label(),
                low_hz: num(b.range_hz[0]),
                high_hz: num(b.range_hz[1]),
                w_level_dbfs: rounded(level(b.w_level_dbfs), 2),
                diffuseness: rounded(b.diffuseness.and_then(num), 4),
                sources: b.sources.iter().map(source).collect(),
            })
            .collect(),
        findings: result.findings.iter().map(finding).collect(),
    }
}

/// Pretty-printed JSON text of a scan, with a trailing newline.
pub fn to_json_string(result: &ScanResult) -> String {
    let mut text = serde_json::to_string_pretty(&document(result)).unwrap_or_else(|e| {
        // Serialising plain structs of numbers and strings cannot fail; say so if it ever does.
        format!("{{\"schema\": \"{SCHEMA}\", \"error\": \"{e}\"}}")
    });
    text.push('\n');
    text
}
