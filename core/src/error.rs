//! The crate's one error type.

use core::fmt;

/// Everything that can go wrong in `isochor-core`.
///
/// Samples never produce errors in the fixed-point path (they are clamped and
/// flagged in the [`Status`](crate::Status) word); errors come from
/// configuration that cannot be honoured and from float inputs that are not
/// numbers.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error {
    /// A float input was NaN or infinite; the named quantity says which.
    NotFinite(&'static str),
    /// A configuration value lies outside what the crate accepts; the named
    /// quantity says which (see the validation rules on its type).
    OutOfRange(&'static str),
    /// A gas name that is not in the gas list.
    UnknownGas,
    /// The gas model's answer at the rated or standard condition was unusable
    /// (for example two-phase), so the setup cannot be prepared.
    ModelUnusable(&'static str),
    /// A device gas-model table or blob is malformed, corrupt or of an
    /// unsupported version; the text says what was wrong.
    ModelData(&'static str),
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::NotFinite(what) => write!(f, "{what} is not a finite number"),
            Error::OutOfRange(what) => write!(f, "{what} is outside the accepted range"),
            Error::UnknownGas => f.write_str("unknown gas name"),
            Error::ModelUnusable(what) => {
                write!(f, "the gas model gives no usable answer at the {what}")
            }
            Error::ModelData(what) => write!(f, "gas-model table refused: {what}"),
        }
    }
}

impl core::error::Error for Error {}
