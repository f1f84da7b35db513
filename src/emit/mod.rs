//! What every emitter shares: the names of summation indices, and the layout of an expression
//! as groups of terms that share their deltas and sums.

pub mod json;
pub mod latex;
pub mod python;
pub mod rust;
pub mod states;
pub mod text;

use crate::engine::block_derivation::Monomial;
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, Factor, IntegralKind, Term};
use crate::language::orbital::{Orb, SpaceId};
use crate::language::program::Program;
use std::collections::BTreeSet;

/// Every expression a derivation shows: its value (and <S_z> for spin), or for a request on
/// pairs of functions every pair's value and overlap.
pub fn expressions(d: &crate::engine::derive::Derivation) -> Vec<&Expr> {
    match &d.block {
        Some(block) => block.pairs.iter().flat_map(|p| [&p.value, &p.overlap]).collect(),
        None => vec![&d.value],
    }
}

/// A derivation's notes, with those of its pairs, each led by the pair it is about.
pub fn notes(d: &crate::engine::derive::Derivation) -> Vec<String> {
    let mut out = d.notes.clone();
    for p in d.block.iter().flat_map(|b| &b.pairs) {
        out.extend(
            p.notes.iter().map(|n| format!("{}: {n}", p.text.split_once(": ").map_or("", |(_, b)| b))),
        );
    }
    out
}

/// One summand of a quadratic (or bilinear) form in the free coefficients as it is written:
/// `number × coefficients × (expression)`; an expression that is a plain number is folded into
/// `number` and leaves `expr` empty.
pub struct Summand<'a> {
    pub number: Exact,
    /// The names of the coefficients multiplied, a square twice; empty for the fixed part.
    pub coefficients: Vec<String>,
    pub expr: Option<&'a Expr>,
}

/// The summands of the monomials' values (`overlap` false) or overlaps (true), zeros left out.
pub fn summands<'a>(program: &Program, monomials: &'a [Monomial], overlap: bool) -> Vec<Summand<'a>> {
    monomials
        .iter()
        .filter_map(|m| {
            let expr = if overlap { &m.overlap } else { &m.value };
            let weight = Exact::integer(m.weight.into());
            let coefficients =
                m.coefficients.iter().map(|&c| program.coefficients[c as usize].name.clone()).collect();
            let constant = match expr.terms.as_slice() {
                [] => return None,
                [t] if t.factor == Factor::One && t.deltas.is_empty() && t.sums.is_empty() => Some(&t.coeff),
                _ => None,
            };
            Some(match constant {
                Some(c) => Summand { number: &weight * c, coefficients, expr: None },
                None => Summand { number: weight, coefficients, expr: Some(expr) },
            })
        })
        .collect()
}

/// A product of coefficient names with powers: `cg cu`, `cg²` (`cg^2` in ASCII).
pub fn monomial_text(coefficients: &[String], square: &dyn Fn(&str) -> String, joint: &str) -> String {
    let mut out: Vec<String> = vec![];
    let mut k = 0;
    while k < coefficients.len() {
        if coefficients.get(k + 1) == Some(&coefficients[k]) {
            out.push(square(&coefficients[k]));
            k += 2;
        } else {
            out.push(coefficients[k].clone());
            k += 1;
        }
    }
    out.join(joint)
}

/// The summation indices of a term in runs over one space, each run with the names its indices
/// have: sums over (occ, occ, vir) named k, l, a give ([k, l], occ) and ([a], vir), written
/// Σ_{k,l∈occ} Σ_{a∈vir} or `for k,l ∈ occ, a ∈ vir`.
pub fn sum_runs<'a>(sums: &[SpaceId], summed: &'a [String]) -> Vec<(Vec<&'a str>, SpaceId)> {
    let mut runs: Vec<(Vec<&str>, SpaceId)> = vec![];
    for (&space, name) in sums.iter().zip(summed) {
        match runs.last_mut() {
            Some((names, last)) if *last == space => names.push(name),
            _ => runs.push((vec![name], space)),
        }
    }
    runs
}

/// The letters summation indices take when a space's own letters do not serve: k, l, m, n,
/// then k1, l1, m1, n1, k2, …
fn letters() -> impl Iterator<Item = String> {
    let base = ["k", "l", "m", "n"];
    base.into_iter().map(String::from).chain((1..).flat_map(move |n| base.map(|s| format!("{s}{n}"))))
}

