//! Turns (and optionally mirrors) the scene of an ACN/SN3D WAV file: the tool behind the README's
//! `compare` example, which needs a delivery turned by a known amount.
//!
//! `cargo run -p fieldglass --example turn_wav -- IN.wav OUT.wav YAW PITCH ROLL [left-right|front-back|up-down]`
//!
//! Angles in degrees with the conventions of `fieldglass compare` (docs/compare-json.md): a
//! reference direction u appears at R·M·u, R = Rz(yaw)·P(pitch)·Rx(roll), M the optional mirror.
//! Streams in blocks; writes 32-bit float; extra (non-spatial) channels pass unchanged.

use fieldglass::wav::{SampleFormat, WavReader, WavSpec, WavWriter, WriterOptions};
use fieldglass_dsp::compare::MirrorAxis;
use fieldglass_dsp::compare::orientation::{IDENTITY, multiply, rotation_from_angles};
use fieldglass_dsp::engine::ChannelLayout;
use fieldglass_dsp::sh::{ShRotation, channel_count};
use std::process::ExitCode;

const BLOCK_FRAMES: usize = 4096;

fn run(args: &[String]) -> Result<(), String> {
    let [input, output, yaw, pitch, roll, rest @ ..] = args else {
        return Err(
            "usage: turn_wav IN.wav OUT.wav YAW PITCH ROLL [left-right|front-back|up-down]".into(),
        );
    };
    let angle = |s: &String| {
        s.parse::<f64>()
            .map_err(|_| format!("'{s}' is not a number of degrees"))
    };
    let mirror = match rest.first().map(String::as_str) {
        None => IDENTITY,
        Some(label) => MirrorAxis::ALL
            .into_iter()
            .find(|m| m.label() == label)
            .ok_or_else(|| format!("unknown mirror '{label}'"))?
            .matrix(),
    };
    let q = multiply(
        &rotation_from_angles(angle(yaw)?, angle(pitch)?, angle(roll)?),
        &mirror,
    );
    let mut reader = WavReader::open(input).map_err(|e| format!("cannot read '{input}': {e}"))?;
    let spec = reader.spec();
    let channels = spec.channels as usize;
    let layout = ChannelLayout::from_channel_count(channels).map_err(|e| e.to_string())?;
    let spatial = channel_count(layout.order);
    let d = ShRotation::new(layout.order, &q);
    let out_spec = WavSpec {
        bits_per_sample: 32,
        sample_format: SampleFormat::Float,
        ..spec
    };
    let mut writer = WavWriter::with_options(output, out_spec, WriterOptions::default())
        .map_err(|e| format!("cannot write '{output}': {e}"))?;
    let mut buffers = vec![Vec::with_capacity(BLOCK_FRAMES); channels];
    let (mut x, mut y) = (vec![0.0f64; spatial], vec![0.0f64; spatial]);
    loop {
        let n = reader
            .read_planar(&mut buffers, BLOCK_FRAMES)
            .map_err(|e| format!("cannot read '{input}': {e}"))?;
        if n == 0 {
            break;
        }
        // Frame by frame across the planar buffers (one frame is one SH vector).
        #[allow(clippy::needless_range_loop)]
        for t in 0..n {
            for (acn, v) in x.iter_mut().enumerate() {
                *v = buffers[acn][t] as f64;
            }
            d.apply(&x, &mut y);
            for (acn, v) in y.iter().enumerate() {
                buffers[acn][t] = *v as f32;
            }
        }
        let planes: Vec<&[f32]> = buffers.iter().map(|b| &b[..n]).collect();
        writer
            .write_planar(&planes)
            .map_err(|e| format!("cannot write '{output}': {e}"))?;
    }
    writer
        .finalize()
        .map_err(|e| format!("cannot write '{output}': {e}"))
}

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match run(&args) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("turn_wav: {e}");
            ExitCode::from(2)
        }
    }
}
