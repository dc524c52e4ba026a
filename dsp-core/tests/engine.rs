//! End-to-end checks of the analysis engine on encoded test fields.

use fieldglass_dsp::encoder::PlaneWaveEncoder;
use fieldglass_dsp::engine::{
    AnalysisSettings, Analyzer, Band, Engine, EngineControl, MapMethod, SnapshotSlot, StreamSetup,
};
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::sphere::Direction;
use fieldglass_dsp::sphere::grid::SphereGrid;

const FS: f64 = 48_000.0;

/// Deterministic white noise in [-1, 1) (xorshift64*).
struct Noise(u64);
impl Noise {
    fn next(&mut self) -> f32 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 40;
        (v as f64 / (1u64 << 24) as f64 * 2.0 - 1.0) as f32
    }
    fn block(&mut self, n: usize, gain: f32) -> Vec<f32> {
        (0..n).map(|_| self.next() * gain).collect()
    }
}

fn encode(
    order: usize,
    format: AmbiFormat,
    sources: &[(Direction, f32)],
    diffuse: Option<(usize, f32)>,
    seconds: f64,
) -> Vec<Vec<f32>> {
    let frames = (seconds * FS) as usize;
    let mut enc = PlaneWaveEncoder::new(order, format).unwrap();
    let mut out = vec![vec![0.0f32; frames]; enc.channels()];
    let mut noise = Noise(0x9e37_79b9_7f4a_7c15);
    for &(d, g) in sources {
        let s = noise.block(frames, g);
        let mut refs: Vec<&mut [f32]> = out.iter_mut().map(|c| c.as_mut_slice()).collect();
        enc.add_to(d, 1.0, &s, &mut refs);
    }
    if let Some((count, g)) = diffuse {
        let grid = SphereGrid::fibonacci(count).unwrap();
        for &d in grid.points() {
            let s = noise.block(frames, g);
            let mut refs: Vec<&mut [f32]> = out.iter_mut().map(|c| c.as_mut_slice()).collect();
            enc.add_to(d, 1.0, &s, &mut refs);
        }
    }
    out
}

fn run(signal: &[Vec<f32>], settings: AnalysisSettings, block: usize) -> Analyzer {
    let mut a = Analyzer::new(
        StreamSetup {
            sample_rate_hz: FS,
            channels: signal.len(),
        },
        settings,
    )
    .unwrap();
    let frames = signal[0].len();
    let mut start = 0;
    while start < frames {
        let end = (start + block).min(frames);
        let refs: Vec<&[f32]> = signal.iter().map(|c| &c[start..end]).collect();
        a.process(&refs);
        start = end;
    }
    a.finish();
    a
}

#[test]
fn plane_wave_is_found_where_it_was_encoded() {
    // Ground truth is the encoding direction itself; the tolerance is a fraction of the 2° grid.
    for (order, d) in [
        (1, Direction::new(40.0, 20.0)),
        (3, Direction::new(-35.0, 0.0)),
        (5, Direction::new(150.0, -30.0)),
    ] {
        let signal = encode(order, AmbiFormat::ACN_SN3D, &[(d, 0.3)], None, 1.0);
        let a = run(&signal, AnalysisSettings::default(), 512);
        let s = a.snapshot();
        let top = s.sources.first().expect("a source");
        assert!(
            top.direction.angle_to_deg(&d) < 1.5,
            "order {order}: found {:?}, encoded {:?}",
            top.direction,
            d
        );
        // DirAC (Pulkki 2007): one plane wave has diffuseness 0 and its DOA is the source.
        let full = s.intensity[Band::Full.index()];
        assert!(
            full.diffuseness.unwrap() < 0.02,
            "diffuseness {:?}",
            full.diffuseness
        );
        assert!(full.direction.unwrap().angle_to_deg(&d) < 1.0);
    }
}

