//! Streaming reader: parses the header once, then decodes the data chunk in fixed-size pieces
//! into caller-owned `f32` buffers.
//!
//! Layout (Microsoft RIFF; EBU Tech 3306 / ITU-R BS.2088-1 for ds64): a 12-byte header
//! `'RIFF'|'RF64'|'BW64' size 'WAVE'`, then chunks `id[4] size[u32 LE] body [pad byte if odd]`.
//! In RF64/BW64 the first chunk is `ds64` with 64-bit riff size, data size and sample count
//! (each a low/high DWORD pair) and a table of 64-bit sizes for other chunks; a 32-bit size of
//! 0xFFFFFFFF then means "look it up in ds64".
//!
//! Sizes a recorder left unfinished are recovered from the file length (see
//! [`WavReader::warnings`]): a data size of 0 followed by sample bytes, or of 0xFFFFFFFF in a
//! plain RIFF, reads to the end of the file; a plain RIFF over 4 GiB, whose 32-bit sizes can
//! only hold the true sizes modulo 2^32, reads the whole multiple of 4 GiB the file holds.

use super::error::human_bytes;
use super::error::{WavError, show_id};
use super::{
    FORMAT_EXTENSIBLE, FORMAT_IEEE_FLOAT, FORMAT_PCM, SCRATCH_BYTES, SIZE_PLACEHOLDER,
    SUBTYPE_AMB_B_FORMAT_IEEE_FLOAT, SUBTYPE_AMB_B_FORMAT_PCM, SUBTYPE_IEEE_FLOAT, SUBTYPE_PCM,
    SampleFormat, WavSpec,
};
use std::fs::File;
use std::io::{BufReader, ErrorKind, Read, Seek, SeekFrom};
use std::path::Path;

/// Which header the file carries.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Container {
    /// Classic 'RIFF' (32-bit sizes).
    Riff,
    /// 'RF64' (EBU Tech 3306), sizes in ds64.
    Rf64,
    /// 'BW64' (ITU-R BS.2088), sizes in ds64.
    Bw64,
}

/// ds64 table entries kept; further entries are skipped (a file needs at most a handful).
const MAX_DS64_TABLE_ENTRIES: usize = 64;

/// The 64-bit sizes of a ds64 chunk.
#[derive(Default)]
struct Ds64 {
    riff_bytes: u64,
    data_bytes: u64,
    table: Vec<([u8; 4], u64)>,
}

/// 2^32: the sizes a 32-bit RIFF size field wraps around at.
const FOUR_GIB: u64 = 1 << 32;

/// What a fmt chunk says.
#[derive(Clone, Copy)]
struct Fmt {
    spec: WavSpec,
    decoding: Decoding,
    block_align: usize,
    /// The extensible SubFormat is one of the AMB B-format GUIDs.
    b_format: bool,
}

/// How one stored sample becomes an `f32`.
#[derive(Clone, Copy, Debug)]
enum Decoding {
    U8,
    I16,
    I24,
    I32,
    F32,
    F64,
}

/// A WAV / RF64 / BW64 file opened for streaming reads of its sample data.
///
/// Memory use is constant: one scratch buffer of about 64 KiB, whatever the file declares.
pub struct WavReader<R> {
    inner: R,
    spec: WavSpec,
    container: Container,
    decoding: Decoding,
    block_align: usize,
    data_start: u64,
    frames: u64,
    frames_read: u64,
    b_format: bool,
    warnings: Vec<String>,
    metadata: Vec<MetadataChunk>,
    scratch: Vec<u8>,
}

/// The metadata chunks kept from the file (ITU-R BS.2088: `chna` ties tracks to ADM IDs, `axml`
/// holds the ADM XML of ITU-R BS.2076), with the largest body read of each.
const METADATA_CHUNKS: [(&[u8; 4], u64); 2] = [
    // 4 header bytes + 40 bytes per track UID; 65535 UIDs at most.
    (b"chna", 4 + 40 * 65_535),
    // ADM for a programme of a few hundred tracks stays well under this.
    (b"axml", 16 * 1024 * 1024),
];

/// A metadata chunk's identifier and body.
struct MetadataChunk {
    id: [u8; 4],
    body: Vec<u8>,
}

impl WavReader<BufReader<File>> {
    /// Opens a file and parses its header.
    pub fn open(path: impl AsRef<Path>) -> Result<Self, WavError> {
        let path = path.as_ref();
        let file =
            File::open(path).map_err(|e| WavError::io(format!("opening {}", path.display()), e))?;
        WavReader::new(BufReader::new(file))
    }
}

