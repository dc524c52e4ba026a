//! End-to-end tests live in `tests/tests/`; this library holds shared helpers.
//!
//! The main helper is a small CLAP host built on `clack-host`: it loads the plugin's shared
//! library (`libfieldglass.so`, the plugin package's cdylib) exactly as a host application would,
//! through the CLAP C ABI, and offers what the tests need: layouts, activation, processing with
//! bit-exact comparison, parameters, state.

use clack_extensions::ambisonic::{AmbisonicConfig, PluginAmbisonic};
use clack_extensions::audio_ports::{AudioPortInfoBuffer, PluginAudioPorts};
use clack_extensions::audio_ports_config::{AudioPortsConfigBuffer, PluginAudioPortsConfig};
use clack_extensions::gui::{GuiSize, HostGui, HostGuiImpl};
use clack_extensions::params::{ParamInfoBuffer, ParamInfoFlags, PluginParams};
use clack_extensions::state::PluginState;
use clack_host::events::event_types::ParamValueEvent;
use clack_host::prelude::*;
use clack_host::process::StartedPluginAudioProcessor;
use clack_host::utils::ClapId;
use std::ffi::CString;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

/// The plugin's CLAP id (plugin/src/lib.rs).
pub const PLUGIN_ID: &str = "org.fieldglass.monitor";

/// Channel counts of the plugin's layouts, orders 1 to 7: (N+1)².
pub const LAYOUT_CHANNELS: [usize; 7] = [4, 9, 16, 25, 36, 49, 64];

/// Name of the plugin library as cargo writes it on this platform.
pub fn library_file_name() -> String {
    format!(
        "{}fieldglass{}",
        std::env::consts::DLL_PREFIX,
        std::env::consts::DLL_SUFFIX
    )
}

/// Where the plugin's shared library is.
///
/// This package depends on the `fieldglass` package, whose `[lib]` has crate-type
/// `["cdylib", "lib"]`; cargo builds every crate type of a dependency's library, so the cdylib
/// is written (unhashed) into the same `deps/` directory as the test executables, in the same
/// profile, before the tests are linked. The test executable's own path therefore finds it,
/// whatever `CARGO_TARGET_DIR` is. `FIELDGLASS_PLUGIN_LIB` overrides the search (to test a
/// bundle built elsewhere, e.g. a release build).
pub fn plugin_library_path() -> PathBuf {
    if let Some(p) = std::env::var_os("FIELDGLASS_PLUGIN_LIB") {
        return PathBuf::from(p);
    }
    let exe = std::env::current_exe().expect("path of the test executable");
    let name = library_file_name();
    let mut candidates = Vec::new();
    if let Some(deps) = exe.parent() {
        candidates.push(deps.join(&name));
        if let Some(profile) = deps.parent() {
            candidates.push(profile.join(&name));
        }
    }
    candidates
        .iter()
        .find(|p| p.is_file())
        .cloned()
        .unwrap_or_else(|| {
            panic!(
                "plugin library not found (looked at {candidates:?}); build it with \
                 `cargo build -p fieldglass` or set FIELDGLASS_PLUGIN_LIB"
            )
        })
}

/// Loads the plugin's CLAP entry from `path`.
pub fn load_entry(path: &Path) -> PluginEntry {
    // SAFETY: the library is our own plugin, built by this workspace; loading it runs its
    // initialisers, which are those of a nice-plug plugin.
    unsafe { PluginEntry::load(path) }
        .unwrap_or_else(|e| panic!("cannot load {}: {e}", path.display()))
}

/// Loads the plugin library found by [`plugin_library_path`].
pub fn load_plugin_entry() -> PluginEntry {
    load_entry(&plugin_library_path())
}

