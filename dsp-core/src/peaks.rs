//! Source directions from a power map: local maxima with a minimum separation, refined below
//! the grid step, levels relative to the strongest.

use crate::sphere::Direction;
use crate::sphere::grid::EquirectGrid;

/// A peak is a source only where it stands this far above the map's diffuse floor, dB. The
/// floor is the median map value: in a scene with a diffuse bed most directions see only the
/// bed, so the median is the bed's level, and the bed's own ripples (finite averaging, side
/// lobes of the beam) stay within a few dB of it.
pub const SOURCE_PROMINENCE_DB: f64 = 3.0;

/// One peak of a power map.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Peak {
    /// Refined direction of the maximum.
    pub direction: Direction,
    /// Refined map value at the peak (units of the map, i.e. power).
    pub value: f64,
    /// 10·log10(value / strongest peak value) in dB; 0 for the strongest peak.
    pub level_db: f64,
}

/// Finds the strongest separated local maxima of maps on one grid.
///
/// Owns all scratch; [`find`](Self::find) never allocates.
#[derive(Clone, Debug)]
pub struct PeakFinder {
    grid: EquirectGrid,
    max_peaks: usize,
    /// (value, pixel index) of local maxima above the floor.
    candidates: Vec<(f32, u32)>,
    /// Copy of the map for the median.
    scratch: Vec<f32>,
    peaks: Vec<Peak>,
}

impl PeakFinder {
    /// A finder for maps on `grid` reporting at most `max_peaks` peaks.
    pub fn new(grid: EquirectGrid, max_peaks: usize) -> Self {
        Self {
            grid,
            max_peaks,
            candidates: Vec::with_capacity(grid.len()),
            scratch: Vec::with_capacity(grid.len()),
            peaks: Vec::with_capacity(max_peaks),
        }
    }

    /// The grid maps must be on.
    pub fn grid(&self) -> EquirectGrid {
        self.grid
    }

