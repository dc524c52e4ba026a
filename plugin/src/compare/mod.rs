//! `fieldglass compare REFERENCE CANDIDATE`: does a delivery match its master?
//!
//! - [`run`] streams both inputs (after converting each to ACN/SN3D) and gathers a
//!   [`CompareResult`]: offset, rotation or mirror, channel faults, level and coherence per
//!   order and band, both scans' maps, sources and W loudness.
//! - [`findings`] turns it into findings with stable codes.
//! - [`json`] writes the `fieldglass-compare/1` document (docs/compare-json.md).
//! - [`summary`] is the short human summary on stdout; [`report`] the HTML report.

pub mod findings;
pub mod json;
pub mod report;
pub mod run;
pub mod summary;

pub use findings::{CompareCode, CompareFinding};
pub use run::{CompareOptions, CompareResult, Thresholds, compare};
