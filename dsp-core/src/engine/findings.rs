//! Findings: plain-words statements a reviewer should see, with stable codes.
//!
//! Every channel index a rule handles is an input (file or host) index, counted from 0: the
//! channel facts carry theirs, and the format check's silent and duplicate channels are input
//! indices of the raw covariance. Messages name channels for people through
//! [`wording::channel_list`] ("channel 5 (ACN 6)" for FuMa's R), with the ACN the channel carries
//! under the assumed format; `Finding::channels` keeps the 0-based input indices.

use super::control::AnalysisSettings;
use super::snapshot::{
    ChannelProgramme, ChannelStatus, Finding, FindingCode, FormatCheck, Severity, Snapshot,
};
use crate::format::AmbiFormat;
use crate::wording;

/// |DC| above this (−50 dBFS) over the meter window is reported.
pub const DC_OFFSET_LIMIT: f64 = 0.003_162;
/// Below this confidence a format disagreement is not reported.
pub const MISMATCH_CONFIDENCE: f64 = 0.6;

/// The stream is order `order` but only orders up to `effective` carry energy.
pub fn order_deficit(order: usize, effective: usize) -> Finding {
    Finding {
        severity: Severity::Warning,
        code: FindingCode::OrderDeficit,
        message: format!(
            "the stream is order {order} but only orders up to {effective} carry energy"
        ),
        channels: Vec::new(),
    }
}

/// What the finding rules need to know of one channel, live or over the whole programme.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct ChannelFacts {
    /// Index in the input (file or host order), counted from 0.
    pub input_index: usize,
    /// ACN the channel carries under the assumed format; `None` for an extra channel.
    pub acn: Option<usize>,
    pub invalid_samples: u64,
    pub clip_count: u64,
    pub longest_clip_run: u64,
    pub over_omni: bool,
    pub dc_offset: f64,
}

impl From<&ChannelStatus> for ChannelFacts {
    fn from(s: &ChannelStatus) -> Self {
        Self {
            input_index: s.input_index,
            acn: s.acn,
            invalid_samples: s.reading.invalid_sample_count,
            clip_count: s.reading.clip_count,
            longest_clip_run: s.reading.longest_clip_run,
            over_omni: s.over_omni,
            dc_offset: s.reading.dc_offset,
        }
    }
}

impl From<&ChannelProgramme> for ChannelFacts {
    fn from(c: &ChannelProgramme) -> Self {
        Self {
            input_index: c.input_index,
            acn: c.acn,
            invalid_samples: c.invalid_samples,
            clip_count: c.clip_count,
            longest_clip_run: c.longest_clip_run,
            over_omni: c.over_omni,
            dc_offset: c.dc_offset,
        }
    }
}

/// Everything the finding rules look at.
#[derive(Clone, Copy, Debug)]
pub struct FindingInputs<'a> {
    pub channels: &'a [ChannelFacts],
    pub format_check: &'a FormatCheck,
    /// Ambisonic order of the stream.
    pub order: usize,
    pub assumed_format: AmbiFormat,
    /// Judging a whole programme rather than the live state: an order deficit is then reported
    /// from the measured balance even where the programme was too short for a format verdict
    /// (live, it waits for the verdict so that it does not flicker at the start).
    pub whole_programme: bool,
}

/// Findings for the live state in `snapshot` (meters, format check).
pub fn live_findings(snapshot: &Snapshot, settings: &AnalysisSettings) -> Vec<Finding> {
    let channels: Vec<ChannelFacts> = snapshot.channel_status.iter().map(Into::into).collect();
    collect_findings(
        &FindingInputs {
            channels: &channels,
            format_check: &snapshot.format_check,
            order: snapshot.order,
            assumed_format: snapshot.assumed_format,
            whole_programme: false,
        },
        settings,
    )
}

