//! Channel formats, conversion and the plane-wave encoder checked against published tables,
//! closed forms and computed consequences of the addition theorem.

use fieldglass_dsp::encoder::{PlaneWaveEncoder, encoding_gains};
use fieldglass_dsp::format::fuma::{FUMA_LETTERS, FUMA_TO_ACN};
use fieldglass_dsp::format::{AmbiFormat, ConversionPlan, FormatError};
use fieldglass_dsp::sh::{ShEvaluator, channel_count};
use fieldglass_dsp::sphere::Direction;

/// Deterministic pseudo-random numbers in [0, 1) (splitmix64).
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

    fn direction(&mut self) -> Direction {
        let azimuth_deg = self.next_unit() * 360.0 - 180.0;
        let elevation_deg = (self.next_unit() * 2.0 - 1.0).asin().to_degrees();
        Direction::new(azimuth_deg, elevation_deg)
    }
}

#[test]
fn fuma_order_and_letters() {
    // Source: FuMa channel order W X Y Z R S T U V K L M N O P Q (ambisonics.ch; sursound
    // list); letter ↔ ACN pairing from the ambiX paper's table (Nachbar, Zotter, Deleflie,
    // Sontacchi 2011): W0 Y1 Z2 X3 V4 T5 R6 S7 U8 Q9 O10 M11 K12 L13 N14 P15.
    let acn_of_letter = |letter: char| "WYZXVTRSUQOMKLNP".find(letter).unwrap();
    assert_eq!(FUMA_LETTERS.iter().collect::<String>(), "WXYZRSTUVKLMNOPQ");
    for (fuma_channel, &letter) in FUMA_LETTERS.iter().enumerate() {
        assert_eq!(FUMA_TO_ACN[fuma_channel], acn_of_letter(letter), "{letter}");
    }
    // Orders 1 and 2 are prefixes of the order-3 layout (common practice for full-sphere
    // FuMa streams).
    let full = ConversionPlan::to_sn3d(AmbiFormat::FUMA, 3).unwrap();
    for order in 1..=2 {
        let plan = ConversionPlan::to_sn3d(AmbiFormat::FUMA, order).unwrap();
        assert_eq!(plan.channels(), channel_count(order));
        for acn in 0..plan.channels() {
            assert_eq!(plan.source_channel(acn), full.source_channel(acn));
            assert_eq!(plan.gain(acn), full.gain(acn));
        }
    }
}

#[test]
fn fuma_to_sn3d_factors() {
    // Source: maxN factors SN3D = FuMa/k as given by F. Adriaensen, sursound list, 14 Apr 2018;
    // weighting defined by D. G. Malham, ICMC 1999 / Univ. of York 2003 [from memory].
    // Values by ACN: W √2; X Y Z R K 1; S T U V √3/2; L M √(32/45); N O √5/3; P Q √(5/8).
    let expected_sn3d_per_fuma = [
        2f64.sqrt(),
        1.0,
        1.0,
        1.0,
        3f64.sqrt() / 2.0,
        3f64.sqrt() / 2.0,
        1.0,
        3f64.sqrt() / 2.0,
        3f64.sqrt() / 2.0,
        (5.0f64 / 8.0).sqrt(),
        5f64.sqrt() / 3.0,
        (32.0f64 / 45.0).sqrt(),
        1.0,
        (32.0f64 / 45.0).sqrt(),
        5f64.sqrt() / 3.0,
        (5.0f64 / 8.0).sqrt(),
    ];
    for format in [AmbiFormat::FUMA, AmbiFormat::ACN_MAXN] {
        let plan = ConversionPlan::to_sn3d(format, 3).unwrap();
        for (acn, &want) in expected_sn3d_per_fuma.iter().enumerate() {
            assert!(
                (plan.gain(acn) - want).abs() < 1e-15,
                "{format:?} ACN {acn}"
            );
        }
    }
    // The same table in dB: W +3.01, S–V −1.25, L M −1.48, N O −2.55, P Q −2.04.
    let plan = ConversionPlan::to_sn3d(AmbiFormat::FUMA, 3).unwrap();
    let db = |acn: usize| 20.0 * plan.gain(acn).log10();
    for (acn, want_db) in [(0, 3.01), (4, -1.25), (11, -1.48), (10, -2.55), (9, -2.04)] {
        assert!(
            (db(acn) - want_db).abs() < 0.005,
            "ACN {acn}: {} dB",
            db(acn)
        );
    }
}

