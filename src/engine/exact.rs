//! Exact coefficients: elements of the field of rationals extended by square roots of
//! square-free integers (sums of q·√n), the only numbers a derivation ever touches.

use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};
use std::fmt;
use std::ops::{Add, AddAssign, Div, Mul, Neg, Sub};

/// A sum of rational multiples of square roots of distinct square-free positive integers.
/// The empty sum is zero; radicand 1 holds the rational part.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Default)]
pub struct Exact {
    /// (radicand, coefficient), radicands increasing; a sorted vector since most numbers have
    /// one or two parts.
    parts: Vec<(u64, BigRational)>,
}

/// Splits n into (s, f) with n = s^2 * f and f square-free.
fn square_free_split(mut n: u64) -> (u64, u64) {
    let (mut square_root, mut free) = (1u64, 1u64);
    let mut p = 2u64;
    while p * p <= n {
        let mut count = 0;
        while n.is_multiple_of(p) {
            n /= p;
            count += 1;
        }
        square_root *= p.pow(count / 2);
        if count % 2 == 1 {
            free *= p;
        }
        p += if p == 2 { 1 } else { 2 };
    }
    (square_root, free * n)
}

impl Exact {
    pub fn zero() -> Exact {
        Exact::default()
    }

    pub fn one() -> Exact {
        Exact::rational(BigRational::one())
    }

    pub fn integer(n: i64) -> Exact {
        Exact::rational(BigRational::from_integer(BigInt::from(n)))
    }

    pub fn fraction(num: i64, den: i64) -> Exact {
        Exact::rational(BigRational::new(BigInt::from(num), BigInt::from(den)))
    }

    pub fn rational(q: BigRational) -> Exact {
        Exact::monomial(q, 1)
    }

    /// q·√n for a square-free n (the caller guarantees it); arbitrary n go through
    /// `sqrt_of_rational`.
    pub fn monomial(q: BigRational, radicand: u64) -> Exact {
        Exact { parts: if q.is_zero() { vec![] } else { vec![(radicand, q)] } }
    }

    /// The positive square root of a non-negative rational, or None if it is negative or
    /// too large: p·q of sqrt(p/q) must stay below 2³², so that products of two roots, which a
    /// derivation forms, still fit the 64-bit radicands.
    pub fn sqrt_of_rational(q: &BigRational) -> Option<Exact> {
        if q.is_negative() {
            return None;
        }
        if q.is_zero() {
            return Some(Exact::zero());
        }
        // sqrt(p/q) = sqrt(p q) / q
        let product = (q.numer() * q.denom()).to_u64().filter(|&p| p < 1 << 32)?;
        let (outside, radicand) = square_free_split(product);
        let coefficient = BigRational::new(BigInt::from(outside), q.denom().clone());
        Some(Exact::monomial(coefficient, radicand))
    }

    pub fn is_zero(&self) -> bool {
        self.parts.is_empty()
    }

    /// Some(q) when the number is rational.
    pub fn as_rational(&self) -> Option<BigRational> {
        match self.parts.len() {
            0 => Some(BigRational::zero()),
            1 => (self.parts[0].0 == 1).then(|| self.parts[0].1.clone()),
            _ => None,
        }
    }

    /// Some((q, n)) when the number is a single term q·√n.
    pub fn as_monomial(&self) -> Option<(BigRational, u64)> {
        match self.parts.len() {
            0 => Some((BigRational::zero(), 1)),
            1 => Some((self.parts[0].1.clone(), self.parts[0].0)),
            _ => None,
        }
    }

    /// The largest number of bits of a numerator or denominator among its parts.
    pub fn bits(&self) -> u64 {
        self.parts.iter().map(|(_, q)| q.numer().bits().max(q.denom().bits())).max().unwrap_or(0)
    }

    /// The terms q·√n in increasing radicand.
    pub fn parts(&self) -> impl Iterator<Item = (&BigRational, u64)> {
        self.parts.iter().map(|(n, q)| (q, *n))
    }

    pub fn to_f64(&self) -> f64 {
        self.parts.iter().map(|(n, q)| q.to_f64().unwrap_or(f64::NAN) * (*n as f64).sqrt()).sum()
    }

    /// The nearest f64 (ties to even) for a rational times one square root; a sum of several
    /// roots is the sum of its correctly rounded parts.
    pub fn to_f64_rounded(&self) -> f64 {
        self.parts
            .iter()
            .map(|(n, q)| {
                let magnitude = if *n == 1 {
                    q.abs().to_f64().unwrap_or(f64::NAN)
                } else {
                    sqrt_correctly_rounded(&(q * q * BigRational::from_integer(BigInt::from(*n))))
                };
                if q.is_negative() { -magnitude } else { magnitude }
            })
            .sum()
    }

