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
    AmbiConfig, Buffers, LAYOUT_CHANNELS, PLUGIN_ID, ParamDesc, Plugin, Rng, Started,
    load_plugin_entry,
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

/// CLAP's port type string for ambisonic ports, `CLAP_PORT_AMBISONIC` (clap/ext/ambisonic.h).
const PORT_AMBISONIC: &str = "ambisonic";

/// CLAP's numbers (clap/ext/ambisonic.h): orderings FuMa 0, ACN 1; normalisations maxN 0,
/// SN3D 1, N3D 2, SN2D 3, N2D 4.
const ACN_SN3D: AmbiConfig = AmbiConfig {
    ordering: 1,
    normalization: 1,
};

#[test]
fn every_layout_is_ambisonic_in_ports_configs_and_the_ambisonic_extension() {
    let entry = load_plugin_entry();
    let mut plugin = Plugin::new(&entry);
    assert!(plugin.has_ambisonic_extension(), "clap.ambisonic offered");
    for layout in plugin.layouts() {
        let context = format!("{layout:?}");
        assert_eq!(
            layout.main_input_type.as_deref(),
            Some(PORT_AMBISONIC),
            "{context}"
        );
        assert_eq!(
            layout.main_output_type.as_deref(),
            Some(PORT_AMBISONIC),
            "{context}"
        );
        assert!(plugin.select_layout(layout.id), "{context}");
        let (inputs, outputs) = plugin.ports();
        for port in inputs.iter().chain(&outputs) {
            assert_eq!(
                port.port_type.as_deref(),
                Some(PORT_AMBISONIC),
                "{context}: {port:?}"
            );
        }
        // The default assumption is ACN/SN3D, reported for the main port of either direction;
        // there is no second port.
        assert_eq!(
            plugin.ambisonic_config(true, 0),
            Some(ACN_SN3D),
            "{context}"
        );
        assert_eq!(
            plugin.ambisonic_config(false, 0),
            Some(ACN_SN3D),
            "{context}"
        );
        assert_eq!(plugin.ambisonic_config(true, 1), None, "{context}");

        // Every pair the engine reads is supported: ACN or FuMa ordering with SN3D, N3D or maxN,
        // FuMa ordering and maxN weights only to third order (DESIGN.md: FuMa is defined to
        // third order). The 2D normalisations and unknown numbers are not.
        let order = (layout.main_input_channels.unwrap() as f64).sqrt() as u32 - 1;
        for ordering in 0..=2u32 {
            for normalization in 0..=5u32 {
                let config = AmbiConfig {
                    ordering,
                    normalization,
                };
                let expected = match (ordering, normalization) {
                    (2.., _) | (_, 3..) => false,
                    (0, _) | (_, 0) => order <= 3,
                    _ => true,
                };
                assert_eq!(
                    plugin.ambisonic_supported(config),
                    expected,
                    "{context}: {config:?}"
                );
            }
        }
    }
}

#[test]
fn the_reported_ambisonic_config_follows_the_assumed_format() {
    let entry = load_plugin_entry();
    let mut plugin = Plugin::new(&entry);
    plugin.select_channels(16);
    let format = plugin
        .params()
        .into_iter()
        .find(|p| p.name == "Assumed format")
        .expect("format parameter");
    // Values are the choice's index (plugin/src/params.rs: AmbiX, ACN/N3D, FuMa, ACN/maxN).
    for (value, expected) in [
        (
            1.0,
            AmbiConfig {
                ordering: 1,
                normalization: 2,
            },
        ),
        (
            2.0,
            AmbiConfig {
                ordering: 0,
                normalization: 0,
            },
        ),
        (0.0, ACN_SN3D),
    ] {
        plugin.flush_params(&[(format.id, value)]);
        assert_eq!(
            plugin.ambisonic_config(true, 0),
            Some(expected),
            "value {value}"
        );
        assert_eq!(
            plugin.ambisonic_config(false, 0),
            Some(expected),
            "value {value}"
        );
    }
}

