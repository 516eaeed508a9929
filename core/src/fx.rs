//! Fixed-point formats of the device path, and the integer helpers it uses.
//!
//! # Formats
//!
//! | quantity | type | range | resolution |
//! |---|---|---|---|
//! | absolute pressure, Pa | [`Pressure`] = `U28F4` | 0 … 268.4 MPa (2684 bar) | 0.0625 Pa |
//! | temperature, K | [`Temperature`] = `U16F16` | 0 … 65 536 K | 15.3 µK |
//! | compressibility factor Z | [`Compressibility`] = `U2F30` | 0 … 4 | 9.3e-10 |
//! | ∂Z/∂p per MPa, ∂Z/∂T per K | [`ZSlope`] = `I8F24` | ±128 | 6.0e-8 |
//! | density kg/m³, fill fraction | [`Density`], [`Fraction`] over `U32F32` | 0 … 4.29e9 | 2.3e-10 |
//! | mass kg, amount mol, volume m³ | [`Mass`], [`Amount`], [`Volume`] over `U24F40` | 0 … 1.68e7 | 9.1e-13 |
//! | vessel elastic expansion, 1/MPa | [`ElasticExpansion`] = `U0F32` | 0 … 1 | 2.3e-10 |
//! | vessel thermal expansion, 1/K | [`ThermalExpansion`] = `I0F32` | ±0.5 | 2.3e-10 |
//! | vessel volume factor V/V₀ | [`Compressibility`] = `U2F30` | 0 … 4 | 9.3e-10 |
//! | mass flow kg/h, volume flow m³/h (signed) | [`MassRate`], [`VolumeRate`] over `I32F32` | ±2.1e9 | 2.3e-10 |
//! | fraction per hour or per day (signed) | [`FractionRate`] over `I32F32` | ±2.1e9 | 2.3e-10 |
//! | small fractions (thresholds, uncertainties) | [`SmallFraction`] = `U0F32` | 0 … 1 | 2.3e-10 |
//! | gauge pressure, Pa (relative to barometric; signed) | [`GaugePressure`] = `I28F4` | ±134.2 MPa (±1342 bar) | 0.0625 Pa |
//! | resistance, Ω (sensor configuration, diagnostics) | [`Resistance`] over `U32F32` | 0 … 4.29 GΩ | 2.3e-10 Ω |
//! | loop current, mA | [`Milliamps`] = `U8F24` | 0 … 256 mA | 6.0e-8 mA |
//! | sensor coefficient (tempcos, polynomials, Steinhart–Hart, excitation) | [`Coefficient`] = `I16F48` | ±32 768 | 3.6e-15 |
//! | calibration anchor (SI value of a corrected quantity) | [`Anchor`] = `I40F24` | ±5.5e11 | 6.0e-8 |
//! | molar mass of a mixture, kg/mol | [`MolarMass`] = `U0F32` | 0 … 1 | 2.3e-10 (1.2e-7 relative at 2 g/mol) |
//!
//! Quantities that share a format are distinct newtypes (`#[repr(transparent)]`,
//! serialised as the number underneath: same bits, same cost), so a mass
//! cannot be passed where a volume is meant; the others are aliases of their
//! format. A newtype gives its bits (`from_bits`, `to_bits`), the number
//! (`from_fixed`, `to_fixed`, `to_num`, `saturating_from_num`) and saturating
//! sums and differences of the same unit; [`from_f64`] and [`to_f64`] take
//! either kind ([`FixedValue`]).
//!
//! ```compile_fail
//! // A volume is not a mass.
//! let m: isochor_core::fx::Mass = isochor_core::fx::Volume::ZERO;
//! ```
//!
//! # How the per-sample arithmetic stays cheap
//!
//! On a Cortex-M0 a 32×32→64 multiply costs tens of instructions and a 64-bit
//! division hundreds, while float operations are library calls. The per-sample
//! path therefore works on 32-bit values whose binary scale is fixed either at
//! compile time or when a setup is prepared, and multiplies them by prepared
//! constants ([`Coef`]: a normalised 32-bit mantissa with a binary exponent)
//! followed by a shift whose amount is also known at preparation time. Divisions
//! happen only while preparing a setup, plus one per density and one per
//! iteration of the settled-pressure solver.

use fixed::types::{
    I0F32, I8F24, I16F48, I28F4, I32F32, I40F24, U0F32, U2F30, U8F24, U16F16, U24F40, U28F4, U32F32,
};

