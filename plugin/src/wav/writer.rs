//! Streaming writer: writes a header with placeholder sizes, encodes samples through a fixed
//! scratch buffer, and patches the sizes on finalize.
//!
//! Every file reserves a 28-byte 'JUNK' chunk right after 'WAVE', the size of a ds64 chunk
//! with an empty table. On finalize it stays JUNK (plain RIFF) unless the file outgrew 32-bit
//! sizes or RF64 was requested; then it becomes 'ds64' and the header 'RF64' (EBU Tech 3306),
//! so the sample data never has to move.

use super::error::WavError;
use super::{
    FORMAT_EXTENSIBLE, FORMAT_IEEE_FLOAT, FORMAT_PCM, SCRATCH_BYTES, SIZE_PLACEHOLDER,
    SUBTYPE_AMB_B_FORMAT_IEEE_FLOAT, SUBTYPE_AMB_B_FORMAT_PCM, SUBTYPE_IEEE_FLOAT, SUBTYPE_PCM,
    SampleFormat, WavSpec,
};
use std::fs::File;
use std::io::{BufWriter, Seek, SeekFrom, Write};
use std::path::Path;

/// Choices beyond the sample layout.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct WriterOptions {
    /// Always write an RF64 header with a ds64 chunk, even for small files.
    /// Without it, the file is promoted to RF64 only when it exceeds 4 GiB.
    pub rf64: bool,
    /// Write a WAVE_FORMAT_EXTENSIBLE fmt chunk. It is also chosen automatically for more than
    /// two channels or when the spec carries a channel mask (a missing mask is written as 0).
    pub extensible: bool,
    /// Write a 'BW64' header (ITU-R BS.2088) with a ds64 chunk, the container ADM metadata
    /// travels in.
    pub bw64: bool,
}

/// Body size of the JUNK placeholder = a ds64 body with an empty table:
/// riffSize (8) + dataSize (8) + sampleCount (8) + tableLength (4).
const DS64_BODY_BYTES: u32 = 28;

/// How one `f32` becomes a stored sample.
#[derive(Clone, Copy, Debug)]
enum Encoding {
    U8,
    I16,
    I24,
    I32,
    F32,
    F64,
}

/// A WAV file being written. Call [`WavWriter::finalize`] to patch the sizes and see any error;
/// dropping the writer finalizes too but has to ignore errors.
pub struct WavWriter<W: Write + Seek> {
    inner: W,
    spec: WavSpec,
    encoding: Encoding,
    block_align: usize,
    /// Stream position of the 'RIFF' identifier.
    base: u64,
    /// Offset (from `base`) of the fact chunk's sample count, if there is a fact chunk.
    fact_count_offset: Option<u64>,
    /// Offset (from `base`) of the data chunk's size field; the samples follow it.
    data_size_offset: u64,
    frames_written: u64,
    force_rf64: bool,
    /// The long-form header says 'BW64' rather than 'RF64'.
    bw64: bool,
    /// Largest RIFF size kept as plain RIFF (u32::MAX; lowered in tests to exercise promotion).
    max_riff_bytes: u64,
    failed: bool,
    finalized: bool,
    scratch: Vec<u8>,
}

impl WavWriter<BufWriter<File>> {
    /// Creates (or truncates) a file and writes a plain RIFF header (extensible for more than
    /// two channels).
    pub fn create(path: impl AsRef<Path>, spec: WavSpec) -> Result<Self, WavError> {
        Self::with_options(path, spec, WriterOptions::default())
    }

    /// Like [`WavWriter::create`], with RF64 and extensible choices.
    pub fn with_options(
        path: impl AsRef<Path>,
        spec: WavSpec,
        options: WriterOptions,
    ) -> Result<Self, WavError> {
        WavWriter::new(create_file(path.as_ref(), spec)?, spec, options)
    }

    /// Like [`WavWriter::with_options`], but the extensible fmt chunk carries the AMB B-format
    /// SubFormat GUID (the `.amb` convention for FuMa files; see [`WavWriter::new_b_format`]).
    pub fn create_b_format(
        path: impl AsRef<Path>,
        spec: WavSpec,
        options: WriterOptions,
    ) -> Result<Self, WavError> {
        WavWriter::new_b_format(create_file(path.as_ref(), spec)?, spec, options)
    }

