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
//! recover ACN/SN3D B-format exactly. This is the tetrahedral A-to-B matrix of Gerzon (1975,
//! "The design of precisely coincident microphone arrays for stereo and surround sound",
//! AES preprint L-20) with the SN3D scaling worked out here for ideal cardioids. A
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
//! Real capsules are not ideal cardioids and are not coincident at high frequencies, so the
//! test is best given a low-band covariance (see
//! [`FormatCheckInput::low_band_covariance`](super::FormatCheckInput::low_band_covariance)).

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

/// Every pair of the four channels must correlate at least this much…
pub const MIN_PAIR_CORRELATION: f64 = 0.0;
/// …and the six correlations must average at least this (a diffuse field gives 2/3; a
/// source opposite one capsule over a bed 10 dB down still about 0.5).
pub const MIN_MEAN_CORRELATION: f64 = 0.4;
/// The four channel levels must lie within this span, dB.
pub const MAX_LEVEL_SPAN_DB: f64 = 20.0;
/// After A-to-B conversion the first-order energy must be within this of W's, dB (0 dB for
/// any incoherent field in SN3D; capsules between subcardioid and supercardioid shift it by
/// up to about ±2 dB at the low end of a real array's band).
pub const MAX_CONVERTED_BALANCE_DB: f64 = 2.0;
/// The A-to-B reading may score up to this many nats below the best B-format reading.
pub const PLAUSIBILITY_MARGIN_NATS: f64 = 1.0;

/// How plausible one reading of a 4×4 covariance is as a first-order field, in nats
/// (0 = perfect): the balance penalty of the format check plus the power share that does
/// not fit plane waves.
pub(crate) fn plausibility(balance_db: f64, geometry: &geometry::Geometry) -> f64 {
    -super::balance_penalty(balance_db)
        - STEERING_FIT_NATS * geometry.directional_share * (1.0 - geometry.steering_fit)
}

/// Whether the 4×4 raw `covariance` (input channel order) looks like capsule signals;
/// `best_b_plausibility` is the best [`plausibility`] of the B-format readings.
pub(crate) fn looks_like_a_format(
    search: &mut SteeringFitSearch,
    covariance: &[f64],
    best_b_plausibility: f64,
) -> bool {
    let r = |i: usize, j: usize| covariance[i * 4 + j];
    let levels: Vec<f64> = (0..4).map(|i| r(i, i)).collect();
    let (lowest, highest) = levels.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), &v| {
        (lo.min(v), hi.max(v))
    });
    if lowest <= 0.0 || 10.0 * (highest / lowest).log10() > MAX_LEVEL_SPAN_DB {
        return false;
    }
    let mut sum = 0.0;
    for i in 0..4 {
        for j in i + 1..4 {
            let correlation = r(i, j) / (levels[i] * levels[j]).sqrt();
            if correlation < MIN_PAIR_CORRELATION {
                return false;
            }
            sum += correlation;
        }
    }
    if sum / 6.0 < MIN_MEAN_CORRELATION {
        return false;
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
        return false;
    }
    let balance_db = 10.0 * (dipoles / w).log10();
    if balance_db.abs() > MAX_CONVERTED_BALANCE_DB {
        return false;
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
    plausibility(balance_db, &geometry) >= best_b_plausibility - PLAUSIBILITY_MARGIN_NATS
}
