//! Inputs a QC desk receives: AMB B-format files, WAV files a recorder never finalised, and
//! RIFF files over 4 GiB whose 32-bit sizes wrapped.
//!
//! Sources of the byte layouts:
//! - AMB B-format SubFormat GUIDs, as printed in R. Dobson, "WAVE-FORMAT-EXTENSIBLE and B-format
//!   audio" (dream.cs.bath.ac.uk/researchdev/wave-ex/bformat.html):
//!   SUBTYPE_AMBISONIC_B_FORMAT_PCM {00000001-0721-11d3-8644-C8C1CA000000} and
//!   SUBTYPE_AMBISONIC_B_FORMAT_IEEE_FLOAT {00000003-0721-11d3-8644-C8C1CA000000}; the same page
//!   asks for a channel mask of 0. A GUID's first three fields are stored little-endian, the
//!   last eight bytes as written (Microsoft GUID structure, from memory).
//! - RIFF chunk layout, fmt fields and WAVEFORMATEXTENSIBLE (cbSize 22, valid bits, channel
//!   mask, SubFormat): Microsoft RIFF/WAVE documentation, from memory.
//! - A data size of 0 or 0xFFFFFFFF left by a recorder that stopped before patching the header,
//!   and 32-bit RIFF sizes wrapping past 4 GiB: common practice, no standard describes them.

use fieldglass::wav::{SampleFormat, WavReader, WavSpec, WavWriter, WriterOptions};
use fieldglass_dsp::encoder::PlaneWaveEncoder;
use fieldglass_dsp::format::{AmbiFormat, MixedOrderExpander};
use fieldglass_dsp::sphere::Direction;
use std::fs::OpenOptions;
use std::io::{Cursor, Seek, SeekFrom, Write};

// ---------- helpers ----------

/// A GUID in the usual 8-4-4-4-12 text form, in file byte order.
fn guid_bytes(text: &str) -> [u8; 16] {
    let hex: String = text.chars().filter(|c| *c != '-').collect();
    let byte = |i: usize| u8::from_str_radix(&hex[2 * i..2 * i + 2], 16).unwrap();
    let mut out = [0u8; 16];
    // Data1 (4 bytes), Data2 (2), Data3 (2) little-endian; Data4 (8) as written.
    for (slot, source) in [3, 2, 1, 0, 5, 4, 7, 6].into_iter().enumerate() {
        out[slot] = byte(source);
    }
    for (i, slot) in out.iter_mut().enumerate().skip(8) {
        *slot = byte(i);
    }
    out
}

const AMB_PCM_TEXT: &str = "00000001-0721-11d3-8644-C8C1CA000000";
const AMB_FLOAT_TEXT: &str = "00000003-0721-11d3-8644-C8C1CA000000";

fn le16(v: u16) -> [u8; 2] {
    v.to_le_bytes()
}
fn le32(v: u32) -> [u8; 4] {
    v.to_le_bytes()
}

/// One RIFF chunk: id, size, body, pad byte if the body is odd.
fn chunk(id: &[u8; 4], body: &[u8]) -> Vec<u8> {
    let mut out = id.to_vec();
    out.extend_from_slice(&le32(body.len() as u32));
    out.extend_from_slice(body);
    if body.len() % 2 == 1 {
        out.push(0);
    }
    out
}

/// A fmt body: PCMWAVEFORMAT (16 bytes), or WAVEFORMATEXTENSIBLE (40) when `subformat` is given.
fn fmt_body(channels: u16, bits: u16, subformat: Option<[u8; 16]>) -> Vec<u8> {
    let block_align = channels * bits / 8;
    let rate = 48_000u32;
    let tag: u16 = if subformat.is_some() { 0xFFFE } else { 1 };
    let mut out = Vec::new();
    out.extend_from_slice(&le16(tag));
    out.extend_from_slice(&le16(channels));
    out.extend_from_slice(&le32(rate));
    out.extend_from_slice(&le32(rate * u32::from(block_align)));
    out.extend_from_slice(&le16(block_align));
    out.extend_from_slice(&le16(bits));
    if let Some(guid) = subformat {
        out.extend_from_slice(&le16(22));
        out.extend_from_slice(&le16(bits));
        out.extend_from_slice(&le32(0));
        out.extend_from_slice(&guid);
    }
    out
}