    /// Like [`WavWriter::with_options`], with further chunks (e.g. `chna`, `axml`) written
    /// between the fmt chunk and the data.
    pub fn create_with_chunks(
        path: impl AsRef<Path>,
        spec: WavSpec,
        options: WriterOptions,
        chunks: &[([u8; 4], &[u8])],
    ) -> Result<Self, WavError> {
        WavWriter::with_subformat(
            create_file(path.as_ref(), spec)?,
            spec,
            options,
            false,
            chunks,
        )
    }
}

impl<W: Write + Seek> WavWriter<W> {
    /// Writes the header at the current position of `inner` and prepares for samples.
    pub fn new(inner: W, spec: WavSpec, options: WriterOptions) -> Result<Self, WavError> {
        Self::with_subformat(inner, spec, options, false, &[])
    }

    /// Like [`WavWriter::new`], but always extensible, with the AMB B-format SubFormat GUID for
    /// PCM or float and a channel mask of 0, as the `.amb` convention asks. The samples are
    /// written as given: the caller supplies FuMa channels (W X Y Z R S T U V K L M N O P Q,
    /// maxN weights, absent components left out of mixed-order sets).
    pub fn new_b_format(inner: W, spec: WavSpec, options: WriterOptions) -> Result<Self, WavError> {
        let spec = WavSpec {
            channel_mask: Some(0),
            ..spec
        };
        Self::with_subformat(inner, spec, options, true, &[])
    }

