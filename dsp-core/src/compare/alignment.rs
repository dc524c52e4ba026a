//! Time offset between two streams from the cross-correlation of their W channels, streamed in
//! constant memory.
//!
//! X[k] = Σ_t r[t]·c[t+k] for lags |k| ≤ L: a positive lag means the candidate is later. The
//! reference is cut into blocks of B frames; each block is correlated with the candidate frames
//! [start−L, start+B+L) by one FFT product of size N = B+2L rounded up to a power of two (no
//! wrap-around: t+s < B+2L ≤ N for every block frame t and shift s ≤ 2L), and the block results
//! add up to X. Memory is a few N-sized buffers whatever the stream length.

use realfft::num_complex::Complex;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use std::sync::Arc;

/// Smallest FFT size used (keeps blocks efficient for short lag ranges).
const MIN_FFT_LEN: usize = 1 << 14;

/// The lag with the largest |X[k]| and its value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OffsetEstimate {
    /// Frames; positive = the candidate is later.
    pub offset_frames: i64,
    /// X at that lag (unnormalised; its sign tells an inverted W).
    pub cross_correlation: f64,
}

/// Streaming search for the offset between a reference and a candidate W.
pub struct OffsetSearch {
    max_lag: usize,
    block: usize,
    forward: Arc<dyn RealToComplex<f64>>,
    inverse: Arc<dyn ComplexToReal<f64>>,
    /// Reference frames not yet correlated, from the current block's start.
    reference: Vec<f64>,
    /// Candidate frames from (current block start − L); starts with L zeros.
    candidate: Vec<f64>,
    /// X[k + L] for k in −L..=L.
    sums: Vec<f64>,
    a: Vec<f64>,
    b: Vec<f64>,
    spectrum_a: Vec<Complex<f64>>,
    spectrum_b: Vec<Complex<f64>>,
    product: Vec<f64>,
    scratch: Vec<Complex<f64>>,
    reference_ended: bool,
    candidate_ended: bool,
}

impl OffsetSearch {
    /// A search over lags −`max_lag_frames` ..= `max_lag_frames`.
    pub fn new(max_lag_frames: usize) -> Self {
        let l = max_lag_frames;
        let n = (4 * l).next_power_of_two().max(MIN_FFT_LEN);
        let block = n - 2 * l;
        let mut planner = RealFftPlanner::<f64>::new();
        let forward = planner.plan_fft_forward(n);
        let inverse = planner.plan_fft_inverse(n);
        let scratch_len = forward.get_scratch_len().max(inverse.get_scratch_len());
        Self {
            max_lag: l,
            block,
            reference: Vec::with_capacity(2 * block),
            candidate: {
                let mut c = Vec::with_capacity(2 * n);
                c.resize(l, 0.0);
                c
            },
            sums: vec![0.0; 2 * l + 1],
            a: forward.make_input_vec(),
            b: forward.make_input_vec(),
            spectrum_a: forward.make_output_vec(),
            spectrum_b: forward.make_output_vec(),
            product: inverse.make_output_vec(),
            scratch: vec![Complex::default(); scratch_len],
            forward,
            inverse,
            reference_ended: false,
            candidate_ended: false,
        }
    }

    /// Largest lag searched, frames.
    pub fn max_lag_frames(&self) -> usize {
        self.max_lag
    }

    /// Appends reference W frames.
    pub fn push_reference(&mut self, w: &[f32]) {
        self.reference.extend(w.iter().map(|&v| v as f64));
        self.correlate_ready_blocks(false);
    }

    /// Appends candidate W frames. Frames no reference frame can meet are not kept.
    pub fn push_candidate(&mut self, w: &[f32]) {
        let keep = if self.reference_ended {
            (self.reference.len() + 2 * self.max_lag)
                .saturating_sub(self.candidate.len())
                .min(w.len())
        } else {
            w.len()
        };
        self.candidate.extend(w[..keep].iter().map(|&v| v as f64));
        self.correlate_ready_blocks(false);
    }

    /// The reference has no more frames (its last block is correlated as soon as the
    /// candidate frames it needs are in).
    pub fn end_reference(&mut self) {
        self.reference_ended = true;
        self.correlate_ready_blocks(false);
    }

    /// The candidate has no more frames (the rest counts as zeros), so reference blocks need
    /// not wait for it: memory stays bounded when one stream is much longer.
    pub fn end_candidate(&mut self) {
        self.candidate_ended = true;
        self.correlate_ready_blocks(false);
    }

    /// Frames held in the buffers (for tests of the memory bound).
    pub fn buffered_frames(&self) -> usize {
        self.reference.len() + self.candidate.len()
    }

