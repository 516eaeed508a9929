//! Evaluation of a device table in fixed point (the device path).
//!
//! Same steps and names as [`super::float`]: `clamp_axis`, `boundary`,
//! `Axis::locate` (span and position u in it), `Span::basis` (de Boor's
//! recursion: the four cubic B-spline weights and their slopes), `rows`
//! (contraction along pressure), `contract` (along temperature), `outputs`.
//!
//! Every multiply has operands of at most 16 bits on one side and fits 32 bits
//! (one `MULS` on a Cortex-M0); 32-bit × 16-bit products are split in two.
//! Weights are Q16 (`u32`, sum exactly 2^16); slopes of the weights Q13.
//! Bounds are given beside each step; tests run with overflow checks.

use super::{MAX_SPANS, Table};
use crate::error::ModelDefect;
use crate::model::{IsothermFx, ZPointFx};
use crate::{Error, Gas, Status, fx};

/// Raw temperature bits per kelvin.
pub const T_RAW_PER_UNIT: u64 = 65_536;
/// Raw pressure bits per MPa.
pub const P_RAW_PER_UNIT: u64 = 16_000_000;
/// 1.0 in Q16.
const ONE: u32 = 1 << 16;

/// One span [t_k, t_k+1) of an axis with its prepared constants.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Span {
    /// t_k, raw bits.
    start: u32,
    /// 2^31 / (h >> shift), rounded: u = ((x − t_k) >> shift)·inv >> 15.
    inv: u32,
    /// Level-2 fractions (x − t_j)/(t_j+2 − t_j) = a0 + a1·u for j = k−1, k.
    level2: [Frac; 2],
    /// Level-3 fractions for j = k−2, k−1, k.
    level3: [Frac; 3],
    /// du per axis unit (K or MPa) as mantissa in [2^15, 2^16) × 2^-exp.
    du_mantissa: u16,
    /// See `du_mantissa`.
    du_exp: i8,
    /// Right shift bringing offsets into the span below 2^16.
    shift: u8,
}

/// A fraction a0 + a1·u of a span: a0 in Q16 (below one), a1 − 2^-16 in Q16
/// (0 < a1 ≤ 1, so it fits 16 bits exactly).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
struct Frac {
    a0: u16,
    a1_less_ulp: u16,
}

impl Frac {
    fn new(a0: u32, a1: u32) -> Frac {
        Frac {
            a0: a0.min(ONE - 1) as u16,
            a1_less_ulp: a1.clamp(1, ONE).wrapping_sub(1) as u16,
        }
    }
    fn a0(self) -> u32 {
        self.a0 as u32
    }
    fn a1(self) -> u32 {
        self.a1_less_ulp as u32 + 1
    }
}

/// One axis of a model: the spans its latest two values fell in, prepared
/// (a value in either span again costs a few comparisons; another span
/// costs its preparation, a few divisions, in place of the span used less
/// recently). Two spans serve the sample's own state and a solve at
/// another (the rated content's pressure at each block close) without
/// preparing either again; keeping two spans per axis instead of all of
/// them keeps a prepared model within about a hundred bytes of RAM.
#[derive(Clone, Debug, Default)]
pub struct Axis {
    /// Raw bits per unit of the slopes (K or MPa).
    raw_per_unit: u64,
    /// The spans in use, index and constants: the one the latest value
    /// fell in first.
    cached: [core::cell::Cell<Option<(u8, Span)>>; 2],
}

/// Q16 of `num/den` (both positive, num ≤ den), rounded, at most one.
fn q16(num: u64, den: u64) -> u32 {
    if den == 0 {
        return 0;
    }
    let v = ((num << 16) + den / 2) / den;
    v.min(ONE as u64) as u32
}

