//! Map computation for one update: covariance → method-specific Q → fast power map → dB image
//! and sources. Owns its plan and scratch; rebuilt only when the order or grid changes.

use super::snapshot::{MapImage, MapMethod, MapScale, SourceReading};
use crate::beam::{BeamKind, PowerMapPlan, beam_weights, sn3d_steering_gains};
use crate::peaks::PeakFinder;
use crate::sh::{channel_count, order_degree};
use crate::sphere::grid::EquirectGrid;
use nalgebra::{DMatrix, SymmetricEigen};

/// Diagonal loading of MVDR, as a fraction of the mean eigenvalue (tr R / M) of the N3D
/// covariance. 1e-2 lies inside the commonly used 1e-3…1e-1 range (Carlson 1988) and keeps the
/// map stable for short time constants.
pub const MVDR_LOADING: f64 = 1e-2;

/// MUSIC signal-subspace size: eigenvalues of the N3D covariance (diffuse noise → R ∝ I) more
/// than this factor above the median eigenvalue count as signal; at least 1, at most M−1.
pub const MUSIC_SIGNAL_FACTOR: f64 = 10.0;

/// Floor for map values in dB, so that empty or negative (round-off) pixels stay finite.
pub const MAP_FLOOR_DB: f32 = -150.0;

pub struct MapMaker {
    grid: EquirectGrid,
    plan: PowerMapPlan,
    peaks: PeakFinder,
    weights: [Vec<f64>; 3],
    /// Steering gains of the plan for unit weights, per acn (to undo them for MVDR/MUSIC).
    unit_gain_per_acn: Vec<f64>,
    /// sqrt(2n+1) per acn: SN3D → N3D.
    n3d_per_acn: Vec<f64>,
    q: Vec<f64>,
    linear: Vec<f32>,
    ones: Vec<f64>,
}

impl MapMaker {
    pub fn new(order: usize, grid: EquirectGrid, max_sources: usize) -> Result<Self, String> {
        let plan = PowerMapPlan::new(order, grid).map_err(|e| e.to_string())?;
        let m = channel_count(order);
        let ones = vec![1.0; order + 1];
        let mut unit_gains = vec![0.0; order + 1];
        sn3d_steering_gains(&ones, &mut unit_gains);
        Ok(Self {
            grid,
            plan,
            peaks: PeakFinder::new(grid, max_sources.max(1)),
            weights: [
                beam_weights(BeamKind::Basic, order),
                beam_weights(BeamKind::MaxRe, order),
                beam_weights(BeamKind::InPhase, order),
            ],
            unit_gain_per_acn: (0..m).map(|a| unit_gains[order_degree(a).0]).collect(),
            n3d_per_acn: (0..m)
                .map(|a| ((2 * order_degree(a).0 + 1) as f64).sqrt())
                .collect(),
            q: vec![0.0; m * m],
            linear: vec![0.0; grid.len()],
            ones,
        })
    }

