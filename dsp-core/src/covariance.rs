//! STFT band covariance: per frame, the real part of the cross-spectral matrix summed over the
//! bins of each band.
//!
//! Frame length follows the sample rate so that a frame lasts about 21 ms (1024 samples at 44.1
//! and 48 kHz, 2048 at 96 kHz, …, 512 at 22.05 kHz); the hop is half a frame and the window is a
//! periodic Hann. The matrices are scaled so that the diagonal of the full-band one is the mean
//! square of each channel over the frame (Parseval, one-sided spectrum): a unit sine reads 0.5.
//!
//! A scanner may analyse the frames of a block at once on the rayon pool
//! ([`BandCovariance::push_parallel`]); each frame is the same pure function of its samples
//! either way, so the matrices are the same bits.

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
    /// What every frame's analysis reads: the plan, window, scales and band layout.
    frame: FrameAnalysis,
    /// Input history, planar [channel][frame_len].
    history: Vec<f32>,
    filled: usize,
    scratch: FrameScratch,
    /// Frame covariance per band, [band][i·M + j], band 0 = full (sum of the splits).
    frame_cov: Vec<Vec<f64>>,
    /// Working memory of [`push_parallel`](Self::push_parallel), made on its first use.
    batch: Option<FrameBatch>,
}

/// The fixed parts of one frame's analysis (shared, read only, by every worker).
struct FrameAnalysis {
    layout: BandLayout,
    fft: Arc<dyn RealToComplex<f32>>,
    window: Vec<f32>,
    /// Bins per spectrum (N/2 + 1).
    bins: usize,
    /// Power scale of a bin inside the spectrum, 2 / (N Σw²) (one-sided, Parseval); DC and
    /// Nyquist count once, so their amplitudes are first scaled by 1/√2.
    power_scale: f64,
}

/// The working memory of one frame's analysis.
struct FrameScratch {
    fft_in: Vec<f32>,
    fft_scratch: Vec<Complex<f32>>,
    /// Spectra per channel, row-major [channel][bins], as the FFT writes them: read as f32,
    /// a row is re₀ im₀ re₁ im₁ …, so Re(X Xᴴ) over a band is one product of rows.
    spectra: Vec<Complex<f32>>,
    product: Vec<f32>,
}

impl FrameScratch {
    fn new(fft: &dyn RealToComplex<f32>, channels: usize, bins: usize) -> Self {
        Self {
            fft_in: fft.make_input_vec(),
            fft_scratch: fft.make_scratch_vec(),
            spectra: vec![Complex::default(); channels * bins],
            product: vec![0.0; channels * channels],
        }
    }
}

