//! Format check on scenes encoded with the plane-wave encoder: a few incoherent noise sources
//! plus a diffuse bed of many weaker incoherent plane waves, sample covariance computed here
//! from the encoded signals.
//!
//! Reference facts: the SN3D addition theorem Σ_m Y_nm² = 1 makes the per-order energy of any
//! mixture of incoherent plane waves 0 dB relative to W in SN3D and 10·log10(2n+1) dB in N3D
//! (4.77, 6.99, 8.45 dB for n = 1..3), and FuMa first order read as SN3D +3.01 dB
//! (REFERENCES.md §4, computed; the theorem is in Zotter & Frank, *Ambisonics*, 2019, ch. 4).
//! FuMa order and weights: REFERENCES.md §2 (Malham 2003; Adriaensen 2018).

use fieldglass_dsp::encoder::PlaneWaveEncoder;
use fieldglass_dsp::engine::snapshot::FormatCheck;
use fieldglass_dsp::format::{AmbiFormat, ChannelOrdering};
use fieldglass_dsp::format_check::{
    FormatCheckError, FormatCheckInput, FormatChecker, check_format, score_constants,
};
use fieldglass_dsp::sh::channel_count;
use fieldglass_dsp::sphere::Direction;

/// Deterministic pseudo-random numbers (splitmix64).
struct Sequence(u64);

impl Sequence {
    fn next_unit(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Standard normal (Box–Muller).
    fn gaussian(&mut self) -> f64 {
        let u1 = self.next_unit().max(1e-300);
        let u2 = self.next_unit();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }

    fn direction(&mut self) -> Direction {
        let azimuth_deg = self.next_unit() * 360.0 - 180.0;
        let elevation_deg = (self.next_unit() * 2.0 - 1.0).asin().to_degrees();
        Direction::new(azimuth_deg, elevation_deg)
    }

    fn noise(&mut self, frames: usize, rms: f64) -> Vec<f32> {
        (0..frames)
            .map(|_| (rms * self.gaussian()) as f32)
            .collect()
    }
}

const FRAMES: usize = 32_768;

/// Encoded channels of a scene, in `format`'s channel order.
struct Scene {
    channels: Vec<Vec<f32>>,
}

impl Scene {
    /// Three incoherent noise sources (0, −4, −8 dB) and a diffuse bed 6 dB below the
    /// strongest source, spread over 2·(order+1)² + 24 random directions.
    fn terrace(order: usize, format: AmbiFormat, seed: u64) -> Self {
        let mut random = Sequence(seed);
        let sources = [
            (Direction::new(-35.0, 8.0), 0.0),
            (Direction::new(70.0, 25.0), -4.0),
            (Direction::new(160.0, -15.0), -8.0),
        ];
        let bed_directions = 2 * channel_count(order) + 24;
        let bed_rms = 10f64.powf(-6.0 / 20.0) / (bed_directions as f64).sqrt();
        let mut scene = Self::silence(order);
        let mut encoder = PlaneWaveEncoder::new(order, format).unwrap();
        for (direction, level_db) in sources {
            let signal = random.noise(FRAMES, 10f64.powf(level_db / 20.0));
            scene.add(&mut encoder, direction, &signal);
        }
        for _ in 0..bed_directions {
            let direction = random.direction();
            let signal = random.noise(FRAMES, bed_rms);
            scene.add(&mut encoder, direction, &signal);
        }
        scene
    }

    /// Only an isotropic-ish diffuse bed (no dominant source).
    fn diffuse(order: usize, format: AmbiFormat, seed: u64) -> Self {
        let mut random = Sequence(seed);
        let mut scene = Self::silence(order);
        let mut encoder = PlaneWaveEncoder::new(order, format).unwrap();
        let directions = 4 * channel_count(order);
        for _ in 0..directions {
            let direction = random.direction();
            let signal = random.noise(FRAMES, 0.1);
            scene.add(&mut encoder, direction, &signal);
        }
        scene
    }

