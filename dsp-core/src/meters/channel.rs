//! Per-channel meter strip: peaks, RMS, DC, holds, counts and the over-omni flag.

use std::fmt;

use super::true_peak::{CHUNK, TruePeakMeter};
use super::{LEVEL_FLOOR_DB, amplitude_to_db, mean_square_to_db};

/// Settings of a [`ChannelMeters`] strip.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChannelMeterConfig {
    /// Length of the short sliding window for RMS, DC offset, window peaks and over-omni, in
    /// ms (rounded to whole segments). Default 300 ms.
    pub window_ms: f64,
    /// Resolution of the sliding window, in ms: the window moves by one segment at a time.
    /// Default 10 ms.
    pub segment_ms: f64,
    /// How long a peak hold keeps its highest value, in seconds. Default 2 s.
    pub peak_hold_s: f64,
    /// A sample with `|x| ≥ clip_threshold` counts as a clip. Default 1.0 (0 dBFS).
    pub clip_threshold: f32,
    /// A channel whose window level exceeds W's by more than this is flagged, in dB.
    /// Default 0.5 dB.
    pub over_omni_tolerance_db: f64,
}

impl Default for ChannelMeterConfig {
    fn default() -> Self {
        Self {
            window_ms: 300.0,
            segment_ms: 10.0,
            peak_hold_s: 2.0,
            clip_threshold: 1.0,
            over_omni_tolerance_db: 0.5,
        }
    }
}

/// Error from building a [`ChannelMeters`] strip.
#[derive(Debug, Clone, PartialEq)]
pub enum MeterError {
    /// Channel count 0 (at least W is needed).
    NoChannels,
    /// Sample rate not finite or outside 1 kHz … 1.536 MHz.
    InvalidSampleRate { sample_rate_hz: f64 },
    /// A configuration field is out of range.
    InvalidConfig {
        field: &'static str,
        value: f64,
        expected: &'static str,
    },
}

impl fmt::Display for MeterError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::NoChannels => write!(f, "channel meters need at least one channel (W)"),
            Self::InvalidSampleRate { sample_rate_hz } => write!(
                f,
                "sample rate {sample_rate_hz} Hz is not supported by the meters \
                 (expected 1000 to 1536000 Hz)"
            ),
            Self::InvalidConfig {
                field,
                value,
                expected,
            } => {
                write!(
                    f,
                    "meter setting {field} = {value} is invalid (expected {expected})"
                )
            }
        }
    }
}

impl std::error::Error for MeterError {}

/// Snapshot of one channel's meters (plain data). dB values are floored at
/// [`LEVEL_FLOOR_DB`]; window values cover the last complete window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChannelReading {
    /// Largest |sample| in the window, dBFS.
    pub sample_peak_dbfs: f64,
    /// Largest 4× interpolated |sample| in the window (BS.1770-4 Annex 2), dBTP.
    pub true_peak_dbtp: f64,
    /// RMS over the window, dBFS; a full-scale sine reads −3.01 dBFS (no +3 dB offset).
    pub rms_dbfs: f64,
    /// Sample-peak hold, dBFS: the highest window peak, held for `peak_hold_s`.
    pub peak_hold_dbfs: f64,
    /// True-peak hold, dBTP, held like `peak_hold_dbfs`.
    pub true_peak_hold_dbtp: f64,
    /// Highest sample peak since construction or `reset_holds`, dBFS.
    pub max_sample_peak_dbfs: f64,
    /// Highest true peak since construction or `reset_holds`, dBTP.
    pub max_true_peak_dbtp: f64,
    /// Samples with `|x| ≥ clip_threshold` since construction or `reset_clips`.
    pub clip_count: u64,
    /// NaN or ±∞ samples since construction or `reset_clips`; they are left out of every other
    /// measure (and enter the true-peak filter as 0).
    pub invalid_sample_count: u64,
    /// Mean of the valid samples in the window, linear (1.0 = full scale).
    pub dc_offset: f64,
    /// Window level above W's by more than the tolerance (always false for W itself).
    pub over_omni: bool,
}

impl Default for ChannelReading {
    fn default() -> Self {
        Self {
            sample_peak_dbfs: LEVEL_FLOOR_DB,
            true_peak_dbtp: LEVEL_FLOOR_DB,
            rms_dbfs: LEVEL_FLOOR_DB,
            peak_hold_dbfs: LEVEL_FLOOR_DB,
            true_peak_hold_dbtp: LEVEL_FLOOR_DB,
            max_sample_peak_dbfs: LEVEL_FLOOR_DB,
            max_true_peak_dbtp: LEVEL_FLOOR_DB,
            clip_count: 0,
            invalid_sample_count: 0,
            dc_offset: 0.0,
            over_omni: false,
        }
    }
}

