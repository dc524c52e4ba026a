//! The persisted-state loader (`Params::deserialize_fields` on `FieldglassParams`) on arbitrary
//! input: it never panics, and whatever it accepts leaves a usable `ViewSettings`.
//!
//! The host-side view of the same thing (whole CLAP states, truncated and random) is in
//! tests/tests/clap_host.rs.

use fieldglass::params::{FieldglassParams, ViewSettings};
use nice_plug::prelude::Params;
use proptest::prelude::*;
use std::collections::BTreeMap;

/// Loads `fields` into fresh parameters, as nice-plug does when a host restores a session.
fn load(fields: BTreeMap<String, String>) -> ViewSettings {
    let params = FieldglassParams::default();
    params.deserialize_fields(&fields);
    params.view_settings()
}

fn view_json() -> impl Strategy<Value = String> {
    // JSON objects with our keys and others, values of every JSON kind.
    let key = prop_oneof![
        Just("hold".to_string()),
        Just("show_integrated".to_string()),
        Just("show_grid".to_string()),
        Just("show_labels".to_string()),
        Just("show_sources".to_string()),
        "[a-z_]{0,12}",
    ];
    let value = prop_oneof![
        Just("true".to_string()),
        Just("false".to_string()),
        Just("null".to_string()),
        "-?[0-9]{1,20}(\\.[0-9]{0,5})?(e-?[0-9]{1,3})?",
        "\"[^\"\\\\]{0,10}\"",
        Just("[]".to_string()),
        Just("{}".to_string()),
    ];
    prop::collection::vec((key, value), 0..8).prop_map(|pairs| {
        let body: Vec<String> = pairs
            .into_iter()
            .map(|(k, v)| format!("\"{k}\": {v}"))
            .collect();
        format!("{{{}}}", body.join(", "))
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn arbitrary_strings_never_panic(view in any::<String>(), other in any::<String>()) {
        let mut fields = BTreeMap::new();
        fields.insert("view".to_string(), view);
        fields.insert(other, "{}".to_string());
        load(fields);
    }

    #[test]
    fn arbitrary_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..256)) {
        let mut fields = BTreeMap::new();
        fields.insert("view".to_string(), String::from_utf8_lossy(&bytes).into_owned());
        load(fields);
    }

    #[test]
    fn json_shaped_records_never_panic_and_keep_what_they_can(view in view_json()) {
        let mut fields = BTreeMap::new();
        fields.insert("view".to_string(), view.clone());
        let loaded = load(fields);
        // A record that parses as our type must load as exactly that; the others leave the
        // defaults (the record is one field, taken whole or not at all).
        match serde_json::from_str::<ViewSettings>(&view) {
            Ok(expected) => prop_assert_eq!(loaded, expected),
            Err(_) => prop_assert_eq!(loaded, ViewSettings::default()),
        }
    }

    #[test]
    fn saved_view_records_load_back(
        hold in any::<bool>(),
        show_integrated in any::<bool>(),
        show_grid in any::<bool>(),
        show_labels in any::<bool>(),
        show_sources in any::<bool>(),
    ) {
        let view = ViewSettings { hold, show_integrated, show_grid, show_labels, show_sources };
        let saved = FieldglassParams::default();
        saved.update_view(|v| *v = view);
        prop_assert_eq!(load(saved.serialize_fields()), view);
    }
}

#[test]
fn missing_and_damaged_records_give_defaults() {
    assert_eq!(load(BTreeMap::new()), ViewSettings::default());
    for damaged in ["", "{", "null", "{\"hold\": 1}", "\u{0}"] {
        let mut fields = BTreeMap::new();
        fields.insert("view".to_string(), damaged.to_string());
        assert_eq!(load(fields), ViewSettings::default(), "{damaged:?}");
    }
    // Unknown keys are ignored and missing keys take their defaults (serde(default)).
    let mut fields = BTreeMap::new();
    fields.insert(
        "view".to_string(),
        "{\"hold\": true, \"colour\": \"red\"}".to_string(),
    );
    assert_eq!(
        load(fields),
        ViewSettings {
            hold: true,
            ..ViewSettings::default()
        }
    );
}