#[test]
fn diffuse_field_has_diffuseness_near_one() {
    // Isotropic diffuse field → ψ → 1 (Pulkki 2007); with ~1 s of 21 ms frames the finite
    // averaging bias leaves ψ̂ a little below 1 (REFERENCES: about 1 − 0.7/√T).
    let signal = encode(1, AmbiFormat::ACN_SN3D, &[], Some((200, 0.05)), 2.0);
    let settings = AnalysisSettings {
        time_constant_ms: 2000.0,
        ..Default::default()
    };
    let a = run(&signal, settings, 1024);
    let psi = a.snapshot().intensity[Band::Full.index()]
        .diffuseness
        .unwrap();
    assert!(psi > 0.85, "diffuseness {psi}");
}

#[test]
fn every_method_peaks_on_two_sources() {
    let d1 = Direction::new(30.0, 10.0);
    let d2 = Direction::new(-100.0, 40.0);
    let signal = encode(
        3,
        AmbiFormat::ACN_SN3D,
        &[(d1, 0.3), (d2, 0.3)],
        Some((64, 0.01)),
        1.0,
    );
    for method in MapMethod::ALL {
        let settings = AnalysisSettings {
            method,
            time_constant_ms: 1000.0,
            ..Default::default()
        };
        let a = run(&signal, settings, 480);
        let s = a.snapshot();
        assert!(s.sources.len() >= 2, "{method:?}: {:?}", s.sources);
        let found = |d: &Direction| {
            s.sources
                .iter()
                .take(3)
                .any(|p| p.direction.angle_to_deg(d) < 4.0)
        };
        assert!(found(&d1) && found(&d2), "{method:?}: {:?}", s.sources);
    }
}

#[test]
fn format_read_as_another_changes_the_picture_but_not_the_raw_meters() {
    let d = Direction::new(60.0, 0.0);
    let signal = encode(1, AmbiFormat::FUMA, &[(d, 0.3)], None, 0.5);
    let right = AnalysisSettings {
        assumed_format: AmbiFormat::FUMA,
        ..Default::default()
    };
    let a = run(&signal, right, 256);
    assert!(a.snapshot().sources[0].direction.angle_to_deg(&d) < 1.5);
    // FuMa W carries −3.01 dB (maxN; REFERENCES §2): the omni reading (after conversion to
    // SN3D) sits 3.01 dB above the raw W channel's RMS.
    let s = a.snapshot();
    let raw_w = s.channel_status[0].reading.rms_dbfs;
    assert!(
        (s.omni.rms_dbfs - raw_w - 3.0103).abs() < 0.01,
        "{} vs {}",
        s.omni.rms_dbfs,
        raw_w
    );
}

#[test]
fn n3d_read_as_sn3d_raises_over_omni_and_sn3d_does_not() {
    // Common consequence of the SN3D addition theorem (REFERENCES §4): for incoherent sources
    // no SN3D channel exceeds W; N3D channels of order n are √(2n+1) larger.
    let sources = [
        (Direction::new(10.0, 5.0), 0.2),
        (Direction::new(-120.0, 30.0), 0.2),
        (Direction::new(90.0, -20.0), 0.2),
    ];
    let sn3d = encode(3, AmbiFormat::ACN_SN3D, &sources, Some((32, 0.02)), 1.0);
    let a = run(&sn3d, AnalysisSettings::default(), 512);
    assert!(a.snapshot().channel_status.iter().all(|c| !c.over_omni));
    let n3d = encode(3, AmbiFormat::ACN_N3D, &sources, Some((32, 0.02)), 1.0);
    let a = run(&n3d, AnalysisSettings::default(), 512);
    assert!(a.snapshot().channel_status.iter().any(|c| c.over_omni));
    assert!(
        a.snapshot()
            .findings
            .iter()
            .any(|f| f.code.label() == "over-omni")
    );
}

