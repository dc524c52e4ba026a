//! Momentary, short-term and integrated loudness of a mono programme.

use std::fmt;

use super::gating::GatingHistogram;
use super::k_weighting::KWeighting;

/// Absolute gate of BS.1770-4 §2.3, in LUFS (blocks must be louder than this).
pub const ABSOLUTE_GATE_LUFS: f64 = -70.0;
/// Relative gate of BS.1770-4 §2.3, in LU below the absolute-gated loudness.
pub const RELATIVE_GATE_LU: f64 = -10.0;
/// Lowest sample rate accepted, in Hz.
pub const MIN_SAMPLE_RATE_HZ: f64 = 8_000.0;
/// Highest sample rate accepted, in Hz.
pub const MAX_SAMPLE_RATE_HZ: f64 = 768_000.0;

/// The loudness constant of BS.1770 eq. 2, in dB.
const LOUDNESS_OFFSET_DB: f64 = -0.691;
/// Update step: 100 ms (the 75 % overlap of 400 ms gating blocks; also the 10 Hz refresh of
/// EBU momentary and short-term loudness).
const STEP_S: f64 = 0.1;
/// Momentary window = 4 steps (400 ms); short-term window = 30 steps (3 s).
const MOMENTARY_STEPS: usize = 4;
const SHORT_TERM_STEPS: usize = 30;

/// Error from building a loudness filter or meter.
#[derive(Debug, Clone, PartialEq)]
pub enum LoudnessError {
    /// The sample rate is not finite or outside 8 kHz … 768 kHz.
    InvalidSampleRate { sample_rate_hz: f64 },
}

impl fmt::Display for LoudnessError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::InvalidSampleRate { sample_rate_hz } => write!(
                f,
                "sample rate {sample_rate_hz} Hz is not supported for loudness \
                 (expected {MIN_SAMPLE_RATE_HZ} to {MAX_SAMPLE_RATE_HZ} Hz)"
            ),
        }
    }
}

impl std::error::Error for LoudnessError {}

pub(super) fn check_sample_rate(sample_rate_hz: f64) -> Result<(), LoudnessError> {
    if sample_rate_hz.is_finite()
        && (MIN_SAMPLE_RATE_HZ..=MAX_SAMPLE_RATE_HZ).contains(&sample_rate_hz)
    {
        Ok(())
    } else {
        Err(LoudnessError::InvalidSampleRate { sample_rate_hz })
    }
}

/// Loudness in LUFS of a mono mean-square K-weighted energy `z`: `−0.691 + 10·log10(z)`.
/// Returns −∞ for `z = 0`.
pub fn energy_to_lufs(mean_square: f64) -> f64 {
    LOUDNESS_OFFSET_DB + 10.0 * mean_square.log10()
}

/// As [`energy_to_lufs`], but `None` for zero (or invalid) energy.
pub(super) fn lufs_of_energy(mean_square: f64) -> Option<f64> {
    (mean_square > 0.0 && mean_square.is_finite()).then(|| energy_to_lufs(mean_square))
}

/// Loudness meter for one channel (W) as a mono programme, after ITU-R BS.1770-4 with EBU
/// R 128 time scales.
///
/// Audio is K-weighted and its energy summed in 100 ms steps (`round(0.1·fs)` samples; exactly
/// 100 ms at 44.1, 48, 96, 192 kHz …). Every completed step updates:
/// - momentary loudness: the last 4 steps (400 ms);
/// - short-term loudness: the last 30 steps (3 s);
/// - one 400 ms gating block (the last 4 steps), so blocks overlap by 75 %; it goes into a
///   [`GatingHistogram`] for integrated loudness.
///
/// Readings are `None` while undefined: before the first full window, when the window holds
/// digital silence, or (integrated) when every block is gated out. Non-finite input samples are
/// counted and treated as 0, so they never poison the filter state.
///
/// Memory is fixed at construction; [`push`](Self::push) never allocates.
#[derive(Debug, Clone)]
pub struct LoudnessMeter {
    sample_rate_hz: f64,
    filter: KWeighting,
    step_len: usize,
    step_fill: usize,
    step_energy_sum: f64,
    /// Sum of squares of the last completed steps, ring indexed by `steps_done % 30`.
    step_energy_sums: [f64; SHORT_TERM_STEPS],
    steps_done: u64,
    momentary_mean_square: Option<f64>,
    short_term_mean_square: Option<f64>,
    max_momentary_mean_square: Option<f64>,
    max_short_term_mean_square: Option<f64>,
    histogram: GatingHistogram,
    invalid_sample_count: u64,
}

