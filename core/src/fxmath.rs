//! Elementary functions in fixed point, without floats and without divisions:
//! natural logarithm, reciprocal and square root.
//!
//! All three work on a value `x·2^-frac` given as a raw integer and its
//! fraction bits, normalise it with a leading-zero count, and then spend only
//! 32×32→64 multiplies, shifts and adds:
//!
//! | function | method | multiplies | worst error (tested) |
//! |---|---|---|---|
//! | [`ln`] | 64-entry table of reciprocals `c_j ≈ 1/(1 + (j+½)/64)` with their logarithms, then `ln(1+r)` for `|r| < 2^-7` by a 4-term series, plus `k·ln 2` | 6 | 1.0e-9 absolute |
//! | [`recip`] | 33-entry table of `1/d`, linear interpolation, 2 Newton steps `r ← r(2 − d·r)` | 5 | 2e-9 relative |
//! | [`sqrt`] | 49-entry table of `1/√d`, linear interpolation, 2 Newton steps `y ← y(3 − d·y²)/2`, then `√d = d·y` | 8 | 2e-9 relative |
//!
//! The tables are computed at compile time from `f64` (const evaluation only,
//! nothing of it runs on a device). On a Cortex-M0 a 32×32→64 multiply is
//! four 16-bit `muls` and carries ([`fx::mul_u32`](crate::fx::mul_u32), about
//! 20 instructions); a 64-bit division costs hundreds, which is why none is
//! used. Measured on a Cortex-M0 (QEMU): `ln` 379, `recip` 504, `sqrt` 498
//! instructions per call (`isochor budget`, its `sensor` stage; per-call figures in docs/measured.md).

use crate::fx::{Coef, mul_s32, mul_u32};

/// ln 2 at 2^-48 (so that k·ln 2 stays exact to a Q32 bit for any exponent).
const LN2_Q48: i64 = 195_103_586_505_167;
/// Index bits of the logarithm table.
const LN_BITS: u32 = 6;
/// Entries of the logarithm table.
const LN_N: usize = 1 << LN_BITS;

/// `ln(y)` in `f64` for `y` in `[1, 2]`, for compile-time tables: the series
/// `2·atanh(z)`, `z = (y − 1)/(y + 1) ≤ 1/3`, to full `f64` precision.
const fn ln_f64(y: f64) -> f64 {
    let z = (y - 1.0) / (y + 1.0);
    let z2 = z * z;
    let mut term = z;
    let mut sum = 0.0;
    let mut k = 0;
    while k < 40 {
        sum += term / (2 * k + 1) as f64;
        term *= z2;
        k += 1;
    }
    2.0 * sum
}

/// `√y` in `f64` for compile-time tables (Newton from `y`, `y` in `[0.25, 1]`).
const fn sqrt_f64(y: f64) -> f64 {
    let mut s = 1.0;
    let mut k = 0;
    while k < 30 {
        s = 0.5 * (s + y / s);
        k += 1;
    }
    s
}

/// `c_j = round(2^32 / (1 + (j + ½)/64))`: multiplying a mantissa of the
/// `j`-th interval by `c_j` lands within 2^-7 of one.
// Const evaluation: an index out of bounds fails the build, never a device.
#[allow(clippy::indexing_slicing)]
const LN_RECIP: [u32; LN_N] = {
    let mut t = [0u32; LN_N];
    let mut j = 0;
    while j < LN_N {
        let mid = 1.0 + (j as f64 + 0.5) / LN_N as f64;
        t[j] = (4_294_967_296.0 / mid + 0.5) as u32;
        j += 1;
    }
    t
};

/// `−ln(c_j·2^-32)` in Q32, from the rounded `c_j` (so the table is exact to
/// the last bit for the multiplier actually used).
// Const evaluation: an index out of bounds fails the build, never a device.
#[allow(clippy::indexing_slicing)]
const LN_NEG: [u32; LN_N] = {
    let mut t = [0u32; LN_N];
    let mut j = 0;
    while j < LN_N {
        let c = LN_RECIP[j] as f64 / 4_294_967_296.0;
        t[j] = (ln_f64(1.0 / c) * 4_294_967_296.0 + 0.5) as u32;
        j += 1;
    }
    t
};

