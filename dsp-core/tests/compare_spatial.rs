//! Orientation and channel faults from `compare::spatial`, on pairs made here from the demo
//! scene with known truths: the candidate is the reference re-encoded by the SH transform of a
//! known rotation or mirror (itself checked against re-encoding at rotated directions in
//! sh_rotation.rs), or with channels swapped or inverted by hand.

use fieldglass_dsp::compare::MirrorAxis;
use fieldglass_dsp::compare::covariance::PairCovariance;
use fieldglass_dsp::compare::orientation::{multiply, rotation_from_angles};
use fieldglass_dsp::compare::spatial::{SpatialComparison, compare_spatial};
use fieldglass_dsp::scene::{SceneConfig, render_seconds};
use fieldglass_dsp::sh::{Matrix3, ShRotation};

fn demo(order: usize) -> Vec<Vec<f32>> {
    let config = SceneConfig {
        order,
        ..SceneConfig::default()
    };
    render_seconds(config, 3.0).unwrap()
}

fn transformed(reference: &[Vec<f32>], q: &Matrix3) -> Vec<Vec<f32>> {
    let order = (reference.len() as f64).sqrt() as usize - 1;
    let d = ShRotation::new(order, q);
    let frames = reference[0].len();
    let mut out = vec![vec![0.0f32; frames]; reference.len()];
    let (mut x, mut y) = (vec![0.0; reference.len()], vec![0.0; reference.len()]);
    for t in 0..frames {
        for (ch, v) in x.iter_mut().enumerate() {
            *v = reference[ch][t] as f64;
        }
        d.apply(&x, &mut y);
        for (ch, v) in y.iter().enumerate() {
            out[ch][t] = *v as f32;
        }
    }
    out
}

fn compare(reference: &[Vec<f32>], candidate: &[Vec<f32>]) -> SpatialComparison {
    let mut m = PairCovariance::new(reference.len());
    let r: Vec<&[f32]> = reference.iter().map(|c| c.as_slice()).collect();
    let c: Vec<&[f32]> = candidate.iter().map(|c| c.as_slice()).collect();
    m.push(&r, &c);
    compare_spatial(&m)
}

fn assert_no_channel_faults(s: &SpatialComparison) {
    assert!(s.swaps.is_empty(), "swaps {:?}", s.swaps);
    assert!(s.inverted.is_empty(), "inverted {:?}", s.inverted);
}

#[test]
fn rotations_are_recovered_within_a_degree_and_not_reported_as_swaps() {
    let reference = demo(3);
    // A quarter turn maps X to Y and Y to −X: at first order alone that is a swap with an
    // inversion, which the higher orders must overrule.
    for (yaw, pitch, roll) in [
        (30.0, 0.0, 0.0),
        (-45.0, 20.0, 0.0),
        (100.0, -30.0, 12.0),
        (90.0, 0.0, 0.0),
    ] {
        let candidate = transformed(&reference, &rotation_from_angles(yaw, pitch, roll));
        let s = compare(&reference, &candidate);
        let o = s.orientation;
        assert_eq!(o.mirror, None);
        assert!(
            (o.yaw_deg - yaw).abs() < 1.0
                && (o.pitch_deg - pitch).abs() < 1.0
                && (o.roll_deg - roll).abs() < 1.0,
            "({yaw}, {pitch}, {roll}) read as {o:?}"
        );
        assert!(!s.estimate_rejected);
        for order in &s.orders {
            assert!(order.rotation_fit.unwrap() > 0.999, "{order:?}");
        }
        assert_no_channel_faults(&s);
    }
}

#[test]
fn a_left_right_mirror_is_a_mirror() {
    let reference = demo(3);
    let candidate = transformed(&reference, &MirrorAxis::LeftRight.matrix());
    let s = compare(&reference, &candidate);
    assert_eq!(s.orientation.mirror, Some(MirrorAxis::LeftRight));
    assert!(
        s.orientation.largest_angle_deg() < 1.0,
        "{:?}",
        s.orientation
    );
    assert_no_channel_faults(&s);
    // A front-back mirror then a 30° yaw reads as such (not as left-right with −150°).
    let q = multiply(
        &rotation_from_angles(30.0, 0.0, 0.0),
        &MirrorAxis::FrontBack.matrix(),
    );
    let s = compare(&reference, &transformed(&reference, &q));
    assert_eq!(s.orientation.mirror, Some(MirrorAxis::FrontBack));
    assert!(
        (s.orientation.yaw_deg - 30.0).abs() < 1.0,
        "{:?}",
        s.orientation
    );
}

