//! Format check: which channel ordering and normalisation a stream most likely uses, judged
//! from its covariance, plus its effective order and dead or duplicated channels. It advises;
//! it never changes the format the user chose.
//!
//! # Method
//! For every format in [`AmbiFormat::ALL`] defined at the stream's order, the raw covariance R
//! (input channel order) is converted to ACN/SN3D as if the stream were in that format:
//! R_h = C_h R C_hᵀ, with C_h the permutation and gains of [`ConversionPlan::to_sn3d`]. Two
//! kinds of evidence are then scored:
//!
//! - **Order balance** E_n = Σ_m R_h\[nm,nm\] / R_h\[0,0\] in dB. For any mixture of incoherent
//!   plane waves, and so for an isotropic diffuse field, this is 0 dB in SN3D at every order
//!   (addition theorem Σ_m Y_nm² = 1); N3D read as SN3D gives 10·log10(2n+1) (4.77, 6.99,
//!   8.45 dB); FuMa read as SN3D gives +3.01 dB at first order (W carries −3 dB). Only orders
//!   up to the effective order are used, so band-limited or mixed-order content whose top
//!   orders are empty cannot pose as a normalisation.
//! - **Steering fit**: the dominant eigenvectors of R_h, taken in N3D coordinates (where an
//!   isotropic diffuse field is white and so leaves the eigenvectors of the directional part
//!   alone), are matched to the best plane-wave steering vector; the fit
//!   max_d (vᵀŷ(d))² is 1 for a correctly read plane wave. This is what separates channel
//!   orderings from order 2 up. At first order it adds nothing: every permutation of X, Y, Z
//!   maps a steering vector to another steering vector (a rotation or reflection), so **at
//!   first order FuMa and ACN/maxN cannot be told apart** from any covariance; the prior
//!   (FuMa is far more common) decides between them.
//!
//! Scores combine as log-likelihoods, see [`score_constants`]; probabilities are the softmax.
//!
//! # Ordinary scenes are not faults
//! Dead and duplicated channels are reported only where the scene's geometry does not
//! explain them:
//! - **Horizontal-only content** ([`horizontal`]): under each hypothesis the converted
//!   covariance is tested against the horizontal-plane identities of the SH (components with
//!   n + |m| odd vanish, components of equal m are proportional with known ratios). When
//!   they hold, `horizontal_only` is set, the predicted-empty channels go to
//!   `silent_by_geometry` instead of `silent_channels`, and pairs inside one predicted
//!   group are not duplicates. A channel that breaks its prediction keeps being reported.
//! - **A few plane waves** ([`geometry`]): when the covariance, under any hypothesis, is
//!   exactly K ≤ 3 plane waves over a floor 30 dB down (one eigenvalue gap, then K distinct
//!   steering vectors inside the signal subspace), every strong correlation is geometry and
//!   no pair is a duplicate. The floor may be quantisation noise: the tolerances scale
//!   with it. When the strong components do not fit plane waves, the channel whose removal
//!   makes them fit is named (with its same-level copy partner) rather than every
//!   correlated pair.
//! - **Other scene families** ([`geometric_ties`]): a pair is proportional by geometry when
//!   every source lies on a level curve of the two harmonics' ratio. Four ordinary families
//!   are tested as predictions about the converted covariance, under the readings at least
//!   [`PLAUSIBLE_FOR_GEOMETRY`] probable: all
//!   sources on one axis (a source jumping to the opposite side), all at one elevation (pan
//!   automation at a fixed height; the horizontal plane is its e = 0 case), all at one
//!   azimuth (a source moved up and down), and one to three plane waves present only in the
//!   top orders (a lower-order recording under a higher-order panned source). A pair is
//!   excused only when its family holds and its own ratio is the predicted one; a channel
//!   copied into such content is named with its copy partner.
//!
//! Known-absent channels (`absent_channels`, e.g. the components a mixed-order FuMa file
//! does not carry) are never silent or duplicate; they are left out of the eigen-analysis
//! and the steering vectors, and an order missing components is left out of the balance
//! score (its `order_balance_db` entry is the energy of the components present).
//!
//! At first order the checker also asks whether the four channels are unconverted capsule
//! signals ([`a_format`]), on the full-band covariance and, when given, the mid band too.

