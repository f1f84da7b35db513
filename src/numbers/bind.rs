//! Binding input symbols to the orbitals of an integral file: `a=6`, `core=1-5`,
//! `core=1,2,4`, `core=none`, `i=3`; checked for gaps, overlaps and numbers beyond the file.

use crate::engine::exact::Exact;
use crate::error::{Error, ErrorKind, Result};
use crate::language::program::{Occupant, Program, Request, State, Symbols};
use crate::numbers::evaluate::Binding;
use std::borrow::Cow;
use std::collections::{BTreeMap, BTreeSet};

fn fail(why: String) -> Error {
    Error::new(ErrorKind::Binding { why })
}

/// The spelling of an empty set of orbitals: a space bound to no orbitals.
pub const NO_ORBITALS: &str = "none";

/// `1-5,7` → [1, 2, 3, 4, 5, 7] (1-based, as written); `none` → []. Every number is checked
/// against the file's `norb` orbitals before a range is expanded.
fn parse_set(name: &str, spec: &str, norb: usize) -> Result<Vec<usize>> {
    if spec == NO_ORBITALS {
        return Ok(vec![]);
    }
    let wrong = |why: String| fail(format!("in --bind {name}={spec}: {why}"));
    // a 1-based orbital number; None when it is too large for any file
    let number = |t: &str| -> Result<Option<usize>> {
        let t = t.trim();
        if t.is_empty() {
            return Err(wrong("an orbital number (1-based) is missing".into()));
        }
        if !t.bytes().all(|b| b.is_ascii_digit()) || t.bytes().all(|b| b == b'0') {
            return Err(wrong(format!("`{t}` is not an orbital number (1-based)")));
        }
        Ok(t.parse::<usize>().ok())
    };
    let mut out = BTreeSet::new();
    for piece in spec.split(',') {
        let (from, to) = piece.split_once('-').unwrap_or((piece, piece));
        let (first, last) = (number(from)?, number(to)?);
        if let (Some(a), Some(b)) = (first, last)
            && a > b
        {
            return Err(wrong(format!("the range {a}-{b} runs backwards")));
        }
        let (first, last) = match (first, last) {
            (Some(a), Some(b)) if b <= norb => (a, b),
            // name the first orbital past the file
            (Some(a), _) if a <= norb => return Err(wrong(beyond(&(norb + 1).to_string(), norb))),
            _ => return Err(wrong(beyond(from.trim(), norb))),
        };
        for n in first..=last {
            if !out.insert(n) {
                return Err(wrong(format!("orbital {n} is listed twice")));
            }
        }
    }
    Ok(out.into_iter().collect())
}

fn beyond(orbital: &str, norb: usize) -> String {
    format!("orbital {orbital} is beyond the {norb} orbitals of the integral file")
}

/// A state as its determinants are written; a coupled state too large to expand stands as its
/// reference determinant, which mentions the same symbols and holds as many electrons.
fn written(state: &State) -> Cow<'_, State> {
    match &state.coupling {
        Some(coupling) if state.is_unexpanded() => {
            Cow::Owned(State::new(vec![(Exact::one(), coupling.reference.clone())]))
        }
        _ => Cow::Borrowed(state),
    }
}

/// The orbitals, spaces (closed ones and those of generic indices) and generic indices that a
/// request's states mention.
pub fn symbols_of(program: &Program, request: &Request) -> (BTreeSet<u32>, BTreeSet<u32>, BTreeSet<u32>) {
    let (bra, ket) = (written(&request.bra), written(&request.ket));
    let symbols = Symbols::of([bra.as_ref(), ket.as_ref()]);
    let mut spaces = symbols.closed;
    spaces.extend(symbols.indices.iter().map(|&k| program.indices[k as usize].space));
    (symbols.orbitals, spaces, symbols.indices)
}

/// The number of electrons of a request's states under a binding: one per explicit electron
/// and two per member of each closed space.
pub fn electrons(request: &Request, binding: &Binding) -> usize {
    written(&request.bra).terms.first().map_or(0, |(_, det)| {
        det.occupants
            .iter()
            .map(|o| match *o {
                Occupant::Electron(_) => 1,
                Occupant::Closed(s) => 2 * binding.spaces[s as usize].len(),
            })
            .sum()
    })
}

