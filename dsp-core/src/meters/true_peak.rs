//! True-peak level after ITU-R BS.1770-4 Annex 2.

use super::amplitude_to_db;

/// Oversampling factor of the Annex 2 filter.
pub const TRUE_PEAK_OVERSAMPLING: usize = 4;
const TAPS_PER_PHASE: usize = 12;
/// Samples filtered per pass (stack scratch).
pub const CHUNK: usize = 256;

/// The 48-tap interpolation FIR of BS.1770-4 Annex 2 split into its 4 phases of 12 taps
/// (phase 3 is phase 0 reversed, phase 2 is phase 1 reversed). Indexed by [phase][tap], tap 0
/// multiplying the newest input sample.
pub const TRUE_PEAK_PHASES: [[f64; TAPS_PER_PHASE]; TRUE_PEAK_OVERSAMPLING] = {
    const PHASE_0: [f64; TAPS_PER_PHASE] = [
        0.0017089843750,
        0.0109863281250,
        -0.0196533203125,
        0.0332031250000,
        -0.0594482421875,
        0.1373291015625,
        0.9721679687500,
        -0.1022949218750,
        0.0476074218750,
        -0.0266113281250,
        0.0148925781250,
        -0.0083007812500,
    ];
    const PHASE_1: [f64; TAPS_PER_PHASE] = [
        -0.0291748046875,
        0.0292968750000,
        -0.0517578125000,
        0.0891113281250,
        -0.1665039062500,
        0.4650878906250,
        0.7797851562500,
        -0.2003173828125,
        0.1015625000000,
        -0.0582275390625,
        0.0330810546875,
        -0.0189208984375,
    ];
    let mut phases = [
        PHASE_0,
        PHASE_1,
        [0.0; TAPS_PER_PHASE],
        [0.0; TAPS_PER_PHASE],
    ];
    let mut tap = 0;
    while tap < TAPS_PER_PHASE {
        phases[2][tap] = PHASE_1[TAPS_PER_PHASE - 1 - tap];
        phases[3][tap] = PHASE_0[TAPS_PER_PHASE - 1 - tap];
        tap += 1;
    }
    phases
};

/// [`TRUE_PEAK_PHASES`] in f32 (every coefficient is a multiple of 2⁻¹⁶, so exact).
const TRUE_PEAK_PHASES_F32: [[f32; TAPS_PER_PHASE]; TRUE_PEAK_OVERSAMPLING] = {
    let mut out = [[0.0f32; TAPS_PER_PHASE]; TRUE_PEAK_OVERSAMPLING];
    let mut p = 0;
    while p < TRUE_PEAK_OVERSAMPLING {
        let mut k = 0;
        while k < TAPS_PER_PHASE {
            out[p][k] = TRUE_PEAK_PHASES[p][k] as f32;
            k += 1;
        }
        p += 1;
    }
    out
};

/// An upper bound on the gain of any phase: |interpolated sample| ≤ this × the largest |input|
/// among the 12 samples it is made of. The largest Σ|h| over the phases (2.0228 for phases 1
/// and 2) raised by 10⁻⁴, far more than the f32 rounding of a 12-term sum (≈ 10⁻⁶ relative).
const PHASE_GAIN_BOUND: f64 = {
    let mut largest = 0.0f64;
    let mut p = 0;
    while p < TRUE_PEAK_OVERSAMPLING {
        let mut sum = 0.0;
        let mut k = 0;
        while k < TAPS_PER_PHASE {
            sum += TRUE_PEAK_PHASES[p][k].abs();
            k += 1;
        }
        if sum > largest {
            largest = sum;
        }
        p += 1;
    }
    largest * (1.0 + 1e-4)
};

/// The largest |x| when every sample is finite, in one pass (eight lanes, so it vectorises);
/// `None` when one is NaN or ±∞.
fn finite_peak(samples: &[f32]) -> Option<f32> {
    let mut peak = [0.0f32; 8];
    let mut finite = [true; 8];
    let mut chunks = samples.chunks_exact(8);
    for chunk in &mut chunks {
        for ((p, f), &x) in peak.iter_mut().zip(&mut finite).zip(chunk) {
            let a = x.abs();
            *f &= a <= f32::MAX;
            *p = p.max(a);
        }
    }
    let mut tail_peak = 0.0f32;
    for &x in chunks.remainder() {
        if !x.is_finite() {
            return None;
        }
        tail_peak = tail_peak.max(x.abs());
    }
    finite
        .iter()
        .all(|&f| f)
        .then(|| peak.iter().fold(tail_peak, |m, &p| m.max(p)))
}

/// Outputs filtered together, held in registers (4 phases × 8 lanes).
const LANES: usize = 8;

