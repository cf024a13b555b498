//! Exact conversion factors to coherent SI.
//!
//! A factor is kept as a product of prime powers and a power of pi, every exponent an
//! exact [`Rational`]. That closed form is what keeps `kn * h == nmi`, `deg^2 / deg ==
//! deg` and `sqrt(h)^2 == h` exact: floating point would leave a residue in each, and
//! a checker comparing units for equality must not depend on rounding. Factors are
//! positive by construction (no unit has a negative size), so no sign is stored.
//!
//! Arithmetic is checked: exponent overflow, or more distinct primes than a factor can
//! hold, yields `None`.

use std::fmt;

use super::rational::Rational;

/// Most distinct primes one factor can carry. The catalogue's richest unit (psi) needs
/// eight; products of a handful of trade units stay well inside this.
pub const MAX_PRIMES: usize = 16;

/// Trial division finds every prime factor below this bound; a cofactor left over that
/// is below its square is then prime. Larger cofactors are refused rather than risk a
/// composite "prime" that would break the canonical form.
const TRIAL_DIVISION_BOUND: u64 = 1 << 20;

/// An exact positive conversion factor: `product(p_i ^ e_i) * pi ^ e_pi`.
///
/// Canonical: primes ascending, no zero exponents, unused slots zeroed; so the derived
/// equality is exact equality of the numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Scale {
    primes: [(u64, Rational); MAX_PRIMES],
    len: usize,
    pi: Rational,
}

impl Scale {
    /// The factor one.
    pub const ONE: Scale = Scale {
        primes: [(0, Rational::ZERO); MAX_PRIMES],
        len: 0,
        pi: Rational::ZERO,
    };

    /// The factor pi.
    pub const PI: Scale = Scale {
        primes: [(0, Rational::ZERO); MAX_PRIMES],
        len: 0,
        pi: Rational::ONE,
    };

    /// `num / den` exactly; `None` for a zero operand or when a prime factor above
    /// 2^20 cannot be certified by trial division.
    pub fn from_ratio(num: u64, den: u64) -> Option<Scale> {
        let mut out = Scale::ONE;
        for (prime, power) in factorize(num)? {
            out = out.mul(&Scale::prime_power(prime, Rational::integer(power)))?;
        }
        for (prime, power) in factorize(den)? {
            out = out.div(&Scale::prime_power(prime, Rational::integer(power)))?;
        }
        Some(out)
    }

    /// Ten to an integer power: the factor of an SI prefix.
    pub fn power_of_ten(power: i64) -> Option<Scale> {
        let exponent = Rational::integer(power);
        Scale::prime_power(2, exponent).mul(&Scale::prime_power(5, exponent))
    }

    /// Pi to a rational power.
    pub fn pi_power(exponent: Rational) -> Scale {
        Scale {
            pi: exponent,
            ..Scale::ONE
        }
    }

    /// An exact decimal (`0.3048`, `4.4482216152605`, `1e-4` is not accepted) or a
    /// quotient of two (`1852/3600`); `None` for anything else or a zero.
    pub fn from_exact_text(text: &str) -> Option<Scale> {
        match text.split_once('/') {
            Some((num, den)) => parse_decimal(num.trim())?.div(&parse_decimal(den.trim())?),
            None => parse_decimal(text.trim()),
        }
    }

    fn prime_power(prime: u64, exponent: Rational) -> Scale {
        let mut out = Scale::ONE;
        if !exponent.is_zero() {
            out.primes[0] = (prime, exponent);
            out.len = 1;
        }
        out
    }

    /// The exponent of pi.
    pub fn pi_exponent(&self) -> Rational {
        self.pi
    }

