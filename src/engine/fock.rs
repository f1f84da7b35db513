//! The closed-space Fock matrix f_pq and the reference energy E_ref: their definitions in h and
//! (pq|rs), and the rewriting that presents a result in them (`--fock`).

use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, Term};
use crate::language::orbital::{Orb, SpaceSet};
use std::collections::BTreeMap;

/// f_pq = h_pq + Σ_{S closed} Σ_{k∈S} (2 (pq|kk) − (pk|kq)).
pub fn fock_definition(p: Orb, q: Orb, closed: SpaceSet) -> Expr {
    let k = Orb::Summed(0);
    let mut terms = vec![Term::new(Exact::one(), Factor::H(p, q))];
    for s in closed.members() {
        terms.push(Term {
            coeff: Exact::integer(2),
            deltas: vec![],
            sums: vec![s],
            factor: Factor::Eri(p, q, k, k),
        });
        terms.push(Term {
            coeff: Exact::integer(-1),
            deltas: vec![],
            sums: vec![s],
            factor: Factor::Eri(p, k, k, q),
        });
    }
    Expr::from_terms(terms)
}

/// E_ref = Σ_S 2 Σ_{k∈S} h_kk + Σ_{S,T} Σ_{k∈S,l∈T} (2 J_kl − K_kl).
pub fn reference_definition(closed: SpaceSet) -> Expr {
    let (k, l) = (Orb::Summed(0), Orb::Summed(1));
    let mut terms = vec![];
    for s in closed.members() {
        terms.push(Term { coeff: Exact::integer(2), deltas: vec![], sums: vec![s], factor: Factor::H(k, k) });
        for t in closed.members() {
            terms.push(Term {
                coeff: Exact::integer(2),
                deltas: vec![],
                sums: vec![s, t],
                factor: Factor::Eri(k, k, l, l),
            });
            terms.push(Term {
                coeff: Exact::integer(-1),
                deltas: vec![],
                sums: vec![s, t],
                factor: Factor::Eri(k, l, l, k),
            });
        }
    }
    Expr::from_terms(terms)
}

type Key = (Vec<(Orb, Orb)>, Vec<u32>, Factor);

fn key(t: &Term) -> Key {
    (t.deltas.clone(), t.sums.clone(), t.factor)
}

/// Replaces `coeff × definition` by `coeff × factor` when every term of the definition stands in
/// `terms` with exactly that coefficient.
fn absorb(
    terms: &mut BTreeMap<Key, Exact>,
    deltas: &[(Orb, Orb)],
    coeff: &Exact,
    definition: &Expr,
    factor: Factor,
) {
    let expansion = definition.scaled(coeff).with_deltas(deltas);
    if expansion.terms.iter().all(|t| terms.get(&key(t)) == Some(&t.coeff)) {
        for t in &expansion.terms {
            terms.remove(&key(t));
        }
        let replacement =
            Expr::from_terms([Term { coeff: coeff.clone(), deltas: deltas.to_vec(), sums: vec![], factor }]);
        for t in replacement.terms {
            *terms.entry(key(&t)).or_default() += &t.coeff;
        }
    }
}

/// The same expression in f_pq and E_ref over the closed spaces `closed`, wherever their
/// definitions appear whole; everything else is left as it is.
pub fn fock_form(expr: &Expr, closed: SpaceSet) -> Expr {
    if closed.0 == 0 {
        return expr.clone();
    }
    let mut terms: BTreeMap<Key, Exact> = expr.terms.iter().map(|t| (key(t), t.coeff.clone())).collect();
    let first = closed.members()[0];
    let reference = reference_definition(closed);
    let candidates: Vec<Term> = expr.terms.clone();
    for t in &candidates {
        if t.sums == [first] && matches!(t.factor, Factor::H(Orb::Summed(0), Orb::Summed(0))) {
            let half = &t.coeff * &Exact::fraction(1, 2);
            absorb(&mut terms, &t.deltas, &half, &reference, Factor::RefEnergy(closed));
        }
    }
    for t in &candidates {
        if let (true, Factor::H(p, q)) = (t.sums.is_empty(), t.factor) {
            absorb(
                &mut terms,
                &t.deltas,
                &t.coeff,
                &fock_definition(p, q, closed),
                Factor::Fock(p, q, closed),
            );
        }
    }
    Expr::from_terms(terms.into_iter().map(|((deltas, sums, factor), coeff)| Term {
        coeff,
        deltas,
        sums,
        factor,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_definitions_fold_back_into_one_term() {
        let closed = SpaceSet::of(&[0]);
        let (a, b) = (Orb::Named(0), Orb::Named(1));
        let e = fock_definition(a, b, closed).plus(&reference_definition(closed).scaled(&Exact::integer(3)));
        let folded = fock_form(&e, closed);
        assert_eq!(folded.terms.len(), 2);
        assert_eq!(folded.terms[0].factor, Factor::RefEnergy(closed));
        assert_eq!(folded.terms[0].coeff, Exact::integer(3));
        assert_eq!(folded.terms[1].factor, Factor::Fock(a, b, closed));
    }
}
