//! The bounds a request must keep before its derivation starts: states that can be held as
//! determinants, and few enough coincidence cases of their generic indices.

use crate::engine::coincidence;
use crate::engine::derive::Options;
use crate::error::{Change, Error, ErrorKind, Limit, Result};
use crate::language::orbital::SpaceId;
use crate::language::parser::MAX_EXPANDED_SHELLS;
use crate::language::program::{Program, Request, Symbols};
use std::collections::BTreeMap;

/// Refuses a request whose states are too large to expand or whose generic indices would make
/// more coincidence cases than `options.max_cases`, before any work is spent on it.
pub fn check(program: &Program, request: &Request, options: &Options) -> Result<()> {
    let determinants = Limit {
        value: options.max_determinants as u128,
        unit: "determinants",
        change: Change::Option { option: "--max-determinants", or: None },
    };
    for (state, label) in [(&request.bra, &request.bra_text), (&request.ket, &request.ket_text)] {
        if let Some(coupling) = state.coupling.as_ref().filter(|_| state.is_unexpanded()) {
            let without = format!(
                "only the energy and spin of a coupled state can be had without its determinants (by spin algebra), and `{label}` spans"
            );
            let n = coupling.open.len();
            let kind = if n > MAX_EXPANDED_SHELLS {
                ErrorKind::TooLarge {
                    what: format!("`{label}` has"),
                    count: n.to_string(),
                    limit: Box::new(Limit {
                        value: MAX_EXPANDED_SHELLS as u128,
                        unit: "open shells",
                        change: Change::Fixed(format!(
                            "{without} {} determinants; past {MAX_EXPANDED_SHELLS} open shells their exact coefficients outgrow 64-bit integers",
                            coupling.determinants
                        )),
                    }),
                }
            } else {
                ErrorKind::TooLarge {
                    what: without,
                    count: coupling.determinants.to_string(),
                    limit: Box::new(determinants.clone()),
                }
            };
            return Err(Error::at(kind, &request.span));
        }
        if state.terms.len() > options.max_determinants {
            return Err(Error::at(
                ErrorKind::TooLarge {
                    what: format!("`{label}` has"),
                    count: state.terms.len().to_string(),
                    limit: Box::new(determinants.clone()),
                },
                &request.span,
            ));
        }
    }
    let mut used: BTreeMap<SpaceId, Vec<u32>> = BTreeMap::new();
    for k in Symbols::of([&request.bra, &request.ket]).indices {
        used.entry(program.indices[k as usize].space).or_default().push(k);
    }
    let cases = coincidence::count(&used, options.distinct);
    if cases > options.max_cases.into() {
        return Err(Error::at(
            ErrorKind::TooLarge {
                what: format!("the generic indices of `{}` coincide in", request.text),
                count: cases.to_string(),
                limit: Box::new(Limit {
                    value: options.max_cases as u128,
                    unit: "cases",
                    change: Change::Option {
                        option: "--max-cases",
                        or: Some(
                            "--distinct, which takes different generic indices as different orbitals, needs one case",
                        ),
                    },
                }),
            },
            &request.span,
        ));
    }
    Ok(())
}
