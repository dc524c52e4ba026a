//! End-to-end tests of `fieldglass scan` and `fieldglass demo`: files written with the WAV writer
//! from the plane-wave encoder with known directions, scanned by the built binary, and the JSON
//! checked against the truth that went in.
//!
//! Sources of the expected values:
//! - Directions: the directions handed to `PlaneWaveEncoder` (whose gains are checked against
//!   SciPy's spherical harmonics in dsp-core's reference tests).
//! - Order balance of N3D content read as SN3D: 10·log10(2n+1) = 4.771, 6.990, 8.451 dB for
//!   n = 1..3, from N3D = SN3D·sqrt(2n+1) and the SN3D addition theorem Σ_m Y_nm² = 1 (Zotter &
//!   Frank, "Ambisonics", Springer 2019, ch. 4; values computed).
//! - FuMa: W carries 1/√2 (−3.01 dB) (Malham's Furse-Malham tables, as used in dsp-core).
//! - Clip counts, silent channels, zeroed orders, extra channels: by construction of the files.

use fieldglass::wav::{SampleFormat, WavSpec, WavWriter, WriterOptions};
use fieldglass_dsp::encoder::PlaneWaveEncoder;
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::sh::channel_count;
use fieldglass_dsp::sphere::Direction;
use serde_json::Value;
use std::path::Path;
use std::process::{Command, Output};

const RATE: u32 = 48_000;
/// Tolerance on source directions from the whole-programme max-rE map (1° grid with sub-grid
/// refinement); our own bound, generous against the grid step.
const DIRECTION_TOLERANCE_DEG: f64 = 3.0;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fieldglass"))
}

/// Deterministic white noise in [−1, 1) (64-bit LCG, Knuth's MMIX constants).
fn noise(seed: u64, frames: usize) -> Vec<f32> {
    let mut state = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
    (0..frames)
        .map(|_| {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((state >> 40) as f32 / (1u64 << 24) as f32) * 2.0 - 1.0
        })
        .collect()
}

/// Encodes independent noise sources (direction, gain) into `format` at `order`.
fn encode(
    order: usize,
    format: AmbiFormat,
    sources: &[(Direction, f32)],
    frames: usize,
) -> Vec<Vec<f32>> {
    let mut encoder = PlaneWaveEncoder::new(order, format).unwrap();
    let mut planes = vec![vec![0.0f32; frames]; channel_count(order)];
    for (k, &(direction, gain)) in sources.iter().enumerate() {
        let signal = noise(k as u64 + 11, frames);
        let mut refs: Vec<&mut [f32]> = planes.iter_mut().map(|p| p.as_mut_slice()).collect();
        encoder.add_to(direction, gain, &signal, &mut refs);
    }
    planes
}

fn spec(channels: usize, bits: u16, format: SampleFormat) -> WavSpec {
    WavSpec {
        channels: channels as u16,
        sample_rate: RATE,
        bits_per_sample: bits,
        sample_format: format,
        channel_mask: None,
    }
}

fn write_wav(path: &Path, spec: WavSpec, options: WriterOptions, planes: &[Vec<f32>]) {
    let mut writer = WavWriter::with_options(path, spec, options).unwrap();
    let refs: Vec<&[f32]> = planes.iter().map(|p| p.as_slice()).collect();
    writer.write_planar(&refs).unwrap();
    writer.finalize().unwrap();
}

fn write_float(path: &Path, planes: &[Vec<f32>]) {
    write_wav(
        path,
        spec(planes.len(), 32, SampleFormat::Float),
        WriterOptions::default(),
        planes,
    );
}

fn tmp() -> tempfile::TempDir {
    tempfile::tempdir().unwrap()
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().unwrap()
}

/// Scans `path` with `--json -` plus `extra` and returns the parsed document.
fn scan_json(path: &Path, extra: &[&str]) -> Value {
    let mut args = vec!["scan", path.to_str().unwrap(), "--json", "-"];
    args.extend_from_slice(extra);
    let out = run(&args);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "scan failed: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "stdout is not JSON ({e}): {}",
            String::from_utf8_lossy(&out.stdout)
        )
    })
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

fn angle_between(az_deg: f64, el_deg: f64, truth: Direction) -> f64 {
    Direction::new(az_deg, el_deg).angle_to_deg(&truth)
}

/// Asserts that the strongest two sources of `doc` are `truth[0]` and `truth[1]` in that order.
fn assert_sources(doc: &Value, truth: &[Direction], label: &str) {
    let sources = doc["sources"].as_array().unwrap();
    assert!(sources.len() >= truth.len(), "{label}: {sources:?}");
    for (s, t) in sources.iter().zip(truth) {
        let err = angle_between(f(&s["azimuth_deg"]), f(&s["elevation_deg"]), *t);
        assert!(
            err < DIRECTION_TOLERANCE_DEG,
            "{label}: source {s} is {err:.2}° from {t:?}"
        );
    }
    assert_eq!(
        f(&sources[0]["level_db"]),
        0.0,
        "{label}: strongest reads 0 dB"
    );
}

