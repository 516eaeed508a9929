//! Functions of one variable prepared as cubic pieces: the form in which the
//! device evaluates, per sample, every nonlinear function of one input (a
//! sensor's converter code to its reading with the calibration correction
//! folded in, a bridge's compensation as a function of temperature, a
//! pressure as a function of the bridge's normalised signal).
//!
//! # Form
//!
//! On piece k, `[x_k, x_{k+1})` of the integer input x,
//! `s = (x − x_k)·inv_k >> shift_k` is the position in the piece in Q31
//! (`inv_k = 2^(31 + shift_k)/(x_{k+1} − x_k)`, rounded), and
//! `y·2^extra = c0 + c1·s + c2·s² + c3·s³` (Horner, each product of an
//! `i64` below 2^32 in magnitude and s rounded down after a 32×32→64
//! multiply). y is in the units of the output format's raw bits; the
//! coefficients carry `extra` more fraction bits. Inputs outside the
//! pieces are clamped to the ends.
//!
//! # Cost
//!
//! Per call: a binary search over at most [`MAX_PIECES`] starts, four
//! 32×32→64 multiplies, a few additions and shifts (about 150
//! instructions on a Cortex-M0). No division, no state.
//!
//! # Preparing (hosts)
//!
//! [`CurveBuf::fit`] builds a curve from an `f64` function: per piece a cubic
//! that meets the function exactly at both ends (so the curve is
//! continuous) and fits it by least squares between them; the piece with
//! the largest error of the *quantised* cubic against the function is split
//! in two until the error is below the tolerance or the pieces run out.
//! The error it reports is the largest seen on the fitting points; tests
//! check curves exhaustively where the input space allows.

use crate::error::{CurveSetting, Defect};
use heapless::Vec;
use zerocopy::{FromBytes, Immutable, IntoBytes, KnownLayout};

use crate::Error;
use crate::fx::mul_u32;

/// Most pieces of one curve.
pub const MAX_PIECES: usize = 64;
/// Most extra fraction bits of the coefficients.
pub const MAX_EXTRA: i8 = 12;
/// Fewest extra fraction bits (a negative count: the coefficients are in
/// units of 2^-extra output bits, so that values up to 2^(31 − extra) fit).
pub const MIN_EXTRA: i8 = -8;

/// One cubic piece (see the [module](self) documentation). Its layout is
/// part of the prepared-configuration format (seven little-endian 32-bit
/// words).
#[derive(
    Clone, Copy, Debug, PartialEq, Eq, Default, FromBytes, IntoBytes, Immutable, KnownLayout,
)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(C)]
pub struct Piece {
    /// Start of the piece, input units.
    pub x: i32,
    /// `2^(31 + shift)/width`, rounded.
    pub inv: u32,
    /// Right shift of `(x − x_k)·inv` to Q31 (at most 31).
    pub shift: u32,
    /// Coefficients of the cubic in s (Q31 powers), output bits × 2^extra.
    pub c: [i32; 4],
}

/// A prepared curve: a view of its pieces (see the [module](self)
/// documentation).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Curve<'a> {
    /// The pieces, by increasing start.
    pub pieces: &'a [Piece],
    /// End of the last piece (the domain is `[pieces[0].x, end]`).
    pub end: i32,
    /// Extra fraction bits of the coefficients over the output bits
    /// (negative: the coefficients count 2^-extra output bits).
    pub extra: i8,
}

/// A curve with its pieces, as [`CurveBuf::fit`] builds it (hosts).
#[derive(Clone, Debug, PartialEq, Eq, Default)]
pub struct CurveBuf {
    /// The pieces, by increasing start.
    pub pieces: Vec<Piece, MAX_PIECES>,
    /// See [`Curve::end`].
    pub end: i32,
    /// See [`Curve::extra`].
    pub extra: i8,
}

impl CurveBuf {
    /// The curve.
    pub fn curve(&self) -> Curve<'_> {
        Curve {
            pieces: &self.pieces,
            end: self.end,
            extra: self.extra,
        }
    }
}

