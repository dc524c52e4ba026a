//! Channel pairs that the scene's geometry makes proportional, beyond the horizontal plane
//! and the one-to-three plane waves of the whole covariance.
//!
//! # The rule
//! For sources s_k at directions d_k, channel a carries Σ_k Y_a(d_k)·s_k. Two channels are
//! proportional, c_a = r·c_b, for independent sources exactly when Y_a(d_k) = r·Y_b(d_k) for
//! every k: every direction lies on one level curve of Y_a/Y_b (a source that reaches neither
//! channel, because it is present only in other orders, satisfies it trivially). So a
//! correlated pair is explained when a model of the scene that puts every source on such a
//! curve fits the covariance, and the pair's own ratio is the one the model predicts.
//! Ordinary material produces a few such families; each is tested here as a set of
//! predictions about the ACN/SN3D covariance under one format hypothesis:
//!
//! - **One axis** (a source that jumps to the opposite side, or two sources facing each
//!   other): Y_nm(−u) = (−1)^n Y_nm(u), so with directions ±u only, every even-order
//!   channel is Y_a(u)·(s₁ + s₂) and every odd-order channel Y_a(u)·(s₁ − s₂): the even
//!   channels are proportional among themselves, and so are the odd ones, with ratios
//!   Y_a(u)/Y_b(u); and X² + Y² + Z² = W² (SN3D addition theorem at first order, any
//!   incoherent mixture of plane waves). u is the principal axis of the first-order block.
//! - **One elevation** (pan automation at a fixed elevation e; the horizontal plane is
//!   e = 0): Y_nm(az, e) = N_n^|m|·P_n^|m|(sin e)·trig(m·az), so the components of equal
//!   degree m are proportional with ratios N_n^|m|P_n^|m|(sin e) / N_n'^|m|P_n'^|m|(sin e),
//!   Z = sin e·W, and each sectoral pair carries Y_|m|,|m|² + Y_|m|,−|m|² = (N P_|m|^|m|(sin e))²
//!   times W's energy, whatever the azimuths (cos² + sin² = 1). sin e comes from Z against W.
//! - **One azimuth** (a source moved up and down at a fixed azimuth φ, or also at φ + 180°):
//!   the components (n, m) and (n, −m) share P_n^|m|(sin e) and differ by cos(|m|φ) against
//!   sin(|m|φ), a ratio that cos(|m|(φ + π)) = (−1)^m cos(|m|φ) leaves alone; φ is read from
//!   the principal axis of X and Y. From order 2 only: at first order the Y–X tie is all
//!   there is, and a copy of X onto Y is exactly a field in the 45° vertical plane.
//! - **Plane waves in the top orders only** (a first-order recording under a higher-order
//!   panned source): the block of orders n₀..N is one to three plane waves, steering vectors
//!   restricted to those orders, over a floor 30 dB down (the test of [`super::geometry`] on
//!   that block); every pair inside the block is then explained.
//!
//! A model holds when at most a quarter of its predictions fail (a copied or corrupted
//! channel breaks its own ties but not the others') and at least one prediction beyond the
//! ties its parameters were read from was tested; a pair is explained only if its own tie
//! holds too. A copy across degrees, across parities or out of the block, or a copy whose
//! gain is not the predicted ratio, stays a duplicate. When a block of orders n₀..N (n₀ = 0:
//! the whole covariance) has at most three strong components that do not fit plane waves,
//! each channel of a same-level correlated pair is removed in turn; the one whose removal
//! makes the block fit is named as the copy.
//!
//! Sources: the real SH in SN3D with no Condon–Shortley phase as in DESIGN.md (the AmbiX
//! convention, Nachbar et al. 2011); the parity P_n^m(−x) = (−1)^(n+m) P_n^m(x) of the
//! associated Legendre functions (Abramowitz & Stegun, *Handbook of Mathematical
//! Functions*, ch. 8, and DLMF §14; from memory, no equation number checked), which with
//! cos(m(φ+π)) = (−1)^m cos(mφ) gives Y_nm(−u) = (−1)^n Y_nm(u); the SN3D Legendre values
//! come from [`sn3d_legendre`], on which the SH evaluator is built and which the SH tests
//! check against the closed forms of the AmbiX table. The unit tests below check the
//! predicted ratios and the parity against those closed forms.
//!
//! Cost: the axis, elevation and azimuth models are O(M²) tie tests; the block model is at
//! most one eigen-analysis per order (sizes (N+1)² − n₀²) with a steering fit, only for
//! blocks that hold an unexplained pair, plus one per same-level candidate when a block
//! does not fit. Printed at order 7 by `cost_of_geometric_ties_printout` in
//! `tests/format_check_geometry.rs` (2 to 21 ms per check).

