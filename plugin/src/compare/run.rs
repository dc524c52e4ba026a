//! The comparison itself. Each input is scanned once by [`scan`] (the engine's whole-programme
//! maps, sources, loudness and peaks: one source of truth with `fieldglass scan`), then the two
//! files are streamed side by side three more times, each pass in constant memory:
//! 1. W of both → [`OffsetSearch`] (the offset);
//! 2. the aligned overlap → [`PairCovariance`] (orientation, channel faults, W correlation);
//! 3. the aligned overlap again, the reference transformed by the chosen rotation → the
//!    [`CoherenceMeter`] (level and coherence per order and band).

use super::findings::{CompareFinding, compare_findings};
use crate::scan::run::{BLOCK_FRAMES, Source, open};
use crate::scan::{AssumedSource, CliError, ScanInput, ScanOptions, ScanResult, scan};
use fieldglass_dsp::compare::alignment::OffsetSearch;
use fieldglass_dsp::compare::coherence::{CoherenceFigures, CoherenceMeter};
use fieldglass_dsp::compare::covariance::PairCovariance;
use fieldglass_dsp::compare::spatial::{SpatialComparison, compare_spatial};
use fieldglass_dsp::covariance::StftFraming;
use fieldglass_dsp::engine::{AnalysisSettings, Band, ChannelLayout, SourceReading};
use fieldglass_dsp::format::{AmbiFormat, ConversionPlan};
use fieldglass_dsp::sh::channel_count;
use std::time::Instant;

/// Default thresholds of the findings (documented in docs/compare-json.md).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Thresholds {
    /// `rotated` when |yaw|, |pitch| or |roll| reaches this, degrees.
    pub rotation_deg: f64,
    /// `level-change` when W loudness (or an order's level relative to W) changes this much, LU.
    pub level_change_lu: f64,
    /// `detail-lost` when the full-band coherence of any order is below this.
    pub coherence: f64,
}

impl Default for Thresholds {
    fn default() -> Self {
        Self {
            rotation_deg: 2.0,
            level_change_lu: 1.0,
            coherence: 0.9,
        }
    }
}

/// How to compare.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CompareOptions {
    /// Format of each input; `None` = AmbiX unless the file declares the AMB B-format.
    pub reference_format: Option<AmbiFormat>,
    pub candidate_format: Option<AmbiFormat>,
    /// Largest offset searched, seconds.
    pub max_offset_s: f64,
    pub thresholds: Thresholds,
    /// Stage messages (and scan progress bars) on stderr.
    pub progress: bool,
}

impl Default for CompareOptions {
    fn default() -> Self {
        Self {
            reference_format: None,
            candidate_format: None,
            max_offset_s: 2.0,
            thresholds: Thresholds::default(),
            progress: false,
        }
    }
}

/// Time alignment of the candidate against the reference.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Alignment {
    /// Frames; positive = the candidate is later.
    pub offset_frames: i64,
    /// Correlation coefficient of the two W channels over the overlap at that offset.
    pub correlation: Option<f64>,
    /// Frames compared (the overlap at that offset).
    pub overlap_frames: u64,
    /// Largest offset searched, frames.
    pub max_offset_frames: u64,
}

/// Which input lacks the dropped orders.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Side {
    Reference,
    Candidate,
}

impl Side {
    pub fn label(self) -> &'static str {
        match self {
            Self::Reference => "reference",
            Self::Candidate => "candidate",
        }
    }
}

/// Level and coherence of one band, per order and over all compared channels.
#[derive(Clone, Debug, PartialEq)]
pub struct BandComparison {
    pub band: Band,
    pub range_hz: [f64; 2],
    pub all: CoherenceFigures,
    /// Indexed by order 0..=common order.
    pub orders: Vec<CoherenceFigures>,
}

