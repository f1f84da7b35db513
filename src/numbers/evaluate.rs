//! Numbers from expressions: every term evaluated with concrete orbital numbers for named
//! orbitals and generic indices and concrete member lists for spaces.

use crate::engine::expression::{Expr, Factor, Term};
use crate::engine::fock::{fock_definition, reference_definition};
use crate::language::orbital::Orb;
use crate::numbers::density::Densities;
use crate::numbers::integrals::Integrals;
use rustc_hash::{FxHashMap, FxHashSet};
use std::cell::{Cell, RefCell};
use std::collections::BTreeMap;
use std::marker::PhantomData;
use std::rc::Rc;

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
        // a density element is not a number to multiply: see `density_values`
        Factor::Gamma1(..) | Factor::Gamma2(..) => 0.0,
    }
}

pub(crate) fn term_value(term: &Term, binding: &Binding, ints: &dyn Integrals) -> f64 {
    let mut total = 0.0;
    for_each_summed(term, binding, |summed| total += factor_value(&term.factor, binding, summed, ints));
    total * term.coeff.to_f64()
}

/// Calls `visit` with the members of the summed spaces, for every value of a term's summation
/// indices (an odometer over the spaces), when its deltas hold under the binding.
fn for_each_summed(term: &Term, binding: &Binding, mut visit: impl FnMut(&[usize])) {
    let none: [usize; 0] = [];
    if term.deltas.iter().any(|&(a, b)| binding.orbital(a, &none) != binding.orbital(b, &none)) {
        return;
    }
    let spaces: Vec<&[usize]> = term.sums.iter().map(|&s| binding.spaces[s as usize].as_slice()).collect();
    if spaces.iter().any(|s| s.is_empty()) {
        return;
    }
    let mut summed = vec![0usize; spaces.len()];
    let mut position = vec![0usize; spaces.len()];
    loop {
        for (d, space) in spaces.iter().enumerate() {
            summed[d] = space[position[d]];
        }
        visit(&summed);
        let mut d = 0;
        loop {
            if d == position.len() {
                return;
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

/// The elements of a symbolic density (engine/density.rs) under a binding, 0-based, zeros left
/// out: every term adds its coefficient to its element for each value of its summation indices.
/// Terms of other factors are not density elements and are left out.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct DensityElements {
    pub one: BTreeMap<[usize; 2], f64>,
    pub two: BTreeMap<[usize; 4], f64>,
}

pub fn density_elements(density: &Expr, binding: &Binding) -> DensityElements {
    let mut out = DensityElements::default();
    let exact = specialized(density, binding);
    for term in &exact.as_ref().unwrap_or(density).terms {
        let c = term.coeff.to_f64();
        for_each_summed(term, binding, |summed| {
            let o = |x| binding.orbital(x, summed);
            match term.factor {
                Factor::Gamma1(p, q) => *out.one.entry([o(p), o(q)]).or_default() += c,
                Factor::Gamma2(p, q, r, s) => *out.two.entry([o(p), o(q), o(r), o(s)]).or_default() += c,
                _ => {}
            }
        });
    }
    out
}

impl DensityElements {
    /// Dense over orbitals 0..n (every element must lie below n).
    pub fn dense(&self, n: usize) -> Densities {
        let mut out = Densities::zeros(n);
        for (&[p, q], &v) in &self.one {
            let at = out.pair(p, q);
            out.one[at] = v;
        }
        for (&[p, q, r, s], &v) in &self.two {
            let at = out.quadruple(p, q, r, s);
            out.two[at] = v;
        }
        out
    }
}

/// The value of an expression. Where the binding puts generic indices of the expression on one
/// orbital, its terms are first combined exactly for that coincidence: the delta terms there
/// cancel parts of the others, which floating point would do only to its precision.
pub fn evaluate(expr: &Expr, binding: &Binding, ints: &dyn Integrals) -> f64 {
    Evaluations::default().evaluate(expr, binding, ints)
}

/// Expressions evaluated at many bindings, as the check evaluates them: each expression's
/// generic indices are listed once, and its exact specialization is kept per pattern of
/// coinciding indices, which is all it depends on, so that a pattern met again (in another
/// configuration of the spaces, or by another draw) is not specialized again.
#[derive(Default)]
pub struct Evaluations<'e> {
    /// Per expression (by address, for the lifetime 'e): its generic indices, ascending.
    indices: RefCell<FxHashMap<usize, Rc<Vec<u32>>>>,
    /// Per expression and pattern: the specialized expression, while they hold fewer than
    /// `KEPT_TERMS` terms in all.
    forms: RefCell<FxHashMap<FormKey, Rc<Expr>>>,
    kept_terms: Cell<usize>,
    exprs: PhantomData<&'e Expr>,
}

/// An expression (by address) and a pattern of coinciding indices.
type FormKey = (usize, Vec<u32>);

/// The most terms `Evaluations` keeps (about 200 bytes each with their numbers); past it, new patterns are
/// specialized for the binding at hand only.
const KEPT_TERMS: usize = 1 << 18;

impl<'e> Evaluations<'e> {
    pub fn evaluate(&self, expr: &'e Expr, binding: &Binding, ints: &dyn Integrals) -> f64 {
        let terms = |e: &Expr| e.terms.iter().map(|t| term_value(t, binding, ints)).sum();
        let at = expr as *const Expr as usize;
        let indices =
            self.indices.borrow_mut().entry(at).or_insert_with(|| Rc::new(generic_indices(expr))).clone();
        let Some(pattern) = pattern(&indices, binding) else {
            return terms(expr);
        };
        let found = self.forms.borrow().get(&(at, pattern.clone())).cloned();
        let form = found.unwrap_or_else(|| {
            let form = Rc::new(specialize(expr, &indices, &pattern));
            if self.kept_terms.get() + form.terms.len() <= KEPT_TERMS {
                self.kept_terms.set(self.kept_terms.get() + form.terms.len());
                self.forms.borrow_mut().insert((at, pattern), form.clone());
            }
            form
        });
        terms(&form)
    }
}

/// The generic indices an expression names, ascending.
fn generic_indices(expr: &Expr) -> Vec<u32> {
    let mut out: Vec<u32> = expr
        .terms
        .iter()
        .flat_map(|t| t.factor.orbs().into_iter().chain(t.deltas.iter().flat_map(|&(a, b)| [a, b])))
        .filter_map(|o| if let Orb::Index(k) = o { Some(k) } else { None })
        .collect::<FxHashSet<u32>>()
        .into_iter()
        .collect();
    out.sort();
    out
}

/// For each of `indices`, the first of them bound to the same orbital; None when one is unbound
/// or when no two share an orbital.
fn pattern(indices: &[u32], binding: &Binding) -> Option<Vec<u32>> {
    let orbitals: Vec<usize> = indices.iter().map(|&k| binding.indices[k as usize]).collect::<Option<_>>()?;
    let pattern: Vec<u32> = (0..indices.len())
        .map(|t| indices[orbitals.iter().position(|&o| o == orbitals[t]).expect("t itself")])
        .collect();
    (pattern.iter().zip(indices).any(|(r, k)| r != k)).then_some(pattern)
}

/// The expression with every generic index replaced by its representative in `pattern`, terms
/// whose deltas then join different indices dropped, and like terms collected exactly.
fn specialize(expr: &Expr, indices: &[u32], pattern: &[u32]) -> Expr {
    let representative = |k: u32| indices.binary_search(&k).map_or(k, |at| pattern[at]);
    let same = |o: Orb| match o {
        Orb::Index(k) => Orb::Index(representative(k)),
        other => other,
    };
    // a delta the pattern breaks drops its term before any substitution: most terms carry one
    let broken = |t: &&Term| {
        t.deltas.iter().any(|(a, b)| match (a, b) {
            (Orb::Index(a), Orb::Index(b)) => representative(*a) != representative(*b),
            _ => false,
        })
    };
    Expr::from_terms(expr.terms.iter().filter(|t| !broken(t)).filter_map(|t| {
        let t = t.substitute(&same);
        t.deltas.iter().all(|(a, b)| a == b).then(|| Term { deltas: vec![], ..t })
    }))
}

/// The expression specialized for the coincidences of `binding` (see `Evaluations`); None when
/// the binding puts no two of its generic indices on one orbital.
pub(crate) fn specialized(expr: &Expr, binding: &Binding) -> Option<Expr> {
    let indices = generic_indices(expr);
    pattern(&indices, binding).map(|p| specialize(expr, &indices, &p))
}