/// A fixed-point value: a `fixed` number or a unit newtype over one. The
/// conversions [`from_f64`] and [`to_f64`] take either.
pub trait FixedValue: Copy {
    /// The `fixed` format underneath.
    type Repr: fixed::traits::Fixed;
    /// The value of a number in its format.
    fn from_repr(repr: Self::Repr) -> Self;
    /// The number underneath.
    fn repr(self) -> Self::Repr;
}

impl<T: fixed::traits::Fixed> FixedValue for T {
    type Repr = T;
    #[inline]
    fn from_repr(repr: T) -> T {
        repr
    }
    #[inline]
    fn repr(self) -> T {
        self
    }
}

/// Defines a unit newtype over a `fixed` format: `#[repr(transparent)]` and
/// serialised as the number underneath (stored layouts and wire formats
/// unchanged), so quantities that share a format cannot be swapped by
/// accident. Constructors and accessors name the format's bits or the
/// number; arithmetic between units is written where it means something.
macro_rules! unit {
    ($(#[$m:meta])* $name:ident($repr:ty)) => {
        $(#[$m])*
        #[derive(
            Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Hash,
            serde::Serialize, serde::Deserialize,
        )]
        #[cfg_attr(feature = "defmt", derive(defmt::Format))]
        #[serde(transparent)]
        #[repr(transparent)]
        pub struct $name($repr);

        impl $name {
            /// Zero.
            pub const ZERO: $name = $name(<$repr>::ZERO);
            /// The largest value of the format.
            pub const MAX: $name = $name(<$repr>::MAX);

            /// The value with these bits of the format underneath.
            #[inline]
            pub const fn from_bits(bits: <$repr as fixed::traits::Fixed>::Bits) -> $name {
                $name(<$repr>::from_bits(bits))
            }

            /// The bits of the format underneath.
            #[inline]
            pub const fn to_bits(self) -> <$repr as fixed::traits::Fixed>::Bits {
                self.0.to_bits()
            }

            /// The value of a number in the format underneath.
            #[inline]
            pub const fn from_fixed(value: $repr) -> $name {
                $name(value)
            }

            /// The number underneath.
            #[inline]
            pub const fn to_fixed(self) -> $repr {
                self.0
            }

            /// The sum, saturating at the format's bounds.
            #[inline]
            pub const fn saturating_add(self, other: $name) -> $name {
                $name(self.0.saturating_add(other.0))
            }

            /// The difference, saturating at the format's bounds.
            #[inline]
            pub const fn saturating_sub(self, other: $name) -> $name {
                $name(self.0.saturating_sub(other.0))
            }

            /// The value of a number of another type, saturating at the
            /// format's bounds (as `fixed`'s `saturating_from_num`).
            #[inline]
            pub fn saturating_from_num<N: fixed::traits::ToFixed>(value: N) -> $name {
                $name(<$repr>::saturating_from_num(value))
            }

            /// The value converted to another number type (as `fixed`'s
            /// `to_num`).
            #[inline]
            pub fn to_num<N: fixed::traits::FromFixed>(self) -> N {
                self.0.to_num()
            }
        }

        impl FixedValue for $name {
            type Repr = $repr;
            #[inline]
            fn from_repr(repr: $repr) -> $name {
                $name(repr)
            }
            #[inline]
            fn repr(self) -> $repr {
                self.0
            }
        }

        impl core::fmt::Display for $name {
            fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
                core::fmt::Display::fmt(&self.0, f)
            }
        }
    };
}

/// Absolute pressure in pascal.
pub type Pressure = U28F4;
/// Thermodynamic temperature in kelvin.
pub type Temperature = U16F16;
/// A dimensionless factor near one: compressibility factor Z, vessel volume factor.
pub type Compressibility = U2F30;
/// A slope of Z: per MPa (with pressure) or per K (with temperature).
pub type ZSlope = I8F24;
unit! {
    /// Density in kg/m³ (`U32F32`).
    Density(U32F32)
}
unit! {
    /// Mass in kg (`U24F40`).
    Mass(U24F40)
}
unit! {
    /// Amount of substance in mol (`U24F40`).
    Amount(U24F40)
}
unit! {
    /// Volume in m³ (`U24F40`).
    Volume(U24F40)
}
unit! {
    /// A fraction (fill fraction: 1 = rated content; `U32F32`).
    Fraction(U32F32)
}
/// Relative volume change of a vessel per MPa of internal pressure.
pub type ElasticExpansion = U0F32;
/// Relative volume change of a vessel per kelvin.
pub type ThermalExpansion = I0F32;
unit! {
    /// Mass flow, kg/h (signed: positive = gas leaving the tank where a field
    /// says "consumption"; `I32F32`).
    MassRate(I32F32)
}
unit! {
    /// Standard-volume flow, m³/h (signed like [`MassRate`]; `I32F32`).
    VolumeRate(I32F32)
}
unit! {
    /// A rate of a fraction of content, per hour or per day (signed;
    /// `I32F32`).
    FractionRate(I32F32)
}
/// A fraction below one: thresholds and relative uncertainties.
pub type SmallFraction = U0F32;
/// Gauge pressure in pascal: absolute pressure minus barometric pressure
/// (negative below the ambient).
pub type GaugePressure = I28F4;
impl Fraction {
    /// One: the rated content.
    pub const ONE: Fraction = Fraction(U32F32::ONE);
}
unit! {
    /// Electrical resistance in ohm (`U32F32`).
    Resistance(U32F32)
}
/// Electrical current in milliampere (4–20 mA loops).
pub type Milliamps = U8F24;
/// A signed sensor coefficient in configuration (temperature coefficients,
/// polynomial coefficients, Steinhart–Hart constants, excitation).
pub type Coefficient = I16F48;
/// An SI value that anchors a calibration correction (Pa or K).
pub type Anchor = I40F24;
/// Molar mass in kg/mol (of a mixture: the pure gases carry theirs as
/// compile-time constants).
pub type MolarMass = U0F32;

