//! The batch index: one sortable HTML page over many scans, built only from their
//! `fieldglass-scan/1` JSON documents — the same way after `scan --report DIR` of many files and
//! after `fieldglass index JSONL…` over JSON lines gathered from other machines.

use super::CliError;
use super::report_html::escape;
use serde_json::Value;
use std::path::{Path, PathBuf};

/// One row of the index.
#[derive(Clone, Debug, PartialEq)]
pub struct IndexRow {
    pub path: String,
    pub duration_s: Option<f64>,
    pub order: Option<u64>,
    /// "AmbiX (ACN/SN3D)"-style name of the detected format, or None.
    pub detected: Option<String>,
    pub loudness_lufs: Option<f64>,
    pub true_peak_dbtp: Option<f64>,
    /// Most severe finding: (severity, code).
    pub worst: Option<(String, String)>,
    pub findings: usize,
    /// Why the file could not be scanned (a JSON line with `error`).
    pub error: Option<String>,
}

impl IndexRow {
    /// Reads a row from a scan document or an error line (`{"input":{"path":…},"error":…}`).
    pub fn from_json(doc: &Value) -> Result<Self, String> {
        let path = doc["input"]["path"]
            .as_str()
            .map(str::to_owned)
            .or_else(|| {
                doc["input"]["demo"]
                    .as_bool()
                    .filter(|d| *d)
                    .map(|_| "demo".into())
            })
            .ok_or("a line without input.path")?;
        if let Some(error) = doc["error"].as_str() {
            return Ok(Self {
                path,
                duration_s: None,
                order: None,
                detected: None,
                loudness_lufs: None,
                true_peak_dbtp: None,
                worst: None,
                findings: 0,
                error: Some(error.to_owned()),
            });
        }
        if doc["schema"].as_str() != Some(super::json::SCHEMA) {
            return Err(format!(
                "{path}: not a {} document (schema {})",
                super::json::SCHEMA,
                doc["schema"]
            ));
        }
        let detected = &doc["detected"];
        let detected = match (
            detected["ordering"].as_str(),
            detected["normalization"].as_str(),
        ) {
            (Some(o), Some(n)) => Some(format_name(o, n)),
            _ => None,
        };
        let findings = doc["findings"].as_array().cloned().unwrap_or_default();
        let rank = |f: &Value| match f["severity"].as_str() {
            Some("error") => 3,
            Some("warning") => 2,
            Some("info") => 1,
            _ => 0,
        };
        let worst = findings.iter().max_by_key(|f| rank(f)).map(|f| {
            (
                f["severity"].as_str().unwrap_or("").to_owned(),
                f["code"].as_str().unwrap_or("").to_owned(),
            )
        });
        Ok(Self {
            path,
            duration_s: doc["input"]["duration_s"].as_f64(),
            order: doc["assumed"]["order"].as_u64(),
            detected,
            loudness_lufs: doc["omni"]["integrated_lufs"].as_f64(),
            true_peak_dbtp: doc["omni"]["true_peak_dbtp"].as_f64(),
            worst,
            findings: findings.len(),
            error: None,
        })
    }
}

/// The people's name of a JSON (ordering, normalization) pair.
fn format_name(ordering: &str, normalization: &str) -> String {
    match (ordering, normalization) {
        ("acn", "sn3d") => "AmbiX (ACN/SN3D)".into(),
        ("acn", "n3d") => "ACN/N3D".into(),
        ("fuma", "maxn") => "FuMa".into(),
        ("acn", "maxn") => "ACN/maxN".into(),
        (o, n) => format!("{}/{}", o.to_uppercase(), n.to_uppercase()),
    }
}

/// The folder, inside a batch report folder, of one file's report: the file's name and a short
/// hash of its whole path, so that the same path gets the same folder on every machine and
/// equal names in different folders do not collide.
pub fn report_folder_name(path: &str) -> String {
    let stem = Path::new(path)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "input".into());
    let safe: String = stem
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .take(60)
        .collect();
    // FNV-1a, 32 bits (Fowler, Noll, Vo): small, stable across platforms and releases.
    let hash = path.bytes().fold(0x811c_9dc5u32, |h, b| {
        (h ^ u32::from(b)).wrapping_mul(0x0100_0193)
    });
    format!("{safe}-{hash:08x}")
}

