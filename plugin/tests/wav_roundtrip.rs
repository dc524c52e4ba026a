//! WAV / RF64 / BW64 reader and writer: round trips, hand-built reference headers, bad input.
//!
//! The byte layouts here are written by hand from the Microsoft RIFF/WAVE specification
//! (chunk = id, little-endian u32 size, body, pad byte to even length; fmt fields in
//! PCMWAVEFORMAT / WAVEFORMATEX order), the Microsoft WAVEFORMATEXTENSIBLE documentation
//! (cbSize 22, valid bits, channel mask, subformat GUID) and EBU Tech 3306 / ITU-R BS.2088-1
//! for ds64 — all from memory, not copied from any implementation.

use fieldglass::wav::{
    Container, SampleFormat, WavError, WavReader, WavSpec, WavWriter, WriterOptions,
};
use proptest::prelude::*;
use std::io::{Cursor, Read, Seek, SeekFrom};

// ---------- helpers ----------

fn spec(channels: u16, bits: u16, format: SampleFormat) -> WavSpec {
    WavSpec {
        channels,
        sample_rate: 48_000,
        bits_per_sample: bits,
        sample_format: format,
        channel_mask: None,
    }
}

fn write_to_bytes(spec: WavSpec, options: WriterOptions, interleaved: &[f32]) -> Vec<u8> {
    let mut cursor = Cursor::new(Vec::new());
    let mut writer = WavWriter::new(&mut cursor, spec, options).unwrap();
    writer.write_interleaved(interleaved).unwrap();
    writer.finalize().unwrap();
    cursor.into_inner()
}

/// Reads all frames with `read_planar` in deliberately small, odd-sized pieces and returns them
/// interleaved.
fn read_all_planar(bytes: Vec<u8>) -> (WavSpec, Vec<f32>) {
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    let spec = reader.spec();
    let channels = spec.channels as usize;
    let mut planes = vec![Vec::new(); channels];
    let mut interleaved = Vec::new();
    loop {
        let got = reader.read_planar(&mut planes, 997).unwrap();
        if got == 0 {
            break;
        }
        for frame in 0..got {
            for plane in &planes {
                interleaved.push(plane[frame]);
            }
        }
    }
    assert_eq!(interleaved.len() as u64, reader.frames() * channels as u64);
    (spec, interleaved)
}

fn le16(v: u16) -> [u8; 2] {
    v.to_le_bytes()
}
fn le32(v: u32) -> [u8; 4] {
    v.to_le_bytes()
}

/// One RIFF chunk: id, size, body, pad byte if the body is odd (Microsoft RIFF).
fn chunk(id: &[u8; 4], body: &[u8]) -> Vec<u8> {
    let mut out = id.to_vec();
    out.extend_from_slice(&le32(body.len() as u32));
    out.extend_from_slice(body);
    if body.len() % 2 == 1 {
        out.push(0);
    }
    out
}

/// A plain PCM fmt body (PCMWAVEFORMAT, 16 bytes).
fn pcm_fmt(tag: u16, channels: u16, rate: u32, block_align: u16, bits: u16) -> Vec<u8> {
    let mut out = Vec::new();
    out.extend_from_slice(&le16(tag));
    out.extend_from_slice(&le16(channels));
    out.extend_from_slice(&le32(rate));
    out.extend_from_slice(&le32(rate * u32::from(block_align)));
    out.extend_from_slice(&le16(block_align));
    out.extend_from_slice(&le16(bits));
    out
}

fn riff(chunks: &[Vec<u8>]) -> Vec<u8> {
    let body: Vec<u8> = chunks.concat();
    let mut out = b"RIFF".to_vec();
    out.extend_from_slice(&le32(4 + body.len() as u32));
    out.extend_from_slice(b"WAVE");
    out.extend_from_slice(&body);
    out
}

fn open_err(bytes: Vec<u8>) -> WavError {
    match WavReader::new(Cursor::new(bytes)) {
        Ok(_) => panic!("expected an error"),
        Err(e) => e,
    }
}

/// Deterministic test codes spread over the full range of a `bits`-bit integer, extremes
/// included; values are code / 2^(bits−1). For 32-bit only multiples of 256 are used so every
/// value is exact in f32 (24-bit mantissa).
fn int_test_signal(bits: u16, samples: usize) -> Vec<f32> {
    let full = 1i64 << (bits - 1);
    let step = if bits == 32 { 256 } else { 1 };
    let codes = (2 * full) / step;
    (0..samples)
        .map(|i| {
            let code = match i {
                0 => -full,
                1 => full - step,
                _ => -full + ((i as i64 * 2_654_435_761) % codes) * step,
            };
            (code as f64 / full as f64) as f32
        })
        .collect()
}

