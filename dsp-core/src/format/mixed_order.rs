//! Furse–Malham (FuMa) horizontal and mixed-order channel sets, and their expansion to a full
//! order.
//!
//! A FuMa file need not carry every component of its order: the scheme also defines horizontal
//! sets (only the |m| = n components above first order) and mixed-order sets (a higher
//! horizontal order over a lower height order). The channel count names the set, the file
//! carries its components in FuMa letter order with the absent ones left out, and the weights
//! are the ordinary maxN weights. The table below is the one published with the AMB B-format
//! file convention (M. Leese, "File Format for B-Format" and "Spherical Harmonic Components",
//! Ambisonic pages on members.tripod.com/martin_leese; R. Dobson, "WAVE-FORMAT-EXTENSIBLE and
//! B-format audio", dream.cs.bath.ac.uk, for the 3, 4, 5 and 6-channel sets):
//!
//! | channels | horizontal order | height order | components |
//! |---|---|---|---|
//! | 3 | 1 | 0 | W X Y |
//! | 4 | 1 | 1 | W X Y Z |
//! | 5 | 2 | 0 | W X Y U V |
//! | 6 | 2 | 1 | W X Y Z U V |
//! | 7 | 3 | 0 | W X Y U V P Q |
//! | 8 | 3 | 1 | W X Y Z U V P Q |
//! | 9 | 2 | 2 | W X Y Z R S T U V |
//! | 11 | 3 | 2 | W X Y Z R S T U V P Q |
//! | 16 | 3 | 3 | W X Y Z R S T U V K L M N O P Q |
//!
//! These counts only mean a mixed-order set when FuMa is assumed: an ACN stream of 5 or 6
//! channels is first order plus non-spatial channels (see `engine::layout`), and the expander
//! is not consulted for it.
//!
//! [`MixedOrderExpander`] turns a planar block of such a file into the full-order FuMa layout
//! ((N+1)² channels, FuMa letter order) with zeros in the absent components, so the ordinary
//! FuMa → ACN/SN3D conversion applies unchanged. It owns fixed-size tables and never allocates.

use super::fuma::{FUMA_LETTERS, FUMA_TO_ACN, MAX_FUMA_ORDER};
use super::{AmbiFormat, ChannelOrdering, FormatError};
use crate::sh::channel_count;

/// Channels of a full third-order FuMa stream (the most any set expands to).
const MAX_EXPANDED_CHANNELS: usize = channel_count(MAX_FUMA_ORDER);

/// One FuMa channel set: which components a file with this many channels carries.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FumaChannelSet {
    /// Channels in the file.
    pub channels: usize,
    /// Highest order of the horizontal (|m| = n) components: the full order the set expands to.
    pub horizontal_order: usize,
    /// Highest order carried with all its components (0 = horizontal only).
    pub height_order: usize,
    /// The FuMa channel (index into W X Y Z R S T U V K L M N O P Q) carried by each file
    /// channel, indexed by [file channel].
    pub components: &'static [usize],
}

/// FuMa channel indices of the letters, for readable tables.
const W: usize = 0;
const X: usize = 1;
const Y: usize = 2;
const Z: usize = 3;
const R: usize = 4;
const S: usize = 5;
const T: usize = 6;
const U: usize = 7;
const V: usize = 8;
const K: usize = 9;
const L: usize = 10;
const M: usize = 11;
const N: usize = 12;
const O: usize = 13;
const P: usize = 14;
const Q: usize = 15;

/// Every FuMa channel set, by channel count (table in the module docs and its sources).
pub const FUMA_CHANNEL_SETS: [FumaChannelSet; 9] = [
    set(3, 1, 0, &[W, X, Y]),
    set(4, 1, 1, &[W, X, Y, Z]),
    set(5, 2, 0, &[W, X, Y, U, V]),
    set(6, 2, 1, &[W, X, Y, Z, U, V]),
    set(7, 3, 0, &[W, X, Y, U, V, P, Q]),
    set(8, 3, 1, &[W, X, Y, Z, U, V, P, Q]),
    set(9, 2, 2, &[W, X, Y, Z, R, S, T, U, V]),
    set(11, 3, 2, &[W, X, Y, Z, R, S, T, U, V, P, Q]),
    set(16, 3, 3, &[W, X, Y, Z, R, S, T, U, V, K, L, M, N, O, P, Q]),
];

