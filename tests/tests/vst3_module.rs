//! The built plugin library as a VST3 module, driven through raw COM calls (the `vst3` crate's
//! bindings): the module entry points, the factory and its class, and a component that takes
//! every layout and passes audio through bit-identically.
//!
//! The library is the same file cargo builds for the CLAP tests; a VST3 bundle
//! (`Fieldglass.vst3/Contents/x86_64-linux/Fieldglass.so`) is that file renamed.

use fieldglass_tests::{LAYOUT_CHANNELS, Rng, plugin_library_path};
use std::ffi::{CStr, c_void};
use std::mem::ManuallyDrop;
use std::ptr;
use vst3::ComPtr;
use vst3::Steinberg::Vst::{
    AudioBusBuffers, AudioBusBuffers__type0, BusDirections_, BusInfo, IAudioProcessor,
    IAudioProcessorTrait, IComponent, IComponent_iid, IComponentTrait, MediaTypes_, ProcessData,
    ProcessModes_, ProcessSetup, SpeakerArr, SpeakerArrangement, SymbolicSampleSizes_,
};
use vst3::Steinberg::{
    IPluginBaseTrait, IPluginFactory, IPluginFactory2, IPluginFactory2Trait, IPluginFactoryTrait,
    PClassInfo, PClassInfo2, PFactoryInfo, kResultOk,
};

/// The class id the plugin declares (`Vst3Plugin::VST3_CLASS_ID` in plugin/src/lib.rs).
const CLASS_ID: [u8; 16] = *b"FieldglassHOAmon";

fn c_text(chars: &[std::ffi::c_char]) -> String {
    // SAFETY: the buffers come zero-initialised and the plugin writes NUL-terminated text.
    unsafe { CStr::from_ptr(chars.as_ptr()) }
        .to_string_lossy()
        .into_owned()
}

/// The library loaded, its module entry called, and its factory.
struct Module {
    /// Released in `drop` before `ModuleExit`, and before the library is unloaded.
    factory: ManuallyDrop<ComPtr<IPluginFactory>>,
    exit: unsafe extern "C" fn() -> bool,
    _library: libloading::Library,
}

impl Module {
    fn load() -> Self {
        let path = plugin_library_path();
        // SAFETY: our own plugin library; its initialisers are those of a nice-plug plugin.
        let library = unsafe { libloading::Library::new(&path) }.expect("load the library");
        // SAFETY: the symbols have these signatures in the VST3 module ABI on Linux.
        unsafe {
            let entry: libloading::Symbol<unsafe extern "C" fn(*mut c_void) -> bool> =
                library.get(b"ModuleEntry\0").expect("ModuleEntry exported");
            assert!(entry(ptr::null_mut()), "ModuleEntry succeeds");
            let exit: libloading::Symbol<unsafe extern "C" fn() -> bool> =
                library.get(b"ModuleExit\0").expect("ModuleExit exported");
            let exit = *exit;
            let get_factory: libloading::Symbol<unsafe extern "system" fn() -> *mut c_void> =
                library
                    .get(b"GetPluginFactory\0")
                    .expect("GetPluginFactory exported");
            let raw = get_factory() as *mut IPluginFactory;
            let factory = ComPtr::from_raw(raw).expect("a factory");
            Self {
                factory: ManuallyDrop::new(factory),
                exit,
                _library: library,
            }
        }
    }

    fn component(&self) -> ComPtr<IComponent> {
        let mut obj: *mut c_void = ptr::null_mut();
        // SAFETY: COM call with valid class and interface ids and an out pointer.
        let result = unsafe {
            self.factory.createInstance(
                CLASS_ID.as_ptr() as *const _,
                IComponent_iid.as_ptr() as *const _,
                &mut obj,
            )
        };
        assert_eq!(result, kResultOk, "createInstance");
        // SAFETY: createInstance returned an IComponent with one reference for us.
        let component =
            unsafe { ComPtr::from_raw(obj as *mut IComponent) }.expect("component pointer");
        // SAFETY: plain COM call; nice-plug takes a null host context.
        assert_eq!(
            unsafe { component.initialize(ptr::null_mut()) },
            kResultOk,
            "initialize"
        );
        component
    }
}

impl Drop for Module {
    fn drop(&mut self) {
        // SAFETY: the factory is not used after this; then the VST3 exit call, after every
        // object from the module has been released. The library is unloaded after this body.
        unsafe {
            ManuallyDrop::drop(&mut self.factory);
            let _ = (self.exit)();
        }
    }
}

