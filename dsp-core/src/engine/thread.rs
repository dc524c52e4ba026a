//! Running the analysis on its own thread, fed by the audio-side hand-off.

use super::analyzer::{Analyzer, EngineError, StreamSetup};
use super::control::{AnalysisSettings, EngineControl, SnapshotSlot};
use super::handoff::{AudioSide, BlockReceiver, handoff};
use crate::format::AmbiFormat;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::thread::JoinHandle;
use std::time::Duration;

/// Seconds of audio the block pool can hold while the analysis thread is busy.
const POOL_SECONDS: f64 = 0.5;
const MAX_CHANNELS: usize = 66;

/// Builds the audio and analysis sides for a stream.
pub struct Engine;

impl Engine {
    /// Allocates the pool, builds the analysis and starts its thread. Call from a non-realtime
    /// thread (plugin activation); the returned [`AudioSide`] is what the audio thread uses.
    pub fn start(
        setup: StreamSetup,
        max_block_frames: usize,
        control: Arc<EngineControl>,
        slot: Arc<SnapshotSlot>,
    ) -> Result<(AudioSide, AnalysisThread), EngineError> {
        // The generation of the settings the analyzer starts with: a change made while the
        // thread starts is then still seen as a change.
        let generation = control.generation();
        let requested = control.load();
        let mut analyzer = match Analyzer::new(setup, requested) {
            Ok(analyzer) => analyzer,
            // A format this stream cannot be read as (FuMa above third order) must not stop the
            // monitor: analyse as AmbiX and say so in every snapshot.
            Err(EngineError::Format(e)) => {
                let fallback = AnalysisSettings {
                    assumed_format: AmbiFormat::ACN_SN3D,
                    ..requested
                };
                let mut analyzer = Analyzer::new(setup, fallback)?;
                analyzer.refuse_format(&e);
                analyzer
            }
            Err(e) => return Err(e),
        };
        let block_frames = max_block_frames.clamp(64, 2048);
        analyzer.reserve_block(block_frames);
        let pool = ((POOL_SECONDS * setup.sample_rate_hz / block_frames as f64).ceil() as usize)
            .clamp(8, 512);
        let (audio, receiver) = handoff(setup.channels, block_frames, pool);
        let stop = Arc::new(AtomicBool::new(false));
        let thread_stop = stop.clone();
        let handle = std::thread::Builder::new()
            .name("fieldglass-analysis".into())
            .spawn(move || run(analyzer, receiver, control, slot, thread_stop, generation))
            .map_err(|e| EngineError::Settings(format!("cannot start the analysis thread: {e}")))?;
        Ok((
            audio,
            AnalysisThread {
                stop,
                handle: Some(handle),
            },
        ))
    }
}

/// Handle of the analysis thread; dropping it stops and joins the thread.
pub struct AnalysisThread {
    stop: Arc<AtomicBool>,
    handle: Option<JoinHandle<()>>,
}

impl AnalysisThread {
    /// Stops the thread and waits for it.
    pub fn stop(&mut self) {
        self.stop.store(true, Ordering::Release);
        if let Some(h) = self.handle.take() {
            let _ = h.join();
        }
    }
}

impl Drop for AnalysisThread {
    fn drop(&mut self) {
        self.stop();
    }
}

