//! The WAV / extensible / RF64 / BW64 reader on arbitrary bytes: opening either fails with an
//! error or gives a reader whose every read succeeds or errs, never panics, never allocates from
//! a size in the file, and never yields more frames than it announced.
#![no_main]

use fieldglass::wav::WavReader;
use libfuzzer_sys::fuzz_target;
use std::io::Cursor;

fuzz_target!(|data: &[u8]| {
    let Ok(mut reader) = WavReader::new(Cursor::new(data)) else {
        return;
    };
    let spec = reader.spec();
    let announced = reader.frames();
    let channels = usize::from(spec.channels);
    // Both read paths, in small pieces, until the end or an error.
    let mut planar = vec![Vec::new(); channels];
    let mut interleaved = vec![0.0f32; channels * 61];
    let mut total = 0u64;
    for round in 0..4096 {
        let got = if round % 2 == 0 {
            reader.read_planar(&mut planar, 97)
        } else {
            reader.read_interleaved(&mut interleaved)
        };
        match got {
            Ok(0) | Err(_) => break,
            Ok(n) => total += n as u64,
        }
    }
    assert!(total <= announced, "read {total} frames of {announced}");
    // Seeking anywhere (inside, at the end, past it: clamped to the end) is an error or lands
    // where asked.
    for frame in [0, announced / 2, announced, announced.saturating_add(1), u64::MAX] {
        if reader.seek_frame(frame).is_ok() {
            assert_eq!(reader.frames_remaining(), announced - frame.min(announced));
        }
    }
});