use super::geometry::Geometry;
use super::geometry::{self, GeometryQuery};
use super::horizontal::HORIZONTAL_NOISE_MEAN_SQUARE;
use super::steering_fit::SteeringFitSearch;
use crate::format::ConversionPlan;
use crate::sh::{ShEvaluator, acn, channel_count, order_degree, sn3d_legendre};
use crate::sphere::Direction;
use nalgebra::{DMatrix, Matrix3, SymmetricEigen};

/// A predicted tie a = r·b may leave this share of the two channels' own energy
/// (c_aa + r²·c_bb) unexplained (−30 dB). A pair is only flagged when the part of each channel
/// outside the other is below about −37 dB (correlation 0.9999), so every flagged pair that
/// the model explains passes with margin, while a copy with a gain other than the predicted
/// ratio (off by more than ~3 %) fails.
pub const TIE_RESIDUAL_SHARE: f64 = 1e-3;

/// A predicted energy (a sectoral pair against W, or the first-order block against W) may
/// miss by this share of itself (±0.04 dB), plus the noise allowance. The identities are
/// exact for any incoherent mixture in the family, and content tied as tightly as a flagged
/// pair (correlation 0.9999) keeps them to about 1e-3 (seen on the test scenes: 0.1 % and
/// less). At first order the energy is often the only prediction besides the tie the
/// family is read from, and a copy under another normalisation can land near it: copies of
/// W onto Z read as maxN or FuMa, and dipole copies in a jumping source, missed it by 3 to
/// 12 % on the scenes we tried, so the bar is set well inside that.
pub const ENERGY_TOLERANCE_SHARE: f64 = 0.01;

/// A component predicted empty may hold this share of W's energy (−40 dB), as in the
/// horizontal test.
const ZERO_RESIDUAL_SHARE: f64 = 1e-4;

/// |sin e| above this is a source at a pole: a single direction, left to the plane-wave test.
const POLE_SIN_ELEVATION: f64 = 0.999;

/// Two channels are at the same level (a copy) when their raw mean squares differ by at
/// most this share (as in the copied-channel search of the format check).
const SAME_LEVEL_SHARE: f64 = 1e-3;

/// Plane waves found in a block must be incoherent to within this correlation of their
/// fitted signals (our own bound: independent sources over a programme correlate far less;
/// a structured coincidence of the span test gives fitted signals that are strongly
/// correlated).
const MAX_SOURCE_CORRELATION: f64 = 0.3;

/// Predicted coefficients below this are zero (a group predicted empty).
const ZERO_COEFFICIENT: f64 = 1e-9;

/// What the models look at, indexed by \[acn\] after conversion under one hypothesis.
pub(crate) struct TieQuery<'a> {
    /// ACN/SN3D covariance of the full order, (order+1)² square, row-major.
    pub covariance: &'a [f64],
    pub plan: &'a ConversionPlan,
    /// The component exists (not a known-absent channel).
    pub present: &'a [bool],
    /// The component's input channel carries signal.
    pub live: &'a [bool],
    /// Only orders up to this one are judged.
    pub effective_order: usize,
}

/// A family's prediction: channel a carries coefficient\[a\] · (the signal of group\[a\]).
struct Prediction {
    group: Vec<Option<usize>>,
    coefficient: Vec<f64>,
}

/// Scratch for the models at one order. Building it allocates; [`explain`](Self::explain)
/// allocates only its small per-call tables.
#[derive(Clone, Debug)]
pub(crate) struct GeometricTies {
    order: usize,
    evaluator: ShEvaluator,
    legendre: Vec<f64>,
    sh_values: Vec<f64>,
}

