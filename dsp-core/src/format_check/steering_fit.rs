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
    #[cfg(test)]
    pub(crate) fn fit(&mut self, vector: &[f64], order: usize) -> (f64, [f64; 3]) {
        self.fit_subspace(&SubspaceQuery {
            basis: vector,
            rank: 1,
            order,
            present: None,
            avoid: &[],
            avoid_cos: 1.0,
        })
    }

    /// Largest share of a plane-wave steering vector that lies in a subspace: max over d of
    /// Σ_k (u_kᵀŷ(d))² with ŷ(d) the unit-norm N3D steering vector restricted to the present
    /// components, and the unit vector of that d. Directions within the cone
    /// `query.avoid_cos` of any direction in `query.avoid` are skipped, so that repeated calls
    /// find distinct plane waves. Returns (0, front) if every grid point is avoided.
    pub(crate) fn fit_subspace(&mut self, query: &SubspaceQuery) -> (f64, [f64; 3]) {
        let channels = channel_count(query.order);
        let full_channels = channel_count(self.order);
        let mut best_point = None;
        let mut best = -1.0;
        for steering in self.grid_n3d.chunks_exact(full_channels) {
            let unit = self.unit_of(steering);
            if is_avoided(unit, query) {
                continue;
            }
            let value = subspace_share(&steering[..channels], query);
            if value > best {
                best = value;
                best_point = Some(unit);
            }
        }
        let Some(mut at) = best_point else {
            return (0.0, [1.0, 0.0, 0.0]);
        };
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
                if is_avoided(candidate, query) {
                    continue;
                }
                let value = self.fit_at(query, candidate);
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

    /// Unit vector of a grid point from its N3D W/Y/Z/X values.
    fn unit_of(&self, steering: &[f64]) -> [f64; 3] {
        if self.order >= 1 {
            let g1 = self.n3d_gains[1];
            normalised([steering[3] / g1, steering[1] / g1, steering[2] / g1])
        } else {
            [1.0, 0.0, 0.0]
        }
    }

    fn fit_at(&mut self, query: &SubspaceQuery, unit: [f64; 3]) -> f64 {
        let channels = channel_count(query.order);
        let azimuth_rad = unit[1].atan2(unit[0]);
        let elevation_rad = unit[2].clamp(-1.0, 1.0).asin();
        self.evaluator
            .eval_rad(azimuth_rad, elevation_rad, &mut self.sh_values);
        for (y, g) in self.sh_values[..channels].iter_mut().zip(&self.n3d_gains) {
            *y *= g;
        }
        subspace_share(&self.sh_values[..channels], query)
    }
}

/// What [`SteeringFitSearch::fit_subspace`] looks for.
pub(crate) struct SubspaceQuery<'a> {
    /// `rank` orthonormal vectors of (order+1)² N3D values each, one after the other; zero
    /// in components that are not present.
    pub basis: &'a [f64],
    pub rank: usize,
    pub order: usize,
    /// Components that exist, indexed by \[acn\]; None = all.
    pub present: Option<&'a [bool]>,
    /// Unit vectors of directions already found.
    pub avoid: &'a [[f64; 3]],
    /// Cosine of the half-angle of the cone around each avoided direction.
    pub avoid_cos: f64,
}

fn is_avoided(unit: [f64; 3], query: &SubspaceQuery) -> bool {
    query
        .avoid
        .iter()
        .any(|a| a[0] * unit[0] + a[1] * unit[1] + a[2] * unit[2] > query.avoid_cos)
}

/// Σ_k (u_kᵀ s)² / ‖s‖² over the present components of the N3D steering vector `steering`.
fn subspace_share(steering: &[f64], query: &SubspaceQuery) -> f64 {
    let channels = steering.len();
    let norm_sq: f64 = match query.present {
        // ‖D·y(d)‖² over orders 0..=order is Σ(2n+1) = (order+1)² (addition theorem).
        None => channels as f64,
        Some(present) => steering
            .iter()
            .zip(present)
            .filter(|&(_, &p)| p)
            .map(|(s, _)| s * s)
            .sum(),
    };
    if norm_sq <= 0.0 {
        return 0.0;
    }
    let mut share = 0.0;
    for k in 0..query.rank {
        let vector = &query.basis[k * channels..(k + 1) * channels];
        let dot: f64 = steering.iter().zip(vector).map(|(a, b)| a * b).sum();
        share += dot * dot;
    }
    share / norm_sq
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