/// Sums over one segment of valid samples.
#[derive(Debug, Clone, Copy, Default)]
struct Segment {
    sum_squares: f64,
    sum: f64,
    valid_count: u64,
    sample_peak: f64,
    true_peak: f64,
}

impl Segment {
    fn merge(&mut self, other: &Segment) {
        self.sum_squares += other.sum_squares;
        self.sum += other.sum;
        self.valid_count += other.valid_count;
        self.sample_peak = self.sample_peak.max(other.sample_peak);
        self.true_peak = self.true_peak.max(other.true_peak);
    }
}

/// A peak that holds its highest value for a while, then drops to the current window peak.
#[derive(Debug, Clone, Copy, Default)]
struct PeakHold {
    value: f64,
    age_s: f64,
}

impl PeakHold {
    fn update(&mut self, segment_peak: f64, window_peak: f64, segment_s: f64, hold_s: f64) {
        if segment_peak >= self.value {
            self.value = segment_peak;
            self.age_s = 0.0;
        } else {
            self.age_s += segment_s;
            if self.age_s >= hold_s {
                self.value = window_peak;
                self.age_s = 0.0;
            }
        }
    }
}

#[derive(Debug, Clone)]
struct ChannelState {
    true_peak: TruePeakMeter,
    current: Segment,
    current_fill: usize,
    /// The current segment's sums, split into [`SUM_LANES`] lanes by sample position within
    /// the segment; folded into `current` in a fixed order when the segment completes.
    lanes: SegmentLanes,
    /// Completed segments, ring of length `segments_per_window`.
    ring: Vec<Segment>,
    ring_next: usize,
    segments_done: u64,
    window: Segment,
    sample_hold: PeakHold,
    true_peak_hold: PeakHold,
    max_sample_peak: f64,
    max_true_peak: f64,
    clip_count: u64,
    invalid_sample_count: u64,
}

impl ChannelState {
    fn new(segments_per_window: usize) -> Self {
        Self {
            true_peak: TruePeakMeter::new(),
            current: Segment::default(),
            current_fill: 0,
            lanes: SegmentLanes::default(),
            ring: vec![Segment::default(); segments_per_window],
            ring_next: 0,
            segments_done: 0,
            window: Segment::default(),
            sample_hold: PeakHold::default(),
            true_peak_hold: PeakHold::default(),
            max_sample_peak: 0.0,
            max_true_peak: 0.0,
            clip_count: 0,
            invalid_sample_count: 0,
        }
    }

    fn window_mean_square(&self) -> f64 {
        if self.window.valid_count == 0 {
            0.0
        } else {
            self.window.sum_squares / self.window.valid_count as f64
        }
    }
}

/// Meters for every channel of a stream (ACN order; channel 0 is W).
///
/// Window measures (sample peak, true peak, RMS, DC offset, over-omni) cover the last
/// `window_ms`, sliding by one `segment_ms` segment: per segment the meter keeps the sum of
/// squares, the sum, the valid-sample count and the peaks, and the window is the union of the
/// last segments (exact sums, no per-sample ring). Readings change when a segment completes,
/// so they do not depend on the host block size. Before the first window is complete the
/// window covers the segments seen so far.
///
/// Construction allocates; [`push`](Self::push) never allocates.
#[derive(Debug, Clone)]
pub struct ChannelMeters {
    config: ChannelMeterConfig,
    sample_rate_hz: f64,
    segment_len: usize,
    segment_s: f64,
    channels: Vec<ChannelState>,
}

impl ChannelMeters {
    /// Builds meters for `channels` channels at `sample_rate_hz`.
    pub fn new(
        channels: usize,
        sample_rate_hz: f64,
        config: ChannelMeterConfig,
    ) -> Result<Self, MeterError> {
        if channels == 0 {
            return Err(MeterError::NoChannels);
        }
        if !(sample_rate_hz.is_finite() && (1_000.0..=1_536_000.0).contains(&sample_rate_hz)) {
            return Err(MeterError::InvalidSampleRate { sample_rate_hz });
        }
        check_config(
            "segment_ms",
            config.segment_ms,
            0.1,
            1_000.0,
            "0.1 to 1000 ms",
        )?;
        check_config(
            "window_ms",
            config.window_ms,
            config.segment_ms,
            60_000.0,
            "segment_ms to 60000 ms",
        )?;
        check_config(
            "peak_hold_s",
            config.peak_hold_s,
            0.0,
            3_600.0,
            "0 to 3600 s",
        )?;
        check_config(
            "clip_threshold",
            f64::from(config.clip_threshold),
            f64::MIN_POSITIVE,
            f64::MAX,
            "a finite value above 0",
        )?;
        check_config(
            "over_omni_tolerance_db",
            config.over_omni_tolerance_db,
            0.0,
            100.0,
            "0 to 100 dB",
        )?;
        let segment_len = ((sample_rate_hz * config.segment_ms / 1000.0).round() as usize).max(1);
        let segments_per_window = ((config.window_ms / config.segment_ms).round() as usize).max(1);
        Ok(Self {
            config,
            sample_rate_hz,
            segment_len,
            segment_s: segment_len as f64 / sample_rate_hz,
            channels: (0..channels)
                .map(|_| ChannelState::new(segments_per_window))
                .collect(),
        })
    }