fn two_sources() -> ([Direction; 2], [f32; 2]) {
    // Front-left slightly up, and back-right slightly down; the second 6 dB weaker.
    (
        [Direction::new(30.0, 10.0), Direction::new(-110.0, -20.0)],
        [0.4, 0.2],
    )
}

#[test]
fn directions_found_in_every_sample_format_and_container() {
    let dir = tmp();
    let (truth, gains) = two_sources();
    let sources: Vec<(Direction, f32)> = truth.iter().copied().zip(gains).collect();
    let planes = encode(3, AmbiFormat::ACN_SN3D, &sources, RATE as usize / 2);
    let cases: [(&str, u16, SampleFormat, WriterOptions); 6] = [
        ("pcm16", 16, SampleFormat::Int, WriterOptions::default()),
        (
            "pcm24",
            24,
            SampleFormat::Int,
            WriterOptions {
                rf64: false,
                extensible: true,
            },
        ),
        ("pcm32", 32, SampleFormat::Int, WriterOptions::default()),
        ("float32", 32, SampleFormat::Float, WriterOptions::default()),
        (
            "float64",
            64,
            SampleFormat::Float,
            WriterOptions {
                rf64: true,
                extensible: true,
            },
        ),
        (
            "pcm24-rf64",
            24,
            SampleFormat::Int,
            WriterOptions {
                rf64: true,
                extensible: false,
            },
        ),
    ];
    for (name, bits, format, options) in cases {
        let path = dir.path().join(format!("{name}.wav"));
        write_wav(&path, spec(16, bits, format), options, &planes);
        let doc = scan_json(&path, &[]);
        assert_eq!(doc["schema"], "fieldglass-scan/1");
        assert_eq!(doc["input"]["channels"], 16);
        assert_eq!(doc["input"]["frames"], RATE / 2);
        assert_eq!(f(&doc["input"]["duration_s"]), 0.5);
        assert_eq!(
            doc["input"]["sample_format"],
            name.split('-').next().unwrap()
        );
        if options.rf64 {
            assert_eq!(doc["input"]["container"], "rf64", "{name}");
        }
        assert_sources(&doc, &truth, name);
        // 6 dB between the two sources by construction; the max-rE beam of one source leaks a
        // little into the other's direction, so allow 1 dB (our own bound).
        let second = f(&doc["sources"][1]["level_db"]);
        assert!(
            (second + 6.02).abs() < 1.0,
            "{name}: second source at {second} dB"
        );
        assert!(
            doc["findings"]
                .as_array()
                .unwrap()
                .iter()
                .all(|x| x["code"] != "clipping"),
            "{name}"
        );
    }
}

#[test]
fn every_method_finds_a_single_source() {
    let dir = tmp();
    let truth = Direction::new(-60.0, 25.0);
    let planes = encode(2, AmbiFormat::ACN_SN3D, &[(truth, 0.3)], RATE as usize / 2);
    let path = dir.path().join("one.wav");
    write_float(&path, &planes);
    for method in ["max-re", "basic", "in-phase", "mvdr", "music"] {
        let doc = scan_json(&path, &["--method", method]);
        assert_eq!(doc["analysis"]["method"], method);
        assert_sources(&doc, &[truth], method);
    }
}

#[test]
fn order_balance_shows_n3d_content_read_as_sn3d() {
    let dir = tmp();
    let sources = [
        (Direction::new(10.0, 0.0), 0.3),
        (Direction::new(120.0, 40.0), 0.3),
        (Direction::new(-90.0, -30.0), 0.3),
    ];
    let planes = encode(3, AmbiFormat::ACN_N3D, &sources, RATE as usize / 2);
    let path = dir.path().join("n3d.wav");
    write_float(&path, &planes);
    let doc = scan_json(&path, &[]);
    let balance: Vec<f64> = doc["order_balance_db"]
        .as_array()
        .unwrap()
        .iter()
        .map(f)
        .collect();
    // 10·log10(2n+1) (see the module comment).
    let expected = [0.0, 4.771, 6.990, 8.451];
    for (n, (b, e)) in balance.iter().zip(expected).enumerate() {
        assert!(
            (b - e).abs() < 0.3,
            "order {n}: {b} dB, expected {e} dB ({balance:?})"
        );
    }
    // Read correctly, the same content balances at 0 dB per order (addition theorem).
    let doc = scan_json(&path, &["--assume", "acn-n3d"]);
    for (n, b) in doc["order_balance_db"]
        .as_array()
        .unwrap()
        .iter()
        .map(f)
        .enumerate()
    {
        assert!(
            b.abs() < 0.3,
            "order {n}: {b} dB under the right assumption"
        );
    }
    assert_eq!(doc["assumed"]["normalization"], "n3d");
}

