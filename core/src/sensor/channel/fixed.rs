//! Sensor channels, prepared form (the device path). Steps in [`super`].
//!
//! A *stage* ([`TemperatureStage`], [`PressureStage`]) is the result of
//! preparing a channel on a host from its `f64` form: curves and status
//! maps. Stages are views (of a prepared configuration's bytes on a
//! device, see [`crate::prepared`]); hosts build them as `…Buf` values
//! ([`TemperatureStageBuf::prepare`], [`PressureStageBuf::prepare`]) and
//! every stage is checked before use ([`TemperatureStage::validate`],
//! [`PressureStage::validate`]). A *channel* ([`TemperatureChannel`],
//! [`PressureChannel`]) is what runs with a stage: the zero offset taken on
//! site and, for a 4–20 mA loop, the NE 43 persistence state.
//!
//! Formats: temperatures in `fx::Temperature` bits (2^-16 K), pressures in
//! `fx::Pressure` bits (2^-4 Pa), a bridge's normalised signal u in Q30.
//! Curves are fitted to the `f64` channel within a tolerance
//! ([`TEMPERATURE_TOLERANCE`], [`PRESSURE_TOLERANCE`]); the flags are
//! located exactly on it (every status change of the `f64` channel is a
//! step of the map, found by bisection between grid points, and a knot of
//! the curve, so no piece spans a kink).

use crate::error::{Defect, SensorSetting};
use heapless::Vec;
use zerocopy::{FromBytes, Immutable, IntoBytes, KnownLayout};

use super::float;
use super::signed_code;
use crate::curve::{Curve, CurveBuf, MAX_PIECES};
use crate::fx::{self, mul_s32};
use crate::sensor::current_loop::{Band, LoopState};
use crate::sensor::{PressureReading, TemperatureReading, VALUE_INVALID};
use crate::time::{Instant, Millis};
use crate::{Error, Status};

/// Largest error of a temperature curve against the `f64` channel aimed
/// for, `fx::Temperature` bits (0.15 × 15.3 µK = 2.3 µK; the reading's
/// rounding to whole bits adds 7.6 µK).
pub const TEMPERATURE_TOLERANCE: f64 = 0.15;
/// Largest error of a pressure curve against the `f64` channel aimed for,
/// `fx::Pressure` bits (2 × 0.0625 Pa).
pub const PRESSURE_TOLERANCE: f64 = 2.0;
/// Largest error of a bridge's compensation curves aimed for, in their own
/// bits (the zero at 2^-signal_frac, 1/span at 2^-inv_frac).
pub const COMPENSATION_TOLERANCE: f64 = 0.05;
/// Temperatures a temperature curve holds at most, K (see
/// [`TemperatureStage::prepare`]).
const TEMPERATURE_FIT_MAX_K: f64 = 10_000.0;
/// Most steps of a status map.
pub const MAX_STEPS: usize = 12;
/// Grid points per status map search (changes closer together than the
/// grid's spacing could be missed; prepared channels are checked against
/// the `f64` ones code by code in the tests).
const STATUS_GRID: i64 = 4096;
/// The limit of a bridge's normalised signal, Q30 (±1.5).
const U_LIMIT_Q30: i32 = 1_610_612_736;
/// Margin of a bridge compensation's temperature domain beyond what the
/// temperature channel can read, K.
const COMPENSATION_MARGIN_K: f64 = 50.0;

/// One step of a [`StatusMap`]: inputs from `from` on have `status`. Its
/// layout is part of the prepared-configuration format (two little-endian
/// 32-bit words).
#[derive(
    Clone, Copy, Debug, PartialEq, Eq, Default, FromBytes, IntoBytes, Immutable, KnownLayout,
)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(C)]
pub struct Step {
    /// First input of the step.
    pub from: i32,
    /// Status bits of the step.
    pub status: u32,
}

/// Flags as a step function of an integer input (a code, or a bridge's
/// normalised signal): a view of its steps, by increasing start; inputs
/// below the first start have the first step's status.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StatusMap<'a>(pub &'a [Step]);

