//! The expander: a request becomes an exact expression in spatial integrals, derived case by
//! case over index coincidences and assembled with Kronecker deltas.

use crate::engine::block_derivation::BlockDerivation;
use crate::engine::coincidence::{self, Case};
use crate::engine::density::{Operator, Symmetry};
use crate::engine::determinant::{CaseDet, Vanishing};
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, RestrictedSum};
use crate::engine::fock::fock_form;
use crate::engine::shells::{ShellForm, shell_form};
use crate::engine::slater_condon::{self, BitState, Universe};
use crate::engine::spin_operator::{SpinValues, spin_values};
use crate::error::{Error, ErrorKind, Result};
use crate::language::orbital::{Orb, SpaceId, SpaceSet};
use crate::language::program::{Coupling, DetSpec, Program, Request, RequestKind, State, Symbols};
use rayon::prelude::*;
use std::collections::{BTreeMap, BTreeSet};
use std::sync::Arc;

/// How derivations are carried out.
#[derive(Clone, Debug)]
pub struct Options {
    /// Assume different generic indices denote different orbitals (no deltas).
    pub distinct: bool,
    /// The largest number of determinants a state may expand to.
    pub max_determinants: usize,
    /// Present results with the closed-space Fock matrix f_pq and the reference energy E_ref.
    pub fock: bool,
    /// How the energy of a single coupled state is found.
    pub route: Route,
    /// The most coincidence cases of the generic indices a request may need.
    pub max_cases: usize,
}

/// The default of `Options::max_cases`: 6 generic indices in each of two spaces (41209 cases)
/// derive and verify in about 1.5 s, 9 in one space (21147) in about 2.5 s, on 2 cores.
pub const MAX_CASES: usize = 50_000;

/// The way to the energy of one configuration state function.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Route {
    /// Determinants when the state is expanded, spin-coupling algebra when it is too large.
    #[default]
    Auto,
    Determinants,
    /// Spin-coupling algebra: the all-alpha determinant's energy plus exchange corrections
    /// from <s_i·s_j> along the coupling path.
    SpinAlgebra,
}

impl Default for Options {
    fn default() -> Options {
        Options {
            distinct: false,
            max_determinants: 200_000,
            fock: false,
            route: Route::Auto,
            max_cases: MAX_CASES,
        }
    }
}

/// A derived request: the expression and, for energies and elements, the overlap that the
/// constant energy multiplies.
#[derive(Clone, Debug)]
pub struct Derivation {
    pub kind: RequestKind,
    pub text: String,
    pub bra: String,
    pub ket: String,
    /// energy: <X|H|X>/<X|X>; element: <X|H|Y>; overlap: <X|Y>. Electronic part only.
    pub value: Expr,
    /// <bra|ket> (1 for an energy, 0 for a spin request).
    pub overlap: Expr,
    /// For spin requests <S_z> (the value is <S²>); zero otherwise.
    pub s_z: Expr,
    /// Conditions under which the expression does not apply, in words.
    pub notes: Vec<String>,
    /// The coincidence cases in which the bra or the ket vanishes: there the state does not
    /// exist, and the expression (energy, element or overlap alike) has no meaning.
    pub vanishing: Vec<VanishingCase>,
    /// Generic indices that the result depends on, in declaration order.
    pub free_indices: Vec<u32>,
    /// The closed spaces of the bra and ket: what f_pq and E_ref sum over.
    pub closed: SpaceSet,
    /// Derived assuming different generic indices are different orbitals.
    pub distinct: bool,
    /// For a request on pairs of functions (free coefficients, `roots`): every pair derived;
    /// `value`, `overlap` and `s_z` are then empty, and the pairs hold the result.
    pub block: Option<Arc<BlockDerivation>>,
    /// For `shells`: the energy (in `value`) in the open-shell form.
    pub shells: Option<Arc<ShellForm>>,
}

impl Derivation {
    /// What the constant energy of an integral file (nuclear repulsion) multiplies: <bra|ket>
    /// for energies and elements of H; nothing for an overlap or a spin expectation value,
    /// which are pure numbers.
    pub fn constant_factor(&self) -> Option<&Expr> {
        matches!(self.kind, RequestKind::Energy | RequestKind::Element | RequestKind::Shells)
            .then_some(&self.overlap)
    }

    /// For `density` requests: the symmetry the density has (see `density.rs`).
    pub fn density_symmetry(&self) -> Option<Symmetry> {
        match self.kind {
            RequestKind::Density => Some(Symmetry::Expectation),
            RequestKind::TransitionDensity => Some(Symmetry::Transition),
            _ => None,
        }
    }
}

