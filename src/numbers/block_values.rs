//! The values of a request on pairs of functions with real integrals: a form in free
//! coefficients at their set values or where the energy is stationary, and the roots of a space.

use crate::engine::block_derivation::BlockDerivation;
use crate::engine::derive::Derivation;
use crate::error::{Error, ErrorKind, Result};
use crate::language::block::Function;
use crate::language::program::{Program, Request, RequestKind};
use crate::numbers::bind::{Bindings, electrons};
use crate::numbers::evaluate::{Binding, evaluate};
use crate::numbers::integrals::Integrals;
use crate::numbers::settings::Settings;
use crate::numbers::space::{Operand, PairElement, solve_space};
use crate::numbers::tabulate::{
    ComponentValue, Entry, Evaluated, Exclusion, FreeValue, RootValue, RootsOut, RowValue, equal_blocks,
    table,
};
use std::cell::RefCell;

/// A fixed part whose weight in the stationary state is below this (the state normalized) is
/// taken to have none: the coefficients are then given normalized instead.
const FIXED_WEIGHT_FLOOR: f64 = 1e-8;

/// Evaluates a request on pairs of functions: `roots` by the lowest roots of its space; a
/// request with free coefficients at the values `--set` gives them all, or, for an energy with
/// none set, where it is stationary.
#[allow(clippy::too_many_arguments)]
pub fn evaluate_block(
    program: &Program,
    request: &Request,
    d: &Derivation,
    block: &BlockDerivation,
    bindings: &Bindings,
    ints: &dyn Integrals,
    settings: &Settings,
    progress: &dyn Fn(&str),
) -> Result<Evaluated> {
    if d.kind == RequestKind::Roots {
        return roots(program, request, d, block, bindings, ints, settings, progress);
    }
    let used = block.block.coefficients();
    let name = |c: u32| program.coefficients[c as usize].name.clone();
    let unset: Vec<String> =
        used.iter().filter(|&&c| settings.value(c).is_none()).map(|&c| name(c)).collect();
    let excluded = |equal: &[Vec<u32>], b: &Binding| vanishing(d, block, equal, b);
    if unset.is_empty() {
        let values: Vec<(u32, f64)> =
            used.iter().map(|&c| (c, settings.value(c).expect("every one is set"))).collect();
        let value = |b: &Binding| at_values(program, d, block, &values, b, ints);
        let mut out = table(program, request, d, bindings, &excluded, &value)?;
        out.free = Some(FreeValue::Set);
        return Ok(out);
    }
    if d.kind != RequestKind::Energy || unset.len() != used.len() {
        let why = if d.kind == RequestKind::Energy {
            "set every one for the energy there, or none for the stationary energy"
        } else {
            "an element or overlap has a value only where every free coefficient has one"
        };
        return Err(Error::new(ErrorKind::Unset {
            request: d.text.clone(),
            unset: unset.join(", "),
            why: why.into(),
        }));
    }
    let warnings = RefCell::new(vec![]);
    // each part is one function with no index of its own: every index is fixed in a row, where
    // the derivations hold (a row --distinct excludes never gets here)
    let pairs: Vec<Derivation> =
        block.pairs.iter().map(|p| Derivation { distinct: false, ..p.clone() }).collect();
    let elements: Vec<PairElement> = block
        .block
        .pairs
        .iter()
        .zip(&pairs)
        .map(|(p, derivation)| PairElement { row: p.row, column: p.column, derivation, renamed: vec![] })
        .collect();
    let operands: Vec<Operand> =
        block.block.rows.iter().map(|f| Operand { label: f.label.clone(), indices: vec![] }).collect();
    let value = |b: &Binding| -> Result<RowValue> {
        let space = solve_space(program, &operands, &elements, b, ints, 1, progress)?;
        let root =
            space.roots.first().ok_or_else(|| Error::new(ErrorKind::ZeroNorm { state: d.bra.clone() }))?;
        let mut c = vec![0.0; operands.len()];
        for component in &root.vector {
            c[component.operand] = component.coefficient;
        }
        let (coefficients, warning) = stationary_coefficients(program, &d.text, &block.block.rows, &c);
        warnings.borrow_mut().extend(warning);
        Ok((root.value, coefficients))
    };
    let mut out = table(program, request, d, bindings, &excluded, &value)?;
    out.free = Some(FreeValue::Stationary);
    out.warnings = warnings.into_inner();
    out.warnings.dedup();
    Ok(out)
}

/// (name, value) of every free coefficient of a stationary state whose functions have the
/// coefficients `c`: rescaled so that the fixed part keeps its written weight 1, or, without a
/// fixed part (or where it has no weight, which a warning then says), with the largest
/// coefficient positive.
pub(crate) fn stationary_coefficients(
    program: &Program,
    request: &str,
    functions: &[Function],
    c: &[f64],
) -> (Vec<(String, f64)>, Option<String>) {
    let mut warning = None;
    let scale = match functions.iter().position(|f| f.coefficient.is_none()) {
        Some(k) if c[k].abs() > FIXED_WEIGHT_FLOOR => 1.0 / c[k],
        fixed => {
            if fixed.is_some() {
                warning = Some(format!(
                    "`{request}`: the state where the energy is stationary has no fixed part, so its written weight cannot be kept; its coefficients are given normalized"
                ));
            }
            let largest = c.iter().copied().fold(0.0f64, |a, x| if x.abs() > a.abs() { x } else { a });
            largest.signum()
        }
    };
    (coefficient_values(program, functions, c, scale), warning)
}

