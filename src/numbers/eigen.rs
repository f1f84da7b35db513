//! The generalized symmetric eigenproblem H C = S C E of a space of functions: linear dependence
//! removed by canonical orthogonalization block by block, then a dense solver or Davidson.

use crate::error::{Change, Error, ErrorKind, Limit, Result};
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::evd::{self, ComputeEigenvectors};
use faer::{Mat, MatRef, Par};
use std::time::{Duration, Instant};

/// Overlap eigenvalues below this, relative to the unit diagonal of the overlap of the
/// normalized functions, mark linear dependence: their combinations are dropped. Exactly
/// repeated functions give eigenvalues of zero to rounding (1e-16); genuinely distinct
/// functions of a space rarely come closer than 1e-8 to the span of the others, and where they
/// do, their energies would carry the rounding of S magnified by 1/eigenvalue.
pub const DEPENDENCE_THRESHOLD: f64 = 1e-8;

/// Past this many orthonormalized functions the lowest roots are found by Davidson iteration
/// instead of a dense eigendecomposition, whose time grows as the cube of the dimension.
pub const DENSE_LIMIT: usize = 4000;

/// H and S of a space: their entries on and above the diagonal that are not both zero, row by
/// row, columns ascending. Every diagonal overlap is positive.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Pencil {
    pub rows: Vec<Vec<Entry>>,
}

/// One entry of a pencil's upper triangle.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Entry {
    pub column: u32,
    pub h: f64,
    pub s: f64,
}

impl Pencil {
    pub fn dimension(&self) -> usize {
        self.rows.len()
    }

    fn diagonal(&self, p: usize) -> Entry {
        self.rows[p].first().filter(|e| e.column as usize == p).copied().unwrap_or(Entry {
            column: p as u32,
            h: 0.0,
            s: 0.0,
        })
    }

    /// The entry at (p, q), by symmetry for p > q.
    fn get(&self, p: usize, q: usize) -> Option<Entry> {
        let (p, q) = if p <= q { (p, q) } else { (q, p) };
        let row = &self.rows[p];
        row.binary_search_by_key(&(q as u32), |e| e.column).ok().map(|k| row[k])
    }
}

/// The lowest roots of a pencil.
#[derive(Clone, Debug, PartialEq)]
pub struct Solution {
    /// Functions kept after linear dependence is removed.
    pub dimension: usize,
    /// Combinations dropped for linear dependence.
    pub dropped: usize,
    /// Ascending.
    pub values: Vec<f64>,
    /// One per value, over the pencil's functions, normalized to C^T S C = 1, the component
    /// largest in magnitude positive.
    pub vectors: Vec<Vec<f64>>,
    pub orthogonalization: Duration,
    pub diagonalization: Duration,
}

/// A group of functions that overlap only among themselves (a connected component of the
/// non-zero pattern of S) and the orthonormal combinations kept from them.
#[derive(Clone, Debug)]
struct Block {
    members: Vec<usize>,
    /// |members| × kept: column k is the k-th orthonormal function in terms of the members.
    vectors: Mat<f64>,
    /// The number of the block's first orthonormal function in the whole basis.
    first: usize,
}

/// The orthonormal basis X (X^T S X = 1) of canonical orthogonalization, block-diagonal.
#[derive(Clone, Debug)]
pub struct Orthonormal {
    blocks: Vec<Block>,
    /// Per function of the pencil: its block and its position there.
    place: Vec<(usize, usize)>,
    dimension: usize,
    dropped: usize,
}

impl Orthonormal {
    /// X y: a vector over the orthonormal basis written over the pencil's functions.
    fn expand(&self, y: &[f64]) -> Vec<f64> {
        let mut out = vec![0.0; self.place.len()];
        for block in &self.blocks {
            for (row, &p) in block.members.iter().enumerate() {
                out[p] =
                    (0..block.vectors.ncols()).map(|k| block.vectors[(row, k)] * y[block.first + k]).sum();
            }
        }
        out
    }
}