/// Everything a comparison found.
#[derive(Clone, Debug)]
pub struct CompareResult {
    pub reference: ScanResult,
    pub candidate: ScanResult,
    pub common_order: usize,
    /// Orders present in one input only, not compared.
    pub dropped_orders: Vec<usize>,
    /// The input that lacks them.
    pub dropped_from: Option<Side>,
    pub alignment: Alignment,
    pub spatial: SpatialComparison,
    /// Full, low, mid, high.
    pub bands: Vec<BandComparison>,
    /// Candidate file channel carrying each compared ACN (`None` for a component a mixed-order
    /// set does not carry), indexed by [acn].
    pub candidate_file_channels: Vec<Option<usize>>,
    /// For each full-band reference source (strongest first), the angle to the candidate
    /// source it pairs with (nearest first, each used once), degrees.
    pub sources_moved_deg: Vec<Option<f64>>,
    pub framing: StftFraming,
    pub thresholds: Thresholds,
    /// Most severe first.
    pub findings: Vec<CompareFinding>,
    /// Wall-clock time, seconds.
    pub analysis_s: f64,
}

impl CompareResult {
    pub fn band(&self, band: Band) -> Option<&BandComparison> {
        self.bands.iter().find(|b| b.band == band)
    }

    /// Full-band coherence figures of order `order`.
    pub fn order_figures(&self, order: usize) -> Option<CoherenceFigures> {
        self.band(Band::Full)?.orders.get(order).copied()
    }
}

/// `x` rounded to `decimals` places, without a negative zero (so "-0.0" is never printed).
pub fn tidy(x: f64, decimals: i32) -> f64 {
    let k = 10f64.powi(decimals);
    (x * k).round() / k + 0.0
}

fn scan_options(format: Option<AmbiFormat>, progress: bool) -> ScanOptions {
    ScanOptions {
        assumed: format.unwrap_or(AmbiFormat::ACN_SN3D),
        assumed_source: if format.is_some() {
            AssumedSource::Option
        } else {
            AssumedSource::Default
        },
        progress,
        ..ScanOptions::default()
    }
}

/// One input read as ACN/SN3D channels 0..(order+1)², block by block, with a small queue so
/// that two inputs can be read in step.
struct SpatialStream {
    source: Source,
    name: String,
    /// Analysed (expanded) channel and SN3D gain of each ACN.
    map: Vec<(usize, f32)>,
    raw: Vec<Vec<f32>>,
    /// Converted frames not yet taken, per ACN.
    queue: Vec<Vec<f32>>,
    ended: bool,
}

impl SpatialStream {
    fn open(input: &ScanInput, format: Option<AmbiFormat>, order: usize) -> Result<Self, CliError> {
        let mut options = scan_options(format, false);
        let (source, info) = open(input, &mut options)?;
        let name = info.display_name();
        let analysed = match &source {
            Source::File {
                mixed: Some(mixed), ..
            } => mixed.0.output_channels(),
            _ => info.channels,
        };
        let layout = ChannelLayout::from_channel_count(analysed)
            .map_err(|e| CliError::input(format!("cannot compare '{name}': {e}")))?;
        let plan = ConversionPlan::to_sn3d(options.assumed, layout.order)
            .map_err(|e| CliError::input(format!("cannot compare '{name}': {e}")))?;
        let map = (0..channel_count(order))
            .map(|acn| (plan.source_channel(acn), plan.gain(acn) as f32))
            .collect();
        Ok(Self {
            source,
            name,
            map,
            raw: vec![Vec::with_capacity(BLOCK_FRAMES); analysed],
            queue: vec![Vec::with_capacity(2 * BLOCK_FRAMES); channel_count(order)],
            ended: false,
        })
    }

    /// Reads until `frames` are queued or the input ends.
    fn fill(&mut self, frames: usize) -> Result<(), CliError> {
        while !self.ended && self.queue[0].len() < frames {
            let n = self.source.read(&mut self.raw, &self.name)?;
            if n == 0 {
                self.ended = true;
                break;
            }
            for (queue, &(channel, gain)) in self.queue.iter_mut().zip(&self.map) {
                queue.extend(self.raw[channel][..n].iter().map(|&v| v * gain));
            }
        }
        Ok(())
    }

