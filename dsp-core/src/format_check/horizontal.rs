//! Horizontal-only content, recognised by the horizontal-plane identities of the real SH.
//!
//! At elevation 0 (sin el = 0) the associated Legendre function P_n^|m|(0) vanishes when
//! n + |m| is odd, so those components are zero for every source in the horizontal plane.
//! Components of equal m whose n + |m| is even share the azimuth factor cos(mφ) or sin(|m|φ),
//! so each is a fixed multiple of the sectoral component (n = |m|) of the same m:
//! Y_n^m = r_nm · Y_|m|^m with r_nm = N_n^|m| P_n^|m|(0) / (N_|m|^|m| P_|m|^|m|(0)) in SN3D
//! (e.g. r = −1/2 for ACN 6 against ACN 0, P_2(0) = −1/2). At order N a horizontal scene
//! therefore leaves N(N+1)/2 channels empty and ties N(N−1)/2 more to a sectoral channel,
//! so only 2N+1 independent signals remain; none of this is a fault.
//!
//! The identities hold in ACN/SN3D, so each format hypothesis is judged on the covariance
//! converted under it; a stream read with the wrong normalisation breaks the ratios.

use crate::format::ConversionPlan;
use crate::sh::{acn, channel_count, order_degree, sn3d_legendre};

/// A predicted zero or tie may miss by this share of W's energy (−40 dB): a source 0.5°
/// off the plane leaves ~−41 dB in Z, which still counts as horizontal.
pub const HORIZONTAL_RESIDUAL_SHARE: f64 = 1e-4;

/// A predicted zero or tie may also miss by this much noise per channel, in mean square of
/// the raw channel (−80 dBFS): 16 dB above TPDF-dithered 16-bit PCM, whose noise is q²/4 =
/// 2.3e-10 (−96.3 dBFS; plain rounding q²/12 = 7.8e-11, −101.1 dBFS), with q = 2⁻¹⁵
/// [computed; the q²/4 total for TPDF dither of 2 LSB peak-to-peak is the usual result,
/// Lipshitz, Wannamaker & Vanderkooy 1992, from memory]. Noise-shaped dither puts more
/// total power in the top octaves, hence the margin.
pub const HORIZONTAL_NOISE_MEAN_SQUARE: f64 = 1e-8;

/// The first-order horizontal components (ACN 1 and 3) must hold at least this share of W's
/// energy: an omni-only stream is not a horizontal scene. A horizontal plane wave puts all
/// of W's energy there (Y² + X² = 1 at elevation 0, SN3D).
const MIN_FIRST_ORDER_SHARE: f64 = 0.01;

/// …and at least this multiple (20 dB) of the mean energy left in the predicted-empty
/// channels that count as empty, so that a full-sphere stream near the noise floor, whose height channels fall
/// inside the noise allowance, is not called horizontal (its Z still carries a third of
/// its first-order energy), while a quiet horizontal mix is.
const MIN_CONTRAST_TO_HEIGHT: f64 = 100.0;

/// With first order only there are no ties, just Z = 0, which a dead Z in a full-sphere
/// scene also satisfies. Then the horizontal first-order energy must also match W's within
/// this, dB: Y² + X² = W² for every plane wave at elevation 0 (SN3D), so for any incoherent
/// horizontal mixture, while a full-sphere diffuse field gives 2/3 (−1.76 dB). Coherent
/// sources (one signal at two directions) can fall below; such first-order streams get a
/// silent-channel warning for Z. Tight, because the identity is exact: a plane wave 20°
/// above the plane whose Z died reads −0.54 dB and must stay a dead Z.
pub const FIRST_ORDER_BALANCE_TOLERANCE_DB: f64 = 0.25;

/// A predicted tie: `acn` = `ratio` · `sectoral` at elevation 0.
#[derive(Clone, Debug)]
struct Tie {
    acn: usize,
    sectoral: usize,
    ratio: f64,
}

/// The identities for one order.
#[derive(Clone, Debug)]
pub(crate) struct HorizontalIdentities {
    /// ACN with n + |m| odd, ascending.
    zero: Vec<usize>,
    /// ACN with n > |m| and n + |m| even, with their sectoral partner.
    ties: Vec<Tie>,
}

/// What the covariance says under one hypothesis.
#[derive(Clone, Debug, Default)]
pub(crate) struct HorizontalReading {
    /// The scene is horizontal-only.
    pub horizontal: bool,
    /// Predictions that failed.
    pub violations: usize,
    /// Σ residual / Σ allowance over the predictions tested (smaller is a better match).
    pub mismatch: f64,
    /// ACN predicted and found empty.
    pub zero_held: Vec<usize>,
    /// Groups of ACN (sectoral first) found proportional as predicted, one per degree m.
    pub groups: Vec<Vec<usize>>,
}

/// Inputs of [`HorizontalIdentities::judge`], all indexed by \[acn\] after conversion.
pub(crate) struct HorizontalQuery<'a> {
    /// Converted (ACN/SN3D) covariance, (order+1)² square, row-major.
    pub covariance: &'a [f64],
    pub plan: &'a ConversionPlan,
    /// The component exists in the stream (not a known-absent channel).
    pub present: &'a [bool],
    /// The component's input channel carries signal.
    pub live: &'a [bool],
    /// Only orders up to this one are judged.
    pub effective_order: usize,
}

