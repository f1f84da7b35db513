//! Properties of the derivation engine, checked on randomly generated inputs.
//!
//! Each property is a sentence about Slater determinants that must hold for every input:
//!
//! 1. Every request of a well-formed input derives, and the derived formula agrees with
//!    brute-force second quantization on random integrals.
//! 2. Requests that make no sense (different closed spaces, different electron counts, Pauli
//!    violations, excitations of empty spin orbitals, ...) are refused with the matching input
//!    error, never with a panic or a wrong number.
//! 3. The check is not vacuous: a derivation altered in one place (a sign, a dropped term,
//!    J written for K, a wrong overlap) fails verification with exit code 1.
//! 4. Exact algebra: <X|H|Y> = <Y|H|X> for real orbitals; scaling a state by c scales its
//!    elements and overlaps by c and leaves its energy alone; reordering the entries of a
//!    determinant multiplies it by the sign of the permutation of its electrons, so energies
//!    are unchanged and elements change sign; flipping every spin leaves a determinant's
//!    energy unchanged; an energy is the element <S|H|S> divided by the overlap <S|S>.
//!
//! Inputs are generated as text in the input language from a list of random numbers. An
//! exhausted list answers every further choice with 0, the simplest option, so shrinking a
//! failing case simplifies the program. The runner uses a fixed seed and writes no
//! regression files, so every run checks the same cases.

use num_bigint::BigInt;
use num_rational::BigRational;
use proptest::prelude::*;
use proptest::test_runner::{RngAlgorithm, RngSeed};
use spinfold::{
    Binding, DEFAULT_SEED, Derivation, ErrorKind, Exact, Expr, Factor, IntegralKind, IntegralTable, Options,
    Program, Report, derive, evaluate, parse, verify,
};
use std::collections::BTreeSet;

// ---------------------------------------------------------------------------------------
// Runner configuration
// ---------------------------------------------------------------------------------------

/// A deterministic runner: fixed seed, a bounded number of cases, no persistence files.
fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        cases,
        rng_algorithm: RngAlgorithm::ChaCha,
        rng_seed: RngSeed::Fixed(0x5f1d_2026),
        failure_persistence: None,
        max_shrink_iters: 512,
        ..ProptestConfig::default()
    }
}

/// The random numbers a program is generated from.
fn choices() -> impl Strategy<Value = Vec<u16>> {
    prop::collection::vec(any::<u16>(), 0..400)
}

// ---------------------------------------------------------------------------------------
// Random programs
// ---------------------------------------------------------------------------------------

/// Answers choices from a list of random numbers, 0 once the list is exhausted.
struct Choices<'a> {
    values: &'a [u16],
    next: usize,
}

impl<'a> Choices<'a> {
    fn new(values: &'a [u16]) -> Choices<'a> {
        Choices { values, next: 0 }
    }

    /// A number in 0..n (0 when n <= 1).
    fn below(&mut self, n: usize) -> usize {
        let value = self.values.get(self.next).copied().unwrap_or(0) as usize;
        self.next += 1;
        if n <= 1 { 0 } else { value % n }
    }

    /// True with probability about num/den; false once the list is exhausted.
    fn chance(&mut self, num: usize, den: usize) -> bool {
        self.below(den) >= den - num
    }

    fn pick<T: Clone>(&mut self, items: &[T]) -> T {
        items[self.below(items.len())].clone()
    }

    /// `k` distinct items (k must not exceed the number of items).
    fn subset<T: Clone>(&mut self, items: &[T], k: usize) -> Vec<T> {
        let mut rest = items.to_vec();
        (0..k).map(|_| rest.remove(self.below(rest.len()))).collect()
    }

    fn shuffle<T>(&mut self, items: &mut [T]) {
        for k in (1..items.len()).rev() {
            let j = self.below(k + 1);
            items.swap(j, k);
        }
    }
}

const ORBITALS: [&str; 4] = ["a", "b", "c", "d"];
const SPACES: [(&str, [&str; 2]); 2] = [("core", ["i", "j"]), ("val", ["u", "v"])];
/// The largest number of generic indices in one program: it bounds the index assignments
/// the verifier enumerates, and so the running time.
const MAX_INDICES: usize = 4;

/// Small exact coefficients as written in the input, with their values.
fn coefficient(k: usize) -> (&'static str, Exact) {
    let root = |n: i64, d: i64| {
        Exact::sqrt_of_rational(&BigRational::new(BigInt::from(n), BigInt::from(d)))
            .expect("a positive rational has an exact square root")
    };
    match k % 10 {
        0 => ("", Exact::one()),
        1 => ("2", Exact::integer(2)),
        2 => ("3", Exact::integer(3)),
        3 => ("1/2", Exact::fraction(1, 2)),
        4 => ("2/3", Exact::fraction(2, 3)),
        5 => ("sqrt(2)", root(2, 1)),
        6 => ("sqrt(1/3)", root(1, 3)),
        7 => ("sqrt(3)/2", &root(3, 1) * &Exact::fraction(1, 2)),
        8 => ("1/sqrt(6)", root(6, 1).inverse().expect("non-zero")),
        _ => ("0.25", Exact::fraction(1, 4)),
    }
}

/// A spin orbital of a named orbital or a generic index.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Debug)]
struct So {
    orb: &'static str,
    beta: bool,
}

impl So {
    fn text(self) -> String {
        if self.beta { format!("{}'", self.orb) } else { self.orb.to_string() }
    }