/// Prepares span `k` of strictly increasing `knots` (clamped cubic
/// B-spline: the end knots count three times). `raw_per_unit` converts raw
/// bits to the unit of the slopes (K or MPa).
fn prepare_span(knots: &[u32], k: usize, raw_per_unit: u64) -> Result<Span, Error> {
    let n = knots.len().saturating_sub(1);
    if k >= n {
        return Err(Error::ModelData(ModelDefect::Knots));
    }
    let ext = |i: isize| -> u64 {
        let j = i.max(0).min(n as isize) as usize;
        knots.get(j).copied().unwrap_or(0) as u64
    };
    let k = k as isize;
    let (tk, h) = (ext(k), ext(k + 1).saturating_sub(ext(k)));
    if h == 0 {
        return Err(Error::ModelData(ModelDefect::Knots));
    }
    let mut shift = 0u32;
    while (h >> shift) >= 1 << 16 {
        shift += 1;
    }
    let hs = h >> shift;
    // Rounded: hs·inv ≤ 2^31 + hs/2, so d·inv below still fits 32 bits.
    let inv = ((1u64 << 31) + hs / 2)
        .checked_div(hs)
        .ok_or(Error::ModelData(ModelDefect::Knots))? as u32;
    let frac = |j: isize, d: isize| {
        let den = ext(j + d).saturating_sub(ext(j));
        Frac::new(q16(tk.saturating_sub(ext(j)), den), q16(h, den))
    };
    // u = Δraw·inv·2^-(31+shift): du/dunit = inv·raw_per_unit·2^-(31+shift),
    // normalised to a 16-bit mantissa (integers only). inv < 2^32 and
    // raw_per_unit < 2^24: the product fits.
    let mut m = inv as u64 * raw_per_unit;
    let mut du_exp = 31 + shift as i32;
    if m == 0 {
        return Err(Error::ModelData(ModelDefect::Knots));
    }
    while m >= 1 << 16 {
        m = (m + 1) >> 1;
        du_exp -= 1;
    }
    while m < 1 << 15 {
        m <<= 1;
        du_exp += 1;
    }
    let du_exp = i8::try_from(du_exp).map_err(|_| Error::ModelData(ModelDefect::Knots))?;
    Ok(Span {
        start: tk as u32,
        shift: shift as u8,
        inv,
        level2: [frac(k - 1, 2), frac(k, 2)],
        level3: [frac(k - 2, 3), frac(k - 1, 3), frac(k, 3)],
        du_mantissa: m.min(ONE as u64 - 1) as u16,
        du_exp,
    })
}

impl Axis {
    /// An axis over strictly increasing `knots`; `raw_per_unit` converts raw
    /// bits to the unit of the slopes (K or MPa). Checks that every span
    /// prepares (on a device this runs once per configuration).
    pub fn prepare(knots: &[u32], raw_per_unit: u64) -> Result<Axis, Error> {
        let n = knots.len().saturating_sub(1);
        if n == 0 || n > MAX_SPANS {
            return Err(Error::ModelData(ModelDefect::Knots));
        }
        for k in 0..n {
            prepare_span(knots, k, raw_per_unit)?;
        }
        Ok(Axis {
            raw_per_unit,
            cached: Default::default(),
        })
    }

