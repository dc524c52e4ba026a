//! # Loudness of W as a mono programme (ITU-R BS.1770-4, EBU R 128 / Tech 3341 semantics)
//!
//! - [`KWeighting`]: the BS.1770 K-weighting pre-filter (high shelf, then the "RLB" high-pass),
//!   processed in `f64`: the Recommendation's coefficient tables at 48 kHz, moved to any other
//!   rate by the matched z-transform so the response matches the 48 kHz one.
//! - [`LoudnessMeter`]: momentary (400 ms), short-term (3 s) and gated integrated loudness of a
//!   single channel (the omni channel W), with the maxima of momentary and short-term loudness
//!   over sliding windows (every 2.5 ms, as EBU Tech 3341's sliding windows ask).
//!
//! Mono programme: `L_K = −0.691 + 10·log10(z)` with `z` the mean square of the K-weighted
//! signal and channel weight 1.0. Values are in LUFS (≡ LKFS).
//!
//! Construction allocates; [`LoudnessMeter::push`] never allocates and uses constant memory
//! whatever the programme length (gating blocks go into a fine histogram, see
//! [`LoudnessMeter::integrated_lufs`]). It runs on the analysis thread, not the audio thread.

mod gating;
mod k_weighting;
mod meter;

pub use gating::{GATING_BIN_WIDTH_LU, GATING_HISTOGRAM_MAX_LUFS, GatingHistogram};
pub use k_weighting::{BiquadCoefficients, KWeighting};
pub use meter::{
    ABSOLUTE_GATE_LUFS, LoudnessError, LoudnessMeter, MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ,
    RELATIVE_GATE_LU, SUB_STEPS_PER_STEP, energy_to_lufs,
};