/// A coincidence of generic indices in which a state of the request has no determinant left.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct VanishingCase {
    /// The blocks of equal generic indices (two or more each, ascending); indices in no block
    /// differ from every other.
    pub equal: Vec<Vec<u32>>,
    /// The operand that vanishes, as written (the bra when both do).
    pub state: String,
}

use crate::engine::spin_operator::CaseState;

/// The generic indices used, grouped by space, the spaces standing closed, and all indices.
pub(crate) fn used_indices(
    program: &Program,
    states: &[&State],
) -> (BTreeMap<SpaceId, Vec<u32>>, Vec<SpaceId>, BTreeSet<u32>) {
    let symbols = Symbols::of(states.iter().copied());
    let mut by_space: BTreeMap<SpaceId, Vec<u32>> = BTreeMap::new();
    for &k in &symbols.indices {
        by_space.entry(program.indices[k as usize].space).or_default().push(k);
    }
    (by_space, symbols.closed.into_iter().collect(), symbols.indices)
}

fn vanishing_error(program: &Program, request: &Request, why: Vanishing, label: &str) -> Error {
    let kind = match why {
        Vanishing::Pauli(so) => ErrorKind::Pauli { spin_orbital: program.spin_orbital_name(so) },
        Vanishing::Empty(so) => ErrorKind::NotExciting {
            spin_orbital: format!("{} is not occupied", program.spin_orbital_name(so)),
            det: label.into(),
        },
    };
    Error::at(kind, &request.span)
}

/// The fewest determinants a state has for its determinants to be built in parallel.
const PARALLEL_FROM: usize = 4096;

type BuiltDet = std::result::Result<(i32, CaseDet), Vanishing>;

fn case_state(state: &State, case: &Case) -> std::result::Result<CaseState, Vanishing> {
    // large states are built in parallel, in order; equal determinants then meet by a sort
    fn build<'a>((coeff, det): &'a (Exact, DetSpec), case: &Case) -> (&'a Exact, BuiltDet) {
        (coeff, CaseDet::build(det, case))
    }
    let built: Vec<_> = if state.terms.len() < PARALLEL_FROM {
        state.terms.iter().map(|t| build(t, case)).collect()
    } else {
        state.terms.par_iter().map(|t| build(t, case)).collect()
    };
    let first_vanishing = built.iter().find_map(|(_, b)| b.as_ref().err().copied());
    let mut signed: Vec<(CaseDet, Exact)> = built
        .into_iter()
        .filter_map(|(coeff, b)| {
            b.ok().map(|(sign, d)| (d, if sign < 0 { -coeff.clone() } else { coeff.clone() }))
        })
        .collect();
    signed.par_sort_by(|a, b| a.0.cmp(&b.0));
    let mut out: Vec<(CaseDet, Exact)> = Vec::with_capacity(signed.len());
    for (d, c) in signed {
        match out.last_mut() {
            Some((last, sum)) if *last == d => *sum += &c,
            _ => out.push((d, c)),
        }
    }
    out.retain(|(_, c)| !c.is_zero());
    let out: CaseState = out.into_iter().collect();
    match (out.is_empty(), first_vanishing) {
        (true, Some(why)) if state.terms.len() == 1 => Err(why),
        _ => Ok(out),
    }
}

fn names(program: &Program, spaces: &[SpaceId]) -> String {
    spaces.iter().map(|&s| program.spaces[s as usize].name.clone()).collect::<Vec<_>>().join(", ")
}

/// Checks, in the case where all indices differ, that bra and ket can be compared.
fn check_comparable(program: &Program, request: &Request, bra: &CaseState, ket: &CaseState) -> Result<()> {
    let mut dets = bra.keys().chain(ket.keys());
    let Some(first) = dets.next() else {
        return Ok(());
    };
    for d in bra.keys().chain(ket.keys()) {
        if d.closed != first.closed {
            return Err(Error::at(
                ErrorKind::ClosedSpaces {
                    bra: names(program, &first.closed),
                    ket: names(program, &d.closed),
                },
                &request.span,
            ));
        }
        if d.electrons.len() != first.electrons.len() {
            return Err(Error::at(
                ErrorKind::ElectronCount { bra: first.electrons.len(), ket: d.electrons.len() },
                &request.span,
            ));
        }
    }
    Ok(())
}

/// The blocks of equal indices of a case, each ascending, ordered by their smallest index.
fn equal_blocks(case: &Case) -> Vec<Vec<u32>> {
    let mut blocks: BTreeMap<u32, Vec<u32>> = BTreeMap::new();
    for (representative, other) in case.deltas() {
        if let (Orb::Index(r), Orb::Index(k)) = (representative, other) {
            blocks.entry(r).or_insert_with(|| vec![r]).push(k);
        }
    }
    blocks.into_values().collect()
}

