//! Integrals in rotated orbitals: h in full, and (qr|st) with q any orbital and r, s, t among the
//! active orbitals (those a state occupies), which is all its energy and gradient need.

use crate::numbers::integrals::{IntegralTable, Integrals, pair_index};
use faer::{Mat, MatRef};
use rayon::prelude::*;

/// Integrals in the orbitals φ'_p = Σ_μ φ_μ C_μp (C orthogonal, file orbitals μ).
#[derive(Clone, Debug)]
pub struct Rotated {
    pub n: usize,
    /// The active orbitals (columns of C), in the order the densities number them.
    pub active: Vec<usize>,
    /// h'_pq over all orbitals.
    pub h: Mat<f64>,
    /// (qr|st) at ((q·o + r)·o + s)·o + t, q over all n orbitals, r, s, t the positions of
    /// active orbitals (o of them).
    pub eri: Vec<f64>,
    /// (μν|st) with μ ≥ ν file orbitals (by pair index) and s, t active, at pair·o² + s·o + t:
    /// the half-transformed integrals, which give Coulomb matrices of active densities cheaply.
    pub half: Vec<f64>,
    pub constant: f64,
}

impl Rotated {
    /// (qr|st): q any orbital, r, s, t positions among the active ones.
    pub fn eri(&self, q: usize, r: usize, s: usize, t: usize) -> f64 {
        let o = self.active.len();
        self.eri[((q * o + r) * o + s) * o + t]
    }
}

/// The integrals in the orbitals C (columns, in the file's orbitals) for the `active` columns.
/// The cost is n⁴·o/2 multiply-adds for the first index (every (μν|λσ) of the file against
/// the o active columns), then n³·o² and n²·o³: it grows as n⁴·o with n orbitals.
pub fn rotate(ints: &dyn Integrals, c: MatRef<'_, f64>, active: &[usize]) -> Rotated {
    let n = ints.orbital_count();
    let o = active.len();
    let ca = Mat::from_fn(n, o, |m, a| c[(m, active[a])]);
    let pairs: Vec<(usize, usize)> = (0..n).flat_map(|m| (0..=m).map(move |v| (m, v))).collect();
    // (μν|st) = Σ_λσ C_λs (μν|λσ) C_σt, one pair μν at a time
    let half: Vec<f64> = pairs
        .par_iter()
        .flat_map_iter(|&(m, v)| {
            let block = Mat::from_fn(n, n, |l, s| ints.eri(m, v, l, s));
            let quarter = &block * &ca;
            let b = ca.transpose() * &quarter;
            (0..o * o).map(move |k| b[(k / o, k % o)])
        })
        .collect();
    // (qr|st) = Σ_μν C_μq (μν|st) C_νr for each s ≥ t
    let targets: Vec<(usize, usize)> = (0..o).flat_map(|s| (0..=s).map(move |t| (s, t))).collect();
    let columns: Vec<Mat<f64>> = targets
        .par_iter()
        .map(|&(s, t)| {
            let y =
                Mat::from_fn(n, n, |m, v| half[pair_index(m as u64, v as u64) as usize * o * o + s * o + t]);
            c.transpose() * (&y * &ca)
        })
        .collect();
    let mut eri = vec![0.0; n * o * o * o];
    for (&(s, t), w) in targets.iter().zip(&columns) {
        for q in 0..n {
            for r in 0..o {
                eri[((q * o + r) * o + s) * o + t] = w[(q, r)];
                eri[((q * o + r) * o + t) * o + s] = w[(q, r)];
            }
        }
    }
    let h_file = Mat::from_fn(n, n, |p, q| ints.h(p, q));
    let h = c.transpose() * &h_file * c;
    Rotated { n, active: active.to_vec(), h, eri, half, constant: ints.constant() }
}

/// Every integral in the orbitals C, as a table (for writing a new integral file): the
/// transformation above with every orbital active, n⁵ in time and n⁴ in memory.
pub fn rotate_all(ints: &dyn Integrals, c: MatRef<'_, f64>) -> IntegralTable {
    let n = ints.orbital_count();
    let all: Vec<usize> = (0..n).collect();
    let r = rotate(ints, c, &all);
    let mut out = IntegralTable::zeros(n);
    for p in 0..n {
        for q in 0..=p {
            out.set_h(p, q, 0.5 * (r.h[(p, q)] + r.h[(q, p)]));
            for s in 0..n {
                for t in 0..=s {
                    out.set_eri(p, q, s, t, r.eri(p, q, s, t));
                }
            }
        }
    }
    out.set_constant(ints.constant());
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numbers::rotation::exp_antisymmetric;

    /// The transformed integrals equal the four-index sum Σ C C C C (μν|λσ) written out.
    #[test]
    fn transformation_equals_the_four_index_sum() {
        let n = 5;
        let ints = IntegralTable::random(n, 21);
        let kappa = Mat::from_fn(n, n, |p, q| if p == q { 0.0 } else { 0.3 * (p as f64 - q as f64).sin() });
        let c = exp_antisymmetric(kappa.as_ref()).unwrap();
        let active = [1, 3, 4];
        let r = rotate(&ints, c.as_ref(), &active);
        let direct = |p: usize, q: usize, s: usize, t: usize| {
            let mut sum = 0.0;
            for a in 0..n {
                for b in 0..n {
                    for x in 0..n {
                        for y in 0..n {
                            sum += c[(a, p)] * c[(b, q)] * c[(x, s)] * c[(y, t)] * ints.eri(a, b, x, y);
                        }
                    }
                }
            }
            sum
        };
        for q in 0..n {
            for (ri, &rr) in active.iter().enumerate() {
                for (si, &ss) in active.iter().enumerate() {
                    for (ti, &tt) in active.iter().enumerate() {
                        assert!((r.eri(q, ri, si, ti) - direct(q, rr, ss, tt)).abs() < 1e-12);
                    }
                }
            }
            let h: f64 = (0..n)
                .flat_map(|a| (0..n).map(move |b| (a, b)))
                .map(|(a, b)| c[(a, q)] * c[(b, 2)] * ints.h(a, b))
                .sum();
            assert!((r.h[(q, 2)] - h).abs() < 1e-12);
        }
        let all = rotate_all(&ints, c.as_ref());
        assert!((all.eri(4, 0, 2, 1) - direct(4, 0, 2, 1)).abs() < 1e-12);
    }
}
