//! FIELDGLASS PATCH (this whole file is new): ambisonic main buses for the CLAP and VST3 wrappers.
//!
//! A plugin opts in by returning an [`AmbisonicBuses`] object from
//! `ClapPlugin::ambisonic_buses()` / `Vst3Plugin::ambisonic_buses()`. The wrappers then
//! - CLAP: give every main port of (N+1)² channels (N ≥ 1) the port type `ambisonic`, in the
//!   audio-ports and audio-ports-config extensions, and offer the `clap.ambisonic` extension
//!   (`is_config_supported`, `get_config`) answered by this object;
//! - VST3: report the SDK's `kAmbi<N>OrderACN` speaker arrangement for such buses in
//!   `getBusArrangement`, keep accepting any arrangement with the right channel count in
//!   `setBusArrangements`, and tell this object whether the host stated the ambisonic
//!   arrangement (ACN ordering with SN3D normalisation, as the SDK defines those arrangements).
//!
//! Plugins that do not opt in see no change.

/// Channel ordering of an ambisonic bus (the two the CLAP extension names).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum AmbisonicOrdering {
    /// Furse-Malham order.
    Fuma,
    /// Ambisonic Channel Number order.
    Acn,
}

/// Normalisation of an ambisonic bus (the five the CLAP extension names).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum AmbisonicNormalization {
    MaxN,
    Sn3d,
    N3d,
    Sn2d,
    N2d,
}

/// An ordering and normalisation pair.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct AmbisonicConfig {
    pub ordering: AmbisonicOrdering,
    pub normalization: AmbisonicNormalization,
}

impl AmbisonicConfig {
    /// ACN ordering, SN3D normalisation (what VST3's ambisonic arrangements denote).
    pub const ACN_SN3D: Self = Self {
        ordering: AmbisonicOrdering::Acn,
        normalization: AmbisonicNormalization::Sn3d,
    };
}

/// What the wrappers ask a plugin with ambisonic main buses. Called on the main thread, never
/// on the audio thread; implementations should be cheap and must not block.
pub trait AmbisonicBuses: Send + Sync {
    /// Whether the plugin can take main buses of `channels` channels in this configuration.
    fn is_config_supported(&self, config: AmbisonicConfig, channels: u32) -> bool;
    /// The configuration the plugin currently takes its main buses to be in.
    fn config(&self) -> AmbisonicConfig;
    /// The host stated the main buses' configuration (`Some`) or set a layout that states none
    /// (`None`, e.g. a VST3 arrangement of generic speakers).
    fn host_stated(&self, config: Option<AmbisonicConfig>);
}

/// The ambisonic order N of a bus of (N+1)² channels, N ≥ 1.
pub fn ambisonic_order(channels: u32) -> Option<u32> {
    let n = (f64::from(channels).sqrt().round() as u32).checked_sub(1)?;
    (n >= 1 && (n + 1) * (n + 1) == channels).then_some(n)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn full_orders_only() {
        assert_eq!(ambisonic_order(4), Some(1));
        assert_eq!(ambisonic_order(16), Some(3));
        assert_eq!(ambisonic_order(64), Some(7));
        assert_eq!(ambisonic_order(81), Some(8));
        for channels in [0, 1, 2, 3, 5, 6, 8, 15, 17, 65] {
            assert_eq!(ambisonic_order(channels), None, "{channels}");
        }
    }
}
