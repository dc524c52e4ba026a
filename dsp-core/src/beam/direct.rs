//! Direct steering: the slow, obviously correct power map that the fast path is tested
//! against.

use super::power_map::{PowerMapError, check_arguments};
use super::weights::sn3d_steering_gains;
use crate::sh::{ShEvaluator, channel_count, order_degree};
use crate::sphere::grid::EquirectGrid;

/// Power map by direct steering: for every pixel, v = diag(w_{n(acn)})·y(d) and
/// p = vᵀ Q v, written row-major to `out` (width × height). O(pixels × (N+1)⁴).
///
/// Arguments and units as for [`PowerMapPlan::evaluate`](super::PowerMapPlan::evaluate):
/// `q` is the (N+1)² × (N+1)² ACN/SN3D covariance, row-major; `weights` are g_n indexed by
/// [order n]; w_n = (2n+1)·g_n / Σ(2k+1)g_k. Allocates its scratch (reference use only).
pub fn direct_power_map(
    order: usize,
    grid: &EquirectGrid,
    q: &[f64],
    weights: &[f64],
    out: &mut [f32],
) -> Result<(), PowerMapError> {
    check_arguments(order, q, weights, out.len(), grid.len())?;
    if order > super::MAX_MAP_ORDER {
        return Err(PowerMapError::OrderTooHigh {
            order,
            max: super::MAX_MAP_ORDER,
        });
    }
    let channels = channel_count(order);
    let mut gains = vec![0.0; order + 1];
    if !sn3d_steering_gains(weights, &mut gains) {
        return Err(PowerMapError::WeightsUnusable);
    }
    let mut evaluator = ShEvaluator::new(order);
    let mut steering = vec![0.0; channels];
    for row in 0..grid.height() {
        for col in 0..grid.width() {
            evaluator.eval(grid.direction(row, col), &mut steering);
            for (a, s) in steering.iter_mut().enumerate() {
                *s *= gains[order_degree(a).0];
            }
            let mut power = 0.0;
            for i in 0..channels {
                let q_row = &q[i * channels..(i + 1) * channels];
                let projected: f64 = q_row.iter().zip(&steering).map(|(a, b)| a * b).sum();
                power += steering[i] * projected;
            }
            out[row * grid.width() + col] = power as f32;
        }
    }
    Ok(())
}