    /// Correlates what is left (both streams end here) and returns the best lag, or `None`
    /// if either W is silent at every lag.
    pub fn finish(mut self) -> Option<OffsetEstimate> {
        self.reference_ended = true;
        self.candidate_ended = true;
        self.correlate_ready_blocks(true);
        let (index, &value) = self
            .sums
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()))?;
        (value != 0.0 && value.is_finite()).then(|| OffsetEstimate {
            offset_frames: index as i64 - self.max_lag as i64,
            cross_correlation: value,
        })
    }

    fn correlate_ready_blocks(&mut self, at_end: bool) {
        let (b, l) = (self.block, self.max_lag);
        loop {
            // A block is ready when its reference frames are in (all b, or the last few) and
            // the candidate frames it meets are in (or the candidate has ended).
            let ref_frames = self.reference.len().min(b);
            let ref_ready = self.reference.len() >= b || (self.reference_ended && ref_frames > 0);
            let cand_ready = self.candidate.len() >= ref_frames + 2 * l || self.candidate_ended;
            if !(ref_ready && cand_ready) {
                return;
            }
            let cand_frames = self.candidate.len().min(b + 2 * l);
            self.a.fill(0.0);
            self.a[..ref_frames].copy_from_slice(&self.reference[..ref_frames]);
            self.b.fill(0.0);
            self.b[..cand_frames].copy_from_slice(&self.candidate[..cand_frames]);
            self.correlate_block();
            self.reference.drain(..ref_frames);
            let drop = ref_frames.min(self.candidate.len());
            self.candidate.drain(..drop);
            if self.reference_ended && self.reference.is_empty() {
                // Nothing left for any candidate frame to meet.
                self.candidate.clear();
                self.candidate_ended = true;
            }
            if at_end && self.reference.is_empty() {
                return;
            }
        }
    }

    /// sums[s] += Σ_t a[t]·b[t+s] for s in 0..=2L, through IFFT(conj(A)·B).
    fn correlate_block(&mut self) {
        // The buffers are sized by the plans, so the transforms cannot fail.
        let _ =
            self.forward
                .process_with_scratch(&mut self.a, &mut self.spectrum_a, &mut self.scratch);
        let _ =
            self.forward
                .process_with_scratch(&mut self.b, &mut self.spectrum_b, &mut self.scratch);
        for (x, y) in self.spectrum_b.iter_mut().zip(&self.spectrum_a) {
            *x *= y.conj();
        }
        // The inverse of a real signal's spectrum needs real DC and Nyquist bins.
        if let Some(first) = self.spectrum_b.first_mut() {
            first.im = 0.0;
        }
        if let Some(last) = self.spectrum_b.last_mut() {
            last.im = 0.0;
        }
        let _ = self.inverse.process_with_scratch(
            &mut self.spectrum_b,
            &mut self.product,
            &mut self.scratch,
        );
        let scale = 1.0 / self.product.len() as f64;
        for (sum, &p) in self.sums.iter_mut().zip(&self.product) {
            *sum += p * scale;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Deterministic noise (a 64-bit LCG's top bits).
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

    fn search(
        reference: &[f32],
        candidate: &[f32],
        max_lag: usize,
        chunk: usize,
    ) -> OffsetEstimate {
        let mut s = OffsetSearch::new(max_lag);
        for (r, c) in reference.chunks(chunk).zip(candidate.chunks(chunk)) {
            s.push_reference(r);
            s.push_candidate(c);
        }
        s.finish().unwrap()
    }

    #[test]
    fn finds_delays_both_ways_against_the_direct_sum() {
        let signal = noise(60_000, 7);
        for &offset in &[1234i64, -777, 0, 3000] {
            // candidate[t] = reference[t − offset] (later for positive offsets).
            let candidate: Vec<f32> = (0..signal.len() as i64)
                .map(|t| {
                    let s = t - offset;
                    if s >= 0 && (s as usize) < signal.len() {
                        signal[s as usize]
                    } else {
                        0.0
                    }
                })
                .collect();
            let found = search(&signal, &candidate, 4000, 4096);
            assert_eq!(found.offset_frames, offset);
            // The value equals the direct sum at that lag.
            let direct: f64 = (0..signal.len() as i64)
                .filter_map(|t| {
                    let u = t + offset;
                    (u >= 0 && (u as usize) < candidate.len())
                        .then(|| signal[t as usize] as f64 * candidate[u as usize] as f64)
                })
                .sum();
            assert!((found.cross_correlation - direct).abs() < 1e-6 * direct.abs());
        }
    }

    #[test]
    fn unequal_lengths_keep_memory_bounded_and_the_sum_exact() {
        let reference = noise(200_000, 9);
        let candidate: Vec<f32> = reference[..30_000].to_vec();
        let mut s = OffsetSearch::new(500);
        let mut most = 0;
        for (i, r) in reference.chunks(4096).enumerate() {
            s.push_reference(r);
            match candidate.chunks(4096).nth(i) {
                Some(c) => s.push_candidate(c),
                None => s.end_candidate(),
            }
            most = most.max(s.buffered_frames());
        }
        s.end_reference();
        // Never more than a block of each plus the lag margin and one read.
        assert!(most < 2 * (16_384 + 4096), "{most}");
        let found = s.finish().unwrap();
        assert_eq!(found.offset_frames, 0);
        let direct: f64 = candidate.iter().map(|&v| (v as f64) * (v as f64)).sum();
        assert!((found.cross_correlation - direct).abs() < 1e-6 * direct);
    }

    #[test]
    fn silence_has_no_offset() {
        let mut s = OffsetSearch::new(100);
        s.push_reference(&[0.0; 1000]);
        s.push_candidate(&[0.0; 1000]);
        assert!(s.finish().is_none());
    }
}
