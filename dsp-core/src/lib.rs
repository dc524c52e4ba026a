//! # fieldglass-dsp — the computational core of Fieldglass
//!
//! Pure computation for higher-order Ambisonics (HOA) monitoring: no GUI, no plugin framework.
//! Both the plugin and the offline scanner call into this crate.
//!
//! ## Conventions (written down once; every module follows them)
//! - **Directions.** Azimuth counter-clockwise from the front, positive to the left, degrees in
//!   (-180, 180]; elevation positive up, degrees in [-90, 90]. Cartesian x front, y left, z up.
//!   See [`sphere::Direction`].
//! - **Spherical harmonics.** Real SH without the Condon–Shortley phase, indexed by ACN
//!   `n(n+1)+m`. Internally everything is **ACN/SN3D** (Schmidt semi-normalised:
//!   `N = sqrt((2-δ_m0)(n-|m|)!/(n+|m|)!)`); N3D = SN3D·sqrt(2n+1). See [`sh`].
//! - **FuMa.** Channel order W X Y Z R S T U V K L M N O P Q with maxN weights (W carries 1/√2),
//!   defined to third order only. Other formats are converted to ACN/SN3D at the input; see
//!   [`format`].
//! - **Equirectangular maps.** Row 0 is the top (elevation +90°), column 0 is azimuth +180°
//!   (behind, via the left), the centre column is the front, left (+90°) is left of centre — as
//!   seen from the listener, the way a 360° video frame is laid out. See [`sphere::EquirectGrid`].
//! - **Units in names**: `_deg`, `_rad`, `_db`, `_ms`, `_hz`; arrays "indexed by [acn]" say so.
//!
//! ## Order of use
//! Build plans off the audio thread (they own all scratch memory), then execute them as often as
//! needed without allocation.
//!
//! ## The engine (blocks in, snapshots out)
//! - **Plugin (threaded).** `engine::Engine::start(StreamSetup { sample_rate_hz, channels },
//!   max_block_frames, control, slot)` allocates the block pool, builds the `engine::Analyzer`
//!   and starts its thread. It returns the `engine::handoff::AudioSide`, whose `push(&[&[f32]])`
//!   is the only call made on the audio thread: wait-free, allocation-free, it copies into pooled
//!   blocks, keeps lossless peak/clip atomics and counts dropped blocks. Settings travel through
//!   `engine::EngineControl` (atomics, polled by the analysis side); the latest
//!   `engine::Snapshot` appears in `engine::SnapshotSlot`. Dropping the `AnalysisThread` stops
//!   and joins it.
//! - **Scanner and tests (synchronous).** `Analyzer::new(setup, settings)`, then
//!   `process(&block)` per block (true when a new snapshot is ready), `finish()` at the end, and
//!   `integrated_map(band, method, scale)` / `integrated_intensity(band)` /
//!   `programme_mean_square()` for whole-programme figures.
//! - A snapshot holds the map of the selected band and method in dB, the strongest sources,
//!   DirAC per band, per-channel meters (with ACN after mapping and SN3D level), W loudness and
//!   peaks, the format check and findings with stable codes. It is plain data; colours are made
//!   by `render`.

pub mod beam;
pub mod compare;
pub mod covariance;
pub mod encoder;
pub mod engine;
pub mod format;
pub mod format_check;
pub mod loudness;
pub mod meters;
pub mod peaks;
pub mod render;
pub mod scene;
pub mod sh;
pub mod sphere;
pub mod wording;