    /// Computes the map of `r_sn3d` (M×M, ACN/SN3D, row-major) into `image` and its sources.
    /// Allocation happens only on the first call for a given grid size (the image buffer).
    #[allow(clippy::too_many_arguments)]
    pub fn make(
        &mut self,
        r_sn3d: &[f64],
        method: MapMethod,
        scale: MapScale,
        min_separation_deg: f64,
        floor_db: f64,
        image: &mut MapImage,
        sources: &mut Vec<SourceReading>,
    ) {
        let reciprocal = match method {
            MapMethod::Basic | MapMethod::MaxRe | MapMethod::InPhase => {
                let w = &self.weights[match method {
                    MapMethod::Basic => 0,
                    MapMethod::MaxRe => 1,
                    _ => 2,
                }];
                let ok = self.plan.evaluate(r_sn3d, w, &mut self.linear).is_ok();
                if !ok {
                    self.linear.fill(0.0);
                }
                false
            }
            MapMethod::Mvdr => {
                self.mvdr_q(r_sn3d);
                let _ = self.plan.evaluate(&self.q, &self.ones, &mut self.linear);
                true
            }
            MapMethod::Music => {
                self.music_q(r_sn3d);
                let _ = self.plan.evaluate(&self.q, &self.ones, &mut self.linear);
                true
            }
        };
        if reciprocal {
            for v in &mut self.linear {
                *v = if *v > 0.0 && v.is_finite() {
                    1.0 / *v
                } else {
                    0.0
                };
            }
        }
        // Plans produce finite values from finite input; clear anything else before reducing.
        for v in &mut self.linear {
            if !v.is_finite() {
                *v = 0.0;
            }
        }
        let max = crate::meters::abs_max(&self.linear);
        let relative = matches!(scale, MapScale::RelativeDb) || matches!(method, MapMethod::Music);
        let reference = if relative {
            max.max(f32::MIN_POSITIVE)
        } else {
            1.0
        };
        image.width = self.grid.width();
        image.height = self.grid.height();
        image.values_db.resize(self.grid.len(), MAP_FLOOR_DB);
        let inverse_reference = 1.0 / reference;
        // Negative values (round-off of the expansion) clamp to the floor like zeros.
        to_db(&self.linear, inverse_reference, &mut image.values_db);
        let max_db = if max > 0.0 {
            fast_db(max * inverse_reference).max(MAP_FLOOR_DB)
        } else {
            MAP_FLOOR_DB
        };
        image.max_db = max_db;
        image.scale = if relative {
            MapScale::RelativeDb
        } else {
            MapScale::AbsoluteDbfs
        };
        image.method = method;
        sources.clear();
        if max > 0.0 {
            for p in self.peaks.find(&self.linear, min_separation_deg, floor_db) {
                sources.push(SourceReading {
                    direction: p.direction,
                    level_db: p.level_db,
                });
            }
        }
    }

    /// Q for MVDR: yᵀQy = y_n3dᵀ (R_n3d + δI)⁻¹ y_n3d, pre-divided by the plan's unit steering
    /// gains so that the plan's steering reproduces the plain N3D steering vector.
    fn mvdr_q(&mut self, r_sn3d: &[f64]) {
        let m = self.n3d_per_acn.len();
        let mut r = self.n3d_matrix(r_sn3d);
        let trace: f64 = (0..m).map(|i| r[(i, i)]).sum();
        let loading = (MVDR_LOADING * trace / m as f64).max(1e-30);
        for i in 0..m {
            r[(i, i)] += loading;
        }
        let inverse = r
            .clone()
            .cholesky()
            .map(|c| c.inverse())
            .or_else(|| r.try_inverse());
        match inverse {
            Some(inv) => self.store_q_from_n3d(&inv),
            None => self.q.fill(0.0),
        }
    }

    /// Q for MUSIC: the noise-subspace projector in N3D.
    fn music_q(&mut self, r_sn3d: &[f64]) {
        let m = self.n3d_per_acn.len();
        let r = self.n3d_matrix(r_sn3d);
        let eigen = SymmetricEigen::new(r);
        let mut order: Vec<usize> = (0..m).collect();
        order.sort_by(|&a, &b| eigen.eigenvalues[b].total_cmp(&eigen.eigenvalues[a]));
        let mut sorted: Vec<f64> = order
            .iter()
            .map(|&i| eigen.eigenvalues[i].max(0.0))
            .collect();
        let signal = signal_subspace_size(&mut sorted);
        let mut projector = DMatrix::<f64>::zeros(m, m);
        for &k in &order[signal..] {
            let u = eigen.eigenvectors.column(k);
            projector += u * u.transpose();
        }
        self.store_q_from_n3d(&projector);
    }

    fn n3d_matrix(&self, r_sn3d: &[f64]) -> DMatrix<f64> {
        let m = self.n3d_per_acn.len();
        DMatrix::from_fn(m, m, |i, j| {
            let v = 0.5 * (r_sn3d[i * m + j] + r_sn3d[j * m + i]);
            if v.is_finite() {
                v * self.n3d_per_acn[i] * self.n3d_per_acn[j]
            } else {
                0.0
            }
        })
    }