/// Furse–Malham encoding equations, by FuMa letter (a = azimuth, e = elevation, radians).
fn fuma_closed_form(letter: char, a: f64, e: f64) -> f64 {
    let (sa, ca) = a.sin_cos();
    let (se, ce) = e.sin_cos();
    match letter {
        'W' => std::f64::consts::FRAC_1_SQRT_2,
        'X' => ca * ce,
        'Y' => sa * ce,
        'Z' => se,
        'R' => (3.0 * se * se - 1.0) / 2.0,
        'S' => ca * (2.0 * e).sin(),
        'T' => sa * (2.0 * e).sin(),
        'U' => (2.0 * a).cos() * ce * ce,
        'V' => (2.0 * a).sin() * ce * ce,
        'K' => se * (5.0 * se * se - 3.0) / 2.0,
        'L' => (135.0f64 / 256.0).sqrt() * ca * ce * (5.0 * se * se - 1.0),
        'M' => (135.0f64 / 256.0).sqrt() * sa * ce * (5.0 * se * se - 1.0),
        'N' => (27.0f64 / 4.0).sqrt() * (2.0 * a).cos() * se * ce * ce,
        'O' => (27.0f64 / 4.0).sqrt() * (2.0 * a).sin() * se * ce * ce,
        'P' => (3.0 * a).cos() * ce.powi(3),
        'Q' => (3.0 * a).sin() * ce.powi(3),
        _ => unreachable!(),
    }
}

#[test]
fn fuma_encoder_matches_furse_malham_equations() {
    // Source: the Furse–Malham third-order encoding equations, D. G. Malham, "Higher order
    // Ambisonic systems", Univ. of York 2003 [from memory].
    let mut encoder = PlaneWaveEncoder::new(3, AmbiFormat::FUMA).unwrap();
    let mut sequence = Sequence(1999);
    for _ in 0..1000 {
        let direction = sequence.direction();
        let gains = encoder.gains(direction);
        for (fuma_channel, &letter) in FUMA_LETTERS.iter().enumerate() {
            let want = fuma_closed_form(letter, direction.azimuth_rad(), direction.elevation_rad());
            assert!(
                (gains[fuma_channel] - want).abs() < 1e-13,
                "{letter} at {direction:?}: {} vs {want}",
                gains[fuma_channel]
            );
        }
    }
}

/// Largest |gain| of `channel` over the sphere: 1° grid, then a shrinking pattern search.
fn peak_magnitude(encoder: &mut PlaneWaveEncoder, channel: usize) -> (f64, f64, Direction) {
    let mut value = |az: f64, el: f64| encoder.gains(Direction::new(az, el))[channel].abs();
    let (mut best, mut best_az, mut best_el) = (f64::MIN, 0.0, 0.0);
    for el_step in -90..=90 {
        for az_step in -180..180 {
            let (az, el) = (az_step as f64, el_step as f64);
            let v = value(az, el);
            if v > best {
                (best, best_az, best_el) = (v, az, el);
            }
        }
    }
    let grid_best = best;
    let mut step_deg = 0.5;
    while step_deg > 1e-9 {
        let mut moved = false;
        for (daz, del) in [(1.0, 0.0), (-1.0, 0.0), (0.0, 1.0), (0.0, -1.0)] {
            let (az, el) = (
                best_az + daz * step_deg,
                (best_el + del * step_deg).clamp(-90.0, 90.0),
            );
            let v = value(az, el);
            if v > best {
                (best, best_az, best_el) = (v, az, el);
                moved = true;
            }
        }
        if !moved {
            step_deg *= 0.5;
        }
    }
    (grid_best, best, Direction::new(best_az, best_el))
}