    /// The span holding `x` (clamped to the axis) and its index, with u in
    /// Q16 (0 ≤ u ≤ 2^16).
    // Inlined into its callers on hosts (the simulator); device builds keep
    // their own choice (code size and stack).
    #[cfg_attr(not(target_arch = "arm"), inline(always))]
    fn locate(&self, knots: &[u32], x: u32) -> (usize, Span, u32) {
        let last = knots.len().saturating_sub(2);
        let holds = |k: u8, s: &Span| {
            x >= s.start
                && (k as usize >= last || knots.get(k as usize + 1).is_some_and(|&e| x < e))
        };
        let [recent, other] = &self.cached;
        let (k, span) = match recent.get() {
            Some((k, s)) if holds(k, &s) => (k as usize, s),
            _ => match other.get() {
                // The other span: it becomes the recent one.
                Some((k, s)) if holds(k, &s) => {
                    recent.swap(other);
                    (k as usize, s)
                }
                _ => {
                    let k = knots
                        .partition_point(|&t| t <= x)
                        .saturating_sub(1)
                        .min(last);
                    match prepare_span(knots, k, self.raw_per_unit) {
                        Ok(s) => {
                            // In place of the span used less recently.
                            other.set(recent.replace(Some((k as u8, s))));
                            (k, s)
                        }
                        Err(_) => return (0, DEFAULT_SPAN, 0),
                    }
                }
            },
        };
        let h = knots.get(k + 1).copied().unwrap_or(span.start) - span.start;
        let hs = h >> span.shift;
        let half = (1u32 << span.shift) >> 1;
        let d = (x.saturating_sub(span.start).saturating_add(half) >> span.shift).min(hs);
        // d ≤ hs and hs·inv ≤ 2^31: the product fits, u ≤ 2^16.
        (k, span, ((d * span.inv + (1 << 14)) >> 15).min(ONE))
    }
}

/// Both axes of a model (see [`Axis`]).
#[derive(Clone, Debug, Default)]
pub struct Axes {
    /// Temperature.
    pub t: Axis,
    /// Pressure.
    pub p: Axis,
}

impl Axes {
    /// The axes of a (validated) table.
    pub fn prepare(table: &Table<'_>) -> Result<Axes, Error> {
        Ok(Axes {
            t: Axis::prepare(table.temperature_knots, T_RAW_PER_UNIT)?,
            p: Axis::prepare(table.pressure_knots, P_RAW_PER_UNIT)?,
        })
    }
}

static DEFAULT_SPAN: Span = Span {
    start: 0,
    inv: 0,
    level2: [Frac {
        a0: 0,
        a1_less_ulp: 0,
    }; 2],
    level3: [Frac {
        a0: 0,
        a1_less_ulp: 0,
    }; 3],
    du_mantissa: 0,
    du_exp: 0,
    shift: 0,
};

/// a0 + a1·u in Q16, at most one.
fn fraction(f: Frac, u: u32) -> u32 {
    (f.a0() + mul16(f.a1(), u)).min(ONE)
}

/// `a·b / 2^16` rounded, for a, b ≤ 2^16 (when a < 2^16, a·b + 2^15 < 2^32).
fn mul16(a: u32, b: u32) -> u32 {
    if a >= ONE {
        b
    } else {
        (a * b + (1 << 15)) >> 16
    }
}

impl Span {
    /// The four weights (Q16, summing to exactly 2^16) of the basis functions
    /// k−3 … k at position u (the first half of [`Span::basis`]).
    #[cfg_attr(not(target_arch = "arm"), inline(always))]
    fn weights(&self, u: u32) -> [u32; 4] {
        let v = ONE - u;
        let fa = fraction(self.level2[0], u);
        let fb = fraction(self.level2[1], u);
        let (va, ub) = (mul16(v, fa), mul16(u, fb));
        let n2 = [v - va, va + (u - ub), ub];
        let g = [
            fraction(self.level3[0], u),
            fraction(self.level3[1], u),
            fraction(self.level3[2], u),
        ];
        let p = [mul16(n2[0], g[0]), mul16(n2[1], g[1]), mul16(n2[2], g[2])];
        [n2[0] - p[0], p[0] + n2[1] - p[1], p[1] + n2[2] - p[2], p[2]]
    }

