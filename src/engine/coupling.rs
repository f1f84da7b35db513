//! Spin eigenfunctions by genealogical coupling: the open shells, in the order written, are
//! coupled one at a time along a path of intermediate spins, with Condon–Shortley signs.

use crate::engine::exact::Exact;
use crate::language::orbital::Spin;
use crate::language::program::{Coupling, DetSpec, Occupant, Program, Shells};
use num_bigint::{BigInt, BigUint};
use num_rational::BigRational;
use num_traits::{One, Pow, Zero};

/// A spin quantum number as twice its value, so 1/2 is 1 and 3/2 is 3.
pub type Twice = i64;

/// One determinant of a coupled function: the spin of each open shell (true = alpha) and its
/// coefficient.
pub type SpinTerm = (Vec<bool>, Exact);

/// A signed square root of a positive rational, kept as the prime exponents of its square so
/// that the products along a path cost no big-number arithmetic.
#[derive(Clone)]
struct SignedRoot {
    negative: bool,
    exponents: Vec<i32>,
}

fn primes_up_to(n: i64) -> Vec<i64> {
    (2..=n.max(2)).filter(|&p| (2..p).take_while(|d| d * d <= p).all(|d| p % d != 0)).collect()
}

impl SignedRoot {
    fn one(primes: &[i64]) -> SignedRoot {
        SignedRoot { negative: false, exponents: vec![0; primes.len()] }
    }

    /// × (−1 if `negative`) √(num/den), for small positive num and den.
    fn times(&self, primes: &[i64], negative: bool, num: i64, den: i64) -> SignedRoot {
        let mut out = self.clone();
        out.negative ^= negative;
        for (value, sign) in [(num, 1), (den, -1)] {
            let mut v = value;
            for (k, &p) in primes.iter().enumerate() {
                while v % p == 0 {
                    v /= p;
                    out.exponents[k] += sign;
                }
            }
            debug_assert_eq!(v, 1, "Clebsch–Gordan ratios factor over the primes listed");
        }
        out
    }

    /// The exact value: Π p^⌊e/2⌋ × √(Π p^(e mod 2)).
    fn value(&self, primes: &[i64]) -> Exact {
        let (mut num, mut den, mut radicand) = (BigInt::from(1), BigInt::from(1), 1u64);
        for (&p, &e) in primes.iter().zip(&self.exponents) {
            let (whole, odd) = (e.div_euclid(2), e.rem_euclid(2));
            if whole > 0 {
                num *= BigInt::from(p).pow(whole as u32);
            } else if whole < 0 {
                den *= BigInt::from(p).pow((-whole) as u32);
            }
            if odd == 1 {
                radicand *= p as u64;
            }
        }
        if self.negative {
            num = -num;
        }
        Exact::monomial(BigRational::new_raw(num, den), radicand)
    }
}

/// The Clebsch–Gordan coefficient <S', M - m; 1/2, m | S, M> for adding one electron of spin m
/// (alpha: +1/2) to a function of spin S' = S ± 1/2, everything doubled, as (negative, num, den)
/// of ±√(num/den).
fn clebsch_gordan(s_new: Twice, s_old: Twice, m_new: Twice, alpha: bool) -> (bool, i64, i64) {
    if s_new > s_old {
        // S = S' + 1/2: sqrt((S ± M)/(2S))
        (false, if alpha { s_new + m_new } else { s_new - m_new }, 2 * s_new)
    } else if alpha {
        // S = S' - 1/2, m = +1/2: -sqrt((S - M + 1)/(2S + 2))
        (true, s_new - m_new + 2, 2 * s_new + 4)
    } else {
        (false, s_new + m_new + 2, 2 * s_new + 4)
    }
}

/// Every admissible path of intermediate spins for n open shells ending at spin `s`, in
/// increasing lexicographic order (lower intermediate spins first).
pub fn paths(n: usize, s: Twice) -> Vec<Vec<Twice>> {
    fn extend(prefix: &mut Vec<Twice>, n: usize, s: Twice, out: &mut Vec<Vec<Twice>>) {
        let k = prefix.len();
        if k == n {
            if prefix.last().copied().unwrap_or(0) == s {
                out.push(prefix.clone());
            }
            return;
        }
        let last = prefix.last().copied().unwrap_or(0);
        for next in [last - 1, last + 1] {
            // stay non-negative and able to come back to s with the shells left
            if next >= 0 && (next - s).abs() <= (n - k - 1) as i64 {
                prefix.push(next);
                extend(prefix, n, s, out);
                prefix.pop();
            }
        }
    }
    let mut out = vec![];
    extend(&mut vec![], n, s, &mut out);
    out
}

/// The binomial coefficient C(n, k), exactly (0 when k > n).
pub fn binomial(n: usize, k: usize) -> BigUint {
    if k > n {
        return BigUint::zero();
    }
    // each partial product C(n, i + 1) = C(n, i) (n − i) / (i + 1) is a whole number
    (0..k.min(n - k)).fold(BigUint::one(), |acc, i| acc * (n - i) / (i + 1))
}

/// How many paths `paths(n, s)` lists, without listing them: the branching-diagram number
/// f(n, S) = C(n, n/2 − S) − C(n, n/2 − S − 1); zero when n shells cannot couple to S.
pub fn path_count(n: usize, s: Twice) -> BigUint {
    if s < 0 || s > n as Twice || (n as Twice - s) % 2 != 0 {
        return BigUint::zero();
    }
    let k = (n - s as usize) / 2;
    let below = if k == 0 { BigUint::zero() } else { binomial(n, k - 1) };
    binomial(n, k) - below
}

