//! Fieldglass plugin: a real-time monitor for higher-order Ambisonics.
//!
//! The audio path is a pure pass-through: the host's buffer is never written. `activate()`
//! starts the analysis engine (`fieldglass-dsp`) with its own thread; `process()` copies the
//! buffer into the engine's pooled blocks and returns; the editor reads the latest snapshot.

pub mod adm;
pub mod ambisonic_buses;
pub mod audio;
pub mod compare;
pub mod editor;
pub mod look;
pub mod opus;
pub mod params;
pub mod picture;
pub mod player;
pub mod scan;
pub mod wav;

use nice_plug::prelude::*;
use std::num::NonZeroU32;
use std::sync::Arc;

/// Ambisonic orders the plugin offers as layouts: (N+1)² channels in and out.
pub const SUPPORTED_ORDERS: [u32; 7] = [1, 2, 3, 4, 5, 6, 7];

const fn layout_for_order(order: u32) -> AudioIOLayout {
    let channels = (order + 1) * (order + 1);
    AudioIOLayout {
        main_input_channels: NonZeroU32::new(channels),
        main_output_channels: NonZeroU32::new(channels),
        aux_input_ports: &[],
        aux_output_ports: &[],
        names: PortNames::const_default(),
    }
}

pub use params::FieldglassParams;

#[derive(Default)]
pub struct Fieldglass {
    params: Arc<FieldglassParams>,
    engine: audio::EngineHost,
}

impl Plugin for Fieldglass {
    const NAME: &'static str = "Fieldglass";
    const VENDOR: &'static str = "Fieldglass";
    const URL: &'static str = "https://example.invalid/fieldglass";
    const EMAIL: &'static str = "fieldglass@example.invalid";
    const VERSION: &'static str = env!("CARGO_PKG_VERSION");

    const AUDIO_IO_LAYOUTS: &'static [AudioIOLayout] = &[
        layout_for_order(SUPPORTED_ORDERS[0]),
        layout_for_order(SUPPORTED_ORDERS[1]),
        layout_for_order(SUPPORTED_ORDERS[2]),
        layout_for_order(SUPPORTED_ORDERS[3]),
        layout_for_order(SUPPORTED_ORDERS[4]),
        layout_for_order(SUPPORTED_ORDERS[5]),
        layout_for_order(SUPPORTED_ORDERS[6]),
    ];

    type Editor = nice_plug_egui::EguiEditor<editor::FieldglassApp>;
    type SysExMessage = ();
    type BackgroundTask = ();

    fn params(&self) -> Arc<dyn Params> {
        self.params.clone()
    }

    fn editor(&mut self, _async_executor: AsyncExecutor<Self>) -> Option<Self::Editor> {
        let data = editor::EditorData::new(
            self.engine.control().clone(),
            self.engine.slot().clone(),
            self.params.clone(),
        );
        editor::create_editor(data)
    }

    fn activate(
        &mut self,
        audio_io_layout: &AudioIOLayout,
        buffer_config: &BufferConfig,
        _context: &mut impl ActivateContext<Self>,
    ) -> bool {
        let channels = audio_io_layout
            .main_input_channels
            .map_or(0, |c| c.get() as usize);
        self.params.apply_to(self.engine.control());
        let started = self.engine.start(
            buffer_config.sample_rate,
            channels,
            buffer_config.max_buffer_size as usize,
        );
        if let Err(e) = started {
            // Audio still passes through; only the analysis is missing.
            nice_log!("Fieldglass analysis not started: {e}");
        }
        true
    }

    fn deactivate(&mut self) {
        self.engine.stop();
    }

    fn process(
        &mut self,
        buffer: &mut Buffer,
        _aux: &mut AuxiliaryBuffers,
        _context: &mut impl ProcessContext<Self>,
    ) -> ProcessStatus {
        // Pass-through: the buffer already holds the input and is only read here.
        audio::apply_parameters(&self.params, self.engine.control());
        self.engine.push(buffer.as_slice_immutable());
        ProcessStatus::Normal
    }
}

impl ClapPlugin for Fieldglass {
    const CLAP_ID: &'static str = "org.fieldglass.monitor";
    const CLAP_DESCRIPTION: Option<&'static str> =
        Some("Sound-field map, channel meters and format check for higher-order Ambisonics");
    const CLAP_MANUAL_URL: Option<&'static str> = None;
    const CLAP_SUPPORT_URL: Option<&'static str> = None;
    const CLAP_FEATURES: &'static [ClapFeature] = &[ClapFeature::Analyzer, ClapFeature::Ambisonic];

    fn ambisonic_buses(&self) -> Option<Arc<dyn AmbisonicBuses>> {
        Some(Arc::new(ambisonic_buses::Buses::new(self.params.clone())))
    }
}

impl Vst3Plugin for Fieldglass {
    const VST3_CLASS_ID: [u8; 16] = *b"FieldglassHOAmon";
    const VST3_SUBCATEGORIES: &'static [Vst3SubCategory] = &[
        Vst3SubCategory::Fx,
        Vst3SubCategory::Analyzer,
        Vst3SubCategory::Spatial,
    ];

    fn ambisonic_buses(&self) -> Option<Arc<dyn AmbisonicBuses>> {
        Some(Arc::new(ambisonic_buses::Buses::new(self.params.clone())))
    }
}

nice_export_clap!(Fieldglass);
nice_export_vst3!(Fieldglass);