    fn with_subformat(
        mut inner: W,
        spec: WavSpec,
        options: WriterOptions,
        b_format: bool,
        chunks: &[([u8; 4], &[u8])],
    ) -> Result<Self, WavError> {
        let block_align = spec.validated_block_align()?;
        if block_align > usize::from(u16::MAX) {
            return Err(WavError::InvalidFormat(format!(
                "{} channels of {}-bit samples need {block_align} bytes per frame; a fmt chunk \
                 holds at most 65535",
                spec.channels, spec.bits_per_sample
            )));
        }
        let encoding = match (spec.sample_format, spec.bits_per_sample) {
            (SampleFormat::Int, 8) => Encoding::U8,
            (SampleFormat::Int, 16) => Encoding::I16,
            (SampleFormat::Int, 24) => Encoding::I24,
            (SampleFormat::Int, _) => Encoding::I32,
            (SampleFormat::Float, 32) => Encoding::F32,
            (SampleFormat::Float, _) => Encoding::F64,
        };
        let extensible =
            b_format || options.extensible || spec.channels > 2 || spec.channel_mask.is_some();
        let base = inner
            .stream_position()
            .map_err(|e| WavError::io("finding the write position", e))?;

        let mut header = Vec::with_capacity(128);
        header.extend_from_slice(b"RIFF");
        header.extend_from_slice(&0u32.to_le_bytes()); // patched on finalize
        header.extend_from_slice(b"WAVE");
        header.extend_from_slice(b"JUNK");
        header.extend_from_slice(&DS64_BODY_BYTES.to_le_bytes());
        header.extend_from_slice(&[0; DS64_BODY_BYTES as usize]);

        let byte_rate = u64::from(spec.sample_rate) * block_align as u64;
        let byte_rate = u32::try_from(byte_rate).map_err(|_| {
            WavError::InvalidFormat(format!(
                "{} Hz × {block_align} bytes per frame exceeds the 32-bit byte rate field",
                spec.sample_rate
            ))
        })?;
        let format_tag = match (extensible, spec.sample_format) {
            (true, _) => FORMAT_EXTENSIBLE,
            (false, SampleFormat::Int) => FORMAT_PCM,
            (false, SampleFormat::Float) => FORMAT_IEEE_FLOAT,
        };
        // PCMWAVEFORMAT is 16 bytes; WAVEFORMATEX adds cbSize (18); extensible adds 22 more.
        let fmt_bytes: u32 = match format_tag {
            FORMAT_PCM => 16,
            FORMAT_IEEE_FLOAT => 18,
            _ => 40,
        };
        header.extend_from_slice(b"fmt ");
        header.extend_from_slice(&fmt_bytes.to_le_bytes());
        header.extend_from_slice(&format_tag.to_le_bytes());
        header.extend_from_slice(&spec.channels.to_le_bytes());
        header.extend_from_slice(&spec.sample_rate.to_le_bytes());
        header.extend_from_slice(&byte_rate.to_le_bytes());
        header.extend_from_slice(&(block_align as u16).to_le_bytes());
        header.extend_from_slice(&spec.bits_per_sample.to_le_bytes());
        if format_tag == FORMAT_IEEE_FLOAT {
            header.extend_from_slice(&0u16.to_le_bytes()); // cbSize
        }
        if format_tag == FORMAT_EXTENSIBLE {
            header.extend_from_slice(&22u16.to_le_bytes()); // cbSize
            header.extend_from_slice(&spec.bits_per_sample.to_le_bytes()); // valid bits
            header.extend_from_slice(&spec.channel_mask.unwrap_or(0).to_le_bytes());
            header.extend_from_slice(match (b_format, spec.sample_format) {
                (false, SampleFormat::Int) => &SUBTYPE_PCM,
                (false, SampleFormat::Float) => &SUBTYPE_IEEE_FLOAT,
                (true, SampleFormat::Int) => &SUBTYPE_AMB_B_FORMAT_PCM,
                (true, SampleFormat::Float) => &SUBTYPE_AMB_B_FORMAT_IEEE_FLOAT,
            });
        }
        // A fact chunk (sample frames per channel) accompanies every non-PCM fmt (Microsoft RIFF).
        let fact_count_offset = if format_tag != FORMAT_PCM {
            header.extend_from_slice(b"fact");
            header.extend_from_slice(&4u32.to_le_bytes());
            let offset = header.len() as u64;
            header.extend_from_slice(&0u32.to_le_bytes());
            Some(offset)
        } else {
            None
        };
        for (id, body) in chunks {
            let size = u32::try_from(body.len()).map_err(|_| {
                WavError::InvalidFormat(format!(
                    "a {}-byte chunk does not fit a RIFF header",
                    body.len()
                ))
            })?;
            header.extend_from_slice(id);
            header.extend_from_slice(&size.to_le_bytes());
            header.extend_from_slice(body);
            if body.len() % 2 == 1 {
                header.push(0);
            }
        }
        header.extend_from_slice(b"data");
        let data_size_offset = header.len() as u64;
        header.extend_from_slice(&0u32.to_le_bytes());

        inner
            .write_all(&header)
            .map_err(|e| WavError::io("writing the header", e))?;
        let scratch_frames = (SCRATCH_BYTES / block_align).max(1);
        Ok(WavWriter {
            inner,
            spec,
            encoding,
            block_align,
            base,
            fact_count_offset,
            data_size_offset,
            frames_written: 0,
            force_rf64: options.rf64 || options.bw64,
            bw64: options.bw64,
            max_riff_bytes: u64::from(u32::MAX),
            failed: false,
            finalized: false,
            scratch: vec![0; scratch_frames * block_align],
        })
    }

    /// The sample layout being written.
    pub fn spec(&self) -> WavSpec {
        self.spec
    }

    /// Frames written so far.
    pub fn frames_written(&self) -> u64 {
        self.frames_written
    }

    /// Writes interleaved frames; `samples.len()` must be a multiple of the channel count.
    pub fn write_interleaved(&mut self, samples: &[f32]) -> Result<(), WavError> {
        let channels = self.spec.channels as usize;
        if !samples.len().is_multiple_of(channels) {
            return Err(WavError::BufferMismatch(format!(
                "write_interleaved got {} samples, not a multiple of {channels} channels",
                samples.len()
            )));
        }
        let frames = samples.len() / channels;
        self.write_with(frames, |i| samples[i])
    }

    /// Writes one slice per channel; all slices must have the same length.
    pub fn write_planar(&mut self, channels: &[&[f32]]) -> Result<(), WavError> {
        let count = self.spec.channels as usize;
        if channels.len() != count {
            return Err(WavError::BufferMismatch(format!(
                "write_planar got {} channel slices for a {count}-channel file",
                channels.len()
            )));
        }
        let frames = channels[0].len();
        if let Some((index, other)) = channels.iter().enumerate().find(|(_, c)| c.len() != frames) {
            return Err(WavError::BufferMismatch(format!(
                "write_planar: channel 0 has {frames} samples but channel {index} has {}",
                other.len()
            )));
        }
        self.write_with(frames, |i| channels[i % count][i / count])
    }