#[test]
fn maxn_components_peak_at_one() {
    // Source: maxN weighting, each non-W component peaks at |1| over the sphere and W carries
    // 1/√2 (D. G. Malham, ICMC 1999; "Higher order Ambisonic systems", York 2003 [from memory]).
    let w_gain = std::f64::consts::FRAC_1_SQRT_2;
    for format in [AmbiFormat::FUMA, AmbiFormat::ACN_MAXN] {
        let mut encoder = PlaneWaveEncoder::new(3, format).unwrap();
        let plan = ConversionPlan::from_sn3d(format, 3).unwrap();
        let mut sequence = Sequence(7);
        for channel in 0..16 {
            let acn = plan.source_channel(channel);
            if acn == 0 {
                for _ in 0..200 {
                    let g = encoder.gains(sequence.direction())[channel];
                    assert!((g - w_gain).abs() < 1e-15, "{format:?} W = {g}");
                }
                continue;
            }
            let (grid_peak, refined_peak, at) = peak_magnitude(&mut encoder, channel);
            assert!(
                grid_peak <= 1.0 + 1e-12,
                "{format:?} ch {channel}: grid {grid_peak}"
            );
            assert!(
                (refined_peak - 1.0).abs() < 1e-9,
                "{format:?} channel {channel} (ACN {acn}) peaks at {refined_peak} at {at:?}"
            );
            if acn == 11 || acn == 13 {
                // L and M peak at elevation ±58.909° (computed: maximum of
                // cos e·(5 sin² e − 1), i.e. sin² e = 11/15).
                let want_deg = (11.0f64 / 15.0).sqrt().asin().to_degrees();
                assert!((at.elevation_deg.abs() - want_deg).abs() < 1e-4, "{at:?}");
                assert!((want_deg - 58.909).abs() < 1e-3);
            }
        }
    }
}

#[test]
fn round_trips_are_identity() {
    // Common practice: converting to a format and back must return the input. FuMa and maxN
    // for orders 1–3, ACN/SN3D and ACN/N3D for orders 1–7.
    let mut sequence = Sequence(42);
    for format in AmbiFormat::ALL {
        let max_order = format.max_order().unwrap_or(7);
        for order in 1..=max_order {
            let forward = ConversionPlan::from_sn3d(format, order).unwrap();
            let back = ConversionPlan::to_sn3d(format, order).unwrap();
            let channels = channel_count(order);
            // The composed map is the identity permutation with unit gain.
            for acn in 0..channels {
                let via = back.source_channel(acn);
                assert_eq!(forward.source_channel(via), acn, "{format:?} order {order}");
                let gain = back.gain(acn) * forward.gain(via);
                assert!(
                    (gain - 1.0).abs() < 1e-15,
                    "{format:?} order {order} ACN {acn}"
                );
            }
            // Frame and block paths on random data.
            let frames = 32;
            let sn3d: Vec<Vec<f32>> = (0..channels)
                .map(|_| {
                    (0..frames)
                        .map(|_| (sequence.next_unit() * 2.0 - 1.0) as f32)
                        .collect()
                })
                .collect();
            let mut stream = vec![vec![0.0f32; frames]; channels];
            let mut recovered = vec![vec![0.0f32; frames]; channels];
            {
                let input: Vec<&[f32]> = sn3d.iter().map(|c| c.as_slice()).collect();
                let mut output: Vec<&mut [f32]> =
                    stream.iter_mut().map(|c| c.as_mut_slice()).collect();
                forward.apply(&input, &mut output);
            }
            {
                let input: Vec<&[f32]> = stream.iter().map(|c| c.as_slice()).collect();
                let mut output: Vec<&mut [f32]> =
                    recovered.iter_mut().map(|c| c.as_mut_slice()).collect();
                back.apply(&input, &mut output);
            }
            let mut frame_in = vec![0.0f32; channels];
            let mut frame_stream = vec![0.0f32; channels];
            let mut frame_out = vec![0.0f32; channels];
            for i in 0..frames {
                for c in 0..channels {
                    frame_in[c] = sn3d[c][i];
                }
                forward.apply_frame(&frame_in, &mut frame_stream);
                back.apply_frame(&frame_stream, &mut frame_out);
                for c in 0..channels {
                    let want = sn3d[c][i];
                    assert!((recovered[c][i] - want).abs() <= 4e-7 * want.abs().max(1e-3));
                    assert_eq!(frame_out[c], recovered[c][i]);
                }
            }
        }
    }
}