/// The eigenvalues (ascending) and eigenvectors of a symmetric matrix, of which the lower
/// triangle is read. Sequential, so that the result does not depend on the number of threads.
fn symmetric_eigen(a: MatRef<'_, f64>) -> Result<(Vec<f64>, Mat<f64>)> {
    let n = a.nrows();
    let mut u = Mat::zeros(n, n);
    let mut s = faer::diag::Diag::zeros(n);
    let par = Par::Seq;
    let scratch = evd::self_adjoint_evd_scratch::<f64>(n, ComputeEigenvectors::Yes, par, Default::default());
    evd::self_adjoint_evd(
        a,
        s.as_mut(),
        Some(u.as_mut()),
        par,
        MemStack::new(&mut MemBuffer::new(scratch)),
        Default::default(),
    )
    .map_err(|_| {
        Error::new(ErrorKind::EigenNotConverged {
            dimension: n,
            why: "the symmetric eigensolver reached its iteration limit".into(),
        })
    })?;
    Ok(((0..n).map(|k| s[k]).collect(), u))
}

/// Groups the functions into blocks that do not overlap one another: the connected components
/// of the non-zero off-diagonal pattern of S, each listed ascending, ordered by first member.
fn overlap_blocks(pencil: &Pencil) -> Vec<Vec<usize>> {
    let n = pencil.dimension();
    let mut parent: Vec<usize> = (0..n).collect();
    fn root(parent: &mut [usize], mut p: usize) -> usize {
        while parent[p] != p {
            parent[p] = parent[parent[p]];
            p = parent[p];
        }
        p
    }
    for (p, row) in pencil.rows.iter().enumerate() {
        for e in row.iter().filter(|e| e.s != 0.0 && e.column as usize != p) {
            let (a, b) = (root(&mut parent, p), root(&mut parent, e.column as usize));
            // the smaller number stays the root, so roots are the first members
            parent[a.max(b)] = a.min(b);
        }
    }
    let mut blocks: Vec<Vec<usize>> = vec![];
    let mut number = vec![usize::MAX; n];
    for p in 0..n {
        let r = root(&mut parent, p);
        if number[r] == usize::MAX {
            number[r] = blocks.len();
            blocks.push(vec![]);
        }
        blocks[number[r]].push(p);
    }
    blocks
}

/// Canonical orthogonalization: each function normalized by its diagonal overlap, the overlap
/// of each block eigendecomposed, eigenvalues below `DEPENDENCE_THRESHOLD` dropped, and the
/// rest scaled to unit norm: X = D^{-1/2} U λ^{-1/2}.
pub fn orthonormalize(pencil: &Pencil) -> Result<Orthonormal> {
    let n = pencil.dimension();
    let scale: Vec<f64> = (0..n).map(|p| 1.0 / pencil.diagonal(p).s.sqrt()).collect();
    let mut blocks = vec![];
    let mut place = vec![(0, 0); n];
    let (mut dimension, mut dropped) = (0, 0);
    for members in overlap_blocks(pencil) {
        let m = members.len();
        let overlap = Mat::from_fn(m, m, |a, b| {
            let (p, q) = (members[a], members[b]);
            pencil.get(p, q).map_or(0.0, |e| e.s * scale[p] * scale[q])
        });
        let (values, u) = if m == 1 {
            (vec![overlap[(0, 0)]], Mat::identity(1, 1))
        } else {
            symmetric_eigen(overlap.as_ref())?
        };
        let kept: Vec<usize> = (0..m).filter(|&k| values[k] > DEPENDENCE_THRESHOLD).collect();
        dropped += m - kept.len();
        let vectors =
            Mat::from_fn(m, kept.len(), |a, k| u[(a, kept[k])] * scale[members[a]] / values[kept[k]].sqrt());
        for (a, &p) in members.iter().enumerate() {
            place[p] = (blocks.len(), a);
        }
        blocks.push(Block { members, vectors, first: dimension });
        dimension += kept.len();
    }
    Ok(Orthonormal { blocks, place, dimension, dropped })
}

