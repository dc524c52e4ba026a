use super::{AmbiFormat, FormatError};
use crate::sh::channel_count;

/// Which way a [`ConversionPlan`] converts.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ConversionDirection {
    /// From a stream format into ACN/SN3D (the input side of the analysis).
    ToSn3d,
    /// From ACN/SN3D into a stream format (the encoder's output side).
    FromSn3d,
}

/// A precomputed channel map with one gain per output channel: output channel `j` is
/// `input[source_channel(j)] · gain(j)`. Building it allocates; applying it does not, and does
/// not branch on the format.
///
/// - [`to_sn3d`](Self::to_sn3d): input in the stream format's channel order, output indexed by
///   \[acn\] in SN3D, so `source_channel(acn)` is the stream channel that carries that ACN.
/// - [`from_sn3d`](Self::from_sn3d): input indexed by \[acn\] in SN3D, output in the stream
///   format's channel order and scaling.
#[derive(Clone, Debug)]
pub struct ConversionPlan {
    format: AmbiFormat,
    order: usize,
    direction: ConversionDirection,
    /// Input channel feeding each output channel, indexed by [output channel].
    source_channel: Vec<usize>,
    /// Gain applied on the way, indexed by [output channel].
    gain: Vec<f64>,
    /// `gain` rounded to f32 for the sample loops.
    gain_f32: Vec<f32>,
}

impl ConversionPlan {
    /// Plan converting an order-`order` stream in `format` into ACN/SN3D.
    ///
    /// Errors if the format is not defined at that order (FuMa and maxN stop at order 3) or the
    /// order is above [`crate::sh::MAX_SH_ORDER`].
    pub fn to_sn3d(format: AmbiFormat, order: usize) -> Result<Self, FormatError> {
        Self::build(format, order, ConversionDirection::ToSn3d)
    }

    /// Plan converting ACN/SN3D of order `order` into `format` (same errors as
    /// [`to_sn3d`](Self::to_sn3d)).
    pub fn from_sn3d(format: AmbiFormat, order: usize) -> Result<Self, FormatError> {
        Self::build(format, order, ConversionDirection::FromSn3d)
    }

    fn build(
        format: AmbiFormat,
        order: usize,
        direction: ConversionDirection,
    ) -> Result<Self, FormatError> {
        format.check_order(order)?;
        let channels = channel_count(order);
        let mut source_channel = Vec::with_capacity(channels);
        let mut gain = Vec::with_capacity(channels);
        let undefined = || FormatError::OrderAboveFormatLimit {
            format,
            order,
            max_order: format.max_order().unwrap_or(order),
        };
        for output_channel in 0..channels {
            // The ACN this output channel is about, and the input channel that carries it.
            let (acn, input_channel) = match direction {
                ConversionDirection::ToSn3d => (
                    output_channel,
                    format
                        .ordering
                        .channel_of_acn(output_channel)
                        .ok_or_else(undefined)?,
                ),
                ConversionDirection::FromSn3d => {
                    let acn = format
                        .ordering
                        .acn_of_channel(output_channel)
                        .ok_or_else(undefined)?;
                    (acn, acn)
                }
            };
            let format_gain = format
                .normalization
                .gain_from_sn3d(acn)
                .ok_or_else(undefined)?;
            source_channel.push(input_channel);
            gain.push(match direction {
                ConversionDirection::ToSn3d => 1.0 / format_gain,
                ConversionDirection::FromSn3d => format_gain,
            });
        }
        let gain_f32 = gain.iter().map(|&g| g as f32).collect();
        Ok(Self {
            format,
            order,
            direction,
            source_channel,
            gain,
            gain_f32,
        })
    }

    /// The stream format on the non-SN3D side.
    pub fn format(&self) -> AmbiFormat {
        self.format
    }

    /// Ambisonic order of the plan.
    pub fn order(&self) -> usize {
        self.order
    }

    /// Which way the plan converts.
    pub fn direction(&self) -> ConversionDirection {
        self.direction
    }

    /// Number of channels on both sides: (order+1)².
    pub fn channels(&self) -> usize {
        self.source_channel.len()
    }

