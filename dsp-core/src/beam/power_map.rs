//! Fast steered-beam power maps on the equirectangular grid through real Gaunt coefficients.
//!
//! For a fixed beam the map p(d) = v(d)ᵀ Q v(d), v = diag(w_{n(acn)})·y(d), is a spherical
//! function of order 2N: p = Σ_q c_q Y_q with c_q = Σ_ij Q'_ij·C_ijq, Q' = W Q W and C the
//! Gaunt coupling in the SN3D output basis. The plan precomputes the sparse coupling, a
//! Legendre table per grid row and a trigonometric table per column; evaluating a map is then
//! a short sparse sum, a dot product per (row, degree) and an axpy per (row, degree) over the
//! columns — O(N⁴ + H·N² + H·W·N) instead of O(H·W·N⁴) for direct steering.

use super::gaunt::GauntTable;
use super::weights::sn3d_steering_gains;
use crate::sh::{MAX_SH_ORDER, ShEvaluator, channel_count, order_degree, sn3d_legendre};
use crate::sphere::Direction;
use crate::sphere::grid::{EquirectGrid, SphereGrid};
use std::f64::consts::PI;
use std::fmt;

/// Highest beam order a [`PowerMapPlan`] supports (its map has order 2N ≤ [`MAX_SH_ORDER`]).
pub const MAX_MAP_ORDER: usize = MAX_SH_ORDER / 2;

/// Bad arguments to a power-map computation (no allocation: sizes are carried as numbers).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PowerMapError {
    /// The beam order is above [`MAX_MAP_ORDER`].
    OrderTooHigh { order: usize, max: usize },
    /// Q must hold (N+1)² × (N+1)² values.
    CovarianceLength { expected: usize, got: usize },
    /// Beam weights must hold N+1 values (one per order n = 0..=N).
    WeightsLength { expected: usize, got: usize },
    /// Beam weights sum to zero (Σ(2n+1)g_n = 0) or are not finite.
    WeightsUnusable,
    /// The output must hold one value per grid pixel (or point).
    OutputLength { expected: usize, got: usize },
}

impl fmt::Display for PowerMapError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            PowerMapError::OrderTooHigh { order, max } => {
                write!(
                    f,
                    "power map of order {order}: the highest supported is {max}"
                )
            }
            PowerMapError::CovarianceLength { expected, got } => write!(
                f,
                "covariance has {got} values, expected {expected} (a square matrix of (N+1)² rows)"
            ),
            PowerMapError::WeightsLength { expected, got } => {
                write!(
                    f,
                    "beam weights have {got} values, expected {expected} (N+1)"
                )
            }
            PowerMapError::WeightsUnusable => {
                write!(
                    f,
                    "beam weights are not finite or give zero on-axis response"
                )
            }
            PowerMapError::OutputLength { expected, got } => {
                write!(f, "map output has {got} values, expected {expected}")
            }
        }
    }
}

impl std::error::Error for PowerMapError {}

/// Checks the argument sizes shared by both map paths.
pub(crate) fn check_arguments(
    order: usize,
    q: &[f64],
    weights: &[f64],
    out_len: usize,
    expected_out: usize,
) -> Result<(), PowerMapError> {
    let channels = channel_count(order);
    if q.len() != channels * channels {
        return Err(PowerMapError::CovarianceLength {
            expected: channels * channels,
            got: q.len(),
        });
    }
    if weights.len() != order + 1 {
        return Err(PowerMapError::WeightsLength {
            expected: order + 1,
            got: weights.len(),
        });
    }
    if out_len != expected_out {
        return Err(PowerMapError::OutputLength {
            expected: expected_out,
            got: out_len,
        });
    }
    Ok(())
}

/// One sparse coupling term: coeffs[slot] += pair_values[pair] · value.
#[derive(Clone, Copy, Debug)]
struct Coupling {
    pair: u32,
    slot: u32,
    value: f64,
}

