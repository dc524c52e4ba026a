//! Editor tests through AccessKit (egui_kittest), headless and without a GPU: the editor's
//! content is the plain function `draw_editor`, fed synthetic snapshots and an in-memory host.
//!
//! The snapshots here are invented test data (no analysis runs); what is checked is that the
//! editor shows what the snapshot says and changes settings only when asked.

use egui_kittest::Harness;
use egui_kittest::kittest::Queryable as _;
use fieldglass::editor::{EditorState, MemoryHost, Request, draw_editor};
use fieldglass::params::{FieldglassParams, FormatChoice, ViewSettings};
use fieldglass_dsp::engine::{
    AnalysisSettings, Band, ChannelStatus, EngineControl, FormatCheck, HypothesisScore, MapImage,
    MapMethod, Snapshot, SourceReading,
};
use fieldglass_dsp::format::AmbiFormat;
use fieldglass_dsp::sphere::Direction;
use nice_plug::prelude::Params as _;
use std::collections::BTreeMap;

struct TestApp {
    state: EditorState,
    snapshot: Option<Snapshot>,
    host: MemoryHost,
}

fn harness(snapshot: Option<Snapshot>) -> Harness<'static, TestApp> {
    let app = TestApp {
        state: EditorState::default(),
        snapshot,
        host: MemoryHost::default(),
    };
    let mut harness = Harness::builder()
        .with_size(egui::vec2(1100.0, 700.0))
        .build_ui_state(
            |ui, app: &mut TestApp| {
                draw_editor(ui, &mut app.state, app.snapshot.as_ref(), &mut app.host)
            },
            app,
        );
    harness.run_steps(2);
    harness
}

/// A stream of order `order` with every channel at -20 dBFS and a small map with one bright
/// spot; no channel over W, no source, format check not ready.
fn quiet_snapshot(order: usize) -> Snapshot {
    let channels = (order + 1) * (order + 1);
    let channel_status = (0..channels)
        .map(|acn| {
            let n = (acn as f64).sqrt().floor() as usize;
            ChannelStatus {
                input_index: acn,
                acn: Some(acn),
                order: Some(n),
                degree: Some(acn as i32 - (n * n + n) as i32),
                sn3d_level_dbfs: -20.0,
                ..ChannelStatus::default()
            }
        })
        .collect();
    let (width, height) = (72, 36);
    let mut values_db = vec![-40.0; width * height];
    values_db[18 * width + 36] = 0.0;
    Snapshot {
        sequence: 7,
        time_s: 3.0,
        sample_rate_hz: 48_000.0,
        order,
        channels,
        assumed_format: AmbiFormat::ACN_SN3D,
        map: MapImage {
            width,
            height,
            values_db,
            max_db: 0.0,
            method: MapMethod::MaxRe,
            band: Band::Full,
            ..MapImage::default()
        },
        channel_status,
        band_edges_hz: [250.0, 4000.0],
        ..Snapshot::default()
    }
}

#[test]
fn the_four_panels_and_the_status_line_are_labelled() {
    let harness = harness(Some(quiet_snapshot(3)));
    for heading in ["Sphere", "Channels", "Format check", "Omni"] {
        let _ = harness.get_by_label(heading);
    }
    let _ = harness.get_by_label("Status");
    let _ = harness.get_by_label_contains("Order 3 · 16 channels · 48.0 kHz");
}

#[test]
fn waiting_state_without_a_snapshot() {
    let harness = harness(None);
    for heading in ["Sphere", "Channels", "Format check", "Omni"] {
        let _ = harness.get_by_label(heading);
    }
    let waiting = harness.query_all_by_label("Waiting for audio").count();
    assert!(
        waiting >= 4,
        "every panel and the status line wait calmly, found {waiting}"
    );
}

