//! Sampling grids on the sphere: the equirectangular display grid and a near-uniform point set.

use super::Direction;
use std::f64::consts::PI;
use std::fmt;

/// Largest width or height accepted (keeps tables bounded; 0.01° steps).
pub const MAX_GRID_SIDE: usize = 36_000;

/// Why a grid could not be made.
#[derive(Clone, Debug, PartialEq)]
pub enum GridError {
    /// Width or height is zero or above [`MAX_GRID_SIDE`].
    BadSize { width: usize, height: usize },
    /// The angular step is not a finite number in (0, 180] degrees.
    BadStep { step_deg: f64 },
    /// A point set needs at least one point.
    NoPoints,
}

impl fmt::Display for GridError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GridError::BadSize { width, height } => write!(
                f,
                "equirectangular grid {width}x{height}: width and height must be 1..={MAX_GRID_SIDE}"
            ),
            GridError::BadStep { step_deg } => {
                write!(f, "grid step {step_deg}° must be finite and in (0, 180]")
            }
            GridError::NoPoints => write!(f, "a sphere point set needs at least one point"),
        }
    }
}

impl std::error::Error for GridError {}

/// Equirectangular grid of `height` rows by `width` columns, sampled at pixel centres.
///
/// - Row r (0 = top) has elevation 90 − (r+0.5)·180/H degrees.
/// - Column c has azimuth 180 − (c+0.5)·360/W degrees: column 0 is just left of behind, the
///   front (0°) is in the centre, left (+90°) is left of centre — a 360° video frame as seen
///   from the listener.
///
/// Maps on this grid are row-major: value of (row, col) at `row * width + col`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct EquirectGrid {
    width: usize,
    height: usize,
}

impl EquirectGrid {
    /// A grid of any resolution; both sides in 1..=[`MAX_GRID_SIDE`].
    pub fn new(width: usize, height: usize) -> Result<Self, GridError> {
        if width == 0 || height == 0 || width > MAX_GRID_SIDE || height > MAX_GRID_SIDE {
            return Err(GridError::BadSize { width, height });
        }
        Ok(Self { width, height })
    }

    /// Grid with (about) `step_deg` degrees per pixel: width round(360/step), height
    /// round(180/step), each at least 1. A step that divides 180 gives exact steps.
    pub fn with_step_deg(step_deg: f64) -> Result<Self, GridError> {
        if !step_deg.is_finite() || step_deg <= 0.0 || step_deg > 180.0 {
            return Err(GridError::BadStep { step_deg });
        }
        let width = (360.0 / step_deg).round().max(1.0);
        let height = (180.0 / step_deg).round().max(1.0);
        if width > MAX_GRID_SIDE as f64 || height > MAX_GRID_SIDE as f64 {
            return Err(GridError::BadStep { step_deg });
        }
        Self::new(width as usize, height as usize)
    }

    /// Number of columns.
    pub fn width(&self) -> usize {
        self.width
    }

    /// Number of rows.
    pub fn height(&self) -> usize {
        self.height
    }

    /// Number of pixels, width × height.
    pub fn len(&self) -> usize {
        self.width * self.height
    }

    /// Always false (a grid has at least one pixel); present for API symmetry with `len`.
    pub fn is_empty(&self) -> bool {
        false
    }

    /// Column step in degrees of azimuth, 360/W.
    pub fn azimuth_step_deg(&self) -> f64 {
        360.0 / self.width as f64
    }

    /// Row step in degrees of elevation, 180/H.
    pub fn elevation_step_deg(&self) -> f64 {
        180.0 / self.height as f64
    }

    /// Elevation in degrees of the centre of `row` (continuous rows allowed).
    pub fn elevation_deg(&self, row: f64) -> f64 {
        90.0 - (row + 0.5) * self.elevation_step_deg()
    }

    /// Azimuth in degrees of the centre of `col` (continuous columns allowed; not wrapped).
    pub fn azimuth_deg(&self, col: f64) -> f64 {
        180.0 - (col + 0.5) * self.azimuth_step_deg()
    }

    /// Direction of the centre of pixel (`row`, `col`).
    pub fn direction(&self, row: usize, col: usize) -> Direction {
        self.direction_at(row as f64, col as f64)
    }

    /// Direction at continuous pixel coordinates, where integer values are pixel centres
    /// (the inverse of [`pixel_of`](Self::pixel_of)). Elevation is clamped to ±90°.
    pub fn direction_at(&self, row: f64, col: f64) -> Direction {
        Direction::new(self.azimuth_deg(col), self.elevation_deg(row))
    }

