//! Editor tests through AccessKit (egui_kittest) for the controls of the format at hand, the
//! findings list, the picture behind the map and saving the view. Headless, no GPU; snapshots
//! are invented test data and the host is in memory (see `editor_ui.rs`).

use egui::accesskit::Role;
use egui_kittest::Harness;
use egui_kittest::kittest::{NodeT as _, Queryable as _};
use fieldglass::editor::{EditorState, MemoryHost, Request, draw_editor};
use fieldglass::params::{FieldglassParams, FormatChoice, PictureSettings};
use fieldglass::picture::{Picture, write_png};
use fieldglass_dsp::engine::{
    Band, ChannelStatus, Finding, FindingCode, FormatCheck, LoggedFinding, MapImage, MapMethod,
    Severity, Snapshot,
};
use fieldglass_dsp::format::AmbiFormat;
use nice_plug::prelude::Params as _;
use std::time::{Duration, Instant};

struct TestApp {
    state: EditorState,
    snapshot: Option<Snapshot>,
    host: MemoryHost,
}

fn harness_with(snapshot: Option<Snapshot>, host: MemoryHost) -> Harness<'static, TestApp> {
    let app = TestApp {
        state: EditorState::default(),
        snapshot,
        host,
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

fn harness(snapshot: Option<Snapshot>) -> Harness<'static, TestApp> {
    harness_with(snapshot, MemoryHost::default())
}

/// Order `order`, every channel at −20 dBFS, a small map with one bright spot.
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
        map_format: AmbiFormat::ACN_SN3D,
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

/// A first-order snapshot whose format check is sure the stream is FuMa.
fn fuma_detected() -> Snapshot {
    let mut snapshot = quiet_snapshot(1);
    snapshot.format_check = FormatCheck {
        ready: true,
        detected: Some(AmbiFormat::FUMA),
        confidence: 0.95,
        effective_order: 1,
        ..FormatCheck::default()
    };
    snapshot
}

#[test]
fn format_selector_offers_what_the_order_allows_and_sets_the_parameter() {
    let mut harness = harness(Some(quiet_snapshot(3)));
    harness.get_by_label("Assumed format").click();
    harness.run_steps(2);
    // Third order: all four, FuMa and ACN/maxN included.
    for name in ["AmbiX (ACN/SN3D)", "ACN/N3D", "ACN/maxN"] {
        assert!(harness.query_all_by_label(name).count() >= 1, "{name}");
    }
    harness.get_by_label("FuMa").click();
    harness.run_steps(2);
    assert_eq!(
        harness.state().host.settings.assumed_format,
        FormatChoice::Fuma
    );

    // Fourth order: FuMa and maxN are defined to third order only (DESIGN.md), not offered.
    let mut harness = self::harness(Some(quiet_snapshot(4)));
    harness.get_by_label("Assumed format").click();
    harness.run_steps(2);
    assert!(harness.query_by_label("FuMa").is_none());
    assert!(harness.query_by_label("ACN/maxN").is_none());
    harness.get_by_label("ACN/N3D").click();
    harness.run_steps(2);
    assert_eq!(
        harness.state().host.settings.assumed_format,
        FormatChoice::AcnN3d
    );
}

#[test]
fn compare_shows_the_detected_format_only_while_held() {
    let mut harness = harness(Some(fuma_detected()));
    let centre = harness
        .get_by_label("Compare with detected")
        .rect()
        .center();
    let press = |pressed| egui::Event::PointerButton {
        pos: centre,
        button: egui::PointerButton::Primary,
        pressed,
        modifiers: egui::Modifiers::default(),
    };
    harness
        .input_mut()
        .events
        .extend([egui::Event::PointerMoved(centre), press(true)]);
    harness.run_steps(3);
    assert_eq!(
        harness.state().host.settings.map_format_override,
        Some(AmbiFormat::FUMA)
    );
    assert_eq!(
        harness.state().host.settings.assumed_format,
        FormatChoice::AcnSn3d,
        "holding never changes the assumption"
    );
    // The engine answers with a map read as FuMa: the map says so.
    harness.state_mut().snapshot.as_mut().unwrap().map_format = AmbiFormat::FUMA;
    harness.run_steps(1);
    let _ = harness.get_by_label_contains("read as FuMa for comparison");

    harness.input_mut().events.push(press(false));
    harness.run_steps(3);
    assert_eq!(harness.state().host.settings.map_format_override, None);
    assert_eq!(
        harness.state().host.settings.assumed_format,
        FormatChoice::AcnSn3d
    );
    // The format panel keeps its advice.
    let _ = harness.get_by_label_contains("Looks like FuMa (95 % likely)");

    // Nothing detected (or the same format): the switch cannot be used.
    let harness = self::harness(Some(quiet_snapshot(1)));
    assert!(
        harness
            .get_by_label("Compare with detected")
            .accesskit_node()
            .is_disabled()
    );
}