    /// Peaks of `map` (row-major on the grid, see [`EquirectGrid`]), strongest first.
    ///
    /// - A peak is a pixel no lower than its 8 neighbours (azimuth wraps; beyond a pole the
    ///   neighbours are the pixels across it, half a turn away), ties going to the earlier pixel.
    /// - Its position is refined by a parabola through the pixel and its two neighbours, along
    ///   the row and along the column independently; the value adds both parabolic corrections.
    /// - Peaks closer than `min_separation_deg` (great-circle) to a stronger accepted peak are
    ///   dropped, as are peaks more than `floor_db` (a positive number of dB) below the
    ///   strongest, and peaks that do not stand [`SOURCE_PROMINENCE_DB`] above the map's
    ///   median (its diffuse floor): a map with no such peak has no sources.
    ///
    /// Returns an empty slice if the map has the wrong size, no positive finite maximum, or
    /// `max_peaks` is 0. Non-finite pixels are ignored.
    pub fn find(&mut self, map: &[f32], min_separation_deg: f64, floor_db: f64) -> &[Peak] {
        self.peaks.clear();
        self.candidates.clear();
        if map.len() != self.grid.len() || self.max_peaks == 0 {
            return &self.peaks;
        }
        let maximum = finite_max(map);
        if maximum <= 0.0 {
            return &self.peaks;
        }
        let floor_ratio = 10f64.powf(-floor_db.abs() / 10.0);
        let prominence = 10f64.powf(SOURCE_PROMINENCE_DB / 10.0);
        let diffuse_floor = self.median(map) as f64;
        let threshold = (maximum as f64 * floor_ratio).max(diffuse_floor * prominence) as f32;
        if maximum < threshold {
            return &self.peaks;
        }

        let (width, height) = (self.grid.width(), self.grid.height());
        if width == 0 {
            return &self.peaks;
        }
        for row in 0..height {
            let line = &map[row * width..(row + 1) * width];
            let mut consider = |col: usize| {
                let value = line[col];
                if self.is_local_maximum(map, row, col, value) {
                    self.candidates.push((value, (row * width + col) as u32));
                }
            };
            // Row ends wrap in azimuth: straight to the full test.
            for col in [0, width - 1] {
                let value = line[col];
                if value.is_finite() && value >= threshold {
                    consider(col);
                }
                if width == 1 {
                    break;
                }
            }
            // Interior: a branch-free pre-test marks 8 pixels at a time; only marked pixels
            // get the full 8-neighbour test. Candidates are sorted below, so the order they
            // are found in does not matter.
            if width > 2 {
                let (left, centre, right) = (&line[..width - 2], &line[1..width - 1], &line[2..]);
                let groups = centre
                    .chunks_exact(8)
                    .zip(left.chunks_exact(8))
                    .zip(right.chunks_exact(8));
                let grouped = centre.len() - centre.len() % 8;
                for (g, ((c8, l8), r8)) in groups.enumerate() {
                    let mut marks = candidate_marks(l8, c8, r8, threshold);
                    while marks != 0 {
                        let lane = marks.trailing_zeros() as usize;
                        marks &= marks - 1;
                        consider(1 + g * 8 + lane);
                    }
                }
                for i in grouped..centre.len() {
                    if is_candidate(left[i], centre[i], right[i], threshold) {
                        consider(1 + i);
                    }
                }
            }
        }

        // Strongest first; equal values keep scan order. sort_unstable does not allocate.
        self.candidates
            .sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));

        for k in 0..self.candidates.len() {
            if self.peaks.len() == self.max_peaks {
                break;
            }
            let index = self.candidates[k].1 as usize;
            let peak = self.refine(map, index / width, index % width);
            let separated = self
                .peaks
                .iter()
                .all(|p| p.direction.angle_to_deg(&peak.direction) >= min_separation_deg);
            if separated {
                self.peaks.push(peak);
            }
        }
        let reference = self.peaks.first().map_or(1.0, |p| p.value);
        for peak in &mut self.peaks {
            peak.level_db = 10.0 * (peak.value / reference).log10();
        }
        &self.peaks
    }

    /// Median of the finite values of `map` (0 if none). Never allocates.
    fn median(&mut self, map: &[f32]) -> f32 {
        self.scratch.clear();
        self.scratch
            .extend(map.iter().copied().filter(|v| v.is_finite()));
        if self.scratch.is_empty() {
            return 0.0;
        }
        let middle = self.scratch.len() / 2;
        *self
            .scratch
            .select_nth_unstable_by(middle, f32::total_cmp)
            .1
    }

    /// The peaks found by the last call to [`find`](Self::find).
    pub fn peaks(&self) -> &[Peak] {
        &self.peaks
    }

    /// Map value at (row, col), where row may be −1 or H (across a pole) and col wraps.
    fn value_at(&self, map: &[f32], row: isize, col: isize) -> f32 {
        let (width, height) = (self.grid.width() as isize, self.grid.height() as isize);
        let (row, col) = if row < 0 {
            (0, col + width / 2)
        } else if row >= height {
            (height - 1, col + width / 2)
        } else {
            (row, col)
        };
        let value = map[(row * width + col.rem_euclid(width)) as usize];
        if value.is_finite() {
            value
        } else {
            f32::NEG_INFINITY
        }
    }

    fn is_local_maximum(&self, map: &[f32], row: usize, col: usize, value: f32) -> bool {
        let (width, height) = (self.grid.width(), self.grid.height());
        let here = row * width + col;
        if row > 0 && row + 1 < height && col > 0 && col + 1 < width {
            // Interior fast path (no wrapping). NaN neighbours compare false, as −∞ would.
            // Ties go to the earlier pixel: earlier neighbours win on ≥, later ones on >.
            let (up, down) = (here - width, here + width);
            let earlier = [map[up - 1], map[up], map[up + 1], map[here - 1]];
            let later = [map[here + 1], map[down - 1], map[down], map[down + 1]];
            return earlier.iter().all(|&n| n < value || n.is_nan())
                && later.iter().all(|&n| n <= value || n.is_nan());
        }
        for dr in -1isize..=1 {
            for dc in -1isize..=1 {
                if dr == 0 && dc == 0 {
                    continue;
                }
                let (r, c) = (row as isize + dr, col as isize + dc);
                // Across a pole the neighbour is half a turn away in the same edge row.
                let (r_wrapped, c_wrapped) = if r < 0 {
                    (0, c + (width / 2) as isize)
                } else if r >= height as isize {
                    (height as isize - 1, c + (width / 2) as isize)
                } else {
                    (r, c)
                };
                let there =
                    r_wrapped as usize * width + c_wrapped.rem_euclid(width as isize) as usize;
                if there == here {
                    continue;
                }
                let neighbour = self.value_at(map, r, c);
                // Ties go to the earlier pixel so a plateau yields one peak.
                if neighbour > value || (neighbour == value && there < here) {
                    return false;
                }
            }
        }
        true
    }

    fn refine(&self, map: &[f32], row: usize, col: usize) -> Peak {
        let (r, c) = (row as isize, col as isize);
        let centre = map[row * self.grid.width() + col] as f64;
        let parabola = |before: f32, after: f32| -> (f64, f64) {
            let (before, after) = (before as f64, after as f64);
            let curvature = before - 2.0 * centre + after;
            if !before.is_finite() || !after.is_finite() || curvature >= 0.0 || curvature.is_nan() {
                return (0.0, 0.0);
            }
            let offset = (0.5 * (before - after) / curvature).clamp(-0.5, 0.5);
            (offset, -0.25 * (before - after) * offset)
        };
        let (col_offset, col_gain) =
            parabola(self.value_at(map, r, c - 1), self.value_at(map, r, c + 1));
        let (row_offset, row_gain) = if self.grid.height() > 1 {
            parabola(self.value_at(map, r - 1, c), self.value_at(map, r + 1, c))
        } else {
            (0.0, 0.0)
        };
        Peak {
            direction: self
                .grid
                .direction_at(row as f64 + row_offset, col as f64 + col_offset),
            value: centre + col_gain + row_gain,
            level_db: 0.0,
        }
    }
}