// ---------- round trips ----------

#[test]
fn every_integer_format_round_trips_exactly() {
    for bits in [8u16, 16, 24, 32] {
        for channels in [1u16, 2, 4] {
            let frames = 5_000;
            let signal = int_test_signal(bits, frames * channels as usize);
            let spec_in = spec(channels, bits, SampleFormat::Int);
            let bytes = write_to_bytes(spec_in, WriterOptions::default(), &signal);
            let (spec_out, samples) = read_all_planar(bytes);
            assert_eq!(spec_out.bits_per_sample, bits);
            assert_eq!(spec_out.sample_format, SampleFormat::Int);
            assert_eq!(spec_out.channels, channels);
            // More than two channels is written as WAVE_FORMAT_EXTENSIBLE with mask 0.
            let expected_mask = if channels > 2 { Some(0) } else { None };
            assert_eq!(
                spec_out.channel_mask, expected_mask,
                "{bits}-bit {channels} ch"
            );
            assert_eq!(samples, signal, "{bits}-bit, {channels} channels");
        }
    }
}

#[test]
fn every_float_format_round_trips_bit_exactly() {
    let special = [
        0.0f32,
        -0.0,
        1.5,
        -7.25,
        f32::INFINITY,
        f32::NEG_INFINITY,
        1e-30,
        f32::MAX,
    ];
    for bits in [32u16, 64] {
        for channels in [1u16, 2, 3] {
            let count = 3_001 * channels as usize;
            let signal: Vec<f32> = (0..count)
                .map(|i| {
                    special
                        .get(i)
                        .copied()
                        .unwrap_or((i as f32 * 0.37).sin() * 1.3)
                })
                .collect();
            let bytes = write_to_bytes(
                spec(channels, bits, SampleFormat::Float),
                Default::default(),
                &signal,
            );
            let (spec_out, samples) = read_all_planar(bytes);
            assert_eq!(spec_out.sample_format, SampleFormat::Float);
            assert_eq!(spec_out.bits_per_sample, bits);
            let same_bits = samples
                .iter()
                .zip(&signal)
                .all(|(a, b)| a.to_bits() == b.to_bits());
            assert!(
                same_bits && samples.len() == signal.len(),
                "{bits}-bit float, {channels} ch"
            );
        }
    }
}

#[test]
fn float_nan_survives_the_round_trip() {
    let bytes = write_to_bytes(
        spec(1, 64, SampleFormat::Float),
        Default::default(),
        &[f32::NAN],
    );
    let (_, samples) = read_all_planar(bytes);
    assert!(samples[0].is_nan());
}

#[test]
fn integer_writing_rounds_and_clamps() {
    // 16-bit: 1/32768 is one code. 0.4 code rounds to 0, 0.6 to 1; ±1.5 clamp to the extremes.
    let lsb = 1.0 / 32_768.0;
    let input = [0.4 * lsb, 0.6 * lsb, -0.6 * lsb, 1.5, -1.5, 1.0];
    let bytes = write_to_bytes(spec(1, 16, SampleFormat::Int), Default::default(), &input);
    let (_, samples) = read_all_planar(bytes);
    assert_eq!(
        samples,
        [0.0, lsb, -lsb, 32_767.0 * lsb, -1.0, 32_767.0 * lsb]
    );
}

#[test]
fn planar_and_interleaved_writes_agree_and_reads_agree() {
    let left: Vec<f32> = (0..300).map(|i| (i as f32 * 0.01).sin()).collect();
    let right: Vec<f32> = (0..300).map(|i| (i as f32 * 0.02).cos() * 0.5).collect();
    let interleaved: Vec<f32> = left
        .iter()
        .zip(&right)
        .flat_map(|(&l, &r)| [l, r])
        .collect();
    let spec_in = spec(2, 24, SampleFormat::Int);
    let from_interleaved = write_to_bytes(spec_in, Default::default(), &interleaved);

    let mut cursor = Cursor::new(Vec::new());
    let mut writer = WavWriter::new(&mut cursor, spec_in, Default::default()).unwrap();
    writer.write_planar(&[&left[..100], &right[..100]]).unwrap();
    writer.write_planar(&[&left[100..], &right[100..]]).unwrap();
    assert_eq!(writer.frames_written(), 300);
    writer.finalize().unwrap();
    assert_eq!(cursor.into_inner(), from_interleaved);

    let mut reader = WavReader::new(Cursor::new(from_interleaved.clone())).unwrap();
    let mut out = vec![0.0; 7 * 2 + 1]; // an odd length: the spare sample stays untouched
    let mut via_interleaved = Vec::new();
    loop {
        let got = reader.read_interleaved(&mut out).unwrap();
        if got == 0 {
            break;
        }
        via_interleaved.extend_from_slice(&out[..got * 2]);
    }
    let (_, via_planar) = read_all_planar(from_interleaved);
    assert_eq!(via_interleaved, via_planar);
    assert_eq!(via_interleaved.len(), 600);
}

