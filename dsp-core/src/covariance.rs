//! STFT band covariance: per frame, the real part of the cross-spectral matrix summed over the
//! bins of each band.
//!
//! Frame length follows the sample rate so that a frame lasts about 21 ms (1024 samples at 44.1
//! and 48 kHz, 2048 at 96 kHz, …, 512 at 22.05 kHz); the hop is half a frame and the window is a
//! periodic Hann. Spectra are scaled so that the diagonal of the full-band matrix is the mean
//! square of each channel over the frame (Parseval, one-sided spectrum): a unit sine reads 0.5.

use realfft::num_complex::Complex;
use realfft::{RealFftPlanner, RealToComplex};
use std::sync::Arc;

/// STFT framing for a sample rate.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct StftFraming {
    pub frame_len: usize,
    pub hop: usize,
}

impl StftFraming {
    /// About 21 ms frames (a power of two), 50 % overlap.
    pub fn for_sample_rate(sample_rate_hz: f64) -> Self {
        let ideal = sample_rate_hz.max(1.0) * 1024.0 / 48_000.0;
        let frame_len = (2f64.powf(ideal.log2().round())).clamp(64.0, 16_384.0) as usize;
        Self {
            frame_len,
            hop: frame_len / 2,
        }
    }

    pub fn bins(&self) -> usize {
        self.frame_len / 2 + 1
    }
}

/// Bin ranges of the analysis bands: `bands()[0]` is the full band, then low / mid / high split
/// at two user edges.
#[derive(Clone, Debug, PartialEq)]
pub struct BandLayout {
    /// Half-open bin ranges of low, mid and high, covering every bin once.
    ranges: [std::ops::Range<usize>; 3],
    edges_hz: [f64; 2],
}

/// Number of bands in every analysis: full, low, mid, high.
pub const BAND_COUNT: usize = 4;

impl BandLayout {
    /// Bands split at `edges_hz` (sorted and clamped to the spectrum).
    pub fn new(framing: StftFraming, sample_rate_hz: f64, edges_hz: [f64; 2]) -> Self {
        let bins = framing.bins();
        let hz_per_bin = sample_rate_hz / framing.frame_len as f64;
        let nyquist = sample_rate_hz / 2.0;
        let mut e = [
            edges_hz[0].clamp(0.0, nyquist),
            edges_hz[1].clamp(0.0, nyquist),
        ];
        if e[0] > e[1] {
            e.swap(0, 1);
        }
        let to_bin = |hz: f64| ((hz / hz_per_bin).round() as usize).min(bins);
        let (b0, b1) = (to_bin(e[0]), to_bin(e[1]).max(to_bin(e[0])));
        Self {
            ranges: [0..b0, b0..b1, b1..bins],
            edges_hz: e,
        }
    }

    pub fn edges_hz(&self) -> [f64; 2] {
        self.edges_hz
    }

    /// Bin range of a split band (0 low, 1 mid, 2 high).
    pub fn split_range(&self, split_band: usize) -> std::ops::Range<usize> {
        self.ranges[split_band].clone()
    }
}

/// Streaming STFT that yields one covariance matrix per band and frame. Owns all scratch;
/// [`push`](Self::push) never allocates.
pub struct BandCovariance {
    channels: usize,
    framing: StftFraming,
    layout: BandLayout,
    fft: Arc<dyn RealToComplex<f32>>,
    window: Vec<f32>,
    /// Per-bin amplitude scale sqrt(c_k / (N Σw²)), c_k = 1 at DC and Nyquist, 2 elsewhere.
    bin_scale: Vec<f32>,
    /// Input history, planar [channel][frame_len].
    history: Vec<f32>,
    filled: usize,
    fft_in: Vec<f32>,
    fft_out: Vec<Complex<f32>>,
    fft_scratch: Vec<Complex<f32>>,
    /// Scaled spectra per channel, row-major [channel][2·bins]: real parts of all bins, then
    /// imaginary parts, so that Re(X Xᴴ) over a band is one matrix product.
    spectra: Vec<f32>,
    product: Vec<f32>,
    /// Frame covariance per band, [band][i·M + j], band 0 = full (sum of the splits).
    frame_cov: Vec<Vec<f64>>,
}