/// Deterministic pseudo-random numbers (xorshift64*), so every failure can be replayed.
#[derive(Clone, Debug)]
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Self(seed.max(1))
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }
    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Uniform in [lo, hi] (integers).
    pub fn range(&mut self, lo: usize, hi: usize) -> usize {
        lo + (self.next_u64() % (hi - lo + 1) as u64) as usize
    }
    /// White noise sample in [-1, 1).
    pub fn noise(&mut self) -> f32 {
        (self.unit() * 2.0 - 1.0) as f32
    }
}

/// Host callbacks shared between threads. The plugin may ask for a main-thread callback (state
/// changes, parameter notifications); the host runs it at its next chance, as a host's event
/// loop would. The GUI callbacks (`clap.gui` host side) are counted for the editor tests.
#[derive(Default)]
pub struct HostShared {
    callback_requested: AtomicBool,
    pub gui_resize_requests: AtomicUsize,
    pub gui_closed: AtomicUsize,
}

impl HostGuiImpl for HostShared {
    fn resize_hints_changed(&self) {}
    fn request_resize(&self, _new_size: GuiSize) -> Result<(), HostError> {
        // A host with an embedded editor accepts and resizes its window; the tests' host window
        // is resized by the test itself.
        self.gui_resize_requests.fetch_add(1, Ordering::Relaxed);
        Ok(())
    }
    fn request_show(&self) -> Result<(), HostError> {
        Ok(())
    }
    fn request_hide(&self) -> Result<(), HostError> {
        Ok(())
    }
    fn closed(&self, _was_destroyed: bool) {
        self.gui_closed.fetch_add(1, Ordering::Relaxed);
    }
}

impl SharedHandler<'_> for HostShared {
    fn request_restart(&self) {}
    fn request_process(&self) {}
    fn request_callback(&self) {
        self.callback_requested.store(true, Ordering::Release);
    }
}

/// The harness's host type: the required callbacks and the `clap.gui` host extension.
pub struct TestHost;

impl HostHandlers for TestHost {
    type Shared<'a> = HostShared;
    type MainThread<'a> = ();
    type AudioProcessor<'a> = ();

    fn declare_extensions(builder: &mut HostExtensions<Self>, _shared: &Self::Shared<'_>) {
        builder.register::<HostGui>();
    }
}

pub type Started = StartedPluginAudioProcessor<TestHost>;

/// A parameter as the plugin describes it through the params extension.
#[derive(Clone, Debug)]
pub struct ParamDesc {
    pub id: u32,
    pub name: String,
    pub min: f64,
    pub max: f64,
    pub default: f64,
    pub stepped: bool,
}

/// A main-thread layout (audio-ports-config entry).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct LayoutDesc {
    pub id: u32,
    pub name: String,
    pub input_ports: u32,
    pub output_ports: u32,
    pub main_input_channels: Option<u32>,
    pub main_output_channels: Option<u32>,
    /// Port types of the main ports (CLAP's strings, e.g. "ambisonic"), if any.
    pub main_input_type: Option<String>,
    pub main_output_type: Option<String>,
}

/// An audio port as the audio-ports extension describes it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PortDesc {
    pub id: u32,
    pub channels: u32,
    pub port_type: Option<String>,
    pub in_place_pair: Option<u32>,
}

/// An ambisonic configuration as CLAP numbers it (clap/ext/ambisonic.h): ordering FuMa = 0,
/// ACN = 1; normalisation maxN = 0, SN3D = 1, N3D = 2, SN2D = 3, N2D = 4.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct AmbiConfig {
    pub ordering: u32,
    pub normalization: u32,
}

/// One plugin instance, created through the entry's plugin factory.
pub struct Plugin {
    pub instance: PluginInstance<TestHost>,
}

impl Plugin {
    pub fn new(entry: &PluginEntry) -> Self {
        let host = HostInfo::new(
            "fieldglass-tests",
            "Fieldglass",
            "https://example.invalid/fieldglass",
            "0.1.0",
        )
        .expect("host info");
        let id = CString::new(PLUGIN_ID).unwrap();
        let instance =
            PluginInstance::<TestHost>::new(|_| HostShared::default(), |_| (), entry, &id, &host)
                .expect("plugin instance");
        Self { instance }
    }