    /// The four weights (Q16, summing to exactly 2^16) of the basis functions
    /// k−3 … k at position u, and their slopes per unit u (Q13).
    // Inlined into its callers on hosts (the simulator); device builds keep
    // their own choice (code size and stack).
    #[cfg_attr(not(target_arch = "arm"), inline(always))]
    fn basis(&self, u: u32) -> ([u32; 4], [i32; 4]) {
        let v = ONE - u;
        // Degree 2: N(k−2), N(k−1), N(k); each ≤ 2^16, sum = 2^16.
        let fa = fraction(self.level2[0], u);
        let fb = fraction(self.level2[1], u);
        let (va, ub) = (mul16(v, fa), mul16(u, fb));
        let n2 = [v - va, va + (u - ub), ub];
        // Degree 3.
        let g = [
            fraction(self.level3[0], u),
            fraction(self.level3[1], u),
            fraction(self.level3[2], u),
        ];
        let p = [mul16(n2[0], g[0]), mul16(n2[1], g[1]), mul16(n2[2], g[2])];
        let w = [n2[0] - p[0], p[0] + n2[1] - p[1], p[1] + n2[2] - p[2], p[2]];
        // dN/du = 3·[−q0, q0 − q1, q1 − q2, q2], q_j = N2_j·a1_j (Q16 → Q13).
        let q = [
            (mul16(n2[0], self.level3[0].a1()) >> 3) as i32,
            (mul16(n2[1], self.level3[1].a1()) >> 3) as i32,
            (mul16(n2[2], self.level3[2].a1()) >> 3) as i32,
        ];
        let dw = [-3 * q[0], 3 * (q[0] - q[1]), 3 * (q[1] - q[2]), 3 * q[2]];
        (w, dw)
    }
}

/// `a·m / 2^16` for a `u32` and m ≤ 2^16 (two 16-bit multiplies).
fn mul_u32_q16(a: u32, m: u32) -> u32 {
    (a >> 16) * m + (((a & 0xFFFF) * m) >> 16)
}

/// `a·m / 2^16` for |a| < 2^30 and 0 ≤ m ≤ 2^16 (two 16-bit multiplies).
fn mul_i32_uq16(a: i32, m: u32) -> i32 {
    (a >> 16) * m as i32 + (((a & 0xFFFF) as u32 * m) >> 16) as i32
}

/// `a·m / 2^16` for |a| < 2^30 and |m| ≤ 24 576 (two 16-bit multiplies).
fn mul_i32_sq16(a: i32, m: i32) -> i32 {
    (a >> 16) * m + (((a & 0xFFFF) * m) >> 16)
}

/// `a·m` as `i64` for |a| < 2^31 and 0 ≤ m < 2^16 (two 16-bit multiplies).
fn mul_i32_u16_wide(a: i32, m: u32) -> i64 {
    // |a >> 16| < 2^15 and m < 2^16: the high product fits i32; the low one
    // fits u32.
    ((((a >> 16) * m as i32) as i64) << 16) + ((a & 0xFFFF) as u32 * m) as i64
}

/// Clamps `x` to `[lo, hi]`; the flag says it clamped.
fn clamp_axis(x: u32, lo: u32, hi: u32) -> (u32, bool) {
    if x < lo {
        (lo, true)
    } else if x > hi {
        (hi, true)
    } else {
        (x, false)
    }
}

/// Σ w_a·c_a for a boundary curve (raw pressure bits).
fn curve(c: &[u32], row: usize, w: &[u32; 4]) -> u32 {
    let mut acc = 0u32;
    if let Some([c0, c1, c2, c3]) = c.get(row..row + 4) {
        // Σw = 2^16: the sum never exceeds the largest coefficient.
        acc = mul_u32_q16(*c0, w[0])
            + mul_u32_q16(*c1, w[1])
            + mul_u32_q16(*c2, w[2])
            + mul_u32_q16(*c3, w[3]);
    }
    acc
}

/// The flag of a pressure `p` above the saturation pressure `p_sat` (raw
/// bits): [`Status::LIQUID_FULL`] more than 1/8 above it, else
/// [`Status::TWO_PHASE`] (see [`super::LIQUID_FULL_MARGIN`]); a mixture's
/// table (whose curve is the dew line, not a vapour pressure) raises
/// [`Status::CONDENSATION_RISK`] alone ([`Gas::phase_flag`]).
fn liquid_phase(gas: Gas, p: u32, p_sat: u32) -> Status {
    if gas.mixture().is_some() {
        gas.phase_flag()
    } else if p > p_sat.saturating_add(p_sat >> 3) {
        Status::LIQUID_FULL
    } else {
        Status::TWO_PHASE
    }
}

