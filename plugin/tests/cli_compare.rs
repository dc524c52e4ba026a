//! End-to-end tests of `fieldglass compare`: pairs made here from the demo scene with known
//! truths, compared by the built binary, the JSON checked against the truth that went in.
//!
//! Sources of the expected values:
//! - Rotations and mirrors: the candidate is the reference re-encoded with the real-SH transform
//!   of a known rotation (`ShRotation`, checked in dsp-core/tests/sh_rotation.rs against SciPy's
//!   `Rotation` and against direct re-encoding at rotated directions). Recovered angles within
//!   1° (the bound).
//! - Gain: 20·log10(0.5) = −6.02 dB (definition of the decibel). BS.1770 loudness of a signal
//!   scaled by g changes by exactly 20·log10|g| LU: this follows from the measure's definition in
//!   ITU-R BS.1770-4 (linear K-weighting, a relative gate that moves with the programme; the
//!   absolute −70 LUFS gate is far below this programme).
//! - Swaps, inversions, offsets, dropped orders: by construction of the files.
//! - Codec: Debian's ffmpeg with libopus, Ogg Opus channel mapping family 2 (RFC 8486), decoded
//!   with ffmpeg's native Opus decoder (`-c:a opus`). A lossy codec at a moderate rate replaces
//!   detail by coding noise, so the coherence of every order must drop (no exact value is
//!   claimed; the figures measured are printed).

use fieldglass::wav::{SampleFormat, WavSpec, WavWriter, WriterOptions};
use fieldglass_dsp::compare::MirrorAxis;
use fieldglass_dsp::compare::orientation::rotation_from_angles;
use fieldglass_dsp::format::{AmbiFormat, ConversionPlan};
use fieldglass_dsp::scene::{SceneConfig, render_seconds};
use fieldglass_dsp::sh::{Matrix3, ShRotation};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

const RATE: u32 = 48_000;
const SECONDS: f64 = 5.0;
const ANGLE_TOLERANCE_DEG: f64 = 1.0;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fieldglass"))
}

/// The third-order demo scene, rendered once per test binary.
fn master() -> &'static Vec<Vec<f32>> {
    static MASTER: OnceLock<Vec<Vec<f32>>> = OnceLock::new();
    MASTER.get_or_init(|| render_seconds(SceneConfig::default(), SECONDS).unwrap())
}

fn write_float(path: &Path, planes: &[Vec<f32>], rate: u32) {
    let spec = WavSpec {
        channels: planes.len() as u16,
        sample_rate: rate,
        bits_per_sample: 32,
        sample_format: SampleFormat::Float,
        channel_mask: None,
    };
    let mut writer = WavWriter::with_options(path, spec, WriterOptions::default()).unwrap();
    let refs: Vec<&[f32]> = planes.iter().map(|p| p.as_slice()).collect();
    writer.write_planar(&refs).unwrap();
    writer.finalize().unwrap();
}

fn transformed(reference: &[Vec<f32>], q: &Matrix3) -> Vec<Vec<f32>> {
    let d = ShRotation::new(3, q);
    let frames = reference[0].len();
    let mut out = vec![vec![0.0f32; frames]; reference.len()];
    let (mut x, mut y) = (vec![0.0; 16], vec![0.0; 16]);
    for t in 0..frames {
        for (ch, v) in x.iter_mut().enumerate() {
            *v = reference[ch][t] as f64;
        }
        d.apply(&x, &mut y);
        for (ch, v) in y.iter().enumerate() {
            out[ch][t] = *v as f32;
        }
    }
    out
}

/// A temporary directory holding `reference.wav` (the master) and `candidate.wav`.
struct Pair {
    dir: tempfile::TempDir,
}

impl Pair {
    fn new(candidate: &[Vec<f32>]) -> Self {
        let dir = tempfile::tempdir().unwrap();
        write_float(&dir.path().join("reference.wav"), master(), RATE);
        write_float(&dir.path().join("candidate.wav"), candidate, RATE);
        Self { dir }
    }

    fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    fn run(&self, extra: &[&str]) -> Output {
        let mut command = bin();
        command
            .arg("compare")
            .arg(self.path("reference.wav"))
            .arg(self.path("candidate.wav"))
            .args(extra);
        command.output().unwrap()
    }

    fn json(&self) -> Value {
        let out = self.run(&["--json", "-"]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(out.status.success(), "compare failed: {stderr}");
        assert!(!stderr.contains("panicked"), "{stderr}");
        serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
            panic!(
                "stdout is not JSON ({e}): {}",
                String::from_utf8_lossy(&out.stdout)
            )
        })
    }
}

fn codes(doc: &Value) -> Vec<String> {
    doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["code"].as_str().unwrap().to_string())
        .collect()
}