#[test]
fn seek_frame_repositions_reads() {
    let signal = int_test_signal(16, 100);
    let bytes = write_to_bytes(spec(1, 16, SampleFormat::Int), Default::default(), &signal);
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    reader.seek_frame(90).unwrap();
    assert_eq!(reader.frames_remaining(), 10);
    let mut out = [0.0; 20];
    assert_eq!(reader.read_interleaved(&mut out).unwrap(), 10);
    assert_eq!(&out[..10], &signal[90..]);
}

#[test]
fn files_on_disk_round_trip_through_paths() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("terrace.wav");
    let spec_in = spec(16, 32, SampleFormat::Float);
    let mut writer = WavWriter::create(&path, spec_in).unwrap();
    let frame: Vec<f32> = (0..16).map(|c| c as f32 / 16.0).collect();
    for _ in 0..10 {
        writer.write_interleaved(&frame).unwrap();
    }
    writer.finalize().unwrap();
    let mut reader = WavReader::open(&path).unwrap();
    assert_eq!(reader.frames(), 10);
    assert_eq!(reader.spec().channel_mask, Some(0));
    let mut planes = vec![Vec::new(); 16];
    assert_eq!(reader.read_planar(&mut planes, 100).unwrap(), 10);
    assert!(
        planes
            .iter()
            .enumerate()
            .all(|(c, p)| p.iter().all(|&v| v == c as f32 / 16.0))
    );
}

#[test]
fn dropping_an_unfinalized_writer_still_patches_sizes() {
    let mut cursor = Cursor::new(Vec::new());
    {
        let mut writer = WavWriter::new(
            &mut cursor,
            spec(1, 16, SampleFormat::Int),
            Default::default(),
        )
        .unwrap();
        writer.write_interleaved(&[0.5; 9]).unwrap();
    }
    let reader = WavReader::new(Cursor::new(cursor.into_inner())).unwrap();
    assert_eq!(reader.frames(), 9);
}

// ---------- extensible ----------

/// KSDATAFORMAT_SUBTYPE_PCM and _IEEE_FLOAT in file byte order, typed in by hand from the
/// Microsoft WAVEFORMATEXTENSIBLE docs (from memory): {00000001-0000-0010-8000-00AA00389B71}.
const GUID_PCM: [u8; 16] = [
    1, 0, 0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71,
];
const GUID_FLOAT: [u8; 16] = [
    3, 0, 0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71,
];

#[test]
fn extensible_header_matches_the_published_layout() {
    let mut spec_in = spec(2, 24, SampleFormat::Int);
    spec_in.channel_mask = Some(0x3); // SPEAKER_FRONT_LEFT | SPEAKER_FRONT_RIGHT (MS docs)
    let options = WriterOptions {
        extensible: true,
        ..Default::default()
    };
    let bytes = write_to_bytes(spec_in, options, &[0.0; 4]);
    // RIFF(12) + JUNK(8+28) = 48: the fmt chunk.
    assert_eq!(&bytes[48..52], b"fmt ");
    assert_eq!(bytes[52..56], le32(40));
    assert_eq!(bytes[56..58], le16(0xFFFE));
    assert_eq!(bytes[72..74], le16(22)); // cbSize
    assert_eq!(bytes[74..76], le16(24)); // valid bits
    assert_eq!(bytes[76..80], le32(0x3)); // channel mask
    assert_eq!(bytes[80..96], GUID_PCM);
    assert_eq!(&bytes[96..100], b"fact");
    assert_eq!(bytes[104..108], le32(2)); // frames per channel
    let (spec_out, _) = read_all_planar(bytes);
    assert_eq!(spec_out, spec_in);

    let float_bytes = write_to_bytes(
        spec(4, 64, SampleFormat::Float),
        Default::default(),
        &[0.0; 4],
    );
    assert_eq!(float_bytes[80..96], GUID_FLOAT);
}

