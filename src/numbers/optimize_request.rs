//! One `energy` request through `optimize`: its state under the bindings as functions over
//! the orbitals it touches, checked against its derived energy, optimized, and reported.

use crate::check::brute_force::{MAX_ORBITALS, dot, state_vector};
use crate::error::{Change, Error, ErrorKind, Limit, Result};
use crate::language::program::{Program, Request, State};
use crate::numbers::bind::{Bindings, electrons};
use crate::numbers::block_values::stationary_coefficients;
use crate::numbers::evaluate::Binding;
use crate::numbers::fcidump::IntegralDump;
use crate::numbers::generalized_fock::{generalized_fock, gradient};
use crate::numbers::integrals::Integrals;
use crate::numbers::optimize::{Controls, Model, not_converged, optimize};
use crate::numbers::rotation::non_redundant;
use crate::numbers::transform::rotate;
use faer::{Mat, MatRef};

/// The result of one request.
#[derive(Clone, Debug)]
pub struct Optimized {
    pub request: String,
    /// The total energy at the optimized orbitals.
    pub value: f64,
    pub iterations: usize,
    pub gradient_norm: f64,
    /// For a state with free coefficients: their values, as `eval` gives a stationary energy's.
    pub coefficients: Option<Vec<(String, f64)>>,
    /// The optimized orbitals as columns over the file's orbitals.
    pub orbitals: Mat<f64>,
    /// The number of electrons of the state under the bindings.
    pub electrons: usize,
    pub warnings: Vec<String>,
}

/// The binding with every orbital it uses renumbered 0, 1, … in ascending order of the file's
/// numbers (so that the state's vector fits `MAX_ORBITALS` whatever the file's size), and the
/// file orbitals in that order.
fn compact(binding: &Binding) -> (Binding, Vec<usize>) {
    let mut used: Vec<usize> = binding
        .orbitals
        .iter()
        .copied()
        .filter(|&p| p != usize::MAX)
        .chain(binding.spaces.iter().flatten().copied())
        .chain(binding.indices.iter().flatten().copied())
        .collect();
    used.sort_unstable();
    used.dedup();
    let at = |p: usize| used.binary_search(&p).expect("every orbital of the binding is listed");
    let renumbered = Binding {
        orbitals: binding.orbitals.iter().map(|&p| if p == usize::MAX { p } else { at(p) }).collect(),
        spaces: binding.spaces.iter().map(|s| s.iter().map(|&p| at(p)).collect()).collect(),
        indices: binding.indices.iter().map(|i| i.map(at)).collect(),
    };
    (renumbered, used)
}

/// The functions of a request's state: (the free coefficient multiplying it, the state), one
/// fixed function for a state without free coefficients.
fn functions(request: &Request) -> Vec<(Option<u32>, &State)> {
    match &request.block {
        Some(block) => block.rows.iter().map(|f| (f.coefficient, &f.state)).collect(),
        None => vec![(None, &request.bra)],
    }
}

/// A request's state ready for orbital optimization: its functions over the orbitals it
/// touches, their transition densities, and the non-redundant rotations.
#[derive(Clone, Debug)]
pub struct Prepared {
    model: Model,
    pairs: Vec<(usize, usize)>,
    /// The functions with a non-zero vector under the bindings, by position among all.
    kept: Vec<usize>,
    functions: usize,
    electrons: usize,
}

impl Prepared {
    /// The pairs (p, q), p > q, of file orbitals (0-based) whose rotations are optimized.
    pub fn pairs(&self) -> &[(usize, usize)] {
        &self.pairs
    }

    /// The total energy (the lowest over the functions' span) and its gradient dE/dκ_pq over
    /// `pairs`, at the orbitals given as columns over the file's orbitals.
    pub fn energy_gradient(
        &self,
        ints: &dyn Integrals,
        orbitals: MatRef<'_, f64>,
    ) -> Result<(f64, Vec<f64>)> {
        let rotated = rotate(ints, orbitals, &self.model.active);
        let point = self.model.at(&rotated)?;
        Ok((point.energy, gradient(&generalized_fock(&point.density, &rotated), &self.pairs)))
    }
}

