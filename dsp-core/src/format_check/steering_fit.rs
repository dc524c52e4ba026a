//! How well a vector fits a plane-wave steering vector: max over directions d of
//! (vᵀŷ(d))² with ŷ the unit-norm N3D steering vector, by a near-uniform grid search followed
//! by a local pattern search on the sphere.

use crate::sh::{ShEvaluator, channel_count, n3d_gain, order_degree};
use crate::sphere::SphereGrid;

/// Grid points per channel of the full order; at order 7 (64 channels) this is 1024 points,
/// about 6.3° apart, well inside the ~23° main lobe of an order-7 beam.
const GRID_POINTS_PER_CHANNEL: usize = 16;
/// Smallest grid, so that low orders still start near the best direction.
const MIN_GRID_POINTS: usize = 256;
/// The pattern search stops when its step falls below this (radians, ~0.006°).
const FINAL_STEP_RAD: f64 = 1e-4;

/// Plane-wave fit search for one order. Owns all scratch; [`fit`](Self::fit) never allocates.
#[derive(Clone, Debug)]
pub(crate) struct SteeringFitSearch {
    order: usize,
    evaluator: ShEvaluator,
    /// N3D steering vectors D·y(d) of the full order, indexed by [grid point][acn].
    grid_n3d: Vec<f64>,
    grid_step_rad: f64,
    /// N3D gain sqrt(2n+1), indexed by \[acn\].
    n3d_gains: Vec<f64>,
    /// Scratch SH values, indexed by \[acn\].
    sh_values: Vec<f64>,
}

impl SteeringFitSearch {
    pub(crate) fn new(order: usize) -> Self {
        let channels = channel_count(order);
        let points = (GRID_POINTS_PER_CHANNEL * channels).max(MIN_GRID_POINTS);
        let grid = SphereGrid::fibonacci(points).expect("grid has points");
        let n3d_gains: Vec<f64> = (0..channels)
            .map(|acn| n3d_gain(order_degree(acn).0))
            .collect();
        let mut evaluator = ShEvaluator::new(order);
        let mut sh_values = vec![0.0; channels];
        let mut grid_n3d = Vec::with_capacity(points * channels);
        for &direction in grid.points() {
            evaluator.eval(direction, &mut sh_values);
            grid_n3d.extend(sh_values.iter().zip(&n3d_gains).map(|(y, g)| y * g));
        }
        Self {
            order,
            evaluator,
            grid_n3d,
            grid_step_rad: (4.0 * std::f64::consts::PI / points as f64).sqrt(),
            n3d_gains,
            sh_values,
        }
    }

    /// Fit of the unit vector `vector` (N3D coordinates, indexed by \[acn\], orders
    /// 0..=`order`, `order` ≤ the search's order) to the best plane-wave steering vector, in
    /// [0, 1], with the unit vector [x, y, z] of the best direction.
    pub(crate) fn fit(&mut self, vector: &[f64], order: usize) -> (f64, [f64; 3]) {
        let channels = channel_count(order);
        let full_channels = channel_count(self.order);
        // ‖D·y(d)‖² over orders 0..=order is Σ(2n+1) = (order+1)² (addition theorem).
        let norm_sq = channels as f64;
        let mut best_point = 0;
        let mut best_dot_sq = -1.0;
        for (point, steering) in self.grid_n3d.chunks_exact(full_channels).enumerate() {
            let dot: f64 = steering[..channels]
                .iter()
                .zip(&vector[..channels])
                .map(|(a, b)| a * b)
                .sum();
            if dot * dot > best_dot_sq {
                best_dot_sq = dot * dot;
                best_point = point;
            }
        }
        // Start of the local search: the grid point's unit vector from its W/Y/Z/X values.
        let steering = &self.grid_n3d[best_point * full_channels..];
        let mut at = if self.order >= 1 {
            let g1 = self.n3d_gains[1];
            normalised([steering[3] / g1, steering[1] / g1, steering[2] / g1])
        } else {
            [1.0, 0.0, 0.0]
        };
        let mut best = best_dot_sq / norm_sq;
        let mut step = self.grid_step_rad;
        while step > FINAL_STEP_RAD {
            let (e1, e2) = tangent_basis(at);
            let mut moved = false;
            for (a, b) in [(1.0, 0.0), (-1.0, 0.0), (0.0, 1.0), (0.0, -1.0)] {
                let candidate = normalised([
                    at[0] + step * (a * e1[0] + b * e2[0]),
                    at[1] + step * (a * e1[1] + b * e2[1]),
                    at[2] + step * (a * e1[2] + b * e2[2]),
                ]);
                let value = self.fit_at(vector, order, candidate);
                if value > best {
                    best = value;
                    at = candidate;
                    moved = true;
                }
            }
            if !moved {
                step *= 0.5;
            }
        }
        (best.clamp(0.0, 1.0), at)
    }

    fn fit_at(&mut self, vector: &[f64], order: usize, unit: [f64; 3]) -> f64 {
        let channels = channel_count(order);
        let azimuth_rad = unit[1].atan2(unit[0]);
        let elevation_rad = unit[2].clamp(-1.0, 1.0).asin();
        self.evaluator
            .eval_rad(azimuth_rad, elevation_rad, &mut self.sh_values);
        let dot: f64 = self.sh_values[..channels]
            .iter()
            .zip(&self.n3d_gains)
            .zip(&vector[..channels])
            .map(|((y, g), v)| y * g * v)
            .sum();
        dot * dot / channels as f64
    }
}

fn normalised(v: [f64; 3]) -> [f64; 3] {
    let norm = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    if norm > 0.0 {
        [v[0] / norm, v[1] / norm, v[2] / norm]
    } else {
        [1.0, 0.0, 0.0]
    }
}

/// Two unit vectors orthogonal to `unit` and to each other.
fn tangent_basis(unit: [f64; 3]) -> ([f64; 3], [f64; 3]) {
    // Cross with the axis least aligned with `unit`.
    let helper = if unit[2].abs() < 0.9 {
        [0.0, 0.0, 1.0]
    } else {
        [1.0, 0.0, 0.0]
    };
    let e1 = normalised(cross(unit, helper));
    (e1, cross(unit, e1))
}

fn cross(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sh::sh_sn3d;
    use crate::sphere::Direction;

    #[test]
    fn exact_steering_vector_fits_one_at_its_direction() {
        for order in [1, 3, 7] {
            let direction = Direction::new(37.3, -21.7);
            let sn3d = sh_sn3d(order, direction);
            let mut vector: Vec<f64> = sn3d
                .iter()
                .enumerate()
                .map(|(acn, y)| y * n3d_gain(order_degree(acn).0))
                .collect();
            let norm = vector.iter().map(|v| v * v).sum::<f64>().sqrt();
            vector.iter_mut().for_each(|v| *v /= -norm);
            let mut search = SteeringFitSearch::new(order);
            let (fit, unit) = search.fit(&vector, order);
            // The search stops at a 1e-4 rad step; at order 7 that leaves 1 − fit ≈ 1e-7.
            assert!((fit - 1.0).abs() < 1e-6, "order {order}: fit {fit}");
            let found = Direction::from_cartesian(unit);
            assert!(found.angle_to_deg(&direction) < 0.05, "{found:?}");
        }
    }
}