impl<R: Read + Seek> WavReader<R> {
    /// Parses the header from any seekable byte source and positions it at the first frame.
    pub fn new(mut inner: R) -> Result<Self, WavError> {
        let file_bytes = inner
            .seek(SeekFrom::End(0))
            .map_err(|e| WavError::io("finding the file length", e))?;
        if file_bytes == 0 {
            return Err(WavError::Empty);
        }
        let mut source = Source {
            inner: &mut inner,
            file_bytes,
        };
        let (container, riff_size32) = source.read_riff_header()?;
        let mut pos = 12u64;
        let ds64 = if container == Container::Riff {
            Ds64 {
                riff_bytes: u64::from(riff_size32),
                ..Ds64::default()
            }
        } else {
            let (ds64, next) = source.read_ds64(pos)?;
            pos = next;
            ds64
        };

        let mut fmt: Option<Fmt> = None;
        let mut metadata = Vec::new();
        let mut warnings = Vec::new();
        let (fmt, data_start, declared_data_bytes) = loop {
            if pos >= file_bytes {
                return Err(WavError::MissingData {
                    fmt_seen: fmt.is_some(),
                    file_bytes,
                });
            }
            let (id, size32) = source.read_chunk_header(pos)?;
            let body_start = pos + 8;
            let size = if size32 == SIZE_PLACEHOLDER && container != Container::Riff {
                if &id == b"data" {
                    ds64.data_bytes
                } else {
                    ds64.table
                        .iter()
                        .find(|(table_id, _)| *table_id == id)
                        .map(|(_, size)| *size)
                        .ok_or(WavError::MissingDs64Size {
                            chunk_id: id,
                            at_byte: pos,
                        })?
                }
            } else {
                u64::from(size32)
            };
            match &id {
                b"data" => {
                    let Some(format) = fmt else {
                        return Err(WavError::DataBeforeFmt { at_byte: pos });
                    };
                    break (format, body_start, size);
                }
                b"fmt " if fmt.is_none() => fmt = Some(source.read_fmt(body_start, size)?),
                _ => {
                    source.keep_metadata(&id, body_start, size, &mut metadata, &mut warnings)?;
                    if body_start.saturating_add(size) > file_bytes {
                        return Err(WavError::TruncatedHeader {
                            file_bytes,
                            inside: format!(
                                "the {} chunk at byte {pos} (declared {size} bytes)",
                                show_id(&id)
                            ),
                        });
                    }
                }
            }
            // Chunks are padded to an even length (Microsoft RIFF).
            pos = body_start.saturating_add(size).saturating_add(size & 1);
        };

        let Fmt {
            spec,
            decoding,
            block_align,
            b_format,
        } = fmt;
        let available_bytes = file_bytes - data_start;
        let block = block_align as u64;
        let data_bytes = recovered_data_bytes(
            &mut source,
            &DataLayout {
                container,
                riff_bytes: ds64.riff_bytes,
                declared_bytes: declared_data_bytes,
                data_start,
                block,
            },
            &mut warnings,
        )?;
        if data_bytes > available_bytes {
            return Err(WavError::DataTruncated {
                data_start,
                declared_bytes: data_bytes,
                file_bytes,
                expected_frames: data_bytes / block,
                found_frames: available_bytes / block,
            });
        }
        // BW64 writers usually put `axml` (and sometimes `chna`) after the sample data.
        source.read_trailing_metadata(
            data_start.saturating_add(data_bytes + (data_bytes & 1)),
            &ds64,
            container,
            &mut metadata,
            &mut warnings,
        );
        inner
            .seek(SeekFrom::Start(data_start))
            .map_err(|e| WavError::io(format!("seeking to the data at byte {data_start}"), e))?;
        let scratch_frames = (SCRATCH_BYTES / block_align).max(1);
        Ok(WavReader {
            inner,
            spec,
            container,
            decoding,
            block_align,
            data_start,
            frames: data_bytes / block,
            frames_read: 0,
            b_format,
            warnings,
            metadata,
            scratch: vec![0; scratch_frames * block_align],
        })
    }

    /// Whether the fmt chunk's SubFormat is an AMB B-format GUID (the `.amb` convention). Such
    /// files carry FuMa channels (order W X Y Z R S T U V K L M N O P Q, maxN weights), so this
    /// is a strong hint that the stream is FuMa; it does not by itself change any format choice.
    pub fn declares_b_format(&self) -> bool {
        self.b_format
    }

    /// The body of the `chna` or `axml` chunk, if the file carries one (the first of each).
    pub fn metadata_chunk(&self, id: &[u8; 4]) -> Option<&[u8]> {
        self.metadata
            .iter()
            .find(|c| &c.id == id)
            .map(|c| c.body.as_slice())
    }