impl StatusMap<'_> {
    /// The flags at `x`.
    pub fn at(&self, x: i32) -> Status {
        let k = self.0.partition_point(|s| s.from <= x).saturating_sub(1);
        self.0
            .get(k)
            .map_or(Status::OK, |s| Status::from_bits(s.status))
    }

    /// At least one step, starts increasing.
    pub fn validate(&self) -> Result<(), Error> {
        if self.0.is_empty()
            || !self
                .0
                .windows(2)
                .all(|w| matches!(w, [a, b] if a.from < b.from))
        {
            return Err(Error::Malformed(Defect::StatusMap));
        }
        Ok(())
    }
}

/// A status map with its steps, as [`StatusMapBuf::locate`] builds it
/// (hosts).
#[derive(Clone, Debug, PartialEq, Eq, Default)]
pub struct StatusMapBuf {
    /// The steps.
    pub steps: Vec<Step, MAX_STEPS>,
}

impl StatusMapBuf {
    /// The map.
    pub fn map(&self) -> StatusMap<'_> {
        StatusMap(&self.steps)
    }

    /// The step starts inside `(lo, hi]` (knots for a curve).
    fn changes(&self, lo: i32, hi: i32) -> impl Iterator<Item = i32> + '_ {
        self.steps
            .iter()
            .map(|s| s.from)
            .filter(move |&x| x > lo && x <= hi)
    }

    /// Locates every change of `f` over `lo..=hi`: `f` on a grid, then
    /// bisection between neighbours that differ.
    pub fn locate(f: &dyn Fn(i32) -> Status, lo: i32, hi: i32) -> Result<StatusMapBuf, Error> {
        let mut map = StatusMapBuf::default();
        let mut push = |from: i32, st: Status| -> Result<(), Error> {
            if map.steps.last().is_some_and(|l| l.status == st.bits()) {
                return Ok(());
            }
            map.steps
                .push(Step {
                    from,
                    status: st.bits(),
                })
                .map_err(|_| Error::OutOfRange(SensorSetting::StatusChanges.into()))
        };
        let (lo64, hi64) = (lo as i64, hi as i64);
        let n = (hi64 - lo64).clamp(1, STATUS_GRID);
        let mut prev_x = lo;
        let mut prev = f(lo);
        push(lo, prev)?;
        for i in 1..=n {
            let x = (lo64 + (hi64 - lo64) * i / n) as i32;
            let st = f(x);
            // Every change in (prev_x, x], one after the other (a status
            // is assumed not to come back within one grid step).
            let mut cur = prev_x;
            let mut cur_st = prev;
            while cur_st != st {
                let (mut a, mut b) = (cur, x);
                while b - a > 1 {
                    let m = a + (b - a) / 2;
                    if f(m) == cur_st {
                        a = m;
                    } else {
                        b = m;
                    }
                }
                let sb = f(b);
                push(b, sb)?;
                if b == x || sb == cur_st {
                    break;
                }
                cur = b;
                cur_st = sb;
            }
            prev_x = x;
            prev = st;
        }
        Ok(map)
    }
}

/// Fits a curve whose knots include every status change of `map` inside
/// the domain (hosts).
fn fit_with_steps(
    f: &dyn Fn(f64) -> f64,
    lo: i32,
    hi: i32,
    map: &StatusMapBuf,
    extra: &[i32],
    tolerance: f64,
) -> Result<(CurveBuf, f64), Error> {
    let mut knots: Vec<i32, { MAX_PIECES + 1 }> = Vec::new();
    let _ = knots.push(lo);
    let mut inner: Vec<i32, { MAX_STEPS + 4 }> = Vec::new();
    for x in map.changes(lo, hi - 1).chain(extra.iter().copied()) {
        if x > lo && x < hi && !inner.contains(&x) {
            let _ = inner.push(x);
        }
    }
    inner.sort_unstable();
    for x in inner {
        let _ = knots.push(x);
    }
    let _ = knots.push(hi);
    // Where the channel flags its readings the error counts a thousandth;
    // where one input step moves the output by more than STEP_RATIO times
    // the tolerance, the error counts in proportion (the agreement aimed
    // for is then a fixed fraction of one converter step).
    let weight = |a: i32, b: i32| {
        let flagged = !map.steps.is_empty() && !map.map().at(a).is_ok();
        let w = if flagged { FLAGGED_WEIGHT } else { 1.0 };
        let step = |x: i32| (f(x as f64 + 1.0) - f(x as f64)).abs();
        let coarse = step(a).min(step((b - 1).max(a))) / (STEP_RATIO * tolerance);
        w / coarse.max(1.0)
    };
    CurveBuf::fit_knots_from(f, &knots, tolerance, &weight)
}