pub mod a_format;
mod channel_health;
pub mod geometric_ties;
pub mod geometry;
pub mod horizontal;
mod steering_fit;

pub use channel_health::{DUPLICATE_CORRELATION, SILENT_MEAN_SQUARE};

use crate::engine::snapshot::{FormatCheck, HypothesisScore};
use crate::format::{AmbiFormat, ConversionPlan};
use crate::sh::{MAX_SH_ORDER, channel_count};
use geometric_ties::{GeometricTies, TieQuery};
use geometry::{Geometry, GeometryQuery};
use horizontal::{HorizontalIdentities, HorizontalQuery, HorizontalReading};
use std::fmt;
use steering_fit::SteeringFitSearch;

/// The constants that turn evidence into probabilities, and why they have their values.
pub mod score_constants {
    /// Spread allowed for an order that carries *more* energy than SN3D predicts, dB. Excess
    /// is physically implausible for incoherent content (addition theorem), so it is judged
    /// strictly: the +3.01 dB of FuMa read as SN3D costs 7.1 nats at first order, and the
    /// +1.76 dB of first-order N3D read as maxN (the closest pair of normalisations) 2.4 nats.
    /// Real content whose orders run more than ~1 dB hot will lower the confidence.
    pub const BALANCE_SIGMA_EXCESS_DB: f64 = 0.8;
    /// Spread allowed for an order that carries *less* energy than predicted, dB. Deficits
    /// happen in real recordings (array band limits, partly coherent content), so they are
    /// judged a little more leniently: the −4.77 dB of SN3D read as N3D costs 11.4 nats, the
    /// −1.76 dB of first-order FuMa read as N3D 1.5 nats (so that pair, the closest one, only
    /// reaches ~0.88 on its own).
    pub const BALANCE_SIGMA_DEFICIT_DB: f64 = 1.0;
    /// Nats per unit of steering-fit difference from the best hypothesis, at full
    /// directionality. A wrong ordering drops the fit by 0.2–0.6 and a wrong normalisation
    /// by ~0.1 on clearly directional content, i.e. 4–24 nats; sample noise in the fit of
    /// the right hypothesis is ~0.01 (0.4 nats).
    pub const STEERING_FIT_NATS: f64 = 40.0;
    /// Eigenvectors within this many dB of the largest eigenvalue are fitted (at most
    /// [`MAX_FITTED_EIGENVECTORS`]).
    pub const EIGENVALUE_RANGE_DB: f64 = 15.0;
    /// At most this many dominant eigenvectors are fitted.
    pub const MAX_FITTED_EIGENVECTORS: usize = 3;
    /// Prior probabilities for acn-sn3d, acn-n3d, fuma, acn-maxn (the order of
    /// [`AmbiFormat::ALL`](crate::format::AmbiFormat::ALL)): our judgement of how common
    /// each is in delivered material. They only decide between hypotheses the data cannot
    /// separate (FuMa vs ACN/maxN at first order, or a stream with only W).
    pub const PRIORS: [f64; 4] = [0.4, 0.25, 0.25, 0.1];
    /// An order carries energy if its balance under the assumed format is above this, dB
    /// relative to W.
    pub const EFFECTIVE_ORDER_FLOOR_DB: f64 = -40.0;
    /// Audio frames the covariance must cover before a verdict is given: 32768 frames is
    /// 0.68 s at 48 kHz, i.e. ~64 half-overlapped STFT frames, enough for the per-order
    /// energies to settle within ~0.5 dB on noise-like content.
    pub const MIN_FRAMES_FOR_VERDICT: u64 = 32_768;
    /// The scene families of [`geometric_ties`](super::geometric_ties) are tried only under
    /// readings at least this probable: a family can fit a misread stream by accident (a
    /// horizontal scene read as FuMa with a copied channel looks like a source moved up and
    /// down), and a copy excused under a reading the data rule out would be hidden for
    /// nothing. The level is our own choice: 1 % is well below any reading the check
    /// would report, far above the 1e-10 of readings the data rule out.
    pub const PLAUSIBLE_FOR_GEOMETRY: f64 = 0.01;
}

