//! The scanner runs the level side of each block (meters with true peak, W loudness) on a second
//! thread beside the spatial side. The two sides share no state, so every figure must be
//! identical, bit for bit, to the one-thread path — checked here on the demo scene (three
//! orders, with clipping and a DC offset added so that those paths are exercised too).

use fieldglass_dsp::engine::{AnalysisSettings, Analyzer, StreamSetup};
use fieldglass_dsp::scene::{DemoScene, SceneConfig};

fn run(order: usize, split: bool) -> (fieldglass_dsp::engine::Snapshot, Vec<u8>) {
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
    analyzer.set_split_levels(split);
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
            snapshots
                .extend_from_slice(format!("{:?}", analyzer.snapshot().channel_status).as_bytes());
        }
    }
    (analyzer.finish().clone(), snapshots)
}

#[test]
fn the_level_side_on_a_second_thread_changes_nothing() {
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
