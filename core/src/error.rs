//! The crate's one error type, and the typed payloads that say what failed.
//!
//! [`Error`] is flat; where a variant needs to say *what* failed it carries a
//! fieldless `Copy` enum instead of text: [`Quantity`] (grouped by layer:
//! [`Measured`], [`SensorSetting`], [`TankSetting`], [`TrackSetting`],
//! [`AlarmSetting`], [`UncertaintyInput`], [`FieldSetting`], [`CurveSetting`],
//! [`DeviceSetting`]) for values that are not finite or out of range,
//! [`Condition`] for a gas model without a usable answer, [`Defect`] for
//! malformed bytes and [`ModelDefect`] for a refused gas-model table. Code and
//! tests match on the variants; each variant's `text()` is its `Display` and
//! the name a host shows for a device's refusal. A device sends the payloads
//! themselves in its refusals (postcard: each case as its index, so new cases
//! are appended, never inserted), not their texts, so the texts stay out of
//! its flash. This module is the lowest layer: it imports nothing from the
//! crate.

use core::fmt;

use postcard::experimental::max_size::MaxSize;
use serde::{Deserialize, Serialize};

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
    /// A float input was NaN or infinite; the quantity says which.
    NotFinite(Quantity),
    /// A configuration value lies outside what the crate accepts; the
    /// quantity says which (see the validation rules on its type).
    OutOfRange(Quantity),
    /// A gas name that is not in the gas list.
    UnknownGas,
    /// The gas model's answer at the rated or standard condition was unusable
    /// (for example two-phase), so the setup cannot be prepared.
    ModelUnusable(Condition),

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
    /// Stored or received bytes do not form a valid record; the defect says
    /// what is wrong.
    Malformed(Defect),
    /// Stored or received bytes fail their CRC-32C check.
    ChecksumMismatch,
    /// A device gas-model table or blob is malformed, corrupt or of an
    /// unsupported version; the defect says what was wrong.
    ModelData(ModelDefect),
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
        }
    }
}

impl core::error::Error for Error {}

/// The quantity or setting an [`Error::NotFinite`] or [`Error::OutOfRange`]
/// names, by the layer it belongs to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize, MaxSize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Quantity {
    /// A value passed in at run time, or one a conversion gives.
    Measured(Measured),
    /// A sensor front-end, calibration or channel setting.
    Sensor(SensorSetting),
    /// A tank, gas or reference-condition setting.
    Tank(TankSetting),
    /// A tracker setting.
    Track(TrackSetting),
    /// An alarm threshold.
    Alarm(AlarmSetting),
    /// A part of the uncertainty declaration.
    Uncertainty(UncertaintyInput),
    /// A field-bus or loop-output setting.
    Field(FieldSetting),
    /// A prepared curve.
    Curve(CurveSetting),
    /// A device-level setting.
    Device(DeviceSetting),
}

impl Quantity {
    /// The text that names the quantity.
    pub const fn text(self) -> &'static str {
        match self {
            Quantity::Measured(x) => x.text(),
            Quantity::Sensor(x) => x.text(),
            Quantity::Tank(x) => x.text(),
            Quantity::Track(x) => x.text(),
            Quantity::Alarm(x) => x.text(),
            Quantity::Uncertainty(x) => x.text(),
            Quantity::Field(x) => x.text(),
            Quantity::Curve(x) => x.text(),
            Quantity::Device(x) => x.text(),
        }
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.text())
    }
}

impl From<Measured> for Quantity {
    fn from(x: Measured) -> Quantity {
        Quantity::Measured(x)
    }
}

impl From<SensorSetting> for Quantity {
    fn from(x: SensorSetting) -> Quantity {
        Quantity::Sensor(x)
    }
}

impl From<TankSetting> for Quantity {
    fn from(x: TankSetting) -> Quantity {
        Quantity::Tank(x)
    }
}

