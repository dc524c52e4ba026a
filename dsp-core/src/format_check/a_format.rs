//! A first-order recording handed over as its four capsule signals (A-format) instead of
//! B-format.
//!
//! # The relation
//! A tetrahedral array of first-order cardioid capsules pointing at FLU, FRD, BLD, BRU
//! (front-left-up, front-right-down, back-left-down, back-right-up; unit vectors d_i =
//! (±1, ±1, ±1)/√3) gives, for a plane wave from u, the capsule signals
//! a_i = ½(W + d_i·V) with W the pressure and V = u·W the first-order (SN3D) part. As
//! Σ d_i = 0 and Σ d_i d_iᵀ = (4/3)·I, the sums and differences
//! W = ½(FLU + FRD + BLD + BRU), X = (√3/2)(FLU + FRD − BLD − BRU),
//! Y = (√3/2)(FLU − FRD + BLD − BRU), Z = (√3/2)(FLU − FRD − BLD + BRU)
//! recover ACN/SN3D B-format exactly. These are the sums and differences of Gerzon's
//! tetrahedral (Soundfield) A-to-B relation (M. A. Gerzon, "The design of precisely
//! coincident microphone arrays for stereo and surround sound", AES 50th Convention, 1975;
//! also Zotter & Frank, *Ambisonics*, 2019, on first-order microphones; both from memory)
//! with the SN3D scaling worked out here for ideal cardioids. A
//! permutation of the capsules only rotates or mirrors the result (the permutations of a
//! tetrahedron's vertices are its symmetries), so the capsule order need not be known.
//!
//! # The test
//! Capsule signals read as W, Y, Z, X look like four channels of similar level, all
//! strongly and positively correlated (2/3 for a diffuse field, up to 1 for one source),
//! which a W with three dipoles only shows for a source near one octant diagonal. The check
//! asks for that pattern and then for the A-to-B reading to be at least as plausible a
//! physical field as the best B-format reading: per-order balance near 0 dB in SN3D and,
//! for directional content, plane-wave eigenvectors. A B-format of a single source or of a
//! diffuse field fails one or the other.
//!
//! # Known ambiguity
//! A close source's proximity effect raises its dipoles above W at low frequencies. A
//! B-format dominated by that (a bass-only source within about a metre) whose source lies
//! in the octant where X, Y and Z are all positive reads, from one covariance, exactly like
//! capsule signals of a wave from the opposite side: a pure dipole along the diagonal *is*
//! such a capsule set (one capsule silent, three equal). The proximity effect fades above
//! ~200 Hz while capsule signals keep their pattern up to where the capsules stop being
//! coincident, so when the caller gives a mid-band covariance
//! ([`FormatCheckInput::mid_band_covariance`](super::FormatCheckInput::mid_band_covariance))
//! the pattern must hold there too.

use super::geometry::{self, GeometryQuery};
use super::score_constants::STEERING_FIT_NATS;
use super::steering_fit::SteeringFitSearch;

/// Rows W, Y, Z, X (ACN/SN3D); columns the capsules FLU, FRD, BLD, BRU.
pub const TETRAHEDRAL_A_TO_B_SN3D: [[f64; 4]; 4] = {
    const H: f64 = 0.866_025_403_784_438_6; // √3/2
    [
        [0.5, 0.5, 0.5, 0.5],
        [H, -H, H, -H],
        [H, -H, -H, H],
        [H, H, -H, -H],
    ]
};

/// No pair of the four channels may correlate below this (a capsule at the null of a bare
/// plane wave carries only noise, so its correlations sit near 0)…
pub const MIN_PAIR_CORRELATION: f64 = -0.1;
/// …and the six correlations must average at least this (a diffuse field gives 2/3; a
/// source opposite one capsule, bare or over a bed 10 dB down, about 0.5).
pub const MIN_MEAN_CORRELATION: f64 = 0.4;
/// The four channel levels must lie within this span, dB. "Similar level" only in a loose
/// sense: a bare plane wave near one capsule's null leaves that capsule 30–45 dB down.
pub const MAX_LEVEL_SPAN_DB: f64 = 50.0;
/// After A-to-B conversion the first-order energy must be within this of W's, dB (0 dB for
/// any incoherent field in SN3D; capsules between subcardioid and supercardioid shift it by
/// up to about ±2 dB).
pub const MAX_CONVERTED_BALANCE_DB: f64 = 2.0;
/// The A-to-B reading must be a plausible field on its own: the plausibility (balance penalty plus unfitted share, nats) at least this.
pub const MIN_PLAUSIBILITY_NATS: f64 = -2.0;
/// …and may score at most this many nats below the best B-format reading (a diffuse field
/// of capsule signals also reads as an N3D field with one source on an octant diagonal,
/// equally plausible, so the two tie).
pub const PLAUSIBILITY_MARGIN_NATS: f64 = 1.0;

/// How plausible one reading of a 4×4 covariance is as a first-order field, in nats
/// (0 = perfect): the balance penalty of the format check plus the power share that does
/// not fit plane waves.
pub(crate) fn plausibility(balance_db: f64, geometry: &geometry::Geometry) -> f64 {
    -super::balance_penalty(balance_db)
        - STEERING_FIT_NATS * geometry.directional_share * (1.0 - geometry.steering_fit)
}

/// Plausibility of the 4×4 raw `covariance` (input channel order) read as capsule signals,
/// or None when it lacks the pattern (similar levels, strong positive correlations, a
/// first-order balance near 0 dB after A-to-B conversion).
pub(crate) fn capsule_reading(search: &mut SteeringFitSearch, covariance: &[f64]) -> Option<f64> {
    let r = |i: usize, j: usize| covariance[i * 4 + j];
    let levels: Vec<f64> = (0..4).map(|i| r(i, i)).collect();
    let (lowest, highest) = levels.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), &v| {
        (lo.min(v), hi.max(v))
    });
    if lowest <= 0.0 || 10.0 * (highest / lowest).log10() > MAX_LEVEL_SPAN_DB {
        return None;
    }
    let mut sum = 0.0;
    for i in 0..4 {
        for j in i + 1..4 {
            let correlation = r(i, j) / (levels[i] * levels[j]).sqrt();
            if correlation < MIN_PAIR_CORRELATION {
                return None;
            }
            sum += correlation;
        }
    }
    if sum / 6.0 < MIN_MEAN_CORRELATION {
        return None;
    }
    let t = &TETRAHEDRAL_A_TO_B_SN3D;
    let mut converted = [0.0; 16];
    for a in 0..4 {
        for b in 0..4 {
            let mut value = 0.0;
            for i in 0..4 {
                for j in 0..4 {
                    value += t[a][i] * r(i, j) * t[b][j];
                }
            }
            converted[a * 4 + b] = value;
        }
    }
    let w = converted[0];
    let dipoles = converted[5] + converted[10] + converted[15];
    if w <= 0.0 || dipoles <= 0.0 {
        return None;
    }
    let balance_db = 10.0 * (dipoles / w).log10();
    if balance_db.abs() > MAX_CONVERTED_BALANCE_DB {
        return None;
    }
    let geometry = geometry::analyse(
        search,
        &GeometryQuery {
            covariance: &converted,
            full_order: 1,
            order: 1,
            present: &[true; 4],
        },
    );
    let score = plausibility(balance_db, &geometry);
    (score >= MIN_PLAUSIBILITY_NATS).then_some(score)
}
