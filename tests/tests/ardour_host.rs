//! A real host: Debian's Ardour 7 (packages `ardour`; `.ci/run` installs it) loads the plugin as
//! a VST3 bundle made from the library cargo built.
//!
//! 1. Ardour's VST3 scanner (`/usr/lib/ardour7/ardour-vst3-scanner`) lists the bundle: one
//!    class, 4 inputs and 4 outputs by default (the first layout, first order).
//! 2. `ardour7-lua` runs tests/ardour/session.lua: a session on Ardour's dummy backend (white
//!    noise in), a 16-channel track with the plugin inserted, monitoring and recording its
//!    input, and a second track recording the first one's output. The two recordings must be
//!    bit-identical once the roll has started (Ardour ramps the first periods of a roll; the
//!    same ramp shows without the plugin).
//!
//! Run with `cargo test -p fieldglass-tests --test ardour_host -- --ignored --nocapture`.

use fieldglass_tests::plugin_library_path;
use std::path::{Path, PathBuf};
use std::process::Command;

const ARDOUR_LIB: &str = "/usr/lib/ardour7";

/// A scratch HOME for Ardour (its plugin cache and config go there) holding the bundle in
/// `~/.vst3`, where Ardour looks for VST3 bundles.
struct Scratch {
    home: PathBuf,
    bundle: PathBuf,
}

