//! How many dB below its top a map's colour scale should reach, per method and order.
//!
//! A steered-beam map of a single plane wave is the beam's own power pattern: a main lobe
//! round the source and side lobes elsewhere. Any colour spent below the highest side lobe
//! paints the beam, not the scene, and a range far below it makes the whole sphere look busy
//! (with 30 dB, an order-3 max-rE map is bright almost everywhere). So for the fixed beams the
//! default range is the depth of the highest side lobe of the power pattern, computed here
//! from the axisymmetric pattern f(θ) = Σ(2n+1)·g_n·P_n(cos θ) (see [`super::weights`]):
//! side lobes land at the bottom of the scale and sources stand out without markers.
//!
//! The methods without side lobes to measure get a stated choice instead:
//! - in-phase: its pattern ((1 + cos θ)/2)^N falls monotonically, with no side lobe; it uses
//!   the max-rE range of the same order, so switching between the two keeps the scale and
//!   shows the in-phase beam's wider main lobe as wider, not as brighter;
//! - MVDR and MUSIC: their levels come from the data (the covariance's eigenvalue spread and
//!   the diagonal loading), not from a fixed pattern, so no beam property sets a floor; they
//!   keep [`DATA_DEPENDENT_RANGE_DB`], wide enough to keep the skirts of MUSIC's narrow peaks.

use super::weights::{BeamKind, beam_weights, legendre_p};
use crate::engine::MapMethod;

/// Range for the data-dependent methods (MVDR, MUSIC), dB: a stated choice, see the module
/// docs. It is the span the editor used for every method before ranges were per method.
pub const DATA_DEPENDENT_RANGE_DB: f64 = 30.0;

/// Samples of θ over [0, π] when searching the pattern; the peak of a side lobe is found to
/// well under 0.01 dB (a side lobe is wider than π/(N+1), thousands of samples).
const PATTERN_SAMPLES: usize = 20_000;

/// Rises of the power pattern smaller than this (−120 dB) are rounding near a null, not a lobe.
const ROUNDING_POWER: f64 = 1e-12;

/// Power pattern (f(θ)/f(0))² of the beam with per-order weights g_n at angle `theta_rad`
/// from its look direction.
pub fn beam_power(weights: &[f64], theta_rad: f64) -> f64 {
    let x = theta_rad.cos();
    let (mut on_axis, mut value) = (0.0, 0.0);
    for (n, &g) in weights.iter().enumerate() {
        let k = (2 * n + 1) as f64 * g;
        on_axis += k;
        value += k * legendre_p(n, x);
    }
    if on_axis == 0.0 {
        return 0.0;
    }
    (value / on_axis).powi(2)
}

/// Level of the highest side lobe of the power pattern, dB relative to the main lobe's peak
/// (a negative number), or `None` when the pattern falls monotonically from its look
/// direction to the back (in-phase beams, order 0). The main lobe ends at the first local
/// minimum of the power pattern; the side lobe is the largest value beyond it.
pub fn highest_side_lobe_db(kind: BeamKind, order: usize) -> Option<f64> {
    let weights = beam_weights(kind, order);
    let power = |i: usize| {
        beam_power(
            &weights,
            std::f64::consts::PI * i as f64 / PATTERN_SAMPLES as f64,
        )
    };
    let mut previous = power(0);
    let mut main_lobe_end = None;
    for i in 1..=PATTERN_SAMPLES {
        let p = power(i);
        if p > previous + ROUNDING_POWER {
            main_lobe_end = Some(i);
            break;
        }
        previous = p;
    }
    let start = main_lobe_end?;
    let highest = (start..=PATTERN_SAMPLES).map(power).fold(0.0, f64::max);
    (highest > 0.0).then(|| 10.0 * highest.log10())
}

