//! The plugin's side of the engine: started in `activate()`, fed from `process()`.
//!
//! `process()` only copies the host buffer into the engine's pooled blocks and copies
//! automatable parameter values into the engine's atomic control cell; it never allocates,
//! locks or waits, and never writes the buffer.

use crate::params::FieldglassParams;
use fieldglass_dsp::engine::handoff::AudioSide;
use fieldglass_dsp::engine::{AnalysisThread, Engine, EngineControl, SnapshotSlot, StreamSetup};
use std::sync::Arc;

/// Most channels a layout has (order 7).
pub const MAX_CHANNELS: usize = 64;

/// Engine handles shared by the plugin, its editor and (in `live --play`) a player thread.
pub struct EngineHost {
    control: Arc<EngineControl>,
    slot: Arc<SnapshotSlot>,
    running: Option<Running>,
}

struct Running {
    /// None when a player thread (standalone `--play`) feeds the engine instead of the host.
    audio: Option<AudioSide>,
    _thread: AnalysisThread,
}

impl Default for EngineHost {
    fn default() -> Self {
        Self {
            control: EngineControl::new(Default::default()),
            slot: SnapshotSlot::new(),
            running: None,
        }
    }
}

impl EngineHost {
    pub fn control(&self) -> &Arc<EngineControl> {
        &self.control
    }

    pub fn slot(&self) -> &Arc<SnapshotSlot> {
        &self.slot
    }

    /// (Re)starts the engine for a stream. Off the audio thread. Returns an error message if the
    /// analysis cannot run (the plugin still passes audio through).
    pub fn start(
        &mut self,
        sample_rate_hz: f32,
        channels: usize,
        max_buffer_frames: usize,
    ) -> Result<(), String> {
        self.stop();
        self.slot.clear();
        let setup = StreamSetup {
            sample_rate_hz: f64::from(sample_rate_hz),
            channels,
        };
        let (audio, thread) = Engine::start(
            setup,
            max_buffer_frames,
            self.control.clone(),
            self.slot.clone(),
        )
        .map_err(|e| e.to_string())?;
        let audio = match crate::player::take_feed(setup) {
            Some(feed) => {
                feed(audio);
                None
            }
            None => Some(audio),
        };
        self.running = Some(Running {
            audio,
            _thread: thread,
        });
        Ok(())
    }

    /// Stops the analysis thread (joins it).
    pub fn stop(&mut self) {
        self.running = None;
    }

    /// Audio thread: hands the buffer to the analysis. Wait-free, allocation-free.
    #[inline]
    pub fn push(&mut self, channels: &[&mut [f32]]) {
        let Some(Running {
            audio: Some(audio), ..
        }) = &mut self.running
        else {
            return;
        };
        let empty: &[f32] = &[];
        let mut refs = [empty; MAX_CHANNELS];
        let n = channels.len().min(MAX_CHANNELS);
        for (r, c) in refs.iter_mut().zip(channels.iter()) {
            *r = c;
        }
        audio.push(&refs[..n]);
    }
}

/// Copies the automatable parameters (plain atomics) into the control cell; safe on the audio
/// thread (the cell's store compares first, so an unchanged value costs a few atomic loads).
/// Persisted editor state (hold, whole-session map) is applied by the editor.
#[inline]
pub fn apply_parameters(params: &FieldglassParams, control: &EngineControl) {
    control.update(|settings| params.copy_automatable_into(settings));
}