fn finding<'a>(doc: &'a Value, code: &str) -> &'a Value {
    doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["code"] == code)
        .unwrap_or_else(|| panic!("no '{code}' finding in {:#}", doc["findings"]))
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn assert_angles(doc: &Value, yaw: f64, pitch: f64, roll: f64) {
    let r = &doc["rotation"];
    for (name, truth) in [("yaw_deg", yaw), ("pitch_deg", pitch), ("roll_deg", roll)] {
        let got = f(&r[name]);
        assert!(
            (got - truth).abs() < ANGLE_TOLERANCE_DEG,
            "{name}: {got} vs {truth} ({r:#})"
        );
    }
}

fn assert_no_channel_faults(doc: &Value) {
    let c = codes(doc);
    assert!(
        !c.iter()
            .any(|c| c == "channels-swapped" || c == "polarity-inverted"),
        "{c:?}"
    );
}

#[test]
fn yaw_30_is_rotated_not_swapped() {
    let pair = Pair::new(&transformed(
        master(),
        &rotation_from_angles(30.0, 0.0, 0.0),
    ));
    let doc = pair.json();
    assert_eq!(doc["schema"], "fieldglass-compare/1");
    assert_angles(&doc, 30.0, 0.0, 0.0);
    assert_eq!(doc["rotation"]["mirrored"], false);
    let c = codes(&doc);
    assert!(
        c.contains(&"rotated".to_string()) && !c.contains(&"mirrored".to_string()),
        "{c:?}"
    );
    assert_no_channel_faults(&doc);
    // The matrix is R, rows: R[1][0] = sin 30°.
    assert!((f(&doc["rotation"]["matrix"][1][0]) - 0.5).abs() < 0.02);
    for order in doc["orders"].as_array().unwrap() {
        assert!(f(&order["rotation_fit"]) > 0.99, "{order}");
        assert!(f(&order["coherence"]) > 0.99, "{order}");
    }
    // Every reference source reappears about 30° away.
    let moved = doc["sources"]["moved_deg"].as_array().unwrap();
    assert!((f(&moved[0]) - 30.0).abs() < 3.0, "{moved:?}");
}

#[test]
fn yaw_minus_45_pitch_20() {
    let pair = Pair::new(&transformed(
        master(),
        &rotation_from_angles(-45.0, 20.0, 0.0),
    ));
    let doc = pair.json();
    assert_angles(&doc, -45.0, 20.0, 0.0);
    assert!(codes(&doc).contains(&"rotated".to_string()));
    assert_no_channel_faults(&doc);
}

#[test]
fn left_right_mirror() {
    let pair = Pair::new(&transformed(master(), &MirrorAxis::LeftRight.matrix()));
    let doc = pair.json();
    assert_eq!(doc["rotation"]["mirrored"], true);
    assert_eq!(doc["rotation"]["mirror_axis"], "left-right");
    assert_angles(&doc, 0.0, 0.0, 0.0);
    let c = codes(&doc);
    assert!(
        c.contains(&"mirrored".to_string()) && !c.contains(&"rotated".to_string()),
        "{c:?}"
    );
    assert_no_channel_faults(&doc);
    assert_eq!(finding(&doc, "mirrored")["severity"], "error");
    // --fail-on error: exit code 3, as for scan.
    let out = pair.run(&["--fail-on", "error"]);
    assert_eq!(out.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&out.stderr).contains("mirrored"));
}

#[test]
fn swap_of_two_second_order_channels() {
    let mut candidate = master().clone();
    candidate.swap(4, 8);
    let doc = Pair::new(&candidate).json();
    let swap = finding(&doc, "channels-swapped");
    assert_eq!(swap["channels"], serde_json::json!([4, 8]));
    let c = codes(&doc);
    assert!(
        !c.iter().any(|c| c == "rotated" || c == "mirrored"),
        "{c:?}"
    );
    assert_eq!(c.iter().filter(|c| *c == "channels-swapped").count(), 1);
    let channels = doc["channels"].as_array().unwrap();
    assert_eq!(channels[4]["index"], 4);
    assert_eq!(channels[4]["best_match_acn"], 8);
    assert_eq!(channels[8]["best_match_acn"], 4);
    assert_eq!(channels[5]["best_match_acn"], 5);
}