/// A RIFF file with the given 32-bit RIFF size field and chunks.
fn riff_with_size(riff_size: u32, chunks: &[Vec<u8>]) -> Vec<u8> {
    let mut out = b"RIFF".to_vec();
    out.extend_from_slice(&le32(riff_size));
    out.extend_from_slice(b"WAVE");
    for c in chunks {
        out.extend_from_slice(c);
    }
    out
}

/// A RIFF file with correct sizes.
fn riff(chunks: &[Vec<u8>]) -> Vec<u8> {
    let body_len: usize = chunks.iter().map(Vec::len).sum();
    riff_with_size(4 + body_len as u32, chunks)
}

/// A data chunk header declaring `declared` bytes, followed by `samples` (no padding).
fn data_with_declared_size(declared: u32, samples: &[u8]) -> Vec<u8> {
    let mut out = b"data".to_vec();
    out.extend_from_slice(&le32(declared));
    out.extend_from_slice(samples);
    out
}

fn i16_bytes(values: &[i16]) -> Vec<u8> {
    values.iter().flat_map(|v| v.to_le_bytes()).collect()
}

fn read_all_interleaved(reader: &mut WavReader<impl std::io::Read + Seek>) -> Vec<f32> {
    let channels = reader.spec().channels as usize;
    let mut out = vec![0.0; reader.frames() as usize * channels];
    let got = reader.read_interleaved(&mut out).unwrap();
    assert_eq!(got as u64, reader.frames());
    out
}

fn spec(channels: u16, bits: u16, sample_format: SampleFormat) -> WavSpec {
    WavSpec {
        channels,
        sample_rate: 48_000,
        bits_per_sample: bits,
        sample_format,
        channel_mask: None,
    }
}

// ---------- AMB B-format ----------

#[test]
fn published_guid_text_gives_the_expected_file_bytes() {
    // Cross-check of the helper on the Microsoft PCM GUID, whose file bytes the existing
    // WAVEFORMATEXTENSIBLE tests write out by hand.
    assert_eq!(
        guid_bytes("00000001-0000-0010-8000-00AA00389B71"),
        [
            1, 0, 0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71
        ]
    );
    assert_eq!(
        guid_bytes(AMB_PCM_TEXT),
        [
            1, 0, 0, 0, 0x21, 0x07, 0xD3, 0x11, 0x86, 0x44, 0xC8, 0xC1, 0xCA, 0, 0, 0
        ]
    );
}

#[test]
fn hand_built_amb_pcm_file_is_read_and_declares_b_format() {
    let codes = [16_384i16, -8_192, 4_096, 0, -32_768, 32_767, 1, -1];
    let bytes = riff(&[
        chunk(b"fmt ", &fmt_body(4, 16, Some(guid_bytes(AMB_PCM_TEXT)))),
        chunk(b"data", &i16_bytes(&codes)),
    ]);
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert!(reader.declares_b_format());
    assert!(reader.warnings().is_empty());
    let spec = reader.spec();
    assert_eq!(
        (spec.channels, spec.sample_format, spec.channel_mask),
        (4, SampleFormat::Int, Some(0))
    );
    let samples = read_all_interleaved(&mut reader);
    let expected: Vec<f32> = codes.iter().map(|&c| f32::from(c) / 32_768.0).collect();
    assert_eq!(samples, expected);
}

