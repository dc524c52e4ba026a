//! The one error type of the Ogg Opus reader. Messages say what was expected and what was found,
//! with packet numbers where they help.

use std::fmt;

/// Everything that can go wrong while reading an Ogg Opus file.
#[derive(Debug)]
pub enum OpusError {
    /// An I/O error, with what was being done at the time.
    Io {
        /// What the reader was doing, e.g. "opening the file".
        context: String,
        /// The operating-system error.
        source: std::io::Error,
    },
    /// The Ogg layer is broken: a bad page checksum, a cut-off page, no capture pattern.
    Ogg(String),
    /// The file ends inside a page or before the stream's audio ends.
    Truncated(String),
    /// The file is Ogg but its first stream is not Opus.
    NotOpus(String),
    /// The identification header (OpusHead) breaks RFC 7845 section 5.1 or RFC 8486 section 3.
    BadHeader(String),
    /// A channel mapping family this reader does not read (only 2 and 3 carry Ambisonics).
    UnsupportedFamily(u8),
    /// The decoder rejected a packet or its configuration.
    Decoder {
        /// What was being done ("creating the projection decoder", "packet 12").
        context: String,
        /// libopus error code (negative).
        code: i32,
    },
    /// The granule positions and the audio disagree (end trimming impossible).
    BadGranule(String),
    /// The caller passed buffers that do not fit the stream.
    BufferMismatch(String),
}

impl OpusError {
    pub(crate) fn io(context: impl Into<String>, source: std::io::Error) -> Self {
        OpusError::Io {
            context: context.into(),
            source,
        }
    }
}

/// The libopus name of an error code (opus_defines.h).
fn opus_code_name(code: i32) -> &'static str {
    match code {
        -1 => "bad argument",
        -2 => "buffer too small",
        -3 => "internal error",
        -4 => "invalid packet",
        -5 => "unimplemented",
        -6 => "invalid state",
        -7 => "allocation failed",
        _ => "unknown error",
    }
}

impl fmt::Display for OpusError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            OpusError::Io { context, source } => write!(f, "{context}: {source}"),
            OpusError::Ogg(what) => write!(f, "broken Ogg stream: {what}"),
            OpusError::Truncated(what) => write!(f, "the file is cut short or damaged: {what}"),
            OpusError::NotOpus(what) => write!(f, "not an Ogg Opus file: {what}"),
            OpusError::BadHeader(what) => write!(f, "invalid Opus identification header: {what}"),
            OpusError::UnsupportedFamily(family) => write!(
                f,
                "channel mapping family {family} does not carry Ambisonics; Ogg Opus files are read with family 2 (ACN/SN3D) or 3 (projection with a demixing matrix)"
            ),
            OpusError::Decoder { context, code } => write!(
                f,
                "the Opus decoder failed on {context}: {} ({code})",
                opus_code_name(*code)
            ),
            OpusError::BadGranule(what) => write!(f, "inconsistent granule positions: {what}"),
            OpusError::BufferMismatch(what) => write!(f, "{what}"),
        }
    }
}

impl std::error::Error for OpusError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            OpusError::Io { source, .. } => Some(source),
            _ => None,
        }
    }
}
