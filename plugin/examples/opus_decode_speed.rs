//! Decode speed of the Ogg Opus reader, as a multiple of real time.
//!
//! `cargo run --release -p fieldglass --example opus_decode_speed -- FILE.opus [RAW_OUT.f32]`
//! (default file: the order-3 family-3 fixture). Times the whole read (Ogg demux, decode, gain,
//! planar copy) after the headers are read, best of three runs. With RAW_OUT it also writes the
//! decoded frames, interleaved 32-bit floats, for comparing with a reference decoder.

use fieldglass::opus::OpusReader;
use std::io::Write;
use std::time::Instant;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let path = args.next().unwrap_or_else(|| {
        concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/data/opus/family3_order3.opus"
        )
        .to_string()
    });
    let raw_out = args.next();
    let mut best = f64::INFINITY;
    let mut frames = 0u64;
    let mut channels = 0;
    for _ in 0..3 {
        let mut reader = OpusReader::open(&path)?;
        channels = reader.channels();
        let mut buffers = vec![Vec::with_capacity(4096); channels];
        let started = Instant::now();
        frames = 0;
        loop {
            let n = reader.read_planar(&mut buffers, 4096)?;
            if n == 0 {
                break;
            }
            frames += n as u64;
        }
        best = best.min(started.elapsed().as_secs_f64());
    }
    let seconds = frames as f64 / f64::from(fieldglass::opus::OPUS_SAMPLE_RATE_HZ);
    println!(
        "{path}: {channels} channels, {frames} frames ({seconds:.2} s) decoded in {:.1} ms: {:.0}x real time",
        best * 1e3,
        seconds / best
    );
    if let Some(out) = raw_out {
        let mut reader = OpusReader::open(&path)?;
        let mut buffers = vec![Vec::new(); reader.channels()];
        let mut file = std::io::BufWriter::new(std::fs::File::create(out)?);
        loop {
            let n = reader.read_planar(&mut buffers, 4096)?;
            if n == 0 {
                break;
            }
            for i in 0..n {
                for b in &buffers {
                    file.write_all(&b[i].to_le_bytes())?;
                }
            }
        }
    }
    Ok(())
}
