//! Feeding the analysis from the demo scene, a WAV file or an Ogg Opus file at real-time pace, for trying the
//! editor on a machine without an audio interface (`fieldglass live --play …`).
//!
//! The player replaces the host's input as the analysis feed only; the plugin's audio path is
//! untouched. It is off unless the command line sets a source before the plugin starts.

use crate::opus::{self, OpusReader};
use crate::wav::WavReader;
use fieldglass_dsp::engine::StreamSetup;
use fieldglass_dsp::engine::handoff::AudioSide;
use fieldglass_dsp::scene::{DemoScene, SceneConfig};
use std::path::PathBuf;
use std::sync::Mutex;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::{Duration, Instant};

/// What to play into the analysis.
#[derive(Clone, Debug, PartialEq)]
pub enum PlaySource {
    Demo,
    File(PathBuf),
}

static SOURCE: Mutex<Option<PlaySource>> = Mutex::new(None);
/// Bumped at every engine start so an older player thread knows to stop.
static GENERATION: AtomicU64 = AtomicU64::new(0);
const BLOCK_FRAMES: usize = 512;

/// Makes every later engine start feed from `source` instead of the host input.
pub fn set_play_source(source: PlaySource) {
    if let Ok(mut s) = SOURCE.lock() {
        *s = Some(source);
    }
}

/// A feed for an engine about to start, if a play source is set: a function that takes the
/// engine's audio side and starts a player thread with it.
pub fn take_feed(setup: StreamSetup) -> Option<Box<dyn FnOnce(AudioSide)>> {
    let source = SOURCE.lock().ok()?.clone()?;
    let generation = GENERATION.fetch_add(1, Ordering::AcqRel) + 1;
    Some(Box::new(move |audio| {
        let spawned = std::thread::Builder::new()
            .name("fieldglass-player".into())
            .spawn(move || play(source, setup, audio, generation));
        if let Err(e) = spawned {
            eprintln!("fieldglass: cannot start the player: {e}");
        }
    }))
}

/// Something that fills planar blocks.
enum Feed {
    Demo(Box<DemoScene>),
    File {
        reader: WavReader<std::io::BufReader<std::fs::File>>,
        path: PathBuf,
    },
    Opus {
        reader: Box<OpusReader<std::io::BufReader<std::fs::File>>>,
        path: PathBuf,
    },
}

/// The channel count of a file to play: WAV, RF64, BW64 or Ogg Opus (told by content).
pub fn file_channels(path: &std::path::Path) -> Result<usize, String> {
    let unreadable = |e: &dyn std::fmt::Display| format!("cannot read '{}': {e}", path.display());
    if opus::file_is_ogg(path) {
        OpusReader::open(path)
            .map(|r| r.channels())
            .map_err(|e| unreadable(&e))
    } else {
        WavReader::open(path)
            .map(|r| usize::from(r.spec().channels))
            .map_err(|e| unreadable(&e))
    }
}

fn open(source: &PlaySource, setup: StreamSetup) -> Result<Feed, String> {
    match source {
        PlaySource::Demo => {
            let layout = fieldglass_dsp::engine::ChannelLayout::from_channel_count(setup.channels)
                .map_err(|e| e.to_string())?;
            let config = SceneConfig {
                order: layout.order,
                sample_rate_hz: setup.sample_rate_hz,
                ..SceneConfig::default()
            };
            DemoScene::new(config)
                .map(|s| Feed::Demo(Box::new(s)))
                .map_err(|e| e.to_string())
        }
        PlaySource::File(path) if opus::file_is_ogg(path) => {
            let reader = OpusReader::open(path)
                .map_err(|e| format!("cannot read '{}': {e}", path.display()))?;
            if reader.channels() != setup.channels {
                return Err(format!(
                    "'{}' has {} channels but the plugin runs with {}; choose the matching layout",
                    path.display(),
                    reader.channels(),
                    setup.channels
                ));
            }
            Ok(Feed::Opus {
                reader: Box::new(reader),
                path: path.clone(),
            })
        }
        PlaySource::File(path) => {
            let reader = WavReader::open(path)
                .map_err(|e| format!("cannot read '{}': {e}", path.display()))?;
            let channels = usize::from(reader.spec().channels);
            if channels != setup.channels {
                return Err(format!(
                    "'{}' has {channels} channels but the plugin runs with {}; choose the matching layout",
                    path.display(),
                    setup.channels
                ));
            }
            Ok(Feed::File {
                reader,
                path: path.clone(),
            })
        }
    }
}

fn play(source: PlaySource, setup: StreamSetup, mut audio: AudioSide, generation: u64) {
    let mut feed = match open(&source, setup) {
        Ok(f) => f,
        Err(e) => {
            eprintln!("fieldglass: {e}");
            return;
        }
    };
    let mut buffers = vec![vec![0.0f32; BLOCK_FRAMES]; setup.channels];
    let block = Duration::from_secs_f64(BLOCK_FRAMES as f64 / setup.sample_rate_hz);
    let mut deadline = Instant::now();
    while GENERATION.load(Ordering::Acquire) == generation {
        let frames = match &mut feed {
            Feed::Demo(scene) => {
                let spatial = scene.channels();
                let mut refs: Vec<&mut [f32]> = buffers[..spatial]
                    .iter_mut()
                    .map(|b| b.as_mut_slice())
                    .collect();
                scene.render(&mut refs);
                BLOCK_FRAMES
            }
            Feed::File { reader, path } => match reader.read_planar(&mut buffers, BLOCK_FRAMES) {
                Ok(0) => {
                    // Loop the file.
                    if reader.seek_frame(0).is_err() {
                        return;
                    }
                    continue;
                }
                Ok(n) => n,
                Err(e) => {
                    eprintln!("fieldglass: reading '{}': {e}", path.display());
                    return;
                }
            },
            Feed::Opus { reader, path } => match reader.read_planar(&mut buffers, BLOCK_FRAMES) {
                Ok(0) => {
                    // Loop the file: a stream is read from its start again.
                    match OpusReader::open(&*path) {
                        Ok(again) => **reader = again,
                        Err(_) => return,
                    }
                    continue;
                }
                Ok(n) => n,
                Err(e) => {
                    eprintln!("fieldglass: reading '{}': {e}", path.display());
                    return;
                }
            },
        };
        let refs: Vec<&[f32]> = buffers.iter().map(|b| &b[..frames.min(b.len())]).collect();
        audio.push(&refs);
        deadline += block.mul_f64(frames as f64 / BLOCK_FRAMES as f64);
        let now = Instant::now();
        if deadline > now {
            std::thread::sleep(deadline - now);
        } else if now - deadline > Duration::from_secs(1) {
            deadline = now;
        }
    }
}
