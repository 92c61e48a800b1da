//! The number the evaluator computes with: an interval value with an interval derivative.
//!
//! One type serves every evaluation pass of the worst-case analysis:
//! - a point (nominal or a corner of the input box) is a degenerate interval with zero
//!   derivative;
//! - a box pass makes every uncertain input an interval and seeds the derivative of one of
//!   them, so the result's `d` encloses the partial derivative over the whole box
//!   (forward-mode automatic differentiation in interval arithmetic). A `d` that excludes
//!   zero in its interior proves the value monotone in that input.
//!
//! Rounding is not directed: bounds hold up to floating-point rounding (about 1e-15
//! relative), which is far below any tolerance a worksheet states.
//!
//! `Dual` also implements the traits `uom` asks of a storage type, so the built-in physics
//! is written on `uom` quantities whose dimensions the compiler checks.

use std::ops::{Add, Div, Mul, Neg, Rem, Sub};

#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Interval {
    pub lo: f64,
    pub hi: f64,
}

impl Interval {
    pub const ZERO: Interval = Interval { lo: 0.0, hi: 0.0 };
    pub const ONE: Interval = Interval { lo: 1.0, hi: 1.0 };

    pub fn point(x: f64) -> Self {
        Interval { lo: x, hi: x }
    }
    /// The interval between two numbers in either order.
    pub fn new(a: f64, b: f64) -> Self {
        if a <= b {
            Interval { lo: a, hi: b }
        } else {
            Interval { lo: b, hi: a }
        }
    }
    pub fn hull(self, o: Interval) -> Interval {
        Interval {
            lo: self.lo.min(o.lo),
            hi: self.hi.max(o.hi),
        }
    }
    pub fn is_point(self) -> bool {
        self.lo == self.hi
    }
    pub fn mid(self) -> f64 {
        0.5 * (self.lo + self.hi)
    }
    pub fn width(self) -> f64 {
        self.hi - self.lo
    }
    /// Contains zero (for divisors: the interval touches or crosses zero).
    pub fn contains_zero(self) -> bool {
        self.lo <= 0.0 && self.hi >= 0.0
    }
    pub fn is_finite(self) -> bool {
        self.lo.is_finite() && self.hi.is_finite()
    }
    fn mul(self, o: Interval) -> Interval {
        if self.is_point() && o.is_point() {
            return Interval::point(self.lo * o.lo);
        }
        let p = [
            self.lo * o.lo,
            self.lo * o.hi,
            self.hi * o.lo,
            self.hi * o.hi,
        ];
        Interval {
            lo: p.iter().copied().fold(f64::INFINITY, fmin),
            hi: p.iter().copied().fold(f64::NEG_INFINITY, fmax),
        }
    }
    fn recip(self) -> Interval {
        if self.contains_zero() {
            if self.lo == 0.0 && self.hi > 0.0 {
                return Interval::new(1.0 / self.hi, f64::INFINITY);
            }
            if self.hi == 0.0 && self.lo < 0.0 {
                return Interval::new(f64::NEG_INFINITY, 1.0 / self.lo);
            }
            return Interval::new(f64::NEG_INFINITY, f64::INFINITY);
        }
        Interval::new(1.0 / self.hi, 1.0 / self.lo)
    }
    fn sqr(self) -> Interval {
        let a = self.lo * self.lo;
        let b = self.hi * self.hi;
        if self.contains_zero() {
            Interval::new(0.0, a.max(b))
        } else {
            Interval::new(a, b)
        }
    }
    /// Integer power, exact for the monotone pieces.
    pub fn powi(self, n: i32) -> Interval {
        if n == 0 {
            return Interval::ONE;
        }
        if n < 0 {
            return self.powi(-n).recip();
        }
        let a = self.lo.powi(n);
        let b = self.hi.powi(n);
        if n % 2 == 0 && self.contains_zero() {
            Interval::new(0.0, a.max(b))
        } else {
            Interval::new(a, b)
        }
    }
    fn monotone(self, f: impl Fn(f64) -> f64, increasing: bool) -> Interval {
        if increasing {
            Interval::new(f(self.lo), f(self.hi))
        } else {
            Interval::new(f(self.hi), f(self.lo))
        }
    }
}

/// NaN-propagating min/max: a NaN anywhere must stay visible so it becomes a domain error.
fn fmin(a: f64, b: f64) -> f64 {
    if a.is_nan() || b.is_nan() {
        f64::NAN
    } else {
        a.min(b)
    }
}
fn fmax(a: f64, b: f64) -> f64 {
    if a.is_nan() || b.is_nan() {
        f64::NAN
    } else {
        a.max(b)
    }
}

