//! Rotation of the real spherical harmonics and the yaw/pitch/roll convention of `compare`.
//!
//! Outside checks: the 3×3 matrices against SciPy's `scipy.spatial.transform.Rotation`
//! (values pasted from tests/reference-scripts/rotation_matrices.py); the SH rotation blocks
//! against direct re-encoding at rotated directions (Y(R·u) = D(R)·Y(u), the defining property
//! of the rotation matrices of Ivanic & Ruedenberg 1996), orders 1–7.

use fieldglass_dsp::compare::orientation::{
    MirrorAxis, Orientation, angles_of_rotation, multiply, procrustes, rotation_from_angles,
};
use fieldglass_dsp::sh::{Matrix3, ShRotation, channel_count, sh_sn3d};
use fieldglass_dsp::sphere::Direction;

/// Output of tests/reference-scripts/rotation_matrices.py:
/// // scipy 1.14.1: Rotation.from_euler('ZYX', [yaw, -pitch, roll], degrees=True)
#[allow(clippy::excessive_precision)] // pasted verbatim from the script
const SCIPY_MATRICES: [((f64, f64, f64), Matrix3); 4] = [
    (
        (30.0, 0.0, 0.0),
        [
            [
                8.660254037844387e-01,
                -4.999999999999999e-01,
                0.000000000000000e+00,
            ],
            [
                4.999999999999999e-01,
                8.660254037844387e-01,
                0.000000000000000e+00,
            ],
            [
                0.000000000000000e+00,
                0.000000000000000e+00,
                1.000000000000000e+00,
            ],
        ],
    ),
    (
        (-45.0, 20.0, 0.0),
        [
            [
                6.644630243886744e-01,
                7.071067811865475e-01,
                -2.418447626479752e-01,
            ],
            [
                -6.644630243886747e-01,
                7.071067811865472e-01,
                2.418447626479752e-01,
            ],
            [
                3.420201433256687e-01,
                2.775557561562891e-17,
                9.396926207859082e-01,
            ],
        ],
    ),
    (
        (12.5, -33.0, 71.0),
        [
            [
                8.187907267741246e-01,
                4.322937208500792e-01,
                3.777616770694130e-01,
            ],
            [
                1.815215339473571e-01,
                4.293100017301673e-01,
                -8.847275598328804e-01,
            ],
            [
                -5.446390350150273e-01,
                7.929786008008276e-01,
                2.730444290035273e-01,
            ],
        ],
    ),
    (
        (170.0, 65.0, -120.0),
        [
            [
                -4.161977407267836e-01,
                -6.861373029935505e-01,
                -5.966532008249503e-01,
            ],
            [
                7.338689100003815e-02,
                6.286978249311743e-01,
                -7.741791841403124e-01,
            ],
            [
                9.063077870366503e-01,
                -3.659981507706670e-01,
                -2.113091308703499e-01,
            ],
        ],
    ),
];

fn apply(r: &Matrix3, u: [f64; 3]) -> [f64; 3] {
    std::array::from_fn(|i| (0..3).map(|k| r[i][k] * u[k]).sum())
}

#[test]
fn rotation_matrices_match_scipy() {
    for ((yaw, pitch, roll), expected) in SCIPY_MATRICES {
        let r = rotation_from_angles(yaw, pitch, roll);
        for i in 0..3 {
            for j in 0..3 {
                assert!(
                    (r[i][j] - expected[i][j]).abs() < 1e-12,
                    "({yaw}, {pitch}, {roll}) [{i}][{j}]: {} vs SciPy {}",
                    r[i][j],
                    expected[i][j]
                );
            }
        }
        let (y, p, ro) = angles_of_rotation(&expected);
        assert!((y - yaw).abs() < 1e-9 && (p - pitch).abs() < 1e-9 && (ro - roll).abs() < 1e-9);
    }
}

/// Directions spread over the sphere (a fixed golden-angle spiral).
fn test_directions(count: usize) -> Vec<Direction> {
    (0..count)
        .map(|i| {
            let z = 1.0 - 2.0 * (i as f64 + 0.5) / count as f64;
            let azimuth = (i as f64 * 137.507_764_050_037_85) % 360.0;
            Direction::new(azimuth, z.asin().to_degrees())
        })
        .collect()
}

fn assert_re_encoding(order: usize, q: &Matrix3, what: &str) {
    let d = ShRotation::new(order, q);
    let mut rotated = vec![0.0; channel_count(order)];
    for u in test_directions(40) {
        let y = sh_sn3d(order, u);
        d.apply(&y, &mut rotated);
        let moved = Direction::from_cartesian(apply(q, u.to_cartesian()));
        let expected = sh_sn3d(order, moved);
        for (acn, (a, e)) in rotated.iter().zip(&expected).enumerate() {
            assert!(
                (a - e).abs() < 1e-9,
                "{what}, order {order}, ACN {acn} at {u:?}: D·Y(u) = {a}, Y(Q·u) = {e}"
            );
        }
    }
}

#[test]
fn sh_rotation_equals_re_encoding_orders_1_to_7() {
    for ((yaw, pitch, roll), _) in SCIPY_MATRICES {
        let r = rotation_from_angles(yaw, pitch, roll);
        for order in 1..=7 {
            assert_re_encoding(order, &r, &format!("rotation ({yaw}, {pitch}, {roll})"));
        }
    }
}

#[test]
fn sh_transform_of_mirrors_equals_re_encoding() {
    for axis in MirrorAxis::ALL {
        let q = multiply(&rotation_from_angles(25.0, -10.0, 5.0), &axis.matrix());
        for order in 1..=7 {
            assert_re_encoding(order, &q, axis.label());
        }
    }
}

#[test]
fn sh_rotation_blocks_are_orthogonal() {
    let d = ShRotation::new(7, &rotation_from_angles(170.0, 65.0, -120.0));
    for l in 0..=7 {
        let size = 2 * l + 1;
        let b = d.block(l);
        for i in 0..size {
            for j in 0..size {
                let dot: f64 = (0..size).map(|k| b[i * size + k] * b[j * size + k]).sum();
                let expected = if i == j { 1.0 } else { 0.0 };
                assert!(
                    (dot - expected).abs() < 1e-10,
                    "order {l} ({i}, {j}): {dot}"
                );
            }
        }
    }
}

#[test]
fn procrustes_recovers_rotations_and_mirrors() {
    // Dipole cross-covariance of plane waves from spread directions: C = Σ (Q·u)·uᵀ.
    let cases = [
        (rotation_from_angles(30.0, 0.0, 0.0), None),
        (rotation_from_angles(-45.0, 20.0, 0.0), None),
        (IDENTITY_MIRROR_LR, Some(MirrorAxis::LeftRight)),
    ];
    for (q, mirror) in cases {
        let mut c = [[0.0; 3]; 3];
        for u in test_directions(12) {
            let (u, v) = (u.to_cartesian(), apply(&q, u.to_cartesian()));
            for i in 0..3 {
                for j in 0..3 {
                    c[i][j] += v[i] * u[j];
                }
            }
        }
        let found = procrustes(&c).unwrap();
        for i in 0..3 {
            for j in 0..3 {
                assert!((found[i][j] - q[i][j]).abs() < 1e-9);
            }
        }
        assert_eq!(Orientation::from_transform(&found).mirror, mirror);
    }
    assert!(procrustes(&[[0.0; 3]; 3]).is_none());
}

const IDENTITY_MIRROR_LR: Matrix3 = [[1.0, 0.0, 0.0], [0.0, -1.0, 0.0], [0.0, 0.0, 1.0]];
