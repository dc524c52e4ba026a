//! Findings of a comparison: stable codes (part of the `fieldglass-compare/1` contract), a
//! severity and one plain sentence each.

use super::run::{CompareResult, Side, tidy};
use fieldglass_dsp::engine::{Band, Severity};
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::sh::Matrix3;

/// Stable finding codes of `compare`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum CompareCode {
    Offset,
    Rotated,
    Mirrored,
    ChannelsSwapped,
    PolarityInverted,
    OrdersDropped,
    LevelChange,
    DetailLost,
    FormatChanged,
}

impl CompareCode {
    pub fn label(self) -> &'static str {
        match self {
            Self::Offset => "offset",
            Self::Rotated => "rotated",
            Self::Mirrored => "mirrored",
            Self::ChannelsSwapped => "channels-swapped",
            Self::PolarityInverted => "polarity-inverted",
            Self::OrdersDropped => "orders-dropped",
            Self::LevelChange => "level-change",
            Self::DetailLost => "detail-lost",
            Self::FormatChanged => "format-changed",
        }
    }
}

/// One finding.
#[derive(Clone, Debug, PartialEq)]
pub struct CompareFinding {
    pub severity: Severity,
    pub code: CompareCode,
    pub message: String,
    /// Candidate file channels concerned, if any.
    pub channels: Vec<usize>,
}

fn finding(severity: Severity, code: CompareCode, message: String) -> CompareFinding {
    CompareFinding {
        severity,
        code,
        message,
        channels: Vec::new(),
    }
}

/// A transform whose rows each have one entry of magnitude ≥ cos 2°: a signed permutation of
/// the axes, which a first-order stream cannot tell from swapped or inverted X, Y, Z channels.
fn is_signed_permutation(q: &Matrix3) -> bool {
    let near_one = 2f64.to_radians().cos();
    q.iter().all(|row| row.iter().any(|v| v.abs() >= near_one))
}

fn format_text(f: AmbiFormat) -> &'static str {
    f.human_name()
}

fn channel_text(result: &CompareResult, acn: usize) -> String {
    // Messages number channels from 1, as DAWs do (the JSON indices count from 0).
    match result.candidate_file_channels.get(acn).copied().flatten() {
        Some(ch) => format!("{} (ACN {acn})", ch + 1),
        None => format!("for ACN {acn}"),
    }
}