    /// `(prime, exponent)` pairs, primes ascending, exponents non-zero.
    pub fn prime_exponents(&self) -> impl Iterator<Item = (u64, Rational)> + '_ {
        self.primes[..self.len].iter().copied()
    }

    /// True for the factor one.
    pub fn is_one(&self) -> bool {
        self.len == 0 && self.pi.is_zero()
    }

    /// Checked product.
    pub fn mul(&self, other: &Scale) -> Option<Scale> {
        self.merge(other, Rational::checked_add)
    }

    /// Checked quotient.
    pub fn div(&self, other: &Scale) -> Option<Scale> {
        self.merge(other, Rational::checked_sub)
    }

    /// Checked rational power.
    pub fn pow(&self, exponent: Rational) -> Option<Scale> {
        let mut out = Scale::ONE;
        for (prime, e) in self.prime_exponents() {
            let power = e.checked_mul(exponent)?;
            if !power.is_zero() {
                out.primes[out.len] = (prime, power);
                out.len += 1;
            }
        }
        out.pi = self.pi.checked_mul(exponent)?;
        Some(out)
    }

    /// Checked square root.
    pub fn sqrt(&self) -> Option<Scale> {
        self.pow(Rational::HALF)
    }

    /// Checked reciprocal.
    pub fn recip(&self) -> Option<Scale> {
        Scale::ONE.div(self)
    }

    /// Merges two sorted prime lists, combining exponents of shared primes with `op`.
    fn merge(
        &self,
        other: &Scale,
        op: fn(Rational, Rational) -> Option<Rational>,
    ) -> Option<Scale> {
        let mut out = Scale::ONE;
        let (mut i, mut j) = (0, 0);
        while i < self.len || j < other.len {
            let left = self.primes[..self.len].get(i).copied();
            let right = other.primes[..other.len].get(j).copied();
            let (prime, exponent) = match (left, right) {
                (Some((p, a)), Some((q, b))) if p == q => {
                    i += 1;
                    j += 1;
                    (p, op(a, b)?)
                }
                (Some((p, a)), Some((q, _))) if p < q => {
                    i += 1;
                    (p, op(a, Rational::ZERO)?)
                }
                (Some((p, a)), None) => {
                    i += 1;
                    (p, op(a, Rational::ZERO)?)
                }
                (_, Some((q, b))) => {
                    j += 1;
                    (q, op(Rational::ZERO, b)?)
                }
                (None, None) => break,
            };
            if exponent.is_zero() {
                continue;
            }
            if out.len == MAX_PRIMES {
                return None;
            }
            out.primes[out.len] = (prime, exponent);
            out.len += 1;
        }
        out.pi = op(self.pi, other.pi)?;
        Some(out)
    }

    /// The nearest `f64`, give or take an ulp or two.
    ///
    /// Integer prime powers are multiplied out exactly in `u128` first, so a factor
    /// that is a ratio of integers below 2^53 (every catalogue factor without pi) is a
    /// single correctly rounded division; pi and roots each add one rounding. When the
    /// parts themselves overflow `f64` (only for absurd factors), the value is summed
    /// in logarithms instead, so it is still the right magnitude or an honest infinity.
    pub fn to_f64(&self) -> f64 {
        let value = self.value_by_parts();
        if value.is_normal() {
            value
        } else {
            self.value_by_logarithms()
        }
    }

    fn value_by_logarithms(&self) -> f64 {
        let logarithm: f64 = self
            .prime_exponents()
            .map(|(prime, exponent)| exponent.to_f64() * (prime as f64).ln())
            .sum();
        (logarithm + self.pi.to_f64() * std::f64::consts::PI.ln()).exp()
    }

    fn value_by_parts(&self) -> f64 {
        let split = self.split();
        let mut value = split.numerator.to_f64() / split.denominator.to_f64();
        for (radicand, root) in split.numerator_roots {
            value *= root_f64(radicand, root);
        }
        for (radicand, root) in split.denominator_roots {
            value /= root_f64(radicand, root);
        }
        value * std::f64::consts::PI.powf(self.pi.to_f64())
    }

    /// Separates whole powers (multiplied out) from root terms (grouped by the
    /// fractional exponent), on the numerator and denominator side.
    fn split(&self) -> Split {
        let mut split = Split::default();
        for (prime, exponent) in self.prime_exponents() {
            let (whole, roots, magnitude) = if exponent > Rational::ZERO {
                (&mut split.numerator, &mut split.numerator_roots, exponent)
            } else {
                let magnitude = exponent.checked_neg().unwrap_or(Rational::ZERO);
                (
                    &mut split.denominator,
                    &mut split.denominator_roots,
                    magnitude,
                )
            };
            let whole_power = magnitude.numer() / magnitude.denom();
            whole.multiply(prime, whole_power);
            let fraction = Rational::new(magnitude.numer() % magnitude.denom(), magnitude.denom())
                .unwrap_or(Rational::ZERO);
            if !fraction.is_zero() {
                match roots.iter_mut().find(|(_, f)| *f == fraction) {
                    Some((radicand, _)) => radicand.multiply(prime, 1),
                    None => {
                        let mut radicand = Product::default();
                        radicand.multiply(prime, 1);
                        roots.push((radicand, fraction));
                    }
                }
            }
        }
        split
    }
}

