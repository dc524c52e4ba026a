//! The eigen-structure of a converted covariance: how well its dominant eigenvectors fit
//! plane-wave steering vectors, and whether the whole covariance is exactly a few plane waves
//! over a low floor (in which case every strong correlation between channels is geometry).

use super::score_constants::{EIGENVALUE_RANGE_DB, MAX_FITTED_EIGENVECTORS};
use super::steering_fit::{SteeringFitSearch, SubspaceQuery};
use crate::sh::{channel_count, n3d_gain, order_degree};
use nalgebra::{DMatrix, SymmetricEigen};

/// The covariance counts as K plane waves when its (K+1)-th eigenvalue is at least this far
/// below its K-th (30 dB). Two channels can only correlate above
/// [`DUPLICATE_CORRELATION`](super::DUPLICATE_CORRELATION) = 0.9999 when the part of each
/// outside their common signal is below about −37 dB (1 − ρ² = 2·10⁻⁴), which needs a gap of
/// that order; 30 dB covers every such case with margin.
pub const PLANE_WAVE_EIGEN_GAP: f64 = 1e-3;

/// At most this many plane waves are matched (and never more than the present channels
/// minus three: with fewer than three equations per direction left, any subspace would
/// contain steering vectors and so "explain" anything, a copied channel included).
pub const MAX_PLANE_WAVES: usize = 3;

/// Each of the K directions must fit the signal subspace to within this (plus the share the
/// floor could explain, (M − K)·λ_{K+1}/λ_K).
pub const PLANE_WAVE_FIT_TOLERANCE: f64 = 1e-3;

/// Found plane waves must be at least this far apart, as a fraction of 180°/(order + 1)
/// (about the half-width of a beam's main lobe).
const PLANE_WAVE_SEPARATION: f64 = 0.5;

/// Eigen-structure evidence under one reading of the stream.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Geometry {
    /// Eigenvalue-weighted steering fit of the dominant eigenvectors, in [0, 1].
    pub steering_fit: f64,
    /// Share of the N3D-coordinate power held by the fitted eigenvectors above the floor.
    pub directional_share: f64,
    /// Some(K): the covariance is K plane waves over a floor [`PLANE_WAVE_EIGEN_GAP`] down.
    pub plane_waves: Option<usize>,
    /// Some(K): the covariance has K ≤ [`MAX_PLANE_WAVES`] strong eigenvalues over such a
    /// floor, whether or not they fit plane waves.
    pub low_rank: Option<usize>,
    /// Unit vectors [x, y, z] of the plane waves found, the first `plane_waves` entries.
    pub directions: [[f64; 3]; MAX_PLANE_WAVES],
}

/// What [`analyse`] looks at.
pub(crate) struct GeometryQuery<'a> {
    /// ACN/SN3D covariance of the full order, (full_order+1)² square, row-major.
    pub covariance: &'a [f64],
    pub full_order: usize,
    /// Orders 0..=`order` are used.
    pub order: usize,
    /// Components that exist, indexed by \[acn\] (at least (order+1)² entries).
    pub present: &'a [bool],
}