/// Precomputed tables and scratch for fast power maps of one order on one grid.
///
/// Build it off the real-time path (it allocates); [`evaluate`](Self::evaluate) never
/// allocates.
#[derive(Clone, Debug)]
pub struct PowerMapPlan {
    order: usize,
    grid: EquirectGrid,
    /// (i, j) with i ≤ j for each pair index.
    pairs: Vec<(u32, u32)>,
    couplings: Vec<Coupling>,
    /// Output coefficients are held "degree-major": slot s of degree m (s = 0 for m = 0,
    /// 2m−1 for cos(m·φ), 2m for sin(m·φ)) covers orders n = m..=2N at `slot_ranges[s]`.
    slot_ranges: Vec<(usize, usize)>,
    /// ACN (order 2N) of each degree-major coefficient.
    acn_of_coefficient: Vec<usize>,
    /// [row][coefficient]: SN3D P_n^|m|(sin el_row) in degree-major order.
    row_legendre: Vec<f64>,
    /// [slot][col]: 1, cos(m·az_col), sin(m·az_col).
    column_trig: Vec<f64>,
    // Scratch, sized at construction.
    gains_by_order: Vec<f64>,
    gains_by_acn: Vec<f64>,
    pair_values: Vec<f64>,
    coefficients: Vec<f64>,
    row_amplitudes: Vec<f64>,
    row_accumulator: Vec<f64>,
    point_evaluator: ShEvaluator,
    point_sh: Vec<f64>,
}

impl PowerMapPlan {
    /// Plan for beam order `order` (1..=[`MAX_MAP_ORDER`]; 0 also works) on `grid`.
    pub fn new(order: usize, grid: EquirectGrid) -> Result<Self, PowerMapError> {
        if order > MAX_MAP_ORDER {
            return Err(PowerMapError::OrderTooHigh {
                order,
                max: MAX_MAP_ORDER,
            });
        }
        let map_order = 2 * order;
        let slots = 2 * map_order + 1;

        // Degree-major layout of the order-2N coefficients.
        let mut slot_ranges = Vec::with_capacity(slots);
        let mut acn_of_coefficient = Vec::with_capacity(channel_count(map_order));
        let mut coefficient_of_acn = vec![0usize; channel_count(map_order)];
        for slot in 0..slots {
            let m = slot.div_ceil(2) as i32;
            let signed_m = if slot == 0 || slot % 2 == 1 { m } else { -m };
            let start = acn_of_coefficient.len();
            for n in m as usize..=map_order {
                let a = crate::sh::acn(n, signed_m);
                coefficient_of_acn[a] = acn_of_coefficient.len();
                acn_of_coefficient.push(a);
            }
            slot_ranges.push((start, acn_of_coefficient.len()));
        }

        // Sparse coupling in the SN3D output basis: Y_i Y_j = Σ_q (2n_q+1)/(4π)·G_ijq·Y_q.
        let table = GauntTable::new(order).ok_or(PowerMapError::OrderTooHigh {
            order,
            max: MAX_MAP_ORDER,
        })?;
        let mut pairs: Vec<(u32, u32)> = Vec::new();
        let mut couplings = Vec::with_capacity(table.entries().len());
        for entry in table.entries() {
            let key = (entry.i as u32, entry.j as u32);
            if pairs.last() != Some(&key) {
                pairs.push(key);
            }
            let nq = order_degree(entry.q).0;
            let symmetry = if entry.i == entry.j { 1.0 } else { 2.0 };
            couplings.push(Coupling {
                pair: (pairs.len() - 1) as u32,
                slot: coefficient_of_acn[entry.q] as u32,
                value: symmetry * (2 * nq + 1) as f64 / (4.0 * PI) * entry.integral_sn3d,
            });
        }

        // Legendre table per row, degree-major.
        let coefficient_count = acn_of_coefficient.len();
        let tri_len = (map_order + 1) * (map_order + 2) / 2;
        let mut tri_scratch = vec![0.0; tri_len];
        let mut row_legendre = vec![0.0; grid.height() * coefficient_count];
        for (row, values) in row_legendre.chunks_exact_mut(coefficient_count).enumerate() {
            let x = grid.elevation_deg(row as f64).to_radians().sin();
            sn3d_legendre(map_order, x, &mut tri_scratch);
            for (value, &a) in values.iter_mut().zip(&acn_of_coefficient) {
                let (n, m) = order_degree(a);
                *value = tri_scratch[n * (n + 1) / 2 + m.unsigned_abs() as usize];
            }
        }

        // Trigonometric table per degree slot.
        let width = grid.width();
        let mut column_trig = vec![0.0; slots * width];
        for (slot, values) in column_trig.chunks_exact_mut(width).enumerate() {
            let m = slot.div_ceil(2) as f64;
            for (col, value) in values.iter_mut().enumerate() {
                let azimuth = grid.azimuth_deg(col as f64).to_radians();
                *value = if slot == 0 {
                    1.0
                } else if slot % 2 == 1 {
                    (m * azimuth).cos()
                } else {
                    (m * azimuth).sin()
                };
            }
        }

        Ok(Self {
            order,
            grid,
            pair_values: vec![0.0; pairs.len()],
            pairs,
            couplings,
            slot_ranges,
            coefficients: vec![0.0; coefficient_count],
            acn_of_coefficient,
            row_legendre,
            column_trig,
            gains_by_order: vec![0.0; order + 1],
            gains_by_acn: vec![0.0; channel_count(order)],
            row_amplitudes: vec![0.0; slots],
            row_accumulator: vec![0.0; width],
            point_evaluator: ShEvaluator::new(map_order),
            point_sh: vec![0.0; channel_count(map_order)],
        })
    }

