//! Detail lost: per order and band, the level change and the magnitude-squared coherence
//! between the transformed reference p and the candidate c.
//!
//! Welch estimate (Welch 1967): the STFT framing of the engine ([`StftFraming`]: about 21 ms
//! frames — 1024 samples at 44.1/48 kHz — periodic Hann window, 50 % overlap) and its band
//! split ([`BandLayout`]). Per channel and bin, S_pc, S_pp and S_cc are summed over all frames;
//! the coherence of bin f is |S_pc|²/(S_pp·S_cc). An order's (or band's) coherence is the
//! mean over its channels and bins weighted by the reference energy S_pp, i.e.
//! Σ |S_pc|²/S_cc ÷ Σ S_pp, so that the bins that carry the programme dominate and a candidate
//! bin that is empty counts as coherence 0. It is 1 for an identical copy, a gain, or any
//! fixed filter, and drops where a codec replaces detail by noise or other content.

use crate::covariance::{BandLayout, StftFraming};
use realfft::num_complex::Complex;
use realfft::{RealFftPlanner, RealToComplex};
use std::sync::Arc;

/// Band-limited figures of one order.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CoherenceFigures {
    /// Candidate energy over reference energy in the band, dB.
    pub level_change_db: Option<f64>,
    /// Energy-weighted magnitude-squared coherence, 0 … 1.
    pub coherence: Option<f64>,
}

/// Streaming cross-spectral accumulator of K channel pairs (p_i, c_i).
pub struct CoherenceMeter {
    channels: usize,
    framing: StftFraming,
    layout: BandLayout,
    fft: Arc<dyn RealToComplex<f32>>,
    window: Vec<f32>,
    /// Planar [channel][frame_len] histories of p and c.
    history_p: Vec<f32>,
    history_c: Vec<f32>,
    /// Frames of history filled (up to frame_len).
    filled: usize,
    fft_in: Vec<f32>,
    spectrum_p: Vec<Complex<f32>>,
    spectrum_c: Vec<Complex<f32>>,
    scratch: Vec<Complex<f32>>,
    /// Per [channel][bin] sums.
    s_pp: Vec<f64>,
    s_cc: Vec<f64>,
    s_pc: Vec<Complex<f64>>,
    frames: u64,
}

