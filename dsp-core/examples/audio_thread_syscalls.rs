//! Drives the engine's audio side from a thread of its own, the way a host's audio callback
//! does (256-frame blocks every 5.3 ms, 16 channels, 3 s; waiting by spinning so that the loop
//! itself makes no system call), and prints that thread's id. Run it under `strace -f` to see
//! that the audio side makes no system call between blocks (`.ci/run` does: it counts the
//! futex calls of that thread, which must be 0).
//!
//! `strace -f -o trace.txt target/debug/examples/audio_thread_syscalls`

use fieldglass_dsp::engine::{AnalysisSettings, Engine, EngineControl, SnapshotSlot, StreamSetup};
use std::time::{Duration, Instant};

const CHANNELS: usize = 16;
const BLOCK_FRAMES: usize = 256;

fn main() {
    let control = EngineControl::new(AnalysisSettings::default());
    let slot = SnapshotSlot::new();
    let setup = StreamSetup {
        sample_rate_hz: 48_000.0,
        channels: CHANNELS,
    };
    let (mut side, mut analysis) =
        Engine::start(setup, BLOCK_FRAMES, control, slot).expect("engine");
    let audio = std::thread::spawn(move || {
        // SAFETY: gettid has no preconditions.
        let tid = unsafe { libc::syscall(libc::SYS_gettid) };
        println!("audio thread id {tid}");
        let buffer = vec![0.1f32; BLOCK_FRAMES];
        let block: Vec<&[f32]> = (0..CHANNELS).map(|_| buffer.as_slice()).collect();
        let period = Duration::from_secs_f64(BLOCK_FRAMES as f64 / 48_000.0);
        let start = Instant::now();
        let mut next = start;
        let mut pushes = 0u64;
        while start.elapsed() < Duration::from_secs(3) {
            side.push(&block);
            pushes += 1;
            next += period;
            while Instant::now() < next {
                std::hint::spin_loop();
            }
        }
        (side, pushes)
    });
    let (side, pushes) = audio.join().expect("audio thread");
    println!("blocks pushed {pushes}");
    drop(side);
    analysis.stop();
}