/// The equalities of a case in words: "t = u = v", blocks joined by "and".
fn case_text(program: &Program, case: &Case) -> String {
    equal_blocks(case)
        .iter()
        .map(|block| block.iter().map(|&k| program.orb_name(Orb::Index(k))).collect::<Vec<_>>().join(" = "))
        .collect::<Vec<_>>()
        .join(" and ")
}

/// The energy of one coupled state: the all-alpha determinant's energy, derived as any other,
/// plus the exchange corrections of spin-coupling algebra.
fn by_spin_algebra(
    program: &Program,
    request: &Request,
    coupling: &Coupling,
    options: &Options,
) -> Result<Derivation> {
    let reference = State::new(vec![(Exact::one(), coupling.reference.clone())]);
    let high_spin = Request { bra: reference.clone(), ket: reference, ..request.clone() };
    let mut d = derive(program, &high_spin, &Options { fock: false, ..options.clone() })?;
    d.value = d.value.plus(&crate::engine::coupling_energy::exchange_corrections(coupling));
    if options.fock {
        d.value = fock_form(&d.value, d.closed);
    }
    d.bra = request.bra_text.clone();
    d.ket = request.ket_text.clone();
    d.notes.push(format!(
        "derived by spin-coupling algebra, without expanding the {} determinants of `{}`",
        coupling.determinants, request.bra_text
    ));
    Ok(d)
}

/// Checks a state where it is defined: it must keep a determinant once equal determinants are
/// combined, every determinant must exist, and all must share closed spaces and electron count.
pub fn check_definition(
    program: &Program,
    state: &State,
    name: &str,
    span: &crate::error::Span,
) -> Result<()> {
    let request = Request {
        kind: RequestKind::Overlap,
        text: span.text().to_string(),
        bra: state.clone(),
        ket: state.clone(),
        bra_text: name.to_string(),
        ket_text: name.to_string(),
        span: span.clone(),
        block: None,
    };
    derive(program, &request, &Options { distinct: true, ..Options::default() }).map(|_| ())
}

/// The energy of one coupled state goes by spin algebra when the route asks for it (or, by
/// default, when the state is too large to expand) and its open shells are named orbitals.
fn wants_spin_algebra<'a>(request: &'a Request, options: &Options) -> Option<&'a Coupling> {
    let coupling = request.bra.coupling.as_deref().filter(|_| request.kind == RequestKind::Energy)?;
    let named = coupling.open.iter().all(|o| matches!(o, Orb::Named(_)));
    let wanted = match options.route {
        Route::Auto => request.bra.is_unexpanded(),
        Route::Determinants => false,
        Route::SpinAlgebra => true,
    };
    (named && wanted).then_some(coupling)
}

/// The bra and the ket built in one case. In the finest case a determinant that vanishes is an
/// error; in coarser ones a vanishing state is just empty.
fn case_states(
    program: &Program,
    request: &Request,
    case: &Case,
    finest: bool,
    expectation: bool,
) -> Result<(CaseState, Option<CaseState>)> {
    let build = |state: &State, label: &str| {
        case_state(state, case).map_err(|why| vanishing_error(program, request, why, label))
    };
    // an expectation value builds its state once; None stands for a ket equal to the bra
    let ket = (!expectation).then(|| build(&request.ket, &request.ket_text));
    match (build(&request.bra, &request.bra_text), ket.transpose()) {
        (Ok(b), Ok(k)) => Ok((b, k)),
        (Err(e), _) | (_, Err(e)) if finest => Err(e),
        _ => Ok((CaseState::new(), Some(CaseState::new()))),
    }
}

/// In the case where all indices differ, bra and ket must be comparable and non-empty; their
/// closed spaces are what f_pq and E_ref sum over.
fn check_finest(program: &Program, request: &Request, bra: &CaseState, ket: &CaseState) -> Result<SpaceSet> {
    check_comparable(program, request, bra, ket)?;
    for (s, label) in [(bra, &request.bra_text), (ket, &request.ket_text)] {
        if s.is_empty() {
            return Err(Error::at(ErrorKind::EmptyState { name: label.clone() }, &request.span));
        }
    }
    Ok(bra.keys().next().map_or(SpaceSet::default(), |d| SpaceSet::of(&d.closed)))
}