    /// Patches the sizes (promoting to RF64 when needed or requested) and flushes.
    pub fn finalize(mut self) -> Result<(), WavError> {
        self.finish()
    }

    /// Encodes `frames` frames whose interleaved sample `i` is `sample(i)`.
    fn write_with(&mut self, frames: usize, sample: impl Fn(usize) -> f32) -> Result<(), WavError> {
        if self.failed {
            return Err(WavError::WriterState(
                "an earlier write to this file failed".into(),
            ));
        }
        let channels = self.spec.channels as usize;
        let scratch_frames = self.scratch.len() / self.block_align;
        let mut done = 0;
        while done < frames {
            let chunk = (frames - done).min(scratch_frames);
            let first = done * channels;
            let bytes = chunk * self.block_align;
            encode(self.encoding, &mut self.scratch[..bytes], |i| {
                sample(first + i)
            });
            if let Err(e) = self.inner.write_all(&self.scratch[..bytes]) {
                self.failed = true;
                let frame = self.frames_written;
                return Err(WavError::io(format!("writing frame {frame}"), e));
            }
            self.frames_written += chunk as u64;
            done += chunk;
        }
        Ok(())
    }

    fn finish(&mut self) -> Result<(), WavError> {
        if self.finalized {
            return Ok(());
        }
        self.finalized = true;
        let data_bytes = self.frames_written * self.block_align as u64;
        let pad = data_bytes & 1;
        if pad == 1 {
            self.write_at_end(&[0])?;
        }
        let riff_bytes = self.data_size_offset + 4 + data_bytes + pad - 8;
        let frames = self.frames_written;
        let fact_count = u32::try_from(frames).unwrap_or(SIZE_PLACEHOLDER);
        if self.force_rf64 || riff_bytes > self.max_riff_bytes {
            // RF64: 32-bit sizes become placeholders, the real ones go into ds64 (Tech 3306).
            let mut ds64 = Vec::with_capacity(36);
            ds64.extend_from_slice(b"ds64");
            ds64.extend_from_slice(&DS64_BODY_BYTES.to_le_bytes());
            ds64.extend_from_slice(&riff_bytes.to_le_bytes());
            ds64.extend_from_slice(&data_bytes.to_le_bytes());
            ds64.extend_from_slice(&frames.to_le_bytes());
            ds64.extend_from_slice(&0u32.to_le_bytes()); // table length
            self.patch(0, if self.bw64 { b"BW64" } else { b"RF64" })?;
            self.patch(4, &SIZE_PLACEHOLDER.to_le_bytes())?;
            self.patch(12, &ds64)?;
            self.patch(self.data_size_offset, &SIZE_PLACEHOLDER.to_le_bytes())?;
        } else {
            // riff_bytes fits, so the data size and frame count do too.
            self.patch(4, &(riff_bytes as u32).to_le_bytes())?;
            self.patch(self.data_size_offset, &(data_bytes as u32).to_le_bytes())?;
        }
        if let Some(offset) = self.fact_count_offset {
            self.patch(offset, &fact_count.to_le_bytes())?;
        }
        let end = self.base + riff_bytes + 8;
        self.inner
            .seek(SeekFrom::Start(end))
            .and_then(|_| self.inner.flush())
            .map_err(|e| WavError::io("flushing the finished file", e))
    }

    fn write_at_end(&mut self, bytes: &[u8]) -> Result<(), WavError> {
        self.inner
            .write_all(bytes)
            .map_err(|e| WavError::io("writing the pad byte", e))
    }

    /// Overwrites header bytes at `offset` from the start of the file.
    fn patch(&mut self, offset: u64, bytes: &[u8]) -> Result<(), WavError> {
        let at = self.base + offset;
        self.inner
            .seek(SeekFrom::Start(at))
            .and_then(|_| self.inner.write_all(bytes))
            .map_err(|e| WavError::io(format!("patching the header at byte {at}"), e))
    }
}

impl<W: Write + Seek> Drop for WavWriter<W> {
    fn drop(&mut self) {
        let _ = self.finish();
    }
}

