//! Constant-memory store of gating-block energies for integrated loudness (BS.1770-4 §2.3).

use super::meter::{ABSOLUTE_GATE_LUFS, RELATIVE_GATE_LU, energy_to_lufs, lufs_of_energy};

/// Width of one histogram bin in LU.
pub const GATING_BIN_WIDTH_LU: f64 = 0.01;
/// Upper end of the histogram: above any level a finite f32 programme can reach, so float
/// programmes far over full scale keep a defined, exact integrated loudness. (The K-filter's
/// impulse response has an L1 norm below 3.5 at every supported rate, so a K-weighted block of
/// finite f32 samples stays below `−0.691 + 20·log10(3.5 · f32::MAX)` ≈ +781 LUFS; anything louder
/// would still be summed exactly, only its bin position clamped.)
pub const GATING_HISTOGRAM_MAX_LUFS: f64 = 790.0;

const BIN_COUNT: usize =
    ((GATING_HISTOGRAM_MAX_LUFS - ABSOLUTE_GATE_LUFS) / GATING_BIN_WIDTH_LU + 0.5) as usize;

/// Histogram of gating-block loudness from the absolute gate (−70 LUFS) to
/// [`GATING_HISTOGRAM_MAX_LUFS`] in 0.01 LU bins, holding per bin the block count and the exact
/// sum of block energies (86 000 bins, about 1 MB).
///
/// Energy sums are exact, so the only approximation is deciding the relative gate for blocks
/// in the one bin that straddles it: that bin is kept whole when its mean block loudness is
/// above the gate. Only blocks within 0.01 LU of the gate can be misclassified, which moves the
/// integrated loudness by well under 0.01 LU.
#[derive(Debug, Clone)]
pub struct GatingHistogram {
    counts: Vec<u32>,
    energy_sums: Vec<f64>,
    /// Blocks and energy over all bins (the absolute-gated sums), kept as blocks arrive so a
    /// reading only walks the bins from the relative gate up to `highest_bin`.
    total_count: u64,
    total_energy: f64,
    highest_bin: usize,
}

impl Default for GatingHistogram {
    fn default() -> Self {
        Self::new()
    }
}

impl GatingHistogram {
    /// Allocates the bins (86 000 × (u32 + f64)).
    pub fn new() -> Self {
        Self {
            counts: vec![0; BIN_COUNT],
            energy_sums: vec![0.0; BIN_COUNT],
            total_count: 0,
            total_energy: 0.0,
            highest_bin: 0,
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
        // A u32 count overflows after 13 years of 100 ms blocks in one bin.
        self.counts[bin] = self.counts[bin].saturating_add(1);
        self.energy_sums[bin] += block_energy;
        self.total_count += 1;
        self.total_energy += block_energy;
        self.highest_bin = self.highest_bin.max(bin);
    }

    /// Number of blocks above the absolute gate.
    pub fn block_count(&self) -> u64 {
        self.total_count
    }

    /// Gated integrated loudness in LUFS, or `None` when no block passes the gates. Walks the
    /// bins from the relative gate to the loudest block.
    pub fn integrated_lufs(&self) -> Option<f64> {
        let (count, energy) = (self.total_count, self.total_energy);
        if count == 0 {
            return None;
        }
        let relative_gate_lufs = energy_to_lufs(energy / count as f64) + RELATIVE_GATE_LU;
        let first_bin = ((relative_gate_lufs - ABSOLUTE_GATE_LUFS) / GATING_BIN_WIDTH_LU).floor();
        // Clamped like the blocks themselves, so even clamped blocks keep a defined reading.
        let first_bin = (first_bin.max(0.0) as usize).min(BIN_COUNT - 1);
        let (mut count, mut energy) = self.sums_from_bin(first_bin + 1);
        // The straddling bin: keep it whole when its blocks are, on average, above the gate.
        let straddle_count = u64::from(self.counts[first_bin]);
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
        self.total_count = 0;
        self.total_energy = 0.0;
        self.highest_bin = 0;
    }

    /// Block count and energy of the bins from `first_bin` up to the loudest occupied one.
    fn sums_from_bin(&self, first_bin: usize) -> (u64, f64) {
        let range = first_bin..(self.highest_bin + 1).max(first_bin);
        let counts = self.counts.get(range.clone()).unwrap_or(&[]);
        let energies = self.energy_sums.get(range).unwrap_or(&[]);
        (
            counts.iter().map(|&c| u64::from(c)).sum(),
            energies.iter().sum(),
        )
    }
}
