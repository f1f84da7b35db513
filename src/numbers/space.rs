//! A space of functions with real integrals: every operand's members enumerated over their
//! bound indices, H and S assembled from the derived pair elements, and their lowest roots.

use crate::engine::derive::Derivation;
use crate::error::{Error, ErrorKind, Result};
use crate::language::program::Program;
use crate::numbers::eigen::{self, Entry, Pencil};
use crate::numbers::evaluate::{Binding, evaluate};
use crate::numbers::integrals::Integrals;
use itertools::Itertools;
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

/// The pair elements by (row operand, column operand), row <= column.
struct Pairs<'a, 'e> {
    by_operands: Vec<Vec<Option<&'e PairElement<'a>>>>,
}

impl<'a, 'e> Pairs<'a, 'e> {
    fn new(count: usize, elements: &'e [PairElement<'a>]) -> Result<Pairs<'a, 'e>> {
        let mut by_operands = vec![vec![None; count]; count];
        for e in elements {
            if e.derivation.distinct {
                return Err(Error::new(ErrorKind::DistinctSpace { request: e.derivation.text.clone() }));
            }
            by_operands[e.row][e.column] = Some(e);
        }
        Ok(Pairs { by_operands })
    }

    fn get(&self, row: usize, column: usize) -> &'e PairElement<'a> {
        self.by_operands[row][column].expect("solve_space is given a pair element for every pair of operands")
    }
}

/// Evaluates <p|H|q> and <p|q> for members p, q of operands row <= column.
struct Evaluator<'p> {
    program: &'p Program,
    operands: &'p [Operand],
    binding: Binding,
    ints: &'p dyn Integrals,
}

impl Evaluator<'_> {
    /// (H including constant × S, S) at the two members.
    fn pair(&self, element: &PairElement, p: &Member, q: &Member) -> Result<(f64, f64)> {
        let mut b = self.binding.clone();
        for (&k, &v) in self.operands[p.operand].indices.iter().zip(&p.values) {
            b.indices[k as usize] = Some(v);
        }
        let renamed = |k: u32| element.renamed.iter().find(|(from, _)| *from == k).map_or(k, |&(_, to)| to);
        // indices of the column operand fixed by the user keep their value under a new name
        for &(from, to) in &element.renamed {
            if !self.operands[q.operand].indices.contains(&from) {
                b.indices[to as usize] = self.binding.indices[from as usize];
            }
        }
        for (&k, &v) in self.operands[q.operand].indices.iter().zip(&q.values) {
            b.indices[renamed(k) as usize] = Some(v);
        }
        let d = element.derivation;
        let s = evaluate(&d.overlap, &b, self.ints);
        let h = evaluate(&d.value, &b, self.ints) + self.ints.constant() * s;
        for value in [h, s] {
            if !value.is_finite() {
                let names = |m: &Member| {
                    self.operands[m.operand]
                        .indices
                        .iter()
                        .zip(&m.values)
                        .map(|(&k, &v)| format!("{}={}", self.program.indices[k as usize].name, v + 1))
                        .join(", ")
                };
                return Err(Error::new(ErrorKind::NonFinite {
                    request: d.text.clone(),
                    value: value.to_string(),
                    row: format!(" at ({}; {})", names(p), names(q)),
                }));
            }
        }
        Ok((h, s))
    }
}

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
    let pairs = Pairs::new(operands.len(), elements)?;
    let all = members(program, operands, binding);
    if all.len() > MEMBER_LIMIT {
        return Err(eigen::too_large(all.len(), MEMBER_LIMIT));
    }
    let mut full = binding.clone();
    let used = elements.iter().flat_map(|e| e.renamed.iter().map(|&(_, to)| to as usize + 1));
    let width = used.chain([program.indices.len(), full.indices.len()]).max().unwrap_or(0);
    full.indices.resize(width, None);
    let evaluator = Evaluator { program, operands, binding: full, ints };
    let mut kept = vec![];
    for m in all {
        let (_, norm) = evaluator.pair(pairs.get(m.operand, m.operand), &m, &m)?;
        if norm > 0.0 {
            kept.push(m);
        }
    }
    let vanishing = members(program, operands, binding).len() - kept.len();
    progress(&format!("assembling H and S over {} functions", kept.len()));
    let mut rows = vec![];
    for (p, mp) in kept.iter().enumerate() {
        let mut row = vec![];
        for (q, mq) in kept.iter().enumerate().skip(p) {
            let (h, s) = evaluator.pair(pairs.get(mp.operand, mq.operand), mp, mq)?;
            if h != 0.0 || s != 0.0 {
                row.push(Entry { column: q as u32, h, s });
            }
        }
        rows.push(row);
    }
    let pencil = Pencil { rows };
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
            Root { value, vector: order.map(|p| component(&kept[p], c[p])).collect() }
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
