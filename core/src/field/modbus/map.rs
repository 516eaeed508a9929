//! The register map: quantities, their encodings, and the snapshot the
//! gauge keeps of its latest estimate for the Modbus server to read.
//!
//! The map itself is `core/modbus-registers.csv` (generated into
//! [`INPUT`] and [`HOLDING`] by the build script): one table-driven read
//! path serves every register. Values are kept in Q24 (`i64` with 24
//! fraction bits) or as plain integers, and encoded per register: IEEE-754
//! binary32 built from the integer with integer operations only
//! ([`f32_bits`]), or a scaled integer ([`scaled_i32`]).

use super::{Exception, Space};
use crate::field::{FieldScalars, Protocol, q24};
use crate::link::Identity;
use crate::track::fixed::{TrackConfigFx, TrackFx};
use crate::{Status, fx};

/// Version of the register map (input register 308).
pub const MAP_VERSION: u16 = 2;

/// The map as text (hosts decode with it; `core/modbus-registers.csv`).
pub const MAP_CSV: &str = include_str!("../../../modbus-registers.csv");

/// How a register's value is written in 16-bit words.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Encoding {
    /// IEEE-754 binary32 of a Q24 value, high word first.
    F32,
    /// Signed 32-bit integer of a Q24 value × 10^scale, high word first.
    I32(u8),
    /// An integer in one word.
    U16,
    /// An integer in two words, high word first.
    U32,
    /// An integer in four words, high word first.
    U64,
}

impl Encoding {
    /// Words taken.
    pub const fn words(self) -> u16 {
        match self {
            Encoding::U16 => 1,
            Encoding::U64 => 4,
            _ => 2,
        }
    }
}

/// What a register shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[allow(missing_docs)] // the map's `description` column says what each is
pub enum Quantity {
    MassKg,
    MassUKg,
    StandardVolumeM3,
    StandardVolumeUM3,
    FillFraction,
    FillFractionU,
    SettledPressurePa,
    SettledPressureUPa,
    PressurePa,
    PressureUPa,
    TemperatureK,
    TemperatureUK,
    RateKgH,
    RateUKgH,
    TimeToEmptyS,
    TimeToEmptyEarliestS,
    TimeToEmptyLatestS,
    SampleAgeS,
    TemperatureC,
    Status,
    Alarms,
    AlarmsUnacknowledged,
    AlarmsAcknowledged,
    ContentValid,
    LoopCurrentUa,
    Sequence,
    TimeToEmptyWithheld,
    SerialNumber,
    FirmwareMajor,
    FirmwareMinor,
    FirmwarePatch,
    HardwareRev,
    MapVersion,
    ModbusAddress,
    Baud,
    Parity,
    Protocol,
}

/// Quantities kept in Q24 by the snapshot (the first of [`Quantity`]).
const KEPT: usize = 17;

/// One register (or the first of a multi-word value).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Register {
    /// Protocol address of the first word.
    pub address: u16,
    /// What it shows.
    pub quantity: Quantity,
    /// How.
    pub encoding: Encoding,
    /// Writable (holding registers only).
    pub writable: bool,
}

include!(concat!(env!("OUT_DIR"), "/modbus_map.rs"));

/// Not a value (kept quantities).
const NONE: i64 = i64::MIN;

/// 0 °C in Q24 (273.15 × 2²⁴).
const ICE_POINT_Q24: i64 = 4_582_696_550;

/// What the gauge knows for its registers: the latest estimate in Q24, its
/// status, and the alarm acknowledgements (the only thing a Modbus write
/// changes).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Snapshot {
    values: [i64; KEPT],
    status: u32,
    sequence: u32,
    /// Why no time to empty is given (the tracker's reason code, 0: one is).
    withheld: u8,
    sample_at_ms: Option<u64>,
    acknowledged: u16,
    loop_current: u32,
}

impl Default for Snapshot {
    fn default() -> Snapshot {
        Snapshot::new()
    }
}

/// Alarm bits of a status word (bits 16–22: `AlarmKind as u8 + 16`).
fn alarms_of(status: u32) -> u16 {
    ((status >> 16) & 0x7F) as u16
}

