//! BW64 files with ADM metadata (ITU-R BS.2088 `chna`, ITU-R BS.2076 `axml`, ITU-R BS.2094
//! common definitions) scanned end to end.
//!
//! Sources of the expected values:
//! - `data/adm/ear-*.wav` were written by the EBU ADM Renderer (PyPI `ear` 2.1.0,
//!   `ear-utils ambix_to_bwf`), a reference implementation of ITU-R BS.2127, from a scene
//!   encoded with its own spherical harmonics (`tests/reference-scripts/make_adm_fixtures.py`):
//!   the declared normalization and pack IDs are ear's, the content's normalization is known.
//! - The metadata `fieldglass demo --adm` writes was read back by the same renderer's ADM parser
//!   (`openBw64Adm`): pack, per-track order/degree/normalization as written (checked by hand
//!   with `tests/reference-scripts/adm_read_with_ear.py`; not run in CI).
//! - Directions of the routed file: the directions handed to `PlaneWaveEncoder`.

use fieldglass::wav::{SampleFormat, WavSpec, WavWriter, WriterOptions};
use fieldglass_dsp::encoder::PlaneWaveEncoder;
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::sphere::Direction;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::Command;

const RATE: u32 = 48_000;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_fieldglass"))
}

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/adm")
        .join(name)
}

/// Scans `path` (with extra arguments) and returns the exit code and the JSON document.
fn scan(path: &Path, extra: &[&str]) -> (i32, Value) {
    let out = bin()
        .arg("scan")
        .arg(path)
        .args(["--json", "-"])
        .args(extra)
        .output()
        .unwrap();
    let json = serde_json::from_slice(&out.stdout).unwrap_or_else(|e| {
        panic!(
            "no JSON ({e}); stderr: {}",
            String::from_utf8_lossy(&out.stderr)
        )
    });
    (out.status.code().unwrap(), json)
}

fn codes(doc: &Value) -> Vec<String> {
    doc["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["code"].as_str().unwrap().to_owned())
        .collect()
}

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

#[test]
fn files_written_by_the_reference_renderer_are_read_as_declared() {
    // ear's own pack (axml) and the BS.2094 common pack referenced from chna alone.
    for (name, pack_id, common) in [
        ("ear-order1-n3d.wav", None, false),
        ("ear-order1-n3d-common.wav", Some("AP_00040011"), true),
    ] {
        let (code, doc) = scan(&fixture(name), &[]);
        assert_eq!(code, 0, "{name}");
        assert_eq!(doc["assumed"]["source"], "metadata", "{name}");
        assert_eq!(doc["assumed"]["normalization"], "n3d", "{name}");
        assert_eq!(doc["assumed"]["ordering"], "acn", "{name}");
        let metadata = &doc["input"]["metadata"];
        assert_eq!(metadata["normalization"], "N3D");
        assert_eq!(metadata["order"], 1);
        assert_eq!(metadata["common_definitions"], common);
        if let Some(id) = pack_id {
            assert_eq!(metadata["pack_id"], id);
            assert_eq!(metadata["pack_name"], "3D_order1_N3D_ACN");
        }
        let tracks: Vec<(u64, u64)> = metadata["tracks"]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| (t["index"].as_u64().unwrap(), t["acn"].as_u64().unwrap()))
            .collect();
        assert_eq!(tracks, vec![(0, 0), (1, 1), (2, 2), (3, 3)]);
        assert_eq!(doc["detected"]["normalization"], "n3d", "{name}");
        assert!(codes(&doc).is_empty(), "{name}: {:?}", codes(&doc));
    }
}

#[test]
fn a_declaration_the_signal_contradicts_is_an_error() {
    // SN3D content that ear labelled N3D: exactly the mistake people ship.
    let path = fixture("ear-order1-sn3d-labelled-n3d.wav");
    let (code, doc) = scan(&path, &["--fail-on", "error"]);
    assert_eq!(code, 3);
    let findings = codes(&doc);
    assert!(
        findings.contains(&"metadata-mismatch".to_owned()),
        "{findings:?}"
    );
    // Same cause, reported once.
    assert!(
        !findings.contains(&"format-mismatch".to_owned()),
        "{findings:?}"
    );
    let finding = &doc["findings"][0];
    assert_eq!(finding["severity"], "error");
    assert!(finding["message"].as_str().unwrap().contains("ACN/N3D"));
    // The user's own assumption still wins, and the declaration is still checked.
    let (_, doc) = scan(&path, &["--assume", "acn-sn3d"]);
    assert_eq!(doc["assumed"]["source"], "option");
    assert_eq!(codes(&doc), vec!["metadata-mismatch".to_owned()]);
}