/// How many determinants a coupled function of n open shells with M = m/2 spans: the ways to
/// give (n + 2M)/2 of the shells alpha spin.
pub fn determinant_count(n: usize, m: Twice) -> BigUint {
    match usize::try_from((n as Twice + m) / 2) {
        Ok(alpha) if (n as Twice + m) % 2 == 0 => binomial(n, alpha),
        _ => BigUint::zero(),
    }
}

/// Checks a path for n shells ending at s; None if it is admissible, else why not.
pub fn path_problem(path: &[Twice], n: usize, s: Twice) -> Option<String> {
    if path.len() != n {
        return Some(format!("the path has {} intermediate spins but there are {n} open shells", path.len()));
    }
    let mut last = 0;
    for (k, &spin) in path.iter().enumerate() {
        if spin < 0 || (spin - last).abs() != 1 {
            return Some(format!(
                "after open shell {} the spin goes from {} to {}: each shell changes it by 1/2",
                k + 1,
                half(last),
                half(spin)
            ));
        }
        last = spin;
    }
    (last != s).then(|| format!("the path ends at {} but S = {}", half(last), half(s)))
}

/// 2S → "S" as written (1 → "1/2", 2 → "1").
pub fn half(twice: Twice) -> String {
    if twice % 2 == 0 { (twice / 2).to_string() } else { format!("{twice}/2") }
}

/// The determinant expansion of the coupled function with path `path` and M = m/2: for each
/// spin assignment with total M, the product of Clebsch–Gordan coefficients along the path.
pub fn expand(path: &[Twice], m: Twice) -> Vec<SpinTerm> {
    let n = path.len();
    let primes = primes_up_to(2 * n as i64 + 4);
    let mut out = vec![];
    // depth-first over the shells, carrying M so far and the coefficient so far
    let mut stack: Vec<(Vec<bool>, Twice, SignedRoot)> = vec![(vec![], 0, SignedRoot::one(&primes))];
    while let Some((spins, m_so_far, coefficient)) = stack.pop() {
        let k = spins.len();
        if k == n {
            if m_so_far == m {
                out.push((spins, coefficient.value(&primes)));
            }
            continue;
        }
        let s_old = if k == 0 { 0 } else { path[k - 1] };
        for alpha in [false, true] {
            let m_new = m_so_far + if alpha { 1 } else { -1 };
            let left = (n - k - 1) as i64;
            if m_new.abs() > path[k] || (m - m_new).abs() > left {
                continue;
            }
            let (negative, num, den) = clebsch_gordan(path[k], s_old, m_new, alpha);
            if num == 0 {
                continue;
            }
            let mut next = spins.clone();
            next.push(alpha);
            stack.push((next, m_new, coefficient.times(&primes, negative, num, den)));
        }
    }
    out.sort_by(|a, b| b.0.cmp(&a.0));
    out
}

/// The determinants of a coupled function, with their coefficients: the reference's open
/// shells given the spins of each term of `expand`.
pub fn expanded(program: &Program, coupling: &Coupling) -> Vec<(Exact, DetSpec)> {
    if coupling.shells == Shells::Excited {
        return crate::engine::spin_adapted_excitation::determinants(program, coupling);
    }
    let open = coupling.reference.open_shells();
    expand(&coupling.path, coupling.m)
        .into_iter()
        .map(|(spins, coefficient)| {
            let mut det = coupling.reference.clone();
            for (&k, alpha) in open.iter().zip(spins) {
                if let Occupant::Electron(so) = &mut det.occupants[k] {
                    so.spin = if alpha { Spin::Alpha } else { Spin::Beta };
                }
            }
            (coefficient, det)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn two_shell_singlet_is_alpha_beta_minus_beta_alpha() {
        let terms = expand(&[1, 0], 0);
        let half = Exact::sqrt_of_rational(&BigRational::new(1.into(), 2.into())).unwrap();
        assert_eq!(terms, vec![(vec![true, false], half.clone()), (vec![false, true], -half)]);
    }

    #[test]
    fn path_counts_follow_the_branching_diagram() {
        assert_eq!(paths(3, 1).len(), 2);
        assert_eq!(paths(4, 0).len(), 2);
        assert_eq!(paths(6, 0).len(), 5);
        assert_eq!(paths(3, 3), vec![vec![1, 2, 3]]);
        assert_eq!(paths(3, 1), vec![vec![1, 0, 1], vec![1, 2, 1]]);
    }

    #[test]
    fn path_counts_by_formula_match_the_listed_paths() {
        for n in 0..=14usize {
            for s in -1..=n as Twice + 1 {
                assert_eq!(path_count(n, s), BigUint::from(paths(n, s).len()), "n={n} 2S={s}");
            }
        }
    }

    #[test]
    fn counts_stay_exact_past_64_bits() {
        // C(100, 50) and the 50th Catalan number, f(100, 0) (Python's math.comb)
        assert_eq!(binomial(100, 50).to_string(), "100891344545564193334812497256");
        assert_eq!(path_count(100, 0).to_string(), "1978261657756160653623774456");
    }

    #[test]
    fn coupled_functions_are_normalized() {
        for path in paths(6, 2) {
            for m in [-2, 0, 2] {
                let norm = expand(&path, m).iter().fold(Exact::zero(), |acc, (_, c)| &acc + &(c * c));
                assert_eq!(norm, Exact::one(), "{path:?} M={m}");
            }
        }
    }
}