impl BandCovariance {
    pub fn new(channels: usize, sample_rate_hz: f64, edges_hz: [f64; 2]) -> Self {
        let framing = StftFraming::for_sample_rate(sample_rate_hz);
        let n = framing.frame_len;
        let fft = RealFftPlanner::<f32>::new().plan_fft_forward(n);
        let window: Vec<f32> = (0..n)
            .map(|i| (0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / n as f64).cos()) as f32)
            .collect();
        let window_energy: f64 = window.iter().map(|&w| (w as f64) * (w as f64)).sum();
        let bins = framing.bins();
        let bin_scale = (0..bins)
            .map(|k| {
                let c = if k == 0 || k == bins - 1 { 1.0 } else { 2.0 };
                (c / (n as f64 * window_energy)).sqrt() as f32
            })
            .collect();
        let fft_scratch = fft.make_scratch_vec();
        Self {
            channels,
            framing,
            layout: BandLayout::new(framing, sample_rate_hz, edges_hz),
            fft_in: fft.make_input_vec(),
            fft_out: fft.make_output_vec(),
            fft_scratch,
            fft,
            window,
            bin_scale,
            history: vec![0.0; channels * n],
            filled: 0,
            spectra: vec![0.0; channels * 2 * bins],
            product: vec![0.0; channels * channels],
            frame_cov: vec![vec![0.0; channels * channels]; BAND_COUNT],
        }
    }

    pub fn framing(&self) -> StftFraming {
        self.framing
    }

    pub fn layout(&self) -> &BandLayout {
        &self.layout
    }

    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Moves the band edges; takes effect from the next frame.
    pub fn set_band_edges(&mut self, sample_rate_hz: f64, edges_hz: [f64; 2]) {
        self.layout = BandLayout::new(self.framing, sample_rate_hz, edges_hz);
    }

    /// Clears the input history.
    pub fn reset(&mut self) {
        self.history.fill(0.0);
        self.filled = 0;
    }

    /// Feeds planar ACN input (`channels` slices of equal length); calls `on_frame` with the
    /// per-band frame covariances (indexed [band][i·M + j]) each time a frame completes.
    pub fn push(&mut self, input: &[&[f32]], mut on_frame: impl FnMut(&[Vec<f64>])) {
        let frames = input.first().map_or(0, |c| c.len());
        let n = self.framing.frame_len;
        let mut offset = 0;
        while offset < frames {
            let take = (n - self.filled).min(frames - offset);
            for c in 0..self.channels {
                let dest = &mut self.history[c * n + self.filled..c * n + self.filled + take];
                match input.get(c) {
                    Some(src) => {
                        for (d, &s) in dest.iter_mut().zip(&src[offset..offset + take]) {
                            // Non-finite samples would poison every later estimate.
                            *d = if s.is_finite() { s } else { 0.0 };
                        }
                    }
                    None => dest.fill(0.0),
                }
            }
            self.filled += take;
            offset += take;
            if self.filled == n {
                self.analyse_frame();
                on_frame(&self.frame_cov);
                let hop = self.framing.hop;
                for c in 0..self.channels {
                    self.history.copy_within(c * n + hop..(c + 1) * n, c * n);
                }
                self.filled = n - hop;
            }
        }
    }

    fn analyse_frame(&mut self) {
        let n = self.framing.frame_len;
        let bins = self.framing.bins();
        let m = self.channels;
        for c in 0..m {
            let src = &self.history[c * n..(c + 1) * n];
            for ((d, &s), &w) in self.fft_in.iter_mut().zip(src).zip(&self.window) {
                *d = s * w;
            }
            // Lengths come from the plan itself, so this cannot fail.
            let _ = self.fft.process_with_scratch(
                &mut self.fft_in,
                &mut self.fft_out,
                &mut self.fft_scratch,
            );
            let row = &mut self.spectra[c * 2 * bins..(c + 1) * 2 * bins];
            let (re, im) = row.split_at_mut(bins);
            for k in 0..bins {
                let s = self.bin_scale[k];
                re[k] = self.fft_out[k].re * s;
                im[k] = self.fft_out[k].im * s;
            }
        }
        self.frame_cov[0].fill(0.0);
        for band in 0..3 {
            let range = self.layout.split_range(band);
            let (full_cov, split_covs) = self.frame_cov.split_at_mut(1);
            let cov = &mut split_covs[band];
            if range.is_empty() {
                cov.fill(0.0);
                continue;
            }
            self.product.fill(0.0);
            for part in 0..2 {
                let start = part * bins + range.start;
                gram_accumulate(
                    &self.spectra[start..],
                    m,
                    range.len(),
                    2 * bins,
                    &mut self.product,
                );
            }
            for (dst, &p) in cov.iter_mut().zip(&self.product) {
                *dst = p as f64;
            }
            for (full, &p) in full_cov[0].iter_mut().zip(cov.iter()) {
                *full += p;
            }
        }
    }
}