/// `√x`, rounded down (bit by bit: bounded time, no division).
pub fn isqrt(x: u64) -> u64 {
    let mut rem = x;
    let mut root = 0u64;
    let mut bit = 1u64 << 62;
    while bit > x {
        bit >>= 2;
    }
    while bit != 0 {
        if rem >= root + bit {
            rem -= root + bit;
            root = (root >> 1) + bit;
        } else {
            root >>= 1;
        }
        bit >>= 2;
    }
    root
}

/// `a·b/c` for `c > 0` with the operands brought to 32 bits first
/// (relative error about 2⁻³⁰); saturates.
fn mul_div(a: u64, b: u64, c: u64) -> u64 {
    if c == 0 {
        return u64::MAX;
    }
    let norm = |v: u64| -> (u64, u32) {
        let s = (64 - v.leading_zeros()).saturating_sub(32);
        (v >> s, s)
    };
    let (a, sa) = norm(a);
    let (b, sb) = norm(b);
    let (c, sc) = norm(c);
    let c = c.max(1);
    // a·b < 2⁶⁴; keep 31 bits of headroom for the quotient's shift.
    let q = (a * b) / c;
    let shift = sa as i32 + sb as i32 - sc as i32;
    if shift >= 0 {
        if q.leading_zeros() as i32 <= shift {
            u64::MAX
        } else {
            q << shift
        }
    } else {
        q >> (-shift).min(63)
    }
}

impl Snapshot {
    /// Nothing known yet.
    pub const fn new() -> Snapshot {
        Snapshot {
            values: [NONE; KEPT],
            status: 0,
            sequence: 0,
            withheld: crate::track::float::NoTimeToEmpty::NoContent.code(),
            sample_at_ms: None,
            acknowledged: 0,
            // No estimate yet: the output signals failure.
            loop_current: crate::field::current_loop::FAILURE_LOW.to_bits(),
        }
    }

    /// Takes a tracker output (`seq`: its telemetry sequence number;
    /// `device`: the device flags; `cfg`: the tracker's configuration, for
    /// the declared sensor uncertainties; `rated_volume_m3`: standard
    /// volume of the rated content; `loop_current`: the output's set-point).
    /// A status alone (no usable configuration) is `t = None`.
    #[allow(clippy::too_many_arguments)]
    pub fn update(
        &mut self,
        seq: u32,
        t: Option<&TrackFx>,
        at_ms: u64,
        device: Status,
        cfg: Option<&TrackConfigFx>,
        rated_volume_m3: Option<fx::Volume>,
        loop_current: fx::Milliamps,
    ) {
        self.values = [NONE; KEPT];
        self.sequence = seq;
        self.sample_at_ms = Some(at_ms);
        self.loop_current = loop_current.to_bits();
        let status = t.map_or(Status::OK, |t| t.status) | device;
        self.status = status.bits();
        // An alarm that cleared loses its acknowledgement.
        self.acknowledged &= alarms_of(self.status);
        let Some(t) = t else {
            self.withheld = crate::track::float::NoTimeToEmpty::NoContent.code();
            return;
        };
        self.withheld = t.time_to_empty_withheld.map_or(0, |r| r.code());
        let v = &mut self.values;
        let mut set = |q: Quantity, value: i64| {
            if let Some(slot) = v.get_mut(q as usize) {
                *slot = value;
            }
        };
        if let Some(c) = &t.content {
            let d = derived(t, cfg, rated_volume_m3);
            set(Quantity::MassKg, q24(c.mass_kg.to_bits() as i64, 40));
            set(
                Quantity::StandardVolumeM3,
                q24(c.standard_volume_m3.to_bits() as i64, 40),
            );
            set(
                Quantity::FillFraction,
                q24(c.fill_fraction.to_bits() as i64, 32),
            );
            set(
                Quantity::SettledPressurePa,
                q24(i64::from(c.settled_pressure_pa.to_bits()), 4),
            );
            set(
                Quantity::PressurePa,
                q24(i64::from(c.pressure_pa.to_bits()), 4),
            );
            set(
                Quantity::TemperatureK,
                q24(i64::from(c.temperature_k.to_bits()), 16),
            );
            if let Some(u) = &t.uncertainty {
                set(Quantity::MassUKg, q24(u.mass_kg.to_bits() as i64, 40));
                set(
                    Quantity::FillFractionU,
                    q24(u.fill_fraction.to_bits() as i64, 32),
                );
            }
            let mut opt = |q: Quantity, value: Option<i64>| {
                if let Some(x) = value {
                    set(q, x);
                }
            };
            opt(Quantity::StandardVolumeUM3, d.standard_volume_u_m3);
            opt(Quantity::SettledPressureUPa, d.settled_pressure_u_pa);
            opt(Quantity::PressureUPa, d.pressure_u_pa);
            opt(Quantity::TemperatureUK, d.temperature_u_k);
        }
        if let Some(r) = &t.rate {
            // Consumption as a negative change of the mass (as telemetry).
            set(
                Quantity::RateKgH,
                q24(r.kg_h.to_bits().saturating_neg(), 32),
            );
            set(Quantity::RateUKgH, q24(r.u_kg_h.to_bits(), 32));
        }
        if let Some(tte) = &t.time_to_empty {
            let s = |ms: u64| -> i64 { ((ms / 1000).min(1 << 38) as i64) << 24 };
            set(Quantity::TimeToEmptyS, s(tte.expected.0));
            set(Quantity::TimeToEmptyEarliestS, s(tte.earliest.0));
            if let Some(l) = tte.latest {
                set(Quantity::TimeToEmptyLatestS, s(l.0));
            }
        }
    }

