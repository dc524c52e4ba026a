//! Directions on the sphere and sampling grids.

mod direction;
pub mod grid;

pub use direction::{Direction, wrap_azimuth_deg};
pub use grid::{EquirectGrid, SphereGrid};
