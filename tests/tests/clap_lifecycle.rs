//! 1,000 create / activate / process / deactivate / destroy cycles of the built plugin through
//! the CLAP ABI, counting this process's threads and resident memory before and after.
//!
//! One test in its own test binary, so no other test's threads or allocations are counted.

use fieldglass_tests::{
    Buffers, LAYOUT_CHANNELS, Plugin, Rng, load_plugin_entry, resident_bytes, thread_count,
};
use std::time::Instant;

const CYCLES: usize = 1000;
/// Cycles run before the baseline is taken, so one-time set-up (the library's statics,
/// nice-plug's shared background thread, the allocator's first arenas) is not counted as growth.
const WARM_UP: usize = 20;
/// Allowed growth of the resident set over the counted cycles. One activation at order 7
/// allocates a block pool of several MB, so a leak of a pool, an analyzer or a thread stack per
/// cycle would exceed this many times over; the bound leaves room for allocator noise.
const RSS_GROWTH_LIMIT_BYTES: u64 = 16 << 20;

const RATES_HZ: [f64; 4] = [44_100.0, 48_000.0, 96_000.0, 22_050.0];
const MAX_SIZES: [u32; 4] = [64, 512, 1024, 256];

fn cycle(entry: &clack_host::prelude::PluginEntry, i: usize, rng: &mut Rng) {
    let channels = LAYOUT_CHANNELS[i % LAYOUT_CHANNELS.len()];
    let rate = RATES_HZ[i % RATES_HZ.len()];
    let max = MAX_SIZES[(i / 7) % MAX_SIZES.len()];
    let mut plugin = Plugin::new(entry);
    plugin.select_channels(channels);
    let processor = plugin.start(rate, max);
    let mut buffers = Buffers::new(channels, max as usize);
    let seed = rng.next_u64();
    let processor = std::thread::scope(|s| {
        s.spawn(|| {
            let mut p = processor;
            let mut r = Rng::new(seed);
            for call in 0..8 {
                let n = r.range(1, max as usize);
                for input in buffers.input.iter_mut() {
                    for x in &mut input[..n] {
                        *x = r.noise() * 0.5;
                    }
                }
                buffers.process(&mut p, n);
                buffers.assert_passthrough(n, &format!("cycle {i}, call {call}"));
            }
            p
        })
        .join()
        .expect("audio thread")
    });
    plugin.stop(processor);
    drop(plugin);
}

/// The smallest thread count seen over 200 ms. A thread that has just been joined can still be
/// listed in /proc/self/task for a moment (the kernel wakes the joiner before it removes the
/// thread), so a single reading may count it; a leaked thread stays listed throughout.
fn settled_thread_count() -> usize {
    (0..20)
        .map(|_| {
            std::thread::sleep(std::time::Duration::from_millis(10));
            thread_count()
        })
        .min()
        .unwrap_or(0)
}

#[test]
fn thousand_lifecycles_leak_no_threads_and_no_memory() {
    let entry = load_plugin_entry();
    let mut rng = Rng::new(0x11fe_c7c1);
    let t0 = Instant::now();
    for i in 0..WARM_UP {
        cycle(&entry, i, &mut rng);
    }
    let threads_before = settled_thread_count();
    let rss_before = resident_bytes();
    let t1 = Instant::now();
    for i in WARM_UP..WARM_UP + CYCLES {
        cycle(&entry, i, &mut rng);
    }
    let elapsed = t1.elapsed();
    // Up to two seconds for threads that are still ending.
    let mut threads_after = settled_thread_count();
    for _ in 0..10 {
        if threads_after <= threads_before {
            break;
        }
        threads_after = settled_thread_count();
    }
    let rss_after = resident_bytes();
    eprintln!(
        "{CYCLES} cycles in {:.1} s ({:.1} ms each; warm-up {:.1} s); threads {threads_before} -> \
         {threads_after}; RSS {:.1} MiB -> {:.1} MiB",
        elapsed.as_secs_f64(),
        elapsed.as_secs_f64() * 1e3 / CYCLES as f64,
        (t1 - t0).as_secs_f64(),
        rss_before as f64 / 1048576.0,
        rss_after as f64 / 1048576.0,
    );
    assert!(threads_before > 0, "thread count readable");
    assert_eq!(threads_after, threads_before, "threads leaked");
    assert!(rss_before > 0, "RSS readable");
    let growth = rss_after.saturating_sub(rss_before);
    assert!(
        growth <= RSS_GROWTH_LIMIT_BYTES,
        "RSS grew by {:.1} MiB over {CYCLES} cycles (limit {} MiB)",
        growth as f64 / 1048576.0,
        RSS_GROWTH_LIMIT_BYTES >> 20
    );
}
