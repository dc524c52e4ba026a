//! `fieldglass demo --write`: the demo scene as a WAV file a DAW can load.

use super::CliError;
use crate::adm::{chna_body, hoa_axml};
use crate::wav::{SampleFormat, WavSpec, WavWriter, WriterOptions};
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::scene::{DemoScene, SceneConfig};
use fieldglass_dsp::wording;
use std::path::Path;

/// Frames rendered and written at a time.
const BLOCK_FRAMES: usize = 4096;
/// Longest demo written, seconds (24 hours).
pub const MAX_DEMO_SECONDS: f64 = 86_400.0;

/// What to write.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DemoOptions {
    pub order: usize,
    pub format: AmbiFormat,
    pub seconds: f64,
    pub sample_rate_hz: u32,
    /// 32-bit float (true) or 24-bit PCM (false).
    pub float: bool,
    /// Force an RF64 header.
    pub rf64: bool,
    /// Write a BW64 file with ADM metadata (`chna` + `axml`) declaring the HOA pack.
    pub adm: bool,
}

/// Renders the demo scene into `path`, streaming in blocks (constant memory). Returns the frames
/// written.
pub fn write_demo(path: &Path, options: DemoOptions) -> Result<u64, CliError> {
    let name = path.display();
    if !(options.seconds.is_finite()
        && options.seconds > 0.0
        && options.seconds <= MAX_DEMO_SECONDS)
    {
        return Err(CliError::input(format!(
            "--seconds {} is outside 0 … {MAX_DEMO_SECONDS} s",
            options.seconds
        )));
    }
    let config = SceneConfig {
        order: options.order,
        format: options.format,
        sample_rate_hz: options.sample_rate_hz as f64,
        ..SceneConfig::default()
    };
    let mut scene = DemoScene::new(config)
        .map_err(|e| CliError::input(format!("cannot build the demo: {e}")))?;
    let channels = scene.channels();
    let spec = WavSpec {
        channels: channels as u16,
        sample_rate: options.sample_rate_hz,
        bits_per_sample: if options.float { 32 } else { 24 },
        sample_format: if options.float {
            SampleFormat::Float
        } else {
            SampleFormat::Int
        },
        channel_mask: Some(0),
    };
    let writer_options = WriterOptions {
        rf64: options.rf64,
        extensible: true,
        bw64: options.adm,
    };
    let adm = if options.adm {
        let (axml, entries) = hoa_axml(options.format, options.order, wording::DEMO_SCENE)
            .ok_or_else(|| CliError::input("ADM has no word for this format".to_string()))?;
        Some((chna_body(&entries), axml))
    } else {
        None
    };
    let chunks: Vec<([u8; 4], &[u8])> = adm
        .iter()
        .flat_map(|(chna, axml)| [(*b"chna", chna.as_slice()), (*b"axml", axml.as_bytes())])
        .collect();
    let mut writer = WavWriter::create_with_chunks(path, spec, writer_options, &chunks)
        .map_err(|e| CliError::output(format!("cannot write '{name}': {e}")))?;
    let total = (options.seconds * options.sample_rate_hz as f64).round() as u64;
    let mut buffers = vec![vec![0.0f32; BLOCK_FRAMES]; channels];
    let mut done = 0u64;
    while done < total {
        let n = (total - done).min(BLOCK_FRAMES as u64) as usize;
        let mut refs: Vec<&mut [f32]> = buffers.iter_mut().map(|b| &mut b[..n]).collect();
        scene.render(&mut refs);
        let planes: Vec<&[f32]> = buffers.iter().map(|b| &b[..n]).collect();
        writer
            .write_planar(&planes)
            .map_err(|e| CliError::output(format!("cannot write '{name}': {e}")))?;
        done += n as u64;
    }
    writer
        .finalize()
        .map_err(|e| CliError::output(format!("cannot write '{name}': {e}")))?;
    Ok(total)
}
