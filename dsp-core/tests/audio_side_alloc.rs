//! The audio side of the engine never allocates (DESIGN.md quality bar): a counting global
//! allocator records allocations made on the calling thread while `AudioSide::push` runs with a
//! live analysis thread behind it, over every order and many buffer sizes.

use fieldglass_dsp::engine::{AnalysisSettings, Engine, EngineControl, SnapshotSlot, StreamSetup};
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::atomic::{AtomicUsize, Ordering};

struct Counting;
static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);
thread_local! {
    static TRACKING: Cell<bool> = const { Cell::new(false) };
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if TRACKING.with(|t| t.get()) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        if TRACKING.with(|t| t.get()) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        if TRACKING.with(|t| t.get()) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

#[test]
fn push_never_allocates_or_frees() {
    for order in 1..=7usize {
        let channels = (order + 1) * (order + 1);
        let control = EngineControl::new(AnalysisSettings {
            grid_step_deg: 5.0,
            ..Default::default()
        });
        let slot = SnapshotSlot::new();
        let setup = StreamSetup {
            sample_rate_hz: 48_000.0,
            channels,
        };
        let (mut audio, mut thread) = Engine::start(setup, 4096, control.clone(), slot).unwrap();
        let buffers: Vec<Vec<f32>> = (0..channels)
            .map(|c| {
                (0..4096)
                    .map(|i| ((i * (c + 1)) as f32 * 0.001).sin() * 0.5)
                    .collect()
            })
            .collect();
        let sizes = [1usize, 7, 64, 480, 512, 1000, 2048, 4096, 3, 333];
        let mut refs: Vec<&[f32]> = Vec::with_capacity(channels);
        for round in 0..200 {
            let n = sizes[round % sizes.len()];
            refs.clear();
            refs.extend(buffers.iter().map(|b| &b[..n]));
            if round % 50 == 25 {
                control.update(|s| s.hold = !s.hold);
            }
            TRACKING.with(|t| t.set(true));
            audio.push(&refs);
            TRACKING.with(|t| t.set(false));
        }
        thread.stop();
        assert_eq!(
            ALLOCATIONS.load(Ordering::Relaxed),
            0,
            "order {order}: the audio side allocated"
        );
    }
}