/// The weight of the error where the channel flags its readings (see
/// `fit_with_steps`).
pub const FLAGGED_WEIGHT: f64 = 0.001;
/// Where one input step moves the output by more than this many
/// tolerances (for a temperature: 23 mK, the coarse ends of a thermistor on
/// a 16-bit converter), the curve is fitted to a 1/STEP_RATIO of a step
/// instead (see `fit_with_steps`).
pub const STEP_RATIO: f64 = 10_000.0;

/// The largest and smallest value of `f` on a grid over `lo..=hi`.
fn extent(f: &dyn Fn(i32) -> f64, lo: i32, hi: i32) -> (f64, f64) {
    let n = (hi as i64 - lo as i64).clamp(1, STATUS_GRID);
    (0..=n)
        .map(|i| f((lo as i64 + (hi as i64 - lo as i64) * i / n) as i32))
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        })
}

/// Adds a zero offset (format bits) and limits to the format.
fn offset_and_limit(v: i64, offset: i32, max: i64) -> (u32, Status) {
    let v = v + offset as i64;
    if v < 0 {
        (0, Status::SENSOR_UNDER_RANGE)
    } else if v > max {
        (max.min(u32::MAX as i64) as u32, Status::SENSOR_SATURATED)
    } else {
        (v as u32, Status::OK)
    }
}

/// The largest `fx::Temperature` bits of a reading (65 536 K would not fit).
const TEMPERATURE_BITS_MAX: i64 = u32::MAX as i64;
/// The largest `fx::Pressure` bits of a reading.
const PRESSURE_BITS_MAX: i64 = u32::MAX as i64;

// ---------------------------------------------------------------- temperature

/// A prepared temperature channel (see the [module](self) documentation).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TemperatureStage<'a> {
    /// Codes from here on are beyond the converter (the status at `full`
    /// applies, the value at `hi`).
    pub full: u32,
    /// The front-end's valid codes; the value of a code outside is the
    /// value at the nearer end.
    pub lo: u32,
    /// See `lo`.
    pub hi: u32,
    /// The front-end's flags over the codes `0 ..= full`.
    pub status: StatusMap<'a>,
    /// Code → corrected temperature, `fx::Temperature` bits.
    pub curve: Curve<'a>,
}

impl TemperatureStage<'_> {
    /// Checks a stage received from elsewhere.
    pub fn validate(&self) -> Result<(), Error> {
        if !(2..=1 << 24).contains(&self.full) || self.lo > self.hi || self.hi >= self.full {
            return Err(Error::Malformed(Defect::TemperatureChannelCodes));
        }
        self.status.validate()?;
        self.curve.validate()?;
        match self.curve.domain() {
            Some((a, b)) if a == self.lo as i32 && b == self.hi as i32 => Ok(()),
            _ => Err(Error::Malformed(Defect::TemperatureCurveDomain)),
        }
    }

    /// The front-end's flags and the corrected temperature of a code,
    /// `fx::Temperature` bits before the offset.
    fn convert(&self, code: u32) -> (i64, Status) {
        let c = code.min(self.full);
        let status = self.status.at(c as i32);
        let v = self.curve.eval(c.max(self.lo).min(self.hi) as i32);
        (v, status)
    }

    /// The lowest and highest value of the curve, `fx::Temperature` bits.
    pub fn extent(&self) -> (i64, i64) {
        let (a, b) = (
            self.curve.eval(self.lo as i32),
            self.curve.eval(self.hi as i32),
        );
        (a.min(b), a.max(b))
    }
}