    /// True when the leading (smallest-radicand) part is negative: used to print a
    /// term with a minus sign in front.
    pub fn is_negative(&self) -> bool {
        self.parts.first().is_some_and(|(_, q)| q.is_negative())
    }

    pub fn abs(&self) -> Exact {
        if self.is_negative() { -self.clone() } else { self.clone() }
    }

    fn add_part(&mut self, radicand: u64, q: BigRational) {
        match self.parts.binary_search_by_key(&radicand, |(n, _)| *n) {
            Ok(k) => {
                self.parts[k].1 += q;
                if self.parts[k].1.is_zero() {
                    self.parts.remove(k);
                }
            }
            Err(k) => {
                if !q.is_zero() {
                    self.parts.insert(k, (radicand, q));
                }
            }
        }
    }

    /// The multiplicative inverse, or None for zero. Each prime under a root is removed in
    /// turn by multiplying with the conjugate that flips the sign of its root.
    pub fn inverse(&self) -> Option<Exact> {
        if self.is_zero() {
            return None;
        }
        let mut numerator = Exact::one();
        let mut denominator = self.clone();
        while let Some(prime) = denominator.some_prime_under_root() {
            let conjugate = denominator.flip_root(prime);
            numerator = &numerator * &conjugate;
            denominator = &denominator * &conjugate;
        }
        let q = denominator.as_rational()?;
        Some(&numerator * &Exact::rational(q.recip()))
    }

    fn some_prime_under_root(&self) -> Option<u64> {
        let n = self.parts.iter().map(|(n, _)| *n).find(|n| *n > 1)?;
        (2..=n).find(|p| n % p == 0)
    }

    /// The conjugate under √p -> -√p.
    fn flip_root(&self, prime: u64) -> Exact {
        let mut out = self.clone();
        for (n, q) in out.parts.iter_mut() {
            if *n % prime == 0 {
                *q = -q.clone();
            }
        }
        out
    }
}

/// √x for a positive rational x, rounded to the nearest f64 with ties to even: the root is found
/// to 57 bits with big integers, and whether anything is left below them decides halfway cases.
fn sqrt_correctly_rounded(x: &BigRational) -> f64 {
    let (n, d) = (x.numer().clone(), x.denom().clone());
    let log2 = n.bits() as i64 - d.bits() as i64;
    let k = (114 - log2) / 2 + 1;
    let (num, den) = if k >= 0 { (n << (2 * k) as usize, d) } else { (n, d << (-2 * k) as usize) };
    let r = &num / &den;
    let root = r.sqrt();
    let exact = &r * &den == num && &root * &root == r;
    let drop = root.bits() as i64 - 53;
    let mut mantissa = &root >> drop as usize;
    let remainder = &root - (&mantissa << drop as usize);
    let half = BigInt::from(1) << (drop - 1) as usize;
    let odd = &mantissa % 2 == BigInt::from(1);
    if remainder > half || (remainder == half && (!exact || odd)) {
        mantissa += 1;
    }
    mantissa.to_f64().unwrap_or(f64::NAN) * 2f64.powi((drop - k) as i32)
}

impl Add for &Exact {
    type Output = Exact;
    fn add(self, other: &Exact) -> Exact {
        let mut out = self.clone();
        out += other;
        out
    }
}

impl AddAssign<&Exact> for Exact {
    fn add_assign(&mut self, other: &Exact) {
        for (n, q) in &other.parts {
            self.add_part(*n, q.clone());
        }
    }
}

impl Sub for &Exact {
    type Output = Exact;
    fn sub(self, other: &Exact) -> Exact {
        self + &(-other.clone())
    }
}

impl Neg for Exact {
    type Output = Exact;
    fn neg(mut self) -> Exact {
        for (_, q) in self.parts.iter_mut() {
            *q = -q.clone();
        }
        self
    }
}

impl Mul for &Exact {
    type Output = Exact;
    fn mul(self, other: &Exact) -> Exact {
        // ±1, the weight of most terms of the rules, costs no big-number arithmetic
        for (unit, x) in [(self, other), (other, self)] {
            if let [(1, q)] = unit.parts.as_slice()
                && q.is_integer()
                && q.numer().magnitude().is_one()
            {
                return if q.is_positive() { x.clone() } else { -x.clone() };
            }
        }
        let mut out = Exact::zero();
        for (a, p) in &self.parts {
            for (b, q) in &other.parts {
                // √a √b = g √(ab/g²) for square-free a, b with g = gcd(a, b)
                let g = a.gcd(b);
                let radicand = (a / g) * (b / g);
                let pq = p * q;
                out.add_part(
                    radicand,
                    if g == 1 { pq } else { pq * BigRational::from_integer(BigInt::from(g)) },
                );
            }
        }
        out
    }
}

