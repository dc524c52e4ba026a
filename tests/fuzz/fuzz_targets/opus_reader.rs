//! The Ogg Opus reader on arbitrary bytes: opening either fails with an error or gives a reader
//! whose every read succeeds or errs, never panics, and never yields more frames than the last
//! granule position announced. Under `--cfg fuzzing` page checksums are not checked, so mutated
//! headers and packets reach the header parser and the decoder.
#![no_main]

use fieldglass::opus::OpusReader;
use libfuzzer_sys::fuzz_target;
use std::io::Cursor;

fuzz_target!(|data: &[u8]| {
    let Ok(mut reader) = OpusReader::new(Cursor::new(data)) else {
        return;
    };
    let announced = reader.frames();
    let mut planar = vec![Vec::new(); reader.channels()];
    let mut total = 0u64;
    for round in 0..2048 {
        match reader.read_planar(&mut planar, [1, 97, 960, 4096][round % 4]) {
            Ok(0) | Err(_) => break,
            Ok(n) => total += n as u64,
        }
    }
    assert!(total <= announced, "read {total} frames of {announced}");
});