#[test]
fn module_exports_its_factory_and_lists_the_class() {
    let module = Module::load();
    // SAFETY: COM calls on a live factory with valid out pointers.
    unsafe {
        let mut info: PFactoryInfo = std::mem::zeroed();
        assert_eq!(module.factory.getFactoryInfo(&mut info), kResultOk);
        assert_eq!(c_text(&info.vendor), "Fieldglass");
        assert_eq!(module.factory.countClasses(), 1);
        let mut class: PClassInfo = std::mem::zeroed();
        assert_eq!(module.factory.getClassInfo(0, &mut class), kResultOk);
        assert_eq!(class.cid.map(|c| c as u8), CLASS_ID);
        // The audio-module category string of the VST3 SDK (ivstaudioprocessor.h).
        assert_eq!(c_text(&class.category), "Audio Module Class");
        assert_eq!(c_text(&class.name), "Fieldglass");

        let factory2 = module
            .factory
            .cast::<IPluginFactory2>()
            .expect("IPluginFactory2");
        let mut class2: PClassInfo2 = std::mem::zeroed();
        assert_eq!(factory2.getClassInfo2(0, &mut class2), kResultOk);
        let subcategories = c_text(&class2.subCategories);
        for expected in ["Fx", "Analyzer", "Spatial"] {
            assert!(
                subcategories.split('|').any(|s| s == expected),
                "{expected} missing from {subcategories}"
            );
        }
    }
}

/// A generic speaker arrangement with `channels` speakers (what a host without ambisonic tracks
/// may offer; the plugin accepts any arrangement with the right number of speakers).
fn arrangement(channels: usize) -> SpeakerArrangement {
    if channels >= 64 {
        u64::MAX
    } else {
        (1u64 << channels) - 1
    }
}

/// The VST3 SDK's ambisonic arrangements (ACN ordering; pluginterfaces/vst/vstspeaker.h, as
/// the `vst3` crate's bindings carry them), orders 1 to 7, by channel count.
const AMBISONIC_ARRANGEMENTS: [(usize, SpeakerArrangement); 7] = [
    (4, SpeakerArr::kAmbi1stOrderACN),
    (9, SpeakerArr::kAmbi2cdOrderACN),
    (16, SpeakerArr::kAmbi3rdOrderACN),
    (25, SpeakerArr::kAmbi4thOrderACN),
    (36, SpeakerArr::kAmbi5thOrderACN),
    (49, SpeakerArr::kAmbi6thOrderACN),
    (64, SpeakerArr::kAmbi7thOrderACN),
];

/// The arrangement the component reports for bus 0 of `direction`.
fn bus_arrangement(processor: &ComPtr<IAudioProcessor>, direction: i32) -> SpeakerArrangement {
    let mut arr: SpeakerArrangement = 0;
    // SAFETY: COM call on a live processor with a valid out pointer.
    let result = unsafe { processor.getBusArrangement(direction, 0, &mut arr) };
    assert_eq!(result, kResultOk, "getBusArrangement");
    arr
}

#[test]
fn every_layout_reports_the_sdk_ambisonic_arrangement() {
    let module = Module::load();
    let component = module.component();
    let processor = component
        .cast::<IAudioProcessor>()
        .expect("IAudioProcessor");
    let input = BusDirections_::kInput as i32;
    let output = BusDirections_::kOutput as i32;
    // Before any setBusArrangements: the first layout, first order.
    assert_eq!(
        bus_arrangement(&processor, input),
        SpeakerArr::kAmbi1stOrderACN
    );
    assert_eq!(
        bus_arrangement(&processor, output),
        SpeakerArr::kAmbi1stOrderACN
    );
    assert_eq!(
        AMBISONIC_ARRANGEMENTS.map(|(c, _)| c),
        LAYOUT_CHANNELS,
        "one ambisonic arrangement per layout"
    );
    for (channels, ambisonic) in AMBISONIC_ARRANGEMENTS {
        assert_eq!(ambisonic.count_ones() as usize, channels, "SDK constant");
        // The host offers the ambisonic arrangement, or a generic one of the same size; either
        // is taken, and the plugin reports the ambisonic one back.
        for offered in [ambisonic, arrangement(channels)] {
            let mut ins = [offered];
            let mut outs = [offered];
            // SAFETY: COM call with arrays of one arrangement each.
            let result =
                unsafe { processor.setBusArrangements(ins.as_mut_ptr(), 1, outs.as_mut_ptr(), 1) };
            assert_eq!(result, kResultOk, "{channels} ch, offered {offered:#x}");
            assert_eq!(
                bus_arrangement(&processor, input),
                ambisonic,
                "{channels} ch in"
            );
            assert_eq!(
                bus_arrangement(&processor, output),
                ambisonic,
                "{channels} ch out"
            );
        }
    }
    // Sizes that are no layout are refused, and the last layout stays.
    for refused in [
        SpeakerArr::kStereo,
        SpeakerArr::k51,
        arrangement(5),
        arrangement(17),
    ] {
        let mut ins = [refused];
        let mut outs = [refused];
        // SAFETY: as above.
        let result =
            unsafe { processor.setBusArrangements(ins.as_mut_ptr(), 1, outs.as_mut_ptr(), 1) };
        assert_ne!(result, kResultOk, "{refused:#x}");
        assert_eq!(
            bus_arrangement(&processor, input),
            SpeakerArr::kAmbi7thOrderACN
        );
    }
    // Input and output of different orders are refused.
    let mut ins = [SpeakerArr::kAmbi1stOrderACN];
    let mut outs = [SpeakerArr::kAmbi3rdOrderACN];
    // SAFETY: as above.
    let result = unsafe { processor.setBusArrangements(ins.as_mut_ptr(), 1, outs.as_mut_ptr(), 1) };
    assert_ne!(result, kResultOk);
    drop(processor);
    // SAFETY: plain COM call on a live component.
    assert_eq!(unsafe { component.terminate() }, kResultOk);
}

