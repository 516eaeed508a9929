//! Prepared configurations: everything a gauge evaluates per sample,
//! prepared on a host from the physical configuration, in one blob the
//! device validates once and then reads in place.
//!
//! A gauge's physical configuration ([`GaugeConfig`]: the setup, the two
//! sensors' calibrations, the tracking and alarm settings, the site's
//! barometric pressure, the gas model) is what a person writes down. The
//! device does not evaluate it as written: a host *prepares* it
//! ([`PreparedBuf::build`]) into
//!
//! * the two sensor channels as curves and status maps
//!   ([`crate::sensor::channel::fixed`]),
//! * the gas model's table, with the settled-pressure curve of this setup,
//! * the estimator's prepared constants ([`EstimatorParts`]),
//! * the tracker's configuration,
//! * and the physical configuration itself (the device keeps it for whoever
//!   reads the configuration back; it never decodes it).
//!
//! All the divisions, logarithms, square roots and iterations of preparing
//! happen on the host, in `f64` against the reference paths; the device
//! evaluates curves, one table and integer arithmetic. A device that runs a
//! prepared configuration needs no code to prepare one.
//!
//! # Format (version 2; little-endian)
//!
//! Version 2 added the field settings to the scalars (serial line, 4–20 mA
//! output); a version 1 blob is refused as of another version.
//!
//! | bytes | content |
//! |---|---|
//! | 4 | magic `IZPC` |
//! | 2 | format version ([`VERSION`]) |
//! | 2 | zero |
//! | 4 | total length of the blob, bytes |
//! | 4 | length n of the scalars, bytes |
//! | 4 | offset of the arrays from the blob's start (a multiple of 4) |
//! | n | the scalars: postcard encoding of [`Scalars`] |
//! | … | zero padding to the arrays' offset |
//! | … | the arrays, each at a multiple of 4 from the arrays' offset, referenced by [`ArraySpan`]s in the scalars: curve pieces ([`Piece`], seven 32-bit words), status steps ([`Step`], two words), knots (`u32`), table coefficients (`u16`), the source configuration (bytes) |
//! | 4 | CRC-32C of everything before it |
//!
//! A blob is refused (never panics) when it is short, of another magic or
//! version, fails its checksum, has scalars that do not decode or arrays
//! that do not fit, or holds stages or a table that do not validate. The
//! blob must start at an address that is a multiple of 4 (flash pages and
//! [`PreparedBuf`] do).

mod build;
mod model;

pub use build::{GaugeConfig, Plausibility, PreparedBuf, Report, STANDARD_ATMOSPHERE};
pub use model::PreparedModel;

use crate::error::{Defect, SensorSetting};
use serde::{Deserialize, Serialize};
use zerocopy::{FromBytes, Immutable, KnownLayout};

use crate::checksum::crc32c;
use crate::content::fixed::EstimatorParts;
use crate::curve::{Curve, Piece};
use crate::field::FieldScalars;
use crate::sensor::channel::fixed::{
    BridgeStage, LoopStage, PressureFront, PressureStage, StatusMap, Step, TemperatureStage,
};
use crate::sensor::plausibility::fixed::Checker;
use crate::time::Millis;
use crate::track::fixed::TrackConfigFx;
use crate::{Error, Gas};

/// The pressure zero bound as a share of the transducer's span: 1/50
/// (2 %). Common practice, no published source: a healthy industrial
/// pressure transducer's zero offset stays well inside 2 % of its span (the
/// total error bands of such transducers are about 0.1–1 % of span; from
/// memory), so a larger apparent offset means gas pressure on the port, not
/// a zero error. For a 300 bar transducer the bound is 6 bar.
pub const ZERO_PRESSURE_SPAN_DIVISOR: u32 = 50;
/// The smallest pressure zero bound, `fx::Pressure` bits: 10 kPa. The zero
/// reference is the configured barometric pressure, while the weather moves
/// the real one by about ±5 kPa around its mean (common practice, from
/// memory) and a site's altitude may differ from the configured value: a
/// vented absolute transducer must not be refused for that.
pub const ZERO_PRESSURE_MIN: u32 = 160_000;
/// The pressure zero bound of a transducer measuring `span` (`fx::Pressure`
/// bits, its range's width): [`ZERO_PRESSURE_SPAN_DIVISOR`] of it, at least
/// [`ZERO_PRESSURE_MIN`], at most what the store keeps
/// ([`ZERO_PRESSURE_MAX`](crate::store::ZERO_PRESSURE_MAX)). Prepared once per configuration.
pub const fn zero_pressure_limit(span: u32) -> u32 {
    let l = span / ZERO_PRESSURE_SPAN_DIVISOR;
    let l = if l < ZERO_PRESSURE_MIN {
        ZERO_PRESSURE_MIN
    } else {
        l
    };
    if l > crate::store::ZERO_PRESSURE_MAX as u32 {
        crate::store::ZERO_PRESSURE_MAX as u32
    } else {
        l
    }
}

