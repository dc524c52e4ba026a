//! Per-channel meter strip: peaks, RMS, DC, holds, counts and the over-omni flag.

use std::fmt;

use super::true_peak::{CHUNK, TruePeakMeter};
use super::{LEVEL_FLOOR_DB, amplitude_to_db, mean_square_to_db};

/// Where the samples came from, which decides what a sample at full scale (a clip) is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum FullScale {
    /// Floating-point samples: a finite sample with `|x| ≥ 1.0` is at full scale.
    #[default]
    Float,
    /// Integer PCM of `bits` bits (2 … 32), read as `code / 2^(bits−1)`: the highest code then
    /// reads `1 − 2^(1−bits)` (never +1.0), the lowest −1.0. A sample at or above the f32 value of
    /// the highest code, or at or below −1.0, is at full scale (either extreme code). For 8-bit
    /// unsigned PCM the highest code 255 reads 127/128, the same as signed 8-bit; for 32-bit the
    /// highest code rounds to 1.0 in f32.
    Integer { bits: u16 },
}

impl FullScale {
    /// `(high, low)`: a finite sample `x` is at full scale when `x ≥ high` or `x ≤ low`.
    pub fn thresholds(self) -> (f32, f32) {
        match self {
            Self::Float => (1.0, -1.0),
            Self::Integer { bits } => {
                let half = 2f64.powi(i32::from(bits.clamp(2, 32)) - 1);
                // The reader's value of the highest code, rounded to f32 once (exact below
                // 25 bits).
                (((half - 1.0) / half) as f32, -1.0)
            }
        }
    }
}

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
    /// What a sample at full scale (a clip) is: it depends on where the samples came from.
    /// Default [`FullScale::Float`].
    pub full_scale: FullScale,
    /// A channel whose window level exceeds W's by more than this is flagged, in dB.
    /// Default 0.5 dB.
    pub over_omni_tolerance_db: f64,
    /// Measure the window and hold true peaks (a live meter). Off, only the maxima are kept
    /// (since reset and whole programme, both exact), the true-peak filter runs only where a
    /// new maximum is possible, and the window and hold true-peak readings are the floor
    /// ([`LEVEL_FLOOR_DB`]): for a file scan, which reads the maxima alone. Default on.
    pub live_true_peak: bool,
}

impl Default for ChannelMeterConfig {
    fn default() -> Self {
        Self {
            window_ms: 300.0,
            segment_ms: 10.0,
            peak_hold_s: 2.0,
            full_scale: FullScale::Float,
            over_omni_tolerance_db: 0.5,
            live_true_peak: true,
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
    /// Samples at full scale (either sign, see [`FullScale`]) since construction or
    /// `reset_clips`.
    pub clip_count: u64,
    /// Longest run of consecutive samples at full scale (either sign, across blocks) since
    /// construction or `reset_clips`.
    pub longest_clip_run: u64,
    /// NaN or ±∞ samples since construction or `reset_clips`; they are left out of every other
    /// measure (and enter the true-peak and DC filters as 0).
    pub invalid_sample_count: u64,
    /// DC offset, linear (1.0 = full scale): the signal through two cascaded one-pole
    /// low-passes of [`DC_TIME_CONSTANT_S`] each, read at the last segment boundary (see
    /// [`ChannelMeters`]); 0 while the window holds no valid sample.
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
            longest_clip_run: 0,
            invalid_sample_count: 0,
            dc_offset: 0.0,
            over_omni: false,
        }
    }
}

/// Whole-programme totals of one channel (plain data, linear values): everything pushed since
/// construction, [`ChannelMeters::reset`] or [`ChannelMeters::reset_programme`]; never touched by
/// `reset_holds` or `reset_clips`. Exact at any moment, including the samples of a segment not
/// yet complete.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct ProgrammeTotals {
    /// Largest |sample| of the valid samples (1.0 = full scale).
    pub max_sample_peak: f64,
    /// Largest 4× interpolated |sample| (BS.1770-4 Annex 2), never below `max_sample_peak`.
    pub max_true_peak: f64,
    /// Sum of the valid samples.
    pub sum: f64,
    /// Sum of the squares of the valid samples.
    pub sum_squares: f64,
    /// Number of valid (finite) samples.
    pub valid_samples: u64,
    /// Samples at full scale (either sign, see [`FullScale`]).
    pub clip_count: u64,
    /// Longest run of consecutive samples at full scale.
    pub longest_clip_run: u64,
    /// NaN or ±∞ samples.
    pub invalid_samples: u64,
}