/// Working memory of [`BandCovariance::push_parallel`]: the history and the block end to end
/// per channel, one covariance set per frame of the block, one scratch per worker.
struct FrameBatch {
    /// Planar [channel][filled + block length]: the history, then the block.
    stream: Vec<f32>,
    /// [frame][band][i·M + j].
    frames: Vec<Vec<Vec<f64>>>,
    /// One per thread of the pool (indexed by the worker's index); a lock that is never
    /// contended, because a worker only takes its own.
    scratch: Vec<std::sync::Mutex<FrameScratch>>,
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
        let power_scale = 2.0 / (n as f64 * window_energy);
        Self {
            channels,
            framing,
            scratch: FrameScratch::new(&*fft, channels, bins),
            frame: FrameAnalysis {
                layout: BandLayout::new(framing, sample_rate_hz, edges_hz),
                fft,
                window,
                bins,
                power_scale,
            },
            history: vec![0.0; channels * n],
            filled: 0,
            frame_cov: vec![vec![0.0; channels * channels]; BAND_COUNT],
            batch: None,
        }
    }

    pub fn framing(&self) -> StftFraming {
        self.framing
    }

    pub fn layout(&self) -> &BandLayout {
        &self.frame.layout
    }

    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Moves the band edges; takes effect from the next frame.
    pub fn set_band_edges(&mut self, sample_rate_hz: f64, edges_hz: [f64; 2]) {
        self.frame.layout = BandLayout::new(self.framing, sample_rate_hz, edges_hz);
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
                copy_sanitised(dest, input.get(c).map(|src| &src[offset..offset + take]));
            }
            self.filled += take;
            offset += take;
            if self.filled == n {
                let history = &self.history;
                self.frame.analyse(
                    |c| &history[c * n..(c + 1) * n],
                    self.channels,
                    &mut self.scratch,
                    &mut self.frame_cov,
                );
                on_frame(&self.frame_cov);
                let hop = self.framing.hop;
                for c in 0..self.channels {
                    self.history.copy_within(c * n + hop..(c + 1) * n, c * n);
                }
                self.filled = n - hop;
            }
        }
    }

    /// [`push`](Self::push) with the frames of the block analysed at once on the threads of
    /// the rayon pool; `on_frame` is then called for each, in order, on the calling thread.
    /// Every frame is the same pure function of its samples as in `push`, so the covariances
    /// are the same bits. Allocates on the first call and when a block is longer than any
    /// before (for a scanner, not an audio thread).
    pub fn push_parallel(&mut self, input: &[&[f32]], mut on_frame: impl FnMut(&[Vec<f64>])) {
        use rayon::prelude::*;
        let frames = input.first().map_or(0, |c| c.len());
        let (n, hop, m) = (self.framing.frame_len, self.framing.hop, self.channels);
        let stride = self.filled + frames;
        if stride < n {
            // No frame completes: the plain path only copies.
            return self.push(input, on_frame);
        }
        let count = (stride - n) / hop + 1;
        let threads = rayon::current_num_threads().max(1);
        let bins = self.framing.bins();
        let batch = self.batch.get_or_insert_with(|| FrameBatch {
            stream: Vec::new(),
            frames: Vec::new(),
            scratch: Vec::new(),
        });
        batch.stream.resize(m * stride, 0.0);
        while batch.frames.len() < count {
            batch.frames.push(vec![vec![0.0; m * m]; BAND_COUNT]);
        }
        while batch.scratch.len() < threads {
            let scratch = FrameScratch::new(&*self.frame.fft, m, bins);
            batch.scratch.push(std::sync::Mutex::new(scratch));
        }
        for c in 0..m {
            let row = &mut batch.stream[c * stride..(c + 1) * stride];
            let (kept, fresh) = row.split_at_mut(self.filled);
            kept.copy_from_slice(&self.history[c * n..c * n + self.filled]);
            copy_sanitised(fresh, input.get(c).map(|src| &src[..frames]));
        }
        let (frame, stream, scratch) = (&self.frame, &batch.stream, &batch.scratch);
        batch.frames[..count]
            .par_iter_mut()
            .enumerate()
            .for_each(|(f, out)| {
                let slot = rayon::current_thread_index().unwrap_or(0) % scratch.len();
                let mut scratch = scratch[slot].lock().unwrap_or_else(|e| e.into_inner());
                let start = f * hop;
                let samples = |c: usize| &stream[c * stride + start..c * stride + start + n];
                frame.analyse(samples, m, &mut scratch, out);
            });
        for out in &batch.frames[..count] {
            on_frame(out);
        }
        // What the next frame needs: everything from the start of the frame after the last.
        let next = count * hop;
        self.filled = stride - next;
        for c in 0..m {
            let tail = &batch.stream[c * stride + next..(c + 1) * stride];
            self.history[c * n..c * n + self.filled].copy_from_slice(tail);
        }
    }
}