const fn set(
    channels: usize,
    horizontal_order: usize,
    height_order: usize,
    components: &'static [usize],
) -> FumaChannelSet {
    FumaChannelSet {
        channels,
        horizontal_order,
        height_order,
        components,
    }
}

impl FumaChannelSet {
    /// The set a FuMa file with `channels` channels carries, or `None` if FuMa defines none.
    pub fn for_channel_count(channels: usize) -> Option<&'static FumaChannelSet> {
        FUMA_CHANNEL_SETS.iter().find(|s| s.channels == channels)
    }

    /// The full order the set belongs to (its horizontal order).
    pub fn full_order(&self) -> usize {
        self.horizontal_order
    }

    /// Channels after expansion to the full order: (N+1)².
    pub fn expanded_channels(&self) -> usize {
        channel_count(self.full_order())
    }

    /// Whether the set carries every component of its order (4, 9 and 16 channels).
    pub fn is_full(&self) -> bool {
        self.channels == self.expanded_channels()
    }

    /// The component letters in file order, e.g. "WXYUV".
    pub fn letters(&self) -> String {
        self.components.iter().map(|&c| FUMA_LETTERS[c]).collect()
    }
}

/// Expands planar blocks of a FuMa channel set into the full-order FuMa layout, with zeros in
/// the absent components. Plain data: building and using it never allocates.
#[derive(Clone, Copy, Debug)]
pub struct MixedOrderExpander {
    set: &'static FumaChannelSet,
    /// File channel feeding each expanded channel, indexed by [expanded FuMa channel].
    source: [Option<usize>; MAX_EXPANDED_CHANNELS],
    /// Expanded FuMa channels with no file channel, ascending; the first `absent_count` count.
    absent: [usize; MAX_EXPANDED_CHANNELS],
    absent_count: usize,
}

impl MixedOrderExpander {
    /// Expander for a FuMa file of `channels` channels, or `None` if FuMa defines no set of
    /// that size (the caller then treats the file as a full order plus extra channels).
    pub fn for_channel_count(channels: usize) -> Option<Self> {
        FumaChannelSet::for_channel_count(channels).map(Self::new)
    }

    /// The expander an input needs: `Some` only when the stream is assumed to be in FuMa
    /// channel order and `channels` is one of the horizontal or mixed-order sets (3, 5, 6, 7,
    /// 8, 11). Full sets (4, 9, 16) need no expansion, and in ACN order these counts keep
    /// their usual meaning (a full order plus non-spatial channels), so both give `None`.
    pub fn for_stream(assumed: AmbiFormat, channels: usize) -> Option<Self> {
        if assumed.ordering != ChannelOrdering::Fuma {
            return None;
        }
        Self::for_channel_count(channels).filter(|expander| !expander.set.is_full())
    }

    /// Expander for `set`.
    pub fn new(set: &'static FumaChannelSet) -> Self {
        let mut source = [None; MAX_EXPANDED_CHANNELS];
        for (file_channel, &component) in set.components.iter().enumerate() {
            source[component] = Some(file_channel);
        }
        let mut absent = [0; MAX_EXPANDED_CHANNELS];
        let mut absent_count = 0;
        for (expanded, feed) in source.iter().take(set.expanded_channels()).enumerate() {
            if feed.is_none() {
                absent[absent_count] = expanded;
                absent_count += 1;
            }
        }
        Self {
            set,
            source,
            absent,
            absent_count,
        }
    }