    /// The acknowledged alarms.
    pub fn acknowledged(&self) -> u16 {
        self.acknowledged
    }

    /// Acknowledges the active alarms among `bits` (bits of alarms that are
    /// not active are ignored). Changes no estimate and no alarm.
    pub fn acknowledge(&mut self, bits: u16) {
        self.acknowledged |= bits & alarms_of(self.status);
    }

    /// The status word of the latest estimate.
    pub fn status(&self) -> Status {
        Status::from_bits(self.status)
    }

    /// The value of a kept quantity, Q24 (`None`: not known).
    pub fn kept(&self, q: Quantity) -> Option<i64> {
        match self.values.get(q as usize) {
            Some(&v) if v != NONE => Some(v),
            _ => None,
        }
    }
}

/// Uncertainties the tracker does not give directly, Q24.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Derived {
    /// Of the standard volume: U(fill fraction) × the rated standard
    /// volume (the standard volume is the fill fraction times it).
    pub standard_volume_u_m3: Option<i64>,
    /// Of the settled pressure, first order: p_s · (U(m)/m) / c_p, with
    /// c_p = ∂ln m/∂ln p at the sample's state (the settled pressure is the
    /// pressure of the same mass at the reference temperature). It counts
    /// the capacity's share of U(m) too: an upper bound.
    pub settled_pressure_u_pa: Option<i64>,
    /// Of the pressure as declared: 2·√((u_FS·FS)² + (u_rd·p)²).
    pub pressure_u_pa: Option<i64>,
    /// Of the temperature as declared: 2·u_T.
    pub temperature_u_k: Option<i64>,
}

/// What the derived uncertainties are computed from (raw bits of the
/// device formats).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct DerivedInputs {
    /// Mass, `fx::Mass` bits.
    pub mass: u64,
    /// Settled pressure, `fx::Pressure` bits.
    pub settled_pressure: u32,
    /// Pressure, `fx::Pressure` bits.
    pub pressure: u32,
    /// U(m), U(fill fraction) (`fx::Mass`, `fx::Fraction` bits) and c_p
    /// (`I8F24` bits), when the tracker has them.
    pub uncertainty: Option<(u64, u64, i32)>,
    /// Standard volume of the rated content, `fx::Volume` bits.
    pub rated_volume: Option<u64>,
    /// Declared pressure full scale (`fx::Pressure` bits), u_FS and u_rd
    /// (`U0F32` bits), u_T (`fx::Temperature` bits).
    pub declared: Option<(u32, u32, u32, u32)>,
}

