//! A space of functions with real integrals: every operand's members enumerated over their
//! bound indices, H and S assembled from the derived pair elements, and their lowest roots.

use crate::engine::derive::Derivation;
use crate::error::{Error, ErrorKind, Result};
use crate::language::orbital::SpaceId;
use crate::language::program::Program;
use crate::numbers::compiled::{CompiledExprs, Tables};
use crate::numbers::eigen::{self, Entry, Pencil};
use crate::numbers::evaluate::Binding;
use crate::numbers::integrals::Integrals;
use itertools::Itertools;
use rayon::prelude::*;
use std::time::{Duration, Instant};

pub use crate::numbers::eigen::DEPENDENCE_THRESHOLD;

/// The most members (functions before vanishing ones and linear dependence are removed) a
/// space may have: every pair of them is evaluated.
pub const MEMBER_LIMIT: usize = 30_000;

/// One function type of a space: an operand of `roots` or a part of a state with free
/// coefficients. Its members are its generic indices run over their bound spaces.
#[derive(Clone, Debug, PartialEq)]
pub struct Operand {
    /// As written (`ref[i -> a]`, `S`, or for a part its coefficient name `cg`).
    pub label: String,
    /// The program's generic indices this operand's members run over (bra side), in
    /// declaration order; indices fixed by --bind are not listed here but set in the binding.
    pub indices: Vec<u32>,
}

/// <member of operand `row`|H|member of operand `column`> for row <= column, derived with the
/// column operand's generic indices renamed apart from the row's (`renamed`: original index of
/// the column operand -> index used in the derivation; empty when no renaming was needed).
#[derive(Clone, Debug)]
pub struct PairElement<'a> {
    pub row: usize,
    pub column: usize,
    /// value: <f|H|g> electronic; overlap: <f|g>.
    pub derivation: &'a Derivation,
    pub renamed: Vec<(u32, u32)>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct SpaceRoots {
    /// Functions kept after members that vanish and linear dependence are removed.
    pub dimension: usize,
    /// Functions dropped for linear dependence (overlap eigenvalues below DEPENDENCE_THRESHOLD).
    pub dropped: usize,
    /// Members with zero norm (states that vanish for those index values), left out.
    pub vanishing: usize,
    /// Ascending; total energies (the integral file's constant included).
    pub roots: Vec<Root>,
    /// Where the time went.
    pub timing: Timing,
}

