//! Orientation and channel faults of a candidate against its reference, from the broadband
//! moments of [`PairCovariance`].
//!
//! 1. Orthogonal Procrustes on the first-order (dipole) cross-covariance gives a rotation,
//!    possibly with a mirror ([`procrustes`]).
//! 2. A first-order swap or inversion is geometrically a mirror or turn too, and a whole-file
//!    polarity flip reads at first order as an up-down mirror turned by 180°. So four readings
//!    are scored — the estimate or no transform, each with and without a whole-file flip (the
//!    flip's estimate made on the flipped dipoles) — by how many channels then fail to match
//!    themselves (correlation < 0.5), ties going to the better overall fit: the reading that
//!    needs the fewest channel faults wins, and the faults left show per channel. With orders
//!    ≥ 2 the higher orders decide; a first-order stream cannot tell a mirror from a swap, and
//!    [`SpatialComparison::first_order_only`] says so.
//! 3. With the chosen transform D (block-diagonal, [`ShRotation`]) the reference predicts the
//!    candidate as p = D·r. Per candidate channel i and predicted channel j the correlation is
//!    Σc_i·p_j / sqrt(Σc_i²·Σp_j²). A channel matches the predicted channel of largest |correlation|
//!    (itself unless another is clearly better); two channels that match each other are a swap,
//!    a channel that matches itself with a negative correlation is inverted.
//! 4. When the flipped reading wins, everything is measured on the flipped-back candidate and
//!    every channel not flipped a second time is reported inverted.

use super::covariance::PairCovariance;
use super::orientation::{Orientation, procrustes};
use crate::sh::{Matrix3, ShRotation, order_degree, order_of_channel_count};

/// |correlation| two channels must reach to be called a swap, or an inverted channel's
/// correlation must fall below (negated). Common practice for "clearly related", not a standard.
pub const MATCH_CORRELATION: f64 = 0.5;
/// Another channel must beat a channel's own |correlation| by this much to be its best match,
/// so that near-ties (proportional channels of a single plane wave) stay with the channel.
pub const BEST_MATCH_MARGIN: f64 = 0.02;
/// Channels with less energy than this fraction of the loudest channel count as silent.
const SILENT_FRACTION: f64 = 1e-10;

/// Level change and rotation fit of one order.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OrderComparison {
    pub order: usize,
    /// Candidate energy of the order over the reference's, dB (rotation-invariant).
    pub level_change_db: Option<f64>,
    /// Cosine similarity of the candidate with the transformed reference over the order's
    /// channels: Σ c·p / sqrt(Σ c²·Σ p²), 1 = predicted exactly up to a gain.
    pub rotation_fit: Option<f64>,
}

/// One candidate channel against the transformed reference.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChannelComparison {
    /// ACN of the candidate channel (after conversion to ACN/SN3D).
    pub acn: usize,
    /// Candidate energy over the expected channel's (its swap partner's for a swap), dB.
    pub gain_db: Option<f64>,
    /// Correlation with the same ACN of the transformed reference.
    pub correlation: Option<f64>,
    pub polarity_inverted: bool,
    /// ACN of the transformed reference channel it matches best.
    pub best_match_acn: Option<usize>,
    pub best_match_correlation: Option<f64>,
}

/// Everything the broadband moments tell about orientation and channels.
#[derive(Clone, Debug)]
pub struct SpatialComparison {
    pub order: usize,
    /// The first-order estimate before the higher orders were consulted (`None` if the
    /// dipoles carry nothing).
    pub first_order_estimate: Option<Orientation>,
    /// The transform applied: the estimate, or the identity if the higher orders reject it.
    pub orientation: Orientation,
    /// The higher orders fit better without the first-order estimate (a channel fault at first
    /// order, not a turn or mirror of the scene).
    pub estimate_rejected: bool,
    /// First order only: a turn or mirror cannot be told from swapped or inverted channels.
    pub first_order_only: bool,
    /// Cosine similarity of the first-order part under the applied transform.
    pub fit: Option<f64>,
    pub orders: Vec<OrderComparison>,
    /// Indexed by candidate ACN.
    pub channels: Vec<ChannelComparison>,
    /// Candidate ACN pairs (lower first) that match each other instead of themselves.
    pub swaps: Vec<(usize, usize)>,
    /// Candidate ACNs that match themselves with inverted polarity.
    pub inverted: Vec<usize>,
    /// The candidate as a whole is inverted (W anti-correlated); `orders[].rotation_fit`
    /// and `fit` are then measured on the flipped-back candidate.
    pub whole_inverted: bool,
    /// Per candidate ACN, the transformed reference ACN it is compared with downstream (its
    /// swap partner, or itself).
    pub expected: Vec<usize>,
    /// SH transform of [`orientation`](Self::orientation).
    pub rotation: ShRotation,
}

