//! Plane-wave encoder: the gains with which a far-field source from one direction appears in
//! each channel of an ambisonic stream, in any supported format.
//!
//! A unit plane wave from direction d gives B_acn = Y_acn(d) in ACN/SN3D (ambiX convention,
//! see the crate root); other formats reorder and rescale those values.

use crate::format::{AmbiFormat, ConversionPlan, FormatError};
use crate::sh::{ShEvaluator, channel_count};
use crate::sphere::Direction;

/// Writes the plane-wave encoding gains of `direction` for an order-`order` stream in `format`
/// into `out`, indexed by [channel in the format's channel order].
///
/// Convenience form: it builds a [`PlaneWaveEncoder`] and so allocates; use the encoder in
/// loops. Errors if the format is not defined at `order` or `out` does not hold (order+1)²
/// values.
pub fn encoding_gains(
    order: usize,
    format: AmbiFormat,
    direction: Direction,
    out: &mut [f64],
) -> Result<(), FormatError> {
    let expected = channel_count(order);
    if out.len() != expected {
        return Err(FormatError::WrongLength {
            what: "encoding gain buffer",
            expected,
            got: out.len(),
        });
    }
    let mut encoder = PlaneWaveEncoder::new(order, format)?;
    out.copy_from_slice(encoder.gains(direction));
    Ok(())
}

/// Reusable plane-wave encoder for one order and format. Owns all scratch; after
/// [`new`](Self::new) nothing allocates.
#[derive(Clone, Debug)]
pub struct PlaneWaveEncoder {
    evaluator: ShEvaluator,
    plan: ConversionPlan,
    /// SN3D values, indexed by \[acn\].
    sn3d: Vec<f64>,
    /// Gains in the output format, indexed by [output channel].
    gains: Vec<f64>,
}

impl PlaneWaveEncoder {
    /// Encoder producing order-`order` streams in `format`. Errors if the format is not defined
    /// at that order (FuMa and maxN stop at 3) or the order is unsupported.
    pub fn new(order: usize, format: AmbiFormat) -> Result<Self, FormatError> {
        let plan = ConversionPlan::from_sn3d(format, order)?;
        let channels = plan.channels();
        Ok(Self {
            evaluator: ShEvaluator::new(order),
            plan,
            sn3d: vec![0.0; channels],
            gains: vec![0.0; channels],
        })
    }

    /// Ambisonic order.
    pub fn order(&self) -> usize {
        self.plan.order()
    }

    /// Output format.
    pub fn format(&self) -> AmbiFormat {
        self.plan.format()
    }

    /// Number of output channels: (order+1)².
    pub fn channels(&self) -> usize {
        self.gains.len()
    }

    /// Encoding gains of a unit plane wave from `direction`, indexed by [output channel].
    pub fn gains(&mut self, direction: Direction) -> &[f64] {
        self.evaluator.eval(direction, &mut self.sn3d);
        for (output_channel, gain) in self.gains.iter_mut().enumerate() {
            *gain = self.sn3d[self.plan.source_channel(output_channel)]
                * self.plan.gain(output_channel);
        }
        &self.gains
    }

    /// Adds the mono `signal`, scaled by `gain` and encoded from `direction`, into `outputs`
    /// (one buffer per output channel, in the format's channel order). Only the first
    /// `signal.len()` samples of each output are touched.
    ///
    /// # Panics
    /// If `outputs` does not hold [`channels`](Self::channels) buffers or one is shorter than
    /// `signal` (a caller bug).
    pub fn add_to(
        &mut self,
        direction: Direction,
        gain: f32,
        signal: &[f32],
        outputs: &mut [&mut [f32]],
    ) {
        assert_eq!(
            outputs.len(),
            self.channels(),
            "encoder output channel count"
        );
        self.gains(direction);
        for (output, &channel_gain) in outputs.iter_mut().zip(&self.gains) {
            let scale = gain * channel_gain as f32;
            let output = &mut output[..signal.len()];
            for (o, &s) in output.iter_mut().zip(signal) {
                *o += scale * s;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fuma_front_source() {
        // A frontal unit plane wave in FuMa: W = 1/√2, X = 1, Y = Z = 0 (common practice).
        let mut out = [0.0; 4];
        encoding_gains(1, AmbiFormat::FUMA, Direction::new(0.0, 0.0), &mut out).unwrap();
        let expected = [std::f64::consts::FRAC_1_SQRT_2, 1.0, 0.0, 0.0];
        for (a, e) in out.iter().zip(expected) {
            assert!((a - e).abs() < 1e-12, "{out:?}");
        }
        let mut short = [0.0; 3];
        assert!(encoding_gains(1, AmbiFormat::FUMA, Direction::default(), &mut short).is_err());
        assert!(PlaneWaveEncoder::new(4, AmbiFormat::FUMA).is_err());
    }

    #[test]
    fn add_to_accumulates() {
        let mut encoder = PlaneWaveEncoder::new(2, AmbiFormat::ACN_SN3D).unwrap();
        let direction = Direction::new(90.0, 0.0);
        let signal = [1.0f32, -0.5, 0.25];
        let mut buffers = vec![vec![1.0f32; 4]; 9];
        let mut refs: Vec<&mut [f32]> = buffers.iter_mut().map(|b| b.as_mut_slice()).collect();
        encoder.add_to(direction, 2.0, &signal, &mut refs);
        let gains = encoder.gains(direction).to_vec();
        for (channel, buffer) in buffers.iter().enumerate() {
            for (i, &s) in signal.iter().enumerate() {
                let expected = 1.0 + 2.0 * gains[channel] as f32 * s;
                assert!((buffer[i] - expected).abs() < 1e-6);
            }
            assert_eq!(buffer[3], 1.0, "samples past the signal stay untouched");
        }
    }
}
