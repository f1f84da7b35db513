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

/// Where (pq|rs) is stored: one slot for all eight orderings.
fn eri_slot(p: usize, q: usize, r: usize, s: usize) -> usize {
    pair_index(pair_index(p as u64, q as u64), pair_index(r as u64, s as u64)) as usize
}

/// A table of h_pq and (pq|rs); the two-electron integrals are stored once per 8-fold class.
#[derive(Clone, Debug)]
pub struct DenseIntegrals {
    n: usize,
    h: Vec<f64>,
    eri: Vec<f64>,
    constant: f64,
}

impl DenseIntegrals {
    pub fn zeros(n: usize) -> DenseIntegrals {
        let pairs = n * (n + 1) / 2;
        DenseIntegrals { n, h: vec![0.0; n * n], eri: vec![0.0; pairs * (pairs + 1) / 2], constant: 0.0 }
    }

    pub fn set_h(&mut self, p: usize, q: usize, value: f64) {
        let n = self.n;
        self.h[p * n + q] = value;
        self.h[q * n + p] = value;
    }

    /// Sets (pq|rs) and its seven partners under the real 8-fold symmetry.
    pub fn set_eri(&mut self, p: usize, q: usize, r: usize, s: usize, value: f64) {
        self.eri[eri_slot(p, q, r, s)] = value;
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
        self.eri[eri_slot(p, q, r, s)]
    }
    fn constant(&self) -> f64 {
        self.constant
    }
}

/// Integrals defined by a formula anyone can reproduce, so that generated code can check itself
/// without carrying tables: the canonical index of an integral under the 8-fold symmetry is
/// hashed with splitmix64 and mapped to [-0.5, 0.5). h_pq uses key 2·pair(p,q), (pq|rs) key
/// 2·pair(pair(p,q), pair(r,s)) + 1, with pair(x,y) = max·(max+1)/2 + min.
#[derive(Clone, Copy, Debug)]
pub struct HashedIntegrals {
    pub seed: u64,
    pub orbitals: usize,
}

/// The pair index of the 8-fold symmetry: max(x,y)(max(x,y)+1)/2 + min(x,y).
pub fn pair_index(x: u64, y: u64) -> u64 {
    let (hi, lo) = if x >= y { (x, y) } else { (y, x) };
    hi * (hi + 1) / 2 + lo
}

/// splitmix64 of key ^ seed, as a float in [-0.5, 0.5).
pub fn hashed_value(key: u64, seed: u64) -> f64 {
    let mut z = (key ^ seed).wrapping_add(0x9e37_79b9_7f4a_7c15);
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 53) as f64 - 0.5
}

impl Integrals for HashedIntegrals {
    fn orbital_count(&self) -> usize {
        self.orbitals
    }
    fn h(&self, p: usize, q: usize) -> f64 {
        hashed_value(2 * pair_index(p as u64, q as u64), self.seed)
    }
    fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
        let key = pair_index(pair_index(p as u64, q as u64), pair_index(r as u64, s as u64));
        hashed_value(2 * key + 1, self.seed)
    }
    fn constant(&self) -> f64 {
        0.0
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