#[test]
fn nan_and_silence_do_not_poison_the_analysis() {
    let d = Direction::new(0.0, 0.0);
    // 4 s, so the 3 s short-term loudness window lies wholly after the bad samples.
    let mut signal = encode(2, AmbiFormat::ACN_SN3D, &[(d, 0.3)], None, 4.0);
    for c in signal.iter_mut() {
        for x in &mut c[1000..1100] {
            *x = f32::NAN;
        }
        c[2000] = f32::INFINITY;
    }
    let a = run(&signal, AnalysisSettings::default(), 333);
    let s = a.snapshot();
    assert!(s.map.values_db.iter().all(|v| v.is_finite()));
    // Every number the editor shows recovers too once the bad samples have passed: meters,
    // W loudness and DirAC hold no NaN (−∞ would be allowed for silence; there is none here).
    for status in &s.channel_status {
        let r = &status.reading;
        for v in [
            r.sample_peak_dbfs,
            r.true_peak_dbtp,
            r.rms_dbfs,
            r.dc_offset,
            status.sn3d_level_dbfs,
        ] {
            assert!(v.is_finite(), "channel {} reading {v}", status.input_index);
        }
    }
    let o = &s.omni;
    for v in [o.sample_peak_dbfs, o.true_peak_dbtp, o.rms_dbfs] {
        assert!(v.is_finite(), "W reading {v}");
    }
    for v in [o.momentary_lufs, o.short_term_lufs, o.integrated_lufs] {
        assert!(v.is_some_and(f64::is_finite), "W loudness {v:?}");
    }
    for band in &s.intensity {
        assert!(band.diffuseness.is_some_and(|d| (0.0..=1.0).contains(&d)));
        assert!(band.w_level_dbfs.is_finite());
    }
    assert!(s.sources[0].direction.angle_to_deg(&d) < 1.5);
    assert!(
        s.findings
            .iter()
            .any(|f| f.code.label() == "invalid-samples")
    );
    let silence = vec![vec![0.0f32; 24_000]; 9];
    let a = run(&silence, AnalysisSettings::default(), 1);
    assert!(a.snapshot().map.values_db.iter().all(|v| v.is_finite()));
    assert!(a.snapshot().sources.is_empty());
}

/// FuMa is defined up to third order only (common practice: the Furse-Malham set stops at
/// order 3). Asking for it on a higher-order stream must not stop the monitor: the analysis
/// keeps its format, says why in the snapshot, takes the other settings, and clears the
/// message once a usable format is chosen.
#[test]
fn fuma_above_third_order_is_refused_with_a_reason_and_the_analysis_goes_on() {
    let setup = StreamSetup {
        sample_rate_hz: FS,
        channels: 25,
    };
    let fuma = AnalysisSettings {
        assumed_format: AmbiFormat::FUMA,
        ..AnalysisSettings::default()
    };
    // Synchronous analysis: a refused change keeps the format, applies the rest.
    let mut analyzer = Analyzer::new(setup, AnalysisSettings::default()).unwrap();
    let with_band = AnalysisSettings {
        band: Band::High,
        ..fuma
    };
    assert!(analyzer.apply_settings(with_band).is_err());
    assert_eq!(analyzer.settings().assumed_format, AmbiFormat::ACN_SN3D);
    assert_eq!(analyzer.settings().band, Band::High);
    let block = vec![Noise(7).block(4800, 0.1); 25];
    let refs: Vec<&[f32]> = block.iter().map(|c| c.as_slice()).collect();
    analyzer.process(&refs);
    let message = analyzer.finish().format_not_applied.clone().unwrap();
    assert!(
        message.contains("FuMa") && message.contains("ACN/SN3D"),
        "{message}"
    );
    analyzer
        .apply_settings(AnalysisSettings::default())
        .unwrap();
    assert_eq!(analyzer.finish().format_not_applied, None);

    // Threaded engine started with FuMa requested: it runs, as AmbiX, and says so.
    let control = EngineControl::new(fuma);
    let slot = SnapshotSlot::new();
    let (mut audio, mut thread) = Engine::start(setup, 512, control, slot.clone()).unwrap();
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(10);
    let snapshot = loop {
        for piece in refs
            .iter()
            .map(|c| &c[..480])
            .collect::<Vec<_>>()
            .chunks(25)
        {
            audio.push(piece);
        }
        if let Some(s) = slot.latest() {
            break s;
        }
        assert!(std::time::Instant::now() < deadline, "no snapshot");
        std::thread::sleep(std::time::Duration::from_millis(5));
    };
    assert_eq!(snapshot.assumed_format, AmbiFormat::ACN_SN3D);
    assert!(snapshot.format_not_applied.is_some());
    thread.stop();
}

