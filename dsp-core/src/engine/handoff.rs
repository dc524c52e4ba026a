//! Audio-thread → analysis-thread hand-off: pooled blocks over bounded channels.
//!
//! The audio side never waits and never allocates: it takes a free block from the pool, copies the
//! host buffer into it, updates lossless peak and clip counters (atomics) and sends it on. When no
//! block is free or the queue is full the block is dropped and counted. Blocks travel back to the
//! pool after analysis, so the pool's memory is allocated once, up front.

use atomic_float::AtomicF32;
use crossbeam_channel::{Receiver, Sender, TrySendError, bounded};
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};

/// How long the analysis side sleeps when no block is waiting: short against a 30 Hz map
/// and any host block, long enough that polling costs nothing measurable.
pub const POLL_INTERVAL: std::time::Duration = std::time::Duration::from_millis(2);

/// One block of planar audio, channels × up to `capacity_frames` frames.
#[derive(Debug)]
pub struct AudioBlock {
    samples: Vec<f32>,
    channels: usize,
    capacity_frames: usize,
    frames: usize,
}

impl AudioBlock {
    fn new(channels: usize, capacity_frames: usize) -> Self {
        Self {
            samples: vec![0.0; channels * capacity_frames],
            channels,
            capacity_frames,
            frames: 0,
        }
    }

    /// Number of valid frames.
    pub fn frames(&self) -> usize {
        self.frames
    }

    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Samples of one channel (`frames()` long).
    pub fn channel(&self, channel: usize) -> &[f32] {
        let start = channel * self.capacity_frames;
        &self.samples[start..start + self.frames]
    }
}

/// Counters the audio side updates and anyone may read; all lossless between reads.
#[derive(Debug)]
pub struct AudioCounters {
    /// Largest |sample| per channel since the last `take_peaks`, indexed by [input channel].
    peaks: Vec<AtomicF32>,
    /// Samples with |x| ≥ 1.0 per channel since the start (or the last reset).
    clipped_samples: Vec<AtomicU64>,
    /// Blocks dropped because the analysis side was behind.
    dropped_blocks: AtomicU64,
    /// Blocks handed over successfully.
    sent_blocks: AtomicU64,
}

impl AudioCounters {
    fn new(channels: usize) -> Self {
        Self {
            peaks: (0..channels).map(|_| AtomicF32::new(0.0)).collect(),
            clipped_samples: (0..channels).map(|_| AtomicU64::new(0)).collect(),
            dropped_blocks: AtomicU64::new(0),
            sent_blocks: AtomicU64::new(0),
        }
    }

    /// Largest |sample| of `channel` since the previous call, resetting it to zero.
    pub fn take_peak(&self, channel: usize) -> f32 {
        self.peaks[channel].swap(0.0, Ordering::AcqRel)
    }

    pub fn clipped_samples(&self, channel: usize) -> u64 {
        self.clipped_samples[channel].load(Ordering::Relaxed)
    }

    pub fn reset_clips(&self) {
        for c in &self.clipped_samples {
            c.store(0, Ordering::Relaxed);
        }
    }

    pub fn dropped_blocks(&self) -> u64 {
        self.dropped_blocks.load(Ordering::Relaxed)
    }

    pub fn sent_blocks(&self) -> u64 {
        self.sent_blocks.load(Ordering::Relaxed)
    }

    pub fn channels(&self) -> usize {
        self.peaks.len()
    }
}

/// The audio thread's end of the hand-off. `push` is wait-free and allocation-free.
pub struct AudioSide {
    free: Receiver<Box<AudioBlock>>,
    filled: Sender<Box<AudioBlock>>,
    recycle: Sender<Box<AudioBlock>>,
    counters: Arc<AudioCounters>,
    channels: usize,
    block_frames: usize,
}

/// The analysis thread's end: receives filled blocks and returns them to the pool.
pub struct BlockReceiver {
    filled: Receiver<Box<AudioBlock>>,
    recycle: Sender<Box<AudioBlock>>,
    counters: Arc<AudioCounters>,
}

/// Builds a hand-off for `channels` channels with blocks of `block_frames` frames and
/// `pool_blocks` blocks in flight at most. Allocates everything it will ever use.
pub fn handoff(
    channels: usize,
    block_frames: usize,
    pool_blocks: usize,
) -> (AudioSide, BlockReceiver) {
    let block_frames = block_frames.max(1);
    let pool_blocks = pool_blocks.max(2);
    let (free_tx, free_rx) = bounded(pool_blocks);
    let (filled_tx, filled_rx) = bounded(pool_blocks);
    for _ in 0..pool_blocks {
        free_tx
            .send(Box::new(AudioBlock::new(channels, block_frames)))
            .expect("pool channel has room");
    }
    let counters = Arc::new(AudioCounters::new(channels));
    let audio = AudioSide {
        free: free_rx,
        filled: filled_tx,
        recycle: free_tx.clone(),
        counters: counters.clone(),
        channels,
        block_frames,
    };
    (
        audio,
        BlockReceiver {
            filled: filled_rx,
            recycle: free_tx,
            counters,
        },
    )
}