impl FrameAnalysis {
    /// The band covariances of one frame: `samples(c)` is channel c's `frame_len` samples.
    fn analyse<'a>(
        &self,
        samples: impl Fn(usize) -> &'a [f32],
        m: usize,
        scratch: &mut FrameScratch,
        frame_cov: &mut [Vec<f64>],
    ) {
        let bins = self.bins;
        for c in 0..m {
            let src = samples(c);
            for ((d, &s), &w) in scratch.fft_in.iter_mut().zip(src).zip(&self.window) {
                *d = s * w;
            }
            let spectrum = &mut scratch.spectra[c * bins..(c + 1) * bins];
            // Lengths come from the plan itself, so this cannot fail.
            let _ = self.fft.process_with_scratch(
                &mut scratch.fft_in,
                spectrum,
                &mut scratch.fft_scratch,
            );
            // DC and Nyquist appear once in a one-sided spectrum, the other bins twice.
            spectrum[0] *= std::f32::consts::FRAC_1_SQRT_2;
            spectrum[bins - 1] *= std::f32::consts::FRAC_1_SQRT_2;
        }
        let flat = complex_as_f32(&scratch.spectra);
        frame_cov[0].fill(0.0);
        for band in 0..3 {
            let range = self.layout.split_range(band);
            let (full_cov, split_covs) = frame_cov.split_at_mut(1);
            let cov = &mut split_covs[band];
            if range.is_empty() {
                cov.fill(0.0);
                continue;
            }
            gram(
                &flat[2 * range.start..],
                m,
                2 * range.len(),
                2 * bins,
                &mut scratch.product,
            );
            for (dst, &p) in cov.iter_mut().zip(&scratch.product) {
                *dst = f64::from(p) * self.power_scale;
            }
            for (full, &p) in full_cov[0].iter_mut().zip(cov.iter()) {
                *full += p;
            }
        }
    }
}

/// Copies `src` into `dest` (same length) with NaN and ±∞ as 0, since they would poison every
/// later estimate; a missing channel (`None`) is silence.
fn copy_sanitised(dest: &mut [f32], src: Option<&[f32]>) {
    match src {
        Some(src) => {
            for (d, &s) in dest.iter_mut().zip(src) {
                *d = if s.is_finite() { s } else { 0.0 };
            }
        }
        None => dest.fill(0.0),
    }
}

/// A complex slice read as its re, im, re, im … parts.
fn complex_as_f32(values: &[Complex<f32>]) -> &[f32] {
    // SAFETY: `Complex<f32>` is `#[repr(C)]` with fields `re`, `im` (num-complex documents
    // this layout), so n values are 2n consecutive f32 with the same alignment.
    unsafe { std::slice::from_raw_parts(values.as_ptr().cast::<f32>(), 2 * values.len()) }
}

/// product = A·Aᵀ where A is `rows × cols`, row stride `row_stride`, starting at `a[0]`.
///
/// Hand-written rather than a general matrix product: the rows are already contiguous, so the
/// dot-product form needs no packing (a general product spent more time packing than
/// multiplying at 16 channels), and only the upper triangle is computed, then mirrored, so the
/// result is exactly symmetric. Every entry is summed the same way whatever the tile that
/// computes it and whatever the CPU: eight lanes over k (lane l takes k ≡ l mod 8, in order,
/// fused multiply-adds), the lanes added pairwise, then the remainder columns in order. With
/// AVX2 and FMA the lanes are one register; without, the same fused operations run one by one
/// (the same bits, more slowly).
fn gram(a: &[f32], rows: usize, cols: usize, row_stride: usize, product: &mut [f32]) {
    assert!(rows == 0 || a.len() >= (rows - 1) * row_stride + cols);
    assert!(product.len() >= rows * rows);
    let row = |i: usize| &a[i * row_stride..i * row_stride + cols];
    let dot_2x4 = tile_kernel();
    // Tiles of 2 rows × 4 rows (8 accumulators, 6 inputs in registers) on and above the
    // diagonal; at the edges a tile repeats its last row and only its real entries are kept.
    for i in (0..rows).step_by(2) {
        let left = [row(i), row((i + 1).min(rows - 1))];
        for j in (i - i % 4..rows).step_by(4) {
            let right: [&[f32]; 4] = std::array::from_fn(|y| row((j + y).min(rows - 1)));
            let tile = dot_2x4(left, right);
            for (x, line) in tile.iter().enumerate() {
                for (y, &value) in line.iter().enumerate() {
                    if i + x < rows && j + y < rows {
                        product[(i + x) * rows + j + y] = value;
                    }
                }
            }
        }
    }
    // Mirror: below the diagonal from above it (the tiles also wrote some entries below the
    // diagonal, with the same value).
    for i in 1..rows {
        for j in 0..i {
            product[i * rows + j] = product[j * rows + i];
        }
    }
}

/// Lanes of the dot products (one 256-bit register of f32).
const GRAM_LANES: usize = 8;

/// Dot products of 2 rows with 4 rows (equal lengths), each summed as described at [`gram`].
/// Called through a pointer, so the CPU is asked once per product rather than once per tile.
type TileKernel = fn([&[f32]; 2], [&[f32]; 4]) -> [[f32; 4]; 2];

