//! The one error type of the WAV reader and writer. Every message says what went wrong and where
//! (byte offsets, declared versus found sizes), so a user can act on it without a hex editor.

use std::fmt;

/// Everything that can go wrong while reading or writing a WAV / RF64 / BW64 file.
#[derive(Debug)]
pub enum WavError {
    /// An I/O error from the underlying file, with what was being done at the time.
    Io {
        /// What the reader or writer was doing, e.g. "reading the data chunk at byte 44".
        context: String,
        /// The operating-system error.
        source: std::io::Error,
    },
    /// The input holds no bytes at all.
    Empty,
    /// The four bytes at `at_byte` are not one of the expected identifiers.
    NotWav {
        /// What was expected, e.g. "'RIFF', 'RF64' or 'BW64'".
        expected: &'static str,
        /// Byte offset of the identifier.
        at_byte: u64,
        /// The bytes found there (up to four).
        found: Vec<u8>,
    },
    /// The file ends inside a header structure.
    TruncatedHeader {
        /// File length in bytes, i.e. where the file ends.
        file_bytes: u64,
        /// The structure being read, e.g. "the fmt chunk".
        inside: String,
    },
    /// An RF64 or BW64 file whose first chunk is not 'ds64'.
    MissingDs64 {
        /// The identifier found at byte 12 instead.
        found: Vec<u8>,
    },
    /// A chunk's 32-bit size is the 0xFFFFFFFF placeholder but the ds64 table has no size for it.
    MissingDs64Size {
        /// The chunk identifier.
        chunk_id: [u8; 4],
        /// Byte offset of the chunk header.
        at_byte: u64,
    },
    /// The data chunk comes before any fmt chunk.
    DataBeforeFmt {
        /// Byte offset of the data chunk header.
        at_byte: u64,
    },
    /// The file ends without a data chunk.
    MissingData {
        /// Whether a fmt chunk was seen.
        fmt_seen: bool,
        /// File length in bytes.
        file_bytes: u64,
    },
    /// A sample format this reader or writer does not handle.
    Unsupported(String),
    /// A fmt chunk or a writer spec with impossible values (zero channels, zero sample rate,
    /// block align that does not match channels × sample size, …).
    InvalidFormat(String),
    /// The data chunk declares more bytes than the file holds (found at open time).
    DataTruncated {
        /// Byte offset where the sample data starts.
        data_start: u64,
        /// Data size declared by the data chunk (or ds64), in bytes.
        declared_bytes: u64,
        /// File length in bytes.
        file_bytes: u64,
        /// Frames the declared size implies.
        expected_frames: u64,
        /// Whole frames actually present in the file.
        found_frames: u64,
    },
    /// The data ended early while reading (the file shrank after it was opened).
    DataEndedEarly {
        /// Frames the header declared.
        expected_frames: u64,
        /// Frames read before the end of the file.
        found_frames: u64,
    },
    /// The caller's buffers do not match the file or writer layout.
    BufferMismatch(String),
    /// A write after an earlier write failed or after the data outgrew what the format can hold.
    WriterState(String),
}

impl WavError {
    pub(crate) fn io(context: impl Into<String>, source: std::io::Error) -> Self {
        WavError::Io {
            context: context.into(),
            source,
        }
    }
}

/// Shows four identifier bytes as `'fmt '` when they are printable ASCII, else as hex bytes.
pub(crate) fn show_id(bytes: &[u8]) -> String {
    if !bytes.is_empty() && bytes.iter().all(|b| (0x20..0x7f).contains(b)) {
        format!("'{}'", String::from_utf8_lossy(bytes))
    } else if bytes.is_empty() {
        "nothing (end of file)".to_string()
    } else {
        let hex: Vec<String> = bytes.iter().map(|b| format!("{b:02X}")).collect();
        format!("bytes {}", hex.join(" "))
    }
}