    /// Beam order N.
    pub fn order(&self) -> usize {
        self.order
    }

    /// The grid the plan evaluates on.
    pub fn grid(&self) -> EquirectGrid {
        self.grid
    }

    /// Number of stored non-zero Gaunt couplings.
    pub fn coupling_count(&self) -> usize {
        self.couplings.len()
    }

    /// Power map of `q` on the plan's grid, written row-major to `out` (width × height, see
    /// [`EquirectGrid`]); never allocates.
    ///
    /// - `q`: symmetric (N+1)² × (N+1)² covariance of ACN/SN3D signals, row-major, indexed by
    ///   [acn][acn]. Only (Q + Qᵀ)/2 is used.
    /// - `weights`: per-order beam weights g_n, indexed by [order n] (see
    ///   [`beam_weights`](super::beam_weights)). The steering gains are
    ///   w_n = (2n+1)·g_n / Σ(2k+1)g_k (see [`sn3d_steering_gains`](super::sn3d_steering_gains)),
    ///   so a unit-power plane wave maps to 1 in its own direction.
    ///
    /// The value at a pixel is the beam output power, in the units of Q.
    pub fn evaluate(
        &mut self,
        q: &[f64],
        weights: &[f64],
        out: &mut [f32],
    ) -> Result<(), PowerMapError> {
        check_arguments(self.order, q, weights, out.len(), self.grid.len())?;
        self.expand(q, weights)?;
        let width = self.grid.width();
        let coefficient_count = self.coefficients.len();
        for (out_row, legendre) in out
            .chunks_exact_mut(width)
            .zip(self.row_legendre.chunks_exact(coefficient_count))
        {
            // A_s = Σ_n c_{n,s} P_n^|m|(x_row) per degree slot.
            for (amplitude, &(start, end)) in self.row_amplitudes.iter_mut().zip(&self.slot_ranges)
            {
                *amplitude = self.coefficients[start..end]
                    .iter()
                    .zip(&legendre[start..end])
                    .map(|(c, p)| c * p)
                    .sum();
            }
            synthesize_row(
                &self.row_amplitudes,
                &self.column_trig,
                &mut self.row_accumulator,
                out_row,
            );
        }
        Ok(())
    }

    /// Power map of `q` at arbitrary points (e.g. a [`SphereGrid`]), one value per point in
    /// `out`; arguments as for [`evaluate`](Self::evaluate). Never allocates.
    pub fn evaluate_on_points(
        &mut self,
        q: &[f64],
        weights: &[f64],
        points: &SphereGrid,
        out: &mut [f32],
    ) -> Result<(), PowerMapError> {
        check_arguments(self.order, q, weights, out.len(), points.len())?;
        self.expand(q, weights)?;
        for (o, &direction) in out.iter_mut().zip(points.points()) {
            *o = self.expanded_value_at(direction) as f32;
        }
        Ok(())
    }