impl HorizontalIdentities {
    pub(crate) fn new(order: usize) -> Self {
        let mut legendre = vec![0.0; (order + 1) * (order + 2) / 2];
        sn3d_legendre(order, 0.0, &mut legendre);
        let at_equator = |n: usize, m: usize| legendre[n * (n + 1) / 2 + m];
        let mut zero = Vec::new();
        let mut ties = Vec::new();
        for index in 0..channel_count(order) {
            let (n, m) = order_degree(index);
            let degree = m.unsigned_abs() as usize;
            if (n + degree) % 2 == 1 {
                zero.push(index);
            } else if n > degree {
                ties.push(Tie {
                    acn: index,
                    sectoral: acn(degree, m),
                    ratio: at_equator(n, degree) / at_equator(degree, degree),
                });
            }
        }
        Self { zero, ties }
    }

    /// Judges the predictions up to the effective order. Ties with a silent or absent
    /// member are skipped (a dead in-plane channel is a fault reported elsewhere, not a
    /// broken identity); when at least one tie holds, up to a quarter of the remaining
    /// predictions may fail (a copied or corrupted channel) and those channels are then not
    /// exempted.
    pub(crate) fn judge(&self, query: &HorizontalQuery) -> HorizontalReading {
        let order = query.effective_order;
        let mut reading = HorizontalReading::default();
        if order == 0 {
            return reading;
        }
        let channels = query.plan.channels();
        let c = |a: usize, b: usize| query.covariance[a * channels + b];
        let w = c(0, 0);
        let noise = |a: usize| HORIZONTAL_NOISE_MEAN_SQUARE * query.plan.gain(a).powi(2);
        let in_range = |a: usize| order_degree(a).0 <= order;
        let mut predictions = 0;
        let mut residual_total = 0.0;
        let mut allowance_total = 0.0;
        let mut judge = |residual: f64, allowance: f64, reading: &mut HorizontalReading| {
            predictions += 1;
            residual_total += residual.max(0.0);
            allowance_total += allowance;
            let held = residual <= allowance;
            if !held {
                reading.violations += 1;
            }
            held
        };
        let mut height_energy = 0.0;
        let mut height_channels = 0;
        for &a in self
            .zero
            .iter()
            .filter(|&&a| in_range(a) && query.present[a])
        {
            let allowance = HORIZONTAL_RESIDUAL_SHARE * w + noise(a);
            if judge(c(a, a), allowance, &mut reading) {
                reading.zero_held.push(a);
                height_energy += c(a, a).max(0.0);
                height_channels += 1;
            }
        }
        let mut groups: Vec<Vec<usize>> = Vec::new();
        for tie in self.ties.iter().filter(|t| in_range(t.acn)) {
            let (a, s, k) = (tie.acn, tie.sectoral, tie.ratio);
            let usable = |x: usize| query.present[x] && query.live[x];
            if !usable(a) || !usable(s) {
                continue;
            }
            let residual = c(a, a) - 2.0 * k * c(a, s) + k * k * c(s, s);
            let allowance =
                HORIZONTAL_RESIDUAL_SHARE * w * (1.0 + k * k) + noise(a) + k * k * noise(s);
            if judge(residual, allowance, &mut reading) {
                match groups.iter_mut().find(|g| g[0] == s) {
                    Some(group) => group.push(a),
                    None => groups.push(vec![s, a]),
                }
            }
        }
        reading.groups = groups;
        reading.mismatch = if allowance_total > 0.0 {
            residual_total / allowance_total
        } else {
            f64::INFINITY
        };
        let first_order: f64 = [1, 3]
            .iter()
            .filter(|&&a| query.present[a])
            .map(|&a| c(a, a))
            .sum();
        let mean_height = height_energy / height_channels.max(1) as f64;
        let contrast = first_order >= MIN_FIRST_ORDER_SHARE * w
            && first_order >= MIN_CONTRAST_TO_HEIGHT * mean_height;
        let balanced = order >= 2
            || (10.0 * (first_order / w).log10()).abs() <= FIRST_ORDER_BALANCE_TOLERANCE_DB;
        // Broken predictions are tolerated only next to ties that hold: empty channels alone
        // (a mixed-order or band-limited stream) are no evidence of horizontal content.
        let allowed = if reading.groups.is_empty() {
            0
        } else {
            (predictions - 1) / 4
        };
        reading.horizontal =
            predictions > 0 && reading.violations <= allowed && contrast && balanced;
        reading
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sh::sh_sn3d;
    use crate::sphere::Direction;

    #[test]
    fn predictions_match_the_harmonics_at_elevation_zero() {
        // Check of the identities themselves against direct evaluation of the SH.
        let order = 5;
        let identities = HorizontalIdentities::new(order);
        for azimuth_deg in [-170.0, -61.0, 0.0, 33.0, 95.0] {
            let y = sh_sn3d(order, Direction::new(azimuth_deg, 0.0));
            for &a in &identities.zero {
                assert!(y[a].abs() < 1e-12, "acn {a}: {}", y[a]);
            }
            for tie in &identities.ties {
                assert!((y[tie.acn] - tie.ratio * y[tie.sectoral]).abs() < 1e-12);
            }
        }
        // P_2(0) = −1/2 from P_2(x) = (3x² − 1)/2: ACN 6 = −W/2 at elevation 0.
        let tie6 = identities.ties.iter().find(|t| t.acn == 6).unwrap();
        assert_eq!(tie6.sectoral, 0);
        assert!((tie6.ratio + 0.5).abs() < 1e-15);
        // N(N+1)/2 zeros and N(N−1)/2 ties: order 3 has 6 and 3.
        let three = HorizontalIdentities::new(3);
        assert_eq!(three.zero, vec![2, 5, 7, 10, 12, 14]);
        let tied: Vec<(usize, usize)> = three.ties.iter().map(|t| (t.sectoral, t.acn)).collect();
        assert_eq!(tied, vec![(0, 6), (1, 11), (3, 13)]);
    }
}