/// A temperature stage with its curve and map (hosts).
#[derive(Clone, Debug, PartialEq, Eq, Default)]
pub struct TemperatureStageBuf {
    /// See [`TemperatureStage::full`].
    pub full: u32,
    /// See [`TemperatureStage::lo`].
    pub lo: u32,
    /// See [`TemperatureStage::hi`].
    pub hi: u32,
    /// See [`TemperatureStage::status`].
    pub status: StatusMapBuf,
    /// See [`TemperatureStage::curve`].
    pub curve: CurveBuf,
}

impl TemperatureStageBuf {
    /// The stage.
    pub fn stage(&self) -> TemperatureStage<'_> {
        TemperatureStage {
            full: self.full,
            lo: self.lo,
            hi: self.hi,
            status: self.status.map(),
            curve: self.curve.curve(),
        }
    }

    /// Prepares the stage of an `f64` channel (its zero offset is not
    /// part of the stage). Returns the stage and the curve's largest error
    /// on its fitting points where the channel does not flag its
    /// readings, K (flagged stretches count a hundredth).
    pub fn prepare(
        ch: &float::TemperatureChannel<f64>,
    ) -> Result<(TemperatureStageBuf, f64), Error> {
        let full = ch.full_code();
        let (lo, hi) = match ch.front() {
            float::TemperatureFront::Rtd(r) => r.valid_codes(),
            float::TemperatureFront::Ntc(n) => n.valid_codes(),
        };
        let front = ch.front();
        let status = StatusMapBuf::locate(&|c: i32| front.read(c as u32).status, 0, full as i32)?;
        // Values beyond 10 000 K are only ever flagged ones (an NTC's
        // saturated reading): the curve holds them at 10 000 K, which keeps
        // the coefficients' scale for the real range.
        let corrected = |c: f64| -> f64 {
            let t = front.read(c as u32).temperature_k;
            ch.correction()
                .apply(t)
                .unwrap_or(t)
                .min(TEMPERATURE_FIT_MAX_K)
                * 65_536.0
        };
        // 0 °C: the Callendar–Van Dusen equation changes form there.
        let mut extra: Vec<i32, 1> = Vec::new();
        if let float::TemperatureFront::Rtd(_) = front {
            let below =
                |c: i32| front.read(c as u32).temperature_k < crate::constants::ZERO_CELSIUS_K;
            let (a, b) = (lo as i32, hi as i32);
            if below(a) != below(b) {
                let (mut x, mut y) = (a, b);
                while y - x > 1 {
                    let m = x + (y - x) / 2;
                    if below(m) == below(a) {
                        x = m;
                    } else {
                        y = m;
                    }
                }
                let _ = extra.push(y);
            }
        }
        let (curve, err) = fit_with_steps(
            &corrected,
            lo as i32,
            hi as i32,
            &status,
            &extra,
            TEMPERATURE_TOLERANCE,
        )?;
        let buf = TemperatureStageBuf {
            full,
            lo,
            hi,
            status,
            curve,
        };
        buf.stage().validate()?;
        Ok((buf, err / 65_536.0))
    }
}

/// A temperature channel at work: its zero offset. The stage is passed to
/// every call (it is a view of the configuration's bytes).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub struct TemperatureChannel {
    /// The zero offset, `fx::Temperature` bits.
    pub offset: i32,
}

impl TemperatureChannel {
    /// Step 1: a code to the corrected temperature with its flags.
    pub fn read(
        &self,
        stage: &TemperatureStage<'_>,
        code: u32,
    ) -> TemperatureReading<fx::Temperature> {
        let (v, status) = stage.convert(code);
        let (t, limit) = offset_and_limit(v, self.offset, TEMPERATURE_BITS_MAX);
        TemperatureReading {
            temperature_k: fx::Temperature::from_bits(t),
            status: status | limit,
        }
    }
}

// ------------------------------------------------------------------ pressure