    /// Value at `direction` of the map last expanded by [`evaluate`](Self::evaluate) or
    /// [`evaluate_on_points`](Self::evaluate_on_points) (0 before the first call); useful to
    /// read a refined peak level off the continuous map. Never allocates.
    pub fn expanded_value_at(&mut self, direction: Direction) -> f64 {
        self.point_evaluator.eval(direction, &mut self.point_sh);
        self.coefficients
            .iter()
            .zip(&self.acn_of_coefficient)
            .map(|(c, &a)| c * self.point_sh[a])
            .sum()
    }

    /// Computes the order-2N expansion coefficients c (degree-major) of the map.
    fn expand(&mut self, q: &[f64], weights: &[f64]) -> Result<(), PowerMapError> {
        if !sn3d_steering_gains(weights, &mut self.gains_by_order) {
            return Err(PowerMapError::WeightsUnusable);
        }
        for (a, gain) in self.gains_by_acn.iter_mut().enumerate() {
            *gain = self.gains_by_order[order_degree(a).0];
        }
        let channels = self.gains_by_acn.len();
        let gains = &self.gains_by_acn;
        for (value, &(i, j)) in self.pair_values.iter_mut().zip(&self.pairs) {
            let (i, j) = (i as usize, j as usize);
            *value = 0.5 * gains[i] * gains[j] * (q[i * channels + j] + q[j * channels + i]);
        }
        self.coefficients.fill(0.0);
        for coupling in &self.couplings {
            self.coefficients[coupling.slot as usize] +=
                self.pair_values[coupling.pair as usize] * coupling.value;
        }
        Ok(())
    }
}

/// One map row from its per-slot amplitudes: p(col) = Σ_s A_s·trig_s(col).
///
/// Columns half a turn apart (col and col + W/2 when the width W is even) share their
/// trigonometric values up to the sign (−1)^m, so the slots are summed in two halves, even and
/// odd m, over the first half of the row only: p(col) = E + O and p(col + W/2) = E − O. That
/// halves the work. AVX is used where the CPU has it (same operations, same results).
fn synthesize_row(amplitudes: &[f64], column_trig: &[f64], scratch: &mut [f64], out: &mut [f32]) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx") {
            // SAFETY: the CPU supports AVX (checked just above).
            return unsafe { synthesize_row_avx(amplitudes, column_trig, scratch, out) };
        }
    }
    synthesize_row_portable(amplitudes, column_trig, scratch, out)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
unsafe fn synthesize_row_avx(
    amplitudes: &[f64],
    column_trig: &[f64],
    scratch: &mut [f64],
    out: &mut [f32],
) {
    synthesize_row_portable(amplitudes, column_trig, scratch, out)
}

#[inline(always)]
fn synthesize_row_portable(
    amplitudes: &[f64],
    column_trig: &[f64],
    scratch: &mut [f64],
    out: &mut [f32],
) {
    let width = out.len();
    // Slot s carries m = ⌈s/2⌉ (cos for odd s, sin for even s > 0).
    let m_of_slot = |slot: usize| slot.div_ceil(2);
    if width.is_multiple_of(2) && width > 0 {
        let half = width / 2;
        let (even, odd) = scratch[..width].split_at_mut(half);
        even.fill(amplitudes[0]);
        odd.fill(0.0);
        for (slot, (&amplitude, trig)) in amplitudes
            .iter()
            .zip(column_trig.chunks_exact(width))
            .enumerate()
            .skip(1)
        {
            let target = if m_of_slot(slot) % 2 == 0 {
                &mut *even
            } else {
                &mut *odd
            };
            for (acc, &t) in target.iter_mut().zip(&trig[..half]) {
                *acc += amplitude * t;
            }
        }
        let (front, back) = out.split_at_mut(half);
        for (((f, b), &e), &o) in front.iter_mut().zip(back).zip(&*even).zip(&*odd) {
            *f = (e + o) as f32;
            *b = (e - o) as f32;
        }
    } else {
        let accumulator = &mut scratch[..width];
        accumulator.fill(amplitudes[0]);
        for (&amplitude, trig) in amplitudes[1..]
            .iter()
            .zip(column_trig[width..].chunks_exact(width))
        {
            for (acc, &t) in accumulator.iter_mut().zip(trig) {
                *acc += amplitude * t;
            }
        }
        for (o, &acc) in out.iter_mut().zip(accumulator.iter()) {
            *o = acc as f32;
        }
    }
}
