//! The whole run as library calls: text to checked derivations, derivations to output
//! formats, and derivations to numbers with the integrals of a real molecule.

use crate::check::verify::{Checked, verify};
use crate::emit;
use crate::engine::derive::{Options, derive};
use crate::error::Result;
use crate::language::program::Program;
use crate::language::program::RequestKind;
use crate::numbers::bind::Bindings;
use crate::numbers::block_values::evaluate_block;
use crate::numbers::density_listing::{DensityValues, density_values};
use crate::numbers::fcidump::{IntegralDump, write_dump};
use crate::numbers::integrals::Integrals;
use crate::numbers::optimize::Controls;
use crate::numbers::optimize_request::{Optimized, optimize_request};
use crate::numbers::settings::Settings;
use crate::numbers::tabulate::{Evaluated, FreeValue, Omitted, RootsOut, equal_text, tabulate};
use crate::numbers::transform::rotate_all;
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
/// elements the constant times the overlap; overlaps and spin values are pure numbers. Free
/// coefficients take no values (an energy is then given where it is stationary), and a
/// `roots` space gives its lowest `DEFAULT_ROOTS` roots.
pub fn evaluate_all(
    program: &Program,
    derivations: &[Checked],
    bindings: &Bindings,
    ints: &dyn Integrals,
) -> Result<Vec<Evaluated>> {
    evaluate_with(program, derivations, bindings, ints, &Settings::default(), &|_| {})
}

/// Evaluates every derivation as `evaluate_all` does, with values for free coefficients and
/// the number of roots from `settings`; `progress` hears about long computations.
pub fn evaluate_with(
    program: &Program,
    derivations: &[Checked],
    bindings: &Bindings,
    ints: &dyn Integrals,
    settings: &Settings,
    progress: &dyn Fn(&str),
) -> Result<Vec<Evaluated>> {
    program
        .requests
        .iter()
        .zip(derivations)
        .map(|(request, checked)| {
            evaluate_request(program, request, checked, bindings, ints, settings, progress)
        })
        .collect()
}

fn evaluate_request(
    program: &Program,
    request: &crate::language::program::Request,
    (d, _): &Checked,
    bindings: &Bindings,
    ints: &dyn Integrals,
    settings: &Settings,
    progress: &dyn Fn(&str),
) -> Result<Evaluated> {
    match (&d.block, d.density_symmetry()) {
        (Some(block), _) => evaluate_block(program, request, d, block, bindings, ints, settings, progress),
        (None, Some(symmetry)) => density_values(program, request, d, symmetry, bindings),
        (None, None) => tabulate(program, request, d, bindings, ints),
    }
}

/// Optimizes the orbitals for every `energy` request separately, each from the file's
/// orbitals (see `numbers::optimize`); other requests are skipped with a warning. Before its
/// optimization, the energy of each state's densities in the file's orbitals is checked against
/// its derived expression evaluated as `eval` does. `progress` hears each iteration, with the
/// request it belongs to. Returns the results and the warnings for the user.
pub fn optimize_all(
    program: &Program,
    derivations: &[Checked],
    bindings: &Bindings,
    dump: &IntegralDump,
    controls: Controls,
    max_determinants: usize,
    progress: &dyn Fn(&str),
) -> Result<(Vec<Optimized>, Vec<String>)> {
    let mut warnings = dump.warnings.clone();
    let mut results = vec![];
    for (request, checked) in program.requests.iter().zip(derivations) {
        if request.kind != RequestKind::Energy {
            warnings.push(format!("`{}` is not an energy: optimize skips it", request.text));
            continue;
        }
        let expression = || -> Result<f64> {
            let value = evaluate_request(
                program,
                request,
                checked,
                bindings,
                &dump.integrals,
                &Settings::default(),
                &|_| {},
            )?;
            Ok(value.entries.first().map_or(f64::NAN, |e| e.value))
        };
        let report = |line: &str| progress(&format!("{}: {line}", request.text));
        let result = optimize_request(
            program,
            request,
            bindings,
            dump,
            &expression,
            max_determinants,
            controls,
            &report,
        )?;
        if let Some(nelec) = dump.header.nelec
            && result.electrons != nelec
        {
            warnings.push(format!(
                "`{}` has {} electrons under the bindings, but the integral file was made for NELEC={nelec}",
                result.request, result.electrons
            ));
        }
        warnings.extend(result.warnings.iter().cloned());
        results.push(result);
    }
    Ok((results, warnings))
}

/// The integral file in the optimized orbitals of one result: every integral transformed,
/// the header (ORBSYM, NELEC, MS2) and the constant kept.
pub fn optimized_dump(dump: &IntegralDump, result: &Optimized) -> String {
    write_dump(&dump.header, &rotate_all(&dump.integrals, result.orbitals.as_ref()))
}