use score_constants::*;

/// Balance values are floored here (dB) so that empty orders stay finite.
const BALANCE_FLOOR_DB: f64 = -300.0;

/// What the format check looks at.
#[derive(Clone, Copy, Debug)]
pub struct FormatCheckInput<'a> {
    /// Covariance of the M = (order+1)² spatial channels, M×M row-major, in the input's
    /// channel order and scaling (not converted) — typically the whole-programme mid-band
    /// covariance. Only its real, symmetric part is meaningful.
    pub raw_covariance: &'a [f64],
    /// Ambisonic order of the stream.
    pub order: usize,
    /// The format the user has chosen.
    pub assumed: AmbiFormat,
    /// Mean square of each spatial channel over the programme, indexed by [input channel];
    /// at least M values (extra entries are ignored).
    pub channel_mean_square: &'a [f64],
    /// Audio frames (samples per channel) that went into the covariance.
    pub frames_seen: u64,
    /// Input channels known to be absent (zero-filled by the reader, e.g. the components a
    /// mixed-order FuMa file does not carry), each below M; empty = none.
    pub absent_channels: &'a [usize],
    /// Covariance of the mid band (the engine's 250–4000 Hz by default), same layout and
    /// units as `raw_covariance`; used only by the A-format test, which then asks for the
    /// capsule pattern in this band as well (a close source's proximity effect can mimic it
    /// at low frequencies only, see [`a_format`]). None = full band only.
    pub mid_band_covariance: Option<&'a [f64]>,
}

/// Bad input to the format check (a caller bug or corrupt data), with the numbers.
#[derive(Clone, Debug, PartialEq)]
pub enum FormatCheckError {
    /// The order is above [`MAX_SH_ORDER`].
    OrderUnsupported { order: usize },
    /// The input's order differs from the checker's.
    OrderMismatch { checker: usize, input: usize },
    /// A slice has the wrong length.
    WrongLength {
        what: &'static str,
        expected: usize,
        got: usize,
    },
    /// The covariance holds a NaN or infinity.
    NonFinite,
    /// An absent-channel index is not a spatial channel.
    AbsentChannelOutOfRange { channel: usize, channels: usize },
}

impl fmt::Display for FormatCheckError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::OrderUnsupported { order } => write!(
                f,
                "format check: order {order} is above the supported {MAX_SH_ORDER}"
            ),
            Self::OrderMismatch { checker, input } => write!(
                f,
                "format check built for order {checker} was given an order-{input} stream"
            ),
            Self::WrongLength {
                what,
                expected,
                got,
            } => write!(f, "format check: {what} needs {expected} values, got {got}"),
            Self::NonFinite => write!(f, "format check: covariance holds NaN or infinity"),
            Self::AbsentChannelOutOfRange { channel, channels } => write!(
                f,
                "format check: absent channel {channel} is not one of the {channels} spatial channels"
            ),
        }
    }
}

impl std::error::Error for FormatCheckError {}

/// One hypothesis the checker can test at its order.
#[derive(Clone, Debug)]
struct Hypothesis {
    format: AmbiFormat,
    plan: ConversionPlan,
    log_prior: f64,
}

