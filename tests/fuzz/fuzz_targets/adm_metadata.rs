//! The ADM metadata reader (BS.2088 `chna`, BS.2076 `axml`) on arbitrary bytes: the first two
//! bytes say where the `chna` body ends and the `axml` body starts; reading either gives a
//! declaration or an error, never a panic, and a declaration is self-consistent.
#![no_main]

use fieldglass::adm::read_declaration;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    if data.len() < 3 {
        return;
    }
    let split = (usize::from(data[0]) << 8 | usize::from(data[1])).min(data.len() - 2);
    let (chna, axml) = data[2..].split_at(split);
    let channels = usize::from(data[2] % 70);
    for axml in [None, Some(axml)] {
        if let Some(Ok(declared)) = read_declaration(Some(chna), axml, channels) {
            let k = (declared.order + 1) * (declared.order + 1);
            assert_eq!(declared.hoa_tracks.len(), k);
            assert!(declared.hoa_tracks.iter().all(|t| t.file_channel < channels));
            if let Some(route) = declared.route() {
                assert_eq!(route.len(), k);
            }
            let _ = declared.format();
        }
    }
});
