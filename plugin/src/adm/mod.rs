//! ADM metadata of BW64 files (ITU-R BS.2088 `chna` + ITU-R BS.2076 `axml`, with the common
//! definitions of ITU-R BS.2094): which tracks form an HOA pack, each track's order and degree,
//! and the declared normalization. The scanner uses the declaration as its default assumption
//! and the format check compares it with the signal.

mod axml;
mod chna;
pub mod common_definitions;
mod write;

pub use chna::{ChnaEntry, chna_body, parse_chna};
pub use write::hoa_axml;

use fieldglass_dsp::format::{AmbiFormat, ChannelOrdering, Normalization, fuma};

/// A normalization as ADM declares it (compared case-insensitively).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DeclaredNormalization {
    Sn3d,
    N3d,
    /// FuMa weights: maxN with W at 1/√2.
    Fuma,
}

impl DeclaredNormalization {
    /// The spelling ADM uses.
    pub fn label(self) -> &'static str {
        match self {
            Self::Sn3d => "SN3D",
            Self::N3d => "N3D",
            Self::Fuma => "FuMa",
        }
    }

    fn parse(text: &str) -> Option<Self> {
        [Self::Sn3d, Self::N3d, Self::Fuma]
            .into_iter()
            .find(|n| n.label().eq_ignore_ascii_case(text.trim()))
    }

    fn weights(self) -> Normalization {
        match self {
            Self::Sn3d => Normalization::Sn3d,
            Self::N3d => Normalization::N3d,
            Self::Fuma => Normalization::MaxN,
        }
    }
}

/// One track of the HOA pack.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct HoaTrack {
    /// File channel, 0-based.
    pub file_channel: usize,
    pub order: usize,
    pub degree: i32,
    pub acn: usize,
}

/// A track outside the HOA pack (an object, a bed): listed, not analysed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct OtherTrack {
    pub file_channel: usize,
    /// ADM type ("Objects", "DirectSpeakers", …) or "unknown".
    pub kind: String,
    pub name: String,
}

/// What the file's ADM metadata declares.
#[derive(Clone, Debug, PartialEq)]
pub struct AdmDeclaration {
    pub pack_id: String,
    pub pack_name: String,
    pub normalization: DeclaredNormalization,
    pub order: usize,
    /// HOA tracks in file order.
    pub hoa_tracks: Vec<HoaTrack>,
    pub other_tracks: Vec<OtherTrack>,
    /// Resolved from the BS.2094 common definitions (no `axml`, or IDs it does not define).
    pub uses_common_definitions: bool,
}

impl AdmDeclaration {
    /// The format the declaration amounts to once the tracks are in [`Self::route`]'s order.
    pub fn format(&self) -> AmbiFormat {
        let ordering = if self.route().is_none() && self.is_fuma_order() {
            ChannelOrdering::Fuma
        } else {
            ChannelOrdering::Acn
        };
        AmbiFormat {
            ordering,
            normalization: self.normalization.weights(),
        }
    }

    /// For each ACN, the file channel carrying it — or None when the HOA tracks are already the
    /// file's channels 0 … K−1 in ACN or FuMa order and nothing else is in the file.
    pub fn route(&self) -> Option<Vec<usize>> {
        let in_place = self.other_tracks.is_empty()
            && self
                .hoa_tracks
                .iter()
                .enumerate()
                .all(|(i, t)| t.file_channel == i);
        let acn_order = self.hoa_tracks.iter().enumerate().all(|(i, t)| t.acn == i);
        if in_place && (acn_order || self.is_fuma_order()) {
            return None;
        }
        let mut route = vec![0; self.hoa_tracks.len()];
        for t in &self.hoa_tracks {
            route[t.acn] = t.file_channel;
        }
        Some(route)
    }

    fn is_fuma_order(&self) -> bool {
        self.hoa_tracks.len() <= fuma::FUMA_TO_ACN.len()
            && self
                .hoa_tracks
                .iter()
                .zip(fuma::FUMA_TO_ACN)
                .all(|(t, acn)| t.acn == acn)
    }
}

/// Reads the declaration from the bodies of `chna` and `axml`. None when the file carries no
/// `chna` (no ADM); `Some(Err(why))` when the metadata cannot be used (metadata-unreadable).
pub fn read_declaration(
    chna: Option<&[u8]>,
    axml: Option<&[u8]>,
    file_channels: usize,
) -> Option<Result<AdmDeclaration, String>> {
    match chna {
        None => axml.map(|_| {
            Err("the file has an axml chunk but no chna chunk to tie its tracks to channels".into())
        }),
        Some(chna) => Some(resolve(chna, axml, file_channels)),
    }
}