const _: () = assert!(ZERO_PRESSURE_MIN <= crate::store::ZERO_PRESSURE_MAX as u32);

/// First bytes of a prepared configuration.
pub const MAGIC: [u8; 4] = *b"IZPC";
/// Version of the format this crate reads and writes.
pub const VERSION: u16 = 2;
/// Bytes of the fixed header.
pub const HEADER_LEN: usize = 20;
/// Largest prepared configuration, bytes.
pub const MAX_LEN: usize = 16 * 1024;
/// Largest encoding of the scalars, bytes.
pub const MAX_SCALARS_LEN: usize = 768;

/// Where an array lies: its offset in bytes from the arrays' start (a
/// multiple of 4) and its length in elements.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct ArraySpan {
    /// Offset from the arrays' start, bytes.
    pub offset: u32,
    /// Elements.
    pub len: u32,
}

/// A curve in the blob: its pieces and scale.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct CurveDesc {
    /// The pieces ([`Piece`]).
    pub pieces: ArraySpan,
    /// See [`Curve::end`].
    pub end: i32,
    /// See [`Curve::extra`].
    pub extra: i8,
}

/// The temperature channel's scalars (see [`TemperatureStage`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct TemperatureScalars {
    /// See [`TemperatureStage::full`].
    pub full: u32,
    /// See [`TemperatureStage::lo`].
    pub lo: u32,
    /// See [`TemperatureStage::hi`].
    pub hi: u32,
    /// The steps ([`Step`]).
    pub status: ArraySpan,
    /// The curve.
    pub curve: CurveDesc,
}

/// The pressure channel's scalars (see [`PressureStage`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum PressureScalars {
    /// A bridge (see [`BridgeStage`]).
    Bridge {
        /// Converter bits.
        bits: u8,
        /// Two's-complement codes.
        bipolar: bool,
        /// Saturating codes.
        rails: (i32, i32),
        /// Fraction bits of the signal.
        signal_frac: u8,
        /// Shift of a code into the signal.
        code_shift: u8,
        /// The zero curve.
        zero: CurveDesc,
        /// The 1/span curve.
        inv_span: CurveDesc,
        /// Fraction bits of 1/span.
        inv_frac: u8,
        /// Reference temperature, `fx::Temperature` bits.
        reference: u32,
        /// The steps over u.
        status: ArraySpan,
        /// The pressure curve.
        curve: CurveDesc,
    },
    /// A 4–20 mA loop (see [`LoopStage`]).
    Loop {
        /// Saturating code.
        top: u32,
        /// NE 43 band thresholds.
        bands: [u32; 4],
        /// The steps over codes.
        status: ArraySpan,
        /// The pressure curve.
        curve: CurveDesc,
        /// Failure persistence.
        persistence: Millis,
    },
}

/// The boundary of a liquefiable gas's table.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct BoundaryScalars {
    /// Critical temperature, `fx::Temperature` bits.
    pub critical_temperature: u32,
    /// Saturation-pressure curve coefficients (`u32`).
    pub saturation_pressure: ArraySpan,
    /// Limit-pressure curve coefficients (`u32`).
    pub limit_pressure: ArraySpan,
}

/// The gas model's scalars (see [`crate::model::device::Table`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ModelScalars {
    /// The gas.
    pub gas: Gas,
    /// Offset of Z, Q30.
    pub z_offset: u32,
    /// Coefficient step exponent.
    pub z_step_exp: u8,
    /// Smallest Z returned, Q30.
    pub z_floor: u32,
    /// Temperature knots (`u32`).
    pub temperature_knots: ArraySpan,
    /// Pressure knots (`u32`).
    pub pressure_knots: ArraySpan,
    /// Coefficients (`u16`).
    pub coefs: ArraySpan,
    /// The boundary, for gases liquid somewhere in range.
    pub boundary: Option<BoundaryScalars>,
    /// The settled pressure as a function of τ/2 (τ = ρv·R·T_ref/M,
    /// `fx::Pressure` bits): a curve, where the setup has one.
    pub settle: Option<CurveDesc>,
}