fn snapshot_with_verdict(detected: AmbiFormat, confidence: f64) -> Snapshot {
    let mut snapshot = quiet_snapshot(1);
    let balance_read_as_sn3d = vec![0.0, 10.0 * 3f64.log10()];
    snapshot.format_check = FormatCheck {
        ready: true,
        order_balance_db: vec![0.0, 4.77],
        hypotheses: vec![
            HypothesisScore {
                format: AmbiFormat::ACN_SN3D,
                order_balance_db: balance_read_as_sn3d,
                steering_fit: 0.9,
                probability: 1.0 - confidence,
            },
            HypothesisScore {
                format: detected,
                order_balance_db: vec![0.0, 0.0],
                steering_fit: 0.9,
                probability: confidence,
            },
        ],
        detected: Some(detected),
        confidence,
        effective_order: 1,
        ..FormatCheck::default()
    };
    snapshot
}

#[test]
fn use_detected_format_sets_the_assumed_format_only_when_pressed() {
    let mut harness = harness(Some(snapshot_with_verdict(AmbiFormat::ACN_N3D, 0.92)));
    let _ = harness.get_by_label_contains("Looks like ACN/N3D (92 % likely)");
    // Showing the verdict changes nothing by itself.
    assert_eq!(
        harness.state().host.settings.assumed_format,
        FormatChoice::AcnSn3d
    );
    harness.get_by_label("Use detected format").click();
    harness.run_steps(2);
    assert_eq!(
        harness.state().host.settings.assumed_format,
        FormatChoice::AcnN3d
    );
}

#[test]
fn use_detected_format_is_inert_when_detection_agrees() {
    let mut harness = harness(Some(snapshot_with_verdict(AmbiFormat::ACN_SN3D, 0.95)));
    harness.state_mut().host.settings.assumed_format = FormatChoice::AcnSn3d;
    harness.get_by_label("Use detected format").click();
    harness.run_steps(2);
    assert_eq!(
        harness.state().host.settings.assumed_format,
        FormatChoice::AcnSn3d
    );
}

#[test]
fn meter_strip_warns_about_a_channel_above_w() {
    let mut snapshot = quiet_snapshot(1);
    snapshot.channel_status[2].over_omni = true;
    snapshot.channel_status[2].sn3d_level_dbfs = -14.0;
    let harness = harness(Some(snapshot));
    let _ = harness.get_by_label("Louder than W: channel 3 (ACN 2)");

    let calm = self::harness(Some(quiet_snapshot(1)));
    assert!(calm.query_by_label_contains("Louder than W").is_none());
    let _ = calm.get_by_label("No channel louder than W");
}

#[test]
fn a_refused_format_is_explained_in_the_format_panel() {
    let mut snapshot = quiet_snapshot(4);
    let reason =
        "order 4 is not defined for FuMa: the stream is analysed as AmbiX (ACN/SN3D) instead";
    snapshot.format_not_applied = Some(reason.to_owned());
    let harness = harness(Some(snapshot));
    let _ = harness.get_by_label(reason);
    let calm = self::harness(Some(quiet_snapshot(4)));
    assert!(
        calm.query_by_label_contains("not defined for FuMa")
            .is_none()
    );
}

#[test]
fn a_scaled_w_is_shown_as_stored_beside_its_sn3d_equivalent() {
    // FuMa's W carries −3.01 dB (DESIGN.md): the Omni panel's SN3D readings get the stream's
    // own W beside them, and AmbiX shows no such row.
    let mut snapshot = quiet_snapshot(1);
    snapshot.omni.conversion_gain_db = 3.0103;
    snapshot.omni.true_peak_dbtp = -6.0;
    let harness = harness(Some(snapshot));
    let _ = harness.get_by_label("W as stored");
    let _ = harness.get_by_label_contains("-9.0 dBTP");
    let calm = self::harness(Some(quiet_snapshot(1)));
    assert!(calm.query_by_label("W as stored").is_none());
}

#[test]
fn meter_strip_handles_64_channels_and_names_the_channel() {
    let mut snapshot = quiet_snapshot(7);
    assert_eq!(snapshot.channel_status.len(), 64);
    snapshot.channel_status[50].over_omni = true;
    snapshot.channel_status[63].reading.clip_count = 3;
    let harness = harness(Some(snapshot));
    let _ = harness.get_by_label("Louder than W: channel 51 (ACN 50)");
}

