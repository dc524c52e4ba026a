//! Beam weights and directivity against published values.
//!
//! Values come from: M. Abramowitz & I. A. Stegun, Handbook of Mathematical Functions (1964),
//! Table 25.4 (Gauss–Legendre abscissae; from memory, digits computed with mpmath);
//! F. Zotter & M. Frank, Ambisonics (Springer 2019) for the r_E approximation and the max-rE
//! weight table (from memory; digits computed with NumPy/SciPy); J. Daniel, PhD thesis 2001,
//! for the in-phase weights (from memory); B. Rafaely, Fundamentals of Spherical Array
//! Processing (2015) for the (N+1)² directivity bound of the basic beam (from memory).

use fieldglass_dsp::beam::{
    BeamKind, PowerMapPlan, beam_weights, directivity_index_db, legendre_p, max_re_root,
    max_re_root_approx,
};
use fieldglass_dsp::sh::{channel_count, sh_sn3d};
use fieldglass_dsp::sphere::Direction;
use fieldglass_dsp::sphere::grid::EquirectGrid;

/// Largest Gauss–Legendre abscissa of P_{N+1}, N = 1..=7 (Abramowitz & Stegun Table 25.4,
/// from memory; 15 digits computed with mpmath).
const GAUSS_LEGENDRE_LARGEST: [f64; 7] = [
    0.577350269189626,
    0.774596669241483,
    0.861136311594053,
    0.906179845938664,
    0.932469514203152,
    0.949107912342759,
    0.960289856497536,
];

#[test]
fn max_re_roots_match_gauss_legendre_abscissae() {
    for (k, &expected) in GAUSS_LEGENDRE_LARGEST.iter().enumerate() {
        let order = k + 1;
        let root = max_re_root(order);
        // Abramowitz & Stegun Table 25.4 (digits via mpmath).
        assert!(
            (root - expected).abs() < 1e-12,
            "N={order}: {root} vs {expected}"
        );
        // It really is a root of P_{N+1}.
        assert!(legendre_p(order + 1, root).abs() < 1e-13);
    }
}

#[test]
fn max_re_root_stays_a_root_at_high_order() {
    // Largest root of P_{N+1} lies above every other root: P has no sign change above it.
    for order in [10, 20, 31] {
        let root = max_re_root(order);
        assert!(legendre_p(order + 1, root).abs() < 1e-12, "N={order}");
        for k in 1..50 {
            let x = root + (1.0 - root) * k as f64 / 50.0;
            assert!(legendre_p(order + 1, x) > 0.0, "N={order} x={x}");
        }
    }
}

#[test]
fn published_approximation_is_within_its_accuracy() {
    // Zotter & Frank 2019: r_E ≈ cos(137.9°/(N+1.51)). Misses computed with NumPy:
    // −2.9e-3 at N=1, −1.9e-4 at N=3, −1.8e-5 at N=7.
    for order in 1..=7 {
        let miss = (max_re_root_approx(order) - max_re_root(order)).abs();
        let bound = match order {
            1 => 3e-3,
            2 => 7e-4,
            _ => 2e-4,
        };
        assert!(miss <= bound, "N={order}: miss {miss:e}");
    }
    assert!((max_re_root_approx(1) - 0.574431).abs() < 1e-6);
    assert!((max_re_root_approx(7) - 0.960272).abs() < 1e-6);
}

#[test]
fn max_re_weight_table() {
    // g_1..g_N, Zotter & Frank 2019 (from memory; digits computed with NumPy), 4 decimals.
    let table: [&[f64]; 7] = [
        &[0.5774],
        &[0.7746, 0.4000],
        &[0.8611, 0.6123, 0.3047],
        &[0.9062, 0.7317, 0.5010, 0.2457],
        &[0.9325, 0.8042, 0.6282, 0.4220, 0.2057],
        &[0.9491, 0.8512, 0.7137, 0.5471, 0.3636, 0.1768],
        &[0.9603, 0.8832, 0.7734, 0.6373, 0.4828, 0.3190, 0.1550],
    ];
    for (k, expected) in table.iter().enumerate() {
        let weights = beam_weights(BeamKind::MaxRe, k + 1);
        assert_eq!(weights.len(), k + 2);
        assert_eq!(weights[0], 1.0);
        for (g, e) in weights[1..].iter().zip(expected.iter()) {
            assert!((g - e).abs() <= 5.01e-5, "N={}: {g} vs {e}", k + 1);
        }
    }
}