/// `h·s >> 31` for `|h| < 2^32`, `s ≤ 2^31` (rounded towards −∞).
#[inline]
fn mul_q31(h: i64, s: u32) -> i64 {
    let m = h.unsigned_abs().min(u32::MAX as u64) as u32;
    let p = (mul_u32(m, s) >> 31) as i64;
    if h < 0 { -p } else { p }
}

impl Curve<'_> {
    /// The domain's ends, `(first start, end)`; `None` for an empty curve.
    pub fn domain(&self) -> Option<(i32, i32)> {
        self.pieces.first().map(|p| (p.x, self.end))
    }

    /// Checks a curve received from elsewhere (a stored or sent
    /// configuration): at least one piece, starts increasing and below the
    /// end, shifts and extra bits in range. Evaluation never panics or
    /// overflows whatever the coefficients; this makes sure the pieces mean
    /// what they say.
    pub fn validate(&self) -> Result<(), Error> {
        let bad = Error::Malformed;
        let first = self.pieces.first().ok_or(bad(Defect::CurveWithoutPieces))?;
        let increasing = self
            .pieces
            .windows(2)
            .all(|w| matches!(w, [a, b] if a.x < b.x));
        let last = self.pieces.last().map_or(first.x, |p| p.x);
        if !increasing || self.end <= last {
            return Err(bad(Defect::CurvePiecesOrder));
        }
        if !(MIN_EXTRA..=MAX_EXTRA).contains(&self.extra)
            || self.pieces.iter().any(|p| p.shift > 31)
        {
            return Err(bad(Defect::CurveScale));
        }
        Ok(())
    }

    /// The value at `x` (clamped to the domain), output bits, rounded to
    /// nearest. An empty curve gives 0.
    pub fn eval(&self, x: i32) -> i64 {
        let Some((lo, hi)) = self.domain() else {
            return 0;
        };
        let x = x.max(lo).min(hi);
        let k = self.pieces.partition_point(|p| p.x <= x).saturating_sub(1);
        let Some(p) = self.pieces.get(k) else {
            return 0;
        };
        let d = x.wrapping_sub(p.x) as u32;
        let s = (mul_u32(d, p.inv) >> p.shift.min(31)).min(1 << 31) as u32;
        let [c0, c1, c2, c3] = p.c.map(i64::from);
        let h = c2 + mul_q31(c3, s);
        let h = c1 + mul_q31(h, s);
        let y = c0 + mul_q31(h, s);
        match self.extra {
            0 => y,
            e if e > 0 => (y + (1 << (e - 1))) >> e,
            e => y << (-(e as i32)).min(16),
        }
    }

    /// The curve's value in `f64` output bits without the final rounding
    /// (what the coefficients say; for tests and for fitting).
    pub fn eval_exact(&self, x: i32) -> f64 {
        let Some((lo, hi)) = self.domain() else {
            return 0.0;
        };
        let x = x.max(lo).min(hi);
        let k = self.pieces.partition_point(|p| p.x <= x).saturating_sub(1);
        let Some(p) = self.pieces.get(k) else {
            return 0.0;
        };
        let d = x.wrapping_sub(p.x) as u32;
        let s = (mul_u32(d, p.inv) >> p.shift.min(31)).min(1 << 31) as u32;
        let [c0, c1, c2, c3] = p.c.map(i64::from);
        let h = c2 + mul_q31(c3, s);
        let h = c1 + mul_q31(h, s);
        let y = c0 + mul_q31(h, s);
        y as f64 * libm::exp2(-(self.extra as f64))
    }
}

impl CurveBuf {
    /// Fits a curve to `f` (output bits as `f64`) over the integer inputs
    /// `lo..=hi` (see the [module](self) documentation). Returns the curve
    /// and the largest error seen on the fitting points, output bits, before
    /// [`Curve::eval`]'s final rounding to whole output bits (which adds at
    /// most half a bit).
    /// Fails when `lo ≥ hi` or when `f` is not finite somewhere.
    pub fn fit(
        f: &dyn Fn(f64) -> f64,
        lo: i32,
        hi: i32,
        tolerance: f64,
    ) -> Result<(CurveBuf, f64), Error> {
        CurveBuf::fit_knots_from(f, &[lo, hi], tolerance, &|_, _| 1.0)
    }