/// Optimization results as text: per request its energy, the iterations and final gradient
/// norm, and the free coefficients where the state has any.
pub fn optimized_text(results: &[Optimized]) -> String {
    let mut out = String::new();
    for r in results {
        out.push_str(&format!(
            "{:<32} {:>22}  ({} iterations, gradient norm {:.1e})",
            r.request,
            fixed(r.value),
            r.iterations,
            r.gradient_norm
        ));
        if let Some(c) = &r.coefficients {
            out.push_str(&format!(
                "  at {}",
                c.iter().map(|(n, x)| format!("{n} = {}", fixed(*x))).join(", ")
            ));
        }
        out.push('\n');
    }
    out
}

/// Optimization results as JSON: `{"results": [{"request", "value", "iterations",
/// "gradient_norm", "coefficients" (only for states with free ones)}], "warnings": [...]}`.
pub fn optimized_json(results: &[Optimized], warnings: &[String]) -> String {
    let list: Vec<serde_json::Value> = results
        .iter()
        .map(|r| {
            let mut v = serde_json::json!({"request": r.request, "value": r.value, "iterations": r.iterations,
                "gradient_norm": r.gradient_norm});
            if let Some(c) = &r.coefficients {
                let map: serde_json::Map<String, serde_json::Value> =
                    c.iter().map(|(n, x)| (n.clone(), serde_json::json!(x))).collect();
                v["coefficients"] = map.into();
            }
            v
        })
        .collect();
    serde_json::to_string_pretty(&serde_json::json!({ "results": list, "warnings": warnings }))
        .expect("plain data serializes")
        + "\n"
}

/// What the user should know about an evaluation: what the integral reader assumed, and
/// energies or elements of states whose electron count differs from the file's NELEC (an ion
/// on the neutral molecule's integrals is legitimate, a slip in the bindings is not).
pub fn eval_warnings(dump: &IntegralDump, results: &[Evaluated]) -> Vec<String> {
    let mut out = dump.warnings.clone();
    out.extend(results.iter().flat_map(|r| r.warnings.iter().cloned()));
    if let Some(nelec) = dump.header.nelec {
        for r in results {
            let energies = matches!(
                r.kind,
                RequestKind::Energy | RequestKind::Element | RequestKind::Roots | RequestKind::Shells
            );
            if energies && r.electrons != nelec {
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
        if let Some(roots) = &r.roots {
            out.push_str(&roots_text(&r.request, roots));
            continue;
        }
        if let Some(density) = &r.density {
            out.push_str(&density_text(r, density));
            continue;
        }
        // the free coefficients, after the value: where the energy is stationary, or as set
        let coefficients = |e: &crate::numbers::tabulate::Entry| -> String {
            let at = e.coefficients.iter().map(|(n, x)| format!("{n} = {}", fixed(*x))).join(", ");
            match r.free {
                Some(FreeValue::Stationary) => format!("  stationary at {at}"),
                Some(FreeValue::Set) => format!("  at {at}"),
                None => String::new(),
            }
        };
        if !r.tabulated {
            out.push_str(&format!(
                "{:<32} {:>22}{}\n",
                r.request,
                fixed(r.entries[0].value),
                coefficients(&r.entries[0])
            ));
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
                "  {}  {:>22}{}\n",
                e.indices.iter().map(|(_, m)| format!("{m:>4}")).join(" "),
                fixed(e.value),
                coefficients(e)
            ));
        }
        out.push_str(&omitted_text(&r.omitted));
    }
    out
}

/// The `left out:` lines under a table: each group of rows without a value, and why.
fn omitted_text(omitted: &[Omitted]) -> String {
    omitted
        .iter()
        .map(|o| {
            let rows = if o.count == 1 { "row" } else { "rows" };
            format!("  left out: {} {rows} where {}: {}\n", o.count, equal_text(&o.equal), o.reason)
        })
        .collect()
}

/// The listed elements of a density: its symmetry, then `γ p q value` and `Γ p q r s value`
/// lines, orbitals 1-based; with unbound indices, a line `i=1 j=2` before each assignment's.
fn density_text(r: &Evaluated, density: &DensityValues) -> String {
    let mut out = format!(
        "{}\n  symmetry {}: one element of each related set is listed\n",
        r.request,
        density.symmetry.text()
    );
    for (entry, row) in r.entries.iter().zip(&density.rows) {
        let indent = if r.tabulated {
            out.push_str(&format!("  {}\n", entry.indices.iter().map(|(n, m)| format!("{n}={m}")).join(" ")));
            "    "
        } else {
            "  "
        };
        for (name, elements) in [("γ", &row.one), ("Γ", &row.two)] {
            for e in elements {
                out.push_str(&format!(
                    "{indent}{name} {:<16}  {:>22}\n",
                    e.orbitals.iter().map(|m| format!("{m:>4}")).join(""),
                    fixed(e.value)
                ));
            }
        }
        if row.one.is_empty() && row.two.is_empty() {
            out.push_str(&format!("{indent}every element is zero\n"));
        }
    }
    out.push_str(&omitted_text(&r.omitted));
    out
}