/// A prepared bridge transducer.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BridgeStage<'a> {
    /// Converter bits.
    pub bits: u8,
    /// Two's-complement codes.
    pub bipolar: bool,
    /// Signed codes at or beyond these are saturated.
    pub rails: (i32, i32),
    /// Fraction bits of the signal and of the zero.
    pub signal_frac: u8,
    /// The signal of a code: code << code_shift (at 2^-signal_frac).
    pub code_shift: u8,
    /// Temperature (`fx::Temperature` bits) → zero, signal units at
    /// 2^-signal_frac.
    pub zero: Curve<'a>,
    /// Temperature → 1/span at 2^-inv_frac.
    pub inv_span: Curve<'a>,
    /// Fraction bits of `inv_span`.
    pub inv_frac: u8,
    /// The temperature used when the sample's is not a value (the
    /// bridge's reference temperature), `fx::Temperature` bits.
    pub reference: u32,
    /// Flags over the normalised signal u (Q30, ±1.5): range, and the
    /// limits of the gauge and absolute step.
    pub status: StatusMap<'a>,
    /// u (Q30) → corrected absolute pressure, `fx::Pressure` bits.
    pub curve: Curve<'a>,
}

/// A prepared 4–20 mA loop.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopStage<'a> {
    /// Codes from here on are saturated (their value is the value here).
    pub top: u32,
    /// First codes of the NAMUR NE 43 bands below range, measuring, above
    /// range and failure high (codes below the first: failure low).
    pub bands: [u32; 4],
    /// Flags over the codes `0 ..= top` before persistence.
    pub status: StatusMap<'a>,
    /// Code → corrected absolute pressure, `fx::Pressure` bits.
    pub curve: Curve<'a>,
    /// How long a failure current must last before it is declared.
    pub persistence: Millis,
}

/// A prepared pressure front-end.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PressureFront<'a> {
    /// A bridge transducer.
    Bridge(BridgeStage<'a>),
    /// A 4–20 mA loop.
    Loop(LoopStage<'a>),
}

/// A prepared pressure channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PressureStage<'a> {
    /// The front-end.
    pub front: PressureFront<'a>,
    /// The site's barometric pressure, `fx::Pressure` bits.
    pub barometric: u32,
}

impl PressureStage<'_> {
    /// Checks a stage received from elsewhere.
    pub fn validate(&self) -> Result<(), Error> {
        match &self.front {
            PressureFront::Bridge(s) => {
                if !(8..=24).contains(&s.bits)
                    || s.rails.0 >= s.rails.1
                    || s.signal_frac > 30
                    || s.code_shift > s.signal_frac
                    || s.inv_frac > 40
                {
                    return Err(Error::Malformed(Defect::BridgeStage));
                }
                s.zero.validate()?;
                s.inv_span.validate()?;
                s.status.validate()?;
                s.curve.validate()
            }
            PressureFront::Loop(s) => {
                if s.top == 0
                    || s.top > 1 << 24
                    || !s.bands.windows(2).all(|w| matches!(w, [a, b] if a <= b))
                {
                    return Err(Error::Malformed(Defect::LoopStage));
                }
                s.status.validate()?;
                s.curve.validate()
            }
        }
    }
}

/// A prepared bridge with its curves and map (hosts).
#[derive(Clone, Debug, PartialEq, Eq, Default)]
pub struct BridgeStageBuf {
    /// See [`BridgeStage::bits`].
    pub bits: u8,
    /// See [`BridgeStage::bipolar`].
    pub bipolar: bool,
    /// See [`BridgeStage::rails`].
    pub rails: (i32, i32),
    /// See [`BridgeStage::signal_frac`].
    pub signal_frac: u8,
    /// See [`BridgeStage::code_shift`].
    pub code_shift: u8,
    /// See [`BridgeStage::zero`].
    pub zero: CurveBuf,
    /// See [`BridgeStage::inv_span`].
    pub inv_span: CurveBuf,
    /// See [`BridgeStage::inv_frac`].
    pub inv_frac: u8,
    /// See [`BridgeStage::reference`].
    pub reference: u32,
    /// See [`BridgeStage::status`].
    pub status: StatusMapBuf,
    /// See [`BridgeStage::curve`].
    pub curve: CurveBuf,
}

/// A prepared loop with its curve and map (hosts).
#[derive(Clone, Debug, PartialEq, Eq, Default)]
pub struct LoopStageBuf {
    /// See [`LoopStage::top`].
    pub top: u32,
    /// See [`LoopStage::bands`].
    pub bands: [u32; 4],
    /// See [`LoopStage::status`].
    pub status: StatusMapBuf,
    /// See [`LoopStage::curve`].
    pub curve: CurveBuf,
    /// See [`LoopStage::persistence`].
    pub persistence: Millis,
}