impl GeometricTies {
    pub(crate) fn new(order: usize) -> Self {
        Self {
            order,
            evaluator: ShEvaluator::new(order),
            legendre: vec![0.0; (order + 1) * (order + 2) / 2],
            sh_values: vec![0.0; channel_count(order)],
        }
    }

    /// Marks `explained[k]` for each ACN pair `pairs[k]` = (a, b) that one of the models
    /// explains under this hypothesis. Pairs already marked are left alone. Returns the ACN
    /// of a channel copied into a block of top orders that is otherwise plane waves, if one
    /// was found (its pairs stay unexplained).
    pub(crate) fn explain(
        &mut self,
        search: &mut SteeringFitSearch,
        query: &TieQuery,
        pairs: &[(usize, usize)],
        explained: &mut [bool],
    ) -> Option<usize> {
        if query.effective_order == 0 || explained.iter().all(|&e| e) {
            return None;
        }
        if let Some(prediction) = self.one_axis(query) {
            mark_ties(query, &prediction, pairs, explained);
        }
        if let Some(prediction) = self.one_elevation(query) {
            mark_ties(query, &prediction, pairs, explained);
        }
        if let Some(prediction) = one_azimuth(query) {
            mark_ties(query, &prediction, pairs, explained);
        }
        self.top_order_plane_waves(search, query, pairs, explained)
    }

    /// All sources on one axis ±u: even orders tied to W, odd orders to each other.
    fn one_axis(&mut self, query: &TieQuery) -> Option<Prediction> {
        let order = query.effective_order;
        if !(0..4).all(|a| query.present[a] && query.live[a]) {
            return None;
        }
        let c = |a: usize, b: usize| query.covariance[a * query.plan.channels() + b];
        // First-order block in Cartesian order x (ACN 3), y (ACN 1), z (ACN 2).
        let axes = [3, 1, 2];
        let block = Matrix3::from_fn(|i, j| c(axes[i], axes[j]));
        let eigen = SymmetricEigen::new(block);
        let top = eigen.eigenvalues.imax();
        let axis = eigen.eigenvectors.column(top);
        let unit = [axis[0], axis[1], axis[2]];
        self.evaluator
            .eval(Direction::from_cartesian(unit), &mut self.sh_values);
        let channels = channel_count(order);
        let group = (0..channels).map(|a| Some(order_degree(a).0 % 2)).collect();
        let prediction = Prediction {
            group,
            coefficient: self.sh_values[..channels].to_vec(),
        };
        // X² + Y² + Z² = W² for any incoherent mixture of plane waves (SN3D).
        let first_order = [(1..4).map(|a| c(a, a)).sum::<f64>()];
        let energy = [(
            first_order[0],
            c(0, 0),
            (1..4).map(|a| noise(query, a)).sum(),
        )];
        // u is read from the first-order ties: two of them hold by construction.
        judge(query, &prediction, &energy, 2).then_some(prediction)
    }

    /// All sources at one elevation: equal-m components tied with Legendre ratios.
    fn one_elevation(&mut self, query: &TieQuery) -> Option<Prediction> {
        let order = query.effective_order;
        if !(query.present[0] && query.live[0] && query.present[2] && query.live[2]) {
            return None;
        }
        let c = |a: usize, b: usize| query.covariance[a * query.plan.channels() + b];
        let sin_el = c(0, 2) / c(0, 0);
        if !sin_el.is_finite() || sin_el.abs() > POLE_SIN_ELEVATION {
            return None;
        }
        sn3d_legendre(order, sin_el, &mut self.legendre);
        let legendre = |n: usize, m: usize| self.legendre[n * (n + 1) / 2 + m];
        let channels = channel_count(order);
        let mut group = Vec::with_capacity(channels);
        let mut coefficient = Vec::with_capacity(channels);
        for a in 0..channels {
            let (n, m) = order_degree(a);
            // Groups by degree m, numbered m + order so that they are distinct.
            group.push(Some((m + order as i32) as usize));
            coefficient.push(legendre(n, m.unsigned_abs() as usize));
        }
        let prediction = Prediction { group, coefficient };
        // Each sectoral pair against W: (N P_m^m(sin e))², whatever the azimuths.
        let energy: Vec<(f64, f64, f64)> = (1..=order)
            .filter_map(|m| {
                let pair = [acn(m, m as i32), acn(m, -(m as i32))];
                if !pair.iter().all(|&a| query.present[a] && query.live[a]) {
                    return None;
                }
                let measured = c(pair[0], pair[0]) + c(pair[1], pair[1]);
                let predicted = legendre(m, m).powi(2) * c(0, 0);
                Some((
                    measured,
                    predicted,
                    noise(query, pair[0]) + noise(query, pair[1]),
                ))
            })
            .collect();
        // sin e is read from the Z–W tie.
        judge(query, &prediction, &energy, 1).then_some(prediction)
    }