/// Largest |·| of the 4·`n` interpolated samples of `ext` = [11 previous samples | n new ones].
///
/// Uses AVX where the CPU has it. Both paths do the same multiplies and adds in the same order
/// (no fused multiply-add), so the readings are bit-identical on every x86-64 machine.
fn interpolated_peak(ext: &[f32; CHUNK + TAPS_PER_PHASE - 1], n: usize) -> f32 {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx") {
            // SAFETY: the CPU supports AVX (checked just above).
            return unsafe { interpolated_peak_avx(ext, n) };
        }
    }
    interpolated_peak_portable(ext, n)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
unsafe fn interpolated_peak_avx(ext: &[f32; CHUNK + TAPS_PER_PHASE - 1], n: usize) -> f32 {
    interpolated_peak_portable(ext, n)
}

/// Register-blocked polyphase FIR: for each group of 8 outputs, the 4 phase accumulators stay
/// in registers over the 12 taps, so every input vector is loaded once per tap.
#[inline(always)]
fn interpolated_peak_portable(ext: &[f32; CHUNK + TAPS_PER_PHASE - 1], n: usize) -> f32 {
    let n = n.min(CHUNK);
    let mut lanes = [0.0f32; LANES];
    let full = n - n % LANES;
    let mut start = 0;
    while start < full {
        let mut acc = [[0.0f32; LANES]; TRUE_PEAK_OVERSAMPLING];
        for k in 0..TAPS_PER_PHASE {
            // Output i uses s(i − k) = ext[11 + i − k].
            let offset = TAPS_PER_PHASE - 1 + start - k;
            let x: &[f32; LANES] = ext[offset..offset + LANES].try_into().expect("8 samples");
            for (phase_acc, phase) in acc.iter_mut().zip(&TRUE_PEAK_PHASES_F32) {
                let h = phase[k];
                for (a, &v) in phase_acc.iter_mut().zip(x) {
                    *a += h * v;
                }
            }
        }
        for phase_acc in &acc {
            for (l, &a) in lanes.iter_mut().zip(phase_acc) {
                *l = l.max(a.abs());
            }
        }
        start += LANES;
    }
    let mut peak = lanes.iter().fold(0.0f32, |m, &l| m.max(l));
    for i in full..n {
        for phase in &TRUE_PEAK_PHASES_F32 {
            let mut a = 0.0f32;
            for (k, &h) in phase.iter().enumerate() {
                a += h * ext[TAPS_PER_PHASE - 1 + i - k];
            }
            peak = peak.max(a.abs());
        }
    }
    peak
}

/// What [`TruePeakMeter::measure`] found in a block.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct BlockPeaks {
    /// Largest |x| of the finite samples.
    pub sample_peak: f32,
    /// True peak (linear), never below the sample peak.
    pub true_peak: f64,
    /// NaN and ±∞ samples in the block.
    pub invalid_samples: u64,
}

/// Streaming true-peak meter (BS.1770-4 Annex 2): each input sample yields 4 interpolated
/// samples from the 4-phase FIR; the meter keeps the largest magnitude of those and of the
/// input sample itself (common practice: a true peak never reads below the sample peak).
///
/// The 12-sample history is kept across blocks, so the result does not depend on how the
/// signal is cut into blocks. The input is floating point, so the Annex's 12.04 dB
/// attenuation (headroom for fixed-point arithmetic) is not needed. The 4× filter is used at
/// every sample rate (at 192 kHz and above it is more than the Annex asks for).
///
/// Non-finite samples are counted and enter the filter as 0. An abrupt signal onset (from
/// silence straight to a loud tone) makes the interpolator ring, as a real reconstruction would.
#[derive(Debug, Clone, Default)]
pub struct TruePeakMeter {
    /// Last 12 input samples (non-finite ones as 0), newest first.
    history: [f32; TAPS_PER_PHASE],
    max_abs: f64,
    invalid_sample_count: u64,
}

impl TruePeakMeter {
    /// A meter with empty history and a peak of 0.
    pub fn new() -> Self {
        Self::default()
    }

    /// Feeds one sample; returns the largest |·| of the sample and the 4 interpolated samples
    /// it produced.
    #[inline]
    pub fn process_sample(&mut self, sample: f32) -> f64 {
        self.process_chunk(std::slice::from_ref(&sample), -1.0)
            .true_peak
    }

    /// Feeds a block; returns the block's true peak (linear). Never allocates.
    pub fn push(&mut self, samples: &[f32]) -> f64 {
        self.measure(samples).true_peak
    }

    /// Feeds a block; returns its true peak together with what the filter learnt on the way
    /// (sample peak and non-finite count), so a caller need not scan the block again.
    pub fn measure(&mut self, samples: &[f32]) -> BlockPeaks {
        self.measure_above(samples, -1.0)
    }