    fn flipped(self) -> So {
        So { orb: self.orb, beta: !self.beta }
    }
}

/// One entry of a determinant as written.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
enum Entry {
    /// `space^2`: an even number of electrons.
    Closed(&'static str),
    /// `x^2`: x-alpha then x-beta.
    Double(&'static str),
    /// `x` or `x'`.
    Single(So),
}

impl Entry {
    fn text(self) -> String {
        match self {
            Entry::Closed(s) => format!("{s}^2"),
            Entry::Double(x) => format!("{x}^2"),
            Entry::Single(so) => so.text(),
        }
    }

    fn odd(self) -> bool {
        matches!(self, Entry::Single(_))
    }

    fn flipped(self) -> Entry {
        match self {
            Entry::Single(so) => Entry::Single(so.flipped()),
            other => other,
        }
    }
}

type Excitation = (Vec<So>, Vec<So>);

fn excitation_text((from, to): &Excitation) -> String {
    let list = |v: &[So]| v.iter().map(|s| s.text()).collect::<Vec<_>>().join(" ");
    format!("[{} -> {}]", list(from), list(to))
}

/// Which spin orbitals a determinant occupies when all generic indices differ: its explicit
/// electrons and the members of its closed spaces that excitations emptied. Determinants of
/// one state have different keys, so no state can cancel to zero.
type Key = (BTreeSet<So>, BTreeSet<So>);

#[derive(Clone, Debug)]
struct Det {
    entries: Vec<Entry>,
    excitations: Vec<Excitation>,
    /// How requests and states refer to it: its name, or its text.
    operand: String,
    key: Key,
}

impl Det {
    /// The determinant written out in full: `| entries |[excitations]`.
    fn written(entries: &[Entry], excitations: &[Excitation]) -> String {
        let mut s = String::from("|");
        for e in entries {
            s.push(' ');
            s.push_str(&e.text());
        }
        s.push_str(" |");
        for x in excitations {
            s.push_str(&excitation_text(x));
        }
        s
    }

    fn inline(&self) -> String {
        Det::written(&self.entries, &self.excitations)
    }
}

#[derive(Clone, Debug)]
struct Space {
    name: &'static str,
    indices: Vec<&'static str>,
}

/// Determinants and states that can stand in one request: the same closed spaces and the
/// same number of explicit electrons.
#[derive(Clone, Debug, Default)]
struct Sector {
    closed: Vec<usize>,
    electrons: usize,
    dets: Vec<Det>,
    states: Vec<(String, BTreeSet<Key>)>,
}

impl Sector {
    /// Everything a request may name in this sector.
    fn operands(&self) -> Vec<String> {
        self.dets
            .iter()
            .map(|d| d.operand.clone())
            .chain(self.states.iter().map(|(n, _)| n.clone()))
            .collect()
    }

    /// An operand for a request, more often a state or an excited determinant than a
    /// plain one, since those bring generic indices together.
    fn operand(&self, ch: &mut Choices) -> String {
        let rich: Vec<String> = self
            .dets
            .iter()
            .filter(|d| !d.excitations.is_empty())
            .map(|d| d.operand.clone())
            .chain(self.states.iter().map(|(n, _)| n.clone()))
            .collect();
        if !rich.is_empty() && ch.chance(2, 3) { ch.pick(&rich) } else { ch.pick(&self.operands()) }
    }
}

/// A generated input: the declarations and definitions, the sectors they form, and the
/// requests.
#[derive(Clone, Debug, Default)]
struct Generated {
    lines: Vec<String>,
    orbitals: Vec<&'static str>,
    spaces: Vec<Space>,
    sectors: Vec<Sector>,
    requests: Vec<String>,
    names: usize,
}

impl Generated {
    fn text(&self) -> String {
        self.text_with(&self.requests)
    }

    /// The definitions followed by other requests.
    fn text_with(&self, requests: &[String]) -> String {
        let mut s = self.lines.join("\n");
        for r in requests {
            s.push('\n');
            s.push_str(r);
        }
        s.push('\n');
        s
    }

    fn fresh_name(&mut self, prefix: &str) -> String {
        self.names += 1;
        format!("{prefix}{}", self.names)
    }

    /// Spin orbitals an explicit electron may occupy: the named orbitals and the generic
    /// indices of spaces that are not closed.
    fn pool(&self, closed: &[usize]) -> Vec<So> {
        let mut out = vec![];
        for &orb in &self.orbitals {
            out.push(So { orb, beta: false });
            out.push(So { orb, beta: true });
        }
        for (s, space) in self.spaces.iter().enumerate() {
            if !closed.contains(&s) {
                for &orb in &space.indices {
                    out.push(So { orb, beta: false });
                    out.push(So { orb, beta: true });
                }
            }
        }
        out
    }

    /// Spin orbitals of closed spaces that excitations may empty: their generic indices.
    fn closed_members(&self, closed: &[usize]) -> Vec<So> {
        closed
            .iter()
            .flat_map(|&s| self.spaces[s].indices.iter())
            .flat_map(|&orb| [So { orb, beta: false }, So { orb, beta: true }])
            .collect()
    }

    /// A determinant of `n` explicit electrons over the closed spaces, entries in random
    /// order, an alpha-beta pair sometimes written `x^2`.
    fn entries(&self, ch: &mut Choices, closed: &[usize], n: usize) -> (Vec<Entry>, Key) {
        let chosen = ch.subset(&self.pool(closed), n);
        let set: BTreeSet<So> = chosen.iter().copied().collect();
        let mut done = BTreeSet::new();
        let mut entries = vec![];
        for &so in &chosen {
            if done.contains(&so) {
                continue;
            }
            let partner = so.flipped();
            if set.contains(&partner) && !done.contains(&partner) && ch.chance(1, 2) {
                entries.push(Entry::Double(so.orb));
                done.insert(partner);
            } else {
                entries.push(Entry::Single(so));
            }
            done.insert(so);
        }
        entries.extend(closed.iter().map(|&s| Entry::Closed(self.spaces[s].name)));
        ch.shuffle(&mut entries);
        (entries, (set, BTreeSet::new()))
    }

    /// Adds a determinant to the sector, named or to be written inline, unless the sector
    /// already has one of the same key.
    fn add_det(
        &mut self,
        ch: &mut Choices,
        sector: &mut Sector,
        entries: Vec<Entry>,
        excitations: Vec<Excitation>,
        written: String,
        key: Key,
    ) {
        if sector.dets.iter().any(|d| d.key == key) {
            return;
        }
        let operand = if ch.chance(2, 3) {
            let name = self.fresh_name("D");
            self.lines.push(format!("det {name} = {written}"));
            name
        } else {
            written
        };
        sector.dets.push(Det { entries, excitations, operand, key });
    }

    fn add_fresh_det(&mut self, ch: &mut Choices, sector: &mut Sector) {
        let (entries, key) = self.entries(ch, &sector.closed, sector.electrons);
        let written = Det::written(&entries, &[]);
        self.add_det(ch, sector, entries, vec![], written, key);
    }

    /// A single or double excitation of a determinant of the sector: occupied spin orbitals
    /// (explicit ones, or generic indices of closed spaces) to empty ones, either spin.
    fn add_excited_det(&mut self, ch: &mut Choices, sector: &mut Sector) {
        // most often the first determinant, the reference of the sector
        let base = if ch.chance(1, 2) { 0 } else { ch.below(sector.dets.len()) };
        self.add_excitation_of(ch, sector, base);
    }

    /// The spin orbitals a determinant of this key occupies, closed-space members first.
    fn occupied(&self, sector: &Sector, (explicit, holes): &Key) -> Vec<So> {
        let members = self.closed_members(&sector.closed);
        members.into_iter().filter(|so| !holes.contains(so)).chain(explicit.iter().copied()).collect()
    }

    /// The spin orbitals an excitation of this key may fill (never a closed-space member).
    fn empty(&self, sector: &Sector, (explicit, _): &Key) -> Vec<So> {
        self.pool(&sector.closed).into_iter().filter(|so| !explicit.contains(so)).collect()
    }

    fn excited_key(&self, sector: &Sector, (explicit, holes): &Key, (from, to): &Excitation) -> Key {
        let members = self.closed_members(&sector.closed);
        let (mut explicit, mut holes) = (explicit.clone(), holes.clone());
        for so in from {
            if members.contains(so) {
                holes.insert(*so);
            } else {
                explicit.remove(so);
            }
        }
        explicit.extend(to.iter().copied());
        (explicit, holes)
    }

    /// A random single or double excitation out of `occupied` into `empty`, mostly out of
    /// the closed spaces, as in excitations of a closed-shell reference.
    fn excitation(
        &self,
        ch: &mut Choices,
        sector: &Sector,
        occupied: &[So],
        empty: &[So],
    ) -> Option<Excitation> {
        let most = occupied.len().min(empty.len()).min(2);
        if most == 0 {
            return None;
        }
        let rank = 1 + ch.below(most);
        let members = self.closed_members(&sector.closed);
        let from_closed: Vec<So> = occupied.iter().filter(|so| members.contains(so)).copied().collect();
        let from = if from_closed.len() >= rank && ch.chance(2, 3) {
            ch.subset(&from_closed, rank)
        } else {
            ch.subset(occupied, rank)
        };
        Some((from, ch.subset(empty, rank)))
    }

    fn add_excitation_of(&mut self, ch: &mut Choices, sector: &mut Sector, base: usize) {
        let base = sector.dets[base].clone();
        let (occupied, empty) = (self.occupied(sector, &base.key), self.empty(sector, &base.key));
        let Some(excitation) = self.excitation(ch, sector, &occupied, &empty) else {
            return;
        };
        let key = self.excited_key(sector, &base.key, &excitation);
        let written = format!("{}{}", base.operand, excitation_text(&excitation));
        let mut excitations = base.excitations.clone();
        excitations.push(excitation);
        self.add_det(ch, sector, base.entries.clone(), excitations, written, key);
    }

    /// A linear combination of determinants and states of the sector with small exact
    /// coefficients and no determinant twice.
    fn add_state(&mut self, ch: &mut Choices, sector: &mut Sector) {
        let options: Vec<(String, BTreeSet<Key>)> = sector
            .dets
            .iter()
            .map(|d| (d.operand.clone(), BTreeSet::from([d.key.clone()])))
            .chain(sector.states.iter().cloned())
            .collect();
        let mut keys = BTreeSet::new();
        let mut text = String::new();
        for k in 0..1 + ch.below(3) {
            let open: Vec<&(String, BTreeSet<Key>)> =
                options.iter().filter(|(_, o)| o.is_disjoint(&keys)).collect();
            if open.is_empty() {
                break;
            }
            let (operand, own) = open[ch.below(open.len())];
            keys.extend(own.iter().cloned());
            let negative = ch.chance(1, 2);
            text.push_str(match (k, negative) {
                (0, false) => "",
                (0, true) => "-",
                (_, false) => " + ",
                (_, true) => " - ",
            });
            let (c, _) = coefficient(ch.below(10));
            if !c.is_empty() {
                text.push_str(c);
                text.push(' ');
            }
            text.push_str(operand);
        }
        let (text, keys) = match ch.below(6) {
            1 => (format!("({text})/sqrt(2)"), keys),
            2 => (format!("sqrt(1/3) ({text})"), keys),
            3 => self.excite_group(ch, sector, text, keys),
            _ => (text, keys),
        };
        let name = self.fresh_name("S");
        self.lines.push(format!("state {name} = {text}"));
        sector.states.push((name, keys));
    }

    /// `(combination)[x -> y]` with x occupied and y empty in every determinant of the
    /// combination: the excitation is then one-to-one, so the keys stay distinct.
    fn excite_group(
        &self,
        ch: &mut Choices,
        sector: &Sector,
        text: String,
        keys: BTreeSet<Key>,
    ) -> (String, BTreeSet<Key>) {
        let common = |lists: Vec<Vec<So>>| -> Vec<So> {
            let mut lists = lists.into_iter();
            let first = lists.next().unwrap_or_default();
            lists.fold(first, |acc, l| acc.into_iter().filter(|so| l.contains(so)).collect())
        };
        let occupied = common(keys.iter().map(|k| self.occupied(sector, k)).collect());
        let empty = common(keys.iter().map(|k| self.empty(sector, k)).collect());
        match self.excitation(ch, sector, &occupied, &empty) {
            Some(x) => (
                format!("({text}){}", excitation_text(&x)),
                keys.iter().map(|k| self.excited_key(sector, k, &x)).collect(),
            ),
            None => (text, keys),
        }
    }

    fn add_sector(&mut self, ch: &mut Choices) {
        // Either any mixture of determinants, or a closed reference with every space closed
        // and its single and double excitations.
        let reference = ch.chance(1, 3);
        let closed: Vec<usize> = (0..self.spaces.len()).filter(|_| reference || ch.chance(2, 3)).collect();
        let electrons = ch.below(self.pool(&closed).len().min(4) + 1);
        let mut sector = Sector { closed, electrons, ..Sector::default() };
        self.add_fresh_det(ch, &mut sector);
        for _ in 0..1 + ch.below(4) {
            if reference {
                self.add_excitation_of(ch, &mut sector, 0);
            } else if ch.chance(1, 3) {
                self.add_fresh_det(ch, &mut sector);
            } else {
                self.add_excited_det(ch, &mut sector);
            }
        }
        for _ in 0..1 + ch.below(2) {
            self.add_state(ch, &mut sector);
        }
        self.sectors.push(sector);
    }
}

/// A well-formed random program: 1 to 4 orbitals, 0 to 2 spaces (some with generic
/// indices), one or two sectors of determinants, excitations and states, 1 to 4 requests,
/// each within one sector.
fn generate(values: &[u16]) -> Generated {
    let mut ch = Choices::new(values);
    let mut g = Generated { orbitals: ORBITALS[..1 + ch.below(4)].to_vec(), ..Generated::default() };
    g.lines.push(format!("orbitals {}", g.orbitals.join(" ")));
    let mut budget = MAX_INDICES;
    for &(name, indices) in &SPACES[..ch.below(3)] {
        let k = [1, 2, 0, 2][ch.below(4)].min(budget);
        budget -= k;
        let indices = indices[..k].to_vec();
        g.lines.push(if indices.is_empty() {
            format!("space {name}")
        } else {
            format!("space {name}: {}", indices.join(" "))
        });
        g.spaces.push(Space { name, indices });
    }
    for _ in 0..1 + ch.below(2) {
        g.add_sector(&mut ch);
    }
    for _ in 0..1 + ch.below(4) {
        let sector = ch.pick(&g.sectors);
        let (x, y) = (sector.operand(&mut ch), sector.operand(&mut ch));
        g.requests.push(match ch.below(3) {
            0 => format!("energy {x}"),
            1 => format!("element {x} {y}"),
            _ => format!("overlap {x} {y}"),
        });
    }
    g
}

// ---------------------------------------------------------------------------------------
// Helpers
// ---------------------------------------------------------------------------------------

fn parsed(text: &str) -> Result<Program, TestCaseError> {
    parse("random.spinfold", text)
        .map_err(|e| TestCaseError::fail(format!("input does not parse:\n{text}\n{e}")))
}

/// Derives and verifies one request; any error fails the case.
fn checked(program: &Program, request: usize, text: &str) -> Result<(Derivation, Report), TestCaseError> {
    checked_with(program, request, text, &Options::default())
}

fn checked_with(
    program: &Program,
    request: usize,
    text: &str,
    options: &Options,
) -> Result<(Derivation, Report), TestCaseError> {
    let request = &program.requests[request];
    let derivation = derive(program, request, options).map_err(|e| {
        TestCaseError::fail(format!("`{}` does not derive with {options:?}:\n{text}\n{e}", request.text))
    })?;
    let report = verify(program, request, &derivation, DEFAULT_SEED).map_err(|e| {
        TestCaseError::fail(format!("`{}` does not verify with {options:?}:\n{text}\n{e}", request.text))
    })?;
    Ok((derivation, report))
}

/// Derives requests appended to the generated definitions (without verifying them: the
/// algebraic properties compare derived expressions with each other).
fn derive_all(g: &Generated, requests: &[String]) -> Result<Vec<Derivation>, TestCaseError> {
    let text = g.text_with(requests);
    let program = parsed(&text)?;
    program
        .requests
        .iter()
        .map(|request| {
            derive(&program, request, &Options::default())
                .map_err(|e| TestCaseError::fail(format!("`{}` does not derive:\n{text}\n{e}", request.text)))
        })
        .collect()
}

/// Every binding of the named orbitals, spaces (two size configurations) and the generic
/// indices, with random integrals for each configuration.
fn bindings(program: &Program) -> Vec<(Binding, IntegralTable)> {
    let mut out = vec![];
    for configuration in 0..2 {
        let mut next = program.orbitals.len();
        let spaces: Vec<Vec<usize>> = (0..program.spaces.len())
            .map(|s| {
                let n = 3 + (configuration + s) % 2;
                next += n;
                (next - n..next).collect()
            })
            .collect();
        let ints = IntegralTable::random(next, 1000 + configuration as u64);
        let mut assignments: Vec<Vec<Option<usize>>> = vec![vec![]];
        for index in &program.indices {
            assignments = assignments
                .into_iter()
                .flat_map(|a| {
                    spaces[index.space as usize].iter().map(move |&m| {
                        let mut a = a.clone();
                        a.push(Some(m));
                        a
                    })
                })
                .collect();
        }
        for indices in assignments {
            let binding =
                Binding { orbitals: (0..program.orbitals.len()).collect(), spaces: spaces.clone(), indices };
            out.push((binding, ints.clone()));
        }
    }
    out
}

fn close(x: f64, y: f64) -> bool {
    (x - y).abs() <= 1e-9 * x.abs().max(y.abs()).max(1.0)
}

fn negated(e: &Expr) -> Expr {
    e.scaled(&Exact::integer(-1))
}

// ---------------------------------------------------------------------------------------
// 1. Well-formed inputs derive and verify
// ---------------------------------------------------------------------------------------

proptest! {
    #![proptest_config(config(48))]

    /// Every request of a well-formed random program derives, and its formula agrees with
    /// brute-force second quantization on random integrals for every index assignment.
    #[test]
    fn every_request_of_a_well_formed_input_derives_and_verifies(values in choices()) {
        let g = generate(&values);
        let text = g.text();
        let program = parsed(&text)?;
        prop_assert_eq!(program.requests.len(), g.requests.len());
        for k in 0..program.requests.len() {
            let (derivation, report) = checked(&program, k, &text)?;
            prop_assert!(report.checks > 0, "no checks for `{}`:\n{}", derivation.text, text);
            prop_assert!(report.max_deviation <= spinfold::TOLERANCE);
        }
    }

    /// The same holds with different generic indices assumed to be different orbitals, and
    /// with the formula written with Fock matrix elements and the closed-space energy. The
    /// distinct form is the general one with every Kronecker-delta term dropped.
    #[test]
    fn every_request_also_verifies_with_distinct_indices_and_in_fock_form(values in choices()) {
        let g = generate(&values);
        let text = g.text();
        let program = parsed(&text)?;
        for k in 0..program.requests.len() {
            let (general, _) = checked(&program, k, &text)?;
            let distinct = Options { distinct: true, ..Options::default() };
            let (different, report) = checked_with(&program, k, &text, &distinct)?;
            prop_assert!(report.checks > 0);
            let without_deltas =
                Expr { terms: general.value.terms.iter().filter(|t| t.deltas.is_empty()).cloned().collect() };
            prop_assert_eq!(&different.value, &without_deltas, "`{}`:\n{}", general.text, text);
            let fock = Options { fock: true, ..Options::default() };
            let (_, report) = checked_with(&program, k, &text, &fock)?;
            prop_assert!(report.checks > 0);
        }
    }
}

// ---------------------------------------------------------------------------------------
// 2. Ill-formed requests are refused cleanly
// ---------------------------------------------------------------------------------------

/// The input error a broken request must raise.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Refusal {
    ClosedSpaces,
    ElectronCount,
    Pauli,
    NotExciting,
    ExcitationLengths,
    SpaceInExcitation,
    Undefined,
}

fn refusal(kind: &ErrorKind) -> Option<Refusal> {
    Some(match kind {
        ErrorKind::ClosedSpaces { .. } => Refusal::ClosedSpaces,
        ErrorKind::ElectronCount { .. } => Refusal::ElectronCount,
        ErrorKind::Pauli { .. } => Refusal::Pauli,
        ErrorKind::NotExciting { .. } => Refusal::NotExciting,
        ErrorKind::ExcitationLengths { .. } => Refusal::ExcitationLengths,
        ErrorKind::SpaceInExcitation { .. } => Refusal::SpaceInExcitation,
        ErrorKind::Undefined { .. } => Refusal::Undefined,
        _ => return None,
    })
}

/// Ways to break a request.
#[derive(Clone, Copy, Debug)]
enum Flaw {
    AcrossSectors,
    OccupiedTwice,
    ClosedMemberAsElectron,
    ExcitedFromEmpty,
    ExcitedIntoOccupied,
    UnequalExcitation,
    SpaceExcited,
    UndefinedName,
}

/// A broken request built from a well-formed program, and the refusal it must meet
/// (`None`: the request is in fact valid and must verify).
fn broken_request(g: &Generated, ch: &mut Choices) -> (String, Option<Refusal>) {
    let s = ch.below(g.sectors.len());
    let sector = &g.sectors[s];
    let det = ch.pick(&sector.dets);
    let d = &det.operand;
    let occupied = g.occupied(sector, &det.key);
    let empty = g.empty(sector, &det.key);
    let members = g.closed_members(&sector.closed);
    let mut flaws = vec![Flaw::UndefinedName];
    for (applies, flaw) in [
        (g.sectors.len() > 1, Flaw::AcrossSectors),
        (!det.entries.is_empty(), Flaw::OccupiedTwice),
        (!members.is_empty(), Flaw::ClosedMemberAsElectron),
        (!empty.is_empty(), Flaw::ExcitedFromEmpty),
        (occupied.len() >= 2, Flaw::ExcitedIntoOccupied),
        (occupied.len() >= 2 && !empty.is_empty(), Flaw::UnequalExcitation),
        (!g.spaces.is_empty() && !empty.is_empty(), Flaw::SpaceExcited),
    ] {
        if applies {
            flaws.push(flaw);
        }
    }
    let energy_of = |entries: &[Entry]| format!("energy {}", Det::written(entries, &det.excitations));
    match ch.pick(&flaws) {
        Flaw::AcrossSectors => {
            let other = &g.sectors[1 - s];
            let y = ch.pick(&other.operands());
            let expected = if other.closed != sector.closed {
                Some(Refusal::ClosedSpaces)
            } else if other.electrons != sector.electrons {
                Some(Refusal::ElectronCount)
            } else {
                None
            };
            (format!("element {d} {y}"), expected)
        }
        // an electron, or a closed space, written twice
        Flaw::OccupiedTwice => {
            let mut entries = det.entries.clone();
            let extra = match ch.pick(&det.entries) {
                Entry::Double(x) => Entry::Single(So { orb: x, beta: ch.chance(1, 2) }),
                other => other,
            };
            entries.insert(ch.below(entries.len() + 1), extra);
            (energy_of(&entries), Some(Refusal::Pauli))
        }
        // `| core^2 i |` with i in core
        Flaw::ClosedMemberAsElectron => {
            let mut entries = det.entries.clone();
            entries.insert(ch.below(entries.len() + 1), Entry::Single(ch.pick(&members)));
            (energy_of(&entries), Some(Refusal::Pauli))
        }
        Flaw::ExcitedFromEmpty => {
            let e = excitation_text(&(vec![ch.pick(&empty)], vec![ch.pick(&g.pool(&sector.closed))]));
            (format!("overlap {d}{e} {d}"), Some(Refusal::NotExciting))
        }
        Flaw::ExcitedIntoOccupied => {
            let pair = ch.subset(&occupied, 2);
            let e = excitation_text(&(vec![pair[0]], vec![pair[1]]));
            (format!("element {d}{e} {d}"), Some(Refusal::Pauli))
        }
        // two electrons out, one in
        Flaw::UnequalExcitation => {
            let e = excitation_text(&(ch.subset(&occupied, 2), vec![ch.pick(&empty)]));
            (format!("energy {d}{e}"), Some(Refusal::ExcitationLengths))
        }
        Flaw::SpaceExcited => {
            let space = ch.pick(&g.spaces).name;
            let to = ch.pick(&empty).text();
            (format!("energy {d}[{space} -> {to}]"), Some(Refusal::SpaceInExcitation))
        }
        Flaw::UndefinedName => (format!("element {d} nowhere"), Some(Refusal::Undefined)),
    }
}

proptest! {
    #![proptest_config(config(48))]

    /// Requests across closed spaces or electron counts, Pauli violations, excitations of
    /// empty spin orbitals or into occupied ones, malformed excitations and unknown names
    /// are each refused with their own input error (exit code 2), never with a panic.
    #[test]
    fn ill_formed_requests_are_refused_with_the_matching_error(
        values in choices(),
        more in choices(),
    ) {
        let g = generate(&values);
        let mut ch = Choices::new(&more);
        for _ in 0..3 {
            let (request, expected) = broken_request(&g, &mut ch);
            let text = g.text_with(std::slice::from_ref(&request));
            let outcome = parse("broken.spinfold", &text).and_then(|program| {
                let request = &program.requests[0];
                let derivation = derive(&program, request, &Options::default())?;
                verify(&program, request, &derivation, DEFAULT_SEED)
            });
            match (outcome, expected) {
                (Ok(report), None) => prop_assert!(report.checks > 0),
                (Ok(_), Some(refusal)) => {
                    return Err(TestCaseError::fail(format!(
                        "`{request}` was accepted, but {refusal:?} was expected:\n{text}"
                    )));
                }
                (Err(e), expected) => {
                    prop_assert_eq!(e.exit_code(), 2, "{}\n{}", text, e);
                    prop_assert_eq!(refusal(&e.kind), expected, "{}\n{}", text, e);
                }
            }
        }
    }
}

// ---------------------------------------------------------------------------------------
// 3. The verifier catches wrong formulas
// ---------------------------------------------------------------------------------------

/// Ways to spoil a derivation in one place.
#[derive(Clone, Copy, Debug)]
enum Corruption {
    FlipSign,
    DropTerm,
    CoulombForExchange,
    WrongOverlap,
}

/// The derivation spoiled in one place, or `None` when this corruption does not apply.
fn corrupted(d: &Derivation, how: Corruption, pick: prop::sample::Index) -> Option<Derivation> {
    let mut d = d.clone();
    match how {
        Corruption::FlipSign | Corruption::DropTerm => {
            if d.value.terms.is_empty() {
                return None;
            }
            let k = pick.index(d.value.terms.len());
            if let Corruption::DropTerm = how {
                d.value.terms.remove(k);
            } else {
                let c = &d.value.terms[k].coeff * &Exact::integer(-1);
                d.value.terms[k].coeff = c;
            }
        }
        Corruption::CoulombForExchange => {
            // J_pq = (pp|qq) becomes K_pq = (pq|qp), for p and q not tied by a delta
            let candidates: Vec<usize> = (0..d.value.terms.len())
                .filter(|&k| {
                    let t = &d.value.terms[k];
                    match t.factor {
                        Factor::Eri(p, _, q, _) if t.kind() == IntegralKind::Coulomb => {
                            p != q && !t.deltas.iter().any(|&(x, y)| (x, y) == (p, q) || (x, y) == (q, p))
                        }
                        _ => false,
                    }
                })
                .collect();
            if candidates.is_empty() {
                return None;
            }
            let t = &mut d.value.terms[candidates[pick.index(candidates.len())]];
            if let Factor::Eri(p, _, q, _) = t.factor {
                t.factor = Factor::Eri(p, q, q, p);
            }
        }
        Corruption::WrongOverlap => {
            if d.kind != spinfold::RequestKind::Element || d.overlap.is_zero() {
                return None;
            }
            d.overlap = negated(&d.overlap);
        }
    }
    Some(d)
}

fn corruption() -> impl Strategy<Value = Corruption> {
    prop_oneof![
        Just(Corruption::FlipSign),
        Just(Corruption::DropTerm),
        Just(Corruption::CoulombForExchange),
        Just(Corruption::WrongOverlap),
    ]
}

proptest! {
    #![proptest_config(config(48))]

    /// A correct derivation altered in one place — one coefficient's sign flipped, one term
    /// dropped, a Coulomb integral written for an exchange one, or the overlap of an element
    /// negated — fails verification with the verification error and exit code 1.
    #[test]
    fn a_derivation_altered_in_one_place_fails_verification(
        values in choices(),
        how in corruption(),
        pick in any::<prop::sample::Index>(),
    ) {
        let g = generate(&values);
        let text = g.text();
        let program = parsed(&text)?;
        for (k, request) in program.requests.iter().enumerate() {
            let (derivation, report) = checked(&program, k, &text)?;
            if report.sampled {
                continue; // a term behind a delta might never be sampled
            }
            let Some(wrong) = corrupted(&derivation, how, pick) else {
                continue;
            };
            match verify(&program, request, &wrong, DEFAULT_SEED) {
                Ok(_) => {
                    return Err(TestCaseError::fail(format!(
                        "{how:?} of `{}` went unnoticed:\n{text}\nright: {:?}\nwrong: {:?}",
                        request.text, derivation.value, wrong.value
                    )));
                }
                Err(e) => {
                    prop_assert!(matches!(e.kind, ErrorKind::VerificationFailed { .. }), "{}", e);
                    prop_assert_eq!(e.exit_code(), 1);
                }
            }
        }
    }
}

/// The open-shell singlet has +K_ab; a formula with -K_ab must be refused.
#[test]
fn the_singlet_with_the_triplet_exchange_sign_is_refused() {
    let text = "orbitals a b\nspace core\nstate S = (| core^2 a b' | - | core^2 a' b |)/sqrt(2)\nenergy S\n";
    let program = parse("singlet.spinfold", text).expect("parses");
    let request = &program.requests[0];
    let mut derivation = derive(&program, request, &Options::default()).expect("derives");
    let report = verify(&program, request, &derivation, DEFAULT_SEED).expect("verifies");
    assert!(report.checks > 0);
    let exchange = derivation
        .value
        .terms
        .iter_mut()
        .find(|t| t.kind() == IntegralKind::Exchange && t.sums.is_empty())
        .expect("the singlet energy has an unsummed exchange term");
    assert_eq!(exchange.coeff, Exact::one());
    exchange.coeff = Exact::integer(-1);
    let error = verify(&program, request, &derivation, DEFAULT_SEED).unwrap_err();
    assert!(matches!(error.kind, ErrorKind::VerificationFailed { .. }));
    assert_eq!(error.exit_code(), 1);
}

// ---------------------------------------------------------------------------------------
// 4. Exact algebra of the derived expressions
// ---------------------------------------------------------------------------------------

/// Two operands of one sector of a generated program.
fn two_operands(g: &Generated, ch: &mut Choices) -> (String, String) {
    let sector = ch.pick(&g.sectors);
    (sector.operand(ch), sector.operand(ch))
}

/// Some determinant of the program.
fn some_det(g: &Generated, ch: &mut Choices) -> Det {
    let sector = &g.sectors[ch.below(g.sectors.len())];
    ch.pick(&sector.dets)
}

/// A determinant with at least two entries, if the program has one, with another operand
/// of the same sector.
fn reorderable_det(g: &Generated, ch: &mut Choices) -> Option<(Det, String)> {
    let sectors: Vec<&Sector> =
        g.sectors.iter().filter(|s| s.dets.iter().any(|d| d.entries.len() >= 2)).collect();
    let sector = *sectors.get(ch.below(sectors.len()))?;
    let dets: Vec<Det> = sector.dets.iter().filter(|d| d.entries.len() >= 2).cloned().collect();
    Some((ch.pick(&dets), sector.operand(ch)))
}

/// The sign that reordering entries costs: (-1)^(n_x n_y + (n_x + n_y) m) for swapping
/// entries of n_x and n_y electrons with m electrons between them, all mod 2.
fn swap_sign(entries: &[Entry], p: usize, q: usize) -> i64 {
    let (p, q) = (p.min(q), p.max(q));
    let (x, y) = (entries[p].odd() as usize, entries[q].odd() as usize);
    let between = entries[p + 1..q].iter().filter(|e| e.odd()).count();
    if (x * y + (x + y) * between) % 2 == 0 { 1 } else { -1 }
}

proptest! {
    #![proptest_config(config(48))]

    /// <X|H|Y> = <Y|H|X> and <X|Y> = <Y|X> for real orbitals: the derived expressions are
    /// identical.
    #[test]
    fn elements_and_overlaps_are_symmetric(values in choices(), more in choices()) {
        let g = generate(&values);
        let (x, y) = two_operands(&g, &mut Choices::new(&more));
        let d = derive_all(&g, &[
            format!("element {x} {y}"),
            format!("element {y} {x}"),
            format!("overlap {x} {y}"),
            format!("overlap {y} {x}"),
        ])?;
        prop_assert_eq!(&d[0].value, &d[1].value, "<{}|H|{}>:\n{}", x, y, g.text());
        prop_assert_eq!(&d[0].overlap, &d[1].overlap);
        prop_assert_eq!(&d[2].value, &d[3].value);
        prop_assert_eq!(&d[0].overlap, &d[2].value);
    }

    /// Scaling a state by an exact constant c scales its elements and overlaps by c, on
    /// either side, and leaves its energy exactly unchanged.
    #[test]
    fn scaling_a_state_scales_elements_and_keeps_energies(
        values in choices(),
        more in choices(),
        k in 1usize..10,
        negative in any::<bool>(),
    ) {
        let g = generate(&values);
        let (x, y) = two_operands(&g, &mut Choices::new(&more));
        let (text, value) = coefficient(k);
        let (text, c) = if negative {
            (format!("-{text}"), &value * &Exact::integer(-1))
        } else {
            (text.to_string(), value)
        };
        let cx = format!("({text} {x})");
        let d = derive_all(&g, &[
            format!("element {x} {y}"),
            format!("element {cx} {y}"),
            format!("element {y} {cx}"),
            format!("overlap {cx} {y}"),
            format!("energy {x}"),
            format!("energy {cx}"),
        ])?;
        prop_assert_eq!(&d[1].value, &d[0].value.scaled(&c), "c = {}:\n{}", text, g.text());
        prop_assert_eq!(&d[2].value, &d[0].value.scaled(&c));
        prop_assert_eq!(&d[1].overlap, &d[0].overlap.scaled(&c));
        prop_assert_eq!(&d[3].value, &d[0].overlap.scaled(&c));
        prop_assert_eq!(&d[5].value, &d[4].value);
    }

    /// Swapping two entries of a determinant multiplies it by the sign of the permutation of
    /// its electrons: its energy is unchanged, and its elements and overlaps with another
    /// state change by that sign. In particular, swapping two one-electron entries negates
    /// every element.
    #[test]
    fn swapping_two_entries_costs_the_sign_of_the_permutation(
        values in choices(),
        more in choices(),
        p in any::<prop::sample::Index>(),
        q in any::<prop::sample::Index>(),
    ) {
        let g = generate(&values);
        let Some((det, y)) = reorderable_det(&g, &mut Choices::new(&more)) else {
            return Ok(()); // nothing to reorder in this program
        };
        let (p, q) = (p.index(det.entries.len()), q.index(det.entries.len() - 1));
        let q = if q >= p { q + 1 } else { q };
        let mut swapped = det.entries.clone();
        swapped.swap(p, q);
        let sign = swap_sign(&det.entries, p, q);
        if det.entries[p].odd() && det.entries[q].odd() {
            prop_assert_eq!(sign, -1);
        }
        let (x, xs) = (det.inline(), Det::written(&swapped, &det.excitations));
        let d = derive_all(&g, &[
            format!("energy {x}"),
            format!("energy {xs}"),
            format!("element {x} {y}"),
            format!("element {xs} {y}"),
            format!("overlap {y} {x}"),
            format!("overlap {y} {xs}"),
        ])?;
        let sign = Exact::integer(sign);
        prop_assert_eq!(&d[1].value, &d[0].value, "{} vs {}:\n{}", x, xs, g.text());
        prop_assert_eq!(&d[3].value, &d[2].value.scaled(&sign), "{} vs {}:\n{}", x, xs, g.text());
        prop_assert_eq!(&d[3].overlap, &d[2].overlap.scaled(&sign));
        prop_assert_eq!(&d[5].value, &d[4].value.scaled(&sign));
    }

    /// With restricted orbitals, flipping every spin of a determinant (entries and
    /// excitations alike) leaves its energy exactly unchanged.
    #[test]
    fn flipping_every_spin_keeps_the_energy(values in choices(), more in choices()) {
        let g = generate(&values);
        let det = some_det(&g, &mut Choices::new(&more));
        let entries: Vec<Entry> = det.entries.iter().map(|e| e.flipped()).collect();
        let excitations: Vec<Excitation> = det
            .excitations
            .iter()
            .map(|(f, t)| {
                (f.iter().map(|s| s.flipped()).collect(), t.iter().map(|s| s.flipped()).collect())
            })
            .collect();
        let (x, xf) = (det.inline(), Det::written(&entries, &excitations));
        let d = derive_all(&g, &[format!("energy {x}"), format!("energy {xf}")])?;
        prop_assert_eq!(&d[1].value, &d[0].value, "{} vs {}:\n{}", x, xf, g.text());
    }

    /// The energy of a state is <S|H|S> / <S|S>, wherever the state does not vanish, for
    /// every assignment of the generic indices.
    #[test]
    fn an_energy_is_the_element_over_the_overlap(values in choices(), more in choices()) {
        let g = generate(&values);
        let (x, _) = two_operands(&g, &mut Choices::new(&more));
        let requests = [format!("energy {x}"), format!("element {x} {x}")];
        let d = derive_all(&g, &requests)?;
        let program = parsed(&g.text_with(&requests))?;
        for (binding, ints) in bindings(&program) {
            let energy = evaluate(&d[0].value, &binding, &ints);
            let element = evaluate(&d[1].value, &binding, &ints);
            let norm = evaluate(&d[1].overlap, &binding, &ints);
            if norm.abs() > 1e-12 {
                prop_assert!(
                    close(energy * norm, element),
                    "E = {} but <S|H|S>/<S|S> = {} at {:?}:\n{}",
                    energy, element / norm, binding.indices, g.text()
                );
            } else {
                prop_assert!(close(element, 0.0));
            }
        }
    }
}