#[test]
fn in_phase_weights() {
    // Daniel 2001 (from memory): N=1: 1/3; N=2: 0.5, 0.1.
    let w1 = beam_weights(BeamKind::InPhase, 1);
    assert!((w1[1] - 1.0 / 3.0).abs() < 1e-15);
    let w2 = beam_weights(BeamKind::InPhase, 2);
    assert!((w2[1] - 0.5).abs() < 1e-15 && (w2[2] - 0.1).abs() < 1e-15);
    // Closed form N!(N+1)!/((N+n+1)!(N−n)!) at N=7, n=7: 7!·8!/15! (arithmetic).
    let w7 = beam_weights(BeamKind::InPhase, 7);
    let expected = 5040.0 * 40320.0 / 1_307_674_368_000.0;
    assert!((w7[7] - expected).abs() < 1e-15 * expected.max(1.0));
    // High orders stay finite (no factorial overflow).
    let w40 = beam_weights(BeamKind::InPhase, 40);
    assert!(w40.iter().all(|g| g.is_finite() && *g > 0.0));
    assert!(beam_weights(BeamKind::Basic, 3).iter().all(|&g| g == 1.0));
}

/// DI = 4π·p(d₀)/∫p dΩ of the beam's power map for a plane wave at d₀, integrated with the
/// pixel solid angles of an equirectangular grid (1° grid: quadrature error about 1e-4 dB).
fn directivity_by_quadrature(plan: &mut PowerMapPlan, weights: &[f64]) -> f64 {
    let grid = plan.grid();
    let order = plan.order();
    let look = Direction::new(23.0, 17.0);
    let y = sh_sn3d(order, look);
    let channels = channel_count(order);
    let q: Vec<f64> = (0..channels * channels)
        .map(|k| y[k / channels] * y[k % channels])
        .collect();
    let mut map = vec![0.0f32; grid.len()];
    plan.evaluate(&q, weights, &mut map).unwrap();
    let on_axis = plan.expanded_value_at(look);
    let integral: f64 = (0..grid.height())
        .map(|r| {
            let row = &map[r * grid.width()..(r + 1) * grid.width()];
            grid.solid_angle_sr(r) * row.iter().map(|&v| v as f64).sum::<f64>()
        })
        .sum();
    10.0 * (4.0 * std::f64::consts::PI * on_axis / integral).log10()
}

#[test]
fn directivity_indices() {
    // Basic: 10·log10((N+1)²) (Rafaely 2015, from memory); in-phase 4.77, 6.99, 8.45, 9.54 dB
    // and max-rE column of the Zotter & Frank weight table (values computed with NumPy).
    let max_re_di = [5.72, 8.96, 11.27, 13.08, 14.57, 15.83, 16.93];
    let in_phase_di = [4.77, 6.99, 8.45, 9.54];
    let grid = EquirectGrid::with_step_deg(1.0).unwrap();
    for order in 1..=7usize {
        let mut plan = PowerMapPlan::new(order, grid).unwrap();
        let basic_expected = 20.0 * ((order + 1) as f64).log10();
        let cases = [
            (BeamKind::Basic, Some(basic_expected), 1e-9),
            (BeamKind::MaxRe, Some(max_re_di[order - 1]), 0.0051),
            (
                BeamKind::InPhase,
                in_phase_di.get(order - 1).copied(),
                0.0051,
            ),
        ];
        for (kind, expected, tolerance) in cases {
            let Some(expected) = expected else { continue };
            let weights = beam_weights(kind, order);
            let analytic = directivity_index_db(&weights);
            assert!(
                (analytic - expected).abs() <= tolerance,
                "{kind:?} N={order}: analytic {analytic} vs {expected}"
            );
            let quadrature = directivity_by_quadrature(&mut plan, &weights);
            assert!(
                (quadrature - expected).abs() <= tolerance + 1e-3,
                "{kind:?} N={order}: quadrature {quadrature} vs {expected}"
            );
        }
    }
}
