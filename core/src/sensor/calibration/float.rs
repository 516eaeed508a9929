//! Correction, float (generic over [`Real`]). Same steps as [`super::fixed`].

use super::{Correction, X_MAX, X_MIN};
use crate::error::Measured;
use crate::sensor::finite;
use crate::{Error, Real, fx};

/// A prepared correction, float.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Corrector<F> {
    lo: F,
    span: F,
    d: [F; 4],
}

impl<F: Real> Corrector<F> {
    /// Prepares a correction.
    pub fn new(c: &Correction) -> Result<Corrector<F>, Error> {
        c.validate()?;
        let lo = F::lit(fx::to_f64(c.lo));
        let [c0, c1, c2, c3] = c.coefficients.map(|v| F::lit(fx::to_f64(v)));
        Ok(Corrector {
            lo,
            span: F::lit(fx::to_f64(c.hi)) - lo,
            d: [c0, c1 - F::ONE, c2, c3],
        })
    }

    /// Corrects a value (SI). NaN or infinite values are errors.
    pub fn apply(&self, v: F) -> Result<F, Error> {
        let v = finite(v, Measured::ValueToCorrect)?;
        let x = self.position(v);
        Ok(v + self.span * self.deviation(x))
    }

    /// `x = (v − lo)/(hi − lo)`, limited to [`X_MIN`] … [`X_MAX`].
    fn position(&self, v: F) -> F {
        ((v - self.lo) / self.span).clamp_to(F::lit(X_MIN), F::lit(X_MAX))
    }

    /// `D(x) = P(x) − x`.
    fn deviation(&self, x: F) -> F {
        let [d0, d1, d2, d3] = self.d;
        d0 + x * (d1 + x * (d2 + x * d3))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sensor::calibration::fixed::Corrector as Fixed;

    #[test]
    fn two_point_puts_the_references_back() {
        // A pressure channel reading 0.3 bar high at 0 and 1.2 % low at 200 bar
        // (invented): measured 0.3 bar and 197.9 bar for true 0 and 200 bar.
        let m = [fx::Anchor::from_num(0.3e5), fx::Anchor::from_num(197.9e5)];
        let r = [fx::Anchor::from_num(0.0), fx::Anchor::from_num(200e5)];
        let c = Correction::two_point(m, r).unwrap();
        let fl = Corrector::<f64>::new(&c).unwrap();
        assert!((fl.apply(0.3e5).unwrap() - 0.0).abs() < 1e-6);
        assert!((fl.apply(197.9e5).unwrap() - 200e5).abs() < 1e-4);
        let fi = Fixed::new(&c, 4).unwrap();
        for p in [0.3e5, 50e5, 100e5, 197.9e5, 250e5, 400e5] {
            let a = fi.apply((p * 16.0) as i64) as f64 / 16.0;
            let b = fl.apply(p).unwrap();
            assert!((a - b).abs() < 0.2, "{p}: {a} {b}");
        }
        // Order of the points does not matter.
        let c2 = Correction::two_point([m[1], m[0]], [r[1], r[0]]).unwrap();
        assert_eq!(c, c2);
        // Too close.
        assert!(Correction::two_point([m[0], m[0]], r).is_err());
        assert!(fl.apply(f64::NAN).is_err());
    }

    #[test]
    fn cubic_is_held_beyond_the_interval() {
        let c = Correction::from_f64(300.0, 400.0, [0.001, 0.99, 0.02, -0.01]).unwrap();
        let fl = Corrector::<f64>::new(&c).unwrap();
        let off_hi = fl.apply(450.0).unwrap() - 450.0;
        assert!((fl.apply(1000.0).unwrap() - 1000.0 - off_hi).abs() < 1e-9);
        let fi = Fixed::new(&c, 16).unwrap();
        for t in [250.0, 300.0, 333.3, 400.0, 1000.0] {
            let a = fi.apply((t * 65536.0) as i64) as f64 / 65536.0;
            assert!((a - fl.apply(t).unwrap()).abs() < 1e-4, "{t}");
        }
        assert!(Correction::from_f64(1.0, 1.0, [0.0, 1.0, 0.0, 0.0]).is_err());
        assert!(Correction::from_f64(0.0, 1.0, [0.0, 3.0, 0.0, 0.0]).is_err());
    }
}