/// A positive constant prepared for the fixed-point path: `mantissa × 2^-shift`
/// with the mantissa normalised to `[2^31, 2^32)` (or zero).
///
/// Constants are built at compile time ([`Coef::from_f64`] in a `const`) or
/// while a setup is prepared ([`Coef::from_raw`], [`Coef::mul`],
/// [`Coef::recip`]); per sample they are only applied ([`Coef::scale`]): one
/// 32×32→64 multiply and a shift. Relative precision of a constant: 2^-32.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Coef {
    mantissa: u32,
    shift: i32,
}

impl Coef {
    /// Zero.
    pub const ZERO: Coef = Coef {
        mantissa: 0,
        shift: 0,
    };

    /// Builds a constant from an `f64`. Meant for `const` items, where the
    /// float work happens at compile time; zero, negative and non-finite
    /// inputs give [`Coef::ZERO`].
    pub const fn from_f64(v: f64) -> Coef {
        if v.is_nan() || v <= 0.0 || !v.is_finite() {
            return Coef::ZERO;
        }
        let mut x = v;
        let mut shift = 0i32;
        while x >= 4_294_967_296.0 {
            x /= 2.0;
            shift -= 1;
        }
        while x < 2_147_483_648.0 {
            x *= 2.0;
            shift += 1;
        }
        let m = (x + 0.5) as u64;
        if m >= 1 << 32 {
            Coef {
                mantissa: 1 << 31,
                shift: shift - 1,
            }
        } else {
            Coef {
                mantissa: m as u32,
                shift,
            }
        }
    }

    /// The constant `raw × 2^-frac_bits`, rounded to 32 significant bits.
    pub const fn from_raw(raw: u64, frac_bits: u32) -> Coef {
        Coef::normalize(raw, frac_bits as i32)
    }

    /// `raw × 2^-shift`, normalised with round-to-nearest.
    const fn normalize(raw: u64, shift: i32) -> Coef {
        if raw == 0 {
            return Coef::ZERO;
        }
        let lz = raw.leading_zeros();
        let top = raw << lz;
        let mut m = (top >> 32) + ((top >> 31) & 1);
        let mut s = shift + lz as i32 - 32;
        if m >= 1 << 32 {
            m = 1 << 31;
            s -= 1;
        }
        Coef {
            mantissa: m as u32,
            shift: s,
        }
    }

    /// The constant `raw × 2^-shift` (any sign of `shift`), rounded to 32
    /// significant bits.
    pub const fn from_parts(raw: u64, shift: i32) -> Coef {
        Coef::normalize(raw, shift)
    }

    /// True for the zero constant.
    pub const fn is_zero(self) -> bool {
        self.mantissa == 0
    }

    /// The product of two constants (preparation time).
    pub const fn mul(self, other: Coef) -> Coef {
        Coef::normalize(
            self.mantissa as u64 * other.mantissa as u64,
            self.shift + other.shift,
        )
    }

    /// The reciprocal (one 64-bit division; preparation time). `None` for zero.
    pub const fn recip(self) -> Option<Coef> {
        if self.mantissa == 0 {
            return None;
        }
        let m = self.mantissa as u64;
        let q = ((1u64 << 63) + m / 2) / m;
        Some(Coef::normalize(q, 63 - self.shift))
    }

    /// The value as `f64` (for tests and host tools).
    pub fn to_f64(self) -> f64 {
        libm::ldexp(self.mantissa as f64, -self.shift)
    }