    /// Blocks of orders n₀..N that are one to three plane waves on their own. When a block
    /// has that few strong components but they do not fit, a channel of a same-level pair (a
    /// copy keeps its source's level) whose removal makes them fit is the culprit: the
    /// block's other pairs are explained and the culprit's ACN is returned. Cost: one
    /// eigen-analysis per block holding an unexplained pair, plus one per candidate.
    fn top_order_plane_waves(
        &mut self,
        search: &mut SteeringFitSearch,
        query: &TieQuery,
        pairs: &[(usize, usize)],
        explained: &mut [bool],
    ) -> Option<usize> {
        let order = query.effective_order;
        let channels = channel_count(order);
        let mut block = vec![false; channels];
        let stride = query.plan.channels();
        let raw_power = |a: usize| query.covariance[a * stride + a] / query.plan.gain(a).powi(2);
        let same_level = |a: usize, b: usize| {
            let (pa, pb) = (raw_power(a), raw_power(b));
            (pa - pb).abs() <= SAME_LEVEL_SHARE * pa.max(pb)
        };
        // n₀ = 0 is the whole covariance: a plane-wave fit there has already cleared every
        // pair, so it only serves the culprit search (a copy inside one to three plane waves).
        for lowest in 0..=order {
            let in_block = |a: usize| a < channels && order_degree(a).0 >= lowest;
            let open = |k: usize| !explained[k] && in_block(pairs[k].0) && in_block(pairs[k].1);
            if !(0..pairs.len()).any(open) {
                continue;
            }
            for (a, slot) in block.iter_mut().enumerate() {
                *slot = query.present[a] && in_block(a);
            }
            let full_order = self.order;
            let mut fits = |block: &[bool]| {
                geometry::analyse(
                    search,
                    &GeometryQuery {
                        covariance: query.covariance,
                        full_order,
                        order,
                        present: block,
                    },
                )
            };
            let fitted = fits(&block);
            if fitted.plane_waves.is_some() && self.incoherent(query, &block, &fitted) {
                for (&(a, b), done) in pairs.iter().zip(explained.iter_mut()) {
                    *done |= in_block(a) && in_block(b);
                }
                return None;
            }
            if fitted.low_rank.is_none() {
                continue;
            }
            let mut candidates: Vec<usize> = (0..pairs.len())
                .filter(|&k| open(k) && same_level(pairs[k].0, pairs[k].1))
                .flat_map(|k| [pairs[k].0, pairs[k].1])
                .collect();
            candidates.sort_unstable();
            candidates.dedup();
            for culprit in candidates {
                block[culprit] = false;
                let masked = fits(&block);
                let fits_without =
                    masked.plane_waves.is_some() && self.incoherent(query, &block, &masked);
                block[culprit] = true;
                if fits_without {
                    for (&(a, b), done) in pairs.iter().zip(explained.iter_mut()) {
                        *done |= in_block(a) && in_block(b) && a != culprit && b != culprit;
                    }
                    return Some(culprit);
                }
            }
        }
        None
    }