#[test]
fn plane_wave_energy_per_order() {
    // A single plane wave has per-order energy relative to W of 10·log10(2n+1) dB in N3D
    // (4.77, 6.99, 8.45 dB for n = 1..3) and 0 dB in SN3D: computed consequence of the
    // addition theorem (Zotter & Frank, "Ambisonics", Springer 2019, ch. 4 [from memory]).
    // FuMa first order: W at 1/√2 puts X²+Y²+Z² at +3.01 dB over W² (Malham [from memory]).
    for (n, want_db) in [(1, 4.77), (2, 6.99), (3, 8.45)] {
        assert!((10.0 * ((2 * n + 1) as f64).log10() - want_db).abs() < 0.005);
    }
    let mut sequence = Sequence(3);
    let order = 7;
    let mut n3d = PlaneWaveEncoder::new(order, AmbiFormat::ACN_N3D).unwrap();
    let mut sn3d = PlaneWaveEncoder::new(order, AmbiFormat::ACN_SN3D).unwrap();
    let mut fuma = PlaneWaveEncoder::new(1, AmbiFormat::FUMA).unwrap();
    let order_energy_db = |gains: &[f64], n: usize| {
        let energy: f64 = gains[n * n..(n + 1) * (n + 1)].iter().map(|g| g * g).sum();
        10.0 * (energy / (gains[0] * gains[0])).log10()
    };
    for _ in 0..200 {
        let direction = sequence.direction();
        let n3d_gains = n3d.gains(direction).to_vec();
        let sn3d_gains = sn3d.gains(direction);
        for n in 1..=order {
            let want_db = 10.0 * ((2 * n + 1) as f64).log10();
            assert!((order_energy_db(&n3d_gains, n) - want_db).abs() < 1e-9);
            assert!(order_energy_db(sn3d_gains, n).abs() < 1e-9);
        }
        let g = fuma.gains(direction);
        let first_order: f64 = g[1..4].iter().map(|v| v * v).sum();
        let ratio_db = 10.0 * (first_order / (g[0] * g[0])).log10();
        assert!((ratio_db - 3.0103).abs() < 1e-4, "{ratio_db}");
    }
}

#[test]
fn encoder_matches_sh_and_accumulates() {
    // The encoder in ACN/SN3D is Y(d) itself (ambiX convention: B_nm = Y_nm·s for a plane wave,
    // Nachbar et al. 2011); the free function and the struct agree in every format.
    let mut sequence = Sequence(11);
    let mut evaluator = ShEvaluator::new(5);
    let mut y = vec![0.0; 36];
    let mut encoder = PlaneWaveEncoder::new(5, AmbiFormat::ACN_SN3D).unwrap();
    for _ in 0..50 {
        let direction = sequence.direction();
        evaluator.eval(direction, &mut y);
        assert_eq!(encoder.gains(direction), y.as_slice());
        for format in AmbiFormat::ALL {
            let mut by_struct = PlaneWaveEncoder::new(3, format).unwrap();
            let mut by_fn = [0.0; 16];
            encoding_gains(3, format, direction, &mut by_fn).unwrap();
            assert_eq!(by_struct.gains(direction), by_fn.as_slice());
        }
    }
}

#[test]
fn construction_errors_are_specific() {
    let err = ConversionPlan::to_sn3d(AmbiFormat::FUMA, 4).unwrap_err();
    assert!(matches!(
        err,
        FormatError::OrderAboveFormatLimit {
            order: 4,
            max_order: 3,
            ..
        }
    ));
    let message = err.to_string();
    assert!(
        message.contains("order 4") && message.contains("FuMa"),
        "{message}"
    );
    assert!(PlaneWaveEncoder::new(4, AmbiFormat::ACN_MAXN).is_err());
    let mut wrong = [0.0; 10];
    let err = encoding_gains(2, AmbiFormat::ACN_N3D, Direction::default(), &mut wrong).unwrap_err();
    assert!(
        err.to_string().contains('9') && err.to_string().contains("10"),
        "{err}"
    );
    let message = "fuma-maxn".parse::<AmbiFormat>().unwrap_err().to_string();
    for label in ["acn-sn3d", "acn-n3d", "fuma", "acn-maxn"] {
        assert!(message.contains(label), "{message}");
    }
}