    /// The binary exponent: the value is below `2^(32 - shift)`.
    pub const fn shift(self) -> i32 {
        self.shift
    }

    /// The normalised mantissa.
    pub const fn mantissa(self) -> u32 {
        self.mantissa
    }

    /// Applies the constant to a raw value: `x × 2^-x_frac` times the constant,
    /// returned as a raw value with `out_frac` fraction bits, rounded to
    /// nearest. The flag is true when the result did not fit and was clamped
    /// to `u64::MAX`.
    // Inlined on hosts (the simulator); device builds keep their own choice.
    #[cfg_attr(not(target_arch = "arm"), inline(always))]
    pub const fn scale(self, x: u32, x_frac: u32, out_frac: u32) -> (u64, bool) {
        let product = mul_u32(x, self.mantissa);
        shr_round(product, x_frac as i32 + self.shift - out_frac as i32)
    }
}

/// `a × b`, exact. On ARMv6-M (Cortex-M0/M0+/M1: no `UMULL`, recognised by
/// the absence of 32-bit atomics) it uses [`mul_u32_parts`], four 16×16→32
/// multiplies inline, instead of the generic 64×64 library routine; elsewhere
/// the native multiply.
#[inline]
pub const fn mul_u32(a: u32, b: u32) -> u64 {
    #[cfg(all(target_arch = "arm", not(target_has_atomic = "32")))]
    {
        mul_u32_parts(a, b)
    }
    #[cfg(not(all(target_arch = "arm", not(target_has_atomic = "32"))))]
    {
        a as u64 * b as u64
    }
}

/// `a × b` from four 16×16→32 products (the Cortex-M0 form of [`mul_u32`],
/// exposed so that hosts test it).
#[inline]
pub const fn mul_u32_parts(a: u32, b: u32) -> u64 {
    let (a0, a1) = (a & 0xFFFF, a >> 16);
    let (b0, b1) = (b & 0xFFFF, b >> 16);
    let lo = a0 * b0;
    let (mid, c1) = (a0 * b1).overflowing_add(a1 * b0);
    let (lo, c2) = lo.overflowing_add(mid << 16);
    let hi = a1 * b1 + (mid >> 16) + ((c1 as u32) << 16) + c2 as u32;
    ((hi as u64) << 32) | lo as u64
}

/// `a × b`, exact, in 128 bits. On 32-bit Arm from four [`mul_u32`]
/// products (one when both fit 32 bits): the generic 128-bit product calls
/// the 64-bit library routine several times over there. Elsewhere the
/// native multiply.
#[inline]
pub const fn mul_u64_wide(a: u64, b: u64) -> u128 {
    #[cfg(target_arch = "arm")]
    {
        mul_u64_parts(a, b)
    }
    #[cfg(not(target_arch = "arm"))]
    {
        a as u128 * b as u128
    }
}

/// The 32-bit Arm form of [`mul_u64_wide`], exposed so that hosts test it.
#[inline]
pub const fn mul_u64_parts(a: u64, b: u64) -> u128 {
    let (a0, a1) = (a as u32, (a >> 32) as u32);
    let (b0, b1) = (b as u32, (b >> 32) as u32);
    if a1 == 0 && b1 == 0 {
        return mul_u32(a0, b0) as u128;
    }
    let lo = mul_u32(a0, b0) as u128;
    let mid = mul_u32(a0, b1) as u128 + mul_u32(a1, b0) as u128;
    let hi = mul_u32(a1, b1) as u128;
    (hi << 64) + (mid << 32) + lo
}

/// `a × b` saturated at `u128::MAX`: [`mul_u64_wide`] when both fit 64
/// bits (their product cannot overflow), the checked 128-bit product
/// otherwise.
#[inline]
pub const fn saturating_mul_u128(a: u128, b: u128) -> u128 {
    if a <= u64::MAX as u128 && b <= u64::MAX as u128 {
        mul_u64_wide(a as u64, b as u64)
    } else {
        a.saturating_mul(b)
    }
}

/// `a × b` of two `i64`, exact, in 128 bits: one [`mul_u32`] when both
/// magnitudes fit 32 bits — the rate fit's residuals do — instead of the
/// 128-bit product (hundreds of instructions on a Cortex-M0); the 128-bit
/// product otherwise (it cannot overflow). Cheaper than
/// [`saturating_mul_i128`] for values known to be `i64`.
#[inline]
pub const fn mul_i64_wide(a: i64, b: i64) -> i128 {
    let (ma, mb) = (a.unsigned_abs(), b.unsigned_abs());
    if ma <= u32::MAX as u64 && mb <= u32::MAX as u64 {
        let p = mul_u32(ma as u32, mb as u32) as i128;
        if (a < 0) != (b < 0) { -p } else { p }
    } else {
        a as i128 * b as i128
    }
}

