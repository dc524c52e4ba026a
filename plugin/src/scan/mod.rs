//! The offline scanner behind `fieldglass scan` and `fieldglass demo`.
//!
//! - [`run`] streams a WAV file (or the built-in demo scene) through the analysis engine in
//!   fixed-size blocks and gathers a [`ScanResult`]: whole-file channel figures, W loudness,
//!   format verdict, whole-programme maps and sources per band, and a timeline of the strongest
//!   direction.
//! - [`json`] turns a result into the stable `fieldglass-scan/1` JSON document.
//! - [`report_html`] and [`charts`] write the self-contained HTML report and its PNG pictures.
//! - [`demo`] writes the demo scene to a WAV file.
//! - [`summary`] is the short human summary printed on stdout.

pub mod batch;
pub mod charts;
pub mod demo;
mod font;
pub mod index;
pub mod json;
pub mod progress;
pub mod report_html;
pub mod run;
pub mod summary;

pub use run::{
    AssumedSource, BandResult, ChannelSummary, InputInfo, ScanInput, ScanOptions, ScanResult,
    TimelinePoint, scan, scan_observed,
};

use std::fmt;

/// Exit code for a usage error or an input that cannot be read (clap uses 2 as well).
pub const EXIT_USAGE_OR_INPUT: u8 = 2;
/// Exit code when an output (JSON, report, WAV) cannot be written.
pub const EXIT_OUTPUT: u8 = 1;
/// Exit code when `--fail-on` is met.
pub const EXIT_FAIL_ON: u8 = 3;

/// An error of the command line: one line for stderr and the process exit code.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CliError {
    /// What went wrong and where, without the program-name prefix.
    pub message: String,
    pub exit_code: u8,
}

impl CliError {
    /// Bad usage or an unreadable input (exit code 2).
    pub fn input(message: impl Into<String>) -> Self {
        Self {
            message: message.into(),
            exit_code: EXIT_USAGE_OR_INPUT,
        }
    }

    /// An output that cannot be written (exit code 1).
    pub fn output(message: impl Into<String>) -> Self {
        Self {
            message: message.into(),
            exit_code: EXIT_OUTPUT,
        }
    }
}

impl fmt::Display for CliError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for CliError {}