#[test]
fn one_inverted_third_order_channel() {
    let mut candidate = master().clone();
    candidate[11].iter_mut().for_each(|v| *v = -*v);
    let doc = Pair::new(&candidate).json();
    assert_eq!(
        finding(&doc, "polarity-inverted")["channels"],
        serde_json::json!([11])
    );
    let channels = doc["channels"].as_array().unwrap();
    assert_eq!(channels[11]["polarity_inverted"], true);
    assert!((f(&channels[11]["correlation"]) + 1.0).abs() < 1e-3);
    assert_eq!(
        channels
            .iter()
            .filter(|c| c["polarity_inverted"] == true)
            .count(),
        1
    );
    let c = codes(&doc);
    assert!(
        !c.iter()
            .any(|c| c == "rotated" || c == "mirrored" || c == "channels-swapped"),
        "{c:?}"
    );
}

#[test]
fn whole_file_inversion_is_one_finding_not_a_mirror() {
    let candidate: Vec<Vec<f32>> = master()
        .iter()
        .map(|c| c.iter().map(|v| -v).collect())
        .collect();
    let doc = Pair::new(&candidate).json();
    assert_eq!(doc["rotation"]["whole_file_inverted"], true);
    assert_eq!(doc["rotation"]["mirrored"], false);
    assert_eq!(codes(&doc), vec!["polarity-inverted".to_string()]);
    assert_eq!(
        finding(&doc, "polarity-inverted")["channels"],
        serde_json::json!((0..16).collect::<Vec<_>>())
    );
    assert!(f(&doc["alignment"]["correlation"]) < -0.999);
}

#[test]
fn offset_of_1234_frames() {
    let candidate: Vec<Vec<f32>> = master()
        .iter()
        .map(|c| {
            let mut delayed = vec![0.0f32; 1234];
            delayed.extend_from_slice(c);
            delayed
        })
        .collect();
    let doc = Pair::new(&candidate).json();
    assert_eq!(doc["alignment"]["offset_frames"], 1234);
    assert!(f(&doc["alignment"]["correlation"]) > 0.9999);
    assert_eq!(codes(&doc), vec!["offset".to_string()]);
    assert_eq!(finding(&doc, "offset")["severity"], "info");
}

#[test]
fn identical_copy_has_no_findings() {
    let pair = Pair::new(master());
    let doc = pair.json();
    assert!(
        doc["findings"].as_array().unwrap().is_empty(),
        "{:#}",
        doc["findings"]
    );
    assert_eq!(doc["alignment"]["offset_frames"], 0);
    assert_eq!(doc["common_order"], 3);
    for order in doc["orders"].as_array().unwrap() {
        assert!(f(&order["level_change_db"]).abs() < 1e-3);
        assert!(f(&order["coherence"]) > 0.9999);
    }
    assert_eq!(f(&doc["loudness"]["change_lu"]), 0.0);
    // Summary and report too.
    let report = pair.path("report");
    let out = pair.run(&["--report", report.to_str().unwrap()]);
    assert!(out.status.success());
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.contains("none: the candidate matches the reference"),
        "{stdout}"
    );
    let html = std::fs::read_to_string(report.join("report.html")).unwrap();
    assert!(html.contains("data:image/png;base64,") && html.contains("<svg"));
    for file in [
        "map-reference.png",
        "map-candidate.png",
        "map-difference.png",
        "compare.json",
    ] {
        assert!(report.join(file).exists(), "{file}");
    }
}

#[test]
fn first_order_delivery_of_a_third_order_master() {
    let candidate: Vec<Vec<f32>> = master()[..4].to_vec();
    let doc = Pair::new(&candidate).json();
    assert_eq!(doc["common_order"], 1);
    assert_eq!(doc["dropped_orders"], serde_json::json!([2, 3]));
    assert_eq!(doc["dropped_from"], "candidate");
    assert_eq!(finding(&doc, "orders-dropped")["severity"], "warning");
    assert_eq!(doc["channels"].as_array().unwrap().len(), 4);
    let c = codes(&doc);
    assert!(
        !c.iter().any(|c| c == "rotated" || c == "mirrored"),
        "{c:?}"
    );
    assert_no_channel_faults(&doc);
    assert!(
        c.contains(&"format-changed".to_string()),
        "channel count changed: {c:?}"
    );
}

#[test]
fn six_db_level_change() {
    let candidate: Vec<Vec<f32>> = master()
        .iter()
        .map(|c| c.iter().map(|v| v * 0.5).collect())
        .collect();
    let doc = Pair::new(&candidate).json();
    let expected = 20.0 * 0.5f64.log10();
    assert!(
        (f(&doc["loudness"]["change_lu"]) - expected).abs() < 0.02,
        "{:#}",
        doc["loudness"]
    );
    for order in doc["orders"].as_array().unwrap() {
        assert!(
            (f(&order["level_change_db"]) - expected).abs() < 0.01,
            "{order}"
        );
        assert!(f(&order["coherence"]) > 0.9999);
    }
    assert_eq!(codes(&doc), vec!["level-change".to_string()]);
}

