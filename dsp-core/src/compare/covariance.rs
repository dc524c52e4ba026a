//! Broadband second moments of two aligned streams: Σ r·rᵀ, Σ c·cᵀ and Σ c·rᵀ over every frame,
//! each K×K for K channels (ACN/SN3D). Everything the orientation and channel-fault estimates
//! need; the stream itself is never kept.

/// Accumulated moments of a reference (r) and candidate (c) stream with the same channels.
#[derive(Clone, Debug)]
pub struct PairCovariance {
    channels: usize,
    frames: u64,
    /// Row-major K×K.
    rr: Vec<f64>,
    cc: Vec<f64>,
    /// cr[i·K + j] = Σ c_i·r_j.
    cr: Vec<f64>,
    scratch_r: Vec<f64>,
    scratch_c: Vec<f64>,
}

impl PairCovariance {
    pub fn new(channels: usize) -> Self {
        Self {
            channels,
            frames: 0,
            rr: vec![0.0; channels * channels],
            cc: vec![0.0; channels * channels],
            cr: vec![0.0; channels * channels],
            scratch_r: Vec::new(),
            scratch_c: Vec::new(),
        }
    }

    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Frames accumulated.
    pub fn frames(&self) -> u64 {
        self.frames
    }

    /// Adds one block: `reference` and `candidate` hold K planar channels of the same length.
    /// Allocates only when a block is longer than any before.
    ///
    /// # Panics
    /// If the channel counts or lengths disagree (a caller bug).
    pub fn push(&mut self, reference: &[&[f32]], candidate: &[&[f32]]) {
        let k = self.channels;
        assert!(
            reference.len() == k && candidate.len() == k,
            "channel count"
        );
        let n = reference.first().map_or(0, |c| c.len());
        assert!(
            reference.iter().chain(candidate).all(|c| c.len() == n),
            "block lengths"
        );
        if n == 0 {
            return;
        }
        for (scratch, planes) in [
            (&mut self.scratch_r, reference),
            (&mut self.scratch_c, candidate),
        ] {
            scratch.clear();
            for plane in planes {
                scratch.extend(plane.iter().map(|&v| v as f64));
            }
        }
        gram(&self.scratch_r, &self.scratch_r, k, n, &mut self.rr);
        gram(&self.scratch_c, &self.scratch_c, k, n, &mut self.cc);
        gram(&self.scratch_c, &self.scratch_r, k, n, &mut self.cr);
        self.frames += n as u64;
    }

    /// Σ r_i·r_j.
    pub fn rr(&self, i: usize, j: usize) -> f64 {
        self.rr[i * self.channels + j]
    }

    /// Σ c_i·c_j.
    pub fn cc(&self, i: usize, j: usize) -> f64 {
        self.cc[i * self.channels + j]
    }

    /// Σ c_i·r_j.
    pub fn cr(&self, i: usize, j: usize) -> f64 {
        self.cr[i * self.channels + j]
    }
}

/// out += A·Bᵀ for planar A, B (k rows of n frames each), out k×k row-major.
fn gram(a: &[f64], b: &[f64], k: usize, n: usize, out: &mut [f64]) {
    assert!(a.len() >= k * n && b.len() >= k * n && out.len() >= k * k);
    // SAFETY: the assert bounds every index: A and B are read at i·n + t for i < k, t < n;
    // out is written at i·k + j for i, j < k.
    unsafe {
        matrixmultiply::dgemm(
            k,
            n,
            k,
            1.0,
            a.as_ptr(),
            n as isize,
            1,
            b.as_ptr(),
            1,
            n as isize,
            1.0,
            out.as_mut_ptr(),
            k as isize,
            1,
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn moments_equal_direct_sums() {
        let r = [[1.0f32, 2.0, -1.0], [0.5, 0.0, 3.0]];
        let c = [[2.0f32, -1.0, 0.0], [1.0, 1.0, 1.0]];
        let mut m = PairCovariance::new(2);
        m.push(&[&r[0][..2], &r[1][..2]], &[&c[0][..2], &c[1][..2]]);
        m.push(&[&r[0][2..], &r[1][2..]], &[&c[0][2..], &c[1][2..]]);
        for i in 0..2 {
            for j in 0..2 {
                let dot = |x: &[f32; 3], y: &[f32; 3]| -> f64 {
                    x.iter().zip(y).map(|(a, b)| (a * b) as f64).sum()
                };
                assert_eq!(m.rr(i, j), dot(&r[i], &r[j]));
                assert_eq!(m.cc(i, j), dot(&c[i], &c[j]));
                assert_eq!(m.cr(i, j), dot(&c[i], &r[j]));
            }
        }
        assert_eq!(m.frames(), 3);
    }
}