/// The findings of a comparison, most severe first.
pub fn compare_findings(result: &CompareResult) -> Vec<CompareFinding> {
    let mut out = Vec::new();
    let thresholds = result.thresholds;
    let rate = result.reference.input.sample_rate_hz;
    let spatial = &result.spatial;

    let a = result.alignment;
    if a.offset_frames != 0 {
        let (later, by) = if a.offset_frames > 0 {
            ("later", a.offset_frames)
        } else {
            ("earlier", -a.offset_frames)
        };
        out.push(finding(
            Severity::Info,
            CompareCode::Offset,
            format!(
                "The candidate starts {by} frames ({:.1} ms) {later} than the reference; the comparison uses the {:.2} s they share.",
                by as f64 * 1000.0 / rate,
                a.overlap_frames as f64 / rate
            ),
        ));
    }

    let ambiguity =
        if spatial.first_order_only && is_signed_permutation(&spatial.orientation.transform) {
            " In a first-order file this cannot be told from swapped or inverted X, Y, Z channels."
        } else {
            ""
        };
    let o = spatial.orientation;
    let angles = format!(
        "yaw {:.1}°, pitch {:.1}°, roll {:.1}°",
        tidy(o.yaw_deg, 1),
        tidy(o.pitch_deg, 1),
        tidy(o.roll_deg, 1)
    );
    if let Some(axis) = o.mirror {
        let turn = if o.largest_angle_deg() >= thresholds.rotation_deg {
            format!(", then turned by {angles}")
        } else {
            String::new()
        };
        out.push(finding(
            Severity::Error,
            CompareCode::Mirrored,
            format!(
                "The candidate's scene is mirrored {}{turn}.{ambiguity}",
                axis.label()
            ),
        ));
    } else if o.largest_angle_deg() >= thresholds.rotation_deg {
        out.push(finding(
            Severity::Warning,
            CompareCode::Rotated,
            format!(
                "The candidate's scene is turned: {angles} (a source at azimuth a appears at a + yaw).{ambiguity}"
            ),
        ));
    }
    let rejected = if spatial.estimate_rejected {
        " At first order this looks like a turn or mirror, but the higher orders fit without one."
    } else {
        ""
    };
    for &(i, j) in &spatial.swaps {
        let c = &spatial.channels;
        let corr = |x: usize| c[x].best_match_correlation.unwrap_or(f64::NAN);
        let mut f = finding(
            Severity::Error,
            CompareCode::ChannelsSwapped,
            format!(
                "Channels {} and {} are swapped: each carries the other's reference signal (correlation {:.2} and {:.2}).{rejected}",
                channel_text(result, i),
                channel_text(result, j),
                corr(i),
                corr(j)
            ),
        );
        f.channels = [i, j]
            .iter()
            .filter_map(|&acn| result.candidate_file_channels[acn])
            .collect();
        out.push(f);
    }
    let compared = spatial
        .channels
        .iter()
        .filter(|c| c.correlation.is_some())
        .count();
    if spatial.whole_inverted && spatial.inverted.len() == compared {
        let mut f = finding(
            Severity::Error,
            CompareCode::PolarityInverted,
            format!(
                "Every channel is inverted: the whole delivery has its polarity flipped (W correlation {:.2}).",
                result.alignment.correlation.unwrap_or(f64::NAN)
            ),
        );
        f.channels = spatial
            .inverted
            .iter()
            .filter_map(|&acn| result.candidate_file_channels[acn])
            .collect();
        out.push(f);
    }
    let one_by_one = if spatial.whole_inverted && spatial.inverted.len() == compared {
        &[][..]
    } else {
        &spatial.inverted[..]
    };
    for &i in one_by_one {
        let mut f = finding(
            Severity::Error,
            CompareCode::PolarityInverted,
            format!(
                "Channel {} is inverted: correlation {:.2} with the reference.{rejected}",
                channel_text(result, i),
                spatial.channels[i].correlation.unwrap_or(f64::NAN)
            ),
        );
        f.channels = result.candidate_file_channels[i].into_iter().collect();
        out.push(f);
    }

    if let (Some(side), Some(first), Some(last)) = (
        result.dropped_from,
        result.dropped_orders.first(),
        result.dropped_orders.last(),
    ) {
        let orders = if first == last {
            format!("order {first}")
        } else {
            format!("orders {first}–{last}")
        };
        let (severity, message) = match side {
            Side::Candidate => (
                Severity::Warning,
                format!(
                    "The candidate carries order {} only; the reference's {orders} are missing from it and were not compared.",
                    result.common_order
                ),
            ),
            Side::Reference => (
                Severity::Info,
                format!(
                    "The reference carries order {} only; the candidate's {orders} have nothing to be compared with.",
                    result.common_order
                ),
            ),
        };
        out.push(finding(severity, CompareCode::OrdersDropped, message));
    }

    let ref_lufs = result.reference.snapshot.programme.omni.integrated_lufs;
    let cand_lufs = result.candidate.snapshot.programme.omni.integrated_lufs;
    if let (Some(r), Some(c)) = (ref_lufs, cand_lufs)
        && (c - r).abs() >= thresholds.level_change_lu
    {
        out.push(finding(
            Severity::Warning,
            CompareCode::LevelChange,
            format!(
                "W loudness changed by {:+.2} LU ({r:.1} → {c:.1} LUFS integrated).",
                c - r
            ),
        ));
    }
    let w_change = spatial.orders[0].level_change_db;
    let shifted: Vec<String> = spatial
        .orders
        .iter()
        .skip(1)
        .filter_map(|o| {
            let relative = o.level_change_db? - w_change?;
            (relative.abs() >= thresholds.level_change_lu)
                .then(|| format!("order {} {relative:+.1} dB", o.order))
        })
        .collect();
    if !shifted.is_empty() {
        out.push(finding(
            Severity::Warning,
            CompareCode::LevelChange,
            format!(
                "The balance between orders changed (relative to W): {}. A normalisation change shows this way (N3D read as SN3D: +4.8, +7.0, +8.5 dB at orders 1–3).",
                shifted.join(", ")
            ),
        ));
    }

    if let Some(full) = result.band(Band::Full) {
        let low: Vec<String> = full
            .orders
            .iter()
            .enumerate()
            .filter_map(|(order, f)| {
                let c = f.coherence?;
                (c < thresholds.coherence).then(|| format!("order {order} {c:.2}"))
            })
            .collect();
        if !low.is_empty() {
            out.push(finding(
                Severity::Warning,
                CompareCode::DetailLost,
                format!(
                    "Coherence with the reference is below {:.2}: {}. Detail was lost or replaced (a lossy codec, a different mix or render).",
                    thresholds.coherence,
                    low.join(", ")
                ),
            ));
        }
    }

    let (ri, ci) = (&result.reference.input, &result.candidate.input);
    let (rf, cf) = (
        result.reference.options.assumed,
        result.candidate.options.assumed,
    );
    let mut changes = Vec::new();
    if rf != cf {
        changes.push(format!(
            "channel format {} → {}",
            format_text(rf),
            format_text(cf)
        ));
    }
    if ri.channels != ci.channels {
        changes.push(format!("channels {} → {}", ri.channels, ci.channels));
    }
    if ri.sample_format != ci.sample_format {
        changes.push(format!(
            "samples {} → {}",
            ri.sample_format, ci.sample_format
        ));
    }
    // The demo scene has no container to compare.
    if ri.container != ci.container && ri.path.is_some() && ci.path.is_some() {
        changes.push(format!("container {} → {}", ri.container, ci.container));
    }
    if !changes.is_empty() {
        out.push(finding(
            Severity::Info,
            CompareCode::FormatChanged,
            format!(
                "The delivery's format differs from the reference's: {}. Both were converted to ACN/SN3D before comparing.",
                changes.join("; ")
            ),
        ));
    }
    out.sort_by_key(|f| std::cmp::Reverse(f.severity));
    out
}
