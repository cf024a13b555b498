//! A unit: a dimension together with its exact factor to coherent SI.
//!
//! `km/h` is dimension `m s^-1` with factor `5/18`; a value in that unit times the
//! factor is the SI value the checked model stores. Operations are checked and return
//! `None` on overflow so that hostile unit expressions become diagnostics upstream.

use std::fmt;

use super::dimension::Dimension;
use super::rational::Rational;
use super::scale::Scale;

/// A unit of measure.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Unit {
    /// What the unit measures.
    pub dimension: Dimension,
    /// Its size in coherent SI units of that dimension.
    pub scale: Scale,
}

impl Unit {
    /// The unit of a pure number.
    pub const ONE: Unit = Unit {
        dimension: Dimension::NONE,
        scale: Scale::ONE,
    };

    /// A unit from its parts.
    pub fn new(dimension: Dimension, scale: Scale) -> Unit {
        Unit { dimension, scale }
    }

    /// Checked product.
    pub fn mul(&self, other: &Unit) -> Option<Unit> {
        Some(Unit {
            dimension: self.dimension.mul(&other.dimension)?,
            scale: self.scale.mul(&other.scale)?,
        })
    }

    /// Checked quotient.
    pub fn div(&self, other: &Unit) -> Option<Unit> {
        Some(Unit {
            dimension: self.dimension.div(&other.dimension)?,
            scale: self.scale.div(&other.scale)?,
        })
    }

    /// Checked rational power.
    pub fn pow(&self, exponent: Rational) -> Option<Unit> {
        Some(Unit {
            dimension: self.dimension.pow(exponent)?,
            scale: self.scale.pow(exponent)?,
        })
    }

    /// Checked square root.
    pub fn sqrt(&self) -> Option<Unit> {
        self.pow(Rational::HALF)
    }

    /// Checked reciprocal.
    pub fn recip(&self) -> Option<Unit> {
        Unit::ONE.div(self)
    }

    /// The factor that turns a value in this unit into coherent SI.
    pub fn to_si(&self) -> f64 {
        self.scale.to_f64()
    }
}

impl fmt::Display for Unit {
    /// Factor and SI dimension: `463/900 m s^-1`, `pi/180 rad`, `m` when the factor is one.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match (self.scale.is_one(), self.dimension == Dimension::NONE) {
            (true, _) => write!(f, "{}", self.dimension),
            (false, true) => write!(f, "{}", self.scale),
            (false, false) => write!(f, "{} {}", self.scale, self.dimension),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::dimension::Base;
    use super::*;
    use proptest::prelude::*;

    fn unit(exponents: [i64; 3], num: u64, den: u64, pi: i64) -> Unit {
        let [length, mass, time] = exponents;
        let dimension = [
            (Base::Length, length),
            (Base::Mass, mass),
            (Base::Time, time),
        ]
        .iter()
        .try_fold(Dimension::NONE, |acc, (base, e)| {
            acc.mul(&Dimension::base(*base).pow(Rational::integer(*e))?)
        })
        .expect("small exponents");
        let scale = Scale::from_ratio(num, den)
            .and_then(|s| s.mul(&Scale::pi_power(Rational::integer(pi))))
            .expect("small ratio");
        Unit::new(dimension, scale)
    }

    #[test]
    fn displays_factor_then_dimension() {
        assert_eq!(
            unit([1, 0, -1], 1852, 3600, 0).to_string(),
            "463/900 m s^-1"
        );
        assert_eq!(unit([1, 0, 0], 1, 1, 0).to_string(), "m");
        assert_eq!(unit([0, 0, 0], 1, 180, 1).to_string(), "pi/180");
        assert_eq!(Unit::ONE.to_string(), "1");
    }

    fn small_unit() -> impl Strategy<Value = Unit> {
        (
            [-3i64..=3, -3i64..=3, -3i64..=3],
            1u64..5000,
            1u64..5000,
            -2i64..=2,
        )
            .prop_map(|(exponents, num, den, pi)| unit(exponents, num, den, pi))
    }

    fn small_exponent() -> impl Strategy<Value = Rational> {
        (-4i64..=4, 1i64..=3).prop_map(|(n, d)| Rational::new(n, d).unwrap_or(Rational::ONE))
    }

    proptest! {
        #[test]
        fn product_is_associative_and_commutative(a in small_unit(), b in small_unit(), c in small_unit()) {
            prop_assert_eq!(a.mul(&b), b.mul(&a));
            prop_assert_eq!(a.mul(&b).and_then(|ab| ab.mul(&c)), b.mul(&c).and_then(|bc| a.mul(&bc)));
        }

        #[test]
        fn reciprocal_and_quotient_are_inverses(a in small_unit(), b in small_unit()) {
            prop_assert_eq!(a.recip().and_then(|r| r.mul(&a)), Some(Unit::ONE));
            prop_assert_eq!(a.div(&b).and_then(|q| q.mul(&b)), Some(a));
        }

        #[test]
        fn power_laws_hold(a in small_unit(), b in small_unit(), p in small_exponent(), q in small_exponent()) {
            prop_assert_eq!(a.pow(p).and_then(|x| x.pow(q)), p.checked_mul(q).and_then(|pq| a.pow(pq)));
            prop_assert_eq!(
                a.mul(&b).and_then(|ab| ab.pow(p)),
                a.pow(p).and_then(|ap| b.pow(p).and_then(|bp| ap.mul(&bp)))
            );
            prop_assert_eq!(a.sqrt().and_then(|r| r.mul(&r)), Some(a));
        }

        #[test]
        fn overflowing_powers_are_none_not_panics(a in small_unit(), p in any::<i64>(), q in 1i64..i64::MAX) {
            if let Some(exponent) = Rational::new(p, q) {
                let _ = a.pow(exponent).and_then(|x| x.pow(exponent)).and_then(|x| x.mul(&a));
            }
        }
    }
}