/// The derived uncertainties of a tracker output (fixed point).
pub fn derived(
    t: &TrackFx,
    cfg: Option<&TrackConfigFx>,
    rated_volume_m3: Option<fx::Volume>,
) -> Derived {
    let Some(c) = &t.content else {
        return Derived::default();
    };
    derive(&DerivedInputs {
        mass: c.mass_kg.to_bits(),
        settled_pressure: c.settled_pressure_pa.to_bits(),
        pressure: c.pressure_pa.to_bits(),
        uncertainty: t.uncertainty.as_ref().map(|u| {
            (
                u.mass_kg.to_bits(),
                u.fill_fraction.to_bits(),
                u.c_p.to_bits(),
            )
        }),
        rated_volume: rated_volume_m3.map(|v| v.to_bits()),
        declared: cfg.map(|c| {
            let u = &c.uncertainty;
            (
                u.pressure_full_scale_pa.to_bits(),
                u.pressure_fs.to_bits(),
                u.pressure_reading.to_bits(),
                u.temperature_k.to_bits(),
            )
        }),
    })
}

/// The derived uncertainties, Q24 (fixed point; [`derive_f64`] is the
/// reference).
pub fn derive(i: &DerivedInputs) -> Derived {
    let mut d = Derived::default();
    if let (Some((u_m, u_fill, cp)), Some(v)) = (i.uncertainty, i.rated_volume) {
        // U(fill) Q32 × V Q40 → Q24: product / 2^48.
        // Exact product (mul_div's reduced precision lost up to 1e-5 here).
        let uv = (u128::from(u_fill) * u128::from(v)) >> 48;
        d.standard_volume_u_m3 = Some(uv.min(i64::MAX as u128) as i64);
        if cp > 0 && i.mass > 0 {
            // p_s (Q4) × U(m)/m (Q32) / c_p (Q24) = Q12; Q12 → Q24.
            let rel_q32 = mul_div(u_m, 1 << 32, i.mass);
            let x = mul_div(u64::from(i.settled_pressure), rel_q32, cp as u64);
            d.settled_pressure_u_pa = Some((x.min(1 << 50) << 12) as i64);
        }
    }
    if let Some((fs, u_fs, u_rd, u_t)) = i.declared {
        // Q4 Pa, rounded: FS (Q4) × u_FS (Q32) >> 32; p (Q4) × u_rd (Q32) >> 32.
        let half = 1u64 << 31;
        let a = (u64::from(fs) * u64::from(u_fs)).saturating_add(half) >> 32;
        let b = (u64::from(i.pressure) * u64::from(u_rd)).saturating_add(half) >> 32;
        // a, b ≤ 2³², so a² + b² may pass 2⁶⁴: both shifted by 2 bits then.
        let (a2, b2) = (a.saturating_mul(a), b.saturating_mul(b));
        // The root rounded to nearest (√s ≥ r + ½ exactly when s − r² > r).
        let rounded = |s: u64| {
            let r = isqrt(s);
            if s - r * r > r { r + 1 } else { r }
        };
        let root = match a2.checked_add(b2) {
            Some(s) => rounded(s),
            None => rounded((a2 >> 2) + (b2 >> 2)) << 1,
        };
        d.pressure_u_pa = Some(((2 * root) as i64) << 20);
        // U16F16 × 2 → Q24: << 9.
        d.temperature_u_k = Some(i64::from(u_t) << 9);
    }
    d
}