#[test]
fn hand_built_amb_float_file_is_read_and_declares_b_format() {
    let values = [0.5f32, -0.25, 0.125, 0.0, 1.5];
    let samples: Vec<u8> = values.iter().flat_map(|v| v.to_le_bytes()).collect();
    let bytes = riff(&[
        chunk(b"fmt ", &fmt_body(5, 32, Some(guid_bytes(AMB_FLOAT_TEXT)))),
        chunk(b"data", &samples),
    ]);
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert!(reader.declares_b_format());
    assert_eq!(reader.spec().sample_format, SampleFormat::Float);
    assert_eq!(read_all_interleaved(&mut reader), values);
}

#[test]
fn ordinary_files_do_not_declare_b_format() {
    let plain = riff(&[
        chunk(b"fmt ", &fmt_body(4, 16, None)),
        chunk(b"data", &[0; 8]),
    ]);
    assert!(
        !WavReader::new(Cursor::new(plain))
            .unwrap()
            .declares_b_format()
    );
    let ms_pcm = guid_bytes("00000001-0000-0010-8000-00AA00389B71");
    let extensible = riff(&[
        chunk(b"fmt ", &fmt_body(4, 16, Some(ms_pcm))),
        chunk(b"data", &[0; 8]),
    ]);
    assert!(
        !WavReader::new(Cursor::new(extensible))
            .unwrap()
            .declares_b_format()
    );
    // A GUID that differs from the B-format one in its last byte is refused, not guessed at.
    let mut near = guid_bytes(AMB_PCM_TEXT);
    near[15] = 1;
    let bytes = riff(&[
        chunk(b"fmt ", &fmt_body(4, 16, Some(near))),
        chunk(b"data", &[0; 8]),
    ]);
    let Err(error) = WavReader::new(Cursor::new(bytes)) else {
        panic!("an unknown subformat must be refused");
    };
    let message = error.to_string();
    assert!(
        message.contains("00000001-0721-11D3-8644-C8C1CA000001"),
        "{message}"
    );
}

#[test]
fn b_format_writer_writes_the_published_guid_and_reads_back() {
    for (bits, format, text) in [
        (24, SampleFormat::Int, AMB_PCM_TEXT),
        (32, SampleFormat::Float, AMB_FLOAT_TEXT),
    ] {
        let signal: Vec<f32> = (0..5 * 40).map(|i| (i as f32 * 0.37).sin() * 0.5).collect();
        let mut cursor = Cursor::new(Vec::new());
        let mut writer =
            WavWriter::new_b_format(&mut cursor, spec(5, bits, format), WriterOptions::default())
                .unwrap();
        writer.write_interleaved(&signal).unwrap();
        writer.finalize().unwrap();
        let bytes = cursor.into_inner();
        // RIFF(12) + JUNK(8+28) = 48: the fmt chunk; the SubFormat is its last 16 bytes.
        assert_eq!(&bytes[48..52], b"fmt ");
        assert_eq!(bytes[56..58], le16(0xFFFE));
        assert_eq!(bytes[76..80], le32(0), "channel mask 0 for B-format");
        assert_eq!(bytes[80..96], guid_bytes(text));
        let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
        assert!(reader.declares_b_format());
        let back = read_all_interleaved(&mut reader);
        let step = if format == SampleFormat::Int {
            0.6 / 8_388_608.0
        } else {
            0.0
        };
        for (a, b) in back.iter().zip(&signal) {
            assert!((a - b).abs() <= step, "{a} vs {b}");
        }
    }
    // Through a path as well.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("scene.amb");
    let mut writer = WavWriter::create_b_format(
        &path,
        spec(3, 16, SampleFormat::Int),
        WriterOptions::default(),
    )
    .unwrap();
    writer.write_interleaved(&[0.25, 0.5, -0.5]).unwrap();
    writer.finalize().unwrap();
    let reader = WavReader::open(&path).unwrap();
    assert!(reader.declares_b_format() && reader.frames() == 1);
}