/// The wall time of each stage of `solve_space`.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Timing {
    /// Members enumerated, elements compiled and H and S assembled.
    pub assembly: Duration,
    pub orthogonalization: Duration,
    pub diagonalization: Duration,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Root {
    pub value: f64,
    /// The members with a non-zero coefficient, by |coefficient| descending (ties in member
    /// order).
    pub vector: Vec<Component>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Component {
    pub operand: usize,
    /// index name → 1-based orbital number, in the operand's index order.
    pub indices: Vec<(String, usize)>,
    pub coefficient: f64,
}

/// A member of an operand: orbital numbers (0-based) for its indices.
#[derive(Clone, Debug, PartialEq)]
struct Member {
    operand: usize,
    values: Vec<usize>,
}

/// Every member of every operand, operand by operand; within one, the last index runs fastest.
fn members(program: &Program, operands: &[Operand], binding: &Binding) -> Vec<Member> {
    let mut out = vec![];
    for (operand, o) in operands.iter().enumerate() {
        let ranges =
            o.indices.iter().map(|&k| binding.spaces[program.indices[k as usize].space as usize].clone());
        // with no index, the one empty assignment
        for values in ranges.multi_cartesian_product() {
            out.push(Member { operand, values });
        }
    }
    out
}

/// A pair element compiled: <p|H|q> electronic and <p|q> together.
struct CompiledPair<'e, 't> {
    element: &'e PairElement<'e>,
    exprs: CompiledExprs<'e, 't, 2>,
}

/// Evaluates <p|H|q> and <p|q> for members p, q of operands row <= column.
struct Evaluator<'p, 't> {
    program: &'p Program,
    operands: &'p [Operand],
    members: &'p [Member],
    /// The binding with room for every index the pair elements use.
    binding: Binding,
    constant: f64,
    /// By (row operand, column operand), row <= column.
    pairs: Vec<Vec<Option<CompiledPair<'p, 't>>>>,
}

/// A worker's binding and scratch space.
struct Scratch {
    binding: Binding,
    key: Vec<u16>,
}

impl<'p, 't> Evaluator<'p, 't> {
    fn new(
        program: &'p Program,
        operands: &'p [Operand],
        members: &'p [Member],
        elements: &'p [PairElement<'p>],
        binding: Binding,
        tables: &'t Tables<'t>,
        constant: f64,
    ) -> Result<Evaluator<'p, 't>> {
        let mut pairs: Vec<Vec<Option<CompiledPair>>> =
            (0..operands.len()).map(|_| (0..operands.len()).map(|_| None).collect()).collect();
        for element in elements {
            let d = element.derivation;
            if d.distinct {
                return Err(Error::new(ErrorKind::DistinctSpace { request: d.text.clone() }));
            }
            let exprs = CompiledExprs::new([&d.value, &d.overlap], tables);
            pairs[element.row][element.column] = Some(CompiledPair { element, exprs });
        }
        Ok(Evaluator { program, operands, members, binding, constant, pairs })
    }

    fn scratch(&self) -> Scratch {
        Scratch { binding: self.binding.clone(), key: vec![] }
    }

    fn pair(&self, row: usize, column: usize) -> &CompiledPair<'p, 't> {
        self.pairs[row][column]
            .as_ref()
            .expect("solve_space is given a pair element for every pair of operands")
    }

    /// Sets the indices of member p as the row of a pair.
    fn set_row(&self, scratch: &mut Scratch, p: usize) {
        let m = &self.members[p];
        for (&k, &v) in self.operands[m.operand].indices.iter().zip(&m.values) {
            scratch.binding.indices[k as usize] = Some(v);
        }
    }

    /// Sets the renamed indices of the column operand that the user fixed.
    fn set_fixed(&self, scratch: &mut Scratch, pair: &CompiledPair) {
        let listed = &self.operands[pair.element.column].indices;
        for &(from, to) in pair.element.renamed.iter().filter(|(from, _)| !listed.contains(from)) {
            scratch.binding.indices[to as usize] = self.binding.indices[from as usize];
        }
    }

    /// (H including constant × S, S) for the row set before and member q as the column.
    fn column(&self, scratch: &mut Scratch, pair: &CompiledPair, p: usize, q: usize) -> Result<(f64, f64)> {
        let m = &self.members[q];
        let renamed = &pair.element.renamed;
        for (&k, &v) in self.operands[m.operand].indices.iter().zip(&m.values) {
            let to = renamed.iter().find(|(from, _)| *from == k).map_or(k, |&(_, to)| to);
            scratch.binding.indices[to as usize] = Some(v);
        }
        let [value, s] = pair.exprs.values(&scratch.binding, &mut scratch.key);
        let h = value + self.constant * s;
        if h.is_finite() && s.is_finite() {
            return Ok((h, s));
        }
        let names = |m: &Member| {
            self.operands[m.operand]
                .indices
                .iter()
                .zip(&m.values)
                .map(|(&k, &v)| format!("{}={}", self.program.indices[k as usize].name, v + 1))
                .join(", ")
        };
        Err(Error::new(ErrorKind::NonFinite {
            request: pair.element.derivation.text.clone(),
            value: if h.is_finite() { s } else { h }.to_string(),
            row: format!(" at ({}; {})", names(&self.members[p]), names(m)),
        }))
    }

    /// <p|p>.
    fn norm(&self, scratch: &mut Scratch, p: usize) -> Result<f64> {
        let operand = self.members[p].operand;
        let pair = self.pair(operand, operand);
        self.set_row(scratch, p);
        self.set_fixed(scratch, pair);
        self.column(scratch, pair, p, p).map(|(_, s)| s)
    }

    /// The non-zero entries of row p of H and S on and above the diagonal, over the members
    /// `kept` (ascending; p among them at position `at`).
    fn row(&self, scratch: &mut Scratch, kept: &[usize], at: usize) -> Result<Vec<Entry>> {
        let p = kept[at];
        let row_operand = self.members[p].operand;
        self.set_row(scratch, p);
        let mut out = vec![];
        let mut current = usize::MAX;
        for (column, &q) in kept.iter().enumerate().skip(at) {
            let operand = self.members[q].operand;
            let pair = self.pair(row_operand, operand);
            if operand != current {
                self.set_fixed(scratch, pair);
                current = operand;
            }
            let (h, s) = self.column(scratch, pair, p, q)?;
            if h != 0.0 || s != 0.0 {
                out.push(Entry { column: column as u32, h, s });
            }
        }
        Ok(out)
    }
}

