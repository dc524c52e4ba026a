//! Streaming reader of one Ogg Opus stream of channel mapping family 2 or 3.

use super::OpusError;
use super::decoder::{MAX_PACKET_FRAMES, StreamDecoder};
use super::head::OpusHead;
use super::tail::tail_pages;
use ogg::{OggReadError, PacketReader};
use std::fs::File;
use std::io::{BufReader, Read, Seek};
use std::path::Path;

/// Opus always decodes at 48 kHz here (RFC 7845 section 5.1: the input rate is informational).
pub const OPUS_SAMPLE_RATE_HZ: u32 = 48_000;

/// Reads an Ogg Opus file into planar `f32` blocks at 48 kHz, ACN/SN3D channel order, with the
/// pre-skip dropped, the output gain applied and the end trimmed to the last granule position.
/// Memory stays constant: one decoded packet is buffered at a time.
pub struct OpusReader<R: Read + Seek> {
    packets: PacketReader<R>,
    serial: u32,
    head: OpusHead,
    decoder: StreamDecoder,
    gain: f32,
    /// One decoded packet, interleaved; frames `pending.0 .. pending.1` are still to deliver.
    decoded: Vec<f32>,
    pending: (usize, usize),
    pre_skip_left: u64,
    frames: u64,
    delivered: u64,
    audio_packets: u64,
    finished: bool,
}

impl OpusReader<BufReader<File>> {
    /// Opens `path` and reads its headers.
    pub fn open(path: impl AsRef<Path>) -> Result<Self, OpusError> {
        let file = File::open(path.as_ref()).map_err(|e| OpusError::io("opening the file", e))?;
        OpusReader::new(BufReader::new(file))
    }
}

/// Whether `first_bytes` start with the Ogg capture pattern.
pub fn is_ogg(first_bytes: &[u8]) -> bool {
    first_bytes.starts_with(b"OggS")
}

/// Whether the file at `path` starts with the Ogg capture pattern (false when it cannot be
/// read: the caller's own open reports why).
pub fn file_is_ogg(path: impl AsRef<Path>) -> bool {
    let mut first = [0u8; 4];
    File::open(path)
        .and_then(|mut f| f.read_exact(&mut first))
        .is_ok_and(|()| is_ogg(&first))
}

fn ogg_error(e: OggReadError, frames_read: u64) -> OpusError {
    match e {
        OggReadError::ReadError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            OpusError::Truncated(format!(
                "the file ends inside a page after {frames_read} frames"
            ))
        }
        OggReadError::ReadError(io) => OpusError::io("reading the file", io),
        OggReadError::HashMismatch(stored, calculated) => OpusError::Ogg(format!(
            "a page's stored checksum is {stored:#010x}, its contents give {calculated:#010x}"
        )),
        OggReadError::NoCapturePatternFound => {
            OpusError::Ogg("no Ogg page where one should start".into())
        }
        other => OpusError::Ogg(other.to_string()),
    }
}

impl<R: Read + Seek> OpusReader<R> {
    /// Reads the identification and comment headers of the first logical stream of `inner`,
    /// and the last granule position from the end of it.
    pub fn new(mut inner: R) -> Result<Self, OpusError> {
        let tail =
            tail_pages(&mut inner).map_err(|e| OpusError::io("reading the file's end", e))?;
        let mut packets = PacketReader::new(inner);
        let first = packets
            .read_packet()
            .map_err(|e| match e {
                OggReadError::NoCapturePatternFound => {
                    OpusError::NotOpus("no Ogg page at the start".into())
                }
                e => ogg_error(e, 0),
            })?
            .ok_or_else(|| OpusError::NotOpus("the file holds no Ogg packet".into()))?;
        if !first.first_in_stream() {
            return Err(OpusError::NotOpus(
                "the first page does not begin a logical stream".into(),
            ));
        }
        let head = OpusHead::parse(&first.data)?;
        let serial = first.stream_serial();
        let tags = loop {
            let p = packets
                .read_packet()
                .map_err(|e| ogg_error(e, 0))?
                .ok_or_else(|| OpusError::Truncated("no comment header".into()))?;
            if p.stream_serial() == serial {
                break p;
            }
        };
        if !tags.data.starts_with(b"OpusTags") {
            return Err(OpusError::NotOpus(
                "the second packet is not the comment header ('OpusTags')".into(),
            ));
        }
        if let Some(at) = tail.partial_page_at {
            return Err(OpusError::Truncated(format!(
                "the page at byte {at} is incomplete or damaged and no whole page follows it"
            )));
        }
        let last = tail
            .pages
            .iter()
            .rev()
            .find(|p| p.serial == serial && p.granule != u64::MAX)
            .ok_or_else(|| {
                OpusError::BadGranule(
                    "no whole page of the stream with a granule position at the end of the file"
                        .into(),
                )
            })?;
        let pre_skip = u64::from(head.pre_skip);
        if last.granule == 0 {
            return Err(OpusError::BadGranule(
                "the stream holds no audio (its last granule position is 0)".into(),
            ));
        }
        if last.granule < pre_skip {
            return Err(OpusError::BadGranule(format!(
                "the pre-skip of {pre_skip} frames is longer than the whole stream (last granule position {})",
                last.granule
            )));
        }
        let decoder = StreamDecoder::new(&head)?;
        let channels = usize::from(head.channels);
        Ok(OpusReader {
            packets,
            serial,
            gain: head.output_gain_factor(),
            head,
            decoder,
            decoded: vec![0.0; MAX_PACKET_FRAMES * channels],
            pending: (0, 0),
            pre_skip_left: pre_skip,
            frames: last.granule - pre_skip,
            delivered: 0,
            audio_packets: 0,
            finished: false,
        })
    }