    /// Input channel feeding output channel `output_channel` (for a `to_sn3d` plan, pass an
    /// ACN and get the stream channel carrying it). Panics if out of range.
    pub fn source_channel(&self, output_channel: usize) -> usize {
        self.source_channel[output_channel]
    }

    /// Gain from input to output channel `output_channel` (for a `to_sn3d` plan, the factor
    /// that turns the stream's value into SN3D for that ACN). Panics if out of range.
    pub fn gain(&self, output_channel: usize) -> f64 {
        self.gain[output_channel]
    }

    /// Converts one frame (one sample per channel).
    ///
    /// # Panics
    /// If either slice is shorter than [`channels`](Self::channels).
    pub fn apply_frame(&self, input_frame: &[f32], output_frame: &mut [f32]) {
        let output_frame = &mut output_frame[..self.channels()];
        for ((out, &source), &gain) in output_frame
            .iter_mut()
            .zip(&self.source_channel)
            .zip(&self.gain_f32)
        {
            *out = input_frame[source] * gain;
        }
    }

    /// Converts a block of planar channels; `input[c]` and `output[c]` are channel buffers of
    /// equal length.
    ///
    /// # Panics
    /// If either side does not have [`channels`](Self::channels) buffers or the buffers differ
    /// in length (a caller bug, not a property of user data).
    pub fn apply(&self, input: &[&[f32]], output: &mut [&mut [f32]]) {
        let channels = self.channels();
        assert_eq!(input.len(), channels, "conversion input channel count");
        assert_eq!(output.len(), channels, "conversion output channel count");
        for ((out, &source), &gain) in output
            .iter_mut()
            .zip(&self.source_channel)
            .zip(&self.gain_f32)
        {
            let inp = input[source];
            assert_eq!(inp.len(), out.len(), "conversion buffer lengths differ");
            for (o, &i) in out.iter_mut().zip(inp) {
                *o = i * gain;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fuma_first_order_map() {
        // FuMa W X Y Z -> ACN W Y Z X; W gains +3.01 dB (REFERENCES-style maxN table).
        let plan = ConversionPlan::to_sn3d(AmbiFormat::FUMA, 1).unwrap();
        let fuma_frame = [0.5f32, 0.3, 0.2, 0.1]; // W X Y Z
        let mut acn = [0.0f32; 4];
        plan.apply_frame(&fuma_frame, &mut acn);
        let expected = [0.5 * std::f32::consts::SQRT_2, 0.2, 0.1, 0.3];
        for (a, e) in acn.iter().zip(expected) {
            assert!((a - e).abs() < 1e-6, "{acn:?}");
        }
        assert_eq!(plan.source_channel(3), 1);
    }

    #[test]
    fn block_matches_frame() {
        let plan = ConversionPlan::from_sn3d(AmbiFormat::FUMA, 3).unwrap();
        let frames = 5;
        let input: Vec<Vec<f32>> = (0..16)
            .map(|c| (0..frames).map(|i| (c * 7 + i) as f32 * 0.01).collect())
            .collect();
        let input_refs: Vec<&[f32]> = input.iter().map(|v| v.as_slice()).collect();
        let mut output = vec![vec![0.0f32; frames]; 16];
        let mut output_refs: Vec<&mut [f32]> =
            output.iter_mut().map(|v| v.as_mut_slice()).collect();
        plan.apply(&input_refs, &mut output_refs);
        for i in 0..frames {
            let frame: Vec<f32> = input.iter().map(|c| c[i]).collect();
            let mut out = [0.0f32; 16];
            plan.apply_frame(&frame, &mut out);
            for c in 0..16 {
                assert_eq!(out[c], output[c][i]);
            }
        }
    }

    #[test]
    fn fuma_above_third_order_is_an_error() {
        let err = ConversionPlan::to_sn3d(AmbiFormat::FUMA, 4).unwrap_err();
        assert!(err.to_string().contains("order 4"), "{err}");
        assert!(ConversionPlan::from_sn3d(AmbiFormat::ACN_MAXN, 5).is_err());
        assert!(ConversionPlan::to_sn3d(AmbiFormat::ACN_N3D, 7).is_ok());
    }
}