#[test]
fn the_demo_round_trips_through_its_adm_metadata_in_every_format() {
    let dir = tempfile::tempdir().unwrap();
    for (format, normalization, ordering) in [
        ("acn-sn3d", "SN3D", "acn"),
        ("acn-n3d", "N3D", "acn"),
        ("fuma", "FuMa", "fuma"),
    ] {
        let path = dir.path().join(format!("{format}.wav"));
        let status = bin()
            .args(["demo", "--write"])
            .arg(&path)
            .args([
                "--adm",
                "--format",
                format,
                "--seconds",
                "4",
                "--order",
                "2",
            ])
            .status()
            .unwrap();
        assert!(status.success());
        let (code, doc) = scan(&path, &[]);
        assert_eq!(code, 0);
        assert_eq!(doc["input"]["container"], "bw64");
        assert_eq!(doc["assumed"]["source"], "metadata");
        assert_eq!(doc["assumed"]["ordering"], ordering);
        assert_eq!(doc["input"]["metadata"]["normalization"], normalization);
        assert!(codes(&doc).is_empty(), "{format}: {:?}", codes(&doc));
    }
}

/// The ADM XML of a file whose channels 0 and 1 are objects and 2 … 10 an order-2 HOA pack
/// stored highest ACN first; `normalization` spelled as given.
fn routed_axml(normalization: &str) -> (String, Vec<u8>) {
    let mut xml = String::from(
        "<?xml version=\"1.0\"?><ebuCoreMain xmlns=\"urn:ebu:metadata-schema:ebuCore_2016\">\
         <coreMetadata><format><audioFormatExtended>\
         <audioPackFormat audioPackFormatID=\"AP_00041001\" audioPackFormatName=\"terrace\" \
         typeLabel=\"0004\" typeDefinition=\"HOA\"/>\
         <audioPackFormat audioPackFormatID=\"AP_00031001\" audioPackFormatName=\"bell\" \
         typeLabel=\"0003\" typeDefinition=\"Objects\"/>",
    );
    let mut chna = Vec::new();
    let mut entries = 0u16;
    let mut entry = |track: usize, uid: usize, track_ref: &str, pack: &str| {
        chna.extend_from_slice(&(track as u16 + 1).to_le_bytes());
        let mut fixed = |text: &str, width: usize| {
            let mut bytes = text.as_bytes().to_vec();
            bytes.resize(width, 0);
            chna.extend_from_slice(&bytes);
        };
        fixed(&format!("ATU_{uid:08x}"), 12);
        fixed(track_ref, 14);
        fixed(pack, 11);
        chna.push(0);
        entries += 1;
    };
    for object in 0..2 {
        let id = format!("{:04x}", 0x1001 + object);
        xml.push_str(&format!(
            "<audioChannelFormat audioChannelFormatID=\"AC_0003{id}\" \
             audioChannelFormatName=\"bell {object}\" typeDefinition=\"Objects\">\
             <audioBlockFormat audioBlockFormatID=\"AB_0003{id}_00000001\">\
             <position coordinate=\"azimuth\">0</position></audioBlockFormat></audioChannelFormat>\
             <audioStreamFormat audioStreamFormatID=\"AS_0003{id}\">\
             <audioChannelFormatIDRef>AC_0003{id}</audioChannelFormatIDRef></audioStreamFormat>\
             <audioTrackFormat audioTrackFormatID=\"AT_0003{id}_01\">\
             <audioStreamFormatIDRef>AS_0003{id}</audioStreamFormatIDRef></audioTrackFormat>"
        ));
        entry(
            object,
            object + 1,
            &format!("AT_0003{id}_01"),
            "AP_00031001",
        );
    }
    for k in 0..9 {
        let acn = 8 - k;
        let n = (acn as f64).sqrt() as i64;
        let m = acn as i64 - n * n - n;
        let id = format!("{:04x}", 0x1001 + k);
        xml.push_str(&format!(
            "<audioChannelFormat audioChannelFormatID=\"AC_0004{id}\" typeLabel=\"0004\">\
             <audioBlockFormat audioBlockFormatID=\"AB_0004{id}_00000001\">\
             <order>{n}</order><degree>{m}</degree><normalization>{normalization}</normalization>\
             </audioBlockFormat></audioChannelFormat>\
             <audioStreamFormat audioStreamFormatID=\"AS_0004{id}\">\
             <audioChannelFormatIDRef>AC_0004{id}</audioChannelFormatIDRef></audioStreamFormat>\
             <audioTrackFormat audioTrackFormatID=\"AT_0004{id}_01\">\
             <audioStreamFormatIDRef>AS_0004{id}</audioStreamFormatIDRef></audioTrackFormat>"
        ));
        entry(2 + k, 3 + k, &format!("AT_0004{id}_01"), "AP_00041001");
    }
    xml.push_str("</audioFormatExtended></format></coreMetadata></ebuCoreMain>");
    let mut body = Vec::new();
    body.extend_from_slice(&11u16.to_le_bytes());
    body.extend_from_slice(&entries.to_le_bytes());
    body.extend_from_slice(&chna);
    (xml, body)
}