/// product += A·Aᵀ where A is `rows × cols`, row stride `row_stride`, starting at `a[0]`.
fn gram_accumulate(a: &[f32], rows: usize, cols: usize, row_stride: usize, product: &mut [f32]) {
    assert!(rows == 0 || a.len() >= (rows - 1) * row_stride + cols);
    assert!(product.len() >= rows * rows);
    // SAFETY: the asserts above bound every index matrixmultiply touches: A is read at
    // i·row_stride + k for i < rows, k < cols; C is written at i·rows + j for i, j < rows.
    unsafe {
        matrixmultiply::sgemm(
            rows,
            cols,
            rows,
            1.0,
            a.as_ptr(),
            row_stride as isize,
            1,
            a.as_ptr(),
            1,
            row_stride as isize,
            1.0,
            product.as_mut_ptr(),
            rows as isize,
            1,
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn framing_follows_sample_rate() {
        assert_eq!(StftFraming::for_sample_rate(48_000.0).frame_len, 1024);
        assert_eq!(StftFraming::for_sample_rate(44_100.0).frame_len, 1024);
        assert_eq!(StftFraming::for_sample_rate(96_000.0).frame_len, 2048);
        assert_eq!(StftFraming::for_sample_rate(22_050.0).frame_len, 512);
        assert_eq!(StftFraming::for_sample_rate(384_000.0).frame_len, 8192);
    }

    #[test]
    fn unit_sine_has_mean_square_one_half_in_its_band() {
        // Parseval (common practice): a unit-amplitude sine has mean square 1/2.
        let fs = 48_000.0;
        let mut cov = BandCovariance::new(2, fs, [250.0, 4000.0]);
        let x: Vec<f32> = (0..48_000)
            .map(|i| (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / fs).sin() as f32)
            .collect();
        let y: Vec<f32> = x.iter().map(|v| -0.5 * v).collect();
        let mut last = vec![Vec::new(); BAND_COUNT];
        cov.push(&[&x, &y], |bands| last = bands.to_vec());
        let full = &last[0];
        assert!(
            (full[0] - 0.5).abs() < 0.01,
            "full-band mean square {}",
            full[0]
        );
        assert!((full[3] - 0.125).abs() < 0.003);
        assert!((full[1] + 0.25).abs() < 0.005, "cross term {}", full[1]);
        // All the energy sits in the mid band (250 Hz – 4 kHz).
        assert!((last[2][0] - full[0]).abs() < 1e-3 && last[1][0] < 1e-4 && last[3][0] < 1e-4);
    }
}
