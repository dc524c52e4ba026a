//! Prints how many times faster than real time `scan` runs on 16-bit PCM files of the demo
//! scene, on one thread and split over the machine's cores (the level meters and the decoding
//! of the next block beside the spatial side, the STFT frames of each block spread over the
//! cores; see `Analyzer::set_parallel`).
//!
//! `cargo run --release -p fieldglass --example scan_speed [-- DIR]`
//!
//! Cases (the ones the batch work is measured on): order 3, 16 channels, 120 s; order 7, 64
//! channels, 30 s; 48 kHz. The files are written once into DIR (default: a temporary folder)
//! and kept there, so that other tools can be timed on the same files. Timing is wall-clock of
//! the whole library call (open, decode, analysis, whole-programme maps), best of three.

use fieldglass::scan::{ScanInput, ScanOptions, scan};
use fieldglass::wav::{SampleFormat, WavSpec, WavWriter};
use fieldglass_dsp::scene::{DemoScene, SceneConfig};
use std::path::{Path, PathBuf};
use std::time::Instant;

fn write_pcm16(path: &Path, order: usize, seconds: f64) {
    if path.exists() {
        return;
    }
    let config = SceneConfig {
        order,
        ..SceneConfig::default()
    };
    let mut scene = DemoScene::new(config).expect("demo scene");
    let channels = scene.channels();
    let spec = WavSpec {
        channels: channels as u16,
        sample_rate: 48_000,
        bits_per_sample: 16,
        sample_format: SampleFormat::Int,
        channel_mask: Some(0),
    };
    let mut writer = WavWriter::create(path, spec).expect("create");
    let total = (seconds * 48_000.0) as usize;
    let mut buffers = vec![vec![0.0f32; 4800]; channels];
    let mut done = 0;
    while done < total {
        let mut refs: Vec<&mut [f32]> = buffers.iter_mut().map(|b| b.as_mut_slice()).collect();
        scene.render(&mut refs);
        let planes: Vec<&[f32]> = buffers.iter().map(|b| b.as_slice()).collect();
        writer.write_planar(&planes).expect("write");
        done += 4800;
    }
    writer.finalize().expect("finalize");
}

fn best_of_three(path: &Path, split: bool) -> f64 {
    (0..3)
        .map(|_| {
            let options = ScanOptions {
                parallel: split,
                ..ScanOptions::default()
            };
            let started = Instant::now();
            scan(&ScanInput::File(path.to_path_buf()), options).expect("scan");
            started.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn main() {
    let dir = std::env::args()
        .nth(1)
        .map(PathBuf::from)
        .unwrap_or_else(|| std::env::temp_dir().join("fieldglass-scan-speed"));
    std::fs::create_dir_all(&dir).expect("folder");
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    println!("{cores} core(s); files in {}", dir.display());
    for (order, seconds) in [(3usize, 120.0), (7, 30.0)] {
        let channels = (order + 1) * (order + 1);
        let path = dir.join(format!("order{order}-{channels}ch-{seconds:.0}s-pcm16.wav"));
        write_pcm16(&path, order, seconds);
        let one = best_of_three(&path, false);
        let two = best_of_three(&path, true);
        println!(
            "order {order}, {channels} ch, {seconds:.0} s: one thread {:.1}× real time ({one:.2} s), \
             split over {cores} cores {:.1}× real time ({two:.2} s)",
            seconds / one,
            seconds / two
        );
    }
}