/// Two order-2 N3D sources stored as in [`routed_axml`], objects of noise beside them.
fn write_routed(path: &Path, axml: &str, chna: &[u8], sources: &[Direction]) {
    let frames = 4 * RATE as usize;
    let mut encoder = PlaneWaveEncoder::new(2, AmbiFormat::ACN_N3D).unwrap();
    let mut hoa = vec![vec![0.0f32; frames]; 9];
    for (k, &direction) in sources.iter().enumerate() {
        let signal = noise(k as u64 + 3, frames);
        let mut refs: Vec<&mut [f32]> = hoa.iter_mut().map(|p| p.as_mut_slice()).collect();
        encoder.add_to(direction, 0.1, &signal, &mut refs);
    }
    let objects = [noise(40, frames), noise(41, frames)];
    let mut planes: Vec<&[f32]> = objects.iter().map(|o| o.as_slice()).collect();
    planes.extend((0..9).map(|k| hoa[8 - k].as_slice()));
    let spec = WavSpec {
        channels: 11,
        sample_rate: RATE,
        bits_per_sample: 24,
        sample_format: SampleFormat::Int,
        channel_mask: Some(0),
    };
    let options = WriterOptions {
        bw64: true,
        ..Default::default()
    };
    let mut writer = WavWriter::create_with_chunks(
        path,
        spec,
        options,
        &[(*b"chna", chna), (*b"axml", axml.as_bytes())],
    )
    .unwrap();
    writer.write_planar(&planes).unwrap();
    writer.finalize().unwrap();
}

#[test]
fn tracks_in_a_declared_order_beside_objects_are_routed_and_the_objects_listed() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("routed.wav");
    let truth = [Direction::new(40.0, 10.0), Direction::new(-120.0, 30.0)];
    // Lower case on purpose: ADM values are compared case-insensitively.
    let (axml, chna) = routed_axml("n3d");
    write_routed(&path, &axml, &chna, &truth);
    let (code, doc) = scan(&path, &[]);
    assert_eq!(code, 0);
    assert_eq!(doc["assumed"]["source"], "metadata");
    assert_eq!(doc["assumed"]["normalization"], "n3d");
    let metadata = &doc["input"]["metadata"];
    assert_eq!(metadata["pack_name"], "terrace");
    let others = metadata["other_tracks"].as_array().unwrap();
    assert_eq!(others.len(), 2);
    assert_eq!(others[0]["type"], "Objects");
    assert_eq!(others[0]["index"], 0);
    // Channel rows name file channels: the HOA tracks are channels 2 … 10, W on channel 10.
    let rows: Vec<(u64, u64)> = doc["channels"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| (c["index"].as_u64().unwrap(), c["acn"].as_u64().unwrap()))
        .collect();
    assert_eq!(rows.len(), 9);
    assert!(
        rows.contains(&(10, 0)) && rows.contains(&(2, 8)),
        "{rows:?}"
    );
    assert!(codes(&doc).is_empty(), "{:?}", codes(&doc));
    // The scene is where it was encoded: within 3° (our bound against the 1° map grid).
    let found: Vec<Direction> = doc["sources"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            Direction::new(
                s["azimuth_deg"].as_f64().unwrap(),
                s["elevation_deg"].as_f64().unwrap(),
            )
        })
        .collect();
    for t in truth {
        let nearest = found
            .iter()
            .map(|f| f.angle_to_deg(&t))
            .fold(f64::INFINITY, f64::min);
        assert!(
            nearest < 3.0,
            "{t:?}: nearest found {nearest:.1}° ({found:?})"
        );
    }
}

