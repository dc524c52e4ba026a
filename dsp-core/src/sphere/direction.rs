/// A direction on the sphere, in the crate's convention: azimuth counter-clockwise from the front
/// (positive to the left), elevation positive up; both in degrees.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct Direction {
    pub azimuth_deg: f64,
    pub elevation_deg: f64,
}

impl Direction {
    /// A direction with its azimuth wrapped to (-180, 180] and elevation clamped to [-90, 90].
    pub fn new(azimuth_deg: f64, elevation_deg: f64) -> Self {
        Self {
            azimuth_deg: wrap_azimuth_deg(azimuth_deg),
            elevation_deg: elevation_deg.clamp(-90.0, 90.0),
        }
    }

    pub fn azimuth_rad(&self) -> f64 {
        self.azimuth_deg.to_radians()
    }

    pub fn elevation_rad(&self) -> f64 {
        self.elevation_deg.to_radians()
    }

    /// Unit vector [x front, y left, z up].
    pub fn to_cartesian(&self) -> [f64; 3] {
        let (sa, ca) = self.azimuth_rad().sin_cos();
        let (se, ce) = self.elevation_rad().sin_cos();
        [ca * ce, sa * ce, se]
    }

    /// Direction of a (not necessarily unit) vector; the zero vector maps to the front.
    pub fn from_cartesian(v: [f64; 3]) -> Self {
        let horizontal = v[0].hypot(v[1]);
        if horizontal == 0.0 && v[2] == 0.0 {
            return Self::default();
        }
        Self::new(
            v[1].atan2(v[0]).to_degrees(),
            v[2].atan2(horizontal).to_degrees(),
        )
    }

    /// Great-circle angle to `other`, in degrees.
    pub fn angle_to_deg(&self, other: &Direction) -> f64 {
        let a = self.to_cartesian();
        let b = other.to_cartesian();
        let cross = [
            a[1] * b[2] - a[2] * b[1],
            a[2] * b[0] - a[0] * b[2],
            a[0] * b[1] - a[1] * b[0],
        ];
        let sin = (cross[0] * cross[0] + cross[1] * cross[1] + cross[2] * cross[2]).sqrt();
        let cos = a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
        sin.atan2(cos).to_degrees()
    }
}

/// Wraps an azimuth in degrees to (-180, 180].
pub fn wrap_azimuth_deg(azimuth_deg: f64) -> f64 {
    let mut a = azimuth_deg % 360.0;
    if a <= -180.0 {
        a += 360.0;
    } else if a > 180.0 {
        a -= 360.0;
    }
    a
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cartesian_round_trip_and_wrap() {
        let d = Direction::new(-120.0, 35.0);
        let back = Direction::from_cartesian(d.to_cartesian());
        assert!(d.angle_to_deg(&back) < 1e-9);
        assert_eq!(wrap_azimuth_deg(-180.0), 180.0);
        assert_eq!(wrap_azimuth_deg(540.0), 180.0);
        assert!((Direction::new(90.0, 0.0).to_cartesian()[1] - 1.0).abs() < 1e-12);
    }
}
