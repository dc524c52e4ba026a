//! The parts of the ADM XML (ITU-R BS.2076, carried in a BW64 `axml` chunk) that say what the
//! tracks are: track format → stream format → channel format (with its block's order, degree
//! and normalization), and pack formats with their type. Everything else is ignored.
//!
//! Parsed with `roxmltree` with DTDs refused (no entity expansion) and a node limit, so hostile
//! XML is an error, never a hang or a panic. Element names are matched without namespace.

use std::collections::HashMap;

/// Most XML nodes parsed: ADM for a few hundred tracks needs far fewer.
const MAX_NODES: u32 = 1_000_000;

/// An audioChannelFormat.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ChannelFormat {
    pub name: String,
    /// typeDefinition ("HOA", "Objects", …) or, when absent, the typeLabel ("0004" = HOA).
    pub kind: String,
    pub order: Option<i64>,
    pub degree: Option<i64>,
    pub normalization: Option<String>,
}

/// An audioPackFormat.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct PackFormat {
    pub name: String,
    pub kind: String,
    /// BS.2076-2 allows the normalization on an HOA pack as well as on each block.
    pub normalization: Option<String>,
}

/// An audioTrackUID's own references (used when `chna` leaves them out).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct TrackUid {
    pub track_format: Option<String>,
    pub channel_format: Option<String>,
    pub pack_format: Option<String>,
}

/// The index of an axml document.
#[derive(Debug, Default)]
pub struct AdmIndex {
    pub track_to_stream: HashMap<String, String>,
    pub stream_to_channel: HashMap<String, String>,
    pub channels: HashMap<String, ChannelFormat>,
    pub packs: HashMap<String, PackFormat>,
    pub track_uids: HashMap<String, TrackUid>,
}

/// Whether a typeDefinition / typeLabel names HOA ("HOA" or "0004", any case).
pub fn is_hoa(kind: &str) -> bool {
    kind.eq_ignore_ascii_case("HOA") || kind == "0004"
}