    /// Are the plane waves found in `block` mutually incoherent, i.e. is the block's
    /// covariance Y S Yᵀ with S (the sources' covariance, least squares over the block's
    /// steering vectors Y) nearly diagonal? One source is always. The span test alone lets
    /// structured content pass: a copy onto the m = 0 channel of a source moved up and down
    /// leaves a block whose span holds two steering vectors at the source's azimuth.
    fn incoherent(&mut self, query: &TieQuery, block: &[bool], fitted: &Geometry) -> bool {
        let Some(count) = fitted.plane_waves else {
            return false;
        };
        if count < 2 {
            return true;
        }
        let kept: Vec<usize> = (0..block.len()).filter(|&a| block[a]).collect();
        let stride = query.plan.channels();
        let mut steering = DMatrix::zeros(kept.len(), count);
        for (k, &unit) in fitted.directions[..count].iter().enumerate() {
            self.evaluator
                .eval(Direction::from_cartesian(unit), &mut self.sh_values);
            for (i, &a) in kept.iter().enumerate() {
                steering[(i, k)] = self.sh_values[a];
            }
        }
        let covariance = DMatrix::from_fn(kept.len(), kept.len(), |i, j| {
            query.covariance[kept[i] * stride + kept[j]]
        });
        let Some(pseudo_inverse) = steering.clone().pseudo_inverse(1e-12).ok() else {
            return false;
        };
        let sources = &pseudo_inverse * covariance * pseudo_inverse.transpose();
        (0..count).all(|i| {
            sources[(i, i)] > 0.0
                && (0..i).all(|j| {
                    sources[(i, j)].abs()
                        <= MAX_SOURCE_CORRELATION * (sources[(i, i)] * sources[(j, j)]).sqrt()
                })
        })
    }
}

/// All sources on one vertical half-plane pair (azimuths φ and φ + 180°): each (n, m) is tied
/// to (n, −m) with ratio sin(|m|φ)/cos(|m|φ). At first order the only tie, Y against X, is
/// the one φ is read from, so the model needs order 2 or more to predict anything (a first-
/// order copy of X onto Y is exactly a field in the 45° vertical plane).
fn one_azimuth(query: &TieQuery) -> Option<Prediction> {
    let order = query.effective_order;
    if order < 2 || !(usable(query, 1) && usable(query, 3)) {
        return None;
    }
    let c = |a: usize, b: usize| query.covariance[a * query.plan.channels() + b];
    // Principal axis of the horizontal dipoles (X, Y) ∝ (cos φ, sin φ), φ modulo 180°.
    let azimuth_rad = 0.5 * (2.0 * c(1, 3)).atan2(c(3, 3) - c(1, 1));
    let channels = channel_count(order);
    let mut group = Vec::with_capacity(channels);
    let mut coefficient = Vec::with_capacity(channels);
    for a in 0..channels {
        let (n, m) = order_degree(a);
        let degree = m.unsigned_abs() as usize;
        group.push((m != 0).then_some(n * (order + 1) + degree));
        let angle = degree as f64 * azimuth_rad;
        coefficient.push(if m < 0 { angle.sin() } else { angle.cos() });
    }
    let prediction = Prediction { group, coefficient };
    // φ is read from the Y–X tie.
    judge(query, &prediction, &[], 1).then_some(prediction)
}

/// Noise allowance of a converted channel (as in the horizontal test).
fn noise(query: &TieQuery, a: usize) -> f64 {
    HORIZONTAL_NOISE_MEAN_SQUARE * query.plan.gain(a).powi(2)
}

/// Does tie a = r·b hold, with r the ratio of the predicted coefficients (the smaller over
/// the larger, so r is bounded; 0 when both are predicted empty, so the smaller must then
/// be noise)?
fn tie_holds(query: &TieQuery, prediction: &Prediction, a: usize, b: usize) -> bool {
    let (ga, gb) = (prediction.coefficient[a], prediction.coefficient[b]);
    let (a, b, small, large) = if ga.abs() <= gb.abs() {
        (a, b, ga, gb)
    } else {
        (b, a, gb, ga)
    };
    let r = if large.abs() < ZERO_COEFFICIENT {
        0.0
    } else {
        small / large
    };
    let channels = query.plan.channels();
    let c = |i: usize, j: usize| query.covariance[i * channels + j];
    let residual = c(a, a) - 2.0 * r * c(a, b) + r * r * c(b, b);
    let allowance = TIE_RESIDUAL_SHARE * (c(a, a) + r * r * c(b, b))
        + noise(query, a)
        + r * r * noise(query, b);
    residual <= allowance
}

