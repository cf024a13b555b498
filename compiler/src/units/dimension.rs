//! Dimension vectors: rational exponents over the seven SI base quantities, plus two
//! "soft" slots (plane angle and cycle) that SI treats as dimensionless.
//!
//! Why the soft slots: SI makes rad = 1 and Hz = 1/s, which is what lets a textbook
//! formula like `yaw_rate = (v_right - v_left) / track` type-check without casts. But
//! the same rule hides a classic factor-2-pi bug (a rate in Hz used as rad/s). Keeping
//! angle and cycle exponents on the side lets the checker accept the first and flag the
//! second: two dimensions are *compatible* when their hard (SI) parts agree, and they
//! *conflict* when one carries angle where the other carries cycles.

use std::fmt;

use super::rational::Rational;

/// One axis of a dimension vector.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Base {
    /// Length (metre).
    Length,
    /// Mass (kilogram).
    Mass,
    /// Time (second).
    Time,
    /// Electric current (ampere).
    Current,
    /// Thermodynamic temperature (kelvin).
    Temperature,
    /// Amount of substance (mole).
    Amount,
    /// Luminous intensity (candela).
    Luminosity,
    /// Plane angle (radian): dimensionless in SI, tracked softly.
    Angle,
    /// Cycles of a periodic phenomenon (as in Hz): dimensionless in SI, tracked softly.
    Cycle,
}

impl Base {
    /// Every axis, in vector order.
    pub const ALL: [Base; 9] = [
        Base::Length,
        Base::Mass,
        Base::Time,
        Base::Current,
        Base::Temperature,
        Base::Amount,
        Base::Luminosity,
        Base::Angle,
        Base::Cycle,
    ];

    /// The SI symbol of the axis's coherent unit.
    pub fn symbol(self) -> &'static str {
        match self {
            Base::Length => "m",
            Base::Mass => "kg",
            Base::Time => "s",
            Base::Current => "A",
            Base::Temperature => "K",
            Base::Amount => "mol",
            Base::Luminosity => "cd",
            Base::Angle => "rad",
            Base::Cycle => "cycle",
        }
    }

    fn is_soft(self) -> bool {
        matches!(self, Base::Angle | Base::Cycle)
    }

    fn index(self) -> usize {
        self as usize
    }
}

/// A dimension: one rational exponent per [`Base`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Dimension {
    exponents: [Rational; 9],
}

impl Dimension {
    /// A pure number.
    pub const NONE: Dimension = Dimension {
        exponents: [Rational::ZERO; 9],
    };

    /// The dimension of one base quantity.
    pub fn base(base: Base) -> Dimension {
        let mut d = Dimension::NONE;
        d.exponents[base.index()] = Rational::ONE;
        d
    }

    /// The exponent of one axis.
    pub fn exponent(&self, base: Base) -> Rational {
        self.exponents[base.index()]
    }

    fn zip(
        &self,
        other: &Dimension,
        op: impl Fn(Rational, Rational) -> Option<Rational>,
    ) -> Option<Dimension> {
        let mut out = Dimension::NONE;
        for i in 0..9 {
            out.exponents[i] = op(self.exponents[i], other.exponents[i])?;
        }
        Some(out)
    }

    /// Dimension of a product; `None` on exponent overflow.
    pub fn mul(&self, other: &Dimension) -> Option<Dimension> {
        self.zip(other, Rational::checked_add)
    }

    /// Dimension of a quotient; `None` on exponent overflow.
    pub fn div(&self, other: &Dimension) -> Option<Dimension> {
        self.zip(other, Rational::checked_sub)
    }

    /// Dimension raised to a rational power; `None` on exponent overflow.
    pub fn pow(&self, exponent: Rational) -> Option<Dimension> {
        let mut out = Dimension::NONE;
        for i in 0..9 {
            out.exponents[i] = self.exponents[i].checked_mul(exponent)?;
        }
        Some(out)
    }

    /// Dimension of a reciprocal.
    pub fn recip(&self) -> Dimension {
        // Negating a normalised rational can overflow only at i64::MIN, which
        // `Rational::new` never produces.
        Dimension::NONE.div(self).unwrap_or(Dimension::NONE)
    }

    /// True when the SI (hard) exponents are all zero: a pure number, an angle or
    /// a cycle count.
    pub fn is_dimensionless(&self) -> bool {
        Base::ALL
            .iter()
            .filter(|b| !b.is_soft())
            .all(|b| self.exponent(*b).is_zero())
    }

    /// True for a plain angle (dimensionless with angle exponent one), the only
    /// kind of quantity that may `wrap`.
    pub fn is_angle(&self) -> bool {
        self.is_dimensionless()
            && self.exponent(Base::Angle) == Rational::ONE
            && self.exponent(Base::Cycle).is_zero()
    }

    /// True when SI considers the two equal (soft axes ignored); values of
    /// compatible dimensions may be added, compared and assigned.
    pub fn compatible(&self, other: &Dimension) -> bool {
        Base::ALL
            .iter()
            .filter(|b| !b.is_soft())
            .all(|b| self.exponent(*b) == other.exponent(*b))
    }

