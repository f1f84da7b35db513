//! The whole run as library calls: text to checked derivations, derivations to output
//! formats, and derivations to numbers with the integrals of a real molecule.

use crate::check::verify::{Checked, verify};
use crate::emit;
use crate::engine::derive::{Options, derive};
use crate::error::Result;
use crate::language::program::Program;
use crate::numbers::bind::Bindings;
use crate::numbers::evaluate::evaluate;
use crate::numbers::integrals::Integrals;
use itertools::Itertools;
use serde::Serialize;

/// The seed of the random integrals used by verification unless another is asked for.
pub const DEFAULT_SEED: u64 = 20261201;

/// Derives every request of a program and, with `seed`, verifies each against brute force.
pub fn derive_checked(program: &Program, options: &Options, seed: Option<u64>) -> Result<Vec<Checked>> {
    program
        .requests
        .iter()
        .map(|request| {
            let d = derive(program, request, options)?;
            let report = seed.map(|s| verify(program, request, &d, s)).transpose()?;
            Ok((d, report))
        })
        .collect()
}

/// The output formats of `derive`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    Text {
        ascii: bool,
    },
    Latex {
        standalone: bool,
    },
    Json,
    /// A std-only Rust module with a self-checking test.
    Rust,
    /// A NumPy module with a self-checking test function.
    Python,
}

/// The derivations in one output format. Code formats compute their embedded test vectors by
/// brute force, which is why this can fail.
pub fn render(program: &Program, derivations: &[Checked], format: Format) -> Result<String> {
    Ok(match format {
        Format::Text { ascii } => emit::text::render(program, derivations, ascii),
        Format::Latex { standalone } => emit::latex::render(program, derivations, standalone),
        Format::Json => emit::json::render(program, derivations),
        Format::Rust => emit::rust::render(program, derivations)?,
        Format::Python => emit::python::render(program, derivations)?,
    })
}

/// One output per request: (file name, text) pairs, rendered before anything is written. File
/// names number the requests and carry their keyword and operand names.
pub fn render_each(
    program: &Program,
    derivations: &[Checked],
    format: Format,
) -> Result<Vec<(String, String)>> {
    let extension = match format {
        Format::Text { .. } => "txt",
        Format::Latex { .. } => "tex",
        Format::Json => "json",
        Format::Rust => "rs",
        Format::Python => "py",
    };
    let mut names = emit::Identifiers::new(&[], &[]);
    program
        .requests
        .iter()
        .zip(derivations)
        .enumerate()
        .map(|(k, (request, checked))| {
            let single = Program { requests: vec![request.clone()], ..program.clone() };
            let text = render(&single, std::slice::from_ref(checked), format)?;
            Ok((
                format!("{}.{extension}", names.fresh(&format!("request_{:02}_{}", k + 1, request.text))),
                text,
            ))
        })
        .collect()
}

/// The determinant expansion of every named state, as text or JSON.
pub fn render_states(program: &Program, json: bool) -> String {
    if json { emit::states::render_json(program) } else { emit::states::render_text(program) }
}

/// One number: the value of a request for one assignment of its unbound indices.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Entry {
    /// index name → 1-based orbital number
    pub indices: Vec<(String, usize)>,
    pub value: f64,
}

/// The value of a request: one number, or a table over its unbound indices.
#[derive(Clone, Debug, PartialEq)]
pub struct Evaluated {
    pub request: String,
    pub entries: Vec<Entry>,
    pub tabulated: bool,
}

/// Evaluates every derivation with real integrals: energies include the file's constant,
/// elements the constant times the overlap.
pub fn evaluate_all(
    program: &Program,
    derivations: &[Checked],
    bindings: &Bindings,
    ints: &dyn Integrals,
) -> Result<Vec<Evaluated>> {
    program
        .requests
        .iter()
        .zip(derivations)
        .map(|(request, (d, _))| {
            let (binding, unbound) = bindings.for_request(program, request)?;
            let choices: Vec<Vec<(u32, usize)>> = unbound
                .iter()
                .map(|&k| {
                    binding.spaces[program.indices[k as usize].space as usize]
                        .iter()
                        .map(|&m| (k, m))
                        .collect()
                })
                .collect();
            let assignments: Vec<Vec<(u32, usize)>> = if choices.is_empty() {
                vec![vec![]]
            } else {
                choices.into_iter().multi_cartesian_product().collect()
            };
            let entries = assignments
                .into_iter()
                .map(|assignment| {
                    let mut b = binding.clone();
                    for &(k, m) in &assignment {
                        b.indices[k as usize] = Some(m);
                    }
                    let value =
                        evaluate(&d.value, &b, ints) + ints.constant() * evaluate(&d.overlap, &b, ints);
                    let indices = assignment
                        .iter()
                        .map(|&(k, m)| (program.indices[k as usize].name.clone(), m + 1))
                        .collect();
                    Entry { indices, value }
                })
                .collect();
            Ok(Evaluated { request: d.text.clone(), entries, tabulated: !unbound.is_empty() })
        })
        .collect()
}

/// Results as text: `request  value` lines, tables for unbound indices.
pub fn results_text(results: &[Evaluated]) -> String {
    let mut out = String::new();
    for r in results {
        if !r.tabulated {
            out.push_str(&format!("{:<32} {:>22.12}\n", r.request, r.entries[0].value + 0.0));
            continue;
        }
        out.push_str(&format!("{}\n", r.request));
        let names: Vec<&str> = r.entries[0].indices.iter().map(|(n, _)| n.as_str()).collect();
        out.push_str(&format!("  {}  {:>22}\n", names.iter().map(|n| format!("{n:>4}")).join(" "), "value"));
        for e in &r.entries {
            out.push_str(&format!(
                "  {}  {:>22.12}\n",
                e.indices.iter().map(|(_, m)| format!("{m:>4}")).join(" "),
                e.value
            ));
        }
    }
    out
}

/// Results as JSON: `{"results": [{"request": ..., "value": ...}, ...]}`; a tabulated request
/// has `"values": [{"indices": {"i": 1, ...}, "value": ...}]` instead of `"value"`.
pub fn results_json(results: &[Evaluated]) -> String {
    let list: Vec<serde_json::Value> = results
        .iter()
        .map(|r| {
            if r.tabulated {
                let values: Vec<serde_json::Value> = r
                    .entries
                    .iter()
                    .map(|e| {
                        let indices: serde_json::Map<String, serde_json::Value> =
                            e.indices.iter().map(|(n, m)| (n.clone(), serde_json::json!(m))).collect();
                        serde_json::json!({"indices": indices, "value": e.value})
                    })
                    .collect();
                serde_json::json!({"request": r.request, "values": values})
            } else {
                serde_json::json!({"request": r.request, "value": r.entries[0].value})
            }
        })
        .collect();
    serde_json::to_string_pretty(&serde_json::json!({ "results": list })).expect("plain data serializes")
        + "\n"
}
