//! Real Gaunt coefficients ∫ Y_i Y_j Y_q dΩ of ACN/SN3D real spherical harmonics.
//!
//! A product Y_i·Y_j of orders n_i, n_j is a spherical function of order n_i + n_j; its
//! expansion coefficients are these integrals (Politis 2024, arXiv:2407.06847). They are
//! computed here by exact product quadrature: with x = sin(elevation), dΩ = dx·dφ and the
//! integrand splits into a Legendre part in x (a polynomial of degree ≤ n_i+n_j+n_q whenever
//! the azimuth part is non-zero) and a trigonometric part in φ (frequencies ≤ |m_i|+|m_j|+|m_q|).
//! Gauss–Legendre in x and a uniform rule in φ with enough points integrate both exactly.

use super::weights::legendre_pair;
use crate::sh::{MAX_SH_ORDER, acn, channel_count, order_degree, sn3d_legendre};
use std::f64::consts::PI;

/// One non-zero coupling: `integral_sn3d` = ∫ Y_i Y_j Y_q dΩ (all three ACN/SN3D), i ≤ j.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GauntEntry {
    /// ACN of the first factor (order ≤ N).
    pub i: usize,
    /// ACN of the second factor (order ≤ N), j ≥ i.
    pub j: usize,
    /// ACN of the product term (order ≤ 2N).
    pub q: usize,
    /// ∫ Y_i Y_j Y_q dΩ over the unit sphere, SN3D functions, steradians.
    pub integral_sn3d: f64,
}

/// Sparse table of all non-zero real Gaunt integrals for two factors of order ≤ N.
#[derive(Clone, Debug)]
pub struct GauntTable {
    order: usize,
    entries: Vec<GauntEntry>,
}

/// Values below this (in steradians) are zeros of the selection rules up to rounding.
const ZERO_TOLERANCE: f64 = 1e-13;

impl GauntTable {
    /// Table for factor order `order` (product order 2·order ≤ [`MAX_SH_ORDER`]); `None` if
    /// the order is too high.
    pub fn new(order: usize) -> Option<Self> {
        let product_order = 2 * order;
        if product_order > MAX_SH_ORDER {
            return None;
        }
        // Integrand degree ≤ 4N in x and in φ: Gauss–Legendre with 2N+1 nodes is exact to
        // degree 4N+1; the uniform φ rule with 4N+2 points is exact to frequency 4N+1.
        let nodes = gauss_legendre(2 * order + 1);
        let tri_len = (product_order + 1) * (product_order + 2) / 2;
        let mut legendre = vec![0.0; nodes.len() * tri_len];
        for (k, &(x, _)) in nodes.iter().enumerate() {
            sn3d_legendre(
                product_order,
                x,
                &mut legendre[k * tri_len..(k + 1) * tri_len],
            );
        }
        let azimuth_points = 4 * order + 2;
        // trig_table[(m + 2N)·K + k] = cos(m·φ_k) for m ≥ 0, sin(|m|·φ_k) for m < 0.
        let max_degree = product_order as i32;
        let mut trig_table = Vec::with_capacity((2 * product_order + 1) * azimuth_points);
        for m in -max_degree..=max_degree {
            for k in 0..azimuth_points {
                let phi = 2.0 * PI * k as f64 / azimuth_points as f64;
                let angle = m.unsigned_abs() as f64 * phi;
                trig_table.push(if m >= 0 { angle.cos() } else { angle.sin() });
            }
        }
        let trig = |m: i32| {
            let start = (m + max_degree) as usize * azimuth_points;
            &trig_table[start..start + azimuth_points]
        };
        let tri = |n: usize, m: i32| n * (n + 1) / 2 + m.unsigned_abs() as usize;

        let mut entries = Vec::new();
        let factors = channel_count(order);
        for i in 0..factors {
            let (ni, mi) = order_degree(i);
            for j in i..factors {
                let (nj, mj) = order_degree(j);
                let (ai, aj) = (mi.unsigned_abs() as i32, mj.unsigned_abs() as i32);
                let mut candidates = [ai + aj, -(ai + aj), (ai - aj).abs(), -(ai - aj).abs()];
                candidates.sort_unstable();
                for nq in (ni.abs_diff(nj)..=ni + nj).step_by(2) {
                    let mut last = None;
                    for &mq in &candidates {
                        if last == Some(mq) || mq.unsigned_abs() as usize > nq {
                            continue;
                        }
                        last = Some(mq);
                        let azimuth: f64 = trig(mi)
                            .iter()
                            .zip(trig(mj))
                            .zip(trig(mq))
                            .map(|((a, b), c)| a * b * c)
                            .sum::<f64>()
                            * (2.0 * PI / azimuth_points as f64);
                        if azimuth.abs() < ZERO_TOLERANCE {
                            continue;
                        }
                        let elevation: f64 = nodes
                            .iter()
                            .enumerate()
                            .map(|(k, &(_, w))| {
                                let row = &legendre[k * tri_len..(k + 1) * tri_len];
                                w * row[tri(ni, mi)] * row[tri(nj, mj)] * row[tri(nq, mq)]
                            })
                            .sum();
                        let value = azimuth * elevation;
                        if value.abs() > ZERO_TOLERANCE {
                            entries.push(GauntEntry {
                                i,
                                j,
                                q: acn(nq, mq),
                                integral_sn3d: value,
                            });
                        }
                    }
                }
            }
        }
        Some(Self { order, entries })
    }

