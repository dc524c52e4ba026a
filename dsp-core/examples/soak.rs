//! Soak run: the threaded engine (as the plugin runs it) fed at full speed, with random setting
//! changes, for a configurable time; prints dropped blocks, blocks analysed and memory growth.
//!
//! `cargo run --release -p fieldglass-dsp --example soak -- [--seconds 60] [--order 7] [--seed 1]`
//!
//! The feeding thread plays the part of a host's audio thread with no real-time pacing: it
//! pushes the demo scene (48 kHz, random host buffer sizes 1 to 1024 frames) through
//! `AudioSide::push` as fast as it can, so the analysis thread is always behind and most blocks
//! are dropped by design; what matters is that nothing grows, stalls or breaks. Every 50 ms of
//! wall time one random setting changes (assumed format, map method, band, time constant);
//! about once a second the latest snapshot is checked for non-finite map values and its
//! sequence for progress. Resident memory (/proc/self/statm) is read after the first 10 % of
//! the run (baseline) and at the end.

use fieldglass_dsp::engine::{
    AnalysisSettings, Band, Engine, EngineControl, MapMethod, SnapshotSlot, StreamSetup,
};
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::scene::{DemoScene, SceneConfig};
use std::process::ExitCode;
use std::time::{Duration, Instant};

const SAMPLE_RATE_HZ: f64 = 48_000.0;
const MAX_HOST_BUFFER: usize = 1024;
/// Seconds of demo audio rendered once and looped.
const SCENE_SECONDS: f64 = 4.0;
const CHANGE_EVERY: Duration = Duration::from_millis(50);
const CHECK_EVERY: Duration = Duration::from_secs(1);

struct Options {
    seconds: f64,
    order: usize,
    seed: u64,
}

fn parse() -> Result<Options, String> {
    let mut o = Options {
        seconds: 60.0,
        order: 7,
        seed: 1,
    };
    let mut args = std::env::args().skip(1);
    while let Some(flag) = args.next() {
        let value = args.next().ok_or_else(|| format!("{flag} needs a value"))?;
        let bad = |what: &str| format!("{flag}: '{value}' is not {what}");
        match flag.as_str() {
            "--seconds" => o.seconds = value.parse().map_err(|_| bad("a number"))?,
            "--order" => o.order = value.parse().map_err(|_| bad("a whole number"))?,
            "--seed" => o.seed = value.parse().map_err(|_| bad("a whole number"))?,
            other => {
                return Err(format!(
                    "unknown option {other} (expected --seconds S, --order N, --seed N)"
                ));
            }
        }
    }
    if !(1..=7).contains(&o.order) {
        return Err(format!("--order {}: orders 1 to 7", o.order));
    }
    if !(o.seconds.is_finite() && o.seconds > 0.0) {
        return Err(format!("--seconds {}: must be positive", o.seconds));
    }
    Ok(o)
}

/// xorshift64*: the same seed gives the same buffer sizes and setting changes.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

fn resident_mib() -> f64 {
    let statm = std::fs::read_to_string("/proc/self/statm").unwrap_or_default();
    let pages: f64 = statm
        .split_whitespace()
        .nth(1)
        .and_then(|v| v.parse().ok())
        .unwrap_or(0.0);
    // SAFETY: sysconf only reads a system constant.
    let page = unsafe { libc::sysconf(libc::_SC_PAGESIZE) }.max(1) as f64;
    pages * page / (1024.0 * 1024.0)
}

fn threads() -> usize {
    std::fs::read_dir("/proc/self/task").map_or(0, |d| d.count())
}

/// Changes one setting at random; returns a short description.
fn random_change(control: &EngineControl, rng: &mut Rng) -> &'static str {
    match rng.below(4) {
        0 => {
            // FuMa is defined to third order only: above that the analysis keeps the previous
            // format, which is part of what this exercises.
            let f = AmbiFormat::ALL[rng.below(AmbiFormat::ALL.len())];
            control.update(|s| s.assumed_format = f);
            "format"
        }
        1 => {
            let m = MapMethod::ALL[rng.below(MapMethod::ALL.len())];
            control.update(|s| s.method = m);
            "method"
        }
        2 => {
            let b = Band::ALL[rng.below(Band::ALL.len())];
            control.update(|s| s.band = b);
            "band"
        }
        _ => {
            // Log-uniform over the 50 ms … 10 s range.
            let t = 50.0 * (200.0f64).powf(rng.unit());
            control.update(|s| s.time_constant_ms = t);
            "time constant"
        }
    }
}

