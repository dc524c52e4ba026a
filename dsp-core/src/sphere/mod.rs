//! Directions on the sphere and sampling grids.

mod direction;

pub use direction::Direction;
