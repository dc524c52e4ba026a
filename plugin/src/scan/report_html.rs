//! `--report DIR`: one self-contained `report.html` plus the same pictures as PNG files and the
//! JSON twin. The report's pictures are inline SVG: axes, labels and legends are text the
//! browser draws (selectable, any case); only the heat map itself is a raster, embedded as a
//! PNG data URI inside the SVG. No external resources: it opens offline.

use super::CliError;
use super::charts::{
    Backdrop, Drawing, MAP_WIDTH, MapLayers, map_drawing, order_balance_drawing, timeline_drawing,
};
use super::json::to_json_string;
use super::run::{BandResult, ChannelSummary, ScanResult, expected_balance_db};
use super::summary::format_verdict;
use crate::look;
use crate::picture::Picture;
use fieldglass_dsp::beam::default_map_range_db;
use fieldglass_dsp::engine::SourceReading;
use fieldglass_dsp::engine::{Band, MapMethod, Severity};
use fieldglass_dsp::format::Normalization;
use fieldglass_dsp::wording;
use std::fmt::Write;
use std::path::{Path, PathBuf};

/// File names written into the report directory.
pub const REPORT_FILE: &str = "report.html";
pub const JSON_FILE: &str = "scan.json";
pub const TIMELINE_FILE: &str = "timeline.png";
pub const ORDER_BALANCE_FILE: &str = "order-balance.png";

/// File name of the map picture of `band`.
pub fn map_file(band: Band) -> String {
    format!("map-{}.png", band.label())
}

/// Colour-scale range of the report's maps, dB below each map's maximum: the editor's default
/// for the same method and order.
pub fn map_range_db(method: MapMethod, order: usize) -> f64 {
    default_map_range_db(method, order)
}

/// Longest side a picture is shrunk to for the report (twice the map's width: enough for its
/// 720 × 360 pixels).
pub const PICTURE_MAX_SIDE: usize = 2 * MAP_WIDTH;

/// A picture behind the report's maps, with the editor's meaning of yaw and opacity.
#[derive(Clone, Debug)]
pub struct ReportPicture {
    /// How the picture is named in the report (its path as given).
    pub name: String,
    pub picture: Picture,
    /// Azimuth the picture's centre is turned to, degrees.
    pub yaw_deg: f64,
    /// 0 (maps only) … 1 (picture only).
    pub opacity: f64,
}