impl ProgrammeTotals {
    /// Mean of the valid samples (the whole-programme DC offset), 0 without valid samples.
    pub fn mean(&self) -> f64 {
        if self.valid_samples == 0 {
            0.0
        } else {
            self.sum / self.valid_samples as f64
        }
    }

    /// Mean square of the valid samples, 0 without valid samples.
    pub fn mean_square(&self) -> f64 {
        if self.valid_samples == 0 {
            0.0
        } else {
            self.sum_squares / self.valid_samples as f64
        }
    }

    /// RMS level of the valid samples in dBFS (floored at [`LEVEL_FLOOR_DB`]).
    pub fn rms_dbfs(&self) -> f64 {
        mean_square_to_db(self.mean_square())
    }

    /// `max_sample_peak` in dBFS (floored).
    pub fn sample_peak_dbfs(&self) -> f64 {
        amplitude_to_db(self.max_sample_peak)
    }

    /// `max_true_peak` in dBTP (floored).
    pub fn true_peak_dbtp(&self) -> f64 {
        amplitude_to_db(self.max_true_peak)
    }
}

/// Time constant of each of the two cascaded one-pole low-passes that give the live DC offset,
/// in seconds. Their product response is `1 / (1 + (2π f τ)²)` in amplitude: −88 dB at 25 Hz,
/// −102 dB at 55 Hz, −72 dB at 10 Hz, so bass notes and kick drums leave the reading alone. A
/// step in DC reaches the reading as `1 − e^(−t/τ)·(1 + t/τ)`: within 0.5 dB after 4.7 s and
/// within 1 % after [`DC_SETTLE_S`] (6.7 s).
pub const DC_TIME_CONSTANT_S: f64 = 1.0;
/// Time after a change of DC offset by which the reading is within 1 % of the new value
/// (two cascaded one-poles: `e^(−t/τ)·(1 + t/τ) = 0.01` at `t = 6.64 τ`).
pub const DC_SETTLE_S: f64 = 6.7;

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

/// Counts samples at full scale and the longest run of them. The run in progress carries over
/// from one piece (block, segment) to the next.
#[derive(Debug, Clone, Copy, Default)]
struct ClipCounter {
    count: u64,
    run: u64,
    longest_run: u64,
}

impl ClipCounter {
    #[inline]
    fn sample(&mut self, at_full_scale: bool) {
        if at_full_scale {
            self.count += 1;
            self.run += 1;
            self.longest_run = self.longest_run.max(self.run);
        } else {
            self.run = 0;
        }
    }
}

/// A sum of many f64 terms with Neumaier's compensation, so hours of segment sums stay exact
/// to the last bits.
#[derive(Debug, Clone, Copy, Default)]
struct CompensatedSum {
    sum: f64,
    compensation: f64,
}

impl CompensatedSum {
    fn starting_at(value: f64) -> Self {
        Self {
            sum: value,
            compensation: 0.0,
        }
    }

    fn add(&mut self, x: f64) {
        let t = self.sum + x;
        self.compensation += if self.sum.abs() >= x.abs() {
            (self.sum - t) + x
        } else {
            (x - t) + self.sum
        };
        self.sum = t;
    }

    fn value(&self) -> f64 {
        self.sum + self.compensation
    }
}

/// Whole-programme accumulators of one channel. Peaks and counts are updated per piece; the
/// sums are folded in per completed segment (block-size independent), and the current
/// segment's partial sums are added when read.
#[derive(Debug, Clone, Copy, Default)]
struct Programme {
    max_sample_peak: f64,
    max_true_peak: f64,
    sum: CompensatedSum,
    sum_squares: CompensatedSum,
    valid_samples: u64,
    invalid_samples: u64,
    clips: ClipCounter,
}