/// Evaluates a table at raw pressure and temperature bits: Z and its slopes.
pub fn evaluate(tab: &Table<'_>, m: &Axes, p: u32, t: u32) -> ZPointFx {
    let mut flags = Status::OK;
    let (tk, pk) = (tab.temperature_knots, tab.pressure_knots);

    // Temperature axis.
    let t_hi = tk.last().copied().unwrap_or(0);
    let (t, out_t) = clamp_axis(t, tk.first().copied().unwrap_or(0), t_hi);
    let (it, st, ut) = m.t.locate(tk, t);
    let (wt, dwt) = st.basis(ut);

    // Boundary of liquefiable gases, then the table's pressure range.
    let mut p = p;
    let mut out_p = false;
    if let Some(b) = &tab.boundary {
        let p_sat = curve(b.saturation_pressure, it, &wt);
        let p_lim = curve(b.limit_pressure, it, &wt);
        if t < b.critical_temperature && p > p_sat {
            flags |= liquid_phase(tab.gas, p, p_sat);
            p = p_sat;
        } else if p > p_lim {
            out_p = true;
            p = p_lim;
        }
    }
    let (p, clamped) = clamp_axis(p, 0, pk.last().copied().unwrap_or(0));
    if out_t || out_p || clamped {
        flags |= Status::MODEL_OUT_OF_RANGE;
    }
    let (ip, sp, up) = m.p.locate(pk, p);
    let (wp, dwp) = sp.basis(up);

    // Rows: along pressure, for the four temperature basis functions.
    let cols = tab.columns();
    let mut r = [0u32; 4];
    let mut d = [0i32; 4];
    for (a, (ra, da)) in r.iter_mut().zip(d.iter_mut()).enumerate() {
        let start = (it + a) * cols + ip;
        if let Some([q0, q1, q2, q3]) = tab.coefs.get(start..start + 4) {
            let q = [*q0 as u32, *q1 as u32, *q2 as u32, *q3 as u32];
            // Σw = 2^16 and q < 2^16: r < 2^32.
            *ra = wp[0] * q[0] + wp[1] * q[1] + wp[2] * q[2] + wp[3] * q[3];
            // Σdw = 0, so Σdw·q = Σdw·(q − q0); |dw| < 2^15, |Δq| < 2^16, and
            // Σ|dw| ≤ 6·2^13 bounds the sum below 2^32: kept /4 in i32.
            let dq = |x: u32| x as i32 - q[0] as i32;
            let s = (dwp[1] * dq(q[1])) as i64
                + (dwp[2] * dq(q[2])) as i64
                + (dwp[3] * dq(q[3])) as i64;
            *da = (s >> 2) as i32;
        }
    }

    // Contraction along temperature.
    let z_acc = mul_u32_q16(r[0], wt[0])
        + mul_u32_q16(r[1], wt[1])
        + mul_u32_q16(r[2], wt[2])
        + mul_u32_q16(r[3], wt[3]);
    let zp_acc: i32 = d.iter().zip(wt).map(|(&da, w)| mul_i32_uq16(da, w)).sum();
    // ∂/∂T: Σ dwt·r = Σ dwt·(r − r0); r/4 < 2^30.
    let r0 = (r[0] >> 2) as i32;
    let zt_acc: i32 = r
        .iter()
        .zip(dwt)
        .skip(1)
        .map(|(&ra, w)| mul_i32_sq16((ra >> 2) as i32 - r0, w))
        .sum();

    outputs(tab, z_acc, zp_acc, zt_acc, &sp, &st, flags)
}

