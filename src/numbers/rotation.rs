//! Orbital rotations U = exp(κ), κ real antisymmetric: the exponential, and the pairs of
//! orbitals whose rotation can change a state's energy (the non-redundant ones).

use crate::check::brute_force::{Vector, apply, dot};
use crate::error::Result;
use crate::numbers::eigen::symmetric_eigen;
use faer::{Mat, MatRef};

/// exp(κ) for a real antisymmetric κ, exactly orthogonal to rounding: κ² = −V Θ² Vᵀ is
/// symmetric, and exp(κ) = V cos Θ Vᵀ + V (sin Θ / Θ) Vᵀ κ (both functions of κ² commute with κ).
pub fn exp_antisymmetric(kappa: MatRef<'_, f64>) -> Result<Mat<f64>> {
    let n = kappa.nrows();
    let square = kappa * kappa;
    let (values, v) = symmetric_eigen(square.as_ref())?;
    let theta: Vec<f64> = values.iter().map(|&x| (-x).max(0.0).sqrt()).collect();
    let cos: Mat<f64> =
        Mat::from_fn(n, n, |a, b| (0..n).map(|k| v[(a, k)] * theta[k].cos() * v[(b, k)]).sum::<f64>());
    let sinc = |t: f64| if t < 1e-8 { 1.0 - t * t / 6.0 } else { t.sin() / t };
    let sin: Mat<f64> =
        Mat::from_fn(n, n, |a, b| (0..n).map(|k| v[(a, k)] * sinc(theta[k]) * v[(b, k)]).sum::<f64>());
    Ok(cos + sin * kappa)
}

/// (E_pq − E_qp)|v> with E_pq = Σ_σ a+_pσ a_qσ, for compact orbital numbers p and q.
fn generator(v: &Vector, p: u32, q: u32) -> Vector {
    let mut out = Vector::default();
    for (&d, &x) in v {
        for spin in 0..2 {
            for (to, from, sign) in [(p, q, 1.0), (q, p, -1.0)] {
                if let Some((s, e)) = apply(d, &[(true, 2 * to + spin), (false, 2 * from + spin)]) {
                    *out.entry(e).or_insert(0.0) += sign * s * x;
                }
            }
        }
    }
    out
}

/// Relative size below which a vector counts as zero: the coefficients of states are exact
/// numbers rounded once, so a generator that annihilates the span leaves only rounding.
const ZERO: f64 = 1e-10;

/// An orthonormal basis of the span of some vectors (Gram–Schmidt, dependent ones dropped).
fn orthonormal_basis(functions: &[Vector]) -> Vec<Vector> {
    let mut basis: Vec<Vector> = vec![];
    for f in functions {
        let mut w = f.clone();
        for b in &basis {
            let x = dot(b, &w);
            for (d, y) in b {
                *w.entry(*d).or_insert(0.0) -= x * y;
            }
        }
        let norm = dot(&w, &w).sqrt();
        if norm > ZERO * dot(f, f).sqrt() {
            w.values_mut().for_each(|y| *y /= norm);
            basis.push(w);
        }
    }
    basis
}

/// True when the rotation of compact orbitals p and q takes some function out of the span of
/// all of them.
fn leaves_span(functions: &[Vector], basis: &[Vector], p: u32, q: u32) -> bool {
    functions.iter().any(|f| {
        let mut w = generator(f, p, q);
        for b in basis {
            let x = dot(b, &w);
            for (d, y) in b {
                *w.entry(*d).or_insert(0.0) -= x * y;
            }
        }
        dot(&w, &w).sqrt() > ZERO * dot(f, f).sqrt()
    })
}

/// The pairs (p, q), p > q, of the file's n orbitals whose rotation can change the energy of a
/// state spanned by `functions` (vectors over compact orbitals, compact k standing for file
/// orbital `active[k]`; one function for a state without free coefficients, its parts
/// otherwise): those whose generator E_pq − E_qp takes some function out of the span of the
/// functions (the coefficients follow any rotation within it), and, with `orbsym`, only
/// between orbitals of one symmetry. An orbital no function occupies rotates with another
/// such orbital to no effect; with an occupied one, always to some effect.
pub fn non_redundant(
    functions: &[Vector],
    active: &[usize],
    n: usize,
    orbsym: Option<&[u32]>,
) -> Vec<(usize, usize)> {
    let basis = orthonormal_basis(functions);
    let occupied_bits = functions.iter().flat_map(|f| f.keys()).fold(0u128, |acc, d| acc | d);
    let occupied: Vec<bool> = (0..n)
        .map(|p| active.iter().position(|&a| a == p).is_some_and(|k| (occupied_bits >> (2 * k)) & 3 != 0))
        .collect();
    let compact = |p: usize| active.iter().position(|&a| a == p).map(|k| k as u32);
    let same_symmetry = |p: usize, q: usize| orbsym.is_none_or(|s| s[p] == s[q]);
    let mut out = vec![];
    for p in 0..n {
        for q in 0..p {
            if !same_symmetry(p, q) || !(occupied[p] || occupied[q]) {
                continue;
            }
            let keep = match (compact(p), compact(q)) {
                (Some(a), Some(b)) => leaves_span(functions, &basis, a, b),
                _ => true,
            };
            if keep {
                out.push((p, q));
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_exponential_is_orthogonal_and_matches_its_series() {
        let n = 4;
        let kappa = Mat::from_fn(n, n, |p, q| {
            if p > q {
                0.2 * (p + 2 * q) as f64
            } else if p < q {
                -0.2 * (q + 2 * p) as f64
            } else {
                0.0
            }
        });
        let u = exp_antisymmetric(kappa.as_ref()).unwrap();
        let utu = u.transpose() * &u;
        let mut series = Mat::<f64>::identity(n, n);
        let mut term = Mat::<f64>::identity(n, n);
        for k in 1..40 {
            term = &term * &kappa * (1.0 / k as f64);
            series += &term;
        }
        for a in 0..n {
            for b in 0..n {
                assert!((utu[(a, b)] - if a == b { 1.0 } else { 0.0 }).abs() < 1e-13);
                assert!((u[(a, b)] - series[(a, b)]).abs() < 1e-12);
            }
        }
    }
}