/// The finding rules, most severe first.
pub fn collect_findings(inputs: &FindingInputs, settings: &AnalysisSettings) -> Vec<Finding> {
    let mut findings = Vec::new();
    let status = inputs.channels;
    let acn_of = |input: usize| {
        status
            .iter()
            .find(|s| s.input_index == input)
            .and_then(|s| s.acn)
    };
    let list = |channels: &[usize]| wording::channel_list(channels, acn_of);
    let pick = |f: &dyn Fn(&ChannelFacts) -> bool| -> Vec<usize> {
        status
            .iter()
            .filter(|s| f(s))
            .map(|s| s.input_index)
            .collect()
    };

    let invalid = pick(&|s| s.invalid_samples > 0);
    if !invalid.is_empty() {
        findings.push(Finding {
            severity: Severity::Error,
            code: FindingCode::InvalidSamples,
            message: format!("NaN or infinite samples on {}", list(&invalid)),
            channels: invalid,
        });
    }
    let clipped = pick(&|s| s.clip_count > 0);
    if !clipped.is_empty() {
        let total: u64 = status.iter().map(|s| s.clip_count).sum();
        let longest = status.iter().map(|s| s.longest_clip_run).max().unwrap_or(0);
        findings.push(Finding {
            severity: Severity::Error,
            code: FindingCode::Clipping,
            message: format!(
                "{total} sample(s) at full scale on {} (longest run {longest})",
                list(&clipped)
            ),
            channels: clipped,
        });
    }
    let check = inputs.format_check;
    // Capsule signals read as B-format put every "dipole" at W's level and look like another
    // normalisation: one cause, reported once as a-format-suspected.
    let a_format = check.a_format_suspected;
    let over = pick(&|s| s.over_omni);
    if !over.is_empty() && !a_format {
        findings.push(Finding {
            severity: Severity::Warning,
            code: FindingCode::OverOmni,
            message: format!(
                "{} {} {} by more than {:.1} dB after conversion to SN3D: check the \
                 normalisation",
                list(&over),
                if over.len() == 1 { "is" } else { "are" },
                wording::LOUDER_THAN_W,
                settings.over_omni_tolerance_db
            ),
            channels: over,
        });
    }
    if !check.silent_channels.is_empty() {
        findings.push(Finding {
            severity: Severity::Warning,
            code: FindingCode::SilentChannel,
            message: format!(
                "{} {} no signal while W does",
                list(&check.silent_channels),
                if check.silent_channels.len() == 1 {
                    "carries"
                } else {
                    "carry"
                }
            ),
            channels: check.silent_channels.clone(),
        });
    }
    if !check.duplicate_channels.is_empty() {
        let mut channels: Vec<usize> = check
            .duplicate_channels
            .iter()
            .flat_map(|&(a, b)| [a, b])
            .collect();
        channels.sort_unstable();
        channels.dedup();
        let pairs: Vec<String> = check
            .duplicate_channels
            .iter()
            .map(|&(a, b)| {
                format!(
                    "{} = {}",
                    wording::channel_label(a, acn_of(a)),
                    wording::channel_label(b, acn_of(b))
                )
            })
            .collect();
        findings.push(Finding {
            severity: Severity::Warning,
            code: FindingCode::DuplicateChannels,
            message: format!("channels carry the same signal: {}", pairs.join("; ")),
            channels,
        });
    }
    if check.horizontal_only {
        findings.push(Finding {
            severity: Severity::Info,
            code: FindingCode::NoHeightContent,
            message: "no height content: the scene is horizontal only, so the height \
                      channels are empty or follow the horizontal ones"
                .to_string(),
            // About the scene, not a fault of particular channels.
            channels: Vec::new(),
        });
    }
    if check.a_format_suspected {
        findings.push(Finding {
            severity: Severity::Warning,
            code: FindingCode::AFormatSuspected,
            message: "the four channels look like unconverted microphone capsule signals \
                      (A-format): similar levels and strongly correlated, not W with three \
                      dipoles; convert to B-format before use"
                .to_string(),
            channels: Vec::new(),
        });
    }
    let balance_measured = check.order_balance_db.len() == inputs.order + 1;
    let judged = check.ready || (inputs.whole_programme && balance_measured);
    if judged && check.effective_order < inputs.order {
        findings.push(order_deficit(inputs.order, check.effective_order));
    }
    if let Some(detected) = check.detected
        && !a_format
        && check.ready
        && check.confidence >= MISMATCH_CONFIDENCE
    {
        let declared = settings.declared_format;
        if let Some(declared) = declared
            && detected != declared
        {
            findings.push(Finding {
                severity: Severity::Error,
                code: FindingCode::MetadataMismatch,
                message: format!(
                    "the file's metadata declares {} but the signal looks like {} ({})",
                    declared.human_name(),
                    detected.human_name(),
                    wording::likelihood(check.confidence)
                ),
                channels: Vec::new(),
            });
        }
        // Reading the stream as its metadata declares: the disagreement is reported once,
        // as the metadata's.
        if detected != inputs.assumed_format && declared != Some(inputs.assumed_format) {
            findings.push(Finding {
                severity: Severity::Error,
                code: FindingCode::FormatMismatch,
                message: format!(
                    "the signal looks like {} ({}) but is read as {}",
                    detected.human_name(),
                    wording::likelihood(check.confidence),
                    inputs.assumed_format.human_name()
                ),
                channels: Vec::new(),
            });
        }
    }
    let dc = pick(&|s| s.dc_offset.abs() > DC_OFFSET_LIMIT);
    if !dc.is_empty() {
        findings.push(Finding {
            severity: Severity::Warning,
            code: FindingCode::DcOffset,
            message: format!("DC offset above −50 dBFS on {}", list(&dc)),
            channels: dc,
        });
    }
    findings.sort_by_key(|f| std::cmp::Reverse(f.severity));
    findings
}

#[cfg(test)]
mod tests {
    use super::*;

