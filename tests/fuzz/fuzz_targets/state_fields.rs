//! The persisted-field loader (`Params::deserialize_fields`, what a host's session restore
//! calls) on arbitrary field maps: never panics, and leaves readable view settings.
#![no_main]

use fieldglass::params::FieldglassParams;
use libfuzzer_sys::fuzz_target;
use nice_plug::prelude::Params;
use std::collections::BTreeMap;

fuzz_target!(|data: &[u8]| {
    // Fields as "key\0value\0key\0value…"; a lone first value goes under "view", the field the
    // plugin persists.
    let text = String::from_utf8_lossy(data);
    let mut parts = text.split('\0');
    let mut fields = BTreeMap::new();
    if let Some(first) = parts.next() {
        fields.insert("view".to_string(), first.to_string());
    }
    while let (Some(k), Some(v)) = (parts.next(), parts.next()) {
        fields.insert(k.to_string(), v.to_string());
    }
    let params = FieldglassParams::default();
    params.deserialize_fields(&fields);
    let _ = params.view_settings();
    // What was loaded saves again.
    let _ = params.serialize_fields();
});