const STYLE: &str = r#"
:root { color-scheme: dark; }
body { background: {BACKGROUND}; color: {TEXT}; font: 15px/1.45 system-ui, -apple-system, "Segoe UI", sans-serif; margin: 0; }
main { max-width: 1080px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 22px; font-weight: 600; color: #e4e6ea; margin: 0 0 4px; }
h2 { font-size: 17px; font-weight: 600; color: #e4e6ea; margin: 32px 0 10px; border-bottom: 1px solid #2a2e35; padding-bottom: 4px; }
h3 { font-size: 15px; font-weight: 600; color: #d4d7dc; margin: 20px 0 6px; }
p { margin: 6px 0; }
.muted { color: {TEXT_DIM}; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(240px, 1fr)); gap: 12px; margin-top: 16px; }
.card { background: {PANEL}; border: 1px solid #262a31; border-radius: 6px; padding: 10px 14px; }
.card .label { font-size: 12px; text-transform: uppercase; letter-spacing: .06em; color: {TEXT_DIM}; }
.card .value { font-size: 18px; color: #e4e6ea; }
.caution { background: {PANEL}; border-left: 3px solid {WARNING}; padding: 8px 14px; margin-top: 16px; font-size: 13px; color: #a9aeb6; }
svg { display: block; max-width: 100%; height: auto; }
figure { margin: 8px 0 4px; }
figcaption { font-size: 13px; color: {TEXT_DIM}; margin-top: 4px; }
table { border-collapse: collapse; font-size: 13px; margin: 6px 0; }
th, td { padding: 3px 10px; text-align: right; border-bottom: 1px solid #23272d; white-space: nowrap; }
th { color: {TEXT_DIM}; font-weight: 500; }
td.left, th.left { text-align: left; }
tr.attention td { background: #33291a; color: #f0d49a; }
tr.attention td.flag { color: {WARNING}; font-weight: 600; }
ul.findings { list-style: none; padding: 0; margin: 6px 0; }
ul.findings li { margin: 4px 0; padding: 6px 10px; background: {PANEL}; border-radius: 4px; }
.sev { display: inline-block; min-width: 64px; font-size: 12px; font-weight: 600; text-transform: uppercase; letter-spacing: .05em; }
.sev.error { color: {CLIP}; }
.sev.warning { color: {WARNING}; }
.sev.info { color: #9fc3e6; }
code { font-family: ui-monospace, "SF Mono", Menlo, monospace; font-size: 13px; color: #d4d7dc; }
footer { margin-top: 40px; font-size: 12px; color: #6f757e; }
"#;

/// The page's style sheet, with the colours of [`look`] (the editor's).
fn style() -> String {
    [
        ("{BACKGROUND}", look::BACKGROUND),
        ("{PANEL}", look::PANEL),
        ("{TEXT}", look::TEXT),
        ("{TEXT_DIM}", look::TEXT_DIM),
        ("{WARNING}", look::WARNING),
        ("{CLIP}", look::CLIP),
    ]
    .into_iter()
    .fold(STYLE.to_string(), |css, (name, rgb)| {
        css.replace(name, &look::css(rgb))
    })
}

/// Escapes text for HTML element content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

fn fmt_db(value: Option<f64>, decimals: usize) -> String {
    match value {
        Some(v) if v.is_finite() && v > -199.0 => format!("{v:.decimals$}").replace('-', "−"),
        _ => "–".to_string(),
    }
}

fn fmt_level(value: f64, decimals: usize) -> String {
    fmt_db(Some(value), decimals)
}

fn write_file(path: &Path, bytes: &[u8]) -> Result<(), CliError> {
    std::fs::write(path, bytes)
        .map_err(|e| CliError::output(format!("cannot write '{}': {e}", path.display())))
}

/// A picture: written as a PNG file and returned as inline SVG.
fn figure(dir: &Path, file: &str, drawing: &Drawing) -> Result<String, CliError> {
    let cannot = |e: String| CliError::output(format!("cannot draw '{file}': {e}"));
    write_file(&dir.join(file), &drawing.to_png().map_err(cannot)?)?;
    drawing.to_svg().map_err(cannot)
}

/// The map layers of one band's whole-programme map.
fn band_layers<'a>(
    band: &'a BandResult,
    sources: &'a [SourceReading],
    range_db: f64,
    backdrop: Option<Backdrop<'a>>,
) -> MapLayers<'a> {
    MapLayers {
        map_db: &band.map.values_db,
        width: band.map.width,
        height: band.map.height,
        range_db,
        view_yaw_deg: 0.0,
        sources,
        backdrop,
    }
}

fn band_title(band: Band, range_hz: [f64; 2]) -> String {
    let name = match band {
        Band::Full => "Full band",
        Band::Low => "Low band",
        Band::Mid => "Mid band",
        Band::High => "High band",
    };
    format!("{name}, {:.0}–{:.0} Hz", range_hz[0], range_hz[1])
}

fn channel_flags(c: &ChannelSummary) -> String {
    let mut flags = Vec::new();
    if c.clip_count > 0 {
        flags.push("clipped");
    }
    if c.invalid_samples > 0 {
        flags.push("NaN/Inf");
    }
    if c.over_omni {
        flags.push(wording::LOUDER_THAN_W);
    }
    if c.silent {
        flags.push("silent");
    }
    flags.join(", ")
}

fn channel_row(out: &mut String, c: &ChannelSummary) {
    let class = if c.needs_attention() {
        " class=\"attention\""
    } else {
        ""
    };
    let opt = |v: Option<String>| v.unwrap_or_else(|| "–".to_string());
    let _ = writeln!(
        out,
        "<tr{class}><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{:.5}</td><td class=\"left flag\">{}</td></tr>",
        c.input_index + 1,
        opt(c.acn.map(|a| a.to_string())),
        opt(c.order.map(|a| a.to_string())),
        opt(c.degree.map(|a| a.to_string().replace('-', "−"))),
        fmt_level(c.sample_peak_dbfs, 1),
        fmt_level(c.true_peak_dbtp, 1),
        fmt_level(c.rms_dbfs, 1),
        if c.is_extra() {
            "–".to_string()
        } else {
            fmt_level(c.sn3d_rms_dbfs, 1)
        },
        c.clip_count,
        c.invalid_samples,
        c.dc_offset,
        channel_flags(c)
    );
}

const CHANNEL_HEADER: &str = "<tr><th>Channel</th><th>ACN</th><th>Order</th><th>Degree</th><th>Peak dBFS</th><th>True peak dBTP</th><th>RMS dBFS</th><th>RMS as SN3D dBFS</th><th>Clipped</th><th>NaN/Inf</th><th>DC</th><th class=\"left\">Notes</th></tr>";

fn sources_table(out: &mut String, sources: &[fieldglass_dsp::engine::SourceReading]) {
    if sources.is_empty() {
        out.push_str("<p class=\"muted\">No source found.</p>\n");
        return;
    }
    out.push_str("<table><tr><th>#</th><th class=\"left\">Direction</th><th>Level</th></tr>\n");
    for (i, s) in sources.iter().enumerate() {
        let _ = writeln!(
            out,
            "<tr><td>{}</td><td class=\"left\">{}</td><td>{} dB</td></tr>",
            i + 1,
            escape(&wording::direction(
                s.direction.azimuth_deg,
                s.direction.elevation_deg
            ))
            .replace('-', "−"),
            fmt_level(s.level_db, 1)
        );
    }
    out.push_str("</table>\n");
}

/// Writes the report into `dir` (created if needed); returns the path of `report.html`.
/// `picture`, if any, is shown behind every map.
pub fn write_report(
    result: &ScanResult,
    dir: &Path,
    picture: Option<&ReportPicture>,
) -> Result<PathBuf, CliError> {
    std::fs::create_dir_all(dir).map_err(|e| {
        CliError::output(format!(
            "cannot create the report directory '{}': {e}",
            dir.display()
        ))
    })?;
    let html = build_html(result, dir, picture)?;
    let path = dir.join(REPORT_FILE);
    write_file(&path, html.as_bytes())?;
    write_file(&dir.join(JSON_FILE), to_json_string(result).as_bytes())?;
    Ok(path)
}

fn build_html(
    result: &ScanResult,
    dir: &Path,
    picture: Option<&ReportPicture>,
) -> Result<String, CliError> {
    let input = &result.input;
    let snap = &result.snapshot;
    let omni = &snap.programme.omni;
    let mut h = String::with_capacity(1 << 20);
    let title = format!("Fieldglass scan — {}", input.display_name());
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>{}</title>\n<style>{}</style>\n</head>\n<body>\n<main>\n",
        escape(&title),
        style()
    );
    let _ = writeln!(h, "<h1>Scan report: {}</h1>", escape(&input.display_name()));
    let _ = writeln!(
        h,
        "<p class=\"muted\">{} · {:.2} s · {} spatial channels (order {}){}</p>",
        escape(&input.description),
        input.duration_s(),
        result.layout.spatial_channels,
        result.layout.order,
        if result.layout.extra_channels > 0 {
            format!(" + {} extra", result.layout.extra_channels)
        } else {
            String::new()
        }
    );

    // Headline cards.
    let errors = result
        .findings
        .iter()
        .filter(|f| f.severity == Severity::Error)
        .count();
    let warnings = result
        .findings
        .iter()
        .filter(|f| f.severity == Severity::Warning)
        .count();
    h.push_str("<div class=\"cards\">\n");
    let card = |h: &mut String, label: &str, value: &str, note: &str| {
        let _ = writeln!(
            h,
            "<div class=\"card\"><div class=\"label\">{}</div><div class=\"value\">{}</div><div class=\"muted\">{}</div></div>",
            escape(label),
            value,
            note
        );
    };
    let check = &snap.format_check;
    let detected = check.detected.filter(|_| check.ready);
    let verdict_value = match detected {
        Some(d) if d == result.options.assumed => format!("{} ✓", escape(d.human_name())),
        Some(d) => format!("looks like {}", escape(d.human_name())),
        None => "not judged".to_string(),
    };
    card(
        &mut h,
        "Format",
        &verdict_value,
        &format!(
            "read as {}; effective order {}",
            escape(result.options.assumed.human_name()),
            result.effective_order()
        ),
    );
    card(
        &mut h,
        "W integrated loudness",
        &format!("{} LUFS", fmt_db(omni.integrated_lufs, 1)),
        &format!(
            "max momentary {} · max short-term {} LUFS",
            fmt_db(omni.max_momentary_lufs, 1),
            fmt_db(omni.max_short_term_lufs, 1)
        ),
    );
    card(
        &mut h,
        "W true peak",
        &format!("{} dBTP", fmt_level(omni.true_peak_dbtp, 1)),
        &if omni.conversion_gain_db.abs() > 0.005 {
            format!(
                "whole programme, 4× oversampled, SN3D-equivalent; as stored {} dBTP",
                fmt_level(omni.as_stored(omni.true_peak_dbtp), 1)
            )
        } else {
            "whole programme, 4× oversampled".to_string()
        },
    );
    card(
        &mut h,
        "Findings",
        &format!("{errors} error(s), {warnings} warning(s)"),
        &format!("{} in all", result.findings.len()),
    );
    h.push_str("</div>\n");
    let _ = writeln!(
        h,
        "<div class=\"caution\">{}</div>",
        escape(wording::CAUTION)
    );

    // Findings.
    h.push_str("<h2>Findings</h2>\n");
    if result.findings.is_empty() {
        let _ = writeln!(
            h,
            "<p>None: no clipping, invalid samples, channel {}, silent or duplicated channels, order deficit, format mismatch or DC offset found.</p>",
            wording::LOUDER_THAN_W
        );
    } else {
        h.push_str("<ul class=\"findings\">\n");
        for f in &result.findings {
            let _ = writeln!(
                h,
                "<li><span class=\"sev {}\">{}</span> {}</li>",
                f.severity.label(),
                f.severity.label(),
                escape(&f.message)
            );
        }
        h.push_str("</ul>\n");
    }

    // Maps.
    let range_db = map_range_db(result.options.method, result.layout.order);
    let _ = writeln!(h, "<h2>Sphere: {} maps</h2>", wording::WHOLE_PROGRAMME);
    let _ = writeln!(
        h,
        "<p class=\"muted\">{} map of the {}, in dB below its strongest point over {range_db:.0} dB (colour scale on the right; \
         dark = quiet), grid every {:.0}°. Equirectangular, as seen from the listening position: {} in the centre, {} (+90°) \
         left of centre, {} at the top; azimuth runs from +180° at the left edge to −180° at the right. \
         Numbered rings mark the strongest directions.</p>",
        escape(result.options.method.human_name()),
        wording::WHOLE_PROGRAMME,
        wording::GRID_STEP_DEG,
        wording::FRONT,
        wording::LEFT,
        wording::UP,
    );
    if let Some(p) = picture {
        let _ = writeln!(
            h,
            "<p class=\"muted\">Behind the maps: <code>{}</code> at {:.0} % opacity, its centre turned to azimuth {}°.</p>",
            escape(&p.name),
            100.0 * p.opacity,
            wording::degrees(p.yaw_deg).replace('-', "−")
        );
    }
    for band in &result.bands {
        let title = band_title(band.band, band.range_hz);
        let _ = writeln!(h, "<h3>{title}</h3>");
        let sample = |az: f64, el: f64| picture.map_or([0; 4], |p| p.picture.sample(az, el));
        let backdrop = picture.map(|p| Backdrop {
            sample: &sample,
            yaw_deg: p.yaw_deg,
            opacity: p.opacity,
        });
        let drawing = map_drawing(
            &band_layers(band, &band.sources, range_db, backdrop),
            &title,
        );
        let img = figure(dir, &map_file(band.band), &drawing)?;
        let _ = writeln!(
            h,
            "<figure>{img}<figcaption>Diffuseness {} · W level in band {} dBFS</figcaption></figure>",
            band.diffuseness
                .map_or("–".to_string(), |d| format!("{d:.2}")),
            fmt_level(band.w_level_dbfs, 1)
        );
        sources_table(&mut h, &band.sources);
    }

    // Timeline.
    h.push_str("<h2>Strongest direction over time</h2>\n");
    let _ = writeln!(
        h,
        "<p class=\"muted\">Peak of the {} full-band map every {:.2} s (short-term covariance); brighter dots = louder W at that moment.</p>",
        escape(result.options.method.human_name()),
        1.0 / super::run::TIMELINE_RATE_HZ
    );
    let img = figure(
        dir,
        TIMELINE_FILE,
        &timeline_drawing(&result.timeline, input.duration_s()),
    )?;
    let _ = writeln!(h, "<figure>{img}</figure>");

    // Format check.
    h.push_str("<h2>Format check</h2>\n");
    let _ = writeln!(h, "<p>{}.</p>", escape(&format_verdict(result)));
    if !check.hypotheses.is_empty() {
        let mut hyps = check.hypotheses.clone();
        hyps.sort_by(|a, b| b.probability.total_cmp(&a.probability));
        h.push_str("<table><tr><th class=\"left\">Hypothesis</th><th>Likely</th><th>Steering fit</th></tr>\n");
        for hy in &hyps {
            let _ = writeln!(
                h,
                "<tr><td class=\"left\">{}</td><td>{}</td><td>{:.3}</td></tr>",
                escape(hy.format.human_name()),
                escape(&wording::likelihood(hy.probability)),
                hy.steering_fit
            );
        }
        h.push_str("</table>\n");
    }
    h.push_str(
        "<p class=\"muted\">Energy per order relative to W, read under the assumed format. For an incoherent \
         field each order carries as much energy as W in SN3D (0 dB); N3D content shows 10·log10(2n+1) dB; \
         FuMa content about +3 dB at first order (W at −3 dB). The short ticks show what each would read as here.</p>\n",
    );
    let img = figure(
        dir,
        ORDER_BALANCE_FILE,
        &order_balance_drawing(result.order_balance_db(), result.options.assumed),
    )?;
    let _ = writeln!(h, "<figure>{img}</figure>");
    let assumed_norm = result.options.assumed.normalization;
    let order = result.layout.order;
    let expected: Vec<Vec<Option<f64>>> =
        [Normalization::Sn3d, Normalization::N3d, Normalization::MaxN]
            .into_iter()
            .map(|n| expected_balance_db(n, assumed_norm, order))
            .collect();
    h.push_str("<table><tr><th>Order</th><th>Measured dB</th><th>SN3D expects</th><th>N3D expects</th><th>FuMa expects</th></tr>\n");
    #[allow(clippy::needless_range_loop)] // n indexes the order and three tables at once
    for n in 1..=order {
        let measured = result.order_balance_db().get(n).copied();
        let _ = writeln!(
            h,
            "<tr><td>{n}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            fmt_db(measured, 2),
            fmt_db(expected[0][n], 2),
            fmt_db(expected[1][n], 2),
            fmt_db(expected[2][n], 2)
        );
    }
    h.push_str("</table>\n");

    // Channels.
    h.push_str("<h2>Channels</h2>\n");
    let _ = writeln!(
        h,
        "<p class=\"muted\">Figures of the {} per file channel, numbered from 1 in file order, with the ACN it \
         carries as read; levels raw as stored. “RMS as SN3D” is the level after conversion from the assumed format, \
         which is what is compared with W: a channel {} by more than {:.1} dB is flagged. Highlighted rows need \
         attention.</p>",
        wording::WHOLE_PROGRAMME,
        wording::LOUDER_THAN_W,
        result.options.over_omni_tolerance_db
    );
    let _ = writeln!(h, "<table>{CHANNEL_HEADER}");
    for c in result.channels.iter().filter(|c| !c.is_extra()) {
        channel_row(&mut h, c);
    }
    h.push_str("</table>\n");
    if result.layout.extra_channels > 0 {
        h.push_str(
            "<h3>Extra (non-spatial) channels</h3>\n<p class=\"muted\">Metered, not mapped.</p>\n",
        );
        let _ = writeln!(h, "<table>{CHANNEL_HEADER}");
        for c in result.channels.iter().filter(|c| c.is_extra()) {
            channel_row(&mut h, c);
        }
        h.push_str("</table>\n");
    }

    let _ = writeln!(
        h,
        "<footer>fieldglass {} · method {} · band edges {:.0} / {:.0} Hz · analysis took {:.2} s · the JSON twin of this report is <code>{JSON_FILE}</code>.</footer>",
        env!("CARGO_PKG_VERSION"),
        escape(result.options.method.human_name()),
        snap.band_edges_hz[0],
        snap.band_edges_hz[1],
        result.analysis_s
    );
    h.push_str("</main>\n</body>\n</html>\n");
    Ok(h)
}