    /// Moves up to `frames` queued frames into `out` (one buffer per ACN); returns how many.
    fn take(&mut self, frames: usize, out: &mut [Vec<f32>]) -> Result<usize, CliError> {
        self.fill(frames)?;
        let n = frames.min(self.queue[0].len());
        for (queue, out) in self.queue.iter_mut().zip(out.iter_mut()) {
            out.clear();
            out.extend(queue.drain(..n));
        }
        Ok(n)
    }

    /// Discards `frames` frames.
    fn skip(&mut self, mut frames: u64, scratch: &mut [Vec<f32>]) -> Result<(), CliError> {
        while frames > 0 {
            let n = self.take(frames.min(BLOCK_FRAMES as u64) as usize, scratch)?;
            if n == 0 {
                break;
            }
            frames -= n as u64;
        }
        Ok(())
    }
}

/// Both inputs, aligned by `offset_frames`, in blocks of equal length over their overlap.
struct AlignedPair {
    reference: SpatialStream,
    candidate: SpatialStream,
    r: Vec<Vec<f32>>,
    c: Vec<Vec<f32>>,
}

impl AlignedPair {
    fn open(
        reference: (&ScanInput, Option<AmbiFormat>),
        candidate: (&ScanInput, Option<AmbiFormat>),
        order: usize,
        offset_frames: i64,
    ) -> Result<Self, CliError> {
        let k = channel_count(order);
        let mut pair = Self {
            reference: SpatialStream::open(reference.0, reference.1, order)?,
            candidate: SpatialStream::open(candidate.0, candidate.1, order)?,
            r: vec![Vec::with_capacity(BLOCK_FRAMES); k],
            c: vec![Vec::with_capacity(BLOCK_FRAMES); k],
        };
        if offset_frames > 0 {
            pair.candidate.skip(offset_frames as u64, &mut pair.c)?;
        } else {
            pair.reference
                .skip(offset_frames.unsigned_abs(), &mut pair.r)?;
        }
        Ok(pair)
    }

    /// The next block of the overlap (0 frames at its end).
    fn next(&mut self) -> Result<usize, CliError> {
        self.reference.fill(BLOCK_FRAMES)?;
        self.candidate.fill(BLOCK_FRAMES)?;
        let n = self.reference.queue[0]
            .len()
            .min(self.candidate.queue[0].len())
            .min(BLOCK_FRAMES);
        self.reference.take(n, &mut self.r)?;
        self.candidate.take(n, &mut self.c)?;
        Ok(n)
    }
}

fn stage(options: &CompareOptions, text: &str) {
    if options.progress {
        eprintln!("fieldglass compare: {text}");
    }
}