/// Reads JSON lines (one scan document or error line per line; blank lines skipped).
pub fn rows_from_json_lines(text: &str, source: &str) -> Result<Vec<IndexRow>, CliError> {
    text.lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty())
        .map(|(i, line)| {
            let doc: Value = serde_json::from_str(line).map_err(|e| {
                CliError::input(format!("{source}, line {}: not JSON ({e})", i + 1))
            })?;
            IndexRow::from_json(&doc)
                .map_err(|e| CliError::input(format!("{source}, line {}: {e}", i + 1)))
        })
        .collect()
}

fn cell(value: Option<f64>, decimals: usize) -> (String, String) {
    match value {
        Some(v) if v.is_finite() => (format!("{v:.decimals$}"), format!("{v}")),
        _ => ("–".into(), String::new()),
    }
}

/// Writes `index.html` into `dir`; rows whose report folder exists there get a link.
pub fn write_index(rows: &[IndexRow], dir: &Path) -> Result<PathBuf, CliError> {
    std::fs::create_dir_all(dir)
        .map_err(|e| CliError::output(format!("cannot create '{}': {e}", dir.display())))?;
    let mut rows: Vec<&IndexRow> = rows.iter().collect();
    rows.sort_by(|a, b| a.path.cmp(&b.path));
    let errors = rows.iter().filter(|r| r.error.is_some()).count();
    let worst_errors = rows
        .iter()
        .filter(|r| r.worst.as_ref().is_some_and(|w| w.0 == "error"))
        .count();
    let mut h = String::new();
    h.push_str(
        "<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">\
         <title>Fieldglass batch index</title><style>",
    );
    h.push_str(INDEX_CSS);
    h.push_str("</style></head><body><main>\n<h1>Batch index</h1>\n");
    h.push_str(&format!(
        "<p class=\"muted\">{} file(s); {} with an error finding; {} could not be read. \
         Click a column heading to sort.</p>\n",
        rows.len(),
        worst_errors,
        errors
    ));
    h.push_str(
        "<table id=\"index\"><thead><tr>\
         <th data-type=\"text\">File</th><th data-type=\"num\">Duration (s)</th>\
         <th data-type=\"num\">Order</th><th data-type=\"text\">Detected format</th>\
         <th data-type=\"num\">W loudness (LUFS)</th><th data-type=\"num\">W true peak (dBTP)</th>\
         <th data-type=\"num\">Worst finding</th></tr></thead><tbody>\n",
    );
    for row in rows {
        let folder = report_folder_name(&row.path);
        let has_report = dir.join(&folder).join("report.html").is_file();
        let name = escape(&row.path);
        let file = if has_report {
            format!("<a href=\"{folder}/report.html\">{name}</a>")
        } else {
            name
        };
        if let Some(error) = &row.error {
            h.push_str(&format!(
                "<tr class=\"unreadable\"><td data-v=\"{}\">{file}</td><td colspan=\"5\">could not be \
                 scanned: {}</td><td data-v=\"4\">unreadable</td></tr>\n",
                escape(&row.path),
                escape(error)
            ));
            continue;
        }
        let (duration, duration_v) = cell(row.duration_s, 1);
        let (lufs, lufs_v) = cell(row.loudness_lufs, 1);
        let (peak, peak_v) = cell(row.true_peak_dbtp, 1);
        let (worst, rank) = match &row.worst {
            None => ("none".to_owned(), 0),
            Some((severity, code)) => (
                format!(
                    "{severity}: {code}{}",
                    if row.findings > 1 {
                        format!(" (+{} more)", row.findings - 1)
                    } else {
                        String::new()
                    }
                ),
                match severity.as_str() {
                    "error" => 3,
                    "warning" => 2,
                    _ => 1,
                },
            ),
        };
        h.push_str(&format!(
            "<tr class=\"rank{rank}\"><td data-v=\"{}\">{file}</td><td data-v=\"{duration_v}\">{duration}</td>\
             <td data-v=\"{order}\">{order}</td><td>{detected}</td><td data-v=\"{lufs_v}\">{lufs}</td>\
             <td data-v=\"{peak_v}\">{peak}</td><td data-v=\"{rank}\">{worst}</td></tr>\n",
            escape(&row.path),
            order = row.order.map(|o| o.to_string()).unwrap_or_default(),
            detected = escape(row.detected.as_deref().unwrap_or("not judged")),
            worst = escape(&worst),
        ));
    }
    h.push_str("</tbody></table>\n");
    h.push_str(&format!(
        "<div class=\"caution\">{}</div>\n",
        escape(fieldglass_dsp::wording::CAUTION)
    ));
    h.push_str("<script>");
    h.push_str(SORT_SCRIPT);
    h.push_str("</script></main></body></html>\n");
    let path = dir.join("index.html");
    std::fs::write(&path, h)
        .map_err(|e| CliError::output(format!("cannot write '{}': {e}", path.display())))?;
    Ok(path)
}

