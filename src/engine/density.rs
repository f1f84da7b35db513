//! Symbolic reduced density matrices: the Slater–Condon contributions read as density elements
//! γ_pq and Γ_pqrs instead of integrals, the symmetries that relate elements, and the energy.
//!
//! A density is an `Expr` whose factors are `Factor::Gamma1` and `Factor::Gamma2`. Each term
//! `c × deltas × Σ_{closed spaces} × element` adds c to that element, for every value of its
//! summation indices, where its deltas hold; elements no term reaches are zero. The expression
//! derived holds every element (both Γ_pqrs and Γ_rspq): `representatives` keeps one term of each
//! set related by the symmetries, `complete` restores the others.

use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, RawTerm, Term};

/// What the Slater–Condon rules accumulate: the matrix element of H, or the densities.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Operator {
    Hamiltonian,
    Densities,
}

impl Operator {
    /// The terms one spatial term of the rules contributes. For the densities: the energy
    /// E = Σ γ_pq h_pq + ½ Σ Γ_pqrs (pq|rs) holds term by term, so c h_pq is c added to γ_pq, and
    /// c (pq|rs) (spin-integrated <mn||pq>, orientation as the rules write it) is c added to
    /// Γ_pqrs and c added to Γ_rspq.
    pub fn terms(self, raw: RawTerm) -> Vec<RawTerm> {
        match (self, raw.factor) {
            (Operator::Hamiltonian, _) => vec![raw],
            (Operator::Densities, Factor::H(p, q)) => vec![RawTerm { factor: Factor::Gamma1(p, q), ..raw }],
            (Operator::Densities, Factor::Eri(p, q, r, s)) => vec![
                RawTerm { factor: Factor::Gamma2(p, q, r, s), ..raw.clone() },
                RawTerm { factor: Factor::Gamma2(r, s, p, q), ..raw },
            ],
            (Operator::Densities, other) => unreachable!("the rules write only h and (pq|rs), not {other:?}"),
        }
    }
}

/// The symmetries a density has, besides none.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Symmetry {
    /// Any transition density <S| … |T>: Γ_pqrs = Γ_rspq (the two pairs of operators commute).
    Transition,
    /// The density of one real state: also γ_pq = γ_qp and Γ_pqrs = Γ_qpsr.
    Expectation,
}

impl Symmetry {
    /// The element and its images under the symmetry, the element first.
    fn images(self, factor: Factor) -> Vec<Factor> {
        match (self, factor) {
            (Symmetry::Transition, Factor::Gamma2(p, q, r, s)) => {
                vec![factor, Factor::Gamma2(r, s, p, q)]
            }
            (Symmetry::Expectation, Factor::Gamma1(p, q)) => vec![factor, Factor::Gamma1(q, p)],
            (Symmetry::Expectation, Factor::Gamma2(p, q, r, s)) => vec![
                factor,
                Factor::Gamma2(r, s, p, q),
                Factor::Gamma2(q, p, s, r),
                Factor::Gamma2(s, r, q, p),
            ],
            _ => vec![factor],
        }
    }

    /// The symmetry as the output states it.
    pub fn text(self) -> &'static str {
        match self {
            Symmetry::Transition => "Γ_pqrs = Γ_rspq",
            Symmetry::Expectation => "γ_pq = γ_qp, Γ_pqrs = Γ_rspq = Γ_qpsr = Γ_srqp",
        }
    }

    /// The symmetry in plain ASCII.
    pub fn ascii(self) -> &'static str {
        match self {
            Symmetry::Transition => "G_pqrs = G_rspq",
            Symmetry::Expectation => "g_pq = g_qp, G_pqrs = G_rspq = G_qpsr = G_srqp",
        }
    }
}

/// A term in canonical form (summation indices renamed, deltas ordered) and its sort key.
fn canonical(term: Term) -> Option<(TermKey, Term)> {
    let t = Expr::from_terms([term]).terms.pop()?;
    Some(((t.deltas.clone(), t.sums.clone(), t.factor), t))
}

