//! The editor through the CLAP GUI extension, as a host opens it: created for X11, embedded in
//! a window the host made, shown while audio runs, resized, hidden and destroyed, 100 times;
//! and a host without the `clap.gui` host extension, which gets a refusal, not a crash.
//!
//! Needs an X server with GLX (the editor draws with OpenGL). `.ci/run` starts Xvfb and runs
//! this test with `--ignored`; by hand:
//! `Xvfb :99 -screen 0 1600x1000x24 & DISPLAY=:99 cargo test -p fieldglass-tests --test clap_gui -- --ignored --nocapture`.

use clack_extensions::gui::{GuiApiType, GuiConfiguration, GuiSize, PluginGui, Window};
use fieldglass_tests::{Buffers, Plugin, Rng, load_plugin_entry, resident_bytes, thread_count};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::time::{Duration, Instant};
use x11rb::connection::Connection;
use x11rb::protocol::xproto::{ConnectionExt, CreateWindowAux, WindowClass};

const CYCLES: usize = 100;

/// A top-level window made by the "host", into which the editor is embedded.
struct HostWindow {
    conn: x11rb::rust_connection::RustConnection,
    id: u32,
}

impl HostWindow {
    fn open(width: u16, height: u16) -> Self {
        let (conn, screen_num) = x11rb::connect(None).unwrap_or_else(|e| {
            panic!("no X display ({e}); run under Xvfb, see this file's header")
        });
        let screen = &conn.setup().roots[screen_num];
        let id = conn.generate_id().expect("window id");
        conn.create_window(
            x11rb::COPY_DEPTH_FROM_PARENT,
            id,
            screen.root,
            0,
            0,
            width,
            height,
            0,
            WindowClass::INPUT_OUTPUT,
            0,
            &CreateWindowAux::new().background_pixel(screen.black_pixel),
        )
        .expect("create window");
        conn.map_window(id).expect("map window");
        conn.flush().expect("flush");
        Self { conn, id }
    }

    fn resize(&self, size: GuiSize) {
        let aux = x11rb::protocol::xproto::ConfigureWindowAux::new()
            .width(size.width)
            .height(size.height);
        self.conn
            .configure_window(self.id, &aux)
            .expect("configure");
        self.conn.flush().expect("flush");
    }
}

impl Drop for HostWindow {
    fn drop(&mut self) {
        let _ = self.conn.destroy_window(self.id);
        let _ = self.conn.flush();
    }
}

/// Runs the host's main-thread duties (callbacks the plugin asked for) for `time`.
fn pump(plugin: &mut Plugin, time: Duration) {
    let end = Instant::now() + time;
    while Instant::now() < end {
        plugin.run_main_thread_callbacks();
        std::thread::sleep(Duration::from_millis(5));
    }
}

fn size_of(plugin: &mut Plugin, gui: &PluginGui) -> GuiSize {
    gui.get_size(&plugin.instance.plugin_handle())
        .expect("get_size")
}

