//! Total spin of a state: S² = S₋S₊ + S_z² + S_z applied to its determinants exactly, giving
//! <S²>, <S_z> and whether the state is an eigenfunction of each; for a coupled state, read off
//! its coupling.

use crate::engine::coincidence;
use crate::engine::derive::{Derivation, Options, Route};
use crate::engine::determinant::{CaseDet, annihilate, create, sort_with_sign};
use crate::engine::exact::Exact;
use crate::engine::expression::Expr;
use crate::language::orbital::{SpaceSet, Spin, SpinOrbital};
use crate::language::program::{Occupant, Program, Request, RequestKind, State, Symbols};
use std::collections::BTreeMap;

pub type CaseState = BTreeMap<CaseDet, Exact>;

/// S_z of one determinant: closed spaces contribute nothing.
fn s_z(det: &CaseDet) -> Exact {
    let alpha = det.electrons.iter().filter(|e| e.spin == Spin::Alpha).count() as i64;
    Exact::fraction(alpha - (det.electrons.len() as i64 - alpha), 2)
}

/// a+(p flipped) a(p) on a determinant, normal ordered; None when it vanishes.
fn flip(det: &CaseDet, from: SpinOrbital, to: SpinOrbital) -> Option<(i32, CaseDet)> {
    let mut list = det.electrons.clone();
    let sign = annihilate(&mut list, from).ok()?;
    create(&mut list, to).ok()?;
    let sign = sign * sort_with_sign(&mut list);
    Some((sign, CaseDet { closed: det.closed.clone(), electrons: list }))
}

fn add(out: &mut CaseState, det: CaseDet, amount: Exact) {
    let entry = out.entry(det).or_default();
    *entry += &amount;
}

/// S²|state>.
pub fn apply_s_squared(state: &CaseState) -> CaseState {
    let mut out = CaseState::new();
    for (det, c) in state {
        let sz = s_z(det);
        add(&mut out, det.clone(), &(&(&sz * &sz) + &sz) * c);
        // S₋S₊ = Σ_pq a+(p β) a(p α) a+(q α) a(q β)
        for q in det.electrons.iter().filter(|e| e.spin == Spin::Beta) {
            let Some((s1, raised)) = flip(det, *q, SpinOrbital::new(q.orb, Spin::Alpha)) else { continue };
            for p in raised.electrons.iter().filter(|e| e.spin == Spin::Alpha) {
                if let Some((s2, lowered)) = flip(&raised, *p, SpinOrbital::new(p.orb, Spin::Beta)) {
                    add(&mut out, lowered, c * &Exact::integer((s1 * s2) as i64));
                }
            }
        }
    }
    out.retain(|_, c| !c.is_zero());
    out
}

pub fn inner(a: &CaseState, b: &CaseState) -> Exact {
    a.iter().filter_map(|(d, x)| b.get(d).map(|y| x * y)).fold(Exact::zero(), |acc, v| &acc + &v)
}

/// <S²>, <S_z> (normalized) and whether the state is an eigenfunction of S² and of S_z.
pub struct SpinValues {
    pub s_squared: Exact,
    pub s_z: Exact,
    pub eigen_s: bool,
    pub eigen_m: bool,
}

pub fn spin_values(state: &CaseState) -> Option<SpinValues> {
    let norm = inner(state, state);
    let inverse = norm.inverse()?;
    let image = apply_s_squared(state);
    let expectation = inner(state, &image);
    let s_squared = &expectation * &inverse;
    let eigen_s = &inner(&image, &image) * &norm == &expectation * &expectation;
    let weighted = state.iter().fold(Exact::zero(), |acc, (d, c)| &acc + &(&(c * c) * &s_z(d)));
    let first = state.keys().next().map(s_z);
    let eigen_m = state.keys().all(|d| Some(s_z(d)) == first);
    Some(SpinValues { s_squared, s_z: &weighted * &inverse, eigen_s, eigen_m })
}

/// A `spin` request on a configuration state function: <S²> = S(S+1) and <S_z> = M exactly, by
/// construction of its coupling, with no determinant touched. None when the state is not one
/// (a combination, or a csf excited after its definition), when its generic indices may
/// coincide (the determinants settle what happens then), or when `--route determinants` asks
/// for determinants.
pub fn coupled_spin(program: &Program, request: &Request, options: &Options) -> Option<Derivation> {
    if request.kind != RequestKind::Spin || options.route == Route::Determinants {
        return None;
    }
    let coupling = request.bra.coupling.as_ref()?;
    let reference = State::new(vec![(Exact::one(), coupling.reference.clone())]);
    let indices = Symbols::of([&reference]).indices;
    let mut used: BTreeMap<u32, Vec<u32>> = BTreeMap::new();
    for &k in &indices {
        used.entry(program.indices[k as usize].space).or_default().push(k);
    }
    if coincidence::count(&used, options.distinct) != 1u32.into() {
        return None;
    }
    let closed: Vec<u32> = coupling
        .reference
        .occupants
        .iter()
        .filter_map(|o| match o {
            Occupant::Closed(s) => Some(*s),
            Occupant::Electron(_) => None,
        })
        .collect();
    let s = coupling.s();
    let mut notes = vec![];
    if request.bra.is_unexpanded() {
        notes.push(format!(
            "read off the coupling, without expanding the {} determinants of `{}`",
            coupling.determinants, request.bra_text
        ));
    }
    Some(Derivation {
        kind: request.kind,
        text: request.text.clone(),
        bra: request.bra_text.clone(),
        ket: request.ket_text.clone(),
        value: Expr::constant(Exact::fraction(s * (s + 2), 4)),
        overlap: Expr::zero(),
        s_z: Expr::constant(Exact::fraction(coupling.m, 2)),
        notes,
        // one coincidence case only, and a coupled state never vanishes in it
        vanishing: vec![],
        free_indices: indices.into_iter().collect(),
        closed: SpaceSet::of(&closed),
        distinct: options.distinct,
        block: None,
        shells: None,
    })
}
