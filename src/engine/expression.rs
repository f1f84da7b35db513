//! Expressions in spatial integrals: terms of an exact coefficient, Kronecker deltas, sums
//! over spaces and one integral, kept in a canonical, collected, readable order.

use crate::engine::exact::Exact;
use crate::language::orbital::{Orb, SpaceId, SpaceSet};
use itertools::Itertools;
use num_bigint::BigInt;
use num_rational::BigRational;
use std::cmp::Reverse;
use std::collections::BTreeMap;

/// The integral a term multiplies. `Eri` is (pq|rs) in chemists' notation.
#[derive(Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub enum Factor {
    /// No integral: the term is a number (overlaps).
    One,
    H(Orb, Orb),
    Eri(Orb, Orb, Orb, Orb),
    /// f_pq = h_pq + Σ_{k ∈ closed} (2 (pq|kk) − (pk|kq)) over the closed spaces given.
    Fock(Orb, Orb, SpaceSet),
    /// The energy of the closed spaces alone: Σ_k 2 h_kk + Σ_kl (2 J_kl − K_kl).
    RefEnergy(SpaceSet),
    /// The density element γ_pq = Σ_σ <a+_pσ a_qσ> (engine/density.rs); its orientation is
    /// kept: a term of a density adds its coefficient to this element.
    Gamma1(Orb, Orb),
    /// The density element Γ_pqrs = Σ_στ <a+_pσ a+_rτ a_sτ a_qσ>, orientation kept.
    Gamma2(Orb, Orb, Orb, Orb),
}

/// How a canonical integral reads: J_pq = (pp|qq), K_pq = (pq|qp), or neither.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Debug)]
pub enum IntegralKind {
    Number,
    RefEnergy,
    Fock,
    OneElectron,
    Coulomb,
    Exchange,
    General,
    /// An element of the one-particle density.
    OneDensity,
    /// An element of the two-particle density.
    TwoDensity,
}

impl IntegralKind {
    /// Numbers, reference energies, Fock and one-electron terms read first and group apart
    /// from the two-electron integrals under a common sum.
    pub fn is_one_electron_like(self) -> bool {
        matches!(
            self,
            IntegralKind::Number
                | IntegralKind::RefEnergy
                | IntegralKind::Fock
                | IntegralKind::OneElectron
                | IntegralKind::OneDensity
        )
    }
}

impl Factor {
    pub fn map(self, f: impl Fn(Orb) -> Orb) -> Factor {
        match self {
            Factor::One => Factor::One,
            Factor::H(p, q) => Factor::H(f(p), f(q)),
            Factor::Eri(p, q, r, s) => Factor::Eri(f(p), f(q), f(r), f(s)),
            Factor::Fock(p, q, c) => Factor::Fock(f(p), f(q), c),
            Factor::RefEnergy(c) => Factor::RefEnergy(c),
            Factor::Gamma1(p, q) => Factor::Gamma1(f(p), f(q)),
            Factor::Gamma2(p, q, r, s) => Factor::Gamma2(f(p), f(q), f(r), f(s)),
        }
    }

    pub fn orbs(&self) -> Vec<Orb> {
        match *self {
            Factor::One | Factor::RefEnergy(_) => vec![],
            Factor::H(p, q) | Factor::Fock(p, q, _) | Factor::Gamma1(p, q) => vec![p, q],
            Factor::Eri(p, q, r, s) | Factor::Gamma2(p, q, r, s) => vec![p, q, r, s],
        }
    }

    /// The representative under the symmetries of real orbitals: h_pq = h_qp and the
    /// 8-fold (pq|rs) = (qp|rs) = (pq|sr) = (rs|pq). Density elements keep their orientation:
    /// each is a separate element, whatever symmetry the density has.
    pub fn canonical(self) -> Factor {
        let pair = |a: Orb, b: Orb| if a <= b { (a, b) } else { (b, a) };
        match self {
            Factor::One | Factor::RefEnergy(_) | Factor::Gamma1(..) | Factor::Gamma2(..) => self,
            Factor::H(p, q) => {
                let (p, q) = pair(p, q);
                Factor::H(p, q)
            }
            Factor::Fock(p, q, c) => {
                let (p, q) = pair(p, q);
                Factor::Fock(p, q, c)
            }
            Factor::Eri(p, q, r, s) => {
                let (a, b) = (pair(p, q), pair(r, s));
                let ((p, q), (r, s)) = if a <= b { (a, b) } else { (b, a) };
                Factor::Eri(p, q, r, s)
            }
        }
    }