    /// Runs a main-thread callback if the plugin asked for one.
    pub fn run_main_thread_callbacks(&mut self) {
        let requested = self
            .instance
            .access_shared_handler(|s| s.callback_requested.swap(false, Ordering::AcqRel));
        if requested {
            self.instance.call_on_main_thread_callback();
        }
    }

    fn handle(&mut self) -> PluginMainThreadHandle<'_> {
        self.instance.plugin_handle()
    }

    /// The layouts offered through the audio-ports-config extension.
    pub fn layouts(&mut self) -> Vec<LayoutDesc> {
        let handle = self.handle();
        let ext: PluginAudioPortsConfig = handle
            .get_extension()
            .expect("audio-ports-config extension");
        let mut buffer = AudioPortsConfigBuffer::new();
        (0..ext.count(&handle))
            .map(|i| {
                let c = ext.get(&handle, i, &mut buffer).expect("layout info");
                LayoutDesc {
                    id: c.id.get(),
                    name: String::from_utf8_lossy(c.name).into_owned(),
                    input_ports: c.input_port_count,
                    output_ports: c.output_port_count,
                    main_input_channels: c.main_input.map(|p| p.channel_count),
                    main_output_channels: c.main_output.map(|p| p.channel_count),
                    main_input_type: c
                        .main_input
                        .and_then(|p| p.port_type)
                        .map(|t| t.0.to_string_lossy().into_owned()),
                    main_output_type: c
                        .main_output
                        .and_then(|p| p.port_type)
                        .map(|t| t.0.to_string_lossy().into_owned()),
                }
            })
            .collect()
    }

    /// Selects a layout by its config id (plugin inactive).
    pub fn select_layout(&mut self, id: u32) -> bool {
        let handle = self.handle();
        let ext: PluginAudioPortsConfig = handle
            .get_extension()
            .expect("audio-ports-config extension");
        ext.select(&handle, ClapId::new(id)).is_ok()
    }

    /// Selects the layout with `channels` channels in and out.
    pub fn select_channels(&mut self, channels: usize) {
        let layout = self
            .layouts()
            .into_iter()
            .find(|l| l.main_input_channels == Some(channels as u32))
            .unwrap_or_else(|| panic!("no layout with {channels} channels"));
        assert!(self.select_layout(layout.id), "select {layout:?}");
    }

    /// Channel counts of the current audio ports, (inputs, outputs), one entry per port.
    pub fn port_channels(&mut self) -> (Vec<u32>, Vec<u32>) {
        let (inputs, outputs) = self.ports();
        let counts = |ports: Vec<PortDesc>| ports.iter().map(|p| p.channels).collect();
        (counts(inputs), counts(outputs))
    }

    /// The current audio ports, (inputs, outputs).
    pub fn ports(&mut self) -> (Vec<PortDesc>, Vec<PortDesc>) {
        let handle = self.handle();
        let ext: PluginAudioPorts = handle.get_extension().expect("audio-ports extension");
        let mut buffer = AudioPortInfoBuffer::new();
        let mut side = |is_input| -> Vec<PortDesc> {
            (0..ext.count(&handle, is_input))
                .map(|i| {
                    let info = ext
                        .get(&handle, i, is_input, &mut buffer)
                        .expect("port info");
                    PortDesc {
                        id: info.id.get(),
                        channels: info.channel_count,
                        port_type: info.port_type.map(|t| t.0.to_string_lossy().into_owned()),
                        in_place_pair: info.in_place_pair.map(|p| p.get()),
                    }
                })
                .collect()
        };
        let inputs = side(true);
        let outputs = side(false);
        (inputs, outputs)
    }

    /// Whether the plugin offers the `clap.ambisonic` extension.
    pub fn has_ambisonic_extension(&mut self) -> bool {
        self.handle().get_extension::<PluginAmbisonic>().is_some()
    }

    /// `clap.ambisonic`'s `is_config_supported` for raw CLAP numbers.
    pub fn ambisonic_supported(&mut self, config: AmbiConfig) -> bool {
        let handle = self.handle();
        let ext: PluginAmbisonic = handle.get_extension().expect("ambisonic extension");
        let raw = clap_sys::ext::ambisonic::clap_ambisonic_config {
            ordering: config.ordering,
            normalization: config.normalization,
        };
        ext.is_config_supported(&handle, AmbisonicConfig::from_raw(raw))
    }

    /// `clap.ambisonic`'s `get_config` for a port.
    pub fn ambisonic_config(&mut self, is_input: bool, port_index: u32) -> Option<AmbiConfig> {
        let handle = self.handle();
        let ext: PluginAmbisonic = handle.get_extension().expect("ambisonic extension");
        ext.get_config(&handle, is_input, port_index).map(|c| {
            let raw = c.as_raw();
            AmbiConfig {
                ordering: raw.ordering,
                normalization: raw.normalization,
            }
        })
    }

    /// Every parameter the plugin lists.
    pub fn params(&mut self) -> Vec<ParamDesc> {
        let handle = self.handle();
        let ext: PluginParams = handle.get_extension().expect("params extension");
        let mut buffer = ParamInfoBuffer::new();
        (0..ext.count(&handle))
            .map(|i| {
                let p = ext.get_info(&handle, i, &mut buffer).expect("param info");
                ParamDesc {
                    id: p.id.get(),
                    name: String::from_utf8_lossy(p.name).into_owned(),
                    min: p.min_value,
                    max: p.max_value,
                    default: p.default_value,
                    stepped: p.flags.contains(ParamInfoFlags::IS_STEPPED),
                }
            })
            .collect()
    }

    pub fn param_value(&mut self, id: u32) -> Option<f64> {
        let handle = self.handle();
        let ext: PluginParams = handle.get_extension().expect("params extension");
        ext.get_value(&handle, ClapId::new(id))
    }

    /// Sets parameters while the plugin is inactive (params.flush on the main thread).
    pub fn flush_params(&mut self, values: &[(u32, f64)]) {
        let events: Vec<ParamValueEvent> = values
            .iter()
            .map(|&(id, v)| ParamValueEvent::new(0, ClapId::new(id), Pckn::match_all(), v))
            .collect();
        let mut input = EventBuffer::with_capacity(events.len());
        for e in &events {
            input.push(e);
        }
        let mut output = EventBuffer::new();
        let mut handle = self
            .instance
            .inactive_plugin_handle()
            .expect("flush_params needs an inactive plugin");
        let ext: PluginParams = handle.get_extension().expect("params extension");
        ext.flush(&mut handle, &input.as_input(), &mut output.as_output());
        self.run_main_thread_callbacks();
    }

    /// Saves the plugin's state through the state extension.
    pub fn save_state(&mut self) -> Vec<u8> {
        let handle = self.handle();
        let ext: PluginState = handle.get_extension().expect("state extension");
        let mut bytes = Vec::new();
        ext.save(&handle, &mut bytes).expect("state save");
        bytes
    }

    /// Loads state through the state extension; false if the plugin refused it.
    pub fn load_state(&mut self, bytes: &[u8]) -> bool {
        let handle = self.handle();
        let ext: PluginState = handle.get_extension().expect("state extension");
        let mut reader = bytes;
        let ok = ext.load(&handle, &mut reader).is_ok();
        self.run_main_thread_callbacks();
        ok
    }

    /// Activates at `sample_rate` with buffers of 1 to `max_frames` frames and starts processing.
    pub fn start(&mut self, sample_rate: f64, max_frames: u32) -> Started {
        let stopped = self
            .instance
            .activate(
                |_, _| (),
                PluginAudioConfiguration {
                    sample_rate,
                    min_frames_count: 1,
                    max_frames_count: max_frames,
                },
            )
            .unwrap_or_else(|e| panic!("activate at {sample_rate} Hz, {max_frames}: {e}"));
        stopped
            .start_processing()
            .unwrap_or_else(|e| panic!("start processing: {e}"))
    }

    /// Stops processing and deactivates.
    pub fn stop(&mut self, processor: Started) {
        let stopped = processor.stop_processing();
        self.instance.deactivate(stopped);
        self.run_main_thread_callbacks();
    }
}