fn logged(severity: Severity, code: FindingCode, channels: &[usize], message: &str) -> Finding {
    Finding {
        severity,
        code,
        message: message.to_owned(),
        channels: channels.to_vec(),
    }
}

#[test]
fn findings_list_reads_severity_channels_time_and_state_and_resets() {
    let mut snapshot = quiet_snapshot(3);
    snapshot.finding_log = vec![
        LoggedFinding {
            finding: logged(
                Severity::Error,
                FindingCode::Clipping,
                &[0],
                "clipping on W",
            ),
            first_seen_s: 42.0,
            last_seen_s: 50.0,
            active: true,
        },
        LoggedFinding {
            finding: logged(
                Severity::Warning,
                FindingCode::OverOmni,
                &[6, 7],
                "two channels louder than W",
            ),
            first_seen_s: 75.5,
            last_seen_s: 80.0,
            active: false,
        },
    ];
    let mut harness = harness(Some(snapshot));
    let _ = harness.get_by_label("Error");
    let _ = harness.get_by_label("Warning");
    let _ = harness.get_by_label("Clipping on W");
    let _ = harness.get_by_label("channel 1 (ACN 0) · first at 0:42 · still active");
    let _ = harness.get_by_label("channels 7 (ACN 6), 8 (ACN 7) · first at 1:15 · last at 1:20");
    let _ = harness.get_by_label("Times count from the start");
    harness.get_by_label("Reset findings").click();
    harness.run_steps(1);
    assert_eq!(harness.state().host.requests, vec![Request::ResetFindings]);
}

/// A 2:1 test picture: left half red, right half blue.
fn halves(width: usize) -> Picture {
    let height = width / 2;
    let mut rgba = Vec::with_capacity(width * height * 4);
    for _ in 0..height {
        for c in 0..width {
            rgba.extend_from_slice(if c < width / 2 {
                &[220, 30, 30, 255]
            } else {
                &[30, 30, 220, 255]
            });
        }
    }
    Picture {
        width,
        height,
        rgba,
    }
}

/// Steps the editor until the picture load finished (a worker thread decodes it).
fn wait_for_picture(harness: &mut Harness<'static, TestApp>) {
    let deadline = Instant::now() + Duration::from_secs(20);
    harness.run_steps(1);
    while harness.state().state.picture.is_loading() {
        assert!(Instant::now() < deadline, "picture never finished loading");
        std::thread::sleep(Duration::from_millis(5));
        harness.run_steps(1);
    }
    harness.run_steps(1);
}

#[test]
fn a_picture_loads_behind_the_map_and_its_path_is_kept() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("harbour.png");
    write_png(&path, &halves(256)).unwrap();
    let mut harness = harness(Some(quiet_snapshot(1)));
    harness.get_by_label("Picture file").focus();
    harness.run_steps(1);
    harness
        .get_by_label("Picture file")
        .type_text(path.to_str().unwrap());
    harness.run_steps(1);
    harness.get_by_label("Load picture").click();
    wait_for_picture(&mut harness);
    let loaded = harness.state().state.picture.loaded().expect("loaded");
    assert_eq!((loaded.picture.width, loaded.picture.height), (256, 128));
    assert_eq!(harness.state().host.picture.path, path.to_str().unwrap());
    let _ = harness.get_by_label("Showing 256×128 pixels");

    // Reopening the editor reads the saved path again.
    let host = harness.state().host.clone();
    let mut reopened = harness_with(Some(quiet_snapshot(1)), host);
    wait_for_picture(&mut reopened);
    assert!(reopened.state().state.picture.loaded().is_some());
}

