//! ADM metadata for a plain HOA file (used by `fieldglass demo --adm`): one programme, one
//! object, one HOA pack whose channel formats give each file channel's order, degree and
//! normalization (ITU-R BS.2076-2), and the matching `chna` entries (ITU-R BS.2088).

use super::{ChnaEntry, DeclaredNormalization};
use fieldglass_dsp::format::{AmbiFormat, Normalization};

/// Base of the IDs written: outside the common-definition range (below 0x1000).
const ID_BASE: usize = 0x1001;

/// The `axml` document and the `chna` entries for a file of `format` and `order`, channel c of
/// the file carrying ACN `format.ordering.acn_of_channel(c)`. None for a normalization ADM has
/// no word for.
pub fn hoa_axml(format: AmbiFormat, order: usize, name: &str) -> Option<(String, Vec<ChnaEntry>)> {
    let normalization = match format.normalization {
        Normalization::Sn3d => DeclaredNormalization::Sn3d,
        Normalization::N3d => DeclaredNormalization::N3d,
        Normalization::MaxN => DeclaredNormalization::Fuma,
    };
    let channels = (order + 1) * (order + 1);
    let pack = format!("AP_0004{ID_BASE:04x}");
    let mut xml = String::from(
        "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n\
         <ebuCoreMain xmlns=\"urn:ebu:metadata-schema:ebuCore_2016\">\n\
         <coreMetadata><format><audioFormatExtended version=\"ITU-R_BS.2076-2\">\n",
    );
    let name = escape(name);
    xml.push_str(&format!(
        "<audioProgramme audioProgrammeID=\"APR_1001\" audioProgrammeName=\"{name}\">\
         <audioContentIDRef>ACO_1001</audioContentIDRef></audioProgramme>\n\
         <audioContent audioContentID=\"ACO_1001\" audioContentName=\"{name}\">\
         <audioObjectIDRef>AO_1001</audioObjectIDRef></audioContent>\n\
         <audioObject audioObjectID=\"AO_1001\" audioObjectName=\"{name}\">\
         <audioPackFormatIDRef>{pack}</audioPackFormatIDRef>\n"
    ));
    for c in 0..channels {
        xml.push_str(&format!(
            "<audioTrackUIDRef>ATU_{:08x}</audioTrackUIDRef>\n",
            c + 1
        ));
    }
    xml.push_str("</audioObject>\n");
    xml.push_str(&format!(
        "<audioPackFormat audioPackFormatID=\"{pack}\" audioPackFormatName=\"{name}\" \
         typeLabel=\"0004\" typeDefinition=\"HOA\">\n"
    ));
    let mut entries = Vec::with_capacity(channels);
    let mut formats = String::new();
    for c in 0..channels {
        let acn = format.ordering.acn_of_channel(c)?;
        let n = (acn as f64).sqrt().floor() as usize;
        let m = acn as i64 - (n * n + n) as i64;
        let id = format!("{:04x}", ID_BASE + c);
        xml.push_str(&format!(
            "<audioChannelFormatIDRef>AC_0004{id}</audioChannelFormatIDRef>\n"
        ));
        formats.push_str(&format!(
            "<audioChannelFormat audioChannelFormatID=\"AC_0004{id}\" \
             audioChannelFormatName=\"order {n} degree {m}\" typeLabel=\"0004\" typeDefinition=\"HOA\">\
             <audioBlockFormat audioBlockFormatID=\"AB_0004{id}_00000001\">\
             <order>{n}</order><degree>{m}</degree><normalization>{}</normalization>\
             </audioBlockFormat></audioChannelFormat>\n\
             <audioStreamFormat audioStreamFormatID=\"AS_0004{id}\" audioStreamFormatName=\"PCM order {n} degree {m}\" \
             formatLabel=\"0001\" formatDefinition=\"PCM\">\
             <audioChannelFormatIDRef>AC_0004{id}</audioChannelFormatIDRef>\
             <audioTrackFormatIDRef>AT_0004{id}_01</audioTrackFormatIDRef></audioStreamFormat>\n\
             <audioTrackFormat audioTrackFormatID=\"AT_0004{id}_01\" audioTrackFormatName=\"PCM order {n} degree {m}\" \
             formatLabel=\"0001\" formatDefinition=\"PCM\">\
             <audioStreamFormatIDRef>AS_0004{id}</audioStreamFormatIDRef></audioTrackFormat>\n\
             <audioTrackUID UID=\"ATU_{:08x}\">\
             <audioTrackFormatIDRef>AT_0004{id}_01</audioTrackFormatIDRef>\
             <audioPackFormatIDRef>{pack}</audioPackFormatIDRef></audioTrackUID>\n",
            normalization.label(),
            c + 1
        ));
        entries.push(ChnaEntry {
            track: c,
            track_uid: format!("ATU_{:08x}", c + 1),
            track_format_ref: format!("AT_0004{id}_01"),
            pack_format_ref: pack.clone(),
        });
    }
    xml.push_str("</audioPackFormat>\n");
    xml.push_str(&formats);
    xml.push_str("</audioFormatExtended></format></coreMetadata></ebuCoreMain>\n");
    Some((xml, entries))
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

#[cfg(test)]
mod tests {
    use super::super::{chna_body, read_declaration};
    use super::*;

    #[test]
    fn written_metadata_reads_back_for_every_format() {
        for (format, order) in [
            (AmbiFormat::ACN_SN3D, 3),
            (AmbiFormat::ACN_N3D, 5),
            (AmbiFormat::FUMA, 3),
            (AmbiFormat::ACN_MAXN, 2),
        ] {
            let (xml, entries) = hoa_axml(format, order, "scene & more").unwrap();
            let channels = (order + 1) * (order + 1);
            let declared =
                read_declaration(Some(&chna_body(&entries)), Some(xml.as_bytes()), channels)
                    .unwrap()
                    .unwrap();
            assert_eq!(declared.format(), format, "{format:?}");
            assert_eq!(declared.order, order);
            assert_eq!(declared.route(), None);
            assert!(!declared.uses_common_definitions);
            assert_eq!(declared.pack_name, "scene & more");
        }
    }
}
