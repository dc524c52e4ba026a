//! The analysis engine: blocks in, snapshots out. One type used identically by the plugin and
//! the scanner.

pub mod analyzer;
pub mod control;
mod diffuseness;
pub mod finding_log;
pub mod findings;
pub mod handoff;
pub mod layout;
mod maps;
pub mod snapshot;
mod thread;

pub use analyzer::{Analyzer, EngineError, StreamSetup};
pub use control::{AnalysisSettings, EngineControl, SnapshotSlot};
pub use finding_log::{FindingLog, LoggedFinding};
pub use layout::{ChannelLayout, LayoutError, MAX_ENGINE_ORDER};
pub use maps::{MUSIC_SIGNAL_FACTOR, MVDR_LOADING};
pub use snapshot::*;
pub use thread::{AnalysisThread, Engine};
