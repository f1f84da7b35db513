//! Binding input symbols to the orbitals of an integral file: `a=6`, `core=1-5`,
//! `core=1,2,4`, `i=3`; checked for gaps, overlaps and numbers beyond the file's orbitals.

use crate::error::{Error, ErrorKind, Result};
use crate::language::program::{Program, Request, Symbols};
use crate::numbers::evaluate::Binding;
use std::collections::{BTreeMap, BTreeSet};

fn fail(why: String) -> Error {
    Error::new(ErrorKind::Binding { why })
}

/// `1-5,7` → [1, 2, 3, 4, 5, 7] (1-based, as written).
fn parse_set(name: &str, spec: &str) -> Result<Vec<usize>> {
    let mut out = vec![];
    for piece in spec.split(',') {
        let number = |t: &str| {
            t.trim().parse::<usize>().ok().filter(|&n| n > 0).ok_or_else(|| {
                if t.trim().is_empty() {
                    fail(format!("in --bind {name}={spec}: an orbital number (1-based) is missing"))
                } else {
                    fail(format!("in --bind {name}={spec}: `{t}` is not an orbital number (1-based)"))
                }
            })
        };
        match piece.split_once('-') {
            Some((a, b)) => {
                let (a, b) = (number(a)?, number(b)?);
                if a > b {
                    return Err(fail(format!("in --bind {name}={spec}: the range {a}-{b} runs backwards")));
                }
                out.extend(a..=b);
            }
            None => out.push(number(piece)?),
        }
    }
    Ok(out)
}

/// The orbitals, spaces (closed ones and those of generic indices) and generic indices that a
/// request's states mention.
pub fn symbols_of(program: &Program, request: &Request) -> (BTreeSet<u32>, BTreeSet<u32>, BTreeSet<u32>) {
    let symbols = Symbols::of([&request.bra, &request.ket]);
    let mut spaces = symbols.closed;
    spaces.extend(symbols.indices.iter().map(|&k| program.indices[k as usize].space));
    (symbols.orbitals, spaces, symbols.indices)
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
            let set = parse_set(name, spec)?;
            let is_space = program.spaces.iter().any(|s| s.name == name);
            if !is_space && set.len() != 1 {
                return Err(fail(format!(
                    "--bind {option}: `{name}` is one orbital, so it takes one number"
                )));
            }
            if let Some(&beyond) = set.iter().find(|&&n| n > norb) {
                return Err(fail(format!(
                    "--bind {option}: orbital {beyond} is beyond the {norb} orbitals of the integral file"
                )));
            }
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