    /// [`CurveBuf::fit`] from given knots (increasing, at least two: the
    /// domain's ends and any point where `f` is not smooth, so that no
    /// piece spans a kink); pieces are split from there. `weight(a, b)`
    /// scales the error of the piece `[a, b)` (below 1 where the accuracy
    /// matters less, e.g. where a sensor's readings are flagged); the error
    /// returned is the largest weighted one.
    pub fn fit_knots_from(
        f: &dyn Fn(f64) -> f64,
        initial: &[i32],
        tolerance: f64,
        weight: &dyn Fn(i32, i32) -> f64,
    ) -> Result<(CurveBuf, f64), Error> {
        let increasing = initial.windows(2).all(|w| matches!(w, [a, b] if a < b));
        if initial.len() < 2 || !increasing || initial.len() > MAX_PIECES + 1 {
            return Err(Error::OutOfRange(CurveSetting::Domain.into()));
        }
        let end = initial.last().copied().unwrap_or(0);
        let fit_all = |knots: &[i32]| -> Result<Vec<Fitted, MAX_PIECES>, Error> {
            let mut v: Vec<Fitted, MAX_PIECES> = Vec::new();
            for w in knots.windows(2) {
                if let &[a, b] = w {
                    let piece = Fitted::new(f, a, b, b == end, weight)?;
                    v.push(piece)
                        .map_err(|_| Error::OutOfRange(CurveSetting::Pieces.into()))?;
                }
            }
            Ok(v)
        };
        let mut knots: Vec<i32, { MAX_PIECES + 1 }> = Vec::new();
        for &k in initial {
            let _ = knots.push(k);
        }
        // Halve the worst piece until the tolerance is met or the pieces
        // run out; only the two new pieces are fitted at each step.
        let mut pieces = fit_all(&knots)?;
        loop {
            let (worst, err) = worst_piece(pieces.iter().map(|p| p.err));
            if err <= tolerance || knots.len() > MAX_PIECES {
                break;
            }
            let (Some(&a), Some(&b)) = (knots.get(worst), knots.get(worst + 1)) else {
                break;
            };
            if b - a < 2 {
                break;
            }
            let mid = a + (b - a) / 2;
            let left = Fitted::new(f, a, mid, false, weight)?;
            let right = Fitted::new(f, mid, b, b == end, weight)?;
            if knots.insert(worst + 1, mid).is_err() {
                break;
            }
            if let Some(slot) = pieces.get_mut(worst) {
                *slot = left;
            }
            if pieces.insert(worst + 1, right).is_err() {
                break;
            }
        }
        // Out of pieces: move the free knots so that every piece has about
        // the same error (a cubic's error goes as width⁴·|f⁗|, so the
        // density |f⁗|^¼ ≈ error^¼/width is equidistributed), a few times,
        // keeping the best.
        if worst_piece(pieces.iter().map(|p| p.err)).1 > tolerance {
            for _ in 0..REBALANCE_ROUNDS {
                let errors: Vec<f64, MAX_PIECES> = pieces.iter().map(|p| p.err).collect();
                let Some(next) = rebalance(initial, &knots, &errors) else {
                    break;
                };
                let trial = fit_all(&next)?;
                if worst_piece(trial.iter().map(|p| p.err)).1
                    < worst_piece(pieces.iter().map(|p| p.err)).1
                {
                    pieces = trial;
                    knots = next;
                } else {
                    break;
                }
            }
        }
        quantise(f, &pieces, end, weight)
    }
}

/// One piece as fitted in `f64` (hosts).
#[derive(Clone, Copy, Debug)]
struct Fitted {
    a: i32,
    /// The piece's last input (the next piece starts after it).
    last: i32,
    inv: u32,
    shift: u8,
    c: [f64; 4],
    /// Weighted error of the unquantised cubic.
    err: f64,
}