/// `a × b` saturated at the `i128` limits, as [`saturating_mul_u128`]: two
/// magnitudes below 2^63 cannot overflow.
#[inline]
pub const fn saturating_mul_i128(a: i128, b: i128) -> i128 {
    let (ma, mb) = (a.unsigned_abs(), b.unsigned_abs());
    if ma < 1 << 63 && mb < 1 << 63 {
        let p = mul_u64_wide(ma as u64, mb as u64) as i128;
        if (a < 0) != (b < 0) { -p } else { p }
    } else {
        a.saturating_mul(b)
    }
}

/// `n/d` rounded down (0 for `d` = 0), exact. On 32-bit Arm without the
/// general 128-bit routine (slow on a core without a divider): divisors
/// below 2^32 (most of the fits': n(n² − 1) and its products for windows of
/// at most 64 blocks) take 32 bits of `n` at a time, one 64/32-bit division
/// each and none for the leading zero words; larger ones go bit by bit over
/// the quotient's bits only, on 64-bit words when the quotient fits 64 bits
/// and the divisor 63. Elsewhere the native division.
pub fn div_u128(n: u128, d: u128) -> u128 {
    #[cfg(target_arch = "arm")]
    {
        div_u128_parts(n, d)
    }
    #[cfg(not(target_arch = "arm"))]
    {
        n.checked_div(d).unwrap_or(0)
    }
}

/// The 32-bit Arm form of [`div_u128`], exposed so that hosts test it.
pub fn div_u128_parts(n: u128, d: u128) -> u128 {
    if d == 0 {
        return 0;
    }
    if d > u32::MAX as u128 {
        // Larger divisors: shift and subtract over the quotient's bits
        // only (at most 96 of them, a few tens in the fits).
        if n < d {
            return 0;
        }
        let shift = d.leading_zeros() - n.leading_zeros();
        if d < 1 << 63 && shift < 64 {
            // A quotient below 2^64 and a divisor below 2^63 (the rate
            // budget's and the fit's): the remainder stays below 2d < 2^64,
            // so the same steps run on 64-bit words, the dividend's bits
            // taken from the top.
            let d = d as u64;
            // n's top bits, as many as d has (below 2d) …
            let mut r = (n >> shift) as u64;
            let mut q = u64::from(r >= d);
            if r >= d {
                r -= d;
            }
            // … then its `shift` lower bits one by one, top-aligned.
            let mut rest = if shift == 0 {
                0
            } else {
                (n as u64) << (64 - shift)
            };
            for _ in 0..shift {
                r = (r << 1) | (rest >> 63);
                rest <<= 1;
                q <<= 1;
                if r >= d {
                    r -= d;
                    q |= 1;
                }
            }
            return u128::from(q);
        }
        let (mut q, mut r, mut d) = (0u128, n, d << shift);
        for _ in 0..=shift {
            q <<= 1;
            if r >= d {
                r -= d;
                q |= 1;
            }
            d >>= 1;
        }
        return q;
    }
    let d = d as u64;
    let (mut q, mut rem) = (0u128, 0u64);
    for word in (0..4).rev() {
        let limb = (n >> (32 * word)) as u32;
        if rem == 0 && limb == 0 {
            continue;
        }
        // rem < d < 2^32: the quotient word fits 32 bits.
        let cur = (rem << 32) | u64::from(limb);
        q |= u128::from(cur / d) << (32 * word);
        rem = cur % d;
    }
    q
}

/// `c × v` for a small factor `c` (the fits' weights: |c| < 2^14), exact.
/// On ARMv6-M, when |v| < 2^32, from two 32-bit multiplies of `v`'s 16-bit
/// halves (each product below 2^30) instead of the 64×64 library routine;
/// elsewhere, and for larger values, the native product.
#[inline]
pub const fn mul_small(c: i32, v: i64) -> i64 {
    #[cfg(all(target_arch = "arm", not(target_has_atomic = "32")))]
    {
        mul_small_parts(c, v)
    }
    #[cfg(not(all(target_arch = "arm", not(target_has_atomic = "32"))))]
    {
        c as i64 * v
    }
}

/// The ARMv6-M form of [`mul_small`], exposed so that hosts test it.
#[inline]
pub const fn mul_small_parts(c: i32, v: i64) -> i64 {
    if c.unsigned_abs() < 1 << 14 && v.unsigned_abs() < 1 << 32 {
        // v = hi·2^16 + lo, |hi| ≤ 2^16, 0 ≤ lo < 2^16.
        let hi = (v >> 16) as i32;
        let lo = (v & 0xFFFF) as i32;
        (((c * hi) as i64) << 16) + (c * lo) as i64
    } else {
        c as i64 * v
    }
}

