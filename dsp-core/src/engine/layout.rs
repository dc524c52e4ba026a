//! Channel layout of an input: a full ambisonic order plus up to two extra channels.

use crate::sh::{channel_count, order_of_channel_count};
use std::fmt;

/// Highest order the engine analyses.
pub const MAX_ENGINE_ORDER: usize = 7;

/// Spatial and extra channels of an input.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ChannelLayout {
    pub order: usize,
    /// (order+1)² spatial channels come first.
    pub spatial_channels: usize,
    /// Non-spatial channels after them (0, 1 or 2), metered but not mapped.
    pub extra_channels: usize,
}

/// Why a channel count cannot be analysed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LayoutError {
    pub channels: usize,
}

impl fmt::Display for LayoutError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let valid: Vec<String> = (1..=MAX_ENGINE_ORDER)
            .map(|n| channel_count(n).to_string())
            .collect();
        write!(
            f,
            "{} channels is not an ambisonic layout: expected (N+1)² channels for order N = 1..{} ({}), optionally plus 1 or 2 extra channels",
            self.channels,
            MAX_ENGINE_ORDER,
            valid.join(", ")
        )
    }
}

impl std::error::Error for LayoutError {}

impl ChannelLayout {
    /// Layout of `channels` channels: the largest full order that fits with at most two left
    /// over.
    pub fn from_channel_count(channels: usize) -> Result<Self, LayoutError> {
        for extra in 0..=2usize {
            if channels < extra + 4 {
                continue;
            }
            if let Some(order) = order_of_channel_count(channels - extra)
                && (1..=MAX_ENGINE_ORDER).contains(&order)
            {
                return Ok(Self {
                    order,
                    spatial_channels: channels - extra,
                    extra_channels: extra,
                });
            }
        }
        Err(LayoutError { channels })
    }

    pub fn channels(&self) -> usize {
        self.spatial_channels + self.extra_channels
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layouts() {
        assert_eq!(ChannelLayout::from_channel_count(16).unwrap().order, 3);
        let l = ChannelLayout::from_channel_count(18).unwrap();
        assert_eq!((l.order, l.extra_channels), (3, 2));
        assert_eq!(
            ChannelLayout::from_channel_count(5).unwrap().extra_channels,
            1
        );
        assert!(ChannelLayout::from_channel_count(3).is_err());
        assert!(ChannelLayout::from_channel_count(7).is_err());
        assert!(ChannelLayout::from_channel_count(81).is_err());
        let msg = ChannelLayout::from_channel_count(7)
            .unwrap_err()
            .to_string();
        assert!(msg.contains("7 channels") && msg.contains("64"), "{msg}");
    }
}
