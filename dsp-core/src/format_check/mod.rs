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

mod channel_health;
mod steering_fit;

pub use channel_health::{DUPLICATE_CORRELATION, SILENT_MEAN_SQUARE};

use crate::engine::snapshot::{FormatCheck, HypothesisScore};
use crate::format::{AmbiFormat, ConversionPlan};
use crate::sh::{MAX_SH_ORDER, channel_count, n3d_gain, order_degree};
use nalgebra::{DMatrix, SymmetricEigen};
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
    /// Converted covariance, (order+1)² squared, row-major, indexed by \[acn\]\[acn\].
    converted: Vec<f64>,
}

/// Evidence gathered under one hypothesis.
struct Evidence {
    order_balance_db: Vec<f64>,
    steering_fit: f64,
    /// Share of the N3D-coordinate power held by the fitted eigenvectors above the floor.
    directional_share: f64,
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
        let silent_channels = channel_health::silent_channels(mean_square);
        let mut result = FormatCheck {
            silent_channels,
            ..FormatCheck::default()
        };

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
            result.duplicate_channels = channel_health::duplicate_pairs(
                input.raw_covariance,
                channels,
                &result.silent_channels,
            );
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
            let mut order_balance_db = self.order_balance_db(self.order);
            let (steering_fit, directional_share) = self.steering_fit(effective_order);
            order_balance_db.truncate(self.order + 1);
            evidence.push(Evidence {
                order_balance_db,
                steering_fit,
                directional_share,
            });
        }

        // Log-scores and softmax.
        let best_fit = evidence.iter().map(|e| e.steering_fit).fold(0.0, f64::max);
        let directionality = evidence
            .iter()
            .map(|e| e.directional_share)
            .fold(0.0, f64::max);
        let use_fit = effective_order >= 2;
        let log_scores: Vec<f64> = self
            .hypotheses
            .iter()
            .zip(&evidence)
            .map(|(hypothesis, e)| {
                let balance_penalty: f64 = e.order_balance_db[1..=effective_order]
                    .iter()
                    .map(|&db| {
                        let sigma = if db > 0.0 {
                            BALANCE_SIGMA_EXCESS_DB
                        } else {
                            BALANCE_SIGMA_DEFICIT_DB
                        };
                        0.5 * (db / sigma).powi(2)
                    })
                    .sum();
                let fit_term = if use_fit {
                    STEERING_FIT_NATS * directionality * (e.steering_fit - best_fit)
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
            .zip(evidence)
            .zip(&weights)
            .map(|((hypothesis, e), w)| HypothesisScore {
                format: hypothesis.format,
                order_balance_db: e.order_balance_db,
                steering_fit: e.steering_fit,
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

        // A single plane wave correlates every channel with every other by physics; that is
        // not a duplicated channel. Recognised by a near-perfect steering fit under the
        // assumed format together with every live pair being correlated.
        let pairs = channel_health::duplicate_pairs(
            input.raw_covariance,
            channels,
            &result.silent_channels,
        );
        let live = channels - result.silent_channels.len();
        let all_pairs_correlated = live >= 2 && pairs.len() == live * (live - 1) / 2;
        let single_plane_wave =
            all_pairs_correlated && result.hypotheses[assumed_index].steering_fit > 0.999;
        if !single_plane_wave {
            result.duplicate_channels = pairs;
        }
        Ok(result)
    }

    fn validate(&self, input: &FormatCheckInput) -> Result<usize, FormatCheckError> {
        if input.order != self.order {
            return Err(FormatCheckError::OrderMismatch {
                checker: self.order,
                input: input.order,
            });
        }
        let channels = channel_count(self.order);
        if input.raw_covariance.len() != channels * channels {
            return Err(FormatCheckError::WrongLength {
                what: "covariance",
                expected: channels * channels,
                got: input.raw_covariance.len(),
            });
        }
        if input.channel_mean_square.len() < channels {
            return Err(FormatCheckError::WrongLength {
                what: "channel mean squares",
                expected: channels,
                got: input.channel_mean_square.len(),
            });
        }
        if input.raw_covariance.iter().any(|v| !v.is_finite()) {
            return Err(FormatCheckError::NonFinite);
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

    /// Eigenvalue-weighted steering fit of `converted` over orders 0..=`order`, and the
    /// share of power the fitted eigenvectors hold above the eigenvalue floor.
    fn steering_fit(&mut self, order: usize) -> (f64, f64) {
        if order == 0 {
            return (0.0, 0.0);
        }
        let full = channel_count(self.order);
        let channels = channel_count(order);
        let gains: Vec<f64> = (0..channels)
            .map(|acn| n3d_gain(order_degree(acn).0))
            .collect();
        let n3d = DMatrix::from_fn(channels, channels, |a, b| {
            gains[a] * gains[b] * self.converted[a * full + b]
        });
        let trace = n3d.trace();
        let Some(eigen) = SymmetricEigen::try_new(n3d, f64::EPSILON, 0) else {
            return (0.0, 0.0);
        };
        let mut by_size: Vec<usize> = (0..channels).collect();
        by_size.sort_by(|&a, &b| eigen.eigenvalues[b].total_cmp(&eigen.eigenvalues[a]));
        let largest = eigen.eigenvalues[by_size[0]];
        if largest.is_nan() || largest <= 0.0 || trace.is_nan() || trace <= 0.0 {
            return (0.0, 0.0);
        }
        // Floor of an isotropic diffuse part: white in N3D coordinates, so the median
        // eigenvalue estimates it while fewer than half the eigenvalues are sources.
        let floor = eigen.eigenvalues[by_size[channels / 2]].max(0.0);
        let range = 10f64.powf(-EIGENVALUE_RANGE_DB / 10.0);
        let mut weighted_fit = 0.0;
        let mut weight_total = 0.0;
        let mut top_fit = 0.0;
        let mut vector = vec![0.0; channels];
        for (rank, &k) in by_size.iter().take(MAX_FITTED_EIGENVECTORS).enumerate() {
            let value = eigen.eigenvalues[k];
            if rank > 0 && value < largest * range {
                break;
            }
            vector.copy_from_slice(eigen.eigenvectors.column(k).as_slice());
            let (fit, _) = self.search.fit(&vector, order);
            if rank == 0 {
                top_fit = fit;
            }
            let weight = (value - floor).max(0.0);
            weighted_fit += weight * fit;
            weight_total += weight;
        }
        if weight_total > 0.0 {
            (weighted_fit / weight_total, weight_total / trace)
        } else {
            (top_fit, 0.0)
        }
    }
}

/// Convenience form of [`FormatChecker::check`]: builds a checker (allocates) and runs it.
/// Malformed input gives a check that is not ready and reports nothing.
pub fn check_format(input: &FormatCheckInput) -> FormatCheck {
    FormatChecker::new(input.order)
        .and_then(|mut checker| checker.check(input))
        .unwrap_or_default()
}
