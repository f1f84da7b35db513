//! The numbers of a symbolic density under bindings: its non-zero elements, one of each set
//! related by the density's symmetry, with 1-based orbital numbers, per assignment of its
//! unbound generic indices.

use crate::engine::density::Symmetry;
use crate::engine::derive::Derivation;
use crate::error::Result;
use crate::language::program::{Program, Request};
use crate::numbers::bind::Bindings;
use crate::numbers::evaluate::{Binding, density_elements};
use crate::numbers::tabulate::{Evaluated, exclusion, table};
use std::cell::RefCell;

/// Elements smaller than this in magnitude are zeros left by floating-point cancellation.
const ZERO: f64 = 1e-12;

/// One element: its orbitals (1-based, γ_pq as [p, q], Γ_pqrs as [p, q, r, s]) and value.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ElementValue {
    pub orbitals: Vec<usize>,
    pub value: f64,
}

/// The listed elements of a density, one row per assignment of its unbound generic indices
/// (the rows of `Evaluated::entries`, in order, whose values are the traces Σ_p γ_pp).
#[derive(Clone, Debug, PartialEq)]
pub struct DensityValues {
    pub symmetry: Symmetry,
    pub rows: Vec<DensityRow>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct DensityRow {
    pub one: Vec<ElementValue>,
    pub two: Vec<ElementValue>,
}

/// The images of concrete orbitals under a density's symmetry.
fn images(symmetry: Symmetry, o: &[usize]) -> Vec<Vec<usize>> {
    match (symmetry, o) {
        (Symmetry::Expectation, &[p, q]) => vec![vec![p, q], vec![q, p]],
        (Symmetry::Transition, &[p, q, r, s]) => vec![vec![p, q, r, s], vec![r, s, p, q]],
        (Symmetry::Expectation, &[p, q, r, s]) => {
            vec![vec![p, q, r, s], vec![r, s, p, q], vec![q, p, s, r], vec![s, r, q, p]]
        }
        _ => vec![o.to_vec()],
    }
}

/// A density request evaluated, over every assignment of its unbound generic indices; the
/// value of each row is the trace of γ (the number of electrons, for `density S`).
pub fn density_values(
    program: &Program,
    request: &Request,
    d: &Derivation,
    symmetry: Symmetry,
    bindings: &Bindings,
) -> Result<Evaluated> {
    let rows = RefCell::new(vec![]);
    let value = |b: &Binding| {
        let elements = density_elements(&d.value, b);
        let trace = elements.one.iter().filter(|(k, _)| k[0] == k[1]).map(|(_, v)| v).sum();
        let listed = |map: Vec<(Vec<usize>, f64)>| -> Vec<ElementValue> {
            map.into_iter()
                .filter(|(o, v)| v.abs() > ZERO && images(symmetry, o).iter().min() == Some(o))
                .map(|(o, value)| ElementValue {
                    orbitals: o.iter().map(|m| m + 1).collect(),
                    value: value + 0.0,
                })
                .collect()
        };
        rows.borrow_mut().push(DensityRow {
            one: listed(elements.one.iter().map(|(k, &v)| (k.to_vec(), v)).collect()),
            two: listed(elements.two.iter().map(|(k, &v)| (k.to_vec(), v)).collect()),
        });
        Ok((trace, vec![]))
    };
    let mut out = table(program, request, d, bindings, &|equal, _| exclusion(d, equal), &value)?;
    out.density = Some(DensityValues { symmetry, rows: rows.into_inner() });
    Ok(out)
}