/// Z alone (the per-sample call: no slopes), raw `Compressibility` bits, and
/// the flags. The same steps as [`evaluate`] without the slopes.
pub fn evaluate_z(tab: &Table<'_>, m: &Axes, p: u32, t: u32) -> (u32, Status) {
    let mut flags = Status::OK;
    let (tk, pk) = (tab.temperature_knots, tab.pressure_knots);
    let t_hi = tk.last().copied().unwrap_or(0);
    let (t, out_t) = clamp_axis(t, tk.first().copied().unwrap_or(0), t_hi);
    let (it, st, ut) = m.t.locate(tk, t);
    let wt = st.weights(ut);
    let mut p = p;
    let mut out_p = false;
    if let Some(b) = &tab.boundary {
        let p_sat = curve(b.saturation_pressure, it, &wt);
        let p_lim = curve(b.limit_pressure, it, &wt);
        if t < b.critical_temperature && p > p_sat {
            flags |= liquid_phase(tab.gas, p, p_sat);
            p = p_sat;
        } else if p > p_lim {
            out_p = true;
            p = p_lim;
        }
    }
    let (p, clamped) = clamp_axis(p, 0, pk.last().copied().unwrap_or(0));
    if out_t || out_p || clamped {
        flags |= Status::MODEL_OUT_OF_RANGE;
    }
    let (ip, sp, up) = m.p.locate(pk, p);
    let wp = sp.weights(up);
    let cols = tab.columns();
    let mut z_acc = 0u32;
    for (a, w) in wt.iter().enumerate() {
        let start = (it + a) * cols + ip;
        if let Some([q0, q1, q2, q3]) = tab.coefs.get(start..start + 4) {
            // Σw = 2^16 and q < 2^16: r < 2^32.
            let r =
                wp[0] * *q0 as u32 + wp[1] * *q1 as u32 + wp[2] * *q2 as u32 + wp[3] * *q3 as u32;
            z_acc += mul_u32_q16(r, *w);
        }
    }
    (z_value(tab, z_acc), flags)
}

/// Converts the accumulators to the model answer.
#[allow(clippy::too_many_arguments)]
fn outputs(
    tab: &Table<'_>,
    z_acc: u32,
    zp_acc: i32,
    zt_acc: i32,
    sp: &Span,
    st: &Span,
    flags: Status,
) -> ZPointFx {
    let e = tab.z_step_exp as i32;
    ZPointFx {
        z: fx::Compressibility::from_bits(z_value(tab, z_acc)),
        dz_dp_per_mpa: slope(zp_acc, sp, e),
        dz_dt_per_k: slope(zt_acc, st, e),
        flags,
    }
}

/// Z in Q30 from the accumulator (coefficient steps·2^16), at least the floor.
fn z_value(tab: &Table<'_>, z_acc: u32) -> u32 {
    let e = tab.z_step_exp as i32;
    // z_acc is in steps·2^16; Z in Q30 adds z_acc·2^(14 − e).
    let z_rel = if e >= 14 {
        z_acc >> (e - 14)
    } else {
        z_acc << (14 - e)
    };
    tab.z_offset.saturating_add(z_rel).max(tab.z_floor)
}

/// A slope of Z from its accumulator: steps·2^11 per unit u; ×du/dunit, Z per
/// step 2^-e, I8F24 → shift = du_exp − 13 + e.
fn slope(acc: i32, s: &Span, e: i32) -> fx::ZSlope {
    let wide = mul_i32_u16_wide(acc, s.du_mantissa as u32);
    let shift = s.du_exp as i32 - 13 + e;
    let v = if shift >= 0 {
        wide >> shift.min(63)
    } else {
        let n = (-shift).min(62) as u32;
        if wide.unsigned_abs() >> (62 - n) != 0 {
            if wide < 0 { i64::MIN } else { i64::MAX }
        } else {
            wide << n
        }
    };
    fx::ZSlope::from_bits(v.clamp(i32::MIN as i64, i32::MAX as i64) as i32)
}