fn resolve(
    chna: &[u8],
    axml: Option<&[u8]>,
    file_channels: usize,
) -> Result<AdmDeclaration, String> {
    let entries = parse_chna(chna, file_channels)?;
    let index = axml.map(axml::parse_axml).transpose()?.unwrap_or_default();
    let mut hoa = Vec::new();
    let mut others = Vec::new();
    let mut packs: Vec<String> = Vec::new();
    let mut normalizations = Vec::new();
    let mut uses_common = false;
    for entry in &entries {
        let uid = index.track_uids.get(&entry.track_uid);
        let track_ref = if entry.track_format_ref.is_empty() {
            uid.and_then(|u| u.track_format.clone().or(u.channel_format.clone()))
                .unwrap_or_default()
        } else {
            entry.track_format_ref.clone()
        };
        let pack_ref = if entry.pack_format_ref.is_empty() {
            uid.and_then(|u| u.pack_format.clone()).unwrap_or_default()
        } else {
            entry.pack_format_ref.clone()
        };
        // Track format → stream → channel format, from the XML or else the common definitions.
        let channel_id = if track_ref.starts_with("AC_") {
            Some(track_ref.clone())
        } else {
            index
                .track_to_stream
                .get(&track_ref)
                .and_then(|s| index.stream_to_channel.get(s))
                .cloned()
        };
        let declared = match channel_id.as_ref().and_then(|id| index.channels.get(id)) {
            Some(channel) => {
                if !axml::is_hoa(&channel.kind) {
                    others.push(OtherTrack {
                        file_channel: entry.track,
                        kind: if channel.kind.is_empty() {
                            "unknown".into()
                        } else {
                            channel.kind.clone()
                        },
                        name: channel.name.clone(),
                    });
                    continue;
                }
                let (Some(order), Some(degree)) = (channel.order, channel.degree) else {
                    return Err(format!(
                        "the HOA channel format {} of track {} has no order or degree",
                        channel_id.unwrap_or_default(),
                        entry.track + 1
                    ));
                };
                let pack_norm = index
                    .packs
                    .get(&pack_ref)
                    .and_then(|p| p.normalization.clone());
                // BS.2076-2: SN3D when neither the block nor the pack says otherwise.
                let text = channel
                    .normalization
                    .clone()
                    .or(pack_norm)
                    .unwrap_or_else(|| "SN3D".into());
                let normalization = DeclaredNormalization::parse(&text).ok_or_else(|| {
                    format!(
                        "track {} declares the normalization '{text}' (SN3D, N3D or FuMa expected)",
                        entry.track + 1
                    )
                })?;
                (order, degree, normalization)
            }
            None => {
                let common = if track_ref.starts_with("AC_") {
                    common_definitions::channel_format(&track_ref)
                } else {
                    common_definitions::track_format(&track_ref)
                };
                match common {
                    Some((order, degree, normalization)) => {
                        uses_common = true;
                        (order as i64, degree as i64, normalization)
                    }
                    None => {
                        others.push(OtherTrack {
                            file_channel: entry.track,
                            kind: "unknown".into(),
                            name: format!("{track_ref} (not defined in the file's axml)"),
                        });
                        continue;
                    }
                }
            }
        };
        let (order, degree, normalization) = declared;
        if !(0..=20).contains(&order) || degree.abs() > order {
            return Err(format!(
                "track {} declares order {order}, degree {degree}: |degree| must not exceed the order",
                entry.track + 1
            ));
        }
        let (order, degree) = (order as usize, degree as i32);
        hoa.push(HoaTrack {
            file_channel: entry.track,
            order,
            degree,
            acn: (order * order + order).saturating_add_signed(degree as isize),
        });
        normalizations.push(normalization);
        if !packs.contains(&pack_ref) {
            packs.push(pack_ref);
        }
    }
    if hoa.is_empty() {
        return Err("the ADM metadata declares no HOA tracks".into());
    }
    hoa.sort_by_key(|t| t.file_channel);
    others.sort_by_key(|t| t.file_channel);
    let normalization = normalizations[0];
    if normalizations.iter().any(|&n| n != normalization) {
        return Err("the HOA tracks declare different normalizations".into());
    }
    if packs.len() > 1 {
        return Err(format!(
            "the HOA tracks belong to {} packs ({}); one HOA pack is supported",
            packs.len(),
            packs.join(", ")
        ));
    }
    let order = hoa.iter().map(|t| t.order).max().unwrap_or(0);
    let mut seen = vec![false; (order + 1) * (order + 1)];
    for t in &hoa {
        if std::mem::replace(&mut seen[t.acn], true) {
            return Err(format!(
                "two tracks declare order {}, degree {}",
                t.order, t.degree
            ));
        }
    }
    if seen.iter().any(|s| !s) || hoa.len() != seen.len() {
        return Err(format!(
            "the HOA tracks are not a full order-{order} set ({} of {} components)",
            hoa.len(),
            seen.len()
        ));
    }
    if normalization == DeclaredNormalization::Fuma && order > fuma::MAX_FUMA_ORDER {
        return Err(format!(
            "FuMa normalization is defined to third order; the pack is order {order}"
        ));
    }
    let pack_id = packs.pop().unwrap_or_default();
    let pack_name = index
        .packs
        .get(&pack_id)
        .map(|p| p.name.clone())
        .filter(|n| !n.is_empty())
        .or_else(|| common_definitions::pack_format(&pack_id).map(|(name, _, _)| name))
        .unwrap_or_default();
    Ok(AdmDeclaration {
        pack_id,
        pack_name,
        normalization,
        order,
        hoa_tracks: hoa,
        other_tracks: others,
        uses_common_definitions: uses_common,
    })
}
