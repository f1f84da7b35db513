//! Spatial integrals of real orbitals in chemists' notation: the access trait every evaluator
//! uses, a dense table with the 8-fold symmetry, and seeded random tables for verification.

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// Integral access with 0-based orbital numbers.
pub trait Integrals {
    fn orbital_count(&self) -> usize;
    fn h(&self, p: usize, q: usize) -> f64;
    /// (pq|rs) in chemists' notation.
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64;
    /// The constant energy (nuclear repulsion and any frozen-core energy).
    fn constant(&self) -> f64;
}

/// A full table of h_pq and (pq|rs), kept symmetric.
#[derive(Clone, Debug)]
pub struct DenseIntegrals {
    n: usize,
    h: Vec<f64>,
    eri: Vec<f64>,
    constant: f64,
}

impl DenseIntegrals {
    pub fn zeros(n: usize) -> DenseIntegrals {
        DenseIntegrals { n, h: vec![0.0; n * n], eri: vec![0.0; n * n * n * n], constant: 0.0 }
    }

    pub fn set_h(&mut self, p: usize, q: usize, value: f64) {
        let n = self.n;
        self.h[p * n + q] = value;
        self.h[q * n + p] = value;
    }

    /// Sets (pq|rs) and its seven partners under the real 8-fold symmetry.
    pub fn set_eri(&mut self, p: usize, q: usize, r: usize, s: usize, value: f64) {
        let n = self.n;
        for (a, b, c, d) in [(p, q, r, s), (q, p, r, s), (p, q, s, r), (q, p, s, r)] {
            self.eri[((a * n + b) * n + c) * n + d] = value;
            self.eri[((c * n + d) * n + a) * n + b] = value;
        }
    }

    pub fn set_constant(&mut self, value: f64) {
        self.constant = value;
    }

    /// Random integrals in [-1, 1] with the 8-fold symmetry, reproducible from the seed.
    pub fn random(n: usize, seed: u64) -> DenseIntegrals {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut out = DenseIntegrals::zeros(n);
        for p in 0..n {
            for q in 0..=p {
                out.set_h(p, q, rng.random_range(-1.0..1.0));
            }
        }
        for p in 0..n {
            for q in 0..=p {
                for r in 0..n {
                    for s in 0..=r {
                        if (p * (p + 1) / 2 + q) >= (r * (r + 1) / 2 + s) {
                            out.set_eri(p, q, r, s, rng.random_range(-1.0..1.0));
                        }
                    }
                }
            }
        }
        out
    }
}

impl Integrals for DenseIntegrals {
    fn orbital_count(&self) -> usize {
        self.n
    }
    fn h(&self, p: usize, q: usize) -> f64 {
        self.h[p * self.n + q]
    }
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
        let n = self.n;
        self.eri[((p * n + q) * n + r) * n + s]
    }
    fn constant(&self) -> f64 {
        self.constant
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn random_integrals_have_the_eightfold_symmetry() {
        let t = DenseIntegrals::random(4, 7);
        let v = t.eri(0, 1, 2, 3);
        for (a, b, c, d) in [(1, 0, 2, 3), (0, 1, 3, 2), (2, 3, 0, 1), (3, 2, 1, 0)] {
            assert_eq!(t.eri(a, b, c, d), v);
        }
        assert_eq!(t.h(1, 3), t.h(3, 1));
        assert_ne!(t.eri(0, 0, 1, 1), t.eri(0, 1, 0, 1));
    }
}
