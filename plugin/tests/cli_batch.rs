//! `fieldglass scan FILE|DIR …` over many files, and `fieldglass index`: end to end on files
//! the demo writer makes, one unreadable file, and nested folders. Expected values are by
//! construction (which files exist, which one is broken, which one is mislabelled).

use serde_json::Value;
use std::path::Path;
use std::process::{Command, Output};

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fieldglass"))
}

fn demo(path: &Path, extra: &[&str]) {
    let status = bin()
        .args(["demo", "--write"])
        .arg(path)
        .args(["--seconds", "2", "--order", "1"])
        .args(extra)
        .output()
        .unwrap()
        .status;
    assert!(status.success());
}

fn lines(text: &str) -> Vec<Value> {
    text.lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

fn run(args: &[&str], dir: &Path) -> Output {
    bin().current_dir(dir).args(args).output().unwrap()
}

#[test]
fn a_folder_is_scanned_file_by_file_with_reports_an_index_and_json_lines() {
    let dir = tempfile::tempdir().unwrap();
    let root = dir.path();
    std::fs::create_dir_all(root.join("in/sub")).unwrap();
    demo(&root.join("in/a.wav"), &[]);
    demo(&root.join("in/sub/b.wav"), &[]);
    // Read as AmbiX by default, so the format check reports a mismatch (an error finding).
    demo(&root.join("in/sub/c.wav"), &["--format", "acn-n3d"]);
    std::fs::write(root.join("in/broken.wav"), b"RIFF\x04\0\0\0WAVE").unwrap();
    std::fs::write(root.join("in/notes.txt"), b"not audio").unwrap();

    let out = run(
        &[
            "scan",
            "in",
            "--json-lines",
            "-",
            "--report",
            "rep",
            "--jobs",
            "2",
        ],
        root,
    );
    // One input unreadable: exit 2, and the other files are still scanned.
    assert_eq!(
        out.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let docs = lines(&String::from_utf8(out.stdout).unwrap());
    assert_eq!(
        docs.len(),
        4,
        "three scans and one error line; notes.txt is not scanned"
    );
    let mut paths: Vec<&str> = docs
        .iter()
        .map(|d| d["input"]["path"].as_str().unwrap())
        .collect();
    paths.sort_unstable();
    assert_eq!(
        paths,
        ["in/a.wav", "in/broken.wav", "in/sub/b.wav", "in/sub/c.wav"]
    );
    let broken = docs
        .iter()
        .find(|d| d["input"]["path"] == "in/broken.wav")
        .unwrap();
    assert!(broken["error"].as_str().unwrap().contains("broken.wav"));
    for doc in docs.iter().filter(|d| d["error"].is_null()) {
        assert_eq!(doc["schema"], "fieldglass-scan/1");
    }
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("[4/4]"), "{stderr}");

    // One report folder per scanned file, and an index linking them.
    let index = std::fs::read_to_string(root.join("rep/index.html")).unwrap();
    let reports: Vec<_> = std::fs::read_dir(root.join("rep"))
        .unwrap()
        .flatten()
        .filter(|e| e.path().join("report.html").is_file())
        .collect();
    assert_eq!(reports.len(), 3);
    assert_eq!(index.matches("/report.html\"").count(), 3);
    assert!(index.contains("could not be scanned"));
    assert!(index.contains("error: format-mismatch"));
    assert!(index.contains("<table id=\"index\">"));

    // The same index from the JSON lines alone (as after a run spread over machines).
    let jsonl = root.join("all.jsonl");
    let text: String = docs.iter().map(|d| format!("{d}\n")).collect();
    std::fs::write(&jsonl, text).unwrap();
    std::fs::remove_file(root.join("rep/index.html")).unwrap();
    let out = run(&["index", "all.jsonl", "--report", "rep"], root);
    assert!(out.status.success());
    assert_eq!(
        std::fs::read_to_string(root.join("rep/index.html")).unwrap(),
        index
    );
}

#[test]
fn exit_codes_rank_fail_on_below_unreadable_inputs() {
    let dir = tempfile::tempdir().unwrap();
    let root = dir.path();
    demo(&root.join("a.wav"), &[]);
    demo(&root.join("n3d.wav"), &["--format", "acn-n3d"]);
    let out = run(&["scan", "a.wav", "n3d.wav", "--fail-on", "error"], root);
    assert_eq!(out.status.code(), Some(3));
    let out = run(
        &[
            "scan",
            "a.wav",
            "missing.wav",
            "n3d.wav",
            "--fail-on",
            "error",
        ],
        root,
    );
    assert_eq!(out.status.code(), Some(2));
    // Results do not depend on how many files run at once.
    let one = run(
        &[
            "scan",
            "a.wav",
            "n3d.wav",
            "--json-lines",
            "-",
            "--jobs",
            "1",
        ],
        root,
    );
    let two = run(
        &[
            "scan",
            "a.wav",
            "n3d.wav",
            "--json-lines",
            "-",
            "--jobs",
            "2",
        ],
        root,
    );
    let strip = |o: &Output| {
        let mut docs = lines(&String::from_utf8_lossy(&o.stdout));
        docs.sort_by_key(|d| d["input"]["path"].as_str().unwrap().to_owned());
        docs
    };
    assert_eq!(strip(&one), strip(&two));
    // --json is for one input.
    let out = run(&["scan", "a.wav", "n3d.wav", "--json", "-"], root);
    assert_eq!(out.status.code(), Some(2));
}

/// One file alone is spread over the cores (`--jobs 1` leaves cores free); in a batch of as many
/// files as cores each file runs on one thread. The documents must agree to the last printed
/// digit. (On a one-core machine both runs are on one thread and this checks only the batch.)
#[test]
fn a_file_reads_the_same_spread_over_the_cores_and_on_one_thread() {
    let dir = tempfile::tempdir().unwrap();
    let root = dir.path();
    let status = bin()
        .args(["demo", "--write"])
        .arg(root.join("a.wav"))
        .args(["--seconds", "4", "--order", "3"])
        .output()
        .unwrap()
        .status;
    assert!(status.success());
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    for copy in 1..cores.max(2) {
        std::fs::copy(root.join("a.wav"), root.join(format!("copy{copy}.wav"))).unwrap();
    }
    let alone = run(&["scan", "a.wav", "--jobs", "1", "--json-lines", "-"], root);
    assert!(alone.status.success());
    let alone = lines(&String::from_utf8(alone.stdout).unwrap());
    let jobs = cores.max(2).to_string();
    let mut args = vec!["scan", "a.wav"];
    let copies: Vec<String> = (1..cores.max(2)).map(|c| format!("copy{c}.wav")).collect();
    args.extend(copies.iter().map(String::as_str));
    args.extend(["--jobs", &jobs, "--json-lines", "-"]);
    let batch = run(&args, root);
    assert!(batch.status.success());
    let batch = lines(&String::from_utf8(batch.stdout).unwrap());
    let in_batch = batch
        .iter()
        .find(|d| d["input"]["path"] == "a.wav")
        .unwrap();
    assert_eq!(alone.len(), 1);
    assert_eq!(&alone[0], in_batch);
    assert!(alone[0]["omni"]["true_peak_dbtp"].as_f64().unwrap() > -30.0);
}