/// Everything of a prepared configuration but its arrays.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Scalars {
    /// The temperature channel.
    pub temperature: TemperatureScalars,
    /// The pressure channel.
    pub pressure: PressureScalars,
    /// The plausibility checks of pressure (`fx::Pressure` bits) and
    /// temperature (`fx::Temperature` bits) readings, if any.
    pub plausibility: Option<(Checker, Checker)>,
    /// The site's barometric pressure, `fx::Pressure` bits.
    pub barometric: u32,
    /// The largest zero correction of the pressure channel, `fx::Pressure`
    /// bits (from the transducer's span: [`zero_pressure_limit`]).
    pub zero_pressure_limit: u32,
    /// The gas model.
    pub model: ModelScalars,
    /// The estimator's constants.
    pub estimator: EstimatorParts,
    /// The tracker's configuration.
    pub track: TrackConfigFx,
    /// The physical configuration (postcard encoding of [`GaugeConfig`]),
    /// bytes.
    pub source: ArraySpan,
    /// The serial line and the 4–20 mA output (format version 2).
    pub field: FieldScalars,
}

/// The bytes a prepared configuration is read from: a device's flash read
/// in place ([`Lasting`]), a buffer on a host (`&[u8]`, shared blobs).
///
/// Each view of an array in the bytes (a curve's pieces, a status map, the
/// gas table's knots) is a checked cast whose length check divides by the
/// element's size: a library division on a core without a divider, ten of
/// them per sample when the views are derived on every sample. Bytes that
/// last as long as the program ([`PreparedBytes::lasting`]) let the
/// pipeline and its model derive their views once per configuration and
/// keep them.
pub trait PreparedBytes: AsRef<[u8]> {
    /// The same bytes for as long as the program runs, where they are so
    /// (`None`: the views are derived on every use).
    fn lasting(&self) -> Option<&'static [u8]> {
        None
    }
}

impl PreparedBytes for &[u8] {}

/// Bytes that last as long as the program: a prepared configuration in a
/// device's flash, read in place (the views of its stages and of its gas
/// table are derived once per configuration; see [`PreparedBytes`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Lasting(pub &'static [u8]);

impl AsRef<[u8]> for Lasting {
    fn as_ref(&self) -> &[u8] {
        self.0
    }
}

impl PreparedBytes for Lasting {
    fn lasting(&self) -> Option<&'static [u8]> {
        Some(self.0)
    }
}

/// A prepared configuration over its bytes `B` (see the [module](self)
/// documentation): validated once, then read in place.
#[derive(Clone, Debug)]
pub struct Prepared<B> {
    bytes: B,
    arrays: usize,
    scalars: Scalars,
}

fn u16_at(b: &[u8], i: usize) -> Option<u16> {
    Some(u16::from_le_bytes([*b.get(i)?, *b.get(i + 1)?]))
}

fn u32_at(b: &[u8], i: usize) -> Option<u32> {
    Some(u32::from_le_bytes([
        *b.get(i)?,
        *b.get(i + 1)?,
        *b.get(i + 2)?,
        *b.get(i + 3)?,
    ]))
}