/// A warning when the state of a spin request is not an eigenfunction of S² or S_z in a case.
fn spin_warning(
    program: &Program,
    request: &Request,
    case: &Case,
    finest: bool,
    v: &SpinValues,
) -> Option<String> {
    let which = match (v.eigen_s, v.eigen_m) {
        (true, true) => return None,
        (false, false) => "S^2 or S_z",
        (false, true) => "S^2",
        (true, false) => "S_z",
    };
    let place = if finest { String::new() } else { format!(" when {}", case_text(program, case)) };
    Some(format!(
        "warning: `{}` is not an eigenfunction of {which}{place}: <S^2> = {}, <S_z> = {}",
        request.bra_text, v.s_squared, v.s_z
    ))
}

/// The value, the overlap and (for spin requests) <S_z> of one case; None where the case has
/// no value because the state vanishes there (noted in `notes`).
fn case_channels(
    program: &Program,
    request: &Request,
    case: &Case,
    finest: bool,
    (bra, ket): (&CaseState, Option<&CaseState>),
    notes: &mut Vec<String>,
) -> Result<[Option<Expr>; 3]> {
    let all_dets = || bra.keys().chain(ket.into_iter().flat_map(|k| k.keys()));
    let closed: Vec<RestrictedSum> = all_dets()
        .next()
        .map(|d| {
            d.closed
                .iter()
                .map(|&s| RestrictedSum { space: s, excluded: case.extracted(s).to_vec() })
                .collect()
        })
        .unwrap_or_default();
    let with_span = |e: Error| Error { span: Some(request.span.clone()), ..e };
    let universe = Universe::new(all_dets()).map_err(with_span)?;
    let bra_bits = BitState::new(bra, &universe).map_err(with_span)?;
    let ket_bits = ket.map(|k| BitState::new(k, &universe)).transpose().map_err(with_span)?;
    let ket_bits = ket_bits.as_ref().unwrap_or(&bra_bits);
    let overlap = slater_condon::overlap(&bra_bits, ket_bits);
    let s = Expr::constant(overlap.clone());
    let mut vanishes = || {
        notes.push(format!(
            "the state vanishes when {}; the expression does not apply there",
            case_text(program, case)
        ));
    };
    let zero_norm = || Error::at(ErrorKind::ZeroNorm { state: request.bra_text.clone() }, &request.span);
    Ok(match request.kind {
        RequestKind::Overlap => [Some(s.clone()), Some(s), None],
        // a `roots` request reaches here only through its pairs, which are elements
        RequestKind::Element | RequestKind::Roots | RequestKind::TransitionDensity => {
            let operator = operator(request.kind);
            [
                Some(slater_condon::hamiltonian(&bra_bits, ket_bits, &universe, &closed, operator)),
                Some(s),
                None,
            ]
        }
        // a `shells` request is derived as the energy it reads; these take one state, so the
        // overlap is its norm
        RequestKind::Energy | RequestKind::Density | RequestKind::Shells => match overlap.inverse() {
            Some(inverse) => [
                Some(
                    slater_condon::hamiltonian(
                        &bra_bits,
                        &bra_bits,
                        &universe,
                        &closed,
                        operator(request.kind),
                    )
                    .scaled(&inverse),
                ),
                Some(s),
                None,
            ],
            None if finest => return Err(zero_norm()),
            None => {
                vanishes();
                [None, Some(s), None]
            }
        },
        RequestKind::Spin => match spin_values(bra) {
            Some(v) => {
                notes.extend(spin_warning(program, request, case, finest, &v));
                [Some(Expr::constant(v.s_squared)), Some(s), Some(Expr::constant(v.s_z))]
            }
            None if finest => return Err(zero_norm()),
            None => {
                vanishes();
                [None, Some(s), None]
            }
        },
    })
}

/// What a request's value is made of: densities for `density`, H for the others.
fn operator(kind: RequestKind) -> Operator {
    match kind {
        RequestKind::Density | RequestKind::TransitionDensity => Operator::Densities,
        _ => Operator::Hamiltonian,
    }
}

/// A `shells` request: the energy, derived as `energy` would be, read in the open-shell form.
fn derive_shells(program: &Program, request: &Request, options: &Options) -> Result<Derivation> {
    let energy = Request { kind: RequestKind::Energy, ..request.clone() };
    let mut d = derive(program, &energy, &Options { fock: false, ..options.clone() })?;
    let form = shell_form(&d.value).map_err(|outside| {
        let term = crate::emit::text::term_text(program, &outside.term);
        Error::at(
            ErrorKind::OutsideShellForm { request: request.text.clone(), term, why: outside.why.into() },
            &request.span,
        )
    })?;
    d.kind = RequestKind::Shells;
    d.text = request.text.clone();
    d.shells = Some(Arc::new(form));
    Ok(d)
}