#[test]
fn in_place_processing_leaves_the_shared_buffers_untouched_in_every_layout() {
    let entry = load_plugin_entry();
    let values = hostile_values();
    for &channels in &LAYOUT_CHANNELS {
        let mut plugin = Plugin::new(&entry);
        plugin.select_channels(channels);
        // The plugin offers its main ports as an in-place pair (CLAP audio-ports: in_place_pair
        // names the other direction's port id).
        let (inputs, outputs) = plugin.ports();
        assert_eq!(
            inputs[0].in_place_pair,
            Some(outputs[0].id),
            "{channels} ch"
        );
        assert_eq!(
            outputs[0].in_place_pair,
            Some(inputs[0].id),
            "{channels} ch"
        );
        let max = 1024usize;
        let processor = plugin.start(48_000.0, max as u32);
        let mut buffers = Buffers::new(channels, max);
        let (processor, calls) = on_audio_thread(processor, |p| {
            let scene = scene();
            let mut rng = Rng::new(0x1a9_1ace + channels as u64);
            let mut pos = 0usize;
            for call in 0..300 {
                let n = rng.range(1, max);
                for (c, input) in buffers.input.iter_mut().enumerate() {
                    for (k, x) in input[..n].iter_mut().enumerate() {
                        // Mostly programme, now and then a hostile value.
                        *x = if rng.range(0, 63) == 0 {
                            values[rng.range(0, values.len() - 1)]
                        } else {
                            scene[c][(pos + k) % scene[c].len()]
                        };
                    }
                }
                buffers.process_in_place(p, n);
                buffers.assert_passthrough(n, &format!("{channels} ch in place, call {call}"));
                pos += n;
            }
            300
        });
        plugin.stop(processor);
        assert_eq!(calls, 300);
    }
}

