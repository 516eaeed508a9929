//! The float type of the mirror path.
//!
//! The float path is written once, generic over [`Real`]. `f64` is the
//! reference that the fixed-point path is tested against; `f32` exists so the
//! firmware can measure what the same algorithm costs in single precision
//! (on a Cortex-M0 both are software libraries: every operation is a call).

use core::fmt::Debug;
use core::ops::{Add, AddAssign, Div, DivAssign, Mul, MulAssign, Neg, Sub, SubAssign};

/// A floating-point number type usable by the float path (`f32` or `f64`).
pub trait Real:
    Copy
    + Debug
    + Default
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + AddAssign
    + SubAssign
    + MulAssign
    + DivAssign
{
    /// 0.
    const ZERO: Self;
    /// 1.
    const ONE: Self;
    /// Machine epsilon of the type.
    const EPSILON: Self;

    /// Converts an `f64` literal or value (rounding for `f32`).
    fn lit(v: f64) -> Self;
    /// Converts to `f64` (exact).
    fn to_f64(self) -> f64;
    /// Absolute value.
    fn abs(self) -> Self;
    /// Square root (NaN below zero).
    fn sqrt(self) -> Self;
    /// Natural logarithm.
    fn ln(self) -> Self;
    /// e^x.
    fn exp(self) -> Self;
    /// x^y.
    fn powf(self, y: Self) -> Self;
    /// Largest integer not above `self`.
    fn floor(self) -> Self;
    /// True for neither NaN nor ±∞.
    fn is_finite(self) -> bool;

    /// The smaller of two values (NaN-free inputs assumed).
    fn min(self, other: Self) -> Self {
        if other < self { other } else { self }
    }
    /// The larger of two values (NaN-free inputs assumed).
    fn max(self, other: Self) -> Self {
        if other > self { other } else { self }
    }
    /// `self` limited to `lo..=hi`.
    fn clamp_to(self, lo: Self, hi: Self) -> Self {
        self.max(lo).min(hi)
    }
}

impl Real for f64 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const EPSILON: Self = f64::EPSILON;
    fn lit(v: f64) -> Self {
        v
    }
    fn to_f64(self) -> f64 {
        self
    }
    fn abs(self) -> Self {
        libm::fabs(self)
    }
    fn sqrt(self) -> Self {
        libm::sqrt(self)
    }
    fn ln(self) -> Self {
        libm::log(self)
    }
    fn exp(self) -> Self {
        libm::exp(self)
    }
    fn powf(self, y: Self) -> Self {
        libm::pow(self, y)
    }
    fn floor(self) -> Self {
        libm::floor(self)
    }
    fn is_finite(self) -> bool {
        f64::is_finite(self)
    }
}

impl Real for f32 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const EPSILON: Self = f32::EPSILON;
    fn lit(v: f64) -> Self {
        v as f32
    }
    fn to_f64(self) -> f64 {
        self as f64
    }
    fn abs(self) -> Self {
        libm::fabsf(self)
    }
    fn sqrt(self) -> Self {
        libm::sqrtf(self)
    }
    fn ln(self) -> Self {
        libm::logf(self)
    }
    fn exp(self) -> Self {
        libm::expf(self)
    }
    fn powf(self, y: Self) -> Self {
        libm::powf(self, y)
    }
    fn floor(self) -> Self {
        libm::floorf(self)
    }
    fn is_finite(self) -> bool {
        f32::is_finite(self)
    }
}