    /// The channel set this expander reads.
    pub fn set(&self) -> &'static FumaChannelSet {
        self.set
    }

    /// The full order of the expanded stream.
    pub fn order(&self) -> usize {
        self.set.full_order()
    }

    /// Channels in the file.
    pub fn input_channels(&self) -> usize {
        self.set.channels
    }

    /// Channels after expansion: (N+1)².
    pub fn output_channels(&self) -> usize {
        self.set.expanded_channels()
    }

    /// Channels of the expanded (full-order FuMa) layout that the file does not carry,
    /// ascending. Their expanded signals are zero; they are absent, not silent.
    pub fn absent_channels(&self) -> &[usize] {
        &self.absent[..self.absent_count]
    }

    /// The absent channels as ACN indices (what they become after conversion to ACN/SN3D),
    /// in expanded FuMa order. Allocation-free.
    pub fn absent_acn_channels(&self) -> impl Iterator<Item = usize> + '_ {
        self.absent_channels().iter().map(|&fuma| FUMA_TO_ACN[fuma])
    }

    /// The file channel feeding expanded channel `expanded`, or `None` when it is absent (or
    /// beyond the expanded layout).
    pub fn source_channel(&self, expanded: usize) -> Option<usize> {
        if expanded < self.output_channels() {
            self.source[expanded]
        } else {
            None
        }
    }

    /// Copies a planar block in file channel order (`input`, one slice per file channel) into
    /// `output` (one slice per expanded channel, FuMa letter order), writing zeros into the
    /// absent channels. Every slice must have the same length. Never allocates.
    pub fn expand(&self, input: &[&[f32]], output: &mut [&mut [f32]]) -> Result<(), FormatError> {
        check_length(
            "mixed-order input channel list",
            self.input_channels(),
            input.len(),
        )?;
        check_length(
            "mixed-order output channel list",
            self.output_channels(),
            output.len(),
        )?;
        let frames = input.first().map_or(0, |c| c.len());
        for channel in input.iter() {
            check_length("mixed-order input channel", frames, channel.len())?;
        }
        for channel in output.iter() {
            check_length("mixed-order output channel", frames, channel.len())?;
        }
        for (expanded, out) in output.iter_mut().enumerate() {
            match self.source[expanded] {
                Some(file_channel) => out.copy_from_slice(input[file_channel]),
                None => out.fill(0.0),
            }
        }
        Ok(())
    }
}