/// Usable component: present and carrying signal.
fn usable(query: &TieQuery, a: usize) -> bool {
    query.present[a] && query.live[a]
}

/// Counts the model's predictions (every tie inside a group, every component of a group
/// predicted empty, the energies given as (measured, predicted, noise)) and says whether at
/// most a quarter of them failed. `read_from` predictions hold by construction (the model's
/// parameters were read from them), so more than that many must have been tested: a model
/// whose other predictions all fall on silent channels has shown nothing.
fn judge(
    query: &TieQuery,
    prediction: &Prediction,
    energies: &[(f64, f64, f64)],
    read_from: usize,
) -> bool {
    let channels = prediction.coefficient.len();
    let c = |i: usize, j: usize| query.covariance[i * query.plan.channels() + j];
    let w = c(0, 0);
    if w.is_nan() || w <= 0.0 {
        return false;
    }
    let mut predictions = 0usize;
    let mut violations = 0usize;
    let mut tally = |held: bool| {
        predictions += 1;
        if !held {
            violations += 1;
        }
    };
    let groups = prediction
        .group
        .iter()
        .flatten()
        .copied()
        .max()
        .map_or(0, |g| g + 1);
    for group in 0..groups {
        let members: Vec<usize> = (0..channels)
            .filter(|&a| prediction.group[a] == Some(group) && query.present[a])
            .collect();
        let largest = members
            .iter()
            .map(|&a| prediction.coefficient[a].abs())
            .fold(0.0, f64::max);
        if largest < ZERO_COEFFICIENT {
            for &a in &members {
                tally(c(a, a) <= ZERO_RESIDUAL_SHARE * w + noise(query, a));
            }
            continue;
        }
        let live: Vec<usize> = members.into_iter().filter(|&a| usable(query, a)).collect();
        for (i, &a) in live.iter().enumerate() {
            for &b in &live[i + 1..] {
                tally(tie_holds(query, prediction, a, b));
            }
        }
    }
    for &(measured, predicted, noise) in energies {
        tally((measured - predicted).abs() <= ENERGY_TOLERANCE_SHARE * predicted + noise);
    }
    predictions > read_from && violations <= (predictions - 1) / 4
}