fn main() -> ExitCode {
    let o = match parse() {
        Ok(o) => o,
        Err(e) => {
            eprintln!("soak: {e}");
            return ExitCode::from(2);
        }
    };
    let mut scene = DemoScene::new(SceneConfig {
        order: o.order,
        sample_rate_hz: SAMPLE_RATE_HZ,
        ..SceneConfig::default()
    })
    .expect("demo scene");
    let channels = scene.channels();
    let scene_frames = (SCENE_SECONDS * SAMPLE_RATE_HZ) as usize;
    let mut audio = vec![vec![0.0f32; scene_frames]; channels];
    {
        let mut refs: Vec<&mut [f32]> = audio.iter_mut().map(|c| c.as_mut_slice()).collect();
        scene.render(&mut refs);
    }

    let threads_before = threads();
    let control = EngineControl::new(AnalysisSettings::default());
    let slot = SnapshotSlot::new();
    let setup = StreamSetup {
        sample_rate_hz: SAMPLE_RATE_HZ,
        channels,
    };
    let (mut side, mut thread) =
        Engine::start(setup, MAX_HOST_BUFFER, control.clone(), slot.clone()).expect("engine");

    let mut rng = Rng(o.seed.max(1));
    let run = Duration::from_secs_f64(o.seconds);
    let baseline_at = run / 10;
    let start = Instant::now();
    let (mut next_change, mut next_check) = (start + CHANGE_EVERY, start + CHECK_EVERY);
    let mut baseline_mib = None;
    let mut changes = [0u64; 4];
    let (mut pushed_frames, mut pushes) = (0u64, 0u64);
    let (mut checks, mut stalls, mut bad_snapshots) = (0u64, 0u64, 0u64);
    let mut last_sequence = 0u64;
    let mut refs: Vec<&[f32]> = Vec::with_capacity(channels);
    let mut pos = 0usize;
    let rss_start = resident_mib();
    loop {
        let now = Instant::now();
        if now - start >= run {
            break;
        }
        let n = 1 + rng.below(MAX_HOST_BUFFER);
        let n = n.min(scene_frames - pos);
        refs.clear();
        refs.extend(audio.iter().map(|c| &c[pos..pos + n]));
        side.push(&refs);
        pos = (pos + n) % scene_frames;
        pushed_frames += n as u64;
        pushes += 1;
        if pushes % 64 != 0 {
            continue;
        }
        if now >= next_change {
            let what = random_change(&control, &mut rng);
            let i = ["format", "method", "band", "time constant"]
                .iter()
                .position(|w| *w == what)
                .unwrap_or(0);
            changes[i] += 1;
            next_change = now + CHANGE_EVERY;
        }
        if now >= next_check {
            checks += 1;
            match slot.latest() {
                Some(s) => {
                    if s.sequence <= last_sequence {
                        stalls += 1;
                    }
                    last_sequence = s.sequence;
                    if s.map.values_db.iter().any(|v| !v.is_finite()) {
                        bad_snapshots += 1;
                    }
                }
                None => stalls += 1,
            }
            next_check = now + CHECK_EVERY;
        }
        if baseline_mib.is_none() && now - start >= baseline_at {
            baseline_mib = Some(resident_mib());
        }
    }
    let wall = start.elapsed().as_secs_f64();
    // Let the analysis finish what is queued, then read the last snapshot.
    std::thread::sleep(Duration::from_millis(500));
    let last = slot.latest();
    let counters_sent = side.counters().sent_blocks();
    let counters_dropped = side.counters().dropped_blocks();
    let rss_end = resident_mib();
    let threads_running = threads();
    thread.stop();
    drop(side);
    let threads_after = threads();

    let audio_s = pushed_frames as f64 / SAMPLE_RATE_HZ;
    let analysed_s = last.as_ref().map_or(0.0, |s| s.time_s);
    println!(
        "order {} ({channels} channels), {wall:.0} s wall, seed {}",
        o.order, o.seed
    );
    println!(
        "pushed {audio_s:.0} s of audio in {pushes} host buffers ({:.1}x real time)",
        audio_s / wall
    );
    println!(
        "blocks handed over {counters_sent}, dropped {counters_dropped} ({:.1} % dropped); \
         analysed {analysed_s:.0} s of audio ({:.2}x real time)",
        100.0 * counters_dropped as f64 / (counters_sent + counters_dropped).max(1) as f64,
        analysed_s / wall
    );
    println!(
        "snapshots published {}; checks {checks}, without progress {stalls}, with non-finite map {bad_snapshots}",
        last.as_ref().map_or(0, |s| s.sequence)
    );
    println!(
        "setting changes: format {}, method {}, band {}, time constant {}",
        changes[0], changes[1], changes[2], changes[3]
    );
    let baseline = baseline_mib.unwrap_or(rss_start);
    println!(
        "RSS: {rss_start:.1} MiB at start, {baseline:.1} MiB after {:.0} s, {rss_end:.1} MiB at the end \
         (growth after the first {:.0} s: {:+.2} MiB)",
        baseline_at.as_secs_f64(),
        baseline_at.as_secs_f64(),
        rss_end - baseline
    );
    println!(
        "threads: {threads_before} before start, {threads_running} running, {threads_after} after stop"
    );
    if bad_snapshots > 0 || last.is_none() || threads_after != threads_before {
        eprintln!("soak: FAILED");
        return ExitCode::FAILURE;
    }
    ExitCode::SUCCESS
}
