//! Constant-memory store of gating-block energies for integrated loudness (BS.1770-4 §2.3).

use super::meter::{ABSOLUTE_GATE_LUFS, RELATIVE_GATE_LU, energy_to_lufs, lufs_of_energy};

/// Width of one histogram bin in LU.
pub const GATING_BIN_WIDTH_LU: f64 = 0.01;
/// Upper end of the histogram; louder blocks go into the top bin (their energy is still summed
/// exactly, only their bin position is clamped).
pub const GATING_HISTOGRAM_MAX_LUFS: f64 = 10.0;

const BIN_COUNT: usize =
    ((GATING_HISTOGRAM_MAX_LUFS - ABSOLUTE_GATE_LUFS) / GATING_BIN_WIDTH_LU + 0.5) as usize;

/// Histogram of gating-block loudness from the absolute gate (−70 LUFS) to +10 LUFS in
/// 0.01 LU bins, holding per bin the block count and the exact sum of block energies.
///
/// Energy sums are exact, so the only approximation is deciding the relative gate for blocks
/// in the one bin that straddles it: that bin is kept whole when its mean block loudness is
/// above the gate. Only blocks within 0.01 LU of the gate can be misclassified, which moves the
/// integrated loudness by well under 0.01 LU.
#[derive(Debug, Clone)]
pub struct GatingHistogram {
    counts: Vec<u64>,
    energy_sums: Vec<f64>,
}

impl Default for GatingHistogram {
    fn default() -> Self {
        Self::new()
    }
}

impl GatingHistogram {
    /// Allocates the bins (8000 × (u64 + f64)).
    pub fn new() -> Self {
        Self {
            counts: vec![0; BIN_COUNT],
            energy_sums: vec![0.0; BIN_COUNT],
        }
    }

    /// Adds one gating block by its mean-square energy `z` (K-weighted). Blocks at or below the
    /// absolute gate are dropped, as the gate would drop them anyway.
    pub fn add_block(&mut self, block_energy: f64) {
        let Some(loudness_lufs) = lufs_of_energy(block_energy) else {
            return;
        };
        if loudness_lufs <= ABSOLUTE_GATE_LUFS {
            return;
        }
        let bin = ((loudness_lufs - ABSOLUTE_GATE_LUFS) / GATING_BIN_WIDTH_LU) as usize;
        let bin = bin.min(BIN_COUNT - 1);
        self.counts[bin] += 1;
        self.energy_sums[bin] += block_energy;
    }

    /// Number of blocks above the absolute gate.
    pub fn block_count(&self) -> u64 {
        self.counts.iter().sum()
    }

    /// Gated integrated loudness in LUFS, or `None` when no block passes the gates.
    pub fn integrated_lufs(&self) -> Option<f64> {
        let (count, energy) = self.sums_from_bin(0);
        if count == 0 {
            return None;
        }
        let relative_gate_lufs = energy_to_lufs(energy / count as f64) + RELATIVE_GATE_LU;
        let first_bin = ((relative_gate_lufs - ABSOLUTE_GATE_LUFS) / GATING_BIN_WIDTH_LU).floor();
        let first_bin = first_bin.max(0.0) as usize;
        if first_bin >= BIN_COUNT {
            return None;
        }
        let (mut count, mut energy) = self.sums_from_bin(first_bin + 1);
        // The straddling bin: keep it whole when its blocks are, on average, above the gate.
        let straddle_count = self.counts[first_bin];
        if straddle_count > 0 {
            let straddle_energy = self.energy_sums[first_bin];
            if energy_to_lufs(straddle_energy / straddle_count as f64) > relative_gate_lufs {
                count += straddle_count;
                energy += straddle_energy;
            }
        }
        (count > 0).then(|| energy_to_lufs(energy / count as f64))
    }

    /// Empties the histogram.
    pub fn clear(&mut self) {
        self.counts.fill(0);
        self.energy_sums.fill(0.0);
    }

    fn sums_from_bin(&self, first_bin: usize) -> (u64, f64) {
        let counts = self.counts.get(first_bin..).unwrap_or(&[]);
        let energies = self.energy_sums.get(first_bin..).unwrap_or(&[]);
        (counts.iter().sum(), energies.iter().sum())
    }
}
