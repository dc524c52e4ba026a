//! Demo scene: determinism, headroom, levels and physical consistency of the encoded field.
//!
//! Physical checks rest on the SN3D addition theorem (REFERENCES.md §4): Σ_m Y_nm² = 1, so for
//! mutually incoherent sources each order carries the same energy as W in SN3D and (2n+1)
//! times it in N3D; and on the first-order intensity vector (W·X, W·Y, W·Z), which points at a
//! single plane-wave source (Pulkki 2007, DirAC).

use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::loudness::LoudnessMeter;
use fieldglass_dsp::scene::{
    DIFFUSE_BED_NAME, DemoScene, GAIN_UPDATE_SAMPLES, SOURCE_NAMES, SceneConfig, SceneError,
    render_seconds,
};
use fieldglass_dsp::sh::channel_count;
use fieldglass_dsp::sphere::Direction;
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::OnceLock;

// ----- allocation counting (per thread, so parallel tests do not disturb each other) -------

struct CountingAllocator;

thread_local! {
    static ALLOCATIONS: Cell<u64> = const { Cell::new(0) };
}

fn count_allocation() {
    let _ = ALLOCATIONS.try_with(|count| count.set(count.get() + 1));
}

unsafe impl GlobalAlloc for CountingAllocator {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        count_allocation();
        unsafe { System.alloc(layout) }
    }
    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        count_allocation();
        unsafe { System.alloc_zeroed(layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        count_allocation();
        unsafe { System.realloc(ptr, layout, new_size) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
}

#[global_allocator]
static ALLOCATOR: CountingAllocator = CountingAllocator;

fn allocations_on_this_thread() -> u64 {
    ALLOCATIONS.with(Cell::get)
}

// ----- helpers ------------------------------------------------------------------------------

const SCENE_SECONDS: f64 = 10.0;

fn mean_square(signal: &[f32]) -> f64 {
    signal
        .iter()
        .map(|&x| f64::from(x) * f64::from(x))
        .sum::<f64>()
        / signal.len() as f64
}

fn db(power_ratio: f64) -> f64 {
    10.0 * power_ratio.log10()
}

fn peak(signal: &[f32]) -> f32 {
    signal.iter().fold(0.0f32, |m, &x| m.max(x.abs()))
}

/// Energy of each order relative to W, in dB, for ACN-ordered channels.
fn order_energy_db(channels: &[Vec<f32>], max_order: usize) -> Vec<f64> {
    let w = mean_square(&channels[0]);
    (1..=max_order)
        .map(|n| {
            let energy: f64 = (n * n..(n + 1) * (n + 1))
                .map(|acn| mean_square(&channels[acn]))
                .sum();
            db(energy / w)
        })
        .collect()
}

/// Direction of the time-averaged first-order intensity (W·X, W·Y, W·Z).
fn intensity_direction(w: &[f32], x: &[f32], y: &[f32], z: &[f32]) -> Direction {
    let dot = |a: &[f32], b: &[f32]| -> f64 {
        a.iter()
            .zip(b)
            .map(|(&p, &q)| f64::from(p) * f64::from(q))
            .sum()
    };
    Direction::from_cartesian([dot(w, x), dot(w, y), dot(w, z)])
}

fn integrated_lufs(w: &[f32]) -> f64 {
    let mut meter = LoudnessMeter::new(48_000.0).unwrap();
    meter.push(w);
    meter
        .integrated_lufs()
        .expect("the scene is above the gate")
}

/// The whole scene at order 7, ACN/N3D, 10 s: the largest gains any supported format and
/// order produces, shared by the tests that need a long render.
fn full_scene_n3d_order_7() -> &'static Vec<Vec<f32>> {
    static RENDER: OnceLock<Vec<Vec<f32>>> = OnceLock::new();
    RENDER.get_or_init(|| {
        let config = SceneConfig {
            order: 7,
            format: AmbiFormat::ACN_N3D,
            ..SceneConfig::default()
        };
        render_seconds(config, SCENE_SECONDS).unwrap()
    })
}

fn full_scene_sn3d_order_3() -> &'static Vec<Vec<f32>> {
    static RENDER: OnceLock<Vec<Vec<f32>>> = OnceLock::new();
    RENDER.get_or_init(|| render_seconds(SceneConfig::default(), SCENE_SECONDS).unwrap())
}