    /// Things about the file a user should know although it could be read, in plain words:
    /// e.g. a data size a recorder never finalised, recovered from the file length. Empty for
    /// an ordinary, finalised file.
    pub fn warnings(&self) -> &[String] {
        &self.warnings
    }

    /// The sample layout.
    pub fn spec(&self) -> WavSpec {
        self.spec
    }

    /// Which header (RIFF, RF64, BW64) the file carries.
    pub fn container(&self) -> Container {
        self.container
    }

    /// Total frames in the data chunk (a trailing partial frame is not counted).
    pub fn frames(&self) -> u64 {
        self.frames
    }

    /// Frames not yet read.
    pub fn frames_remaining(&self) -> u64 {
        self.frames - self.frames_read
    }

    /// Byte offset of the first sample in the file.
    pub fn data_start_byte(&self) -> u64 {
        self.data_start
    }

    /// Moves the read position to `frame` (clamped to the end).
    pub fn seek_frame(&mut self, frame: u64) -> Result<(), WavError> {
        let frame = frame.min(self.frames);
        let byte = self.data_start + frame * self.block_align as u64;
        self.inner
            .seek(SeekFrom::Start(byte))
            .map_err(|e| WavError::io(format!("seeking to frame {frame} at byte {byte}"), e))?;
        self.frames_read = frame;
        Ok(())
    }

    /// Reads up to `out.len() / channels` frames, interleaved, into `out`. Returns the frames
    /// read; 0 at the end of the data. Never allocates.
    pub fn read_interleaved(&mut self, out: &mut [f32]) -> Result<usize, WavError> {
        let channels = self.spec.channels as usize;
        let wanted = out.len() / channels;
        let mut done = 0;
        while done < wanted {
            let got = self.fill_scratch(wanted - done)?;
            if got == 0 {
                break;
            }
            let target = &mut out[done * channels..(done + got) * channels];
            let bytes = &self.scratch[..got * self.block_align];
            decode_planar(self.decoding, bytes, &mut [target], 0);
            done += got;
        }
        Ok(done)
    }

    /// Reads up to `max_frames` frames into one buffer per channel (`out.len()` must equal the
    /// channel count). Each buffer is cleared and refilled, so its capacity is reused; it only
    /// grows when `max_frames` exceeds its capacity. Returns the frames read; 0 at the end.
    pub fn read_planar(
        &mut self,
        out: &mut [Vec<f32>],
        max_frames: usize,
    ) -> Result<usize, WavError> {
        let channels = self.spec.channels as usize;
        if out.len() != channels {
            return Err(WavError::BufferMismatch(format!(
                "read_planar got {} channel buffers for a {channels}-channel file",
                out.len()
            )));
        }
        let wanted = max_frames.min(usize::try_from(self.frames_remaining()).unwrap_or(usize::MAX));
        for buffer in out.iter_mut() {
            // Same length as last time: no fill. Every sample up to `done` is overwritten.
            buffer.resize(wanted, 0.0);
        }
        let mut done = 0;
        let result = loop {
            if done == wanted {
                break Ok(());
            }
            match self.fill_scratch(wanted - done) {
                Ok(0) => break Ok(()),
                Ok(got) => {
                    let bytes = &self.scratch[..got * self.block_align];
                    decode_planar(self.decoding, bytes, out, done);
                    done += got;
                }
                Err(e) => break Err(e),
            }
        };
        for buffer in out.iter_mut() {
            buffer.truncate(done);
        }
        result.map(|()| done)
    }

    /// Gives back the byte source.
    pub fn into_inner(self) -> R {
        self.inner
    }

    /// Reads up to `max_frames` whole frames (bounded by the scratch size and the frames left)
    /// into the scratch buffer; returns how many.
    fn fill_scratch(&mut self, max_frames: usize) -> Result<usize, WavError> {
        let scratch_frames = self.scratch.len() / self.block_align;
        let left = usize::try_from(self.frames_remaining()).unwrap_or(usize::MAX);
        let frames = max_frames.min(scratch_frames).min(left);
        if frames == 0 {
            return Ok(0);
        }
        let bytes = frames * self.block_align;
        let mut filled = 0;
        while filled < bytes {
            match self.inner.read(&mut self.scratch[filled..bytes]) {
                Ok(0) => {
                    let found_frames = self.frames_read + (filled / self.block_align) as u64;
                    let expected_frames = self.frames;
                    self.frames_read = self.frames;
                    return Err(WavError::DataEndedEarly {
                        expected_frames,
                        found_frames,
                    });
                }
                Ok(n) => filled += n,
                Err(e) if e.kind() == ErrorKind::Interrupted => {}
                Err(e) => {
                    let frame = self.frames_read;
                    return Err(WavError::io(
                        format!("reading frame {frame} of the data"),
                        e,
                    ));
                }
            }
        }
        self.frames_read += frames as u64;
        Ok(frames)
    }
}