/// Consecutive terms sharing deltas, sums and the one/two-electron class, written as one
/// `δ … Σ … (t1 + t2 + …)`.
pub struct Group<'a> {
    pub deltas: &'a [(Orb, Orb)],
    pub sums: &'a [SpaceId],
    pub terms: Vec<&'a Term>,
}

pub fn groups(expr: &Expr) -> Vec<Group<'_>> {
    let mut out: Vec<Group> = vec![];
    let class = |t: &Term| t.kind().is_one_electron_like();
    for term in &expr.terms {
        match out.last_mut() {
            Some(g)
                if g.deltas == term.deltas.as_slice()
                    && g.sums == term.sums.as_slice()
                    && class(g.terms[0]) == class(term) =>
            {
                g.terms.push(term)
            }
            _ => out.push(Group { deltas: &term.deltas, sums: &term.sums, terms: vec![term] }),
        }
    }
    out
}

/// The kind of a term's integral and the names of its indices as written: h_pq [p, q], J_pq
/// [p, q], K_pq [p, q], (pq|rs) [p, q, r, s], f_pq [p, q], E_ref [].
pub fn integral_parts(factor: &Factor, namer: &Namer, summed: &[String]) -> (IntegralKind, Vec<String>) {
    let o = |x| namer.orb(x, summed);
    let names = match (*factor, factor.kind()) {
        (Factor::One | Factor::RefEnergy(_), _) => vec![],
        (Factor::Eri(p, _, r, _), IntegralKind::Coulomb) => vec![o(p), o(r)],
        (Factor::Eri(p, q, _, _), IntegralKind::Exchange) => vec![o(p), o(q)],
        (Factor::H(p, q) | Factor::Fock(p, q, _) | Factor::Gamma1(p, q), _) => vec![o(p), o(q)],
        (Factor::Eri(p, q, r, s) | Factor::Gamma2(p, q, r, s), _) => vec![o(p), o(q), o(r), o(s)],
    };
    (factor.kind(), names)
}

/// Names orbitals for one expression: named orbitals and generic indices by their own names,
/// summation indices by the space's own index letters not free in the expression, then by
/// k, l, m, n, … avoiding every name the input declares.
pub struct Namer<'a> {
    program: &'a Program,
    taken: BTreeSet<String>,
    free: BTreeSet<Orb>,
}

impl<'a> Namer<'a> {
    pub fn new(program: &'a Program, expressions: &[&Expr]) -> Namer<'a> {
        let free = expressions.iter().flat_map(|e| e.free_orbs()).collect();
        Namer { program, taken: program.declared_names().map(String::from).collect(), free }
    }

    /// Names for the summation indices of a term with these sums.
    pub fn summed_names(&self, sums: &[SpaceId]) -> Vec<String> {
        let mut used: Vec<String> = vec![];
        for &space in sums {
            let fallback = letters().filter(|s| !self.taken.contains(s));
            let name = self
                .own_letters(space)
                .into_iter()
                .chain(fallback)
                .find(|n| !used.contains(n))
                .expect("an endless supply of letters");
            used.push(name);
        }
        used
    }

    /// Names for the summation indices k and l of the definitions of f_pq and E_ref over the
    /// closed spaces `closed`: the first two of k, l, m, n, … that the expression beside them
    /// does not use and the input does not declare for anything but a member of those spaces
    /// (never p or q, which stand for f's indices).
    pub fn definition_names(&self, closed: &[SpaceId]) -> [String; 2] {
        let own: Vec<String> = closed.iter().flat_map(|&s| self.own_letters(s)).collect();
        let mut names =
            letters().filter(|n| n != "p" && n != "q" && (own.contains(n) || !self.taken.contains(n)));
        [(); 2].map(|()| names.next().expect("an endless supply of letters"))
    }

    /// The index letters of a space that are not free in the expression.
    fn own_letters(&self, space: SpaceId) -> Vec<String> {
        self.program.spaces[space as usize]
            .indices
            .iter()
            .filter(|&&k| !self.free.contains(&Orb::Index(k)))
            .map(|&k| self.program.indices[k as usize].name.clone())
            .collect()
    }

    pub fn orb(&self, orb: Orb, summed: &[String]) -> String {
        match orb {
            Orb::Summed(d) => summed[d as usize].clone(),
            other => self.program.orb_name(other),
        }
    }

    pub fn space(&self, space: SpaceId) -> &str {
        &self.program.spaces[space as usize].name
    }
}

/// Joins (negative, magnitude text) items with their signs; the first item's sign is
/// returned rather than written, so the caller places it (a leading minus, or ` − ` between groups).
pub fn join_signed(items: impl IntoIterator<Item = (bool, String)>, minus: &str) -> (bool, String) {
    let mut out = String::new();
    let mut first_negative = false;
    for (k, (negative, text)) in items.into_iter().enumerate() {
        if k == 0 {
            first_negative = negative;
        } else if negative {
            out.push_str(&format!(" {minus} "));
        } else {
            out.push_str(" + ");
        }
        out.push_str(&text);
    }
    (first_negative, out)
}

/// Which of f_pq and E_ref an expression uses, so that only their definitions stand beside it.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Definitions {
    pub fock: bool,
    pub reference: bool,
}