// ----- streaming ----------------------------------------------------------------------------

#[test]
fn blocks_of_any_size_give_identical_samples() {
    let config = SceneConfig {
        order: 2,
        ..SceneConfig::default()
    };
    let seconds = 2.5; // spans a tram strike, talker turns and guitar plucks
    let whole = render_seconds(config, seconds).unwrap();
    let total = whole[0].len();

    let mut scene = DemoScene::new(config).unwrap();
    let channels = scene.channels();
    let mut pieces = vec![Vec::with_capacity(total); channels];
    let block_lengths = [1usize, 7, 64, 63, 65, 0, 1000, 129, 4096, 2];
    let mut buffers = vec![vec![0.0f32; 4096]; channels];
    let mut k = 0;
    let mut rendered = 0;
    while rendered < total {
        let len = block_lengths[k % block_lengths.len()].min(total - rendered);
        k += 1;
        let mut refs: Vec<&mut [f32]> = buffers.iter_mut().map(|b| &mut b[..len]).collect();
        scene.render(&mut refs);
        for (piece, buffer) in pieces.iter_mut().zip(&buffers) {
            piece.extend_from_slice(&buffer[..len]);
        }
        rendered += len;
    }
    assert!(
        (scene.time_s() - seconds).abs() < 1e-9,
        "{}",
        scene.time_s()
    );
    for (channel, (a, b)) in whole.iter().zip(&pieces).enumerate() {
        assert!(a == b, "channel {channel} depends on the block split");
    }

    let other_seed = render_seconds(SceneConfig { seed: 2, ..config }, seconds).unwrap();
    assert!(other_seed[0] != whole[0], "the seed must change the scene");
}

#[test]
fn render_does_not_allocate() {
    let mut scene = DemoScene::new(SceneConfig::default()).unwrap();
    let channels = scene.channels();
    // Block sizes that start and end off the 64-sample gain-update grid; one buffer set each,
    // all views built before counting.
    let block_lengths = [1024usize, 3, 512, 1000, 64, 1];
    let mut buffer_sets: Vec<Vec<Vec<f32>>> = block_lengths
        .iter()
        .map(|&len| vec![vec![0.0f32; len]; channels])
        .collect();
    let mut views: Vec<Vec<&mut [f32]>> = buffer_sets
        .iter_mut()
        .map(|set| set.iter_mut().map(|b| b.as_mut_slice()).collect())
        .collect();
    let before = allocations_on_this_thread();
    for _ in 0..3 {
        for view in views.iter_mut() {
            scene.render(view);
        }
    }
    assert_eq!(allocations_on_this_thread() - before, 0, "render allocated");
}

// ----- headroom and levels ------------------------------------------------------------------