/// Decodes the whole frames of interleaved little-endian `bytes` into `out[c][start..]`, one
/// channel at a time (`out.len()` channels, each at least `start + frames` long; one plane
/// receives the samples interleaved, as they are). A per-sample sink with a modulo and a push
/// made decoding a sixth of a scan; this loop is monomorphic per format.
fn decode_planar(decoding: Decoding, bytes: &[u8], out: &mut [impl AsMut<[f32]>], start: usize) {
    fn planes<const WIDTH: usize>(
        bytes: &[u8],
        out: &mut [impl AsMut<[f32]>],
        start: usize,
        sample: impl Fn([u8; WIDTH]) -> f32,
    ) {
        let stride = WIDTH * out.len();
        // A few KiB of frames at a time, so that every channel's pass reads from L1.
        let group = (8192 / stride).max(1);
        for (g, frames) in bytes.chunks(group * stride).enumerate() {
            let first = start + g * group;
            for (c, plane) in out.iter_mut().enumerate() {
                let at = c * WIDTH;
                let plane = &mut plane.as_mut()[first..];
                for (d, frame) in plane.iter_mut().zip(frames.chunks_exact(stride)) {
                    if let Some(bytes) = frame[at..].first_chunk::<WIDTH>() {
                        *d = sample(*bytes);
                    }
                }
            }
        }
    }
    match decoding {
        Decoding::U8 => planes(bytes, out, start, u8_sample),
        Decoding::I16 => planes(bytes, out, start, i16_sample),
        Decoding::I24 => planes(bytes, out, start, i24_sample),
        Decoding::I32 => planes(bytes, out, start, i32_sample),
        Decoding::F32 => planes(bytes, out, start, f32_sample),
        Decoding::F64 => planes(bytes, out, start, f64_sample),
    }
}

#[inline(always)]
fn u8_sample(b: [u8; 1]) -> f32 {
    (i32::from(b[0]) - 128) as f32 * (1.0 / 128.0)
}

#[inline(always)]
fn i16_sample(b: [u8; 2]) -> f32 {
    f32::from(i16::from_le_bytes(b)) * (1.0 / 32_768.0)
}

#[inline(always)]
fn i24_sample(b: [u8; 3]) -> f32 {
    // Place the 24 bits at the top of an i32, then shift back to sign-extend.
    let value = i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8;
    value as f32 * (1.0 / 8_388_608.0)
}

#[inline(always)]
fn i32_sample(b: [u8; 4]) -> f32 {
    (f64::from(i32::from_le_bytes(b)) * (1.0 / 2_147_483_648.0)) as f32
}

#[inline(always)]
fn f32_sample(b: [u8; 4]) -> f32 {
    f32::from_le_bytes(b)
}

#[inline(always)]
fn f64_sample(b: [u8; 8]) -> f32 {
    f64::from_le_bytes(b) as f32
}

/// The byte source during header parsing, with its length for bounds checks.
struct Source<'a, R> {
    inner: &'a mut R,
    file_bytes: u64,
}