/// Default span of the map's colour scale below its top, dB, for `method` at `order`: the
/// depth of the beam's highest side lobe rounded up to a whole dB for Basic and max-rE, the
/// stated choices of the module docs for in-phase, MVDR and MUSIC. Callers clamp it to the
/// range their control offers.
pub fn default_map_range_db(method: MapMethod, order: usize) -> f64 {
    let side_lobe_depth = |kind| highest_side_lobe_db(kind, order).map(|db| (-db).ceil());
    match method {
        MapMethod::Basic => side_lobe_depth(BeamKind::Basic),
        MapMethod::MaxRe | MapMethod::InPhase => side_lobe_depth(BeamKind::MaxRe),
        MapMethod::Mvdr | MapMethod::Music => None,
    }
    .unwrap_or(DATA_DEPENDENT_RANGE_DB)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::beam::sn3d_steering_gains;
    use crate::sh::{ShEvaluator, channel_count, order_degree};
    use crate::sphere::Direction;

    /// Closed forms from the first two Legendre polynomials (P₀ = 1, P₁ = x, P₂ = (3x² − 1)/2,
    /// any handbook table, e.g. Abramowitz & Stegun table 8.1 / eq. 8.4.1): at first order
    /// the only side lobe is the back lobe at θ = π, f(π)/f(0) = (1 − 3g₁)/(1 + 3g₁).
    #[test]
    fn first_order_back_lobes_match_the_closed_form() {
        // Basic: g₁ = 1, f(π)/f(0) = −1/2 → 20·log10(1/2) = −6.02 dB.
        let basic = highest_side_lobe_db(BeamKind::Basic, 1).unwrap();
        assert!((basic - 20.0 * 0.5f64.log10()).abs() < 1e-6, "{basic}");
        // max-rE: g₁ = r_E = 1/√3 (the root of P₂) → (1 − √3)/(1 + √3), −11.44 dB.
        let s3 = 3f64.sqrt();
        let want = 20.0 * ((s3 - 1.0) / (s3 + 1.0)).log10();
        let max_re = highest_side_lobe_db(BeamKind::MaxRe, 1).unwrap();
        assert!((max_re - want).abs() < 1e-6, "{max_re} vs {want}");
        assert_eq!(default_map_range_db(MapMethod::Basic, 1), 7.0);
        assert_eq!(default_map_range_db(MapMethod::MaxRe, 1), 12.0);
    }

    #[test]
    fn in_phase_has_no_side_lobe_and_data_methods_keep_the_stated_range() {
        for order in 1..=7 {
            assert_eq!(highest_side_lobe_db(BeamKind::InPhase, order), None);
            assert_eq!(
                default_map_range_db(MapMethod::InPhase, order),
                default_map_range_db(MapMethod::MaxRe, order)
            );
            assert_eq!(default_map_range_db(MapMethod::Mvdr, order), 30.0);
            assert_eq!(default_map_range_db(MapMethod::Music, order), 30.0);
        }
    }

    /// Independent path: the beam steered at a tilted look direction, evaluated through the
    /// crate's real spherical harmonics (ShEvaluator and the SN3D steering gains) instead of
    /// the Legendre sum, along a great circle through the look direction; its highest value
    /// beyond the main lobe's first minimum must match.
    #[test]
    fn side_lobes_match_direct_steering_through_the_spherical_harmonics() {
        let look = Direction::new(40.0, 25.0);
        for kind in [BeamKind::Basic, BeamKind::MaxRe] {
            for order in 2..=7 {
                let weights = beam_weights(kind, order);
                let mut gains = vec![0.0; order + 1];
                assert!(sn3d_steering_gains(&weights, &mut gains));
                let channels = channel_count(order);
                let mut evaluator = ShEvaluator::new(order);
                let mut y_look = vec![0.0; channels];
                evaluator.eval(look, &mut y_look);
                let mut y = vec![0.0; channels];
                // Great circle through `look`, rising in elevation at its azimuth and going
                // over the pole: walk θ from the look direction away from it.
                let samples = 8000;
                let values: Vec<f64> = (0..=samples)
                    .map(|i| {
                        let theta = std::f64::consts::PI * i as f64 / samples as f64;
                        let el = 25f64.to_radians() + theta;
                        let [x, yv, z] = look_plane_point(40f64.to_radians(), el);
                        evaluator.eval(Direction::from_cartesian([x, yv, z]), &mut y);
                        let beam: f64 = (0..channels)
                            .map(|a| gains[order_degree(a).0] * y[a] * y_look[a])
                            .sum();
                        beam * beam
                    })
                    .collect();
                let first_min = (1..values.len())
                    .find(|&i| values[i] > values[i - 1])
                    .unwrap();
                let highest = values[first_min..].iter().cloned().fold(0.0, f64::max);
                let direct_db = 10.0 * highest.log10();
                let ours = highest_side_lobe_db(kind, order).unwrap();
                assert!(
                    (direct_db - ours).abs() < 0.02,
                    "{kind:?} order {order}: direct {direct_db:.3} dB, pattern {ours:.3} dB"
                );
            }
        }
    }

    /// Point on the vertical great circle at azimuth `az`, at "elevation" `el` measured along
    /// the circle (past 90° it continues over the pole to the other side).
    fn look_plane_point(az: f64, el: f64) -> [f64; 3] {
        [el.cos() * az.cos(), el.cos() * az.sin(), el.sin()]
    }

    #[test]
    fn max_re_side_lobes_are_lower_than_basic_ones() {
        for order in 1..=7 {
            let basic = highest_side_lobe_db(BeamKind::Basic, order).unwrap();
            let max_re = highest_side_lobe_db(BeamKind::MaxRe, order).unwrap();
            assert!(max_re < basic, "order {order}: {max_re} vs {basic}");
        }
    }
}