/// Prepares one `energy` request for optimization under the bindings: every generic index
/// bound, the state expanded (within `max_determinants`) and touching at most `MAX_ORBITALS`
/// orbitals; rotations between orbitals of different ORBSYM labels are left out.
pub fn prepare(
    program: &Program,
    request: &Request,
    bindings: &Bindings,
    dump: &IntegralDump,
    max_determinants: usize,
) -> Result<Prepared> {
    let (binding, unbound) = bindings.for_request(program, request)?;
    if !unbound.is_empty() {
        let names: Vec<&str> = unbound.iter().map(|&k| program.indices[k as usize].name.as_str()).collect();
        return Err(Error::at(
            ErrorKind::UnboundIndices { request: request.text.clone(), names: names.join(", ") },
            &request.span,
        ));
    }
    let (local, active) = compact(&binding);
    if active.len() > MAX_ORBITALS {
        return Err(Error::at(
            ErrorKind::TooLarge {
                what: format!("`{}` touches", request.text),
                count: active.len().to_string(),
                limit: Box::new(Limit {
                    value: MAX_ORBITALS as u128,
                    unit: "orbitals",
                    change: Change::Fixed("the state's densities are taken from its vector over occupation bit strings, which hold 64 spatial orbitals".into()),
                }),
            },
            &request.span,
        ));
    }
    let functions = functions(request);
    if let Some((_, state)) = functions.iter().find(|(_, s)| s.is_unexpanded()) {
        let determinants = state.coupling.as_ref().map_or(String::new(), |c| c.determinants.to_string());
        return Err(Error::at(
            ErrorKind::TooLarge {
                what: format!("optimize needs the determinants of `{}`, which spans", request.bra_text),
                count: determinants,
                limit: Box::new(Limit {
                    value: max_determinants as u128,
                    unit: "determinants",
                    change: Change::Option { option: "--max-determinants", or: None },
                }),
            },
            &request.span,
        ));
    }
    // functions that vanish under the bindings span nothing; their coefficients are reported as 0
    let vectors: Vec<_> = functions.iter().map(|(_, s)| state_vector(s, &local)).collect();
    let kept: Vec<usize> = (0..vectors.len()).filter(|&k| dot(&vectors[k], &vectors[k]) > 0.0).collect();
    if kept.is_empty() {
        return Err(Error::at(ErrorKind::ZeroNorm { state: request.bra_text.clone() }, &request.span));
    }
    let spanning: Vec<_> = kept.iter().map(|&k| vectors[k].clone()).collect();
    let model = Model::new(&spanning, active.clone());
    let pairs = non_redundant(&spanning, &active, dump.header.norb, dump.header.orbsym.as_deref());
    Ok(Prepared { model, pairs, kept, functions: functions.len(), electrons: electrons(request, &binding) })
}

/// Optimizes the orbitals for one `energy` request. `expression` gives its energy from the
/// derived (verified) expression with the file's integrals in the file's orbitals, which the
/// densities must reproduce (to 1e-9 relative) before anything is optimized.
#[allow(clippy::too_many_arguments)]
pub fn optimize_request(
    program: &Program,
    request: &Request,
    bindings: &Bindings,
    dump: &IntegralDump,
    expression: &dyn Fn() -> Result<f64>,
    max_determinants: usize,
    controls: Controls,
    report: &dyn Fn(&str),
) -> Result<Optimized> {
    let prepared = prepare(program, request, bindings, dump, max_determinants)?;
    let expression = expression()?;
    let ints = &dump.integrals;
    let n = dump.header.norb;
    let (start, _) = prepared.energy_gradient(ints, Mat::<f64>::identity(n, n).as_ref())?;
    if (start - expression).abs() > 1e-9 * expression.abs().max(1.0) {
        return Err(Error::at(
            ErrorKind::DensityMismatch { request: request.text.clone(), density: start, expression },
            &request.span,
        ));
    }
    let outcome = optimize(&prepared.model, ints, &prepared.pairs, controls, report)?;
    if !outcome.converged {
        return Err(not_converged(&request.text, &outcome, controls));
    }
    let mut warnings = vec![];
    let coefficients = request.block.as_ref().map(|block| {
        let mut c = vec![0.0; prepared.functions];
        for (&k, &x) in prepared.kept.iter().zip(&outcome.coefficients) {
            c[k] = x;
        }
        let (values, warning) = stationary_coefficients(program, &request.text, &block.rows, &c);
        warnings.extend(warning);
        values
    });
    Ok(Optimized {
        request: request.text.clone(),
        value: outcome.energy,
        iterations: outcome.iterations,
        gradient_norm: outcome.gradient_norm,
        coefficients,
        orbitals: outcome.orbitals,
        electrons: prepared.electrons,
        warnings,
    })
}

/// The orbitals file: a first line naming the format, comment lines (`#`), a line `norb N`,
/// then N rows of N numbers: row μ holds the coefficients of the file's orbital μ in the new
/// orbitals 1..N (so column p is new orbital p in the file's basis), 17 significant digits.
pub fn orbitals_text(result: &Optimized) -> String {
    let n = result.orbitals.nrows();
    let mut out = String::from("spinfold-orbitals 1\n");
    out.push_str(
        "# new orbitals as columns over the integral file's orbitals: phi'_p = sum_mu phi_mu C[mu][p]\n",
    );
    out.push_str(&format!("# request: {}\n# energy: {:.12}\n", result.request, result.value));
    out.push_str(&format!("norb {n}\n"));
    for m in 0..n {
        let row: Vec<String> = (0..n).map(|p| format!("{:.16e}", result.orbitals[(m, p)])).collect();
        out.push_str(&row.join(" "));
        out.push('\n');
    }
    out
}
