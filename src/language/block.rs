//! A request made of pairs of functions: the energy, element or overlap of states with free
//! coefficients (pairs of their parts), and the matrix elements of a `roots` space (pairs of its operands).

use crate::engine::exact::Exact;
use crate::error::{Change, Error, ErrorKind, Limit, Result, Span};
use crate::language::orbital::Orb;
use crate::language::program::{Index, Linear, Program, Request, RequestKind, State, Symbols};
use rayon::prelude::*;
use std::collections::{BTreeMap, BTreeSet};

/// The most functions one block may have: operands of a `roots` request, or parts of a state
/// with free coefficients in a request. Every pair of them is derived and verified on its own,
/// so the work grows as the square of their number.
pub const MAX_FUNCTIONS: usize = 100;

/// The error for a block of `count` functions past `MAX_FUNCTIONS`, at `span`: `what` says what
/// holds them ("this `roots` request lists"), `unit` what they are ("operands").
pub fn too_many_functions(what: String, count: usize, unit: &'static str, span: &Span) -> Error {
    Error::at(
        ErrorKind::TooLarge {
            what,
            count: count.to_string(),
            limit: Box::new(Limit {
                value: MAX_FUNCTIONS as u128,
                unit,
                change: Change::Fixed(
                    "every pair of them is derived and verified on its own, so the work grows as the square of their number; let generic indices stand for the members of a space instead of listing them (`ref[i -> a]` is every single excitation of `ref`), and give free coefficients to fewer, larger parts".into(),
                ),
            }),
        },
        span,
    )
}

/// The request's text as the prefix of a pair's: whole up to 80 characters, else cut with `...`,
/// so that the pairs of a long request do not each carry a copy of all of it.
fn prefix(text: &str) -> String {
    const LONGEST: usize = 80;
    if text.chars().count() <= LONGEST {
        text.to_string()
    } else {
        format!("{}...", text.chars().take(LONGEST - 3).collect::<String>())
    }
}

/// One function of a block: a part of a state with free coefficients, or an operand of `roots`.
#[derive(Clone, Debug)]
pub struct Function {
    /// As written: the operand of `roots`; for a part, its state's label with the coefficient
    /// (`P(cg)`, `P(1)` for the fixed part).
    pub label: String,
    pub state: State,
    /// The free coefficient that multiplies it (None for a fixed part and for an operand).
    pub coefficient: Option<u32>,
    /// Its generic indices, in declaration order: what its members run over in `roots`.
    pub indices: Vec<u32>,
}

impl Function {
    fn new(label: String, state: State, coefficient: Option<u32>) -> Function {
        let indices = Symbols::of([&state]).indices.into_iter().collect();
        Function { label, state, coefficient, indices }
    }
}

/// <row|H|column> (or <row|column>), with the column's generic indices renamed apart from the
/// row's where the two functions are different members of a space.
#[derive(Clone, Debug)]
pub struct Pair {
    pub row: usize,
    pub column: usize,
    /// (index of the column function, the index it is renamed to); empty when none is.
    pub renamed: Vec<(u32, u32)>,
    /// The pair as an ordinary request: an element (giving <row|H|column> and <row|column>), or
    /// an overlap for `overlap` requests.
    pub request: Request,
}

/// The functions of a request and the pairs of them it needs.
#[derive(Clone, Debug)]
pub struct Block {
    /// The bra functions.
    pub rows: Vec<Function>,
    /// The ket functions: the rows again when the block is symmetric.
    pub columns: Vec<Function>,
    /// Rows and columns are the same functions, and <f|H|g> = <g|H|f> (real orbitals and
    /// coefficients): only pairs with row <= column are derived.
    pub symmetric: bool,
    pub pairs: Vec<Pair>,
}

impl Block {
    /// The free coefficients its functions carry, ascending.
    pub fn coefficients(&self) -> Vec<u32> {
        let mut used: Vec<u32> =
            self.rows.iter().chain(&self.columns).filter_map(|f| f.coefficient).collect();
        used.sort();
        used.dedup();
        used
    }

    /// `f` of every pair (with its position), in pair order. Equal pairs (an operand listed
    /// twice) ask the same, so `f` runs once for each set of them, in parallel, and the others
    /// get a copy; the first error in pair order is the one returned.
    pub fn each_pair<T: Clone + Send>(&self, f: impl Fn(usize, &Pair) -> Result<T> + Sync) -> Result<Vec<T>> {
        let mut first: Vec<usize> = Vec::with_capacity(self.pairs.len());
        for (k, p) in self.pairs.iter().enumerate() {
            let r = &p.request;
            let equal = self.pairs[..k]
                .iter()
                .map(|o| &o.request)
                .position(|o| o.kind == r.kind && o.bra == r.bra && o.ket == r.ket);
            first.push(equal.map_or(k, |e| first[e]));
        }
        let once: Vec<Option<Result<T>>> =
            self.pairs.par_iter().enumerate().map(|(k, p)| (first[k] == k).then(|| f(k, p))).collect();
        let mut out: Vec<T> = Vec::with_capacity(once.len());
        for (k, value) in once.into_iter().enumerate() {
            let value = match value {
                Some(value) => value?,
                None => out[first[k]].clone(),
            };
            out.push(value);
        }
        Ok(out)
    }