/// The tile kernel for this CPU: AVX2 and FMA registers where it has them, else the portable
/// one (the same bits).
fn tile_kernel() -> TileKernel {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") && std::arch::is_x86_feature_detected!("fma")
        {
            return |left, right| {
                assert!(left.iter().chain(&right).all(|r| r.len() == left[0].len()));
                // SAFETY: the CPU has AVX2 and FMA (checked above); every row holds as many
                // values as the first (asserted).
                unsafe { dot_2x4_fma(left, right) }
            };
        }
    }
    dot_2x4_portable
}

/// The tile one fused operation at a time.
#[inline(always)]
fn dot_2x4_portable(left: [&[f32]; 2], right: [&[f32]; 4]) -> [[f32; 4]; 2] {
    let full = left[0].len() - left[0].len() % GRAM_LANES;
    let mut lanes = [[[0.0f32; GRAM_LANES]; 4]; 2];
    for k in (0..full).step_by(GRAM_LANES) {
        for (x, l) in left.iter().enumerate() {
            for (y, r) in right.iter().enumerate() {
                for (lane, acc) in lanes[x][y].iter_mut().enumerate() {
                    *acc = l[k + lane].mul_add(r[k + lane], *acc);
                }
            }
        }
    }
    finish_2x4(&lanes, left, right, full)
}

/// The eight lanes of each pair added pairwise, then the columns past the last whole group.
#[inline(always)]
fn finish_2x4(
    lanes: &[[[f32; GRAM_LANES]; 4]; 2],
    left: [&[f32]; 2],
    right: [&[f32]; 4],
    full: usize,
) -> [[f32; 4]; 2] {
    let mut sums = [[0.0f32; 4]; 2];
    for x in 0..2 {
        for y in 0..4 {
            let v = &lanes[x][y];
            let mut sum = ((v[0] + v[1]) + (v[2] + v[3])) + ((v[4] + v[5]) + (v[6] + v[7]));
            for k in full..left[x].len() {
                sum = left[x][k].mul_add(right[y][k], sum);
            }
            sums[x][y] = sum;
        }
    }
    sums
}