/// Natural logarithm of `x·2^-frac` in Q32 (`ln·2^32` as `i64`); `None` for
/// `x = 0`. Error ≤ 1.0e-9 for any input (the input is first rounded to 32
/// significant bits, relative 2^-32).
pub fn ln(x: u64, frac: u32) -> Option<i64> {
    if x == 0 {
        return None;
    }
    let (top, lz, round) = normalize(x);
    // Mantissa in [2^31, 2^32): value m·2^-31 in [1, 2); rounded to 32 bits.
    let (m, carry) = match top.checked_add(round) {
        Some(m) => (m, 0),
        None => (1 << 31, 1),
    };
    // x·2^-frac = (m·2^-31)·2^k.
    let k = 63 - lz as i64 - frac as i64 + carry;
    let j = ((m >> (31 - LN_BITS)) as usize) & (LN_N - 1);
    let c = LN_RECIP.get(j).copied().unwrap_or(1 << 31);
    let neg = LN_NEG.get(j).copied().unwrap_or(0);
    // m·c at 2^-63 lies within 2^-7 of one: r = m·c − 1 at 2^-37.
    let prod = mul_u32(m, c);
    let r = (prod.wrapping_sub(1 << 63) as i64) >> 26;
    // ln(1 + r) = r·(1 − r·(1/2 − r·(1/3 − r/4))); factors at 2^-31.
    const THIRD: i64 = 715_827_883;
    const HALF: i64 = 1 << 30;
    const ONE: i64 = 1 << 31;
    let t3 = THIRD - (r >> 8);
    let t2 = HALF - (mul_s32(r, t3) >> 37);
    let t1 = ONE - (mul_s32(r, t2) >> 37);
    // r·t1 at 2^-68 → Q32 (rounded).
    let ln1p = (mul_s32(r, t1) + (1 << 35)) >> 36;
    // k·ln 2 at 2^-48 → Q32, with ln 2 split in 32 + 16 bits (32-bit multiplies).
    let k_ln2 = mul_s32(k, LN2_Q48 >> 16) + ((mul_s32(k, LN2_Q48 & 0xFFFF) + (1 << 15)) >> 16);
    Some(k_ln2 + neg as i64 + ln1p)
}

/// `1/(x·2^-frac)` as a [`Coef`] (relative error ≤ 2e-9), without division;
/// `None` for `x = 0`.
pub fn recip(x: u64, frac: u32) -> Option<Coef> {
    if x == 0 {
        return None;
    }
    // d = m·2^-32 in [0.5, 1): x·2^-frac = d·2^e with e = 64 − lz − frac.
    let (m, lz, _) = normalize(x);
    let e = 64 - lz as i32 - frac as i32;
    let r = recip_unit(m);
    // 1/x = (1/d)·2^-e; r is 1/d at 2^-30.
    Some(Coef::from_parts(r as u64, 30 + e))
}

/// Index bits of the reciprocal seed table (32 intervals over `[0.5, 1)`).
const RECIP_BITS: u32 = 5;
/// `1/d` at the interval ends `d = 1/2 + j/64` (`j` = 0 … 32), at 2^-30.
// Const evaluation: an index out of bounds fails the build, never a device.
#[allow(clippy::indexing_slicing)]
const RECIP_SEED: [u32; 33] = {
    let mut t = [0u32; 33];
    let mut j = 0;
    while j <= 32 {
        let d = 0.5 + j as f64 / 64.0;
        t[j] = (1_073_741_824.0 / d + 0.5) as u32;
        j += 1;
    }
    t
};