    /// The kind of a canonical factor.
    pub fn kind(&self) -> IntegralKind {
        match *self {
            Factor::One => IntegralKind::Number,
            Factor::RefEnergy(_) => IntegralKind::RefEnergy,
            Factor::Fock(..) => IntegralKind::Fock,
            Factor::H(..) => IntegralKind::OneElectron,
            Factor::Eri(p, q, r, s) if p == q && r == s => IntegralKind::Coulomb,
            Factor::Eri(p, q, r, s) if p == r && q == s => IntegralKind::Exchange,
            Factor::Eri(..) => IntegralKind::General,
            Factor::Gamma1(..) => IntegralKind::OneDensity,
            Factor::Gamma2(..) => IntegralKind::TwoDensity,
        }
    }
}

/// coefficient × Π deltas × Σ_{summed indices} factor. Summed index `Orb::Summed(d)` runs over
/// the space `sums[d]`.
#[derive(Clone, PartialEq, Eq, Debug)]
pub struct Term {
    pub coeff: Exact,
    pub deltas: Vec<(Orb, Orb)>,
    pub sums: Vec<SpaceId>,
    pub factor: Factor,
}

type Shape = (Vec<(Orb, Orb)>, Vec<SpaceId>, Factor);

/// (fewer deltas last, deltas, number of sums, spaces, two-electron, kind, integral)
type OrderKey = (Reverse<usize>, Vec<(Orb, Orb)>, usize, Vec<SpaceId>, bool, IntegralKind, Factor);

impl Term {
    pub fn new(coeff: Exact, factor: Factor) -> Term {
        Term { coeff, deltas: vec![], sums: vec![], factor }
    }

    /// Rewrites every free orbital; summed ones are left alone.
    pub fn substitute(&self, f: &impl Fn(Orb) -> Orb) -> Term {
        let g = |o: Orb| if matches!(o, Orb::Summed(_)) { o } else { f(o) };
        Term {
            coeff: self.coeff.clone(),
            deltas: self.deltas.iter().map(|&(a, b)| (g(a), g(b))).collect(),
            sums: self.sums.clone(),
            factor: self.factor.map(g),
        }
    }

    /// The canonical shape: deltas ordered, and summation indices renamed so that equal
    /// terms written with different dummy letters coincide.
    fn shape(&self) -> Shape {
        let mut deltas: Vec<(Orb, Orb)> = self
            .deltas
            .iter()
            .filter(|(a, b)| a != b)
            .map(|&(a, b)| if a <= b { (a, b) } else { (b, a) })
            .collect();
        deltas.sort();
        deltas.dedup();
        let n = self.sums.len();
        (0..n)
            .permutations(n)
            .map(|perm| {
                let rename = |o: Orb| match o {
                    Orb::Summed(d) => Orb::Summed(perm[d as usize] as u8),
                    other => other,
                };
                let mut sums = vec![0; n];
                for (d, space) in self.sums.iter().enumerate() {
                    sums[perm[d]] = *space;
                }
                (sums, self.factor.map(rename).canonical())
            })
            .min()
            .map(|(sums, factor)| (deltas.clone(), sums, factor))
            .expect("at least the identity permutation")
    }

    /// Is this term one of the one-electron kind (h), for grouping under sums.
    pub fn kind(&self) -> IntegralKind {
        self.factor.kind()
    }

    /// The fixed reading order: terms with more deltas first; then unsummed before summed,
    /// grouped by the spaces summed over; within a group h, J, K, then general integrals.
    fn order_key(&self) -> OrderKey {
        let two_electron = !self.kind().is_one_electron_like();
        (
            Reverse(self.deltas.len()),
            self.deltas.clone(),
            self.sums.len(),
            self.sums.clone(),
            two_electron,
            self.kind(),
            self.factor,
        )
    }
}