#[test]
fn hand_built_extensible_float_file_is_read() {
    let mut fmt = pcm_fmt(0xFFFE, 4, 44_100, 16, 32);
    fmt.extend_from_slice(&le16(22));
    fmt.extend_from_slice(&le16(32));
    fmt.extend_from_slice(&le32(0));
    fmt.extend_from_slice(&GUID_FLOAT);
    let samples: Vec<u8> = [0.5f32, -0.25, 1.0, 0.0]
        .iter()
        .flat_map(|v| v.to_le_bytes())
        .collect();
    let bytes = riff(&[chunk(b"fmt ", &fmt), chunk(b"data", &samples)]);
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.spec().sample_format, SampleFormat::Float);
    assert_eq!(reader.spec().sample_rate, 44_100);
    let mut planes = vec![Vec::new(); 4];
    assert_eq!(reader.read_planar(&mut planes, 10).unwrap(), 1);
    assert_eq!(planes, [vec![0.5], vec![-0.25], vec![1.0], vec![0.0]]);
}

// ---------- RF64 / BW64 ----------

#[test]
fn forced_rf64_writes_a_ds64_chunk_and_reads_back() {
    let signal = int_test_signal(16, 2 * 1_234);
    let options = WriterOptions {
        rf64: true,
        ..Default::default()
    };
    let bytes = write_to_bytes(spec(2, 16, SampleFormat::Int), options, &signal);
    let data_bytes = 1_234u64 * 4;
    // Tech 3306 layout: 'RF64' 0xFFFFFFFF 'WAVE' 'ds64' 28 riffSize dataSize sampleCount table.
    assert_eq!(&bytes[0..4], b"RF64");
    assert_eq!(bytes[4..8], le32(0xFFFF_FFFF));
    assert_eq!(&bytes[12..16], b"ds64");
    assert_eq!(bytes[16..20], le32(28));
    assert_eq!(bytes[20..28], (bytes.len() as u64 - 8).to_le_bytes());
    assert_eq!(bytes[28..36], data_bytes.to_le_bytes());
    assert_eq!(bytes[36..44], 1_234u64.to_le_bytes());
    assert_eq!(bytes[44..48], le32(0));
    // 'data' at 48 + 24 (fmt): the 32-bit size is the placeholder.
    assert_eq!(&bytes[72..76], b"data");
    assert_eq!(bytes[76..80], le32(0xFFFF_FFFF));

    let reader = WavReader::new(Cursor::new(bytes.clone())).unwrap();
    assert_eq!(reader.container(), Container::Rf64);
    assert_eq!(reader.frames(), 1_234);
    let (_, samples) = read_all_planar(bytes.clone());
    assert_eq!(samples, signal);

    // The same file with a BW64 identifier (BS.2088-1) is read the same way.
    let mut bw64 = bytes;
    bw64[0..4].copy_from_slice(b"BW64");
    let reader = WavReader::new(Cursor::new(bw64.clone())).unwrap();
    assert_eq!(reader.container(), Container::Bw64);
    let (_, samples) = read_all_planar(bw64);
    assert_eq!(samples, signal);
}

/// An RF64 file whose 'LIST' chunk carries the placeholder size, resolved via the ds64 table.
#[test]
fn ds64_table_sizes_are_used_for_placeholder_chunks() {
    let mut ds64 = Vec::new();
    ds64.extend_from_slice(&0u64.to_le_bytes()); // riff size (not checked)
    ds64.extend_from_slice(&4u64.to_le_bytes()); // data size
    ds64.extend_from_slice(&2u64.to_le_bytes()); // sample count
    ds64.extend_from_slice(&le32(1)); // table length
    ds64.extend_from_slice(b"LIST");
    ds64.extend_from_slice(&6u64.to_le_bytes());
    let mut list = b"LIST".to_vec();
    list.extend_from_slice(&le32(0xFFFF_FFFF));
    list.extend_from_slice(&[9; 6]);
    let mut data = b"data".to_vec();
    data.extend_from_slice(&le32(0xFFFF_FFFF));
    data.extend_from_slice(&[0, 0x40, 0, 0xC0]); // 0.5, -0.5 in 16-bit
    let mut bytes = b"RF64".to_vec();
    bytes.extend_from_slice(&le32(0xFFFF_FFFF));
    bytes.extend_from_slice(b"WAVE");
    bytes.extend_from_slice(&chunk(b"ds64", &ds64));
    bytes.extend_from_slice(&chunk(b"fmt ", &pcm_fmt(1, 1, 48_000, 2, 16)));
    bytes.extend_from_slice(&list);
    bytes.extend_from_slice(&data);
    let (_, samples) = read_all_planar(bytes.clone());
    assert_eq!(samples, [0.5, -0.5]);

    // Without the table entry the placeholder cannot be resolved: a specific error.
    let mut no_table = bytes;
    no_table[44..48].copy_from_slice(&le32(0));
    let message = open_err(no_table).to_string();
    assert!(
        message.contains("'LIST'") && message.contains("0xFFFFFFFF"),
        "{message}"
    );
}

