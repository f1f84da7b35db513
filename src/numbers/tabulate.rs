//! The values of one request with real integrals, over every assignment of its unbound
//! generic indices; rows where a state does not exist, or that --distinct excludes, are left out.

use crate::engine::derive::Derivation;
use crate::error::{Error, ErrorKind, Result};
use crate::language::program::{Program, Request, RequestKind};
use crate::numbers::bind::{Bindings, electrons};
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
}

/// Why an assignment has no value.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Exclusion<'a> {
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
fn equal_blocks(indices: &[u32], binding: &Binding) -> Vec<Vec<u32>> {
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

fn exclusion<'a>(d: &'a Derivation, equal: &[Vec<u32>]) -> Option<Exclusion<'a>> {
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
        if let Some(why) = exclusion(d, &equal) {
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
        let constant = d.constant_factor().map_or(0.0, |s| ints.constant() * evaluate(s, &b, ints));
        // adding +0.0 turns a negative zero into zero
        let value = evaluate(&d.value, &b, ints) + constant + 0.0;
        let indices: Vec<(String, usize)> = row.iter().map(|&(k, m)| (name(k), m + 1)).collect();
        if !value.is_finite() {
            let row = indices.iter().map(|(n, m)| format!("{n}={m}")).join(", ");
            return Err(Error::new(ErrorKind::NonFinite {
                request: d.text.clone(),
                value: value.to_string(),
                row: if row.is_empty() { row } else { format!(" at {row}") },
            }));
        }
        entries.push(Entry { indices, value });
    }
    Ok(Evaluated {
        request: d.text.clone(),
        kind: d.kind,
        columns: unbound.iter().map(|&k| name(k)).collect(),
        entries,
        omitted,
        tabulated: !unbound.is_empty(),
        electrons: electrons(request, &binding),
    })
}