/// (name, value) of every free coefficient of the functions, their coefficients in the
/// stationary state being `c` times `scale`.
fn coefficient_values(
    program: &Program,
    functions: &[Function],
    c: &[f64],
    scale: f64,
) -> Vec<(String, f64)> {
    functions
        .iter()
        .zip(c)
        .filter_map(|(f, &x)| {
            f.coefficient.map(|k| (program.coefficients[k as usize].name.clone(), x * scale + 0.0))
        })
        .collect()
}

/// Why a row has no value: --distinct puts two letters on one orbital, or every part of the bra
/// (or of the ket) vanishes there. A part vanishes where a pair it belongs to records it as
/// vanishing (the bra is recorded when both do, so a ket is found through a bra that does not).
fn vanishing<'d>(
    d: &'d Derivation,
    block: &BlockDerivation,
    equal: &[Vec<u32>],
    b: &Binding,
) -> Option<Exclusion<'d>> {
    if d.distinct {
        return (!equal.is_empty()).then_some(Exclusion::Distinct);
    }
    let vanishes = |f: &Function| {
        block.pairs.iter().any(|p| {
            p.vanishing.iter().any(|v| v.state == f.label && v.equal == equal_blocks(&p.free_indices, b))
        })
    };
    if block.block.rows.iter().all(vanishes) {
        Some(Exclusion::Vanishes(&d.bra))
    } else if block.block.columns.iter().all(vanishes) {
        Some(Exclusion::Vanishes(&d.ket))
    } else {
        None
    }
}

/// The value at set coefficients: Σ monomial × (<f|H|g> + constant <f|g>) for an element,
/// divided by Σ monomial × <f|g> for an energy; Σ monomial × <f|g> for an overlap.
fn at_values(
    program: &Program,
    d: &Derivation,
    block: &BlockDerivation,
    values: &[(u32, f64)],
    b: &Binding,
    ints: &dyn Integrals,
) -> Result<RowValue> {
    let value_of = |c: &u32| values.iter().find(|(k, _)| k == c).map_or(0.0, |&(_, x)| x);
    let (mut h, mut s) = (0.0, 0.0);
    for m in block.monomials() {
        let factor = m.coefficients.iter().map(value_of).product::<f64>() * f64::from(m.weight);
        h += factor * evaluate(&m.value, b, ints);
        s += factor * evaluate(&m.overlap, b, ints);
    }
    let value = match d.kind {
        RequestKind::Overlap => s,
        RequestKind::Energy if s == 0.0 => {
            return Err(Error::new(ErrorKind::ZeroNorm { state: format!("{} at the values set", d.bra) }));
        }
        RequestKind::Energy => h / s + ints.constant(),
        _ => h + ints.constant() * s,
    };
    let coefficients =
        values.iter().map(|&(c, x)| (program.coefficients[c as usize].name.clone(), x)).collect();
    Ok((value, coefficients))
}

/// The lowest roots of a `roots` space: its operands expanded over their unbound indices.
#[allow(clippy::too_many_arguments)]
fn roots(
    program: &Program,
    request: &Request,
    d: &Derivation,
    block: &BlockDerivation,
    bindings: &Bindings,
    ints: &dyn Integrals,
    settings: &Settings,
    progress: &dyn Fn(&str),
) -> Result<Evaluated> {
    let (binding, unbound) = bindings.for_request(program, request)?;
    let functions = &block.block.rows;
    let operands: Vec<Operand> = functions
        .iter()
        .map(|f| Operand {
            label: f.label.clone(),
            indices: f.indices.iter().copied().filter(|k| unbound.contains(k)).collect(),
        })
        .collect();
    let elements: Vec<PairElement> = block
        .block
        .pairs
        .iter()
        .zip(&block.pairs)
        .map(|(p, derivation)| PairElement {
            row: p.row,
            column: p.column,
            derivation,
            renamed: p.renamed.clone(),
        })
        .collect();
    let space = solve_space(program, &operands, &elements, &binding, ints, settings.roots, progress)?;
    let roots: Vec<RootValue> = space
        .roots
        .iter()
        .map(|r| RootValue {
            value: r.value + 0.0,
            vector: r
                .vector
                .iter()
                .map(|c| ComponentValue {
                    operand: functions[c.operand].label.clone(),
                    indices: c.indices.clone(),
                    coefficient: c.coefficient + 0.0,
                })
                .collect(),
        })
        .collect();
    Ok(Evaluated {
        request: d.text.clone(),
        kind: d.kind,
        columns: vec![],
        entries: roots
            .iter()
            .enumerate()
            .map(|(k, r)| Entry {
                indices: vec![("root".into(), k + 1)],
                value: r.value,
                coefficients: vec![],
            })
            .collect(),
        omitted: vec![],
        tabulated: false,
        electrons: electrons(request, &binding),
        free: None,
        roots: Some(RootsOut {
            dimension: space.dimension,
            dropped: space.dropped,
            vanishing: space.vanishing,
            roots,
        }),
        density: None,
        warnings: vec![],
    })
}
