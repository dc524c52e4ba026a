//! The `fieldglass-compare/1` JSON document (documented in docs/compare-json.md). Typed structs
//! serialised with serde; numbers that are not finite become `null`.

use super::findings::CompareFinding;
use super::run::CompareResult;
use crate::scan::ScanResult;
use crate::scan::json::{Assumed, Input, level, num, rounded};
use fieldglass_dsp::compare::coherence::CoherenceFigures;
use fieldglass_dsp::engine::{Band, SourceReading};
use fieldglass_dsp::sh::order_degree;
use serde::Serialize;

/// Value of the `schema` field.
pub const SCHEMA: &str = "fieldglass-compare/1";

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct CompareDocument {
    pub schema: &'static str,
    pub tool: Tool,
    pub reference: Side,
    pub candidate: Side,
    pub alignment: Alignment,
    pub common_order: usize,
    pub dropped_orders: Vec<usize>,
    /// "reference" or "candidate": the input that lacks `dropped_orders`; null if none.
    pub dropped_from: Option<&'static str>,
    pub rotation: Rotation,
    pub orders: Vec<Order>,
    pub bands: Vec<BandEntry>,
    pub channels: Vec<Channel>,
    pub loudness: Loudness,
    pub sources: Sources,
    pub analysis: Analysis,
    pub thresholds: Thresholds,
    pub findings: Vec<FindingEntry>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Tool {
    pub name: &'static str,
    pub version: &'static str,
}

/// One input: the fields of scan's `input`, plus `assumed`.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Side {
    #[serde(flatten)]
    pub input: Input,
    pub assumed: Assumed,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Alignment {
    pub offset_frames: i64,
    pub offset_s: Option<f64>,
    pub correlation: Option<f64>,
    pub overlap_frames: u64,
    pub max_offset_frames: u64,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Rotation {
    pub yaw_deg: Option<f64>,
    pub pitch_deg: Option<f64>,
    pub roll_deg: Option<f64>,
    pub mirrored: bool,
    pub mirror_axis: Option<&'static str>,
    /// The proper rotation R, rows (x front, y left, z up).
    pub matrix: [[Option<f64>; 3]; 3],
    /// Cosine similarity of the candidate's first order with the transformed reference's.
    pub fit: Option<f64>,
    /// The higher orders fit better without the first-order estimate, so none was applied.
    pub first_order_estimate_rejected: bool,
    /// First order only: a turn by quarter turns or a mirror equals swapped/inverted channels.
    pub first_order_only: bool,
    /// The whole candidate has its polarity flipped; the transform and fits are those of the
    /// flipped-back candidate.
    pub whole_file_inverted: bool,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Order {
    pub order: usize,
    pub level_change_db: Option<f64>,
    pub coherence: Option<f64>,
    pub rotation_fit: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct BandOrder {
    pub order: usize,
    pub level_change_db: Option<f64>,
    pub coherence: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct BandEntry {
    pub band: &'static str,
    pub low_hz: Option<f64>,
    pub high_hz: Option<f64>,
    pub level_change_db: Option<f64>,
    pub coherence: Option<f64>,
    pub orders: Vec<BandOrder>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Channel {
    /// Candidate file channel.
    pub index: usize,
    pub acn: usize,
    pub order: usize,
    pub degree: i32,
    pub gain_db: Option<f64>,
    pub correlation: Option<f64>,
    pub polarity_inverted: bool,
    pub best_match_acn: Option<usize>,
    pub best_match_correlation: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Loudness {
    pub reference_lufs: Option<f64>,
    pub candidate_lufs: Option<f64>,
    pub change_lu: Option<f64>,
    pub reference_true_peak_dbtp: Option<f64>,
    pub candidate_true_peak_dbtp: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Source {
    pub azimuth_deg: Option<f64>,
    pub elevation_deg: Option<f64>,
    pub level_db: Option<f64>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Sources {
    pub reference: Vec<Source>,
    pub candidate: Vec<Source>,
    /// Per reference source: degrees to the candidate source it pairs with.
    pub moved_deg: Vec<Option<f64>>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Analysis {
    pub frame_len: usize,
    pub hop: usize,
    pub window: &'static str,
    pub band_edges_hz: [Option<f64>; 2],
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Thresholds {
    pub rotation_deg: f64,
    pub level_change_lu: f64,
    pub coherence: f64,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct FindingEntry {
    pub severity: &'static str,
    pub code: &'static str,
    pub message: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channels: Option<Vec<usize>>,
}

fn side(scan: &ScanResult) -> Side {
    let document = crate::scan::json::document(scan);
    Side {
        input: document.input,
        assumed: document.assumed,
    }
}

fn source(s: &SourceReading) -> Source {
    Source {
        azimuth_deg: rounded(Some(s.direction.azimuth_deg), 2),
        elevation_deg: rounded(Some(s.direction.elevation_deg), 2),
        level_db: rounded(Some(s.level_db), 2),
    }
}

fn sources(scan: &ScanResult) -> Vec<Source> {
    scan.band(Band::Full)
        .map(|b| b.sources.iter().map(source).collect())
        .unwrap_or_default()
}

fn figures(f: &CoherenceFigures) -> (Option<f64>, Option<f64>) {
    (rounded(f.level_change_db, 3), rounded(f.coherence, 4))
}

fn finding(f: &CompareFinding) -> FindingEntry {
    FindingEntry {
        severity: f.severity.label(),
        code: f.code.label(),
        message: f.message.clone(),
        channels: (!f.channels.is_empty()).then(|| f.channels.clone()),
    }
}

/// The JSON document of a comparison.
pub fn document(result: &CompareResult) -> CompareDocument {
    let spatial = &result.spatial;
    let o = spatial.orientation;
    let rate = result.reference.input.sample_rate_hz;
    let ref_omni = &result.reference.snapshot.programme.omni;
    let cand_omni = &result.candidate.snapshot.programme.omni;
    let full = result.band(Band::Full);
    CompareDocument {
        schema: SCHEMA,
        tool: Tool {
            name: "fieldglass",
            version: env!("CARGO_PKG_VERSION"),
        },
        reference: side(&result.reference),
        candidate: side(&result.candidate),
        alignment: Alignment {
            offset_frames: result.alignment.offset_frames,
            offset_s: rounded(Some(result.alignment.offset_frames as f64 / rate), 6),
            correlation: rounded(result.alignment.correlation, 4),
            overlap_frames: result.alignment.overlap_frames,
            max_offset_frames: result.alignment.max_offset_frames,
        },
        common_order: result.common_order,
        dropped_orders: result.dropped_orders.clone(),
        dropped_from: result.dropped_from.map(|s| s.label()),
        rotation: Rotation {
            yaw_deg: rounded(Some(o.yaw_deg), 2),
            pitch_deg: rounded(Some(o.pitch_deg), 2),
            roll_deg: rounded(Some(o.roll_deg), 2),
            mirrored: o.mirror.is_some(),
            mirror_axis: o.mirror.map(|m| m.label()),
            matrix: o.rotation.map(|row| row.map(|v| rounded(Some(v), 6))),
            fit: rounded(spatial.fit, 4),
            first_order_estimate_rejected: spatial.estimate_rejected,
            first_order_only: spatial.first_order_only,
            whole_file_inverted: spatial.whole_inverted,
        },
        orders: spatial
            .orders
            .iter()
            .map(|order| Order {
                order: order.order,
                level_change_db: rounded(order.level_change_db, 3),
                coherence: rounded(
                    full.and_then(|b| b.orders.get(order.order))
                        .and_then(|f| f.coherence),
                    4,
                ),
                rotation_fit: rounded(order.rotation_fit, 4),
            })
            .collect(),
        bands: result
            .bands
            .iter()
            .map(|b| {
                let (level_change_db, coherence) = figures(&b.all);
                BandEntry {
                    band: b.band.label(),
                    low_hz: num(b.range_hz[0]),
                    high_hz: num(b.range_hz[1]),
                    level_change_db,
                    coherence,
                    orders: b
                        .orders
                        .iter()
                        .enumerate()
                        .map(|(order, f)| {
                            let (level_change_db, coherence) = figures(f);
                            BandOrder {
                                order,
                                level_change_db,
                                coherence,
                            }
                        })
                        .collect(),
                }
            })
            .collect(),
        channels: {
            let mut channels: Vec<Channel> = spatial
                .channels
                .iter()
                .filter_map(|c| {
                    let index = result
                        .candidate_file_channels
                        .get(c.acn)
                        .copied()
                        .flatten()?;
                    let (order, degree) = order_degree(c.acn);
                    Some(Channel {
                        index,
                        acn: c.acn,
                        order,
                        degree,
                        gain_db: rounded(c.gain_db, 3),
                        correlation: rounded(c.correlation, 4),
                        polarity_inverted: c.polarity_inverted,
                        best_match_acn: c.best_match_acn,
                        best_match_correlation: rounded(c.best_match_correlation, 4),
                    })
                })
                .collect();
            channels.sort_by_key(|c| c.index);
            channels
        },
        loudness: {
            let (r, c) = (ref_omni.integrated_lufs, cand_omni.integrated_lufs);
            Loudness {
                reference_lufs: rounded(r, 2),
                candidate_lufs: rounded(c, 2),
                change_lu: rounded(r.zip(c).map(|(r, c)| c - r), 2),
                reference_true_peak_dbtp: rounded(level(ref_omni.true_peak_dbtp), 2),
                candidate_true_peak_dbtp: rounded(level(cand_omni.true_peak_dbtp), 2),
            }
        },
        sources: Sources {
            reference: sources(&result.reference),
            candidate: sources(&result.candidate),
            moved_deg: result
                .sources_moved_deg
                .iter()
                .map(|&d| rounded(d, 2))
                .collect(),
        },
        analysis: Analysis {
            frame_len: result.framing.frame_len,
            hop: result.framing.hop,
            window: "hann",
            band_edges_hz: [
                result.band(Band::Low).and_then(|b| num(b.range_hz[1])),
                result.band(Band::High).and_then(|b| num(b.range_hz[0])),
            ],
        },
        thresholds: Thresholds {
            rotation_deg: result.thresholds.rotation_deg,
            level_change_lu: result.thresholds.level_change_lu,
            coherence: result.thresholds.coherence,
        },
        findings: result.findings.iter().map(finding).collect(),
    }
}

/// Pretty-printed JSON text of a comparison, with a trailing newline.
pub fn to_json_string(result: &CompareResult) -> String {
    let mut text = serde_json::to_string_pretty(&document(result))
        .unwrap_or_else(|e| format!("{{\"schema\": \"{SCHEMA}\", \"error\": \"{e}\"}}"));
    text.push('\n');
    text
}