/// Bit pattern written into the output buffers before every process call: a NaN with a payload
/// that none of the test signals contains, so an output the plugin did not write cannot pass.
pub const OUTPUT_SENTINEL_BITS: u32 = 0x7fa5_a5a5;

/// Host-side audio buffers for one layout (separate input and output, as most hosts do) and
/// the event list for the next call.
pub struct Buffers {
    pub input: Vec<Vec<f32>>,
    pub output: Vec<Vec<f32>>,
    in_ports: AudioPorts,
    out_ports: AudioPorts,
    events: EventBuffer,
    out_events: EventBuffer,
}

impl Buffers {
    pub fn new(channels: usize, max_frames: usize) -> Self {
        Self {
            input: vec![vec![0.0; max_frames]; channels],
            output: vec![vec![0.0; max_frames]; channels],
            in_ports: AudioPorts::with_capacity(channels, 1),
            out_ports: AudioPorts::with_capacity(channels, 1),
            events: EventBuffer::with_capacity(64),
            out_events: EventBuffer::with_capacity(64),
        }
    }

    pub fn channels(&self) -> usize {
        self.input.len()
    }

    /// Queues a parameter change at `time` (frames into the next buffer).
    pub fn push_param(&mut self, time: u32, id: u32, value: f64) {
        self.events.push(&ParamValueEvent::new(
            time,
            ClapId::new(id),
            Pckn::match_all(),
            value,
        ));
    }