/// An integer product kept exact while it fits in `u128`, in floating point after.
#[derive(Debug, Clone, Copy)]
enum Product {
    Exact(u128),
    Approximate(f64),
}

impl Default for Product {
    fn default() -> Self {
        Product::Exact(1)
    }
}

impl Product {
    /// Multiplies by `prime^power` (`power >= 0`), exactly while that fits.
    fn multiply(&mut self, prime: u64, power: i64) {
        let mut remaining = power.max(0);
        while remaining > 0 {
            match *self {
                Product::Exact(n) => {
                    *self = match n.checked_mul(u128::from(prime)) {
                        Some(m) => Product::Exact(m),
                        None => Product::Approximate(n as f64 * prime as f64),
                    };
                    remaining -= 1;
                }
                Product::Approximate(x) => {
                    // Beyond i32 the result is infinite anyway.
                    let rest = i32::try_from(remaining).unwrap_or(i32::MAX);
                    *self = Product::Approximate(x * (prime as f64).powi(rest));
                    remaining = 0;
                }
            }
        }
    }

    fn to_f64(self) -> f64 {
        match self {
            Product::Exact(n) => n as f64,
            Product::Approximate(x) => x,
        }
    }

    fn is_one(self) -> bool {
        matches!(self, Product::Exact(1))
    }
}

impl fmt::Display for Product {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Product::Exact(n) => write!(f, "{n}"),
            Product::Approximate(x) => write!(f, "{x:e}"),
        }
    }
}

#[derive(Debug, Default)]
struct Split {
    numerator: Product,
    denominator: Product,
    numerator_roots: Vec<(Product, Rational)>,
    denominator_roots: Vec<(Product, Rational)>,
}

fn root_f64(radicand: Product, exponent: Rational) -> f64 {
    let base = radicand.to_f64();
    if exponent == Rational::HALF {
        base.sqrt()
    } else if exponent.numer() == 1 && exponent.denom() == 3 {
        base.cbrt()
    } else {
        base.powf(exponent.to_f64())
    }
}

/// Prime factorisation by bounded trial division; `None` for zero or when a cofactor
/// too large to certify as prime remains.
fn factorize(mut n: u64) -> Option<Vec<(u64, i64)>> {
    if n == 0 {
        return None;
    }
    let mut factors = Vec::new();
    let mut candidate = 2u64;
    while candidate < TRIAL_DIVISION_BOUND && candidate * candidate <= n {
        let mut power = 0;
        while n % candidate == 0 {
            n /= candidate;
            power += 1;
        }
        if power > 0 {
            factors.push((candidate, power));
        }
        candidate += if candidate == 2 { 1 } else { 2 };
    }
    if n > 1 {
        let certified_prime =
            u128::from(n) < u128::from(TRIAL_DIVISION_BOUND) * u128::from(TRIAL_DIVISION_BOUND);
        if !certified_prime {
            return None;
        }
        factors.push((n, 1));
    }
    Some(factors)
}

/// Reads `123`, `0.3048` or `.5` exactly as `digits / 10^decimals`.
fn parse_decimal(text: &str) -> Option<Scale> {
    let (whole, fraction) = text.split_once('.').unwrap_or((text, ""));
    let digits_only = |s: &str| s.bytes().all(|b| b.is_ascii_digit());
    if whole.len() + fraction.len() == 0 || !digits_only(whole) || !digits_only(fraction) {
        return None;
    }
    let mut mantissa = 0u64;
    for digit in whole.bytes().chain(fraction.bytes()) {
        mantissa = mantissa
            .checked_mul(10)?
            .checked_add(u64::from(digit - b'0'))?;
    }
    let decimals = i64::try_from(fraction.len()).ok()?;
    Scale::from_ratio(mantissa, 1)?.div(&Scale::power_of_ten(decimals)?)
}

