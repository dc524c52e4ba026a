//! Orientation of a candidate relative to its reference: the orthogonal 3×3 transform that best
//! maps the reference's first-order part onto the candidate's, as yaw, pitch, roll and mirror.
//!
//! Conventions (x front, y left, z up): a reference direction u appears at `R·M·u` in the
//! candidate, with `R = Rz(yaw)·P(pitch)·Rx(roll)` and `M` the identity or the reflection of
//! [`MirrorAxis`]. Yaw ψ moves a source at azimuth a to a+ψ; pitch θ moves a source straight
//! ahead to elevation +θ (P(θ) is the right-handed rotation about y by −θ); roll φ moves a
//! source at the left (azimuth 90°) to elevation +φ.

use crate::sh::Matrix3;
use crate::sh::rotation::determinant3;
use nalgebra::Matrix3 as NaMatrix3;

/// The axis a mirror flips.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum MirrorAxis {
    /// y → −y: left and right swap.
    LeftRight,
    /// x → −x: front and back swap.
    FrontBack,
    /// z → −z: up and down swap.
    UpDown,
}

impl MirrorAxis {
    pub const ALL: [MirrorAxis; 3] = [Self::LeftRight, Self::FrontBack, Self::UpDown];

    /// JSON label: `left-right`, `front-back`, `up-down`.
    pub fn label(self) -> &'static str {
        match self {
            Self::LeftRight => "left-right",
            Self::FrontBack => "front-back",
            Self::UpDown => "up-down",
        }
    }

    /// The reflection matrix.
    pub fn matrix(self) -> Matrix3 {
        let mut m = IDENTITY;
        let axis = match self {
            Self::FrontBack => 0,
            Self::LeftRight => 1,
            Self::UpDown => 2,
        };
        m[axis][axis] = -1.0;
        m
    }
}

pub const IDENTITY: Matrix3 = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]];

/// Product a·b.
pub fn multiply(a: &Matrix3, b: &Matrix3) -> Matrix3 {
    std::array::from_fn(|i| std::array::from_fn(|j| (0..3).map(|k| a[i][k] * b[k][j]).sum()))
}

/// Transpose.
pub fn transpose(a: &Matrix3) -> Matrix3 {
    std::array::from_fn(|i| std::array::from_fn(|j| a[j][i]))
}

/// Angle of a proper rotation, degrees in [0, 180].
pub fn rotation_angle_deg(r: &Matrix3) -> f64 {
    let trace = r[0][0] + r[1][1] + r[2][2];
    ((trace - 1.0) / 2.0).clamp(-1.0, 1.0).acos().to_degrees()
}

/// `R = Rz(yaw)·P(pitch)·Rx(roll)` (see the module docs for the senses).
pub fn rotation_from_angles(yaw_deg: f64, pitch_deg: f64, roll_deg: f64) -> Matrix3 {
    let (sy, cy) = yaw_deg.to_radians().sin_cos();
    // P(θ) = right-handed rotation about y by −θ.
    let (sp, cp) = (-pitch_deg).to_radians().sin_cos();
    let (sr, cr) = roll_deg.to_radians().sin_cos();
    let rz = [[cy, -sy, 0.0], [sy, cy, 0.0], [0.0, 0.0, 1.0]];
    let ry = [[cp, 0.0, sp], [0.0, 1.0, 0.0], [-sp, 0.0, cp]];
    let rx = [[1.0, 0.0, 0.0], [0.0, cr, -sr], [0.0, sr, cr]];
    multiply(&multiply(&rz, &ry), &rx)
}

/// Yaw, pitch and roll (degrees) of a proper rotation; pitch in [−90, 90], yaw and roll in
/// (−180, 180]. At pitch ±90° (gimbal lock) roll is set to 0 and yaw takes the whole turn.
pub fn angles_of_rotation(r: &Matrix3) -> (f64, f64, f64) {
    // With β = −θ: R[2][0] = −sin β = sin θ, R[1][0] = sin ψ cos β, R[0][0] = cos ψ cos β,
    // R[2][1] = cos β sin φ, R[2][2] = cos β cos φ.
    let sin_pitch = r[2][0].clamp(-1.0, 1.0);
    let pitch = sin_pitch.asin();
    let cos_pitch = r[2][1].hypot(r[2][2]);
    let (yaw, roll) = if cos_pitch > 1e-9 {
        (r[1][0].atan2(r[0][0]), r[2][1].atan2(r[2][2]))
    } else {
        // R = Rz(ψ)·Ry(∓90°): R[0][1] = −sin ψ, R[1][1] = cos ψ.
        ((-r[0][1]).atan2(r[1][1]), 0.0)
    };
    let wrap = |a: f64| {
        let d = a.to_degrees();
        if d <= -180.0 { d + 360.0 } else { d }
    };
    (wrap(yaw), pitch.to_degrees(), wrap(roll))
}

