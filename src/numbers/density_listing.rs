//! The numbers of a symbolic density under bindings: its non-zero elements, one of each set
//! related by the density's symmetry, with 1-based orbital numbers.

use crate::engine::density::Symmetry;
use crate::engine::derive::Derivation;
use crate::error::{Error, ErrorKind, Result};
use crate::language::program::{Program, Request};
use crate::numbers::bind::{Bindings, electrons};
use crate::numbers::evaluate::density_elements;
use crate::numbers::tabulate::{Evaluated, equal_blocks, exclusion, refusal};

/// Elements smaller than this in magnitude are zeros left by floating-point cancellation.
const ZERO: f64 = 1e-12;

/// One element: its orbitals (1-based, γ_pq as [p, q], Γ_pqrs as [p, q, r, s]) and value.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct ElementValue {
    pub orbitals: Vec<usize>,
    pub value: f64,
}

/// The listed elements of a density.
#[derive(Clone, Debug, PartialEq)]
pub struct DensityValues {
    pub symmetry: Symmetry,
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

/// A density request evaluated: every generic index must be bound.
pub fn density_values(
    program: &Program,
    request: &Request,
    d: &Derivation,
    symmetry: Symmetry,
    bindings: &Bindings,
) -> Result<Evaluated> {
    let (binding, unbound) = bindings.for_request(program, request)?;
    if !unbound.is_empty() {
        let names: Vec<String> = unbound.iter().map(|&k| program.indices[k as usize].name.clone()).collect();
        return Err(Error::new(ErrorKind::Binding {
            why: format!(
                "`{}` lists density elements for one orbital of each generic index, but {} {} not bound",
                d.text,
                names.join(", "),
                if names.len() == 1 { "is" } else { "are" }
            ),
        }));
    }
    let equal = equal_blocks(&d.free_indices, &binding);
    if let Some(why) = exclusion(d, &equal) {
        let name = |k: u32| program.indices[k as usize].name.clone();
        let bound = equal
            .iter()
            .flatten()
            .map(|&k| format!("--bind {}={}", name(k), binding.indices[k as usize].map_or(0, |m| m + 1)))
            .collect::<Vec<_>>()
            .join(" ");
        let text: Vec<String> =
            equal.iter().map(|b| b.iter().map(|&k| name(k)).collect::<Vec<_>>().join(" = ")).collect();
        return Err(refusal(d, why, bound, text.join(" and ")));
    }
    let elements = density_elements(&d.value, &binding);
    let listed = |map: Vec<(Vec<usize>, f64)>| -> Vec<ElementValue> {
        map.into_iter()
            .filter(|(o, v)| v.abs() > ZERO && images(symmetry, o).iter().min() == Some(o))
            .map(|(o, value)| ElementValue {
                orbitals: o.iter().map(|m| m + 1).collect(),
                value: value + 0.0,
            })
            .collect()
    };
    let one = listed(elements.one.iter().map(|(k, &v)| (k.to_vec(), v)).collect());
    let two = listed(elements.two.iter().map(|(k, &v)| (k.to_vec(), v)).collect());
    Ok(Evaluated {
        request: d.text.clone(),
        kind: d.kind,
        columns: vec![],
        entries: vec![],
        omitted: vec![],
        tabulated: false,
        electrons: electrons(request, &binding),
        free: None,
        roots: None,
        density: Some(DensityValues { symmetry, one, two }),
        warnings: vec![],
    })
}
