//! A parsed and resolved input: the orbitals, spaces and generic indices it declares, the
//! determinants and states it defines, and the requests it makes, in source order.

use crate::engine::coupling::Twice;
use crate::engine::exact::Exact;
use crate::error::{Source, Span};
use crate::language::block::Block;
use crate::language::orbital::{Orb, SpaceId, Spin, SpinOrbital};
use bit_set::BitSet;
use num_bigint::BigUint;
use std::collections::BTreeSet;
use std::sync::Arc;

#[derive(Clone, Debug)]
pub struct Orbital {
    pub name: String,
    pub span: Span,
}

/// A set of orbitals of unknown size; results sum over its members.
#[derive(Clone, Debug)]
pub struct Space {
    pub name: String,
    pub indices: Vec<u32>,
    pub span: Span,
}

/// A generic index: one unspecified member of its space.
#[derive(Clone, Debug)]
pub struct Index {
    pub name: String,
    pub space: SpaceId,
    pub span: Span,
}

/// One entry of a determinant as written: a doubly occupied space or one electron.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Occupant {
    Closed(SpaceId),
    Electron(SpinOrbital),
}

/// `D[x1 .. xn -> y1 .. yn]` = a+(y1) .. a+(yn) a(xn) .. a(x1) |D>.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub struct Excitation {
    pub from: Vec<SpinOrbital>,
    pub to: Vec<SpinOrbital>,
}

/// A determinant as written, with the excitations applied to it in order.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub struct DetSpec {
    pub occupants: Vec<Occupant>,
    pub excitations: Vec<Excitation>,
}

impl DetSpec {
    /// The positions of its open shells: electrons whose orbital holds no second electron.
    pub fn open_shells(&self) -> Vec<usize> {
        let electrons = |orb: Orb| {
            self.occupants.iter().filter(|o| matches!(o, Occupant::Electron(x) if x.orb == orb)).count()
        };
        (0..self.occupants.len())
            .filter(|&k| matches!(self.occupants[k], Occupant::Electron(so) if electrons(so.orb) == 1))
            .collect()
    }
}

/// A linear combination of determinants with exact coefficients. The terms are shared, so a
/// large coupled state is not copied each time a request names it.
#[derive(Clone, Debug, PartialEq)]
pub struct State {
    pub terms: Arc<Vec<(Exact, DetSpec)>>,
    /// For a configuration state function (up to a constant factor): how it was coupled. Its
    /// energy can then be had from spin algebra; `terms` is empty when it has too many
    /// determinants to expand.
    pub coupling: Option<Arc<Coupling>>,
}

/// A genealogically coupled function: the open shells `open` of `reference` (all alpha there)
/// coupled in order along `path` (twice the spins) to S = the last entry of `path` and M = `m`
/// (twice the spins).
#[derive(Clone, Debug, PartialEq)]
pub struct Coupling {
    pub path: Vec<Twice>,
    pub m: Twice,
    pub open: Vec<Orb>,
    /// The function's determinant with every open shell alpha; `shells` says where they stand.
    pub reference: DetSpec,
    pub shells: Shells,
    /// The number of determinants the function spans, exactly: C(n, n/2 + M) for n open shells.
    pub determinants: BigUint,
}

/// Where the open shells of a coupled function stand in its reference, so how each spin function
/// becomes a determinant.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shells {
    /// The singly occupied electrons of the determinant as written (`csf X = | core^2 p q |`),
    /// which take the spins in place.
    Written,
    /// The holes, then the particles, of the one excitation that ends the reference, applied to
    /// a closed-shell determinant (`csf X = ref[i -> a]`): a hole's spin is that of the electron
    /// left in it, so the excitation removes the other one; the reference removes every beta
    /// electron of a hole and adds every particle alpha.
    Excited,
}

impl Coupling {
    /// Twice the total spin S.
    pub fn s(&self) -> Twice {
        self.path.last().copied().unwrap_or(0)
    }
}

impl State {
    pub fn new(terms: Vec<(Exact, DetSpec)>) -> State {
        State { terms: Arc::new(terms), coupling: None }
    }

    /// Too large to expand: only its coupling is known.
    pub fn is_unexpanded(&self) -> bool {
        self.terms.is_empty() && self.coupling.is_some()
    }

    pub fn scaled(mut self, factor: &Exact) -> State {
        for (c, _) in Arc::make_mut(&mut self.terms) {
            *c = &*c * factor;
        }
        self
    }

    pub fn excited(mut self, excitation: &Excitation) -> State {
        for (_, det) in Arc::make_mut(&mut self.terms) {
            det.excitations.push(excitation.clone());
        }
        self.coupling = None;
        self
    }

