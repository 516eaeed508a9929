//! The crate's one error type.

/// Everything that can go wrong on the host side.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A quantity on the command line could not be read.
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
    /// The simulator failed (its own errors keep their wording).
    #[error(transparent)]
    Sim(isochor_tank::Error),
    /// Output could not be written or encoded.
    #[error("output: {0}")]
    Output(String),
    /// The link to a device failed (port, connection, timeout, bad reply).
    #[error("link: {0}")]
    Link(String),
    /// The device refused a request.
    #[error("device refused: {0}")]
    Refused(String),
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
    /// A tool a command needs (QEMU, a Rust target, cargo) is missing or
    /// failed.
    #[error("{0}")]
    Tool(String),
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
            Error::Sim(e) => e.exit_code(),
            Error::Output(_)
            | Error::Link(_)
            | Error::Refused(_)
            | Error::EosData(_)
            | Error::NoConvergence(_)
            | Error::File { .. }
            | Error::Build(_)
            | Error::Tool(_) => 1,
        }
    }
}

/// The host physics' errors keep their kind (and exit code) here.
impl From<isochor_eos::Error> for Error {
    fn from(e: isochor_eos::Error) -> Error {
        use isochor_eos::Error as E;
        match e {
            E::Quantity {
                what,
                input,
                reason,
            } => Error::Quantity {
                what,
                input,
                reason,
            },
            E::Invalid(m) => Error::Invalid(m),
            E::Core(c) => Error::Core(c),
            E::EosRange(m) => Error::EosRange(m),
            E::TwoPhase(m) => Error::TwoPhase(m),
            E::EosData(m) => Error::EosData(m),
            E::NoConvergence(m) => Error::NoConvergence(m),
            E::File { path, reason } => Error::File { path, reason },
            E::Build(m) => Error::Build(m),
            other => Error::Invalid(other.to_string()),
        }
    }
}

/// The simulator's errors: physics and core errors keep their kind, the
/// rest are carried as they are.
impl From<isochor_tank::Error> for Error {
    fn from(e: isochor_tank::Error) -> Error {
        use isochor_tank::Error as E;
        match e {
            E::Physics(p) => p.into(),
            E::Core(c) => Error::Core(c),
            other => Error::Sim(other),
        }
    }
}