/// Format check for one order. Building it allocates the conversion plans and the
/// direction grid of the steering fit; [`check`](Self::check) reuses them.
///
/// Cost: at order 7 a check is two 64×64 symmetric eigendecompositions plus fits of up to
/// three eigenvectors on a 1024-point grid (measured figure printed by the test
/// `cost_per_check_printout` in `tests/format_check_reference.rs`).
#[derive(Clone, Debug)]
pub struct FormatChecker {
    order: usize,
    hypotheses: Vec<Hypothesis>,
    search: SteeringFitSearch,
    identities: HorizontalIdentities,
    ties: GeometricTies,
    /// Converted covariance, (order+1)² squared, row-major, indexed by \[acn\]\[acn\].
    converted: Vec<f64>,
}

/// Evidence gathered under one hypothesis.
struct Evidence {
    order_balance_db: Vec<f64>,
    geometry: Geometry,
    horizontal: HorizontalReading,
    /// Orders whose components are all present, indexed \[order\].
    complete: Vec<bool>,
    /// Components present under this hypothesis, indexed \[acn\].
    present: Vec<bool>,
}

/// Per-channel facts the check needs, indexed by [input channel].
struct ChannelFacts {
    absent: Vec<bool>,
    silent: Vec<bool>,
}

impl ChannelFacts {
    /// Present components under `plan`, indexed by \[acn\].
    fn present(&self, plan: &ConversionPlan) -> Vec<bool> {
        (0..plan.channels())
            .map(|a| !self.absent[plan.source_channel(a)])
            .collect()
    }

    /// Components whose input channel carries signal, indexed by \[acn\].
    fn live(&self, plan: &ConversionPlan) -> Vec<bool> {
        (0..plan.channels())
            .map(|a| {
                let input = plan.source_channel(a);
                !self.absent[input] && !self.silent[input]
            })
            .collect()
    }
}

impl FormatChecker {
    /// Checker for order-`order` streams. Errors above [`MAX_SH_ORDER`].
    pub fn new(order: usize) -> Result<Self, FormatCheckError> {
        if order > MAX_SH_ORDER {
            return Err(FormatCheckError::OrderUnsupported { order });
        }
        let hypotheses = AmbiFormat::ALL
            .into_iter()
            .zip(PRIORS)
            .filter_map(|(format, prior)| {
                ConversionPlan::to_sn3d(format, order)
                    .ok()
                    .map(|plan| Hypothesis {
                        format,
                        plan,
                        log_prior: prior.ln(),
                    })
            })
            .collect();
        let channels = channel_count(order);
        Ok(Self {
            order,
            hypotheses,
            search: SteeringFitSearch::new(order),
            identities: HorizontalIdentities::new(order),
            ties: GeometricTies::new(order),
            converted: vec![0.0; channels * channels],
        })
    }

    /// Ambisonic order the checker is built for.
    pub fn order(&self) -> usize {
        self.order
    }