#[test]
fn detects_the_format_of_sn3d_n3d_and_fuma_content() {
    let dir = tmp();
    let sources = [
        (Direction::new(40.0, 10.0), 0.3),
        (Direction::new(-100.0, -15.0), 0.2),
        (Direction::new(170.0, 50.0), 0.15),
    ];
    for (format, ordering, normalization) in [
        (AmbiFormat::ACN_SN3D, "acn", "sn3d"),
        (AmbiFormat::ACN_N3D, "acn", "n3d"),
        (AmbiFormat::FUMA, "fuma", "maxn"),
    ] {
        let planes = encode(3, format, &sources, RATE as usize);
        let path = dir.path().join(format!("{}.wav", format.label()));
        write_float(&path, &planes);
        let doc = scan_json(&path, &[]);
        let detected = &doc["detected"];
        assert_eq!(
            detected["ordering"],
            ordering,
            "{}: {detected}",
            format.label()
        );
        assert_eq!(
            detected["normalization"],
            normalization,
            "{}: {detected}",
            format.label()
        );
        assert_eq!(detected["order"], 3);
        let mismatch = doc["findings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|x| x["code"] == "format-mismatch");
        assert_eq!(
            mismatch,
            format != AmbiFormat::ACN_SN3D,
            "{}: {}",
            format.label(),
            doc["findings"]
        );
        // Read as what it is, the directions come out right.
        let assume = format.label();
        let doc = scan_json(&path, &["--assume", assume]);
        assert_sources(&doc, &[sources[0].0, sources[1].0], assume);
    }
}

#[test]
fn clipped_samples_are_counted_and_fail_on_exits_3() {
    let dir = tmp();
    let mut planes = encode(
        1,
        AmbiFormat::ACN_SN3D,
        &[(Direction::new(0.0, 0.0), 0.2)],
        RATE as usize / 2,
    );
    // Five samples at or beyond full scale on W, by construction.
    for (k, v) in [1.0f32, -1.0, 1.5, -2.0, 1.0].into_iter().enumerate() {
        planes[0][1000 + 97 * k] = v;
    }
    let path = dir.path().join("clipped.wav");
    write_float(&path, &planes);
    let doc = scan_json(&path, &[]);
    assert_eq!(doc["channels"][0]["clipped_samples"], 5);
    assert_eq!(doc["channels"][1]["clipped_samples"], 0);
    // Peak of the file = the 2.0 sample: +6.02 dBFS.
    assert!((f(&doc["channels"][0]["peak_dbfs"]) - 6.0206).abs() < 0.01);
    let clip = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["code"] == "clipping")
        .expect("clipping finding");
    assert_eq!(clip["severity"], "error");
    assert_eq!(clip["channels"], serde_json::json!([0]));

    let out = run(&["scan", path.to_str().unwrap(), "--fail-on", "error"]);
    assert_eq!(
        out.status.code(),
        Some(3),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(String::from_utf8_lossy(&out.stderr).contains("clipping"));
    let clean = dir.path().join("clean.wav");
    // Off-axis, so that no component is zero (a frontal source leaves Y and Z silent).
    write_float(
        &clean,
        &encode(
            1,
            AmbiFormat::ACN_SN3D,
            &[(Direction::new(30.0, 20.0), 0.2)],
            RATE as usize / 2,
        ),
    );
    let out = run(&["scan", clean.to_str().unwrap(), "--fail-on", "warning"]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stdout)
    );
}

#[test]
fn integer_pcm_clips_count_on_both_sides_with_the_longest_run() {
    // Integer PCM cannot reach +1.0: the highest 24-bit code reads 1 − 2⁻²³ (code / 2²³, the
    // usual reading of WAV PCM — common practice). A signal driven past full scale is stored at
    // either extreme code; both count. 100 samples at each extreme, the longest run 7.
    let dir = tmp();
    let mut planes = encode(
        1,
        AmbiFormat::ACN_SN3D,
        &[(Direction::new(30.0, 20.0), 0.2)],
        RATE as usize / 2,
    );
    let mut k = 1000;
    for run in 0..40 {
        let length = if run == 0 { 7 } else { 5 + (run % 2) };
        let level = if run % 2 == 0 { 1.7f32 } else { -1.3 };
        for _ in 0..length {
            planes[1][k] = level;
            k += 1;
        }
        k += 300;
    }
    // Runs of 7 + 19·5 positive and 20·6 negative samples: trimmed to exactly 100 per sign.
    let (mut positive, mut negative) = (0, 0);
    for v in planes[1].iter_mut() {
        if *v >= 1.0 {
            positive += 1;
            if positive > 100 {
                *v = 0.5;
            }
        } else if *v <= -1.0 {
            negative += 1;
            if negative > 100 {
                *v = -0.5;
            }
        }
    }
    assert!(positive >= 100 && negative >= 100);
    let path = dir.path().join("clipped-24.wav");
    write_wav(
        &path,
        spec(4, 24, SampleFormat::Int),
        WriterOptions::default(),
        &planes,
    );
    let doc = scan_json(&path, &[]);
    assert_eq!(
        doc["channels"][1]["clipped_samples"], 200,
        "{}",
        doc["channels"][1]
    );
    assert_eq!(doc["channels"][1]["longest_clip_run"], 7);
    assert_eq!(doc["channels"][0]["clipped_samples"], 0);
    let clip = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["code"] == "clipping")
        .expect("clipping finding");
    assert_eq!(clip["channels"], serde_json::json!([1]));
}

