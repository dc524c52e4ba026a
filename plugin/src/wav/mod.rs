//! Streaming WAV reader and writer for `fieldglass scan` and `fieldglass demo`.
//!
//! Handles RIFF/WAVE (Microsoft RIFF layout), WAVE_FORMAT_EXTENSIBLE (including the AMB
//! B-format sub-format, the `.amb` convention for FuMa files), and the long-form RF64
//! (EBU Tech 3306) and BW64 (ITU-R BS.2088-1) headers whose `ds64` chunk carries 64-bit sizes.
//! Files a recorder never finalised (data size 0 or 0xFFFFFFFF) and RIFF files over 4 GiB whose
//! 32-bit sizes wrapped are read to the end of their sample data, with a warning
//! ([`WavReader::warnings`]).
//! Both sides stream in constant memory: the reader decodes through a fixed scratch buffer into
//! caller-owned `f32` buffers; the writer encodes through a fixed scratch buffer and patches the
//! sizes on [`WavWriter::finalize`]. No size read from a file ever drives an allocation.
//!
//! Samples are `f32`; integers are scaled by 1/2^(bits−1) on reading (so they land in [−1, 1),
//! f32 rounding aside) and by 2^(bits−1), rounded and clamped, on writing. Float samples pass
//! through unchanged, NaN and infinities included.

mod error;
mod reader;
mod writer;

pub use error::WavError;
pub use reader::{Container, WavReader};
pub use writer::{WavWriter, WriterOptions};

/// How samples are stored.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SampleFormat {
    /// Linear PCM integers (8-bit unsigned; 16, 24, 32-bit signed two's complement).
    Int,
    /// IEEE 754 floating point (32 or 64-bit).
    Float,
}

/// The layout of a WAV file's samples.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct WavSpec {
    /// Channels per frame (interleaved in the file).
    pub channels: u16,
    /// Frames per second.
    pub sample_rate: u32,
    /// Bits per stored sample (the container size: 8, 16, 24, 32 or 64).
    pub bits_per_sample: u16,
    /// Integer or float samples.
    pub sample_format: SampleFormat,
    /// WAVE_FORMAT_EXTENSIBLE speaker mask; `None` for plain (non-extensible) fmt chunks.
    /// Ambisonic files conventionally carry 0 (no speaker assignment).
    pub channel_mask: Option<u32>,
}

impl WavSpec {
    /// Bytes per sample of one channel.
    pub fn bytes_per_sample(&self) -> u16 {
        self.bits_per_sample.div_ceil(8)
    }

    /// Checks channel count, sample rate and sample format; returns the block align
    /// (bytes per frame) on success.
    pub(crate) fn validated_block_align(&self) -> Result<usize, WavError> {
        if self.channels == 0 {
            return Err(WavError::InvalidFormat("zero channels".into()));
        }
        if self.sample_rate == 0 {
            return Err(WavError::InvalidFormat("zero sample rate".into()));
        }
        let supported = match self.sample_format {
            SampleFormat::Int => matches!(self.bits_per_sample, 8 | 16 | 24 | 32),
            SampleFormat::Float => matches!(self.bits_per_sample, 32 | 64),
        };
        if !supported {
            return Err(WavError::Unsupported(match self.sample_format {
                SampleFormat::Int => format!(
                    "{}-bit PCM (8, 16, 24 and 32-bit are supported)",
                    self.bits_per_sample
                ),
                SampleFormat::Float => format!(
                    "{}-bit float (32 and 64-bit are supported)",
                    self.bits_per_sample
                ),
            }));
        }
        Ok(self.channels as usize * self.bytes_per_sample() as usize)
    }
}

/// Size of the scratch buffer both sides stream through (rounded down to whole frames).
const SCRATCH_BYTES: usize = 64 * 1024;

/// The 32-bit size placeholder meaning "see ds64" in RF64/BW64.
const SIZE_PLACEHOLDER: u32 = 0xFFFF_FFFF;

/// Format tags of the fmt chunk (Microsoft RIFF / mmreg.h values, from memory).
const FORMAT_PCM: u16 = 0x0001;
const FORMAT_IEEE_FLOAT: u16 = 0x0003;
const FORMAT_EXTENSIBLE: u16 = 0xFFFE;

/// KSDATAFORMAT_SUBTYPE_PCM, 00000001-0000-0010-8000-00AA00389B71, in file byte order
/// (first three fields little-endian). From the Microsoft WAVEFORMATEXTENSIBLE docs, from memory.
const SUBTYPE_PCM: [u8; 16] = [
    0x01, 0x00, 0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
];
/// KSDATAFORMAT_SUBTYPE_IEEE_FLOAT, 00000003-0000-0010-8000-00AA00389B71, in file byte order.
/// From the Microsoft WAVEFORMATEXTENSIBLE docs, from memory.
const SUBTYPE_IEEE_FLOAT: [u8; 16] = [
    0x03, 0x00, 0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
];
/// SUBTYPE_AMBISONIC_B_FORMAT_PCM, 00000001-0721-11D3-8644-C8C1CA000000, in file byte order.
/// Published in R. Dobson, "WAVE-FORMAT-EXTENSIBLE and B-format audio"
/// (dream.cs.bath.ac.uk/researchdev/wave-ex/bformat.html), the definition of the `.amb` format.
const SUBTYPE_AMB_B_FORMAT_PCM: [u8; 16] = [
    0x01, 0x00, 0x00, 0x00, 0x21, 0x07, 0xD3, 0x11, 0x86, 0x44, 0xC8, 0xC1, 0xCA, 0x00, 0x00, 0x00,
];
/// SUBTYPE_AMBISONIC_B_FORMAT_IEEE_FLOAT, 00000003-0721-11D3-8644-C8C1CA000000, in file byte
/// order (same source as [`SUBTYPE_AMB_B_FORMAT_PCM`]).
const SUBTYPE_AMB_B_FORMAT_IEEE_FLOAT: [u8; 16] = [
    0x03, 0x00, 0x00, 0x00, 0x21, 0x07, 0xD3, 0x11, 0x86, 0x44, 0xC8, 0xC1, 0xCA, 0x00, 0x00, 0x00,
];