type TermKey = (Vec<(crate::language::orbital::Orb, crate::language::orbital::Orb)>, Vec<u32>, Factor);

/// The distinct images of a term under the symmetry, in canonical form, least first.
fn orbit(term: &Term, symmetry: Symmetry) -> Vec<(TermKey, Term)> {
    let mut out: Vec<(TermKey, Term)> = symmetry
        .images(term.factor)
        .into_iter()
        .filter_map(|factor| canonical(Term { factor, ..term.clone() }))
        .collect();
    out.sort_by(|a, b| a.0.cmp(&b.0));
    out.dedup_by(|a, b| a.0 == b.0);
    out
}

/// One term of each set of terms related by the symmetry (the least in canonical order): what
/// the output lists. For a density that has the symmetry, `complete` gives it back.
pub fn representatives(density: &Expr, symmetry: Symmetry) -> Expr {
    Expr::from_terms(density.terms.iter().filter_map(|t| {
        let least = orbit(t, symmetry).swap_remove(0).0;
        (least == (t.deltas.clone(), t.sums.clone(), t.factor)).then(|| t.clone())
    }))
}

/// The density from its representatives: every listed term with each of its distinct images.
pub fn complete(listed: &Expr, symmetry: Symmetry) -> Expr {
    Expr::from_terms(listed.terms.iter().flat_map(|t| orbit(t, symmetry).into_iter().map(|(_, t)| t)))
}

/// The energy a density gives: γ_pq → h_pq and Γ_pqrs → ½ (pq|rs), in canonical form.
pub fn energy(density: &Expr) -> Expr {
    let half = Exact::fraction(1, 2);
    Expr::from_terms(density.terms.iter().map(|t| match t.factor {
        Factor::Gamma1(p, q) => Term { factor: Factor::H(p, q), ..t.clone() },
        Factor::Gamma2(p, q, r, s) => {
            Term { coeff: &t.coeff * &half, factor: Factor::Eri(p, q, r, s), ..t.clone() }
        }
        _ => t.clone(),
    }))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::language::orbital::Orb;

    #[test]
    fn a_two_electron_term_reaches_both_pair_orders() {
        let (a, b) = (Orb::Named(0), Orb::Named(1));
        let raw = RawTerm { coeff: Exact::one(), sums: vec![], factor: Factor::Eri(a, a, b, b) };
        let factors: Vec<Factor> = Operator::Densities.terms(raw).into_iter().map(|r| r.factor).collect();
        assert_eq!(factors, vec![Factor::Gamma2(a, a, b, b), Factor::Gamma2(b, b, a, a)]);
    }

    #[test]
    fn representatives_and_completion_are_inverse_on_symmetric_densities() {
        let (a, b, k) = (Orb::Named(0), Orb::Named(1), Orb::Summed(0));
        let term = |factor, sums: Vec<u32>| Term { coeff: Exact::integer(3), deltas: vec![], sums, factor };
        let full = Expr::from_terms([
            term(Factor::Gamma2(a, b, k, k), vec![0]),
            term(Factor::Gamma2(k, k, a, b), vec![0]),
            term(Factor::Gamma2(b, a, k, k), vec![0]),
            term(Factor::Gamma2(k, k, b, a), vec![0]),
        ]);
        let listed = representatives(&full, Symmetry::Expectation);
        assert_eq!(listed.terms.len(), 1);
        assert_eq!(complete(&listed, Symmetry::Expectation), full);
        // under the transition symmetry alone, two of the four are independent
        assert_eq!(representatives(&full, Symmetry::Transition).terms.len(), 2);
    }

    #[test]
    fn the_energy_of_a_density_halves_the_two_particle_part() {
        let (a, b) = (Orb::Named(0), Orb::Named(1));
        let density = Expr::from_terms([
            Term::new(Exact::one(), Factor::Gamma2(a, a, b, b)),
            Term::new(Exact::one(), Factor::Gamma2(b, b, a, a)),
        ]);
        assert_eq!(energy(&density), Expr::from_terms([Term::new(Exact::one(), Factor::Eri(a, a, b, b))]));
    }
}