    /// The fixed bra and ket that the functions sum to with the free coefficients set to
    /// `values` (a fixed part keeps its weight 1).
    pub fn states_at(&self, values: &BTreeMap<u32, Exact>) -> (State, State) {
        let at = |functions: &[Function]| {
            let mut scaled = functions
                .iter()
                .map(|f| f.state.clone().scaled(&f.coefficient.map_or(Exact::one(), |c| values[&c].clone())));
            let first = scaled.next().expect("a block has functions");
            scaled.fold(first, |acc, s| acc.joined(&s))
        };
        (at(&self.rows), at(&self.columns))
    }
    /// The block of `energy`, `element` or `overlap` on states with free coefficients: every
    /// pair of a bra part and a ket part (for an energy, of two parts of the state, once).
    pub fn free(
        program: &Program,
        kind: RequestKind,
        text: &str,
        span: &Span,
        (bra, bra_text): (&Linear, &str),
        (ket, ket_text): (&Linear, &str),
    ) -> Block {
        let functions = |state: &Linear, label: &str| -> Vec<Function> {
            state
                .functions()
                .map(|(c, s)| {
                    let name = c.map_or("1".to_string(), |c| program.coefficients[c as usize].name.clone());
                    Function::new(format!("{label}({name})"), s.clone(), c)
                })
                .collect()
        };
        let symmetric = kind == RequestKind::Energy;
        let rows = functions(bra, bra_text);
        let columns = if symmetric { rows.clone() } else { functions(ket, ket_text) };
        let pair_kind =
            if kind == RequestKind::Overlap { RequestKind::Overlap } else { RequestKind::Element };
        let mut pairs = vec![];
        for (row, f) in rows.iter().enumerate() {
            let first = if symmetric { row } else { 0 };
            for (column, g) in columns.iter().enumerate().skip(first) {
                let request = pair_request(pair_kind, text, span, f, g, g.state.clone(), "");
                pairs.push(Pair { row, column, renamed: vec![], request });
            }
        }
        Block { rows, columns, symmetric, pairs }
    }

    /// The block of `roots`: the Hamiltonian and overlap elements among the operands, upper
    /// triangle. The members of one operand are different functions, so a pair of operands
    /// (one operand with itself included) has the column's generic indices renamed apart from
    /// the row's wherever they share one (see `renaming`).
    pub fn roots(program: &mut Program, text: &str, span: &Span, operands: Vec<(State, String)>) -> Block {
        let rows: Vec<Function> =
            operands.into_iter().map(|(s, label)| Function::new(label, s, None)).collect();
        let mut pairs = vec![];
        for row in 0..rows.len() {
            for column in row..rows.len() {
                let renamed = renaming(program, &rows[row].indices, &rows[column].indices, span);
                let rename = |o: Orb| match o {
                    Orb::Index(k) => {
                        Orb::Index(renamed.iter().find(|(from, _)| *from == k).map_or(k, |&(_, to)| to))
                    }
                    other => other,
                };
                let ket = rows[column].state.with_orbs(&rename);
                let note = renaming_text(program, &renamed);
                let request =
                    pair_request(RequestKind::Element, text, span, &rows[row], &rows[column], ket, &note);
                pairs.push(Pair { row, column, renamed, request });
            }
        }
        Block { columns: rows.clone(), rows, symmetric: true, pairs }
    }
}

/// `, ket i -> j, a -> b`: the renaming of a pair in words (empty when there is none).
pub fn renaming_text(program: &Program, renamed: &[(u32, u32)]) -> String {
    if renamed.is_empty() {
        return String::new();
    }
    let name = |k: u32| program.indices[k as usize].name.as_str();
    let list: Vec<String> = renamed.iter().map(|&(a, b)| format!("{} -> {}", name(a), name(b))).collect();
    format!(" with {} in the ket", list.join(", "))
}

fn pair_request(
    kind: RequestKind,
    text: &str,
    span: &Span,
    row: &Function,
    column: &Function,
    ket: State,
    note: &str,
) -> Request {
    let bracket = match kind {
        RequestKind::Overlap => format!("<{}|{}>", row.label, column.label),
        _ => format!("<{}|H|{}>", row.label, column.label),
    };
    Request {
        kind,
        text: format!("{}: {bracket}{note}", prefix(text)),
        bra: row.state.clone(),
        ket,
        bra_text: row.label.clone(),
        ket_text: column.label.clone(),
        span: span.clone(),
        block: None,
    }
}

/// The column's indices that the row also uses, each renamed to another index of its space
/// that neither function uses: the space's declared letters first, then indices generated for
/// the purpose (`i2`, `i3`, … named after the index, clashing with no name of the input), which
/// are added to the program and shared by every pair that needs them.
fn renaming(program: &mut Program, row: &[u32], column: &[u32], span: &Span) -> Vec<(u32, u32)> {
    let mut taken: BTreeSet<u32> = row.iter().chain(column).copied().collect();
    let mut out = vec![];
    for &k in column.iter().filter(|k| row.contains(k)) {
        let space = program.indices[k as usize].space;
        let declared = &program.spaces[space as usize].indices;
        let generated = (0..program.indices.len() as u32)
            .filter(|g| program.indices[*g as usize].space == space && !declared.contains(g));
        let pick = declared.iter().copied().chain(generated).find(|g| !taken.contains(g));
        let pick = pick.unwrap_or_else(|| generate(program, k, span));
        taken.insert(pick);
        out.push((k, pick));
    }
    out
}

/// A new index of `like`'s space, named after it with the first number that makes a name the
/// input does not use.
fn generate(program: &mut Program, like: u32, span: &Span) -> u32 {
    let base = program.indices[like as usize].name.clone();
    let used: BTreeSet<String> = program.declared_names().map(String::from).collect();
    let name = (2..).map(|n| format!("{base}{n}")).find(|n| !used.contains(n)).expect("an endless supply");
    program.indices.push(Index { name, space: program.indices[like as usize].space, span: span.clone() });
    program.indices.len() as u32 - 1
}