#[test]
fn rf64_without_ds64_is_rejected() {
    let mut bytes = riff(&[
        chunk(b"fmt ", &pcm_fmt(1, 1, 48_000, 2, 16)),
        chunk(b"data", &[]),
    ]);
    bytes[0..4].copy_from_slice(b"RF64");
    let message = open_err(bytes).to_string();
    assert!(
        message.contains("expected 'ds64' at byte 12, found 'fmt '"),
        "{message}"
    );
}

// ---------- chunk order and unknown chunks ----------

#[test]
fn odd_sized_unknown_chunks_before_and_after_data_are_skipped() {
    let fmt = chunk(b"fmt ", &pcm_fmt(1, 1, 48_000, 2, 16));
    let data = chunk(b"data", &[0x00, 0x40, 0x00, 0xE0]); // 0.5, -0.25
    let list = chunk(b"LIST", b"INFOx"); // 5 bytes + pad
    let odd = chunk(b"zzz1", &[7]); // 1 byte + pad
    let layouts = [
        vec![list.clone(), fmt.clone(), odd.clone(), data.clone()],
        vec![fmt.clone(), data.clone(), list.clone()],
        vec![
            odd.clone(),
            list.clone(),
            fmt.clone(),
            data.clone(),
            odd.clone(),
        ],
    ];
    for chunks in layouts {
        let (spec_out, samples) = read_all_planar(riff(&chunks));
        assert_eq!(spec_out.channels, 1);
        assert_eq!(samples, [0.5, -0.25]);
    }
    let message = open_err(riff(&[data, fmt])).to_string();
    assert!(
        message.contains("data chunk at byte 12 comes before any fmt chunk"),
        "{message}"
    );
}

#[test]
fn float_fmt_with_cb_size_and_eight_bit_files_are_read() {
    let mut fmt = pcm_fmt(3, 1, 8_000, 4, 32);
    fmt.extend_from_slice(&le16(0)); // WAVEFORMATEX cbSize
    let bytes = riff(&[chunk(b"fmt ", &fmt), chunk(b"data", &0.75f32.to_le_bytes())]);
    assert_eq!(read_all_planar(bytes).1, [0.75]);

    // 8-bit PCM is unsigned with 128 as zero (Microsoft RIFF). Odd data size: pad byte follows.
    let bytes = riff(&[
        chunk(b"fmt ", &pcm_fmt(1, 1, 8_000, 1, 8)),
        chunk(b"data", &[0, 128, 192]),
    ]);
    assert_eq!(read_all_planar(bytes).1, [-1.0, 0.0, 0.5]);
}

// ---------- byte-exact 16-bit file ----------

/// The writer's plain 16-bit stereo file against a header typed in from the Microsoft RIFF
/// layout (from memory): 'RIFF' size 'WAVE', a 28-byte 'JUNK' filler chunk (room for ds64),
/// a 16-byte PCM fmt chunk, then 'data'.
#[test]
fn sixteen_bit_file_is_byte_exact() {
    let samples = [0.5f32, -0.5, 1.0, -1.0, 0.0, 1.0 / 32_768.0];
    let mut expected = Vec::new();
    expected.extend_from_slice(b"RIFF");
    expected.extend_from_slice(&le32(80 + 12 - 8)); // file size − 8
    expected.extend_from_slice(b"WAVE");
    expected.extend_from_slice(b"JUNK");
    expected.extend_from_slice(&le32(28));
    expected.extend_from_slice(&[0; 28]);
    expected.extend_from_slice(b"fmt ");
    expected.extend_from_slice(&le32(16));
    expected.extend_from_slice(&le16(1)); // WAVE_FORMAT_PCM
    expected.extend_from_slice(&le16(2)); // channels
    expected.extend_from_slice(&le32(48_000)); // sample rate
    expected.extend_from_slice(&le32(48_000 * 4)); // byte rate
    expected.extend_from_slice(&le16(4)); // block align
    expected.extend_from_slice(&le16(16)); // bits per sample
    expected.extend_from_slice(b"data");
    expected.extend_from_slice(&le32(12));
    for code in [16_384i16, -16_384, 32_767, -32_768, 0, 1] {
        expected.extend_from_slice(&code.to_le_bytes());
    }
    let written = write_to_bytes(spec(2, 16, SampleFormat::Int), Default::default(), &samples);
    assert_eq!(written, expected);
}

// ---------- bad input ----------

fn valid_file() -> Vec<u8> {
    write_to_bytes(
        spec(2, 16, SampleFormat::Int),
        Default::default(),
        &[0.25; 400],
    )
}