#[test]
fn no_channel_clips_in_any_format_and_order() {
    // ACN/N3D order 7 has the largest channel gains of all (up to √15 over SN3D).
    let n3d = full_scene_n3d_order_7();
    let n3d_peak = n3d.iter().map(|c| peak(c)).fold(0.0f32, f32::max);
    println!("ACN/N3D order 7: peak {:.1} dBFS", 20.0 * n3d_peak.log10());
    // At least 1 dB below full scale even here.
    assert!(n3d_peak < 0.89, "N3D order 7 peaks at {n3d_peak}");

    // ACN/SN3D orders 1, 3, 7 are the same encoding with N3D's √(2n+1) removed; check the
    // conversion against short direct renders, then the full 10 s peaks.
    for order in [1usize, 3, 7] {
        let config = SceneConfig {
            order,
            ..SceneConfig::default()
        };
        let direct = render_seconds(config, 0.5).unwrap();
        for (acn, channel) in direct.iter().enumerate() {
            let n = (acn as f64).sqrt().floor();
            let scale = (2.0 * n + 1.0).sqrt() as f32;
            for (&s, &t) in channel.iter().zip(&n3d[acn]) {
                assert!(
                    (s * scale - t).abs() <= 1e-6 + 1e-5 * t.abs(),
                    "order {order} acn {acn}"
                );
            }
        }
        let sn3d_peak = (0..channel_count(order))
            .map(|acn| {
                let n = (acn as f64).sqrt().floor();
                peak(&n3d[acn]) / (2.0 * n + 1.0).sqrt() as f32
            })
            .fold(0.0f32, f32::max);
        println!(
            "ACN/SN3D order {order}: peak {:.1} dBFS",
            20.0 * sn3d_peak.log10()
        );
        assert!(sn3d_peak < 1.0, "SN3D order {order} clips: {sn3d_peak}");
    }

    let fuma = render_seconds(
        SceneConfig {
            format: AmbiFormat::FUMA,
            ..SceneConfig::default()
        },
        SCENE_SECONDS,
    )
    .unwrap();
    let fuma_peak = fuma.iter().map(|c| peak(c)).fold(0.0f32, f32::max);
    println!("FuMa order 3: peak {:.1} dBFS", 20.0 * fuma_peak.log10());
    assert!(fuma_peak < 1.0, "FuMa order 3 clips: {fuma_peak}");
}

#[test]
fn omni_level_is_sensible() {
    let w = &full_scene_sn3d_order_3()[0];
    let lufs = integrated_lufs(w);
    let w_peak_dbfs = 20.0 * f64::from(peak(w)).log10();
    let w_rms_dbfs = db(mean_square(w));
    println!("W: integrated {lufs:.1} LUFS, RMS {w_rms_dbfs:.1} dBFS, peak {w_peak_dbfs:.1} dBFS");
    // Target band chosen for a demo (common practice: broadcast programmes sit near −23 LUFS,
    // EBU R128).
    assert!((-26.0..=-20.0).contains(&lufs), "W loudness {lufs:.1} LUFS");
    // N3D order 7 channels reach up to √15 (11.8 dB) above SN3D; keep W's peaks 6 dB or
    // more below full scale so the widest format has room (checked in the clipping test).
    assert!(
        w_peak_dbfs < -6.0,
        "W peak {w_peak_dbfs:.1} dBFS leaves too little headroom"
    );
}

#[test]
fn guitar_leads_and_the_bed_stays_well_below_the_direct_sound() {
    let seconds = SCENE_SECONDS;
    let config = SceneConfig {
        order: 1,
        ..SceneConfig::default()
    };
    let w_energy = |names: &'static [&'static str]| {
        let channels = render_seconds(config.with_only(names), seconds).unwrap();
        mean_square(&channels[0])
    };
    let guitar = w_energy(&["guitar"]);
    let mut report = format!("guitar {:.1} dBFS", db(guitar));
    for (name, steady) in [
        ("talker-1", true),
        ("talker-2", true),
        ("tram bell", false),
        ("gull-1", false),
        ("gull-2", false),
        ("fountain", true),
    ] {
        let names: &'static [&'static str] = Box::leak(Box::new([name]));
        let energy = w_energy(names);
        report += &format!(", {name} {:.1}", db(energy));
        if steady {
            assert!(guitar > energy, "{name} is louder than the guitar");
        }
    }
    let direct = w_energy(&[
        "guitar",
        "talker-1",
        "talker-2",
        "tram bell",
        "gull-1",
        "gull-2",
        "fountain",
    ]);
    let bed = w_energy(&[DIFFUSE_BED_NAME]);
    println!(
        "W RMS over {seconds} s: {report}; direct {:.1}, bed {:.1} dBFS (bed {:.1} dB below)",
        db(direct),
        db(bed),
        db(direct / bed)
    );
    assert!(
        db(direct / bed) >= 15.0,
        "bed only {:.1} dB below",
        db(direct / bed)
    );
    assert!(
        db(direct / bed) <= 30.0,
        "bed inaudible: {:.1} dB below",
        db(direct / bed)
    );
}

// ----- physical consistency -----------------------------------------------------------------

