//! K-weighting pre-filter of ITU-R BS.1770-4 (§2.1), derived for any sample rate from the
//! Recommendation's 48 kHz tables.

use super::meter::{LoudnessError, check_sample_rate};

/// The Recommendation's coefficient tables (ITU-R BS.1770-4 Tables 1 and 2), normative at
/// 48 kHz. Every other rate is derived from them (see [`KWeighting`]).
const TABLE_RATE_HZ: f64 = 48_000.0;
/// Stage 1, the high shelf (+4 dB above ~1.7 kHz), at 48 kHz.
const SHELF_48K: BiquadCoefficients = BiquadCoefficients {
    b0: 1.53512485958697,
    b1: -2.69169618940638,
    b2: 1.19839281085285,
    a1: -1.69065929318241,
    a2: 0.73248077421585,
};
/// Stage 2, the RLB high-pass (~38 Hz), at 48 kHz.
const HIGH_PASS_48K: BiquadCoefficients = BiquadCoefficients {
    b0: 1.0,
    b1: -2.0,
    b2: 1.0,
    a1: -1.99004745483398,
    a2: 0.99007225036621,
};

/// Coefficients of one biquad, normalised so that `a0 = 1`:
/// `H(z) = (b0 + b1 z⁻¹ + b2 z⁻²) / (1 + a1 z⁻¹ + a2 z⁻²)`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BiquadCoefficients {
    pub b0: f64,
    pub b1: f64,
    pub b2: f64,
    pub a1: f64,
    pub a2: f64,
}

impl BiquadCoefficients {
    /// Magnitude response in dB at `freq_hz` for sample rate `sample_rate_hz`.
    pub fn gain_db(&self, freq_hz: f64, sample_rate_hz: f64) -> f64 {
        let w = 2.0 * std::f64::consts::PI * freq_hz / sample_rate_hz;
        let (s1, c1) = w.sin_cos();
        let (s2, c2) = (2.0 * w).sin_cos();
        // e^{-jw} = c1 - j s1, e^{-2jw} = c2 - j s2
        let num_re = self.b0 + self.b1 * c1 + self.b2 * c2;
        let num_im = -(self.b1 * s1 + self.b2 * s2);
        let den_re = 1.0 + self.a1 * c1 + self.a2 * c2;
        let den_im = -(self.a1 * s1 + self.a2 * s2);
        let num = num_re * num_re + num_im * num_im;
        let den = den_re * den_re + den_im * den_im;
        10.0 * (num / den).log10()
    }
}

/// One biquad in transposed direct form II, state in `f64`.
#[derive(Debug, Clone, Copy)]
struct Biquad {
    c: BiquadCoefficients,
    s1: f64,
    s2: f64,
}

impl Biquad {
    fn new(c: BiquadCoefficients) -> Self {
        Self {
            c,
            s1: 0.0,
            s2: 0.0,
        }
    }

    #[inline]
    fn process(&mut self, x: f64) -> f64 {
        let y = self.c.b0 * x + self.s1;
        self.s1 = self.c.b1 * x - self.c.a1 * y + self.s2;
        self.s2 = self.c.b2 * x - self.c.a2 * y;
        y
    }

    fn reset(&mut self) {
        self.s1 = 0.0;
        self.s2 = 0.0;
    }
}

/// The BS.1770 K-weighting filter: a high shelf (+4 dB above ~1.7 kHz) followed by the RLB
/// high-pass (~38 Hz).
///
/// At 48 kHz the coefficients are the Recommendation's tables. At any other rate each stage keeps
/// the tables' poles and zeros in the s-plane: a root `z` of the 48 kHz filter becomes
/// `z^(48000/fs)`, i.e. `e^{sT}` with the same `s` (the matched z-transform). The shelf keeps the
/// table's DC gain and the high-pass the table's high-frequency gain (`H(−1)`, +0.043 dB: the
/// Recommendation's high-pass numerator `1, −2, 1` is not normalised, so it must be rescaled with
/// the rate). From 22.05 kHz up the magnitude response then matches the 48 kHz table filter within
/// 0.001 dB from 10 Hz to 0.45·fs (checked in `tests/loudness_reference.rs`); the bilinear design
/// from the published analog parameters drifts by up to 0.03 dB at 997 Hz, which is why it is not
/// used.
///
/// State is `f64`; feed only finite samples ([`super::LoudnessMeter`] replaces non-finite
/// input by 0 before filtering).
#[derive(Debug, Clone)]
pub struct KWeighting {
    sample_rate_hz: f64,
    shelf: Biquad,
    high_pass: Biquad,
}