impl AudioSide {
    /// Copies one host buffer (planar, one slice per channel, all the same length) into pooled
    /// blocks and hands them over. Buffers longer than a block are split. Channels beyond the
    /// configured count are ignored; missing channels read as silence.
    pub fn push(&mut self, channels: &[&[f32]]) {
        let frames = channels.first().map_or(0, |c| c.len());
        self.count_peaks(channels, frames);
        let mut offset = 0;
        while offset < frames {
            let chunk = (frames - offset).min(self.block_frames);
            self.send_chunk(channels, offset, chunk);
            offset += chunk;
        }
    }

    fn count_peaks(&self, channels: &[&[f32]], frames: usize) {
        for (c, samples) in channels.iter().take(self.channels).enumerate() {
            let samples = &samples[..frames.min(samples.len())];
            // NaN neither raises the peak nor counts as clipped (NaN ≥ 1 is false); the
            // analysis side counts invalid samples.
            let peak = crate::meters::abs_max(samples);
            self.counters.peaks[c].fetch_max(peak, Ordering::AcqRel);
            // Clipping is rare: count only when the peak says there is something to count.
            if peak >= 1.0 {
                let clipped = samples
                    .iter()
                    .map(|x| u64::from(x.abs() >= 1.0))
                    .sum::<u64>();
                self.counters.clipped_samples[c].fetch_add(clipped, Ordering::Relaxed);
            }
        }
    }

    fn send_chunk(&mut self, channels: &[&[f32]], offset: usize, frames: usize) {
        let Ok(mut block) = self.free.try_recv() else {
            self.counters.dropped_blocks.fetch_add(1, Ordering::Relaxed);
            return;
        };
        block.frames = frames;
        let capacity = block.capacity_frames;
        for c in 0..self.channels {
            let dest = &mut block.samples[c * capacity..c * capacity + frames];
            match channels.get(c) {
                Some(src) if src.len() >= offset + frames => {
                    dest.copy_from_slice(&src[offset..offset + frames])
                }
                _ => dest.fill(0.0),
            }
        }
        match self.filled.try_send(block) {
            Ok(()) => {
                self.counters.sent_blocks.fetch_add(1, Ordering::Relaxed);
            }
            Err(TrySendError::Full(block)) | Err(TrySendError::Disconnected(block)) => {
                self.counters.dropped_blocks.fetch_add(1, Ordering::Relaxed);
                // The pool channel has room for every block, so this cannot fail; if it ever
                // did, forgetting the block avoids a deallocation on the audio thread.
                if let Err(e) = self.recycle.try_send(block) {
                    std::mem::forget(e.into_inner());
                }
            }
        }
    }

    pub fn counters(&self) -> &Arc<AudioCounters> {
        &self.counters
    }

    /// Largest block the audio side hands over, in frames.
    pub fn block_frames(&self) -> usize {
        self.block_frames
    }
}

impl BlockReceiver {
    /// Takes a waiting block and passes it to `f`, then returns it to the pool; with none
    /// waiting, sleeps up to `timeout` (at most [`POLL_INTERVAL`]) and returns false.
    ///
    /// It polls instead of blocking on the channel on purpose: a receiver parked in the
    /// channel is woken by the sender, and the sender is the audio thread, whose `try_send`
    /// would then make a futex system call. With nobody parked, `try_send` is atomics only.
    pub fn recv_with(&self, timeout: std::time::Duration, f: impl FnOnce(&AudioBlock)) -> bool {
        match self.filled.try_recv() {
            Ok(block) => {
                f(&block);
                let _ = self.recycle.try_send(block);
                true
            }
            Err(_) => {
                std::thread::sleep(timeout.min(POLL_INTERVAL));
                false
            }
        }
    }

    /// Processes every block already waiting, without blocking. Returns how many.
    pub fn drain_with(&self, mut f: impl FnMut(&AudioBlock)) -> usize {
        let mut n = 0;
        while let Ok(block) = self.filled.try_recv() {
            f(&block);
            let _ = self.recycle.try_send(block);
            n += 1;
        }
        n
    }

    pub fn counters(&self) -> &Arc<AudioCounters> {
        &self.counters
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn blocks_arrive_split_and_intact() {
        let (mut audio, rx) = handoff(2, 4, 8);
        let a: Vec<f32> = (0..10).map(|i| i as f32 / 10.0).collect();
        let b: Vec<f32> = (0..10).map(|i| -(i as f32) / 10.0).collect();
        audio.push(&[&a, &b]);
        let mut got_a = Vec::new();
        let mut got_b = Vec::new();
        let n = rx.drain_with(|block| {
            got_a.extend_from_slice(block.channel(0));
            got_b.extend_from_slice(block.channel(1));
        });
        assert_eq!(n, 3);
        assert_eq!(got_a, a);
        assert_eq!(got_b, b);
        assert_eq!(audio.counters().dropped_blocks(), 0);
        assert!((audio.counters().take_peak(0) - 0.9).abs() < 1e-6);
        assert_eq!(audio.counters().take_peak(0), 0.0);
    }

    #[test]
    fn full_pool_drops_and_counts() {
        let (mut audio, rx) = handoff(1, 4, 2);
        let x = [1.0f32; 4];
        for _ in 0..5 {
            audio.push(&[&x]);
        }
        assert_eq!(audio.counters().dropped_blocks(), 3);
        assert_eq!(audio.counters().clipped_samples(0), 20);
        assert_eq!(rx.drain_with(|_| {}), 2);
        // Blocks went back to the pool: pushing works again.
        audio.push(&[&x]);
        assert_eq!(rx.drain_with(|_| {}), 1);
    }
}