/// Möbius inversion over the coincidence lattice: each case keeps only what it adds to the
/// finer cases it contains, and the result is the sum of those parts, each under the deltas
/// that select its case. Only cases that add something are kept: in most cases the finer parts
/// already give the whole value, and those cases leave no trace.
#[derive(Default)]
struct Mobius {
    parts: Vec<(Case, [Expr; 3])>,
}

impl Mobius {
    /// Adds a case; cases come finest first, so every finer case is already here.
    fn add(&mut self, case: &Case, channels: [Option<Expr>; 3]) {
        let finer: Vec<&[Expr; 3]> =
            self.parts.iter().filter(|(other, _)| other.refines(case)).map(|(_, own)| own).collect();
        let own: [Expr; 3] = std::array::from_fn(|c| match &channels[c] {
            None => Expr::zero(),
            Some(value) => {
                let minus_one = Exact::integer(-1);
                let finer_terms = finer.iter().flat_map(|own| own[c].terms.iter()).map(|t| {
                    let mut t = t.substitute(&|x| case.orb(x));
                    t.coeff = &t.coeff * &minus_one;
                    t
                });
                Expr::from_terms(value.terms.iter().cloned().chain(finer_terms))
            }
        });
        if own.iter().any(|e| !e.is_zero()) {
            self.parts.push((case.clone(), own));
        }
    }

    fn assemble(&self) -> [Expr; 3] {
        std::array::from_fn(|c| {
            Expr::from_terms(self.parts.iter().flat_map(|(case, own)| {
                let deltas = case.deltas();
                own[c].terms.iter().map(move |t| {
                    let mut t = t.clone();
                    t.deltas.extend_from_slice(&deltas);
                    t
                })
            }))
        })
    }
}

/// Derives one request.
pub fn derive(program: &Program, request: &Request, options: &Options) -> Result<Derivation> {
    if let Some(block) = &request.block {
        return crate::engine::block_derivation::derive_block(program, request, block, options);
    }
    if request.kind == RequestKind::Shells {
        return derive_shells(program, request, options);
    }
    if let Some(coupling) = wants_spin_algebra(request, options) {
        return by_spin_algebra(program, request, coupling, options);
    }
    if let Some(spin) = crate::engine::spin_operator::coupled_spin(program, request, options) {
        return Ok(spin);
    }
    crate::engine::bounds::check(program, request, options)?;
    let (used, closed_spaces, all_indices) = used_indices(program, &[&request.bra, &request.ket]);
    let cases = coincidence::cases(&used, &closed_spaces, options.distinct);
    let mut notes = vec![];
    let mut vanishing = vec![];
    let mut mobius = Mobius::default();
    let mut closed_set = SpaceSet::default();
    let expectation = request.ket == request.bra;
    for (n, case) in cases.iter().enumerate() {
        let finest = n == 0;
        let (bra, ket) = case_states(program, request, case, finest, expectation)?;
        let ket_or_bra = ket.as_ref().unwrap_or(&bra);
        if finest {
            closed_set = check_finest(program, request, &bra, ket_or_bra)?;
        }
        let empty = [(&bra, &request.bra_text), (ket_or_bra, &request.ket_text)]
            .into_iter()
            .find(|(s, _)| s.is_empty());
        if let Some((_, label)) = empty.filter(|_| !finest) {
            vanishing.push(VanishingCase { equal: equal_blocks(case), state: label.clone() });
        }
        let channels = case_channels(program, request, case, finest, (&bra, ket.as_ref()), &mut notes)?;
        mobius.add(case, channels);
    }
    let [mut value, mut overlap_expr, s_z] = mobius.assemble();
    if options.fock && operator(request.kind) == Operator::Hamiltonian {
        value = fock_form(&value, closed_set);
    }
    // the factor of the constant energy: 1 for an energy, none for a spin expectation value
    match request.kind {
        RequestKind::Energy | RequestKind::Density => overlap_expr = Expr::constant(Exact::one()),
        RequestKind::Spin => overlap_expr = Expr::zero(),
        _ => {}
    }
    Ok(Derivation {
        kind: request.kind,
        text: request.text.clone(),
        bra: request.bra_text.clone(),
        ket: request.ket_text.clone(),
        value,
        overlap: overlap_expr,
        s_z,
        notes,
        vanishing,
        free_indices: all_indices.into_iter().collect(),
        closed: closed_set,
        distinct: options.distinct,
        block: None,
        shells: None,
    })
}
