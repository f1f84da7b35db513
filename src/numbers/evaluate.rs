//! Numbers from expressions: every term evaluated with concrete orbital numbers for named
//! orbitals and generic indices and concrete member lists for spaces.

use crate::engine::expression::{Expr, Factor, Term};
use crate::engine::fock::{fock_definition, reference_definition};
use crate::language::orbital::Orb;
use crate::numbers::integrals::Integrals;

/// Concrete orbital numbers (0-based) for the symbols of a program.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Binding {
    /// Per named orbital.
    pub orbitals: Vec<usize>,
    /// Per space, its members.
    pub spaces: Vec<Vec<usize>>,
    /// Per generic index, its value (None where a request does not need it).
    pub indices: Vec<Option<usize>>,
}

impl Binding {
    fn orbital(&self, orb: Orb, summed: &[usize]) -> usize {
        match orb {
            Orb::Named(k) => self.orbitals[k as usize],
            Orb::Index(k) => {
                self.indices[k as usize].expect("every index in an expression is bound before evaluation")
            }
            Orb::Summed(d) => summed[d as usize],
        }
    }
}

fn factor_value(factor: &Factor, binding: &Binding, summed: &[usize], ints: &dyn Integrals) -> f64 {
    let o = |x| binding.orbital(x, summed);
    match *factor {
        Factor::One => 1.0,
        Factor::H(p, q) => ints.h(o(p), o(q)),
        Factor::Eri(p, q, r, s) => ints.eri(o(p), o(q), o(r), o(s)),
        // by their definitions, with the same binding (p and q are never summation indices)
        Factor::Fock(p, q, closed) => evaluate(&fock_definition(p, q, closed), binding, ints),
        Factor::RefEnergy(closed) => evaluate(&reference_definition(closed), binding, ints),
    }
}

fn term_value(term: &Term, binding: &Binding, ints: &dyn Integrals) -> f64 {
    let none: [usize; 0] = [];
    if term.deltas.iter().any(|&(a, b)| binding.orbital(a, &none) != binding.orbital(b, &none)) {
        return 0.0;
    }
    let mut summed = vec![0usize; term.sums.len()];
    let mut total = 0.0;
    // an odometer over the members of every summed space
    let spaces: Vec<&[usize]> = term.sums.iter().map(|&s| binding.spaces[s as usize].as_slice()).collect();
    if spaces.iter().any(|s| s.is_empty()) {
        return 0.0;
    }
    let mut position = vec![0usize; spaces.len()];
    loop {
        for (d, space) in spaces.iter().enumerate() {
            summed[d] = space[position[d]];
        }
        total += factor_value(&term.factor, binding, &summed, ints);
        let mut d = 0;
        loop {
            if d == position.len() {
                return total * term.coeff.to_f64();
            }
            position[d] += 1;
            if position[d] < spaces[d].len() {
                break;
            }
            position[d] = 0;
            d += 1;
        }
    }
}

/// The value of an expression.
pub fn evaluate(expr: &Expr, binding: &Binding, ints: &dyn Integrals) -> f64 {
    expr.terms.iter().map(|t| term_value(t, binding, ints)).sum()
}