/// Compares `candidate` with `reference`. Errors carry the exit code: 2 for anything about the
/// inputs (unreadable, different sample rates, no overlap).
pub fn compare(
    reference: &ScanInput,
    candidate: &ScanInput,
    options: CompareOptions,
) -> Result<CompareResult, CliError> {
    let started = Instant::now();
    // Cheap checks first: both open, same sample rate.
    let (ref_rate, ref_name) = {
        let mut o = scan_options(options.reference_format, false);
        let (_, info) = open(reference, &mut o)?;
        (info.sample_rate_hz, info.display_name())
    };
    let (cand_rate, cand_name) = {
        let mut o = scan_options(options.candidate_format, false);
        let (_, info) = open(candidate, &mut o)?;
        (info.sample_rate_hz, info.display_name())
    };
    if ref_rate != cand_rate {
        return Err(CliError::input(format!(
            "cannot compare: '{ref_name}' runs at {ref_rate} Hz and '{cand_name}' at {cand_rate} Hz; resample one of them first"
        )));
    }
    if !(options.max_offset_s.is_finite() && options.max_offset_s >= 0.0) {
        return Err(CliError::input(format!(
            "--max-offset {} must be a number of seconds ≥ 0",
            options.max_offset_s
        )));
    }

    stage(&options, &format!("scanning the reference '{ref_name}'"));
    let ref_scan = scan(
        reference,
        scan_options(options.reference_format, options.progress),
    )?;
    stage(&options, &format!("scanning the candidate '{cand_name}'"));
    let cand_scan = scan(
        candidate,
        scan_options(options.candidate_format, options.progress),
    )?;
    // From here on both inputs are read as their scans read them (metadata included).
    let ref_format = Some(ref_scan.options.assumed);
    let cand_format = Some(cand_scan.options.assumed);
    let (ref_order, cand_order) = (ref_scan.layout.order, cand_scan.layout.order);
    let common_order = ref_order.min(cand_order);
    let dropped_orders: Vec<usize> = (common_order + 1..=ref_order.max(cand_order)).collect();
    let dropped_from = match ref_order.cmp(&cand_order) {
        std::cmp::Ordering::Greater => Some(Side::Candidate),
        std::cmp::Ordering::Less => Some(Side::Reference),
        std::cmp::Ordering::Equal => None,
    };
    let k = channel_count(common_order);

    // Pass 1: the offset from W.
    stage(&options, "aligning W");
    let max_offset_frames = (options.max_offset_s * ref_rate).round().min(1e9) as usize;
    let max_lag = max_offset_frames.min(ref_scan.input.frames.max(cand_scan.input.frames) as usize);
    let mut search = OffsetSearch::new(max_lag);
    {
        let mut r = SpatialStream::open(reference, ref_format, 0)?;
        let mut c = SpatialStream::open(candidate, cand_format, 0)?;
        let mut buffer = vec![Vec::with_capacity(BLOCK_FRAMES)];
        loop {
            let nr = r.take(BLOCK_FRAMES, &mut buffer)?;
            if nr == 0 {
                search.end_reference();
            } else {
                search.push_reference(&buffer[0]);
            }
            let nc = c.take(BLOCK_FRAMES, &mut buffer)?;
            if nc == 0 {
                search.end_candidate();
            } else {
                search.push_candidate(&buffer[0]);
            }
            if nr == 0 && nc == 0 {
                break;
            }
        }
    }
    let offset_frames = search.finish().map_or(0, |e| e.offset_frames);

    // Pass 2: broadband moments of the overlap.
    stage(&options, "estimating rotation and channel faults");
    let mut moments = PairCovariance::new(k);
    {
        let mut pair = AlignedPair::open(
            (reference, ref_format),
            (candidate, cand_format),
            common_order,
            offset_frames,
        )?;
        loop {
            let n = pair.next()?;
            if n == 0 {
                break;
            }
            let r: Vec<&[f32]> = pair.r.iter().map(|b| &b[..n]).collect();
            let c: Vec<&[f32]> = pair.c.iter().map(|b| &b[..n]).collect();
            moments.push(&r, &c);
        }
    }
    if moments.frames() == 0 {
        return Err(CliError::input(format!(
            "cannot compare '{ref_name}' and '{cand_name}': they do not overlap at an offset of {offset_frames} frames"
        )));
    }
    let w_correlation = {
        let d = (moments.rr(0, 0) * moments.cc(0, 0)).sqrt();
        (d > 0.0 && d.is_finite()).then(|| moments.cr(0, 0) / d)
    };
    let spatial = compare_spatial(&moments);

    // Pass 3: coherence of the candidate with the transformed reference.
    stage(&options, "measuring coherence per order and band");
    let edges = AnalysisSettings::default().band_edges_hz;
    let mut meter = CoherenceMeter::new(k, ref_rate, edges);
    {
        let mut pair = AlignedPair::open(
            (reference, ref_format),
            (candidate, cand_format),
            common_order,
            offset_frames,
        )?;
        let mut predicted = vec![vec![0.0f32; BLOCK_FRAMES]; k];
        let (mut x, mut y) = (vec![0.0f64; k], vec![0.0f64; k]);
        loop {
            let n = pair.next()?;
            if n == 0 {
                break;
            }
            for t in 0..n {
                for (ch, v) in x.iter_mut().enumerate() {
                    *v = pair.r[ch][t] as f64;
                }
                spatial.rotation.apply(&x, &mut y);
                // Candidate channel i is compared with the predicted channel it is expected
                // to carry (its swap partner for a swap).
                for (ch, out) in predicted.iter_mut().enumerate() {
                    out[t] = y[spatial.expected[ch]] as f32;
                }
            }
            let p: Vec<&[f32]> = predicted.iter().map(|b| &b[..n]).collect();
            let c: Vec<&[f32]> = pair.c.iter().map(|b| &b[..n]).collect();
            meter.push(&p, &c);
        }
    }
    let nyquist = ref_rate / 2.0;
    let used_edges = meter.edges_hz();
    let bands = Band::ALL
        .into_iter()
        .map(|band| {
            let index = band.index();
            BandComparison {
                band,
                range_hz: match band {
                    Band::Full => [0.0, nyquist],
                    Band::Low => [0.0, used_edges[0]],
                    Band::Mid => [used_edges[0], used_edges[1]],
                    Band::High => [used_edges[1], nyquist],
                },
                all: meter.figures(0..k, index),
                orders: (0..=common_order)
                    .map(|l| meter.figures(l * l..(l + 1) * (l + 1), index))
                    .collect(),
            }
        })
        .collect();

    let candidate_file_channels = candidate_file_channels(&cand_scan, common_order);
    let sources_moved_deg = moved_deg(full_band_sources(&ref_scan), full_band_sources(&cand_scan));
    let overlap_frames = moments.frames();
    let mut result = CompareResult {
        reference: ref_scan,
        candidate: cand_scan,
        common_order,
        dropped_orders,
        dropped_from,
        alignment: Alignment {
            offset_frames,
            correlation: w_correlation,
            overlap_frames,
            max_offset_frames: max_lag as u64,
        },
        spatial,
        bands,
        candidate_file_channels,
        sources_moved_deg,
        framing: meter.framing(),
        thresholds: options.thresholds,
        findings: Vec::new(),
        analysis_s: 0.0,
    };
    result.findings = compare_findings(&result);
    result.analysis_s = started.elapsed().as_secs_f64();
    Ok(result)
}