/// Eigen-analysis in N3D coordinates (where an isotropic diffuse field is white and so
/// leaves the eigenvectors of the directional part alone), over present components only.
pub(crate) fn analyse(search: &mut SteeringFitSearch, query: &GeometryQuery) -> Geometry {
    let order = query.order;
    if order == 0 {
        return Geometry::default();
    }
    let full = channel_count(query.full_order);
    let channels = channel_count(order);
    let kept: Vec<usize> = (0..channels).filter(|&a| query.present[a]).collect();
    let size = kept.len();
    if size < 2 {
        return Geometry::default();
    }
    let all_present = size == channels;
    let gain = |a: usize| n3d_gain(order_degree(a).0);
    let n3d = DMatrix::from_fn(size, size, |i, j| {
        let (a, b) = (kept[i], kept[j]);
        gain(a) * gain(b) * query.covariance[a * full + b]
    });
    let trace = n3d.trace();
    let Some(eigen) = SymmetricEigen::try_new(n3d, f64::EPSILON, 0) else {
        return Geometry::default();
    };
    let mut by_size: Vec<usize> = (0..size).collect();
    by_size.sort_by(|&a, &b| eigen.eigenvalues[b].total_cmp(&eigen.eigenvalues[a]));
    let value = |rank: usize| eigen.eigenvalues[by_size[rank]];
    let largest = value(0);
    if largest.is_nan() || largest <= 0.0 || trace.is_nan() || trace <= 0.0 {
        return Geometry::default();
    }
    // Eigenvector of `rank` in full ACN coordinates (zero where absent).
    let expand = |rank: usize, out: &mut [f64]| {
        out.fill(0.0);
        let column = eigen.eigenvectors.column(by_size[rank]);
        for (i, &a) in kept.iter().enumerate() {
            out[a] = column[i];
        }
    };
    let present = (!all_present).then_some(&query.present[..channels]);

    // Floor of an isotropic diffuse part: white in N3D coordinates, so the median
    // eigenvalue estimates it while fewer than half the eigenvalues are sources.
    let floor = value(size / 2).max(0.0);
    let range = 10f64.powf(-EIGENVALUE_RANGE_DB / 10.0);
    let mut weighted_fit = 0.0;
    let mut weight_total = 0.0;
    let mut top_fit = 0.0;
    let mut vector = vec![0.0; channels];
    for rank in 0..MAX_FITTED_EIGENVECTORS.min(size) {
        let lambda = value(rank);
        if rank > 0 && lambda < largest * range {
            break;
        }
        expand(rank, &mut vector);
        let (fit, _) = search.fit_subspace(&SubspaceQuery {
            basis: &vector,
            rank: 1,
            order,
            present,
            avoid: &[],
            avoid_cos: 1.0,
        });
        if rank == 0 {
            top_fit = fit;
        }
        let weight = (lambda - floor).max(0.0);
        weighted_fit += weight * fit;
        weight_total += weight;
    }
    let (steering_fit, directional_share) = if weight_total > 0.0 {
        (weighted_fit / weight_total, weight_total / trace)
    } else {
        (top_fit, 0.0)
    };

    // Exactly K plane waves? The first K with a gap below it, then K distinct directions
    // whose steering vectors lie in the span of the top K eigenvectors.
    let most = MAX_PLANE_WAVES.min(size.saturating_sub(3));
    let low_rank = (1..=most).find(|&k| {
        let next = if k < size { value(k).max(0.0) } else { 0.0 };
        next <= PLANE_WAVE_EIGEN_GAP * value(k - 1)
    });
    let mut directions = [[0.0; 3]; MAX_PLANE_WAVES];
    let plane_waves = low_rank.filter(|&k| {
        let next = if k < size { value(k).max(0.0) } else { 0.0 };
        let tolerance = PLANE_WAVE_FIT_TOLERANCE.max((size - k) as f64 * next / value(k - 1));
        let mut basis = vec![0.0; k * channels];
        for (rank, chunk) in basis.chunks_exact_mut(channels).enumerate() {
            expand(rank, chunk);
        }
        let separation_rad = PLANE_WAVE_SEPARATION * std::f64::consts::PI / (order + 1) as f64;
        let mut found: Vec<[f64; 3]> = Vec::with_capacity(k);
        for _ in 0..k {
            let (fit, at) = search.fit_subspace(&SubspaceQuery {
                basis: &basis,
                rank: k,
                order,
                present,
                avoid: &found,
                avoid_cos: separation_rad.cos(),
            });
            if fit < 1.0 - tolerance {
                return false;
            }
            found.push(at);
        }
        directions[..k].copy_from_slice(&found);
        true
    });
    Geometry {
        steering_fit,
        directional_share,
        plane_waves,
        low_rank,
        directions,
    }
}
