//! True-peak level after ITU-R BS.1770-4 Annex 2.

use super::amplitude_to_db;

/// Oversampling factor of the Annex 2 filter.
pub const TRUE_PEAK_OVERSAMPLING: usize = 4;
const TAPS_PER_PHASE: usize = 12;

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
    /// Last 12 input samples, newest first.
    history: [f64; TAPS_PER_PHASE],
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
        let x = if sample.is_finite() {
            f64::from(sample)
        } else {
            self.invalid_sample_count += 1;
            0.0
        };
        self.history.copy_within(0..TAPS_PER_PHASE - 1, 1);
        self.history[0] = x;
        // The input sample itself is a point of the signal too: the Annex 2 phases sit 1/8
        // sample away from the input instants, so without it a peak on a sample instant reads
        // up to 0.17 dB low (at fs/4) and the "true" peak could fall below the sample peak.
        let mut peak = x.abs();
        for phase in &TRUE_PEAK_PHASES {
            let y: f64 = phase.iter().zip(&self.history).map(|(h, s)| h * s).sum();
            peak = peak.max(y.abs());
        }
        self.max_abs = self.max_abs.max(peak);
        peak
    }

    /// Feeds a block; returns the block's true peak (linear). Never allocates.
    pub fn push(&mut self, samples: &[f32]) -> f64 {
        samples
            .iter()
            .fold(0.0_f64, |peak, &s| peak.max(self.process_sample(s)))
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