/// Dense view of the moments under a transform D: cp = Σ c·pᵀ, pp = Σ p·pᵀ (diagonal only).
struct Predicted {
    k: usize,
    cp: Vec<f64>,
    pp_diag: Vec<f64>,
}

impl Predicted {
    /// `sign` = −1 flips the candidate (a whole-file inversion).
    fn new(m: &PairCovariance, d: &ShRotation, sign: f64) -> Self {
        let k = m.channels();
        let block_range = |acn: usize| {
            let l = order_degree(acn).0;
            l * l..(l + 1) * (l + 1)
        };
        let mut cp = vec![0.0; k * k];
        let mut pp_diag = vec![0.0; k];
        for j in 0..k {
            let range = block_range(j);
            for i in 0..k {
                cp[i * k + j] = sign
                    * range
                        .clone()
                        .map(|q| m.cr(i, q) * d.element(j, q))
                        .sum::<f64>();
            }
            let mut energy = 0.0;
            for a in range.clone() {
                for b in range.clone() {
                    energy += d.element(j, a) * m.rr(a, b) * d.element(j, b);
                }
            }
            pp_diag[j] = energy;
        }
        Self { k, cp, pp_diag }
    }

    /// Cosine similarity over the channels in `acns`.
    fn fit(&self, m: &PairCovariance, acns: std::ops::Range<usize>) -> Option<f64> {
        let (mut cross, mut p, mut c) = (0.0, 0.0, 0.0);
        for i in acns {
            cross += self.cp[i * self.k + i];
            p += self.pp_diag[i];
            c += m.cc(i, i);
        }
        let denominator = (p * c).sqrt();
        (denominator > 0.0 && denominator.is_finite()).then(|| cross / denominator)
    }
}

/// One reading of the candidate: a whole-file sign and a transform, scored by how many
/// channels fail to match themselves under it (correlation below [`MATCH_CORRELATION`]).
struct Hypothesis {
    sign: f64,
    orientation: Orientation,
    d: ShRotation,
    predicted: Predicted,
    faults: usize,
    fit: f64,
}

impl Hypothesis {
    fn new(
        m: &PairCovariance,
        order: usize,
        sign: f64,
        orientation: Orientation,
        floor: f64,
    ) -> Self {
        let d = ShRotation::new(order, &orientation.transform);
        let predicted = Predicted::new(m, &d, sign);
        let k = m.channels();
        let faults = (0..k)
            .filter(|&i| {
                let (c, p) = (m.cc(i, i), predicted.pp_diag[i]);
                c > floor
                    && p > floor
                    && predicted.cp[i * k + i] / (c * p).sqrt() < MATCH_CORRELATION
            })
            .count();
        let fit = predicted.fit(m, 0..k).unwrap_or(-1.0);
        Self {
            sign,
            orientation,
            d,
            predicted,
            faults,
            fit,
        }
    }
}

fn ratio_db(numerator: f64, denominator: f64) -> Option<f64> {
    (numerator > 0.0 && denominator > 0.0).then(|| 10.0 * (numerator / denominator).log10())
}