/// The seed of [`recip_unit`] alone: `2^62 / m` within 4.9e-4 (relative), for
/// callers that only scale a small correction with it.
pub(crate) fn recip_seed(m: u32) -> u32 {
    let j = ((m >> (31 - RECIP_BITS)) as usize) & ((1 << RECIP_BITS) - 1);
    let y0 = RECIP_SEED.get(j).copied().unwrap_or(1 << 31);
    let y1 = RECIP_SEED.get(j + 1).copied().unwrap_or(1 << 30);
    // Position in the interval, Q16; y0 − y1 < 2^26, so (y0 − y1)/2^10 < 2^16
    // and its product with the position fits 32 bits.
    let f = (m >> (15 - RECIP_BITS)) & 0xFFFF;
    y0 - ((((y0 - y1) >> 10) * f) >> 6)
}

/// `2^62 / m` for `m` in `[2^31, 2^32)`, i.e. `1/d` at 2^-30 for `d = m·2^-32`:
/// a table seed interpolated linearly (relative error ≤ 4.9e-4), then two
/// Newton steps `r ← r(2 − d·r)` (≤ 2.4e-7, then the arithmetic's 2^-30).
pub(crate) fn recip_unit(m: u32) -> u32 {
    let mut r = recip_seed(m) as i64;
    for _ in 0..2 {
        // e = 1 − d·r at 2^-62 (|e| < 2^52), then r += r·e.
        let e = (1i64 << 62) - mul_u32(m, r as u32) as i64;
        r += mul_s32(r, e >> 31) >> 31;
    }
    r.clamp(1 << 30, 1 << 31) as u32
}

/// First index bits of the square-root seed table (`d` in `[0.25, 1)` at
/// 2^-32 has its top two bits not both zero; six bits give 48 intervals).
const SQRT_BITS: u32 = 6;
/// `1/√d` at the interval ends `d = j/64` (`j` = 16 … 64), at 2^-30.
// Const evaluation: an index out of bounds fails the build, never a device.
#[allow(clippy::indexing_slicing)]
const RSQRT_SEED: [u32; 65] = {
    let mut t = [0u32; 65];
    let mut j = 16;
    while j <= 64 {
        let at = j as f64 / 64.0;
        t[j] = (1_073_741_824.0 / sqrt_f64(at) + 0.5) as u32;
        j += 1;
    }
    t
};

/// The top 32 bits of `x > 0` with the leading one at bit 31, the number of
/// leading zeros of `x` (as `u64`), and the next bit below (for rounding).
/// 32-bit operations only; inputs below 2^32 take the short way.
#[inline]
fn normalize(x: u64) -> (u32, u32, u32) {
    let (hi, lo) = ((x >> 32) as u32, x as u32);
    if hi == 0 {
        let z = lo.leading_zeros();
        (lo << z, 32 + z, 0)
    } else {
        let z = hi.leading_zeros();
        if z == 0 {
            (hi, 0, lo >> 31)
        } else {
            ((hi << z) | (lo >> (32 - z)), z, (lo >> (31 - z)) & 1)
        }
    }
}

