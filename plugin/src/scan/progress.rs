//! Progress bar on stderr for long scans, only when stderr is a terminal.

use indicatif::{MultiProgress, ProgressBar, ProgressStyle};
use std::io::IsTerminal;

/// Inputs shorter than this (audio seconds) finish too quickly to need a bar.
const MIN_AUDIO_S_FOR_BAR: f64 = 30.0;

/// A progress bar over audio frames, or nothing.
pub struct Progress {
    bar: Option<ProgressBar>,
}

impl Progress {
    /// A bar for `total_frames` frames if `wanted`, stderr is a terminal and the input is long.
    pub fn new(total_frames: u64, sample_rate_hz: f64, wanted: bool) -> Self {
        let long = total_frames as f64 / sample_rate_hz >= MIN_AUDIO_S_FOR_BAR;
        let bar = (wanted && long && std::io::stderr().is_terminal()).then(|| {
            let bar = ProgressBar::new(total_frames);
            if let Ok(style) = ProgressStyle::with_template(
                "{spinner} scanning [{bar:40}] {percent:>3}% ({eta} left)",
            ) {
                bar.set_style(style.progress_chars("=> "));
            }
            bar
        });
        Self { bar }
    }

    /// A bar for one file of a batch, inside the batch's bars (`None`: no bar).
    pub fn in_batch(bars: Option<&MultiProgress>, name: &str, total_frames: u64) -> Self {
        let bar = bars.map(|bars| {
            let bar = bars.add(ProgressBar::new(total_frames));
            if let Ok(style) =
                ProgressStyle::with_template("  {prefix:30!} [{bar:30}] {percent:>3}%")
            {
                bar.set_style(style.progress_chars("=> "));
            }
            bar.set_prefix(name.to_owned());
            bar
        });
        Self { bar }
    }

    pub fn advance(&mut self, frames: u64) {
        if let Some(bar) = &self.bar {
            bar.inc(frames);
        }
    }

    pub fn finish(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}
