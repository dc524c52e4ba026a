use super::{AmbiFormat, FORMAT_LABELS};
use std::fmt;

/// Why a format, conversion or encoder could not be set up.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum FormatError {
    /// A format label that is not one of [`FORMAT_LABELS`].
    UnknownFormat(String),
    /// The format is not defined at this order (FuMa and maxN stop at order 3).
    OrderAboveFormatLimit {
        format: AmbiFormat,
        order: usize,
        max_order: usize,
    },
    /// The order is above what the SH core supports.
    OrderAboveSupported { order: usize, max_order: usize },
    /// A caller-supplied buffer has the wrong number of values.
    WrongLength {
        what: &'static str,
        expected: usize,
        got: usize,
    },
}

impl fmt::Display for FormatError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FormatError::UnknownFormat(given) => write!(
                f,
                "unknown ambisonic format \"{given}\"; valid names are {}",
                FORMAT_LABELS.join(", ")
            ),
            FormatError::OrderAboveFormatLimit {
                format,
                order,
                max_order,
            } => write!(
                f,
                "order {order} is not defined for {format} ({}), which stops at order {max_order}",
                format.label()
            ),
            FormatError::OrderAboveSupported { order, max_order } => write!(
                f,
                "order {order} is above the highest supported order {max_order}"
            ),
            FormatError::WrongLength {
                what,
                expected,
                got,
            } => write!(f, "{what} needs {expected} values, got {got}"),
        }
    }
}

impl std::error::Error for FormatError {}