    /// [`measure`](Self::measure) for a caller that only keeps running maxima of at least
    /// `floor`: the returned true peak is exact when it exceeds `floor`, and otherwise some
    /// value between the sample peak and `floor`. The filter is skipped on the pieces whose
    /// bound ([`PHASE_GAIN_BOUND`] × their largest input) does not exceed `floor`, so a
    /// whole-programme maximum costs little once the loudest passage is behind it. The filter
    /// history, the peak since reset and the sample peak stay exact.
    pub fn measure_above(&mut self, samples: &[f32], floor: f64) -> BlockPeaks {
        samples
            .chunks(CHUNK)
            .fold(BlockPeaks::default(), |total, chunk| {
                let floor = floor.max(total.true_peak);
                let piece = self.process_chunk(chunk, floor);
                BlockPeaks {
                    sample_peak: total.sample_peak.max(piece.sample_peak),
                    true_peak: total.true_peak.max(piece.true_peak),
                    invalid_samples: total.invalid_samples + piece.invalid_samples,
                }
            })
    }

    /// Feeds up to [`CHUNK`] samples; the true peak is the largest |·| of the samples and of
    /// the interpolated samples they produced.
    ///
    /// Each output is summed tap by tap in the same order whatever the chunking, so results do
    /// not depend on block sizes. The filter is skipped when no interpolated sample can exceed
    /// `floor` (see [`measure_above`](Self::measure_above)); the result is then the sample peak.
    fn process_chunk(&mut self, chunk: &[f32], floor: f64) -> BlockPeaks {
        let n = chunk.len().min(CHUNK);
        if n == 0 {
            return BlockPeaks::default();
        }
        let chunk = &chunk[..n];
        // One pass: the sample peak, or `None` when a sample is NaN or ±∞ (rare).
        let clean_peak = finite_peak(chunk);
        // The peak since reset stays exact too: never skip above it.
        let floor = floor.min(self.max_abs);
        let history_peak = super::abs_max(&self.history[..TAPS_PER_PHASE - 1]);
        if let Some(sample_peak) = clean_peak
            && f64::from(sample_peak.max(history_peak)) * PHASE_GAIN_BOUND <= floor
        {
            // No interpolated sample can reach `floor`: only the history moves on.
            let kept = n.min(TAPS_PER_PHASE);
            self.history.rotate_right(kept);
            for (h, &x) in self.history[..kept].iter_mut().zip(chunk.iter().rev()) {
                *h = x;
            }
            let peak = f64::from(sample_peak);
            self.max_abs = self.max_abs.max(peak);
            return BlockPeaks {
                sample_peak,
                true_peak: peak,
                invalid_samples: 0,
            };
        }
        // ext = [11 previous samples, oldest first | the chunk, sanitised]
        let mut ext = [0.0f32; CHUNK + TAPS_PER_PHASE - 1];
        for (j, e) in ext[..TAPS_PER_PHASE - 1].iter_mut().enumerate() {
            *e = self.history[TAPS_PER_PHASE - 2 - j];
        }
        let fresh = &mut ext[TAPS_PER_PHASE - 1..TAPS_PER_PHASE - 1 + n];
        fresh.copy_from_slice(chunk);
        let (sample_peak, invalid_samples) = match clean_peak {
            Some(sample_peak) => (sample_peak, 0),
            None => {
                let mut invalid_samples = 0;
                for e in fresh.iter_mut() {
                    if !e.is_finite() {
                        *e = 0.0;
                        invalid_samples += 1;
                    }
                }
                // Non-finite samples are 0 now: the peak of the finite ones.
                (super::abs_max(fresh), invalid_samples)
            }
        };
        self.invalid_sample_count += invalid_samples;
        // A piece with non-finite samples always goes through the filter (rare, and exact).
        let peak = sample_peak.max(interpolated_peak(&ext, n));
        for (k, h) in self.history.iter_mut().enumerate() {
            *h = ext[TAPS_PER_PHASE - 1 + n - 1 - k];
        }
        let peak = f64::from(peak);
        self.max_abs = self.max_abs.max(peak);
        BlockPeaks {
            sample_peak,
            true_peak: peak,
            invalid_samples,
        }
    }

    /// Largest interpolated magnitude since construction or the last reset (linear, 1.0 = full
    /// scale).
    pub fn peak_linear(&self) -> f64 {
        self.max_abs
    }

    /// [`peak_linear`](Self::peak_linear) in dBTP (floored at [`super::LEVEL_FLOOR_DB`]).
    pub fn peak_dbtp(&self) -> f64 {
        amplitude_to_db(self.max_abs)
    }

    /// Non-finite samples seen since construction or [`reset`](Self::reset).
    pub fn invalid_sample_count(&self) -> u64 {
        self.invalid_sample_count
    }

    /// Clears the peak but keeps the filter history (the stream continues).
    pub fn reset_peak(&mut self) {
        self.max_abs = 0.0;
    }

