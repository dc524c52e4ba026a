//! Ambisonic channel formats: channel ordering, normalisation, and conversion to and from the
//! crate's internal ACN/SN3D convention (see the crate root).
//!
//! - [`AmbiFormat`] names a format (ordering + normalisation) and parses/prints its label.
//! - [`fuma`] holds the Furse–Malham channel order and the maxN weights (orders 0..=3).
//! - [`mixed_order`] holds the FuMa horizontal and mixed-order channel sets (3 to 16 channels)
//!   and [`MixedOrderExpander`], which fills in their absent components with zeros.
//! - [`ConversionPlan`] is a precomputed channel map plus gains; applying it is one multiply per
//!   channel with no branching on the format, and never allocates.

mod conversion;
mod error;
pub mod fuma;
pub mod mixed_order;

pub use conversion::{ConversionDirection, ConversionPlan};
pub use error::FormatError;
pub use mixed_order::{FUMA_CHANNEL_SETS, FumaChannelSet, MixedOrderExpander};

use crate::sh::{MAX_SH_ORDER, n3d_gain, order_degree};
use std::fmt;
use std::str::FromStr;

/// Order in which the channels of a stream are laid out.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum ChannelOrdering {
    /// Ambisonic Channel Number: channel index n(n+1)+m.
    Acn,
    /// Furse–Malham order W X Y Z R S T U V K L M N O P Q (defined to third order).
    Fuma,
}

/// Scaling of each spherical-harmonic component.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Normalization {
    /// Schmidt semi-normalised (the crate's internal convention; W = 1 for a unit plane wave).
    Sn3d,
    /// Fully normalised: SN3D·sqrt(2n+1).
    N3d,
    /// Furse–Malham weights: every component of order ≥ 1 peaks at |1| over the sphere, W
    /// carries 1/√2. Defined to third order. See [`fuma::maxn_gain`].
    MaxN,
}

impl Normalization {
    /// Highest order this normalisation is defined for (`None` = unlimited).
    pub fn max_order(self) -> Option<usize> {
        match self {
            Normalization::Sn3d | Normalization::N3d => None,
            Normalization::MaxN => Some(fuma::MAX_FUMA_ORDER),
        }
    }

    /// Gain k such that `value_in_this_normalisation = k · value_sn3d` for channel `acn`, or
    /// `None` if the normalisation is not defined at that order.
    pub fn gain_from_sn3d(self, acn: usize) -> Option<f64> {
        match self {
            Normalization::Sn3d => Some(1.0),
            Normalization::N3d => Some(n3d_gain(order_degree(acn).0)),
            Normalization::MaxN => fuma::maxn_gain(acn),
        }
    }
}

impl ChannelOrdering {
    /// Highest order this ordering is defined for (`None` = unlimited).
    pub fn max_order(self) -> Option<usize> {
        match self {
            ChannelOrdering::Acn => None,
            ChannelOrdering::Fuma => Some(fuma::MAX_FUMA_ORDER),
        }
    }

    /// ACN index carried by stream channel `channel` under this ordering, or `None` if the
    /// ordering does not define that channel.
    pub fn acn_of_channel(self, channel: usize) -> Option<usize> {
        match self {
            ChannelOrdering::Acn => Some(channel),
            ChannelOrdering::Fuma => fuma::fuma_to_acn(channel),
        }
    }

    /// Stream channel that carries ACN index `acn` under this ordering, or `None` if undefined.
    pub fn channel_of_acn(self, acn: usize) -> Option<usize> {
        match self {
            ChannelOrdering::Acn => Some(acn),
            ChannelOrdering::Fuma => fuma::acn_to_fuma(acn),
        }
    }
}

/// An ambisonic stream format: how channels are ordered and how each is scaled.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct AmbiFormat {
    pub ordering: ChannelOrdering,
    pub normalization: Normalization,
}

impl AmbiFormat {
    /// AmbiX: ACN order, SN3D (the internal convention).
    pub const ACN_SN3D: AmbiFormat = AmbiFormat {
        ordering: ChannelOrdering::Acn,
        normalization: Normalization::Sn3d,
    };
    /// ACN order, N3D (orthonormal) scaling.
    pub const ACN_N3D: AmbiFormat = AmbiFormat {
        ordering: ChannelOrdering::Acn,
        normalization: Normalization::N3d,
    };
    /// Furse–Malham: FuMa order with maxN weights (W at 1/√2), to third order.
    pub const FUMA: AmbiFormat = AmbiFormat {
        ordering: ChannelOrdering::Fuma,
        normalization: Normalization::MaxN,
    };
    /// ACN order with maxN weights (W at 1/√2), to third order.
    pub const ACN_MAXN: AmbiFormat = AmbiFormat {
        ordering: ChannelOrdering::Acn,
        normalization: Normalization::MaxN,
    };

    /// Every format the format check considers, in order of how common it is.
    pub const ALL: [AmbiFormat; 4] = [
        AmbiFormat::ACN_SN3D,
        AmbiFormat::ACN_N3D,
        AmbiFormat::FUMA,
        AmbiFormat::ACN_MAXN,
    ];