    fn silence(order: usize) -> Self {
        Self {
            channels: vec![vec![0.0; FRAMES]; channel_count(order)],
        }
    }

    fn add(&mut self, encoder: &mut PlaneWaveEncoder, direction: Direction, signal: &[f32]) {
        let mut outputs: Vec<&mut [f32]> =
            self.channels.iter_mut().map(|c| c.as_mut_slice()).collect();
        encoder.add_to(direction, 1.0, signal, &mut outputs);
    }

    /// Sample covariance, row-major, in the scene's channel order.
    fn covariance(&self) -> Vec<f64> {
        let m = self.channels.len();
        let mut covariance = vec![0.0; m * m];
        for i in 0..m {
            for j in i..m {
                let sum: f64 = self.channels[i]
                    .iter()
                    .zip(&self.channels[j])
                    .map(|(&a, &b)| a as f64 * b as f64)
                    .sum();
                covariance[i * m + j] = sum / FRAMES as f64;
                covariance[j * m + i] = sum / FRAMES as f64;
            }
        }
        covariance
    }

    fn mean_squares(&self) -> Vec<f64> {
        self.channels
            .iter()
            .map(|c| c.iter().map(|&s| s as f64 * s as f64).sum::<f64>() / FRAMES as f64)
            .collect()
    }

