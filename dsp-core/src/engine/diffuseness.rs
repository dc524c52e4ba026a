//! Whole-programme diffuseness as DirAC defines it: a short-time measure (Pulkki 2007), so the
//! whole-programme figure is the energy-weighted mean of short-time values, never ψ of a
//! covariance averaged over the programme (two sources that take turns from opposite sides
//! would average to an intensity of zero and read as fully diffuse).
//!
//! Per STFT frame and band the first-order SN3D energies and intensity are smoothed with a
//! one-pole integrator of [`SHORT_TIME_CONSTANT_S`]; ψ_t = 1 − 2‖I_t‖/E_t of the smoothed
//! values is averaged with weight E_t.

use crate::covariance::BAND_COUNT;

/// Time constant of the short-time DirAC average, seconds. DirAC analyses integrate over
/// tens of milliseconds (Pulkki 2007 smooths intensity and energy over a few periods); 100 ms
/// spans about ten 21 ms STFT frames, enough for a band of many bins to estimate ψ of a diffuse
/// field near 1, short enough that sources taking turns are seen one at a time.
pub const SHORT_TIME_CONSTANT_S: f64 = 0.1;

/// First-order SN3D second moments of one frame and band: W², X², Y², Z², then ⟨W·X⟩, ⟨W·Y⟩,
/// ⟨W·Z⟩ (the active intensity up to a constant).
pub type FirstOrderMoments = [f64; 7];

/// The moments from a covariance given by `entry(a, b)` = R[ACN a][ACN b] in SN3D.
pub fn first_order_moments(entry: impl Fn(usize, usize) -> f64) -> FirstOrderMoments {
    // ACN 3, 1, 2 are X, Y, Z.
    [
        entry(0, 0),
        entry(3, 3),
        entry(1, 1),
        entry(2, 2),
        entry(0, 3),
        entry(0, 1),
        entry(0, 2),
    ]
}

/// DirAC energy E = W² + X² + Y² + Z² (SN3D) and diffuseness ψ = 1 − 2‖I‖/E of `moments`
/// (Pulkki 2007), or `None` without energy.
pub fn energy_and_diffuseness(moments: &FirstOrderMoments) -> Option<(f64, f64)> {
    let energy = moments[0] + moments[1] + moments[2] + moments[3];
    if !(energy.is_finite() && energy > 0.0) {
        return None;
    }
    let [.., ix, iy, iz] = *moments;
    let intensity = (ix * ix + iy * iy + iz * iz).sqrt();
    Some((energy, (1.0 - 2.0 * intensity / energy).clamp(0.0, 1.0)))
}

/// Energy-weighted mean of short-time diffuseness, per band.
#[derive(Clone, Debug)]
pub struct DiffusenessTracker {
    alpha: f64,
    smoothed: [FirstOrderMoments; BAND_COUNT],
    weighted_psi: [f64; BAND_COUNT],
    energy: [f64; BAND_COUNT],
}

impl DiffusenessTracker {
    /// A tracker for frames `hop` samples apart at `sample_rate_hz`.
    pub fn new(hop: usize, sample_rate_hz: f64) -> Self {
        Self {
            alpha: (-(hop as f64) / (SHORT_TIME_CONSTANT_S * sample_rate_hz)).exp(),
            smoothed: [[0.0; 7]; BAND_COUNT],
            weighted_psi: [0.0; BAND_COUNT],
            energy: [0.0; BAND_COUNT],
        }
    }

    /// Adds one frame of `band`.
    pub fn push(&mut self, band: usize, frame: &FirstOrderMoments) {
        let s = &mut self.smoothed[band];
        for (v, &f) in s.iter_mut().zip(frame) {
            *v = self.alpha * *v + (1.0 - self.alpha) * f;
        }
        let Some((energy, psi)) = energy_and_diffuseness(s) else {
            return;
        };
        self.weighted_psi[band] += energy * psi;
        self.energy[band] += energy;
    }

    /// Energy-weighted mean diffuseness of `band`, or `None` before any energy.
    pub fn mean(&self, band: usize) -> Option<f64> {
        let e = self.energy[band];
        (e > 0.0 && e.is_finite()).then(|| self.weighted_psi[band] / e)
    }

    /// Forgets `band` (smoothing state and averages).
    pub fn reset_band(&mut self, band: usize) {
        self.smoothed[band] = [0.0; 7];
        self.weighted_psi[band] = 0.0;
        self.energy[band] = 0.0;
    }

    /// Forgets every band.
    pub fn reset(&mut self) {
        for band in 0..BAND_COUNT {
            self.reset_band(band);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plane_wave(direction: [f64; 3], power: f64) -> FirstOrderMoments {
        // SN3D: X, Y, Z = W·(x, y, z).
        let [x, y, z] = direction;
        [
            power,
            power * x * x,
            power * y * y,
            power * z * z,
            power * x,
            power * y,
            power * z,
        ]
    }

    #[test]
    fn sources_taking_turns_are_not_diffuse() {
        // A source at +90° for 5 s, then one at −90° for 5 s (the case that read 1.00 when
        // ψ was taken from the programme-averaged covariance).
        let mut t = DiffusenessTracker::new(512, 48_000.0);
        let frames = (5.0 * 48_000.0 / 512.0) as usize;
        for _ in 0..frames {
            t.push(0, &plane_wave([0.0, 1.0, 0.0], 0.1));
        }
        for _ in 0..frames {
            t.push(0, &plane_wave([0.0, -1.0, 0.0], 0.1));
        }
        let psi = t.mean(0).unwrap();
        assert!(psi < 0.02, "ψ = {psi}");
    }

    #[test]
    fn diffuse_field_reads_one_and_is_energy_weighted() {
        let mut t = DiffusenessTracker::new(512, 48_000.0);
        // Isotropic diffuse field in SN3D: each first-order component carries W²/3, no intensity.
        let diffuse = [0.3, 0.1, 0.1, 0.1, 0.0, 0.0, 0.0];
        for _ in 0..1000 {
            t.push(1, &diffuse);
        }
        assert!((t.mean(1).unwrap() - 1.0).abs() < 1e-9);
        // Much quieter plane-wave frames hardly move an energy-weighted mean.
        for _ in 0..1000 {
            t.push(1, &plane_wave([1.0, 0.0, 0.0], 0.0006));
        }
        let psi = t.mean(1).unwrap();
        assert!(psi > 0.99, "ψ = {psi}");
        assert_eq!(t.mean(2), None);
        t.reset_band(1);
        assert_eq!(t.mean(1), None);
    }
}
