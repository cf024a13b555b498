//! Exact rational numbers for unit exponents and exact conversion factors.
//!
//! Arithmetic is checked: an overflow yields `None` instead of a panic or a wrong
//! value, so hostile input (say `m^1000000^1000000`) becomes a diagnostic upstream.

use std::cmp::Ordering;
use std::fmt;

/// A normalised fraction `num / den` with `den > 0` and `gcd(num, den) == 1`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize)]
pub struct Rational {
    num: i64,
    den: i64,
}

fn gcd(mut a: i64, mut b: i64) -> i64 {
    a = a.abs();
    b = b.abs();
    while b != 0 {
        let r = a % b;
        a = b;
        b = r;
    }
    a
}

impl Rational {
    /// Zero.
    pub const ZERO: Rational = Rational { num: 0, den: 1 };
    /// One.
    pub const ONE: Rational = Rational { num: 1, den: 1 };
    /// One half, the exponent of a square root.
    pub const HALF: Rational = Rational { num: 1, den: 2 };

    /// `num / den`, normalised; `None` when `den == 0` or normalising overflows.
    pub fn new(num: i64, den: i64) -> Option<Rational> {
        if den == 0 || num == i64::MIN || den == i64::MIN {
            return None;
        }
        let g = gcd(num, den).max(1);
        let (mut n, mut d) = (num / g, den / g);
        if d < 0 {
            n = -n;
            d = -d;
        }
        Some(Rational { num: n, den: d })
    }

    /// The whole number `n`.
    pub const fn integer(n: i64) -> Rational {
        Rational { num: n, den: 1 }
    }

    /// Numerator (carries the sign).
    pub fn numer(self) -> i64 {
        self.num
    }

    /// Denominator (always positive).
    pub fn denom(self) -> i64 {
        self.den
    }

    /// True for zero.
    pub fn is_zero(self) -> bool {
        self.num == 0
    }

    /// True when the denominator is one.
    pub fn is_integer(self) -> bool {
        self.den == 1
    }

    /// Checked sum.
    pub fn checked_add(self, other: Rational) -> Option<Rational> {
        let num = self
            .num
            .checked_mul(other.den)?
            .checked_add(other.num.checked_mul(self.den)?)?;
        Rational::new(num, self.den.checked_mul(other.den)?)
    }

    /// Checked difference.
    pub fn checked_sub(self, other: Rational) -> Option<Rational> {
        self.checked_add(other.checked_neg()?)
    }

    /// Checked product.
    pub fn checked_mul(self, other: Rational) -> Option<Rational> {
        // Cross-reduce first so that exact results do not overflow needlessly.
        let g1 = gcd(self.num, other.den).max(1);
        let g2 = gcd(other.num, self.den).max(1);
        Rational::new(
            (self.num / g1).checked_mul(other.num / g2)?,
            (self.den / g2).checked_mul(other.den / g1)?,
        )
    }

    /// Checked quotient; `None` for division by zero.
    pub fn checked_div(self, other: Rational) -> Option<Rational> {
        self.checked_mul(other.checked_recip()?)
    }

    /// Checked negation.
    pub fn checked_neg(self) -> Option<Rational> {
        Some(Rational {
            num: self.num.checked_neg()?,
            den: self.den,
        })
    }

    /// Checked reciprocal; `None` for zero.
    pub fn checked_recip(self) -> Option<Rational> {
        Rational::new(self.den, self.num)
    }

    /// The nearest `f64`.
    pub fn to_f64(self) -> f64 {
        self.num as f64 / self.den as f64
    }

    /// The exact rational equal to `x`, when `x` is a fraction with a small
    /// denominator (at most 1000); used to read exponents written as decimals.
    pub fn from_f64_exact(x: f64) -> Option<Rational> {
        if !x.is_finite() || x.abs() > 1e12 {
            return None;
        }
        (1..=1000i64).find_map(|den| {
            let num = x * den as f64;
            if num == num.round() {
                Rational::new(num as i64, den)
            } else {
                None
            }
        })
    }
}

impl PartialOrd for Rational {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl Ord for Rational {
    fn cmp(&self, other: &Self) -> Ordering {
        (i128::from(self.num) * i128::from(other.den))
            .cmp(&(i128::from(other.num) * i128::from(self.den)))
    }
}

impl fmt::Display for Rational {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.den == 1 {
            write!(f, "{}", self.num)
        } else {
            write!(f, "{}/{}", self.num, self.den)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normalises_sign_and_common_factors() {
        assert_eq!(Rational::new(2, -4), Rational::new(-1, 2));
        assert_eq!(Rational::new(0, 7), Some(Rational::ZERO));
        assert_eq!(Rational::new(1, 0), None);
    }

    #[test]
    fn overflow_is_reported_not_wrapped() {
        let big = Rational::integer(i64::MAX / 2);
        assert_eq!(big.checked_mul(Rational::integer(4)), None);
        assert_eq!(big.checked_add(big).and_then(|s| s.checked_add(big)), None);
    }

    #[test]
    fn decimal_exponents_are_read_exactly() {
        assert_eq!(Rational::from_f64_exact(0.5), Some(Rational::HALF));
        assert_eq!(Rational::from_f64_exact(-1.5), Rational::new(-3, 2));
        assert_eq!(Rational::from_f64_exact(f64::NAN), None);
    }
}
