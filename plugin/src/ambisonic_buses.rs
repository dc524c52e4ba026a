//! What the plugin tells hosts about its ambisonic buses (through the patched framework's
//! `AmbisonicBuses` hook; see plugin/patched/nice-plug/FIELDGLASS-PATCH.md).
//!
//! - CLAP (`clap.ambisonic`): every ordering/normalisation pair the engine can analyse at the
//!   current layout's order is supported (ACN or FuMa ordering with SN3D, N3D or maxN; FuMa and
//!   maxN only to third order); SN2D and N2D are not. `get_config` reports the format the
//!   analysis assumes: ACN/SN3D unless the user or the host said otherwise.
//! - VST3: a host that sets the SDK's ambisonic arrangement states ACN/SN3D; a generic
//!   arrangement states nothing.
//!
//! A host-stated format becomes the assumed format unless the user chose one; "chose one" means
//! the Assumed format parameter is not at its default (AmbiX). Hosts state only ACN/SN3D today
//! (VST3's arrangements; CLAP has no way for a host to state a format), which is the default.

use crate::params::FieldglassParams;
use fieldglass_dsp::format::{AmbiFormat, ChannelOrdering, Normalization};
use fieldglass_dsp::sh::order_of_channel_count;
use nice_plug::prelude::{
    AmbisonicBuses, AmbisonicConfig, AmbisonicNormalization, AmbisonicOrdering,
};
use std::sync::Arc;
use std::sync::atomic::{AtomicU8, Ordering};

/// The format a host stated for the main buses, if any; lock-free so the audio thread may read
/// it.
#[derive(Debug, Default)]
pub struct HostStatedFormat(AtomicU8);

/// Formats a host can state, by their code in [`HostStatedFormat`] minus one.
const STATABLE: [AmbiFormat; 6] = [
    AmbiFormat::ACN_SN3D,
    AmbiFormat::ACN_N3D,
    AmbiFormat::ACN_MAXN,
    AmbiFormat::FUMA,
    AmbiFormat {
        ordering: ChannelOrdering::Fuma,
        normalization: Normalization::Sn3d,
    },
    AmbiFormat {
        ordering: ChannelOrdering::Fuma,
        normalization: Normalization::N3d,
    },
];

impl HostStatedFormat {
    pub fn load(&self) -> Option<AmbiFormat> {
        let code = self.0.load(Ordering::Acquire) as usize;
        code.checked_sub(1).and_then(|i| STATABLE.get(i).copied())
    }

    pub fn store(&self, format: Option<AmbiFormat>) {
        let code = format
            .and_then(|f| STATABLE.iter().position(|&s| s == f))
            .map_or(0, |i| i as u8 + 1);
        self.0.store(code, Ordering::Release);
    }
}

/// The plugin's answer to the framework's ambisonic questions.
pub struct Buses {
    params: Arc<FieldglassParams>,
}

impl Buses {
    pub fn new(params: Arc<FieldglassParams>) -> Self {
        Self { params }
    }
}

impl AmbisonicBuses for Buses {
    fn is_config_supported(&self, config: AmbisonicConfig, channels: u32) -> bool {
        let (Some(format), Some(order)) =
            (format_of(config), order_of_channel_count(channels as usize))
        else {
            return false;
        };
        order >= 1 && format.check_order(order).is_ok()
    }

    fn config(&self) -> AmbisonicConfig {
        config_of(self.params.effective_format())
    }

    fn host_stated(&self, config: Option<AmbisonicConfig>) {
        self.params
            .host_stated_format
            .store(config.and_then(format_of));
    }
}

/// The engine's format for a host configuration; `None` for normalisations it does not read
/// (SN2D, N2D).
pub fn format_of(config: AmbisonicConfig) -> Option<AmbiFormat> {
    let ordering = match config.ordering {
        AmbisonicOrdering::Acn => ChannelOrdering::Acn,
        AmbisonicOrdering::Fuma => ChannelOrdering::Fuma,
    };
    let normalization = match config.normalization {
        AmbisonicNormalization::Sn3d => Normalization::Sn3d,
        AmbisonicNormalization::N3d => Normalization::N3d,
        AmbisonicNormalization::MaxN => Normalization::MaxN,
        AmbisonicNormalization::Sn2d | AmbisonicNormalization::N2d => return None,
    };
    Some(AmbiFormat {
        ordering,
        normalization,
    })
}