impl Fitted {
    /// The piece `[a, b)` (`[a, b]` for the last one): a cubic in s that
    /// meets `f` at both ends and fits it between them by least squares.
    fn new(
        f: &dyn Fn(f64) -> f64,
        a: i32,
        b: i32,
        last_piece: bool,
        weight: &dyn Fn(i32, i32) -> f64,
    ) -> Result<Fitted, Error> {
        let width = (b as i64 - a as i64) as u64;
        // s = d·inv >> shift in Q31 with inv < 2^32: shift = bits of width.
        let shift = (64 - width.leading_zeros()).min(31) as u8;
        let inv = (((1u128 << (31 + shift as u32)) + width as u128 / 2) / width as u128)
            .min(u32::MAX as u128) as u32;
        let s_of = |x: i32| -> f64 {
            let d = (x as i64 - a as i64) as u64;
            ((d as u128 * inv as u128) >> shift).min(1 << 31) as f64 / (1u64 << 31) as f64
        };
        // The cubic meets f at a and at the piece's last input, so a jump
        // of f at a knot stays outside every piece.
        let last = if last_piece { b } else { b - 1 };
        let ya = finite(f(a as f64))?;
        let mut c = [ya, 0.0, 0.0, 0.0];
        if last > a {
            let yb = finite(f(last as f64))?;
            let s_end = s_of(last);
            let span = (last as i64 - a as i64) as u64;
            let n = span.min(FIT_POINTS) as i64;
            // y(s) = ya + c1·s + c2·s² + c3·s³ with y(s_end) = yb:
            // c1 = (yb − ya − c2·s_e² − c3·s_e³)/s_e; least squares in c2, c3
            // on the residual basis g2 = s² − s·s_e, g3 = s³ − s·s_e².
            let (mut a11, mut a12, mut a22, mut b1, mut b2) = (0.0, 0.0, 0.0, 0.0, 0.0);
            for i in 1..n {
                let x = a + (i as i128 * span as i128 / n as i128) as i32;
                let s = s_of(x);
                let y = finite(f(x as f64))?;
                let g2 = s * s - s * s_end;
                let g3 = s * s * s - s * s_end * s_end;
                let r = y - ya - (yb - ya) * s / s_end;
                a11 += g2 * g2;
                a12 += g2 * g3;
                a22 += g3 * g3;
                b1 += g2 * r;
                b2 += g3 * r;
            }
            let det = a11 * a22 - a12 * a12;
            let (c2, c3) = if n >= 3 && det.abs() > 1e-30 * (a11 * a22).max(1e-300) {
                ((b1 * a22 - b2 * a12) / det, (a11 * b2 - a12 * b1) / det)
            } else if n >= 2 && a11 > 0.0 {
                (b1 / a11, 0.0)
            } else {
                (0.0, 0.0)
            };
            let c1 = (yb - ya - c2 * s_end * s_end - c3 * s_end * s_end * s_end) / s_end;
            c = [ya, c1, c2, c3];
        }
        let mut p = Fitted {
            a,
            last,
            inv,
            shift,
            c,
            err: 0.0,
        };
        let w = weight(a, b);
        let mut e = 0.0f64;
        p.points(|x| {
            let s = s_of(x);
            let v = c[0] + s * (c[1] + s * (c[2] + s * c[3]));
            e = e.max((v - f(x as f64)).abs());
        });
        p.err = e * w;
        Ok(p)
    }

    /// Calls `g` on the piece's check points.
    fn points(&mut self, mut g: impl FnMut(i32)) {
        let span = self.last as i64 - self.a as i64;
        let n = span.clamp(1, CHECK_POINTS);
        for i in 0..=n {
            g((self.a as i64 + i * span / n) as i32);
        }
    }
}

/// Points of a piece's least-squares fit (at most).
const FIT_POINTS: u64 = 64;
/// Points of a piece's error check (at most).
const CHECK_POINTS: i64 = 128;

