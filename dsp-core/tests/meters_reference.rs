//! Reference checks for `fieldglass_dsp::meters`: BS.1770-4 Annex 2 true peak (EBU Tech 3341
//! cases 15–19) and the per-channel meter strip. Sources are named beside each check.

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::f64::consts::PI;

use fieldglass_dsp::meters::{
    ChannelMeterConfig, ChannelMeters, ChannelReading, LEVEL_FLOOR_DB, MeterError,
    TRUE_PEAK_PHASES, TruePeakMeter,
};

// ---------------------------------------------------------------------------------------------
// Allocation counter (per thread, so parallel tests do not disturb each other).

struct CountingAllocator;

thread_local! {
    static ALLOCATIONS: Cell<usize> = const { Cell::new(0) };
}

unsafe impl GlobalAlloc for CountingAllocator {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let _ = ALLOCATIONS.try_with(|count| count.set(count.get() + 1));
        unsafe { System.alloc(layout) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
}

#[global_allocator]
static GLOBAL: CountingAllocator = CountingAllocator;

fn allocations_during(f: impl FnOnce()) -> usize {
    let before = ALLOCATIONS.with(Cell::get);
    f();
    ALLOCATIONS.with(Cell::get) - before
}

fn sine(freq_hz: f64, amplitude: f64, phase_rad: f64, fs: f64, count: usize) -> Vec<f32> {
    (0..count)
        .map(|n| (amplitude * (2.0 * PI * freq_hz * n as f64 / fs + phase_rad).sin()) as f32)
        .collect()
}

fn db_to_amplitude(db: f64) -> f64 {
    10f64.powf(db / 20.0)
}

// ---------------------------------------------------------------------------------------------
// True peak, ITU-R BS.1770-4 Annex 2.

#[test]
fn true_peak_filter_phases_follow_annex_2_symmetry() {
    // BS.1770-4 Annex 2 (REFERENCES.md §5): phase 3 = phase 0 reversed, phase 2 = phase 1
    // reversed; the 48 taps then form a symmetric (linear-phase) interpolator.
    for tap in 0..12 {
        assert_eq!(TRUE_PEAK_PHASES[3][tap], TRUE_PEAK_PHASES[0][11 - tap]);
        assert_eq!(TRUE_PEAK_PHASES[2][tap], TRUE_PEAK_PHASES[1][11 - tap]);
    }
    assert_eq!(TRUE_PEAK_PHASES[0][6], 0.9721679687500);
    assert_eq!(TRUE_PEAK_PHASES[1][0], -0.0291748046875);
}

/// True peak of a steady sine: the first `skip` samples prime the filter history and are not
/// measured (REFERENCES.md §5: an abrupt onset makes the interpolator overshoot).
fn steady_true_peak_dbtp(freq_hz: f64, amplitude: f64, phase_deg: f64, skip: usize) -> f64 {
    let fs = 48_000.0;
    let signal = sine(freq_hz, amplitude, phase_deg.to_radians(), fs, 48_000);
    let mut meter = TruePeakMeter::new();
    meter.push(&signal[..skip]);
    meter.reset_peak();
    meter.push(&signal[skip..]);
    meter.peak_dbtp()
}

#[test]
fn tech3341_true_peak_cases_15_to_19() {
    // EBU Tech 3341 Table 1 cases 15–19 (48 kHz; REFERENCES.md §5): expected −6.0 or +3.0 dBTP
    // with tolerance +0.2 / −0.4 dB. Edge samples (first 100) are skipped as REFERENCES.md
    // advises.
    let fs = 48_000.0;
    let cases = [
        (15, fs / 4.0, 0.5, 0.0, -6.0),
        (16, fs / 4.0, 0.5, 45.0, -6.0),
        (17, fs / 6.0, 0.5, 60.0, -6.0),
        (18, fs / 8.0, 0.5, 67.5, -6.0),
        (19, fs / 4.0, 1.41, 45.0, 3.0),
    ];
    for (case, freq_hz, amplitude, phase_deg, expected_dbtp) in cases {
        let got = steady_true_peak_dbtp(freq_hz, amplitude, phase_deg, 100);
        println!("Tech 3341 case {case}: {got:.3} dBTP (expected {expected_dbtp} +0.2/-0.4)");
        assert!(
            got <= expected_dbtp + 0.2 && got >= expected_dbtp - 0.4,
            "Tech 3341 case {case}: {got:.3} dBTP, expected {expected_dbtp} +0.2/−0.4"
        );
    }
}

#[test]
fn true_peak_reads_above_sample_peak_for_inter_sample_peaks() {
    // Tech 3341 case 16 signal: samples peak at −9.03 dBFS while the sine peaks at −6.02
    // (REFERENCES.md §5); the sample peak alone would miss 3 dB.
    let signal = sine(12_000.0, 0.5, 45f64.to_radians(), 48_000.0, 4800);
    let sample_peak = signal.iter().fold(0.0f32, |m, s| m.max(s.abs()));
    assert!((20.0 * f64::from(sample_peak).log10() + 9.03).abs() < 0.01);
    let mut meter = TruePeakMeter::new();
    meter.push(&signal);
    assert!(meter.peak_dbtp() > -6.5);
}

#[test]
fn true_peak_never_reads_below_sample_peak() {
    // Common practice: the true peak of a signal is at least its largest sample. Seeded sweep
    // over tones from 20 Hz to 23 kHz, phases and amplitudes.
    let mut state = 0x2545_f491_4f6c_dd1d_u64;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    for _ in 0..50 {
        let freq_hz = 20.0 + 23_000.0 * uniform();
        let signal = sine(freq_hz, uniform(), 2.0 * PI * uniform(), 48_000.0, 2000);
        let sample_peak = signal
            .iter()
            .fold(0.0f64, |m, &s| m.max(f64::from(s).abs()));
        let mut meter = TruePeakMeter::new();
        meter.push(&signal);
        assert!(meter.peak_linear() >= sample_peak, "{freq_hz} Hz");
    }
}

#[test]
fn true_peak_of_997_hz_sine_is_its_amplitude() {
    // REFERENCES.md §5 [C]: 4× under-read at 997 Hz is about −0.001 dB; the Annex 2 passband
    // ripple is within ±0.11 dB.
    let got = steady_true_peak_dbtp(997.0, 0.5, 0.3, 100);
    assert!((got - 20.0 * 0.5f64.log10()).abs() <= 0.12, "{got}");
}

#[test]
fn true_peak_is_independent_of_block_size() {
    let signal = sine(15_000.0, 0.7, 0.2, 48_000.0, 10_000);
    let mut whole = TruePeakMeter::new();
    whole.push(&signal);
    for block_len in [1, 3, 64, 4096] {
        let mut meter = TruePeakMeter::new();
        for block in signal.chunks(block_len) {
            meter.push(block);
        }
        assert_eq!(
            meter.peak_linear(),
            whole.peak_linear(),
            "block {block_len}"
        );
    }
}

#[test]
fn true_peak_counts_non_finite_and_stays_finite() {
    let mut meter = TruePeakMeter::new();
    meter.push(&[
        0.25,
        f32::NAN,
        0.25,
        f32::INFINITY,
        -0.25,
        f32::NEG_INFINITY,
    ]);
    assert_eq!(meter.invalid_sample_count(), 3);
    assert!(meter.peak_linear().is_finite() && meter.peak_dbtp().is_finite());
    assert!(meter.peak_linear() < 0.5);
}

// ---------------------------------------------------------------------------------------------
// Channel meters.

const FS: f64 = 48_000.0;

fn meters(channels: usize) -> ChannelMeters {
    ChannelMeters::new(channels, FS, ChannelMeterConfig::default()).unwrap()
}

fn push_mono(strip: &mut ChannelMeters, samples: &[f32], block_len: usize) {
    for block in samples.chunks(block_len) {
        strip.push(&[block]);
    }
}

#[test]
fn construction_errors_are_specific() {
    assert_eq!(
        ChannelMeters::new(0, FS, ChannelMeterConfig::default()).unwrap_err(),
        MeterError::NoChannels
    );
    assert!(matches!(
        ChannelMeters::new(4, f64::NAN, ChannelMeterConfig::default()).unwrap_err(),
        MeterError::InvalidSampleRate { .. }
    ));
    let bad = ChannelMeterConfig {
        window_ms: -1.0,
        ..ChannelMeterConfig::default()
    };
    let err = ChannelMeters::new(4, FS, bad).unwrap_err();
    assert!(err.to_string().contains("window_ms"), "{err}");
    let bad = ChannelMeterConfig {
        clip_threshold: f32::NAN,
        ..ChannelMeterConfig::default()
    };
    assert!(ChannelMeters::new(4, FS, bad).is_err());
    assert!(ChannelMeters::new(64, 22_050.0, ChannelMeterConfig::default()).is_ok());
    assert!(ChannelMeters::new(66, 384_000.0, ChannelMeterConfig::default()).is_ok());
}

#[test]
fn clip_counts_are_exact() {
    // Common practice: a clip is a sample at or beyond full scale; threshold |x| ≥ 1.0.
    let mut strip = meters(2);
    let mut w = vec![0.1f32; 4800];
    for (i, value) in [
        (10, 1.0),
        (20, -1.0),
        (30, 0.999_999_9),
        (40, 1.5),
        (50, -2.0),
    ] {
        w[i] = value;
    }
    let quiet = vec![0.5f32; 4800];
    strip.push(&[&w, &quiet]);
    strip.push(&[&w[..100], &quiet[..100]]);
    assert_eq!(strip.reading(0).unwrap().clip_count, 8, "4 + 4 clips");
    assert_eq!(strip.reading(1).unwrap().clip_count, 0);
    strip.reset_clips();
    assert_eq!(strip.reading(0).unwrap().clip_count, 0);

    let config = ChannelMeterConfig {
        clip_threshold: 0.5,
        ..ChannelMeterConfig::default()
    };
    let mut strip = ChannelMeters::new(2, FS, config).unwrap();
    strip.push(&[&w, &quiet]);
    assert_eq!(strip.reading(0).unwrap().clip_count, 5);
    assert_eq!(strip.reading(1).unwrap().clip_count, 4800);
}

#[test]
fn non_finite_samples_are_counted_excluded_and_meters_stay_finite() {
    let mut strip = meters(1);
    let mut block = vec![0.5f32; 48_000];
    for i in (0..48_000).step_by(97) {
        block[i] = [f32::NAN, f32::INFINITY, f32::NEG_INFINITY][i % 3];
    }
    let bad = block.iter().filter(|s| !s.is_finite()).count() as u64;
    push_mono(&mut strip, &block, 1000);
    let reading = strip.reading(0).unwrap();
    assert_eq!(reading.invalid_sample_count, bad);
    assert_eq!(reading.clip_count, 0, "±∞ is invalid, not a clip");
    // Excluded from the window measures: the rest is a constant 0.5.
    assert!(
        (reading.rms_dbfs - 20.0 * 0.5f64.log10()).abs() < 1e-9,
        "{}",
        reading.rms_dbfs
    );
    assert!((reading.dc_offset - 0.5).abs() < 1e-12);
    assert!((reading.sample_peak_dbfs - 20.0 * 0.5f64.log10()).abs() < 1e-9);
    for value in [
        reading.sample_peak_dbfs,
        reading.true_peak_dbtp,
        reading.rms_dbfs,
        reading.peak_hold_dbfs,
        reading.true_peak_hold_dbtp,
        reading.max_true_peak_dbtp,
        reading.dc_offset,
    ] {
        assert!(value.is_finite());
    }
    // A whole window of NaN: everything falls to the floor, still finite.
    push_mono(&mut strip, &[f32::NAN; 48_000], 512);
    let reading = strip.reading(0).unwrap();
    assert_eq!(reading.rms_dbfs, LEVEL_FLOOR_DB);
    assert_eq!(reading.dc_offset, 0.0);
    assert!(reading.true_peak_dbtp.is_finite());
}

#[test]
fn dc_offset_of_a_constant() {
    let mut strip = meters(2);
    let w = vec![0.25f32; 24_000];
    let negative = vec![-0.125f32; 24_000];
    strip.push(&[&w, &negative]);
    assert!((strip.reading(0).unwrap().dc_offset - 0.25).abs() < 1e-12);
    assert!((strip.reading(1).unwrap().dc_offset + 0.125).abs() < 1e-12);
    // A sine over a whole number of cycles in the window has no DC.
    let mut strip = meters(1);
    push_mono(&mut strip, &sine(1000.0, 0.9, 0.1, FS, 48_000), 333);
    assert!(strip.reading(0).unwrap().dc_offset.abs() < 1e-6);
}

#[test]
fn rms_of_full_scale_sine_is_minus_3_01_dbfs() {
    // Common practice (RMS of a sine = peak/√2, no +3 dB "AES17" offset): −3.01 dBFS.
    let mut strip = meters(1);
    push_mono(&mut strip, &sine(1000.0, 1.0, 0.0, FS, 48_000), 480);
    let reading = strip.reading(0).unwrap();
    println!(
        "RMS of 0 dBFS 1 kHz sine: {:.4} dBFS over {:.3} s",
        reading.rms_dbfs,
        strip.window_s()
    );
    assert!(
        (reading.rms_dbfs + 3.0103).abs() < 0.001,
        "{}",
        reading.rms_dbfs
    );
    assert!((strip.window_s() - 0.3).abs() < 1e-12);
    assert!(reading.sample_peak_dbfs.abs() < 0.001);
    // Window is 300 ms: 400 ms after a jump from full scale to −20 dB the RMS is the new level.
    push_mono(&mut strip, &sine(1000.0, 0.1, 0.0, FS, 19_200), 480);
    assert!((strip.reading(0).unwrap().rms_dbfs + 23.0103).abs() < 0.001);
}

#[test]
fn over_omni_uses_a_tolerance_on_window_levels() {
    // DESIGN.md: flag a channel whose short-window level exceeds W's by more than 0.5 dB.
    let count = 24_000;
    let w = sine(500.0, 0.5, 0.0, FS, count);
    let scaled = |db: f64| -> Vec<f32> { sine(700.0, 0.5 * db_to_amplitude(db), 0.0, FS, count) };
    let (plus_1, plus_0_3, minus_6) = (scaled(1.0), scaled(0.3), scaled(-6.0));
    let silent = vec![0.0f32; count];
    let input: [&[f32]; 5] = [&w, &plus_1, &plus_0_3, &minus_6, &silent];
    let mut strip = meters(5);
    for start in (0..count).step_by(256) {
        let end = (start + 256).min(count);
        let block: Vec<&[f32]> = input.iter().map(|c| &c[start..end]).collect();
        strip.push(&block);
    }
    let flags: Vec<bool> = (0..5).map(|c| strip.over_omni(c)).collect();
    assert_eq!(flags, [false, true, false, false, false]);
    let mut readings = [ChannelReading::default(); 5];
    assert_eq!(strip.read_into(&mut readings), 5);
    assert!(readings[1].over_omni && !readings[2].over_omni);
    println!(
        "levels vs W: +{:.3} dB, +{:.3} dB",
        readings[1].rms_dbfs - readings[0].rms_dbfs,
        readings[2].rms_dbfs - readings[0].rms_dbfs
    );

    let loose = ChannelMeterConfig {
        over_omni_tolerance_db: 1.5,
        ..ChannelMeterConfig::default()
    };
    let mut strip = ChannelMeters::new(5, FS, loose).unwrap();
    strip.push(&input);
    assert!(!strip.over_omni(1), "1 dB is within a 1.5 dB tolerance");
}

#[test]
fn peak_hold_keeps_the_peak_for_the_hold_time() {
    let mut strip = meters(1);
    let mut signal = vec![0.0f32; 48_000 * 4];
    signal[480] = 0.5;
    push_mono(&mut strip, &signal[..48_000], 1024); // 1 s after the click
    let reading = strip.reading(0).unwrap();
    let click_db = 20.0 * 0.5f64.log10();
    assert!((reading.peak_hold_dbfs - click_db).abs() < 1e-9);
    assert_eq!(
        reading.sample_peak_dbfs, LEVEL_FLOOR_DB,
        "window (300 ms) has moved on"
    );
    push_mono(&mut strip, &signal[48_000..48_000 * 3], 1024); // 3 s after the click
    let reading = strip.reading(0).unwrap();
    assert_eq!(
        reading.peak_hold_dbfs, LEVEL_FLOOR_DB,
        "hold (2 s) has expired"
    );
    assert!((reading.max_sample_peak_dbfs - click_db).abs() < 1e-9);
    assert!(reading.max_true_peak_dbtp > click_db - 1.0);
    strip.reset_holds();
    assert_eq!(
        strip.reading(0).unwrap().max_sample_peak_dbfs,
        LEVEL_FLOOR_DB
    );
}

#[test]
fn channel_true_peak_matches_the_standalone_meter() {
    let signal = sine(12_000.0, 0.5, 45f64.to_radians(), FS, 14_400);
    let mut strip = meters(1);
    push_mono(&mut strip, &signal, 100);
    let mut reference = TruePeakMeter::new();
    reference.push(&signal);
    let reading = strip.reading(0).unwrap();
    assert!((reading.max_true_peak_dbtp - reference.peak_dbtp()).abs() < 1e-12);
    assert!(
        reading.true_peak_dbtp >= reading.sample_peak_dbfs + 2.5,
        "Tech 3341 case 16 signal"
    );
}

#[test]
fn readings_do_not_depend_on_block_size() {
    let signal = sine(440.0, 0.8, 0.0, FS, 30_000);
    let mut reference = meters(1);
    reference.push(&[&signal]);
    for block_len in [1, 17, 480, 16_384] {
        let mut strip = meters(1);
        push_mono(&mut strip, &signal, block_len);
        assert_eq!(strip.reading(0), reference.reading(0), "block {block_len}");
    }
}

#[test]
fn push_does_not_allocate() {
    let channels = 64;
    let mut strip = ChannelMeters::new(channels, FS, ChannelMeterConfig::default()).unwrap();
    let data: Vec<Vec<f32>> = (0..channels)
        .map(|c| sine(100.0 + c as f64, 0.5, 0.0, FS, 4800))
        .collect();
    let input: Vec<&[f32]> = data.iter().map(|c| c.as_slice()).collect();
    let mut readings = vec![ChannelReading::default(); channels];
    let allocations = allocations_during(|| {
        for _ in 0..10 {
            strip.push(&input);
            strip.read_into(&mut readings);
        }
        strip.reset_clips();
        strip.reset_holds();
    });
    assert_eq!(allocations, 0);
}

#[test]
fn abrupt_onset_makes_the_interpolator_overshoot() {
    // REFERENCES.md §5 [C]: Tech 3341 case 18 started abruptly at sample 0 reads about
    // −5.32 dBTP (outside the +0.2 dB tolerance), which is why the cases above skip the edge.
    let got = steady_true_peak_dbtp(6000.0, 0.5, 67.5, 0);
    println!("case 18 with abrupt onset: {got:.3} dBTP");
    assert!((got + 5.32).abs() < 0.05, "{got}");
}