/// A prepared pressure front-end with its curves and maps (hosts).
#[derive(Clone, Debug, PartialEq, Eq)]
#[allow(
    clippy::large_enum_variant,
    reason = "host-side builder values, built once per configuration"
)]
pub enum PressureFrontBuf {
    /// A bridge transducer.
    Bridge(BridgeStageBuf),
    /// A 4–20 mA loop.
    Loop(LoopStageBuf),
}

/// A prepared pressure channel with its curves and maps (hosts).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PressureStageBuf {
    /// See [`PressureStage::front`].
    pub front: PressureFrontBuf,
    /// See [`PressureStage::barometric`].
    pub barometric: u32,
}

impl PressureStageBuf {
    /// The stage.
    pub fn stage(&self) -> PressureStage<'_> {
        let front = match &self.front {
            PressureFrontBuf::Bridge(b) => PressureFront::Bridge(BridgeStage {
                bits: b.bits,
                bipolar: b.bipolar,
                rails: b.rails,
                signal_frac: b.signal_frac,
                code_shift: b.code_shift,
                zero: b.zero.curve(),
                inv_span: b.inv_span.curve(),
                inv_frac: b.inv_frac,
                reference: b.reference,
                status: b.status.map(),
                curve: b.curve.curve(),
            }),
            PressureFrontBuf::Loop(l) => PressureFront::Loop(LoopStage {
                top: l.top,
                bands: l.bands,
                status: l.status.map(),
                curve: l.curve.curve(),
                persistence: l.persistence,
            }),
        };
        PressureStage {
            front,
            barometric: self.barometric,
        }
    }

    /// Prepares the stage of an `f64` channel read with the temperature
    /// stage `temperature` (whose readings set the domain of a bridge's
    /// compensation). Returns the stage and the largest error of its
    /// curves on their fitting points where the channel does not flag its
    /// readings: pressure Pa, and for a bridge the zero and 1/span relative
    /// to their largest values.
    pub fn prepare(
        ch: &float::PressureChannel<f64>,
        temperature: &TemperatureStage<'_>,
    ) -> Result<(PressureStageBuf, f64), Error> {
        let b = ch.barometric();
        let barometric =
            fx::from_f64::<fx::Pressure>(b, SensorSetting::BarometricPressure)?.to_bits();
        let corr = |p: f64| ch.correction().apply(p).unwrap_or(p) * 16.0;
        let (front, err) = match ch.front() {
            float::PressureFront::Bridge {
                bridge,
                bits,
                bipolar,
                reference_k,
            } => {
                let cfg = bridge.config();
                let sb = cfg.signal_bits();
                let rails = cfg.rails();
                // Temperatures the compensation may see: the temperature
                // channel's readings and a margin for zero offsets.
                let (t_lo, t_hi) = temperature.extent();
                let margin = (COMPENSATION_MARGIN_K * 65_536.0) as i64;
                let t_lo = (t_lo - margin).max(65_536) as i32;
                let t_hi = (t_hi + margin).min(i32::MAX as i64).max(t_lo as i64 + 2) as i32;
                let zero_of = |t: i32| bridge.zero_and_span(t as f64 / 65_536.0).0;
                let inv_of = |t: i32| 1.0 / bridge.zero_and_span(t as f64 / 65_536.0).1;
                let (zmin, zmax) = extent(&zero_of, t_lo, t_hi);
                let zabs = zmax.abs().max(zmin.abs()).max(1.0);
                // Signal and zero at 2^-frac, |value| < 0.45·2^31.
                let mut frac = 30i32;
                while frac > 8 && (zabs + 1.0) * (1u64 << frac) as f64 > 0.45 * 2_147_483_648.0 {
                    frac -= 1;
                }
                if frac < sb as i32 {
                    return Err(Error::OutOfRange(SensorSetting::BridgeZero.into()));
                }
                let (_, imax) = extent(&inv_of, t_lo, t_hi);
                let mut ifrac = 0i32;
                while ifrac < 40 && imax * libm::exp2((ifrac + 1) as f64) <= 0.45 * 2_147_483_648.0
                {
                    ifrac += 1;
                }
                let reference = fx::from_f64::<fx::Temperature>(
                    *reference_k,
                    SensorSetting::BridgeReferenceTemperature,
                )?
                .to_bits();
                let kinks: Vec<i32, 2> = [reference_k - 255.0, reference_k + 255.0]
                    .into_iter()
                    .map(|t| (t * 65_536.0) as i64)
                    .filter(|&t| t > t_lo as i64 && t < t_hi as i64)
                    .map(|t| t as i32)
                    .collect();
                let none = StatusMapBuf::default();
                let scale_z = libm::exp2(frac as f64);
                let scale_i = libm::exp2(ifrac as f64);
                let (zero, ez) = fit_with_steps(
                    &|t| zero_of(t as i32) * scale_z,
                    t_lo,
                    t_hi,
                    &none,
                    &kinks,
                    COMPENSATION_TOLERANCE,
                )?;
                let (inv_span, ei) = fit_with_steps(
                    &|t| inv_of(t as i32) * scale_i,
                    t_lo,
                    t_hi,
                    &none,
                    &kinks,
                    COMPENSATION_TOLERANCE,
                )?;
                let u_of = |u: i32| u as f64 / (1u64 << 30) as f64;
                let status = StatusMapBuf::locate(
                    &|u: i32| bridge.from_normalized(u_of(u), b).status,
                    -U_LIMIT_Q30,
                    U_LIMIT_Q30,
                )?;
                let (curve, ep) = fit_with_steps(
                    &|u| corr(bridge.from_normalized(u_of(u as i32), b).pressure_pa),
                    -U_LIMIT_Q30,
                    U_LIMIT_Q30,
                    &status,
                    &[],
                    PRESSURE_TOLERANCE,
                )?;
                let err = (ep / 16.0)
                    .max(ez / scale_z / zabs)
                    .max(ei / scale_i / imax.max(1e-300));
                let stage = BridgeStageBuf {
                    bits: *bits,
                    bipolar: *bipolar,
                    rails,
                    signal_frac: frac as u8,
                    code_shift: (frac - sb as i32) as u8,
                    zero,
                    inv_span,
                    inv_frac: ifrac as u8,
                    reference,
                    status,
                    curve,
                };
                (PressureFrontBuf::Bridge(stage), err)
            }
            float::PressureFront::Loop { input, .. } => {
                let top = input.top_code();
                let rank = |band: Band| match band {
                    Band::FailureLow => 0,
                    Band::BelowRange => 1,
                    Band::Measuring => 2,
                    Band::AboveRange => 3,
                    Band::FailureHigh => 4,
                };
                let band_of = |c: i64| {
                    rank(crate::sensor::current_loop::float::band(
                        input.current(c as u32).0,
                    ))
                };
                let status = StatusMapBuf::locate(
                    &|c: i32| {
                        let (i, sat) = input.current(c as u32);
                        input
                            .convert_current(i, b)
                            .map_or(Status::SENSOR_SATURATED, |(_, r)| r.status | sat)
                    },
                    0,
                    top as i32,
                )?;
                // First codes of each band after the first (bands rise with
                // the code).
                let mut bands = [top + 1; 4];
                for (slot, want) in bands.iter_mut().zip(1..) {
                    let (mut a, mut z) = (0i64, top as i64 + 1);
                    while a < z {
                        let m = a + (z - a) / 2;
                        if band_of(m) >= want {
                            z = m;
                        } else {
                            a = m + 1;
                        }
                    }
                    *slot = a as u32;
                }
                // The current used is limited to the measuring band: kinks
                // where it starts and ends.
                let kinks: Vec<i32, 2> = [bands[1], bands[2]]
                    .into_iter()
                    .filter(|&c| c > 0 && c < top)
                    .map(|c| c as i32)
                    .collect();
                let value = |c: f64| {
                    let (i, _) = input.current(c as u32);
                    input
                        .convert_current(i, b)
                        .map_or(0.0, |(_, r)| corr(r.pressure_pa))
                };
                let (curve, ep) =
                    fit_with_steps(&value, 0, top as i32, &status, &kinks, PRESSURE_TOLERANCE)?;
                (
                    PressureFrontBuf::Loop(LoopStageBuf {
                        top,
                        bands,
                        status,
                        curve,
                        persistence: input.persistence(),
                    }),
                    ep / 16.0,
                )
            }
        };
        let buf = PressureStageBuf { front, barometric };
        buf.stage().validate()?;
        Ok((buf, err))
    }
}

