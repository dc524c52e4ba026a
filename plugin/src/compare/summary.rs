//! The short human summary `fieldglass compare` prints on stdout.

use super::run::{CompareResult, tidy};
use fieldglass_dsp::engine::Band;
use std::fmt::Write;

fn opt(x: Option<f64>, decimals: usize, unit: &str) -> String {
    match x {
        Some(v) if v.is_finite() => format!("{:.decimals$}{unit}", tidy(v, decimals as i32)),
        _ => "—".to_string(),
    }
}

/// The summary text; `report` is the report path when one was written.
pub fn summary(result: &CompareResult, report: Option<&str>) -> String {
    let mut s = String::new();
    let rate = result.reference.input.sample_rate_hz;
    let _ = writeln!(
        s,
        "fieldglass compare: {}  →  {}",
        result.reference.input.display_name(),
        result.candidate.input.display_name()
    );
    let a = result.alignment;
    let _ = writeln!(
        s,
        "  offset      {:+} frames ({:+.1} ms), W correlation {}, {:.2} s compared",
        a.offset_frames,
        a.offset_frames as f64 * 1000.0 / rate,
        opt(a.correlation, 3, ""),
        a.overlap_frames as f64 / rate
    );
    let o = result.spatial.orientation;
    let _ = writeln!(
        s,
        "  rotation    yaw {:.1}°, pitch {:.1}°, roll {:.1}°{}, first-order fit {}",
        tidy(o.yaw_deg, 1),
        tidy(o.pitch_deg, 1),
        tidy(o.roll_deg, 1),
        o.mirror
            .map(|m| format!(", mirrored {}", m.label()))
            .unwrap_or_default(),
        opt(result.spatial.fit, 3, "")
    );
    let dropped = if result.dropped_orders.is_empty() {
        String::new()
    } else {
        format!(
            " (orders {:?} only in the {})",
            result.dropped_orders,
            result
                .dropped_from
                .map(|s| match s {
                    super::run::Side::Candidate => "reference",
                    super::run::Side::Reference => "candidate",
                })
                .unwrap_or("")
        )
    };
    let _ = writeln!(s, "  compared to order {}{dropped}", result.common_order);
    let _ = writeln!(s, "  order  level change  coherence  rotation fit");
    for order in &result.spatial.orders {
        let coherence = result.order_figures(order.order).and_then(|f| f.coherence);
        let _ = writeln!(
            s,
            "  {:>5}  {:>12}  {:>9}  {:>12}",
            order.order,
            opt(order.level_change_db, 2, " dB"),
            opt(coherence, 3, ""),
            opt(order.rotation_fit, 3, "")
        );
    }
    let bands: Vec<String> = [Band::Low, Band::Mid, Band::High]
        .iter()
        .filter_map(|&b| result.band(b))
        .map(|b| format!("{} {}", b.band.label(), opt(b.all.coherence, 3, "")))
        .collect();
    let _ = writeln!(s, "  coherence by band: {}", bands.join(", "));
    let r = &result.reference.snapshot.programme.omni;
    let c = &result.candidate.snapshot.programme.omni;
    let _ = writeln!(
        s,
        "  W loudness  {} → {}, true peak {} → {}",
        opt(r.integrated_lufs, 1, " LUFS"),
        opt(c.integrated_lufs, 1, " LUFS"),
        opt(Some(r.true_peak_dbtp), 1, " dBTP"),
        opt(Some(c.true_peak_dbtp), 1, " dBTP")
    );
    if result.findings.is_empty() {
        let _ = writeln!(s, "  findings    none: the candidate matches the reference");
    } else {
        let _ = writeln!(s, "  findings");
        for f in &result.findings {
            let _ = writeln!(
                s,
                "    {:<7} {:<18} {}",
                f.severity.label(),
                f.code.label(),
                f.message
            );
        }
    }
    if let Some(path) = report {
        let _ = writeln!(s, "  report      {path}");
    }
    s
}