    /// Clears peak, history and counts (a new stream starts).
    pub fn reset(&mut self) {
        *self = Self::default();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The blocked (and AVX) kernel must give the very bits of the plain per-output sum in the
    /// same tap order: 4 phases, 12 taps, newest sample first.
    #[test]
    fn blocked_kernel_matches_plain_sum_bit_for_bit() {
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        let signal: Vec<f32> = (0..5_000)
            .map(|_| {
                state = state
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                ((state >> 40) as f32 / (1u64 << 24) as f32) * 2.0 - 1.0
            })
            .collect();
        let mut plain = 0.0f32;
        for i in 0..signal.len() {
            let s = |j: isize| if j < 0 { 0.0 } else { signal[j as usize] };
            plain = plain.max(signal[i].abs());
            for phase in &TRUE_PEAK_PHASES_F32 {
                let mut a = 0.0f32;
                for (k, &h) in phase.iter().enumerate() {
                    a += h * s(i as isize - k as isize);
                }
                plain = plain.max(a.abs());
            }
        }
        for block in [1, 7, 8, 100, 256, 1000] {
            let mut meter = TruePeakMeter::new();
            for piece in signal.chunks(block) {
                meter.push(piece);
            }
            assert_eq!(meter.peak_linear(), f64::from(plain), "block {block}");
        }
    }

    #[test]
    fn phase_gain_bound_covers_every_phase() {
        // Σ|h| of the Annex 2 table's phases, summed in Python from the table: 2.0228271...
        // (phase 1) and 1.4342041... (phase 0); the bound sits just above both.
        let sums: Vec<f64> = TRUE_PEAK_PHASES
            .iter()
            .map(|p| p.iter().map(|h| h.abs()).sum())
            .collect();
        assert!((sums[1] - 2.022_827_148_437_5).abs() < 1e-9, "{sums:?}");
        assert!((sums[0] - 1.434_204_101_562_5).abs() < 1e-9, "{sums:?}");
        assert!(
            sums.iter()
                .all(|&s| s < PHASE_GAIN_BOUND && PHASE_GAIN_BOUND < s * 1.001 + 1.0)
        );
    }

    /// A running maximum kept with `measure_above` (the floor being that maximum) reads the very
    /// bits of one kept with `measure`, on material whose loud passages come early, late and in
    /// bursts; and the filter was in fact skipped on most pieces of the decaying part.
    #[test]
    fn running_maximum_above_a_floor_is_exact() {
        let mut state = 0x2545_F491_4F6C_DD1Du64;
        let mut noise = move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 40) as f32 / (1u64 << 23) as f32 - 1.0
        };
        let n = 48_000;
        let signal: Vec<f32> = (0..n)
            .map(|i| {
                let t = i as f32 / n as f32;
                // A decaying tone with noise, a burst in the middle, and near the end a quarter
                // sample-rate sine at 45° whose samples (±0.67) stay below the early peak
                // (≈ 0.85) while its true peak (≈ 0.95) does not.
                let tone = (i as f32 * 0.37).sin() * (1.0 - t) * 0.8 + 0.05 * noise();
                let burst = if (24_000..24_300).contains(&i) {
                    0.6 * noise()
                } else {
                    0.0
                };
                let late = if (47_000..47_200).contains(&i) {
                    0.95 * (std::f32::consts::FRAC_PI_2 * i as f32 + std::f32::consts::FRAC_PI_4)
                        .sin()
                } else {
                    0.0
                };
                tone + burst + late
            })
            .collect();
        for block in [5, 64, 256, 480, 4096] {
            let (mut exact, mut pruned) = (TruePeakMeter::new(), TruePeakMeter::new());
            let (mut max_exact, mut max_pruned) = (0.0f64, 0.0f64);
            let mut skipped = 0;
            for piece in signal.chunks(block) {
                let a = exact.measure(piece);
                let b = pruned.measure_above(piece, max_pruned);
                assert_eq!(a.sample_peak.to_bits(), b.sample_peak.to_bits());
                assert!(b.true_peak <= a.true_peak && b.true_peak >= f64::from(b.sample_peak));
                skipped += usize::from(b.true_peak < a.true_peak);
                max_exact = max_exact.max(a.true_peak);
                max_pruned = max_pruned.max(b.true_peak);
                assert_eq!(max_exact.to_bits(), max_pruned.to_bits(), "block {block}");
            }
            assert_eq!(
                exact.peak_linear().to_bits(),
                pruned.peak_linear().to_bits()
            );
            assert!(
                max_exact > 0.9,
                "the late sine reads above its samples: {max_exact}"
            );
            // A lower bound on the skipped pieces (one whose filter would have read no more
            // than its samples does not count): a fair share of the quiet half.
            assert!(
                skipped * block > n / 4,
                "block {block}: {skipped} pieces skipped"
            );
        }
    }
}
