//! Comparing a delivery with its master: time offset, orientation (rotation or mirror), channel
//! faults and detail lost. Both streams are ACN/SN3D here (converted at the input); the
//! `fieldglass compare` command drives these pieces over aligned passes of the two files.

pub mod alignment;
pub mod coherence;
pub mod covariance;
pub mod orientation;
pub mod spatial;

pub use orientation::{MirrorAxis, Orientation, procrustes};
