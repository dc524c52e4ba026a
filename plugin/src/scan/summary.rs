//! The short human summary `fieldglass scan` prints on stdout.

use super::run::{AssumedSource, ScanResult};
use fieldglass_dsp::engine::Band;
use fieldglass_dsp::wording;
use std::fmt::Write;

fn db(value: Option<f64>, unit: &str) -> String {
    match value {
        Some(v) if v.is_finite() && v > -199.0 => format!("{v:.1} {unit}"),
        _ => "–".to_string(),
    }
}

/// One line saying how the format was read and what the check thinks of it.
pub fn format_verdict(result: &ScanResult) -> String {
    let check = &result.snapshot.format_check;
    let assumed = result.options.assumed;
    let mut line = format!("read as {}", assumed.human_name());
    match result.options.assumed_source {
        AssumedSource::Metadata => line.push_str(" (as the file declares)"),
        AssumedSource::Default => line.push_str(" (the default)"),
        AssumedSource::Option => {}
    }
    if let Some(set) = &result.input.mixed_order_set {
        let _ = write!(line, ", channel set {set}");
    }
    match check.detected.filter(|_| check.ready) {
        Some(detected) if detected == assumed => {
            let _ = write!(
                line,
                "; the signal agrees ({})",
                wording::likelihood(check.confidence)
            );
        }
        Some(detected) => {
            let _ = write!(
                line,
                "; the signal looks like {} ({})",
                detected.human_name(),
                wording::likelihood(check.confidence)
            );
        }
        None => line.push_str("; not enough signal to judge the format"),
    }
    let _ = write!(
        line,
        "; order {}, effective order {}",
        result.layout.order,
        result.effective_order()
    );
    line
}

/// The summary text (several lines, ending with a newline).
pub fn summary(result: &ScanResult, report: Option<&str>) -> String {
    let mut out = String::new();
    let input = &result.input;
    let _ = writeln!(out, "fieldglass scan: {}", input.display_name());
    let _ = writeln!(
        out,
        "  input:    {}, {:.2} s",
        input.description,
        input.duration_s()
    );
    if result.layout.extra_channels > 0 {
        let _ = writeln!(
            out,
            "  layout:   {} spatial channels (order {}) + {} extra channel(s), metered only",
            result.layout.spatial_channels, result.layout.order, result.layout.extra_channels
        );
    }
    let _ = writeln!(out, "  format:   {}", format_verdict(result));
    let omni = &result.snapshot.programme.omni;
    let _ = writeln!(
        out,
        "  omni (W): integrated {}, max momentary {}, max short-term {}, true peak {}",
        db(omni.integrated_lufs, "LUFS"),
        db(omni.max_momentary_lufs, "LUFS"),
        db(omni.max_short_term_lufs, "LUFS"),
        db(Some(omni.true_peak_dbtp), "dBTP")
    );
    if omni.conversion_gain_db.abs() > 0.005 {
        let _ = writeln!(
            out,
            "            (W converted to SN3D, {:+.2} dB; as stored: true peak {}, RMS {})",
            omni.conversion_gain_db,
            db(Some(omni.as_stored(omni.true_peak_dbtp)), "dBTP"),
            db(Some(omni.as_stored(omni.rms_dbfs)), "dBFS")
        );
    }
    if let Some(full) = result.band(Band::Full) {
        let _ = writeln!(
            out,
            "  sources:  {}, {} map, full band (diffuseness {})",
            wording::WHOLE_PROGRAMME,
            result.options.method.human_name(),
            full.diffuseness
                .map_or("–".to_string(), |d| format!("{d:.2}"))
        );
        if full.sources.is_empty() {
            let _ = writeln!(out, "            none found");
        }
        for (i, s) in full.sources.iter().take(5).enumerate() {
            let _ = writeln!(
                out,
                "            {}. {:<18} {:>6.1} dB",
                i + 1,
                wording::direction(s.direction.azimuth_deg, s.direction.elevation_deg),
                s.level_db
            );
        }
    }
    if result.findings.is_empty() {
        let _ = writeln!(out, "  findings: none");
    } else {
        let _ = writeln!(out, "  findings:");
        for f in &result.findings {
            let _ = writeln!(out, "            [{}] {}", f.severity.label(), f.message);
        }
    }
    if let Some(report) = report {
        let _ = writeln!(out, "  report:   {report}");
    }
    out
}
