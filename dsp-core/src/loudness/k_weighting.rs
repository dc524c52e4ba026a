//! K-weighting pre-filter of ITU-R BS.1770-4 (§2.1), designed for any sample rate.

use super::meter::{LoudnessError, check_sample_rate};

/// Shelf design parameters (BS.1770 stage 1). Gain at high frequencies `Vh` (≈ +4 dB), band
/// gain `Vb`, quality factor and corner frequency. These are the widely transcribed parameters
/// that reproduce the Recommendation's 48 kHz table (see `tests/loudness_reference.rs`).
const SHELF_VH: f64 = 1.584864701130855;
const SHELF_VB: f64 = 1.258720930232562;
const SHELF_Q: f64 = 0.7071752369554196;
const SHELF_FC_HZ: f64 = 1681.974450955533;
/// RLB high-pass design parameters (BS.1770 stage 2).
const HIGH_PASS_Q: f64 = 0.5003270373238773;
const HIGH_PASS_FC_HZ: f64 = 38.13547087602444;

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
/// high-pass (~38 Hz), both bilinear-transform designs from the BS.1770 design parameters.
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
        Ok(Self {
            sample_rate_hz,
            shelf: Biquad::new(design_shelf(sample_rate_hz)),
            high_pass: Biquad::new(design_high_pass(sample_rate_hz)),
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

    /// Stage 2 (RLB high-pass) coefficients; `b = 1, −2, 1` as in the Recommendation.
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

fn design_shelf(sample_rate_hz: f64) -> BiquadCoefficients {
    let k = (std::f64::consts::PI * SHELF_FC_HZ / sample_rate_hz).tan();
    let k2 = k * k;
    let a0 = 1.0 + k / SHELF_Q + k2;
    BiquadCoefficients {
        b0: (SHELF_VH + SHELF_VB * k / SHELF_Q + k2) / a0,
        b1: 2.0 * (k2 - SHELF_VH) / a0,
        b2: (SHELF_VH - SHELF_VB * k / SHELF_Q + k2) / a0,
        a1: 2.0 * (k2 - 1.0) / a0,
        a2: (1.0 - k / SHELF_Q + k2) / a0,
    }
}

fn design_high_pass(sample_rate_hz: f64) -> BiquadCoefficients {
    let k = (std::f64::consts::PI * HIGH_PASS_FC_HZ / sample_rate_hz).tan();
    let k2 = k * k;
    let a0 = 1.0 + k / HIGH_PASS_Q + k2;
    // The Recommendation keeps the numerator at 1, −2, 1 (not divided by a0); the small
    // passband gain this leaves is part of the standard's filter and of its anchor values.
    BiquadCoefficients {
        b0: 1.0,
        b1: -2.0,
        b2: 1.0,
        a1: 2.0 * (k2 - 1.0) / a0,
        a2: (1.0 - k / HIGH_PASS_Q + k2) / a0,
    }
}