#[test]
fn demo_reference_against_its_own_rendering() {
    // The demo reference is rendered on the fly with the same scene settings as `master()`.
    let pair = Pair::new(master());
    let out = bin()
        .args(["compare", "--demo", "--demo-seconds", "5", "--json", "-"])
        .arg(pair.path("candidate.wav"))
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(doc["reference"]["demo"], true);
    assert!(
        doc["findings"].as_array().unwrap().is_empty(),
        "{:#}",
        doc["findings"]
    );
}

#[test]
fn fuma_delivery_read_as_fuma_matches_and_says_the_format_changed() {
    // FuMa channel order and maxN weights from dsp-core's conversion plan (checked there
    // against the Furse-Malham tables).
    let plan = ConversionPlan::from_sn3d(AmbiFormat::FUMA, 3).unwrap();
    let frames = master()[0].len();
    let mut fuma = vec![vec![0.0f32; frames]; 16];
    {
        let input: Vec<&[f32]> = master().iter().map(|c| c.as_slice()).collect();
        let mut output: Vec<&mut [f32]> = fuma.iter_mut().map(|c| c.as_mut_slice()).collect();
        plan.apply(&input, &mut output);
    }
    let pair = Pair::new(&fuma);
    let out = pair.run(&["--assume-candidate", "fuma", "--json", "-"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(codes(&doc), vec!["format-changed".to_string()]);
    assert_eq!(doc["candidate"]["assumed"]["ordering"], "fuma");
    for order in doc["orders"].as_array().unwrap() {
        assert!(f(&order["level_change_db"]).abs() < 1e-3, "{order}");
    }
    // FuMa file channel 1 is X (ACN 3).
    let channels = doc["channels"].as_array().unwrap();
    assert_eq!(channels[1]["index"], 1);
    assert_eq!(channels[1]["acn"], 3);
}

#[test]
fn different_sample_rates_are_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let (a, b) = (dir.path().join("a.wav"), dir.path().join("b.wav"));
    let short: Vec<Vec<f32>> = master().iter().map(|c| c[..4800].to_vec()).collect();
    write_float(&a, &short, 48_000);
    write_float(&b, &short, 44_100);
    let out = bin().arg("compare").arg(&a).arg(&b).output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("48000 Hz") && stderr.contains("44100 Hz"),
        "{stderr}"
    );
}

#[test]
fn opus_round_trip_loses_detail_but_keeps_geometry() {
    // Needs ffmpeg with the libopus encoder and its native Opus decoder.
    let codecs = Command::new("ffmpeg")
        .args(["-hide_banner", "-encoders"])
        .output();
    let has_libopus = codecs.is_ok_and(|o| {
        o.status.success() && String::from_utf8_lossy(&o.stdout).contains("libopus")
    });
    if !has_libopus {
        eprintln!(
            "SKIPPED opus_round_trip_loses_detail_but_keeps_geometry: ffmpeg with libopus is not installed (apt-get install ffmpeg)"
        );
        return;
    }
    let pair = Pair::new(master());
    let (wav, opus, decoded) = (
        pair.path("reference.wav"),
        pair.path("delivery.opus"),
        pair.path("candidate.wav"),
    );
    let run = |args: &[&str]| {
        let out = Command::new("ffmpeg")
            .args(["-hide_banner", "-loglevel", "error", "-y"])
            .args(args)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "ffmpeg {args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    };
    // 256 kbit/s for 16 channels (16 kbit/s a channel): a moderate rate for third order.
    run(&[
        "-i",
        wav.to_str().unwrap(),
        "-c:a",
        "libopus",
        "-mapping_family",
        "2",
        "-b:a",
        "256k",
        opus.to_str().unwrap(),
    ]);
    run(&[
        "-c:a",
        "opus",
        "-i",
        opus.to_str().unwrap(),
        "-c:a",
        "pcm_f32le",
        decoded.to_str().unwrap(),
    ]);
    let doc = pair.json();
    eprintln!(
        "opus round trip: orders {:#}\nbands {:#}",
        doc["orders"], doc["bands"]
    );
    assert_eq!(doc["common_order"], 3);
    for order in doc["orders"].as_array().unwrap() {
        let coherence = f(&order["coherence"]);
        assert!(coherence < 0.97, "coherence did not drop: {order}");
    }
    let c = codes(&doc);
    assert!(c.contains(&"detail-lost".to_string()), "{c:?}");
    assert!(
        !c.iter().any(|c| c == "rotated" || c == "mirrored"),
        "{c:?}"
    );
    assert_no_channel_faults(&doc);
    assert!(f(&doc["rotation"]["yaw_deg"]).abs() < ANGLE_TOLERANCE_DEG);
}