impl From<TrackSetting> for Quantity {
    fn from(x: TrackSetting) -> Quantity {
        Quantity::Track(x)
    }
}

impl From<AlarmSetting> for Quantity {
    fn from(x: AlarmSetting) -> Quantity {
        Quantity::Alarm(x)
    }
}

impl From<UncertaintyInput> for Quantity {
    fn from(x: UncertaintyInput) -> Quantity {
        Quantity::Uncertainty(x)
    }
}

impl From<FieldSetting> for Quantity {
    fn from(x: FieldSetting) -> Quantity {
        Quantity::Field(x)
    }
}

impl From<CurveSetting> for Quantity {
    fn from(x: CurveSetting) -> Quantity {
        Quantity::Curve(x)
    }
}

impl From<DeviceSetting> for Quantity {
    fn from(x: DeviceSetting) -> Quantity {
        Quantity::Device(x)
    }
}

/// Defines a fieldless payload enum whose variants each carry the text that
/// names them (their `Display`, and what a host shows for a refusal).
macro_rules! named {
    ($(#[$m:meta])* $name:ident { $($v:ident => $text:literal,)* }) => {
        $(#[$m])*
        #[derive(
            Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize, MaxSize,
        )]
        #[cfg_attr(feature = "defmt", derive(defmt::Format))]
        #[non_exhaustive]
        pub enum $name {
            $(#[doc = concat!("“", $text, "”.")] $v,)*
        }

        impl $name {
            /// The text that names this case.
            pub const fn text(self) -> &'static str {
                match self {
                    $($name::$v => $text,)*
                }
            }
        }

        impl fmt::Display for $name {
            fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str(self.text())
            }
        }
    };
}

named! {
    /// A value passed in at run time (to the float path or a conversion), or one a conversion gives.
    Measured {
        Pressure => "pressure",
        Temperature => "temperature",
        BarometricPressure => "barometric pressure",
        MeasuredBarometricPressure => "measured barometric pressure",
        GaugePressure => "gauge pressure",
        AbsolutePressure => "absolute pressure",
        LoopCurrent => "loop current",
        NegativeLoopCurrent => "loop current (negative)",
        RtdTemperature => "temperature (IEC 60751: -200...850 C)",
        BridgePressure => "pressure (beyond 150 % of the range)",
        SensorReading => "reading",
        ValueToCorrect => "value to correct",
        TransducerTemperature => "transducer temperature",
        Resistance => "resistance",
    }
}

named! {
    /// A setting of a sensor front-end, its calibration or its channel.
    SensorSetting {
        TemperatureSensorKind => "temperature sensor kind",
        PressureSensorKind => "pressure sensor kind",
        StatusChanges => "status changes (too many)",
        R0 => "R0",
        T0 => "T0",
        Beta => "beta",
        SteinhartHartA => "Steinhart-Hart A",
        SteinhartHartB => "Steinhart-Hart B",
        SteinhartHartC => "Steinhart-Hart C",
        NtcModel => "NTC model",
        RangeMinimum => "range minimum",
        RangeMaximum => "range maximum",
        RangeLowEnd => "range low end",
        RangeHighEnd => "range high end",
        RangeMargin => "range margin",
        ConverterBits => "converter bits",
        ConverterReference => "converter reference",
        ConverterRange => "converter range (must reach beyond 21 mA, at most 200 mA)",
        ShuntResistance => "shunt resistance",
        PlausibleMinimum => "plausible minimum",
        PlausibleMaximum => "plausible maximum",
        PlausibleRate => "plausible rate",
        RateAllowance => "rate allowance",
        StuckBand => "stuck band",
        FractionBits => "fraction bits",
        CalibratedInterval => "calibrated interval",
        CalibratedIntervalLowEnd => "calibrated interval low end",
        CalibratedIntervalHighEnd => "calibrated interval high end",
        CorrectionCoefficient => "correction coefficient",
        TwoPointSpacing => "two-point: measured points too close",
        CalibrationChannel => "calibration channel",
        ChannelSensorKind => "sensor kind of the channel",
        Zero => "zero",
        Span => "span",
        ZeroTempco => "zero temperature coefficient",
        ZeroTempco2 => "zero second-order temperature coefficient",
        SpanTempco => "span temperature coefficient",
        SpanTempco2 => "span second-order temperature coefficient",
        ReferenceTemperature => "reference temperature",
        LinearityCoefficient => "linearity coefficient",
        BridgeZero => "bridge zero (too large for the signal format)",
        BridgeReferenceTemperature => "bridge reference temperature",
        ReferenceResistance => "reference resistance",
        ShortCircuitThreshold => "short-circuit threshold",
        OpenCircuitThreshold => "open-circuit threshold",
        LeadResistance => "lead resistance",
        Excitation => "excitation",
        SelfHeating => "self-heating",
        BarometricPressure => "barometric pressure",
        ZeroBound => "zero bound of the pressure channel",
        PressureZeroOffset => "pressure zero offset",
        TemperatureZeroOffset => "temperature zero offset",
    }
}