// division is multiplication by the inverse
#[allow(clippy::suspicious_arithmetic_impl)]
impl Div for &Exact {
    type Output = Option<Exact>;
    fn div(self, other: &Exact) -> Option<Exact> {
        Some(self * &other.inverse()?)
    }
}

fn write_rational_times_root(
    f: &mut fmt::Formatter<'_>,
    q: &BigRational,
    n: u64,
    ascii: bool,
) -> fmt::Result {
    let root = |f: &mut fmt::Formatter<'_>| {
        if ascii { write!(f, "sqrt({n})") } else { write!(f, "√{n}") }
    };
    let (num, den) = (q.numer(), q.denom());
    if n == 1 {
        write!(f, "{num}")?;
    } else if num.is_one() {
        root(f)?;
    } else if (-num.clone()).is_one() {
        write!(f, "-")?;
        root(f)?;
    } else {
        write!(f, "{num}")?;
        root(f)?;
    }
    if !den.is_one() {
        write!(f, "/{den}")?;
    }
    Ok(())
}

/// Renders in the plain-text form used by the text emitter: `2`, `-1/2`, `√3/2`, `(1 + √2)`.
pub struct ExactDisplay<'a> {
    pub value: &'a Exact,
    pub ascii: bool,
}

impl fmt::Display for ExactDisplay<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let parts: Vec<(u64, &BigRational)> = self.value.parts.iter().map(|(n, q)| (*n, q)).collect();
        match parts.len() {
            0 => write!(f, "0"),
            1 => write_rational_times_root(f, parts[0].1, parts[0].0, self.ascii),
            _ => {
                write!(f, "(")?;
                for (k, (n, q)) in parts.iter().enumerate() {
                    if k > 0 {
                        write!(f, "{}", if q.is_negative() { " - " } else { " + " })?;
                        write_rational_times_root(f, &q.abs(), *n, self.ascii)?;
                    } else {
                        write_rational_times_root(f, q, *n, self.ascii)?;
                    }
                }
                write!(f, ")")
            }
        }
    }
}

impl fmt::Display for Exact {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        ExactDisplay { value: self, ascii: true }.fmt(f)
    }
}

impl fmt::Debug for Exact {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{self}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn root(n: i64, d: i64) -> Exact {
        Exact::sqrt_of_rational(&BigRational::new(n.into(), d.into())).unwrap()
    }

    #[test]
    fn products_of_roots_reduce() {
        // sqrt(2) * sqrt(6) = 2 sqrt(3)
        let p = &root(2, 1) * &root(6, 1);
        assert_eq!(p, &Exact::integer(2) * &root(3, 1));
        assert_eq!(format!("{p}"), "2sqrt(3)");
    }

    #[test]
    fn roots_of_fractions_are_rationalized() {
        assert_eq!(format!("{}", root(1, 6)), "sqrt(6)/6");
        assert_eq!(format!("{}", root(1, 2)), "sqrt(2)/2");
        assert_eq!(format!("{}", root(12, 1)), "2sqrt(3)");
        assert_eq!(root(9, 4), Exact::fraction(3, 2));
    }

    #[test]
    fn roots_round_to_the_nearest_double() {
        assert_eq!(root(1, 2).to_f64_rounded(), 0.5f64.sqrt());
        assert_eq!(root(3, 4).to_f64_rounded(), 3f64.sqrt() / 2.0);
        assert_eq!(root(2, 1).to_f64_rounded(), std::f64::consts::SQRT_2);
        assert_eq!((-root(1, 6)).to_f64_rounded(), -(1.0f64 / 6.0).sqrt());
        assert_eq!(Exact::fraction(1, 3).to_f64_rounded(), 1.0 / 3.0);
    }

    #[test]
    fn inverse_of_a_sum_of_roots() {
        let x = &(&Exact::one() + &root(2, 1)) + &root(3, 1);
        let inv = x.inverse().unwrap();
        assert_eq!(&x * &inv, Exact::one());
        assert!((inv.to_f64() - 1.0 / (1.0 + 2f64.sqrt() + 3f64.sqrt())).abs() < 1e-14);
    }
}