fn run(
    mut analyzer: Analyzer,
    receiver: BlockReceiver,
    control: Arc<EngineControl>,
    slot: Arc<SnapshotSlot>,
    stop: Arc<AtomicBool>,
    mut generation: u64,
) {
    // After silence the filters, STFT and integrators decay into subnormal numbers, which cost
    // tens to hundreds of cycles per operation on x86; the analysis never needs them.
    flush_subnormals_on_this_thread();
    let empty: &[f32] = &[];
    while !stop.load(Ordering::Acquire) {
        let g = control.generation();
        if g != generation {
            generation = g;
            // A setting the analysis cannot take (e.g. FuMa above third order) keeps the
            // previous one; the snapshot shows which format is in use.
            let _ = analyzer.apply_settings(control.load());
        }
        let (loudness, integrated, clips) = control.take_requests();
        if loudness {
            analyzer.reset_loudness();
        }
        if integrated {
            analyzer.reset_integrated();
        }
        if clips {
            analyzer.reset_clips();
            receiver.counters().reset_clips();
        }
        if control.take_finding_log_reset() {
            analyzer.reset_finding_log();
        }
        receiver.recv_with(Duration::from_millis(20), |block| {
            let mut channels = [empty; MAX_CHANNELS];
            let n = block.channels().min(MAX_CHANNELS);
            for (c, slot) in channels.iter_mut().enumerate().take(n) {
                *slot = block.channel(c);
            }
            let counters = receiver.counters();
            analyzer.set_health_counters(counters.sent_blocks(), counters.dropped_blocks());
            if analyzer.process(&channels[..n]) {
                slot.publish(Arc::new(analyzer.snapshot().clone()));
            }
        });
    }
}

/// Sets flush-to-zero and denormals-are-zero for the calling thread (this thread is ours, so
/// nothing is restored). x86/x86-64: MXCSR bits FTZ (15) and DAZ (6); AArch64: FPCR.FZ (bit 24),
/// which flushes operands and results. Bit positions from memory of the Intel and Arm
/// architecture manuals; the test below checks the effect on x86. Other targets: no-op.
pub fn flush_subnormals_on_this_thread() {
    #[cfg(all(
        any(target_arch = "x86", target_arch = "x86_64"),
        target_feature = "sse"
    ))]
    {
        const FTZ: u32 = 1 << 15;
        const DAZ: u32 = 1 << 6;
        let mut mxcsr: u32 = 0;
        // SAFETY: stmxcsr/ldmxcsr read and write this thread's SSE control register only; the
        // new value differs from the old in the two mode bits, both valid on every SSE2 CPU.
        unsafe {
            std::arch::asm!("stmxcsr [{}]", in(reg) &mut mxcsr, options(nostack));
            mxcsr |= FTZ | DAZ;
            std::arch::asm!("ldmxcsr [{}]", in(reg) &mxcsr, options(nostack));
        }
    }
    #[cfg(target_arch = "aarch64")]
    {
        const FZ: u64 = 1 << 24;
        let mut fpcr: u64;
        // SAFETY: reads and writes this thread's floating-point control register only.
        unsafe {
            std::arch::asm!("mrs {}, fpcr", out(reg) fpcr, options(nomem, nostack));
            std::arch::asm!("msr fpcr, {}", in(reg) fpcr | FZ, options(nomem, nostack));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The smallest positive subnormal f32 halved rounds to zero only when FTZ is on, and a
    /// subnormal input reads as zero only when DAZ is on (IEEE 754 gives 2^-149 · 0.5 = 2^-150,
    /// which rounds to 0 or 2^-149 without FTZ; with DAZ, x + 0 = 0 for subnormal x).
    #[test]
    #[cfg(any(target_arch = "x86", target_arch = "x86_64", target_arch = "aarch64"))]
    fn the_analysis_thread_flushes_subnormals() {
        let tiny = std::hint::black_box(f32::from_bits(1));
        let normal = std::hint::black_box(f32::MIN_POSITIVE);
        std::thread::spawn(move || {
            // Without the setting, subnormals survive: the test's own premise.
            assert_ne!(std::hint::black_box(tiny) + 0.0, 0.0);
            assert_ne!(std::hint::black_box(normal) * 0.5, 0.0);
            flush_subnormals_on_this_thread();
            // DAZ: a subnormal operand is read as zero.
            assert_eq!(std::hint::black_box(tiny) + 0.0, 0.0);
            // FTZ: a subnormal result is written as zero.
            assert_eq!(std::hint::black_box(normal) * 0.5, 0.0);
            // Normal numbers are untouched.
            assert_eq!(std::hint::black_box(normal) * 2.0, f32::MIN_POSITIVE * 2.0);
        })
        .join()
        .expect("test thread");
    }
}