named! {
    /// A setting of the tank, its gas or the content's reference conditions.
    TankSetting {
        WaterCapacity => "water capacity",
        RatedPressure => "rated pressure",
        RatedTemperature => "rated temperature",
        ElasticExpansion => "elastic expansion",
        ThermalExpansion => "thermal expansion",
        StandardTemperature => "standard temperature",
        StandardPressure => "standard pressure",
        SettledReferenceTemperature => "settled reference temperature",
        Composition => "composition",
        MixtureComposition => "composition of the setup's mixture",
        GasComposition => "composition of the setup's gas",
    }
}

named! {
    /// A setting of the tracker (timing, fractions, declared draw).
    TrackSetting {
        Block => "block",
        TrackingBlock => "tracking block",
        MaximumGap => "maximum gap",
        SmoothingTimeConstant => "smoothing time constant",
        SettleTimeConstant => "settle time constant",
        ReserveFraction => "reserve fraction",
        SettleStep => "settle step",
        SettleTolerance => "settle tolerance",
        LeakThreshold => "leak threshold",
        DeclaredDraw => "declared draw",
    }
}

named! {
    /// An alarm threshold or hysteresis.
    AlarmSetting {
        LowFraction => "low fraction",
        FractionHysteresis => "fraction hysteresis",
        OverFillFraction => "over-fill fraction",
        MaximumPressure => "maximum pressure",
        PressureHysteresis => "pressure hysteresis",
        MaximumTemperature => "maximum temperature",
        MinimumTemperature => "minimum temperature",
        TemperatureHysteresis => "temperature hysteresis",
    }
}

named! {
    /// A part of the uncertainty declaration.
    UncertaintyInput {
        PressureFullScale => "pressure full scale",
        PressureOfFullScale => "pressure uncertainty of full scale",
        PressureOfReading => "pressure uncertainty of reading",
        Temperature => "temperature uncertainty",
        Capacity => "capacity uncertainty",
        Model => "model uncertainty",
        TemperatureLag => "temperature lag uncertainty",
        TemperatureGain => "temperature gain uncertainty",
    }
}

named! {
    /// A field-bus or 4–20 mA output setting.
    FieldSetting {
        ModbusAddress => "Modbus address (1 … 247)",
        BaudRate => "baud rate",
        LoopOutput => "loop output",
        LoopOutputRange => "loop output range",
        LoopOutputRangeEnd => "loop output range end",
        LoopOutputRangeOrder => "loop output range (lower < upper)",
    }
}

named! {
    /// A piecewise curve being fitted for the prepared configuration.
    CurveSetting {
        Domain => "curve domain",
        Pieces => "curve pieces",
        Values => "curve values (beyond the output format)",
        Function => "curve function",
    }
}

