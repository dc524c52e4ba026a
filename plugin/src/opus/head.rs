//! The Opus identification header ("OpusHead", RFC 7845 section 5.1) with the channel mapping
//! families of Ambisonics (RFC 8486 section 3): parsed and checked before any decoder sees it.

use super::OpusError;

/// How the coded streams become output channels.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ChannelMapping {
    /// Family 2 (RFC 8486 section 3.1): each output channel is a coded channel picked by the
    /// mapping table (255 = silent), in ACN order with SN3D normalisation.
    Ambisonic {
        streams: u8,
        coupled_streams: u8,
        /// One entry per output channel.
        table: Vec<u8>,
    },
    /// Family 3 (RFC 8486 section 3.2): the output channels are the coded channels times a
    /// demixing matrix; the output is ACN/SN3D.
    Projection {
        streams: u8,
        coupled_streams: u8,
        /// Column-major, `channels` rows by `streams + coupled_streams` columns, each entry a
        /// little-endian signed 16-bit value (Q15), exactly as in the header.
        demixing_matrix: Vec<u8>,
    },
}

/// A checked identification header.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OpusHead {
    pub version: u8,
    pub channels: u8,
    /// Frames at 48 kHz the decoder outputs before the programme starts (discarded).
    pub pre_skip: u16,
    /// The sample rate of the encoder's input, informational only (decoding is at 48 kHz).
    pub input_sample_rate_hz: u32,
    /// Gain to apply to the decoded output, dB in Q7.8.
    pub output_gain_q8: i16,
    pub mapping_family: u8,
    pub mapping: ChannelMapping,
}

impl OpusHead {
    /// The linear factor of the output gain: 10^(gain_db / 20), gain_db = Q7.8 value / 256.
    pub fn output_gain_factor(&self) -> f32 {
        10f64.powf(f64::from(self.output_gain_q8) / (256.0 * 20.0)) as f32
    }

    /// The full ambisonic order of the channel count, and whether the two last channels are
    /// the non-diegetic stereo pair (RFC 8486 section 3.1: C = (N+1)² or (N+1)² + 2).
    pub fn ambisonic_order(&self) -> (usize, bool) {
        // Checked at parse time, so one of the two forms holds.
        ambisonic_layout(self.channels).unwrap_or((0, false))
    }

    /// Parses and checks an identification header packet.
    pub fn parse(packet: &[u8]) -> Result<Self, OpusError> {
        if packet.len() < 8 || &packet[..8] != b"OpusHead" {
            return Err(OpusError::NotOpus(
                "the first packet is not an Opus identification header ('OpusHead')".into(),
            ));
        }
        if packet.len() < 19 {
            return Err(OpusError::BadHeader(format!(
                "{} bytes, the fixed part alone needs 19",
                packet.len()
            )));
        }
        let version = packet[8];
        // RFC 7845 section 5.1: the upper four bits are the major version; only major
        // version 0 is this encapsulation.
        if version >= 16 {
            return Err(OpusError::BadHeader(format!(
                "version {version} is not a version 0.x header (RFC 7845 accepts 0 to 15)"
            )));
        }
        let channels = packet[9];
        if channels == 0 {
            return Err(OpusError::BadHeader("the channel count is 0".into()));
        }
        let pre_skip = u16::from_le_bytes([packet[10], packet[11]]);
        let input_sample_rate_hz =
            u32::from_le_bytes([packet[12], packet[13], packet[14], packet[15]]);
        let output_gain_q8 = i16::from_le_bytes([packet[16], packet[17]]);
        let mapping_family = packet[18];
        if mapping_family != 2 && mapping_family != 3 {
            return Err(OpusError::UnsupportedFamily(mapping_family));
        }
        if ambisonic_layout(channels).is_none() {
            return Err(OpusError::BadHeader(format!(
                "{channels} channels with mapping family {mapping_family}; RFC 8486 allows (N+1)² or (N+1)² + 2 for an order N from 0 to 14 (1, 3, 4, 6, 9, 11, 16, 18, ...)"
            )));
        }
        if packet.len() < 21 {
            return Err(OpusError::BadHeader(format!(
                "{} bytes, mapping family {mapping_family} needs the stream counts at bytes 19 and 20",
                packet.len()
            )));
        }
        let streams = packet[19];
        let coupled_streams = packet[20];
        if streams == 0 {
            return Err(OpusError::BadHeader("the stream count is 0".into()));
        }
        if coupled_streams > streams {
            return Err(OpusError::BadHeader(format!(
                "{coupled_streams} coupled streams out of {streams} streams"
            )));
        }
        let coded_channels = usize::from(streams) + usize::from(coupled_streams);
        if coded_channels > 255 {
            return Err(OpusError::BadHeader(format!(
                "{streams} streams with {coupled_streams} coupled make {coded_channels} coded channels (at most 255)"
            )));
        }
        let channels_usize = usize::from(channels);
        let rest = &packet[21..];
        let mapping = if mapping_family == 2 {
            if rest.len() < channels_usize {
                return Err(OpusError::BadHeader(format!(
                    "the channel mapping table has {} of its {channels} bytes",
                    rest.len()
                )));
            }
            let table = rest[..channels_usize].to_vec();
            if let Some((channel, &value)) = table
                .iter()
                .enumerate()
                .find(|&(_, &v)| v != 255 && usize::from(v) >= coded_channels)
            {
                return Err(OpusError::BadHeader(format!(
                    "mapping table entry {value} for channel {channel} refers past the {coded_channels} coded channels"
                )));
            }
            ChannelMapping::Ambisonic {
                streams,
                coupled_streams,
                table,
            }
        } else {
            let matrix_bytes = 2 * channels_usize * coded_channels;
            // Version 1 defines nothing after the matrix, so its length is the matrix size.
            if rest.len() < matrix_bytes || version == 1 && rest.len() != matrix_bytes {
                return Err(OpusError::BadHeader(format!(
                    "the demixing matrix has {} bytes; {channels} output channels by {coded_channels} coded channels need {matrix_bytes}",
                    rest.len()
                )));
            }
            ChannelMapping::Projection {
                streams,
                coupled_streams,
                demixing_matrix: rest[..matrix_bytes].to_vec(),
            }
        };
        Ok(OpusHead {
            version,
            channels,
            pre_skip,
            input_sample_rate_hz,
            output_gain_q8,
            mapping_family,
            mapping,
        })
    }
}

