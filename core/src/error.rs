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

    // ---- link ----
    /// A frame's COBS encoding is broken (a code byte points past the end).
    FrameEncoding,
    /// A frame is shorter than a header and a CRC, or longer than the
    /// protocol's maximum frame.
    FrameLength,
    /// A frame's CRC-32C does not match its content.
    FrameCrc,
    /// A frame of another protocol version (the version it carries).
    ProtocolVersion(u8),
    /// A frame of a message kind this version does not know (its raw code).
    UnknownKind(u8),
    /// A frame's body does not decode as its kind's message (or has bytes left
    /// over).
    MessageBody,
    /// The output buffer is too small for the encoded frame or record.
    BufferTooSmall,

    // ---- storage ----
    /// The flash driver reported an error (or the power failed during a write).
    Flash,
    /// A record does not fit its flash area or the record size limit.
    RecordTooLarge,
    /// The storage layout does not fit the flash (areas overlap, are not
    /// aligned to erase sectors, or lie past its end).
    StoreLayout,
    /// A record's sequence number reached its maximum: the area is worn out.
    SequenceExhausted,

    // ---- authentication ----
    /// No signing session is open, or it has expired.
    NoSession,
    /// A signature does not match.
    BadSignature,
    /// A signed command's counter is not the next one (replay or reordering).
    Replay,
    /// Too many failed signatures: locked out for this many more ms.
    LockedOut(u64),
    /// A gas-model piece is not the next one (the offset expected).
    ChunkOrder(u32),
    /// A gas-model blob does not match its CRC-32C.
    BlobCrc,
    /// Stored or received bytes do not form a valid record; the text says
    /// what is wrong.
    Malformed(&'static str),
    /// Stored or received bytes fail their CRC-32C check.
    ChecksumMismatch,
    /// A device gas-model table or blob is malformed, corrupt or of an
    /// unsupported version; the text says what was wrong.
    ModelData(&'static str),
    /// A zero calibration was refused: the sensor's reading is too far from
    /// the zero reference (see [`crate::app::check_zero`]).
    ZeroNotPlausible(crate::link::ZeroRefusal),
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
            Error::FrameEncoding => f.write_str("frame: broken COBS encoding"),
            Error::FrameLength => f.write_str("frame: too short or too long"),
            Error::FrameCrc => f.write_str("frame: CRC-32C mismatch"),
            Error::ProtocolVersion(v) => write!(f, "frame: unsupported protocol version {v}"),
            Error::UnknownKind(k) => write!(f, "frame: unknown message kind {k:#04x}"),
            Error::MessageBody => f.write_str("frame: body does not decode as its message kind"),
            Error::BufferTooSmall => f.write_str("output buffer too small"),
            Error::Flash => f.write_str("flash write or erase failed"),
            Error::RecordTooLarge => f.write_str("record too large for its area"),
            Error::StoreLayout => f.write_str("storage layout does not fit the flash"),
            Error::SequenceExhausted => f.write_str("record sequence number exhausted"),
            Error::NoSession => f.write_str("no signing session open (or it expired)"),
            Error::BadSignature => f.write_str("signature does not match"),
            Error::Replay => f.write_str("command counter out of order (replay)"),
            Error::LockedOut(ms) => write!(f, "locked out after failed signatures for {ms} ms"),
            Error::ChunkOrder(o) => write!(f, "gas-model piece out of order, expected offset {o}"),
            Error::BlobCrc => f.write_str("gas-model blob CRC-32C mismatch"),
            Error::Malformed(what) => write!(f, "malformed data: {what}"),
            Error::ChecksumMismatch => f.write_str("checksum mismatch (corrupt data)"),
            Error::ModelData(what) => write!(f, "gas-model table refused: {what}"),
            Error::ZeroNotPlausible(z) => {
                // Pressure bits are Pa × 16, temperature bits K × 65536:
                // whole Pa and mK (integers only).
                let (unit, scale, shift, what) = match z.channel {
                    crate::link::SensorChannel::Pressure => {
                        ("Pa", 1, 4, "vent the pressure transducer to atmosphere")
                    }
                    crate::link::SensorChannel::Temperature => {
                        ("mK", 1000, 16, "put the temperature sensor in an ice bath")
                    }
                };
                let v = |a: u32| (u64::from(a) * scale) >> shift;
                write!(
                    f,
                    "zero refused: the sensor reads {} {unit} ({} {unit} uncorrected), the \
                     zero reference is {} {unit}, at most {} {unit} apart is accepted; {what} \
                     first",
                    v(z.reading),
                    v(z.uncorrected),
                    v(z.reference),
                    v(z.limit)
                )
            }
        }
    }
}

impl core::error::Error for Error {}
