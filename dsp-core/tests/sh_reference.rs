//! Real spherical harmonics (ACN/SN3D) checked against sources outside the project.

use fieldglass_dsp::sh::{ShEvaluator, channel_count};
use fieldglass_dsp::sphere::Direction;

/// Deterministic directions, uniform on the sphere (splitmix64; seeded, so failures repeat).
fn random_directions(count: usize, seed: u64) -> Vec<Direction> {
    let mut state = seed;
    let mut next_unit = move || {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..count)
        .map(|_| {
            let azimuth_deg = next_unit() * 360.0 - 180.0;
            let elevation_deg = (next_unit() * 2.0 - 1.0).asin().to_degrees();
            Direction::new(azimuth_deg, elevation_deg)
        })
        .collect()
}

/// Reference vectors: (direction, Y_0..Y_120).
fn scipy_vectors() -> Vec<(f64, f64, Vec<f64>)> {
    let text = include_str!("data/sh_scipy_vectors.txt");
    text.lines()
        .filter(|line| !line.starts_with('#') && !line.trim().is_empty())
        .map(|line| {
            let numbers: Vec<f64> = line
                .split_whitespace()
                .map(|field| field.parse().expect("number in reference file"))
                .collect();
            (numbers[0], numbers[1], numbers[2..].to_vec())
        })
        .collect()
}

#[test]
fn matches_scipy_orders_0_to_10() {
    // Source: SciPy scipy.special.sph_harm_y turned into real SN3D without the Condon–Shortley
    // phase, cross-checked in the generator against scipy.special.lpmv·(−1)^m and mpmath
    // (tests/data/gen_sh_scipy.py; sph_harm_y agrees with mpmath to 5e-15). |Y_SN3D| ≤ 1, so an
    // absolute bound is also relative to the largest value. The bound is 1e-13 (we see 4e-15):
    // tight enough to catch precision loss near the poles, where forming cos(el) as
    // sqrt(1 − sin²el) gave 3.4e-12 at el = 89.999°.
    let vectors = scipy_vectors();
    assert_eq!(vectors.len(), 210, "reference file has all directions");
    let mut worst = 0.0f64;
    for order in 0..=10 {
        let mut evaluator = ShEvaluator::new(order);
        let mut values = vec![0.0; channel_count(order)];
        for (azimuth_deg, elevation_deg, reference) in &vectors {
            assert_eq!(reference.len(), channel_count(10));
            evaluator.eval(Direction::new(*azimuth_deg, *elevation_deg), &mut values);
            for (acn, (&got, &want)) in values.iter().zip(reference).enumerate() {
                let error = (got - want).abs();
                worst = worst.max(error);
                assert!(
                    error <= 1e-13,
                    "order {order}, ACN {acn} at ({azimuth_deg}, {elevation_deg}): {got} vs SciPy {want}"
                );
            }
        }
    }
    eprintln!("max |Rust - SciPy| over orders 0..10: {worst:.2e}");
}

/// The ambiX closed forms for ACN 0..15 in SN3D (a = azimuth, e = elevation, radians).
fn closed_form_sn3d(acn: usize, a: f64, e: f64) -> f64 {
    let (sa, ca) = a.sin_cos();
    let (se, ce) = e.sin_cos();
    let s3 = 3f64.sqrt();
    match acn {
        0 => 1.0,
        1 => sa * ce,
        2 => se,
        3 => ca * ce,
        4 => s3 / 2.0 * (2.0 * a).sin() * ce * ce,
        5 => s3 / 2.0 * sa * (2.0 * e).sin(),
        6 => (3.0 * se * se - 1.0) / 2.0,
        7 => s3 / 2.0 * ca * (2.0 * e).sin(),
        8 => s3 / 2.0 * (2.0 * a).cos() * ce * ce,
        9 => (5.0f64 / 8.0).sqrt() * (3.0 * a).sin() * ce.powi(3),
        10 => 15f64.sqrt() / 2.0 * (2.0 * a).sin() * se * ce * ce,
        11 => (3.0f64 / 8.0).sqrt() * sa * ce * (5.0 * se * se - 1.0),
        12 => se * (5.0 * se * se - 3.0) / 2.0,
        13 => (3.0f64 / 8.0).sqrt() * ca * ce * (5.0 * se * se - 1.0),
        14 => 15f64.sqrt() / 2.0 * (2.0 * a).cos() * se * ce * ce,
        15 => (5.0f64 / 8.0).sqrt() * (3.0 * a).cos() * ce.powi(3),
        _ => unreachable!(),
    }
}