/// Rows of the upper triangle in parallel, in chunks of about equal work, with progress
/// between chunks; the result does not depend on the number of threads.
fn assemble(evaluator: &Evaluator, kept: &[usize], progress: &dyn Fn(&str)) -> Result<Pencil> {
    let n = kept.len();
    let total: usize = n * (n + 1) / 2;
    let mut rows = Vec::with_capacity(n);
    let mut start = 0;
    while start < n {
        let (mut end, mut work) = (start, 0);
        while end < n && work * CHUNKS < total.max(1) {
            work += n - end;
            end += 1;
        }
        let chunk: Vec<Result<Vec<Entry>>> = (start..end)
            .into_par_iter()
            .map_init(|| evaluator.scratch(), |scratch, at| evaluator.row(scratch, kept, at))
            .collect();
        for row in chunk {
            rows.push(row?);
        }
        let done: usize = total - (n - end) * (n - end + 1) / 2;
        progress(&format!("assembling H and S over {n} functions: {}%", 100 * done / total.max(1)));
        start = end;
    }
    Ok(Pencil { rows })
}

/// The number of progress steps of the assembly.
const CHUNKS: usize = 50;

/// Expands every operand over its indices (bound spaces from `binding`; indices fixed by the
/// user are already set in `binding.indices`), drops zero-norm members, assembles H and S from
/// the pair elements (H_ij includes constant × S_ij), removes linear dependence by canonical
/// orthogonalization, and returns the `count` lowest roots with their vectors in the members'
/// basis, normalized to C^T S C = 1.
pub fn solve_space(
    program: &Program,
    operands: &[Operand],
    elements: &[PairElement],
    binding: &Binding,
    ints: &dyn Integrals,
    count: usize,
    progress: &dyn Fn(&str),
) -> Result<SpaceRoots> {
    let start = Instant::now();
    let all = members(program, operands, binding);
    if all.len() > MEMBER_LIMIT {
        return Err(eigen::too_large(all.len(), MEMBER_LIMIT));
    }
    // room for the indices the column operands are renamed to, which run over the spaces of
    // the indices they stand for
    let mut full = binding.clone();
    let mut space_of: Vec<SpaceId> = program.indices.iter().map(|i| i.space).collect();
    for e in elements {
        for &(from, to) in &e.renamed {
            if to as usize >= space_of.len() {
                space_of.resize(to as usize + 1, 0);
                space_of[to as usize] = space_of[from as usize];
            }
        }
    }
    full.indices.resize(space_of.len().max(full.indices.len()), None);
    let tables = Tables::new(binding, ints, space_of);
    let evaluator = Evaluator::new(program, operands, &all, elements, full, &tables, ints.constant())?;
    let mut scratch = evaluator.scratch();
    let mut kept = vec![];
    for p in 0..all.len() {
        if evaluator.norm(&mut scratch, p)? > 0.0 {
            kept.push(p);
        }
    }
    let vanishing = all.len() - kept.len();
    let pencil = assemble(&evaluator, &kept, progress)?;
    let assembly = start.elapsed();
    let solution = eigen::lowest_roots(&pencil, count, progress)?;
    let component = |m: &Member, coefficient: f64| Component {
        operand: m.operand,
        indices: operands[m.operand]
            .indices
            .iter()
            .zip(&m.values)
            .map(|(&k, &v)| (program.indices[k as usize].name.clone(), v + 1))
            .collect(),
        coefficient,
    };
    let roots = solution
        .values
        .iter()
        .zip(&solution.vectors)
        .map(|(&value, c)| {
            let order = (0..kept.len())
                .filter(|&p| c[p] != 0.0)
                .sorted_by(|&a, &b| c[b].abs().total_cmp(&c[a].abs()));
            Root { value, vector: order.map(|p| component(&all[kept[p]], c[p])).collect() }
        })
        .collect();
    Ok(SpaceRoots {
        dimension: solution.dimension,
        dropped: solution.dropped,
        vanishing,
        roots,
        timing: Timing {
            assembly,
            orthogonalization: solution.orthogonalization,
            diagonalization: solution.diagonalization,
        },
    })
}