/// Prepares the isotherm at raw temperature bits `t`: the temperature
/// weights contracted into one coefficient per pressure basis function
/// (exact: Σw = 2^16 and q < 2^16, so each sum is below 2^32), and the
/// boundary pressures at `t`.
pub fn isotherm(tab: &Table<'_>, m: &Axes, t: u32) -> IsothermFx {
    let tk = tab.temperature_knots;
    let mut iso = IsothermFx::plain(fx::Temperature::from_bits(t));
    let (t, out_t) = clamp_axis(
        t,
        tk.first().copied().unwrap_or(0),
        tk.last().copied().unwrap_or(0),
    );
    if out_t {
        iso.flags = Status::MODEL_OUT_OF_RANGE;
    }
    let (it, st, ut) = m.t.locate(tk, t);
    let (wt, _) = st.basis(ut);
    iso.saturation = u32::MAX;
    iso.limit = u32::MAX;
    if let Some(b) = &tab.boundary {
        if t < b.critical_temperature {
            iso.saturation = curve(b.saturation_pressure, it, &wt);
        }
        iso.limit = curve(b.limit_pressure, it, &wt);
    }
    let cols = tab.columns();
    for j in 0..cols {
        let mut c = 0u32;
        for (a, w) in wt.iter().enumerate() {
            let q = tab.coefs.get((it + a) * cols + j).copied().unwrap_or(0);
            c += w * q as u32;
        }
        if iso.coefs.push(c).is_err() {
            // More columns than an isotherm holds: leave it unprepared.
            iso.coefs.clear();
            break;
        }
    }
    iso
}

/// Z and ∂Z/∂p on a prepared isotherm at raw pressure bits `p` (∂Z/∂T is
/// not part of an isotherm: returned as zero). The same steps as
/// [`evaluate`] along pressure; the contraction along temperature happened
/// in [`isotherm`].
pub fn isotherm_z(tab: &Table<'_>, m: &Axes, iso: &IsothermFx, p: u32) -> ZPointFx {
    let cols = tab.columns();
    if iso.coefs.len() != cols {
        return evaluate(tab, m, p, iso.temperature.to_bits());
    }
    let pk = tab.pressure_knots;
    let mut flags = iso.flags;
    let mut p = p;
    let mut out_p = false;
    if p > iso.saturation {
        flags |= liquid_phase(tab.gas, p, iso.saturation);
        p = iso.saturation;
    } else if p > iso.limit {
        out_p = true;
        p = iso.limit;
    }
    let (p, clamped) = clamp_axis(p, 0, pk.last().copied().unwrap_or(0));
    if out_p || clamped {
        flags |= Status::MODEL_OUT_OF_RANGE;
    }
    let (ip, sp, up) = m.p.locate(pk, p);
    let (wp, dwp) = sp.basis(up);
    let mut z_acc = 0u32;
    let mut zp_acc = 0i32;
    if let Some([c0, c1, c2, c3]) = iso.coefs.get(ip..ip + 4) {
        let c = [*c0, *c1, *c2, *c3];
        // Σw = 2^16: the sum never exceeds the largest coefficient.
        z_acc = mul_u32_q16(c[0], wp[0])
            + mul_u32_q16(c[1], wp[1])
            + mul_u32_q16(c[2], wp[2])
            + mul_u32_q16(c[3], wp[3]);
        // Σdw = 0: Σdw·c = Σdw·(c − c0), in the units of `evaluate` (/4).
        let d = |x: u32| (x >> 2) as i32 - (c[0] >> 2) as i32;
        zp_acc = mul_i32_sq16(d(c[1]), dwp[1])
            + mul_i32_sq16(d(c[2]), dwp[2])
            + mul_i32_sq16(d(c[3]), dwp[3]);
    }
    ZPointFx {
        z: fx::Compressibility::from_bits(z_value(tab, z_acc)),
        dz_dp_per_mpa: slope(zp_acc, &sp, tab.z_step_exp as i32),
        dz_dt_per_k: fx::ZSlope::ZERO,
        flags,
    }
}