    fn check(&self, order: usize, assumed: AmbiFormat) -> FormatCheck {
        let covariance = self.covariance();
        let mean_square = self.mean_squares();
        check_format(&FormatCheckInput {
            raw_covariance: &covariance,
            order,
            assumed,
            channel_mean_square: &mean_square,
            frames_seen: FRAMES as u64,
            absent_channels: &[],
            mid_band_covariance: None,
        })
    }
}

fn probability_of(check: &FormatCheck, format: AmbiFormat) -> f64 {
    check
        .hypotheses
        .iter()
        .find(|h| h.format == format)
        .map_or(0.0, |h| h.probability)
}

fn describe(check: &FormatCheck) -> String {
    check
        .hypotheses
        .iter()
        .map(|h| {
            format!(
                "{}: p={:.4} fit={:.4} balance={:?}\n",
                h.format.label(),
                h.probability,
                h.steering_fit,
                h.order_balance_db
                    .iter()
                    .map(|db| (db * 100.0).round() / 100.0)
                    .collect::<Vec<_>>()
            )
        })
        .collect()
}

#[test]
fn each_format_is_detected_on_a_scene_written_in_it() {
    let cases = [
        (AmbiFormat::ACN_SN3D, 1),
        (AmbiFormat::ACN_SN3D, 3),
        (AmbiFormat::ACN_SN3D, 5),
        (AmbiFormat::ACN_SN3D, 7),
        (AmbiFormat::ACN_N3D, 1),
        (AmbiFormat::ACN_N3D, 3),
        (AmbiFormat::ACN_N3D, 5),
        (AmbiFormat::ACN_N3D, 7),
        (AmbiFormat::FUMA, 1),
        (AmbiFormat::FUMA, 3),
        (AmbiFormat::ACN_MAXN, 3),
    ];
    for (seed, (format, order)) in cases.into_iter().enumerate() {
        let scene = Scene::terrace(order, format, 100 + seed as u64);
        // Assume the right format and, separately, the wrong default: the verdict must not
        // follow the assumption.
        for assumed in [format, AmbiFormat::ACN_SN3D] {
            let check = scene.check(order, assumed);
            let context = format!(
                "{} order {order}, assumed {}:\n{}",
                format.label(),
                assumed.label(),
                describe(&check)
            );
            assert!(check.ready, "{context}");
            assert_eq!(check.detected, Some(format), "{context}");
            assert_eq!(check.effective_order, order, "{context}");
            let total: f64 = check.hypotheses.iter().map(|h| h.probability).sum();
            assert!((total - 1.0).abs() < 1e-12, "{context}");
            if format == AmbiFormat::FUMA && order == 1 {
                // At first order any permutation of X, Y, Z maps steering vectors to steering
                // vectors, so FuMa and ACN/maxN are indistinguishable; only the maxN weights are
                // detectable, and the prior picks FuMa.
                let maxn = probability_of(&check, AmbiFormat::ACN_MAXN);
                assert!(check.confidence + maxn > 0.8, "{context}");
                let prior_ratio = score_constants::PRIORS[2] / score_constants::PRIORS[3];
                assert!(
                    (check.confidence / maxn - prior_ratio).abs() < 1e-9,
                    "{context}"
                );
            } else {
                assert!(check.confidence > 0.8, "{context}");
            }
            // The right hypothesis reads a plane-wave mixture at 0 dB per order.
            let right = check
                .hypotheses
                .iter()
                .find(|h| h.format == format)
                .unwrap();
            for n in 1..=order {
                assert!(right.order_balance_db[n].abs() < 0.3, "{context}");
            }
        }
    }
}

#[test]
fn n3d_read_as_sn3d_balance_follows_the_addition_theorem() {
    // SN3D: 0 dB per order; N3D read as SN3D: 10·log10(2n+1) (REFERENCES.md §4 [computed]:
    // 4.77, 6.99, 8.45 dB for n = 1..3). Common consequence of the SN3D addition theorem.
    let published_db = [4.77, 6.99, 8.45];
    for (n, &db) in published_db.iter().enumerate() {
        assert!((10.0 * ((2 * n + 3) as f64).log10() - db).abs() < 0.005);
    }
    for order in [3, 7] {
        let sn3d =
            Scene::terrace(order, AmbiFormat::ACN_SN3D, 7).check(order, AmbiFormat::ACN_SN3D);
        let n3d = Scene::terrace(order, AmbiFormat::ACN_N3D, 7).check(order, AmbiFormat::ACN_SN3D);
        for n in 1..=order {
            let expected_db = 10.0 * ((2 * n + 1) as f64).log10();
            assert!(
                sn3d.order_balance_db[n].abs() < 0.3,
                "{:?}",
                sn3d.order_balance_db
            );
            assert!(
                (n3d.order_balance_db[n] - expected_db).abs() < 0.3,
                "order {n}: {:?}",
                n3d.order_balance_db
            );
        }
        assert_eq!(n3d.detected, Some(AmbiFormat::ACN_N3D));
    }
    // Same for a field with no dominant source.
    let diffuse = Scene::diffuse(3, AmbiFormat::ACN_N3D, 8).check(3, AmbiFormat::ACN_SN3D);
    for (n, &db) in published_db.iter().enumerate() {
        assert!(
            (diffuse.order_balance_db[n + 1] - db).abs() < 0.3,
            "{diffuse:?}"
        );
    }
    assert_eq!(
        diffuse.detected,
        Some(AmbiFormat::ACN_N3D),
        "{}",
        describe(&diffuse)
    );
    assert!(diffuse.confidence > 0.8, "{}", describe(&diffuse));
    let diffuse = Scene::diffuse(3, AmbiFormat::ACN_SN3D, 9).check(3, AmbiFormat::ACN_SN3D);
    assert_eq!(
        diffuse.detected,
        Some(AmbiFormat::ACN_SN3D),
        "{}",
        describe(&diffuse)
    );
}

#[test]
fn fuma_first_order_read_as_sn3d_is_three_db_up() {
    // REFERENCES.md §4 [computed]: FuMa X²+Y²+Z² vs W² is +3.01 dB for an incoherent field
    // (W carries 1/√2, REFERENCES.md §2).
    let check = Scene::terrace(1, AmbiFormat::FUMA, 11).check(1, AmbiFormat::ACN_SN3D);
    let expected_db = 10.0 * 2f64.log10();
    assert!((expected_db - 3.01).abs() < 0.005);
    assert!(
        (check.order_balance_db[1] - expected_db).abs() < 0.3,
        "{:?}",
        check.order_balance_db
    );
}

#[test]
fn fuma_mislabelled_as_acn_sn3d_is_detected_with_its_ordering() {
    for seed in [21, 22, 23] {
        let check = Scene::terrace(3, AmbiFormat::FUMA, seed).check(3, AmbiFormat::ACN_SN3D);
        let context = describe(&check);
        let detected = check.detected.expect("ready");
        assert_eq!(detected.ordering, ChannelOrdering::Fuma, "{context}");
        assert_eq!(detected, AmbiFormat::FUMA, "{context}");
        assert!(check.confidence > 0.8, "{context}");
        // The ordering is what the steering fit sees: FuMa fits, ACN/maxN (same weights,
        // other order) does not.
        let fit = |format| {
            check
                .hypotheses
                .iter()
                .find(|h| h.format == format)
                .unwrap()
                .steering_fit
        };
        assert!(fit(AmbiFormat::FUMA) > 0.95, "{context}");
        assert!(
            fit(AmbiFormat::FUMA) - fit(AmbiFormat::ACN_MAXN) > 0.1,
            "{context}"
        );
    }
}

#[test]
fn empty_top_orders_give_effective_order_and_do_not_pose_as_a_format() {
    let order = 3;
    // Orders 2–3 zero: a first-order mix in a third-order container.
    let mut scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 31);
    for channel in &mut scene.channels[4..] {
        channel.iter_mut().for_each(|s| *s = 0.0);
    }
    let check = scene.check(order, AmbiFormat::ACN_SN3D);
    assert_eq!(check.effective_order, 1);
    assert_eq!(
        check.detected,
        Some(AmbiFormat::ACN_SN3D),
        "{}",
        describe(&check)
    );
    assert_eq!(check.silent_channels, (4..16).collect::<Vec<_>>());
    // Orders 2–3 at −50 dB (band-limited, not silent): still effective order 1, still SN3D.
    let mut scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 32);
    for channel in &mut scene.channels[4..] {
        channel
            .iter_mut()
            .for_each(|s| *s *= 10f32.powf(-50.0 / 20.0));
    }
    let check = scene.check(order, AmbiFormat::ACN_SN3D);
    assert_eq!(check.effective_order, 1);
    assert_eq!(
        check.detected,
        Some(AmbiFormat::ACN_SN3D),
        "{}",
        describe(&check)
    );
    assert!(check.silent_channels.is_empty());
    // Orders 2–3 at −30 dB are above the −40 dB floor: effective order 3.
    let mut scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 33);
    for channel in &mut scene.channels[4..] {
        channel
            .iter_mut()
            .for_each(|s| *s *= 10f32.powf(-30.0 / 20.0));
    }
    assert_eq!(scene.check(order, AmbiFormat::ACN_SN3D).effective_order, 3);
}