impl KWeighting {
    /// Designs the filter for `sample_rate_hz` (8 kHz … 768 kHz).
    pub fn new(sample_rate_hz: f64) -> Result<Self, LoudnessError> {
        check_sample_rate(sample_rate_hz)?;
        let ratio = TABLE_RATE_HZ / sample_rate_hz;
        Ok(Self {
            sample_rate_hz,
            shelf: Biquad::new(match_rate(&SHELF_48K, ratio, 1.0)),
            high_pass: Biquad::new(match_rate(&HIGH_PASS_48K, ratio, -1.0)),
        })
    }

    /// Sample rate the filter was designed for.
    pub fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    /// Stage 1 (high shelf) coefficients.
    pub fn shelf_coefficients(&self) -> BiquadCoefficients {
        self.shelf.c
    }

    /// Stage 2 (RLB high-pass) coefficients; `b = 1, −2, 1` at 48 kHz as in the Recommendation,
    /// a multiple of it at other rates.
    pub fn high_pass_coefficients(&self) -> BiquadCoefficients {
        self.high_pass.c
    }

    /// Magnitude response of the whole K-filter at `freq_hz`, in dB.
    pub fn gain_db(&self, freq_hz: f64) -> f64 {
        self.shelf.c.gain_db(freq_hz, self.sample_rate_hz)
            + self.high_pass.c.gain_db(freq_hz, self.sample_rate_hz)
    }

    /// Filters one sample.
    #[inline]
    pub fn process_sample(&mut self, x: f64) -> f64 {
        self.high_pass.process(self.shelf.process(x))
    }

    /// Clears the filter state.
    pub fn reset(&mut self) {
        self.shelf.reset();
        self.high_pass.reset();
    }
}

/// `table` moved to another rate by the matched z-transform: both root pairs are raised to the
/// power `ratio` (= 48 kHz / fs), then the gain is set so that `H(z_gain)` is the table's
/// (`z_gain` = 1 for DC, −1 for the high-frequency end).
fn match_rate(table: &BiquadCoefficients, ratio: f64, z_gain: f64) -> BiquadCoefficients {
    let (q1, q2) = match_roots(table.b1 / table.b0, table.b2 / table.b0, ratio);
    let (a1, a2) = match_roots(table.a1, table.a2, ratio);
    let response = |b0: f64, b1: f64, b2: f64, a1: f64, a2: f64| {
        (b0 + b1 * z_gain + b2) / (1.0 + a1 * z_gain + a2)
    };
    let target = response(table.b0, table.b1, table.b2, table.a1, table.a2);
    let b0 = target / response(1.0, q1, q2, a1, a2);
    BiquadCoefficients {
        b0,
        b1: b0 * q1,
        b2: b0 * q2,
        a1,
        a2,
    }
}

/// Maps the roots of `1 + c1·z⁻¹ + c2·z⁻²` to their power `ratio` and returns the new `(c1, c2)`.
/// A conjugate pair `r·e^{±jθ}` becomes `r^ratio·e^{±j·ratio·θ}`; real roots must be positive
/// (true of both K-weighting stages; a double root at z = 1 stays there).
fn match_roots(c1: f64, c2: f64, ratio: f64) -> (f64, f64) {
    let discriminant = c1 * c1 - 4.0 * c2;
    if discriminant < 0.0 {
        let theta = (0.5 * (-discriminant).sqrt()).atan2(-0.5 * c1);
        let radius = c2.sqrt().powf(ratio);
        (-2.0 * radius * (ratio * theta).cos(), radius * radius)
    } else {
        let half_root = 0.5 * discriminant.sqrt();
        let (r1, r2) = (-0.5 * c1 + half_root, -0.5 * c1 - half_root);
        debug_assert!(r1 > 0.0 && r2 > 0.0, "negative real root {r1}, {r2}");
        let (m1, m2) = (r1.powf(ratio), r2.powf(ratio));
        (-(m1 + m2), m1 * m2)
    }
}
