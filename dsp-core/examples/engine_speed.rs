//! Runs the demo scene through the engine as the plugin would (audio side → pooled hand-off →
//! analysis) and prints the CPU share of each side.
//!
//! `cargo run --release -p fieldglass-dsp --example engine_speed -- --order 7 [--seconds 20]
//! [--cold-input]`
//!
//! Settings: 48 kHz, 512-frame host buffers, 30 map updates per second, 1° grid, max-rE. Both
//! sides run on this one thread, one after the other, so each is timed alone, in thread CPU
//! time. Each host buffer is synthesised just before it is handed over (synthesis is not
//! timed), so it is in cache, as a buffer a host has just filled would be. `--cold-input`
//! instead pre-renders the whole scene and reads each buffer from main memory, which shows the
//! audio side's cost when the host's buffer is not in cache. The last line is
//! `order N: analysis A% of one core, audio side B% of one core`.

use fieldglass_dsp::engine::handoff::handoff;
use fieldglass_dsp::engine::{AnalysisSettings, Analyzer, MapMethod, StreamSetup};
use fieldglass_dsp::scene::{DemoScene, SceneConfig};
use std::process::ExitCode;
use std::time::Duration;

/// CPU time of this thread (not wall time, so other load on the machine does not count).
fn thread_cpu_time() -> Duration {
    let mut t = libc::timespec {
        tv_sec: 0,
        tv_nsec: 0,
    };
    // SAFETY: clock_gettime writes one timespec into the valid pointer given.
    unsafe { libc::clock_gettime(libc::CLOCK_THREAD_CPUTIME_ID, &mut t) };
    Duration::new(t.tv_sec as u64, t.tv_nsec as u32)
}

const SAMPLE_RATE_HZ: f64 = 48_000.0;
const HOST_BUFFER: usize = 512;

struct Options {
    order: usize,
    seconds: f64,
    cold_input: bool,
}

fn parse() -> Result<Options, String> {
    let (mut order, mut seconds, mut cold_input) = (7usize, 20.0f64, false);
    let mut args = std::env::args().skip(1);
    while let Some(flag) = args.next() {
        if flag == "--cold-input" {
            cold_input = true;
            continue;
        }
        let value = args.next().ok_or_else(|| format!("{flag} needs a value"))?;
        match flag.as_str() {
            "--order" => {
                order = value
                    .parse()
                    .map_err(|_| format!("--order: '{value}' is not a whole number"))?
            }
            "--seconds" => {
                seconds = value
                    .parse()
                    .map_err(|_| format!("--seconds: '{value}' is not a number"))?
            }
            other => {
                return Err(format!(
                    "unknown option {other} (expected --order N, --seconds S, --cold-input)"
                ));
            }
        }
    }
    if !(1..=7).contains(&order) {
        return Err(format!(
            "--order {order}: the engine supports orders 1 to 7"
        ));
    }
    Ok(Options {
        order,
        seconds: seconds.max(1.0),
        cold_input,
    })
}

fn main() -> ExitCode {
    let Options {
        order,
        seconds,
        cold_input,
    } = match parse() {
        Ok(v) => v,
        Err(e) => {
            eprintln!("engine_speed: {e}");
            return ExitCode::from(2);
        }
    };
    let config = SceneConfig {
        order,
        sample_rate_hz: SAMPLE_RATE_HZ,
        ..SceneConfig::default()
    };
    let mut scene = DemoScene::new(config).expect("demo scene");
    let channels = scene.channels();
    let settings = AnalysisSettings {
        method: MapMethod::MaxRe,
        grid_step_deg: 1.0,
        map_rate_hz: 30.0,
        ..Default::default()
    };
    let mut analyzer = Analyzer::new(
        StreamSetup {
            sample_rate_hz: SAMPLE_RATE_HZ,
            channels,
        },
        settings,
    )
    .expect("analyzer");
    let (mut audio, receiver) = handoff(channels, HOST_BUFFER, 64);

    let total = (seconds * SAMPLE_RATE_HZ) as usize;
    // Cold input: the whole scene rendered up front, each buffer read from main memory.
    let mut rendered = vec![vec![0.0f32; if cold_input { total } else { 0 }]; channels];
    if cold_input {
        let mut refs: Vec<&mut [f32]> = rendered.iter_mut().map(|c| c.as_mut_slice()).collect();
        scene.render(&mut refs);
    }
    // Hot input: one host buffer, rendered just before it is handed over.
    let mut host_buffer = vec![vec![0.0f32; HOST_BUFFER]; channels];

    let (mut audio_time, mut analysis_time) = (Duration::ZERO, Duration::ZERO);
    let mut snapshots = 0usize;
    let mut start = 0;
    while start < total {
        let end = (start + HOST_BUFFER).min(total);
        let mut refs: Vec<&[f32]> = Vec::with_capacity(channels);
        if cold_input {
            refs.extend(rendered.iter().map(|c| &c[start..end]));
        } else {
            let mut outs: Vec<&mut [f32]> = host_buffer
                .iter_mut()
                .map(|c| &mut c[..end - start])
                .collect();
            scene.render(&mut outs);
            refs.extend(host_buffer.iter().map(|c| &c[..end - start]));
        }
        let t0 = thread_cpu_time();
        audio.push(&refs);
        let t1 = thread_cpu_time();
        receiver.drain_with(|block| {
            let empty: &[f32] = &[];
            let mut block_refs = [empty; 64];
            for (c, r) in block_refs.iter_mut().enumerate().take(block.channels()) {
                *r = block.channel(c);
            }
            if analyzer.process(&block_refs[..block.channels()]) {
                snapshots += 1;
            }
        });
        audio_time += t1 - t0;
        analysis_time += thread_cpu_time() - t1;
        start = end;
    }
    let audio_s = total as f64 / SAMPLE_RATE_HZ;
    let s = analyzer.snapshot();
    println!(
        "input {}",
        if cold_input {
            "read from main memory (--cold-input)"
        } else {
            "in cache, as from a host"
        }
    );
    println!(
        "{channels} channels, {audio_s:.1} s of demo audio, {snapshots} snapshots ({:.1} per s), {} dropped blocks",
        snapshots as f64 / audio_s,
        audio.counters().dropped_blocks()
    );
    if let Some(top) = s.sources.first() {
        println!(
            "strongest direction at the end: az {:.1}°, el {:.1}°",
            top.direction.azimuth_deg, top.direction.elevation_deg
        );
    }
    println!(
        "order {order}: analysis {:.2}% of one core, audio side {:.3}% of one core",
        100.0 * analysis_time.as_secs_f64() / audio_s,
        100.0 * audio_time.as_secs_f64() / audio_s
    );
    ExitCode::SUCCESS
}