/// A byte count in decimal units with one decimal place: "1.2 MB", "9.0 TB".
pub(crate) fn human_bytes(bytes: u64) -> String {
    const UNITS: [&str; 6] = ["kB", "MB", "GB", "TB", "PB", "EB"];
    if bytes < 1000 {
        return format!("{bytes} B");
    }
    let mut value = bytes as f64 / 1000.0;
    let mut unit = 0;
    while value >= 999.95 && unit + 1 < UNITS.len() {
        value /= 1000.0;
        unit += 1;
    }
    format!("{value:.1} {}", UNITS[unit])
}

impl fmt::Display for WavError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WavError::Io { context, source } => write!(f, "I/O error while {context}: {source}"),
            WavError::Empty => write!(f, "not a WAV file: the file is empty (0 bytes)"),
            WavError::NotWav {
                expected,
                at_byte,
                found,
            } => write!(
                f,
                "not a WAV file: expected {expected} at byte {at_byte}, found {}",
                show_id(found)
            ),
            WavError::TruncatedHeader { file_bytes, inside } => write!(
                f,
                "truncated header: file ends at byte {file_bytes} inside {inside}"
            ),
            WavError::MissingDs64 { found } => write!(
                f,
                "RF64/BW64 file without a ds64 chunk: expected 'ds64' at byte 12, found {}",
                show_id(found)
            ),
            WavError::MissingDs64Size { chunk_id, at_byte } => write!(
                f,
                "chunk {} at byte {at_byte} has the placeholder size 0xFFFFFFFF but the ds64 \
                 chunk gives no 64-bit size for it",
                show_id(chunk_id)
            ),
            WavError::DataBeforeFmt { at_byte } => write!(
                f,
                "invalid WAV file: the data chunk at byte {at_byte} comes before any fmt chunk"
            ),
            WavError::MissingData {
                fmt_seen,
                file_bytes,
            } => {
                if *fmt_seen {
                    write!(
                        f,
                        "invalid WAV file: no data chunk before the end of the file at byte {file_bytes}"
                    )
                } else {
                    write!(
                        f,
                        "invalid WAV file: no fmt and no data chunk before the end of the file at \
                         byte {file_bytes}"
                    )
                }
            }
            WavError::Unsupported(what) => write!(f, "unsupported sample format: {what}"),
            WavError::InvalidFormat(what) => write!(f, "invalid format: {what}"),
            WavError::DataTruncated {
                data_start,
                declared_bytes,
                file_bytes,
                expected_frames,
                found_frames,
            } => write!(
                f,
                "truncated data: declared data size {} ({declared_bytes} bytes from byte \
                 {data_start}) exceeds the file size {} ({file_bytes} bytes); expected \
                 {expected_frames} frames, found {found_frames}",
                human_bytes(*declared_bytes),
                human_bytes(*file_bytes)
            ),
            WavError::DataEndedEarly {
                expected_frames,
                found_frames,
            } => write!(
                f,
                "truncated data: expected {expected_frames} frames, but the file ended after \
                 {found_frames}"
            ),
            WavError::BufferMismatch(what) => write!(f, "buffer mismatch: {what}"),
            WavError::WriterState(what) => write!(f, "cannot write: {what}"),
        }
    }
}

impl std::error::Error for WavError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            WavError::Io { source, .. } => Some(source),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn human_bytes_uses_decimal_units() {
        assert_eq!(human_bytes(999), "999 B");
        assert_eq!(human_bytes(1_200_000), "1.2 MB");
        assert_eq!(human_bytes(9_000_000_000_000), "9.0 TB");
        assert_eq!(human_bytes(999_999), "1.0 MB");
        assert_eq!(human_bytes(u64::MAX), "18.4 EB");
    }

    #[test]
    fn ids_show_as_text_or_hex() {
        assert_eq!(show_id(b"RIFF"), "'RIFF'");
        assert_eq!(show_id(&[0x49, 0x44, 0x33, 0x03]), "bytes 49 44 33 03");
        assert_eq!(show_id(&[]), "nothing (end of file)");
    }
}
