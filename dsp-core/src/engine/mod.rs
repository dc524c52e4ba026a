//! The analysis engine: blocks in, snapshots out. One type used identically by the plugin and
//! the scanner.

pub mod control;
pub mod handoff;
pub mod snapshot;

pub use control::{AnalysisSettings, EngineControl, SnapshotSlot};
pub use snapshot::*;
