//! The floating-point types the physics is written for: `f64` for host-side
//! reference work, `f32` for firmware. One generic implementation serves both,
//! so no equation is written twice.

use core::ops::{Add, Div, Mul, Neg, Sub};

mod sealed {
    pub trait Sealed {}
    impl Sealed for f32 {}
    impl Sealed for f64 {}
}

/// A floating-point type timing-core computes in: `f32` or `f64`.
///
/// Every function goes through `libm`, so results are the same with and
/// without `std` and on every target. The trait is sealed.
pub trait Real:
    sealed::Sealed
    + Copy
    + PartialOrd
    + core::fmt::Debug
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
{
    /// 0.
    const ZERO: Self;
    /// 1.
    const ONE: Self;
    /// 2.
    const TWO: Self;
    /// 1/2.
    const HALF: Self;
    /// pi.
    const PI: Self;
    /// 2*pi.
    const TAU: Self;
    /// pi/2.
    const FRAC_PI_2: Self;

    /// Square root (libm; correctly rounded).
    fn sqrt(self) -> Self;
    /// Arc sine in radians (libm; within 1 ulp for both types).
    fn asin(self) -> Self;
    /// Sine (radians).
    fn sin(self) -> Self;
    /// Cosine (radians).
    fn cos(self) -> Self;
    /// ln(1 + self), accurate for small arguments (libm `log1p`).
    fn ln_1p(self) -> Self;
    /// e^self (libm `exp`).
    fn exp(self) -> Self;
    /// Largest integer value not above `self`.
    fn floor(self) -> Self;
    /// Smallest integer value not below `self`.
    fn ceil(self) -> Self;
    /// Nearest integer value, ties away from zero.
    fn round(self) -> Self;
    /// Absolute value.
    fn abs(self) -> Self;
    /// `true` unless NaN or infinite.
    fn is_finite(self) -> bool;
    /// `true` for a finite, non-zero, non-subnormal value.
    fn is_normal(self) -> bool;
    /// Widening (or identity) conversion, used to report values in errors.
    fn to_f64(self) -> f64;
    /// Conversion from `f64` (rounds to nearest for `f32`).
    fn from_f64(x: f64) -> Self;
    /// Conversion from a `u32`, exact up to 2^24 for `f32`.
    fn from_u32(x: u32) -> Self;
    /// Saturating conversion to `u32`: negative and NaN give 0, values above
    /// `u32::MAX` give `u32::MAX`; fractions are truncated.
    fn to_u32_saturating(self) -> u32;
}

macro_rules! impl_real {
    ($t:ty, $sqrt:path, $asin:path, $sin:path, $cos:path, $log1p:path, $exp:path, $floor:path, $ceil:path, $round:path, $fabs:path, $pi:expr, $tau:expr, $pi2:expr) => {
        impl Real for $t {
            const ZERO: Self = 0.0;
            const ONE: Self = 1.0;
            const TWO: Self = 2.0;
            const HALF: Self = 0.5;
            const PI: Self = $pi;
            const TAU: Self = $tau;
            const FRAC_PI_2: Self = $pi2;

            #[inline]
            fn sqrt(self) -> Self {
                $sqrt(self)
            }
            #[inline]
            fn asin(self) -> Self {
                $asin(self)
            }
            #[inline]
            fn sin(self) -> Self {
                $sin(self)
            }
            #[inline]
            fn cos(self) -> Self {
                $cos(self)
            }
            #[inline]
            fn ln_1p(self) -> Self {
                $log1p(self)
            }
            #[inline]
            fn exp(self) -> Self {
                $exp(self)
            }
            #[inline]
            fn floor(self) -> Self {
                $floor(self)
            }
            #[inline]
            fn ceil(self) -> Self {
                $ceil(self)
            }
            #[inline]
            fn round(self) -> Self {
                $round(self)
            }
            #[inline]
            fn abs(self) -> Self {
                $fabs(self)
            }
            #[inline]
            fn is_finite(self) -> bool {
                <$t>::is_finite(self)
            }
            #[inline]
            fn is_normal(self) -> bool {
                <$t>::is_normal(self)
            }
            #[inline]
            fn to_f64(self) -> f64 {
                self as f64
            }
            #[inline]
            fn from_f64(x: f64) -> Self {
                x as $t
            }
            #[inline]
            fn from_u32(x: u32) -> Self {
                x as $t
            }
            #[inline]
            fn to_u32_saturating(self) -> u32 {
                // Float-to-int `as` casts saturate and map NaN to 0 (Rust reference,
                // "Numeric cast"), so this cannot wrap.
                self as u32
            }
        }
    };
}

impl_real!(
    f32,
    libm::sqrtf,
    libm::asinf,
    libm::sinf,
    libm::cosf,
    libm::log1pf,
    libm::expf,
    libm::floorf,
    libm::ceilf,
    libm::roundf,
    libm::fabsf,
    core::f32::consts::PI,
    core::f32::consts::TAU,
    core::f32::consts::FRAC_PI_2
);
impl_real!(
    f64,
    libm::sqrt,
    libm::asin,
    libm::sin,
    libm::cos,
    libm::log1p,
    libm::exp,
    libm::floor,
    libm::ceil,
    libm::round,
    libm::fabs,
    core::f64::consts::PI,
    core::f64::consts::TAU,
    core::f64::consts::FRAC_PI_2
);
