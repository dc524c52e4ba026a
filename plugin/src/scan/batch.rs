//! `fieldglass scan FILE|DIR …` over many files: folders are searched for the files `scan`
//! reads, `--jobs N` files are scanned at once, each result becomes one JSON line and one report,
//! and an index page is built from the JSON documents. One unreadable file is reported and does
//! not stop the rest.

use super::index::{IndexRow, report_folder_name, write_index};
use super::progress::Progress;
use super::report_html::ReportPicture;
use super::{
    CliError, EXIT_FAIL_ON, EXIT_OUTPUT, EXIT_USAGE_OR_INPUT, ScanInput, ScanOptions, json,
    report_html, scan_observed,
};
use fieldglass_dsp::engine::Severity;
use indicatif::{MultiProgress, ProgressBar, ProgressStyle};
use std::io::{IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::mpsc;

/// File extensions (lower case) a folder contributes: the containers `scan` reads.
pub const SCANNED_EXTENSIONS: [&str; 7] = ["wav", "wave", "amb", "rf64", "bw64", "opus", "ogg"];

/// What to do with many files.
#[derive(Clone, Debug)]
pub struct BatchOptions {
    pub scan: ScanOptions,
    /// Files scanned at once.
    pub jobs: usize,
    /// Where the JSON lines go ("-" = stdout).
    pub json_lines: Option<String>,
    /// Folder for one report per file and the index page.
    pub report: Option<PathBuf>,
    /// `--fail-on`: exit 3 when any file has a finding at least this severe.
    pub fail_on: Option<Severity>,
    /// The still behind every report's maps (`--picture`).
    pub picture: Option<ReportPicture>,
}

/// The files named, with folders searched recursively (sorted, so that runs are repeatable),
/// and the errors of paths that cannot be read.
pub fn collect_inputs(paths: &[PathBuf]) -> (Vec<PathBuf>, Vec<CliError>) {
    let mut files = Vec::new();
    let mut errors = Vec::new();
    for path in paths {
        if path.is_dir() {
            let mut found = Vec::new();
            walk(path, &mut found, &mut errors);
            found.sort();
            files.extend(found);
        } else {
            // A file named explicitly is scanned whatever its extension; a missing one is an
            // error of its own.
            files.push(path.clone());
        }
    }
    (files, errors)
}

fn walk(dir: &Path, found: &mut Vec<PathBuf>, errors: &mut Vec<CliError>) {
    let entries = match std::fs::read_dir(dir) {
        Ok(entries) => entries,
        Err(e) => {
            errors.push(CliError::input(format!(
                "cannot read the folder '{}': {e}",
                dir.display()
            )));
            return;
        }
    };
    for entry in entries.flatten() {
        let path = entry.path();
        if path.is_dir() {
            walk(&path, found, errors);
        } else if path
            .extension()
            .and_then(|e| e.to_str())
            .is_some_and(|e| SCANNED_EXTENSIONS.contains(&e.to_ascii_lowercase().as_str()))
        {
            found.push(path);
        }
    }
}

/// What one file's scan produced.
struct Outcome {
    index: usize,
    /// The JSON line (a document, or an error object).
    line: String,
    row: Option<IndexRow>,
    /// Exit code this file contributes (0, 1, 2 or 3).
    code: u8,
    message: String,
}

/// Scans `files` with `options.jobs` workers; returns the process exit code: 2 (an input
/// unreadable) before 1 (an output unwritten) before 3 (a `--fail-on` threshold met) before 0.
pub fn run_batch(files: &[PathBuf], earlier_errors: Vec<CliError>, options: &BatchOptions) -> u8 {
    let mut codes: Vec<u8> = Vec::new();
    for e in &earlier_errors {
        eprintln!("fieldglass: {e}");
        codes.push(e.exit_code);
    }
    let mut out: Box<dyn Write> = match options.json_lines.as_deref() {
        None => Box::new(std::io::sink()),
        Some("-") => Box::new(std::io::stdout()),
        Some(target) => match std::fs::File::create(target) {
            Ok(f) => Box::new(std::io::BufWriter::new(f)),
            Err(e) => {
                eprintln!("fieldglass: cannot write '{target}': {e}");
                return EXIT_OUTPUT.max(worst_code(&codes));
            }
        },
    };
    let bars = std::io::stderr().is_terminal().then(MultiProgress::new);
    let overall = bars.as_ref().map(|b| {
        let bar = b.add(ProgressBar::new(files.len() as u64));
        if let Ok(style) =
            ProgressStyle::with_template("{spinner} files [{bar:40}] {pos}/{len} ({eta} left)")
        {
            bar.set_style(style.progress_chars("=> "));
        }
        bar
    });
    let next = AtomicUsize::new(0);
    let jobs = options.jobs.clamp(1, files.len().max(1));
    let (sender, receiver) = mpsc::channel::<Outcome>();
    let mut rows = Vec::with_capacity(files.len());
    std::thread::scope(|scope| {
        for _ in 0..jobs {
            let sender = sender.clone();
            let (next, bars) = (&next, bars.as_ref());
            scope.spawn(move || {
                loop {
                    let index = next.fetch_add(1, Ordering::Relaxed);
                    let Some(path) = files.get(index) else {
                        break;
                    };
                    let outcome = scan_one(index, path, options, bars);
                    if sender.send(outcome).is_err() {
                        break;
                    }
                }
            });
        }
        drop(sender);
        let mut done = 0;
        for outcome in receiver {
            done += 1;
            if let Err(e) = writeln!(out, "{}", outcome.line) {
                eprintln!("fieldglass: cannot write the JSON lines: {e}");
                codes.push(EXIT_OUTPUT);
            }
            let text = format!("[{done}/{}] {}", files.len(), outcome.message);
            match (&bars, &overall) {
                (Some(bars), Some(overall)) => {
                    let _ = bars.println(text);
                    overall.inc(1);
                }
                _ => eprintln!("fieldglass: {text}"),
            }
            codes.push(outcome.code);
            if let Some(row) = outcome.row {
                rows.push((outcome.index, row));
            }
        }
    });
    if let Some(overall) = overall {
        overall.finish_and_clear();
    }
    if let Err(e) = out.flush() {
        eprintln!("fieldglass: cannot write the JSON lines: {e}");
        codes.push(EXIT_OUTPUT);
    }
    if let Some(dir) = &options.report {
        rows.sort_by_key(|(i, _)| *i);
        let rows: Vec<IndexRow> = rows.into_iter().map(|(_, r)| r).collect();
        match write_index(&rows, dir) {
            Ok(path) => eprintln!("fieldglass: index written to '{}'", path.display()),
            Err(e) => {
                eprintln!("fieldglass: {e}");
                codes.push(e.exit_code);
            }
        }
    }
    worst_code(&codes)
}

/// The most serious exit code: 2, then 1, then 3, then 0.
pub fn worst_code(codes: &[u8]) -> u8 {
    [EXIT_USAGE_OR_INPUT, EXIT_OUTPUT, EXIT_FAIL_ON]
        .into_iter()
        .find(|c| codes.contains(c))
        .unwrap_or(0)
}

fn scan_one(
    index: usize,
    path: &Path,
    options: &BatchOptions,
    bars: Option<&MultiProgress>,
) -> Outcome {
    let shown = path.display().to_string();
    let input = ScanInput::File(path.to_path_buf());
    let result = scan_observed(&input, options.scan, |info| {
        Progress::in_batch(bars, &shown, info.frames)
    });
    let result = match result {
        Ok(result) => result,
        Err(e) => {
            let line = serde_json::json!({ "input": { "path": shown }, "error": e.message });
            return Outcome {
                index,
                row: IndexRow::from_json(&line).ok(),
                line: line.to_string(),
                code: e.exit_code,
                message: format!("cannot scan: {e}"),
            };
        }
    };
    let document = json::document(&result);
    let value = serde_json::to_value(&document).unwrap_or_default();
    let mut code = 0;
    let mut message = match result.findings.first() {
        Some(f) => format!("{shown}: {} {}", f.severity.label(), f.code.label()),
        None => format!("{shown}: no findings"),
    };
    if let Some(threshold) = options.fail_on
        && result.findings.iter().any(|f| f.severity >= threshold)
    {
        code = EXIT_FAIL_ON;
    }
    if let Some(dir) = &options.report {
        let folder = dir.join(report_folder_name(&shown));
        if let Err(e) = report_html::write_report(&result, &folder, options.picture.as_ref()) {
            message.push_str(&format!("; {e}"));
            code = EXIT_OUTPUT;
        }
    }
    Outcome {
        index,
        // In the document's own field order, as `scan --json` writes it.
        line: serde_json::to_string(&document).unwrap_or_else(|_| value.to_string()),
        row: IndexRow::from_json(&value).ok(),
        code,
        message,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_most_serious_exit_code_wins() {
        assert_eq!(worst_code(&[0, 3, 1]), 1);
        assert_eq!(worst_code(&[3, 2, 1]), 2);
        assert_eq!(worst_code(&[0, 3]), 3);
        assert_eq!(worst_code(&[]), 0);
    }
}
