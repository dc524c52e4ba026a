//! A safe owner of the multistream or projection decoder of `unsafe-libopus` (a Rust
//! translation of libopus, the reference implementation of RFC 6716). Every pointer handed to
//! it comes from a slice whose length is passed with it; the state is freed on drop.

use super::OpusError;
use super::head::{ChannelMapping, OpusHead};
use unsafe_libopus as unsafe_lib;

/// The longest Opus packet decodes to 120 ms: 5760 frames at 48 kHz (RFC 6716 section 3.2.1).
pub const MAX_PACKET_FRAMES: usize = 5760;

enum State {
    Multistream(*mut unsafe_lib::OpusMSDecoder),
    Projection(*mut unsafe_lib::OpusProjectionDecoder),
}

/// Decodes the packets of one Ogg Opus stream at 48 kHz into interleaved `f32`.
pub struct StreamDecoder {
    state: State,
    channels: usize,
}

// The decoder state is plain memory owned by this value alone.
unsafe impl Send for StreamDecoder {}

impl StreamDecoder {
    /// A decoder for `head`'s mapping (family 2: multistream with the mapping table; family 3:
    /// projection with the demixing matrix).
    pub fn new(head: &OpusHead) -> Result<Self, OpusError> {
        let channels = i32::from(head.channels);
        let mut error = 0i32;
        let state = match &head.mapping {
            ChannelMapping::Ambisonic {
                streams,
                coupled_streams,
                table,
            } => {
                debug_assert_eq!(table.len(), usize::from(head.channels));
                // SAFETY: `table` holds `channels` bytes (checked when the header was parsed),
                // which is what the decoder reads; `error` is a valid out-pointer.
                let st = unsafe {
                    unsafe_lib::opus_multistream_decoder_create(
                        48_000,
                        channels,
                        i32::from(*streams),
                        i32::from(*coupled_streams),
                        table.as_ptr(),
                        &mut error,
                    )
                };
                if st.is_null() || error != 0 {
                    return Err(OpusError::Decoder {
                        context: "creating the multistream decoder".into(),
                        code: if error != 0 { error } else { -7 },
                    });
                }
                State::Multistream(st)
            }
            ChannelMapping::Projection {
                streams,
                coupled_streams,
                demixing_matrix,
            } => {
                let mut matrix = demixing_matrix.clone();
                let size = i32::try_from(matrix.len()).map_err(|_| OpusError::Decoder {
                    context: "creating the projection decoder".into(),
                    code: -1,
                })?;
                // SAFETY: the decoder reads `size` bytes of `matrix` (it checks `size` against
                // channels × coded channels × 2 itself) and copies them.
                let st = unsafe {
                    unsafe_lib::opus_projection_decoder_create(
                        48_000,
                        channels,
                        i32::from(*streams),
                        i32::from(*coupled_streams),
                        matrix.as_mut_ptr(),
                        size,
                        &mut error,
                    )
                };
                if st.is_null() || error != 0 {
                    if !st.is_null() {
                        // SAFETY: `st` came from the matching create call.
                        unsafe { unsafe_lib::opus_projection_decoder_destroy(st) };
                    }
                    return Err(OpusError::Decoder {
                        context: "creating the projection decoder".into(),
                        code: if error != 0 { error } else { -7 },
                    });
                }
                State::Projection(st)
            }
        };
        Ok(StreamDecoder {
            state,
            channels: usize::from(head.channels),
        })
    }

    /// Decodes one packet into `out` (interleaved, at least [`MAX_PACKET_FRAMES`] × channels
    /// long). Returns the frames decoded.
    pub fn decode(
        &mut self,
        packet: &[u8],
        out: &mut [f32],
        packet_number: u64,
    ) -> Result<usize, OpusError> {
        let failed = |code| OpusError::Decoder {
            context: format!("audio packet {packet_number}"),
            code,
        };
        // An empty packet would ask for loss concealment; an Ogg Opus stream has no lost packets.
        if packet.is_empty() {
            return Err(failed(-4));
        }
        let len = i32::try_from(packet.len()).map_err(|_| failed(-4))?;
        let capacity = out.len() / self.channels.max(1);
        if capacity < MAX_PACKET_FRAMES {
            return Err(OpusError::BufferMismatch(format!(
                "the decode buffer holds {capacity} frames, a packet can need {MAX_PACKET_FRAMES}"
            )));
        }
        let frame_size = MAX_PACKET_FRAMES as i32;
        // SAFETY: `packet` holds `len` bytes and `out` holds at least `frame_size` × channels
        // floats, the most the decoder writes; the state pointer is live until drop.
        let n = unsafe {
            match self.state {
                State::Multistream(st) => unsafe_lib::opus_multistream_decode_float(
                    st,
                    packet.as_ptr(),
                    len,
                    out.as_mut_ptr(),
                    frame_size,
                    0,
                ),
                State::Projection(st) => unsafe_lib::opus_projection_decode_float(
                    st,
                    packet.as_ptr(),
                    len,
                    out.as_mut_ptr(),
                    frame_size,
                    0,
                ),
            }
        };
        if n < 0 {
            return Err(failed(n));
        }
        Ok(n as usize)
    }
}

impl Drop for StreamDecoder {
    fn drop(&mut self) {
        // SAFETY: each pointer came from its create call and is freed once, here.
        unsafe {
            match self.state {
                State::Multistream(st) => unsafe_lib::opus_multistream_decoder_destroy(st),
                State::Projection(st) => unsafe_lib::opus_projection_decoder_destroy(st),
            }
        }
    }
}
