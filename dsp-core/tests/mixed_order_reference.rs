//! FuMa mixed-order channel sets: a horizontal source encoded at full second order, cut down to
//! the five-channel horizontal set (W X Y U V, as listed in the AMB B-format file convention's
//! channel table: M. Leese, "File Format for B-Format"; R. Dobson, "WAVE-FORMAT-EXTENSIBLE and
//! B-format audio"), expanded again, and analysed as a scan would analyse it.

use fieldglass_dsp::encoder::PlaneWaveEncoder;
use fieldglass_dsp::engine::{AnalysisSettings, Analyzer, Band, StreamSetup};
use fieldglass_dsp::format::{AmbiFormat, ConversionPlan, MixedOrderExpander};
use fieldglass_dsp::sh::sh_sn3d;
use fieldglass_dsp::sphere::Direction;

const FS: f64 = 48_000.0;

/// FuMa channel indices of the full second-order layout W X Y Z R S T U V.
const FUMA_Z: usize = 3;
const FUMA_R: usize = 4;
const FUMA_S: usize = 5;
const FUMA_T: usize = 6;
const FUMA_U: usize = 7;
const FUMA_V: usize = 8;

/// Deterministic white noise in [-1, 1) (xorshift64*).
fn noise(frames: usize) -> Vec<f32> {
    let mut state = 0x9e37_79b9_7f4a_7c15u64;
    (0..frames)
        .map(|_| {
            state ^= state >> 12;
            state ^= state << 25;
            state ^= state >> 27;
            let v = state.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 40;
            (v as f64 / (1u64 << 24) as f64 * 2.0 - 1.0) as f32
        })
        .collect()
}

/// Noise from `direction` encoded in full second-order FuMa: nine planar channels.
fn encode_fuma_order_2(direction: Direction, frames: usize) -> Vec<Vec<f32>> {
    let mut encoder = PlaneWaveEncoder::new(2, AmbiFormat::FUMA).unwrap();
    let mut planes = vec![vec![0.0f32; frames]; 9];
    let mut refs: Vec<&mut [f32]> = planes.iter_mut().map(|c| c.as_mut_slice()).collect();
    encoder.add_to(direction, 0.3, &noise(frames), &mut refs);
    planes
}

fn expand(expander: &MixedOrderExpander, file: &[Vec<f32>]) -> Vec<Vec<f32>> {
    let frames = file[0].len();
    let mut expanded = vec![vec![1.0f32; frames]; expander.output_channels()];
    let input: Vec<&[f32]> = file.iter().map(|c| c.as_slice()).collect();
    let mut output: Vec<&mut [f32]> = expanded.iter_mut().map(|c| c.as_mut_slice()).collect();
    expander.expand(&input, &mut output).unwrap();
    expanded
}

fn analyse(planes: &[Vec<f32>], format: AmbiFormat) -> Analyzer {
    let setup = StreamSetup {
        sample_rate_hz: FS,
        channels: planes.len(),
    };
    let settings = AnalysisSettings {
        assumed_format: format,
        ..Default::default()
    };
    let mut analyzer = Analyzer::new(setup, settings).unwrap();
    let frames = planes[0].len();
    for start in (0..frames).step_by(512) {
        let end = (start + 512).min(frames);
        let block: Vec<&[f32]> = planes.iter().map(|c| &c[start..end]).collect();
        analyzer.process(&block);
    }
    analyzer.finish();
    analyzer
}

#[test]
fn horizontal_set_expands_to_the_full_encoding_with_zeros_at_r_s_t() {
    let source = Direction::new(30.0, 0.0);
    let full = encode_fuma_order_2(source, 4_800);
    // The five-channel file keeps W X Y U V in that order.
    let file: Vec<Vec<f32>> = [0, 1, 2, FUMA_U, FUMA_V]
        .iter()
        .map(|&c| full[c].clone())
        .collect();
    let expander = MixedOrderExpander::for_channel_count(5).unwrap();
    assert_eq!(
        expander.absent_channels(),
        &[FUMA_Z, FUMA_R, FUMA_S, FUMA_T]
    );
    let expanded = expand(&expander, &file);
    for (channel, (got, encoded)) in expanded.iter().zip(&full).enumerate() {
        if [FUMA_R, FUMA_S, FUMA_T, FUMA_Z].contains(&channel) {
            assert!(got.iter().all(|&v| v == 0.0), "channel {channel} not zero");
        } else {
            assert_eq!(got, encoded, "channel {channel}");
        }
    }
    // Z, S and T of a source at elevation 0 are zero in the full encoding too (they carry a
    // factor sin(elevation)); only R (order 2, degree 0) is lost by the horizontal set.
    for channel in [FUMA_Z, FUMA_S, FUMA_T] {
        assert!(full[channel].iter().all(|&v| v.abs() < 1e-6), "{channel}");
    }

    // Converted to ACN/SN3D, the present components equal the SN3D spherical harmonics of the
    // source direction times the signal (SN3D definition of the crate docs).
    let plan = ConversionPlan::to_sn3d(AmbiFormat::FUMA, 2).unwrap();
    let y = sh_sn3d(2, source);
    let signal = noise(4_800);
    for acn in [0, 1, 3, 4, 8] {
        let fuma = plan.source_channel(acn);
        let gain = plan.gain(acn) as f32;
        for (frame, &s) in signal.iter().enumerate().step_by(97) {
            let want = 0.3 * s * y[acn] as f32;
            let got = expanded[fuma][frame] * gain;
            assert!(
                (got - want).abs() < 1e-6,
                "acn {acn} frame {frame}: {got} vs {want}"
            );
        }
    }
}

#[test]
fn expanded_horizontal_set_is_found_on_the_horizon() {
    let source = Direction::new(30.0, 0.0);
    let full = encode_fuma_order_2(source, 48_000);
    let file: Vec<Vec<f32>> = [0, 1, 2, FUMA_U, FUMA_V]
        .iter()
        .map(|&c| full[c].clone())
        .collect();
    let expander = MixedOrderExpander::for_channel_count(5).unwrap();
    let analyzer = analyse(&expand(&expander, &file), AmbiFormat::FUMA);
    let snapshot = analyzer.snapshot();
    assert_eq!(snapshot.order, 2);
    let top = snapshot.sources.first().expect("a source").direction;
    println!(
        "expanded W X Y U V: strongest source at azimuth {:.2}°, elevation {:.2}°",
        top.azimuth_deg, top.elevation_deg
    );
    assert!(
        top.elevation_deg.abs() < 1.5 && (top.azimuth_deg - 30.0).abs() < 1.5,
        "expanded: found {top:?}"
    );
    // DirAC (Pulkki 2007) direction from the first-order part: the source itself.
    let doa = snapshot.intensity[Band::Full.index()].direction.unwrap();
    assert!(doa.angle_to_deg(&source) < 1.0, "DirAC {doa:?}");

    // The reading this replaces: five channels taken as first order plus one extra channel
    // puts U where Z belongs, and the source leaves the horizon.
    let misread = analyse(&file, AmbiFormat::FUMA);
    let doa = misread.snapshot().intensity[Band::Full.index()]
        .direction
        .unwrap();
    println!(
        "read as first order plus one extra channel: DirAC elevation {:.1}°",
        doa.elevation_deg
    );
    assert!(doa.elevation_deg > 20.0, "misread DirAC {doa:?}");
}