impl<B: AsRef<[u8]>> Prepared<B> {
    /// Validates `bytes` as a prepared configuration (see the
    /// [module](self) documentation for what is checked).
    pub fn new(bytes: B) -> Result<Prepared<B>, Error> {
        let b = bytes.as_ref();
        let bad = Error::Malformed;
        if b.len() < HEADER_LEN + 4 || b.len() > MAX_LEN || b.get(..4) != Some(&MAGIC[..]) {
            return Err(bad(Defect::PreparedHeader));
        }
        if u16_at(b, 4) != Some(VERSION) {
            return Err(Error::ProtocolVersion(b.get(4).copied().unwrap_or(0)));
        }
        if !(b.as_ptr() as usize).is_multiple_of(4) {
            return Err(bad(Defect::PreparedAlignment));
        }
        let total = u32_at(b, 8).ok_or(bad(Defect::PreparedHeader))? as usize;
        if total != b.len() {
            return Err(bad(Defect::PreparedLength));
        }
        let body = b.get(..total - 4).ok_or(bad(Defect::PreparedLength))?;
        if u32_at(b, total - 4) != Some(crc32c(body)) {
            return Err(Error::ChecksumMismatch);
        }
        let n = u32_at(b, 12).ok_or(bad(Defect::PreparedHeader))? as usize;
        let arrays = u32_at(b, 16).ok_or(bad(Defect::PreparedHeader))? as usize;
        if n > MAX_SCALARS_LEN
            || HEADER_LEN + n > arrays
            || !arrays.is_multiple_of(4)
            || arrays > total - 4
        {
            return Err(bad(Defect::PreparedLayout));
        }
        let enc = b
            .get(HEADER_LEN..HEADER_LEN + n)
            .ok_or(bad(Defect::PreparedLayout))?;
        // The decoded scalars are looked at in place and copied once, into
        // the value: mapping or destructuring the `Result` would put more
        // copies of them (776 bytes) on this frame.
        let decoded = postcard::take_from_bytes::<Scalars>(enc);
        let Ok((scalars, rest)) = &decoded else {
            return Err(bad(Defect::PreparedScalars));
        };
        if !rest.is_empty() {
            return Err(bad(Defect::PreparedScalars));
        }
        let p = Prepared {
            bytes,
            arrays,
            scalars: *scalars,
        };
        p.validate()?;
        Ok(p)
    }

    /// The scalars.
    pub fn scalars(&self) -> &Scalars {
        &self.scalars
    }

    /// The bytes.
    pub fn bytes(&self) -> &B {
        &self.bytes
    }

    /// The array at `span` as elements of `T` (empty when it does not fit:
    /// never after validation).
    pub fn array<T: FromBytes + Immutable + KnownLayout>(&self, span: ArraySpan) -> &[T] {
        array(self.bytes.as_ref(), self.arrays, span).unwrap_or(&[])
    }

