//! The `chna` chunk of a BW64 file (ITU-R BS.2088): which ADM track each sample track carries.
//!
//! Layout (little-endian): `numTracks u16, numUIDs u16`, then `numUIDs` entries of 40 bytes:
//! `trackIndex u16` (1-based), `audioTrackUID [12]`, `audioTrackFormatIDRef [14]`,
//! `audioPackFormatIDRef [11]`, one pad byte. Unused entries are all zero.

/// One `chna` entry.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ChnaEntry {
    /// Sample track, 0-based (the chunk stores it 1-based).
    pub track: usize,
    pub track_uid: String,
    /// "AT_xxxxxxxx_xx" (or, in later revisions, an "AC_…" channel format reference).
    pub track_format_ref: String,
    /// "AP_xxxxxxxx", empty when the entry names none.
    pub pack_format_ref: String,
}

const ENTRY_BYTES: usize = 40;

/// Parses a `chna` body. Entries with track index 0 (unused slots) are skipped.
pub fn parse_chna(body: &[u8], tracks_in_file: usize) -> Result<Vec<ChnaEntry>, String> {
    if body.len() < 4 {
        return Err(format!(
            "the chna chunk holds {} bytes; it needs at least 4",
            body.len()
        ));
    }
    let uids = u16::from_le_bytes([body[2], body[3]]) as usize;
    let available = (body.len() - 4) / ENTRY_BYTES;
    if uids > available {
        return Err(format!(
            "the chna chunk declares {uids} entries but holds {available}"
        ));
    }
    let mut entries = Vec::with_capacity(uids);
    for raw in body[4..].chunks_exact(ENTRY_BYTES).take(uids) {
        let index = u16::from_le_bytes([raw[0], raw[1]]) as usize;
        if index == 0 {
            continue;
        }
        if index > tracks_in_file {
            return Err(format!(
                "the chna chunk names track {index} but the file has {tracks_in_file} channels"
            ));
        }
        entries.push(ChnaEntry {
            track: index - 1,
            track_uid: text(&raw[2..14]),
            track_format_ref: text(&raw[14..28]),
            pack_format_ref: text(&raw[28..39]),
        });
    }
    Ok(entries)
}

/// Fixed-width ASCII field, NUL-padded.
fn text(bytes: &[u8]) -> String {
    let end = bytes.iter().position(|&b| b == 0).unwrap_or(bytes.len());
    String::from_utf8_lossy(&bytes[..end]).trim().to_owned()
}

/// Writes a `chna` body for `entries` (used by `fieldglass demo --adm`).
pub fn chna_body(entries: &[ChnaEntry]) -> Vec<u8> {
    let mut tracks: Vec<usize> = entries.iter().map(|e| e.track).collect();
    tracks.dedup();
    let mut body = Vec::with_capacity(4 + ENTRY_BYTES * entries.len());
    body.extend_from_slice(&(tracks.len() as u16).to_le_bytes());
    body.extend_from_slice(&(entries.len() as u16).to_le_bytes());
    for e in entries {
        body.extend_from_slice(&((e.track + 1) as u16).to_le_bytes());
        field(&mut body, &e.track_uid, 12);
        field(&mut body, &e.track_format_ref, 14);
        field(&mut body, &e.pack_format_ref, 11);
        body.push(0);
    }
    body
}

fn field(out: &mut Vec<u8>, value: &str, width: usize) {
    let bytes = value.as_bytes();
    let n = bytes.len().min(width);
    out.extend_from_slice(&bytes[..n]);
    out.extend(std::iter::repeat_n(0u8, width - n));
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn entries_round_trip_and_use_the_40_byte_layout() {
        let entries = vec![ChnaEntry {
            track: 0,
            track_uid: "ATU_00000001".into(),
            track_format_ref: "AT_00040001_01".into(),
            pack_format_ref: "AP_00040001".into(),
        }];
        let body = chna_body(&entries);
        // BS.2088 (and the `<H12s14s11sx` entry layout of the EBU ADM Renderer's writer).
        assert_eq!(body.len(), 4 + 40);
        assert_eq!(&body[4..6], &[1, 0]);
        assert_eq!(parse_chna(&body, 4).unwrap(), entries);
    }

    #[test]
    fn bad_chunks_are_errors_not_panics() {
        assert!(parse_chna(&[1, 0], 4).is_err());
        assert!(parse_chna(&[1, 0, 9, 0], 4).is_err());
        let mut body = chna_body(&[ChnaEntry {
            track: 7,
            track_uid: "ATU_00000001".into(),
            track_format_ref: "AT_00040001_01".into(),
            pack_format_ref: String::new(),
        }]);
        assert!(parse_chna(&body, 4).is_err());
        body[4] = 0; // an unused slot
        assert_eq!(parse_chna(&body, 4).unwrap(), vec![]);
    }
}