impl fmt::Display for Scale {
    /// A readable exact form: `463/900`, `pi/180`, `2·15^(1/2)`, `1/(2·pi)`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let split = self.split();
        let pi_term = |exponent: Rational| match exponent {
            e if e == Rational::ONE => "pi".to_string(),
            e if e.is_integer() => format!("pi^{e}"),
            e => format!("pi^({e})"),
        };
        let side = |whole: Product, roots: &[(Product, Rational)], pi: Option<Rational>| {
            let mut terms = Vec::new();
            if !whole.is_one() {
                terms.push(whole.to_string());
            }
            if let Some(pi) = pi {
                terms.push(pi_term(pi));
            }
            terms.extend(
                roots
                    .iter()
                    .map(|(radicand, e)| format!("{radicand}^({e})")),
            );
            terms
        };
        let pi_up = (self.pi > Rational::ZERO).then_some(self.pi);
        let pi_down =
            (self.pi < Rational::ZERO).then(|| self.pi.checked_neg().unwrap_or(Rational::ZERO));
        let numerator = side(split.numerator, &split.numerator_roots, pi_up);
        let denominator = side(split.denominator, &split.denominator_roots, pi_down);
        match numerator.is_empty() {
            true => f.write_str("1")?,
            false => f.write_str(&numerator.join("·"))?,
        }
        match denominator.len() {
            0 => Ok(()),
            1 => write!(f, "/{}", denominator[0]),
            _ => write!(f, "/({})", denominator.join("·")),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn ratio(num: u64, den: u64) -> Scale {
        Scale::from_ratio(num, den).expect("small ratio")
    }

    #[test]
    fn equal_numbers_have_equal_forms() {
        assert_eq!(ratio(1852, 3600), ratio(463, 900));
        assert_eq!(Scale::from_exact_text("0.3048"), Some(ratio(381, 1250)));
        assert_eq!(Scale::from_exact_text("1852/3600"), Some(ratio(463, 900)));
        assert_eq!(ratio(7, 7), Scale::ONE);
    }

    #[test]
    fn rejects_what_it_cannot_represent_exactly() {
        assert_eq!(Scale::from_ratio(0, 3), None);
        assert_eq!(Scale::from_exact_text("1e-4"), None);
        assert_eq!(Scale::from_exact_text("-2"), None);
        assert_eq!(Scale::from_exact_text("."), None);
        assert_eq!(Scale::from_exact_text("99999999999999999999999"), None);
        // 18446744073709551557 is the largest prime below 2^64: too big to certify.
        assert_eq!(Scale::from_ratio(18_446_744_073_709_551_557, 1), None);
        // A cofactor below 2^40 is certified prime: 1099511627689 is prime.
        assert!(Scale::from_ratio(1_099_511_627_689, 1).is_some());
    }

    #[test]
    fn roots_stay_exact() {
        let sixty = ratio(60, 1);
        let root = sixty.sqrt().expect("root");
        assert_eq!(root.mul(&root), Some(sixty));
        assert_eq!(root.to_string(), "2·15^(1/2)");
        assert_eq!(root.to_f64(), 60f64.sqrt());
    }

    #[test]
    fn displays_readably() {
        let degree = Scale::PI.div(&ratio(180, 1)).expect("deg");
        assert_eq!(degree.to_string(), "pi/180");
        assert_eq!(degree.recip().expect("recip").to_string(), "180/pi");
        assert_eq!(ratio(463, 900).to_string(), "463/900");
        assert_eq!(Scale::ONE.to_string(), "1");
        let per_two_pi = ratio(1, 2).div(&Scale::PI).expect("1/(2 pi)");
        assert_eq!(per_two_pi.to_string(), "1/(2·pi)");
        assert_eq!(Scale::pi_power(Rational::HALF).to_string(), "pi^(1/2)");
    }

    #[test]
    fn huge_powers_of_ten_stay_finite_in_display_and_value() {
        let tiny = Scale::power_of_ten(-300).expect("1e-300");
        assert!((tiny.to_f64() / 1e-300 - 1.0).abs() < 1e-12);
        assert!(tiny.to_string().starts_with("1/"));
    }

    #[test]
    fn factors_with_huge_parts_keep_their_magnitude() {
        // 2^1200 / 3^757 is about 1.136 (1200 ln 2 - 757 ln 3 = 0.127), though both
        // parts overflow f64 on their own.
        let two = ratio(2, 1).pow(Rational::integer(1200)).expect("2^1200");
        let three = ratio(3, 1).pow(Rational::integer(757)).expect("3^757");
        let quotient = two.div(&three).expect("quotient");
        let expected = (1200.0 * 2f64.ln() - 757.0 * 3f64.ln()).exp();
        assert!((quotient.to_f64() / expected - 1.0).abs() < 1e-9);
        assert_eq!(two.to_f64(), f64::INFINITY);
    }

    #[test]
    fn exponent_overflow_is_none() {
        let two = ratio(2, 1);
        let huge = two.pow(Rational::integer(i64::MAX / 2)).expect("fits");
        assert_eq!(huge.mul(&huge).and_then(|h| h.mul(&huge)), None);
        assert_eq!(huge.pow(Rational::integer(4)), None);
    }

    #[test]
    fn too_many_primes_is_none() {
        let primes = [
            2u64, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47, 53, 59,
        ];
        let product = primes
            .iter()
            .try_fold(Scale::ONE, |acc, p| acc.mul(&Scale::from_ratio(*p, 1)?));
        assert_eq!(product, None);
    }

    /// A factor made of small primes with small rational exponents and a power of pi.
    fn small_scale() -> impl Strategy<Value = Scale> {
        let exponent =
            (-6i64..=6, 1i64..=4).prop_map(|(n, d)| Rational::new(n, d).unwrap_or(Rational::ZERO));
        (
            proptest::collection::vec((0usize..6, exponent.clone()), 0..4),
            exponent,
        )
            .prop_map(|(terms, pi)| {
                let primes = [2u64, 3, 5, 7, 463, 28019];
                terms.into_iter().fold(Scale::pi_power(pi), |acc, (i, e)| {
                    let term = Scale::prime_power(primes[i], e);
                    acc.mul(&term).unwrap_or(acc)
                })
            })
    }

    fn small_exponent() -> impl Strategy<Value = Rational> {
        (-5i64..=5, 1i64..=3).prop_map(|(n, d)| Rational::new(n, d).unwrap_or(Rational::ONE))
    }

    proptest! {
        #[test]
        fn multiplication_is_associative_and_commutative(a in small_scale(), b in small_scale(), c in small_scale()) {
            prop_assert_eq!(a.mul(&b), b.mul(&a));
            let left = a.mul(&b).and_then(|ab| ab.mul(&c));
            let right = b.mul(&c).and_then(|bc| a.mul(&bc));
            prop_assert_eq!(left, right);
        }

        #[test]
        fn reciprocal_is_inverse(a in small_scale()) {
            prop_assert_eq!(a.recip().and_then(|r| r.mul(&a)), Some(Scale::ONE));
            prop_assert_eq!(a.div(&a), Some(Scale::ONE));
        }

        #[test]
        fn power_laws_hold(a in small_scale(), b in small_scale(), p in small_exponent(), q in small_exponent()) {
            let nested = a.pow(p).and_then(|ap| ap.pow(q));
            prop_assert_eq!(nested, p.checked_mul(q).and_then(|pq| a.pow(pq)));
            let product_power = a.mul(&b).and_then(|ab| ab.pow(p));
            let power_product = a.pow(p).and_then(|ap| b.pow(p).and_then(|bp| ap.mul(&bp)));
            prop_assert_eq!(product_power, power_product);
        }

        #[test]
        fn value_tracks_the_algebra(a in small_scale(), b in small_scale()) {
            let product = a.mul(&b).map(|ab| ab.to_f64());
            let expected = a.to_f64() * b.to_f64();
            if let Some(value) = product {
                prop_assert!((value / expected - 1.0).abs() < 1e-12, "{} vs {}", value, expected);
            }
        }

        #[test]
        fn big_exponents_give_none_not_panic(a in small_scale(), p in any::<i64>(), q in 1i64..i64::MAX) {
            if let Some(exponent) = Rational::new(p, q) {
                let _ = a.pow(exponent).and_then(|x| x.pow(exponent)).and_then(|x| x.mul(&a));
            }
        }

        #[test]
        fn exact_text_never_panics(text in "\\PC{0,30}") {
            let _ = Scale::from_exact_text(&text);
        }
    }
}