#[test]
fn empty_input_is_a_clear_error() {
    let message = open_err(Vec::new()).to_string();
    assert_eq!(message, "not a WAV file: the file is empty (0 bytes)");
}

#[test]
fn not_a_wav_file_names_what_was_found() {
    let message = open_err(b"ID3\x03\x00\x00\x00\x00\x00\x00\x00\x00".to_vec()).to_string();
    assert_eq!(
        message,
        "not a WAV file: expected 'RIFF', 'RF64' or 'BW64' at byte 0, found bytes 49 44 33 03"
    );
    let mut avi = valid_file();
    avi[8..12].copy_from_slice(b"AVI ");
    let message = open_err(avi).to_string();
    assert_eq!(
        message,
        "not a WAV file: expected 'WAVE' at byte 8, found 'AVI '"
    );
}

#[test]
fn truncated_headers_say_where_the_file_ends() {
    let full = valid_file();
    let cases = [
        (3, "file ends at byte 3 inside the RIFF header"),
        (10, "file ends at byte 10 inside the RIFF header"),
        (
            20,
            "file ends at byte 20 inside the 'JUNK' chunk at byte 12 (declared 28 bytes)",
        ),
        (
            52,
            "file ends at byte 52 inside the chunk header at byte 48",
        ),
        (
            60,
            "file ends at byte 60 inside the fmt chunk (declared 16 bytes from byte 56)",
        ),
        (
            76,
            "file ends at byte 76 inside the chunk header at byte 72",
        ),
    ];
    for (len, expected) in cases {
        let message = open_err(full[..len].to_vec()).to_string();
        assert_eq!(message, format!("truncated header: {expected}"));
    }
    // Cut right after the fmt chunk: no data chunk at all.
    let message = open_err(full[..72].to_vec()).to_string();
    assert_eq!(
        message,
        "invalid WAV file: no data chunk before the end of the file at byte 72"
    );
}

#[test]
fn truncated_data_reports_expected_and_found_frames() {
    let full = valid_file(); // 200 stereo 16-bit frames = 800 bytes from byte 80
    let cut = full[..full.len() - 10].to_vec();
    match open_err(cut) {
        WavError::DataTruncated {
            expected_frames,
            found_frames,
            declared_bytes,
            file_bytes,
            data_start,
        } => {
            assert_eq!((expected_frames, found_frames), (200, 197));
            assert_eq!((declared_bytes, file_bytes, data_start), (800, 870, 80));
        }
        other => panic!("unexpected {other}"),
    }
    let message = open_err(full[..full.len() - 10].to_vec()).to_string();
    assert!(
        message.contains("expected 200 frames, found 197"),
        "{message}"
    );
}

/// A byte source whose reported length is larger than the bytes it yields, as when a file is
/// cut while it is being read.
struct ShrunkFile {
    inner: Cursor<Vec<u8>>,
    missing_bytes: u64,
}

impl Read for ShrunkFile {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        self.inner.read(buf)
    }
}

impl Seek for ShrunkFile {
    fn seek(&mut self, pos: SeekFrom) -> std::io::Result<u64> {
        match pos {
            SeekFrom::End(offset) => {
                let claimed = self.inner.get_ref().len() as u64 + self.missing_bytes;
                self.inner
                    .seek(SeekFrom::Start((claimed as i64 + offset) as u64))
            }
            other => self.inner.seek(other),
        }
    }
}

#[test]
fn data_ending_while_reading_is_reported_with_frame_counts() {
    let full = valid_file();
    let shrunk = ShrunkFile {
        inner: Cursor::new(full[..full.len() - 40].to_vec()),
        missing_bytes: 40,
    };
    let mut reader = WavReader::new(shrunk).unwrap();
    assert_eq!(reader.frames(), 200);
    let mut planes = vec![Vec::new(); 2];
    let message = reader
        .read_planar(&mut planes, 1_000)
        .unwrap_err()
        .to_string();
    assert_eq!(
        message,
        "truncated data: expected 200 frames, but the file ended after 190"
    );
    assert_eq!(reader.read_planar(&mut planes, 1_000).unwrap(), 0);
}

#[test]
fn zero_frames_is_a_valid_file() {
    let bytes = write_to_bytes(spec(4, 24, SampleFormat::Int), Default::default(), &[]);
    let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
    assert_eq!(reader.frames(), 0);
    let mut planes = vec![Vec::new(); 4];
    assert_eq!(reader.read_planar(&mut planes, 64).unwrap(), 0);
    assert_eq!(reader.read_interleaved(&mut [0.0; 8]).unwrap(), 0);
}

