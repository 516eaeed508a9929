//! The crate's one error type.

/// Everything that can go wrong in a simulation.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A scenario or option value that makes no physical sense or is out of
    /// range.
    #[error("{0}")]
    Invalid(String),
    /// The host physics refused a state, a quantity or a model.
    #[error(transparent)]
    Physics(#[from] isochor_eos::Error),
    /// The core refused a setup or sample.
    #[error(transparent)]
    Core(#[from] isochor_core::Error),
    /// Output could not be written or encoded.
    #[error("output: {0}")]
    Output(String),
    /// A file could not be read or written.
    #[error("{path}: {reason}")]
    File {
        /// The file.
        path: String,
        /// What went wrong.
        reason: String,
    },
    /// The physics could not meet its step tolerance.
    #[error("{0}")]
    NoConvergence(String),
    /// The gauge under test failed (a backend outside this crate: an
    /// emulated firmware that stopped answering, say).
    #[error("gauge: {0}")]
    Gauge(String),
}

impl Error {
    /// The process exit code for this error: 2 for bad input, 1 otherwise.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Invalid(_) | Error::Core(_) => 2,
            Error::Physics(e) => e.exit_code(),
            Error::Output(_) | Error::File { .. } | Error::Gauge(_) | Error::NoConvergence(_) => 1,
        }
    }
}