#[test]
fn five_channel_amb_file_expands_to_second_order_fuma() {
    // A horizontal source at azimuth 30°, elevation 0, encoded in full second-order FuMa by the
    // project's encoder; the file keeps W X Y U V (the 5-channel horizontal set of the AMB
    // channel table, see fieldglass_dsp::format::mixed_order).
    let frames = 64;
    let mut encoder = PlaneWaveEncoder::new(2, AmbiFormat::FUMA).unwrap();
    let mut full = vec![vec![0.0f32; frames]; 9];
    let signal: Vec<f32> = (0..frames)
        .map(|i| ((i * 7 % 13) as f32 - 6.0) / 10.0)
        .collect();
    let mut refs: Vec<&mut [f32]> = full.iter_mut().map(|c| c.as_mut_slice()).collect();
    encoder.add_to(Direction::new(30.0, 0.0), 1.0, &signal, &mut refs);
    let kept = [0, 1, 2, 7, 8];
    let planes: Vec<&[f32]> = kept.iter().map(|&c| full[c].as_slice()).collect();

    let mut cursor = Cursor::new(Vec::new());
    let mut writer = WavWriter::new_b_format(
        &mut cursor,
        spec(5, 24, SampleFormat::Int),
        Default::default(),
    )
    .unwrap();
    writer.write_planar(&planes).unwrap();
    writer.finalize().unwrap();

    let mut reader = WavReader::new(Cursor::new(cursor.into_inner())).unwrap();
    assert!(reader.declares_b_format());
    let mut file = vec![Vec::new(); 5];
    assert_eq!(reader.read_planar(&mut file, frames).unwrap(), frames);
    let expander = MixedOrderExpander::for_stream(AmbiFormat::FUMA, 5).unwrap();
    assert_eq!(expander.order(), 2);
    let mut expanded = vec![vec![f32::NAN; frames]; 9];
    let input: Vec<&[f32]> = file.iter().map(|c| c.as_slice()).collect();
    let mut output: Vec<&mut [f32]> = expanded.iter_mut().map(|c| c.as_mut_slice()).collect();
    expander.expand(&input, &mut output).unwrap();
    // Half a 24-bit step of rounding.
    let tolerance = 0.5 / 8_388_608.0 + 1e-9;
    for (channel, (got, encoded)) in expanded.iter().zip(&full).enumerate() {
        let absent = expander.absent_channels().contains(&channel);
        for (&g, &e) in got.iter().zip(encoded) {
            if absent {
                assert_eq!(g, 0.0, "channel {channel}");
            } else {
                assert!((g - e).abs() <= tolerance, "channel {channel}: {g} vs {e}");
            }
        }
    }
    assert_eq!(expander.absent_channels(), &[3, 4, 5, 6]); // Z R S T
}

// ---------- unfinalised files ----------

#[test]
fn zero_data_size_with_samples_reads_to_the_end_with_a_warning() {
    // Ten stereo 16-bit frames and three stray bytes; RIFF and data sizes both left at 0.
    let codes: Vec<i16> = (0..20).map(|i| i * 100 - 1_000).collect();
    let mut samples = i16_bytes(&codes);
    samples.extend_from_slice(&[1, 2, 3]);
    let bytes = riff_with_size(
        0,
        &[
            chunk(b"fmt ", &fmt_body(2, 16, None)),
            data_with_declared_size(0, &samples),
        ],
    );
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.frames(), 10);
    let warnings = reader.warnings().to_vec();
    assert_eq!(warnings.len(), 1, "{warnings:?}");
    let text = &warnings[0];
    assert!(
        text.contains("declares 0 bytes") && text.contains("did not finalise"),
        "{text}"
    );
    assert!(
        text.contains("10 frames") && text.contains("last 3 bytes"),
        "{text}"
    );
    let expected: Vec<f32> = codes.iter().map(|&c| f32::from(c) / 32_768.0).collect();
    assert_eq!(read_all_interleaved(&mut reader), expected);
}