#[test]
fn huge_declared_sizes_give_clear_errors_without_allocating() {
    // Plain RIFF data chunk claiming 0xFFFFFFF0 bytes.
    let mut riff_huge = valid_file();
    riff_huge[76..80].copy_from_slice(&le32(0xFFFF_FFF0));
    let message = open_err(riff_huge).to_string();
    assert!(
        message.starts_with("truncated data: declared data size 4.3 GB"),
        "{message}"
    );
    assert!(message.contains("exceeds the file size 880 B"), "{message}");

    // RF64 data size of 9 TB in ds64 in a file of about 1.2 MB.
    let options = WriterOptions {
        rf64: true,
        ..Default::default()
    };
    let mut rf64 = write_to_bytes(spec(2, 16, SampleFormat::Int), options, &vec![0.0; 600_000]);
    rf64[28..36].copy_from_slice(&9_000_000_000_000u64.to_le_bytes());
    let message = open_err(rf64.clone()).to_string();
    assert!(
        message.starts_with("truncated data: declared data size 9.0 TB")
            && message.contains("exceeds the file size 1.2 MB"),
        "{message}"
    );
    // A ds64 table length of 4 billion entries in a 28-byte ds64 chunk is not allocated.
    rf64[28..36].copy_from_slice(&1_200_000u64.to_le_bytes());
    rf64[44..48].copy_from_slice(&le32(0xFFFF_FFFF));
    assert_eq!(WavReader::new(Cursor::new(rf64)).unwrap().frames(), 300_000);

    // A fmt chunk claiming 4 GB.
    let mut fmt_huge = valid_file();
    fmt_huge[52..56].copy_from_slice(&le32(0xFFFF_FF00));
    let message = open_err(fmt_huge).to_string();
    assert!(message.starts_with("truncated header: file ends at byte 880 inside the fmt chunk"));
}

#[test]
fn impossible_fmt_values_are_named() {
    let with_fmt = |fmt: Vec<u8>| riff(&[chunk(b"fmt ", &fmt), chunk(b"data", &[0; 8])]);
    let cases = [
        (
            pcm_fmt(1, 0, 48_000, 0, 16),
            "invalid format: zero channels",
        ),
        (pcm_fmt(1, 2, 0, 4, 16), "invalid format: zero sample rate"),
        (
            pcm_fmt(1, 2, 48_000, 6, 16),
            "invalid format: block align mismatch: the fmt chunk declares 6 bytes per frame, \
             but 2 channels of 16-bit samples need 4",
        ),
        (
            pcm_fmt(1, 1, 48_000, 2, 12),
            "unsupported sample format: 12-bit PCM (8, 16, 24 and 32-bit are supported)",
        ),
        (
            pcm_fmt(3, 1, 48_000, 2, 16),
            "unsupported sample format: 16-bit float (32 and 64-bit are supported)",
        ),
        (
            pcm_fmt(0x55, 2, 48_000, 0, 0),
            "unsupported sample format: format tag 0x0055, MPEG Layer 3 (only PCM 0x0001, IEEE \
             float 0x0003 and WAVE_FORMAT_EXTENSIBLE 0xFFFE are read)",
        ),
        (
            pcm_fmt(1, 1, 48_000, 2, 16)[..14].to_vec(),
            "invalid format: the fmt chunk at byte 12 holds 14 bytes; it needs at least 16",
        ),
        (
            pcm_fmt(0xFFFE, 1, 48_000, 2, 16),
            "invalid format: the WAVE_FORMAT_EXTENSIBLE fmt chunk holds 16 bytes; it needs 40",
        ),
    ];
    for (fmt, expected) in cases {
        assert_eq!(open_err(with_fmt(fmt)).to_string(), expected);
    }
    let mut unknown_guid = pcm_fmt(0xFFFE, 1, 48_000, 2, 16);
    unknown_guid.extend_from_slice(&le16(22));
    unknown_guid.extend_from_slice(&le16(16));
    unknown_guid.extend_from_slice(&le32(4));
    let mut guid = GUID_PCM;
    guid[0] = 0x02; // KSDATAFORMAT_SUBTYPE_ADPCM
    unknown_guid.extend_from_slice(&guid);
    assert_eq!(
        open_err(with_fmt(unknown_guid)).to_string(),
        "unsupported sample format: WAVE_FORMAT_EXTENSIBLE subformat \
         00000002-0000-0010-8000-00AA00389B71 (only PCM and IEEE float, plain or AMB B-format, are read)"
    );
}