#[test]
fn silent_channel_is_reported() {
    let dir = tmp();
    let mut planes = encode(
        1,
        AmbiFormat::ACN_SN3D,
        &[(Direction::new(45.0, 20.0), 0.3)],
        RATE as usize / 2,
    );
    planes[2].fill(0.0); // Z (ACN 2) dead, by construction
    let path = dir.path().join("dead-z.wav");
    write_float(&path, &planes);
    let doc = scan_json(&path, &[]);
    assert_eq!(doc["channels"][2]["silent"], true);
    assert!(
        doc["channels"][2]["rms_dbfs"].is_null(),
        "no level for a dead channel"
    );
    for c in [0, 1, 3] {
        assert_eq!(doc["channels"][c]["silent"], false);
    }
    let finding = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["code"] == "silent-channel")
        .expect("finding");
    assert_eq!(finding["channels"], serde_json::json!([2]));
    let out = run(&["scan", path.to_str().unwrap(), "--fail-on", "warning"]);
    assert_eq!(out.status.code(), Some(3));
}

#[test]
fn effective_order_of_an_order_3_file_with_empty_orders_2_and_3() {
    let dir = tmp();
    let sources = [
        (Direction::new(20.0, 0.0), 0.3),
        (Direction::new(-120.0, 30.0), 0.3),
    ];
    let mut planes = encode(3, AmbiFormat::ACN_SN3D, &sources, RATE as usize / 2);
    for plane in &mut planes[4..] {
        plane.fill(0.0);
    }
    let path = dir.path().join("first-order-in-third.wav");
    write_float(&path, &planes);
    let doc = scan_json(&path, &[]);
    assert_eq!(doc["detected"]["order"], 3);
    assert_eq!(doc["detected"]["effective_order"], 1, "{}", doc["detected"]);
    assert!(
        doc["findings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|x| x["code"] == "order-deficit"),
        "{}",
        doc["findings"]
    );
}

#[test]
fn extra_channels_are_reported_separately() {
    let dir = tmp();
    let truth = Direction::new(-35.0, 5.0);
    let mut planes = encode(1, AmbiFormat::ACN_SN3D, &[(truth, 0.3)], RATE as usize / 2);
    planes.push(
        noise(99, RATE as usize / 2)
            .iter()
            .map(|x| x * 0.5)
            .collect(),
    ); // e.g. a mono guide
    planes.push(vec![0.0; RATE as usize / 2]); // e.g. an empty timecode track
    let path = dir.path().join("four-plus-two.wav");
    write_float(&path, &planes);
    let doc = scan_json(&path, &[]);
    assert_eq!(doc["input"]["channels"], 6);
    assert_eq!(doc["input"]["spatial_channels"], 4);
    assert_eq!(doc["input"]["extra_channels"], 2);
    assert_eq!(doc["channels"].as_array().unwrap().len(), 4);
    let extra = doc["extra_channels"].as_array().unwrap();
    assert_eq!(extra.len(), 2);
    assert_eq!(extra[0]["index"], 4);
    assert_eq!(extra[1]["index"], 5);
    assert_eq!(extra[1]["silent"], true);
    // Uniform noise in [−0.5, 0.5): RMS 0.5/√3 → −10.79 dBFS.
    assert!(
        (f(&extra[0]["rms_dbfs"]) + 10.79).abs() < 0.1,
        "{}",
        extra[0]
    );
    assert_sources(&doc, &[truth], "with extra channels");
    // An empty extra channel is not a silent spatial channel.
    assert!(
        doc["findings"]
            .as_array()
            .unwrap()
            .iter()
            .all(|x| x["code"] != "silent-channel"),
        "{}",
        doc["findings"]
    );
}

/// Runs a scan that must fail with exit code 2 and one clear line naming the file.
fn assert_input_error(path: &Path, needle: &str) {
    let out = run(&["scan", path.to_str().unwrap(), "--json", "-"]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{}: {stderr}", path.display());
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(stderr.starts_with("fieldglass: "), "{stderr}");
    assert_eq!(stderr.trim_end().lines().count(), 1, "one line: {stderr}");
    assert!(
        stderr.contains(&*path.display().to_string()),
        "names the file: {stderr}"
    );
    assert!(
        stderr.to_lowercase().contains(needle),
        "says '{needle}': {stderr}"
    );
    assert!(out.stdout.is_empty(), "no JSON on failure");
}

fn valid_bytes(channels: usize, frames: usize) -> Vec<u8> {
    let dir = tmp();
    let path = dir.path().join("v.wav");
    write_wav(
        &path,
        spec(channels, 16, SampleFormat::Int),
        WriterOptions::default(),
        &vec![vec![0.1f32; frames]; channels],
    );
    std::fs::read(path).unwrap()
}

#[test]
fn bad_inputs_exit_2_with_a_clear_message() {
    let dir = tmp();
    let p = |name: &str| dir.path().join(name);
    let good = valid_bytes(4, 1000);
    // Start of the sample data: just after the "data" chunk id and its 32-bit size.
    let data = good
        .windows(4)
        .position(|w| w == b"data")
        .expect("data chunk")
        + 8;

    std::fs::write(p("empty.wav"), b"").unwrap();
    assert_input_error(&p("empty.wav"), "empty");

    std::fs::write(p("short-header.wav"), &good[..data / 2]).unwrap();
    assert_input_error(&p("short-header.wav"), "truncated");

    std::fs::write(p("short-data.wav"), &good[..data + 1000]).unwrap();
    assert_input_error(&p("short-data.wav"), "data");

    std::fs::write(p("text.wav"), b"this is not a sound file at all\n").unwrap();
    assert_input_error(&p("text.wav"), "riff");

    let mut zero = good[..data].to_vec();
    zero[data - 4..data].copy_from_slice(&0u32.to_le_bytes());
    let riff_size = (data - 8) as u32;
    zero[4..8].copy_from_slice(&riff_size.to_le_bytes());
    std::fs::write(p("zero-frames.wav"), &zero).unwrap();
    assert_input_error(&p("zero-frames.wav"), "no audio frames");

    std::fs::write(p("seven.wav"), valid_bytes(7, 100)).unwrap();
    assert_input_error(&p("seven.wav"), "7 channels");

    let mut huge = good[..data + 64].to_vec();
    huge[4..8].copy_from_slice(&u32::MAX.wrapping_sub(8).to_le_bytes());
    huge[data - 4..data].copy_from_slice(&0xFFFF_FFF0u32.to_le_bytes());
    std::fs::write(p("huge.wav"), &huge).unwrap();
    assert_input_error(&p("huge.wav"), "data");

    assert_input_error(&p("missing.wav"), "cannot read");

    // A directory is not a file.
    assert_input_error(dir.path(), "cannot read");

    // FuMa is defined to third order only: a 25-channel file cannot be read as FuMa.
    write_float(&p("order4.wav"), &vec![noise(5, 2000); 25]);
    let out = run(&[
        "scan",
        p("order4.wav").to_str().unwrap(),
        "--assume",
        "fuma",
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("order 4") || stderr.contains("third") || stderr.contains("3"),
        "{stderr}"
    );
}

#[test]
fn usage_errors_exit_2() {
    for args in [
        vec!["scan"],
        vec!["scan", "x.wav", "--band", "4000-250"],
        vec!["scan", "x.wav", "--band", "low-high"],
        vec!["scan", "x.wav", "--assume", "ambix"],
        vec!["scan", "x.wav", "--fail-on", "info"],
        vec!["scan", "--demo", "--order", "9"],
        vec!["demo"],
        vec!["frobnicate"],
    ] {
        let out = run(&args);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(!stderr.contains("panicked"), "{stderr}");
    }
    // Band edges above the Nyquist frequency of the input.
    let out = run(&[
        "scan",
        "--demo",
        "--seconds",
        "0.5",
        "--band",
        "250-30000",
        "--json",
        "-",
    ]);
    assert_eq!(
        out.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn demo_written_then_scanned_and_reported() {
    let dir = tmp();
    let wav = dir.path().join("terrace.wav");
    let out = run(&[
        "demo",
        "--write",
        wav.to_str().unwrap(),
        "--order",
        "2",
        "--seconds",
        "1.5",
        "--sample-format",
        "pcm24",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let doc = scan_json(&wav, &["--band", "300-3000"]);
    assert_eq!(doc["input"]["channels"], 9);
    assert_eq!(doc["input"]["frames"], 72_000);
    assert_eq!(doc["input"]["sample_format"], "pcm24");
    assert_eq!(
        doc["analysis"]["band_edges_hz"],
        serde_json::json!([300.0, 3000.0])
    );
    assert_eq!(doc["bands"][2]["low_hz"], 300.0);
    assert!(
        doc["omni"]["integrated_lufs"].is_number(),
        "{}",
        doc["omni"]
    );
    assert!(!doc["sources"].as_array().unwrap().is_empty());

    let report = dir.path().join("report");
    let out = run(&[
        "scan",
        wav.to_str().unwrap(),
        "--report",
        report.to_str().unwrap(),
    ]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        stdout.contains("report.html"),
        "summary says where: {stdout}"
    );
    assert!(stdout.contains("LUFS"), "{stdout}");
    let html = std::fs::read_to_string(report.join("report.html")).unwrap();
    assert_report_pictures_are_svg(&html);
    assert!(
        html.contains(fieldglass_dsp::wording::CAUTION),
        "the one caution"
    );
    for name in [
        "map-full.png",
        "map-low.png",
        "map-mid.png",
        "map-high.png",
        "timeline.png",
        "order-balance.png",
    ] {
        let png = std::fs::read(report.join(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n", "{name}");
    }
    let twin: Value =
        serde_json::from_slice(&std::fs::read(report.join("scan.json")).unwrap()).unwrap();
    assert_eq!(twin["schema"], "fieldglass-scan/1");
}

#[test]
fn scan_demo_prints_a_summary() {
    let out = run(&["scan", "--demo", "--order", "1", "--seconds", "1"]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    for needle in ["demo scene", "format:", "omni (W)", "sources:", "findings"] {
        assert!(stdout.contains(needle), "{needle}: {stdout}");
    }
    let out = run(&[
        "scan",
        "--demo",
        "--order",
        "1",
        "--seconds",
        "1",
        "--json",
        "-",
    ]);
    let doc: Value = serde_json::from_slice(&out.stdout).expect("only JSON on stdout");
    assert_eq!(doc["input"]["demo"], true);
    assert!(doc["input"]["path"].is_null());
}

#[test]
fn amb_file_with_a_fuma_horizontal_set_is_read_as_fuma_at_second_order() {
    // A 5-channel AMB B-format file (FuMa W X Y U V: the second-order horizontal set of the
    // Furse-Malham scheme) holding two sources on the horizon. Declared B-format → read as FuMa
    // without --assume; the set is analysed as second order with R, S, T and Z absent (not silent).
    // Read as first order plus an extra channel instead, U would be taken as Z and the sources
    // would rise off the horizon.
    let dir = tmp();
    let truth = [Direction::new(30.0, 0.0), Direction::new(-120.0, 0.0)];
    let full = encode(
        2,
        AmbiFormat::FUMA,
        &[(truth[0], 0.3), (truth[1], 0.2)],
        RATE as usize,
    );
    // FuMa letter order W X Y Z R S T U V: keep W X Y U V.
    let planes: Vec<Vec<f32>> = [0, 1, 2, 7, 8].iter().map(|&k| full[k].clone()).collect();
    let path = dir.path().join("horizontal.amb");
    let mut writer = WavWriter::create_b_format(
        &path,
        spec(5, 32, SampleFormat::Float),
        WriterOptions::default(),
    )
    .unwrap();
    let refs: Vec<&[f32]> = planes.iter().map(|p| p.as_slice()).collect();
    writer.write_planar(&refs).unwrap();
    writer.finalize().unwrap();

    let doc = scan_json(&path, &[]);
    assert_eq!(doc["assumed"]["ordering"], "fuma");
    assert_eq!(doc["assumed"]["source"], "metadata");
    assert_eq!(doc["assumed"]["order"], 2);
    assert_eq!(doc["input"]["declares_b_format"], true);
    assert_eq!(doc["input"]["mixed_order_set"], "WXYUV");
    let rows: Vec<u64> = doc["channels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["index"].as_u64().unwrap())
        .collect();
    assert_eq!(rows, [0, 1, 2, 3, 4], "one row per file channel");
    assert_sources(&doc, &truth, "WXYUV");
    let findings = doc["findings"].as_array().unwrap();
    assert!(
        findings.iter().all(|x| x["severity"] == "info"),
        "{findings:?}"
    );
    assert!(!findings.iter().any(|x| x["code"] == "silent-channel"));

    // --assume wins over the declaration.
    let doc = scan_json(&path, &["--assume", "acn-sn3d"]);
    assert_eq!(doc["assumed"]["source"], "option");
    assert_eq!(doc["assumed"]["order"], 1);
}

/// The report's pictures are inline SVG whose labels are text the browser draws; only the heat
/// maps are rasters, embedded as PNG data URIs inside the SVG; nothing is fetched.
fn assert_report_pictures_are_svg(html: &str) {
    let svgs: Vec<&str> = html
        .split("<svg")
        .skip(1)
        .map(|rest| &rest[..rest.find("</svg>").expect("closed svg")])
        .collect();
    // Four band maps, the timeline and the order balance.
    assert_eq!(svgs.len(), 6, "inline pictures");
    for svg in &svgs {
        assert!(svg.contains("<text"), "labels are text");
    }
    let maps: Vec<&&str> = svgs
        .iter()
        .filter(|svg| svg.contains("<image") && svg.contains("href=\"data:image/png;base64,"))
        .collect();
    assert_eq!(maps.len(), 4, "each band's heat map embedded in its SVG");
    for map in &maps {
        for word in ["front", "left", "right", "back"] {
            assert!(map.contains(&format!(">{word}</text>")), "{word}");
        }
    }
    assert!(!html.contains("<img"), "no picture outside the SVG");
    // The only URL is the SVG namespace, which is a name, not a fetch.
    let without_namespace = html.replace("xmlns=\"http://www.w3.org/2000/svg\"", "");
    assert!(
        !without_namespace.contains("http://") && !without_namespace.contains("https://"),
        "no external resources"
    );
}

/// Words a person reads for a channel louder than W, other than the one name.
const OTHER_NAMES_FOR_LOUDER_THAN_W: [&str; 5] = [
    "over W",
    "Louder than W",
    "over-omni",
    "over omni",
    "Over W",
];

#[test]
fn louder_than_w_has_one_name_in_summary_and_report() {
    // First order SN3D, three independent sources (one alone would make all four channels
    // coherent, which reads as capsule signals); channel 2 (Y, ACN 1) boosted ×4 (+12 dB), so
    // its SN3D level exceeds W's by more than the 0.5 dB tolerance: by construction.
    let dir = tmp();
    let mut planes = encode(
        1,
        AmbiFormat::ACN_SN3D,
        &[
            (Direction::new(30.0, 20.0), 0.2),
            (Direction::new(-100.0, -10.0), 0.15),
            (Direction::new(150.0, 40.0), 0.12),
        ],
        RATE as usize,
    );
    for v in planes[1].iter_mut() {
        *v *= 4.0;
    }
    let path = dir.path().join("boosted-y.wav");
    write_float(&path, &planes);
    let doc = scan_json(&path, &[]);
    let finding = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["code"] == "over-omni")
        .unwrap_or_else(|| panic!("the JSON code stays over-omni: {}", doc["findings"]));
    assert_eq!(finding["channels"], serde_json::json!([1]));

    let report = dir.path().join("report");
    let out = run(&[
        "scan",
        path.to_str().unwrap(),
        "--report",
        report.to_str().unwrap(),
    ]);
    assert!(out.status.success());
    let stdout = String::from_utf8_lossy(&out.stdout).to_string();
    let html = std::fs::read_to_string(report.join("report.html")).unwrap();
    for (name, text) in [("summary", &stdout), ("report", &html)] {
        assert!(
            text.contains("channel 2 (ACN 1) is louder than W"),
            "{name}: {text}"
        );
        for other in OTHER_NAMES_FOR_LOUDER_THAN_W {
            assert!(!text.contains(other), "{name} says {other:?}");
        }
    }
}

#[test]
fn findings_on_a_fuma_file_name_file_channels_with_their_acn() {
    // Second-order FuMa, file order W X Y Z R S T U V (Furse-Malham letter order). File
    // channel 5 is R, degree 2 order 0: ACN = n(n+1)+m = 6. Killing it must read
    // "channel 5 (ACN 6)", not channel 7 and not ACN 4.
    let dir = tmp();
    let mut planes = encode(
        2,
        AmbiFormat::FUMA,
        &[
            (Direction::new(30.0, 20.0), 0.3),
            (Direction::new(-110.0, -25.0), 0.2),
        ],
        RATE as usize,
    );
    planes[4].fill(0.0);
    let path = dir.path().join("fuma-dead-r.wav");
    write_float(&path, &planes);
    let doc = scan_json(&path, &["--assume", "fuma"]);
    assert_eq!(doc["channels"][4]["acn"], 6);
    let silent = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["code"] == "silent-channel")
        .expect("silent channel found");
    assert_eq!(
        silent["channels"],
        serde_json::json!([4]),
        "0-based in JSON"
    );
    assert_eq!(
        silent["message"],
        "channel 5 (ACN 6) carries no signal while W does"
    );
    let out = run(&["scan", path.to_str().unwrap(), "--assume", "fuma"]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(stdout.contains("channel 5 (ACN 6)"), "{stdout}");
}

#[test]
fn findings_on_a_fuma_horizontal_set_name_the_file_channel() {
    // FuMa W X Y U V (5 file channels) is analysed as second order with R, S, T, Z absent.
    // File channel 4 is U, degree 2 order 2: ACN 8. Killed, it must be named by its place in
    // the file (4), not in the expanded second-order layout (8).
    let dir = tmp();
    let full = encode(
        2,
        AmbiFormat::FUMA,
        &[
            (Direction::new(30.0, 0.0), 0.3),
            (Direction::new(-120.0, 0.0), 0.2),
        ],
        RATE as usize,
    );
    let mut planes: Vec<Vec<f32>> = [0, 1, 2, 7, 8].iter().map(|&k| full[k].clone()).collect();
    planes[3].fill(0.0);
    let path = dir.path().join("horizontal-dead-u.amb");
    let mut writer = WavWriter::create_b_format(
        &path,
        spec(5, 32, SampleFormat::Float),
        WriterOptions::default(),
    )
    .unwrap();
    let refs: Vec<&[f32]> = planes.iter().map(|p| p.as_slice()).collect();
    writer.write_planar(&refs).unwrap();
    writer.finalize().unwrap();
    let doc = scan_json(&path, &[]);
    assert_eq!(doc["input"]["mixed_order_set"], "WXYUV");
    let silent = doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["code"] == "silent-channel")
        .unwrap_or_else(|| panic!("silent channel found: {}", doc["findings"]));
    assert_eq!(silent["channels"], serde_json::json!([3]));
    assert_eq!(
        silent["message"],
        "channel 4 (ACN 8) carries no signal while W does"
    );
}

#[test]
fn the_readme_carries_the_one_caution() {
    let readme = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/../README.md"))
        .expect("README next to the workspace");
    let words = |text: &str| text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        words(&readme).contains(fieldglass_dsp::wording::CAUTION),
        "README's caution differs from wording::CAUTION"
    );
}

/// RGB of pixel (x, y) of a PNG file written by the report (8-bit RGB).
fn png_pixel(path: &Path, x: usize, y: usize) -> [u8; 3] {
    let decoder = png::Decoder::new(std::fs::File::open(path).unwrap());
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    assert_eq!(info.color_type, png::ColorType::Rgb);
    let i = 3 * (y * info.width as usize + x);
    [buf[i], buf[i + 1], buf[i + 2]]
}

/// Pixel of the report's map picture at a direction: 2 pixels per degree, azimuth +180° at the
/// left edge of the map area (the layout of `charts::map_drawing`).
fn map_pixel(path: &Path, azimuth_deg: f64, elevation_deg: f64) -> [u8; 3] {
    use fieldglass::scan::charts::{MAP_LEFT, MAP_TOP};
    let x = MAP_LEFT + (180.0 - azimuth_deg) * 2.0;
    let y = MAP_TOP + (90.0 - elevation_deg) * 2.0;
    png_pixel(path, x as usize, y as usize)
}

#[test]
fn picture_behind_the_report_maps_with_yaw_and_opacity() {
    let dir = tmp();
    let planes = encode(
        1,
        AmbiFormat::ACN_SN3D,
        &[(Direction::new(-30.0, 0.0), 0.3)],
        RATE as usize / 2,
    );
    let wav = dir.path().join("one-source.wav");
    write_float(&wav, &planes);
    // A 64×32 equirectangular still: red on its left half (azimuth > 0), black on its right.
    let (w, h) = (64, 32);
    let mut rgba = Vec::with_capacity(w * h * 4);
    for _ in 0..h {
        for x in 0..w {
            rgba.extend_from_slice(if x < w / 2 {
                &[255, 0, 0, 255]
            } else {
                &[0, 0, 0, 255]
            });
        }
    }
    let still = dir.path().join("still.png");
    fieldglass::picture::write_png(
        &still,
        &fieldglass::picture::Picture {
            width: w,
            height: h,
            rgba,
        },
    )
    .unwrap();
    let scan_with = |report: &Path, yaw: &str| {
        let out = run(&[
            "scan",
            wav.to_str().unwrap(),
            "--report",
            report.to_str().unwrap(),
            "--picture",
            still.to_str().unwrap(),
            "--picture-opacity",
            "1",
            "--picture-yaw",
            yaw,
        ]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        report.join("map-full.png")
    };
    // Opacity 1 shows the picture alone; away from grid lines and markers.
    let straight = scan_with(&dir.path().join("straight"), "0");
    assert_eq!(map_pixel(&straight, 75.0, 45.0), [255, 0, 0], "left is red");
    assert_eq!(
        map_pixel(&straight, -105.0, 45.0),
        [0, 0, 0],
        "right is black"
    );
    // Turned by 180°: the picture's left half now lies on the scene's right.
    let turned = scan_with(&dir.path().join("turned"), "180");
    assert_eq!(map_pixel(&turned, 75.0, 45.0), [0, 0, 0]);
    assert_eq!(map_pixel(&turned, -105.0, 45.0), [255, 0, 0]);
    let html = std::fs::read_to_string(dir.path().join("turned/report.html")).unwrap();
    assert!(html.contains("Behind the maps"), "the report says so");
}

#[test]
fn a_missing_or_broken_picture_stops_before_the_scan() {
    let dir = tmp();
    let wav = dir.path().join("short.wav");
    write_float(
        &wav,
        &encode(
            1,
            AmbiFormat::ACN_SN3D,
            &[(Direction::new(0.0, 0.0), 0.3)],
            4800,
        ),
    );
    let broken = dir.path().join("broken.png");
    std::fs::write(&broken, b"\x89PNG\r\n\x1a\nnot really").unwrap();
    let text = dir.path().join("notes.png");
    std::fs::write(&text, b"a text file").unwrap();
    let missing = dir.path().join("missing.jpg");
    for (picture, needle) in [
        (&missing, "cannot read the picture"),
        (&broken, "cannot be decoded"),
        (&text, "not a PNG or JPEG"),
    ] {
        let report = dir.path().join("report");
        let out = run(&[
            "scan",
            wav.to_str().unwrap(),
            "--report",
            report.to_str().unwrap(),
            "--picture",
            picture.to_str().unwrap(),
        ]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{stderr}");
        assert!(stderr.contains(needle), "{needle}: {stderr}");
        assert!(!stderr.contains("panicked"), "{stderr}");
        assert!(!report.exists(), "stopped before the scan and the report");
    }
    // A picture without a report has nowhere to go: a usage error.
    let out = run(&[
        "scan",
        wav.to_str().unwrap(),
        "--picture",
        missing.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2));
}