    /// Processes the first `frames` frames of `input` into `output` and clears the event list.
    pub fn process(&mut self, processor: &mut Started, frames: usize) -> ProcessStatus {
        let sentinel = f32::from_bits(OUTPUT_SENTINEL_BITS);
        for c in &mut self.output {
            c[..frames].fill(sentinel);
        }
        self.events.sort();
        self.out_events.clear();
        let inputs = self.in_ports.with_input_buffers([AudioPortBuffer {
            latency: 0,
            channels: AudioPortBufferType::f32_input_only(
                self.input
                    .iter_mut()
                    .map(|c| InputChannel::variable(&mut c[..frames])),
            ),
        }]);
        let mut outputs = self.out_ports.with_output_buffers([AudioPortBuffer {
            latency: 0,
            channels: AudioPortBufferType::f32_output_only(
                self.output.iter_mut().map(|c| &mut c[..frames]),
            ),
        }]);
        let status = processor
            .process(
                &inputs,
                &mut outputs,
                &self.events.as_input(),
                &mut self.out_events.as_output(),
                None,
                None,
            )
            .expect("process");
        self.events.clear();
        status
    }

    /// Processes the first `frames` frames in place, as many hosts do: the input and output
    /// ports share one set of channel buffers (`output`, filled with a copy of `input` first).
    /// Afterwards `output` must again equal `input`.
    pub fn process_in_place(&mut self, processor: &mut Started, frames: usize) -> ProcessStatus {
        use clap_sys::audio_buffer::clap_audio_buffer;
        for (i, o) in self.input.iter().zip(&mut self.output) {
            o[..frames].copy_from_slice(&i[..frames]);
        }
        self.events.sort();
        self.out_events.clear();
        // Host-side allocation, outside the plugin's process call.
        let mut channels: Vec<*mut f32> = self.output.iter_mut().map(|c| c.as_mut_ptr()).collect();
        let port = clap_audio_buffer {
            data32: channels.as_mut_ptr(),
            data64: std::ptr::null_mut(),
            channel_count: channels.len() as u32,
            latency: 0,
            constant_mask: 0,
        };
        let input_ports = [port];
        let mut output_ports = [port];
        // SAFETY: both descriptions point at the same live channel buffers of at least `frames`
        // frames (CLAP allows input and output to share buffers); nothing else touches them
        // during the call.
        let (inputs, mut outputs) = unsafe {
            (
                InputAudioBuffers::from_raw_buffers(&input_ports, frames as u32),
                OutputAudioBuffers::from_raw_buffers(&mut output_ports, frames as u32),
            )
        };
        let status = processor
            .process(
                &inputs,
                &mut outputs,
                &self.events.as_input(),
                &mut self.out_events.as_output(),
                None,
                None,
            )
            .expect("process in place");
        self.events.clear();
        status
    }