#[test]
fn order_energies_follow_the_addition_theorem() {
    // REFERENCES.md §4: incoherent sources give 0 dB per order in SN3D, 10·log10(2n+1) in N3D.
    let sn3d = order_energy_db(full_scene_sn3d_order_3(), 3);
    println!("SN3D per-order energy re W (n = 1..3): {sn3d:.2?} dB");
    for (n, energy_db) in (1..).zip(&sn3d) {
        assert!(energy_db.abs() <= 1.0, "SN3D order {n}: {energy_db:.2} dB");
    }
    let n3d = order_energy_db(full_scene_n3d_order_7(), 7);
    println!("N3D per-order energy re W (n = 1..7): {n3d:.2?} dB");
    for (n, energy_db) in (1..).zip(&n3d) {
        let expected = db(2.0 * n as f64 + 1.0);
        assert!(
            (energy_db - expected).abs() <= 1.0,
            "N3D order {n}: {energy_db:.2} dB, expected {expected:.2}"
        );
    }
}

#[test]
fn guitar_alone_points_at_its_direction() {
    let seconds = 4.0;
    for format in [AmbiFormat::ACN_SN3D, AmbiFormat::FUMA] {
        let config = SceneConfig {
            order: 1,
            format,
            ..SceneConfig::default()
        }
        .with_only(&["guitar"]);
        let scene = DemoScene::new(config).unwrap();
        let truth = scene.source_directions(0.0);
        assert_eq!(truth.len(), 1);
        assert_eq!(truth[0].name, "guitar");
        assert!(!truth[0].moving);
        let channels = render_seconds(config, seconds).unwrap();
        // ACN: W Y Z X (1 = Y, 2 = Z, 3 = X); FuMa: W X Y Z.
        let (x, y, z) = if format == AmbiFormat::FUMA {
            (1, 2, 3)
        } else {
            (3, 1, 2)
        };
        let measured = intensity_direction(&channels[0], &channels[x], &channels[y], &channels[z]);
        let error_deg = measured.angle_to_deg(&truth[0].direction);
        println!("{format}: guitar intensity {measured:?}, error {error_deg:.3}°");
        assert!(
            error_deg < 2.0,
            "{format}: {measured:?} vs {:?}",
            truth[0].direction
        );
        assert!((truth[0].direction.azimuth_deg + 35.0).abs() < 1e-9);
    }
}

#[test]
fn tram_bell_intensity_follows_its_path() {
    let config = SceneConfig {
        order: 1,
        ..SceneConfig::default()
    }
    .with_only(&["tram bell"]);
    let scene = DemoScene::new(config).unwrap();
    let channels = render_seconds(config, 10.0).unwrap();
    let fs = config.sample_rate_hz;
    let window = (0.1 * fs) as usize;
    let mut checked = 0;
    for strike in 0..9 {
        // 100 ms windows right after each strike (strikes at 0.5, 1.5, … 8.5 s).
        let start = ((0.5 + strike as f64) * fs) as usize;
        let range = start..start + window;
        let measured = intensity_direction(
            &channels[0][range.clone()],
            &channels[3][range.clone()],
            &channels[1][range.clone()],
            &channels[2][range.clone()],
        );
        let centre_s = (start as f64 + window as f64 / 2.0) / fs;
        let truth = scene.source_directions(centre_s)[0];
        assert!(truth.moving);
        let error_deg = measured.angle_to_deg(&truth.direction);
        assert!(
            error_deg < 2.0,
            "at {centre_s:.2} s: measured {measured:?}, path {:?}",
            truth.direction
        );
        checked += 1;
    }
    assert_eq!(checked, 9);
    let start = scene.source_directions(0.0)[0].direction;
    let late = scene.source_directions(9.99)[0].direction;
    assert!((start.azimuth_deg - 80.0).abs() < 1e-9 && late.azimuth_deg < -79.0);
}