    /// Short machine label: "acn-sn3d", "acn-n3d", "fuma", "acn-maxn" (other combinations
    /// such as FuMa order with SN3D give "fuma-sn3d" / "fuma-n3d").
    pub fn label(&self) -> &'static str {
        match (self.ordering, self.normalization) {
            (ChannelOrdering::Acn, Normalization::Sn3d) => "acn-sn3d",
            (ChannelOrdering::Acn, Normalization::N3d) => "acn-n3d",
            (ChannelOrdering::Acn, Normalization::MaxN) => "acn-maxn",
            (ChannelOrdering::Fuma, Normalization::MaxN) => "fuma",
            (ChannelOrdering::Fuma, Normalization::Sn3d) => "fuma-sn3d",
            (ChannelOrdering::Fuma, Normalization::N3d) => "fuma-n3d",
        }
    }

    /// Name for people: "AmbiX (ACN/SN3D)", "ACN/N3D", "FuMa", "ACN/maxN".
    pub fn human_name(&self) -> &'static str {
        match (self.ordering, self.normalization) {
            (ChannelOrdering::Acn, Normalization::Sn3d) => "AmbiX (ACN/SN3D)",
            (ChannelOrdering::Acn, Normalization::N3d) => "ACN/N3D",
            (ChannelOrdering::Acn, Normalization::MaxN) => "ACN/maxN",
            (ChannelOrdering::Fuma, Normalization::MaxN) => "FuMa",
            (ChannelOrdering::Fuma, Normalization::Sn3d) => "FuMa order/SN3D",
            (ChannelOrdering::Fuma, Normalization::N3d) => "FuMa order/N3D",
        }
    }

    /// Highest order the format is defined for: `None` = unlimited (ACN/SN3D, ACN/N3D),
    /// `Some(3)` for FuMa and maxN.
    pub fn max_order(&self) -> Option<usize> {
        match (self.ordering.max_order(), self.normalization.max_order()) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (limit, None) | (None, limit) => limit,
        }
    }

    /// `Ok(())` if streams of `order` exist in this format and within [`MAX_SH_ORDER`].
    pub fn check_order(&self, order: usize) -> Result<(), FormatError> {
        if let Some(max_order) = self.max_order()
            && order > max_order
        {
            return Err(FormatError::OrderAboveFormatLimit {
                format: *self,
                order,
                max_order,
            });
        }
        if order > MAX_SH_ORDER {
            return Err(FormatError::OrderAboveSupported {
                order,
                max_order: MAX_SH_ORDER,
            });
        }
        Ok(())
    }
}

impl fmt::Display for AmbiFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.human_name())
    }
}

/// Valid labels for [`AmbiFormat::from_str`], as listed in its error message.
pub const FORMAT_LABELS: [&str; 4] = ["acn-sn3d", "acn-n3d", "fuma", "acn-maxn"];

impl FromStr for AmbiFormat {
    type Err = FormatError;

    /// Parses a label from [`FORMAT_LABELS`] (case-insensitive; "ambix" is accepted for
    /// "acn-sn3d"). The error message lists the valid names.
    fn from_str(text: &str) -> Result<Self, Self::Err> {
        let wanted = text.trim().to_ascii_lowercase();
        if wanted == "ambix" {
            return Ok(AmbiFormat::ACN_SN3D);
        }
        AmbiFormat::ALL
            .into_iter()
            .find(|format| format.label() == wanted)
            .ok_or_else(|| FormatError::UnknownFormat(text.to_string()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels_round_trip_and_errors_list_names() {
        for format in AmbiFormat::ALL {
            assert_eq!(format.label().parse::<AmbiFormat>().unwrap(), format);
        }
        assert_eq!("AmbiX".parse::<AmbiFormat>().unwrap(), AmbiFormat::ACN_SN3D);
        let message = "b-format-ish"
            .parse::<AmbiFormat>()
            .unwrap_err()
            .to_string();
        assert!(message.contains("b-format-ish"), "{message}");
        for label in FORMAT_LABELS {
            assert!(message.contains(label), "{message}");
        }
    }

    #[test]
    fn names_and_order_limits() {
        assert_eq!(AmbiFormat::ACN_SN3D.human_name(), "AmbiX (ACN/SN3D)");
        assert_eq!(AmbiFormat::ACN_N3D.human_name(), "ACN/N3D");
        assert_eq!(AmbiFormat::FUMA.human_name(), "FuMa");
        assert_eq!(AmbiFormat::ACN_MAXN.human_name(), "ACN/maxN");
        assert_eq!(AmbiFormat::ACN_SN3D.max_order(), None);
        assert_eq!(AmbiFormat::ACN_N3D.max_order(), None);
        assert_eq!(AmbiFormat::FUMA.max_order(), Some(3));
        assert_eq!(AmbiFormat::ACN_MAXN.max_order(), Some(3));
        let err = AmbiFormat::FUMA.check_order(4).unwrap_err().to_string();
        assert!(err.contains('4') && err.contains("FuMa"), "{err}");
        assert!(AmbiFormat::ACN_N3D.check_order(MAX_SH_ORDER + 1).is_err());
    }
}