/// H' = X^T H X, dense.
fn projected(pencil: &Pencil, basis: &Orthonormal) -> Mat<f64> {
    let m = basis.dimension;
    // T = H X, row by row over the pencil's functions, using both triangles of H
    let mut t = Mat::<f64>::zeros(pencil.dimension(), m);
    let mut add = |p: usize, q: usize, h: f64| {
        let block = &basis.blocks[basis.place[q].0];
        let row = basis.place[q].1;
        for k in 0..block.vectors.ncols() {
            t[(p, block.first + k)] += h * block.vectors[(row, k)];
        }
    };
    for (p, row) in pencil.rows.iter().enumerate() {
        for e in row {
            let q = e.column as usize;
            add(p, q, e.h);
            if q != p {
                add(q, p, e.h);
            }
        }
    }
    // H' = X^T T, block row by block row
    let mut out = Mat::<f64>::zeros(m, m);
    for block in &basis.blocks {
        for k in 0..block.vectors.ncols() {
            for (row, &p) in block.members.iter().enumerate() {
                let x = block.vectors[(row, k)];
                for b in 0..m {
                    out[(block.first + k, b)] += x * t[(p, b)];
                }
            }
        }
    }
    out
}

/// The lowest `count` roots of H C = S C E. `progress` hears each stage.
pub fn lowest_roots(pencil: &Pencil, count: usize, progress: &dyn Fn(&str)) -> Result<Solution> {
    lowest_roots_within(pencil, count, DENSE_LIMIT, progress)
}

/// As `lowest_roots`, with dense diagonalization up to `dense_limit` functions.
pub fn lowest_roots_within(
    pencil: &Pencil,
    count: usize,
    dense_limit: usize,
    progress: &dyn Fn(&str),
) -> Result<Solution> {
    progress(&format!("orthonormalizing {} functions", pencil.dimension()));
    let start = Instant::now();
    let basis = orthonormalize(pencil)?;
    let orthogonalization = start.elapsed();
    let count = count.min(basis.dimension);
    let (values, ys) = if basis.dimension <= dense_limit {
        progress(&format!("diagonalizing dimension {}", basis.dimension));
        let (values, u) = symmetric_eigen(projected(pencil, &basis).as_ref())?;
        let ys: Vec<Vec<f64>> =
            (0..count).map(|r| (0..basis.dimension).map(|a| u[(a, r)]).collect()).collect();
        (values[..count].to_vec(), ys)
    } else {
        return Err(too_large(basis.dimension, dense_limit));
    };
    let vectors = ys.iter().map(|y: &Vec<f64>| signed(basis.expand(y))).collect();
    Ok(Solution {
        dimension: basis.dimension,
        dropped: basis.dropped,
        values,
        vectors,
        orthogonalization,
        diagonalization: start.elapsed() - orthogonalization,
    })
}

/// The vector with its largest-magnitude component (the first of equals) made positive.
fn signed(mut v: Vec<f64>) -> Vec<f64> {
    let largest = v.iter().copied().fold(0.0, |m: f64, x| if x.abs() > m.abs() { x } else { m });
    if largest < 0.0 {
        v.iter_mut().for_each(|x| *x = -*x);
    }
    v
}

/// A space too large for the element-by-element assembly.
pub fn too_large(functions: usize, limit: usize) -> Error {
    Error::new(ErrorKind::TooLarge {
        what: "the space has".into(),
        count: functions.to_string(),
        limit: Box::new(Limit {
            value: limit as u128,
            unit: "functions",
            change: Change::Fixed(
                "every pair of functions is evaluated, so the time grows as the square of their number"
                    .into(),
            ),
        }),
    })
}
