//! A whole saved plugin state as the framework stores it (JSON: version, parameter values,
//! persisted fields) on arbitrary bytes: parsing either fails or gives fields the plugin loads
//! without panicking.
#![no_main]

use fieldglass::params::FieldglassParams;
use libfuzzer_sys::fuzz_target;
use nice_plug::prelude::{Params, PluginState};

fuzz_target!(|data: &[u8]| {
    let Ok(state) = serde_json::from_slice::<PluginState>(data) else {
        return;
    };
    let params = FieldglassParams::default();
    params.deserialize_fields(&state.fields);
    let _ = params.view_settings();
});