const INDEX_CSS: &str = "body { background: #121418; color: #c4c8ce; font: 15px/1.45 system-ui, \
sans-serif; margin: 0; } main { max-width: 1200px; margin: 0 auto; padding: 16px 24px; } \
h1 { font-weight: 500; } .muted { color: #80868e; } a { color: #9ec3e6; } \
table { border-collapse: collapse; width: 100%; } th, td { padding: 5px 8px; text-align: right; \
border-bottom: 1px solid #262a31; } th:first-child, td:first-child, td:nth-child(4) { text-align: left; } \
th { cursor: pointer; color: #a9aeb6; font-weight: 500; user-select: none; } \
th.sorted-up::after { content: ' ▲'; } th.sorted-down::after { content: ' ▼'; } \
tr.rank3 td:last-child, tr.unreadable td { color: #dc3c32; } tr.rank2 td:last-child { color: #e6a028; } \
.caution { border-left: 3px solid #8a7a4a; padding: 8px 14px; margin-top: 16px; font-size: 13px; \
color: #a9aeb6; background: #181b20; }";

/// Sorts the table by the clicked column: numbers by their data-v value, text by its content.
const SORT_SCRIPT: &str = "document.querySelectorAll('#index th').forEach((th, col) => {\
 th.addEventListener('click', () => {\
 const body = document.querySelector('#index tbody');\
 const up = !th.classList.contains('sorted-up');\
 document.querySelectorAll('#index th').forEach(h => h.classList.remove('sorted-up', 'sorted-down'));\
 th.classList.add(up ? 'sorted-up' : 'sorted-down');\
 const num = th.dataset.type === 'num';\
 const key = r => { const c = r.children[Math.min(col, r.children.length - 1)];\
 const v = c.dataset.v ?? c.textContent; return num ? (v === '' ? -Infinity : parseFloat(v)) : v.toLowerCase(); };\
 const rows = [...body.rows].sort((a, b) => { const x = key(a), y = key(b);\
 return (x < y ? -1 : x > y ? 1 : 0) * (up ? 1 : -1); });\
 rows.forEach(r => body.appendChild(r)); }); });";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn report_folders_are_stable_and_distinct() {
        let a = report_folder_name("/deliveries/ep1/mix.wav");
        assert_eq!(a, report_folder_name("/deliveries/ep1/mix.wav"));
        assert!(a.starts_with("mix-"));
        assert_ne!(a, report_folder_name("/deliveries/ep2/mix.wav"));
        assert_eq!(report_folder_name("a b/ü.wav").len(), "_-".len() + 8);
    }

    #[test]
    fn error_lines_and_documents_become_rows() {
        let line = r#"{"input":{"path":"x.wav"},"error":"cannot read 'x.wav': truncated"}"#;
        let rows = rows_from_json_lines(line, "t").unwrap();
        assert_eq!(
            rows[0].error.as_deref(),
            Some("cannot read 'x.wav': truncated")
        );
        assert!(rows_from_json_lines("{", "t").is_err());
        assert!(rows_from_json_lines(r#"{"input":{"path":"y"},"schema":"other/1"}"#, "t").is_err());
    }
}