/// The derived uncertainties in `f64` (SI units): the reference of
/// [`derive`](fn@derive). Fields as in [`Derived`], `None` where it has none.
pub fn derive_f64(i: &DerivedInputs) -> [Option<f64>; 4] {
    let mut out = [None; 4];
    let l = |bits: u64, frac: i32| libm::ldexp(bits as f64, -frac);
    if let (Some((u_m, u_fill, cp)), Some(v)) = (i.uncertainty, i.rated_volume) {
        out[0] = Some(l(u_fill, 32) * l(v, 40));
        if cp > 0 && i.mass > 0 {
            let ps = l(u64::from(i.settled_pressure), 4);
            out[1] = Some(ps * (l(u_m, 40) / l(i.mass, 40)) / l(cp as u64, 24));
        }
    }
    if let Some((fs, u_fs, u_rd, u_t)) = i.declared {
        let a = l(u64::from(fs), 4) * l(u64::from(u_fs), 32);
        let b = l(u64::from(i.pressure), 4) * l(u64::from(u_rd), 32);
        out[2] = Some(2.0 * libm::sqrt(a * a + b * b));
        out[3] = Some(2.0 * l(u64::from(u_t), 16));
    }
    out
}

/// IEEE-754 binary32 bits of `v × 2⁻²⁴` rounded to nearest, ties to even,
/// with integer operations only.
pub fn f32_bits(v: i64) -> u32 {
    if v == 0 {
        return 0;
    }
    let sign = if v < 0 { 1u32 << 31 } else { 0 };
    let mag = v.unsigned_abs();
    // The leading bit's position: value = mag × 2^-24, mag ≥ 2^p.
    let p = 63 - mag.leading_zeros() as i32;
    let exp = p - 24 + 127;
    // 24 significant bits (leading one included), rounded.
    let (mant, exp) = if p > 23 {
        let sh = (p - 23) as u32;
        let m = mag >> sh;
        let rest = mag & ((1u64 << sh) - 1);
        let half = 1u64 << (sh - 1);
        let up = rest > half || (rest == half && m & 1 == 1);
        let m = m + u64::from(up);
        if m >> 24 != 0 {
            (m >> 1, exp + 1)
        } else {
            (m, exp)
        }
    } else {
        (mag << (23 - p) as u32, exp)
    };
    // Q24 of an i64: exponents −24 … 39, always normal.
    sign | ((exp as u32) << 23) | (mant as u32 & 0x7F_FFFF)
}

/// Powers of ten of the scaled integers.
const POW10: [i64; 5] = [1, 10, 100, 1000, 10_000];

/// The scaled integer of a Q24 value: `round(v × 10^scale × 2⁻²⁴)`,
/// saturating to `i32::MIN + 1 … i32::MAX` (`i32::MIN` means unknown).
pub fn scaled_i32(v: i64, scale: u8) -> i32 {
    let k = POW10.get(usize::from(scale)).copied().unwrap_or(1);
    let lim = i64::from(i32::MAX);
    // Beyond 2⁵⁶/k the result saturates anyway; below it v·k fits.
    let bound = (1i64 << 56) / k;
    // `max`/`min`, not `clamp`: no panic path (docs/budget.md).
    let v = v.max(-bound).min(bound);
    let x = (v * k + (1 << 23)) >> 24;
    x.clamp(-lim, lim) as i32
}

/// The registers of a gauge: its snapshot, identity and field settings, at
/// a time (for the sample's age).
pub struct Registers<'a> {
    /// The snapshot (writes acknowledge alarms in it).
    pub snapshot: &'a mut Snapshot,
    /// The identity.
    pub identity: &'a Identity,
    /// The field settings in force.
    pub field: &'a FieldScalars,
    /// Now, ms on the gauge's clock.
    pub now_ms: u64,
}

