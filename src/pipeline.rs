//! The whole run as library calls: text to checked derivations, derivations to output
//! formats, and derivations to numbers with the integrals of a real molecule.

use crate::check::verify::{Checked, verify};
use crate::emit;
use crate::engine::derive::{Options, derive};
use crate::error::Result;
use crate::language::program::Program;
use crate::language::program::RequestKind;
use crate::numbers::bind::Bindings;
use crate::numbers::fcidump::IntegralDump;
use crate::numbers::integrals::Integrals;
use crate::numbers::tabulate::{Evaluated, equal_text, tabulate};
use itertools::Itertools;

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

/// Evaluates every derivation with real integrals: energies include the file's constant,
/// elements the constant times the overlap; overlaps and spin values are pure numbers.
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
        .map(|(request, (d, _))| tabulate(program, request, d, bindings, ints))
        .collect()
}

/// What the user should know about an evaluation: what the integral reader assumed, and
/// energies or elements of states whose electron count differs from the file's NELEC (an ion
/// on the neutral molecule's integrals is legitimate, a slip in the bindings is not).
pub fn eval_warnings(dump: &IntegralDump, results: &[Evaluated]) -> Vec<String> {
    let mut out = dump.warnings.clone();
    if let Some(nelec) = dump.header.nelec {
        for r in results {
            if matches!(r.kind, RequestKind::Energy | RequestKind::Element) && r.electrons != nelec {
                out.push(format!(
                    "`{}` has {} electrons under the bindings, but the integral file was made for NELEC={nelec}",
                    r.request, r.electrons
                ));
            }
        }
    }
    out
}

/// A value with 12 decimals; one that rounds to zero prints as zero, without a sign.
fn fixed(value: f64) -> String {
    let text = format!("{value:.12}");
    match text.strip_prefix('-') {
        Some(magnitude) if magnitude.bytes().all(|b| b == b'0' || b == b'.') => magnitude.to_string(),
        _ => text,
    }
}

/// Results as text: `request  value` lines; tables for unbound indices, with a line under the
/// table for each group of rows left out.
pub fn results_text(results: &[Evaluated]) -> String {
    let mut out = String::new();
    for r in results {
        if !r.tabulated {
            out.push_str(&format!("{:<32} {:>22}\n", r.request, fixed(r.entries[0].value)));
            continue;
        }
        out.push_str(&format!("{}\n", r.request));
        out.push_str(&format!(
            "  {}  {:>22}\n",
            r.columns.iter().map(|n| format!("{n:>4}")).join(" "),
            "value"
        ));
        for e in &r.entries {
            out.push_str(&format!(
                "  {}  {:>22}\n",
                e.indices.iter().map(|(_, m)| format!("{m:>4}")).join(" "),
                fixed(e.value)
            ));
        }
        for o in &r.omitted {
            let rows = if o.count == 1 { "row" } else { "rows" };
            out.push_str(&format!(
                "  left out: {} {rows} where {}: {}\n",
                o.count,
                equal_text(&o.equal),
                o.reason
            ));
        }
    }
    out
}

/// Results as JSON: `{"results": [{"request": ..., "value": ...}, ...], "warnings": [...]}`; a
/// tabulated request has `"values": [{"indices": {"i": 1, ...}, "value": ...}]` instead of
/// `"value"`, and `"omitted": [{"count": ..., "equal": [["i", "j"]], "reason": ...}]`.
pub fn results_json(results: &[Evaluated], warnings: &[String]) -> String {
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
                serde_json::json!({"request": r.request, "values": values, "omitted": r.omitted})
            } else {
                serde_json::json!({"request": r.request, "value": r.entries[0].value})
            }
        })
        .collect();
    serde_json::to_string_pretty(&serde_json::json!({ "results": list, "warnings": warnings }))
        .expect("plain data serializes")
        + "\n"
}