    /// The curve of `desc`.
    pub fn curve(&self, desc: &CurveDesc) -> Curve<'_> {
        curve_of(self.bytes.as_ref(), self.arrays, desc)
    }

    /// The temperature stage.
    pub fn temperature(&self) -> TemperatureStage<'_> {
        self.temperature_of(self.bytes.as_ref())
    }

    /// The pressure stage.
    pub fn pressure(&self) -> PressureStage<'_> {
        self.pressure_of(self.bytes.as_ref())
    }

    /// Both stages over bytes that last ([`PreparedBytes::lasting`]):
    /// derived once per configuration, kept by the pipeline.
    pub fn lasting_stages(&self) -> Option<(TemperatureStage<'static>, PressureStage<'static>)>
    where
        B: PreparedBytes,
    {
        let b = self.bytes.lasting()?;
        Some((self.temperature_of(b), self.pressure_of(b)))
    }

    /// The temperature stage over `b` (this configuration's bytes).
    fn temperature_of<'a>(&self, b: &'a [u8]) -> TemperatureStage<'a> {
        let t = &self.scalars.temperature;
        TemperatureStage {
            full: t.full,
            lo: t.lo,
            hi: t.hi,
            status: StatusMap(array(b, self.arrays, t.status).unwrap_or(&[])),
            curve: curve_of(b, self.arrays, &t.curve),
        }
    }

    /// The pressure stage over `b` (this configuration's bytes).
    fn pressure_of<'a>(&self, b: &'a [u8]) -> PressureStage<'a> {
        let at = self.arrays;
        let front = match &self.scalars.pressure {
            PressureScalars::Bridge {
                bits,
                bipolar,
                rails,
                signal_frac,
                code_shift,
                zero,
                inv_span,
                inv_frac,
                reference,
                status,
                curve,
            } => PressureFront::Bridge(BridgeStage {
                bits: *bits,
                bipolar: *bipolar,
                rails: *rails,
                signal_frac: *signal_frac,
                code_shift: *code_shift,
                zero: curve_of(b, at, zero),
                inv_span: curve_of(b, at, inv_span),
                inv_frac: *inv_frac,
                reference: *reference,
                status: StatusMap(array(b, at, *status).unwrap_or(&[])),
                curve: curve_of(b, at, curve),
            }),
            PressureScalars::Loop {
                top,
                bands,
                status,
                curve,
                persistence,
            } => PressureFront::Loop(LoopStage {
                top: *top,
                bands: *bands,
                status: StatusMap(array(b, at, *status).unwrap_or(&[])),
                curve: curve_of(b, at, curve),
                persistence: *persistence,
            }),
        };
        PressureStage {
            front,
            barometric: self.scalars.barometric,
        }
    }

    /// The physical configuration's bytes (postcard encoding of
    /// [`GaugeConfig`]).
    pub fn source(&self) -> &[u8] {
        self.array::<u8>(self.scalars.source)
    }

    /// The physical configuration it was prepared from (hosts: a device
    /// keeps the bytes and never decodes them).
    pub fn source_config(&self) -> Result<GaugeConfig, Error> {
        let (c, rest) = postcard::take_from_bytes::<GaugeConfig>(self.source())
            .map_err(|_| Error::Malformed(Defect::SourceConfiguration))?;
        if !rest.is_empty() {
            return Err(Error::Malformed(Defect::SourceConfiguration));
        }
        Ok(c)
    }

    /// Every check of [`Prepared::new`] past the header.
    fn validate(&self) -> Result<(), Error> {
        let b = self.bytes.as_ref();
        let s = &self.scalars;
        let fits = |span: ArraySpan, size: usize| -> Result<(), Error> {
            let start = self.arrays + span.offset as usize;
            let end = start + span.len as usize * size;
            if !span.offset.is_multiple_of(4) || end > b.len() - 4 || span.len as usize > MAX_LEN {
                Err(Error::Malformed(Defect::PreparedArray))
            } else {
                Ok(())
            }
        };
        let curve = |d: &CurveDesc| fits(d.pieces, core::mem::size_of::<Piece>());
        let step = core::mem::size_of::<Step>();
        fits(s.temperature.status, step)?;
        curve(&s.temperature.curve)?;
        match &s.pressure {
            PressureScalars::Bridge {
                zero,
                inv_span,
                status,
                curve: c,
                ..
            } => {
                curve(zero)?;
                curve(inv_span)?;
                fits(*status, step)?;
                curve(c)?;
            }
            PressureScalars::Loop {
                status, curve: c, ..
            } => {
                fits(*status, step)?;
                curve(c)?;
            }
        }
        let m = &s.model;
        fits(m.temperature_knots, 4)?;
        fits(m.pressure_knots, 4)?;
        fits(m.coefs, 2)?;
        if let Some(bd) = &m.boundary {
            fits(bd.saturation_pressure, 4)?;
            fits(bd.limit_pressure, 4)?;
        }
        if let Some(c) = &m.settle {
            curve(c)?;
            self.curve(c).validate()?;
        }
        fits(s.source, 1)?;
        if !build::BARO_BITS.contains(&s.barometric) {
            return Err(Error::OutOfRange(SensorSetting::BarometricPressure.into()));
        }
        if !(ZERO_PRESSURE_MIN..=crate::store::ZERO_PRESSURE_MAX as u32)
            .contains(&s.zero_pressure_limit)
        {
            return Err(Error::OutOfRange(SensorSetting::ZeroBound.into()));
        }
        self.temperature().validate()?;
        self.pressure().validate()?;
        model::table(self).validate()?;
        crate::model::device::fixed::Axes::prepare(&model::table(self))?;
        s.track.validate()?;
        s.field.validate()?;
        Ok(())
    }
}

/// The curve of `desc` in the arrays starting at `arrays` in `b`.
pub(super) fn curve_of<'a>(b: &'a [u8], arrays: usize, desc: &CurveDesc) -> Curve<'a> {
    Curve {
        pieces: array(b, arrays, desc.pieces).unwrap_or(&[]),
        end: desc.end,
        extra: desc.extra,
    }
}

/// The array at `span` of the arrays starting at `arrays` in `b`.
fn array<T: FromBytes + Immutable + KnownLayout>(
    b: &[u8],
    arrays: usize,
    span: ArraySpan,
) -> Option<&[T]> {
    let start = arrays.checked_add(span.offset as usize)?;
    let end = start.checked_add((span.len as usize).checked_mul(core::mem::size_of::<T>())?)?;
    <[T]>::ref_from_bytes(b.get(start..end)?).ok()
}