    /// Output channels: (N+1)² in ACN order, then the non-diegetic stereo pair if there is one.
    pub fn channels(&self) -> usize {
        usize::from(self.head.channels)
    }

    /// Always 48 000 Hz.
    pub fn sample_rate(&self) -> u32 {
        OPUS_SAMPLE_RATE_HZ
    }

    /// Frames the stream holds after pre-skip and end trimming: the last page's granule
    /// position minus the pre-skip, known before decoding. A file that ends inside a page is
    /// refused at opening; one cut at a page boundary reads as the shorter stream it is.
    pub fn frames(&self) -> u64 {
        self.frames
    }

    /// The checked identification header.
    pub fn head(&self) -> &OpusHead {
        &self.head
    }

    /// The full ambisonic order N of the stream.
    pub fn order(&self) -> usize {
        self.head.ambisonic_order().0
    }

    /// Whether the two last channels are a non-diegetic stereo pair (not part of the scene).
    pub fn has_stereo_pair(&self) -> bool {
        self.head.ambisonic_order().1
    }

    /// Reads up to `max_frames` frames into one buffer per channel (`out.len()` must equal
    /// [`channels`](Self::channels)). Each buffer is cleared and refilled, reusing its
    /// capacity. Returns the frames read; 0 at the end.
    pub fn read_planar(
        &mut self,
        out: &mut [Vec<f32>],
        max_frames: usize,
    ) -> Result<usize, OpusError> {
        let channels = self.channels();
        if out.len() != channels {
            return Err(OpusError::BufferMismatch(format!(
                "read_planar got {} channel buffers for a {channels}-channel stream",
                out.len()
            )));
        }
        let wanted =
            max_frames.min(usize::try_from(self.frames - self.delivered).unwrap_or(usize::MAX));
        for buffer in out.iter_mut() {
            buffer.clear();
            buffer.reserve(wanted);
        }
        let mut done = 0;
        while done < wanted {
            let (from, to) = self.pending;
            if from == to {
                if !self.decode_next()? {
                    break;
                }
                continue;
            }
            let take = (to - from).min(wanted - done);
            let frames = &self.decoded[from * channels..(from + take) * channels];
            for frame in frames.chunks_exact(channels) {
                for (buffer, &sample) in out.iter_mut().zip(frame) {
                    buffer.push(sample * self.gain);
                }
            }
            self.pending.0 += take;
            self.delivered += take as u64;
            done += take;
        }
        Ok(done)
    }

    /// Decodes the next audio packet of the stream into `decoded`; false at the end.
    fn decode_next(&mut self) -> Result<bool, OpusError> {
        if self.finished || self.delivered >= self.frames {
            return Ok(false);
        }
        let packet = loop {
            match self.packets.read_packet() {
                Err(e) => return Err(ogg_error(e, self.delivered)),
                Ok(None) => {
                    return Err(OpusError::Truncated(format!(
                        "the stream ends after {} frames, its last page's granule position says {}",
                        self.delivered, self.frames
                    )));
                }
                Ok(Some(p)) if p.stream_serial() == self.serial => break p,
                Ok(Some(_)) => {} // another logical stream multiplexed beside ours
            }
        };
        self.audio_packets += 1;
        let n = self
            .decoder
            .decode(&packet.data, &mut self.decoded, self.audio_packets)?;
        let skip = self.pre_skip_left.min(n as u64) as usize;
        self.pre_skip_left -= skip as u64;
        let allowed = usize::try_from(self.frames - self.delivered).unwrap_or(usize::MAX);
        self.pending = (skip, skip + (n - skip).min(allowed));
        if packet.last_in_stream() {
            self.finished = true;
            let available = self.delivered + (self.pending.1 - self.pending.0) as u64;
            if available < self.frames {
                return Err(OpusError::BadGranule(format!(
                    "the last page's granule position promises {} frames after the pre-skip, the stream decodes to {available}",
                    self.frames
                )));
            }
        }
        Ok(true)
    }
}
