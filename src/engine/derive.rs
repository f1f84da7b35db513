//! The expander: a request becomes an exact expression in spatial integrals, derived case by
//! case over index coincidences and assembled with Kronecker deltas.

use crate::engine::coincidence::{self, Case};
use crate::engine::determinant::{CaseDet, Vanishing};
use crate::engine::exact::Exact;
use crate::engine::expression::{Expr, RestrictedSum};
use crate::engine::fock::fock_form;
use crate::engine::slater_condon::{self, BitState, Universe};
use crate::engine::spin_operator::spin_values;
use crate::error::{Error, ErrorKind, Result};
use crate::language::orbital::{Orb, SpaceId, SpaceSet};
use crate::language::program::{Program, Request, RequestKind, State, Symbols};
use std::collections::{BTreeMap, BTreeSet};

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
}

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
        Options { distinct: false, max_determinants: 200_000, fock: false, route: Route::Auto }
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
    /// <bra|ket>, the factor of the constant (nuclear repulsion) energy.
    pub overlap: Expr,
    /// For spin requests <S_z> (the value is <S²>); zero otherwise.
    pub s_z: Expr,
    /// Conditions under which the expression does not apply, in words.
    pub notes: Vec<String>,
    /// Generic indices that the result depends on, in declaration order.
    pub free_indices: Vec<u32>,
    /// The closed spaces of the bra and ket: what f_pq and E_ref sum over.
    pub closed: SpaceSet,
    /// Derived assuming different generic indices are different orbitals.
    pub distinct: bool,
}

use crate::engine::spin_operator::CaseState;

