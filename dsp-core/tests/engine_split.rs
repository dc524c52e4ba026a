//! The scanner spreads each block over the cores: the channel meters (with true peak), W's
//! loudness and the block's STFT frames run as separate tasks, and the frames' covariances are
//! accumulated in order afterwards. Nothing is shared, so every figure must be identical, bit for
//! bit, to the one-thread path — checked here on the demo scene (three orders, with clipping and
//! a DC offset added so that those paths are exercised too).
//!
//! The scanner also keeps only the true-peak maxima (no live window): the filter then runs only
//! where a new maximum is possible. The maxima must read the same bits as with the live meter.

use fieldglass_dsp::engine::{AnalysisSettings, Analyzer, StreamSetup};
use fieldglass_dsp::scene::{DemoScene, SceneConfig};

fn run(order: usize, split: bool) -> (fieldglass_dsp::engine::Snapshot, Vec<u8>) {
    run_with(order, split, true).0
}

/// The final snapshot, the live channel readings as text, and every snapshot's since-reset
/// true-peak maxima.
#[allow(clippy::type_complexity)]
fn run_with(
    order: usize,
    split: bool,
    live_true_peak: bool,
) -> ((fieldglass_dsp::engine::Snapshot, Vec<u8>), Vec<Vec<f64>>) {
    let config = SceneConfig {
        order,
        ..SceneConfig::default()
    };
    let mut scene = DemoScene::new(config).unwrap();
    let channels = scene.channels();
    let setup = StreamSetup {
        sample_rate_hz: 48_000.0,
        channels,
    };
    let settings = AnalysisSettings {
        map_rate_hz: 4.0,
        grid_step_deg: 3.0,
        ..AnalysisSettings::default()
    };
    let mut analyzer = Analyzer::new(setup, settings).unwrap();
    analyzer.set_parallel(split);
    analyzer.set_live_true_peak(live_true_peak).unwrap();
    let mut maxima = Vec::new();
    let mut buffers = vec![vec![0.0f32; 4096]; channels];
    let mut snapshots = Vec::new();
    for block in 0..24 {
        let mut refs: Vec<&mut [f32]> = buffers.iter_mut().map(|b| b.as_mut_slice()).collect();
        scene.render(&mut refs);
        for (i, s) in buffers[1].iter_mut().enumerate() {
            *s += 0.01;
            if block == 5 && i < 9 {
                *s = 1.5;
            }
        }
        let planes: Vec<&[f32]> = buffers.iter().map(|b| b.as_slice()).collect();
        if analyzer.process(&planes) {
            let status = &analyzer.snapshot().channel_status;
            snapshots.extend_from_slice(format!("{status:?}").as_bytes());
            maxima.push(
                status
                    .iter()
                    .map(|c| c.reading.max_true_peak_dbtp)
                    .collect(),
            );
        }
    }
    ((analyzer.finish().clone(), snapshots), maxima)
}

#[test]
fn spreading_blocks_over_the_cores_changes_nothing() {
    for order in [1, 3, 5] {
        let (one, live_one) = run(order, false);
        let (two, live_two) = run(order, true);
        // Debug text of f64 is exact (shortest round-trip), so equal text is equal bits.
        assert_eq!(
            format!("{:?}", one.programme),
            format!("{:?}", two.programme),
            "order {order}"
        );
        assert_eq!(
            format!("{:?}", one.omni),
            format!("{:?}", two.omni),
            "order {order}"
        );
        assert_eq!(live_one, live_two, "order {order}");
        assert!(one.programme.channels.iter().any(|c| c.clip_count > 0));
    }
}

#[test]
fn keeping_only_the_true_peak_maxima_changes_no_maximum() {
    for order in [1, 3] {
        let ((live, _), live_maxima) = run_with(order, false, true);
        let ((scan, _), scan_maxima) = run_with(order, true, false);
        assert_eq!(
            format!("{:?}", live.programme),
            format!("{:?}", scan.programme),
            "order {order}"
        );
        assert_eq!(live.omni.max_true_peak_dbtp, scan.omni.max_true_peak_dbtp);
        assert_eq!(live_maxima, scan_maxima, "order {order}");
        assert!(live_maxima.len() > 5);
        // The live window is not measured: its reading is the floor, not a wrong number.
        assert!(scan.channel_status.iter().all(|c| c.reading.true_peak_dbtp
            == fieldglass_dsp::meters::LEVEL_FLOOR_DB
            && c.reading.true_peak_hold_dbtp == fieldglass_dsp::meters::LEVEL_FLOOR_DB));
        assert!(live.channel_status[0].reading.true_peak_dbtp > -60.0);
    }
}
