//! Beams and steered-beam power maps.
//!
//! - [`weights`]: per-order beam weights (basic, max-rE, in-phase) and their directivity.
//! - [`gaunt`]: real Gaunt coefficients (Politis 2024, arXiv:2407.06847) by exact quadrature.
//! - [`PowerMapPlan`]: fast maps p(d) = v(d)ᵀ Q v(d) expanded once per update and evaluated
//!   separably on the equirectangular grid.
//! - [`display_range`]: the default colour-scale span of a map from the beam's side lobes.
//! - [`direct_power_map`]: direct steering, the reference the fast path is tested against.
//!
//! All signals are ACN/SN3D (see the crate root). A beam with weights g_n steers with the
//! SN3D gains w_n = (2n+1)·g_n / Σ(2k+1)g_k, so its pattern is the published axisymmetric
//! Σ(2n+1)g_n P_n(cos θ), normalised to 1 on axis.

mod direct;
pub mod display_range;
pub mod gaunt;
mod power_map;
pub mod weights;

pub use direct::direct_power_map;
pub use display_range::{default_map_range_db, highest_side_lobe_db};
pub use gaunt::{GauntEntry, GauntTable};
pub use power_map::{MAX_MAP_ORDER, PowerMapError, PowerMapPlan};
pub use weights::{
    BeamKind, beam_weights, directivity_index_db, legendre_p, max_re_root, max_re_root_approx,
    sn3d_steering_gains,
};