/// State of the DC filter: outputs of the first and second one-pole low-pass.
#[derive(Debug, Clone, Copy, Default)]
struct DcFilter {
    first: f64,
    second: f64,
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
    clips: ClipCounter,
    invalid_sample_count: u64,
    dc: DcFilter,
    programme: Programme,
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
            clips: ClipCounter::default(),
            invalid_sample_count: 0,
            dc: DcFilter::default(),
            programme: Programme::default(),
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

/// The DC filter run over one whole segment at once. Two cascaded one-poles
/// `y[n] = a·y[n−1] + α·x[n]`, `z[n] = a·z[n−1] + α·y[n]` (α = 1 − a, a = e^(−1/(τ·fs))) advance
/// over a segment of L samples as
/// `y_L = a^L·y_0 + Σ_p α·a^(L−1−p)·x[p]` and
/// `z_L = a^L·z_0 + L·α·a^L·y_0 + Σ_p α²·(L−p)·a^(L−1−p)·x[p]`,
/// so the per-sample filter is evaluated exactly at segment ends with two weighted sums that
/// vectorise like the other segment sums (no serial recursion per sample).
#[derive(Debug, Clone)]
struct DcWeights {
    /// `α·a^(L−1−p)` and `α²·(L−p)·a^(L−1−p)`, indexed by position p in the segment.
    first: Vec<f64>,
    second: Vec<f64>,
    /// `a^L` and `L·α·a^L`.
    decay: f64,
    cross: f64,
}

impl DcWeights {
    fn new(segment_len: usize, sample_rate_hz: f64) -> Self {
        let a = (-1.0 / (DC_TIME_CONSTANT_S * sample_rate_hz)).exp();
        let alpha = -(-1.0 / (DC_TIME_CONSTANT_S * sample_rate_hz)).exp_m1();
        let len = segment_len as f64;
        let power = |k: usize| a.powi(k as i32);
        Self {
            first: (0..segment_len)
                .map(|p| alpha * power(segment_len - 1 - p))
                .collect(),
            second: (0..segment_len)
                .map(|p| alpha * alpha * (segment_len - p) as f64 * power(segment_len - 1 - p))
                .collect(),
            decay: power(segment_len),
            cross: len * alpha * power(segment_len),
        }
    }

    /// Advances `filter` over a segment whose weighted sums are `first_sum`, `second_sum`.
    fn advance(&self, filter: &mut DcFilter, first_sum: f64, second_sum: f64) {
        let y0 = filter.first;
        filter.second = self.decay * filter.second + self.cross * y0 + second_sum;
        filter.first = self.decay * y0 + first_sum;
    }
}

/// Meters for every channel of a stream (ACN order; channel 0 is W).
///
/// Window measures (sample peak, true peak, RMS, over-omni) cover the last `window_ms`,
/// sliding by one `segment_ms` segment: per segment the meter keeps the sum of squares, the
/// sum, the valid-sample count and the peaks, and the window is the union of the last segments
/// (exact sums, no per-sample ring). Readings change when a segment completes, so they do not
/// depend on the host block size. Before the first window is complete the window covers the
/// segments seen so far.
///
/// The DC offset is not a window mean (a 300 ms mean moves with every bass note): it is the
/// signal through two cascaded one-pole low-passes of [`DC_TIME_CONSTANT_S`] (1 s) each,
/// evaluated exactly at segment ends. It rejects 25 Hz by 88 dB and settles to within 1 % of a
/// new offset in [`DC_SETTLE_S`] (6.7 s). The whole-programme mean is in
/// [`ProgrammeTotals::mean`].
///
/// Clips are samples at full scale of either sign as [`FullScale`] defines them; the strip
/// counts them and the longest run of consecutive ones, and scans a piece for them only when
/// its peak reaches full scale. [`programme`](Self::programme) gives whole-programme totals that
/// no hold or clip reset clears.
///
/// Construction allocates; [`push`](Self::push) never allocates.
#[derive(Debug, Clone)]
pub struct ChannelMeters {
    config: ChannelMeterConfig,
    sample_rate_hz: f64,
    segment_len: usize,
    segment_s: f64,
    dc_weights: DcWeights,
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
        if let FullScale::Integer { bits } = config.full_scale {
            check_config(
                "full_scale bits",
                f64::from(bits),
                2.0,
                32.0,
                "2 to 32 bits",
            )?;
        }
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
            dc_weights: DcWeights::new(segment_len, sample_rate_hz),
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

