//! Real spherical harmonics in ACN order with SN3D normalisation (see the crate root for the
//! conventions), evaluated by stable recurrences so that high orders never form large factorials.

mod eval;
pub mod rotation;

pub use eval::{ShEvaluator, sh_sn3d, sn3d_legendre, sn3d_legendre_sin_cos};
pub use rotation::{Matrix3, ShRotation};

/// Highest order the SH evaluator supports. Recurrences are stable far beyond this; the limit
/// only bounds table sizes.
pub const MAX_SH_ORDER: usize = 32;

/// Number of channels of a full order-`order` stream: (N+1)².
pub const fn channel_count(order: usize) -> usize {
    (order + 1) * (order + 1)
}

/// ACN index of order `n`, degree `m` (|m| ≤ n): n(n+1)+m.
pub const fn acn(n: usize, m: i32) -> usize {
    ((n * (n + 1)) as isize + m as isize) as usize
}

/// Order and degree of an ACN index.
pub fn order_degree(acn: usize) -> (usize, i32) {
    let n = (acn as f64).sqrt().floor() as usize;
    // Guard against rounding at perfect squares.
    let n = if (n + 1) * (n + 1) <= acn {
        n + 1
    } else if n * n > acn {
        n - 1
    } else {
        n
    };
    (n, acn as i32 - (n * (n + 1)) as i32)
}

/// Order of a full stream with `channels` channels, if `channels` is a perfect square (N+1)².
pub fn order_of_channel_count(channels: usize) -> Option<usize> {
    let root = (channels as f64).sqrt().round() as usize;
    (root >= 1 && root * root == channels).then(|| root - 1)
}

/// N3D/SN3D gain of order `n`: sqrt(2n+1).
pub fn n3d_gain(n: usize) -> f64 {
    ((2 * n + 1) as f64).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn acn_round_trip() {
        for n in 0..=12usize {
            for m in -(n as i32)..=(n as i32) {
                assert_eq!(order_degree(acn(n, m)), (n, m));
            }
        }
        assert_eq!(order_of_channel_count(16), Some(3));
        assert_eq!(order_of_channel_count(17), None);
        assert_eq!(order_of_channel_count(0), None);
    }
}