    fn store_q_from_n3d(&mut self, q_n3d: &DMatrix<f64>) {
        let m = self.n3d_per_acn.len();
        for i in 0..m {
            for j in 0..m {
                let d = self.n3d_per_acn[i] * self.n3d_per_acn[j];
                let g = self.unit_gain_per_acn[i] * self.unit_gain_per_acn[j];
                self.q[i * m + j] = q_n3d[(i, j)] * d / g;
            }
        }
    }
}

/// out[i] = 10·log10(linear[i]·scale), floored at [`MAP_FLOOR_DB`]. AVX where the CPU has it
/// (the same operations, so the same results).
fn to_db(linear: &[f32], scale: f32, out: &mut [f32]) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx") {
            // SAFETY: the CPU supports AVX (checked just above).
            return unsafe { to_db_avx(linear, scale, out) };
        }
    }
    to_db_portable(linear, scale, out)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
unsafe fn to_db_avx(linear: &[f32], scale: f32, out: &mut [f32]) {
    to_db_portable(linear, scale, out)
}

#[inline(always)]
fn to_db_portable(linear: &[f32], scale: f32, out: &mut [f32]) {
    for (d, &v) in out.iter_mut().zip(linear) {
        *d = fast_db(v * scale).max(MAP_FLOOR_DB);
    }
}

/// 10·log10(x) for normal x > 0, within 1e-4 dB: log2 from the float's exponent plus a short
/// atanh series on the mantissa. About 5× cheaper than `log10`, and a map has ~65 000 pixels.
#[inline(always)]
fn fast_db(x: f32) -> f32 {
    // Below the smallest normal float the formula would misread the exponent.
    let x = x.max(f32::MIN_POSITIVE);
    let bits = x.to_bits();
    let exponent = ((bits >> 23) & 0xff) as i32 - 127;
    let mantissa = f32::from_bits((bits & 0x007f_ffff) | 0x3f80_0000);
    let t = (mantissa - 1.0) / (mantissa + 1.0);
    let t2 = t * t;
    let ln_mantissa =
        2.0 * t * (1.0 + t2 * (1.0 / 3.0 + t2 * (1.0 / 5.0 + t2 * (1.0 / 7.0 + t2 / 9.0))));
    10.0 * std::f32::consts::LOG10_2 * (exponent as f32 + ln_mantissa * std::f32::consts::LOG2_E)
}

/// Number of eigenvalues (sorted descending, modified in place) that stand more than
/// [`MUSIC_SIGNAL_FACTOR`] above the median; between 1 and M−1.
pub fn signal_subspace_size(sorted_desc: &mut [f64]) -> usize {
    let m = sorted_desc.len();
    if m < 2 {
        return 0;
    }
    let median = sorted_desc[m / 2];
    let count = sorted_desc
        .iter()
        .filter(|&&l| l > MUSIC_SIGNAL_FACTOR * median)
        .count();
    count.clamp(1, m - 1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_db_matches_log10() {
        let mut x = 1e-30f32;
        while x < 1e30 {
            let exact = 10.0 * (x as f64).log10();
            assert!(
                (fast_db(x) as f64 - exact).abs() < 1e-4,
                "{x}: {} vs {exact}",
                fast_db(x)
            );
            x *= 1.37;
        }
        assert!(fast_db(0.0) < MAP_FLOOR_DB && fast_db(-1.0) < MAP_FLOOR_DB);
    }

    #[test]
    fn music_subspace_counts_eigenvalues_above_the_median() {
        let mut l = vec![100.0, 50.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0];
        assert_eq!(signal_subspace_size(&mut l), 2);
        let mut flat = vec![1.0; 9];
        assert_eq!(signal_subspace_size(&mut flat), 1);
    }
}