/// The audio side's cost must not depend on subnormal input (the analysis thread flushes them,
/// the audio side only copies and compares). Prints the figures; asserts only a generous factor
/// on the fastest round of each kind, which other load on a shared machine disturbs least.
#[test]
fn subnormal_input_costs_no_more_than_normal_input() {
    let entry = load_plugin_entry();
    for &channels in &[4usize, 16, 64] {
        let mut plugin = Plugin::new(&entry);
        plugin.select_channels(channels);
        let frames = 512usize;
        let processor = plugin.start(48_000.0, frames as u32);
        let mut normal = Buffers::new(channels, frames);
        let mut subnormal = Buffers::new(channels, frames);
        let mut rng = Rng::new(0xde_0a11);
        for c in 0..channels {
            for k in 0..frames {
                normal.input[c][k] = rng.noise() * 0.5;
                // Uniform over the subnormal range, both signs (as clap-validator does).
                subnormal.input[c][k] = rng.noise() * f32::MIN_POSITIVE;
            }
        }
        assert!(
            subnormal
                .input
                .iter()
                .flatten()
                .all(|x| x.is_subnormal() || *x == 0.0)
        );
        let rounds = 100;
        let calls_per_round = 10;
        let (processor, mut times) = on_audio_thread(processor, |p| {
            let mut times = [Vec::new(), Vec::new()];
            // Interleaved rounds, so drift and other load fall on both alike.
            for _ in 0..rounds {
                for (which, buffers) in [&mut normal, &mut subnormal].into_iter().enumerate() {
                    let start = std::time::Instant::now();
                    for _ in 0..calls_per_round {
                        buffers.process(p, frames);
                    }
                    times[which].push(start.elapsed().as_secs_f64() * 1e6 / calls_per_round as f64);
                    buffers.assert_passthrough(frames, "timing run");
                }
            }
            times
        });
        plugin.stop(processor);
        for t in &mut times {
            t.sort_by(f64::total_cmp);
        }
        let [normal_us, subnormal_us] = &times;
        let (min_n, min_s) = (normal_us[0], subnormal_us[0]);
        let (med_n, med_s) = (normal_us[rounds / 2], subnormal_us[rounds / 2]);
        eprintln!(
            "{channels} ch, {frames} frames, µs per process call (fastest / median of {rounds} \
             rounds): normal {min_n:.2} / {med_n:.2}, subnormal {min_s:.2} / {med_s:.2}, \
             ratio {:.2} / {:.2}",
            min_s / min_n,
            med_s / med_n
        );
        assert!(
            min_s < 3.0 * min_n,
            "{channels} ch: subnormal input {:.2}× slower",
            min_s / min_n
        );
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

/// Sample values a host may hand a plugin when something upstream has gone wrong. The NaNs
/// carry payloads (quiet, signalling, negative) so that a copy through float arithmetic, which
/// quiets or canonicalises NaNs, would show.
fn hostile_values() -> Vec<f32> {
    vec![
        f32::from_bits(0x7fc0_0000), // quiet NaN
        f32::from_bits(0x7fc1_2345), // quiet NaN with payload
        f32::from_bits(0x7f80_0001), // signalling NaN
        f32::from_bits(0xffc0_beef), // negative NaN with payload
        f32::INFINITY,
        f32::NEG_INFINITY,
        f32::from_bits(0x0000_0001), // smallest subnormal
        f32::from_bits(0x007f_ffff), // largest subnormal
        f32::from_bits(0x8000_0003), // negative subnormal
        -0.0,
        0.0,
        1.0,
        -1.0,
        f32::MAX,
        f32::MIN,
        f32::MIN_POSITIVE,
    ]
}

/// One segment of hostile input: what each sample (channel, frame since segment start) is.
type Segment = (
    &'static str,
    usize,
    Box<dyn Fn(usize, usize) -> f32 + Send + Sync>,
);

fn hostile_segments(rate: f64) -> Vec<Segment> {
    let values = hostile_values();
    let v = values.clone();
    let seconds = |s: f64| (s * rate) as usize;
    vec![
        (
            "NaN",
            seconds(0.2),
            Box::new(|c, k| {
                [0x7fc0_0000u32, 0x7fc1_2345, 0x7f80_0001, 0xffc0_beef].map(f32::from_bits)
                    [(c + k) % 4]
            }),
        ),
        (
            "+-Inf",
            seconds(0.2),
            Box::new(|c, k| {
                if (c + k) % 2 == 0 {
                    f32::INFINITY
                } else {
                    f32::NEG_INFINITY
                }
            }),
        ),
        (
            "subnormals",
            seconds(0.2),
            Box::new(|c, k| {
                f32::from_bits(1 + ((c * 7919 + k * 104_729) as u32 % 0x007f_fffe))
                    * if k % 2 == 0 { 1.0 } else { -1.0 }
            }),
        ),
        (
            "DC",
            seconds(0.5),
            Box::new(|c, _| if c % 2 == 0 { 1.0 } else { -0.5 }),
        ),
        (
            "full-scale square",
            seconds(0.5),
            Box::new(|c, k| {
                // A different period per channel, 2 to 200 frames.
                let half = 1 + c * 3 % 100;
                if (k / half) % 2 == 0 { 1.0 } else { -1.0 }
            }),
        ),
        (
            "beyond full scale",
            seconds(0.1),
            Box::new(|c, k| [f32::MAX, f32::MIN, 1.0e30, -8.0][(c + k) % 4]),
        ),
        (
            "mixed",
            seconds(0.3),
            Box::new(move |c, k| {
                let mut r = Rng::new(((c as u64) << 32) ^ k as u64 ^ 0xdead_beef);
                v[r.range(0, v.len() - 1)]
            }),
        ),
        ("silence (+0)", seconds(6.0), Box::new(|_, _| 0.0)),
        ("silence (-0)", seconds(0.5), Box::new(|_, _| -0.0)),
    ]
}

#[test]
fn hostile_audio_passes_through_bit_identical_in_every_layout() {
    assert!(hostile_values().iter().any(|x| x.is_nan()));
    let entry = load_plugin_entry();
    for &channels in &LAYOUT_CHANNELS {
        let mut plugin = Plugin::new(&entry);
        plugin.select_channels(channels);
        // Sudden rate changes between runs, as a host does when the session rate changes.
        for (rate, max) in [(48_000.0, 512u32), (192_000.0, 4096), (22_050.0, 64)] {
            let processor = plugin.start(rate, max);
            let mut buffers = Buffers::new(channels, max as usize);
            let (processor, ()) = on_audio_thread(processor, |p| {
                let mut sizes = Rng::new(channels as u64 * 31 + max as u64);
                for (name, frames, sample) in hostile_segments(rate) {
                    let context = format!("{channels} ch, {rate} Hz, {name}");
                    let mut done = 0;
                    while done < frames {
                        let n = sizes.range(1, max as usize).min(frames - done);
                        for (c, input) in buffers.input.iter_mut().enumerate() {
                            for (k, x) in input[..n].iter_mut().enumerate() {
                                *x = sample(c, done + k);
                            }
                        }
                        buffers.process(p, n);
                        buffers.assert_passthrough(n, &context);
                        done += n;
                    }
                }
                // Ordinary programme again after the bad samples.
                let m = max as usize;
                play_scene(
                    p,
                    &mut buffers,
                    8 * m,
                    || m,
                    &format!("{channels} ch, scene after"),
                );
            });
            plugin.stop(processor);
        }
    }
}

/// A random value for `p`: mostly inside its range (whole numbers for stepped parameters), and
/// now and then a value no well-behaved host would send (outside the range, infinite, NaN).
fn random_param_value(rng: &mut Rng, p: &ParamDesc, hostile: bool) -> f64 {
    if hostile && rng.range(0, 19) == 0 {
        return [
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            -1.0e9,
            1.0e9,
            p.min - 1.0,
            p.max + 1.0,
        ][rng.range(0, 6)];
    }
    let v = p.min + rng.unit() * (p.max - p.min);
    if p.stepped { v.round() } else { v }
}

/// Every parameter value the plugin reports, in listing order.
fn values(plugin: &mut Plugin, params: &[ParamDesc]) -> Vec<f64> {
    params
        .iter()
        .map(|p| plugin.param_value(p.id).expect("param value"))
        .collect()
}

fn assert_in_range(plugin: &mut Plugin, params: &[ParamDesc], context: &str) {
    for (p, v) in params.iter().zip(values(plugin, params)) {
        assert!(
            v.is_finite() && v >= p.min && v <= p.max,
            "{context}: {} = {v} outside [{}, {}]",
            p.name,
            p.min,
            p.max
        );
    }
}

/// The JSON document inside a nice-plug CLAP state: an 8-byte little-endian length, then JSON.
fn state_json(bytes: &[u8]) -> serde_json::Value {
    assert!(bytes.len() > 8, "state of {} bytes", bytes.len());
    let len = u64::from_le_bytes(bytes[..8].try_into().unwrap()) as usize;
    assert_eq!(len, bytes.len() - 8, "length prefix");
    serde_json::from_slice(&bytes[8..]).expect("state is JSON")
}

fn json_state_bytes(doc: &serde_json::Value) -> Vec<u8> {
    let json = serde_json::to_vec(doc).unwrap();
    let mut bytes = (json.len() as u64).to_le_bytes().to_vec();
    bytes.extend_from_slice(&json);
    bytes
}

/// Processes a little scene audio and checks the pass-through: the plugin still works.
fn still_passes_audio(plugin: &mut Plugin, context: &str) {
    let processor = plugin.start(48_000.0, 256);
    let mut buffers = Buffers::new(4, 256);
    let (processor, _) = on_audio_thread(processor, |p| {
        play_scene(p, &mut buffers, 2048, || 256, context)
    });
    plugin.stop(processor);
}

#[test]
fn state_round_trips_through_the_state_extension() {
    let entry = load_plugin_entry();
    let mut a = Plugin::new(&entry);
    let params = a.params();
    assert_eq!(params.len(), 9, "{params:?}");
    let defaults = values(&mut a, &params);
    for (p, v) in params.iter().zip(&defaults) {
        assert_eq!(p.default, *v, "{} starts at its default", p.name);
    }
    let default_state = a.save_state();
    let doc = state_json(&default_state);
    assert!(
        doc["fields"]["view"].is_string(),
        "view record persisted: {doc}"
    );

    let mut rng = Rng::new(0x57a7_e001);
    for round in 0..20 {
        // Random parameters and random view switches; save; load into a fresh instance.
        let changes: Vec<(u32, f64)> = params
            .iter()
            .map(|p| (p.id, random_param_value(&mut rng, p, false)))
            .collect();
        a.flush_params(&changes);
        let mut doc = state_json(&a.save_state());
        let view = serde_json::json!({
            "hold": rng.range(0, 1) == 1,
            "show_integrated": rng.range(0, 1) == 1,
            "show_grid": rng.range(0, 1) == 1,
            "show_labels": rng.range(0, 1) == 1,
            "show_sources": rng.range(0, 1) == 1,
        });
        doc["fields"]["view"] = serde_json::Value::String(view.to_string());
        let saved = json_state_bytes(&doc);
        assert!(a.load_state(&saved), "round {round}: load own state");
        let saved = a.save_state();
        let reread = state_json(&saved);
        assert_eq!(
            reread["params"], doc["params"],
            "round {round}: parameters kept"
        );
        let view_back: serde_json::Value =
            serde_json::from_str(reread["fields"]["view"].as_str().expect("view string"))
                .expect("view record is JSON");
        assert_eq!(view_back, view, "round {round}: view record kept");

        let mut b = Plugin::new(&entry);
        assert!(b.load_state(&saved), "round {round}: load");
        assert_eq!(
            values(&mut b, &params),
            values(&mut a, &params),
            "round {round}"
        );
        assert_eq!(
            b.save_state(),
            saved,
            "round {round}: same bytes saved again"
        );
    }

    // The first state brings the defaults back.
    assert!(a.load_state(&default_state));
    assert_eq!(values(&mut a, &params), defaults);
    assert_eq!(a.save_state(), default_state);
    still_passes_audio(&mut a, "after state round trips");
}

#[test]
fn damaged_state_never_crashes_the_plugin() {
    let entry = load_plugin_entry();
    let mut plugin = Plugin::new(&entry);
    let params = plugin.params();
    let good = plugin.save_state();
    let mut rng = Rng::new(0xbad5_7a7e);
    let mut refused = 0usize;
    let mut tried = 0usize;
    let mut attempt = |plugin: &mut Plugin, bytes: &[u8], context: &str| {
        tried += 1;
        if !plugin.load_state(bytes) {
            refused += 1;
        }
        assert_in_range(plugin, &params, context);
    };
    // Every truncation of a good state.
    for len in 0..good.len() {
        attempt(&mut plugin, &good[..len], &format!("truncated to {len}"));
    }
    // Random bytes, with and without a plausible length prefix.
    for i in 0..300 {
        let len = rng.range(0, 600);
        let mut bytes: Vec<u8> = (0..len).map(|_| rng.next_u64() as u8).collect();
        if i % 2 == 0 && len >= 8 {
            bytes[..8].copy_from_slice(&((len - 8) as u64).to_le_bytes());
        }
        attempt(&mut plugin, &bytes, &format!("random bytes {i}"));
    }
    // A length prefix that claims far more than there is.
    let mut huge = u64::MAX.to_le_bytes().to_vec();
    huge.extend_from_slice(&good[8..]);
    attempt(&mut plugin, &huge, "huge length prefix");
    // Well-formed JSON with damaged content: wrong types, unknown ids, out-of-range values,
    // a view record that is not JSON, an older version.
    let doc = state_json(&good);
    let damaged = [
        serde_json::json!({}),
        serde_json::json!([1, 2, 3]),
        serde_json::json!({"version": "0.0.1", "params": {}, "fields": {}}),
        serde_json::json!({"version": 7, "params": "none", "fields": 3}),
        {
            let mut d = doc.clone();
            d["params"]["time_constant"] = serde_json::json!({"f32": 1.0e30});
            d["params"]["method"] = serde_json::json!({"string": "no-such-method"});
            d["params"]["band"] = serde_json::json!({"f32": -5.0});
            d["params"]["no_such_param"] = serde_json::json!({"f32": 1.0});
            d
        },
        {
            let mut d = doc.clone();
            d["fields"]["view"] = serde_json::json!("{\"hold\": tru");
            d
        },
        {
            let mut d = doc.clone();
            d["fields"]["view"] = serde_json::json!("{\"hold\": 3, \"show_grid\": \"yes\"}");
            d
        },
        {
            let mut d = doc.clone();
            d["fields"]["view"] = serde_json::json!(17);
            d
        },
    ];
    for (i, d) in damaged.iter().enumerate() {
        attempt(
            &mut plugin,
            &json_state_bytes(d),
            &format!("damaged JSON {i}: {d}"),
        );
    }
    // Single-byte flips of the good state.
    for i in 0..200 {
        let mut bytes = good.clone();
        let at = rng.range(8, bytes.len() - 1);
        bytes[at] ^= 1 << rng.range(0, 7);
        attempt(&mut plugin, &bytes, &format!("flip {i} at {at}"));
    }
    eprintln!("{tried} damaged states, {refused} refused");
    assert!(refused > 0, "some damaged states must be refused");
    // A good state still loads after all that, and the plugin still works.
    assert!(plugin.load_state(&good));
    assert_eq!(plugin.save_state(), good);
    still_passes_audio(&mut plugin, "after damaged states");
}

#[test]
fn random_parameter_changes_between_and_inside_buffers() {
    let entry = load_plugin_entry();
    let mut rng = Rng::new(0xf022_0001);
    let mut changes = 0usize;
    for &channels in &[4usize, 16, 64] {
        let mut plugin = Plugin::new(&entry);
        plugin.select_channels(channels);
        let params = plugin.params();
        for run in 0..3 {
            // While inactive, through params.flush.
            let flushed: Vec<(u32, f64)> = params
                .iter()
                .map(|p| (p.id, random_param_value(&mut rng, p, true)))
                .collect();
            plugin.flush_params(&flushed);
            assert_in_range(&mut plugin, &params, "after flush");
            let max = [64u32, 512, 2048][run];
            let processor = plugin.start(48_000.0, max);
            let mut buffers = Buffers::new(channels, max as usize);
            let seed = rng.next_u64();
            let params_audio = params.clone();
            let (processor, n) = on_audio_thread(processor, move |p| {
                let mut rng = Rng::new(seed);
                let mut n = 0;
                let scene = scene();
                let mut pos = 0;
                for call in 0..400 {
                    let frames = rng.range(1, max as usize);
                    // 0 to 8 events at random times in this buffer (sorted by the helper).
                    for _ in 0..rng.range(0, 8) {
                        let param = &params_audio[rng.range(0, params_audio.len() - 1)];
                        let at = rng.range(0, frames - 1) as u32;
                        buffers.push_param(at, param.id, random_param_value(&mut rng, param, true));
                        n += 1;
                    }
                    for (c, input) in buffers.input.iter_mut().enumerate() {
                        for (k, x) in input[..frames].iter_mut().enumerate() {
                            *x = scene[c][(pos + k) % scene[c].len()];
                        }
                    }
                    pos += frames;
                    buffers.process(p, frames);
                    buffers.assert_passthrough(frames, &format!("{channels} ch, call {call}"));
                }
                n
            });
            plugin.stop(processor);
            changes += n;
            assert_in_range(&mut plugin, &params, "after processing");
        }
    }
    eprintln!("{changes} parameter events inside buffers");
}