impl<R: Read + Seek> Source<'_, R> {
    /// Reads as many bytes as are available at `pos` into `buf`; returns the count.
    fn read_at(&mut self, pos: u64, buf: &mut [u8], what: &str) -> Result<usize, WavError> {
        self.inner
            .seek(SeekFrom::Start(pos))
            .map_err(|e| WavError::io(format!("seeking to {what} at byte {pos}"), e))?;
        let mut filled = 0;
        while filled < buf.len() {
            match self.inner.read(&mut buf[filled..]) {
                Ok(0) => break,
                Ok(n) => filled += n,
                Err(e) if e.kind() == ErrorKind::Interrupted => {}
                Err(e) => return Err(WavError::io(format!("reading {what} at byte {pos}"), e)),
            }
        }
        Ok(filled)
    }

    /// Reads exactly `buf.len()` bytes at `pos`, or reports a truncated header inside `what`.
    fn read_exact_at(&mut self, pos: u64, buf: &mut [u8], what: &str) -> Result<(), WavError> {
        if self.read_at(pos, buf, what)? < buf.len() {
            return Err(self.truncated(what));
        }
        Ok(())
    }

    fn truncated(&self, inside: &str) -> WavError {
        WavError::TruncatedHeader {
            file_bytes: self.file_bytes,
            inside: inside.to_string(),
        }
    }

    /// Reads the 12-byte header; returns the container and its 32-bit RIFF size field.
    /// Keeps the body of a `chna` or `axml` chunk (the first of each) if it fits its cap and the
    /// file; an oversized one is skipped with a warning.
    fn keep_metadata(
        &mut self,
        id: &[u8; 4],
        body_start: u64,
        size: u64,
        kept: &mut Vec<MetadataChunk>,
        warnings: &mut Vec<String>,
    ) -> Result<(), WavError> {
        let Some(&(_, cap)) = METADATA_CHUNKS.iter().find(|(known, _)| *known == id) else {
            return Ok(());
        };
        if kept.iter().any(|c| &c.id == id) || body_start.saturating_add(size) > self.file_bytes {
            return Ok(());
        }
        if size > cap {
            warnings.push(format!(
                "the {} chunk holds {} (more than the {} read); its metadata was ignored",
                show_id(id),
                human_bytes(size),
                human_bytes(cap)
            ));
            return Ok(());
        }
        let mut body = vec![0u8; size as usize];
        self.read_exact_at(body_start, &mut body, &format!("the {} chunk", show_id(id)))?;
        kept.push(MetadataChunk { id: *id, body });
        Ok(())
    }

    /// Walks the chunks after the sample data for metadata. Whatever does not parse there is
    /// left alone: the samples are readable, and the metadata reader reports what is missing.
    fn read_trailing_metadata(
        &mut self,
        mut pos: u64,
        ds64: &Ds64,
        container: Container,
        kept: &mut Vec<MetadataChunk>,
        warnings: &mut Vec<String>,
    ) {
        // A handful of trailing chunks is usual; the bound keeps a hostile file's walk short.
        for _ in 0..64 {
            if pos.saturating_add(8) > self.file_bytes {
                return;
            }
            let Ok((id, size32)) = self.read_chunk_header(pos) else {
                return;
            };
            let size = if size32 == SIZE_PLACEHOLDER && container != Container::Riff {
                match ds64.table.iter().find(|(table_id, _)| *table_id == id) {
                    Some(&(_, size)) => size,
                    None => return,
                }
            } else {
                u64::from(size32)
            };
            let body_start = pos + 8;
            if self
                .keep_metadata(&id, body_start, size, kept, warnings)
                .is_err()
            {
                return;
            }
            pos = body_start.saturating_add(size).saturating_add(size & 1);
        }
    }

    fn read_riff_header(&mut self) -> Result<(Container, u32), WavError> {
        let mut head = [0u8; 12];
        let got = self.read_at(0, &mut head, "the RIFF header")?;
        let id = &head[..got.min(4)];
        let container = match id {
            b"RIFF" => Container::Riff,
            b"RF64" => Container::Rf64,
            b"BW64" => Container::Bw64,
            _ => {
                let is_prefix = [b"RIFF", b"RF64", b"BW64"]
                    .iter()
                    .any(|magic| magic.starts_with(id));
                return Err(if is_prefix && got < 4 {
                    self.truncated("the RIFF header")
                } else {
                    WavError::NotWav {
                        expected: "'RIFF', 'RF64' or 'BW64'",
                        at_byte: 0,
                        found: id.to_vec(),
                    }
                });
            }
        };
        let form = &head[8.min(got)..got];
        if !b"WAVE".starts_with(form) {
            return Err(WavError::NotWav {
                expected: "'WAVE'",
                at_byte: 8,
                found: form.to_vec(),
            });
        }
        if got < 12 {
            return Err(self.truncated("the RIFF header"));
        }
        Ok((
            container,
            u32::from_le_bytes([head[4], head[5], head[6], head[7]]),
        ))
    }

    /// Reads the 8-byte chunk header at `pos`.
    fn read_chunk_header(&mut self, pos: u64) -> Result<([u8; 4], u32), WavError> {
        let mut header = [0u8; 8];
        let what = format!("the chunk header at byte {pos}");
        self.read_exact_at(pos, &mut header, &what)?;
        let id = [header[0], header[1], header[2], header[3]];
        Ok((
            id,
            u32::from_le_bytes([header[4], header[5], header[6], header[7]]),
        ))
    }

    /// Reads the mandatory ds64 chunk at `pos`; returns it and the position after it.
    fn read_ds64(&mut self, pos: u64) -> Result<(Ds64, u64), WavError> {
        let mut header = [0u8; 8];
        let got = self.read_at(pos, &mut header, "the ds64 chunk header")?;
        if got < 4 || &header[..4] != b"ds64" {
            if got < 4 && b"ds64".starts_with(&header[..got]) {
                return Err(self.truncated("the ds64 chunk header at byte 12"));
            }
            return Err(WavError::MissingDs64 {
                found: header[..got.min(4)].to_vec(),
            });
        }
        if got < 8 {
            return Err(self.truncated("the ds64 chunk header at byte 12"));
        }
        let size = u64::from(u32::from_le_bytes([
            header[4], header[5], header[6], header[7],
        ]));
        let body_start = pos + 8;
        if size < 28 {
            return Err(WavError::InvalidFormat(format!(
                "the ds64 chunk at byte {pos} holds {size} bytes; it needs at least 28"
            )));
        }
        if body_start + size > self.file_bytes {
            return Err(self.truncated(&format!(
                "the ds64 chunk at byte {pos} (declared {size} bytes)"
            )));
        }
        let mut fixed = [0u8; 28];
        self.read_exact_at(body_start, &mut fixed, "the ds64 chunk")?;
        let u64_at = |at: usize| {
            let mut b = [0u8; 8];
            b.copy_from_slice(&fixed[at..at + 8]);
            u64::from_le_bytes(b)
        };
        // Layout: riffSize (0), dataSize (8), sampleCount (16), tableLength (24).
        let riff_bytes = u64_at(0);
        let data_bytes = u64_at(8);
        let table_length = u32::from_le_bytes([fixed[24], fixed[25], fixed[26], fixed[27]]);
        let entries = (table_length as usize)
            .min(((size - 28) / 12) as usize)
            .min(MAX_DS64_TABLE_ENTRIES);
        let mut table = Vec::with_capacity(entries);
        for index in 0..entries {
            let mut entry = [0u8; 12];
            let entry_pos = body_start + 28 + 12 * index as u64;
            self.read_exact_at(entry_pos, &mut entry, "the ds64 table")?;
            let id = [entry[0], entry[1], entry[2], entry[3]];
            let mut b = [0u8; 8];
            b.copy_from_slice(&entry[4..12]);
            table.push((id, u64::from_le_bytes(b)));
        }
        let next = body_start + size + (size & 1);
        Ok((
            Ds64 {
                riff_bytes,
                data_bytes,
                table,
            },
            next,
        ))
    }

    /// Parses a fmt chunk body of `size` bytes at `pos`.
    fn read_fmt(&mut self, pos: u64, size: u64) -> Result<Fmt, WavError> {
        if pos.saturating_add(size) > self.file_bytes {
            return Err(self.truncated(&format!(
                "the fmt chunk (declared {size} bytes from byte {pos})"
            )));
        }
        if size < 16 {
            return Err(WavError::InvalidFormat(format!(
                "the fmt chunk at byte {} holds {size} bytes; it needs at least 16",
                pos - 8
            )));
        }
        let mut body = [0u8; 40];
        let len = size.min(40) as usize;
        self.read_exact_at(pos, &mut body[..len], "the fmt chunk")?;
        let u16_at = |at: usize| u16::from_le_bytes([body[at], body[at + 1]]);
        let u32_at =
            |at: usize| u32::from_le_bytes([body[at], body[at + 1], body[at + 2], body[at + 3]]);
        let format_tag = u16_at(0);
        let channels = u16_at(2);
        let sample_rate = u32_at(4);
        let declared_block_align = u16_at(12);
        let bits_per_sample = u16_at(14);

        let (sample_format, channel_mask, b_format) = match format_tag {
            FORMAT_PCM => (SampleFormat::Int, None, false),
            FORMAT_IEEE_FLOAT => (SampleFormat::Float, None, false),
            FORMAT_EXTENSIBLE => {
                if size < 40 {
                    return Err(WavError::InvalidFormat(format!(
                        "the WAVE_FORMAT_EXTENSIBLE fmt chunk holds {size} bytes; it needs 40"
                    )));
                }
                let valid_bits = u16_at(18);
                if valid_bits > bits_per_sample {
                    return Err(WavError::InvalidFormat(format!(
                        "{valid_bits} valid bits in a {bits_per_sample}-bit sample"
                    )));
                }
                let subformat = &body[24..40];
                let (sample_format, b_format) = if subformat == SUBTYPE_PCM {
                    (SampleFormat::Int, false)
                } else if subformat == SUBTYPE_IEEE_FLOAT {
                    (SampleFormat::Float, false)
                } else if subformat == SUBTYPE_AMB_B_FORMAT_PCM {
                    (SampleFormat::Int, true)
                } else if subformat == SUBTYPE_AMB_B_FORMAT_IEEE_FLOAT {
                    (SampleFormat::Float, true)
                } else {
                    return Err(WavError::Unsupported(format!(
                        "WAVE_FORMAT_EXTENSIBLE subformat {} (only PCM and IEEE float, plain or \
                         AMB B-format, are read)",
                        show_guid(subformat)
                    )));
                };
                (sample_format, Some(u32_at(20)), b_format)
            }
            other => {
                return Err(WavError::Unsupported(format!(
                    "format tag 0x{other:04X}{} (only PCM 0x0001, IEEE float 0x0003 and \
                     WAVE_FORMAT_EXTENSIBLE 0xFFFE are read)",
                    format_tag_name(other)
                )));
            }
        };
        let spec = WavSpec {
            channels,
            sample_rate,
            bits_per_sample,
            sample_format,
            channel_mask,
        };
        let block_align = spec.validated_block_align()?;
        if usize::from(declared_block_align) != block_align {
            return Err(WavError::InvalidFormat(format!(
                "block align mismatch: the fmt chunk declares {declared_block_align} bytes per \
                 frame, but {channels} channels of {bits_per_sample}-bit samples need {block_align}"
            )));
        }
        let decoding = match (sample_format, bits_per_sample) {
            (SampleFormat::Int, 8) => Decoding::U8,
            (SampleFormat::Int, 16) => Decoding::I16,
            (SampleFormat::Int, 24) => Decoding::I24,
            (SampleFormat::Int, _) => Decoding::I32,
            (SampleFormat::Float, 32) => Decoding::F32,
            (SampleFormat::Float, _) => Decoding::F64,
        };
        Ok(Fmt {
            spec,
            decoding,
            block_align,
            b_format,
        })
    }

    /// Whether the 8 bytes at `pos` look like a chunk header that fits in the file: an
    /// identifier of four ASCII letters, digits or spaces, and a body that ends by the end of
    /// the file. Sample data almost never looks like that.
    fn chunk_header_plausible_at(&mut self, pos: u64) -> Result<bool, WavError> {
        let mut header = [0u8; 8];
        if self.read_at(pos, &mut header, "the bytes after the data chunk header")? < 8 {
            return Ok(false);
        }
        let id_ok = header[..4]
            .iter()
            .all(|b| b.is_ascii_alphanumeric() || *b == b' ');
        let size = u64::from(u32::from_le_bytes([
            header[4], header[5], header[6], header[7],
        ]));
        Ok(id_ok && pos + 8 + size <= self.file_bytes)
    }
}