#[test]
fn writer_rejects_bad_specs_and_buffers() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("never.wav");
    let zero = WavWriter::create(&path, spec(0, 16, SampleFormat::Int))
        .err()
        .unwrap();
    assert_eq!(zero.to_string(), "invalid format: zero channels");
    assert!(!path.exists(), "a bad spec must not create a file");
    let twelve = WavWriter::create(&path, spec(1, 12, SampleFormat::Int))
        .err()
        .unwrap();
    assert!(twelve.to_string().contains("12-bit PCM"));

    let mut cursor = Cursor::new(Vec::new());
    let mut writer = WavWriter::new(
        &mut cursor,
        spec(2, 16, SampleFormat::Int),
        Default::default(),
    )
    .unwrap();
    let odd = writer.write_interleaved(&[0.0; 3]).unwrap_err().to_string();
    assert_eq!(
        odd,
        "buffer mismatch: write_interleaved got 3 samples, not a multiple of 2 channels"
    );
    let ragged = writer
        .write_planar(&[&[0.0; 4], &[0.0; 3]])
        .unwrap_err()
        .to_string();
    assert_eq!(
        ragged,
        "buffer mismatch: write_planar: channel 0 has 4 samples but channel 1 has 3"
    );
    let wrong = writer.write_planar(&[&[0.0; 4]]).unwrap_err().to_string();
    assert_eq!(
        wrong,
        "buffer mismatch: write_planar got 1 channel slices for a 2-channel file"
    );
    writer.finalize().unwrap();

    let mut reader = WavReader::new(Cursor::new(cursor.into_inner())).unwrap();
    assert_eq!(reader.frames(), 0);
    let mut three = vec![Vec::new(); 3];
    let message = reader.read_planar(&mut three, 4).unwrap_err().to_string();
    assert_eq!(
        message,
        "buffer mismatch: read_planar got 3 channel buffers for a 2-channel file"
    );
}

// ---------- never panic ----------

/// Opens `bytes` and, if that works, reads everything. Reading an honest in-memory file that
/// opened must deliver exactly `frames()` frames.
fn open_and_drain(bytes: Vec<u8>) -> Result<(), TestCaseError> {
    let file_len = bytes.len() as u64;
    if let Ok(mut reader) = WavReader::new(Cursor::new(bytes)) {
        let spec = reader.spec();
        let block = u64::from(spec.channels) * u64::from(spec.bytes_per_sample());
        prop_assert!(reader.data_start_byte() + reader.frames() * block <= file_len);
        let mut planes = vec![Vec::new(); spec.channels as usize];
        let mut total = 0u64;
        loop {
            let got = reader
                .read_planar(&mut planes, 333)
                .map_err(|e| TestCaseError::fail(format!("read failed after a good open: {e}")))?;
            if got == 0 {
                break;
            }
            total += got as u64;
        }
        prop_assert_eq!(total, reader.frames());
    }
    Ok(())
}

fn valid_headers() -> Vec<Vec<u8>> {
    let rf64 = WriterOptions {
        rf64: true,
        extensible: true,
        bw64: false,
    };
    vec![
        valid_file(),
        write_to_bytes(spec(3, 24, SampleFormat::Int), rf64, &[0.1; 30]),
        write_to_bytes(
            spec(1, 64, SampleFormat::Float),
            Default::default(),
            &[0.1; 5],
        ),
        riff(&[
            chunk(b"LIST", b"abc"),
            chunk(b"fmt ", &pcm_fmt(1, 1, 8_000, 1, 8)),
            chunk(b"data", &[1, 2, 3]),
        ]),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn arbitrary_bytes_never_panic(bytes in proptest::collection::vec(any::<u8>(), 0..600)) {
        open_and_drain(bytes)?;
    }

    #[test]
    fn arbitrary_bytes_behind_a_valid_magic_never_panic(
        magic in prop_oneof![Just(*b"RIFF"), Just(*b"RF64"), Just(*b"BW64")],
        tail in proptest::collection::vec(any::<u8>(), 0..600),
    ) {
        let mut bytes = magic.to_vec();
        bytes.extend_from_slice(&[0xFF, 0xFF, 0xFF, 0xFF]);
        bytes.extend_from_slice(b"WAVE");
        bytes.extend_from_slice(&tail);
        open_and_drain(bytes)?;
    }

    #[test]
    fn mutated_valid_headers_never_panic(
        which in 0usize..4,
        edits in proptest::collection::vec((0usize..120, any::<u8>()), 1..8),
        cut in proptest::option::of(0usize..200),
    ) {
        let mut bytes = valid_headers().swap_remove(which);
        for (index, value) in edits {
            if index < bytes.len() {
                bytes[index] = value;
            }
        }
        if let Some(cut) = cut {
            bytes.truncate(cut);
        }
        open_and_drain(bytes)?;
    }
}