impl Definitions {
    pub fn used_in(expressions: &[&Expr]) -> Definitions {
        let uses = |kind| expressions.iter().flat_map(|e| &e.terms).any(|t| t.kind() == kind);
        Definitions { fock: uses(IntegralKind::Fock), reference: uses(IntegralKind::RefEnergy) }
    }

    pub fn any(self) -> bool {
        self.fock || self.reference
    }
}

/// The one-line summary of what a derivation was checked against.
pub fn verification_line(report: Option<&crate::check::verify::Report>) -> String {
    match report {
        Some(r) => r.summary(),
        None => "not verified (--no-verify)".to_string(),
    }
}

/// One self-check of generated code: a binding of every symbol to 0-based orbitals of a
/// `HashedIntegrals` table, and the value brute-force determinant algebra gives there.
#[derive(Clone, Debug, PartialEq)]
pub struct TestVector {
    pub binding: crate::numbers::evaluate::Binding,
    pub orbitals: usize,
    pub expected: f64,
    /// "brute force", or for states too large for it, "verified expression".
    pub source: &'static str,
}

/// The seed of the integrals that generated code checks itself on.
pub const TEST_SEED: u64 = 0x5eed_2026;

/// The bindings generated code is tested at, each with the number of orbitals of its test
/// integrals: the spaces sized 2 and 3 (more where generic indices need room), generic indices
/// at their first assignment and, where two indices share a space, also where they coincide.
fn test_bindings(
    program: &Program,
    derivation: &crate::engine::derive::Derivation,
) -> Vec<(crate::numbers::evaluate::Binding, usize)> {
    use crate::numbers::evaluate::Binding;
    let mut out = vec![];
    for base in [2usize, 3] {
        let mut next = program.orbitals.len();
        let spaces: Vec<Vec<usize>> = program
            .spaces
            .iter()
            .enumerate()
            .map(|(s, _)| {
                let needed = derivation
                    .free_indices
                    .iter()
                    .filter(|&&k| program.indices[k as usize].space == s as u32)
                    .count();
                let n = base.max(needed + 1);
                next += n;
                (next - n..next).collect()
            })
            .collect();
        for coincide in [false, true] {
            if coincide && (derivation.distinct || base == 3) {
                continue;
            }
            let mut binding = Binding {
                orbitals: (0..program.orbitals.len()).collect(),
                spaces: spaces.clone(),
                indices: vec![None; program.indices.len()],
            };
            let mut used_in_space = vec![0usize; program.spaces.len()];
            for &k in &derivation.free_indices {
                let s = program.indices[k as usize].space as usize;
                let slot = if coincide { 0 } else { used_in_space[s] };
                binding.indices[k as usize] = Some(spaces[s][slot.min(spaces[s].len() - 1)]);
                used_in_space[s] += 1;
            }
            if coincide && used_in_space.iter().all(|&n| n < 2) {
                continue;
            }
            out.push((binding, next));
        }
    }
    out
}