#[test]
fn sources_taking_turns_are_directional_over_the_programme() {
    // DirAC diffuseness is a short-time measure (Pulkki 2007): a source at +90° for 2 s, then
    // one at −90° for 2 s is two plane waves one after the other, not a diffuse field. Averaging
    // the covariance over the programme first would cancel the intensity and read ψ = 1.
    let left = encode(
        1,
        AmbiFormat::ACN_SN3D,
        &[(Direction::new(90.0, 0.0), 0.2)],
        None,
        2.0,
    );
    let right = encode(
        1,
        AmbiFormat::ACN_SN3D,
        &[(Direction::new(-90.0, 0.0), 0.2)],
        None,
        2.0,
    );
    let signal: Vec<Vec<f32>> = left
        .iter()
        .zip(&right)
        .map(|(a, b)| a.iter().chain(b).copied().collect())
        .collect();
    let mut a = run(&signal, AnalysisSettings::default(), 1024);
    let summary = a.programme_summary();
    for band in Band::ALL {
        let psi = summary.diffuseness[band.index()].unwrap();
        assert!(psi < 0.05, "{band:?}: ψ = {psi}");
        let report = a.integrated_intensity(band).diffuseness.unwrap();
        assert_eq!(report, psi, "one figure, one place");
    }
}

#[test]
fn programme_diffuseness_of_a_diffuse_field_is_near_one() {
    // Isotropic diffuse field → ψ → 1 (Pulkki 2007). Short-time values carry the finite-averaging
    // bias of a 100 ms window; the full band (hundreds of bins) keeps it small.
    let signal = encode(1, AmbiFormat::ACN_SN3D, &[], Some((200, 0.05)), 3.0);
    let a = run(&signal, AnalysisSettings::default(), 1024);
    let summary = a.programme_summary();
    for band in Band::ALL {
        let psi = summary.diffuseness[band.index()].unwrap();
        eprintln!("{band:?}: programme ψ = {psi:.3}");
    }
    let full = summary.diffuseness[Band::Full.index()].unwrap();
    assert!(full > 0.9, "full band ψ = {full}");
}

#[test]
fn a_diffuse_bed_alone_has_no_sources_and_a_source_over_it_has_one() {
    // A peak counts as a source only where it stands out from the map's diffuse floor: the
    // ripples of a diffuse bed (finite averaging) are not sources.
    let bed = encode(3, AmbiFormat::ACN_SN3D, &[], Some((300, 0.02)), 2.0);
    let a = run(&bed, AnalysisSettings::default(), 1024);
    assert!(
        a.snapshot().sources.is_empty(),
        "{:?}",
        a.snapshot().sources
    );
    let d = Direction::new(-60.0, 20.0);
    let scene = encode(3, AmbiFormat::ACN_SN3D, &[(d, 0.2)], Some((300, 0.02)), 2.0);
    let a = run(&scene, AnalysisSettings::default(), 1024);
    let sources = &a.snapshot().sources;
    assert_eq!(sources.len(), 1, "{sources:?}");
    assert!(sources[0].direction.angle_to_deg(&d) < 3.0, "{sources:?}");
}

#[test]
fn fuma_w_is_shown_beside_its_sn3d_equivalent() {
    // FuMa's W carries −3.01 dB (1/√2, DESIGN.md conventions): the SN3D-equivalent W is 3.01 dB
    // above the stored one, and the snapshot says so.
    let d = Direction::new(30.0, 0.0);
    let signal = encode(1, AmbiFormat::FUMA, &[(d, 0.2)], None, 1.0);
    let settings = AnalysisSettings {
        assumed_format: AmbiFormat::FUMA,
        ..Default::default()
    };
    let a = run(&signal, settings, 1024);
    let gain = 20.0 * std::f64::consts::SQRT_2.log10();
    assert!((a.snapshot().omni.conversion_gain_db - gain).abs() < 1e-9);
    let omni = a.programme_summary().omni;
    assert!((omni.conversion_gain_db - gain).abs() < 1e-9);
    let stored_w = a.programme_summary().channels[0].rms_dbfs;
    assert!((omni.as_stored(omni.rms_dbfs) - stored_w).abs() < 1e-9);
}