#[test]
fn placeholder_data_size_reads_to_the_end_with_a_warning() {
    let codes: Vec<i16> = (0..12).map(|i| i * 7).collect();
    let bytes = riff_with_size(
        0xFFFF_FFFF,
        &[
            chunk(b"fmt ", &fmt_body(4, 16, None)),
            data_with_declared_size(0xFFFF_FFFF, &i16_bytes(&codes)),
        ],
    );
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.frames(), 3);
    let text = reader.warnings().join(" | ");
    assert!(
        text.contains("0xFFFFFFFF") && text.contains("3 frames"),
        "{text}"
    );
    assert_eq!(read_all_interleaved(&mut reader).len(), 12);
}

#[test]
fn finalised_empty_data_chunk_followed_by_a_chunk_stays_empty() {
    // An empty data chunk, then a LIST chunk that the RIFF size covers: an ordinary file.
    let bytes = riff(&[
        chunk(b"fmt ", &fmt_body(2, 16, None)),
        chunk(b"data", &[]),
        chunk(b"LIST", b"INFOabcd"),
    ]);
    let reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.frames(), 0);
    assert!(reader.warnings().is_empty(), "{:?}", reader.warnings());
    // An empty data chunk at the end of the file: nothing to recover, nothing to say.
    let bytes = riff(&[chunk(b"fmt ", &fmt_body(2, 16, None)), chunk(b"data", &[])]);
    let reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.frames(), 0);
    assert!(reader.warnings().is_empty());
}

#[test]
fn finalised_files_from_the_writer_have_no_warnings() {
    for options in [
        WriterOptions::default(),
        WriterOptions {
            rf64: true,
            extensible: true,
            bw64: false,
        },
    ] {
        let mut cursor = Cursor::new(Vec::new());
        let mut writer =
            WavWriter::new(&mut cursor, spec(4, 24, SampleFormat::Int), options).unwrap();
        writer.write_interleaved(&[0.1; 4 * 25]).unwrap();
        writer.finalize().unwrap();
        let reader = WavReader::new(Cursor::new(cursor.into_inner())).unwrap();
        assert_eq!(reader.frames(), 25);
        assert!(reader.warnings().is_empty(), "{:?}", reader.warnings());
        assert!(!reader.declares_b_format());
    }
}

#[test]
fn rf64_with_a_zero_ds64_data_size_reads_to_the_end() {
    let options = WriterOptions {
        rf64: true,
        extensible: false,
        bw64: false,
    };
    let mut cursor = Cursor::new(Vec::new());
    let mut writer = WavWriter::new(&mut cursor, spec(1, 16, SampleFormat::Int), options).unwrap();
    writer.write_interleaved(&[0.5; 30]).unwrap();
    writer.finalize().unwrap();
    let mut bytes = cursor.into_inner();
    // ds64 body at byte 20: riffSize (8 bytes), dataSize (8 bytes) (EBU Tech 3306).
    assert_eq!(&bytes[12..16], b"ds64");
    bytes[20..36].fill(0);
    let reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.frames(), 30);
    assert_eq!(reader.warnings().len(), 1);
}

// ---------- RIFF over 4 GiB ----------

const FOUR_GIB: u64 = 1 << 32;

/// Writes a sparse RIFF file of 2-channel 16-bit frames whose true data size is `data_bytes`
/// (beyond 4 GiB) with the RIFF and data sizes stored modulo 2^32, as a writer without RF64
/// leaves them; then `tail` after the data. The last frame of the data holds codes 1234, -1234.
/// Returns the path and the data start.
fn sparse_wrapped_file(
    dir: &tempfile::TempDir,
    data_bytes: u64,
    tail: &[u8],
) -> (std::path::PathBuf, u64) {
    let fmt = chunk(b"fmt ", &fmt_body(2, 16, None));
    let data_start = 12 + fmt.len() as u64 + 8;
    let riff_bytes = data_start - 8 + data_bytes + tail.len() as u64;
    let header = riff_with_size(
        riff_bytes as u32, // wraps: the low 32 bits, as a 32-bit field holds it
        &[fmt, data_with_declared_size(data_bytes as u32, &[])],
    );
    let path = dir.path().join("long.wav");
    let mut file = OpenOptions::new()
        .create(true)
        .write(true)
        .truncate(true)
        .open(&path)
        .unwrap();
    file.write_all(&header).unwrap();
    // Sparse: the gap between the header and the last frame takes no disk space.
    file.set_len(data_start + data_bytes).unwrap();
    file.seek(SeekFrom::Start(data_start + data_bytes - 4))
        .unwrap();
    file.write_all(&i16_bytes(&[1_234, -1_234])).unwrap();
    file.write_all(tail).unwrap();
    (path, data_start)
}