/// Where the data chunk sits and what the header says about its size.
struct DataLayout {
    container: Container,
    /// RIFF size from the header (plain RIFF) or from ds64.
    riff_bytes: u64,
    /// Data size from the data chunk header (or ds64).
    declared_bytes: u64,
    data_start: u64,
    /// Bytes per frame.
    block: u64,
}

/// The data size to read: the declared one for a finalised file, or the one recovered from the
/// file length for an unfinalised or wrapped one (with a warning pushed to `warnings`).
fn recovered_data_bytes<R: Read + Seek>(
    source: &mut Source<'_, R>,
    layout: &DataLayout,
    warnings: &mut Vec<String>,
) -> Result<u64, WavError> {
    let DataLayout {
        container,
        riff_bytes,
        declared_bytes,
        data_start,
        block,
    } = *layout;
    let available = source.file_bytes - data_start;
    let whole_frames = |bytes: u64| bytes / block * block;
    let read_to_end = |why: &str| {
        let bytes = whole_frames(available);
        let mut text = format!(
            "{why}; read to the end of the file: {} frames ({} of samples from byte {data_start})",
            bytes / block,
            human_bytes(bytes)
        );
        let partial = available - bytes;
        if partial > 0 {
            text.push_str(&format!(
                "; the last {partial} bytes are less than a frame and were left out"
            ));
        }
        (bytes, text)
    };

    let placeholder = u64::from(SIZE_PLACEHOLDER);
    if container == Container::Riff && declared_bytes == placeholder {
        let (bytes, text) = read_to_end(
            "the data chunk declares the size 0xFFFFFFFF, the placeholder a recorder writes \
             before it finalises the file",
        );
        warnings.push(text);
        return Ok(bytes);
    }
    if declared_bytes == 0 && available >= block {
        // A finalised file with an empty data chunk may carry further chunks after it, and its
        // RIFF size then covers them; samples after a zero size mean the size was never written.
        let riff_covers_more =
            riff_bytes != placeholder && riff_bytes.saturating_add(8) > data_start;
        if !(riff_covers_more && source.chunk_header_plausible_at(data_start)?) {
            let why = if container == Container::Riff && available >= FOUR_GIB {
                "the data chunk declares 0 bytes but sample data follows: the recorder did not \
                 finalise the file, or its 32-bit size wrapped around at a multiple of 4 GiB"
            } else {
                "the data chunk declares 0 bytes but sample data follows: the recorder did not \
                 finalise the file"
            };
            let (bytes, text) = read_to_end(why);
            warnings.push(text);
            return Ok(bytes);
        }
    }
    if container == Container::Riff && available >= declared_bytes + FOUR_GIB {
        // A 32-bit size holds the true size modulo 2^32; the file length says how many times
        // it wrapped. Trailing chunks after the data are smaller than 4 GiB.
        let wraps = (available - declared_bytes) / FOUR_GIB;
        let bytes = whole_frames(declared_bytes + wraps * FOUR_GIB);
        warnings.push(format!(
            "the data chunk declares {declared_bytes} bytes but the file holds {available} bytes \
             from byte {data_start}, where the data starts: a RIFF file over 4 GiB whose 32-bit sizes wrapped \
             around (RIFF cannot describe more than 4 GiB; RF64 and BW64 can); read {} frames \
             ({})",
            bytes / block,
            human_bytes(bytes)
        ));
        return Ok(bytes);
    }
    Ok(declared_bytes)
}