#[test]
fn unusable_metadata_is_a_warning_and_the_signal_decides() {
    let dir = tempfile::tempdir().unwrap();
    let truth = [Direction::new(40.0, 10.0)];
    let (axml, chna) = routed_axml("N3D");
    let cases = [
        ("broken-xml", axml.replace("</audioFormatExtended>", "")),
        ("unknown-normalization", axml.replace("N3D", "N5D")),
    ];
    for (name, bad, why) in [
        (cases[0].0, &cases[0].1, "not well-formed XML"),
        (cases[1].0, &cases[1].1, "'N5D'"),
    ] {
        let path = dir.path().join(format!("{name}.wav"));
        write_routed(&path, bad, &chna, &truth);
        // Eleven channels read as they are: order 2 plus two extra channels.
        let (code, doc) = scan(&path, &[]);
        assert_eq!(code, 0, "{name}");
        assert_eq!(doc["assumed"]["source"], "default", "{name}");
        let error = doc["input"]["metadata"]["error"].as_str().unwrap();
        assert!(error.contains(why), "{name}: {error}");
        assert!(
            codes(&doc).contains(&"metadata-unreadable".to_owned()),
            "{name}"
        );
    }
    // A four-channel file whose chna points at tracks that are not there.
    let path = dir.path().join("bad-chna.wav");
    let spec = WavSpec {
        channels: 4,
        sample_rate: RATE,
        bits_per_sample: 16,
        sample_format: SampleFormat::Int,
        channel_mask: Some(0),
    };
    let mut chna = vec![1, 0, 1, 0, 9, 0];
    chna.extend_from_slice(b"ATU_00000001AT_00040001_01AP_00040001\0");
    let mut writer =
        WavWriter::create_with_chunks(&path, spec, WriterOptions::default(), &[(*b"chna", &chna)])
            .unwrap();
    let signal = noise(5, RATE as usize);
    let w: Vec<f32> = signal.iter().map(|s| 0.1 * s).collect();
    let zero = vec![0.0f32; w.len()];
    writer.write_planar(&[&w, &zero, &zero, &zero]).unwrap();
    writer.finalize().unwrap();
    let (code, doc) = scan(&path, &[]);
    assert_eq!(code, 0);
    assert_eq!(doc["assumed"]["source"], "default");
    assert!(
        doc["input"]["metadata"]["error"]
            .as_str()
            .unwrap()
            .contains("track 9")
    );
    assert!(codes(&doc).contains(&"metadata-unreadable".to_owned()));
}

#[test]
fn axml_after_the_sample_data_is_found() {
    // BW64 writers often append axml after the data chunk; move it there and scan again.
    let dir = tempfile::tempdir().unwrap();
    let source = fixture("ear-order1-n3d.wav");
    let bytes = std::fs::read(&source).unwrap();
    let mut chunks: Vec<([u8; 4], Vec<u8>)> = Vec::new();
    let mut pos = 12;
    while pos + 8 <= bytes.len() {
        let id: [u8; 4] = bytes[pos..pos + 4].try_into().unwrap();
        let size = u32::from_le_bytes(bytes[pos + 4..pos + 8].try_into().unwrap()) as usize;
        chunks.push((id, bytes[pos + 8..pos + 8 + size].to_vec()));
        pos += 8 + size + (size & 1);
    }
    let axml = chunks.iter().position(|(id, _)| id == b"axml").unwrap();
    let moved = chunks.remove(axml);
    chunks.push(moved);
    let mut out = b"RIFF\0\0\0\0WAVE".to_vec();
    for (id, body) in &chunks {
        out.extend_from_slice(id);
        out.extend_from_slice(&(body.len() as u32).to_le_bytes());
        out.extend_from_slice(body);
        if body.len() % 2 == 1 {
            out.push(0);
        }
    }
    let riff = (out.len() - 8) as u32;
    out[4..8].copy_from_slice(&riff.to_le_bytes());
    let path = dir.path().join("axml-last.wav");
    std::fs::write(&path, out).unwrap();
    let (code, doc) = scan(&path, &[]);
    assert_eq!(code, 0);
    assert_eq!(doc["assumed"]["source"], "metadata");
    assert_eq!(doc["input"]["metadata"]["common_definitions"], false);
    assert_eq!(doc["input"]["metadata"]["pack_name"], "HOA");
}