    /// Factor order N.
    pub fn order(&self) -> usize {
        self.order
    }

    /// All non-zero entries, sorted by (i, j, q) with i ≤ j.
    pub fn entries(&self) -> &[GauntEntry] {
        &self.entries
    }

    /// ∫ Y_i Y_j Y_q dΩ for ACN/SN3D functions (symmetric in i, j; 0 where not stored).
    pub fn integral_sn3d(&self, i: usize, j: usize, q: usize) -> f64 {
        let (i, j) = (i.min(j), i.max(j));
        self.entries
            .binary_search_by(|e| (e.i, e.j, e.q).cmp(&(i, j, q)))
            .map_or(0.0, |k| self.entries[k].integral_sn3d)
    }

    /// The same integral for orthonormal real SH, Y^ON_n = sqrt((2n+1)/(4π))·Y^SN3D_n, the
    /// normalisation in which published real Gaunt tables are given.
    pub fn integral_orthonormal(&self, i: usize, j: usize, q: usize) -> f64 {
        let scale = |a: usize| (((2 * order_degree(a).0 + 1) as f64) / (4.0 * PI)).sqrt();
        self.integral_sn3d(i, j, q) * scale(i) * scale(j) * scale(q)
    }
}

/// Gauss–Legendre nodes and weights (x_k, w_k) of `count` points on [−1, 1], by Newton
/// iteration on P_count from the asymptotic start cos(π(k+0.75)/(count+0.5)).
pub(crate) fn gauss_legendre(count: usize) -> Vec<(f64, f64)> {
    let n = count as f64;
    (0..count)
        .map(|k| {
            let mut x = (PI * (k as f64 + 0.75) / (n + 0.5)).cos();
            let mut derivative = 1.0;
            for _ in 0..100 {
                let (p, p_prev) = legendre_pair(count, x);
                derivative = n * (x * p - p_prev) / (x * x - 1.0);
                let step = p / derivative;
                x -= step;
                if step.abs() < 1e-16 {
                    break;
                }
            }
            let (p, p_prev) = legendre_pair(count, x);
            if p != 0.0 {
                derivative = n * (x * p - p_prev) / (x * x - 1.0);
            }
            (x, 2.0 / ((1.0 - x * x) * derivative * derivative))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gauss_legendre_integrates_polynomials() {
        // ∫_{-1}^{1} x^k dx = 2/(k+1) for even k (calculus); 5 nodes are exact to degree 9.
        let nodes = gauss_legendre(5);
        for k in [0, 2, 4, 8] {
            let sum: f64 = nodes.iter().map(|&(x, w)| w * x.powi(k)).sum();
            assert!((sum - 2.0 / (k + 1) as f64).abs() < 1e-14, "k={k}");
        }
    }

    #[test]
    fn squares_give_sn3d_norm() {
        // ∫ Y_q Y_q Y_0 dΩ = 4π/(2n+1) for SN3D (REFERENCES: ambiX normalisation).
        let table = GauntTable::new(3).unwrap();
        for q in 0..16 {
            let n = order_degree(q).0;
            let v = table.integral_sn3d(q, q, 0);
            assert!((v - 4.0 * PI / (2 * n + 1) as f64).abs() < 1e-12, "q={q}");
        }
    }
}