impl Registers<'_> {
    /// The value of a quantity: Q24 for measured ones, a plain integer for
    /// the others; `None`: not known.
    fn value(&self, q: Quantity) -> Option<i64> {
        let s = &*self.snapshot;
        let id = self.identity;
        let serial = &self.field.serial;
        Some(match q {
            Quantity::SampleAgeS => {
                let ms = self.now_ms.saturating_sub(s.sample_at_ms?).min(1 << 36);
                // ms × 2²⁴/1000: 274 877 907 = 2³⁸/1000, then >> 14.
                ((ms as i64) * 274_877_907) >> 14
            }
            Quantity::TemperatureC => s.kept(Quantity::TemperatureK)? - ICE_POINT_Q24,
            Quantity::Status => i64::from(s.status),
            Quantity::Alarms => i64::from(alarms_of(s.status)),
            Quantity::AlarmsUnacknowledged => i64::from(alarms_of(s.status) & !s.acknowledged),
            Quantity::AlarmsAcknowledged => i64::from(s.acknowledged),
            Quantity::ContentValid => i64::from(
                s.sample_at_ms.is_some()
                    && !s
                        .status()
                        .intersects(crate::field::current_loop::NOT_A_VALUE)
                    && s.kept(Quantity::MassKg).is_some(),
            ),
            // Milliamps bits (Q24) → µA, rounded.
            Quantity::LoopCurrentUa => (i64::from(s.loop_current) * 1000 + (1 << 23)) >> 24,
            Quantity::Sequence => i64::from(s.sequence),
            // Without the tracker there is neither a time to empty nor a
            // reason for none: not available, like the time to empty.
            Quantity::TimeToEmptyWithheld if !cfg!(feature = "tracking") => return None,
            Quantity::TimeToEmptyWithheld => i64::from(s.withheld),
            Quantity::SerialNumber => id.serial as i64,
            Quantity::FirmwareMajor => i64::from(id.firmware_version[0]),
            Quantity::FirmwareMinor => i64::from(id.firmware_version[1]),
            Quantity::FirmwarePatch => i64::from(id.firmware_version[2]),
            Quantity::HardwareRev => i64::from(id.hardware_rev),
            Quantity::MapVersion => i64::from(MAP_VERSION),
            Quantity::ModbusAddress => i64::from(serial.address),
            Quantity::Baud => i64::from(serial.baud),
            Quantity::Parity => serial.parity as i64,
            Quantity::Protocol => i64::from(serial.protocol == Protocol::Modbus),
            kept => s.kept(kept)?,
        })
    }
}

/// The register covering `address` in `table`, and the word's index in it.
fn find(table: &[Register], address: u16) -> Option<(&Register, u16)> {
    table.iter().find_map(|r| {
        let i = address.checked_sub(r.address)?;
        (i < r.encoding.words()).then_some((r, i))
    })
}

/// Word `i` (high first) of a register's value.
fn word(r: &Register, value: Option<i64>, i: u16) -> u16 {
    let bits: u64 = match (r.encoding, value) {
        (Encoding::F32, Some(v)) => u64::from(f32_bits(v)),
        (Encoding::F32, None) => 0x7FC0_0000,
        (Encoding::I32(s), Some(v)) => u64::from(scaled_i32(v, s) as u32),
        (Encoding::I32(_), None) => 0x8000_0000,
        (Encoding::U16, Some(v)) => v.clamp(0, 0xFFFE) as u64,
        (Encoding::U32, Some(v)) => v.clamp(0, 0xFFFF_FFFE) as u64,
        (Encoding::U64, Some(v)) => v as u64,
        (_, None) => u64::MAX,
    };
    let shift = (r.encoding.words() - 1 - i) * 16;
    (bits >> (shift & 63)) as u16
}

impl Space for Registers<'_> {
    fn read(&self, holding: bool, address: u16) -> Result<u16, Exception> {
        let table = if holding { HOLDING } else { INPUT };
        let (r, i) = find(table, address).ok_or(Exception::IllegalDataAddress)?;
        Ok(word(r, self.value(r.quantity), i))
    }

    fn check_write(&self, address: u16, value: u16) -> Result<(), Exception> {
        match find(HOLDING, address) {
            Some((r, 0)) if r.writable && r.encoding == Encoding::U16 => {
                if r.quantity == Quantity::AlarmsAcknowledged && value & !0x7F != 0 {
                    Err(Exception::IllegalDataValue)
                } else {
                    Ok(())
                }
            }
            _ => Err(Exception::IllegalDataAddress),
        }
    }

    fn write(&mut self, address: u16, value: u16) -> Result<(), Exception> {
        self.check_write(address, value)?;
        if let Some((r, _)) = find(HOLDING, address)
            && r.quantity == Quantity::AlarmsAcknowledged
        {
            self.snapshot.acknowledge(value);
        }
        Ok(())
    }
}