impl Add for Interval {
    type Output = Interval;
    fn add(self, o: Interval) -> Interval {
        Interval {
            lo: self.lo + o.lo,
            hi: self.hi + o.hi,
        }
    }
}
impl Sub for Interval {
    type Output = Interval;
    fn sub(self, o: Interval) -> Interval {
        Interval {
            lo: self.lo - o.hi,
            hi: self.hi - o.lo,
        }
    }
}
impl Neg for Interval {
    type Output = Interval;
    fn neg(self) -> Interval {
        Interval {
            lo: -self.hi,
            hi: -self.lo,
        }
    }
}
impl Mul for Interval {
    type Output = Interval;
    fn mul(self, o: Interval) -> Interval {
        Interval::mul(self, o)
    }
}
impl Div for Interval {
    type Output = Interval;
    fn div(self, o: Interval) -> Interval {
        if self.is_point() && o.is_point() {
            return Interval::point(self.lo / o.lo);
        }
        self * o.recip()
    }
}

/// An interval value with an interval derivative with respect to one seeded input.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Dual {
    pub v: Interval,
    pub d: Interval,
}

impl Dual {
    /// A known number (no uncertainty, no derivative).
    pub fn constant(x: f64) -> Self {
        Dual {
            v: Interval::point(x),
            d: Interval::ZERO,
        }
    }
    /// An input over `v` whose derivative is seeded (`seed` true) or not.
    pub fn input(v: Interval, seed: bool) -> Self {
        Dual {
            v,
            d: if seed { Interval::ONE } else { Interval::ZERO },
        }
    }
    /// Exactly the constant one (the unit conversion factor `uom` multiplies by).
    pub fn is_one(self) -> bool {
        self.v.lo == 1.0 && self.v.hi == 1.0 && self.d.lo == 0.0 && self.d.hi == 0.0
    }

    /// The value of a point evaluation (the low end; equal to the high end for points).
    pub fn value(self) -> f64 {
        self.v.lo
    }
    pub fn is_finite(self) -> bool {
        self.v.is_finite() && !self.v.lo.is_nan() && !self.v.hi.is_nan()
    }

    pub fn recip(self) -> Dual {
        let v = self.v.recip();
        // d(1/x) = -dx / x²
        Dual {
            v,
            d: -(self.d * v.sqr()),
        }
    }
    pub fn sqrt(self) -> Dual {
        let v = self.v.monotone(f64::sqrt, true);
        Dual {
            v,
            d: self.d / (Interval::point(2.0) * v),
        }
    }
    pub fn exp(self) -> Dual {
        let v = self.v.monotone(f64::exp, true);
        Dual { v, d: self.d * v }
    }
    pub fn ln(self) -> Dual {
        Dual {
            v: self.v.monotone(f64::ln, true),
            d: self.d / self.v,
        }
    }
    pub fn log10(self) -> Dual {
        let l = self.ln();
        let k = Interval::point(std::f64::consts::LN_10);
        Dual {
            v: l.v / k,
            d: l.d / k,
        }
    }
    pub fn abs(self) -> Dual {
        if self.v.lo >= 0.0 {
            self
        } else if self.v.hi <= 0.0 {
            -self
        } else {
            // Across zero: |x| is Lipschitz with generalised derivative in [-1, 1]·dx.
            Dual {
                v: Interval::new(0.0, (-self.v.lo).max(self.v.hi)),
                d: self.d.hull(-self.d),
            }
        }
    }
    pub fn min(self, o: Dual) -> Dual {
        if self.v.hi <= o.v.lo {
            self
        } else if o.v.hi <= self.v.lo {
            o
        } else {
            // Where either may be the smaller, the derivative is either one (or between).
            Dual {
                v: Interval::new(self.v.lo.min(o.v.lo), self.v.hi.min(o.v.hi)),
                d: self.d.hull(o.d),
            }
        }
    }
    pub fn max(self, o: Dual) -> Dual {
        -((-self).min(-o))
    }
    pub fn powi(self, n: i32) -> Dual {
        if n == 0 {
            return Dual::constant(1.0);
        }
        Dual {
            v: self.v.powi(n),
            d: Interval::point(f64::from(n)) * self.v.powi(n - 1) * self.d,
        }
    }
    /// A real power of a positive base: exp(p · ln x).
    pub fn powf(self, p: Dual) -> Dual {
        (p * self.ln()).exp()
    }
}

impl Add for Dual {
    type Output = Dual;
    fn add(self, o: Dual) -> Dual {
        Dual {
            v: self.v + o.v,
            d: self.d + o.d,
        }
    }
}
impl Sub for Dual {
    type Output = Dual;
    fn sub(self, o: Dual) -> Dual {
        Dual {
            v: self.v - o.v,
            d: self.d - o.d,
        }
    }
}
impl Neg for Dual {
    type Output = Dual;
    fn neg(self) -> Dual {
        Dual {
            v: -self.v,
            d: -self.d,
        }
    }
}
impl Dual {
    /// Exact numbers without derivatives: what the nominal pass and the passes at points
    /// compute with, where the interval and derivative rules reduce to one operation.
    #[inline]
    fn plain_pair(self, o: Dual) -> bool {
        self.v.is_point() && o.v.is_point() && self.d == Interval::ZERO && o.d == Interval::ZERO
    }
}