#[test]
fn zeroed_channel_is_silent_and_copied_channel_is_a_duplicate() {
    let order = 3;
    let mut scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 41);
    scene.channels[5].iter_mut().for_each(|s| *s = 0.0);
    let check = scene.check(order, AmbiFormat::ACN_SN3D);
    assert_eq!(check.silent_channels, vec![5]);
    assert!(check.duplicate_channels.is_empty());

    let mut scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 42);
    scene.channels[7] = scene.channels[2].clone();
    let check = scene.check(order, AmbiFormat::ACN_SN3D);
    assert!(check.silent_channels.is_empty());
    assert_eq!(check.duplicate_channels, vec![(2, 7)]);

    // An inverted copy is a duplicate too.
    let mut scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 43);
    scene.channels[9] = scene.channels[1].iter().map(|s| -s).collect();
    assert_eq!(
        scene.check(order, AmbiFormat::ACN_SN3D).duplicate_channels,
        vec![(1, 9)]
    );
}

#[test]
fn single_plane_wave_is_not_a_set_of_duplicates() {
    // One source correlates every channel with every other; that is physics, not a fault.
    let order = 2;
    let mut scene = Scene::silence(order);
    let mut encoder = PlaneWaveEncoder::new(order, AmbiFormat::ACN_SN3D).unwrap();
    let signal = Sequence(51).noise(FRAMES, 0.3);
    scene.add(&mut encoder, Direction::new(40.0, 20.0), &signal);
    let check = scene.check(order, AmbiFormat::ACN_SN3D);
    assert!(
        check.duplicate_channels.is_empty(),
        "{:?}",
        check.duplicate_channels
    );
    assert_eq!(
        check.detected,
        Some(AmbiFormat::ACN_SN3D),
        "{}",
        describe(&check)
    );
    assert!(check.hypotheses[0].steering_fit > 0.999);
}

