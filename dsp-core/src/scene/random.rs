//! Small seeded pseudo-random generator for the demo scene (SplitMix64, Steele, Lea & Flood
//! 2014). Deterministic on every platform; no external crate.

/// SplitMix64 stream. Each scene source owns one, seeded from the scene seed and the source's
/// index, so rendering a subset of sources gives each source the same samples.
#[derive(Clone, Debug)]
pub(crate) struct Random {
    state: u64,
}

impl Random {
    /// Stream for `seed`, decorrelated from neighbouring seeds by one mixing step.
    pub(crate) fn new(seed: u64, stream: u64) -> Self {
        let mut random = Self {
            state: seed ^ stream.wrapping_mul(0xD1B5_4A32_D192_ED03),
        };
        random.next_u64();
        random
    }

    pub(crate) fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    pub(crate) fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }

    /// Uniform in [low, high).
    pub(crate) fn range(&mut self, low: f64, high: f64) -> f64 {
        low + (high - low) * self.unit()
    }

    /// Uniform white noise in [-1, 1) (variance 1/3).
    pub(crate) fn noise(&mut self) -> f64 {
        2.0 * self.unit() - 1.0
    }

    /// Index uniform in 0..count (count > 0).
    pub(crate) fn index(&mut self, count: usize) -> usize {
        ((self.unit() * count as f64) as usize).min(count - 1)
    }
}

/// Standard deviation of [`Random::noise`].
pub(crate) const NOISE_RMS: f64 = 0.577_350_269_189_625_8;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_repeat_and_differ() {
        let mut a = Random::new(7, 1);
        let mut b = Random::new(7, 1);
        let mut c = Random::new(7, 2);
        let first: Vec<u64> = (0..4).map(|_| a.next_u64()).collect();
        let again: Vec<u64> = (0..4).map(|_| b.next_u64()).collect();
        let other: Vec<u64> = (0..4).map(|_| c.next_u64()).collect();
        assert_eq!(first, again);
        assert_ne!(first, other);
        let mean: f64 = (0..10_000).map(|_| a.unit()).sum::<f64>() / 10_000.0;
        assert!((mean - 0.5).abs() < 0.02, "{mean}");
    }
}
