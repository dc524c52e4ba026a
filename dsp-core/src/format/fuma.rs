//! Furse–Malham (FuMa) channel order and maxN weights, defined to third order.
//!
//! FuMa streams of order 1 and 2 are the first 4 and 9 channels of the order-3 layout
//! (W X Y Z, then R S T U V), so one table serves every order.

use crate::sh::channel_count;

/// Highest order FuMa ordering and maxN weights are defined for.
pub const MAX_FUMA_ORDER: usize = 3;

/// Number of channels of a full third-order FuMa stream.
const FUMA_CHANNELS: usize = channel_count(MAX_FUMA_ORDER);

/// FuMa channel letters, indexed by [fuma channel].
pub const FUMA_LETTERS: [char; FUMA_CHANNELS] = [
    'W', 'X', 'Y', 'Z', 'R', 'S', 'T', 'U', 'V', 'K', 'L', 'M', 'N', 'O', 'P', 'Q',
];

/// ACN index carried by each FuMa channel, indexed by [fuma channel].
pub const FUMA_TO_ACN: [usize; FUMA_CHANNELS] =
    [0, 3, 1, 2, 6, 7, 5, 8, 4, 12, 13, 11, 14, 10, 15, 9];

/// FuMa channel carrying each ACN index, indexed by \[acn\] (the inverse of [`FUMA_TO_ACN`]).
pub const ACN_TO_FUMA: [usize; FUMA_CHANNELS] = {
    let mut inverse = [0; FUMA_CHANNELS];
    let mut fuma_channel = 0;
    while fuma_channel < FUMA_CHANNELS {
        inverse[FUMA_TO_ACN[fuma_channel]] = fuma_channel;
        fuma_channel += 1;
    }
    inverse
};

/// maxN/SN3D gain k (maxN = k·SN3D), indexed by \[acn\]: each component of order ≥ 1 then peaks
/// at |1| over the sphere; W carries 1/√2 (Furse–Malham weighting).
const MAXN_GAIN: [f64; FUMA_CHANNELS] = {
    let sqrt2 = std::f64::consts::SQRT_2;
    // 2/√3, √(45/32), 3/√5, √(8/5) as decimal constants (const fn sqrt is not available).
    let two_over_sqrt3 = 1.154_700_538_379_251_7;
    let sqrt_45_32 = 1.185_854_122_563_142_3;
    let three_over_sqrt5 = 1.341_640_786_499_873_8;
    let sqrt_8_5 = 1.264_911_064_067_351_8;
    [
        1.0 / sqrt2,      // 0 W
        1.0,              // 1 Y
        1.0,              // 2 Z
        1.0,              // 3 X
        two_over_sqrt3,   // 4 V
        two_over_sqrt3,   // 5 T
        1.0,              // 6 R
        two_over_sqrt3,   // 7 S
        two_over_sqrt3,   // 8 U
        sqrt_8_5,         // 9 Q
        three_over_sqrt5, // 10 O
        sqrt_45_32,       // 11 M
        1.0,              // 12 K
        sqrt_45_32,       // 13 L
        three_over_sqrt5, // 14 N
        sqrt_8_5,         // 15 P
    ]
};

/// ACN index of FuMa channel `fuma_channel`, or `None` beyond third order.
pub fn fuma_to_acn(fuma_channel: usize) -> Option<usize> {
    FUMA_TO_ACN.get(fuma_channel).copied()
}

/// FuMa channel carrying ACN index `acn`, or `None` beyond third order.
pub fn acn_to_fuma(acn: usize) -> Option<usize> {
    ACN_TO_FUMA.get(acn).copied()
}

/// FuMa letter (W, X, …, Q) of ACN index `acn`, or `None` beyond third order.
pub fn fuma_letter_of_acn(acn: usize) -> Option<char> {
    acn_to_fuma(acn).map(|fuma_channel| FUMA_LETTERS[fuma_channel])
}

/// maxN/SN3D gain k for ACN index `acn` (maxN = k·SN3D), or `None` beyond third order.
pub fn maxn_gain(acn: usize) -> Option<f64> {
    MAXN_GAIN.get(acn).copied()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tables_are_inverse_and_constants_exact() {
        for (fuma_channel, &acn) in FUMA_TO_ACN.iter().enumerate() {
            assert_eq!(ACN_TO_FUMA[acn], fuma_channel);
        }
        // Spot values written out by hand: S (FuMa 5) is ACN 7, Q (FuMa 15) is ACN 9.
        assert_eq!(ACN_TO_FUMA[7], 5);
        assert_eq!(ACN_TO_FUMA[9], 15);
        let close = |a: f64, b: f64| (a - b).abs() < 1e-15;
        assert!(close(MAXN_GAIN[4], 2.0 / 3f64.sqrt()));
        assert!(close(MAXN_GAIN[11], (45.0f64 / 32.0).sqrt()));
        assert!(close(MAXN_GAIN[10], 3.0 / 5f64.sqrt()));
        assert!(close(MAXN_GAIN[9], (8.0f64 / 5.0).sqrt()));
        assert_eq!(fuma_to_acn(16), None);
        assert_eq!(fuma_letter_of_acn(13), Some('L'));
    }
}
