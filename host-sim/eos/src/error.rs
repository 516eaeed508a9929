//! The crate's one error type.

/// Everything that can go wrong in the host physics.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A quantity with a unit could not be read.
    #[error("{what} '{input}': {reason}")]
    Quantity {
        /// Which option or field.
        what: &'static str,
        /// The text as given.
        input: String,
        /// Why it was refused.
        reason: String,
    },
    /// A value that parses but makes no physical sense or is out of range.
    #[error("{0}")]
    Invalid(String),
    /// The core refused a setup or sample.
    #[error(transparent)]
    Core(#[from] isochor_core::Error),
    /// A state outside the declared range of a reference equation of state.
    #[error("{0}")]
    EosRange(String),
    /// A liquid or two-phase state, where the reference equation of state is
    /// not evaluated on the gas branch.
    #[error("{0}")]
    TwoPhase(String),
    /// Committed equation-of-state data could not be read.
    #[error("equation-of-state data: {0}")]
    EosData(String),
    /// An iteration did not converge.
    #[error("{0}")]
    NoConvergence(String),
    /// A file could not be read or written.
    #[error("{path}: {reason}")]
    File {
        /// The file.
        path: String,
        /// What went wrong.
        reason: String,
    },
    /// A gas model could not be built to the requested accuracy and size.
    #[error("model build: {0}")]
    Build(String),
}

impl Error {
    /// The process exit code for this error: 2 for bad input, 1 otherwise.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Quantity { .. }
            | Error::Invalid(_)
            | Error::Core(_)
            | Error::EosRange(_)
            | Error::TwoPhase(_) => 2,
            Error::EosData(_) | Error::NoConvergence(_) | Error::File { .. } | Error::Build(_) => 1,
        }
    }
}