/// `a × b` for signed values whose magnitudes fit 32 bits (larger
/// magnitudes are clamped to `u32::MAX`) and whose product fits `i64`,
/// through [`mul_u32`].
#[inline]
pub const fn mul_s32(a: i64, b: i64) -> i64 {
    let (ma, mb) = (a.unsigned_abs(), b.unsigned_abs());
    let ma = if ma > u32::MAX as u64 {
        u32::MAX
    } else {
        ma as u32
    };
    let mb = if mb > u32::MAX as u64 {
        u32::MAX
    } else {
        mb as u32
    };
    let p = mul_u32(ma, mb) as i64;
    if (a < 0) != (b < 0) { -p } else { p }
}

/// `a × b` for `i32` operands, exact, through [`mul_u32`] (on a Cortex-M0 the
/// generic 64-bit multiply is a library call).
#[inline]
pub const fn mul_i32(a: i32, b: i32) -> i64 {
    let p = mul_u32(a.unsigned_abs(), b.unsigned_abs()) as i64;
    if (a < 0) != (b < 0) { -p } else { p }
}

/// `value >> s` for `s < 64` with 32-bit operations (a variable 64-bit shift
/// is a library call on a Cortex-M0).
#[inline]
const fn shr64(value: u64, s: u32) -> u64 {
    let (lo, hi) = (value as u32, (value >> 32) as u32);
    if s == 0 {
        value
    } else if s < 32 {
        (((hi >> s) as u64) << 32) | ((lo >> s) | (hi << (32 - s))) as u64
    } else {
        (hi >> (s - 32)) as u64
    }
}

/// `value >> shift` rounded to nearest for positive shifts, `value << -shift`
/// for negative ones. The flag is true when a left shift overflowed (the
/// result is then `u64::MAX`).
// Inlined on hosts (the simulator); device builds keep their own choice.
#[cfg_attr(not(target_arch = "arm"), inline(always))]
pub const fn shr_round(value: u64, shift: i32) -> (u64, bool) {
    if shift > 0 {
        if shift >= 64 {
            return (0, false);
        }
        let s = shift as u32;
        let half = shr64(value, s - 1);
        ((half >> 1) + (half & 1), false)
    } else if shift == 0 {
        (value, false)
    } else {
        let l = shift.unsigned_abs();
        if value == 0 {
            (0, false)
        } else if l >= 64 || value.leading_zeros() < l {
            (u64::MAX, true)
        } else {
            (value << l, false)
        }
    }
}

/// Signed `value >> shift` (shift ≥ 1), rounded to nearest (ties up).
pub const fn shr_round_i64(value: i64, shift: u32) -> i64 {
    (value >> shift) + ((value >> (shift - 1)) & 1)
}

/// Narrows to `u32`, clamping; the flag is true when clamped.
pub const fn sat_u32(value: u64) -> (u32, bool) {
    if value > u32::MAX as u64 {
        (u32::MAX, true)
    } else {
        (value as u32, false)
    }
}

/// Converts an `f64` to a fixed-point value by rounding to nearest.
/// Errors name `what` (a [`Quantity`](crate::Quantity) or one of its groups)
/// when the value is not finite or does not fit.
pub fn from_f64<T: FixedValue>(
    value: f64,
    what: impl Into<crate::error::Quantity>,
) -> Result<T, crate::Error> {
    use fixed::traits::Fixed;
    if !value.is_finite() {
        return Err(crate::Error::NotFinite(what.into()));
    }
    T::Repr::checked_from_num(value)
        .map(T::from_repr)
        .ok_or(crate::Error::OutOfRange(what.into()))
}