impl LoudnessMeter {
    /// Builds a meter for `sample_rate_hz` (8 kHz … 768 kHz).
    pub fn new(sample_rate_hz: f64) -> Result<Self, LoudnessError> {
        let filter = KWeighting::new(sample_rate_hz)?;
        let step_len = ((sample_rate_hz * STEP_S).round() as usize).max(1);
        Ok(Self {
            sample_rate_hz,
            filter,
            step_len,
            step_fill: 0,
            step_energy_sum: 0.0,
            step_energy_sums: [0.0; SHORT_TERM_STEPS],
            steps_done: 0,
            momentary_mean_square: None,
            short_term_mean_square: None,
            max_momentary_mean_square: None,
            max_short_term_mean_square: None,
            histogram: GatingHistogram::new(),
            invalid_sample_count: 0,
        })
    }

    /// Sample rate in Hz.
    pub fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    /// Samples per 100 ms update step.
    pub fn step_len(&self) -> usize {
        self.step_len
    }

    /// Feeds a block of W samples (any length, including 0). Never allocates.
    pub fn push(&mut self, samples: &[f32]) {
        for &sample in samples {
            let x = if sample.is_finite() {
                f64::from(sample)
            } else {
                self.invalid_sample_count += 1;
                0.0
            };
            let y = self.filter.process_sample(x);
            self.step_energy_sum += y * y;
            self.step_fill += 1;
            if self.step_fill == self.step_len {
                self.finish_step();
            }
        }
    }

    fn finish_step(&mut self) {
        let slot = (self.steps_done % SHORT_TERM_STEPS as u64) as usize;
        self.step_energy_sums[slot] = self.step_energy_sum;
        self.steps_done += 1;
        self.step_energy_sum = 0.0;
        self.step_fill = 0;

        if self.steps_done >= MOMENTARY_STEPS as u64 {
            let mean_square = self.mean_square_of_last_steps(MOMENTARY_STEPS);
            self.histogram.add_block(mean_square);
            self.momentary_mean_square = Some(mean_square);
            self.max_momentary_mean_square = Some(
                self.max_momentary_mean_square
                    .map_or(mean_square, |m| m.max(mean_square)),
            );
        }
        if self.steps_done >= SHORT_TERM_STEPS as u64 {
            let mean_square = self.mean_square_of_last_steps(SHORT_TERM_STEPS);
            self.short_term_mean_square = Some(mean_square);
            self.max_short_term_mean_square = Some(
                self.max_short_term_mean_square
                    .map_or(mean_square, |m| m.max(mean_square)),
            );
        }
    }

    fn mean_square_of_last_steps(&self, steps: usize) -> f64 {
        let newest = ((self.steps_done - 1) % SHORT_TERM_STEPS as u64) as usize;
        let sum: f64 = (0..steps)
            .map(|back| {
                self.step_energy_sums[(newest + SHORT_TERM_STEPS - back) % SHORT_TERM_STEPS]
            })
            .sum();
        sum / (steps * self.step_len) as f64
    }

    /// Momentary loudness (last 400 ms) in LUFS.
    pub fn momentary_lufs(&self) -> Option<f64> {
        self.momentary_mean_square.and_then(lufs_of_energy)
    }

    /// Short-term loudness (last 3 s) in LUFS.
    pub fn short_term_lufs(&self) -> Option<f64> {
        self.short_term_mean_square.and_then(lufs_of_energy)
    }

    /// Highest momentary loudness since construction or [`reset`](Self::reset), in LUFS.
    pub fn max_momentary_lufs(&self) -> Option<f64> {
        self.max_momentary_mean_square.and_then(lufs_of_energy)
    }

    /// Highest short-term loudness since construction or [`reset`](Self::reset), in LUFS.
    pub fn max_short_term_lufs(&self) -> Option<f64> {
        self.max_short_term_mean_square.and_then(lufs_of_energy)
    }

    /// Gated integrated loudness (BS.1770-4 §2.3: 400 ms blocks with 75 % overlap, absolute
    /// gate −70 LUFS, relative gate −10 LU) of everything pushed since construction or reset.
    /// Within 0.01 LU of the exact block-list computation (see [`GatingHistogram`]); a trailing
    /// partial block is not counted. Defined at any level a float programme can reach. Walks the
    /// histogram bins from the relative gate up to the loudest block.
    pub fn integrated_lufs(&self) -> Option<f64> {
        self.histogram.integrated_lufs()
    }

    /// Number of gating blocks above the absolute gate so far.
    pub fn gated_block_count(&self) -> u64 {
        self.histogram.block_count()
    }

    /// Non-finite samples seen (replaced by 0) since construction or reset.
    pub fn invalid_sample_count(&self) -> u64 {
        self.invalid_sample_count
    }

    /// Starts a new programme: clears filter state, windows, maxima, gating blocks and counts.
    pub fn reset(&mut self) {
        self.filter.reset();
        self.step_fill = 0;
        self.step_energy_sum = 0.0;
        self.step_energy_sums = [0.0; SHORT_TERM_STEPS];
        self.steps_done = 0;
        self.momentary_mean_square = None;
        self.short_term_mean_square = None;
        self.max_momentary_mean_square = None;
        self.max_short_term_mean_square = None;
        self.histogram.clear();
        self.invalid_sample_count = 0;
    }
}