/// The curve of fitted pieces, quantised with one scale for all, and the
/// largest weighted error of the quantised curve.
fn quantise(
    f: &dyn Fn(f64) -> f64,
    pieces: &[Fitted],
    end: i32,
    weight: &dyn Fn(i32, i32) -> f64,
) -> Result<(CurveBuf, f64), Error> {
    let big = pieces
        .iter()
        .flat_map(|p| p.c.iter().map(|v| v.abs()))
        .fold(0.0f64, f64::max);
    // Coefficients below 2^31 in magnitude (the value itself is one).
    let room = i32::MAX as f64 * 0.999;
    let mut extra = MIN_EXTRA;
    while extra < MAX_EXTRA && big * libm::exp2((extra + 1) as f64) <= room {
        extra += 1;
    }
    if big * libm::exp2(extra as f64) > room {
        return Err(Error::OutOfRange(CurveSetting::Values.into()));
    }
    let scale = libm::exp2(extra as f64);
    let mut curve = CurveBuf {
        pieces: Vec::new(),
        end,
        extra,
    };
    for p in pieces {
        let c = p.c.map(|v| libm::round(v * scale) as i32);
        curve
            .pieces
            .push(Piece {
                x: p.a,
                inv: p.inv,
                shift: p.shift as u32,
                c,
            })
            .map_err(|_| Error::OutOfRange(CurveSetting::Pieces.into()))?;
    }
    let view = curve.curve();
    let mut worst = 0.0f64;
    for (k, p) in pieces.iter().enumerate() {
        let b = pieces.get(k + 1).map_or(end, |q| q.a);
        let w = weight(p.a, b);
        let mut e = 0.0f64;
        let mut p = *p;
        p.points(|x| e = e.max((view.eval_exact(x) - f(x as f64)).abs()));
        worst = worst.max(e * w);
    }
    Ok((curve, worst))
}

/// Rounds of knot moving once the pieces have run out.
const REBALANCE_ROUNDS: usize = 8;

/// The index and error of the worst piece.
fn worst_piece(errors: impl Iterator<Item = f64>) -> (usize, f64) {
    errors
        .enumerate()
        .fold((0, 0.0f64), |a, (i, e)| if e > a.1 { (i, e) } else { a })
}

/// New knots: the fixed knots kept, the others placed so that the
/// estimated error density error^¼/width integrates to the same amount per
/// piece; each stretch between fixed knots gets pieces in proportion to its
/// share. `None` when nothing can move.
fn rebalance(fixed: &[i32], knots: &[i32], errors: &[f64]) -> Option<Vec<i32, { MAX_PIECES + 1 }>> {
    let pieces = knots.len().checked_sub(1)?;
    // Mass of each piece: error^¼ (never zero, so that no stretch is left
    // without a piece where the error grows back).
    let floor = errors.iter().copied().fold(0.0f64, f64::max).max(1e-12) * 1e-8;
    let mass: Vec<f64, MAX_PIECES> = errors
        .iter()
        .map(|e| libm::pow(e.max(floor), 0.25))
        .collect();
    let total: f64 = mass.iter().sum();
    if total.is_nan() || total <= 0.0 || fixed.len() < 2 {
        return None;
    }
    let free = pieces.checked_sub(fixed.len() - 1)?;
    let mut out: Vec<i32, { MAX_PIECES + 1 }> = Vec::new();
    let _ = out.push(*fixed.first()?);
    let mut left = free;
    for (j, w) in fixed.windows(2).enumerate() {
        let &[a, b] = w else { continue };
        // The stretch's pieces in the present knots, and their mass.
        let members: Vec<(i32, i32, f64), MAX_PIECES> = knots
            .windows(2)
            .zip(mass.iter())
            .filter_map(|(k, &m)| match k {
                &[x, y] if x >= a && y <= b => Some((x, y, m)),
                _ => None,
            })
            .collect();
        let m: f64 = members.iter().map(|v| v.2).sum();
        let stretches_left = fixed.len() - 2 - j;
        let share = if stretches_left == 0 {
            left
        } else {
            (libm::round(free as f64 * m / total) as usize).min(left)
        };
        left -= share;
        // share extra knots at equal steps of the cumulative mass.
        let n = share + 1;
        for i in 1..n {
            let target = m * i as f64 / n as f64;
            let mut acc = 0.0;
            let mut at = b;
            for &(x, y, pm) in &members {
                if acc + pm >= target && pm > 0.0 {
                    let frac = (target - acc) / pm;
                    at = x + libm::round((y - x) as f64 * frac) as i32;
                    break;
                }
                acc += pm;
            }
            let prev = out.last().copied().unwrap_or(a);
            if at > prev && at < b {
                let _ = out.push(at);
            }
        }
        if out.last().copied() != Some(b) {
            let _ = out.push(b);
        }
    }
    if out.as_slice() == knots {
        None
    } else {
        Some(out)
    }
}