/// Rounds and clamps `x` × 2^(bits−1) to the signed `bits`-bit range (NaN becomes 0).
fn to_int(x: f32, bits: u32) -> i32 {
    let full = f64::from(1u32 << (bits - 1));
    (f64::from(x) * full).round().clamp(-full, full - 1.0) as i32
}

/// Fills `out` with little-endian samples; sample `i` is `sample(i)`.
fn encode(encoding: Encoding, out: &mut [u8], sample: impl Fn(usize) -> f32) {
    match encoding {
        Encoding::U8 => {
            for (i, b) in out.iter_mut().enumerate() {
                *b = (to_int(sample(i), 8) + 128) as u8;
            }
        }
        Encoding::I16 => {
            for (i, c) in out.chunks_exact_mut(2).enumerate() {
                c.copy_from_slice(&(to_int(sample(i), 16) as i16).to_le_bytes());
            }
        }
        Encoding::I24 => {
            for (i, c) in out.chunks_exact_mut(3).enumerate() {
                c.copy_from_slice(&to_int(sample(i), 24).to_le_bytes()[..3]);
            }
        }
        Encoding::I32 => {
            for (i, c) in out.chunks_exact_mut(4).enumerate() {
                c.copy_from_slice(&to_int(sample(i), 32).to_le_bytes());
            }
        }
        Encoding::F32 => {
            for (i, c) in out.chunks_exact_mut(4).enumerate() {
                c.copy_from_slice(&sample(i).to_le_bytes());
            }
        }
        Encoding::F64 => {
            for (i, c) in out.chunks_exact_mut(8).enumerate() {
                c.copy_from_slice(&f64::from(sample(i)).to_le_bytes());
            }
        }
    }
}

/// Creates the file a writer writes, after checking the spec (before touching the file system).
fn create_file(path: &Path, spec: WavSpec) -> Result<BufWriter<File>, WavError> {
    spec.validated_block_align()?;
    let file =
        File::create(path).map_err(|e| WavError::io(format!("creating {}", path.display()), e))?;
    Ok(BufWriter::new(file))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wav::{Container, WavReader};
    use std::io::Cursor;

    fn spec(channels: u16) -> WavSpec {
        WavSpec {
            channels,
            sample_rate: 48_000,
            bits_per_sample: 16,
            sample_format: SampleFormat::Int,
            channel_mask: None,
        }
    }

    #[test]
    fn int_conversion_rounds_and_clamps() {
        assert_eq!(to_int(1.0, 16), 32_767);
        assert_eq!(to_int(-1.0, 16), -32_768);
        assert_eq!(to_int(-2.0, 24), -8_388_608);
        assert_eq!(to_int(0.4 / 32_768.0, 16), 0);
        assert_eq!(to_int(0.6 / 32_768.0, 16), 1);
        assert_eq!(to_int(f32::NAN, 32), 0);
        assert_eq!(to_int(f32::INFINITY, 32), i32::MAX);
    }

    /// Promotion past the size limit, exercised with the limit lowered to 100 bytes because a
    /// real 4 GiB file is too slow for a unit test.
    #[test]
    fn promotes_to_rf64_when_the_riff_size_limit_is_passed() {
        for (frames, expect_rf64) in [(4usize, false), (100, true)] {
            let mut cursor = Cursor::new(Vec::new());
            {
                let mut writer =
                    WavWriter::new(&mut cursor, spec(1), WriterOptions::default()).unwrap();
                writer.max_riff_bytes = 100;
                writer.write_interleaved(&vec![0.25; frames]).unwrap();
                writer.finalize().unwrap();
            }
            let bytes = cursor.into_inner();
            assert_eq!(&bytes[0..4], if expect_rf64 { b"RF64" } else { b"RIFF" });
            assert_eq!(&bytes[12..16], if expect_rf64 { b"ds64" } else { b"JUNK" });
            let mut reader = WavReader::new(Cursor::new(bytes)).unwrap();
            let container = if expect_rf64 {
                Container::Rf64
            } else {
                Container::Riff
            };
            assert_eq!(reader.container(), container);
            assert_eq!(reader.frames(), frames as u64);
            let mut out = vec![0.0; frames];
            assert_eq!(reader.read_interleaved(&mut out).unwrap(), frames);
            assert!(out.iter().all(|&v| v == 0.25));
        }
    }
}