/// A sum of terms in canonical form: like terms collected, zeros gone, in reading order.
#[derive(Clone, PartialEq, Eq, Debug, Default)]
pub struct Expr {
    pub terms: Vec<Term>,
}

impl Expr {
    pub fn zero() -> Expr {
        Expr::default()
    }

    pub fn from_terms(terms: impl IntoIterator<Item = Term>) -> Expr {
        let mut collected: BTreeMap<Shape, Exact> = BTreeMap::new();
        for term in terms {
            if term.coeff.is_zero() {
                continue;
            }
            *collected.entry(term.shape()).or_default() += &term.coeff;
        }
        let mut terms: Vec<Term> = collected
            .into_iter()
            .filter(|(_, c)| !c.is_zero())
            .map(|((deltas, sums, factor), coeff)| Term { coeff, deltas, sums, factor })
            .collect();
        terms.sort_by_key(|t| t.order_key());
        Expr { terms }
    }

    /// Terms whose coefficients are small rationals (the rules' own) times an integer weight
    /// times √root, collected with integer arithmetic: see `WeightedTerms`.
    pub fn weighted() -> WeightedTerms {
        WeightedTerms::default()
    }

    pub fn constant(value: Exact) -> Expr {
        Expr::from_terms([Term::new(value, Factor::One)])
    }

    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }

    pub fn plus(&self, other: &Expr) -> Expr {
        Expr::from_terms(self.terms.iter().chain(&other.terms).cloned())
    }

    pub fn minus(&self, other: &Expr) -> Expr {
        self.plus(&other.scaled(&Exact::integer(-1)))
    }

    pub fn scaled(&self, factor: &Exact) -> Expr {
        Expr::from_terms(self.terms.iter().map(|t| Term { coeff: &t.coeff * factor, ..t.clone() }))
    }

    pub fn substitute(&self, f: &impl Fn(Orb) -> Orb) -> Expr {
        Expr::from_terms(self.terms.iter().map(|t| t.substitute(f)))
    }

    pub fn with_deltas(&self, deltas: &[(Orb, Orb)]) -> Expr {
        Expr::from_terms(self.terms.iter().map(|t| {
            let mut t = t.clone();
            t.deltas.extend_from_slice(deltas);
            t
        }))
    }

    /// Every free (unsummed) orbital that appears.
    pub fn free_orbs(&self) -> Vec<Orb> {
        let mut out: Vec<Orb> = self
            .terms
            .iter()
            .flat_map(|t| t.factor.orbs().into_iter().chain(t.deltas.iter().flat_map(|&(a, b)| [a, b])))
            .filter(|o| !matches!(o, Orb::Summed(_)))
            .collect();
        out.sort();
        out.dedup();
        out
    }
}

/// Terms being collected as (rational) × integer weight × √root: per term and root, one integer
/// sum per denominator met, so that adding costs no gcd; exact numbers are formed once, by
/// `finish`. The Slater–Condon sums add many weights into few terms this way.
#[derive(Default)]
pub struct WeightedTerms {
    sums: BTreeMap<(Shape, u64), Vec<(BigInt, BigInt)>>,
}

impl WeightedTerms {
    /// Adds `term` (a rational coefficient) × `weight` × √`root`, `root` square-free.
    pub fn add(&mut self, term: &Term, weight: &BigInt, root: u64) {
        let q = term.coeff.as_rational().expect("the rules' coefficients are rational");
        let by_denominator = self.sums.entry((term.shape(), root)).or_default();
        let numerator = q.numer() * weight;
        match by_denominator.iter_mut().find(|(d, _)| d == q.denom()) {
            Some((_, sum)) => *sum += numerator,
            None => by_denominator.push((q.denom().clone(), numerator)),
        }
    }

