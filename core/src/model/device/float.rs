//! Evaluation of a device table in float: the same spline as [`super::fixed`],
//! step by step under the same names, in [`Real`] arithmetic (fractions are
//! computed from the knots directly, coefficients dequantised exactly).

use super::Table;
use crate::model::ZPoint;
use crate::{Real, Status};

/// Raw bits → K.
const T_PER_RAW: f64 = 1.0 / 65_536.0;
/// Raw bits → MPa.
const P_PER_RAW: f64 = 1.0 / 16.0e6;

/// One axis: knots in its unit (K or MPa).
struct Axis<'k> {
    knots: &'k [u32],
    per_raw: f64,
}

/// The span holding x: index, position u in [0, 1], and the knots around it.
struct Located<F> {
    k: usize,
    u: F,
    /// Span width in the axis unit.
    h: F,
    /// x − t_j and t_j+d − t_j for the fractions, as (num, den).
    level2: [(F, F); 2],
    level3: [(F, F); 3],
}

impl Axis<'_> {
    fn knot<F: Real>(&self, i: isize) -> F {
        let n = self.knots.len().saturating_sub(1) as isize;
        let j = i.clamp(0, n) as usize;
        F::lit(self.knots.get(j).copied().unwrap_or(0) as f64 * self.per_raw)
    }

    fn locate<F: Real>(&self, x: F) -> Located<F> {
        let last = self.knots.len().saturating_sub(2);
        let xr = x.to_f64() / self.per_raw;
        let k = self
            .knots
            .partition_point(|&t| (t as f64) <= xr)
            .saturating_sub(1)
            .min(last);
        let k = k as isize;
        let tk: F = self.knot(k);
        let h: F = self.knot::<F>(k + 1) - tk;
        let u = ((x - tk) / h).clamp_to(F::ZERO, F::ONE);
        let frac = |j: isize, d: isize| {
            let tj: F = self.knot(j);
            (x - tj, self.knot::<F>(j + d) - tj)
        };
        Located {
            k: k as usize,
            u,
            h,
            level2: [frac(k - 1, 2), frac(k, 2)],
            level3: [frac(k - 2, 3), frac(k - 1, 3), frac(k, 3)],
        }
    }
}

impl<F: Real> Located<F> {
    /// The four weights of basis functions k−3 … k and their slopes per unit u.
    fn basis(&self) -> ([F; 4], [F; 4]) {
        let fr = |(n, d): (F, F)| (n / d).clamp_to(F::ZERO, F::ONE);
        let (u, v) = (self.u, F::ONE - self.u);
        let (fa, fb) = (fr(self.level2[0]), fr(self.level2[1]));
        let n2 = [v * (F::ONE - fa), v * fa + u * (F::ONE - fb), u * fb];
        let g = [fr(self.level3[0]), fr(self.level3[1]), fr(self.level3[2])];
        let w = [
            n2[0] * (F::ONE - g[0]),
            n2[0] * g[0] + n2[1] * (F::ONE - g[1]),
            n2[1] * g[1] + n2[2] * (F::ONE - g[2]),
            n2[2] * g[2],
        ];
        // Level-3 slopes: h/(t_j+3 − t_j).
        let a1 = |(_, d): (F, F)| self.h / d;
        let q = [
            n2[0] * a1(self.level3[0]),
            n2[1] * a1(self.level3[1]),
            n2[2] * a1(self.level3[2]),
        ];
        let three = F::lit(3.0);
        let dw = [
            -three * q[0],
            three * (q[0] - q[1]),
            three * (q[1] - q[2]),
            three * q[2],
        ];
        (w, dw)
    }
}

fn clamp_axis<F: Real>(x: F, lo: F, hi: F) -> (F, bool) {
    if x < lo {
        (lo, true)
    } else if x > hi {
        (hi, true)
    } else {
        (x, false)
    }
}

fn curve<F: Real>(c: &[u32], row: usize, w: &[F; 4]) -> F {
    w.iter().enumerate().fold(F::ZERO, |acc, (a, &wa)| {
        acc + wa * F::lit(c.get(row + a).copied().unwrap_or(0) as f64 / 16.0)
    })
}

/// Evaluates a table at pressure `p_pa` (Pa) and temperature `t_k` (K).
pub(super) fn evaluate<F: Real>(tab: &Table<'_>, p_pa: F, t_k: F) -> ZPoint<F> {
    let mut flags = Status::OK;
    let ta = Axis {
        knots: tab.temperature_knots,
        per_raw: T_PER_RAW,
    };
    let pa = Axis {
        knots: tab.pressure_knots,
        per_raw: P_PER_RAW,
    };
    let n_t = tab.temperature_knots.len() as isize - 1;
    let n_p = tab.pressure_knots.len() as isize - 1;

    // Temperature axis.
    let (t, out_t) = clamp_axis(t_k, ta.knot(0), ta.knot(n_t));
    let lt = ta.locate(t);
    let (wt, dwt) = lt.basis();

    // Boundary, then the table's pressure range (in MPa from here).
    let mut p = p_pa * F::lit(1e-6);
    let mut out_p = false;
    if let Some(b) = &tab.boundary {
        let p_sat = curve(b.saturation_pressure, lt.k, &wt) * F::lit(1e-6);
        let p_lim = curve(b.limit_pressure, lt.k, &wt) * F::lit(1e-6);
        if t < F::lit(b.critical_temperature as f64 * T_PER_RAW) && p > p_sat {
            flags |= if tab.gas.mixture().is_some() {
                tab.gas.phase_flag()
            } else if p > p_sat * F::lit(1.0 + super::LIQUID_FULL_MARGIN) {
                Status::LIQUID_FULL
            } else {
                Status::TWO_PHASE
            };
            p = p_sat;
        } else if p > p_lim {
            out_p = true;
            p = p_lim;
        }
    }
    let (p, clamped) = clamp_axis(p, F::ZERO, pa.knot(n_p));
    if out_t || out_p || clamped {
        flags |= Status::MODEL_OUT_OF_RANGE;
    }
    let lp = pa.locate(p);
    let (wp, dwp) = lp.basis();

    // Rows along pressure.
    let cols = tab.columns();
    let mut r = [F::ZERO; 4];
    let mut d = [F::ZERO; 4];
    for (a, (ra, da)) in r.iter_mut().zip(d.iter_mut()).enumerate() {
        for (b, (&w, &dw)) in wp.iter().zip(&dwp).enumerate() {
            let q = tab
                .coefs
                .get((lt.k + a) * cols + lp.k + b)
                .copied()
                .unwrap_or(0);
            let z = F::lit(tab.coef_z(q));
            *ra += w * z;
            *da += dw * z;
        }
    }

    // Contraction along temperature.
    let mut z = F::ZERO;
    let mut zp = F::ZERO;
    let mut zt = F::ZERO;
    for (((&ra, &da), &w), &dw) in r.iter().zip(&d).zip(&wt).zip(&dwt) {
        z += w * ra;
        zp += w * da;
        zt += dw * ra;
    }
    ZPoint {
        z,
        dz_dp_per_mpa: zp / lp.h,
        dz_dt_per_k: zt / lt.h,
        flags,
    }
}