    /// Formats tested at this order, in the order of [`AmbiFormat::ALL`].
    pub fn formats(&self) -> impl Iterator<Item = AmbiFormat> + '_ {
        self.hypotheses.iter().map(|h| h.format)
    }

    /// Runs the check. Errors only on malformed input (wrong order or lengths, NaN).
    pub fn check(&mut self, input: &FormatCheckInput) -> Result<FormatCheck, FormatCheckError> {
        let channels = self.validate(input)?;
        let mean_square = &input.channel_mean_square[..channels];
        let mut absent = vec![false; channels];
        for &channel in input.absent_channels {
            absent[channel] = true;
        }
        let silent_channels: Vec<usize> = channel_health::silent_channels(mean_square)
            .into_iter()
            .filter(|&c| !absent[c])
            .collect();
        let mut silent = vec![false; channels];
        for &channel in &silent_channels {
            silent[channel] = true;
        }
        let facts = ChannelFacts { absent, silent };
        let mut result = FormatCheck {
            silent_channels,
            ..FormatCheck::default()
        };
        let excluded: Vec<usize> = (0..channels)
            .filter(|&c| facts.absent[c] || facts.silent[c])
            .collect();

        // Balance under the assumed format gives the effective order (ACN/SN3D if the
        // assumed format does not exist at this order).
        let assumed_index = self
            .hypotheses
            .iter()
            .position(|h| h.format == input.assumed)
            .unwrap_or(0);
        let w_channel = self.hypotheses[assumed_index].plan.source_channel(0);
        let w_power = input.raw_covariance[w_channel * channels + w_channel];
        if w_power <= 0.0 {
            // Without W nothing is relative to anything; only channel health is reported.
            result.duplicate_channels =
                channel_health::duplicate_pairs(input.raw_covariance, channels, &excluded);
            return Ok(result);
        }
        self.convert(assumed_index, input.raw_covariance);
        let assumed_balance = self.order_balance_db(self.order);
        let effective_order = (1..=self.order)
            .rev()
            .find(|&n| assumed_balance[n] > EFFECTIVE_ORDER_FLOOR_DB)
            .unwrap_or(0);
        result.effective_order = effective_order;
        result.order_balance_db = assumed_balance;

        // Evidence under every hypothesis, on orders 0..=effective_order.
        let mut evidence = Vec::with_capacity(self.hypotheses.len());
        for index in 0..self.hypotheses.len() {
            self.convert(index, input.raw_covariance);
            let plan = &self.hypotheses[index].plan;
            let present = facts.present(plan);
            let live = facts.live(plan);
            let complete = (0..=self.order)
                .map(|n| (n * n..(n + 1) * (n + 1)).all(|a| present[a]))
                .collect();
            let horizontal = self.identities.judge(&HorizontalQuery {
                covariance: &self.converted,
                plan,
                present: &present,
                live: &live,
                effective_order,
            });
            let geometry = geometry::analyse(
                &mut self.search,
                &GeometryQuery {
                    covariance: &self.converted,
                    full_order: self.order,
                    order: effective_order,
                    present: &present,
                },
            );
            evidence.push(Evidence {
                order_balance_db: self.order_balance_db(self.order),
                geometry,
                horizontal,
                complete,
                present,
            });
        }

        // Log-scores and softmax.
        let best_fit = evidence
            .iter()
            .map(|e| e.geometry.steering_fit)
            .fold(0.0, f64::max);
        let directionality = evidence
            .iter()
            .map(|e| e.geometry.directional_share)
            .fold(0.0, f64::max);
        let use_fit = effective_order >= 2;
        let log_scores: Vec<f64> = self
            .hypotheses
            .iter()
            .zip(&evidence)
            .map(|(hypothesis, e)| {
                let balance_penalty: f64 = (1..=effective_order)
                    .filter(|&n| e.complete[n])
                    .map(|n| balance_penalty(e.order_balance_db[n]))
                    .sum();
                let fit_term = if use_fit {
                    STEERING_FIT_NATS * directionality * (e.geometry.steering_fit - best_fit)
                } else {
                    0.0
                };
                hypothesis.log_prior - balance_penalty + fit_term
            })
            .collect();
        let max_score = log_scores.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let weights: Vec<f64> = log_scores.iter().map(|s| (s - max_score).exp()).collect();
        let total: f64 = weights.iter().sum();
        result.hypotheses = self
            .hypotheses
            .iter()
            .zip(&evidence)
            .zip(&weights)
            .map(|((hypothesis, e), w)| HypothesisScore {
                format: hypothesis.format,
                order_balance_db: e.order_balance_db.clone(),
                steering_fit: e.geometry.steering_fit,
                probability: w / total,
            })
            .collect();

        let w_has_signal = mean_square[w_channel] >= SILENT_MEAN_SQUARE;
        result.ready = input.frames_seen >= MIN_FRAMES_FOR_VERDICT && w_has_signal;
        if result.ready
            && let Some(best) = result
                .hypotheses
                .iter()
                .max_by(|a, b| a.probability.total_cmp(&b.probability))
        {
            result.detected = Some(best.format);
            result.confidence = best.probability;
        }

        self.apply_geometry(&mut result, &evidence, assumed_index, input, &excluded);
        let plausible: Vec<bool> = result
            .hypotheses
            .iter()
            .map(|h| h.probability >= PLAUSIBLE_FOR_GEOMETRY)
            .collect();
        let named = self.explain_by_geometric_ties(
            &mut result.duplicate_channels,
            &facts,
            input,
            effective_order,
            &plausible,
        );
        // The masked search costs one eigen-analysis per channel and hypothesis: only when
        // some correlated pair is left to name and no copy has been named yet.
        if !named
            && !result.duplicate_channels.is_empty()
            && let Some(culprits) =
                self.copied_into_plane_waves(&evidence, input, &excluded, effective_order)
        {
            restrict_to_culprits(&mut result.duplicate_channels, &culprits, input, channels);
        }

        if result.ready && self.order == 1 && input.absent_channels.is_empty() {
            let best_b = evidence
                .iter()
                .map(|e| {
                    let balance = if e.complete[1] {
                        e.order_balance_db[1]
                    } else {
                        0.0
                    };
                    a_format::plausibility(balance, &e.geometry)
                })
                .fold(f64::NEG_INFINITY, f64::max);
            let full_band = a_format::capsule_reading(&mut self.search, input.raw_covariance);
            let mid_band_agrees = input
                .mid_band_covariance
                .is_none_or(|mid| a_format::capsule_reading(&mut self.search, mid).is_some());
            result.a_format_suspected = mid_band_agrees
                && full_band
                    .is_some_and(|score| score >= best_b - a_format::PLAUSIBILITY_MARGIN_NATS);
        }
        Ok(result)
    }

    /// Moves silent channels that horizontal content explains to `silent_by_geometry`, and
    /// keeps only the correlated pairs that no geometry explains.
    fn apply_geometry(
        &self,
        result: &mut FormatCheck,
        evidence: &[Evidence],
        assumed_index: usize,
        input: &FormatCheckInput,
        excluded: &[usize],
    ) {
        let channels = channel_count(self.order);
        // The horizontal reading that holds with the fewest broken predictions, then the
        // smallest residual; the assumed format wins ties.
        let mut order_of_trial: Vec<usize> = (0..evidence.len()).collect();
        order_of_trial.retain(|&i| i != assumed_index);
        order_of_trial.insert(0, assumed_index);
        let mut best: Option<usize> = None;
        for index in order_of_trial {
            let reading = &evidence[index].horizontal;
            if !reading.horizontal {
                continue;
            }
            let better = best.is_none_or(|b| {
                let held = &evidence[b].horizontal;
                (reading.violations, reading.mismatch) < (held.violations, held.mismatch)
            });
            if better {
                best = Some(index);
            }
        }
        let mut pairs = channel_health::duplicate_pairs(input.raw_covariance, channels, excluded);
        if let Some(index) = best {
            let plan = &self.hypotheses[index].plan;
            let reading = &evidence[index].horizontal;
            result.horizontal_only = true;
            let expected: Vec<usize> = reading
                .zero_held
                .iter()
                .map(|&a| plan.source_channel(a))
                .collect();
            result.silent_by_geometry = result
                .silent_channels
                .iter()
                .copied()
                .filter(|c| expected.contains(c))
                .collect();
            result.silent_channels.retain(|c| !expected.contains(c));
            let group_of = |input_channel: usize| {
                reading.groups.iter().position(|group| {
                    group
                        .iter()
                        .any(|&a| plan.source_channel(a) == input_channel)
                })
            };
            pairs.retain(|&(i, j)| group_of(i).is_none() || group_of(i) != group_of(j));
        }
        if evidence.iter().any(|e| e.geometry.plane_waves.is_some()) {
            pairs.clear();
        }
        result.duplicate_channels = pairs;
    }

    /// Drops the correlated pairs that a scene family of [`geometric_ties`] explains under
    /// some `plausible` hypothesis (flags indexed like the hypotheses). True when a channel
    /// copied into otherwise explained content was named (its pairs are then cut to its copy
    /// partners).
    fn explain_by_geometric_ties(
        &mut self,
        pairs: &mut Vec<(usize, usize)>,
        facts: &ChannelFacts,
        input: &FormatCheckInput,
        effective_order: usize,
        plausible: &[bool],
    ) -> bool {
        if pairs.is_empty() {
            return false;
        }
        let mut explained = vec![false; pairs.len()];
        let mut culprits = Vec::new();
        for index in (0..self.hypotheses.len()).filter(|&i| plausible[i]) {
            self.convert(index, input.raw_covariance);
            let plan = &self.hypotheses[index].plan;
            let mut acn_of_input = vec![0; plan.channels()];
            for a in 0..plan.channels() {
                acn_of_input[plan.source_channel(a)] = a;
            }
            let acn_pairs: Vec<(usize, usize)> = pairs
                .iter()
                .map(|&(i, j)| (acn_of_input[i], acn_of_input[j]))
                .collect();
            let present = facts.present(plan);
            let live = facts.live(plan);
            let culprit = self.ties.explain(
                &mut self.search,
                &TieQuery {
                    covariance: &self.converted,
                    plan,
                    present: &present,
                    live: &live,
                    effective_order,
                },
                &acn_pairs,
                &mut explained,
            );
            culprits.extend(culprit.map(|a| plan.source_channel(a)));
            if explained.iter().all(|&e| e) {
                break;
            }
        }
        let mut flags = explained.into_iter();
        pairs.retain(|_| !flags.next().unwrap_or(false));
        let channels = channel_count(self.order);
        for &culprit in &culprits {
            keep_copy_partners(pairs, culprit, input, channels);
        }
        !culprits.is_empty()
    }

    /// When the covariance is a few strong components that do *not* fit plane waves under
    /// any hypothesis, the input channels whose removal makes them fit (a channel copied or
    /// corrupted inside a one-to-three-source scene), if any. Costs one eigen-analysis per
    /// live channel and hypothesis, only in that case.
    fn copied_into_plane_waves(
        &mut self,
        evidence: &[Evidence],
        input: &FormatCheckInput,
        excluded: &[usize],
        effective_order: usize,
    ) -> Option<Vec<usize>> {
        if evidence.iter().any(|e| e.geometry.plane_waves.is_some())
            || evidence.iter().all(|e| e.geometry.low_rank.is_none())
        {
            return None;
        }
        for (index, e) in evidence.iter().enumerate() {
            if e.geometry.low_rank.is_none() {
                continue;
            }
            self.convert(index, input.raw_covariance);
            let plan = &self.hypotheses[index].plan;
            let mut culprits = Vec::new();
            for acn in 0..channel_count(effective_order) {
                let channel = plan.source_channel(acn);
                if excluded.binary_search(&channel).is_ok() || !e.present[acn] {
                    continue;
                }
                let mut present = e.present.clone();
                present[acn] = false;
                let masked = geometry::analyse(
                    &mut self.search,
                    &GeometryQuery {
                        covariance: &self.converted,
                        full_order: self.order,
                        order: effective_order,
                        present: &present,
                    },
                );
                if masked.plane_waves.is_some() {
                    culprits.push(channel);
                }
            }
            if !culprits.is_empty() {
                culprits.sort_unstable();
                return Some(culprits);
            }
        }
        None
    }

    fn validate(&self, input: &FormatCheckInput) -> Result<usize, FormatCheckError> {
        if input.order != self.order {
            return Err(FormatCheckError::OrderMismatch {
                checker: self.order,
                input: input.order,
            });
        }
        let channels = channel_count(self.order);
        for (what, covariance) in [
            ("covariance", Some(input.raw_covariance)),
            ("mid-band covariance", input.mid_band_covariance),
        ] {
            let Some(covariance) = covariance else {
                continue;
            };
            if covariance.len() != channels * channels {
                return Err(FormatCheckError::WrongLength {
                    what,
                    expected: channels * channels,
                    got: covariance.len(),
                });
            }
            if covariance.iter().any(|v| !v.is_finite()) {
                return Err(FormatCheckError::NonFinite);
            }
        }
        if input.channel_mean_square.len() < channels {
            return Err(FormatCheckError::WrongLength {
                what: "channel mean squares",
                expected: channels,
                got: input.channel_mean_square.len(),
            });
        }
        if let Some(&channel) = input.absent_channels.iter().find(|&&c| c >= channels) {
            return Err(FormatCheckError::AbsentChannelOutOfRange { channel, channels });
        }
        Ok(channels)
    }

    /// `converted` = C_h R C_hᵀ for hypothesis `index`.
    fn convert(&mut self, index: usize, raw: &[f64]) {
        let plan = &self.hypotheses[index].plan;
        let channels = plan.channels();
        for a in 0..channels {
            let (source_a, gain_a) = (plan.source_channel(a), plan.gain(a));
            for b in 0..channels {
                let (source_b, gain_b) = (plan.source_channel(b), plan.gain(b));
                self.converted[a * channels + b] =
                    gain_a * gain_b * raw[source_a * channels + source_b];
            }
        }
    }

    /// Per-order energy of `converted` relative to W, dB, indexed [order] for 0..=`order`.
    fn order_balance_db(&self, order: usize) -> Vec<f64> {
        let channels = channel_count(self.order);
        let w = self.converted[0];
        (0..=order)
            .map(|n| {
                let energy: f64 = (n * n..(n + 1) * (n + 1))
                    .map(|acn| self.converted[acn * channels + acn])
                    .sum();
                (10.0 * (energy / w).log10()).max(BALANCE_FLOOR_DB)
            })
            .collect()
    }
}