/// A transform split into a proper rotation and an optional mirror applied first.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Orientation {
    /// The whole orthogonal transform `Q = R·M`.
    pub transform: Matrix3,
    /// The proper rotation `R`.
    pub rotation: Matrix3,
    pub mirror: Option<MirrorAxis>,
    pub yaw_deg: f64,
    pub pitch_deg: f64,
    pub roll_deg: f64,
}

impl Orientation {
    /// Splits an orthogonal `q`. For det(q) < 0 the mirror axis is the one whose removal
    /// leaves the smallest rotation angle (ties go to left-right, then front-back).
    pub fn from_transform(q: &Matrix3) -> Self {
        let (rotation, mirror) = if determinant3(q) < 0.0 {
            let mut best: Option<(f64, Matrix3, MirrorAxis)> = None;
            for axis in MirrorAxis::ALL {
                let r = multiply(q, &axis.matrix());
                let angle = rotation_angle_deg(&r);
                if best.is_none_or(|(a, _, _)| angle < a - 1e-9) {
                    best = Some((angle, r, axis));
                }
            }
            let (_, r, axis) = best.expect("three axes tried");
            (r, Some(axis))
        } else {
            (*q, None)
        };
        let (yaw_deg, pitch_deg, roll_deg) = angles_of_rotation(&rotation);
        Self {
            transform: *q,
            rotation,
            mirror,
            yaw_deg,
            pitch_deg,
            roll_deg,
        }
    }

    /// The identity: nothing turned, nothing mirrored.
    pub fn identity() -> Self {
        Self::from_transform(&IDENTITY)
    }

    /// Largest of |yaw|, |pitch|, |roll|, degrees.
    pub fn largest_angle_deg(&self) -> f64 {
        self.yaw_deg
            .abs()
            .max(self.pitch_deg.abs())
            .max(self.roll_deg.abs())
    }
}

/// Orthogonal Procrustes: the orthogonal `Q` maximising tr(Qᵀ·C) for the cross-covariance
/// `C = Σ c·rᵀ` (candidate times reference, x y z), i.e. the best least-squares map r → c.
/// `Q = U·Vᵀ` from the SVD `C = U·S·Vᵀ` (Schönemann 1966); its determinant may be −1 (a mirror).
/// Returns `None` if `C` holds no information (zero or not finite).
pub fn procrustes(cross: &Matrix3) -> Option<Matrix3> {
    if !cross.iter().flatten().all(|v| v.is_finite()) || cross.iter().flatten().all(|&v| v == 0.0) {
        return None;
    }
    let c = NaMatrix3::from_fn(|i, j| cross[i][j]);
    let svd = c.svd(true, true);
    let q = svd.u? * svd.v_t?;
    Some(std::array::from_fn(|i| std::array::from_fn(|j| q[(i, j)])))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn senses_of_the_angles() {
        // The conventions of the module docs, checked on unit vectors.
        let apply = |r: &Matrix3, u: [f64; 3]| -> [f64; 3] {
            std::array::from_fn(|i| (0..3).map(|k| r[i][k] * u[k]).sum())
        };
        let front = [1.0, 0.0, 0.0];
        let left = [0.0, 1.0, 0.0];
        let yawed = apply(&rotation_from_angles(30.0, 0.0, 0.0), front);
        assert!((yawed[1].atan2(yawed[0]).to_degrees() - 30.0).abs() < 1e-12);
        let pitched = apply(&rotation_from_angles(0.0, 20.0, 0.0), front);
        assert!((pitched[2].asin().to_degrees() - 20.0).abs() < 1e-12);
        let rolled = apply(&rotation_from_angles(0.0, 0.0, 15.0), left);
        assert!((rolled[2].asin().to_degrees() - 15.0).abs() < 1e-12);
    }

    #[test]
    fn angles_round_trip() {
        for &(y, p, r) in &[
            (30.0, 0.0, 0.0),
            (-45.0, 20.0, 0.0),
            (170.0, -60.0, 100.0),
            (0.0, 90.0, 0.0),
        ] {
            let (y2, p2, r2) = angles_of_rotation(&rotation_from_angles(y, p, r));
            assert!(
                (y - y2).abs() < 1e-9 && (p - p2).abs() < 1e-9 && (r - r2).abs() < 1e-9,
                "{y2} {p2} {r2}"
            );
        }
    }

    #[test]
    fn mirror_axis_with_smallest_rotation() {
        // A left-right mirror followed by yaw 10°: the left-right reading leaves 10°, the
        // front-back reading 170°.
        let q = multiply(
            &rotation_from_angles(10.0, 0.0, 0.0),
            &MirrorAxis::LeftRight.matrix(),
        );
        let o = Orientation::from_transform(&q);
        assert_eq!(o.mirror, Some(MirrorAxis::LeftRight));
        assert!((o.yaw_deg - 10.0).abs() < 1e-9);
    }
}