    /// Continuous pixel coordinates (row, col) of `direction`; pixel centres are integers.
    /// row is in [−0.5, H−0.5]; col is wrapped into [−0.5, W−0.5).
    pub fn pixel_of(&self, direction: Direction) -> (f64, f64) {
        let row = (90.0 - direction.elevation_deg) / self.elevation_step_deg() - 0.5;
        let w = self.width as f64;
        let col = ((180.0 - direction.azimuth_deg) / self.azimuth_step_deg()).rem_euclid(w) - 0.5;
        (row, col)
    }

    /// Solid angle in steradians of one pixel of `row`: the exact area of its latitude band,
    /// 2π·(sin el_top − sin el_bottom), split over W columns. All pixels together give 4π.
    pub fn solid_angle_sr(&self, row: usize) -> f64 {
        let step = self.elevation_step_deg();
        let top = (90.0 - row as f64 * step).to_radians().sin();
        let bottom = (90.0 - (row + 1) as f64 * step).to_radians().sin();
        2.0 * PI * (top - bottom) / self.width as f64
    }
}

/// Near-uniform point set on the sphere (Fibonacci spiral), each point carrying 4π/n sr.
#[derive(Clone, Debug, PartialEq)]
pub struct SphereGrid {
    points: Vec<Direction>,
}

impl SphereGrid {
    /// `count` points on the golden-angle spiral with z_k = 1 − (2k+1)/count, so every point
    /// stands for an equal-area band.
    pub fn fibonacci(count: usize) -> Result<Self, GridError> {
        if count == 0 {
            return Err(GridError::NoPoints);
        }
        let golden_angle_deg = 180.0 * (3.0 - 5f64.sqrt());
        let points = (0..count)
            .map(|k| {
                let z = 1.0 - (2 * k + 1) as f64 / count as f64;
                Direction::new(
                    k as f64 * golden_angle_deg,
                    z.clamp(-1.0, 1.0).asin().to_degrees(),
                )
            })
            .collect();
        Ok(Self { points })
    }

    /// The points, in spiral order from top to bottom.
    pub fn points(&self) -> &[Direction] {
        &self.points
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.points.len()
    }

    /// Always false (constructors refuse empty sets).
    pub fn is_empty(&self) -> bool {
        self.points.is_empty()
    }

    /// Quadrature weight of every point in steradians, 4π/n.
    pub fn weight_sr(&self) -> f64 {
        4.0 * PI / self.points.len() as f64
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_and_round_trip() {
        let grid = EquirectGrid::with_step_deg(2.0).unwrap();
        assert_eq!((grid.width(), grid.height()), (180, 90));
        // Front is in the centre, left of centre is positive azimuth.
        let (row, col) = grid.pixel_of(Direction::new(0.0, 0.0));
        assert!((row - 44.5).abs() < 1e-12 && (col - 89.5).abs() < 1e-12);
        let (_, col_left) = grid.pixel_of(Direction::new(90.0, 0.0));
        assert!(col_left < col);
        let d = grid.direction(10, 3);
        let (r, c) = grid.pixel_of(d);
        assert!((r - 10.0).abs() < 1e-9 && (c - 3.0).abs() < 1e-9);
        // Column 0 sits just left of behind; its left neighbour wraps to the last column.
        let (_, c) = grid.pixel_of(grid.direction_at(0.0, -1.0));
        assert!((c - 179.0).abs() < 1e-9);
    }

    #[test]
    fn solid_angles_sum_to_four_pi() {
        for grid in [
            EquirectGrid::new(7, 5).unwrap(),
            EquirectGrid::with_step_deg(1.0).unwrap(),
        ] {
            let total: f64 = (0..grid.height())
                .map(|r| grid.solid_angle_sr(r) * grid.width() as f64)
                .sum();
            assert!((total - 4.0 * PI).abs() < 1e-12);
        }
    }

    #[test]
    fn rejects_bad_sizes() {
        assert!(EquirectGrid::new(0, 10).is_err());
        assert!(EquirectGrid::with_step_deg(f64::NAN).is_err());
        assert!(EquirectGrid::with_step_deg(0.0).is_err());
        assert!(SphereGrid::fibonacci(0).is_err());
    }

    #[test]
    fn fibonacci_points_have_zero_mean() {
        // An equal-weight near-uniform set integrates the linear functions x, y, z to ~0.
        let grid = SphereGrid::fibonacci(2000).unwrap();
        let mut sum = [0.0; 3];
        for p in grid.points() {
            let v = p.to_cartesian();
            for k in 0..3 {
                sum[k] += v[k] / grid.len() as f64;
            }
        }
        assert!(sum.iter().all(|s| s.abs() < 1e-3), "{sum:?}");
    }
}
