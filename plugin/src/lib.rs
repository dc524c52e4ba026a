//! Fieldglass plugin: a real-time monitor for higher-order Ambisonics.
//!
//! The audio path is a pure pass-through: the host's buffer is never written. Analysis lives in
//! `fieldglass-dsp`; this crate wires it to the plugin formats and (later) the editor.

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

#[derive(Params, Default)]
pub struct FieldglassParams {}

#[derive(Default)]
pub struct Fieldglass {
    params: Arc<FieldglassParams>,
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

    type Editor = ();
    type SysExMessage = ();
    type BackgroundTask = ();

    fn params(&self) -> Arc<dyn Params> {
        self.params.clone()
    }

    fn process(
        &mut self,
        _buffer: &mut Buffer,
        _aux: &mut AuxiliaryBuffers,
        _context: &mut impl ProcessContext<Self>,
    ) -> ProcessStatus {
        // Pass-through: the buffer already holds the input and is left untouched.
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
}

impl Vst3Plugin for Fieldglass {
    const VST3_CLASS_ID: [u8; 16] = *b"FieldglassHOAmon";
    const VST3_SUBCATEGORIES: &'static [Vst3SubCategory] = &[
        Vst3SubCategory::Fx,
        Vst3SubCategory::Analyzer,
        Vst3SubCategory::Spatial,
    ];
}

nice_export_clap!(Fieldglass);
nice_export_vst3!(Fieldglass);
