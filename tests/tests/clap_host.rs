//! The built plugin library loaded through the CLAP C ABI by a host harness (`clack-host`),
//! as a host application would: enumeration, layouts, activation across sample rates and
//! buffer sizes, bit-exact pass-through, hostile audio, state, parameter fuzzing.
//!
//! The library is the debug build with nice-plug's `assert_process_allocs`: any allocation
//! inside the plugin's `process()` aborts this test process, so every test here that processes
//! audio is also an allocation check.
//!
//! Processing runs on a thread of its own (the "audio thread"); creation, activation, state and
//! parameter flushes run on the test's thread (the "main thread"), as CLAP asks.

use fieldglass_dsp::scene::{DemoScene, SceneConfig};
use fieldglass_tests::{
    Buffers, LAYOUT_CHANNELS, PLUGIN_ID, Plugin, Rng, Started, load_plugin_entry,
};
use std::sync::OnceLock;

/// One second of the demo scene at order 7 (64 channels, ACN/SN3D, 48 kHz). The first
/// (N+1)² ACN channels of an order-7 SN3D scene are the order-N scene, so every layout takes
/// its channels from this one render.
fn scene() -> &'static [Vec<f32>] {
    static SCENE: OnceLock<Vec<Vec<f32>>> = OnceLock::new();
    SCENE.get_or_init(|| {
        let mut scene = DemoScene::new(SceneConfig {
            order: 7,
            ..SceneConfig::default()
        })
        .expect("demo scene");
        let frames = 48_000;
        let mut out = vec![vec![0.0f32; frames]; 64];
        let mut refs: Vec<&mut [f32]> = out.iter_mut().map(|c| c.as_mut_slice()).collect();
        scene.render(&mut refs);
        out
    })
}

/// Runs `f` with a started processor on a separate audio thread and hands the processor back.
fn on_audio_thread<R: Send>(
    processor: Started,
    f: impl FnOnce(&mut Started) -> R + Send,
) -> (Started, R) {
    std::thread::scope(|s| {
        s.spawn(move || {
            let mut p = processor;
            let r = f(&mut p);
            (p, r)
        })
        .join()
        .expect("audio thread")
    })
}

/// Feeds `total` frames of the scene (looping) in buffers whose sizes `next_size` chooses,
/// checking every buffer is passed through bit-identically. Returns the number of buffers.
fn play_scene(
    processor: &mut Started,
    buffers: &mut Buffers,
    total: usize,
    mut next_size: impl FnMut() -> usize,
    context: &str,
) -> usize {
    let scene = scene();
    let scene_frames = scene[0].len();
    let mut pos = 0usize;
    let mut done = 0usize;
    let mut calls = 0usize;
    while done < total {
        let n = next_size().min(total - done).max(1);
        for (c, input) in buffers.input.iter_mut().enumerate() {
            for (k, x) in input[..n].iter_mut().enumerate() {
                *x = scene[c][(pos + k) % scene_frames];
            }
        }
        buffers.process(processor, n);
        buffers.assert_passthrough(n, &format!("{context}, buffer {calls} ({n} frames)"));
        pos = (pos + n) % scene_frames;
        done += n;
        calls += 1;
    }
    calls
}

#[test]
fn factory_lists_the_plugin_with_its_id_name_and_features() {
    let entry = load_plugin_entry();
    let factory = entry.get_plugin_factory().expect("plugin factory");
    let descriptors: Vec<_> = factory.plugin_descriptors().collect();
    assert_eq!(descriptors.len(), 1, "one plugin in the library");
    let d = &descriptors[0];
    assert_eq!(d.id().unwrap().to_str().unwrap(), PLUGIN_ID);
    assert_eq!(d.name().unwrap().to_str().unwrap(), "Fieldglass");
    let features: Vec<String> = d
        .features()
        .map(|f| f.to_string_lossy().into_owned())
        .collect();
    // CLAP's standard feature strings (clap/plugin-features.h); "analyzer" is one of its main
    // categories, so no "audio-effect" is needed beside it.
    for expected in ["analyzer", "ambisonic"] {
        assert!(
            features.iter().any(|f| f == expected),
            "feature {expected} missing from {features:?}"
        );
    }
}

#[test]
fn every_layout_has_equal_input_and_output_channels() {
    let entry = load_plugin_entry();
    let mut plugin = Plugin::new(&entry);
    let layouts = plugin.layouts();
    let counts: Vec<u32> = layouts
        .iter()
        .map(|l| l.main_input_channels.expect("main input"))
        .collect();
    assert_eq!(
        counts,
        LAYOUT_CHANNELS.map(|c| c as u32).to_vec(),
        "{layouts:?}"
    );
    for layout in &layouts {
        assert_eq!(layout.main_output_channels, layout.main_input_channels);
        assert_eq!((layout.input_ports, layout.output_ports), (1, 1));
        assert!(plugin.select_layout(layout.id), "select {layout:?}");
        // The audio-ports extension reports the selected layout.
        let c = layout.main_input_channels.unwrap();
        assert_eq!(plugin.port_channels(), (vec![c], vec![c]), "{layout:?}");
    }
}

/// Sample rates the plugin must accept (DESIGN.md: 22.05 to 384 kHz).
const RATES_HZ: [f64; 6] = [22_050.0, 44_100.0, 48_000.0, 96_000.0, 192_000.0, 384_000.0];

/// Host maximum buffer sizes, 1 to 16384 frames: powers of two and some odd sizes.
const MAX_SIZES: [u32; 9] = [1, 7, 64, 333, 512, 1024, 2048, 4096, 16_384];

#[test]
fn demo_scene_passes_through_bit_identical_at_every_rate_size_and_layout() {
    let entry = load_plugin_entry();
    let mut rng = Rng::new(0x5eed_0001);
    let mut checked = 0usize;
    for &channels in &LAYOUT_CHANNELS {
        let mut plugin = Plugin::new(&entry);
        plugin.select_channels(channels);
        // The full grid: every rate with every max size, for every layout.
        for &rate in &RATES_HZ {
            for &max in &MAX_SIZES {
                let context = format!("{channels} ch, {rate} Hz, max {max}");
                let mut buffers = Buffers::new(channels, max as usize);
                let processor = plugin.start(rate, max);
                let seed = rng.next_u64();
                let (processor, calls) = on_audio_thread(processor, |p| {
                    let m = max as usize;
                    // Fixed full-size buffers, then random sizes 1..=max (a host may call
                    // with fewer frames than it announced).
                    let fixed_total = (4 * m).max(64);
                    let mut calls = play_scene(p, &mut buffers, fixed_total, || m, &context);
                    let mut r = Rng::new(seed);
                    let random_total = (4 * m).max(256);
                    calls += play_scene(
                        p,
                        &mut buffers,
                        random_total,
                        || r.range(1, m),
                        &format!("{context}, random sizes"),
                    );
                    calls
                });
                plugin.stop(processor);
                checked += calls;
            }
        }
    }
    assert!(checked > 0);
    eprintln!("{checked} buffers checked");
}
