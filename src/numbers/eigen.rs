//! The generalized symmetric eigenproblem H C = S C E of a space of functions: linear dependence
//! removed by canonical orthogonalization block by block, then a dense solver or Davidson.

use crate::error::{Change, Error, ErrorKind, Limit, Result};
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::evd::{self, ComputeEigenvectors};
use faer::{Mat, MatRef, Par};
use rayon::prelude::*;
use std::time::{Duration, Instant};

/// Overlap eigenvalues below this, relative to the unit diagonal of the overlap of the
/// normalized functions, mark linear dependence: their combinations are dropped. Exactly
/// repeated functions give eigenvalues of zero to rounding (1e-16); genuinely distinct
/// functions of a space rarely come closer than 1e-8 to the span of the others, and where they
/// do, their energies would carry the rounding of S magnified by 1/eigenvalue.
pub const DEPENDENCE_THRESHOLD: f64 = 1e-8;

/// Past this many orthonormalized functions the lowest roots are found by Davidson iteration
/// instead of a dense eigendecomposition, whose time grows as the cube of the dimension.
pub const DENSE_LIMIT: usize = 2000;

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
    /// X^T z.
    fn contract(&self, z: &[f64]) -> Vec<f64> {
        let mut out = vec![0.0; self.dimension];
        for block in &self.blocks {
            for k in 0..block.vectors.ncols() {
                out[block.first + k] =
                    block.members.iter().enumerate().map(|(row, &p)| block.vectors[(row, k)] * z[p]).sum();
            }
        }
        out
    }

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
pub(crate) fn symmetric_eigen(a: MatRef<'_, f64>) -> Result<(Vec<f64>, Mat<f64>)> {
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
        let diagonal = projected_diagonal(pencil, &basis);
        crate::numbers::davidson::lowest(&|ys| apply(pencil, &basis, ys), &diagonal, count, progress)?
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

/// The number of pieces the rows of H are cut into for a product with vectors: fixed, so that
/// the partial sums, and with them the result, do not depend on the number of threads.
const PRODUCT_PIECES: usize = 16;

/// H' Y = X^T H X Y for a block of vectors, through the stored upper triangle of H: pieces of
/// rows of about equal numbers of entries in parallel, each scattering its transposed part into
/// its own buffer, the buffers added in order.
fn apply(pencil: &Pencil, basis: &Orthonormal, ys: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let (n, width) = (pencil.dimension(), ys.len());
    // X Y with the vectors interleaved, so that one entry of H serves them all at once
    let mut x = vec![0.0; n * width];
    for (j, y) in ys.iter().enumerate() {
        for (p, v) in basis.expand(y).into_iter().enumerate() {
            x[p * width + j] = v;
        }
    }
    let entries: usize = pencil.rows.iter().map(Vec::len).sum();
    let mut bounds = vec![0];
    let mut count = 0;
    for (p, row) in pencil.rows.iter().enumerate() {
        count += row.len();
        if count * PRODUCT_PIECES >= entries * bounds.len() && bounds.len() < PRODUCT_PIECES {
            bounds.push(p + 1);
        }
    }
    bounds.push(n);
    bounds.dedup();
    let pieces: Vec<Vec<f64>> = bounds
        .par_windows(2)
        .map(|w| {
            let mut z = vec![0.0; n * width];
            for p in w[0]..w[1] {
                for e in &pencil.rows[p] {
                    let q = e.column as usize;
                    for j in 0..width {
                        z[p * width + j] += e.h * x[q * width + j];
                    }
                    if q != p {
                        for j in 0..width {
                            z[q * width + j] += e.h * x[p * width + j];
                        }
                    }
                }
            }
            z
        })
        .collect();
    let mut z = vec![0.0; n * width];
    for piece in pieces {
        z.iter_mut().zip(piece).for_each(|(a, b)| *a += b);
    }
    (0..width).map(|j| basis.contract(&(0..n).map(|p| z[p * width + j]).collect::<Vec<f64>>())).collect()
}

/// The diagonal of H' = X^T H X.
fn projected_diagonal(pencil: &Pencil, basis: &Orthonormal) -> Vec<f64> {
    let mut out = vec![0.0; basis.dimension];
    for block in &basis.blocks {
        for k in 0..block.vectors.ncols() {
            let mut sum = 0.0;
            for (a, &p) in block.members.iter().enumerate() {
                for (b, &q) in block.members.iter().enumerate() {
                    if let Some(e) = pencil.get(p, q) {
                        sum += block.vectors[(a, k)] * e.h * block.vectors[(b, k)];
                    }
                }
            }
            out[block.first + k] = sum;
        }
    }
    out
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

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// A random symmetric A over m orthonormal functions, with a spread diagonal.
    fn random_symmetric(m: usize, seed: u64) -> Mat<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut a = Mat::from_fn(m, m, |i, j| if i == j { i as f64 } else { 0.0 });
        for i in 0..m {
            for j in 0..i {
                if rng.random_range(0.0..1.0) < 0.3 {
                    let x = rng.random_range(-0.5..0.5);
                    a[(i, j)] = x;
                    a[(j, i)] = x;
                }
            }
        }
        a
    }

    /// The pencil of functions c_p (columns over the orthonormal functions): H = C^T A C,
    /// S = C^T C.
    fn pencil(a: &Mat<f64>, functions: &[Vec<f64>]) -> Pencil {
        let dot = |x: &[f64], y: &[f64]| x.iter().zip(y).map(|(p, q)| p * q).sum::<f64>();
        let image = |x: &[f64]| {
            (0..a.nrows()).map(|i| (0..a.ncols()).map(|j| a[(i, j)] * x[j]).sum()).collect::<Vec<f64>>()
        };
        let rows = functions
            .iter()
            .enumerate()
            .map(|(p, cp)| {
                let acp = image(cp);
                (p..functions.len())
                    .map(|q| Entry {
                        column: q as u32,
                        h: dot(&acp, &functions[q]),
                        s: dot(cp, &functions[q]),
                    })
                    .filter(|e| e.h != 0.0 || e.s != 0.0)
                    .collect()
            })
            .collect();
        Pencil { rows }
    }

    fn unit(m: usize, k: usize, scale: f64) -> Vec<f64> {
        let mut e = vec![0.0; m];
        e[k] = scale;
        e
    }

    /// m independent functions (the orthonormal ones but the fifth, for which a combination of
    /// the fourth and fifth stands), a repeated one and a scaled copy: the roots are A's
    /// eigenvalues, the two copies dropped.
    fn functions(m: usize) -> Vec<Vec<f64>> {
        let mut out: Vec<Vec<f64>> = (0..m).filter(|&k| k != 4).map(|k| unit(m, k, 1.0)).collect();
        out.insert(2, unit(m, 1, 1.0));
        out.push(unit(m, 2, -2.0));
        let mut mixed = unit(m, 3, 0.6);
        mixed[4] = 0.8;
        out.push(mixed);
        out
    }

    #[test]
    fn repeated_functions_are_dropped_and_the_roots_are_those_of_the_independent_ones() {
        let m = 12;
        let a = random_symmetric(m, 1);
        let p = pencil(&a, &functions(m));
        let solution = lowest_roots(&p, m, &|_| {}).unwrap();
        assert_eq!((solution.dimension, solution.dropped), (m, 2));
        let (expected, _) = symmetric_eigen(a.as_ref()).unwrap();
        for (got, want) in solution.values.iter().zip(&expected) {
            assert!((got - want).abs() < 1e-12, "{got} vs {want}");
        }
        // C^T S C = 1 over the functions as given, and the largest component positive
        let n = p.dimension();
        for (r, c) in solution.vectors.iter().enumerate() {
            for (t, d) in solution.vectors.iter().enumerate() {
                let overlap: f64 = (0..n)
                    .flat_map(|x| (0..n).map(move |y| (x, y)))
                    .map(|(x, y)| c[x] * d[y] * p.get(x, y).map_or(0.0, |e| e.s))
                    .sum();
                assert!((overlap - if r == t { 1.0 } else { 0.0 }).abs() < 1e-12);
            }
            let largest = c.iter().copied().fold(0.0, |m: f64, x| if x.abs() > m.abs() { x } else { m });
            assert!(largest > 0.0);
        }
    }

    #[test]
    fn davidson_finds_the_roots_of_the_dense_solver() {
        let m = 300;
        let a = random_symmetric(m, 2);
        let p = pencil(&a, &functions(m));
        let dense = lowest_roots_within(&p, 6, usize::MAX, &|_| {}).unwrap();
        let iterative = lowest_roots_within(&p, 6, 10, &|_| {}).unwrap();
        assert_eq!((iterative.dimension, iterative.dropped), (m, 2));
        for (d, i) in dense.values.iter().zip(&iterative.values) {
            assert!((d - i).abs() < 1e-12, "{d} vs {i}");
        }
        for (d, i) in dense.vectors.iter().zip(&iterative.vectors) {
            assert!(d.iter().zip(i).all(|(x, y)| (x - y).abs() < 1e-7));
        }
    }

    /// Two blocks that H does not couple: in the second every diagonal entry is high but the
    /// couplings make its lowest root the lowest of all. Davidson must find it although no
    /// starting vector lies in that block.
    #[test]
    fn davidson_finds_a_root_in_a_block_without_a_low_diagonal() {
        let (m, low) = (200, 20);
        let mut a = Mat::from_fn(m, m, |i, j| if i == j { i as f64 * 0.1 } else { 0.0 });
        for i in m - low..m {
            for j in m - low..m {
                a[(i, j)] = if i == j { 30.0 } else { -2.0 };
            }
        }
        let p = pencil(&a, &(0..m).map(|k| unit(m, k, 1.0)).collect::<Vec<_>>());
        let dense = lowest_roots_within(&p, 3, usize::MAX, &|_| {}).unwrap();
        let iterative = lowest_roots_within(&p, 3, 10, &|_| {}).unwrap();
        assert!((dense.values[0] - (30.0 - 2.0 * (low - 1) as f64)).abs() < 1e-10);
        for (d, i) in dense.values.iter().zip(&iterative.values) {
            assert!((d - i).abs() < 1e-10, "{d} vs {i}");
        }
    }
}