#[test]
fn wrapped_riff_over_4_gib_is_noticed_and_read_whole() {
    let dir = tempfile::tempdir().unwrap();
    let data_bytes = FOUR_GIB + 4 * 1_000; // 1000 frames past 4 GiB
    for tail in [&b""[..], &chunk(b"LIST", b"INFOtail")[..]] {
        let (path, data_start) = sparse_wrapped_file(&dir, data_bytes, tail);
        let mut reader = WavReader::open(&path).unwrap();
        assert_eq!(reader.data_start_byte(), data_start);
        let frames = data_bytes / 4;
        assert_eq!(reader.frames(), frames, "tail of {} bytes", tail.len());
        let text = reader.warnings().join(" | ");
        assert!(
            text.contains("declares 4000 bytes") && text.contains("wrapped"),
            "{text}"
        );
        assert!(text.contains(&format!("{frames} frames")), "{text}");
        // The last frame is the one written at the true end of the data.
        reader.seek_frame(frames - 1).unwrap();
        let mut last = [0.0f32; 4];
        assert_eq!(reader.read_interleaved(&mut last).unwrap(), 1);
        assert_eq!(last[..2], [1_234.0 / 32_768.0, -1_234.0 / 32_768.0]);
    }
}

#[test]
fn placeholder_size_over_4_gib_reads_to_the_end() {
    let dir = tempfile::tempdir().unwrap();
    let data_bytes = FOUR_GIB + 4 * 10;
    let (path, data_start) = sparse_wrapped_file(&dir, data_bytes, &[]);
    // Overwrite the data size with the placeholder.
    let mut file = OpenOptions::new().write(true).open(&path).unwrap();
    file.seek(SeekFrom::Start(data_start - 4)).unwrap();
    file.write_all(&le32(0xFFFF_FFFF)).unwrap();
    drop(file);
    let reader = WavReader::open(&path).unwrap();
    assert_eq!(reader.frames(), data_bytes / 4);
    assert!(reader.warnings()[0].contains("0xFFFFFFFF"));
}

#[test]
fn data_size_wrapped_to_exactly_zero_reads_everything() {
    let dir = tempfile::tempdir().unwrap();
    let data_bytes = FOUR_GIB; // the 32-bit data size field holds 0
    let (path, _) = sparse_wrapped_file(&dir, data_bytes, &[]);
    let reader = WavReader::open(&path).unwrap();
    assert_eq!(reader.frames(), data_bytes / 4);
    let text = reader.warnings().join(" | ");
    assert!(
        text.contains("declares 0 bytes") && text.contains("wrapped"),
        "{text}"
    );
}

#[test]
fn a_file_shorter_than_a_wrap_is_not_mistaken_for_one() {
    // 200 frames declared, 100 KiB of other bytes after the data: far from 4 GiB, so the
    // declared size stands and nothing is said.
    let samples = vec![0u8; 800];
    let tail = chunk(b"junk", &vec![0u8; 100 * 1024]);
    let bytes = riff(&[
        chunk(b"fmt ", &fmt_body(2, 16, None)),
        chunk(b"data", &samples),
        tail,
    ]);
    let reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.frames(), 200);
    assert!(reader.warnings().is_empty());
}
