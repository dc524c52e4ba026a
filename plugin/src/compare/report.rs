//! `--report DIR` of `compare`: one self-contained `report.html` (pictures embedded as data
//! URIs; opens offline), the three map pictures as PNG files beside it, and the JSON twin.

use super::json::to_json_string;
use super::run::{CompareResult, tidy};
use crate::scan::CliError;
use base64::Engine as _;
use fieldglass_dsp::beam::default_map_range_db;
use fieldglass_dsp::engine::{Band, MapImage, Severity, SourceReading};
use std::fmt::Write;
use std::path::{Path, PathBuf};

pub const REPORT_FILE: &str = "report.html";
pub const JSON_FILE: &str = "compare.json";
pub const REFERENCE_MAP_FILE: &str = "map-reference.png";
pub const CANDIDATE_MAP_FILE: &str = "map-candidate.png";
pub const DIFFERENCE_MAP_FILE: &str = "map-difference.png";

/// Range of the energy maps below their maximum, dB.
/// The difference map runs from −this (candidate quieter) to +this dB.
const DIFFERENCE_RANGE_DB: f32 = 12.0;

const STYLE: &str = r#"
:root { color-scheme: dark; }
body { background: #111317; color: #c4c8cf; font: 15px/1.45 system-ui, sans-serif; margin: 0; }
main { max-width: 1080px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 22px; font-weight: 600; color: #e4e6ea; margin: 0 0 4px; }
h2 { font-size: 17px; font-weight: 600; color: #e4e6ea; margin: 30px 0 10px; border-bottom: 1px solid #2a2e35; padding-bottom: 4px; }
.muted { color: #8a9099; }
.maps { display: grid; grid-template-columns: repeat(auto-fit, minmax(320px, 1fr)); gap: 14px; }
figure { margin: 0; } figcaption { font-size: 13px; color: #8a9099; margin-top: 4px; }
img { display: block; width: 100%; height: auto; border-radius: 4px; image-rendering: auto; }
table { border-collapse: collapse; font-size: 14px; font-variant-numeric: tabular-nums; }
th, td { padding: 3px 10px; text-align: right; border-bottom: 1px solid #22262c; }
th { color: #8a9099; font-weight: 500; } td:first-child, th:first-child { text-align: left; }
.finding { padding: 6px 12px; margin: 6px 0; background: #1b1e23; border-left: 3px solid #4a5563; }
.finding.warning { border-left-color: #b08a3a; } .finding.error { border-left-color: #c05a4a; }
.code { font-family: ui-monospace, monospace; font-size: 13px; color: #9aa3ad; }
"#;

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn png(width: usize, height: usize, rgba: &[u8]) -> Result<Vec<u8>, String> {
    let mut bytes = Vec::new();
    {
        let mut encoder = png::Encoder::new(&mut bytes, width as u32, height as u32);
        encoder.set_color(png::ColorType::Rgba);
        encoder.set_depth(png::BitDepth::Eight);
        let mut writer = encoder.write_header().map_err(|e| e.to_string())?;
        writer.write_image_data(rgba).map_err(|e| e.to_string())?;
    }
    Ok(bytes)
}

/// Diverging colour of a difference in dB: blue below 0, orange above, the page's dark grey
/// at 0 (blue against orange stays distinct for the common colour-vision deficiencies).
fn difference_rgb(db: f32) -> [u8; 3] {
    const ZERO: [f32; 3] = [27.0, 30.0, 35.0];
    const QUIETER: [f32; 3] = [86.0, 150.0, 230.0];
    const LOUDER: [f32; 3] = [235.0, 150.0, 50.0];
    let t = (db / DIFFERENCE_RANGE_DB).clamp(-1.0, 1.0);
    let end = if t < 0.0 { QUIETER } else { LOUDER };
    let t = t.abs();
    std::array::from_fn(|i| (ZERO[i] + (end[i] - ZERO[i]) * t).round() as u8)
}

/// Candidate minus reference, each map relative to its own maximum (a level change alone does
/// not show; where the energy sits does). `None` if the grids differ.
fn difference(reference: &MapImage, candidate: &MapImage, range_db: f32) -> Option<Vec<f32>> {
    (reference.width == candidate.width
        && reference.height == candidate.height
        && reference.values_db.len() == candidate.values_db.len())
    .then(|| {
        let floor = -range_db - 6.0;
        reference
            .values_db
            .iter()
            .zip(&candidate.values_db)
            .map(|(&r, &c)| (c - candidate.max_db).max(floor) - (r - reference.max_db).max(floor))
            .collect()
    })
}

/// A whole-programme map as the scan report draws it (one renderer: grid, direction words,
/// colour scale and numbered source markers).
fn map_png(map: &MapImage, sources: &[SourceReading], range_db: f64) -> Result<Vec<u8>, String> {
    crate::scan::charts::map_png(
        &map.values_db,
        map.width,
        map.height,
        range_db,
        0.0,
        sources,
        None,
    )
}

fn difference_png(width: usize, height: usize, values: &[f32]) -> Result<Vec<u8>, String> {
    let mut rgba = Vec::with_capacity(values.len() * 4);
    for &v in values {
        let [r, g, b] = difference_rgb(v);
        rgba.extend_from_slice(&[r, g, b, 255]);
    }
    png(width, height, &rgba)
}

fn opt(x: Option<f64>, decimals: usize) -> String {
    match x {
        Some(v) if v.is_finite() => format!("{:.decimals$}", tidy(v, decimals as i32)),
        _ => "—".to_string(),
    }
}

/// Inline SVG bars: coherence per order (0 … 1) with the threshold marked.
fn coherence_bars(values: &[Option<f64>], threshold: f64) -> String {
    let (bar, gap, height) = (36.0, 18.0, 140.0);
    let width = values.len() as f64 * (bar + gap) + gap + 40.0;
    let mut svg = format!(
        r##"<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{h}" role="img" aria-label="Coherence per order">"##,
        h = height + 40.0
    );
    let y_of = |v: f64| 10.0 + height * (1.0 - v.clamp(0.0, 1.0));
    let _ = write!(
        svg,
        r##"<line x1="30" x2="{width}" y1="{y}" y2="{y}" stroke="#b08a3a" stroke-dasharray="4 3"/><text x="0" y="{ty}" fill="#8a9099" font-size="11">{threshold:.2}</text>"##,
        y = y_of(threshold),
        ty = y_of(threshold) + 4.0
    );
    for (order, v) in values.iter().enumerate() {
        let x = 30.0 + gap + order as f64 * (bar + gap);
        if let Some(v) = v {
            let colour = if *v < threshold { "#c05a4a" } else { "#6f9fd0" };
            let _ = write!(
                svg,
                r##"<rect x="{x}" y="{y}" width="{bar}" height="{hgt}" fill="{colour}"/><text x="{tx}" y="{ly}" fill="#c4c8cf" font-size="11" text-anchor="middle">{v:.2}</text>"##,
                y = y_of(*v),
                hgt = height + 10.0 - y_of(*v),
                tx = x + bar / 2.0,
                ly = y_of(*v) - 3.0
            );
        }
        let _ = write!(
            svg,
            r##"<text x="{tx}" y="{y}" fill="#8a9099" font-size="12" text-anchor="middle">order {order}</text>"##,
            tx = x + bar / 2.0,
            y = height + 30.0
        );
    }
    svg.push_str("</svg>");
    svg
}

/// Writes the report into `dir` (created if needed); returns the path of report.html.
pub fn write_report(result: &CompareResult, dir: &Path) -> Result<PathBuf, CliError> {
    let fail = |what: &str, e: String| {
        CliError::output(format!("cannot write {what} in '{}': {e}", dir.display()))
    };
    std::fs::create_dir_all(dir).map_err(|e| fail("the report", e.to_string()))?;
    let full = |scan: &crate::scan::ScanResult| scan.band(Band::Full).cloned();
    let (Some(ref_band), Some(cand_band)) = (full(&result.reference), full(&result.candidate))
    else {
        return Err(fail("the report", "no full-band map".into()));
    };
    // The range the editor and the scan report use for the reference's method and order.
    let range_db = default_map_range_db(
        result.reference.options.method,
        result.reference.layout.order,
    );
    let mut pictures = Vec::new();
    pictures.push((
        REFERENCE_MAP_FILE,
        map_png(&ref_band.map, &ref_band.sources, range_db)
            .map_err(|e| fail(REFERENCE_MAP_FILE, e))?,
    ));
    pictures.push((
        CANDIDATE_MAP_FILE,
        map_png(&cand_band.map, &cand_band.sources, range_db)
            .map_err(|e| fail(CANDIDATE_MAP_FILE, e))?,
    ));
    if let Some(values) = difference(&ref_band.map, &cand_band.map, range_db as f32) {
        pictures.push((
            DIFFERENCE_MAP_FILE,
            difference_png(ref_band.map.width, ref_band.map.height, &values)
                .map_err(|e| fail(DIFFERENCE_MAP_FILE, e))?,
        ));
    }
    for (name, bytes) in &pictures {
        std::fs::write(dir.join(name), bytes).map_err(|e| fail(name, e.to_string()))?;
    }
    std::fs::write(dir.join(JSON_FILE), to_json_string(result))
        .map_err(|e| fail(JSON_FILE, e.to_string()))?;

    let mut h = String::new();
    let _ = write!(
        h,
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>Fieldglass comparison</title><style>{STYLE}</style></head><body><main>"
    );
    let _ = write!(
        h,
        "<h1>Comparison</h1><p class=\"muted\">Reference: {}<br>Candidate: {}</p>",
        escape(&result.reference.input.display_name()),
        escape(&result.candidate.input.display_name())
    );
    let _ = write!(h, "<h2>Findings</h2>");
    if result.findings.is_empty() {
        let _ = write!(h, "<p>None: the candidate matches the reference.</p>");
    }
    for f in &result.findings {
        let class = match f.severity {
            Severity::Info => "info",
            Severity::Warning => "warning",
            Severity::Error => "error",
        };
        let _ = write!(
            h,
            "<div class=\"finding {class}\"><span class=\"code\">{} · {}</span><br>{}</div>",
            f.severity.label(),
            f.code.label(),
            escape(&f.message)
        );
    }

    let a = result.alignment;
    let rate = result.reference.input.sample_rate_hz;
    let o = result.spatial.orientation;
    let _ = write!(
        h,
        "<h2>Time and orientation</h2><table><tr><th>Offset</th><td>{:+} frames ({:+.1} ms)</td></tr><tr><th>W correlation</th><td>{}</td></tr><tr><th>Compared</th><td>{:.2} s, order {}</td></tr><tr><th>Yaw / pitch / roll</th><td>{:.1}° / {:.1}° / {:.1}°</td></tr><tr><th>Mirror</th><td>{}</td></tr><tr><th>First-order fit</th><td>{}</td></tr></table>",
        a.offset_frames,
        a.offset_frames as f64 * 1000.0 / rate,
        opt(a.correlation, 3),
        a.overlap_frames as f64 / rate,
        result.common_order,
        tidy(o.yaw_deg, 1),
        tidy(o.pitch_deg, 1),
        tidy(o.roll_deg, 1),
        o.mirror.map_or("none", |m| m.label()),
        opt(result.spatial.fit, 3)
    );

    let embed = |name: &str| -> String {
        pictures
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, bytes)| {
                format!(
                    "data:image/png;base64,{}",
                    base64::engine::general_purpose::STANDARD.encode(bytes)
                )
            })
            .unwrap_or_default()
    };
    let _ = write!(
        h,
        "<h2>Where things are</h2><div class=\"maps\"><figure><img src=\"{}\" alt=\"Reference map\"><figcaption>Reference, whole programme, full band ({} dB range; rings mark the sources). Front in the centre, left of centre is left.</figcaption></figure><figure><img src=\"{}\" alt=\"Candidate map\"><figcaption>Candidate, same scale.</figcaption></figure>",
        embed(REFERENCE_MAP_FILE),
        range_db,
        embed(CANDIDATE_MAP_FILE)
    );
    if pictures.iter().any(|(n, _)| *n == DIFFERENCE_MAP_FILE) {
        let _ = write!(
            h,
            "<figure><img src=\"{}\" alt=\"Difference map\"><figcaption>Candidate minus reference, each relative to its own maximum: orange = more energy in the candidate, blue = less (±{} dB).</figcaption></figure>",
            embed(DIFFERENCE_MAP_FILE),
            DIFFERENCE_RANGE_DB
        );
    }
    let _ = write!(
        h,
        "</div><table><tr><th>Reference source</th><th>Azimuth</th><th>Elevation</th><th>Moved</th></tr>"
    );
    for (s, moved) in ref_band.sources.iter().zip(&result.sources_moved_deg) {
        let _ = write!(
            h,
            "<tr><td>{:.1} dB</td><td>{:.1}°</td><td>{:.1}°</td><td>{}°</td></tr>",
            s.level_db,
            s.direction.azimuth_deg,
            s.direction.elevation_deg,
            opt(*moved, 1)
        );
    }
    let _ = write!(h, "</table>");

    let coherence: Vec<Option<f64>> = (0..=result.common_order)
        .map(|n| result.order_figures(n).and_then(|f| f.coherence))
        .collect();
    let _ = write!(
        h,
        "<h2>Detail per order</h2>{}<table><tr><th>Order</th><th>Level change, dB</th><th>Coherence</th><th>Rotation fit</th>",
        coherence_bars(&coherence, result.thresholds.coherence)
    );
    for b in [Band::Low, Band::Mid, Band::High] {
        let _ = write!(h, "<th>Coherence, {}</th>", b.label());
    }
    let _ = write!(h, "</tr>");
    for order in &result.spatial.orders {
        let _ = write!(
            h,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td>",
            order.order,
            opt(order.level_change_db, 2),
            opt(coherence[order.order], 3),
            opt(order.rotation_fit, 3)
        );
        for b in [Band::Low, Band::Mid, Band::High] {
            let value = result
                .band(b)
                .and_then(|band| band.orders.get(order.order))
                .and_then(|f| f.coherence);
            let _ = write!(h, "<td>{}</td>", opt(value, 3));
        }
        let _ = write!(h, "</tr>");
    }
    let _ = write!(
        h,
        "</table><p class=\"muted\">Coherence: magnitude-squared coherence of the candidate with the turned reference, {}-sample Hann frames, 50 % overlap, weighted by the reference's energy over bins and channels.</p>",
        result.framing.frame_len
    );

    let r = &result.reference.snapshot.programme.omni;
    let c = &result.candidate.snapshot.programme.omni;
    let _ = write!(
        h,
        "<h2>W loudness and peaks</h2><table><tr><th></th><th>Reference</th><th>Candidate</th></tr><tr><td>Integrated, LUFS</td><td>{}</td><td>{}</td></tr><tr><td>True peak, dBTP</td><td>{:.1}</td><td>{:.1}</td></tr></table>",
        opt(r.integrated_lufs, 1),
        opt(c.integrated_lufs, 1),
        r.true_peak_dbtp,
        c.true_peak_dbtp
    );
    let _ = writeln!(
        h,
        "<p class=\"muted\">{} fieldglass {}.</p></main></body></html>",
        crate::scan::report_html::escape(fieldglass_dsp::wording::CAUTION),
        env!("CARGO_PKG_VERSION")
    );
    let path = dir.join(REPORT_FILE);
    std::fs::write(&path, h).map_err(|e| fail(REPORT_FILE, e.to_string()))?;
    Ok(path)
}
