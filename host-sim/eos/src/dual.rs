//! Second-order dual numbers in two variables (τ, δ): a value with its first
//! and second partial derivatives, so each Helmholtz term is written once and
//! differentiated exactly (to rounding).

use core::ops::{Add, Mul, Neg, Sub};

/// f(τ, δ) with ∂/∂τ, ∂/∂δ, ∂²/∂τ², ∂²/∂τ∂δ, ∂²/∂δ².
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct D2 {
    /// Value.
    pub v: f64,
    /// ∂f/∂τ.
    pub t: f64,
    /// ∂f/∂δ.
    pub d: f64,
    /// ∂²f/∂τ².
    pub tt: f64,
    /// ∂²f/∂τ∂δ.
    pub td: f64,
    /// ∂²f/∂δ².
    pub dd: f64,
}

impl D2 {
    /// A constant.
    pub fn c(v: f64) -> D2 {
        D2 { v, ..D2::default() }
    }
    /// The variable τ at `v`.
    pub fn tau(v: f64) -> D2 {
        D2 {
            v,
            t: 1.0,
            ..D2::default()
        }
    }
    /// The variable δ at `v`.
    pub fn delta(v: f64) -> D2 {
        D2 {
            v,
            d: 1.0,
            ..D2::default()
        }
    }
    /// g(self) from g, g', g'' at the value.
    fn chain(self, g: f64, g1: f64, g2: f64) -> D2 {
        D2 {
            v: g,
            t: g1 * self.t,
            d: g1 * self.d,
            tt: g2 * self.t * self.t + g1 * self.tt,
            td: g2 * self.t * self.d + g1 * self.td,
            dd: g2 * self.d * self.d + g1 * self.dd,
        }
    }
    /// e^self.
    pub fn exp(self) -> D2 {
        let e = libm::exp(self.v);
        self.chain(e, e, e)
    }
    /// self^a for a real exponent (self > 0, or self = 0 with a ≥ 2).
    pub fn powf(self, a: f64) -> D2 {
        if a == 0.0 {
            return D2::c(1.0);
        }
        if self.v == 0.0 {
            // Only reached for exponents ≥ 2 of squared quantities; the
            // derivatives vanish or are finite there.
            let g1 = if a == 1.0 { 1.0 } else { 0.0 };
            let g2 = if a == 2.0 { 2.0 } else { 0.0 };
            return self.chain(0.0, g1, g2);
        }
        let g = libm::pow(self.v, a);
        self.chain(g, a * g / self.v, a * (a - 1.0) * g / (self.v * self.v))
    }
    /// self times a constant.
    pub fn scale(self, k: f64) -> D2 {
        D2 {
            v: self.v * k,
            t: self.t * k,
            d: self.d * k,
            tt: self.tt * k,
            td: self.td * k,
            dd: self.dd * k,
        }
    }
}

impl Add for D2 {
    type Output = D2;
    fn add(self, o: D2) -> D2 {
        D2 {
            v: self.v + o.v,
            t: self.t + o.t,
            d: self.d + o.d,
            tt: self.tt + o.tt,
            td: self.td + o.td,
            dd: self.dd + o.dd,
        }
    }
}

impl Sub for D2 {
    type Output = D2;
    fn sub(self, o: D2) -> D2 {
        self + (-o)
    }
}

impl Neg for D2 {
    type Output = D2;
    fn neg(self) -> D2 {
        self.scale(-1.0)
    }
}

impl Mul for D2 {
    type Output = D2;
    fn mul(self, o: D2) -> D2 {
        D2 {
            v: self.v * o.v,
            t: self.t * o.v + self.v * o.t,
            d: self.d * o.v + self.v * o.d,
            tt: self.tt * o.v + 2.0 * self.t * o.t + self.v * o.tt,
            td: self.td * o.v + self.t * o.d + self.d * o.t + self.v * o.td,
            dd: self.dd * o.v + 2.0 * self.d * o.d + self.v * o.dd,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn derivatives_match_finite_differences() {
        let f = |t: D2, d: D2| (t * d.powf(2.5)).exp() * (d - D2::c(1.0)).powf(2.0) + t.powf(1.3);
        let (t0, d0) = (1.3, 0.7);
        let x = f(D2::tau(t0), D2::delta(d0));
        let h = 1e-5;
        let fv = |t: f64, d: f64| f(D2::c(t), D2::c(d)).v;
        assert!((x.t - (fv(t0 + h, d0) - fv(t0 - h, d0)) / (2.0 * h)).abs() < 1e-8);
        assert!((x.d - (fv(t0, d0 + h) - fv(t0, d0 - h)) / (2.0 * h)).abs() < 1e-8);
        let dd = (fv(t0, d0 + h) - 2.0 * fv(t0, d0) + fv(t0, d0 - h)) / (h * h);
        assert!((x.dd - dd).abs() < 1e-4);
        let td = (fv(t0 + h, d0 + h) - fv(t0 + h, d0 - h) - fv(t0 - h, d0 + h)
            + fv(t0 - h, d0 - h))
            / (4.0 * h * h);
        assert!((x.td - td).abs() < 1e-4);
    }
}
