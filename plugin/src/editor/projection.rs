//! Direction ↔ display position for the equirectangular map, with the view rotation.
//!
//! Display coordinates (u, v) run over [0, 1] across the map rectangle, u to the right and v
//! downwards. The centre shows azimuth `yaw_deg`; left (+90° from the centre) lies left of
//! centre; top is up (DESIGN.md "Equirectangular display"). Yaw is an exact rotation about the
//! vertical axis (a horizontal shift with wrap-around). Pitch is applied as a vertical offset —
//! an approximation of tilting the sphere that keeps grid lines straight; the part of the
//! rectangle past a pole stays empty.
//!
//! Map pixels follow the equirectangular convention of the snapshot (`MapImage`): pixel
//! centres, row r at elevation 90 − (r+0.5)·180/H, column c at azimuth 180 − (c+0.5)·360/W.

/// Wraps an azimuth into (-180, 180] degrees.
pub fn wrap_azimuth_deg(azimuth_deg: f64) -> f64 {
    let wrapped = (azimuth_deg + 180.0).rem_euclid(360.0) - 180.0;
    if wrapped <= -180.0 {
        wrapped + 360.0
    } else {
        wrapped
    }
}

/// The view rotation of the map display.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct MapView {
    /// Azimuth shown in the centre, degrees (positive = view turned to the left).
    pub yaw_deg: f64,
    /// Elevation shown at mid-height, degrees (positive = looking up).
    pub pitch_deg: f64,
}

impl MapView {
    /// A view with both angles sanitised: NaN becomes 0, yaw wraps, pitch clamps to ±90°.
    pub fn new(yaw_deg: f64, pitch_deg: f64) -> Self {
        let yaw_deg = if yaw_deg.is_finite() {
            wrap_azimuth_deg(yaw_deg)
        } else {
            0.0
        };
        let pitch_deg = if pitch_deg.is_finite() {
            pitch_deg.clamp(-90.0, 90.0)
        } else {
            0.0
        };
        Self { yaw_deg, pitch_deg }
    }

    /// Display position of a direction. u is in [0, 1); v may leave [0, 1] when pitch pushes
    /// the direction off the rectangle.
    pub fn direction_to_uv(&self, azimuth_deg: f64, elevation_deg: f64) -> (f64, f64) {
        let relative_azimuth_deg = wrap_azimuth_deg(azimuth_deg - self.yaw_deg);
        // Azimuth +180 (exactly behind) lands on the left edge, u = 0.
        let u = ((180.0 - relative_azimuth_deg) / 360.0).rem_euclid(1.0);
        let v = 0.5 - (elevation_deg - self.pitch_deg) / 180.0;
        (u, v)
    }

    /// Direction (azimuth, elevation) shown at display position (u, v), or `None` where the
    /// rectangle shows no part of the sphere (past a pole, or u/v outside [0, 1]).
    pub fn uv_to_direction(&self, u: f64, v: f64) -> Option<(f64, f64)> {
        if !(0.0..=1.0).contains(&u) || !(0.0..=1.0).contains(&v) {
            return None;
        }
        let elevation_deg = self.pitch_deg + 90.0 - 180.0 * v;
        if !(-90.0..=90.0).contains(&elevation_deg) {
            return None;
        }
        let azimuth_deg = wrap_azimuth_deg(self.yaw_deg + 180.0 - 360.0 * u);
        Some((azimuth_deg, elevation_deg))
    }

    /// Texture coordinate range for drawing the map: horizontally `[u0, u0 + 1]` with repeat
    /// wrap, and the vertical offset of the image as a fraction of the rectangle's height.
    pub fn texture_placement(&self) -> (f64, f64) {
        (-self.yaw_deg / 360.0, self.pitch_deg / 180.0)
    }
}