fn finite(v: f64) -> Result<f64, Error> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(Error::NotFinite(CurveSetting::Function.into()))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_cubic_is_exact_in_one_piece() {
        let f = |x: f64| 1000.0 + 0.5 * x - 1e-6 * x * x + 3e-12 * x * x * x;
        let (c, err) = CurveBuf::fit(&f, 0, 65_535, 0.01).unwrap();
        assert_eq!(c.pieces.len(), 1);
        assert!(err <= 0.01, "{err}");
        let c = c.curve();
        for x in (0..65_536).step_by(7) {
            assert!((c.eval(x) as f64 - f(x as f64)).abs() <= 0.51);
        }
    }

    #[test]
    fn a_curved_function_gets_more_pieces_and_meets_the_tolerance() {
        // A square root over a 24-bit range, in output bits of 2^-16.
        let f = |x: f64| libm::sqrt(1.0 + x / 16_777_216.0) * 65_536.0 * 300.0;
        let (c, err) = CurveBuf::fit(&f, 0, 16_777_215, 0.25).unwrap();
        assert!(c.pieces.len() > 1 && c.pieces.len() <= MAX_PIECES);
        assert!(err <= 0.25, "{err} with {} pieces", c.pieces.len());
        let c = c.curve();
        c.validate().unwrap();
        let mut worst = 0.0f64;
        for x in (0..16_777_216).step_by(997) {
            worst = worst.max((c.eval(x) as f64 - f(x as f64)).abs());
        }
        assert!(worst <= 0.75, "{worst}");
    }

    #[test]
    fn inputs_outside_are_clamped_and_empty_curves_give_zero() {
        let f = |x: f64| 10.0 * x;
        let (c, _) = CurveBuf::fit(&f, -100, 100, 0.5).unwrap();
        assert_eq!(c.curve().eval(-1000), -1000);
        assert_eq!(c.curve().eval(1000), 1000);
        assert_eq!(Curve::default().eval(5), 0);
        assert!(Curve::default().validate().is_err());
    }

    #[test]
    fn damaged_curves_are_refused() {
        let f = |x: f64| x;
        let (c, _) = CurveBuf::fit(&f, 0, 1000, 0.5).unwrap();
        let mut d = c.clone();
        d.end = d.pieces[0].x;
        assert!(d.curve().validate().is_err());
        let mut d = c.clone();
        d.extra = MAX_EXTRA + 1;
        assert!(d.curve().validate().is_err());
        d.extra = MIN_EXTRA - 1;
        assert!(d.curve().validate().is_err());
        let mut d = c;
        d.pieces[0].shift = 40;
        assert!(d.curve().validate().is_err());
        // Whatever the coefficients, evaluation does not overflow.
        d.pieces[0].shift = 31;
        d.pieces[0].c = [i32::MAX, i32::MIN, i32::MAX, i32::MIN];
        d.pieces[0].inv = u32::MAX;
        for x in [0, 1, 500, 1000] {
            let _ = d.curve().eval(x);
        }
    }
}