/// Exact `f64` value of a fixed-point number.
pub fn to_f64<T: FixedValue>(value: T) -> f64 {
    use fixed::traits::Fixed;
    value.repr().to_num::<f64>()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn from_f64_normalises() {
        for v in [1.0, 0.5, 3.0, 1e-9, 1e9, 8.314_462_618, 123_456.789] {
            let c = Coef::from_f64(v);
            assert!(c.mantissa() >= 1 << 31);
            assert!((c.to_f64() / v - 1.0).abs() < 2.5e-10, "{v}");
        }
        assert!(Coef::from_f64(0.0).is_zero());
        assert!(Coef::from_f64(-1.0).is_zero());
        assert!(Coef::from_f64(f64::NAN).is_zero());
    }

    proptest! {
        #[test]
        fn mul_and_recip_are_accurate(a in 1e-12f64..1e12, b in 1e-12f64..1e12) {
            let (ca, cb) = (Coef::from_f64(a), Coef::from_f64(b));
            prop_assert!((ca.mul(cb).to_f64() / (a * b) - 1.0).abs() < 1e-9);
            let r = ca.recip().unwrap();
            prop_assert!((r.to_f64() * a - 1.0).abs() < 1e-9);
        }

        #[test]
        fn scale_rounds_to_nearest(x in 0u32.., v in 1e-6f64..1e6, xf in 0u32..32, of in 0u32..40) {
            let c = Coef::from_f64(v);
            let exact = x as f64 / (1u64 << xf) as f64 * c.to_f64() * (1u64 << of) as f64;
            let (raw, sat) = c.scale(x, xf, of);
            if exact < 1.8e19 {
                prop_assert!(!sat);
                // Rounded to nearest, within the f64 noise of the check itself.
                prop_assert!((raw as f64 - exact).abs() <= 0.5 + exact * 1e-15, "{raw} {exact}");
            }
        }

        #[test]
        fn from_raw_matches(raw in 1u64.., frac in 0u32..64) {
            let c = Coef::from_raw(raw, frac);
            let v = raw as f64 / 2f64.powi(frac as i32);
            prop_assert!((c.to_f64() / v - 1.0).abs() < 2.5e-10);
        }
    }

    #[test]
    fn wide_products_of_64_bit_values_are_exact() {
        // Around the 32-bit fast path and the 64-bit limits (the fits'
        // residuals, the rate budget's factors).
        let m = i64::from(u32::MAX);
        let values = [
            0,
            1,
            -1,
            7,
            -7,
            m,
            -m,
            m + 1,
            -(m + 1),
            1 << 40,
            -(1 << 40),
            i64::MAX,
            i64::MIN + 1,
            i64::MIN,
        ];
        for &a in &values {
            for &b in &values {
                let want = i128::from(a) * i128::from(b);
                assert_eq!(mul_i64_wide(a, b), want, "{a} × {b}");
                assert_eq!(saturating_mul_i128(a.into(), b.into()), want, "{a} × {b}");
                let (ma, mb) = (a.unsigned_abs(), b.unsigned_abs());
                assert_eq!(mul_u64_parts(ma, mb), u128::from(ma) * u128::from(mb));
            }
        }
    }

    #[test]
    fn wide_divisions_are_exact() {
        // Every divisor class (below 2^32 and above), numerators of every
        // word count, against the native 128-bit division.
        let mut x = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = || {
            // xorshift64*
            x ^= x >> 12;
            x ^= x << 25;
            x ^= x >> 27;
            x.wrapping_mul(0x2545_F491_4F6C_DD1D)
        };
        let edges = [
            0u128,
            1,
            2,
            3,
            u32::MAX as u128,
            1 << 32,
            u64::MAX as u128,
            u128::MAX,
        ];
        for &n in &edges {
            for &d in &edges[1..] {
                assert_eq!(div_u128(n, d), n / d, "{n} / {d}");
                assert_eq!(div_u128_parts(n, d), n / d, "{n} / {d}");
            }
        }
        for i in 0..20_000 {
            let n = (u128::from(next()) << 64 | u128::from(next())) >> (i % 128);
            let d = (u128::from(next()) << 64 | u128::from(next())) >> (64 + i % 64);
            let d = d.max(1);
            assert_eq!(div_u128(n, d), n / d, "{n} / {d}");
            assert_eq!(div_u128_parts(n, d), n / d, "{n} / {d}");
        }
        // Divisors from 2^32 to 2^63 with quotients below 2^64 (the 64-bit
        // path), remainders anywhere below the divisor, and their edges.
        for i in 0..20_000u32 {
            let d = (u128::from(next()) >> (1 + i % 31)).max((1 << 32) + 1);
            let q = u128::from(next()) >> (i % 64);
            let n = q * d + u128::from(next()) % d;
            assert_eq!(div_u128_parts(n, d), n / d, "{n} / {d}");
        }
        for d in [(1u128 << 32) + 1, (1 << 40) - 1, (1 << 63) - 1, 1 << 63] {
            for q in [0u128, 1, 2, (1 << 63) - 1, 1 << 63, u64::MAX as u128] {
                for r in [0, 1, d - 1] {
                    let n = q * d + r;
                    assert_eq!(div_u128_parts(n, d), n / d, "{n} / {d}");
                }
            }
        }
        assert_eq!(div_u128(5, 0), 0);
        assert_eq!(div_u128_parts(5, 0), 0);
    }

    proptest! {
        #[test]
        fn wide_multiplies_are_exact(a in any::<u64>(), b in any::<u64>(), sa in 0u32..128, sb in 0u32..128, neg in any::<(bool, bool)>()) {
            prop_assert_eq!(mul_u64_wide(a, b), a as u128 * b as u128);
            prop_assert_eq!(mul_u64_parts(a, b), a as u128 * b as u128);
            // Products within i64 (the contract): |c|, |v| ≤ 2^31.
            let (c, v) = ((a as i32) >> (sa % 32), (b as i64) >> (32 + sb % 32));
            prop_assert_eq!(mul_small_parts(c, v), c as i64 * v);
            prop_assert_eq!(mul_small(c, v), c as i64 * v);
            let (x, y) = (u128::from(a) << sa.min(64) >> (sa / 2), u128::from(b) << sb.min(64) >> (sb / 2));
            prop_assert_eq!(saturating_mul_u128(x, y), x.saturating_mul(y));
            let sx = if neg.0 { -((x >> 1) as i128) } else { (x >> 1) as i128 };
            let sy = if neg.1 { -((y >> 1) as i128) } else { (y >> 1) as i128 };
            prop_assert_eq!(saturating_mul_i128(sx, sy), sx.saturating_mul(sy));
        }
    }

    proptest! {
        #[test]
        fn multiplies_are_exact(a in 0u32.., b in 0u32.., c in -(1i64 << 31)..(1i64 << 31), d in -(1i64 << 32)..(1i64 << 32)) {
            prop_assert_eq!(mul_u32_parts(a, b), a as u64 * b as u64);
            prop_assert_eq!(mul_u32(a, b), a as u64 * b as u64);
            let (mc, md) = (c.unsigned_abs().min(u32::MAX as u64) as i128, d.unsigned_abs().min(u32::MAX as u64) as i128);
            let want = mc * md * if (c < 0) != (d < 0) { -1 } else { 1 };
            prop_assert_eq!(mul_s32(c, d) as i128, want);
            let (e, f) = (c as i32, (d >> 1) as i32);
            prop_assert_eq!(mul_i32(e, f), e as i64 * f as i64);
        }

        #[test]
        fn shifts_match_native(v in 0u64.., s in 1i32..64) {
            let want = (v >> s) + ((v >> (s - 1)) & 1);
            prop_assert_eq!(shr_round(v, s), (want, false));
        }
    }

    #[test]
    fn unit_newtypes_cost_nothing_and_keep_their_bits() {
        use core::mem::{align_of, size_of};
        assert_eq!(size_of::<Mass>(), size_of::<U24F40>());
        assert_eq!(align_of::<Mass>(), align_of::<U24F40>());
        assert_eq!(size_of::<Fraction>(), size_of::<U32F32>());
        assert_eq!(size_of::<MassRate>(), size_of::<I32F32>());
        // Serialised as the number underneath: stored layouts unchanged.
        let mut a = [0u8; 16];
        let mut b = [0u8; 16];
        let m = Mass::from_bits(0x0123_4567_89AB_CDEF);
        let x = postcard::to_slice(&m, &mut a).unwrap().len();
        let y = postcard::to_slice(&m.to_fixed(), &mut b).unwrap().len();
        assert_eq!(a[..x], b[..y]);
        let r = MassRate::from_bits(-5 << 32);
        let x = postcard::to_slice(&r, &mut a).unwrap().len();
        let y = postcard::to_slice(&r.to_fixed(), &mut b).unwrap().len();
        assert_eq!(a[..x], b[..y]);
        assert_eq!(
            Fraction::ONE.saturating_add(Fraction::MAX),
            Fraction::MAX,
            "saturates"
        );
        assert_eq!(
            Volume::ZERO.saturating_sub(Volume::from_bits(1)),
            Volume::ZERO
        );
        assert_eq!(to_f64(Density::saturating_from_num(2.5)), 2.5);
    }

    #[test]
    fn shr_round_edges() {
        assert_eq!(
            mul_u32_parts(u32::MAX, u32::MAX),
            u32::MAX as u64 * u32::MAX as u64
        );
        assert_eq!(shr_round(3, 1), (2, false));
        assert_eq!(shr_round(5, 2), (1, false));
        assert_eq!(shr_round(6, 2), (2, false));
        assert_eq!(shr_round(u64::MAX, 64), (0, false));
        assert_eq!(shr_round(1, -63), (1 << 63, false));
        assert_eq!(shr_round(2, -63), (u64::MAX, true));
        assert_eq!(shr_round(0, -100), (0, false));
        assert_eq!(shr_round_i64(-3, 1), -1);
        assert_eq!(shr_round_i64(-5, 1), -2);
        assert_eq!(sat_u32(1 << 40), (u32::MAX, true));
    }
}