/// Test vectors for one derivation, at every test binding (see `test_bindings`).
pub fn test_vectors(
    program: &Program,
    request: &crate::language::program::Request,
    derivation: &crate::engine::derive::Derivation,
) -> crate::error::Result<Vec<TestVector>> {
    use crate::numbers::evaluate::evaluate;
    use crate::numbers::integrals::HashedIntegrals;
    let mut out = vec![];
    for (binding, orbitals) in test_bindings(program, derivation) {
        let ints = HashedIntegrals { seed: TEST_SEED, orbitals };
        let (expected, source) = if crate::check::verify::fits_whole_check(request) {
            match crate::check::verify::compare(program, request, derivation, &binding, &ints)? {
                // + 0.0: a zero is written as 0.0, never -0.0
                Some(c) => (c[0].brute_force + 0.0, "brute force"),
                None => continue,
            }
        } else {
            (evaluate(&derivation.value, &binding, &ints) + 0.0, "verified expression")
        };
        out.push(TestVector { binding, orbitals, expected, source });
    }
    Ok(out)
}

/// The two functions of a pair as generated names read them, joined by `joint`: a `roots`
/// operand by its position from 1, a part by its free coefficient, the fixed part as `fixed`.
pub fn pair_label(
    program: &Program,
    kind: crate::language::program::RequestKind,
    block: &crate::language::block::Block,
    pair: &crate::language::block::Pair,
    joint: &str,
) -> String {
    use crate::language::program::RequestKind;
    let label = |f: &crate::language::block::Function, k: usize| match (kind, f.coefficient) {
        (RequestKind::Roots, _) => (k + 1).to_string(),
        (_, Some(c)) => program.coefficients[c as usize].name.clone(),
        (_, None) => "fixed".into(),
    };
    format!(
        "{}{joint}{}",
        label(&block.rows[pair.row], pair.row),
        label(&block.columns[pair.column], pair.column)
    )
}

/// One self-check of a generated density function: the test vector's `expected` is the energy
/// Σ γ_pq h_pq + ½ Σ Γ_pqrs (pq|rs) at the test integrals (for `density S T` the element
/// <S|H|T>), and `densities` are the densities over its orbitals, both from brute force where the
/// states are small enough.
pub struct DensityTestVector {
    pub vector: TestVector,
    pub densities: crate::numbers::density::Densities,
}

impl DensityTestVector {
    /// The elements of γ (`one`) or Γ (`two`) that are not zero, each with its orbitals: what
    /// generated tests list, the others being checked to be zero.
    pub fn nonzero(values: &[f64], n: usize) -> Vec<(Vec<usize>, f64)> {
        values
            .iter()
            .enumerate()
            .filter(|(_, x)| x.abs() > 1e-14)
            .map(|(at, &x)| {
                let rank = if values.len() == n * n { 2 } else { 4 };
                let orbitals = (0..rank).rev().map(|k| at / n.pow(k) % n).collect();
                // + 0.0: a zero is written as 0.0, never -0.0
                (orbitals, x + 0.0)
            })
            .collect()
    }
}

/// Test vectors for a `density S` or `density S T` request, at every test binding where the
/// state does not vanish: the densities of the brute-force state vectors (normalized for
/// `density S`, as the derivation is) and the energy or element brute force gives; for states
/// too large to check whole, the verified densities and the energy they give.
pub fn density_test_vectors(
    program: &Program,
    request: &crate::language::program::Request,
    derivation: &crate::engine::derive::Derivation,
) -> Vec<DensityTestVector> {
    use crate::check::brute_force;
    use crate::language::program::RequestKind;
    use crate::numbers::density::densities;
    use crate::numbers::integrals::HashedIntegrals;
    let mut out = vec![];
    for (binding, n) in test_bindings(program, derivation) {
        let ints = HashedIntegrals { seed: TEST_SEED, orbitals: n };
        let (densities, energy, source) = if crate::check::verify::fits_whole_check(request) {
            let bra = brute_force::state_vector(&request.bra, &binding);
            let ket = brute_force::state_vector(&request.ket, &binding);
            if derivation.kind == RequestKind::TransitionDensity {
                (densities(&bra, &ket, n), brute_force::matrix_element(&bra, &ket, &ints), "brute force")
            } else {
                let norm = brute_force::dot(&ket, &ket);
                let scale: f64 = request.ket.terms.iter().map(|(c, _)| c.to_f64().powi(2)).sum();
                if norm.abs() < 1e-12 * scale {
                    continue;
                }
                let mut d = densities(&ket, &ket, n);
                d.one.iter_mut().chain(d.two.iter_mut()).for_each(|x| *x /= norm);
                (d, brute_force::matrix_element(&ket, &ket, &ints) / norm, "brute force")
            }
        } else {
            let d = crate::numbers::evaluate::density_elements(&derivation.value, &binding).dense(n);
            let energy = d.energy(&ints);
            (d, energy, "verified expression")
        };
        let vector = TestVector { binding, orbitals: n, expected: energy + 0.0, source };
        out.push(DensityTestVector { vector, densities });
    }
    out
}

