//! Filters the scene's voices use: RBJ biquads, a one-pole low-pass and a damped resonator.
//! Coefficients follow R. Bristow-Johnson's "Audio EQ Cookbook" (common practice).

use std::f64::consts::PI;

/// Direct-form-I biquad with a0 normalised to 1.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Biquad {
    b0: f64,
    b1: f64,
    b2: f64,
    a1: f64,
    a2: f64,
    x1: f64,
    x2: f64,
    y1: f64,
    y2: f64,
}

impl Biquad {
    fn from_raw(b: [f64; 3], a: [f64; 3]) -> Self {
        Self {
            b0: b[0] / a[0],
            b1: b[1] / a[0],
            b2: b[2] / a[0],
            a1: a[1] / a[0],
            a2: a[2] / a[0],
            ..Self::default()
        }
    }

    fn omega_alpha(freq_hz: f64, q: f64, sample_rate_hz: f64) -> (f64, f64) {
        let omega = 2.0 * PI * (freq_hz / sample_rate_hz).min(0.49);
        (omega, omega.sin() / (2.0 * q))
    }

    pub(crate) fn low_pass(freq_hz: f64, q: f64, sample_rate_hz: f64) -> Self {
        let (omega, alpha) = Self::omega_alpha(freq_hz, q, sample_rate_hz);
        let cos = omega.cos();
        Self::from_raw(
            [(1.0 - cos) / 2.0, 1.0 - cos, (1.0 - cos) / 2.0],
            [1.0 + alpha, -2.0 * cos, 1.0 - alpha],
        )
    }

    pub(crate) fn high_pass(freq_hz: f64, q: f64, sample_rate_hz: f64) -> Self {
        let (omega, alpha) = Self::omega_alpha(freq_hz, q, sample_rate_hz);
        let cos = omega.cos();
        Self::from_raw(
            [(1.0 + cos) / 2.0, -(1.0 + cos), (1.0 + cos) / 2.0],
            [1.0 + alpha, -2.0 * cos, 1.0 - alpha],
        )
    }

    /// Band-pass with 0 dB gain at the centre frequency.
    pub(crate) fn band_pass(freq_hz: f64, q: f64, sample_rate_hz: f64) -> Self {
        let (omega, alpha) = Self::omega_alpha(freq_hz, q, sample_rate_hz);
        Self::from_raw(
            [alpha, 0.0, -alpha],
            [1.0 + alpha, -2.0 * omega.cos(), 1.0 - alpha],
        )
    }

    /// Replaces the coefficients with those of `other`, keeping the state (so a formant can
    /// move without a click from a reset).
    pub(crate) fn retune(&mut self, other: &Biquad) {
        self.b0 = other.b0;
        self.b1 = other.b1;
        self.b2 = other.b2;
        self.a1 = other.a1;
        self.a2 = other.a2;
    }

    #[inline]
    pub(crate) fn process(&mut self, x: f64) -> f64 {
        let y = self.b0 * x + self.b1 * self.x1 + self.b2 * self.x2
            - self.a1 * self.y1
            - self.a2 * self.y2;
        self.x2 = self.x1;
        self.x1 = x;
        self.y2 = self.y1;
        self.y1 = y;
        y
    }
}

/// One-pole low-pass y = (1-a)·x + a·y₁ with a = exp(-2π f/fs).
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct OnePole {
    a: f64,
    y1: f64,
}

impl OnePole {
    pub(crate) fn new(cutoff_hz: f64, sample_rate_hz: f64) -> Self {
        Self {
            a: (-2.0 * PI * cutoff_hz / sample_rate_hz).exp(),
            y1: 0.0,
        }
    }

    /// Output RMS for unit-RMS white noise in: sqrt((1-a)/(1+a)).
    pub(crate) fn white_noise_gain(&self) -> f64 {
        ((1.0 - self.a) / (1.0 + self.a)).sqrt()
    }

    #[inline]
    pub(crate) fn process(&mut self, x: f64) -> f64 {
        self.y1 = (1.0 - self.a) * x + self.a * self.y1;
        self.y1
    }
}

/// Exponentially decaying sinusoid: a two-pole resonator that a strike sets ringing at unit
/// amplitude per unit of strike strength.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Resonator {
    c1: f64,
    c2: f64,
    sin_omega: f64,
    y1: f64,
    y2: f64,
}

impl Resonator {
    /// Partial at `freq_hz` whose amplitude falls by 60 dB in `decay_60_db_s` seconds.
    pub(crate) fn new(freq_hz: f64, decay_60_db_s: f64, sample_rate_hz: f64) -> Self {
        let omega = 2.0 * PI * (freq_hz / sample_rate_hz).min(0.49);
        let r = (-(1000f64.ln()) / (decay_60_db_s * sample_rate_hz)).exp();
        Self {
            c1: 2.0 * r * omega.cos(),
            c2: r * r,
            sin_omega: omega.sin(),
            y1: 0.0,
            y2: 0.0,
        }
    }

    /// Next sample; a non-zero `strike` adds a sine of that amplitude starting at phase 0.
    #[inline]
    pub(crate) fn process(&mut self, strike: f64) -> f64 {
        let y = self.c1 * self.y1 - self.c2 * self.y2 + strike * self.sin_omega;
        self.y2 = self.y1;
        self.y1 = y;
        y
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn band_pass_passes_its_centre() {
        let fs = 48_000.0;
        let mut filter = Biquad::band_pass(1000.0, 5.0, fs);
        let mut peak: f64 = 0.0;
        for n in 0..48_000 {
            let y = filter.process((2.0 * PI * 1000.0 * n as f64 / fs).sin());
            if n > 24_000 {
                peak = peak.max(y.abs());
            }
        }
        assert!((peak - 1.0).abs() < 0.01, "{peak}");
    }

    #[test]
    fn resonator_decays_by_60_db() {
        let fs = 48_000.0;
        let mut partial = Resonator::new(500.0, 1.0, fs);
        let mut first_peak: f64 = 0.0;
        let mut last_peak: f64 = 0.0;
        for n in 0..48_200 {
            let y = partial.process(if n == 0 { 1.0 } else { 0.0 });
            if n < 200 {
                first_peak = first_peak.max(y.abs());
            } else if n >= 48_000 {
                last_peak = last_peak.max(y.abs());
            }
        }
        assert!((first_peak - 1.0).abs() < 0.01, "{first_peak}");
        let drop_db = 20.0 * (first_peak / last_peak).log10();
        assert!((drop_db - 60.0).abs() < 0.5, "{drop_db}");
    }
}
