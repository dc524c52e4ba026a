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
/// Each step is cut into this many sub-steps (2.5 ms at the 100 ms step): the maxima of
/// momentary and short-term loudness are taken over windows at every sub-step boundary.
pub const SUB_STEPS_PER_STEP: usize = 40;
const MOMENTARY_SUB_STEPS: usize = MOMENTARY_STEPS * SUB_STEPS_PER_STEP;
const SHORT_TERM_SUB_STEPS: usize = SHORT_TERM_STEPS * SUB_STEPS_PER_STEP;

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
/// 100 ms at 44.1, 48, 96, 192 kHz …), each cut into [`SUB_STEPS_PER_STEP`] sub-steps of
/// 2.5 ms (lengths differ by at most one sample when 40 does not divide the step). Every
/// completed step updates:
/// - momentary loudness: the last 4 steps (400 ms);
/// - short-term loudness: the last 30 steps (3 s);
/// - one 400 ms gating block (the last 4 steps), so blocks overlap by 75 %; it goes into a
///   [`GatingHistogram`] for integrated loudness.
///
/// The maxima of momentary and short-term loudness follow EBU Tech 3341's sliding windows: they
/// are taken over the windows ending at every sub-step boundary, not only every 100 ms. Any
/// window position lies within half a sub-step (1.25 ms + half a sample) of a grid position, so
/// for material of steady level the maxima under-read by at most `10·log10(400 / 398.75)` =
/// 0.014 LU (momentary; the worst case is a burst exactly 400 ms long) and 0.002 LU
/// (short-term); a 100 ms grid would under-read by up to 0.58 LU.
///
/// Readings are `None` while undefined: before the first full window, when the window holds
/// digital silence, or (integrated) when every block is gated out. Non-finite input samples are
/// counted and treated as 0, so they never poison the filter state.
///
/// Memory is fixed at construction; [`push`](Self::push) never allocates and costs O(1) per
/// sample (per sub-step it sums the 160 and 1200 sub-step energies of the two windows).
#[derive(Debug, Clone)]
pub struct LoudnessMeter {
    sample_rate_hz: f64,
    filter: KWeighting,
    step_len: usize,
    /// Position of the current sub-step within its step (0 … 39), its length and fill.
    sub_step: usize,
    sub_step_len: usize,
    sub_step_fill: usize,
    sub_step_energy: f64,
    /// Energy (sum of squares) of the last 1200 completed sub-steps, ring indexed by
    /// `sub_steps_done % 1200`.
    sub_step_energies: Vec<f64>,
    sub_steps_done: u64,
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
        // At least one sample per sub-step (8 kHz gives 20).
        let step_len = ((sample_rate_hz * STEP_S).round() as usize).max(SUB_STEPS_PER_STEP);
        Ok(Self {
            sample_rate_hz,
            filter,
            step_len,
            sub_step: 0,
            sub_step_len: sub_step_len(step_len, 0),
            sub_step_fill: 0,
            sub_step_energy: 0.0,
            sub_step_energies: vec![0.0; SHORT_TERM_SUB_STEPS],
            sub_steps_done: 0,
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
        let mut rest = samples;
        while !rest.is_empty() {
            let n = (self.sub_step_len - self.sub_step_fill).min(rest.len());
            let (run, tail) = rest.split_at(n);
            let mut energy = self.sub_step_energy;
            for &sample in run {
                let x = if sample.is_finite() {
                    f64::from(sample)
                } else {
                    self.invalid_sample_count += 1;
                    0.0
                };
                let y = self.filter.process_sample(x);
                energy += y * y;
            }
            self.sub_step_energy = energy;
            self.sub_step_fill += n;
            rest = tail;
            if self.sub_step_fill == self.sub_step_len {
                self.finish_sub_step();
            }
        }
    }

    fn finish_sub_step(&mut self) {
        let slot = (self.sub_steps_done % SHORT_TERM_SUB_STEPS as u64) as usize;
        self.sub_step_energies[slot] = self.sub_step_energy;
        self.sub_steps_done += 1;
        self.sub_step_energy = 0.0;
        self.sub_step_fill = 0;
        self.sub_step = (self.sub_step + 1) % SUB_STEPS_PER_STEP;
        self.sub_step_len = sub_step_len(self.step_len, self.sub_step);
        let step_done = self.sub_step == 0;

        if self.sub_steps_done >= MOMENTARY_SUB_STEPS as u64 {
            let mean_square = self.energy_of_last_sub_steps(MOMENTARY_SUB_STEPS)
                / (MOMENTARY_STEPS * self.step_len) as f64;
            self.max_momentary_mean_square = Some(
                self.max_momentary_mean_square
                    .map_or(mean_square, |m| m.max(mean_square)),
            );
            if step_done {
                self.histogram.add_block(mean_square);
                self.momentary_mean_square = Some(mean_square);
            }
        }
        if self.sub_steps_done >= SHORT_TERM_SUB_STEPS as u64 {
            let mean_square = self.energy_of_last_sub_steps(SHORT_TERM_SUB_STEPS)
                / (SHORT_TERM_STEPS * self.step_len) as f64;
            self.max_short_term_mean_square = Some(
                self.max_short_term_mean_square
                    .map_or(mean_square, |m| m.max(mean_square)),
            );
            if step_done {
                self.short_term_mean_square = Some(mean_square);
            }
        }
    }

    /// Energy of the last `count` completed sub-steps (`count` ≤ the ring length); summed in
    /// four lanes so the loop pipelines.
    fn energy_of_last_sub_steps(&self, count: usize) -> f64 {
        let ring_len = self.sub_step_energies.len();
        let start = ((self.sub_steps_done - count as u64) % ring_len as u64) as usize;
        let end = start + count;
        if end <= ring_len {
            lane_sum(&self.sub_step_energies[start..end])
        } else {
            lane_sum(&self.sub_step_energies[start..])
                + lane_sum(&self.sub_step_energies[..end - ring_len])
        }
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
        self.sub_step = 0;
        self.sub_step_len = sub_step_len(self.step_len, 0);
        self.sub_step_fill = 0;
        self.sub_step_energy = 0.0;
        self.sub_step_energies.fill(0.0);
        self.sub_steps_done = 0;
        self.momentary_mean_square = None;
        self.short_term_mean_square = None;
        self.max_momentary_mean_square = None;
        self.max_short_term_mean_square = None;
        self.histogram.clear();
        self.invalid_sample_count = 0;
    }
}

/// Length of sub-step `index` of a step of `step_len` samples: the boundaries sit at
/// `round(i · step_len / 40)`, so 40 sub-steps fill the step exactly.
fn sub_step_len(step_len: usize, index: usize) -> usize {
    let boundary = |i: usize| (i * step_len + SUB_STEPS_PER_STEP / 2) / SUB_STEPS_PER_STEP;
    boundary(index + 1) - boundary(index)
}

/// Sum in four interleaved lanes (a fixed order, so results never depend on block sizes).
fn lane_sum(values: &[f64]) -> f64 {
    let mut lanes = [0.0f64; 4];
    let mut chunks = values.chunks_exact(4);
    for chunk in &mut chunks {
        for (lane, &v) in lanes.iter_mut().zip(chunk) {
            *lane += v;
        }
    }
    let tail: f64 = chunks.remainder().iter().sum();
    (lanes[0] + lanes[1]) + (lanes[2] + lanes[3]) + tail
}