/// The reading type of a pressure channel.
pub type PressureValue = PressureReading<fx::Pressure, fx::GaugePressure>;

/// A pressure channel at work: its zero offset and (for a loop) the NE 43
/// persistence state. The stage is passed to every call.
#[derive(Clone, Copy, Debug, PartialEq, Default)]
pub struct PressureChannel {
    /// The zero offset, `fx::Pressure` bits.
    pub offset: i32,
    state: LoopState<PressureValue>,
}

impl PressureChannel {
    /// A channel with a zero offset, `fx::Pressure` bits.
    pub fn new(offset: i32) -> PressureChannel {
        PressureChannel {
            offset,
            state: LoopState::new(),
        }
    }

    /// Steps 2 and 3: a code to the corrected pressure with its flags, a
    /// bridge compensated at `temperature` (the sample's reading).
    pub fn read(
        &mut self,
        stage: &PressureStage<'_>,
        at: Instant,
        code: u32,
        temperature: &TemperatureReading<fx::Temperature>,
    ) -> PressureValue {
        let offset = self.offset;
        let baro = stage.barometric;
        match &stage.front {
            PressureFront::Bridge(s) => {
                let t = if temperature.status.intersects(VALUE_INVALID) {
                    s.reference
                } else {
                    temperature.temperature_k.to_bits()
                };
                let t = t.min(i32::MAX as u32) as i32;
                let c = signed_code(code, s.bits, s.bipolar);
                let (lo, hi) = s.rails;
                let mut status = if c <= lo || c >= hi {
                    Status::SENSOR_SATURATED
                } else {
                    Status::OK
                };
                let sig = (c.max(lo).min(hi) as i64) << s.code_shift.min(30);
                let d = sig - s.zero.eval(t);
                let inv = s.inv_span.eval(t);
                // u = d·inv at 2^-(signal_frac + inv_frac) → Q30.
                let shift = s.signal_frac as i32 + s.inv_frac as i32 - 30;
                let prod = mul_s32(d, inv);
                let u = if shift >= 0 {
                    prod >> shift.min(63)
                } else {
                    prod.saturating_mul(1 << (-shift).min(62))
                };
                let limit = U_LIMIT_Q30 as i64;
                let u = if u > limit || u < -limit {
                    status |= Status::SENSOR_SATURATED;
                    u.max(-limit).min(limit)
                } else {
                    u
                } as i32;
                status |= s.status.at(u);
                reading(s.curve.eval(u), offset, baro, status)
            }
            PressureFront::Loop(s) => {
                let c = code.min(s.top);
                let band = if c < s.bands[0] {
                    Band::FailureLow
                } else if c < s.bands[1] {
                    Band::BelowRange
                } else if c < s.bands[2] {
                    Band::Measuring
                } else if c < s.bands[3] {
                    Band::AboveRange
                } else {
                    Band::FailureHigh
                };
                let status = s.status.at(c as i32);
                let r = reading(s.curve.eval(c as i32), offset, baro, status);
                self.state.apply(band, r, at, s.persistence)
            }
        }
    }
}

/// The reading of a corrected absolute pressure (`fx::Pressure` bits, before
/// the offset).
fn reading(v: i64, offset: i32, baro: u32, status: Status) -> PressureValue {
    let (p, limit) = offset_and_limit(v, offset, PRESSURE_BITS_MAX);
    let gauge = p as i64 - baro as i64;
    let (gauge, clamped) = crate::sensor::clamp_i32(gauge);
    PressureReading {
        pressure_pa: fx::Pressure::from_bits(p),
        gauge_pa: fx::GaugePressure::from_bits(gauge),
        status: status
            | limit
            | if clamped {
                Status::SENSOR_SATURATED
            } else {
                Status::OK
            },
    }
}