/// Marks the pairs inside one group of a model that holds whose own tie holds.
fn mark_ties(
    query: &TieQuery,
    prediction: &Prediction,
    pairs: &[(usize, usize)],
    explained: &mut [bool],
) {
    let channels = prediction.coefficient.len();
    for (&(a, b), done) in pairs.iter().zip(explained.iter_mut()) {
        if *done || a >= channels || b >= channels {
            continue;
        }
        let same_group =
            prediction.group[a].is_some() && prediction.group[a] == prediction.group[b];
        let nonzero = prediction.coefficient[a]
            .abs()
            .max(prediction.coefficient[b].abs())
            >= ZERO_COEFFICIENT;
        if same_group && nonzero && tie_holds(query, prediction, a, b) {
            *done = true;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::format::AmbiFormat;
    use crate::sh::sh_sn3d;

    /// Σ_k p_k y(d_k) y(d_k)ᵀ in ACN/SN3D: incoherent plane waves, no noise.
    fn covariance(order: usize, sources: &[(Direction, f64)]) -> Vec<f64> {
        let m = channel_count(order);
        let mut out = vec![0.0; m * m];
        for &(direction, power) in sources {
            let y = sh_sn3d(order, direction);
            for a in 0..m {
                for b in 0..m {
                    out[a * m + b] += power * y[a] * y[b];
                }
            }
        }
        out
    }

    fn query<'a>(covariance: &'a [f64], plan: &'a ConversionPlan, all: &'a [bool]) -> TieQuery<'a> {
        TieQuery {
            covariance,
            plan,
            present: all,
            live: all,
            effective_order: plan.order(),
        }
    }

    #[test]
    fn closed_forms_at_one_elevation_match_the_legendre_ratios() {
        // AmbiX SN3D table (Nachbar et al. 2011, as in DESIGN.md): ACN 2 = sin e · W,
        // ACN 6 = (3 sin² e − 1)/2 · W, ACN 12 = sin e (5 sin² e − 3)/2 · W,
        // ACN 5 = √3 sin e · ACN 1, at any azimuth.
        let order = 3;
        let mut ties = GeometricTies::new(order);
        let plan = ConversionPlan::to_sn3d(AmbiFormat::ACN_SN3D, order).unwrap();
        let all = vec![true; 16];
        for elevation_deg in [20.0, -8.0, 55.0] {
            let sources: Vec<(Direction, f64)> = [60.0, 25.0, -10.0, -60.0]
                .iter()
                .zip([1.0, 0.5, 0.25, 2.0])
                .map(|(&az, p)| (Direction::new(az, elevation_deg), p))
                .collect();
            let c = covariance(order, &sources);
            let prediction = ties
                .one_elevation(&query(&c, &plan, &all))
                .expect("one elevation holds");
            let s = f64::to_radians(elevation_deg).sin();
            let g = &prediction.coefficient;
            assert!((g[2] / g[0] - s).abs() < 1e-12);
            assert!((g[6] / g[0] - (3.0 * s * s - 1.0) / 2.0).abs() < 1e-12);
            assert!((g[12] / g[0] - s * (5.0 * s * s - 3.0) / 2.0).abs() < 1e-12);
            assert!((g[5] / g[1] - 3f64.sqrt() * s).abs() < 1e-12);
            assert_eq!(prediction.group[5], prediction.group[11]);
            assert_ne!(prediction.group[1], prediction.group[3]);
            // A second elevation among them breaks the model.
            let mut mixed = sources.clone();
            mixed.push((Direction::new(0.0, elevation_deg + 15.0), 0.5));
            let c = covariance(order, &mixed);
            assert!(ties.one_elevation(&query(&c, &plan, &all)).is_none());
        }
    }

    #[test]
    fn opposite_directions_differ_by_the_parity_of_the_order() {
        // Y_nm(−u) = (−1)^n Y_nm(u); checked on the AmbiX closed forms at (−120°, −45°) and
        // its antipode (60°, 45°): ACN 1 −√6/4 → +√6/4, ACN 4 3/8 → 3/8.
        let near = sh_sn3d(3, Direction::new(-120.0, -45.0));
        let far = sh_sn3d(3, Direction::new(60.0, 45.0));
        assert!(
            (near[1] + 6f64.sqrt() / 4.0).abs() < 1e-12
                && (far[1] - 6f64.sqrt() / 4.0).abs() < 1e-12
        );
        assert!((near[4] - 0.375).abs() < 1e-12 && (far[4] - 0.375).abs() < 1e-12);
        for a in 0..16 {
            let sign = if order_degree(a).0.is_multiple_of(2) {
                1.0
            } else {
                -1.0
            };
            assert!((far[a] - sign * near[a]).abs() < 1e-12, "acn {a}");
        }
        // The axis model holds for a source and its antipode at any powers, and not for two
        // directions 90° apart.
        let order = 3;
        let mut ties = GeometricTies::new(order);
        let plan = ConversionPlan::to_sn3d(AmbiFormat::ACN_SN3D, order).unwrap();
        let all = vec![true; 16];
        let axis = [
            (Direction::new(80.0, 10.0), 1.0),
            (Direction::new(-100.0, -10.0), 0.3),
        ];
        let c = covariance(order, &axis);
        assert!(ties.one_axis(&query(&c, &plan, &all)).is_some());
        let apart = [
            (Direction::new(80.0, 10.0), 1.0),
            (Direction::new(-10.0, 10.0), 0.3),
        ];
        let c = covariance(order, &apart);
        assert!(ties.one_axis(&query(&c, &plan, &all)).is_none());
    }
}