#[test]
fn new_band_edges_restart_the_split_bands_and_a_reset_clears_the_verdict() {
    let d = Direction::new(0.0, 0.0);
    let signal = encode(2, AmbiFormat::ACN_SN3D, &[(d, 0.2)], None, 2.0);
    let mut a = run(&signal, AnalysisSettings::default(), 1024);
    assert!(a.snapshot().format_check.ready);
    let before = a.integrated_intensity(Band::Full).w_level_dbfs;
    let settings = AnalysisSettings {
        band_edges_hz: [500.0, 6000.0],
        ..*a.settings()
    };
    a.apply_settings(settings).unwrap();
    // The split bands hold nothing until new frames arrive; the full band is kept.
    for band in [Band::Low, Band::Mid, Band::High] {
        assert!(
            a.integrated_intensity(band).diffuseness.is_none(),
            "{band:?}"
        );
        assert_eq!(a.programme_summary().diffuseness[band.index()], None);
    }
    assert_eq!(a.integrated_intensity(Band::Full).w_level_dbfs, before);
    a.reset_integrated();
    a.finish();
    assert!(!a.snapshot().format_check.ready);
}

/// Feeds `signal` in 512-frame blocks to an existing analyzer.
fn feed(a: &mut Analyzer, signal: &[Vec<f32>]) {
    let frames = signal[0].len();
    for start in (0..frames).step_by(512) {
        let end = (start + 512).min(frames);
        let refs: Vec<&[f32]> = signal.iter().map(|c| &c[start..end]).collect();
        a.process(&refs);
    }
}

#[test]
fn a_comparison_format_moves_only_the_map() {
    // A third-order FuMa plane wave read as AmbiX lands in the wrong place (FuMa puts X, not
    // Y, in the second channel: DESIGN.md "Conventions"); the comparison format puts the map
    // right while every other reading keeps the assumed format.
    let d = Direction::new(60.0, 20.0);
    let signal = encode(3, AmbiFormat::FUMA, &[(d, 0.3)], None, 0.5);
    let assumed = AnalysisSettings::default();
    let mut a = run(&signal, assumed, 512);
    let wrong = a.snapshot().clone();
    assert_eq!(wrong.map_format, AmbiFormat::ACN_SN3D);
    assert!(wrong.sources[0].direction.angle_to_deg(&d) > 20.0);

    a.apply_settings(AnalysisSettings {
        map_format_override: Some(AmbiFormat::FUMA),
        ..assumed
    })
    .unwrap();
    feed(&mut a, &signal);
    let compared = a.finish().clone();
    assert_eq!(compared.map_format, AmbiFormat::FUMA);
    assert_eq!(compared.assumed_format, AmbiFormat::ACN_SN3D);
    assert!(
        compared.sources[0].direction.angle_to_deg(&d) < 2.0,
        "{:?}",
        compared.sources[0]
    );
    // The channels still carry the ACN of the assumed format, W is read as AmbiX's W.
    for (before, after) in wrong.channel_status.iter().zip(&compared.channel_status) {
        assert_eq!(before.acn, after.acn);
    }
    assert_eq!(compared.omni.conversion_gain_db, 0.0);

    // Released: back to the assumed format.
    a.apply_settings(assumed).unwrap();
    assert_eq!(a.finish().map_format, AmbiFormat::ACN_SN3D);
    assert!(a.snapshot().sources[0].direction.angle_to_deg(&d) > 20.0);

    // A comparison format the stream cannot be read as (FuMa at order 4) leaves the map alone.
    let order4 = encode(4, AmbiFormat::ACN_SN3D, &[(d, 0.3)], None, 0.2);
    let mut a = run(&order4, assumed, 512);
    a.apply_settings(AnalysisSettings {
        map_format_override: Some(AmbiFormat::FUMA),
        ..assumed
    })
    .unwrap();
    assert_eq!(a.finish().map_format, AmbiFormat::ACN_SN3D);
}