#[test]
fn matches_ambix_closed_forms_acn_0_to_15() {
    // Source: C. Nachbar, F. Zotter, E. Deleflie, A. Sontacchi, "AmbiX – A Suggested Ambisonics
    // Format", Ambisonics Symposium 2011, table of SN3D real SH up to third order.
    let mut evaluator = ShEvaluator::new(3);
    let mut values = [0.0; 16];
    for direction in random_directions(2000, 2011) {
        evaluator.eval(direction, &mut values);
        let (a, e) = (direction.azimuth_rad(), direction.elevation_rad());
        for (acn, &got) in values.iter().enumerate() {
            let want = closed_form_sn3d(acn, a, e);
            assert!(
                (got - want).abs() < 1e-13,
                "ACN {acn} at {direction:?}: {got} vs closed form {want}"
            );
        }
    }
}

#[test]
fn numeric_values_at_two_directions() {
    // Source: the ambiX closed forms (Nachbar, Zotter, Deleflie, Sontacchi 2011) evaluated by
    // hand at (30°, 20°) to 6 decimals, and exactly at (−120°, −45°), where every factor is a
    // simple surd; three entries there are only given to 6 decimals.
    let at_30_20 = [
        1.000000, 0.469846, 0.342020, 0.813798, 0.662267, 0.278335, -0.324533, 0.482091, 0.382360,
        0.655990, 0.506488, -0.119436, -0.413008, -0.206869, 0.292421, 0.0,
    ];
    let s2 = 2f64.sqrt();
    let s3 = 3f64.sqrt();
    let s6 = 6f64.sqrt();
    // (value, exact?)
    let at_minus120_minus45: [(f64, bool); 16] = [
        (1.0, true),
        (-s6 / 4.0, true),
        (-s2 / 2.0, true),
        (-s2 / 4.0, true),
        (3.0 / 8.0, true),
        (3.0 / 4.0, true),
        (1.0 / 4.0, true),
        (s3 / 4.0, true),
        (-s3 / 8.0, true),
        (0.0, true),
        (-0.592927, false),
        (-9.0 / 16.0, true),
        (s2 / 8.0, true),
        (-0.324760, false),
        (0.342327, false),
        (0.279508, false),
    ];
    let mut evaluator = ShEvaluator::new(3);
    let mut values = [0.0; 16];
    evaluator.eval(Direction::new(30.0, 20.0), &mut values);
    for (acn, (&got, &want)) in values.iter().zip(&at_30_20).enumerate() {
        assert!(
            (got - want).abs() < 5.1e-7,
            "ACN {acn} at (30, 20): {got} vs {want}"
        );
    }
    evaluator.eval(Direction::new(-120.0, -45.0), &mut values);
    for (acn, (&got, &(want, exact))) in values.iter().zip(&at_minus120_minus45).enumerate() {
        let tolerance = if exact { 1e-14 } else { 5.1e-7 };
        assert!(
            (got - want).abs() < tolerance,
            "ACN {acn} at (−120, −45): {got} vs {want}"
        );
    }
}

#[test]
fn sn3d_addition_theorem_orders_0_to_10() {
    // Σ_m Y_nm(d)² = 1 in SN3D for every d and n: the addition theorem with P_n(1) = 1
    // (common consequence; e.g. Zotter & Frank, "Ambisonics", Springer 2019, ch. 4 [from memory]).
    let order = 10;
    let mut evaluator = ShEvaluator::new(order);
    let mut values = vec![0.0; channel_count(order)];
    let mut directions = random_directions(500, 4);
    directions.extend([
        Direction::new(0.0, 90.0),
        Direction::new(0.0, -90.0),
        Direction::new(180.0, 0.0),
    ]);
    for direction in directions {
        evaluator.eval(direction, &mut values);
        for n in 0..=order {
            let sum: f64 = values[n * n..(n + 1) * (n + 1)].iter().map(|y| y * y).sum();
            assert!(
                (sum - 1.0).abs() < 1e-12,
                "order {n} at {direction:?}: Σ Y² = {sum}"
            );
        }
    }
}
