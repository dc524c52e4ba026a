//! Dead and duplicated channels, from per-channel mean squares and the raw covariance.

/// Mean square below which a channel counts as silent: 1e-12, i.e. −120 dB relative to a
/// full-scale DC level (−117 dB relative to a full-scale sine). Far below any dither or noise
/// floor of a real recording, far above the rounding noise of a zeroed channel.
pub const SILENT_MEAN_SQUARE: f64 = 1e-12;

/// |correlation| above which two channels count as carrying the same signal.
pub const DUPLICATE_CORRELATION: f64 = 0.9999;

/// Channels (indexed by [input channel]) whose mean square is below [`SILENT_MEAN_SQUARE`],
/// reported only when at least one other spatial channel carries signal (a wholly silent
/// stream is not a channel fault). W is included if it is the dead one.
pub(crate) fn silent_channels(channel_mean_square: &[f64]) -> Vec<usize> {
    let any_signal = channel_mean_square
        .iter()
        .any(|&ms| ms.is_finite() && ms >= SILENT_MEAN_SQUARE);
    if !any_signal {
        return Vec::new();
    }
    channel_mean_square
        .iter()
        .enumerate()
        .filter(|&(_, &ms)| ms.is_nan() || ms < SILENT_MEAN_SQUARE)
        .map(|(channel, _)| channel)
        .collect()
}

/// Pairs (i < j) of non-silent channels whose correlation in the `channels`×`channels`
/// row-major covariance exceeds [`DUPLICATE_CORRELATION`] in magnitude (a copy, possibly
/// inverted or rescaled). `silent` must be sorted.
pub(crate) fn duplicate_pairs(
    covariance: &[f64],
    channels: usize,
    silent: &[usize],
) -> Vec<(usize, usize)> {
    let mut pairs = Vec::new();
    let live = |c: usize| silent.binary_search(&c).is_err() && covariance[c * channels + c] > 0.0;
    for i in 0..channels {
        if !live(i) {
            continue;
        }
        for j in i + 1..channels {
            if !live(j) {
                continue;
            }
            let cross = covariance[i * channels + j];
            let correlation =
                cross / (covariance[i * channels + i] * covariance[j * channels + j]).sqrt();
            if correlation.abs() > DUPLICATE_CORRELATION {
                pairs.push((i, j));
            }
        }
    }
    pairs
}