    /// The combination followed by another's terms.
    pub fn joined(mut self, other: &State) -> State {
        Arc::make_mut(&mut self.terms).extend(other.terms.iter().cloned());
        self.coupling = None;
        self
    }
}

impl State {
    /// The state with every orbital rewritten by `f` (generic indices renamed), its coupling
    /// included.
    pub fn with_orbs(&self, f: &impl Fn(Orb) -> Orb) -> State {
        let so = |x: &SpinOrbital| SpinOrbital::new(f(x.orb), x.spin);
        let det = |d: &DetSpec| DetSpec {
            occupants: d
                .occupants
                .iter()
                .map(|o| match o {
                    Occupant::Closed(s) => Occupant::Closed(*s),
                    Occupant::Electron(x) => Occupant::Electron(so(x)),
                })
                .collect(),
            excitations: d
                .excitations
                .iter()
                .map(|e| Excitation {
                    from: e.from.iter().map(so).collect(),
                    to: e.to.iter().map(so).collect(),
                })
                .collect(),
        };
        State {
            terms: Arc::new(self.terms.iter().map(|(c, d)| (c.clone(), det(d))).collect()),
            coupling: self.coupling.as_ref().map(|c| {
                Arc::new(Coupling {
                    open: c.open.iter().map(|&o| f(o)).collect(),
                    reference: det(&c.reference),
                    ..(**c).clone()
                })
            }),
        }
    }
}

/// A state linear in free coefficients: a fixed part plus Σ_c c·part_c, one part per free
/// coefficient. Each part is an ordinary fixed state, so everything derived from it is.
#[derive(Clone, Debug, PartialEq)]
pub struct Linear {
    /// The terms no free coefficient multiplies, if there are any.
    pub fixed: Option<State>,
    /// (coefficient, the part it multiplies), ordered by the coefficients' declaration.
    pub parts: Vec<(u32, State)>,
}

impl Linear {
    pub fn fixed(state: State) -> Linear {
        Linear { fixed: Some(state), parts: vec![] }
    }

    /// `coefficient` times a fixed state.
    pub fn part(coefficient: u32, state: State) -> Linear {
        Linear { fixed: None, parts: vec![(coefficient, state)] }
    }

    /// The fixed state, if no free coefficient multiplies any term.
    pub fn as_fixed(&self) -> Option<&State> {
        if self.parts.is_empty() { self.fixed.as_ref() } else { None }
    }

    /// The fixed part (None) and the parts (their coefficients), in order.
    pub fn functions(&self) -> impl Iterator<Item = (Option<u32>, &State)> {
        self.fixed.iter().map(|s| (None, s)).chain(self.parts.iter().map(|(c, s)| (Some(*c), s)))
    }

    /// Every term with each free coefficient taken as 1: the determinants, symbols and electrons
    /// the state is written with.
    pub fn at_unit(&self) -> State {
        let mut states = self.functions().map(|(_, s)| s);
        let first = states.next().cloned().unwrap_or_else(|| State::new(vec![]));
        states.fold(first, |acc, s| acc.joined(s))
    }

    fn map(self, f: impl Fn(State) -> State) -> Linear {
        Linear { fixed: self.fixed.map(&f), parts: self.parts.into_iter().map(|(c, s)| (c, f(s))).collect() }
    }

    pub fn scaled(self, factor: &Exact) -> Linear {
        self.map(|s| s.scaled(factor))
    }

    pub fn excited(self, excitation: &Excitation) -> Linear {
        self.map(|s| s.excited(excitation))
    }

    /// The sum of two: fixed parts joined, parts of one coefficient joined.
    pub fn joined(self, other: &Linear) -> Linear {
        let fixed = match (self.fixed, &other.fixed) {
            (Some(a), Some(b)) => Some(a.joined(b)),
            (a, b) => a.or_else(|| b.clone()),
        };
        let mut parts = self.parts;
        for (c, s) in &other.parts {
            match parts.iter_mut().find(|(d, _)| d == c) {
                Some((_, mine)) => *mine = mine.clone().joined(s),
                None => parts.push((*c, s.clone())),
            }
        }
        parts.sort_by_key(|(c, _)| *c);
        Linear { fixed, parts }
    }
}

/// The symbols some states mention.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Symbols {
    pub orbitals: BTreeSet<u32>,
    /// Spaces standing closed in a determinant.
    pub closed: BTreeSet<SpaceId>,
    pub indices: BTreeSet<u32>,
}

