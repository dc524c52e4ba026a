//! Per-order beam weights g_n (n = 0..=N) for axisymmetric beams of order N.
//!
//! An axisymmetric beam with per-order weights g_n has the pattern
//! f(θ) = Σ_n (2n+1)·g_n·P_n(cos θ) (θ = angle from the look direction). The three published
//! choices are the basic (max-DI) beam, max-rE and in-phase.

/// Which published weighting a beam uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub enum BeamKind {
    /// g_n = 1: the plane-wave decomposition beam with the highest directivity index.
    #[default]
    Basic,
    /// g_n = P_n(r_E), r_E the largest root of P_{N+1} (Daniel 2001; Zotter & Frank 2012):
    /// maximises the energy vector length, lower side lobes.
    MaxRe,
    /// g_n = N!(N+1)!/((N+n+1)!(N−n)!) (Daniel 2001; Monro 2000): pattern ((1+cos θ)/2)^N,
    /// no side lobes at all.
    InPhase,
}

/// Legendre polynomial P_n(x) by the three-term recurrence
/// (k+1)·P_{k+1} = (2k+1)·x·P_k − k·P_{k−1}.
pub fn legendre_p(n: usize, x: f64) -> f64 {
    legendre_pair(n, x).0
}

/// (P_n(x), P_{n−1}(x)); P_{−1} is taken as 0.
pub(crate) fn legendre_pair(n: usize, x: f64) -> (f64, f64) {
    let mut previous = 0.0;
    let mut current = 1.0;
    for k in 0..n {
        let next = ((2 * k + 1) as f64 * x * current - k as f64 * previous) / (k + 1) as f64;
        previous = current;
        current = next;
    }
    (current, previous)
}

/// The published approximation r_E ≈ cos(137.9°/(N+1.51)) (Zotter & Frank 2019), used as the
/// Newton start of [`max_re_root`].
pub fn max_re_root_approx(order: usize) -> f64 {
    (137.9f64 / (order as f64 + 1.51)).to_radians().cos()
}

/// r_E of an order-`order` max-rE beam: the largest root of P_{N+1}, found by safeguarded
/// Newton iteration from [`max_re_root_approx`].
///
/// The root lies in (cos(π/(N+1.5)), cos(π/(2N+3))) (the interlacing bounds for the zeros of
/// P_{N+1}, Szegő); Newton steps that leave that bracket are replaced by bisection, so the
/// iteration always converges. Order 0 gives 0 (the root of P_1).
pub fn max_re_root(order: usize) -> f64 {
    let degree = order + 1;
    if degree == 1 {
        return 0.0;
    }
    let d = degree as f64;
    let mut low = (std::f64::consts::PI / (d + 0.5)).cos();
    let mut high = (std::f64::consts::PI / (2.0 * d + 1.0)).cos();
    // P_n(1) = 1 > 0 and P_n has no root above the largest one, so P_n > 0 on (root, 1].
    let mut x = max_re_root_approx(order).clamp(low, high);
    for _ in 0..100 {
        let (p, p_prev) = legendre_pair(degree, x);
        if p > 0.0 {
            high = x;
        } else {
            low = x;
        }
        // P_n'(x) = n·(x·P_n − P_{n−1})/(x² − 1).
        let derivative = d * (x * p - p_prev) / (x * x - 1.0);
        let newton = x - p / derivative;
        let next = if newton > low && newton < high && newton.is_finite() {
            newton
        } else {
            0.5 * (low + high)
        };
        if (next - x).abs() <= 1e-16 * x.abs().max(1.0) {
            return next;
        }
        x = next;
    }
    x
}

/// Per-order weights g_n, n = 0..=`order` (indexed by [order n]); g_0 = 1 for every kind.
pub fn beam_weights(kind: BeamKind, order: usize) -> Vec<f64> {
    match kind {
        BeamKind::Basic => vec![1.0; order + 1],
        BeamKind::MaxRe => {
            let r_e = max_re_root(order);
            (0..=order).map(|n| legendre_p(n, r_e)).collect()
        }
        BeamKind::InPhase => {
            // g_n / g_{n−1} = (N−n+1)/(N+n+1): a running product never forms a factorial.
            let mut weights = Vec::with_capacity(order + 1);
            let mut g = 1.0;
            weights.push(g);
            for n in 1..=order {
                g *= (order + 1 - n) as f64 / (order + n + 1) as f64;
                weights.push(g);
            }
            weights
        }
    }
}

/// Directivity index in dB of the axisymmetric beam with per-order weights g_n (indexed by
/// [order n]): 10·log10[(Σ(2n+1)g_n)² / Σ(2n+1)g_n²], i.e. on-axis power over the mean power
/// over the sphere. Returns −∞ for all-zero weights.
pub fn directivity_index_db(weights: &[f64]) -> f64 {
    let (sum, sum_sq) = weights
        .iter()
        .enumerate()
        .fold((0.0, 0.0), |(s, s2), (n, &g)| {
            let k = (2 * n + 1) as f64;
            (s + k * g, s2 + k * g * g)
        });
    if sum_sq == 0.0 {
        return f64::NEG_INFINITY;
    }
    10.0 * (sum * sum / sum_sq).log10()
}

/// Steering gains on ACN/SN3D signals for per-order beam weights g_n, written to `out`
/// (indexed by [order n]): w_n = (2n+1)·g_n / Σ_k (2k+1)·g_k.
///
/// With SN3D signals b = y(d₀)·s, the output Σ w_n Σ_m Y_nm(d) b_nm equals
/// s·f(θ)/f(0) with f(θ) = Σ(2n+1)g_n P_n(cos θ) (SN3D addition theorem), so a unit-power plane
/// wave reads exactly 1 in its own direction for every beam kind. Returns false (and leaves
/// `out` zeroed) if the weights sum to zero or are not finite.
pub fn sn3d_steering_gains(weights: &[f64], out: &mut [f64]) -> bool {
    let norm: f64 = weights
        .iter()
        .enumerate()
        .map(|(n, &g)| (2 * n + 1) as f64 * g)
        .sum();
    let usable = norm.is_finite() && norm != 0.0;
    for (n, (o, &g)) in out.iter_mut().zip(weights).enumerate() {
        *o = if usable {
            (2 * n + 1) as f64 * g / norm
        } else {
            0.0
        };
    }
    usable
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn legendre_low_orders() {
        // Closed forms P_2 = (3x²−1)/2, P_3 = (5x³−3x)/2 (Abramowitz & Stegun 22.3.8).
        let x = 0.3;
        assert!((legendre_p(2, x) - (3.0 * x * x - 1.0) / 2.0).abs() < 1e-15);
        assert!((legendre_p(3, x) - (5.0 * x * x * x - 3.0 * x) / 2.0).abs() < 1e-15);
        assert_eq!(legendre_p(0, x), 1.0);
    }

    #[test]
    fn first_order_max_re_root_is_one_over_sqrt3() {
        // P_2 = (3x²−1)/2 has its root at 1/√3 (algebra).
        assert!((max_re_root(1) - 3f64.sqrt().recip()).abs() < 1e-15);
    }
}
