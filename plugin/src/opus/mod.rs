//! Ogg Opus input with the ambisonic channel mapping families of RFC 8486: family 2 (ACN/SN3D
//! channels, optionally followed by a non-diegetic stereo pair, coded as Opus multistream) and
//! family 3 (the same channels coded through a demixing matrix carried in the header).
//!
//! The Ogg layer is demultiplexed by the `ogg` crate (page checksums verified); the
//! identification header is parsed and checked here (RFC 7845 section 5.1, RFC 8486 section 3);
//! packets are decoded by `unsafe-libopus`, a Rust translation of the reference libopus, whose
//! output the tests compare with libopus itself (plugin/tests/opus_input.rs). The reader
//! delivers planar `f32` at 48 kHz in ACN order (SN3D), the stereo pair as the two last
//! channels, after dropping the pre-skip, applying the output gain and trimming the end to the
//! last granule position (RFC 7845 sections 4.2, 4.5 and 5.1). Only the first logical stream of
//! a file is read; a comment header is required and skipped.

mod decoder;
mod error;
mod head;
mod reader;
mod tail;

pub use error::OpusError;
pub use head::{ChannelMapping, OpusHead};
pub use reader::{OPUS_SAMPLE_RATE_HZ, OpusReader, file_is_ogg, is_ogg};
pub use tail::page_checksum;