fn full_band_sources(scan: &ScanResult) -> &[SourceReading] {
    scan.band(Band::Full).map_or(&[], |b| b.sources.as_slice())
}

/// File channel of each ACN 0..(order+1)² in a scanned input, read as its scan read it.
fn candidate_file_channels(scan: &ScanResult, order: usize) -> Vec<Option<usize>> {
    let format = scan.options.assumed;
    (0..channel_count(order))
        .map(|acn| {
            scan.channels
                .iter()
                .find(|c| c.acn == Some(acn))
                .map(|c| c.input_index)
                .or_else(|| {
                    // Without a channel row (should not happen for a full order) fall back to
                    // the ordering's own map.
                    scan.input
                        .mixed_order_set
                        .is_none()
                        .then(|| format.ordering.channel_of_acn(acn))
                        .flatten()
                })
        })
        .collect()
}

/// Pairs each reference source with the nearest unused candidate source, strongest reference
/// source first; the angle between them in degrees.
pub fn moved_deg(reference: &[SourceReading], candidate: &[SourceReading]) -> Vec<Option<f64>> {
    let mut used = vec![false; candidate.len()];
    reference
        .iter()
        .map(|r| {
            let (index, angle) = candidate
                .iter()
                .enumerate()
                .filter(|(i, _)| !used[*i])
                .map(|(i, c)| (i, r.direction.angle_to_deg(&c.direction)))
                .min_by(|a, b| a.1.total_cmp(&b.1))?;
            used[index] = true;
            Some(angle)
        })
        .collect()
}
