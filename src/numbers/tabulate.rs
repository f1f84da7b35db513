//! The values of one request with real integrals, over every assignment of its unbound
//! generic indices; rows where a state does not exist, or that --distinct excludes, are left out.

use crate::engine::derive::Derivation;
use crate::error::{Error, ErrorKind, Result};
use crate::language::program::{Program, Request, RequestKind};
use crate::numbers::bind::{Bindings, electrons};
use crate::numbers::density_listing::DensityValues;
use crate::numbers::evaluate::{Binding, evaluate};
use crate::numbers::integrals::Integrals;
use itertools::Itertools;
use serde::Serialize;
use std::collections::BTreeMap;

/// One number: the value of a request for one assignment of its unbound indices.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Entry {
    /// index name → 1-based orbital number
    pub indices: Vec<(String, usize)>,
    pub value: f64,
    /// For a request with free coefficients: their values (as set, or where the energy is
    /// stationary), by name; empty otherwise.
    pub coefficients: Vec<(String, f64)>,
}

/// Rows of a table left out for one reason.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Omitted {
    pub count: usize,
    /// The blocks of generic indices that are equal in these rows (each index in no block
    /// differs from all others).
    pub equal: Vec<Vec<String>>,
    /// Why these rows have no value.
    pub reason: String,
}

/// The value of a request: one number, or a table over its unbound indices.
#[derive(Clone, Debug, PartialEq)]
pub struct Evaluated {
    pub request: String,
    pub kind: RequestKind,
    /// The unbound generic indices, the columns of a table.
    pub columns: Vec<String>,
    pub entries: Vec<Entry>,
    /// Rows of the table left out, grouped by reason.
    pub omitted: Vec<Omitted>,
    pub tabulated: bool,
    /// The number of electrons of the request's states under the bindings.
    pub electrons: usize,
    /// What kind of value a request with free coefficients has; None for others.
    pub free: Option<FreeValue>,
    /// For `roots`: the space and its lowest roots (`entries` then hold the root values, by
    /// their number as the index `root`).
    pub roots: Option<RootsOut>,
    /// For `density`: the listed non-zero elements (`entries` is then empty).
    pub density: Option<DensityValues>,
    /// What the user should know about these values, in words.
    pub warnings: Vec<String>,
}

/// How the free coefficients of a request got their values.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FreeValue {
    /// Given with --set.
    Set,
    /// Where the energy is stationary: the lowest root over the span of the state's parts.
    Stationary,
}

/// The roots of a `roots` space, as printed.
#[derive(Clone, Debug, PartialEq)]
pub struct RootsOut {
    /// Functions kept after vanishing members and linear dependence are removed.
    pub dimension: usize,
    /// Functions dropped for linear dependence.
    pub dropped: usize,
    /// Members that vanish for their index values, left out.
    pub vanishing: usize,
    /// The lowest roots, ascending, each with every non-zero component by |coefficient|.
    pub roots: Vec<RootValue>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct RootValue {
    pub value: f64,
    pub vector: Vec<ComponentValue>,
}

/// One member's coefficient: its operand as written and its index values (1-based).
#[derive(Clone, Debug, PartialEq)]
pub struct ComponentValue {
    pub operand: String,
    pub indices: Vec<(String, usize)>,
    pub coefficient: f64,
}

/// Why an assignment has no value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Exclusion<'a> {
    /// The derivation assumed different letters are different orbitals.
    Distinct,
    /// A state has no determinant left in this coincidence.
    Vanishes(&'a str),
}

impl Exclusion<'_> {
    fn reason(self) -> String {
        match self {
            Exclusion::Distinct => "--distinct takes different letters to be different orbitals".into(),
            Exclusion::Vanishes(state) => format!("the state `{state}` vanishes"),
        }
    }
}

/// The blocks of the request's generic indices that stand on one orbital, each ascending,
/// ordered by their smallest index: the coincidence case of an assignment.
pub fn equal_blocks(indices: &[u32], binding: &Binding) -> Vec<Vec<u32>> {
    let mut by_orbital: BTreeMap<usize, Vec<u32>> = BTreeMap::new();
    for &k in indices {
        let orbital = binding.indices[k as usize].expect("every index of the request is assigned");
        by_orbital.entry(orbital).or_default().push(k);
    }
    let mut blocks: Vec<Vec<u32>> = by_orbital.into_values().filter(|b| b.len() > 1).collect();
    for block in &mut blocks {
        block.sort();
    }
    blocks.sort();
    blocks
}

pub(crate) fn exclusion<'a>(d: &'a Derivation, equal: &[Vec<u32>]) -> Option<Exclusion<'a>> {
    if equal.is_empty() {
        None
    } else if d.distinct {
        Some(Exclusion::Distinct)
    } else {
        d.vanishing.iter().find(|v| v.equal == equal).map(|v| Exclusion::Vanishes(&v.state))
    }
}