/// The host configuration for one of the engine's formats.
pub fn config_of(format: AmbiFormat) -> AmbisonicConfig {
    AmbisonicConfig {
        ordering: match format.ordering {
            ChannelOrdering::Acn => AmbisonicOrdering::Acn,
            ChannelOrdering::Fuma => AmbisonicOrdering::Fuma,
        },
        normalization: match format.normalization {
            Normalization::Sn3d => AmbisonicNormalization::Sn3d,
            Normalization::N3d => AmbisonicNormalization::N3d,
            Normalization::MaxN => AmbisonicNormalization::MaxN,
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::params::FormatChoice;

    const ORDERINGS: [AmbisonicOrdering; 2] = [AmbisonicOrdering::Acn, AmbisonicOrdering::Fuma];
    const NORMALIZATIONS: [AmbisonicNormalization; 5] = [
        AmbisonicNormalization::MaxN,
        AmbisonicNormalization::Sn3d,
        AmbisonicNormalization::N3d,
        AmbisonicNormalization::Sn2d,
        AmbisonicNormalization::N2d,
    ];

    #[test]
    fn every_pair_the_engine_reads_is_supported_and_no_other() {
        let buses = Buses::new(Arc::default());
        for order in 1..=7u32 {
            let channels = (order + 1) * (order + 1);
            for ordering in ORDERINGS {
                for normalization in NORMALIZATIONS {
                    let config = AmbisonicConfig {
                        ordering,
                        normalization,
                    };
                    // FuMa ordering and maxN weights are defined to third order only
                    // (DESIGN.md); the 2D normalisations are not read by the engine.
                    let expected = match (ordering, normalization) {
                        (_, AmbisonicNormalization::Sn2d | AmbisonicNormalization::N2d) => false,
                        (AmbisonicOrdering::Fuma, _) | (_, AmbisonicNormalization::MaxN) => {
                            order <= 3
                        }
                        _ => true,
                    };
                    assert_eq!(
                        buses.is_config_supported(config, channels),
                        expected,
                        "{config:?} at order {order}"
                    );
                    if let Some(format) = format_of(config) {
                        assert_eq!(config_of(format), config);
                    }
                }
            }
        }
        // Not a full order: nothing is supported.
        assert!(!buses.is_config_supported(AmbisonicConfig::ACN_SN3D, 5));
        assert!(!buses.is_config_supported(AmbisonicConfig::ACN_SN3D, 1));
    }

    #[test]
    fn every_statable_format_round_trips() {
        let cell = HostStatedFormat::default();
        assert_eq!(cell.load(), None);
        for format in STATABLE {
            cell.store(Some(format));
            assert_eq!(cell.load(), Some(format));
        }
        cell.store(None);
        assert_eq!(cell.load(), None);
    }

    /// Sets the parameter as a host's automation would (the wrappers call this setter).
    fn set_format(params: &FieldglassParams, choice: FormatChoice) {
        use nice_plug::prelude::Param;
        let normalized = params.assumed_format.preview_normalized(choice);
        // SAFETY: the pointer is to a live parameter that no other thread uses in this test.
        unsafe {
            params
                .assumed_format
                .as_ptr()
                ._internal_set_normalized_value(normalized)
        };
    }

    #[test]
    fn a_host_stated_format_is_assumed_unless_the_user_chose_one() {
        let params = Arc::new(FieldglassParams::default());
        let buses = Buses::new(params.clone());
        assert_eq!(buses.config(), AmbisonicConfig::ACN_SN3D, "default");
        let n3d = AmbisonicConfig {
            ordering: AmbisonicOrdering::Acn,
            normalization: AmbisonicNormalization::N3d,
        };
        buses.host_stated(Some(n3d));
        assert_eq!(buses.config(), n3d, "host stated, user did not choose");
        assert_eq!(params.effective_format(), AmbiFormat::ACN_N3D);

        // The user picks FuMa: that wins over the host.
        set_format(&params, FormatChoice::Fuma);
        assert_eq!(params.assumed_format.value(), FormatChoice::Fuma);
        assert_eq!(params.effective_format(), AmbiFormat::FUMA);
        assert_eq!(
            config_of(params.effective_format()),
            AmbisonicConfig {
                ordering: AmbisonicOrdering::Fuma,
                normalization: AmbisonicNormalization::MaxN
            }
        );

        // Back at the default, a withdrawn statement leaves ACN/SN3D.
        set_format(&params, FormatChoice::AcnSn3d);
        buses.host_stated(None);
        assert_eq!(buses.config(), AmbisonicConfig::ACN_SN3D);
    }
}