    /// Actual segment length (the step of every window reading), in seconds.
    pub fn segment_s(&self) -> f64 {
        self.segment_s
    }

    /// Feeds one block: `input[channel]` holds that channel's samples. Channels beyond
    /// [`channels`](Self::channels) are ignored and missing ones are left as they are; each
    /// channel advances by its own slice length. Never allocates.
    pub fn push(&mut self, input: &[&[f32]]) {
        let (strip, channels) = self.split();
        for (state, samples) in channels.iter_mut().zip(input) {
            strip.push_channel(state, samples);
        }
    }

    /// [`push`](Self::push) with the channels spread over the threads of the rayon pool. Each
    /// channel's meters are its own, so the readings are the same bits.
    pub fn push_parallel(&mut self, input: &[&[f32]]) {
        use rayon::prelude::*;
        let (strip, channels) = self.split();
        channels
            .par_iter_mut()
            .zip(input.par_iter())
            .with_min_len(2)
            .for_each(|(state, samples)| strip.push_channel(state, samples));
    }

    /// What the channels share, beside the channels themselves.
    fn split(&mut self) -> (StripConstants<'_>, &mut [ChannelState]) {
        let strip = StripConstants {
            config: &self.config,
            segment_len: self.segment_len,
            segment_s: self.segment_s,
            dc_weights: &self.dc_weights,
        };
        (strip, &mut self.channels)
    }

    /// Snapshot of `channel`, or `None` if there is no such channel.
    pub fn reading(&self, channel: usize) -> Option<ChannelReading> {
        let state = self.channels.get(channel)?;
        let window = &state.window;
        let live_true_peak = |linear: f64| match self.config.live_true_peak {
            true => amplitude_to_db(linear),
            false => LEVEL_FLOOR_DB,
        };
        Some(ChannelReading {
            sample_peak_dbfs: amplitude_to_db(window.sample_peak),
            true_peak_dbtp: live_true_peak(window.true_peak),
            rms_dbfs: mean_square_to_db(state.window_mean_square()),
            peak_hold_dbfs: amplitude_to_db(state.sample_hold.value),
            true_peak_hold_dbtp: live_true_peak(state.true_peak_hold.value),
            max_sample_peak_dbfs: amplitude_to_db(state.max_sample_peak),
            max_true_peak_dbtp: amplitude_to_db(state.max_true_peak),
            clip_count: state.clips.count,
            longest_clip_run: state.clips.longest_run,
            invalid_sample_count: state.invalid_sample_count,
            dc_offset: if window.valid_count == 0 {
                0.0
            } else {
                state.dc.second
            },
            over_omni: self.over_omni(channel),
        })
    }