impl Mul for Dual {
    type Output = Dual;
    #[inline]
    fn mul(self, o: Dual) -> Dual {
        if self.plain_pair(o) {
            return Dual::constant(self.v.lo * o.v.lo);
        }
        self.mul_rule(o)
    }
}

impl Dual {
    /// The product rule over intervals (the general case of `*`).
    fn mul_rule(self, o: Dual) -> Dual {
        if o.is_one() {
            return self;
        }
        // Without derivatives (most passes carry none) the derivative stays zero. Where the
        // full rule would give NaN (0·∞), the value is not finite either, so the pass reports
        // the same domain error.
        if self.d == Interval::ZERO && o.d == Interval::ZERO {
            return Dual {
                v: self.v * o.v,
                d: Interval::ZERO,
            };
        }
        Dual {
            v: self.v * o.v,
            d: self.d * o.v + self.v * o.d,
        }
    }
}
impl Div for Dual {
    type Output = Dual;
    #[inline]
    fn div(self, o: Dual) -> Dual {
        if self.plain_pair(o) {
            return Dual::constant(self.v.lo / o.v.lo);
        }
        self.div_rule(o)
    }
}

impl Dual {
    /// The quotient rule over intervals (the general case of `/`).
    fn div_rule(self, o: Dual) -> Dual {
        if o.is_one() {
            return self;
        }
        let v = self.v / o.v;
        // As for the product: without derivatives the quotient's stays zero.
        if self.d == Interval::ZERO && o.d == Interval::ZERO {
            return Dual {
                v,
                d: Interval::ZERO,
            };
        }
        // d(a/b) = (da - (a/b)·db) / b
        Dual {
            v,
            d: (self.d - v * o.d) / o.v,
        }
    }
}
/// Required by `num_traits::Num`; never used by the language (which has no remainder).
impl Rem for Dual {
    type Output = Dual;
    fn rem(self, o: Dual) -> Dual {
        Dual::constant(self.v.lo % o.v.lo)
    }
}
impl PartialOrd for Dual {
    /// Ordered by value where the intervals do not overlap; `uom` only compares its
    /// conversion factors, which are points.
    fn partial_cmp(&self, o: &Dual) -> Option<std::cmp::Ordering> {
        if self.v.hi < o.v.lo {
            Some(std::cmp::Ordering::Less)
        } else if self.v.lo > o.v.hi {
            Some(std::cmp::Ordering::Greater)
        } else if self.v == o.v {
            Some(std::cmp::Ordering::Equal)
        } else {
            None
        }
    }
}

impl num_traits::Zero for Dual {
    fn zero() -> Dual {
        Dual::constant(0.0)
    }
    fn is_zero(&self) -> bool {
        self.v == Interval::ZERO && self.d == Interval::ZERO
    }
}
impl num_traits::One for Dual {
    fn one() -> Dual {
        Dual::constant(1.0)
    }
}
impl num_traits::Num for Dual {
    type FromStrRadixErr = num_traits::ParseFloatError;
    fn from_str_radix(s: &str, radix: u32) -> Result<Dual, Self::FromStrRadixErr> {
        f64::from_str_radix(s, radix).map(Dual::constant)
    }
}

// The storage-type traits `uom` needs. Our quantities are always stored in the SI base
// units, so every conversion coefficient is one.
impl uom::ConversionFactor<Dual> for Dual {
    fn powi(self, e: i32) -> Dual {
        // `uom` raises each base unit's coefficient (always exactly one here) to the power
        // of the dimension's exponent on every multiplication; keep that free.
        if self.is_one() {
            return self;
        }
        Dual::powi(self, e)
    }
    fn value(self) -> Dual {
        self
    }
}
impl uom::Conversion<Dual> for Dual {
    type T = Dual;
    fn conversion(&self) -> Dual {
        *self
    }
}
macro_rules! si_base_units {
    ($($unit:path),* $(,)?) => {
        $(impl uom::Conversion<Dual> for $unit {
            type T = Dual;
        })*
    };
}
si_base_units!(
    uom::si::length::meter,
    uom::si::mass::kilogram,
    uom::si::time::second,
    uom::si::electric_current::ampere,
    uom::si::thermodynamic_temperature::kelvin,
    uom::si::amount_of_substance::mole,
    uom::si::luminous_intensity::candela,
);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn derivative_of_product_encloses_true_derivative() {
        // f(x) = x·x on [1, 2]: f' = 2x ∈ [2, 4].
        let x = Dual::input(Interval::new(1.0, 2.0), true);
        let f = x * x;
        assert!(f.d.lo <= 2.0 && f.d.hi >= 4.0);
        assert!(f.d.lo > 0.0, "monotone increasing must be provable");
    }

    #[test]
    fn division_by_interval_across_zero_is_unbounded() {
        let x = Dual::input(Interval::new(-1.0, 1.0), false);
        let r = Dual::constant(1.0) / x;
        assert!(!r.is_finite());
    }
}