/// Common names of format tags we do not read, to make the error recognisable
/// (mmreg.h values, from memory).
fn format_tag_name(tag: u16) -> &'static str {
    match tag {
        0x0002 => ", Microsoft ADPCM",
        0x0006 => ", A-law",
        0x0007 => ", mu-law",
        0x0011 => ", IMA ADPCM",
        0x0055 => ", MPEG Layer 3",
        _ => "",
    }
}

/// A GUID in file byte order shown as the usual 8-4-4-4-12 text.
fn show_guid(bytes: &[u8]) -> String {
    let d1 = u32::from_le_bytes([bytes[0], bytes[1], bytes[2], bytes[3]]);
    let d2 = u16::from_le_bytes([bytes[4], bytes[5]]);
    let d3 = u16::from_le_bytes([bytes[6], bytes[7]]);
    let tail: String = bytes[8..16].iter().map(|b| format!("{b:02X}")).collect();
    format!("{d1:08X}-{d2:04X}-{d3:04X}-{}-{}", &tail[..4], &tail[4..])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn guid_text_matches_the_published_form() {
        // KSDATAFORMAT_SUBTYPE_PCM as written in the Microsoft docs (from memory).
        assert_eq!(
            show_guid(&SUBTYPE_PCM),
            "00000001-0000-0010-8000-00AA00389B71"
        );
    }

    #[test]
    fn planar_decoding_matches_the_interleaved_samples() {
        // Every format, three channels, arbitrary bytes written at an offset into the planes;
        // long enough for several groups of frames. The reference: the samples decoded in file
        // order into one plane, then dealt out to the channels by hand.
        let bytes: Vec<u8> = (0..3 * 8 * 1400).map(|i| (i * 73 + 11) as u8).collect();
        for (decoding, width) in [
            (Decoding::U8, 1),
            (Decoding::I16, 2),
            (Decoding::I24, 3),
            (Decoding::I32, 4),
            (Decoding::F32, 4),
            (Decoding::F64, 8),
        ] {
            let frames = bytes.len() / (3 * width);
            let data = &bytes[..frames * 3 * width];
            let mut interleaved = vec![0.0f32; 3 * frames];
            decode_planar(decoding, data, &mut [interleaved.as_mut_slice()], 0);
            let mut expected = vec![vec![-9.0f32; 2]; 3];
            for (i, &v) in interleaved.iter().enumerate() {
                expected[i % 3].push(v);
            }
            let mut planes = vec![vec![-9.0f32; 2 + frames]; 3];
            decode_planar(decoding, data, &mut planes, 2);
            for (got, want) in planes.iter().zip(&expected) {
                let same = got
                    .iter()
                    .zip(want)
                    .all(|(a, b)| a.to_bits() == b.to_bits());
                assert!(same && got.len() == want.len(), "{decoding:?}");
            }
        }
    }

    #[test]
    fn decodes_integer_extremes() {
        let mut got = [0.0f32; 2];
        let bytes = [0x00, 0x00, 0x80, 0xFF, 0xFF, 0x7F];
        decode_planar(Decoding::I24, &bytes, &mut [got.as_mut_slice()], 0);
        assert_eq!(got, [-1.0, 8_388_607.0 / 8_388_608.0]);
        let mut got = [0.0f32; 3];
        decode_planar(Decoding::U8, &[0, 128, 255], &mut [got.as_mut_slice()], 0);
        assert_eq!(got, [-1.0, 0.0, 127.0 / 128.0]);
    }
}