/// Components of a root shown in text: the largest, and the others down to a tenth of it, at
/// most this many.
const SHOWN_COMPONENTS: usize = 5;

/// The roots of a space as text: its size, then each root's value and its largest components
/// (operand, index values, coefficient).
fn roots_text(request: &str, roots: &RootsOut) -> String {
    let mut out = format!("{request}\n");
    out.push_str(&format!(
        "  dimension {} ({} dropped for linear dependence, {} vanishing members left out); {}\n",
        roots.dimension,
        roots.dropped,
        roots.vanishing,
        if roots.roots.len() == roots.dimension {
            format!("all {} roots", roots.dimension)
        } else {
            format!("the {} lowest of {} roots", roots.roots.len(), roots.dimension)
        }
    ));
    for (k, root) in roots.roots.iter().enumerate() {
        out.push_str(&format!("  root {:<4} {:>22}\n", k + 1, fixed(root.value)));
        let largest = root.vector.first().map_or(0.0, |c| c.coefficient.abs());
        for c in root.vector.iter().take(SHOWN_COMPONENTS).filter(|c| c.coefficient.abs() >= largest / 10.0) {
            let indices = c.indices.iter().map(|(n, m)| format!("{n}={m}")).join(" ");
            out.push_str(&format!(
                "      {:>16}  {}{}{}\n",
                format!("{:.8}", c.coefficient),
                c.operand,
                if indices.is_empty() { "" } else { "  " },
                indices
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
            let map = |pairs: &[(String, usize)]| -> serde_json::Map<String, serde_json::Value> {
                pairs.iter().map(|(n, m)| (n.clone(), serde_json::json!(m))).collect()
            };
            // with free coefficients, their values beside each value
            let with_coefficients = |mut v: serde_json::Value, e: &crate::numbers::tabulate::Entry| {
                if r.free.is_some() {
                    let c: serde_json::Map<String, serde_json::Value> =
                        e.coefficients.iter().map(|(n, x)| (n.clone(), serde_json::json!(x))).collect();
                    v["coefficients"] = c.into();
                    v["stationary"] = (r.free == Some(FreeValue::Stationary)).into();
                }
                v
            };
            if let Some(density) = &r.density {
                let rows: Vec<serde_json::Value> = r
                    .entries
                    .iter()
                    .zip(&density.rows)
                    .map(|(e, row)| serde_json::json!({"indices": map(&e.indices), "gamma": row.one, "Gamma": row.two}))
                    .collect();
                match rows.as_slice() {
                    [row] if !r.tabulated => serde_json::json!({"request": r.request, "symmetry": density.symmetry.text(),
                        "gamma": row["gamma"], "Gamma": row["Gamma"]}),
                    _ => serde_json::json!({"request": r.request, "symmetry": density.symmetry.text(),
                        "values": rows, "omitted": r.omitted}),
                }
            } else if let Some(roots) = &r.roots {
                let list: Vec<serde_json::Value> = roots
                    .roots
                    .iter()
                    .map(|root| {
                        let vector: Vec<serde_json::Value> = root
                            .vector
                            .iter()
                            .map(|c| {
                                serde_json::json!({"operand": c.operand, "indices": map(&c.indices), "coefficient": c.coefficient})
                            })
                            .collect();
                        serde_json::json!({"value": root.value, "vector": vector})
                    })
                    .collect();
                serde_json::json!({"request": r.request, "dimension": roots.dimension, "dropped": roots.dropped,
                    "vanishing": roots.vanishing, "roots": list})
            } else if r.tabulated {
                let values: Vec<serde_json::Value> = r
                    .entries
                    .iter()
                    .map(|e| with_coefficients(serde_json::json!({"indices": map(&e.indices), "value": e.value}), e))
                    .collect();
                serde_json::json!({"request": r.request, "values": values, "omitted": r.omitted})
            } else {
                with_coefficients(serde_json::json!({"request": r.request, "value": r.entries[0].value}), &r.entries[0])
            }
        })
        .collect();
    serde_json::to_string_pretty(&serde_json::json!({ "results": list, "warnings": warnings }))
        .expect("plain data serializes")
        + "\n"
}