#[test]
fn the_saved_state_holds_the_path_and_never_the_pixels() {
    let params = FieldglassParams::default();
    params.set_picture_settings(PictureSettings {
        path: "/frames/terrace.jpg".to_owned(),
        opacity: 0.3,
        yaw_offset_deg: -20.0,
    });
    let fields = params.serialize_fields();
    let saved = &fields["picture"];
    assert!(saved.contains("/frames/terrace.jpg"), "{saved}");
    assert!(saved.len() < 200, "only settings, no pixels: {saved}");
    let restored = FieldglassParams::default();
    restored.deserialize_fields(&fields);
    assert_eq!(restored.picture_settings(), params.picture_settings());
    // A damaged record keeps the defaults; out-of-range numbers come back into range.
    let mut damaged = fields.clone();
    damaged.insert("picture".to_owned(), r#"{"opacity":7.0}"#.to_owned());
    let fresh = FieldglassParams::default();
    fresh.deserialize_fields(&damaged);
    assert_eq!(fresh.picture_settings().opacity, 1.0);
}

#[test]
fn a_missing_or_broken_picture_gives_a_message_not_a_crash() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("nowhere.png");
    let host = MemoryHost {
        picture: PictureSettings {
            path: missing.to_str().unwrap().to_owned(),
            ..PictureSettings::default()
        },
        ..MemoryHost::default()
    };
    let mut harness = harness_with(Some(quiet_snapshot(1)), host);
    wait_for_picture(&mut harness);
    assert!(harness.state().state.picture.loaded().is_none());
    let _ = harness.get_by_label_contains("Cannot read the picture");

    let broken = dir.path().join("broken.png");
    std::fs::write(&broken, b"\x89PNG\r\n\x1a\nnot really").unwrap();
    let host = MemoryHost {
        picture: PictureSettings {
            path: broken.to_str().unwrap().to_owned(),
            ..PictureSettings::default()
        },
        ..MemoryHost::default()
    };
    let mut harness = harness_with(Some(quiet_snapshot(1)), host);
    wait_for_picture(&mut harness);
    let _ = harness.get_by_label_contains("cannot be decoded");

    let square = dir.path().join("square.png");
    write_png(
        &square,
        &Picture {
            width: 64,
            height: 64,
            rgba: vec![128; 64 * 64 * 4],
        },
    )
    .unwrap();
    let host = MemoryHost {
        picture: PictureSettings {
            path: square.to_str().unwrap().to_owned(),
            ..PictureSettings::default()
        },
        ..MemoryHost::default()
    };
    let mut harness = harness_with(Some(quiet_snapshot(1)), host);
    wait_for_picture(&mut harness);
    let _ = harness.get_by_label_contains("twice as wide as high");
}

#[test]
fn a_picture_larger_than_the_largest_texture_is_shrunk_to_it() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("large.png");
    write_png(&path, &halves(2048)).unwrap();
    let host = MemoryHost {
        picture: PictureSettings {
            path: path.to_str().unwrap().to_owned(),
            ..PictureSettings::default()
        },
        ..MemoryHost::default()
    };
    let app = TestApp {
        state: EditorState::default(),
        snapshot: Some(quiet_snapshot(1)),
        host,
    };
    let mut harness = Harness::builder()
        .with_size(egui::vec2(1100.0, 700.0))
        .build_ui_state(
            |ui, app: &mut TestApp| {
                draw_editor(ui, &mut app.state, app.snapshot.as_ref(), &mut app.host)
            },
            app,
        );
    // A renderer whose largest texture is 1024 pixels a side: the 2048×1024 picture must be
    // shrunk before it becomes a texture.
    harness.input_mut().max_texture_side = Some(1024);
    wait_for_picture(&mut harness);
    // The first load may have started before the limit was set: a picture above the limit
    // is then refused with a message rather than handed to the renderer.
    assert!(
        harness
            .state()
            .state
            .picture
            .loaded()
            .is_none_or(|l| l.picture.width <= 1024)
    );
    harness.get_by_label("Load picture").click();
    wait_for_picture(&mut harness);
    let loaded = harness.state().state.picture.loaded().expect("loaded");
    assert_eq!((loaded.picture.width, loaded.picture.height), (1024, 512));
    assert_eq!(loaded.texture.size(), [1024, 512]);
    // Area averaging keeps the two halves apart.
    assert_eq!(loaded.picture.sample(90.0, 0.0)[0], 220);
    assert_eq!(loaded.picture.sample(-90.0, 0.0)[2], 220);
}