    /// Index of the first sample whose output bits differ from the input's, if any.
    pub fn first_difference(&self, frames: usize) -> Option<(usize, usize, u32, u32)> {
        for (c, (i, o)) in self.input.iter().zip(&self.output).enumerate() {
            for (k, (a, b)) in i[..frames].iter().zip(&o[..frames]).enumerate() {
                if a.to_bits() != b.to_bits() {
                    return Some((c, k, a.to_bits(), b.to_bits()));
                }
            }
        }
        None
    }

    /// Panics unless the output of the last call is bit-identical to its input.
    pub fn assert_passthrough(&self, frames: usize, context: &str) {
        if let Some((c, k, a, b)) = self.first_difference(frames) {
            panic!(
                "{context}: output differs from input at channel {c}, frame {k}: \
                 in {a:#010x}, out {b:#010x}"
            );
        }
    }
}

/// Threads of this process (entries of /proc/self/task).
pub fn thread_count() -> usize {
    std::fs::read_dir("/proc/self/task")
        .map(|d| d.count())
        .unwrap_or(0)
}

/// Resident set size of this process, bytes (/proc/self/statm, second field, in pages).
pub fn resident_bytes() -> u64 {
    let statm = std::fs::read_to_string("/proc/self/statm").unwrap_or_default();
    let pages: u64 = statm
        .split_whitespace()
        .nth(1)
        .and_then(|v| v.parse().ok())
        .unwrap_or(0);
    // SAFETY: sysconf only reads a system constant.
    let page = unsafe { libc::sysconf(libc::_SC_PAGESIZE) }.max(1) as u64;
    pages * page
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_single_changed_bit_is_a_difference() {
        let mut b = Buffers::new(2, 8);
        b.input[1][5] = f32::from_bits(0x7fc0_0001);
        for (i, o) in b.input.iter().zip(b.output.iter_mut()) {
            o.copy_from_slice(i);
        }
        assert_eq!(b.first_difference(8), None);
        // NaN == NaN is false, but equal bits are equal; a different payload is a difference.
        b.output[1][5] = f32::from_bits(0x7fc0_0002);
        assert_eq!(
            b.first_difference(8),
            Some((1, 5, 0x7fc0_0001, 0x7fc0_0002))
        );
        // -0.0 == 0.0 as floats, not as bits.
        b.output[1][5] = b.input[1][5];
        b.output[0][0] = -0.0;
        assert_eq!(b.first_difference(8), Some((0, 0, 0, 0x8000_0000)));
        // Frames past `frames` are not compared.
        assert_eq!(b.first_difference(0), None);
    }

    #[test]
    #[should_panic(expected = "output differs from input")]
    fn an_unwritten_output_fails_the_check() {
        let mut b = Buffers::new(1, 4);
        b.output[0].fill(f32::from_bits(OUTPUT_SENTINEL_BITS));
        b.assert_passthrough(4, "unwritten");
    }
}