impl CoherenceMeter {
    /// A meter for `channels` pairs at `sample_rate_hz`, bands split at `edges_hz` (low/mid
    /// and mid/high), as the engine splits them.
    pub fn new(channels: usize, sample_rate_hz: f64, edges_hz: [f64; 2]) -> Self {
        let framing = StftFraming::for_sample_rate(sample_rate_hz);
        let n = framing.frame_len;
        let fft = RealFftPlanner::<f32>::new().plan_fft_forward(n);
        let window = (0..n)
            .map(|i| (0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / n as f64).cos()) as f32)
            .collect();
        let bins = framing.bins();
        Self {
            channels,
            framing,
            layout: BandLayout::new(framing, sample_rate_hz, edges_hz),
            fft_in: fft.make_input_vec(),
            spectrum_p: fft.make_output_vec(),
            spectrum_c: fft.make_output_vec(),
            scratch: fft.make_scratch_vec(),
            fft,
            window,
            history_p: vec![0.0; channels * n],
            history_c: vec![0.0; channels * n],
            filled: 0,
            s_pp: vec![0.0; channels * bins],
            s_cc: vec![0.0; channels * bins],
            s_pc: vec![Complex::default(); channels * bins],
            frames: 0,
        }
    }

    pub fn framing(&self) -> StftFraming {
        self.framing
    }

    /// STFT frames accumulated.
    pub fn frames(&self) -> u64 {
        self.frames
    }

    /// Adds a block of pairs: `predicted[i]` is compared with `candidate[i]`; all the same
    /// length. Never allocates.
    ///
    /// # Panics
    /// If channel counts or lengths disagree (a caller bug).
    pub fn push(&mut self, predicted: &[&[f32]], candidate: &[&[f32]]) {
        let k = self.channels;
        assert!(
            predicted.len() == k && candidate.len() == k,
            "channel count"
        );
        let len = predicted.first().map_or(0, |c| c.len());
        assert!(
            predicted.iter().chain(candidate).all(|c| c.len() == len),
            "block lengths"
        );
        let (n, hop) = (self.framing.frame_len, self.framing.hop);
        let mut offset = 0;
        while offset < len {
            let take = (n - self.filled).min(len - offset);
            for ch in 0..k {
                let dst = ch * n + self.filled;
                self.history_p[dst..dst + take]
                    .copy_from_slice(&predicted[ch][offset..offset + take]);
                self.history_c[dst..dst + take]
                    .copy_from_slice(&candidate[ch][offset..offset + take]);
            }
            self.filled += take;
            offset += take;
            if self.filled == n {
                self.analyse_frame();
                for history in [&mut self.history_p, &mut self.history_c] {
                    for ch in 0..k {
                        history.copy_within(ch * n + hop..(ch + 1) * n, ch * n);
                    }
                }
                self.filled = n - hop;
            }
        }
    }

    fn analyse_frame(&mut self) {
        let n = self.framing.frame_len;
        let bins = self.framing.bins();
        for ch in 0..self.channels {
            for (history, spectrum) in [
                (&self.history_p, &mut self.spectrum_p),
                (&self.history_c, &mut self.spectrum_c),
            ] {
                for ((x, &h), &w) in self
                    .fft_in
                    .iter_mut()
                    .zip(&history[ch * n..(ch + 1) * n])
                    .zip(&self.window)
                {
                    *x = h * w;
                }
                // Buffers come from the plan, so the transform cannot fail.
                let _ =
                    self.fft
                        .process_with_scratch(&mut self.fft_in, spectrum, &mut self.scratch);
            }
            let base = ch * bins;
            for f in 0..bins {
                let p = Complex::new(self.spectrum_p[f].re as f64, self.spectrum_p[f].im as f64);
                let c = Complex::new(self.spectrum_c[f].re as f64, self.spectrum_c[f].im as f64);
                self.s_pp[base + f] += p.norm_sqr();
                self.s_cc[base + f] += c.norm_sqr();
                self.s_pc[base + f] += p.conj() * c;
            }
        }
        self.frames += 1;
    }

    /// Figures over the channels `channels` (e.g. one order's ACNs) and the band `band`
    /// (0 full, 1 low, 2 mid, 3 high). `None` values where the reference is silent.
    pub fn figures(&self, channels: std::ops::Range<usize>, band: usize) -> CoherenceFigures {
        let bins = self.framing.bins();
        let range = if band == 0 {
            0..bins
        } else {
            self.layout.split_range(band - 1)
        };
        let (mut weighted, mut reference, mut candidate) = (0.0, 0.0, 0.0);
        for ch in channels {
            for f in range.clone() {
                let i = ch * bins + f;
                reference += self.s_pp[i];
                candidate += self.s_cc[i];
                if self.s_cc[i] > 0.0 {
                    weighted += self.s_pc[i].norm_sqr() / self.s_cc[i];
                }
            }
        }
        let level_change_db =
            (reference > 0.0 && candidate > 0.0).then(|| 10.0 * (candidate / reference).log10());
        CoherenceFigures {
            level_change_db,
            coherence: (reference > 0.0).then(|| (weighted / reference).clamp(0.0, 1.0)),
        }
    }

    /// Band edges actually used, Hz.
    pub fn edges_hz(&self) -> [f64; 2] {
        self.layout.edges_hz()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn noise(len: usize, seed: u64) -> Vec<f32> {
        let mut state = seed;
        (0..len)
            .map(|_| {
                state = state
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                ((state >> 40) as f32 / (1u64 << 24) as f32) - 0.5
            })
            .collect()
    }

    #[test]
    fn coherence_of_a_copy_is_one_and_of_independent_noise_is_small() {
        let a = noise(48_000, 1);
        let b = noise(48_000, 2);
        let scaled: Vec<f32> = a.iter().map(|v| 0.5 * v).collect();
        let mut meter = CoherenceMeter::new(2, 48_000.0, [250.0, 4000.0]);
        for start in (0..48_000).step_by(5000) {
            let end = (start + 5000).min(48_000);
            meter.push(
                &[&a[start..end], &a[start..end]],
                &[&scaled[start..end], &b[start..end]],
            );
        }
        let copy = meter.figures(0..1, 0);
        assert!((copy.coherence.unwrap() - 1.0).abs() < 1e-6);
        assert!((copy.level_change_db.unwrap() + 6.0206).abs() < 1e-3);
        // Two independent white noises: the Welch coherence estimate is biased towards about
        // 1/K for K averaged frames (Carter, Knapp & Nuttall 1973; cited from memory); K ≈ 92
        // here, with overlap making the frames partly dependent.
        let independent = meter.figures(1..2, 0).coherence.unwrap();
        assert!(independent < 0.03, "{independent}");
    }

    #[test]
    fn half_noise_gives_the_expected_coherence() {
        // c = s + n with independent equal-power s, n: coherence = S_ss/(S_ss + S_nn) = 1/2
        // (the textbook coherence of a measurement with uncorrelated output noise, e.g. Bendat &
        // Piersol, "Random Data"; cited from memory, and it follows from the definition).
        let s = noise(96_000, 3);
        let n = noise(96_000, 4);
        let c: Vec<f32> = s.iter().zip(&n).map(|(a, b)| a + b).collect();
        let mut meter = CoherenceMeter::new(1, 48_000.0, [250.0, 4000.0]);
        meter.push(&[&s], &[&c]);
        let coherence = meter.figures(0..1, 0).coherence.unwrap();
        assert!((coherence - 0.5).abs() < 0.02, "{coherence}");
    }
}