    /// The collected terms, every coefficient divided by `divisor`.
    pub fn finish(self, divisor: &BigInt) -> Expr {
        Expr::from_terms(self.sums.into_iter().map(|(((deltas, sums, factor), root), by_denominator)| {
            // one reduction for the usual single denominator
            let total = match <[_; 1]>::try_from(by_denominator) {
                Ok([(d, n)]) => BigRational::new(n, d * divisor),
                Err(many) => {
                    many.into_iter().map(|(d, n)| BigRational::new(n, d)).sum::<BigRational>()
                        / BigRational::from_integer(divisor.clone())
                }
            };
            Term { coeff: Exact::monomial(total, root), deltas, sums, factor }
        }))
    }
}

/// A sum over a closed space with some members taken out: Σ_{k ∈ space, k ∉ excluded}.
#[derive(Clone, PartialEq, Eq, Debug)]
pub struct RestrictedSum {
    pub space: SpaceId,
    pub excluded: Vec<Orb>,
}

/// A term as the Slater–Condon rules produce it, before restricted sums are rewritten.
#[derive(Clone, Debug)]
pub struct RawTerm {
    pub coeff: Exact,
    pub sums: Vec<RestrictedSum>,
    pub factor: Factor,
}

impl RawTerm {
    /// Σ_{k ∉ X} f(k) = Σ_k f(k) − Σ_{x ∈ X} f(x), for every restricted sum at once.
    pub fn expand(&self) -> Vec<Term> {
        let choices = self
            .sums
            .iter()
            .map(|s| std::iter::once(None).chain(s.excluded.iter().copied().map(Some)).collect::<Vec<_>>());
        choices
            .multi_cartesian_product()
            .map(|choice| {
                let mut sums = vec![];
                let mut target = vec![];
                let mut sign = 1;
                for (d, picked) in choice.iter().enumerate() {
                    match picked {
                        None => {
                            target.push(Orb::Summed(sums.len() as u8));
                            sums.push(self.sums[d].space);
                        }
                        Some(x) => {
                            target.push(*x);
                            sign = -sign;
                        }
                    }
                }
                let factor = self.factor.map(|o| match o {
                    Orb::Summed(d) => target[d as usize],
                    other => other,
                });
                Term { coeff: &self.coeff * &Exact::integer(sign), deltas: vec![], sums, factor }
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coulomb_and_exchange_are_recognized_in_any_index_order() {
        let (a, b) = (Orb::Named(0), Orb::Named(1));
        assert_eq!(Factor::Eri(b, b, a, a).canonical().kind(), IntegralKind::Coulomb);
        assert_eq!(Factor::Eri(b, a, a, b).canonical().kind(), IntegralKind::Exchange);
        assert_eq!(Factor::Eri(a, b, b, a).canonical(), Factor::Eri(a, b, a, b));
        assert_eq!(Factor::Eri(a, a, a, b).canonical().kind(), IntegralKind::General);
    }

    #[test]
    fn dummy_names_do_not_matter() {
        let (k, l) = (Orb::Summed(0), Orb::Summed(1));
        let t1 =
            Term { coeff: Exact::one(), deltas: vec![], sums: vec![0, 0], factor: Factor::Eri(k, k, l, l) };
        let t2 =
            Term { coeff: Exact::one(), deltas: vec![], sums: vec![0, 0], factor: Factor::Eri(l, l, k, k) };
        let e = Expr::from_terms([t1, t2]);
        assert_eq!(e.terms.len(), 1);
        assert_eq!(e.terms[0].coeff, Exact::integer(2));
    }

    #[test]
    fn restricted_sums_become_full_sums_minus_corrections() {
        let (i, k) = (Orb::Index(0), Orb::Summed(0));
        let raw = RawTerm {
            coeff: Exact::one(),
            sums: vec![RestrictedSum { space: 0, excluded: vec![i] }],
            factor: Factor::H(k, k),
        };
        let e = Expr::from_terms(raw.expand());
        assert_eq!(e.terms.len(), 2);
        assert_eq!(e.terms[0].factor, Factor::H(i, i));
        assert_eq!(e.terms[0].coeff, Exact::integer(-1));
        assert_eq!(e.terms[1].sums, vec![0]);
    }
}