/// The tile with AVX2 and FMA: the eight lanes of each pair are one register.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,fma")]
unsafe fn dot_2x4_fma(left: [&[f32]; 2], right: [&[f32]; 4]) -> [[f32; 4]; 2] {
    use std::arch::x86_64::*;
    let full = left[0].len() - left[0].len() % GRAM_LANES;
    let (l0, l1) = (left[0].as_ptr(), left[1].as_ptr());
    let r = [
        right[0].as_ptr(),
        right[1].as_ptr(),
        right[2].as_ptr(),
        right[3].as_ptr(),
    ];
    let mut acc = [_mm256_setzero_ps(); 8];
    let mut k = 0;
    while k < full {
        // SAFETY: k + 8 ≤ full ≤ the length of every row (asserted by the caller).
        unsafe {
            let (a0, a1) = (_mm256_loadu_ps(l0.add(k)), _mm256_loadu_ps(l1.add(k)));
            for y in 0..4 {
                let b = _mm256_loadu_ps(r[y].add(k));
                acc[y] = _mm256_fmadd_ps(a0, b, acc[y]);
                acc[4 + y] = _mm256_fmadd_ps(a1, b, acc[4 + y]);
            }
        }
        k += GRAM_LANES;
    }
    let mut lanes = [[[0.0f32; GRAM_LANES]; 4]; 2];
    for (n, v) in acc.iter().enumerate() {
        // SAFETY: a store of 8 f32 into an array of 8 f32.
        unsafe { _mm256_storeu_ps(lanes[n / 4][n % 4].as_mut_ptr(), *v) };
    }
    // Inlined here, so the remainder's fused multiply-adds are instructions too.
    finish_2x4(&lanes, left, right, full)
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

    /// The register tile and the portable one-by-one fused sums give the same bits (on a CPU
    /// with AVX2 and FMA this compares the two paths).
    #[test]
    fn register_tiles_sum_like_the_portable_path() {
        for cols in [0, 5, 8, 37, 1026] {
            let rows: Vec<Vec<f32>> = (0..6)
                .map(|r| {
                    (0..cols)
                        .map(|k| ((r * 31 + k * 17) % 97) as f32 / 97.0 - 0.4)
                        .collect()
                })
                .collect();
            let left = [rows[0].as_slice(), &rows[1]];
            let right = [rows[2].as_slice(), &rows[3], &rows[4], &rows[5]];
            let tile = tile_kernel()(left, right);
            let portable = dot_2x4_portable(left, right);
            for x in 0..2 {
                for y in 0..4 {
                    assert_eq!(
                        tile[x][y].to_bits(),
                        portable[x][y].to_bits(),
                        "cols {cols}"
                    );
                }
            }
        }
    }

    #[test]
    fn gram_matches_plain_dot_products_and_is_symmetric() {
        for rows in [1, 4, 15, 16, 17, 36, 64] {
            let (cols, stride) = (37, 41);
            let a: Vec<f32> = (0..rows * stride)
                .map(|i| ((i * 7919) % 1009) as f32 / 1009.0 - 0.5)
                .collect();
            let mut product = vec![f32::NAN; rows * rows];
            gram(&a, rows, cols, stride, &mut product);
            for i in 0..rows {
                for j in 0..rows {
                    let plain: f64 = (0..cols)
                        .map(|k| f64::from(a[i * stride + k]) * f64::from(a[j * stride + k]))
                        .sum();
                    let got = product[i * rows + j];
                    assert!(
                        (f64::from(got) - plain).abs() < 1e-5,
                        "rows {rows} ({i},{j})"
                    );
                    assert_eq!(got.to_bits(), product[j * rows + i].to_bits());
                }
            }
        }
    }

    /// Frames analysed at once on the pool are the very frames of the one-by-one path, in the
    /// same order, whatever the block sizes, with non-finite samples, and when the two paths
    /// take turns on one stream.
    #[test]
    fn frames_on_the_pool_match_frames_one_by_one_bit_for_bit() {
        let fs = 48_000.0;
        let channels = 9;
        let len = 20_000;
        let mut state = 0x853C_49E6_748F_EA9Bu64;
        let signal: Vec<Vec<f32>> = (0..channels)
            .map(|c| {
                (0..len)
                    .map(|i| {
                        state = state
                            .wrapping_mul(6_364_136_223_846_793_005)
                            .wrapping_add(1_442_695_040_888_963_407);
                        let noise = (state >> 40) as f32 / (1u64 << 24) as f32 - 0.5;
                        if c == 2 && i == 7_000 {
                            f32::NAN
                        } else {
                            noise
                        }
                    })
                    .collect()
            })
            .collect();
        let run = |blocks: &[usize], parallel: &dyn Fn(usize) -> bool| {
            let mut cov = BandCovariance::new(channels, fs, [250.0, 4000.0]);
            let mut frames: Vec<Vec<Vec<f64>>> = Vec::new();
            let (mut start, mut turn) = (0, 0);
            while start < len {
                let take = blocks[turn % blocks.len()].min(len - start);
                let block: Vec<&[f32]> = signal.iter().map(|c| &c[start..start + take]).collect();
                let keep = |bands: &[Vec<f64>]| frames.push(bands.to_vec());
                if parallel(turn) {
                    cov.push_parallel(&block, keep);
                } else {
                    cov.push(&block, keep);
                }
                start += take;
                turn += 1;
            }
            frames
        };
        let reference = run(&[4096], &|_| false);
        assert_eq!(reference.len(), (len - 1024) / 512 + 1);
        for (blocks, parallel) in [
            (vec![4096], &(|_| true) as &dyn Fn(usize) -> bool),
            (vec![1000, 37, 3000, 512, 1], &|_| true),
            (vec![2048, 777], &|turn| turn % 2 == 0),
        ] {
            let frames = run(&blocks, parallel);
            assert_eq!(frames.len(), reference.len(), "{blocks:?}");
            for (a, b) in frames.iter().zip(&reference) {
                for (x, y) in a.iter().flatten().zip(b.iter().flatten()) {
                    assert_eq!(x.to_bits(), y.to_bits(), "{blocks:?}");
                }
            }
        }
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