    /// Number of channels.
    pub fn channels(&self) -> usize {
        self.channels.len()
    }

    /// Sample rate in Hz.
    pub fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    /// The settings in use.
    pub fn config(&self) -> &ChannelMeterConfig {
        &self.config
    }

    /// Actual window length after rounding to whole segments of whole samples, in seconds.
    pub fn window_s(&self) -> f64 {
        self.channels[0].ring.len() as f64 * self.segment_s
    }

    /// Feeds one block: `input[channel]` holds that channel's samples. Channels beyond
    /// [`channels`](Self::channels) are ignored and missing ones are left as they are; each
    /// channel advances by its own slice length. Never allocates.
    pub fn push(&mut self, input: &[&[f32]]) {
        let clip_threshold = self.config.clip_threshold;
        for (state, samples) in self.channels.iter_mut().zip(input) {
            let mut offset = 0;
            while offset < samples.len() {
                // A piece never crosses a segment boundary, so the statistics loop is plain.
                let room = self.segment_len - state.current_fill;
                let n = room.min(samples.len() - offset).min(CHUNK);
                let piece = &samples[offset..offset + n];
                // The true-peak filter already scans the piece: take its sample peak and
                // its count of non-finite samples.
                let peaks = state.true_peak.measure(piece);
                let finite = peaks.invalid_samples == 0;
                state.lanes.add(piece, state.current_fill, finite);
                let seg = &mut state.current;
                let (peak, valid) = (peaks.sample_peak, n as u64 - peaks.invalid_samples);
                let true_peak = peaks.true_peak;
                // Clips are rare: count only when the peak says there is something to count.
                if peak >= clip_threshold {
                    state.clip_count += piece
                        .iter()
                        .filter(|x| x.is_finite() && x.abs() >= clip_threshold)
                        .count() as u64;
                }
                seg.valid_count += valid;
                seg.sample_peak = seg.sample_peak.max(f64::from(peak));
                seg.true_peak = seg.true_peak.max(true_peak);
                state.invalid_sample_count += n as u64 - valid;
                state.current_fill += n;
                offset += n;
                if state.current_fill == self.segment_len {
                    finish_segment(state, self.segment_s, self.config.peak_hold_s);
                }
            }
        }
    }

    /// Snapshot of `channel`, or `None` if there is no such channel.
    pub fn reading(&self, channel: usize) -> Option<ChannelReading> {
        let state = self.channels.get(channel)?;
        let window = &state.window;
        Some(ChannelReading {
            sample_peak_dbfs: amplitude_to_db(window.sample_peak),
            true_peak_dbtp: amplitude_to_db(window.true_peak),
            rms_dbfs: mean_square_to_db(state.window_mean_square()),
            peak_hold_dbfs: amplitude_to_db(state.sample_hold.value),
            true_peak_hold_dbtp: amplitude_to_db(state.true_peak_hold.value),
            max_sample_peak_dbfs: amplitude_to_db(state.max_sample_peak),
            max_true_peak_dbtp: amplitude_to_db(state.max_true_peak),
            clip_count: state.clip_count,
            invalid_sample_count: state.invalid_sample_count,
            dc_offset: if window.valid_count == 0 {
                0.0
            } else {
                window.sum / window.valid_count as f64
            },
            over_omni: self.over_omni(channel),
        })
    }

    /// Writes snapshots of the first `out.len()` channels into `out`; returns how many were
    /// written. Never allocates.
    pub fn read_into(&self, out: &mut [ChannelReading]) -> usize {
        let mut written = 0;
        for (channel, slot) in out.iter_mut().enumerate().take(self.channels.len()) {
            if let Some(reading) = self.reading(channel) {
                *slot = reading;
                written += 1;
            }
        }
        written
    }

    /// Window RMS level of `channel` in dBFS (floored), or `None` if there is no such channel.
    pub fn rms_dbfs(&self, channel: usize) -> Option<f64> {
        self.channels
            .get(channel)
            .map(|s| mean_square_to_db(s.window_mean_square()))
    }