#[test]
fn the_comparison_format_travels_through_the_engine_control() {
    let d = Direction::new(-45.0, 10.0);
    let signal = encode(1, AmbiFormat::FUMA, &[(d, 0.3)], None, 0.1);
    let setup = StreamSetup {
        sample_rate_hz: FS,
        channels: 4,
    };
    let control = EngineControl::new(AnalysisSettings::default());
    let slot = SnapshotSlot::new();
    let (mut audio, mut thread) = Engine::start(setup, 512, control.clone(), slot.clone()).unwrap();
    control.set_map_format_override(Some(AmbiFormat::FUMA));
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(10);
    let snapshot = loop {
        for start in (0..signal[0].len()).step_by(480) {
            let refs: Vec<&[f32]> = signal.iter().map(|c| &c[start..start + 480]).collect();
            audio.push(&refs);
        }
        if let Some(s) = slot.latest().filter(|s| s.map_format == AmbiFormat::FUMA) {
            break s;
        }
        assert!(std::time::Instant::now() < deadline, "no compared snapshot");
        std::thread::sleep(std::time::Duration::from_millis(5));
    };
    assert_eq!(snapshot.assumed_format, AmbiFormat::ACN_SN3D);
    assert_eq!(control.load().assumed_format, AmbiFormat::ACN_SN3D);
    thread.stop();
}

#[test]
fn the_finding_log_remembers_when_a_finding_appeared_and_whether_it_holds() {
    // N3D read as SN3D: higher-order channels louder than W (REFERENCES §4, as above).
    let sources = [
        (Direction::new(10.0, 5.0), 0.2),
        (Direction::new(-120.0, 30.0), 0.2),
        (Direction::new(90.0, -20.0), 0.2),
    ];
    let quiet = vec![vec![0.0f32; 24_000]; 16];
    let n3d = encode(3, AmbiFormat::ACN_N3D, &sources, Some((32, 0.02)), 1.0);
    let mut a = run(&quiet, AnalysisSettings::default(), 512);
    assert!(
        a.snapshot().finding_log.is_empty(),
        "silence reports nothing"
    );
    feed(&mut a, &n3d);
    let s = a.finish().clone();
    let over: Vec<_> = s
        .finding_log
        .iter()
        .filter(|e| e.finding.code.label() == "over-omni")
        .collect();
    // One entry per channel set; the set may change as the short-window levels move.
    assert!(over.iter().any(|e| e.active));
    let first = over.iter().map(|e| e.first_seen_s).fold(f64::MAX, f64::min);
    // It appeared after the half second of silence, within the first short window.
    assert!((0.5..1.0).contains(&first), "first seen {first}");
    assert!(
        s.finding_log
            .windows(2)
            .all(|w| w[0].finding.severity >= w[1].finding.severity),
        "most severe first"
    );

    // Read correctly, the finding stops holding but stays in the log.
    a.apply_settings(AnalysisSettings {
        assumed_format: AmbiFormat::ACN_N3D,
        ..Default::default()
    })
    .unwrap();
    feed(
        &mut a,
        &n3d[..]
            .iter()
            .map(|c| c[..4800].to_vec())
            .collect::<Vec<_>>(),
    );
    let s = a.finish().clone();
    let over: Vec<_> = s
        .finding_log
        .iter()
        .filter(|e| e.finding.code.label() == "over-omni")
        .collect();
    assert!(!over.is_empty() && over.iter().all(|e| !e.active));
    assert!(!s.finding_log_from_reset);

    a.reset_finding_log();
    let s = a.finish().clone();
    assert!(s.finding_log_from_reset);
    assert!(
        s.finding_log
            .iter()
            .all(|e| e.finding.code.label() != "over-omni")
    );
}
