use super::{MAX_SH_ORDER, channel_count};
use crate::sphere::Direction;

/// Index of (n, m ≥ 0) in a triangular Legendre table: n(n+1)/2 + m.
#[inline]
pub(crate) const fn tri(n: usize, m: usize) -> usize {
    n * (n + 1) / 2 + m
}

/// Schmidt semi-normalised (= SN3D) associated Legendre functions `N_n^m P_n^m(x)`, no
/// Condon–Shortley phase, for 0 ≤ m ≤ n ≤ `order`, written to `out[n(n+1)/2 + m]`.
///
/// `x` is sin(elevation); `out` must hold at least (order+1)(order+2)/2 values. Near the poles
/// prefer [`sn3d_legendre_sin_cos`], which takes cos(elevation) directly: forming
/// sqrt(1 − x²) here loses relative accuracy as |x| → 1 (about 1e-7 relative at 89.999°).
pub fn sn3d_legendre(order: usize, x: f64, out: &mut [f64]) {
    let x = x.clamp(-1.0, 1.0);
    sn3d_legendre_sin_cos(order, x, (1.0 - x * x).max(0.0).sqrt(), out);
}

/// As [`sn3d_legendre`] with both `sin_el` = sin(elevation) and `cos_el` = cos(elevation)
/// given, so that values near the poles keep full relative accuracy.
/// Recurrences (no factorials): P_m^m = sqrt((2m-1)/(2m))·s·P_{m-1}^{m-1} (m ≥ 2), P_1^1 = s,
/// P_{m+1}^m = sqrt(2m+1)·x·P_m^m, and for n ≥ m+2
/// P_n^m = ((2n-1)·x·P_{n-1}^m − sqrt((n-1)²−m²)·P_{n-2}^m) / sqrt(n²−m²), with x = sin_el and
/// s = cos_el.
pub fn sn3d_legendre_sin_cos(order: usize, sin_el: f64, cos_el: f64, out: &mut [f64]) {
    assert!(out.len() > tri(order, order), "Legendre table too short");
    let x = sin_el.clamp(-1.0, 1.0);
    let s = cos_el.abs().min(1.0);
    out[0] = 1.0;
    let mut diag = 1.0;
    for m in 0..=order {
        if m == 1 {
            diag = s;
        } else if m >= 2 {
            diag *= ((2 * m - 1) as f64 / (2 * m) as f64).sqrt() * s;
        }
        out[tri(m, m)] = diag;
        if m < order {
            out[tri(m + 1, m)] = ((2 * m + 1) as f64).sqrt() * x * diag;
        }
        for n in (m + 2)..=order {
            let a = (2 * n - 1) as f64 * x * out[tri(n - 1, m)];
            let b = (((n - 1) * (n - 1) - m * m) as f64).sqrt() * out[tri(n - 2, m)];
            out[tri(n, m)] = (a - b) / ((n * n - m * m) as f64).sqrt();
        }
    }
}

/// Reusable evaluator of ACN/SN3D real spherical harmonics; owns its scratch, so evaluation
/// never allocates.
#[derive(Clone, Debug)]
pub struct ShEvaluator {
    order: usize,
    legendre: Vec<f64>,
    cos_m: Vec<f64>,
    sin_m: Vec<f64>,
}

impl ShEvaluator {
    /// Evaluator for orders 0..=`order`. Panics if `order` > [`MAX_SH_ORDER`].
    pub fn new(order: usize) -> Self {
        assert!(
            order <= MAX_SH_ORDER,
            "SH order {order} above the maximum {MAX_SH_ORDER}"
        );
        Self {
            order,
            legendre: vec![0.0; tri(order, order) + 1],
            cos_m: vec![0.0; order + 1],
            sin_m: vec![0.0; order + 1],
        }
    }

    pub fn order(&self) -> usize {
        self.order
    }

    /// Writes Y_acn(direction) for acn in 0..(order+1)² into `out` (indexed by [acn]).
    pub fn eval(&mut self, direction: Direction, out: &mut [f64]) {
        self.eval_rad(direction.azimuth_rad(), direction.elevation_rad(), out);
    }

    /// As [`eval`](Self::eval) with angles in radians.
    pub fn eval_rad(&mut self, azimuth_rad: f64, elevation_rad: f64, out: &mut [f64]) {
        let order = self.order;
        assert!(out.len() >= channel_count(order), "SH output too short");
        let (sin_el, cos_el) = elevation_rad.sin_cos();
        sn3d_legendre_sin_cos(order, sin_el, cos_el, &mut self.legendre);
        for m in 0..=order {
            let (s, c) = (m as f64 * azimuth_rad).sin_cos();
            self.cos_m[m] = c;
            self.sin_m[m] = s;
        }
        for n in 0..=order {
            let base = n * (n + 1);
            out[base] = self.legendre[tri(n, 0)];
            for m in 1..=n {
                let p = self.legendre[tri(n, m)];
                out[base + m] = p * self.cos_m[m];
                out[base - m] = p * self.sin_m[m];
            }
        }
    }
}

/// Convenience: ACN/SN3D SH vector of `order` at `direction` (allocates; not for hot paths).
pub fn sh_sn3d(order: usize, direction: Direction) -> Vec<f64> {
    let mut out = vec![0.0; channel_count(order)];
    ShEvaluator::new(order).eval(direction, &mut out);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sign_checks() {
        // Common practice: a source at the left (az +90°) gives Y (ACN 1) = +1; above gives Z = +1.
        let left = sh_sn3d(1, Direction::new(90.0, 0.0));
        assert!((left[1] - 1.0).abs() < 1e-12 && left[3].abs() < 1e-12);
        let up = sh_sn3d(1, Direction::new(0.0, 90.0));
        assert!((up[2] - 1.0).abs() < 1e-12);
    }
}