/// The overlap <f|g> of a pair as a request and derivation of its own (an `overlap` pair
/// already is one), so that it is emitted and tested like any overlap.
pub fn overlap_of(
    request: &crate::language::program::Request,
    d: &crate::engine::derive::Derivation,
) -> (crate::language::program::Request, crate::engine::derive::Derivation) {
    use crate::language::program::RequestKind;
    if d.kind == RequestKind::Overlap {
        return (request.clone(), d.clone());
    }
    let text = |t: &str| t.replacen("|H|", "|", 1);
    (
        crate::language::program::Request {
            kind: RequestKind::Overlap,
            text: text(&request.text),
            ..request.clone()
        },
        crate::engine::derive::Derivation {
            kind: RequestKind::Overlap,
            text: text(&d.text),
            value: d.overlap.clone(),
            ..d.clone()
        },
    )
}

/// The values generated code checks a function of free coefficients at: 3/4, -1/2, 5/8, -3/8,
/// 7/8, -1/4, then again.
pub fn test_coefficients(used: &[u32]) -> std::collections::BTreeMap<u32, Exact> {
    const NUMERATORS: [i64; 6] = [6, -4, 5, -3, 7, -2];
    used.iter().enumerate().map(|(k, &c)| (c, Exact::fraction(NUMERATORS[k % 6], 8))).collect()
}

/// For a request with free coefficients: the coefficient values its assembled function is
/// tested at, and the fixed request they make with a derivation to take test vectors from
/// (brute force only: None when the states are too large to check whole).
#[allow(clippy::type_complexity)]
pub fn assembled_test(
    request: &crate::language::program::Request,
    d: &crate::engine::derive::Derivation,
    block: &crate::engine::block_derivation::BlockDerivation,
) -> Option<(
    std::collections::BTreeMap<u32, Exact>,
    crate::language::program::Request,
    crate::engine::derive::Derivation,
)> {
    let values = test_coefficients(&block.block.coefficients());
    let (bra, ket) = block.block.states_at(&values);
    let at = crate::language::program::Request { bra, ket, block: None, ..request.clone() };
    if !crate::check::verify::fits_whole_check(&at) {
        return None;
    }
    let (value, overlap) = block.at(&values);
    let derivation = crate::engine::derive::Derivation { value, overlap, block: None, ..d.clone() };
    Some((values, at, derivation))
}

/// Identifiers for generated code: input names made valid, keywords and clashes avoided.
pub struct Identifiers {
    taken: BTreeSet<String>,
    keywords: &'static [&'static str],
}

impl Identifiers {
    pub fn new(keywords: &'static [&'static str], reserved: &[&str]) -> Identifiers {
        Identifiers { taken: reserved.iter().map(|s| s.to_string()).collect(), keywords }
    }

    /// A fresh identifier from `wanted`: letters, digits and `_` only, lower case, not starting
    /// with a digit, not a keyword, not given out before.
    pub fn fresh(&mut self, wanted: &str) -> String {
        let mut base: String = wanted
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() { c.to_ascii_lowercase() } else { '_' })
            .collect();
        while base.contains("__") {
            base = base.replace("__", "_");
        }
        let base = base.trim_matches('_').to_string();
        let base = if base.is_empty() || base.starts_with(|c: char| c.is_ascii_digit()) {
            format!("x_{base}")
        } else {
            base
        };
        let base = if self.keywords.contains(&base.as_str()) { format!("{base}_") } else { base };
        let mut name = base.clone();
        let mut n = 2;
        while self.taken.contains(&name) {
            // `self_` and a clash make `self_2`: never a double underscore, which Rust's
            // snake-case lint refuses
            name = format!("{}_{n}", base.trim_end_matches('_'));
            n += 1;
        }
        self.taken.insert(name.clone());
        name
    }
}