    /// Whole-programme totals of `channel` (see [`ProgrammeTotals`]), or `None` if there is no
    /// such channel. Includes the segment in progress. Never allocates.
    pub fn programme(&self, channel: usize) -> Option<ProgrammeTotals> {
        let state = self.channels.get(channel)?;
        let p = &state.programme;
        let partial = state.lanes.totals();
        let mut sum = p.sum;
        sum.add(partial.sum);
        let mut sum_squares = p.sum_squares;
        sum_squares.add(partial.sum_squares);
        Some(ProgrammeTotals {
            max_sample_peak: p.max_sample_peak,
            max_true_peak: p.max_true_peak,
            sum: sum.value(),
            sum_squares: sum_squares.value(),
            valid_samples: p.valid_samples,
            clip_count: p.clips.count,
            longest_clip_run: p.clips.longest_run,
            invalid_samples: p.invalid_samples,
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

    /// Clears the live clip counts (count and longest run) and invalid-sample counts of every
    /// channel. The programme totals keep theirs.
    pub fn reset_clips(&mut self) {
        for state in &mut self.channels {
            state.clips = ClipCounter::default();
            state.invalid_sample_count = 0;
        }
    }

    /// Clears peak holds and the since-reset maxima of every channel. The programme totals
    /// keep theirs.
    pub fn reset_holds(&mut self) {
        for state in &mut self.channels {
            state.sample_hold = PeakHold::default();
            state.true_peak_hold = PeakHold::default();
            state.max_sample_peak = 0.0;
            state.max_true_peak = 0.0;
        }
    }

    /// Starts new programme totals on every channel (the live meters carry on). Samples of the
    /// segment in progress that came before this call are left out.
    pub fn reset_programme(&mut self) {
        for state in &mut self.channels {
            let partial = state.lanes.totals();
            state.programme = Programme {
                // Cancels the partial sums, which the segment fold will add again.
                sum: CompensatedSum::starting_at(-partial.sum),
                sum_squares: CompensatedSum::starting_at(-partial.sum_squares),
                ..Programme::default()
            };
        }
    }

    /// Returns every channel to its state after construction.
    pub fn reset(&mut self) {
        for state in &mut self.channels {
            *state = ChannelState::new(state.ring.len());
        }
    }
}

/// What every channel of a strip shares while a block is metered.
#[derive(Clone, Copy)]
struct StripConstants<'a> {
    config: &'a ChannelMeterConfig,
    segment_len: usize,
    segment_s: f64,
    dc_weights: &'a DcWeights,
}

impl StripConstants<'_> {
    /// Meters one channel's samples of a block.
    fn push_channel(&self, state: &mut ChannelState, samples: &[f32]) {
        let (high, low) = self.config.full_scale.thresholds();
        let mut offset = 0;
        while offset < samples.len() {
            // A piece never crosses a segment boundary, so the statistics loop is plain.
            let room = self.segment_len - state.current_fill;
            let n = room.min(samples.len() - offset).min(CHUNK);
            let piece = &samples[offset..offset + n];
            // The true-peak filter already scans the piece: take its sample peak and its
            // count of non-finite samples.
            let peaks = if self.config.live_true_peak {
                state.true_peak.measure(piece)
            } else {
                // Only the maxima are read: below the smaller of them nothing can show.
                let since_reset = state.max_true_peak.max(state.current.true_peak);
                let floor = since_reset.min(state.programme.max_true_peak);
                state.true_peak.measure_above(piece, floor)
            };
            let finite = peaks.invalid_samples == 0;
            state
                .lanes
                .add(piece, state.current_fill, finite, self.dc_weights);
            let (peak, valid) = (peaks.sample_peak, n as u64 - peaks.invalid_samples);
            count_clips(state, piece, peak, high, low);
            let seg = &mut state.current;
            seg.valid_count += valid;
            seg.sample_peak = seg.sample_peak.max(f64::from(peak));
            seg.true_peak = seg.true_peak.max(peaks.true_peak);
            state.invalid_sample_count += peaks.invalid_samples;
            let programme = &mut state.programme;
            programme.max_sample_peak = programme.max_sample_peak.max(f64::from(peak));
            programme.max_true_peak = programme.max_true_peak.max(peaks.true_peak);
            programme.valid_samples += valid;
            programme.invalid_samples += peaks.invalid_samples;
            state.current_fill += n;
            offset += n;
            if state.current_fill == self.segment_len {
                finish_segment(
                    state,
                    self.dc_weights,
                    self.segment_s,
                    self.config.peak_hold_s,
                );
            }
        }
    }
}

/// Counts the samples of `piece` at full scale. Clips are rare: the piece is scanned only when
/// its peak (of finite samples) reaches `high` (≤ 1 ≤ −`low`); otherwise any run ends here.
#[inline]
fn count_clips(state: &mut ChannelState, piece: &[f32], peak: f32, high: f32, low: f32) {
    if peak >= high {
        for &x in piece {
            let at_full_scale = x.is_finite() && (x >= high || x <= low);
            state.clips.sample(at_full_scale);
            state.programme.clips.sample(at_full_scale);
        }
    } else if !piece.is_empty() {
        state.clips.run = 0;
        state.programme.clips.run = 0;
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
    /// Weighted sums for the DC filter (see [`DcWeights`]).
    dc_first: [f64; SUM_LANES],
    dc_second: [f64; SUM_LANES],
}

/// The lanes of a [`SegmentLanes`] added up.
#[derive(Debug, Clone, Copy)]
struct LaneTotals {
    sum_squares: f64,
    sum: f64,
    dc_first: f64,
    dc_second: f64,
}

impl SegmentLanes {
    #[inline(always)]
    fn accumulate(&mut self, lane: usize, x: f64, first_weight: f64, second_weight: f64) {
        self.sum_squares[lane] += x * x;
        self.sum[lane] += x;
        self.dc_first[lane] += first_weight * x;
        self.dc_second[lane] += second_weight * x;
    }

    /// Adds `samples`, the first at position `position` of the segment. Non-finite samples
    /// add 0 (pass `all_finite = true` only when there are none). At most [`CHUNK`] samples.
    fn add(&mut self, samples: &[f32], position: usize, all_finite: bool, dc: &DcWeights) {
        let mut clean = [0.0f32; CHUNK];
        let samples = if all_finite {
            samples
        } else {
            let clean = &mut clean[..samples.len()];
            for (c, &x) in clean.iter_mut().zip(samples) {
                *c = if x.is_finite() { x } else { 0.0 };
            }
            &*clean
        };
        let end = position + samples.len();
        let (first, second) = (&dc.first[position..end], &dc.second[position..end]);
        let head = ((SUM_LANES - position % SUM_LANES) % SUM_LANES).min(samples.len());
        let grouped = (samples.len() - head) / SUM_LANES * SUM_LANES;
        // Head, groups, tail: each lane adds its samples in position order.
        for i in 0..head {
            self.accumulate(
                (position + i) % SUM_LANES,
                f64::from(samples[i]),
                first[i],
                second[i],
            );
        }
        let range = head..head + grouped;
        add_groups(
            self,
            &samples[range.clone()],
            &first[range.clone()],
            &second[range],
        );
        for i in head + grouped..samples.len() {
            self.accumulate(
                (position + i) % SUM_LANES,
                f64::from(samples[i]),
                first[i],
                second[i],
            );
        }
    }

    /// The lanes added up in a fixed order.
    fn totals(&self) -> LaneTotals {
        let fold = |l: &[f64; SUM_LANES]| (l[0] + l[1]) + (l[2] + l[3]);
        LaneTotals {
            sum_squares: fold(&self.sum_squares),
            sum: fold(&self.sum),
            dc_first: fold(&self.dc_first),
            dc_second: fold(&self.dc_second),
        }
    }
}

/// Adds whole groups of [`SUM_LANES`] samples (the first in lane 0). Uses AVX where the CPU
/// has it; both paths do the same multiplies and adds in the same order (no fused
/// multiply-add), so the sums are bit-identical on every x86-64 machine.
fn add_groups(lanes: &mut SegmentLanes, samples: &[f32], first: &[f64], second: &[f64]) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx") {
            // SAFETY: the CPU supports AVX (checked just above).
            return unsafe { add_groups_avx(lanes, samples, first, second) };
        }
    }
    add_groups_portable(lanes, samples, first, second)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
unsafe fn add_groups_avx(lanes: &mut SegmentLanes, samples: &[f32], first: &[f64], second: &[f64]) {
    add_groups_portable(lanes, samples, first, second)
}

/// The accumulators live in locals for the loop, so they stay in registers.
#[inline(always)]
fn add_groups_portable(lanes: &mut SegmentLanes, samples: &[f32], first: &[f64], second: &[f64]) {
    let mut acc = *lanes;
    let groups = samples
        .chunks_exact(SUM_LANES)
        .zip(first.chunks_exact(SUM_LANES))
        .zip(second.chunks_exact(SUM_LANES));
    for ((xs, w1), w2) in groups {
        for lane in 0..SUM_LANES {
            let x = f64::from(xs[lane]);
            acc.sum_squares[lane] += x * x;
            acc.sum[lane] += x;
            acc.dc_first[lane] += w1[lane] * x;
            acc.dc_second[lane] += w2[lane] * x;
        }
    }
    *lanes = acc;
}

fn finish_segment(state: &mut ChannelState, dc: &DcWeights, segment_s: f64, hold_s: f64) {
    let totals = state.lanes.totals();
    state.lanes = SegmentLanes::default();
    state.current.sum_squares = totals.sum_squares;
    state.current.sum = totals.sum;
    dc.advance(&mut state.dc, totals.dc_first, totals.dc_second);
    state.programme.sum.add(totals.sum);
    state.programme.sum_squares.add(totals.sum_squares);
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