/// Keeps only the pairs that involve a culprit channel and, where a culprit has partners of
/// the same level (an exact or inverted copy), only those partners.
fn restrict_to_culprits(
    pairs: &mut Vec<(usize, usize)>,
    culprits: &[usize],
    input: &FormatCheckInput,
    channels: usize,
) {
    let power = |c: usize| input.raw_covariance[c * channels + c];
    let same_level =
        |a: usize, b: usize| (power(a) - power(b)).abs() <= 1e-3 * power(a).max(power(b));
    pairs.retain(|&(i, j)| culprits.contains(&i) || culprits.contains(&j));
    let copies: Vec<(usize, usize)> = pairs
        .iter()
        .copied()
        .filter(|&(i, j)| same_level(i, j))
        .collect();
    if !copies.is_empty() {
        *pairs = copies;
    }
}

/// Of the pairs that involve `culprit`, keeps only its same-level partners (the channel it
/// is a copy of) when it has any; other pairs are left alone.
fn keep_copy_partners(
    pairs: &mut Vec<(usize, usize)>,
    culprit: usize,
    input: &FormatCheckInput,
    channels: usize,
) {
    let power = |c: usize| input.raw_covariance[c * channels + c];
    let same_level =
        |a: usize, b: usize| (power(a) - power(b)).abs() <= 1e-3 * power(a).max(power(b));
    let involves = |&(i, j): &(usize, usize)| i == culprit || j == culprit;
    if pairs.iter().any(|&p| involves(&p) && same_level(p.0, p.1)) {
        pairs.retain(|&p| !involves(&p) || same_level(p.0, p.1));
    }
}

/// Nats of one order's balance against the 0 dB of SN3D (asymmetric spread, see
/// [`score_constants`]).
fn balance_penalty(db: f64) -> f64 {
    let sigma = if db > 0.0 {
        BALANCE_SIGMA_EXCESS_DB
    } else {
        BALANCE_SIGMA_DEFICIT_DB
    };
    0.5 * (db / sigma).powi(2)
}

/// Convenience form of [`FormatChecker::check`]: builds a checker (allocates) and runs it.
/// Malformed input gives a check that is not ready and reports nothing.
pub fn check_format(input: &FormatCheckInput) -> FormatCheck {
    FormatChecker::new(input.order)
        .and_then(|mut checker| checker.check(input))
        .unwrap_or_default()
}