#[test]
fn not_ready_without_enough_frames_or_signal_and_bad_input_is_refused() {
    let order = 1;
    let scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 61);
    let covariance = scene.covariance();
    let mean_square = scene.mean_squares();
    let mut input = FormatCheckInput {
        raw_covariance: &covariance,
        order,
        assumed: AmbiFormat::ACN_SN3D,
        channel_mean_square: &mean_square,
        frames_seen: score_constants::MIN_FRAMES_FOR_VERDICT - 1,
        absent_channels: &[],
        mid_band_covariance: None,
    };
    let early = check_format(&input);
    assert!(!early.ready);
    assert_eq!(early.detected, None);
    input.frames_seen = score_constants::MIN_FRAMES_FOR_VERDICT;
    assert!(check_format(&input).ready);

    let silence = vec![0.0; 16];
    let quiet = check_format(&FormatCheckInput {
        raw_covariance: &silence,
        channel_mean_square: &silence[..4],
        ..input
    });
    assert!(!quiet.ready && quiet.silent_channels.is_empty());

    let mut checker = FormatChecker::new(order).unwrap();
    let short = checker.check(&FormatCheckInput {
        raw_covariance: &covariance[..15],
        ..input
    });
    assert!(matches!(
        short,
        Err(FormatCheckError::WrongLength {
            expected: 16,
            got: 15,
            ..
        })
    ));
    let mismatch = checker.check(&FormatCheckInput { order: 2, ..input });
    assert!(mismatch.unwrap_err().to_string().contains("order-2"));
    let mut nan = covariance.clone();
    nan[5] = f64::NAN;
    assert_eq!(
        checker.check(&FormatCheckInput {
            raw_covariance: &nan,
            ..input
        }),
        Err(FormatCheckError::NonFinite)
    );
    // FuMa and maxN are only tested where they exist.
    let formats: Vec<_> = FormatChecker::new(5).unwrap().formats().collect();
    assert_eq!(formats, vec![AmbiFormat::ACN_SN3D, AmbiFormat::ACN_N3D]);
}

#[test]
fn cost_per_check_printout() {
    // Speed figure, not an assertion: run with `--release -- --nocapture cost_per_check`.
    let order = 7;
    let scene = Scene::terrace(order, AmbiFormat::ACN_SN3D, 71);
    let covariance = scene.covariance();
    let mean_square = scene.mean_squares();
    let input = FormatCheckInput {
        raw_covariance: &covariance,
        order,
        assumed: AmbiFormat::ACN_SN3D,
        channel_mean_square: &mean_square,
        frames_seen: FRAMES as u64,
        absent_channels: &[],
        mid_band_covariance: None,
    };
    let started = std::time::Instant::now();
    let mut checker = FormatChecker::new(order).unwrap();
    let built = started.elapsed();
    let runs = 20;
    let started = std::time::Instant::now();
    for _ in 0..runs {
        std::hint::black_box(checker.check(&input).unwrap());
    }
    println!(
        "format check order {order}: build {:.2} ms, check {:.3} ms each",
        built.as_secs_f64() * 1e3,
        started.elapsed().as_secs_f64() * 1e3 / runs as f64
    );
}