#[test]
fn opacity_and_picture_yaw_are_saved_settings() {
    let mut harness = harness(Some(quiet_snapshot(1)));
    harness
        .get_by_role_and_label(Role::Slider, "Picture opacity")
        .set_value_accesskit(70.0);
    harness.run_steps(2);
    assert!((harness.state().host.picture.opacity - 0.7).abs() < 1e-6);
    harness
        .get_by_role_and_label(Role::Slider, "Picture yaw")
        .set_value_accesskit(-30.0);
    harness.run_steps(2);
    assert_eq!(harness.state().host.picture.yaw_offset_deg, -30.0);
    assert!((harness.state().host.picture.opacity - 0.7).abs() < 1e-6);
}

#[test]
fn automatic_range_is_on_by_default_and_gives_way_to_the_manual_one() {
    let mut harness = harness(Some(quiet_snapshot(3)));
    assert!(harness.state().host.settings.auto_map_range);
    // Order-3 max-rE: 23 dB (the beam's highest side lobe, −22.5 dB; display_range tests).
    let range = harness.get_by_role_and_label(Role::Slider, "Map range");
    assert_eq!(range.accesskit_node().numeric_value(), Some(23.0));
    assert!(range.accesskit_node().is_disabled());
    harness.get_by_label("Automatic range").click();
    harness.run_steps(2);
    assert!(!harness.state().host.settings.auto_map_range);
    let range = harness.get_by_role_and_label(Role::Slider, "Map range");
    assert!(!range.accesskit_node().is_disabled());
    assert_eq!(range.accesskit_node().numeric_value(), Some(30.0));
}

#[test]
fn save_view_writes_the_map_picture_and_the_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("notes");
    let mut snapshot = quiet_snapshot(3);
    snapshot.programme.channels = snapshot
        .channel_status
        .iter()
        .map(|c| fieldglass_dsp::engine::ChannelProgramme {
            input_index: c.input_index,
            acn: c.acn,
            order: c.order,
            degree: c.degree,
            rms_dbfs: -20.0,
            ..Default::default()
        })
        .collect();
    snapshot.sources = vec![fieldglass_dsp::engine::SourceReading {
        direction: fieldglass_dsp::sphere::Direction::new(-35.0, 0.0),
        level_db: 0.0,
    }];
    let mut harness = harness(Some(snapshot));
    // Without a folder: a message, nothing written.
    harness
        .get_by_role_and_label(Role::Button, "Save view")
        .click();
    harness.run_steps(2);
    let _ = harness.get_by_label_contains("Type a folder to save into first");

    harness.get_by_label("Save folder").focus();
    harness.run_steps(1);
    harness
        .get_by_label("Save folder")
        .type_text(folder.to_str().unwrap());
    harness.run_steps(1);
    harness
        .get_by_role_and_label(Role::Button, "Save view")
        .click();
    harness.run_steps(2);
    let _ = harness.get_by_label_contains("Saved fieldglass-view-3s-7.png");
    assert_eq!(harness.state().host.save_folder, folder.to_str().unwrap());

    let png = std::fs::read(folder.join("fieldglass-view-3s-7.png")).unwrap();
    let decoder = png::Decoder::new(std::io::Cursor::new(png));
    let reader = decoder.read_info().unwrap();
    assert!(reader.info().width >= 360, "a map wide enough to read");
    let json: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(folder.join("fieldglass-view-3s-7.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(json["schema"], "fieldglass-view/1");
    // The scan JSON's names where the meaning is the same (docs/scan-json.md).
    let channel = &json["channels"][6];
    assert_eq!(channel["index"], 6);
    assert_eq!(channel["acn"], 6);
    assert_eq!(channel["rms_dbfs"], -20.0);
    for key in [
        "peak_dbfs",
        "true_peak_dbtp",
        "sn3d_rms_dbfs",
        "over_omni",
        "silent",
    ] {
        assert!(channel.get(key).is_some(), "{key}");
    }
    assert_eq!(json["sources"][0]["azimuth_deg"], -35.0);
    assert_eq!(json["assumed"]["ordering"], "acn");
    assert_eq!(json["assumed"]["normalization"], "sn3d");
    assert_eq!(json["map"]["range_db"], 23.0);
    assert_eq!(json["map"]["read_as"], "acn-sn3d");
    assert!(json["findings"].as_array().unwrap().is_empty());
}