/// (order, non-diegetic pair) of a family 2 or 3 channel count, None when it is neither
/// (N+1)² nor (N+1)² + 2 with N from 0 to 14 (RFC 8486 section 3.1).
fn ambisonic_layout(channels: u8) -> Option<(usize, bool)> {
    (0..=14usize).find_map(|order| {
        let full = (order + 1) * (order + 1);
        let c = usize::from(channels);
        if c == full {
            Some((order, false))
        } else if c == full + 2 {
            Some((order, true))
        } else {
            None
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn header(channels: u8, family: u8, streams: u8, coupled: u8, rest: &[u8]) -> Vec<u8> {
        let mut h = b"OpusHead".to_vec();
        h.extend_from_slice(&[
            1, channels, 0x38, 0x01, 0x80, 0xbb, 0, 0, 0x00, 0xfa, family,
        ]);
        h.extend_from_slice(&[streams, coupled]);
        h.extend_from_slice(rest);
        h
    }

    #[test]
    fn family_2_first_order_parses() {
        // Byte layout of RFC 7845 section 5.1: pre-skip 312, 48 kHz input, gain
        // 0xfa00 = -1536 (−6 dB in Q7.8).
        let h = OpusHead::parse(&header(4, 2, 2, 2, &[0, 1, 2, 3])).unwrap();
        assert_eq!(h.pre_skip, 312);
        assert_eq!(h.input_sample_rate_hz, 48_000);
        assert_eq!(h.output_gain_q8, -1536);
        assert!((h.output_gain_factor() - 0.501_187_2).abs() < 1e-6);
        assert_eq!(h.ambisonic_order(), (1, false));
    }

    #[test]
    fn channel_counts_follow_rfc_8486() {
        // RFC 8486 section 3.1: (N+1)² or (N+1)² + 2.
        for (c, ok) in [
            (1, true),
            (2, false),
            (3, true),
            (4, true),
            (5, false),
            (6, true),
        ] {
            let table: Vec<u8> = (0..c).collect();
            let r = OpusHead::parse(&header(c, 2, c, 0, &table));
            assert_eq!(r.is_ok(), ok, "{c} channels: {r:?}");
        }
        assert_eq!(ambisonic_layout(227), Some((14, true)));
        assert_eq!(ambisonic_layout(228), None);
    }

    #[test]
    fn hostile_headers_are_errors() {
        let cases: Vec<Vec<u8>> = vec![
            header(4, 2, 2, 3, &[0, 1, 2, 3]),   // more coupled than streams
            header(4, 2, 0, 0, &[0, 1, 2, 3]),   // no stream
            header(4, 2, 2, 2, &[0, 1, 2]),      // table cut short
            header(4, 2, 1, 0, &[0, 1, 2, 255]), // entry past the coded channels
            header(4, 3, 2, 2, &[0; 31]),        // demixing matrix one byte short
            header(4, 1, 2, 2, &[0, 1, 2, 3]),   // surround family
            b"OpusHead\x01\x04".to_vec(),
            b"OpusTags".to_vec(),
        ];
        for case in cases {
            assert!(OpusHead::parse(&case).is_err(), "{case:?}");
        }
        let mut version_16 = header(4, 2, 2, 2, &[0, 1, 2, 3]);
        version_16[8] = 16;
        assert!(OpusHead::parse(&version_16).is_err());
        assert!(OpusHead::parse(&header(4, 3, 2, 2, &[0; 32])).is_ok());
        // A matrix one row too long for version 1.
        assert!(OpusHead::parse(&header(4, 3, 2, 1, &[0; 32])).is_err());
    }
}