/// The generic indices used, grouped by space, the spaces standing closed, and all indices.
fn used_indices(
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

fn case_state(state: &State, case: &Case) -> std::result::Result<CaseState, Vanishing> {
    let mut out = CaseState::new();
    let mut first_vanishing = None;
    for (coeff, det) in state.terms.iter() {
        match CaseDet::build(det, case) {
            Ok((sign, d)) => {
                let c = if sign < 0 { -coeff.clone() } else { coeff.clone() };
                match out.entry(d) {
                    std::collections::btree_map::Entry::Vacant(v) => {
                        v.insert(c);
                    }
                    std::collections::btree_map::Entry::Occupied(mut o) => *o.get_mut() += &c,
                }
            }
            Err(why) => first_vanishing = first_vanishing.or(Some(why)),
        }
    }
    out.retain(|_, c| !c.is_zero());
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

/// The equalities of a case in words: "t = u = v", blocks joined by "and".
fn case_text(program: &Program, case: &Case) -> String {
    let mut blocks: BTreeMap<Orb, Vec<Orb>> = BTreeMap::new();
    for (representative, other) in case.deltas() {
        blocks.entry(representative).or_insert_with(|| vec![representative]).push(other);
    }
    blocks
        .values()
        .map(|block| block.iter().map(|&o| program.orb_name(o)).collect::<Vec<_>>().join(" = "))
        .collect::<Vec<_>>()
        .join(" and ")
}

/// The energy of one coupled state: the all-alpha determinant's energy, derived as any other,
/// plus the exchange corrections of spin-coupling algebra.
fn by_spin_algebra(
    program: &Program,
    request: &Request,
    coupling: &crate::language::program::Coupling,
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
    };
    derive(program, &request, &Options { distinct: true, ..Options::default() }).map(|_| ())
}

/// Derives one request.
pub fn derive(program: &Program, request: &Request, options: &Options) -> Result<Derivation> {
    if let Some(coupling) = request.bra.coupling.as_ref().filter(|_| request.kind == RequestKind::Energy) {
        let named = coupling.open.iter().all(|o| matches!(o, Orb::Named(_)));
        let wanted = match options.route {
            Route::Auto => request.bra.is_unexpanded(),
            Route::Determinants => false,
            Route::SpinAlgebra => true,
        };
        if named && wanted {
            return by_spin_algebra(program, request, coupling, options);
        }
    }
    for (state, label) in [(&request.bra, &request.bra_text), (&request.ket, &request.ket_text)] {
        if state.is_unexpanded() {
            let n = state.coupling.as_ref().map_or(0, |c| c.determinants);
            return Err(Error::at(
                ErrorKind::TooLarge {
                    what: format!(
                        "`{label}` spans {n} determinants; only its energy can be had without them (by spin algebra), and"
                    ),
                    limit: options.max_determinants,
                },
                &request.span,
            ));
        }
    }
    for (state, label) in [(&request.bra, &request.bra_text), (&request.ket, &request.ket_text)] {
        if state.terms.len() > options.max_determinants {
            return Err(Error::at(
                ErrorKind::TooLarge {
                    what: format!("`{label}` with {} determinants", state.terms.len()),
                    limit: options.max_determinants,
                },
                &request.span,
            ));
        }
    }
    let (used, closed_spaces, all_indices) = used_indices(program, &[&request.bra, &request.ket]);
    let cases = coincidence::cases(&used, &closed_spaces, options.distinct);
    let mut notes = vec![];
    let mut parts: Vec<(Case, Vec<Expr>)> = vec![];
    let mut closed_set = SpaceSet::default();
    for (n, case) in cases.iter().enumerate() {
        let finest = n == 0;
        let build = |state: &State, label: &str| {
            case_state(state, case).map_err(|why| vanishing_error(program, request, why, label))
        };
        let (bra, ket) =
            match (build(&request.bra, &request.bra_text), build(&request.ket, &request.ket_text)) {
                (Ok(b), Ok(k)) => (b, k),
                (Err(e), _) | (_, Err(e)) if finest => return Err(e),
                _ => (CaseState::new(), CaseState::new()),
            };
        if finest {
            check_comparable(program, request, &bra, &ket)?;
            closed_set = bra.keys().next().map_or(SpaceSet::default(), |d| SpaceSet::of(&d.closed));
            for (s, label) in [(&bra, &request.bra_text), (&ket, &request.ket_text)] {
                if s.is_empty() {
                    return Err(Error::at(ErrorKind::EmptyState { name: label.clone() }, &request.span));
                }
            }
        }
        let closed: Vec<RestrictedSum> = bra
            .keys()
            .chain(ket.keys())
            .next()
            .map(|d| {
                d.closed
                    .iter()
                    .map(|&s| RestrictedSum { space: s, excluded: case.extracted(s).to_vec() })
                    .collect()
            })
            .unwrap_or_default();
        let universe = Universe::new(bra.keys().chain(ket.keys()))
            .map_err(|e| Error { span: Some(request.span.clone()), ..e })?;
        let with_span = |e: Error| Error { span: Some(request.span.clone()), ..e };
        let bra_bits = BitState::new(&bra, &universe).map_err(with_span)?;
        let ket_bits = if request.bra == request.ket {
            None
        } else {
            Some(BitState::new(&ket, &universe).map_err(with_span)?)
        };
        let ket_bits = ket_bits.as_ref().unwrap_or(&bra_bits);
        let s = Expr::constant(slater_condon::overlap(&bra_bits, ket_bits));
        let vanishes = |notes: &mut Vec<String>| {
            notes.push(format!(
                "the state vanishes when {}; the expression does not apply there",
                case_text(program, case)
            ));
        };
        let zero_norm = || Error::at(ErrorKind::ZeroNorm { state: request.bra_text.clone() }, &request.span);
        // the value, the overlap and (for spin requests) <S_z> of this case
        let channels: [Option<Expr>; 3] = match request.kind {
            RequestKind::Overlap => [Some(s.clone()), Some(s), None],
            RequestKind::Element => {
                [Some(slater_condon::hamiltonian(&bra_bits, ket_bits, &universe, &closed)), Some(s), None]
            }
            RequestKind::Energy => match slater_condon::overlap(&bra_bits, &bra_bits).inverse() {
                Some(inverse) => [
                    Some(
                        slater_condon::hamiltonian(&bra_bits, &bra_bits, &universe, &closed).scaled(&inverse),
                    ),
                    Some(s),
                    None,
                ],
                None if finest => return Err(zero_norm()),
                None => {
                    vanishes(&mut notes);
                    [None, Some(s), None]
                }
            },
            RequestKind::Spin => match spin_values(&bra) {
                Some(v) => {
                    if !v.eigen_s || !v.eigen_m {
                        let which = match (v.eigen_s, v.eigen_m) {
                            (false, false) => "S^2 or S_z",
                            (false, true) => "S^2",
                            _ => "S_z",
                        };
                        let place = if finest {
                            String::new()
                        } else {
                            format!(" when {}", case_text(program, case))
                        };
                        notes.push(format!(
                            "warning: `{}` is not an eigenfunction of {which}{place}: <S^2> = {}, <S_z> = {}",
                            request.bra_text, v.s_squared, v.s_z
                        ));
                    }
                    [Some(Expr::constant(v.s_squared)), Some(s), Some(Expr::constant(v.s_z))]
                }
                None if finest => return Err(zero_norm()),
                None => {
                    vanishes(&mut notes);
                    [None, Some(s), None]
                }
            },
        };
        // Möbius inversion over the coincidence lattice: what this case adds to the finer ones
        let own: Vec<Expr> = (0..3)
            .map(|c| {
                let finer = parts
                    .iter()
                    .filter(|(other, _)| other.refines(case))
                    .fold(Expr::zero(), |acc, (_, own)| acc.plus(&own[c].substitute(&|x| case.orb(x))));
                channels[c].as_ref().map_or(Expr::zero(), |v| v.minus(&finer))
            })
            .collect();
        parts.push((case.clone(), own));
    }
    let assembled: Vec<Expr> = (0..3)
        .map(|c| {
            parts.iter().fold(Expr::zero(), |acc, (case, own)| acc.plus(&own[c].with_deltas(&case.deltas())))
        })
        .collect();
    let [mut value, mut overlap_expr, s_z] = <[Expr; 3]>::try_from(assembled).expect("three channels");
    if options.fock {
        value = fock_form(&value, closed_set);
    }
    // the factor of the constant energy: 1 for an energy, none for a spin expectation value
    match request.kind {
        RequestKind::Energy => overlap_expr = Expr::constant(Exact::one()),
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
        free_indices: all_indices.into_iter().collect(),
        closed: closed_set,
        distinct: options.distinct,
    })
}