#[test]
fn component_takes_every_layout_and_passes_audio_through() {
    let module = Module::load();
    let component = module.component();
    // SAFETY: COM calls on live objects with valid pointers; the buffers outlive each call.
    unsafe {
        let audio = MediaTypes_::kAudio as i32;
        let input = BusDirections_::kInput as i32;
        assert_eq!(component.getBusCount(audio, input), 1);
        let mut bus: BusInfo = std::mem::zeroed();
        assert_eq!(component.getBusInfo(audio, input, 0, &mut bus), kResultOk);
        assert_eq!(bus.channelCount, 4, "first layout by default");

        let processor = component
            .cast::<IAudioProcessor>()
            .expect("IAudioProcessor");
        let mut rng = Rng::new(0x0573_0001);
        for (channels, ambisonic) in AMBISONIC_ARRANGEMENTS {
            let mut ins = [ambisonic];
            let mut outs = [ambisonic];
            assert_eq!(
                processor.setBusArrangements(ins.as_mut_ptr(), 1, outs.as_mut_ptr(), 1),
                kResultOk,
                "{channels} channels"
            );
            assert_eq!(component.getBusInfo(audio, input, 0, &mut bus), kResultOk);
            assert_eq!(bus.channelCount as usize, channels);

            let max = 512usize;
            let mut setup = ProcessSetup {
                processMode: ProcessModes_::kRealtime as i32,
                symbolicSampleSize: SymbolicSampleSizes_::kSample32 as i32,
                maxSamplesPerBlock: max as i32,
                sampleRate: 48_000.0,
            };
            assert_eq!(processor.setupProcessing(&mut setup), kResultOk);
            assert_eq!(component.setActive(1), kResultOk);
            assert_eq!(processor.setProcessing(1), kResultOk);

            let mut input_data = vec![vec![0.0f32; max]; channels];
            let mut output_data = vec![vec![0.0f32; max]; channels];
            for call in 0..50 {
                let n = rng.range(1, max);
                for c in input_data.iter_mut() {
                    for x in &mut c[..n] {
                        *x = rng.noise();
                    }
                }
                input_data[0][0] = f32::from_bits(0x7fc1_2345);
                for c in output_data.iter_mut() {
                    c.fill(f32::from_bits(fieldglass_tests::OUTPUT_SENTINEL_BITS));
                }
                let mut in_ptrs: Vec<*mut f32> =
                    input_data.iter_mut().map(|c| c.as_mut_ptr()).collect();
                let mut out_ptrs: Vec<*mut f32> =
                    output_data.iter_mut().map(|c| c.as_mut_ptr()).collect();
                let mut in_bus = AudioBusBuffers {
                    numChannels: channels as i32,
                    silenceFlags: 0,
                    __field0: AudioBusBuffers__type0 {
                        channelBuffers32: in_ptrs.as_mut_ptr(),
                    },
                };
                let mut out_bus = AudioBusBuffers {
                    numChannels: channels as i32,
                    silenceFlags: 0,
                    __field0: AudioBusBuffers__type0 {
                        channelBuffers32: out_ptrs.as_mut_ptr(),
                    },
                };
                let mut data = ProcessData {
                    processMode: ProcessModes_::kRealtime as i32,
                    symbolicSampleSize: SymbolicSampleSizes_::kSample32 as i32,
                    numSamples: n as i32,
                    numInputs: 1,
                    numOutputs: 1,
                    inputs: &mut in_bus,
                    outputs: &mut out_bus,
                    inputParameterChanges: ptr::null_mut(),
                    outputParameterChanges: ptr::null_mut(),
                    inputEvents: ptr::null_mut(),
                    outputEvents: ptr::null_mut(),
                    processContext: ptr::null_mut(),
                };
                assert_eq!(processor.process(&mut data), kResultOk);
                for (c, (i, o)) in input_data.iter().zip(&output_data).enumerate() {
                    for k in 0..n {
                        assert_eq!(
                            i[k].to_bits(),
                            o[k].to_bits(),
                            "{channels} ch, call {call}, channel {c}, frame {k}"
                        );
                    }
                }
            }
            assert_eq!(processor.setProcessing(0), kResultOk);
            assert_eq!(component.setActive(0), kResultOk);
        }
        drop(processor);
        assert_eq!(component.terminate(), kResultOk);
    }
}