fn check_length(what: &'static str, expected: usize, got: usize) -> Result<(), FormatError> {
    if expected == got {
        Ok(())
    } else {
        Err(FormatError::WrongLength {
            what,
            expected,
            got,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_matches_the_published_letters() {
        // Letter strings and orders as listed in the table of the module docs (sources there).
        let expected = [
            (3, 1, 0, "WXY"),
            (4, 1, 1, "WXYZ"),
            (5, 2, 0, "WXYUV"),
            (6, 2, 1, "WXYZUV"),
            (7, 3, 0, "WXYUVPQ"),
            (8, 3, 1, "WXYZUVPQ"),
            (9, 2, 2, "WXYZRSTUV"),
            (11, 3, 2, "WXYZRSTUVPQ"),
            (16, 3, 3, "WXYZRSTUVKLMNOPQ"),
        ];
        for (channels, horizontal, height, letters) in expected {
            let set = FumaChannelSet::for_channel_count(channels).unwrap();
            assert_eq!(set.components.len(), channels);
            assert_eq!(
                (set.horizontal_order, set.height_order),
                (horizontal, height)
            );
            assert_eq!(set.letters(), letters);
        }
        for channels in [1, 2, 10, 12, 13, 14, 15, 17, 25] {
            assert!(
                FumaChannelSet::for_channel_count(channels).is_none(),
                "{channels}"
            );
        }
    }

    #[test]
    fn only_fuma_order_with_a_partial_set_is_expanded() {
        for channels in [3, 5, 6, 7, 8, 11] {
            let expander = MixedOrderExpander::for_stream(AmbiFormat::FUMA, channels).unwrap();
            assert_eq!(expander.input_channels(), channels);
        }
        for channels in [4, 9, 16, 10, 18, 25] {
            assert!(MixedOrderExpander::for_stream(AmbiFormat::FUMA, channels).is_none());
        }
        // ACN streams of 5 or 6 channels stay first order plus extra channels.
        for format in [
            AmbiFormat::ACN_SN3D,
            AmbiFormat::ACN_N3D,
            AmbiFormat::ACN_MAXN,
        ] {
            for channels in [3, 5, 6, 7, 8, 11] {
                assert!(MixedOrderExpander::for_stream(format, channels).is_none());
            }
        }
        // Absent W X Y U V → Z R S T, i.e. ACN 2, 6, 7, 5 (FuMa letter ↔ ACN pairing of the
        // ambiX paper, Nachbar et al. 2011: Z2 R6 S7 T5).
        let hh = MixedOrderExpander::for_stream(AmbiFormat::FUMA, 5).unwrap();
        assert_eq!(hh.absent_acn_channels().collect::<Vec<_>>(), [2, 6, 7, 5]);
    }

    #[test]
    fn components_follow_the_order_rule() {
        // Consistency with the SH degrees: a set carries every component of order ≤ its height
        // order and only the |m| = n (horizontal) ones above it, in ascending FuMa order.
        use crate::sh::order_degree;
        for set in &FUMA_CHANNEL_SETS {
            let wanted: Vec<usize> = (0..set.expanded_channels())
                .filter(|&c| {
                    let (n, m) = order_degree(FUMA_TO_ACN[c]);
                    n <= set.height_order || m.unsigned_abs() as usize == n
                })
                .collect();
            assert_eq!(
                set.components,
                wanted.as_slice(),
                "{} channels",
                set.channels
            );
        }
    }

    #[test]
    fn absent_channels_are_the_complement() {
        let hh = MixedOrderExpander::for_channel_count(5).unwrap();
        assert_eq!((hh.order(), hh.output_channels()), (2, 9));
        assert_eq!(hh.absent_channels(), &[Z, R, S, T]);
        let ffh = MixedOrderExpander::for_channel_count(11).unwrap();
        assert_eq!(ffh.absent_channels(), &[K, L, M, N, O]);
        let full = MixedOrderExpander::for_channel_count(16).unwrap();
        assert!(full.absent_channels().is_empty() && full.set().is_full());
        assert_eq!(hh.source_channel(U), Some(3));
        assert_eq!(hh.source_channel(Z), None);
        assert_eq!(hh.source_channel(9), None);
    }

    #[test]
    fn expand_places_channels_and_rejects_wrong_shapes() {
        let expander = MixedOrderExpander::for_channel_count(3).unwrap();
        let (w, x, y) = ([1.0f32, 2.0], [3.0f32, 4.0], [5.0f32, 6.0]);
        let mut out = [[9.0f32; 2]; 4];
        {
            let mut refs: Vec<&mut [f32]> = out.iter_mut().map(|c| c.as_mut_slice()).collect();
            expander.expand(&[&w, &x, &y], &mut refs).unwrap();
        }
        assert_eq!(out, [w, x, y, [0.0; 2]]);
        let mut refs: Vec<&mut [f32]> = out.iter_mut().map(|c| c.as_mut_slice()).collect();
        assert!(matches!(
            expander.expand(&[&w, &x], &mut refs),
            Err(FormatError::WrongLength {
                expected: 3,
                got: 2,
                ..
            })
        ));
        assert!(expander.expand(&[&w, &x, &y[..1]], &mut refs).is_err());
        let mut short = [[0.0f32; 2]; 3];
        let mut refs: Vec<&mut [f32]> = short.iter_mut().map(|c| c.as_mut_slice()).collect();
        assert!(expander.expand(&[&w, &x, &y], &mut refs).is_err());
    }
}