/// Map pixel (column, row) nearest to a direction on a `width`×`height` map, or `None` for an
/// empty map or a non-finite direction.
pub fn map_pixel_of(
    width: usize,
    height: usize,
    azimuth_deg: f64,
    elevation_deg: f64,
) -> Option<(usize, usize)> {
    if width == 0 || height == 0 || !azimuth_deg.is_finite() || !elevation_deg.is_finite() {
        return None;
    }
    let column_f = (180.0 - wrap_azimuth_deg(azimuth_deg)) / 360.0 * width as f64;
    let row_f = (90.0 - elevation_deg.clamp(-90.0, 90.0)) / 180.0 * height as f64;
    let column = (column_f.floor() as usize).min(width - 1);
    let row = (row_f.floor() as usize).min(height - 1);
    Some((column, row))
}

/// Direction at the centre of map pixel (column, row): the inverse of [`map_pixel_of`].
pub fn map_pixel_direction(width: usize, height: usize, column: usize, row: usize) -> (f64, f64) {
    let azimuth_deg = 180.0 - (column as f64 + 0.5) * 360.0 / width.max(1) as f64;
    let elevation_deg = 90.0 - (row as f64 + 0.5) * 180.0 / height.max(1) as f64;
    (azimuth_deg, elevation_deg)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conventions_of_the_display() {
        let view = MapView::default();
        // DESIGN.md: front in the centre, left (+90°) left of centre, top up.
        assert_eq!(view.direction_to_uv(0.0, 0.0), (0.5, 0.5));
        assert_eq!(view.direction_to_uv(90.0, 0.0), (0.25, 0.5));
        assert_eq!(view.direction_to_uv(-90.0, 0.0), (0.75, 0.5));
        assert_eq!(view.direction_to_uv(180.0, 90.0), (0.0, 0.0));
        assert_eq!(view.direction_to_uv(0.0, -90.0).1, 1.0);
    }

    #[test]
    fn yaw_centres_the_chosen_azimuth_and_round_trips() {
        let view = MapView::new(90.0, 0.0);
        assert_eq!(view.direction_to_uv(90.0, 0.0), (0.5, 0.5));
        for &(az, el) in &[(-35.0, 0.0), (120.0, 30.0), (-170.0, -60.0), (10.0, 89.0)] {
            for view in [
                MapView::new(0.0, 0.0),
                MapView::new(-135.0, 0.0),
                MapView::new(40.0, 20.0),
            ] {
                let (u, v) = view.direction_to_uv(az, el);
                let Some((az2, el2)) = view.uv_to_direction(u, v) else {
                    continue; // pushed off the rectangle by pitch
                };
                assert!(
                    (wrap_azimuth_deg(az2 - az)).abs() < 1e-9,
                    "{az} {el} {view:?}"
                );
                assert!((el2 - el).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn pitch_leaves_past_pole_empty() {
        let view = MapView::new(0.0, 30.0);
        assert!(
            view.uv_to_direction(0.5, 0.05).is_none(),
            "above +90° elevation"
        );
        assert_eq!(view.uv_to_direction(0.5, 0.5), Some((0.0, 30.0)));
        assert!(MapView::new(f64::NAN, 200.0).pitch_deg == 90.0);
    }

    #[test]
    fn map_pixels_follow_the_snapshot_convention() {
        // 360×180 map, 1° pixels: column 0 just left of behind, centre column 180 at front.
        assert_eq!(map_pixel_of(360, 180, 179.5, 89.5), Some((0, 0)));
        assert_eq!(map_pixel_of(360, 180, -0.5, -0.5), Some((180, 90)));
        assert_eq!(map_pixel_of(360, 180, 90.0, 0.0), Some((90, 90)));
        assert_eq!(map_pixel_of(360, 180, -180.0, -90.0), Some((0, 179)));
        assert_eq!(map_pixel_of(0, 180, 0.0, 0.0), None);
        for (c, r) in [(0, 0), (17, 33), (359, 179)] {
            let (az, el) = map_pixel_direction(360, 180, c, r);
            assert_eq!(map_pixel_of(360, 180, az, el), Some((c, r)));
        }
    }
}