impl Scratch {
    fn new(tag: &str) -> Self {
        let home =
            std::env::temp_dir().join(format!("fieldglass-ardour-{tag}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&home);
        let bundle = home.join(".vst3/Fieldglass.vst3");
        // The VST3 bundle layout on Linux: Contents/<arch>-linux/<name>.so.
        let binary_dir = bundle.join(format!("Contents/{}-linux", std::env::consts::ARCH));
        std::fs::create_dir_all(&binary_dir).expect("bundle folders");
        std::fs::copy(plugin_library_path(), binary_dir.join("Fieldglass.so"))
            .expect("copy the library");
        Self { home, bundle }
    }

    /// Ardour's tools need their library folder on the loader path (Debian's wrapper scripts set
    /// it the same way).
    fn command(&self, program: &str) -> Command {
        let mut c = Command::new(program);
        c.env("HOME", &self.home).env("LD_LIBRARY_PATH", ARDOUR_LIB);
        c
    }

    /// Runs a script of tests/ardour/ with `ardour7-lua` (bounded by `timeout`); returns its
    /// output, after checking it succeeded.
    fn lua(&self, script: &str, session: &Path) -> String {
        let script = Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("ardour")
            .join(script);
        let output = self
            .command("timeout")
            .arg("180")
            .arg("ardour7-lua")
            .arg(&script)
            .env("FIELDGLASS_SESSION_DIR", session)
            .env("FIELDGLASS_SECONDS", "3")
            .output()
            .expect("ardour7-lua runs (Debian package `ardour`)");
        let text = String::from_utf8_lossy(&output.stdout).into_owned()
            + &String::from_utf8_lossy(&output.stderr);
        eprintln!("{text}");
        assert!(
            output.status.success(),
            "ardour7-lua {} failed",
            script.display()
        );
        text
    }

    fn scan(&self) -> String {
        let output = self
            .command(&format!("{ARDOUR_LIB}/ardour-vst3-scanner"))
            .arg("-v")
            .arg(&self.bundle)
            .output()
            .expect("ardour-vst3-scanner runs (Debian package `ardour`)");
        let text = String::from_utf8_lossy(&output.stdout).into_owned()
            + &String::from_utf8_lossy(&output.stderr);
        assert!(output.status.success(), "scanner failed:\n{text}");
        text
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.home);
    }
}

#[test]
#[ignore = "needs Debian's ardour package; .ci/run installs it and runs this"]
fn ardour_scanner_lists_the_bundle_with_its_io() {
    let scratch = Scratch::new("scan");
    let text = scratch.scan();
    eprintln!("{text}");
    assert!(text.contains("Class count: 1"), "{text}");
    assert!(text.contains("Found Plugin: Fieldglass"), "{text}");
    assert!(text.contains(r#"n_inputs="4" n_outputs="4""#), "{text}");
    assert!(text.contains(r#"category="Fx|Analyzer|Spatial""#), "{text}");
}

/// The samples (as bits) of a mono 32-bit float WAV file as Ardour records them.
fn read_float_wav(path: &Path) -> Vec<u32> {
    let bytes = std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    assert_eq!(&bytes[..4], b"RIFF");
    assert_eq!(&bytes[8..12], b"WAVE");
    let mut at = 12;
    let mut format = None;
    while at + 8 <= bytes.len() {
        let id = &bytes[at..at + 4];
        let len = u32::from_le_bytes(bytes[at + 4..at + 8].try_into().unwrap()) as usize;
        let body = &bytes[at + 8..(at + 8 + len).min(bytes.len())];
        if id == b"fmt " {
            let tag = u16::from_le_bytes([body[0], body[1]]);
            let channels = u16::from_le_bytes([body[2], body[3]]);
            let bits = u16::from_le_bytes([body[14], body[15]]);
            format = Some((tag, channels, bits));
        } else if id == b"data" {
            // WAVE_FORMAT_IEEE_FLOAT (3), mono, 32 bits.
            assert_eq!(format, Some((3, 1, 32)), "{}", path.display());
            return body
                .chunks_exact(4)
                .map(|b| u32::from_le_bytes(b.try_into().unwrap()))
                .collect();
        }
        at += 8 + len + (len & 1);
    }
    panic!("{}: no data chunk", path.display());
}

/// The recording of `track`'s channel `channel` (0-based). Ardour names a take's channel files
/// `Take1_<track>-1%<c>.wav`, where <c> is the decimal code of 'a' + channel.
fn take(session: &Path, track: &str, channel: usize) -> Vec<u32> {
    let name = format!("Take1_{track}-1%{}.wav", b'a' as usize + channel);
    // interchange/<name>/audiofiles; <name> is Ardour's choice (the folder's or the session's).
    let interchange = session.join("interchange");
    let folder = std::fs::read_dir(&interchange)
        .unwrap_or_else(|e| panic!("{}: {e}", interchange.display()))
        .filter_map(|e| e.ok())
        .map(|e| e.path().join("audiofiles"))
        .find(|p| p.join(&name).is_file())
        .unwrap_or_else(|| panic!("no {name} under {}", interchange.display()));
    read_float_wav(&folder.join(name))
}

#[test]
#[ignore = "needs Debian's ardour package; .ci/run installs it and runs this"]
fn ardour_runs_a_third_order_track_through_the_plugin_bit_identically() {
    let scratch = Scratch::new("session");
    // First start (see warmup.lua), then the scan whose cache Ardour reads its VST3 list from,
    // then the session.
    let text = scratch.lua("warmup.lua", &scratch.home.join("warmup"));
    assert!(text.contains("FG warm"), "{text}");
    scratch.scan();
    let session = scratch.home.join("session");
    let text = scratch.lua("session.lua", &session);
    assert!(text.contains("FG tracks 16 16"), "16-channel track");
    assert!(
        text.contains("FG plugin true 16 16"),
        "plugin inserted, active, 16 in 16 out"
    );
    assert!(text.contains("FG rolling true true"), "rolled and recorded");
    assert!(text.contains("FG saved"));

    let mut checked = 0usize;
    let mut ramp = 0usize;
    for channel in 0..16 {
        let input = take(&session, "Amb", channel);
        let output = take(&session, "Out", channel);
        assert_eq!(input.len(), output.len(), "channel {channel}: take lengths");
        assert!(
            input.len() > 48_000,
            "channel {channel}: {} frames recorded",
            input.len()
        );
        // Frames from the last difference on must all agree; the differing head must be the
        // roll's ramp (a few periods), not the programme.
        let first_equal_run = (0..input.len())
            .rev()
            .find(|&k| input[k] != output[k])
            .map_or(0, |k| k + 1);
        assert!(
            first_equal_run <= 8192,
            "channel {channel}: output differs from input up to frame {first_equal_run}"
        );
        assert!(input[first_equal_run..].iter().filter(|&&x| x != 0).count() > 40_000);
        ramp = ramp.max(first_equal_run);
        checked += input.len() - first_equal_run;
    }
    eprintln!(
        "16 channels: {checked} samples bit-identical through Ardour and the plugin; \
         the first {ramp} frames of the roll are Ardour's ramp"
    );
}