#[test]
fn sources_rendered_alone_add_up_to_the_scene() {
    let config = SceneConfig {
        order: 1,
        ..SceneConfig::default()
    };
    let seconds = 1.5;
    let whole = render_seconds(config, seconds).unwrap();
    let mut sum = vec![vec![0.0f32; whole[0].len()]; whole.len()];
    for name in SOURCE_NAMES {
        let names: &'static [&'static str] = Box::leak(Box::new([name]));
        let part = render_seconds(config.with_only(names), seconds).unwrap();
        for (s, p) in sum.iter_mut().zip(&part) {
            for (a, b) in s.iter_mut().zip(p) {
                *a += b;
            }
        }
    }
    for (channel, (a, b)) in whole.iter().zip(&sum).enumerate() {
        let worst = a
            .iter()
            .zip(b)
            .map(|(x, y)| (x - y).abs())
            .fold(0.0f32, f32::max);
        assert!(
            worst < 1e-6,
            "channel {channel}: sum of parts differs by {worst}"
        );
    }
}

// ----- configuration ------------------------------------------------------------------------

#[test]
fn bad_configurations_are_refused_with_clear_messages() {
    let base = SceneConfig::default();
    let message = |config: SceneConfig| DemoScene::new(config).unwrap_err().to_string();

    let text = message(SceneConfig { order: 0, ..base });
    assert!(text.contains("order 0") && text.contains('7'), "{text}");
    let text = message(SceneConfig { order: 8, ..base });
    assert!(text.contains("order 8"), "{text}");
    let fuma = SceneConfig {
        order: 4,
        format: AmbiFormat::FUMA,
        ..base
    };
    assert!(matches!(DemoScene::new(fuma), Err(SceneError::Format(_))));
    assert!(message(fuma).contains("FuMa"), "{}", message(fuma));
    for rate in [1000.0, f64::NAN, 1e6] {
        let text = message(SceneConfig {
            sample_rate_hz: rate,
            ..base
        });
        assert!(text.contains("sample rate"), "{text}");
    }
    let text = message(base.with_only(&["guitar", "accordion"]));
    assert!(
        text.contains("accordion") && text.contains("\"guitar\""),
        "{text}"
    );
    assert_eq!(
        DemoScene::new(base.with_only(&[])).unwrap_err(),
        SceneError::NoSourcesSelected
    );

    for order in 1..=7 {
        for format in [AmbiFormat::ACN_SN3D, AmbiFormat::ACN_N3D] {
            let scene = DemoScene::new(SceneConfig {
                order,
                format,
                ..base
            })
            .unwrap();
            assert_eq!(scene.channels(), (order + 1) * (order + 1));
        }
    }
    for order in 1..=3 {
        for format in [AmbiFormat::FUMA, AmbiFormat::ACN_MAXN] {
            assert!(
                DemoScene::new(SceneConfig {
                    order,
                    format,
                    ..base
                })
                .is_ok()
            );
        }
    }
    for rate in [22_050.0, 44_100.0, 96_000.0, 384_000.0] {
        let channels = render_seconds(
            SceneConfig {
                order: 1,
                sample_rate_hz: rate,
                ..base
            },
            0.6,
        )
        .unwrap();
        assert!(channels[0].iter().all(|x| x.is_finite() && x.abs() < 1.0));
        assert!(mean_square(&channels[0]) > 1e-6, "silent at {rate} Hz");
    }
}

#[test]
fn ground_truth_lists_the_direct_sources() {
    let scene = DemoScene::new(SceneConfig::default()).unwrap();
    let names: Vec<&str> = scene
        .source_directions(3.0)
        .iter()
        .map(|s| s.name)
        .collect();
    assert_eq!(names, &SOURCE_NAMES[..7]);
    for source in scene.source_directions(3.0) {
        let d = source.direction;
        match source.name {
            "talker-1" | "talker-2" => assert!(d.azimuth_deg > 20.0 && d.azimuth_deg < 60.0),
            "gull-1" | "gull-2" => assert!(d.elevation_deg >= 60.0 && source.moving),
            "fountain" => assert!((d.azimuth_deg - 180.0).abs() < 1e-9 && d.elevation_deg < 0.0),
            _ => {}
        }
    }
    assert_eq!(GAIN_UPDATE_SAMPLES, 64);
}