#[test]
fn reset_buttons_send_requests() {
    let mut harness = harness(Some(quiet_snapshot(1)));
    harness.get_by_label("Reset clips").click();
    harness.run_steps(1);
    harness.get_by_label("Reset loudness").click();
    harness.run_steps(1);
    harness.get_by_label("Reset whole programme").click();
    harness.run_steps(1);
    assert_eq!(
        harness.state().host.requests,
        vec![
            Request::ResetClips,
            Request::ResetLoudness,
            Request::ResetSessionMap
        ]
    );
}

#[test]
fn source_readout_shows_the_encoded_direction() {
    let mut snapshot = quiet_snapshot(3);
    snapshot.sources = vec![
        SourceReading {
            direction: Direction::new(-35.0, 0.0),
            level_db: 0.0,
        },
        SourceReading {
            direction: Direction::new(120.0, 45.0),
            level_db: -6.0,
        },
    ];
    let harness = harness(Some(snapshot));
    let _ = harness.get_by_label_contains("az -35°, el 0°");
    let _ = harness.get_by_label_contains("az 120°, el 45° (-6.0 dB)");
}

#[test]
fn map_texture_follows_the_snapshot_sequence() {
    let mut harness = harness(Some(quiet_snapshot(1)));
    assert_eq!(harness.state().state.sphere.texture_sequence(), Some(7));
    harness.state_mut().snapshot.as_mut().unwrap().sequence = 8;
    harness.run_steps(1);
    assert_eq!(harness.state().state.sphere.texture_sequence(), Some(8));
}

#[test]
fn hold_toggle_changes_persisted_view_state() {
    let mut harness = harness(Some(quiet_snapshot(1)));
    assert!(!harness.state().host.settings.view.hold);
    harness.get_by_label("Hold").click();
    harness.run_steps(2);
    assert!(harness.state().host.settings.view.hold);
}

#[test]
fn damaged_or_old_view_state_loads_to_defaults() {
    let params = FieldglassParams::default();
    let mut saved = BTreeMap::new();
    saved.insert("view".to_owned(), "{not json".to_owned());
    params.deserialize_fields(&saved);
    assert_eq!(params.view_settings(), ViewSettings::default());

    // An older save with fewer fields and an unknown one: known fields load, others default.
    saved.insert(
        "view".to_owned(),
        r#"{"hold":true,"retired_switch":3}"#.to_owned(),
    );
    params.deserialize_fields(&saved);
    assert_eq!(
        params.view_settings(),
        ViewSettings {
            hold: true,
            ..ViewSettings::default()
        }
    );

    // A field of the wrong type rejects the record; the last good state stays.
    saved.insert("view".to_owned(), r#"{"show_grid":"yes"}"#.to_owned());
    params.deserialize_fields(&saved);
    assert!(params.view_settings().hold);

    // Round trip through the framework's own serialisation.
    let fields = params.serialize_fields();
    let restored = FieldglassParams::default();
    restored.deserialize_fields(&fields);
    assert_eq!(restored.view_settings(), params.view_settings());
}

#[test]
fn apply_to_copies_parameters_into_the_engine_control() {
    let control = EngineControl::new(AnalysisSettings {
        assumed_format: AmbiFormat::FUMA,
        method: MapMethod::Music,
        band: Band::High,
        time_constant_ms: 2000.0,
        hold: true,
        over_omni_tolerance_db: 2.0,
        ..AnalysisSettings::default()
    });
    let params = FieldglassParams::default();
    params.update_view(|v| v.show_integrated = true);
    params.apply_to(&control);
    let settings = control.load();
    assert_eq!(settings.assumed_format, AmbiFormat::ACN_SN3D);
    assert_eq!(settings.method, MapMethod::MaxRe);
    assert_eq!(settings.band, Band::Full);
    assert_eq!(settings.time_constant_ms, 300.0);
    assert!((settings.over_omni_tolerance_db - 0.5).abs() < 1e-6);
    assert!(!settings.hold);
    assert!(settings.show_integrated);
}