/// The blocks of equal indices in words: "i = j and a = b".
pub fn equal_text(equal: &[Vec<String>]) -> String {
    equal.iter().map(|b| b.join(" = ")).join(" and ")
}

/// The error for bindings that fix an assignment without a value.
fn refusal(d: &Derivation, why: Exclusion, bindings: String, equal: String) -> Error {
    let request = d.text.clone();
    Error::new(match why {
        Exclusion::Distinct => ErrorKind::DistinctCoincide { request, bindings, equal },
        Exclusion::Vanishes(state) => {
            ErrorKind::StateVanishes { request, bindings, state: state.into(), equal }
        }
    })
}

/// A request evaluated over every assignment of its unbound indices. The constant energy of
/// the integrals enters energies and elements, times <bra|ket>.
pub fn tabulate(
    program: &Program,
    request: &Request,
    d: &Derivation,
    bindings: &Bindings,
    ints: &dyn Integrals,
) -> Result<Evaluated> {
    // `shells`: the energy as its open-shell form gives it (verified equal to the energy)
    let expr = d.shells.as_ref().map_or_else(|| d.value.clone(), |form| form.energy());
    let value = |b: &Binding| {
        let constant = d.constant_factor().map_or(0.0, |s| ints.constant() * evaluate(s, b, ints));
        Ok((evaluate(&expr, b, ints) + constant, vec![]))
    };
    table(program, request, d, bindings, &|equal, _| exclusion(d, equal), &value)
}

/// The value of a row and, for free coefficients, their values there.
pub type RowValue = (f64, Vec<(String, f64)>);

/// Why a row has no value, from the blocks of equal indices and the row's binding.
pub type Excluded<'d> = dyn Fn(&[Vec<u32>], &Binding) -> Option<Exclusion<'d>> + 'd;

/// A request's values over every assignment of its unbound indices: `excluded` says why a
/// row has none (given the blocks of equal indices among `d.free_indices` and the row's
/// binding), `value` gives it.
pub fn table<'d>(
    program: &Program,
    request: &Request,
    d: &'d Derivation,
    bindings: &Bindings,
    excluded: &Excluded<'d>,
    value: &dyn Fn(&Binding) -> Result<RowValue>,
) -> Result<Evaluated> {
    let (binding, unbound) = bindings.for_request(program, request)?;
    let name = |k: u32| program.indices[k as usize].name.clone();
    let names = |blocks: &[Vec<u32>]| -> Vec<Vec<String>> {
        blocks.iter().map(|b| b.iter().map(|&k| name(k)).collect()).collect()
    };
    // with no unbound index, the one empty assignment
    let rows = unbound
        .iter()
        .map(|&k| {
            binding.spaces[program.indices[k as usize].space as usize]
                .iter()
                .map(move |&m| (k, m))
                .collect_vec()
        })
        .multi_cartesian_product();
    let mut entries = vec![];
    let mut omitted: Vec<Omitted> = vec![];
    for row in rows {
        let mut b = binding.clone();
        for &(k, m) in &row {
            b.indices[k as usize] = Some(m);
        }
        let equal = equal_blocks(&d.free_indices, &b);
        if let Some(why) = excluded(&equal, &b) {
            // the bindings alone fix this coincidence: the user asked for a value that has none
            if equal.iter().flatten().all(|k| !unbound.contains(k)) {
                let bindings = equal
                    .iter()
                    .flatten()
                    .map(|&k| format!("--bind {}={}", name(k), b.indices[k as usize].map_or(0, |m| m + 1)))
                    .join(" ");
                return Err(refusal(d, why, bindings, equal_text(&names(&equal))));
            }
            let (equal, reason) = (names(&equal), why.reason());
            match omitted.iter_mut().find(|o| o.equal == equal && o.reason == reason) {
                Some(o) => o.count += 1,
                None => omitted.push(Omitted { count: 1, equal, reason }),
            }
            continue;
        }
        let (value, coefficients) = value(&b)?;
        // adding +0.0 turns a negative zero into zero
        let value = value + 0.0;
        let indices: Vec<(String, usize)> = row.iter().map(|&(k, m)| (name(k), m + 1)).collect();
        if !value.is_finite() {
            let row = indices.iter().map(|(n, m)| format!("{n}={m}")).join(", ");
            return Err(Error::new(ErrorKind::NonFinite {
                request: d.text.clone(),
                value: value.to_string(),
                row: if row.is_empty() { row } else { format!(" at {row}") },
            }));
        }
        entries.push(Entry { indices, value, coefficients });
    }
    Ok(Evaluated {
        request: d.text.clone(),
        kind: d.kind,
        columns: unbound.iter().map(|&k| name(k)).collect(),
        entries,
        omitted,
        tabulated: !unbound.is_empty(),
        electrons: electrons(request, &binding),
        free: None,
        roots: None,
        density: None,
        warnings: vec![],
    })
}