    /// First-order FuMa in file order W X Y Z: the ACN each file channel carries (W 0, X 3,
    /// Y 1, Z 2), from the Furse-Malham letter order and ACN = n(n+1)+m with X = (1, +1),
    /// Y = (1, −1), Z = (1, 0).
    fn fuma_first_order(over_omni: &[usize]) -> Vec<ChannelFacts> {
        [0, 3, 1, 2]
            .into_iter()
            .enumerate()
            .map(|(input_index, acn)| ChannelFacts {
                input_index,
                acn: Some(acn),
                over_omni: over_omni.contains(&input_index),
                ..ChannelFacts::default()
            })
            .collect()
    }

    fn findings_of(channels: &[ChannelFacts], check: &FormatCheck) -> Vec<Finding> {
        collect_findings(
            &FindingInputs {
                channels,
                format_check: check,
                order: 1,
                assumed_format: AmbiFormat::FUMA,
                whole_programme: true,
            },
            &AnalysisSettings::default(),
        )
    }

    #[test]
    fn channels_are_named_by_file_position_with_the_acn_they_carry() {
        // The format check's silent and duplicate channels are input indices, like the facts.
        let check = FormatCheck {
            silent_channels: vec![3],
            duplicate_channels: vec![(1, 2)],
            ..FormatCheck::default()
        };
        let findings = findings_of(&fuma_first_order(&[1, 2]), &check);
        let message = |code| {
            findings
                .iter()
                .find(|f| f.code == code)
                .map(|f| f.message.clone())
                .unwrap()
        };
        assert_eq!(
            message(FindingCode::SilentChannel),
            "channel 4 (ACN 2) carries no signal while W does"
        );
        assert_eq!(
            message(FindingCode::DuplicateChannels),
            "channels carry the same signal: channel 2 (ACN 3) = channel 3 (ACN 1)"
        );
        assert!(
            message(FindingCode::OverOmni)
                .starts_with("channels 2 (ACN 3), 3 (ACN 1) are louder than W by more than 0.5 dB"),
            "{}",
            message(FindingCode::OverOmni)
        );
        let silent = findings
            .iter()
            .find(|f| f.code == FindingCode::SilentChannel)
            .unwrap();
        assert_eq!(silent.channels, [3], "0-based input indices in the data");
    }

    #[test]
    fn a_format_disagreement_reads_as_a_likelihood() {
        let check = FormatCheck {
            ready: true,
            detected: Some(AmbiFormat::ACN_SN3D),
            confidence: 0.9704,
            ..FormatCheck::default()
        };
        let findings = findings_of(&fuma_first_order(&[]), &check);
        let mismatch = findings
            .iter()
            .find(|f| f.code == FindingCode::FormatMismatch)
            .unwrap();
        assert!(
            mismatch.message.contains("(97 % likely)"),
            "{}",
            mismatch.message
        );
    }

    /// The codes raised when `detected` is found (97 % likely) in a stream read as `assumed`
    /// whose metadata declares `declared`.
    fn mismatch_codes(
        detected: AmbiFormat,
        assumed: AmbiFormat,
        declared: Option<AmbiFormat>,
    ) -> Vec<FindingCode> {
        let check = FormatCheck {
            ready: true,
            detected: Some(detected),
            confidence: 0.97,
            effective_order: 1,
            ..FormatCheck::default()
        };
        let channels: Vec<ChannelFacts> = (0..4)
            .map(|i| ChannelFacts {
                input_index: i,
                acn: Some(i),
                ..ChannelFacts::default()
            })
            .collect();
        let settings = AnalysisSettings {
            declared_format: declared,
            ..AnalysisSettings::default()
        };
        collect_findings(
            &FindingInputs {
                channels: &channels,
                format_check: &check,
                order: 1,
                assumed_format: assumed,
                whole_programme: true,
            },
            &settings,
        )
        .iter()
        .map(|f| f.code)
        .collect()
    }

    #[test]
    fn a_contradicted_declaration_is_reported_once_as_the_metadata_s() {
        use FindingCode::{FormatMismatch, MetadataMismatch};
        let (sn3d, n3d, fuma) = (AmbiFormat::ACN_SN3D, AmbiFormat::ACN_N3D, AmbiFormat::FUMA);
        // Read as declared: one finding, the metadata's.
        assert_eq!(mismatch_codes(sn3d, n3d, Some(n3d)), vec![MetadataMismatch]);
        // The user's assumption is right, the declaration wrong.
        assert_eq!(
            mismatch_codes(sn3d, sn3d, Some(n3d)),
            vec![MetadataMismatch]
        );
        // Both wrong: two findings.
        assert_eq!(
            mismatch_codes(fuma, sn3d, Some(n3d)),
            vec![MetadataMismatch, FormatMismatch]
        );
        // Nothing declared: the ordinary rule.
        assert_eq!(mismatch_codes(sn3d, n3d, None), vec![FormatMismatch]);
        assert!(mismatch_codes(n3d, n3d, Some(n3d)).is_empty());
    }
}