/// Parses the XML of an `axml` chunk.
pub fn parse_axml(bytes: &[u8]) -> Result<AdmIndex, String> {
    let text = std::str::from_utf8(bytes)
        .map_err(|e| format!("the axml chunk is not UTF-8 text ({e})"))?;
    // Some writers pad the chunk with NULs after the document.
    let text = text.trim_end_matches('\0');
    let options = roxmltree::ParsingOptions {
        allow_dtd: false,
        nodes_limit: MAX_NODES,
        ..roxmltree::ParsingOptions::default()
    };
    let doc = roxmltree::Document::parse_with_options(text, options)
        .map_err(|e| format!("the axml chunk is not well-formed XML ({e})"))?;
    let mut index = AdmIndex::default();
    for node in doc.descendants().filter(|n| n.is_element()) {
        let attr = |name: &str| node.attribute(name).map(str::to_owned);
        let child_text = |name: &str| {
            node.children()
                .find(|c| c.is_element() && c.tag_name().name() == name)
                .and_then(|c| c.text())
                .map(|t| t.trim().to_owned())
        };
        let kind = || {
            attr("typeDefinition")
                .or_else(|| attr("typeLabel"))
                .unwrap_or_default()
        };
        match node.tag_name().name() {
            "audioTrackFormat" => {
                if let (Some(id), Some(stream)) = (
                    attr("audioTrackFormatID"),
                    child_text("audioStreamFormatIDRef"),
                ) {
                    index.track_to_stream.insert(id, stream);
                }
            }
            "audioStreamFormat" => {
                if let (Some(id), Some(channel)) = (
                    attr("audioStreamFormatID"),
                    child_text("audioChannelFormatIDRef"),
                ) {
                    index.stream_to_channel.insert(id, channel);
                }
            }
            "audioChannelFormat" => {
                let Some(id) = attr("audioChannelFormatID") else {
                    continue;
                };
                // HOA channels are static: the first block says it all.
                let block = node
                    .children()
                    .find(|c| c.is_element() && c.tag_name().name() == "audioBlockFormat");
                let block_text = |name: &str| {
                    block.and_then(|b| {
                        b.children()
                            .find(|c| c.is_element() && c.tag_name().name() == name)
                            .and_then(|c| c.text())
                            .map(|t| t.trim().to_owned())
                    })
                };
                let number = |name: &str| -> Result<Option<i64>, String> {
                    block_text(name)
                        .map(|t| {
                            t.parse::<i64>().map_err(|_| {
                                format!("{id} has a {name} of '{t}', which is not a whole number")
                            })
                        })
                        .transpose()
                };
                index.channels.insert(
                    id.clone(),
                    ChannelFormat {
                        name: attr("audioChannelFormatName").unwrap_or_default(),
                        kind: kind(),
                        order: number("order")?,
                        degree: number("degree")?,
                        normalization: block_text("normalization"),
                    },
                );
            }
            "audioPackFormat" => {
                if let Some(id) = attr("audioPackFormatID") {
                    index.packs.insert(
                        id,
                        PackFormat {
                            name: attr("audioPackFormatName").unwrap_or_default(),
                            kind: kind(),
                            normalization: attr("normalization")
                                .or_else(|| child_text("normalization")),
                        },
                    );
                }
            }
            "audioTrackUID" => {
                if let Some(uid) = attr("UID") {
                    index.track_uids.insert(
                        uid,
                        TrackUid {
                            track_format: child_text("audioTrackFormatIDRef"),
                            channel_format: child_text("audioChannelFormatIDRef"),
                            pack_format: child_text("audioPackFormatIDRef"),
                        },
                    );
                }
            }
            _ => {}
        }
    }
    Ok(index)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hostile_xml_is_an_error() {
        // An entity-expansion bomb needs a DTD, which is refused.
        let bomb = br#"<?xml version="1.0"?><!DOCTYPE a [<!ENTITY b "bbbbbbbb">
            <!ENTITY c "&b;&b;&b;&b;&b;&b;&b;&b;">]><a>&c;</a>"#;
        assert!(parse_axml(bomb).is_err());
        assert!(parse_axml(b"<ebuCoreMain><unclosed></ebuCoreMain>").is_err());
        assert!(parse_axml(&[0xff, 0xfe, 0x00]).is_err());
        let bad_order = br#"<a><audioChannelFormat audioChannelFormatID="AC_00041001">
            <audioBlockFormat><order>one</order></audioBlockFormat></audioChannelFormat></a>"#;
        assert!(
            parse_axml(bad_order)
                .unwrap_err()
                .contains("not a whole number")
        );
    }

    #[test]
    fn the_chain_from_track_to_channel_is_indexed() {
        let xml =
            br#"<ebuCoreMain xmlns="urn:ebu:metadata-schema:ebuCore_2016"><coreMetadata><format>
            <audioFormatExtended>
            <audioPackFormat audioPackFormatID="AP_00041001" audioPackFormatName="scene"
                typeLabel="0004" typeDefinition="HOA"/>
            <audioChannelFormat audioChannelFormatID="AC_00041001" typeDefinition="HOA">
              <audioBlockFormat audioBlockFormatID="AB_00041001_00000001">
                <order>1</order><degree>-1</degree><normalization>n3d</normalization>
              </audioBlockFormat></audioChannelFormat>
            <audioStreamFormat audioStreamFormatID="AS_00041001">
              <audioChannelFormatIDRef>AC_00041001</audioChannelFormatIDRef></audioStreamFormat>
            <audioTrackFormat audioTrackFormatID="AT_00041001_01">
              <audioStreamFormatIDRef>AS_00041001</audioStreamFormatIDRef></audioTrackFormat>
            </audioFormatExtended></format></coreMetadata></ebuCoreMain>"#;
        let index = parse_axml(xml).unwrap();
        assert_eq!(index.track_to_stream["AT_00041001_01"], "AS_00041001");
        assert_eq!(index.stream_to_channel["AS_00041001"], "AC_00041001");
        let channel = &index.channels["AC_00041001"];
        assert_eq!((channel.order, channel.degree), (Some(1), Some(-1)));
        assert_eq!(channel.normalization.as_deref(), Some("n3d"));
        assert!(is_hoa(&index.packs["AP_00041001"].kind));
    }
}