/// `√(x·2^-frac)` as a [`Coef`] (relative error ≤ 2e-9), without division;
/// zero for `x = 0`.
pub fn sqrt(x: u64, frac: u32) -> Coef {
    if x == 0 {
        return Coef::ZERO;
    }
    // x·2^-frac = (top·2^-32)·2^e, e = 64 − lz − frac; make e even.
    let (mut d, lz, _) = normalize(x);
    let mut e = 64 - lz as i32 - frac as i32;
    if e & 1 != 0 {
        d >>= 1;
        e += 1;
    }
    // d in [0.25, 1) at 2^-32: seed by linear interpolation in the table
    // (relative error ≤ 4e-4), then two Newton steps (≤ 1e-13, below the
    // arithmetic's 2^-30).
    let j = ((d >> (32 - SQRT_BITS)) as usize) & 63;
    let y0 = RSQRT_SEED.get(j).copied().unwrap_or(1 << 30);
    let y1 = RSQRT_SEED.get(j + 1).copied().unwrap_or(1 << 30);
    let f = d << SQRT_BITS;
    let mut y = (y0 - (mul_u32(y0 - y1, f) >> 32) as u32) as u64;
    for _ in 0..2 {
        // y ← y·(3 − d·y²)/2, y at 2^-30 (1 < y ≤ 2).
        let y2 = mul_u32(y as u32, y as u32) >> 30; // at 2^-30, ≤ 4
        let dy2 = mul_u32(d, y2.min(u32::MAX as u64) as u32) >> 32; // at 2^-30, ≈ 1
        let f = (3i64 << 30) - dy2 as i64; // at 2^-30, ≈ 2
        y = (mul_s32(y as i64, f) >> 31) as u64;
    }
    // √d = d·y at 2^-62; √x = √d·2^(e/2).
    Coef::from_parts(mul_u32(d, y as u32), 62 - e / 2)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn ln_f(x: u64, frac: u32) -> f64 {
        ln(x, frac).unwrap() as f64 / 4_294_967_296.0
    }

    #[test]
    fn ln_of_every_16_bit_integer() {
        // Reference: libm::log (f64), the crate's float path.
        let mut worst = 0f64;
        for x in 1u64..=65_535 {
            let e = (ln_f(x, 0) - libm::log(x as f64)).abs();
            worst = worst.max(e);
        }
        assert!(worst < 1.0e-9, "worst {worst:e}");
        assert_eq!(ln(1, 0), Some(0));
        assert_eq!(ln(0, 0), None);
    }

    #[test]
    fn tables_are_consistent() {
        for j in 0..LN_N {
            let c = LN_RECIP[j] as f64 / 4_294_967_296.0;
            let want = -libm::log(c);
            assert!((LN_NEG[j] as f64 / 4_294_967_296.0 - want).abs() < 3e-10);
        }
        assert!((LN2_Q48 as f64 / 2f64.powi(48) - core::f64::consts::LN_2).abs() < 3e-15);
    }

    proptest! {
        #[test]
        fn ln_any(x in 1u64.., frac in 0u32..64) {
            let want = libm::log(x as f64) - frac as f64 * core::f64::consts::LN_2;
            prop_assert!((ln_f(x, frac) - want).abs() < 1.0e-9);
        }

        #[test]
        fn recip_any(x in 1u64.., frac in 0u32..64) {
            let v = x as f64 / 2f64.powi(frac as i32);
            let r = recip(x, frac).unwrap().to_f64();
            prop_assert!((r * v - 1.0).abs() < 2e-9, "{} {}", r, v);
        }

        #[test]
        fn sqrt_any(x in 1u64.., frac in 0u32..64) {
            let v = x as f64 / 2f64.powi(frac as i32);
            let s = sqrt(x, frac).to_f64();
            prop_assert!((s / libm::sqrt(v) - 1.0).abs() < 2e-9, "{} {}", s, v);
        }
    }

    #[test]
    fn recip_unit_over_its_interval() {
        // 2^20 + 1 points over [0.5, 1), both ends included: relative error
        // against f64 division below 2e-9 (the format's step is 2^-30).
        let mut worst = 0f64;
        for i in 0..=(1u64 << 20) {
            let m = ((1u64 << 31) + (i << 11)).min(u32::MAX as u64) as u32;
            let want = 2f64.powi(62) / m as f64;
            let e = (recip_unit(m) as f64 / want - 1.0).abs();
            worst = worst.max(e);
        }
        assert!(worst < 2e-9, "worst {worst:e}");
    }

    #[test]
    fn recip_and_sqrt_edges() {
        assert_eq!(recip(0, 0), None);
        assert!(sqrt(0, 0).is_zero());
        assert!((recip(1, 0).unwrap().to_f64() - 1.0).abs() < 2e-9);
        assert!((recip(u64::MAX, 0).unwrap().to_f64() * u64::MAX as f64 - 1.0).abs() < 2e-9);
        assert!((sqrt(4, 0).to_f64() - 2.0).abs() < 4e-9);
        assert!((sqrt(1, 0).to_f64() - 1.0).abs() < 2e-9);
        assert!((sqrt(u64::MAX, 0).to_f64() / 4_294_967_296.0 - 1.0).abs() < 2e-9);
    }
}