/// Cheap necessary conditions for an interior pixel between `left` and `right` to be a local
/// maximum: finite, at or above the floor, above its left neighbour and not below its right
/// one (ties go to the earlier pixel; NaN neighbours lose). Most pixels of a smooth map fail
/// here. Branch-free, so several pixels can be tested at once.
#[inline(always)]
#[allow(clippy::neg_cmp_op_on_partial_ord)] // the negations are the NaN rule, on purpose
fn is_candidate(left: f32, value: f32, right: f32, threshold: f32) -> bool {
    (value.abs() <= f32::MAX) & !(value < threshold) & !(left >= value) & !(right > value)
}

/// [`is_candidate`] for 8 neighbouring pixels at once; bit `lane` set when pixel `lane`
/// passes. The slices hold at least 8 values.
#[inline(always)]
fn candidate_marks(left: &[f32], centre: &[f32], right: &[f32], threshold: f32) -> u32 {
    assert!(left.len() >= 8 && centre.len() >= 8 && right.len() >= 8);
    #[cfg(target_arch = "x86_64")]
    {
        use std::arch::x86_64::*;
        // SAFETY: SSE2 is part of every x86-64 CPU; each unaligned load reads 4 values at an
        // offset of 0 or 4 of a slice that holds at least 8 (asserted above).
        unsafe {
            let floor = _mm_set1_ps(threshold);
            let largest = _mm_set1_ps(f32::MAX);
            let magnitude = _mm_castsi128_ps(_mm_set1_epi32(0x7fff_ffff));
            let mut marks = 0u32;
            for offset in [0, 4] {
                let v = _mm_loadu_ps(centre.as_ptr().add(offset));
                let l = _mm_loadu_ps(left.as_ptr().add(offset));
                let r = _mm_loadu_ps(right.as_ptr().add(offset));
                let finite = _mm_cmple_ps(_mm_and_ps(v, magnitude), largest);
                let above_floor = _mm_cmpnlt_ps(v, floor);
                let beats_left = _mm_cmpnge_ps(l, v);
                let holds_right = _mm_cmpngt_ps(r, v);
                let all = _mm_and_ps(
                    _mm_and_ps(finite, above_floor),
                    _mm_and_ps(beats_left, holds_right),
                );
                marks |= (_mm_movemask_ps(all) as u32) << offset;
            }
            marks
        }
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        (0..8).fold(0u32, |marks, lane| {
            marks
                | u32::from(is_candidate(
                    left[lane],
                    centre[lane],
                    right[lane],
                    threshold,
                )) << lane
        })
    }
}

/// Largest finite value of `map` (−∞ if none). Eight lanes, so the loop vectorises.
fn finite_max(map: &[f32]) -> f32 {
    let mut lanes = [f32::NEG_INFINITY; 8];
    let mut chunks = map.chunks_exact(8);
    for chunk in &mut chunks {
        for (l, &v) in lanes.iter_mut().zip(chunk) {
            if v.is_finite() && v > *l {
                *l = v;
            }
        }
    }
    let tail = chunks
        .remainder()
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(f32::NEG_INFINITY, f32::max);
    lanes.iter().fold(tail, |m, &l| m.max(l))
}

#[cfg(test)]
mod candidate_tests {
    use super::*;

    /// The 8-wide pre-test must agree with the plain one on every pixel, NaN and ±∞ included.
    #[test]
    fn eight_wide_pre_test_matches_the_plain_one() {
        let specials = [
            f32::NAN,
            f32::INFINITY,
            f32::NEG_INFINITY,
            0.0,
            0.5,
            0.5,
            1.0,
        ];
        let mut state = 12345u64;
        let mut next = || {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            state >> 33
        };
        for _ in 0..2_000 {
            let line: Vec<f32> = (0..10)
                .map(|_| {
                    let r = next();
                    if r % 5 == 0 {
                        specials[(r / 5) as usize % specials.len()]
                    } else {
                        (r % 1000) as f32 / 1000.0
                    }
                })
                .collect();
            let threshold = (next() % 1000) as f32 / 2000.0;
            let marks = candidate_marks(&line[..8], &line[1..9], &line[2..10], threshold);
            for lane in 0..8 {
                let plain = is_candidate(line[lane], line[lane + 1], line[lane + 2], threshold);
                assert_eq!(
                    marks >> lane & 1 == 1,
                    plain,
                    "{line:?} threshold {threshold}"
                );
            }
        }
    }
}
