//! # Per-channel meters and true peak
//!
//! - [`TruePeakMeter`]: ITU-R BS.1770-4 Annex 2 true peak (4× oversampling with the
//!   Recommendation's 48-tap, 4-phase FIR), streaming across blocks.
//! - [`ChannelMeters`]: a strip of meters for every channel of a stream — sample peak, true
//!   peak and RMS over a short sliding window, a slow DC offset (two cascaded 1 s low-passes),
//!   peak holds, clip counts (either sign, per [`FullScale`]) with the longest run of clipped
//!   samples, invalid-sample counts, and the over-omni flag (a channel louder than W, ACN 0, by
//!   more than a tolerance). [`ChannelReading`] is the plain-data snapshot of one channel;
//!   [`ProgrammeTotals`] the whole-programme totals that no hold or clip reset clears.
//!
//! Construction allocates; `push` never does. These run on the analysis thread.
//!
//! Levels in dB are `20·log10` of a linear amplitude (or `10·log10` of a mean square) relative
//! to digital full scale (1.0), floored at [`LEVEL_FLOOR_DB`] so every reading stays finite.

mod channel;
mod true_peak;

pub use channel::{
    ChannelMeterConfig, ChannelMeters, ChannelReading, DC_SETTLE_S, DC_TIME_CONSTANT_S, FullScale,
    MeterError, ProgrammeTotals,
};
pub use true_peak::{TRUE_PEAK_OVERSAMPLING, TRUE_PEAK_PHASES, TruePeakMeter};

/// Floor of every dB reading (digital silence reads this instead of −∞).
pub const LEVEL_FLOOR_DB: f64 = -200.0;

/// `20·log10(amplitude)`, floored at [`LEVEL_FLOOR_DB`].
pub fn amplitude_to_db(amplitude: f64) -> f64 {
    if amplitude > 0.0 {
        (20.0 * amplitude.log10()).max(LEVEL_FLOOR_DB)
    } else {
        LEVEL_FLOOR_DB
    }
}

/// `10·log10(mean_square)`, floored at [`LEVEL_FLOOR_DB`].
pub fn mean_square_to_db(mean_square: f64) -> f64 {
    if mean_square > 0.0 {
        (10.0 * mean_square.log10()).max(LEVEL_FLOOR_DB)
    } else {
        LEVEL_FLOOR_DB
    }
}

/// Largest |x| of `samples`, ignoring NaN (0 for an empty slice).
///
/// Eight independent lanes let the compiler vectorise: a single running `max` is a serial
/// floating-point reduction, which it must not reorder.
#[inline]
pub fn abs_max(samples: &[f32]) -> f32 {
    let mut lanes = [0.0f32; 8];
    let mut chunks = samples.chunks_exact(8);
    for chunk in &mut chunks {
        for (l, &x) in lanes.iter_mut().zip(chunk) {
            *l = l.max(x.abs());
        }
    }
    let tail = chunks
        .remainder()
        .iter()
        .fold(0.0f32, |m, &x| m.max(x.abs()));
    lanes.iter().fold(tail, |m, &l| m.max(l))
}