    /// True when the two are compatible but one counts angle where the other counts
    /// cycles (rad/s against Hz): the factor 2 pi that SI cannot see.
    pub fn angle_cycle_conflict(&self, other: &Dimension) -> bool {
        let angle_differs = self.exponent(Base::Angle) != other.exponent(Base::Angle);
        let cycle_differs = self.exponent(Base::Cycle) != other.exponent(Base::Cycle);
        self.compatible(other)
            && angle_differs
            && cycle_differs
            && (!self.exponent(Base::Cycle).is_zero() || !other.exponent(Base::Cycle).is_zero())
            && (!self.exponent(Base::Angle).is_zero() || !other.exponent(Base::Angle).is_zero())
    }

    /// The same dimension with the soft axes cleared: what SI itself sees.
    pub fn hard(&self) -> Dimension {
        let mut out = *self;
        out.exponents[Base::Angle.index()] = Rational::ZERO;
        out.exponents[Base::Cycle.index()] = Rational::ZERO;
        out
    }
}

impl fmt::Display for Dimension {
    /// SI form with exponents, e.g. `m s^-2`, `rad s^-1`, `m s^-3/2`; `1` for none.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut first = true;
        for base in Base::ALL {
            let e = self.exponent(base);
            if e.is_zero() {
                continue;
            }
            if !first {
                f.write_str(" ")?;
            }
            first = false;
            f.write_str(base.symbol())?;
            if e != Rational::ONE {
                write!(f, "^{e}")?;
            }
        }
        if first {
            f.write_str("1")?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn length() -> Dimension {
        Dimension::base(Base::Length)
    }

    fn time() -> Dimension {
        Dimension::base(Base::Time)
    }

    #[test]
    fn displays_in_si_form() {
        let accel = length()
            .div(&time().pow(Rational::integer(2)).unwrap())
            .unwrap();
        assert_eq!(accel.to_string(), "m s^-2");
        let density = accel.mul(&time().pow(Rational::HALF).unwrap()).unwrap();
        assert_eq!(density.to_string(), "m s^-3/2");
        assert_eq!(Dimension::NONE.to_string(), "1");
    }

    #[test]
    fn angles_are_dimensionless_but_tracked() {
        let rad_per_s = Dimension::base(Base::Angle).div(&time()).unwrap();
        let per_s = time().recip();
        let hz = Dimension::base(Base::Cycle).div(&time()).unwrap();
        assert!(rad_per_s.compatible(&per_s));
        assert!(!rad_per_s.angle_cycle_conflict(&per_s));
        assert!(!hz.angle_cycle_conflict(&per_s));
        assert!(rad_per_s.angle_cycle_conflict(&hz));
        assert!(Dimension::base(Base::Angle).is_angle());
        assert!(!length().is_angle());
    }

    /// Any dimension with small rational exponents on all nine axes.
    fn any_dimension() -> impl Strategy<Value = Dimension> {
        proptest::collection::vec((-4i64..=4, 1i64..=3), 9).prop_map(|exponents| {
            Base::ALL
                .iter()
                .zip(exponents)
                .fold(Dimension::NONE, |acc, (base, (n, d))| {
                    let exponent = Rational::new(n, d).unwrap_or(Rational::ZERO);
                    let axis = Dimension::base(*base)
                        .pow(exponent)
                        .unwrap_or(Dimension::NONE);
                    acc.mul(&axis).unwrap_or(acc)
                })
        })
    }

    fn small_exponent() -> impl Strategy<Value = Rational> {
        (-5i64..=5, 1i64..=4).prop_map(|(n, d)| Rational::new(n, d).unwrap_or(Rational::ONE))
    }

    proptest! {
        #[test]
        fn product_is_associative_and_commutative(a in any_dimension(), b in any_dimension(), c in any_dimension()) {
            prop_assert_eq!(a.mul(&b), b.mul(&a));
            prop_assert_eq!(a.mul(&b).and_then(|ab| ab.mul(&c)), b.mul(&c).and_then(|bc| a.mul(&bc)));
        }

        #[test]
        fn reciprocal_is_inverse(a in any_dimension(), b in any_dimension()) {
            prop_assert_eq!(a.mul(&a.recip()), Some(Dimension::NONE));
            prop_assert_eq!(a.div(&b).and_then(|q| q.mul(&b)), Some(a));
        }

        #[test]
        fn power_laws_hold(a in any_dimension(), b in any_dimension(), p in small_exponent(), q in small_exponent()) {
            prop_assert_eq!(a.pow(p).and_then(|x| x.pow(q)), p.checked_mul(q).and_then(|pq| a.pow(pq)));
            prop_assert_eq!(
                a.mul(&b).and_then(|ab| ab.pow(p)),
                a.pow(p).and_then(|ap| b.pow(p).and_then(|bp| ap.mul(&bp)))
            );
        }

        #[test]
        fn compatibility_ignores_only_the_soft_axes(a in any_dimension()) {
            prop_assert!(a.compatible(&a.hard()));
            prop_assert!(!a.angle_cycle_conflict(&a));
            let longer = a.mul(&Dimension::base(Base::Length));
            prop_assert_eq!(longer.map(|l| l.compatible(&a)), Some(false));
        }

        #[test]
        fn overflow_is_none_not_panic(a in any_dimension(), p in any::<i64>(), q in 1i64..i64::MAX) {
            if let Some(exponent) = Rational::new(p, q) {
                let _ = a.pow(exponent).and_then(|x| x.pow(exponent)).and_then(|x| x.mul(&a));
            }
        }
    }
}