named! {
    /// A device-level setting: configuration slot, device secret.
    DeviceSetting {
        Configuration => "configuration",
        ConfigurationSlot => "configuration slot",
        SecretLength => "secret length (64 hex digits)",
        SecretDigits => "secret (hex digits only)",
    }
}

named! {
    /// What is wrong with stored or received bytes (a record, a prepared configuration, a sensor curve).
    Defect {
        RecordTooShort => "record too short",
        RecordLength => "record length",
        RecordKind => "record kind",
        RecordVersion => "record version",
        RecordBody => "record body",
        NoPostcardEncoding => "value without a postcard encoding",
        SourceConfiguration => "source configuration",
        PreparedHeader => "prepared configuration header",
        PreparedAlignment => "prepared configuration alignment",
        PreparedLength => "prepared configuration length",
        PreparedLayout => "prepared configuration layout",
        PreparedScalars => "prepared configuration scalars",
        PreparedArray => "prepared configuration array",
        EstimatorConstants => "estimator constants",
        StatusMap => "status map",
        TemperatureChannelCodes => "temperature channel codes",
        TemperatureCurveDomain => "temperature curve domain",
        BridgeStage => "bridge stage",
        LoopStage => "loop stage",
        CurveWithoutPieces => "curve without pieces",
        CurvePiecesOrder => "curve pieces out of order",
        CurveScale => "curve scale",
    }
}

named! {
    /// What is wrong with a device gas-model table or its blob.
    ModelDefect {
        TableTooLarge => "table too large",
        BlobBufferTooSmall => "blob buffer too small",
        BlobTooShort => "blob too short",
        NotATableBlob => "not a table blob",
        BlobVersion => "unsupported blob version",
        Checksum => "checksum",
        UndecodableBlob => "undecodable blob",
        TrailingBytes => "trailing bytes in blob",
        TemperatureKnots => "temperature knots",
        PressureKnots => "pressure knots",
        Knots => "knots",
        TemperatureRange => "temperature range",
        CoefficientCount => "coefficient count",
        CoefficientStep => "coefficient step",
        CoefficientRange => "coefficient range",
        ZFloor => "Z floor",
        BoundaryCurves => "boundary curves",
    }
}

named! {
    /// Where the gas model gave no usable answer.
    Condition {
        RatedCondition => "rated condition",
        StandardCondition => "standard condition",
        ReferenceCondition => "reference condition",
        GasOfSetup => "gas of the setup",
        LowestCompressibility => "lowest compressibility factor",
        BuiltinTable => "built-in table",
    }
}

#[cfg(test)]
mod tests {
    extern crate std;
    use super::*;
    use std::string::ToString;

    #[test]
    fn messages_name_what_failed() {
        let e = Error::OutOfRange(TankSetting::WaterCapacity.into());
        assert_eq!(
            e.to_string(),
            "water capacity is outside the accepted range"
        );
        let e = Error::NotFinite(Measured::Pressure.into());
        assert_eq!(e.to_string(), "pressure is not a finite number");
        let e = Error::ModelUnusable(Condition::RatedCondition);
        assert_eq!(
            e.to_string(),
            "the gas model gives no usable answer at the rated condition"
        );
        let e = Error::Malformed(Defect::RecordKind);
        assert_eq!(e.to_string(), "malformed data: record kind");
        let e = Error::ModelData(ModelDefect::Knots);
        assert_eq!(e.to_string(), "gas-model table refused: knots");
        assert_eq!(
            Quantity::from(FieldSetting::ModbusAddress).text(),
            "Modbus address (1 … 247)"
        );
    }

    #[test]
    fn payloads_are_small() {
        // Fieldless payloads: a byte each, two for a quantity (its group and
        // the case); the error stays the size its widest variant (`u64`)
        // sets.
        assert_eq!(core::mem::size_of::<TankSetting>(), 1);
        assert_eq!(core::mem::size_of::<Quantity>(), 2);
        assert!(core::mem::size_of::<Error>() <= 16);
    }
}