/// Orientation, per-order fits and levels, and channel faults from the moments of two aligned
/// ACN/SN3D streams of the same full order (≥ 1).
///
/// # Panics
/// If the channel count is not (N+1)² with N ≥ 1 (a caller bug).
pub fn compare_spatial(m: &PairCovariance) -> SpatialComparison {
    let k = m.channels();
    let order = order_of_channel_count(k)
        .filter(|&o| o >= 1)
        .expect("compare_spatial needs a full order ≥ 1");
    let loudest = (0..k)
        .map(|i| m.cc(i, i).max(m.rr(i, i)))
        .fold(0.0, f64::max);
    let floor = loudest * SILENT_FRACTION;
    // Dipole cross-covariance in x y z (ACN 3, 1, 2).
    const ACN_OF_AXIS: [usize; 3] = [3, 1, 2];
    let mut hypotheses = Vec::with_capacity(4);
    let mut estimates = [None, None];
    for (slot, sign) in [1.0, -1.0].into_iter().enumerate() {
        let dipole: Matrix3 = std::array::from_fn(|a| {
            std::array::from_fn(|b| sign * m.cr(ACN_OF_AXIS[a], ACN_OF_AXIS[b]))
        });
        let estimate = procrustes(&dipole).map(|q| Orientation::from_transform(&q));
        estimates[slot] = estimate;
        if let Some(estimate) = estimate {
            hypotheses.push(Hypothesis::new(m, order, sign, estimate, floor));
        }
        hypotheses.push(Hypothesis::new(
            m,
            order,
            sign,
            Orientation::identity(),
            floor,
        ));
    }
    // Fewest channels that do not match themselves; then the best overall fit; then the order
    // above (no whole-file inversion first, the estimate before the identity).
    let chosen = hypotheses
        .into_iter()
        .enumerate()
        .min_by(|(ia, a), (ib, b)| {
            a.faults
                .cmp(&b.faults)
                .then(b.fit.total_cmp(&a.fit))
                .then(ia.cmp(ib))
        })
        .map(|(_, h)| h)
        .expect("the identity is always a hypothesis");
    let sign = chosen.sign;
    let whole_inverted = sign < 0.0;
    let first_order_estimate = estimates[usize::from(whole_inverted)];
    let orientation = chosen.orientation;
    let estimate_rejected = orientation == Orientation::identity()
        && first_order_estimate.is_some_and(|e| e.mirror.is_some() || e.largest_angle_deg() >= 0.5);
    let (d, predicted) = (chosen.d, chosen.predicted);

    let orders = (0..=order)
        .map(|l| {
            let acns = l * l..(l + 1) * (l + 1);
            let c: f64 = acns.clone().map(|i| m.cc(i, i)).sum();
            let r: f64 = acns.clone().map(|i| m.rr(i, i)).sum();
            OrderComparison {
                order: l,
                level_change_db: ratio_db(c, r),
                rotation_fit: predicted.fit(m, acns),
            }
        })
        .collect();

    let correlation = |i: usize, j: usize| -> Option<f64> {
        let (c, p) = (m.cc(i, i), predicted.pp_diag[j]);
        (c > floor && p > floor).then(|| predicted.cp[i * k + j] / (c * p).sqrt())
    };
    let best: Vec<Option<(usize, f64)>> = (0..k)
        .map(|i| {
            let own = correlation(i, i).map_or(0.0, f64::abs);
            let (j, value) = (0..k)
                .filter_map(|j| correlation(i, j).map(|v| (j, v)))
                .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))?;
            if j != i && value.abs() > own + BEST_MATCH_MARGIN {
                Some((j, value))
            } else {
                correlation(i, i).map(|v| (i, v))
            }
        })
        .collect();
    let mut swaps = Vec::new();
    let mut expected: Vec<usize> = (0..k).collect();
    for i in 0..k {
        if let Some((j, v)) = best[i]
            && j > i
            && v.abs() >= MATCH_CORRELATION
            && let Some((back, w)) = best[j]
            && back == i
            && w.abs() >= MATCH_CORRELATION
        {
            swaps.push((i, j));
            expected.swap(i, j);
        }
    }
    // Inverted against the (possibly flipped-back) candidate: below −0.5 with itself; in a
    // whole-file inversion the channels that are *not* flipped a second time are the inverted
    // ones.
    let inverted: Vec<usize> = (0..k)
        .filter(|&i| expected[i] == i)
        .filter(|&i| matches!(best[i], Some((j, v)) if j == i && sign * v <= -MATCH_CORRELATION))
        .collect();
    // Correlations are reported against the candidate as it is.
    let channels = (0..k)
        .map(|i| ChannelComparison {
            acn: i,
            gain_db: ratio_db(m.cc(i, i), predicted.pp_diag[expected[i]]),
            correlation: correlation(i, i).map(|v| sign * v),
            polarity_inverted: inverted.contains(&i),
            best_match_acn: best[i].map(|b| b.0),
            best_match_correlation: best[i].map(|b| sign * b.1),
        })
        .collect();
    SpatialComparison {
        order,
        first_order_estimate,
        fit: predicted.fit(m, 1..4),
        orientation,
        estimate_rejected,
        first_order_only: order == 1,
        orders,
        channels,
        swaps,
        inverted,
        whole_inverted,
        expected,
        rotation: d,
    }
}