/// Parsed `--bind` options, by name, 1-based.
pub struct Bindings {
    specs: BTreeMap<String, Vec<usize>>,
}

impl Bindings {
    pub fn parse(program: &Program, options: &[String], norb: usize) -> Result<Bindings> {
        let mut specs = BTreeMap::new();
        for option in options {
            let (name, spec) = option
                .split_once('=')
                .ok_or_else(|| fail(format!("--bind {option}: write NAME=SPEC, e.g. a=6 or core=1-5")))?;
            let (name, spec) = (name.trim(), spec.trim());
            let known = program.orbitals.iter().any(|o| o.name == name)
                || program.spaces.iter().any(|s| s.name == name)
                || program.indices.iter().any(|i| i.name == name);
            if !known {
                return Err(fail(format!(
                    "--bind {option}: `{name}` is not an orbital, space or generic index of the input"
                )));
            }
            let is_space = program.spaces.iter().any(|s| s.name == name);
            if !is_space && (spec == NO_ORBITALS || spec.contains([',', '-'])) {
                return Err(fail(format!(
                    "--bind {option}: `{name}` is one orbital, so it takes one number"
                )));
            }
            if is_space && spec.is_empty() {
                return Err(fail(format!(
                    "--bind {option}: no orbitals are given; a space bound to no orbitals is written {name}={NO_ORBITALS}"
                )));
            }
            let set = parse_set(name, spec, norb)?;
            if specs.insert(name.to_string(), set).is_some() {
                return Err(fail(format!(
                    "--bind {option}: `{name}` is bound twice; give each name one --bind"
                )));
            }
        }
        Ok(Bindings { specs })
    }

    /// The binding for one request, with its unbound generic indices (to be tabulated).
    pub fn for_request(&self, program: &Program, request: &Request) -> Result<(Binding, Vec<u32>)> {
        let (orbitals, spaces, indices) = symbols_of(program, request);
        let get = |name: &str| {
            self.specs.get(name).cloned().ok_or_else(|| {
                fail(format!(
                    "`{}` needs `{name}` bound to orbitals of the integral file: add --bind {name}=...",
                    request.text
                ))
            })
        };
        let mut binding = Binding {
            orbitals: vec![usize::MAX; program.orbitals.len()],
            spaces: vec![vec![]; program.spaces.len()],
            indices: vec![None; program.indices.len()],
        };
        let mut owner: BTreeMap<usize, String> = BTreeMap::new();
        let mut claim = |n: usize, name: &str| -> Result<()> {
            if let Some(other) = owner.insert(n, name.to_string()) {
                return Err(fail(format!(
                    "orbital {n} is bound to both `{other}` and `{name}`: orbitals and spaces must not overlap"
                )));
            }
            Ok(())
        };
        for &k in &orbitals {
            let name = &program.orbitals[k as usize].name;
            let n = get(name)?[0];
            claim(n, name)?;
            binding.orbitals[k as usize] = n - 1;
        }
        for &s in &spaces {
            let name = &program.spaces[s as usize].name;
            let set = get(name)?;
            for &n in &set {
                claim(n, name)?;
            }
            binding.spaces[s as usize] = set.iter().map(|n| n - 1).collect();
        }
        let mut unbound = vec![];
        for &k in &indices {
            let index = &program.indices[k as usize];
            match self.specs.get(&index.name) {
                Some(set) => {
                    let space = &program.spaces[index.space as usize];
                    if !binding.spaces[index.space as usize].contains(&(set[0] - 1)) {
                        return Err(fail(format!(
                            "--bind {}={}: the index `{}` ranges over `{}`, and orbital {} is not in its binding",
                            index.name, set[0], index.name, space.name, set[0]
                        )));
                    }
                    binding.indices[k as usize] = Some(set[0] - 1);
                }
                None => unbound.push(k),
            }
        }
        Ok((binding, unbound))
    }
}
