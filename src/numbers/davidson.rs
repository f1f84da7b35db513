//! Davidson iteration: the lowest roots of a large real symmetric matrix known through its
//! product with vectors and its diagonal, for spaces past the dense solver's dimension.

use crate::error::{Error, ErrorKind, Result};
use crate::numbers::eigen::symmetric_eigen;
use faer::Mat;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// The iteration stops when every wanted root's residual norm ‖Ax − θx‖ is below this; the
/// energies are then exact to about its square.
pub const RESIDUAL_TOLERANCE: f64 = 1e-8;

/// The most iterations before the roots are declared not found.
pub const MAX_ITERATIONS: usize = 400;

/// The seed and weight of the admixture of every direction to the starting vectors.
const GUESS_SEED: u64 = 2024;
const GUESS_ADMIXTURE: f64 = 1e-2;

/// The smallest |θ − A_ii| the diagonal preconditioner divides by.
const SMALLEST_DENOMINATOR: f64 = 1e-8;

/// The matrix times each of a block of vectors.
pub type Product<'a> = dyn Fn(&[Vec<f64>]) -> Vec<Vec<f64>> + 'a;

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Σ_k c_k v_k.
fn combine(vectors: &[Vec<f64>], c: impl Fn(usize) -> f64, n: usize) -> Vec<f64> {
    let mut out = vec![0.0; n];
    for (k, v) in vectors.iter().enumerate() {
        let ck = c(k);
        out.iter_mut().zip(v).for_each(|(o, x)| *o += ck * x);
    }
    out
}

/// `t` made orthogonal to `basis` (two passes of Gram–Schmidt) and normalized; None when
/// nothing of it is left.
fn orthonormalized(mut t: Vec<f64>, basis: &[Vec<f64>]) -> Option<Vec<f64>> {
    let before = dot(&t, &t).sqrt();
    for _ in 0..2 {
        for v in basis {
            let overlap = dot(v, &t);
            t.iter_mut().zip(v).for_each(|(x, y)| *x -= overlap * y);
        }
    }
    let norm = dot(&t, &t).sqrt();
    (norm > 1e-10 * before.max(1e-300)).then(|| t.into_iter().map(|x| x / norm).collect())
}

/// Olsen's correction for a Ritz pair (θ, x) with residual r: t = M⁻¹r − ε M⁻¹x with
/// M = diag(A) − θ and ε chosen to make t orthogonal to x, so that t does not merely repeat x
/// where the diagonal is a good approximation of A.
fn correction(residual: &[f64], x: &[f64], diagonal: &[f64], theta: f64) -> Vec<f64> {
    let inverse = |v: &[f64]| -> Vec<f64> {
        v.iter()
            .zip(diagonal)
            .map(|(v, d)| {
                let m = d - theta;
                v / if m.abs() < SMALLEST_DENOMINATOR { SMALLEST_DENOMINATOR.copysign(m) } else { m }
            })
            .collect()
    };
    let (mr, mx) = (inverse(residual), inverse(x));
    let denominator = dot(x, &mx);
    let epsilon = if denominator.abs() > f64::MIN_POSITIVE { dot(x, &mr) / denominator } else { 0.0 };
    mr.iter().zip(&mx).map(|(a, b)| a - epsilon * b).collect()
}

/// The `count` lowest eigenvalues (ascending) and unit eigenvectors of the symmetric matrix A of
/// dimension `diagonal.len()`, given `apply(xs) = [A x for x in xs]`. Deterministic: every
/// step is sequential except inside `apply`, which must itself be deterministic.
pub fn lowest(
    apply: &Product,
    diagonal: &[f64],
    count: usize,
    progress: &dyn Fn(&str),
) -> Result<(Vec<f64>, Vec<Vec<f64>>)> {
    let n = diagonal.len();
    let count = count.min(n);
    if count == 0 {
        return Ok((vec![], vec![]));
    }
    let largest = n.min((8 * count).max(40));
    // start from the unit vectors of the lowest diagonal entries, twice as many as wanted, each
    // with a small seeded admixture of every direction: a root whose symmetry none of those
    // entries has would otherwise never enter the subspace
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&a, &b| diagonal[a].total_cmp(&diagonal[b]).then(a.cmp(&b)));
    let mut rng = ChaCha8Rng::seed_from_u64(GUESS_SEED);
    let scale = GUESS_ADMIXTURE / (n as f64).sqrt();
    let mut basis: Vec<Vec<f64>> = vec![];
    for &p in &order[..(2 * count).min(n)] {
        let mut guess: Vec<f64> = (0..n).map(|_| scale * rng.random_range(-1.0..1.0)).collect();
        guess[p] += 1.0;
        basis.extend(orthonormalized(guess, &basis));
    }
    let mut images = apply(&basis);
    // the projected matrix basis · images, grown as vectors are added
    let mut small: Vec<Vec<f64>> = vec![];
    for iteration in 1..=MAX_ITERATIONS {
        let m = basis.len();
        for (a, row) in small.iter_mut().enumerate() {
            row.extend((row.len()..m).map(|b| dot(&basis[a], &images[b])));
        }
        small.extend((small.len()..m).map(|a| (0..m).map(|b| dot(&basis[a], &images[b])).collect()));
        let (theta, s) = symmetric_eigen(Mat::from_fn(m, m, |a, b| small[a][b]).as_ref())?;
        let ritz = |r: usize, of: &[Vec<f64>]| combine(of, |k| s[(k, r)], n);
        let mut vectors = vec![];
        let mut residuals = vec![];
        for (r, value) in theta.iter().enumerate().take(count) {
            let (x, ax) = (ritz(r, &basis), ritz(r, &images));
            residuals.push(ax.iter().zip(&x).map(|(a, x)| a - value * x).collect::<Vec<f64>>());
            vectors.push(x);
        }
        let norms: Vec<f64> = residuals.iter().map(|r| dot(r, r).sqrt()).collect();
        let worst = norms.iter().copied().fold(0.0, f64::max);
        progress(&format!("Davidson iteration {iteration}: dimension {n}, largest residual {worst:.1e}"));
        if worst < RESIDUAL_TOLERANCE {
            return Ok((theta[..count].to_vec(), vectors));
        }
        if m + count > largest {
            // restart from the Ritz vectors of the lowest roots, twice as many as wanted
            let keep = (2 * count).min(m);
            let (b, i) =
                ((0..keep).map(|r| ritz(r, &basis)).collect(), (0..keep).map(|r| ritz(r, &images)).collect());
            basis = b;
            images = i;
            small.clear();
        }
        let mut new: Vec<usize> = vec![];
        for r in (0..count).filter(|&r| norms[r] >= RESIDUAL_TOLERANCE) {
            let t = correction(&residuals[r], &vectors[r], diagonal, theta[r]);
            // where the preconditioned direction adds nothing new, the residual itself does
            if let Some(t) =
                orthonormalized(t, &basis).or_else(|| orthonormalized(residuals[r].clone(), &basis))
            {
                basis.push(t);
                new.push(basis.len() - 1);
            }
        }
        if new.is_empty() {
            return Err(not_converged(n, worst, iteration));
        }
        images.extend(apply(&basis[new[0]..]));
    }
    Err(not_converged(n, f64::NAN, MAX_ITERATIONS))
}

fn not_converged(dimension: usize, residual: f64, iterations: usize) -> Error {
    Error::new(ErrorKind::EigenNotConverged {
        dimension,
        why: format!(
            "Davidson iteration stopped after {iterations} iterations with a residual of {residual:.1e}, above {RESIDUAL_TOLERANCE:.0e}"
        ),
    })
}