impl Symbols {
    pub fn of<'a>(states: impl IntoIterator<Item = &'a State>) -> Symbols {
        // bit sets as it goes: a large state names few symbols millions of times
        let (mut orbitals, mut indices, mut closed) = (BitSet::new(), BitSet::new(), BitSet::new());
        for state in states {
            for (_, det) in state.terms.iter() {
                let excited = det.excitations.iter().flat_map(|e| e.from.iter().chain(&e.to));
                let electrons = det.occupants.iter().filter_map(|o| match o {
                    Occupant::Closed(s) => {
                        closed.insert(*s as usize);
                        None
                    }
                    Occupant::Electron(so) => Some(so),
                });
                for so in electrons.chain(excited) {
                    match so.orb {
                        Orb::Named(k) => orbitals.insert(k as usize),
                        Orb::Index(k) => indices.insert(k as usize),
                        Orb::Summed(_) => continue,
                    };
                }
            }
        }
        let members = |set: BitSet| set.into_iter().map(|k| k as u32).collect();
        Symbols { orbitals: members(orbitals), closed: members(closed), indices: members(indices) }
    }
}

/// A free real coefficient, declared by `coefficients`.
#[derive(Clone, Debug)]
pub struct Coefficient {
    pub name: String,
    pub span: Span,
}

#[derive(Clone, Debug)]
pub struct NamedState {
    pub name: String,
    /// The state; for one with free coefficients, every term with each coefficient taken as 1
    /// (see `Linear::at_unit`), and `free` holds its parts.
    pub state: State,
    /// For a state with free coefficients: its fixed part and the parts they multiply.
    pub free: Option<Linear>,
    pub is_determinant: bool,
    pub span: Span,
}

#[derive(Copy, Clone, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RequestKind {
    Energy,
    Element,
    Overlap,
    Spin,
    /// The roots of H in the space of its operands' members.
    Roots,
    /// `density X`: the one- and two-particle reduced density matrices of X, normalized.
    Density,
    /// `density X Y`: the transition densities <X| … |Y>.
    #[serde(rename = "transition_density")]
    TransitionDensity,
    /// `shells X`: X's energy in the open-shell form Σ f h + Σ (a J + b K).
    Shells,
}

impl RequestKind {
    pub fn keyword(self) -> &'static str {
        match self {
            RequestKind::Energy => "energy",
            RequestKind::Element => "element",
            RequestKind::Overlap => "overlap",
            RequestKind::Spin => "spin",
            RequestKind::Roots => "roots",
            RequestKind::Density | RequestKind::TransitionDensity => "density",
            RequestKind::Shells => "shells",
        }
    }
}

/// One request: `energy X` (<X|H|X>/<X|X>), `element X Y` (<X|H|Y>), `overlap X Y`, `spin X`,
/// `roots X Y ...`, `density X`, `density X Y` or `shells X`.
#[derive(Clone, Debug)]
pub struct Request {
    pub kind: RequestKind,
    /// The request as written, without its comment.
    pub text: String,
    /// The states; for a request on a block, the row (bra) and column (ket) functions with each
    /// free coefficient taken as 1: what the symbols and electrons of the request are read from.
    pub bra: State,
    pub ket: State,
    pub bra_text: String,
    pub ket_text: String,
    pub span: Span,
    /// For states with free coefficients and for `roots`: the pairs of functions the request
    /// is made of, each an ordinary request.
    pub block: Option<Arc<Block>>,
}

#[derive(Clone, Debug)]
pub struct Program {
    pub source: Arc<Source>,
    pub orbitals: Vec<Orbital>,
    pub spaces: Vec<Space>,
    pub indices: Vec<Index>,
    pub coefficients: Vec<Coefficient>,
    pub states: Vec<NamedState>,
    pub requests: Vec<Request>,
}

impl Program {
    /// The name of a named orbital or generic index; summation indices are named by the
    /// emitters, which know which letters are free.
    pub fn orb_name(&self, orb: Orb) -> String {
        match orb {
            Orb::Named(k) => self.orbitals[k as usize].name.clone(),
            Orb::Index(k) => self.indices[k as usize].name.clone(),
            Orb::Summed(k) => format!("#{k}"),
        }
    }

    pub fn spin_orbital_name(&self, so: SpinOrbital) -> String {
        let name = self.orb_name(so.orb);
        match so.spin {
            Spin::Alpha => name,
            Spin::Beta => format!("{name}'"),
        }
    }

    /// The space a generic index belongs to.
    pub fn space_of(&self, orb: Orb) -> Option<SpaceId> {
        match orb {
            Orb::Index(k) => Some(self.indices[k as usize].space),
            _ => None,
        }
    }

    /// Every name the input declares, so that generated summation letters avoid them.
    pub fn declared_names(&self) -> impl Iterator<Item = &str> {
        self.orbitals
            .iter()
            .map(|o| o.name.as_str())
            .chain(self.indices.iter().map(|i| i.name.as_str()))
            .chain(self.spaces.iter().map(|s| s.name.as_str()))
            .chain(self.coefficients.iter().map(|c| c.name.as_str()))
            .chain(self.states.iter().map(|s| s.name.as_str()))
    }
}