#[test]
fn a_second_order_swap_is_a_swap_not_a_rotation() {
    let reference = demo(3);
    let mut candidate = reference.clone();
    candidate.swap(4, 8);
    let s = compare(&reference, &candidate);
    assert!(s.orientation.largest_angle_deg() < 0.5 && s.orientation.mirror.is_none());
    assert_eq!(s.swaps, vec![(4, 8)]);
    assert!(s.inverted.is_empty());
    assert_eq!(s.channels[4].best_match_acn, Some(8));
    assert_eq!(s.expected[4], 8);
}

#[test]
fn a_first_order_swap_of_x_and_y_is_told_from_a_mirror_by_the_higher_orders() {
    let reference = demo(3);
    let mut candidate = reference.clone();
    candidate.swap(1, 3);
    let s = compare(&reference, &candidate);
    // At first order this is a mirror and a turn; the higher orders reject it.
    assert!(s.first_order_estimate.unwrap().mirror.is_some());
    assert!(s.estimate_rejected);
    assert!(s.orientation.mirror.is_none() && s.orientation.largest_angle_deg() == 0.0);
    assert_eq!(s.swaps, vec![(1, 3)]);
}

#[test]
fn an_inverted_third_order_channel_is_inverted() {
    let reference = demo(3);
    let mut candidate = reference.clone();
    candidate[11].iter_mut().for_each(|v| *v = -*v);
    let s = compare(&reference, &candidate);
    assert_eq!(s.inverted, vec![11]);
    assert!(s.swaps.is_empty());
    assert!(s.channels[11].polarity_inverted);
    assert!((s.channels[11].correlation.unwrap() + 1.0).abs() < 1e-6);
}

#[test]
fn a_whole_file_inversion_is_every_channel_inverted_not_a_mirror() {
    let reference = demo(3);
    let mut candidate: Vec<Vec<f32>> = reference
        .iter()
        .map(|c| c.iter().map(|v| -v).collect())
        .collect();
    // One channel flipped back: that one is not inverted.
    candidate[6].iter_mut().for_each(|v| *v = -*v);
    let s = compare(&reference, &candidate);
    assert!(s.whole_inverted);
    assert!(s.orientation.mirror.is_none() && s.orientation.largest_angle_deg() < 0.5);
    let expected: Vec<usize> = (0..16).filter(|&i| i != 6).collect();
    assert_eq!(s.inverted, expected);
    assert!((s.channels[0].correlation.unwrap() + 1.0).abs() < 1e-6);
    assert!((s.channels[6].correlation.unwrap() - 1.0).abs() < 1e-6);
    assert!(s.swaps.is_empty());
}

#[test]
fn an_inverted_w_alone_is_one_inverted_channel() {
    let reference = demo(3);
    let mut candidate = reference.clone();
    candidate[0].iter_mut().for_each(|v| *v = -*v);
    let s = compare(&reference, &candidate);
    assert!(!s.whole_inverted);
    assert!(s.orientation.mirror.is_none() && s.orientation.largest_angle_deg() < 0.5);
    assert_eq!(s.inverted, vec![0]);
}

#[test]
fn a_turned_and_inverted_delivery_is_both() {
    let reference = demo(3);
    let candidate: Vec<Vec<f32>> = transformed(&reference, &rotation_from_angles(-45.0, 20.0, 0.0))
        .into_iter()
        .map(|c| c.into_iter().map(|v| -v).collect())
        .collect();
    let s = compare(&reference, &candidate);
    assert!(s.whole_inverted && s.orientation.mirror.is_none());
    assert!(
        (s.orientation.yaw_deg + 45.0).abs() < 1.0 && (s.orientation.pitch_deg - 20.0).abs() < 1.0
    );
    assert_eq!(s.inverted.len(), 16);
}

#[test]
fn a_first_order_file_keeps_the_mirror_and_says_it_is_ambiguous() {
    let reference = demo(1);
    let mut candidate = reference.clone();
    candidate[1].iter_mut().for_each(|v| *v = -*v);
    let s = compare(&reference, &candidate);
    assert!(s.first_order_only);
    assert_eq!(s.orientation.mirror, Some(MirrorAxis::LeftRight));
    assert_no_channel_faults(&s);
}

#[test]
fn an_identical_copy_has_nothing() {
    let reference = demo(3);
    let s = compare(&reference, &reference);
    assert!(s.orientation.largest_angle_deg() < 1e-6 && s.orientation.mirror.is_none());
    assert_no_channel_faults(&s);
    for order in &s.orders {
        assert!(order.level_change_db.unwrap().abs() < 1e-9);
        assert!((order.rotation_fit.unwrap() - 1.0).abs() < 1e-9);
    }
}