#[test]
#[ignore = "needs an X server with GLX (Xvfb); .ci/run runs it"]
fn editor_survives_100_embedded_open_close_cycles_with_audio_running() {
    let entry = load_plugin_entry();
    let mut plugin = Plugin::new(&entry);
    let channels = 16;
    plugin.select_channels(channels);
    let host_window = HostWindow::open(1600, 1000);

    let gui: PluginGui = plugin
        .instance
        .plugin_handle()
        .get_extension()
        .expect("the plugin offers the GUI extension");
    let embedded = GuiConfiguration {
        api_type: GuiApiType::X11,
        is_floating: false,
    };
    let floating = GuiConfiguration {
        api_type: GuiApiType::X11,
        is_floating: true,
    };
    assert!(gui.is_api_supported(&plugin.instance.plugin_handle(), embedded));
    // The framework has no floating windows; the plugin must say so rather than fail later.
    let floating_supported = gui.is_api_supported(&plugin.instance.plugin_handle(), floating);
    eprintln!("floating X11 window supported: {floating_supported}");
    if !floating_supported {
        assert!(
            gui.create(&plugin.instance.plugin_handle(), floating)
                .is_err(),
            "create(floating) refused when unsupported"
        );
    }

    let processor = plugin.start(48_000.0, 512);
    let stop = AtomicBool::new(false);
    let buffers_done = AtomicUsize::new(0);
    let mut sizes_seen = Vec::new();
    let mut growth_note = String::new();
    let processor = std::thread::scope(|s| {
        // Stops the audio thread however this closure ends (a failed check included), so the
        // scope can join it.
        struct StopOnDrop<'a>(&'a AtomicBool);
        impl Drop for StopOnDrop<'_> {
            fn drop(&mut self) {
                self.0.store(true, Ordering::Release);
            }
        }
        let _stop_audio = StopOnDrop(&stop);
        // The audio thread: noise in, bit-identical out, in real time (512 frames ≈ 10.7 ms).
        let audio = s.spawn(|| {
            let mut p = processor;
            let mut buffers = Buffers::new(channels, 512);
            let mut rng = Rng::new(0x6a1_0001);
            while !stop.load(Ordering::Acquire) {
                for c in buffers.input.iter_mut() {
                    for x in c.iter_mut() {
                        *x = rng.noise() * 0.25;
                    }
                }
                buffers.process(&mut p, 512);
                buffers.assert_passthrough(512, "audio while the editor runs");
                buffers_done.fetch_add(1, Ordering::Relaxed);
                std::thread::sleep(Duration::from_micros(10_700));
            }
            p
        });

        let mut threads_before = None;
        let mut rss_after_warmup = 0u64;
        let mut rss_series = Vec::new();
        let mut expected_size: Option<GuiSize> = None;
        // Sizes the host sets in turn (the editor may adjust them).
        let wanted = [
            GuiSize {
                width: 1100,
                height: 720,
            },
            GuiSize {
                width: 1400,
                height: 900,
            },
            GuiSize {
                width: 900,
                height: 640,
            },
        ];
        for cycle in 0..CYCLES {
            if cycle == 1 {
                // After one full cycle every lazily created resource exists.
                threads_before = Some(thread_count());
            }
            if cycle == 10 {
                rss_after_warmup = resident_bytes();
            }
            if cycle % 10 == 0 {
                rss_series.push(resident_bytes() / 1_000_000);
            }
            let handle = plugin.instance.plugin_handle();
            gui.create(&handle, embedded)
                .unwrap_or_else(|e| panic!("cycle {cycle}: create: {e:?}"));
            let _ = gui.set_scale(&handle, 1.0);
            let size = size_of(&mut plugin, &gui);
            if let Some(expected) = expected_size {
                assert_eq!(size, expected, "cycle {cycle}: size kept across close/open");
            }
            host_window.resize(size);
            let handle = plugin.instance.plugin_handle();
            // SAFETY: the host window lives until after `destroy` below.
            unsafe { gui.set_parent(&handle, Window::from_x11_handle(host_window.id.into())) }
                .unwrap_or_else(|e| panic!("cycle {cycle}: set_parent: {e:?}"));
            gui.show(&handle)
                .unwrap_or_else(|e| panic!("cycle {cycle}: show: {e:?}"));
            // A few seconds on screen with audio running the first and last time, briefly
            // otherwise.
            let shown = if cycle == 0 || cycle == CYCLES - 1 {
                Duration::from_secs(3)
            } else {
                Duration::from_millis(60)
            };
            pump(&mut plugin, shown);

            let handle = plugin.instance.plugin_handle();
            if gui.can_resize(&handle) {
                let want = wanted[cycle % wanted.len()];
                let adjusted = gui.adjust_size(&handle, want).unwrap_or(want);
                host_window.resize(adjusted);
                gui.set_size(&handle, adjusted)
                    .unwrap_or_else(|e| panic!("cycle {cycle}: set_size {adjusted:?}: {e:?}"));
                pump(&mut plugin, Duration::from_millis(30));
                let now = size_of(&mut plugin, &gui);
                assert_eq!(now, adjusted, "cycle {cycle}: size after set_size");
                expected_size = Some(now);
            } else {
                expected_size = Some(size);
            }
            sizes_seen.push(expected_size.unwrap());

            let handle = plugin.instance.plugin_handle();
            gui.hide(&handle)
                .unwrap_or_else(|e| panic!("cycle {cycle}: hide: {e:?}"));
            gui.destroy(&handle);
            pump(&mut plugin, Duration::from_millis(20));
        }

        // No editor thread left behind: back to the count after the first cycle (a just-joined
        // thread can stay listed for a moment, so look over a short window).
        let before = threads_before.expect("measured");
        let deadline = Instant::now() + Duration::from_secs(5);
        let mut after = thread_count();
        while after > before && Instant::now() < deadline {
            std::thread::sleep(Duration::from_millis(50));
            after = thread_count();
        }
        assert!(
            after <= before,
            "threads: {before} after the first cycle, {after} at the end"
        );

        let rss_end = resident_bytes();
        let growth_mb = (rss_end as f64 - rss_after_warmup as f64) / 1e6;
        growth_note = format!(
            "resident memory after cycle 10: {:.1} MB, after cycle {CYCLES}: {:.1} MB ({growth_mb:+.1} MB)",
            rss_after_warmup as f64 / 1e6,
            rss_end as f64 / 1e6
        );
        growth_note += &format!("; MB every 10 cycles: {rss_series:?}");
        // Bounded: 90 more cycles may not keep what they allocated.
        assert!(growth_mb < 64.0, "{growth_note}");

        stop.store(true, Ordering::Release);
        audio.join().expect("audio thread")
    });
    plugin.stop(processor);
    eprintln!("{growth_note}");
    eprintln!(
        "{CYCLES} cycles, {} audio buffers passed through meanwhile; sizes set: {:?}",
        buffers_done.load(Ordering::Relaxed),
        &sizes_seen[..3]
    );
    assert!(buffers_done.load(Ordering::Relaxed) > 100);
}

/// A host without the `clap.gui` host extension (allowed by CLAP; some minimal hosts are like
/// this). The framework used to abort the process when such a host created the editor; the
/// patched copy refuses instead. Needs no display: the refusal comes before any window.
#[test]
fn a_host_without_the_gui_extension_is_refused_an_editor_not_crashed() {
    use clack_host::prelude::*;
    use fieldglass_tests::PLUGIN_ID;

    struct BareShared;
    impl SharedHandler<'_> for BareShared {
        fn request_restart(&self) {}
        fn request_process(&self) {}
        fn request_callback(&self) {}
    }
    struct BareHost;
    impl HostHandlers for BareHost {
        type Shared<'a> = BareShared;
        type MainThread<'a> = ();
        type AudioProcessor<'a> = ();
    }

    let entry = load_plugin_entry();
    let info = HostInfo::new("bare", "Fieldglass", "https://example.invalid", "0.1.0").unwrap();
    let id = std::ffi::CString::new(PLUGIN_ID).unwrap();
    let mut instance = PluginInstance::<BareHost>::new(|_| BareShared, |_| (), &entry, &id, &info)
        .expect("instance");
    let handle = instance.plugin_handle();
    let gui: PluginGui = handle.get_extension().expect("GUI extension offered");
    let embedded = GuiConfiguration {
        api_type: GuiApiType::X11,
        is_floating: false,
    };
    assert!(
        gui.create(&handle, embedded).is_err(),
        "no editor without clap.gui"
    );
}
