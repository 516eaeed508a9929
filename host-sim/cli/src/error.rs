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
    /// A file named on the command line could not be read.
    #[error("{}{path}: {reason}", what.map(|w| format!("{w} ")).unwrap_or_default())]
    InputFile {
        /// The option that named it, if one did.
        what: Option<&'static str>,
        /// The file.
        path: String,
        /// What went wrong.
        reason: String,
    },
    /// A file's content could not be read as what it should hold (a
    /// calibration file, a composition file, a record, a sensor
    /// configuration).
    #[error("{what}{}: {reason}", line.map(|n| format!(" line {n}")).unwrap_or_default())]
    Malformed {
        /// What the file is, or its name.
        what: String,
        /// The line at fault, when there is one.
        line: Option<usize>,
        /// What is wrong.
        reason: String,
    },
    /// The core refused what the options set up (a tank, a setup, a sensor
    /// front-end, a correction, a record), with the core's reason.
    #[error("{what}: {source}")]
    Rejected {
        /// What was set up.
        what: &'static str,
        /// The core's reason.
        source: isochor_core::Error,
    },
    /// A command that changes a device without the device secret.
    #[error(
        "this command changes the device and must be signed: give the device secret \
         with --secret-file or the ISOCHOR_SECRET environment variable"
    )]
    NoSecret,
    /// The device holds no configuration for a command that changes one.
    #[error("the device holds no configuration: store one with write-config first")]
    NoConfiguration,
    /// The device refused a value as out of range (the user's to correct).
    #[error("device refused: {0}")]
    OutOfRange(String),
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
            | Error::InputFile { .. }
            | Error::Malformed { .. }
            | Error::Rejected { .. }
            | Error::NoSecret
            | Error::NoConfiguration
            | Error::OutOfRange(_)
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

/// A command-line value in a fixed-point format, rounded to nearest; refused
/// in the core's words ("… is not a finite number", "… is outside the
/// accepted range") with the option's name, since the core's errors name its
/// own settings, not the host's options.
pub(crate) fn fixed_option<T: isochor_core::fx::FixedValue>(
    value: f64,
    option: &'static str,
) -> Result<T, Error> {
    use isochor_core::fixed::traits::Fixed;
    if !value.is_finite() {
        return Err(Error::Invalid(format!("{option} is not a finite number")));
    }
    T::Repr::checked_from_num(value)
        .map(T::from_repr)
        .ok_or_else(|| Error::Invalid(format!("{option} is outside the accepted range")))
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

#[cfg(test)]
mod tests {
    use super::Error;

    /// The cases a user must tell apart keep the exit code of bad input (2)
    /// and say what failed.
    #[test]
    fn cases_say_what_failed_and_exit_as_bad_input() {
        let cases = [
            (
                Error::InputFile {
                    what: Some("--input"),
                    path: "points.csv".into(),
                    reason: "No such file or directory (os error 2)".into(),
                },
                "--input points.csv: No such file or directory (os error 2)",
            ),
            (
                Error::InputFile {
                    what: None,
                    path: "cal.bin".into(),
                    reason: "No such file or directory (os error 2)".into(),
                },
                "cal.bin: No such file or directory (os error 2)",
            ),
            (
                Error::Rejected {
                    what: "tank",
                    source: isochor_core::Tank {
                        water_capacity_m3: -1.0,
                        rated_pressure_pa: 200e5,
                        rated_temperature_k: 288.15,
                        elastic_expansion_per_mpa: 0.0,
                        thermal_expansion_per_k: 0.0,
                    }
                    .validate()
                    .unwrap_err(),
                },
                "tank: ",
            ),
            (
                Error::Malformed {
                    what: "calibration file".into(),
                    line: Some(3),
                    reason: "'x' is not a number".into(),
                },
                "calibration file line 3: 'x' is not a number",
            ),
            (
                Error::Malformed {
                    what: "mix.toml".into(),
                    line: None,
                    reason: "unknown component".into(),
                },
                "mix.toml: unknown component",
            ),
            (Error::NoSecret, "must be signed"),
            (Error::NoConfiguration, "store one with write-config first"),
            (
                Error::OutOfRange("pressure zero refused".into()),
                "device refused: pressure zero refused",
            ),
        ];
        for (e, text) in cases {
            assert!(e.to_string().contains(text), "{e}");
            assert_eq!(e.exit_code(), 2, "{e}");
        }
        assert_eq!(Error::Refused("wrong secret".into()).exit_code(), 1);
    }
}