    /// True when `channel`'s window RMS level exceeds W's (channel 0) by more than
    /// `over_omni_tolerance_db`. False for W itself, for unknown channels and when both are
    /// silent.
    pub fn over_omni(&self, channel: usize) -> bool {
        if channel == 0 {
            return false;
        }
        match (self.rms_dbfs(channel), self.rms_dbfs(0)) {
            (Some(level_db), Some(omni_db)) => {
                level_db > omni_db + self.config.over_omni_tolerance_db
            }
            _ => false,
        }
    }

    /// Clears clip and invalid-sample counts of every channel.
    pub fn reset_clips(&mut self) {
        for state in &mut self.channels {
            state.clip_count = 0;
            state.invalid_sample_count = 0;
        }
    }

    /// Clears peak holds and the since-reset maxima of every channel.
    pub fn reset_holds(&mut self) {
        for state in &mut self.channels {
            state.sample_hold = PeakHold::default();
            state.true_peak_hold = PeakHold::default();
            state.max_sample_peak = 0.0;
            state.max_true_peak = 0.0;
        }
    }

    /// Returns every channel to its state after construction.
    pub fn reset(&mut self) {
        for state in &mut self.channels {
            *state = ChannelState::new(state.ring.len());
        }
    }
}

/// Sums over the current segment in [`SUM_LANES`] lanes: the sample at position p of the
/// segment goes to lane p mod 4, so the lanes vectorise and every sum is formed in the same
/// order whatever the block sizes (readings stay bit-identical across host buffer sizes).
const SUM_LANES: usize = 4;

#[derive(Debug, Clone, Copy, Default)]
struct SegmentLanes {
    sum_squares: [f64; SUM_LANES],
    sum: [f64; SUM_LANES],
}

impl SegmentLanes {
    /// Adds `samples`, the first at position `position` of the segment. Non-finite samples
    /// add 0 (pass `all_finite = true` only when there are none).
    fn add(&mut self, samples: &[f32], position: usize, all_finite: bool) {
        let clean = |x: f32| {
            if all_finite || x.is_finite() {
                f64::from(x)
            } else {
                0.0
            }
        };
        let head = (SUM_LANES - position % SUM_LANES) % SUM_LANES;
        let head = head.min(samples.len());
        for (i, &x) in samples[..head].iter().enumerate() {
            let lane = (position + i) % SUM_LANES;
            let x = clean(x);
            self.sum_squares[lane] += x * x;
            self.sum[lane] += x;
        }
        let mut groups = samples[head..].chunks_exact(SUM_LANES);
        for group in &mut groups {
            for (lane, &x) in group.iter().enumerate() {
                let x = clean(x);
                self.sum_squares[lane] += x * x;
                self.sum[lane] += x;
            }
        }
        for (lane, &x) in groups.remainder().iter().enumerate() {
            let x = clean(x);
            self.sum_squares[lane] += x * x;
            self.sum[lane] += x;
        }
    }

    /// Folds the lanes into `segment` (fixed order) and clears them.
    fn fold_into(&mut self, segment: &mut Segment) {
        segment.sum_squares = (self.sum_squares[0] + self.sum_squares[1])
            + (self.sum_squares[2] + self.sum_squares[3]);
        segment.sum = (self.sum[0] + self.sum[1]) + (self.sum[2] + self.sum[3]);
        *self = Self::default();
    }
}

fn finish_segment(state: &mut ChannelState, segment_s: f64, hold_s: f64) {
    state.lanes.fold_into(&mut state.current);
    let segment = state.current;
    let window_len = state.ring.len();
    state.ring[state.ring_next] = segment;
    state.ring_next = (state.ring_next + 1) % window_len;
    state.segments_done += 1;
    state.current = Segment::default();
    state.current_fill = 0;

    let filled = (state.segments_done as usize).min(window_len);
    let mut window = Segment::default();
    for back in 1..=filled {
        window.merge(&state.ring[(state.ring_next + window_len - back) % window_len]);
    }
    state.window = window;

    state
        .sample_hold
        .update(segment.sample_peak, window.sample_peak, segment_s, hold_s);
    state
        .true_peak_hold
        .update(segment.true_peak, window.true_peak, segment_s, hold_s);
    state.max_sample_peak = state.max_sample_peak.max(segment.sample_peak);
    state.max_true_peak = state.max_true_peak.max(segment.true_peak);
}

fn check_config(
    field: &'static str,
    value: f64,
    min: f64,
    max: f64,
    expected: &'static str,
) -> Result<(), MeterError> {
    if value.is_finite() && value >= min && value <= max {
        Ok(())
    } else {
        Err(MeterError::InvalidConfig {
            field,
            value,
            expected,
        })
    }
}
